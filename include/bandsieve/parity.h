/* The Z2 indices of an inversion- and time-reversal-symmetric insulator from the parity
 * eigenvalues of the occupied states at the time-reversal-invariant momenta (TRIM):
 * Phys. Rev. B 76, 045302 (2007). At each TRIM Gamma_i, delta_i is the product of one parity per
 * Kramers pair; 2D: (-1)^nu = prod of the 4 delta_i; 3D: (-1)^nu0 = prod of the 8 delta_i and
 * (-1)^nu_j = prod of the 4 delta_i with n_j = 1, Gamma_i = (n1, n2, n3)/2. */
#ifndef BANDSIEVE_PARITY_H
#define BANDSIEVE_PARITY_H

#include "bandsieve/eig.h"
#include "bandsieve/err.h"
#include "bandsieve/model.h"
#include "bandsieve/symmetry.h"

/* Status values, numerically equal to RES_NA / RES_DONE / RES_AMBIGUOUS of diagnosis.h where
 * they mean the same; PAR_GAP_CLOSED is an ambiguous result whose cause is a gap closing. */
enum { PAR_NA = 0, PAR_DONE = 1, PAR_AMBIGUOUS = 2, PAR_GAP_CLOSED = 4 };

typedef struct par_opts {
    double gap_tol_ev;    /* E_{N+1} - E_N at a TRIM at or below this is closed (0: BS_GAP_CLOSED_EV) */
    double parity_tol;    /* largest accepted |xi - (+-1)| of a parity eigenvalue (0: 1e-3) */
    const eig_dist *dist; /* distributed eigensolver for large matrices (borrowed; NULL: LAPACK) */
    hk_engine *hk;        /* H(k) engine of the same model to share (borrowed; NULL: build one) */
} par_opts;

typedef struct par_result {
    int status;       /* PAR_* */
    char reason[152]; /* why not PAR_DONE (empty when done) */
    int dim;
    int ntrim;         /* 4 (2D, k3 = 0) or 8 (3D) */
    double trim[8][3]; /* reduced k of TRIM t = n1 + 2 n2 + 4 n3: (n1, n2, n3)/2 */
    double gap_ev[8];  /* E_{N+1} - E_N at each TRIM, N = nocc (eV) */
    int nodd[8];       /* occupied states of parity -1 (states, not pairs); -1 when not computed */
    int neven[8];      /* occupied states of parity +1; -1 when not computed */
    int delta[8];      /* +-1 product over Kramers pairs; 0 when not computed */
    double max_dev;    /* largest |xi - (+-1)| over every computed parity eigenvalue */
    int z2[4];         /* 2D: z2[0] = nu; 3D: nu0, nu1, nu2, nu3; -1 when not PAR_DONE */
} par_result;

/* Fills o with the defaults. */
void par_opts_default(par_opts *o);

/* Parity Z2 indices of m (borrowed) with the symmetries s found by sym_detect (borrowed).
 * opts may be NULL. Statuses:
 *   PAR_NA: no inversion, or no Kramers pairs (spinless, or time reversal not found); the parity
 *     counts are still filled whenever inversion holds and the TRIM is gapped;
 *   PAR_GAP_CLOSED: occupied and empty states touch at some TRIM (reason names the first);
 *   PAR_AMBIGUOUS: a parity eigenvalue is not +-1 within parity_tol, a TRIM has an odd count
 *     of odd-parity occupied states (Kramers pairs not resolved), or P and Theta do not commute
 *     (s->inv_commutes_tr == 0);
 *   PAR_DONE: z2 holds the indices.
 * Only the TRIMs are examined: a gap closing elsewhere in the zone is not detected here.
 * Returns 0 whatever the status; BS_EINVAL when s does not belong to m (size), BS_ENOMEM,
 * BS_ENUMERIC from LAPACK. */
int par_z2(const tb_model *m, const sym_info *s, const par_opts *opts, par_result *out, bs_err *err);

/* "1;111" (3D) or "1" (2D) for a PAR_DONE result, "" otherwise, into buf of size len. */
void par_format(const par_result *r, char *buf, int len);

#endif
