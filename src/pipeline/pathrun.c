/* The path phase of a screen (pathrun.h): families as units of work, their paths computed by the
 * workers with the phase-path code and stored by the coordinator alone. The coordinator polls with
 * MPI_Iprobe and naps between polls, as the member phase does (run.c), so that it leaves its core
 * to a worker. */
#include "pathrun.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <cjson/cJSON.h>

#include "bandsieve/clock.h"
#include "bandsieve/result_json.h"
#include "bandsieve/sha256.h"

/* Coordinator -> worker in the path phase (the worker -> coordinator direction is the member
 * phase's outcome message, kind 2). Tags apart from run.c's, which are 11..13. */
enum { TAG_PATH_WORK = 21, TAG_PATH_STOP = 22 };

typedef struct path_work {
    int family; /* index in the family list both sides build from the set */
    char name[64];
    pl_path_task task;
} path_work;

/* ---- families ---- */

typedef struct member_ref {
    int index;
    double value;
} member_ref;

static int by_value(const void *a, const void *b)
{
    const member_ref *x = a, *y = b;
    return x->value < y->value ? -1 : x->value > y->value ? 1 : x->index - y->index;
}

void pl_families_free(pl_family *fams, int n)
{
    for (int i = 0; fams && i < n; i++) {
        free(fams[i].index);
        free(fams[i].value);
        free(fams[i].members);
    }
    free(fams);
}

/* Members, content hash and member list of family f->name. */
static int family_fill(const ms_set *set, pl_family *f, bs_err *err)
{
    int n = 0, total = ms_count(set);
    member_ref *refs = calloc((size_t)total + 1, sizeof *refs);
    if (!refs) return bs_fail(err, BS_ENOMEM, "out of memory for family %s", f->name);
    for (int i = 0; i < total; i++) {
        const ms_entry *e = ms_entry_at(set, i);
        if (!e->has_family || strcmp(e->family, f->name) != 0) continue;
        if (n == 0) {
            snprintf(f->param, sizeof f->param, "%s", e->family_param);
            snprintf(f->unit, sizeof f->unit, "%s", e->family_unit);
            f->dim = e->dim;
        }
        refs[n].index = i;
        refs[n].value = e->family_value;
        n++;
    }
    qsort(refs, (size_t)n, sizeof *refs, by_value);
    f->n = n;
    f->index = malloc(((size_t)n + 1) * sizeof *f->index);
    f->value = malloc(((size_t)n + 1) * sizeof *f->value);
    cJSON *list = cJSON_CreateArray();
    int rc =
        f->index && f->value && list ? 0 : bs_fail(err, BS_ENOMEM, "out of memory for family %s", f->name);
    bs_sha256 h;
    bs_sha256_init(&h);
    for (int i = 0; rc == 0 && i < n; i++) {
        const ms_entry *e = ms_entry_at(set, refs[i].index);
        f->index[i] = refs[i].index;
        f->value[i] = refs[i].value;
        char content[65], line[300];
        rc = ms_content(set, refs[i].index, content, err);
        if (rc != 0) break;
        int len = snprintf(line, sizeof line, "%s %s %.17g\n", e->id, content, refs[i].value);
        bs_sha256_update(&h, line, (size_t)len);
        cJSON *m = cJSON_CreateObject();
        cJSON_AddItemToArray(list, m);
        cJSON_AddStringToObject(m, "id", e->id);
        cJSON_AddNumberToObject(m, "value", refs[i].value);
    }
    unsigned char digest[BS_SHA256_BYTES];
    bs_sha256_final(&h, digest);
    bs_sha256_hex(digest, f->content);
    if (rc == 0) {
        f->members = cJSON_PrintUnformatted(list);
        if (!f->members) rc = bs_fail(err, BS_ENOMEM, "out of memory for family %s", f->name);
    }
    cJSON_Delete(list);
    free(refs);
    return rc;
}

int pl_families(const ms_set *set, pl_family **fams, int *n, bs_err *err)
{
    *fams = NULL;
    *n = 0;
    int cap = ms_count(set) + 1;
    const char **names = calloc((size_t)cap, sizeof *names);
    if (!names) return bs_fail(err, BS_ENOMEM, "out of memory for the families");
    int nf = ms_families(set, names, cap);
    pl_family *out = calloc((size_t)nf + 1, sizeof *out);
    int rc = out ? 0 : bs_fail(err, BS_ENOMEM, "out of memory for the families");
    for (int i = 0; rc == 0 && i < nf; i++) {
        snprintf(out[i].name, sizeof out[i].name, "%s", names[i]);
        rc = family_fill(set, &out[i], err);
    }
    free(names);
    if (rc != 0) {
        pl_families_free(out, nf);
        return rc;
    }
    *fams = out;
    *n = nf;
    return 0;
}

/* ---- one path ---- */

void pl_path_compute(const ms_set *set, const pl_family *f, const pl_path_task *t, int rank, pl_outcome *out)
{
    memset(out, 0, sizeof *out);
    double t0 = bs_now();
    snprintf(out->id, sizeof out->id, "%s", f->name);
    out->rank = rank;
    bs_err err;
    bs_err_clear(&err);
    tb_model **ms = calloc((size_t)f->n + 1, sizeof *ms);
    int rc = ms ? 0 : bs_fail(&err, BS_ENOMEM, "out of memory for the members");
    if (rc == 0 && f->n < 2)
        rc = bs_fail(&err, BS_EINVAL, "family %s has %d member(s); a path needs two or more", f->name, f->n);
    for (int i = 0; rc == 0 && i < f->n; i++) {
        rc = ms_read(set, f->index[i], &ms[i], &err);
        /* An entry whose HDF5 data cannot be read is bad input, as in the member phase. */
        if (rc == BS_EHDF5) rc = BS_EPARSE;
    }
    pp_source *src = NULL;
    if (rc == 0) rc = pp_source_members((const tb_model *const *)ms, f->value, f->n, &src, &err);
    pp_opts o;
    pp_opts_init(&o);
    /* The settings of `bandsieve path --family`, so that the two agree. */
    o.diag.seed = 1;
    o.tol_x = t->tol_x;
    o.nsamples = t->nsamples;
    o.track_steps = t->track_steps;
    o.gap_mesh = t->mesh;
    o.diag.mesh = t->mesh;
    pp_result r;
    pp_result_init(&r);
    if (rc == 0) rc = pp_run(src, f->param, f->value[0], f->value[f->n - 1], &o, &r, &err);
    if (rc == 0) {
        out->json = pl_path_to_text(&r);
        if (!out->json) rc = bs_fail(&err, BS_ENOMEM, "out of memory formatting the path");
    }
    if (rc != 0) bs_err_context(&err, "family %s: ", f->name);
    out->code = rc;
    if (rc != 0) snprintf(out->message, sizeof out->message, "%s", err.msg);
    pp_result_clear(&r);
    pp_source_free(src);
    for (int i = 0; ms && i < f->n; i++)
        tb_model_free(ms[i]);
    free(ms);
    out->seconds = bs_now() - t0;
}

/* ---- the wire form ---- */

static cJSON *vec(const double *v, int n)
{
    return cJSON_CreateDoubleArray(v, n);
}

static cJSON *closing_json(const pp_closing *c)
{
    cJSON *o = cJSON_CreateObject();
    double xs[4] = {c->x_lo, c->x_hi, c->x, c->gap_ev};
    cJSON_AddItemToObject(o, "x", vec(xs, 4));
    int ints[10] = {c->point,  c->nk,    c->all_at_trims, c->parity_checked, c->parity_exchange,
                    c->before, c->after, c->predicted,    c->predicted_kind, c->agrees};
    cJSON_AddItemToObject(o, "flags", cJSON_CreateIntArray(ints, 10));
    cJSON_AddItemToObject(o, "trim_changed", cJSON_CreateIntArray(c->trim_changed, 8));
    cJSON *ks = cJSON_AddArrayToObject(o, "k");
    for (int q = 0; q < c->nk && q < PP_MAX_KPTS; q++) {
        cJSON *kk = cJSON_CreateArray();
        cJSON_AddItemToArray(kk, vec(c->k[q], 3));
        cJSON_AddItemToArray(kk, cJSON_CreateNumber(c->at_trim[q]));
        cJSON_AddItemToArray(kk, cJSON_CreateString(c->k_label[q]));
        cJSON_AddItemToArray(ks, kk);
    }
    cJSON_AddStringToObject(o, "prediction", c->prediction);
    cJSON_AddStringToObject(o, "kind", c->kind);
    cJSON_AddStringToObject(o, "text", c->text);
    return o;
}

static cJSON *interval_json(const pp_interval *in)
{
    cJSON *o = cJSON_CreateObject();
    double xs[4] = {in->x_lo, in->x_hi, in->x_rep, in->gap_ev};
    cJSON_AddItemToObject(o, "x", vec(xs, 4));
    cJSON_AddNumberToObject(o, "gapless", in->gapless);
    cJSON_AddNumberToObject(o, "diag_rc", in->diag_rc);
    cJSON_AddItemToObject(o, "diag", res_to_json(&in->diag, 0));
    return o;
}

static cJSON *track_json(const pp_track *t)
{
    cJSON *o = cJSON_CreateObject();
    int ints[4] = {t->chirality, t->born_with, t->died_with, t->crossings};
    cJSON_AddItemToObject(o, "ints", cJSON_CreateIntArray(ints, 4));
    cJSON_AddItemToObject(o, "x", vec(t->x, t->npts));
    cJSON *k = cJSON_AddArrayToObject(o, "k");
    for (int q = 0; q < t->npts; q++)
        cJSON_AddItemToArray(k, vec(t->k[q], 3));
    return o;
}

static cJSON *event_json(const pp_event *e)
{
    cJSON *o = cJSON_CreateArray();
    double v[8] = {e->kind, e->x, e->k[0], e->k[1], e->k[2], e->a, e->b, e->interval};
    cJSON_AddItemToArray(o, vec(v, 8));
    return o;
}

char *pl_path_to_text(const pp_result *r)
{
    cJSON *j = cJSON_CreateObject();
    if (!j) return NULL;
    double head[5] = {r->x_lo, r->x_hi, r->tol_x, r->confidence, r->seconds};
    cJSON_AddItemToObject(j, "head", vec(head, 5));
    double counts[3] = {r->dim, (double)r->gap_evals, (double)r->diag_runs};
    cJSON_AddItemToObject(j, "counts", vec(counts, 3));
    cJSON_AddStringToObject(j, "param", r->param);
    cJSON_AddStringToObject(j, "note", r->note);
    cJSON_AddItemToObject(j, "xs", vec(r->xs, r->nsamples));
    cJSON_AddItemToObject(j, "gaps", vec(r->gaps, r->nsamples));
    cJSON *a = cJSON_AddArrayToObject(j, "intervals");
    for (int i = 0; i < r->ninterval; i++)
        cJSON_AddItemToArray(a, interval_json(&r->intervals[i]));
    a = cJSON_AddArrayToObject(j, "closings");
    for (int i = 0; i < r->nclosing; i++)
        cJSON_AddItemToArray(a, closing_json(&r->closings[i]));
    a = cJSON_AddArrayToObject(j, "tracks");
    for (int i = 0; i < r->ntrack; i++)
        cJSON_AddItemToArray(a, track_json(&r->tracks[i]));
    a = cJSON_AddArrayToObject(j, "events");
    for (int i = 0; i < r->nevent; i++)
        cJSON_AddItemToArray(a, event_json(&r->events[i]));
    char *text = cJSON_PrintUnformatted(j);
    cJSON_Delete(j);
    return text;
}

/* Reader helpers: each returns -1 when the item is missing or of the wrong shape. A null number
 * (cJSON writes NaN and infinities as null) reads back as NaN. */
static int get_doubles(const cJSON *a, double *out, int n)
{
    if (!cJSON_IsArray(a) || cJSON_GetArraySize(a) != n) return -1;
    int i = 0;
    for (const cJSON *c = a->child; c; c = c->next, i++) {
        if (cJSON_IsNumber(c))
            out[i] = c->valuedouble;
        else if (cJSON_IsNull(c))
            out[i] = NAN;
        else
            return -1;
    }
    return 0;
}

static int get_ints(const cJSON *a, int *out, int n)
{
    double v[16];
    if (n > 16 || get_doubles(a, v, n) != 0) return -1;
    for (int i = 0; i < n; i++)
        out[i] = (int)v[i];
    return 0;
}

static int get_string(const cJSON *o, const char *key, char *buf, size_t len)
{
    const char *s = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(o, key));
    if (!s) return -1;
    snprintf(buf, len, "%s", s);
    return 0;
}

static int read_closing(const cJSON *o, pp_closing *c)
{
    double xs[4];
    int fl[10];
    if (get_doubles(cJSON_GetObjectItemCaseSensitive(o, "x"), xs, 4) ||
        get_ints(cJSON_GetObjectItemCaseSensitive(o, "flags"), fl, 10) ||
        get_ints(cJSON_GetObjectItemCaseSensitive(o, "trim_changed"), c->trim_changed, 8))
        return -1;
    c->x_lo = xs[0], c->x_hi = xs[1], c->x = xs[2], c->gap_ev = xs[3];
    c->point = fl[0], c->nk = fl[1], c->all_at_trims = fl[2], c->parity_checked = fl[3];
    c->parity_exchange = fl[4], c->before = fl[5], c->after = fl[6], c->predicted = fl[7];
    c->predicted_kind = fl[8], c->agrees = fl[9];
    const cJSON *ks = cJSON_GetObjectItemCaseSensitive(o, "k");
    if (c->nk < 0 || c->nk > PP_MAX_KPTS || !cJSON_IsArray(ks) || cJSON_GetArraySize(ks) != c->nk) return -1;
    int q = 0;
    for (const cJSON *kk = ks->child; kk; kk = kk->next, q++) {
        const cJSON *lab = cJSON_GetArrayItem(kk, 2);
        if (get_doubles(cJSON_GetArrayItem(kk, 0), c->k[q], 3) ||
            !cJSON_IsNumber(cJSON_GetArrayItem(kk, 1)) || !cJSON_IsString(lab))
            return -1;
        c->at_trim[q] = cJSON_GetArrayItem(kk, 1)->valueint;
        snprintf(c->k_label[q], sizeof c->k_label[q], "%s", lab->valuestring);
    }
    if (get_string(o, "prediction", c->prediction, sizeof c->prediction) ||
        get_string(o, "kind", c->kind, sizeof c->kind) || get_string(o, "text", c->text, sizeof c->text))
        return -1;
    return 0;
}

static int read_interval(const cJSON *o, pp_interval *in, bs_err *err)
{
    double xs[4];
    const cJSON *g = cJSON_GetObjectItemCaseSensitive(o, "gapless");
    const cJSON *d = cJSON_GetObjectItemCaseSensitive(o, "diag_rc");
    if (get_doubles(cJSON_GetObjectItemCaseSensitive(o, "x"), xs, 4) || !cJSON_IsNumber(g) ||
        !cJSON_IsNumber(d))
        return bs_fail(err, BS_EPARSE, "path: malformed interval");
    in->x_lo = xs[0], in->x_hi = xs[1], in->x_rep = xs[2], in->gap_ev = xs[3];
    in->gapless = g->valueint;
    in->diag_rc = d->valueint;
    int rc = res_from_json(cJSON_GetObjectItemCaseSensitive(o, "diag"), &in->diag, err);
    if (rc != 0) bs_err_context(err, "path interval: ");
    return rc;
}

static int read_track(const cJSON *o, pp_track *t)
{
    int ints[4];
    const cJSON *x = cJSON_GetObjectItemCaseSensitive(o, "x"), *k = cJSON_GetObjectItemCaseSensitive(o, "k");
    if (get_ints(cJSON_GetObjectItemCaseSensitive(o, "ints"), ints, 4) || !cJSON_IsArray(x) ||
        !cJSON_IsArray(k))
        return -1;
    t->chirality = ints[0], t->born_with = ints[1], t->died_with = ints[2], t->crossings = ints[3];
    int n = cJSON_GetArraySize(x);
    if (cJSON_GetArraySize(k) != n) return -1;
    t->x = malloc(((size_t)n + 1) * sizeof *t->x);
    t->k = malloc(((size_t)n + 1) * sizeof *t->k);
    if (!t->x || !t->k) return -2;
    t->npts = n;
    if (get_doubles(x, t->x, n)) return -1;
    int q = 0;
    for (const cJSON *kk = k->child; kk; kk = kk->next, q++)
        if (get_doubles(kk, t->k[q], 3)) return -1;
    return 0;
}

static int read_event(const cJSON *o, pp_event *e)
{
    double v[8];
    if (get_doubles(cJSON_GetArrayItem(o, 0), v, 8)) return -1;
    e->kind = (int)v[0], e->x = v[1], e->k[0] = v[2], e->k[1] = v[3], e->k[2] = v[4];
    e->a = (int)v[5], e->b = (int)v[6], e->interval = (int)v[7];
    return 0;
}

/* An array item of j as a counted, allocated array of elements of size `size`. */
static int alloc_list(const cJSON *j, const char *key, size_t size, void **out, int *n)
{
    const cJSON *a = cJSON_GetObjectItemCaseSensitive(j, key);
    if (!cJSON_IsArray(a)) return -1;
    *n = 0;
    int count = cJSON_GetArraySize(a);
    *out = calloc((size_t)count + 1, size);
    if (!*out) return -2;
    return count;
}

static int read_lists(const cJSON *j, pp_result *r, bs_err *err)
{
    void *p = NULL;
    int cnt = alloc_list(j, "intervals", sizeof(pp_interval), &p, &r->ninterval);
    if (cnt < 0) return bs_fail(err, cnt == -2 ? BS_ENOMEM : BS_EPARSE, "path: malformed 'intervals'");
    r->intervals = p;
    for (const cJSON *c = cJSON_GetObjectItemCaseSensitive(j, "intervals")->child; c; c = c->next) {
        res_init(&r->intervals[r->ninterval].diag);
        r->ninterval++;
        int rc = read_interval(c, &r->intervals[r->ninterval - 1], err);
        if (rc != 0) return rc;
    }
    cnt = alloc_list(j, "closings", sizeof(pp_closing), &p, &r->nclosing);
    if (cnt < 0) return bs_fail(err, cnt == -2 ? BS_ENOMEM : BS_EPARSE, "path: malformed 'closings'");
    r->closings = p;
    for (const cJSON *c = cJSON_GetObjectItemCaseSensitive(j, "closings")->child; c; c = c->next)
        if (read_closing(c, &r->closings[r->nclosing++]) != 0)
            return bs_fail(err, BS_EPARSE, "path: malformed closing %d", r->nclosing - 1);
    cnt = alloc_list(j, "tracks", sizeof(pp_track), &p, &r->ntrack);
    if (cnt < 0) return bs_fail(err, cnt == -2 ? BS_ENOMEM : BS_EPARSE, "path: malformed 'tracks'");
    r->tracks = p;
    for (const cJSON *c = cJSON_GetObjectItemCaseSensitive(j, "tracks")->child; c; c = c->next) {
        int rc = read_track(c, &r->tracks[r->ntrack++]);
        if (rc != 0)
            return bs_fail(err, rc == -2 ? BS_ENOMEM : BS_EPARSE, "path: malformed track %d", r->ntrack - 1);
    }
    cnt = alloc_list(j, "events", sizeof(pp_event), &p, &r->nevent);
    if (cnt < 0) return bs_fail(err, cnt == -2 ? BS_ENOMEM : BS_EPARSE, "path: malformed 'events'");
    r->events = p;
    for (const cJSON *c = cJSON_GetObjectItemCaseSensitive(j, "events")->child; c; c = c->next)
        if (read_event(c, &r->events[r->nevent++]) != 0)
            return bs_fail(err, BS_EPARSE, "path: malformed event %d", r->nevent - 1);
    return 0;
}

static int read_head(const cJSON *j, pp_result *r, bs_err *err)
{
    double head[5], counts[3];
    if (get_doubles(cJSON_GetObjectItemCaseSensitive(j, "head"), head, 5) ||
        get_doubles(cJSON_GetObjectItemCaseSensitive(j, "counts"), counts, 3) ||
        get_string(j, "param", r->param, sizeof r->param) || get_string(j, "note", r->note, sizeof r->note))
        return bs_fail(err, BS_EPARSE, "path: malformed head");
    r->x_lo = head[0], r->x_hi = head[1], r->tol_x = head[2], r->confidence = head[3], r->seconds = head[4];
    r->dim = (int)counts[0], r->gap_evals = (long long)counts[1], r->diag_runs = (long long)counts[2];
    const cJSON *xs = cJSON_GetObjectItemCaseSensitive(j, "xs");
    int n = cJSON_GetArraySize(xs);
    r->xs = malloc(((size_t)n + 1) * sizeof *r->xs);
    r->gaps = malloc(((size_t)n + 1) * sizeof *r->gaps);
    if (!r->xs || !r->gaps) return bs_fail(err, BS_ENOMEM, "out of memory reading a path");
    r->nsamples = n;
    if (get_doubles(xs, r->xs, n) || get_doubles(cJSON_GetObjectItemCaseSensitive(j, "gaps"), r->gaps, n))
        return bs_fail(err, BS_EPARSE, "path: malformed samples");
    return 0;
}

int pl_path_from_text(const char *text, pp_result *r, bs_err *err)
{
    cJSON *j = cJSON_Parse(text);
    if (!j) return bs_fail(err, BS_EPARSE, "path: malformed JSON");
    int rc = read_head(j, r, err);
    if (rc == 0) rc = read_lists(j, r, err);
    cJSON_Delete(j);
    if (rc != 0) pp_result_clear(r);
    return rc;
}

/* ---- the coordinator ---- */

typedef struct path_coord {
    const pl_opts *o;
    cat_db *cat;
    int64_t run_id;
    pl_family *fams;
    int nfam;
    int *todo; /* family indices to compute, in order */
    int ntodo, next;
    pl_path_task task;
    pl_counts *counts;
    pl_journal *journal;
    double t0;
    int written; /* paths stored by this job */
} path_coord;

/* The tolerance of a family's path in this job: --path-tol, else the default for a screen, and for
 * a rescreen a tenth of the stored path's (so that a rescreen always refines), unless this very run
 * stored it (a resumed rescreen: then it is done, *mine = 1). */
static int family_tol(path_coord *pc, const pl_family *f, double *tol, int *mine, bs_err *err)
{
    *mine = 0;
    *tol = pc->o->path_tol > 0 ? pc->o->path_tol : PL_PATH_DEFAULT_TOL;
    if (pc->o->path_tol > 0 || strcmp(pc->o->kind, "rescreen") != 0) return 0;
    double stored = 0;
    int64_t run = 0;
    int rc = cat_path_stored(pc->cat, f->name, &stored, &run, err);
    if (rc != 0) return rc;
    *mine = run != 0 && run == pc->run_id;
    *tol = *mine ? stored : (stored > 0 ? stored : PL_PATH_DEFAULT_TOL) / 10;
    return 0;
}

/* One journal line about family f; a journal that cannot be written loses only the crash
 * bookkeeping, never a path. */
static void path_journal(path_coord *pc, const char *family, int handed)
{
    if (!pc->journal) return;
    char id[80];
    snprintf(id, sizeof id, "%s%s", PL_PATH_JOURNAL_PREFIX, family);
    bs_err jerr;
    bs_err_clear(&jerr);
    if (handed)
        pl_journal_handed(pc->journal, id, &jerr);
    else
        pl_journal_received(pc->journal, id, &jerr);
}

/* The strikes of family f in the journal of this run (sessions that handed its path out and died). */
static int path_strikes(char **ids, const int *strikes, int n, const char *family)
{
    size_t plen = strlen(PL_PATH_JOURNAL_PREFIX);
    for (int i = 0; i < n; i++)
        if (!strncmp(ids[i], PL_PATH_JOURNAL_PREFIX, plen) && !strcmp(ids[i] + plen, family))
            return strikes[i];
    return 0;
}

static int path_record(path_coord *pc, const pl_family *f, const pl_outcome *out, bs_err *err);

/* Records the path of f failed: its job died while computing it in `strikes` sessions. */
static int give_up_path(path_coord *pc, const pl_family *f, int strikes, bs_err *err)
{
    pl_outcome out;
    memset(&out, 0, sizeof out);
    snprintf(out.id, sizeof out.id, "%s", f->name);
    out.code = BS_ENUMERIC;
    out.rank = -1;
    snprintf(out.message, sizeof out.message,
             "its job died while the path was being computed in %d sessions (a worker crash or a kill); not "
             "retried again (change the family or use screen --rerun)",
             strikes);
    return path_record(pc, f, &out, err);
}

/* Families with a member among the --where selection of a rescreen (every family for a screen). */
static int family_selected(const pl_family *f, const ms_set *set, const cat_ids *sel)
{
    if (!sel) return 1;
    for (int i = 0; i < f->n; i++)
        if (cat_ids_contains(sel, ms_entry_at(set, f->index[i])->id)) return 1;
    return 0;
}

/* The work list: families not yet done at this job's tolerance. All of a job's paths share one
 * tolerance (the smallest a rescreen asks of its families), so one task goes to every worker. */
static int paths_todo(path_coord *pc, const ms_set *set, bs_err *err)
{
    cat_ids sel;
    cat_ids_init(&sel);
    int rescreen = !strcmp(pc->o->kind, "rescreen");
    int rc = rescreen ? cat_select_ids(pc->cat, pc->o->where_sql, &sel, err) : 0;
    if (rc == 0) rc = pl_families(set, &pc->fams, &pc->nfam, err);
    pc->todo = rc == 0 ? calloc((size_t)pc->nfam + 1, sizeof *pc->todo) : NULL;
    if (rc == 0 && !pc->todo) rc = bs_fail(err, BS_ENOMEM, "out of memory for the path list");
    char **lost = NULL;
    int *strikes = NULL, nlost = 0;
    char jpath[4096];
    snprintf(jpath, sizeof jpath, "%s.journal", pc->o->catalogue_path);
    if (rc == 0 && pc->counts->resumed) rc = pl_journal_lost(jpath, pc->run_id, &lost, &strikes, &nlost, err);
    double tol_job = 0;
    int given_up = 0;
    for (int i = 0; rc == 0 && i < pc->nfam; i++) {
        const pl_family *f = &pc->fams[i];
        if (!family_selected(f, set, rescreen ? &sel : NULL)) continue;
        double tol = 0;
        int done = 0, mine = 0;
        rc = family_tol(pc, f, &tol, &mine, err);
        if (rc == 0) rc = cat_path_done(pc->cat, f->name, f->content, tol, &done, err);
        if (rc != 0) break;
        if (done) {
            pc->counts->paths_skipped++;
            continue;
        }
        int k = path_strikes(lost, strikes, nlost, f->name);
        if (k >= PL_PATH_MAX_STRIKES) {
            pc->task.tol_x = tol;
            rc = give_up_path(pc, f, k, err);
            given_up++;
            continue;
        }
        if (tol_job == 0 || tol < tol_job) tol_job = tol;
        pc->todo[pc->ntodo++] = i;
    }
    for (int i = 0; i < nlost; i++)
        free(lost[i]);
    free(lost);
    free(strikes);
    pc->task.tol_x = tol_job > 0 ? tol_job : PL_PATH_DEFAULT_TOL;
    pc->counts->paths_total = pc->ntodo + given_up;
    cat_ids_clear(&sel);
    return rc;
}

/* Stores one path outcome: ok with its rows, or failed/invalid with the message. */
static int path_record(path_coord *pc, const pl_family *f, const pl_outcome *out, bs_err *err)
{
    if (out->rank >= 0) path_journal(pc, f->name, 0);
    pp_result r;
    pp_result_init(&r);
    int code = out->code;
    char message[700];
    snprintf(message, sizeof message, "%s", out->message);
    if (code == 0) {
        bs_err perr;
        bs_err_clear(&perr);
        code = pl_path_from_text(out->json, &r, &perr);
        if (code != 0)
            snprintf(message, sizeof message, "the coordinator could not read the path: %s", perr.msg);
    }
    cat_status st = code == 0 ? CAT_RES_OK : cat_status_from_code(code);
    /* A path has no time budget of its own; a timeout is a failure of the path. */
    if (st == CAT_RES_TIMEOUT) st = CAT_RES_FAILED;
    cat_path_info info = {.family = f->name,
                          .parameter = f->param,
                          .unit = f->unit,
                          .content = f->content,
                          .members_json = f->members,
                          .nmembers = f->n,
                          .dimension = f->dim,
                          .x_from = f->n > 0 ? f->value[0] : 0,
                          .x_to = f->n > 0 ? f->value[f->n - 1] : 0,
                          .tol_x = pc->task.tol_x,
                          .nsamples = pc->task.nsamples,
                          .gap_mesh = pc->task.mesh,
                          .status = st,
                          .message = code == 0 ? NULL : message,
                          .rank = out->rank,
                          .seconds = out->seconds};
    int rc = cat_path_put(pc->cat, pc->run_id, &info, code == 0 ? &r : NULL, err);
    pp_result_clear(&r);
    if (rc != 0) return rc;
    pc->written++;
    pc->counts->paths_done++;
    if (st == CAT_RES_OK)
        pc->counts->paths_ok++;
    else
        pc->counts->paths_failed++;
    if (pc->o->path_done)
        pc->o->path_done(pc->o->progress_ctx, pc->counts, f->name, cat_status_name(st), out->seconds);
    return 0;
}

static const pl_family *family_named(const path_coord *pc, const char *name)
{
    for (int i = 0; i < pc->nfam; i++)
        if (!strcmp(pc->fams[i].name, name)) return &pc->fams[i];
    return NULL;
}

/* The next family to hand out, or -1: none left, or the job is stopping (signal, budget). */
static int path_next(path_coord *pc)
{
    const pl_opts *o = pc->o;
    if (pc->next >= pc->ntodo) return -1;
    if ((o->stop_flag && *o->stop_flag) || (o->max_seconds > 0 && bs_now() - pc->t0 > o->max_seconds - 0.5)) {
        pc->counts->interrupted = 1;
        return -1;
    }
    int i = pc->todo[pc->next++];
    path_journal(pc, pc->fams[i].name, 1);
    return i;
}

static int paths_serial(path_coord *pc, const ms_set *set, bs_err *err)
{
    int rc = 0, i;
    while (rc == 0 && (i = path_next(pc)) >= 0) {
        pl_outcome out;
        pl_path_compute(set, &pc->fams[i], &pc->task, 0, &out);
        rc = path_record(pc, &pc->fams[i], &out, err);
        pl_outcome_clear(&out);
    }
    return rc;
}

/* Sends rank `to` its next family, or a stop when there is none (or handing out is over). Returns
 * 1 in *stopped when it was a stop. */
static int path_send_next(path_coord *pc, MPI_Comm comm, int to, int handing_out, int *stopped, bs_err *err)
{
    int i = handing_out ? path_next(pc) : -1;
    *stopped = i < 0;
    if (i < 0)
        return pl_wire_check(MPI_Send(NULL, 0, MPI_BYTE, to, TAG_PATH_STOP, comm), "MPI_Send of stop", err);
    path_work w;
    memset(&w, 0, sizeof w);
    w.family = i;
    snprintf(w.name, sizeof w.name, "%s", pc->fams[i].name);
    w.task = pc->task;
    return pl_wire_check(MPI_Send(&w, (int)sizeof w, MPI_BYTE, to, TAG_PATH_WORK, comm), "MPI_Send of a path",
                         err);
}

/* Hands the workers (ranks 1..nworkers) their first family or a stop, then answers each path that
 * comes back with the next one, until every worker has been told to stop. The coordinator speaks
 * first: a worker that finished the member phase early must not send anything the member loop,
 * still waiting for the others, would take for a request of its own. Work goes out only while rc
 * stays 0 and handing_out is set. */
static int paths_serve(path_coord *pc, MPI_Comm comm, int nworkers, int handing_out, bs_err *err)
{
    int active = nworkers, rc = 0;
    for (int to = 1; to <= nworkers; to++) {
        int stopped = 0;
        int mrc = path_send_next(pc, comm, to, handing_out, &stopped, err);
        if (mrc != 0) return mrc;
        active -= stopped;
    }
    const struct timespec nap = {0, 500 * 1000};
    while (active > 0) {
        int flag = 0;
        MPI_Status st;
        int mrc = pl_wire_probe(comm, &flag, &st, err);
        if (mrc != 0) return mrc;
        if (!flag) {
            nanosleep(&nap, NULL);
            continue;
        }
        pl_outcome out;
        int kind = 0;
        mrc = pl_wire_recv(comm, &st, &out, &kind, err);
        if (mrc != 0) return mrc;
        if (kind == 2 && rc == 0) {
            const pl_family *f = family_named(pc, out.id);
            rc = f ? path_record(pc, f, &out, err)
                   : bs_fail(err, BS_EMPI, "rank %d sent the path of an unknown family '%s'", out.rank,
                             out.id);
        }
        pl_outcome_clear(&out);
        int stopped = 0;
        mrc = path_send_next(pc, comm, st.MPI_SOURCE, rc == 0 && handing_out, &stopped, err);
        if (mrc != 0) return mrc;
        active -= stopped;
    }
    return rc;
}

int pl_paths_coordinate(MPI_Comm comm, int nworkers, const pl_opts *o, cat_db *cat, const ms_set *set,
                        int64_t run_id, pl_journal *journal, pl_counts *counts, int *discarded, int prior_rc,
                        bs_err *err)
{
    path_coord pc;
    memset(&pc, 0, sizeof pc);
    pc.o = o;
    pc.journal = journal;
    pc.cat = cat;
    pc.run_id = run_id;
    pc.counts = counts;
    pc.t0 = bs_now() - counts->elapsed;
    pc.task.nsamples = o->path_samples;
    pc.task.track_steps = o->path_track_steps;
    pc.task.mesh = o->mesh;
    int handing_out = prior_rc == 0 && !counts->interrupted && !*discarded;
    int rc = 0;
    if (handing_out) rc = paths_todo(&pc, set, err);
    if (rc == 0 && handing_out && o->announce_paths) o->announce_paths(o->progress_ctx, counts);
    if (nworkers == 0) {
        if (rc == 0 && handing_out) rc = paths_serial(&pc, set, err);
    } else {
        /* After a failure the workers are still answered, with a stop each. */
        bs_err serr;
        bs_err_clear(&serr);
        int src = paths_serve(&pc, comm, nworkers, handing_out && rc == 0, rc == 0 ? err : &serr);
        if (rc == 0) rc = src;
    }
    if (rc == 0) rc = cat_flush(cat, err);
    /* A new run that found no member and no path to do leaves no trace (as in the member phase). */
    if (rc == 0 && handing_out && !counts->resumed && counts->total == 0 && pc.written == 0) {
        rc = cat_run_discard(cat, run_id, err);
        if (rc == 0) {
            *discarded = 1;
            counts->run_id = 0;
        }
    }
    pl_families_free(pc.fams, pc.nfam);
    free(pc.todo);
    return prior_rc != 0 ? prior_rc : rc;
}

/* ---- a worker ---- */

int pl_paths_work(MPI_Comm comm, const pl_opts *o, int rank, bs_err *err)
{
    ms_set *set = NULL;
    pl_family *fams = NULL;
    int nfam = 0;
    bs_err open_err;
    bs_err_clear(&open_err);
    /* Without the set or its families the worker still takes part, reporting each path as failed. */
    if (ms_open(o->set_path, &set, &open_err) == 0 && pl_families(set, &fams, &nfam, &open_err) != 0)
        nfam = 0;
    /* The coordinator speaks first (paths_serve): a family or a stop. */
    int rc = 0;
    const struct timespec nap = {0, 200 * 1000};
    while (rc == 0) {
        MPI_Status st;
        int flag = 0;
        while (rc == 0 && !flag) {
            rc = pl_wire_check(MPI_Iprobe(0, MPI_ANY_TAG, comm, &flag, &st), "MPI_Iprobe", err);
            if (rc == 0 && !flag) nanosleep(&nap, NULL);
        }
        if (rc != 0) break;
        if (st.MPI_TAG == TAG_PATH_STOP) {
            rc = pl_wire_check(MPI_Recv(NULL, 0, MPI_BYTE, 0, TAG_PATH_STOP, comm, MPI_STATUS_IGNORE),
                               "MPI_Recv of stop", err);
            break;
        }
        path_work w;
        rc = pl_wire_check(MPI_Recv(&w, (int)sizeof w, MPI_BYTE, 0, TAG_PATH_WORK, comm, MPI_STATUS_IGNORE),
                           "MPI_Recv of a path", err);
        if (rc != 0) break;
        w.name[sizeof w.name - 1] = '\0';
        pl_outcome out;
        if (w.family >= 0 && w.family < nfam && !strcmp(fams[w.family].name, w.name)) {
            pl_path_compute(set, &fams[w.family], &w.task, rank, &out);
        } else {
            memset(&out, 0, sizeof out);
            out.code = BS_EIO;
            out.rank = rank;
            snprintf(out.id, sizeof out.id, "%s", w.name);
            snprintf(out.message, sizeof out.message, "worker %d cannot read family %s from the set: %.400s",
                     rank, w.name, open_err.msg[0] ? open_err.msg : "not found");
        }
        rc = pl_wire_send(comm, 2, &out, err);
        pl_outcome_clear(&out);
    }
    pl_families_free(fams, nfam);
    ms_free(set);
    return rc;
}
