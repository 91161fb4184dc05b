/* Result rows: a diagnosis (result.h) becomes one row of results (its columns and its JSON form
 * without flows, result_json.h), its Weyl nodes rows of nodes, and its Wannier-centre flows HDF5
 * datasets indexed in artifacts. */
#include "cat_internal.h"

#include "bandsieve/result_json.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct put_ctx {
    cat_db *cat;
    sqlite3_stmt *st;     /* the results INSERT being bound */
    const res_diag *diag; /* may be NULL */
    const char *mid;      /* material id, for messages */
    bs_err *err;
} put_ctx;

/* FNV-1a (common practice): spreads the parameter names over the table's slots. */
static unsigned name_hash(const char *name)
{
    unsigned h = 2166136261u;
    for (const unsigned char *p = (const unsigned char *)name; *p; p++)
        h = (h ^ *p) * 16777619u;
    return h;
}

int cat_result_params_init(cat_db *cat, bs_err *err)
{
    sqlite3_stmt *st = cat->st[CAT_ST_RESULT];
    memset(cat->result_params, 0, sizeof cat->result_params);
    int n = sqlite3_bind_parameter_count(st);
    if (2 * n > CAT_RESULT_PARAMS)
        return bs_fail(err, BS_EINVAL, "results insert: %d parameters, more than its table holds", n);
    for (int i = 1; i <= n; i++) {
        const char *name = sqlite3_bind_parameter_name(st, i);
        if (!name || strlen(name) >= sizeof cat->result_params[0].name)
            return bs_fail(err, BS_EINVAL, "results insert: parameter %d has no usable name", i);
        unsigned k = name_hash(name) & (CAT_RESULT_PARAMS - 1);
        while (cat->result_params[k].name[0] && strcmp(cat->result_params[k].name, name) != 0)
            k = (k + 1) & (CAT_RESULT_PARAMS - 1);
        if (cat->result_params[k].name[0]) continue; /* a name used twice has one index */
        memcpy(cat->result_params[k].name, name, strlen(name) + 1);
        cat->result_params[k].index = i;
    }
    return 0;
}

int cat_result_param(const cat_db *cat, const char *name)
{
    unsigned k = name_hash(name) & (CAT_RESULT_PARAMS - 1);
    /* The table is at most half full, so an empty slot ends every probe. */
    while (cat->result_params[k].name[0]) {
        if (strcmp(cat->result_params[k].name, name) == 0) return cat->result_params[k].index;
        k = (k + 1) & (CAT_RESULT_PARAMS - 1);
    }
    return 0;
}

static int param(const put_ctx *pc, const char *name)
{
    return cat_result_param(pc->cat, name);
}

static void bind_num(const put_ctx *pc, const char *name, double v)
{
    sqlite3_bind_double(pc->st, param(pc, name), v);
}

static void bind_int(const put_ctx *pc, const char *name, int v)
{
    sqlite3_bind_int(pc->st, param(pc, name), v);
}

static void bind_text(const put_ctx *pc, const char *name, const char *text)
{
    sqlite3_bind_text(pc->st, param(pc, name), text, -1, SQLITE_TRANSIENT);
}

/* Z2 indices as text (cat_z2_text), NULL unless the method is done. */
static void bind_z2(const put_ctx *pc, const char *name, res_status st, const int *nu)
{
    char text[16];
    cat_z2_text(pc->diag->dim, st, nu, text, sizeof text);
    if (text[0]) bind_text(pc, name, text);
}

/* The Chern numbers as the JSON form shows them (res_chern_shown): the 2D number, and the six
 * plane numbers (planes as in res_flow.plane) as "c0;c1;c2;c3;c4;c5". */
static void bind_chern(const put_ctx *pc)
{
    const res_diag *r = pc->diag;
    int c = 0;
    if (res_chern_shown(r, &c)) bind_int(pc, ":chern", c);
    if (!res_plane_chern_shown(r)) return;
    char text[96] = "";
    size_t len = 0;
    for (int i = 0; i < 6; i++)
        len += (size_t)snprintf(text + len, sizeof text - len, i ? ";%d" : "%d", r->plane_chern[i]);
    bind_text(pc, ":plane_chern", text);
}

/* The reference values of transport.h's result; yz and zx only in 3D. */
static void bind_transport(const put_ctx *pc)
{
    const res_transport *t = &pc->diag->transport;
    if (!pc->diag->has_transport) return;
    bind_num(pc, ":ahc_xy", t->ahc[0][0]);
    if (t->dim == 3) {
        bind_num(pc, ":ahc_yz", t->ahc[0][1]);
        bind_num(pc, ":ahc_zx", t->ahc[0][2]);
    }
    bind_text(pc, ":ahc_units", t->ahc_units);
    bind_num(pc, ":transport_fermi_ev", t->fermi_ev[0]);
    if (t->has_shc) {
        bind_num(pc, ":shc_xy", t->shc[0]);
        bind_text(pc, ":shc_units", t->shc_units);
    }
}

/* One scalar column named in the result's key table: bound to the parameter ":column". A name
 * the statement does not have is our own bug (schema and key table disagree). */
static int bind_column(void *ctx, const char *column, const res_value *v)
{
    const put_ctx *pc = ctx;
    char name[64];
    size_t len = strlen(column);
    if (len + 2 > sizeof name)
        return bs_fail(pc->err, BS_EINVAL, "results column name \"%.40s...\" too long", column);
    name[0] = ':';
    memcpy(name + 1, column, len + 1);
    int i = param(pc, name);
    if (i == 0)
        return bs_fail(pc->err, BS_EINVAL, "results has no column \"%s\" (schema and key table disagree)",
                       column);
    if (v->type == RES_VALUE_INT)
        sqlite3_bind_int64(pc->st, i, v->i);
    else if (v->type == RES_VALUE_REAL && !isfinite(v->x))
        sqlite3_bind_null(pc->st, i); /* as JSON's null */
    else if (v->type == RES_VALUE_REAL)
        sqlite3_bind_double(pc->st, i, v->x);
    else
        sqlite3_bind_text(pc->st, i, v->text, -1, SQLITE_TRANSIENT);
    return 0;
}

/* The diagnosis columns of one result: the scalar ones through the key table, then those the
 * catalogue writes in a form of its own. */
static int bind_diag(const put_ctx *pc)
{
    const res_diag *r = pc->diag;
    put_ctx ctx = *pc;
    int rc = res_for_each_column(r, bind_column, &ctx);
    if (rc != 0) return rc;
    /* A JSON list text, so that json_extract(k_gap_direct, '$[0]') reads one component. */
    char k[96];
    snprintf(k, sizeof k, "[%.10g,%.10g,%.10g]", r->k_gap_direct[0], r->k_gap_direct[1], r->k_gap_direct[2]);
    bind_text(pc, ":k_gap_direct", k);
    bind_z2(pc, ":z2", r->z2_status, r->z2);
    bind_z2(pc, ":z2_parity", r->z2_parity_status, r->z2_parity);
    bind_z2(pc, ":z2_wcc", r->z2_wcc_status, r->z2_wcc);
    bind_chern(pc);
    /* NULL when unknown: no space group found (0), no mirror Chern number computed. */
    if (r->spacegroup > 0) bind_int(pc, ":spacegroup", r->spacegroup);
    if (r->mirror_chern_status == RES_DONE) bind_int(pc, ":mirror_chern", r->mirror_chern);
    int nweyl = 0;
    for (int i = 0; i < r->nnodes; i++)
        nweyl += res_node_is_weyl(r, i);
    bind_int(pc, ":n_weyl", nweyl);
    bind_transport(pc);
    return 0;
}

/* Binds every results column from the arguments and the diagnosis; the diagnosis column is the
 * JSON form without the bulky flows, which live in the artifact file: stored (borrowed) when the
 * caller has it, else printed into *diag_text (the caller frees it with cJSON_free). */
static int bind_row(const put_ctx *pc, int64_t run_id, cat_status status, const char *message, int rank,
                    double seconds, const char *stored, const char *content, char **diag_text)
{
    sqlite3_stmt *st = pc->st;
    sqlite3_bind_int64(st, param(pc, ":run_id"), run_id);
    /* The caller's strings are bound without a copy: they outlive the statement's bindings,
     * which cat_result_put_stored clears before it returns. */
    sqlite3_bind_text(st, param(pc, ":material_id"), pc->mid, -1, SQLITE_STATIC);
    if (content) sqlite3_bind_text(st, param(pc, ":content"), content, -1, SQLITE_STATIC);
    sqlite3_bind_text(st, param(pc, ":status"), cat_status_name(status), -1, SQLITE_STATIC);
    char now[32];
    sqlite3_bind_text(st, param(pc, ":finished"), cat_now_text(pc->cat, now, sizeof now), -1,
                      SQLITE_TRANSIENT);
    if (message) sqlite3_bind_text(st, param(pc, ":message"), message, -1, SQLITE_STATIC);
    if (rank >= 0) sqlite3_bind_int(st, param(pc, ":rank"), rank);
    if (seconds >= 0)
        bind_num(pc, ":seconds", seconds);
    else if (pc->diag)
        bind_num(pc, ":seconds", pc->diag->seconds);
    if (!pc->diag) return 0;
    int rc = bind_diag(pc);
    if (rc != 0) return rc;
    if (stored) {
        sqlite3_bind_text(st, param(pc, ":diagnosis"), stored, -1, SQLITE_STATIC);
        return 0;
    }
    *diag_text = res_to_text(pc->diag, 0);
    if (!*diag_text)
        return bs_fail(pc->err, BS_ENOMEM, "material %s: out of memory printing the diagnosis", pc->mid);
    sqlite3_bind_text(st, param(pc, ":diagnosis"), *diag_text, -1, SQLITE_STATIC);
    return 0;
}

/* Removes the result of (run, material) with its nodes and artifact rows (children first, for
 * the foreign keys). */
static int delete_result(cat_db *cat, int64_t run_id, const char *mid, bs_err *err)
{
    int rc = 0;
    const int which[3] = {CAT_ST_DEL_NODES, CAT_ST_DEL_ARTS, CAT_ST_DEL_RESULT};
    for (int i = 0; i < 3 && rc == 0; i++) {
        sqlite3_stmt *st = cat->st[which[i]];
        sqlite3_bind_int64(st, 1, run_id);
        sqlite3_bind_text(st, 2, mid, -1, SQLITE_TRANSIENT);
        rc = cat_step_reset(cat, st, "replacing an earlier result", err);
    }
    return rc;
}

/* 1 when (run, material) already has a row, 0 when not, negative on error. */
static int result_exists(cat_db *cat, int64_t run_id, const char *mid, bs_err *err)
{
    sqlite3_stmt *st = cat->st[CAT_ST_EXISTS];
    sqlite3_bind_int64(st, 1, run_id);
    sqlite3_bind_text(st, 2, mid, -1, SQLITE_TRANSIENT);
    int s = sqlite3_step(st);
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    if (s == SQLITE_ROW) return 1;
    if (s == SQLITE_DONE) return 0;
    return cat_sql_fail(cat, err, "looking for an earlier result");
}

/* The Weyl nodes of r (as the JSON form lists them under weyl_nodes) into the nodes table. */
static int insert_nodes(cat_db *cat, int64_t run_id, const char *mid, const res_diag *r, bs_err *err)
{
    sqlite3_stmt *st = cat->st[CAT_ST_NODE];
    int rc = 0;
    for (int i = 0, row = 0; r && i < r->nnodes && rc == 0; i++) {
        if (!res_node_is_weyl(r, i)) continue;
        const res_node *n = &r->nodes[i];
        sqlite3_bind_int64(st, 1, run_id);
        sqlite3_bind_text(st, 2, mid, -1, SQLITE_TRANSIENT);
        sqlite3_bind_int(st, 3, row++);
        for (int d = 0; d < 3; d++)
            sqlite3_bind_double(st, 4 + d, n->k[d]);
        sqlite3_bind_int(st, 7, n->chirality);
        sqlite3_bind_double(st, 8, n->energy_ev);
        sqlite3_bind_double(st, 9, n->gap_ev);
        rc = cat_step_reset(cat, st, "writing a Weyl node", err);
    }
    return rc;
}

static int insert_flows(cat_db *cat, int64_t run_id, const char *mid, const res_flow *flows, int n,
                        bs_err *err)
{
    if (n == 0) return 0;
    int session = 0;
    int rc = cat_session_of(cat, run_id, &session, err);
    sqlite3_stmt *st = cat->st[CAT_ST_ARTIFACT];
    for (int i = 0; i < n && rc == 0; i++) {
        char file[512], h5path[512];
        rc = cat_artifact_write(cat, run_id, session, mid, &flows[i], file, sizeof file, h5path,
                                sizeof h5path, err);
        if (rc != 0) break;
        sqlite3_bind_int64(st, 1, run_id);
        sqlite3_bind_text(st, 2, mid, -1, SQLITE_TRANSIENT);
        sqlite3_bind_text(st, 3, "wcc_flow", -1, SQLITE_STATIC);
        sqlite3_bind_int(st, 4, flows[i].plane);
        sqlite3_bind_text(st, 5, file, -1, SQLITE_TRANSIENT);
        sqlite3_bind_text(st, 6, h5path, -1, SQLITE_TRANSIENT);
        sqlite3_bind_int(st, 7, flows[i].nstring);
        sqlite3_bind_int(st, 8, flows[i].nband);
        rc = cat_step_reset(cat, st, "indexing an artifact", err);
    }
    return rc;
}

/* A material seen first in a result gets a row with the sizes the diagnosis reports; values out
 * of range are left NULL, never an error. */
static int ensure_material(cat_db *cat, const char *mid, const res_diag *diag, bs_err *err)
{
    sqlite3_stmt *st = cat->st[CAT_ST_MAT_ENSURE];
    sqlite3_bind_text(st, 1, mid, -1, SQLITE_TRANSIENT);
    if (diag && (diag->dim == 2 || diag->dim == 3)) sqlite3_bind_int(st, 2, diag->dim);
    if (diag && diag->norb >= 1) sqlite3_bind_int(st, 3, diag->norb);
    if (diag && diag->nocc >= 1) sqlite3_bind_int(st, 4, diag->nocc);
    return cat_step_reset(cat, st, "recording the material", err);
}

/* The bound results INSERT, stepped and reset with its bindings kept (a retry steps it again).
 * 0, or the extended SQLite code of the failure. */
static int step_keep(sqlite3_stmt *st)
{
    int s = sqlite3_step(st);
    int code = s == SQLITE_DONE ? 0 : sqlite3_extended_errcode(sqlite3_db_handle(st));
    sqlite3_reset(st);
    return code;
}

/* The results row, inserted first without looking: the common case (a new row of a material the
 * coordinator recorded) costs one statement. Only when the insert hits a constraint is the cause
 * dealt with and the insert repeated: an earlier row of the same (run, material) is replaced
 * (unique key), a material never recorded gets a row from the diagnosis (foreign key). */
static int insert_result(cat_db *cat, int64_t run_id, const char *mid, const res_diag *diag, bs_err *err)
{
    sqlite3_stmt *ins = cat->st[CAT_ST_RESULT];
    int code = step_keep(ins);
    if (code == SQLITE_CONSTRAINT_FOREIGNKEY) {
        int rc = ensure_material(cat, mid, diag, err);
        if (rc != 0) return rc;
        code = step_keep(ins);
    }
    if (code == SQLITE_CONSTRAINT_UNIQUE) {
        int exists = result_exists(cat, run_id, mid, err);
        if (exists < 0) return exists;
        if (exists) {
            int rc = delete_result(cat, run_id, mid, err);
            if (rc != 0) return rc;
            code = step_keep(ins);
        }
    }
    return code == 0 ? 0 : cat_sql_fail(cat, err, "writing the result");
}

/* All statements of one result in the batch transaction: either the whole result (row, nodes,
 * artifacts) is in the batch or none of it. A failure here is an SQLite or HDF5 error; it is undone by
 * deleting what this put wrote. (A savepoint per put would do the same, but SQLite allocates a journal buffer
 * for each one, which cost a third of the write rate in bench_catalogue.) */
static int write_row(cat_db *cat, int64_t run_id, const char *mid, const res_diag *diag, bs_err *err)
{
    int rc = cat_txn_begin(cat, err);
    if (rc != 0) return rc;
    rc = insert_result(cat, run_id, mid, diag, err);
    if (rc == 0) rc = insert_nodes(cat, run_id, mid, diag, err);
    if (rc == 0 && diag) rc = insert_flows(cat, run_id, mid, diag->flows, diag->nflows, err);
    if (rc == 0) return 0;
    if (sqlite3_get_autocommit(cat->db)) {
        /* SQLite rolled the whole transaction back (disk full, I/O error): the batch is gone. */
        bs_err_context(err, "the open batch of %d results was rolled back: ", cat->pending_results);
        cat->in_txn = 0;
        cat->pending_writes = cat->pending_results = 0;
    } else {
        delete_result(cat, run_id, mid, NULL);
    }
    return rc;
}

static int check_args(cat_db *cat, const char *mid, cat_status status, const res_diag *diag, bs_err *err)
{
    if (cat->mode != CAT_RW)
        return bs_fail(err, BS_EINVAL, "%s: results need a catalogue opened for writing", cat->path);
    if (!mid || !*mid || strlen(mid) > 127)
        return bs_fail(err, BS_EINVAL, "result: expected a material id of 1 to 127 bytes");
    if (!cat_status_name(status))
        return bs_fail(err, BS_EINVAL, "material %s: result status %d is not a cat_status", mid, (int)status);
    if (status == CAT_RES_OK && !diag)
        return bs_fail(err, BS_EINVAL, "material %s: an ok result needs a diagnosis", mid);
    if (diag && diag->id[0] && strcmp(diag->id, mid) != 0)
        return bs_fail(err, BS_EINVAL, "material %s: the diagnosis is for \"%s\"", mid, diag->id);
    if (diag && !res_class_name(diag->cls))
        return bs_fail(err, BS_EINVAL, "material %s: class %d is not a res_class", mid, (int)diag->cls);
    return 0;
}

int cat_result_put(cat_db *cat, int64_t run_id, const char *material_id, cat_status status,
                   const char *message, const res_diag *diag, int rank, double seconds, bs_err *err)
{
    return cat_result_put_stored(cat, run_id, material_id, status, message, diag, NULL, NULL, rank, seconds,
                                 err);
}

int cat_result_put_stored(cat_db *cat, int64_t run_id, const char *material_id, cat_status status,
                          const char *message, const res_diag *diag, const char *stored_text,
                          const char *content, int rank, double seconds, bs_err *err)
{
    int rc = check_args(cat, material_id, status, diag, err);
    if (rc != 0) return rc;
    put_ctx pc = {cat, cat->st[CAT_ST_RESULT], diag, material_id, err};
    char *diag_text = NULL;
    rc = bind_row(&pc, run_id, status, message, rank, seconds, stored_text, content, &diag_text);
    if (rc == 0) rc = write_row(cat, run_id, material_id, diag, err);
    sqlite3_reset(pc.st); /* a failed bind leaves values behind; the next put starts clean */
    sqlite3_clear_bindings(pc.st);
    cJSON_free(diag_text);
    if (rc != 0) return rc;
    return cat_txn_note(cat, 1, err);
}

int cat_result_put_text(cat_db *cat, int64_t run_id, const char *material_id, cat_status status,
                        const char *message, const char *text, size_t len, int rank, double seconds,
                        bs_err *err)
{
    if (!text) return cat_result_put(cat, run_id, material_id, status, message, NULL, rank, seconds, err);
    res_diag r;
    res_init(&r);
    int rc = res_from_text(text, len, &r, err);
    if (rc != 0)
        bs_err_context(err, "material %s: ", material_id ? material_id : "?");
    else
        rc = cat_result_put(cat, run_id, material_id, status, message, &r, rank, seconds, err);
    res_clear(&r);
    return rc;
}
