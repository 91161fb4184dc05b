/* Surface Green's function by decimation (J. Phys. F 15, 851 (1985)): against a thick finite
 * slab, and the Fermi arcs of the weyl model ending at the projected nodes. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <complex.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/eig.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/slab.h"
#include "bandsieve/surfgreen.h"

static void open_slab(const char *spec, int h, int k, int l, int layers, tb_model **m, slab **s)
{
    bs_err err;
    bs_err_clear(&err);
    int G[3] = {h, k, l};
    if (lm_build(spec, m, &err) || slab_create(*m, G, layers, 0.0, s, &err))
        fail_msg("%s: %s", spec, err.msg);
}

/* A semi-infinite crystal seen from one end is, with a broadening eta, a thick slab seen from the
 * same end: the far surface is damped out over ~ v/eta. Reference: the Lorentzian-broadened
 * local density of states of the first principal layer of a 300-cell Kane-Mele ribbon from its
 * eigenvectors (direct diagonalisation, eig.h). Tolerance 1e-6 relative: at eta = 0.05 eV the
 * far edge contributes ~ e^{-300 eta / v} ~ 1e-6 at most (common practice). The two edges of a
 * zigzag ribbon differ (A- versus B-terminated, lambda_v != 0), so top and bottom are checked. */
static void test_decimation_vs_slab(void **state)
{
    (void)state;
    tb_model *m = NULL;
    slab *s = NULL;
    open_slab("kane_mele", 0, 1, 0, 300, &m, &s);
    int ns = slab_nstates(s), n = slab_norb(s) * slab_range(s);
    double complex *H = malloc((size_t)ns * ns * sizeof *H);
    double *E = malloc((size_t)ns * sizeof *E);
    eig_ws *ws = NULL;
    sg_ws *g = NULL;
    bs_err err;
    bs_err_clear(&err);
    double k[2] = {0.1, 0.0}, eta = 0.05;
    slab_hk(s, k, H);
    assert_int_equal(eig_create(ns, &ws, &err), 0);
    assert_int_equal(eig_vectors(ws, H, E, &err), 0);
    assert_int_equal(sg_create(s, &g, &err), 0);
    int differ = 0;
    for (double en = -3.0; en <= 3.0; en += 0.37) {
        double at, ab, rt = 0, rb = 0;
        assert_int_equal(sg_spectral(g, k, en, eta, SG_TOP, &at, &err), 0);
        assert_int_equal(sg_spectral(g, k, en, eta, SG_BOTTOM, &ab, &err), 0);
        for (int j = 0; j < ns; j++) {
            double wt = 0, wb = 0, lor = eta / M_PI / ((en - E[j]) * (en - E[j]) + eta * eta);
            for (int a = 0; a < n; a++) {
                wb += pow(cabs(H[a + (size_t)j * ns]), 2);
                wt += pow(cabs(H[(ns - 1 - a) + (size_t)j * ns]), 2);
            }
            rt += wt * lor;
            rb += wb * lor;
        }
        if (fabs(at - rt) > 1e-6 * rt || fabs(ab - rb) > 1e-6 * rb)
            fail_msg("E = %.2f: decimation top %.8f bottom %.8f, slab %.8f %.8f", en, at, ab, rt, rb);
        differ += fabs(at - ab) > 1e-3 * at;
    }
    assert_true(differ > 0);
    sg_free(g);
    eig_free(ws);
    free(H);
    free(E);
    slab_free(s);
    tb_model_free(m);
}

/* Arc end point along k'2 = 0: the first k'1 >= 0 where A(k', E = 0) exceeds 5% of its largest
 * value on the line (the surface state's weight on the first layer vanishes at the node, where
 * its decay length diverges). */
static double arc_end(sg_ws *g, int side, double sign)
{
    bs_err err;
    bs_err_clear(&err);
    double a[201], amax = 0;
    for (int i = 0; i <= 200; i++) {
        double k[2] = {sign * 0.5 * i / 200, 0.0};
        if (sg_spectral(g, k, 0.0, 0.01, side, &a[i], &err)) fail_msg("%s", err.msg);
        amax = fmax(amax, a[i]);
    }
    for (int i = 0; i <= 200; i++)
        if (a[i] > 0.05 * amax) return sign * 0.5 * i / 200;
    return NAN;
}

/* weyl model: nodes at reduced k = (+-w, 0, 0) (lattice_models.h; the two-band Weyl semimetal of
 * Phys. Rev. B 83, 205101 (2011), where Fermi arcs join the surface projections of nodes of
 * opposite chirality). On a surface containing the x axis, the arc at E = 0 runs along k'2 = 0
 * through k'1 = 1/2 and ends at the projections M (+-w, 0, 0) of the nodes. Tolerance 0.01: the sampling
 * step 0.0025 plus the eta = 0.01 eV broadening of the onset (the surface weight grows linearly
 * in |k - k_node|, so the 5% onset sits within ~0.005 of the node; from a first run, checked
 * against that estimate). Two surfaces ((001) and (010), whose bases differ) and two node
 * positions (w = 0.25, 0.15). */
static void test_weyl_arcs(void **state)
{
    (void)state;
    struct {
        const char *spec;
        double w;
        int G[3];
    } cases[] = {
        {"weyl", 0.25, {0, 0, 1}},
        {"weyl", 0.25, {0, 1, 0}},
        {"weyl:w=0.15", 0.15, {0, 0, 1}},
    };
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        tb_model *m = NULL;
        slab *s = NULL;
        open_slab(cases[c].spec, cases[c].G[0], cases[c].G[1], cases[c].G[2], 2, &m, &s);
        int M[3][3];
        slab_matrix(s, M);
        /* Projected nodes: k' = M k for k = (+-w, 0, 0); the first two components. */
        double node1 = M[0][0] * cases[c].w, node2 = M[1][0] * cases[c].w;
        assert_true(fabs(node2) < 1e-12); /* the node line projects onto k'2 = 0 */
        sg_ws *g = NULL;
        bs_err err;
        bs_err_clear(&err);
        assert_int_equal(sg_create(s, &g, &err), 0);
        for (int side = 0; side < 2; side++)
            for (int sg = -1; sg <= 1; sg += 2) {
                double end = arc_end(g, side, sg), want = sg * fabs(node1);
                if (!(fabs(end - want) < 0.01))
                    fail_msg("%s (%d%d%d) side %d: arc ends at %.4f, projected node %.4f", cases[c].spec,
                             cases[c].G[0], cases[c].G[1], cases[c].G[2], side, end, want);
            }
        /* Away from the arc line (k'2 = 0.2, beyond the arc's width) the weight stays near the
         * eta tail: well below 5% of the arc value 1/(pi eta) = 31.8 per eV (by construction). */
        double k[2] = {0.5, 0.2}, a;
        assert_int_equal(sg_spectral(g, k, 0.0, 0.01, SG_TOP, &a, &err), 0);
        assert_true(a < 0.05 / (M_PI * 0.01));
        sg_free(g);
        slab_free(s);
        tb_model_free(m);
    }
}

/* The map at E = 0: every point above 5% of the maximum lies on the arc line k'2 = 0 (within one
 * mesh step) and beyond the projected nodes |k'1| >= w (within one mesh step). */
static void test_weyl_map(void **state)
{
    (void)state;
    tb_model *m = NULL;
    slab *s = NULL;
    open_slab("weyl", 0, 0, 1, 2, &m, &s);
    sg_ws *g = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(sg_create(s, &g, &err), 0);
    enum { NM = 40 };
    double *map = malloc(NM * NM * sizeof *map), amax = 0;
    assert_int_equal(sg_map(g, 0.0, 0.01, SG_TOP, NM, NM, map, &err), 0);
    for (int i = 0; i < NM * NM; i++)
        amax = fmax(amax, map[i]);
    int on_arc = 0;
    for (int i1 = 0; i1 < NM; i1++)
        for (int i2 = 0; i2 < NM; i2++) {
            if (map[i1 * NM + i2] < 0.05 * amax) continue;
            double k1 = (double)i1 / NM - 0.5, k2 = (double)i2 / NM - 0.5;
            assert_true(fabs(k2) <= 1.0 / NM + 1e-12);
            assert_true(fabs(k1) >= 0.25 - 1.0 / NM);
            on_arc++;
        }
    assert_true(on_arc >= 10);
    free(map);
    sg_free(g);
    slab_free(s);
    tb_model_free(m);
}

static void test_bad_input(void **state)
{
    (void)state;
    tb_model *m = NULL;
    slab *s = NULL;
    open_slab("weyl", 0, 0, 1, 2, &m, &s);
    sg_ws *g = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(sg_create(s, &g, &err), 0);
    double k[2] = {0, 0}, a, buf[4];
    assert_int_equal(sg_spectral(g, k, 0.0, 0.0, SG_TOP, &a, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "broadening"));
    bs_err_clear(&err);
    assert_int_equal(sg_spectral(g, k, 0.0, 0.01, 7, &a, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(sg_path(g, 1, k, 2, 1.0, 0.0, 0.01, SG_TOP, buf, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(sg_map(g, 0.0, 0.01, SG_TOP, 0, 3, buf, &err), BS_EINVAL);
    sg_free(g);
    slab_free(s);
    tb_model_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_decimation_vs_slab),
        cmocka_unit_test(test_weyl_arcs),
        cmocka_unit_test(test_weyl_map),
        cmocka_unit_test(test_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
