/* Points where the bands at the filling touch: Weyl nodes with their chirality in 3D, gap
 * closings (Dirac points) in 2D, and nodal lines (continuous curves of touchings) in 3D.
 *
 * Chirality is the Berry flux (units of 2 pi, outward, curvature of A = i<u|grad u>) of the occupied
 * bands out of a small cube around the node (chern_surface_flux); for a two-band node
 * H = E0 + sum_ij v_ij q_j s_i it is sign det(v), +1 for H = q.s.
 *
 * Nodal lines are found by tracing: from a touching where the curvature of gap^2 vanishes along one
 * direction, the curve is followed in small steps (predict along the tangent, re-minimise the gap)
 * while the gap stays closed; a long enough trace is a line.
 *
 * In 2D a touching point is not a Weyl node (no closed surface surrounds a point of a plane): such
 * points are reported as nodes with chirality 0 and chirality_status RES_NA. */
#ifndef BANDSIEVE_NODES_H
#define BANDSIEVE_NODES_H

#include "bandsieve/bandpair.h"
#include "bandsieve/err.h"
#include "bandsieve/hk.h"
#include "bandsieve/model.h"
#include "bandsieve/result.h"

typedef struct nodes_opts {
    int mesh;            /* coarse mesh per reduced direction (0: 16 in 3D, 48 in 2D) */
    const bp_mesh *grid; /* optional mesh already evaluated for this model (borrowed; overrides mesh) */
    double start_frac;   /* refine from mesh cells whose gap is below start_frac * band width
                            (0: 0.25) */
    int max_starts;      /* refinements at most (0: 96) */
    double tol_gap_ev;   /* a refined gap below this is a touching (0: BS_GAP_CLOSED_EV) */
    double tol_k;        /* final step of the position refinement, reduced units (0: 1e-7) */
    double merge_dist;   /* touchings closer than this (modulo 1) are one (0: 1e-4) */
    int min_line_points; /* a traced curve of at least this many closed-gap points is a line (0: 8) */
    int skip_chirality;  /* do not compute chiralities (3D) */
    double deadline;     /* absolute bs_now() seconds (CLOCK_MONOTONIC), 0: none */
} nodes_opts;

typedef struct nodes_result {
    int nnodes;
    res_node *nodes;      /* owned: isolated touchings (Weyl nodes in 3D, Dirac points in 2D) */
    int net_chirality;    /* sum of the chiralities; zero by Nucl. Phys. B 185, 20 (1981) */
    int chirality_status; /* RES_DONE: every 3D node got an integer flux; RES_AMBIGUOUS: some did
                             not (chirality 0 there); RES_NA: 2D, none found, or skipped */
    int nodal_line;       /* 1 when the touchings form a continuous curve (3D) */
    int nodal_points;     /* distinct touchings on lines */
    double (*line_k)[3];  /* owned: those touchings, reduced in [0,1) */
    double nodal_extent;  /* largest distance (modulo 1, reduced units) between line touchings */
    int degenerate;       /* the bands touch on most of the mesh (e.g. Kramers pairs split by the
                             filling): no point search is meaningful, nothing else is reported */
    double min_gap_ev;    /* smallest refined direct gap seen */
    int nstarts;          /* refinements run */
    int mesh;
    long long nk_evaluated; /* k-points diagonalised by this call (chirality fluxes included) */
    double seconds;
} nodes_result;

/* Fills o with the defaults (all zero). */
void nodes_opts_init(nodes_opts *o);

/* Empty result; nodes_result_clear frees what it owns and empties it again. */
void nodes_result_init(nodes_result *r);
void nodes_result_clear(nodes_result *r);

/* Finds the touchings of bands nocc-1 and nocc (0-based) of m (borrowed) with hk (borrowed, built
 * from m); out must be initialised (nodes_result_init) and is cleared first. o may be NULL.
 * Chirality: Berry flux of the lowest nocc bands through a cube around each node
 * (chern_surface_flux) of half-size below half the distance to the nearest other touching.
 * BS_ETIMEOUT past o->deadline, BS_ENUMERIC from LAPACK, BS_EINVAL for a bad filling or mesh. */
int nodes_find(const tb_model *m, hk_engine *hk, const nodes_opts *o, nodes_result *out, bs_err *err);

/* As nodes_find with an existing evaluator e (borrowed, created for m); o->deadline applies to the
 * chirality fluxes, e carries its own for the search. */
int nodes_find_eval(const tb_model *m, bp_eval *e, const nodes_opts *o, nodes_result *out, bs_err *err);

/* Time-reversal check: 1 when every node at k has a partner at -k (modulo 1, within tol_k) of the
 * same chirality (time reversal maps a Weyl node onto -k with its chirality unchanged) and, in 3D,
 * the nodes of nonzero chirality come in sets of four (a multiple of 4, as many + as -); 0 otherwise.
 * Nodes of chirality 0 (Dirac points) only need their -k partner. */
int nodes_check_time_reversal(const nodes_result *r, int dim, double tol_k);

#endif
