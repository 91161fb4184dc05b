/* BLAS thread control for any BLAS: OpenBLAS, MKL and BLIS setters through weak references.
 * One solve of n <= a few hundred gains nothing from threads, and a screen runs one process per
 * core, so threads only compete (measured: 2x the CPU at n = 64 for the same wall time). */
#define _GNU_SOURCE
#include "bandsieve/blas_threads.h"

#include <dlfcn.h>
#include <stdlib.h>
#include <string.h>

/* Weak references: NULL when the linked BLAS does not define them. */
void openblas_set_num_threads(int num_threads) __attribute__((weak));
int openblas_get_num_threads(void) __attribute__((weak));
void MKL_Set_Num_Threads(int nt) __attribute__((weak));
int MKL_Get_Max_Threads(void) __attribute__((weak));
void bli_thread_set_num_threads(long nt) __attribute__((weak));
long bli_thread_get_num_threads(void) __attribute__((weak));

/* A weak reference stays NULL when the library is loaded only indirectly (for instance through
 * the system LAPACK, or when the linker dropped a library used only weakly); the loaded
 * libraries are then asked by name. */
static void *find(void *weak, const char *name)
{
    if (weak) return weak;
    return dlsym(RTLD_DEFAULT, name);
}

static void set_threads(int n)
{
    void (*ob)(int) = (void (*)(int))find((void *)openblas_set_num_threads, "openblas_set_num_threads");
    if (ob) ob(n);
    /* OpenBLAS (pthread build) starts its pool when it is loaded, one thread per further core, and
     * an idle pool thread spins on sched_yield for about 2^28 cycles before it sleeps: 0.04-0.06 s
     * of CPU in every process of a screen (a tenth of a coordinator's CPU for 20,000 results),
     * taken from the workers' cores. With one thread the pool is never used, so it is stopped; a
     * later threaded call (n > 1) starts it again, as OpenBLAS does after fork(). Resolved by name
     * only: the symbol is exported by OpenBLAS but declared in no header. */
    if (ob && n == 1) {
        void (*shutdown)(void) = (void (*)(void))dlsym(RTLD_DEFAULT, "blas_thread_shutdown_");
        if (shutdown) shutdown();
    }
    void (*mkl)(int) = (void (*)(int))find((void *)MKL_Set_Num_Threads, "MKL_Set_Num_Threads");
    if (mkl) mkl(n);
    void (*bli)(long) =
        (void (*)(long))find((void *)bli_thread_set_num_threads, "bli_thread_set_num_threads");
    if (bli) bli(n);
}

int blas_threads_current(void)
{
    int (*ob)(void) = (int (*)(void))find((void *)openblas_get_num_threads, "openblas_get_num_threads");
    if (ob) return ob();
    int (*mkl)(void) = (int (*)(void))find((void *)MKL_Get_Max_Threads, "MKL_Get_Max_Threads");
    if (mkl) return mkl();
    long (*bli)(void) =
        (long (*)(void))find((void *)bli_thread_get_num_threads, "bli_thread_get_num_threads");
    if (bli) return (int)bli();
    return 0;
}

int blas_threads_init(const char **bad)
{
    if (bad) *bad = NULL;
    const char *ours = getenv("BS_BLAS_THREADS");
    if (ours && *ours) {
        char *end = NULL;
        long n = strtol(ours, &end, 10);
        if (*end == '\0' && n >= 1 && n <= 4096) {
            set_threads((int)n);
            return (int)n;
        }
        if (bad) *bad = ours;
    } else {
        static const char *const theirs[] = {"OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS",
                                             "BLIS_NUM_THREADS"};
        for (size_t i = 0; i < sizeof theirs / sizeof theirs[0]; i++) {
            const char *v = getenv(theirs[i]);
            if (v && *v) return 0;
        }
    }
    set_threads(1);
    return 1;
}
