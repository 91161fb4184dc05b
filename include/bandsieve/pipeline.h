/* The screening run: an MPI coordinator (rank 0) hands materials one at a time to worker ranks,
 * which read them from the set, diagnose them and send back compact results; the coordinator alone
 * writes the catalogue. With one rank everything runs in that process. The run takes the
 * communicator it works on, so this header includes <mpi.h>; the command initialises MPI. */
#ifndef BANDSIEVE_PIPELINE_H
#define BANDSIEVE_PIPELINE_H

#include <signal.h>

#include <mpi.h>

#include "bandsieve/diagnosis.h"
#include "bandsieve/err.h"
#include "bandsieve/model.h"
#include "bandsieve/result.h"
#include "bandsieve/transport.h"

/* Counts shown by the progress callback and returned at the end. */
typedef struct pl_counts {
    int total;   /* materials this job set out to do (after resume skips) */
    int skipped; /* already done in the resumed run */
    int done;    /* results received */
    int ok, invalid, failed, timeout;
    int by_class[RES_NCLASS]; /* per res_class */
    double elapsed;           /* seconds since the start */
    int interrupted;          /* stopped early: wall-clock budget or a signal */
    long long run_id;
    int resumed;
    int missing;           /* rescreen: selected ids that the set does not hold */
    char missing_ids[256]; /* the first few of them, comma-separated */
    char note[768];        /* what was resumed, or why --rerun resumed; "" when nothing to say */
    /* The path phase (--paths): families to do, stored (ok or not), and already done. */
    int paths_total, paths_done, paths_ok, paths_failed, paths_skipped;
} pl_counts;

/* What one material's diagnosis includes besides the topology. */
typedef struct pl_diag_opts {
    diag_opts diag;
    int transport; /* anomalous and spin Hall conductivities with tr below */
    tr_opts tr;    /* tr.deadline is set from diag.max_seconds when that is > 0 */
    int surfaces;  /* surface crossings of a default plane, for classes that promise
                      surface or edge states */
} pl_diag_opts;

/* Diagnoses m (borrowed) into r (res_init by the caller): diag_run, then transport and the surface
 * summary as o asks, each under the same time budget. The one path of `inspect` and of every
 * worker of `screen`. Errors of diag_run, tr_compute ("transport: ...") and ssum_compute
 * ("surface: ..."); r holds what was done before the error. */
int pl_diagnose(const tb_model *m, const pl_diag_opts *o, res_diag *r, bs_err *err);

typedef struct pl_opts {
    const char *set_path;       /* material set (HDF5) */
    const char *catalogue_path; /* catalogue (SQLite) */
    const char *kind;           /* "screen" or "rescreen" */
    const char *where_sql;      /* rescreen: condition on summary */
    double where_seconds;       /* rescreen: time limit of the --where selection (0: none) */
    int mesh;                   /* 0: the diagnosis default times mesh_factor; a rescreen without
                                   a mesh doubles each entry's best mesh instead */
    int mesh_factor;            /* 0 or 1: the default mesh; 2: the default doubled (a rescreen's
                                   entries without an ok result of their content) */
    double max_seconds;         /* wall-clock budget of the whole job (0: none) */
    double material_memory;     /* bytes one material may use (diag_memory_bytes); 0: the node's
                                   physical memory divided by the ranks on that node */
    double material_seconds;    /* budget per material; over it the row is `timeout` (0: none) */
    double symmetry_tol;        /* see diag_opts (0: default) */
    int magnetism;              /* see diag_opts: 0 the cards' statements, 1 + TB_MAG_* for every material */
    double pos_tol_ang;         /* see diag_opts (0: default) */
    int transport;              /* also anomalous and spin Hall conductivities (--transport) */
    int surfaces;               /* also surface crossings of nontrivial insulators (--surfaces) */
    int verify;                 /* every method's evidence, the cross-checks that decisive cheaper
                                   evidence makes optional included (--verify; a rescreen sets it) */
    int group_size;             /* >= 2: the last group_size ranks form a group that diagonalises
                                   materials of at least group_min_states states together */
    int group_min_states;       /* 0: PZ_DEFAULT_THRESHOLD */
    int rerun;                  /* start a new run instead of resuming (an unfinished run that
                                   an earlier --rerun started is resumed, with a note) */
    int batch_rows;             /* catalogue commit batch (0: default) */
    double batch_seconds;
    int paths;            /* --paths: after the members, the phase path of every family */
    double path_tol;      /* tolerance of the paths in the parameter (0: 1e-5 for a screen; a
                             tenth of the stored path's for a rescreen) */
    int path_samples;     /* uniform gap samples of a path (0: the default) */
    int path_track_steps; /* node-track steps across a gapless interval (0: the default) */
    const char *cmdline;  /* recorded in the run row */
    const char *version;
    volatile sig_atomic_t *stop_flag; /* set by a signal handler: finish in-flight work and stop */
    /* Called on rank 0 after every result and about once a second while waiting. */
    void (*progress)(void *ctx, const pl_counts *c, int final);
    void *progress_ctx;
    /* Called on rank 0 before work starts, e.g. to print how many materials were selected. */
    void (*announce)(void *ctx, const pl_counts *c, const char *kind);
    /* Called on rank 0 before the path phase hands out work (--paths). */
    void (*announce_paths)(void *ctx, const pl_counts *c);
    /* Called on rank 0 when a family's path is stored: its name, status and the worker's seconds
     * (paths take seconds to minutes each, so each gets a line). */
    void (*path_done)(void *ctx, const pl_counts *c, const char *family, const char *status, double seconds);
} pl_opts;

/* The scheduler's cost model, MPI-free, shared with `bandsieve check`: the estimated work of one
 * material of dimension dim with norb states and nR lattice vectors at its k-mesh (mesh > 0, else
 * the diagnosis default times mesh_factor): (norb^3 + nR norb^2) per k-point (diagonalisation
 * plus Fourier sum, flops up to a constant) times mesh^dim k-points. */
double pl_cost(int dim, int norb, int nR, int mesh, int mesh_factor);

/* The time the coordinator's hand-out (largest first, to whichever worker is free) needs for
 * costs[0..n-1] on nworkers workers, in cost units: the longest worker's total. costs is sorted
 * in place (descending). 0 for n = 0. */
double pl_makespan(double *costs, int n, int nworkers);

/* Runs the job on the ranks of comm (borrowed; MPI is initialised and finalised by the caller):
 * rank 0 of comm coordinates and writes the catalogue. On rank 0 *counts receives the totals; other
 * ranks get their own partial counts. Returns 0 when the job ran (even if some materials failed:
 * see counts), or a negative BS_E* code when the job itself failed (catalogue, set, MPI), with err
 * filled on the rank that saw it. Collective on comm. */
int pl_run(MPI_Comm comm, const pl_opts *opts, pl_counts *counts, int *is_root, bs_err *err);

#endif
