/* Intrinsic anomalous Hall (AHC) and spin Hall (SHC) conductivities from the Berry curvature of
 * the occupied states, integrated over the Brillouin zone with adaptive cell refinement, for a list
 * of Fermi energies that share one eigen-decomposition per k-point.
 *
 * Conventions (see transport.c for the derivations):
 * - Berry curvature from the Kubo form, Phys. Rev. Lett. 49, 405 (1982):
 *   Omega_n^{ab} = -2 Im sum_{m != n} <n|v_a|m><m|v_b|n> / ((E_m - E_n)^2 + eta^2), v = dH/dk
 *   (Cartesian, eV Angstrom, hbar = 1). This is curl i<u|grad u>, the convention of chern.h.
 * - sigma_ab = +(e^2/hbar) int d^dk/(2 pi)^d sum_n f_n Omega_n^{ab}. With this sign a 2D insulator
 *   has sigma_xy = C e^2/h with C the lattice Chern number of chern_plane(p = 4) (for a3 along +z).
 *   The form -(e^2/hbar) int f Omega, met in the literature with the same Omega, belongs to the
 *   opposite orientation convention of the Hall response (electron charge -e); we take the sign
 *   that agrees with chern_plane (checked in test_transport.c).
 * - Spin current j^{s_z}_a = (1/2){s_z, v_a} with s_z = diag(+1, -1) (Pauli, units of hbar/2) from
 *   tb_state_spin, Phys. Rev. Lett. 92, 126603 (2004); sigma^{s_z}_{xy} = (hbar/2e) x the charge
 *   formula with j^{s_z}_x in place of v_x: for a model that conserves s_z it is
 *   (e/4 pi)(C_up - C_down), i.e. +-1 in units of e/(2 pi) in the quantum spin Hall phase of
 *   Phys. Rev. Lett. 95, 226801 (2005).
 * - Units: 2D AHC in e^2/h, 2D SHC in e/(2 pi); 3D AHC in S/cm, 3D SHC in (hbar/e) S/cm, with the
 *   cell volume from the lattice in Angstrom.
 * - Gauge: by default the velocity includes the orbital positions (position gauge,
 *   v = dH/dk - i[r, H], with r the card's orbital positions: the diagonal position operator).
 *   In the lattice gauge (TR_GAUGE_LATTICE, no positions in the phase) the Berry curvature per k
 *   differs by the curl of a periodic function, so for an insulator the zone integral is the
 *   same; for a metal the difference is a Fermi-contour term (zero when the Fermi surface has a
 *   3-fold or higher rotation symmetry, as in the honeycomb models) and the position gauge is the
 *   one that goes with the card's positions.
 * - Occupations: T = 0 step (E_n < E_F) unless smear_ev > 0 (Fermi-Dirac with kT = smear_ev).
 * - Integration: over reduced k, d^dk/(2 pi)^d = dk_red / V_cell; a uniform mesh of cells, each
 *   integrated by an embedded degree-7/degree-5 cubature pair (J. Comput. Appl. Math. 6, 295
 *   (1980)), the cells with the largest error estimates halved first until the total estimate is
 *   below tol, every cell is at the depth limit, or the k-point budget is spent. */
#ifndef BANDSIEVE_TRANSPORT_H
#define BANDSIEVE_TRANSPORT_H

#include "bandsieve/eig.h"
#include "bandsieve/err.h"
#include "bandsieve/model.h"
#include "bandsieve/result.h"

/* Most Fermi energies in one call (the reference plus the scan). */
#define TR_MAX_FERMI RES_MAX_FERMI

enum { TR_GAUGE_POSITION = RES_GAUGE_POSITION, TR_GAUGE_LATTICE = RES_GAUGE_LATTICE };

/* What stopped the refinement before the tolerance was met. */
enum { TR_LIMIT_NONE = RES_LIMIT_NONE, TR_LIMIT_BUDGET = RES_LIMIT_BUDGET, TR_LIMIT_DEPTH = RES_LIMIT_DEPTH };

/* Where the reference Fermi energy came from. */
enum {
    TR_FERMI_GIVEN = RES_FERMI_GIVEN,
    TR_FERMI_CARD = RES_FERMI_CARD,
    TR_FERMI_MIDGAP = RES_FERMI_MIDGAP,
    TR_FERMI_FILLING = RES_FERMI_FILLING
};

/* Settings; tr_opts_default fills the defaults named in brackets. */
typedef struct tr_opts {
    int mesh;                      /* initial cells per direction [0: 8 in 2D, 6 in 3D], at most 1000 in
                                      2D, 100 in 3D; each cell is integrated with a 17-point (2D) or
                                      33-point (3D) cubature pair */
    int max_depth;                 /* times a cell may be halved along each axis [0: 12 in 2D, 8 in 3D];
                                      -1: never (mesh^d cells with the rule pair, no refinement).
                                      Refinement is global (largest errors first), so a deep limit costs
                                      only where the integrand needs it (nodes, Fermi surfaces) */
    double tol;                    /* target total error estimate, output units [0: 1e-3 e^2/h in 2D,
                                      1 S/cm in 3D] */
    long long max_kpoints;         /* refinement stops past this many H(k) evaluations [2000000] */
    double eta_ev;                 /* broadening: (E_m - E_n)^2 -> (E_m - E_n)^2 + eta^2 [0] */
    double smear_ev;               /* Fermi-Dirac kT, eV; 0 is the T = 0 step [0] */
    int has_fermi;                 /* fermi_ev below is the reference Fermi energy [0] */
    double fermi_ev;               /* eV */
    int nscan;                     /* extra Fermi energies E_ref + lo + i (hi - lo)/(nscan - 1) [0] */
    double scan_lo_ev, scan_hi_ev; /* offsets from the reference, eV [0, 0] */
    int gauge;                     /* TR_GAUGE_* [TR_GAUGE_POSITION] */
    int want_shc;                  /* compute the SHC of spinful models [1] */
    double deadline;               /* absolute bs_now() seconds; BS_ETIMEOUT past it (0: none) [0] */
    const eig_dist *dist;          /* distributed eigensolver for large matrices (a rank group's; borrowed)
                                      [NULL: LAPACK] */
} tr_opts;

void tr_opts_default(tr_opts *o);

/* Result: res_transport of result.h (a plain struct with fixed arrays; it can be copied or sent as
 * bytes). Index 0 of every array is the reference Fermi energy, 1..nfermi-1 the scan. Errors are the
 * adaptive integration's estimates (sum over cells of |degree-7 - degree-5 rule|, raised where a
 * cell's two halves do not add up to it), same units as the values. */
typedef res_transport tr_result;

/* Computes AHC (and SHC for spinful models) of m (borrowed) at the reference Fermi energy and the
 * scan. The reference is o->fermi_ev when has_fermi; else the card's fermi_ev when m->has_fermi;
 * else, from the eigenvalues on a midpoint mesh of max(48, mesh)^2 points in 2D (max(16, mesh)^3
 * in 3D), midway between the highest band nocc-1 and the lowest band nocc when they do not
 * overlap (TR_FERMI_MIDGAP), or for a metal halfway between the (nocc N_k)-th and the next lowest
 * eigenvalue: nocc bands' worth of states below it (TR_FERMI_FILLING). o may be NULL.
 * Stopping at the depth limit or the budget before tol is not an error: out->converged is 0 and
 * the errors say how good the values are. BS_EINVAL for bad options, a model that is not 2D/3D or
 * a 2D lattice not in the xy plane; BS_ENUMERIC from LAPACK; BS_ENOMEM; BS_ETIMEOUT. */
int tr_compute(const tb_model *m, const tr_opts *o, tr_result *out, bs_err *err);

#endif
