/* Tests of `bandsieve pack` and `bandsieve list` through the binary: exit statuses, that a failing
 * card is reported with its message and blocks the set unless --keep-broken, and list's output. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cjson/cJSON.h>

static char tmpdir[256];

static int setup(void **state)
{
    (void)state;
    return bs_test_tmpdir(tmpdir, sizeof tmpdir, "pack");
}

static int teardown(void **state)
{
    (void)state;
    return bs_test_rmtree(tmpdir);
}

/* Runs the binary with args (shell words), stdout and stderr to files; returns the exit status. */
static int run(const char *args)
{
    char cmd[4096];
    snprintf(cmd, sizeof cmd, "'%s' %s >'%s/out' 2>'%s/err'", BS_BINARY, args, tmpdir, tmpdir);
    int st = system(cmd);
    return WIFEXITED(st) ? WEXITSTATUS(st) : -1;
}

static char *slurp(const char *name)
{
    char path[320];
    snprintf(path, sizeof path, "%s/%s", tmpdir, name);
    FILE *fp = fopen(path, "rb");
    assert_non_null(fp);
    static char buf[65536];
    size_t n = fread(buf, 1, sizeof buf - 1, fp);
    buf[n] = '\0';
    fclose(fp);
    return buf;
}

static void test_help(void **state)
{
    (void)state;
    assert_int_equal(run("pack --help"), 0);
    assert_non_null(strstr(slurp("out"), "usage: bandsieve pack"));
    assert_int_equal(run("list --help"), 0);
    assert_non_null(strstr(slurp("out"), "usage: bandsieve list"));
    assert_int_equal(run("pack"), 2);
    assert_int_equal(run("list"), 2);
    assert_int_equal(run("pack --no-such-option"), 2);
}

static void test_pack_and_list(void **state)
{
    (void)state;
    char args[2048];
    snprintf(args, sizeof args,
             "pack -o '%s/set.h5' '%s/good/graphene_gap.json' '%s/good/graphene_spinful.json'", tmpdir,
             BS_TEST_DATA, BS_TEST_DATA);
    assert_int_equal(run(args), 0);
    snprintf(args, sizeof args, "list '%s/set.h5' --json", tmpdir);
    assert_int_equal(run(args), 0);
    cJSON *j = cJSON_Parse(slurp("out"));
    assert_non_null(j);
    assert_int_equal(cJSON_GetObjectItem(j, "count")->valueint, 2);
    cJSON *first = cJSON_GetArrayItem(cJSON_GetObjectItem(j, "materials"), 0);
    assert_string_equal(cJSON_GetObjectItem(first, "id")->valuestring, "graphene_gap");
    assert_string_equal(cJSON_GetObjectItem(first, "status")->valuestring, "ok");
    assert_false(cJSON_IsTrue(cJSON_GetObjectItem(j, "invented")));
    cJSON_Delete(j);
    snprintf(args, sizeof args, "list '%s/set.h5'", tmpdir);
    assert_int_equal(run(args), 0);
    assert_non_null(strstr(slurp("out"), "graphene_spinful"));
}

static void test_failing_cards(void **state)
{
    (void)state;
    char args[2048], set[320];
    snprintf(set, sizeof set, "%s/broken.h5", tmpdir);
    snprintf(args, sizeof args,
             "pack -o '%s' '%s/good/graphene_gap.json' '%s/broken/nonhermitian.json' "
             "'%s/broken/bad_json.json'",
             set, BS_TEST_DATA, BS_TEST_DATA, BS_TEST_DATA);
    assert_int_equal(run(args), 1);
    const char *err = slurp("err");
    assert_non_null(strstr(err, "nonhermitian.json"));
    assert_non_null(strstr(err, "not Hermitian"));
    assert_non_null(strstr(err, "bad_json.json:6:"));
    assert_int_not_equal(access(set, F_OK), 0); /* nothing written */

    snprintf(args, sizeof args,
             "pack --keep-broken --invented --description 'two broken' -o '%s' "
             "'%s/good/graphene_gap.json' '%s/broken/nonhermitian.json' '%s/broken/bad_json.json'",
             set, BS_TEST_DATA, BS_TEST_DATA, BS_TEST_DATA);
    assert_int_equal(run(args), 0);
    snprintf(args, sizeof args, "list --json '%s'", set);
    assert_int_equal(run(args), 0);
    cJSON *j = cJSON_Parse(slurp("out"));
    assert_non_null(j);
    assert_true(cJSON_IsTrue(cJSON_GetObjectItem(j, "invented")));
    assert_string_equal(cJSON_GetObjectItem(j, "description")->valuestring, "two broken");
    cJSON *list = cJSON_GetObjectItem(j, "materials");
    assert_int_equal(cJSON_GetArraySize(list), 3);
    assert_string_equal(cJSON_GetObjectItem(cJSON_GetArrayItem(list, 1), "status")->valuestring, "broken");
    assert_string_equal(cJSON_GetObjectItem(cJSON_GetArrayItem(list, 2), "id")->valuestring, "bad_json");
    assert_string_equal(cJSON_GetObjectItem(cJSON_GetArrayItem(list, 2), "status")->valuestring, "error");
    cJSON_Delete(j);

    /* Listing something that is not a set fails with the reader's message. */
    snprintf(args, sizeof args, "list '%s/good/graphene_gap.json'", BS_TEST_DATA);
    assert_int_equal(run(args), 1);
    assert_non_null(strstr(slurp("err"), "not an HDF5 file"));
    /* Fault injection: an output folder that does not exist. */
    snprintf(args, sizeof args, "pack -o /nonexistent-folder-bs/x.h5 '%s/good/graphene_gap.json'",
             BS_TEST_DATA);
    assert_int_equal(run(args), 1);
    assert_non_null(strstr(slurp("err"), "/nonexistent-folder-bs/x.h5"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_help),
        cmocka_unit_test(test_pack_and_list),
        cmocka_unit_test(test_failing_cards),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
