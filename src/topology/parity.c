/* Parity criterion for Z2 (Phys. Rev. B 76, 045302 (2007)): inversion eigenvalues of the occupied
 * states at the TRIM, one per Kramers pair, multiplied into the strong and weak indices. */
#include "bandsieve/parity.h"

#include <cblas.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/config.h"
#include "bandsieve/eig.h"
#include "bandsieve/hk.h"

void par_opts_default(par_opts *o)
{
    memset(o, 0, sizeof *o);
    o->gap_tol_ev = BS_GAP_CLOSED_EV;
    /* The eigenvalues of P on an invariant subspace are exactly +-1; a symmetry broken by a
     * relative amount eps mixes the subspace by an angle ~eps ||H||/gap, which moves them only at
     * second order, so 1e-3 still accepts angles of a few per cent (common practice). */
    o->parity_tol = 1e-3;
}

/* Work arrays for one TRIM, allocated once. */
typedef struct par_ws {
    int n, nocc;
    hk_engine *hk;
    hk_engine *own_hk; /* hk when built here, NULL when borrowed */
    eig_ws *eig_n, *eig_occ;
    double complex *H;  /* n^2 */
    double complex *V;  /* n x (nocc+1) eigenvectors */
    double complex *PV; /* n x nocc */
    double complex *M;  /* nocc^2: V_occ^dagger P V_occ */
    double *w;          /* n */
} par_ws;

static void ws_free(par_ws *ws)
{
    hk_free(ws->own_hk);
    eig_free(ws->eig_n);
    eig_free(ws->eig_occ);
    free(ws->H);
    free(ws->V);
    free(ws->PV);
    free(ws->M);
    free(ws->w);
}

static int ws_create(const tb_model *m, const eig_dist *dist, hk_engine *shared, par_ws *ws, bs_err *err)
{
    memset(ws, 0, sizeof *ws);
    int n = m->norb, no = m->nocc;
    ws->n = n;
    ws->nocc = no;
    int rc = 0;
    if (shared && hk_norb(shared) == n)
        ws->hk = shared;
    else
        rc = hk_create(m, 1, &ws->own_hk, err), ws->hk = ws->own_hk;
    if (rc == 0) rc = eig_create_dist(n, dist, &ws->eig_n, err);
    if (rc == 0) rc = eig_create(no, &ws->eig_occ, err);
    if (rc != 0) return rc;
    ws->H = malloc((size_t)n * n * sizeof *ws->H);
    ws->V = malloc((size_t)n * (no + 1) * sizeof *ws->V);
    ws->PV = malloc((size_t)n * no * sizeof *ws->PV);
    ws->M = malloc((size_t)no * no * sizeof *ws->M);
    ws->w = malloc((size_t)n * sizeof *ws->w);
    if (!ws->H || !ws->V || !ws->PV || !ws->M || !ws->w)
        return bs_fail(err, BS_ENOMEM, "out of memory for parities of %d states", n);
    return 0;
}

static void set_reason(par_result *r, int status, const char *fmt, const double k[3], double value)
{
    /* The first cause wins, a closed gap over an ambiguous parity. */
    if (r->status == PAR_GAP_CLOSED || (r->status == PAR_AMBIGUOUS && status != PAR_GAP_CLOSED)) return;
    r->status = status;
    char kt[48];
    snprintf(kt, sizeof kt, "(%g,%g,%g)", k[0], k[1], k[2]);
    snprintf(r->reason, sizeof r->reason, fmt, kt, value);
}

/* M = V_occ^dagger P V_occ. P commutes with H at a TRIM, so on a gapped occupied subspace M is
 * unitary and Hermitian (P^2 = 1); its eigenvalues are the parities, which is right however the
 * occupied levels are degenerate (reading expectation values would not be). */
static int parity_matrix(par_ws *ws, const sym_info *s, const double k[3], double *antiherm)
{
    int n = ws->n, no = ws->nocc;
    if (sym_inversion_apply(s, k, no, ws->V, ws->PV) != 0) return BS_EINVAL;
    const double complex one = 1.0, zero = 0.0;
    cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, no, no, n, &one, ws->V, n, ws->PV, n, &zero,
                ws->M, no);
    double worst = 0;
    for (int b = 0; b < no; b++)
        for (int a = 0; a <= b; a++) {
            double complex x = ws->M[a + (size_t)b * no], y = conj(ws->M[b + (size_t)a * no]);
            double d = cabs(x - y);
            if (d > worst) worst = d;
            ws->M[a + (size_t)b * no] = 0.5 * (x + y);
        }
    *antiherm = worst;
    return 0;
}

/* Parities at TRIM t into r; returns 0 or a library error. */
static int one_trim(par_ws *ws, const sym_info *s, const par_opts *o, int kramers, int t, par_result *r,
                    bs_err *err)
{
    const double *k = r->trim[t];
    int no = ws->nocc;
    int rc = hk_build(ws->hk, 1, k, ws->H, err);
    if (rc == 0) rc = eig_range(ws->eig_n, ws->H, 0, no, ws->w, ws->V, err);
    if (rc != 0) return rc;
    r->gap_ev[t] = ws->w[no] - ws->w[no - 1];
    if (r->gap_ev[t] <= o->gap_tol_ev) {
        set_reason(r, PAR_GAP_CLOSED, "gap closed at TRIM %s: E_N+1 - E_N = %.3g eV", k, r->gap_ev[t]);
        return 0;
    }
    double antiherm;
    if (parity_matrix(ws, s, k, &antiherm) != 0)
        return bs_fail(err, BS_EINVAL, "parity: the symmetry record holds no inversion operator");
    rc = eig_values(ws->eig_occ, ws->M, ws->w, err);
    if (rc != 0) return rc;
    int nodd = 0;
    double dev = antiherm;
    for (int i = 0; i < no; i++) {
        double xi = ws->w[i] < 0 ? -1.0 : 1.0;
        if (xi < 0) nodd++;
        if (fabs(ws->w[i] - xi) > dev) dev = fabs(ws->w[i] - xi);
    }
    if (dev > r->max_dev) r->max_dev = dev;
    r->nodd[t] = nodd;
    r->neven[t] = no - nodd;
    if (dev > o->parity_tol) {
        set_reason(r, PAR_AMBIGUOUS, "parity eigenvalue at TRIM %s is off +-1 by %.3g", k, dev);
        return 0;
    }
    if (!kramers) return 0;
    /* Kramers partners share their parity (P commutes with Theta), so both counts are even and
     * one parity per pair enters delta. */
    if (nodd % 2 != 0 || (no - nodd) % 2 != 0) {
        set_reason(r, PAR_AMBIGUOUS,
                   "odd number of odd-parity occupied states at TRIM %s (%g): "
                   "Kramers pairs not resolved",
                   k, (double)nodd);
        return 0;
    }
    r->delta[t] = (nodd / 2) % 2 ? -1 : 1;
    return 0;
}

static void result_init(const tb_model *m, par_result *r)
{
    memset(r, 0, sizeof *r);
    r->status = PAR_DONE;
    r->dim = m->dim;
    r->ntrim = m->dim == 2 ? 4 : 8;
    for (int t = 0; t < 8; t++) {
        for (int d = 0; d < 3; d++)
            r->trim[t][d] = 0.5 * ((t >> d) & 1);
        r->nodd[t] = r->neven[t] = -1;
    }
    for (int i = 0; i < 4; i++)
        r->z2[i] = -1;
}

static void combine(par_result *r)
{
    int prod = 1;
    for (int t = 0; t < r->ntrim; t++)
        prod *= r->delta[t];
    r->z2[0] = prod < 0;
    if (r->dim == 2) return;
    for (int j = 0; j < 3; j++) {
        int pj = 1;
        for (int t = 0; t < 8; t++)
            if ((t >> j) & 1) pj *= r->delta[t];
        r->z2[j + 1] = pj < 0;
    }
}

int par_z2(const tb_model *m, const sym_info *s, const par_opts *opts, par_result *out, bs_err *err)
{
    par_opts o;
    par_opts_default(&o);
    if (opts && opts->gap_tol_ev > 0) o.gap_tol_ev = opts->gap_tol_ev;
    if (opts && opts->parity_tol > 0) o.parity_tol = opts->parity_tol;
    if (opts) o.dist = opts->dist;
    if (opts) o.hk = opts->hk;
    result_init(m, out);
    if (s->norb != m->norb)
        return bs_fail(err, BS_EINVAL, "parity: symmetry record for %d states, model has %d", s->norb,
                       m->norb);
    if (!s->inversion) {
        out->status = PAR_NA;
        snprintf(out->reason, sizeof out->reason,
                 "no inversion symmetry: the parity criterion does not apply");
        return 0;
    }
    int kramers = s->time_reversal && s->tr_squared == -1;
    if (kramers && !s->inv_commutes_tr) {
        out->status = PAR_AMBIGUOUS;
        snprintf(out->reason, sizeof out->reason,
                 "inversion and time reversal do not commute: "
                 "Kramers partners need not share their parity");
    }
    par_ws ws;
    int rc = ws_create(m, o.dist, o.hk, &ws, err);
    for (int t = 0; t < out->ntrim && rc == 0; t++)
        rc = one_trim(&ws, s, &o, kramers, t, out, err);
    ws_free(&ws);
    if (rc != 0) return rc;
    if (!kramers && out->status == PAR_DONE) {
        out->status = PAR_NA;
        snprintf(out->reason, sizeof out->reason, "%s: no Kramers pairs, the parity Z2 does not apply",
                 s->spinful ? "time reversal not found" : "spinless model");
    }
    if (out->status == PAR_DONE) combine(out);
    return 0;
}

void par_format(const par_result *r, char *buf, int len)
{
    if (len <= 0) return;
    buf[0] = '\0';
    if (r->status != PAR_DONE) return;
    if (r->dim == 2)
        snprintf(buf, (size_t)len, "%d", r->z2[0]);
    else
        snprintf(buf, (size_t)len, "%d;%d%d%d", r->z2[0], r->z2[1], r->z2[2], r->z2[3]);
}
