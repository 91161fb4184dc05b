/* Slab and ribbon construction: unimodular rebasing of the bulk lattice for a Miller plane, home
 * layers for the orbitals, and the slab Hamiltonian as a function of the in-plane k. */
#include "bandsieve/slab.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/config.h"

struct slab {
    int M[3][3];
    int dim, ax, kdim; /* bulk dimension, stacking axis, in-plane dimension */
    int norb, nlayers, range;
    tb_model *rebased; /* bulk in the new lattice, orbitals in their home layers */
    /* Hoppings grouped by stacking distance r = -range..range: entries [first[r+range],
     * first[r+range+1]) of rpar (in-plane R') and hop (H/deg, norb x norb, row-major as in model.h). */
    int *first;
    int (*rpar)[2];
    double complex *hop;
    double complex *blk; /* (2 range + 1) couplings: slab_hk's workspace */
};

static int gcd_int(int a, int b)
{
    a = abs(a);
    b = abs(b);
    while (b) {
        int t = a % b;
        a = b;
        b = t;
    }
    return a;
}

static double cart_len(const tb_model *m, const int n[3])
{
    double v[3] = {0, 0, 0};
    for (int j = 0; j < 3; j++)
        for (int c = 0; c < 3; c++)
            v[c] += n[j] * m->lattice[j][c];
    return sqrt(v[0] * v[0] + v[1] * v[1] + v[2] * v[2]);
}

typedef struct cand {
    int n[3];
    double len;
} cand;

/* Shortest first; equal lengths (within 1e-9 Angstrom) in descending lexicographic order, so that
 * (1,0,0) precedes (0,1,0) precedes (-1,0,0): the basis is reproducible and right-handed where it can. */
static int cand_cmp(const void *pa, const void *pb)
{
    const cand *a = pa, *b = pb;
    if (a->len < b->len - 1e-9) return -1;
    if (a->len > b->len + 1e-9) return 1;
    for (int c = 0; c < 3; c++)
        if (a->n[c] != b->n[c]) return a->n[c] > b->n[c] ? -1 : 1;
    return 0;
}

static void cross_int(const int a[3], const int b[3], int c[3])
{
    c[0] = a[1] * b[2] - a[2] * b[1];
    c[1] = a[2] * b[0] - a[0] * b[2];
    c[2] = a[0] * b[1] - a[1] * b[0];
}

static int det3(const int M[3][3])
{
    return M[0][0] * (M[1][1] * M[2][2] - M[1][2] * M[2][1]) -
           M[0][1] * (M[1][0] * M[2][2] - M[1][2] * M[2][0]) +
           M[0][2] * (M[1][0] * M[2][1] - M[1][1] * M[2][0]);
}

/* Candidate lattice vectors with |components| <= bound and G.n = target, sorted (cand_cmp).
 * In 2D only n3 = 0 is searched. The caller frees *out. */
static int candidates(const tb_model *m, const int G[3], int target, int bound, cand **out, int *count)
{
    int side = 2 * bound + 1;
    cand *c = malloc((size_t)side * side * side * sizeof *c);
    if (!c) return -1;
    int nc = 0;
    int zmax = m->dim == 2 ? 0 : bound;
    for (int a = -bound; a <= bound; a++)
        for (int b = -bound; b <= bound; b++)
            for (int z = -zmax; z <= zmax; z++) {
                if (a == 0 && b == 0 && z == 0) continue;
                if (G[0] * a + G[1] * b + G[2] * z != target) continue;
                cand *p = &c[nc++];
                p->n[0] = a;
                p->n[1] = b;
                p->n[2] = z;
                p->len = cart_len(m, p->n);
            }
    qsort(c, (size_t)nc, sizeof *c, cand_cmp);
    *out = c;
    *count = nc;
    return 0;
}

int slab_basis(const tb_model *bulk, const int miller[3], int M[3][3], bs_err *err)
{
    const int *G = miller;
    if (G[0] == 0 && G[1] == 0 && G[2] == 0)
        return bs_fail(err, BS_EINVAL, "slab direction: Miller indices 0,0,0 name no plane");
    if (bulk->dim == 2 && G[2] != 0)
        return bs_fail(err, BS_EINVAL,
                       "slab direction: a 2D model takes an edge h,k (third index 0), found %d,%d,%d", G[0],
                       G[1], G[2]);
    if (gcd_int(gcd_int(G[0], G[1]), G[2]) != 1)
        return bs_fail(err, BS_EINVAL, "slab direction: Miller indices %d,%d,%d must be coprime", G[0], G[1],
                       G[2]);
    int gmax = abs(G[0]) > abs(G[1]) ? abs(G[0]) : abs(G[1]);
    if (abs(G[2]) > gmax) gmax = abs(G[2]);
    if (gmax > 12)
        return bs_fail(err, BS_EINVAL,
                       "slab direction: Miller indices up to 12 are supported, found %d,%d,%d", G[0], G[1],
                       G[2]);
    /* A primitive in-plane basis exists within |n| <= max|G| (the vectors (G_j, -G_i, 0) style
     * combinations span it), and a step vector with G.n = 1 within the same bound (Bezout). */
    int bound = gmax + 1;
    cand *in = NULL, *step = NULL;
    int nin = 0, nstep = 0, rc = 0;
    if (candidates(bulk, G, 0, bound, &in, &nin) || candidates(bulk, G, 1, bound, &step, &nstep)) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory in the slab basis search");
        goto done;
    }
    memset(M, 0, 9 * sizeof(int));
    int found = 0;
    if (bulk->dim == 3) {
        for (int i = 0; i < nin && !found; i++)
            for (int j = i + 1; j < nin && !found; j++) {
                int c[3];
                cross_int(in[i].n, in[j].n, c);
                if ((c[0] == G[0] && c[1] == G[1] && c[2] == G[2]) ||
                    (c[0] == -G[0] && c[1] == -G[1] && c[2] == -G[2])) {
                    memcpy(M[0], in[i].n, sizeof M[0]);
                    memcpy(M[1], in[j].n, sizeof M[1]);
                    found = 1;
                }
            }
        if (found && nstep > 0) memcpy(M[2], step[0].n, sizeof M[2]);
    } else {
        /* The edge line's primitive vector is (-k, h) up to sign since gcd(h, k) = 1. */
        M[0][0] = -G[1];
        M[0][1] = G[0];
        M[2][2] = 1;
        if (nstep > 0) {
            memcpy(M[1], step[0].n, sizeof M[1]);
            found = 1;
        }
    }
    if (!found || nstep == 0) {
        rc = bs_fail(err, BS_EINVAL, "slab direction %d,%d,%d: no lattice basis found", G[0], G[1], G[2]);
        goto done;
    }
    if (det3(M) < 0)
        for (int c = 0; c < 3; c++)
            M[0][c] = -M[0][c];
    if (det3(M) != 1)
        rc = bs_fail(err, BS_EINVAL, "slab basis for %d,%d,%d is not unimodular", G[0], G[1], G[2]);
done:
    free(in);
    free(step);
    return rc;
}

/* Inverse transpose of a unimodular M: the cofactor matrix (det = 1), so x' = T x. Cyclic
 * indices give the cofactor signs. */
static void inv_transpose(const int M[3][3], int T[3][3])
{
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            int a0 = (i + 1) % 3, a1 = (i + 2) % 3, b0 = (j + 1) % 3, b1 = (j + 2) % 3;
            T[i][j] = M[a0][b0] * M[a1][b1] - M[a0][b1] * M[a1][b0];
        }
}

/* The rebased bulk: R' = M^{-T} R, then orbital o moves into its home layer by d_o = -shift_o e_ax
 * (tau~ = tau' + d_o), so that H~(R~)_mn = H(R)_mn with R~ = R' - d_n + d_m = R' + (shift_n -
 * shift_m) e_ax. The bulk spectrum is the same for either sign (a diagonal unitary in the lattice
 * gauge); only the slab's layer assignment tells them apart, which tests/scripts/surface_cli.py
 * checks against numpy. */
static int rebase(const tb_model *bulk, const int M[3][3], int ax, double cut, tb_model **out, bs_err *err)
{
    int rc = tb_model_copy(bulk, out, err);
    if (rc != 0) return rc;
    tb_model *m = *out;
    int T[3][3];
    inv_transpose(M, T);
    for (int i = 0; i < 3; i++)
        for (int c = 0; c < 3; c++) {
            double v = 0;
            for (int j = 0; j < 3; j++)
                v += M[i][j] * bulk->lattice[j][c];
            m->lattice[i][c] = v;
        }
    int *shift = malloc((size_t)m->nspatial * sizeof *shift);
    if (!shift) return bs_fail(err, BS_ENOMEM, "out of memory rebasing the slab");
    for (int o = 0; o < m->nspatial; o++) {
        double p[3];
        for (int i = 0; i < 3; i++) {
            p[i] = 0;
            for (int j = 0; j < 3; j++)
                p[i] += T[i][j] * bulk->orb_pos[o][j];
        }
        /* 1e-9 so that an orbital exactly on the cut plane stays in the layer above it. */
        shift[o] = (int)floor(p[ax] - cut + 1e-9);
        p[ax] -= shift[o];
        memcpy(m->orb_pos[o], p, sizeof p);
    }
    int n = m->norb;
    size_t nn = (size_t)n * n;
    /* Each (R, m, n) moves to R~ = R' + (d_m - d_n) e_ax: rebuild the table over the new set. */
    int dmax = 0;
    for (int o = 0; o < m->nspatial; o++)
        dmax = abs(shift[o]) > dmax ? abs(shift[o]) : dmax;
    tb_model *t = NULL;
    /* Upper bound on distinct R~: every R' with each of the 4 dmax + 1 offsets. */
    long cap = (long)bulk->nR * (4 * dmax + 1);
    if (cap > BS_MAX_NR) cap = BS_MAX_NR;
    rc = tb_model_create(n, (int)cap, bulk->spinful, &t, err);
    if (rc != 0) goto done;
    int nR = 0, noff = 4 * dmax + 1;
    int *slot = malloc((size_t)noff * sizeof *slot);
    if (!slot) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory rebasing the slab");
        goto done;
    }
    for (int r = 0; r < bulk->nR && rc == 0; r++) {
        int Rp[3];
        for (int i = 0; i < 3; i++) {
            Rp[i] = 0;
            for (int j = 0; j < 3; j++)
                Rp[i] += T[i][j] * bulk->R[r][j];
        }
        for (int o = 0; o < noff; o++)
            slot[o] = -1; /* index of R' + (o - 2 dmax) e_ax, found lazily */
        for (int a = 0; a < n && rc == 0; a++)
            for (int b = 0; b < n; b++) {
                double complex h = tb_hop(bulk, r, a, b) / bulk->deg[r];
                if (h == 0) continue;
                int off = shift[tb_state_orbital(bulk, b)] - shift[tb_state_orbital(bulk, a)];
                int *idx = &slot[off + 2 * dmax];
                if (*idx < 0) {
                    int Rt[3] = {Rp[0], Rp[1], Rp[2]};
                    Rt[ax] += off;
                    t->nR = nR;
                    *idx = tb_model_find_R(t, Rt);
                    if (*idx < 0) {
                        if (nR == cap) {
                            rc = bs_fail(err, BS_EINVAL, "slab: too many lattice vectors after rebasing");
                            break;
                        }
                        *idx = nR++;
                        memcpy(t->R[*idx], Rt, sizeof Rt);
                        t->deg[*idx] = 1;
                    }
                }
                t->H[(size_t)*idx * nn + (size_t)a * n + b] += h;
            }
    }
    free(slot);
    if (rc != 0) goto done;
    free(m->R);
    free(m->deg);
    m->R = t->R;
    m->deg = t->deg;
    tb_model_set_hops(m, t->H);
    t->R = NULL;
    t->deg = NULL;
    t->H = NULL;
    m->nR = nR;
    m->has_inversion_op = 0; /* the explicit operator's shifts refer to the old cell */
done:
    if (t) t->nR = 0;
    tb_model_free(t);
    free(shift);
    if (rc != 0) {
        tb_model_free(*out);
        *out = NULL;
    }
    return rc;
}

/* Groups the rebased hoppings by stacking distance for slab_coupling. */
static int group(slab *s, bs_err *err)
{
    const tb_model *m = s->rebased;
    int ax = s->ax, range = 0;
    for (int r = 0; r < m->nR; r++)
        range = abs(m->R[r][ax]) > range ? abs(m->R[r][ax]) : range;
    s->range = range;
    int nbin = 2 * range + 1;
    size_t nn = (size_t)s->norb * s->norb;
    s->first = calloc((size_t)nbin + 1, sizeof *s->first);
    s->rpar = malloc((size_t)m->nR * sizeof *s->rpar);
    s->hop = malloc((size_t)m->nR * nn * sizeof *s->hop);
    if (!s->first || !s->rpar || !s->hop) return bs_fail(err, BS_ENOMEM, "out of memory for the slab");
    int k = 0;
    for (int bin = 0; bin < nbin; bin++) {
        s->first[bin] = k;
        for (int r = 0; r < m->nR; r++) {
            if (m->R[r][ax] != bin - range) continue;
            s->rpar[k][0] = m->R[r][0];
            s->rpar[k][1] = ax == 2 ? m->R[r][1] : 0;
            const double complex *h = tb_hop_block(m, r, s->hop + (size_t)k * nn);
            if (h != s->hop + (size_t)k * nn) memcpy(s->hop + (size_t)k * nn, h, nn * sizeof *s->hop);
            k++;
        }
    }
    s->first[nbin] = k;
    s->blk = malloc((size_t)nbin * nn * sizeof *s->blk);
    if (!s->blk) return bs_fail(err, BS_ENOMEM, "out of memory for the slab");
    return 0;
}

int slab_create(const tb_model *bulk, const int miller[3], int nlayers, double cut, slab **out, bs_err *err)
{
    *out = NULL;
    if (nlayers < 1 || nlayers > BS_MAX_NORB / bulk->norb)
        return bs_fail(err, BS_EINVAL, "slab: layer count %d outside 1..%d for %d states per cell", nlayers,
                       BS_MAX_NORB / bulk->norb, bulk->norb);
    if (!isfinite(cut)) return bs_fail(err, BS_EINVAL, "slab: termination cut must be finite");
    slab *s = calloc(1, sizeof *s);
    if (!s) return bs_fail(err, BS_ENOMEM, "out of memory for the slab");
    s->dim = bulk->dim;
    s->ax = bulk->dim == 3 ? 2 : 1;
    s->kdim = bulk->dim - 1;
    s->norb = bulk->norb;
    s->nlayers = nlayers;
    int rc = slab_basis(bulk, miller, s->M, err);
    if (rc == 0) rc = rebase(bulk, s->M, s->ax, cut, &s->rebased, err);
    if (rc == 0) rc = group(s, err);
    if (rc != 0)
        slab_free(s);
    else
        *out = s;
    return rc;
}

void slab_free(slab *s)
{
    if (!s) return;
    tb_model_free(s->rebased);
    free(s->first);
    free(s->rpar);
    free(s->hop);
    free(s->blk);
    free(s);
}

int slab_nstates(const slab *s)
{
    return s->norb * s->nlayers;
}
int slab_nlayers(const slab *s)
{
    return s->nlayers;
}
int slab_norb(const slab *s)
{
    return s->norb;
}
int slab_kdim(const slab *s)
{
    return s->kdim;
}
int slab_range(const slab *s)
{
    return s->range;
}
const tb_model *slab_rebased(const slab *s)
{
    return s->rebased;
}
void slab_matrix(const slab *s, int M[3][3])
{
    memcpy(M, s->M, sizeof s->M);
}

void slab_coupling(const slab *s, const double kpar[2], int r, double complex *out)
{
    int n = s->norb;
    size_t nn = (size_t)n * n;
    memset(out, 0, nn * sizeof *out);
    if (r < -s->range || r > s->range) return;
    int bin = r + s->range;
    double k2 = s->kdim == 2 ? kpar[1] : 0.0;
    for (int e = s->first[bin]; e < s->first[bin + 1]; e++) {
        double ph = 2 * M_PI * (kpar[0] * s->rpar[e][0] + k2 * s->rpar[e][1]);
        double complex f = cexp(I * ph);
        const double complex *h = s->hop + (size_t)e * nn;
        /* model.h stores row-major (m*norb + n); out is column-major. */
        for (int a = 0; a < n; a++)
            for (int b = 0; b < n; b++)
                out[a + (size_t)b * n] += f * h[(size_t)a * n + b];
    }
}

void slab_hk(const slab *s, const double kpar[2], double complex *H)
{
    int n = s->norb, N = s->nlayers, ns = n * N, L = s->range;
    size_t nn = (size_t)n * n;
    memset(H, 0, (size_t)ns * ns * sizeof *H);
    for (int r = -L; r <= L; r++)
        slab_coupling(s, kpar, r, s->blk + (size_t)(r + L) * nn);
    for (int j = 0; j < N; j++)
        for (int jp = j - L; jp <= j + L; jp++) {
            if (jp < 0 || jp >= N) continue;
            /* Block (j, jp) = <j|H|jp> = coupling at distance jp - j. */
            const double complex *c = s->blk + (size_t)(jp - j + L) * nn;
            for (int b = 0; b < n; b++)
                for (int a = 0; a < n; a++)
                    H[(size_t)(j * n + a) + (size_t)(jp * n + b) * ns] = c[a + (size_t)b * n];
        }
}

void slab_weights(const slab *s, const double complex *v, int nsurf, double *w_top, double *w_bottom)
{
    int n = s->norb, N = s->nlayers;
    if (nsurf > N) nsurf = N;
    double top = 0, bot = 0;
    for (int j = 0; j < nsurf; j++)
        for (int a = 0; a < n; a++) {
            double complex b = v[(size_t)j * n + a], t = v[(size_t)(N - 1 - j) * n + a];
            bot += creal(b) * creal(b) + cimag(b) * cimag(b);
            top += creal(t) * creal(t) + cimag(t) * cimag(t);
        }
    *w_top = top;
    *w_bottom = bot;
}

/* Film index of bulk state i (orbital o, spin sp) in layer j, in TB_SPIN_BLOCKS order. */
static int film_state(const tb_model *bulk, int nlayers, int j, int i)
{
    int o = tb_state_orbital(bulk, i), sp = tb_state_spin(bulk, i);
    return sp * nlayers * bulk->nspatial + j * bulk->nspatial + o;
}

int slab_film_model(const slab *s, const tb_model *bulk, tb_model **out, bs_err *err)
{
    *out = NULL;
    if (s->kdim != 2) return bs_fail(err, BS_EINVAL, "film: needs a 3D bulk (a 2D bulk gives a ribbon)");
    const tb_model *m = s->rebased;
    int n = s->norb, N = s->nlayers, nf = n * N, L = s->range;
    /* distinct in-plane R' */
    int(*Rp)[2] = malloc((size_t)m->nR * sizeof *Rp), nRp = 0;
    if (!Rp) return bs_fail(err, BS_ENOMEM, "out of memory for a film");
    for (int r = 0; r < m->nR; r++) {
        int seen = 0;
        for (int q = 0; q < nRp && !seen; q++)
            seen = Rp[q][0] == m->R[r][0] && Rp[q][1] == m->R[r][1];
        if (!seen) {
            Rp[nRp][0] = m->R[r][0];
            Rp[nRp][1] = m->R[r][1];
            nRp++;
        }
    }
    tb_model *f = NULL;
    int rc = tb_model_create(nf, nRp, bulk->spinful, &f, err);
    if (rc != 0) {
        free(Rp);
        return rc;
    }
    snprintf(f->id, sizeof f->id, "%.80s film (%d,%d,%d)x%d", bulk->id, s->M[2][0], s->M[2][1], s->M[2][2],
             N);
    snprintf(f->formula, sizeof f->formula, "%s", bulk->formula);
    snprintf(f->source, sizeof f->source, "film of %d layers cut from %.200s", N, bulk->id);
    f->dim = 2;
    f->nocc = N * bulk->nocc;
    f->spin_layout = bulk->spinful ? TB_SPIN_BLOCKS : TB_SPIN_NONE;
    /* lattice: the two in-plane rows, and the unit normal times the film thickness plus vacuum */
    const double(*a)[3] = (const double(*)[3])m->lattice;
    double nrm[3] = {a[0][1] * a[1][2] - a[0][2] * a[1][1], a[0][2] * a[1][0] - a[0][0] * a[1][2],
                     a[0][0] * a[1][1] - a[0][1] * a[1][0]};
    double ln = sqrt(nrm[0] * nrm[0] + nrm[1] * nrm[1] + nrm[2] * nrm[2]);
    for (int c = 0; c < 3; c++)
        nrm[c] /= ln;
    double spacing = fabs(a[2][0] * nrm[0] + a[2][1] * nrm[1] + a[2][2] * nrm[2]);
    double height = N * spacing + 20.0;
    for (int c = 0; c < 3; c++) {
        f->lattice[0][c] = a[0][c];
        f->lattice[1][c] = a[1][c];
        f->lattice[2][c] = nrm[c] * height;
    }
    /* positions: Cartesian in the rebased cell, then reduced in the film cell */
    double inv[3][3], (*lat)[3] = f->lattice;
    double det = lat[0][0] * (lat[1][1] * lat[2][2] - lat[1][2] * lat[2][1]) -
                 lat[0][1] * (lat[1][0] * lat[2][2] - lat[1][2] * lat[2][0]) +
                 lat[0][2] * (lat[1][0] * lat[2][1] - lat[1][1] * lat[2][0]);
    /* inv = (lat^T)^{-1}: reduced x solves x^T lat = r^T */
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            int i1 = (j + 1) % 3, i2 = (j + 2) % 3, j1 = (i + 1) % 3, j2 = (i + 2) % 3;
            inv[i][j] = (lat[i1][j1] * lat[i2][j2] - lat[i1][j2] * lat[i2][j1]) / det;
        }
    for (int j = 0; j < N; j++)
        for (int o = 0; o < m->nspatial; o++) {
            double red[3] = {m->orb_pos[o][0], m->orb_pos[o][1], m->orb_pos[o][2] + j}, r[3] = {0, 0, 0};
            for (int c = 0; c < 3; c++)
                for (int q = 0; q < 3; q++)
                    r[c] += red[q] * a[q][c];
            int fo = j * m->nspatial + o;
            for (int q = 0; q < 3; q++) {
                double x = 0;
                for (int c = 0; c < 3; c++)
                    x += r[c] * inv[q][c];
                f->orb_pos[fo][q] = x;
            }
            f->orb_l[fo] = m->orb_l[o];
        }
    size_t nfn = (size_t)nf * nf;
    for (int q = 0; q < nRp; q++) {
        f->R[q][0] = Rp[q][0];
        f->R[q][1] = Rp[q][1];
        f->R[q][2] = 0;
        f->deg[q] = 1;
    }
    for (int r = 0; r < m->nR; r++) {
        int q = 0;
        while (Rp[q][0] != m->R[r][0] || Rp[q][1] != m->R[r][1])
            q++;
        int dz = m->R[r][2];
        if (dz < -L || dz > L) continue;
        double complex *hf = f->H + (size_t)q * nfn;
        for (int j = 0; j < N; j++) {
            int jp = j + dz;
            if (jp < 0 || jp >= N) continue;
            for (int x = 0; x < n; x++)
                for (int y = 0; y < n; y++) {
                    double complex v = tb_hop(m, r, x, y) / m->deg[r];
                    if (v == 0) continue;
                    hf[(size_t)film_state(bulk, N, j, x) * nf + film_state(bulk, N, jp, y)] += v;
                }
        }
    }
    free(Rp);
    *out = f;
    return 0;
}
