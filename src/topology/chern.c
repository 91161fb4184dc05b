/* Lattice Chern numbers from link variables, J. Phys. Soc. Jpn. 74, 1674 (2005): on a mesh, the
 * link U = det(u(k)^dagger u(k + dk)) / |det| of the occupied subspace and the plaquette field
 * F = arg(U_a(k) U_b(k + da) U_a(k + db)^-1 U_b(k)^-1) in (-pi, pi]. The sum of F over a closed
 * surface (the torus of a plane, a cube's boundary) is 2 pi times an integer for any mesh; it is
 * the Chern number once every |F| is well below pi, which is what the refinement checks.
 *
 * The vectors are in the lattice gauge of hk.h (u(k + G) = u(k)), so a plane's torus closes on
 * itself. The plaquette field differs from the one with orbital positions in the phase only by a
 * smooth term whose sum over a closed surface vanishes, so the integers are the same. */
#include "bandsieve/chern.h"

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
#include "bandsieve/result.h"
#include "occ.h"

/* A link whose |det| falls below this is a subspace rotated almost orthogonally in one step: its
 * phase means nothing and the mesh is refined (common practice; the next best overlaps at our
 * meshes are above 1e-2). */
#define CHERN_DET_MIN 1e-6

struct chern_ws {
    const tb_model *m;
    int norb, nband;
    occ_ws *occ;
    int cap;                 /* points per row the buffers hold */
    double complex *row[3];  /* cap x norb x nband each */
    double complex *link[4]; /* cap each: a-links of the first, previous, current row; b-links */
    double *k;               /* 3 cap */
    double *gap;             /* cap */
    double complex *M;       /* nband x nband */
    lapack_int *ipiv;        /* nband */
};

/* Running totals over one mesh. */
typedef struct sheet_acc {
    double sum_f, max_f, min_gap;
    double k_min_gap[3];
    int bad_links;
} sheet_acc;

void chern_opts_default(chern_opts *o, int surface)
{
    o->mesh = surface ? 6 : 24;
    o->max_mesh = 4 * o->mesh;
    /* pi/3: the principal value of F is the true flux while the flux per plaquette is below pi;
     * a third of that leaves room for the curvature varying within a plaquette (common practice). */
    o->fmax = 1.0;
    o->gap_tol_ev = BS_GAP_CLOSED_EV;
    o->deadline = 0;
}

int chern_create(const tb_model *m, int nband, chern_ws **out, bs_err *err)
{
    return chern_create_dist(m, nband, NULL, out, err);
}

int chern_create_dist(const tb_model *m, int nband, const eig_dist *dist, chern_ws **out, bs_err *err)
{
    return chern_create_shared(m, nband, dist, NULL, out, err);
}

int chern_create_shared(const tb_model *m, int nband, const eig_dist *dist, hk_engine *hk, chern_ws **out,
                        bs_err *err)
{
    *out = NULL;
    chern_ws *w = calloc(1, sizeof *w);
    if (!w) return bs_fail(err, BS_ENOMEM, "Chern workspace: out of memory");
    int rc = occ_create_shared(m, nband, dist, hk, &w->occ, err);
    if (rc != 0) goto done;
    w->m = m;
    w->norb = m->norb;
    w->nband = nband;
    w->M = malloc((size_t)nband * (size_t)nband * sizeof *w->M);
    w->ipiv = malloc((size_t)nband * sizeof *w->ipiv);
    if (!w->M || !w->ipiv) {
        rc = bs_fail(err, BS_ENOMEM, "Chern workspace for %d bands: out of memory", nband);
        goto done;
    }
    *out = w;
    w = NULL;
done:
    chern_free(w);
    return rc;
}

static void free_rows(chern_ws *w)
{
    for (int i = 0; i < 3; i++)
        free(w->row[i]), w->row[i] = NULL;
    for (int i = 0; i < 4; i++)
        free(w->link[i]), w->link[i] = NULL;
    free(w->k);
    free(w->gap);
    w->k = NULL;
    w->gap = NULL;
    w->cap = 0;
}

void chern_free(chern_ws *w)
{
    if (!w) return;
    free_rows(w);
    occ_free(w->occ);
    free(w->M);
    free(w->ipiv);
    free(w);
}

/* Makes the row buffers hold np points (once per mesh size, not per row). */
static int reserve(chern_ws *w, int np, bs_err *err)
{
    if (np <= w->cap) return 0;
    free_rows(w);
    size_t blk = (size_t)w->norb * (size_t)w->nband * (size_t)np;
    int ok = 1;
    for (int i = 0; i < 3; i++)
        ok &= (w->row[i] = malloc(blk * sizeof(double complex))) != NULL;
    for (int i = 0; i < 4; i++)
        ok &= (w->link[i] = malloc((size_t)np * sizeof(double complex))) != NULL;
    ok &= (w->k = malloc(3 * (size_t)np * sizeof *w->k)) != NULL;
    ok &= (w->gap = malloc((size_t)np * sizeof *w->gap)) != NULL;
    if (!ok) {
        free_rows(w);
        return bs_fail(err, BS_ENOMEM, "Chern mesh rows of %d points x %d x %d: out of memory", np, w->norb,
                       w->nband);
    }
    w->cap = np;
    return 0;
}

/* det(A^dagger B) / |det| for two norb x nband blocks; counts a nearly singular overlap. */
static double complex link(chern_ws *w, const double complex *A, const double complex *B, sheet_acc *acc)
{
    const double complex one = 1.0, zero = 0.0;
    int n = w->nband;
    cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, n, n, w->norb, &one, A, w->norb, B, w->norb,
                &zero, w->M, n);
    lapack_int info = LAPACKE_zgetrf(LAPACK_COL_MAJOR, n, n, w->M, n, w->ipiv);
    double complex det = 1.0;
    if (info >= 0)
        for (int i = 0; i < n; i++) {
            det *= w->M[i + (size_t)i * n];
            if (w->ipiv[i] != i + 1) det = -det;
        }
    double mag = cabs(det);
    if (info != 0 || !(mag > CHERN_DET_MIN)) {
        acc->bad_links++;
        return 1.0;
    }
    return det / mag;
}

/* States and a-links of one row of np points k = o + s da + t db, s = 0..np-1 (row t). */
static int eval_row(chern_ws *w, const double o[3], const double da[3], const double db[3], int t, int np,
                    int periodic, double complex *U, double complex *la, sheet_acc *acc, bs_err *err)
{
    for (int s = 0; s < np; s++)
        for (int i = 0; i < 3; i++)
            w->k[3 * s + i] = o[i] + s * da[i] + t * db[i];
    int rc = occ_states(w->occ, np, w->k, U, w->gap, err);
    if (rc != 0) return rc;
    for (int s = 0; s < np; s++)
        if (w->gap[s] < acc->min_gap) {
            acc->min_gap = w->gap[s];
            memcpy(acc->k_min_gap, w->k + 3 * s, sizeof acc->k_min_gap);
        }
    size_t blk = (size_t)w->norb * (size_t)w->nband;
    int nlink = periodic ? np : np - 1;
    for (int s = 0; s < nlink; s++)
        la[s] = link(w, U + s * blk, U + (size_t)((s + 1) % np) * blk, acc);
    return 0;
}

/* Sums F over the mesh spanned by da, db from o: np x np points. periodic: the mesh is a torus
 * (np plaquettes per direction, the last row and column linking back to the first); otherwise an
 * open square of np - 1 plaquettes per direction. */
static int sheet(chern_ws *w, const double o[3], const double da[3], const double db[3], int np, int periodic,
                 double deadline, sheet_acc *acc, bs_err *err)
{
    int rc = reserve(w, np, err);
    if (rc != 0) return rc;
    size_t blk = (size_t)w->norb * (size_t)w->nband;
    double complex *first = w->row[0], *prev = w->row[0], *cur = w->row[1];
    double complex *la_first = w->link[0], *la_prev = w->link[0], *la_cur = w->link[1];
    double complex *lb = w->link[3];
    rc = eval_row(w, o, da, db, 0, np, periodic, first, la_first, acc, err);
    if (rc != 0) return rc;
    int nrow = periodic ? np : np - 1, ncol = periodic ? np : np - 1;
    for (int t = 0; t < nrow; t++) {
        if (deadline > 0 && bs_now() > deadline)
            return bs_fail(err, BS_ETIMEOUT, "Chern mesh %d: time budget exceeded at row %d", np, t);
        if (t + 1 < np) {
            rc = eval_row(w, o, da, db, t + 1, np, periodic, cur, la_cur, acc, err);
            if (rc != 0) return rc;
        } else {
            cur = first;
            la_cur = la_first;
        }
        for (int s = 0; s < np; s++)
            lb[s] = link(w, prev + s * blk, cur + s * blk, acc);
        for (int s = 0; s < ncol; s++) {
            double complex p = la_prev[s] * lb[(s + 1) % np] * conj(la_cur[s]) * conj(lb[s]);
            double f = carg(p);
            acc->sum_f += f;
            if (fabs(f) > acc->max_f) acc->max_f = fabs(f);
        }
        /* Rotate: the current row becomes the previous one; the first row is never overwritten. */
        double complex *spare = (prev == first) ? w->row[2] : prev;
        double complex *lspare = (la_prev == la_first) ? w->link[2] : la_prev;
        prev = cur;
        la_prev = la_cur;
        cur = spare;
        la_cur = lspare;
    }
    return 0;
}

static void acc_init(sheet_acc *a)
{
    memset(a, 0, sizeof *a);
    a->min_gap = HUGE_VAL;
}

/* Turns totals into a value; returns 1 when the mesh should be refined. */
static int judge(const sheet_acc *a, double sign, const chern_opts *o, int mesh, long long nk, chern_value *v)
{
    memset(v, 0, sizeof *v);
    /* U = <u(k)|u(k+dk)> ~ exp(-i A.dk) with A = i<u|grad u>, so the plaquette phase is -Omega dS:
     * the minus sign gives the flux of Omega = curl A (Rev. Mod. Phys. 82, 1959 (2010)). */
    v->flux = -sign * a->sum_f / (2 * M_PI);
    v->chern = (int)lround(v->flux);
    v->max_f = a->max_f;
    v->min_gap_ev = a->min_gap;
    memcpy(v->k_min_gap, a->k_min_gap, sizeof v->k_min_gap);
    v->mesh = mesh;
    v->nk = nk;
    if (a->min_gap < o->gap_tol_ev) {
        v->gap_closed = 1;
        v->status = RES_AMBIGUOUS;
        snprintf(v->reason, sizeof v->reason,
                 "direct gap %.2e eV below %.1e eV at k = (%.4f, %.4f, %.4f): bands touch", a->min_gap,
                 o->gap_tol_ev, a->k_min_gap[0], a->k_min_gap[1], a->k_min_gap[2]);
        return 0;
    }
    if (a->bad_links == 0 && a->max_f <= o->fmax) {
        v->status = RES_DONE;
        return 0;
    }
    v->status = RES_AMBIGUOUS;
    if (a->bad_links)
        snprintf(v->reason, sizeof v->reason, "%d nearly orthogonal link overlaps at mesh %d", a->bad_links,
                 mesh);
    else
        snprintf(v->reason, sizeof v->reason, "max |F| %.2f rad above %.2f at mesh %d", a->max_f, o->fmax,
                 mesh);
    return 2 * mesh <= o->max_mesh;
}

static int check_opts(const chern_opts *o, bs_err *err)
{
    if (o->mesh < 2 || o->max_mesh < o->mesh || !(o->fmax > 0 && o->fmax < M_PI) || !(o->gap_tol_ev >= 0))
        return bs_fail(err, BS_EINVAL,
                       "Chern options: expected mesh >= 2, max_mesh >= mesh, 0 < fmax < pi, "
                       "gap_tol >= 0; found %d, %d, %g, %g",
                       o->mesh, o->max_mesh, o->fmax, o->gap_tol_ev);
    return 0;
}

int chern_plane(chern_ws *w, int p, const chern_opts *o, chern_value *out, bs_err *err)
{
    chern_opts def;
    if (!o) {
        chern_opts_default(&def, 0);
        o = &def;
    }
    memset(out, 0, sizeof *out);
    int rc = check_opts(o, err);
    if (rc != 0) return rc;
    if (p < 0 || p > 5 || (w->m->dim == 2 && p != 4))
        return bs_fail(err, BS_EINVAL, "Chern plane: expected 0..5 (4 only in 2D), found %d", p);
    int i = p / 2, a = (i + 1) % 3, b = (i + 2) % 3;
    /* Orientation e_a x e_b = e_i in reduced coordinates; times the lattice's handedness this is
     * the flux along +b_i with the right-hand rule in Cartesian space. */
    double sign = occ_handedness(w->m);
    for (int n = o->mesh;; n *= 2) {
        double org[3] = {0, 0, 0}, da[3] = {0, 0, 0}, db[3] = {0, 0, 0};
        org[i] = 0.5 * (p % 2);
        da[a] = 1.0 / n;
        db[b] = 1.0 / n;
        sheet_acc acc;
        acc_init(&acc);
        long long nk0 = occ_count(w->occ);
        rc = sheet(w, org, da, db, n, 1, o->deadline, &acc, err);
        if (rc != 0) return rc;
        long long nk = out->nk + occ_count(w->occ) - nk0;
        if (!judge(&acc, sign, o, n, nk, out)) break;
    }
    return 0;
}

int chern_surface_flux(chern_ws *w, const double k0[3], double h, const chern_opts *o, chern_value *out,
                       bs_err *err)
{
    chern_opts def;
    if (!o) {
        chern_opts_default(&def, 1);
        o = &def;
    }
    memset(out, 0, sizeof *out);
    int rc = check_opts(o, err);
    if (rc != 0) return rc;
    if (w->m->dim != 3)
        return bs_fail(err, BS_EINVAL, "Chern flux through a cube: expected a 3D model, found %dD",
                       w->m->dim);
    if (!(h > 0 && h <= 0.25) || !isfinite(k0[0]) || !isfinite(k0[1]) || !isfinite(k0[2]))
        return bs_fail(err, BS_EINVAL, "Chern flux: expected 0 < h <= 0.25 and a finite k0, found h = %g", h);
    double hand = occ_handedness(w->m);
    for (int n = o->mesh;; n *= 2) {
        sheet_acc acc;
        acc_init(&acc);
        long long nk0 = occ_count(w->occ);
        double total = 0;
        /* Face of normal +-e_a, parametrised along (e_b, e_c) with e_b x e_c = e_a: the plaquette
         * loops are positive about +e_a, so the -e_a face's field enters with a minus sign. */
        for (int a = 0; a < 3; a++)
            for (int sg = -1; sg <= 1; sg += 2) {
                int b = (a + 1) % 3, c = (a + 2) % 3;
                double org[3], db[3] = {0, 0, 0}, dc[3] = {0, 0, 0};
                memcpy(org, k0, sizeof org);
                org[a] += sg * h;
                org[b] -= h;
                org[c] -= h;
                db[b] = 2 * h / n;
                dc[c] = 2 * h / n;
                double before = acc.sum_f;
                rc = sheet(w, org, db, dc, n + 1, 0, o->deadline, &acc, err);
                if (rc != 0) return rc;
                total += sg * (acc.sum_f - before);
            }
        acc.sum_f = total;
        long long nk = out->nk + occ_count(w->occ) - nk0;
        if (!judge(&acc, hand, o, n, nk, out)) break;
    }
    return 0;
}
