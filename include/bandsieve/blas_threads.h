/* How many threads the BLAS/LAPACK library may start, set once per process before any solve. */
#ifndef BANDSIEVE_BLAS_THREADS_H
#define BANDSIEVE_BLAS_THREADS_H

/* Sets the BLAS thread count of this process and returns it (0 when it was left to the library).
 * BS_BLAS_THREADS=N (N >= 1) sets N; otherwise, when one of OPENBLAS_NUM_THREADS, OMP_NUM_THREADS,
 * MKL_NUM_THREADS or BLIS_NUM_THREADS is set, the library's own reading of it stands (returns 0);
 * otherwise 1. The setters of OpenBLAS, MKL and BLIS are called only where the linked BLAS has them
 * (weak references, then a look-up among the loaded libraries), so any BLAS links. A bad
 * BS_BLAS_THREADS is written into *bad (may be NULL), and 1 is used. */
int blas_threads_init(const char **bad);

/* The thread count the linked BLAS reports, or 0 when it has no query (reference BLAS). */
int blas_threads_current(void);

#endif
