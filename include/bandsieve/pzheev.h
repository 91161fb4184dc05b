/* Distributed Hermitian eigensolver: ScaLAPACK (pzheevr, pzheevd) on a BLACS grid over a given
 * MPI communicator, with the contract of eig.h (eig_values / eig_range / eig_vectors), and a
 * dispatcher that keeps small problems on LAPACK. It lives in src/pipeline beside the rank groups
 * that use it (ScaLAPACK needs a communicator); the numerical layers see it only through the
 * eig_dist callbacks of eig.h, passed in their options.
 *
 * The matrix is full, column-major, on rank `root` only (root >= 0) or the same on every rank
 * (root = PZ_ALL). Results (eigenvalues, and eigenvectors when asked) come back on every rank
 * when root = PZ_ALL, else eigenvalues on every rank and eigenvectors on root only.
 * Every function is collective on the communicator given to pz_create; on failure every rank
 * returns the same error code (the message is the failing rank's, or "failed on another rank"). */
#ifndef BANDSIEVE_PZHEEV_H
#define BANDSIEVE_PZHEEV_H

#include <complex.h>
#include <mpi.h>

#include "bandsieve/err.h"

#define PZ_ALL (-1)

/* Default matrix size from which pz_auto_* distribute (below it LAPACK on one rank is faster:
 * the tridiagonal reduction of a few hundred states is cheaper than moving the matrix). */
#define PZ_DEFAULT_THRESHOLD 800

typedef struct pz_ctx pz_ctx;

/* Grid and workspace for n x n problems with block size nb (0: 32) over comm (duplicated, so
 * the caller may free its own handle). The grid is nprow x npcol with nprow the largest divisor
 * of the size not above its square root. The caller owns *out. Collective on comm. */
int pz_create(MPI_Comm comm, int n, int nb, pz_ctx **out, bs_err *err);

/* Frees c and its BLACS grid; accepts NULL. Collective on the context's communicator. */
void pz_free(pz_ctx *c);

/* Grid shape. */
void pz_grid(const pz_ctx *c, int *nprow, int *npcol);

/* All eigenvalues (ascending, w[n] on every rank) by pzheevr. A is read, not destroyed. */
int pz_values(pz_ctx *c, int root, const double complex *A, double *w, bs_err *err);

/* All eigenvalues and orthonormal eigenvectors by pzheevd: Z (n x n, column-major) receives
 * them as columns on root (every rank for PZ_ALL); Z may alias A on those ranks. */
int pz_vectors(pz_ctx *c, int root, const double complex *A, double *w, double complex *Z, bs_err *err);

/* Eigenvalues il..iu (0-based, inclusive) by pzheevr into w[iu-il+1] on every rank; vectors
 * into Z (n x (iu-il+1)) on root (every rank for PZ_ALL) when Z is not NULL. BS_EINVAL for a
 * range outside 0..n-1. */
int pz_range(pz_ctx *c, int root, const double complex *A, int il, int iu, double *w, double complex *Z,
             bs_err *err);

/* Dispatcher: LAPACK (eig.h) when n < threshold or comm has one rank, else ScaLAPACK. */
typedef struct pz_auto pz_auto;

/* threshold <= 0 means PZ_DEFAULT_THRESHOLD. The caller owns *out. Collective on comm. */
int pz_auto_create(MPI_Comm comm, int n, int threshold, pz_auto **out, bs_err *err);
void pz_auto_free(pz_auto *a);

/* 1 when the dispatcher distributes (ScaLAPACK), 0 when it calls LAPACK. */
int pz_auto_distributed(const pz_auto *a);

/* As pz_values / pz_range with the same root convention. On the LAPACK path root (or every rank
 * for PZ_ALL) solves and broadcasts the eigenvalues. */
int pz_auto_values(pz_auto *a, int root, const double complex *A, double *w, bs_err *err);
int pz_auto_range(pz_auto *a, int root, const double complex *A, int il, int iu, double *w, double complex *Z,
                  bs_err *err);

#endif
