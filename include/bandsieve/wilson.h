/* Hybrid Wannier charge centres from Wilson loops and the Z2 index from their flow
 * (Phys. Rev. B 83, 235401 (2011); Phys. Rev. B 84, 075119 (2011)), with adaptive strings.
 *
 * A plane p (numbered as res_flow.plane: k_i = 0 or 1/2, i = p / 2) is swept by closed strings
 * along k_a, a = (i + 1) % 3, at values of the pumping parameter k_b, b = (i + 2) % 3, from 0 to
 * 1/2. A 2D model has the one plane p = 4 (k3 = 0): strings along k1, pumped along k2. */
#ifndef BANDSIEVE_WILSON_H
#define BANDSIEVE_WILSON_H

#include "bandsieve/eig.h"
#include "bandsieve/err.h"
#include "bandsieve/hk.h"
#include "bandsieve/model.h"
#include "bandsieve/result.h"

typedef struct wilson_ws wilson_ws;

/* Settings; wilson_opts_default fills the defaults named in brackets. */
typedef struct wilson_opts {
    int nk;             /* k-points per string at first [24] */
    int max_nk;         /* a string's k-points are doubled up to this; 0: 8 * nk [0] */
    int nstring;        /* strings at first, evenly from k_b = 0 to 1/2 inclusive [11] */
    int max_strings;    /* bisection stops at this many strings per plane [128] */
    double min_spacing; /* or when neighbouring strings are this close [1e-3] */
    double det_min;     /* |det| of a link overlap below this refines the string [0.2] */
    double gap_frac;    /* a centre within gap_frac x (largest gap) of the neighbouring string's
                           gap midpoint makes the step unreliable [0.3] */
    double move_frac;   /* the gap midpoint moving more than move_frac x (largest gap) between
                           neighbours asks for a bisection [0.5] */
    double kramers_tol; /* centres at k_b = 0, 1/2 must pair up within this [1e-3] */
    double gap_tol_ev;  /* direct gap (band nband-1 to nband) below this is a closing
                           [BS_GAP_CLOSED_EV] */
    double deadline;    /* absolute bs_now() seconds; BS_ETIMEOUT past it (0: none) [0] */
} wilson_opts;

void wilson_opts_default(wilson_opts *o);

/* The flow and Z2 index of one plane.
 * status RES_DONE: z2 is the index. RES_AMBIGUOUS: the refinement budget ran out (reason says
 * where), or the centres at the time-reversal-invariant lines do not pair up (no time reversal).
 * RES_NA with gap_closed = 1: the occupied bands touch the next one on a string (semimetal or
 * metal at this filling); no Z2 is defined. The flow holds what was computed either way. */
typedef struct wilson_plane {
    int plane;
    int status;
    int z2;
    int gap_closed;
    double k_gap[3];   /* reduced point of min_gap_ev */
    double min_gap_ev; /* smallest direct gap on the strings, eV */
    double min_det;    /* smallest |det| of a link overlap */
    int max_nk;        /* most k-points a string needed */
    long long nk;      /* k-points diagonalised */
    res_flow flow;     /* owned (wilson_plane_clear): kpar ascending, wcc sorted per string */
    char reason[160];
} wilson_plane;

/* Frees what p owns and zeroes it; accepts a zeroed struct. */
void wilson_plane_clear(wilson_plane *p);

/* The indices of a model. 2D: z2[0] = nu from plane 4. 3D: z2 = {nu0, nu1, nu2, nu3} with
 * nu_i = Z2(k_i = 1/2) and nu0 = Z2(k_i = 0) + Z2(k_i = 1/2) mod 2, required to agree for
 * i = 1, 2, 3 (else AMBIGUOUS). status: RES_DONE, RES_AMBIGUOUS (a plane was, or the three nu0
 * disagree; reason says which) or RES_NA with gap_closed (a plane's gap closes). */
typedef struct wilson_z2 {
    int status;
    int z2[4];
    int gap_closed;
    int nplane; /* 1 in 2D, 6 in 3D */
    wilson_plane planes[6];
    long long nk;
    double seconds;
    char reason[160];
} wilson_z2;

void wilson_z2_clear(wilson_z2 *r);

/* Workspace for the lowest nband bands of m (borrowed; must outlive it), 1 <= nband < norb.
 * The caller owns *out (wilson_free). BS_EINVAL on a bad nband, BS_ENOMEM. */
int wilson_create(const tb_model *m, int nband, wilson_ws **out, bs_err *err);

/* As wilson_create, diagonalising with dist (borrowed; NULL: LAPACK), e.g. a rank group's solver. */
int wilson_create_dist(const tb_model *m, int nband, const eig_dist *dist, wilson_ws **out, bs_err *err);

/* As wilson_create_dist, reading H(k) from hk (borrowed, an engine of m; NULL: build one). */
int wilson_create_shared(const tb_model *m, int nband, const eig_dist *dist, hk_engine *hk, wilson_ws **out,
                         bs_err *err);

/* Frees w; accepts NULL. */
void wilson_free(wilson_ws *w);

/* Centres of one closed string along reduced direction dir (0..2) through k0 (k0[dir] is the
 * start), nk points: the eigenphases of the product of the occupied overlap matrices, as centres
 * in [0,1) sorted ascending into wcc[nband]. min_det and min_gap_ev (either may be NULL) receive
 * the smallest link |det| and direct gap along the string. BS_EINVAL (dir, nk < 2), BS_ENUMERIC. */
int wilson_string(wilson_ws *w, int dir, const double k0[3], int nk, double *wcc, double *min_det,
                  double *min_gap_ev, bs_err *err);

/* The adaptive flow and Z2 of plane p (0..5; only 4 in 2D), see wilson_plane. o may be NULL
 * (defaults). out is overwritten (clear it first if reused). BS_EINVAL, BS_ETIMEOUT, BS_ENUMERIC. */
int wilson_plane_z2(wilson_ws *w, int p, const wilson_opts *o, wilson_plane *out, bs_err *err);

/* All planes of the model and the combined indices (see wilson_z2). The 3D planes are all
 * computed even when one is ambiguous, so the flows can be inspected. */
int wilson_z2_run(wilson_ws *w, const wilson_opts *o, wilson_z2 *out, bs_err *err);

/* Moves the flows of r into a new array *flows of *nflows res_flow (malloc'd, as are their
 * kpar and wcc: res_clear frees them), leaving r's planes without flows. */
int wilson_z2_take_flows(wilson_z2 *r, res_flow **flows, int *nflows, bs_err *err);

#endif
