/* Crystal symmetry: space groups of published lattices from spglib, operations verified on H(k)
 * for built-in models and a Slater–Koster sp3 model with on-site spin-orbit coupling, symmetry
 * eigenvalues at Gamma. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <cmocka.h>

#include <complex.h>
#include <math.h>
#include <string.h>

#include "bandsieve/crystal.h"
#include "bandsieve/fitnoise.h"
#include "bandsieve/hk.h"
#include <lapacke.h>
#include "bandsieve/realharm.h"
#include "bandsieve/transform.h"
#include "testutil.h"

static cry_info *detect(const tb_model *m, const int *shell_index)
{
    cry_opts o;
    cry_opts_default(&o);
    o.shell_index = shell_index;
    cry_info *c = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (cry_detect(m, &o, &c, &err) != 0) fail_msg("cry_detect: %s", err.msg);
    return c;
}

static int count_kind(const cry_info *c, const char *kind)
{
    int n = 0;
    for (int i = 0; i < cry_nops(c); i++)
        n += cry_get_op(c, i)->verified && !strcmp(cry_get_op(c, i)->kind, kind);
    return n;
}

/* Diamond structure: space group 227 (Fd-3m), point group Oh of order 48 (International Tables
 * for Crystallography, Vol. A; common practice). The undistorted Fu–Kane–Mele model (Phys. Rev.
 * Lett. 98, 106803 (2007)) has the full symmetry, so all 48 operations pass on H(k). */
static void test_fkm_full_group(void **state)
{
    tb_model *m = bs_test_build("fkm:dt=0");
    cry_info *c = detect(m, NULL);
    assert_int_equal(cry_spacegroup(c), 227);
    assert_int_equal(cry_nsites(c), 2);
    assert_int_equal(cry_nops(c), 48);
    assert_int_equal(cry_nverified(c), 48);
    assert_int_equal(count_kind(c, "-1"), 1);
    assert_int_equal(count_kind(c, "3"), 8);
    assert_int_equal(count_kind(c, "m"), 9); /* 3 sigma_h + 6 sigma_d */
    cry_info_free(c);
    tb_model_free(m);
}

/* The [111] bond distortion leaves the site group of the bond axis: D3d, order 12 (the paper's
 * rhombohedral distortion); the structure from positions alone is still 227, and only the
 * Hamiltonian's check tells the difference. A staggered potential instead breaks inversion and
 * leaves Td, order 24 (zinc-blende, F-43m; common practice). */
static void test_fkm_lowered_groups(void **state)
{
    tb_model *m = bs_test_build("fkm:dt=0.4");
    cry_info *c = detect(m, NULL);
    assert_int_equal(cry_spacegroup(c), 227);
    assert_int_equal(cry_nverified(c), 12);
    assert_int_equal(count_kind(c, "-1"), 1);
    assert_int_equal(count_kind(c, "3"), 2);
    cry_info_free(c);
    tb_model_free(m);

    m = bs_test_build("fkm:dt=0,stag=0.3");
    c = detect(m, NULL);
    assert_int_equal(cry_nverified(c), 24);
    assert_int_equal(count_kind(c, "-1"), 0);
    assert_int_equal(count_kind(c, "-4"), 6);
    cry_info_free(c);
    tb_model_free(m);
}

/* Graphene: honeycomb, p6/mmm (191) with the sites at 1/3, 2/3; every operation that keeps the
 * plane (24) is a symmetry of the nearest-neighbour Hamiltonian (Rev. Mod. Phys. 81, 109 (2009)). */
static void test_graphene(void **state)
{
    tb_model *m = bs_test_build("graphene");
    cry_info *c = detect(m, NULL);
    assert_int_equal(cry_spacegroup(c), 191);
    assert_int_equal(cry_nverified(c), 24);
    assert_int_equal(count_kind(c, "6"), 2);
    cry_info_free(c);
    tb_model_free(m);
}

/* Slater–Koster two-centre integrals, Phys. Rev. 94, 1498 (1954): with direction cosines (l,m,n)
 * of the vector from the first orbital to the second, E_ss = V_sss, E_s,x = l V_sps,
 * E_x,x = l^2 V_pps + (1 - l^2) V_ppp, E_x,y = l m (V_pps - V_ppp). */
static double sk(int a, int b, const double d[3], const double V[4])
{
    double len = sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2]), c[3];
    for (int i = 0; i < 3; i++)
        c[i] = d[i] / len;
    if (a == 0 && b == 0) return V[0];
    if (a == 0) return c[b - 1] * V[1];
    if (b == 0) return -c[a - 1] * V[1];
    int i = a - 1, j = b - 1;
    return c[i] * c[j] * (V[2] - V[3]) + (i == j ? V[3] : 0.0);
}

/* An sp3 model on the simple cubic lattice: one site with s, px, py, pz (stored in that order, so
 * the shell indices must be given: px 1, py 2, pz 0), first and second neighbours, and on-site
 * spin-orbit coupling lambda L.S with (L_k)_ij = -i eps_kij on (px, py, pz) (common practice). */
static tb_model *sp3_cubic(int spinful, double lso)
{
    int nR = 1 + 6 + 12, ns = 4, n = spinful ? 8 : 4;
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (tb_model_create(n, nR, spinful, &m, &err) != 0) fail_msg("%s", err.msg);
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            m->lattice[i][j] = (i == j) ? 3.0 : 0.0;
    m->orb_l[0] = 0;
    m->orb_l[1] = m->orb_l[2] = m->orb_l[3] = 1;
    m->nocc = spinful ? 2 : 1;
    const double V1[4] = {-1.4, 1.8, 3.2, -0.9}, V2[4] = {-0.3, 0.4, 0.7, -0.2};
    const double onsite[4] = {-4.0, 1.5, 1.5, 1.5};
    int r = 0;
    for (int x = -1; x <= 1; x++)
        for (int y = -1; y <= 1; y++)
            for (int z = -1; z <= 1; z++) {
                int nn = abs(x) + abs(y) + abs(z);
                if (nn > 2) continue;
                m->R[r][0] = x, m->R[r][1] = y, m->R[r][2] = z;
                double d[3] = {3.0 * x, 3.0 * y, 3.0 * z};
                for (int a = 0; a < ns; a++)
                    for (int b = 0; b < ns; b++) {
                        double v = nn == 0 ? (a == b ? onsite[a] : 0.0) : sk(a, b, d, nn == 1 ? V1 : V2);
                        for (int s = 0; s < (spinful ? 2 : 1); s++)
                            m->H[((size_t)r * n + tb_state_index(m, a, s)) * n + tb_state_index(m, b, s)] = v;
                    }
                if (nn == 0 && spinful) {
                    const double complex sig[3][2][2] = {
                        {{0, 1}, {1, 0}}, {{0, -I}, {I, 0}}, {{1, 0}, {0, -1}}};
                    for (int k = 0; k < 3; k++)
                        for (int i = 0; i < 3; i++)
                            for (int j = 0; j < 3; j++) {
                                int e = (k == i || i == j || k == j)
                                            ? 0
                                            : ((i == (k + 1) % 3) ? 1 : -1); /* eps_kij */
                                if (!e) continue;
                                double complex L = -I * e;
                                for (int s1 = 0; s1 < 2; s1++)
                                    for (int s2 = 0; s2 < 2; s2++)
                                        m->H[((size_t)r * n + tb_state_index(m, 1 + i, s1)) * n +
                                             tb_state_index(m, 1 + j, s2)] += 0.5 * lso * L * sig[k][s1][s2];
                            }
                }
                r++;
            }
    return m;
}

/* Simple cubic, one site: Pm-3m (221), Oh of order 48 (International Tables; common practice).
 * The Slater–Koster Hamiltonian is invariant under all 48 with p orbitals rotating as a vector;
 * with spin-orbit coupling L.S also when spin is rotated by SU(2) (L.S is a scalar). A wrong
 * orbital map (names ignored) must fail the check: the test can fail. */
static void test_sp3_cubic(void **state)
{
    const int names[4] = {0, rh_index(1, "px"), rh_index(1, "py"), rh_index(1, "pz")};
    for (int spinful = 0; spinful <= 1; spinful++) {
        tb_model *m = sp3_cubic(spinful, 0.35);
        bs_err err;
        bs_err_clear(&err);
        assert_int_equal(tb_model_validate(m, 1e-12, "sp3", &err), 0);
        cry_info *c = detect(m, names);
        assert_int_equal(cry_spacegroup(c), 221);
        assert_int_equal(cry_nverified(c), 48);
        cry_info_free(c);
        c = detect(m, NULL); /* default order pz px py applied to px py pz: wrong */
        assert_true(cry_nverified(c) < 48);
        cry_info_free(c);
        tb_model_free(m);
    }
}

/* At Gamma the inversion eigenvalue of the s-like band is +1 and of the p-like bands -1 (l parity,
 * common practice); C4 about z acting on the p triplet has eigenvalues {1, i, -i}. */
static void test_eigenvalues_at_gamma(void **state)
{
    const int names[4] = {0, rh_index(1, "px"), rh_index(1, "py"), rh_index(1, "pz")};
    tb_model *m = sp3_cubic(0, 0.0);
    cry_info *c = detect(m, names);
    const double g[3] = {0, 0, 0};
    int inv = -1, c4 = -1;
    for (int i = 0; i < cry_nops(c); i++) {
        const cry_op *op = cry_get_op(c, i);
        if (!strcmp(op->kind, "-1")) inv = i;
        if (!strcmp(op->kind, "4") && fabs(fabs(op->axis[2]) - 1) < 1e-9) c4 = i;
    }
    assert_true(inv >= 0 && c4 >= 0);
    double complex ev[3];
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(cry_band_eigenvalues(m, c, inv, g, 0, 1, ev, &err), 0);
    assert_true(cabs(ev[0] - 1.0) < 1e-9);
    assert_int_equal(cry_band_eigenvalues(m, c, inv, g, 1, 3, ev, &err), 0);
    for (int i = 0; i < 3; i++)
        assert_true(cabs(ev[i] + 1.0) < 1e-9);
    assert_int_equal(cry_band_eigenvalues(m, c, c4, g, 1, 3, ev, &err), 0);
    double complex sum = ev[0] + ev[1] + ev[2], prod = ev[0] * ev[1] * ev[2];
    assert_true(cabs(sum - 1.0) < 1e-9);  /* 1 + i - i */
    assert_true(cabs(prod - 1.0) < 1e-9); /* 1 * i * -i */
    const double x[3] = {0.5, 0.13, 0};   /* C4z does not leave this k invariant */
    assert_int_not_equal(cry_band_eigenvalues(m, c, c4, x, 1, 3, ev, &err), 0);
    cry_info_free(c);
    tb_model_free(m);
}

/* Invariance under a permutation of the orbitals (common practice): the found group is the same. */
static void test_permuted_orbitals(void **state)
{
    tb_model *m = bs_test_build("fkm:dt=0.4");
    int perm[2] = {1, 0};
    tb_model *p = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(tf_permute(m, perm, &p, &err), 0);
    cry_info *c = detect(p, NULL);
    assert_int_equal(cry_nverified(c), 12);
    cry_info_free(c);
    tb_model_free(p);
    tb_model_free(m);
}

static double max_band_shift(const tb_model *a, const tb_model *b)
{
    int n = a->norb;
    double complex *H = malloc((size_t)n * n * sizeof *H);
    double *wa = malloc((size_t)n * sizeof *wa), *wb = malloc((size_t)n * sizeof *wb), worst = 0;
    uint64_t s = 77;
    for (int q = 0; q < 8; q++) {
        double k[3] = {bs_test_uniform(&s), bs_test_uniform(&s), bs_test_uniform(&s)};
        hk_build_direct(a, k, H);
        LAPACKE_zheevd(LAPACK_COL_MAJOR, 'N', 'U', n, H, n, wa);
        hk_build_direct(b, k, H);
        LAPACKE_zheevd(LAPACK_COL_MAJOR, 'N', 'U', n, H, n, wb);
        for (int i = 0; i < n; i++)
            worst = fmax(worst, fabs(wa[i] - wb[i]));
    }
    free(H), free(wa), free(wb);
    return worst;
}

/* Symmetrisation: averaging over the operations a noisy fit keeps approximately restores them to
 * round-off, moves no band by more than the breaking bound (Weyl's inequality for Hermitian
 * perturbations; common practice in numerical linear algebra), and leaves an exact model as it is. */
static void test_symmetrise_noisy(void **state)
{
    tb_model *clean = bs_test_build("fkm:dt=0.4"), *noisy = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(fitnoise_apply(clean, 1e-3, 99, &noisy, &err), 0);
    cry_info *c = detect(noisy, NULL);
    assert_int_equal(cry_nverified(c), 1); /* only the identity survives at round-off */
    int ops[48], nops = 0;
    double worst_bound = 0;
    for (int i = 0; i < cry_nops(c); i++) {
        double bound;
        assert_int_equal(cry_breaking_ev(noisy, c, i, &bound, &err), 0);
        /* the 12 operations of D3d have relative residuals ~1e-2 from the noise, the others ~0.14
         * from the distortion (dt = 0.4 against t = 1): 0.05 separates them */
        if (cry_get_op(c, i)->residual < 0.05) {
            ops[nops++] = i;
            worst_bound = fmax(worst_bound, bound);
        }
    }
    assert_int_equal(nops, 12); /* D3d of the [111]-distorted model */
    tb_model *sym = NULL;
    assert_int_equal(cry_symmetrise(noisy, c, ops, nops, &sym, &err), 0);
    cry_info *cs = detect(sym, NULL);
    assert_int_equal(cry_nverified(cs), 12);
    double shift = max_band_shift(noisy, sym);
    print_message("noise 1e-3: breaking bound %.3g eV, band shift after symmetrising %.3g eV\n", worst_bound,
                  shift);
    assert_true(shift <= worst_bound);
    assert_true(shift > 0);
    cry_info_free(cs);
    cry_info_free(c);

    /* an exact model: symmetrising over its own group changes nothing */
    c = detect(clean, NULL);
    nops = 0;
    for (int i = 0; i < cry_nops(c); i++)
        if (cry_get_op(c, i)->verified) ops[nops++] = i;
    tb_model *same = NULL;
    assert_int_equal(cry_symmetrise(clean, c, ops, nops, &same, &err), 0);
    assert_true(max_band_shift(clean, same) < 1e-12);
    double bound;
    assert_int_equal(cry_breaking_ev(clean, c, ops[nops - 1], &bound, &err), 0);
    assert_true(bound < 1e-12);
    cry_info_free(c);
    tb_model_free(same);
    tb_model_free(sym);
    tb_model_free(noisy);
    tb_model_free(clean);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_fkm_full_group),
        cmocka_unit_test(test_fkm_lowered_groups),
        cmocka_unit_test(test_graphene),
        cmocka_unit_test(test_sp3_cubic),
        cmocka_unit_test(test_eigenvalues_at_gamma),
        cmocka_unit_test(test_permuted_orbitals),
        cmocka_unit_test(test_symmetrise_noisy),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
