/* The work list of a screen and the diagnosis of one material, without MPI. */
#include "work.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/clock.h"
#include "bandsieve/diagnosis.h"
#include "bandsieve/pipeline.h"
#include "bandsieve/result_json.h"
#include "bandsieve/surfsummary.h"
#include "bandsieve/transport.h"

int pl_entry_mesh(int dim, int mesh, int mesh_factor)
{
    return mesh > 0 ? mesh : diag_default_mesh(dim > 0 ? dim : 3) * (mesh_factor > 1 ? mesh_factor : 1);
}

double pl_cost(int dim, int norb, int nR, int mesh, int mesh_factor)
{
    double n = norb;
    /* k-points scale as mesh^dim for the gap and node meshes, the dominant fixed cost. */
    return (n * n * n + (double)nR * n * n) * pow(pl_entry_mesh(dim, mesh, mesh_factor), dim > 0 ? dim : 3);
}

static int by_double_desc(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? 1 : x > y ? -1 : 0;
}

double pl_makespan(double *costs, int n, int nworkers)
{
    if (n <= 0) return 0;
    if (nworkers < 1) nworkers = 1;
    qsort(costs, (size_t)n, sizeof *costs, by_double_desc);
    double *load = calloc((size_t)nworkers, sizeof *load);
    if (!load) return 0;
    /* Largest first to the least-loaded worker: what the coordinator's queue does when every
     * worker asks again as soon as it is done. */
    for (int i = 0; i < n; i++) {
        int w = 0;
        for (int j = 1; j < nworkers; j++)
            if (load[j] < load[w]) w = j;
        load[w] += costs[i];
    }
    double worst = 0;
    for (int j = 0; j < nworkers; j++)
        if (load[j] > worst) worst = load[j];
    free(load);
    return worst;
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
        keys[k].item.index = i;
        keys[k].item.mesh = 0;
        keys[k].item.cost = e->cost > 0
                                ? pl_cost(e->dim, e->norb, e->nR, mesh, mesh_factor)
                                : pow(pl_entry_mesh(e->dim, mesh, mesh_factor), e->dim > 0 ? e->dim : 3);
        keys[k].id = e->id;
        k++;
    }
    qsort(keys, k, sizeof *keys, by_cost_desc);
    pl_item *out = malloc(((size_t)k + 1) * sizeof *out);
    if (!out) {
        free(keys);
        return bs_fail(err, BS_ENOMEM, "out of memory for the work list");
    }
    for (int i = 0; i < k; i++)
        out[i] = keys[i].item;
    free(keys);
    *items = out;
    *nitems = k;
    return 0;
}

int pl_diagnose(const tb_model *m, const pl_diag_opts *o, res_diag *r, bs_err *err)
{
    double t0 = bs_now();
    int rc = diag_run(m, &o->diag, r, err);
    if (rc == 0 && o->transport) {
        tr_opts to = o->tr;
        if (o->diag.max_seconds > 0) to.deadline = t0 + o->diag.max_seconds;
        rc = tr_compute(m, &to, &r->transport, err);
        if (rc == 0)
            r->has_transport = 1;
        else
            bs_err_context(err, "transport: ");
    }
    if (rc == 0 && o->surfaces && res_class_has_surface_states(r->cls)) {
        int miller[3];
        ssum_default_direction(m, miller);
        /* The expected crossing parities come from the parities, else from the Z2 indices. */
        ssum_bulk bulk = {r->ntrim ? r->par_delta : NULL, r->ntrim, r->z2_status == RES_DONE ? r->z2 : NULL};
        rc = ssum_compute(m, miller, 0, 0, &bulk, &r->surface, err);
        if (rc == 0)
            r->has_surface = 1;
        else
            bs_err_context(err, "surface: ");
    }
    return rc;
}

void pl_compute(const ms_set *set, int index, const pl_task *task, double max_seconds, int rank,
                pl_outcome *out)
{
    memset(out, 0, sizeof *out);
    double t0 = bs_now();
    const ms_entry *e = ms_entry_at(set, index);
    snprintf(out->id, sizeof out->id, "%s", e->id);
    out->rank = rank;
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    int rc = ms_read(set, index, &m, &err);
    /* An entry whose HDF5 data cannot be read is bad input (a damaged set), not a failure of ours. */
    if (rc == BS_EHDF5) rc = BS_EPARSE;
    /* Group members run in lockstep: a deadline would stop them at different points. */
    if (task->dist) max_seconds = 0;
    if (rc == 0) {
        pl_diag_opts o;
        memset(&o, 0, sizeof o);
        o.diag.mesh = task->mesh;
        o.diag.mesh_factor = task->mesh_factor;
        o.diag.max_seconds = max_seconds;
        o.diag.want_flows = 1;
        o.diag.seed = 1;
        o.diag.symmetry_tol = task->symmetry_tol;
        o.diag.magnetism = task->magnetism;
        o.diag.pos_tol_ang = task->pos_tol_ang;
        o.diag.verify = task->verify;
        o.diag.dist = task->dist;
        o.transport = task->transport;
        tr_opts_default(&o.tr);
        o.tr.dist = task->dist;
        o.surfaces = task->surfaces;
        res_diag r;
        res_init(&r);
        rc = pl_diagnose(m, &o, &r, &err);
        if (rc == 0) {
            /* Printed here, where the diagnosis is, in both forms when they differ: the
             * coordinator reads the one with flows and stores the other as it is. */
            out->json = res_to_text(&r, 1);
            if (out->json && r.nflows > 0) out->stored = res_to_text(&r, 0);
            if (!out->json || (r.nflows > 0 && !out->stored))
                rc = bs_fail(&err, BS_ENOMEM, "out of memory formatting the result");
        }
        res_clear(&r);
    }
    out->code = rc;
    if (rc != 0) snprintf(out->message, sizeof out->message, "%s", err.msg);
    tb_model_free(m);
    out->seconds = bs_now() - t0;
}

void pl_outcome_clear(pl_outcome *out)
{
    if (!out) return;
    free(out->json);
    free(out->stored);
    out->json = NULL;
    out->stored = NULL;
}
