/* Tests of the lattice Chern number (J. Phys. Soc. Jpn. 74, 1674 (2005)) on planes and through
 * small cubes, against the published phase diagram of the Haldane model, the analytic node
 * chiralities of the two-band Weyl model, an independent Kubo-formula integration of the Berry
 * curvature (Rev. Mod. Phys. 82, 1959 (2010), Eq. 1.13) and Gauss's law between the two. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/chern.h"
#include "bandsieve/clock.h"
#include "bandsieve/diagnosis.h"
#include "bandsieve/eig.h"
#include "bandsieve/hk.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/transform.h"

/* Chern number of plane p of m at the defaults, printing the cost. */
static chern_value plane_value(const tb_model *m, int p, const chern_opts *o)
{
    chern_ws *w = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(chern_create(m, m->nocc, &w, &err), 0);
    chern_value v;
    double t0 = bs_now();
    int rc = chern_plane(w, p, o, &v, &err);
    if (rc != 0) fprintf(stderr, "%s: %s\n", m->id, err.msg);
    assert_int_equal(rc, 0);
    printf("  %-34s plane %d status %d C %2d flux %+.10f max|F| %.3f mesh %d %5lld k %.4f s %s\n", m->id, p,
           v.status, v.chern, v.flux, v.max_f, v.mesh, v.nk, bs_now() - t0, v.reason);
    chern_free(w);
    return v;
}

static chern_value cube_value(const tb_model *m, const double k0[3], double h)
{
    chern_ws *w = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(chern_create(m, m->nocc, &w, &err), 0);
    chern_value v;
    double t0 = bs_now();
    int rc = chern_surface_flux(w, k0, h, NULL, &v, &err);
    if (rc != 0) fprintf(stderr, "%s: %s\n", m->id, err.msg);
    assert_int_equal(rc, 0);
    printf("  %-34s cube (%.3f,%.3f,%.3f) h %.3f status %d flux %+.10f mesh %d %4lld k %.4f s %s\n", m->id,
           k0[0], k0[1], k0[2], h, v.status, v.flux, v.mesh, v.nk, bs_now() - t0, v.reason);
    chern_free(w);
    return v;
}

/* Independent reference: C = (1/2 pi) sum_k Omega_12(k) / N^2 with the Kubo form
 * Omega_12 = -2 Im sum_{n occ, m empty} <n|d1 H|m><m|d2 H|n> / (E_n - E_m)^2, derivatives in reduced
 * k (Rev. Mod. Phys. 82, 1959 (2010), Eq. 1.13), on an N x N midpoint mesh of the k3 = 0 plane. */
static double kubo_chern(const tb_model *m, int N)
{
    int n = m->norb, nocc = m->nocc;
    hk_engine *hk = NULL;
    eig_ws *ws = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(hk_create(m, 1, &hk, &err), 0);
    assert_int_equal(eig_create(n, &ws, &err), 0);
    double complex *H = malloc(sizeof *H * n * n), *dH = malloc(sizeof *dH * 3 * n * n);
    double *E = malloc(sizeof *E * n);
    assert_non_null(H);
    assert_non_null(dH);
    assert_non_null(E);
    double total = 0;
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++) {
            double k[3] = {(i + 0.5) / N, (j + 0.5) / N, 0};
            assert_int_equal(hk_build_deriv(hk, 1, k, H, dH, &err), 0);
            assert_int_equal(eig_vectors(ws, H, E, &err), 0);
            const double complex *d1 = dH, *d2 = dH + (size_t)n * n;
            for (int a = 0; a < nocc; a++)
                for (int b = nocc; b < n; b++) {
                    double complex x1 = 0, x2 = 0; /* <a|d1H|b>, <b|d2H|a> */
                    for (int r = 0; r < n; r++)
                        for (int c = 0; c < n; c++) {
                            x1 += conj(H[r + a * n]) * d1[r + c * n] * H[c + b * n];
                            x2 += conj(H[r + b * n]) * d2[r + c * n] * H[c + a * n];
                        }
                    double de = E[a] - E[b];
                    total += -2.0 * cimag(x1 * x2) / (de * de);
                }
        }
    free(H);
    free(dH);
    free(E);
    hk_free(hk);
    eig_free(ws);
    return total / ((double)N * N) / (2 * M_PI);
}

/* Haldane, M = 0, phi = +-pi/2 (t2 = 0.1): |C| = 1, opposite signs for opposite phi (Phys. Rev.
 * Lett. 61, 2015 (1988)); and |M| = 0.3 < 3 sqrt3 t2 = 0.52 still |C| = 1. Exact integers by
 * construction. The sign is our convention (chern.h: flux of curl i<u|grad u>); with the
 * nu_ij = sign[(d1 x d2)_z] phases of lattice_models.h, phi = +pi/2 gives C = -1. It is pinned by
 * the Kubo integration, an independent formula: within 0.02 of the same integer (its midpoint
 * mesh of 48 x 48 converges exponentially for a gap of 1 eV; common practice). */
static void test_haldane_chern_sign(void **state)
{
    (void)state;
    const char *spec[3] = {"haldane:phi=0.5,M=0", "haldane:phi=-0.5,M=0", "haldane:phi=0.5,M=0.3"};
    const int expect[3] = {-1, 1, -1};
    for (int i = 0; i < 3; i++) {
        tb_model *m = bs_test_build(spec[i]);
        chern_value v = plane_value(m, 4, NULL);
        assert_int_equal(v.status, RES_DONE);
        assert_int_equal(v.chern, expect[i]);
        assert_true(fabs(v.flux - v.chern) < 1e-9); /* integer to round-off by construction */
        double kubo = kubo_chern(m, 48);
        printf("    Kubo reference %+.6f\n", kubo);
        assert_true(fabs(kubo - expect[i]) < 0.02);
        tb_model_free(m);
    }
}

/* Haldane beyond |M| = 3 sqrt3 |t2 sin phi| = 0.520 eV: C = 0 (Phys. Rev. Lett. 61, 2015 (1988)),
 * both signs of M, and at phi = pi/6 where the boundary is 0.260 eV. */
static void test_haldane_trivial(void **state)
{
    (void)state;
    const char *spec[4] = {"haldane:M=0.8", "haldane:M=-0.8", "haldane:phi=0.1666666667,M=0.35",
                           "haldane:phi=0.1666666667,M=0.2"};
    const int expect[4] = {0, 0, 0, -1};
    for (int i = 0; i < 4; i++) {
        tb_model *m = bs_test_build(spec[i]);
        chern_value v = plane_value(m, 4, NULL);
        assert_int_equal(v.status, RES_DONE);
        assert_int_equal(v.chern, expect[i]);
        tb_model_free(m);
    }
}

/* Time reversal forces C = 0: Kane-Mele TI (Phys. Rev. Lett. 95, 226801 (2005)) and the atomic
 * limit in every 3D plane. */
static void test_time_reversal_zero(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("kane_mele");
    chern_value v = plane_value(m, 4, NULL);
    assert_int_equal(v.status, RES_DONE);
    assert_int_equal(v.chern, 0);
    tb_model_free(m);
    m = bs_test_build("atomic");
    for (int p = 0; p < 6; p++) {
        v = plane_value(m, p, NULL);
        assert_int_equal(v.status, RES_DONE);
        assert_int_equal(v.chern, 0);
    }
    tb_model_free(m);
}

/* Weyl model (lattice_models.h, common practice form): nodes at (+-1/4, 0, 0) with chirality
 * -sign(t^3 sin k0) = -1 at +1/4 and +1 at -1/4 (t = 1, k0 = pi/2), the sign of
 * det(d d_i / d k_j) = -t^3 sin k0 computed by hand from H = d.sigma; a cube around a gapped
 * point (the R point, gap 5.9 eV) holds no charge. Exact integers; h = 0.05 keeps the other
 * node 0.45 away. */
static void test_weyl_chirality(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("weyl");
    const double kp[3] = {0.25, 0, 0}, km[3] = {-0.25, 0, 0}, kr[3] = {0.5, 0.5, 0.5};
    const double off[3] = {0.27, 0.013, -0.02}; /* off-centre cube, still enclosing +1/4 */
    chern_value v = cube_value(m, kp, 0.05);
    assert_int_equal(v.status, RES_DONE);
    assert_int_equal(v.chern, -1);
    assert_true(fabs(v.flux + 1) < 1e-9);
    v = cube_value(m, km, 0.05);
    assert_int_equal(v.status, RES_DONE);
    assert_int_equal(v.chern, 1);
    v = cube_value(m, off, 0.05);
    assert_int_equal(v.status, RES_DONE);
    assert_int_equal(v.chern, -1);
    v = cube_value(m, kr, 0.05);
    assert_int_equal(v.status, RES_DONE);
    assert_int_equal(v.chern, 0);
    /* A large cube between the nodes (|k1| <= 0.2, 0.05 from each): no charge inside. */
    const double k0[3] = {0, 0, 0};
    v = cube_value(m, k0, 0.2);
    assert_int_equal(v.status, RES_DONE);
    assert_int_equal(v.chern, 0);
    tb_model_free(m);
}

/* Gauss's law (common practice): C(k1 = 1/2) - C(k1 = 0) = the chirality between the planes,
 * -1 (the node at k1 = +1/4). Planes k2 = 0 and k3 = 0 contain both nodes: the mesh point
 * (1/4, 0, 0) has a zero gap, which must be reported as a closing, not as a Chern number. */
static void test_weyl_planes(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("weyl");
    chern_value c0 = plane_value(m, 0, NULL), c1 = plane_value(m, 1, NULL);
    assert_int_equal(c0.status, RES_DONE);
    assert_int_equal(c1.status, RES_DONE);
    assert_int_equal(c1.chern - c0.chern, -1);
    for (int p = 2; p <= 4; p += 2) {
        chern_value v = plane_value(m, p, NULL);
        assert_int_equal(v.status, RES_AMBIGUOUS);
        assert_int_equal(v.gap_closed, 1);
        assert_true(v.min_gap_ev < 1e-4);
        assert_true(strstr(v.reason, "gap") != NULL);
    }
    /* A cube whose face passes through the node: reported as a closing. */
    const double k0[3] = {0.2, 0, 0};
    chern_value v = cube_value(m, k0, 0.05);
    assert_int_equal(v.status, RES_AMBIGUOUS);
    assert_int_equal(v.gap_closed, 1);
    tb_model_free(m);
}

/* Refinement: with a tight fmax the mesh doubles until every |F| fits, and without room to
 * refine the value is AMBIGUOUS with a reason rather than a guess. */
static void test_refinement(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("haldane:M=0.45"); /* gap 0.14 eV near K: curvature concentrated there */
    chern_opts o;
    chern_opts_default(&o, 0);
    o.fmax = 0.3; /* max |F| is 0.80 at the default mesh 24: refinement must go to 96 */
    chern_value v = plane_value(m, 4, &o);
    assert_int_equal(v.status, RES_DONE);
    assert_true(v.mesh > o.mesh);
    assert_true(v.max_f <= 0.3);
    assert_int_equal(v.chern, -1); /* 0.45 < 0.520: Chern phase, Phys. Rev. Lett. 61, 2015 (1988) */
    o.max_mesh = o.mesh;
    v = plane_value(m, 4, &o);
    assert_int_equal(v.status, RES_AMBIGUOUS);
    assert_int_equal(v.gap_closed, 0);
    assert_true(strstr(v.reason, "max |F|") != NULL);
    tb_model_free(m);
}

/* Basis independence (common practice): a random permutation of the orbitals and random orbital
 * phases leave C and the cube flux unchanged (to 1e-9: the same integers by construction). */
static void test_basis_invariance(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    unsigned long long seed = 12345;
    const char *spec[2] = {"haldane:M=0.2", "weyl"};
    for (int s = 0; s < 2; s++) {
        tb_model *m = bs_test_build(spec[s]), *p = NULL, *q = NULL;
        int ns = m->nspatial;
        int perm[2] = {1, 0};
        double phi[2];
        assert_int_equal(ns, 2);
        assert_int_equal(tf_permute(m, perm, &p, &err), 0);
        bs_test_random_phases(p, &seed, phi);
        if (tf_phase(p, phi, &q, &err) != 0) fprintf(stderr, "%s\n", err.msg);
        assert_non_null(q);
        if (m->dim == 2) {
            chern_value a = plane_value(m, 4, NULL), b = plane_value(q, 4, NULL);
            assert_int_equal(b.status, RES_DONE);
            assert_int_equal(a.chern, b.chern);
            assert_true(fabs(a.flux - b.flux) < 1e-9);
        } else {
            const double k0[3] = {0.25, 0, 0};
            chern_value a = cube_value(m, k0, 0.05), b = cube_value(q, k0, 0.05);
            assert_int_equal(b.status, RES_DONE);
            assert_int_equal(a.chern, b.chern);
        }
        tb_model_free(m);
        tb_model_free(p);
        tb_model_free(q);
    }
}

/* Bad input gives BS_EINVAL with a message; a spent budget gives BS_ETIMEOUT. */
static void test_errors(void **state)
{
    (void)state;
    bs_err err;
    tb_model *m2 = bs_test_build("haldane"), *m3 = bs_test_build("weyl");
    chern_ws *w = NULL;
    bs_err_clear(&err);
    assert_int_equal(chern_create(m2, 0, &w, &err), BS_EINVAL);
    assert_null(w);
    assert_true(strlen(err.msg) > 0);
    bs_err_clear(&err);
    assert_int_equal(chern_create(m2, m2->norb, &w, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(chern_create(m2, 1, &w, &err), 0);
    chern_value v;
    assert_int_equal(chern_plane(w, 0, NULL, &v, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "plane"));
    bs_err_clear(&err);
    const double k0[3] = {0, 0, 0};
    assert_int_equal(chern_surface_flux(w, k0, 0.05, NULL, &v, &err), BS_EINVAL);
    bs_err_clear(&err);
    chern_opts o;
    chern_opts_default(&o, 0);
    o.fmax = 4.0;
    assert_int_equal(chern_plane(w, 4, &o, &v, &err), BS_EINVAL);
    bs_err_clear(&err);
    chern_opts_default(&o, 0);
    o.deadline = bs_now() - 1.0;
    assert_int_equal(chern_plane(w, 4, &o, &v, &err), BS_ETIMEOUT);
    chern_free(w);
    bs_err_clear(&err);
    assert_int_equal(chern_create(m3, 1, &w, &err), 0);
    assert_int_equal(chern_surface_flux(w, k0, 0.0, NULL, &v, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(chern_surface_flux(w, k0, 0.3, NULL, &v, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(chern_plane(w, 6, NULL, &v, &err), BS_EINVAL);
    chern_free(w);
    chern_free(NULL);
    tb_model_free(m2);
    tb_model_free(m3);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_haldane_chern_sign), cmocka_unit_test(test_haldane_trivial),
        cmocka_unit_test(test_time_reversal_zero), cmocka_unit_test(test_weyl_chirality),
        cmocka_unit_test(test_weyl_planes),        cmocka_unit_test(test_refinement),
        cmocka_unit_test(test_basis_invariance),   cmocka_unit_test(test_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
