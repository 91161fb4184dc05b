/* Tests of the basis transformations: the spectrum of H(k) is unchanged (LAPACK's zheev is the
 * external reference), transformations undo exactly, and the explicit inversion operator stays
 * an exact symmetry, V(k) H(k) V(k)^dagger = H(-k), after every transformation. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/card.h"
#include "bandsieve/model.h"
#include "bandsieve/transform.h"
#include "testutil.h"

/* H(k) = sum_R exp(2 pi i k.R) H(R) / deg(R), row-major, by the definition (DESIGN.md). */
static void hk_direct(const tb_model *m, const double k[3], double complex *H)
{
    int n = m->norb;
    memset(H, 0, (size_t)n * n * sizeof *H);
    for (int r = 0; r < m->nR; r++) {
        double ph = 2 * M_PI * (k[0] * m->R[r][0] + k[1] * m->R[r][1] + k[2] * m->R[r][2]);
        double complex f = cexp(I * ph) / m->deg[r];
        for (int i = 0; i < n * n; i++)
            H[i] += f * tb_hop(m, r, i / n, i % n);
    }
}

static void eigenvalues(const tb_model *m, const double k[3], double *w)
{
    int n = m->norb;
    double complex *H = malloc((size_t)n * n * sizeof *H);
    hk_direct(m, k, H);
    assert_int_equal(LAPACKE_zheev(LAPACK_ROW_MAJOR, 'N', 'U', n, H, n, w), 0);
    free(H);
}

static const double kpts[4][3] = {
    {0.1, 0.27, 0.0}, {0.5, 0.0, 0.0}, {1.0 / 3, -1.0 / 3, 0.0}, {-0.41, 0.13, 0.0}};

/* Spectra agree within 1e-10 eV: both are zheev of unitarily equivalent matrices with entries of a
 * few eV, so the difference is round-off (~1e-14) far below this (common practice). */
static void expect_same_spectrum(const tb_model *a, const tb_model *b)
{
    assert_int_equal(a->norb, b->norb);
    double wa[16], wb[16];
    for (int q = 0; q < 4; q++) {
        eigenvalues(a, kpts[q], wa);
        eigenvalues(b, kpts[q], wb);
        for (int i = 0; i < a->norb; i++)
            assert_true(fabs(wa[i] - wb[i]) < 1e-10);
    }
}

/* Largest |V(k) H(k) V(k)^dagger - H(-k)| with V_ji = sign_i exp(2 pi i k.shift_i), j = perm(i):
 * the Bloch form of P c+_{i,R} P^-1 = sign_i c+_{j,-R+shift_i} (card.h). */
static double inversion_residual(const tb_model *m, const double k[3])
{
    int n = m->norb;
    double complex *H = calloc((size_t)n * n, sizeof *H), *Hm = calloc((size_t)n * n, sizeof *Hm);
    double complex *V = calloc((size_t)n * n, sizeof *V);
    double mk[3] = {-k[0], -k[1], -k[2]};
    hk_direct(m, k, H);
    hk_direct(m, mk, Hm);
    for (int i = 0; i < n; i++) {
        const int *s = m->inv_shift[i];
        V[(size_t)m->inv_perm[i] * n + i] =
            m->inv_sign[i] * cexp(2 * M_PI * I * (k[0] * s[0] + k[1] * s[1] + k[2] * s[2]));
    }
    double worst = 0;
    for (int a = 0; a < n; a++)
        for (int b = 0; b < n; b++) {
            double complex v = 0;
            for (int c = 0; c < n; c++)
                for (int d = 0; d < n; d++)
                    v += V[(size_t)a * n + c] * H[(size_t)c * n + d] * conj(V[(size_t)b * n + d]);
            worst = fmax(worst, cabs(v - Hm[(size_t)a * n + b]));
        }
    free(H);
    free(Hm);
    free(V);
    return worst;
}

/* Exact symmetry of the fixture and of every basis change of it: 1e-12 eV is round-off. */
static void expect_inversion_kept(const tb_model *m)
{
    assert_int_equal(m->has_inversion_op, 1);
    for (int q = 0; q < 4; q++)
        assert_true(inversion_residual(m, kpts[q]) < 1e-12);
}

static tb_model *load(const char *path)
{
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    if (card_read(path, &m, &err) != 0) fail_msg("%s", err.msg);
    return m;
}

static void test_inversion_fixture(void **state)
{
    (void)state;
    tb_model *m = load(BS_TEST_DATA "/good/graphene_spinful.json");
    expect_inversion_kept(m);
    /* The check can fail: a wrong shift breaks it at k away from the TRIM. */
    m->inv_shift[0][0] = 0;
    assert_true(inversion_residual(m, kpts[0]) > 1e-3);
    tb_model_free(m);
}

static void test_permute(void **state)
{
    (void)state;
    tb_model *m = load(BS_TEST_DATA "/good/graphene_spinful.json"), *p = NULL, *back = NULL;
    bs_err err;
    bs_err_clear(&err);
    const int perm[2] = {1, 0};
    assert_int_equal(tf_permute(m, perm, &p, &err), 0);
    assert_true(p->orb_pos[0][0] == m->orb_pos[1][0]);
    expect_same_spectrum(m, p);
    expect_inversion_kept(p);
    assert_int_equal(tb_model_validate(p, 1e-12, "permuted", &err), 0);
    /* Swapping twice is the identity, exactly. */
    assert_int_equal(tf_permute(p, perm, &back, &err), 0);
    assert_true(bs_test_same_hops(back, m));
    assert_memory_equal(back->inv_perm, m->inv_perm, (size_t)m->norb * sizeof *m->inv_perm);
    tb_model_free(back);
    tb_model_free(p);

    const int bad[2] = {0, 0};
    assert_int_equal(tf_permute(m, bad, &p, &err), BS_EINVAL);
    assert_null(p);
    tb_model_free(m);
}

static void test_phase(void **state)
{
    (void)state;
    tb_model *m = load(BS_TEST_DATA "/good/graphene_gap.json"), *p = NULL, *back = NULL;
    bs_err err;
    bs_err_clear(&err);
    const double phi[2] = {0.7, -2.1}, minus[2] = {-0.7, 2.1};
    assert_int_equal(tf_phase(m, phi, &p, &err), 0);
    expect_same_spectrum(m, p);
    /* The hopping A -> B changes (the gauge is not trivial) ... */
    assert_true(cabs(tb_hop(p, 0, 0, 1) - tb_hop(m, 0, 0, 1)) > 1.0);
    assert_int_equal(tb_model_validate(p, 1e-12, "phased", &err), 0);
    /* ... and undoing the phases restores it within round-off of two complex products (1e-14 eV). */
    assert_int_equal(tf_phase(p, minus, &back, &err), 0);
    for (int r = 0; r < m->nR; r++)
        for (int i = 0; i < 4; i++)
            assert_true(cabs(tb_hop(back, r, i / 2, i % 2) - tb_hop(m, r, i / 2, i % 2)) < 1e-14);
    tb_model_free(back);
    tb_model_free(p);
    tb_model_free(m);

    m = load(BS_TEST_DATA "/good/graphene_spinful.json");
    /* Inversion partners A, B may differ by pi: the parity sign flips and the symmetry is kept. */
    const double ok[2] = {0.3, 0.3 + M_PI};
    assert_int_equal(tf_phase(m, ok, &p, &err), 0);
    assert_true(p->inv_sign[0] == -1.0);
    expect_same_spectrum(m, p);
    expect_inversion_kept(p);
    tb_model_free(p);
    const double notreal[2] = {0.3, 1.0};
    assert_int_equal(tf_phase(m, notreal, &p, &err), BS_EINVAL);
    assert_null(p);
    tb_model_free(m);
}

static void test_spin_layout(void **state)
{
    (void)state;
    tb_model *m = load(BS_TEST_DATA "/good/graphene_spinful.json"), *il = NULL, *back = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(tf_spin_layout(m, TB_SPIN_INTERLEAVED, &il, &err), 0);
    assert_int_equal(il->spin_layout, TB_SPIN_INTERLEAVED);
    /* Blocks state 2 (A down, 0-based) is interleaved state 1: same matrix element A-up/A-down. */
    int r0 = tb_model_find_R(m, (int[3]){0, 0, 0});
    assert_true(tb_hop(il, r0, 1, 0) == tb_hop(m, r0, 2, 0));
    for (int i = 0; i < 4; i++) {
        assert_int_equal(tb_state_orbital(il, i), i / 2);
        assert_int_equal(tb_state_spin(il, i), i % 2);
    }
    expect_same_spectrum(m, il);
    expect_inversion_kept(il);
    assert_int_equal(tf_spin_layout(il, TB_SPIN_BLOCKS, &back, &err), 0);
    assert_true(bs_test_same_hops(back, m));
    tb_model_free(back);
    tb_model_free(il);
    tb_model_free(m);

    m = load(BS_TEST_DATA "/good/graphene_gap.json");
    assert_int_equal(tf_spin_layout(m, TB_SPIN_INTERLEAVED, &il, &err), BS_EINVAL);
    tb_model_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_inversion_fixture),
        cmocka_unit_test(test_permute),
        cmocka_unit_test(test_phase),
        cmocka_unit_test(test_spin_layout),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
