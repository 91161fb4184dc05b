/* Lattice Chern numbers of the lowest bands from link variables (J. Phys. Soc. Jpn. 74, 1674
 * (2005)): on a plane of the Brillouin zone (the six planes k_i = 0, 1/2 in 3D, the zone in 2D) and
 * as the Berry flux through the surface of a small cube around a point (Weyl-node chirality). */
/* Sign convention: the Berry curvature is Omega = curl A with A = i<u|grad_k u> summed over the
 * bands (Rev. Mod. Phys. 82, 1959 (2010)), and C = (1/2 pi) times its flux; this is minus the
 * quantity (1/2 pi i) sum ln(U U U^-1 U^-1) of the 2005 paper. With it the lower band of
 * H = k.sigma has flux +1 out of a sphere around k = 0: the chirality of a node of H = d(k).sigma
 * is sign det(d d_i / d k_j). Orientations are Cartesian (right-handed) whatever the handedness of
 * the lattice vectors. */
#ifndef BANDSIEVE_CHERN_H
#define BANDSIEVE_CHERN_H

#include "bandsieve/eig.h"
#include "bandsieve/err.h"
#include "bandsieve/hk.h"
#include "bandsieve/model.h"

typedef struct chern_ws chern_ws;

/* Settings; chern_opts_default fills the defaults named in brackets. */
typedef struct chern_opts {
    int mesh;          /* plaquettes per direction of a plane [24]; per cube edge [6] for the flux */
    int max_mesh;      /* refinement stops past this many per direction [4 * mesh] */
    double fmax;       /* largest |F| per plaquette (rad) accepted; refine above [1.0] */
    double gap_tol_ev; /* direct gap (band nband-1 to nband) below this counts as closed
                          [BS_GAP_CLOSED_EV] */
    double deadline;   /* absolute bs_now() seconds; BS_ETIMEOUT past it (0: none) [0] */
} chern_opts;

/* Defaults for a plane (surface = 0) or for chern_surface_flux (surface = 1). */
void chern_opts_default(chern_opts *o, int surface);

/* One Chern number (plane) or one flux (surface). status is RES_DONE when every plaquette has
 * |F| <= fmax and the gap stays open; RES_AMBIGUOUS with a reason otherwise (gap_closed tells the
 * gap apart from a too coarse mesh). */
typedef struct chern_value {
    int status;          /* RES_DONE or RES_AMBIGUOUS */
    int chern;           /* nearest integer to flux */
    double flux;         /* Berry flux / (2 pi); an integer up to round-off by construction */
    double max_f;        /* largest |F| of a plaquette, rad */
    double min_gap_ev;   /* smallest direct gap E_nband - E_(nband-1) seen, eV */
    int gap_closed;      /* min_gap_ev < gap_tol_ev somewhere */
    double k_min_gap[3]; /* reduced point of min_gap_ev */
    int mesh;            /* mesh of the last evaluation */
    long long nk;        /* k-points diagonalised for this value */
    char reason[160];    /* why AMBIGUOUS; empty when DONE */
} chern_value;

/* Workspace for the lowest nband bands (1 <= nband < m->norb) of m (borrowed; it must outlive the
 * workspace). The caller owns *out (chern_free). BS_EINVAL on a bad nband. */
int chern_create(const tb_model *m, int nband, chern_ws **out, bs_err *err);

/* As chern_create, diagonalising with dist (borrowed; NULL: LAPACK), e.g. a rank group's solver. */
int chern_create_dist(const tb_model *m, int nband, const eig_dist *dist, chern_ws **out, bs_err *err);

/* As chern_create_dist, reading H(k) from hk (borrowed, an engine of m; NULL: build one). */
int chern_create_shared(const tb_model *m, int nband, const eig_dist *dist, hk_engine *hk, chern_ws **out,
                        bs_err *err);

/* Frees ws; accepts NULL. */
void chern_free(chern_ws *ws);

/* Chern number of the lowest nband bands on plane p (0..5: k1=0, k1=1/2, k2=0, k2=1/2, k3=0,
 * k3=1/2, as res_flow.plane; a 2D model takes only p = 4, the whole zone). The plane spanned by
 * (k_a, k_b) with a = (i+1)%3, b = (i+2)%3 for the fixed k_i, oriented by e_a x e_b = e_i: for
 * p = 4 the usual C of the (k1, k2) zone. The mesh is doubled while some |F| > fmax, up to
 * max_mesh. o may be NULL (defaults). BS_EINVAL on a bad plane, BS_ETIMEOUT, BS_ENUMERIC. */
int chern_plane(chern_ws *ws, int p, const chern_opts *o, chern_value *out, bs_err *err);

/* Berry flux (units of 2 pi, outward normal) of the lowest nband bands through the surface of the
 * cube |k - k0|_max = h around k0 (reduced coordinates, 0 < h <= 0.25), with the link method on
 * its six faces, mesh x mesh plaquettes each (doubled while some |F| > fmax). Around a Weyl node
 * between bands nband-1 and nband this is its chirality (+1 or -1), around a gapped point 0.
 * Only for 3D models (BS_EINVAL otherwise). When the cube's surface itself touches a gap closing,
 * the value is AMBIGUOUS with gap_closed set: shrink or move the cube. o may be NULL (defaults). */
int chern_surface_flux(chern_ws *ws, const double k0[3], double h, const chern_opts *o, chern_value *out,
                       bs_err *err);

#endif
