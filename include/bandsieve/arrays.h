/* Named arrays of doubles written to an HDF5 file: how the surface spectra and slab bands reach
 * an artifacts file (`bandsieve slab --arrays FILE.h5`). */
#ifndef BANDSIEVE_ARRAYS_H
#define BANDSIEVE_ARRAYS_H

#include "bandsieve/err.h"

typedef struct ar_array {
    const char *name;   /* dataset path, e.g. "spectral_map" */
    const double *data; /* borrowed, row-major */
    int rank;           /* 1 or 2 */
    long long dims[2];
    const char *note; /* stored as the dataset's "description" attribute, may be NULL */
} ar_array;

/* Creates (truncates) path and writes the n arrays that have data; a file-level attribute
 * "source" holds source (may be NULL). BS_EHDF5 naming the file and dataset on failure. */
int ar_write(const char *path, const char *source, const ar_array *arrays, int n, bs_err *err);

#endif
