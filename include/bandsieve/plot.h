/* Figures through PLplot, the only module that links it: a figure is opened on a file (the
 * device follows the extension: .svg PLplot's own SVG writer, whose text stays text; .png and
 * .pdf its cairo drivers), panels are drawn with plain arrays, and the file is finished on close.
 * Nothing here knows the model or the physics; src/cli assembles the figures.
 *
 * Colour maps are this project's own: a sequential map whose luminance rises monotonically
 * (dark indigo, teal, green, pale yellow) for magnitudes, and a diverging blue-grey-orange map
 * for signed quantities in which, at every magnitude, the negative side is darker than the
 * positive side, so the sign survives a grey print. Both avoid a red/green contrast. Discrete curve colours
 * differ in luminance too.
 *
 * When bandsieve is built without PLplot every drawing function fails with BS_EUNSUPPORTED
 * and a message that says how to get figures. */
#ifndef BANDSIEVE_PLOT_H
#define BANDSIEVE_PLOT_H

#include "bandsieve/err.h"

enum { PLOT_SEQUENTIAL = 0, PLOT_DIVERGING = 1 };

/* Discrete colours: 0 ink (near black), 1 blue, 2 orange, 3 teal, 4 grey, 5 light grey (shading). */
enum { PLOT_INK = 0, PLOT_BLUE = 1, PLOT_ORANGE = 2, PLOT_TEAL = 3, PLOT_GREY = 4, PLOT_SHADE = 5 };

typedef struct plot_fig plot_fig;

typedef struct plot_axes {
    const char *title;
    const char *xlabel, *ylabel; /* with units, e.g. "energy (eV)" */
    double x0, x1, y0, y1;       /* ranges shown, x0 < x1, y0 < y1 */
    /* Optional labelled x positions (path points): a vertical line and the label under the axis
     * instead of numeric x ticks; "G" is written as the capital gamma. */
    int nxtick;
    const double *xtick;
    const char *const *xticklabel;
    int colourbar; /* leave room on the right for plot_colourbar */
} plot_axes;

/* 1 when this binary draws figures (built with PLplot), else 0. */
int plot_available(void);

/* Opens a figure of width x height pixels (PDF: points) on path, with nx x ny panels (filled row
 * by row with plot_panel). The device follows the extension (.svg, .png, .pdf), BS_EINVAL
 * otherwise. The caller owns *out and must plot_close it. BS_EUNSUPPORTED without PLplot. */
int plot_open(const char *path, int width, int height, int nx, int ny, plot_fig **out, bs_err *err);

/* Finishes and closes the file; accepts NULL. BS_EIO when the file is missing or empty after. */
int plot_close(plot_fig *f, bs_err *err);

/* Starts the next panel with its axes: frame, ticks, labels, title, labelled x positions. */
int plot_panel(plot_fig *f, const plot_axes *ax, bs_err *err);

/* A shaded interval y0..y1 across the panel (horizontal band) or x0..x1 (vertical band), in
 * colour PLOT_SHADE; draw it before the curves. label (may be NULL) is written inside it. */
void plot_yspan(plot_fig *f, double y0, double y1, const char *label);
void plot_xspan(plot_fig *f, double x0, double x1, const char *label);

/* A horizontal line at y, dashed when dashed is set, in discrete colour col; label at the right. */
void plot_hline(plot_fig *f, double y, int col, int dashed, const char *label);

/* A polyline of n points in discrete colour col (width in pixels, dashed or solid). */
void plot_curve(plot_fig *f, int n, const double *x, const double *y, int col, double width, int dashed);

/* A polyline whose segments take the colour of c (mean of the two ends) on map cmap over
 * [cmin, cmax]. */
void plot_curve_mapped(plot_fig *f, int n, const double *x, const double *y, const double *c, int cmap,
                       double cmin, double cmax, double width);

/* Filled markers: circles of radius size (fraction of the panel height) in discrete colour col. */
void plot_points(plot_fig *f, int n, const double *x, const double *y, int col, double size);

/* Filled triangles with the base on (x, y), pointing up (up = 1, drawn above) or down (below), of size
 * size[i] (fraction of the panel height; 0 skips the point), coloured by value v[i] on cmap over [vmin, vmax]
 * (v may be NULL: discrete colour col). Up and down triangles at one point do not hide each other. */
void plot_triangles(plot_fig *f, int n, const double *x, const double *y, const double *size, int up,
                    const double *v, int cmap, double vmin, double vmax, int col);

/* Heat map of z[ix * ny + iy] over [x0,x1] x [y0,y1] on cmap, clipped to [zmin, zmax]. */
void plot_map(plot_fig *f, int nx, int ny, const double *z, double x0, double x1, double y0, double y1,
              int cmap, double zmin, double zmax);

/* A colour scale at the right of the current panel for cmap over [zmin, zmax], captioned. */
void plot_colourbar(plot_fig *f, int cmap, double zmin, double zmax, const char *caption);

/* Text at (x, y) in data coordinates, left-aligned, in discrete colour col. */
void plot_text(plot_fig *f, double x, double y, int col, const char *text);

/* A legend line in the top-left corner of the panel, the i-th from the top: a swatch of col and
 * the text. */
void plot_legend(plot_fig *f, int i, int col, const char *text);

/* A filled rectangle [x0, x1] x [y0, y1] (data coordinates, clipped to the panel) in the colour rgb
 * (each 0..1): cells of a map of categories, intervals shaded by category. */
void plot_rect_rgb(plot_fig *f, double x0, double x1, double y0, double y1, const double rgb[3]);

/* A legend entry in the margin at the right of the current panel (open the panel with colourbar
 * set to leave the room), the i-th from the top: a swatch of rgb, outlined, and the text. */
void plot_legend_rgb(plot_fig *f, int i, const double rgb[3], const char *text);

/* RGB (0..1) of cmap at t in [0, 1]; for tests and for HTML swatches. */
void plot_cmap_rgb(int cmap, double t, double rgb[3]);

/* x against y curves with shaded x intervals, one panel, in one call: for parameter paths
 * (phase intervals along a path) and any other "quantity along a parameter" figure. */
typedef struct plot_series {
    const char *label; /* legend text, may be NULL */
    int n;
    const double *x, *y;
    int col; /* PLOT_* discrete colour */
    int dashed;
} plot_series;

typedef struct plot_interval {
    double lo, hi;     /* x range shaded */
    const char *label; /* written inside, may be NULL */
} plot_interval;

int plot_curves_file(const char *path, const plot_axes *ax, int nseries, const plot_series *s, int ninterval,
                     const plot_interval *iv, bs_err *err);

#endif
