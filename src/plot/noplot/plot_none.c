/* The plot module of a binary built without PLplot: every figure request fails with a message
 * saying how to get figures; the rest of the program is unaffected. */
#include "bandsieve/plot.h"

#include <stddef.h>

static int no_plplot(bs_err *err)
{
    return bs_fail(err, BS_EUNSUPPORTED,
                   "this bandsieve was built without PLplot, so it draws no figures: install libplplot-dev "
                   "and plplot-driver-cairo (workflows/install-deps.sh) and rebuild");
}

int plot_available(void)
{
    return 0;
}

int plot_open(const char *path, int width, int height, int nx, int ny, plot_fig **out, bs_err *err)
{
    *out = NULL;
    return no_plplot(err);
}

int plot_close(plot_fig *f, bs_err *err)
{
    return 0;
}
int plot_panel(plot_fig *f, const plot_axes *ax, bs_err *err)
{
    return no_plplot(err);
}
void plot_yspan(plot_fig *f, double y0, double y1, const char *label) {}
void plot_xspan(plot_fig *f, double x0, double x1, const char *label) {}
void plot_hline(plot_fig *f, double y, int col, int dashed, const char *label) {}
void plot_curve(plot_fig *f, int n, const double *x, const double *y, int col, double width, int dashed) {}
void plot_curve_mapped(plot_fig *f, int n, const double *x, const double *y, const double *c, int cmap,
                       double cmin, double cmax, double width)
{
}
void plot_points(plot_fig *f, int n, const double *x, const double *y, int col, double size) {}
void plot_triangles(plot_fig *f, int n, const double *x, const double *y, const double *size, int up,
                    const double *v, int cmap, double vmin, double vmax, int col)
{
}
void plot_map(plot_fig *f, int nx, int ny, const double *z, double x0, double x1, double y0, double y1,
              int cmap, double zmin, double zmax)
{
}
void plot_colourbar(plot_fig *f, int cmap, double zmin, double zmax, const char *caption) {}
void plot_text(plot_fig *f, double x, double y, int col, const char *text) {}
void plot_legend(plot_fig *f, int i, int col, const char *text) {}
void plot_rect_rgb(plot_fig *f, double x0, double x1, double y0, double y1, const double rgb[3]) {}
void plot_legend_rgb(plot_fig *f, int i, const double rgb[3], const char *text) {}

int plot_curves_file(const char *path, const plot_axes *ax, int nseries, const plot_series *s, int ninterval,
                     const plot_interval *iv, bs_err *err)
{
    return no_plplot(err);
}
