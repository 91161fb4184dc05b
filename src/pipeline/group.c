/* The distributed solver of a rank group (see group.h): eig.h callbacks over a ScaLAPACK context
 * that is rebuilt when the matrix size changes. Every call is collective on the group, which holds
 * because all members run the same diagnosis on the same material in the same order. */
#include "group.h"

#include <stdlib.h>

#include "bandsieve/pzheev.h"

struct pl_group {
    MPI_Comm comm;
    pz_ctx *pz;
    int n;
    eig_dist dist;
};

static int ensure(pl_group *g, int n, bs_err *err)
{
    if (g->pz && g->n == n) return 0;
    pz_free(g->pz);
    g->pz = NULL;
    g->n = n;
    return pz_create(g->comm, n, 0, &g->pz, err);
}

/* Members must take identical branches afterwards: ranks of a ScaLAPACK solve can differ in the
 * last bits of their copies, so group rank 0's results are broadcast to all. */
static int share(pl_group *g, double *w, int nw, double complex *Z, long long nz, bs_err *err)
{
    if (MPI_Bcast(w, nw, MPI_DOUBLE, 0, g->comm) != MPI_SUCCESS)
        return bs_fail(err, BS_EMPI, "group: broadcast of eigenvalues failed");
    if (Z && nz > 0) {
        if (nz > 2147483647LL)
            return bs_fail(err, BS_EMPI, "group: %lld eigenvector elements exceed one message", nz);
        if (MPI_Bcast(Z, (int)nz, MPI_C_DOUBLE_COMPLEX, 0, g->comm) != MPI_SUCCESS)
            return bs_fail(err, BS_EMPI, "group: broadcast of eigenvectors failed");
    }
    return 0;
}

static int g_values(void *ctx, int n, double complex *A, double *w, bs_err *err)
{
    pl_group *g = ctx;
    int rc = ensure(g, n, err);
    if (rc == 0) rc = pz_values(g->pz, PZ_ALL, A, w, err);
    return rc ? rc : share(g, w, n, NULL, 0, err);
}

static int g_vectors(void *ctx, int n, double complex *A, double *w, bs_err *err)
{
    pl_group *g = ctx;
    int rc = ensure(g, n, err);
    if (rc == 0) rc = pz_vectors(g->pz, PZ_ALL, A, w, A, err);
    return rc ? rc : share(g, w, n, A, (long long)n * n, err);
}

static int g_range(void *ctx, int n, double complex *A, int il, int iu, double *w, double complex *Z,
                   bs_err *err)
{
    pl_group *g = ctx;
    int rc = ensure(g, n, err);
    if (rc == 0) rc = pz_range(g->pz, PZ_ALL, A, il, iu, w, Z, err);
    return rc ? rc : share(g, w, iu - il + 1, Z, Z ? (long long)n * (iu - il + 1) : 0, err);
}

int pl_group_create(MPI_Comm comm, int min_n, pl_group **out, bs_err *err)
{
    *out = NULL;
    pl_group *g = calloc(1, sizeof *g);
    if (!g) return bs_fail(err, BS_ENOMEM, "out of memory for a rank group");
    g->comm = comm;
    g->dist.min_n = min_n > 0 ? min_n : PZ_DEFAULT_THRESHOLD;
    g->dist.ctx = g;
    g->dist.values = g_values;
    g->dist.vectors = g_vectors;
    g->dist.range = g_range;
    *out = g;
    return 0;
}

void pl_group_free(pl_group *g)
{
    if (!g) return;
    pz_free(g->pz);
    free(g);
}

const eig_dist *pl_group_solver(pl_group *g)
{
    return &g->dist;
}
