/* Breaking of time reversal and inversion measured as an energy, and the symmetrised model.
 * Conventions (the action of each operation on E(R) = H(R)/deg(R)) and the reason for the
 * measure (Weyl's inequality): include/bandsieve/symfit.h. */
#include "bandsieve/symfit.h"

#include <assert.h>
#include <cblas.h>
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/hk.h"

/* Hoppings are stored as in tb_model: element (a, b) of E(R) at [(r * norb + a) * norb + b].
 *
 * A growing set of lattice vectors with their effective hoppings E (norb^2 each), looked up by an
 * open-addressing hash on R. */
typedef struct rset {
    int n, cap, norb;
    int (*R)[3];
    int *slot; /* hash table of indices into R, -1 empty; hcap entries */
    int hcap;
} rset;

static void rset_clear(rset *s)
{
    free(s->R);
    free(s->slot);
    memset(s, 0, sizeof *s);
}

static uint32_t r_hash(const int R[3])
{
    uint32_t h = 2166136261u;
    for (int d = 0; d < 3; d++)
        h = (h ^ (uint32_t)(R[d] + 0x8000)) * 16777619u;
    return h;
}

static int rset_rehash(rset *s, int hcap)
{
    int *slot = malloc((size_t)hcap * sizeof *slot);
    if (!slot) return -1;
    for (int i = 0; i < hcap; i++)
        slot[i] = -1;
    for (int r = 0; r < s->n; r++) {
        uint32_t h = r_hash(s->R[r]) & (uint32_t)(hcap - 1);
        while (slot[h] >= 0)
            h = (h + 1) & (uint32_t)(hcap - 1);
        slot[h] = r;
    }
    free(s->slot);
    s->slot = slot;
    s->hcap = hcap;
    return 0;
}

static int rset_find(const rset *s, const int R[3])
{
    uint32_t h = r_hash(R) & (uint32_t)(s->hcap - 1);
    while (s->slot[h] >= 0) {
        const int *q = s->R[s->slot[h]];
        if (q[0] == R[0] && q[1] == R[1] && q[2] == R[2]) return s->slot[h];
        h = (h + 1) & (uint32_t)(s->hcap - 1);
    }
    return -1;
}

/* Index of R, added when absent; -1 when out of memory. */
static int rset_add(rset *s, const int R[3])
{
    int r = rset_find(s, R);
    if (r >= 0) return r;
    if (s->n == s->cap) {
        int cap = s->cap ? 2 * s->cap : 64;
        int(*nR)[3] = realloc(s->R, (size_t)cap * sizeof *nR);
        if (!nR) return -1;
        s->R = nR;
        s->cap = cap;
    }
    memcpy(s->R[s->n], R, sizeof s->R[0]);
    s->n++;
    if (4 * s->n > s->hcap) return rset_rehash(s, 2 * s->hcap) == 0 ? s->n - 1 : -1;
    uint32_t h = r_hash(R) & (uint32_t)(s->hcap - 1);
    while (s->slot[h] >= 0)
        h = (h + 1) & (uint32_t)(s->hcap - 1);
    s->slot[h] = s->n - 1;
    return s->n - 1;
}

static int rset_init(rset *s, const tb_model *m)
{
    memset(s, 0, sizeof *s);
    s->norb = m->norb;
    int hcap = 64;
    while (hcap < 8 * m->nR)
        hcap *= 2;
    if (rset_rehash(s, hcap) != 0) return -1;
    for (int r = 0; r < m->nR; r++)
        if (rset_add(s, m->R[r]) < 0) return -1;
    return 0;
}

/* The inversion's shift classes: states with equal shift vectors share a class. */
typedef struct inv_map {
    int nclass;
    int *cls;        /* norb */
    int (*shift)[3]; /* nclass */
    int *tgt;        /* n_R * nclass^2: index of -R - s_ca + s_cb, or -1 */
} inv_map;

static void inv_map_clear(inv_map *v)
{
    free(v->cls);
    free(v->shift);
    free(v->tgt);
    memset(v, 0, sizeof *v);
}

static int inv_classes(const sym_info *s, inv_map *v)
{
    int n = s->norb;
    v->cls = malloc((size_t)n * sizeof *v->cls);
    v->shift = malloc((size_t)n * sizeof *v->shift);
    if (!v->cls || !v->shift) return -1;
    for (int a = 0; a < n; a++) {
        int c = 0;
        while (c < v->nclass && memcmp(v->shift[c], s->inv_shift[a], sizeof v->shift[c]) != 0)
            c++;
        if (c == v->nclass) memcpy(v->shift[v->nclass++], s->inv_shift[a], sizeof v->shift[c]);
        v->cls[a] = c;
    }
    return 0;
}

/* Adds the images -R - s_a + s_b of every block of E that holds a nonzero element, so that the
 * set is closed under inversion, then tabulates the target of every (R, class pair). */
static int inv_close(rset *rs, const tb_model *m, const sym_info *s, inv_map *v)
{
    int n = s->norb, nc = v->nclass, n0 = rs->n;
    char *nonzero = calloc((size_t)n0 * nc * nc, 1);
    if (!nonzero) return -1;
    for (int r = 0; r < n0; r++)
        for (int b = 0; b < n; b++)
            for (int a = 0; a < n; a++)
                if (tb_hop(m, r, a, b) != 0) nonzero[((size_t)r * nc + v->cls[a]) * nc + v->cls[b]] = 1;
    int rc = 0;
    for (int r = 0; r < n0 && rc == 0; r++)
        for (int ca = 0; ca < nc && rc == 0; ca++)
            for (int cb = 0; cb < nc && rc == 0; cb++) {
                if (!nonzero[((size_t)r * nc + ca) * nc + cb]) continue;
                int T[3];
                for (int d = 0; d < 3; d++)
                    T[d] = -rs->R[r][d] - v->shift[ca][d] + v->shift[cb][d];
                if (rset_add(rs, T) < 0) rc = -1;
            }
    free(nonzero);
    if (rc != 0) return rc;
    v->tgt = malloc((size_t)rs->n * nc * nc * sizeof *v->tgt);
    if (!v->tgt) return -1;
    for (int r = 0; r < rs->n; r++)
        for (int ca = 0; ca < nc; ca++)
            for (int cb = 0; cb < nc; cb++) {
                int T[3];
                for (int d = 0; d < 3; d++)
                    T[d] = -rs->R[r][d] - v->shift[ca][d] + v->shift[cb][d];
                v->tgt[((size_t)r * nc + ca) * nc + cb] = rset_find(rs, T);
            }
    return 0;
}

/* D = Theta S for one block (Theta keeps R; see symfit.h). */
static void tr_block(const sym_info *s, const double complex *S, double complex *D)
{
    int n = s->norb;
    for (int b = 0; b < n; b++) {
        double complex fb = conj(s->tr_factor[b]);
        int tb = s->tr_perm[b];
        for (int a = 0; a < n; a++)
            D[(size_t)s->tr_perm[a] * n + tb] = s->tr_factor[a] * fb * conj(S[(size_t)a * n + b]);
    }
}

/* dst += P applied to block r of src (the block S); P maps it into the blocks of -R - s_a + s_b,
 * each element of dst getting at most one term (P is one-to-one). */
static void add_inv_block(const sym_info *s, const inv_map *v, int r, const double complex *S,
                          double complex *dst)
{
    int n = s->norb, nc = v->nclass;
    for (int b = 0; b < n; b++) {
        double complex fb = conj(s->inv_factor[b]);
        int pb = s->inv_perm[b], cb = v->cls[b];
        for (int a = 0; a < n; a++) {
            double complex e = S[(size_t)a * n + b];
            if (e == 0) continue;
            int t = v->tgt[((size_t)r * nc + v->cls[a]) * nc + cb];
            assert(t >= 0); /* inv_close added the image of every nonzero block */
            dst[((size_t)t * n + s->inv_perm[a]) * n + pb] += s->inv_factor[a] * fb * e;
        }
    }
}

double symfit_norm_bound(int n, const double complex *A)
{
    double fro = 0, colmax = 0, rowmax = 0;
    double *row = calloc((size_t)n, sizeof *row);
    for (int b = 0; b < n; b++) {
        double col = 0;
        for (int a = 0; a < n; a++) {
            double x = cabs(A[a + (size_t)b * n]);
            fro += x * x;
            col += x;
            if (row) row[a] += x;
        }
        if (col > colmax) colmax = col;
    }
    if (!row) return sqrt(fro);
    for (int a = 0; a < n; a++)
        if (row[a] > rowmax) rowmax = row[a];
    free(row);
    return fmin(sqrt(fro), sqrt(colmax * rowmax));
}

static double sum_bound(int n, int nR, const double complex *E)
{
    double sum = 0;
    for (int r = 0; r < nR; r++)
        sum += symfit_norm_bound(n, E + (size_t)r * n * n);
    return sum;
}

/* A model with m's fields and the lattice vectors and effective hoppings of rs/E (deg 1); it takes
 * *E (set to NULL) and stores each pair R, -R once where the blocks are adjoint bit for bit
 * (tb_model_fold: no value changes; the array shrinks). */
static int model_take(const tb_model *m, const rset *rs, double complex **E, tb_model **out, bs_err *err)
{
    *out = NULL;
    tb_model *c = NULL;
    /* m's fields without its hoppings: a copy of one block, replaced below. */
    tb_model shell = *m;
    shell.nR = 1;
    shell.hsrc = NULL;
    int rc = tb_model_copy(&shell, &c, err);
    if (rc != 0) return rc;
    int(*R)[3] = malloc((size_t)rs->n * sizeof *R);
    int *deg = malloc((size_t)rs->n * sizeof *deg);
    if (!R || !deg) {
        free(R);
        free(deg);
        tb_model_free(c);
        return bs_fail(err, BS_ENOMEM, "out of memory for a model of %d lattice vectors", rs->n);
    }
    memcpy(R, rs->R, (size_t)rs->n * sizeof *R);
    for (int r = 0; r < rs->n; r++)
        deg[r] = 1;
    free(c->R);
    free(c->deg);
    c->R = R;
    c->deg = deg;
    tb_model_set_hops(c, *E);
    *E = NULL;
    c->nR = rs->n;
    tb_model_fold(c);
    *out = c;
    return 0;
}

/* Block r of E = H / deg on the set's vectors (the model's own first, in order; zero beyond
 * them), into E (norb^2). The effective hoppings are never held whole: each pass over the blocks
 * recomputes them, which costs far less than the diagonalisations that follow. */
static void effective_block(const tb_model *m, int r, double complex *E)
{
    size_t n2 = (size_t)m->norb * m->norb;
    if (r >= m->nR) { /* an image vector that inv_close added: no hopping */
        memset(E, 0, n2 * sizeof *E);
        return;
    }
    for (size_t i = 0; i < n2; i++)
        E[i] = tb_hop(m, r, (int)(i / (size_t)m->norb), (int)(i % (size_t)m->norb)) / m->deg[r];
}

static int check_info(const tb_model *m, const sym_info *s, int which, bs_err *err)
{
    if (s->norb != m->norb)
        return bs_fail(err, BS_EINVAL, "symmetry information for %d states given for a model of %d", s->norb,
                       m->norb);
    if ((which & SYMFIT_INV) && (s->inv_source == SYM_INV_NONE || !s->inv_perm))
        return bs_fail(err, BS_EINVAL, "no inversion operator to average over");
    if ((which & SYMFIT_TR) && !s->tr_perm)
        return bs_fail(err, BS_EINVAL, "no time-reversal operator to average over");
    return 0;
}

/* Number of power steps per k-point: each ||D v|| with ||v|| = 1 is a lower bound of ||D||_2, so
 * the estimate is a lower bound whatever the convergence; 24 steps bring it within a few percent
 * for the spectra met here (found in the tests against full diagonalisation), at O(n^2) per step
 * where a full diagonalisation costs O(n^3). */
#define POWER_STEPS 24

/* max over the steps of ||D v_j||, v_{j+1} = D v_j / ||D v_j||, from a fixed pseudo-random v_0. */
static double power_norm(int n, const double complex *D, double complex *v, double complex *w)
{
    uint64_t z = 0x5DEECE66DULL;
    double nv = 0;
    for (int i = 0; i < n; i++) {
        z = z * 6364136223846793005ULL + 1442695040888963407ULL;
        v[i] = (double)(z >> 11) * 0x1.0p-53 + 0.5 + I * ((double)((z >> 7) & 0xffff) / 65536.0 - 0.5);
        nv += creal(v[i] * conj(v[i]));
    }
    for (int i = 0; i < n; i++)
        v[i] /= sqrt(nv);
    double best = 0;
    for (int step = 0; step < POWER_STEPS; step++) {
        double nw = 0;
        for (int a = 0; a < n; a++) {
            double complex acc = 0;
            for (int b = 0; b < n; b++)
                acc += D[a + (size_t)b * n] * v[b];
            w[a] = acc;
            nw += creal(acc * conj(acc));
        }
        nw = sqrt(nw);
        if (nw > best) best = nw;
        if (nw == 0) break;
        for (int a = 0; a < n; a++)
            v[a] = w[a] / nw;
    }
    return best;
}

/* Lower bound of max_k ||D(k)||_2 over a uniform mesh (mesh^dim points including k = 0), by
 * power steps at each point (power_norm). */
static int mesh_norm(const tb_model *d, int mesh, double *out, bs_err *err)
{
    *out = 0;
    int n = d->norb, nk = 1;
    for (int i = 0; i < d->dim; i++)
        nk *= mesh;
    const int batch = 16;
    hk_engine *hk = NULL;
    double complex *H = malloc((size_t)batch * n * n * sizeof *H), *v = malloc((size_t)2 * n * sizeof *v);
    double *k = malloc((size_t)3 * batch * sizeof *k);
    int rc = !H || !k || !v ? bs_fail(err, BS_ENOMEM, "out of memory for the breaking measure") : 0;
    if (rc == 0) rc = hk_create(d, batch, &hk, err);
    for (int i0 = 0; rc == 0 && i0 < nk; i0 += batch) {
        int nb = nk - i0 < batch ? nk - i0 : batch;
        for (int j = 0; j < nb; j++) {
            int idx = i0 + j;
            for (int dd = 0; dd < 3; dd++) {
                k[3 * j + dd] = dd < d->dim ? (double)(idx % mesh) / mesh : 0.0;
                if (dd < d->dim) idx /= mesh;
            }
        }
        rc = hk_build(hk, nb, k, H, err);
        for (int j = 0; rc == 0 && j < nb; j++)
            *out = fmax(*out, power_norm(n, H + (size_t)j * n * n, v, v + n));
    }
    hk_free(hk);
    free(H);
    free(k);
    free(v);
    return rc;
}

/* The default mesh of symfit_opts for m. */
static int default_mesh(const tb_model *m)
{
    int rmax = 0;
    for (int r = 0; r < m->nR; r++)
        for (int d = 0; d < m->dim; d++)
            rmax = abs(m->R[r][d]) > rmax ? abs(m->R[r][d]) : rmax;
    int n = 2 * rmax + 2;
    if (m->dim == 2) {
        n = n < 6 ? 6 : 6 * ((n + 5) / 6);
        return n > 18 ? 18 : n;
    }
    n = n < 4 ? 4 : n + (n % 2);
    return n > 8 ? 8 : n;
}

/* One direction of a separable discrete Fourier sum: out[(x * Q + j) * z + y] = sum_s
 * in[(x * S + s) * z + y] w[j * S + s], for x < X, y < z. */
static void dft_axis(const double complex *in, int X, int S, int z, const double complex *w, int Q,
                     double complex *out)
{
    for (int x = 0; x < X; x++)
        for (int j = 0; j < Q; j++) {
            double complex *o = out + ((size_t)x * Q + j) * z;
            for (int y = 0; y < z; y++)
                o[y] = 0;
            for (int s = 0; s < S; s++) {
                double complex c = w[(size_t)j * S + s];
                const double complex *v = in + ((size_t)x * S + s) * z;
                for (int y = 0; y < z; y++)
                    o[y] += c * v[y];
            }
        }
}

/* w[j * S + s] = exp(sign 2 pi i j (first + s) / Q), j < Q, s < S. */
static double complex *dft_table(int Q, int S, int first, int sign)
{
    double complex *w = malloc((size_t)Q * S * sizeof *w);
    for (int j = 0; w && j < Q; j++)
        for (int s = 0; s < S; s++)
            w[(size_t)j * S + s] = cexp(sign * 2 * M_PI * I * (double)(((long)j * (first + s)) % Q) / Q);
    return w;
}

/* Largest value on the M[0] x M[1] x M[2] mesh of the real P(k) = sum_d C[d] exp(2 pi i k.d), C
 * indexed by ((d0 + L0) nd1 + d1 + L1) nd2 + d2 + L2 with C[-d] = conj(C[d]), summed one
 * direction at a time: P = Re(sum over d0 = 0) + 2 Re(sum over d0 > 0), so only d0 >= 0 is summed. */
static int poly_mesh_max(const double complex *C, const int L[3], const int M[3], double *out)
{
    int nd[3] = {2 * L[0] + 1, 2 * L[1] + 1, 2 * L[2] + 1}, na = L[0] + 1;
    size_t m12 = (size_t)M[1] * M[2];
    double complex *w[3] = {dft_table(M[0], nd[0], -L[0], 1), dft_table(M[1], nd[1], -L[1], 1),
                            dft_table(M[2], nd[2], -L[2], 1)};
    double complex *T1 = malloc((size_t)na * nd[1] * M[2] * sizeof *T1);
    double complex *T2 = malloc((size_t)na * m12 * sizeof *T2);
    double *acc = malloc(m12 * sizeof *acc);
    int rc = w[0] && w[1] && w[2] && T1 && T2 && acc ? 0 : -1;
    double best = -INFINITY;
    if (rc == 0) {
        /* T1[a][b][j2] = sum_c C[L0 + a][b][c] w2[j2][c], then T2[a][j1][j2] = sum_b T1[a][b][j2] w1[j1][b]
         */
        dft_axis(C + (size_t)L[0] * nd[1] * nd[2], na * nd[1], nd[2], 1, w[2], M[2], T1);
        dft_axis(T1, na, nd[1], M[2], w[1], M[1], T2);
        for (int j0 = 0; j0 < M[0]; j0++) {
            for (size_t j = 0; j < m12; j++)
                acc[j] = creal(T2[j]);
            for (int a = 1; a < na; a++) {
                double complex f = 2 * w[0][(size_t)j0 * nd[0] + L[0] + a];
                double fr = creal(f), fi = cimag(f);
                const double complex *t = T2 + (size_t)a * m12;
                for (size_t j = 0; j < m12; j++)
                    acc[j] += fr * creal(t[j]) - fi * cimag(t[j]);
            }
            for (size_t j = 0; j < m12; j++)
                best = fmax(best, acc[j]);
        }
    }
    for (int a = 0; a < 3; a++)
        free(w[a]);
    free(T1);
    free(T2);
    free(acc);
    *out = best;
    return rc;
}

int symfit_kmax_bound(int n, int nr, const int (*R)[3], int dim, const double complex *D, double *out,
                      bs_err *err)
{
    *out = INFINITY;
    if (nr < 1) return 0;
    size_t n2 = (size_t)n * n;
    /* The Hermitian part (D(k) + D(k)^dagger) / 2, the matrix the eigensolvers see (hk.c averages
     * H_R with H_{-R}^dagger), has coefficients (D_R + D_{-R}^dagger) / 2 on the vectors +-R_r: a box
     * -h_a..h_a of S_a = L_a + 1 points per direction, L_a = 2 h_a. P(k) has frequencies -L_a..L_a,
     * so Q_a = 2 L_a + 1 samples per direction determine it. */
    int lo[3] = {0, 0, 0}, L[3] = {0, 0, 0}, S[3], Q[3], M[3] = {1, 1, 1}, active = 0;
    for (int a = 0; a < dim && a < 3; a++) {
        int h = 0;
        for (int r = 0; r < nr; r++)
            h = abs(R[r][a]) > h ? abs(R[r][a]) : h;
        lo[a] = -h;
        L[a] = 2 * h;
        active += L[a] > 0;
    }
    for (int a = 0; a < 3; a++) {
        S[a] = L[a] + 1;
        Q[a] = 2 * L[a] + 1;
    }
    size_t box = (size_t)S[0] * S[1] * S[2], nq = (size_t)Q[0] * Q[1] * Q[2];
    /* Orbital pairs a <= b that hop anywhere (the Hermitian part has |X_ab(k)| = |X_ba(k)|). */
    size_t *pair = malloc(n2 * sizeof *pair), np = 0;
    if (!pair) return bs_fail(err, BS_ENOMEM, "out of memory for the breaking's bound");
    for (int a = 0; a < n; a++)
        for (int b = a; b < n; b++)
            for (int r = 0; r < nr; r++)
                if (D[(size_t)r * n2 + (size_t)a * n + b] != 0 ||
                    D[(size_t)r * n2 + (size_t)b * n + a] != 0) {
                    pair[np++] = (size_t)a * n + b;
                    break;
                }
    /* Multiply-adds: the transforms per orbital pair, and the mesh (its last direction dominates). */
    const double wmax = 0.85;
    double W = 0,
           madds = (double)S[0] * S[1] * S[2] * Q[2] + (double)S[0] * S[1] * Q[1] * Q[2] + (double)S[0] * nq;
    madds *= (double)np;
    for (int a = 0; a < 3; a++) {
        if (L[a] == 0) continue;
        M[a] = (int)ceil(active * M_PI * L[a] / wmax); /* W = pi sum_a L_a / M_a <= wmax */
        W += M_PI * L[a] / M[a];
    }
    madds += (double)M[0] * M[1] * M[2] * (L[0] + 1);
    if (madds > fmax(SYMFIT_KMAX_BUDGET * (double)n * n * n, SYMFIT_KMAX_FLOOR)) {
        free(pair);
        return 0;
    }
    /* Pairs in chunks of cp; every array has the pair innermost, so each direction's sum is a
     * matrix product (rows: pairs and the directions not summed yet). */
    const size_t cp = 64;
    double complex *g = malloc(cp * box * sizeof *g), *t1 = malloc(cp * S[0] * S[1] * Q[2] * sizeof *t1);
    double complex *t2 = malloc(cp * S[0] * Q[1] * Q[2] * sizeof *t2), *v = malloc(cp * nq * sizeof *v);
    double complex *w[3] = {dft_table(Q[0], S[0], 0, 1), dft_table(Q[1], S[1], 0, 1),
                            dft_table(Q[2], S[2], 0, 1)};
    double *P = calloc(nq, sizeof *P);
    size_t *at = malloc(2 * (size_t)nr * sizeof *at); /* box indices of R_r, then of -R_r */
    int rc = g && t1 && t2 && v && w[0] && w[1] && w[2] && P && at ? 0 : -1;
    for (int r = 0; rc == 0 && r < nr; r++)
        for (int sign = 1; sign >= -1; sign -= 2)
            at[sign > 0 ? r : nr + r] =
                ((size_t)(sign * R[r][0] - lo[0]) * S[1] + (dim > 1 ? sign * R[r][1] - lo[1] : 0)) * S[2] +
                (dim > 2 ? sign * R[r][2] - lo[2] : 0);
    const double complex one = 1, zero = 0;
    /* P on the Q grid: the sum over orbital pairs of |D_ab(k)|^2. */
    for (size_t p0 = 0; rc == 0 && p0 < np; p0 += cp) {
        int c = (int)(np - p0 < cp ? np - p0 : cp);
        memset(g, 0, (size_t)c * box * sizeof *g);
        /* Summed, not assigned: a lattice vector may be listed twice. */
        for (int r = 0; r < nr; r++)
            for (int q = 0; q < c; q++) {
                size_t ab = pair[p0 + q], ba = ab % n * n + ab / n;
                g[at[r] * c + q] += 0.5 * D[(size_t)r * n2 + ab];
                g[at[nr + r] * c + q] += 0.5 * conj(D[(size_t)r * n2 + ba]);
            }
        /* Direction 2: per (s0, s1), the c x S2 block times the S2 x Q2 table. */
        for (int x = 0; x < S[0] * S[1]; x++)
            cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, c, Q[2], S[2], &one,
                        g + (size_t)x * S[2] * c, c, w[2], S[2], &zero, t1 + (size_t)x * Q[2] * c, c);
        /* Direction 1: per s0, rows (pair, j2), columns s1. */
        for (int x = 0; x < S[0]; x++)
            cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, c * Q[2], Q[1], S[1], &one,
                        t1 + (size_t)x * S[1] * Q[2] * c, c * Q[2], w[1], S[1], &zero,
                        t2 + (size_t)x * Q[1] * Q[2] * c, c * Q[2]);
        /* Direction 0: rows (pair, j2, j1), columns s0. */
        cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, c * Q[1] * Q[2], Q[0], S[0], &one, t2,
                    c * Q[1] * Q[2], w[0], S[0], &zero, v, c * Q[1] * Q[2]);
        for (size_t j = 0; j < nq; j++) {
            double sum = 0;
            for (int q = 0; q < c; q++) {
                double complex x = v[j * c + q];
                size_t ab = pair[p0 + q];
                double weight = ab / n == ab % n ? 1.0 : 2.0;
                sum += weight * (creal(x) * creal(x) + cimag(x) * cimag(x));
            }
            P[j] += sum;
        }
    }
    free(pair);
    /* Coefficients C[d], |d_a| <= L_a, by the inverse transform of the samples (exact: Q_a > 2 L_a). */
    double complex *C = NULL;
    if (rc == 0) {
        for (int a = 0; a < 3; a++) {
            free(w[a]);
            w[a] = dft_table(Q[a], Q[a], 0, -1);
        }
        C = malloc(nq * sizeof *C);
        rc = C && w[0] && w[1] && w[2] ? 0 : -1;
    }
    if (rc == 0) {
        for (size_t j = 0; j < nq; j++)
            v[j] = P[j] / (double)nq;
        double complex *u = malloc(nq * sizeof *u), *y = malloc(nq * sizeof *y);
        rc = u && y ? 0 : -1;
        if (rc == 0) {
            dft_axis(v, Q[0] * Q[1], Q[2], 1, w[2], Q[2], u);
            dft_axis(u, Q[0], Q[1], Q[2], w[1], Q[1], y);
            dft_axis(y, 1, Q[0], Q[1] * Q[2], w[0], Q[0], u);
            /* u holds the coefficient of frequency d (mod Q) at index d mod Q; C wants d + L. */
            for (int i0 = 0; i0 < Q[0]; i0++)
                for (int i1 = 0; i1 < Q[1]; i1++)
                    for (int i2 = 0; i2 < Q[2]; i2++) {
                        int d0 = i0 - L[0], d1 = i1 - L[1], d2 = i2 - L[2];
                        size_t from = ((size_t)((d0 + Q[0]) % Q[0]) * Q[1] + (d1 + Q[1]) % Q[1]) * Q[2] +
                                      (d2 + Q[2]) % Q[2];
                        C[((size_t)i0 * Q[1] + i1) * Q[2] + i2] = u[from];
                    }
        }
        free(u);
        free(y);
    }
    double pmax = 0, c0 = 0;
    if (rc == 0) {
        c0 = creal(C[(nq - 1) / 2]);
        rc = poly_mesh_max(C, L, M, &pmax);
    }
    free(g);
    free(t1);
    free(t2);
    free(v);
    free(P);
    free(at);
    free(C);
    for (int a = 0; a < 3; a++)
        free(w[a]);
    if (rc != 0)
        return bs_fail(err, BS_ENOMEM, "out of memory for the breaking's bound (%d lattice vectors)", nr);
    /* Round-off of the sums: each |C[d]| <= C[0], the mean of P (Cauchy-Schwarz), so a few ulps of
     * nq C[0] per transform cover it. */
    pmax += 1e-13 * (double)nq * c0;
    *out = sqrt(fmax(pmax, 0) / (1 - 0.25 * W * W));
    return 0;
}

/* Fills b from the difference *Dp (rs.n matrices) and norm, the reference's sum_bound: upper and
 * relative bounds, the mesh maximum unless mesh is 0 (which takes *Dp into a model of its own and
 * sets it to NULL; the caller frees what is left), and kmax_ev when kmax is set. */
static int fill_break(const tb_model *m, const rset *rs, double norm, double complex **Dp, int mesh, int kmax,
                      symfit_break *b, bs_err *err)
{
    int n = m->norb;
    const double complex *D = *Dp;
    b->available = 1;
    b->upper_ev = sum_bound(n, rs->n, D);
    b->kmax_ev = 0;
    if (kmax) {
        int rc = symfit_kmax_bound(n, rs->n, (const int(*)[3])rs->R, m->dim, D, &b->kmax_ev, err);
        if (rc != 0) return rc;
        b->kmax_ev = fmin(b->kmax_ev, b->upper_ev);
    }
    b->relative = norm > 0 ? b->upper_ev / norm : b->upper_ev;
    b->lower_ev = 0;
    if (mesh <= 0) return 0;
    tb_model *d = NULL;
    int rc = model_take(m, rs, Dp, &d, err);
    if (rc == 0) rc = mesh_norm(d, mesh, &b->lower_ev, err);
    /* Round-off of the two bounds can invert them for an exact symmetry. */
    if (rc == 0 && b->lower_ev > b->upper_ev) b->upper_ev = b->lower_ev;
    tb_model_free(d);
    return rc;
}

double symfit_estimate(const symfit_break *b, const char **which)
{
    double mesh = SYMFIT_MESH_SAFETY * b->lower_ev;
    int use_mesh = b->lower_ev > 0 && mesh < b->upper_ev;
    if (which) *which = use_mesh ? "mesh x 1.5" : "upper bound";
    return use_mesh ? mesh : b->upper_ev;
}

int symfit_measure(const tb_model *m, const sym_info *s, int which, const symfit_opts *o, symfit_break *out,
                   bs_err *err)
{
    memset(out, 0, sizeof *out);
    if (which == SYMFIT_INV && (s->inv_source == SYM_INV_NONE || !s->inv_perm)) return 0;
    if (which != SYMFIT_TR && which != SYMFIT_INV)
        return bs_fail(err, BS_EINVAL, "measure one operation at a time");
    int rc = check_info(m, s, which, err);
    if (rc != 0) return rc;
    int n = m->norb, mesh = o && o->mesh > 0 ? o->mesh : default_mesh(m);
    rset rs;
    inv_map v = {0};
    size_t n2 = (size_t)n * n;
    double complex *E = malloc(n2 * sizeof *E), *G = NULL;
    if (!E || rset_init(&rs, m) != 0) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory for the breaking measure");
        goto done;
    }
    if (which == SYMFIT_INV && (inv_classes(s, &v) != 0 || inv_close(&rs, m, s, &v) != 0)) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory for the inversion images");
        goto done;
    }
    /* G = g E, then G = E - G: one array of the model's size, E a block at a time. */
    G = calloc((size_t)rs.n * n2, sizeof *G);
    if (!G) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory for the breaking measure");
        goto done;
    }
    double norm = 0;
    for (int r = 0; r < m->nR; r++) {
        effective_block(m, r, E);
        norm += symfit_norm_bound(n, E);
        if (which == SYMFIT_TR)
            tr_block(s, E, G + (size_t)r * n2);
        else
            add_inv_block(s, &v, r, E, G);
    }
    for (int r = 0; r < rs.n; r++) {
        effective_block(m, r, E);
        double complex *D = G + (size_t)r * n2;
        for (size_t i = 0; i < n2; i++)
            D[i] = E[i] - D[i];
    }
    rc = fill_break(m, &rs, norm, &G, mesh, 0, out, err);
done:
    free(E);
    free(G);
    inv_map_clear(&v);
    rset_clear(&rs);
    return rc;
}

/* Makes P Theta = Theta P hold exactly (symfit.h). Commuting needs x_{t(a)} u_a = u_{p(a)} conj(x_a)
 * (symmetry.c, commute_mismatch). Theta^2 = -1 gives u_{t(a)} = -u_a (and spinless t(a) = a), so
 * x_a^2 = u_{p(a)} conj(u_a) with x_{t(a)} = x_a solves it for every state while keeping spin
 * untouched by P. Each x_a becomes the root nearest to its solved value and x_{p(a)} = conj(x_a)
 * keeps P^2 = 1 (x_{p(a)}^2 = conj(x_a^2) holds by the same relation read from p(a)). */
static int make_commute(sym_info *s, bs_err *err)
{
    int n = s->norb;
    for (int a = 0; a < n; a++) {
        int t = s->tr_perm[a], p = s->inv_perm[a];
        if (s->tr_perm[p] != s->inv_perm[t] ||
            memcmp(s->inv_shift[a], s->inv_shift[t], sizeof s->inv_shift[a]) != 0)
            return bs_fail(err, BS_EINVAL,
                           "the maps of inversion and time reversal do not commute at state %d", a + 1);
    }
    double complex *x = s->inv_factor;
    const double complex *u = s->tr_factor;
    for (int a = 0; a < n; a++) {
        int p = s->inv_perm[a];
        if (p < a) continue;
        double complex r = csqrt(u[p] * conj(u[a]));
        if (creal(r * conj(x[a])) < 0) r = -r;
        x[a] = r / cabs(r);
        x[p] = conj(x[a]);
    }
    s->inv_commutes_tr = 1;
    return 0;
}

/* Makes P^2 = 1 hold exactly, i.e. x_a x_{p(a)} = 1: a state mapped onto itself gets the sign
 * nearest its solved factor, a pair gets x_{p(a)} = conj(x_a) with x_a normalised. Factors solved
 * from a noisy H(k) satisfy this only up to the noise when an orbital block maps onto itself. */
static void make_involution(sym_info *s)
{
    double complex *x = s->inv_factor;
    for (int a = 0; a < s->norb; a++) {
        int p = s->inv_perm[a];
        if (p < a) continue;
        if (p == a)
            x[a] = creal(x[a]) < 0 ? -1.0 : 1.0;
        else {
            x[a] /= cabs(x[a]);
            x[p] = conj(x[a]);
        }
    }
}

int symfit_symmetrise(const tb_model *m, sym_info *s, int which, const symfit_opts *o, tb_model **out,
                      symfit_break *moved, bs_err *err)
{
    *out = NULL;
    if (moved) memset(moved, 0, sizeof *moved);
    if (which < 1 || which > 3) return bs_fail(err, BS_EINVAL, "nothing to symmetrise over");
    int rc = check_info(m, s, which, err);
    if (rc == 0 && which == (SYMFIT_TR | SYMFIT_INV))
        rc = make_commute(s, err);
    else if (rc == 0 && which == SYMFIT_INV)
        make_involution(s);
    if (rc != 0) return rc;
    int n = m->norb;
    size_t n2 = (size_t)n * n;
    rset rs;
    inv_map v = {0};
    double complex *E = malloc(n2 * sizeof *E), *A = malloc(n2 * sizeof *A), *S = NULL, *D = NULL;
    if (!E || !A || rset_init(&rs, m) != 0) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory for the symmetrised model");
        goto done;
    }
    if ((which & SYMFIT_INV) && (inv_classes(s, &v) != 0 || inv_close(&rs, m, s, &v) != 0)) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory for the inversion images");
        goto done;
    }
    /* S = E + Theta E + P E + P Theta E, summed in that order for each element, in one array of
     * the model's size: E and Theta E a block at a time (the inversion images, beyond the model's
     * vectors, have no hopping and add nothing). */
    size_t total = (size_t)rs.n * n2;
    S = calloc(total, sizeof *S);
    if (!S) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory for the symmetrised model");
        goto done;
    }
    double w = which == 3 ? 0.25 : 0.5, norm = 0;
    for (int r = 0; r < m->nR; r++) {
        double complex *Sr = S + (size_t)r * n2;
        effective_block(m, r, E);
        norm += symfit_norm_bound(n, E);
        if (!(which & SYMFIT_TR)) {
            memcpy(Sr, E, n2 * sizeof *E);
            continue;
        }
        tr_block(s, E, A);
        for (size_t i = 0; i < n2; i++)
            Sr[i] = E[i] + A[i];
    }
    if (which & SYMFIT_INV) {
        for (int r = 0; r < m->nR; r++) {
            effective_block(m, r, E);
            add_inv_block(s, &v, r, E, S);
        }
        for (int r = 0; (which & SYMFIT_TR) && r < m->nR; r++) {
            effective_block(m, r, E);
            tr_block(s, E, A);
            add_inv_block(s, &v, r, A, S);
        }
    }
    for (size_t i = 0; i < total; i++)
        S[i] *= w;
    rc = model_take(m, &rs, &S, out, err);
    if (rc == 0 && moved) {
        /* D = H - H_s, from the restored model's values (folding changed none of them). */
        D = malloc(total * sizeof *D);
        if (!D) rc = bs_fail(err, BS_ENOMEM, "out of memory for the symmetrised model");
        for (int r = 0; rc == 0 && r < rs.n; r++) {
            double complex *Dr = D + (size_t)r * n2;
            effective_block(m, r, Dr);
            for (size_t i = 0; i < n2; i++)
                Dr[i] -= tb_hop(*out, r, (int)(i / (size_t)n), (int)(i % (size_t)n));
        }
        if (rc == 0)
            rc = fill_break(m, &rs, norm, &D, o && o->mesh > 0 ? o->mesh : default_mesh(m), 1, moved, err);
    }
    if (rc != 0) {
        tb_model_free(*out);
        *out = NULL;
    }
done:
    free(E);
    free(A);
    free(S);
    free(D);
    inv_map_clear(&v);
    rset_clear(&rs);
    return rc;
}

int symfit_verdict(int exact, const symfit_break *b, double scale_ev)
{
    if (!b->available) return SYMFIT_NA;
    if (exact) return SYMFIT_EXACT;
    return scale_ev >= SYMFIT_MARGIN_APPROX * symfit_estimate(b, NULL) ? SYMFIT_APPROX : SYMFIT_BROKEN;
}

int symfit_physical(const symfit_break *b, double scale_ev)
{
    return b->available && b->lower_ev >= SYMFIT_PHYSICAL_RATIO * scale_ev &&
           b->lower_ev >= SYMFIT_COHERENT_RATIO * b->upper_ev;
}

double symfit_confidence_factor(double margin)
{
    if (!(margin > 0)) return 0.0;
    if (isinf(margin)) return 1.0;
    return 1.0 - exp(-margin / SYMFIT_CONFIDENCE_SCALE);
}

const char *symfit_verdict_name(int v)
{
    switch (v) {
    case SYMFIT_EXACT:
        return "exact";
    case SYMFIT_APPROX:
        return "approximate";
    case SYMFIT_BROKEN:
        return "broken";
    default:
        return "not applicable";
    }
}
