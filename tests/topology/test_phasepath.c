/* Phase paths (phasepath.h) against published analytic transitions. Each check names its source.
 * The Weyl window of the Fu-Kane-Mele model with a staggered potential is checked against an
 * independent numpy scan in tests/scripts/phasepath_numpy.py. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <string.h>

#include <cmocka.h>

#include "bandsieve/lattice_models.h"
#include "bandsieve/phasepath.h"
#include "testutil.h"

static void run_builtin(const char *spec, const char *param, double lo, double hi, int tracks, pp_result *r)
{
    bs_err err;
    bs_err_clear(&err);
    pp_source *s = NULL;
    assert_int_equal(pp_source_builtin(spec, param, &s, &err), 0);
    pp_opts o;
    pp_opts_init(&o);
    o.nsamples = 25;
    o.no_tracks = !tracks;
    o.track_steps = 8;
    pp_result_init(r);
    int rc = pp_run(s, param, lo, hi, &o, r, &err);
    if (rc != 0) print_error("%s\n", err.msg);
    assert_int_equal(rc, 0);
    pp_source_free(s);
}

static int count_label(const pp_closing *c, const char *label)
{
    int n = 0;
    for (int i = 0; i < c->nk; i++)
        n += strcmp(c->k_label[i], label) == 0;
    return n;
}

/* Fu-Kane-Mele with inversion: the gap closes at dt = 0 at the three X points (Phys. Rev. Lett. 98,
 * 106803 (2007)), with a parity exchange there and Z2 going from 0;111 (dt < 0) to 1;111 (dt > 0)
 * (parity criterion: Phys. Rev. B 76, 045302 (2007)); no Weyl nodes anywhere (inversion with time
 * reversal forbids them, common practice). The range is asymmetric so no sample hits dt = 0. */
static void test_fkm_inversion(void **state)
{
    (void)state;
    pp_result r;
    run_builtin("fkm", "dt", -0.5, 0.6, 1, &r);
    assert_int_equal(r.nclosing, 1);
    const pp_closing *c = &r.closings[0];
    assert_true(c->point);
    assert_true(fabs(c->x) < 1e-4);
    assert_true(c->x_hi - c->x_lo < 1e-4);
    assert_true(c->all_at_trims);
    assert_int_equal(count_label(c, "X"), 3);
    assert_true(c->parity_checked);
    assert_true(c->parity_exchange);
    assert_string_equal(c->kind, "band inversion");
    assert_int_equal(r.ninterval, 2);
    const res_diag *b = &r.intervals[0].diag, *a = &r.intervals[1].diag;
    assert_int_equal(b->z2_status, RES_DONE);
    assert_int_equal(a->z2_status, RES_DONE);
    assert_int_equal(b->z2[0], 0);
    assert_int_equal(a->z2[0], 1);
    for (int i = 0; i < r.ninterval; i++)
        assert_false(r.intervals[i].gapless);
    assert_int_equal(r.ntrack, 0);
    pp_result_clear(&r);
}

/* Kane-Mele without Rashba: the 2D TI becomes trivial at lambda_v = 3 sqrt3 lambda_SO, the gap
 * closing at K and K' (Phys. Rev. Lett. 95, 226801 (2005)). */
static void test_kane_mele(void **state)
{
    (void)state;
    pp_result r;
    double lso = 0.06, crit = 3 * sqrt(3.0) * lso;
    run_builtin("kane_mele:lambda_R=0,lambda_SO=0.06", "lambda_v", 0.01, 0.6, 0, &r);
    assert_int_equal(r.nclosing, 1);
    const pp_closing *c = &r.closings[0];
    assert_true(c->point);
    assert_true(fabs(c->x - crit) < 1e-4);
    assert_int_equal(count_label(c, "K"), 1);
    assert_int_equal(count_label(c, "K'"), 1);
    assert_int_equal(r.intervals[c->before].diag.z2[0], 1);
    assert_int_equal(r.intervals[c->after].diag.z2[0], 0);
    pp_result_clear(&r);
}

/* Kane-Mele with Rashba coupling and the staggered potential: inversion is broken, and in 2D the
 * closing is a single critical value, not a gapless interval of finite width (Phys. Rev. B 76,
 * 205304 (2007)); Z2 changes there. */
static void test_kane_mele_rashba(void **state)
{
    (void)state;
    pp_result r;
    run_builtin("kane_mele:lambda_R=0.05", "lambda_v", 0.01, 0.6, 0, &r);
    assert_int_equal(r.nclosing, 1);
    assert_true(r.closings[0].point);
    for (int i = 0; i < r.ninterval; i++)
        assert_false(r.intervals[i].gapless);
    assert_int_equal(r.ninterval, 2);
    assert_false(r.intervals[0].diag.inversion);
    assert_int_equal(r.intervals[0].diag.z2[0], 1);
    assert_int_equal(r.intervals[1].diag.z2[0], 0);
    pp_result_clear(&r);
}

/* Haldane: closings at M = +-3 sqrt3 t2 sin(phi), one at K and one at K', the Chern number changing
 * by one at each (Phys. Rev. Lett. 61, 2015 (1988)). phi = 0.3 pi, t2 = 0.1. */
static void test_haldane(void **state)
{
    (void)state;
    pp_result r;
    double crit = 3 * sqrt(3.0) * 0.1 * sin(0.3 * M_PI);
    run_builtin("haldane:phi=0.3,t2=0.1", "M", -1.1, 0.9, 0, &r);
    assert_int_equal(r.nclosing, 2);
    assert_true(fabs(r.closings[0].x + crit) < 1e-4);
    assert_true(fabs(r.closings[1].x - crit) < 1e-4);
    int nk = 0, nkp = 0;
    for (int i = 0; i < 2; i++) {
        const pp_closing *c = &r.closings[i];
        assert_true(c->point);
        assert_int_equal(c->nk, 1);
        nk += count_label(c, "K");
        nkp += count_label(c, "K'");
        const res_diag *b = &r.intervals[c->before].diag, *a = &r.intervals[c->after].diag;
        assert_int_equal(b->chern_status, RES_DONE);
        assert_int_equal(a->chern_status, RES_DONE);
        assert_int_equal(abs(a->chern - b->chern), 1);
    }
    assert_int_equal(nk, 1);
    assert_int_equal(nkp, 1);
    assert_int_equal(r.intervals[0].diag.chern, 0);
    assert_int_equal(r.intervals[2].diag.chern, 0);
    pp_result_clear(&r);
}

/* BHZ: the gap closes at Gamma at M = 0, trivial for M < 0, 2D TI for 0 < M/B < 8 (Science 314,
 * 1757 (2006)); inversion holds (P = tau_z), so the parities at Gamma exchange. */
static void test_bhz(void **state)
{
    (void)state;
    pp_result r;
    run_builtin("bhz", "M", -0.7, 1.3, 0, &r);
    assert_int_equal(r.nclosing, 1);
    const pp_closing *c = &r.closings[0];
    assert_true(c->point);
    assert_true(fabs(c->x) < 1e-4);
    assert_int_equal(count_label(c, "Gamma"), 1);
    assert_int_equal(c->nk, 1);
    assert_true(c->parity_exchange);
    assert_int_equal(r.intervals[c->before].diag.z2[0], 0);
    assert_int_equal(r.intervals[c->after].diag.z2[0], 1);
    pp_result_clear(&r);
}

/* Two members interpolated linearly: the Fu-Kane-Mele hoppings are linear in dt, so members at
 * dt = -0.5 (value 10) and dt = 0.3 (value 20) put the closing (dt = 0, Phys. Rev. Lett. 98, 106803
 * (2007)) at value 10 + 10 * 0.5/0.8 = 16.25. Members of different bases are refused, naming both. */
static void test_members(void **state)
{
    (void)state;
    tb_model *a = bs_test_build("fkm:dt=-0.5");
    tb_model *b = bs_test_build("fkm:dt=0.3");
    tb_model *km = bs_test_build("kane_mele");
    const tb_model *ms[2] = {a, b};
    double vals[2] = {10, 20};
    bs_err err;
    bs_err_clear(&err);
    pp_source *s = NULL;
    assert_int_equal(pp_source_members(ms, vals, 2, &s, &err), 0);
    pp_opts o;
    pp_opts_init(&o);
    o.nsamples = 15;
    pp_result r;
    pp_result_init(&r);
    assert_int_equal(pp_run(s, "pressure", 10, 20, &o, &r, &err), 0);
    assert_int_equal(r.nclosing, 1);
    assert_true(fabs(r.closings[0].x - 16.25) < 1e-4);
    assert_non_null(strstr(r.note, "model of the path"));
    pp_result_clear(&r);
    pp_source_free(s);
    const tb_model *bad[2] = {a, km};
    bs_err_clear(&err);
    assert_int_equal(pp_source_members(bad, vals, 2, &s, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, a->id));
    assert_non_null(strstr(err.msg, km->id));
    double down[2] = {20, 10};
    bs_err_clear(&err);
    assert_int_equal(pp_source_members(ms, down, 2, &s, &err), BS_EINVAL);
    tb_model_free(a);
    tb_model_free(b);
    tb_model_free(km);
}

static void test_source_errors(void **state)
{
    (void)state;
    bs_err err;
    pp_source *s = NULL;
    bs_err_clear(&err);
    assert_int_equal(pp_source_builtin("fkm", "nope", &s, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(pp_source_builtin("fkm:dt=0.1", "dt", &s, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(pp_source_builtin("fkm", "layout", &s, &err), BS_EINVAL);
    assert_null(s);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_fkm_inversion),
        cmocka_unit_test(test_kane_mele),
        cmocka_unit_test(test_kane_mele_rashba),
        cmocka_unit_test(test_haldane),
        cmocka_unit_test(test_bhz),
        cmocka_unit_test(test_members),
        cmocka_unit_test(test_source_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
