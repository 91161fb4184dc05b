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

#endif
