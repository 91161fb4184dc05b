/* Surface Green's function by iterative decimation (J. Phys. F 15, 851 (1985)): the principal
 * layers of a semi-infinite stack are eliminated two at a time, so after n steps the surface
 * feels 2^n layers and the renormalised inter-layer couplings shrink geometrically in a gap
 * (and as e^{-eta 2^n ...} with a finite eta in a band). */
#include "bandsieve/surfgreen.h"

#include <cblas.h>
#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#define SG_MAX_ITER     200
#define SG_COUPLING_TOL 1e-12 /* eV; well below any eta used for plots (common practice) */

struct sg_ws {
    const slab *s;
    int p; /* principal-layer states: range * norb */
    double complex *h00, *h01, *blk;
    double complex *eps_s, *eps, *alpha, *beta, *g, *ga, *gb, *t1;
    lapack_int *ipiv;
};

int sg_create(const slab *s, sg_ws **out, bs_err *err)
{
    *out = NULL;
    int L = slab_range(s), n = slab_norb(s);
    if (L < 1)
        return bs_fail(err, BS_EINVAL,
                       "surface Green's function: the cells do not couple along the stacking axis");
    sg_ws *w = calloc(1, sizeof *w);
    if (!w) return bs_fail(err, BS_ENOMEM, "out of memory for the surface Green's function");
    w->s = s;
    w->p = L * n;
    size_t pp = (size_t)w->p * w->p;
    double complex **bufs[] = {&w->h00,  &w->h01, &w->eps_s, &w->eps, &w->alpha,
                               &w->beta, &w->g,   &w->ga,    &w->gb,  &w->t1};
    int ok = 1;
    for (size_t i = 0; i < sizeof bufs / sizeof bufs[0]; i++)
        ok = ok && (*bufs[i] = malloc(pp * sizeof(double complex)));
    w->blk = malloc((size_t)n * n * sizeof *w->blk);
    w->ipiv = malloc((size_t)w->p * sizeof *w->ipiv);
    if (!ok || !w->blk || !w->ipiv) {
        int states = w->p;
        sg_free(w);
        return bs_fail(err, BS_ENOMEM, "out of memory for the surface Green's function (%d states)", states);
    }
    *out = w;
    return 0;
}

void sg_free(sg_ws *w)
{
    if (!w) return;
    double complex *bufs[] = {w->h00, w->h01, w->eps_s, w->eps, w->alpha, w->beta,
                              w->g,   w->ga,  w->gb,    w->t1,  w->blk};
    for (size_t i = 0; i < sizeof bufs / sizeof bufs[0]; i++)
        free(bufs[i]);
    free(w->ipiv);
    free(w);
}

/* Principal-layer blocks at k': h00 (cells 0..L-1 among themselves) and h01 = <layer 0|H|layer 1>
 * (cell a of layer 0 with cell L + b), column-major p x p. */
static void principal_blocks(sg_ws *w, const double kpar[2])
{
    int L = slab_range(w->s), n = slab_norb(w->s), p = w->p;
    memset(w->h00, 0, (size_t)p * p * sizeof *w->h00);
    memset(w->h01, 0, (size_t)p * p * sizeof *w->h01);
    for (int a = 0; a < L; a++)
        for (int b = 0; b < L; b++)
            for (int which = 0; which < 2; which++) {
                int r = which ? L + b - a : b - a;
                if (r > L) continue;
                slab_coupling(w->s, kpar, r, w->blk);
                double complex *dst = which ? w->h01 : w->h00;
                for (int j = 0; j < n; j++)
                    for (int i = 0; i < n; i++)
                        dst[(size_t)(a * n + i) + (size_t)(b * n + j) * p] = w->blk[i + (size_t)j * n];
            }
}

/* out = z - A (p x p, column-major), in place into out. */
static void shift_from(int p, double complex z, const double complex *A, double complex *out)
{
    for (size_t i = 0; i < (size_t)p * p; i++)
        out[i] = -A[i];
    for (int i = 0; i < p; i++)
        out[i + (size_t)i * p] += z;
}

static int invert(sg_ws *w, double complex *A, bs_err *err)
{
    lapack_int info = LAPACKE_zgetrf(LAPACK_COL_MAJOR, w->p, w->p, A, w->p, w->ipiv);
    if (info == 0) info = LAPACKE_zgetri(LAPACK_COL_MAJOR, w->p, A, w->p, w->ipiv);
    if (info != 0)
        return bs_fail(err, BS_ENUMERIC, "surface Green's function: singular matrix (zgetrf/zgetri info %d)",
                       (int)info);
    return 0;
}

static void gemm(int p, const double complex *A, const double complex *B, double complex beta,
                 double complex *C)
{
    const double complex one = 1.0;
    cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, p, p, p, &one, A, p, B, p, &beta, C, p);
}

static double max_abs(int p, const double complex *A)
{
    double m = 0;
    for (size_t i = 0; i < (size_t)p * p; i++)
        m = fmax(m, cabs(A[i]));
    return m;
}

/* The decimation loop of J. Phys. F 15, 851 (1985), eqs. for eps_s, eps, alpha, beta:
 *   g = (z - eps)^-1, eps_s += alpha g beta, eps += alpha g beta + beta g alpha,
 *   alpha <- alpha g alpha, beta <- beta g beta,
 * with alpha the coupling from the surface layer to the next one into the bulk. */
static int decimate(sg_ws *w, double complex z, bs_err *err)
{
    int p = w->p;
    for (int it = 0; it < SG_MAX_ITER; it++) {
        if (max_abs(p, w->alpha) < SG_COUPLING_TOL && max_abs(p, w->beta) < SG_COUPLING_TOL) return 0;
        shift_from(p, z, w->eps, w->g);
        int rc = invert(w, w->g, err);
        if (rc != 0) return rc;
        gemm(p, w->g, w->alpha, 0.0, w->ga);
        gemm(p, w->g, w->beta, 0.0, w->gb);
        gemm(p, w->alpha, w->gb, 0.0, w->t1); /* alpha g beta */
        for (size_t i = 0; i < (size_t)p * p; i++) {
            w->eps_s[i] += w->t1[i];
            w->eps[i] += w->t1[i];
        }
        gemm(p, w->beta, w->ga, 1.0, w->eps); /* + beta g alpha */
        gemm(p, w->alpha, w->ga, 0.0, w->t1);
        memcpy(w->alpha, w->t1, (size_t)p * p * sizeof *w->t1);
        gemm(p, w->beta, w->gb, 0.0, w->t1);
        memcpy(w->beta, w->t1, (size_t)p * p * sizeof *w->t1);
    }
    return bs_fail(err, BS_ENUMERIC,
                   "surface Green's function: decimation did not converge in %d steps at E = %g%+gi eV",
                   SG_MAX_ITER, creal(z), cimag(z));
}

/* Sets up the recursion for side with h00/h01 already built. For the bottom surface the bulk lies
 * above, so alpha = <0|H|1> = h01; for the top surface the bulk lies below, alpha = h01^dagger. */
static void start(sg_ws *w, int side)
{
    int p = w->p;
    size_t pp = (size_t)p * p;
    memcpy(w->eps_s, w->h00, pp * sizeof *w->h00);
    memcpy(w->eps, w->h00, pp * sizeof *w->h00);
    for (int i = 0; i < p; i++)
        for (int j = 0; j < p; j++) {
            double complex h = w->h01[i + (size_t)j * p], hd = conj(w->h01[j + (size_t)i * p]);
            w->alpha[i + (size_t)j * p] = side == SG_BOTTOM ? h : hd;
            w->beta[i + (size_t)j * p] = side == SG_BOTTOM ? hd : h;
        }
}

static int spectral_at(sg_ws *w, double energy_ev, double eta_ev, int side, double *a_out, bs_err *err)
{
    start(w, side);
    double complex z = energy_ev + I * eta_ev;
    int rc = decimate(w, z, err);
    if (rc != 0) return rc;
    shift_from(w->p, z, w->eps_s, w->g);
    rc = invert(w, w->g, err);
    if (rc != 0) return rc;
    double tr = 0;
    for (int i = 0; i < w->p; i++)
        tr += cimag(w->g[i + (size_t)i * w->p]);
    *a_out = -tr / M_PI;
    return 0;
}

static int check_args(double eta_ev, int side, bs_err *err)
{
    if (!(eta_ev > 0) || !isfinite(eta_ev))
        return bs_fail(err, BS_EINVAL, "surface Green's function: broadening %g eV must be positive", eta_ev);
    if (side != SG_TOP && side != SG_BOTTOM)
        return bs_fail(err, BS_EINVAL, "surface Green's function: side %d is neither top nor bottom", side);
    return 0;
}

int sg_spectral(sg_ws *w, const double kpar[2], double energy_ev, double eta_ev, int side, double *a_out,
                bs_err *err)
{
    int rc = check_args(eta_ev, side, err);
    if (rc != 0) return rc;
    principal_blocks(w, kpar);
    return spectral_at(w, energy_ev, eta_ev, side, a_out, err);
}

int sg_map(sg_ws *w, double energy_ev, double eta_ev, int side, int n1, int n2, double *a, bs_err *err)
{
    int rc = check_args(eta_ev, side, err);
    if (rc != 0) return rc;
    if (slab_kdim(w->s) == 1) n2 = 1;
    if (n1 < 1 || n2 < 1)
        return bs_fail(err, BS_EINVAL, "surface map: mesh %d x %d must be positive", n1, n2);
    for (int i1 = 0; i1 < n1; i1++)
        for (int i2 = 0; i2 < n2; i2++) {
            double k[2] = {(double)i1 / n1 - 0.5, slab_kdim(w->s) == 2 ? (double)i2 / n2 - 0.5 : 0.0};
            rc = sg_spectral(w, k, energy_ev, eta_ev, side, &a[(size_t)i1 * n2 + i2], err);
            if (rc != 0) return rc;
        }
    return 0;
}

int sg_path(sg_ws *w, int nk, const double *kpar, int ne, double e_lo, double e_hi, double eta_ev, int side,
            double *a, bs_err *err)
{
    int rc = check_args(eta_ev, side, err);
    if (rc != 0) return rc;
    if (nk < 1 || ne < 2 || !(e_hi > e_lo))
        return bs_fail(err, BS_EINVAL,
                       "surface path: need nk >= 1, ne >= 2 and e_hi > e_lo (got %d, %d, %g..%g)", nk, ne,
                       e_lo, e_hi);
    for (int j = 0; j < nk; j++) {
        principal_blocks(w, kpar + 2 * j);
        for (int ie = 0; ie < ne; ie++) {
            double e = e_lo + (e_hi - e_lo) * ie / (ne - 1);
            rc = spectral_at(w, e, eta_ev, side, &a[(size_t)j * ne + ie], err);
            if (rc != 0) return rc;
        }
    }
    return 0;
}
