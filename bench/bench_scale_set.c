/* Writes a material set of N entries for the scale benchmark (bench/bench_scale.sh): entry i is
 * an error entry with id "s0000000".."s9999999" (it costs a worker one read and gives an invalid
 * row), made through the set API, so the index is the one ms_open reads. Invented test data: no
 * physics. Usage: bench_scale_set OUT.h5 N */
#include <stdio.h>
#include <stdlib.h>

#include "bandsieve/err.h"
#include "bandsieve/matset.h"

int main(int argc, char **argv)
{
    if (argc != 3) {
        fprintf(stderr, "usage: bench_scale_set OUT.h5 N\n");
        return 2;
    }
    long n = atol(argv[2]);
    bs_err err;
    bs_err_clear(&err);
    ms_set *s = NULL;
    int rc = ms_create(argv[1], &s, &err);
    if (rc == 0) rc = ms_set_meta(s, "scale benchmark: error entries only (invented)", 1, &err);
    for (long i = 0; rc == 0 && i < n; i++) {
        char id[32];
        snprintf(id, sizeof id, "s%07ld", i);
        rc = ms_add_error(s, id, BS_EPARSE, "benchmark entry without data (invented)", &err);
    }
    if (rc == 0) rc = ms_close(s, &err);
    ms_free(s);
    if (rc != 0) {
        fprintf(stderr, "bench_scale_set: %s\n", err.msg);
        return 1;
    }
    return 0;
}
