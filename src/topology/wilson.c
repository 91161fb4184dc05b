/* Hybrid Wannier charge centres from Wilson loops and the Z2 index from their flow.
 *
 * Centres: Phys. Rev. B 84, 075119 (2011) — along a closed string the product of the overlap
 * matrices M_j = U(k_j)^dagger U(k_j+1) of the occupied vectors has eigenvalues exp(-2 pi i x) with
 * x the centres (reduced units of the lattice vector along the string).
 * Z2: Phys. Rev. B 83, 235401 (2011) — follow the midpoint z of the largest gap between the centres
 * of each string from the time-reversal-invariant line k_b = 0 to k_b = 1/2 and count, mod 2, the
 * centres jumped over by z between neighbouring strings.
 *
 * Orbital positions: the vectors come in the lattice gauge of hk.h (no tau in the Fourier phase,
 * u(k + G) = u(k)). The overlap of cell-periodic functions with positions tau_a is
 * sum_a conj(u_a(k)) u_a(k + b) exp(-2 pi i b.tau_a) (diagonal position operator), so EVERY link
 * carries the factor D(b) = diag(exp(-2 pi i b.tau_a)), b = e_dir / nk. This is the same as
 * converting to the tau gauge u~(k) = D(k) u(k), where the plain overlaps are used and only the
 * closing link picks up D(G) = diag(exp(-2 pi i G.tau_a)) because u~(k + G) = D(G) u~(k).
 * (In the lattice gauge itself, putting D(G) on the closing link alone is not a valid
 * discretisation: for one band spread evenly over orbitals at tau = 0 and 1/2 that link vanishes.)
 *
 * The links are multiplied as they are (the eigenphases of the product are the centres; their
 * moduli, slightly below one, carry no information). Replacing each link by its unitary part
 * through an SVD was measured at 1.5 to 2 times the cost of the whole rest of a string for
 * 30..60 occupied bands and changed no index in the tests, so it is not done. |det M| from an
 * LU factorisation checks that neighbouring k-points are close enough. */
#include "bandsieve/wilson.h"

#include <cblas.h>
#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/clock.h"
#include "bandsieve/config.h"
#include "occ.h"

struct wilson_ws {
    const tb_model *m;
    int norb, nband;
    occ_ws *occ;
    int batch;                     /* k-points diagonalised at a time (occ_batch) */
    double complex *U;             /* (batch + 2) x norb x nband: a batch, the first point, the last
                                      point of the previous batch */
    double *k, *gap;               /* 3 batch, batch */
    double *tau;                   /* norb x 3: reduced position of each basis state's orbital */
    double complex *phase;         /* norb: D(b) of the current string */
    double complex *V;             /* norb x nband */
    double complex *M, *W, *T, *P; /* nband x nband */
    double complex *lam;           /* nband */
    lapack_int *ipiv;              /* nband */
    double *rwork;                 /* 2 nband */
    double complex *work;
    lapack_int lwork;
};

void wilson_opts_default(wilson_opts *o)
{
    o->nk = 24;
    o->max_nk = 0;
    o->nstring = 11;
    o->max_strings = 128;
    o->min_spacing = 1e-3;
    /* Overlaps of neighbouring occupied subspaces: |det| = prod cos(theta_i) of the principal
     * angles; 0.2 leaves every angle below about 1.4 rad even for one band, and far below it for
     * several (common practice for link methods: the step must be small against the rotation). */
    o->det_min = 0.2;
    o->gap_frac = 0.3;
    o->move_frac = 0.5;
    o->kramers_tol = 1e-3;
    o->gap_tol_ev = BS_GAP_CLOSED_EV;
    o->deadline = 0;
}

void wilson_plane_clear(wilson_plane *p)
{
    free(p->flow.kpar);
    free(p->flow.wcc);
    memset(p, 0, sizeof *p);
}

void wilson_z2_clear(wilson_z2 *r)
{
    for (int i = 0; i < 6; i++)
        wilson_plane_clear(&r->planes[i]);
    memset(r, 0, sizeof *r);
}

/* Workspace zgeev asks for at size n (queried once, at create). */
static int query_lwork(int n, lapack_int *lwork, bs_err *err)
{
    lapack_complex_double q = 0, dummy = 0;
    double rdummy = 0;
    lapack_int info = LAPACKE_zgeev_work(LAPACK_COL_MAJOR, 'N', 'N', n, &dummy, n, &dummy, &dummy, 1, &dummy,
                                         1, &q, -1, &rdummy);
    if (info != 0)
        return bs_fail(err, BS_ENUMERIC, "zgeev workspace query for n = %d failed (info %d)", n, (int)info);
    *lwork = (lapack_int)creal(q) + 1;
    return 0;
}

int wilson_create(const tb_model *m, int nband, wilson_ws **out, bs_err *err)
{
    return wilson_create_dist(m, nband, NULL, out, err);
}

int wilson_create_dist(const tb_model *m, int nband, const eig_dist *dist, wilson_ws **out, bs_err *err)
{
    return wilson_create_shared(m, nband, dist, NULL, out, err);
}

int wilson_create_shared(const tb_model *m, int nband, const eig_dist *dist, hk_engine *hk, wilson_ws **out,
                         bs_err *err)
{
    *out = NULL;
    wilson_ws *w = calloc(1, sizeof *w);
    if (!w) return bs_fail(err, BS_ENOMEM, "Wilson-loop workspace: out of memory");
    int rc = occ_create_shared(m, nband, dist, hk, &w->occ, err);
    if (rc != 0) goto done;
    w->m = m;
    w->norb = m->norb;
    w->nband = nband;
    rc = query_lwork(nband, &w->lwork, err);
    if (rc != 0) goto done;
    size_t nn = (size_t)nband * (size_t)nband;
    w->batch = occ_batch(w->occ);
    w->U = malloc((size_t)(w->batch + 2) * (size_t)m->norb * (size_t)nband * sizeof *w->U);
    w->k = malloc(3 * (size_t)w->batch * sizeof *w->k);
    w->gap = malloc((size_t)w->batch * sizeof *w->gap);
    w->tau = malloc(3 * (size_t)m->norb * sizeof *w->tau);
    w->phase = malloc((size_t)m->norb * sizeof *w->phase);
    w->V = malloc((size_t)m->norb * (size_t)nband * sizeof *w->V);
    w->M = malloc(nn * sizeof *w->M);
    w->W = malloc(nn * sizeof *w->W);
    w->T = malloc(nn * sizeof *w->T);
    w->P = malloc(nn * sizeof *w->P);
    w->lam = malloc((size_t)nband * sizeof *w->lam);
    w->ipiv = malloc((size_t)nband * sizeof *w->ipiv);
    w->rwork = malloc(2 * (size_t)nband * sizeof *w->rwork);
    w->work = malloc((size_t)w->lwork * sizeof *w->work);
    if (!w->U || !w->k || !w->gap || !w->tau || !w->phase || !w->V || !w->M || !w->W || !w->T || !w->P ||
        !w->lam || !w->ipiv || !w->rwork || !w->work) {
        rc = bs_fail(err, BS_ENOMEM, "Wilson-loop workspace for %d bands: out of memory", nband);
        goto done;
    }
    for (int a = 0; a < m->norb; a++)
        memcpy(w->tau + 3 * a, m->orb_pos[tb_state_orbital(m, a)], 3 * sizeof(double));
    *out = w;
    w = NULL;
done:
    wilson_free(w);
    return rc;
}

void wilson_free(wilson_ws *w)
{
    if (!w) return;
    occ_free(w->occ);
    free(w->U);
    free(w->k);
    free(w->gap);
    free(w->tau);
    free(w->phase);
    free(w->V);
    free(w->M);
    free(w->W);
    free(w->T);
    free(w->P);
    free(w->lam);
    free(w->ipiv);
    free(w->rwork);
    free(w->work);
    free(w);
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* W <- W M / |det M|^(1/n) (M destroyed); *det_abs receives |det M| (from the LU factors of a
 * copy). The rescaling keeps W of order one over hundreds of links; it changes no eigenphase. */
static int push_link(wilson_ws *w, double *det_abs, bs_err *err)
{
    const double complex zero = 0.0;
    int n = w->nband;
    size_t nn = (size_t)n * n;
    memcpy(w->P, w->M, nn * sizeof *w->P);
    lapack_int info = LAPACKE_zgetrf(LAPACK_COL_MAJOR, n, n, w->P, n, w->ipiv);
    if (info < 0)
        return bs_fail(err, BS_ENUMERIC, "zgetrf of a %d x %d link overlap failed (info %d)", n, n,
                       (int)info);
    double logd = 0;
    for (int i = 0; i < n; i++)
        logd += log(cabs(w->P[i + (size_t)i * n]));
    *det_abs = info > 0 ? 0.0 : exp(logd);
    double complex scale = info > 0 ? 1.0 : exp(-logd / n);
    cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, n, n, n, &scale, w->W, n, w->M, n, &zero, w->T, n);
    double complex *t = w->W;
    w->W = w->T;
    w->T = t;
    return 0;
}

/* W <- W (A^dagger D(b) B) for the occupied blocks A = U(k_j), B = U(k_j+1); |det| into *det. */
static int link(wilson_ws *w, const double complex *A, const double complex *B, double *det, bs_err *err)
{
    const double complex one = 1.0, zero = 0.0;
    int n = w->nband, norb = w->norb;
    for (int c = 0; c < n; c++)
        for (int a = 0; a < norb; a++)
            w->V[a + (size_t)c * norb] = w->phase[a] * B[a + (size_t)c * norb];
    cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, n, n, norb, &one, A, norb, w->V, norb, &zero,
                w->M, n);
    return push_link(w, det, err);
}

/* wilson_string, and the point of the smallest gap into k_gap. The string is streamed a batch of
 * k-points at a time, so memory does not grow with nk. */
static int string_eval(wilson_ws *w, int dir, const double k0[3], int nk, double *wcc, double *min_det,
                       double *min_gap_ev, double k_gap[3], bs_err *err)
{
    if (dir < 0 || dir > 2 || nk < 2)
        return bs_fail(err, BS_EINVAL, "Wilson string: expected direction 0..2 and nk >= 2, found %d, %d",
                       dir, nk);
    int n = w->nband, norb = w->norb, rc = 0;
    size_t blk = (size_t)norb * (size_t)n;
    double complex *first = w->U + (size_t)w->batch * blk, *last = first + blk;
    const double complex *prev = NULL;
    for (int a = 0; a < norb; a++)
        w->phase[a] = cexp(-2.0 * M_PI * I * w->tau[3 * a + dir] / nk);
    memset(w->W, 0, (size_t)n * n * sizeof *w->W);
    for (int i = 0; i < n; i++)
        w->W[i + (size_t)i * n] = 1.0;
    double dmin = HUGE_VAL, gmin = HUGE_VAL, d = 0;
    for (int j0 = 0; j0 < nk; j0 += w->batch) {
        int nb = nk - j0 < w->batch ? nk - j0 : w->batch;
        for (int j = 0; j < nb; j++) {
            memcpy(w->k + 3 * j, k0, 3 * sizeof(double));
            w->k[3 * j + dir] += (double)(j0 + j) / nk;
        }
        rc = occ_states(w->occ, nb, w->k, w->U, w->gap, err);
        if (rc != 0) return rc;
        for (int j = 0; j < nb; j++) {
            const double complex *cur = w->U + (size_t)j * blk;
            if (w->gap[j] < gmin) {
                gmin = w->gap[j];
                memcpy(k_gap, w->k + 3 * j, 3 * sizeof(double));
            }
            if (prev) {
                rc = link(w, prev, cur, &d, err);
                if (rc != 0) return rc;
                if (d < dmin) dmin = d;
            } else {
                memcpy(first, cur, blk * sizeof *first);
            }
            prev = cur;
        }
        /* The next batch overwrites the buffer: keep its last point for the next link. */
        memcpy(last, prev, blk * sizeof *last);
        prev = last;
    }
    /* Closing link back to k0: u(k0 + G) = u(k0) in the lattice gauge; D(b) as on every link. */
    rc = link(w, prev, first, &d, err);
    if (rc != 0) return rc;
    if (d < dmin) dmin = d;
    lapack_complex_double dummy = 0;
    lapack_int info = LAPACKE_zgeev_work(LAPACK_COL_MAJOR, 'N', 'N', n, w->W, n, w->lam, &dummy, 1, &dummy, 1,
                                         w->work, w->lwork, w->rwork);
    if (info != 0)
        return bs_fail(err, BS_ENUMERIC, "zgeev of the %d x %d Wilson loop failed (info %d)", n, n,
                       (int)info);
    for (int i = 0; i < n; i++) {
        double x = -carg(w->lam[i]) / (2 * M_PI);
        x -= floor(x);
        wcc[i] = x >= 1.0 ? 0.0 : x;
    }
    qsort(wcc, (size_t)n, sizeof *wcc, cmp_double);
    *min_det = dmin;
    *min_gap_ev = gmin;
    return 0;
}

int wilson_string(wilson_ws *w, int dir, const double k0[3], int nk, double *wcc, double *min_det,
                  double *min_gap_ev, bs_err *err)
{
    double d, g, kg[3];
    int rc = string_eval(w, dir, k0, nk, wcc, &d, &g, kg, err);
    if (rc != 0) return rc;
    if (min_det) *min_det = d;
    if (min_gap_ev) *min_gap_ev = g;
    return 0;
}

/* Circular distance on [0,1). */
static double cdist(double a, double b)
{
    double d = fabs(a - b);
    d -= floor(d);
    return d < 0.5 ? d : 1.0 - d;
}

/* Midpoint z and width g of the largest gap between the sorted centres x[n] on the circle. */
static void largest_gap(const double *x, int n, double *z, double *g)
{
    double best = 1.0 - x[n - 1] + x[0], mid = x[n - 1] + 0.5 * best;
    for (int i = 0; i + 1 < n; i++)
        if (x[i + 1] - x[i] > best) {
            best = x[i + 1] - x[i];
            mid = x[i] + 0.5 * best;
        }
    *z = mid - floor(mid);
    *g = best;
}

/* Centres x[n] strictly inside the shorter arc between z1 and z2. When the two arcs are equal
 * (z jumped by exactly 1/2) either is taken: they differ by n centres, an even number with time
 * reversal, so the parity is the same. */
static int arc_count(double z1, double z2, const double *x, int n)
{
    double d = z2 - z1;
    d -= floor(d + 0.5);
    double lo = d >= 0 ? z1 : z1 + d, len = fabs(d);
    int c = 0;
    for (int i = 0; i < n; i++) {
        double t = x[i] - lo;
        t -= floor(t);
        if (t > 0 && t < len) c++;
    }
    return c;
}

/* Largest distance within Kramers pairs of the sorted centres x[n] (n even), pairing neighbours
 * (0,1), (2,3), ... or (1,2), ..., (n-1,0), whichever pairs closer; HUGE_VAL for odd n. */
static double kramers_split(const double *x, int n)
{
    if (n % 2) return HUGE_VAL;
    double best = HUGE_VAL;
    for (int s = 0; s < 2; s++) {
        double worst = 0;
        for (int i = 0; i < n; i += 2) {
            double d = cdist(x[(s + i) % n], x[(s + i + 1) % n]);
            if (d > worst) worst = d;
        }
        if (worst < best) best = worst;
    }
    return best;
}

/* A growing, k_b-ordered set of strings of one plane. */
typedef struct plane_run {
    wilson_ws *w;
    const wilson_opts *o;
    wilson_plane *out;
    int dir, pump;
    double fixed[3];
    int nk;     /* current points per string: only grows */
    int max_nk; /* o->max_nk, or 8 o->nk when that is 0 */
    int n, cap;
    double *kpar, *wcc, *z, *g;
    double *scratch; /* nband centres of the string being computed */
    int det_fail;
    double det_fail_kb;
} plane_run;

static void run_free(plane_run *r)
{
    free(r->kpar);
    free(r->wcc);
    free(r->z);
    free(r->g);
    free(r->scratch);
}

/* Computes the string at k_b = kb into slot `at` (the slots from `at` on move up by one), doubling
 * its points while a link |det| is below det_min. Returns 1 when the gap closes (out says where). */
static int add_string(plane_run *r, int at, double kb, bs_err *err)
{
    wilson_ws *w = r->w;
    const wilson_opts *o = r->o;
    int nb = w->nband;
    if (o->deadline > 0 && bs_now() > o->deadline)
        return bs_fail(err, BS_ETIMEOUT, "Wilson loops of plane %d: time budget exceeded after %d strings",
                       r->out->plane, r->n);
    double k0[3];
    memcpy(k0, r->fixed, sizeof k0);
    k0[r->pump] = kb;
    double *x = r->scratch;
    for (;;) {
        double d, gmin, kg[3];
        int rc = string_eval(w, r->dir, k0, r->nk, x, &d, &gmin, kg, err);
        if (rc != 0) return rc;
        if (gmin < r->out->min_gap_ev) {
            r->out->min_gap_ev = gmin;
            memcpy(r->out->k_gap, kg, sizeof kg);
        }
        if (gmin < o->gap_tol_ev) return 1;
        if (d >= o->det_min || 2 * r->nk > r->max_nk) {
            if (d < o->det_min && !r->det_fail) {
                r->det_fail = 1;
                r->det_fail_kb = kb;
            }
            if (d < r->out->min_det) r->out->min_det = d;
            break;
        }
        r->nk *= 2;
    }
    if (r->nk > r->out->max_nk) r->out->max_nk = r->nk;
    memmove(r->kpar + at + 1, r->kpar + at, (size_t)(r->n - at) * sizeof *r->kpar);
    memmove(r->z + at + 1, r->z + at, (size_t)(r->n - at) * sizeof *r->z);
    memmove(r->g + at + 1, r->g + at, (size_t)(r->n - at) * sizeof *r->g);
    memmove(r->wcc + (size_t)(at + 1) * nb, r->wcc + (size_t)at * nb,
            (size_t)(r->n - at) * nb * sizeof *r->wcc);
    r->n++;
    r->kpar[at] = kb;
    memcpy(r->wcc + (size_t)at * nb, x, (size_t)nb * sizeof *x);
    largest_gap(x, nb, &r->z[at], &r->g[at]);
    return 0;
}

/* The step from string i to i + 1 is unreliable when a centre of either string lies close to
 * the other's gap midpoint: the count could go either way (the convergence concern of
 * Phys. Rev. B 83, 235401 (2011)); such steps are bisected. */
static int step_unreliable(const plane_run *r, int i)
{
    int nb = r->w->nband;
    const double *x0 = r->wcc + (size_t)i * nb, *x1 = x0 + nb;
    for (int c = 0; c < nb; c++)
        if (cdist(x1[c], r->z[i]) < r->o->gap_frac * r->g[i] ||
            cdist(x0[c], r->z[i + 1]) < r->o->gap_frac * r->g[i + 1])
            return 1;
    return 0;
}

static int step_moves(const plane_run *r, int i)
{
    double gmax = r->g[i] > r->g[i + 1] ? r->g[i] : r->g[i + 1];
    return cdist(r->z[i], r->z[i + 1]) > r->o->move_frac * gmax;
}

/* Bisects the steps that are unreliable or move the gap too much, until none is left or the
 * budget (max_strings, min_spacing) is spent. Returns 1 on a gap closing. */
static int refine(plane_run *r, bs_err *err)
{
    for (;;) {
        int added = 0;
        for (int i = r->n - 2; i >= 0 && r->n < r->o->max_strings; i--) {
            if (!step_unreliable(r, i) && !step_moves(r, i)) continue;
            double h = 0.5 * (r->kpar[i + 1] - r->kpar[i]);
            if (h < r->o->min_spacing) continue;
            int rc = add_string(r, i + 1, r->kpar[i] + h, err);
            if (rc != 0) return rc;
            added++;
        }
        if (!added) return 0;
    }
}

static int check_opts(const wilson_opts *o, bs_err *err)
{
    if (o->nk < 2 || (o->max_nk != 0 && o->max_nk < o->nk) || o->nstring < 2 || o->max_strings < o->nstring ||
        !(o->min_spacing > 0) || !(o->det_min >= 0 && o->det_min < 1) ||
        !(o->gap_frac >= 0 && o->gap_frac < 0.5) || !(o->move_frac > 0) || !(o->kramers_tol > 0) ||
        !(o->gap_tol_ev >= 0))
        return bs_fail(err, BS_EINVAL,
                       "Wilson options: expected nk >= 2, max_nk 0 or >= nk, nstring >= 2, "
                       "max_strings >= nstring, min_spacing > 0, 0 <= det_min < 1, "
                       "0 <= gap_frac < 0.5, move_frac > 0, kramers_tol > 0, gap_tol_ev >= 0");
    return 0;
}

/* Sets status and z2 of a plane whose strings are all computed and gapped. */
static void judge_plane(plane_run *r)
{
    wilson_plane *out = r->out;
    int nb = r->w->nband;
    double s0 = kramers_split(r->wcc, nb), s1 = kramers_split(r->wcc + (size_t)(r->n - 1) * nb, nb);
    int parity = 0;
    for (int i = 0; i + 1 < r->n; i++)
        parity ^= arc_count(r->z[i], r->z[i + 1], r->wcc + (size_t)(i + 1) * nb, nb) & 1;
    out->z2 = parity;
    out->status = RES_AMBIGUOUS;
    if (nb % 2) {
        snprintf(out->reason, sizeof out->reason,
                 "%d occupied bands, an odd number: no Kramers pairs, so no Z2 (time reversal broken)", nb);
        return;
    }
    if (s0 > r->o->kramers_tol || s1 > r->o->kramers_tol) {
        snprintf(out->reason, sizeof out->reason,
                 "centres at k_b = 0 and 1/2 do not form Kramers pairs (split %.1e, %.1e): "
                 "no time reversal?",
                 s0, s1);
        return;
    }
    for (int i = 0; i + 1 < r->n; i++)
        if (step_unreliable(r, i)) {
            snprintf(out->reason, sizeof out->reason,
                     "a centre stays near the largest-gap midpoint between k_b = %.4f and %.4f "
                     "after %d strings",
                     r->kpar[i], r->kpar[i + 1], r->n);
            return;
        }
    if (r->det_fail) {
        snprintf(out->reason, sizeof out->reason,
                 "link overlap |det| below %.4g at k_b = %.4f with %d points per string", r->o->det_min,
                 r->det_fail_kb, r->nk);
        return;
    }
    out->status = RES_DONE;
}

int wilson_plane_z2(wilson_ws *w, int p, const wilson_opts *o, wilson_plane *out, bs_err *err)
{
    wilson_opts def;
    if (!o) {
        wilson_opts_default(&def);
        o = &def;
    }
    memset(out, 0, sizeof *out);
    int rc = check_opts(o, err);
    if (rc != 0) return rc;
    if (p < 0 || p > 5 || (w->m->dim == 2 && p != 4))
        return bs_fail(err, BS_EINVAL, "Wilson plane: expected 0..5 (4 only in 2D), found %d", p);
    int fix = p / 2;
    plane_run r = {.w = w,
                   .o = o,
                   .out = out,
                   .dir = (fix + 1) % 3,
                   .pump = (fix + 2) % 3,
                   .nk = o->nk,
                   .max_nk = o->max_nk ? o->max_nk : 8 * o->nk,
                   .cap = o->max_strings};
    r.fixed[fix] = 0.5 * (p % 2);
    out->plane = p;
    out->min_gap_ev = HUGE_VAL;
    out->min_det = HUGE_VAL;
    int nb = w->nband;
    long long nk0 = occ_count(w->occ);
    r.kpar = malloc((size_t)r.cap * sizeof *r.kpar);
    r.z = malloc((size_t)r.cap * sizeof *r.z);
    r.g = malloc((size_t)r.cap * sizeof *r.g);
    r.wcc = malloc((size_t)r.cap * nb * sizeof *r.wcc);
    r.scratch = malloc((size_t)nb * sizeof *r.scratch);
    if (!r.kpar || !r.z || !r.g || !r.wcc || !r.scratch) {
        rc = bs_fail(err, BS_ENOMEM, "Wilson plane of %d strings: out of memory", r.cap);
        goto done;
    }
    for (int i = 0; i < o->nstring && rc == 0; i++)
        rc = add_string(&r, i, 0.5 * i / (o->nstring - 1), err);
    if (rc == 0) rc = refine(&r, err);
    if (rc < 0) goto done;
    if (rc == 1) {
        rc = 0;
        out->gap_closed = 1;
        out->status = RES_NA;
        snprintf(out->reason, sizeof out->reason,
                 "direct gap %.2e eV below %.1e eV at k = (%.4f, %.4f, %.4f): no Z2 "
                 "(semimetal or metal)",
                 out->min_gap_ev, o->gap_tol_ev, out->k_gap[0], out->k_gap[1], out->k_gap[2]);
    } else {
        judge_plane(&r);
    }
    out->flow.plane = p;
    out->flow.nband = nb;
    out->flow.nstring = r.n;
    out->flow.kpar = r.kpar;
    out->flow.wcc = r.wcc;
    r.kpar = NULL;
    r.wcc = NULL;
done:
    out->nk = occ_count(w->occ) - nk0;
    run_free(&r);
    return rc;
}

int wilson_z2_run(wilson_ws *w, const wilson_opts *o, wilson_z2 *out, bs_err *err)
{
    memset(out, 0, sizeof *out);
    double t0 = bs_now();
    int dim = w->m->dim;
    out->nplane = dim == 2 ? 1 : 6;
    int rc = 0;
    for (int i = 0; i < out->nplane && rc == 0; i++) {
        rc = wilson_plane_z2(w, dim == 2 ? 4 : i, o, &out->planes[i], err);
        out->nk += out->planes[i].nk;
    }
    out->seconds = bs_now() - t0;
    if (rc != 0) return rc;
    out->status = RES_DONE;
    for (int i = 0; i < out->nplane; i++) {
        const wilson_plane *pl = &out->planes[i];
        if (pl->status == RES_DONE) continue;
        /* A closing outranks an ambiguity: it says the question itself does not apply. */
        if (pl->gap_closed && !out->gap_closed) {
            out->gap_closed = 1;
            out->status = RES_NA;
            snprintf(out->reason, sizeof out->reason, "plane %d: %s", pl->plane, pl->reason);
        } else if (out->status == RES_DONE) {
            out->status = RES_AMBIGUOUS;
            snprintf(out->reason, sizeof out->reason, "plane %d: %s", pl->plane, pl->reason);
        }
    }
    if (out->status != RES_DONE) return 0;
    if (dim == 2) {
        out->z2[0] = out->planes[0].z2;
        return 0;
    }
    /* Phys. Rev. Lett. 98, 106803 (2007): nu_i = Z2(k_i = 1/2), nu0 = Z2(k_i = 0) + Z2(k_i = 1/2)
     * mod 2 for every i; the three values must agree. */
    int nu0[3];
    for (int i = 0; i < 3; i++)
        nu0[i] = (out->planes[2 * i].z2 + out->planes[2 * i + 1].z2) % 2;
    out->z2[0] = nu0[0];
    for (int i = 0; i < 3; i++)
        out->z2[i + 1] = out->planes[2 * i + 1].z2;
    if (nu0[0] != nu0[1] || nu0[0] != nu0[2]) {
        out->status = RES_AMBIGUOUS;
        snprintf(out->reason, sizeof out->reason, "nu0 from the k1, k2, k3 plane pairs disagree: %d, %d, %d",
                 nu0[0], nu0[1], nu0[2]);
    }
    return 0;
}

int wilson_z2_take_flows(wilson_z2 *r, res_flow **flows, int *nflows, bs_err *err)
{
    *flows = NULL;
    *nflows = 0;
    int n = 0;
    for (int i = 0; i < r->nplane; i++)
        n += r->planes[i].flow.kpar != NULL;
    if (n == 0) return 0;
    res_flow *f = calloc((size_t)n, sizeof *f);
    if (!f) return bs_fail(err, BS_ENOMEM, "Wannier-centre flows: out of memory");
    int j = 0;
    for (int i = 0; i < r->nplane; i++) {
        res_flow *src = &r->planes[i].flow;
        if (!src->kpar) continue;
        f[j++] = *src;
        memset(src, 0, sizeof *src);
    }
    *flows = f;
    *nflows = n;
    return 0;
}
