/* Surface states of a slab or ribbon: slab bands with their top and bottom weights, bulk bands
 * projected onto the surface zone, Fermi-level crossings by top- and bottom-localised states
 * between two surface TRIMs, and the Kramers (Dirac) points of surface bands in the bulk gap.
 *
 * Crossing parity between surface TRIMs Lambda_a and Lambda_b is pi_a pi_b, the product of the
 * bulk parity products projected onto them (Phys. Rev. Lett. 98, 106803 (2007); in 2D Phys. Rev.
 * Lett. 95, 226801 (2005)): odd means the surface cannot be made trivial. */
#ifndef BANDSIEVE_SURFSTATES_H
#define BANDSIEVE_SURFSTATES_H

#include "bandsieve/err.h"
#include "bandsieve/slab.h"

typedef struct ss_opts {
    int nsurf;         /* layers counted as a surface (0: max(2, nlayers / 8)) */
    double loc_min;    /* (w_top - w_bottom) / (w_top + w_bottom) above this: a top state; below
                        * -loc_min: a bottom state (0: 0.5) */
    int nk;            /* k samples per segment for crossings (0: 240) */
    int nperp;         /* k_perp samples for projected bulk bands (0: 48) */
    double deg_tol_ev; /* eigenvalues closer than this are one degenerate level (0: 2e-3 eV) */
    int follow_all;    /* 1: ss_crossings follows levels at every sample, without its pre-pass (a check) */
} ss_opts;

/* Fills o with the defaults (all zero, which the functions read as the defaults above). */
void ss_opts_default(ss_opts *o);

typedef struct ss_ctx ss_ctx;

/* Workspace for the surface states of s (borrowed; must outlive the context); opts may be NULL.
 * The caller owns *out. */
int ss_create(const slab *s, const ss_opts *opts, ss_ctx **out, bs_err *err);

/* Frees c; accepts NULL. */
void ss_free(ss_ctx *c);

/* Slab energies (ascending, nstates, eV) at in-plane k', with the weights of each state on the
 * nsurf top and bottom layers. Within a degenerate level the states are first rotated to
 * diagonalise P_top - P_bottom, so that a top and a bottom state at one energy (as in an
 * inversion-symmetric slab) are told apart. w_top / w_bottom may be NULL. */
int ss_bands(ss_ctx *c, const double kpar[2], double *E, double *w_top, double *w_bottom, bs_err *err);

/* Bulk bands projected onto k': *vmax = largest energy of bulk band nocc - 1 (0-based) and
 * *cmin = smallest of band nocc over nperp values of k_perp (the rebased bulk's own nocc). */
int ss_projected_edges(ss_ctx *c, const double kpar[2], double *vmax, double *cmin, bs_err *err);

/* Bulk band edges over an n^dim mesh of the bulk zone (m borrowed): *vbm = max of band nocc - 1,
 * *cbm = min of band nocc; *cbm < *vbm when there is no global gap. */
int ss_bulk_edges(const tb_model *m, int mesh, double *vbm, double *cbm, bs_err *err);

/* The Fermi level used when no slab levels are known: 60% of the way from vbm to cbm, not mid-gap, because
 * particle-hole-symmetric models (Kane-Mele at lambda_v = 0, Fu-Kane-Mele) put their surface
 * Kramers points exactly at mid-gap, where a crossing count is ill-defined; without a gap
 * (cbm <= vbm) the midpoint. */
double ss_fermi_default(double vbm, double cbm);

/* The energy at which crossings are counted when none is given: inside the bulk gap (vbm, cbm),
 * between 20% and 80% of the way up, as far as that allows from every slab level at the surface
 * TRIMs, and at ss_fermi_default when no level lies within reach. Reasons: at a TRIM the Kramers
 * points of the two surfaces meet and hybridise in a finite slab, so a crossing near one is
 * classified by mixed states and followed ambiguously; the parity of the count does not depend on
 * where in the gap it is taken (Phys. Rev. Lett. 98, 106803 (2007)); the outer fifths are left
 * out because surface states reach deep into the slab near the bulk band edges. Without a gap,
 * ss_fermi_default. Errors of the eigensolver. */
int ss_fermi_away(ss_ctx *c, double vbm, double cbm, double *fermi_ev, bs_err *err);

/* How far the two surfaces of the slab still hybridise: at each surface TRIM, the slab states
 * inside the bulk gap (vbm, cbm) by max(5% of the gap, 2 meV) that are localised on neither surface
 * (|asymmetry| <= loc_min), which in a slab thick enough are Kramers pairs of one surface. *n_mixed
 * receives their number over all TRIMs, *split_ev the largest energy spread of such states at one
 * TRIM (0 when none; the gap the hybridisation opens at a surface Dirac point), *trim the TRIM
 * index where it occurs (-1 when none), and *n_top the states inside the gap by the same margin at
 * the TRIMs that are localised on the top surface. Errors of the eigensolver. */
int ss_hybridisation(ss_ctx *c, double vbm, double cbm, int *n_mixed, double *split_ev, int *trim, int *n_top,
                     bs_err *err);

/* Counts the crossings of fermi_ev by top- and bottom-localised slab states on the straight
 * segment from ka to kb (in-plane reduced), sampled at nk points including both ends. Bands are
 * followed from sample to sample by eigenvector overlap (so a top and a bottom band crossing each
 * other near E_F are told apart), and a crossing is classified by the weights of the followed state
 * at the crossing point (placed by interpolation between the two samples around it and
 * diagonalised there); nk should resolve the surface bands. n_other receives crossings by states localised
 * on neither surface, plus any change of the count below E_F that the followed bands do not explain (may be
 * NULL). */
int ss_crossings(ss_ctx *c, const double ka[2], const double kb[2], double fermi_ev, int *n_top,
                 int *n_bottom, int *n_other, bs_err *err);

typedef struct ss_dirac {
    double k[2]; /* in-plane reduced k' (a surface TRIM) */
    double energy_ev;
    int side;       /* SS_TOP or SS_BOTTOM */
    int degeneracy; /* surface states of that side in the level (2 for a Kramers pair) */
} ss_dirac;

enum { SS_TOP = 0, SS_BOTTOM = 1 };

/* Surface Dirac points: at each surface TRIM (4 for a slab, 2 for a ribbon), the degenerate
 * levels of at least two states localised on one surface that lie inside the projected bulk gap
 * at that k' (strictly between ss_projected_edges). Without time reversal the surface bands need
 * not cross at TRIMs, so the list is meaningful for time-reversal-symmetric models. Fills up to
 * max entries of out, *count the number found (may exceed max). */
int ss_dirac_points(ss_ctx *c, ss_dirac *out, int max, int *count, bs_err *err);

/* The surface TRIMs: *n (4 or 2) points k'[2*t..2*t+1] = (t % 2, t / 2) / 2 (t / 2 = 0 for a ribbon). */
void ss_trims(const ss_ctx *c, double k[8], int *n);

#endif
