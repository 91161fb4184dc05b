/* Benchmark (not a test): the cost of a phase path against diagnosing its points one by one.
 * For each model the path runs over a range with n samples (closings refined to 1e-5); the
 * alternative is the full diagnosis (diag_run) at the same n points, which resolves no closing
 * better than the spacing. Reported: seconds of each, their ratio, gap evaluations and diagnoses.
 * Times are CPU seconds of this process (clock()), so other load on the machine does not count.
 * Usage: bench_path [SAMPLES] */
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "bandsieve/diagnosis.h"
#include "bandsieve/phasepath.h"

typedef struct bench_case {
    const char *spec, *param;
    double lo, hi;
} bench_case;

int main(int argc, char **argv)
{
    int n = argc > 1 ? atoi(argv[1]) : 41;
    if (n < 3) n = 3;
    const bench_case cases[] = {
        {"haldane", "M", -1.0, 1.0},       {"kane_mele:lambda_R=0.05", "lambda_v", 0.0, 0.6},
        {"bhz", "M", -1.0, 2.0},           {"fkm", "dt", -0.5, 0.6},
        {"fkm:stag=0.3", "dt", -0.5, 0.6},
    };
    printf("%-26s %8s %10s %10s %7s %8s %6s\n", "model", "points", "path s", "each s", "ratio", "gap evs",
           "diags");
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        bs_err err;
        bs_err_clear(&err);
        pp_source *s = NULL;
        if (pp_source_builtin(cases[c].spec, cases[c].param, &s, &err) != 0) {
            fprintf(stderr, "%s\n", err.msg);
            return 1;
        }
        pp_opts o;
        pp_opts_init(&o);
        o.nsamples = n;
        o.diag.seed = 1;
        pp_result r;
        pp_result_init(&r);
        double t0 = (double)clock() / CLOCKS_PER_SEC;
        if (pp_run(s, cases[c].param, cases[c].lo, cases[c].hi, &o, &r, &err) != 0) {
            fprintf(stderr, "%s\n", err.msg);
            return 1;
        }
        double t_path = (double)clock() / CLOCKS_PER_SEC - t0;
        t0 = (double)clock() / CLOCKS_PER_SEC;
        for (int i = 0; i < n; i++) {
            double x = cases[c].lo + (cases[c].hi - cases[c].lo) * i / (n - 1);
            tb_model *m = NULL;
            res_diag d;
            res_init(&d);
            if (pp_source_model(s, x, &m, &err) != 0 || diag_run(m, &o.diag, &d, &err) != 0) {
                fprintf(stderr, "%s\n", err.msg);
                return 1;
            }
            res_clear(&d);
            tb_model_free(m);
        }
        double t_each = (double)clock() / CLOCKS_PER_SEC - t0;
        printf("%-26s %8d %10.3f %10.3f %7.2f %8lld %6lld\n", cases[c].spec, n, t_path, t_each,
               t_path / t_each, r.gap_evals, r.diag_runs);
        pp_result_clear(&r);
        pp_source_free(s);
    }
    return 0;
}
