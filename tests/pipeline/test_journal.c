/* Tests of the hand-out journal: which materials earlier sessions handed out and never got back,
 * and in how many sessions. The expected sets are worked out by hand from the lines written. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../src/pipeline/journal.h"

static int strikes_of(char **ids, int *strikes, int n, const char *id)
{
    for (int i = 0; i < n; i++)
        if (!strcmp(ids[i], id)) return strikes[i];
    return 0;
}

static void free_list(char **ids, int *strikes, int n)
{
    for (int i = 0; i < n; i++)
        free(ids[i]);
    free(ids);
    free(strikes);
}

static void test_lost_materials_counted_per_session(void **state)
{
    (void)state;
    char path[] = "/tmp/bs_journal_XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    close(fd);
    bs_err err;
    bs_err_clear(&err);
    /* Session 1 of run 7: A and B handed out, only A came back (B lost once). */
    pl_journal *j = NULL;
    assert_int_equal(pl_journal_open(path, 7, &j, &err), 0);
    assert_int_equal(pl_journal_handed(j, "A", &err), 0);
    assert_int_equal(pl_journal_handed(j, "B", &err), 0);
    assert_int_equal(pl_journal_received(j, "A", &err), 0);
    pl_journal_close(j);
    usleep(2000); /* a distinct session token */
    /* Session 2: B again and C, both lost; D came back. A line of another run is ignored. */
    assert_int_equal(pl_journal_open(path, 7, &j, &err), 0);
    assert_int_equal(pl_journal_handed(j, "B", &err), 0);
    assert_int_equal(pl_journal_handed(j, "C", &err), 0);
    assert_int_equal(pl_journal_handed(j, "D", &err), 0);
    assert_int_equal(pl_journal_received(j, "D", &err), 0);
    pl_journal_close(j);
    assert_int_equal(pl_journal_open(path, 8, &j, &err), 0);
    assert_int_equal(pl_journal_handed(j, "E", &err), 0);
    pl_journal_close(j);

    char **ids = NULL;
    int *strikes = NULL, n = 0;
    assert_int_equal(pl_journal_lost(path, 7, &ids, &strikes, &n, &err), 0);
    assert_int_equal(n, 2);
    assert_int_equal(strikes_of(ids, strikes, n, "B"), 2);
    assert_int_equal(strikes_of(ids, strikes, n, "C"), 1);
    assert_int_equal(strikes_of(ids, strikes, n, "A"), 0);
    assert_int_equal(strikes_of(ids, strikes, n, "E"), 0);
    free_list(ids, strikes, n);
    unlink(path);
}

/* The lines wait in memory until pl_journal_sync (one write per coordinator round); what a sync
 * wrote is in the file even if the process then dies without closing (here: the file is read
 * while the journal is still open), and pl_journal_lost sees it. */
static void test_lines_reach_the_file_at_sync(void **state)
{
    (void)state;
    char path[] = "/tmp/bs_journal_XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    close(fd);
    bs_err err;
    bs_err_clear(&err);
    pl_journal *j = NULL;
    assert_int_equal(pl_journal_open(path, 3, &j, &err), 0);
    assert_int_equal(pl_journal_handed(j, "X", &err), 0);
    assert_int_equal(pl_journal_handed(j, "Y", &err), 0);
    char **ids = NULL;
    int *strikes = NULL, n = -1;
    assert_int_equal(pl_journal_lost(path, 3, &ids, &strikes, &n, &err), 0);
    assert_int_equal(n, 0); /* nothing synced yet */
    free_list(ids, strikes, n);
    assert_int_equal(pl_journal_sync(j, &err), 0);
    assert_int_equal(pl_journal_received(j, "X", &err), 0); /* not synced: X still open on disk */
    assert_int_equal(pl_journal_lost(path, 3, &ids, &strikes, &n, &err), 0);
    assert_int_equal(n, 2);
    assert_int_equal(strikes_of(ids, strikes, n, "X"), 1);
    assert_int_equal(strikes_of(ids, strikes, n, "Y"), 1);
    free_list(ids, strikes, n);
    pl_journal_close(j); /* writes the waiting line */
    assert_int_equal(pl_journal_lost(path, 3, &ids, &strikes, &n, &err), 0);
    assert_int_equal(n, 1);
    assert_int_equal(strikes_of(ids, strikes, n, "Y"), 1);
    free_list(ids, strikes, n);
    unlink(path);
}

static void test_missing_journal_is_empty(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    char **ids = NULL;
    int *strikes = NULL, n = -1;
    assert_int_equal(pl_journal_lost("/tmp/bs_no_such_journal_file", 1, &ids, &strikes, &n, &err), 0);
    assert_int_equal(n, 0);
    free_list(ids, strikes, 0);
    pl_journal *j = NULL;
    assert_int_equal(pl_journal_open("/nonexistent-dir/x.journal", 1, &j, &err), BS_EIO);
    assert_null(j);
    assert_non_null(strstr(err.msg, "/nonexistent-dir/x.journal"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_lost_materials_counted_per_session),
        cmocka_unit_test(test_lines_reach_the_file_at_sync),
        cmocka_unit_test(test_missing_journal_is_empty),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
