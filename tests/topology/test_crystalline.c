/* Z4 indicator and mirror Chern numbers on the Fu–Kane–Mele model and a doubled copy of it. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <cmocka.h>

#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <string.h>

#include "bandsieve/crystalline.h"
#include "bandsieve/hk.h"
#include "bandsieve/parity.h"
#include "bandsieve/symmetry.h"
#include "testutil.h"

/* Two independent copies of m side by side (2 norb states, same spin layout): every index doubles,
 * Z2 indices add mod 2 and Z4 / mirror Chern numbers add (common practice). */
static tb_model *doubled(const tb_model *m)
{
    tb_model *d = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (tb_model_create(2 * m->norb, m->nR, m->spinful, &d, &err) != 0) fail_msg("%s", err.msg);
    d->dim = m->dim;
    d->spin_layout = m->spin_layout;
    memcpy(d->lattice, m->lattice, sizeof d->lattice);
    d->nocc = 2 * m->nocc;
    int ns = m->nspatial, n = m->norb, n2 = d->norb;
    for (int c = 0; c < 2; c++)
        for (int o = 0; o < ns; o++) {
            memcpy(d->orb_pos[c * ns + o], m->orb_pos[o], sizeof d->orb_pos[0]);
            d->orb_l[c * ns + o] = m->orb_l[o];
        }
    for (int r = 0; r < m->nR; r++) {
        memcpy(d->R[r], m->R[r], sizeof d->R[r]);
        d->deg[r] = m->deg[r];
        for (int c = 0; c < 2; c++)
            for (int a = 0; a < n; a++)
                for (int b = 0; b < n; b++) {
                    int A = tb_state_index(d, c * ns + tb_state_orbital(m, a), tb_state_spin(m, a));
                    int B = tb_state_index(d, c * ns + tb_state_orbital(m, b), tb_state_spin(m, b));
                    d->H[((size_t)r * n2 + A) * n2 + B] = m->H[((size_t)r * n + a) * n + b];
                }
    }
    return d;
}

/* kappa by hand: diagonalise H at each TRIM, apply the inversion matrix to every occupied state
 * and count the parities one by one (independent of the parity module). */
static int kappa_by_hand(const tb_model *m)
{
    sym_info *s = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(sym_detect(m, NULL, &s, &err), 0);
    assert_true(s->inversion);
    int n = m->norb, sum = 0;
    double complex *H = malloc((size_t)n * n * sizeof *H), *P = malloc((size_t)n * n * sizeof *P);
    double *w = malloc((size_t)n * sizeof *w);
    for (int t = 0; t < 8; t++) {
        double k[3] = {0.5 * (t & 1), 0.5 * ((t >> 1) & 1), 0.5 * ((t >> 2) & 1)};
        hk_build_direct(m, k, H);
        assert_int_equal(LAPACKE_zheevd(LAPACK_COL_MAJOR, 'V', 'U', n, H, n, w), 0);
        assert_int_equal(sym_inversion_matrix(s, k, P), 0);
        /* parity of a degenerate multiplet: the trace of P on it, counted per state */
        int b = 0;
        while (b < m->nocc) {
            int e = b + 1;
            while (e < m->nocc && w[e] - w[b] < 1e-8) e++;
            double complex tr = 0;
            for (int q = b; q < e; q++)
                for (int i = 0; i < n; i++)
                    for (int j = 0; j < n; j++) tr += conj(H[i + (size_t)q * n]) * P[i + (size_t)j * n] * H[j + (size_t)q * n];
            sum += (int)lround(creal(tr)); /* n+ - n- of the multiplet */
            b = e;
        }
    }
    free(H);
    free(P);
    free(w);
    sym_info_free(s);
    assert_int_equal(sum % 4, 0);
    return ((sum / 4) % 4 + 4) % 4;
}

static int kappa_of(const tb_model *m, par_result *pr)
{
    sym_info *s = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(sym_detect(m, NULL, &s, &err), 0);
    assert_int_equal(par_z2(m, s, NULL, pr, &err), 0);
    int kappa = -1;
    assert_int_equal(cz_z4(pr, &kappa, &err), 0);
    sym_info_free(s);
    return kappa;
}

/* Fu–Kane–Mele (Phys. Rev. Lett. 98, 106803 (2007)): dt > 0 strong TI (nu0 = 1) so kappa is odd;
 * dt < 0 weak TI (nu0 = 0), kappa even; two copies of the strong TI have nu0 = 0 and kappa = 2, the
 * indicator of a phase beyond Z2 (Phys. Rev. X 8, 031070 (2018)). Each checked by the hand count. */
static void test_z4(void **state)
{
    const char *specs[] = {"fkm:dt=0.4", "fkm:dt=-0.4", "atomic"};
    for (int i = 0; i < 3; i++) {
        tb_model *m = bs_test_build(specs[i]);
        par_result pr;
        int kappa = kappa_of(m, &pr);
        print_message("%s: kappa %d, z2 %d;%d%d%d\n", specs[i], kappa, pr.z2[0], pr.z2[1], pr.z2[2], pr.z2[3]);
        assert_int_equal(kappa, kappa_by_hand(m));
        assert_int_equal(pr.status, PAR_DONE);
        assert_int_equal(kappa % 2, pr.z2[0]);
        if (i == 0) {
            tb_model *d = doubled(m);
            par_result pd;
            int kd = kappa_of(d, &pd);
            assert_int_equal(kd, 2);
            assert_int_equal(kd, kappa_by_hand(d));
            assert_int_equal(pd.z2[0], 0);
            tb_model_free(d);
        }
        tb_model_free(m);
    }
}

/* Product of the parity products delta over the TRIMs on the plane: the plane's 2D Z2 index
 * (Phys. Rev. B 76, 045302 (2007)). */
static int plane_z2(const cz_mirror *pl, const par_result *pr)
{
    int n_int[3] = {pl->g[0][1] * pl->g[1][2] - pl->g[0][2] * pl->g[1][1],
                    pl->g[0][2] * pl->g[1][0] - pl->g[0][0] * pl->g[1][2],
                    pl->g[0][0] * pl->g[1][1] - pl->g[0][1] * pl->g[1][0]};
    int prod = 1, count = 0;
    for (int t = 0; t < 8; t++) {
        int h[3] = {t & 1, (t >> 1) & 1, (t >> 2) & 1};
        /* on the plane through Gamma when n . (h/2) is an integer, after dividing n by its gcd */
        int g = 0;
        for (int i = 0; i < 3; i++) {
            int a = abs(n_int[i]), b = g;
            while (b) {
                int r = a % b;
                a = b, b = r;
            }
            g = a;
        }
        int dot = (n_int[0] / g) * h[0] + (n_int[1] / g) * h[1] + (n_int[2] / g) * h[2];
        if (dot % 2 != 0) continue;
        prod *= pr->delta[t];
        count++;
    }
    assert_int_equal(count, 4);
    return prod < 0;
}

/* Mirror Chern numbers: on a mirror plane through Gamma of a time-reversal-symmetric insulator,
 * the sectors carry opposite Chern numbers and C_M is odd exactly when the plane's 2D Z2 is 1
 * (Phys. Rev. B 78, 045426 (2008)). The [111]-distorted FKM model keeps three mirrors (D3d). Two
 * copies double every C_M while Z2 becomes trivial: a nonzero mirror Chern number with trivial Z2. */
static void test_mirror_chern(void **state)
{
    tb_model *m = bs_test_build("fkm:dt=0.4");
    tb_model *d = doubled(m);
    par_result pr;
    kappa_of(m, &pr);
    for (int copy = 0; copy < 2; copy++) {
        const tb_model *mm = copy ? d : m;
        cry_info *c = NULL;
        bs_err err;
        bs_err_clear(&err);
        assert_int_equal(cry_detect(mm, NULL, &c, &err), 0);
        int nm = 0, odd = 0;
        for (int i = 0; i < cry_nops(c); i++) {
            const cry_op *op = cry_get_op(c, i);
            if (!op->verified || strcmp(op->kind, "m")) continue;
            cz_mirror pl[2];
            int np = cz_mirror_planes(c, i, pl, &err);
            assert_true(np >= 1);
            assert_int_equal(cz_mirror_chern(mm, c, &pl[0], 16, 1e-6, &err), 0);
            assert_int_equal(pl[0].status, CZ_DONE);
            assert_int_equal(pl[0].c_plus, -pl[0].c_minus);
            int z2 = plane_z2(&pl[0], &pr);
            print_message("copy %d mirror %d: plane g1 (%d,%d,%d) g2 (%d,%d,%d), C+ %d C- %d, C_M %d, plane Z2 %d\n", copy + 1,
                          i, pl[0].g[0][0], pl[0].g[0][1], pl[0].g[0][2], pl[0].g[1][0], pl[0].g[1][1], pl[0].g[1][2],
                          pl[0].c_plus, pl[0].c_minus, pl[0].mirror_chern, z2);
            if (copy == 0) {
                assert_int_equal(abs(pl[0].mirror_chern) % 2, z2);
                odd += z2;
            } else {
                assert_int_equal(abs(pl[0].mirror_chern) % 2, 0);
                assert_int_equal(abs(pl[0].mirror_chern), 2 * z2);
            }
            nm++;
        }
        assert_int_equal(nm, 3);
        if (copy == 0) assert_true(odd > 0); /* the strong TI has odd mirror Chern planes */
        cry_info_free(c);
    }
    tb_model_free(d);
    tb_model_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_z4),
        cmocka_unit_test(test_mirror_chern),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
