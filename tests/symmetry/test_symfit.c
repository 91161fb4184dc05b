/* Tests of the breaking measure and the symmetrisation (symfit.h): exact models measure zero and
 * are left unchanged; a symmetrised noisy model is exactly symmetric; the upper bound is never
 * below the lower one nor below the breaking seen at random k; eigenvalues of H and H_s differ by
 * no more than the distance bound (Weyl's inequality); an exchange field breaks time reversal by
 * exactly twice its size; the verdicts and the confidence factor follow their definitions. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"
#include "noise.h"

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/eig.h"
#include "bandsieve/hk.h"
#include "bandsieve/symfit.h"
#include "bandsieve/symmetry.h"

/* Sums of O(100) products of O(1) eV numbers in double precision: 1e-12 eV is far above their
 * round-off and far below any noise level used here (1e-5 of 1 eV at the least). */
#define ROUNDOFF_EV 1e-12

static sym_info *detect(const tb_model *m)
{
    sym_opts o;
    sym_opts_default(&o);
    sym_info *s = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (sym_detect(m, &o, &s, &err) != 0) fail_msg("sym_detect(%s): %s", m->id, err.msg);
    return s;
}

static symfit_break measure(const tb_model *m, const sym_info *s, int which)
{
    symfit_break b;
    bs_err err;
    bs_err_clear(&err);
    if (symfit_measure(m, s, which, NULL, &b, &err) != 0) fail_msg("symfit_measure(%s): %s", m->id, err.msg);
    return b;
}

static tb_model *symmetrise(const tb_model *m, sym_info *s, int which, double *moved)
{
    tb_model *out = NULL;
    bs_err err;
    bs_err_clear(&err);
    symfit_break mv;
    if (symfit_symmetrise(m, s, which, NULL, &out, &mv, &err) != 0)
        fail_msg("symfit_symmetrise(%s): %s", m->id, err.msg);
    bs_err_clear(&err);
    /* The readers' own check: H(-R) = H(R)^dagger and every -R present. */
    if (tb_model_validate(out, 1e-12, "symmetrised", &err) != 0) fail_msg("%s", err.msg);
    if (!(mv.upper_ev >= mv.lower_ev))
        fail_msg("%s: distance bounds %g < %g", m->id, mv.upper_ev, mv.lower_ev);
    /* The tighter bound lies between the two: it bounds the largest norm on the mesh too. */
    if (!(mv.kmax_ev >= mv.lower_ev * (1 - 1e-12) && mv.kmax_ev <= mv.upper_ev))
        fail_msg("%s: k-maximum bound %g outside [%g, %g]", m->id, mv.kmax_ev, mv.lower_ev, mv.upper_ev);
    *moved = mv.upper_ev;
    return out;
}

/* Models with both symmetries exact (published; see test_symmetry.c for the sources). */
static const char *const both_exact[] = {"kane_mele:lambda_v=0,lambda_R=0",
                                         "bhz",
                                         "bhz:g=0.3",
                                         "fkm",
                                         "fkm:dt=-0.4",
                                         "atomic",
                                         "atomic:dim=2",
                                         NULL};

static void max_hk_diff(const tb_model *a, const tb_model *b, uint64_t seed, int nk, double *maxdiff,
                        double *maxeig)
{
    int n = a->norb;
    double complex *Ha = malloc((size_t)n * n * sizeof *Ha), *Hb = malloc((size_t)n * n * sizeof *Hb);
    double *wa = malloc((size_t)n * sizeof *wa), *wb = malloc((size_t)n * sizeof *wb);
    eig_ws *ws = NULL;
    bs_err err;
    assert_int_equal(eig_create(n, &ws, &err), 0);
    *maxdiff = *maxeig = 0;
    for (int j = 0; j < nk; j++) {
        double k[3] = {bs_test_uniform(&seed), bs_test_uniform(&seed),
                       a->dim == 3 ? bs_test_uniform(&seed) : 0};
        hk_build_direct(a, k, Ha);
        hk_build_direct(b, k, Hb);
        for (int i = 0; i < n * n; i++)
            *maxdiff = fmax(*maxdiff, cabs(Ha[i] - Hb[i]));
        assert_int_equal(eig_values(ws, Ha, wa, &err), 0);
        assert_int_equal(eig_values(ws, Hb, wb, &err), 0);
        for (int i = 0; i < n; i++)
            *maxeig = fmax(*maxeig, fabs(wa[i] - wb[i]));
    }
    eig_free(ws);
    free(Ha);
    free(Hb);
    free(wa);
    free(wb);
}

/* An exactly symmetric model measures zero breaking and symmetrising it changes nothing. */
static void test_exact_models_unchanged(void **state)
{
    (void)state;
    for (int i = 0; both_exact[i]; i++) {
        tb_model *m = bs_test_build(both_exact[i]);
        sym_info *s = detect(m);
        assert_true(s->time_reversal && s->inversion);
        for (int which = SYMFIT_TR; which <= SYMFIT_INV; which++) {
            symfit_break b = measure(m, s, which);
            assert_true(b.available);
            if (!(b.upper_ev < ROUNDOFF_EV && b.lower_ev < ROUNDOFF_EV))
                fail_msg("%s op %d: breaking %g / %g eV of an exact symmetry", both_exact[i], which,
                         b.upper_ev, b.lower_ev);
        }
        double moved, diff, eig;
        tb_model *hs = symmetrise(m, s, SYMFIT_TR | SYMFIT_INV, &moved);
        max_hk_diff(m, hs, 7, 8, &diff, &eig);
        if (!(moved < ROUNDOFF_EV && diff < ROUNDOFF_EV))
            fail_msg("%s: moved %g, H(k) changed by %g", both_exact[i], moved, diff);
        tb_model_free(hs);
        sym_info_free(s);
        tb_model_free(m);
    }
}

/* Noisy models: the symmetrised model passes sym_detect at round-off and measures zero; the
 * bounds are ordered; eigenvalues move by no more than the distance bound (Weyl's inequality,
 * common practice); the breaking at random k is below the upper bound. */
static void check_noisy(const char *spec, int which, double rel, uint64_t seed)
{
    tb_model *clean = bs_test_build(spec), *m = NULL;
    double nb = 0;
    assert_int_equal(bs_noise_model(clean, rel, seed, &m, &nb), 0);
    sym_info *s = detect(m);
    assert_false((which & SYMFIT_TR) && s->time_reversal);
    for (int op = SYMFIT_TR; op <= SYMFIT_INV; op++) {
        if (!(which & op)) continue;
        symfit_break b = measure(m, s, op);
        assert_true(b.available);
        if (!(b.upper_ev >= b.lower_ev && b.lower_ev > 0))
            fail_msg("%s: bounds %g < %g", spec, b.upper_ev, b.lower_ev);
        /* The clean model is symmetric, so H - gH = N - gN and ||N - gN|| <= 2 ||N|| (the bound is
         * invariant under the signed permutations of g): up to the factors solved from noisy H(k),
         * whose error is itself of the noise's order, hence the factor 3 rather than 2. */
        if (!(b.upper_ev <= 3 * nb))
            fail_msg("%s: breaking %g eV above 3 x noise bound %g", spec, b.upper_ev, nb);
    }
    double moved, diff, eig;
    tb_model *hs = symmetrise(m, s, which, &moved);
    max_hk_diff(m, hs, seed + 11, 16, &diff, &eig);
    if (!(eig <= moved)) fail_msg("%s: eigenvalues moved %g eV > bound %g (Weyl)", spec, eig, moved);
    assert_true(moved > 0);
    sym_info *s2 = detect(hs);
    if (which & SYMFIT_TR) assert_true(s2->time_reversal);
    if ((which & SYMFIT_INV) && !s2->inversion)
        fail_msg("%s: symmetrised model fails inversion: %s", spec, s2->note);
    if (which == 3) assert_true(s2->inv_commutes_tr);
    for (int op = SYMFIT_TR; op <= SYMFIT_INV; op++) {
        if (!(which & op)) continue;
        symfit_break b = measure(hs, s, op);
        if (!(b.upper_ev < ROUNDOFF_EV))
            fail_msg("%s: symmetrised model still breaks op %d by %g eV", spec, op, b.upper_ev);
    }
    sym_info_free(s2);
    tb_model_free(hs);
    sym_info_free(s);
    tb_model_free(m);
    tb_model_free(clean);
}

static void test_noisy_symmetrised(void **state)
{
    (void)state;
    check_noisy("kane_mele:lambda_v=0,lambda_R=0", 3, 1e-3, 1);
    check_noisy("kane_mele", SYMFIT_TR, 1e-3, 2);
    check_noisy("bhz", 3, 1e-2, 3);
    check_noisy("fkm", 3, 1e-3, 4);
    check_noisy("fkm", SYMFIT_INV, 1e-4, 5);
    check_noisy("graphene", 3, 1e-3, 6);
    check_noisy("weyl", SYMFIT_INV, 1e-3, 7);
    check_noisy("kane_mele:lambda_v=0,lambda_R=0,layout=1", 3, 1e-3, 8);
}

/* An on-site exchange field m s_z: H - Theta H Theta^-1 = 2 m s_z at every k, so both bounds
 * equal 2m (exact: one R, a diagonal difference; derivation above). */
static void test_exchange_breaking(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("kane_mele");
    bs_noise_exchange(m, 0.05);
    sym_info *s = detect(m);
    assert_false(s->time_reversal);
    symfit_break b = measure(m, s, SYMFIT_TR);
    if (fabs(b.upper_ev - 0.1) > 1e-12 || fabs(b.lower_ev - 0.1) > 1e-12)
        fail_msg("exchange 0.05 eV: breaking %g / %g, expected 0.1", b.upper_ev, b.lower_ev);
    sym_info_free(s);
    tb_model_free(m);
}

/* The breaking of inversion by the staggered potential of Kane-Mele at lambda_R = 0: the
 * difference is 2 lambda_v xi on site, so both bounds are 2 lambda_v (derivation as above). */
static void test_staggered_breaking(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("kane_mele:lambda_v=0.1,lambda_R=0");
    sym_info *s = detect(m);
    symfit_break b = measure(m, s, SYMFIT_INV);
    assert_true(b.available);
    if (fabs(b.upper_ev - 0.2) > 1e-12 || fabs(b.lower_ev - 0.2) > 1e-12)
        fail_msg("lambda_v 0.1 eV: inversion breaking %g / %g, expected 0.2", b.upper_ev, b.lower_ev);
    sym_info_free(s);
    tb_model_free(m);
}

/* Verdicts and the confidence factor, by their definitions in symfit.h. */
static void test_verdicts(void **state)
{
    (void)state;
    symfit_break b = {.available = 1, .upper_ev = 0.07, .lower_ev = 0.05};
    assert_int_equal(symfit_verdict(1, &b, 0.01), SYMFIT_EXACT);
    assert_int_equal(symfit_verdict(0, &b, 0.07), SYMFIT_APPROX);
    assert_int_equal(symfit_verdict(0, &b, 0.069), SYMFIT_BROKEN);
    assert_true(symfit_physical(&b, 0.1));
    assert_false(symfit_physical(&b, 0.101));
    b.upper_ev = 0.1; /* incoherent: lower < 0.6 upper */
    assert_false(symfit_physical(&b, 0.01));
    b.available = 0;
    assert_int_equal(symfit_verdict(0, &b, 1), SYMFIT_NA);
    double prev = 1.0;
    for (double margin = 100; margin > 1e-3; margin /= 1.1) {
        double f = symfit_confidence_factor(margin);
        assert_true(f <= prev && f > 0);
        if (margin < SYMFIT_MARGIN_SAFE) assert_true(0.97 * f < 0.8);
        prev = f;
    }
    assert_true(symfit_confidence_factor(INFINITY) == 1.0);
    assert_true(symfit_confidence_factor(0) == 0.0);
}

/* The norm bound against numpy-style exact norms of small matrices (hand values): for
 * diag(3, -4) the spectral norm is 4, Frobenius 5, sqrt(||.||_1 ||.||_inf) = 4; for the all-ones
 * 2 x 2 it is 2, Frobenius 2, sqrt(2 * 2) = 2. */
static void test_norm_bound(void **state)
{
    (void)state;
    double complex d[4] = {3, 0, 0, -4}, o[4] = {1, 1, 1, 1};
    assert_true(fabs(symfit_norm_bound(2, d) - 4) < 1e-15);
    assert_true(fabs(symfit_norm_bound(2, o) - 2) < 1e-15);
}

/* ||D(k)||_F by direct summation (the test's own, independent of the transforms in symfit.c). */
static double direct_frobenius(int n, int nr, const int (*R)[3], const double complex *D, const double k[3])
{
    double sum = 0;
    for (int ab = 0; ab < n * n; ab++) {
        double complex x = 0;
        for (int r = 0; r < nr; r++)
            x += D[(size_t)r * n * n + ab] *
                 cexp(2 * M_PI * I * (k[0] * R[r][0] + k[1] * R[r][1] + k[2] * R[r][2]));
        sum += creal(x) * creal(x) + cimag(x) * cimag(x);
    }
    return sqrt(sum);
}

/* symfit_kmax_bound against analytic maxima and a direct fine mesh.
 * (1) On-site only: D(k) = D_0 for every k, so the bound is ||D_0||_F (exact; no mesh slack).
 * (2) D(k) = A sin(2 pi 4 k_1) with A Hermitian (D_{+4x} = A / 2i, D_{-4x} its adjoint): the
 *     breaking that a mesh of 8 points per direction misses entirely; max_k ||D(k)||_F = ||A||_F,
 *     and the bound lies within its stated 10% above it (symfit.h).
 * (3) Random Hermitian-paired D on the 27 lattice vectors |R_a| <= 1 (4 x 4): the bound is at
 *     least the largest ||D(k)||_F on a direct 32^3 mesh, and at most 1.22 times it (on that mesh
 *     Bernstein's inequality, the same argument with W = 6 pi / 32, puts the mesh maximum within
 *     a factor 0.91 of the true one, and the bound is within 1.105 above the true one), and far
 *     below the sum over R of the norms (symfit_norm_bound): the square root of 27 is 5.
 * (4) Input Hermitian only within a tolerance: the bound is of the Hermitian part, the matrix that
 *     hk.c diagonalises; on-site D_0 = [[0, 0], [1, 0]] has the part [[0, 1/2], [1/2, 0]] of
 *     Frobenius norm sqrt(1/2) (exact; the upper triangle alone would give 0), and D_0 listed twice
 *     at R = 0 adds up (the definition of D(k)): 2 sqrt(1/2). */
static void test_kmax_bound(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    double bound;
    int R0[1][3] = {{0, 0, 0}};
    double complex D0[4] = {1, 2 - I, 2 + I, -3};
    assert_int_equal(symfit_kmax_bound(2, 1, (const int(*)[3])R0, 3, D0, &bound, &err), 0);
    if (!(fabs(bound - sqrt(1 + 5 + 5 + 9)) < 1e-12))
        fail_msg("on-site: bound %.15g, ||D_0||_F %.15g", bound, sqrt(20.0));

    int Rx[2][3] = {{4, 0, 0}, {-4, 0, 0}};
    double complex A[4] = {0.3, 0.1 + 0.2 * I, 0.1 - 0.2 * I, -0.5}, Dx[8];
    for (int i = 0; i < 2; i++)
        for (int j = 0; j < 2; j++) {
            Dx[i * 2 + j] = A[i * 2 + j] / (2 * I);
            Dx[4 + i * 2 + j] = conj(A[j * 2 + i] / (2 * I));
        }
    double fa = sqrt(0.09 + 2 * 0.05 + 0.25);
    assert_int_equal(symfit_kmax_bound(2, 2, (const int(*)[3])Rx, 3, Dx, &bound, &err), 0);
    if (!(bound >= fa && bound <= 1.105 * fa)) fail_msg("sin 8 pi k1: bound %g, ||A||_F %g", bound, fa);

    enum { n = 4, nr = 27 };
    int R[nr][3];
    double complex *D = calloc((size_t)nr * n * n, sizeof *D);
    assert_non_null(D);
    for (int r = 0; r < nr; r++) {
        R[r][0] = r % 3 - 1;
        R[r][1] = r / 3 % 3 - 1;
        R[r][2] = r / 9 - 1;
    }
    uint64_t seed = 7;
    double sum = 0;
    for (int r = 0; r < nr; r++) {
        int mr = nr - 1 - r; /* the index of -R */
        if (mr < r) continue;
        for (int a = 0; a < n; a++)
            for (int b = 0; b < n; b++) {
                double re = 2 * bs_test_uniform(&seed) - 1; /* uniform in [-1, 1) */
                double complex x = re + I * (2 * bs_test_uniform(&seed) - 1);
                D[((size_t)r * n + a) * n + b] += x;
                D[((size_t)mr * n + b) * n + a] += conj(x);
            }
    }
    for (int r = 0; r < nr; r++)
        sum += symfit_norm_bound(n, D + (size_t)r * n * n);
    assert_int_equal(symfit_kmax_bound(n, nr, (const int(*)[3])R, 3, D, &bound, &err), 0);
    double mesh_max = 0;
    for (int i = 0; i < 32 * 32 * 32; i++) {
        double k[3] = {(i % 32) / 32.0, (i / 32 % 32) / 32.0, (i / 1024) / 32.0};
        mesh_max = fmax(mesh_max, direct_frobenius(n, nr, (const int(*)[3])R, D, k));
    }
    if (!(bound >= mesh_max && bound <= 1.22 * mesh_max && bound < sum / 2))
        fail_msg("random: bound %g, direct mesh %g, sum of norms %g", bound, mesh_max, sum);
    free(D);

    int R00[2][3] = {{0, 0, 0}, {0, 0, 0}};
    double complex lower[8] = {0, 0, 1, 0, 0, 0, 1, 0};
    assert_int_equal(symfit_kmax_bound(2, 1, (const int(*)[3])R00, 3, lower, &bound, &err), 0);
    if (!(fabs(bound - sqrt(0.5)) < 1e-12)) fail_msg("lower triangle only: bound %.15g, sqrt(1/2)", bound);
    assert_int_equal(symfit_kmax_bound(2, 2, (const int(*)[3])R00, 3, lower, &bound, &err), 0);
    if (!(fabs(bound - 2 * sqrt(0.5)) < 1e-12)) fail_msg("R = 0 listed twice: bound %.15g, sqrt(2)", bound);
}

/* The inversion map accepts Wannier centres a few hundredths of an Angstrom off their sites
 * (symmetry.h, pos_tol_ang; common practice for unsymmetrised fits): the B site of the CsCl-type
 * model (a = 4 Angstrom, inversion about A) moved by 0.02 Angstrom along x sits 0.04 Angstrom
 * (1e-2 reduced, beyond the reduced tolerance) from its own image; it is matched at the default
 * 0.05 Angstrom and refused at 0.01 Angstrom (the only other map, A <-> B, fails on H(k)). */
static void test_position_tolerance_angstrom(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("atomic:a=4");
    double b[3][3], shift[3] = {0.02, 0, 0};
    tb_model_reciprocal(m, b);
    for (int i = 0; i < 3; i++) {
        double x = 0;
        for (int j = 0; j < 3; j++)
            x += b[i][j] * shift[j];
        m->orb_pos[1][i] += x / (2 * M_PI);
    }
    sym_opts o;
    sym_opts_default(&o);
    sym_info *s = NULL;
    bs_err err;
    assert_int_equal(sym_detect(m, &o, &s, &err), 0);
    if (!s->inversion) fail_msg("atomic, B moved 0.02 A: %s", s->note);
    sym_info_free(s);
    o.pos_tol_ang = 0.01;
    assert_int_equal(sym_detect(m, &o, &s, &err), 0);
    assert_false(s->inversion);
    sym_info_free(s);
    tb_model_free(m);
}

/* Errors: inversion asked for without a candidate; symmetry information of another model. */
static void test_errors(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("haldane:M=0.2,phi=0"), *big = bs_test_build("fkm"), *out = NULL;
    /* B moved off every inversion image of A: no candidate map. */
    m->orb_pos[1][0] = 0.55;
    m->orb_pos[1][1] = 0.8;
    m->orb_l[1] = 0;
    sym_info *s = detect(m);
    assert_int_equal(s->inv_source, SYM_INV_NONE);
    bs_err err;
    bs_err_clear(&err);
    symfit_break b;
    assert_int_equal(symfit_measure(big, s, SYMFIT_TR, NULL, &b, &err), BS_EINVAL);
    assert_int_equal(symfit_measure(m, s, SYMFIT_INV, NULL, &b, &err), 0);
    assert_false(b.available);
    assert_int_equal(symfit_symmetrise(m, s, SYMFIT_INV, NULL, &out, NULL, &err), BS_EINVAL);
    assert_null(out);
    sym_info_free(s);
    tb_model_free(m);
    tb_model_free(big);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_exact_models_unchanged),
        cmocka_unit_test(test_noisy_symmetrised),
        cmocka_unit_test(test_exchange_breaking),
        cmocka_unit_test(test_staggered_breaking),
        cmocka_unit_test(test_verdicts),
        cmocka_unit_test(test_norm_bound),
        cmocka_unit_test(test_kmax_bound),
        cmocka_unit_test(test_errors),
        cmocka_unit_test(test_position_tolerance_angstrom),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
