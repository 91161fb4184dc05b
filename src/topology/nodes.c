/* Node search: refine the direct gap from the small-gap cells of a coarse mesh, merge what converges
 * to one point (modulo the reciprocal lattice), trace nodal lines through the touchings, and
 * give each isolated touching in 3D its chirality from the Berry flux around it. */
#include "bandsieve/nodes.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/chern.h"
#include "bandsieve/clock.h"
#include "bandsieve/config.h"

typedef struct touch {
    double k[3];
    double lo, hi;
    int hits; /* refinements that converged here */
} touch;

typedef struct search {
    const tb_model *m;
    bp_eval *e;
    const bp_mesh *g;
    int dim, cap;
    double tol_gap, tol_k, merge;
    touch *t;
    int nt;
    double (*line)[3]; /* points traced along nodal lines */
    int nline, line_cap;
    double min_gap;
    int nstarts;
} search;

void nodes_opts_init(nodes_opts *o)
{
    memset(o, 0, sizeof *o);
}

void nodes_result_init(nodes_result *r)
{
    memset(r, 0, sizeof *r);
    r->chirality_status = RES_NA;
    r->min_gap_ev = INFINITY;
}

void nodes_result_clear(nodes_result *r)
{
    free(r->nodes);
    free(r->line_k);
    nodes_result_init(r);
}

/* Inserts cell i into the list idx (ascending f, at most cap long); returns the new count. */
static int insert_capped(int *idx, int count, int cap, const double *f, int i)
{
    if (count == cap && f[i] >= f[idx[count - 1]]) return count;
    int pos = count < cap ? count++ : cap - 1;
    while (pos > 0 && f[idx[pos - 1]] > f[i]) {
        idx[pos] = idx[pos - 1];
        pos--;
    }
    idx[pos] = i;
    return count;
}

/* A valley cell is a minimum along at least dim-1 mesh axes: near a nodal line the gap grows only
 * across the line, and near a close pair of nodes only away from the pair's axis, so such cells are
 * minima across that direction but rarely strict local minima. */
static int is_valley(const bp_mesh *g, const double *f, int i)
{
    int nmin = 0;
    for (int a = 0; a < g->dim; a++) {
        int d[3] = {0, 0, 0};
        d[a] = 1;
        int ip = bp_mesh_shift(g, i, d);
        d[a] = -1;
        int im = bp_mesh_shift(g, i, d);
        if (f[i] <= f[ip] && f[i] <= f[im]) nmin++;
    }
    return nmin >= g->dim - 1;
}

/* Adds a converged touching, or counts a hit on the one it duplicates (modulo 1). */
static void add_touch(search *s, const double k[3], double lo, double hi)
{
    for (int i = 0; i < s->nt; i++) {
        if (bp_kdist(s->dim, k, s->t[i].k) < s->merge) {
            s->t[i].hits++;
            if (hi - lo < s->t[i].hi - s->t[i].lo) {
                memcpy(s->t[i].k, k, sizeof s->t[i].k);
                s->t[i].lo = lo;
                s->t[i].hi = hi;
            }
            return;
        }
    }
    touch *t = &s->t[s->nt++];
    memcpy(t->k, k, sizeof t->k);
    t->lo = lo;
    t->hi = hi;
    t->hits = 1;
}

/* Refines from mesh cell idx; valley starts next to a point that already attracted two refinements
 * (an isolated node) are skipped, since they would only converge there again. */
static int refine_from(search *s, int idx, int is_valley_start, bs_err *err)
{
    double k0[3], k[3], gap, lo, hi;
    bp_mesh_k(s->g, idx, k0);
    if (is_valley_start)
        for (int i = 0; i < s->nt; i++)
            if (s->t[i].hits >= 2 && bp_kdist(s->dim, k0, s->t[i].k) < 1.5 / s->g->n) return 0;
    s->nstarts++;
    int rc = bp_minimise(s->e, BP_GAP, k0, 1.0 / s->g->n, s->tol_k, k, &gap, &lo, &hi, err);
    if (rc != 0) return rc;
    if (gap < s->min_gap) s->min_gap = gap;
    if (gap < s->tol_gap) add_touch(s, k, lo, hi);
    return 0;
}

/* Strict local minima first (isolated nodes), then valley cells, all below thresh, lowest first: the
 * valley starts reach nodes that share a mesh cell with another one (pairs about to annihilate)
 * and touchings on lines. */
static int run_starts(search *s, const double *f, double thresh, bs_err *err)
{
    const bp_mesh *g = s->g;
    int *idx = malloc((size_t)s->cap * sizeof *idx);
    if (!idx) return bs_fail(err, BS_ENOMEM, "nodes: out of memory");
    int nmin = bp_mesh_minima(g, f, s->cap, idx), rc = 0, used = 0;
    for (int i = 0; i < nmin && rc == 0; i++) {
        if (f[idx[i]] >= thresh) break;
        rc = refine_from(s, idx[i], 0, err);
        used++;
    }
    int nval = 0;
    for (int i = 0; rc == 0 && g->dim == 3 && used < s->cap && i < g->npts; i++) {
        if (f[i] >= thresh || !is_valley(g, f, i)) continue;
        int dup = 0;
        for (int j = 0; j < used && !dup; j++)
            dup = idx[j] == i;
        if (!dup) nval = insert_capped(idx + used, nval, s->cap - used, f, i);
    }
    for (int i = 0; i < nval && rc == 0; i++)
        rc = refine_from(s, idx[used + i], 1, err);
    free(idx);
    return rc;
}

/* Tangent of a nodal line through touching k: 1 when the fitted curvature of gap^2 vanishes along
 * one direction (relative 1e-3: on a line it is zero up to the line's bending, ~(kappa r)^2 ~ 1e-5
 * at r = 1e-3; an isolated Weyl node has all three positive unless its cone is extremely flat,
 * and then the trace below finds no continuous curve). */
static int line_tangent(search *s, const double k[3], double tan[3], bs_err *err, int *rc)
{
    double ev[3], vec[9];
    *rc = bp_gap_curvature(s->e, k, 1e-3, ev, vec, err);
    if (*rc != 0 || !(ev[2] > 0) || ev[0] > 1e-3 * ev[2] || ev[1] < 1e-2 * ev[2]) return 0;
    for (int a = 0; a < 3; a++)
        tan[a] = vec[a];
    return 1;
}

static int near_line(const search *s, const double k[3], double d)
{
    for (int i = 0; i < s->nline; i++)
        if (bp_kdist(s->dim, k, s->line[i]) < d) return 1;
    return 0;
}

/* Follows a line from p0 along +-t0 in steps of delta: each step predicts p + delta t, minimises the
 * gap from there and takes the new tangent, until the gap no longer closes, the loop comes back to
 * p0, or the buffer is full. Appends the points to s->line; returns how many it added. */
static int trace_dir(search *s, const double p0[3], const double t0[3], double sign, double delta,
                     bs_err *err, int *rc)
{
    double p[3], t[3];
    int added = 0;
    for (int a = 0; a < 3; a++) {
        p[a] = p0[a];
        t[a] = sign * t0[a];
    }
    for (int step = 0; step < (int)(4.0 / delta) && s->nline < s->line_cap; step++) {
        double q[3], k[3], gap, tn[3];
        for (int a = 0; a < 3; a++)
            q[a] = p[a] + delta * t[a];
        *rc = bp_minimise(s->e, BP_GAP, q, 0.25 * delta, 1e-6, k, &gap, NULL, NULL, err);
        if (*rc != 0) return added;
        double moved = bp_kdist(s->dim, k, p);
        if (gap >= s->tol_gap || moved < 0.25 * delta || moved > 2.0 * delta) break;
        if (step >= 2 && bp_kdist(s->dim, k, p0) < 0.75 * delta) break; /* closed loop */
        if (!line_tangent(s, k, tn, err, rc)) break;
        double dot = tn[0] * t[0] + tn[1] * t[1] + tn[2] * t[2];
        for (int a = 0; a < 3; a++) {
            t[a] = dot < 0 ? -tn[a] : tn[a];
            p[a] = k[a];
        }
        memcpy(s->line[s->nline++], k, sizeof s->line[0]);
        added++;
    }
    return added;
}

/* Nodal lines: from every touching whose gap^2 is flat along one direction, trace the curve both
 * ways; a trace of at least min_pts distinct closed-gap points is a line, and every touching near it
 * belongs to it. The continuity of the trace is the evidence; a Berry flux around a point of a line
 * is not defined (the line pierces any surface around it), so no flux is used here. */
static int find_lines(search *s, int min_pts, int *absorbed, bs_err *err)
{
    double delta = 0.25 / s->g->n;
    for (int i = 0; i < s->nt; i++)
        absorbed[i] = 0;
    if (s->dim != 3) return 0;
    for (int i = 0; i < s->nt; i++) {
        if (near_line(s, s->t[i].k, 2 * delta)) continue;
        double tan[3];
        int rc = 0, before = s->nline;
        if (!line_tangent(s, s->t[i].k, tan, err, &rc)) {
            if (rc != 0) return rc;
            continue;
        }
        if (s->nline < s->line_cap) memcpy(s->line[s->nline++], s->t[i].k, sizeof s->line[0]);
        trace_dir(s, s->t[i].k, tan, 1.0, delta, err, &rc);
        if (rc == 0) trace_dir(s, s->t[i].k, tan, -1.0, delta, err, &rc);
        if (rc != 0) return rc;
        if (s->nline - before < min_pts) s->nline = before;
    }
    for (int i = 0; i < s->nt; i++)
        absorbed[i] = near_line(s, s->t[i].k, 2 * delta);
    return 0;
}

/* Nearest other touching or line point of touching i (modulo 1); 1 when there is none. */
static double nearest(const search *s, int i)
{
    double d = 1.0;
    for (int j = 0; j < s->nt; j++)
        if (j != i) {
            double x = bp_kdist(s->dim, s->t[i].k, s->t[j].k);
            if (x < d) d = x;
        }
    for (int j = 0; j < s->nline; j++) {
        double x = bp_kdist(s->dim, s->t[i].k, s->line[j]);
        if (x < d) d = x;
    }
    return d;
}

/* Flux of the lowest nocc bands out of a cube around touching i, half-size 0.4 of the distance to
 * the nearest other touching (so no other node is inside) and at most 0.05; halved up to three
 * times while the value is ambiguous: a smaller cube keeps its surface away from a close partner
 * node, where the curvature is too concentrated for the plaquettes, and from other closings. */
static int flux_at(const search *s, chern_ws *cw, int i, double deadline, chern_value *v, long long *nk,
                   bs_err *err)
{
    double h = 0.4 * nearest(s, i);
    if (h > 0.05) h = 0.05;
    chern_opts co;
    chern_opts_default(&co, 1);
    co.deadline = deadline;
    for (int attempt = 0; attempt < 4; attempt++, h *= 0.5) {
        int rc = chern_surface_flux(cw, s->t[i].k, h, &co, v, err);
        if (rc != 0) return rc;
        *nk += v->nk;
        if (v->status == RES_DONE) break;
    }
    return 0;
}

/* Chirality: the Berry flux F of the occupied bands out of the cube (outward, units of 2 pi, for the
 * curvature of A = i<u|grad u>, as chern_surface_flux gives it). For a two-band node
 * H = E0 + sum_ij v_ij q_j s_i it equals sign det(v): Berry's phase of the lower state of B.s is
 * +1/2 the solid angle (Proc. R. Soc. A 392, 45 (1984)). */
static int collect(search *s, chern_ws *cw, const int *absorbed, double deadline, nodes_result *out,
                   bs_err *err)
{
    int nabs = 0;
    for (int i = 0; i < s->nt; i++)
        nabs += absorbed[i];
    out->nnodes = s->nt - nabs;
    out->nodal_points = s->nline;
    out->nodes = out->nnodes ? calloc((size_t)out->nnodes, sizeof *out->nodes) : NULL;
    out->line_k = s->nline ? calloc((size_t)s->nline, sizeof *out->line_k) : NULL;
    if ((out->nnodes && !out->nodes) || (s->nline && !out->line_k))
        return bs_fail(err, BS_ENOMEM, "nodes: out of memory for %d touchings", s->nt + s->nline);
    if (s->nline) memcpy(out->line_k, s->line, (size_t)s->nline * sizeof s->line[0]);
    int in = 0, ambiguous = 0;
    for (int i = 0; i < s->nt; i++) {
        if (absorbed[i]) continue;
        res_node *d = &out->nodes[in++];
        memcpy(d->k, s->t[i].k, sizeof d->k);
        d->energy_ev = 0.5 * (s->t[i].lo + s->t[i].hi);
        d->gap_ev = s->t[i].hi - s->t[i].lo;
        d->chirality = 0;
        if (!cw) continue;
        chern_value v;
        int rc = flux_at(s, cw, i, deadline, &v, &out->nk_evaluated, err);
        if (rc != 0) return rc;
        if (v.status == RES_DONE)
            d->chirality = v.chern;
        else
            ambiguous = 1;
        out->net_chirality += d->chirality;
    }
    if (cw && out->nnodes) out->chirality_status = ambiguous ? RES_AMBIGUOUS : RES_DONE;
    out->nodal_line = s->nline > 0;
    for (int i = 0; i < s->nline; i++)
        for (int j = i + 1; j < s->nline; j++) {
            double d = bp_kdist(s->dim, s->line[i], s->line[j]);
            if (d > out->nodal_extent) out->nodal_extent = d;
        }
    return 0;
}

static int classify(search *s, const nodes_opts *o, nodes_result *out, bs_err *err)
{
    chern_ws *cw = NULL;
    int *absorbed = s->nt ? malloc((size_t)s->nt * sizeof *absorbed) : NULL;
    if (s->nt && !absorbed) return bs_fail(err, BS_ENOMEM, "nodes: out of memory");
    int min_pts = o->min_line_points > 0 ? o->min_line_points : 8;
    int rc = find_lines(s, min_pts, absorbed, err);
    int isolated = 0;
    for (int i = 0; rc == 0 && i < s->nt; i++)
        isolated += !absorbed[i];
    if (rc == 0 && isolated && s->dim == 3 && !o->skip_chirality)
        rc = chern_create_dist(s->m, s->m->nocc, bp_solver(s->e), &cw, err);
    if (rc == 0) rc = collect(s, cw, absorbed, o->deadline, out, err);
    chern_free(cw);
    free(absorbed);
    return rc;
}

int nodes_find_eval(const tb_model *m, bp_eval *e, const nodes_opts *o, nodes_result *out, bs_err *err)
{
    nodes_opts defaults;
    if (!o) {
        nodes_opts_init(&defaults);
        o = &defaults;
    }
    nodes_result_clear(out);
    double t0 = bs_now();
    long long c0 = bp_count(e);
    search s = {.m = m, .e = e, .dim = bp_dim(e)};
    s.cap = o->max_starts > 0 ? o->max_starts : 96;
    s.tol_gap = o->tol_gap_ev > 0 ? o->tol_gap_ev : BS_GAP_CLOSED_EV;
    s.tol_k = o->tol_k > 0 ? o->tol_k : 1e-7;
    s.merge = o->merge_dist > 0 ? o->merge_dist : 1e-4;
    s.min_gap = INFINITY;
    bp_mesh *own = NULL;
    s.g = o->grid;
    if (s.g && s.g->dim != s.dim)
        return bs_fail(err, BS_EINVAL, "nodes: mesh of dimension %d for a %dD model", s.g->dim, s.dim);
    int rc = 0;
    if (!s.g) {
        rc = bp_mesh_eval(e, o->mesh > 0 ? o->mesh : (s.dim == 3 ? 16 : 48), &own, err);
        if (rc != 0) return rc;
        s.g = own;
    }
    double *f = malloc((size_t)s.g->npts * sizeof *f);
    s.t = malloc((size_t)s.cap * sizeof *s.t);
    s.line_cap = 2048;
    s.line = malloc((size_t)s.line_cap * sizeof *s.line);
    if (!f || !s.t || !s.line) rc = bs_fail(err, BS_ENOMEM, "nodes: out of memory");
    double emin = INFINITY, emax = -INFINITY;
    int nclosed = 0;
    for (int i = 0; rc == 0 && i < s.g->npts; i++) {
        f[i] = s.g->hi[i] - s.g->lo[i];
        if (s.g->lo[i] < emin) emin = s.g->lo[i];
        if (s.g->hi[i] > emax) emax = s.g->hi[i];
        if (f[i] < s.min_gap) s.min_gap = f[i];
        nclosed += f[i] < s.tol_gap;
    }
    out->mesh = s.g->n;
    if (rc == 0 && 2 * nclosed > s.g->npts) out->degenerate = 1;
    /* Starts: gap below a fraction of the two bands' width, and in the lower half of the mesh's gap
     * range, so that a gap that does not vary (no point stands out) starts nothing. */
    double frac = o->start_frac > 0 ? o->start_frac : 0.25, gmax = -INFINITY;
    for (int i = 0; rc == 0 && i < s.g->npts; i++)
        if (f[i] > gmax) gmax = f[i];
    double thresh = fmin(frac * (emax - emin), s.min_gap + 0.5 * (gmax - s.min_gap));
    int flat = gmax - s.min_gap < s.tol_gap; /* round-off variations of a constant gap */
    if (rc == 0 && !out->degenerate && !flat) rc = run_starts(&s, f, thresh, err);
    if (rc == 0 && !out->degenerate) rc = classify(&s, o, out, err);
    out->min_gap_ev = s.min_gap;
    out->nstarts = s.nstarts;
    out->nk_evaluated += bp_count(e) - c0;
    out->seconds = bs_now() - t0;
    free(f);
    free(s.t);
    free(s.line);
    bp_mesh_free(own);
    return rc;
}

int nodes_find(const tb_model *m, hk_engine *hk, const nodes_opts *o, nodes_result *out, bs_err *err)
{
    bp_eval *e = NULL;
    int rc = bp_create(m, hk, o ? o->deadline : 0.0, &e, err);
    if (rc == 0) rc = nodes_find_eval(m, e, o, out, err);
    bp_free(e);
    return rc;
}

int nodes_check_time_reversal(const nodes_result *r, int dim, double tol_k)
{
    int plus = 0, minus = 0;
    for (int i = 0; i < r->nnodes; i++) {
        const res_node *a = &r->nodes[i];
        double mk[3] = {-a->k[0], -a->k[1], -a->k[2]};
        int found = 0;
        for (int j = 0; j < r->nnodes && !found; j++)
            found = r->nodes[j].chirality == a->chirality && bp_kdist(dim, mk, r->nodes[j].k) < tol_k;
        if (!found) return 0;
        plus += a->chirality > 0;
        minus += a->chirality < 0;
    }
    /* Touchings of zero chirality (Dirac points, e.g. at a time-reversal-invariant momentum with
     * inversion, which is its own image) need their -k partner but form no sets of four. */
    if (dim == 3 && ((plus + minus) % 4 != 0 || plus != minus)) return 0;
    return 1;
}
