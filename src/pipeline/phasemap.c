/* Phase maps over MPI ranks: rows dealt round-robin, each a phase path over x at fixed y
 * (pp_map_row), gathered on rank 0 and written as HDF5 arrays. */
#include "bandsieve/phasemap.h"

#include <math.h>
#include <mpi.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <hdf5.h>

static const char *const PM_KINDS[5] = {"band inversion", "gap closing", "Weyl phase", "nodal line", "metal"};

const char *pm_kind_name(int code)
{
    return code >= 0 && code < 5 ? PM_KINDS[code] : "?";
}

static int kind_code(const char *kind)
{
    for (int i = 0; i < 5; i++)
        if (strcmp(kind, PM_KINDS[i]) == 0) return i;
    return 4;
}

void pm_map_free(pm_map *m)
{
    if (!m) return;
    free(m->x);
    free(m->y);
    free(m->cls);
    free(m->gap);
    free(m->nclosing);
    free(m->closings);
    free(m);
}

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return ts.tv_sec + 1e-9 * ts.tv_nsec;
}

static int mpi_fail(int code, const char *what, bs_err *err)
{
    if (code == MPI_SUCCESS) return 0;
    char text[MPI_MAX_ERROR_STRING];
    int len = 0;
    MPI_Error_string(code, text, &len);
    return bs_fail(err, BS_EMPI, "%s: %s", what, text);
}

/* One row into buf: [rc, nclosing, cls[nx], gap[nx], closings[PM_MAX_CLOSINGS * 5]]. */
static int row_len(int nx)
{
    return 2 + 2 * nx + PM_MAX_CLOSINGS * 5;
}

static void compute_row(const pm_spec *s, int j, double *buf, bs_err *err)
{
    int nx = s->nx;
    memset(buf, 0, (size_t)row_len(nx) * sizeof *buf);
    double y = s->ny > 1 ? s->y_lo + (s->y_hi - s->y_lo) * j / (s->ny - 1) : s->y_lo;
    char spec[700];
    snprintf(spec, sizeof spec, "%s%c%s=%.17g", s->spec, strchr(s->spec, ':') ? ',' : ':', s->ykey, y);
    pp_source *src = NULL;
    pp_result r;
    pp_result_init(&r);
    int *cls = malloc((size_t)nx * sizeof *cls);
    int rc = cls ? pp_source_builtin(spec, s->xkey, &src, err) : bs_fail(err, BS_ENOMEM, "out of memory");
    if (rc == 0) rc = pp_map_row(src, s->xkey, s->x_lo, s->x_hi, nx, &s->opts, cls, buf + 2 + nx, &r, err);
    if (rc == 0) {
        for (int i = 0; i < nx; i++)
            buf[2 + i] = cls[i];
        int nc = r.nclosing < PM_MAX_CLOSINGS ? r.nclosing : PM_MAX_CLOSINGS;
        buf[1] = nc;
        double *c = buf + 2 + 2 * nx;
        for (int k = 0; k < nc; k++) {
            const pp_closing *pc = &r.closings[k];
            c[5 * k] = pc->x_lo;
            c[5 * k + 1] = pc->x_hi;
            c[5 * k + 2] = pc->x;
            c[5 * k + 3] = pc->point;
            c[5 * k + 4] = kind_code(pc->kind);
        }
    }
    buf[0] = rc;
    free(cls);
    pp_result_clear(&r);
    pp_source_free(src);
}

static int store_row(pm_map *m, int j, const double *buf, int nx)
{
    for (int i = 0; i < nx; i++) {
        m->cls[(size_t)j * nx + i] = (int)buf[2 + i];
        m->gap[(size_t)j * nx + i] = buf[2 + nx + i];
    }
    m->nclosing[j] = (int)buf[1];
    memcpy(m->closings + (size_t)j * PM_MAX_CLOSINGS * 5, buf + 2 + 2 * nx,
           PM_MAX_CLOSINGS * 5 * sizeof *buf);
    return (int)buf[0];
}

int pm_run(int *argc, char ***argv, const pm_spec *s, pm_map **out, int *is_root, bs_err *err)
{
    *out = NULL;
    *is_root = 1;
    int rc = mpi_fail(MPI_Init(argc, argv), "MPI_Init", err);
    if (rc != 0) return rc;
    MPI_Comm comm = MPI_COMM_WORLD;
    MPI_Comm_set_errhandler(comm, MPI_ERRORS_RETURN);
    int rank = 0, size = 1;
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &size);
    *is_root = rank == 0;
    double t0 = now();
    int nx = s->nx, ny = s->ny, len = row_len(nx);
    double *buf = malloc((size_t)len * sizeof *buf);
    pm_map *m = NULL;
    if (!buf) rc = bs_fail(err, BS_ENOMEM, "phase map: out of memory");
    if (rc == 0 && rank == 0) {
        m = calloc(1, sizeof *m);
        if (m) {
            m->nx = nx;
            m->ny = ny;
            m->x = malloc((size_t)nx * sizeof *m->x);
            m->y = malloc((size_t)ny * sizeof *m->y);
            m->cls = malloc((size_t)nx * ny * sizeof *m->cls);
            m->gap = malloc((size_t)nx * ny * sizeof *m->gap);
            m->nclosing = calloc((size_t)ny, sizeof *m->nclosing);
            m->closings = calloc((size_t)ny * PM_MAX_CLOSINGS * 5, sizeof *m->closings);
        }
        if (!m || !m->x || !m->y || !m->cls || !m->gap || !m->nclosing || !m->closings)
            rc = bs_fail(err, BS_ENOMEM, "phase map: out of memory for %d x %d points", nx, ny);
        for (int i = 0; rc == 0 && i < nx; i++)
            m->x[i] = s->x_lo + (s->x_hi - s->x_lo) * i / (nx - 1);
        for (int j = 0; rc == 0 && j < ny; j++)
            m->y[j] = ny > 1 ? s->y_lo + (s->y_hi - s->y_lo) * j / (ny - 1) : s->y_lo;
    }
    /* every rank computes its rows (j = rank, rank + size, ...); the others send theirs to rank 0 */
    int row_failed = 0;
    bs_err row_err;
    bs_err_clear(&row_err);
    for (int j = rank; j < ny && buf; j += size) {
        bs_err e;
        bs_err_clear(&e);
        compute_row(s, j, buf, &e);
        if (buf[0] != 0 && !row_failed) {
            row_failed = 1;
            row_err = e;
        }
        if (rank == 0) {
            if (rc == 0) store_row(m, j, buf, nx);
        } else {
            int src = mpi_fail(MPI_Send(buf, len, MPI_DOUBLE, 0, j, comm), "MPI_Send", err);
            if (rc == 0) rc = src;
        }
    }
    if (rank == 0 && buf) {
        for (int j = 0; j < ny; j++) {
            if (j % size == 0) continue;
            int mrc = mpi_fail(MPI_Recv(buf, len, MPI_DOUBLE, j % size, j, comm, MPI_STATUS_IGNORE),
                               "MPI_Recv", err);
            if (mrc != 0) {
                if (rc == 0) rc = mrc;
                break;
            }
            if (rc == 0 && store_row(m, j, buf, nx) != 0 && !row_failed) {
                row_failed = 1;
                bs_fail(&row_err, (int)buf[0], "row %d (%s = %g) failed on rank %d", j, s->ykey, m->y[j],
                        j % size);
            }
        }
    }
    if (rc == 0 && row_failed) {
        *err = row_err;
        rc = row_err.code ? row_err.code : BS_ENUMERIC;
    }
    free(buf);
    if (rank == 0 && m) {
        m->seconds = now() - t0;
        m->ranks = size;
    }
    if (rank == 0 && rc == 0)
        *out = m;
    else
        pm_map_free(m);
    MPI_Finalize();
    return rc;
}

static int write_ds(hid_t f, const char *name, hid_t type, int rank, const hsize_t *dims, const void *data)
{
    hid_t sp = H5Screate_simple(rank, dims, NULL);
    hid_t d = sp < 0 ? -1 : H5Dcreate2(f, name, type, sp, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    int ok = d >= 0 && H5Dwrite(d, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, data) >= 0;
    if (d >= 0) H5Dclose(d);
    if (sp >= 0) H5Sclose(sp);
    return ok ? 0 : -1;
}

static int write_str_attr(hid_t loc, const char *name, const char *v)
{
    hid_t t = H5Tcopy(H5T_C_S1);
    H5Tset_size(t, strlen(v) + 1);
    H5Tset_strpad(t, H5T_STR_NULLTERM);
    hid_t sp = H5Screate(H5S_SCALAR);
    hid_t a = H5Acreate2(loc, name, t, sp, H5P_DEFAULT, H5P_DEFAULT);
    int ok = a >= 0 && H5Awrite(a, t, v) >= 0;
    if (a >= 0) H5Aclose(a);
    H5Sclose(sp);
    H5Tclose(t);
    return ok ? 0 : -1;
}

/* Fixed-length strings of width w, one per row. */
static int write_names(hid_t f, const char *ds, const char *(*name)(int), int n, int w)
{
    char *buf = calloc((size_t)n, (size_t)w);
    if (!buf) return -1;
    for (int i = 0; i < n; i++)
        snprintf(buf + (size_t)i * w, (size_t)w, "%s", name(i));
    hid_t t = H5Tcopy(H5T_C_S1);
    H5Tset_size(t, (size_t)w);
    H5Tset_strpad(t, H5T_STR_NULLTERM);
    hsize_t dims[1] = {(hsize_t)n};
    int rc = write_ds(f, ds, t, 1, dims, buf);
    H5Tclose(t);
    free(buf);
    return rc;
}

int pm_write_h5(const pm_map *m, const pm_spec *s, const char *path, bs_err *err)
{
    hid_t f = -1;
    int bad = 0;
    H5E_BEGIN_TRY
    {
        f = H5Fcreate(path, H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
        if (f >= 0) {
            hsize_t dx[1] = {(hsize_t)m->nx}, dy[1] = {(hsize_t)m->ny},
                    dg[2] = {(hsize_t)m->ny, (hsize_t)m->nx};
            hsize_t dc[3] = {(hsize_t)m->ny, PM_MAX_CLOSINGS, 5};
            bad = write_str_attr(f, "format", "bandsieve-phase-map") < 0 ||
                  write_str_attr(f, "model", s->spec) < 0 || write_str_attr(f, "x_parameter", s->xkey) < 0 ||
                  write_str_attr(f, "y_parameter", s->ykey) < 0 ||
                  write_ds(f, "x", H5T_NATIVE_DOUBLE, 1, dx, m->x) < 0 ||
                  write_ds(f, "y", H5T_NATIVE_DOUBLE, 1, dy, m->y) < 0 ||
                  write_ds(f, "class", H5T_NATIVE_INT, 2, dg, m->cls) < 0 ||
                  write_ds(f, "gap_direct_eV", H5T_NATIVE_DOUBLE, 2, dg, m->gap) < 0 ||
                  write_ds(f, "closing_count", H5T_NATIVE_INT, 1, dy, m->nclosing) < 0 ||
                  write_ds(f, "closings", H5T_NATIVE_DOUBLE, 3, dc, m->closings) < 0 ||
                  write_names(f, "class_names", pp_class_name, PP_NCLASS, 40) < 0 ||
                  write_names(f, "closing_kinds", pm_kind_name, 5, 24) < 0;
            if (H5Fclose(f) < 0) bad = 1;
        }
    }
    H5E_END_TRY;
    if (f < 0) return bs_fail(err, BS_EHDF5, "%s: cannot create the phase-map file", path);
    if (bad) return bs_fail(err, BS_EHDF5, "%s: cannot write the phase map", path);
    return 0;
}
