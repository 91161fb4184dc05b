/* Content identity in the catalogue: migration of version-1 files, the integer invariant columns,
 * summary by current content with conflicts shown, skip lists that follow content, --rerun resume,
 * and the failures view's cause-first text. Data are invented (no physics is checked here). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/catalogue.h"

static char tmpdir[256];

static int setup(void **state)
{
    (void)state;
    return bs_test_tmpdir(tmpdir, sizeof tmpdir, "identity");
}

static int teardown(void **state)
{
    (void)state;
    return bs_test_rmtree(tmpdir);
}

static void cat_path(const char *name, char *out, size_t cap)
{
    snprintf(out, cap, "%s/%s", tmpdir, name);
}

static cat_db *open_rw(const char *path)
{
    cat_db *cat = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (cat_open(path, CAT_RW, &cat, &err) != 0) fail_msg("cat_open: %s", err.msg);
    return cat;
}

static void close_ok(cat_db *cat)
{
    bs_err err;
    bs_err_clear(&err);
    if (cat_close(cat, &err) != 0) fail_msg("cat_close: %s", err.msg);
}

typedef struct dump {
    char text[8192];
    size_t len;
    int nrow;
} dump;

static int dump_row(void *ctx, const cat_row *row, bs_err *err)
{
    (void)err;
    dump *d = ctx;
    if (row->index < 0) return 0;
    for (int i = 0; i < row->ncol; i++)
        d->len += (size_t)snprintf(d->text + d->len, sizeof d->text - d->len, "%s%s", i ? "|" : "",
                                   row->text[i] ? row->text[i] : "NULL");
    d->len += (size_t)snprintf(d->text + d->len, sizeof d->text - d->len, "\n");
    d->nrow++;
    return 0;
}

static void q(cat_db *cat, const char *sql, dump *d)
{
    bs_err err;
    bs_err_clear(&err);
    memset(d, 0, sizeof *d);
    if (cat_query(cat, sql, dump_row, d, &err) != 0) fail_msg("query %s: %s", sql, err.msg);
}

static void material(cat_db *cat, const char *id, const char *content)
{
    bs_err err;
    bs_err_clear(&err);
    cat_material m = {.material_id = id, .dimension = 3, .spinful = -1, .content = content};
    if (cat_material_upsert(cat, &m, &err) != 0) fail_msg("upsert: %s", err.msg);
}

/* An invented diagnosis with the given class, mesh, Z2 (JSON list or null) and plane Chern list;
 * 2D when the Z2 list has one entry. */
static void put(cat_db *cat, int64_t run, const char *id, const char *cls, int mesh, const char *z2,
                const char *planes)
{
    char json[1024];
    int dim = z2[0] == '[' && !strchr(z2, ',') ? 2 : 3;
    snprintf(json, sizeof json,
             "{\"id\":\"%s\",\"class\":\"%s\",\"confidence\":0.9,\"z2\":%s,\"plane_chern\":%s,\"mesh\":%d,"
             "\"dimension\":%d,\"norb\":4,\"occupied_bands\":2}",
             id, cls, z2, planes, mesh, dim);
    bs_err err;
    bs_err_clear(&err);
    if (cat_result_put_text(cat, run, id, CAT_RES_OK, NULL, json, strlen(json), 1, 1.0, &err) != 0)
        fail_msg("put %s: %s", id, err.msg);
}

static int64_t begin(cat_db *cat, const char *settings, const char *set_content, int rerun)
{
    cat_run_info info = {.kind = "screen",
                         .settings_json = settings,
                         .version = "t",
                         .ranks = 1,
                         .set_path = "/a/set.h5",
                         .set_content = set_content,
                         .rerun = rerun};
    int64_t id = 0;
    bs_err err;
    bs_err_clear(&err);
    if (cat_run_begin(cat, &info, &id, &err) != 0) fail_msg("begin: %s", err.msg);
    return id;
}

static void end(cat_db *cat, int64_t run, cat_run_status st)
{
    bs_err err;
    bs_err_clear(&err);
    if (cat_run_end(cat, run, st, &err) != 0) fail_msg("end: %s", err.msg);
}

/* A version-1 file (the old schema kept in tests/data) is migrated on open: afterwards every
 * table has exactly the columns of a fresh file, and old rows read through the new columns. */
static void test_migration_from_v1(void **state)
{
    (void)state;
    char old[300], fresh[300];
    cat_path("v1.sqlite", old, sizeof old);
    cat_path("fresh.sqlite", fresh, sizeof fresh);
    FILE *fp = fopen(BS_TEST_DATA "/catalogue-v1.sql", "rb");
    assert_non_null(fp);
    static char schema[65536];
    size_t n = fread(schema, 1, sizeof schema - 1, fp);
    fclose(fp);
    schema[n] = '\0';
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open(old, &db), SQLITE_OK);
    assert_int_equal(sqlite3_exec(db, schema, NULL, NULL, NULL), SQLITE_OK);
    char marks[200];
    snprintf(marks, sizeof marks, "PRAGMA application_id = %d; PRAGMA user_version = 1;", CAT_APPLICATION_ID);
    assert_int_equal(sqlite3_exec(db, marks, NULL, NULL, NULL), SQLITE_OK);
    assert_int_equal(
        sqlite3_exec(db,
                     "INSERT INTO runs (kind, started) VALUES ('screen', 'x');"
                     "INSERT INTO materials (material_id, updated) VALUES ('m', 'x');"
                     "INSERT INTO results (run_id, material_id, status, finished, z2, plane_chern)"
                     " VALUES (1, 'm', 'ok', 'x', '1;011', '0;1;-2;0;3;0');",
                     NULL, NULL, NULL),
        SQLITE_OK);
    sqlite3_close(db);
    close_ok(open_rw(old));
    close_ok(open_rw(fresh));
    cat_db *a = open_rw(old), *b = open_rw(fresh);
    const char *tables[] = {"runs",           "run_sessions", "materials",   "results",
                            "nodes",          "artifacts",    "paths",       "path_samples",
                            "path_intervals", "path_events",  "path_tracks", "path_track_points"};
    for (int t = 0; t < (int)(sizeof tables / sizeof tables[0]); t++) {
        char sql[200];
        snprintf(sql, sizeof sql, "SELECT name, type, hidden FROM pragma_table_xinfo('%s') ORDER BY name",
                 tables[t]);
        dump da, db2;
        q(a, sql, &da);
        q(b, sql, &db2);
        assert_string_equal(da.text, db2.text);
    }
    dump d;
    q(a, "PRAGMA user_version", &d);
    char want[16];
    snprintf(want, sizeof want, "%d\n", CAT_SCHEMA_VERSION);
    assert_string_equal(d.text, want); /* through every version to the current one */
    q(a, "SELECT z2_nu0, z2_nu1, z2_nu2, z2_nu3, chern_k1_half, chern_k2_0, chern_k3_0 FROM results", &d);
    assert_string_equal(d.text, "1|0|1|1|1|-2|3\n");
    close_ok(a);
    close_ok(b);
}

/* The integer columns follow the text ones: 3D "nu0;nu1nu2nu3", 2D "nu", NULL where there is no
 * index; the six plane Chern numbers in plane order. */
static void test_invariant_integer_columns(void **state)
{
    (void)state;
    char path[300];
    cat_path("ints.sqlite", path, sizeof path);
    cat_db *cat = open_rw(path);
    int64_t run = begin(cat, "{}", "s1", 0);
    put(cat, run, "a", "strong topological insulator", 8, "[1,0,1,1]", "[0,1,-2,0,3,0]");
    put(cat, run, "b", "2D topological insulator", 8, "[1]", "null");
    put(cat, run, "c", "metal", 8, "null", "null");
    dump d;
    q(cat,
      "SELECT material_id, z2, z2_nu0, z2_nu1, z2_nu2, z2_nu3, chern_k1_0, chern_k1_half, chern_k2_0,"
      " chern_k2_half, chern_k3_0, chern_k3_half FROM results ORDER BY material_id",
      &d);
    assert_string_equal(d.text, "a|1;011|1|0|1|1|0|1|-2|0|3|0\n"
                                "b|1|1|NULL|NULL|NULL|NULL|NULL|NULL|NULL|NULL|NULL\n"
                                "c|NULL|NULL|NULL|NULL|NULL|NULL|NULL|NULL|NULL|NULL|NULL\n");
    close_ok(cat);
}

/* Regression (2026-12-02): after a repack with a changed table, summary kept the older, finer
 * result. Rows carry the content they were computed for; summary takes the current content's
 * best row even when an older content has a finer one, and conflicts lists both contents. */
static void test_summary_current_content_and_conflicts(void **state)
{
    (void)state;
    char path[300];
    cat_path("current.sqlite", path, sizeof path);
    cat_db *cat = open_rw(path);
    material(cat, "x", "c-old");
    int64_t r1 = begin(cat, "{}", "s1", 0);
    put(cat, r1, "x", "trivial insulator", 40, "[0,0,0,0]", "null");
    end(cat, r1, CAT_RUN_DONE);
    material(cat, "x", "c-new");
    int64_t r2 = begin(cat, "{}", "s2", 0);
    put(cat, r2, "x", "strong topological insulator", 14, "[1,0,0,0]", "null");
    end(cat, r2, CAT_RUN_DONE);
    dump d;
    q(cat, "SELECT class, mesh, content, current, contents FROM summary", &d);
    assert_string_equal(d.text, "strong topological insulator|14|c-new|1|2\n");
    q(cat, "SELECT content, current, results, best_mesh, last_run_id FROM conflicts", &d);
    assert_string_equal(d.text, "c-new|1|1|14|2\nc-old|0|1|40|1\n");
    /* Back to the old content (the other set screened again): its finer row is current again. */
    material(cat, "x", "c-old");
    q(cat, "SELECT class, mesh, current FROM summary", &d);
    assert_string_equal(d.text, "trivial insulator|40|1\n");
    close_ok(cat);
}

/* A new run skips exactly the materials whose current content has a row with the same settings,
 * whatever the run's set path or status; a changed content is not skipped. */
static void test_finished_ids_follow_content(void **state)
{
    (void)state;
    char path[300];
    cat_path("skip.sqlite", path, sizeof path);
    cat_db *cat = open_rw(path);
    material(cat, "a", "ca");
    material(cat, "b", "cb");
    int64_t r1 = begin(cat, "{\"mesh_3d\":14}", "s1", 0);
    put(cat, r1, "a", "metal", 14, "null", "null");
    put(cat, r1, "b", "metal", 14, "null", "null");
    end(cat, r1, CAT_RUN_INTERRUPTED);
    material(cat, "b", "cb2");
    cat_run_info info = {.kind = "screen",
                         .settings_json = "{\"mesh_3d\": 14}",
                         .version = "t",
                         .set_path = "/elsewhere/set.h5",
                         .set_content = "s2"};
    cat_ids ids;
    cat_ids_init(&ids);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_finished_ids(cat, &info, &ids, &err), 0);
    assert_int_equal(ids.n, 1);
    assert_string_equal(ids.id[0], "a");
    /* Other settings: nothing is skipped. */
    info.settings_json = "{\"mesh_3d\":28}";
    assert_int_equal(cat_finished_ids(cat, &info, &ids, &err), 0);
    assert_int_equal(ids.n, 0);
    cat_ids_clear(&ids);
    close_ok(cat);
}

/* Resume matches the set by content, not path; --rerun resumes only a run that --rerun started. */
static void test_resume_by_set_content_and_rerun(void **state)
{
    (void)state;
    char path[300];
    cat_path("rerun.sqlite", path, sizeof path);
    cat_db *cat = open_rw(path);
    int64_t r1 = begin(cat, "{}", "s1", 0);
    end(cat, r1, CAT_RUN_INTERRUPTED);
    cat_run_info info = {.kind = "screen",
                         .settings_json = "{}",
                         .version = "t",
                         .set_path = "/scratch/job9/set.h5",
                         .set_content = "s1"};
    int64_t id = 0;
    int resumed = 0;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_run_resume(cat, &info, &id, &resumed, &err), 0);
    assert_int_equal(resumed, 1);
    assert_int_equal(id, r1);
    end(cat, id, CAT_RUN_INTERRUPTED);
    /* --rerun does not take over a run it did not start ... */
    info.rerun = 1;
    assert_int_equal(cat_run_rerun(cat, &info, &id, &resumed, &err), 0);
    assert_int_equal(resumed, 0);
    int64_t r2 = id;
    assert_true(r2 > r1);
    end(cat, r2, CAT_RUN_INTERRUPTED);
    /* ... but a resubmitted --rerun continues its own unfinished run, and says so in runs.rerun. */
    assert_int_equal(cat_run_rerun(cat, &info, &id, &resumed, &err), 0);
    assert_int_equal(resumed, 1);
    assert_int_equal(id, r2);
    cat_run_state rs;
    assert_int_equal(cat_run_get(cat, id, &rs, &err), 0);
    assert_int_equal(rs.rerun, 1);
    assert_int_equal(rs.sessions, 2);
    end(cat, id, CAT_RUN_DONE);
    /* Once it has finished, --rerun starts afresh. */
    assert_int_equal(cat_run_rerun(cat, &info, &id, &resumed, &err), 0);
    assert_int_equal(resumed, 0);
    assert_true(id > r2);
    close_ok(cat);
}

/* The failures view puts the cause first, with the set's path dropped and the location in brackets
 * at the end, so that the first 60 characters say what went wrong. */
static void test_failures_cause_first(void **state)
{
    (void)state;
    char path[300];
    cat_path("fail.sqlite", path, sizeof path);
    cat_db *cat = open_rw(path);
    int64_t run = begin(cat, "{}", "s1", 0);
    bs_err err;
    bs_err_clear(&err);
    const char *msg =
        "/very/long/scratch/path/of/the/job/that/staged/the/set/materials.h5:/materials/JQ-0013:"
        " not Hermitian: H(R)[1,2] != conj(H(-R)[2,1]) at R = (1,0,0)";
    assert_int_equal(cat_result_put_text(cat, run, "JQ-0013", CAT_RES_INVALID, msg, NULL, 0, 1, 0.1, &err),
                     0);
    assert_int_equal(cat_result_put_text(cat, run, "JQ-0020", CAT_RES_FAILED, "eigensolver did not converge",
                                         NULL, 0, 1, 0.1, &err),
                     0);
    dump d;
    q(cat, "SELECT cause FROM failures ORDER BY material_id", &d);
    assert_string_equal(d.text,
                        "not Hermitian: H(R)[1,2] != conj(H(-R)[2,1]) at R = (1,0,0) [materials/JQ-0013]\n"
                        "eigensolver did not converge\n");
    q(cat, "SELECT name FROM pragma_table_info('failures') LIMIT 1", &d);
    assert_string_equal(d.text, "cause\n");
    close_ok(cat);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_migration_from_v1),
        cmocka_unit_test(test_invariant_integer_columns),
        cmocka_unit_test(test_summary_current_content_and_conflicts),
        cmocka_unit_test(test_finished_ids_follow_content),
        cmocka_unit_test(test_resume_by_set_content_and_rerun),
        cmocka_unit_test(test_failures_cause_first),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
