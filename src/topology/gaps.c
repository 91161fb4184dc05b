/* Gap search at the filling: basins on a coarse mesh, each of the best few refined by a local
 * minimiser in reduced coordinates (bandpair.c), the refined extremes reported. */
#include "bandsieve/gaps.h"

#include <stdlib.h>
#include <string.h>

#include "bandsieve/clock.h"
#include "bandsieve/config.h"
#include "bandsieve/nodes.h"

void gaps_opts_init(gaps_opts *o) { memset(o, 0, sizeof *o); }

/* Refines the nbest local minima of f on g for quantity `what`; keeps the lowest refined value
 * (which, being reached from a mesh point, is never above that point's value) in *best, kbest. */
static int refine_basins(bp_eval *e, const bp_mesh *g, const double *f, int what, int nbest,
                         double tol_k, double *best, double kbest[3], double band[2], bs_err *err)
{
    int *idx = malloc((size_t)nbest * sizeof *idx);
    if (!idx) return bs_fail(err, BS_ENOMEM, "gaps: out of memory");
    int nmin = bp_mesh_minima(g, f, nbest, idx), rc = 0;
    *best = f[idx[0]];
    bp_mesh_k(g, idx[0], kbest);
    band[0] = g->lo[idx[0]];
    band[1] = g->hi[idx[0]];
    for (int i = 0; i < nmin && rc == 0; i++) {
        double k0[3], k[3], v, lo, hi;
        bp_mesh_k(g, idx[i], k0);
        rc = bp_minimise(e, what, k0, 1.0 / g->n, tol_k, k, &v, &lo, &hi, err);
        if (rc == 0 && v < *best) {
            *best = v;
            memcpy(kbest, k, sizeof k);
            band[0] = lo;
            band[1] = hi;
        }
    }
    free(idx);
    return rc;
}

int gaps_find_eval(bp_eval *e, const gaps_opts *o, gaps_result *out, bs_err *err)
{
    gaps_opts d;
    if (!o) {
        gaps_opts_init(&d);
        o = &d;
    }
    memset(out, 0, sizeof *out);
    double t0 = bs_now();
    long long c0 = bp_count(e);
    int dim = bp_dim(e), n = o->mesh > 0 ? o->mesh : (dim == 3 ? 16 : 48);
    int nbest = o->nrefine > 0 ? o->nrefine : 6;
    double tol_k = o->tol_k > 0 ? o->tol_k : 1e-6;
    bp_mesh *own = NULL;
    const bp_mesh *g = o->grid;
    int rc = 0;
    if (g && g->dim != dim)
        return bs_fail(err, BS_EINVAL, "gaps: mesh of dimension %d for a %dD model", g->dim, dim);
    if (!g) {
        rc = bp_mesh_eval(e, n, &own, err);
        if (rc != 0) return rc;
        g = own;
    }
    double *f = malloc((size_t)g->npts * sizeof *f);
    if (!f) {
        bp_mesh_free(own);
        return bs_fail(err, BS_ENOMEM, "gaps: out of memory");
    }
    double emin = g->lo[0], emax = g->hi[0];
    for (int i = 0; i < g->npts; i++) {
        f[i] = g->hi[i] - g->lo[i];
        if (g->lo[i] < emin) emin = g->lo[i];
        if (g->hi[i] > emax) emax = g->hi[i];
    }
    double bd[2], bv[2], bc[2], v = 0;
    rc = refine_basins(e, g, f, BP_GAP, nbest, tol_k, &out->gap_direct_ev, out->k_direct, bd, err);
    for (int i = 0; rc == 0 && i < g->npts; i++) f[i] = -g->lo[i];
    if (rc == 0) rc = refine_basins(e, g, f, BP_NEG_LOWER, nbest, tol_k, &v, out->k_vbm, bv, err);
    out->vbm_ev = -v;
    for (int i = 0; rc == 0 && i < g->npts; i++) f[i] = g->hi[i];
    if (rc == 0) rc = refine_basins(e, g, f, BP_UPPER, nbest, tol_k, &out->cbm_ev, out->k_cbm, bc, err);
    free(f);
    /* Every evaluated point bounds the extremes: the refined direct-gap point and the band-extreme
     * points each give E_N and E_{N+1} values, so the extremes use all of them. */
    if (rc == 0) {
        const double *kk[3] = {out->k_direct, out->k_vbm, out->k_cbm};
        const double *bb[3] = {bd, bv, bc};
        double kv[3], kc[3];
        memcpy(kv, out->k_vbm, sizeof kv);
        memcpy(kc, out->k_cbm, sizeof kc);
        for (int i = 0; i < 3; i++) {
            if (bb[i][0] > out->vbm_ev) {
                out->vbm_ev = bb[i][0];
                memcpy(kv, kk[i], sizeof kv);
            }
            if (bb[i][1] < out->cbm_ev) {
                out->cbm_ev = bb[i][1];
                memcpy(kc, kk[i], sizeof kc);
            }
        }
        memcpy(out->k_vbm, kv, sizeof kv);
        memcpy(out->k_cbm, kc, sizeof kc);
    }
    out->gap_indirect_ev = out->cbm_ev - out->vbm_ev;
    out->width_ev = emax - emin;
    out->metallic = out->gap_indirect_ev < BS_GAP_CLOSED_EV;
    out->closed = out->gap_direct_ev < BS_GAP_CLOSED_EV;
    out->mesh = g->n;
    out->nk_evaluated = bp_count(e) - c0;
    out->seconds = bs_now() - t0;
    bp_mesh_free(own);
    return rc;
}

int gaps_find(const tb_model *m, hk_engine *hk, const gaps_opts *o, gaps_result *out, bs_err *err)
{
    bp_eval *e = NULL;
    int rc = bp_create(m, hk, o ? o->deadline : 0.0, &e, err);
    if (rc == 0) rc = gaps_find_eval(e, o, out, err);
    bp_free(e);
    return rc;
}

void gaps_merge_nodes(gaps_result *g, const nodes_result *r)
{
    for (int i = 0; i < r->nnodes; i++) {
        const res_node *d = &r->nodes[i];
        double lo = d->energy_ev - 0.5 * d->gap_ev, hi = d->energy_ev + 0.5 * d->gap_ev;
        if (d->gap_ev < g->gap_direct_ev) {
            g->gap_direct_ev = d->gap_ev;
            memcpy(g->k_direct, d->k, sizeof g->k_direct);
        }
        if (lo > g->vbm_ev) {
            g->vbm_ev = lo;
            memcpy(g->k_vbm, d->k, sizeof g->k_vbm);
        }
        if (hi < g->cbm_ev) {
            g->cbm_ev = hi;
            memcpy(g->k_cbm, d->k, sizeof g->k_cbm);
        }
    }
    g->gap_indirect_ev = g->cbm_ev - g->vbm_ev;
    g->metallic = g->gap_indirect_ev < BS_GAP_CLOSED_EV;
    g->closed = g->gap_direct_ev < BS_GAP_CLOSED_EV;
}
