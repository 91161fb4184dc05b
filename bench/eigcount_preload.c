/* Counts LAPACK's Hermitian eigensolves (zheevd, zheevr, zheev) per matrix size, for the diagnosis-
 * cost benchmark (bench_diagcost.py): loaded with LD_PRELOAD into any build of bandsieve, old or
 * new, it counts the same thing in both without relying on what each reports. At exit it writes
 * "size count" lines to the file named by BS_EIGCOUNT_OUT. Workspace queries (lwork = -1) are not
 * counted. Not part of the program; built by the benchmark script with the system's cc. */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>

enum { MAX_N = 8192 };
static long long counts[MAX_N + 1];

static void note(int n)
{
    counts[n < 0 ? 0 : n > MAX_N ? MAX_N : n]++;
}

static void dump(void)
{
    /* A process without eigensolves (the timing wrapper around the program) leaves the file alone. */
    int any = 0;
    for (int i = 0; i <= MAX_N && !any; i++)
        any = counts[i] != 0;
    const char *path = getenv("BS_EIGCOUNT_OUT");
    FILE *f = path && any ? fopen(path, "w") : NULL;
    if (!f) return;
    for (int i = 0; i <= MAX_N; i++)
        if (counts[i]) fprintf(f, "%d %lld\n", i, counts[i]);
    fclose(f);
}

__attribute__((constructor)) static void start(void)
{
    atexit(dump);
}

/* Fortran interfaces with hidden string lengths (gfortran passes them as size_t at the end). */
typedef void zheevd_fn(const char *, const char *, const int *, void *, const int *, double *, void *,
                       const int *, double *, const int *, int *, const int *, int *, size_t, size_t);
typedef void zheevr_fn(const char *, const char *, const char *, const int *, void *, const int *,
                       const double *, const double *, const int *, const int *, const double *, int *,
                       double *, void *, const int *, int *, void *, const int *, double *, const int *,
                       int *, const int *, int *, size_t, size_t, size_t);
typedef void zheev_fn(const char *, const char *, const int *, void *, const int *, double *, void *,
                      const int *, double *, int *, size_t, size_t);

void zheevd_(const char *jobz, const char *uplo, const int *n, void *a, const int *lda, double *w, void *work,
             const int *lwork, double *rwork, const int *lrwork, int *iwork, const int *liwork, int *info,
             size_t l1, size_t l2)
{
    static zheevd_fn *real;
    if (!real) real = (zheevd_fn *)dlsym(RTLD_NEXT, "zheevd_");
    if (*lwork != -1 && *lrwork != -1 && *liwork != -1) note(*n);
    real(jobz, uplo, n, a, lda, w, work, lwork, rwork, lrwork, iwork, liwork, info, l1, l2);
}

void zheevr_(const char *jobz, const char *range, const char *uplo, const int *n, void *a, const int *lda,
             const double *vl, const double *vu, const int *il, const int *iu, const double *abstol, int *m,
             double *w, void *z, const int *ldz, int *isuppz, void *work, const int *lwork, double *rwork,
             const int *lrwork, int *iwork, const int *liwork, int *info, size_t l1, size_t l2, size_t l3)
{
    static zheevr_fn *real;
    if (!real) real = (zheevr_fn *)dlsym(RTLD_NEXT, "zheevr_");
    if (*lwork != -1 && *lrwork != -1 && *liwork != -1) note(*n);
    real(jobz, range, uplo, n, a, lda, vl, vu, il, iu, abstol, m, w, z, ldz, isuppz, work, lwork, rwork,
         lrwork, iwork, liwork, info, l1, l2, l3);
}

void zheev_(const char *jobz, const char *uplo, const int *n, void *a, const int *lda, double *w, void *work,
            const int *lwork, double *rwork, int *info, size_t l1, size_t l2)
{
    static zheev_fn *real;
    if (!real) real = (zheev_fn *)dlsym(RTLD_NEXT, "zheev_");
    if (*lwork != -1) note(*n);
    real(jobz, uplo, n, a, lda, w, work, lwork, rwork, info, l1, l2);
}
