/* The catalogue connection: opening and schema, the batch transaction, runs and sessions,
 * materials, id lists and read-only queries. Result rows are in cat_result.c, HDF5 artifacts in
 * cat_artifact.c. */
#include "cat_internal.h"

#include <cjson/cJSON.h>

#include <ctype.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/statvfs.h>
#include <time.h>
#include <unistd.h>

/* Readers (a `query` during a screen) hold the WAL briefly; 10 s covers a checkpoint on a slow
 * shared file system without hanging a job forever (common practice). */
#define CAT_BUSY_MS 10000

#define CAT_NOW_SQL "strftime('%Y-%m-%dT%H:%M:%fZ','now')"

static const char *const STATUS_NAMES[] = {"ok", "invalid", "failed", "timeout"};
static const char *const RUN_STATUS_NAMES[] = {"running", "done", "interrupted", "failed"};

const char *cat_status_name(cat_status s)
{
    return (unsigned)s < 4 ? STATUS_NAMES[s] : NULL;
}

const char *cat_run_status_name(cat_run_status s)
{
    return (unsigned)s < 4 ? RUN_STATUS_NAMES[s] : NULL;
}

cat_status cat_status_from_code(int bs_code)
{
    switch (bs_code) {
    case BS_OK:
        return CAT_RES_OK;
    case BS_EPARSE:
    case BS_EINVAL:
    case BS_EIO:
        return CAT_RES_INVALID;
    case BS_ETIMEOUT:
        return CAT_RES_TIMEOUT;
    default:
        return CAT_RES_FAILED;
    }
}

const char *cat_now_text(cat_db *cat, char *buf, size_t len)
{
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    if (ts.tv_sec != cat->now_sec || !cat->now_prefix[0]) {
        struct tm tm;
        time_t sec = ts.tv_sec;
        gmtime_r(&sec, &tm);
        if (strftime(cat->now_prefix, sizeof cat->now_prefix, "%Y-%m-%dT%H:%M:%S.", &tm) == 0)
            cat->now_prefix[0] = '\0';
        cat->now_sec = ts.tv_sec;
    }
    /* The milliseconds by hand: snprintf of the whole text cost more than the insert it dates. */
    size_t plen = strlen(cat->now_prefix);
    long ms = ts.tv_nsec / 1000000;
    if (plen + 5 > len) {
        snprintf(buf, len, "%s", cat->now_prefix);
        return buf;
    }
    memcpy(buf, cat->now_prefix, plen);
    buf[plen] = (char)('0' + ms / 100);
    buf[plen + 1] = (char)('0' + ms / 10 % 10);
    buf[plen + 2] = (char)('0' + ms % 10);
    buf[plen + 3] = 'Z';
    buf[plen + 4] = '\0';
    return buf;
}

double cat_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Below this many free bytes a folder's file system counts as full: HDF5 and SQLite write in
 * pages of a few kB, so a failed write with less than this left was almost surely for space. */
#define CAT_FULL_BYTES (64 * 1024)

const char *cat_io_cause(const char *path, int errnum, char *buf, size_t len)
{
    char dir[1024];
    const char *slash = path ? strrchr(path, '/') : NULL;
    if (!slash)
        snprintf(dir, sizeof dir, ".");
    else
        snprintf(dir, sizeof dir, "%.*s", (int)(slash - path > 0 ? slash - path : 1), path);
    struct statvfs vfs;
    int have_vfs = statvfs(dir, &vfs) == 0;
    unsigned long long free_bytes = have_vfs ? (unsigned long long)vfs.f_bavail * vfs.f_frsize : 0;
    if (errnum == ENOSPC || errnum == EDQUOT || (have_vfs && free_bytes < CAT_FULL_BYTES))
        snprintf(buf, len, "disk full (%llu bytes free on the file system of %s)", free_bytes, dir);
    else if (errnum == EACCES || errnum == EPERM || access(dir, W_OK) != 0)
        snprintf(buf, len, "permission denied (folder %s%s)", dir,
                 access(dir, W_OK) != 0 ? " is not writable" : "");
    else if (errnum == EROFS)
        snprintf(buf, len, "read-only file system (%s)", dir);
    else if (errnum != 0)
        snprintf(buf, len, "%s", strerror(errnum));
    else
        snprintf(buf, len, "I/O error (no cause reported)");
    return buf;
}

int cat_sql_fail(cat_db *cat, bs_err *err, const char *what)
{
    sqlite3 *db = cat ? cat->db : NULL;
    const char *path = cat && cat->path ? cat->path : "catalogue";
    int code = db ? sqlite3_extended_errcode(db) : 0;
    int primary = code & 0xff;
    if (primary == SQLITE_INTERRUPT && cat && cat->stopped == 1)
        return bs_fail(err, BS_ETIMEOUT, "%s: %s: stopped by a signal (SIGTERM or SIGINT)", path, what);
    if (primary == SQLITE_INTERRUPT && cat && cat->stopped == 2)
        return bs_fail(err, BS_ETIMEOUT, "%s: %s: stopped at the time limit of %g s", path, what,
                       cat->limit_seconds);
    if (primary == SQLITE_FULL || primary == SQLITE_IOERR || primary == SQLITE_CANTOPEN ||
        primary == SQLITE_READONLY || primary == SQLITE_PERM) {
        /* Storage faults name their cause: the user's fix (free space, permissions) differs. */
        char cause[256];
        cat_io_cause(path, sqlite3_system_errno(db), cause, sizeof cause);
        return bs_fail(err, BS_ESQL, "%s: %s: %s: %s (sqlite code %d)", path, what, cause, sqlite3_errmsg(db),
                       code);
    }
    return bs_fail(err, BS_ESQL, "%s: %s: %s (sqlite code %d)", path, what,
                   db ? sqlite3_errmsg(db) : "no connection", code);
}

int cat_step_reset(cat_db *cat, sqlite3_stmt *st, const char *what, bs_err *err)
{
    int rc = sqlite3_step(st) == SQLITE_DONE ? 0 : cat_sql_fail(cat, err, what);
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return rc;
}

void cat_z2_text(int dim, res_status status, const int *nu, char *buf, size_t len)
{
    buf[0] = '\0';
    if (status != RES_DONE) return;
    if (dim == 2)
        snprintf(buf, len, "%d", nu[0]);
    else
        snprintf(buf, len, "%d;%d%d%d", nu[0], nu[1], nu[2], nu[3]);
}

int cat_exec(cat_db *cat, const char *sql, bs_err *err)
{
    char *msg = NULL;
    if (sqlite3_exec(cat->db, sql, NULL, NULL, &msg) == SQLITE_OK) return 0;
    int primary = sqlite3_errcode(cat->db);
    if (primary == SQLITE_FULL || primary == SQLITE_IOERR || primary == SQLITE_CANTOPEN ||
        primary == SQLITE_READONLY) {
        sqlite3_free(msg);
        return cat_sql_fail(cat, err, "writing");
    }
    int rc = bs_fail(err, BS_ESQL, "%s: %s (sqlite code %d)", cat->path, msg ? msg : sqlite3_errmsg(cat->db),
                     sqlite3_extended_errcode(cat->db));
    sqlite3_free(msg);
    return rc;
}

/* Single-value PRAGMA read. */
static int pragma_int(cat_db *cat, const char *sql, int *out, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(cat->db, sql, -1, &st, NULL) != SQLITE_OK) return cat_sql_fail(cat, err, sql);
    int rc = sqlite3_step(st);
    if (rc == SQLITE_ROW) {
        *out = sqlite3_column_int(st, 0);
        rc = 0;
    } else {
        rc = cat_sql_fail(cat, err, sql);
    }
    sqlite3_finalize(st);
    return rc;
}

/* A fresh file gets the schema; an existing one must be ours and of a version we know. */
static int check_marks(cat_db *cat, int *fresh, bs_err *err)
{
    int app = 0, version = 0, ntab = 0;
    int rc = pragma_int(cat, "PRAGMA application_id", &app, err);
    if (rc == 0) rc = pragma_int(cat, "PRAGMA user_version", &version, err);
    if (rc == 0) rc = pragma_int(cat, "SELECT count(*) FROM sqlite_master", &ntab, err);
    if (rc != 0) return rc;
    *fresh = (ntab == 0 && app == 0 && version == 0);
    if (*fresh) return 0;
    if (app != CAT_APPLICATION_ID)
        return bs_fail(err, BS_EINVAL, "%s: not a bandsieve catalogue (application_id %d, expected %d)",
                       cat->path, app, CAT_APPLICATION_ID);
    if (version > CAT_SCHEMA_VERSION)
        return bs_fail(err, BS_EINVAL, "%s: catalogue schema version %d is newer than this program's %d",
                       cat->path, version, CAT_SCHEMA_VERSION);
    if (version < 1)
        return bs_fail(err, BS_EINVAL,
                       "%s: catalogue schema version %d is older than 1 and no migration exists", cat->path,
                       version);
    cat->from_version = version;
    return 0;
}

/* Version 1 -> 2: content identity, provenance and integer invariant columns (db/schema.sql has
 * the same columns for new files; test_catalogue compares the two). Added columns are NULL (or
 * their default) in old rows; a result row without a content hash matches a material whose
 * current content is unknown too. */
static const char MIGRATE_1_2[] =
    "ALTER TABLE runs ADD COLUMN set_content TEXT;"
    "ALTER TABLE runs ADD COLUMN rerun INTEGER NOT NULL DEFAULT 0;"
    "ALTER TABLE materials ADD COLUMN content TEXT;"
    "ALTER TABLE materials ADD COLUMN set_content TEXT;"
    "ALTER TABLE materials ADD COLUMN comment TEXT;"
    "ALTER TABLE materials ADD COLUMN orbital_labels TEXT;"
    "ALTER TABLE materials ADD COLUMN meta TEXT;"
    "ALTER TABLE results ADD COLUMN content TEXT;"
    "ALTER TABLE results ADD COLUMN z2_nu0 INTEGER GENERATED ALWAYS AS (CASE WHEN z2 GLOB '[01]' OR z2 GLOB "
    "'[01];[01][01][01]' THEN CAST(substr(z2, 1, 1) AS INTEGER) END) VIRTUAL;"
    "ALTER TABLE results ADD COLUMN z2_nu1 INTEGER GENERATED ALWAYS AS (CASE WHEN z2 GLOB "
    "'[01];[01][01][01]' "
    "THEN CAST(substr(z2, 3, 1) AS INTEGER) END) VIRTUAL;"
    "ALTER TABLE results ADD COLUMN z2_nu2 INTEGER GENERATED ALWAYS AS (CASE WHEN z2 GLOB "
    "'[01];[01][01][01]' "
    "THEN CAST(substr(z2, 4, 1) AS INTEGER) END) VIRTUAL;"
    "ALTER TABLE results ADD COLUMN z2_nu3 INTEGER GENERATED ALWAYS AS (CASE WHEN z2 GLOB "
    "'[01];[01][01][01]' "
    "THEN CAST(substr(z2, 5, 1) AS INTEGER) END) VIRTUAL;"
#define PLANE_COL(name, k)                                                                                   \
    "ALTER TABLE results ADD COLUMN " name " INTEGER GENERATED ALWAYS AS (CASE WHEN json_valid('[' || "      \
    "replace(plane_chern, ';', ',') || ']') THEN json_extract('[' || replace(plane_chern, ';', ',') || "     \
    "']', '$[" k "]') END) VIRTUAL;"
    PLANE_COL("chern_k1_0", "0") PLANE_COL("chern_k1_half", "1") PLANE_COL("chern_k2_0", "2")
        PLANE_COL("chern_k2_half", "3") PLANE_COL("chern_k3_0", "4") PLANE_COL("chern_k3_half", "5")
#undef PLANE_COL
            "PRAGMA user_version = 2;";

/* Version 2 -> 3: the approximate-symmetry columns of results (db/schema.sql), NULL in old rows. */
static const char MIGRATE_2_3[] = "ALTER TABLE results ADD COLUMN magnetism TEXT;"
                                  "ALTER TABLE results ADD COLUMN tr_verdict TEXT;"
                                  "ALTER TABLE results ADD COLUMN inv_verdict TEXT;"
                                  "ALTER TABLE results ADD COLUMN tr_breaking_ev REAL;"
                                  "ALTER TABLE results ADD COLUMN inv_breaking_ev REAL;"
                                  "ALTER TABLE results ADD COLUMN symmetrised INTEGER;"
                                  "ALTER TABLE results ADD COLUMN restored TEXT;"
                                  "ALTER TABLE results ADD COLUMN breaking_ev REAL;"
                                  "ALTER TABLE results ADD COLUMN breaking_bound TEXT;"
                                  "ALTER TABLE results ADD COLUMN symmetry_margin REAL;"
                                  "PRAGMA user_version = 3;";

/* Version 3 -> 4: the crystal-symmetry columns of results (db/schema.sql), NULL in old rows. */
static const char MIGRATE_3_4[] = "ALTER TABLE results ADD COLUMN spacegroup INTEGER;"
                                  "ALTER TABLE results ADD COLUMN symmetry_ops INTEGER;"
                                  "ALTER TABLE results ADD COLUMN crystal_breaking_ev REAL;"
                                  "ALTER TABLE results ADD COLUMN z4 INTEGER;"
                                  "ALTER TABLE results ADD COLUMN mirror_chern INTEGER;"
                                  "ALTER TABLE results ADD COLUMN mirror_chern_status TEXT;"
                                  "PRAGMA user_version = 4;";

/* Version 4 -> 5: the phase-path tables (db/schema.sql has the same tables for new files;
 * test_catalogue and test_identity compare the two). Old catalogues simply have no paths yet. */
static const char MIGRATE_4_5[] =
    "CREATE TABLE paths (family TEXT PRIMARY KEY, run_id INTEGER REFERENCES runs (run_id), status TEXT "
    "NOT NULL CHECK (status IN ('ok', 'invalid', 'failed')), message TEXT, parameter TEXT, unit TEXT, "
    "x_from REAL, x_to REAL, dimension INTEGER, nmembers INTEGER, members TEXT, content TEXT NOT NULL, "
    "tol_x REAL NOT NULL, nsamples INTEGER, gap_mesh INTEGER, confidence REAL, note TEXT, gap_evaluations "
    "INTEGER, diagnoses INTEGER, seconds REAL, rank INTEGER, finished TEXT NOT NULL);"
    "CREATE TABLE path_samples (family TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE, sample "
    "INTEGER NOT NULL, x REAL NOT NULL, gap_direct_ev REAL, PRIMARY KEY (family, sample));"
    "CREATE TABLE path_intervals (family TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE, "
    "interval INTEGER NOT NULL, x_from REAL NOT NULL, x_to REAL NOT NULL, x_diagnosed REAL, gapless "
    "INTEGER NOT NULL CHECK (gapless IN (0, 1)), gap_direct_ev REAL, class TEXT, z2 TEXT, chern INTEGER, "
    "n_weyl INTEGER, confidence REAL, diagnosis TEXT, PRIMARY KEY (family, interval));"
    "CREATE TABLE path_events (family TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE, event "
    "INTEGER NOT NULL, kind TEXT NOT NULL CHECK (kind IN ('closing', 'pair created', 'pair annihilated', "
    "'boundary crossing', 'node count', 'net chirality')), x REAL NOT NULL, x_lo REAL, x_hi REAL, "
    "transition TEXT, single_value INTEGER, k1 REAL, k2 REAL, k3 REAL, k_label TEXT, at_trim INTEGER, nk "
    "INTEGER, parity_exchange INTEGER, interval_before INTEGER, interval_after INTEGER, interval INTEGER, "
    "track_a INTEGER, track_b INTEGER, text TEXT, prediction TEXT, prediction_agrees INTEGER, PRIMARY KEY "
    "(family, event));"
    "CREATE TABLE path_tracks (family TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE, track "
    "INTEGER NOT NULL, chirality INTEGER, created_with INTEGER, annihilated_with INTEGER, "
    "boundary_crossings INTEGER, npoints INTEGER, PRIMARY KEY (family, track));"
    "CREATE TABLE path_track_points (family TEXT NOT NULL REFERENCES paths (family) ON DELETE CASCADE, "
    "track INTEGER NOT NULL, point INTEGER NOT NULL, x REAL NOT NULL, k1 REAL, k2 REAL, k3 REAL, PRIMARY "
    "KEY (family, track, point));"
    "PRAGMA user_version = 5;";

/* Schema (fresh files only) and views in one immediate transaction, so two coordinators opening
 * the same new file cannot both create it. */
static int apply_schema(cat_db *cat, bs_err *err)
{
    int rc = cat_exec(cat, "BEGIN IMMEDIATE", err);
    if (rc != 0) return rc;
    int fresh = 0;
    rc = check_marks(cat, &fresh, err);
    if (rc == 0 && fresh) {
        rc = cat_exec(cat, (const char *)cat_sql_schema, err);
        char marks[128];
        snprintf(marks, sizeof marks, "PRAGMA application_id = %d; PRAGMA user_version = %d;",
                 CAT_APPLICATION_ID, CAT_SCHEMA_VERSION);
        if (rc == 0) rc = cat_exec(cat, marks, err);
    } else if (rc == 0 && cat->from_version == 1) {
        rc = cat_exec(cat, MIGRATE_1_2, err);
        if (rc != 0) bs_err_context(err, "migrating the catalogue from schema version 1 to 2: ");
    }
    if (rc == 0 && !fresh && (cat->from_version == 1 || cat->from_version == 2)) {
        rc = cat_exec(cat, MIGRATE_2_3, err);
        if (rc != 0) bs_err_context(err, "migrating the catalogue from schema version 2 to 3: ");
    }
    if (rc == 0 && !fresh && cat->from_version <= 3) {
        rc = cat_exec(cat, MIGRATE_3_4, err);
        if (rc != 0) bs_err_context(err, "migrating the catalogue from schema version 3 to 4: ");
    }
    if (rc == 0 && !fresh && cat->from_version <= 4) {
        rc = cat_exec(cat, MIGRATE_4_5, err);
        if (rc != 0) bs_err_context(err, "migrating the catalogue from schema version 4 to 5: ");
    }
    if (rc == 0) rc = cat_exec(cat, (const char *)cat_sql_views, err);
    if (rc == 0) return cat_exec(cat, "COMMIT", err);
    sqlite3_exec(cat->db, "ROLLBACK", NULL, NULL, NULL);
    return rc;
}

/* Prepared once per open: the per-entry statements of a screen's set-up (stale, best mesh) run
 * once per entry, so preparing them on every call cost more than running them (10^6 entries). */
static const char *const STMT_SQL[CAT_ST_COUNT] = {
    [CAT_ST_MAT_STALE] = "SELECT content IS ?2 FROM materials WHERE material_id = ?1",
    [CAT_ST_BEST_MESH] = "SELECT MAX(r.mesh) FROM results r JOIN materials m ON m.material_id = r.material_id"
                         " WHERE r.material_id = ? AND r.status = 'ok' AND r.content IS m.content",
    [CAT_ST_RESULT] =
        "INSERT INTO results (run_id, material_id, status, message, class, confidence, reason,"
        " gap_direct_ev, gap_indirect_ev, k_gap_direct, time_reversal, inversion, z2, z2_parity, z2_wcc,"
        " z2_status, z2_note, chern, chern_status, plane_chern, n_weyl, net_chirality, nodal_line, mesh,"
        " diag_seconds, seconds, rank, finished, ahc_xy, ahc_yz, ahc_zx, ahc_units, shc_xy, shc_units,"
        " transport_fermi_ev, diagnosis, content, magnetism, tr_verdict, inv_verdict, tr_breaking_ev, "
        "inv_breaking_ev,"
        " symmetrised, restored, breaking_ev, breaking_bound, symmetry_margin, spacegroup, symmetry_ops,"
        " crystal_breaking_ev, z4, mirror_chern, mirror_chern_status) VALUES ("
        " :run_id, :material_id, :status, :message, :class, :confidence, :reason,"
        " :gap_direct_ev, :gap_indirect_ev, :k_gap_direct, :time_reversal, :inversion, :z2, :z2_parity, "
        ":z2_wcc,"
        " :z2_status, :z2_note, :chern, :chern_status, :plane_chern, :n_weyl, :net_chirality, :nodal_line, "
        ":mesh,"
        " :diag_seconds, :seconds, :rank, :finished, :ahc_xy, :ahc_yz, :ahc_zx, :ahc_units, :shc_xy, "
        ":shc_units,"
        " :transport_fermi_ev, :diagnosis,"
        /* The content the row is about: the coordinator records each entry's content in materials
         * before handing it out (pl coord_setup), so the current one is the one computed; it binds
         * that hash as :content, and the look-up runs only for callers that do not know it. */
        " COALESCE(:content, (SELECT content FROM materials WHERE material_id = :material_id)),"
        " :magnetism, :tr_verdict, :inv_verdict, :tr_breaking_ev, :inv_breaking_ev,"
        " :symmetrised, :restored, :breaking_ev, :breaking_bound, :symmetry_margin, :spacegroup,"
        " :symmetry_ops, :crystal_breaking_ev, :z4, :mirror_chern, :mirror_chern_status)",
    [CAT_ST_EXISTS] = "SELECT 1 FROM results WHERE run_id = ? AND material_id = ?",
    [CAT_ST_DEL_RESULT] = "DELETE FROM results WHERE run_id = ? AND material_id = ?",
    [CAT_ST_NODE] = "INSERT INTO nodes (run_id, material_id, node, k1, k2, k3, chirality, energy_ev, gap_ev)"
                    " VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
    [CAT_ST_DEL_NODES] = "DELETE FROM nodes WHERE run_id = ? AND material_id = ?",
    [CAT_ST_DEL_ARTS] = "DELETE FROM artifacts WHERE run_id = ? AND material_id = ?",
    [CAT_ST_ARTIFACT] =
        "INSERT INTO artifacts (run_id, material_id, kind, plane, file, h5path, nstring, nband)"
        " VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
    [CAT_ST_MAT_ENSURE] = "INSERT OR IGNORE INTO materials (material_id, dimension, norb, nocc, updated)"
                          " VALUES (?, ?, ?, ?, " CAT_NOW_SQL ")",
    [CAT_ST_MAT_UPSERT] =
        "INSERT INTO materials (material_id, formula, dimension, norb, nr, nocc, spinful, set_path, source,"
        " card_json, updated, content, set_content, comment, orbital_labels, meta)"
        /* ?17: the time as cat_now_text writes it (the set-up writes a row per entry, and
         * strftime in SQL cost more than the C formatting of a cached second). */
        " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?17, ?11, ?12, ?13, ?14, ?15)"
        /* ?16 = 1: the provenance fields (formula, source, card, comment, labels, meta) are replaced
         * as a whole, NULLs included, so a new content never keeps the old content's comment. */
        " ON CONFLICT (material_id) DO UPDATE SET"
        " formula = CASE WHEN ?16 THEN excluded.formula ELSE COALESCE(excluded.formula, formula) END,"
        " dimension = COALESCE(excluded.dimension, dimension), norb = COALESCE(excluded.norb, norb),"
        " nr = COALESCE(excluded.nr, nr), nocc = COALESCE(excluded.nocc, nocc),"
        " spinful = COALESCE(excluded.spinful, spinful), set_path = COALESCE(excluded.set_path, set_path),"
        " source = CASE WHEN ?16 THEN excluded.source ELSE COALESCE(excluded.source, source) END,"
        " card_json = CASE WHEN ?16 THEN excluded.card_json ELSE COALESCE(excluded.card_json, card_json) END,"
        " content = COALESCE(excluded.content, content), set_content = COALESCE(excluded.set_content, "
        "set_content),"
        " comment = CASE WHEN ?16 THEN excluded.comment ELSE COALESCE(excluded.comment, comment) END,"
        " orbital_labels = CASE WHEN ?16 THEN excluded.orbital_labels"
        " ELSE COALESCE(excluded.orbital_labels, orbital_labels) END,"
        " meta = CASE WHEN ?16 THEN excluded.meta ELSE COALESCE(excluded.meta, meta) END,"
        " updated = excluded.updated",
};

static int prepare_all(cat_db *cat, bs_err *err)
{
    for (int i = 0; i < CAT_ST_COUNT; i++)
        if (sqlite3_prepare_v3(cat->db, STMT_SQL[i], -1, SQLITE_PREPARE_PERSISTENT, &cat->st[i], NULL) !=
            SQLITE_OK)
            return cat_sql_fail(cat, err, "preparing catalogue statements");
    return cat_result_params_init(cat, err);
}

/* SQLite's progress handler: nonzero stops the running statement with SQLITE_INTERRUPT. */
static int on_progress(void *ctx)
{
    cat_db *cat = ctx;
    if (cat->stop_flag && *cat->stop_flag)
        cat->stopped = 1;
    else if (cat->deadline > 0 && cat_now() > cat->deadline)
        cat->stopped = 2;
    return cat->stopped != 0;
}

/* Virtual-machine steps between checks: about a millisecond of work, so a signal or the time
 * limit is honoured at once while costing nothing measurable (common practice). */
#define CAT_PROGRESS_STEPS 10000

void cat_set_limits(cat_db *cat, volatile sig_atomic_t *stop_flag, double max_seconds)
{
    cat->stop_flag = stop_flag;
    cat->limit_seconds = max_seconds;
    cat->deadline = max_seconds > 0 ? cat_now() + max_seconds : 0;
    cat->stopped = 0;
    int on = stop_flag || max_seconds > 0;
    sqlite3_progress_handler(cat->db, on ? CAT_PROGRESS_STEPS : 0, on ? on_progress : NULL, on ? cat : NULL);
}

/* PRAGMA quick_check: O(N) over the file, but without the index-content comparison of
 * integrity_check; a damaged catalogue is refused before a job writes into it. */
static int check_damage(cat_db *cat, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(cat->db, "PRAGMA quick_check(5)", -1, &st, NULL) != SQLITE_OK)
        return bs_fail(err, BS_EINVAL,
                       "%s: the catalogue is damaged: %s (sqlite code %d); restore a copy, or "
                       "recover the rows with the sqlite3 shell's .recover",
                       cat->path, sqlite3_errmsg(cat->db), sqlite3_extended_errcode(cat->db));
    char first[300] = "";
    int s = sqlite3_step(st);
    if (s == SQLITE_ROW)
        snprintf(first, sizeof first, "%s", (const char *)sqlite3_column_text(st, 0));
    else
        snprintf(first, sizeof first, "%s (sqlite code %d)", sqlite3_errmsg(cat->db),
                 sqlite3_extended_errcode(cat->db));
    sqlite3_finalize(st);
    if (s == SQLITE_ROW && strcmp(first, "ok") == 0) return 0;
    return bs_fail(err, BS_EINVAL,
                   "%s: the catalogue is damaged (quick_check: %s); restore a copy, or recover "
                   "the rows with the sqlite3 shell's .recover",
                   cat->path, first);
}

/* Whether a read-only open needs SQLite's immutable mode: a WAL catalogue is read through its
 * -shm file, which SQLite must create when it is missing; on storage that cannot be written
 * (a read-only mount, a folder without write permission) that fails with SQLITE_CANTOPEN. 1 to
 * open immutable, 0 for a normal open, or BS_EINVAL when a -wal file with content would be ignored. */
static int needs_immutable(const char *path, bs_err *err)
{
    char dir[4096], side[4200];
    const char *slash = strrchr(path, '/');
    if (!slash)
        snprintf(dir, sizeof dir, ".");
    else
        snprintf(dir, sizeof dir, "%.*s", (int)(slash - path > 0 ? slash - path : 1), path);
    snprintf(side, sizeof side, "%s-shm", path);
    if (access(side, F_OK) == 0 || access(dir, W_OK) == 0) return 0;
    snprintf(side, sizeof side, "%s-wal", path);
    struct stat stw;
    if (stat(side, &stw) == 0 && stw.st_size > 0)
        return bs_fail(
            err, BS_EINVAL,
            "%s: cannot be read on storage that cannot be written: %s holds commits "
            "not yet in the main file, and %s-shm is missing; copy the three files to a writable folder",
            path, side, path);
    return 1;
}

/* "file:" URI of path with '%', '?' and '#' escaped, for sqlite3_open_v2 with SQLITE_OPEN_URI. */
static char *immutable_uri(const char *path)
{
    size_t len = strlen(path);
    char *uri = malloc(3 * len + 32);
    if (!uri) return NULL;
    char *o = uri + sprintf(uri, "file:");
    for (const char *p = path; *p; p++) {
        if (*p == '%' || *p == '?' || *p == '#')
            o += sprintf(o, "%%%02X", (unsigned char)*p);
        else
            *o++ = *p;
    }
    sprintf(o, "?immutable=1");
    return uri;
}

static int configure(cat_db *cat, bs_err *err)
{
    if (sqlite3_busy_timeout(cat->db, CAT_BUSY_MS) != SQLITE_OK)
        return cat_sql_fail(cat, err, "busy timeout");
    int rc = cat_exec(cat, "PRAGMA foreign_keys = ON", err);
    if (rc != 0 || cat->mode == CAT_RO) return rc;
    /* WAL: readers (query) never block the coordinator, and a crash loses only the open
     * transaction. synchronous=NORMAL is durable across process kills in WAL mode; only a power
     * loss can drop the last commits, which a resume then redoes (sqlite.org/wal.html). */
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(cat->db, "PRAGMA journal_mode = WAL", -1, &st, NULL) != SQLITE_OK)
        return cat_sql_fail(cat, err, "journal_mode");
    const char *mode = sqlite3_step(st) == SQLITE_ROW ? (const char *)sqlite3_column_text(st, 0) : NULL;
    if (!mode || strcmp(mode, "wal") != 0)
        rc = bs_fail(err, BS_ESQL, "%s: cannot switch to WAL mode (journal_mode is %s): %s", cat->path,
                     mode ? mode : "unknown", sqlite3_errmsg(cat->db));
    sqlite3_finalize(st);
    if (rc == 0) rc = cat_exec(cat, "PRAGMA synchronous = NORMAL", err);
    /* The schema's CHECK constraints stay for other writers (the sqlite3 shell, scripts); this
     * connection checks the same values in C before it binds them (statuses and kinds are names
     * of our enums, dimension and spinful are checked in cat_material_upsert). SQLite evaluates
     * results.status IN (four names) by building a temporary b-tree on every insert, which was a
     * fifth of the coordinator's cost per result. */
    if (rc == 0) rc = cat_exec(cat, "PRAGMA ignore_check_constraints = ON", err);
    /* 32 MB of page cache for the writer (the default is 2 MB): the results table and its
     * indexes of a 10^5-material screen stay in memory, saving a read per insert. */
    if (rc == 0) rc = cat_exec(cat, "PRAGMA cache_size = -32768", err);
    return rc;
}

int cat_open(const char *path, int mode, cat_db **out, bs_err *err)
{
    *out = NULL;
    if (!path || !*path) return bs_fail(err, BS_EINVAL, "catalogue path is empty");
    if (mode != CAT_RO && mode != CAT_RW)
        return bs_fail(err, BS_EINVAL, "cat_open: mode %d is not CAT_RO or CAT_RW", mode);
    cat_db *cat = calloc(1, sizeof *cat);
    if (!cat) return bs_fail(err, BS_ENOMEM, "cat_open: out of memory");
    cat->mode = mode;
    cat->h5 = H5I_INVALID_HID;
    cat->batch_rows = CAT_BATCH_ROWS;
    cat->batch_seconds = CAT_BATCH_SECONDS;
    cat->path = strdup(path);
    int rc = cat->path ? 0 : bs_fail(err, BS_ENOMEM, "cat_open: out of memory");
    /* NOMUTEX: a cat_db belongs to one thread (the coordinator's, a command's), so SQLite's
     * per-connection mutex, taken around every call, is pure cost (a few percent of the
     * coordinator's CPU per result). */
    int flags = (mode == CAT_RW ? SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE : SQLITE_OPEN_READONLY) |
                SQLITE_OPEN_NOMUTEX;
    int immutable = rc == 0 && mode == CAT_RO ? needs_immutable(path, err) : 0;
    if (immutable < 0) rc = immutable;
    char *uri = immutable > 0 ? immutable_uri(path) : NULL;
    if (immutable > 0 && !uri) rc = bs_fail(err, BS_ENOMEM, "cat_open: out of memory");
    if (rc == 0 &&
        sqlite3_open_v2(uri ? uri : path, &cat->db, flags | (uri ? SQLITE_OPEN_URI : 0), NULL) != SQLITE_OK)
        rc = cat_sql_fail(cat, err, "cannot open catalogue");
    free(uri);
    if (rc == 0) rc = configure(cat, err);
    if (rc == 0 && mode == CAT_RW) {
        int fresh = 0;
        rc = check_marks(cat, &fresh, err);
        if (rc == 0 && !fresh) rc = check_damage(cat, err);
    }
    if (rc == 0 && mode == CAT_RW) rc = apply_schema(cat, err);
    if (rc == 0 && mode == CAT_RO) {
        int fresh = 0;
        rc = check_marks(cat, &fresh, err);
        if (rc == 0 && fresh) rc = bs_fail(err, BS_EINVAL, "%s: empty file, not a bandsieve catalogue", path);
    }
    if (rc == 0 && mode == CAT_RW) rc = prepare_all(cat, err);
    if (rc != 0) {
        cat_close(cat, NULL);
        return rc;
    }
    *out = cat;
    return 0;
}

int cat_close(cat_db *cat, bs_err *err)
{
    if (!cat) return 0;
    int rc = cat->db ? cat_flush(cat, err) : 0;
    int rc2 = cat_artifact_close(cat, err);
    if (rc == 0) rc = rc2;
    for (int i = 0; i < CAT_ST_COUNT; i++)
        sqlite3_finalize(cat->st[i]);
    if (cat->db && sqlite3_close(cat->db) != SQLITE_OK && rc == 0)
        rc = cat_sql_fail(cat, err, "closing the catalogue");
    free(cat->path);
    free(cat);
    return rc;
}

int cat_set_batch(cat_db *cat, int rows, double seconds, bs_err *err)
{
    if (rows < 1 || !(seconds > 0))
        return bs_fail(err, BS_EINVAL, "cat_set_batch: expected rows >= 1 and seconds > 0, found %d and %g",
                       rows, seconds);
    cat->batch_rows = rows;
    cat->batch_seconds = seconds;
    return 0;
}

static int need_rw(const cat_db *cat, const char *what, bs_err *err)
{
    if (cat->mode == CAT_RW) return 0;
    return bs_fail(err, BS_EINVAL, "%s: %s needs a catalogue opened for writing", cat->path, what);
}

int cat_txn_begin(cat_db *cat, bs_err *err)
{
    if (cat->in_txn) return 0;
    int rc = cat_exec(cat, "BEGIN IMMEDIATE", err);
    if (rc != 0) return rc;
    cat->in_txn = 1;
    cat->pending_writes = 0;
    cat->pending_results = 0;
    cat->txn_started = cat_now();
    return 0;
}

int cat_txn_note(cat_db *cat, int is_result, bs_err *err)
{
    cat->pending_writes++;
    if (is_result) cat->pending_results++;
    if (cat->pending_writes >= cat->batch_rows) return cat_flush(cat, err);
    return cat_flush_if_due(cat, err);
}

int cat_flush(cat_db *cat, bs_err *err)
{
    if (!cat->in_txn) return 0;
    /* Artifact data reaches the disk before the rows that point at it are committed. */
    int rc = cat_artifact_flush(cat, err);
    if (rc == 0 && sqlite3_exec(cat->db, "COMMIT", NULL, NULL, NULL) != SQLITE_OK) {
        rc = cat_sql_fail(cat, err, "commit");
        bs_err_context(err, "%d result rows lost: ", cat->pending_results);
    }
    if (rc != 0 && sqlite3_get_autocommit(cat->db) == 0) sqlite3_exec(cat->db, "ROLLBACK", NULL, NULL, NULL);
    cat->in_txn = 0;
    cat->pending_writes = 0;
    cat->pending_results = 0;
    return rc;
}

int cat_flush_if_due(cat_db *cat, bs_err *err)
{
    if (cat->in_txn && cat_now() - cat->txn_started >= cat->batch_seconds) return cat_flush(cat, err);
    return 0;
}

int cat_pending(const cat_db *cat)
{
    return cat->in_txn ? cat->pending_results : 0;
}

/* ---- runs ---- */

/* Sorts object keys recursively so that equal settings print to equal text. */
static int key_cmp(const void *a, const void *b)
{
    const cJSON *x = *(const cJSON *const *)a, *y = *(const cJSON *const *)b;
    return strcmp(x->string, y->string);
}

static int json_sort(cJSON *item)
{
    for (cJSON *c = item->child; c; c = c->next)
        if (json_sort(c) != 0) return -1;
    if (!cJSON_IsObject(item) || !item->child) return 0;
    int n = cJSON_GetArraySize(item);
    cJSON **v = malloc((size_t)n * sizeof *v);
    if (!v) return -1;
    int i = 0;
    for (cJSON *c = item->child; c; c = c->next)
        v[i++] = c;
    qsort(v, (size_t)n, sizeof *v, key_cmp);
    for (i = 0; i < n; i++) {
        v[i]->prev = i > 0 ? v[i - 1] : v[n - 1]; /* cJSON keeps child->prev at the last item */
        v[i]->next = i + 1 < n ? v[i + 1] : NULL;
    }
    item->child = v[0];
    free(v);
    return 0;
}

static int canonical_settings(const char *text, char **out, bs_err *err)
{
    *out = NULL;
    cJSON *j = cJSON_Parse(text ? text : "{}");
    if (!j)
        return bs_fail(err, BS_EPARSE, "run settings: malformed JSON near \"%.40s\"",
                       cJSON_GetErrorPtr() ? cJSON_GetErrorPtr() : "");
    int rc = 0;
    if (!cJSON_IsObject(j)) rc = bs_fail(err, BS_EPARSE, "run settings: expected a JSON object");
    if (rc == 0 && json_sort(j) != 0) rc = bs_fail(err, BS_ENOMEM, "run settings: out of memory");
    if (rc == 0 && !(*out = cJSON_PrintUnformatted(j)))
        rc = bs_fail(err, BS_ENOMEM, "run settings: out of memory");
    cJSON_Delete(j);
    return rc;
}

static int check_info(const cat_db *cat, const cat_run_info *info, bs_err *err)
{
    int rc = need_rw(cat, "starting a run", err);
    if (rc != 0) return rc;
    if (!info || !info->kind || (strcmp(info->kind, "screen") != 0 && strcmp(info->kind, "rescreen") != 0))
        return bs_fail(err, BS_EINVAL, "run kind: expected \"screen\" or \"rescreen\", found \"%s\"",
                       info && info->kind ? info->kind : "(null)");
    return 0;
}

static void bind_text_or_null(sqlite3_stmt *st, int i, const char *s)
{
    if (s)
        sqlite3_bind_text(st, i, s, -1, SQLITE_TRANSIENT);
    else
        sqlite3_bind_null(st, i);
}

/* As bind_text_or_null, without SQLite's copy: only for a statement that is stepped, reset and
 * cleared of its bindings before s goes (the per-entry statements of the set-up). */
static void bind_borrowed_or_null(sqlite3_stmt *st, int i, const char *s)
{
    if (s)
        sqlite3_bind_text(st, i, s, -1, SQLITE_STATIC);
    else
        sqlite3_bind_null(st, i);
}

static void bind_int_or_null(sqlite3_stmt *st, int i, int v, int lo)
{
    if (v >= lo)
        sqlite3_bind_int(st, i, v);
    else
        sqlite3_bind_null(st, i);
}

/* Runs a one-off statement with the binds done by the caller, then finalises it. */
static int step_done(cat_db *cat, sqlite3_stmt *st, const char *what, bs_err *err)
{
    int rc = sqlite3_step(st) == SQLITE_DONE ? 0 : cat_sql_fail(cat, err, what);
    sqlite3_finalize(st);
    return rc;
}

static int prepare(cat_db *cat, const char *sql, sqlite3_stmt **st, bs_err *err)
{
    if (sqlite3_prepare_v2(cat->db, sql, -1, st, NULL) == SQLITE_OK) return 0;
    return cat_sql_fail(cat, err, sql);
}

static int session_insert(cat_db *cat, int64_t run_id, int session, const cat_run_info *info, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    int rc = prepare(cat,
                     "INSERT INTO run_sessions (run_id, session, started, ranks, hosts, cmdline)"
                     " VALUES (?, ?, " CAT_NOW_SQL ", ?, ?, ?)",
                     &st, err);
    if (rc != 0) return rc;
    sqlite3_bind_int64(st, 1, run_id);
    sqlite3_bind_int(st, 2, session);
    bind_int_or_null(st, 3, info->ranks, 1);
    bind_text_or_null(st, 4, info->hosts);
    bind_text_or_null(st, 5, info->cmdline);
    rc = step_done(cat, st, "recording the run session", err);
    if (rc == 0) {
        cat->cur_run = run_id;
        cat->cur_session = session;
    }
    return rc;
}

static int run_insert(cat_db *cat, const cat_run_info *info, const char *settings, int64_t *run_id,
                      bs_err *err)
{
    sqlite3_stmt *st = NULL;
    int rc =
        prepare(cat,
                "INSERT INTO runs (kind, status, started, version, settings, ranks, hosts, cmdline, set_path,"
                " set_content, rerun) VALUES (?, 'running', " CAT_NOW_SQL ", ?, ?, ?, ?, ?, ?, ?, ?)",
                &st, err);
    if (rc != 0) return rc;
    sqlite3_bind_text(st, 1, info->kind, -1, SQLITE_TRANSIENT);
    bind_text_or_null(st, 2, info->version);
    sqlite3_bind_text(st, 3, settings, -1, SQLITE_TRANSIENT);
    bind_int_or_null(st, 4, info->ranks, 1);
    bind_text_or_null(st, 5, info->hosts);
    bind_text_or_null(st, 6, info->cmdline);
    bind_text_or_null(st, 7, info->set_path);
    bind_text_or_null(st, 8, info->set_content);
    sqlite3_bind_int(st, 9, info->rerun ? 1 : 0);
    rc = step_done(cat, st, "recording the run", err);
    if (rc == 0) *run_id = sqlite3_last_insert_rowid(cat->db);
    if (rc == 0) rc = session_insert(cat, *run_id, 1, info, err);
    return rc;
}

/* The latest compatible unfinished run, or 0: same kind, settings and version, and the same set,
 * by content hash when info has one (a set staged at another path is the same set), else by path. */
static int run_find(cat_db *cat, const cat_run_info *info, const char *settings, int64_t *run_id,
                    int *sessions, int *rerun, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    *run_id = 0;
    *rerun = 0;
    int rc = prepare(
        cat,
        info->set_content
            ? "SELECT run_id, sessions, rerun FROM runs WHERE kind = ? AND settings = ? AND version IS ?"
              " AND set_content = ? AND status IN ('running', 'interrupted') ORDER BY run_id DESC LIMIT 1"
            : "SELECT run_id, sessions, rerun FROM runs WHERE kind = ? AND settings = ? AND version IS ?"
              " AND set_path IS ? AND status IN ('running', 'interrupted') ORDER BY run_id DESC LIMIT 1",
        &st, err);
    if (rc != 0) return rc;
    sqlite3_bind_text(st, 1, info->kind, -1, SQLITE_TRANSIENT);
    sqlite3_bind_text(st, 2, settings, -1, SQLITE_TRANSIENT);
    bind_text_or_null(st, 3, info->version);
    bind_text_or_null(st, 4, info->set_content ? info->set_content : info->set_path);
    int s = sqlite3_step(st);
    if (s == SQLITE_ROW) {
        *run_id = sqlite3_column_int64(st, 0);
        *sessions = sqlite3_column_int(st, 1);
        *rerun = sqlite3_column_int(st, 2);
    } else if (s != SQLITE_DONE) {
        rc = cat_sql_fail(cat, err, "looking for a run to resume");
    }
    sqlite3_finalize(st);
    return rc;
}

static int run_reopen(cat_db *cat, int64_t run_id, int session, const cat_run_info *info, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    int rc = prepare(cat, "UPDATE runs SET status = 'running', ended = NULL, sessions = ? WHERE run_id = ?",
                     &st, err);
    if (rc != 0) return rc;
    sqlite3_bind_int(st, 1, session);
    sqlite3_bind_int64(st, 2, run_id);
    rc = step_done(cat, st, "reopening the run", err);
    if (rc == 0) rc = session_insert(cat, run_id, session, info, err);
    return rc;
}

/* Shared body of begin and resume: one immediate transaction after the pending batch.
 * try_resume 0: always a new run; 1: resume any compatible unfinished run; 2 (--rerun): resume
 * only one that an earlier --rerun started. */
static int run_start(cat_db *cat, const cat_run_info *info, int try_resume, int64_t *run_id, int *resumed,
                     bs_err *err)
{
    *run_id = 0;
    if (resumed) *resumed = 0;
    int rc = check_info(cat, info, err);
    char *settings = NULL;
    if (rc == 0) rc = canonical_settings(info->settings_json, &settings, err);
    if (rc == 0) rc = cat_flush(cat, err);
    if (rc == 0) rc = cat_artifact_close(cat, err);
    if (rc == 0) rc = cat_exec(cat, "BEGIN IMMEDIATE", err);
    if (rc != 0) {
        free(settings);
        return rc;
    }
    int64_t id = 0;
    int sessions = 0, was_rerun = 0;
    if (try_resume) rc = run_find(cat, info, settings, &id, &sessions, &was_rerun, err);
    if (rc == 0 && id > 0 && try_resume == 2 && !was_rerun) id = 0, sessions = 0;
    if (rc == 0 && id > 0)
        rc = run_reopen(cat, id, sessions + 1, info, err);
    else if (rc == 0)
        rc = run_insert(cat, info, settings, &id, err);
    free(settings);
    if (rc == 0) rc = cat_exec(cat, "COMMIT", err);
    if (rc != 0) {
        sqlite3_exec(cat->db, "ROLLBACK", NULL, NULL, NULL);
        cat->cur_run = 0;
        return rc;
    }
    *run_id = id;
    if (resumed) *resumed = sessions > 0;
    return 0;
}

int cat_run_begin(cat_db *cat, const cat_run_info *info, int64_t *run_id, bs_err *err)
{
    return run_start(cat, info, 0, run_id, NULL, err);
}

int cat_run_resume(cat_db *cat, const cat_run_info *info, int64_t *run_id, int *resumed, bs_err *err)
{
    return run_start(cat, info, 1, run_id, resumed, err);
}

int cat_run_rerun(cat_db *cat, const cat_run_info *info, int64_t *run_id, int *resumed, bs_err *err)
{
    return run_start(cat, info, 2, run_id, resumed, err);
}

int cat_run_get(cat_db *cat, int64_t run_id, cat_run_state *out, bs_err *err)
{
    memset(out, 0, sizeof *out);
    sqlite3_stmt *st = NULL;
    int rc =
        prepare(cat,
                "SELECT started, sessions, rerun, (SELECT COUNT(*) FROM results r WHERE r.run_id = u.run_id),"
                " COALESCE(set_path, '') FROM runs u WHERE run_id = ?",
                &st, err);
    if (rc != 0) return rc;
    sqlite3_bind_int64(st, 1, run_id);
    if (sqlite3_step(st) == SQLITE_ROW) {
        snprintf(out->started, sizeof out->started, "%s", (const char *)sqlite3_column_text(st, 0));
        out->sessions = sqlite3_column_int(st, 1);
        out->rerun = sqlite3_column_int(st, 2);
        out->nresults = sqlite3_column_int64(st, 3);
        snprintf(out->set_path, sizeof out->set_path, "%s", (const char *)sqlite3_column_text(st, 4));
    } else {
        rc = bs_fail(err, BS_EINVAL, "%s: no run %lld", cat->path, (long long)run_id);
    }
    sqlite3_finalize(st);
    return rc;
}

int cat_run_end(cat_db *cat, int64_t run_id, cat_run_status status, bs_err *err)
{
    int rc = need_rw(cat, "ending a run", err);
    const char *name = cat_run_status_name(status);
    if (rc == 0 && (!name || status == CAT_RUN_RUNNING))
        rc =
            bs_fail(err, BS_EINVAL, "cat_run_end: status %d is not done, interrupted or failed", (int)status);
    if (rc == 0) rc = cat_flush(cat, err);
    if (rc == 0 && cat->h5_run == run_id) rc = cat_artifact_close(cat, err);
    if (rc != 0) return rc;
    sqlite3_stmt *st = NULL;
    rc = prepare(cat, "UPDATE runs SET status = ?, ended = " CAT_NOW_SQL " WHERE run_id = ?", &st, err);
    if (rc != 0) return rc;
    sqlite3_bind_text(st, 1, name, -1, SQLITE_STATIC);
    sqlite3_bind_int64(st, 2, run_id);
    rc = step_done(cat, st, "ending the run", err);
    if (rc == 0 && sqlite3_changes(cat->db) != 1)
        return bs_fail(err, BS_EINVAL, "%s: cat_run_end: no run %lld", cat->path, (long long)run_id);
    if (rc == 0)
        rc = prepare(cat,
                     "UPDATE run_sessions SET ended = " CAT_NOW_SQL " WHERE run_id = ?1 AND session ="
                     " (SELECT MAX(session) FROM run_sessions WHERE run_id = ?1)",
                     &st, err);
    if (rc != 0) return rc;
    sqlite3_bind_int64(st, 1, run_id);
    rc = step_done(cat, st, "ending the run session", err);
    if (rc == 0 && cat->cur_run == run_id) cat->cur_run = 0;
    return rc;
}

int cat_run_discard(cat_db *cat, int64_t run_id, bs_err *err)
{
    int rc = need_rw(cat, "discarding a run", err);
    if (rc == 0) rc = cat_flush(cat, err);
    if (rc == 0) rc = cat_exec(cat, "BEGIN IMMEDIATE", err);
    if (rc != 0) return rc;
    sqlite3_stmt *st = NULL;
    rc = prepare(cat, "SELECT count(*) FROM results WHERE run_id = ?", &st, err);
    if (rc == 0) {
        sqlite3_bind_int64(st, 1, run_id);
        if (sqlite3_step(st) != SQLITE_ROW)
            rc = cat_sql_fail(cat, err, "counting a run's results");
        else if (sqlite3_column_int64(st, 0) > 0)
            rc =
                bs_fail(err, BS_EINVAL, "%s: run %lld has results and is kept", cat->path, (long long)run_id);
        sqlite3_finalize(st);
    }
    static const char *const del[] = {"DELETE FROM run_sessions WHERE run_id = ?",
                                      "DELETE FROM runs WHERE run_id = ?"};
    for (int i = 0; rc == 0 && i < 2; i++) {
        rc = prepare(cat, del[i], &st, err);
        if (rc != 0) break;
        sqlite3_bind_int64(st, 1, run_id);
        rc = step_done(cat, st, "discarding an empty run", err);
    }
    if (rc == 0) rc = cat_exec(cat, "COMMIT", err);
    if (rc != 0) {
        sqlite3_exec(cat->db, "ROLLBACK", NULL, NULL, NULL);
        return rc;
    }
    if (cat->cur_run == run_id) cat->cur_run = 0;
    return 0;
}

int cat_session_of(cat_db *cat, int64_t run_id, int *session, bs_err *err)
{
    if (cat->cur_run == run_id && cat->cur_session > 0) {
        *session = cat->cur_session;
        return 0;
    }
    sqlite3_stmt *st = NULL;
    int rc = prepare(cat, "SELECT COALESCE(MAX(session), 1) FROM run_sessions WHERE run_id = ?", &st, err);
    if (rc != 0) return rc;
    sqlite3_bind_int64(st, 1, run_id);
    if (sqlite3_step(st) == SQLITE_ROW)
        *session = sqlite3_column_int(st, 0);
    else
        rc = cat_sql_fail(cat, err, "looking up the run session");
    sqlite3_finalize(st);
    return rc;
}

int cat_session_set_file(cat_db *cat, int64_t run_id, int session, const char *file, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    int rc =
        prepare(cat, "UPDATE run_sessions SET artifact_file = ? WHERE run_id = ? AND session = ?", &st, err);
    if (rc != 0) return rc;
    sqlite3_bind_text(st, 1, file, -1, SQLITE_TRANSIENT);
    sqlite3_bind_int64(st, 2, run_id);
    sqlite3_bind_int(st, 3, session);
    return step_done(cat, st, "recording the artifact file", err);
}

/* ---- materials ---- */

int cat_material_upsert(cat_db *cat, const cat_material *m, bs_err *err)
{
    int rc = need_rw(cat, "cat_material_upsert", err);
    if (rc != 0) return rc;
    if (!m || !m->material_id || !*m->material_id || strlen(m->material_id) > 127)
        return bs_fail(err, BS_EINVAL, "material: expected an id of 1 to 127 bytes");
    if (m->dimension > 0 && m->dimension != 2 && m->dimension != 3)
        return bs_fail(err, BS_EINVAL, "material %s: dimension must be 2 or 3, found %d", m->material_id,
                       m->dimension);
    if (m->spinful > 1)
        return bs_fail(err, BS_EINVAL, "material %s: spinful must be 0 or 1, found %d", m->material_id,
                       m->spinful);
    rc = cat_txn_begin(cat, err);
    if (rc != 0) return rc;
    sqlite3_stmt *st = cat->st[CAT_ST_MAT_UPSERT];
    sqlite3_bind_text(st, 1, m->material_id, -1, SQLITE_STATIC);
    bind_borrowed_or_null(st, 2, m->formula);
    bind_int_or_null(st, 3, m->dimension, 1);
    bind_int_or_null(st, 4, m->norb, 1);
    bind_int_or_null(st, 5, m->nr, 1);
    bind_int_or_null(st, 6, m->nocc, 1);
    bind_int_or_null(st, 7, m->spinful, 0);
    bind_borrowed_or_null(st, 8, m->set_path);
    bind_borrowed_or_null(st, 9, m->source);
    bind_borrowed_or_null(st, 10, m->card_json);
    bind_borrowed_or_null(st, 11, m->content);
    bind_borrowed_or_null(st, 12, m->set_content);
    bind_borrowed_or_null(st, 13, m->comment);
    bind_borrowed_or_null(st, 14, m->orbital_labels);
    bind_borrowed_or_null(st, 15, m->meta);
    sqlite3_bind_int(st, 16, m->provenance ? 1 : 0);
    char now[32];
    sqlite3_bind_text(st, 17, cat_now_text(cat, now, sizeof now), -1, SQLITE_STATIC);
    int s = sqlite3_step(st);
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    if (s != SQLITE_DONE) {
        rc = cat_sql_fail(cat, err, "writing the material");
        return bs_err_context(err, "material %s: ", m->material_id);
    }
    return cat_txn_note(cat, 0, err);
}

/* ---- id lists ---- */

void cat_ids_init(cat_ids *ids)
{
    ids->n = 0;
    ids->id = NULL;
}

void cat_ids_clear(cat_ids *ids)
{
    if (!ids) return;
    for (size_t i = 0; i < ids->n; i++)
        free(ids->id[i]);
    free(ids->id);
    cat_ids_init(ids);
}

static int str_cmp(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

int cat_ids_contains(const cat_ids *ids, const char *id)
{
    if (!ids || ids->n == 0 || !id) return 0;
    return bsearch(&id, ids->id, ids->n, sizeof *ids->id, str_cmp) != NULL;
}

typedef struct ids_acc {
    cat_ids list;
    size_t cap;
} ids_acc;

static int ids_add(void *ctx, const cat_row *row, bs_err *err)
{
    ids_acc *acc = ctx;
    if (row->index < 0) return 0;
    if (!row->text[0]) return 0; /* a NULL id cannot be handed out */
    if (acc->list.n == acc->cap) {
        size_t cap = acc->cap ? 2 * acc->cap : 256;
        char **grown = realloc(acc->list.id, cap * sizeof *grown);
        if (!grown) return bs_fail(err, BS_ENOMEM, "material id list: out of memory");
        acc->list.id = grown;
        acc->cap = cap;
    }
    if (!(acc->list.id[acc->list.n] = strdup(row->text[0])))
        return bs_fail(err, BS_ENOMEM, "material id list: out of memory");
    acc->list.n++;
    return 0;
}

/* Runs sql (one read-only statement with material ids in column 0, no parameters except an
 * optional ?1 = run_id) into a sorted, duplicate-free list. */
static int collect_ids(cat_db *cat, const char *sql, int64_t run_id, cat_ids *ids, bs_err *err);

int cat_done_ids(cat_db *cat, int64_t run_id, cat_ids *ids, bs_err *err)
{
    return collect_ids(cat, "SELECT material_id FROM results WHERE run_id = ?1", run_id, ids, err);
}

int cat_finished_ids(cat_db *cat, const cat_run_info *info, cat_ids *ids, bs_err *err)
{
    char *settings = NULL;
    int rc = canonical_settings(info->settings_json, &settings, err);
    if (rc != 0) return rc;
    sqlite3_stmt *st = NULL;
    /* A row counts when it is about the material's current content: a repacked entry with a new
     * table has a new hash and is done again; the set's path plays no part. */
    rc = prepare(cat,
                 "SELECT DISTINCT r.material_id FROM results r JOIN runs u ON u.run_id = r.run_id"
                 " JOIN materials m ON m.material_id = r.material_id"
                 " WHERE u.kind = ? AND u.settings = ? AND u.version IS ? AND r.content IS m.content"
                 " ORDER BY r.material_id",
                 &st, err);
    if (rc != 0) {
        free(settings);
        return rc;
    }
    sqlite3_bind_text(st, 1, info->kind, -1, SQLITE_TRANSIENT);
    sqlite3_bind_text(st, 2, settings, -1, SQLITE_TRANSIENT);
    bind_text_or_null(st, 3, info->version);
    cat_ids acc = {0, NULL};
    size_t cap = 0;
    int s;
    while (rc == 0 && (s = sqlite3_step(st)) == SQLITE_ROW) {
        const char *id = (const char *)sqlite3_column_text(st, 0);
        if (!id) continue;
        if (acc.n == cap) {
            cap = cap ? 2 * cap : 64;
            char **p = realloc(acc.id, cap * sizeof *p);
            if (!p) {
                rc = bs_fail(err, BS_ENOMEM, "out of memory for finished ids");
                break;
            }
            acc.id = p;
        }
        if (!(acc.id[acc.n] = strdup(id))) {
            rc = bs_fail(err, BS_ENOMEM, "out of memory for finished ids");
            break;
        }
        acc.n++;
    }
    if (rc == 0 && s != SQLITE_DONE) rc = cat_sql_fail(cat, err, "listing finished materials");
    sqlite3_finalize(st);
    free(settings);
    if (rc != 0) {
        cat_ids_clear(&acc);
        return rc;
    }
    /* ORDER BY uses SQLite's BINARY collation, the same byte order as strcmp. */
    cat_ids_clear(ids);
    *ids = acc;
    return 0;
}

int cat_material_stale(cat_db *cat, const char *material_id, const char *content, int *stale, bs_err *err)
{
    *stale = 1;
    sqlite3_stmt *st = cat->st[CAT_ST_MAT_STALE];
    if (!st)
        return bs_fail(err, BS_EINVAL, "%s: material contents need a catalogue opened for writing",
                       cat->path);
    sqlite3_bind_text(st, 1, material_id, -1, SQLITE_STATIC);
    bind_borrowed_or_null(st, 2, content);
    int rc = 0, s = sqlite3_step(st);
    if (s == SQLITE_ROW)
        *stale = !sqlite3_column_int(st, 0);
    else if (s != SQLITE_DONE)
        rc = cat_sql_fail(cat, err, "reading a material's content");
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return rc;
}

int cat_has_materials(cat_db *cat, int *any, bs_err *err)
{
    *any = 1;
    sqlite3_stmt *st = NULL;
    int rc = prepare(cat, "SELECT EXISTS (SELECT 1 FROM materials)", &st, err);
    if (rc != 0) return rc;
    if (sqlite3_step(st) == SQLITE_ROW)
        *any = sqlite3_column_int(st, 0);
    else
        rc = cat_sql_fail(cat, err, "looking for material rows");
    sqlite3_finalize(st);
    return rc;
}

int cat_best_mesh(cat_db *cat, const char *material_id, int *mesh, bs_err *err)
{
    *mesh = 0;
    sqlite3_stmt *st = cat->st[CAT_ST_BEST_MESH];
    if (!st) return bs_fail(err, BS_EINVAL, "%s: best meshes need a catalogue opened for writing", cat->path);
    sqlite3_bind_text(st, 1, material_id, -1, SQLITE_TRANSIENT);
    int rc = 0;
    if (sqlite3_step(st) == SQLITE_ROW)
        *mesh = sqlite3_column_int(st, 0);
    else
        rc = cat_sql_fail(cat, err, "reading the best mesh");
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return rc;
}

int cat_select_ids(cat_db *cat, const char *where_sql, cat_ids *ids, bs_err *err)
{
    const char *cond = where_sql && *where_sql ? where_sql : "1";
    /* Newlines keep a trailing "--" comment in the condition from hiding the closing bracket. */
    size_t len = strlen(cond) + 64;
    char *sql = malloc(len);
    if (!sql) return bs_fail(err, BS_ENOMEM, "cat_select_ids: out of memory");
    snprintf(sql, len, "SELECT material_id FROM summary WHERE (\n%s\n)", cond);
    int rc = collect_ids(cat, sql, 0, ids, err);
    free(sql);
    if (rc != 0) bs_err_context(err, "--where condition: ");
    return rc;
}

/* ---- read-only queries ---- */

/* Pragmas that only take an object name as argument and read; any other pragma with an argument
 * may set something and is refused. */
static const char *const READ_PRAGMAS[] = {"table_info",      "table_xinfo", "index_list",
                                           "index_info",      "index_xinfo", "foreign_key_list",
                                           "integrity_check", "quick_check", NULL};

static int query_authorizer(void *ctx, int action, const char *a1, const char *a2, const char *db,
                            const char *trigger)
{
    (void)ctx;
    (void)db;
    (void)trigger;
    /* ATTACH would open (or create) another file; BEGIN/SAVEPOINT count as read-only for
     * sqlite3_stmt_readonly but would tangle with the writer's batch transaction. */
    if (action == SQLITE_ATTACH || action == SQLITE_DETACH || action == SQLITE_TRANSACTION ||
        action == SQLITE_SAVEPOINT)
        return SQLITE_DENY;
    if (action == SQLITE_PRAGMA && a2) {
        for (int i = 0; READ_PRAGMAS[i]; i++)
            if (sqlite3_stricmp(a1, READ_PRAGMAS[i]) == 0) return SQLITE_OK;
        return SQLITE_DENY;
    }
    return SQLITE_OK;
}

/* Prepares exactly one statement and refuses anything that could write. */
static int query_prepare(cat_db *cat, const char *sql, sqlite3_stmt **out, bs_err *err)
{
    *out = NULL;
    sqlite3_stmt *st = NULL;
    const char *tail = NULL;
    if (!sql) return bs_fail(err, BS_EINVAL, "query: no SQL given");
    sqlite3_set_authorizer(cat->db, query_authorizer, NULL);
    int s = sqlite3_prepare_v2(cat->db, sql, -1, &st, &tail);
    sqlite3_set_authorizer(cat->db, NULL, NULL);
    if (s != SQLITE_OK) {
        if (s == SQLITE_AUTH)
            return bs_fail(err, BS_EINVAL,
                           "query refused: ATTACH, DETACH, transaction control and PRAGMAs that set values"
                           " are not allowed (%s)",
                           sqlite3_errmsg(cat->db));
        return cat_sql_fail(cat, err, "query");
    }
    if (!st) return bs_fail(err, BS_EINVAL, "query: no SQL statement in \"%.60s\"", sql);
    int rc = 0;
    if (!sqlite3_stmt_readonly(st))
        rc = bs_fail(
            err, BS_EINVAL,
            "query refused: the statement would modify the catalogue (only read-only SQL is run): %.80s",
            sql);
    while (rc == 0 && tail && *tail) {
        sqlite3_stmt *more = NULL;
        const char *next = NULL;
        if (sqlite3_prepare_v2(cat->db, tail, -1, &more, &next) != SQLITE_OK) {
            rc = cat_sql_fail(cat, err, "query (after the first statement)");
        } else if (more) {
            rc = bs_fail(err, BS_EINVAL, "query refused: one statement at a time, found more after \"%.60s\"",
                         sql);
        }
        sqlite3_finalize(more);
        if (next == tail) break;
        tail = next;
    }
    if (rc != 0) {
        sqlite3_finalize(st);
        return rc;
    }
    *out = st;
    return 0;
}

static int col_type(int t)
{
    switch (t) {
    case SQLITE_INTEGER:
        return CAT_COL_INTEGER;
    case SQLITE_FLOAT:
        return CAT_COL_REAL;
    case SQLITE_TEXT:
        return CAT_COL_TEXT;
    case SQLITE_BLOB:
        return CAT_COL_BLOB;
    default:
        return CAT_COL_NULL;
    }
}

/* The shortest "%.Ng" text that reads back as exactly v (sqlite3_column_text keeps only 15
 * digits, which loses the last bits of many doubles), with ".0" added when it looks like an
 * integer so that the value still reads as a real. */
static void real_text(double v, char *out, size_t len)
{
    for (int digits = 15; digits <= 17; digits++) {
        snprintf(out, len, "%.*g", digits, v);
        if (strtod(out, NULL) == v) break;
    }
    if (!strpbrk(out, ".eEin")) {
        size_t k = strlen(out);
        if (k + 2 < len) memcpy(out + k, ".0", 3);
    }
}

/* Steps st, calling fn for the header and each row. */
static int query_rows(cat_db *cat, sqlite3_stmt *st, cat_row_fn fn, void *ctx, bs_err *err)
{
    int ncol = sqlite3_column_count(st);
    size_t n = ncol > 0 ? (size_t)ncol : 1;
    const char **name = calloc(n, sizeof *name);
    const char **text = calloc(n, sizeof *text);
    int *type = calloc(n, sizeof *type);
    char(*num)[32] = calloc(n, sizeof *num);
    int rc = name && text && type && num ? 0 : bs_fail(err, BS_ENOMEM, "query: out of memory");
    for (int i = 0; rc == 0 && i < ncol; i++)
        name[i] = sqlite3_column_name(st, i);
    cat_row row = {ncol, name, NULL, NULL, -1};
    if (rc == 0) rc = fn(ctx, &row, err);
    row.text = text;
    row.type = type;
    while (rc == 0) {
        int s = sqlite3_step(st);
        if (s == SQLITE_DONE) break;
        if (s != SQLITE_ROW) {
            rc = cat_sql_fail(cat, err, "query");
            break;
        }
        for (int i = 0; i < ncol; i++) {
            type[i] = col_type(sqlite3_column_type(st, i));
            if (type[i] == CAT_COL_REAL) {
                real_text(sqlite3_column_double(st, i), num[i], sizeof num[i]);
                text[i] = num[i];
            } else {
                text[i] = type[i] == CAT_COL_NULL ? NULL : (const char *)sqlite3_column_text(st, i);
            }
        }
        row.index++;
        rc = fn(ctx, &row, err);
    }
    free(name);
    free(text);
    free(type);
    free(num);
    return rc;
}

int cat_query(cat_db *cat, const char *sql, cat_row_fn fn, void *ctx, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    int rc = query_prepare(cat, sql, &st, err);
    if (rc != 0) return rc;
    rc = query_rows(cat, st, fn, ctx, err);
    sqlite3_finalize(st);
    return rc;
}

static int collect_ids(cat_db *cat, const char *sql, int64_t run_id, cat_ids *ids, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    int rc = query_prepare(cat, sql, &st, err);
    if (rc != 0) return rc;
    if (run_id > 0) sqlite3_bind_int64(st, 1, run_id);
    ids_acc acc = {{0, NULL}, 0};
    rc = query_rows(cat, st, ids_add, &acc, err);
    sqlite3_finalize(st);
    if (rc != 0) {
        cat_ids_clear(&acc.list);
        return rc;
    }
    if (acc.list.n > 1) qsort(acc.list.id, acc.list.n, sizeof *acc.list.id, str_cmp);
    size_t k = 0; /* drop duplicates (the same id selected twice) */
    for (size_t i = 0; i < acc.list.n; i++) {
        if (k > 0 && strcmp(acc.list.id[k - 1], acc.list.id[i]) == 0)
            free(acc.list.id[i]);
        else
            acc.list.id[k++] = acc.list.id[i];
    }
    acc.list.n = k;
    cat_ids_clear(ids);
    *ids = acc.list;
    return 0;
}

typedef struct check_acc {
    char first[400];
    long long nrow;
} check_acc;

static int check_row(void *ctx, const cat_row *row, bs_err *err)
{
    (void)err;
    check_acc *acc = ctx;
    if (row->index == 0)
        snprintf(acc->first, sizeof acc->first, "%s", row->text[0] ? row->text[0] : "(null)");
    if (row->index >= 0) acc->nrow++;
    return 0;
}

int cat_check(cat_db *cat, bs_err *err)
{
    check_acc acc = {"", 0};
    int rc = cat_query(cat, "PRAGMA integrity_check", check_row, &acc, err);
    if (rc != 0) return rc;
    if (acc.nrow == 1 && strcmp(acc.first, "ok") == 0) return 0;
    return bs_fail(err, BS_ESQL, "%s: integrity check failed: %s (%lld messages)", cat->path, acc.first,
                   acc.nrow);
}
