/* Phase paths in the catalogue: the paths row of a family and its samples, phase intervals, events
 * (gap closings and Weyl-node events) and node tracks, written together in one transaction that
 * replaces the family's previous path. Tables in db/schema.sql, view transitions in db/views.sql. */
#include "cat_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/result_json.h"

#define CAT_NOW_SQL "strftime('%Y-%m-%dT%H:%M:%fZ','now')"

/* Statements of one path write, prepared once per call (a family is one path, so the cost of
 * preparing is nothing beside the path's computation). */
enum { PS_SAMPLE, PS_INTERVAL, PS_EVENT, PS_TRACK, PS_POINT, PS_COUNT };

static const char *const PATH_SQL[PS_COUNT] = {
    [PS_SAMPLE] = "INSERT INTO path_samples (family, sample, x, gap_direct_ev) VALUES (?1, ?2, ?3, ?4)",
    [PS_INTERVAL] = "INSERT INTO path_intervals (family, interval, x_from, x_to, x_diagnosed, gapless,"
                    " gap_direct_ev, class, z2, chern, n_weyl, confidence, diagnosis)"
                    " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13)",
    [PS_EVENT] = "INSERT INTO path_events (family, event, kind, x, x_lo, x_hi, transition, single_value,"
                 " k1, k2, k3, k_label, at_trim, nk, parity_exchange, interval_before, interval_after,"
                 " interval, track_a, track_b, text, prediction, prediction_agrees) VALUES (?1, ?2, ?3, ?4,"
                 " ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18, ?19, ?20, ?21, ?22, ?23)",
    [PS_TRACK] = "INSERT INTO path_tracks (family, track, chirality, created_with, annihilated_with,"
                 " boundary_crossings, npoints) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
    [PS_POINT] = "INSERT INTO path_track_points (family, track, point, x, k1, k2, k3)"
                 " VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)",
};

/* Node-event kinds as stored (path_events.kind), by PP_EV_*. */
static const char *const EVENT_KIND[5] = {"pair created", "pair annihilated", "boundary crossing",
                                          "node count", "net chirality"};

static void bind_int_or_null(sqlite3_stmt *st, int i, int v, int is_null)
{
    if (is_null)
        sqlite3_bind_null(st, i);
    else
        sqlite3_bind_int(st, i, v);
}

static void bind_real_or_null(sqlite3_stmt *st, int i, double v)
{
    if (isfinite(v))
        sqlite3_bind_double(st, i, v);
    else
        sqlite3_bind_null(st, i);
}

static int put_samples(cat_db *cat, sqlite3_stmt *st, const char *fam, const pp_result *r, bs_err *err)
{
    int rc = 0;
    for (int i = 0; rc == 0 && i < r->nsamples; i++) {
        sqlite3_bind_text(st, 1, fam, -1, SQLITE_STATIC);
        sqlite3_bind_int(st, 2, i);
        sqlite3_bind_double(st, 3, r->xs[i]);
        bind_real_or_null(st, 4, r->gaps[i]);
        rc = cat_step_reset(cat, st, "insert path_samples", err);
    }
    return rc;
}

static int put_intervals(cat_db *cat, sqlite3_stmt *st, const char *fam, const pp_result *r, bs_err *err)
{
    int rc = 0;
    for (int i = 0; rc == 0 && i < r->ninterval; i++) {
        const pp_interval *in = &r->intervals[i];
        const res_diag *d = &in->diag;
        char z2[16];
        cat_z2_text(d->dim, d->z2_status, d->z2, z2, sizeof z2);
        char *diag = res_to_text(d, 0);
        if (!diag) return bs_fail(err, BS_ENOMEM, "out of memory for the diagnosis of interval %d", i);
        sqlite3_bind_text(st, 1, fam, -1, SQLITE_STATIC);
        sqlite3_bind_int(st, 2, i);
        sqlite3_bind_double(st, 3, in->x_lo);
        sqlite3_bind_double(st, 4, in->x_hi);
        sqlite3_bind_double(st, 5, in->x_rep);
        sqlite3_bind_int(st, 6, in->gapless ? 1 : 0);
        bind_real_or_null(st, 7, in->gap_ev);
        sqlite3_bind_text(st, 8, res_class_name(d->cls), -1, SQLITE_STATIC);
        if (z2[0])
            sqlite3_bind_text(st, 9, z2, -1, SQLITE_TRANSIENT);
        else
            sqlite3_bind_null(st, 9);
        bind_int_or_null(st, 10, d->chern, !(d->chern_status == RES_DONE && d->dim == 2));
        sqlite3_bind_int(st, 11, d->nnodes);
        bind_real_or_null(st, 12, d->confidence);
        sqlite3_bind_text(st, 13, diag, -1, SQLITE_TRANSIENT);
        rc = cat_step_reset(cat, st, "insert path_intervals", err);
        cJSON_free(diag);
    }
    return rc;
}

static int put_closing(cat_db *cat, sqlite3_stmt *st, const char *fam, int event, const pp_closing *c,
                       bs_err *err)
{
    sqlite3_bind_text(st, 1, fam, -1, SQLITE_STATIC);
    sqlite3_bind_int(st, 2, event);
    sqlite3_bind_text(st, 3, "closing", -1, SQLITE_STATIC);
    sqlite3_bind_double(st, 4, c->x);
    sqlite3_bind_double(st, 5, c->x_lo);
    sqlite3_bind_double(st, 6, c->x_hi);
    sqlite3_bind_text(st, 7, c->kind, -1, SQLITE_STATIC);
    sqlite3_bind_int(st, 8, c->point ? 1 : 0);
    if (c->nk > 0) {
        for (int a = 0; a < 3; a++)
            sqlite3_bind_double(st, 9 + a, c->k[0][a]);
        if (c->k_label[0][0]) sqlite3_bind_text(st, 12, c->k_label[0], -1, SQLITE_STATIC);
        sqlite3_bind_int(st, 13, c->all_at_trims ? 1 : 0);
    }
    sqlite3_bind_int(st, 14, c->nk);
    bind_int_or_null(st, 15, c->parity_exchange ? 1 : 0, !c->parity_checked);
    bind_int_or_null(st, 16, c->before, c->before < 0);
    bind_int_or_null(st, 17, c->after, c->after < 0);
    sqlite3_bind_text(st, 21, c->text, -1, SQLITE_STATIC);
    if (c->predicted) sqlite3_bind_text(st, 22, c->prediction, -1, SQLITE_STATIC);
    bind_int_or_null(st, 23, c->agrees, c->agrees < 0);
    return cat_step_reset(cat, st, "insert path_events", err);
}

static int put_event(cat_db *cat, sqlite3_stmt *st, const char *fam, int event, const pp_event *e,
                     bs_err *err)
{
    if (e->kind < 0 || e->kind > PP_EV_NET)
        return bs_fail(err, BS_EINVAL, "family %s: node event of unknown kind %d", fam, e->kind);
    sqlite3_bind_text(st, 1, fam, -1, SQLITE_STATIC);
    sqlite3_bind_int(st, 2, event);
    sqlite3_bind_text(st, 3, EVENT_KIND[e->kind], -1, SQLITE_STATIC);
    sqlite3_bind_double(st, 4, e->x);
    if (e->kind <= PP_EV_BOUNDARY)
        for (int a = 0; a < 3; a++)
            sqlite3_bind_double(st, 9 + a, e->k[a]);
    sqlite3_bind_int(st, 18, e->interval);
    bind_int_or_null(st, 19, e->a, e->a < 0);
    bind_int_or_null(st, 20, e->b, e->b < 0);
    sqlite3_bind_text(st, 21, pp_event_name(e->kind), -1, SQLITE_STATIC);
    return cat_step_reset(cat, st, "insert path_events", err);
}

static int put_tracks(cat_db *cat, sqlite3_stmt *tr, sqlite3_stmt *pt, const char *fam, const pp_result *r,
                      bs_err *err)
{
    int rc = 0;
    for (int i = 0; rc == 0 && i < r->ntrack; i++) {
        const pp_track *t = &r->tracks[i];
        sqlite3_bind_text(tr, 1, fam, -1, SQLITE_STATIC);
        sqlite3_bind_int(tr, 2, i);
        sqlite3_bind_int(tr, 3, t->chirality);
        bind_int_or_null(tr, 4, t->born_with, t->born_with < 0);
        bind_int_or_null(tr, 5, t->died_with, t->died_with < 0);
        sqlite3_bind_int(tr, 6, t->crossings);
        sqlite3_bind_int(tr, 7, t->npts);
        rc = cat_step_reset(cat, tr, "insert path_tracks", err);
        for (int q = 0; rc == 0 && q < t->npts; q++) {
            sqlite3_bind_text(pt, 1, fam, -1, SQLITE_STATIC);
            sqlite3_bind_int(pt, 2, i);
            sqlite3_bind_int(pt, 3, q);
            sqlite3_bind_double(pt, 4, t->x[q]);
            for (int a = 0; a < 3; a++)
                sqlite3_bind_double(pt, 5 + a, t->k[q][a]);
            rc = cat_step_reset(cat, pt, "insert path_track_points", err);
        }
    }
    return rc;
}

/* The rows of r: samples, intervals, events (closings first, then node events, each in path order),
 * tracks and their points. */
static int put_rows(cat_db *cat, const char *fam, const pp_result *r, bs_err *err)
{
    sqlite3_stmt *st[PS_COUNT] = {0};
    int rc = 0;
    for (int i = 0; rc == 0 && i < PS_COUNT; i++)
        if (sqlite3_prepare_v2(cat->db, PATH_SQL[i], -1, &st[i], NULL) != SQLITE_OK)
            rc = cat_sql_fail(cat, err, "prepare a path statement");
    if (rc == 0) rc = put_samples(cat, st[PS_SAMPLE], fam, r, err);
    if (rc == 0) rc = put_intervals(cat, st[PS_INTERVAL], fam, r, err);
    int event = 0;
    for (int i = 0; rc == 0 && i < r->nclosing; i++)
        rc = put_closing(cat, st[PS_EVENT], fam, event++, &r->closings[i], err);
    for (int i = 0; rc == 0 && i < r->nevent; i++)
        rc = put_event(cat, st[PS_EVENT], fam, event++, &r->events[i], err);
    if (rc == 0) rc = put_tracks(cat, st[PS_TRACK], st[PS_POINT], fam, r, err);
    for (int i = 0; i < PS_COUNT; i++)
        sqlite3_finalize(st[i]);
    return rc;
}

static int put_head(cat_db *cat, int64_t run_id, const cat_path_info *in, const pp_result *r, bs_err *err)
{
    static const char sql[] =
        "INSERT INTO paths (family, run_id, status, message, parameter, unit, x_from, x_to, dimension,"
        " nmembers, members, content, tol_x, nsamples, gap_mesh, confidence, note, gap_evaluations,"
        " diagnoses, seconds, rank, finished) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12,"
        " ?13, ?14, ?15, ?16, ?17, ?18, ?19, ?20, ?21, " CAT_NOW_SQL ")";
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(cat->db, sql, -1, &st, NULL) != SQLITE_OK)
        return cat_sql_fail(cat, err, "prepare insert paths");
    sqlite3_bind_text(st, 1, in->family, -1, SQLITE_STATIC);
    if (run_id > 0) sqlite3_bind_int64(st, 2, run_id);
    sqlite3_bind_text(st, 3, cat_status_name(in->status), -1, SQLITE_STATIC);
    if (in->message) sqlite3_bind_text(st, 4, in->message, -1, SQLITE_STATIC);
    if (in->parameter) sqlite3_bind_text(st, 5, in->parameter, -1, SQLITE_STATIC);
    if (in->unit) sqlite3_bind_text(st, 6, in->unit, -1, SQLITE_STATIC);
    sqlite3_bind_double(st, 7, in->x_from);
    sqlite3_bind_double(st, 8, in->x_to);
    if (in->dimension > 0) sqlite3_bind_int(st, 9, in->dimension);
    sqlite3_bind_int(st, 10, in->nmembers);
    if (in->members_json) sqlite3_bind_text(st, 11, in->members_json, -1, SQLITE_STATIC);
    sqlite3_bind_text(st, 12, in->content, -1, SQLITE_STATIC);
    sqlite3_bind_double(st, 13, r ? r->tol_x : in->tol_x);
    if (r)
        sqlite3_bind_int(st, 14, r->nsamples);
    else if (in->nsamples > 0)
        sqlite3_bind_int(st, 14, in->nsamples);
    if (in->gap_mesh > 0) sqlite3_bind_int(st, 15, in->gap_mesh);
    if (r) {
        sqlite3_bind_double(st, 16, r->confidence);
        sqlite3_bind_text(st, 17, r->note, -1, SQLITE_STATIC);
        sqlite3_bind_int64(st, 18, r->gap_evals);
        sqlite3_bind_int64(st, 19, r->diag_runs);
    }
    sqlite3_bind_double(st, 20, in->seconds);
    sqlite3_bind_int(st, 21, in->rank);
    int rc = sqlite3_step(st) == SQLITE_DONE ? 0 : cat_sql_fail(cat, err, "insert paths");
    sqlite3_finalize(st);
    return rc;
}

int cat_path_put(cat_db *cat, int64_t run_id, const cat_path_info *in, const pp_result *r, bs_err *err)
{
    if (!in->family || !in->family[0] || strlen(in->family) > 63 || !in->content)
        return bs_fail(err, BS_EINVAL, "a path needs a family name of 1-63 bytes and a content hash");
    if (in->status != CAT_RES_OK && in->status != CAT_RES_INVALID && in->status != CAT_RES_FAILED)
        return bs_fail(err, BS_EINVAL, "family %s: a path's status is ok, invalid or failed", in->family);
    if (in->status == CAT_RES_OK && !r)
        return bs_fail(err, BS_EINVAL, "family %s: an ok path needs its computation", in->family);
    const pp_result *rows = in->status == CAT_RES_OK ? r : NULL;
    /* Pending result rows are committed first: the path then has a transaction of its own. */
    int rc = cat_flush(cat, err);
    if (rc == 0) rc = cat_txn_begin(cat, err);
    if (rc != 0) return rc;
    static const char *const del[] = {
        "DELETE FROM path_track_points WHERE family = ?1", "DELETE FROM path_tracks WHERE family = ?1",
        "DELETE FROM path_events WHERE family = ?1",       "DELETE FROM path_intervals WHERE family = ?1",
        "DELETE FROM path_samples WHERE family = ?1",      "DELETE FROM paths WHERE family = ?1"};
    for (size_t i = 0; rc == 0 && i < sizeof del / sizeof del[0]; i++) {
        sqlite3_stmt *st = NULL;
        if (sqlite3_prepare_v2(cat->db, del[i], -1, &st, NULL) != SQLITE_OK) {
            rc = cat_sql_fail(cat, err, "prepare a path delete");
            break;
        }
        sqlite3_bind_text(st, 1, in->family, -1, SQLITE_STATIC);
        rc = sqlite3_step(st) == SQLITE_DONE ? 0 : cat_sql_fail(cat, err, "delete the old path");
        sqlite3_finalize(st);
    }
    if (rc == 0) rc = put_head(cat, run_id, in, rows, err);
    if (rc == 0 && rows) rc = put_rows(cat, in->family, rows, err);
    if (rc == 0) {
        cat->pending_writes++;
        return cat_flush(cat, err);
    }
    /* Nothing of this path is kept: the transaction held only its rows. */
    sqlite3_exec(cat->db, "ROLLBACK", NULL, NULL, NULL);
    cat->in_txn = 0;
    cat->pending_writes = 0;
    cat->pending_results = 0;
    bs_err_context(err, "family %s: ", in->family);
    return rc;
}

static int path_row(cat_db *cat, const char *family, char *content, size_t len, double *tol_x,
                    int64_t *run_id, int *found, bs_err *err)
{
    sqlite3_stmt *st = NULL;
    if (sqlite3_prepare_v2(cat->db, "SELECT content, tol_x, run_id FROM paths WHERE family = ?1", -1, &st,
                           NULL) != SQLITE_OK)
        return cat_sql_fail(cat, err, "prepare select paths");
    sqlite3_bind_text(st, 1, family, -1, SQLITE_STATIC);
    int s = sqlite3_step(st), rc = 0;
    *found = s == SQLITE_ROW;
    if (s == SQLITE_ROW) {
        const unsigned char *c = sqlite3_column_text(st, 0);
        snprintf(content, len, "%s", c ? (const char *)c : "");
        *tol_x = sqlite3_column_double(st, 1);
        *run_id = sqlite3_column_int64(st, 2);
    } else if (s != SQLITE_DONE) {
        rc = cat_sql_fail(cat, err, "select paths");
    }
    sqlite3_finalize(st);
    return rc;
}

int cat_path_done(cat_db *cat, const char *family, const char *content, double tol_x, int *done, bs_err *err)
{
    *done = 0;
    char stored[80];
    double tol = 0;
    int64_t run = 0;
    int found = 0;
    int rc = path_row(cat, family, stored, sizeof stored, &tol, &run, &found, err);
    /* A relative slack: the tolerance goes through a double column and back. */
    if (rc == 0 && found && !strcmp(stored, content) && tol <= tol_x * (1 + 1e-9)) *done = 1;
    return rc;
}

int cat_path_stored(cat_db *cat, const char *family, double *tol_x, int64_t *run_id, bs_err *err)
{
    *tol_x = 0;
    *run_id = 0;
    char stored[80];
    int found = 0;
    double tol = 0;
    int64_t run = 0;
    int rc = path_row(cat, family, stored, sizeof stored, &tol, &run, &found, err);
    if (rc == 0 && found) *tol_x = tol, *run_id = run;
    return rc;
}
