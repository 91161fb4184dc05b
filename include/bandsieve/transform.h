/* Basis changes of a tight-binding model that leave every physical result unchanged: permutations
 * of the spatial orbitals, orbital phases (gauge), and the order of the two spin blocks. Used by
 * invariance tests (common practice: invariants do not depend on the basis). Each function returns
 * a new model and keeps the explicit inversion operator, if the model has one, consistent. */
#ifndef BANDSIEVE_TRANSFORM_H
#define BANDSIEVE_TRANSFORM_H

#include "bandsieve/err.h"
#include "bandsieve/model.h"

/* Reorders the spatial orbitals: orbital k of *out is orbital perm[k] of m (perm: nspatial
 * 0-based entries, a permutation). Both spin states of an orbital move together and the spin
 * layout is kept; positions, l and the inversion operator follow. m and perm are borrowed; the
 * caller owns *out. Errors: BS_EINVAL (perm not a permutation), BS_ENOMEM. */
int tf_permute(const tb_model *m, const int *perm, tb_model **out, bs_err *err);

/* Re-phases the basis: the states of spatial orbital o become exp(i phi[o]) |o, s> (phi in
 * radians, nspatial entries), so H'_ab(R) = exp(-i phi_a) H_ab(R) exp(i phi_b).
 * Both spins of an orbital take the same phase: the transformation is then D(phi) x 1_spin, which
 * commutes with the spin matrices s_x, s_y, s_z, so spin operators (the spin current of the spin
 * Hall conductivity, the spin-up/down split of the layout) keep their matrix form; a
 * spin-dependent phase would rotate the spin axes. (Time reversal i s_y K stays a valid
 * antiunitary operator with square -1, its orbital part becoming diag(exp(-2 i phi_o)).)
 * With an explicit inversion operator, the sign of state i becomes sign_i exp(i(phi_i - phi_j))
 * (j its image), which must be real: phi must agree modulo pi on inversion partners, else
 * BS_EINVAL. m and phi are borrowed; the caller owns *out. */
int tf_phase(const tb_model *m, const double *phi, tb_model **out, bs_err *err);

/* Converts a spinful model to layout (TB_SPIN_BLOCKS or TB_SPIN_INTERLEAVED): the same states in
 * the other order. m is borrowed; the caller owns *out. Errors: BS_EINVAL for a spinless model
 * or an unknown layout. */
int tf_spin_layout(const tb_model *m, int layout, tb_model **out, bs_err *err);

/* Reorders the basis states: state a of *out is state old_of_new[a] of m (norb 0-based entries,
 * a permutation), without regard to orbitals or spin; orbital data are copied unchanged, so this
 * is the caller's tool when it also fixes orb_pos, orb_l and spin_layout. Errors: BS_EINVAL. */
int tf_permute_states(const tb_model *m, const int *old_of_new, tb_model **out, bs_err *err);

#endif
