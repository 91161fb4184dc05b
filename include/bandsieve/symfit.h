/* Approximate symmetry of fitted Hamiltonians: how strongly H(R) breaks time reversal or
 * inversion, measured as an energy, and the symmetrised model H_s obtained by averaging H(R) over
 * the operation. The operators are those of sym_detect (symmetry.h), found from the spin layout,
 * positions and l, with factors solved from H(k); they exist even when the check on H(k) fails.
 *
 * Action on the hoppings, with E(R) = H(R)/deg(R) (so that H(k) = sum_R exp(2 pi i k.R) E(R)):
 *   time reversal  (Theta E)(R)[t(a), t(b)] = u_a conj(u_b) conj(E(R)[a, b])           (same R);
 *   inversion      (P E)(R')[p(a), p(b)]   = x_a conj(x_b) E(R)[a, b],  R' = -R - s_a + s_b,
 * with t, u the map and factors of Theta = U K and p, x, s those of P(k) (symmetry.h). Both are
 * involutions on the space of E (Theta^2 = +-1 acts as the identity on operators, P^2 = 1), and
 * g(H)(k) = g H(g^-1 k) g^-1, so H is symmetric exactly when E = gE. The symmetrised model is the
 * average over the group: (E + gE)/2 for one operation, (E + Theta E + P E + P Theta E)/4 for both
 * (P is first made an exact involution commuting with Theta, see symfit_symmetrise).
 *
 * Why an energy: for any Hermitian perturbation D(k), every eigenvalue of H(k) + D(k) lies within
 * ||D(k)||_2 of the corresponding one of H(k) (Weyl's inequality for Hermitian matrices; common
 * practice in numerical linear algebra, e.g. Horn and Johnson, Matrix Analysis, from memory). So
 * when the direct gap exceeds 2 max_k ||H(k) - H_s(k)||, the straight path from H to H_s keeps the
 * gap open and every invariant protected by the restored symmetry of H_s describes H as well. */
#ifndef BANDSIEVE_SYMFIT_H
#define BANDSIEVE_SYMFIT_H

#include "bandsieve/err.h"
#include "bandsieve/model.h"
#include "bandsieve/symmetry.h"

enum { SYMFIT_TR = 1, SYMFIT_INV = 2 };

/* Verdicts on one symmetry (see symfit_verdict). */
enum { SYMFIT_NA = -1, SYMFIT_EXACT = 0, SYMFIT_APPROX = 1, SYMFIT_BROKEN = 2 };

/* A symmetry whose breaking bound delta satisfies scale / delta >= SYMFIT_MARGIN_APPROX is
 * "approximate": with scale the direct gap, the path from H to its symmetrised model stays
 * gapped (the bound moves each band by at most delta / 2, see above). Below it, "broken". */
#define SYMFIT_MARGIN_APPROX 1.0
/* Margins below this are too thin to trust without reservation: no class built on a restored
 * symmetry gets confidence >= 0.8 below it (symfit_confidence_factor), and the reason says so. */
#define SYMFIT_MARGIN_SAFE 2.0
/* A breaking is "physical" (a real magnetic or structural distortion, not fit error) when
 * even the lower bound of its breaking (the largest breaking seen on a k mesh) is at least
 * SYMFIT_PHYSICAL_RATIO times the scale (direct gap, or bandwidth when gapless), and the breaking
 * is coherent: lower >= SYMFIT_COHERENT_RATIO x upper. A physical term (an exchange field, a flux
 * pattern) adds up in phase at some k, so its two bounds nearly meet (they are equal for an
 * on-site exchange field); fit errors are uncorrelated between lattice vectors and add up out of
 * phase, so the largest breaking on the mesh stays well below the sum over R (about a third for
 * the random noise of the tests). Magnitude alone cannot tell them apart: noise of 3% of the
 * largest hopping breaks time reversal of the Kane-Mele model by more than its gap. 0.5: a
 * coherent breaking of half the gap or more (margin below 2) is not restored even where the
 * margin alone would allow it. Whatever falls between the regimes gets both readings and a low
 * confidence, unless the card says. */
#define SYMFIT_PHYSICAL_RATIO 0.5
#define SYMFIT_COHERENT_RATIO 0.6
/* The breaking that verdicts and margins use: min(upper bound, SYMFIT_MESH_SAFETY x the largest
 * breaking on the k mesh). The upper bound is rigorous but adds the norms of every H(R): for a fit
 * whose errors are uncorrelated between lattice vectors it exceeds the true maximum by about the
 * square root of their number (a 32-state model with fit noise of 1e-3: 0.9 eV against 0.1 eV),
 * which would leave every realistic fit undetermined. The mesh resolves the longest hopping range
 * with at least two points per period (symfit_opts), and 1.5 covers what falls between its
 * points; this is our choice, stated with every result ("breaking_bound"). */
#define SYMFIT_MESH_SAFETY 1.5
/* Scale of the confidence factor 1 - exp(-margin / SCALE): 0.81 at margin 2, 0.96 at 4. */
#define SYMFIT_CONFIDENCE_SCALE 1.2

/* Breaking of one operation g by a model, in eV. */
typedef struct symfit_break {
    int available;   /* 0 when no candidate operator exists (no inversion map) */
    double upper_ev; /* sum_R ||E(R) - gE(R)||: an upper bound of max_k ||H(k) - gH(k)|| */
    double lower_ev; /* max over the k mesh of ||H(k) - gH(k)||_2: a lower bound of it */
    double relative; /* upper_ev / sum_R ||E(R)||: dimensionless */
    double kmax_ev;  /* symfit_symmetrise's moved only (0 elsewhere): an upper bound of
                        max_k ||H(k) - gH(k)||_2 no larger than upper_ev, from the largest
                        ||H(k) - gH(k)||_F on a k mesh fine enough for Bernstein's inequality
                        (symfit_kmax_bound); upper_ev when that would cost too much */
} symfit_break;

/* Settings of the measure; 0 fields take the defaults in brackets. */
typedef struct symfit_opts {
    int mesh; /* k mesh per periodic direction for the lower bound [2 max|R_i| + 2,
                 at least 6 and a multiple of 6 up to 18 in 2D, at least 4 and even up
                 to 8 in 3D]: even sizes contain the TRIM, multiples of 3 the
                 honeycomb K points */
} symfit_opts;

/* An upper bound of the spectral norm of the n x n column-major A: min(||A||_F,
 * sqrt(||A||_1 ||A||_inf)) (both bound ||A||_2; common practice). O(n^2). */
double symfit_norm_bound(int n, const double complex *A);

/* An upper bound of max over all k of ||D(k)||_2, D(k) = sum_r D_r exp(2 pi i k.R_r) (nr matrices
 * n x n, one after another; R_r in reduced coordinates, dim periodic directions; a vector may
 * repeat) when D_{-R} = D_R^dagger; otherwise of its Hermitian part (D(k) + D(k)^dagger) / 2, the
 * matrix that hk.c diagonalises for a model Hermitian only within BS_HERMITIAN_TOL_EV.
 * P(k) = ||D(k)||_F^2 >= ||D(k)||_2^2 is a trigonometric polynomial with frequencies |d_a| <= L_a
 * (L_a twice the largest |R_a|); its values on a grid of 2 L_a + 1 points per direction (discrete
 * Fourier sums of each orbital pair) give its coefficients exactly. Its largest value on a mesh of
 * M_a points per direction, divided by 1 - W^2 / 4 with W = pi sum_a L_a / M_a, bounds its
 * maximum P*: along the segment from P's maximum (where g' = 0) to the nearest mesh point,
 * g - P* / 2 has frequencies at most W and size at most P* / 2 (0 <= P <= P*), so Bernstein's
 * inequality gives |g''| <= W^2 P* / 2 (S. Bernstein, Mem. Acad. Roy. Belg. 4, 1 (1912),
 * reference from memory, in the form for functions of exponential type); the mesh is chosen for
 * W <= 0.85, at most 10% on the norm. For fit noise, uncorrelated between lattice vectors, the
 * bound is about the square root of their number below the sum of norms per lattice vector, and
 * about sqrt(n) / 2 above the true spectral maximum. *out = INFINITY (no bound) when the
 * transforms and the mesh would cost more than SYMFIT_KMAX_BUDGET n^3 multiply-adds (or
 * SYMFIT_KMAX_FLOOR, whichever is larger). BS_ENOMEM. */
int symfit_kmax_bound(int n, int nr, const int (*R)[3], int dim, const double complex *D, double *out,
                      bs_err *err);
/* The cost cap of symfit_kmax_bound, in units of n^3 complex multiply-adds: the transforms cost
 * about n^2 / 2 (L + 1) (2 L + 1)^3 for hoppings out to L / 2 cells, the mesh less. Measured on the
 * costliest benchmark model (48 states, 639 lattice vectors, L = 10: 2,300 units): 0.14 s, the
 * time of about 450 of its eigensolves, where the tighter window saved 1,100 of them. Small models
 * get the floor instead (2e7 multiply-adds, some 20 ms): their mesh alone exceeds n^3 many times. */
#define SYMFIT_KMAX_BUDGET 3000
#define SYMFIT_KMAX_FLOOR  2e7

/* Breaking of m (borrowed) by time reversal (which = SYMFIT_TR) or inversion (SYMFIT_INV) with the
 * operators of s (borrowed; from sym_detect on m). o may be NULL. out->available = 0 and 0 returned
 * when s has no inversion candidate. BS_EINVAL (s not of m), BS_ENOMEM, BS_ENUMERIC. */
int symfit_measure(const tb_model *m, const sym_info *s, int which, const symfit_opts *o, symfit_break *out,
                   bs_err *err);

/* The symmetrised model: the average of m over the operations in `which` (SYMFIT_TR, SYMFIT_INV
 * or both). With both, the inversion factors of s are first adjusted so that P Theta = Theta P
 * holds exactly (the factors of a spin-down state follow from its spin-up partner's), since the
 * factors solved from a noisy H(k) commute only up to the noise; s is modified accordingly and
 * s->inv_commutes_tr set. The result has the union of m's lattice vectors and their images, all
 * with deg = 1, and otherwise m's fields; the caller owns *out. *moved (may be NULL: then the mesh
 * is skipped) receives the bounds of max_k ||H(k) - H_s(k)||_2 as symfit_measure gives them for
 * H - gH (o may be NULL: default mesh).
 * BS_EINVAL (which asks for inversion without a candidate, or the maps of P and Theta do not
 * commute), BS_ENOMEM, and the limits of tb_model_create. */
int symfit_symmetrise(const tb_model *m, sym_info *s, int which, const symfit_opts *o, tb_model **out,
                      symfit_break *moved, bs_err *err);

/* min(b->upper_ev, SYMFIT_MESH_SAFETY * b->lower_ev) (the upper bound when the mesh saw nothing),
 * and in *which (may be NULL) "upper bound" or "mesh x 1.5", the one taken. */
double symfit_estimate(const symfit_break *b, const char **which);

/* Verdict on a symmetry: SYMFIT_EXACT when `exact` (it passed sym_detect's residual check),
 * otherwise SYMFIT_APPROX when scale_ev >= SYMFIT_MARGIN_APPROX * symfit_estimate(b), else
 * SYMFIT_BROKEN; SYMFIT_NA when !b->available. scale_ev: the direct gap, or the bandwidth of the
 * bands at the filling when the material is gapless. */
int symfit_verdict(int exact, const symfit_break *b, double scale_ev);

/* 1 when a broken symmetry is physical: b->lower_ev >= SYMFIT_PHYSICAL_RATIO * scale_ev and
 * b->lower_ev >= SYMFIT_COHERENT_RATIO * b->upper_ev. */
int symfit_physical(const symfit_break *b, double scale_ev);

/* Factor in (0, 1) by which a confidence built on a restored symmetry is multiplied, for margin
 * Delta / delta > 0: 1 - exp(-margin / SYMFIT_CONFIDENCE_SCALE), increasing in the margin, below
 * 0.82 at SYMFIT_MARGIN_SAFE; 1 for an infinite margin (exact symmetry). */
double symfit_confidence_factor(double margin);

/* "exact", "approximate", "broken" or "not applicable". */
const char *symfit_verdict_name(int v);

#endif
