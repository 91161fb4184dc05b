/* Phase paths: families H(x), the gap scan with bracketing and refinement of every closing, phase
 * intervals with their diagnosis, and Weyl-node tracks through gapless intervals. Physics and method
 * are summarised (with sources) in phasepath.h. */
#include "bandsieve/phasepath.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/clock.h"
#include "bandsieve/config.h"
#include "bandsieve/crystal.h"
#include "bandsieve/crystalline.h"
#include "bandsieve/gaps.h"
#include "bandsieve/hk.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/nodes.h"

/* ---------------------------------------------------------------- sources */

typedef struct pp_segment {
    int nR;
    int (*R)[3];
    int *ia, *ib; /* index of R in the lower / upper member, -1 when absent */
} pp_segment;

struct pp_source {
    int builtin;
    char spec[512];
    char param[64];
    int n;
    const tb_model *const *members;
    double *values;
    pp_segment *seg; /* n - 1 */
};

void pp_source_free(pp_source *s)
{
    if (!s) return;
    if (s->seg)
        for (int i = 0; i + 1 < s->n; i++) {
            free(s->seg[i].R);
            free(s->seg[i].ia);
            free(s->seg[i].ib);
        }
    free(s->seg);
    free(s->values);
    free(s);
}

int pp_source_builtin(const char *spec, const char *param, pp_source **out, bs_err *err)
{
    *out = NULL;
    char name[64];
    size_t len = strcspn(spec, ":");
    if (len == 0 || len >= sizeof name)
        return bs_fail(err, BS_EINVAL, "model spec '%s': no model name", spec);
    memcpy(name, spec, len);
    name[len] = '\0';
    const lm_info *info = lm_find(name);
    if (!info) return bs_fail(err, BS_EINVAL, "model spec '%s': no built-in model '%s'", spec, name);
    int found = 0;
    for (int i = 0; i < info->nparam; i++) {
        if (strcmp(info->params[i].key, param) != 0) continue;
        found = 1;
        if (info->params[i].is_int)
            return bs_fail(err, BS_EINVAL, "parameter '%s' of %s is an integer key: a path needs a real one",
                           param, name);
    }
    if (!found)
        return bs_fail(err, BS_EINVAL, "model %s has no parameter '%s' (bandsieve models %s)", name, param,
                       name);
    /* the spec must not set the varied key itself */
    const char *p = spec + len;
    while (*p) {
        p++;
        size_t kl = strcspn(p, "=");
        if (kl == strlen(param) && strncmp(p, param, kl) == 0)
            return bs_fail(err, BS_EINVAL, "model spec '%s' sets '%s', the parameter of the path", spec,
                           param);
        p += strcspn(p, ",");
    }
    if (strlen(spec) >= sizeof((pp_source *)0)->spec - 64 || strlen(param) >= 64)
        return bs_fail(err, BS_EINVAL, "model spec '%s' too long", spec);
    pp_source *s = calloc(1, sizeof *s);
    if (!s) return bs_fail(err, BS_ENOMEM, "out of memory for a path source");
    s->builtin = 1;
    snprintf(s->spec, sizeof s->spec, "%s", spec);
    snprintf(s->param, sizeof s->param, "%s", param);
    *out = s;
    return 0;
}

int pp_same_basis(const tb_model *a, const tb_model *b, bs_err *err)
{
    const char *what = NULL;
    if (a->dim != b->dim)
        what = "dimension";
    else if (a->norb != b->norb)
        what = "number of states";
    else if (a->nspatial != b->nspatial)
        what = "number of spatial orbitals";
    else if (a->spinful != b->spinful || a->spin_layout != b->spin_layout)
        what = "spin layout";
    else if (a->nocc != b->nocc)
        what = "filling (occupied_bands)";
    else
        for (int o = 0; o < a->nspatial; o++)
            if (a->orb_l[o] != b->orb_l[o]) {
                what = "orbital angular momenta (order of the orbitals)";
                break;
            } else if ((a->orb_shape ? a->orb_shape[o] : -1) != (b->orb_shape ? b->orb_shape[o] : -1)) {
                what = "orbital shapes (order of the orbitals within a shell)";
                break;
            }
    if (what)
        return bs_fail(err, BS_EINVAL, "members '%s' and '%s' of a family do not share a basis: %s differs",
                       a->id, b->id, what);
    return 0;
}

int pp_source_members(const tb_model *const *members, const double *values, int n, pp_source **out,
                      bs_err *err)
{
    *out = NULL;
    if (n < 2) return bs_fail(err, BS_EINVAL, "a path needs at least two members, got %d", n);
    for (int i = 0; i + 1 < n; i++) {
        if (!(values[i + 1] > values[i]))
            return bs_fail(err, BS_EINVAL, "member values must increase: '%s' at %g, '%s' at %g",
                           members[i]->id, values[i], members[i + 1]->id, values[i + 1]);
        int rc = pp_same_basis(members[i], members[i + 1], err);
        if (rc != 0) return rc;
    }
    pp_source *s = calloc(1, sizeof *s);
    if (!s) return bs_fail(err, BS_ENOMEM, "out of memory for a path source");
    s->n = n;
    s->members = members;
    s->values = malloc((size_t)n * sizeof *s->values);
    s->seg = calloc((size_t)(n - 1), sizeof *s->seg);
    if (!s->values || !s->seg) goto nomem;
    memcpy(s->values, values, (size_t)n * sizeof *values);
    for (int i = 0; i + 1 < n; i++) {
        const tb_model *a = members[i], *b = members[i + 1];
        pp_segment *g = &s->seg[i];
        int cap = a->nR + b->nR;
        g->R = malloc((size_t)cap * sizeof *g->R);
        g->ia = malloc((size_t)cap * sizeof *g->ia);
        g->ib = malloc((size_t)cap * sizeof *g->ib);
        if (!g->R || !g->ia || !g->ib) goto nomem;
        for (int r = 0; r < a->nR; r++) {
            memcpy(g->R[r], a->R[r], sizeof g->R[r]);
            g->ia[r] = r;
            g->ib[r] = tb_model_find_R(b, a->R[r]);
        }
        g->nR = a->nR;
        for (int r = 0; r < b->nR; r++) {
            if (tb_model_find_R(a, b->R[r]) >= 0) continue;
            memcpy(g->R[g->nR], b->R[r], sizeof g->R[0]);
            g->ia[g->nR] = -1;
            g->ib[g->nR] = r;
            g->nR++;
        }
    }
    *out = s;
    return 0;
nomem:
    pp_source_free(s);
    return bs_fail(err, BS_ENOMEM, "out of memory for the lattice-vector union of a family");
}

static int interpolate(const pp_source *s, int seg, double t, tb_model **out, bs_err *err)
{
    const tb_model *a = s->members[seg], *b = s->members[seg + 1];
    const pp_segment *g = &s->seg[seg];
    tb_model *m = NULL;
    int rc = tb_model_create(a->norb, g->nR, a->spinful, &m, err);
    if (rc != 0) return rc;
    snprintf(m->id, sizeof m->id, "%.56s~%.56s@%.6g", a->id, b->id, t);
    snprintf(m->formula, sizeof m->formula, "%s", a->formula);
    snprintf(m->source, sizeof m->source, "interpolated between %.90s and %.90s (virtual crystal)", a->id,
             b->id);
    m->dim = a->dim;
    m->spin_layout = a->spin_layout;
    m->nocc = a->nocc;
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            m->lattice[i][j] = (1 - t) * a->lattice[i][j] + t * b->lattice[i][j];
    if (a->orb_shape) {
        /* the shapes (the same in both members: check_basis) fix the crystal's representations */
        m->orb_shape = malloc((size_t)a->nspatial * sizeof *m->orb_shape);
        if (!m->orb_shape) {
            tb_model_free(m);
            return bs_fail(err, BS_ENOMEM, "out of memory (orbital shapes)");
        }
        memcpy(m->orb_shape, a->orb_shape, (size_t)a->nspatial * sizeof *m->orb_shape);
    }
    for (int o = 0; o < a->nspatial; o++) {
        m->orb_l[o] = a->orb_l[o];
        for (int j = 0; j < 3; j++) {
            /* positions move along the shorter way between the two members (modulo the lattice) */
            double d = b->orb_pos[o][j] - a->orb_pos[o][j];
            d -= round(d);
            m->orb_pos[o][j] = a->orb_pos[o][j] + t * d;
        }
    }
    size_t nn = (size_t)a->norb * a->norb;
    for (int r = 0; r < g->nR; r++) {
        memcpy(m->R[r], g->R[r], sizeof m->R[r]);
        m->deg[r] = 1;
        double complex *h = m->H + (size_t)r * nn;
        if (g->ia[r] >= 0) {
            double w = (1 - t) / a->deg[g->ia[r]];
            for (size_t e = 0; e < nn; e++)
                h[e] += w * tb_hop(a, g->ia[r], (int)(e / (size_t)a->norb), (int)(e % (size_t)a->norb));
        }
        if (g->ib[r] >= 0) {
            double w = t / b->deg[g->ib[r]];
            for (size_t e = 0; e < nn; e++)
                h[e] += w * tb_hop(b, g->ib[r], (int)(e / (size_t)b->norb), (int)(e % (size_t)b->norb));
        }
    }
    *out = m;
    return 0;
}

int pp_source_model(const pp_source *s, double x, tb_model **out, bs_err *err)
{
    *out = NULL;
    if (s->builtin) {
        char spec[640];
        snprintf(spec, sizeof spec, "%s%c%s=%.17g", s->spec, strchr(s->spec, ':') ? ',' : ':', s->param, x);
        return lm_build(spec, out, err);
    }
    double lo = s->values[0], hi = s->values[s->n - 1], slack = 1e-12 * (hi - lo);
    if (x < lo - slack || x > hi + slack)
        return bs_fail(err, BS_EINVAL, "path value %g outside the members' range [%g, %g]", x, lo, hi);
    int seg = 0;
    while (seg + 2 < s->n && x > s->values[seg + 1])
        seg++;
    double t = (x - s->values[seg]) / (s->values[seg + 1] - s->values[seg]);
    if (t < 0) t = 0;
    if (t > 1) t = 1;
    return interpolate(s, seg, t, out, err);
}

/* ---------------------------------------------------------------- the gap function */

int pp_gap(const tb_model *m, int mesh, double *gap_ev, double k[3], bs_err *err)
{
    hk_engine *hk = NULL;
    bp_eval *bp = NULL;
    nodes_result nr;
    nodes_result_init(&nr);
    gaps_result g;
    memset(&g, 0, sizeof g);
    int rc = hk_create(m, 64, &hk, err);
    if (rc == 0) rc = bp_create(m, hk, 0, &bp, err);
    if (rc == 0) {
        gaps_opts go;
        gaps_opts_init(&go);
        go.mesh = mesh;
        rc = gaps_find_eval(bp, &go, &g, err);
    }
    /* As the diagnosis does: in 3D a small gap may hide nodes between the gap search's basins. */
    if (rc == 0 && m->dim == 3 && g.gap_direct_ev < fmax(BS_GAP_CLOSED_EV, 0.02 * g.width_ev)) {
        nodes_opts no;
        nodes_opts_init(&no);
        no.mesh = mesh;
        no.skip_chirality = 1;
        rc = nodes_find_eval(m, bp, &no, &nr, err);
        if (rc == 0) gaps_merge_nodes(&g, &nr);
    }
    if (rc == 0) {
        *gap_ev = g.gap_direct_ev;
        memcpy(k, g.k_direct, sizeof g.k_direct);
    }
    nodes_result_clear(&nr);
    bp_free(bp);
    hk_free(hk);
    return rc;
}

typedef struct gapfn {
    const pp_source *s;
    const pp_opts *o;
    long long nevals;
} gapfn;

static int gap_at(gapfn *f, double x, double *g, double k[3], bs_err *err)
{
    tb_model *m = NULL;
    double kk[3];
    int rc = pp_source_model(f->s, x, &m, err);
    if (rc == 0) rc = pp_gap(m, f->o->gap_mesh, g, k ? k : kk, err);
    tb_model_free(m);
    f->nevals++;
    return rc;
}

/* Bisection between an open x_open and a closed x_closed; returns the middle of the last bracket. */
static int bisect_edge(gapfn *f, double x_open, double x_closed, double *edge, bs_err *err)
{
    double a = x_open, b = x_closed;
    while (fabs(b - a) > f->o->tol_x) {
        double mid = 0.5 * (a + b), g;
        int rc = gap_at(f, mid, &g, NULL, err);
        if (rc != 0) return rc;
        if (g < f->o->closed_ev)
            b = mid;
        else
            a = mid;
    }
    *edge = 0.5 * (a + b);
    return 0;
}

/* Golden section for the smallest g on [a, b], stopping early once g < closed_ev. */
static int golden_min(gapfn *f, double a, double b, double *xmin, double *gmin, bs_err *err)
{
    const double r = 0.5 * (sqrt(5.0) - 1.0);
    double c = b - r * (b - a), d = a + r * (b - a), gc, gd;
    int rc = gap_at(f, c, &gc, NULL, err);
    if (rc == 0) rc = gap_at(f, d, &gd, NULL, err);
    double stop = f->o->tol_x * 1e-4;
    while (rc == 0 && b - a > stop && fmin(gc, gd) >= f->o->closed_ev) {
        if (gc < gd) {
            b = d;
            d = c;
            gd = gc;
            c = b - r * (b - a);
            rc = gap_at(f, c, &gc, NULL, err);
        } else {
            a = c;
            c = d;
            gc = gd;
            d = a + r * (b - a);
            rc = gap_at(f, d, &gd, NULL, err);
        }
    }
    if (rc != 0) return rc;
    *xmin = gc < gd ? c : d;
    *gmin = fmin(gc, gd);
    return 0;
}

/* ---------------------------------------------------------------- labels */

static double vlen(const double v[3])
{
    return sqrt(v[0] * v[0] + v[1] * v[1] + v[2] * v[2]);
}

static double vangle(const double a[3], const double b[3])
{
    double d = (a[0] * b[0] + a[1] * b[1] + a[2] * b[2]) / (vlen(a) * vlen(b));
    return acos(fmax(-1.0, fmin(1.0, d))) * 180.0 / M_PI;
}

static double wrap01(double v)
{
    return v - floor(v);
}

static int near(double a, double b)
{
    double d = a - b;
    d -= round(d);
    return fabs(d) < 1e-3;
}

void pp_kpoint_label(const tb_model *m, const double k[3], char *buf, int len, int *trim)
{
    int dim = m->dim, h[3] = {0, 0, 0}, is_trim = 1;
    for (int i = 0; i < dim; i++) {
        if (near(k[i], 0))
            h[i] = 0;
        else if (near(k[i], 0.5))
            h[i] = 1;
        else
            is_trim = 0;
    }
    *trim = is_trim;
    const double(*a)[3] = (const double(*)[3])m->lattice;
    double la = vlen(a[0]), lb = vlen(a[1]), lc = vlen(a[2]);
    int eq2 = fabs(la - lb) < 1e-6 * la, eq3 = eq2 && fabs(la - lc) < 1e-6 * la;
    double g12 = vangle(a[0], a[1]), g13 = vangle(a[0], a[2]), g23 = vangle(a[1], a[2]);
    int nhalf = h[0] + h[1] + h[2];
    if (is_trim && nhalf == 0) {
        snprintf(buf, len, "Gamma");
        return;
    }
    if (dim == 2 && eq2 && (fabs(g12 - 60) < 1e-4 || fabs(g12 - 120) < 1e-4)) {
        if (is_trim) {
            snprintf(buf, len, "M");
            return;
        }
        /* zone corners: (1/3, 2/3) and (2/3, 1/3) for 60 degrees, (1/3, 1/3) and (2/3, 2/3) for 120 */
        int sixty = fabs(g12 - 60) < 1e-4;
        double c1[2] = {1.0 / 3, sixty ? 2.0 / 3 : 1.0 / 3}, c2[2] = {2.0 / 3, sixty ? 1.0 / 3 : 2.0 / 3};
        if (near(k[0], c1[0]) && near(k[1], c1[1])) {
            snprintf(buf, len, "K");
            return;
        }
        if (near(k[0], c2[0]) && near(k[1], c2[1])) {
            snprintf(buf, len, "K'");
            return;
        }
    }
    if (is_trim && dim == 2 && eq2 && fabs(g12 - 90) < 1e-4) {
        snprintf(buf, len, nhalf == 1 ? "X" : "M");
        return;
    }
    if (is_trim && dim == 3 && eq3) {
        if (fabs(g12 - 90) < 1e-4 && fabs(g13 - 90) < 1e-4 && fabs(g23 - 90) < 1e-4) {
            snprintf(buf, len, nhalf == 1 ? "X" : nhalf == 2 ? "M" : "R");
            return;
        }
        if (fabs(g12 - 60) < 1e-4 && fabs(g13 - 60) < 1e-4 && fabs(g23 - 60) < 1e-4) {
            snprintf(buf, len, nhalf == 2 ? "X" : "L"); /* fcc primitive cell */
            return;
        }
    }
    if (is_trim) {
        snprintf(buf, len, "(%s,%s,%s)", h[0] ? "1/2" : "0", h[1] ? "1/2" : "0",
                 dim == 3 && h[2] ? "1/2" : "0");
        return;
    }
    snprintf(buf, len, "(%.4f,%.4f,%.4f)", wrap01(k[0]), wrap01(k[1]), dim == 3 ? wrap01(k[2]) : 0.0);
}

const char *pp_event_name(int kind)
{
    switch (kind) {
    case PP_EV_CREATED:
        return "pair created";
    case PP_EV_ANNIHILATED:
        return "pair annihilated";
    case PP_EV_BOUNDARY:
        return "node crosses the zone boundary";
    case PP_EV_COUNT:
        return "node count not a multiple of 4 under time reversal";
    case PP_EV_NET:
        return "net chirality not zero";
    default:
        return "?";
    }
}

/* ---------------------------------------------------------------- results */

void pp_opts_init(pp_opts *o)
{
    memset(o, 0, sizeof *o);
}

void pp_result_init(pp_result *r)
{
    memset(r, 0, sizeof *r);
    r->confidence = 1.0;
}

void pp_result_clear(pp_result *r)
{
    if (!r) return;
    free(r->xs);
    free(r->gaps);
    free(r->closings);
    for (int i = 0; i < r->ninterval; i++)
        res_clear(&r->intervals[i].diag);
    free(r->intervals);
    for (int i = 0; i < r->ntrack; i++) {
        free(r->tracks[i].x);
        free(r->tracks[i].k);
    }
    free(r->tracks);
    free(r->events);
    pp_result_init(r);
}

static void add_note(pp_result *r, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

static void add_note(pp_result *r, const char *fmt, ...)
{
    size_t used = strlen(r->note);
    if (used + 4 >= sizeof r->note) return;
    if (used) {
        snprintf(r->note + used, sizeof r->note - used, "; ");
        used += 2;
    }
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(r->note + used, sizeof r->note - used, fmt, ap);
    va_end(ap);
}

static int grow(void **p, int *cap, int need, size_t size)
{
    if (need <= *cap) return 0;
    int nc = *cap ? 2 * *cap : 8;
    while (nc < need)
        nc *= 2;
    void *q = realloc(*p, (size_t)nc * size);
    if (!q) return -1;
    *p = q;
    *cap = nc;
    return 0;
}

/* ---------------------------------------------------------------- closings */

static int cmp_closing(const void *a, const void *b)
{
    double xa = ((const pp_closing *)a)->x_lo, xb = ((const pp_closing *)b)->x_lo;
    return (xa > xb) - (xa < xb);
}

static int add_region(pp_result *r, int *cap, double lo, double hi, double x, double g, bs_err *err)
{
    for (int i = 0; i < r->nclosing; i++) {
        pp_closing *c = &r->closings[i];
        if (x >= c->x_lo - 1e-12 && x <= c->x_hi + 1e-12) return 0; /* already known */
    }
    if (grow((void **)&r->closings, cap, r->nclosing + 1, sizeof *r->closings) != 0)
        return bs_fail(err, BS_ENOMEM, "out of memory for closings");
    pp_closing *c = &r->closings[r->nclosing++];
    memset(c, 0, sizeof *c);
    c->agrees = -1;
    c->x_lo = lo;
    c->x_hi = hi;
    c->x = x;
    c->gap_ev = g;
    c->before = c->after = -1;
    return 0;
}

/* Touching k-points of the model at x (nodes_find without chirality), labelled. */
static int closing_kpoints(const pp_source *s, const pp_opts *o, double x, double gap_hint,
                           const double k_hint[3], pp_closing *c, bs_err *err)
{
    tb_model *m = NULL;
    hk_engine *hk = NULL;
    bp_eval *bp = NULL;
    nodes_result nr;
    nodes_result_init(&nr);
    int rc = pp_source_model(s, x, &m, err);
    if (rc == 0) rc = hk_create(m, 64, &hk, err);
    if (rc == 0) rc = bp_create(m, hk, 0, &bp, err);
    if (rc == 0) {
        nodes_opts no;
        nodes_opts_init(&no);
        no.mesh = o->gap_mesh;
        no.skip_chirality = 1;
        no.tol_gap_ev = fmax(BS_GAP_CLOSED_EV, 10 * gap_hint);
        rc = nodes_find_eval(m, bp, &no, &nr, err);
    }
    if (rc == 0) {
        c->nk = 0;
        for (int i = 0; i < nr.nnodes && c->nk < PP_MAX_KPTS; i++)
            memcpy(c->k[c->nk++], nr.nodes[i].k, sizeof c->k[0]);
        for (int i = 0; i < nr.nodal_points && c->nk < PP_MAX_KPTS && nr.nnodes == 0; i++)
            memcpy(c->k[c->nk++], nr.line_k[i], sizeof c->k[0]);
        if (c->nk == 0) {
            memcpy(c->k[0], k_hint, sizeof c->k[0]);
            c->nk = 1;
        }
        c->all_at_trims = 1;
        for (int i = 0; i < c->nk; i++) {
            pp_kpoint_label(m, c->k[i], c->k_label[i], sizeof c->k_label[i], &c->at_trim[i]);
            c->all_at_trims &= c->at_trim[i];
        }
    }
    nodes_result_clear(&nr);
    bp_free(bp);
    hk_free(hk);
    tb_model_free(m);
    return rc;
}

/* The symmetry prediction (cz_predict_closing) for closing c from the model at xp, just outside
 * the closed region, at the first touching k. Failures only leave c->predicted at 0. */
static void predict(const pp_source *s, double xp, pp_closing *c)
{
    tb_model *m = NULL;
    cry_info *ci = NULL;
    bs_err e;
    bs_err_clear(&e);
    if (c->nk < 1 || pp_source_model(s, xp, &m, &e) != 0) return;
    cry_opts co;
    cry_opts_default(&co);
    cz_prediction pr;
    if (cry_detect(m, &co, &ci, &e) == 0 && cz_predict_closing(m, ci, c->k[0], m->nocc - 1, &pr, &e) == 0) {
        c->predicted = 1;
        c->predicted_kind = pr.kind;
        snprintf(c->prediction, sizeof c->prediction, "%s", pr.text);
    }
    cry_info_free(ci);
    tb_model_free(m);
}

/* The prediction beside what the path found (Sci. Adv. 3, e1602680 (2017), reference from memory;
 * New J. Phys. 9, 356 (2007)): Weyl nodes (generic or on an axis) open a gapless interval with
 * nodes; a mirror with different eigenvalues a nodal line; equal eigenvalues on an axis mean the
 * bands repel there, so a touching found at that point contradicts it. A disagreement lowers the
 * confidence of the classes on both sides (factor 0.7) and is said in their reasons. */
static void compare_prediction(pp_result *r, pp_closing *c)
{
    c->agrees = -1;
    if (!c->predicted) return;
    /* the gapless interval the closing opens (its edges are the closing's) */
    const pp_interval *in = NULL;
    for (int i = 0; i < r->ninterval && !in; i++)
        if (r->intervals[i].gapless && r->intervals[i].x_rep >= c->x_lo && r->intervals[i].x_rep <= c->x_hi)
            in = &r->intervals[i];
    int weyl = !c->point && in && (in->diag.cls == RES_WEYL || in->diag.nnodes > 0) && !in->diag.nodal_line;
    int line = !c->point && in && in->diag.nodal_line;
    switch (c->predicted_kind) {
    case CZ_PRED_GENERIC_WEYL:
    case CZ_PRED_AXIS_WEYL:
        c->agrees = weyl;
        break;
    case CZ_PRED_NODAL_LINE:
        c->agrees = line;
        break;
    case CZ_PRED_REPEL:
        c->agrees = 0; /* the path found the two bands touching where they must repel */
        break;
    default:
        return;
    }
    if (c->agrees) return;
    int sides[2] = {c->before, c->after};
    for (int i = 0; i < 2; i++) {
        if (sides[i] < 0) continue;
        res_diag *d = &r->intervals[sides[i]].diag;
        d->confidence *= 0.7;
        size_t used = strlen(d->reason);
        snprintf(d->reason + used, sizeof d->reason - used,
                 "; the neighbouring gap closing disagrees with its symmetry prediction (%s)",
                 cz_prediction_name(c->predicted_kind));
    }
}

static int trim_index(const double k[3])
{
    int t = 0;
    for (int i = 0; i < 3; i++)
        if (near(k[i], 0.5)) t |= 1 << i;
    return t;
}

static void z2_text(const res_diag *d, char *buf, int len)
{
    if (d->z2_status != RES_DONE) {
        if (d->chern_status == RES_DONE && !d->time_reversal && d->dim == 2)
            snprintf(buf, len, "C = %d", d->chern);
        else
            snprintf(buf, len, "-");
        return;
    }
    if (d->dim == 2)
        snprintf(buf, len, "Z2 = %d", d->z2[0]);
    else
        snprintf(buf, len, "Z2 = %d;%d%d%d", d->z2[0], d->z2[1], d->z2[2], d->z2[3]);
}

static void describe(pp_result *r, pp_closing *c, const char *param)
{
    const pp_interval *b = c->before >= 0 ? &r->intervals[c->before] : NULL;
    const pp_interval *a = c->after >= 0 ? &r->intervals[c->after] : NULL;
    /* parities: both sides inversion-symmetric Kramers insulators with parity counts */
    if (b && a && b->diag.ntrim > 0 && b->diag.ntrim == a->diag.ntrim && b->diag.inversion &&
        a->diag.inversion) {
        c->parity_checked = 1;
        for (int t = 0; t < b->diag.ntrim; t++)
            c->trim_changed[t] = b->diag.par_nodd[t] >= 0 && a->diag.par_nodd[t] >= 0 &&
                                 b->diag.par_nodd[t] != a->diag.par_nodd[t];
        int any = 0;
        for (int i = 0; i < c->nk; i++)
            if (c->at_trim[i] && c->trim_changed[trim_index(c->k[i])]) any = 1;
        c->parity_exchange = any;
    }
    char where[120] = "";
    /* distinct labels, with counts */
    int used = 0;
    for (int i = 0; i < c->nk; i++) {
        int seen = 0;
        for (int j = 0; j < i; j++)
            seen |= strcmp(c->k_label[i], c->k_label[j]) == 0;
        if (seen) continue;
        int count = 0;
        for (int j = i; j < c->nk; j++)
            count += strcmp(c->k_label[i], c->k_label[j]) == 0;
        if (!c->at_trim[i] && c->k_label[i][0] == '(') continue;
        used += snprintf(where + used, sizeof where - used > 0 ? sizeof where - used : 0, "%s%s",
                         used ? ", " : "", c->k_label[i]);
        if (count > 1 && used < (int)sizeof where)
            used += snprintf(where + used, sizeof where - used, " (x%d)", count);
        if (used >= (int)sizeof where) break;
    }
    int generic = 0;
    for (int i = 0; i < c->nk; i++)
        generic += !c->at_trim[i] && c->k_label[i][0] == '(';
    char sides[200] = "";
    if (b && a) {
        char zb[32], za[32];
        z2_text(&b->diag, zb, sizeof zb);
        z2_text(&a->diag, za, sizeof za);
        snprintf(sides, sizeof sides, "; %s (%s) -> %s (%s)", res_class_name(b->diag.cls), zb,
                 res_class_name(a->diag.cls), za);
    }
    if (c->point) {
        if (c->all_at_trims && c->parity_exchange)
            snprintf(c->kind, sizeof c->kind, "band inversion");
        else
            snprintf(c->kind, sizeof c->kind, "gap closing");
        char at[160];
        if (generic && !where[0])
            snprintf(at, sizeof at, "%d generic k point%s", generic, generic > 1 ? "s" : "");
        else if (generic)
            snprintf(at, sizeof at, "%s and %d generic k point%s", where, generic, generic > 1 ? "s" : "");
        else
            snprintf(at, sizeof at, "%s", where);
        snprintf(c->text, sizeof c->text, "%s at %s, %s = %.6g%s", c->kind, at, param, c->x, sides);
    } else {
        const pp_interval *g = NULL;
        for (int i = 0; i < r->ninterval; i++)
            if (r->intervals[i].gapless && fabs(r->intervals[i].x_lo - c->x_lo) < 1e-12) g = &r->intervals[i];
        res_class cls = g ? g->diag.cls : RES_UNDETERMINED;
        if (cls == RES_WEYL)
            snprintf(c->kind, sizeof c->kind, "Weyl phase");
        else if (cls == RES_NODAL_LINE)
            snprintf(c->kind, sizeof c->kind, "nodal line");
        else
            snprintf(c->kind, sizeof c->kind, "metal");
        snprintf(c->text, sizeof c->text, "%s from %s = %.6g to %.6g%s", c->kind, param, c->x_lo, c->x_hi,
                 sides);
    }
}

/* ---------------------------------------------------------------- node tracks */

static double kdiff(double a, double b)
{
    double d = a - b;
    return d - round(d);
}

static int track_push(pp_track *t, double x, const double k[3])
{
    double *nx = realloc(t->x, (size_t)(t->npts + 1) * sizeof *nx);
    if (!nx) return -1;
    t->x = nx;
    double(*nk)[3] = realloc(t->k, (size_t)(t->npts + 1) * sizeof *nk);
    if (!nk) return -1;
    t->k = nk;
    t->x[t->npts] = x;
    for (int i = 0; i < 3; i++)
        t->k[t->npts][i] = wrap01(k[i]);
    t->npts++;
    return 0;
}

static int add_event(pp_result *r, int *cap, int kind, double x, const double k[3], int a, int b, int iv)
{
    if (grow((void **)&r->events, cap, r->nevent + 1, sizeof *r->events) != 0) return -1;
    pp_event *e = &r->events[r->nevent++];
    e->kind = kind;
    e->x = x;
    for (int i = 0; i < 3; i++)
        e->k[i] = k ? wrap01(k[i]) : 0;
    e->a = a;
    e->b = b;
    e->interval = iv;
    return 0;
}

/* Pairs tracks in ids[0..n) by nearest partner of opposite chirality, at their first (first = 1) or
 * last point; records events of the given kind. */
static int pair_events(pp_result *r, int *ecap, const int *ids, int n, int first, int kind, double x, int iv)
{
    int *used = calloc((size_t)n + 1, sizeof *used);
    if (!used) return -1;
    for (int i = 0; i < n; i++) {
        if (used[i]) continue;
        pp_track *ti = &r->tracks[ids[i]];
        const double *ki = first ? ti->k[0] : ti->k[ti->npts - 1];
        int best = -1;
        double bd = INFINITY;
        for (int j = 0; j < n; j++) {
            if (j == i || used[j]) continue;
            pp_track *tj = &r->tracks[ids[j]];
            if (tj->chirality != -ti->chirality) continue;
            const double *kj = first ? tj->k[0] : tj->k[tj->npts - 1];
            double d = bp_kdist(3, ki, kj);
            if (d < bd) {
                bd = d;
                best = j;
            }
        }
        used[i] = 1;
        double k[3];
        int other = -1;
        if (best >= 0) {
            used[best] = 1;
            other = ids[best];
            pp_track *tj = &r->tracks[other];
            const double *kj = first ? tj->k[0] : tj->k[tj->npts - 1];
            for (int c = 0; c < 3; c++)
                k[c] = ki[c] + 0.5 * kdiff(kj[c], ki[c]);
            if (first) {
                ti->born_with = other;
                tj->born_with = ids[i];
            } else {
                ti->died_with = other;
                tj->died_with = ids[i];
            }
        } else {
            memcpy(k, ki, sizeof k);
        }
        if (add_event(r, ecap, kind, x, k, ids[i], other, iv) != 0) {
            free(used);
            return -1;
        }
        if (best < 0) {
            r->confidence *= 0.7;
            add_note(r, "a node at %s = %.4g has no partner of opposite chirality", r->param, x);
        }
    }
    free(used);
    return 0;
}

static int find_nodes(const tb_model *m, bp_eval *bp, int mesh, nodes_result *nr, bs_err *err)
{
    nodes_opts no;
    nodes_opts_init(&no);
    no.mesh = mesh;
    return nodes_find_eval(m, bp, &no, nr, err);
}

static int run_tracks(const pp_source *s, const pp_opts *o, pp_result *r, int iv, int *tcap, int *ecap,
                      bs_err *err)
{
    const pp_interval *in = &r->intervals[iv];
    int nsteps = o->track_steps;
    double w = in->x_hi - in->x_lo, h = w / nsteps;
    int tr = in->diag.time_reversal;
    int first_track = r->ntrack;
    int *alive = NULL, nalive = 0, *born_step = NULL, *died_step = NULL;
    int rc = 0;
    int base_mesh = o->gap_mesh;
    for (int step = 0; step < nsteps && rc == 0; step++) {
        double x = in->x_lo + (step + 0.5) * h;
        tb_model *m = NULL;
        hk_engine *hk = NULL;
        bp_eval *bp = NULL;
        nodes_result nr;
        nodes_result_init(&nr);
        int *claimed = NULL;
        rc = pp_source_model(s, x, &m, err);
        if (rc == 0) rc = hk_create(m, 64, &hk, err);
        if (rc == 0) rc = bp_create(m, hk, 0, &bp, err);
        if (rc == 0) rc = find_nodes(m, bp, base_mesh, &nr, err);
        /* Net chirality must vanish (Nucl. Phys. B 185, 20 (1981)): otherwise refine the k search. */
        if (rc == 0 && (nr.net_chirality != 0 || nr.chirality_status != RES_DONE) && nr.nnodes > 0) {
            rc = find_nodes(m, bp, 2 * base_mesh, &nr, err);
            if (rc == 0 && (nr.net_chirality != 0 || nr.chirality_status != RES_DONE)) {
                if (add_event(r, ecap, PP_EV_NET, x, NULL, -1, -1, iv) != 0) rc = BS_ENOMEM;
                r->confidence *= 0.6;
            }
        }
        int nweyl = 0;
        for (int i = 0; rc == 0 && i < nr.nnodes; i++)
            nweyl += nr.nodes[i].chirality != 0;
        if (rc == 0 && tr && nweyl % 4 != 0) {
            if (add_event(r, ecap, PP_EV_COUNT, x, NULL, -1, -1, iv) != 0) rc = BS_ENOMEM;
            r->confidence *= 0.7;
        }
        if (rc == 0) claimed = calloc((size_t)nr.nnodes + 1, sizeof *claimed);
        if (rc == 0 && !claimed) rc = bs_fail(err, BS_ENOMEM, "out of memory for node tracks");
        /* continuation: each live track from its last position (linear prediction when it has two),
         * re-minimised on the new model and matched to a node of the global search; a track the
         * minimiser loses (nodes move fast near a creation or annihilation) is then matched to the
         * nearest unclaimed node of its chirality within a few of its last steps */
        int *match = rc == 0 ? malloc(((size_t)nalive + 1) * sizeof *match) : NULL;
        if (rc == 0 && !match) rc = bs_fail(err, BS_ENOMEM, "out of memory for node tracks");
        for (int pass = 0; pass < 2 && rc == 0; pass++)
            for (int a = 0; rc == 0 && a < nalive; a++) {
                pp_track *t = &r->tracks[alive[a]];
                double kp[3], kmin[3], fmin, move = 0;
                for (int c = 0; c < 3; c++) {
                    kp[c] = t->k[t->npts - 1][c];
                    if (t->npts >= 2) {
                        double dk = kdiff(t->k[t->npts - 1][c], t->k[t->npts - 2][c]);
                        kp[c] += dk;
                        move += dk * dk;
                    }
                }
                if (pass == 0) {
                    match[a] = -1;
                    rc = bp_minimise(bp, BP_GAP, kp, 0.02, 1e-7, kmin, &fmin, NULL, NULL, err);
                    if (rc != 0 || fmin >= BS_GAP_CLOSED_EV) continue;
                } else {
                    if (match[a] >= 0) continue;
                    memcpy(kmin, kp, sizeof kmin);
                }
                double bd = pass == 0 ? 2e-3 : fmax(0.05, 3 * sqrt(move));
                for (int i = 0; i < nr.nnodes; i++) {
                    if (claimed[i] || nr.nodes[i].chirality != t->chirality) continue;
                    double d = bp_kdist(3, kmin, nr.nodes[i].k);
                    if (d < bd) {
                        bd = d;
                        match[a] = i;
                    }
                }
                if (match[a] >= 0) claimed[match[a]] = 1;
            }
        int nnew_alive = 0;
        for (int a = 0; rc == 0 && a < nalive; a++) {
            pp_track *t = &r->tracks[alive[a]];
            if (match[a] < 0) {
                died_step[alive[a] - first_track] = step;
                continue;
            }
            const double *kn = nr.nodes[match[a]].k, *prev = t->k[t->npts - 1];
            /* the boundary of the Gamma-centred reduced cell, k_i = 1/2 */
            for (int c = 0; c < 3; c++) {
                double cn = kn[c] - round(kn[c]), cp = prev[c] - round(prev[c]);
                if (fabs(cn - cp) > 0.5) {
                    t->crossings++;
                    if (add_event(r, ecap, PP_EV_BOUNDARY, x - 0.5 * h, kn, alive[a], -1, iv) != 0)
                        rc = BS_ENOMEM;
                    break;
                }
            }
            if (rc == 0 && track_push(t, x, kn) != 0) rc = BS_ENOMEM;
            alive[nnew_alive++] = alive[a];
        }
        free(match);
        nalive = nnew_alive;
        /* nodes no track reached: new tracks */
        for (int i = 0; rc == 0 && i < nr.nnodes; i++) {
            if (claimed[i] || nr.nodes[i].chirality == 0) continue;
            if (grow((void **)&r->tracks, tcap, r->ntrack + 1, sizeof *r->tracks) != 0) {
                rc = BS_ENOMEM;
                break;
            }
            int id = r->ntrack++;
            pp_track *t = &r->tracks[id];
            memset(t, 0, sizeof *t);
            t->chirality = nr.nodes[i].chirality;
            t->born_with = t->died_with = -1;
            if (track_push(t, x, nr.nodes[i].k) != 0) {
                rc = BS_ENOMEM;
                break;
            }
            int n = id - first_track + 1;
            int *na = realloc(alive, (size_t)n * sizeof *na),
                *nb = realloc(born_step, (size_t)n * sizeof *nb);
            if (na) alive = na;
            if (nb) born_step = nb;
            int *nd = realloc(died_step, (size_t)n * sizeof *nd);
            if (nd) died_step = nd;
            if (!na || !nb || !nd) {
                rc = BS_ENOMEM;
                break;
            }
            born_step[n - 1] = step;
            died_step[n - 1] = -1;
            alive[nalive++] = id;
        }
        free(claimed);
        nodes_result_clear(&nr);
        bp_free(bp);
        hk_free(hk);
        tb_model_free(m);
    }
    if (rc == BS_ENOMEM) bs_fail(err, BS_ENOMEM, "out of memory for node tracks");
    /* births and deaths, grouped by step and paired by opposite chirality */
    int ntr = r->ntrack - first_track;
    int *ids = ntr > 0 ? malloc((size_t)ntr * sizeof *ids) : NULL;
    if (rc == 0 && ntr > 0 && !ids) rc = bs_fail(err, BS_ENOMEM, "out of memory for node tracks");
    for (int step = 0; rc == 0 && step < nsteps; step++) {
        int n = 0;
        for (int i = 0; i < ntr; i++)
            if (born_step[i] == step) ids[n++] = first_track + i;
        double x = step == 0 ? in->x_lo : in->x_lo + step * h;
        /* nodes present where the path starts were not created on it */
        int at_start = step == 0 && in->x_lo <= r->x_lo;
        if (n > 0 && !at_start && pair_events(r, ecap, ids, n, 1, PP_EV_CREATED, x, iv) != 0) rc = BS_ENOMEM;
        n = 0;
        for (int i = 0; i < ntr; i++) {
            int d = died_step[i] < 0 ? nsteps : died_step[i];
            if (d == step + 1) ids[n++] = first_track + i;
        }
        x = step == nsteps - 1 ? in->x_hi : in->x_lo + (step + 1) * h;
        int at_end = step == nsteps - 1 && in->x_hi >= r->x_hi;
        if (rc == 0 && n > 0 && !at_end && pair_events(r, ecap, ids, n, 0, PP_EV_ANNIHILATED, x, iv) != 0)
            rc = BS_ENOMEM;
    }
    if (rc == BS_ENOMEM) bs_fail(err, BS_ENOMEM, "out of memory for node events");
    free(ids);
    free(alive);
    free(born_step);
    free(died_step);
    return rc;
}

static int cmp_event(const void *a, const void *b)
{
    const pp_event *x = a, *y = b;
    if (x->x != y->x) return (x->x > y->x) - (x->x < y->x);
    return (x->kind > y->kind) - (x->kind < y->kind);
}

/* ---------------------------------------------------------------- the path */

static int diagnose(const pp_source *s, const pp_opts *o, pp_interval *iv, pp_result *r, bs_err *err)
{
    tb_model *m = NULL;
    res_init(&iv->diag);
    int rc = pp_source_model(s, iv->x_rep, &m, err);
    if (rc == 0) {
        double k[3];
        rc = pp_gap(m, o->gap_mesh, &iv->gap_ev, k, err);
    }
    if (rc == 0) {
        bs_err e2;
        bs_err_clear(&e2);
        iv->diag_rc = diag_run(m, &o->diag, &iv->diag, &e2);
        r->diag_runs++;
        if (iv->diag_rc == BS_ENOMEM)
            rc = bs_fail(err, BS_ENOMEM, "%s", e2.msg);
        else if (iv->diag_rc != 0)
            add_note(r, "diagnosis at %s = %.6g failed: %s", r->param, iv->x_rep, e2.msg);
    }
    tb_model_free(m);
    return rc;
}

int pp_run(const pp_source *s, const char *param, double x_lo, double x_hi, const pp_opts *opts, pp_result *r,
           bs_err *err)
{
    double t0 = bs_now();
    pp_opts o;
    if (opts)
        o = *opts;
    else
        pp_opts_init(&o);
    if (o.nsamples <= 0) o.nsamples = 41;
    if (o.nsamples < 3) o.nsamples = 3;
    if (o.tol_x <= 0) o.tol_x = 1e-5;
    if (o.closed_ev <= 0) o.closed_ev = 1e-6;
    if (o.track_steps <= 0) o.track_steps = 24;
    if (!(x_hi > x_lo)) return bs_fail(err, BS_EINVAL, "path range %g..%g is empty", x_lo, x_hi);
    snprintf(r->param, sizeof r->param, "%s", param);
    r->tol_x = o.tol_x;
    r->x_lo = x_lo;
    r->x_hi = x_hi;
    gapfn f = {s, &o, 0};
    int n = o.nsamples, rc = 0, ccap = 0, tcap = 0, ecap = 0;
    r->nsamples = n;
    r->xs = malloc((size_t)n * sizeof *r->xs);
    r->gaps = malloc((size_t)n * sizeof *r->gaps);
    double(*ks)[3] = malloc((size_t)n * sizeof *ks);
    if (!r->xs || !r->gaps || !ks) {
        free(ks);
        return bs_fail(err, BS_ENOMEM, "out of memory for path samples");
    }
    {
        tb_model *m0 = NULL;
        rc = pp_source_model(s, x_lo, &m0, err);
        if (rc == 0) r->dim = m0->dim;
        tb_model_free(m0);
    }
    if (o.gap_mesh <= 0) o.gap_mesh = diag_default_mesh(r->dim);
    for (int j = 0; j < n && rc == 0; j++) {
        r->xs[j] = x_lo + (x_hi - x_lo) * j / (n - 1);
        rc = gap_at(&f, r->xs[j], &r->gaps[j], ks[j], err);
    }
    /* runs of closed samples */
    for (int j = 0; j < n && rc == 0; j++) {
        if (r->gaps[j] >= o.closed_ev || (j > 0 && r->gaps[j - 1] < o.closed_ev)) continue;
        int e = j;
        while (e + 1 < n && r->gaps[e + 1] < o.closed_ev)
            e++;
        double lo = x_lo, hi = x_hi;
        if (j > 0) rc = bisect_edge(&f, r->xs[j - 1], r->xs[j], &lo, err);
        if (rc == 0 && e < n - 1) rc = bisect_edge(&f, r->xs[e + 1], r->xs[e], &hi, err);
        int best = j;
        for (int i = j; i <= e; i++)
            if (r->gaps[i] < r->gaps[best]) best = i;
        if (rc == 0) rc = add_region(r, &ccap, lo, hi, r->xs[best], r->gaps[best], err);
    }
    /* isolated minima of open samples: golden section */
    for (int j = 0; j < n && rc == 0; j++) {
        double g = r->gaps[j];
        if (g < o.closed_ev) continue;
        if ((j > 0 && r->gaps[j - 1] < o.closed_ev) || (j < n - 1 && r->gaps[j + 1] < o.closed_ev)) continue;
        if ((j > 0 && g > r->gaps[j - 1]) || (j < n - 1 && g > r->gaps[j + 1])) continue;
        /* plateaus: take the first sample of equal neighbours only */
        if (j > 0 && g == r->gaps[j - 1]) continue;
        double a = j > 0 ? r->xs[j - 1] : r->xs[j], b = j < n - 1 ? r->xs[j + 1] : r->xs[j];
        double xm, gm;
        rc = golden_min(&f, a, b, &xm, &gm, err);
        if (rc != 0) break;
        if (gm >= o.closed_ev) {
            double width = r->gaps[j] > 0 ? r->gaps[j] : 1;
            if (gm < 0.05 * fmax(width, r->gaps[0]) && gm < 0.05 && j > 0 && j < n - 1)
                add_note(r, "the gap has a minimum of %.3g eV at %s = %.6g without closing", gm, param, xm);
            continue;
        }
        double lo = a, hi = b;
        if (xm - a > o.tol_x)
            rc = bisect_edge(&f, a, xm, &lo, err);
        else
            lo = a;
        if (rc == 0 && b - xm > o.tol_x)
            rc = bisect_edge(&f, b, xm, &hi, err);
        else
            hi = b;
        if (rc == 0) rc = add_region(r, &ccap, lo, hi, xm, gm, err);
    }
    free(ks);
    if (rc != 0) goto done;
    if (r->nclosing > 1) qsort(r->closings, (size_t)r->nclosing, sizeof *r->closings, cmp_closing);
    /* merge overlapping regions */
    {
        int w = 0;
        for (int i = 0; i < r->nclosing; i++) {
            if (w > 0 && r->closings[i].x_lo <= r->closings[w - 1].x_hi + o.tol_x) {
                pp_closing *p = &r->closings[w - 1];
                if (r->closings[i].x_hi > p->x_hi) p->x_hi = r->closings[i].x_hi;
                if (r->closings[i].gap_ev < p->gap_ev) {
                    p->gap_ev = r->closings[i].gap_ev;
                    p->x = r->closings[i].x;
                }
                continue;
            }
            r->closings[w++] = r->closings[i];
        }
        r->nclosing = w;
    }
    /* point or finite interval: a linear closing g ~ v |x - x_c| is below closed_ev over
     * 2 closed_ev / v; v from the nearest open samples on either side */
    for (int i = 0; i < r->nclosing; i++) {
        pp_closing *c = &r->closings[i];
        double vmin = INFINITY;
        for (int j = 0; j < n; j++) {
            if (r->gaps[j] < o.closed_ev) continue;
            double d = r->xs[j] < c->x_lo ? c->x_lo - r->xs[j] : r->xs[j] > c->x_hi ? r->xs[j] - c->x_hi : 0;
            if (d <= 0) continue;
            double v = r->gaps[j] / d;
            if (v < vmin) vmin = v;
        }
        double allowed = fmax(4 * o.tol_x, isfinite(vmin) ? 8 * o.closed_ev / vmin : 0);
        c->point = c->x_hi - c->x_lo <= allowed && c->x_lo > x_lo && c->x_hi < x_hi;
        if (c->point) {
            /* the critical value itself: the smallest gap inside the (tiny) region */
            if (c->x < c->x_lo || c->x > c->x_hi) c->x = 0.5 * (c->x_lo + c->x_hi);
        } else {
            c->x = 0.5 * (c->x_lo + c->x_hi);
        }
    }
    /* intervals */
    r->intervals = calloc((size_t)(2 * r->nclosing + 1), sizeof *r->intervals);
    if (!r->intervals) {
        rc = bs_fail(err, BS_ENOMEM, "out of memory for intervals");
        goto done;
    }
    {
        double cur = x_lo;
        for (int i = 0; i < r->nclosing; i++) {
            pp_closing *c = &r->closings[i];
            double start = c->point ? c->x : c->x_lo;
            if (start > cur + o.tol_x) {
                pp_interval *iv = &r->intervals[r->ninterval++];
                iv->x_lo = cur;
                iv->x_hi = start;
            }
            if (!c->point) {
                pp_interval *iv = &r->intervals[r->ninterval++];
                iv->x_lo = c->x_lo;
                iv->x_hi = c->x_hi;
                iv->gapless = 1;
            }
            cur = c->point ? c->x : c->x_hi;
        }
        if (cur < x_hi - o.tol_x) {
            pp_interval *iv = &r->intervals[r->ninterval++];
            iv->x_lo = cur;
            iv->x_hi = x_hi;
        }
        /* the gapped intervals on either side of each closing */
        for (int i = 0; i < r->nclosing; i++) {
            pp_closing *c = &r->closings[i];
            double left = c->point ? c->x : c->x_lo, right = c->point ? c->x : c->x_hi;
            for (int j = 0; j < r->ninterval; j++) {
                if (r->intervals[j].gapless) continue;
                if (r->intervals[j].x_hi == left) c->before = j;
                if (r->intervals[j].x_lo == right) c->after = j;
            }
        }
    }
    for (int i = 0; i < r->ninterval; i++)
        res_init(&r->intervals[i].diag);
    for (int i = 0; i < r->ninterval && rc == 0; i++) {
        pp_interval *iv = &r->intervals[i];
        iv->x_rep = 0.5 * (iv->x_lo + iv->x_hi);
        rc = diagnose(s, &o, iv, r, err);
    }
    /* where in k each closing happens, then its description */
    for (int i = 0; i < r->nclosing && rc == 0; i++) {
        pp_closing *c = &r->closings[i];
        double kh[3] = {0, 0, 0}, xk = c->point ? c->x : fmin(c->x_lo + 2 * o.tol_x, c->x);
        if (!c->point && c->x_lo <= x_lo) xk = c->x;
        double g;
        rc = gap_at(&f, xk, &g, kh, err);
        if (rc == 0) rc = closing_kpoints(s, &o, xk, g, kh, c, err);
        if (rc == 0) {
            double xp = (c->point ? c->x : c->x_lo) - 20 * o.tol_x;
            if (xp <= x_lo) xp = (c->point ? c->x : c->x_hi) + 20 * o.tol_x;
            /* The prediction counts conditions for a 3D two-band crossing of non-degenerate bands:
             * not for 2D, and not where inversion with time reversal makes every band a Kramers
             * pair (the bands at the filling are then degenerate with their partners). */
            const pp_interval *side = c->before >= 0  ? &r->intervals[c->before]
                                      : c->after >= 0 ? &r->intervals[c->after]
                                                      : NULL;
            int kramers_everywhere = side && side->diag.inversion && side->diag.time_reversal;
            if (xp > x_lo && xp < x_hi && r->dim == 3 && !kramers_everywhere) predict(s, xp, c);
        }
        if (rc == 0) describe(r, c, param);
        if (rc == 0) compare_prediction(r, c);
    }
    /* Weyl-node tracks through the gapless intervals of a 3D path */
    for (int i = 0; i < r->ninterval && rc == 0 && !o.no_tracks; i++) {
        pp_interval *iv = &r->intervals[i];
        if (!iv->gapless || r->dim != 3) continue;
        int weylish = iv->diag.cls == RES_WEYL || iv->diag.nnodes > 0;
        if (!weylish) continue;
        rc = run_tracks(s, &o, r, i, &tcap, &ecap, err);
    }
    if (rc == 0 && r->nevent > 1) qsort(r->events, (size_t)r->nevent, sizeof *r->events, cmp_event);
    if (rc == 0 && !s->builtin)
        add_note(r, "between members H(R) is interpolated linearly (virtual-crystal idea); for a pressure or "
                    "strain series this is a model of the path, not a calculation at each point");
done:
    r->gap_evals = f.nevals;
    r->seconds = bs_now() - t0;
    return rc;
}

static const char *const PP_CLASSES[PP_NCLASS] = {"undetermined",
                                                  "trivial insulator",
                                                  "strong topological insulator",
                                                  "weak topological insulator",
                                                  "2D topological insulator",
                                                  "Chern insulator",
                                                  "Weyl semimetal",
                                                  "nodal-line semimetal",
                                                  "metal",
                                                  "critical point",
                                                  "topological crystalline insulator"};

const char *pp_class_name(int i)
{
    return i >= 0 && i < PP_NCLASS ? PP_CLASSES[i] : "?";
}

int pp_class_index(const char *cls)
{
    for (int i = 0; i < PP_NCLASS; i++)
        if (strcmp(cls, PP_CLASSES[i]) == 0) return i;
    return PP_CLASS_UNDETERMINED;
}

int pp_map_row(const pp_source *s, const char *param, double x_lo, double x_hi, int nx, const pp_opts *o,
               int *cls, double *gap, pp_result *r, bs_err *err)
{
    if (nx < 3) return bs_fail(err, BS_EINVAL, "phase map: at least 3 points per row, got %d", nx);
    pp_opts oo;
    if (o)
        oo = *o;
    else
        pp_opts_init(&oo);
    oo.nsamples = nx;
    int rc = pp_run(s, param, x_lo, x_hi, &oo, r, err);
    if (rc != 0) return rc;
    for (int i = 0; i < nx; i++) {
        double x = r->xs[i];
        gap[i] = r->gaps[i];
        cls[i] = PP_CLASS_UNDETERMINED;
        for (int c = 0; c < r->nclosing; c++)
            if (r->closings[c].point && fabs(x - r->closings[c].x) <= r->tol_x) cls[i] = PP_CLASS_CRITICAL;
        if (cls[i] == PP_CLASS_CRITICAL) continue;
        for (int v = 0; v < r->ninterval; v++) {
            const pp_interval *iv = &r->intervals[v];
            if (x >= iv->x_lo - 1e-12 && x <= iv->x_hi + 1e-12) {
                cls[i] = pp_class_index(res_class_name(iv->diag.cls));
                if (!iv->gapless) break; /* an edge shared with a gapless interval goes to the gapped side */
            }
        }
    }
    return 0;
}
