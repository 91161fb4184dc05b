/* Benchmark (not a test): cost per k-point of building H(k) and diagonalising, divided by the bare
 * LAPACK diagonalisation, for random Hermitian models with n = 16, 64, 256 states and N_R = 1001
 * lattice vectors (R = 0 and 500 pairs +-R), in one run so the ratios share the machine's state.
 * Single-threaded BLAS, as each MPI rank runs. Usage: bench_hk [n ...] */
#include <complex.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "bandsieve/eig.h"
#include "bandsieve/hk.h"

void openblas_set_num_threads(int num_threads) __attribute__((weak)); /* OpenBLAS only */

static double now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return t.tv_sec + 1e-9 * t.tv_nsec;
}

static double uniform(uint64_t *s)
{
    uint64_t z = (*s += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    z ^= z >> 31;
    return (z >> 11) * (1.0 / 9007199254740992.0);
}

static int cmp_norm(const void *a, const void *b)
{
    const int *x = a, *y = b;
    int nx = x[0] * x[0] + x[1] * x[1] + x[2] * x[2], ny = y[0] * y[0] + y[1] * y[1] + y[2] * y[2];
    return (nx > ny) - (nx < ny);
}

/* R = 0 plus the npairs shortest half-space vectors and their negatives; hoppings decay with |R|. */
static tb_model *make_model(int norb, int npairs, uint64_t seed)
{
    int box = 8, cap = 0;
    int(*half)[3] = malloc((size_t)(2 * box + 1) * (2 * box + 1) * (2 * box + 1) * sizeof *half);
    for (int a = -box; a <= box; a++)
        for (int b = -box; b <= box; b++)
            for (int c = -box; c <= box; c++)
                if (a > 0 || (a == 0 && (b > 0 || (b == 0 && c > 0)))) {
                    half[cap][0] = a;
                    half[cap][1] = b;
                    half[cap][2] = c;
                    cap++;
                }
    qsort(half, cap, sizeof *half, cmp_norm);
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (tb_model_create(norb, 1 + 2 * npairs, 0, &m, &err) != 0) {
        fprintf(stderr, "%s\n", err.msg);
        exit(1);
    }
    size_t nn = (size_t)norb * norb;
    for (int i = 0; i < norb; i++)
        for (int j = i; j < norb; j++) {
            double complex v = uniform(&seed) - 0.5 + (i == j ? 0 : I * (uniform(&seed) - 0.5));
            m->H[(size_t)i * norb + j] = v;
            m->H[(size_t)j * norb + i] = conj(v);
        }
    for (int p = 0; p < npairs; p++) {
        int r = 1 + 2 * p, rm = r + 1;
        for (int d = 0; d < 3; d++) {
            m->R[r][d] = half[p][d];
            m->R[rm][d] = -half[p][d];
        }
        double scale =
            exp(-0.3 * sqrt(half[p][0] * half[p][0] + half[p][1] * half[p][1] + half[p][2] * half[p][2]));
        for (size_t q = 0; q < nn; q++) {
            double complex v = scale * ((uniform(&seed) - 0.5) + I * (uniform(&seed) - 0.5));
            size_t i = q / norb, j = q % norb;
            m->H[r * nn + q] = v;
            m->H[rm * nn + j * norb + i] = conj(v);
        }
    }
    free(half);
    return m;
}

/* Diagonalises the nb matrices of H (copied into A first) and returns the seconds taken. */
static double time_diag(eig_ws *ws, const double complex *H, int nb, int norb, double complex *A, double *w)
{
    size_t nn = (size_t)norb * norb;
    bs_err err;
    bs_err_clear(&err);
    double t0 = now();
    for (int j = 0; j < nb; j++) {
        memcpy(A, H + j * nn, nn * sizeof *A);
        eig_vectors(ws, A, w, &err);
    }
    return now() - t0;
}

/* Each mode builds batches of k-points and diagonalises exactly the matrices it built, so the
 * ratio (build + diagonalise) / diagonalise compares like with like (divide-and-conquer cost
 * depends a little on the spectrum). Modes: random k (one DGEMM per batch), strings of `batch`
 * points sharing a plane (a Wilson-loop family, through the line cache), strings each on its own
 * plane (worst case for the cache), and the direct complex sum over R. Best of three rounds. */
static void bench(int norb, int nk)
{
    const int npairs = 500, batch = 32;
    tb_model *m = make_model(norb, npairs, 2024);
    bs_err err;
    bs_err_clear(&err);
    hk_engine *hk = NULL;
    eig_ws *ws = NULL;
    hk_lines *lines = NULL;
    if (hk_create(m, batch, &hk, &err) || eig_create(norb, &ws, &err) || hk_lines_create(hk, &lines, &err)) {
        fprintf(stderr, "%s\n", err.msg);
        exit(1);
    }
    size_t nn = (size_t)norb * norb;
    double complex *H = malloc(batch * nn * sizeof *H), *A = malloc(nn * sizeof *A);
    double *w = malloc(norb * sizeof *w), *k = malloc(3 * (size_t)batch * sizeof *k);
    int nbatch = nk / batch;
    double build[4] = {1e30, 1e30, 1e30, 1e30}, diag[4] = {1e30, 1e30, 1e30, 1e30};
    uint64_t seed = 7;
    for (int round = 0; round < 3; round++)
        for (int mode = 0; mode < 4; mode++) {
            double tb = 0, td = 0;
            int nb_mode = mode == 3 ? (nbatch < 2 ? nbatch : 2) : nbatch;
            for (int b = 0; b < nb_mode; b++) {
                double u = uniform(&seed), v = uniform(&seed);
                for (int j = 0; j < batch; j++) {
                    double t = (double)j / batch;
                    if (mode == 0 || mode == 3)
                        for (int d = 0; d < 3; d++)
                            k[3 * j + d] = uniform(&seed);
                    else if (mode == 1) {
                        k[3 * j] = (double)b / nbatch;
                        k[3 * j + 1] = t;
                        k[3 * j + 2] = 0.25;
                    } else {
                        k[3 * j] = u;
                        k[3 * j + 1] = t;
                        k[3 * j + 2] = v;
                    }
                }
                double t0 = now();
                if (mode == 0)
                    hk_build(hk, batch, k, H, &err);
                else if (mode == 3)
                    for (int j = 0; j < batch; j++)
                        hk_build_direct(m, k + 3 * j, H + j * nn);
                else
                    hk_lines_build(lines, batch, k, H, &err);
                tb += now() - t0;
                td += time_diag(ws, H, batch, norb, A, w);
            }
            int npts = nb_mode * batch;
            if (tb / npts < build[mode]) build[mode] = tb / npts;
            if (td / npts < diag[mode]) diag[mode] = td / npts;
        }
    printf("n = %3d  N_R = %d  diag %8.1f us/k | (H(k) + diag) / diag: random k %.2f, strings on one plane "
           "%.2f, strings each on its own plane %.2f, direct sum %.2f\n",
           norb, m->nR, 1e6 * diag[0], 1 + build[0] / diag[0], 1 + build[1] / diag[1], 1 + build[2] / diag[2],
           1 + build[3] / diag[3]);
    fflush(stdout);
    free(H);
    free(A);
    free(w);
    free(k);
    hk_lines_free(lines);
    eig_free(ws);
    hk_free(hk);
    tb_model_free(m);
}

int main(int argc, char **argv)
{
    if (openblas_set_num_threads) openblas_set_num_threads(1);
    int sizes[8] = {16, 64, 256}, ns = 3;
    if (argc > 1) {
        ns = 0;
        for (int i = 1; i < argc && ns < 8; i++)
            sizes[ns++] = atoi(argv[i]);
    }
    printf("# cost per k-point relative to the bare zheevd (values and vectors), one thread\n");
    for (int i = 0; i < ns; i++) {
        int n = sizes[i];
        int nk = n <= 16 ? 4096 : n <= 64 ? 512 : 128;
        bench(n, nk);
    }
    return 0;
}
