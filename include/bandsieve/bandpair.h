/* The two bands at the filling (E_N and E_{N+1}, N = nocc) on batches of k-points, a uniform mesh
 * of them, and a derivative-free local minimiser in reduced coordinates with periodic wrapping.
 * Shared by the gap search (gaps.h) and the node search (nodes.h). */
#ifndef BANDSIEVE_BANDPAIR_H
#define BANDSIEVE_BANDPAIR_H

#include "bandsieve/clock.h"
#include "bandsieve/eig.h"
#include "bandsieve/err.h"
#include "bandsieve/hk.h"
#include "bandsieve/model.h"

typedef struct bp_eval bp_eval;

/* Evaluator of bands nocc-1 and nocc (0-based) of m (borrowed) through hk (borrowed; both must
 * outlive the evaluator). deadline: absolute bs_now() seconds (clock.h; deadlines throughout this
 * layer are absolute values of that clock) after which bp_bands fails with
 * BS_ETIMEOUT (0: none). The caller owns *out. BS_EINVAL when hk's size is not m->norb or
 * m->nocc is outside 1..norb-1. */
int bp_create(const tb_model *m, hk_engine *hk, double deadline, bp_eval **out, bs_err *err);

/* As bp_create, diagonalising with dist (borrowed, must outlive the evaluator; NULL: LAPACK). */
int bp_create_dist(const tb_model *m, hk_engine *hk, const eig_dist *dist, double deadline, bp_eval **out,
                   bs_err *err);

/* The solver the evaluator was created with (NULL: LAPACK), for modules that share its model. */
const eig_dist *bp_solver(const bp_eval *e);

/* Frees e; accepts NULL. */
void bp_free(bp_eval *e);

/* lo[j] = E_N(k_j), hi[j] = E_{N+1}(k_j) in eV for nk reduced points k[3*j..3*j+2] (any nk; batched
 * internally at the engine's batch size). BS_ETIMEOUT past the deadline, BS_ENUMERIC from LAPACK. */
int bp_bands(bp_eval *e, int nk, const double *k, double *lo, double *hi, bs_err *err);

/* Declares that E(-k) = E(k) holds to round-off for m (time reversal or inversion exact: the
 * caller has checked it on H), so that meshes diagonalise one point of each pair k, -k and copy
 * the other, and the gap search refines one basin of each mirror pair. Off by default. */
void bp_set_even(bp_eval *e, int even);
int bp_even(const bp_eval *e);

/* k-points diagonalised so far by e. */
long long bp_count(const bp_eval *e);

/* Dimension (2 or 3) of e's model. */
int bp_dim(const bp_eval *e);

/* A uniform mesh n^dim of k = ((i1 + o1)/n, (i2 + o2)/n, (i3 + o3)/n) with both bands, o the offset
 * in mesh steps (zero unless made by bp_mesh_eval_offset); index i1 + n*(i2 + n*i3). */
typedef struct bp_mesh {
    int dim, n, npts;
    double off[3];   /* offset in mesh steps */
    double *lo, *hi; /* npts each, eV */
} bp_mesh;

/* Evaluates the mesh of n per direction (n >= 2). The caller owns *out (bp_mesh_free). */
int bp_mesh_eval(bp_eval *e, int n, bp_mesh **out, bs_err *err);

/* As bp_mesh_eval for the mesh displaced by off[0..dim-1] mesh steps (e.g. 1/2: the points midway
 * between those of the unshifted mesh). */
int bp_mesh_eval_offset(bp_eval *e, int n, const double off[3], bp_mesh **out, bs_err *err);

/* Frees g; accepts NULL. */
void bp_mesh_free(bp_mesh *g);

/* Reduced coordinates of mesh point idx. */
void bp_mesh_k(const bp_mesh *g, int idx, double k[3]);

/* Index of the mesh point displaced from idx by d[0..dim-1] steps, wrapped periodically. */
int bp_mesh_shift(const bp_mesh *g, int idx, const int d[3]);

/* Indices of the local minima of f (npts values on g) among all 3^dim - 1 periodic neighbours,
 * f[i] <= every neighbour, sorted by increasing f, at most cap of them, into idx; returns the count.
 * Plateaus give several points; callers merge what converges to the same place. */
int bp_mesh_minima(const bp_mesh *g, const double *f, int cap, int *idx);

/* Function minimised by bp_minimise. */
enum { BP_GAP = 0, BP_NEG_LOWER = 1, BP_UPPER = 2 };

/* Minimises, starting at k0 with initial radius step0/2 (reduced units), the direct gap E_{N+1}-E_N
 * (BP_GAP), -E_N (BP_NEG_LOWER) or E_{N+1} (BP_UPPER), until the radius is below tol_k: a
 * derivative-free trust region on least-squares quadratic fits over a 3^dim stencil, of gap^2 for
 * BP_GAP (smooth at a linear touching, where the gap itself is a cone) and of the function otherwise,
 * falling back on the stencil's best point. On a nodal line only the part of a step across the
 * line is taken. kmin receives the minimiser wrapped into [0,1), *fmin the value there (eV), lo/hi
 * (may be NULL) the two bands at kmin. */
int bp_minimise(bp_eval *e, int what, const double k0[3], double step0, double tol_k, double kmin[3],
                double *fmin, double *lo, double *hi, bs_err *err);

/* Curvature of gap^2 at k: eigenvalues ev[0..dim-1] (ascending, eV^2 per reduced unit^2) and
 * eigenvectors (columns of the dim x dim array vec) of the Hessian of a least-squares quadratic fit
 * of gap^2 on the 3^dim stencil of spacing r. At an isolated linear touching every eigenvalue is
 * positive; on a nodal line the one along the line vanishes and its eigenvector is the tangent.
 * BS_ENUMERIC when the fit fails. */
int bp_gap_curvature(bp_eval *e, const double k[3], double r, double ev[3], double vec[9], bs_err *err);

/* Distance between reduced points a and b modulo the reciprocal lattice (componentwise minimum
 * image, Euclidean in reduced units, over the first dim components). */
double bp_kdist(int dim, const double a[3], const double b[3]);

#endif
