/* Detection of time reversal and inversion of a tight-binding model, each candidate operator built
 * from the spin layout or the orbital positions and angular momenta (or the card's explicit
 * inversion operator) and then verified numerically on H(k) at random k.
 *
 * Gauge: H(k) = sum_R exp(2 pi i k.R) H(R)/deg(R) with no orbital positions in the phase (the
 * "lattice gauge" of model.h). In this gauge both operators are permutations of the basis states
 * with a unit complex factor per state and, for inversion, k-dependent phases:
 *   time reversal  Theta = U K,  U H(k)^* U^dagger = H(-k),  U[tr_perm[i], i] = tr_factor[i];
 *     the map is i -> i (spinless, Theta = K) or the spin flip of i (spinful, Theta = i s_y K);
 *   inversion      P(k) H(k) P(k)^dagger = H(-k),
 *     P(k)[inv_perm[i], i] = inv_factor[i] exp(2 pi i k.inv_shift[i]), every other element zero,
 *     where state i (orbital at tau_i) is carried to state perm[i] and 2c - tau_i = tau_perm[i] +
 *     shift[i] for the inversion centre c (a lattice vector shift[i]; zero third component in 2D).
 * Derivation: a Bloch sum |i,k> = sum_R exp(2 pi i k.R) |i,R> is carried by r -> 2c - r to
 * factor_i exp(2 pi i k.shift[i]) |perm[i], -k>.
 *
 * The factors: in the usual gauge they are (-1)^l (inversion, spin untouched) and the entries of
 * i s_y (time reversal), but a model may come in any orbital phase convention, so only the maps are
 * taken from positions, l and the spin layout; the factors are then solved from H(k) at one random
 * k (a spanning forest of the strongest elements fixes them up to one phase per connected block),
 * and the block phases are fixed by Theta^2 = -1 (spinful) or +1, P^2 = 1, P Theta = Theta P, and
 * otherwise by the usual-gauge guess. Every operator is then verified at all the random k. */
#ifndef BANDSIEVE_SYMMETRY_H
#define BANDSIEVE_SYMMETRY_H

#include <complex.h>

#include "bandsieve/err.h"
#include "bandsieve/hk.h"
#include "bandsieve/model.h"

enum { SYM_INV_NONE = 0, SYM_INV_CARD = 1, SYM_INV_POSITIONS = 2 };

typedef struct sym_opts {
    int nk;                  /* random k-points for the verification (0: 6) */
    unsigned long long seed; /* seed of the generator that draws them */
    double tol;              /* largest accepted relative residual (0: 1e-6, see sym_info) */
    double pos_tol;          /* reduced-coordinate tolerance when matching positions (0: 1e-3) */
    double pos_tol_ang;      /* Cartesian tolerance in Angstrom when matching positions (0: 0.05);
                                two positions match when either tolerance accepts them */
    int skip_inversion;      /* 1: time reversal only (inversion fields stay empty) */
    hk_engine *hk;           /* H(k) engine of the model's H(R) to use instead of building one
                                (borrowed, batch of at least 2; NULL: build): the diagnosis shares
                                its tables with every stage (the coefficient table is as large as
                                half the model) */
} sym_opts;

/* What sym_detect found. Residuals are relative: the largest, over the random k-points, of
 * ||g(H(k)) - H(-k)||_F / ||H(k)||_F (dimensionless; the absolute value when ||H(k)||_F is zero),
 * with g the candidate's action; *_residual_ev is the largest element |difference| in eV.
 * A symmetry is "found" when its residual is <= opts.tol; for a rejected one the verification
 * stops at the first k-point above tol and reports that value (for inversion, of the candidate
 * with the smallest such value). When no candidate operator exists at all (no position
 * matching), the inversion residuals are -1. The arrays are owned by the struct; read only. */
typedef struct sym_info {
    int norb, dim, spinful;

    int time_reversal; /* 1 when Theta passed the check */
    int tr_squared;    /* Theta^2: -1 spinful (Kramers pairs), +1 spinless */
    double tr_residual, tr_residual_ev;
    int *tr_perm;              /* norb: U carries state i to tr_perm[i] ... */
    double complex *tr_factor; /* ... with factor tr_factor[i] (unit modulus) */

    int inversion;  /* 1 when P passed the check */
    int inv_source; /* SYM_INV_*: where the (best) candidate came from */
    double inv_residual, inv_residual_ev;
    double inv_centre[3]; /* reduced coordinates of the centre c (positions candidates) */
    int *inv_perm;        /* norb each, NULL when inv_source == SYM_INV_NONE */
    double complex *inv_factor;
    int (*inv_shift)[3];
    int inv_commutes_tr; /* 1 when P(-k) U = U P(k)^* holds (checked when both were found) */

    char note[200]; /* why a candidate was rejected (empty when everything was found) */
} sym_info;

/* Fills o with the defaults (nk 6, seed 1, tol 1e-6, pos_tol 1e-3, pos_tol_ang 0.05). */
void sym_opts_default(sym_opts *o);

/* Detects time reversal and inversion of m (borrowed). opts may be NULL (defaults).
 * Time reversal: the map of the spin layout, factors solved (top of this file).
 * Inversion: the card's operator as given (factors = its signs, not solved) when
 * m->has_inversion_op; if that fails the check, or there is none, maps from positions and l for
 * the centres c = 0, then c = (tau_0 + tau_j)/2 for every orbital j with the l of orbital 0
 * (c and c + L/2 are centres together, so these cover every centre); each map sends orbital a to
 * the orbital of the same l at 2c - tau_a (mod lattice), the j-th orbital of a shell (same site,
 * same l) to the j-th of the image shell in order of appearance. The first map that passes the
 * check wins. The caller owns *out (sym_info_free). BS_EINVAL for a malformed card operator (a
 * target outside the basis, a factor not +-1, not squaring to one); BS_ENOMEM; errors of the
 * H(k) engine. Cost: (1 + candidates) * nk pairs of H(k) and O(norb^2) work per pair. */
int sym_detect(const tb_model *m, const sym_opts *opts, sym_info **out, bs_err *err);

/* Frees s; accepts NULL. */
void sym_info_free(sym_info *s);

/* The norb x norb column-major inversion matrix P(k) at reduced k (see the top of this file).
 * 0, or BS_EINVAL when s holds no inversion candidate (P untouched). Available whenever
 * s->inv_source != SYM_INV_NONE, even if the check failed. */
int sym_inversion_matrix(const sym_info *s, const double k[3], double complex *P);

/* out = P(k) V for the norb x ncol column-major V (leading dimension norb), without forming P.
 * out must not alias V. 0, or BS_EINVAL as sym_inversion_matrix. */
int sym_inversion_apply(const sym_info *s, const double k[3], int ncol, const double complex *V,
                        double complex *out);

/* The norb x norb column-major unitary U of Theta = U K (k-independent in the lattice gauge). */
void sym_tr_matrix(const sym_info *s, double complex *U);

#endif
