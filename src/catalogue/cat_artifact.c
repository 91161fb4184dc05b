/* Artifact files: bulky per-material arrays (Wannier-centre flows) in one HDF5 file per run
 * session, CAT.run<id>.s<session>.h5 beside the catalogue, indexed by the artifacts table.
 * A resumed run writes a new session file and never reopens the file of a killed process, so a
 * file damaged by a kill can only hold rows that were never committed. */
#include "cat_internal.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

/* Folder of the catalogue ("." for a bare name) and its base name. */
static void split_path(const char *path, char *dir, size_t dir_len, const char **base)
{
    const char *slash = strrchr(path, '/');
    if (!slash) {
        snprintf(dir, dir_len, ".");
        *base = path;
    } else {
        snprintf(dir, dir_len, "%.*s", (int)(slash - path > 0 ? slash - path : 1), path);
        *base = slash + 1;
    }
}

/* HDF5 link names cannot hold '/' and "." is special: bytes outside [A-Za-z0-9_+-.] are written
 * %XX, and a leading '.' too. */
static void encode_name(const char *id, char *out, size_t len)
{
    size_t k = 0;
    for (const unsigned char *p = (const unsigned char *)id; *p && k + 4 < len; p++) {
        int plain = (*p >= 'A' && *p <= 'Z') || (*p >= 'a' && *p <= 'z') || (*p >= '0' && *p <= '9') ||
                    *p == '_' || *p == '-' || *p == '+' || (*p == '.' && p != (const unsigned char *)id);
        if (plain)
            out[k++] = (char)*p;
        else
            k += (size_t)snprintf(out + k, len - k, "%%%02X", *p);
    }
    out[k] = '\0';
}

static int h5_fail(bs_err *err, const char *file, const char *what)
{
    return bs_fail(err, BS_EHDF5, "%s: %s failed", file, what);
}

/* The full path of the open artifact file (beside the catalogue). */
static void artifact_path(const cat_db *cat, char *out, size_t len)
{
    char dir[512];
    const char *base = NULL;
    split_path(cat->path, dir, sizeof dir, &base);
    snprintf(out, len, "%s/%s", dir, cat->h5_name);
}

/* A write to the artifact file failed (errnum: errno just after the failing call): the message
 * names the file and the cause (disk full, permissions), and the file is marked broken, so that
 * neither a flush nor a close reaches HDF5 again. A failed H5Fclose leaves the file half torn
 * down; closing it a second time (also from the library's exit handler) crashed in HDF5 1.10,
 * which is why main() disables that handler. */
static int storage_fail(cat_db *cat, int errnum, const char *what, bs_err *err)
{
    char full[1100], cause[256];
    artifact_path(cat, full, sizeof full);
    cat->h5_broken = 1;
    return bs_fail(err, BS_EHDF5, "%s: %s failed: %s", full, what,
                   cat_io_cause(full, errnum, cause, sizeof cause));
}

static int write_attr_int(hid_t loc, const char *name, long long value)
{
    hid_t space = H5Screate(H5S_SCALAR);
    hid_t attr = space >= 0 ? H5Acreate2(loc, name, H5T_NATIVE_LLONG, space, H5P_DEFAULT, H5P_DEFAULT) : -1;
    herr_t s = attr >= 0 ? H5Awrite(attr, H5T_NATIVE_LLONG, &value) : -1;
    if (attr >= 0) H5Aclose(attr);
    if (space >= 0) H5Sclose(space);
    return s < 0 ? -1 : 0;
}

/* Opens (or creates) the file of (run_id, session) as the handle's artifact file. */
static int open_file(cat_db *cat, int64_t run_id, int session, bs_err *err)
{
    if (cat->h5 >= 0 && cat->h5_run == run_id && cat->h5_session == session) return 0;
    int rc = cat_artifact_close(cat, err);
    if (rc != 0) return rc;
    char dir[512], full[1100];
    const char *base = NULL;
    split_path(cat->path, dir, sizeof dir, &base);
    snprintf(cat->h5_name, sizeof cat->h5_name, "%s.run%lld.s%d.h5", base, (long long)run_id, session);
    snprintf(full, sizeof full, "%s/%s", dir, cat->h5_name);
    /* No HDF5 file lock: each session file has a single writer by construction (the name holds
     * the run and session), and flock is missing on some cluster file systems, where a lock
     * request makes H5Fcreate fail. */
    hid_t f = H5I_INVALID_HID, fapl = H5I_INVALID_HID;
    H5E_BEGIN_TRY
    {
        fapl = H5Pcreate(H5P_FILE_ACCESS);
        if (fapl >= 0) H5Pset_file_locking(fapl, 0, 1);
        hid_t access = fapl >= 0 ? fapl : H5P_DEFAULT;
        f = H5Fcreate(full, H5F_ACC_EXCL, H5P_DEFAULT, access);
        if (f < 0)
            f = H5Fopen(full, H5F_ACC_RDWR, access); /* this session wrote it before */
        else if (write_attr_int(f, "run_id", run_id) != 0 || write_attr_int(f, "session", session) != 0) {
            H5Fclose(f);
            f = H5I_INVALID_HID;
        }
        if (fapl >= 0) H5Pclose(fapl);
    }
    H5E_END_TRY;
    if (f < 0) {
        char cause[256];
        int errnum = errno;
        return bs_fail(err, BS_EHDF5, "%s: cannot create or open the artifact file: %s", full,
                       cat_io_cause(full, errnum, cause, sizeof cause));
    }
    cat->h5 = f;
    cat->h5_broken = 0;
    cat->h5_dirty = 1;
    cat->h5_run = run_id;
    cat->h5_session = session;
    return cat_session_set_file(cat, run_id, session, cat->h5_name, err);
}

static int write_dataset(hid_t group, const char *name, int rank, const hsize_t *dims, const double *data)
{
    int rc = -1;
    H5E_BEGIN_TRY
    {
        hid_t space = H5Screate_simple(rank, dims, NULL);
        hid_t set =
            space >= 0 ? H5Dcreate2(group, name, H5T_IEEE_F64LE, space, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT)
                       : -1;
        if (set >= 0 && H5Dwrite(set, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, data) >= 0) rc = 0;
        if (set >= 0) H5Dclose(set);
        if (space >= 0) H5Sclose(space);
    }
    H5E_END_TRY;
    return rc;
}

int cat_artifact_write(cat_db *cat, int64_t run_id, int session, const char *material_id, const res_flow *f,
                       char *file, size_t file_len, char *h5path, size_t h5path_len, bs_err *err)
{
    int rc = open_file(cat, run_id, session, err);
    if (rc == 0 && cat->h5_broken)
        rc = bs_fail(err, BS_EHDF5, "%s: an earlier write to this artifact file failed", cat->h5_name);
    /* Injected by a test: this material's write fails as on a full disk. */
    if (rc == 0 && bs_fault_hit("BS_FAULT_ARTIFACT_WRITE", material_id))
        rc = storage_fail(cat, ENOSPC, "writing the flow datasets (injected fault)", err);
    if (rc != 0) return rc;
    char enc[400];
    encode_name(material_id, enc, sizeof enc);
    snprintf(h5path, h5path_len, "/%s/wcc_plane%d", enc, f->plane);
    snprintf(file, file_len, "%s", cat->h5_name);
    hid_t lcpl = H5I_INVALID_HID, group = H5I_INVALID_HID;
    H5E_BEGIN_TRY
    {
        if (H5Lexists(cat->h5, h5path, H5P_DEFAULT) > 0)
            H5Ldelete(cat->h5, h5path, H5P_DEFAULT); /* replaced result */
        lcpl = H5Pcreate(H5P_LINK_CREATE);
        if (lcpl >= 0 && H5Pset_create_intermediate_group(lcpl, 1) >= 0)
            group = H5Gcreate2(cat->h5, h5path, lcpl, H5P_DEFAULT, H5P_DEFAULT);
    }
    H5E_END_TRY;
    /* H5Lexists on "/a/b" fails quietly when "/a" is missing; that is the fresh case. */
    if (group < 0) rc = storage_fail(cat, errno, "creating the flow group", err);
    const hsize_t d1[1] = {(hsize_t)f->nstring}, d2[2] = {(hsize_t)f->nstring, (hsize_t)f->nband};
    if (rc == 0 && (write_dataset(group, "kpar", 1, d1, f->kpar) != 0 ||
                    write_dataset(group, "wcc", 2, d2, f->wcc) != 0))
        rc = storage_fail(cat, errno, "writing the flow datasets", err);
    int attr_rc = 0;
    H5E_BEGIN_TRY
    {
        if (rc == 0) attr_rc = write_attr_int(group, "plane", f->plane);
        if (group >= 0) H5Gclose(group);
        if (lcpl >= 0) H5Pclose(lcpl);
    }
    H5E_END_TRY;
    if (rc == 0 && attr_rc != 0) rc = storage_fail(cat, errno, "writing the plane attribute", err);
    cat->h5_dirty = 1;
    if (rc != 0) bs_err_context(err, "material %s: ", material_id);
    return rc;
}

int cat_artifact_flush(cat_db *cat, bs_err *err)
{
    if (cat->h5 < 0) return 0;
    if (cat->h5_broken)
        return bs_fail(err, BS_EHDF5, "%s: an earlier write to this artifact file failed", cat->h5_name);
    if (!cat->h5_dirty) return 0; /* most batches carry no flows */
    herr_t s;
    errno = 0;
    H5E_BEGIN_TRY
    {
        s = H5Fflush(cat->h5, H5F_SCOPE_GLOBAL);
    }
    H5E_END_TRY;
    if (s < 0) return storage_fail(cat, errno, "flushing the artifact file", err);
    cat->h5_dirty = 0;
    return 0;
}

int cat_artifact_close(cat_db *cat, bs_err *err)
{
    if (cat->h5 < 0) return 0;
    herr_t s = -1;
    int broken = cat->h5_broken, errnum = 0;
    /* A broken file is dropped, not closed: its close would try the failed writes again and
     * leave the handle half freed (one descriptor stays open until the process ends). */
    if (!broken) {
        errno = 0;
        H5E_BEGIN_TRY
        {
            s = H5Fclose(cat->h5);
        }
        H5E_END_TRY;
        errnum = errno;
    }
    int rc = 0;
    if (broken)
        rc = bs_fail(err, BS_EHDF5, "%s: an earlier write to this artifact file failed", cat->h5_name);
    else if (s < 0)
        rc = storage_fail(cat, errnum, "closing the artifact file", err);
    cat->h5 = H5I_INVALID_HID;
    cat->h5_broken = 0;
    cat->h5_run = 0;
    cat->h5_session = 0;
    return rc;
}

void cat_flow_clear(cat_flow *f)
{
    if (!f) return;
    free(f->kpar);
    free(f->wcc);
    memset(f, 0, sizeof *f);
}

/* Locates the artifact row of (run, material, plane). */
static int find_flow(cat_db *cat, int64_t run_id, const char *material_id, int plane, char *file,
                     size_t file_len, char *h5path, size_t h5path_len, int *nstring, int *nband, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(cat->db,
                           "SELECT file, h5path, nstring, nband FROM artifacts WHERE run_id = ? AND"
                           " material_id = ? AND kind = 'wcc_flow' AND plane = ?",
                           -1, &st, NULL) != SQLITE_OK)
        return cat_sql_fail(cat, err, "looking up an artifact");
    sqlite3_bind_int64(st, 1, run_id);
    sqlite3_bind_text(st, 2, material_id, -1, SQLITE_TRANSIENT);
    sqlite3_bind_int(st, 3, plane);
    int s = sqlite3_step(st), rc = 0;
    if (s == SQLITE_ROW) {
        snprintf(file, file_len, "%s", (const char *)sqlite3_column_text(st, 0));
        snprintf(h5path, h5path_len, "%s", (const char *)sqlite3_column_text(st, 1));
        *nstring = sqlite3_column_int(st, 2);
        *nband = sqlite3_column_int(st, 3);
    } else if (s == SQLITE_DONE) {
        rc = bs_fail(err, BS_EINVAL, "%s: no Wannier-centre flow of plane %d for material %s in run %lld",
                     cat->path, plane, material_id, (long long)run_id);
    } else {
        rc = cat_sql_fail(cat, err, "looking up an artifact");
    }
    sqlite3_finalize(st);
    return rc;
}

static int read_dataset(hid_t file, const char *path, hsize_t expect, double *out)
{
    int rc = -1;
    H5E_BEGIN_TRY
    {
        hid_t set = H5Dopen2(file, path, H5P_DEFAULT);
        hid_t space = set >= 0 ? H5Dget_space(set) : -1;
        hssize_t n = space >= 0 ? H5Sget_simple_extent_npoints(space) : -1;
        if (n >= 0 && (hsize_t)n == expect &&
            H5Dread(set, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, out) >= 0)
            rc = 0;
        if (space >= 0) H5Sclose(space);
        if (set >= 0) H5Dclose(set);
    }
    H5E_END_TRY;
    return rc;
}

int cat_flow_read(cat_db *cat, int64_t run_id, const char *material_id, int plane, cat_flow *out, bs_err *err)
{
    memset(out, 0, sizeof *out);
    char file[512], h5path[512], dir[512], full[1100], path[600];
    int nstring = 0, nband = 0;
    int rc = find_flow(cat, run_id, material_id, plane, file, sizeof file, h5path, sizeof h5path, &nstring,
                       &nband, err);
    if (rc != 0) return rc;
    if (nstring < 1 || nband < 1)
        return bs_fail(err, BS_EINVAL, "%s: artifact %s has %d strings and %d bands", cat->path, h5path,
                       nstring, nband);
    const char *base = NULL;
    split_path(cat->path, dir, sizeof dir, &base);
    snprintf(full, sizeof full, "%s/%s", dir, file);
    int own = !(cat->h5 >= 0 && strcmp(cat->h5_name, file) == 0);
    hid_t f = cat->h5;
    if (own) {
        /* Without locking, a reader can look at a file the coordinator is still writing; what
         * it sees was flushed at the last commit. */
        hid_t fapl = H5Pcreate(H5P_FILE_ACCESS);
        H5E_BEGIN_TRY
        {
            if (fapl >= 0) H5Pset_file_locking(fapl, 0, 1);
            f = H5Fopen(full, H5F_ACC_RDONLY, fapl >= 0 ? fapl : H5P_DEFAULT);
        }
        H5E_END_TRY;
        if (fapl >= 0) H5Pclose(fapl);
        if (f < 0) return bs_fail(err, BS_EHDF5, "%s: cannot open the artifact file", full);
    }
    out->plane = plane;
    out->nstring = nstring;
    out->nband = nband;
    out->kpar = malloc((size_t)nstring * sizeof *out->kpar);
    out->wcc = malloc((size_t)nstring * (size_t)nband * sizeof *out->wcc);
    if (!out->kpar || !out->wcc) rc = bs_fail(err, BS_ENOMEM, "reading a flow: out of memory");
    snprintf(path, sizeof path, "%s/kpar", h5path);
    if (rc == 0 && read_dataset(f, path, (hsize_t)nstring, out->kpar) != 0) rc = h5_fail(err, full, path);
    snprintf(path, sizeof path, "%s/wcc", h5path);
    if (rc == 0 && read_dataset(f, path, (hsize_t)nstring * (hsize_t)nband, out->wcc) != 0)
        rc = h5_fail(err, full, path);
    if (own) H5Fclose(f);
    if (rc != 0) cat_flow_clear(out);
    return rc;
}
