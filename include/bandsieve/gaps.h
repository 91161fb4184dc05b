/* Direct and indirect band gaps at the filling N = nocc (bands N and N+1, 1-based), with the
 * k-points where they sit: a coarse uniform mesh finds the basins, a local minimiser refines every
 * basin that could hold the extreme, and meshes displaced by half a step check that nothing was
 * missed between the points. */
#ifndef BANDSIEVE_GAPS_H
#define BANDSIEVE_GAPS_H

#include "bandsieve/bandpair.h"
#include "bandsieve/err.h"
#include "bandsieve/hk.h"
#include "bandsieve/model.h"
#include "bandsieve/result.h"

/* Convergence tolerance of the gaps between mesh levels (eV) and the resolution floor. */
#define GAPS_CONV_TOL_EV 1e-4

/* An indirect gap whose size is below this many resolutions is called with low confidence
 * ("possible semimetal" / "possible insulator"). */
#define GAPS_UNSURE_FACTOR 3.0

typedef struct gaps_opts {
    int mesh;            /* coarse mesh points per reduced direction (0: 16 in 3D, 48 in 2D) */
    int nrefine;         /* most basins refined per quantity and mesh level (0: 48), the most
                            promising first: only basins whose mesh value, less the variation to
                            their neighbours, is below the best value found so far */
    int levels;          /* most mesh levels: the coarse mesh, then meshes displaced by half a step
                            (different displacements, their union the mesh of twice the density),
                            until one level changes no gap by more than conv_tol_ev (0: 3; 1: no
                            check) */
    double conv_tol_ev;  /* (0: GAPS_CONV_TOL_EV) */
    double tol_k;        /* refinement stops at this step, reduced units (0: 1e-6) */
    double deadline;     /* absolute bs_now() seconds (CLOCK_MONOTONIC), 0: none */
    const bp_mesh *grid; /* optional mesh already evaluated for this model (borrowed; overrides mesh) */
} gaps_opts;

typedef struct gaps_result {
    double gap_direct_ev;                   /* min_k E_{N+1}(k) - E_N(k) */
    double gap_indirect_ev;                 /* min_k E_{N+1} - max_k E_N; <= 0 means the bands overlap */
    double k_direct[3], k_vbm[3], k_cbm[3]; /* reduced, in [0,1) (k3 = 0 in 2D) */
    double vbm_ev, cbm_ev;                  /* max E_N, min E_{N+1} */
    double width_ev; /* max E_{N+1} - min E_N on the mesh: the scale of the two bands */
    int metallic;    /* gap_indirect_ev < BS_GAP_CLOSED_EV: metal or semimetal at this filling */
    int closed;      /* gap_direct_ev < BS_GAP_CLOSED_EV: the two bands touch */
    int mesh;
    int levels;             /* mesh levels evaluated (1: the coarse mesh only) */
    int converged;          /* the last level changed no gap by more than the tolerance */
    double resolution_ev;   /* what the gaps may still be off by: the last level's change, at
                               least the tolerance (so larger when not converged); INFINITY when
                               no check was made (one level, or a mesh below 4 points) */
    double shift_ev;        /* gaps_find_near only: the largest change of a band at an extreme from
                               the nearby model's to this one's (0 otherwise) */
    int nbasins;            /* local refinements run, all quantities and levels */
    long long nk_evaluated; /* k-points diagonalised by this call */
    double seconds;         /* wall time of this call */
} gaps_result;

/* Fills o with the defaults (all zero: mesh and tolerances chosen by gaps_find). */
void gaps_opts_init(gaps_opts *o);

/* Gaps of m (borrowed) at its filling, using hk (borrowed, built from m). o may be NULL (defaults).
 * BS_EINVAL for a bad filling or mesh, BS_ETIMEOUT past o->deadline, BS_ENUMERIC from LAPACK. */
int gaps_find(const tb_model *m, hk_engine *hk, const gaps_opts *o, gaps_result *out, bs_err *err);

/* As gaps_find with an existing evaluator (borrowed), so a caller can share it with nodes_find;
 * o->deadline is ignored here (the evaluator carries its own). */
int gaps_find_eval(bp_eval *e, const gaps_opts *o, gaps_result *out, bs_err *err);

/* Gaps of a model H (evaluator e, borrowed; need not be even) from a search on a nearby model H_s
 * (evaluator es, borrowed, typically even: halved meshes) when every band of H lies within shift_ev
 * of H_s's (Weyl's inequality with shift_ev >= max_k ||H(k) - H_s(k)||_2). H's extremes then lie
 * where H_s's values are within twice the shift of H_s's best (2 shift_ev per band edge, 4 for
 * the direct gap): the search on H_s refines every basin that could come that close (not only
 * those that could beat the best), H is evaluated at those basins' end points and their mirrors -k,
 * and short local minimisations on H from the most promising of them give H's extremes. out takes
 * H_s's mesh, levels, convergence, resolution and width, H's extremes, k-points and direct/indirect
 * gaps, the k-points diagonalised on H in nk_evaluated (es counts its own), and in shift_ev the
 * largest change of a band (an edge, or half the direct gap) from H_s's extreme to H's, which the
 * caller can hold against its bound. o as for gaps_find_eval (o->grid: a mesh of H_s). */
int gaps_find_near(bp_eval *es, bp_eval *e, double shift_ev, const gaps_opts *o, gaps_result *out,
                   bs_err *err);

struct nodes_result;

/* Lowers g's direct gap (and bounds its band extremes) with touchings found by the node search
 * (nodes.h), whose refinement starts from more cells than the gap search's few basins: a node's
 * gap below g->gap_direct_ev replaces it, its two band energies (energy -+ gap/2) bound the VBM and
 * CBM. Updates metallic and closed. */
void gaps_merge_nodes(gaps_result *g, const struct nodes_result *r);

/* Whether an indirect gap g (eV) is too small against the search's resolution to tell an
 * insulator from a semimetal: |g| < GAPS_UNSURE_FACTOR * resolution. */
int gaps_unsure(double gap_indirect_ev, double resolution_ev);

#endif
