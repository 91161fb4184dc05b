/* The surface evidence a screen stores for a nontrivial entry: for one lattice plane (a default
 * direction, or one given), the Fermi-level crossings of top- and bottom-surface states between the
 * first two surface TRIMs of a slab (a ribbon in 2D), and the surface Dirac points in the bulk gap.
 * Odd crossings mean the surface cannot be made trivial (Phys. Rev. Lett. 98, 106803 (2007); in 2D
 * Phys. Rev. Lett. 95, 226801 (2005)). */
#ifndef BANDSIEVE_SURFSUMMARY_H
#define BANDSIEVE_SURFSUMMARY_H

#include "bandsieve/err.h"
#include "bandsieve/model.h"
#include "bandsieve/result.h"
#include "bandsieve/surfstates.h"

/* The summary: res_surface of result.h, with its pairs and verdict. */
typedef res_surface ssum_result;
typedef res_surface_pair ssum_pair;

/* A surface Dirac point worth the name: a two-fold (Kramers) level of surface-localised states
 * inside the bulk gap by a margin of max(5% of the gap, 2 meV), so band-edge artefacts (a level
 * touching the bulk continuum, or a many-fold degenerate level of a flat band) are not counted. */
int ssum_dirac_ok(const ss_dirac *d, double vbm_ev, double cbm_ev);

/* The default plane of m: (0,0,1) of its own lattice in 3D, the (1,0) edge in 2D. */
void ssum_default_direction(const tb_model *m, int miller[3]);

/* What the bulk says about the surface: its parity products per TRIM (with inversion) and/or its
 * Z2 indices (from either method); any may be NULL. */
typedef struct ssum_bulk {
    const int *par_delta; /* ntrim values as diag_result.par_delta, or NULL */
    int ntrim;
    const int *z2; /* {nu} in 2D, {nu0, nu1, nu2, nu3} in 3D, or NULL */
} ssum_bulk;

/* Builds the slab of nlayers cells (0: 20 in 3D, 32 in 2D) of m (borrowed) for miller and counts
 * the crossings between every pair of surface TRIMs and the Dirac points, at an energy inside the
 * bulk gap away from the slab's levels at the surface TRIMs (ss_fermi_away). With the bulk
 * parities, or else the Z2 indices, each count is checked against the parity it must have,
 * pi_a pi_b (Phys. Rev. Lett. 98, 106803 (2007)): from the parities directly; from the indices as
 * the product of delta over the four bulk TRIMs projecting onto a and b, a plane of TRIMs whose
 * product the indices give. Only a disagreement (a slab too thin: its two surfaces hybridise)
 * grows the slab, doubling the layers up to max_layers (0: 4 x the start, capped by the state
 * limit); what still disagrees is RES_SURF_INCONCLUSIVE with the reason. A consistent strong TI
 * without an odd number of in-gap top Dirac points says why in the reason: its surfaces still
 * hybridise at a TRIM (slab too thin for the Dirac points, with the splitting), its top states at
 * a TRIM form no two-fold level (time reversal broken in the Hamiltonian as given), or the point
 * lies in the projected bulk bands. Errors of the slab builder and eigensolver. */
int ssum_compute(const tb_model *m, const int miller[3], int nlayers, int max_layers, const ssum_bulk *bulk,
                 ssum_result *out, bs_err *err);

#endif
