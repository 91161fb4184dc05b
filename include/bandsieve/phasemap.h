/* Phase maps: the phase-path machinery (phasepath.h) on a grid of two parameters of a built-in
 * model, one row (fixed y, path over x) per unit of work, the rows dealt round-robin over the MPI
 * ranks and gathered on rank 0, which writes the map as HDF5 arrays. A row's result depends only
 * on its y, so the map is the same at any number of ranks. MPI stays inside src/pipeline: this
 * header does not include <mpi.h>. */
#ifndef BANDSIEVE_PHASEMAP_H
#define BANDSIEVE_PHASEMAP_H

#include "bandsieve/err.h"
#include "bandsieve/phasepath.h"

enum { PM_MAX_CLOSINGS = 16 };

typedef struct pm_spec {
    char spec[512]; /* built-in model spec without the two keys ("fkm", "fkm:lambda_SO=0.1") */
    char xkey[64], ykey[64];
    double x_lo, x_hi, y_lo, y_hi;
    int nx, ny;   /* grid points (nx >= 3, ny >= 1) */
    pp_opts opts; /* path settings for each row (nsamples is set to nx) */
} pm_spec;

/* The gathered map (rank 0). */
typedef struct pm_map {
    int nx, ny;
    double *x, *y;    /* nx, ny */
    int *cls;         /* ny * nx, row-major, pp_class_name indices */
    double *gap;      /* ny * nx, eV */
    int *nclosing;    /* ny */
    double *closings; /* ny * PM_MAX_CLOSINGS * 5: x_lo, x_hi, x, single value (0/1), kind code */
    double seconds;
    int ranks;
} pm_map;

/* Kind code of a closing in pm_map.closings: 0 band inversion, 1 gap closing, 2 Weyl phase,
 * 3 nodal line, 4 metal. */
const char *pm_kind_name(int code);

void pm_map_free(pm_map *m);

/* Runs the map: initialises MPI from argc/argv and finalises it. On rank 0 (*is_root = 1) *out
 * receives the map (the caller owns it, pm_map_free); other ranks get NULL. Collective. */
int pm_run(int *argc, char ***argv, const pm_spec *spec, pm_map **out, int *is_root, bs_err *err);

/* Writes the map as HDF5 (layout in db/phase-map.md) to path. */
int pm_write_h5(const pm_map *m, const pm_spec *spec, const char *path, bs_err *err);

#endif
