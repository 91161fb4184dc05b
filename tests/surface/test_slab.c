/* Tests of the slab builder: the unimodular basis (exact integer properties), the rebased bulk
 * (same spectrum at k' = M k), the slab Hamiltonian against the analytic layer blocks of the weyl
 * model, the layer weights, and the refusals of bad input. */
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
#include "bandsieve/hk.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/slab.h"

static int det3(int M[3][3])
{
    return M[0][0] * (M[1][1] * M[2][2] - M[1][2] * M[2][1]) -
           M[0][1] * (M[1][0] * M[2][2] - M[1][2] * M[2][0]) +
           M[0][2] * (M[1][0] * M[2][1] - M[1][1] * M[2][0]);
}

/* Exact (integer) properties of the basis, by definition: rows 0, 1 in the plane (G.n = 0),
 * row 2 one plane up (G.n = 1), det M = 1. Checked over a set of planes on fcc and cubic lattices. */
static void test_basis_properties(void **state)
{
    (void)state;
    static const int planes[][3] = {{1, 1, 1},  {0, 0, 1}, {1, 1, 0},  {1, 0, 0},
                                    {1, -1, 2}, {2, 1, 3}, {-3, 2, 5}, {0, 1, 1}};
    const char *specs[] = {"fkm", "weyl"};
    for (int s = 0; s < 2; s++) {
        tb_model *m = bs_test_build(specs[s]);
        for (size_t p = 0; p < sizeof planes / sizeof planes[0]; p++) {
            int M[3][3];
            bs_err err;
            bs_err_clear(&err);
            assert_int_equal(slab_basis(m, planes[p], M, &err), 0);
            const int *G = planes[p];
            for (int r = 0; r < 3; r++) {
                int dot = G[0] * M[r][0] + G[1] * M[r][1] + G[2] * M[r][2];
                assert_int_equal(dot, r == 2 ? 1 : 0);
            }
            assert_int_equal(det3(M), 1);
        }
        tb_model_free(m);
    }
}

/* 2D ribbons: row 0 along the edge, row 1 one line over, row 2 = a3; zigzag edge of the honeycomb
 * (Miller 0,1: the edge runs along a1) gives the identity. Exact. */
static void test_basis_ribbon(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("kane_mele");
    int M[3][3], G[3] = {0, 1, 0};
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(slab_basis(m, G, M, &err), 0);
    int id[3][3] = {{1, 0, 0}, {0, 1, 0}, {0, 0, 1}};
    assert_memory_equal(M, id, sizeof M);
    int G2[3] = {1, 1, 0}; /* armchair-type line */
    assert_int_equal(slab_basis(m, G2, M, &err), 0);
    assert_int_equal(G2[0] * M[0][0] + G2[1] * M[0][1], 0);
    assert_int_equal(G2[0] * M[1][0] + G2[1] * M[1][1], 1);
    assert_int_equal(M[2][2], 1);
    assert_int_equal(det3(M), 1);
    tb_model_free(m);
}

static void eigenvalues_bulk(const tb_model *m, const double k[3], double *E)
{
    int n = m->norb;
    double complex *H = malloc((size_t)n * n * sizeof *H);
    eig_ws *ws = NULL;
    bs_err err;
    bs_err_clear(&err);
    hk_build_direct(m, k, H);
    assert_int_equal(eig_create(n, &ws, &err), 0);
    assert_int_equal(eig_values(ws, H, E, &err), 0);
    eig_free(ws);
    free(H);
}

/* The rebased bulk is a relabelling: its spectrum at k' = M k equals the bulk one at k
 * (1e-10 eV: a unitary gauge change, only round-off; common practice). Termination cuts move
 * orbitals by whole lattice vectors, which must not change it either. */
static void test_rebased_spectrum(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("fkm:dt=0.3,stag=0.2");
    static const double ks[3][3] = {{0.1, 0.27, -0.33}, {0.5, 0.0, 0.25}, {0.41, -0.12, 0.07}};
    static const int planes[3][3] = {{1, 1, 1}, {1, 1, 0}, {2, 1, 3}};
    static const double cuts[3] = {0.0, 0.4, -0.7};
    for (int p = 0; p < 3; p++) {
        slab *s = NULL;
        bs_err err;
        bs_err_clear(&err);
        assert_int_equal(slab_create(m, planes[p], 3, cuts[p], &s, &err), 0);
        int M[3][3];
        slab_matrix(s, M);
        for (int q = 0; q < 3; q++) {
            double kp[3], E0[4], E1[4];
            for (int i = 0; i < 3; i++)
                kp[i] = M[i][0] * ks[q][0] + M[i][1] * ks[q][1] + M[i][2] * ks[q][2];
            eigenvalues_bulk(m, ks[q], E0);
            eigenvalues_bulk(slab_rebased(s), kp, E1);
            for (int b = 0; b < 4; b++)
                assert_true(fabs(E0[b] - E1[b]) < 1e-10);
        }
        /* Home layers: every orbital sits in [cut, cut + 1) along the stacking axis. */
        const tb_model *r = slab_rebased(s);
        for (int o = 0; o < r->nspatial; o++) {
            assert_true(r->orb_pos[o][2] >= cuts[p] - 1e-9);
            assert_true(r->orb_pos[o][2] < cuts[p] + 1 + 1e-9);
        }
        slab_free(s);
    }
    tb_model_free(m);
}

/* weyl model, (001) slab. The model (lattice_models.h, common practice form) is, in the Pauli
 * labelling src/model/lm_cubic.c uses (a cyclic relabelling of the header's, unitarily equivalent),
 * H = t sin ky s_x + t sin kz s_y + [t(cos kx - cos k0) + m(2 - cos ky - cos kz)] s_z, so with
 * cos kz = (e^{ikz} + e^{-ikz})/2 and sin kz = (e^{ikz} - e^{-ikz})/2i the layer blocks are
 * <j|H|j> = t sin ky s_x + [t(cos kx - cos k0) + m(2 - cos ky)] s_z and
 * <j|H|j+1> = (t/2i) s_y - (m/2) s_z (H(k) = sum_R e^{ik.R} H(R), <0|H|R>). Exact up to round-off. */
static void test_slab_blocks_weyl(void **state)
{
    (void)state;
    double t = 1.3, mm = 0.8, w = 0.2;
    tb_model *m = bs_test_build("weyl:t=1.3,m=0.8,w=0.2");
    slab *s = NULL;
    bs_err err;
    bs_err_clear(&err);
    int G[3] = {0, 0, 1}, N = 5;
    assert_int_equal(slab_create(m, G, N, 0.0, &s, &err), 0);
    assert_int_equal(slab_nstates(s), 2 * N);
    assert_int_equal(slab_range(s), 1);
    assert_int_equal(slab_kdim(s), 2);
    double kpar[2] = {0.13, -0.21}, kx = 2 * M_PI * kpar[0], ky = 2 * M_PI * kpar[1], k0 = 2 * M_PI * w;
    int ns = 2 * N;
    double complex *H = malloc((size_t)ns * ns * sizeof *H);
    slab_hk(s, kpar, H);
    double dz = t * (cos(kx) - cos(k0)) + mm * (2 - cos(ky)), dx = t * sin(ky);
    double complex on[2][2] = {{dz, dx}, {dx, -dz}};
    double complex up[2][2] = {{-mm / 2, -t / 2}, {t / 2, mm / 2}};
    for (int j = 0; j < N; j++)
        for (int jp = 0; jp < N; jp++)
            for (int a = 0; a < 2; a++)
                for (int b = 0; b < 2; b++) {
                    double complex want = 0;
                    if (jp == j)
                        want = on[a][b];
                    else if (jp == j + 1)
                        want = up[a][b];
                    else if (jp == j - 1)
                        want = conj(up[b][a]);
                    double complex got = H[(j * 2 + a) + (size_t)(jp * 2 + b) * ns];
                    if (cabs(got - want) >= 1e-12)
                        fail_msg("block (%d,%d) elem (%d,%d): got %g%+gi want %g%+gi", j, jp, a, b,
                                 creal(got), cimag(got), creal(want), cimag(want));
                }
    free(H);
    slab_free(s);
    tb_model_free(m);
}

/* Weights: a state on layer 0 only is all bottom, one on the last layer all top (by definition). */
static void test_weights(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("weyl");
    slab *s = NULL;
    bs_err err;
    bs_err_clear(&err);
    int G[3] = {0, 0, 1};
    assert_int_equal(slab_create(m, G, 10, 0.0, &s, &err), 0);
    double complex v[20] = {0};
    double wt, wb;
    v[0] = 1;
    slab_weights(s, v, 2, &wt, &wb);
    assert_true(wb == 1 && wt == 0);
    v[0] = 0;
    v[19] = I;
    slab_weights(s, v, 2, &wt, &wb);
    assert_true(wt == 1 && wb == 0);
    slab_free(s);
    tb_model_free(m);
}

static void test_bad_input(void **state)
{
    (void)state;
    tb_model *m3 = bs_test_build("fkm"), *m2 = bs_test_build("kane_mele");
    slab *s = NULL;
    bs_err err;
    struct {
        tb_model *m;
        int G[3];
        int N;
        const char *msg;
    } cases[] = {
        {m3, {0, 0, 0}, 4, "0,0,0"},
        {m3, {2, 2, 0}, 4, "coprime"},
        {m2, {0, 1, 1}, 4, "2D model"},
        {m3, {1, 1, 1}, 0, "layer count 0"},
        {m3, {1, 1, 1}, 100000, "layer count 100000"},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        bs_err_clear(&err);
        assert_int_equal(slab_create(cases[i].m, cases[i].G, cases[i].N, 0.0, &s, &err), BS_EINVAL);
        assert_null(s);
        assert_non_null(strstr(err.msg, cases[i].msg));
    }
    bs_err_clear(&err);
    int G[3] = {1, 1, 1};
    assert_int_equal(slab_create(m3, G, 4, NAN, &s, &err), BS_EINVAL);
    tb_model_free(m3);
    tb_model_free(m2);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_basis_properties), cmocka_unit_test(test_basis_ribbon),
        cmocka_unit_test(test_rebased_spectrum), cmocka_unit_test(test_slab_blocks_weyl),
        cmocka_unit_test(test_weights),          cmocka_unit_test(test_bad_input),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
