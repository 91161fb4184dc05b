/* The figures of bandsieve, assembled from results and drawn through the plot module: bands along
 * a path, Wannier-centre flows, Berry-curvature maps, Weyl nodes, slab bands, spectral maps.
 * Each takes plain data, so `plot`, `slab` and `report` (from a catalogue alone) share them.
 * data, when not NULL, receives the plotted arrays (JSON) so a test can check what was drawn. */
#ifndef BANDSIEVE_CLI_FIGURES_H
#define BANDSIEVE_CLI_FIGURES_H

#include <cjson/cJSON.h>

#include "bandsieve/berrymap.h"
#include "bandsieve/diagnosis.h"
#include "bandsieve/err.h"
#include "bandsieve/phasepath.h"
#include "bandpath.h"

/* Bands along the path: occupied bands in ink, empty ones in blue (or coloured by the weight),
 * the gap between the band edges at the filling shaded, the Fermi level dashed. */
int fig_bands(const char *path, const char *title, const band_path *bp, cJSON *data, bs_err *err);

/* Wannier-centre flows, one panel per plane (2D: one), centres against the pumping parameter,
 * with the line through the largest gap of each string (Phys. Rev. B 84, 075119 (2011)). */
int fig_flows(const char *path, const char *title, int nflow, const res_flow *flows, cJSON *data,
              bs_err *err);

/* Midpoint of the largest gap between consecutive centres of one string (circularly), in [0,1). */
double fig_largest_gap_mid(int n, const double *wcc);

/* Berry curvature over a plane, diverging map, symmetric limits. */
int fig_berry(const char *path, const char *title, const berry_map *bm, cJSON *data, bs_err *err);

/* Weyl nodes projected along reduced axis proj (onto the other two, centred zone), coloured and
 * shaped by chirality. */
int fig_nodes(const char *path, const char *title, int n, const double (*k)[3], const int *chirality,
              int proj, cJSON *data, bs_err *err);

/* Slab or ribbon bands with the top- and bottom-surface weights of every state shown at once:
 * up triangles (orange, size by the top weight) and down triangles (blue, by the bottom weight). */
typedef struct fig_slab_data {
    int nkp, ns;
    const double *xp;          /* nkp path coordinates */
    const double *E, *wt, *wb; /* nkp * ns */
    double vbm, cbm, fermi;
    int ntick;
    const double *xt;
    const char *const *labels;
} fig_slab_data;
int fig_slab_bands(const char *path, const char *title, const fig_slab_data *d, cJSON *data, bs_err *err);

/* A heat map (spectral functions) of z[ix * ny + iy], log10 over six decades when log_scale. */
int fig_heatmap(const char *path, const char *title, const char *xlabel, const char *ylabel,
                const char *clabel, int nx, int ny, const double *z, double x0, double x1, double y0,
                double y1, int log_scale, int ntick, const double *xt, const char *const *labels,
                bs_err *err);

/* The colour (RGB in 0..1) this project gives a class by its name (res_class_name or
 * pp_class_name): insulators in blues and greys, semimetals and metals in oranges and browns,
 * luminances apart so that neighbouring classes stay apart in grey too; no red/green contrast. */
void fig_class_rgb(const char *cls, double rgb[3]);

/* A map of classes: cls[iy * nx + ix] (indices into names, ncls of them) at the grid points x[nx] x
 * y[ny] (increasing), each drawn as the cell around its point, with a legend of the classes present.
 * data (may be NULL) receives x, y, the class names and the cells' class indices. */
int fig_classmap(const char *path, const char *title, const char *xlabel, const char *ylabel, int nx, int ny,
                 const double *x, const double *y, const int *cls, int ncls, const char *const *names,
                 cJSON *data, bs_err *err);

/* A phase path: the direct gap against the parameter with the phase intervals shaded in their
 * class's colour and the closings marked; when r has Weyl-node tracks, a second panel with the
 * tracks projected on the (k1, k2) plane of the centred zone, coloured by chirality. data (may be
 * NULL) receives the plotted arrays. */
int fig_path(const char *path, const char *title, const pp_result *r, const char *unit, cJSON *data,
             bs_err *err);

#endif
