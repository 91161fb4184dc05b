/* This project's colour maps, as control points interpolated linearly in RGB.
 * Sequential: luminance rises monotonically from a dark indigo through teal and green to a pale
 * yellow (relative luminance about 0.01, 0.05, 0.18, 0.45, 0.83 at the control points), so order
 * reads in grey and without red/green discrimination. Diverging: a dark blue (luminance 0.06)
 * through a light grey centre (0.60, visible on white when curves are coloured) to an orange (0.37): the sign
 * of a value reads by hue, and in grey by the darker negative side. tests/scripts/figures.py checks both
 * luminance properties. */
#include "bandsieve/plot.h"
#include "plot_cmap.h"

static const plot_cmap_def SEQUENTIAL = {
    5,
    {0.0, 0.25, 0.5, 0.75, 1.0},
    {{0.09, 0.05, 0.22}, {0.20, 0.22, 0.50}, {0.12, 0.50, 0.54}, {0.52, 0.74, 0.36}, {0.99, 0.94, 0.62}}};

static const plot_cmap_def DIVERGING = {
    5,
    {0.0, 0.25, 0.5, 0.75, 1.0},
    {{0.10, 0.24, 0.56}, {0.45, 0.57, 0.78}, {0.80, 0.80, 0.78}, {0.94, 0.72, 0.45}, {0.88, 0.52, 0.10}}};

const plot_cmap_def *plot_cmap_get(int cmap)
{
    return cmap == PLOT_DIVERGING ? &DIVERGING : &SEQUENTIAL;
}

void plot_cmap_rgb(int cmap, double t, double rgb[3])
{
    const plot_cmap_def *d = plot_cmap_get(cmap);
    t = t < 0 ? 0 : (t > 1 ? 1 : t);
    int i = 0;
    while (i + 2 < d->n && t > d->pos[i + 1])
        i++;
    double u = (t - d->pos[i]) / (d->pos[i + 1] - d->pos[i]);
    for (int c = 0; c < 3; c++)
        rgb[c] = d->rgb[i][c] + u * (d->rgb[i + 1][c] - d->rgb[i][c]);
}
