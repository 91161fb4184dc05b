/* Bands along a path for `bands --path`, `plot bands` and `report`: energies, an optional weight
 * per state (spin or a set of orbitals) for colour, and the gap and Fermi level along the path. */
#ifndef BANDSIEVE_CLI_BANDPATH_H
#define BANDSIEVE_CLI_BANDPATH_H

#include "bandsieve/err.h"
#include "bandsieve/kpath.h"
#include "bandsieve/model.h"

enum { BP_WEIGHT_NONE = 0, BP_WEIGHT_SPIN = 1, BP_WEIGHT_ORBITALS = 2 };

typedef struct band_path {
    kpath path;
    kpath_samples s;
    int norb, nocc;
    double *E;             /* s.nk * norb, eV, ascending per k */
    int weight_kind;       /* BP_WEIGHT_* */
    double *w;             /* s.nk * norb: <s_z> in [-1,1] or the orbitals' weight in [0,1]; NULL */
    int gapped;            /* band nocc-1 stays below band nocc everywhere on the path */
    double vbm_ev, cbm_ev; /* top of band nocc-1, bottom of band nocc on the path */
    int i_vbm, i_cbm;      /* sample indices */
    double direct_ev;      /* smallest E[nocc] - E[nocc-1] on the path */
    int i_direct;
    int has_fermi;
    double fermi_ev;
    const char *fermi_source; /* "card", "option", "mid-gap", or NULL */
} band_path;

/* Bands of m (borrowed) along spec ("auto": the standard path of the lattice, else a user path)
 * with about npoints samples. weight: NULL, "spin" (spinful only) or "orbitals:i,j,..." (1-based
 * spatial orbitals). fermi: NULL or a Fermi level that overrides the card's. out is overwritten;
 * band_path_clear frees it. */
int band_path_compute(const tb_model *m, const char *spec, int npoints, const char *weight,
                      const double *fermi, band_path *out, bs_err *err);

void band_path_clear(band_path *bp);

/* Label of sample i ("" when it is not a path point). */
void band_path_label(const band_path *bp, int i, char *buf, int n);

#endif
