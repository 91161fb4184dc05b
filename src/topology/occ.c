/* Occupied Bloch vectors on batches of k-points: one H(k) build per batch (from partial sums when
 * the batch lies on a line, hk_lines_build), then a partial Hermitian
 * eigensolve (eigenvalues and vectors 0..nband) per k-point. */
#include "occ.h"

#include <stdlib.h>
#include <string.h>

#include "bandsieve/eig.h"
#include "bandsieve/hk.h"

/* Batch size: large enough that the DGEMM of hk_build runs at BLAS speed, small enough that the
 * batch of full matrices stays modest (64 matrices of 200 x 200 are 40 MB). */
enum { OCC_BATCH_ELEMENTS = 64 * 200 * 200, OCC_MAX_BATCH = 64 };

struct occ_ws {
    int norb, nband, batch;
    hk_engine *hk;
    hk_engine *own_hk; /* hk when built here, NULL when borrowed */
    hk_lines *lines;   /* partial sums for batches along strings and mesh rows */
    eig_ws *eig;
    double complex *H; /* batch x norb x norb */
    double complex *Z; /* norb x (nband + 1) */
    double *w;         /* norb eigenvalues */
    int partial;       /* compute vectors 0..nband only (zheevr) rather than all (zheevd) */
    long long count;
};

int occ_create(const tb_model *m, int nband, const eig_dist *dist, occ_ws **out, bs_err *err)
{
    return occ_create_shared(m, nband, dist, NULL, out, err);
}

int occ_create_shared(const tb_model *m, int nband, const eig_dist *dist, hk_engine *hk, occ_ws **out,
                      bs_err *err)
{
    *out = NULL;
    if (nband < 1 || nband >= m->norb)
        return bs_fail(err, BS_EINVAL, "occupied bands: expected 1..%d, found %d", m->norb - 1, nband);
    occ_ws *w = calloc(1, sizeof *w);
    if (!w) return bs_fail(err, BS_ENOMEM, "occupied-state workspace: out of memory");
    int rc = 0;
    w->norb = m->norb;
    w->nband = nband;
    long long per = (long long)m->norb * m->norb;
    long long b = OCC_BATCH_ELEMENTS / per;
    w->batch = b < 1 ? 1 : (b > OCC_MAX_BATCH ? OCC_MAX_BATCH : (int)b);
    if (hk && hk_norb(hk) == m->norb) {
        w->hk = hk;
        if (w->batch > hk_max_batch(hk)) w->batch = hk_max_batch(hk);
    } else {
        rc = hk_create(m, w->batch, &w->own_hk, err);
        w->hk = w->own_hk;
    }
    if (rc != 0) goto done;
    rc = hk_lines_create(w->hk, &w->lines, err);
    if (rc != 0) goto done;
    rc = eig_create_dist(m->norb, dist, &w->eig, err);
    if (rc != 0) goto done;
    w->H = malloc((size_t)w->batch * (size_t)per * sizeof *w->H);
    w->Z = malloc((size_t)m->norb * (size_t)(nband + 1) * sizeof *w->Z);
    w->w = malloc((size_t)m->norb * sizeof *w->w);
    /* Measured with OpenBLAS on one core: zheevr for half of the vectors costs 1.3 to 1.5 times
     * zheevd for all of them (n = 20..120); zheevr only pays off for a small fraction. */
    w->partial = 4 * (nband + 1) <= m->norb;
    if (!w->H || !w->Z || !w->w) {
        rc = bs_fail(err, BS_ENOMEM, "occupied-state workspace for norb %d: out of memory", m->norb);
        goto done;
    }
    *out = w;
    w = NULL;
done:
    occ_free(w);
    return rc;
}

void occ_free(occ_ws *w)
{
    if (!w) return;
    hk_lines_free(w->lines);
    hk_free(w->own_hk);
    eig_free(w->eig);
    free(w->H);
    free(w->Z);
    free(w->w);
    free(w);
}

long long occ_count(const occ_ws *w)
{
    return w->count;
}
int occ_batch(const occ_ws *w)
{
    return w->batch;
}

int occ_states(occ_ws *w, int nk, const double *k, double complex *U, double *gap, bs_err *err)
{
    size_t per = (size_t)w->norb * (size_t)w->norb;
    size_t ublk = (size_t)w->norb * (size_t)w->nband;
    for (int j0 = 0; j0 < nk; j0 += w->batch) {
        int nb = nk - j0 < w->batch ? nk - j0 : w->batch;
        int rc = hk_lines_build(w->lines, nb, k + 3 * (size_t)j0, w->H, err);
        if (rc != 0) return rc;
        for (int j = 0; j < nb; j++) {
            double complex *A = w->H + (size_t)j * per;
            if (w->partial) {
                /* Vectors 0..nband: the extra one only for its eigenvalue (the gap). */
                rc = eig_range(w->eig, A, 0, w->nband, w->w, w->Z, err);
                if (rc != 0) return rc;
                memcpy(U + (size_t)(j0 + j) * ublk, w->Z, ublk * sizeof *U);
            } else {
                rc = eig_vectors(w->eig, A, w->w, err);
                if (rc != 0) return rc;
                memcpy(U + (size_t)(j0 + j) * ublk, A, ublk * sizeof *U);
            }
            if (gap) gap[j0 + j] = w->w[w->nband] - w->w[w->nband - 1];
        }
        w->count += nb;
    }
    return 0;
}

int occ_handedness(const tb_model *m)
{
    const double(*a)[3] = m->lattice;
    double det = a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1]) -
                 a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0]) +
                 a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]);
    return det < 0 ? -1 : 1;
}
