/* Semi-infinite surface Green's function of a slab geometry by iterative decimation
 * (J. Phys. F 15, 851 (1985)), and the surface spectral function A(k', E) = -Im Tr G_s(E + i eta)/pi
 * over the surface zone and along paths. Principal layers are slab_range(s) cells thick, so only
 * neighbouring principal layers couple. */
#ifndef BANDSIEVE_SURFGREEN_H
#define BANDSIEVE_SURFGREEN_H

#include "bandsieve/err.h"
#include "bandsieve/slab.h"

enum { SG_TOP = 0, SG_BOTTOM = 1 };

typedef struct sg_ws sg_ws;

/* Workspace for the surfaces of s (borrowed; must outlive the workspace). The caller owns *out.
 * BS_ENOMEM; BS_EINVAL when s has no coupling between cells (range 0: nothing to decimate). */
int sg_create(const slab *s, sg_ws **out, bs_err *err);

/* Frees w; accepts NULL. */
void sg_free(sg_ws *w);

/* Spectral function (states per eV per surface cell, traced over one principal layer) of the
 * semi-infinite crystal ending at the top (SG_TOP: bulk below) or bottom surface, at in-plane k'
 * (reduced) and energy energy_ev + i eta_ev (eta_ev > 0). Iterates until the renormalised
 * coupling falls below 1e-12 eV (each step doubles the decimated length); BS_ENUMERIC when it
 * has not after 200 steps or a matrix is singular; BS_EINVAL for eta_ev <= 0 or a bad side. */
int sg_spectral(sg_ws *w, const double kpar[2], double energy_ev, double eta_ev, int side, double *a_out,
                bs_err *err);

/* Map over the surface zone at one energy: a[i1 * n2 + i2] at k' = (i1/n1 - 1/2, i2/n2 - 1/2) for
 * a slab, k' = (i1/n1 - 1/2) with n2 = 1 for a ribbon. a has n1*n2 entries (caller's). */
int sg_map(sg_ws *w, double energy_ev, double eta_ev, int side, int n1, int n2, double *a, bs_err *err);

/* Along nk in-plane points kpar[2*j..] for ne energies e_lo..e_hi (inclusive, ne >= 2):
 * a[j * ne + ie]. */
int sg_path(sg_ws *w, int nk, const double *kpar, int ne, double e_lo, double e_hi, double eta_ev, int side,
            double *a, bs_err *err);

#endif
