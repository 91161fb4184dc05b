/* Tests of the result struct and its one JSON form (result.h, result_json.h): the name tables,
 * the layout of the transport and surface keys, the Chern-number display rule, reading back what
 * the program writes (a diagnosis of every kind reads and prints again byte for byte), and keys of
 * the wrong type. The physics of the values is tested where they are computed; here only the form. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/pipeline.h"
#include "bandsieve/result_json.h"

/* Every class and status name reads back as itself; unknown names are refused. */
static void test_name_tables(void **state)
{
    (void)state;
    for (int c = 0; c < RES_NCLASS; c++) {
        assert_non_null(res_class_name((res_class)c));
        assert_int_equal(res_class_parse(res_class_name((res_class)c)), c);
    }
    assert_null(res_class_name(RES_NCLASS));
    assert_int_equal(res_class_parse("topological metal"), -1);
    for (int s = RES_NA; s <= RES_DISAGREE; s++)
        assert_int_equal(res_status_parse(res_status_name((res_status)s)), s);
    assert_int_equal(res_status_parse("maybe"), -1);
    assert_true(res_class_is_insulator(RES_CHERN_INSULATOR));
    assert_false(res_class_is_insulator(RES_WEYL));
    assert_true(res_class_has_surface_states(RES_WEAK_TI));
    assert_false(res_class_has_surface_states(RES_TRIVIAL));
}

static int has_key(const cJSON *o, const char *k)
{
    return cJSON_GetObjectItemCaseSensitive(o, k) != NULL;
}

/* Prints r, reads it back and prints again: the two texts must be the same bytes. */
static void expect_round_trip(const res_diag *r, const char *what)
{
    char *a = res_to_text(r, 1);
    assert_non_null(a);
    res_diag back;
    res_init(&back);
    bs_err err;
    bs_err_clear(&err);
    if (res_from_text(a, strlen(a), &back, &err) != 0) fail_msg("%s: %s", what, err.msg);
    char *b = res_to_text(&back, 1);
    assert_non_null(b);
    if (strcmp(a, b) != 0) fail_msg("%s: read back differs\n%s\n%s", what, a, b);
    assert_int_equal(back.cls, r->cls);
    assert_int_equal(back.nnodes, r->nnodes);
    assert_int_equal(back.nflows, r->nflows);
    cJSON_free(a);
    cJSON_free(b);
    res_clear(&back);
}

/* The program's own diagnoses of the built-in models, with flows, transport (scan) and surfaces:
 * insulators of every kind, a Weyl semimetal, a nodal line, a metal. */
static void test_round_trip_models(void **state)
{
    (void)state;
    static const char *const specs[] = {"kane_mele",  "haldane", "fkm",     "weyl",
                                        "nodal_line", "metal",   "graphene"};
    for (size_t i = 0; i < sizeof specs / sizeof specs[0]; i++) {
        tb_model *m = bs_test_build(specs[i]);
        pl_diag_opts o;
        memset(&o, 0, sizeof o);
        o.diag.want_flows = 1;
        o.diag.seed = 1;
        o.transport = 1;
        tr_opts_default(&o.tr);
        o.tr.mesh = 4;
        o.tr.max_depth = 1;
        o.tr.nscan = 3;
        o.tr.scan_lo_ev = -0.1;
        o.tr.scan_hi_ev = 0.1;
        o.surfaces = 1;
        res_diag r;
        res_init(&r);
        bs_err err;
        bs_err_clear(&err);
        if (pl_diagnose(m, &o, &r, &err) != 0) fail_msg("%s: %s", specs[i], err.msg);
        assert_true(r.has_transport);
        assert_int_equal(r.has_surface, res_class_has_surface_states(r.cls));
        expect_round_trip(&r, specs[i]);
        res_clear(&r);
        tb_model_free(m);
    }
}

/* "ahc" {xy[, yz, zx], units, fermi_eV, error}, "shc" only with a spin Hall value, "transport" with
 * the scan; "surface" with a 2-index direction and 1-component TRIMs for a ribbon. */
static void test_layout(void **state)
{
    (void)state;
    res_diag r;
    res_init(&r);
    snprintf(r.id, sizeof r.id, "hand-made");
    r.dim = 2;
    r.cls = RES_CHERN_INSULATOR;
    r.has_transport = 1;
    r.transport.dim = 2;
    r.transport.nfermi = 2;
    r.transport.ahc[0][0] = 1.0;
    r.transport.ahc_err[0][0] = 1e-4;
    snprintf(r.transport.ahc_units, sizeof r.transport.ahc_units, "e^2/h");
    r.transport.fermi_source = RES_FERMI_MIDGAP;
    r.has_surface = 1;
    r.surface.kdim = 1;
    r.surface.miller[0] = 1;
    r.surface.layers = 32;
    r.surface.n_top = 1;
    r.surface.kb[0] = 0.5;
    cJSON *j = res_to_json(&r, 0);
    assert_non_null(j);
    const cJSON *a = cJSON_GetObjectItemCaseSensitive(j, "ahc");
    assert_true(has_key(a, "xy") && !has_key(a, "yz") && has_key(a, "error") && has_key(a, "fermi_eV"));
    assert_string_equal(cJSON_GetObjectItemCaseSensitive(a, "units")->valuestring, "e^2/h");
    assert_false(has_key(j, "shc"));
    const cJSON *t = cJSON_GetObjectItemCaseSensitive(j, "transport");
    assert_int_equal(cJSON_GetArraySize(cJSON_GetObjectItemCaseSensitive(t, "scan")), 2);
    assert_string_equal(cJSON_GetObjectItemCaseSensitive(t, "fermi_source")->valuestring, "midgap");
    const cJSON *s = cJSON_GetObjectItemCaseSensitive(j, "surface");
    assert_int_equal(cJSON_GetArraySize(cJSON_GetObjectItemCaseSensitive(s, "direction")), 2);
    assert_int_equal(
        cJSON_GetArraySize(cJSON_GetArrayItem(cJSON_GetObjectItemCaseSensitive(s, "between"), 1)), 1);
    /* No formula: no key; no flows asked: no key. */
    assert_false(has_key(j, "formula"));
    assert_false(has_key(j, "wcc_flows"));
    cJSON_Delete(j);
    expect_round_trip(&r, "hand-made 2D");
    r.dim = r.transport.dim = 3;
    r.transport.has_shc = 1;
    snprintf(r.transport.shc_units, sizeof r.transport.shc_units, "(hbar/e)S/cm");
    r.surface.kdim = 2;
    j = res_to_json(&r, 0);
    assert_true(has_key(cJSON_GetObjectItemCaseSensitive(j, "ahc"), "zx"));
    assert_true(has_key(cJSON_GetObjectItemCaseSensitive(j, "shc"), "xy_z"));
    cJSON_Delete(j);
    expect_round_trip(&r, "hand-made 3D");
    res_clear(&r);
}

/* With time reversal and an open gap a 2D Chern number is zero by symmetry (common practice): shown
 * as 0 without a computation; with the gap closed it is not shown at all. */
static void test_chern_rule(void **state)
{
    (void)state;
    res_diag r;
    res_init(&r);
    r.dim = 2;
    r.time_reversal = 1;
    r.gap_direct_ev = 0.3;
    int c = 7;
    assert_true(res_chern_shown(&r, &c));
    assert_int_equal(c, 0);
    r.gap_direct_ev = 0;
    assert_false(res_chern_shown(&r, &c));
    r.time_reversal = 0;
    r.chern_status = RES_AMBIGUOUS;
    r.chern = -1;
    assert_true(res_chern_shown(&r, &c));
    assert_int_equal(c, -1);
    assert_false(res_plane_chern_shown(&r));
    r.dim = 3;
    assert_false(res_chern_shown(&r, &c));
    assert_true(res_plane_chern_shown(&r));
}

typedef struct col_seen {
    int n, class_ok, tr_ok;
} col_seen;

static int see_column(void *ctx, const char *column, const res_value *v)
{
    col_seen *c = ctx;
    c->n++;
    if (!strcmp(column, "class"))
        c->class_ok = v->type == RES_VALUE_TEXT && !strcmp(v->text, "Weyl semimetal");
    if (!strcmp(column, "time_reversal")) c->tr_ok = v->type == RES_VALUE_INT && v->i == 1;
    return 0;
}

/* The scalar columns come from the key table with the values the JSON form shows. */
static void test_columns(void **state)
{
    (void)state;
    res_diag r;
    res_init(&r);
    r.cls = RES_WEYL;
    r.time_reversal = 5; /* any nonzero flag is stored as 1 */
    col_seen c = {0, 0, 0};
    assert_int_equal(res_for_each_column(&r, see_column, &c), 0);
    assert_true(c.class_ok);
    assert_true(c.tr_ok);
    /* 14 columns of the first result table, 10 of the approximate-symmetry ones (schema 3), 4 of
     * crystal symmetry (schema 4; spacegroup and mirror_chern are bound by the catalogue, NULL
     * when unknown). */
    assert_int_equal(c.n, 28);
}

static void expect_read_error(const char *json, const char *needle)
{
    res_diag r;
    res_init(&r);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(res_from_text(json, strlen(json), &r, &err), BS_EPARSE);
    if (!strstr(err.msg, needle)) fail_msg("%s: expected \"%s\" in \"%s\"", json, needle, err.msg);
    assert_null(r.nodes);
    assert_null(r.flows);
}

/* Keys of the wrong type name the key; malformed text names the byte. */
static void test_read_errors(void **state)
{
    (void)state;
    expect_read_error("{\"class\":\"topological metal\"}", "key \"class\"");
    expect_read_error("{\"confidence\":\"high\"}", "key \"confidence\"");
    expect_read_error("{\"z2\":[1,0,0]}", "key \"z2\"");
    expect_read_error("{\"z2_status\":\"done\"}", "key \"z2\": expected a list when");
    expect_read_error("{\"weyl_nodes\":[{\"k\":[0,0]}]}", "key \"weyl_nodes\"");
    expect_read_error("{\"weyl_nodes\":[{\"k\":[0,0,0],\"chirality\":1}],\"gap_closings\":[[0,0]]}",
                      "key \"gap_closings\"");
    expect_read_error("{\"surface\":{\"direction\":[0,0,1]}}", "key \"surface\"");
    expect_read_error("{\"transport\":{\"scan\":[]},\"ahc\":{\"xy\":\"x\"}}", "key \"ahc\"");
    expect_read_error("{\"wcc_flows\":[{\"plane\":4,\"kpar\":[0],\"wcc\":[[0.1]]},{\"plane\":4,\"kpar\":[0],"
                      "\"wcc\":[[0.1]]}]}",
                      "one flow per plane");
    expect_read_error("{\"id\":", "malformed diagnosis JSON at byte");
    expect_read_error("{} []", "unexpected bytes after");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_name_tables), cmocka_unit_test(test_round_trip_models),
        cmocka_unit_test(test_layout),      cmocka_unit_test(test_chern_rule),
        cmocka_unit_test(test_columns),     cmocka_unit_test(test_read_errors),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
