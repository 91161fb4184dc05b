/* Plain SVG plots written in C: a heat map with labelled axes and a colour scale (surface
 * spectral functions), and a scatter plot coloured by a signed value (slab bands coloured by
 * top minus bottom weight). No external libraries; the output is self-contained SVG 1.1. */
#ifndef BANDSIEVE_SVGPLOT_H
#define BANDSIEVE_SVGPLOT_H

#include <stdio.h>

#include "bandsieve/err.h"

typedef struct svg_axes {
    const char *title;
    const char *xlabel, *ylabel, *clabel;   /* axis and colour-scale captions */
    double x0, x1, y0, y1;                  /* data ranges shown (x0 < x1, y0 < y1) */
    /* Optional tick labels at given x positions (e.g. TRIM names along a path); nxtick = 0
     * for automatic numeric ticks. */
    int nxtick;
    const double *xtick;
    const char *const *xticklabel;
} svg_axes;

/* Heat map of z[ix * ny + iy] (nx x ny cells covering the axes' ranges; cell ix spans
 * x0 + (x1 - x0) [ix, ix + 1) / nx, likewise y) to out. With log_scale the colour follows
 * log10(z) over the top six decades (values <= 0 take the lowest colour). BS_EINVAL for empty
 * grids, ranges that are not increasing, or non-finite z; BS_EIO when writing fails. */
int svg_heatmap(FILE *out, int nx, int ny, const double *z, const svg_axes *ax, int log_scale, bs_err *err);

/* Scatter plot of np points (x[i], y[i]), each coloured by c[i] in [-1, 1] (blue -1, grey 0,
 * red +1; values beyond are clipped); points outside the ranges are skipped. */
int svg_scatter(FILE *out, int np, const double *x, const double *y, const double *c, const svg_axes *ax,
                bs_err *err);

/* As above, to a file at path (created or truncated). */
int svg_heatmap_file(const char *path, int nx, int ny, const double *z, const svg_axes *ax, int log_scale,
                     bs_err *err);
int svg_scatter_file(const char *path, int np, const double *x, const double *y, const double *c,
                     const svg_axes *ax, bs_err *err);

#endif
