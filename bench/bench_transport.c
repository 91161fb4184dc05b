/* Benchmark (not a test): adaptive Berry-curvature integration (transport.h) against uniform
 * midpoint meshes, for the Haldane model close to its phase boundary (Phys. Rev. Lett. 61, 2015
 * (1988)): t2 = 0.1, phi = pi/2, M = 0.5 eV against the boundary 3 sqrt3 t2 = 0.520 eV, so the gap
 * is 0.039 eV and the curvature is a narrow peak at one valley. The exact answer is the lattice
 * Chern number C = -1 (chern.h sign). Prints value, deviation from C, error estimate, k-points and
 * time for the adaptive run and for uniform meshes from four times its initial mesh up.
 * Usage: bench_transport [spec [tol]] */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/transport.h"

void openblas_set_num_threads(int num_threads);

static int one(const tb_model *m, const tr_opts *o, const char *label, double exact)
{
    tr_result r;
    bs_err err;
    bs_err_clear(&err);
    double t0 = bp_now();
    if (tr_compute(m, o, &r, &err) != 0) {
        fprintf(stderr, "%s\n", err.msg);
        return 1;
    }
    printf("%-28s sigma_xy %+.8f  |dev| %.2e  est.err %.2e  k-points %9lld  %.3f s\n", label,
           r.ahc[0][0], fabs(r.ahc[0][0] - exact), r.ahc_err[0][0], r.nk, bp_now() - t0);
    return 0;
}

int main(int argc, char **argv)
{
    openblas_set_num_threads(1);
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
    o.mesh = 16;
    char label[64];
    snprintf(label, sizeof label, "adaptive 16^2, tol %.0e", tol);
    int rc = one(m, &o, label, exact);
    /* Uniform: max_depth = -1 with mesh N/2 is the N x N midpoint rule (plus the (N/2)^2 coarse
     * centres of its error estimate, counted in the k-points). */
    o.max_depth = -1;
    for (int n = 64; n <= 1024 && rc == 0; n *= 2) {
        o.mesh = n / 2;
        snprintf(label, sizeof label, "uniform %d^2%s", n, n == 64 ? " (4x finer)" : "");
        rc = one(m, &o, label, exact);
    }
    tb_model_free(m);
    return rc;
}
