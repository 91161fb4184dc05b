/* Figures through PLplot (the only file that includes it). PLplot keeps its state per stream;
 * each figure is one stream opened in plot_open and ended in plot_close, so figures are drawn one
 * at a time (the library is not reentrant; bandsieve draws from one thread). */
#include "bandsieve/plot.h"

#include <math.h>
#include <plplot/plplot.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "plot_cmap.h"

struct plot_fig {
    char path[1024];
    int nx, ny, panel;
    double x0, x1, y0, y1; /* current panel's world range */
    double vp[4];          /* current panel's viewport (normalised subpage coordinates) */
};

int plot_available(void)
{
    return 1;
}

static const char *device_for(const char *path)
{
    const char *dot = strrchr(path, '.');
    if (!dot) return NULL;
    if (strcmp(dot, ".svg") == 0) return "svg";
    if (strcmp(dot, ".png") == 0) return "pngcairo";
    if (strcmp(dot, ".pdf") == 0) return "pdfcairo";
    return NULL;
}

/* Discrete colours (cmap0): ink, blue, orange, teal, grey, shade. Chosen here; luminances
 * 0.02, 0.10, 0.42, 0.20, 0.33, 0.84 so that curves stay apart in grey as well. */
static const int CMAP0[6][3] = {{25, 25, 35},   {30, 80, 160},   {230, 140, 30},
                                {20, 140, 130}, {130, 130, 130}, {232, 232, 236}};

static void set_cmap1(int cmap)
{
    const plot_cmap_def *d = plot_cmap_get(cmap);
    PLFLT pos[PLOT_CMAP_MAXPT], r[PLOT_CMAP_MAXPT], g[PLOT_CMAP_MAXPT], b[PLOT_CMAP_MAXPT];
    for (int i = 0; i < d->n; i++)
        pos[i] = d->pos[i], r[i] = d->rgb[i][0], g[i] = d->rgb[i][1], b[i] = d->rgb[i][2];
    plscmap1n(256);
    plscmap1l(1, d->n, pos, r, g, b, NULL);
}

int plot_open(const char *path, int width, int height, int nx, int ny, plot_fig **out, bs_err *err)
{
    *out = NULL;
    const char *dev = device_for(path);
    if (!dev) return bs_fail(err, BS_EINVAL, "%s: figure files end in .svg, .png or .pdf", path);
    if (nx < 1 || ny < 1 || width < 100 || height < 100)
        return bs_fail(err, BS_EINVAL, "%s: bad figure size", path);
    FILE *probe = fopen(path, "w");
    if (!probe) return bs_fail(err, BS_EIO, "%s: cannot be written", path);
    fclose(probe);
    plot_fig *f = calloc(1, sizeof *f);
    if (!f) return bs_fail(err, BS_ENOMEM, "out of memory");
    snprintf(f->path, sizeof f->path, "%s", path);
    f->nx = nx, f->ny = ny;
    PLINT strm;
    plmkstrm(&strm);
    plsdev(dev);
    plsfnam(path);
    char geom[32];
    snprintf(geom, sizeof geom, "%dx%d", width, height);
    plsetopt("geometry", geom);
    plscmap0n(16);
    for (int i = 0; i < 6; i++)
        plscol0(i + 1, CMAP0[i][0], CMAP0[i][1], CMAP0[i][2]);
    plscolbg(255, 255, 255);
    plstar(nx, ny);
    plfontld(1);
    *out = f;
    return 0;
}

int plot_close(plot_fig *f, bs_err *err)
{
    if (!f) return 0;
    plend1();
    struct stat st;
    int rc = 0;
    if (stat(f->path, &st) != 0 || st.st_size == 0)
        rc = bs_fail(err, BS_EIO, "%s: figure was not written", f->path);
    free(f);
    return rc;
}

/* "G" alone (or as a word in a "K|U" label) is the zone centre: PLplot's escape for capital gamma. */
static void tick_text(const char *label, char *buf, size_t n)
{
    size_t used = 0;
    buf[0] = '\0';
    for (const char *p = label; *p && used + 4 < n; p++) {
        int alone = *p == 'G' && (p == label || p[-1] == '|') && (p[1] == '\0' || p[1] == '|');
        if (alone)
            used += (size_t)snprintf(buf + used, n - used, "#gG");
        else
            buf[used++] = *p, buf[used] = '\0';
    }
}

int plot_panel(plot_fig *f, const plot_axes *ax, bs_err *err)
{
    if (!(ax->x1 > ax->x0) || !(ax->y1 > ax->y0) || !isfinite(ax->x0) || !isfinite(ax->x1) ||
        !isfinite(ax->y0) || !isfinite(ax->y1))
        return bs_fail(err, BS_EINVAL, "%s: empty or non-finite axis range", f->path);
    if (f->panel >= f->nx * f->ny)
        return bs_fail(err, BS_EINVAL, "%s: more panels than the figure holds", f->path);
    pladv(++f->panel);
    plcol0(1);
    plschr(0, 0.85);
    plwidth(1.0);
    double right = ax->colourbar ? 0.80 : 0.95;
    f->vp[0] = 0.12, f->vp[1] = right, f->vp[2] = 0.14, f->vp[3] = 0.90;
    plvpor(f->vp[0], f->vp[1], f->vp[2], f->vp[3]);
    plwind(ax->x0, ax->x1, ax->y0, ax->y1);
    f->x0 = ax->x0, f->x1 = ax->x1, f->y0 = ax->y0, f->y1 = ax->y1;
    if (ax->nxtick > 0) {
        plbox("bc", 0, 0, "bcnstv", 0, 0);
        for (int i = 0; i < ax->nxtick; i++) {
            double xs[2] = {ax->xtick[i], ax->xtick[i]}, ys[2] = {ax->y0, ax->y1};
            plcol0(5);
            plline(2, xs, ys);
            plcol0(1);
            char lab[64];
            tick_text(ax->xticklabel[i], lab, sizeof lab);
            plmtex("b", 1.4, (ax->xtick[i] - ax->x0) / (ax->x1 - ax->x0), 0.5, lab);
        }
    } else {
        plbox("bcnst", 0, 0, "bcnstv", 0, 0);
    }
    pllab(ax->xlabel ? ax->xlabel : "", ax->ylabel ? ax->ylabel : "", ax->title ? ax->title : "");
    return 0;
}

static void fill_rect(double x0, double x1, double y0, double y1)
{
    PLFLT xs[4] = {x0, x1, x1, x0}, ys[4] = {y0, y0, y1, y1};
    plfill(4, xs, ys);
}

void plot_yspan(plot_fig *f, double y0, double y1, const char *label)
{
    plcol0(6);
    fill_rect(f->x0, f->x1, fmax(y0, f->y0), fmin(y1, f->y1));
    plcol0(1);
    if (label) plptex(f->x0 + 0.02 * (f->x1 - f->x0), 0.5 * (y0 + y1), 1, 0, 0, label);
}

void plot_xspan(plot_fig *f, double x0, double x1, const char *label)
{
    plcol0(6);
    fill_rect(fmax(x0, f->x0), fmin(x1, f->x1), f->y0, f->y1);
    plcol0(1);
    if (label) plptex(0.5 * (x0 + x1), f->y1 - 0.05 * (f->y1 - f->y0), 1, 0, 0.5, label);
}

static void line_style(int dashed)
{
    if (dashed) {
        PLINT mark = 1500, space = 1000;
        plstyl(1, &mark, &space);
    } else {
        plstyl(0, NULL, NULL);
    }
}

void plot_hline(plot_fig *f, double y, int col, int dashed, const char *label)
{
    double xs[2] = {f->x0, f->x1}, ys[2] = {y, y};
    plcol0(col + 1);
    line_style(dashed);
    plline(2, xs, ys);
    line_style(0);
    if (label) plptex(f->x1 - 0.01 * (f->x1 - f->x0), y + 0.015 * (f->y1 - f->y0), 1, 0, 1, label);
    plcol0(1);
}

void plot_curve(plot_fig *f, int n, const double *x, const double *y, int col, double width, int dashed)
{
    plcol0(col + 1);
    plwidth(width);
    line_style(dashed);
    plline(n, x, y);
    line_style(0);
    plwidth(1.0);
    plcol0(1);
}

static double unit(double v, double lo, double hi)
{
    double t = hi > lo ? (v - lo) / (hi - lo) : 0.5;
    return t < 0 ? 0 : (t > 1 ? 1 : t);
}

void plot_curve_mapped(plot_fig *f, int n, const double *x, const double *y, const double *c, int cmap,
                       double cmin, double cmax, double width)
{
    set_cmap1(cmap);
    plwidth(width);
    for (int i = 0; i + 1 < n; i++) {
        plcol1(unit(0.5 * (c[i] + c[i + 1]), cmin, cmax));
        plline(2, x + i, y + i);
    }
    plwidth(1.0);
    plcol0(1);
}

/* Panel size in world units per unit of panel height, so markers keep their shape. */
static void marker_scale(const plot_fig *f, double *sx, double *sy)
{
    PLFLT xmin, xmax, ymin, ymax;
    plgvpd(&xmin, &xmax, &ymin, &ymax);
    PLFLT xp, yp;
    PLINT xl, yl, xo, yo;
    plgpage(&xp, &yp, &xl, &yl, &xo, &yo);
    double aspect = (xmax - xmin) * xl / ((ymax - ymin) * yl * f->nx) * f->ny;
    *sy = f->y1 - f->y0;
    *sx = (f->x1 - f->x0) / (aspect > 0 ? aspect : 1);
}

void plot_points(plot_fig *f, int n, const double *x, const double *y, int col, double size)
{
    double sx, sy;
    marker_scale(f, &sx, &sy);
    plcol0(col + 1);
    for (int i = 0; i < n; i++) {
        if (!isfinite(x[i]) || !isfinite(y[i])) continue;
        PLFLT xs[12], ys[12];
        for (int j = 0; j < 12; j++) {
            double a = 2 * M_PI * j / 12;
            xs[j] = x[i] + size * sx * cos(a), ys[j] = y[i] + size * sy * sin(a);
        }
        plfill(12, xs, ys);
    }
    plcol0(1);
}

void plot_triangles(plot_fig *f, int n, const double *x, const double *y, const double *size, int up,
                    const double *v, int cmap, double vmin, double vmax, int col)
{
    double sx, sy;
    marker_scale(f, &sx, &sy);
    if (v) set_cmap1(cmap);
    double s = up ? 1.0 : -1.0;
    for (int i = 0; i < n; i++) {
        if (size[i] <= 0 || !isfinite(x[i]) || !isfinite(y[i])) continue;
        /* The base sits on the point and the apex points away from it: an up and a down triangle
         * at the same point lie on opposite sides and are both seen. */
        PLFLT xs[3] = {x[i] - size[i] * sx * 0.6, x[i] + size[i] * sx * 0.6, x[i]};
        PLFLT ys[3] = {y[i], y[i], y[i] + s * size[i] * sy};
        if (v)
            plcol1(unit(v[i], vmin, vmax));
        else
            plcol0(col + 1);
        plfill(3, xs, ys);
    }
    plcol0(1);
}

void plot_map(plot_fig *f, int nx, int ny, const double *z, double x0, double x1, double y0, double y1,
              int cmap, double zmin, double zmax)
{
    PLFLT **cols = malloc((size_t)nx * sizeof *cols);
    if (!cols) return;
    for (int i = 0; i < nx; i++)
        cols[i] = (PLFLT *)(z + (size_t)i * ny);
    set_cmap1(cmap);
    plimage((PLFLT_MATRIX)cols, nx, ny, x0, x1, y0, y1, zmin, zmax, x0, x1, y0, y1);
    free(cols);
    plcol0(1);
    plbox("bc", 0, 0, "bc", 0, 0);
}

void plot_colourbar(plot_fig *f, int cmap, double zmin, double zmax, const char *caption)
{
    const int n = 64;
    PLFLT col[64], *cols[2] = {col, col};
    for (int i = 0; i < n; i++)
        col[i] = zmin + (zmax - zmin) * i / (n - 1);
    plvpor(f->vp[1] + 0.04, f->vp[1] + 0.07, f->vp[2], f->vp[3]);
    plwind(0, 1, zmin, zmax);
    set_cmap1(cmap);
    plimage((PLFLT_MATRIX)cols, 2, n, 0, 1, zmin, zmax, zmin, zmax, 0, 1, zmin, zmax);
    plcol0(1);
    plbox("bc", 0, 0, "bcmstv", 0, 0);
    plmtex("r", 5.0, 0.5, 0.5, caption);
    plvpor(f->vp[0], f->vp[1], f->vp[2], f->vp[3]);
    plwind(f->x0, f->x1, f->y0, f->y1);
}

void plot_text(plot_fig *f, double x, double y, int col, const char *text)
{
    plcol0(col + 1);
    plptex(x, y, 1, 0, 0, text);
    plcol0(1);
}

void plot_legend(plot_fig *f, int i, int col, const char *text)
{
    double dx = f->x1 - f->x0, dy = f->y1 - f->y0;
    double y = f->y1 - (0.06 + 0.06 * i) * dy, x = f->x0 + 0.03 * dx;
    double xs[2] = {x, x + 0.05 * dx}, ys[2] = {y, y};
    /* A white box behind the entry keeps it readable over data; the text width is estimated from
     * the character count (about 1.2% of the panel width per character at this size). */
    plcol0(0);
    fill_rect(x - 0.01 * dx, x + (0.09 + 0.0125 * (double)strlen(text)) * dx, y - 0.03 * dy, y + 0.03 * dy);
    plcol0(col + 1);
    plwidth(3.0);
    plline(2, xs, ys);
    plwidth(1.0);
    plcol0(1);
    plptex(x + 0.07 * dx, y, 1, 0, 0, text);
}

/* cmap0 entry 15 is left free by plot_open for colours given as RGB. */
static void set_rgb(const double rgb[3])
{
    plscol0(15, (int)lround(255 * fmin(fmax(rgb[0], 0), 1)), (int)lround(255 * fmin(fmax(rgb[1], 0), 1)),
            (int)lround(255 * fmin(fmax(rgb[2], 0), 1)));
    plcol0(15);
}

void plot_rect_rgb(plot_fig *f, double x0, double x1, double y0, double y1, const double rgb[3])
{
    double xa = fmax(fmin(x0, x1), fmin(f->x0, f->x1)), xb = fmin(fmax(x0, x1), fmax(f->x0, f->x1));
    double ya = fmax(fmin(y0, y1), fmin(f->y0, f->y1)), yb = fmin(fmax(y0, y1), fmax(f->y0, f->y1));
    if (!(xb > xa) || !(yb > ya)) return;
    set_rgb(rgb);
    fill_rect(xa, xb, ya, yb);
    plcol0(1);
}

void plot_legend_rgb(plot_fig *f, int i, const double rgb[3], const char *text)
{
    /* The margin right of the panel as a unit window; restored after. */
    plvpor(f->vp[1] + 0.015, 0.995, f->vp[2], f->vp[3]);
    plwind(0, 1, 0, 1);
    double y = 1 - 0.075 * (i + 0.5);
    set_rgb(rgb);
    fill_rect(0.0, 0.1, y - 0.025, y + 0.025);
    plcol0(1);
    PLFLT xs[5] = {0.0, 0.1, 0.1, 0.0, 0.0}, ys[5] = {y - 0.025, y - 0.025, y + 0.025, y + 0.025, y - 0.025};
    plline(5, xs, ys);
    plschr(0, 0.7);
    plptex(0.13, y, 1, 0, 0, text);
    plschr(0, 0.85);
    plvpor(f->vp[0], f->vp[1], f->vp[2], f->vp[3]);
    plwind(f->x0, f->x1, f->y0, f->y1);
}

int plot_curves_file(const char *path, const plot_axes *ax, int nseries, const plot_series *s, int ninterval,
                     const plot_interval *iv, bs_err *err)
{
    plot_fig *f = NULL;
    int rc = plot_open(path, 900, 600, 1, 1, &f, err);
    if (rc == 0) rc = plot_panel(f, ax, err);
    for (int i = 0; rc == 0 && i < ninterval; i++)
        plot_xspan(f, iv[i].lo, iv[i].hi, iv[i].label);
    for (int i = 0; rc == 0 && i < nseries; i++) {
        plot_curve(f, s[i].n, s[i].x, s[i].y, s[i].col, 2.0, s[i].dashed);
        if (s[i].label) plot_legend(f, i, s[i].col, s[i].label);
    }
    if (f && rc == 0) plbox("bc", 0, 0, "bc", 0, 0);
    int rc2 = plot_close(f, err);
    return rc ? rc : rc2;
}
