/* The full diagnosis of one material: gaps, symmetries, Z2 (parity and Wannier-centre flow),
 * Chern numbers, Weyl nodes, nodal lines, and a class with a confidence and a reason.
 * This is the unit of work of `inspect` and of every worker in `screen`. */
#ifndef BANDSIEVE_DIAGNOSIS_H
#define BANDSIEVE_DIAGNOSIS_H

#include <cjson/cJSON.h>

#include "bandsieve/err.h"
#include "bandsieve/model.h"

/* Status of an index computed by one method. */
enum { DIAG_NA = 0, DIAG_DONE = 1, DIAG_AMBIGUOUS = 2, DIAG_DISAGREE = 3 };

typedef struct diag_node {
    double k[3];        /* reduced coordinates, in [0,1) */
    int chirality;      /* +1 / -1, 0 when the flux was not an integer */
    double energy_ev;   /* mean of the two touching bands */
    double gap_ev;      /* refined direct gap at the node */
} diag_node;

typedef struct diag_opts {
    int mesh;               /* base k-mesh per reduced direction (0: default) */
    int mesh_factor;        /* when mesh is 0: the default mesh times this (0 or 1: the default);
                               a rescreen uses 2 so that 2D and 3D entries are both refined */
    double max_seconds;     /* wall-clock budget for this material (0: none) */
    int want_flows;         /* keep Wannier-centre flows in the result (artifacts) */
    unsigned long long seed;/* for random verification points */
    double symmetry_tol;    /* relative residual accepted for a symmetry (0: 1e-6; Wannier fits
                               that were not symmetrised need ~1e-3) */
} diag_opts;

typedef struct diag_flow {
    int plane;              /* 0..5: k1=0, k1=1/2, k2=0, k2=1/2, k3=0, k3=1/2 (2D: plane 4 = whole zone) */
    int nstring;            /* strings from the TRIM line to the half-way line */
    int nband;              /* occupied bands */
    double *kpar;           /* nstring pumping parameters in [0, 1/2] */
    double *wcc;            /* nstring * nband centres in [0,1), sorted per string */
} diag_flow;

typedef struct diag_result {
    char id[128];
    char formula[64];       /* from the card, "" when none */
    char cls[40];           /* "trivial insulator", ..., "metal"; "undetermined" when no call */
    double confidence;      /* [0,1] */
    char reason[320];
    int dim;
    int norb, nocc;

    double gap_direct_ev, gap_indirect_ev;
    double k_gap_direct[3];
    double k_vbm[3], k_cbm[3];

    int time_reversal, inversion;
    double tr_residual, inv_residual;

    int z2_status;          /* DIAG_* for the combined z2 */
    int z2[4];              /* 2D: z2[0] = nu; 3D: nu0, nu1, nu2, nu3 */
    int z2_parity_status;
    int z2_parity[4];
    int z2_wcc_status;
    int z2_wcc[4];
    char z2_note[240];      /* why an index is ambiguous or the methods disagree */
    int ntrim;              /* 4 or 8 when parities were computed, else 0 */
    int par_delta[8];       /* product of one parity per Kramers pair at TRIM n1 + 2 n2 + 4 n3 */
    int par_nodd[8];        /* occupied states of odd parity there */
    int wcc_gap_closed;     /* a Wilson-loop string met a gap closing */
    int chirality_status;   /* DIAG_* of the node chiralities */
    int nodes_tr_ok;        /* with time reversal: nodes in time-reversed sets of four */

    int chern_status;
    int chern;              /* 2D Chern number */
    int plane_chern[6];     /* 3D planes as in diag_flow.plane, when chern_status == DIAG_DONE */

    int nnodes;
    diag_node *nodes;       /* owned */
    int net_chirality;
    int nodal_line;
    int nodal_points;
    double nodal_extent;    /* largest distance between gap-closing points, reduced units */

    int nflows;
    diag_flow *flows;       /* owned, when opts.want_flows */

    int mesh;
    double seconds;
    long long nk_evaluated; /* k-points diagonalised, for cost reporting */
} diag_result;

/* The default k-mesh per direction for a model of dimension dim (36 in 2D, 14 in 3D). */
int diag_default_mesh(int dim);

/* Initialises r to an empty result (NA everywhere); diag_result_clear frees what it owns. */
void diag_result_init(diag_result *r);
void diag_result_clear(diag_result *r);

/* Runs the whole diagnosis of m (borrowed) into r (initialised by the caller).
 * BS_ETIMEOUT when opts->max_seconds is exceeded; BS_ENUMERIC on a LAPACK failure. */
int diag_run(const tb_model *m, const diag_opts *opts, diag_result *r, bs_err *err);

/* The result as the JSON object documented for `inspect --json`. The caller owns the object.
 * Flows are included (key "wcc_flows") only when with_flows is set. */
cJSON *diag_to_json(const diag_result *r, int with_flows);

/* Moves the "ahc" and "shc" objects of tr (the JSON of tr_to_json, owned by the call afterwards)
 * to the top level of diag and keeps the rest of tr under "transport". */
void diag_attach_transport(cJSON *diag, cJSON *tr);

#endif
