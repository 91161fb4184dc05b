/* The two bands at the filling on batches of k, uniform meshes of them, and a derivative-free
 * trust-region minimiser on quadratic fits, shared by the gap and node searches. */
#include "bandsieve/config.h"
#include "bandsieve/bandpair.h"

#include <lapacke.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "bandsieve/clock.h"
#include "bandsieve/eig.h"

/* Below this size the full zheevd spectrum is cheaper than zheevr for two eigenvalues. Measured
 * (OpenBLAS, one thread, 2026-12): n = 8: 8.1 us all vs 10.7 us range; n = 24: 50.7 vs 53.1;
 * n = 32: 88 vs 61; n = 128: 1450 vs 1215. */
#define BP_RANGE_MIN_NORB 32

/* Entries of the cache of single points (bp_bands), a power of two. The refinements of the three
 * quantities of the gap search (direct gap, valence maximum, conduction minimum) often start at
 * the same mesh point, usually a time-reversal-invariant momentum, and while the minimum stays
 * there their stencils shrink through the same radii: the same k, bit for bit, whose two bands are
 * taken from here instead of being diagonalised again; so are mesh points that a refinement or a
 * later look (gaps_find_near) asks for again. Direct-mapped: a collision evicts. */
#define BP_CACHE_SIZE 16384

typedef struct bp_cached {
    double k[3], lo, hi;
    int used;
} bp_cached;

struct bp_eval {
    const tb_model *m;
    hk_engine *hk;
    hk_lines *lines; /* partial sums for batches along mesh rows */
    eig_ws *ws;
    int norb, nocc, dim, batch, use_range;
    int even; /* E(-k) = E(k) to round-off: meshes evaluate one point of each pair k, -k */
    double deadline;
    const eig_dist *dist; /* borrowed, NULL: LAPACK */
    double complex *H;    /* batch * norb^2 */
    double *w;            /* norb */
    long long count;
    bp_cached *cache; /* BP_CACHE_SIZE entries */
};

int bp_create(const tb_model *m, hk_engine *hk, double deadline, bp_eval **out, bs_err *err)
{
    return bp_create_dist(m, hk, NULL, deadline, out, err);
}

const eig_dist *bp_solver(const bp_eval *e)
{
    return e->dist;
}

int bp_create_dist(const tb_model *m, hk_engine *hk, const eig_dist *dist, double deadline, bp_eval **out,
                   bs_err *err)
{
    *out = NULL;
    if (!m || !hk) return bs_fail(err, BS_EINVAL, "bandpair: model and H(k) engine are required");
    if (hk_norb(hk) != m->norb)
        return bs_fail(err, BS_EINVAL, "bandpair: engine has %d states, model %d", hk_norb(hk), m->norb);
    if (m->nocc < 1 || m->nocc > m->norb - 1)
        return bs_fail(err, BS_EINVAL, "bandpair: filling %d outside 1..%d", m->nocc, m->norb - 1);
    bp_eval *e = calloc(1, sizeof *e);
    if (!e) return bs_fail(err, BS_ENOMEM, "bandpair: out of memory");
    e->m = m;
    e->hk = hk;
    e->norb = m->norb;
    e->nocc = m->nocc;
    e->dim = m->dim;
    e->batch = hk_max_batch(hk);
    e->use_range = m->norb >= BP_RANGE_MIN_NORB;
    e->deadline = deadline;
    e->dist = dist;
    e->H = malloc((size_t)e->batch * e->norb * e->norb * sizeof *e->H);
    e->w = malloc((size_t)e->norb * sizeof *e->w);
    e->cache = calloc(BP_CACHE_SIZE, sizeof *e->cache);
    int rc = 0;
    if (!e->H || !e->w || !e->cache)
        rc = bs_fail(err, BS_ENOMEM, "bandpair: out of memory for %d matrices", e->batch);
    if (rc == 0) rc = eig_create_dist(e->norb, dist, &e->ws, err);
    if (rc == 0) rc = hk_lines_create(e->hk, &e->lines, err);
    if (rc != 0) {
        bp_free(e);
        return rc;
    }
    *out = e;
    return 0;
}

void bp_free(bp_eval *e)
{
    if (!e) return;
    hk_lines_free(e->lines);
    eig_free(e->ws);
    free(e->H);
    free(e->w);
    free(e->cache);
    free(e);
}

void bp_set_even(bp_eval *e, int even)
{
    e->even = even;
}

int bp_even(const bp_eval *e)
{
    return e->even;
}

/* Index along one direction of the mesh point -k for index i at offset o (0 or 1/2 steps):
 * -(i + o)/n = (n - i - 2 o)/n modulo 1; -1 for other offsets (no partner on the mesh). */
static int mesh_partner(int n, int i, double o)
{
    if (o == 0.0) return (n - i) % n;
    if (o == 0.5) return n - 1 - i;
    return -1;
}

/* The row (k2, k3 fixed) of the points -k of row `row`, or -1. */
static int partner_row(const bp_mesh *g, int row)
{
    int n = g->n, i2 = row % n, i3 = g->dim == 3 ? row / n : 0;
    int j2 = mesh_partner(n, i2, g->off[1]), j3 = g->dim == 3 ? mesh_partner(n, i3, g->off[2]) : 0;
    if (j2 < 0 || j3 < 0 || mesh_partner(n, 0, g->off[0]) < 0) return -1;
    return j2 + n * j3;
}

long long bp_count(const bp_eval *e)
{
    return e->count;
}
int bp_dim(const bp_eval *e)
{
    return e->dim;
}

/* Slot of the cache for the bit pattern of k (FNV-1a over its 24 bytes). */
static unsigned cache_slot(const double k[3])
{
    unsigned char b[3 * sizeof(double)];
    memcpy(b, k, sizeof b);
    uint64_t h = 1469598103934665603ULL;
    for (size_t i = 0; i < sizeof b; i++)
        h = (h ^ b[i]) * 1099511628211ULL;
    return (unsigned)(h ^ (h >> 32)) & (BP_CACHE_SIZE - 1);
}

static int diagonalise(bp_eval *e, int nk, const double *k, double *lo, double *hi, bs_err *err);

int bp_bands(bp_eval *e, int nk, const double *k, double *lo, double *hi, bs_err *err)
{
    /* In pieces of a stencil's size, so that the work arrays stay on the stack. */
    for (; nk > 27; nk -= 27, k += 3 * 27, lo += 27, hi += 27) {
        int rc = bp_bands(e, 27, k, lo, hi, err);
        if (rc != 0) return rc;
    }
    double km[27 * 3], l[27], h[27];
    int miss[27], nm = 0;
    for (int j = 0; j < nk; j++) {
        const bp_cached *c = &e->cache[cache_slot(k + 3 * j)];
        if (c->used && memcmp(c->k, k + 3 * j, sizeof c->k) == 0) {
            lo[j] = c->lo;
            hi[j] = c->hi;
        } else {
            memcpy(km + 3 * nm, k + 3 * j, 3 * sizeof *km);
            miss[nm++] = j;
        }
    }
    if (nm == 0) return 0;
    int rc = diagonalise(e, nm, km, l, h, err);
    if (rc != 0) return rc;
    for (int i = 0; i < nm; i++) {
        lo[miss[i]] = l[i];
        hi[miss[i]] = h[i];
        bp_cached *c = &e->cache[cache_slot(km + 3 * i)];
        memcpy(c->k, km + 3 * i, sizeof c->k);
        c->lo = l[i];
        c->hi = h[i];
        c->used = 1;
    }
    return 0;
}

/* The two bands at nk points, diagonalised in batches. */
static int diagonalise(bp_eval *e, int nk, const double *k, double *lo, double *hi, bs_err *err)
{
    size_t nn = (size_t)e->norb * e->norb;
    for (int j0 = 0; j0 < nk; j0 += e->batch) {
        if (e->deadline > 0 && bs_now() > e->deadline)
            return bs_fail(err, BS_ETIMEOUT, "band search: time budget exceeded after %lld k-points",
                           e->count);
        int nb = nk - j0 < e->batch ? nk - j0 : e->batch;
        int rc = hk_lines_build(e->lines, nb, k + 3 * (size_t)j0, e->H, err);
        if (rc != 0) return rc;
        for (int j = 0; j < nb; j++) {
            double complex *A = e->H + j * nn;
            if (e->use_range) {
                rc = eig_range(e->ws, A, e->nocc - 1, e->nocc, e->w, NULL, err);
                if (rc != 0) return rc;
                lo[j0 + j] = e->w[0];
                hi[j0 + j] = e->w[1];
            } else {
                rc = eig_values(e->ws, A, e->w, err);
                if (rc != 0) return rc;
                lo[j0 + j] = e->w[e->nocc - 1];
                hi[j0 + j] = e->w[e->nocc];
            }
        }
        e->count += nb;
    }
    return 0;
}

int bp_mesh_eval(bp_eval *e, int n, bp_mesh **out, bs_err *err)
{
    const double zero[3] = {0, 0, 0};
    return bp_mesh_eval_offset(e, n, zero, out, err);
}

int bp_mesh_eval_offset(bp_eval *e, int n, const double off[3], bp_mesh **out, bs_err *err)
{
    *out = NULL;
    if (n < 2 || n > (e->dim == 3 ? BS_MAX_MESH_3D : BS_MAX_MESH_2D))
        return bs_fail(err, BS_EINVAL, "band mesh: %d points per direction outside 2..%d", n,
                       e->dim == 3 ? BS_MAX_MESH_3D : BS_MAX_MESH_2D);
    bp_mesh *g = calloc(1, sizeof *g);
    if (!g) return bs_fail(err, BS_ENOMEM, "band mesh: out of memory");
    g->dim = e->dim;
    g->n = n;
    g->npts = e->dim == 3 ? n * n * n : n * n;
    for (int a = 0; a < 3; a++)
        g->off[a] = a < e->dim ? off[a] : 0.0;
    g->lo = malloc((size_t)g->npts * sizeof *g->lo);
    g->hi = malloc((size_t)g->npts * sizeof *g->hi);
    int chunk = e->batch;
    double *k = malloc((size_t)chunk * 3 * sizeof *k);
    int rc = 0;
    if (!g->lo || !g->hi || !k)
        rc = bs_fail(err, BS_ENOMEM, "band mesh: out of memory for %d points", g->npts);
    /* Row by row (k1 varies fastest): each call's points share k2 and k3, so the H(k) build runs
     * from partial sums along the row (hk_lines_build). With E(-k) = E(k) (e->even) a row whose
     * partner row of points -k came earlier is copied from it instead: the meshes at offsets 0 and
     * 1/2 are closed under k -> -k, so about half of the rows are diagonalised. */
    for (int r0 = 0; rc == 0 && r0 < g->npts; r0 += n) {
        int pr = e->even ? partner_row(g, r0 / n) : -1;
        if (pr >= 0 && pr < r0 / n) {
            for (int i1 = 0; i1 < n; i1++) {
                int j = pr * n + mesh_partner(n, i1, g->off[0]);
                g->lo[r0 + i1] = g->lo[j];
                g->hi[r0 + i1] = g->hi[j];
            }
            continue;
        }
        for (int i0 = r0; rc == 0 && i0 < r0 + n; i0 += chunk) {
            int nb = r0 + n - i0 < chunk ? r0 + n - i0 : chunk;
            for (int j = 0; j < nb; j++)
                bp_mesh_k(g, i0 + j, k + 3 * j);
            rc = bp_bands(e, nb, k, g->lo + i0, g->hi + i0, err);
        }
    }
    free(k);
    if (rc != 0) {
        bp_mesh_free(g);
        return rc;
    }
    *out = g;
    return 0;
}

void bp_mesh_free(bp_mesh *g)
{
    if (!g) return;
    free(g->lo);
    free(g->hi);
    free(g);
}

void bp_mesh_k(const bp_mesh *g, int idx, double k[3])
{
    int n = g->n;
    k[0] = (idx % n + g->off[0]) / n;
    k[1] = ((idx / n) % n + g->off[1]) / n;
    k[2] = g->dim == 3 ? (idx / (n * n) + g->off[2]) / n : 0.0;
}

int bp_mesh_shift(const bp_mesh *g, int idx, const int d[3])
{
    int n = g->n;
    int i[3] = {idx % n, (idx / n) % n, g->dim == 3 ? idx / (n * n) : 0};
    int r = 0, mult = 1;
    for (int a = 0; a < g->dim; a++) {
        int v = ((i[a] + d[a]) % n + n) % n;
        r += v * mult;
        mult *= n;
    }
    return r;
}

static int is_local_min(const bp_mesh *g, const double *f, int idx)
{
    int lim3 = g->dim == 3 ? 1 : 0;
    for (int a = -1; a <= 1; a++)
        for (int b = -1; b <= 1; b++)
            for (int c = -lim3; c <= lim3; c++) {
                if (a == 0 && b == 0 && c == 0) continue;
                int d[3] = {a, b, c};
                if (f[bp_mesh_shift(g, idx, d)] < f[idx]) return 0;
            }
    return 1;
}

int bp_mesh_minima(const bp_mesh *g, const double *f, int cap, int *idx)
{
    int count = 0;
    for (int i = 0; i < g->npts; i++) {
        if (!is_local_min(g, f, i)) continue;
        if (count == cap && f[i] >= f[idx[count - 1]]) continue;
        int pos = count < cap ? count++ : cap - 1;
        while (pos > 0 && f[idx[pos - 1]] > f[i]) {
            idx[pos] = idx[pos - 1];
            pos--;
        }
        idx[pos] = i;
    }
    return count;
}

double bp_kdist(int dim, const double a[3], const double b[3])
{
    double s = 0;
    for (int i = 0; i < dim; i++) {
        double d = a[i] - b[i];
        d -= nearbyint(d);
        s += d * d;
    }
    return sqrt(s);
}

static double fval(int what, double lo, double hi)
{
    if (what == BP_NEG_LOWER) return -lo;
    if (what == BP_UPPER) return hi;
    return hi - lo;
}

/* The lowest point of a fitting stencil: a fallback when the model's step fails. */
typedef struct stencil_best {
    double k[3], f, lo, hi;
} stencil_best;

/* Least-squares fit of phi = c + b.d + d^T A d / 2 on the 3^dim stencil of spacing r around x
 * (d in units of r), with phi = gap^2 for BP_GAP (smooth at a linear touching, where the gap is a
 * cone) and the minimised function itself otherwise. grad receives b, vec the eigenvectors of A
 * (columns) and ev its eigenvalues, ascending (per r^2). Returns 0, 1 when the fit fails, or a
 * negative error code. */
/* 1 when x is a time-reversal-invariant momentum (2x integer in every direction of the model). */
static int at_trim(int dim, const double x[3])
{
    for (int a = 0; a < dim; a++) {
        double t = 2.0 * x[a];
        if (fabs(t - nearbyint(t)) > 1e-12) return 0;
    }
    return 1;
}

/* The stencil's band values. centre (lo, hi at x itself, or NULL) is reused, not recomputed. With
 * E(-k) = E(k) and x a time-reversal-invariant momentum, x - r d = -(x + r d) modulo a reciprocal
 * vector, so the point of offset -d (index np - 1 - p) has the values of offset d: half the stencil
 * is diagonalised (a minimum at such a point, the usual case of a band edge, keeps the minimiser
 * there while its radius shrinks to tol_k, so this halves most refinements). */
static int stencil_bands(bp_eval *e, const double x[3], const double *k, int np, const double *centre,
                         double *lo, double *hi, bs_err *err)
{
    int mirror = e->even && at_trim(e->dim, x), mid = np / 2, nk = 0, idx[27];
    double kk[27 * 3], l[27], h[27];
    for (int p = 0; p < np; p++) {
        if ((p == mid && centre) || (mirror && p > mid)) continue;
        memcpy(kk + 3 * nk, k + 3 * p, 3 * sizeof *kk);
        idx[nk++] = p;
    }
    int rc = bp_bands(e, nk, kk, l, h, err);
    if (rc != 0) return rc;
    for (int j = 0; j < nk; j++) {
        lo[idx[j]] = l[j];
        hi[idx[j]] = h[j];
    }
    if (centre) {
        lo[mid] = centre[0];
        hi[mid] = centre[1];
    }
    if (mirror)
        for (int p = mid + 1; p < np; p++) {
            lo[p] = lo[np - 1 - p];
            hi[p] = hi[np - 1 - p];
        }
    return 0;
}

static int fit_quad(bp_eval *e, int what, const double x[3], double r, const double *centre, double grad[3],
                    double vec[9], double ev[3], stencil_best *sb, bs_err *err)
{
    int dim = e->dim, np = dim == 3 ? 27 : 9, nc = dim == 3 ? 10 : 6;
    double k[27 * 3], lo[27], hi[27], off[27][3];
    for (int p = 0; p < np; p++) {
        int t = p;
        for (int a = 0; a < 3; a++) {
            off[p][a] = a < dim ? (double)(t % 3 - 1) : 0.0;
            t /= 3;
            k[3 * p + a] = x[a] + r * off[p][a];
        }
    }
    int rc = stencil_bands(e, x, k, np, centre, lo, hi, err);
    if (rc != 0) return rc;
    if (sb) {
        sb->f = INFINITY;
        for (int p = 0; p < np; p++)
            if (fval(what, lo[p], hi[p]) < sb->f) {
                sb->f = fval(what, lo[p], hi[p]);
                sb->lo = lo[p];
                sb->hi = hi[p];
                memcpy(sb->k, k + 3 * p, sizeof sb->k);
            }
    }
    double M[27 * 10], y[27];
    for (int p = 0; p < np; p++) {
        const double *d = off[p];
        double row[10];
        int c = 0;
        row[c++] = 1.0;
        for (int a = 0; a < dim; a++)
            row[c++] = d[a];
        for (int a = 0; a < dim; a++)
            for (int b = a; b < dim; b++)
                row[c++] = a == b ? 0.5 * d[a] * d[a] : d[a] * d[b];
        for (int j = 0; j < nc; j++)
            M[p + np * j] = row[j];
        double g = fval(what, lo[p], hi[p]);
        y[p] = what == BP_GAP ? g * g : g;
    }
    if (LAPACKE_dgels(LAPACK_COL_MAJOR, 'N', np, nc, 1, M, np, y, np) != 0) return 1;
    memset(vec, 0, 9 * sizeof *vec);
    int c = 1;
    for (int a = 0; a < dim; a++)
        grad[a] = y[c++];
    for (int a = 0; a < dim; a++)
        for (int b = a; b < dim; b++) {
            vec[a + dim * b] = y[c];
            vec[b + dim * a] = y[c];
            c++;
        }
    if (LAPACKE_dsyev(LAPACK_COL_MAJOR, 'V', 'U', dim, vec, dim, ev) != 0) return 1;
    return 0;
}

/* The Newton point of the fit restricted to the fit's positive curvatures: along a nodal line the
 * curvature vanishes and only the perpendicular part of the step is taken. Returns as fit_quad. */
static int quad_fit_step(bp_eval *e, int what, const double x[3], double r, const double centre[2],
                         double xn[3], stencil_best *sb, bs_err *err)
{
    int dim = e->dim;
    double grad[3] = {0}, A[9], ev[3];
    int rc = fit_quad(e, what, x, r, centre, grad, A, ev, sb, err);
    if (rc != 0) return rc;
    double emax = ev[dim - 1];
    if (!(emax > 0)) return 1;
    double step[3] = {0};
    for (int j = 0; j < dim; j++) {
        if (ev[j] <= 1e-6 * emax) continue;
        double proj = 0;
        for (int a = 0; a < dim; a++)
            proj += A[a + dim * j] * grad[a];
        for (int a = 0; a < dim; a++)
            step[a] -= A[a + dim * j] * proj / ev[j];
    }
    double len = 0;
    for (int a = 0; a < dim; a++)
        len += step[a] * step[a];
    len = sqrt(len);
    double scale = len > 3.0 ? 3.0 / len : 1.0; /* trust region of three stencil spacings */
    for (int a = 0; a < 3; a++)
        xn[a] = x[a] + (a < dim ? r * scale * step[a] : 0.0);
    return 0;
}

int bp_gap_curvature(bp_eval *e, const double k[3], double r, double ev[3], double vec[9], bs_err *err)
{
    double grad[3];
    int rc = fit_quad(e, BP_GAP, k, r, NULL, grad, vec, ev, NULL, err);
    if (rc < 0) return rc;
    if (rc > 0) return bs_fail(err, BS_ENUMERIC, "gap curvature: least-squares fit failed");
    for (int j = 0; j < e->dim; j++)
        ev[j] /= r * r;
    if (e->dim == 2) ev[2] = 0.0;
    return 0;
}

/* Derivative-free trust-region minimisation: each iteration fits a quadratic model on the 3^dim
 * stencil of spacing r (quad_fit_step) and takes the better of the model's Newton point and the
 * stencil's lowest point; the radius follows the accepted steps and shrinks on failure (model-based
 * derivative-free optimisation, Acta Numer. 28, 287 (2019)). The stencil fallback makes it at
 * least a pattern search, so it also progresses where the model is poor. */
int bp_minimise(bp_eval *e, int what, const double k0[3], double step0, double tol_k, double kmin[3],
                double *fmin, double *lo, double *hi, bs_err *err)
{
    int dim = e->dim;
    double x[3] = {k0[0], k0[1], dim == 3 ? k0[2] : 0.0};
    double lx, hx;
    int rc = bp_bands(e, 1, x, &lx, &hx, err);
    if (rc != 0) return rc;
    double fx = fval(what, lx, hx), r = 0.5 * step0;
    for (int it = 0; r >= tol_k && it < 2000; it++) {
        double xn[3], l = 0, h = 0;
        stencil_best sb;
        const double centre[2] = {lx, hx};
        int fit = quad_fit_step(e, what, x, r, centre, xn, &sb, err);
        if (fit < 0) return fit;
        double fn = INFINITY;
        if (fit == 0) {
            rc = bp_bands(e, 1, xn, &l, &h, err);
            if (rc != 0) return rc;
            fn = fval(what, l, h);
        }
        if (sb.f < fn) {
            memcpy(xn, sb.k, sizeof xn);
            fn = sb.f;
            l = sb.lo;
            h = sb.hi;
        }
        if (!(fn < fx)) {
            r *= 0.25;
            continue;
        }
        double len = 0;
        for (int a = 0; a < dim; a++)
            len += (xn[a] - x[a]) * (xn[a] - x[a]);
        len = sqrt(len);
        memcpy(x, xn, sizeof xn);
        fx = fn;
        lx = l;
        hx = h;
        /* Next radius from the step just taken: long steps widen, short ones zoom in, by at most a
         * factor 2 up and 8 down per iteration. */
        double rn = 2.0 * len;
        if (rn > 2.0 * r) rn = 2.0 * r;
        if (rn < 0.125 * r) rn = 0.125 * r;
        r = rn < step0 ? rn : step0;
    }
    for (int a = 0; a < 3; a++) {
        kmin[a] = a < dim ? x[a] - floor(x[a]) : 0.0;
        if (kmin[a] >= 1.0) kmin[a] = 0.0; /* -1e-17 wraps to 1.0 in floating point */
    }
    *fmin = fx;
    if (lo) *lo = lx;
    if (hi) *hi = hx;
    return 0;
}
