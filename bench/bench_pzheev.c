/* Benchmark: ScaLAPACK eigenvalues (pzheevr via pzheev.h) on the ranks of MPI_COMM_WORLD
 * against LAPACK zheevd (eig.h) on rank 0 alone, for a Fu-Kane-Mele (111) slab Hamiltonian
 * (Phys. Rev. Lett. 98, 106803 (2007)) of n states (default 2000).
 * Both eigenvalues only (zheevd 'N' against pzheevr 'N') and eigenvalues with vectors (zheevd 'V'
 * against pzheevd, vectors gathered on rank 0) are timed.
 * Run: OPENBLAS_NUM_THREADS=1 mpirun -n 2 bench_pzheev [n] [repeats] [block]
 * (one BLAS thread per rank, so that the comparison is one core against P cores). */
#include <math.h>
#include <mpi.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/eig.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/pzheev.h"
#include "bandsieve/slab.h"

int main(int argc, char **argv)
{
    MPI_Init(&argc, &argv);
    int rank, size;
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    MPI_Comm_size(MPI_COMM_WORLD, &size);
    int n_req = argc > 1 ? atoi(argv[1]) : 2000, reps = argc > 2 ? atoi(argv[2]) : 3,
        nb = argc > 3 ? atoi(argv[3]) : 0;
    if (n_req < 4 || reps < 1) {
        if (rank == 0) fprintf(stderr, "usage: bench_pzheev [n >= 4] [repeats >= 1] [block size]\n");
        MPI_Finalize();
        return 2;
    }
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    slab *s = NULL;
    int mil[3] = {1, 1, 1};
    if (lm_build("fkm", &m, &err) || slab_create(m, mil, n_req / 4, 0.0, &s, &err)) {
        fprintf(stderr, "bench_pzheev: %s\n", err.msg);
        MPI_Abort(MPI_COMM_WORLD, 1);
    }
    int n = slab_nstates(s);
    double complex *H = malloc((size_t)n * n * sizeof *H), *A = malloc((size_t)n * n * sizeof *A);
    double *w0 = malloc((size_t)n * sizeof *w0), *w1 = malloc((size_t)n * sizeof *w1);
    double k[2] = {0.13, 0.29};
    slab_hk(s, k, H);

    double t_lapack = INFINITY, t_pz = INFINITY, tv_lapack = INFINITY, tv_pz = INFINITY;
    double complex *Z = malloc((size_t)n * n * sizeof *Z);
    if (rank == 0) {
        eig_ws *ws = NULL;
        if (eig_create(n, &ws, &err)) {
            fprintf(stderr, "%s\n", err.msg);
            MPI_Abort(MPI_COMM_WORLD, 1);
        }
        for (int r = 0; r < reps; r++) {
            memcpy(A, H, (size_t)n * n * sizeof *A);
            double t0 = MPI_Wtime();
            if (eig_values(ws, A, w0, &err)) {
                fprintf(stderr, "%s\n", err.msg);
                MPI_Abort(MPI_COMM_WORLD, 1);
            }
            t_lapack = fmin(t_lapack, MPI_Wtime() - t0);
            memcpy(A, H, (size_t)n * n * sizeof *A);
            t0 = MPI_Wtime();
            if (eig_vectors(ws, A, w0, &err)) {
                fprintf(stderr, "%s\n", err.msg);
                MPI_Abort(MPI_COMM_WORLD, 1);
            }
            tv_lapack = fmin(tv_lapack, MPI_Wtime() - t0);
        }
        eig_free(ws);
    }
    pz_ctx *pz = NULL;
    if (pz_create(MPI_COMM_WORLD, n, nb, &pz, &err)) {
        fprintf(stderr, "%s\n", err.msg);
        MPI_Abort(MPI_COMM_WORLD, 1);
    }
    for (int r = 0; r < reps; r++) {
        MPI_Barrier(MPI_COMM_WORLD);
        double t0 = MPI_Wtime();
        if (pz_values(pz, 0, H, w1, &err)) {
            fprintf(stderr, "%s\n", err.msg);
            MPI_Abort(MPI_COMM_WORLD, 1);
        }
        double dt = MPI_Wtime() - t0, dmax;
        MPI_Allreduce(&dt, &dmax, 1, MPI_DOUBLE, MPI_MAX, MPI_COMM_WORLD);
        t_pz = fmin(t_pz, dmax);
        MPI_Barrier(MPI_COMM_WORLD);
        t0 = MPI_Wtime();
        if (pz_vectors(pz, 0, H, w1, Z, &err)) {
            fprintf(stderr, "%s\n", err.msg);
            MPI_Abort(MPI_COMM_WORLD, 1);
        }
        dt = MPI_Wtime() - t0;
        MPI_Allreduce(&dt, &dmax, 1, MPI_DOUBLE, MPI_MAX, MPI_COMM_WORLD);
        tv_pz = fmin(tv_pz, dmax);
    }
    if (rank == 0) {
        double d = 0;
        for (int i = 0; i < n; i++)
            d = fmax(d, fabs(w0[i] - w1[i]));
        int pr, pc;
        pz_grid(pz, &pr, &pc);
        printf("n = %d, best of %d: LAPACK zheevd (1 rank) %.3f s, ScaLAPACK pzheevr (%d ranks, %dx%d grid, "
               "broadcast included) %.3f s, speed-up %.2f, max |dE| %.2e eV\n",
               n, reps, t_lapack, size, pr, pc, t_pz, t_lapack / t_pz, d);
        printf("n = %d, with vectors: LAPACK zheevd %.3f s, ScaLAPACK pzheevd (vectors gathered on rank 0) "
               "%.3f s, "
               "speed-up %.2f\n",
               n, tv_lapack, tv_pz, tv_lapack / tv_pz);
    }
    pz_free(pz);
    slab_free(s);
    tb_model_free(m);
    free(H);
    free(A);
    free(Z);
    free(w0);
    free(w1);
    MPI_Finalize();
    return 0;
}
