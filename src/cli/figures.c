/* The figures of bandsieve from plain data, through the plot module. */
#include "figures.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/plot.h"

static void add_array(cJSON *o, const char *key, const double *v, int n)
{
    if (o) cJSON_AddItemToObject(o, key, cJSON_CreateDoubleArray(v, n));
}

/* Path ticks of a band path: one per path point, a jump joining two labels at one x. */
static int path_ticks(const band_path *bp, double *xt, char (*lab)[2 * KPATH_LABEL_LEN + 2],
                      const char **labp)
{
    int n = 0;
    for (int v = 0; v < bp->path.npoint; v++) {
        if (bp->path.point[v].jump && n > 0) {
            size_t len = strlen(lab[n - 1]);
            snprintf(lab[n - 1] + len, sizeof lab[0] - len, "|%s", bp->path.point[v].label);
            continue;
        }
        xt[n] = bp->s.vertex_x[v];
        snprintf(lab[n], sizeof lab[0], "%s", bp->path.point[v].label);
        labp[n] = lab[n];
        n++;
    }
    return n;
}

int fig_bands(const char *path, const char *title, const band_path *bp, cJSON *data, bs_err *err)
{
    int nk = bp->s.nk, nb = bp->norb;
    double lo = INFINITY, hi = -INFINITY;
    for (size_t i = 0; i < (size_t)nk * nb; i++)
        lo = fmin(lo, bp->E[i]), hi = fmax(hi, bp->E[i]);
    double pad = 0.05 * (hi - lo) + 1e-3;
    double xt[KPATH_MAX_POINTS];
    char lab[KPATH_MAX_POINTS][2 * KPATH_LABEL_LEN + 2];
    const char *labp[KPATH_MAX_POINTS];
    int ntick = path_ticks(bp, xt, lab, labp);
    double *y = malloc((size_t)nk * sizeof *y), *c = malloc((size_t)nk * sizeof *c);
    if (!y || !c) {
        free(y), free(c);
        return bs_fail(err, BS_ENOMEM, "out of memory for the band figure");
    }
    plot_axes ax = {title,
                    "wave vector along the path (1/A)",
                    "energy (eV)",
                    bp->s.x[0],
                    bp->s.x[nk - 1] > bp->s.x[0] ? bp->s.x[nk - 1] : bp->s.x[0] + 1,
                    lo - pad,
                    hi + pad,
                    ntick,
                    xt,
                    labp,
                    bp->w != NULL};
    plot_fig *f = NULL;
    int rc = plot_open(path, 900, 650, 1, 1, &f, err);
    if (rc == 0) rc = plot_panel(f, &ax, err);
    if (rc == 0 && bp->gapped) plot_yspan(f, bp->vbm_ev, bp->cbm_ev, "gap");
    cJSON *bands = data ? cJSON_AddArrayToObject(data, "bands") : NULL;
    int cmap = bp->weight_kind == BP_WEIGHT_SPIN ? PLOT_DIVERGING : PLOT_SEQUENTIAL;
    double cmin = bp->weight_kind == BP_WEIGHT_SPIN ? -1 : 0;
    for (int b = 0; rc == 0 && b < nb; b++) {
        for (int i = 0; i < nk; i++)
            y[i] = bp->E[(size_t)i * nb + b];
        if (bp->w) {
            for (int i = 0; i < nk; i++)
                c[i] = bp->w[(size_t)i * nb + b];
            plot_curve_mapped(f, nk, bp->s.x, y, c, cmap, cmin, 1, 2.0);
        } else {
            plot_curve(f, nk, bp->s.x, y, b < bp->nocc ? PLOT_INK : PLOT_BLUE, 1.6, 0);
        }
        if (bands) cJSON_AddItemToArray(bands, cJSON_CreateDoubleArray(y, nk));
    }
    if (rc == 0 && bp->has_fermi) plot_hline(f, bp->fermi_ev, PLOT_ORANGE, 1, "Fermi level");
    if (rc == 0 && !bp->w) {
        plot_legend(f, 0, PLOT_INK, "occupied");
        plot_legend(f, 1, PLOT_BLUE, "empty");
    }
    if (rc == 0 && bp->w)
        plot_colourbar(f, cmap, cmin, 1,
                       bp->weight_kind == BP_WEIGHT_SPIN ? "spin <s#dz#u> (units of hbar/2)"
                                                         : "orbital weight");
    if (data) {
        add_array(data, "x", bp->s.x, nk);
        add_array(data, "tick_x", xt, ntick);
        cJSON_AddItemToObject(data, "tick_labels", cJSON_CreateStringArray(labp, ntick));
        cJSON_AddNumberToObject(data, "occupied_bands", bp->nocc);
        if (bp->has_fermi) cJSON_AddNumberToObject(data, "fermi_eV", bp->fermi_ev);
    }
    int rc2 = plot_close(f, err);
    free(y);
    free(c);
    return rc ? rc : rc2;
}

double fig_largest_gap_mid(int n, const double *wcc)
{
    if (n < 1) return 0.5;
    double best = -1, mid = 0.5;
    for (int i = 0; i < n; i++) {
        double a = wcc[i], b = i + 1 < n ? wcc[i + 1] : wcc[0] + 1;
        if (b - a > best) best = b - a, mid = fmod(0.5 * (a + b), 1.0);
    }
    return mid;
}

static const char *plane_name(int p, int dim)
{
    static const char *const names[6] = {"k1 = 0", "k1 = 1/2", "k2 = 0", "k2 = 1/2", "k3 = 0", "k3 = 1/2"};
    return dim == 2 ? "2D zone" : names[p < 0 || p > 5 ? 0 : p];
}

int fig_flows(const char *path, const char *title, int nflow, const res_flow *flows, cJSON *data, bs_err *err)
{
    if (nflow < 1)
        return bs_fail(err, BS_EINVAL, "no Wannier-centre flows to draw (run inspect with --flows)");
    int dim = nflow == 1 && flows[0].plane == 4 ? 2 : 3;
    int nx = nflow == 1 ? 1 : 3, ny = (nflow + nx - 1) / nx;
    plot_fig *f = NULL;
    int rc = plot_open(path, nx == 1 ? 800 : 1350, ny == 1 ? 600 : 900, nx, ny, &f, err);
    cJSON *planes = data ? cJSON_AddArrayToObject(data, "planes") : NULL;
    for (int p = 0; rc == 0 && p < nflow; p++) {
        const res_flow *fl = &flows[p];
        char ttl[160], xl[64], yl[64];
        int a = (fl->plane / 2 + 1) % 3, b = (fl->plane / 2 + 2) % 3;
        if (dim == 2) a = 0, b = 1;
        snprintf(ttl, sizeof ttl, "%s%s%s", nflow == 1 && title ? title : "", nflow == 1 && title ? ": " : "",
                 plane_name(fl->plane, dim));
        snprintf(xl, sizeof xl, "pumping parameter k%d (units of b%d)", b + 1, b + 1);
        snprintf(yl, sizeof yl, "Wannier centre along a%d (units of a%d)", a + 1, a + 1);
        plot_axes ax = {ttl, xl, yl, 0, 0.5, 0, 1, 0, NULL, NULL, 0};
        rc = plot_panel(f, &ax, err);
        double *gx = malloc((size_t)fl->nstring * sizeof *gx), *gy = malloc((size_t)fl->nstring * sizeof *gy);
        double *px = malloc((size_t)fl->nband * sizeof *px);
        if (!gx || !gy || !px) rc = bs_fail(err, BS_ENOMEM, "out of memory for the flow figure");
        for (int s = 0; rc == 0 && s < fl->nstring; s++) {
            for (int j = 0; j < fl->nband; j++)
                px[j] = fl->kpar[s];
            plot_points(f, fl->nband, px, fl->wcc + (size_t)s * fl->nband, PLOT_INK, 0.007);
            gx[s] = fl->kpar[s];
            gy[s] = fig_largest_gap_mid(fl->nband, fl->wcc + (size_t)s * fl->nband);
        }
        /* The largest-gap line, drawn as steps between strings so a jump across the zone edge
         * shows as a jump, not as a line through every centre. */
        for (int s = 0; rc == 0 && s + 1 < fl->nstring; s++) {
            double xs[2] = {gx[s], gx[s + 1]}, ys[2] = {gy[s], gy[s]};
            plot_curve(f, 2, xs, ys, PLOT_ORANGE, 2.0, 0);
        }
        if (rc == 0) plot_legend(f, 0, PLOT_ORANGE, "largest-gap line");
        if (planes && rc == 0) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddNumberToObject(o, "plane", fl->plane);
            add_array(o, "kpar", fl->kpar, fl->nstring);
            add_array(o, "gap_line", gy, fl->nstring);
            cJSON *w = cJSON_AddArrayToObject(o, "wcc");
            for (int s = 0; s < fl->nstring; s++)
                cJSON_AddItemToArray(w, cJSON_CreateDoubleArray(fl->wcc + (size_t)s * fl->nband, fl->nband));
            cJSON_AddItemToArray(planes, o);
        }
        free(gx), free(gy), free(px);
    }
    int rc2 = plot_close(f, err);
    return rc ? rc : rc2;
}

int fig_berry(const char *path, const char *title, const berry_map *bm, cJSON *data, bs_err *err)
{
    int n = bm->n;
    double zmax = 0;
    for (int i = 0; i < n * n; i++)
        zmax = fmax(zmax, fabs(bm->omega[i]));
    if (zmax == 0) zmax = 1;
    char xl[48], yl[48], ttl[200];
    snprintf(xl, sizeof xl, "k%d (units of b%d)", bm->axis_a + 1, bm->axis_a + 1);
    snprintf(yl, sizeof yl, "k%d (units of b%d)", bm->axis_b + 1, bm->axis_b + 1);
    snprintf(ttl, sizeof ttl, "%s: Berry curvature, flux/2#gp = %.3f", title ? title : "", bm->flux);
    plot_axes ax = {ttl, xl, yl, 0, 1, 0, 1, 0, NULL, NULL, 1};
    plot_fig *f = NULL;
    int rc = plot_open(path, 800, 650, 1, 1, &f, err);
    if (rc == 0) rc = plot_panel(f, &ax, err);
    if (rc == 0) {
        plot_map(f, n, n, bm->omega, 0, 1, 0, 1, PLOT_DIVERGING, -zmax, zmax);
        plot_colourbar(f, PLOT_DIVERGING, -zmax, zmax, "Berry curvature #gW (A#u2#d)");
    }
    if (data) {
        add_array(data, "omega", bm->omega, n * n);
        cJSON_AddNumberToObject(data, "n", n);
        cJSON_AddNumberToObject(data, "flux", bm->flux);
        cJSON_AddNumberToObject(data, "max_plaquette_rad", bm->max_f);
    }
    int rc2 = plot_close(f, err);
    return rc ? rc : rc2;
}

/* Reduced coordinate in the centred zone [-1/2, 1/2). */
static double centred(double k)
{
    return k - floor(k + 0.5);
}

int fig_nodes(const char *path, const char *title, int n, const double (*k)[3], const int *chirality,
              int proj, cJSON *data, bs_err *err)
{
    int a = (proj + 1) % 3, b = (proj + 2) % 3;
    if (a > b) {
        int t = a;
        a = b;
        b = t;
    }
    double *x = malloc((size_t)(n + 1) * sizeof *x), *y = malloc((size_t)(n + 1) * sizeof *y);
    double *sz = malloc((size_t)(n + 1) * sizeof *sz);
    if (!x || !y || !sz) {
        free(x), free(y), free(sz);
        return bs_fail(err, BS_ENOMEM, "out of memory for the node figure");
    }
    char xl[48], yl[48], ttl[200];
    snprintf(xl, sizeof xl, "k%d (units of b%d)", a + 1, a + 1);
    snprintf(yl, sizeof yl, "k%d (units of b%d)", b + 1, b + 1);
    snprintf(ttl, sizeof ttl, "%s: %d Weyl nodes, projected along k%d", title ? title : "", n, proj + 1);
    plot_axes ax = {ttl, xl, yl, -0.5, 0.5, -0.5, 0.5, 0, NULL, NULL, 0};
    plot_fig *f = NULL;
    int rc = plot_open(path, 750, 700, 1, 1, &f, err);
    if (rc == 0) rc = plot_panel(f, &ax, err);
    int count[3] = {0, 0, 0};
    cJSON *pts = data ? cJSON_AddArrayToObject(data, "nodes") : NULL;
    for (int sign = -1; rc == 0 && sign <= 1; sign++) {
        int m = 0;
        for (int i = 0; i < n; i++) {
            if (chirality[i] != sign) continue;
            x[m] = centred(k[i][a]), y[m] = centred(k[i][b]), sz[m] = 0.035;
            if (pts) {
                cJSON *o = cJSON_CreateObject();
                cJSON_AddNumberToObject(o, "x", x[m]);
                cJSON_AddNumberToObject(o, "y", y[m]);
                cJSON_AddNumberToObject(o, "chirality", sign);
                cJSON_AddItemToArray(pts, o);
            }
            m++;
        }
        count[sign + 1] = m;
        /* +1: orange up triangles, -1: blue down triangles, unresolved: grey circles; the shape
         * carries the sign without colour. Centred on the node: shifted by half a marker. */
        for (int i = 0; i < m; i++)
            y[i] += sign > 0 ? -0.0175 : (sign < 0 ? 0.0175 : 0);
        if (sign == 0)
            plot_points(f, m, x, y, PLOT_GREY, 0.012);
        else
            plot_triangles(f, m, x, y, sz, sign > 0, NULL, 0, 0, 0, sign > 0 ? PLOT_ORANGE : PLOT_BLUE);
    }
    if (rc == 0) {
        char t[64];
        snprintf(t, sizeof t, "chirality +1 (%d)", count[2]);
        plot_legend(f, 0, PLOT_ORANGE, t);
        snprintf(t, sizeof t, "chirality -1 (%d)", count[0]);
        plot_legend(f, 1, PLOT_BLUE, t);
        if (count[1]) {
            snprintf(t, sizeof t, "unresolved (%d)", count[1]);
            plot_legend(f, 2, PLOT_GREY, t);
        }
    }
    int rc2 = plot_close(f, err);
    free(x), free(y), free(sz);
    return rc ? rc : rc2;
}

int fig_slab_bands(const char *path, const char *title, const fig_slab_data *d, cJSON *data, bs_err *err)
{
    size_t tot = (size_t)d->nkp * d->ns;
    double lo = INFINITY, hi = -INFINITY;
    for (size_t i = 0; i < tot; i++)
        lo = fmin(lo, d->E[i]), hi = fmax(hi, d->E[i]);
    double pad = 0.05 * (hi - lo) + 1e-3;
    double *x = malloc(tot * sizeof *x), *st = malloc(tot * sizeof *st), *sb = malloc(tot * sizeof *sb);
    if (!x || !st || !sb) {
        free(x), free(st), free(sb);
        return bs_fail(err, BS_ENOMEM, "out of memory for the slab figure");
    }
    /* Marker size grows with the weight; below 0.2 a state counts as bulk-like and is only a dot. */
    int ntop = 0, nbot = 0;
    for (size_t i = 0; i < tot; i++) {
        x[i] = d->xp[i / d->ns];
        st[i] = d->wt[i] > 0.2 ? 0.006 + 0.014 * d->wt[i] : 0;
        sb[i] = d->wb[i] > 0.2 ? 0.006 + 0.014 * d->wb[i] : 0;
        ntop += st[i] > 0, nbot += sb[i] > 0;
    }
    plot_axes ax = {title,
                    "surface wave vector along the path (1/A)",
                    "energy (eV)",
                    d->xp[0],
                    d->xp[d->nkp - 1] > d->xp[0] ? d->xp[d->nkp - 1] : d->xp[0] + 1,
                    lo - pad,
                    hi + pad,
                    d->ntick,
                    d->xt,
                    d->labels,
                    0};
    plot_fig *f = NULL;
    int rc = plot_open(path, 900, 650, 1, 1, &f, err);
    if (rc == 0) rc = plot_panel(f, &ax, err);
    if (rc == 0) {
        if (d->cbm > d->vbm) plot_yspan(f, d->vbm, d->cbm, "bulk gap");
        plot_points(f, (int)tot, x, d->E, PLOT_GREY, 0.0025);
        plot_triangles(f, (int)tot, x, d->E, st, 1, NULL, 0, 0, 0, PLOT_ORANGE);
        plot_triangles(f, (int)tot, x, d->E, sb, 0, NULL, 0, 0, 0, PLOT_BLUE);
        plot_hline(f, d->fermi, PLOT_INK, 1, "Fermi level");
        plot_legend(f, 0, PLOT_ORANGE, "top surface (up, size = weight)");
        plot_legend(f, 1, PLOT_BLUE, "bottom surface (down, size = weight)");
    }
    if (data) {
        cJSON_AddNumberToObject(data, "states", (double)tot);
        cJSON_AddNumberToObject(data, "top_markers", ntop);
        cJSON_AddNumberToObject(data, "bottom_markers", nbot);
    }
    int rc2 = plot_close(f, err);
    free(x), free(st), free(sb);
    return rc ? rc : rc2;
}

int fig_heatmap(const char *path, const char *title, const char *xlabel, const char *ylabel,
                const char *clabel, int nx, int ny, const double *z, double x0, double x1, double y0,
                double y1, int log_scale, int ntick, const double *xt, const char *const *labels, bs_err *err)
{
    size_t n = (size_t)nx * ny;
    double *v = malloc(n * sizeof *v);
    if (!v) return bs_fail(err, BS_ENOMEM, "out of memory for the map");
    double zmax = -INFINITY, zmin = INFINITY;
    for (size_t i = 0; i < n; i++)
        zmax = fmax(zmax, z[i]), zmin = fmin(zmin, z[i]);
    for (size_t i = 0; i < n; i++)
        v[i] = log_scale ? log10(fmax(z[i], zmax * 1e-6 + 1e-300)) : z[i];
    double lo = log_scale ? log10(zmax * 1e-6 + 1e-300) : zmin, hi = log_scale ? log10(zmax + 1e-300) : zmax;
    if (!(hi > lo)) hi = lo + 1;
    char cl[96];
    snprintf(cl, sizeof cl, log_scale ? "log#d10#u %s" : "%s", clabel);
    plot_axes ax = {title, xlabel, ylabel, x0, x1, y0, y1, ntick, xt, labels, 1};
    plot_fig *f = NULL;
    int rc = plot_open(path, 850, 650, 1, 1, &f, err);
    if (rc == 0) rc = plot_panel(f, &ax, err);
    if (rc == 0) {
        plot_map(f, nx, ny, v, x0, x1, y0, y1, PLOT_SEQUENTIAL, lo, hi);
        plot_colourbar(f, PLOT_SEQUENTIAL, lo, hi, cl);
    }
    int rc2 = plot_close(f, err);
    free(v);
    return rc ? rc : rc2;
}

/* Class colours by name; see figures.h. */
static const struct {
    const char *name;
    double rgb[3];
} CLASS_RGB[] = {
    {"trivial insulator", {0.86, 0.86, 0.84}},
    {"strong topological insulator", {0.12, 0.25, 0.55}},
    {"weak topological insulator", {0.50, 0.66, 0.88}},
    {"2D topological insulator", {0.33, 0.27, 0.62}},
    {"Chern insulator", {0.10, 0.52, 0.50}},
    {"topological crystalline insulator", {0.62, 0.78, 0.80}},
    {"Weyl semimetal", {0.93, 0.58, 0.16}},
    {"nodal-line semimetal", {0.96, 0.82, 0.52}},
    {"metal", {0.55, 0.33, 0.12}},
    {"critical point", {0.0, 0.0, 0.0}},
    {"undetermined", {1.00, 1.00, 1.00}},
};

void fig_class_rgb(const char *cls, double rgb[3])
{
    for (size_t i = 0; i < sizeof CLASS_RGB / sizeof CLASS_RGB[0]; i++)
        if (cls && !strcmp(cls, CLASS_RGB[i].name)) {
            memcpy(rgb, CLASS_RGB[i].rgb, sizeof CLASS_RGB[i].rgb);
            return;
        }
    rgb[0] = rgb[1] = rgb[2] = 1.0;
}

/* Edges of the cells around increasing grid points: midpoints, the ends half a step out (one
 * point: +-0.5). edges has n + 1 entries. */
static void cell_edges(int n, const double *v, double *edges)
{
    if (n == 1) {
        edges[0] = v[0] - 0.5, edges[1] = v[0] + 0.5;
        return;
    }
    for (int i = 1; i < n; i++)
        edges[i] = 0.5 * (v[i - 1] + v[i]);
    edges[0] = v[0] - 0.5 * (v[1] - v[0]);
    edges[n] = v[n - 1] + 0.5 * (v[n - 1] - v[n - 2]);
}

int fig_classmap(const char *path, const char *title, const char *xlabel, const char *ylabel, int nx, int ny,
                 const double *x, const double *y, const int *cls, int ncls, const char *const *names,
                 cJSON *data, bs_err *err)
{
    double *ex = malloc(((size_t)nx + 1) * sizeof *ex), *ey = malloc(((size_t)ny + 1) * sizeof *ey);
    int *used = calloc((size_t)ncls + 1, sizeof *used);
    if (!ex || !ey || !used) {
        free(ex), free(ey), free(used);
        return bs_fail(err, BS_ENOMEM, "out of memory for the map");
    }
    cell_edges(nx, x, ex);
    cell_edges(ny, y, ey);
    plot_axes ax = {title, xlabel, ylabel, ex[0], ex[nx], ey[0], ey[ny], 0, NULL, NULL, 1};
    plot_fig *f = NULL;
    /* Wide enough for the longest class name in the legend margin. */
    int rc = plot_open(path, 1300, 650, 1, 1, &f, err);
    if (rc == 0) rc = plot_panel(f, &ax, err);
    for (int j = 0; rc == 0 && j < ny; j++)
        for (int i = 0; i < nx; i++) {
            int c = cls[(size_t)j * nx + i];
            double rgb[3];
            fig_class_rgb(c >= 0 && c < ncls ? names[c] : NULL, rgb);
            plot_rect_rgb(f, ex[i], ex[i + 1], ey[j], ey[j + 1], rgb);
            if (c >= 0 && c < ncls) used[c] = 1;
        }
    int row = 0;
    for (int c = 0; rc == 0 && c < ncls; c++) {
        if (!used[c]) continue;
        double rgb[3];
        fig_class_rgb(names[c], rgb);
        plot_legend_rgb(f, row++, rgb, names[c]);
    }
    int rc2 = plot_close(f, err);
    if (data) {
        add_array(data, "x", x, nx);
        add_array(data, "y", y, ny);
        cJSON_AddItemToObject(data, "class_names", cJSON_CreateStringArray(names, ncls));
        cJSON_AddItemToObject(data, "class", cJSON_CreateIntArray(cls, nx * ny));
    }
    free(ex), free(ey), free(used);
    return rc ? rc : rc2;
}

static int path_gap_panel(plot_fig *f, const char *title, const pp_result *r, const char *unit, cJSON *data,
                          bs_err *err)
{
    double gmax = 0;
    for (int i = 0; i < r->nsamples; i++)
        if (isfinite(r->gaps[i])) gmax = fmax(gmax, r->gaps[i]);
    char xl[128];
    snprintf(xl, sizeof xl, unit && unit[0] ? "%s (%s)" : "%s", r->param, unit);
    plot_axes ax = {title, xl, "direct gap (eV)", r->x_lo, r->x_hi, 0, gmax > 0 ? 1.08 * gmax : 1, 0, NULL,
                    NULL,  1};
    int rc = plot_panel(f, &ax, err);
    if (rc != 0) return rc;
    int row = 0;
    for (int i = 0; i < r->ninterval; i++) {
        const char *cls = res_class_name(r->intervals[i].diag.cls);
        double rgb[3];
        fig_class_rgb(cls, rgb);
        plot_rect_rgb(f, r->intervals[i].x_lo, r->intervals[i].x_hi, ax.y0, ax.y1, rgb);
        int seen = 0;
        for (int q = 0; q < i; q++)
            seen |= r->intervals[q].diag.cls == r->intervals[i].diag.cls;
        if (!seen) plot_legend_rgb(f, row++, rgb, cls);
    }
    plot_curve(f, r->nsamples, r->xs, r->gaps, PLOT_INK, 2.0, 0);
    for (int i = 0; i < r->nclosing; i++) {
        double xs[2] = {r->closings[i].x, r->closings[i].x}, ys[2] = {ax.y0, ax.y1};
        plot_curve(f, 2, xs, ys, PLOT_GREY, 1.0, 1);
        plot_text(f, r->closings[i].x, ax.y1 - (0.06 + 0.05 * (i % 3)) * (ax.y1 - ax.y0), PLOT_INK,
                  r->closings[i].kind);
    }
    if (data) {
        add_array(data, "x", r->xs, r->nsamples);
        add_array(data, "gap_direct_eV", r->gaps, r->nsamples);
        cJSON *iv = cJSON_AddArrayToObject(data, "intervals");
        for (int i = 0; i < r->ninterval; i++) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddNumberToObject(o, "from", r->intervals[i].x_lo);
            cJSON_AddNumberToObject(o, "to", r->intervals[i].x_hi);
            cJSON_AddStringToObject(o, "class", res_class_name(r->intervals[i].diag.cls));
            cJSON_AddItemToArray(iv, o);
        }
    }
    return 0;
}

static void path_track_panel(plot_fig *f, const pp_result *r, cJSON *data, bs_err *err)
{
    plot_axes ax = {"Weyl-node tracks projected on (k1, k2)",
                    "k1 (units of b1)",
                    "k2 (units of b2)",
                    -0.5,
                    0.5,
                    -0.5,
                    0.5,
                    0,
                    NULL,
                    NULL,
                    1};
    if (plot_panel(f, &ax, err) != 0) return;
    cJSON *tr = data ? cJSON_AddArrayToObject(data, "tracks") : NULL;
    for (int t = 0; t < r->ntrack; t++) {
        const pp_track *tk = &r->tracks[t];
        double *kx = malloc(((size_t)tk->npts + 1) * sizeof *kx),
               *ky = malloc(((size_t)tk->npts + 1) * sizeof *ky);
        if (!kx || !ky) {
            free(kx), free(ky);
            return;
        }
        int col = tk->chirality > 0 ? PLOT_ORANGE : PLOT_BLUE, start = 0;
        for (int q = 0; q < tk->npts; q++) {
            kx[q] = centred(tk->k[q][0]), ky[q] = centred(tk->k[q][1]);
            /* A jump across the zone boundary ends one drawn piece and starts the next. */
            if (q > start && (fabs(kx[q] - kx[q - 1]) > 0.5 || fabs(ky[q] - ky[q - 1]) > 0.5)) {
                plot_curve(f, q - start, kx + start, ky + start, col, 2.0, 0);
                start = q;
            }
        }
        plot_curve(f, tk->npts - start, kx + start, ky + start, col, 2.0, 0);
        plot_points(f, 1, kx, ky, col, 0.008);
        if (tr) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddNumberToObject(o, "chirality", tk->chirality);
            add_array(o, "k1", kx, tk->npts);
            add_array(o, "k2", ky, tk->npts);
            cJSON_AddItemToArray(tr, o);
        }
        free(kx), free(ky);
    }
    double orange[3] = {230 / 255.0, 140 / 255.0, 30 / 255.0},
           blue[3] = {30 / 255.0, 80 / 255.0, 160 / 255.0};
    plot_legend_rgb(f, 0, orange, "chirality +1");
    plot_legend_rgb(f, 1, blue, "chirality -1");
}

int fig_path(const char *path, const char *title, const pp_result *r, const char *unit, cJSON *data,
             bs_err *err)
{
    int tracks = r->ntrack > 0;
    plot_fig *f = NULL;
    int rc = plot_open(path, 1300, tracks ? 1200 : 650, 1, tracks ? 2 : 1, &f, err);
    if (rc == 0) rc = path_gap_panel(f, title, r, unit, data, err);
    if (rc == 0 && tracks) path_track_panel(f, r, data, err);
    int rc2 = plot_close(f, err);
    return rc ? rc : rc2;
}
