/* The path phase of `screen --paths` and `rescreen --paths`: after the members' own diagnoses,
 * every family of the set is one unit of work, a phase path (phasepath.h) over its members computed
 * by a worker and sent to the coordinator, which alone writes it to the catalogue (cat_path_put).
 * Private to src/pipeline; the MPI-free parts (family list, computation, wire form) are tested in
 * one process (tests/pipeline/test_pathrun.c). */
#ifndef BANDSIEVE_PIPELINE_PATHRUN_H
#define BANDSIEVE_PIPELINE_PATHRUN_H

#include <mpi.h>

#include "bandsieve/catalogue.h"
#include "bandsieve/matset.h"
#include "bandsieve/phasepath.h"
#include "bandsieve/pipeline.h"
#include "journal.h"
#include "work.h"

/* Hand-out journal lines of a path name its family with this prefix (material ids cannot hold a
 * colon, so the two never meet); the member phase leaves such lines to the path phase. */
#define PL_PATH_JOURNAL_PREFIX "path:"

/* Sessions in which a family's path may take its worker down before it is recorded failed (as
 * for materials, run.c). */
#define PL_PATH_MAX_STRIKES 2

/* The tolerance a path is refined to when none is given (phasepath.h: tol_x 0 means 1e-5). */
#define PL_PATH_DEFAULT_TOL 1e-5

/* One family of a set: its members in path order (increasing value). */
typedef struct pl_family {
    char name[64];
    char param[32], unit[16];
    int n;            /* members */
    int *index;       /* n entry indices in the set */
    double *value;    /* n parameter values, increasing */
    char content[65]; /* SHA-256 of the lines "<id> <content hash> <value %.17g>\n" in path order */
    char *members;    /* JSON list of {"id": ..., "value": ...} in path order */
    int dim;          /* the first member's dimension */
} pl_family;

/* The families of set (every family name of ms_families, with at least one member), in order of
 * first appearance; *fams (n entries) is owned by the caller (pl_families_free). BS_ENOMEM, and the
 * errors of ms_content for a member whose content hash cannot be computed. */
int pl_families(const ms_set *set, pl_family **fams, int *n, bs_err *err);
void pl_families_free(pl_family *fams, int n);

/* What every path of a job gets computed with. */
typedef struct pl_path_task {
    double tol_x;    /* > 0: the tolerance on closings and interval edges */
    int nsamples;    /* 0: the default */
    int track_steps; /* 0: the default */
    int mesh;        /* 0: the defaults (gap scan and diagnoses) */
} pl_path_task;

/* Reads the members of family f from set and runs its path as t says. Never fails as a whole:
 * out->id is the family, out->code and out->message say what went wrong (a member that cannot be
 * read or members that cannot be interpolated: BS_EPARSE/BS_EINVAL; numerical: BS_ENUMERIC), and
 * out->json holds the path in its wire form (pl_path_to_text) when code is 0. */
void pl_path_compute(const ms_set *set, const pl_family *f, const pl_path_task *t, int rank, pl_outcome *out);

/* The wire form of a path (JSON text, every field of pp_result, the intervals' diagnoses in their
 * one JSON form, result_json.h); the caller frees it (free). NULL when out of memory. */
char *pl_path_to_text(const pp_result *r);

/* Reads the wire form back into r (pp_result_init'ed by the caller; cleared on error). BS_EPARSE
 * naming what is malformed; BS_ENOMEM. */
int pl_path_from_text(const char *text, pp_result *r, bs_err *err);

/* The coordinator's side, on rank 0 of comm with the worker ranks 1..nworkers (0: everything in
 * this process): chooses the families whose stored path is not about their current members or is
 * coarser than the job's tolerance (a rescreen: only families with a member selected by --where),
 * hands them out one at a time, and stores each path as it arrives. prior_rc != 0 (the member
 * phase failed) or an interrupted member phase hands nothing out, but still answers every worker,
 * so that all ranks end together; prior_rc is then returned as it is. A new run that did no member
 * and no path is discarded here (*discarded = 1). journal (borrowed, may be NULL) gets a line per
 * path handed out and received; a family that earlier sessions of a resumed run handed out and
 * never got back PL_PATH_MAX_STRIKES times is recorded failed instead of computed again. Collective on comm
 * with pl_paths_work. */
int pl_paths_coordinate(MPI_Comm comm, int nworkers, const pl_opts *o, cat_db *cat, const ms_set *set,
                        int64_t run_id, pl_journal *journal, pl_counts *counts, int *discarded, int prior_rc,
                        bs_err *err);

/* A worker's side (ranks 1..nworkers of pl_paths_coordinate): computes the families the
 * coordinator (rank 0) sends and returns each path, until told to stop. Collective on comm with
 * pl_paths_coordinate. */
int pl_paths_work(MPI_Comm comm, const pl_opts *o, int rank, bs_err *err);

/* The message helpers of the member phase (run.c), for the path phase: translate an MPI code;
 * probe for, receive and send a worker's outcome (kind 0: a first request, 1: a material, 2: a
 * path). */
int pl_wire_check(int code, const char *what, bs_err *err);
int pl_wire_probe(MPI_Comm comm, int *flag, MPI_Status *st, bs_err *err);
int pl_wire_recv(MPI_Comm comm, MPI_Status *st, pl_outcome *out, int *kind, bs_err *err);
int pl_wire_send(MPI_Comm comm, int kind, const pl_outcome *out, bs_err *err);

#endif
