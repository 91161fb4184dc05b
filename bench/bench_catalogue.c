/* Catalogue write throughput: 100,000 invented results (JSON text as a worker sends it) through
 * cat_result_put_text with the default batching, then the time of one pass over the summary and
 * candidates views. Usage: bench_catalogue [DIR] [COUNT]; the catalogue is DIR/bench.sqlite
 * (removed first; default DIR /tmp). Not a test: it prints figures and checks only the row count. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "bandsieve/catalogue.h"

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* One invented diagnosis of the size `inspect --json` prints; every 10th has two Weyl nodes and
 * every 100th a Wannier-centre flow of 32 strings x 8 bands (test data, no physics). */
static size_t make_diag(char *buf, size_t len, const char *id, long i)
{
    int weyl = i % 10 == 0, flow = i % 100 == 0;
    size_t k = (size_t)snprintf(
        buf, len,
        "{\"id\":\"%s\",\"class\":\"%s\",\"confidence\":%.3f,\"reason\":\"invented benchmark entry\","
        "\"dimension\":3,\"norb\":16,\"occupied_bands\":8,\"gap_direct_eV\":%.6f,\"gap_indirect_eV\":%.6f,"
        "\"k_gap_direct\":[0.5,0,0],\"k_vbm\":[0,0,0],\"k_cbm\":[0.5,0,0],\"time_reversal\":true,"
        "\"inversion\":%s,"
        "\"z2\":[%d,0,0,0],\"z2_parity\":[%d,0,0,0],\"z2_wcc\":[%d,0,0,0],\"z2_status\":\"done\",\"z2_note\":"
        "\"\","
        "\"chern\":null,\"plane_chern\":[0,0,0,0,0,0],\"chern_status\":\"done\",\"weyl_nodes\":[%s],"
        "\"net_chirality\":0,\"nodal_line\":false,\"nodal_points\":0,\"nodal_extent\":0,\"mesh\":%d,"
        "\"seconds\":%.3f,"
        "\"k_points\":4096",
        id,
        weyl    ? "Weyl semimetal"
        : i % 3 ? "trivial insulator"
                : "strong topological insulator",
        0.5 + 0.5 * (double)(i % 97) / 97.0, 0.001 * (double)(i % 500), 0.0008 * (double)(i % 500),
        i % 2 ? "true" : "false", i % 3 == 0, i % 3 == 0, i % 3 == 0,
        weyl ? "{\"k\":[0.1,0.2,0.3],\"chirality\":1,\"energy_eV\":0.01,\"gap_eV\":1e-6},"
               "{\"k\":[0.9,0.8,0.7],\"chirality\":-1,\"energy_eV\":0.01,\"gap_eV\":1e-6}"
             : "",
        8 + 4 * (int)(i % 3), 0.1 * (double)(i % 50));
    if (flow) {
        k += (size_t)snprintf(buf + k, len - k, ",\"wcc_flows\":[{\"plane\":0,\"kpar\":[");
        for (int s = 0; s < 32; s++)
            k += (size_t)snprintf(buf + k, len - k, "%s%.6f", s ? "," : "", s / 62.0);
        k += (size_t)snprintf(buf + k, len - k, "],\"wcc\":[");
        for (int s = 0; s < 32; s++) {
            k += (size_t)snprintf(buf + k, len - k, "%s[", s ? "," : "");
            for (int b = 0; b < 8; b++)
                k += (size_t)snprintf(buf + k, len - k, "%s%.6f", b ? "," : "", (b + 0.01 * s) / 8.0);
            k += (size_t)snprintf(buf + k, len - k, "]");
        }
        k += (size_t)snprintf(buf + k, len - k, "]}]");
    }
    k += (size_t)snprintf(buf + k, len - k, "}");
    return k;
}

static int count_rows(void *ctx, const cat_row *row, bs_err *err)
{
    (void)err;
    if (row->index >= 0) ++*(long *)ctx;
    return 0;
}

int main(int argc, char **argv)
{
    const char *dir = argc > 1 ? argv[1] : "/tmp";
    long n = argc > 2 ? atol(argv[2]) : 100000;
    char path[512], cmd[2200];
    snprintf(path, sizeof path, "%s/bench.sqlite", dir);
    snprintf(cmd, sizeof cmd, "rm -f '%s' '%s'-wal '%s'-shm '%s'.run*.h5", path, path, path, path);
    if (system(cmd) != 0) return 1;
    bs_err err;
    bs_err_clear(&err);
    cat_db *cat = NULL;
    int64_t run = 0;
    const cat_run_info info = {"screen",          "{\"mesh\":8}", "bench", 1, "localhost",
                               "bench_catalogue", "bench.h5",     NULL,    0};
    if (cat_open(path, CAT_RW, &cat, &err) != 0 || cat_run_begin(cat, &info, &run, &err) != 0) {
        fprintf(stderr, "bench_catalogue: %s\n", err.msg);
        return 1;
    }
    /* The texts are made first so that the timing holds only the catalogue's work. */
    char **text = malloc((size_t)n * sizeof *text);
    size_t *len = malloc((size_t)n * sizeof *len);
    char *buf = malloc(65536);
    if (!text || !len || !buf) return 1;
    size_t bytes = 0;
    for (long i = 0; i < n; i++) {
        char id[32];
        snprintf(id, sizeof id, "bench-%06ld", i);
        len[i] = make_diag(buf, 65536, id, i);
        if (!(text[i] = malloc(len[i] + 1))) return 1;
        memcpy(text[i], buf, len[i] + 1);
        bytes += len[i];
    }
    double t0 = now();
    clock_t c0 = clock();
    for (long i = 0; i < n; i++) {
        char id[32];
        snprintf(id, sizeof id, "bench-%06ld", i);
        if (cat_result_put_text(cat, run, id, CAT_RES_OK, NULL, text[i], len[i], (int)(i % 64), 1.0, &err) !=
            0) {
            fprintf(stderr, "bench_catalogue: %s\n", err.msg);
            return 1;
        }
    }
    if (cat_run_end(cat, run, CAT_RUN_DONE, &err) != 0) {
        fprintf(stderr, "bench_catalogue: %s\n", err.msg);
        return 1;
    }
    double t1 = now();
    double cpu = (double)(clock() - c0) / CLOCKS_PER_SEC;
    long rows = 0, cand = 0;
    if (cat_query(cat, "SELECT * FROM summary", count_rows, &rows, &err) != 0 ||
        cat_query(cat, "SELECT * FROM candidates", count_rows, &cand, &err) != 0) {
        fprintf(stderr, "bench_catalogue: %s\n", err.msg);
        return 1;
    }
    double t2 = now();
    cat_close(cat, NULL);
    /* CPU time is shown beside wall time because a shared machine inflates the latter. */
    printf("bench_catalogue: %ld results (%.1f MB of JSON, batches of %d) in %.2f s wall, %.2f s CPU: %.0f "
           "rows/s"
           " (%.0f rows per CPU second)\n",
           n, (double)bytes / 1e6, CAT_BATCH_ROWS, t1 - t0, cpu, (double)n / (t1 - t0), (double)n / cpu);
    printf("bench_catalogue: summary (%ld rows) + candidates (%ld rows) views in %.2f s\n", rows, cand,
           t2 - t1);
    for (long i = 0; i < n; i++)
        free(text[i]);
    free(text);
    free(len);
    free(buf);
    return rows == n ? 0 : 1;
}
