/* Catalogue tests: schema, result rows from diagnosis JSON, the views, batching, resume after a
 * SIGKILL, read-only queries, and the error paths. Expected values are SQL semantics and our own
 * documented contract (db/README.md), so they are exact; the result data are invented for the
 * test (labelled so) and carry no physics. */
#include <stdarg.h>
#include <stddef.h>
#include <setjmp.h>
#include <cmocka.h>

#include <dirent.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include <cjson/cJSON.h>
#include <sqlite3.h>

#include "bandsieve/catalogue.h"
#include "bandsieve/phasepath.h"
#include "bandsieve/result.h"

/* ---- helpers ---- */

typedef struct tmpdir {
    char dir[64];
    char cat[128];
} tmpdir;

/* Every folder made, so that the group teardown removes those of failed tests too (a failing
 * cmocka assertion skips the rest of its test). Test-only state. */
static char made_dirs[64][64];
static int nmade;

static void tmp_make(tmpdir *t)
{
    snprintf(t->dir, sizeof t->dir, "/tmp/bs_cat_test_XXXXXX");
    assert_non_null(mkdtemp(t->dir));
    snprintf(t->cat, sizeof t->cat, "%s/cat.sqlite", t->dir);
    if (nmade < 64) snprintf(made_dirs[nmade++], sizeof made_dirs[0], "%s", t->dir);
}

static void dir_remove(const char *dir)
{
    DIR *d = opendir(dir);
    if (!d) return;
    struct dirent *e;
    char path[512];
    while ((e = readdir(d)))
        if (strcmp(e->d_name, ".") && strcmp(e->d_name, "..")) {
            snprintf(path, sizeof path, "%s/%s", dir, e->d_name);
            if (unlink(path) != 0) rmdir(path); /* the folder test_artifact_write_failure makes */
        }
    closedir(d);
    rmdir(dir);
}

static void tmp_remove(tmpdir *t)
{
    dir_remove(t->dir);
}

static int remove_all_dirs(void **state)
{
    (void)state;
    for (int i = 0; i < nmade; i++)
        dir_remove(made_dirs[i]);
    return 0;
}

/* All rows of a query as one text: cells joined by '|', rows by '\n', NULL as "NULL". */
typedef struct dump {
    char text[16384];
    size_t len;
    long long nrow;
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
    int rc = cat_query(cat, sql, dump_row, d, &err);
    if (rc != 0) fail_msg("query %s: %s", sql, err.msg);
}

static long long q_int(cat_db *cat, const char *sql)
{
    dump d;
    q(cat, sql, &d);
    assert_int_equal(d.nrow, 1);
    return atoll(d.text);
}

/* One double read in binary through a plain read-only connection (no decimal text on the way,
 * so the comparison is exact: SQLite's own decimal parser is not correctly rounded in every
 * build). The writer has committed what is read (WAL readers see committed data only). */
static double raw_double(const char *path, const char *sql)
{
    sqlite3 *db = NULL;
    sqlite3_stmt *st = NULL;
    assert_int_equal(sqlite3_open_v2(path, &db, SQLITE_OPEN_READONLY, NULL), SQLITE_OK);
    assert_int_equal(sqlite3_prepare_v2(db, sql, -1, &st, NULL), SQLITE_OK);
    assert_int_equal(sqlite3_step(st), SQLITE_ROW);
    double v = sqlite3_column_double(st, 0);
    sqlite3_finalize(st);
    sqlite3_close(db);
    return v;
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

static const cat_run_info RUN_A = {"screen", "{\"mesh\": 8, \"tasks\": [\"z2\", \"chern\"]}", "0.1.0",  2,
                                   "node1",  "bandsieve screen set.h5 -c cat.sqlite",         "set.h5", NULL,
                                   0};

static int64_t begin(cat_db *cat, const cat_run_info *info)
{
    int64_t id = 0;
    bs_err err;
    bs_err_clear(&err);
    if (cat_run_begin(cat, info, &id, &err) != 0) fail_msg("cat_run_begin: %s", err.msg);
    return id;
}

/* An invented diagnosis as JSON text (test data, no physics). */
static void diag_json(char *buf, size_t len, const char *id, const char *cls, double conf, double gap,
                      const char *z2, int mesh, int nnodes)
{
    char nodes[512] = "";
    size_t k = 0;
    for (int i = 0; i < nnodes; i++)
        k += (size_t)snprintf(nodes + k, sizeof nodes - k,
                              "%s{\"k\":[%g,0.25,0],\"chirality\":%d,\"energy_eV\":0.01,\"gap_eV\":1e-5}",
                              i ? "," : "", 0.1 * (i + 1), i % 2 ? -1 : 1);
    /* A list of one index is a 2D material; the status says done exactly when there is a list. */
    int dim = strchr(z2, ',') || !strcmp(z2, "null") ? 3 : 2;
    snprintf(
        buf, len,
        "{\"id\":\"%s\",\"class\":\"%s\",\"confidence\":%g,\"reason\":\"invented\",\"dimension\":%d,"
        "\"gap_direct_eV\":%g,\"gap_indirect_eV\":%g,\"k_gap_direct\":[0,0.5,0],\"time_reversal\":true,"
        "\"inversion\":false,\"z2\":%s,\"z2_parity\":null,\"z2_wcc\":%s,\"z2_status\":\"%s\",\"chern\":null,"
        "\"plane_chern\":[0,0,0,0,0,0],\"weyl_nodes\":[%s],\"net_chirality\":0,\"nodal_line\":false,"
        "\"mesh\":%d,\"seconds\":1.5}",
        id, cls, conf, dim, gap + 0.05, gap, z2, z2, strcmp(z2, "null") ? "done" : "not applicable", nodes,
        mesh);
}

static void put_text(cat_db *cat, int64_t run, const char *id, cat_status st, const char *msg,
                     const char *json)
{
    bs_err err;
    bs_err_clear(&err);
    int rc = cat_result_put_text(cat, run, id, st, msg, json, json ? strlen(json) : 0, 3, 2.0, &err);
    if (rc != 0) fail_msg("put %s: %s", id, err.msg);
}

static void put_ok(cat_db *cat, int64_t run, const char *id, const char *cls, double conf, double gap,
                   const char *z2, int mesh)
{
    char buf[2048];
    diag_json(buf, sizeof buf, id, cls, conf, gap, z2, mesh, 0);
    put_text(cat, run, id, CAT_RES_OK, NULL, buf);
}

/* ---- schema ---- */

static void test_schema_applies(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    /* The marks we write and the WAL mode cat_open promises. */
    assert_int_equal(q_int(cat, "PRAGMA user_version"), CAT_SCHEMA_VERSION);
    assert_int_equal(q_int(cat, "PRAGMA application_id"), CAT_APPLICATION_ID);
    dump d;
    q(cat, "SELECT name FROM sqlite_master WHERE type IN ('table', 'view') ORDER BY name", &d);
    assert_string_equal(
        d.text, "artifacts\ncandidates\nconflicts\nfailures\nmaterials\nnodes\npath_events\npath_intervals\n"
                "path_samples\npath_track_points\npath_tracks\npaths\nresults\nrun_progress\n"
                "run_sessions\nruns\nsummary\nsurfaces\ntop_spin_hall\ntransitions\n");
    close_ok(cat);
    /* WAL mode is a property of the file: a plain connection sees it. (cat_query refuses even
     * a bare "PRAGMA journal_mode", which sqlite3_stmt_readonly counts as a write.) */
    sqlite3 *db = NULL;
    sqlite3_stmt *st = NULL;
    assert_int_equal(sqlite3_open_v2(t.cat, &db, SQLITE_OPEN_READONLY, NULL), SQLITE_OK);
    assert_int_equal(sqlite3_prepare_v2(db, "PRAGMA journal_mode", -1, &st, NULL), SQLITE_OK);
    assert_int_equal(sqlite3_step(st), SQLITE_ROW);
    assert_string_equal((const char *)sqlite3_column_text(st, 0), "wal");
    sqlite3_finalize(st);
    sqlite3_close(db);
    /* Reopening applies nothing twice (views are dropped and re-created, tables kept). */
    cat = open_rw(t.cat);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_check(cat, &err), 0);
    close_ok(cat);
    cat = NULL;
    assert_int_equal(cat_open(t.cat, CAT_RO, &cat, &err), 0);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM runs"), 0);
    close_ok(cat);
    tmp_remove(&t);
}

static void test_open_refuses_foreign_files(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    bs_err err;
    cat_db *cat = NULL;

    /* Read-only open of a missing file fails and creates nothing. */
    bs_err_clear(&err);
    assert_int_equal(cat_open(t.cat, CAT_RO, &cat, &err), BS_ESQL);
    assert_null(cat);
    assert_non_null(strstr(err.msg, "unable to open"));
    struct stat sb;
    assert_int_not_equal(stat(t.cat, &sb), 0);

    /* Another program's SQLite file is not taken over. */
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open(t.cat, &db), SQLITE_OK);
    assert_int_equal(sqlite3_exec(db, "CREATE TABLE other (x)", NULL, NULL, NULL), SQLITE_OK);
    sqlite3_close(db);
    bs_err_clear(&err);
    assert_int_equal(cat_open(t.cat, CAT_RW, &cat, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "not a bandsieve catalogue"));
    unlink(t.cat);

    /* A newer schema than ours is refused, not downgraded. */
    cat = open_rw(t.cat);
    close_ok(cat);
    assert_int_equal(sqlite3_open(t.cat, &db), SQLITE_OK);
    assert_int_equal(sqlite3_exec(db, "PRAGMA user_version = 99", NULL, NULL, NULL), SQLITE_OK);
    sqlite3_close(db);
    bs_err_clear(&err);
    assert_int_equal(cat_open(t.cat, CAT_RO, &cat, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "newer"));
    tmp_remove(&t);
}

/* The path tables of a catalogue migrated from version 4 equal those of a fresh file, column by
 * column (name, type, not-null, default, key) and in their foreign keys. */
static void table_shape(const char *path, const char *table, char *out, size_t len)
{
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open_v2(path, &db, SQLITE_OPEN_READONLY, NULL), SQLITE_OK);
    size_t used = 0;
    out[0] = '\0';
    const char *const pragmas[2] = {"PRAGMA table_info(%s)", "PRAGMA foreign_key_list(%s)"};
    for (int p = 0; p < 2; p++) {
        char sql[128];
        snprintf(sql, sizeof sql, pragmas[p], table);
        sqlite3_stmt *st = NULL;
        assert_int_equal(sqlite3_prepare_v2(db, sql, -1, &st, NULL), SQLITE_OK);
        while (sqlite3_step(st) == SQLITE_ROW)
            for (int c = 0; c < sqlite3_column_count(st); c++) {
                const unsigned char *v = sqlite3_column_text(st, c);
                used += (size_t)snprintf(out + used, len - used, "%s%c", v ? (const char *)v : "NULL",
                                         c + 1 == sqlite3_column_count(st) ? '\n' : '|');
            }
        sqlite3_finalize(st);
    }
    sqlite3_close(db);
    assert_true(used > 0);
}

static const char *const PATH_TABLES[] = {"paths",       "path_samples", "path_intervals",
                                          "path_events", "path_tracks",  "path_track_points"};

static void test_migrate_paths(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    close_ok(cat);
    char fresh_path[600];
    snprintf(fresh_path, sizeof fresh_path, "%s/fresh.sqlite", t.dir);
    close_ok(open_rw(fresh_path));
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open(t.cat, &db), SQLITE_OK);
    assert_int_equal(sqlite3_exec(db, "DROP VIEW transitions", NULL, NULL, NULL), SQLITE_OK);
    for (int i = 5; i >= 0; i--) {
        char sql[128];
        snprintf(sql, sizeof sql, "DROP TABLE %s", PATH_TABLES[i]);
        if (sqlite3_exec(db, sql, NULL, NULL, NULL) != SQLITE_OK) fail_msg("%s: %s", sql, sqlite3_errmsg(db));
    }
    assert_int_equal(sqlite3_exec(db, "PRAGMA user_version = 4", NULL, NULL, NULL), SQLITE_OK);
    sqlite3_close(db);
    cat = open_rw(t.cat);
    assert_int_equal(q_int(cat, "PRAGMA user_version"), CAT_SCHEMA_VERSION);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM transitions"), 0);
    close_ok(cat);
    for (int i = 0; i < 6; i++) {
        static char a[8192], b[8192];
        table_shape(t.cat, PATH_TABLES[i], a, sizeof a);
        table_shape(fresh_path, PATH_TABLES[i], b, sizeof b);
        if (strcmp(a, b) != 0) fail_msg("%s differs after migration:\n%s\nfresh:\n%s", PATH_TABLES[i], a, b);
    }
    remove(fresh_path);
    tmp_remove(&t);
}

/* A path stored twice for the same family replaces the first (paths and every path_* table), and
 * the transitions view shows its closings with the classes either side. The path is a real one:
 * the Haldane model over M in [-1.5, 1.5] at t2 = 0.1, phi = pi/2 closes at M = -+3 sqrt3 t2
 * (Phys. Rev. Lett. 61, 2015 (1988)), to the path's tolerance 1e-5 (1e-4 allowed). */
static void test_path_put_replace(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    bs_err err;
    bs_err_clear(&err);
    pp_source *src = NULL;
    assert_int_equal(pp_source_builtin("haldane:t2=0.1,phi=0.5", "M", &src, &err), 0);
    pp_opts o;
    pp_opts_init(&o);
    o.nsamples = 15;
    pp_result r;
    pp_result_init(&r);
    if (pp_run(src, "M", -1.5, 1.5, &o, &r, &err) != 0) fail_msg("pp_run: %s", err.msg);
    assert_int_equal(r.nclosing, 2);
    cat_path_info info = {.family = "haldane",
                          .parameter = "M",
                          .unit = "eV",
                          .content = "c1",
                          .nmembers = 2,
                          .dimension = 2,
                          .x_from = -1.5,
                          .x_to = 1.5,
                          .tol_x = 1e-5,
                          .status = CAT_RES_OK};
    for (int pass = 0; pass < 2; pass++)
        if (cat_path_put(cat, 0, &info, &r, &err) != 0) fail_msg("cat_path_put: %s", err.msg);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM paths"), 1);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM path_samples"), r.nsamples);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM path_intervals"), r.ninterval);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM path_events"), r.nclosing + r.nevent);
    dump d;
    q(cat, "SELECT round(value, 4), class_before, class_after FROM transitions", &d);
    assert_string_equal(d.text, "-0.5196|trivial insulator|Chern insulator\n"
                                "0.5196|Chern insulator|trivial insulator\n");
    int done = 0;
    assert_int_equal(cat_path_done(cat, "haldane", "c1", 1e-5, &done, &err), 0);
    assert_int_equal(done, 1);
    assert_int_equal(cat_path_done(cat, "haldane", "c1", 1e-6, &done, &err), 0);
    assert_int_equal(done, 0); /* a finer tolerance is not done */
    assert_int_equal(cat_path_done(cat, "haldane", "c2", 1e-5, &done, &err), 0);
    assert_int_equal(done, 0); /* other members */
    /* A failed path replaces the ok one and leaves no rows of it. */
    info.status = CAT_RES_FAILED;
    info.message = "numerical failure";
    assert_int_equal(cat_path_put(cat, 0, &info, NULL, &err), 0);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM path_samples"), 0);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM path_events"), 0);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM transitions"), 0);
    info.status = CAT_RES_TIMEOUT;
    assert_int_equal(cat_path_put(cat, 0, &info, NULL, &err), BS_EINVAL);
    pp_result_clear(&r);
    pp_source_free(src);
    close_ok(cat);
    tmp_remove(&t);
}

/* A version-2 catalogue (before the approximate-symmetry columns) is migrated when opened for
 * writing: the columns appear, old rows keep NULL there, and new rows fill them. */
static void test_migrate_v2(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    put_ok(cat, run, "old", "trivial insulator", 0.9, 1.0, "[0,0,0,0]", 8);
    close_ok(cat);
    sqlite3 *db = NULL;
    assert_int_equal(sqlite3_open(t.cat, &db), SQLITE_OK);
    static const char *const cols[] = {"magnetism",
                                       "tr_verdict",
                                       "inv_verdict",
                                       "tr_breaking_ev",
                                       "inv_breaking_ev",
                                       "symmetrised",
                                       "restored",
                                       "breaking_ev",
                                       "breaking_bound",
                                       "symmetry_margin",
                                       "spacegroup",
                                       "symmetry_ops",
                                       "crystal_breaking_ev",
                                       "z4",
                                       "mirror_chern",
                                       "mirror_chern_status"};
    assert_int_equal(
        sqlite3_exec(db,
                     "DROP VIEW IF EXISTS conflicts; DROP VIEW candidates; DROP VIEW "
                     "top_spin_hall; DROP VIEW surfaces; DROP VIEW summary; DROP VIEW transitions;"
                     "DROP TABLE path_track_points; DROP TABLE path_tracks; DROP TABLE path_events;"
                     "DROP TABLE path_intervals; DROP TABLE path_samples; DROP TABLE paths;",
                     NULL, NULL, NULL),
        SQLITE_OK);
    for (size_t i = 0; i < sizeof cols / sizeof cols[0]; i++) {
        char sql[128];
        snprintf(sql, sizeof sql, "ALTER TABLE results DROP COLUMN %s", cols[i]);
        if (sqlite3_exec(db, sql, NULL, NULL, NULL) != SQLITE_OK) fail_msg("%s: %s", sql, sqlite3_errmsg(db));
    }
    assert_int_equal(sqlite3_exec(db, "PRAGMA user_version = 2", NULL, NULL, NULL), SQLITE_OK);
    sqlite3_close(db);
    bs_err err;
    bs_err_clear(&err);
    cat = NULL;
    assert_int_equal(cat_open(t.cat, CAT_RO, &cat, &err), 0); /* read as it is */
    assert_int_equal(q_int(cat, "PRAGMA user_version"), 2);
    close_ok(cat);
    cat = open_rw(t.cat);
    assert_int_equal(q_int(cat, "PRAGMA user_version"), CAT_SCHEMA_VERSION);
    char buf[2048];
    snprintf(buf, sizeof buf,
             "{\"id\":\"new\",\"class\":\"strong topological insulator\",\"confidence\":0.9,"
             "\"reason\":\"invented\",\"gap_direct_eV\":0.5,\"magnetism\":\"none\",\"time_reversal_verdict\":"
             "\"approximate\","
             "\"inversion_verdict\":\"exact\",\"time_reversal_breaking_eV\":0.01,\"inversion_breaking_eV\":0,"
             "\"symmetrised\":true,\"restored\":\"time_reversal\",\"breaking_eV\":0.01,"
             "\"breaking_bound\":\"mesh x 1.5\",\"symmetry_margin\":50,\"mesh\":8}");
    put_text(cat, run, "new", CAT_RES_OK, NULL, buf);
    assert_int_equal(cat_flush(cat, &err), 0);
    dump d;
    q(cat,
      "SELECT material_id, COALESCE(magnetism, 'NULL'), COALESCE(tr_verdict, 'NULL'), COALESCE(restored, "
      "'NULL'), "
      "COALESCE(symmetry_margin, 'NULL') FROM summary ORDER BY material_id",
      &d);
    assert_string_equal(d.text, "new|none|approximate|time_reversal|50.0\nold|NULL|NULL|NULL|NULL\n");
    close_ok(cat);
    tmp_remove(&t);
}

/* The crystal-symmetry columns (schema 4) and what the views make of them: a Z2-trivial insulator
 * with a nonzero mirror Chern number is nontrivial (Phys. Rev. B 78, 045426 (2008)); kappa = 2 with
 * a trivial strong index flags a higher-order candidate (Phys. Rev. X 8, 031070 (2018)); a mirror
 * Chern number that was not computed is NULL, and so is a space group that was not found. */
static void test_crystal_columns(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    static const char *const extra[] = {"\"spacegroup\":221,\"symmetry_ops\":48,\"z4\":0,\"mirror_chern\":-2,"
                                        "\"mirror_chern_status\":\"done\"",
                                        "\"spacegroup\":224,\"symmetry_ops\":48,\"z4\":2,\"mirror_chern\":0,"
                                        "\"mirror_chern_status\":\"done\"",
                                        "\"spacegroup\":0,\"symmetry_ops\":1,\"z4\":null,\"mirror_chern\":0,"
                                        "\"mirror_chern_status\":\"not applicable\""};
    static const char *const ids[] = {"tci", "hoti", "plain"};
    static const char *const cls[] = {"topological crystalline insulator", "trivial insulator",
                                      "trivial insulator"};
    for (int i = 0; i < 3; i++) {
        char buf[2048];
        diag_json(buf, sizeof buf, ids[i], cls[i], 0.9, 0.2 + 0.1 * i, "[0,0,0,0]", 8, 0);
        size_t len = strlen(buf);
        snprintf(buf + len - 1, sizeof buf - len + 1, ",%s}", extra[i]); /* before the closing brace */
        put_text(cat, run, ids[i], CAT_RES_OK, NULL, buf);
    }
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_flush(cat, &err), 0);
    dump d;
    q(cat,
      "SELECT material_id, COALESCE(spacegroup, 'NULL'), COALESCE(z4, 'NULL'), COALESCE(mirror_chern, "
      "'NULL'), mirror_chern_status, nontrivial FROM summary ORDER BY material_id",
      &d);
    assert_string_equal(d.text,
                        "hoti|224|2|0|done|1\nplain|NULL|NULL|NULL|not applicable|0\ntci|221|0|-2|done|1\n");
    q(cat, "SELECT material_id, why FROM candidates", &d);
    assert_string_equal(d.text, "hoti|higher-order candidate (z4 = 2)\ntci|nontrivial\n");
    close_ok(cat);
    tmp_remove(&t);
}

/* ---- results ---- */

static void test_put_and_read_back(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    bs_err err;
    bs_err_clear(&err);
    cat_material mat = {"mat-1",    "Bi2Se3", 3,    40,   300,  20,   1,    "set.h5",
                        "invented", NULL,     NULL, NULL, NULL, NULL, NULL, 0};
    assert_int_equal(cat_material_upsert(cat, &mat, &err), 0);

    char buf[4096];
    diag_json(buf, sizeof buf, "mat-1", "Weyl semimetal", 0.9, 0.0, "null", 16, 2);
    put_text(cat, run, "mat-1", CAT_RES_OK, NULL, buf);
    diag_json(buf, sizeof buf, "mat-2", "strong topological insulator", 0.95, 0.2, "[1,0,0,0]", 12, 0);
    put_text(cat, run, "mat-2", CAT_RES_OK, NULL, buf);
    diag_json(buf, sizeof buf, "mat-3", "2D topological insulator", 0.8, 0.1, "[1]", 24, 0);
    /* Transport in the shape tr_to_json writes and diag_attach_transport lifts to the top. */
    snprintf(buf + strlen(buf) - 1, sizeof buf - strlen(buf) + 1,
             ",\"ahc\":{\"xy\":0.25,\"units\":\"e^2/h\",\"fermi_eV\":0.125,\"error\":1e-6},"
             "\"shc\":{\"xy_z\":-0.5,\"units\":\"e/2pi\",\"fermi_eV\":0.125,\"error\":1e-6},"
             "\"transport\":{\"kpoints\":4096}}");
    put_text(cat, run, "mat-3", CAT_RES_OK, NULL, buf);
    assert_int_equal(cat_flush(cat, &err), 0);

    dump d;
    /* z2 text forms of the contract: "1;000" in 3D, "1" in 2D, NULL where the list is null; plane
     * Chern numbers only in 3D. */
    q(cat,
      "SELECT material_id, status, class, z2, z2_wcc, z2_parity, plane_chern, n_weyl, net_chirality, "
      "nodal_line,"
      " time_reversal, inversion, k_gap_direct, mesh, seconds, diag_seconds, rank FROM results ORDER BY "
      "material_id",
      &d);
    assert_string_equal(
        d.text, "mat-1|ok|Weyl semimetal|NULL|NULL|NULL|0;0;0;0;0;0|2|0|0|1|0|[0,0.5,0]|16|2.0|1.5|3\n"
                "mat-2|ok|strong topological "
                "insulator|1;000|1;000|NULL|0;0;0;0;0;0|0|0|0|1|0|[0,0.5,0]|12|2.0|1.5|3\n"
                "mat-3|ok|2D topological insulator|1|1|NULL|NULL|0|0|0|1|0|[0,0.5,0]|24|2.0|1.5|3\n");
    /* Numbers come back bit for bit (SQLite REAL is an IEEE double). */
    assert_true(raw_double(t.cat, "SELECT confidence FROM results WHERE material_id = 'mat-2'") == 0.95);
    assert_true(raw_double(t.cat, "SELECT gap_indirect_ev FROM results WHERE material_id = 'mat-2'") == 0.2);
    assert_true(raw_double(t.cat, "SELECT gap_direct_ev FROM results WHERE material_id = 'mat-2'") == 0.25);
    q(cat,
      "SELECT material_id, ahc_xy, ahc_yz, ahc_zx, ahc_units, shc_xy, shc_units, transport_fermi_ev,"
      " json_extract(diagnosis, '$.transport.kpoints') FROM results WHERE ahc_units IS NOT NULL OR "
      "material_id = 'mat-2'"
      " ORDER BY material_id",
      &d);
    assert_string_equal(d.text, "mat-2|NULL|NULL|NULL|NULL|NULL|NULL|NULL|NULL\n"
                                "mat-3|0.25|NULL|NULL|e^2/h|-0.5|e/2pi|0.125|4096\n");
    q(cat, "SELECT node, k1, k2, k3, chirality, energy_ev, gap_ev FROM nodes ORDER BY node", &d);
    assert_string_equal(d.text, "0|0.1|0.25|0.0|1|0.01|1e-05\n1|0.2|0.25|0.0|-1|0.01|1e-05\n");
    /* cat_query gives reals as text that reads back exactly: 0.1 + 0.2 needs 17 digits, where
     * SQLite's own text would stop at 15 ("0.3"). Exact by construction (IEEE round trip). */
    put_text(cat, run, "mat-4", CAT_RES_OK, NULL, "{\"id\":\"mat-4\",\"gap_direct_eV\":0.30000000000000004}");
    assert_int_equal(cat_flush(cat, &err), 0);
    q(cat, "SELECT gap_direct_ev FROM results WHERE material_id = 'mat-4'", &d);
    assert_string_equal(d.text, "0.30000000000000004\n");
    assert_true(strtod(d.text, NULL) == 0.1 + 0.2);
    /* The stored diagnosis is the JSON we were given. */
    q(cat,
      "SELECT json_extract(diagnosis, '$.weyl_nodes[1].chirality'), json_extract(diagnosis, '$.reason')"
      " FROM results WHERE material_id = 'mat-1'",
      &d);
    assert_string_equal(d.text, "-1|invented\n");
    q(cat, "SELECT formula, dimension, norb, nr, nocc, spinful FROM materials WHERE material_id = 'mat-1'",
      &d);
    assert_string_equal(d.text, "Bi2Se3|3|40|300|20|1\n");
    /* A put for an unknown material records the material id. */
    assert_int_equal(q_int(cat, "SELECT count(*) FROM materials"), 4);

    /* A second put for the same (run, material) replaces the row and its nodes. */
    diag_json(buf, sizeof buf, "mat-1", "Weyl semimetal", 0.9, 0.0, "null", 16, 4);
    put_text(cat, run, "mat-1", CAT_RES_OK, NULL, buf);
    assert_int_equal(cat_flush(cat, &err), 0);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM results WHERE material_id = 'mat-1'"), 1);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM nodes"), 4);
    assert_int_equal(q_int(cat, "SELECT n_weyl FROM results WHERE material_id = 'mat-1'"), 4);
    close_ok(cat);
    tmp_remove(&t);
}

/* The writer takes the result struct: one built by hand, with its Wannier-centre flow stored in
 * HDF5 and read back exactly. */
static void test_struct_and_flows(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    res_diag r;
    res_init(&r);
    snprintf(r.id, sizeof r.id, "weird/id.1");
    r.cls = RES_STRONG_TI;
    r.confidence = 0.97;
    r.dim = 3;
    r.norb = 8;
    r.nocc = 4;
    r.gap_direct_ev = 0.31;
    r.gap_indirect_ev = 0.25;
    r.time_reversal = 1;
    r.inversion = 1;
    r.z2_status = r.z2_parity_status = r.z2_wcc_status = RES_DONE;
    const int nu[4] = {1, 0, 1, 1};
    memcpy(r.z2, nu, sizeof nu);
    memcpy(r.z2_parity, nu, sizeof nu);
    memcpy(r.z2_wcc, nu, sizeof nu);
    r.chern_status = RES_DONE;
    r.mesh = 20;
    r.nflows = 1;
    r.flows = calloc(1, sizeof *r.flows);
    assert_non_null(r.flows);
    r.flows[0] = (res_flow){4, 3, 2, malloc(3 * sizeof(double)), malloc(6 * sizeof(double))};
    for (int s = 0; s < 3; s++) {
        r.flows[0].kpar[s] = 0.25 * s;
        for (int b = 0; b < 2; b++)
            r.flows[0].wcc[s * 2 + b] = 0.1 * s + 0.3 * b + 1.0 / 3.0;
    }
    bs_err err;
    bs_err_clear(&err);
    int rc = cat_result_put(cat, run, "weird/id.1", CAT_RES_OK, NULL, &r, 1, -1.0, &err);
    if (rc != 0) fail_msg("%s", err.msg);
    close_ok(cat);

    cat = NULL;
    assert_int_equal(cat_open(t.cat, CAT_RO, &cat, &err), 0);
    dump d;
    q(cat, "SELECT z2, z2_parity, z2_status, chern, plane_chern, chern_status, mesh FROM results", &d);
    assert_string_equal(d.text, "1;011|1;011|done|NULL|0;0;0;0;0;0|done|20\n");
    /* The material row takes its sizes from the diagnosis when the set index gave none. */
    q(cat, "SELECT material_id, dimension, norb, nocc FROM materials", &d);
    assert_string_equal(d.text, "weird/id.1|3|8|4\n");
    /* Flows are kept out of the diagnosis text (they live in the artifact file). */
    assert_int_equal(q_int(cat, "SELECT json_type(diagnosis, '$.wcc_flows') IS NULL FROM results"), 1);
    q(cat, "SELECT kind, plane, file, h5path, nstring, nband FROM artifacts", &d);
    assert_string_equal(d.text, "wcc_flow|4|cat.sqlite.run1.s1.h5|/weird%2Fid.1/wcc_plane4|3|2\n");
    cat_flow f;
    rc = cat_flow_read(cat, run, "weird/id.1", 4, &f, &err);
    if (rc != 0) fail_msg("%s", err.msg);
    assert_int_equal(f.nstring, 3);
    assert_int_equal(f.nband, 2);
    /* Exact: doubles are stored as IEEE 64-bit and read back unchanged. */
    for (int s = 0; s < 3; s++) {
        assert_true(f.kpar[s] == r.flows[0].kpar[s]);
        for (int b = 0; b < 2; b++)
            assert_true(f.wcc[s * 2 + b] == r.flows[0].wcc[s * 2 + b]);
    }
    cat_flow_clear(&f);
    bs_err_clear(&err);
    assert_int_equal(cat_flow_read(cat, run, "weird/id.1", 0, &f, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "no Wannier-centre flow of plane 0"));
    res_clear(&r);
    close_ok(cat);
    tmp_remove(&t);
}

static void test_missing_keys_and_failures(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    bs_err err;
    bs_err_clear(&err);
    /* Keys missing from a diagnosis take the values of an empty result (res_init): the columns that
     * the JSON form leaves null (indices, Chern numbers) stay NULL, the others hold zeros. */
    put_text(cat, run, "sparse", CAT_RES_OK, NULL, "{\"id\":\"sparse\",\"class\":\"metal\"}");
    /* An invalid row has no diagnosis at all. */
    put_text(cat, run, "broken", CAT_RES_INVALID, "cards/broken.json:3: expected 7 fields, found 5", NULL);
    put_text(cat, run, "slow", CAT_RES_TIMEOUT, "time budget of 60 s exceeded", NULL);
    assert_int_equal(cat_flush(cat, &err), 0);
    dump d;
    q(cat,
      "SELECT material_id, status, class, confidence, z2, chern, n_weyl, mesh, diagnosis IS NULL, message"
      " FROM results ORDER BY material_id",
      &d);
    assert_string_equal(
        d.text,
        "broken|invalid|NULL|NULL|NULL|NULL|NULL|NULL|1|cards/broken.json:3: expected 7 fields, found 5\n"
        "slow|timeout|NULL|NULL|NULL|NULL|NULL|NULL|1|time budget of 60 s exceeded\n"
        "sparse|ok|metal|0.0|NULL|NULL|0|0|0|NULL\n");
    /* failures lists the non-ok rows with their messages; none is resolved yet. */
    q(cat, "SELECT material_id, status, message, resolved FROM failures ORDER BY material_id", &d);
    assert_string_equal(d.text, "broken|invalid|cards/broken.json:3: expected 7 fields, found 5|0\n"
                                "slow|timeout|time budget of 60 s exceeded|0\n");
    int64_t run2 = begin(cat, &RUN_A);
    put_ok(cat, run2, "slow", "trivial insulator", 0.9, 0.4, "[0,0,0,0]", 8);
    assert_int_equal(cat_flush(cat, &err), 0);
    q(cat, "SELECT material_id, resolved FROM failures ORDER BY material_id", &d);
    assert_string_equal(d.text, "broken|0\nslow|1\n");
    close_ok(cat);
    tmp_remove(&t);
}

/* The coordinator's write path (2026-12-02): a content hash given with the result is stored as the
 * materials row's; none given, the row takes it from materials. cat_has_materials tells a new
 * catalogue (no look-ups in the set-up) from a used one. The connection skips the schema's CHECK
 * constraints, so the values they guard are refused in C first (db/schema.sql: results.status,
 * materials.dimension and spinful); the constraints still hold for the sqlite3 shell. */
static void test_coordinator_write_path(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    bs_err err;
    bs_err_clear(&err);
    int any = -1;
    assert_int_equal(cat_has_materials(cat, &any, &err), 0);
    assert_int_equal(any, 0);
    const char *hash_a = "aaaa000000000000000000000000000000000000000000000000000000000001";
    const char *hash_b = "bbbb000000000000000000000000000000000000000000000000000000000002";
    cat_material ma = {.material_id = "given", .dimension = 3, .spinful = 1, .content = hash_a};
    cat_material mb = {.material_id = "looked-up", .dimension = 2, .spinful = 0, .content = hash_b};
    assert_int_equal(cat_material_upsert(cat, &ma, &err), 0);
    assert_int_equal(cat_material_upsert(cat, &mb, &err), 0);
    assert_int_equal(cat_has_materials(cat, &any, &err), 0);
    assert_int_equal(any, 1);
    int64_t run = begin(cat, &RUN_A);
    assert_int_equal(cat_result_put_stored(cat, run, "given", CAT_RES_INVALID, "no data", NULL, NULL, hash_a,
                                           1, 0.5, &err),
                     0);
    assert_int_equal(cat_result_put_stored(cat, run, "looked-up", CAT_RES_FAILED, "no data", NULL, NULL, NULL,
                                           2, 0.5, &err),
                     0);
    assert_int_equal(cat_flush(cat, &err), 0);
    dump d;
    q(cat,
      "SELECT r.material_id, r.status, r.content = m.content, r.rank FROM results r"
      " JOIN materials m USING (material_id) ORDER BY r.material_id",
      &d);
    assert_string_equal(d.text, "given|invalid|1|1\nlooked-up|failed|1|2\n");
    /* What the CHECK constraints would refuse is refused before SQLite sees it. */
    cat_material bad_dim = {.material_id = "flat", .dimension = 4, .spinful = 0};
    assert_int_equal(cat_material_upsert(cat, &bad_dim, &err), BS_EINVAL);
    bs_err_clear(&err);
    cat_material bad_spin = {.material_id = "spin", .dimension = 3, .spinful = 2};
    assert_int_equal(cat_material_upsert(cat, &bad_spin, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(
        cat_result_put_stored(cat, run, "given", (cat_status)17, "x", NULL, NULL, hash_a, 1, 0.5, &err),
        BS_EINVAL);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM materials WHERE material_id IN ('flat', 'spin')"), 0);
    close_ok(cat);
    tmp_remove(&t);
}

static void expect_put_error(cat_db *cat, int64_t run, const char *id, cat_status st, const char *json,
                             int code, const char *needle)
{
    bs_err err;
    bs_err_clear(&err);
    int rc = cat_result_put_text(cat, run, id, st, NULL, json, json ? strlen(json) : 0, 0, 1.0, &err);
    assert_int_equal(rc, code);
    if (!strstr(err.msg, needle)) fail_msg("expected \"%s\" in \"%s\"", needle, err.msg);
}

static void test_malformed_diagnosis(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"id\":\"m\",\"class\":", BS_EPARSE,
                     "malformed diagnosis JSON at byte");
    expect_put_error(cat, run, "m", CAT_RES_OK, "[1,2]", BS_EPARSE, "not a JSON object");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"id\":\"m\"} {\"id\":\"n\"}", BS_EPARSE,
                     "unexpected bytes after");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"z2\":\"1;000\"}", BS_EPARSE, "key \"z2\"");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"z2\":[1,0,0]}", BS_EPARSE, "key \"z2\"");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"z2\":[2]}", BS_EPARSE, "key \"z2\"");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"plane_chern\":[0,0,0,0,0]}", BS_EPARSE,
                     "key \"plane_chern\"");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"chern\":0.5}", BS_EPARSE,
                     "key \"chern\": expected an integer");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"confidence\":\"high\"}", BS_EPARSE, "key \"confidence\"");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"weyl_nodes\":[{\"k\":[0,0]}]}", BS_EPARSE,
                     "key \"weyl_nodes\"");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"z2_status\":\"maybe\"}", BS_EPARSE, "key \"z2_status\"");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"ahc\":[1,2,3]}", BS_EPARSE, "key \"ahc\"");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"shc\":{\"xy_z\":\"big\"}}", BS_EPARSE, "key \"shc\"");
    expect_put_error(cat, run, "m", CAT_RES_OK,
                     "{\"wcc_flows\":[{\"plane\":1,\"kpar\":[0,0.5],\"wcc\":[[0.1,0.2],[0.3]]}]}", BS_EPARSE,
                     "same number of centres");
    expect_put_error(cat, run, "m", CAT_RES_OK, "{\"id\":\"other\"}", BS_EINVAL,
                     "the diagnosis is for \"other\"");
    expect_put_error(cat, run, "m", CAT_RES_OK, NULL, BS_EINVAL, "an ok result needs a diagnosis");
    expect_put_error(cat, run, "", CAT_RES_FAILED, NULL, BS_EINVAL, "material id");
    expect_put_error(cat, run, "m", (cat_status)7, NULL, BS_EINVAL, "not a cat_status");
    /* Nothing of the rejected puts reached the catalogue, and the handle still works. */
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_flush(cat, &err), 0);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM results"), 0);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM nodes"), 0);
    put_ok(cat, run, "m", "metal", 1.0, -0.1, "null", 8);
    assert_int_equal(cat_flush(cat, &err), 0);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM results"), 1);
    /* Bad settings JSON for a run. */
    cat_run_info bad = RUN_A;
    bad.settings_json = "{mesh: 8}";
    int64_t id = 0;
    bs_err_clear(&err);
    assert_int_equal(cat_run_begin(cat, &bad, &id, &err), BS_EPARSE);
    bad = RUN_A;
    bad.kind = "sweep";
    bs_err_clear(&err);
    assert_int_equal(cat_run_begin(cat, &bad, &id, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "\"screen\" or \"rescreen\""));
    close_ok(cat);
    tmp_remove(&t);
}

/* A write made to fail on purpose: a folder squats the artifact file's name, so the flow cannot
 * be stored; the put reports BS_EHDF5, leaves no partial row behind, and the batch goes on. */
static void test_artifact_write_failure(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    char squat[256];
    snprintf(squat, sizeof squat, "%s/cat.sqlite.run%lld.s1.h5", t.dir, (long long)run);
    assert_int_equal(mkdir(squat, 0700), 0);
    put_ok(cat, run, "before", "metal", 1, -1, "null", 8);
    char buf[4096];
    diag_json(buf, sizeof buf, "flowed", "trivial insulator", 0.9, 0.3, "[0,0,0,0]", 8, 2);
    snprintf(buf + strlen(buf) - 1, sizeof buf - strlen(buf) + 1,
             ",\"wcc_flows\":[{\"plane\":0,\"kpar\":[0,0.5],\"wcc\":[[0.1],[0.2]]}]}");
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_result_put_text(cat, run, "flowed", CAT_RES_OK, NULL, buf, strlen(buf), 0, 1, &err),
                     BS_EHDF5);
    assert_non_null(strstr(err.msg, "cannot create or open the artifact file"));
    put_ok(cat, run, "after", "metal", 1, -1, "null", 8);
    bs_err_clear(&err);
    assert_int_equal(cat_flush(cat, &err), 0);
    dump d;
    q(cat, "SELECT material_id FROM results ORDER BY material_id", &d);
    assert_string_equal(d.text, "after\nbefore\n");
    assert_int_equal(q_int(cat, "SELECT count(*) FROM nodes"), 0);
    assert_int_equal(q_int(cat, "SELECT count(*) FROM artifacts"), 0);
    close_ok(cat);
    rmdir(squat);
    tmp_remove(&t);
}

/* ---- views ---- */

static void test_summary_most_resolved(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t r1 = begin(cat, &RUN_A), r2 = begin(cat, &RUN_A), r3 = begin(cat, &RUN_A);
    /* A: mesh 8, 16, 8 -> run 2 (highest mesh wins over the later run 3). */
    put_ok(cat, r1, "A", "trivial insulator", 0.5, 0.1, "[0,0,0,0]", 8);
    put_ok(cat, r2, "A", "strong topological insulator", 0.9, 0.1, "[1,0,0,0]", 16);
    put_ok(cat, r3, "A", "trivial insulator", 0.6, 0.1, "[0,0,0,0]", 8);
    /* B: equal meshes -> the latest run. */
    put_ok(cat, r1, "B", "metal", 0.9, -0.1, "null", 12);
    put_ok(cat, r2, "B", "metal", 0.8, -0.2, "null", 12);
    /* C: no ok row -> its latest row. */
    put_text(cat, r1, "C", CAT_RES_FAILED, "LAPACK zheevd info 3", NULL);
    put_text(cat, r3, "C", CAT_RES_TIMEOUT, "time budget exceeded", NULL);
    /* D: an ok row beats a later failure. */
    put_ok(cat, r1, "D", "trivial insulator", 0.95, 0.7, "[0,0,0,0]", 8);
    put_text(cat, r3, "D", CAT_RES_FAILED, "worker lost", NULL);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_flush(cat, &err), 0);
    dump d;
    q(cat,
      "SELECT material_id, status, class, run_id, mesh, z2, confidence, nontrivial FROM summary ORDER BY "
      "material_id",
      &d);
    char expect[512];
    snprintf(expect, sizeof expect,
             "A|ok|strong topological insulator|%lld|16|1;000|0.9|1\n"
             "B|ok|metal|%lld|12|NULL|0.8|0\n"
             "C|timeout|NULL|%lld|NULL|NULL|NULL|NULL\n"
             "D|ok|trivial insulator|%lld|8|0;000|0.95|0\n",
             (long long)r2, (long long)r2, (long long)r3, (long long)r1);
    assert_string_equal(d.text, expect);
    /* The columns the design promises are all there. */
    q(cat,
      "SELECT material_id, status, class, gap_direct_ev, gap_indirect_ev, z2, chern, n_weyl, net_chirality,"
      " confidence, mesh, run_id FROM summary WHERE material_id = 'A'",
      &d);
    assert_int_equal(d.nrow, 1);
    close_ok(cat);
    tmp_remove(&t);
}

static void test_candidates_order(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    put_ok(cat, run, "ti-small", "strong topological insulator", 0.9, 0.1, "[1,0,0,0]", 8);
    put_ok(cat, run, "ti-big", "strong topological insulator", 0.9, 0.3, "[1,0,0,0]", 8);
    put_ok(cat, run, "weak", "weak topological insulator", 0.8, 0.05, "[0,0,0,1]", 8);
    put_ok(cat, run, "doubt", "trivial insulator", 0.5, 0.5, "[0,0,0,0]", 8);
    put_ok(cat, run, "doubt-ti", "strong topological insulator", 0.4, 0.6, "[1,0,0,0]", 8);
    put_ok(cat, run, "plain", "trivial insulator", 0.99, 1.0, "[0,0,0,0]", 8);
    char buf[2048];
    diag_json(buf, sizeof buf, "weyl", "Weyl semimetal", 0.85, -0.01, "null", 8, 2);
    put_text(cat, run, "weyl", CAT_RES_OK, NULL, buf);
    put_text(cat, run, "bad", CAT_RES_FAILED, "worker lost", NULL);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_flush(cat, &err), 0);
    dump d;
    /* Nontrivial with confidence >= 0.7 first (by gap descending), then the low-confidence ones. */
    q(cat, "SELECT material_id, why FROM candidates", &d);
    assert_string_equal(d.text, "ti-big|nontrivial\n"
                                "ti-small|nontrivial\n"
                                "weak|nontrivial\n"
                                "weyl|nontrivial\n"
                                "doubt-ti|nontrivial, low confidence\n"
                                "doubt|low confidence\n");
    /* rescreen's selection reads the same summary. */
    cat_ids ids;
    cat_ids_init(&ids);
    assert_int_equal(cat_select_ids(cat, "confidence < 0.7 OR status <> 'ok'", &ids, &err), 0);
    assert_int_equal(ids.n, 3);
    assert_string_equal(ids.id[0], "bad");
    assert_string_equal(ids.id[1], "doubt");
    assert_string_equal(ids.id[2], "doubt-ti");
    assert_true(cat_ids_contains(&ids, "doubt"));
    assert_false(cat_ids_contains(&ids, "plain"));
    assert_int_equal(cat_select_ids(cat, NULL, &ids, &err), 0);
    assert_int_equal(ids.n, 8);
    cat_ids_clear(&ids);
    close_ok(cat);
    tmp_remove(&t);
}

/* An invented result with only a spin Hall conductivity (test data). */
static void put_shc(cat_db *cat, int64_t run, const char *id, int mesh, double shc, const char *units)
{
    char buf[512];
    if (units)
        snprintf(buf, sizeof buf,
                 "{\"id\":\"%s\",\"class\":\"metal\",\"mesh\":%d,\"shc\":{\"xy_z\":%g,\"units\":\"%s\"}}", id,
                 mesh, shc, units);
    else
        snprintf(buf, sizeof buf, "{\"id\":\"%s\",\"class\":\"metal\",\"mesh\":%d}", id, mesh);
    put_text(cat, run, id, CAT_RES_OK, NULL, buf);
}

static void test_top_spin_hall(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t r1 = begin(cat, &RUN_A), r2 = begin(cat, &RUN_A);
    put_shc(cat, r1, "p", 8, 120.0, "(hbar/e)S/cm");
    put_shc(cat, r2, "p", 16, 0, NULL);               /* finer, but without transport */
    put_shc(cat, r1, "q", 8, -300.0, "(hbar/e)S/cm"); /* sorted by magnitude */
    put_shc(cat, r1, "r", 8, 50.0, "(hbar/e)S/cm");
    put_shc(cat, r2, "r", 12, 60.0, "(hbar/e)S/cm"); /* the finer one wins */
    put_shc(cat, r1, "s", 36, 2.0, "e/2pi");         /* 2D units form their own group */
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_flush(cat, &err), 0);
    dump d;
    q(cat, "SELECT material_id, shc_xy, shc_units, mesh FROM top_spin_hall", &d);
    assert_string_equal(d.text, "q|-300.0|(hbar/e)S/cm|8\n"
                                "p|120.0|(hbar/e)S/cm|8\n"
                                "r|60.0|(hbar/e)S/cm|12\n"
                                "s|2.0|e/2pi|36\n");
    /* summary keeps its own rule: p's most resolved row has no transport. */
    q(cat, "SELECT mesh, shc_xy FROM summary WHERE material_id = 'p'", &d);
    assert_string_equal(d.text, "16|NULL\n");
    close_ok(cat);
    tmp_remove(&t);
}

/* ---- batching and resume ---- */

static void test_batching(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_set_batch(cat, 0, 1.0, &err), BS_EINVAL);
    assert_int_equal(cat_set_batch(cat, 3, 1000.0, &(bs_err){0}), 0);
    int64_t run = begin(cat, &RUN_A);
    cat_db *reader = NULL;
    assert_int_equal(cat_open(t.cat, CAT_RO, &reader, &err), 0);
    put_ok(cat, run, "a", "metal", 1, -1, "null", 8);
    put_ok(cat, run, "b", "metal", 1, -1, "null", 8);
    assert_int_equal(cat_pending(cat), 2);
    /* Uncommitted rows are invisible to another connection: what a kill would lose. */
    assert_int_equal(q_int(reader, "SELECT count(*) FROM results"), 0);
    put_ok(cat, run, "c", "metal", 1, -1, "null", 8);
    assert_int_equal(cat_pending(cat), 0); /* the third row completes the batch of 3 */
    assert_int_equal(q_int(reader, "SELECT count(*) FROM results"), 3);
    /* The time trigger: a batch older than the interval is committed by cat_flush_if_due. */
    assert_int_equal(cat_set_batch(cat, 1000, 0.05, &err), 0);
    put_ok(cat, run, "d", "metal", 1, -1, "null", 8);
    assert_int_equal(cat_flush_if_due(cat, &err), 0);
    struct timespec nap = {0, 80 * 1000 * 1000};
    nanosleep(&nap, NULL);
    assert_int_equal(cat_flush_if_due(cat, &err), 0);
    assert_int_equal(cat_pending(cat), 0);
    assert_int_equal(q_int(reader, "SELECT count(*) FROM results"), 4);
    close_ok(reader);
    close_ok(cat);
    tmp_remove(&t);
}

#define RESUME_N       40
#define RESUME_BATCH   8
#define RESUME_KILL_AT 29 /* results put before the kill: 3 full batches committed, 5 pending */

static void resume_id(int i, char *id, size_t len)
{
    snprintf(id, len, "m%03d", i);
}

/* The i-th invented result; every third carries a flow so artifacts are exercised too. Returns
 * the cat_result_put_text code (no cmocka calls: the SIGKILL child uses it). The flow value
 * i/64 is exact in binary and in the %g text, so it can be compared with ==. */
static int resume_put(cat_db *cat, int64_t run, int i)
{
    char id[16], buf[4096];
    resume_id(i, id, sizeof id);
    diag_json(buf, sizeof buf, id, i % 4 ? "trivial insulator" : "strong topological insulator",
              0.5 + 0.01 * i, 0.01 * i, i % 4 ? "[0,0,0,0]" : "[1,0,0,0]", 10, i % 5 == 0 ? 2 : 0);
    if (i % 3 == 0) {
        size_t len = strlen(buf);
        snprintf(buf + len - 1, sizeof buf - len + 1,
                 ",\"wcc_flows\":[{\"plane\":0,\"kpar\":[0,0.25,0.5],"
                 "\"wcc\":[[0.1,%g],[0.2,0.6],[0.3,0.7]]}]}",
                 i / 64.0);
    }
    int failed = i % 7 == 6;
    bs_err err;
    bs_err_clear(&err);
    return cat_result_put_text(cat, run, id, failed ? CAT_RES_FAILED : CAT_RES_OK,
                               failed ? "invented failure" : NULL, failed ? NULL : buf,
                               failed ? 0 : strlen(buf), 1, 0.5, &err);
}

/* A whole screen: resume (or begin) the run, skip what is done, put the rest, end it. */
static int64_t screen_all(const char *path, int *resumed, int *skipped)
{
    cat_db *cat = open_rw(path);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_set_batch(cat, RESUME_BATCH, 1000.0, &err), 0);
    int64_t run = 0;
    if (cat_run_resume(cat, &RUN_A, &run, resumed, &err) != 0) fail_msg("%s", err.msg);
    cat_ids done;
    cat_ids_init(&done);
    assert_int_equal(cat_done_ids(cat, run, &done, &err), 0);
    *skipped = (int)done.n;
    for (int i = 0; i < RESUME_N; i++) {
        char id[16];
        resume_id(i, id, sizeof id);
        if (!cat_ids_contains(&done, id)) assert_int_equal(resume_put(cat, run, i), 0);
    }
    cat_ids_clear(&done);
    assert_int_equal(cat_run_end(cat, run, CAT_RUN_DONE, &err), 0);
    close_ok(cat);
    return run;
}

static void test_resume_after_sigkill(void **state)
{
    (void)state;
    tmpdir t, ref;
    tmp_make(&t);
    tmp_make(&ref);
    int sync[2];
    assert_int_equal(pipe(sync), 0);
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        /* Child: a coordinator that is killed mid-batch. No cmocka calls here. */
        close(sync[0]);
        cat_db *cat = NULL;
        bs_err err;
        bs_err_clear(&err);
        int64_t run = 0;
        int resumed = 0;
        if (cat_open(t.cat, CAT_RW, &cat, &err) != 0 || cat_set_batch(cat, RESUME_BATCH, 1000.0, &err) != 0 ||
            cat_run_resume(cat, &RUN_A, &run, &resumed, &err) != 0)
            _exit(3);
        for (int i = 0; i < RESUME_KILL_AT; i++)
            if (resume_put(cat, run, i) != 0) _exit(5);
        char ok = cat_pending(cat) == RESUME_KILL_AT % RESUME_BATCH ? 'y' : 'n';
        if (write(sync[1], &ok, 1) != 1) _exit(4);
        for (;;)
            pause(); /* waits for SIGKILL with the open transaction */
    }
    close(sync[1]);
    char ok = 0;
    assert_int_equal(read(sync[0], &ok, 1), 1);
    close(sync[0]);
    assert_int_equal(ok, 'y');
    assert_int_equal(kill(pid, SIGKILL), 0);
    int status = 0;
    assert_int_equal(waitpid(pid, &status, 0), pid);
    assert_true(WIFSIGNALED(status) && WTERMSIG(status) == SIGKILL);

    /* After the kill: the file is sound, the run is still 'running', and exactly the committed
     * batches are there (3 batches of 8 = 24 of the 29 put). */
    cat_db *cat = open_rw(t.cat);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cat_check(cat, &err), 0);
    dump d;
    q(cat, "SELECT run_id, status, sessions FROM runs", &d);
    assert_string_equal(d.text, "1|running|1\n");
    cat_ids done;
    cat_ids_init(&done);
    assert_int_equal(cat_done_ids(cat, 1, &done, &err), 0);
    int committed = (RESUME_KILL_AT / RESUME_BATCH) * RESUME_BATCH;
    assert_int_equal(done.n, committed);
    for (int i = 0; i < committed; i++) {
        char id[16];
        resume_id(i, id, sizeof id);
        assert_string_equal(done.id[i], id);
    }
    cat_ids_clear(&done);
    /* Committed flows are readable from the killed session's file. */
    cat_flow f;
    if (cat_flow_read(cat, 1, "m021", 0, &f, &err) != 0) fail_msg("%s", err.msg);
    assert_true(f.wcc[1] == 21 / 64.0);
    cat_flow_clear(&f);
    close_ok(cat);

    /* The rerun continues run 1 in a second session and skips the committed ids. */
    int resumed = 0, skipped = 0;
    assert_int_equal(screen_all(t.cat, &resumed, &skipped), 1);
    assert_int_equal(resumed, 1);
    assert_int_equal(skipped, committed);
    /* Reference: the same screen without interruption in another catalogue. */
    assert_int_equal(screen_all(ref.cat, &resumed, &skipped), 1);
    assert_int_equal(resumed, 0);
    assert_int_equal(skipped, 0);

    cat = open_rw(t.cat);
    cat_db *rc = open_rw(ref.cat);
    const char *cols =
        "SELECT material_id, status, class, confidence, gap_direct_ev, gap_indirect_ev, z2, chern, n_weyl,"
        " net_chirality, mesh, run_id, message FROM summary ORDER BY material_id";
    dump a, b;
    q(cat, cols, &a);
    q(rc, cols, &b);
    assert_int_equal(a.nrow, RESUME_N);
    assert_string_equal(a.text, b.text);
    q(cat, "SELECT count(*), count(DISTINCT material_id) FROM results", &a);
    assert_string_equal(a.text, "40|40\n");
    q(cat, "SELECT count(*), count(DISTINCT material_id || ':' || node) FROM nodes", &a);
    q(rc, "SELECT count(*), count(DISTINCT material_id || ':' || node) FROM nodes", &b);
    assert_string_equal(a.text, b.text);
    q(cat, "SELECT count(*) FROM artifacts", &a);
    q(rc, "SELECT count(*) FROM artifacts", &b);
    assert_string_equal(a.text, b.text);
    q(cat, "SELECT run_id, status, sessions FROM runs", &a);
    assert_string_equal(a.text, "1|done|2\n");
    q(cat, "SELECT session, ended IS NULL, artifact_file FROM run_sessions ORDER BY session", &a);
    assert_string_equal(a.text, "1|1|cat.sqlite.run1.s1.h5\n2|0|cat.sqlite.run1.s2.h5\n");
    /* Flows written after the resume come from the new session's file. */
    if (cat_flow_read(cat, 1, "m033", 0, &f, &err) != 0) fail_msg("%s", err.msg);
    assert_true(f.wcc[1] == 33 / 64.0);
    cat_flow_clear(&f);
    close_ok(rc);

    /* A finished run is not resumed; different settings never share a run. */
    int64_t run = 0;
    assert_int_equal(cat_run_resume(cat, &RUN_A, &run, &resumed, &err), 0);
    assert_int_equal(run, 2);
    assert_int_equal(resumed, 0);
    assert_int_equal(cat_run_end(cat, run, CAT_RUN_INTERRUPTED, &err), 0);
    cat_run_info other = RUN_A;
    other.settings_json = "{\"tasks\": [\"z2\", \"chern\"], \"mesh\": 16}";
    assert_int_equal(cat_run_resume(cat, &other, &run, &resumed, &err), 0);
    assert_int_equal(run, 3);
    assert_int_equal(resumed, 0);
    /* Settings are compared in canonical form: key order and spacing do not matter. */
    cat_run_info same = RUN_A;
    same.settings_json = "{\"tasks\":[\"z2\",\"chern\"],\"mesh\":8}";
    assert_int_equal(cat_run_resume(cat, &same, &run, &resumed, &err), 0);
    assert_int_equal(run, 2); /* the interrupted run 2 */
    assert_int_equal(resumed, 1);
    close_ok(cat);
    tmp_remove(&t);
    tmp_remove(&ref);
}

/* ---- read-only queries ---- */

static void file_bytes(const char *path, char **data, size_t *len)
{
    FILE *fp = fopen(path, "rb");
    assert_non_null(fp);
    fseek(fp, 0, SEEK_END);
    *len = (size_t)ftell(fp);
    rewind(fp);
    *data = malloc(*len + 1);
    assert_non_null(*data);
    assert_int_equal(fread(*data, 1, *len, fp), *len);
    fclose(fp);
}

static void expect_refused(cat_db *cat, const char *sql, const char *needle)
{
    bs_err err;
    bs_err_clear(&err);
    dump d;
    memset(&d, 0, sizeof d);
    assert_int_equal(cat_query(cat, sql, dump_row, &d, &err), BS_EINVAL);
    if (!strstr(err.msg, needle)) fail_msg("%s: expected \"%s\" in \"%s\"", sql, needle, err.msg);
    assert_int_equal(d.nrow, 0);
}

static void test_readonly_refusal(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    put_ok(cat, run, "x", "metal", 1, -1, "null", 8);
    /* The writer's own handle refuses writes through cat_query as well, and a transaction
     * statement cannot disturb its open batch. */
    expect_refused(cat, "DELETE FROM results", "would modify");
    expect_refused(cat, "COMMIT", "not allowed");
    assert_int_equal(cat_pending(cat), 1);
    close_ok(cat);
    char *before = NULL, *after = NULL;
    size_t nbefore = 0, nafter = 0;
    file_bytes(t.cat, &before, &nbefore);

    bs_err err;
    bs_err_clear(&err);
    cat = NULL;
    assert_int_equal(cat_open(t.cat, CAT_RO, &cat, &err), 0);
    expect_refused(cat, "INSERT INTO runs (kind, started) VALUES ('screen', 'now')", "would modify");
    expect_refused(cat, "UPDATE results SET class = 'x'", "would modify");
    expect_refused(cat, "DROP TABLE results", "would modify");
    expect_refused(cat, "DROP VIEW summary", "would modify");
    expect_refused(cat, "CREATE TABLE t (x)", "would modify");
    expect_refused(cat, "SELECT 1; DROP TABLE results", "one statement at a time");
    expect_refused(cat, "PRAGMA user_version = 7", "not allowed");
    expect_refused(cat, "PRAGMA journal_mode = DELETE", "not allowed");
    expect_refused(cat, "ATTACH DATABASE '/tmp/bs_cat_attach.sqlite' AS other", "not allowed");
    expect_refused(cat, "   ;  ", "no SQL statement");
    expect_refused(cat, "BEGIN IMMEDIATE", "not allowed");
    expect_refused(cat, "SAVEPOINT s", "not allowed");
    /* Reads still work, trailing semicolons and comments included. */
    dump d;
    q(cat, "SELECT count(*) FROM summary; -- one row", &d);
    assert_string_equal(d.text, "1\n");
    q(cat, "PRAGMA table_info(runs)", &d);
    assert_true(d.nrow > 5);
    /* A read-only handle refuses the writing API too. */
    bs_err_clear(&err);
    assert_int_equal(cat_result_put_text(cat, 1, "y", CAT_RES_FAILED, "m", NULL, 0, 0, 1, &err), BS_EINVAL);
    bs_err_clear(&err);
    int64_t id = 0;
    assert_int_equal(cat_run_begin(cat, &RUN_A, &id, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "opened for writing"));
    close_ok(cat);
    file_bytes(t.cat, &after, &nafter);
    assert_int_equal(nbefore, nafter);
    assert_memory_equal(before, after, nbefore);
    struct stat sb;
    assert_int_not_equal(stat("/tmp/bs_cat_attach.sqlite", &sb), 0);
    free(before);
    free(after);
    tmp_remove(&t);
}

static void test_sql_errors_carry_sqlite_message(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    bs_err err;
    bs_err_clear(&err);
    dump d;
    assert_int_equal(cat_query(cat, "SELECT nosuch FROM results", dump_row, &d, &err), BS_ESQL);
    assert_non_null(strstr(err.msg, "no such column: nosuch"));
    cat_ids ids;
    cat_ids_init(&ids);
    bs_err_clear(&err);
    assert_int_equal(cat_select_ids(cat, "gap > 0", &ids, &err), BS_ESQL);
    assert_non_null(strstr(err.msg, "--where condition: "));
    assert_non_null(strstr(err.msg, "no such column: gap"));
    bs_err_clear(&err);
    assert_int_equal(cat_select_ids(cat, "1); DROP TABLE results; SELECT (1", &ids, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "one statement at a time"));
    /* A trailing line comment cannot swallow the closing bracket. */
    bs_err_clear(&err);
    assert_int_equal(cat_select_ids(cat, "confidence < 0.7 -- doubtful", &ids, &err), 0);
    assert_int_equal(ids.n, 0);
    cat_ids_clear(&ids);
    bs_err_clear(&err);
    assert_int_equal(cat_run_end(cat, 42, CAT_RUN_DONE, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "no run 42"));
    close_ok(cat);
    tmp_remove(&t);
}

/* The CLI: a write is refused with exit status 1 and a message; json output parses. */
static void test_cli_query(void **state)
{
    (void)state;
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    put_ok(cat, run, "x,1", "strong topological insulator", 0.9, 0.2, "[1,0,0,0]", 8);
    close_ok(cat);
    char cmd[1024], out[8192];
    snprintf(cmd, sizeof cmd, "%s query %s \"DELETE FROM results\" 2>&1", BS_BINARY, t.cat);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    size_t n = fread(out, 1, sizeof out - 1, p);
    out[n] = '\0';
    int st = pclose(p);
    assert_true(WIFEXITED(st));
    assert_int_equal(WEXITSTATUS(st), 1);
    assert_non_null(strstr(out, "refused"));

    snprintf(cmd, sizeof cmd, "%s query %s --view summary --format json", BS_BINARY, t.cat);
    p = popen(cmd, "r");
    assert_non_null(p);
    n = fread(out, 1, sizeof out - 1, p);
    out[n] = '\0';
    assert_int_equal(pclose(p), 0);
    cJSON *j = cJSON_Parse(out);
    if (!j) fail_msg("not JSON: %s", out);
    assert_int_equal(cJSON_GetArraySize(j), 1);
    const cJSON *row = cJSON_GetArrayItem(j, 0);
    assert_string_equal(cJSON_GetObjectItem(row, "material_id")->valuestring, "x,1");
    assert_string_equal(cJSON_GetObjectItem(row, "z2")->valuestring, "1;000");
    assert_true(cJSON_GetObjectItem(row, "gap_indirect_ev")->valuedouble == 0.2);
    assert_true(cJSON_IsNull(cJSON_GetObjectItem(row, "chern")));
    cJSON_Delete(j);

    /* csv quotes the comma in the id (RFC 4180). */
    snprintf(cmd, sizeof cmd, "%s query %s \"SELECT material_id, mesh FROM summary\" --format csv", BS_BINARY,
             t.cat);
    p = popen(cmd, "r");
    n = fread(out, 1, sizeof out - 1, p);
    out[n] = '\0';
    assert_int_equal(pclose(p), 0);
    assert_string_equal(out, "material_id,mesh\r\n\"x,1\",8\r\n");

    snprintf(cmd, sizeof cmd, "%s query %s --view nosuch 2>&1", BS_BINARY, t.cat);
    p = popen(cmd, "r");
    n = fread(out, 1, sizeof out - 1, p);
    out[n] = '\0';
    st = pclose(p);
    assert_int_equal(WEXITSTATUS(st), 2);
    assert_non_null(strstr(
        out, "views: candidates, conflicts, failures, run_progress, summary, surfaces, top_spin_hall"));
    tmp_remove(&t);
}

/* Reads the whole output of a command (the caller frees it); NULL when it fails. */
static char *run_capture(const char *cmd)
{
    FILE *p = popen(cmd, "r");
    if (!p) return NULL;
    size_t cap = 1 << 16, len = 0, n;
    char *out = malloc(cap);
    while (out && (n = fread(out + len, 1, cap - len - 1, p)) > 0) {
        len += n;
        if (cap - len < 4096) {
            char *grown = realloc(out, cap *= 2);
            if (!grown) free(out);
            out = grown;
        }
    }
    int st = pclose(p);
    if (!out || !WIFEXITED(st) || WEXITSTATUS(st) != 0) {
        free(out);
        return NULL;
    }
    out[len] = '\0';
    return out;
}

/* What the real program prints goes in unchanged: `inspect --json --flows --transport` on the
 * built-in published models, each stored and read back against its own JSON (the expected
 * values come from the JSON the program printed, not from this layer). */
static void test_inspect_output_round_trip(void **state)
{
    (void)state;
    static const char *const models[] = {"haldane",    "kane_mele", "fkm",   "weyl",
                                         "nodal_line", "metal",     "atomic"};
    tmpdir t;
    tmp_make(&t);
    cat_db *cat = open_rw(t.cat);
    int64_t run = begin(cat, &RUN_A);
    bs_err err;
    for (size_t i = 0; i < sizeof models / sizeof models[0]; i++) {
        char cmd[512], sql[512];
        snprintf(cmd, sizeof cmd, "%s inspect model:%s --json --flows --transport", BS_BINARY, models[i]);
        char *text = run_capture(cmd);
        if (!text) fail_msg("%s failed", cmd);
        cJSON *j = cJSON_Parse(text);
        assert_non_null(j);
        const char *id = cJSON_GetObjectItem(j, "id")->valuestring;
        bs_err_clear(&err);
        if (cat_result_put_text(cat, run, id, CAT_RES_OK, NULL, text, strlen(text), 0, -1, &err) != 0)
            fail_msg("%s: %s", models[i], err.msg);
        assert_int_equal(cat_flush(cat, &err), 0);
        dump d;
        /* class and z2 in the documented text form */
        const cJSON *z2 = cJSON_GetObjectItem(j, "z2");
        char z2_text[16] = "NULL";
        if (cJSON_GetArraySize(z2) == 1)
            snprintf(z2_text, sizeof z2_text, "%d", cJSON_GetArrayItem(z2, 0)->valueint);
        if (cJSON_GetArraySize(z2) == 4)
            snprintf(z2_text, sizeof z2_text, "%d;%d%d%d", cJSON_GetArrayItem(z2, 0)->valueint,
                     cJSON_GetArrayItem(z2, 1)->valueint, cJSON_GetArrayItem(z2, 2)->valueint,
                     cJSON_GetArrayItem(z2, 3)->valueint);
        snprintf(sql, sizeof sql,
                 "SELECT class, COALESCE(z2, 'NULL'), n_weyl, mesh FROM results WHERE material_id = '%s'",
                 id);
        q(cat, sql, &d);
        char expect[256];
        snprintf(expect, sizeof expect, "%s|%s|%d|%d\n", cJSON_GetObjectItem(j, "class")->valuestring,
                 z2_text, cJSON_GetArraySize(cJSON_GetObjectItem(j, "weyl_nodes")),
                 cJSON_GetObjectItem(j, "mesh")->valueint);
        assert_string_equal(d.text, expect);
        /* the symmetry verdicts and the statement, as the program wrote them */
        snprintf(
            sql, sizeof sql,
            "SELECT tr_verdict, inv_verdict, magnetism, symmetrised FROM results WHERE material_id = '%s'",
            id);
        q(cat, sql, &d);
        snprintf(expect, sizeof expect, "%s|%s|%s|%d\n",
                 cJSON_GetObjectItem(j, "time_reversal_verdict")->valuestring,
                 cJSON_GetObjectItem(j, "inversion_verdict")->valuestring,
                 cJSON_GetObjectItem(j, "magnetism")->valuestring,
                 cJSON_IsTrue(cJSON_GetObjectItem(j, "symmetrised")));
        assert_string_equal(d.text, expect);
        /* nodes: the stored chiralities add up to the program's net chirality */
        snprintf(sql, sizeof sql, "SELECT COALESCE(SUM(chirality), 0) FROM nodes WHERE material_id = '%s'",
                 id);
        assert_int_equal(q_int(cat, sql), cJSON_GetObjectItem(j, "net_chirality")->valueint);
        /* transport: the Hall conductivity is stored bit for bit. Read as a double through a
         * plain connection: SQL text such as "ahc_xy = 0.1234..." would go through SQLite's own
         * decimal parser, which is not correctly rounded in every build. */
        const cJSON *ahc = cJSON_GetObjectItem(j, "ahc");
        sqlite3 *db = NULL;
        sqlite3_stmt *st = NULL;
        assert_int_equal(sqlite3_open_v2(t.cat, &db, SQLITE_OPEN_READONLY, NULL), SQLITE_OK);
        assert_int_equal(sqlite3_prepare_v2(db, "SELECT ahc_xy, ahc_units FROM results WHERE material_id = ?",
                                            -1, &st, NULL),
                         SQLITE_OK);
        sqlite3_bind_text(st, 1, id, -1, SQLITE_STATIC);
        assert_int_equal(sqlite3_step(st), SQLITE_ROW);
        assert_true(sqlite3_column_double(st, 0) == cJSON_GetObjectItem(ahc, "xy")->valuedouble);
        assert_string_equal((const char *)sqlite3_column_text(st, 1),
                            cJSON_GetObjectItem(ahc, "units")->valuestring);
        sqlite3_finalize(st);
        sqlite3_close(db);
        /* flows: one artifact per plane, each equal to the printed arrays */
        const cJSON *flows = cJSON_GetObjectItem(j, "wcc_flows");
        snprintf(sql, sizeof sql, "SELECT count(*) FROM artifacts WHERE material_id = '%s'", id);
        assert_int_equal(q_int(cat, sql), cJSON_GetArraySize(flows));
        for (const cJSON *fl = flows ? flows->child : NULL; fl; fl = fl->next) {
            cat_flow f;
            if (cat_flow_read(cat, run, id, cJSON_GetObjectItem(fl, "plane")->valueint, &f, &err) != 0)
                fail_msg("%s", err.msg);
            const cJSON *kpar = cJSON_GetObjectItem(fl, "kpar"), *wcc = cJSON_GetObjectItem(fl, "wcc");
            assert_int_equal(f.nstring, cJSON_GetArraySize(kpar));
            for (int s = 0; s < f.nstring; s++) {
                assert_true(f.kpar[s] == cJSON_GetArrayItem(kpar, s)->valuedouble);
                for (int b = 0; b < f.nband; b++)
                    assert_true(f.wcc[s * f.nband + b] ==
                                cJSON_GetArrayItem(cJSON_GetArrayItem(wcc, s), b)->valuedouble);
            }
            cat_flow_clear(&f);
        }
        cJSON_Delete(j);
        free(text);
    }
    assert_int_equal(q_int(cat, "SELECT count(*) FROM summary WHERE status = 'ok'"), 7);
    close_ok(cat);
    tmp_remove(&t);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_schema_applies),
        cmocka_unit_test(test_open_refuses_foreign_files),
        cmocka_unit_test(test_migrate_v2),
        cmocka_unit_test(test_crystal_columns),
        cmocka_unit_test(test_migrate_paths),
        cmocka_unit_test(test_path_put_replace),
        cmocka_unit_test(test_put_and_read_back),
        cmocka_unit_test(test_struct_and_flows),
        cmocka_unit_test(test_missing_keys_and_failures),
        cmocka_unit_test(test_coordinator_write_path),
        cmocka_unit_test(test_malformed_diagnosis),
        cmocka_unit_test(test_artifact_write_failure),
        cmocka_unit_test(test_summary_most_resolved),
        cmocka_unit_test(test_candidates_order),
        cmocka_unit_test(test_top_spin_hall),
        cmocka_unit_test(test_batching),
        cmocka_unit_test(test_resume_after_sigkill),
        cmocka_unit_test(test_readonly_refusal),
        cmocka_unit_test(test_sql_errors_carry_sqlite_message),
        cmocka_unit_test(test_cli_query),
        cmocka_unit_test(test_inspect_output_round_trip),
    };
    return cmocka_run_group_tests(tests, NULL, remove_all_dirs);
}
