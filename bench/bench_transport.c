/* Benchmark (not a test): adaptive Berry-curvature integration (transport.h) against uniform
 * meshes, for the Haldane model close to its phase boundary (Phys. Rev. Lett. 61, 2015 (1988)):
 * t2 = 0.1, phi = pi/2, M = 0.5 eV against the boundary 3 sqrt3 t2 = 0.520 eV, so the gap is
 * 0.039 eV and the curvature is a narrow peak at one valley. The exact answer is the lattice Chern
 * number C = -1 (chern.h sign). Prints value, deviation from C, error estimate, k-points and time
 * for: the adaptive run; the same cubature on a uniform mesh of cells four times finer (no
 * refinement); and the plain midpoint rule on uniform N x N meshes (a direct Kubo sum here, lattice
 * gauge, which for an insulator has the same zone integral).
 * Usage: bench_transport [spec [tol]] */
#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/clock.h"
#include "bandsieve/eig.h"
#include "bandsieve/hk.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/transport.h"

void openblas_set_num_threads(int num_threads) __attribute__((weak)); /* OpenBLAS only */

static int one(const tb_model *m, const tr_opts *o, const char *label, double exact)
{
    tr_result r;
    bs_err err;
    bs_err_clear(&err);
    double t0 = bs_now();
    if (tr_compute(m, o, &r, &err) != 0) {
        fprintf(stderr, "%s\n", err.msg);
        return 1;
    }
    printf("%-28s sigma_xy %+.8f  |dev| %.2e  est.err %.2e  k-points %9lld  %.3f s\n", label, r.ahc[0][0],
           fabs(r.ahc[0][0] - exact), r.ahc_err[0][0], r.nk, bs_now() - t0);
    return 0;
}

/* sigma_xy / (e^2/h) = (2 pi / A) (1/N^2) sum_k sum_{n occ, m empty} -2 Im <n|v_x|m><m|v_y|n> /
 * (E_m - E_n)^2 on the N x N midpoint mesh; v from the reduced derivatives as in transport.c. */
static double midpoint(const tb_model *m, int N, double *seconds)
{
    double t0 = bs_now();
    int n = m->norb, nocc = m->nocc;
    hk_engine *hk = NULL;
    eig_ws *ws = NULL;
    bs_err err;
    bs_err_clear(&err);
    double complex *H = malloc(sizeof *H * n * n), *dH = malloc(sizeof *dH * 3 * n * n);
    double complex *vx = malloc(sizeof *vx * n * n), *vy = malloc(sizeof *vy * n * n);
    double *E = malloc(sizeof *E * n);
    if (!H || !dH || !vx || !vy || !E || hk_create(m, 1, &hk, &err) || eig_create(n, &ws, &err)) {
        fprintf(stderr, "midpoint: setup failed %s\n", err.msg);
        exit(1);
    }
    const double(*a)[3] = m->lattice;
    double area = fabs(a[0][0] * a[1][1] - a[0][1] * a[1][0]), total = 0;
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++) {
            double k[3] = {(i + 0.5) / N, (j + 0.5) / N, 0};
            if (hk_build_deriv(hk, 1, k, H, dH, &err) || eig_vectors(ws, H, E, &err)) {
                fprintf(stderr, "midpoint: %s\n", err.msg);
                exit(1);
            }
            for (int q = 0; q < n * n; q++) {
                vx[q] = (a[0][0] * dH[q] + a[1][0] * dH[n * n + q]) / (2 * M_PI);
                vy[q] = (a[0][1] * dH[q] + a[1][1] * dH[n * n + q]) / (2 * M_PI);
            }
            for (int p = 0; p < nocc; p++)
                for (int q = nocc; q < n; q++) {
                    double complex x = 0, y = 0;
                    for (int r = 0; r < n; r++)
                        for (int c = 0; c < n; c++) {
                            x += conj(H[r + p * n]) * vx[r + c * n] * H[c + q * n];
                            y += conj(H[r + q * n]) * vy[r + c * n] * H[c + p * n];
                        }
                    double de = E[q] - E[p];
                    total += -2 * cimag(x * y) / (de * de);
                }
        }
    free(H);
    free(dH);
    free(vx);
    free(vy);
    free(E);
    hk_free(hk);
    eig_free(ws);
    *seconds = bs_now() - t0;
    return 2 * M_PI / area * total / ((double)N * N);
}

int main(int argc, char **argv)
{
    if (openblas_set_num_threads) openblas_set_num_threads(1);
    const char *spec = argc > 1 ? argv[1] : "haldane:t2=0.1,phi=0.5,M=0.5";
    double tol = argc > 2 ? atof(argv[2]) : 1e-3;
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (lm_build(spec, &m, &err) != 0) {
        fprintf(stderr, "%s\n", err.msg);
        return 1;
    }
    const double exact = -1; /* chern_plane of this model; see test_chern.c */
    printf("%s, exact sigma_xy = %+.0f e^2/h\n", spec, exact);
    tr_opts o;
    tr_opts_default(&o);
    o.has_fermi = 1; /* E_F = 0 is midgap by particle-hole symmetry; skips the pre-pass */
    o.fermi_ev = 0;
    o.tol = tol;
    o.mesh = 8;
    char label[64];
    snprintf(label, sizeof label, "adaptive 8^2 cells, tol %.0e", tol);
    int rc = one(m, &o, label, exact);
    o.tol = tol * 1e-3;
    snprintf(label, sizeof label, "adaptive 8^2 cells, tol %.0e", o.tol);
    if (rc == 0) rc = one(m, &o, label, exact);
    o.mesh = 32;
    o.max_depth = -1;
    if (rc == 0) rc = one(m, &o, "uniform 32^2 cells (4x finer)", exact);
    for (int n = 64; n <= 1024 && rc == 0; n *= 2) {
        double sec, v = midpoint(m, n, &sec);
        printf("midpoint %4d^2               sigma_xy %+.8f  |dev| %.2e  est.err    -      "
               "k-points %9lld  %.3f s\n",
               n, v, fabs(v - exact), (long long)n * n, sec);
    }
    tb_model_free(m);
    return rc;
}
