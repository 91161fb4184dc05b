/* ScaLAPACK Hermitian eigensolver wrapper: a BLACS grid over a caller's communicator, 2D
 * block-cyclic distribution of a full matrix, pzheevr / pzheevd, and the LAPACK dispatcher. */
#include "bandsieve/pzheev.h"

#include <limits.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/eig.h"

/* The C BLACS interface and the Fortran ScaLAPACK routines of libscalapack-openmpi have no
 * public header; these are their documented signatures. Fortran CHARACTER arguments carry a
 * hidden length (size_t with gfortran), appended after the last argument. */
int Csys2blacs_handle(MPI_Comm comm);
void Cfree_blacs_system_handle(int handle);
void Cblacs_gridinit(int *ctxt, const char *order, int nprow, int npcol);
void Cblacs_gridinfo(int ctxt, int *nprow, int *npcol, int *myrow, int *mycol);
void Cblacs_gridexit(int ctxt);
int numroc_(const int *n, const int *nb, const int *iproc, const int *isrcproc, const int *nprocs);
void descinit_(int *desc, const int *m, const int *n, const int *mb, const int *nb, const int *irsrc,
               const int *icsrc, const int *ictxt, const int *lld, int *info);
void pzheevd_(const char *jobz, const char *uplo, const int *n, double complex *a, const int *ia,
              const int *ja, const int *desca, double *w, double complex *z, const int *iz, const int *jz,
              const int *descz, double complex *work, const int *lwork, double *rwork, const int *lrwork,
              int *iwork, const int *liwork, int *info, size_t ljobz, size_t luplo);
void pzheevr_(const char *jobz, const char *range, const char *uplo, const int *n, double complex *a,
              const int *ia, const int *ja, const int *desca, const double *vl, const double *vu,
              const int *il, const int *iu, int *m, int *nz, double *w, double complex *z, const int *iz,
              const int *jz, const int *descz, double complex *work, const int *lwork, double *rwork,
              const int *lrwork, int *iwork, const int *liwork, int *info, size_t ljobz, size_t lrange,
              size_t luplo);

struct pz_ctx {
    MPI_Comm comm;
    int rank, size;
    int handle, ctxt; /* BLACS system handle and grid context */
    int nprow, npcol, myrow, mycol;
    int n, nb, mloc, nloc, lld;
    int desc[9];
    double complex *aloc, *zloc; /* local pieces, mloc x nloc */
    double complex *full;        /* n x n: the broadcast matrix, then gathered vectors */
    double *w;                   /* n */
    double complex *work;
    double *rwork;
    int *iwork;
    int lwork, lrwork, liwork;
};

/* Every rank learns the first error (the most negative code): collective on c->comm. */
static int agree(MPI_Comm comm, int rc, bs_err *err)
{
    int all = rc;
    if (MPI_Allreduce(&rc, &all, 1, MPI_INT, MPI_MIN, comm) != MPI_SUCCESS)
        return bs_fail(err, BS_EMPI, "MPI_Allreduce failed while checking for errors");
    if (all != 0 && rc == 0) return bs_fail(err, all, "distributed eigensolver failed on another rank");
    return all;
}

static int fits_int(size_t v)
{
    return v <= (size_t)INT_MAX;
}

static int query(pz_ctx *c, bs_err *err)
{
    int one = 1, n = c->n, info = 0, m = 0, nz = 0, lm1 = -1;
    double complex qw = 0;
    double qr = 0, vl = 0, vu = 0;
    int qi = 0;
    pzheevd_("V", "U", &n, c->aloc, &one, &one, c->desc, c->w, c->zloc, &one, &one, c->desc, &qw, &lm1, &qr,
             &lm1, &qi, &lm1, &info, 1, 1);
    if (info != 0) return bs_fail(err, BS_ENUMERIC, "pzheevd workspace query failed (info %d)", info);
    double lw = creal(qw), lr = qr;
    int li = qi;
    pzheevr_("V", "I", "U", &n, c->aloc, &one, &one, c->desc, &vl, &vu, &one, &n, &m, &nz, c->w, c->zloc,
             &one, &one, c->desc, &qw, &lm1, &qr, &lm1, &qi, &lm1, &info, 1, 1, 1);
    if (info != 0) return bs_fail(err, BS_ENUMERIC, "pzheevr workspace query failed (info %d)", info);
    /* pzheevr's query is known to come out short on some grids (common practice: pad it). */
    lw = fmax(lw, creal(qw)) * 1.5 + 1024;
    lr = fmax(lr, qr) * 1.5 + 1024;
    li = (li > qi ? li : qi) * 3 / 2 + 1024;
    if (lw > INT_MAX || lr > INT_MAX)
        return bs_fail(err, BS_EINVAL, "ScaLAPACK workspace for n = %d exceeds int", n);
    c->lwork = (int)lw;
    c->lrwork = (int)lr;
    c->liwork = li;
    c->work = malloc((size_t)c->lwork * sizeof *c->work);
    c->rwork = malloc((size_t)c->lrwork * sizeof *c->rwork);
    c->iwork = malloc((size_t)c->liwork * sizeof *c->iwork);
    if (!c->work || !c->rwork || !c->iwork)
        return bs_fail(err, BS_ENOMEM, "out of memory for ScaLAPACK workspace");
    return 0;
}

static int grid_setup(pz_ctx *c, bs_err *err)
{
    int pr = 1;
    for (int d = 1; d * d <= c->size; d++)
        if (c->size % d == 0) pr = d;
    c->handle = Csys2blacs_handle(c->comm);
    c->ctxt = c->handle;
    Cblacs_gridinit(&c->ctxt, "R", pr, c->size / pr);
    Cblacs_gridinfo(c->ctxt, &c->nprow, &c->npcol, &c->myrow, &c->mycol);
    if (c->myrow < 0 || c->nprow * c->npcol != c->size)
        return bs_fail(err, BS_EMPI, "BLACS grid %d x %d over %d ranks: this rank is not in it", pr,
                       c->size / pr, c->size);
    int zero = 0, info = 0;
    c->mloc = numroc_(&c->n, &c->nb, &c->myrow, &zero, &c->nprow);
    c->nloc = numroc_(&c->n, &c->nb, &c->mycol, &zero, &c->npcol);
    c->lld = c->mloc > 1 ? c->mloc : 1;
    descinit_(c->desc, &c->n, &c->n, &c->nb, &c->nb, &zero, &zero, &c->ctxt, &c->lld, &info);
    if (info != 0)
        return bs_fail(err, BS_EINVAL, "descinit failed for n = %d, nb = %d (info %d)", c->n, c->nb, info);
    return 0;
}

int pz_create(MPI_Comm comm, int n, int nb, pz_ctx **out, bs_err *err)
{
    *out = NULL;
    if (n < 1) return bs_fail(err, BS_EINVAL, "distributed eigensolver size %d must be positive", n);
    if (!fits_int((size_t)n * n))
        return bs_fail(err, BS_EINVAL, "distributed eigensolver: n = %d too large for MPI counts", n);
    pz_ctx *c = calloc(1, sizeof *c);
    if (!c) return bs_fail(err, BS_ENOMEM, "out of memory for the distributed eigensolver");
    c->ctxt = -1;
    c->handle = -1;
    int rc = 0;
    if (MPI_Comm_dup(comm, &c->comm) != MPI_SUCCESS) {
        free(c);
        return bs_fail(err, BS_EMPI, "MPI_Comm_dup failed");
    }
    MPI_Comm_rank(c->comm, &c->rank);
    MPI_Comm_size(c->comm, &c->size);
    c->n = n;
    c->nb = nb > 0 ? nb : 32; /* 32 beat 64 at n = 2000 on 2 ranks (bench_pzheev: 2.9 s against 4.3 s) */
    if (c->nb > n) c->nb = n;
    rc = grid_setup(c, err);
    if (rc == 0) {
        size_t loc = (size_t)c->lld * (c->nloc > 1 ? c->nloc : 1);
        c->aloc = malloc(loc * sizeof *c->aloc);
        c->zloc = malloc(loc * sizeof *c->zloc);
        c->full = malloc((size_t)n * n * sizeof *c->full);
        c->w = malloc((size_t)n * sizeof *c->w);
        if (!c->aloc || !c->zloc || !c->full || !c->w)
            rc = bs_fail(err, BS_ENOMEM, "out of memory for the distributed eigensolver (n = %d)", n);
    }
    rc = agree(c->comm, rc, err);
    if (rc == 0) rc = agree(c->comm, query(c, err), err);
    if (rc != 0)
        pz_free(c);
    else
        *out = c;
    return rc;
}

void pz_free(pz_ctx *c)
{
    if (!c) return;
    if (c->ctxt >= 0 && c->myrow >= 0) Cblacs_gridexit(c->ctxt);
    if (c->handle >= 0) Cfree_blacs_system_handle(c->handle);
    free(c->aloc);
    free(c->zloc);
    free(c->full);
    free(c->w);
    free(c->work);
    free(c->rwork);
    free(c->iwork);
    MPI_Comm_free(&c->comm);
    free(c);
}

void pz_grid(const pz_ctx *c, int *nprow, int *npcol)
{
    *nprow = c->nprow;
    *npcol = c->npcol;
}

/* Global index of local index l in a dimension with nb blocks cycled over np processes. */
static int global_index(int l, int nb, int p, int np)
{
    return ((l / nb) * np + p) * nb + l % nb;
}

/* Copies this rank's block-cyclic pieces of the full matrix (A on root, or on all) into aloc. */
static int distribute(pz_ctx *c, int root, const double complex *A, bs_err *err)
{
    const double complex *src = A;
    size_t nn = (size_t)c->n * c->n;
    if (root != PZ_ALL) {
        if (root < 0 || root >= c->size)
            return bs_fail(err, BS_EINVAL, "root rank %d outside 0..%d", root, c->size - 1);
        if (c->rank == root) memcpy(c->full, A, nn * sizeof *c->full);
        if (MPI_Bcast(c->full, (int)nn, MPI_C_DOUBLE_COMPLEX, root, c->comm) != MPI_SUCCESS)
            return bs_fail(err, BS_EMPI, "MPI_Bcast of the %d x %d matrix failed", c->n, c->n);
        src = c->full;
    }
    for (int lj = 0; lj < c->nloc; lj++) {
        size_t gj = (size_t)global_index(lj, c->nb, c->mycol, c->npcol);
        for (int li = 0; li < c->mloc; li++) {
            int gi = global_index(li, c->nb, c->myrow, c->nprow);
            c->aloc[li + (size_t)lj * c->lld] = src[gi + gj * c->n];
        }
    }
    return 0;
}

/* Assembles ncol distributed eigenvector columns into Z (n x ncol) on root or on every rank. */
static int gather(pz_ctx *c, int root, int ncol, double complex *Z, bs_err *err)
{
    size_t total = (size_t)c->n * ncol;
    memset(c->full, 0, total * sizeof *c->full);
    for (int lj = 0; lj < c->nloc; lj++) {
        int gj = global_index(lj, c->nb, c->mycol, c->npcol);
        if (gj >= ncol) continue;
        for (int li = 0; li < c->mloc; li++) {
            int gi = global_index(li, c->nb, c->myrow, c->nprow);
            c->full[gi + (size_t)gj * c->n] = c->zloc[li + (size_t)lj * c->lld];
        }
    }
    int mrc;
    if (root == PZ_ALL)
        mrc = MPI_Allreduce(c->full, Z, (int)total, MPI_C_DOUBLE_COMPLEX, MPI_SUM, c->comm);
    else
        mrc = MPI_Reduce(c->full, c->rank == root ? Z : NULL, (int)total, MPI_C_DOUBLE_COMPLEX, MPI_SUM, root,
                         c->comm);
    if (mrc != MPI_SUCCESS) return bs_fail(err, BS_EMPI, "MPI reduction of the eigenvectors failed");
    return 0;
}

/* pzheevr over index range il..iu (1-based) with or without vectors; eigenvalues into c->w. */
static int run_evr(pz_ctx *c, int want_z, int il1, int iu1, bs_err *err)
{
    int one = 1, m = 0, nz = 0, info = 0;
    double vl = 0, vu = 0;
    pzheevr_(want_z ? "V" : "N", "I", "U", &c->n, c->aloc, &one, &one, c->desc, &vl, &vu, &il1, &iu1, &m, &nz,
             c->w, c->zloc, &one, &one, c->desc, c->work, &c->lwork, c->rwork, &c->lrwork, c->iwork,
             &c->liwork, &info, 1, 1, 1);
    if (info != 0 || m != iu1 - il1 + 1 || (want_z && nz != m))
        return bs_fail(err, BS_ENUMERIC,
                       "pzheevr failed for n = %d, range %d..%d (info %d, %d values, %d vectors)", c->n,
                       il1 - 1, iu1 - 1, info, m, nz);
    return 0;
}

int pz_values(pz_ctx *c, int root, const double complex *A, double *w, bs_err *err)
{
    int rc = agree(c->comm, distribute(c, root, A, err), err);
    if (rc == 0) rc = agree(c->comm, run_evr(c, 0, 1, c->n, err), err);
    if (rc == 0) memcpy(w, c->w, (size_t)c->n * sizeof *w);
    return rc;
}

int pz_vectors(pz_ctx *c, int root, const double complex *A, double *w, double complex *Z, bs_err *err)
{
    int rc = agree(c->comm, distribute(c, root, A, err), err);
    if (rc == 0) {
        int one = 1, info = 0;
        pzheevd_("V", "U", &c->n, c->aloc, &one, &one, c->desc, c->w, c->zloc, &one, &one, c->desc, c->work,
                 &c->lwork, c->rwork, &c->lrwork, c->iwork, &c->liwork, &info, 1, 1);
        int lrc =
            info != 0 ? bs_fail(err, BS_ENUMERIC, "pzheevd failed for n = %d (info %d)", c->n, info) : 0;
        rc = agree(c->comm, lrc, err);
    }
    if (rc == 0) rc = agree(c->comm, gather(c, root, c->n, Z, err), err);
    if (rc == 0) memcpy(w, c->w, (size_t)c->n * sizeof *w);
    return rc;
}

int pz_range(pz_ctx *c, int root, const double complex *A, int il, int iu, double *w, double complex *Z,
             bs_err *err)
{
    if (il < 0 || iu >= c->n || il > iu)
        return bs_fail(err, BS_EINVAL, "eigenvalue range %d..%d outside 0..%d", il, iu, c->n - 1);
    int rc = agree(c->comm, distribute(c, root, A, err), err);
    if (rc == 0) rc = agree(c->comm, run_evr(c, Z != NULL, il + 1, iu + 1, err), err);
    if (rc == 0 && Z) rc = agree(c->comm, gather(c, root, iu - il + 1, Z, err), err);
    if (rc == 0) memcpy(w, c->w, (size_t)(iu - il + 1) * sizeof *w);
    return rc;
}

struct pz_auto {
    MPI_Comm comm;
    int rank, n;
    pz_ctx *pz;           /* distributed path */
    eig_ws *ws;           /* LAPACK path */
    double complex *copy; /* LAPACK destroys its input; A is const in this contract */
};

int pz_auto_create(MPI_Comm comm, int n, int threshold, pz_auto **out, bs_err *err)
{
    *out = NULL;
    int size = 1;
    MPI_Comm_size(comm, &size);
    pz_auto *a = calloc(1, sizeof *a);
    int rc = a ? 0 : bs_fail(err, BS_ENOMEM, "out of memory for the eigensolver dispatcher");
    if (rc == 0) {
        a->comm = comm;
        a->n = n;
        MPI_Comm_rank(comm, &a->rank);
        if (threshold <= 0) threshold = PZ_DEFAULT_THRESHOLD;
        if (size > 1 && n >= threshold) {
            rc = pz_create(comm, n, 0, &a->pz, err);
        } else {
            rc = eig_create(n, &a->ws, err);
            if (rc == 0 && !(a->copy = malloc((size_t)n * n * sizeof *a->copy)))
                rc = bs_fail(err, BS_ENOMEM, "out of memory for the eigensolver dispatcher (n = %d)", n);
            rc = agree(comm, rc, err);
        }
    }
    if (rc != 0)
        pz_auto_free(a);
    else
        *out = a;
    return rc;
}

void pz_auto_free(pz_auto *a)
{
    if (!a) return;
    pz_free(a->pz);
    eig_free(a->ws);
    free(a->copy);
    free(a);
}

int pz_auto_distributed(const pz_auto *a)
{
    return a->pz != NULL;
}

/* The LAPACK path: root (or every rank) solves; the eigenvalues are broadcast from root. */
static int lapack_path(pz_auto *a, int root, const double complex *A, int il, int iu, double *w,
                       double complex *Z, bs_err *err)
{
    int mine = root == PZ_ALL || a->rank == root, rc = 0;
    if (mine) {
        memcpy(a->copy, A, (size_t)a->n * a->n * sizeof *a->copy);
        if (il == 0 && iu == a->n - 1 && !Z)
            rc = eig_values(a->ws, a->copy, w, err);
        else
            rc = eig_range(a->ws, a->copy, il, iu, w, Z, err);
    }
    rc = agree(a->comm, rc, err);
    if (rc == 0 && root != PZ_ALL && MPI_Bcast(w, iu - il + 1, MPI_DOUBLE, root, a->comm) != MPI_SUCCESS)
        rc = bs_fail(err, BS_EMPI, "MPI_Bcast of the eigenvalues failed");
    return rc;
}

int pz_auto_values(pz_auto *a, int root, const double complex *A, double *w, bs_err *err)
{
    if (a->pz) return pz_values(a->pz, root, A, w, err);
    return lapack_path(a, root, A, 0, a->n - 1, w, NULL, err);
}

int pz_auto_range(pz_auto *a, int root, const double complex *A, int il, int iu, double *w, double complex *Z,
                  bs_err *err)
{
    if (a->pz) return pz_range(a->pz, root, A, il, iu, w, Z, err);
    if (il < 0 || iu >= a->n || il > iu)
        return bs_fail(err, BS_EINVAL, "eigenvalue range %d..%d outside 0..%d", il, iu, a->n - 1);
    return lapack_path(a, root, A, il, iu, w, Z, err);
}
