/* Band paths: the standard high-symmetry paths of Comput. Mater. Sci. 49, 299 (2010) for the
 * lattices recognised from the metric of the cell, user paths of labelled points, and sampling. */
#include "bandsieve/kpath.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/model.h"

/* The published paths, in the paper's primitive reciprocal basis, written in the user-path syntax
 * (parsed by kpath_parse). Each holds for the paper's standard cell, whose metric is tested by
 * the matching function of the same row. 2D rows are the k3 = 0 faces of TET, ORC and HEX. */
typedef int (*metric_fn)(const double l[3], const double c[3], double tol);

static int eq(double x, double y, double tol)
{
    return fabs(x - y) <= tol * (fabs(x) + fabs(y)) * 0.5 + 1e-12;
}
static int near(double x, double y, double tol)
{
    return fabs(x - y) <= tol;
}

/* l: lengths |a1|, |a2|, |a3|; c: cosines of (a2,a3), (a1,a3), (a1,a2). */
static int is_cub(const double l[3], const double c[3], double t)
{
    return eq(l[0], l[1], t) && eq(l[1], l[2], t) && near(c[0], 0, t) && near(c[1], 0, t) && near(c[2], 0, t);
}
static int is_fcc(const double l[3], const double c[3], double t)
{
    return eq(l[0], l[1], t) && eq(l[1], l[2], t) && near(c[0], 0.5, t) && near(c[1], 0.5, t) &&
           near(c[2], 0.5, t);
}
static int is_bcc(const double l[3], const double c[3], double t)
{
    const double v = -1.0 / 3.0;
    return eq(l[0], l[1], t) && eq(l[1], l[2], t) && near(c[0], v, t) && near(c[1], v, t) && near(c[2], v, t);
}
static int is_hex(const double l[3], const double c[3], double t)
{
    return eq(l[0], l[1], t) && near(c[2], -0.5, t) && near(c[0], 0, t) && near(c[1], 0, t);
}
static int is_tet(const double l[3], const double c[3], double t)
{
    return eq(l[0], l[1], t) && !eq(l[0], l[2], t) && near(c[0], 0, t) && near(c[1], 0, t) &&
           near(c[2], 0, t);
}
static int is_orc(const double l[3], const double c[3], double t)
{
    return l[0] < l[1] && l[1] < l[2] && !eq(l[0], l[1], t) && !eq(l[1], l[2], t) && near(c[0], 0, t) &&
           near(c[1], 0, t) && near(c[2], 0, t);
}
static int is_sqr(const double l[3], const double c[3], double t)
{
    return eq(l[0], l[1], t) && near(c[2], 0, t);
}
static int is_rec(const double l[3], const double c[3], double t)
{
    return l[0] < l[1] && !eq(l[0], l[1], t) && near(c[2], 0, t);
}
static int is_hex2d(const double l[3], const double c[3], double t)
{
    return eq(l[0], l[1], t) && near(c[2], -0.5, t);
}

typedef struct std_path {
    const char *name;
    int dim;
    metric_fn match;
    const char *path;
} std_path;

static const std_path STD_PATHS[] = {
    {"CUB", 3, is_cub,
     "G:0,0,0 X:0,1/2,0 M:1/2,1/2,0 G:0,0,0 R:1/2,1/2,1/2 X:0,1/2,0 | M:1/2,1/2,0 R:1/2,1/2,1/2"},
    {"FCC", 3, is_fcc,
     "G:0,0,0 X:1/2,0,1/2 W:1/2,1/4,3/4 K:3/8,3/8,3/4 G:0,0,0 L:1/2,1/2,1/2 U:5/8,1/4,5/8 W:1/2,1/4,3/4 "
     "L:1/2,1/2,1/2 K:3/8,3/8,3/4 | U:5/8,1/4,5/8 X:1/2,0,1/2"},
    {"BCC", 3, is_bcc,
     "G:0,0,0 H:1/2,-1/2,1/2 N:0,0,1/2 G:0,0,0 P:1/4,1/4,1/4 H:1/2,-1/2,1/2 | P:1/4,1/4,1/4 N:0,0,1/2"},
    {"HEX", 3, is_hex,
     "G:0,0,0 M:1/2,0,0 K:1/3,1/3,0 G:0,0,0 A:0,0,1/2 L:1/2,0,1/2 H:1/3,1/3,1/2 A:0,0,1/2 | L:1/2,0,1/2 "
     "M:1/2,0,0 | K:1/3,1/3,0 H:1/3,1/3,1/2"},
    {"TET", 3, is_tet,
     "G:0,0,0 X:0,1/2,0 M:1/2,1/2,0 G:0,0,0 Z:0,0,1/2 R:0,1/2,1/2 A:1/2,1/2,1/2 Z:0,0,1/2 | X:0,1/2,0 "
     "R:0,1/2,1/2 | M:1/2,1/2,0 A:1/2,1/2,1/2"},
    {"ORC", 3, is_orc,
     "G:0,0,0 X:1/2,0,0 S:1/2,1/2,0 Y:0,1/2,0 G:0,0,0 Z:0,0,1/2 U:1/2,0,1/2 R:1/2,1/2,1/2 T:0,1/2,1/2 "
     "Z:0,0,1/2 | Y:0,1/2,0 T:0,1/2,1/2 | U:1/2,0,1/2 X:1/2,0,0 | S:1/2,1/2,0 R:1/2,1/2,1/2"},
    {"HEX2D", 2, is_hex2d, "G:0,0,0 M:1/2,0,0 K:1/3,1/3,0 G:0,0,0"},
    {"SQR", 2, is_sqr, "G:0,0,0 X:0,1/2,0 M:1/2,1/2,0 G:0,0,0"},
    {"REC", 2, is_rec, "G:0,0,0 X:1/2,0,0 S:1/2,1/2,0 Y:0,1/2,0 G:0,0,0"},
};

static double dot3(const double *x, const double *y)
{
    return x[0] * y[0] + x[1] * y[1] + x[2] * y[2];
}

static int det3i(const int M[3][3])
{
    return M[0][0] * (M[1][1] * M[2][2] - M[1][2] * M[2][1]) -
           M[0][1] * (M[1][0] * M[2][2] - M[1][2] * M[2][0]) +
           M[0][2] * (M[1][0] * M[2][1] - M[1][1] * M[2][0]);
}

/* Lengths and cosines of the rows of M a. */
static void metric(const int M[3][3], const double a[3][3], double l[3], double c[3])
{
    double v[3][3];
    for (int i = 0; i < 3; i++)
        for (int x = 0; x < 3; x++)
            v[i][x] = M[i][0] * a[0][x] + M[i][1] * a[1][x] + M[i][2] * a[2][x];
    for (int i = 0; i < 3; i++)
        l[i] = sqrt(dot3(v[i], v[i]));
    c[0] = dot3(v[1], v[2]) / (l[1] * l[2]);
    c[1] = dot3(v[0], v[2]) / (l[0] * l[2]);
    c[2] = dot3(v[0], v[1]) / (l[0] * l[1]);
}

/* Finds a unimodular M (entries -1..1; in 2D acting on a1, a2 only) with M a of the standard
 * metric of sp; returns 1 and fills M. In 3D det M = +1 suffices (-M has the other sign). */
static int find_basis(const std_path *sp, const double a[3][3], double tol, int M[3][3])
{
    int e[9];
    const int nfree = sp->dim == 3 ? 9 : 4;
    long total = 1;
    for (int i = 0; i < nfree; i++)
        total *= 3;
    /* Digits map to 0, 1, -1 and the search starts from the identity's code, so a cell that is
     * already standard keeps its basis (and its reduced coordinates read as published). */
    static const int digit[3] = {0, 1, -1};
    const long ident_code = sp->dim == 3 ? 1 + 81 + 6561 : 1 + 27;
    for (long step = 0; step < total; step++) {
        long c = (ident_code + step) % total;
        for (int i = 0; i < nfree; i++, c /= 3)
            e[i] = digit[c % 3];
        if (sp->dim == 3) {
            for (int i = 0; i < 9; i++)
                M[i / 3][i % 3] = e[i];
        } else {
            memset(M, 0, 9 * sizeof(int));
            M[0][0] = e[0], M[0][1] = e[1], M[1][0] = e[2], M[1][1] = e[3], M[2][2] = 1;
        }
        int d = det3i((const int(*)[3])M);
        if (sp->dim == 3 ? d != 1 : abs(d) != 1) continue;
        double l[3], cs[3];
        metric((const int(*)[3])M, a, l, cs);
        if (sp->match(l, cs, tol)) return 1;
    }
    return 0;
}

/* Integer inverse of a unimodular M (adjugate / det). */
static void inverse3i(const int M[3][3], int inv[3][3])
{
    int d = det3i(M);
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            int r0 = (j + 1) % 3, r1 = (j + 2) % 3, c0 = (i + 1) % 3, c1 = (i + 2) % 3;
            inv[i][j] = (M[r0][c0] * M[r1][c1] - M[r0][c1] * M[r1][c0]) / d;
        }
}

int kpath_auto(const double a[3][3], int dim, double tol, kpath *out, bs_err *err)
{
    if (tol <= 0) tol = 1e-4;
    if (dim == 2) {
        double l[3], c[3];
        const int ident[3][3] = {{1, 0, 0}, {0, 1, 0}, {0, 0, 1}};
        metric(ident, a, l, c);
        if (!near(c[0], 0, tol) || !near(c[1], 0, tol))
            return bs_fail(err, BS_EINVAL, "2D lattice: a3 is not orthogonal to a1 and a2; give --path");
    }
    for (size_t s = 0; s < sizeof STD_PATHS / sizeof STD_PATHS[0]; s++) {
        const std_path *sp = &STD_PATHS[s];
        int M[3][3];
        if (sp->dim != dim || !find_basis(sp, a, tol, M)) continue;
        int rc = kpath_parse(sp->path, out, err);
        if (rc != 0) return rc;
        /* Reciprocal of M a is M^-T b, so the reduced point k' of the standard basis is M^-1 k'
         * in the basis of a. */
        int inv[3][3];
        inverse3i((const int(*)[3])M, inv);
        for (int i = 0; i < out->npoint; i++) {
            double k[3], *kp = out->point[i].k;
            for (int x = 0; x < 3; x++)
                k[x] = inv[x][0] * kp[0] + inv[x][1] * kp[1] + inv[x][2] * kp[2];
            memcpy(kp, k, sizeof k);
        }
        snprintf(out->lattice, sizeof out->lattice, "%s", sp->name);
        return 0;
    }
    double l[3], c[3];
    const int ident[3][3] = {{1, 0, 0}, {0, 1, 0}, {0, 0, 1}};
    metric(ident, a, l, c);
    return bs_fail(err, BS_EINVAL,
                   "no standard path for this lattice (|a| = %.4f %.4f %.4f A, angles %.2f %.2f %.2f deg): "
                   "recognised are CUB FCC BCC TET ORC HEX (2D: square, rectangular, hexagonal); give --path",
                   l[0], l[1], l[2], acos(c[0]) * 180 / M_PI, acos(c[1]) * 180 / M_PI,
                   acos(c[2]) * 180 / M_PI);
}

/* One coordinate "x" or "p/q". */
static int parse_coord(const char *s, const char *end, double *out)
{
    char buf[48];
    if (end - s <= 0 || end - s >= (long)sizeof buf) return -1;
    memcpy(buf, s, (size_t)(end - s));
    buf[end - s] = '\0';
    char *e;
    double num = strtod(buf, &e);
    if (e == buf) return -1;
    if (*e == '/') {
        char *e2;
        double den = strtod(e + 1, &e2);
        if (e2 == e + 1 || *e2 != '\0' || den == 0) return -1;
        num /= den;
    } else if (*e != '\0') {
        return -1;
    }
    if (!isfinite(num)) return -1;
    *out = num;
    return 0;
}

static int parse_item(const char *item, size_t len, kpath_point *pt)
{
    const char *colon = memchr(item, ':', len);
    if (!colon || colon == item || colon - item >= KPATH_LABEL_LEN) return -1;
    for (const char *p = item; p < colon; p++)
        if (!isalnum((unsigned char)*p) && !strchr("_'+-", *p)) return -1;
    memcpy(pt->label, item, (size_t)(colon - item));
    pt->label[colon - item] = '\0';
    const char *p = colon + 1, *end = item + len;
    int n = 0;
    pt->k[2] = 0;
    while (p < end && n < 3) {
        const char *comma = memchr(p, ',', (size_t)(end - p));
        const char *stop = comma ? comma : end;
        if (parse_coord(p, stop, &pt->k[n++]) != 0) return -1;
        p = comma ? comma + 1 : end;
        if (comma && p == end) return -1;
    }
    return (p == end && n >= 2) ? 0 : -1;
}

int kpath_parse(const char *text, kpath *out, bs_err *err)
{
    memset(out, 0, sizeof *out);
    snprintf(out->lattice, sizeof out->lattice, "user");
    int jump = 0;
    const char *p = text;
    while (*p) {
        while (isspace((unsigned char)*p))
            p++;
        if (!*p) break;
        size_t len = strcspn(p, " \t\n");
        if (len == 1 && *p == '|') {
            if (out->npoint == 0) return bs_fail(err, BS_EPARSE, "path: '|' before the first point");
            jump = 1;
        } else {
            if (out->npoint == KPATH_MAX_POINTS)
                return bs_fail(err, BS_EPARSE, "path: more than %d points", KPATH_MAX_POINTS);
            kpath_point *pt = &out->point[out->npoint];
            if (parse_item(p, len, pt) != 0)
                return bs_fail(err, BS_EPARSE, "path: item %d '%.*s' is not LABEL:k1,k2[,k3]",
                               out->npoint + 1, (int)(len > 60 ? 60 : len), p);
            pt->jump = jump;
            jump = 0;
            out->npoint++;
        }
        p += len;
    }
    if (jump) return bs_fail(err, BS_EPARSE, "path: ends with '|'");
    if (out->npoint < 2)
        return bs_fail(err, BS_EPARSE, "path: needs at least two points, found %d", out->npoint);
    return 0;
}

void kpath_samples_clear(kpath_samples *s)
{
    if (!s) return;
    free(s->k);
    free(s->x);
    free(s->vertex);
    free(s->vertex_x);
    memset(s, 0, sizeof *s);
}

static double seg_length(const double b[3][3], const double *k0, const double *k1)
{
    double d[3] = {0, 0, 0};
    for (int i = 0; i < 3; i++)
        for (int x = 0; x < 3; x++)
            d[x] += (k1[i] - k0[i]) * b[i][x];
    return sqrt(dot3(d, d));
}

int kpath_sample(const kpath *p, const double a[3][3], int npoints, kpath_samples *out, bs_err *err)
{
    memset(out, 0, sizeof *out);
    if (npoints < 2 || npoints > 1000000) return bs_fail(err, BS_EINVAL, "path: --points must be 2..1000000");
    double b[3][3], total = 0;
    tb_lattice_reciprocal(a, b);
    for (int i = 1; i < p->npoint; i++)
        if (!p->point[i].jump) total += seg_length(b, p->point[i - 1].k, p->point[i].k);
    int nint[KPATH_MAX_POINTS] = {0}, cap = p->npoint;
    for (int i = 1; i < p->npoint; i++) {
        if (p->point[i].jump) continue;
        double len = seg_length(b, p->point[i - 1].k, p->point[i].k);
        nint[i] = total > 0 ? (int)lround((npoints - 1) * len / total) : 1;
        if (nint[i] < 1) nint[i] = 1;
        cap += nint[i];
    }
    out->k = malloc(3 * (size_t)cap * sizeof *out->k);
    out->x = malloc((size_t)cap * sizeof *out->x);
    out->vertex = malloc((size_t)cap * sizeof *out->vertex);
    out->vertex_x = malloc((size_t)p->npoint * sizeof *out->vertex_x);
    if (!out->k || !out->x || !out->vertex || !out->vertex_x) {
        kpath_samples_clear(out);
        return bs_fail(err, BS_ENOMEM, "path: out of memory for %d points", cap);
    }
    double x = 0;
    int n = 0;
    for (int i = 0; i < p->npoint; i++) {
        const double *k1 = p->point[i].k;
        if (i > 0 && !p->point[i].jump) {
            const double *k0 = p->point[i - 1].k;
            double len = seg_length(b, k0, k1);
            for (int j = 1; j < nint[i]; j++, n++) {
                double f = (double)j / nint[i];
                for (int c = 0; c < 3; c++)
                    out->k[3 * n + c] = k0[c] + f * (k1[c] - k0[c]);
                out->x[n] = x + f * len;
                out->vertex[n] = -1;
            }
            x += len;
        }
        memcpy(out->k + 3 * n, k1, 3 * sizeof *k1);
        out->x[n] = x;
        out->vertex[n] = i;
        out->vertex_x[i] = x;
        n++;
    }
    out->nk = n;
    out->nvertex = p->npoint;
    return 0;
}

void kpath_describe(const kpath *p, char *buf, int n)
{
    int used = 0;
    buf[0] = '\0';
    for (int i = 0; i < p->npoint && used < n - 1; i++) {
        const char *sep = i == 0 ? "" : (p->point[i].jump ? "|" : "-");
        int w = snprintf(buf + used, (size_t)(n - used), "%s%s", sep, p->point[i].label);
        if (w < 0) break;
        used += w;
    }
}
