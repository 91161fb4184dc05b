/* Tests of the folded, batched H(k) builder against the direct sum over R, and of dH/dk against
 * central finite differences. The direct sum is the definition of H(k) in the hopping-table
 * convention (DESIGN.md), so agreement to round-off is the reference. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <complex.h>
#include <math.h>
#include <stdlib.h>

#include "bandsieve/hk.h"
#include "bandsieve/model.h"

/* A random Hermitian model with R in [-2,2]^3 (all 125 vectors), weights 1..3 and H(-R) = H(R)^dagger. */
static tb_model *random_model(int norb, uint64_t seed)
{
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(tb_model_create(norb, 125, 0, &m, &err), 0);
    int r = 0;
    for (int a = -2; a <= 2; a++)
        for (int b = -2; b <= 2; b++)
            for (int c = -2; c <= 2; c++, r++) {
                m->R[r][0] = a;
                m->R[r][1] = b;
                m->R[r][2] = c;
                m->deg[r] = 1 + (abs(a + 2 * b + 3 * c) % 3);
            }
    size_t nn = (size_t)norb * norb;
    for (r = 0; r < m->nR; r++) {
        int minus[3] = {-m->R[r][0], -m->R[r][1], -m->R[r][2]};
        int rm = tb_model_find_R(m, minus);
        m->deg[rm] = m->deg[r];
        if (rm < r) continue;
        for (int i = 0; i < norb; i++)
            for (int j = 0; j < norb; j++) {
                double complex h = (bs_test_uniform(&seed) - 0.5) + I * (bs_test_uniform(&seed) - 0.5);
                m->H[r * nn + (size_t)i * norb + j] = h;
                m->H[rm * nn + (size_t)j * norb + i] = conj(h);
            }
    }
    /* Make H(0) exactly Hermitian. */
    int r0 = tb_model_find_R(m, (int[3]){0, 0, 0});
    for (int i = 0; i < norb; i++) {
        for (int j = 0; j < i; j++)
            m->H[r0 * nn + (size_t)i * norb + j] = conj(m->H[r0 * nn + (size_t)j * norb + i]);
        m->H[r0 * nn + (size_t)i * norb + i] = creal(m->H[r0 * nn + (size_t)i * norb + i]);
    }
    return m;
}

static double max_diff(const double complex *a, const double complex *b, size_t n)
{
    double d = 0;
    for (size_t i = 0; i < n; i++)
        d = fmax(d, cabs(a[i] - b[i]));
    return d;
}

static void test_batched_matches_direct_sum(void **state)
{
    (void)state;
    int norb = 7, nk = 37;
    tb_model *m = random_model(norb, 12345);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(tb_model_validate(m, 1e-12, "random", &err), 0);
    hk_engine *e = NULL;
    assert_int_equal(hk_create(m, 16, &e, &err), 0);
    uint64_t seed = 99;
    double *k = malloc(3 * nk * sizeof *k);
    for (int i = 0; i < 3 * nk; i++)
        k[i] = bs_test_uniform(&seed) * 2 - 0.5;
    size_t nn = (size_t)norb * norb;
    double complex *H = malloc(16 * nn * sizeof *H), *Hd = malloc(nn * sizeof *Hd);
    for (int j0 = 0; j0 < nk; j0 += 16) {
        int nb = nk - j0 < 16 ? nk - j0 : 16;
        assert_int_equal(hk_build(e, nb, k + 3 * j0, H, &err), 0);
        for (int j = 0; j < nb; j++) {
            hk_build_direct(m, k + 3 * (j0 + j), Hd);
            /* Round-off of ~125 terms of size 1: 1e-12 is generous and still catches any wrong
             * sign, fold or weight (those give O(1) differences). */
            assert_true(max_diff(H + j * nn, Hd, nn) < 1e-12);
        }
    }
    /* A batch larger than the engine's is refused, not overrun. */
    assert_int_equal(hk_build(e, 17, k, H, &err), BS_EINVAL);
    free(k);
    free(H);
    free(Hd);
    hk_free(e);
    tb_model_free(m);
}

/* The derivative buffers grow on first use: a full batch of values, then a full batch with
 * derivatives, then values again on the same engine must each equal the direct sum over R. */
static void test_batches_before_and_after_derivatives(void **state)
{
    (void)state;
    int norb = 6, nk = 4;
    tb_model *m = random_model(norb, 4242);
    bs_err err;
    bs_err_clear(&err);
    hk_engine *e = NULL;
    assert_int_equal(hk_create(m, nk, &e, &err), 0);
    size_t nn = (size_t)norb * norb;
    double k[12] = {0.1, 0.2, 0.3, -0.4, 0.05, 0.25, 0.5, 0.5, 0.0, 0.33, -0.21, 0.17};
    double complex *H = malloc(nk * nn * sizeof *H), *dH = malloc(3 * nk * nn * sizeof *dH);
    double complex *Hd = malloc(nn * sizeof *Hd);
    for (int pass = 0; pass < 3; pass++) {
        if (pass == 1)
            assert_int_equal(hk_build_deriv(e, nk, k, H, dH, &err), 0);
        else
            assert_int_equal(hk_build(e, nk, k, H, &err), 0);
        for (int j = 0; j < nk; j++) {
            hk_build_direct(m, k + 3 * j, Hd);
            for (size_t p = 0; p < nn; p++)
                assert_true(cabs(H[j * nn + p] - Hd[p]) < 1e-12);
        }
    }
    free(H);
    free(dH);
    free(Hd);
    hk_free(e);
    tb_model_free(m);
}

static void test_derivative_matches_finite_difference(void **state)
{
    (void)state;
    int norb = 5;
    tb_model *m = random_model(norb, 777);
    bs_err err;
    bs_err_clear(&err);
    hk_engine *e = NULL;
    assert_int_equal(hk_create(m, 4, &e, &err), 0);
    size_t nn = (size_t)norb * norb;
    double k[3] = {0.123, -0.377, 0.41};
    double complex *H = malloc(nn * sizeof *H), *dH = malloc(3 * nn * sizeof *dH);
    double complex *Hp = malloc(nn * sizeof *Hp), *Hm = malloc(nn * sizeof *Hm);
    assert_int_equal(hk_build_deriv(e, 1, k, H, dH, &err), 0);
    const double h = 1e-5;
    for (int i = 0; i < 3; i++) {
        double kp[3] = {k[0], k[1], k[2]}, km[3] = {k[0], k[1], k[2]};
        kp[i] += h;
        km[i] -= h;
        hk_build_direct(m, kp, Hp);
        hk_build_direct(m, km, Hm);
        double worst = 0;
        for (size_t p = 0; p < nn; p++)
            worst = fmax(worst, cabs((Hp[p] - Hm[p]) / (2 * h) - dH[i * nn + p]));
        /* Central difference error ~ h^2 |H'''| ~ 1e-10 * (2 pi * 2)^3 ~ 2e-7; round-off ~ 1e-16/h. */
        assert_true(worst < 1e-5);
    }
    free(H);
    free(dH);
    free(Hp);
    free(Hm);
    hk_free(e);
    tb_model_free(m);
}

/* Partial sums: fixing k3 and then k1 must reproduce the direct sum at every point of the line. */
static void test_reduced_engines_match_direct_sum(void **state)
{
    (void)state;
    int norb = 6;
    tb_model *m = random_model(norb, 4242);
    bs_err err;
    bs_err_clear(&err);
    hk_engine *full = NULL, *plane = NULL, *line = NULL;
    assert_int_equal(hk_create(m, 8, &full, &err), 0);
    assert_int_equal(hk_reduce(full, 2, 0.37, 8, &plane, &err), 0);
    assert_int_equal(hk_reduce(plane, 0, -0.21, 8, &line, &err), 0);
    size_t nn = (size_t)norb * norb;
    double complex *H = malloc(8 * nn * sizeof *H), *Hd = malloc(nn * sizeof *Hd);
    double k[24];
    for (int j = 0; j < 8; j++) {
        k[3 * j] = -0.21;
        k[3 * j + 1] = 0.1 * j - 0.3;
        k[3 * j + 2] = 0.37;
    }
    assert_int_equal(hk_build(line, 8, k, H, &err), 0);
    for (int j = 0; j < 8; j++) {
        hk_build_direct(m, k + 3 * j, Hd);
        assert_true(max_diff(H + j * nn, Hd, nn) < 1e-12);
    }
    assert_int_equal(hk_build(plane, 8, k, H, &err), 0);
    for (int j = 0; j < 8; j++) {
        hk_build_direct(m, k + 3 * j, Hd);
        assert_true(max_diff(H + j * nn, Hd, nn) < 1e-12);
    }
    /* Re-reducing for another value reuses the structure and stays exact. */
    assert_int_equal(hk_rereduce(line, plane, 0.45, &err), 0);
    for (int j = 0; j < 8; j++)
        k[3 * j] = 0.45;
    assert_int_equal(hk_build(line, 8, k, H, &err), 0);
    for (int j = 0; j < 8; j++) {
        hk_build_direct(m, k + 3 * j, Hd);
        assert_true(max_diff(H + j * nn, Hd, nn) < 1e-12);
    }
    /* A reduced engine refuses a source it was not made from. */
    assert_int_equal(hk_rereduce(line, full, 0.1, &err), BS_EINVAL);
    free(H);
    free(Hd);
    hk_free(line);
    hk_free(plane);
    hk_free(full);
    tb_model_free(m);
}

/* The line cache gives the direct sum for strings on a plane, for a change of plane, and for a
 * batch that is not a line (fallback to the full engine). */
static void test_line_cache_matches_direct_sum(void **state)
{
    (void)state;
    int norb = 5, nb = 12;
    tb_model *m = random_model(norb, 31337);
    bs_err err;
    bs_err_clear(&err);
    hk_engine *full = NULL;
    hk_lines *lines = NULL;
    assert_int_equal(hk_create(m, nb, &full, &err), 0);
    assert_int_equal(hk_lines_create(full, &lines, &err), 0);
    size_t nn = (size_t)norb * norb;
    double complex *H = malloc(nb * nn * sizeof *H), *Hd = malloc(nn * sizeof *Hd);
    double k[36];
    uint64_t seed = 5;
    /* Strings along k1 at k3 = 0.5 and several k2 (a Wilson-loop family), then along k2 at k1 = 0,
     * then random points. */
    for (int family = 0; family < 3; family++)
        for (int s = 0; s < 4; s++) {
            for (int j = 0; j < nb; j++) {
                double t = (double)j / nb, v = 0.1 * s + 0.05;
                if (family == 0) {
                    k[3 * j] = t;
                    k[3 * j + 1] = v;
                    k[3 * j + 2] = 0.5;
                } else if (family == 1) {
                    k[3 * j] = 0.0;
                    k[3 * j + 1] = t;
                    k[3 * j + 2] = v;
                } else
                    for (int d = 0; d < 3; d++)
                        k[3 * j + d] = bs_test_uniform(&seed);
            }
            assert_int_equal(hk_lines_build(lines, nb, k, H, &err), 0);
            for (int j = 0; j < nb; j++) {
                hk_build_direct(m, k + 3 * j, Hd);
                assert_true(max_diff(H + j * nn, Hd, nn) < 1e-12);
            }
        }
    free(H);
    free(Hd);
    hk_lines_free(lines);
    hk_free(full);
    tb_model_free(m);
}

/* The borrowing engine (no table: m's folded blocks times their phases) against the direct sum,
 * the definition: H(k), dH/dk, a plane and a line reduced from it, re-reduction and the line
 * cache. The model is folded, with one pair of R, -R perturbed by 1e-13 so that both of its blocks
 * stay stored (the half-weight path). Tolerance 1e-12 eV: round-off of sums of 125 terms of size
 * ~1 (common practice), as for the table engine above. */
static void test_borrowed_engine_matches_direct_sum(void **state)
{
    (void)state;
    int norb = 6, nk = 8;
    tb_model *m = random_model(norb, 2718);
    size_t nn = (size_t)norb * norb;
    int r1 = tb_model_find_R(m, (int[3]){1, 2, 0});
    m->H[r1 * nn + 1] += 1e-13;
    tb_model_fold(m);
    assert_non_null(m->hsrc);
    int stored = 0;
    for (int r = 0; r < m->nR; r++)
        stored += m->hsrc[r] >= 0;
    assert_int_equal(stored, 64); /* R = 0, 62 folded pairs, and both blocks of the perturbed pair */
    bs_err err;
    bs_err_clear(&err);
    hk_engine *full = NULL, *plane = NULL, *line = NULL, *table = NULL;
    assert_int_equal(hk_create_borrowed(m, nk, &full, &err), 0);
    double complex *H = malloc(nk * nn * sizeof *H), *Hd = malloc(nn * sizeof *Hd);
    double complex *dH = malloc(3 * nk * nn * sizeof *dH), *Hp = malloc(nn * sizeof *Hp);
    double k[24];
    uint64_t seed = 17;
    for (int i = 0; i < 3 * nk; i++)
        k[i] = bs_test_uniform(&seed) * 2 - 0.5;
    assert_int_equal(hk_build(full, nk, k, H, &err), 0);
    for (int j = 0; j < nk; j++) {
        hk_build_direct(m, k + 3 * j, Hd);
        assert_true(max_diff(H + j * nn, Hd, nn) < 1e-12);
    }
    /* dH/dk_i against a central difference of the direct sum, step 1e-5: the error h^2 |d3H/dk3| / 6
     * is below 1e-6 eV here (|R| <= 2, hoppings <= 1); 1e-4 eV is ample (common practice). */
    assert_int_equal(hk_build_deriv(full, nk, k, H, dH, &err), 0);
    for (int j = 0; j < nk; j++)
        for (int i = 0; i < 3; i++) {
            double kp[3] = {k[3 * j], k[3 * j + 1], k[3 * j + 2]}, km[3] = {kp[0], kp[1], kp[2]}, h = 1e-5;
            kp[i] += h;
            km[i] -= h;
            hk_build_direct(m, kp, Hp);
            hk_build_direct(m, km, Hd);
            for (size_t p = 0; p < nn; p++)
                Hd[p] = (Hp[p] - Hd[p]) / (2 * h);
            assert_true(max_diff(dH + (size_t)(j * 3 + i) * nn, Hd, nn) < 1e-4);
        }
    assert_int_equal(hk_reduce(full, 2, 0.37, nk, &plane, &err), 0);
    assert_int_equal(hk_reduce(plane, 0, -0.21, nk, &line, &err), 0);
    for (int j = 0; j < nk; j++) {
        k[3 * j] = -0.21;
        k[3 * j + 1] = 0.1 * j - 0.3;
        k[3 * j + 2] = 0.37;
    }
    assert_int_equal(hk_build(line, nk, k, H, &err), 0);
    for (int j = 0; j < nk; j++) {
        hk_build_direct(m, k + 3 * j, Hd);
        assert_true(max_diff(H + j * nn, Hd, nn) < 1e-12);
    }
    assert_int_equal(hk_rereduce(plane, full, -0.4, &err), 0);
    assert_int_equal(hk_rereduce(line, plane, 0.45, &err), 0);
    for (int j = 0; j < nk; j++) {
        k[3 * j] = 0.45;
        k[3 * j + 2] = -0.4;
    }
    assert_int_equal(hk_build(line, nk, k, H, &err), 0);
    for (int j = 0; j < nk; j++) {
        hk_build_direct(m, k + 3 * j, Hd);
        assert_true(max_diff(H + j * nn, Hd, nn) < 1e-12);
    }
    hk_lines *lines = NULL;
    assert_int_equal(hk_lines_create(full, &lines, &err), 0);
    for (int s = 0; s < 3; s++) {
        for (int j = 0; j < nk; j++) {
            k[3 * j] = (double)j / nk;
            k[3 * j + 1] = 0.1 * s + 0.05;
            k[3 * j + 2] = 0.5;
        }
        assert_int_equal(hk_lines_build(lines, nk, k, H, &err), 0);
        for (int j = 0; j < nk; j++) {
            hk_build_direct(m, k + 3 * j, Hd);
            assert_true(max_diff(H + j * nn, Hd, nn) < 1e-12);
        }
    }
    /* Below BS_HK_BORROW_BYTES hk_create keeps the table: the same values to round-off. */
    assert_int_equal(hk_create(m, nk, &table, &err), 0);
    assert_int_equal(hk_build(table, nk, k, dH, &err), 0);
    for (int j = 0; j < nk; j++)
        assert_true(max_diff(dH + j * nn, H + j * nn, nn) < 1e-12);
    hk_free(table);
    hk_lines_free(lines);
    free(H);
    free(Hd);
    free(dH);
    free(Hp);
    hk_free(line);
    hk_free(plane);
    hk_free(full);
    tb_model_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_batched_matches_direct_sum),
        cmocka_unit_test(test_derivative_matches_finite_difference),
        cmocka_unit_test(test_batches_before_and_after_derivatives),
        cmocka_unit_test(test_reduced_engines_match_direct_sum),
        cmocka_unit_test(test_line_cache_matches_direct_sum),
        cmocka_unit_test(test_borrowed_engine_matches_direct_sum),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
