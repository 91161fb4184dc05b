/* Benchmark (not a test) of approximate symmetry (symfit.h), in two parts.
 * 1. The noise sweep of the README: the Fu-Kane-Mele strong TI (Phys. Rev. Lett. 98, 106803 (2007))
 *    with fit noise (fitnoise.h) of 1e-6 .. 1e-1 of its largest hopping, one seed: breaking, gap,
 *    margin, class and confidence, as a Markdown table.
 * 2. The cost: on a realistic-size model (a 2x2x2 supercell of the same model, 32 states, with fit
 *    noise of 1e-3), the time of the breaking measure, the symmetrisation and the spin-layout
 *    check, divided by the time of the whole diagnosis, measured in one run so the ratio shares the
 *    machine's state. Single-threaded BLAS, as each MPI rank runs.
 * Usage: bench_symfit [seed] [supercell factor n (n x n x n, default 2)] */
#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "bandsieve/diagnosis.h"
#include "bandsieve/fitnoise.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/symfit.h"
#include "bandsieve/symmetry.h"

void openblas_set_num_threads(int num_threads);

static double now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return t.tv_sec + 1e-9 * t.tv_nsec;
}

static void die(const char *what, const bs_err *e)
{
    fprintf(stderr, "bench_symfit: %s: %s\n", what, e->msg);
    exit(1);
}

static int find_R(const tb_model *m, const int R[3])
{
    for (int r = 0; r < m->nR; r++)
        if (m->R[r][0] == R[0] && m->R[r][1] == R[1] && m->R[r][2] == R[2]) return r;
    return -1;
}

/* The n x n x n supercell of m (same spin layout, blocks): spatial orbital c * ns + o is orbital o
 * in cell c = c1 + n c2 + n^2 c3; H'(R')[(c,a),(d,b)] = H(n R' + d - c)[a, b]. */
static tb_model *supercell(const tb_model *m, int n)
{
    int nc = n * n * n, ns = m->nspatial, norb = m->norb * nc;
    int span = 0;
    for (int r = 0; r < m->nR; r++)
        for (int d = 0; d < 3; d++)
            span = abs(m->R[r][d]) > span ? abs(m->R[r][d]) : span;
    int w = span / n + 2, side = 2 * w + 1, nR = side * side * side;
    tb_model *s = NULL;
    bs_err err;
    if (tb_model_create(norb, nR, m->spinful, &s, &err) != 0) die("supercell", &err);
    s->dim = 3;
    s->spin_layout = m->spin_layout;
    s->nocc = m->nocc * nc;
    snprintf(s->id, sizeof s->id, "fkm-supercell-%d", n);
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            s->lattice[i][j] = n * m->lattice[i][j];
    for (int c = 0; c < nc; c++)
        for (int o = 0; o < ns; o++) {
            int cv[3] = {c % n, (c / n) % n, c / (n * n)};
            for (int d = 0; d < 3; d++)
                s->orb_pos[c * ns + o][d] = (m->orb_pos[o][d] + cv[d]) / n;
            s->orb_l[c * ns + o] = m->orb_l[o];
        }
    int k = 0;
    size_t n2 = (size_t)norb * norb, m2 = (size_t)m->norb * m->norb;
    for (int x = -w; x <= w; x++)
        for (int y = -w; y <= w; y++)
            for (int z = -w; z <= w; z++, k++) {
                s->R[k][0] = x;
                s->R[k][1] = y;
                s->R[k][2] = z;
                for (int a = 0; a < norb; a++)
                    for (int b = 0; b < norb; b++) {
                        int oa = tb_state_orbital(s, a), ob = tb_state_orbital(s, b);
                        int ca = oa / ns, cb = ob / ns;
                        int va[3] = {ca % n, (ca / n) % n, ca / (n * n)},
                            vb[3] = {cb % n, (cb / n) % n, cb / (n * n)};
                        int R[3] = {n * x + vb[0] - va[0], n * y + vb[1] - va[1], n * z + vb[2] - va[2]};
                        int r = find_R(m, R);
                        if (r < 0) continue;
                        int sa = tb_state_index(m, oa % ns, tb_state_spin(s, a));
                        int sb = tb_state_index(m, ob % ns, tb_state_spin(s, b));
                        s->H[k * n2 + (size_t)a * norb + b] =
                            m->H[r * m2 + (size_t)sa * m->norb + sb] / m->deg[r];
                    }
            }
    /* Drop the lattice vectors that hold nothing. */
    int keep = 0;
    for (int r = 0; r < nR; r++) {
        int any = 0;
        for (size_t i = 0; i < n2 && !any; i++)
            any = s->H[r * n2 + i] != 0;
        if (!any) continue;
        if (keep != r) {
            memcpy(s->R[keep], s->R[r], sizeof s->R[0]);
            memcpy(s->H + keep * n2, s->H + r * n2, n2 * sizeof *s->H);
        }
        keep++;
    }
    s->nR = keep;
    return s;
}

static res_diag diagnose(const tb_model *m, double *seconds)
{
    diag_opts o = {0};
    o.seed = 1;
    res_diag r;
    res_init(&r);
    bs_err err;
    double t0 = now();
    if (diag_run(m, &o, &r, &err) != 0) die(m->id, &err);
    *seconds = now() - t0;
    return r;
}

static void sweep(unsigned long long seed)
{
    tb_model *clean = NULL;
    bs_err err;
    if (lm_build("fkm", &clean, &err) != 0) die("fkm", &err);
    printf(
        "| noise (of largest hopping) | breaking (eV) | direct gap (eV) | margin | class | confidence |\n");
    printf("|---|---|---|---|---|---|\n");
    for (int e = -6; e <= -1; e++) {
        tb_model *m = NULL;
        if (fitnoise_apply(clean, pow(10.0, e), seed, &m, &err) != 0) die("noise", &err);
        double t;
        res_diag r = diagnose(m, &t);
        double breaking = r.restored ? r.breaking_ev : fmax(r.tr_break_ev, r.inv_break_ev);
        const char *bound = r.restored ? r.breaking_bound : "upper bound";
        char margin[32];
        if (r.restored)
            snprintf(margin, sizeof margin, "%.3g", r.margin);
        else
            snprintf(margin, sizeof margin, "%s", r.gap_direct_ev > 1e-4 ? "(not restored)" : "0 (gapless)");
        printf("| 1e%d | %.3g (%s) | %.3g | %s | %s | %.2f |\n", e, breaking, bound, r.gap_direct_ev, margin,
               res_class_name(r.cls), r.confidence);
        res_clear(&r);
        tb_model_free(m);
    }
    tb_model_free(clean);
}

static void cost(unsigned long long seed, int n)
{
    tb_model *clean = NULL, *big = NULL, *m = NULL;
    bs_err err;
    if (lm_build("fkm", &clean, &err) != 0) die("fkm", &err);
    big = supercell(clean, n);
    if (tb_model_validate(big, 1e-12, "supercell", &err) != 0) die("supercell", &err);
    if (fitnoise_apply(big, 1e-3, seed, &m, &err) != 0) die("noise", &err);
    double t_diag;
    res_diag r = diagnose(m, &t_diag);
    /* The added work, as diag_run does it: measure both operations, symmetrise, and the TR-only
     * detections of the spin-layout check (two alternative layouts). */
    sym_info *s = NULL;
    if (sym_detect(m, NULL, &s, &err) != 0) die("detect", &err);
    double t0 = now();
    symfit_break b;
    if (symfit_measure(m, s, SYMFIT_TR, NULL, &b, &err) != 0) die("measure", &err);
    if (symfit_measure(m, s, SYMFIT_INV, NULL, &b, &err) != 0) die("measure", &err);
    tb_model *hs = NULL;
    if (symfit_symmetrise(m, s, SYMFIT_TR | SYMFIT_INV, NULL, &hs, NULL, &err) != 0) die("symmetrise", &err);
    sym_opts so;
    sym_opts_default(&so);
    so.skip_inversion = 1;
    for (int alt = 0; alt < 2; alt++) {
        sym_info *a = NULL;
        if (sym_detect(m, &so, &a, &err) != 0) die("detect", &err);
        sym_info_free(a);
    }
    double t_sym = now() - t0;
    printf("\ncost on %s + fit noise 1e-3: %d states, %d lattice vectors; class %s (%.2f), margin %.3g\n",
           big->id, m->norb, m->nR, res_class_name(r.cls), r.confidence, r.margin);
    printf("diagnosis %.3f s, breaking measure + symmetrisation + layout check %.3f s: ratio %.4f\n", t_diag,
           t_sym, t_sym / t_diag);
    res_clear(&r);
    sym_info_free(s);
    tb_model_free(hs);
    tb_model_free(m);
    tb_model_free(big);
    tb_model_free(clean);
}

int main(int argc, char **argv)
{
    openblas_set_num_threads(1);
    unsigned long long seed = argc > 1 ? strtoull(argv[1], NULL, 10) : 5;
    int n = argc > 2 ? atoi(argv[2]) : 2;
    sweep(seed);
    cost(seed, n < 1 ? 1 : n);
    return 0;
}
