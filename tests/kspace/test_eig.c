/* Tests of the LAPACK eigensolver wrappers: residuals ||H v - e v||, orthonormality, agreement of
 * the index-range solver with the full one. Residual bounds ~ n * eps * ||H|| are common practice. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <complex.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/eig.h"

static void random_hermitian(int n, uint64_t seed, double complex *A)
{
    for (int j = 0; j < n; j++)
        for (int i = 0; i <= j; i++) {
            double complex v =
                (bs_test_uniform(&seed) - 0.5) + (i == j ? 0 : I * (bs_test_uniform(&seed) - 0.5));
            A[i + j * n] = v;
            A[j + i * n] = conj(v);
        }
}

static void test_vectors_diagonalise(void **state)
{
    (void)state;
    int n = 40;
    double complex *A = malloc((size_t)n * n * sizeof *A), *V = malloc((size_t)n * n * sizeof *V);
    double *w = malloc(n * sizeof *w), *w2 = malloc(n * sizeof *w2);
    random_hermitian(n, 5, A);
    memcpy(V, A, (size_t)n * n * sizeof *A);
    eig_ws *ws = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(eig_create(n, &ws, &err), 0);
    assert_int_equal(eig_vectors(ws, V, w, &err), 0);
    for (int j = 0; j < n; j++) {
        if (j > 0) assert_true(w[j] >= w[j - 1]);
        double res = 0;
        for (int i = 0; i < n; i++) {
            double complex s = 0;
            for (int l = 0; l < n; l++)
                s += A[i + l * n] * V[l + j * n];
            res = fmax(res, cabs(s - w[j] * V[i + j * n]));
        }
        assert_true(res < 1e-12);
    }
    /* Values-only and the index range 10..14 agree with the full solution. */
    double complex *B = malloc((size_t)n * n * sizeof *B), *Z = malloc((size_t)n * 5 * sizeof *Z);
    memcpy(B, A, (size_t)n * n * sizeof *A);
    assert_int_equal(eig_values(ws, B, w2, &err), 0);
    for (int j = 0; j < n; j++)
        assert_true(fabs(w2[j] - w[j]) < 1e-12);
    memcpy(B, A, (size_t)n * n * sizeof *A);
    assert_int_equal(eig_range(ws, B, 10, 14, w2, Z, &err), 0);
    for (int j = 0; j < 5; j++) {
        assert_true(fabs(w2[j] - w[10 + j]) < 1e-12);
        double complex ov = 0;
        for (int i = 0; i < n; i++)
            ov += conj(V[i + (10 + j) * n]) * Z[i + j * n];
        assert_true(fabs(cabs(ov) - 1.0) < 1e-9);
    }
    assert_int_equal(eig_range(ws, B, 5, 50, w2, NULL, &err), BS_EINVAL);
    eig_free(ws);
    free(A);
    free(V);
    free(w);
    free(w2);
    free(B);
    free(Z);
}

static void test_bad_size_refused(void **state)
{
    (void)state;
    eig_ws *ws = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(eig_create(0, &ws, &err), BS_EINVAL);
    assert_null(ws);
    eig_free(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_vectors_diagonalise),
        cmocka_unit_test(test_bad_size_refused),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
