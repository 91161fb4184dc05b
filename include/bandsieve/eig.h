/* Hermitian eigensolvers through LAPACK, with workspaces allocated once per matrix size. */
#ifndef BANDSIEVE_EIG_H
#define BANDSIEVE_EIG_H

#include <complex.h>

#include "bandsieve/err.h"

typedef struct eig_ws eig_ws;

/* A distributed solver the caller plugs in (the pipeline's ScaLAPACK groups): for n >= min_n the
 * workspace hands its problems to these callbacks instead of LAPACK. They are collective on the
 * caller's group, so every member must make the same calls in the same order. vectors overwrites
 * A with the eigenvectors as eig_vectors does; range fills w[iu-il+1] and Z (may be NULL). */
typedef struct eig_dist {
    int min_n;
    void *ctx;
    int (*values)(void *ctx, int n, double complex *A, double *w, bs_err *err);
    int (*vectors)(void *ctx, int n, double complex *A, double *w, bs_err *err);
    int (*range)(void *ctx, int n, double complex *A, int il, int iu, double *w, double complex *Z,
                 bs_err *err);
} eig_dist;

/* Workspace for n x n Hermitian problems. The caller owns *out. */
int eig_create(int n, eig_ws **out, bs_err *err);

/* As eig_create, with a distributed solver (borrowed; may be NULL) for sizes >= dist->min_n. */
int eig_create_dist(int n, const eig_dist *dist, eig_ws **out, bs_err *err);

/* Frees w; accepts NULL. */
void eig_free(eig_ws *w);

/* All eigenvalues (ascending, into w[n]) of the column-major Hermitian A, which is destroyed.
 * BS_ENUMERIC with LAPACK's info on failure. */
int eig_values(eig_ws *ws, double complex *A, double *w, bs_err *err);

/* All eigenvalues and eigenvectors: A is overwritten by the orthonormal eigenvectors as columns
 * (column j belongs to w[j]). */
int eig_vectors(eig_ws *ws, double complex *A, double *w, bs_err *err);

/* Eigenvalues with indices il..iu (0-based, inclusive) into w[iu-il+1]; vectors into the
 * column-major n x (iu-il+1) array Z when Z is not NULL. A is destroyed. */
int eig_range(eig_ws *ws, double complex *A, int il, int iu, double *w, double complex *Z, bs_err *err);

#endif
