/* Families through cards, `pack`, `list` and `path --family`: the card key is read and written back,
 * the set keeps it (db/material-set.md, /families), list shows the family, members of different
 * bases are refused naming both, and the path over the family finds the Fu-Kane-Mele closing at the
 * member value where the interpolated dt vanishes (Phys. Rev. Lett. 98, 106803 (2007): the gap
 * closes at dt = 0; hoppings are linear in dt, so the interpolation between members is exact). */
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
#include <sys/wait.h>

#include <cjson/cJSON.h>

#include "bandsieve/card.h"
#include "bandsieve/matset.h"

static char tmpdir[256];

static int setup(void **state)
{
    (void)state;
    return bs_test_tmpdir(tmpdir, sizeof tmpdir, "family");
}

static int teardown(void **state)
{
    (void)state;
    return bs_test_rmtree(tmpdir);
}

static int run(const char *args)
{
    char cmd[4096];
    snprintf(cmd, sizeof cmd, "cd '%s' && '%s' %s >'%s/out' 2>'%s/err'", tmpdir, BS_BINARY, args, tmpdir,
             tmpdir);
    int st = system(cmd);
    return WIFEXITED(st) ? WEXITSTATUS(st) : -1;
}

static char *slurp(const char *name)
{
    char path[320];
    snprintf(path, sizeof path, "%s/%s", tmpdir, name);
    FILE *fp = fopen(path, "rb");
    assert_non_null(fp);
    static char buf[1 << 20];
    size_t n = fread(buf, 1, sizeof buf - 1, fp);
    buf[n] = '\0';
    fclose(fp);
    return buf;
}

/* Writes the built-in model spec as card <id>.json with a family entry. */
static void write_member(const char *spec, const char *id, const char *family, double value)
{
    tb_model *m = bs_test_build(spec);
    snprintf(m->id, sizeof m->id, "%s", id);
    m->has_family = 1;
    snprintf(m->family, sizeof m->family, "%s", family);
    snprintf(m->family_param, sizeof m->family_param, "pressure");
    snprintf(m->family_unit, sizeof m->family_unit, "GPa");
    m->family_value = value;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(card_write(m, tmpdir, NULL, 0, &err), 0);
    tb_model_free(m);
}

static void test_card_round_trip(void **state)
{
    (void)state;
    write_member("fkm:dt=-0.5", "fkm_p0", "fkm_series", 0.0);
    char path[400];
    snprintf(path, sizeof path, "%s/fkm_p0.json", tmpdir);
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(card_read(path, &m, &err), 0);
    assert_true(m->has_family);
    assert_string_equal(m->family, "fkm_series");
    assert_string_equal(m->family_param, "pressure");
    assert_string_equal(m->family_unit, "GPa");
    assert_true(m->family_value == 0.0);
    tb_model_free(m);
}

static void test_pack_list_path(void **state)
{
    (void)state;
    write_member("fkm:dt=-0.5", "fkm_p0", "fkm_series", 0.0);
    write_member("fkm:dt=-0.1", "fkm_p4", "fkm_series", 4.0);
    write_member("fkm:dt=0.3", "fkm_p8", "fkm_series", 8.0);
    write_member("kane_mele", "km_other", "other", 1.0);
    assert_int_equal(run("pack -o set.h5 fkm_p8.json fkm_p0.json km_other.json fkm_p4.json"), 0);
    assert_int_equal(run("list set.h5"), 0);
    char *out = slurp("out");
    assert_non_null(strstr(out, "families"));
    assert_non_null(strstr(out, "fkm_series"));
    assert_int_equal(run("list set.h5 --json"), 0);
    cJSON *j = cJSON_Parse(slurp("out"));
    assert_non_null(j);
    cJSON *fams = cJSON_GetObjectItem(j, "families");
    assert_int_equal(cJSON_GetArraySize(fams), 2);
    cJSON *f0 = cJSON_GetArrayItem(fams, 0);
    assert_string_equal(cJSON_GetObjectItem(f0, "name")->valuestring, "fkm_series");
    assert_int_equal(cJSON_GetObjectItem(f0, "members")->valueint, 3);
    cJSON_Delete(j);
    /* dt = -0.1 at 4 GPa and 0.3 at 8 GPa: dt = 0 at 5 GPa */
    assert_int_equal(run("path --family fkm_series set.h5 --samples 15 --json"), 0);
    j = cJSON_Parse(slurp("out"));
    assert_non_null(j);
    cJSON *cl = cJSON_GetObjectItem(j, "closings");
    assert_int_equal(cJSON_GetArraySize(cl), 1);
    double x = cJSON_GetObjectItem(cJSON_GetArrayItem(cl, 0), "x")->valuedouble;
    assert_true(fabs(x - 5.0) < 1e-4);
    assert_string_equal(cJSON_GetObjectItem(cJSON_GetObjectItem(j, "path"), "unit")->valuestring, "GPa");
    assert_int_equal(cJSON_GetArraySize(cJSON_GetObjectItem(cJSON_GetObjectItem(j, "path"), "members")), 3);
    cJSON_Delete(j);
    assert_int_equal(run("path --family other set.h5"), 2);
    assert_non_null(strstr(slurp("err"), "1 member"));
}

static void test_mixed_basis_refused(void **state)
{
    (void)state;
    write_member("fkm:dt=-0.5", "fkm_a", "mixed", 0.0);
    write_member("kane_mele", "km_b", "mixed", 1.0);
    assert_int_equal(run("pack -o bad.h5 fkm_a.json km_b.json"), 1);
    char *err = slurp("err");
    assert_non_null(strstr(err, "fkm_a"));
    assert_non_null(strstr(err, "km_b"));
    assert_non_null(strstr(err, "basis"));
}

/* `path` with members on the command line: BHZ hoppings are linear in M, so members at M = -1
 * (value 0) and M = 1 (value 1) put the closing at Gamma (M = 0, Science 314, 1757 (2006)) at
 * value 0.5; the output says the interpolation is a model of the path. Usage errors exit 2. */
static void test_path_cli(void **state)
{
    (void)state;
    assert_int_equal(run("path --help"), 0);
    assert_non_null(strstr(slurp("out"), "usage: bandsieve path"));
    assert_int_equal(run("phasemap --help"), 0);
    assert_non_null(strstr(slurp("out"), "usage:"));
    assert_int_equal(run("path model:bhz:M=-1 model:bhz:M=1 --values 0,1 --samples 11 --name x"), 0);
    char *out = slurp("out");
    assert_non_null(strstr(out, "model of the path"));
    assert_non_null(strstr(out, "band inversion at Gamma"));
    assert_int_equal(run("path model:bhz:M=-1 model:bhz:M=1 --values 0,1 --samples 11 --json"), 0);
    cJSON *j = cJSON_Parse(slurp("out"));
    assert_non_null(j);
    cJSON *cl = cJSON_GetObjectItem(j, "closings");
    assert_int_equal(cJSON_GetArraySize(cl), 1);
    assert_true(fabs(cJSON_GetObjectItem(cJSON_GetArrayItem(cl, 0), "x")->valuedouble - 0.5) < 1e-4);
    cJSON_Delete(j);
    assert_int_equal(run("path model:bhz --param M=1..0"), 2);
    assert_int_equal(run("path model:bhz --param nope=0..1"), 2);
    assert_non_null(strstr(slurp("err"), "no parameter 'nope'"));
    assert_int_equal(run("path model:bhz model:fkm --values 0"), 2);
    assert_int_equal(run("path model:bhz model:fkm --values 0,1"), 1);
    assert_non_null(strstr(slurp("err"), "do not share a basis"));
    assert_int_equal(run("phasemap model:fkm --x dt=-0.1..0.1:2 --y stag=0..0.1:2 -o m.h5"), 2);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_card_round_trip, setup, teardown),
        cmocka_unit_test_setup_teardown(test_pack_list_path, setup, teardown),
        cmocka_unit_test_setup_teardown(test_mixed_basis_refused, setup, teardown),
        cmocka_unit_test_setup_teardown(test_path_cli, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
