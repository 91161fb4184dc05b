/* Tests of symmetry detection (symmetry.h): time reversal and inversion of published models, the
 * inversion matrix P(k) against a hand derivation and against H(k) built directly, invariance
 * under orbital permutations, orbital phases and the spin layout, the card's explicit operator,
 * and the errors for a malformed one. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/hk.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/symmetry.h"
#include "bandsieve/transform.h"

#define assert_close(a, b, tol)                                                                              \
    do {                                                                                                     \
        double a_ = (a), b_ = (b);                                                                           \
        if (!(fabs(a_ - b_) <= (tol)))                                                                       \
            fail_msg("%s = %.12g, expected %.12g within %g", #a, a_, b_, (double)(tol));                     \
    } while (0)

/* Residual of an exact symmetry: sums of O(10) terms of O(1) eV in double precision leave
 * ~1e-15 relative; 1e-12 leaves room and is still six orders below the detection tolerance. */
#define EXACT_TOL 1e-12

static sym_info *detect(const tb_model *m, unsigned long long seed)
{
    sym_opts o;
    sym_opts_default(&o);
    o.seed = seed;
    sym_info *s = NULL;
    bs_err err;
    bs_err_clear(&err);
    int rc = sym_detect(m, &o, &s, &err);
    if (rc != 0) fprintf(stderr, "sym_detect(%s): %s\n", m->id, err.msg);
    assert_int_equal(rc, 0);
    assert_non_null(s);
    return s;
}

/* Expected flags of one model spec. */
typedef struct expect {
    const char *spec;
    int tr, inv;
    const char *why;
} expect;

/* Each line: the symmetry content of the published model, with its source. */
static const expect cases[] = {
    /* Graphene: real nearest-neighbour hopping (TR), inversion about the hexagon centre
     * (Rev. Mod. Phys. 81, 109 (2009)). */
    {"graphene", 1, 1, "graphene"},
    /* Haldane: complex second-neighbour hopping breaks TR for phi != 0, 1; at phi = 0 the model
     * is real and TR-symmetric; M = 0 keeps inversion (Phys. Rev. Lett. 61, 2015 (1988)). */
    {"haldane", 0, 1, "haldane phi = pi/2"},
    {"haldane:phi=0", 1, 1, "haldane phi = 0"},
    {"haldane:phi=0,M=0.2", 1, 0, "haldane with sublattice mass"},
    /* Kane-Mele: TR always (Phys. Rev. Lett. 95, 226801 (2005)); the staggered potential
     * lambda_v and the Rashba term (which breaks z -> -z) both break inversion. */
    {"kane_mele:lambda_v=0,lambda_R=0", 1, 1, "kane_mele symmetric"},
    {"kane_mele:lambda_v=0.1,lambda_R=0", 1, 0, "kane_mele staggered"},
    {"kane_mele:lambda_v=0.4,lambda_R=0", 1, 0, "kane_mele staggered, trivial side"},
    {"kane_mele:lambda_v=0,lambda_R=0.05", 1, 0, "kane_mele Rashba"},
    /* BHZ: TR with i s_y K, inversion P = tau_z (s and p orbitals), kept by g, broken by delta
     * (Science 314, 1757 (2006); the g and delta terms as documented in lattice_models.h). */
    {"bhz", 1, 1, "bhz"},
    {"bhz:g=0.3", 1, 1, "bhz with S_z broken"},
    {"bhz:delta=0.2", 1, 0, "bhz with inversion broken"},
    /* Fu-Kane-Mele diamond: TR; inversion about the bond centre unless the sublattices differ
     * (Phys. Rev. Lett. 98, 106803 (2007); Phys. Rev. B 76, 045302 (2007)). */
    {"fkm", 1, 1, "fkm"},
    {"fkm:dt=-0.4", 1, 1, "fkm weak"},
    {"fkm:stag=0.3", 1, 0, "fkm staggered"},
    /* Weyl model: TR broken by construction; inversion s_x (two orbitals on one site exchanged),
     * given as the model's explicit operator (lattice_models.h, Phys. Rev. B 83, 205101 (2011)). */
    {"weyl", 0, 1, "weyl"},
    /* Nodal-line model, s and p_z on one site: inversion s_z from l, and spinless time reversal
     * Theta = s_z K, which only the solved factors find (p_z carries a factor i in this basis;
     * lattice_models.h, common practice form). */
    {"nodal_line", 1, 1, "nodal line"},
    /* CsCl-type atomic insulator without spin-orbit coupling: real, inversion about A. */
    {"atomic:dim=3", 1, 1, "atomic 3D"},
    {"atomic:dim=2", 1, 1, "atomic 2D"},
};

static void test_published_models(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tb_model *m = bs_test_build(cases[i].spec);
        sym_info *s = detect(m, 7 + i);
        if (s->time_reversal != cases[i].tr || s->inversion != cases[i].inv)
            fail_msg("%s (%s): TR %d (res %.3g) INV %d (res %.3g), expected %d %d; note: %s", cases[i].spec,
                     cases[i].why, s->time_reversal, s->tr_residual, s->inversion, s->inv_residual,
                     cases[i].tr, cases[i].inv, s->note);
        /* A found symmetry is exact in these models; a broken one by at least the size of the
         * breaking term relative to ||H|| (>= 1e-3 here), far above the 1e-6 tolerance. */
        if (s->time_reversal)
            assert_true(s->tr_residual < EXACT_TOL);
        else
            assert_true(s->tr_residual > 1e-4);
        if (s->inversion)
            assert_true(s->inv_residual < EXACT_TOL);
        else
            assert_true(s->inv_residual < 0 || s->inv_residual > 1e-4);
        if (!s->time_reversal || !s->inversion) assert_true(strlen(s->note) > 0);
        assert_int_equal(s->tr_squared, m->spinful ? -1 : 1);
        if (s->time_reversal && s->inversion) assert_int_equal(s->inv_commutes_tr, 1);
        sym_info_free(s);
        if (m->has_inversion_op) {
            /* Without the explicit operator, two s orbitals on one site map to themselves and the
             * identity fails: positions and l cannot reveal this inversion (lattice_models.h). */
            m->has_inversion_op = 0;
            s = detect(m, 9);
            assert_int_equal(s->inversion, 0);
            sym_info_free(s);
        }
        tb_model_free(m);
    }
}

/* Graphene P(k) by hand (lattice_models.h positions A = (1/3,1/3,0), B = (2/3,2/3,0), p_z with
 * l = 1): -tau_A = tau_B + (-1,-1,0) and -tau_B = tau_A + (-1,-1,0), so
 * P[B,A] = P[A,B] = -exp(-2 pi i (k1 + k2)) and P[A,A] = P[B,B] = 0 (derivation in symmetry.h).
 * Tolerance 1e-14: exact arithmetic on unit numbers. */
static void test_graphene_matrix_by_hand(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("graphene");
    sym_info *s = detect(m, 3);
    assert_int_equal(s->inversion, 1);
    assert_int_equal(s->inv_source, SYM_INV_POSITIONS);
    double k[3] = {0.137, -0.291, 0.0};
    double complex P[4];
    assert_int_equal(sym_inversion_matrix(s, k, P), 0);
    double complex ref = -cexp(-2.0 * M_PI * I * (k[0] + k[1]));
    assert_close(cabs(P[0]), 0.0, 1e-14);
    assert_close(cabs(P[3]), 0.0, 1e-14);
    assert_close(cabs(P[1] - ref), 0.0, 1e-14);
    assert_close(cabs(P[2] - ref), 0.0, 1e-14);
    for (int d = 0; d < 3; d++)
        assert_close(s->inv_centre[d], 0.0, 1e-14);
    sym_info_free(s);
    tb_model_free(m);
}

/* ||P H P^dagger - H(-k)||_F / ||H||_F from the public matrix and the direct Fourier sum, and
 * P(-k) P(k) = 1; both exact for a true symmetry (tolerance EXACT_TOL, round-off). */
static void check_matrix(const tb_model *m, const sym_info *s, const double k[3])
{
    int n = m->norb;
    size_t nn = (size_t)n * n;
    double complex *H = malloc(nn * sizeof *H), *Hm = malloc(nn * sizeof *Hm);
    double complex *P = malloc(nn * sizeof *P), *Pm = malloc(nn * sizeof *Pm);
    assert_non_null(H);
    assert_non_null(Hm);
    assert_non_null(P);
    assert_non_null(Pm);
    double mk[3] = {-k[0], -k[1], -k[2]};
    hk_build_direct(m, k, H);
    hk_build_direct(m, mk, Hm);
    assert_int_equal(sym_inversion_matrix(s, k, P), 0);
    assert_int_equal(sym_inversion_matrix(s, mk, Pm), 0);
    double diff = 0, norm = 0, unit = 0;
    for (int a = 0; a < n; a++)
        for (int b = 0; b < n; b++) {
            double complex x = 0, y = 0;
            for (int i = 0; i < n; i++) {
                for (int j = 0; j < n; j++)
                    x += P[a + i * n] * H[i + j * n] * conj(P[b + j * n]);
                y += Pm[a + i * n] * P[i + b * n];
            }
            diff += pow(cabs(x - Hm[a + b * n]), 2);
            norm += pow(cabs(H[a + b * n]), 2);
            unit += pow(cabs(y - (a == b ? 1.0 : 0.0)), 2);
        }
    assert_true(sqrt(diff / norm) < EXACT_TOL);
    assert_true(sqrt(unit) < EXACT_TOL);
    free(H);
    free(Hm);
    free(P);
    free(Pm);
}

/* Fu-Kane-Mele diamond: inversion about the bond centre (1/8,1/8,1/8) (Phys. Rev. B 76, 045302
 * (2007)); the origin (an A site) is not a centre since -tau_B is no site. */
static void test_fkm_bond_centre_and_matrix(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("fkm");
    sym_info *s = detect(m, 11);
    assert_int_equal(s->inversion, 1);
    for (int d = 0; d < 3; d++)
        assert_close(s->inv_centre[d], 0.125, 1e-12);
    double k[3] = {0.31, -0.17, 0.44};
    check_matrix(m, s, k);
    sym_info_free(s);

    tb_model *g = bs_test_build("bhz:g=0.3");
    s = detect(g, 12);
    double k2[3] = {0.21, 0.38, 0.0};
    check_matrix(g, s, k2);
    /* U of Theta = U K: U H(k)^* U^dagger = H(-k) (exact, EXACT_TOL), from the public matrix. */
    int n = g->norb;
    double complex U[16], H[16], Hm[16];
    double mk[3] = {-k2[0], -k2[1], 0};
    sym_tr_matrix(s, U);
    hk_build_direct(g, k2, H);
    hk_build_direct(g, mk, Hm);
    double diff = 0;
    for (int a = 0; a < n; a++)
        for (int b = 0; b < n; b++) {
            double complex x = 0;
            for (int i = 0; i < n; i++)
                for (int j = 0; j < n; j++)
                    x += U[a + i * n] * conj(H[i + j * n]) * conj(U[b + j * n]);
            diff += pow(cabs(x - Hm[a + b * n]), 2);
        }
    assert_true(sqrt(diff) < EXACT_TOL);
    sym_info_free(s);
    tb_model_free(g);
    tb_model_free(m);
}

static uint64_t rng_next(uint64_t *x)
{
    *x ^= *x << 13;
    *x ^= *x >> 7;
    *x ^= *x << 17;
    return *x;
}

/* A random permutation of the spatial orbitals, random orbital phases, and (spinful) the other
 * spin layout, applied in turn through transform.h. The caller owns the result. */
static tb_model *scramble(const tb_model *m, uint64_t seed, int layout)
{
    uint64_t x = seed * 2654435761u + 1;
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
    if (m->spinful && layout != m->spin_layout) {
        assert_int_equal(tf_spin_layout(q, layout, &r, &err), 0);
        tb_model_free(q);
        q = r;
    }
    tb_model_free(p);
    free(perm);
    free(phi);
    return q;
}

/* Invariance (common practice: a basis change changes no symmetry): the flags of every model in
 * the table survive a permutation, random phases and the layout change; found symmetries stay
 * exact (EXACT_TOL). */
static void test_basis_invariance(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tb_model *m = bs_test_build(cases[i].spec);
        for (int trial = 0; trial < 2; trial++) {
            tb_model *q = scramble(m, 100 * i + trial, trial ? TB_SPIN_INTERLEAVED : TB_SPIN_BLOCKS);
            sym_info *s = detect(q, 5 + trial);
            if (s->time_reversal != cases[i].tr || s->inversion != cases[i].inv)
                fail_msg("%s scrambled (%d): TR %d (res %.3g) INV %d (res %.3g), expected %d %d; %s",
                         cases[i].spec, trial, s->time_reversal, s->tr_residual, s->inversion,
                         s->inv_residual, cases[i].tr, cases[i].inv, s->note);
            if (s->time_reversal) assert_true(s->tr_residual < EXACT_TOL);
            if (s->inversion) {
                assert_true(s->inv_residual < EXACT_TOL);
                double k[3] = {0.23, 0.61, q->dim == 3 ? -0.37 : 0.0};
                check_matrix(q, s, k);
            }
            if (s->time_reversal && s->inversion) assert_int_equal(s->inv_commutes_tr, 1);
            sym_info_free(s);
            tb_model_free(q);
        }
        tb_model_free(m);
    }
}

/* Gives m an explicit inversion operator: state i -> perm(i), with signs and shifts. */
static void set_card_operator(tb_model *m, const int *perm, const double *sign, const int (*shift)[3])
{
    int n = m->norb;
    m->has_inversion_op = 1;
    m->inv_perm = malloc((size_t)n * sizeof *m->inv_perm);
    m->inv_sign = malloc((size_t)n * sizeof *m->inv_sign);
    m->inv_shift = malloc((size_t)n * sizeof *m->inv_shift);
    for (int i = 0; i < n; i++) {
        m->inv_perm[i] = perm[i];
        m->inv_sign[i] = sign[i];
        memcpy(m->inv_shift[i], shift[i], sizeof m->inv_shift[i]);
    }
}

/* The card's operator is used when it holds (graphene, the hand-derived operator of
 * test_graphene_matrix_by_hand); a wrong one falls back to positions; a malformed one is an error. */
static void test_card_operator(void **state)
{
    (void)state;
    const int shift[2][3] = {{-1, -1, 0}, {-1, -1, 0}};
    const int swap[2] = {1, 0};
    const double minus[2] = {-1, -1};
    tb_model *m = bs_test_build("graphene");
    set_card_operator(m, swap, minus, shift);
    sym_info *s = detect(m, 1);
    assert_int_equal(s->inversion, 1);
    assert_int_equal(s->inv_source, SYM_INV_CARD);
    assert_true(s->inv_residual < EXACT_TOL);
    sym_info_free(s);
    tb_model_free(m);

    /* Identity map on graphene: P H P = H(-k) fails (H_AB(k) != H_AB(-k)), positions rescue. */
    const int ident[2] = {0, 1};
    const int zero[2][3] = {{0, 0, 0}, {0, 0, 0}};
    m = bs_test_build("graphene");
    set_card_operator(m, ident, minus, zero);
    s = detect(m, 1);
    assert_int_equal(s->inversion, 1);
    assert_int_equal(s->inv_source, SYM_INV_POSITIONS);
    assert_non_null(strstr(s->note, "card inversion operator fails"));
    sym_info_free(s);
    tb_model_free(m);

    /* Malformed: signs -1, +1 on partners square to -1. */
    const double mixed[2] = {-1, 1};
    m = bs_test_build("graphene");
    set_card_operator(m, swap, mixed, shift);
    bs_err err;
    bs_err_clear(&err);
    s = NULL;
    assert_int_equal(sym_detect(m, NULL, &s, &err), BS_EINVAL);
    assert_null(s);
    assert_non_null(strstr(err.msg, "does not square to one"));
    tb_model_free(m);

    /* Malformed: a target outside the basis. */
    const int bad[2] = {1, 5};
    m = bs_test_build("graphene");
    set_card_operator(m, bad, minus, shift);
    bs_err_clear(&err);
    assert_int_equal(sym_detect(m, NULL, &s, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "outside 1..2"));
    tb_model_free(m);
}

/* Graphene with the A orbital relabelled l = 0 (an invented variant): A and B are the only
 * candidates for each other's image and their l differ, so no map exists; residual -1. */
static void test_no_candidate(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("graphene");
    m->orb_l[0] = 0;
    sym_info *s = detect(m, 2);
    assert_int_equal(s->inversion, 0);
    assert_int_equal(s->inv_source, SYM_INV_NONE);
    assert_close(s->inv_residual, -1.0, 0.0);
    assert_non_null(strstr(s->note, "no orbital map"));
    double k[3] = {0, 0, 0};
    double complex P[4];
    assert_int_equal(sym_inversion_matrix(s, k, P), BS_EINVAL);
    sym_info_free(s);
    tb_model_free(m);
}

/* The same seed gives the same verdict and residuals; the generator is the caller's. */
static void test_seed_reproducible(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("kane_mele:lambda_v=0.1,lambda_R=0");
    sym_info *a = detect(m, 42), *b = detect(m, 42);
    assert_true(a->inv_residual == b->inv_residual);
    assert_true(a->tr_residual == b->tr_residual);
    sym_info_free(a);
    sym_info_free(b);
    tb_model_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_published_models),
        cmocka_unit_test(test_graphene_matrix_by_hand),
        cmocka_unit_test(test_fkm_bond_centre_and_matrix),
        cmocka_unit_test(test_basis_invariance),
        cmocka_unit_test(test_card_operator),
        cmocka_unit_test(test_no_candidate),
        cmocka_unit_test(test_seed_reproducible),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
