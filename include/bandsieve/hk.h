/* H(k) and dH/dk from H(R), many k-points at once.
 *
 * Method: the pairs R, -R are folded with hermiticity, H(k) = H_0 + sum_{R in half}
 * [cos(2 pi k.R) C_R + sin(2 pi k.R) S_R] with C_R = H_R + H_R^dagger and S_R = i (H_R - H_R^dagger),
 * both Hermitian, so only their upper triangles (as real pairs) are stored. A batch of k-points is
 * then one real matrix product (DGEMM) of that coefficient table with a table of cosines and sines:
 * a quarter of the flops of the direct complex sum and at BLAS speed. Derivatives from a reduced
 * engine (hk_reduce) are valid only along the axes that were not fixed. */
#ifndef BANDSIEVE_HK_H
#define BANDSIEVE_HK_H

#include <complex.h>

#include "bandsieve/err.h"
#include "bandsieve/model.h"

typedef struct hk_engine hk_engine;

/* Prepares the folded coefficient table of m for batches of up to max_batch k-points, or, for a
 * folded model (tb_model_fold) whose table would reach BS_HK_BORROW_BYTES, an engine that reads
 * m's blocks (hk_create_borrowed). m is borrowed and must outlive the engine. The caller owns *out. */
int hk_create(const tb_model *m, int max_batch, hk_engine **out, bs_err *err);

/* An engine without a table: each batch is one complex product of m's stored blocks (m borrowed,
 * must outlive the engine) with their phases, H(k) = P + P^dagger. The same H(k) as hk_create's
 * to round-off, with no copy of the hoppings, at twice the flops of the table's product; reduced
 * engines (hk_reduce) made from it have tables of their own, as from any engine. */
int hk_create_borrowed(const tb_model *m, int max_batch, hk_engine **out, bs_err *err);

/* Frees e; accepts NULL. */
void hk_free(hk_engine *e);

/* Number of basis states (matrix size). */
int hk_norb(const hk_engine *e);

/* Largest batch accepted by hk_build / hk_build_deriv. */
int hk_max_batch(const hk_engine *e);

/* Builds H(k) for nk <= max_batch reduced k-points k[3*j..3*j+2]. H receives nk full Hermitian
 * matrices, column-major (element (a,b) of matrix j at H[j*norb*norb + a + b*norb]), eV. */
int hk_build(hk_engine *e, int nk, const double *k, double complex *H, bs_err *err);

/* As hk_build, and also dH/dk_i with respect to the reduced coordinates (eV per unit of reduced
 * k, i.e. d/dk_i where k.R = k_i R_i): dH receives nk*3 matrices, dH[(j*3+i)*norb*norb + ...].
 * H may be NULL when only derivatives are wanted. */
int hk_build_deriv(hk_engine *e, int nk, const double *k, double complex *H, double complex *dH, bs_err *err);

/* Dimension-by-dimension partial sums. Fixes reduced coordinate `axis` (0..2) at kval and sums it
 * out: the result is an engine over the remaining lattice-vector components, so H(k) for k with
 * k[axis] = kval costs (distinct remaining R) instead of N_R per point. Reducing twice gives a line
 * engine whose cost per k is ~ (2 R_max + 1) columns: a Wilson-loop string or a mesh row then costs
 * little more than its diagonalisations. Points passed to a reduced engine keep all three
 * components; the fixed ones are ignored. The caller owns *out; src is only read, and *out does
 * not refer to it afterwards. */
int hk_reduce(const hk_engine *src, int axis, double kval, int max_batch, hk_engine **out, bs_err *err);

/* Recomputes dst (made by hk_reduce from the same src and axis) for a new kval, without
 * allocating: the column structure depends only on the lattice vectors. */
int hk_rereduce(hk_engine *dst, const hk_engine *src, double kval, bs_err *err);

/* A cache of partial sums for callers that evaluate k-points in batches along lines (Wilson-loop
 * strings, mesh rows). hk_lines_build looks at each batch: when its points share two reduced
 * coordinates, it builds them from a line engine (hk_reduce twice), reusing the plane reduction
 * while that coordinate stays fixed from batch to batch; otherwise it falls back on hk_build.
 * Results are those of hk_build to round-off. full is borrowed and must outlive the cache. */
typedef struct hk_lines hk_lines;

int hk_lines_create(hk_engine *full, hk_lines **out, bs_err *err);
void hk_lines_free(hk_lines *l);
int hk_lines_build(hk_lines *l, int nk, const double *k, double complex *H, bs_err *err);

/* Reference implementation: the direct complex sum over every R at one k (for tests and the
 * benchmark's baseline). H as in hk_build with nk = 1. */
void hk_build_direct(const tb_model *m, const double k[3], double complex *H);

#endif
