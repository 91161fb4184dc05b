/* Crystal symmetry: sites from orbital centres, the space group from spglib, operation matrices on
 * the basis, verification on H(k), little groups and symmetry eigenvalues. Conventions:
 * include/bandsieve/crystal.h. */
#include "bandsieve/crystal.h"

#include <cblas.h>
#include <lapacke.h>
#include <math.h>
#include <spglib.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/hk.h"
#include "bandsieve/realharm.h"

struct cry_info {
    const tb_model *m; /* borrowed for the matrices; the caller keeps it alive */
    int spacegroup;
    char symbol[16];
    int nops, nverified;
    cry_op *ops;
    int nsites;
    int *site;              /* nspatial: site of each orbital */
    double (*site_pos)[3];  /* nsites reduced positions */
    int *shell_idx;         /* nspatial: index within the shell */
    int *shell_no;          /* nspatial: which shell of its l on its site (0, 1, ...) */
    int *img_site;          /* nops * nsites */
    int (*L)[3];            /* nops * nsites: lattice vector of the image */
    double *D[RH_LMAX + 1]; /* nops blocks of (2l+1)^2 */
    double complex (*U)[4]; /* nops spin matrices */
};

void cry_opts_default(cry_opts *o)
{
    memset(o, 0, sizeof *o);
    o->site_tol_ang = 0.05;
    o->symprec_ang = 0.05;
    o->tol = 1e-6;
    o->nk = 4;
    o->seed = 1;
}

static void opts_resolve(const cry_opts *in, cry_opts *o)
{
    cry_opts_default(o);
    if (!in) return;
    if (in->site_tol_ang > 0) o->site_tol_ang = in->site_tol_ang;
    if (in->symprec_ang > 0) o->symprec_ang = in->symprec_ang;
    if (in->tol > 0) o->tol = in->tol;
    if (in->nk > 0) o->nk = in->nk;
    o->seed = in->seed;
    o->shell_index = in->shell_index;
    o->hk = in->hk;
}

void cry_info_free(cry_info *c)
{
    if (!c) return;
    free(c->ops);
    free(c->site);
    free(c->site_pos);
    free(c->shell_idx);
    free(c->shell_no);
    free(c->img_site);
    free(c->L);
    for (int l = 0; l <= RH_LMAX; l++)
        free(c->D[l]);
    free(c->U);
    free(c);
}

int cry_spacegroup(const cry_info *c)
{
    return c->spacegroup;
}
const char *cry_symbol(const cry_info *c)
{
    return c->symbol;
}
int cry_nops(const cry_info *c)
{
    return c->nops;
}
const cry_op *cry_get_op(const cry_info *c, int i)
{
    return &c->ops[i];
}
int cry_nverified(const cry_info *c)
{
    return c->nverified;
}
int cry_nsites(const cry_info *c)
{
    return c->nsites;
}

/* Cartesian length of the reduced difference d folded to its nearest lattice image. */
static double folded_distance(const double a[3][3], const double d[3])
{
    double f[3], r[3] = {0, 0, 0};
    for (int i = 0; i < 3; i++)
        f[i] = d[i] - round(d[i]);
    for (int i = 0; i < 3; i++)
        for (int x = 0; x < 3; x++)
            r[x] += f[i] * a[i][x];
    return sqrt(r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
}

/* Sites: orbitals are merged into the first earlier site within tol (Angstrom). */
static int find_sites(cry_info *c, const tb_model *m, double tol)
{
    int n = m->nspatial;
    c->site = malloc((size_t)n * sizeof *c->site);
    c->site_pos = malloc((size_t)n * sizeof *c->site_pos);
    if (!c->site || !c->site_pos) return -1;
    c->nsites = 0;
    for (int o = 0; o < n; o++) {
        int s = 0;
        for (; s < c->nsites; s++) {
            double d[3];
            for (int i = 0; i < 3; i++)
                d[i] = m->orb_pos[o][i] - c->site_pos[s][i];
            if (folded_distance(m->lattice, d) < tol) break;
        }
        if (s == c->nsites) {
            memcpy(c->site_pos[s], m->orb_pos[o], sizeof c->site_pos[s]);
            c->nsites++;
        }
        c->site[o] = s;
    }
    return 0;
}

/* Shells: the n-th orbital of angular momentum l on a site is index (given, or n mod 2l+1) of
 * shell number (the first shell of that l on the site still missing that index). */
static int assign_shells(cry_info *c, const tb_model *m, const int *given, bs_err *err)
{
    int n = m->nspatial;
    c->shell_idx = malloc((size_t)n * sizeof *c->shell_idx);
    c->shell_no = malloc((size_t)n * sizeof *c->shell_no);
    if (!c->shell_idx || !c->shell_no) return bs_fail(err, BS_ENOMEM, "out of memory (shells)");
    for (int o = 0; o < n; o++) {
        int l = m->orb_l[o], nm = 2 * l + 1, before = 0;
        if (l < 0 || l > RH_LMAX) return bs_fail(err, BS_EINVAL, "orbital %d: l = %d outside 0..3", o + 1, l);
        int idx = given ? given[o] : -1;
        if (idx < -1 || idx >= nm)
            return bs_fail(err, BS_EINVAL, "orbital %d: shell index %d outside 0..%d", o + 1, idx, nm - 1);
        for (int p = 0; p < o; p++)
            if (c->site[p] == c->site[o] && m->orb_l[p] == l) before++;
        if (idx < 0) {
            c->shell_idx[o] = before % nm;
            c->shell_no[o] = before / nm;
            continue;
        }
        int shell = 0;
        for (int p = 0; p < o; p++)
            if (c->site[p] == c->site[o] && m->orb_l[p] == l && c->shell_idx[p] == idx &&
                c->shell_no[p] >= shell)
                shell = c->shell_no[p] + 1;
        c->shell_idx[o] = idx;
        c->shell_no[o] = shell;
    }
    return 0;
}

static void inverse3(const double a[3][3], double inv[3][3])
{
    double det = a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1]) -
                 a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0]) +
                 a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]);
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            int i1 = (j + 1) % 3, i2 = (j + 2) % 3, j1 = (i + 1) % 3, j2 = (i + 2) % 3;
            inv[i][j] = (a[i1][j1] * a[i2][j2] - a[i1][j2] * a[i2][j1]) / det;
        }
}

/* Rc = A^T W A^-T with A the lattice rows: a reduced position x has Cartesian A^T x. */
static void cartesian_matrix(const double a[3][3], const int W[3][3], double Rc[3][3])
{
    double at[3][3], ati[3][3], tmp[3][3];
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            at[i][j] = a[j][i];
    inverse3(at, ati);
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            tmp[i][j] = 0;
            for (int k = 0; k < 3; k++)
                tmp[i][j] += at[i][k] * W[k][j];
        }
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            Rc[i][j] = 0;
            for (int k = 0; k < 3; k++)
                Rc[i][j] += tmp[i][k] * ati[k][j];
        }
}

/* Kind and axis of an orthogonal matrix from its trace and determinant (common practice). */
static void classify_op(cry_op *op)
{
    const double(*R)[3] = (const double(*)[3])op->Rc;
    double det = R[0][0] * (R[1][1] * R[2][2] - R[1][2] * R[2][1]) -
                 R[0][1] * (R[1][0] * R[2][2] - R[1][2] * R[2][0]) +
                 R[0][2] * (R[1][0] * R[2][1] - R[1][1] * R[2][0]);
    double s = det < 0 ? -1.0 : 1.0, P[3][3];
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            P[i][j] = s * R[i][j];
    double tr = P[0][0] + P[1][1] + P[2][2];
    /* proper part: trace 1 + 2 cos(2 pi / n) */
    int n = 1;
    if (tr > 2.5)
        n = 1;
    else if (tr > 1.5)
        n = 6;
    else if (tr > 0.5)
        n = 4;
    else if (tr > -0.5)
        n = 3;
    else
        n = 2;
    static const char *proper[7] = {"", "1", "2", "3", "4", "", "6"};
    static const char *improper[7] = {"", "-1", "m", "-3", "-4", "", "-6"};
    snprintf(op->kind, sizeof op->kind, "%s", s > 0 ? proper[n] : improper[n]);
    memset(op->axis, 0, sizeof op->axis);
    if (n == 1) return;
    double ax[3] = {P[2][1] - P[1][2], P[0][2] - P[2][0], P[1][0] - P[0][1]};
    double len = sqrt(ax[0] * ax[0] + ax[1] * ax[1] + ax[2] * ax[2]);
    if (len < 1e-8) { /* two-fold: the axis is the largest column of (P + 1)/2 */
        int best = 0;
        for (int c = 1; c < 3; c++)
            if (P[c][c] > P[best][best]) best = c;
        for (int i = 0; i < 3; i++)
            ax[i] = 0.5 * (P[i][best] + (i == best));
        len = sqrt(ax[0] * ax[0] + ax[1] * ax[1] + ax[2] * ax[2]);
    }
    for (int i = 0; i < 3; i++)
        op->axis[i] = ax[i] / len;
}

static int keeps_plane(const int W[3][3], const double t[3])
{
    double tz = t[2] - round(t[2]);
    return W[0][2] == 0 && W[1][2] == 0 && W[2][0] == 0 && W[2][1] == 0 && fabs(tz) < 1e-6;
}

/* Image site and lattice vector of every site under op; -1 when the structure does not map. */
static int map_sites(cry_info *c, const tb_model *m, int iop, double tol)
{
    const cry_op *op = &c->ops[iop];
    for (int s = 0; s < c->nsites; s++) {
        double y[3];
        for (int i = 0; i < 3; i++) {
            y[i] = op->t[i];
            for (int j = 0; j < 3; j++)
                y[i] += op->W[i][j] * c->site_pos[s][j];
        }
        int found = -1;
        for (int s2 = 0; s2 < c->nsites && found < 0; s2++) {
            double d[3];
            for (int i = 0; i < 3; i++)
                d[i] = y[i] - c->site_pos[s2][i];
            if (folded_distance(m->lattice, d) < tol) found = s2;
        }
        c->img_site[iop * c->nsites + s] = found;
        if (found < 0) return -1;
        for (int i = 0; i < 3; i++)
            c->L[iop * c->nsites + s][i] = (int)lround(y[i] - c->site_pos[found][i]);
    }
    return 0;
}

/* Spatial orbital on site s with angular momentum l, shell number sh and index idx, or -1. */
static int find_orbital(const cry_info *c, const tb_model *m, int s, int l, int sh, int idx)
{
    for (int o = 0; o < m->nspatial; o++)
        if (c->site[o] == s && m->orb_l[o] == l && c->shell_no[o] == sh && c->shell_idx[o] == idx) return o;
    return -1;
}

int cry_op_matrix(const cry_info *c, int iop, const double k[3], double complex *V, bs_err *err)
{
    const tb_model *m = c->m;
    const cry_op *op = &c->ops[iop];
    int n = m->norb;
    memset(V, 0, (size_t)n * n * sizeof *V);
    double kp[3]; /* W^-T k: W is unimodular, so its inverse is integer; use the adjugate */
    double Wd[3][3], Wi[3][3];
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            Wd[i][j] = op->W[i][j];
    inverse3(Wd, Wi);
    for (int i = 0; i < 3; i++)
        kp[i] = Wi[0][i] * k[0] + Wi[1][i] * k[1] + Wi[2][i] * k[2];
    int nspin = m->spinful ? 2 : 1;
    for (int o = 0; o < m->nspatial; o++) {
        int l = m->orb_l[o], nm = 2 * l + 1, s = c->site[o];
        int s2 = c->img_site[iop * c->nsites + s];
        if (s2 < 0) return bs_fail(err, BS_EINVAL, "operation %d does not map the sites", iop + 1);
        const int *L = c->L[iop * c->nsites + s];
        double ph = -2 * M_PI * (kp[0] * L[0] + kp[1] * L[1] + kp[2] * L[2]);
        double complex phase = cos(ph) + I * sin(ph);
        const double *D = c->D[l] + (size_t)iop * nm * nm;
        for (int j = 0; j < nm; j++) {
            double d = D[j + c->shell_idx[o] * nm];
            if (d == 0.0) continue;
            int o2 = find_orbital(c, m, s2, l, c->shell_no[o], j);
            if (o2 < 0) continue; /* partial shell: the check decides whether this matters */
            for (int sa = 0; sa < nspin; sa++)
                for (int sb = 0; sb < nspin; sb++) {
                    double complex u = m->spinful ? c->U[iop][sb + 2 * sa] : 1.0;
                    if (u == 0.0) continue;
                    int col = tb_state_index(m, o, sa), row = tb_state_index(m, o2, sb);
                    V[row + (size_t)col * n] += d * u * phase;
                }
        }
    }
    return 0;
}

static uint64_t sm64(uint64_t *st)
{
    uint64_t z = (*st += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
}

/* Largest relative residual ||H(W^-T k) - V H(k) V^+||_F / ||H(k)||_F over the random k. */
static int verify_op(cry_info *c, hk_engine *e, int iop, const double *ks, int nk, double complex *buf,
                     double *res, bs_err *err)
{
    const tb_model *m = c->m;
    int n = m->norb;
    size_t nn = (size_t)n * n;
    double complex *H = buf, *Hp = buf + nn, *V = buf + 2 * nn, *T = buf + 3 * nn;
    const double complex one = 1.0, zero = 0.0;
    double Wd[3][3], Wi[3][3];
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            Wd[i][j] = c->ops[iop].W[i][j];
    inverse3(Wd, Wi);
    *res = 0.0;
    for (int q = 0; q < nk; q++) {
        const double *k = ks + 3 * q;
        double kp[3];
        for (int i = 0; i < 3; i++)
            kp[i] = Wi[0][i] * k[0] + Wi[1][i] * k[1] + Wi[2][i] * k[2];
        int rc = hk_build(e, 1, k, H, err);
        if (rc == 0) rc = hk_build(e, 1, kp, Hp, err);
        if (rc == 0) rc = cry_op_matrix(c, iop, k, V, err);
        if (rc != 0) return rc;
        cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, n, n, n, &one, V, n, H, n, &zero, T, n);
        cblas_zgemm(CblasColMajor, CblasNoTrans, CblasConjTrans, n, n, n, &one, T, n, V, n, &zero, H, n);
        double num = 0.0, den = 0.0;
        for (size_t i = 0; i < nn; i++) {
            double complex d = Hp[i] - H[i];
            num += creal(d) * creal(d) + cimag(d) * cimag(d);
            den += creal(Hp[i]) * creal(Hp[i]) + cimag(Hp[i]) * cimag(Hp[i]);
        }
        double r = den > 0 ? sqrt(num / den) : sqrt(num);
        if (r > *res) *res = r;
    }
    return 0;
}

static int call_spglib(cry_info *c, const tb_model *m, double symprec, bs_err *err)
{
    double lat[3][3], (*pos)[3] = malloc((size_t)c->nsites * sizeof *pos);
    int *types = malloc((size_t)c->nsites * sizeof *types);
    if (!pos || !types) {
        free(pos);
        free(types);
        return bs_fail(err, BS_ENOMEM, "out of memory (sites)");
    }
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            lat[i][j] = m->lattice[j][i]; /* spglib: vectors as columns */
    /* A site's type: its orbitals' l in order, as a base-5 number (see crystal.h). */
    for (int s = 0; s < c->nsites; s++) {
        memcpy(pos[s], c->site_pos[s], sizeof pos[s]);
        long t = 1;
        for (int o = 0; o < m->nspatial; o++)
            if (c->site[o] == s) t = (t * 5 + m->orb_l[o] + 1) % 1000003;
        types[s] = (int)t;
    }
    SpglibDataset *ds = spg_get_dataset(lat, pos, types, c->nsites, symprec);
    free(pos);
    free(types);
    if (!ds) return bs_fail(err, BS_EINVAL, "spglib found no space group for the orbital sites");
    c->spacegroup = ds->spacegroup_number;
    snprintf(c->symbol, sizeof c->symbol, "%s", ds->international_symbol);
    c->ops = calloc((size_t)ds->n_operations, sizeof *c->ops);
    if (!c->ops) {
        spg_free_dataset(ds);
        return bs_fail(err, BS_ENOMEM, "out of memory (operations)");
    }
    c->nops = 0;
    for (int i = 0; i < ds->n_operations; i++) {
        if (m->dim == 2 && !keeps_plane(ds->rotations[i], ds->translations[i])) continue;
        cry_op *op = &c->ops[c->nops++];
        memcpy(op->W, ds->rotations[i], sizeof op->W);
        for (int j = 0; j < 3; j++)
            op->t[j] = ds->translations[i][j];
        cartesian_matrix(m->lattice, op->W, op->Rc);
        classify_op(op);
    }
    spg_free_dataset(ds);
    return 0;
}

static int build_representations(cry_info *c, bs_err *err)
{
    for (int l = 0; l <= RH_LMAX; l++) {
        int nm = 2 * l + 1;
        c->D[l] = malloc((size_t)c->nops * nm * nm * sizeof *c->D[l]);
        if (!c->D[l]) return bs_fail(err, BS_ENOMEM, "out of memory (representations)");
    }
    c->U = malloc((size_t)c->nops * sizeof *c->U);
    if (!c->U) return bs_fail(err, BS_ENOMEM, "out of memory (spin matrices)");
    for (int i = 0; i < c->nops; i++) {
        /* Lattice vectors a few percent off orthogonality give Rc slightly non-orthogonal; orthogonalise
         * through the polar factor would be the fix, but spglib symmetrises within symprec, and a
         * rotation that is not orthogonal to 1e-8 is refused by rh_rotation. */
        for (int l = 0; l <= RH_LMAX; l++) {
            int nm = 2 * l + 1;
            int rc = rh_rotation(l, (const double(*)[3])c->ops[i].Rc, c->D[l] + (size_t)i * nm * nm, err);
            if (rc != 0) return rc;
        }
        rh_spin_rotation((const double(*)[3])c->ops[i].Rc, c->U[i]);
    }
    return 0;
}

int cry_detect(const tb_model *m, const cry_opts *opts_in, cry_info **out, bs_err *err)
{
    *out = NULL;
    cry_opts o;
    opts_resolve(opts_in, &o);
    cry_info *c = calloc(1, sizeof *c);
    hk_engine *e = NULL;
    double complex *buf = NULL;
    double *ks = NULL;
    if (!c) return bs_fail(err, BS_ENOMEM, "out of memory (crystal symmetry)");
    c->m = m;
    int rc = find_sites(c, m, o.site_tol_ang) ? bs_fail(err, BS_ENOMEM, "out of memory (sites)") : 0;
    if (rc == 0) rc = assign_shells(c, m, o.shell_index ? o.shell_index : m->orb_shape, err);
    if (rc == 0) rc = call_spglib(c, m, o.symprec_ang, err);
    if (rc == 0) rc = build_representations(c, err);
    if (rc != 0) goto done;
    c->img_site = malloc((size_t)c->nops * c->nsites * sizeof *c->img_site);
    c->L = malloc((size_t)c->nops * c->nsites * sizeof *c->L);
    size_t nn = (size_t)m->norb * m->norb;
    buf = malloc(4 * nn * sizeof *buf);
    ks = malloc((size_t)3 * o.nk * sizeof *ks);
    if (!c->img_site || !c->L || !buf || !ks) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory (crystal symmetry check)");
        goto done;
    }
    uint64_t st = o.seed ^ 0x5CA1AB1E;
    for (int q = 0; q < o.nk; q++)
        for (int i = 0; i < 3; i++)
            ks[3 * q + i] = (i < m->dim) ? (double)(sm64(&st) >> 11) * 0x1.0p-53 : 0.0;
    hk_engine *use = o.hk && hk_norb(o.hk) == m->norb ? o.hk : NULL;
    if (!use) rc = hk_create(m, 1, &e, err), use = e;
    if (rc != 0) goto done;
    for (int i = 0; i < c->nops; i++) {
        cry_op *op = &c->ops[i];
        op->verified = 0;
        op->residual = -1;
        if (map_sites(c, m, i, fmax(o.site_tol_ang, o.symprec_ang)) != 0) continue;
        rc = verify_op(c, use, i, ks, o.nk, buf, &op->residual, err);
        if (rc != 0) goto done;
        op->verified = op->residual <= o.tol;
        c->nverified += op->verified;
    }
    *out = c;
    c = NULL;
done:
    hk_free(e);
    free(buf);
    free(ks);
    cry_info_free(c);
    return rc;
}

int cry_little_group(const cry_info *c, const double k[3], int *ops)
{
    int n = 0, dim = c->m->dim;
    for (int i = 0; i < c->nops; i++) {
        if (!c->ops[i].verified) continue;
        double Wd[3][3], Wi[3][3], kp[3];
        for (int a = 0; a < 3; a++)
            for (int b = 0; b < 3; b++)
                Wd[a][b] = c->ops[i].W[a][b];
        inverse3(Wd, Wi);
        int same = 1;
        for (int a = 0; a < dim; a++) {
            kp[a] = Wi[0][a] * k[0] + Wi[1][a] * k[1] + Wi[2][a] * k[2];
            double d = kp[a] - k[a];
            if (fabs(d - round(d)) > 1e-8) same = 0;
        }
        if (same) ops[n++] = i;
    }
    return n;
}

int cry_band_eigenvalues(const tb_model *m, const cry_info *c, int iop, const double k[3], int lo, int nband,
                         double complex *ev, bs_err *err)
{
    int n = m->norb;
    if (lo < 0 || nband < 1 || lo + nband > n)
        return bs_fail(err, BS_EINVAL, "bands %d..%d outside 1..%d", lo + 1, lo + nband, n);
    int *lg = malloc((size_t)c->nops * sizeof *lg);
    if (!lg) return bs_fail(err, BS_ENOMEM, "out of memory");
    int nl = cry_little_group(c, k, lg), inside = 0;
    for (int i = 0; i < nl; i++)
        inside |= lg[i] == iop;
    free(lg);
    if (!inside) return bs_fail(err, BS_EINVAL, "operation %d does not leave k invariant", iop + 1);
    size_t nn = (size_t)n * n;
    double complex *H = malloc(nn * sizeof *H), *V = malloc(nn * sizeof *V);
    double complex *T = malloc((size_t)n * nband * sizeof *T), *M = malloc((size_t)nband * nband * sizeof *M);
    double *w = malloc((size_t)n * sizeof *w);
    hk_engine *e = NULL;
    int rc = (!H || !V || !T || !M || !w) ? bs_fail(err, BS_ENOMEM, "out of memory") : 0;
    if (rc == 0) rc = hk_create(m, 1, &e, err);
    if (rc == 0) rc = hk_build(e, 1, k, H, err);
    if (rc == 0) rc = cry_op_matrix(c, iop, k, V, err);
    if (rc == 0) {
        lapack_int info = LAPACKE_zheevd(LAPACK_COL_MAJOR, 'V', 'U', n, H, n, w);
        if (info != 0) rc = bs_fail(err, BS_ENUMERIC, "zheevd failed (info %d)", (int)info);
    }
    if (rc == 0) {
        const double complex one = 1.0, zero = 0.0;
        const double complex *psi = H + (size_t)lo * n;
        cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, n, nband, n, &one, V, n, psi, n, &zero, T, n);
        cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, nband, nband, n, &one, psi, n, T, n, &zero,
                    M, nband);
        lapack_int info = LAPACKE_zgeev(LAPACK_COL_MAJOR, 'N', 'N', nband, M, nband, ev, NULL, 1, NULL, 1);
        if (info != 0) rc = bs_fail(err, BS_ENUMERIC, "zgeev failed (info %d)", (int)info);
    }
    if (rc == 0) /* sort by phase, so that equal multiplets compare equal */
        for (int i = 1; i < nband; i++)
            for (int j = i; j > 0 && carg(ev[j]) < carg(ev[j - 1]); j--) {
                double complex t = ev[j];
                ev[j] = ev[j - 1];
                ev[j - 1] = t;
            }
    hk_free(e);
    free(H);
    free(V);
    free(T);
    free(M);
    free(w);
    return rc;
}

/* A growing list of lattice vectors with their h(R) blocks, found by linear probing on a hash of R. */
typedef struct rmap {
    int n, cap, norb, hcap;
    int (*R)[3];
    double complex *h; /* cap * norb * norb, row-major <a|h|b> */
    int *slot;         /* hcap entries: index into R, or -1 */
} rmap;

static unsigned rhash(const int R[3])
{
    unsigned h = 2166136261u;
    for (int i = 0; i < 3; i++)
        h = (h ^ (unsigned)(R[i] + 1024)) * 16777619u;
    return h;
}

static int rmap_init(rmap *r, int norb, int cap)
{
    memset(r, 0, sizeof *r);
    r->norb = norb;
    r->cap = cap;
    r->hcap = 1;
    while (r->hcap < 4 * cap)
        r->hcap *= 2;
    r->R = malloc((size_t)cap * sizeof *r->R);
    r->h = calloc((size_t)cap * norb * norb, sizeof *r->h);
    r->slot = malloc((size_t)r->hcap * sizeof *r->slot);
    if (!r->R || !r->h || !r->slot) return -1;
    for (int i = 0; i < r->hcap; i++)
        r->slot[i] = -1;
    return 0;
}

static void rmap_clear(rmap *r)
{
    free(r->R);
    free(r->h);
    free(r->slot);
    memset(r, 0, sizeof *r);
}

/* Doubles the capacity of r and rebuilds its slots; -1 when out of memory. */
static int rmap_grow(rmap *r)
{
    int cap = 2 * r->cap, hcap = 2 * r->hcap;
    size_t blk = (size_t)r->norb * r->norb;
    int(*R)[3] = realloc(r->R, (size_t)cap * sizeof *R);
    if (!R) return -1;
    r->R = R;
    double complex *h = realloc(r->h, (size_t)cap * blk * sizeof *h);
    if (!h) return -1;
    memset(h + (size_t)r->cap * blk, 0, (size_t)(cap - r->cap) * blk * sizeof *h);
    r->h = h;
    int *slot = malloc((size_t)hcap * sizeof *slot);
    if (!slot) return -1;
    for (int i = 0; i < hcap; i++)
        slot[i] = -1;
    for (int q = 0; q < r->n; q++) {
        unsigned k = rhash(r->R[q]) & (unsigned)(hcap - 1);
        while (slot[k] >= 0)
            k = (k + 1) & (unsigned)(hcap - 1);
        slot[k] = q;
    }
    free(r->slot);
    r->slot = slot;
    r->cap = cap;
    r->hcap = hcap;
    return 0;
}

/* Block of R, added when new (the table grows as needed); NULL when out of memory. */
static double complex *rmap_block(rmap *r, const int R[3])
{
    unsigned h = rhash(R) & (unsigned)(r->hcap - 1);
    while (r->slot[h] >= 0) {
        const int *q = r->R[r->slot[h]];
        if (q[0] == R[0] && q[1] == R[1] && q[2] == R[2])
            return r->h + (size_t)r->slot[h] * r->norb * r->norb;
        h = (h + 1) & (unsigned)(r->hcap - 1);
    }
    if (r->n == r->cap) {
        if (rmap_grow(r) != 0) return NULL;
        return rmap_block(r, R);
    }
    r->slot[h] = r->n;
    memcpy(r->R[r->n], R, sizeof r->R[0]);
    return r->h + (size_t)r->n++ * r->norb * r->norb;
}

/* The state-space matrix D of op (norb x norb, column-major, k = 0 part) and each state's L. */
static int op_state_matrix(const cry_info *c, int iop, double complex *D, int (*Ls)[3], bs_err *err)
{
    const tb_model *m = c->m;
    const double zero[3] = {0, 0, 0};
    int rc = cry_op_matrix(c, iop, zero, D, err);
    if (rc != 0) return rc;
    for (int a = 0; a < m->norb; a++) {
        int s = c->site[tb_state_orbital(m, a)];
        memcpy(Ls[a], c->L[iop * c->nsites + s], sizeof Ls[a]);
    }
    return 0;
}

/* Adds weight * (g.h) into out. */
static int apply_op(const tb_model *m, const cry_info *c, int iop, double weight, rmap *out, bs_err *err)
{
    int n = m->norb;
    double complex *D = malloc((size_t)n * n * sizeof *D);
    double complex *hbuf = malloc((size_t)n * n * sizeof *hbuf); /* H_R of a folded model */
    int(*Ls)[3] = malloc((size_t)n * sizeof *Ls);
    int rc = (!D || !hbuf || !Ls) ? bs_fail(err, BS_ENOMEM, "out of memory (symmetrisation)") : 0;
    if (rc == 0) rc = op_state_matrix(c, iop, D, Ls, err);
    const cry_op *op = &c->ops[iop];
    for (int r = 0; rc == 0 && r < m->nR; r++) {
        int WR[3];
        for (int i = 0; i < 3; i++)
            WR[i] = op->W[i][0] * m->R[r][0] + op->W[i][1] * m->R[r][1] + op->W[i][2] * m->R[r][2];
        const double complex *h = tb_hop_block(m, r, hbuf);
        double inv_deg = 1.0 / m->deg[r];
        for (int i = 0; i < n && rc == 0; i++)
            for (int j = 0; j < n; j++) {
                double complex hij = h[(size_t)i * n + j] * inv_deg;
                if (hij == 0.0) continue;
                int Rp[3];
                for (int x = 0; x < 3; x++)
                    Rp[x] = WR[x] - Ls[i][x] + Ls[j][x];
                double complex *blk = rmap_block(out, Rp);
                if (!blk) {
                    rc = bs_fail(err, BS_ENOMEM, "out of memory (symmetrisation)");
                    break;
                }
                /* D is column-major: D[a + i n] = D_ai; only the image shells are nonzero */
                for (int a = 0; a < n; a++) {
                    double complex dai = D[a + (size_t)i * n];
                    if (dai == 0.0) continue;
                    for (int b = 0; b < n; b++) {
                        double complex dbj = D[b + (size_t)j * n];
                        if (dbj != 0.0) blk[(size_t)a * n + b] += weight * dai * hij * conj(dbj);
                    }
                }
            }
    }
    free(D);
    free(hbuf);
    free(Ls);
    return rc;
}

int cry_breaking_ev(const tb_model *m, const cry_info *c, int iop, double *bound_ev, bs_err *err)
{
    int n = m->norb;
    rmap gm;
    *bound_ev = 0.0;
    if (rmap_init(&gm, n, 2 * m->nR + 8) != 0) {
        rmap_clear(&gm);
        return bs_fail(err, BS_ENOMEM, "out of memory (symmetry breaking)");
    }
    int rc = apply_op(m, c, iop, 1.0, &gm, err);
    /* subtract h itself on every R of either set: sum of Frobenius norms of the difference */
    for (int r = 0; rc == 0 && r < m->nR; r++) {
        double complex *blk = rmap_block(&gm, m->R[r]);
        if (!blk) {
            rc = bs_fail(err, BS_ENOMEM, "out of memory (symmetry breaking)");
            break;
        }
        for (size_t e = 0; e < (size_t)n * n; e++)
            blk[e] -= tb_hop(m, r, (int)(e / (size_t)n), (int)(e % (size_t)n)) / m->deg[r];
    }
    for (int r = 0; rc == 0 && r < gm.n; r++) {
        double f = 0.0;
        for (size_t e = 0; e < (size_t)n * n; e++) {
            double complex v = gm.h[(size_t)r * n * n + e];
            f += creal(v) * creal(v) + cimag(v) * cimag(v);
        }
        *bound_ev += sqrt(f);
    }
    rmap_clear(&gm);
    return rc;
}

int cry_symmetrise(const tb_model *m, const cry_info *c, const int *ops, int nops, tb_model **out,
                   bs_err *err)
{
    *out = NULL;
    if (nops < 1) return bs_fail(err, BS_EINVAL, "symmetrisation needs at least one operation");
    int n = m->norb;
    rmap acc;
    if (rmap_init(&acc, n, (nops + 1) * m->nR + 8) != 0) {
        rmap_clear(&acc);
        return bs_fail(err, BS_ENOMEM, "out of memory (symmetrisation)");
    }
    int rc = 0;
    for (int i = 0; i < nops && rc == 0; i++)
        rc = apply_op(m, c, ops[i], 1.0 / nops, &acc, err);
    tb_model *s = NULL;
    if (rc == 0) rc = tb_model_copy(m, &s, err);
    if (rc == 0) {
        /* new arrays for the grown set of lattice vectors */
        int(*R)[3] = malloc((size_t)acc.n * sizeof *R);
        int *deg = malloc((size_t)acc.n * sizeof *deg);
        double complex *H = malloc((size_t)acc.n * n * n * sizeof *H);
        if (!R || !deg || !H) {
            free(R), free(deg), free(H);
            rc = bs_fail(err, BS_ENOMEM, "out of memory (symmetrised model)");
        } else {
            memcpy(R, acc.R, (size_t)acc.n * sizeof *R);
            memcpy(H, acc.h, (size_t)acc.n * n * n * sizeof *H);
            for (int r = 0; r < acc.n; r++)
                deg[r] = 1;
            free(s->R), free(s->deg);
            s->R = R, s->deg = deg, s->nR = acc.n;
            tb_model_set_hops(s, H);
        }
    }
    rmap_clear(&acc);
    if (rc != 0) {
        tb_model_free(s);
        return rc;
    }
    *out = s;
    return 0;
}

int cry_is_group(const cry_info *c, const int *ops, int nops)
{
    for (int a = 0; a < nops; a++)
        for (int b = 0; b < nops; b++) {
            const cry_op *x = &c->ops[ops[a]], *y = &c->ops[ops[b]];
            int W[3][3];
            double t[3];
            for (int i = 0; i < 3; i++) {
                t[i] = x->t[i];
                for (int j = 0; j < 3; j++) {
                    W[i][j] = 0;
                    for (int q = 0; q < 3; q++)
                        W[i][j] += x->W[i][q] * y->W[q][j];
                    t[i] += x->W[i][j] * y->t[j];
                }
            }
            int found = 0;
            for (int q = 0; q < nops && !found; q++) {
                const cry_op *z = &c->ops[ops[q]];
                int same = memcmp(W, z->W, sizeof W) == 0;
                for (int i = 0; i < 3 && same; i++) {
                    double d = t[i] - z->t[i];
                    same = fabs(d - round(d)) < 1e-5;
                }
                found = same;
            }
            if (!found) return 0;
        }
    return 1;
}
