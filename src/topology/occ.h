/* Occupied Bloch vectors (the lowest nband eigenvectors, lattice gauge) and the direct gap above
 * them on batches of k-points, with every workspace allocated once. Private to the topology layer:
 * shared by the Wilson-loop (wilson.c) and lattice-Chern (chern.c) modules. */
#ifndef BANDSIEVE_TOPOLOGY_OCC_H
#define BANDSIEVE_TOPOLOGY_OCC_H

#include <complex.h>

#include "bandsieve/eig.h"
#include "bandsieve/err.h"
#include "bandsieve/hk.h"
#include "bandsieve/model.h"

typedef struct occ_ws occ_ws;

/* Workspace for bands 0..nband-1 of m (borrowed; must outlive the workspace), 1 <= nband < norb,
 * diagonalised by dist (borrowed; NULL: LAPACK). The caller owns *out. BS_EINVAL on a bad nband,
 * BS_ENOMEM. */
int occ_create(const tb_model *m, int nband, const eig_dist *dist, occ_ws **out, bs_err *err);

/* As occ_create, reading H(k) from hk (borrowed; an engine of m's H(R), which must outlive the
 * workspace; NULL: build one), so that one coefficient table serves every stage of a diagnosis. */
int occ_create_shared(const tb_model *m, int nband, const eig_dist *dist, hk_engine *hk, occ_ws **out,
                      bs_err *err);

/* Frees w; accepts NULL. */
void occ_free(occ_ws *w);

/* k-points per internal batch: callers streaming over many points size their buffers to it. */
int occ_batch(const occ_ws *w);

/* For nk reduced points k[3j..3j+2] (any nk; batched internally): U receives nk column-major
 * norb x nband blocks of orthonormal occupied vectors (block j at U + j*norb*nband), gap[j] =
 * E_nband(k_j) - E_(nband-1)(k_j) in eV (0-based bands). gap may be NULL. BS_ENUMERIC from LAPACK. */
int occ_states(occ_ws *w, int nk, const double *k, double complex *U, double *gap, bs_err *err);

/* k-points diagonalised so far. */
long long occ_count(const occ_ws *w);

/* +1 when the lattice rows a1, a2, a3 are right-handed, -1 otherwise (a degenerate or 2D lattice
 * with a3 = 0 counts as right-handed): the sign that turns a flux in reduced orientation into the
 * Cartesian one. */
int occ_handedness(const tb_model *m);

#endif
