/* The work list of a screen and the diagnosis of one material, without MPI. */
#include "work.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <cjson/cJSON.h>

#include "bandsieve/diagnosis.h"
#include "bandsieve/pipeline.h"
#include "bandsieve/surfsummary.h"
#include "bandsieve/transport.h"

static const char *const CLASS_NAMES[] = {
    "trivial insulator", "strong topological insulator", "weak topological insulator",
    "2D topological insulator", "Chern insulator", "Weyl semimetal", "nodal-line semimetal",
    "metal", "undetermined"};

int pl_nclass(void) { return (int)(sizeof CLASS_NAMES / sizeof CLASS_NAMES[0]); }
const char *pl_class_name(int i) { return i >= 0 && i < pl_nclass() ? CLASS_NAMES[i] : NULL; }

int pl_class_index(const char *cls)
{
    for (int i = 0; cls && i < pl_nclass(); i++)
        if (!strcmp(cls, CLASS_NAMES[i])) return i;
    return -1;
}

typedef struct sort_key {
    pl_item item;
    const char *id;
} sort_key;

static int by_cost_desc(const void *a, const void *b)
{
    const sort_key *x = a, *y = b;
    if (x->item.cost != y->item.cost) return x->item.cost < y->item.cost ? 1 : -1;
    return strcmp(x->id, y->id);
}

int pl_work_list(const ms_set *set, const cat_ids *ids, const cat_ids *done, int mesh, int mesh_factor,
                 pl_item **items, int *nitems, int *nmissing, bs_err *err)
{
    *items = NULL;
    *nitems = 0;
    *nmissing = 0;
    int n = ms_count(set);
    sort_key *keys = calloc((size_t)n + 1, sizeof *keys);
    if (!keys) return bs_fail(err, BS_ENOMEM, "out of memory for the work list");
    int k = 0;
    if (ids) {
        for (size_t i = 0; i < ids->n; i++)
            if (ms_find(set, ids->id[i]) < 0) (*nmissing)++;
    }
    for (int i = 0; i < n; i++) {
        const ms_entry *e = ms_entry_at(set, i);
        if (ids && !cat_ids_contains(ids, e->id)) continue;
        if (done && cat_ids_contains(done, e->id)) continue;
        /* k-points scale as mesh^dim for the gap and node meshes, the dominant fixed cost. */
        double m = mesh > 0 ? mesh : diag_default_mesh(e->dim) * (mesh_factor > 1 ? mesh_factor : 1);
        keys[k].item.index = i;
        keys[k].item.cost = (e->cost > 0 ? e->cost : 1.0) * pow(m, e->dim > 0 ? e->dim : 3);
        keys[k].id = e->id;
        k++;
    }
    qsort(keys, k, sizeof *keys, by_cost_desc);
    pl_item *out = malloc(((size_t)k + 1) * sizeof *out);
    if (!out) {
        free(keys);
        return bs_fail(err, BS_ENOMEM, "out of memory for the work list");
    }
    for (int i = 0; i < k; i++) out[i] = keys[i].item;
    free(keys);
    *items = out;
    *nitems = k;
    return 0;
}

/* Classes whose invariants promise surface or edge states. */
static int has_surface_states(const char *cls)
{
    return !strcmp(cls, "strong topological insulator") || !strcmp(cls, "weak topological insulator") ||
           !strcmp(cls, "2D topological insulator") || !strcmp(cls, "Chern insulator");
}

static double seconds_now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return t.tv_sec + 1e-9 * t.tv_nsec;
}

void pl_compute(const ms_set *set, int index, const pl_task *task, double max_seconds, int rank,
                pl_outcome *out)
{
    memset(out, 0, sizeof *out);
    double t0 = seconds_now();
    const ms_entry *e = ms_entry_at(set, index);
    snprintf(out->id, sizeof out->id, "%s", e->id);
    out->rank = rank;
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    int rc = ms_read(set, index, &m, &err);
    /* An entry whose HDF5 data cannot be read is bad input (a damaged set), not a failure of ours. */
    if (rc == BS_EHDF5) rc = BS_EPARSE;
    if (rc == 0 && task->dist) {
        m->eig_dist = task->dist;
        max_seconds = 0;
    }
    if (rc == 0) {
        diag_opts o = {0};
        o.mesh = task->mesh;
        o.mesh_factor = task->mesh_factor;
        o.max_seconds = max_seconds;
        o.want_flows = 1;
        o.seed = 1;
        o.symmetry_tol = task->symmetry_tol;
        diag_result r;
        diag_result_init(&r);
        rc = diag_run(m, &o, &r, &err);
        if (rc == 0) {
            cJSON *j = diag_to_json(&r, 1);
            if (task->transport) {
                tr_opts to;
                tr_opts_default(&to);
                if (max_seconds > 0) to.deadline = t0 + max_seconds;
                tr_result tr;
                rc = tr_compute(m, &to, &tr, &err);
                if (rc == 0) diag_attach_transport(j, tr_to_json(&tr));
                else bs_err_context(&err, "transport: ");
            }
            if (rc == 0 && task->surfaces && has_surface_states(r.cls)) {
                int miller[3];
                ssum_default_direction(m, miller);
                ssum_result sr;
                rc = ssum_compute(m, miller, 0, &sr, &err);
                if (rc == 0) cJSON_AddItemToObject(j, "surface", ssum_to_json(&sr));
                else bs_err_context(&err, "surface: ");
            }
            out->json = j && rc == 0 ? cJSON_PrintUnformatted(j) : NULL;
            cJSON_Delete(j);
            if (rc == 0 && !out->json) rc = bs_fail(&err, BS_ENOMEM, "out of memory formatting the result");
        }
        diag_result_clear(&r);
    }
    out->code = rc;
    if (rc != 0) snprintf(out->message, sizeof out->message, "%s", err.msg);
    tb_model_free(m);
    out->seconds = seconds_now() - t0;
}

void pl_outcome_clear(pl_outcome *out)
{
    if (!out) return;
    free(out->json);
    out->json = NULL;
}
