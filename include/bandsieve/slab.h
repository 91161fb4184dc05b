/* Slabs (3D bulk) and ribbons (2D bulk) cut from a bulk model along a lattice plane or line.
 *
 * The bulk lattice is rebased by an integer unimodular matrix M (rows: new lattice vectors in the
 * old reduced components): in 3D rows 0 and 1 span the plane with Miller indices (h,k,l) and row 2
 * steps one lattice plane (G.row2 = 1, G = (h,k,l)); in 2D row 0 runs along the edge line (h,k),
 * row 1 steps one line and row 2 is the unchanged a3. The stacking axis is 2 (3D) or 1 (2D). det M
 * = +1, so the stacking vector points to the side of +G, which is called the top. Lattice vectors
 * and reduced positions transform as x' = M^{-T} x, reduced k as k' = M k; H(R) keeps the lattice
 * gauge (H(k) = sum_R e^{2 pi i k.R} H(R) / deg(R)), so the rebasing only relabels hoppings.
 * Each orbital is moved by a whole lattice vector along the stacking axis into its home layer,
 * x'_stack in [cut, cut + 1); the cut fixes the termination.
 *
 * The slab keeps N cells along the stacking axis, layer 0 at the bottom, N - 1 at the top; slab
 * state j*norb + i is bulk state i in layer j. Its Hamiltonian is a function of the in-plane
 * reduced k' (k'_1, k'_2 in 3D; k'_1 in 2D, the second component ignored). */
#ifndef BANDSIEVE_SLAB_H
#define BANDSIEVE_SLAB_H

#include <complex.h>

#include "bandsieve/err.h"
#include "bandsieve/model.h"

typedef struct slab slab;

/* Integer unimodular basis for the plane (3D) or edge line (2D, miller[2] must be 0) with Miller
 * indices miller (coprime, not all zero) of bulk (borrowed, only its lattice and dim are read):
 * M as described above, with the shortest in-plane vectors (ties broken deterministically).
 * BS_EINVAL for indices that are zero, not coprime, or have miller[2] != 0 in 2D. */
int slab_basis(const tb_model *bulk, const int miller[3], int M[3][3], bs_err *err);

/* Builds the slab of nlayers cells (1 <= nlayers <= BS_MAX_NORB / norb) of bulk (borrowed; not
 * referred to afterwards) for the given Miller indices and termination cut (reduced, any real).
 * The caller owns *out (slab_free). BS_EINVAL for bad indices or layer counts, BS_ENOMEM. */
int slab_create(const tb_model *bulk, const int miller[3], int nlayers, double cut, slab **out, bs_err *err);

/* Frees s; accepts NULL. */
void slab_free(slab *s);

/* Slab states (nlayers * bulk norb), layers, bulk states per layer, in-plane dimension (2 for a
 * slab, 1 for a ribbon), and the largest |R'_stack| of any hopping (principal-layer thickness). */
int slab_nstates(const slab *s);
int slab_nlayers(const slab *s);
int slab_norb(const slab *s);
int slab_kdim(const slab *s);
int slab_range(const slab *s);

/* The rebasing matrix M (see above). */
void slab_matrix(const slab *s, int M[3][3]);

/* The bulk model in the rebased lattice (owned by s, valid until slab_free): same H(k) up to the
 * relabelling k' = M k, with orbitals in their home layers. Used for projected bulk bands. */
const tb_model *slab_rebased(const slab *s);

/* Coupling between cells r apart along the stacking axis at in-plane k' (kpar[0..1]):
 * out (norb x norb, column-major) = sum over R' with R'_stack = r of e^{2 pi i k'.R'} H(R') / deg.
 * Zero for |r| > slab_range. */
void slab_coupling(const slab *s, const double kpar[2], int r, double complex *out);

/* Slab Hamiltonian at in-plane k': H (nstates x nstates, column-major, eV) is overwritten. */
void slab_hk(const slab *s, const double kpar[2], double complex *H);

/* The slab of a 3D bulk as a 2D tight-binding model (a film): lattice rows a'1, a'2 (the plane) and
 * a third vector normal to the plane, long enough to hold the film plus 20 Angstrom; film spatial
 * orbital j*nspatial + o is bulk orbital o in layer j, in the bulk's spin convention brought to
 * TB_SPIN_BLOCKS (spinful) order; filling nlayers * bulk nocc. H(R) for in-plane R = (R'1, R'2, 0)
 * holds the layer blocks, so H(k) equals slab_hk at k' = (k1, k2) up to the state order. The caller
 * owns *out. BS_EINVAL for a ribbon (2D bulk), BS_ENOMEM. */
int slab_film_model(const slab *s, const tb_model *bulk, tb_model **out, bs_err *err);

/* Weights of the normalised slab state v (nstates components) on the nsurf top and bottom layers
 * (nsurf clipped to nlayers). */
void slab_weights(const slab *s, const double complex *v, int nsurf, double *w_top, double *w_bottom);

#endif
