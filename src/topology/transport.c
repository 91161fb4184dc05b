/* Intrinsic anomalous and spin Hall conductivities from the Kubo-form Berry curvature
 * (Phys. Rev. Lett. 49, 405 (1982); spin current (1/2){s_z, v}: Phys. Rev. Lett. 92, 126603
 * (2004)), integrated over the zone by adaptive cell refinement. Conventions in transport.h.
 *
 * Per k: H(k) and dH/dk_i (reduced) from hk.h, turned into Cartesian velocities
 * v_c = sum_i (dk_i/dk_c) dH/dk_i with k_i = a_i . k / (2 pi), i.e. dk_i/dk_c = a_i[c] / (2 pi);
 * in the position gauge the orbital positions add -i (r_a - r_b)_c H_ab (H_pos(k) = W^dagger H W,
 * W = diag exp(i k.r_a)). One diagonalisation then serves every Fermi energy: with the pair terms
 * X_nm = Im(<n|v_a|m><m|v_b|n>) / ((E_m - E_n)^2 + eta^2), antisymmetric in (n, m) because both
 * operators are Hermitian, sum_n f_n Omega_n = -2 sum_{n<m} (f_n - f_m) X_nm: occupied-occupied
 * pairs cancel exactly, so degenerate occupied bands (Kramers pairs) need no care. */
#include "bandsieve/transport.h"

#include <cblas.h>
#include <complex.h>
#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/clock.h"
#include "bandsieve/eig.h"
#include "bandsieve/hk.h"

/* e^2/hbar = (1.602176634e-19 C)^2 / 1.054571817e-34 J s = 2.434134787e-4 S (CODATA 2018 exact e,
 * hbar). A 3D integral (1/V) int dk_red Omega has units Angstrom^2 / Angstrom^3 = 1/Angstrom
 * = 1e8 /cm, so sigma [S/cm] = 2.434134787e-4 * 1e8 * (1/V) int dk_red sum f Omega. */
#define TR_E2_HBAR_S_ANG_PER_CM 2.434134787e4

/* Pair denominators below this (eV^2) are exact degeneracies split by the Fermi level: the pair's
 * curvature is undefined there and the pair is dropped (measure zero on the mesh). */
#define TR_DENOM_MIN 1e-20

#define TR_KBATCH 64

/* Midpoint meshes of the default Fermi energy's eigenvalue pass (at least the cell mesh). */
#define TR_FERMI_MESH_2D 48
#define TR_FERMI_MESH_3D 16

/* Room for cells tied in error with the last one of a refinement round (see refine). */
#define TR_TIE_EXTRA 64

/* Initial cells evaluated per call (bounds the point buffers). */
#define TR_INIT_CHUNK 256

/* Fermi-surface cells. Every point of a cell lies within hw_i / 2 along each axis of one of the
 * rule's points (the offsets 0, L2, L5, L3 and the pairs cover the box in that sense, in 2D and
 * 3D), so a band's energy over the cell lies within [min E_q - M, max E_q + M] over the points q,
 * M = sum_i max|dE/dk_i| hw_i / 2, with the largest reduced band velocity at the points standing in
 * for the maximum over the cell and TR_FS_SAFETY widening M for what lies between them. A cell
 * whose window may hold a Fermi energy is refined, whatever its sampled integrand, until the
 * window is below TR_FS_FRAC of the band's distance to its nearest other band at those points
 * (the split between two Fermi sheets, e.g. the Rashba shell: a cell is then narrower than the
 * shell), but not below TR_FS_FLOOR_EV (or the smearing): splits smaller than that are reported,
 * not resolved.
 * Bands closer than TR_DEGEN_EV are one degenerate level (their pair terms cancel or are dropped). */
#define TR_FS_SAFETY   1.5
#define TR_FS_FRAC     0.5
#define TR_FS_FLOOR_EV 1e-3
#define TR_DEGEN_EV    1e-6

/* Heap key of a Fermi-surface cell that is not yet resolved: above any error estimate, larger
 * cells first. */
#define TR_FS_KEY 1e100

/* Operators: Cartesian v_x, v_y, v_z and the spin current j^{s_z}_x. */
enum { OP_VX = 0, OP_VY = 1, OP_VZ = 2, OP_JX = 3, NOP = 4 };

/* Components: the pair of operators of each (AHC xy, yz, zx; SHC xy with s_z). */
static const int comp_ops[4][2] = {{OP_VX, OP_VY}, {OP_VY, OP_VZ}, {OP_VZ, OP_VX}, {OP_JX, OP_VY}};

typedef struct tr_ws {
    const tb_model *m;
    int n, dim, nocc;
    int nahc, has_shc, ncomp; /* components: nahc AHC, then SHC */
    int comp[4];              /* index into comp_ops */
    int nE, nv;               /* Fermi energies; values per point = ncomp * nE */
    int gauge;
    double eta2, smear;
    double fermi[TR_MAX_FERMI];
    double jac[3][3];  /* jac[i][c] = a_i[c] / (2 pi) */
    double jinv[3][3]; /* jinv[c][i] = dk_c / dk_i (Cartesian per reduced) */
    double unit[4];    /* per component: output units per (reduced volume x Omega) */
    double *spin;      /* n: +1 up, -1 down */
    double (*rc)[3];   /* n Cartesian positions, Angstrom */
    hk_engine *hk;
    eig_ws *eig;
    double complex *H, *dH;    /* TR_KBATCH n^2 and 3 TR_KBATCH n^2 */
    double complex *D, *V, *T; /* NOP n^2 (orbital basis), NOP n^2 (eigenbasis), n^2 */
    double *E, *X, *cut, *f;   /* n; ncomp n^2; ncomp (n+1); n */
    long long nk;
    double min_gap;
    double deadline;
} tr_ws;

void tr_opts_default(tr_opts *o)
{
    memset(o, 0, sizeof *o);
    o->max_kpoints = 2000000;
    o->gauge = TR_GAUGE_POSITION;
    o->want_shc = 1;
}

static void ws_free(tr_ws *w)
{
    if (!w) return;
    hk_free(w->hk);
    eig_free(w->eig);
    free(w->spin);
    free(w->rc);
    free(w->H);
    free(w->dH);
    free(w->D);
    free(w->V);
    free(w->T);
    free(w->E);
    free(w->X);
    free(w->cut);
    free(w->f);
    free(w);
}

/* Lattice checks and the unit factors. 2D: the zone integral of Omega_xy over reduced k is
 * A C / (2 pi) for a Chern number C (d^2k = (2 pi)^2 / A dk_red), so sigma_xy / (e^2/h) =
 * (2 pi / A) int dk_red sum f Omega; the SHC takes hbar/(2e) of the same: (pi / A) in e/(2 pi). */
static int set_geometry(tr_ws *w, bs_err *err)
{
    const double(*a)[3] = w->m->lattice;
    for (int i = 0; i < 3; i++)
        for (int c = 0; c < 3; c++)
            w->jac[i][c] = a[i][c] / (2 * M_PI);
    if (w->dim == 2) {
        double scale = fabs(a[0][0]) + fabs(a[0][1]) + fabs(a[1][0]) + fabs(a[1][1]);
        double area = fabs(a[0][0] * a[1][1] - a[0][1] * a[1][0]);
        if (fabs(a[0][2]) > 1e-9 * scale || fabs(a[1][2]) > 1e-9 * scale || !(area > 0))
            return bs_fail(err, BS_EINVAL,
                           "transport: expected a 2D lattice with a1, a2 in the xy plane, found "
                           "a1 = (%g, %g, %g), a2 = (%g, %g, %g)",
                           a[0][0], a[0][1], a[0][2], a[1][0], a[1][1], a[1][2]);
        w->unit[0] = 2 * M_PI / area; /* component 0: AHC xy; component 1: SHC */
        w->unit[1] = M_PI / area;
        double det = w->jac[0][0] * w->jac[1][1] - w->jac[0][1] * w->jac[1][0];
        w->jinv[0][0] = w->jac[1][1] / det;
        w->jinv[0][1] = -w->jac[1][0] / det;
        w->jinv[1][0] = -w->jac[0][1] / det;
        w->jinv[1][1] = w->jac[0][0] / det;
        return 0;
    }
    double vol = fabs(a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1]) -
                      a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0]) +
                      a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]));
    if (!(vol > 0))
        return bs_fail(err, BS_EINVAL, "transport: expected a cell volume > 0, found %g A^3", vol);
    for (int c = 0; c < 3; c++)
        w->unit[c] = TR_E2_HBAR_S_ANG_PER_CM / vol;
    w->unit[3] = 0.5 * TR_E2_HBAR_S_ANG_PER_CM / vol;
    /* Inverse of jac by cofactors: jinv[c][i] = cof(jac)[i][c] / det. */
    double(*J)[3] = w->jac, det = 0;
    for (int c = 0; c < 3; c++)
        det += J[0][c] * (J[1][(c + 1) % 3] * J[2][(c + 2) % 3] - J[1][(c + 2) % 3] * J[2][(c + 1) % 3]);
    for (int i = 0; i < 3; i++)
        for (int c = 0; c < 3; c++) {
            int i1 = (i + 1) % 3, i2 = (i + 2) % 3, c1 = (c + 1) % 3, c2 = (c + 2) % 3;
            w->jinv[c][i] = (J[i1][c1] * J[i2][c2] - J[i1][c2] * J[i2][c1]) / det;
        }
    return 0;
}

static int ws_create(const tb_model *m, const tr_opts *o, tr_ws **out, bs_err *err)
{
    *out = NULL;
    tr_ws *w = calloc(1, sizeof *w);
    if (!w) return bs_fail(err, BS_ENOMEM, "transport workspace: out of memory");
    w->m = m;
    w->n = m->norb;
    w->dim = m->dim;
    w->nocc = m->nocc;
    w->gauge = o->gauge;
    w->eta2 = o->eta_ev * o->eta_ev;
    w->smear = o->smear_ev;
    w->deadline = o->deadline;
    w->min_gap = HUGE_VAL;
    w->nahc = m->dim == 3 ? 3 : 1;
    w->has_shc = m->spinful && o->want_shc;
    w->ncomp = w->nahc + w->has_shc;
    for (int c = 0; c < w->nahc; c++)
        w->comp[c] = c;
    if (w->has_shc) w->comp[w->nahc] = 3;
    int rc = set_geometry(w, err);
    if (rc != 0) goto done;
    rc = hk_create(m, TR_KBATCH, &w->hk, err);
    if (rc == 0) rc = eig_create_dist(w->n, o->dist, &w->eig, err);
    if (rc != 0) goto done;
    size_t n = (size_t)w->n, n2 = n * n;
    w->spin = malloc(n * sizeof *w->spin);
    w->rc = malloc(n * sizeof *w->rc);
    w->H = malloc(TR_KBATCH * n2 * sizeof *w->H);
    w->dH = malloc(3 * TR_KBATCH * n2 * sizeof *w->dH);
    w->D = malloc(NOP * n2 * sizeof *w->D);
    w->V = malloc(NOP * n2 * sizeof *w->V);
    w->T = malloc(n2 * sizeof *w->T);
    w->E = malloc(n * sizeof *w->E);
    w->X = malloc(4 * n2 * sizeof *w->X);
    w->cut = malloc(4 * (n + 1) * sizeof *w->cut);
    w->f = malloc(n * sizeof *w->f);
    if (!w->spin || !w->rc || !w->H || !w->dH || !w->D || !w->V || !w->T || !w->E || !w->X || !w->cut ||
        !w->f) {
        rc = bs_fail(err, BS_ENOMEM, "transport workspace for %d states: out of memory", w->n);
        goto done;
    }
    for (int s = 0; s < w->n; s++) {
        /* s_z = diag(+1, -1) in units of hbar/2; the factor 1/2 enters through unit[]. */
        w->spin[s] = m->spinful ? (tb_state_spin(m, s) == 0 ? 1.0 : -1.0) : 0.0;
        const double *t = m->orb_pos[tb_state_orbital(m, s)];
        for (int c = 0; c < 3; c++)
            w->rc[s][c] = t[0] * m->lattice[0][c] + t[1] * m->lattice[1][c] + t[2] * m->lattice[2][c];
    }
    *out = w;
    w = NULL;
done:
    ws_free(w);
    return rc;
}

/* Velocities (and the spin current) in the orbital basis, from H and the reduced dH of one k. */
static void velocities(tr_ws *w, const double complex *H, const double complex *dH)
{
    int n = w->n;
    size_t n2 = (size_t)n * n;
    int ncart = w->dim == 3 ? 3 : 2;
    for (int c = 0; c < ncart; c++) {
        double complex *Dc = w->D + c * n2;
        for (int b = 0; b < n; b++)
            for (int a = 0; a < n; a++) {
                size_t idx = (size_t)a + (size_t)b * n;
                double complex d =
                    w->jac[0][c] * dH[idx] + w->jac[1][c] * dH[n2 + idx] + w->jac[2][c] * dH[2 * n2 + idx];
                if (w->gauge == TR_GAUGE_POSITION) d -= I * (w->rc[a][c] - w->rc[b][c]) * H[idx];
                Dc[idx] = d;
            }
    }
    if (!w->has_shc) return;
    /* (1/2){s_z, v_x} with diagonal s_z: element (a, b) is (s_a + s_b)/2 v_x,ab. */
    double complex *J = w->D + OP_JX * n2;
    for (int b = 0; b < n; b++)
        for (int a = 0; a < n; a++) {
            size_t idx = (size_t)a + (size_t)b * n;
            J[idx] = 0.5 * (w->spin[a] + w->spin[b]) * w->D[idx];
        }
}

/* U^dagger D_op U into V_op for the operators the components use; U in w->H block. */
static void to_eigenbasis(tr_ws *w, const double complex *U)
{
    int n = w->n;
    size_t n2 = (size_t)n * n;
    const double complex one = 1.0, zero = 0.0;
    int used[NOP] = {0};
    for (int c = 0; c < w->ncomp; c++) {
        used[comp_ops[w->comp[c]][0]] = 1;
        used[comp_ops[w->comp[c]][1]] = 1;
    }
    for (int op = 0; op < NOP; op++) {
        if (!used[op]) continue;
        cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, n, n, n, &one, w->D + op * n2, n, U, n, &zero,
                    w->T, n);
        cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, n, n, n, &one, U, n, w->T, n, &zero,
                    w->V + op * n2, n);
    }
}

/* Pair terms X_nm (n < m) of every component, and for the T = 0 step the cut sums
 * S(N) = sum_{n<N<=m} X_nm for N = 0..n, so that sum_n f_n Omega_n = -2 S(N_occ):
 * S(N+1) = S(N) + sum_{m>N} X_Nm - sum_{n<N} X_nN. */
static void pair_terms(tr_ws *w)
{
    int n = w->n;
    size_t n2 = (size_t)n * n;
    for (int c = 0; c < w->ncomp; c++) {
        const double complex *Va = w->V + comp_ops[w->comp[c]][0] * n2;
        const double complex *Vb = w->V + comp_ops[w->comp[c]][1] * n2;
        double *X = w->X + c * n2;
        for (int q = 0; q < n; q++)
            for (int p = 0; p < q; p++) {
                double de = w->E[q] - w->E[p], den = de * de + w->eta2;
                double complex z = Va[p + (size_t)q * n] * Vb[q + (size_t)p * n];
                X[p + (size_t)q * n] = den > TR_DENOM_MIN ? cimag(z) / den : 0.0;
            }
        double *S = w->cut + c * (n + 1);
        S[0] = 0;
        for (int N = 0; N < n; N++) {
            double s = S[N];
            for (int q = N + 1; q < n; q++)
                s += X[N + (size_t)q * n];
            for (int p = 0; p < N; p++)
                s -= X[p + (size_t)N * n];
            S[N + 1] = s;
        }
    }
}

/* Integrand of every component at every Fermi energy, output units per unit reduced volume. */
static void fermi_values(tr_ws *w, double *val)
{
    int n = w->n;
    size_t n2 = (size_t)n * n;
    for (int e = 0; e < w->nE; e++) {
        double ef = w->fermi[e];
        if (w->smear == 0) {
            int N = 0;
            while (N < n && w->E[N] < ef)
                N++;
            for (int c = 0; c < w->ncomp; c++)
                val[c * w->nE + e] = -2.0 * w->unit[c] * w->cut[c * (n + 1) + N];
            continue;
        }
        /* Fermi-Dirac, written with exp of a non-positive argument so it cannot overflow. */
        for (int p = 0; p < n; p++) {
            double x = (w->E[p] - ef) / w->smear;
            w->f[p] = x > 0 ? exp(-x) / (1 + exp(-x)) : 1 / (1 + exp(x));
        }
        for (int c = 0; c < w->ncomp; c++) {
            const double *X = w->X + c * n2;
            double s = 0;
            for (int q = 0; q < n; q++)
                for (int p = 0; p < q; p++)
                    s += (w->f[p] - w->f[q]) * X[p + (size_t)q * n];
            val[c * w->nE + e] = -2.0 * w->unit[c] * s;
        }
    }
}

/* Band energies and reduced band velocities |dE_n/dk_i| (from the diagonal of the Cartesian
 * velocities in the eigenbasis, dE/dk_i = sum_c v_c dk_c/dk_i) of one point into b: n x (1 + dim). */
static void band_data(const tr_ws *w, double *b)
{
    int n = w->n, d = w->dim;
    size_t n2 = (size_t)n * n;
    for (int p = 0; p < n; p++) {
        double *o = b + (size_t)p * (1 + d);
        o[0] = w->E[p];
        for (int i = 0; i < d; i++) {
            double g = 0;
            for (int c = 0; c < d; c++)
                g += creal(w->V[c * n2 + (size_t)p * (n + 1)]) * w->jinv[c][i];
            o[1 + i] = fabs(g);
        }
    }
}

/* Values (nv per point) at np reduced points k[3j..]; band data (band_data, n (1 + dim) per point)
 * into band unless NULL. */
static int eval_points(tr_ws *w, int np, const double *k, double *val, double *band, bs_err *err)
{
    int n = w->n;
    size_t n2 = (size_t)n * n;
    for (int start = 0; start < np; start += TR_KBATCH) {
        if (w->deadline > 0 && bs_now() > w->deadline)
            return bs_fail(err, BS_ETIMEOUT, "transport: time budget exceeded after %lld k-points", w->nk);
        int nb = np - start < TR_KBATCH ? np - start : TR_KBATCH;
        int rc = hk_build_deriv(w->hk, nb, k + 3 * (size_t)start, w->H, w->dH, err);
        if (rc != 0) return rc;
        for (int j = 0; j < nb; j++) {
            double complex *H = w->H + j * n2;
            velocities(w, H, w->dH + 3 * j * n2);
            rc = eig_vectors(w->eig, H, w->E, err);
            if (rc != 0) return rc;
            double gap = w->E[w->nocc] - w->E[w->nocc - 1];
            if (gap < w->min_gap) w->min_gap = gap;
            to_eigenbasis(w, H);
            pair_terms(w);
            fermi_values(w, val + (size_t)(start + j) * w->nv);
            if (band) band_data(w, band + (size_t)(start + j) * w->n * (1 + w->dim));
        }
        w->nk += nb;
    }
    return 0;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Default reference Fermi energy from the eigenvalues on an n0^d midpoint mesh (transport.h). */
static int default_fermi(tr_ws *w, int n0, double *ef, int *source, bs_err *err)
{
    int n = w->n, nocc = w->nocc;
    long long npt = w->dim == 3 ? (long long)n0 * n0 * n0 : (long long)n0 * n0;
    size_t n2 = (size_t)n * n;
    double *all = malloc((size_t)npt * n * sizeof *all);
    double *k = malloc(3 * TR_KBATCH * sizeof *k);
    int rc = 0;
    if (!all || !k) {
        rc = bs_fail(err, BS_ENOMEM, "transport: %lld x %d eigenvalues: out of memory", npt, n);
        goto done;
    }
    double vmax = -HUGE_VAL, cmin = HUGE_VAL;
    for (long long start = 0; start < npt; start += TR_KBATCH) {
        int nb = npt - start < TR_KBATCH ? (int)(npt - start) : TR_KBATCH;
        for (int j = 0; j < nb; j++) {
            long long p = start + j;
            k[3 * j] = (p % n0 + 0.5) / n0;
            k[3 * j + 1] = ((p / n0) % n0 + 0.5) / n0;
            k[3 * j + 2] = w->dim == 3 ? (p / ((long long)n0 * n0) + 0.5) / n0 : 0.0;
        }
        rc = hk_build(w->hk, nb, k, w->H, err);
        if (rc != 0) goto done;
        for (int j = 0; j < nb; j++) {
            double *e = all + (size_t)(start + j) * n;
            rc = eig_values(w->eig, w->H + j * n2, e, err);
            if (rc != 0) goto done;
            if (e[nocc - 1] > vmax) vmax = e[nocc - 1];
            if (e[nocc] < cmin) cmin = e[nocc];
        }
        w->nk += nb;
    }
    if (cmin > vmax) {
        *ef = 0.5 * (vmax + cmin);
        *source = TR_FERMI_MIDGAP;
    } else {
        /* Metal: nocc bands' worth of states (nocc npt eigenvalues) below E_F on this mesh. */
        size_t tot = (size_t)npt * n, idx = (size_t)npt * nocc;
        qsort(all, tot, sizeof *all, cmp_double);
        *ef = 0.5 * (all[idx - 1] + all[idx]);
        *source = TR_FERMI_FILLING;
    }
done:
    free(all);
    free(k);
    return rc;
}

/* Adaptive cells. Each cell is a box (reduced coordinates) with centre c and half-widths hw,
 * integrated by the embedded cubature pair of J. Comput. Appl. Math. 6, 295 (1980): a degree-7
 * rule on 2^d + 2d^2 + 2d + 1 points (17 in 2D, 33 in 3D) and a degree-5 rule on a subset of the
 * same points. The cell keeps the degree-7 value, and |R7 - R5| as its error (the error of the
 * lower rule, so a conservative bound for the kept one while the integrand is resolved). A cell is
 * refined by halving along the axis with the largest fourth difference of the integrand (from the
 * same points), so one refinement costs two cells' points. */

/* Point offsets of the rule in units of the half-widths, and the weights per point of each group
 * (normalised to a unit mean: the cell's integral is vol * sum w f). Weights checked against exact
 * monomial integrals up to degree 7 (R7) and 5 (R5) in 2D and 3D with numpy (common practice). */
#define GM_L2 0.35856858280031809 /* sqrt(9/70) */
#define GM_L3 0.94868329805051380 /* sqrt(9/10), also lambda4 */
#define GM_L5 0.68824720161168529 /* sqrt(9/19) */

typedef struct tr_cell {
    double c[3], hw[3];
    unsigned char level[3]; /* halvings along each axis */
    signed char split;      /* axis to halve next, -1 when every axis is at the depth limit */
    signed char fs;         /* FS_NONE, FS_RESOLVED, FS_OPEN (may hold a Fermi crossing) */
    int alive;              /* 0 once refined */
    double err;             /* largest component error of the cell, output units */
    double key;             /* heap key: err, or above every err while fs == FS_OPEN */
    double fs_split;        /* FS cells: smallest distance (eV) of a crossing band to another */
    double fs_feature;      /* FS cells: that distance over the band velocity, reduced k */
    double pmax;            /* largest |integrand| at the cell's points (any component) */
} tr_cell;

enum { FS_NONE = 0, FS_RESOLVED = 1, FS_OPEN = 2 };

typedef struct tr_mesh {
    tr_cell *cell;
    double *val, *cerr; /* ncell x nv: degree-7 value and |R7 - R5| */
    long long ncell, cap;
    int *heap; /* refinable cells, max-heap on err */
    long long nheap;
    double *k, *pv, *pb; /* points, point values and band data of one round */
    double *vscale;      /* nv: largest |integrand| seen at any point (per unit volume) */
    long long kcap;
    int npt;          /* points per cell */
    double (*off)[3]; /* npt offsets in units of hw */
    int *grp;         /* npt: group 0..4 of each point */
    double w7[5], w5[5];
} tr_mesh;

static void mesh_clear(tr_mesh *g)
{
    free(g->cell);
    free(g->val);
    free(g->cerr);
    free(g->heap);
    free(g->k);
    free(g->pv);
    free(g->pb);
    free(g->vscale);
    free(g->off);
    free(g->grp);
}

/* The rule's points in the order: centre; +-L2 e_i (points 1 + 2i, 2 + 2i); +-L3 e_i
 * (1 + 2d + 2i, 2 + 2d + 2i); +-L3 e_i +-L3 e_j (i < j); the 2^d corners (+-L5, ...). */
static int mesh_rule(tr_mesh *g, int d, bs_err *err)
{
    g->npt = (1 << d) + 2 * d * d + 2 * d + 1;
    g->off = calloc((size_t)g->npt, sizeof *g->off);
    g->grp = calloc((size_t)g->npt, sizeof *g->grp);
    if (!g->off || !g->grp) return bs_fail(err, BS_ENOMEM, "transport: cubature rule: out of memory");
    int q = 1;
    for (int grp = 1; grp <= 2; grp++)
        for (int i = 0; i < d; i++)
            for (int sg = 1; sg >= -1; sg -= 2) {
                g->off[q][i] = sg * (grp == 1 ? GM_L2 : GM_L3);
                g->grp[q++] = grp;
            }
    for (int i = 0; i < d; i++)
        for (int j = i + 1; j < d; j++)
            for (int si = 1; si >= -1; si -= 2)
                for (int sj = 1; sj >= -1; sj -= 2) {
                    g->off[q][i] = si * GM_L3;
                    g->off[q][j] = sj * GM_L3;
                    g->grp[q++] = 3;
                }
    for (int s = 0; s < (1 << d); s++) {
        for (int i = 0; i < d; i++)
            g->off[q][i] = ((s >> i) & 1) ? -GM_L5 : GM_L5;
        g->grp[q++] = 4;
    }
    double dd = d;
    g->w7[0] = (12824 - 9120 * dd + 400 * dd * dd) / 19683;
    g->w7[1] = 980.0 / 6561;
    g->w7[2] = (1820 - 400 * dd) / 19683;
    g->w7[3] = 200.0 / 19683;
    g->w7[4] = 6859.0 / 19683 / (1 << d);
    g->w5[0] = (729 - 950 * dd + 50 * dd * dd) / 729;
    g->w5[1] = 245.0 / 486;
    g->w5[2] = (265 - 100 * dd) / 1458;
    g->w5[3] = 25.0 / 729;
    g->w5[4] = 0;
    return 0;
}

static int mesh_reserve(tr_mesh *g, long long ncell, int nv, bs_err *err)
{
    if (ncell <= g->cap) return 0;
    long long cap = g->cap ? g->cap : 1024;
    while (cap < ncell)
        cap *= 2;
    if (cap > INT_MAX) return bs_fail(err, BS_EINVAL, "transport: more than %d cells", INT_MAX);
    tr_cell *c = realloc(g->cell, (size_t)cap * sizeof *c);
    if (c) g->cell = c;
    double *v = c ? realloc(g->val, (size_t)cap * nv * sizeof *v) : NULL;
    if (v) g->val = v;
    double *e = v ? realloc(g->cerr, (size_t)cap * nv * sizeof *e) : NULL;
    if (e) g->cerr = e;
    int *h = e ? realloc(g->heap, (size_t)cap * sizeof *h) : NULL;
    if (h) g->heap = h;
    if (!h) return bs_fail(err, BS_ENOMEM, "transport: %lld cells: out of memory", cap);
    g->cap = cap;
    return 0;
}

static void heap_push(tr_mesh *g, int ci)
{
    long long i = g->nheap++;
    while (i > 0) {
        long long p = (i - 1) / 2;
        if (g->cell[g->heap[p]].key >= g->cell[ci].key) break;
        g->heap[i] = g->heap[p];
        i = p;
    }
    g->heap[i] = ci;
}

static int heap_pop(tr_mesh *g)
{
    int top = g->heap[0], last = g->heap[--g->nheap];
    long long i = 0;
    for (;;) {
        long long l = 2 * i + 1, r = l + 1, b = i;
        double eb = g->cell[last].key;
        if (l < g->nheap && g->cell[g->heap[l]].key > eb) b = l, eb = g->cell[g->heap[l]].key;
        if (r < g->nheap && g->cell[g->heap[r]].key > eb) b = r;
        if (b == i) break;
        g->heap[i] = g->heap[b];
        i = b;
    }
    if (g->nheap > 0) g->heap[i] = last;
    return top;
}

/* Axis to halve: the largest fourth difference (summed over components) among the axes below the
 * depth limit; a later axis wins only by a relative 1e-9, so mirror-image cells choose alike. */
static int split_axis(int d, int nv, const double *pa, const tr_cell *cl, int max_depth)
{
    const double ratio = (GM_L2 * GM_L2) / (GM_L3 * GM_L3);
    int best = -1;
    double dbest = -1;
    for (int i = 0; i < d; i++) {
        if (cl->level[i] >= max_depth) continue;
        const double *p2 = pa + (size_t)(1 + 2 * i) * nv, *m2 = p2 + nv;
        const double *p3 = pa + (size_t)(1 + 2 * d + 2 * i) * nv, *m3 = p3 + nv;
        double diff = 0;
        for (int v = 0; v < nv; v++)
            diff += fabs(p2[v] + m2[v] - 2 * pa[v] - ratio * (p3[v] + m3[v] - 2 * pa[v]));
        if (best < 0 || diff > dbest * (1 + 1e-9)) best = i, dbest = diff;
    }
    return best;
}

/* Distance from band p to the nearest band that is not degenerate with it, at one point (n bands
 * of band data b, stride st); HUGE_VAL when there is none. */
static double band_split(const double *b, int n, int st, int p)
{
    double e = b[(size_t)p * st], best = HUGE_VAL;
    for (int q = p + 1; q < n; q++)
        if (b[(size_t)q * st] - e > TR_DEGEN_EV) {
            best = b[(size_t)q * st] - e;
            break;
        }
    for (int q = p - 1; q >= 0; q--)
        if (e - b[(size_t)q * st] > TR_DEGEN_EV) {
            if (e - b[(size_t)q * st] < best) best = e - b[(size_t)q * st];
            break;
        }
    return best;
}

/* Fermi-surface status of a cell from the band data pb of its npt points (centre first): see
 * TR_FS_SAFETY. Sets cl->fs, fs_split and fs_feature; an open cell is halved along the axis that
 * adds most to its energy window (the integrand may be zero at every point, so its differences
 * cannot choose), among the axes below max_depth. */
static void fermi_cell(const tr_ws *w, const double *pb, int npt, int max_depth, tr_cell *cl)
{
    double axis_w[3] = {0, 0, 0};
    int n = w->n, d = w->dim, st = 1 + d;
    double floor_ev = w->smear > TR_FS_FLOOR_EV ? w->smear : TR_FS_FLOOR_EV;
    cl->fs = FS_NONE;
    cl->fs_split = HUGE_VAL;
    cl->fs_feature = HUGE_VAL;
    for (int p = 0; p < n; p++) {
        double lo = pb[(size_t)p * st], hi = lo, gmax[3] = {0, 0, 0};
        for (int q = 0; q < npt; q++) {
            const double *b = pb + ((size_t)q * n + p) * st;
            lo = fmin(lo, b[0]);
            hi = fmax(hi, b[0]);
            for (int i = 0; i < d; i++)
                gmax[i] = fmax(gmax[i], b[1 + i]);
        }
        double M = 0, gnorm = 0;
        for (int i = 0; i < d; i++) {
            M += gmax[i] * cl->hw[i];
            gnorm += gmax[i] * gmax[i];
        }
        M *= 0.5 * TR_FS_SAFETY;
        lo -= M;
        hi += M;
        int crosses = 0;
        for (int e = 0; e < w->nE && !crosses; e++)
            crosses = w->fermi[e] >= lo && w->fermi[e] <= hi;
        if (!crosses) continue;
        double split = HUGE_VAL;
        for (int q = 0; q < npt; q++)
            split = fmin(split, band_split(pb + (size_t)q * n * st, n, st, p));
        double eres = fmax(TR_FS_FRAC * split, floor_ev);
        int open = hi - lo >= eres;
        if (open || cl->fs == FS_NONE) cl->fs = open ? FS_OPEN : FS_RESOLVED;
        if (open)
            for (int i = 0; i < d; i++)
                axis_w[i] = fmax(axis_w[i], gmax[i] * cl->hw[i]);
        cl->fs_split = fmin(cl->fs_split, split);
        if (gnorm > 0) cl->fs_feature = fmin(cl->fs_feature, split / sqrt(gnorm));
    }
    if (cl->fs != FS_OPEN || cl->split < 0) return;
    int best = -1;
    for (int i = 0; i < d; i++)
        if (cl->level[i] < max_depth && (best < 0 || axis_w[i] > axis_w[best] * (1 + 1e-9))) best = i;
    cl->split = (signed char)best;
}

/* Evaluates cells first..first+count-1 (already placed): value, error and the next split axis. */
static int eval_cells(tr_ws *w, tr_mesh *g, long long first, long long count, int max_depth, bs_err *err)
{
    int d = w->dim, per = g->npt, nv = w->nv;
    long long np = count * per;
    if (np > INT_MAX) return bs_fail(err, BS_EINVAL, "transport: %lld points in one round", np);
    size_t nb = (size_t)w->n * (1 + d);
    if (np > g->kcap) {
        double *k = realloc(g->k, 3 * (size_t)np * sizeof *k);
        if (k) g->k = k;
        double *pv = k ? realloc(g->pv, (size_t)np * nv * sizeof *pv) : NULL;
        if (pv) g->pv = pv;
        double *pb = pv ? realloc(g->pb, (size_t)np * nb * sizeof *pb) : NULL;
        if (pb) g->pb = pb;
        if (!pb) return bs_fail(err, BS_ENOMEM, "transport: %lld k-points: out of memory", np);
        g->kcap = np;
    }
    if (!g->vscale) {
        g->vscale = calloc((size_t)nv, sizeof *g->vscale);
        if (!g->vscale) return bs_fail(err, BS_ENOMEM, "transport: out of memory");
    }
    for (long long c = 0; c < count; c++) {
        const tr_cell *cl = &g->cell[first + c];
        for (int q = 0; q < per; q++)
            for (int i = 0; i < 3; i++)
                g->k[3 * (c * per + q) + i] = i < d ? cl->c[i] + g->off[q][i] * cl->hw[i] : 0.0;
    }
    int rc = eval_points(w, (int)np, g->k, g->pv, g->pb, err);
    if (rc != 0) return rc;
    for (long long q = 0; q < np * nv; q++)
        if (fabs(g->pv[q]) > g->vscale[q % nv]) g->vscale[q % nv] = fabs(g->pv[q]);
    for (long long c = 0; c < count; c++) {
        tr_cell *cl = &g->cell[first + c];
        double vol = 1;
        for (int i = 0; i < d; i++)
            vol *= 2 * cl->hw[i];
        const double *pa = g->pv + (size_t)(c * per) * nv;
        double *val = g->val + (size_t)(first + c) * nv, *ce = g->cerr + (size_t)(first + c) * nv;
        cl->err = 0;
        cl->pmax = 0;
        for (long long q = 0; q < (long long)per * nv; q++)
            cl->pmax = fmax(cl->pmax, fabs(pa[q]));
        for (int v = 0; v < nv; v++) {
            double r7 = 0, r5 = 0;
            for (int q = 0; q < per; q++) {
                double f = pa[(size_t)q * nv + v];
                r7 += g->w7[g->grp[q]] * f;
                r5 += g->w5[g->grp[q]] * f;
            }
            val[v] = vol * r7;
            ce[v] = vol * fabs(r7 - r5);
            if (ce[v] > cl->err) cl->err = ce[v];
        }
        cl->split = (signed char)split_axis(d, nv, pa, cl, max_depth);
        fermi_cell(w, g->pb + (size_t)(c * per) * nb, per, max_depth, cl);
        cl->key = cl->fs == FS_OPEN ? TR_FS_KEY * vol : cl->err;
    }
    return 0;
}

/* Halves cell `parent` along its split axis into two new cells at the end of the list. */
static void place_children(tr_mesh *g, int parent)
{
    tr_cell p = g->cell[parent];
    int a = p.split;
    for (int s = -1; s <= 1; s += 2) {
        tr_cell *c = &g->cell[g->ncell++];
        *c = p;
        c->hw[a] = 0.5 * p.hw[a];
        c->c[a] = p.c[a] + s * c->hw[a];
        c->level[a] = (unsigned char)(p.level[a] + 1);
        c->alive = 1;
        c->err = 0;
    }
}

/* A posteriori check of the estimate: where the two halves of a cell do not add up to the cell's
 * own value, the rule pair missed structure (a peak narrower than the cell, where R7 and R5 can
 * agree by accident), so each half's error is raised to half the discrepancy and refinement goes
 * on there. The parent's value and error stay in the pool after it is refined. */
static void check_children(tr_ws *w, tr_mesh *g, int parent, long long child)
{
    int nv = w->nv;
    const double *pv = g->val + (size_t)parent * nv;
    double *v1 = g->val + (size_t)child * nv, *v2 = v1 + nv;
    double *e1 = g->cerr + (size_t)child * nv, *e2 = e1 + nv;
    for (int v = 0; v < nv; v++) {
        double half = 0.5 * fabs(pv[v] - v1[v] - v2[v]);
        if (half > e1[v]) e1[v] = half;
        if (half > e2[v]) e2[v] = half;
        if (e1[v] > g->cell[child].err) g->cell[child].err = e1[v];
        if (e2[v] > g->cell[child + 1].err) g->cell[child + 1].err = e2[v];
    }
    for (int i = 0; i < 2; i++) {
        tr_cell *c = &g->cell[child + i];
        if (c->fs != FS_OPEN) c->key = c->err;
    }
}

/* Globally adaptive refinement: the cells with the largest error estimates are halved, a round of
 * up to `round` cells at a time (one batch of diagonalisations), until the total estimate is below
 * tol and no refinable cell may hold an unresolved Fermi crossing (those go first, whatever their
 * estimate: a zero estimate there only means no point fell between two Fermi sheets), the k-point
 * budget is spent, or every cell left over is at the depth limit. */
static int refine(tr_ws *w, tr_mesh *g, const tr_opts *o, double tol, int max_depth, int *depth, bs_err *err)
{
    int round = w->dim == 3 ? 64 : 128;
    double total = 0;
    long long nopen = 0; /* refinable cells with an unresolved Fermi crossing */
    for (long long c = 0; c < g->ncell; c++) {
        total += g->cell[c].err;
        if (g->cell[c].split >= 0) {
            heap_push(g, (int)c);
            nopen += g->cell[c].fs == FS_OPEN;
        }
    }
    int *pick = malloc((size_t)(round + TR_TIE_EXTRA) * sizeof *pick);
    if (!pick) return bs_fail(err, BS_ENOMEM, "transport: refinement list: out of memory");
    int rc = 0;
    while (g->nheap > 0 && (total > tol || nopen > 0) && w->nk < o->max_kpoints) {
        int npick = 0;
        double left = total;
        while (g->nheap > 0 && npick < round && (left > tol || g->cell[g->heap[0]].fs == FS_OPEN)) {
            int ci = heap_pop(g);
            pick[npick++] = ci;
            left -= g->cell[ci].err;
            nopen -= g->cell[ci].fs == FS_OPEN;
        }
        /* Cells tied with the last one picked (images under a symmetry of the model, e.g.
         * k -> -k) are refined in the same round, so the partition keeps the symmetry and the
         * cancellations it implies (zero AHC under time reversal) hold to round-off. */
        while (npick > 0 && npick < round + TR_TIE_EXTRA && g->nheap > 0 &&
               g->cell[g->heap[0]].key >= g->cell[pick[npick - 1]].key * (1 - 1e-9)) {
            int ci = heap_pop(g);
            pick[npick++] = ci;
            nopen -= g->cell[ci].fs == FS_OPEN;
        }
        rc = mesh_reserve(g, g->ncell + 2LL * npick, w->nv, err);
        if (rc != 0) break;
        long long first = g->ncell;
        for (int i = 0; i < npick; i++) {
            place_children(g, pick[i]);
            g->cell[pick[i]].alive = 0;
            total -= g->cell[pick[i]].err;
        }
        rc = eval_cells(w, g, first, g->ncell - first, max_depth, err);
        if (rc != 0) break;
        for (int i = 0; i < npick; i++)
            check_children(w, g, pick[i], first + 2LL * i);
        for (long long c = first; c < g->ncell; c++) {
            const tr_cell *cl = &g->cell[c];
            total += cl->err;
            for (int i = 0; i < w->dim; i++)
                if (cl->level[i] > *depth) *depth = cl->level[i];
            if (cl->split >= 0) {
                heap_push(g, (int)c);
                nopen += cl->fs == FS_OPEN;
            }
        }
    }
    free(pick);
    return rc;
}

static int check_inputs(const tb_model *m, const tr_opts *o, bs_err *err)
{
    if (m->dim != 2 && m->dim != 3)
        return bs_fail(err, BS_EINVAL, "transport: expected a 2D or 3D model, found dim %d", m->dim);
    if (m->nocc < 1 || m->nocc >= m->norb)
        return bs_fail(err, BS_EINVAL, "transport: expected 1 <= occupied bands < %d, found %d", m->norb,
                       m->nocc);
    int mesh_max = m->dim == 3 ? 100 : 1000; /* at most 1e6 initial cells */
    if (o->mesh < 0 || o->mesh > mesh_max || o->max_depth < -1 || o->max_depth > 20)
        return bs_fail(err, BS_EINVAL,
                       "transport: expected 0 <= mesh <= %d and -1 <= max_depth <= 20, found %d "
                       "and %d",
                       mesh_max, o->mesh, o->max_depth);
    if (!(o->tol >= 0) || !isfinite(o->tol) || o->max_kpoints < 1 || !(o->eta_ev >= 0) ||
        !isfinite(o->eta_ev) || !(o->smear_ev >= 0) || !isfinite(o->smear_ev))
        return bs_fail(err, BS_EINVAL,
                       "transport: expected tol >= 0, max_kpoints >= 1, eta >= 0, smearing >= 0, "
                       "found %g, %lld, %g, %g",
                       o->tol, o->max_kpoints, o->eta_ev, o->smear_ev);
    if (o->nscan < 0 || o->nscan > TR_MAX_FERMI - 1 || !isfinite(o->scan_lo_ev) || !isfinite(o->scan_hi_ev) ||
        (o->has_fermi && !isfinite(o->fermi_ev)))
        return bs_fail(err, BS_EINVAL,
                       "transport: expected 0 <= nscan <= %d, finite scan limits and Fermi energy, "
                       "found %d",
                       TR_MAX_FERMI - 1, o->nscan);
    if (o->gauge != TR_GAUGE_POSITION && o->gauge != TR_GAUGE_LATTICE)
        return bs_fail(err, BS_EINVAL, "transport: unknown gauge %d", o->gauge);
    return 0;
}

/* Reference Fermi energy and the scan into w->fermi. */
static int set_fermi(tr_ws *w, const tr_opts *o, int n0, tr_result *out, bs_err *err)
{
    double ef = 0;
    int source = TR_FERMI_GIVEN;
    if (o->has_fermi) {
        ef = o->fermi_ev;
    } else if (w->m->has_fermi) {
        ef = w->m->fermi_ev;
        source = TR_FERMI_CARD;
    } else {
        /* A finer mesh than the cells': eigenvalues alone are cheap, and a midgap energy from
         * sampled band edges is only safe when the sampling does not miss the true edges by
         * half the gap. */
        int nf = w->dim == 3 ? TR_FERMI_MESH_3D : TR_FERMI_MESH_2D;
        int rc = default_fermi(w, n0 > nf ? n0 : nf, &ef, &source, err);
        if (rc != 0) return rc;
    }
    w->fermi[0] = ef;
    for (int i = 0; i < o->nscan; i++) {
        double t = o->nscan > 1 ? (double)i / (o->nscan - 1) : 0.0;
        w->fermi[1 + i] = ef + o->scan_lo_ev + t * (o->scan_hi_ev - o->scan_lo_ev);
    }
    w->nE = 1 + o->nscan;
    out->fermi_source = source;
    return 0;
}

/* Initial partition: n0^d cells of side 1/n0. */
static int initial_cells(tr_ws *w, tr_mesh *g, int n0, int max_depth, bs_err *err)
{
    long long ncell = w->dim == 3 ? (long long)n0 * n0 * n0 : (long long)n0 * n0;
    int rc = mesh_rule(g, w->dim, err);
    if (rc == 0) rc = mesh_reserve(g, ncell, w->nv, err);
    if (rc != 0) return rc;
    for (long long c = 0; c < ncell; c++) {
        tr_cell *cl = &g->cell[c];
        memset(cl, 0, sizeof *cl);
        long long idx[3] = {c % n0, (c / n0) % n0, c / ((long long)n0 * n0)};
        for (int i = 0; i < w->dim; i++) {
            cl->c[i] = (idx[i] + 0.5) / n0;
            cl->hw[i] = 0.5 / n0;
        }
        cl->alive = 1;
    }
    g->ncell = ncell;
    /* In chunks, so the point buffers stay the size of a refinement round. */
    for (long long c = 0; c < ncell && rc == 0; c += TR_INIT_CHUNK) {
        long long nc = ncell - c < TR_INIT_CHUNK ? ncell - c : TR_INIT_CHUNK;
        rc = eval_cells(w, g, c, nc, max_depth, err);
    }
    return rc;
}

/* Sums the cells of the final partition into out (the running totals of refine() drift). A cell
 * left with an unresolved Fermi crossing (depth limit or budget) whose points all saw a zero
 * integrand (to 1e-9 of the largest seen) has an error estimate of zero that means nothing: it is
 * raised to the cell's volume times the largest integrand seen anywhere. Where its points did see
 * the integrand (a Weyl node at the Fermi level, a sheet crossed by some points), the rule pair's
 * estimate stands. */
static void collect(const tr_ws *w, const tr_mesh *g, tr_result *out)
{
    out->err_total = 0;
    out->ncells = 0;
    out->fs_split_ev = HUGE_VAL;
    out->fs_feature = HUGE_VAL;
    out->fs_finest_cell = HUGE_VAL;
    double vmax = 0;
    for (int v = 0; v < w->nv; v++)
        vmax = fmax(vmax, g->vscale[v]);
    for (long long c = 0; c < g->ncell; c++) {
        const tr_cell *cl = &g->cell[c];
        if (!cl->alive) continue;
        out->ncells++;
        double vol = 1, width = 0;
        for (int i = 0; i < w->dim; i++) {
            vol *= 2 * cl->hw[i];
            width = fmax(width, 2 * cl->hw[i]);
        }
        if (cl->fs != FS_NONE) {
            out->fs_cells++;
            out->fs_split_ev = fmin(out->fs_split_ev, cl->fs_split);
            out->fs_feature = fmin(out->fs_feature, cl->fs_feature);
            out->fs_finest_cell = fmin(out->fs_finest_cell, width);
        }
        int open = cl->fs == FS_OPEN;
        out->fs_open += open;
        const double *val = g->val + (size_t)c * w->nv, *ce = g->cerr + (size_t)c * w->nv;
        int blind = open && !(cl->pmax > 1e-9 * vmax);
        double cell_err = 0;
        for (int e = 0; e < w->nE; e++) {
            for (int a = 0; a < w->nahc; a++) {
                int v = a * w->nE + e;
                double ev = blind ? fmax(ce[v], vol * g->vscale[v]) : ce[v];
                out->ahc[e][a] += val[v];
                out->ahc_err[e][a] += ev;
                cell_err = fmax(cell_err, ev);
            }
            if (w->has_shc) {
                int v = w->nahc * w->nE + e;
                double ev = blind ? fmax(ce[v], vol * g->vscale[v]) : ce[v];
                out->shc[e] += val[v];
                out->shc_err[e] += ev;
                cell_err = fmax(cell_err, ev);
            }
        }
        out->err_total += fmax(cl->err, cell_err);
    }
}

int tr_compute(const tb_model *m, const tr_opts *o, tr_result *out, bs_err *err)
{
    tr_opts def;
    if (!o) {
        tr_opts_default(&def);
        o = &def;
    }
    memset(out, 0, sizeof *out);
    int rc = check_inputs(m, o, err);
    if (rc != 0) return rc;
    int n0 = o->mesh ? o->mesh : (m->dim == 3 ? 6 : 8);
    int max_depth = o->max_depth ? (o->max_depth < 0 ? 0 : o->max_depth) : (m->dim == 3 ? 8 : 12);
    double tol = o->tol > 0 ? o->tol : (m->dim == 3 ? 1.0 : 1e-3);
    tr_ws *w = NULL;
    tr_mesh g;
    memset(&g, 0, sizeof g);
    rc = ws_create(m, o, &w, err);
    if (rc != 0) goto done;
    rc = set_fermi(w, o, n0, out, err);
    if (rc != 0) goto done;
    w->nv = w->ncomp * w->nE;
    rc = initial_cells(w, &g, n0, max_depth, err);
    if (rc != 0) goto done;
    out->depth = 0;
    rc = refine(w, &g, o, tol, max_depth, &out->depth, err);
    if (rc != 0) goto done;
    collect(w, &g, out);
    out->dim = m->dim;
    out->has_shc = w->has_shc;
    out->nfermi = w->nE;
    memcpy(out->fermi_ev, w->fermi, sizeof(double) * (size_t)w->nE);
    strcpy(out->ahc_units, m->dim == 3 ? "S/cm" : "e^2/h");
    strcpy(out->shc_units, w->has_shc ? (m->dim == 3 ? "(hbar/e)S/cm" : "e/2pi") : "");
    out->nk = w->nk;
    out->tol = tol;
    out->converged = out->err_total <= tol;
    out->limit = out->converged ? TR_LIMIT_NONE : w->nk >= o->max_kpoints ? TR_LIMIT_BUDGET : TR_LIMIT_DEPTH;
    out->min_gap_ev = w->min_gap;
    out->eta_ev = o->eta_ev;
    out->smear_ev = o->smear_ev;
    out->gauge = o->gauge;
done:
    mesh_clear(&g);
    ws_free(w);
    return rc;
}
