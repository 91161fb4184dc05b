/* Tests of the path phase's MPI-free parts: the family list of a set (members in path order, a
 * content hash that follows the members), a family's path computed as `bandsieve path --family`
 * computes it, and the wire form of a path read back unchanged. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../src/pipeline/pathrun.h"
#include "bandsieve/demo.h"

static char set_path[64];

static int setup(void **state)
{
    (void)state;
    snprintf(set_path, sizeof set_path, "/tmp/bs_pathrun_%ld.h5", (long)getpid());
    bs_err err;
    bs_err_clear(&err);
    return demo_write_set_families(set_path, 12, 3, 1, &err);
}

static int teardown(void **state)
{
    (void)state;
    unlink(set_path);
    return 0;
}

static const pl_family *find(const pl_family *f, int n, const char *name)
{
    for (int i = 0; i < n; i++)
        if (!strcmp(f[i].name, name)) return &f[i];
    return NULL;
}

/* The test set and its families, opened for one test. */
static void open_families(ms_set **set, pl_family **f, int *n)
{
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(ms_open(set_path, set, &err), 0);
    assert_int_equal(pl_families(*set, f, n, &err), 0);
}

static void close_families(ms_set *set, pl_family *f, int n)
{
    pl_families_free(f, n);
    ms_free(set);
}

static void test_families(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    ms_set *set = NULL;
    pl_family *f = NULL;
    int n = 0;
    open_families(&set, &f, &n);
    assert_int_equal(n, 2);
    const pl_family *p = find(f, n, "Jo2Qu-pressure");
    assert_non_null(p);
    assert_int_equal(p->n, 5);
    assert_string_equal(p->param, "pressure");
    assert_string_equal(p->unit, "GPa");
    for (int i = 1; i < p->n; i++)
        assert_true(p->value[i] > p->value[i - 1]);
    assert_int_equal(strlen(p->content), 64);
    const pl_family *a = find(f, n, "JaQi1-xQox");
    assert_non_null(a);
    assert_string_not_equal(a->content, p->content);
    assert_non_null(strstr(a->members, "\"id\":\"JQF-JaQi\""));
    close_families(set, f, n);
}

/* The alloy family is the Kane-Mele model with lambda_v = 0.1 + 0.4 x at lambda_SO = 0.06 (demo.c):
 * one closing at lambda_v = 3 sqrt3 lambda_SO (Phys. Rev. Lett. 95, 226801 (2005)), i.e.
 * x = (3 sqrt3 0.06 - 0.1) / 0.4, to the tolerance asked (1e-6; H(R) is linear in lambda_v, so the
 * interpolation is exact). The wire form reads back into the same path: written again, the text
 * is the same, byte for byte. */
static void test_compute_and_wire(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    ms_set *set = NULL;
    pl_family *f = NULL;
    int n = 0;
    open_families(&set, &f, &n);
    pl_path_task t = {1e-6, 15, 0, 0};
    pl_outcome out;
    pl_path_compute(set, find(f, n, "JaQi1-xQox"), &t, 3, &out);
    if (out.code != 0) fail_msg("path: %s", out.message);
    assert_string_equal(out.id, "JaQi1-xQox");
    assert_int_equal(out.rank, 3);
    pp_result r;
    pp_result_init(&r);
    assert_int_equal(pl_path_from_text(out.json, &r, &err), 0);
    assert_int_equal(r.nclosing, 1);
    assert_true(fabs(r.closings[0].x - (3 * sqrt(3) * 0.06 - 0.1) / 0.4) < 2e-6);
    assert_int_equal(r.ninterval, 2);
    char *again = pl_path_to_text(&r);
    assert_string_equal(again, out.json);
    free(again);
    pp_result_clear(&r);
    /* Malformed wire text is refused, not half read. */
    pp_result_init(&r);
    assert_int_equal(pl_path_from_text("{\"head\":[1,2]}", &r, &err), BS_EPARSE);
    assert_int_equal(pl_path_from_text("not json", &r, &err), BS_EPARSE);
    assert_int_equal(r.nsamples, 0);
    pl_outcome_clear(&out);
    close_families(set, f, n);
}

/* A family of one member cannot make a path: the outcome says so (invalid), nothing crashes. */
static void test_single_member(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    ms_set *set = NULL;
    pl_family *f = NULL;
    int n = 0;
    open_families(&set, &f, &n);
    pl_family one = *find(f, n, "JaQi1-xQox");
    one.n = 1;
    pl_path_task t = {1e-5, 0, 0, 0};
    pl_outcome out;
    pl_path_compute(set, &one, &t, 0, &out);
    assert_int_equal(out.code, BS_EINVAL);
    assert_non_null(strstr(out.message, "two or more"));
    assert_null(out.json);
    close_families(set, f, n);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_families),
        cmocka_unit_test(test_compute_and_wire),
        cmocka_unit_test(test_single_member),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
