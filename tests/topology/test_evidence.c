/* Tests of the diagnosis's evidence plan (diagnosis.c, parities_decisive) and of the meshes that use
 * E(-k) = E(k) (bandpair.h, bp_set_even): skipping the Wannier-centre cross-check where the parities
 * are decisive, and halving the gap meshes, must leave every answer as it is with every method run.
 * The tier threshold is lowered to the 4-state models here (diag_opts.tier_min_norb) so that the
 * published models exercise the plan. */
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

#include "bandsieve/bandpair.h"
#include "bandsieve/diagnosis.h"
#include "bandsieve/gaps.h"
#include "bandsieve/hk.h"

static void run(const tb_model *m, int verify, int tier_min_norb, res_diag *r)
{
    bs_err err;
    bs_err_clear(&err);
    diag_opts o = {0};
    o.seed = 1;
    o.verify = verify;
    o.tier_min_norb = tier_min_norb;
    res_init(r);
    if (diag_run(m, &o, r, &err) != 0) fail_msg("%s: %s", m->id, err.msg);
}

/* The stages listed in r->evidence add up to r->k_points (the accounting is complete). */
static void check_accounting(const res_diag *r)
{
    long long sum = 0;
    const char *p = r->evidence;
    while (*p) {
        const char *colon = strchr(p, ':');
        assert_non_null(colon);
        sum += strtoll(colon + 1, (char **)&p, 10);
        if (*p == ',') p++;
    }
    assert_true(sum == r->nk_evaluated);
}

/* Fu-Kane-Mele diamond, strong (dt > 0) and weak (dt < 0) TI: 1;111 and 0;111 from the parities
 * (Phys. Rev. Lett. 98, 106803 (2007); parity criterion Phys. Rev. B 76, 045302 (2007)). Inversion
 * and time reversal exact, gap wide: the parities are decisive, the flow is skipped, and the
 * indices, the class and the gaps equal those with every method run (--verify), where the flow
 * agrees. The gaps agree to 1e-9 eV: both runs refine the same minima to tol_k = 1e-6 from the
 * same mesh values (copies of partners are equal to round-off), so only round-off separates them. */
static void test_decisive_parities_skip_the_flow(void **state)
{
    (void)state;
    const char *specs[] = {"fkm:dt=0.4", "fkm:dt=-0.4"};
    for (int i = 0; i < 2; i++) {
        tb_model *m = bs_test_build(specs[i]);
        res_diag t, v;
        run(m, 0, 4, &t);
        run(m, 1, 4, &v);
        assert_string_equal(res_class_name(t.cls), res_class_name(v.cls));
        assert_int_equal(t.z2_status, RES_DONE);
        assert_memory_equal(t.z2, v.z2, sizeof t.z2);
        assert_int_equal(t.z2[1] + t.z2[2] + t.z2[3], 3);
        assert_int_equal(t.z2[0], i == 0 ? 1 : 0);
        assert_int_equal(t.z2_wcc_status, RES_NA);
        assert_int_equal(v.z2_wcc_status, RES_DONE);
        assert_memory_equal(v.z2_parity, v.z2_wcc, sizeof v.z2);
        assert_true(strstr(t.evidence_skipped, "wcc: parities decisive") != NULL);
        assert_string_equal(v.evidence_skipped, "");
        assert_null(strstr(t.evidence, "wcc:"));
        assert_non_null(strstr(v.evidence, "wcc:"));
        assert_true(strstr(t.reason, "cross-check skipped") != NULL);
        /* the cap: just under two agreeing methods (0.97) */
        assert_true(t.confidence <= 0.96 + 1e-12 && t.confidence < v.confidence);
        assert_true(t.nk_evaluated < v.nk_evaluated);
        assert_true(fabs(t.gap_direct_ev - v.gap_direct_ev) < 1e-9);
        assert_true(fabs(t.gap_indirect_ev - v.gap_indirect_ev) < 1e-9);
        check_accounting(&t);
        check_accounting(&v);
        res_clear(&t);
        res_clear(&v);
        tb_model_free(m);
    }
}

/* Below the tier threshold (the default, 16 states) nothing is skipped: both methods run on the
 * 4-state model, as test_diagnosis.c expects. */
static void test_small_models_run_every_method(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("fkm:dt=0.4");
    res_diag r;
    run(m, 0, 0, &r);
    assert_int_equal(r.z2_parity_status, RES_DONE);
    assert_int_equal(r.z2_wcc_status, RES_DONE);
    assert_string_equal(r.evidence_skipped, "");
    check_accounting(&r);
    res_clear(&r);
    tb_model_free(m);
}

/* Not decisive, so the flow runs: no inversion (the staggered potential of the same paper breaks
 * it; the flow is then the only method), and a gap too small against the bands' width near the
 * dt = 0 closing at the X points (same paper): there a closing the coarse mesh missed is what the
 * strings would find. The Weyl window with inversion broken keeps its class either way
 * (New J. Phys. 9, 356 (2007)). */
static void test_not_decisive_runs_the_flow(void **state)
{
    (void)state;
    const char *specs[] = {"fkm:dt=0.4,stag=0.4", "fkm:dt=0.01,stag=0", "fkm:dt=0,stag=0.4"};
    for (int i = 0; i < 3; i++) {
        tb_model *m = bs_test_build(specs[i]);
        res_diag t, v;
        run(m, 0, 4, &t);
        run(m, 1, 4, &v);
        assert_string_equal(res_class_name(t.cls), res_class_name(v.cls));
        assert_memory_equal(t.z2, v.z2, sizeof t.z2);
        assert_string_equal(t.evidence_skipped, "");
        if (i == 2) assert_string_equal(res_class_name(t.cls), "Weyl semimetal");
        res_clear(&t);
        res_clear(&v);
        tb_model_free(m);
    }
}

/* A noisy fit of the strong TI (fitnoise 1e-4 of the largest hopping, tests/noise.h): both
 * symmetries approximate, restored with a safe margin, so the parities of the restored model are
 * decisive; the class and indices equal those with every method, and the confidence is no higher. */
static void test_noisy_fit_restored_is_decisive(void **state)
{
    (void)state;
    tb_model *clean = bs_test_build("fkm:dt=0.4"), *m = NULL;
    assert_int_equal(bs_noise_model(clean, 1e-4, 3, &m, NULL), 0);
    res_diag t, v;
    run(m, 0, 4, &t);
    run(m, 1, 4, &v);
    assert_string_equal(res_class_name(t.cls), "strong topological insulator");
    assert_string_equal(res_class_name(v.cls), res_class_name(t.cls));
    assert_memory_equal(t.z2, v.z2, sizeof t.z2);
    assert_true(t.restored != 0 && t.margin >= SYMFIT_MARGIN_SAFE);
    assert_true(strstr(t.evidence_skipped, "restored with a safe margin") != NULL);
    assert_true(t.confidence <= v.confidence);
    res_clear(&t);
    res_clear(&v);
    tb_model_free(m);
    tb_model_free(clean);
}

/* Meshes with E(-k) = E(k): time reversal makes E_n(-k) = E_n(k) (common practice), so a mesh
 * evaluated with bp_set_even must equal the full one to round-off (1e-12 eV on bands of a few eV,
 * zheevd's accuracy) at every point, offsets 0 and 1/2 alike. Rows (k2, k3) are diagonalised once
 * per pair with -k: at n = 8 and offset 0 the rows with 2 i = 0 mod 8 in each direction are their
 * own partners (2 x 2 of 64 rows in 3D, 2 of 8 in 2D), so (64 + 4)/2 = 34 and (8 + 2)/2 = 5 rows
 * of 8 points; at offset 1/2 no row is its own partner: 32 and 4 rows. */
static void test_even_mesh_equals_full(void **state)
{
    (void)state;
    const char *specs[] = {"fkm:dt=0.4,stag=0.4", "kane_mele"};
    for (int s = 0; s < 2; s++) {
        tb_model *m = bs_test_build(specs[s]);
        bs_err err;
        bs_err_clear(&err);
        hk_engine *hk = NULL;
        bp_eval *full = NULL, *even = NULL;
        assert_int_equal(hk_create(m, 16, &hk, &err), 0);
        assert_int_equal(bp_create(m, hk, 0, &full, &err), 0);
        assert_int_equal(bp_create(m, hk, 0, &even, &err), 0);
        bp_set_even(even, 1);
        const double offs[2][3] = {{0, 0, 0}, {0.5, 0.5, 0.5}};
        for (int o = 0; o < 2; o++) {
            bp_mesh *a = NULL, *b = NULL;
            long long c0 = bp_count(full), c1 = bp_count(even);
            assert_int_equal(bp_mesh_eval_offset(full, 8, offs[o], &a, &err), 0);
            assert_int_equal(bp_mesh_eval_offset(even, 8, offs[o], &b, &err), 0);
            for (int i = 0; i < a->npts; i++) {
                assert_true(fabs(a->lo[i] - b->lo[i]) < 1e-12);
                assert_true(fabs(a->hi[i] - b->hi[i]) < 1e-12);
            }
            int rows = m->dim == 3 ? (o == 0 ? 34 : 32) : (o == 0 ? 5 : 4);
            assert_int_equal(bp_count(full) - c0, a->npts);
            assert_int_equal(bp_count(even) - c1, rows * 8);
            bp_mesh_free(a);
            bp_mesh_free(b);
        }
        /* The gap search on the even evaluator: same gaps to 1e-9 eV (reason as above), fewer
         * diagonalisations. */
        gaps_result ga, gb;
        assert_int_equal(gaps_find_eval(full, NULL, &ga, &err), 0);
        assert_int_equal(gaps_find_eval(even, NULL, &gb, &err), 0);
        assert_true(fabs(ga.gap_direct_ev - gb.gap_direct_ev) < 1e-9);
        assert_true(fabs(ga.gap_indirect_ev - gb.gap_indirect_ev) < 1e-9);
        assert_true(gb.nk_evaluated < ga.nk_evaluated);
        bp_free(full);
        bp_free(even);
        hk_free(hk);
        tb_model_free(m);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_decisive_parities_skip_the_flow),
        cmocka_unit_test(test_small_models_run_every_method),
        cmocka_unit_test(test_not_decisive_runs_the_flow),
        cmocka_unit_test(test_noisy_fit_restored_is_decisive),
        cmocka_unit_test(test_even_mesh_equals_full),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
