/* Time reversal and inversion: candidate operators from the spin layout, the orbital positions and
 * angular momenta (or the card's explicit operator), each verified on H(k) at random k.
 * Operator conventions and the derivation of P(k) in the lattice gauge: include/bandsieve/symmetry.h. */
#include "bandsieve/symmetry.h"

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/hk.h"

/* A permutation of the basis states with a unit factor per state, optional k-dependent phases
 * (shift) and optionally antiunitary (the complex conjugation K acts before the permutation). */
typedef struct sym_op {
    int *perm;
    double complex *fac;
    int (*shift)[3]; /* NULL: no phases */
    int anti;
} sym_op;

static void op_clear(sym_op *op)
{
    free(op->perm);
    free(op->fac);
    free(op->shift);
    memset(op, 0, sizeof *op);
}

static int op_alloc(sym_op *op, int n, int with_shift)
{
    memset(op, 0, sizeof *op);
    if (n <= 0) return -1;
    op->perm = malloc((size_t)n * sizeof *op->perm);
    op->fac = malloc((size_t)n * sizeof *op->fac);
    if (with_shift) op->shift = calloc((size_t)n, sizeof *op->shift);
    if (!op->perm || !op->fac || (with_shift && !op->shift)) {
        op_clear(op);
        return -1;
    }
    return 0;
}

/* splitmix64: a small, well-mixed generator whose whole state is the caller's 64-bit word. */
static uint64_t sm64_next(uint64_t *state)
{
    uint64_t z = (*state += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
}

static double sm64_unit(uint64_t *state)
{
    return (double)(sm64_next(state) >> 11) * 0x1.0p-53;
}

void sym_opts_default(sym_opts *o)
{
    memset(o, 0, sizeof *o);
    o->nk = 6;
    o->seed = 1;
    /* 1e-6 relative: exact models verify at round-off (1e-15); hopping tables printed with six
     * decimals carry ~1e-6 eV noise on eV-sized elements (common practice). */
    o->tol = 1e-6;
    /* 1e-3 reduced (a few mAngstrom): centres of unsymmetrised Wannier fits sit this far off their
     * sites (common practice); a match only proposes a map, and H(k) decides. */
    o->pos_tol = 1e-3;
    /* 0.05 Angstrom: centres of Wannier functions that were not symmetrised sit up to a few
     * hundredths of an Angstrom off their atoms (common practice); the reduced tolerance alone
     * would depend on the cell size. */
    o->pos_tol_ang = 0.05;
    o->skip_inversion = 0;
}

static void opts_resolve(const sym_opts *in, sym_opts *o)
{
    sym_opts_default(o);
    if (!in) return;
    if (in->nk > 0) o->nk = in->nk;
    o->seed = in->seed;
    if (in->tol > 0) o->tol = in->tol;
    if (in->pos_tol > 0) o->pos_tol = in->pos_tol;
    if (in->pos_tol_ang > 0) o->pos_tol_ang = in->pos_tol_ang;
    o->skip_inversion = in->skip_inversion;
    o->hk = in->hk;
}

static double complex op_phase(const sym_op *op, int i, const double k[3])
{
    if (!op->shift) return 1.0;
    double kr = k[0] * op->shift[i][0] + k[1] * op->shift[i][1] + k[2] * op->shift[i][2];
    return cexp(2.0 * M_PI * I * kr);
}

/* Residual of g(H(k)) against H(-k), both column-major n x n:
 * g(H)[p(a), p(b)] = f_a conj(f_b) ph_a conj(ph_b) H[a,b]  (conj(H[a,b]) when antiunitary).
 * Returns the relative Frobenius residual; *abs_ev gets the largest element difference. */
static double op_residual(const sym_op *op, int n, const double k[3], const double complex *Hk,
                          const double complex *Hmk, double complex *ph, double *abs_ev)
{
    for (int a = 0; a < n; a++)
        ph[a] = op->fac[a] * op_phase(op, a, k);
    double diff2 = 0, norm2 = 0, maxabs = 0;
    for (int b = 0; b < n; b++) {
        int pb = op->perm[b];
        double complex cb = conj(ph[b]);
        for (int a = 0; a < n; a++) {
            double complex h = Hk[a + (size_t)b * n];
            if (op->anti) h = conj(h);
            double complex d = ph[a] * cb * h - Hmk[op->perm[a] + (size_t)pb * n];
            double ad = cabs(d);
            diff2 += ad * ad;
            norm2 += creal(h) * creal(h) + cimag(h) * cimag(h);
            if (ad > maxabs) maxabs = ad;
        }
    }
    *abs_ev = maxabs;
    return norm2 > 0 ? sqrt(diff2 / norm2) : sqrt(diff2);
}

/* Work shared by every check: the engine, the random k-points and two H(k) buffers. */
typedef struct sym_ctx {
    const tb_model *m;
    hk_engine *hk;
    int nk;
    double *kpts;          /* 6 * nk: pairs (k, -k) */
    double complex *H;     /* 2 * norb^2 */
    double complex *ph;    /* norb */
    double complex *guess; /* norb */
    int *comp, *done;      /* norb each: block roots and bookkeeping of the factor solver */
    double tol;
} sym_ctx;

/* Largest residual of op over the k-points; stops early (keeping the failing value) once it
 * exceeds tol, since a rejected candidate needs no more evidence. */
static int op_verify(sym_ctx *c, const sym_op *op, double *rel, double *abs_ev, bs_err *err)
{
    int n = c->m->norb;
    *rel = 0;
    *abs_ev = 0;
    for (int j = 0; j < c->nk; j++) {
        int rc = hk_build(c->hk, 2, c->kpts + 6 * j, c->H, err);
        if (rc != 0) return rc;
        double a;
        double r = op_residual(op, n, c->kpts + 6 * j, c->H, c->H + (size_t)n * n, c->ph, &a);
        if (r > *rel) *rel = r;
        if (a > *abs_ev) *abs_ev = a;
        if (*rel > c->tol) break;
    }
    return 0;
}

/* Solves the factors x of op from H(k0), H(-k0): each element gives x_a conj(x_b) =
 * H(-k0)[p(a), p(b)] / g(H(k0)[a, b]). The factors are propagated along a maximum spanning forest
 * of |H(k0)| (Prim's algorithm on the dense matrix: O(n^2) time, O(n) memory), so the strongest
 * elements fix them and noise in weak ones does not enter; elements below 1e-12 of the largest
 * are round-off, not links. On entry guess holds the usual-gauge factors, which set the one free
 * phase of each block (at its first state, the block root); comp receives each state's root.
 * spin_ratio: x_up / x_down imposed on every orbital of a spinful model, as links stronger than
 * any element: inversion leaves spin alone (+1), time reversal is i s_y on it (-1), whatever the
 * orbital phases. Without this a spin rotation combined with the map (a C2 about z for a flat
 * layer, say) could pass as "inversion" and anticommute with Theta. */
static int solve_factors(sym_ctx *c, sym_op *op, const double complex *guess, double spin_ratio, int *comp,
                         bs_err *err)
{
    const tb_model *m = c->m;
    int n = m->norb;
    const double *k = c->kpts;
    int rc = hk_build(c->hk, 2, k, c->H, err);
    if (rc != 0) return rc;
    const double complex *Hk = c->H, *Hm = c->H + (size_t)n * n;
    double *key = malloc((size_t)n * sizeof *key);
    int *from = malloc((size_t)n * sizeof *from), *mate = malloc((size_t)n * sizeof *mate);
    char *in = calloc((size_t)n, 1);
    if (!key || !from || !mate || !in) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory solving the factors of %d states", n);
        goto done;
    }
    double maxabs = 0;
    for (size_t i = 0; i < (size_t)n * n; i++)
        if (cabs(Hk[i]) > maxabs) maxabs = cabs(Hk[i]);
    double thr = 1e-12 * maxabs;
    for (int a = 0; a < n; a++) {
        key[a] = -1;
        from[a] = -1;
        mate[a] = m->spinful ? tb_state_index(m, tb_state_orbital(m, a), 1 - tb_state_spin(m, a)) : -1;
    }
    for (int added = 0; added < n; added++) {
        int v = -1;
        for (int a = 0; a < n; a++)
            if (!in[a] && (v < 0 || key[a] > key[v])) v = a;
        in[v] = 1;
        int u = key[v] > thr ? from[v] : -1;
        if (u < 0) {
            comp[v] = v;
            op->fac[v] = guess[v];
        } else if (mate[v] == u) {
            comp[v] = comp[u];
            op->fac[v] = spin_ratio * op->fac[u]; /* spin_ratio = +-1 is its own inverse */
        } else {
            double complex h = Hk[v + (size_t)u * n];
            double complex g = op->anti ? conj(h) : op_phase(op, v, k) * conj(op_phase(op, u, k)) * h;
            double complex r = Hm[op->perm[v] + (size_t)op->perm[u] * n] / g;
            comp[v] = comp[u];
            op->fac[v] = (cabs(r) > 0 ? r / cabs(r) : 1.0) * op->fac[u];
        }
        for (int w = 0; w < n; w++) {
            if (in[w]) continue;
            double wt = w == mate[v] ? INFINITY : cabs(Hk[w + (size_t)v * n]);
            if (wt > thr && wt > key[w]) {
                key[w] = wt;
                from[w] = v;
            }
        }
    }
done:
    free(key);
    free(from);
    free(mate);
    free(in);
    return rc;
}

static void scale_block(int n, const int *comp, int block, double complex f, double complex *x)
{
    for (int a = 0; a < n; a++)
        if (comp[a] == block) x[a] *= f;
}

/* P^2 = 1 (P(-k) P(k) = 1) needs x_a x_{p(a)} = 1: it fixes the partner block's phase, or, for a
 * block mapped onto itself, its phase up to a sign, taken closest to the usual-gauge guess. */
static void tie_inversion(int n, sym_op *op, const int *comp, const double complex *guess, int *done)
{
    double complex *x = op->fac;
    memset(done, 0, (size_t)n * sizeof *done);
    for (int a = 0; a < n; a++) {
        int C = comp[a], pa = op->perm[a], D = comp[pa];
        if (done[C]) continue;
        done[C] = 1;
        if (D == C) {
            double complex e = cexp(-0.5 * I * carg(x[a] * x[pa]));
            if (creal(e * x[a] * conj(guess[a])) < 0) e = -e;
            scale_block(n, comp, C, e, x);
        } else if (!done[D]) {
            scale_block(n, comp, D, conj(x[a]) / x[pa], x);
            done[D] = 1;
        }
    }
}

/* Whether P and Theta commute at state a: P(-k) U = U P(k)^* needs t(p(a)) = p(t(a)), equal shifts
 * and x_{t(a)} u_a = u_{p(a)} conj(x_a). Returns the mismatch of the factors (-1 when the maps
 * themselves do not commute). */
static double commute_mismatch(const sym_op *inv, const int *tperm, const double complex *u, int a)
{
    int pa = inv->perm[a], ta = tperm[a];
    if (tperm[pa] != inv->perm[ta]) return -1;
    for (int d = 0; d < 3; d++)
        if (inv->shift && inv->shift[a][d] != inv->shift[ta][d]) return -1;
    return cabs(inv->fac[ta] * u[a] - u[pa] * conj(inv->fac[a]));
}

/* Theta = K (spinless) or i s_y K on the spin index of each spatial orbital (spinful). */
static int build_tr(const tb_model *m, sym_op *op)
{
    if (op_alloc(op, m->norb, 0) != 0) return -1;
    op->anti = 1;
    for (int i = 0; i < m->norb; i++) {
        if (!m->spinful) {
            op->perm[i] = i;
            op->fac[i] = 1;
            continue;
        }
        int o = tb_state_orbital(m, i), s = tb_state_spin(m, i);
        /* i s_y = [[0, 1], [-1, 0]] in (up, down): up -> -down, down -> +up. */
        op->perm[i] = tb_state_index(m, o, 1 - s);
        op->fac[i] = s == 0 ? -1.0 : 1.0;
    }
    return 0;
}

/* Tolerance for matching orbital positions: within `red` in every reduced coordinate, or within
 * `ang` Angstrom in Cartesian distance (lattice rows `lat`), whichever is looser. */
typedef struct site_tol {
    double red, ang;
    const double (*lat)[3];
} site_tol;

/* Same site modulo a lattice vector in the periodic directions, equal in the others. */
static int same_site(const double *x, const double *y, int dim, const site_tol *tol, int shift[3])
{
    double rem[3];
    int r[3], red_ok = 1;
    for (int d = 0; d < 3; d++) {
        double diff = x[d] - y[d];
        double ri = d < dim ? nearbyint(diff) : 0.0;
        r[d] = (int)ri;
        rem[d] = diff - ri;
        if (fabs(rem[d]) > tol->red) red_ok = 0;
    }
    if (!red_ok) {
        double cart2 = 0;
        for (int j = 0; j < 3; j++) {
            double cj = 0;
            for (int d = 0; d < 3; d++)
                cj += rem[d] * tol->lat[d][j];
            cart2 += cj * cj;
        }
        if (!(sqrt(cart2) <= tol->ang)) return 0;
    }
    if (shift) memcpy(shift, r, sizeof r);
    return 1;
}

/* rank[a]: how many earlier orbitals share a's site and l; used to pair the j-th orbital of a
 * shell at tau with the j-th orbital of the same shell at the image site (order of appearance). */
static void shell_ranks(const tb_model *m, const site_tol *tol, int *rank, int *size)
{
    int ns = m->nspatial;
    for (int a = 0; a < ns; a++) {
        rank[a] = 0;
        size[a] = 0;
        for (int b = 0; b < ns; b++) {
            if (m->orb_l[b] != m->orb_l[a] || !same_site(m->orb_pos[a], m->orb_pos[b], m->dim, tol, NULL))
                continue;
            size[a]++;
            if (b < a) rank[a]++;
        }
    }
}

/* Spatial map for inversion about centre c: orbital a at tau_a goes to the orbital b of the same
 * l and shell rank at 2c - tau_a (mod lattice), with parity (-1)^l. 1 on success, 0 when some
 * orbital has no image or the map is not a bijection. */
static int match_positions(const tb_model *m, const double c[3], const site_tol *tol, const int *rank,
                           const int *size, int *sperm, int (*sshift)[3], int *used)
{
    int ns = m->nspatial;
    memset(used, 0, (size_t)ns * sizeof *used);
    for (int a = 0; a < ns; a++) {
        double t[3];
        for (int d = 0; d < 3; d++)
            t[d] = 2.0 * c[d] - m->orb_pos[a][d];
        int found = -1;
        for (int b = 0; b < ns && found < 0; b++) {
            if (m->orb_l[b] != m->orb_l[a] || rank[b] != rank[a] || size[b] != size[a]) continue;
            if (same_site(t, m->orb_pos[b], m->dim, tol, sshift[a])) found = b;
        }
        if (found < 0 || used[found]) return 0;
        used[found] = 1;
        sperm[a] = found;
    }
    return 1;
}

/* Expands a spatial map to the basis states: spin unchanged, factor (-1)^l. */
static void expand_spatial(const tb_model *m, const int *sperm, const int (*sshift)[3], sym_op *op)
{
    for (int i = 0; i < m->norb; i++) {
        int o = tb_state_orbital(m, i), s = tb_state_spin(m, i);
        op->perm[i] = tb_state_index(m, sperm[o], s);
        op->fac[i] = (m->orb_l[o] % 2) ? -1.0 : 1.0;
        for (int d = 0; d < 3; d++)
            op->shift[i][d] = m->dim == 2 && d == 2 ? 0 : sshift[o][d];
    }
}

/* The card's operator, checked to be a signed permutation that squares to one: P(-k) P(k) = 1
 * needs perm[perm[i]] = i, sign[i] sign[perm[i]] = 1 and shift[perm[i]] = shift[i]. */
static int card_operator(const tb_model *m, sym_op *op, bs_err *err)
{
    int n = m->norb;
    if (!m->inv_perm || !m->inv_sign || !m->inv_shift)
        return bs_fail(err, BS_EINVAL, "inversion operator flagged but its arrays are missing");
    for (int i = 0; i < n; i++)
        if (m->inv_perm[i] < 0 || m->inv_perm[i] >= n)
            return bs_fail(err, BS_EINVAL, "inversion operator: state %d maps to %d, outside 1..%d", i + 1,
                           m->inv_perm[i] + 1, n);
    for (int i = 0; i < n; i++) {
        int j = m->inv_perm[i];
        if (fabs(fabs(m->inv_sign[i]) - 1.0) > 1e-9)
            return bs_fail(err, BS_EINVAL, "inversion operator: factor of state %d is %g, expected +1 or -1",
                           i + 1, m->inv_sign[i]);
        int shift_ok = 1;
        for (int d = 0; d < 3; d++)
            if (m->inv_shift[j][d] != m->inv_shift[i][d] && !(m->dim == 2 && d == 2)) shift_ok = 0;
        if (m->inv_perm[j] != i || m->inv_sign[i] * m->inv_sign[j] < 0 || !shift_ok)
            return bs_fail(err, BS_EINVAL,
                           "inversion operator does not square to one: state %d -> %d -> %d "
                           "(factors %g, %g)",
                           i + 1, j + 1, m->inv_perm[j] + 1, m->inv_sign[i], m->inv_sign[j]);
    }
    if (op_alloc(op, n, 1) != 0) return bs_fail(err, BS_ENOMEM, "out of memory for an operator");
    for (int i = 0; i < n; i++) {
        op->perm[i] = m->inv_perm[i];
        op->fac[i] = m->inv_sign[i] < 0 ? -1.0 : 1.0;
        for (int d = 0; d < 3; d++)
            op->shift[i][d] = m->dim == 2 && d == 2 ? 0 : m->inv_shift[i][d];
    }
    return 0;
}

/* Moves op into the inversion slot of s with its residuals. */
static void keep_inversion(sym_info *s, sym_op *op, int source, const double c[3], double rel, double ab)
{
    free(s->inv_perm);
    free(s->inv_factor);
    free(s->inv_shift);
    s->inv_perm = op->perm;
    s->inv_factor = op->fac;
    s->inv_shift = op->shift;
    memset(op, 0, sizeof *op);
    s->inv_source = source;
    s->inv_residual = rel;
    s->inv_residual_ev = ab;
    for (int d = 0; d < 3; d++)
        s->inv_centre[d] = c ? c[d] : 0.0;
}

static void note_append(sym_info *s, const char *text)
{
    size_t len = strlen(s->note);
    if (len + 3 >= sizeof s->note) return;
    snprintf(s->note + len, sizeof s->note - len, "%s%s", len ? "; " : "", text);
}

/* Tracks the best inversion candidate: the first that passes, else the smallest residual. */
static int consider(sym_ctx *c, sym_info *s, sym_op *op, int source, const double centre[3], bs_err *err)
{
    double rel, ab;
    int rc = op_verify(c, op, &rel, &ab, err);
    if (rc != 0) return rc;
    if (rel <= c->tol) {
        keep_inversion(s, op, source, centre, rel, ab);
        s->inversion = 1;
    } else if (s->inv_source == SYM_INV_NONE || rel < s->inv_residual) {
        keep_inversion(s, op, source, centre, rel, ab);
    }
    op_clear(op);
    return 0;
}

/* 2c equal modulo lattice vectors (in the periodic directions): centres giving the same verdict. */
static int same_centre2(const double *c2a, const double *c2b, int dim, const site_tol *tol)
{
    site_tol twice = {2 * tol->red, 2 * tol->ang, tol->lat};
    return same_site(c2a, c2b, dim, &twice, NULL);
}

/* Centres tried: the origin, then (tau_0 + tau_j)/2 for every j sharing orbital 0's l, skipping
 * centres equivalent to one already tried (c and c + L/2 are centres together, because inversion
 * about c + L/2 is inversion about c followed by the translation L). */
static int inversion_from_positions(sym_ctx *c, sym_info *s, const site_tol *pos_tol, bs_err *err)
{
    const tb_model *m = c->m;
    int ns = m->nspatial, rc = 0, matched = 0;
    int *rank = malloc((size_t)ns * sizeof *rank), *size = malloc((size_t)ns * sizeof *size);
    int *sperm = malloc((size_t)ns * sizeof *sperm), *used = malloc((size_t)ns * sizeof *used);
    int(*sshift)[3] = malloc((size_t)ns * sizeof *sshift);
    double(*tried)[3] = malloc((size_t)(ns + 1) * sizeof *tried);
    sym_op op = {0};
    if (!rank || !size || !sperm || !used || !sshift || !tried) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory matching %d orbital positions", ns);
        goto done;
    }
    shell_ranks(m, pos_tol, rank, size);
    int ntried = 0;
    for (int j = -1; j < ns && !s->inversion; j++) {
        double centre[3] = {0, 0, 0}, c2[3] = {0, 0, 0};
        if (j >= 0) {
            if (m->orb_l[j] != m->orb_l[0]) continue;
            for (int d = 0; d < 3; d++) {
                c2[d] = m->orb_pos[0][d] + m->orb_pos[j][d];
                centre[d] = 0.5 * c2[d];
            }
        }
        int seen = 0;
        for (int t = 0; t < ntried && !seen; t++)
            seen = same_centre2(tried[t], c2, m->dim, pos_tol);
        if (seen) continue;
        memcpy(tried[ntried++], c2, sizeof c2);
        if (!match_positions(m, centre, pos_tol, rank, size, sperm, sshift, used)) continue;
        matched = 1;
        if (op_alloc(&op, m->norb, 1) != 0) {
            rc = bs_fail(err, BS_ENOMEM, "out of memory for an operator");
            goto done;
        }
        expand_spatial(m, sperm, (const int(*)[3])sshift, &op);
        memcpy(c->guess, op.fac, (size_t)m->norb * sizeof *op.fac);
        rc = solve_factors(c, &op, c->guess, 1.0, c->comp, err);
        if (rc != 0) goto done;
        tie_inversion(m->norb, &op, c->comp, c->guess, c->done);
        rc = consider(c, s, &op, SYM_INV_POSITIONS, centre, err);
        if (rc != 0) goto done;
    }
    if (!matched)
        note_append(s, "no orbital map r -> 2c - r preserves positions and l");
    else if (!s->inversion) {
        char text[96];
        snprintf(text, sizeof text, "inversion from positions fails on H(k): residual %.3g", s->inv_residual);
        note_append(s, text);
    }
done:
    op_clear(&op);
    free(rank);
    free(size);
    free(sperm);
    free(used);
    free(sshift);
    free(tried);
    return rc;
}

static int detect_inversion(sym_ctx *c, sym_info *s, const site_tol *pos_tol, bs_err *err)
{
    if (c->m->has_inversion_op) {
        sym_op op = {0};
        int rc = card_operator(c->m, &op, err);
        if (rc != 0) return rc;
        rc = consider(c, s, &op, SYM_INV_CARD, NULL, err);
        if (rc != 0 || s->inversion) return rc;
        char text[96];
        snprintf(text, sizeof text, "card inversion operator fails on H(k): residual %.3g", s->inv_residual);
        note_append(s, text);
    }
    return inversion_from_positions(c, s, pos_tol, err);
}

/* Theta = U K with the map of the spin layout; factors solved from H(k) and tied by Theta^2. */
static int detect_tr(sym_ctx *c, sym_info *s, bs_err *err)
{
    const tb_model *m = c->m;
    int n = m->norb;
    double target = m->spinful ? -1.0 : 1.0;
    sym_op op = {0};
    if (build_tr(m, &op) != 0) return bs_fail(err, BS_ENOMEM, "out of memory for an operator");
    memcpy(c->guess, op.fac, (size_t)n * sizeof *op.fac);
    int rc = solve_factors(c, &op, c->guess, -1.0, c->comp, err);
    if (rc == 0) rc = op_verify(c, &op, &s->tr_residual, &s->tr_residual_ev, err);
    if (rc == 0) {
        /* Theta^2 = U U^* is a property of the operator, not of H; the spin links of solve_factors
         * make it -1 (spinful) or +1 by construction, checked here because it decides Kramers
         * pairing. The factors are unit numbers: 1e-6 is far above their round-off. */
        double sq = 0;
        for (int a = 0; a < n; a++) {
            double d = cabs(op.fac[op.perm[a]] * conj(op.fac[a]) - target);
            if (d > sq) sq = d;
        }
        s->time_reversal = s->tr_residual <= c->tol && sq <= 1e-6;
        s->tr_perm = op.perm;
        s->tr_factor = op.fac;
        op.perm = NULL;
        op.fac = NULL;
        if (!s->time_reversal) {
            char text[120];
            if (s->tr_residual > c->tol)
                snprintf(text, sizeof text, "time reversal %s fails on H(k): residual %.3g",
                         m->spinful ? "i s_y K" : "K", s->tr_residual);
            else
                snprintf(text, sizeof text, "antiunitary symmetry found but Theta^2 != %+g", target);
            note_append(s, text);
        }
    }
    op_clear(&op);
    return rc;
}

/* P Theta = Theta P on every state, factors within 1e-6 (unit numbers, see detect_tr). */
static int inversion_commutes(const sym_info *s)
{
    sym_op inv = {.perm = s->inv_perm, .fac = s->inv_factor, .shift = s->inv_shift};
    for (int a = 0; a < s->norb; a++) {
        double d = commute_mismatch(&inv, s->tr_perm, s->tr_factor, a);
        if (d < 0 || d > 1e-6) return 0;
    }
    return 1;
}

/* Random k in the periodic directions, each paired with -k for one batch of two. */
static void draw_kpoints(sym_ctx *c, unsigned long long seed)
{
    uint64_t state = seed;
    for (int j = 0; j < c->nk; j++)
        for (int d = 0; d < 3; d++) {
            double x = d < c->m->dim ? sm64_unit(&state) : 0.0;
            c->kpts[6 * j + d] = x;
            c->kpts[6 * j + 3 + d] = -x;
        }
}

int sym_detect(const tb_model *m, const sym_opts *opts, sym_info **out, bs_err *err)
{
    *out = NULL;
    sym_opts o;
    opts_resolve(opts, &o);
    int n = m->norb, rc = 0;
    sym_ctx c = {.m = m, .nk = o.nk, .tol = o.tol};
    sym_info *s = calloc(1, sizeof *s);
    c.kpts = malloc((size_t)6 * o.nk * sizeof *c.kpts);
    c.H = malloc((size_t)2 * n * n * sizeof *c.H);
    c.ph = malloc((size_t)n * sizeof *c.ph);
    c.guess = malloc((size_t)n * sizeof *c.guess);
    c.comp = malloc((size_t)n * sizeof *c.comp);
    c.done = malloc((size_t)n * sizeof *c.done);
    if (!s || !c.kpts || !c.H || !c.ph || !c.guess || !c.comp || !c.done) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory for the symmetry check of %d states", n);
        goto done;
    }
    s->norb = n;
    s->dim = m->dim;
    s->spinful = m->spinful;
    s->tr_squared = m->spinful ? -1 : 1;
    s->inv_residual = s->inv_residual_ev = -1;
    hk_engine *own = NULL;
    if (o.hk && hk_norb(o.hk) == n && hk_max_batch(o.hk) >= 2)
        c.hk = o.hk;
    else
        rc = hk_create(m, 2, &own, err), c.hk = own;
    if (rc != 0) goto done;
    draw_kpoints(&c, o.seed);
    rc = detect_tr(&c, s, err);
    site_tol st = {o.pos_tol, o.pos_tol_ang, (const double(*)[3])m->lattice};
    if (rc == 0 && !o.skip_inversion) rc = detect_inversion(&c, s, &st, err);
    if (rc == 0 && s->time_reversal && s->inversion) s->inv_commutes_tr = inversion_commutes(s);
    if (rc == 0) {
        *out = s;
        s = NULL;
    }
done:
    sym_info_free(s);
    hk_free(own);
    free(c.kpts);
    free(c.H);
    free(c.ph);
    free(c.guess);
    free(c.comp);
    free(c.done);
    return rc;
}

void sym_info_free(sym_info *s)
{
    if (!s) return;
    free(s->tr_perm);
    free(s->tr_factor);
    free(s->inv_perm);
    free(s->inv_factor);
    free(s->inv_shift);
    free(s);
}

static double complex inv_factor(const sym_info *s, int i, const double k[3])
{
    double kr = 0;
    for (int d = 0; d < 3; d++)
        kr += (s->dim == 2 && d == 2 ? 0.0 : k[d]) * s->inv_shift[i][d];
    return s->inv_factor[i] * cexp(2.0 * M_PI * I * kr);
}

int sym_inversion_matrix(const sym_info *s, const double k[3], double complex *P)
{
    if (s->inv_source == SYM_INV_NONE || !s->inv_perm) return BS_EINVAL;
    int n = s->norb;
    memset(P, 0, (size_t)n * n * sizeof *P);
    for (int i = 0; i < n; i++)
        P[s->inv_perm[i] + (size_t)i * n] = inv_factor(s, i, k);
    return 0;
}

int sym_inversion_apply(const sym_info *s, const double k[3], int ncol, const double complex *V,
                        double complex *out)
{
    if (s->inv_source == SYM_INV_NONE || !s->inv_perm) return BS_EINVAL;
    int n = s->norb;
    for (int i = 0; i < n; i++) {
        double complex f = inv_factor(s, i, k);
        int p = s->inv_perm[i];
        for (int j = 0; j < ncol; j++)
            out[p + (size_t)j * n] = f * V[i + (size_t)j * n];
    }
    return 0;
}

void sym_tr_matrix(const sym_info *s, double complex *U)
{
    int n = s->norb;
    memset(U, 0, (size_t)n * n * sizeof *U);
    for (int i = 0; i < n; i++)
        U[s->tr_perm[i] + (size_t)i * n] = s->tr_factor[i];
}
