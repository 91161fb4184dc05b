/* Tests of the node search (nodes.h): Weyl nodes and chiralities of the weyl model against its
 * analytic positions, nodal lines, graphene's Dirac points, the Fu-Kane-Mele diamond model swept
 * through its strong/weak transition with and without inversion breaking, errors, timings. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/clock.h"
#include "bandsieve/config.h"
#include "bandsieve/gaps.h"
#include "bandsieve/hk.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/nodes.h"

/* cmocka's float comparison is single precision; this one is double. */
#define assert_close(a, b, tol)                                                                              \
    do {                                                                                                     \
        double a_ = (a), b_ = (b);                                                                           \
        if (!(fabs(a_ - b_) <= (tol)))                                                                       \
            fail_msg("%s = %.12g, expected %.12g within %g", #a, a_, b_, (double)(tol));                     \
    } while (0)

typedef struct run {
    tb_model *m;
    hk_engine *hk;
    nodes_result r;
    gaps_result g;
} run;

/* Builds spec, runs the gap and node searches with default options (mesh overrides when > 0). */
static void run_spec(const char *spec, int mesh, run *x)
{
    bs_err err;
    bs_err_clear(&err);
    int rc = lm_build(spec, &x->m, &err);
    if (rc != 0) fail_msg("lm_build(%s): %s", spec, err.msg);
    assert_int_equal(hk_create(x->m, 128, &x->hk, &err), 0);
    nodes_opts o;
    nodes_opts_init(&o);
    o.mesh = mesh;
    nodes_result_init(&x->r);
    rc = nodes_find(x->m, x->hk, &o, &x->r, &err);
    if (rc != 0) fail_msg("nodes_find(%s): %s", spec, err.msg);
    gaps_opts go;
    gaps_opts_init(&go);
    go.mesh = mesh;
    rc = gaps_find(x->m, x->hk, &go, &x->g, &err);
    if (rc != 0) fail_msg("gaps_find(%s): %s", spec, err.msg);
    printf("  %-26s nodes %2d net %+d line %d (%d points) min gap %.2e eV; %lld k in %.3f s "
           "(gaps %.3f s)\n",
           spec, x->r.nnodes, x->r.net_chirality, x->r.nodal_line, x->r.nodal_points, x->r.min_gap_ev,
           x->r.nk_evaluated, x->r.seconds, x->g.seconds);
}

static void run_free(run *x)
{
    nodes_result_clear(&x->r);
    hk_free(x->hk);
    tb_model_free(x->m);
}

/* Index of the node within tol of k (modulo 1), or -1. */
static int node_at(const nodes_result *r, int dim, const double k[3], double tol)
{
    for (int i = 0; i < r->nnodes; i++)
        if (bp_kdist(dim, r->nodes[i].k, k) < tol) return i;
    return -1;
}

/* weyl: nodes at k = (+-w, 0, 0) exactly (sin ky = sin kz = 0, cos kx = cos k0), chirality at +w
 * sign det(d d_i/d k_j) = -sign(t^3 sin k0), the opposite at -w (analytic; lattice_models.h and
 * Phys. Rev. B 83, 205101 (2011) for the cone). Positions to 1e-6 (the brief's requirement; the
 * refinement stops at 1e-7), chirality exact (an integer flux), net zero (Nucl. Phys. B 185, 20
 * (1981)). The model breaks time reversal: +-w carry opposite chiralities, so the time-reversal
 * check must fail. */
static void test_weyl_nodes_analytic(void **state)
{
    (void)state;
    const char *specs[3] = {"weyl", "weyl:w=0.19", "weyl:t=-1,w=0.3"};
    const double w[3] = {0.25, 0.19, 0.3}, t[3] = {1, 1, -1};
    for (int c = 0; c < 3; c++) {
        run x;
        run_spec(specs[c], 0, &x);
        assert_int_equal(x.r.nnodes, 2);
        assert_int_equal(x.r.chirality_status, RES_DONE);
        assert_false(x.r.nodal_line);
        int expect = -(int)copysign(1.0, t[c] * t[c] * t[c] * sin(2 * M_PI * w[c]));
        const double kp[3] = {w[c], 0, 0}, km[3] = {-w[c], 0, 0};
        int ip = node_at(&x.r, 3, kp, 1e-6), im = node_at(&x.r, 3, km, 1e-6);
        assert_true(ip >= 0 && im >= 0);
        assert_int_equal(x.r.nodes[ip].chirality, expect);
        assert_int_equal(x.r.nodes[im].chirality, -expect);
        assert_int_equal(x.r.net_chirality, 0);
        for (int i = 0; i < 2; i++) {
            assert_true(x.r.nodes[i].gap_ev < BS_GAP_CLOSED_EV);
            assert_close(x.r.nodes[i].energy_ev, 0.0, 1e-9); /* H has no identity part: E = 0 */
            for (int a = 0; a < 3; a++)
                assert_true(x.r.nodes[i].k[a] >= 0 && x.r.nodes[i].k[a] < 1);
        }
        assert_false(nodes_check_time_reversal(&x.r, 3, 1e-5));
        /* The gap search alone reaches the node too: the touching is a cone from a mesh point. */
        assert_true(x.g.closed);
        run_free(&x);
    }
}

/* nodal_line: the bands touch on the loop k3 = 0, cos kx + cos ky = m - 1 (and none in k3 = 1/2
 * for m = 2, 2.5, where m + 1 > 2; analytic, lattice_models.h). Every traced point must lie on the
 * loop to 1e-5 (trace points are refined to 1e-6 in k; the loop condition is O(1) per unit k), the
 * trace must cover all four quadrants of (kx, ky) (a closed curve around Gamma, not a cluster), and
 * the extent is the largest minimum-image distance between loop points: for m = 2 the points
 * (+-1/4, 0, 0), 0.5 apart; the samples are 1/64 apart, so within 0.02. */
static void test_nodal_line_loop(void **state)
{
    (void)state;
    const char *specs[2] = {"nodal_line", "nodal_line:m=2.5"};
    const double mval[2] = {2.0, 2.5};
    for (int c = 0; c < 2; c++) {
        run x;
        run_spec(specs[c], 0, &x);
        assert_true(x.r.nodal_line);
        assert_int_equal(x.r.nnodes, 0);
        assert_true(x.r.nodal_points >= 20);
        int quadrant[4] = {0};
        for (int i = 0; i < x.r.nodal_points; i++) {
            const double *k = x.r.line_k[i];
            double k3 = k[2] - nearbyint(k[2]);
            assert_close(k3, 0.0, 1e-5);
            double kx = 2 * M_PI * k[0], ky = 2 * M_PI * k[1];
            assert_close(cos(kx) + cos(ky), mval[c] - 1.0, 1e-5);
            quadrant[(sin(kx) > 0) + 2 * (sin(ky) > 0)] = 1;
        }
        for (int q = 0; q < 4; q++)
            assert_true(quadrant[q]);
        if (c == 0) {
            assert_true(x.r.nodal_extent > 0.48);
            assert_true(x.r.nodal_extent <= 0.5 + 1e-9);
        }
        run_free(&x);
    }
}

/* graphene: Dirac points at K = (1/3, -1/3) and K' = (-1/3, 1/3) reduced (Rev. Mod. Phys. 81, 109
 * (2009); lattice_models.h), to 1e-6. In 2D a touching is not a Weyl node: chirality 0, status NA.
 * Mesh 20 does not contain K, so the refinement has to find it. */
static void test_graphene_dirac_points(void **state)
{
    (void)state;
    run x;
    run_spec("graphene", 20, &x);
    assert_int_equal(x.r.nnodes, 2);
    const double K[3] = {1.0 / 3, -1.0 / 3, 0}, Kp[3] = {-1.0 / 3, 1.0 / 3, 0};
    int i = node_at(&x.r, 2, K, 1e-6), j = node_at(&x.r, 2, Kp, 1e-6);
    assert_true(i >= 0 && j >= 0 && i != j);
    assert_int_equal(x.r.nodes[i].chirality, 0);
    assert_int_equal(x.r.nodes[j].chirality, 0);
    assert_int_equal(x.r.chirality_status, RES_NA);
    assert_false(x.r.nodal_line);
    assert_true(nodes_check_time_reversal(&x.r, 2, 1e-5)); /* K and K' are each other's -k */
    run_free(&x);
}

/* Fu-Kane-Mele diamond model with inversion (stag = 0), swept by the [111] bond distortion dt:
 * the gap closes only at dt = 0, at the three X points (0,1/2,1/2), (1/2,0,1/2), (1/2,1/2,0)
 * (Phys. Rev. Lett. 98, 106803 (2007)). At X the nearest-neighbour sum reduces to dt (the four
 * equal bonds cancel) and the spin-orbit term vanishes, so the gap at X is 2|dt|: an analytic upper
 * bound on the direct gap. The X touchings are Dirac points (two Kramers pairs): flux 0. */
static void test_fkm_inversion_symmetric_sweep(void **state)
{
    (void)state;
    const double dts[5] = {-0.2, -0.03, 0.0, 0.03, 0.2};
    for (int c = 0; c < 5; c++) {
        char spec[64];
        snprintf(spec, sizeof spec, "fkm:dt=%g,stag=0", dts[c]);
        run x;
        run_spec(spec, 0, &x);
        if (dts[c] != 0.0) {
            assert_int_equal(x.r.nnodes, 0);
            assert_false(x.r.nodal_line);
            assert_false(x.g.closed);
            assert_true(x.g.gap_direct_ev > 0.5 * fabs(dts[c])); /* open on a scale set by dt */
            assert_true(x.g.gap_direct_ev <= 2 * fabs(dts[c]) + 1e-9);
        } else {
            assert_true(x.g.closed);
            assert_int_equal(x.r.nnodes, 3);
            const double X[3][3] = {{0, 0.5, 0.5}, {0.5, 0, 0.5}, {0.5, 0.5, 0}};
            for (int i = 0; i < 3; i++) {
                int n = node_at(&x.r, 3, X[i], 1e-6);
                assert_true(n >= 0);
                assert_int_equal(x.r.nodes[n].chirality, 0);
            }
            assert_int_equal(x.r.chirality_status, RES_DONE);
            assert_true(nodes_check_time_reversal(&x.r, 3, 1e-5));
        }
        assert_int_equal(x.r.net_chirality, 0);
        run_free(&x);
    }
}

/* Smallest distance from node i to a node of the opposite chirality, and whether that node is also
 * the nearest of all. */
static double opposite_partner(const nodes_result *r, int i, int *nearest_is_opposite)
{
    double best = 1.0, best_any = 1.0;
    int any_opp = 0;
    for (int j = 0; j < r->nnodes; j++) {
        if (j == i) continue;
        double d = bp_kdist(3, r->nodes[i].k, r->nodes[j].k);
        int opp = r->nodes[j].chirality == -r->nodes[i].chirality;
        if (opp && d < best) best = d;
        if (d < best_any) {
            best_any = d;
            any_opp = opp;
        }
    }
    *nearest_is_opposite = any_opp;
    return best;
}

/* The same sweep with inversion broken (stag = 0.3): the transition between the strong and weak
 * phases opens a Weyl semimetal window of finite width (New J. Phys. 9, 356 (2007); Phys. Rev. B
 * 78, 165313 (2008)). Checked: gapped at dt = +-0.1 with no nodes; nodes at dt = -0.03, 0, 0.03
 * (where the inversion-symmetric model above is gapped), in sets of four related by time reversal
 * (k -> -k, same chirality), net chirality zero at every point (Nucl. Phys. B 185, 20 (1981)).
 * Pairs: towards the edge of the window (dt = 0.045, the gap opens again by 0.05 in this sweep)
 * every node's nearest neighbour has the opposite chirality and that pair distance shrinks, as
 * pairs of opposite chirality meet and annihilate; a node never disappears alone. */
static void test_fkm_weyl_window(void **state)
{
    (void)state;
    const double dts[7] = {-0.1, -0.03, 0.0, 0.03, 0.04, 0.045, 0.1};
    double pair_dist[7] = {0};
    for (int c = 0; c < 7; c++) {
        char spec[64];
        snprintf(spec, sizeof spec, "fkm:dt=%g,stag=0.3", dts[c]);
        run x;
        run_spec(spec, 0, &x);
        assert_int_equal(x.r.net_chirality, 0);
        assert_false(x.r.nodal_line);
        if (fabs(dts[c]) > 0.09) {
            assert_int_equal(x.r.nnodes, 0);
            assert_false(x.g.closed);
        } else {
            assert_true(x.r.nnodes >= 4);
            assert_int_equal(x.r.nnodes % 4, 0);
            assert_int_equal(x.r.chirality_status, RES_DONE);
            assert_true(nodes_check_time_reversal(&x.r, 3, 1e-5));
            for (int i = 0; i < x.r.nnodes; i++) {
                assert_true(abs(x.r.nodes[i].chirality) == 1);
                assert_true(x.r.nodes[i].gap_ev < BS_GAP_CLOSED_EV);
            }
            /* The gap search's few basins may miss generic nodes; merged with the nodes it closes. */
            gaps_merge_nodes(&x.g, &x.r);
            assert_true(x.g.closed);
            double dmax = 0;
            for (int i = 0; i < x.r.nnodes; i++) {
                int near_opp = 0;
                double d = opposite_partner(&x.r, i, &near_opp);
                if (dts[c] >= 0.04) assert_true(near_opp);
                if (d > dmax) dmax = d;
            }
            pair_dist[c] = dmax;
        }
        run_free(&x);
    }
    printf("  largest opposite-pair distance: dt 0.03 %.4f, 0.04 %.4f, 0.045 %.4f\n", pair_dist[3],
           pair_dist[4], pair_dist[5]);
    assert_true(pair_dist[5] < pair_dist[4]);
    assert_true(pair_dist[4] < pair_dist[3]);
}

/* metal: the two bands are parallel, E+ - E- = 2 sqrt(delta^2/4 + v^2) everywhere (analytic,
 * lattice_models.h): no point stands out, no refinement starts, no node. atomic: 4 eV gap, none. */
static void test_no_nodes_without_touching(void **state)
{
    (void)state;
    const char *specs[2] = {"metal", "atomic"};
    for (int c = 0; c < 2; c++) {
        run x;
        run_spec(specs[c], 0, &x);
        assert_int_equal(x.r.nnodes, 0);
        assert_false(x.r.nodal_line);
        assert_false(x.r.degenerate);
        assert_int_equal(x.r.nstarts, 0);
        assert_true(x.r.min_gap_ev > 1.0);
        assert_int_equal(x.r.chirality_status, RES_NA);
        run_free(&x);
    }
}

/* The time-reversal check on hand-made node sets: a valid quartet, a missing partner, a partner
 * with the wrong chirality, and an unbalanced set (common practice: Weyl nodes with time reversal
 * come as k, -k with equal chirality, compensated by another such pair). */
static void test_time_reversal_check(void **state)
{
    (void)state;
    res_node q[4] = {{{0.1, 0.2, 0.3}, 1, 0, 0, ""},
                     {{0.9, 0.8, 0.7}, 1, 0, 0, ""},
                     {{0.4, 0.1, 0.2}, -1, 0, 0, ""},
                     {{0.6, 0.9, 0.8}, -1, 0, 0, ""}};
    nodes_result r;
    nodes_result_init(&r);
    r.nodes = q;
    r.nnodes = 4;
    assert_true(nodes_check_time_reversal(&r, 3, 1e-6));
    r.nnodes = 3;
    assert_false(nodes_check_time_reversal(&r, 3, 1e-6));
    r.nnodes = 4;
    q[1].chirality = -1;
    assert_false(nodes_check_time_reversal(&r, 3, 1e-6));
    q[1].chirality = 1;
    q[2].chirality = q[3].chirality = 1; /* partners fine, but net +4 */
    assert_false(nodes_check_time_reversal(&r, 3, 1e-6));
    r.nodes = NULL;
    r.nnodes = 0;
    assert_true(nodes_check_time_reversal(&r, 3, 1e-6));
}

/* A mesh shared with the gap search gives the same nodes without evaluating it again. */
static void test_shared_mesh_and_diag(void **state)
{
    (void)state;
    bs_err err;
    tb_model *m = NULL;
    hk_engine *hk = NULL;
    bp_eval *e = NULL;
    bp_mesh *g = NULL;
    assert_int_equal(lm_build("weyl", &m, &err), 0);
    assert_int_equal(hk_create(m, 64, &hk, &err), 0);
    assert_int_equal(bp_create(m, hk, 0.0, &e, &err), 0);
    assert_int_equal(bp_mesh_eval(e, 16, &g, &err), 0);
    gaps_opts go;
    gaps_opts_init(&go);
    go.grid = g;
    gaps_result gr;
    assert_int_equal(gaps_find_eval(e, &go, &gr, &err), 0);
    nodes_opts o;
    nodes_opts_init(&o);
    o.grid = g;
    nodes_result r;
    nodes_result_init(&r);
    assert_int_equal(nodes_find_eval(m, e, &o, &r, &err), 0);
    assert_int_equal(r.nnodes, 2);
    assert_int_equal(r.mesh, 16);
    assert_int_equal(r.net_chirality, 0);
    gaps_merge_nodes(&gr, &r);
    assert_true(gr.gap_direct_ev < BS_GAP_CLOSED_EV);
    nodes_result_clear(&r);
    bp_mesh_free(g);
    bp_free(e);
    hk_free(hk);
    tb_model_free(m);
}

/* Errors: an expired budget, a bad filling, a mesh of the wrong dimension. */
static void test_errors(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL, *m2 = NULL;
    hk_engine *hk = NULL, *hk2 = NULL;
    assert_int_equal(lm_build("weyl", &m, &err), 0);
    assert_int_equal(hk_create(m, 64, &hk, &err), 0);
    nodes_opts o;
    nodes_opts_init(&o);
    o.deadline = bs_now() - 1.0;
    nodes_result r;
    nodes_result_init(&r);
    assert_int_equal(nodes_find(m, hk, &o, &r, &err), BS_ETIMEOUT);
    assert_non_null(strstr(err.msg, "time budget"));

    bs_err_clear(&err);
    m->nocc = 0;
    assert_int_equal(nodes_find(m, hk, NULL, &r, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "filling"));
    m->nocc = 1;

    bs_err_clear(&err);
    assert_int_equal(lm_build("graphene", &m2, &err), 0);
    assert_int_equal(hk_create(m2, 64, &hk2, &err), 0);
    bp_eval *e2 = NULL;
    bp_mesh *g2 = NULL;
    assert_int_equal(bp_create(m2, hk2, 0.0, &e2, &err), 0);
    assert_int_equal(bp_mesh_eval(e2, 8, &g2, &err), 0);
    o.deadline = 0;
    o.grid = g2; /* a 2D mesh for the 3D weyl model */
    assert_int_equal(nodes_find(m, hk, &o, &r, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "dimension"));
    nodes_result_clear(&r);
    bp_mesh_free(g2);
    bp_free(e2);
    hk_free(hk2);
    tb_model_free(m2);
    hk_free(hk);
    tb_model_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_weyl_nodes_analytic),
        cmocka_unit_test(test_nodal_line_loop),
        cmocka_unit_test(test_graphene_dirac_points),
        cmocka_unit_test(test_fkm_inversion_symmetric_sweep),
        cmocka_unit_test(test_fkm_weyl_window),
        cmocka_unit_test(test_no_nodes_without_touching),
        cmocka_unit_test(test_time_reversal_check),
        cmocka_unit_test(test_shared_mesh_and_diag),
        cmocka_unit_test(test_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
