/* Real harmonics and their rotation matrices against the functions rotated numerically, the
 * group law, the named polynomials, and the SU(2) -> SO(3) relation of the spin matrices. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <cmocka.h>

#include <complex.h>
#include <math.h>
#include <string.h>

#include "bandsieve/realharm.h"
#include "testutil.h"

/* A random orthogonal matrix: a random rotation (axis, angle), times -1 when improper. */
static void random_orthogonal(uint64_t *s, int improper, double R[3][3])
{
    double n[3], len = 0;
    for (int i = 0; i < 3; i++) {
        n[i] = 2 * bs_test_uniform(s) - 1;
        len += n[i] * n[i];
    }
    len = sqrt(len);
    for (int i = 0; i < 3; i++)
        n[i] /= len;
    double th = 2 * M_PI * bs_test_uniform(s), c = cos(th), sn = sin(th);
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            double e = 0;
            for (int k = 0; k < 3; k++) {
                int eps = (i == j || j == k || i == k) ? 0 : (((j - i + 3) % 3 == 1) ? 1 : -1);
                e += eps * n[k];
            }
            /* Rodrigues' formula (common practice): R = c 1 + s [n]x + (1 - c) n n^T */
            R[i][j] = (i == j ? c : 0) - sn * e + (1 - c) * n[i] * n[j];
            if (improper) R[i][j] = -R[i][j];
        }
}

static void matmul3(const double A[3][3], const double B[3][3], double C[3][3])
{
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++) {
            C[i][j] = 0;
            for (int k = 0; k < 3; k++)
                C[i][j] += A[i][k] * B[k][j];
        }
}

/* Y_idx(R^T r) = sum_j Y_j(r) D_j,idx at points not used by the fit: the definition of D. */
static void test_rotation_matches_rotated_functions(void **state)
{
    uint64_t s = 11;
    for (int trial = 0; trial < 20; trial++) {
        double R[3][3];
        random_orthogonal(&s, trial % 2, R);
        for (int l = 0; l <= RH_LMAX; l++) {
            int nm = 2 * l + 1;
            double D[49];
            bs_err err;
            bs_err_clear(&err);
            assert_int_equal(rh_rotation(l, (const double(*)[3])R, D, &err), 0);
            for (int p = 0; p < 5; p++) {
                double r[3] = {2 * bs_test_uniform(&s) - 1, 2 * bs_test_uniform(&s) - 1,
                               2 * bs_test_uniform(&s) - 1};
                double rr[3];
                for (int a = 0; a < 3; a++)
                    rr[a] = R[0][a] * r[0] + R[1][a] * r[1] + R[2][a] * r[2];
                for (int idx = 0; idx < nm; idx++) {
                    double sum = 0;
                    for (int j = 0; j < nm; j++)
                        sum += rh_eval(l, j, r) * D[j + idx * nm];
                    /* 1e-10: the fit is exact up to round-off of ~50-point least squares */
                    assert_true(fabs(sum - rh_eval(l, idx, rr)) < 1e-10);
                }
            }
        }
    }
}

/* D(R1 R2) = D(R1) D(R2) and D orthogonal: a representation (common practice). */
static void test_group_law(void **state)
{
    uint64_t s = 5;
    for (int trial = 0; trial < 10; trial++) {
        double A[3][3], B[3][3], C[3][3];
        random_orthogonal(&s, trial % 2, A);
        random_orthogonal(&s, trial / 5, B);
        matmul3(A, B, C);
        for (int l = 0; l <= RH_LMAX; l++) {
            int nm = 2 * l + 1;
            double DA[49], DB[49], DC[49];
            assert_int_equal(rh_rotation(l, (const double(*)[3])A, DA, NULL), 0);
            assert_int_equal(rh_rotation(l, (const double(*)[3])B, DB, NULL), 0);
            assert_int_equal(rh_rotation(l, (const double(*)[3])C, DC, NULL), 0);
            for (int i = 0; i < nm; i++)
                for (int j = 0; j < nm; j++) {
                    double ab = 0, dd = 0;
                    for (int k = 0; k < nm; k++) {
                        ab += DA[i + k * nm] * DB[k + j * nm];
                        dd += DA[k + i * nm] * DA[k + j * nm];
                    }
                    assert_true(fabs(ab - DC[i + j * nm]) < 1e-10);
                    assert_true(fabs(dd - (i == j)) < 1e-10);
                }
        }
    }
}

/* The named real harmonics are the named polynomials (times a positive constant) on the sphere:
 * common chemistry definitions (common practice). */
static double poly(const char *name, const double r[3])
{
    double x = r[0], y = r[1], z = r[2];
    if (!strcmp(name, "px")) return x;
    if (!strcmp(name, "py")) return y;
    if (!strcmp(name, "pz")) return z;
    if (!strcmp(name, "dxy")) return x * y;
    if (!strcmp(name, "dxz")) return x * z;
    if (!strcmp(name, "dyz")) return y * z;
    if (!strcmp(name, "dx2-y2")) return x * x - y * y;
    if (!strcmp(name, "dz2")) return 3 * z * z - 1;
    if (!strcmp(name, "fz3")) return z * (5 * z * z - 3);
    if (!strcmp(name, "fxz2")) return x * (5 * z * z - 1);
    if (!strcmp(name, "fyz2")) return y * (5 * z * z - 1);
    if (!strcmp(name, "fxyz")) return x * y * z;
    if (!strcmp(name, "fz(x2-y2)")) return z * (x * x - y * y);
    if (!strcmp(name, "fx(x2-3y2)")) return x * (x * x - 3 * y * y);
    if (!strcmp(name, "fy(3x2-y2)")) return y * (3 * x * x - y * y);
    return NAN;
}

static void test_named_polynomials(void **state)
{
    uint64_t s = 3;
    for (int l = 1; l <= RH_LMAX; l++)
        for (int idx = 0; idx <= 2 * l; idx++) {
            const char *name = rh_name(l, idx);
            assert_int_equal(rh_index(l, name), idx);
            double ratio = NAN;
            for (int p = 0; p < 10; p++) {
                double r[3], len = 0;
                for (int a = 0; a < 3; a++) {
                    r[a] = 2 * bs_test_uniform(&s) - 1;
                    len += r[a] * r[a];
                }
                for (int a = 0; a < 3; a++)
                    r[a] /= sqrt(len);
                double q = poly(name, r);
                assert_false(isnan(q));
                if (fabs(q) < 1e-3) continue;
                double rt = rh_eval(l, idx, r) / q;
                if (isnan(ratio)) ratio = rt;
                assert_true(rt > 0);
                assert_true(fabs(rt - ratio) < 1e-10 * fabs(ratio));
            }
        }
}

/* U(R) sigma_a U(R)^+ = sum_b R_ba sigma_b (spin rotates as a vector), and U(R1 R2) = +-U(R1)U(R2):
 * the SU(2) -> SO(3) homomorphism (common practice). */
static void test_spin_rotation(void **state)
{
    const double complex sig[3][4] = {{0, 1, 1, 0}, {0, I, -I, 0}, {1, 0, 0, -1}};
    uint64_t s = 17;
    for (int trial = 0; trial < 10; trial++) {
        double R[3][3];
        random_orthogonal(&s, trial % 2, R);
        double complex U[4];
        rh_spin_rotation((const double(*)[3])R, U);
        double sgn = (trial % 2) ? -1.0 : 1.0;
        for (int a = 0; a < 3; a++) {
            double complex T[4] = {0};
            for (int i = 0; i < 2; i++)
                for (int j = 0; j < 2; j++)
                    for (int k = 0; k < 2; k++)
                        for (int l = 0; l < 2; l++)
                            T[i + 2 * l] += U[i + 2 * j] * sig[a][j + 2 * k] * conj(U[l + 2 * k]);
            for (int e = 0; e < 4; e++) {
                double complex want = 0;
                for (int b = 0; b < 3; b++)
                    want += sgn * R[b][a] * sig[b][e];
                assert_true(cabs(T[e] - want) < 1e-12);
            }
        }
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_rotation_matches_rotated_functions),
        cmocka_unit_test(test_group_law),
        cmocka_unit_test(test_named_polynomials),
        cmocka_unit_test(test_spin_rotation),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
