/* The Berry curvature of the lowest bands over a plane of the Brillouin zone, plaquette by
 * plaquette, from link variables (J. Phys. Soc. Jpn. 74, 1674 (2005)), in the sign convention of
 * chern.h: its sum over a closed plane is 2 pi times the Chern number. For figures and reports. */
#ifndef BANDSIEVE_BERRYMAP_H
#define BANDSIEVE_BERRYMAP_H

#include "bandsieve/err.h"
#include "bandsieve/model.h"

typedef struct berry_map {
    int axis_a, axis_b; /* reduced directions spanning the plane (a: first index) */
    int n;              /* plaquettes per direction */
    double *omega;      /* n * n, Berry curvature in Angstrom^2 at plaquette (ia, ib): omega[ia * n + ib] */
    double flux;        /* sum of F over the plane / (2 pi): the Chern number up to round-off */
    double max_f;       /* largest |F| of a plaquette (rad); above ~1 the mesh is too coarse */
    double min_gap_ev;  /* smallest direct gap at the filling on the grid */
} berry_map;

/* The map of the lowest nband bands of m (borrowed) on the plane k_fixed_axis = kfixed (reduced),
 * n x n plaquettes (4..400); in 2D fixed_axis must be 2. out is overwritten; berry_map_clear frees
 * it. BS_EINVAL, BS_ENOMEM, BS_ENUMERIC. */
int berry_map_plane(const tb_model *m, int nband, int fixed_axis, double kfixed, int n, berry_map *out,
                    bs_err *err);

void berry_map_clear(berry_map *b);

#endif
