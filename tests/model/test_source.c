/* Tests of src_load: each accepted form of a source string reaches its loader, and other strings
 * are usage errors naming the accepted forms. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "bandsieve/card.h"
#include "bandsieve/matset.h"
#include "bandsieve/source.h"

static void test_forms(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    assert_int_equal(src_load(BS_TEST_DATA "/good/graphene_gap.json", &m, &err), 0);
    assert_string_equal(m->id, "graphene_gap");

    char dir[] = "/tmp/bs_test_source_XXXXXX", set[128], src[160];
    assert_non_null(mkdtemp(dir));
    snprintf(set, sizeof set, "%s/a.h5", dir);
    ms_set *s = NULL;
    assert_int_equal(ms_create(set, &s, &err), 0);
    assert_int_equal(ms_add(s, m, &err), 0);
    assert_int_equal(ms_close(s, &err), 0);
    ms_free(s);
    tb_model_free(m);

    snprintf(src, sizeof src, "%s:graphene_gap", set);
    assert_int_equal(src_load(src, &m, &err), 0);
    assert_int_equal(m->norb, 2);
    tb_model_free(m);
    snprintf(src, sizeof src, "%s:nope", set);
    assert_int_equal(src_load(src, &m, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "no material 'nope'"));
    bs_err_clear(&err);
    assert_int_equal(src_load(set, &m, &err), BS_EUSAGE);
    assert_non_null(strstr(err.msg, ":ID"));
    bs_err_clear(&err);
    snprintf(src, sizeof src, "%s:", set);
    assert_int_equal(src_load(src, &m, &err), BS_EUSAGE);
    unlink(set);
    rmdir(dir);

    bs_err_clear(&err);
    assert_int_equal(src_load("model:graphene", &m, &err), 0);
    assert_int_equal(m->norb, 2);
    tb_model_free(m);
    bs_err_clear(&err);
    assert_int_equal(src_load("model:no_such_model", &m, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(src_load("table.txt", &m, &err), BS_EUSAGE);
    assert_non_null(strstr(err.msg, "model:NAME"));
    assert_null(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {cmocka_unit_test(test_forms)};
    return cmocka_run_group_tests(tests, NULL, NULL);
}
