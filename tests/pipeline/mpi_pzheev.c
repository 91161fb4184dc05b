/* ScaLAPACK wrapper against LAPACK, run under mpirun at 2 and 4 ranks (tests/scripts/pipeline_pzheev.cmake).
 * Plain C (cmocka does not know about ranks): each check prints and the exit status is the number
 * of failed checks on this rank, reduced over the communicator. */
#include <math.h>
#include <mpi.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/eig.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/pzheev.h"
#include "bandsieve/slab.h"

static int nfail, rank;

static void check(int ok, const char *what, double value, double limit)
{
    if (!ok) nfail++;
    if (rank == 0 || !ok)
        printf("[rank %d] %s: %s (%.3g, limit %.3g)\n", rank, ok ? "ok" : "FAIL", what, value, limit);
}

/* Fu-Kane-Mele slab (Phys. Rev. Lett. 98, 106803 (2007)) on (111), 4 states per cell, at a
 * generic in-plane k: a dense-enough Hermitian matrix with surface states in the middle. */
static double complex *fkm_slab_matrix(int nlayers, int *n)
{
    tb_model *m = NULL;
    slab *s = NULL;
    bs_err err;
    bs_err_clear(&err);
    int mil[3] = {1, 1, 1};
    if (lm_build("fkm", &m, &err) || slab_create(m, mil, nlayers, 0.0, &s, &err)) {
        printf("setup: %s\n", err.msg);
        exit(2);
    }
    *n = slab_nstates(s);
    double complex *H = malloc((size_t)*n * *n * sizeof *H);
    double k[2] = {0.13, 0.29};
    slab_hk(s, k, H);
    slab_free(s);
    tb_model_free(m);
    return H;
}

static double max_abs_diff_rel(int n, const double *a, const double *b)
{
    double d = 0, scale = 0;
    for (int i = 0; i < n; i++) {
        d = fmax(d, fabs(a[i] - b[i]));
        scale = fmax(scale, fabs(b[i]));
    }
    return d / scale;
}

/* max_j |H z_j - w_j z_j| over the ncol columns of Z. */
static double residual(int n, const double complex *H, int ncol, const double *w, const double complex *Z)
{
    double r = 0;
    for (int j = 0; j < ncol; j++)
        for (int i = 0; i < n; i++) {
            double complex s = -w[j] * Z[i + (size_t)j * n];
            for (int l = 0; l < n; l++)
                s += H[i + (size_t)l * n] * Z[l + (size_t)j * n];
            r = fmax(r, cabs(s));
        }
    return r;
}

int main(int argc, char **argv)
{
    MPI_Init(&argc, &argv);
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    int size;
    MPI_Comm_size(MPI_COMM_WORLD, &size);
    bs_err err;
    bs_err_clear(&err);
    int n;
    double complex *H = fkm_slab_matrix(500, &n); /* 2000 states */
    double complex *A = malloc((size_t)n * n * sizeof *A);
    double *w_ref = malloc((size_t)n * sizeof *w_ref), *w = malloc((size_t)n * sizeof *w);

    /* Reference: LAPACK zheevd (eig.h) on one rank, broadcast. */
    if (rank == 0) {
        eig_ws *ws = NULL;
        memcpy(A, H, (size_t)n * n * sizeof *A);
        if (eig_create(n, &ws, &err) || eig_values(ws, A, w_ref, &err)) {
            printf("lapack: %s\n", err.msg);
            MPI_Abort(MPI_COMM_WORLD, 2);
        }
        eig_free(ws);
    }
    MPI_Bcast(w_ref, n, MPI_DOUBLE, 0, MPI_COMM_WORLD);

    pz_ctx *pz = NULL;
    int rc = pz_create(MPI_COMM_WORLD, n, 0, &pz, &err);
    check(rc == 0, "pz_create", rc, 0);
    if (rc != 0) {
        printf("%s\n", err.msg);
        MPI_Abort(MPI_COMM_WORLD, 2);
    }
    int pr, pc;
    pz_grid(pz, &pr, &pc);
    check(pr * pc == size && pr <= pc, "grid covers every rank", pr * pc, size);

    /* All eigenvalues with the matrix on rank 0 only (the others pass NULL). Reference LAPACK;
     * tolerance 1e-10 relative to the spectral radius: both solvers are backward stable with
     * errors ~ n eps ||H|| ~ 5e-13 ||H|| at n = 2000 (common practice). */
    rc = pz_values(pz, 0, rank == 0 ? H : NULL, w, &err);
    check(rc == 0, "pz_values (root 0)", rc, 0);
    double d = max_abs_diff_rel(n, w, w_ref);
    check(rc == 0 && d < 1e-10, "pz_values vs LAPACK, relative", d, 1e-10);

    /* Twenty states around mid-spectrum (the surface states of the slab), matrix and vectors on
     * every rank:
     * values against LAPACK as above, and the eigen-equation residual below 1e-9 eV
     * (||H|| ~ 5 eV, backward error ~ n eps ||H|| ~ 2e-12 eV; common practice). */
    int il = n / 2 - 10, iu = n / 2 + 9, nc = iu - il + 1;
    double complex *Z = malloc((size_t)n * nc * sizeof *Z);
    rc = pz_range(pz, PZ_ALL, H, il, iu, w, Z, &err);
    check(rc == 0, "pz_range with vectors", rc, 0);
    d = max_abs_diff_rel(nc, w, w_ref + il);
    check(rc == 0 && d < 1e-10, "pz_range values vs LAPACK, relative", d, 1e-10);
    if (rc == 0) {
        double r = residual(n, H, nc, w, Z);
        check(r < 1e-9, "pz_range residual |Hz - wz| (eV)", r, 1e-9);
    }

    /* Bad input: an inverted range is refused with BS_EINVAL on every rank. */
    rc = pz_range(pz, 0, H, 5, 4, w, NULL, &err);
    check(rc == BS_EINVAL && strstr(err.msg, "range 5..4") != NULL, "inverted range refused", rc, BS_EINVAL);
    bs_err_clear(&err);
    pz_free(pz);

    /* Full eigenvectors (pzheevd) on a smaller slab, n = 400: residual as above. */
    double complex *Hs = fkm_slab_matrix(100, &n);
    pz_ctx *small = NULL;
    double complex *Zs = malloc((size_t)n * n * sizeof *Zs);
    rc = pz_create(MPI_COMM_WORLD, n, 32, &small, &err);
    if (rc == 0) rc = pz_vectors(small, PZ_ALL, Hs, w, Zs, &err);
    check(rc == 0, "pz_vectors n = 400", rc, 0);
    if (rc == 0) {
        double r = residual(n, Hs, n, w, Zs);
        check(r < 1e-9, "pz_vectors residual |Hz - wz| (eV)", r, 1e-9);
    } else
        printf("%s\n", err.msg);
    pz_free(small);

    /* Dispatcher on the n = 400 slab: distributes above a threshold of 300 and stays on LAPACK
     * below 1000; both agree with LAPACK zheevd (eig.h) to 1e-10 relative as above. */
    double *ws_ref = malloc((size_t)n * sizeof *ws_ref);
    {
        eig_ws *ws = NULL;
        memcpy(A, Hs, (size_t)n * n * sizeof *A);
        if (eig_create(n, &ws, &err) || eig_values(ws, A, ws_ref, &err)) {
            printf("lapack: %s\n", err.msg);
            MPI_Abort(MPI_COMM_WORLD, 2);
        }
        eig_free(ws);
    }
    pz_auto *au = NULL;
    rc = pz_auto_create(MPI_COMM_WORLD, n, 300, &au, &err);
    check(rc == 0 && pz_auto_distributed(au) == (size > 1), "dispatcher distributes above the threshold", rc,
          0);
    rc = pz_auto_values(au, 0, rank == 0 ? Hs : NULL, w, &err);
    d = max_abs_diff_rel(n, w, ws_ref);
    check(rc == 0 && d < 1e-10, "dispatcher (ScaLAPACK) values vs LAPACK, relative", d, 1e-10);
    pz_auto_free(au);
    rc = pz_auto_create(MPI_COMM_WORLD, n, 1000, &au, &err);
    check(rc == 0 && !pz_auto_distributed(au), "dispatcher keeps LAPACK below the threshold", rc, 0);
    rc = pz_auto_range(au, 0, rank == 0 ? Hs : NULL, 0, 9, w, NULL, &err);
    d = max_abs_diff_rel(10, w, ws_ref);
    check(rc == 0 && d < 1e-10, "dispatcher (LAPACK) lowest 10 on every rank, relative", d, 1e-10);
    pz_auto_free(au);
    free(ws_ref);

    int total = 0;
    MPI_Allreduce(&nfail, &total, 1, MPI_INT, MPI_SUM, MPI_COMM_WORLD);
    if (rank == 0) printf("%d ranks: %d failed checks\n", size, total);
    free(H);
    free(Hs);
    free(A);
    free(Z);
    free(Zs);
    free(w);
    free(w_ref);
    MPI_Finalize();
    return total ? 1 : 0;
}
