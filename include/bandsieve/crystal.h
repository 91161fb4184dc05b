/* Crystal symmetry of a tight-binding model: the space group of the structure its orbitals describe
 * (found by spglib), each candidate operation verified on H(k), its matrix on the basis (real
 * orbitals of l <= 3 by realharm.h, spin 1/2 by SU(2), orbital images and lattice shifts), and the
 * symmetry eigenvalues of bands at any k.
 *
 * Sites: spatial orbitals whose centres agree (modulo the lattice) within site_tol_ang are one
 * site; a site's type for spglib is the list of its orbitals' l in order, so two sites of the same
 * orbital make-up are treated as the same species. spglib may then offer more operations than the
 * Hamiltonian has; only operations that pass the check on H(k) count ("verified").
 * Shells: on a site, the orbitals of one l form shells of 2l+1 in order of appearance; within a
 * shell the orbital's name (realharm.h) gives its index, or, without names, the order does
 * (pz px py; dz2 dxz dyz dx2-y2 dxy; ...). A partial shell (graphene's pz alone) keeps its names.
 *
 * Operation g = {W|t} acts on reduced positions as x -> W x + t. In the lattice gauge of model.h,
 *   H(W^-T k) = V(k) H(k) V(k)^dagger,  V(k)[j, i] = D[j, i] exp(-2 pi i (W^-T k) . L_i),
 * where D is the orbital-and-spin matrix (D^l(R) (x) U(R)) from shell i to the image shell, and the
 * lattice vector L_i = W tau_i + t - tau_j carries orbital i's site onto the image site.
 * Derivation: |i,k> = sum_R exp(2 pi i k.R)|i,R> and g|i,R> = sum_j D_ji |j, W R + L_i>. */
#ifndef BANDSIEVE_CRYSTAL_H
#define BANDSIEVE_CRYSTAL_H

#include <complex.h>

#include "bandsieve/err.h"
#include "bandsieve/hk.h"
#include "bandsieve/model.h"

typedef struct cry_opts {
    double site_tol_ang; /* orbital centres closer than this are one site (0: 0.05 Angstrom:
                            Wannier centres sit up to a few hundredths of an Angstrom off) */
    double symprec_ang;  /* spglib's distance tolerance (0: 0.05 Angstrom) */
    double tol;          /* largest relative residual of a verified operation (0: 1e-6) */
    int nk;              /* random k-points for the check (0: 4) */
    unsigned long long seed;
    const int *shell_index; /* nspatial indices within their shell (realharm.h order), or NULL:
                               the model's orb_shape, or the default order without it */
    hk_engine *hk;          /* H(k) engine of the model to share for the check (borrowed; NULL: build) */
} cry_opts;

typedef struct cry_op {
    int W[3][3];     /* reduced rotation (acts on positions) */
    double t[3];     /* reduced translation */
    double Rc[3][3]; /* Cartesian orthogonal matrix */
    char kind[4];    /* "1", "-1", "2", "m", "3", "-3", "4", "-4", "6", "-6" */
    double axis[3];  /* Cartesian axis of the proper part (mirror: its normal); 0 for 1, -1 */
    int verified;    /* 1 when H(k) passed the check */
    double residual; /* largest relative residual over the check's k-points */
} cry_op;

typedef struct cry_info cry_info;

/* Fills o with the defaults. */
void cry_opts_default(cry_opts *o);

/* Finds the space group of m's sites with spglib and verifies every operation on H(k) at
 * random k. In 2D only operations that keep the plane (and have no translation out of it) are
 * kept. The caller owns *out (cry_info_free). BS_EINVAL when spglib finds no symmetry at all
 * (degenerate lattice), BS_ENOMEM, errors of the H(k) engine. */
int cry_detect(const tb_model *m, const cry_opts *opts, cry_info **out, bs_err *err);

void cry_info_free(cry_info *c);

/* spglib's space-group number and international symbol of the structure (from positions only). */
int cry_spacegroup(const cry_info *c);
const char *cry_symbol(const cry_info *c);

/* Operations (all of spglib's; check cry_op.verified). Pointer owned by c. */
int cry_nops(const cry_info *c);
const cry_op *cry_get_op(const cry_info *c, int i);
/* Number of verified operations (the order of the Hamiltonian's group modulo translations). */
int cry_nverified(const cry_info *c);
/* Number of sites found. */
int cry_nsites(const cry_info *c);

/* The norb x norb column-major V(k) of operation op (see the top of this file). */
int cry_op_matrix(const cry_info *c, int op, const double k[3], double complex *V, bs_err *err);

/* Indices of the verified operations that leave k invariant modulo reciprocal lattice vectors
 * (the little group of k), into ops (capacity cry_nops); returns their number. */
int cry_little_group(const cry_info *c, const double k[3], int *ops);

/* Symmetry eigenvalues: for the bands lo..lo+nband-1 of H(k) and the operation op (which must
 * leave k invariant), the eigenvalues of psi^dagger V(k) psi (nband of them, sorted by phase)
 * into ev. Meaningful when the band set is separated from the others at k (a full degenerate
 * multiplet). BS_EINVAL when op does not leave k invariant. */
int cry_band_eigenvalues(const tb_model *m, const cry_info *c, int op, const double k[3], int lo, int nband,
                         double complex *ev, bs_err *err);

/* Real-space action of operation op on a Hamiltonian: (g.H)(q) = V(W^T q) H(W^T q) V(W^T q)^+,
 * so that g.H = H exactly when g is a symmetry. With h(R) = H(R)/deg(R),
 *   (g.h)_ab(W R - L_i + L_j) += D_ai h_ij(R) conj(D_bj).
 * cry_breaking_ev: an upper bound on max_k ||H(k) - (g.H)(k)||_2, the sum over R of the Frobenius
 * norms of h(R) - (g.h)(R) (Frobenius >= spectral norm; triangle inequality over R), in eV. */
int cry_breaking_ev(const tb_model *m, const cry_info *c, int op, double *bound_ev, bs_err *err);

/* The average of g.H over the operations ops[0..nops-1] (which must form a group: every product
 * of two of them among them, the identity included), a new model with deg = 1 on the union of the
 * lattice vectors reached. Exactly symmetric under those operations up to round-off; for exact
 * symmetries it equals H. The caller owns *out. */
/* 1 when the operations ops[0..nops-1] are closed under composition (modulo lattice translations). */
int cry_is_group(const cry_info *c, const int *ops, int nops);

int cry_symmetrise(const tb_model *m, const cry_info *c, const int *ops, int nops, tb_model **out,
                   bs_err *err);

#endif
