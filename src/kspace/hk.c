/* H(k) and dH/dk from H(R) by one real matrix product per batch of k-points.
 *
 * With hermiticity H(-R) = H(R)^dagger, the sum over R folds onto a half set:
 *   H(k) = H_0 + sum_{R in half} [cos(2 pi k.R) C_R + sin(2 pi k.R) S_R],
 *   C_R = H_R + H_R^dagger,  S_R = i (H_R - H_R^dagger)   (both Hermitian).
 * Only upper triangles are kept, as real/imaginary pairs, in a column-major coefficient table
 * coef[2*npair x ncol]; the phases of a batch form phase[ncol x nk]; their product (DGEMM) is
 * the packed upper triangle of every H(k) of the batch. Derivatives use the same table with the
 * differentiated phases, in the same product. */
#include "bandsieve/hk.h"

#include "bandsieve/config.h"

#include <cblas.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

/* The half set: R > 0 in lexicographic order, so that R and -R never both belong to it. */
static int is_half_d(const double R[3])
{
    if (R[0] != 0) return R[0] > 0;
    if (R[1] != 0) return R[1] > 0;
    return R[2] > 0;
}

static int is_half(const int R[3])
{
    return is_half_d((const double[3]){R[0], R[1], R[2]});
}

struct hk_engine {
    int norb;
    int npair; /* norb (norb + 1) / 2 upper-triangle elements */
    int nhalf; /* lattice vectors in the half set (R = 0 excluded) */
    int ncol;  /* 1 + 2 nhalf */
    int max_batch;
    int nblock_alloc; /* blocks per k-point the phases hold: 0 before the first batch, 1 (H), 4 once
                         derivatives are asked */
    double *Rhalf;    /* nhalf x 3 lattice vectors as doubles */
    double *coef;     /* (2 npair) x ncol, column-major */
    double *phase;    /* ncol x (nblock_alloc max_batch) */
    double *packed;   /* (2 npair) x (npacked_alloc max_batch), for derivatives only */
    int npacked_alloc;
    double *col; /* 2 npair: one packed column set aside (hk_build) */
    /* Set only on engines made by hk_reduce: where each source column goes. */
    int axis; /* fixed axis, -1 for a full engine */
    int src_ncol;
    int *map_cos;     /* src column -> dst cosine column (0 for the constant) */
    int *map_sin;     /* src column -> dst sine column, or -1 when the target is the constant */
    double *map_sign; /* +1, or -1 when the target vector is -R' (sine flips) */
    double *src_Rax;  /* the source vectors' component along axis (0 for the constant) */
    /* Set only on borrowing engines (hk_create_borrowed), which have no coefficient table: ncol
     * and nhalf count m's stored blocks, Rhalf holds the vector each block is stored for. */
    const tb_model *m;   /* borrowed */
    double *bscale;      /* nhalf: the weight of each block (borrow_blocks) */
    double complex *wts; /* nhalf x (nblock_alloc max_batch): the block weights of a batch */
};

/* Hermitian-symmetrised hopping block for R (divided by its weight): averages H_R with
 * H_{-R}^dagger when both are present so that round-off in a table cannot make H(k) non-Hermitian. */
static double complex hop_element(const tb_model *m, int r, int rm, int a, int b)
{
    double complex h = tb_hop(m, r, a, b) / m->deg[r];
    if (rm < 0) return h;
    double complex hm = conj(tb_hop(m, rm, b, a)) / m->deg[rm];
    return 0.5 * (h + hm);
}

/* Fills column col of the coefficient table: the packed upper triangle of
 * alpha * X + beta * X^dagger, where X = H_R (symmetrised). */
static void fill_column(hk_engine *e, const tb_model *m, int r, int rm, int col, double complex alpha,
                        double complex beta)
{
    int n = m->norb;
    double *c = e->coef + (size_t)col * 2 * e->npair;
    for (int b = 0; b < n; b++)
        for (int a = 0; a <= b; a++) {
            double complex hab = hop_element(m, r, rm, a, b);
            double complex hba = hop_element(m, r, rm, b, a);
            double complex v = alpha * hab + beta * conj(hba);
            size_t p = (size_t)a + (size_t)b * (b + 1) / 2;
            c[2 * p] = creal(v);
            c[2 * p + 1] = cimag(v);
        }
}

int hk_create(const tb_model *m, int max_batch, hk_engine **out, bs_err *err)
{
    *out = NULL;
    /* A folded model already holds each pair once: past the size where the table's memory matters,
     * read its blocks instead of adding a table of the same size. */
    if (m->hsrc && (double)m->norb * (m->norb + 1) * 8.0 * m->nR >= BS_HK_BORROW_BYTES)
        return hk_create_borrowed(m, max_batch, out, err);
    if (max_batch < 1) max_batch = 1;
    hk_engine *e = calloc(1, sizeof *e);
    if (!e) return bs_fail(err, BS_ENOMEM, "out of memory for the H(k) engine");
    e->norb = m->norb;
    e->npair = m->norb * (m->norb + 1) / 2;
    e->max_batch = max_batch;
    e->axis = -1;
    int r0 = -1;
    for (int r = 0; r < m->nR; r++) {
        if (is_half(m->R[r]))
            e->nhalf++;
        else if (m->R[r][0] == 0 && m->R[r][1] == 0 && m->R[r][2] == 0)
            r0 = r;
    }
    e->ncol = 1 + 2 * e->nhalf;
    size_t rows = 2 * (size_t)e->npair;
    e->Rhalf = calloc((size_t)e->nhalf * 3 + 1, sizeof *e->Rhalf);
    e->coef = calloc(rows * e->ncol, sizeof *e->coef);
    if (!e->Rhalf || !e->coef) {
        hk_free(e);
        return bs_fail(err, BS_ENOMEM, "out of memory for the H(k) coefficient table (%d states, %d R)",
                       m->norb, m->nR);
    }
    /* Column 0: H_0, already Hermitian after symmetrisation (alpha = beta = 1/2 of X + X^dagger). */
    if (r0 >= 0) fill_column(e, m, r0, r0, 0, 0.5, 0.5);
    int h = 0;
    for (int r = 0; r < m->nR; r++) {
        if (!is_half(m->R[r])) continue;
        int minus[3] = {-m->R[r][0], -m->R[r][1], -m->R[r][2]};
        int rm = tb_model_find_R(m, minus);
        for (int d = 0; d < 3; d++)
            e->Rhalf[3 * h + d] = m->R[r][d];
        fill_column(e, m, r, rm, 1 + h, 1.0, 1.0);         /* C_R */
        fill_column(e, m, r, rm, 1 + e->nhalf + h, I, -I); /* S_R */
        h++;
    }
    *out = e;
    return 0;
}

/* The blocks of m as a borrowing engine reads them: the vector each is stored for, and its weight.
 * A block stored for R and -R (tb_model_fold) stands for X + X^dagger, X = H_R / deg; any other
 * block enters with half its weight, with half of its adjoint. Either way H(k) is the Hermitian
 * part of sum_r exp(2 pi i k.R_r) H_r / deg_r, as the table's symmetrisation makes it. */
static int borrow_blocks(hk_engine *e, const tb_model *m)
{
    int nb = 0;
    for (int r = 0; r < m->nR; r++)
        nb += !m->hsrc || m->hsrc[r] >= 0;
    e->nhalf = e->ncol = nb;
    e->Rhalf = malloc((size_t)nb * 3 * sizeof *e->Rhalf);
    e->bscale = calloc((size_t)nb, sizeof *e->bscale);
    if (!e->Rhalf || !e->bscale) return -1;
    for (int r = 0; r < m->nR; r++) {
        int s = m->hsrc ? m->hsrc[r] : r;
        if (s >= 0)
            for (int d = 0; d < 3; d++)
                e->Rhalf[3 * s + d] = m->R[r][d];
        /* the fold keeps only pairs of equal weights: 1/(2 deg) from each side */
        e->bscale[s >= 0 ? s : -1 - s] += 0.5 / m->deg[r];
    }
    return 0;
}

int hk_create_borrowed(const tb_model *m, int max_batch, hk_engine **out, bs_err *err)
{
    *out = NULL;
    hk_engine *e = calloc(1, sizeof *e);
    if (!e) return bs_fail(err, BS_ENOMEM, "out of memory for the H(k) engine");
    e->norb = m->norb;
    e->npair = m->norb * (m->norb + 1) / 2;
    e->max_batch = max_batch < 1 ? 1 : max_batch;
    e->axis = -1;
    e->m = m;
    if (borrow_blocks(e, m) != 0) {
        hk_free(e);
        return bs_fail(err, BS_ENOMEM, "out of memory for the H(k) engine (%d R)", m->nR);
    }
    *out = e;
    return 0;
}

/* The plane (or line) table of dst at k[axis] = kval from a borrowing source, block by block:
 * with Y = bscale exp(2 pi i kval R_axis) H_b, the block adds exp(i theta') X + h.c. at R' (R with
 * its axis component removed), X = Y, or X = Y^dagger where R' is folded to -R' (sign -1); that
 * is cos theta' (X + X^dagger) + sin theta' i (X - X^dagger), the table's C and S. */
static void reduce_borrowed(hk_engine *dst, const hk_engine *src, double kval)
{
    size_t rows = 2 * (size_t)dst->npair, n = (size_t)src->norb;
    for (int b = 0; b < src->nhalf; b++) {
        double complex psi = src->bscale[b] * cexp(I * 2.0 * M_PI * kval * dst->src_Rax[b]);
        int flip = dst->map_sign[b] < 0;
        double *dc = dst->coef + (size_t)dst->map_cos[b] * rows;
        double *ds = dst->map_sin[b] >= 0 ? dst->coef + (size_t)dst->map_sin[b] * rows : NULL;
        const double complex *B = src->m->H + (size_t)b * n * n;
        for (size_t j = 0; j < n; j++)
            for (size_t i = 0; i <= j; i++) {
                double complex yij = psi * B[i * n + j], yji = psi * B[j * n + i];
                double complex xij = flip ? conj(yji) : yij, xji = flip ? conj(yij) : yji;
                double complex c = xij + conj(xji);
                size_t p = i + j * (j + 1) / 2;
                dc[2 * p] += creal(c);
                dc[2 * p + 1] += cimag(c);
                if (ds) {
                    double complex s = I * (xij - conj(xji));
                    ds[2 * p] += creal(s);
                    ds[2 * p + 1] += cimag(s);
                }
            }
    }
}

void hk_free(hk_engine *e)
{
    if (!e) return;
    free(e->Rhalf);
    free(e->coef);
    free(e->phase);
    free(e->packed);
    free(e->col);
    free(e->bscale);
    free(e->wts);
    free(e->map_cos);
    free(e->map_sin);
    free(e->map_sign);
    free(e->src_Rax);
    free(e);
}

/* Finds (or appends) the half-space vector R in dst->Rhalf; returns its index. */
static int half_index(hk_engine *dst, const double R[3])
{
    for (int h = 0; h < dst->nhalf; h++)
        if (dst->Rhalf[3 * h] == R[0] && dst->Rhalf[3 * h + 1] == R[1] && dst->Rhalf[3 * h + 2] == R[2])
            return h;
    int h = dst->nhalf++;
    for (int d = 0; d < 3; d++)
        dst->Rhalf[3 * h + d] = R[d];
    return h;
}

int hk_reduce(const hk_engine *src, int axis, double kval, int max_batch, hk_engine **out, bs_err *err)
{
    *out = NULL;
    if (axis < 0 || axis > 2) return bs_fail(err, BS_EINVAL, "reduction axis %d outside 0..2", axis);
    if (max_batch < 1) max_batch = 1;
    hk_engine *e = calloc(1, sizeof *e);
    if (!e) return bs_fail(err, BS_ENOMEM, "out of memory for a reduced H(k) engine");
    e->norb = src->norb;
    e->npair = src->npair;
    e->max_batch = max_batch;
    e->axis = axis;
    e->src_ncol = src->ncol;
    int sn = src->ncol;
    e->Rhalf = calloc((size_t)src->nhalf * 3 + 3, sizeof *e->Rhalf);
    e->map_cos = calloc(sn, sizeof *e->map_cos);
    e->map_sin = calloc(sn, sizeof *e->map_sin);
    e->map_sign = calloc(sn, sizeof *e->map_sign);
    e->src_Rax = calloc(sn, sizeof *e->src_Rax);
    if (!e->Rhalf || !e->map_cos || !e->map_sin || !e->map_sign || !e->src_Rax) {
        hk_free(e);
        return bs_fail(err, BS_ENOMEM, "out of memory for a reduced H(k) engine");
    }
    /* Source column 0 is the constant; columns 1+h and 1+nhalf+h are the cosine and sine of Rhalf[h].
     * For the pair h the target is R' = R with the axis component removed, folded into the half set. */
    e->map_cos[0] = 0;
    e->map_sin[0] = -1;
    e->map_sign[0] = 1.0;
    e->src_Rax[0] = 0.0;
    int *target = malloc((size_t)(src->nhalf + 1) * sizeof *target);
    double *sign = malloc((size_t)(src->nhalf + 1) * sizeof *sign);
    if (!target || !sign) {
        free(target);
        free(sign);
        hk_free(e);
        return bs_fail(err, BS_ENOMEM, "out of memory for a reduced H(k) engine");
    }
    for (int h = 0; h < src->nhalf; h++) {
        double Rp[3] = {src->Rhalf[3 * h], src->Rhalf[3 * h + 1], src->Rhalf[3 * h + 2]};
        Rp[axis] = 0.0;
        if (Rp[0] == 0 && Rp[1] == 0 && Rp[2] == 0) {
            target[h] = -1;
            sign[h] = 1.0;
            continue;
        }
        sign[h] = is_half_d(Rp) ? 1.0 : -1.0;
        for (int d = 0; d < 3; d++)
            Rp[d] *= sign[h];
        target[h] = half_index(e, Rp);
    }
    e->ncol = 1 + 2 * e->nhalf;
    for (int h = 0; h < src->nhalf; h++) {
        int t = target[h];
        /* A table's pair h is two columns (cosine, sine); a borrowing source's block h is one. */
        for (int which = 0; which < (src->m ? 1 : 2); which++) {
            int c = src->m ? h : 1 + h + which * src->nhalf;
            e->map_cos[c] = t < 0 ? 0 : 1 + t;
            e->map_sin[c] = t < 0 ? -1 : 1 + e->nhalf + t;
            e->map_sign[c] = sign[h];
            e->src_Rax[c] = src->Rhalf[3 * h + axis];
        }
    }
    free(target);
    free(sign);
    size_t rows = 2 * (size_t)e->npair;
    e->coef = calloc(rows * e->ncol, sizeof *e->coef);
    if (!e->coef) {
        hk_free(e);
        return bs_fail(err, BS_ENOMEM, "out of memory for a reduced H(k) engine");
    }
    int rc = hk_rereduce(e, src, kval, err);
    if (rc != 0) {
        hk_free(e);
        return rc;
    }
    *out = e;
    return 0;
}

int hk_rereduce(hk_engine *dst, const hk_engine *src, double kval, bs_err *err)
{
    if (dst->axis < 0 || dst->src_ncol != src->ncol || dst->npair != src->npair)
        return bs_fail(err, BS_EINVAL, "reduced engine does not belong to this source engine");
    size_t rows = 2 * (size_t)dst->npair;
    memset(dst->coef, 0, rows * dst->ncol * sizeof *dst->coef);
    if (src->m) {
        reduce_borrowed(dst, src, kval);
        return 0;
    }
    int nh = (src->ncol - 1) / 2;
    cblas_daxpy((int)rows, 1.0, src->coef, 1, dst->coef, 1);
    /* cos(t + phi) C + sin(t + phi) S = cos t [cos phi C + sin phi S] + sin t [cos phi S - sin phi C],
     * with t the phase of R' and phi = 2 pi kval R_axis; folding R' -> -R' flips the sine. */
    for (int h = 0; h < nh; h++) {
        int cc = 1 + h, cs = 1 + nh + h;
        double phi = 2.0 * M_PI * kval * dst->src_Rax[cc];
        double c = cos(phi), s = sin(phi), sg = dst->map_sign[cc];
        const double *C = src->coef + (size_t)cc * rows, *S = src->coef + (size_t)cs * rows;
        double *dc = dst->coef + (size_t)dst->map_cos[cc] * rows;
        cblas_daxpy((int)rows, c, C, 1, dc, 1);
        cblas_daxpy((int)rows, s, S, 1, dc, 1);
        if (dst->map_sin[cc] >= 0) {
            double *ds = dst->coef + (size_t)dst->map_sin[cc] * rows;
            cblas_daxpy((int)rows, sg * c, S, 1, ds, 1);
            cblas_daxpy((int)rows, -sg * s, C, 1, ds, 1);
        }
    }
    return 0;
}

int hk_norb(const hk_engine *e)
{
    return e->norb;
}
int hk_max_batch(const hk_engine *e)
{
    return e->max_batch;
}

/* Phase table for nk points; with derivs, blocks 1..3 hold d/dk_i of block 0. */
static void fill_phases(hk_engine *e, int nk, const double *k, int nblock)
{
    int ncol = e->ncol, nh = e->nhalf;
    for (int j = 0; j < nk; j++) {
        double *p0 = e->phase + (size_t)j * ncol;
        p0[0] = 1.0;
        for (int b = 1; b < nblock; b++)
            e->phase[(size_t)(b * nk + j) * ncol] = 0.0;
        for (int h = 0; h < nh; h++) {
            const double *R = e->Rhalf + 3 * h;
            double theta = 2.0 * M_PI * (k[3 * j] * R[0] + k[3 * j + 1] * R[1] + k[3 * j + 2] * R[2]);
            double c = cos(theta), s = sin(theta);
            p0[1 + h] = c;
            p0[1 + nh + h] = s;
            for (int b = 1; b < nblock; b++) {
                double *pb = e->phase + (size_t)(b * nk + j) * ncol;
                double f = 2.0 * M_PI * R[b - 1];
                pb[1 + h] = -f * s;
                pb[1 + nh + h] = f * c;
            }
        }
    }
}

static void unpack(const hk_engine *e, const double *packed, double complex *H)
{
    int n = e->norb;
    for (int b = 0; b < n; b++)
        for (int a = 0; a <= b; a++) {
            size_t p = (size_t)a + (size_t)b * (b + 1) / 2;
            double complex v = packed[2 * p] + I * packed[2 * p + 1];
            H[a + (size_t)b * n] = v;
            H[b + (size_t)a * n] = conj(v);
        }
    for (int a = 0; a < n; a++)
        H[a + (size_t)a * n] = creal(H[a + (size_t)a * n]);
}

/* Grows the batch buffers, allocated on first use: the phases to nblock blocks per k-point, and
 * the packed triangles only for derivatives (packed set), since hk_build writes its product into
 * the caller's H. Most engines never build dH/dk and the plane engines of hk_lines never build at
 * all; at 128 states a batch of 64 is 8 MB per block of packed triangles. */
static int grow_buffers(hk_engine *e, int nblock, int packed, bs_err *err)
{
    size_t cols = (size_t)nblock * e->max_batch, rows = 2 * (size_t)e->npair;
    if (nblock > e->nblock_alloc) {
        double *phase = realloc(e->phase, (size_t)e->ncol * cols * sizeof *phase);
        if (!phase) return bs_fail(err, BS_ENOMEM, "out of memory for the H(k) phases (%d states)", e->norb);
        e->phase = phase;
        e->nblock_alloc = nblock;
    }
    if (!e->col) {
        e->col = malloc(rows * sizeof *e->col);
        if (!e->col) return bs_fail(err, BS_ENOMEM, "out of memory for the H(k) engine (%d states)", e->norb);
    }
    if (packed && nblock > e->npacked_alloc) {
        double *p = realloc(e->packed, rows * cols * sizeof *p);
        if (!p)
            return bs_fail(err, BS_ENOMEM, "out of memory for the H(k) derivative buffers (%d states)",
                           e->norb);
        e->packed = p;
        e->npacked_alloc = nblock;
    }
    return 0;
}

/* The product of the coefficient table with the phases of nk points (nblock blocks each) into out,
 * (2 npair) x (nblock nk), column-major. */
static int run_batch(hk_engine *e, int nk, const double *k, int nblock, double *out, bs_err *err)
{
    if (nk < 0 || nk > e->max_batch)
        return bs_fail(err, BS_EINVAL, "batch of %d k-points exceeds the engine's %d", nk, e->max_batch);
    fill_phases(e, nk, k, nblock);
    int rows = 2 * e->npair;
    cblas_dgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, rows, nblock * nk, e->ncol, 1.0, e->coef, rows,
                e->phase, e->ncol, 0.0, out, rows);
    return 0;
}

/* Room for the block weights of nblock blocks per k-point (borrowing engines). */
static int grow_weights(hk_engine *e, int nblock, bs_err *err)
{
    if (nblock <= e->nblock_alloc) return 0;
    double complex *w = realloc(e->wts, (size_t)e->nhalf * nblock * e->max_batch * sizeof *w);
    if (!w) return bs_fail(err, BS_ENOMEM, "out of memory for the H(k) weights (%d blocks)", e->nhalf);
    e->wts = w;
    e->nblock_alloc = nblock;
    return 0;
}

/* The block weights of nk points: column j is bscale exp(2 pi i k_j.R) for H(k_j); with nblock 4,
 * column nk + 3 j + i is its derivative along reduced k_i. */
static void borrow_weights(hk_engine *e, int nk, const double *k, int nblock)
{
    int nb = e->nhalf;
    for (int j = 0; j < nk; j++)
        for (int b = 0; b < nb; b++) {
            const double *R = e->Rhalf + 3 * b;
            double theta = 2.0 * M_PI * (k[3 * j] * R[0] + k[3 * j + 1] * R[1] + k[3 * j + 2] * R[2]);
            double complex w = e->bscale[b] * CMPLX(cos(theta), sin(theta));
            e->wts[(size_t)j * nb + b] = w;
            for (int i = 0; i + 1 < nblock; i++)
                e->wts[((size_t)nk + 3 * (size_t)j + i) * nb + b] = I * (2.0 * M_PI * R[i]) * w;
        }
}

/* nmat sums P_j = sum_b W[b, j] H_b (one complex product, row-major, into H), each turned into
 * H_j = P_j + P_j^dagger in place, column-major like hk_build's. */
static void borrow_product(const hk_engine *e, int nmat, const double complex *W, double complex *H)
{
    const double complex one = 1.0, zero = 0.0;
    int n = e->norb, nn = n * n;
    cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, nn, nmat, e->nhalf, &one, e->m->H, nn, W, e->nhalf,
                &zero, H, nn);
    for (int j = 0; j < nmat; j++) {
        double complex *A = H + (size_t)j * nn;
        for (size_t b = 0; b < (size_t)n; b++)
            for (size_t a = 0; a <= b; a++) {
                size_t p = a * n + b, q = b * n + a; /* (a, b) row-major, and column-major */
                double complex v = A[p] + conj(A[q]);
                A[q] = v;
                A[p] = conj(v);
            }
    }
}

int hk_build(hk_engine *e, int nk, const double *k, double complex *H, bs_err *err)
{
    if (e->m) {
        if (nk < 0 || nk > e->max_batch)
            return bs_fail(err, BS_EINVAL, "batch of %d k-points exceeds the engine's %d", nk, e->max_batch);
        int rc = grow_weights(e, 1, err);
        if (rc != 0) return rc;
        borrow_weights(e, nk, k, 1);
        borrow_product(e, nk, e->wts, H);
        return 0;
    }
    int rc = grow_buffers(e, 1, 0, err);
    /* The packed triangles of the batch go into H itself (C11: a double complex is two doubles),
     * which holds 2 n^2 >= n (n + 1) doubles per point; they are unpacked from the last point down,
     * each column copied aside first. Matrix j then only overwrites packed columns >= j, already
     * unpacked, and its own column, read from the copy. */
    if (rc == 0) rc = run_batch(e, nk, k, 1, (double *)H, err);
    if (rc != 0) return rc;
    size_t nn = (size_t)e->norb * e->norb, rows = 2 * (size_t)e->npair;
    for (int j = nk - 1; j >= 0; j--) {
        memcpy(e->col, (const double *)H + (size_t)j * rows, rows * sizeof *e->col);
        unpack(e, e->col, H + (size_t)j * nn);
    }
    return 0;
}

int hk_build_deriv(hk_engine *e, int nk, const double *k, double complex *H, double complex *dH, bs_err *err)
{
    if (e->m) {
        if (nk < 0 || nk > e->max_batch)
            return bs_fail(err, BS_EINVAL, "batch of %d k-points exceeds the engine's %d", nk, e->max_batch);
        int rc = grow_weights(e, 4, err);
        if (rc != 0) return rc;
        borrow_weights(e, nk, k, 4);
        if (H) borrow_product(e, nk, e->wts, H);
        borrow_product(e, 3 * nk, e->wts + (size_t)nk * e->nhalf, dH);
        return 0;
    }
    int rc = grow_buffers(e, 4, 1, err);
    if (rc == 0) rc = run_batch(e, nk, k, 4, e->packed, err);
    if (rc != 0) return rc;
    size_t nn = (size_t)e->norb * e->norb, rows = 2 * (size_t)e->npair;
    for (int j = 0; j < nk; j++) {
        if (H) unpack(e, e->packed + j * rows, H + j * nn);
        for (int i = 0; i < 3; i++)
            unpack(e, e->packed + (size_t)((i + 1) * nk + j) * rows, dH + (size_t)(j * 3 + i) * nn);
    }
    return 0;
}

struct hk_lines {
    hk_engine *full;
    hk_engine *plane, *line; /* NULL until first needed */
    int plane_axis, line_axis;
    double plane_val, line_val;
    int line_fresh; /* line was reduced from the current plane */
    double prev[3]; /* constant coordinates of the previous batch (NAN: not constant) */
};

int hk_lines_create(hk_engine *full, hk_lines **out, bs_err *err)
{
    *out = NULL;
    hk_lines *l = calloc(1, sizeof *l);
    if (!l) return bs_fail(err, BS_ENOMEM, "out of memory for the line cache");
    l->full = full;
    l->plane_axis = l->line_axis = -1;
    for (int d = 0; d < 3; d++)
        l->prev[d] = NAN;
    *out = l;
    return 0;
}

void hk_lines_free(hk_lines *l)
{
    if (!l) return;
    hk_free(l->plane);
    hk_free(l->line);
    free(l);
}

/* Makes l->plane the reduction of the full engine at k[axis] = val. */
static int lines_plane(hk_lines *l, int axis, double val, bs_err *err)
{
    if (l->plane && l->plane_axis == axis && l->plane_val == val) return 0;
    int rc;
    if (l->plane && l->plane_axis == axis) {
        rc = hk_rereduce(l->plane, l->full, val, err);
    } else {
        hk_free(l->plane);
        hk_free(l->line);
        l->plane = l->line = NULL;
        rc = hk_reduce(l->full, axis, val, l->full->max_batch, &l->plane, err);
    }
    l->plane_axis = axis;
    l->plane_val = val;
    l->line_fresh = 0;
    return rc;
}

static int lines_line(hk_lines *l, int axis, double val, bs_err *err)
{
    if (l->line && l->line_fresh && l->line_axis == axis && l->line_val == val) return 0;
    int rc;
    if (l->line && l->line_axis == axis) {
        rc = hk_rereduce(l->line, l->plane, val, err);
    } else {
        hk_free(l->line);
        l->line = NULL;
        rc = hk_reduce(l->plane, axis, val, l->full->max_batch, &l->line, err);
    }
    l->line_axis = axis;
    l->line_val = val;
    l->line_fresh = 1;
    return rc;
}

int hk_lines_build(hk_lines *l, int nk, const double *k, double complex *H, bs_err *err)
{
    double cur[3];
    int nconst = 0;
    for (int d = 0; d < 3; d++) {
        cur[d] = k[d];
        for (int j = 1; j < nk && !isnan(cur[d]); j++)
            if (k[3 * j + d] != k[d]) cur[d] = NAN;
        nconst += !isnan(cur[d]);
    }
    /* A reduction costs about two k-points of the full engine: below 8 points it does not pay. */
    if (nk < 8 || nconst < 2 || l->full->nhalf < 4) {
        for (int d = 0; d < 3; d++)
            l->prev[d] = cur[d];
        return hk_build(l->full, nk, k, H, err);
    }
    /* The plane axis: the current one if it still holds, else a coordinate that was also fixed, at
     * the same value, in the previous batch (the plane of a family of strings), else the first. */
    int pa = -1;
    if (l->plane && cur[l->plane_axis] == l->plane_val) pa = l->plane_axis;
    for (int d = 0; d < 3 && pa < 0; d++)
        if (!isnan(cur[d]) && cur[d] == l->prev[d]) pa = d;
    for (int d = 0; d < 3 && pa < 0; d++)
        if (!isnan(cur[d])) pa = d;
    int la = -1;
    for (int d = 0; d < 3; d++)
        if (d != pa && !isnan(cur[d])) {
            la = d;
            break;
        }
    for (int d = 0; d < 3; d++)
        l->prev[d] = cur[d];
    int rc = lines_plane(l, pa, cur[pa], err);
    if (rc == 0) rc = lines_line(l, la, cur[la], err);
    if (rc == 0) rc = hk_build(l->line, nk, k, H, err);
    return rc;
}

void hk_build_direct(const tb_model *m, const double k[3], double complex *H)
{
    int n = m->norb;
    size_t nn = (size_t)n * n;
    memset(H, 0, nn * sizeof *H);
    /* Accumulate in the tables' row-major order (contiguous reads and writes); the row-major array
     * of a Hermitian H is the column-major array of conj(H), so one conjugation finishes it. */
    for (int r = 0; r < m->nR; r++) {
        double theta = 2.0 * M_PI * (k[0] * m->R[r][0] + k[1] * m->R[r][1] + k[2] * m->R[r][2]);
        double complex ph = cexp(I * theta) / m->deg[r];
        const double complex *Hr = tb_hop_block(m, r, NULL);
        for (size_t p = 0; p < nn; p++)
            H[p] += ph * (Hr ? Hr[p] : tb_hop(m, r, (int)(p / (size_t)n), (int)(p % (size_t)n)));
    }
    for (size_t p = 0; p < nn; p++)
        H[p] = conj(H[p]);
}
