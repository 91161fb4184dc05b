/* Gap search at the filling: basins on a coarse mesh, every one that could hold an extreme refined
 * by a local minimiser in reduced coordinates (bandpair.c), for the direct gap, the valence maximum
 * and the conduction minimum separately; then meshes displaced by half a step, until a level
 * changes nothing beyond the tolerance or the level budget is spent. */
#include "bandsieve/gaps.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/clock.h"
#include "bandsieve/config.h"
#include "bandsieve/nodes.h"

/* How far below its mesh value a basin's extreme can lie, in units of the largest variation to
 * the mesh neighbours: along a line through a local mesh minimum, a cone v|x| whose apex lies
 * half a step away drops by v h / 2 while the far neighbour rises by v h (the worst case: 1/2);
 * a parabola drops by at most 1/8 of that neighbour difference. */
#define GAPS_REACH 0.5

#define GAPS_MIN_CHECK_MESH 4

/* Mesh displacements of the levels after the first, in half steps: the body centre first (the
 * points farthest from the coarse mesh), then the face and edge centres; in 2D only those in the
 * plane. Together with the coarse mesh they make the mesh of twice the density. */
static const double LEVEL_OFF[8][3] = {{0, 0, 0},     {0.5, 0.5, 0.5}, {0.5, 0, 0},   {0, 0.5, 0},
                                       {0.5, 0.5, 0}, {0, 0, 0.5},     {0.5, 0, 0.5}, {0, 0.5, 0.5}};
static const int LEVEL_2D[4] = {0, 4, 2, 3};

void gaps_opts_init(gaps_opts *o)
{
    memset(o, 0, sizeof *o);
}

int gaps_unsure(double gap_indirect_ev, double resolution_ev)
{
    return fabs(gap_indirect_ev) < GAPS_UNSURE_FACTOR * resolution_ev;
}

/* The best point found so far for each quantity, all three minimised: 0 the direct gap
 * E_{N+1} - E_N, 1 -E_N, 2 E_{N+1} (the order of BP_GAP, BP_NEG_LOWER, BP_UPPER). */
typedef struct gaps_best {
    double v[3], k[3][3];
} gaps_best;

/* Every evaluated point bounds all three extremes. */
static void best_update(gaps_best *b, const double k[3], double lo, double hi)
{
    const double f[3] = {hi - lo, -lo, hi};
    for (int q = 0; q < 3; q++)
        if (f[q] < b->v[q]) {
            b->v[q] = f[q];
            memcpy(b->k[q], k, sizeof b->k[q]);
        }
}

/* Writes the best values into out: k wrapped into [0, 1) (components beyond dim zero), the gaps
 * and whether they are closed. */
static void store_best(gaps_result *out, gaps_best b, int dim)
{
    for (int q = 0; q < 3; q++)
        for (int a = 0; a < 3; a++) {
            double x = a < dim ? b.k[q][a] - floor(b.k[q][a]) : 0.0;
            b.k[q][a] = x >= 1.0 ? 0.0 : x;
        }
    out->gap_direct_ev = b.v[0];
    out->vbm_ev = -b.v[1];
    out->cbm_ev = b.v[2];
    memcpy(out->k_direct, b.k[0], sizeof out->k_direct);
    memcpy(out->k_vbm, b.k[1], sizeof out->k_vbm);
    memcpy(out->k_cbm, b.k[2], sizeof out->k_cbm);
    out->gap_indirect_ev = out->cbm_ev - out->vbm_ev;
    out->metallic = out->gap_indirect_ev < BS_GAP_CLOSED_EV;
    out->closed = out->gap_direct_ev < BS_GAP_CLOSED_EV;
}

/* End points of refinements (per quantity), so a start inside an explored basin is skipped. */
typedef struct gaps_ends {
    int n, cap;
    double (*k)[3];
    double *v;
} gaps_ends;

static int ends_add(gaps_ends *s, const double k[3], double v, bs_err *err)
{
    if (s->n == s->cap) {
        int cap = s->cap ? 2 * s->cap : 64;
        double(*nk)[3] = realloc(s->k, (size_t)cap * sizeof *nk);
        if (nk) s->k = nk;
        double *nv = nk ? realloc(s->v, (size_t)cap * sizeof *nv) : NULL;
        if (nv) s->v = nv;
        if (!nv) return bs_fail(err, BS_ENOMEM, "gaps: out of memory");
        s->cap = cap;
    }
    memcpy(s->k[s->n], k, sizeof s->k[0]);
    s->v[s->n++] = v;
    return 0;
}

/* A start at mesh value f0 within one and a half mesh steps of an end point no higher than f0 is
 * in a basin already refined; with E(-k) = E(k) (even) so is a start whose mirror -k0 is. */
static int explored(const gaps_ends *s, int dim, const double k0[3], double f0, double step, int even)
{
    const double mk[3] = {-k0[0], -k0[1], -k0[2]};
    for (int i = 0; i < s->n; i++)
        if (s->v[i] <= f0 &&
            (bp_kdist(dim, k0, s->k[i]) < 1.5 * step || (even && bp_kdist(dim, mk, s->k[i]) < 1.5 * step)))
            return 1;
    return 0;
}

/* Largest |f(j) - f(i)| over the 3^dim - 1 mesh neighbours j of i. */
static double neighbour_variation(const bp_mesh *g, const double *f, int i)
{
    int lim3 = g->dim == 3 ? 1 : 0;
    double d = 0;
    for (int a = -1; a <= 1; a++)
        for (int b = -1; b <= 1; b++)
            for (int c = -lim3; c <= lim3; c++) {
                int sh[3] = {a, b, c};
                d = fmax(d, fabs(f[bp_mesh_shift(g, i, sh)] - f[i]));
            }
    return d;
}

/* Whether mesh point i has a neighbour of lower index with the same value (to round-off): points
 * of one flat plateau (a degenerate valley, e.g. a zone face) are one basin, refined once. */
static int plateau_repeat(const bp_mesh *g, const double *f, int i)
{
    int lim3 = g->dim == 3 ? 1 : 0;
    double eps = 1e-12 * (1.0 + fabs(f[i]));
    for (int a = -1; a <= 1; a++)
        for (int b = -1; b <= 1; b++)
            for (int c = -lim3; c <= lim3; c++) {
                int sh[3] = {a, b, c}, j = bp_mesh_shift(g, i, sh);
                if (j < i && fabs(f[j] - f[i]) <= eps) return 1;
            }
    return 0;
}

/* Refines, for quantity q, every local minimum of the mesh values f that could go below the best
 * value found so far by more than tol (its mesh value less GAPS_REACH times its neighbour
 * variation), or come within slack of it (gaps_find_near), lowest first, at most nmax of them, skipping
 * explored basins. Work array idx (npts) from the caller. */
static int refine_quantity(bp_eval *e, const bp_mesh *g, const double *f, int *idx, int q, int nmax,
                           double tol_k, double tol, double slack, gaps_best *b, gaps_ends *ends, int *nrun,
                           bs_err *err)
{
    int nmin = bp_mesh_minima(g, f, g->npts, idx), done = 0, rc = 0;
    double step = 1.0 / g->n;
    for (int j = 0; j < nmin && done < nmax && rc == 0; j++) {
        int i = idx[j];
        if (f[i] - GAPS_REACH * neighbour_variation(g, f, i) >= b->v[q] - tol + slack) continue;
        if (plateau_repeat(g, f, i)) continue;
        double k0[3], k[3], v, lo, hi;
        bp_mesh_k(g, i, k0);
        if (explored(ends, g->dim, k0, f[i], step, bp_even(e))) continue;
        rc = bp_minimise(e, q, k0, step, tol_k, k, &v, &lo, &hi, err);
        if (rc == 0) rc = ends_add(ends, k, v, err);
        if (rc == 0) best_update(b, k, lo, hi);
        done++;
    }
    *nrun += done;
    return rc;
}

/* One mesh level: every mesh point bounds the extremes, then the three quantities are refined. */
static int search_mesh(bp_eval *e, const bp_mesh *g, int nmax, double tol_k, double tol,
                       const double slack[3], gaps_best *b, gaps_ends ends[3], int *nrun, bs_err *err)
{
    double *f = malloc((size_t)g->npts * sizeof *f);
    int *idx = malloc((size_t)g->npts * sizeof *idx);
    int rc = 0;
    if (!f || !idx) rc = bs_fail(err, BS_ENOMEM, "gaps: out of memory for %d points", g->npts);
    for (int i = 0; rc == 0 && i < g->npts; i++) {
        double k[3];
        bp_mesh_k(g, i, k);
        best_update(b, k, g->lo[i], g->hi[i]);
    }
    for (int q = 0; rc == 0 && q < 3; q++) {
        for (int i = 0; i < g->npts; i++)
            f[i] = q == 0 ? g->hi[i] - g->lo[i] : q == 1 ? -g->lo[i] : g->hi[i];
        rc = refine_quantity(e, g, f, idx, q, nmax, tol_k, tol, slack[q], b, &ends[q], nrun, err);
    }
    free(f);
    free(idx);
    return rc;
}

/* The search of gaps_find_eval with slack (per quantity, >= 0) added to the refinement threshold;
 * leaves the refined basins' end points in ends (the caller frees them) and the best points in *best. */
static int gaps_search(bp_eval *e, const gaps_opts *o, const double slack[3], gaps_result *out,
                       gaps_best *best, gaps_ends ends[3], bs_err *err)
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
    int nmax = o->nrefine > 0 ? o->nrefine : 48;
    int maxlev = o->levels > 0 ? o->levels : 3;
    if (maxlev > (dim == 3 ? 8 : 4)) maxlev = dim == 3 ? 8 : 4;
    double tol_k = o->tol_k > 0 ? o->tol_k : 1e-6;
    double tol = o->conv_tol_ev > 0 ? o->conv_tol_ev : GAPS_CONV_TOL_EV;
    bp_mesh *own = NULL;
    const bp_mesh *g = o->grid;
    if (g && g->dim != dim)
        return bs_fail(err, BS_EINVAL, "gaps: mesh of dimension %d for a %dD model", g->dim, dim);
    int rc = 0;
    if (!g) {
        rc = bp_mesh_eval(e, n, &own, err);
        if (rc != 0) return rc;
        g = own;
    }
    double emin = g->lo[0], emax = g->hi[0];
    for (int i = 0; i < g->npts; i++) {
        emin = fmin(emin, g->lo[i]);
        emax = fmax(emax, g->hi[i]);
    }
    gaps_best b = {{INFINITY, INFINITY, INFINITY}, {{0}}};
    rc = search_mesh(e, g, nmax, tol_k, tol, slack, &b, ends, &out->nbasins, err);
    out->levels = 1;
    double change = INFINITY;
    /* Each further level is the coarse mesh displaced by half a step: a basin that fell between
     * the coarse points shows there. The gaps only go down; the change of the largest is the
     * level's change. */
    while (rc == 0 && out->levels < maxlev) {
        double before[3];
        memcpy(before, b.v, sizeof before);
        const double *off = LEVEL_OFF[dim == 3 ? out->levels : LEVEL_2D[out->levels]];
        bp_mesh *h = NULL;
        rc = bp_mesh_eval_offset(e, g->n, off, &h, err);
        if (rc == 0) rc = search_mesh(e, h, nmax, tol_k, tol, slack, &b, ends, &out->nbasins, err);
        bp_mesh_free(h);
        out->levels++;
        change = 0;
        for (int q = 0; q < 3; q++)
            change = fmax(change, before[q] - b.v[q]);
        if (change <= tol) break;
    }
    *best = b;
    store_best(out, b, dim);
    /* Below GAPS_MIN_CHECK_MESH points per direction a displaced mesh samples the zone too
     * sparsely for "nothing changed" to mean anything (seen: a 2- or 3-point mesh and its
     * displacements all miss a basin 60 meV deep), so no convergence is claimed there. */
    int credible = g->n >= GAPS_MIN_CHECK_MESH;
    out->converged = credible && change <= tol;
    out->resolution_ev = credible && isfinite(change) ? fmax(change, tol) : INFINITY;
    out->width_ev = emax - emin;
    out->mesh = g->n;
    out->nk_evaluated = bp_count(e) - c0;
    out->seconds = bs_now() - t0;
    bp_mesh_free(own);
    return rc;
}

static void ends_free(gaps_ends ends[3])
{
    for (int q = 0; q < 3; q++) {
        free(ends[q].k);
        free(ends[q].v);
    }
}

int gaps_find_eval(bp_eval *e, const gaps_opts *o, gaps_result *out, bs_err *err)
{
    const double none[3] = {0, 0, 0};
    gaps_best b;
    gaps_ends ends[3];
    memset(ends, 0, sizeof ends);
    int rc = gaps_search(e, o, none, out, &b, ends, err);
    ends_free(ends);
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

/* Polishing on H from H_s's basins: the first fit's radius and the radius below which it stops,
 * reduced units. The perturbation D = H - H_s moves a minimum by about |grad D| / curvature
 * (~1e-3 of the zone for the fit noise of the tests), well inside the first stencil; one or two
 * fits on a stencil of that size land on the minimum to ~1e-5 of the zone, where the value is
 * converged far below GAPS_CONV_TOL_EV (quadratic in the distance). */
#define GAPS_POLISH_STEP 0.02
#define GAPS_POLISH_TOL  1e-3
/* Candidates polished: the one with the lowest value on H at H_s's end point, then every other
 * whose value there is within the tolerance plus this many times the largest polishing gain seen
 * so far of the best value. The gain (the value at the end point less the polished one) is second
 * order in D, much the same in basins of one band. */
#define GAPS_POLISH_GAIN_FACTOR 4.0

/* One candidate start on H for quantity q: the point and H's value there. */
typedef struct gaps_cand {
    double k[3], f;
} gaps_cand;

static int cand_cmp(const void *a, const void *b)
{
    double x = ((const gaps_cand *)a)->f, y = ((const gaps_cand *)b)->f;
    return (x > y) - (x < y);
}

/* Starts for quantity q: every basin end of H_s within window of its best value (and the best
 * point itself), each with its mirror -k unless k is a time-reversal-invariant momentum (H need
 * not be even), with H's value there; into *out (caller frees), count in *n. */
static int near_candidates(bp_eval *e, int q, const gaps_best *bs, const gaps_ends *ends, double window,
                           gaps_cand **out, int *n, bs_err *err)
{
    int dim = bp_dim(e), cap = 2 * (ends->n + 1), nc = 0;
    gaps_cand *c = malloc((size_t)cap * sizeof *c);
    double *k = malloc((size_t)cap * 3 * sizeof *k), *lo = malloc((size_t)cap * sizeof *lo),
           *hi = malloc((size_t)cap * sizeof *hi);
    int rc = 0;
    if (!c || !k || !lo || !hi) rc = bs_fail(err, BS_ENOMEM, "gaps: out of memory");
    for (int i = -1; rc == 0 && i < ends->n; i++) {
        const double *ki = i < 0 ? bs->k[q] : ends->k[i];
        if (i >= 0 && ends->v[i] > bs->v[q] + window) continue;
        for (int sgn = 1; sgn >= -1; sgn -= 2) {
            double x[3] = {0, 0, 0};
            for (int a = 0; a < dim; a++)
                x[a] = sgn * ki[a];
            /* One start per point: -k of a time-reversal-invariant momentum, and ends that the
             * search reached from several starts or across the cell boundary, are the same. */
            int seen = 0;
            for (int t = 0; t < nc && !seen; t++)
                seen = bp_kdist(dim, x, c[t].k) < 1e-9;
            if (seen) continue;
            memcpy(c[nc].k, x, sizeof x);
            memcpy(k + 3 * nc, x, sizeof x);
            nc++;
        }
    }
    if (rc == 0) rc = bp_bands(e, nc, k, lo, hi, err);
    for (int i = 0; rc == 0 && i < nc; i++)
        c[i].f = q == 0 ? hi[i] - lo[i] : q == 1 ? -lo[i] : hi[i];
    if (rc == 0) qsort(c, (size_t)nc, sizeof *c, cand_cmp);
    free(k);
    free(lo);
    free(hi);
    if (rc != 0) {
        free(c);
        return rc;
    }
    *out = c;
    *n = nc;
    return 0;
}

/* A point of H_s's mesh evaluated on H: its value there and its mesh index. */
typedef struct gaps_plat {
    double f;
    int i;
} gaps_plat;

static int plat_cmp(const void *a, const void *b)
{
    double x = ((const gaps_plat *)a)->f, y = ((const gaps_plat *)b)->f;
    return (x > y) - (x < y);
}

/* Plateaus: where H_s's band is flat to within the window, H's extreme can sit anywhere on it, far
 * from H_s's basin ends (seen: a 4-state cubic fit whose conduction minimum on H lies 0.3 of the
 * zone from every end point, 1 meV below them). Every point of H_s's first mesh g that could hold
 * a value below limit (its value less GAPS_REACH times its neighbour variation, as the search
 * judges basins), that could be a local minimum of H (no neighbour lower by more than flat, twice
 * the shift of the quantity) and lies outside the basins H_s's search refined (1.5 mesh steps from every end
 * point of quantity q and its mirror, as the search itself tells explored basins; those within
 * the window were polished, the others cannot reach it) is evaluated on H; H's local minima among
 * them (checked against H at all their mesh neighbours) are refined as the search refines its
 * basins, those that could beat b first. */
/* Whether mesh point i of f could be a local minimum once every value moves by up to flat / 2:
 * none of its neighbours lies lower by more than flat. */
static int near_minimum(const bp_mesh *g, const double *f, int i, double flat)
{
    int lim3 = g->dim == 3 ? 1 : 0;
    for (int a = -1; a <= 1; a++)
        for (int b = -1; b <= 1; b++)
            for (int c = -lim3; c <= lim3; c++) {
                int sh[3] = {a, b, c};
                if (f[bp_mesh_shift(g, i, sh)] < f[i] - flat) return 0;
            }
    return 1;
}

static int plateau_starts(bp_eval *e, const bp_mesh *g, int q, double limit, double flat,
                          const gaps_ends *ends, double tol, double tol_k, gaps_best *b, int *nrun,
                          bs_err *err)
{
    int np = g->npts, ns = 0, rc = 0;
    double step = 1.0 / g->n;
    double *fs = malloc((size_t)np * sizeof *fs), *var = malloc((size_t)np * sizeof *var);
    double *k = malloc((size_t)np * 3 * sizeof *k), *lo = malloc((size_t)np * sizeof *lo),
           *hi = malloc((size_t)np * sizeof *hi);
    int *pos = malloc((size_t)np * sizeof *pos);
    gaps_plat *p = malloc((size_t)np * sizeof *p);
    if (!fs || !var || !k || !lo || !hi || !pos || !p) rc = bs_fail(err, BS_ENOMEM, "gaps: out of memory");
    for (int i = 0; rc == 0 && i < np; i++)
        fs[i] = q == 0 ? g->hi[i] - g->lo[i] : q == 1 ? -g->lo[i] : g->hi[i];
    for (int i = 0; rc == 0 && i < np; i++) {
        var[i] = neighbour_variation(g, fs, i);
        pos[i] = -1;
        if (fs[i] - GAPS_REACH * var[i] > limit || !near_minimum(g, fs, i, flat)) continue;
        bp_mesh_k(g, i, k + 3 * ns);
        if (explored(ends, g->dim, k + 3 * ns, INFINITY, step, 1)) continue;
        p[ns].i = i;
        pos[i] = ns++;
    }
    if (rc == 0 && ns > 0) rc = bp_bands(e, ns, k, lo, hi, err);
    for (int j = 0; rc == 0 && j < ns; j++) {
        p[j].f = q == 0 ? hi[j] - lo[j] : q == 1 ? -lo[j] : hi[j];
        best_update(b, k + 3 * j, lo[j], hi[j]);
    }
    /* pos[] indexes the unsorted list: H's values by mesh index before sorting. */
    double *fh = malloc((size_t)(ns > 0 ? ns : 1) * sizeof *fh);
    if (rc == 0 && !fh) rc = bs_fail(err, BS_ENOMEM, "gaps: out of memory");
    for (int j = 0; rc == 0 && j < ns; j++)
        fh[j] = p[j].f;
    if (rc == 0) qsort(p, (size_t)ns, sizeof *p, plat_cmp);
    int lim3 = g->dim == 3 ? 1 : 0;
    for (int j = 0; rc == 0 && j < ns; j++) {
        int i = p[j].i;
        if (p[j].f - GAPS_REACH * var[i] >= b->v[q] - tol) continue;
        /* A point no higher than the best so far starts a refinement whatever its neighbours (the
         * minimiser can only go lower); any other only as a local minimum of H on the mesh, as the
         * search's starts are: first among the points evaluated, then against H at every
         * neighbour. */
        if (p[j].f > b->v[q]) {
            int is_min = 1;
            for (int a = -1; a <= 1 && is_min; a++)
                for (int bb = -1; bb <= 1 && is_min; bb++)
                    for (int cc = -lim3; cc <= lim3 && is_min; cc++) {
                        int sh[3] = {a, bb, cc}, nb = bp_mesh_shift(g, i, sh);
                        if (nb != i && pos[nb] >= 0 && fh[pos[nb]] < p[j].f) is_min = 0;
                    }
            if (!is_min) continue;
            double kn[27 * 3], ln[27], hn[27];
            int nn = 0;
            for (int a = -1; a <= 1; a++)
                for (int bb = -1; bb <= 1; bb++)
                    for (int cc = -lim3; cc <= lim3; cc++) {
                        int sh[3] = {a, bb, cc}, nb = bp_mesh_shift(g, i, sh);
                        if (nb != i) bp_mesh_k(g, nb, kn + 3 * nn++);
                    }
            rc = bp_bands(e, nn, kn, ln, hn, err);
            for (int t = 0; rc == 0 && t < nn; t++) {
                best_update(b, kn + 3 * t, ln[t], hn[t]);
                if ((q == 0 ? hn[t] - ln[t] : q == 1 ? -ln[t] : hn[t]) < p[j].f) is_min = 0;
            }
            if (rc != 0 || !is_min) continue;
        }
        double k0[3], kk[3], v, l, h;
        bp_mesh_k(g, i, k0);
        rc = bp_minimise(e, q, k0, step, tol_k, kk, &v, &l, &h, err);
        if (rc == 0) best_update(b, kk, l, h);
        (*nrun)++;
    }
    free(fh);
    free(fs);
    free(var);
    free(k);
    free(lo);
    free(hi);
    free(pos);
    free(p);
    return rc;
}

int gaps_find_near(bp_eval *es, bp_eval *e, double shift_ev, const gaps_opts *o, gaps_result *out,
                   bs_err *err)
{
    double t0 = bs_now();
    /* Each band of H within shift_ev of H_s's: the direct gap within 2 shift_ev, the band edges
     * within shift_ev; H's extreme lies where H_s's value is within twice that of H_s's best. */
    const double dq[3] = {2 * shift_ev, shift_ev, shift_ev};
    const double slack[3] = {2 * dq[0], 2 * dq[1], 2 * dq[2]};
    gaps_best bs;
    gaps_ends ends[3];
    memset(ends, 0, sizeof ends);
    gaps_result gs;
    gaps_opts oo;
    gaps_opts_init(&oo);
    if (o) oo = *o;
    bp_mesh *own = NULL;
    int rc = 0;
    if (!oo.grid) {
        rc = bp_mesh_eval(es, oo.mesh > 0 ? oo.mesh : (bp_dim(es) == 3 ? 16 : 48), &own, err);
        oo.grid = own;
    }
    if (rc == 0) rc = gaps_search(es, &oo, slack, &gs, &bs, ends, err);
    long long c0 = bp_count(e);
    if (rc == 0) *out = gs;
    double tol = oo.conv_tol_ev > 0 ? oo.conv_tol_ev : GAPS_CONV_TOL_EV;
    double tol_k = oo.tol_k > 0 ? oo.tol_k : 1e-6;
    gaps_best b = {{INFINITY, INFINITY, INFINITY}, {{0}}};
    for (int q = 0; q < 3 && rc == 0; q++) {
        gaps_cand *c = NULL;
        int nc = 0;
        rc = near_candidates(e, q, &bs, &ends[q], slack[q], &c, &nc, err);
        double gain = 0;
        for (int i = 0; rc == 0 && i < nc; i++) {
            if (i > 0 && c[i].f - tol - GAPS_POLISH_GAIN_FACTOR * gain >= b.v[q]) break;
            double k[3], v, lo, hi;
            rc = bp_minimise(e, q, c[i].k, GAPS_POLISH_STEP, GAPS_POLISH_TOL, k, &v, &lo, &hi, err);
            if (rc == 0) best_update(&b, k, lo, hi);
            gain = fmax(gain, c[i].f - v);
            out->nbasins++;
        }
        if (rc == 0)
            rc = plateau_starts(e, oo.grid, q, bs.v[q] + slack[q], 2 * dq[q], &ends[q], tol, tol_k, &b,
                                &out->nbasins, err);
        free(c);
    }
    ends_free(ends);
    bp_mesh_free(own);
    if (rc != 0) return rc;
    const double fs[3] = {gs.gap_direct_ev, -gs.vbm_ev, gs.cbm_ev};
    out->shift_ev = 0;
    for (int q = 0; q < 3; q++)
        out->shift_ev = fmax(out->shift_ev, fabs(b.v[q] - fs[q]) / (q == 0 ? 2.0 : 1.0));
    store_best(out, b, bp_dim(e));
    out->nk_evaluated = bp_count(e) - c0;
    out->seconds = bs_now() - t0;
    return 0;
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
