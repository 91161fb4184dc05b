/* SVG heat maps and scatter plots: fixed page layout, "nice" numeric ticks, a five-stop colour
 * ramp (dark blue, teal, green-yellow, amber, near white) of our own choosing. */
#include "bandsieve/svgplot.h"

#include <errno.h>
#include <math.h>
#include <string.h>

enum { PAGE_W = 760, PAGE_H = 560, PL = 90, PT = 50, PW = 520, PH = 420, CB_X = 640, CB_W = 22 };

static const double RAMP[5][3] = {{18, 24, 64}, {24, 112, 140}, {120, 190, 90}, {236, 170, 50}, {252, 244, 220}};

static void ramp(double t, int rgb[3])
{
    if (!(t > 0)) t = 0;
    if (t > 1) t = 1;
    double u = t * 4;
    int i = (int)u;
    if (i > 3) i = 3;
    double f = u - i;
    for (int c = 0; c < 3; c++) rgb[c] = (int)lround(RAMP[i][c] + f * (RAMP[i + 1][c] - RAMP[i][c]));
}

/* Diverging: -1 blue (40, 80, 200), 0 grey (170, 170, 170), +1 red (210, 40, 40). */
static void diverging(double v, int rgb[3])
{
    static const double lo[3] = {40, 80, 200}, mid[3] = {170, 170, 170}, hi[3] = {210, 40, 40};
    if (!(v >= -1)) v = -1;
    if (v > 1) v = 1;
    const double *end = v < 0 ? lo : hi;
    double f = fabs(v);
    for (int c = 0; c < 3; c++) rgb[c] = (int)lround(mid[c] + f * (end[c] - mid[c]));
}

/* Tick spacing of 1, 2 or 5 times a power of ten giving about 5 intervals over span. */
static double nice_step(double span)
{
    double raw = span / 5, p = pow(10, floor(log10(raw))), m = raw / p;
    return (m < 1.5 ? 1 : m < 3.5 ? 2 : m < 7.5 ? 5 : 10) * p;
}

static void xml_text(FILE *out, const char *s)
{
    for (; s && *s; s++) {
        if (*s == '<') fputs("&lt;", out);
        else if (*s == '>') fputs("&gt;", out);
        else if (*s == '&') fputs("&amp;", out);
        else fputc(*s, out);
    }
}

static double px(const svg_axes *a, double x) { return PL + PW * (x - a->x0) / (a->x1 - a->x0); }
static double py(const svg_axes *a, double y) { return PT + PH * (1 - (y - a->y0) / (a->y1 - a->y0)); }

static void label(FILE *out, double x, double y, const char *anchor, int size, double rot, const char *text)
{
    fprintf(out, "<text x=\"%.1f\" y=\"%.1f\" font-family=\"sans-serif\" font-size=\"%d\" text-anchor=\"%s\"", x, y,
            size, anchor);
    if (rot != 0) fprintf(out, " transform=\"rotate(%.0f %.1f %.1f)\"", rot, x, y);
    fputs(">", out);
    xml_text(out, text);
    fputs("</text>\n", out);
}

static void frame(FILE *out, const svg_axes *a)
{
    fprintf(out, "<rect x=\"%d\" y=\"%d\" width=\"%d\" height=\"%d\" fill=\"none\" stroke=\"black\"/>\n", PL, PT, PW, PH);
    char buf[64];
    if (a->nxtick > 0) {
        for (int i = 0; i < a->nxtick; i++) {
            double x = px(a, a->xtick[i]);
            fprintf(out, "<line x1=\"%.1f\" y1=\"%d\" x2=\"%.1f\" y2=\"%d\" stroke=\"#888\" stroke-dasharray=\"3,3\"/>\n", x,
                    PT, x, PT + PH);
            label(out, x, PT + PH + 18, "middle", 13, 0, a->xticklabel[i]);
        }
    } else {
        double st = nice_step(a->x1 - a->x0);
        for (double t = ceil(a->x0 / st - 1e-9) * st; t <= a->x1 + 1e-9 * st; t += st) {
            double x = px(a, t);
            fprintf(out, "<line x1=\"%.1f\" y1=\"%d\" x2=\"%.1f\" y2=\"%d\" stroke=\"black\"/>\n", x, PT + PH, x, PT + PH + 5);
            snprintf(buf, sizeof buf, "%.3g", fabs(t) < 1e-12 * st ? 0.0 : t);
            label(out, x, PT + PH + 18, "middle", 12, 0, buf);
        }
    }
    double st = nice_step(a->y1 - a->y0);
    for (double t = ceil(a->y0 / st - 1e-9) * st; t <= a->y1 + 1e-9 * st; t += st) {
        double y = py(a, t);
        fprintf(out, "<line x1=\"%d\" y1=\"%.1f\" x2=\"%d\" y2=\"%.1f\" stroke=\"black\"/>\n", PL - 5, y, PL, y);
        snprintf(buf, sizeof buf, "%.3g", fabs(t) < 1e-12 * st ? 0.0 : t);
        label(out, PL - 8, y + 4, "end", 12, 0, buf);
    }
    label(out, PL + PW / 2.0, PT + PH + 40, "middle", 14, 0, a->xlabel);
    label(out, PL - 55, PT + PH / 2.0, "middle", 14, -90, a->ylabel);
    label(out, PAGE_W / 2.0, 28, "middle", 16, 0, a->title);
}

static int check_axes(const svg_axes *a, bs_err *err)
{
    if (!(a->x1 > a->x0) || !(a->y1 > a->y0) || !isfinite(a->x0) || !isfinite(a->x1) || !isfinite(a->y0) || !isfinite(a->y1))
        return bs_fail(err, BS_EINVAL, "svg plot: ranges [%g, %g] x [%g, %g] must be finite and increasing", a->x0, a->x1,
                       a->y0, a->y1);
    return 0;
}

static void header(FILE *out)
{
    fprintf(out, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" "
                 "width=\"%d\" height=\"%d\" viewBox=\"0 0 %d %d\">\n<rect width=\"100%%\" height=\"100%%\" fill=\"white\"/>\n",
            PAGE_W, PAGE_H, PAGE_W, PAGE_H);
}

static int finish(FILE *out, bs_err *err)
{
    fputs("</svg>\n", out);
    if (ferror(out)) return bs_fail(err, BS_EIO, "svg plot: write failed: %s", strerror(errno));
    return 0;
}

/* Colour scale bar from lo to hi (data units, or decades when log_scale). */
static void colour_bar(FILE *out, double lo, double hi, int log_scale, const char *caption)
{
    int nstep = 64;
    for (int i = 0; i < nstep; i++) {
        int rgb[3];
        ramp((i + 0.5) / nstep, rgb);
        double y = PT + PH * (1 - (i + 1.0) / nstep);
        fprintf(out, "<rect x=\"%d\" y=\"%.2f\" width=\"%d\" height=\"%.2f\" fill=\"rgb(%d,%d,%d)\"/>\n", CB_X, y, CB_W,
                PH / (double)nstep + 0.5, rgb[0], rgb[1], rgb[2]);
    }
    fprintf(out, "<rect x=\"%d\" y=\"%d\" width=\"%d\" height=\"%d\" fill=\"none\" stroke=\"black\"/>\n", CB_X, PT, CB_W, PH);
    char buf[64];
    for (int i = 0; i <= 4; i++) {
        double v = lo + (hi - lo) * i / 4, y = PT + PH * (1 - i / 4.0);
        if (log_scale) snprintf(buf, sizeof buf, "1e%.1f", v);
        else snprintf(buf, sizeof buf, "%.3g", v);
        label(out, CB_X + CB_W + 5, y + 4, "start", 11, 0, buf);
    }
    label(out, CB_X + CB_W + 52, PT + PH / 2.0, "middle", 13, -90, caption);
}

int svg_heatmap(FILE *out, int nx, int ny, const double *z, const svg_axes *a, int log_scale, bs_err *err)
{
    if (nx < 1 || ny < 1) return bs_fail(err, BS_EINVAL, "svg heat map: grid %d x %d is empty", nx, ny);
    int rc = check_axes(a, err);
    if (rc != 0) return rc;
    double lo = INFINITY, hi = -INFINITY;
    for (size_t i = 0; i < (size_t)nx * ny; i++) {
        if (!isfinite(z[i])) return bs_fail(err, BS_EINVAL, "svg heat map: value %zu is not finite", i);
        double v = log_scale ? (z[i] > 0 ? log10(z[i]) : -INFINITY) : z[i];
        if (isfinite(v)) { lo = fmin(lo, v); hi = fmax(hi, v); }
    }
    if (!isfinite(hi)) { lo = 0; hi = 1; }
    if (log_scale && lo < hi - 6) lo = hi - 6;
    if (!(hi > lo)) hi = lo + 1;
    header(out);
    double cw = (double)PW / nx, ch = (double)PH / ny;
    for (int ix = 0; ix < nx; ix++)
        for (int iy = 0; iy < ny; iy++) {
            double v = z[(size_t)ix * ny + iy];
            v = log_scale ? (v > 0 ? log10(v) : lo) : v;
            int rgb[3];
            ramp((v - lo) / (hi - lo), rgb);
            /* +0.6 px overlap hides the hairline seams renderers leave between abutting cells. */
            fprintf(out, "<rect x=\"%.2f\" y=\"%.2f\" width=\"%.2f\" height=\"%.2f\" fill=\"rgb(%d,%d,%d)\"/>\n",
                    PL + ix * cw, PT + PH - (iy + 1) * ch, cw + 0.6, ch + 0.6, rgb[0], rgb[1], rgb[2]);
        }
    frame(out, a);
    colour_bar(out, lo, hi, log_scale, a->clabel);
    return finish(out, err);
}

int svg_scatter(FILE *out, int np, const double *x, const double *y, const double *c, const svg_axes *a, bs_err *err)
{
    if (np < 1) return bs_fail(err, BS_EINVAL, "svg scatter: no points");
    int rc = check_axes(a, err);
    if (rc != 0) return rc;
    header(out);
    for (int i = 0; i < np; i++) {
        if (!(x[i] >= a->x0 && x[i] <= a->x1 && y[i] >= a->y0 && y[i] <= a->y1)) continue;
        int rgb[3];
        diverging(c[i], rgb);
        fprintf(out, "<circle cx=\"%.2f\" cy=\"%.2f\" r=\"1.8\" fill=\"rgb(%d,%d,%d)\"/>\n", px(a, x[i]), py(a, y[i]), rgb[0],
                rgb[1], rgb[2]);
    }
    frame(out, a);
    /* Legend of the diverging scale in place of a colour bar. */
    for (int i = 0; i < 64; i++) {
        int rgb[3];
        diverging(-1 + (i + 0.5) / 32.0, rgb);
        fprintf(out, "<rect x=\"%d\" y=\"%.2f\" width=\"%d\" height=\"%.2f\" fill=\"rgb(%d,%d,%d)\"/>\n", CB_X,
                PT + PH * (1 - (i + 1) / 64.0), CB_W, PH / 64.0 + 0.5, rgb[0], rgb[1], rgb[2]);
    }
    fprintf(out, "<rect x=\"%d\" y=\"%d\" width=\"%d\" height=\"%d\" fill=\"none\" stroke=\"black\"/>\n", CB_X, PT, CB_W, PH);
    label(out, CB_X + CB_W + 5, PT + 4, "start", 11, 0, "+1");
    label(out, CB_X + CB_W + 5, PT + PH / 2.0 + 4, "start", 11, 0, "0");
    label(out, CB_X + CB_W + 5, PT + PH + 4, "start", 11, 0, "-1");
    label(out, CB_X + CB_W + 52, PT + PH / 2.0, "middle", 13, -90, a->clabel);
    return finish(out, err);
}

static int to_file(const char *path, FILE **f, bs_err *err)
{
    *f = fopen(path, "w");
    if (!*f) return bs_fail(err, BS_EIO, "%s: cannot write: %s", path, strerror(errno));
    return 0;
}

static int close_file(FILE *f, const char *path, int rc, bs_err *err)
{
    if (fclose(f) != 0 && rc == 0) rc = bs_fail(err, BS_EIO, "%s: write failed: %s", path, strerror(errno));
    return rc;
}

int svg_heatmap_file(const char *path, int nx, int ny, const double *z, const svg_axes *a, int log_scale, bs_err *err)
{
    FILE *f;
    int rc = to_file(path, &f, err);
    if (rc != 0) return rc;
    return close_file(f, path, svg_heatmap(f, nx, ny, z, a, log_scale, err), err);
}

int svg_scatter_file(const char *path, int np, const double *x, const double *y, const double *c, const svg_axes *a,
                     bs_err *err)
{
    FILE *f;
    int rc = to_file(path, &f, err);
    if (rc != 0) return rc;
    return close_file(f, path, svg_scatter(f, np, x, y, c, a, err), err);
}
