/* Z4 indicator from parity counts and mirror Chern numbers from mirror-resolved link variables.
 * Methods and conventions: include/bandsieve/crystalline.h. */
#include "bandsieve/crystalline.h"

#include <cblas.h>
#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/hk.h"
#include "bandsieve/model.h"

int cz_z4(const par_result *p, int *kappa, bs_err *err)
{
    if (p->dim != 3 || p->ntrim != 8) return bs_fail(err, BS_EINVAL, "Z4 needs the 8 TRIMs of a 3D model");
    int sum = 0;
    for (int t = 0; t < 8; t++) {
        if (p->neven[t] < 0 || p->nodd[t] < 0)
            return bs_fail(err, BS_EINVAL, "parity counts missing at TRIM %d", t);
        sum += p->neven[t] - p->nodd[t];
    }
    if (sum % 4 != 0)
        return bs_fail(err, BS_EINVAL, "sum of n+ - n- over the TRIMs is %d, not a multiple of 4", sum);
    *kappa = ((sum / 4) % 4 + 4) % 4;
    return 0;
}

static void inverse_transpose_int(const int W[3][3], int A[3][3])
{
    /* W is unimodular: W^-1 = adj(W) / det(W) with det = +-1, so A = W^-T is integer. */
    int det = W[0][0] * (W[1][1] * W[2][2] - W[1][2] * W[2][1]) -
              W[0][1] * (W[1][0] * W[2][2] - W[1][2] * W[2][0]) +
              W[0][2] * (W[1][0] * W[2][1] - W[1][1] * W[2][0]);
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            int i1 = (i + 1) % 3, i2 = (i + 2) % 3, j1 = (j + 1) % 3, j2 = (j + 2) % 3;
            /* cofactor C_ij; (W^-1)_ji = C_ij / det, so (W^-T)_ij = C_ij / det */
            A[i][j] = (W[i1][j1] * W[i2][j2] - W[i1][j2] * W[i2][j1]) * det;
        }
}

static void cross_int(const int a[3], const int b[3], int c[3])
{
    c[0] = a[1] * b[2] - a[2] * b[1];
    c[1] = a[2] * b[0] - a[0] * b[2];
    c[2] = a[0] * b[1] - a[1] * b[0];
}

static int gcd(int a, int b)
{
    a = abs(a), b = abs(b);
    while (b) {
        int t = a % b;
        a = b, b = t;
    }
    return a;
}

int cz_mirror_planes(const cry_info *c, int iop, cz_mirror out[2], bs_err *err)
{
    const cry_op *op = cry_get_op(c, iop);
    if (!op->verified || strcmp(op->kind, "m") != 0)
        return bs_fail(err, BS_EINVAL, "operation %d is not a verified mirror", iop + 1);
    int A[3][3];
    inverse_transpose_int(op->W, A);
    int fixed[125][3], nf = 0;
    for (int x = -2; x <= 2; x++)
        for (int y = -2; y <= 2; y++)
            for (int z = -2; z <= 2; z++) {
                int g[3] = {x, y, z}, same = (x || y || z);
                for (int i = 0; i < 3 && same; i++)
                    same = A[i][0] * x + A[i][1] * y + A[i][2] * z == g[i];
                if (same) memcpy(fixed[nf++], g, sizeof g);
            }
    int best = -1, bi = 0, bj = 0;
    for (int i = 0; i < nf; i++)
        for (int j = i + 1; j < nf; j++) {
            int cr[3];
            cross_int(fixed[i], fixed[j], cr);
            int area = abs(cr[0]) + abs(cr[1]) + abs(cr[2]);
            if (area > 0 && (best < 0 || area < best)) best = area, bi = i, bj = j;
        }
    if (best < 0) return bs_fail(err, BS_EINVAL, "mirror %d: no invariant k-plane found", iop + 1);
    memset(out, 0, 2 * sizeof *out);
    int n_int[3];
    cross_int(fixed[bi], fixed[bj], n_int);
    int g = gcd(gcd(n_int[0], n_int[1]), n_int[2]);
    for (int i = 0; i < 3; i++)
        n_int[i] /= g;
    int nplanes = 1;
    out[0].op = iop;
    memcpy(out[0].g[0], fixed[bi], sizeof out[0].g[0]);
    memcpy(out[0].g[1], fixed[bj], sizeof out[0].g[1]);
    memcpy(out[0].normal, op->axis, sizeof out[0].normal);
    for (int h = 1; h < 8 && nplanes == 1; h++) {
        int hv[3] = {h & 1, (h >> 1) & 1, (h >> 2) & 1};
        int inv = 1; /* A k0 - k0 integer for k0 = hv/2 */
        for (int i = 0; i < 3 && inv; i++)
            inv = ((A[i][0] * hv[0] + A[i][1] * hv[1] + A[i][2] * hv[2] - hv[i]) % 2) == 0;
        int off = n_int[0] * hv[0] + n_int[1] * hv[1] + n_int[2] * hv[2]; /* 2 (n . k0) */
        if (!inv || off % 2 == 0) continue;
        out[1] = out[0];
        for (int i = 0; i < 3; i++)
            out[1].k0[i] = 0.5 * hv[i];
        nplanes = 2;
    }
    return nplanes;
}

/* Occupied states of one sector at one k: the mirror restricted to the occupied space is
 * diagonalised through the Hermitian -i M (spinful, M^2 = -1) or M (spinless, M^2 = 1). */
typedef struct sector_ws {
    int n, nocc, spinful;
    double complex *H, *V, *T, *Mo, *vec;
    double *w, *wm;
    hk_engine *e;
} sector_ws;

static int sector_states(sector_ws *s, const cry_info *c, int iop, const double k[3], double complex *out,
                         int *np, double *gap, double *dev, bs_err *err)
{
    int n = s->n, no = s->nocc;
    const double complex one = 1.0, zero = 0.0;
    int rc = hk_build(s->e, 1, k, s->H, err);
    if (rc == 0) rc = cry_op_matrix(c, iop, k, s->V, err);
    if (rc != 0) return rc;
    lapack_int info = LAPACKE_zheevd(LAPACK_COL_MAJOR, 'V', 'U', n, s->H, n, s->w);
    if (info != 0) return bs_fail(err, BS_ENUMERIC, "zheevd failed (info %d)", (int)info);
    *gap = s->w[no] - s->w[no - 1];
    cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, n, no, n, &one, s->V, n, s->H, n, &zero, s->T, n);
    cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, no, no, n, &one, s->H, n, s->T, n, &zero, s->Mo,
                no);
    /* deviation of M^2 from -1 (spinful) or +1 */
    double sgn = s->spinful ? -1.0 : 1.0, d = 0.0;
    for (int i = 0; i < no; i++)
        for (int j = 0; j < no; j++) {
            double complex v = 0;
            for (int q = 0; q < no; q++)
                v += s->Mo[i + q * no] * s->Mo[q + j * no];
            d = fmax(d, cabs(v - (i == j ? sgn : 0.0)));
        }
    *dev = d;
    for (int i = 0; i < no; i++)
        for (int j = 0; j < no; j++) {
            double complex a = s->spinful ? -I * s->Mo[i + j * no] : s->Mo[i + j * no];
            double complex b = s->spinful ? -I * s->Mo[j + i * no] : s->Mo[j + i * no];
            s->vec[i + j * no] = 0.5 * (a + conj(b));
        }
    info = LAPACKE_zheevd(LAPACK_COL_MAJOR, 'V', 'U', no, s->vec, no, s->wm);
    if (info != 0) return bs_fail(err, BS_ENUMERIC, "zheevd failed on the mirror (info %d)", (int)info);
    int nminus = 0;
    while (nminus < no && s->wm[nminus] < 0)
        nminus++;
    *np = no - nminus;
    /* sector states: psi times the eigenvectors into out (n x nocc); the eigenvalues ascend, so
     * the minus sector comes first and the plus sector starts at column nocc - np */
    cblas_zgemm(CblasColMajor, CblasNoTrans, CblasNoTrans, n, no, no, &one, s->H, n, s->vec, no, &zero, out,
                n);
    return 0;
}

/* Normalised det(a^+ b) of two n x nb blocks (the link variable). */
static double complex link(int n, int nb, const double complex *x, const double complex *y,
                           double complex *tmp)
{
    const double complex one = 1.0, zero = 0.0;
    cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, nb, nb, n, &one, x, n, y, n, &zero, tmp, nb);
    lapack_int *ipiv = malloc((size_t)nb * sizeof *ipiv);
    double complex det = 1.0;
    if (!ipiv) return 0.0;
    lapack_int info = LAPACKE_zgetrf(LAPACK_COL_MAJOR, nb, nb, tmp, nb, ipiv);
    if (info < 0) det = 0.0;
    for (int i = 0; i < nb && info >= 0; i++)
        det *= (ipiv[i] != i + 1 ? -1.0 : 1.0) * tmp[i + (size_t)i * nb];
    free(ipiv);
    double a = cabs(det);
    return a > 0 ? det / a : 0.0;
}

/* Chern number of one sector from its states st[(i*N + j)] (n x nb each), sign of chern.h. */
static double sector_flux(int n, int nb, int N, double complex *const *st, double complex *tmp, double *maxf)
{
    double sum = 0.0;
    *maxf = 0.0;
    if (nb == 0) return 0.0;
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++) {
            int i1 = (i + 1) % N, j1 = (j + 1) % N;
            double complex u1 = link(n, nb, st[i * N + j], st[i1 * N + j], tmp);
            double complex u2 = link(n, nb, st[i1 * N + j], st[i1 * N + j1], tmp);
            double complex u3 = link(n, nb, st[i * N + j1], st[i1 * N + j1], tmp);
            double complex u4 = link(n, nb, st[i * N + j], st[i * N + j1], tmp);
            double f = carg(u1 * u2 * conj(u3) * conj(u4));
            *maxf = fmax(*maxf, fabs(f));
            sum += f;
        }
    return -sum / (2 * M_PI);
}

static void orient_plane(const tb_model *m, cz_mirror *pl)
{
    double b[3][3], v[2][3];
    tb_model_reciprocal(m, b);
    for (int a = 0; a < 2; a++)
        for (int x = 0; x < 3; x++)
            v[a][x] = pl->g[a][0] * b[0][x] + pl->g[a][1] * b[1][x] + pl->g[a][2] * b[2][x];
    double cr[3] = {v[0][1] * v[1][2] - v[0][2] * v[1][1], v[0][2] * v[1][0] - v[0][0] * v[1][2],
                    v[0][0] * v[1][1] - v[0][1] * v[1][0]};
    if (cr[0] * pl->normal[0] + cr[1] * pl->normal[1] + cr[2] * pl->normal[2] < 0) {
        int t[3];
        memcpy(t, pl->g[0], sizeof t);
        memcpy(pl->g[0], pl->g[1], sizeof t);
        memcpy(pl->g[1], t, sizeof t);
    }
}

static int mirror_chern_at(const tb_model *m, const cry_info *c, cz_mirror *pl, int N, double gap_tol_ev,
                           double *maxf, bs_err *err)
{
    int n = m->norb, no = m->nocc;
    sector_ws s = {.n = n, .nocc = no, .spinful = m->spinful};
    size_t nn = (size_t)n * n, npts = (size_t)N * N;
    double complex **plus = calloc(npts, sizeof *plus), **minus = calloc(npts, sizeof *minus);
    double complex *store = malloc(npts * (size_t)n * no * sizeof *store);
    s.H = malloc(nn * sizeof *s.H);
    s.V = malloc(nn * sizeof *s.V);
    s.T = malloc((size_t)n * no * sizeof *s.T);
    s.Mo = malloc((size_t)no * no * sizeof *s.Mo);
    s.vec = malloc((size_t)no * no * sizeof *s.vec);
    s.w = malloc((size_t)n * sizeof *s.w);
    s.wm = malloc((size_t)no * sizeof *s.wm);
    double complex *tmp = malloc((size_t)no * no * sizeof *tmp);
    int rc = 0;
    if (!plus || !minus || !store || !s.H || !s.V || !s.T || !s.Mo || !s.vec || !s.w || !s.wm || !tmp)
        rc = bs_fail(err, BS_ENOMEM, "out of memory (mirror Chern, mesh %d)", N);
    if (rc == 0) rc = hk_create(m, 1, &s.e, err);
    pl->status = CZ_DONE;
    pl->reason[0] = '\0';
    pl->min_gap_ev = INFINITY;
    pl->n_plus = -1;
    for (size_t p = 0; p < npts && rc == 0; p++) {
        int i = (int)(p / N), j = (int)(p % N), np = 0;
        double k[3], gap = 0.0, dev = 0.0;
        for (int x = 0; x < 3; x++)
            k[x] = pl->k0[x] + (double)i / N * pl->g[0][x] + (double)j / N * pl->g[1][x];
        double complex *base = store + p * (size_t)n * no;
        rc = sector_states(&s, c, pl->op, k, base, &np, &gap, &dev, err);
        if (rc != 0) break;
        minus[p] = base;
        plus[p] = base + (size_t)n * (no - np);
        pl->min_gap_ev = fmin(pl->min_gap_ev, gap);
        if (pl->n_plus < 0) pl->n_plus = np;
        if (np != pl->n_plus && pl->status == CZ_DONE) {
            pl->status = CZ_AMBIGUOUS;
            snprintf(pl->reason, sizeof pl->reason, "mirror sector sizes change over the plane (%d, %d)",
                     pl->n_plus, np);
        }
        if (dev > 1e-6 && pl->status == CZ_DONE) {
            pl->status = CZ_AMBIGUOUS;
            snprintf(pl->reason, sizeof pl->reason,
                     "mirror eigenvalues off %s by %.2g (glide or broken mirror)", m->spinful ? "+-i" : "+-1",
                     dev);
        }
    }
    if (rc == 0 && pl->min_gap_ev < gap_tol_ev && pl->status == CZ_DONE) {
        pl->status = CZ_AMBIGUOUS;
        snprintf(pl->reason, sizeof pl->reason, "gap closes on the mirror plane (%.3g eV)", pl->min_gap_ev);
    }
    if (rc == 0 && pl->status == CZ_DONE) {
        pl->n_minus = no - pl->n_plus;
        double f1, f2;
        double cp = sector_flux(n, pl->n_plus, N, plus, tmp, &f1);
        double cm = sector_flux(n, pl->n_minus, N, minus, tmp, &f2);
        *maxf = fmax(f1, f2);
        pl->c_plus = (int)lround(cp);
        pl->c_minus = (int)lround(cm);
        int diff = pl->c_plus - pl->c_minus;
        pl->mirror_chern = diff % 2 == 0 ? diff / 2 : diff;
        if (diff % 2 != 0)
            snprintf(pl->reason, sizeof pl->reason, "sector Chern numbers %d and %d are not opposite",
                     pl->c_plus, pl->c_minus);
    }
    pl->mesh = N;
    hk_free(s.e);
    free(plus);
    free(minus);
    free(store);
    free(s.H);
    free(s.V);
    free(s.T);
    free(s.Mo);
    free(s.vec);
    free(s.w);
    free(s.wm);
    free(tmp);
    return rc;
}

int cz_mirror_chern(const tb_model *m, const cry_info *c, cz_mirror *pl, int mesh, double gap_tol_ev,
                    bs_err *err)
{
    if (m->nocc < 1 || m->nocc >= m->norb)
        return bs_fail(err, BS_EINVAL, "filling %d outside 1..%d", m->nocc, m->norb - 1);
    if (mesh < 4) mesh = 24;
    orient_plane(m, pl);
    for (int N = mesh; N <= 4 * mesh; N *= 2) {
        double maxf = 0.0;
        int rc = mirror_chern_at(m, c, pl, N, gap_tol_ev, &maxf, err);
        if (rc != 0 || pl->status != CZ_DONE) return rc;
        /* 1 rad per plaquette: the link method is exact once every plaquette phase is below pi;
         * 1 leaves margin (the default of chern.h). */
        if (maxf <= 1.0) return 0;
        if (2 * N > 4 * mesh) {
            pl->status = CZ_AMBIGUOUS;
            snprintf(pl->reason, sizeof pl->reason, "Berry flux per plaquette %.2f rad at mesh %d", maxf, N);
        }
    }
    return 0;
}

const char *cz_prediction_name(int kind)
{
    switch (kind) {
    case CZ_PRED_GENERIC_WEYL:
        return "Weyl pairs at generic k";
    case CZ_PRED_AXIS_WEYL:
        return "Weyl pair on the axis";
    case CZ_PRED_REPEL:
        return "level repulsion on the axis";
    case CZ_PRED_NODAL_LINE:
        return "nodal line in the mirror plane";
    case CZ_PRED_INVERSION:
        return "parity exchange (band inversion)";
    default:
        return "unknown";
    }
}

/* Eigenvalues of op on two single bands; differ when they are apart by more than 1e-3 (the
 * eigenvalues are roots of unity, at least 2 sin(pi/6) = 1 apart when distinct). */
static int eigen_pair(const tb_model *m, const cry_info *c, int op, const double k[3], int lower,
                      double complex *lo, double complex *up, int *differ, bs_err *err)
{
    int rc = cry_band_eigenvalues(m, c, op, k, lower, 1, lo, err);
    if (rc == 0) rc = cry_band_eigenvalues(m, c, op, k, lower + 1, 1, up, err);
    /* a single band's eigenvalue has modulus 1; less means the band is part of a multiplet that the
     * operation mixes (a degeneracy the energy test missed) */
    if (rc == 0 && (fabs(cabs(*lo) - 1) > 1e-3 || fabs(cabs(*up) - 1) > 1e-3))
        rc = bs_fail(err, BS_EINVAL, "bands %d, %d are degenerate with others at this k", lower + 1,
                     lower + 2);
    if (rc == 0) *differ = cabs(*lo - *up) > 1e-3;
    return rc;
}

int cz_predict_closing(const tb_model *m, const cry_info *c, const double k[3], int lower, cz_prediction *out,
                       bs_err *err)
{
    memset(out, 0, sizeof *out);
    out->op = -1;
    if (lower < 0 || lower + 1 >= m->norb)
        return bs_fail(err, BS_EINVAL, "band %d outside the basis", lower + 1);
    {
        /* both bands must be single: a Kramers or symmetry multiplet needs its own analysis */
        int n = m->norb;
        double complex *H = malloc((size_t)n * n * sizeof *H);
        double *w = malloc((size_t)n * sizeof *w);
        int bad = !H || !w;
        if (!bad) {
            hk_build_direct(m, k, H);
            bad = LAPACKE_zheevd(LAPACK_COL_MAJOR, 'N', 'U', n, H, n, w) != 0;
        }
        int degenerate = !bad && ((lower > 0 && w[lower] - w[lower - 1] < 1e-6) ||
                                  (lower + 2 < n && w[lower + 2] - w[lower + 1] < 1e-6));
        free(H);
        free(w);
        if (bad) return bs_fail(err, BS_ENUMERIC, "bands at k could not be computed");
        if (degenerate)
            return bs_fail(err, BS_EINVAL, "bands %d, %d are degenerate with others at this k", lower + 1,
                           lower + 2);
    }
    int *lg = malloc((size_t)cry_nops(c) * sizeof *lg);
    if (!lg) return bs_fail(err, BS_ENOMEM, "out of memory");
    int nl = cry_little_group(c, k, lg), rc = 0;
    int rot_equal = -1, mirror_diff = -1, inv = -1;
    double complex elo[3] = {0}, eup[3] = {0};
    for (int i = 0; i < nl && rc == 0; i++) {
        const cry_op *op = cry_get_op(c, lg[i]);
        int proper_rot = strcmp(op->kind, "2") == 0 || strcmp(op->kind, "3") == 0 ||
                         strcmp(op->kind, "4") == 0 || strcmp(op->kind, "6") == 0;
        int mirror = strcmp(op->kind, "m") == 0, inversion = strcmp(op->kind, "-1") == 0;
        if (!proper_rot && !mirror && !inversion) continue;
        double complex lo, up;
        int differ = 0;
        rc = eigen_pair(m, c, lg[i], k, lower, &lo, &up, &differ, err);
        if (rc != 0) break;
        if (proper_rot && differ) {
            out->kind = CZ_PRED_AXIS_WEYL;
            out->op = lg[i], out->ev_lower = lo, out->ev_upper = up;
            if (m->dim == 2) /* a rotation about the normal leaves isolated points of a 2D zone */
                snprintf(out->text, sizeof out->text,
                         "%s-fold point, eigenvalues %.2f%+.2fi and %.2f%+.2fi differ: the bands can cross "
                         "here at "
                         "one parameter value (a 2D Dirac point)",
                         op->kind, creal(lo), cimag(lo), creal(up), cimag(up));
            else
                snprintf(out->text, sizeof out->text,
                         "on a %s-fold axis, eigenvalues %.2f%+.2fi and %.2f%+.2fi differ: a Weyl pair is "
                         "created on the axis",
                         op->kind, creal(lo), cimag(lo), creal(up), cimag(up));
            free(lg);
            return 0;
        }
        if (proper_rot && rot_equal < 0) rot_equal = lg[i], elo[0] = lo, eup[0] = up;
        if (mirror && differ && mirror_diff < 0) mirror_diff = lg[i], elo[1] = lo, eup[1] = up;
        if (inversion && differ) inv = lg[i], elo[2] = lo, eup[2] = up;
    }
    free(lg);
    if (rc != 0) return rc;
    if (inv >= 0) {
        out->kind = CZ_PRED_INVERSION, out->op = inv, out->ev_lower = elo[2], out->ev_upper = eup[2];
        snprintf(out->text, sizeof out->text,
                 "inversion-invariant point, parities %+.0f and %+.0f: a parity exchange", creal(elo[2]),
                 creal(eup[2]));
    } else if (rot_equal >= 0) {
        out->kind = CZ_PRED_REPEL, out->op = rot_equal, out->ev_lower = elo[0], out->ev_upper = eup[0];
        snprintf(
            out->text, sizeof out->text,
            "on a %s-fold axis with equal eigenvalues %.2f%+.2fi: the bands repel there; a closing can only "
            "happen off the axis",
            cry_get_op(c, rot_equal)->kind, creal(elo[0]), cimag(elo[0]));
    } else if (mirror_diff >= 0) {
        out->kind = CZ_PRED_NODAL_LINE, out->op = mirror_diff, out->ev_lower = elo[1], out->ev_upper = eup[1];
        snprintf(out->text, sizeof out->text,
                 "on a mirror plane, eigenvalues %.2f%+.2fi and %.2f%+.2fi differ: a nodal line in the plane",
                 creal(elo[1]), cimag(elo[1]), creal(eup[1]), cimag(eup[1]));
    } else {
        out->kind = CZ_PRED_GENERIC_WEYL;
        snprintf(out->text, sizeof out->text,
                 "no protecting symmetry at this k: Weyl nodes are created in pairs");
    }
    return 0;
}
