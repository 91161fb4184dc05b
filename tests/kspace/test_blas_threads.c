/* BLAS thread control: the default of one thread, BS_BLAS_THREADS, and the library's own
 * variables left to the library. The thread counts are read back from the linked BLAS where it
 * has a query (OpenBLAS, MKL, BLIS; the reference BLAS has none and reports 0). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdlib.h>

#include <cmocka.h>

#include "bandsieve/blas_threads.h"

static void clear_env(void)
{
    unsetenv("BS_BLAS_THREADS");
    unsetenv("OPENBLAS_NUM_THREADS");
    unsetenv("OMP_NUM_THREADS");
    unsetenv("MKL_NUM_THREADS");
    unsetenv("BLIS_NUM_THREADS");
}

static void default_is_one(void **state)
{
    (void)state;
    clear_env();
    const char *bad = "unset";
    assert_int_equal(blas_threads_init(&bad), 1);
    assert_null(bad);
    int now = blas_threads_current();
    if (now != 0) assert_int_equal(now, 1);
}

static void ours_wins(void **state)
{
    (void)state;
    clear_env();
    setenv("BS_BLAS_THREADS", "2", 1);
    setenv("OPENBLAS_NUM_THREADS", "1", 1);
    assert_int_equal(blas_threads_init(NULL), 2);
    int now = blas_threads_current();
    if (now != 0) assert_int_equal(now, 2);
    setenv("BS_BLAS_THREADS", "1", 1);
    assert_int_equal(blas_threads_init(NULL), 1);
}

static void theirs_left_alone(void **state)
{
    (void)state;
    clear_env();
    setenv("OMP_NUM_THREADS", "2", 1);
    assert_int_equal(blas_threads_init(NULL), 0);
    clear_env();
}

static void bad_value_reported(void **state)
{
    (void)state;
    clear_env();
    const char *bad[] = {"0", "-1", "two", "3x", ""};
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        setenv("BS_BLAS_THREADS", bad[i], 1);
        const char *got = NULL;
        assert_int_equal(blas_threads_init(&got), 1);
        /* An empty value counts as unset: nothing to report. */
        if (bad[i][0])
            assert_string_equal(got, bad[i]);
        else
            assert_null(got);
    }
    clear_env();
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(default_is_one),
        cmocka_unit_test(ours_wins),
        cmocka_unit_test(theirs_left_alone),
        cmocka_unit_test(bad_value_reported),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
