/* Hermitian eigensolvers (LAPACK zheevd / zheevr) with workspaces sized once by a query. */
#include "bandsieve/eig.h"

#include <lapacke.h>
#include <stdlib.h>

struct eig_ws {
    int n;
    lapack_complex_double *work;
    double *rwork;
    lapack_int *iwork;
    lapack_int *isuppz;
    double *wtmp;         /* n values for zheevr, which may write past the requested range */
    const eig_dist *dist; /* distributed solver for this size, or NULL */
    lapack_int lwork, lrwork, liwork;
};

static int grow(eig_ws *w, lapack_int lwork, lapack_int lrwork, lapack_int liwork)
{
    if (lwork > w->lwork) {
        void *p = realloc(w->work, (size_t)lwork * sizeof *w->work);
        if (!p) return -1;
        w->work = p;
        w->lwork = lwork;
    }
    if (lrwork > w->lrwork) {
        void *p = realloc(w->rwork, (size_t)lrwork * sizeof *w->rwork);
        if (!p) return -1;
        w->rwork = p;
        w->lrwork = lrwork;
    }
    if (liwork > w->liwork) {
        void *p = realloc(w->iwork, (size_t)liwork * sizeof *w->iwork);
        if (!p) return -1;
        w->iwork = p;
        w->liwork = liwork;
    }
    return 0;
}

int eig_create(int n, eig_ws **out, bs_err *err)
{
    *out = NULL;
    if (n < 1) return bs_fail(err, BS_EINVAL, "eigensolver size %d must be positive", n);
    eig_ws *w = calloc(1, sizeof *w);
    if (!w) return bs_fail(err, BS_ENOMEM, "out of memory for an eigensolver workspace");
    w->n = n;
    w->isuppz = malloc(2 * (size_t)n * sizeof *w->isuppz);
    w->wtmp = malloc((size_t)n * sizeof *w->wtmp);
    double *wq = malloc((size_t)n * sizeof *wq);
    lapack_complex_double *a = calloc((size_t)n * n, sizeof *a);
    lapack_complex_double *z = calloc((size_t)n * n, sizeof *z);
    int rc = 0;
    if (!w->isuppz || !w->wtmp || !wq || !a || !z) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory for an eigensolver workspace (n = %d)", n);
        goto done;
    }
    /* Workspace queries: zheevd with vectors needs the most; zheevr for ranges. */
    lapack_complex_double qw;
    double qr;
    lapack_int qi, m;
    lapack_int info = LAPACKE_zheevd_work(LAPACK_COL_MAJOR, 'V', 'U', n, a, n, wq, &qw, -1, &qr, -1, &qi, -1);
    if (info != 0) {
        rc = bs_fail(err, BS_ENUMERIC, "zheevd workspace query failed (info %d)", (int)info);
        goto done;
    }
    if (grow(w, (lapack_int)creal(qw) + 1, (lapack_int)qr + 1, qi + 1)) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory");
        goto done;
    }
    info = LAPACKE_zheevr_work(LAPACK_COL_MAJOR, 'V', 'I', 'U', n, a, n, 0, 0, 1, n, 0.0, &m, wq, z, n,
                               w->isuppz, &qw, -1, &qr, -1, &qi, -1);
    if (info != 0) {
        rc = bs_fail(err, BS_ENUMERIC, "zheevr workspace query failed (info %d)", (int)info);
        goto done;
    }
    if (grow(w, (lapack_int)creal(qw) + 1, (lapack_int)qr + 1, qi + 1)) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory");
        goto done;
    }
done:
    free(wq);
    free(a);
    free(z);
    if (rc != 0)
        eig_free(w);
    else
        *out = w;
    return rc;
}

int eig_create_dist(int n, const eig_dist *dist, eig_ws **out, bs_err *err)
{
    int rc = eig_create(n, out, err);
    if (rc == 0 && dist && n >= dist->min_n) (*out)->dist = dist;
    return rc;
}

void eig_free(eig_ws *w)
{
    if (!w) return;
    free(w->work);
    free(w->rwork);
    free(w->iwork);
    free(w->isuppz);
    free(w->wtmp);
    free(w);
}

static int solve_all(eig_ws *ws, char jobz, double complex *A, double *w, bs_err *err)
{
    int n = ws->n;
    lapack_int info = LAPACKE_zheevd_work(LAPACK_COL_MAJOR, jobz, 'U', n, A, n, w, ws->work, ws->lwork,
                                          ws->rwork, ws->lrwork, ws->iwork, ws->liwork);
    if (info != 0) return bs_fail(err, BS_ENUMERIC, "zheevd failed for n = %d (info %d)", n, (int)info);
    return 0;
}

int eig_values(eig_ws *ws, double complex *A, double *w, bs_err *err)
{
    if (ws->dist) return ws->dist->values(ws->dist->ctx, ws->n, A, w, err);
    return solve_all(ws, 'N', A, w, err);
}

int eig_vectors(eig_ws *ws, double complex *A, double *w, bs_err *err)
{
    if (ws->dist) return ws->dist->vectors(ws->dist->ctx, ws->n, A, w, err);
    return solve_all(ws, 'V', A, w, err);
}

int eig_range(eig_ws *ws, double complex *A, int il, int iu, double *w, double complex *Z, bs_err *err)
{
    int n = ws->n;
    if (il < 0 || iu >= n || il > iu)
        return bs_fail(err, BS_EINVAL, "eigenvalue range %d..%d outside 0..%d", il, iu, n - 1);
    if (ws->dist) return ws->dist->range(ws->dist->ctx, n, A, il, iu, w, Z, err);
    lapack_int m = 0;
    lapack_complex_double dummy;
    double *wt = ws->wtmp;
    lapack_int info = LAPACKE_zheevr_work(LAPACK_COL_MAJOR, Z ? 'V' : 'N', 'I', 'U', n, A, n, 0.0, 0.0,
                                          il + 1, iu + 1, 0.0, &m, wt, Z ? Z : &dummy, n, ws->isuppz,
                                          ws->work, ws->lwork, ws->rwork, ws->lrwork, ws->iwork, ws->liwork);
    int rc = 0;
    if (info != 0 || m != iu - il + 1)
        rc = bs_fail(err, BS_ENUMERIC, "zheevr failed for n = %d, range %d..%d (info %d, %d found)", n, il,
                     iu, (int)info, (int)m);
    else
        for (int i = 0; i < m; i++)
            w[i] = wt[i];
    return rc;
}
