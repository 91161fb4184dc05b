/* The colour maps of the plot module (private to src/plot). */
#ifndef BANDSIEVE_PLOT_CMAP_H
#define BANDSIEVE_PLOT_CMAP_H

#define PLOT_CMAP_MAXPT 8

typedef struct plot_cmap_def {
    int n;
    double pos[PLOT_CMAP_MAXPT];
    double rgb[PLOT_CMAP_MAXPT][3];
} plot_cmap_def;

/* The definition of PLOT_SEQUENTIAL or PLOT_DIVERGING (anything else: sequential). */
const plot_cmap_def *plot_cmap_get(int cmap);

#endif
