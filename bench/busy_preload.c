/* Fixed busy compute per material for the worker-busy figure of the scale benchmark
 * (bench_scale.py, part "busy"): loaded with LD_PRELOAD into any build of bandsieve, old or new, it
 * makes every opening of a material's group ("materials/<id>", once per material a worker reads)
 * on a rank other than 0 first spend BS_BENCH_BUSY_US microseconds of the thread's CPU time in a
 * loop, so the benchmark's set of error entries becomes a set of materials of about that cost.
 * Rank 0 (the coordinator, which opens the same groups while it reads the set's contents) is left
 * alone. Not part of the program, and nothing in the program knows of it; built by the benchmark
 * script with the system's cc. Invented load: no physics. */
#define _GNU_SOURCE
#include <dlfcn.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

typedef int64_t hid_t; /* HDF5 1.10 and later */
typedef hid_t gopen2_fn(hid_t, const char *, hid_t);

static long busy_us = -1;
static volatile double sink;

static double cpu_now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static void spin(void)
{
    if (busy_us < 0) {
        const char *v = getenv("BS_BENCH_BUSY_US");
        const char *rank = getenv("OMPI_COMM_WORLD_RANK");
        busy_us = v && rank && strcmp(rank, "0") != 0 ? atol(v) : 0;
    }
    if (busy_us <= 0) return;
    double until = cpu_now() + 1e-6 * (double)busy_us;
    double x = 1.0;
    while (cpu_now() < until)
        for (int i = 0; i < 200; i++)
            x = x * 1.0000001 + 1e-9;
    sink = x;
}

hid_t H5Gopen2(hid_t loc, const char *name, hid_t gapl)
{
    static gopen2_fn *real;
    if (!real) real = (gopen2_fn *)dlsym(RTLD_NEXT, "H5Gopen2");
    if (name && strncmp(name, "materials/", 10) == 0) spin();
    return real(loc, name, gapl);
}
