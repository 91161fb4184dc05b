/* Surface evidence for one plane, as the screening run stores it (see surfsummary.h). */
#include "bandsieve/surfsummary.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "bandsieve/config.h"
#include "bandsieve/slab.h"

void ssum_default_direction(const tb_model *m, int miller[3])
{
    miller[0] = m->dim == 2 ? 1 : 0;
    miller[1] = 0;
    miller[2] = m->dim == 2 ? 0 : 1;
}

int ssum_dirac_ok(const ss_dirac *d, double vbm_ev, double cbm_ev)
{
    double margin = fmax(0.05 * (cbm_ev - vbm_ev), 2e-3);
    return d->degeneracy == 2 && d->energy_ev > vbm_ev + margin && d->energy_ev < cbm_ev - margin;
}

/* Integer inverse of the unimodular M (adjugate; det M = +1 by the slab's construction, the sign
 * is divided out anyway). */
static void inverse3i(const int M[3][3], int inv[3][3])
{
    int d = M[0][0] * (M[1][1] * M[2][2] - M[1][2] * M[2][1]) -
            M[0][1] * (M[1][0] * M[2][2] - M[1][2] * M[2][0]) +
            M[0][2] * (M[1][0] * M[2][1] - M[1][1] * M[2][0]);
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            int r0 = (j + 1) % 3, r1 = (j + 2) % 3, c0 = (i + 1) % 3, c1 = (i + 2) % 3;
            inv[i][j] = (M[r0][c0] * M[r1][c1] - M[r0][c1] * M[r1][c0]) / d;
        }
}

/* Surface parities pi_a: the product of delta over the two bulk TRIMs that project onto surface
 * TRIM a (k'_stack = 0 and 1/2), Phys. Rev. Lett. 98, 106803 (2007). Reduced k maps as k' = M k,
 * so the bulk point is M^-1 k'; twice it, mod 2, indexes the bulk TRIM n1 + 2 n2 + 4 n3. */
static void surface_parities(const slab *s, int dim, const int *delta, ssum_result *out)
{
    int M[3][3], inv[3][3], stack = dim == 3 ? 2 : 1;
    slab_matrix(s, M);
    inverse3i((const int(*)[3])M, inv);
    for (int t = 0; t < out->ntrim; t++) {
        int prod = 1;
        for (int h = 0; h < 2; h++) {
            int n2[3] = {0, 0, 0}; /* 2 k' */
            n2[0] = t % 2, n2[1] = dim == 3 ? t / 2 : h;
            if (dim == 3) n2[stack] = h;
            int idx = 0;
            for (int i = 0; i < dim; i++) {
                int v = inv[i][0] * n2[0] + inv[i][1] * n2[1] + inv[i][2] * n2[2];
                idx += (((v % 2) + 2) % 2) << i;
            }
            prod *= delta[idx];
        }
        out->surface_parity[t] = prod;
    }
}

/* Whether the crossings between surface TRIMs a and b must be odd, from the Z2 indices. The bulk
 * TRIMs projecting onto a and b are {a, b} x {0, 1/2} along the stacking axis: with d = a - b and m
 * the nonzero in-plane vector (mod 2) with m.d = 0, they are the TRIMs n with n.m = m.a (mod 2).
 * The product of delta over {n.m = 1} is (-1)^(nu'.m) and over {n.m = 0} (-1)^(nu0 + nu'.m),
 * nu' = M nu the weak indices in the slab's basis (reduced k maps as k' = M k). In 2D the four
 * TRIMs are the whole zone: (-1)^nu. Phys. Rev. Lett. 98, 106803 (2007). */
static int expected_from_z2(const slab *s, int dim, const int *z2, int a, int b)
{
    if (dim == 2) return z2[0] & 1;
    int M[3][3];
    slab_matrix(s, M);
    int nu[2];
    for (int i = 0; i < 2; i++)
        nu[i] = ((M[i][0] * z2[1] + M[i][1] * z2[2] + M[i][2] * z2[3]) % 2 + 2) % 2;
    int d1 = (a ^ b) & 1, d2 = ((a ^ b) >> 1) & 1;
    int m1 = d1 && d2 ? 1 : d2, m2 = d1 && d2 ? 1 : d1;
    int c = (m1 * (a & 1) + m2 * ((a >> 1) & 1)) & 1;
    return ((c == 0 ? z2[0] : 0) + m1 * nu[0] + m2 * nu[1]) & 1;
}

/* How far the two surfaces of the last slab still hybridise (ss_hybridisation). */
typedef struct hyb_info {
    int n_mixed, trim, n_top;
    double split_ev;
} hyb_info;

/* Counts at one thickness: every pair, the Dirac points, the hybridisation at the surface TRIMs.
 * The counting energy is chosen at each thickness away from the slab's levels at the surface
 * TRIMs (ss_fermi_away). */
static int count_at(const tb_model *m, const int miller[3], int layers, ssum_result *out, const int *delta,
                    const int *z2, hyb_info *hyb, bs_err *err)
{
    slab *s = NULL;
    ss_ctx *c = NULL;
    ss_opts o;
    ss_opts_default(&o);
    int rc = slab_create(m, miller, layers, 0.0, &s, err);
    if (rc == 0) rc = ss_create(s, &o, &c, err);
    double kt[8];
    int nt = 0;
    if (rc == 0) rc = ss_fermi_away(c, out->vbm_ev, out->cbm_ev, &out->fermi_ev, err);
    if (rc == 0)
        rc = ss_hybridisation(c, out->vbm_ev, out->cbm_ev, &hyb->n_mixed, &hyb->split_ev, &hyb->trim,
                              &hyb->n_top, err);
    if (rc == 0) {
        ss_trims(c, kt, &nt);
        out->ntrim = nt;
        if (delta) surface_parities(s, m->dim, delta, out);
    }
    out->npair = 0;
    for (int a = 0; rc == 0 && a < nt; a++)
        for (int b = a + 1; rc == 0 && b < nt; b++) {
            ssum_pair *p = &out->pair[out->npair++];
            p->a = a, p->b = b;
            p->expected_odd = delta ? out->surface_parity[a] * out->surface_parity[b] < 0
                                    : (z2 ? expected_from_z2(s, m->dim, z2, a, b) : -1);
            rc = ss_crossings(c, kt + 2 * a, kt + 2 * b, out->fermi_ev, &p->n_top, &p->n_bottom, &p->n_other,
                              err);
        }
    if (rc == 0) {
        out->ka[0] = kt[0], out->ka[1] = kt[1], out->kb[0] = kt[2], out->kb[1] = kt[3];
        out->n_top = out->pair[0].n_top, out->n_bottom = out->pair[0].n_bottom,
        out->n_other = out->pair[0].n_other;
    }
    ss_dirac dirac[16];
    int nd = 0;
    if (rc == 0) rc = ss_dirac_points(c, dirac, 16, &nd, err);
    out->ndirac_top = 0;
    for (int i = 0; rc == 0 && i < nd && i < 16; i++)
        if (dirac[i].side == SS_TOP && ssum_dirac_ok(&dirac[i], out->vbm_ev, out->cbm_ev)) out->ndirac_top++;
    ss_free(c);
    slab_free(s);
    return rc;
}

/* The first pair whose top count disagrees with its parity, or -1. */
static int first_disagreement(const ssum_result *r)
{
    for (int i = 0; i < r->npair; i++)
        if (r->pair[i].expected_odd >= 0 && (r->pair[i].n_top % 2 == 1) != r->pair[i].expected_odd) return i;
    return -1;
}

/* The strong index (3D nu0, 2D nu) from the parities (product of all delta) or the indices; -1
 * when neither is known. A strong TI has an odd number of Dirac points on every surface (Phys.
 * Rev. Lett. 98, 106803 (2007)): an even number on a slab means its surfaces still hybridise. */
static int strong_index(const tb_model *m, const int *delta, const int *z2)
{
    if (delta) {
        int prod = 1;
        for (int t = 0; t < (m->dim == 3 ? 8 : 4); t++)
            prod *= delta[t];
        return prod < 0;
    }
    return z2 ? z2[0] & 1 : -1;
}

static const char *const TRIM_NAME[4] = {"00", "10", "01", "11"};

/* A surface TRIM's name as the JSON writes it: n1n2 on a slab, n1 on a ribbon. */
static const char *trim_name(const ssum_result *r, int t)
{
    static const char *const RIBBON[2] = {"0", "1"};
    return r->kdim == 1 ? RIBBON[t & 1] : TRIM_NAME[t & 3];
}

int ssum_compute(const tb_model *m, const int miller[3], int nlayers, int max_layers, const ssum_bulk *bulk,
                 ssum_result *out, bs_err *err)
{
    memset(out, 0, sizeof *out);
    memcpy(out->miller, miller, sizeof out->miller);
    out->layers = nlayers > 0 ? nlayers : (m->dim == 2 ? 32 : 20);
    out->kdim = m->dim - 1;
    int cap = BS_MAX_NORB / m->norb;
    if (max_layers <= 0) max_layers = 4 * out->layers;
    if (max_layers > cap) max_layers = cap;
    const int *delta =
        bulk && bulk->par_delta && bulk->ntrim == (m->dim == 3 ? 8 : 4) ? bulk->par_delta : NULL;
    const int *z2 = bulk ? bulk->z2 : NULL;
    /* 24 points per axis hold every TRIM and the K points of hexagonal lattices. */
    int rc = ss_bulk_edges(m, 24, &out->vbm_ev, &out->cbm_ev, err);
    int start = out->layers, strong = strong_index(m, delta, z2);
    hyb_info hyb = {0, -1, 0, 0.0};
    /* Only a disagreement grows the slab: each doubling costs about eight times the last, and
     * counts that agree are the evidence, whatever the Dirac points do (see the reason below). */
    for (;;) {
        if (rc == 0) rc = count_at(m, miller, out->layers, out, delta, z2, &hyb, err);
        if (rc != 0 || first_disagreement(out) < 0 || 2 * out->layers > max_layers) break;
        out->layers *= 2;
    }
    if (rc != 0) return rc;
    int bad = first_disagreement(out);
    if (!delta && !z2) {
        out->status = RES_SURF_UNCHECKED;
        snprintf(out->reason, sizeof out->reason, "no bulk parities or Z2 indices: counts not checked");
    } else if (out->cbm_ev <= out->vbm_ev) {
        out->status = RES_SURF_INCONCLUSIVE;
        snprintf(out->reason, sizeof out->reason, "no global bulk gap: surface crossings are not defined");
    } else if (bad >= 0) {
        const ssum_pair *p = &out->pair[bad];
        out->status = RES_SURF_INCONCLUSIVE;
        int w = snprintf(
            out->reason, sizeof out->reason,
            "%d top crossings between %s and %s where the bulk parities require an %s count, from %d up "
            "to %d layers: slab too thin or surface bands away from the Fermi level",
            p->n_top, trim_name(out, p->a), trim_name(out, p->b), p->expected_odd ? "odd" : "even", start,
            out->layers);
        if (p->n_other > 0 && w > 0 && (size_t)w < sizeof out->reason)
            snprintf(out->reason + w, sizeof out->reason - (size_t)w,
                     "; %d crossings by states on neither surface (top and bottom states still hybridised, "
                     "or weakly localised)",
                     p->n_other);
    } else {
        /* The counts agree: crossings are classified where they happen, away from the TRIMs, so
         * they hold even when the slab is too thin for its Dirac points. A strong TI has an odd
         * number of them on every surface (Phys. Rev. Lett. 98, 106803 (2007)); an even number
         * means either that the two surfaces still hybridise at a TRIM (states in the gap on
         * neither surface: the slab is too thin to show the Dirac point, and the reason says so
         * with the gap they open) or that the Kramers point lies inside the projected bulk bands. */
        out->status = RES_SURF_CONSISTENT;
        int w = snprintf(
            out->reason, sizeof out->reason,
            "every pair of surface TRIMs has the crossing parity the bulk requires (%d layers%s)",
            out->layers, out->layers > start ? ", grown from a thinner slab whose counts disagreed" : "");
        size_t used = w > 0 && (size_t)w < sizeof out->reason ? (size_t)w : sizeof out->reason - 1;
        if (strong == 1 && out->ndirac_top % 2 == 0 && hyb.n_mixed > 0)
            snprintf(out->reason + used, sizeof out->reason - used,
                     "; slab too thin for the surface Dirac points: its two surfaces still hybridise at %s "
                     "(%d in-gap states on neither surface, spread over %.1f meV)",
                     trim_name(out, hyb.trim), hyb.n_mixed, 1e3 * hyb.split_ev);
        else if (strong == 1 && out->ndirac_top % 2 == 0 && hyb.n_top > 0)
            snprintf(
                out->reason + used, sizeof out->reason - used,
                "; %d in-gap top-surface states at its TRIMs form no two-fold level: a Kramers pair split "
                "by time-reversal breaking in the Hamiltonian (fit noise), or a Dirac point near a bulk edge",
                hyb.n_top);
        else if (strong == 1 && out->ndirac_top % 2 == 0)
            snprintf(out->reason + used, sizeof out->reason - used,
                     "; no in-gap Dirac point on the top surface and no hybridised state at its TRIMs: the "
                     "Dirac point lies in the projected bulk bands");
    }
    return 0;
}
