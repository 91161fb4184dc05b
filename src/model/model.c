/* The tight-binding model type: allocation, copies, basis-state bookkeeping and validation. */
#include "bandsieve/model.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/config.h"

int tb_model_create(int norb, int nR, int spinful, tb_model **out, bs_err *err)
{
    *out = NULL;
    if (norb < 1 || norb > BS_MAX_NORB)
        return bs_fail(err, BS_EINVAL, "orbital count %d outside 1..%d", norb, BS_MAX_NORB);
    if (nR < 1 || nR > BS_MAX_NR)
        return bs_fail(err, BS_EINVAL, "lattice-vector count %d outside 1..%d", nR, BS_MAX_NR);
    if ((long long)nR * norb * norb > BS_MAX_HR_ELEMENTS)
        return bs_fail(err, BS_EINVAL,
                       "%d lattice vectors x %d^2 orbitals exceeds the limit of %lld "
                       "hopping elements",
                       nR, norb, (long long)BS_MAX_HR_ELEMENTS);
    if (spinful && norb % 2 != 0)
        return bs_fail(err, BS_EINVAL, "spinful model needs an even number of states, got %d", norb);
    tb_model *m = calloc(1, sizeof *m);
    if (!m) return bs_fail(err, BS_ENOMEM, "out of memory for a model");
    m->dim = 3;
    m->norb = norb;
    m->spinful = spinful ? 1 : 0;
    m->spin_layout = spinful ? TB_SPIN_BLOCKS : TB_SPIN_NONE;
    m->nspatial = spinful ? norb / 2 : norb;
    m->nR = nR;
    m->nocc = norb / 2 > 0 ? norb / 2 : 1;
    for (int i = 0; i < 3; i++)
        m->lattice[i][i] = 1.0;
    m->orb_pos = calloc((size_t)m->nspatial, sizeof *m->orb_pos);
    m->orb_l = calloc((size_t)m->nspatial, sizeof *m->orb_l);
    m->R = calloc((size_t)nR, sizeof *m->R);
    m->deg = calloc((size_t)nR, sizeof *m->deg);
    m->H = calloc((size_t)nR * norb * norb, sizeof *m->H);
    if (!m->orb_pos || !m->orb_l || !m->R || !m->deg || !m->H) {
        tb_model_free(m);
        return bs_fail(err, BS_ENOMEM, "out of memory for %d x %d^2 hoppings", nR, norb);
    }
    for (int r = 0; r < nR; r++)
        m->deg[r] = 1;
    *out = m;
    return 0;
}

void tb_model_free(tb_model *m)
{
    if (!m) return;
    free(m->orb_pos);
    free(m->orb_l);
    free(m->orb_shape);
    free(m->R);
    free(m->deg);
    free(m->H);
    free(m->hsrc);
    free(m->inv_perm);
    free(m->inv_sign);
    free(m->inv_shift);
    free(m->card_json);
    free(m);
}

/* Blocks stored in m->H. */
static size_t tb_model_nblock(const tb_model *m)
{
    if (!m->hsrc) return (size_t)m->nR;
    size_t nblock = 0;
    for (int r = 0; r < m->nR; r++)
        nblock += m->hsrc[r] >= 0;
    return nblock;
}

/* Gives back the memory past nblock blocks; a refused shrink keeps the larger array. */
static void shrink_blocks(tb_model *m, size_t nblock)
{
    if (nblock == (size_t)m->nR || nblock == 0) return;
    double complex *H = realloc(m->H, nblock * m->norb * m->norb * sizeof *H);
    if (H) m->H = H;
}

/* The adjoint's element: conj(z), with a zero imaginary part always +0 so that the fold test
 * (bitwise) and every read agree on one value. */
static double complex adjoint_element(double complex z)
{
    return CMPLX(creal(z), 0.0 - cimag(z));
}

static int dup_array(void **dst, const void *src, size_t bytes)
{
    *dst = NULL;
    if (!src) return 0;
    *dst = malloc(bytes);
    if (!*dst) return -1;
    memcpy(*dst, src, bytes);
    return 0;
}

int tb_model_copy(const tb_model *m, tb_model **out, bs_err *err)
{
    *out = NULL;
    tb_model *c = NULL;
    int rc = tb_model_create(m->norb, m->nR, m->spinful, &c, err);
    if (rc != 0) return rc;
    double(*pos)[3] = c->orb_pos;
    int *l = c->orb_l, (*R)[3] = c->R, *deg = c->deg;
    double complex *H = c->H;
    *c = *m;
    c->orb_pos = pos;
    c->orb_l = l;
    c->R = R;
    c->deg = deg;
    c->H = H;
    memcpy(c->orb_pos, m->orb_pos, (size_t)m->nspatial * sizeof *m->orb_pos);
    memcpy(c->orb_l, m->orb_l, (size_t)m->nspatial * sizeof *m->orb_l);
    memcpy(c->R, m->R, (size_t)m->nR * sizeof *m->R);
    memcpy(c->deg, m->deg, (size_t)m->nR * sizeof *m->deg);
    size_t nblock = tb_model_nblock(m);
    memcpy(c->H, m->H, nblock * m->norb * m->norb * sizeof *m->H);
    c->hsrc = NULL;
    c->inv_perm = NULL;
    c->inv_sign = NULL;
    c->inv_shift = NULL;
    c->orb_shape = NULL;
    c->card_json = NULL;
    size_t n = (size_t)m->norb;
    if (dup_array((void **)&c->card_json, m->card_json, m->card_json ? strlen(m->card_json) + 1 : 0) ||
        dup_array((void **)&c->inv_perm, m->inv_perm, n * sizeof *m->inv_perm) ||
        dup_array((void **)&c->inv_sign, m->inv_sign, n * sizeof *m->inv_sign) ||
        dup_array((void **)&c->inv_shift, m->inv_shift, n * sizeof *m->inv_shift) ||
        dup_array((void **)&c->orb_shape, m->orb_shape, (size_t)m->nspatial * sizeof *m->orb_shape) ||
        dup_array((void **)&c->hsrc, m->hsrc, (size_t)m->nR * sizeof *m->hsrc)) {
        tb_model_free(c);
        return bs_fail(err, BS_ENOMEM, "out of memory copying a model");
    }
    shrink_blocks(c, nblock);
    *out = c;
    return 0;
}

double complex tb_hop(const tb_model *m, int r, int a, int b)
{
    size_t n = (size_t)m->norb;
    if (!m->hsrc) return m->H[(size_t)r * n * n + (size_t)a * n + b];
    int s = m->hsrc[r];
    if (s >= 0) return m->H[(size_t)s * n * n + (size_t)a * n + b];
    return adjoint_element(m->H[(size_t)(-1 - s) * n * n + (size_t)b * n + a]);
}

const double complex *tb_hop_block(const tb_model *m, int r, double complex *buf)
{
    size_t n = (size_t)m->norb;
    int s = m->hsrc ? m->hsrc[r] : r;
    if (s >= 0) return m->H + (size_t)s * n * n;
    if (!buf) return NULL;
    const double complex *src = m->H + (size_t)(-1 - s) * n * n;
    for (size_t a = 0; a < n; a++)
        for (size_t b = 0; b < n; b++)
            buf[a * n + b] = adjoint_element(src[b * n + a]);
    return buf;
}

/* H_q (block at Hq) is bit for bit the adjoint of H_r (block at Hr). */
static int is_adjoint(const double complex *Hq, const double complex *Hr, size_t n)
{
    for (size_t a = 0; a < n; a++)
        for (size_t b = 0; b < n; b++) {
            double complex z = adjoint_element(Hr[b * n + a]);
            if (memcmp(&z, &Hq[a * n + b], sizeof z) != 0) return 0;
        }
    return 1;
}

void tb_model_fold(tb_model *m)
{
    if (m->hsrc) { /* folded already, perhaps while read (tb_model_fold_next): give back the rest */
        shrink_blocks(m, tb_model_nblock(m));
        return;
    }
    int *src = malloc((size_t)m->nR * sizeof *src);
    if (!src) return; /* folding only saves memory: an unfolded model is as valid */
    size_t n = (size_t)m->norb, nn = n * n;
    /* First decide (every block still in place), then move the kept blocks down in order: a block
     * only ever moves to a lower slot, so the moves never overwrite one still to be read. */
    for (int r = 0; r < m->nR; r++)
        src[r] = r;
    for (int r = 0; r < m->nR; r++) {
        if (src[r] != r) continue;
        int minus[3] = {-m->R[r][0], -m->R[r][1], -m->R[r][2]};
        int q = tb_model_find_R(m, minus);
        if (q > r && m->deg[q] == m->deg[r] && is_adjoint(m->H + (size_t)q * nn, m->H + (size_t)r * nn, n))
            src[q] = -1 - r;
    }
    int nblock = 0;
    for (int r = 0; r < m->nR; r++) {
        if (src[r] < 0) continue;
        if (nblock != r) memmove(m->H + (size_t)nblock * nn, m->H + (size_t)r * nn, nn * sizeof *m->H);
        src[r] = nblock++;
    }
    for (int r = 0; r < m->nR; r++)
        if (src[r] < 0) src[r] = -1 - src[-1 - src[r]];
    m->hsrc = src;
    shrink_blocks(m, (size_t)nblock);
}

void tb_model_fold_next(tb_model *m, int r, int *nblock)
{
    size_t n = (size_t)m->norb, nn = n * n;
    const double complex *blk = m->H + (size_t)*nblock * nn;
    for (int q = 0; q < r; q++) {
        if (m->R[q][0] != -m->R[r][0] || m->R[q][1] != -m->R[r][1] || m->R[q][2] != -m->R[r][2]) continue;
        /* -R came earlier: fold onto its block, as tb_model_fold would (the first of a pair owns it);
         * a partner itself folded means a repeated R, which the reader refuses anyway */
        int s = m->hsrc[q];
        if (s >= 0 && m->deg[q] == m->deg[r] && is_adjoint(blk, m->H + (size_t)s * nn, n)) {
            m->hsrc[r] = -1 - s;
            return;
        }
        break;
    }
    m->hsrc[r] = (*nblock)++;
}

int tb_model_unfold(tb_model *m, bs_err *err)
{
    if (!m->hsrc) return 0;
    size_t nn = (size_t)m->norb * m->norb;
    double complex *H = malloc((size_t)m->nR * nn * sizeof *H);
    if (!H) return bs_fail(err, BS_ENOMEM, "out of memory for %d x %d^2 hoppings", m->nR, m->norb);
    for (int r = 0; r < m->nR; r++) {
        const double complex *h = tb_hop_block(m, r, H + (size_t)r * nn);
        if (h != H + (size_t)r * nn) memcpy(H + (size_t)r * nn, h, nn * sizeof *H);
    }
    tb_model_set_hops(m, H);
    return 0;
}

void tb_model_set_hops(tb_model *m, double complex *H)
{
    free(m->H);
    free(m->hsrc);
    m->H = H;
    m->hsrc = NULL;
}

int tb_model_find_R(const tb_model *m, const int R[3])
{
    for (int r = 0; r < m->nR; r++)
        if (m->R[r][0] == R[0] && m->R[r][1] == R[1] && m->R[r][2] == R[2]) return r;
    return -1;
}

int tb_state_orbital(const tb_model *m, int i)
{
    if (!m->spinful) return i;
    return m->spin_layout == TB_SPIN_INTERLEAVED ? i / 2 : i % m->nspatial;
}

int tb_state_spin(const tb_model *m, int i)
{
    if (!m->spinful) return 0;
    return m->spin_layout == TB_SPIN_INTERLEAVED ? i % 2 : i / m->nspatial;
}

int tb_state_index(const tb_model *m, int o, int s)
{
    if (!m->spinful) return o;
    return m->spin_layout == TB_SPIN_INTERLEAVED ? 2 * o + s : o + s * m->nspatial;
}

static int validate_header(const tb_model *m, const char *where, bs_err *err)
{
    if (m->dim != 2 && m->dim != 3)
        return bs_fail(err, BS_EINVAL, "%s: dimension must be 2 or 3, found %d", where, m->dim);
    if (m->nocc < 1 || m->nocc >= m->norb)
        return bs_fail(err, BS_EINVAL, "%s: occupied_bands must be in 1..%d for %d states, found %d", where,
                       m->norb - 1, m->norb, m->nocc);
    for (int i = 0; i < m->nspatial; i++) {
        if (m->orb_l[i] < 0 || m->orb_l[i] > 3)
            return bs_fail(err, BS_EINVAL, "%s: orbital %d has l = %d, expected 0..3", where, i + 1,
                           m->orb_l[i]);
        for (int d = 0; d < 3; d++)
            if (!isfinite(m->orb_pos[i][d]) || fabs(m->orb_pos[i][d]) > BS_MAX_REDUCED_POS)
                return bs_fail(err, BS_EINVAL,
                               "%s: orbitals[%d].position[%d] = %g is not a reduced coordinate "
                               "within %g of the home cell",
                               where, i + 1, d + 1, m->orb_pos[i][d], BS_MAX_REDUCED_POS);
    }
    for (int a = 0; a < 3; a++) {
        double len2 = 0;
        for (int b = 0; b < 3; b++) {
            if (!isfinite(m->lattice[a][b]) || fabs(m->lattice[a][b]) > BS_MAX_LATTICE_A)
                return bs_fail(err, BS_EINVAL, "%s: lattice row %d element %d = %g A is outside +-%g A",
                               where, a + 1, b + 1, m->lattice[a][b], BS_MAX_LATTICE_A);
            len2 += m->lattice[a][b] * m->lattice[a][b];
        }
        if (!(sqrt(len2) >= BS_MIN_LATTICE_A))
            return bs_fail(err, BS_EINVAL, "%s: lattice row %d has length %g A, below %g A", where, a + 1,
                           sqrt(len2), BS_MIN_LATTICE_A);
    }
    if (m->has_fermi && (!isfinite(m->fermi_ev) || fabs(m->fermi_ev) > BS_MAX_HOPPING_EV))
        return bs_fail(err, BS_EINVAL, "%s: fermi_energy_eV = %g is outside +-%g eV", where, m->fermi_ev,
                       BS_MAX_HOPPING_EV);
    return 0;
}

int tb_model_validate(const tb_model *m, double tol_ev, const char *where, bs_err *err)
{
    int rc = validate_header(m, where, err);
    if (rc != 0) return rc;
    int n = m->norb;
    for (int r = 0; r < m->nR; r++) {
        if (m->deg[r] < 1)
            return bs_fail(err, BS_EINVAL, "%s: degeneracy weight %d of R = (%d,%d,%d) must be >= 1", where,
                           m->deg[r], m->R[r][0], m->R[r][1], m->R[r][2]);
        if (m->dim == 2 && m->R[r][2] != 0)
            return bs_fail(err, BS_EINVAL, "%s: 2D model has R3 = %d at R = (%d,%d,%d)", where, m->R[r][2],
                           m->R[r][0], m->R[r][1], m->R[r][2]);
        int minus[3] = {-m->R[r][0], -m->R[r][1], -m->R[r][2]};
        int rm = tb_model_find_R(m, minus);
        if (rm < 0)
            return bs_fail(err, BS_EINVAL, "%s: R = (%d,%d,%d) present but -R missing (H is not Hermitian)",
                           where, m->R[r][0], m->R[r][1], m->R[r][2]);
        for (int a = 0; a < n; a++)
            for (int b = 0; b < n; b++) {
                double complex h = tb_hop(m, r, a, b);
                if (!isfinite(creal(h)) || !isfinite(cimag(h)))
                    return bs_fail(err, BS_EINVAL, "%s: non-finite hopping at R = (%d,%d,%d), m = %d, n = %d",
                                   where, m->R[r][0], m->R[r][1], m->R[r][2], a + 1, b + 1);
                if (cabs(h) > BS_MAX_HOPPING_EV)
                    return bs_fail(err, BS_EINVAL,
                                   "%s: hopping of %.3g eV at R = (%d,%d,%d), m = %d, n = %d is "
                                   "implausible (limit %g eV; wrong units?)",
                                   where, cabs(h), m->R[r][0], m->R[r][1], m->R[r][2], a + 1, b + 1,
                                   BS_MAX_HOPPING_EV);
                double complex hd = conj(tb_hop(m, rm, b, a));
                /* Compare H_R / deg_R: the weights of R and -R may differ only in a broken file. */
                double d = cabs(h / m->deg[r] - hd / m->deg[rm]);
                if (d > tol_ev)
                    return bs_fail(err, BS_EINVAL,
                                   "%s: not Hermitian: H(R)[%d,%d] != conj(H(-R)[%d,%d]) at R = (%d,%d,%d), "
                                   "difference %.3g eV",
                                   where, a + 1, b + 1, b + 1, a + 1, m->R[r][0], m->R[r][1], m->R[r][2], d);
            }
    }
    return 0;
}

void tb_model_reciprocal(const tb_model *m, double b[3][3])
{
    tb_lattice_reciprocal((const double(*)[3])m->lattice, b);
}

void tb_lattice_reciprocal(const double a[3][3], double b[3][3])
{
    double cross[3][3];
    for (int i = 0; i < 3; i++) {
        const double *u = a[(i + 1) % 3], *v = a[(i + 2) % 3];
        cross[i][0] = u[1] * v[2] - u[2] * v[1];
        cross[i][1] = u[2] * v[0] - u[0] * v[2];
        cross[i][2] = u[0] * v[1] - u[1] * v[0];
    }
    double vol = a[0][0] * cross[0][0] + a[0][1] * cross[0][1] + a[0][2] * cross[0][2];
    for (int i = 0; i < 3; i++)
        for (int d = 0; d < 3; d++)
            b[i][d] = 2.0 * M_PI * cross[i][d] / vol;
}

static const char *const tb_shapes[4][7] = {
    {"s"},
    {"pz", "px", "py"},
    {"dz2", "dxz", "dyz", "dx2-y2", "dxy"},
    {"fz3", "fxz2", "fyz2", "fz(x2-y2)", "fxyz", "fx(x2-3y2)", "fy(3x2-y2)"},
};

const char *tb_shape_name(int l, int idx)
{
    if (l < 0 || l > 3 || idx < 0 || idx > 2 * l) return NULL;
    return tb_shapes[l][idx];
}

int tb_shape_index(int l, const char *name)
{
    if (l < 0 || l > 3 || !name) return -1;
    for (int i = 0; i <= 2 * l; i++)
        if (strcmp(tb_shapes[l][i], name) == 0) return i;
    return -1;
}

const char *tb_magnetism_name(int mag)
{
    return mag == TB_MAG_NONE ? "none" : mag == TB_MAG_MAGNETIC ? "magnetic" : "unknown";
}

int tb_magnetism_parse(const char *text)
{
    if (!text) return -1;
    if (strcmp(text, "unknown") == 0) return TB_MAG_UNKNOWN;
    if (strcmp(text, "none") == 0) return TB_MAG_NONE;
    if (strcmp(text, "magnetic") == 0) return TB_MAG_MAGNETIC;
    return -1;
}
