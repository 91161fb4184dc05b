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

/* The summary: res_surface of result.h. */
typedef res_surface ssum_result;

/* The default plane of m: (0,0,1) of its own lattice in 3D, the (1,0) edge in 2D. */
void ssum_default_direction(const tb_model *m, int miller[3]);

/* Builds the slab of nlayers cells (0: 20 in 3D, 32 in 2D) of m (borrowed) for miller and counts
 * the crossings and Dirac points. Errors of the slab builder and eigensolver. */
int ssum_compute(const tb_model *m, const int miller[3], int nlayers, ssum_result *out, bs_err *err);

#endif
