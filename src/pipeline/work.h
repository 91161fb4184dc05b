/* The pipeline's MPI-free parts: the ordered work list and the computation of one material.
 * Private to src/pipeline. */
#ifndef BANDSIEVE_PIPELINE_WORK_H
#define BANDSIEVE_PIPELINE_WORK_H

#include "bandsieve/catalogue.h"
#include "bandsieve/err.h"
#include "bandsieve/matset.h"

typedef struct pl_item {
    int index;   /* entry index in the set */
    double cost; /* estimated cost: per-k cost x k-points */
    int mesh;    /* this entry's k-mesh, 0: the task's (a rescreen doubles each best mesh) */
} pl_item;

/* Entries of the set to do: all of them (ids NULL) or those listed in ids (rescreen), minus those
 * in done (may be NULL), largest estimated cost first (ties by id, so the order is reproducible).
 * *items is owned by the caller (free). *nmissing counts ids not found in the set. */
int pl_work_list(const ms_set *set, const cat_ids *ids, const cat_ids *done, int mesh, int mesh_factor,
                 pl_item **items, int *nitems, int *nmissing, bs_err *err);

/* The k-mesh a screen uses for an entry of dimension dim: mesh when > 0, else the diagnosis
 * default times mesh_factor (when > 1). */
int pl_entry_mesh(int dim, int mesh, int mesh_factor);

/* The outcome of one material, as sent from a worker to the coordinator. */
typedef struct pl_outcome {
    char id[128];
    int code; /* BS_OK or the error code */
    double seconds;
    int rank;
    char message[512];
    char *json;   /* diagnosis JSON text with flows (owned), NULL unless code == BS_OK */
    char *stored; /* the same without flows, as the catalogue stores it (owned); NULL when json
                     has no flows (json is then that form) */
} pl_outcome;

/* What every material of a job gets computed with. */
typedef struct pl_task {
    int mesh;                    /* 0: the diagnosis default times mesh_factor */
    int mesh_factor;             /* 0 or 1: the default; 2 for a rescreen without --mesh */
    double symmetry_tol;         /* 0: the diagnosis default */
    int transport;               /* add anomalous and spin Hall conductivities */
    int surfaces;                /* add the surface crossings of a default plane for nontrivial insulators */
    const struct eig_dist *dist; /* group members: the shared distributed solver, else NULL */
    int magnetism;               /* diag_opts.magnetism: 0 the card's statement, 1 + TB_MAG_* overrides */
    double pos_tol_ang;          /* diag_opts.pos_tol_ang (0: default) */
    int verify;                  /* diag_opts.verify */
} pl_task;

/* Reads entry `index` of set and diagnoses it as task says within max_seconds (0: no limit),
 * filling out. With task->dist the members of a group run this in lockstep (same calls in the same
 * order), so the time budget is not applied: a deadline would stop them at different points. Never fails as a
 * whole: every failure becomes out->code and out->message. */
void pl_compute(const ms_set *set, int index, const pl_task *task, double max_seconds, int rank,
                pl_outcome *out);

/* Frees out->json. */
void pl_outcome_clear(pl_outcome *out);

#endif
