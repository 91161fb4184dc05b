/* Tests of the gap search (gaps.h) and of the band-pair evaluator it stands on (bandpair.h):
 * analytic gaps of built-in models, a generic insulator against numpy/scipy, errors, timings. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"
#include "noise.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/clock.h"
#include "bandsieve/config.h"
#include "bandsieve/eig.h"
#include "bandsieve/gaps.h"
#include "bandsieve/hk.h"
#include "bandsieve/hopfile.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/source.h"

/* cmocka's float comparison is single precision; this one is double. */
#define assert_close(a, b, tol)                                                                              \
    do {                                                                                                     \
        double a_ = (a), b_ = (b);                                                                           \
        if (!(fabs(a_ - b_) <= (tol)))                                                                       \
            fail_msg("%s = %.12g, expected %.12g within %g", #a, a_, b_, (double)(tol));                     \
    } while (0)

#define REF_SCRIPT BS_TEST_DATA "/../topology/gaps_ref.py"
#define SP3_SCRIPT BS_TEST_DATA "/../topology/sp3_model.py"

static void run_gaps(const tb_model *m, const gaps_opts *o, gaps_result *g)
{
    hk_engine *hk = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(hk_create(m, 128, &hk, &err), 0);
    int rc = gaps_find(m, hk, o, g, &err);
    if (rc != 0) fprintf(stderr, "gaps_find: %s\n", err.msg);
    assert_int_equal(rc, 0);
    printf("  gaps %-28s mesh %d: direct %.9f indirect %.9f eV, %lld k, %.3f s\n", m->id, g->mesh,
           g->gap_direct_ev, g->gap_indirect_ev, g->nk_evaluated, g->seconds);
    hk_free(hk);
}

/* Deterministic generator for the generic model (no rand(): STYLE.md). */
static double lcg(uint64_t *s)
{
    *s = *s * 6364136223846793005ULL + 1442695040888963407ULL;
    return (double)(*s >> 11) / 9007199254740992.0 - 0.5;
}

/* A generic model without symmetry: norb states, on-site levels -3 eV (lower half) and +3 eV,
 * random complex hoppings (real and imaginary parts up to hop/2 eV) to 6 neighbours (3 in 2D) and
 * their inverses, some degeneracy weights 2 to exercise the H(R)/deg(R) convention. With hop = 0.3
 * and 4 states it is an insulator with a 3-5 eV gap at generic k. */
static tb_model *generic_model(int norb, int dim, uint64_t seed, double hop)
{
    static const int half[6][3] = {{1, 0, 0}, {0, 1, 0}, {0, 0, 1}, {1, 1, 0}, {0, 1, 1}, {1, -1, 0}};
    int nhalf = dim == 3 ? 6 : 3;
    const int idx2d[3] = {0, 1, 3};
    tb_model *m = NULL;
    bs_err err;
    assert_int_equal(tb_model_create(norb, 1 + 2 * nhalf, 0, &m, &err), 0);
    m->dim = dim;
    m->nocc = norb / 2;
    snprintf(m->id, sizeof m->id, "generic-%d-%dD", norb, dim);
    uint64_t s = seed;
    size_t nn = (size_t)norb * norb;
    for (int a = 0; a < norb; a++) {
        m->H[a + norb * a] = (a < norb / 2 ? -3.0 : 3.0) + 0.3 * lcg(&s);
        for (int b = a + 1; b < norb; b++) {
            double complex z = 0.3 * (lcg(&s) + I * lcg(&s));
            m->H[a * norb + b] = z;
            m->H[b * norb + a] = conj(z);
        }
    }
    for (int h = 0; h < nhalf; h++) {
        const int *R = half[dim == 3 ? h : idx2d[h]];
        int rp = 1 + 2 * h, rm = rp + 1;
        for (int i = 0; i < 3; i++) {
            m->R[rp][i] = R[i];
            m->R[rm][i] = -R[i];
        }
        m->deg[rp] = m->deg[rm] = h % 2 ? 2 : 1;
        for (int a = 0; a < norb; a++)
            for (int b = 0; b < norb; b++) {
                double complex z = hop * (lcg(&s) + I * lcg(&s)) * m->deg[rp];
                m->H[rp * nn + a * norb + b] = z;
                m->H[rm * nn + b * norb + a] = conj(z);
            }
    }
    assert_int_equal(tb_model_validate(m, 0.0, "generic", &err), 0);
    return m;
}

/* atomic (CsCl-type): E = +-sqrt(delta^2 + |f|^2) with f = 0 on the zone boundary, so the direct and
 * indirect gaps are both 2|delta| = 4 eV at the defaults (analytic, lattice_models.h). The boundary
 * holds mesh points (k = 1/2), so only round-off separates the result: tolerance 1e-9 eV. */
static void test_atomic_gap_analytic(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("atomic");
    gaps_result g;
    run_gaps(m, NULL, &g);
    assert_close(g.gap_direct_ev, 4.0, 1e-9);
    assert_close(g.gap_indirect_ev, 4.0, 1e-9);
    assert_false(g.metallic);
    assert_false(g.closed);
    tb_model_free(m);
}

/* metal: E = -2t sum cos k_i +- s, s = sqrt(delta^2/4 + v^2) (analytic, lattice_models.h). Direct gap
 * 2s everywhere = 1.0770329614 eV; indirect min E+ - max E- = (-6t + s) - (6t - s) = 2s - 12t (3D),
 * 2s - 8t (2D): negative, a metal. VBM at (1/2,1/2,1/2), CBM at Gamma, both mesh points: 1e-9 eV. */
static void test_metal_indirect_negative(void **state)
{
    (void)state;
    double s = sqrt(0.25 + 0.04);
    const char *specs[2] = {"metal", "metal:dim=2"};
    const double indirect[2] = {2 * s - 12.0, 2 * s - 8.0};
    for (int i = 0; i < 2; i++) {
        tb_model *m = bs_test_build(specs[i]);
        gaps_result g;
        run_gaps(m, NULL, &g);
        assert_close(g.gap_direct_ev, 2 * s, 1e-9);
        assert_close(g.gap_indirect_ev, indirect[i], 1e-9);
        assert_true(g.metallic);
        assert_false(g.closed);
        for (int a = 0; a < m->dim; a++) {
            assert_close(g.k_vbm[a], 0.5, 1e-6);
            assert_true(bp_kdist(1, &g.k_cbm[a], (double[3]){0, 0, 0}) < 1e-6);
        }
        tb_model_free(m);
    }
}

/* graphene: E = +-t|1 + e^{ik.a1} + e^{ik.a2}| vanishes at K = (1/3,-1/3), K' (Rev. Mod. Phys. 81,
 * 109 (2009)): direct gap 0 at K or K' (a cone: the refined gap is linear in the position error, so
 * below BS_GAP_CLOSED_EV), a semimetal. */
static void test_graphene_gap_closes_at_K(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("graphene");
    gaps_opts o;
    gaps_opts_init(&o);
    o.mesh = 20; /* not a multiple of 3: K is not a mesh point and must be found by the refinement */
    gaps_result g;
    run_gaps(m, &o, &g);
    assert_true(g.gap_direct_ev < BS_GAP_CLOSED_EV);
    assert_true(g.closed);
    assert_true(g.metallic);
    const double K[3] = {1.0 / 3, -1.0 / 3, 0}, Kp[3] = {-1.0 / 3, 1.0 / 3, 0};
    double d = fmin(bp_kdist(2, g.k_direct, K), bp_kdist(2, g.k_direct, Kp));
    assert_true(d < 1e-5); /* gap 8 eV per reduced unit near K: 1e-4 eV means ~1e-5 */
    tb_model_free(m);
}

/* Reads the numpy/scipy reference of the table at path: 3 energies and 3 k-points. */
static int numpy_reference(const char *path, int nocc, int dim, double ref[12])
{
    char cmd[1024];
    snprintf(cmd, sizeof cmd, "/usr/bin/python3 %s %s %d %d", REF_SCRIPT, path, nocc, dim);
    FILE *p = popen(cmd, "r");
    if (!p) return -1;
    int n = 0;
    for (int i = 0; i < 12; i++)
        n += fscanf(p, "%lf", &ref[i]) == 1;
    int st = pclose(p);
    return n == 12 && st == 0 ? 0 : -1;
}

/* A generic wide-gap insulator (no symmetry, extremes at generic k) against numpy: the reference
 * (tests/topology/gaps_ref.py) scans a 28^dim grid with numpy's eigvalsh and refines with scipy's
 * Nelder-Mead to 1e-9 in k. Energies agree to 1e-6 eV: both minimisers stop within ~1e-6 in k of a
 * smooth extremum, where the energy error is quadratic (~1e-10 eV); 1e-6 leaves room for the
 * reference stopping early. Positions to 1e-4 (a smooth extremum is flat, positions less sharp). */
static void test_generic_insulator_against_numpy(void **state)
{
    (void)state;
    const int dims[2] = {3, 2};
    for (int t = 0; t < 2; t++) {
        tb_model *m = generic_model(4, dims[t], 12345 + t, 0.3);
        char path[] = "/tmp/bs_gaps_ref_XXXXXX";
        int fd = mkstemp(path);
        assert_true(fd >= 0);
        close(fd);
        bs_err err;
        assert_int_equal(hop_write(path, m, "generic insulator for test_gaps", &err), 0);
        double ref[12];
        int rc = numpy_reference(path, m->nocc, m->dim, ref);
        unlink(path);
        assert_int_equal(rc, 0);
        gaps_result g;
        run_gaps(m, NULL, &g);
        printf("  numpy: direct %.9f vbm %.9f cbm %.9f\n", ref[0], ref[1], ref[2]);
        assert_true(ref[0] > 2.0); /* wide gap by construction */
        assert_close(g.gap_direct_ev, ref[0], 1e-6);
        assert_close(g.vbm_ev, ref[1], 1e-6);
        assert_close(g.cbm_ev, ref[2], 1e-6);
        assert_close(g.gap_indirect_ev, ref[2] - ref[1], 2e-6);
        assert_true(bp_kdist(m->dim, g.k_direct, ref + 3) < 1e-4);
        assert_true(bp_kdist(m->dim, g.k_vbm, ref + 6) < 1e-4);
        assert_true(bp_kdist(m->dim, g.k_cbm, ref + 9) < 1e-4);
        assert_true(g.gap_indirect_ev <= g.gap_direct_ev + 1e-12);
        assert_false(g.metallic);
        tb_model_free(m);
    }
}

/* Writes the sp3 + spin-orbit test model `variant` (tests/topology/sp3_model.py) into a fresh
 * folder, loads its card, and reads the script's numpy/scipy reference (12 numbers). The caller
 * removes *dir (bs_test_rmtree) and frees the model. */
static tb_model *sp3_model(const char *variant, char *dir, size_t len, double ref[12])
{
    assert_int_equal(bs_test_tmpdir(dir, len, "sp3"), 0);
    char cmd[1024], card[512];
    snprintf(cmd, sizeof cmd, "/usr/bin/python3 %s %s %s", SP3_SCRIPT, dir, variant);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    int n = 0;
    for (int i = 0; i < 12; i++)
        n += fscanf(p, "%lf", &ref[i]) == 1;
    assert_int_equal(pclose(p), 0);
    assert_int_equal(n, 12);
    snprintf(card, sizeof card, "%s/sp3_%s.json", dir, variant);
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (src_load(card, &m, &err) != 0) fail_msg("%s: %s", card, err.msg);
    return m;
}

/* Distance of k from kref or from -kref: with time reversal (or inversion) E(k) = E(-k), so an
 * extremum comes with its image and either is right. */
static double kdist_pm(const double k[3], const double kref[3])
{
    const double mk[3] = {-kref[0], -kref[1], -kref[2]};
    return fmin(bp_kdist(3, k, kref), bp_kdist(3, k, mk));
}

/* Band edges at general k: the 16-state sp3 + spin-orbit model of tests/topology/sp3_model.py
 * (triclinic cell, Slater-Koster hoppings to the third shell and beyond; invented parameters)
 * in its semimetal variant (valence maximum ~42 meV above the conduction minimum, direct gap
 * ~11 meV) and its insulator variant (gap ~14 meV), all three extremes at least 0.19 reduced units
 * from every TRIM. Reference: the script's dense numpy grid (24^3) refined with scipy's
 * Nelder-Mead from every grid extremum within 0.3 eV of the best. The gap search must find the
 * same extremes with its default coarse mesh, to 1e-5 eV (both refine smooth extremes to ~1e-6 in
 * k; 1e-5 eV leaves room for a stop a little early on these flat, 20-meV-scale bands) and the
 * positions to 1e-3 (up to k -> -k). The semimetal's indirect gap must be negative. A third
 * parameter set ("basins", indirect gap -10 meV, valence maximum at Gamma) has a direct gap with
 * many competing minima: refining only the six best basins of a 10^3 or 14^3 mesh gave 72.6 meV
 * where the minimum is 48.2 meV at a general k (regression, 2026-12-02); it is checked at both. */
static void test_sp3_edges_at_general_k(void **state)
{
    (void)state;
    const char *variants[4] = {"semimetal", "insulator", "basins", "basins"};
    const int meshes[4] = {0, 0, 10, 14};
    for (int v = 0; v < 4; v++) {
        char dir[256];
        double ref[12];
        tb_model *m = sp3_model(variants[v], dir, sizeof dir, ref);
        gaps_opts o;
        gaps_opts_init(&o);
        o.mesh = meshes[v];
        gaps_result g;
        run_gaps(m, &o, &g);
        printf("  numpy: direct %.9f vbm %.9f cbm %.9f indirect %.9f\n", ref[0], ref[1], ref[2],
               ref[2] - ref[1]);
        printf("  ours:  direct %.9f vbm %.9f cbm %.9f resolution %.2g eV, %s\n", g.gap_direct_ev, g.vbm_ev,
               g.cbm_ev, g.resolution_ev, g.converged ? "converged" : "not converged");
        assert_close(g.gap_direct_ev, ref[0], 1e-5);
        assert_close(g.vbm_ev, ref[1], 1e-5);
        assert_close(g.cbm_ev, ref[2], 1e-5);
        assert_true(kdist_pm(g.k_direct, ref + 3) < 1e-3);
        assert_true(kdist_pm(g.k_vbm, ref + 6) < 1e-3);
        assert_true(kdist_pm(g.k_cbm, ref + 9) < 1e-3);
        assert_true(g.converged);
        assert_int_equal(g.metallic, v != 1);
        bs_test_rmtree(dir);
        tb_model_free(m);
    }
}

/* The convergence check is honest: on the sp3 semimetal with coarse meshes (2 to 8 points per
 * direction) and at most two levels, every gap is either within the stated resolution of the
 * numpy/scipy reference or the search says it did not converge (below 4 points it never claims
 * to: there a 2- or 3-point mesh and its displacements all missed a 60 meV deep basin); with the default
 * three levels the indirect gap's sign (the insulator/semimetal call) is right or flagged as unsure
 * (gaps_unsure). */
static void test_sp3_resolution_is_honest(void **state)
{
    (void)state;
    char dir[256];
    double ref[12];
    tb_model *m = sp3_model("semimetal", dir, sizeof dir, ref);
    const double ind_ref = ref[2] - ref[1];
    for (int mesh = 2; mesh <= 8; mesh += 1)
        for (int levels = 2; levels <= 3; levels++) {
            gaps_opts o;
            gaps_opts_init(&o);
            o.mesh = mesh;
            o.levels = levels;
            gaps_result g;
            run_gaps(m, &o, &g);
            double off =
                fmax(fabs(g.gap_direct_ev - ref[0]), fmax(fabs(g.vbm_ev - ref[1]), fabs(g.cbm_ev - ref[2])));
            printf("    mesh %d levels %d: off by %.2g eV, resolution %.2g eV, %s\n", mesh, levels, off,
                   g.resolution_ev, g.converged ? "converged" : "not converged");
            assert_true(off <= g.resolution_ev + 1e-6 || !g.converged);
            assert_true(g.resolution_ev >= GAPS_CONV_TOL_EV);
            if (levels == 3)
                assert_true((g.gap_indirect_ev < 0) == (ind_ref < 0) ||
                            gaps_unsure(g.gap_indirect_ev, g.resolution_ev));
        }
    bs_test_rmtree(dir);
    tb_model_free(m);
}

/* bp_bands against a direct diagonalisation (hk_build_direct + all eigenvalues) for a small model
 * (full-spectrum path) and a 40-state one (two-eigenvalue zheevr path): same eigenvalues to 1e-10 eV
 * (round-off of two LAPACK drivers on eV-sized matrices, common practice). */
static void test_band_pair_both_solver_paths(void **state)
{
    (void)state;
    const int sizes[2] = {4, 40};
    for (int t = 0; t < 2; t++) {
        tb_model *m = generic_model(sizes[t], 3, 777 + t, 0.7);
        int n = m->norb;
        bs_err err;
        hk_engine *hk = NULL;
        bp_eval *e = NULL;
        eig_ws *ws = NULL;
        assert_int_equal(hk_create(m, 16, &hk, &err), 0);
        assert_int_equal(bp_create(m, hk, 0.0, &e, &err), 0);
        assert_int_equal(eig_create(n, &ws, &err), 0);
        double k[3 * 37], lo[37], hi[37];
        uint64_t s = 99;
        for (int i = 0; i < 3 * 37; i++)
            k[i] = lcg(&s) * 3.0;
        assert_int_equal(bp_bands(e, 37, k, lo, hi, &err), 0); /* 37 > batch 16: three batches */
        assert_int_equal(bp_count(e), 37);
        double complex *H = malloc((size_t)n * n * sizeof *H);
        double *w = malloc((size_t)n * sizeof *w);
        for (int j = 0; j < 37; j++) {
            hk_build_direct(m, k + 3 * j, H);
            assert_int_equal(eig_values(ws, H, w, &err), 0);
            assert_close(lo[j], w[m->nocc - 1], 1e-10);
            assert_close(hi[j], w[m->nocc], 1e-10);
        }
        free(H);
        free(w);
        eig_free(ws);
        bp_free(e);
        hk_free(hk);
        tb_model_free(m);
    }
}

/* Bad input and an expired budget give their error codes and messages. */
static void test_errors(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("atomic");
    hk_engine *hk = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(hk_create(m, 64, &hk, &err), 0);
    gaps_result g;
    gaps_opts o;
    gaps_opts_init(&o);
    o.mesh = 1;
    assert_int_equal(gaps_find(m, hk, &o, &g, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "points per direction"));

    bs_err_clear(&err);
    gaps_opts_init(&o);
    o.deadline = bs_now() - 1.0; /* already past */
    assert_int_equal(gaps_find(m, hk, &o, &g, &err), BS_ETIMEOUT);
    assert_non_null(strstr(err.msg, "time budget"));

    bs_err_clear(&err);
    int nocc = m->nocc;
    m->nocc = m->norb; /* no empty band */
    assert_int_equal(gaps_find(m, hk, NULL, &g, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "filling"));
    m->nocc = nocc;

    bs_err_clear(&err);
    tb_model *other = bs_test_build("graphene"); /* 2 states against an engine for 4 */
    assert_int_equal(gaps_find(other, hk, NULL, &g, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "states"));
    tb_model_free(other);
    hk_free(hk);
    tb_model_free(m);
}

/* Timing of the band evaluation at several sizes, printed for the report (no assertion on time:
 * STYLE.md, deterministic tests). */
static void test_timing_report(void **state)
{
    (void)state;
    const int sizes[3] = {8, 24, 48};
    for (int t = 0; t < 3; t++) {
        tb_model *m = generic_model(sizes[t], 3, 4242 + t, 0.7);
        bs_err err;
        hk_engine *hk = NULL;
        assert_int_equal(hk_create(m, 128, &hk, &err), 0);
        gaps_opts o;
        gaps_opts_init(&o);
        o.mesh = 6;
        gaps_result g;
        assert_int_equal(gaps_find(m, hk, &o, &g, &err), 0);
        printf("  timing: norb %d, %lld k-points in %.3f s (%.1f us per k)\n", m->norb, g.nk_evaluated,
               g.seconds, 1e6 * g.seconds / (double)g.nk_evaluated);
        assert_true(g.gap_direct_ev >= 0);
        hk_free(hk);
        tb_model_free(m);
    }
}

/* gaps_find_near: the extremes of a noisy copy H of the sp3 + spin-orbit model (insulator and
 * semimetal variants, band edges at general k; fit-like noise, tests/noise.h, three seeds) from a
 * search on the clean model H0 (time reversal exact: E(-k) = E(k), halved meshes). Weyl's
 * inequality (common practice, e.g. Horn and Johnson, Matrix Analysis, from memory) puts every band
 * of H within the noise bound b >= max_k ||H(k) - H0(k)|| of H0's, so each extreme found must lie
 * within b (the direct gap within 2 b) of the numpy/scipy reference of H0
 * (tests/topology/sp3_model.py), and it must equal what the full search on H itself finds (to 1e-5
 * eV, the tolerance of the test above), at -k as well as k since H is not even. The noise, 2e-5 of
 * the largest hopping, gives b ~ 5 meV, a quarter of the insulator's direct gap. */
static void test_polish_from_nearby_model(void **state)
{
    (void)state;
    const char *variants[2] = {"insulator", "semimetal"};
    for (int v = 0; v < 2; v++) {
        char dir[256];
        double ref[12];
        tb_model *m0 = sp3_model(variants[v], dir, sizeof dir, ref);
        hk_engine *hk0 = NULL;
        bp_eval *e0 = NULL;
        bs_err err;
        bs_err_clear(&err);
        assert_int_equal(hk_create(m0, 128, &hk0, &err), 0);
        for (int seed = 1; seed <= 3; seed++) {
            tb_model *m = NULL;
            double bound = 0;
            assert_int_equal(bs_noise_model(m0, 2e-5, (uint64_t)seed, &m, &bound), 0);
            hk_engine *hk = NULL;
            bp_eval *e = NULL;
            assert_int_equal(hk_create(m, 128, &hk, &err), 0);
            assert_int_equal(bp_create(m, hk, 0.0, &e, &err), 0);
            assert_int_equal(bp_create(m0, hk0, 0.0, &e0, &err), 0);
            bp_set_even(e0, 1);
            gaps_result gp, gf;
            assert_int_equal(gaps_find_near(e0, e, bound, NULL, &gp, &err), 0);
            run_gaps(m, NULL, &gf);
            printf(
                "  %s seed %d, noise bound %.3g eV: near search direct %.9f vbm %.9f cbm %.9f (%lld + %lld "
                "k, shift %.2g eV); full search %.9f %.9f %.9f (%lld k)\n",
                variants[v], seed, bound, gp.gap_direct_ev, gp.vbm_ev, gp.cbm_ev, bp_count(e0),
                gp.nk_evaluated, gp.shift_ev, gf.gap_direct_ev, gf.vbm_ev, gf.cbm_ev, gf.nk_evaluated);
            assert_close(gp.gap_direct_ev, ref[0], 2 * bound);
            assert_close(gp.vbm_ev, ref[1], bound);
            assert_close(gp.cbm_ev, ref[2], bound);
            assert_true(gp.shift_ev <= bound);
            assert_close(gp.gap_direct_ev, gf.gap_direct_ev, 1e-5);
            assert_close(gp.vbm_ev, gf.vbm_ev, 1e-5);
            assert_close(gp.cbm_ev, gf.cbm_ev, 1e-5);
            assert_int_equal(gp.metallic, gf.metallic);
            /* The insulator's basins are few and deep: halved meshes make the two searches cheaper
             * than the one on H. (The semimetal's flat 20-meV bands put many basins within the
             * slack, which costs more than the search on H: the diagnosis does not go this way
             * where the gap is not wide against the bound.) */
            if (v == 0) assert_true(bp_count(e0) + gp.nk_evaluated < gf.nk_evaluated);
            bp_free(e0);
            e0 = NULL;
            bp_free(e);
            hk_free(hk);
            tb_model_free(m);
        }
        hk_free(hk0);
        bs_test_rmtree(dir);
        tb_model_free(m0);
    }
}

/* gaps_find_near where the choice of basin is the noise's: an invented spinless two-band insulator
 * whose bands depend on cos 2 pi k_a only, each axis with nearest and second-neighbour hoppings
 * that put the conduction minimum and the valence maximum at general k (cos 2 pi k_a = t1 / 4 t2),
 * so at eight points (+-k1, +-k2, +-k3) of equal energy in the clean model H0. Fit-like noise of
 * 1e-3 of the largest hopping (tests/noise.h, bound b >= max_k ||H - H0|| by the sum over R) splits
 * them by up to a few meV, and the extreme of H lies in whichever basin the noise favours, not
 * necessarily the one H0's search ends in: H's extremes from the search on H0 must equal those of
 * the full search on H (to 1e-5 eV, as above; the full search is checked against numpy in
 * test_generic_insulator_against_numpy). With the slack of Weyl's inequality (each band of H
 * within b of H0's; common practice, Horn and Johnson, Matrix Analysis, from memory) removed from
 * gaps_find_near, seed 1's valence maximum comes out 0.16 meV low (seen in review, 2026-12-02),
 * while test_polish_from_nearby_model still passes. */
static tb_model *cos_insulator(void)
{
    tb_model *m = NULL;
    bs_err err;
    assert_int_equal(tb_model_create(2, 13, 0, &m, &err), 0);
    m->dim = 3;
    m->nocc = 1;
    snprintf(m->id, sizeof m->id, "cos-insulator");
    for (int i = 0; i < 3; i++)
        m->lattice[i][i] = 3.0;
    const double t1[3] = {0.3, 0.25, 0.2}, t2[3] = {0.2, 0.15, 0.12};
    m->H[0] = 1.5;  /* (0, 0) at R = 0 */
    m->H[3] = -1.5; /* (1, 1) */
    m->deg[0] = 1;
    int r = 1;
    for (int a = 0; a < 3; a++)
        for (int step = 1; step <= 2; step++)
            for (int sgn = 1; sgn >= -1; sgn -= 2, r++) {
                m->R[r][a] = sgn * step;
                m->deg[r] = 1;
                double complex *h = m->H + 4 * r;
                h[0] = step == 1 ? -t1[a] : t2[a]; /* conduction: minimum at general k */
                h[3] = step == 1 ? 0.22 : -0.14;   /* valence: maximum at general k */
                if (step == 1) h[1] = h[2] = 0.05; /* weak real hybridisation */
            }
    assert_int_equal(r, 13);
    assert_int_equal(tb_model_validate(m, 0.0, "cos insulator", &err), 0);
    return m;
}

static void test_polish_picks_the_noise_basin(void **state)
{
    (void)state;
    tb_model *m0 = cos_insulator();
    hk_engine *hk0 = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(hk_create(m0, 128, &hk0, &err), 0);
    for (int seed = 1; seed <= 3; seed++) {
        tb_model *m = NULL;
        double bound = 0;
        assert_int_equal(bs_noise_model(m0, 1e-3, (uint64_t)seed, &m, &bound), 0);
        hk_engine *hk = NULL;
        bp_eval *e = NULL, *e0 = NULL;
        assert_int_equal(hk_create(m, 128, &hk, &err), 0);
        assert_int_equal(bp_create(m, hk, 0.0, &e, &err), 0);
        assert_int_equal(bp_create(m0, hk0, 0.0, &e0, &err), 0);
        bp_set_even(e0, 1);
        gaps_result gp, gf;
        assert_int_equal(gaps_find_near(e0, e, bound, NULL, &gp, &err), 0);
        run_gaps(m, NULL, &gf);
        printf("  seed %d, noise bound %.3g eV: near search direct %.9f vbm %.9f cbm %.9f; full search "
               "%.9f %.9f %.9f\n",
               seed, bound, gp.gap_direct_ev, gp.vbm_ev, gp.cbm_ev, gf.gap_direct_ev, gf.vbm_ev, gf.cbm_ev);
        assert_true(gf.gap_indirect_ev > 4 * bound); /* an insulator at this noise */
        assert_close(gp.gap_direct_ev, gf.gap_direct_ev, 1e-5);
        assert_close(gp.vbm_ev, gf.vbm_ev, 1e-5);
        assert_close(gp.cbm_ev, gf.cbm_ev, 1e-5);
        bp_free(e0);
        bp_free(e);
        hk_free(hk);
        tb_model_free(m);
    }
    hk_free(hk0);
    tb_model_free(m0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_atomic_gap_analytic),
        cmocka_unit_test(test_metal_indirect_negative),
        cmocka_unit_test(test_graphene_gap_closes_at_K),
        cmocka_unit_test(test_generic_insulator_against_numpy),
        cmocka_unit_test(test_sp3_edges_at_general_k),
        cmocka_unit_test(test_sp3_resolution_is_honest),
        cmocka_unit_test(test_band_pair_both_solver_paths),
        cmocka_unit_test(test_polish_from_nearby_model),
        cmocka_unit_test(test_polish_picks_the_noise_basin),
        cmocka_unit_test(test_errors),
        cmocka_unit_test(test_timing_report),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
