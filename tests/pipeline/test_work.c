/* Tests of the work list: largest estimated cost first (n^3 + N_R n^2 per k-point times the mesh's
 * k-points, ties by id), done entries skipped, rescreen selections honoured, unknown ids counted. */
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

#include "../../src/pipeline/work.h"
#include "bandsieve/demo.h"

static char set_path[64];

static int setup(void **state)
{
    (void)state;
    snprintf(set_path, sizeof set_path, "/tmp/bs_work_%ld.h5", (long)getpid());
    bs_err err;
    bs_err_clear(&err);
    return demo_write_set(set_path, 24, 3, &err);
}

static int teardown(void **state)
{
    (void)state;
    unlink(set_path);
    return 0;
}

static void test_order_and_skips(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    ms_set *set = NULL;
    assert_int_equal(ms_open(set_path, &set, &err), 0);
    pl_item *items = NULL;
    int n = 0, missing = 0;
    assert_int_equal(pl_work_list(set, NULL, NULL, 0, 0, &items, &n, &missing, &err), 0);
    assert_int_equal(n, ms_count(set));
    for (int i = 1; i < n; i++) {
        assert_true(items[i - 1].cost >= items[i].cost);
        if (items[i - 1].cost == items[i].cost)
            assert_true(
                strcmp(ms_entry_at(set, items[i - 1].index)->id, ms_entry_at(set, items[i].index)->id) < 0);
    }
    /* The cost is the index's per-k cost times mesh^dim (defaults 36 in 2D, 14 in 3D). */
    const ms_entry *e = ms_entry_at(set, items[0].index);
    double want = (e->cost > 0 ? e->cost : 1.0) * pow(e->dim == 2 ? 36 : 14, e->dim);
    assert_true(fabs(items[0].cost - want) <= 1e-9 * want);
    free(items);

    /* Done entries are skipped; a selection keeps only its ids and counts the unknown ones. */
    char *done_ids[] = {"JQ-0001", "JQ-0002"}, *sel_ids[] = {"JQ-0002", "JQ-0003", "no-such-id"};
    cat_ids done = {2, done_ids}, sel = {3, sel_ids};
    assert_int_equal(pl_work_list(set, NULL, &done, 0, 0, &items, &n, &missing, &err), 0);
    assert_int_equal(n, ms_count(set) - 2);
    for (int i = 0; i < n; i++)
        assert_false(cat_ids_contains(&done, ms_entry_at(set, items[i].index)->id));
    free(items);
    assert_int_equal(pl_work_list(set, &sel, &done, 0, 0, &items, &n, &missing, &err), 0);
    assert_int_equal(n, 1);
    assert_string_equal(ms_entry_at(set, items[0].index)->id, "JQ-0003");
    assert_int_equal(missing, 1);
    free(items);
    ms_free(set);
}

int main(void)
{
    const struct CMUnitTest tests[] = {cmocka_unit_test(test_order_and_skips)};
    return cmocka_run_group_tests(tests, setup, teardown);
}
