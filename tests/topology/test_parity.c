/* Tests of the parity criterion (parity.h, Phys. Rev. B 76, 045302 (2007)): published Z2 phases of
 * the Kane-Mele, BHZ and Fu-Kane-Mele models, closed gaps at TRIM, the not-applicable cases
 * (no inversion, spinless), an ambiguous case, errors, and invariance of the indices under
 * orbital permutations, orbital phases and the spin layout. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/lattice_models.h"
#include "bandsieve/parity.h"
#include "bandsieve/symmetry.h"
#include "bandsieve/transform.h"

static sym_info *detect(const tb_model *m)
{
    sym_info *s = NULL;
    bs_err err;
    bs_err_clear(&err);
    int rc = sym_detect(m, NULL, &s, &err);
    if (rc != 0) fprintf(stderr, "sym_detect(%s): %s\n", m->id, err.msg);
    assert_int_equal(rc, 0);
    return s;
}

static void parity_of(const tb_model *m, par_result *r)
{
    sym_info *s = detect(m);
    bs_err err;
    bs_err_clear(&err);
    int rc = par_z2(m, s, NULL, r, &err);
    if (rc != 0) fprintf(stderr, "par_z2(%s): %s\n", m->id, err.msg);
    assert_int_equal(rc, 0);
    sym_info_free(s);
}

/* Checks the status and, when done, the formatted indices ("1", "1;111"). */
static void expect_z2(const char *spec, int status, const char *z2, const char *source)
{
    tb_model *m = bs_test_build(spec);
    par_result r;
    parity_of(m, &r);
    char got[16];
    par_format(&r, got, sizeof got);
    if (r.status != status || (z2 && strcmp(got, z2) != 0))
        fail_msg("%s (%s): status %d \"%s\" (%s), expected %d \"%s\"", spec, source, r.status, got, r.reason,
                 status, z2 ? z2 : "");
    if (status == PAR_DONE) {
        /* Exact symmetries: parities are +-1 to round-off (~1e-15); 1e-10 is generous. */
        assert_true(r.max_dev < 1e-10);
        for (int t = 0; t < r.ntrim; t++) {
            assert_true(r.delta[t] == 1 || r.delta[t] == -1);
            assert_int_equal(r.nodd[t] + r.neven[t], m->nocc);
            assert_int_equal(r.nodd[t] % 2, 0);
        }
    } else {
        assert_true(strlen(r.reason) > 0);
        assert_string_equal(got, "");
    }
    tb_model_free(m);
}

/* Kane-Mele with lambda_R = 0 and lambda_v = 0: quantum spin Hall phase, Z2 = 1 for any
 * lambda_SO != 0 (Phys. Rev. Lett. 95, 226801 (2005)); integer result, no tolerance. */
static void test_kane_mele(void **state)
{
    (void)state;
    expect_z2("kane_mele:lambda_v=0,lambda_R=0", PAR_DONE, "1", "PRL 95, 226801");
    expect_z2("kane_mele:lambda_v=0,lambda_R=0,lambda_SO=-0.03", PAR_DONE, "1", "PRL 95, 226801");
    /* Both sides of lambda_v = 3 sqrt3 lambda_SO (0.312 for lambda_SO = 0.06): the staggered
     * potential breaks inversion, so the parity criterion must decline (PRB 76, 045302). */
    expect_z2("kane_mele:lambda_v=0.2,lambda_R=0", PAR_NA, NULL, "inversion broken, TI side");
    expect_z2("kane_mele:lambda_v=0.45,lambda_R=0", PAR_NA, NULL, "inversion broken, trivial side");
    tb_model *m = bs_test_build("kane_mele:lambda_v=0.45,lambda_R=0");
    par_result r;
    parity_of(m, &r);
    assert_non_null(strstr(r.reason, "no inversion"));
    tb_model_free(m);
}

/* BHZ lattice model: Z2 = 1 for 0 < M/B < 8 and 0 otherwise, the gap closing at M/B = 0 (Gamma),
 * 4 (X, Y) and 8 (M), all TRIM (Science 314, 1757 (2006); lattice form of lattice_models.h).
 * g keeps inversion and the gap (same doc). */
static void test_bhz(void **state)
{
    (void)state;
    expect_z2("bhz:M=1", PAR_DONE, "1", "inverted");
    expect_z2("bhz:M=6", PAR_DONE, "1", "inverted, 4 < M/B < 8");
    expect_z2("bhz:M=-1", PAR_DONE, "0", "normal");
    expect_z2("bhz:M=9", PAR_DONE, "0", "normal, M/B > 8");
    expect_z2("bhz:M=1,g=0.3", PAR_DONE, "1", "inverted, S_z broken");
    expect_z2("bhz:M=-1,g=0.3", PAR_DONE, "0", "normal, S_z broken");
    expect_z2("bhz:M=0", PAR_GAP_CLOSED, NULL, "critical M = 0 at Gamma");
    expect_z2("bhz:M=4", PAR_GAP_CLOSED, NULL, "critical M/B = 4 at X, Y");
    expect_z2("bhz:delta=0.2", PAR_NA, NULL, "inversion broken");
    tb_model *m = bs_test_build("bhz:M=0");
    par_result r;
    parity_of(m, &r);
    assert_non_null(strstr(r.reason, "gap closed at TRIM (0,0,0)"));
    /* The gap at Gamma is zero to round-off at M = 0 (E = M at Gamma for both blocks). */
    assert_true(r.gap_ev[0] < 1e-12);
    tb_model_free(m);
}

/* Fu-Kane-Mele diamond: dt > 0 on the [111] bond gives the strong TI 1;111, dt < 0 the weak TI
 * 0;111 (Phys. Rev. Lett. 98, 106803 (2007)); dt = 0 closes the gap at the three X points. */
static void test_fkm(void **state)
{
    (void)state;
    expect_z2("fkm:dt=0.4", PAR_DONE, "1;111", "PRL 98, 106803 strong");
    expect_z2("fkm:dt=-0.4", PAR_DONE, "0;111", "PRL 98, 106803 weak");
    expect_z2("fkm:dt=0.2,lambda_SO=0.06", PAR_DONE, "1;111", "PRL 98, 106803 strong, other SO");
    expect_z2("fkm:dt=0", PAR_GAP_CLOSED, NULL, "semimetal at X");
    expect_z2("fkm:stag=0.3", PAR_NA, NULL, "inversion broken");
}

/* A spinful atomic insulator without spin-orbit coupling is trivial, 0 in 2D and 0;000 in 3D
 * (lattice_models.h: Z2 = 0; common practice: decoupled atomic levels carry no topology). */
static void test_atomic(void **state)
{
    (void)state;
    expect_z2("atomic:dim=2", PAR_DONE, "0", "atomic 2D");
    expect_z2("atomic:dim=3", PAR_DONE, "0;000", "atomic 3D");
}

/* Spinless inversion-symmetric models have no Kramers pairs: not applicable, with the parity
 * counts still given as evidence. Graphene at the TRIM: Gamma is gapped (E = +-3t), each M point
 * too (+-t), so all four counts exist and sum to nocc = 1. */
static void test_spinless_not_applicable(void **state)
{
    (void)state;
    expect_z2("graphene", PAR_NA, NULL, "spinless");
    expect_z2("haldane:phi=0", PAR_NA, NULL, "spinless, TR");
    tb_model *m = bs_test_build("graphene");
    par_result r;
    parity_of(m, &r);
    assert_non_null(strstr(r.reason, "spinless"));
    for (int t = 0; t < 4; t++) {
        assert_int_equal(r.nodd[t] + r.neven[t], 1);
        assert_int_equal(r.delta[t], 0);
    }
    assert_int_equal(r.z2[0], -1);
    tb_model_free(m);
}

/* The inversion of a symmetric model applied to a broken one: the occupied states at the TRIM are
 * no longer parity eigenstates (lambda_v = 0.3 mixes the sublattices at order 1), so the parity
 * eigenvalues leave +-1 by far more than the 1e-3 tolerance. A model/record size mismatch is an
 * error. */
static void test_ambiguous_and_errors(void **state)
{
    (void)state;
    tb_model *good = bs_test_build("kane_mele:lambda_v=0,lambda_R=0");
    tb_model *bad = bs_test_build("kane_mele:lambda_v=0.3,lambda_R=0");
    sym_info *s = detect(good);
    par_result r;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(par_z2(bad, s, NULL, &r, &err), 0);
    if (r.status != PAR_AMBIGUOUS) fail_msg("status %d: %s", r.status, r.reason);
    assert_non_null(strstr(r.reason, "off +-1"));
    assert_true(r.max_dev > 1e-3);

    tb_model *big = bs_test_build("fkm");
    tb_model *other = bs_test_build("graphene");
    sym_info *s2 = detect(other);
    bs_err_clear(&err);
    assert_int_equal(par_z2(big, s2, NULL, &r, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "symmetry record for 2 states, model has 4"));
    sym_info_free(s2);
    sym_info_free(s);
    tb_model_free(good);
    tb_model_free(bad);
    tb_model_free(big);
    tb_model_free(other);
}

static uint64_t rng_next(uint64_t *x)
{
    *x ^= *x << 13;
    *x ^= *x >> 7;
    *x ^= *x << 17;
    return *x;
}

/* A random permutation of the spatial orbitals, random orbital phases and the given spin layout,
 * through transform.h. The caller owns the result. */
static tb_model *scramble(const tb_model *m, uint64_t seed, int layout)
{
    uint64_t x = seed * 2654435761u + 17;
    int ns = m->nspatial;
    int *perm = malloc((size_t)ns * sizeof *perm);
    double *phi = malloc((size_t)ns * sizeof *phi);
    for (int i = 0; i < ns; i++)
        perm[i] = i;
    for (int i = ns - 1; i > 0; i--) {
        int j = (int)(rng_next(&x) % (uint64_t)(i + 1));
        int t = perm[i];
        perm[i] = perm[j];
        perm[j] = t;
    }
    bs_err err;
    bs_err_clear(&err);
    tb_model *p = NULL, *q = NULL, *r = NULL;
    assert_int_equal(tf_permute(m, perm, &p, &err), 0);
    /* Random phases; with an explicit inversion operator, partners must agree modulo pi to keep
     * its factors real (transform.h). */
    for (int o = 0; o < ns; o++) {
        phi[o] = 2.0 * M_PI * (double)(rng_next(&x) % 1000000) / 1e6;
        if (!p->has_inversion_op) continue;
        int po = tb_state_orbital(p, p->inv_perm[tb_state_index(p, o, 0)]);
        if (po < o) phi[o] = phi[po] + M_PI * (double)(rng_next(&x) % 2);
    }
    assert_int_equal(tf_phase(p, phi, &q, &err), 0);
    assert_int_equal(tf_spin_layout(q, layout, &r, &err), 0);
    tb_model_free(p);
    tb_model_free(q);
    free(perm);
    free(phi);
    return r;
}

/* Invariance (common practice; Phys. Rev. B 76, 045302 (2007): the indices do not depend on the
 * basis nor on the overall sign of P): the same indices after a permutation, random phases and
 * either layout; the deltas agree up to one common sign. */
static void test_basis_invariance(void **state)
{
    (void)state;
    const char *specs[] = {"kane_mele:lambda_v=0,lambda_R=0",
                           "bhz:M=1,g=0.3",
                           "bhz:M=-1",
                           "fkm:dt=0.4",
                           "fkm:dt=-0.4",
                           "atomic:dim=3"};
    for (size_t i = 0; i < sizeof specs / sizeof specs[0]; i++) {
        tb_model *m = bs_test_build(specs[i]);
        par_result ref;
        parity_of(m, &ref);
        assert_int_equal(ref.status, PAR_DONE);
        for (int trial = 0; trial < 4; trial++) {
            tb_model *q = scramble(m, 31 * i + trial, trial % 2 ? TB_SPIN_INTERLEAVED : TB_SPIN_BLOCKS);
            par_result r;
            parity_of(q, &r);
            if (r.status != PAR_DONE) fail_msg("%s scrambled %d: %s", specs[i], trial, r.reason);
            for (int j = 0; j < 4; j++)
                assert_int_equal(r.z2[j], ref.z2[j]);
            int common = r.delta[0] * ref.delta[0];
            for (int t = 0; t < r.ntrim; t++)
                assert_int_equal(r.delta[t] * ref.delta[t], common);
            tb_model_free(q);
        }
        tb_model_free(m);
    }
}

/* Direct sum of two spinful models on the same lattice (blocks layout): spatial orbitals of a,
 * then those of b; H(R) block-diagonal; nocc adds. The caller owns the result. */
static tb_model *direct_sum(const tb_model *a, const tb_model *b)
{
    int na = a->norb, nb = b->norb, n = na + nb;
    int nR = a->nR;
    for (int r = 0; r < b->nR; r++)
        nR += tb_model_find_R(a, b->R[r]) < 0;
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(tb_model_create(n, nR, 1, &m, &err), 0);
    m->dim = a->dim;
    memcpy(m->lattice, a->lattice, sizeof m->lattice);
    m->nocc = a->nocc + b->nocc;
    snprintf(m->id, sizeof m->id, "direct sum");
    for (int o = 0; o < a->nspatial; o++) {
        memcpy(m->orb_pos[o], a->orb_pos[o], sizeof m->orb_pos[o]);
        m->orb_l[o] = a->orb_l[o];
    }
    for (int o = 0; o < b->nspatial; o++) {
        memcpy(m->orb_pos[a->nspatial + o], b->orb_pos[o], sizeof m->orb_pos[o]);
        m->orb_l[a->nspatial + o] = b->orb_l[o];
    }
    for (int r = 0; r < a->nR; r++)
        memcpy(m->R[r], a->R[r], sizeof m->R[r]);
    int next = a->nR;
    for (int r = 0; r < b->nR; r++)
        if (tb_model_find_R(a, b->R[r]) < 0) memcpy(m->R[next++], b->R[r], sizeof m->R[0]);
    const tb_model *part[2] = {a, b};
    for (int p = 0; p < 2; p++) {
        const tb_model *x = part[p];
        int off = p ? a->nspatial : 0;
        for (int r = 0; r < x->nR; r++) {
            assert_int_equal(x->deg[r], 1);
            int rm = tb_model_find_R(m, x->R[r]);
            for (int i = 0; i < x->norb; i++)
                for (int j = 0; j < x->norb; j++) {
                    int I2 = tb_state_index(m, off + tb_state_orbital(x, i), tb_state_spin(x, i));
                    int J2 = tb_state_index(m, off + tb_state_orbital(x, j), tb_state_spin(x, j));
                    m->H[((size_t)rm * n + I2) * n + J2] = x->H[((size_t)r * x->norb + i) * x->norb + j];
                }
        }
    }
    assert_int_equal(tb_model_validate(m, 0.0, m->id, &err), 0);
    return m;
}

/* Z2 indices add modulo 2 under a direct sum (common practice; the deltas of Phys. Rev. B 76,
 * 045302 (2007) multiply). Two identical Kane-Mele copies make every occupied level at the TRIM
 * fourfold degenerate, which tests that parities come from the whole occupied subspace:
 * 1 + 1 = 0 in 2D; strong + weak diamond: 1;111 + 0;111 = 1;000. */
static void test_direct_sums(void **state)
{
    (void)state;
    const char *pairs[][3] = {
        {"kane_mele:lambda_v=0,lambda_R=0", "kane_mele:lambda_v=0,lambda_R=0", "0"},
        {"kane_mele:lambda_v=0,lambda_R=0", "kane_mele:lambda_v=0,lambda_R=0,lambda_SO=0.02", "0"},
        {"fkm:dt=0.4", "fkm:dt=-0.4", "1;000"},
        {"fkm:dt=0.4", "fkm:dt=0.3", "0;000"},
        {"bhz:M=1", "bhz:M=-1", "1"},
    };
    for (size_t i = 0; i < sizeof pairs / sizeof pairs[0]; i++) {
        tb_model *a = bs_test_build(pairs[i][0]), *b = bs_test_build(pairs[i][1]);
        tb_model *m = direct_sum(a, b);
        for (int variant = 0; variant < 2; variant++) {
            tb_model *q = m;
            if (variant) {
                /* Phases and the interleaved layout; no permutation, since shells of equal l on one
                 * site are paired in order of appearance (symmetry.h). */
                double phi[8];
                for (int o = 0; o < m->nspatial; o++)
                    phi[o] = 0.7 + 1.3 * o * o;
                tb_model *t = NULL;
                bs_err err;
                bs_err_clear(&err);
                assert_int_equal(tf_phase(m, phi, &t, &err), 0);
                assert_int_equal(tf_spin_layout(t, TB_SPIN_INTERLEAVED, &q, &err), 0);
                tb_model_free(t);
            }
            par_result r;
            parity_of(q, &r);
            char got[16];
            par_format(&r, got, sizeof got);
            if (r.status != PAR_DONE || strcmp(got, pairs[i][2]) != 0)
                fail_msg("%s + %s (%d): status %d \"%s\" (%s), expected \"%s\"", pairs[i][0], pairs[i][1],
                         variant, r.status, got, r.reason, pairs[i][2]);
            assert_true(r.max_dev < 1e-10); /* exact symmetry: round-off only */
            if (q != m) tb_model_free(q);
        }
        tb_model_free(m);
        tb_model_free(a);
        tb_model_free(b);
    }
}

/* BHZ with its inversion P = tau_z given as an explicit (card) operator: same Z2 as from the
 * positions (Science 314, 1757 (2006): P = tau_z, parities +1 for E1 and -1 for H1). */
static void test_card_operator(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("bhz:M=1");
    int n = m->norb;
    m->has_inversion_op = 1;
    m->inv_perm = malloc((size_t)n * sizeof *m->inv_perm);
    m->inv_sign = malloc((size_t)n * sizeof *m->inv_sign);
    m->inv_shift = calloc((size_t)n, sizeof *m->inv_shift);
    for (int i = 0; i < n; i++) {
        m->inv_perm[i] = i;
        m->inv_sign[i] = m->orb_l[tb_state_orbital(m, i)] ? -1.0 : 1.0;
    }
    sym_info *s = detect(m);
    assert_int_equal(s->inv_source, SYM_INV_CARD);
    assert_int_equal(s->inversion, 1);
    par_result r;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(par_z2(m, s, NULL, &r, &err), 0);
    assert_int_equal(r.status, PAR_DONE);
    assert_int_equal(r.z2[0], 1);
    /* At Gamma H = M tau_z (C = D = 0), so for M > 0 the occupied pair is H1, odd; at X, Y, M
     * d3 = M - 4B, M - 4B, M - 8B < 0 puts E1 (even) below (Science 314, 1757 (2006)). */
    assert_int_equal(r.nodd[0], 2);
    assert_int_equal(r.delta[0], -1);
    sym_info_free(s);
    tb_model_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_kane_mele),
        cmocka_unit_test(test_bhz),
        cmocka_unit_test(test_fkm),
        cmocka_unit_test(test_atomic),
        cmocka_unit_test(test_spinless_not_applicable),
        cmocka_unit_test(test_ambiguous_and_errors),
        cmocka_unit_test(test_basis_invariance),
        cmocka_unit_test(test_direct_sums),
        cmocka_unit_test(test_card_operator),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
