/* Tests of the Wilson-loop module: hybrid Wannier charge centres and the Z2 index from their flow
 * (Phys. Rev. B 83, 235401 (2011); Phys. Rev. B 84, 075119 (2011)) on published models whose
 * phase is known analytically. Every Z2 check is an exact integer comparison: the index is an
 * integer and the models sit well inside their phases (gaps of 0.1 eV or more). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "bandsieve/hopfile.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/transform.h"
#include "bandsieve/wilson.h"

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Runs the whole Z2 of a model at the default resolution, printing the cost; the caller clears. */
static void run_z2(const tb_model *m, const wilson_opts *o, wilson_z2 *r)
{
    wilson_ws *w = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(wilson_create(m, m->nocc, &w, &err), 0);
    double t0 = now();
    int rc = wilson_z2_run(w, o, r, &err);
    if (rc != 0) fprintf(stderr, "%s: %s\n", m->id, err.msg);
    assert_int_equal(rc, 0);
    int nstr = 0;
    for (int i = 0; i < r->nplane; i++)
        nstr += r->planes[i].flow.nstring;
    printf("  %-40s status %d z2 %d;%d%d%d  %3d strings  %6lld k  %.3f s  %s\n", m->id, r->status, r->z2[0],
           r->z2[1], r->z2[2], r->z2[3], nstr, r->nk, now() - t0, r->reason);
    wilson_free(w);
}

static void expect_z2(const char *spec, int status, const int z2[4])
{
    tb_model *m = bs_test_build(spec);
    wilson_z2 r;
    run_z2(m, NULL, &r);
    assert_int_equal(r.status, status);
    if (status == RES_DONE) {
        int n = m->dim == 2 ? 1 : 4;
        for (int i = 0; i < n; i++)
            assert_int_equal(r.z2[i], z2[i]);
    }
    wilson_z2_clear(&r);
    tb_model_free(m);
}

/* Kane-Mele, lambda_R = 0: 2D TI for lambda_v < 3 sqrt3 lambda_SO = 0.312 eV (lambda_SO = 0.06),
 * trivial above. Phys. Rev. Lett. 95, 226801 (2005). lambda_v = 0.1 and 0.5 keep gaps of
 * 2|3 sqrt3 lambda_SO - lambda_v| = 0.42 and 0.38 eV: far from the boundary. */
static void test_kane_mele_no_rashba(void **state)
{
    (void)state;
    expect_z2("kane_mele:lambda_R=0,lambda_v=0.1", RES_DONE, (int[4]){1, 0, 0, 0});
    expect_z2("kane_mele:lambda_R=0,lambda_v=0.5", RES_DONE, (int[4]){0, 0, 0, 0});
}

/* Kane-Mele with Rashba: S_z is no longer conserved, so only the Z2 decides. The TI region of
 * Fig. 1 of Phys. Rev. Lett. 95, 226801 (2005) shrinks as lambda_R grows from the lambda_R = 0
 * boundary lambda_v / lambda_SO = 3 sqrt3 = 5.2 (the figure read from memory); the defaults,
 * lambda_v / lambda_SO = 1.7 and lambda_R / lambda_SO = 0.83, are well inside it (Z2 = 1), and
 * lambda_v / lambda_SO = 10 with the same Rashba is well outside (Z2 = 0). */
static void test_kane_mele_rashba(void **state)
{
    (void)state;
    expect_z2("kane_mele", RES_DONE, (int[4]){1, 0, 0, 0});
    expect_z2("kane_mele:lambda_R=0.05,lambda_v=0.6", RES_DONE, (int[4]){0, 0, 0, 0});
}

/* BHZ: Z2 = 1 for 0 < M/B < 8 except the closings at 0, 4, 8; trivial for M/B < 0 (Science 314,
 * 1757 (2006), lattice form of lattice_models.h). g (S_z-breaking, keeps T and P) and a small delta
 * (keeps T, breaks S_z and P) leave the gap open and the index unchanged. */
static void test_bhz(void **state)
{
    (void)state;
    expect_z2("bhz:M=1", RES_DONE, (int[4]){1, 0, 0, 0});
    expect_z2("bhz:M=-1", RES_DONE, (int[4]){0, 0, 0, 0});
    expect_z2("bhz:M=1,g=0.3", RES_DONE, (int[4]){1, 0, 0, 0});
    expect_z2("bhz:M=1,delta=0.2", RES_DONE, (int[4]){1, 0, 0, 0});
    expect_z2("bhz:M=-1,delta=0.2", RES_DONE, (int[4]){0, 0, 0, 0});
}

/* Fu-Kane-Mele diamond: dt > 0 strong TI 1;111, dt < 0 weak TI 0;111 (Phys. Rev. Lett. 98, 106803
 * (2007)); |dt| = 0.4 eV t keeps the X-point gap open by a wide margin. The 3D indices come from the
 * six planes, with nu0 cross-checked over the three directions. */
static void test_fkm(void **state)
{
    (void)state;
    expect_z2("fkm:dt=0.4", RES_DONE, (int[4]){1, 1, 1, 1});
    expect_z2("fkm:dt=-0.4", RES_DONE, (int[4]){0, 1, 1, 1});
}

/* Orbital positions enter the centres: in the atomic limit (lattice_models.h: B sites at
 * (1/2,1/2,1/2), on-site -delta, occupied) every hybrid centre sits on the B site, x = 1/2 for
 * strings along any axis. Inversion about a site with time reversal pins each Kramers pair of
 * centres to 0 or 1/2 (x -> -x maps the set onto itself), so the value is exact up to round-off
 * (tolerance 1e-9) and cannot drift from the t = 0 value 1/2 (common practice). Without the
 * orbital-position factor the centres would come out at 0. */
static void test_atomic_centres(void **state)
{
    (void)state;
    const char *spec[2] = {"atomic", "atomic:dim=2"};
    for (int s = 0; s < 2; s++) {
        tb_model *m = bs_test_build(spec[s]);
        wilson_z2 r;
        run_z2(m, NULL, &r);
        assert_int_equal(r.status, RES_DONE);
        for (int i = 0; i < 4; i++)
            assert_int_equal(r.z2[i], 0);
        for (int p = 0; p < r.nplane; p++) {
            const res_flow *f = &r.planes[p].flow;
            assert_true(f->nstring >= 11);
            for (int j = 0; j < f->nstring * f->nband; j++)
                assert_true(fabs(f->wcc[j] - 0.5) < 1e-9);
        }
        wilson_z2_clear(&r);
        tb_model_free(m);
    }
}

/* At the Kane-Mele boundary lambda_v = 3 sqrt3 lambda_SO (lambda_R = 0) the gap closes at K'
 * = (2/3, 1/3) (Phys. Rev. Lett. 95, 226801 (2005)). With strings at k2 = 0, 1/6, 1/3, 1/2 and 24
 * points each, a string passes through K': the closing is reported (status NA, no Z2). With the
 * default strings, which miss K', the flow near it cannot be resolved: never DONE. */
static void test_gap_closing(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("kane_mele:lambda_R=0,lambda_v=0.311769145362398");
    wilson_opts o;
    wilson_opts_default(&o);
    o.nstring = 4;
    wilson_z2 r;
    run_z2(m, &o, &r);
    assert_int_equal(r.status, RES_NA);
    assert_int_equal(r.gap_closed, 1);
    assert_true(r.planes[0].min_gap_ev < 1e-4);
    assert_true(fabs(r.planes[0].k_gap[0] - 2.0 / 3) < 1e-9);
    assert_true(fabs(r.planes[0].k_gap[1] - 1.0 / 3) < 1e-9);
    assert_non_null(strstr(r.reason, "gap"));
    wilson_z2_clear(&r);
    run_z2(m, NULL, &r);
    assert_int_not_equal(r.status, RES_DONE);
    assert_true(strlen(r.reason) > 0);
    wilson_z2_clear(&r);
    tb_model_free(m);
}

/* Without time reversal the centres at k_b = 0, 1/2 need not pair: AMBIGUOUS, not a Z2.
 * Haldane (Phys. Rev. Lett. 61, 2015 (1988)) has one occupied band (odd: no pairs at all); Kane-Mele
 * with an on-site exchange field b s_z (b = 0.1 eV, the gap stays open) has two bands whose
 * centres at k_b = 0 and 1/2 split by 1.8e-3 and 3.8e-3 (measured; linear in b), above
 * kramers_tol = 1e-3, while with b = 0 they pair to round-off (the tests above). */
static void test_no_time_reversal(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("haldane");
    wilson_z2 r;
    run_z2(m, NULL, &r);
    assert_int_equal(r.status, RES_AMBIGUOUS);
    assert_non_null(strstr(r.reason, "odd"));
    wilson_z2_clear(&r);
    tb_model_free(m);

    m = bs_test_build("kane_mele");
    int r0 = tb_model_find_R(m, (int[3]){0, 0, 0});
    assert_true(r0 >= 0);
    for (int i = 0; i < m->norb; i++)
        m->H[((size_t)r0 * m->norb + i) * m->norb + i] += tb_state_spin(m, i) ? -0.1 : 0.1;
    run_z2(m, NULL, &r);
    assert_int_equal(r.status, RES_AMBIGUOUS);
    assert_non_null(strstr(r.reason, "Kramers"));
    wilson_z2_clear(&r);
    tb_model_free(m);
}

/* Refinement budget: too few strings (3, no bisection allowed) for the Kane-Mele TI flow, or too
 * few points per string (4) with a strict overlap threshold, give AMBIGUOUS with a reason; with
 * room to refine the same settings converge. */
static void test_budget(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("kane_mele");
    wilson_opts o;
    wilson_opts_default(&o);
    o.nstring = 3;
    o.max_strings = 3;
    wilson_z2 r;
    run_z2(m, &o, &r);
    assert_int_equal(r.status, RES_AMBIGUOUS);
    assert_non_null(strstr(r.reason, "midpoint"));
    wilson_z2_clear(&r);
    o.max_strings = 64;
    run_z2(m, &o, &r);
    assert_int_equal(r.status, RES_DONE);
    assert_int_equal(r.z2[0], 1);
    assert_true(r.planes[0].flow.nstring > 3);
    wilson_z2_clear(&r);
    tb_model_free(m);

    m = bs_test_build("atomic:dim=2");
    wilson_opts_default(&o);
    o.nk = 4;
    o.max_nk = 4;
    o.det_min = 0.9999;
    run_z2(m, &o, &r);
    assert_int_equal(r.status, RES_AMBIGUOUS);
    assert_non_null(strstr(r.reason, "det"));
    wilson_z2_clear(&r);
    o.max_nk = 256;
    run_z2(m, &o, &r);
    assert_int_equal(r.status, RES_DONE);
    assert_true(r.planes[0].max_nk > 4);
    assert_true(r.planes[0].min_det >= 0.9999);
    wilson_z2_clear(&r);
    tb_model_free(m);
}

/* Basis independence (common practice): interleaving the spin layout, swapping the two spatial
 * orbitals and giving them random phases changes no centre (to 1e-8: round-off of different
 * eigensolves) and so no index. */
static void test_basis_invariance(void **state)
{
    (void)state;
    const char *spec[3] = {"kane_mele", "bhz:M=1,delta=0.2", "fkm:dt=0.4,stag=0.1"};
    unsigned long long seed = 2026;
    bs_err err;
    bs_err_clear(&err);
    for (int s = 0; s < 3; s++) {
        tb_model *m = bs_test_build(spec[s]), *a = NULL, *b = NULL, *c = NULL;
        int perm[2] = {1, 0};
        double phi[2];
        assert_int_equal(m->nspatial, 2);
        assert_int_equal(tf_spin_layout(m, TB_SPIN_INTERLEAVED, &a, &err), 0);
        assert_int_equal(tf_permute(a, perm, &b, &err), 0);
        bs_test_random_phases(b, &seed, phi);
        if (tf_phase(b, phi, &c, &err) != 0) fprintf(stderr, "%s\n", err.msg);
        assert_non_null(c);
        wilson_z2 r0, r1;
        run_z2(m, NULL, &r0);
        run_z2(c, NULL, &r1);
        assert_int_equal(r0.status, RES_DONE);
        assert_int_equal(r1.status, RES_DONE);
        for (int i = 0; i < 4; i++)
            assert_int_equal(r0.z2[i], r1.z2[i]);
        for (int p = 0; p < r0.nplane; p++) {
            const res_flow *f0 = &r0.planes[p].flow, *f1 = &r1.planes[p].flow;
            assert_int_equal(f0->nstring, f1->nstring);
            for (int j = 0; j < f0->nstring * f0->nband; j++) {
                double d = fabs(f0->wcc[j] - f1->wcc[j]);
                assert_true(fmin(d, 1 - d) < 1e-8);
            }
        }
        wilson_z2_clear(&r0);
        wilson_z2_clear(&r1);
        tb_model_free(m);
        tb_model_free(a);
        tb_model_free(b);
        tb_model_free(c);
    }
}

/* The flows handed to the diagnosis: six planes in 3D, strings from k_b = 0 to 1/2 ascending,
 * centres in [0,1) sorted per string; the result keeps no flow afterwards. */
static void test_take_flows(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("fkm:dt=-0.4");
    wilson_z2 r;
    run_z2(m, NULL, &r);
    res_flow *f = NULL;
    int nf = 0;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(wilson_z2_take_flows(&r, &f, &nf, &err), 0);
    assert_int_equal(nf, 6);
    for (int p = 0; p < nf; p++) {
        assert_int_equal(f[p].plane, p);
        assert_int_equal(f[p].nband, m->nocc);
        assert_true(f[p].kpar[0] == 0.0 && f[p].kpar[f[p].nstring - 1] == 0.5);
        for (int i = 0; i < f[p].nstring; i++) {
            if (i > 0) assert_true(f[p].kpar[i] > f[p].kpar[i - 1]);
            for (int j = 0; j < f[p].nband; j++) {
                double x = f[p].wcc[i * f[p].nband + j];
                assert_true(x >= 0 && x < 1);
                if (j > 0) assert_true(x >= f[p].wcc[i * f[p].nband + j - 1]);
            }
        }
        assert_null(r.planes[p].flow.kpar);
        free(f[p].kpar);
        free(f[p].wcc);
    }
    free(f);
    wilson_z2_clear(&r);
    tb_model_free(m);
}

#define WILSON_REF BS_TEST_DATA "/../topology/wilson_ref.py"

/* Centres of one string from tests/topology/wilson_ref.py (numpy, the orbital positions in the
 * Fourier phase and the closing link only: the other gauge); 0 on success. */
static int numpy_centres(const tb_model *m, int dir, const double k0[3], int nk, double *x)
{
    char path[] = "/tmp/bs_wilson_ref_XXXXXX";
    int fd = mkstemp(path);
    if (fd < 0) return -1;
    close(fd);
    bs_err err;
    bs_err_clear(&err);
    if (hop_write(path, m, "model for test_wilson", &err) != 0) return -1;
    size_t cap = 256 + 80 * (size_t)m->norb;
    char *cmd = malloc(cap);
    if (!cmd) return -1;
    int len = snprintf(cmd, cap, "/usr/bin/python3 %s %s %d %d %.17g %.17g %.17g %d", WILSON_REF, path,
                       m->nocc, dir, k0[0], k0[1], k0[2], nk);
    for (int a = 0; a < m->norb; a++) {
        const double *t = m->orb_pos[tb_state_orbital(m, a)];
        len += snprintf(cmd + len, cap - (size_t)len, " %.17g %.17g %.17g", t[0], t[1], t[2]);
    }
    FILE *p = popen(cmd, "r");
    free(cmd);
    if (!p) return -1;
    int n = 0;
    for (int i = 0; i < m->nocc; i++)
        n += fscanf(p, "%lf", &x[i]) == 1;
    int st = pclose(p);
    unlink(path);
    return n == m->nocc && st == 0 ? 0 : -1;
}

/* Centres of single strings against numpy, in models where no symmetry pins them (Kane-Mele with
 * Rashba and a staggered potential: no inversion; Fu-Kane-Mele with stag: none either; BHZ with
 * delta). Both discretise the same loop on the same points, so they agree to round-off: 1e-9
 * (common practice). This checks the orbital-position factor on every link (wilson.c). */
static void test_centres_against_numpy(void **state)
{
    (void)state;
    /* The last case has more points than one batch of H(k) builds (64 for small models), so the
     * streaming of a string across batches is checked too. */
    const char *spec[4] = {"kane_mele", "fkm:dt=0.4,stag=0.1", "bhz:M=1,delta=0.2", "kane_mele"};
    const int dir[4] = {0, 1, 0, 1}, nk[4] = {24, 24, 24, 150};
    const double k0[4][3] = {{0, 0.3, 0}, {0.1, 0, 0.37}, {0, 0.21, 0}, {0.13, 0, 0}};
    for (int s = 0; s < 4; s++) {
        tb_model *m = bs_test_build(spec[s]);
        wilson_ws *w = NULL;
        bs_err err;
        bs_err_clear(&err);
        assert_int_equal(wilson_create(m, m->nocc, &w, &err), 0);
        double x[8], ref[8], det, gap;
        assert_int_equal(wilson_string(w, dir[s], k0[s], nk[s], x, &det, &gap, &err), 0);
        assert_int_equal(numpy_centres(m, dir[s], k0[s], nk[s], ref), 0);
        for (int i = 0; i < m->nocc; i++) {
            printf("  %-22s nk %3d centre %d: %.12f numpy %.12f\n", spec[s], nk[s], i, x[i], ref[i]);
            double d = fabs(x[i] - ref[i]);
            assert_true(fmin(d, 1 - d) < 1e-9);
        }
        wilson_free(w);
        tb_model_free(m);
    }
}

/* Bad input: BS_EINVAL with a message; a spent budget: BS_ETIMEOUT. */
static void test_errors(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("kane_mele"), *m3 = bs_test_build("fkm");
    wilson_ws *w = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(wilson_create(m, 0, &w, &err), BS_EINVAL);
    assert_null(w);
    assert_true(strlen(err.msg) > 0);
    bs_err_clear(&err);
    assert_int_equal(wilson_create(m, m->norb, &w, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(wilson_create(m, 2, &w, &err), 0);
    wilson_plane p;
    assert_int_equal(wilson_plane_z2(w, 0, NULL, &p, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "plane"));
    bs_err_clear(&err);
    double x[2], k0[3] = {0, 0, 0};
    assert_int_equal(wilson_string(w, 3, k0, 24, x, NULL, NULL, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(wilson_string(w, 0, k0, 1, x, NULL, NULL, &err), BS_EINVAL);
    bs_err_clear(&err);
    wilson_opts o;
    wilson_opts_default(&o);
    o.nstring = 1;
    assert_int_equal(wilson_plane_z2(w, 4, &o, &p, &err), BS_EINVAL);
    bs_err_clear(&err);
    wilson_opts_default(&o);
    o.deadline = 1e-9; /* long past on CLOCK_MONOTONIC */
    wilson_z2 r;
    assert_int_equal(wilson_z2_run(w, &o, &r, &err), BS_ETIMEOUT);
    assert_non_null(strstr(err.msg, "time"));
    wilson_z2_clear(&r);
    wilson_free(w);
    bs_err_clear(&err);
    assert_int_equal(wilson_create(m3, 2, &w, &err), 0);
    assert_int_equal(wilson_plane_z2(w, 6, NULL, &p, &err), BS_EINVAL);
    wilson_free(w);
    wilson_free(NULL);
    tb_model_free(m);
    tb_model_free(m3);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_kane_mele_no_rashba),
        cmocka_unit_test(test_kane_mele_rashba),
        cmocka_unit_test(test_bhz),
        cmocka_unit_test(test_fkm),
        cmocka_unit_test(test_atomic_centres),
        cmocka_unit_test(test_centres_against_numpy),
        cmocka_unit_test(test_gap_closing),
        cmocka_unit_test(test_no_time_reversal),
        cmocka_unit_test(test_budget),
        cmocka_unit_test(test_basis_invariance),
        cmocka_unit_test(test_take_flows),
        cmocka_unit_test(test_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
