/* Stored surface evidence: crossing counts between every pair of surface TRIMs checked against the
 * parity the bulk requires, pi_a pi_b with pi_a the product of the parity products delta of the two
 * bulk TRIMs projecting onto surface TRIM a (Phys. Rev. Lett. 98, 106803 (2007)); slabs grown when
 * the counts disagree; band-edge artefacts refused as Dirac points.
 * A strong TI has pi_a not all equal on every surface (same paper), so some pair must be odd. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <string.h>

#include "bandsieve/diagnosis.h"
#include "bandsieve/surfsummary.h"
#include "testutil.h"

/* From the parities (use_z2 = 0) or the Z2 indices alone (use_z2 = 1). */
static void surface_by(const char *spec, const int miller[3], int layers, int max_layers, int use_z2,
                       ssum_result *sr)
{
    tb_model *m = bs_test_build(spec);
    diag_opts o = {0};
    o.seed = 1;
    res_diag r;
    res_init(&r);
    bs_err err;
    bs_err_clear(&err);
    if (diag_run(m, &o, &r, &err) != 0) fail_msg("%s: %s", spec, err.msg);
    if (r.ntrim == 0) fail_msg("%s: no parities", spec);
    ssum_bulk bulk = {use_z2 ? NULL : r.par_delta, use_z2 ? 0 : r.ntrim, use_z2 ? r.z2 : NULL};
    if (use_z2 && r.z2_status != RES_DONE) fail_msg("%s: no Z2", spec);
    if (ssum_compute(m, miller, layers, max_layers, &bulk, sr, &err) != 0) fail_msg("%s", err.msg);
    res_clear(&r);
    tb_model_free(m);
}

static void surface_of(const char *spec, const int miller[3], int layers, int max_layers, ssum_result *sr)
{
    surface_by(spec, miller, layers, max_layers, 0, sr);
}

static int any_odd(const ssum_result *sr)
{
    for (int i = 0; i < sr->npair; i++)
        if (sr->pair[i].expected_odd == 1) return 1;
    return 0;
}

/* Every pair either agrees, or the result says inconclusive: never a silent disagreement. */
static void assert_honest(const ssum_result *sr)
{
    int agree = 1;
    for (int i = 0; i < sr->npair; i++)
        agree &= (sr->pair[i].n_top % 2 == 1) == sr->pair[i].expected_odd;
    if (sr->status == RES_SURF_CONSISTENT)
        assert_true(agree);
    else
        assert_int_equal(sr->status, RES_SURF_INCONCLUSIVE);
    assert_true(sr->reason[0] != '\0');
}

/* Fu-Kane-Mele strong TI (defaults: Z2 = 1;111) on the (0,0,1) plane of the fcc cell at 12 layers:
 * its surfaces still hybridise at the surface TRIM of the Dirac point, no Dirac point survives
 * (regression, issue 14, 2026-12-02). A strong TI has an odd number of surface Dirac points
 * (Phys. Rev. Lett. 98, 106803 (2007)), so the result must either grow the slab or say it is too
 * thin. The counts away from the TRIM already agree with the parities at 12 layers, so the slab is
 * not grown (growth is for disagreements) and the reason names the hybridisation. */
static void test_fkm_12_layers(void **state)
{
    ssum_result sr;
    const int G[3] = {0, 0, 1};
    surface_of("fkm", G, 12, 48, &sr);
    assert_int_equal(sr.ntrim, 4);
    assert_true(any_odd(&sr));
    assert_honest(&sr);
    assert_true(sr.layers >= 12 && sr.layers <= 48);
    if (sr.ndirac_top % 2 == 0) {
        assert_true(sr.layers > 12 || strstr(sr.reason, "too thin") != NULL);
        assert_non_null(strstr(sr.reason, "hybridise"));
    }
    surface_of("fkm", G, 12, 12, &sr);
    assert_int_equal(sr.layers, 12);
    assert_int_equal(sr.ndirac_top, 0);
    assert_non_null(strstr(sr.reason, "too thin"));
    assert_non_null(strstr(sr.reason, "hybridise"));
}

/* 2D ribbons with inversion: the Kane-Mele TI at lambda_v = lambda_R = 0 (Phys. Rev. Lett. 95, 226801 (2005))
 * and BHZ at M/B = 1 (Science 314, 1757 (2006)) have the one pair (0, 1) odd; BHZ at M < 0 is
 * trivial, even. All consistent at 32 cells. */
static void test_ribbons(void **state)
{
    ssum_result sr;
    const int G[3] = {1, 0, 0};
    surface_of("kane_mele:lambda_v=0,lambda_R=0", G, 0, 0, &sr);
    assert_int_equal(sr.npair, 1);
    assert_int_equal(sr.pair[0].expected_odd, 1);
    assert_int_equal(sr.status, RES_SURF_CONSISTENT);
    surface_of("bhz", G, 0, 0, &sr);
    assert_int_equal(sr.pair[0].expected_odd, 1);
    assert_int_equal(sr.status, RES_SURF_CONSISTENT);
    surface_of("bhz:M=-1", G, 0, 0, &sr);
    assert_int_equal(sr.pair[0].expected_odd, 0);
    assert_int_equal(sr.status, RES_SURF_CONSISTENT);
}

/* The expected parities from the Z2 indices equal those from the parities, pair by pair: the
 * strong TI (dt > 0: 1;111), the weak TI (dt < 0: 0;111) and the 2D TI, on several planes. Two
 * routes through the same paper's formulae, so a wrong projection in either shows. */
static void test_z2_route_agrees(void **state)
{
    static const char *const specs[] = {"fkm", "fkm:dt=0.2", "fkm:dt=-0.4"};
    static const int planes[3][3] = {{1, 1, 0}, {1, 1, 1}, {0, 0, 1}};
    for (int i = 0; i < 3; i++)
        for (int p = 0; p < 3; p++) {
            ssum_result a, b;
            surface_by(specs[i], planes[p], 6, 6, 0, &a);
            surface_by(specs[i], planes[p], 6, 6, 1, &b);
            for (int q = 0; q < a.npair; q++)
                assert_int_equal(a.pair[q].expected_odd, b.pair[q].expected_odd);
        }
    const int G[3] = {1, 0, 0};
    ssum_result a, b;
    surface_by("bhz", G, 8, 8, 0, &a);
    surface_by("bhz", G, 8, 8, 1, &b);
    assert_int_equal(a.pair[0].expected_odd, b.pair[0].expected_odd);
}

/* Without parities the counts are not checked, and the result says so. */
static void test_unchecked(void **state)
{
    tb_model *m = bs_test_build("kane_mele");
    ssum_result sr;
    bs_err err;
    bs_err_clear(&err);
    const int G[3] = {1, 0, 0};
    assert_int_equal(ssum_compute(m, G, 16, 0, NULL, &sr, &err), 0);
    assert_int_equal(sr.status, RES_SURF_UNCHECKED);
    assert_int_equal(sr.pair[0].expected_odd, -1);
    tb_model_free(m);
}

/* Dirac points: two-fold and inside the gap by the margin; a 12-fold level at the conduction edge
 * (the artefact of issue 14, 2026-12-02) and a two-fold one 1 meV inside the edge are refused. */
static void test_dirac_filter(void **state)
{
    ss_dirac mid = {{0, 0}, 0.0, SS_TOP, 2}, edge12 = {{0, 0}, 0.4, SS_TOP, 12},
             near = {{0, 0}, 0.399, SS_TOP, 2};
    assert_true(ssum_dirac_ok(&mid, -0.4, 0.4));
    assert_false(ssum_dirac_ok(&edge12, -0.4, 0.4));
    assert_false(ssum_dirac_ok(&near, -0.4, 0.4));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_fkm_12_layers),   cmocka_unit_test(test_ribbons),
        cmocka_unit_test(test_z2_route_agrees), cmocka_unit_test(test_unchecked),
        cmocka_unit_test(test_dirac_filter),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
