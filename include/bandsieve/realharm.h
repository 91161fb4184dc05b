/* Real spherical harmonics of l <= 3 and their rotation matrices, and the SU(2) matrix of a
 * rotation acting on spin 1/2. The matrices are derived in code from the functions themselves
 * (no hand-typed tables): D^l(R) is the least-squares solution of Y_m(R^T r) = sum_m' Y_m'(r) D_m'm
 * over a fixed set of directions, exact to round-off because the span of a shell is closed under
 * rotations and reflections.
 *
 * Order within a shell (our documented default, by m): index 0 is m = 0, then m = +1, -1, +2, -2,
 * +3, -3. The names are the common chemistry labels:
 *   l = 0: s
 *   l = 1: pz px py
 *   l = 2: dz2 dxz dyz dx2-y2 dxy
 *   l = 3: fz3 fxz2 fyz2 fz(x2-y2) fxyz fx(x2-3y2) fy(3x2-y2)
 * Real harmonics are taken with the sign that makes the named polynomial's leading coefficient
 * positive (px ~ +x, dxy ~ +xy, ...): the Condon–Shortley phase is not applied. */
#ifndef BANDSIEVE_REALHARM_H
#define BANDSIEVE_REALHARM_H

#include <complex.h>

#include "bandsieve/err.h"

#define RH_LMAX 3

/* Real harmonic of angular momentum l (0..3) and shell index idx (0..2l) at direction r (any
 * non-zero length; only the direction matters), normalised on the unit sphere. */
double rh_eval(int l, int idx, const double r[3]);

/* Name of shell index idx of l ("px", ...), or NULL when out of range. */
const char *rh_name(int l, int idx);

/* Shell index of the name (case-sensitive, as listed above) for l, or -1. */
int rh_index(int l, const char *name);

/* The (2l+1) x (2l+1) column-major matrix D with Y_idx(R^T r) = sum_j Y_j(r) D[j + idx (2l+1)]
 * for the orthogonal Cartesian matrix R (proper or improper). BS_EINVAL when R is not orthogonal
 * to 1e-8, BS_ENUMERIC when the fit fails. */
int rh_rotation(int l, const double R[3][3], double *D, bs_err *err);

/* The 2x2 column-major SU(2) matrix U = exp(-i theta n.sigma / 2) of the proper part det(R) R of
 * an orthogonal R (inversion acts trivially on spin), in the basis (up, down) along z. The overall
 * sign is a choice (double group); this picks theta in [0, pi]. */
void rh_spin_rotation(const double R[3][3], double complex U[4]);

#endif
