/* The catalogue: one SQLite file (WAL mode) holding runs, materials, one result row per material
 * per run, Weyl nodes and an index of artifact arrays kept in HDF5 files beside it.
 * Only the coordinator writes it; writes go into an open transaction that is committed every
 * `batch_rows` results or `batch_seconds` seconds, so a killed job loses at most one batch.
 * Schema: db/schema.sql and db/views.sql (embedded at build time), documented in db/README.md.
 * No MPI here: the pipeline calls these functions from its coordinator rank only. */
#ifndef BANDSIEVE_CATALOGUE_H
#define BANDSIEVE_CATALOGUE_H

#include <signal.h>
#include <stddef.h>
#include <stdint.h>

#include "bandsieve/err.h"
#include "bandsieve/phasepath.h"
#include "bandsieve/result.h"

/* Schema version stored in PRAGMA user_version; PRAGMA application_id is CAT_APPLICATION_ID. */
#define CAT_SCHEMA_VERSION 5
#define CAT_APPLICATION_ID 0x42534376 /* "BSCv" */

/* Defaults for the commit batching (cat_set_batch): whichever comes first. A commit costs the
 * coordinator about as much as 15 result rows (its WAL frames and, now and then, a checkpoint), so
 * cheap materials want large batches; expensive ones reach the time limit first. A kill loses at
 * most the open batch, which a resume computes again. */
#define CAT_BATCH_ROWS    1024
#define CAT_BATCH_SECONDS 2.0

typedef struct cat_db cat_db; /* an open catalogue (opaque) */

enum { CAT_RO = 0, CAT_RW = 1 }; /* cat_open modes */

/* Status of one result row (column results.status). */
typedef enum cat_status {
    CAT_RES_OK = 0,      /* "ok": a diagnosis was made (it may still be of low confidence) */
    CAT_RES_INVALID = 1, /* "invalid": the input was rejected (bad card, table, sizes) */
    CAT_RES_FAILED = 2,  /* "failed": a numerical or internal failure for this material */
    CAT_RES_TIMEOUT = 3  /* "timeout": the per-material time budget was exceeded */
} cat_status;

/* Status of a run (column runs.status). */
typedef enum cat_run_status {
    CAT_RUN_RUNNING = 0,     /* "running": set by cat_run_begin/resume; stays if the job is killed */
    CAT_RUN_DONE = 1,        /* "done": every material of the run has a row */
    CAT_RUN_INTERRUPTED = 2, /* "interrupted": stopped early on purpose (wall-clock budget, signal) */
    CAT_RUN_FAILED = 3       /* "failed": the job itself failed (not one material) */
} cat_run_status;

/* The status text stored in the catalogue ("ok", ...; "running", ...); NULL for a bad value. */
const char *cat_status_name(cat_status s);
const char *cat_run_status_name(cat_run_status s);

/* Maps a worker's error code to a result status: BS_OK -> ok, BS_EPARSE/BS_EINVAL/BS_EIO ->
 * invalid, BS_ETIMEOUT -> timeout, anything else -> failed. */
cat_status cat_status_from_code(int bs_code);

/* Opens the catalogue at path (borrowed). CAT_RW creates the file if needed, applies the embedded
 * schema and views, sets WAL mode, synchronous=NORMAL, foreign keys and a busy timeout; an existing
 * file must carry our application_id and a user_version we know. CAT_RO opens with
 * SQLITE_OPEN_READONLY (the file must exist; nothing is ever changed) and checks the same marks;
 * where the folder cannot be written and the -shm file is missing (read-only storage), it opens
 * the file as immutable, and refuses when a -wal file would then be ignored. CAT_RW runs
 * PRAGMA quick_check on an existing file and refuses a damaged one (BS_EINVAL, naming the file).
 * *out is owned by the caller (cat_close). BS_ESQL with sqlite3_errmsg text, BS_EINVAL for a file
 * that is not a bandsieve catalogue or has a newer schema. */
int cat_open(const char *path, int mode, cat_db **out, bs_err *err);

/* Bounds every later query on cat (cat_query, cat_select_ids, the id lists): SQLite's progress
 * handler stops a statement once *stop_flag (borrowed, may be NULL) is set by a signal handler or
 * once max_seconds (0: no limit) have passed since this call; the query then fails with BS_ETIMEOUT
 * and a message saying which. cat_set_limits(cat, NULL, 0) removes the bounds. */
void cat_set_limits(cat_db *cat, volatile sig_atomic_t *stop_flag, double max_seconds);

/* Removes run_id and its sessions when it has no result rows (a new run that found nothing to do),
 * so that repeating a finished screen leaves no empty runs behind. BS_EINVAL when it has results. */
int cat_run_discard(cat_db *cat, int64_t run_id, bs_err *err);

/* Commits pending writes (like cat_flush), closes the artifact file and the database and frees cat.
 * cat may be NULL. cat is freed even when the final commit fails; the error is returned. */
int cat_close(cat_db *cat, bs_err *err);

/* Sets the commit batching: commit after rows results (>= 1) or after seconds (> 0) since the
 * first uncommitted write, whichever comes first. Defaults CAT_BATCH_ROWS, CAT_BATCH_SECONDS. */
int cat_set_batch(cat_db *cat, int rows, double seconds, bs_err *err);

/* Description of a run, all strings borrowed. settings_json must hold every option that changes
 * results (mesh, tasks, flags, per-material budget, and for rescreen the --where condition), in
 * normalised form (an explicit default written as the default; options that cannot change a
 * result left out); it is stored in canonical form (keys sorted, no spaces). Two runs are
 * compatible for resume when kind, settings, version and the set's content hash are equal (the
 * set path when set_content is NULL). NULL strings store NULL. */
typedef struct cat_run_info {
    const char *kind;          /* "screen" or "rescreen" */
    const char *settings_json; /* a JSON object; NULL is stored as "{}" */
    const char *version;       /* program version, e.g. BS_VERSION */
    int ranks;                 /* MPI ranks of this job (communicator size) */
    const char *hosts;         /* comma-separated host names */
    const char *cmdline;       /* the command line, joined with spaces */
    const char *set_path;      /* material set the run reads */
    const char *set_content;   /* the set's content hash (ms_set_content), or NULL */
    int rerun;                 /* 1: started by --rerun (recorded in runs.rerun) */
} cat_run_info;

/* Starts a new run (status running, session 1) and returns its id in *run_id. Used by --rerun
 * and when nothing can be resumed. Committed at once. BS_EPARSE for bad settings JSON. */
int cat_run_begin(cat_db *cat, const cat_run_info *info, int64_t *run_id, bs_err *err);

/* Continues the latest compatible run whose status is running or interrupted (a killed or
 * budget-stopped job), opening a new session in it (ranks, hosts, command line of this job);
 * when there is none, starts a new run as cat_run_begin does. *resumed is 1 when an old run was
 * continued, 0 for a new one. The caller then skips the ids from cat_done_ids. Committed at once. */
int cat_run_resume(cat_db *cat, const cat_run_info *info, int64_t *run_id, int *resumed, bs_err *err);

/* For --rerun: continues the latest compatible unfinished run only when an earlier --rerun started
 * it (so a resubmitted job script containing --rerun finishes its run instead of starting over each
 * time); otherwise starts a new run. *resumed as for cat_run_resume. */
int cat_run_rerun(cat_db *cat, const cat_run_info *info, int64_t *run_id, int *resumed, bs_err *err);

/* What a run is, for telling the user what was resumed. */
typedef struct cat_run_state {
    char started[40];    /* UTC text */
    int sessions;        /* jobs so far, this one included */
    int rerun;           /* started by --rerun */
    long long nresults;  /* rows it holds */
    char set_path[1024]; /* the set path of its first session */
} cat_run_state;

int cat_run_get(cat_db *cat, int64_t run_id, cat_run_state *out, bs_err *err);

/* Commits pending writes, then records status and the end time of the run and of its session. */
int cat_run_end(cat_db *cat, int64_t run_id, cat_run_status status, bs_err *err);

/* One material as the set's index describes it; strings borrowed. Numbers <= 0 (spinful < 0)
 * store NULL. */
typedef struct cat_material {
    const char *material_id; /* required, at most 127 bytes */
    const char *formula;
    int dimension; /* 2 or 3 */
    int norb;      /* basis states */
    int nr;        /* lattice vectors in the hopping table */
    int nocc;      /* occupied bands */
    int spinful;   /* 0 or 1 */
    const char *set_path;
    const char *source;         /* provenance note from the card */
    const char *card_json;      /* the card as JSON text, or NULL */
    const char *content;        /* the entry's content hash (content.h) in the set it is read from */
    const char *set_content;    /* that set's content hash */
    const char *comment;        /* the card's comment */
    const char *orbital_labels; /* JSON list of the orbitals' labels (null where none) */
    const char *meta;           /* the card's meta object as JSON */
    int provenance;             /* 1: formula, source, card_json, comment, orbital_labels and meta
                                   replace the stored ones as a whole (NULL clears); 0: only non-NULL
                                   fields replace */
} cat_material;

/* Inserts or updates the material row (non-NULL fields replace the stored ones; with provenance
 * set, the provenance fields are replaced together). Batched like results (counts towards the
 * batch). */
int cat_material_upsert(cat_db *cat, const cat_material *m, bs_err *err);

/* Records the result of material_id in run_id: status, message (borrowed, may be NULL), the
 * diagnosis (borrowed; may be NULL for non-ok rows, required for CAT_RES_OK), the worker rank and
 * its wall time in seconds (< 0: take the diagnosis's own). The columns are read from the struct,
 * the diagnosis column is its JSON form without flows (result_json.h); Weyl nodes go to the nodes
 * table; flows are written to this session's HDF5 artifact file and indexed in artifacts. A
 * diagnosis whose id is set and differs from material_id is BS_EINVAL (nothing is written then).
 * A second put for the same (run, material) replaces the first. The row joins the open
 * transaction, which is committed when the batch is full or due. */
int cat_result_put(cat_db *cat, int64_t run_id, const char *material_id, cat_status status,
                   const char *message, const res_diag *diag, int rank, double seconds, bs_err *err);

/* As cat_result_put, with the diagnosis column given as text: stored_text (borrowed) is diag's
 * JSON form without flows, res_to_text(diag, 0), as the worker printed it; it is stored as it is
 * instead of being printed again from diag (printing was a third of the catalogue's CPU per ok
 * result). NULL: printed from diag. The caller vouches that the text is diag's form. content
 * (borrowed; NULL: read from the materials row, as cat_result_put does) is the row's content
 * hash when the caller knows it to be the material's current one (the coordinator recorded it in
 * the set-up), which saves a look-up per row. */
int cat_result_put_stored(cat_db *cat, int64_t run_id, const char *material_id, cat_status status,
                          const char *message, const res_diag *diag, const char *stored_text,
                          const char *content, int rank, double seconds, bs_err *err);

/* As cat_result_put with the diagnosis as JSON text of len bytes, read with res_from_text (keys
 * that are missing take the values of an empty result); text NULL means no diagnosis. Malformed
 * JSON is BS_EPARSE with the offset of the error, a key of the wrong type BS_EPARSE naming it. */
int cat_result_put_text(cat_db *cat, int64_t run_id, const char *material_id, cat_status status,
                        const char *message, const char *text, size_t len, int rank, double seconds,
                        bs_err *err);

/* Commits the open transaction now (artifact file flushed first, so a committed row never
 * points at unwritten data). No-op when nothing is pending. */
int cat_flush(cat_db *cat, bs_err *err);

/* Commits when the open transaction is older than the batch interval; for the coordinator's idle
 * loop, so a slow trickle of results is still committed every few seconds. */
int cat_flush_if_due(cat_db *cat, bs_err *err);

/* Number of result rows written but not yet committed. */
int cat_pending(const cat_db *cat);

/* A sorted list of material ids; the caller owns it (init before use, clear after). */
typedef struct cat_ids {
    size_t n;
    char **id; /* n strings, sorted by byte value (strcmp order) */
} cat_ids;

void cat_ids_init(cat_ids *ids);
void cat_ids_clear(cat_ids *ids);
/* 1 when id is in ids (binary search), else 0. */
int cat_ids_contains(const cat_ids *ids, const char *id);

/* The material ids that already have a result row (any status) in run_id: a resumed run skips
 * them. *ids (initialised by the caller) is replaced. */
int cat_done_ids(cat_db *cat, int64_t run_id, cat_ids *ids, bs_err *err);

/* The material ids that have a result row about their current content (materials.content) in any
 * run with the same kind, settings and version, whatever the set's path: a new screen skips them,
 * so running `screen` again does only entries that are new or whose content changed (--rerun does
 * not call this). Call after the materials' content has been recorded (cat_material_upsert). */
int cat_finished_ids(cat_db *cat, const cat_run_info *info, cat_ids *ids, bs_err *err);

/* *stale = 1 when the material row is missing or has another content than `content` (or none):
 * its provenance should be (re)written from the set. */
int cat_material_stale(cat_db *cat, const char *material_id, const char *content, int *stale, bs_err *err);

/* *any = 1 when the catalogue has at least one material row, 0 when none (a new catalogue): then
 * every material is stale without a look-up each. */
int cat_has_materials(cat_db *cat, int *any, bs_err *err);

/* The highest mesh among the `ok` rows of the material's current content, 0 when it has none. */
int cat_best_mesh(cat_db *cat, const char *material_id, int *mesh, bs_err *err);

/* The material ids of `SELECT material_id FROM summary WHERE (where_sql)`, for rescreen.
 * where_sql is one SQL condition; a condition that would write, or that holds a second
 * statement, is refused (BS_EINVAL); SQL errors are BS_ESQL with sqlite3_errmsg. NULL or ""
 * selects every material in summary. */
int cat_select_ids(cat_db *cat, const char *where_sql, cat_ids *ids, bs_err *err);

/* Column types reported to a cat_query callback. */
enum { CAT_COL_INTEGER = 1, CAT_COL_REAL = 2, CAT_COL_TEXT = 3, CAT_COL_BLOB = 4, CAT_COL_NULL = 5 };

/* One row handed to a cat_query callback; everything is borrowed for the call only. */
typedef struct cat_row {
    int ncol;
    const char *const *name; /* column names */
    const char *const *text; /* values as text (NULL for SQL NULL); NULL array in the header call.
                              * Reals are the shortest text that reads back as the same double. */
    const int *type;         /* CAT_COL_* per value; NULL in the header call */
    long long index;         /* 0-based row number; -1 for the header call */
} cat_row;

/* Called once with the header (index -1) and then once per row; returns 0 to go on, or a negative
 * BS_E* code (filling err) to stop: cat_query then returns that code. */
typedef int (*cat_row_fn)(void *ctx, const cat_row *row, bs_err *err);

/* Runs exactly one read-only SQL statement (trailing semicolons and blanks allowed). A statement
 * for which sqlite3_stmt_readonly() is false, ATTACH/DETACH, transaction control (BEGIN, COMMIT,
 * SAVEPOINT, ...), a PRAGMA that sets a value, or a second statement is refused with BS_EINVAL
 * before anything runs; SQL errors are BS_ESQL with
 * the sqlite3_errmsg text. Works on CAT_RO and CAT_RW handles (on RW it still never writes). */
int cat_query(cat_db *cat, const char *sql, cat_row_fn fn, void *ctx, bs_err *err);

/* Runs PRAGMA integrity_check; BS_ESQL with its first message when the file is damaged. */
int cat_check(cat_db *cat, bs_err *err);

/* One Wannier-centre flow read back from an artifact (as in res_flow): the caller owns kpar
 * (nstring) and wcc (nstring * nband, row-major by string) and frees them with cat_flow_clear. */
typedef struct cat_flow {
    int plane, nstring, nband;
    double *kpar;
    double *wcc;
} cat_flow;

void cat_flow_clear(cat_flow *f);

/* Reads the flow of `plane` for (run_id, material_id) through the artifacts table: the HDF5 file
 * named there (relative to the catalogue's folder) and the dataset path. BS_EINVAL when there is
 * no such artifact, BS_EHDF5 when the file or datasets cannot be read. */
int cat_flow_read(cat_db *cat, int64_t run_id, const char *material_id, int plane, cat_flow *out,
                  bs_err *err);

/* ---- phase paths of families (cat_path.c; tables paths and path_*, view transitions) ---- */

/* What a stored path is about besides its computation; strings borrowed. */
typedef struct cat_path_info {
    const char *family;       /* required, at most 63 bytes */
    const char *parameter;    /* the family's parameter name */
    const char *unit;         /* its unit, may be "" or NULL */
    const char *content;      /* the family's content hash (members' content hashes and values) */
    const char *members_json; /* JSON list of {"id": ..., "value": ...} in path order, or NULL */
    int nmembers;
    int dimension;
    double x_from, x_to; /* the path's range (first and last member's values) */
    double tol_x;        /* the tolerance the path was asked for */
    int nsamples;        /* uniform gap samples asked for (0: the default) */
    int gap_mesh;        /* k-mesh asked for (0: the default) */
    cat_status status;   /* CAT_RES_OK, CAT_RES_INVALID or CAT_RES_FAILED */
    const char *message; /* why not ok, or NULL */
    int rank;            /* the rank that computed it */
    double seconds;      /* its wall time */
} cat_path_info;

/* Stores the path of info->family, computed in run_id (0: none), replacing whatever was stored for
 * that family (the paths row and all its path_* rows) in one transaction of its own: pending
 * batched writes are committed first, then the delete and the inserts are committed together, so
 * a killed job leaves either the old path or the new one, never a mixture or duplicates. r (borrowed)
 * is the computation, required for CAT_RES_OK and ignored otherwise. BS_EINVAL for a bad status or
 * family, BS_ESQL. */
int cat_path_put(cat_db *cat, int64_t run_id, const cat_path_info *info, const pp_result *r, bs_err *err);

/* *done = 1 when the stored path of family is about content and was computed at a tolerance of at
 * most tol_x (any status: a failed or invalid path is not retried by a screen with the same
 * settings, only by a finer rescreen or a change of the family), else 0. */
int cat_path_done(cat_db *cat, const char *family, const char *content, double tol_x, int *done, bs_err *err);

/* The tolerance of the stored path of family and the run that computed it; 0 and 0 when none is
 * stored (run 0 also for a path stored without a run). */
int cat_path_stored(cat_db *cat, const char *family, double *tol_x, int64_t *run_id, bs_err *err);

#endif
