/* Indices that need crystal symmetry beyond inversion and time reversal:
 *  - the Z4 symmetry indicator of inversion- and time-reversal-symmetric 3D insulators,
 *    kappa = (1/4) sum over the 8 TRIMs of (n+ - n-) mod 4, with n+- the occupied states of parity
 *    +-1 (Nat. Commun. 8, 50 (2017); Phys. Rev. X 8, 031070 (2018)); kappa odd is a strong TI
 *    (kappa mod 2 = nu0), kappa = 2 with nu0 = 0 a higher-order or crystalline phase;
 *  - mirror Chern numbers: on a k-plane left invariant by a mirror, the occupied states split by
 *    mirror eigenvalue (+-i spinful, +-1 spinless) and each sector has its own Chern number;
 *    C_M = (C_+ - C_-)/2 (Phys. Rev. B 78, 045426 (2008)). Each sector's Chern number is the lattice
 *    link-variable one (J. Phys. Soc. Jpn. 74, 1674 (2005)) in the sign convention of chern.h. */
#ifndef BANDSIEVE_CRYSTALLINE_H
#define BANDSIEVE_CRYSTALLINE_H

#include "bandsieve/crystal.h"
#include "bandsieve/err.h"
#include "bandsieve/model.h"
#include "bandsieve/parity.h"

/* kappa from the parity counts of p (3D, both counts known at all 8 TRIMs): 0 and *kappa in 0..3;
 * BS_EINVAL when the counts are missing or the sum is not a multiple of 4 (Kramers pairs not
 * resolved). */
int cz_z4(const par_result *p, int *kappa, bs_err *err);

enum { CZ_DONE = 1, CZ_AMBIGUOUS = 2 };

typedef struct cz_mirror {
    int status;          /* CZ_DONE or CZ_AMBIGUOUS */
    int op;              /* the mirror's index in the cry_info */
    double normal[3];    /* Cartesian mirror normal; the plane is oriented along it */
    int g[2][3];         /* the invariant k-plane: k = k0 + s g[0] + t g[1], s, t in [0,1) */
    double k0[3];        /* offset of the plane (0 for the plane through Gamma) */
    int n_plus, n_minus; /* occupied states per sector (+i or +1 / -i or -1) */
    int c_plus, c_minus; /* sector Chern numbers */
    int mirror_chern;    /* (c_plus - c_minus)/2, or c_plus - c_minus when that is odd */
    int mesh;
    double min_gap_ev;
    char reason[160];
} cz_mirror;

/* The invariant planes of mirror op (verified, kind "m"): the one through Gamma and, when one
 * exists, the parallel plane through a zone-boundary point (k0 with entries 0 or 1/2). Fills up to
 * two planes into out; returns their number, or a negative code. */
int cz_mirror_planes(const cry_info *c, int op, cz_mirror out[2], bs_err *err);

/* Sector Chern numbers on plane pl (from cz_mirror_planes) of the lowest m->nocc bands of m, on a
 * mesh x mesh grid (doubled up to 4 mesh while some plaquette phase exceeds 1 rad). A gap below
 * gap_tol_ev, a mirror eigenvalue off +-i (+-1) by more than 1e-6 (glide or broken mirror), or a
 * sector count that changes over the plane gives CZ_AMBIGUOUS with a reason. */
int cz_mirror_chern(const tb_model *m, const cry_info *c, cz_mirror *pl, int mesh, double gap_tol_ev,
                    bs_err *err);

#endif

/* What a gap closing at k between bands lower and lower+1 becomes, from the little group of k and
 * the symmetry eigenvalues of the two bands (counting of conditions: a two-band crossing needs three
 * real conditions; a symmetry whose eigenvalues differ on the two bands removes the coupling
 * between them where it holds). Common practice; New J. Phys. 9, 356 (2007) for the generic and
 * the two-fold-axis cases, Sci. Adv. 3, e1602680 (2017) (reference from memory) for the general
 * classification without inversion. */
enum {
    CZ_PRED_GENERIC_WEYL = 1, /* no protecting symmetry: Weyl nodes created in pairs */
    CZ_PRED_AXIS_WEYL = 2,    /* on a rotation axis, different eigenvalues: a Weyl pair on the axis */
    CZ_PRED_REPEL = 3,        /* on a rotation axis, equal eigenvalues: the bands repel there */
    CZ_PRED_NODAL_LINE = 4,   /* on a mirror plane, different eigenvalues: a nodal line in it */
    CZ_PRED_INVERSION = 5     /* inversion in the little group: parity exchange at this point */
};

typedef struct cz_prediction {
    int kind;                          /* CZ_PRED_* */
    int op;                            /* the operation that decided it, -1 for none */
    double complex ev_lower, ev_upper; /* its eigenvalues on the two bands */
    char text[200];                    /* one line for people */
} cz_prediction;

/* Prediction for bands lower, lower+1 (0-based) of m at k. Both bands must be non-degenerate at
 * k (BS_EINVAL otherwise: a multiplet needs its own representation analysis). */
int cz_predict_closing(const tb_model *m, const cry_info *c, const double k[3], int lower, cz_prediction *out,
                       bs_err *err);

/* Name of a CZ_PRED_* ("Weyl pair", ...). */
const char *cz_prediction_name(int kind);
