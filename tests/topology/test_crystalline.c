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
#include "bandsieve/phasepath.h"
#include "bandsieve/hk.h"
#include "bandsieve/nodes.h"
#include "bandsieve/realharm.h"
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
            while (e < m->nocc && w[e] - w[b] < 1e-8)
                e++;
            double complex tr = 0;
            for (int q = b; q < e; q++)
                for (int i = 0; i < n; i++)
                    for (int j = 0; j < n; j++)
                        tr += conj(H[i + (size_t)q * n]) * P[i + (size_t)j * n] * H[j + (size_t)q * n];
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
        print_message("%s: kappa %d, z2 %d;%d%d%d\n", specs[i], kappa, pr.z2[0], pr.z2[1], pr.z2[2],
                      pr.z2[3]);
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
            print_message(
                "copy %d mirror %d: plane g1 (%d,%d,%d) g2 (%d,%d,%d), C+ %d C- %d, C_M %d, plane Z2 %d\n",
                copy + 1, i, pl[0].g[0][0], pl[0].g[0][1], pl[0].g[0][2], pl[0].g[1][0], pl[0].g[1][1],
                pl[0].g[1][2], pl[0].c_plus, pl[0].c_minus, pl[0].mirror_chern, z2);
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

/* Two-band spinless models with time reversal (real H(R)), a two-fold axis along z and no
 * inversion, on the simple cubic lattice (3 Angstrom). Diagonal: d(k) = m - 2t (cos kx + cos ky +
 * cos kz) + 2u cos 2kz on the s orbital, -d(k) on the p orbital; with t = u = 1 the band
 * difference along the kz axis is smallest at the generic cos kz = 1/4, so the gap first closes
 * there as m falls below 6.25 (a hand calculation: d = m - 4 - 2 cos kz + 2 cos 2kz, minimum -2.25).
 *   axis_equal = 1: orbitals s and pz, coupling h = 2 i lambda sin kz + gamma (a polar term):
 *     C2z eigenvalues +1, +1; h != 0 on the axis.
 *   axis_equal = 0: orbitals s and px, coupling h = 2 i lambda sin kx + gamma sin ky sin kz:
 *     C2z eigenvalues +1, -1; h = 0 on the axis; the gamma term is even in k, so it breaks
 *     inversion (P = diag(1, -1) needs h odd) and keeps C2z and time reversal. */
static tb_model *c2_model(int axis_equal, double mass)
{
    const double t = 1.0, u = 1.0, lambda = 0.5, gamma = 0.4;
    int Rs[64][3], nR = 0;
    for (int x = -1; x <= 1; x++)
        for (int y = -1; y <= 1; y++)
            for (int z = -2; z <= 2; z++)
                Rs[nR][0] = x, Rs[nR][1] = y, Rs[nR][2] = z, nR++;
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (tb_model_create(2, nR, 0, &m, &err) != 0) fail_msg("%s", err.msg);
    for (int i = 0; i < 3; i++)
        m->lattice[i][i] = 3.0;
    m->orb_l[0] = 0, m->orb_l[1] = 1;
    m->nocc = 1;
    for (int r = 0; r < nR; r++) {
        int x = Rs[r][0], y = Rs[r][1], z = Rs[r][2];
        memcpy(m->R[r], Rs[r], sizeof m->R[r]);
        double complex *H = m->H + (size_t)r * 4;
        int ax = abs(x) + abs(y) + abs(z);
        double d = 0;
        if (ax == 0) d = mass;
        if (ax == 1) d = -t;
        if (x == 0 && y == 0 && abs(z) == 2) d = u;
        H[0] = d, H[3] = -d;
        double complex sp = 0, ps = 0;
        if (axis_equal) {
            if (ax == 0) sp = ps = gamma;
            if (x == 0 && y == 0 && abs(z) == 1) sp = lambda * z, ps = -lambda * z;
        } else {
            if (abs(x) == 1 && y == 0 && z == 0) sp = lambda * x, ps = -lambda * x;
            if (x == 0 && abs(y) == 1 && abs(z) == 1) sp = ps = -gamma * y * z / 4.0;
        }
        H[0 * 2 + 1] = sp; /* model.h layout: H[m * norb + n] = <m,0|H|n,R> */
        H[1 * 2 + 0] = ps;
    }
    return m;
}

static int find_c2z(const cry_info *c)
{
    for (int i = 0; i < cry_nops(c); i++) {
        const cry_op *op = cry_get_op(c, i);
        if (op->verified && !strcmp(op->kind, "2") && fabs(fabs(op->axis[2]) - 1) < 1e-9) return i;
    }
    return -1;
}

/* The C2 rule (New J. Phys. 9, 356 (2007)): predicted at the axis point where the gap is smallest
 * just before the closing, and found by the node search just after it. Different C2 eigenvalues:
 * Weyl nodes on the axis, in pairs of opposite chirality (a multiple of 4 with time reversal);
 * equal: the axis stays gapped. */
/* The rock-salt model of Nat. Commun. 3, 982 (2012): band inversion at the four L points, so the
 * Z2 indices are trivial and kappa = 0, while the six {110} mirror planes carry mirror Chern number
 * 2 in magnitude (the paper's n_M = -2 for SnTe) and the three {100} mirrors 0; with the mass
 * reversed (no inversion) every mirror Chern number is 0. */
static void test_rocksalt_tci(void **state)
{
    for (int inverted = 1; inverted >= 0; inverted--) {
        tb_model *m = bs_test_build(inverted ? "rocksalt_tci" : "rocksalt_tci:m=-1.65");
        par_result pr;
        assert_int_equal(kappa_of(m, &pr), 0);
        assert_int_equal(pr.status, PAR_DONE);
        for (int i = 0; i < 4; i++)
            assert_int_equal(pr.z2[i], 0);
        cry_info *c = NULL;
        bs_err err;
        bs_err_clear(&err);
        assert_int_equal(cry_detect(m, NULL, &c, &err), 0);
        /* both sites carry a p shell, so from positions alone they are one species and the
         * structure is simple cubic of half the edge (Pm-3m, 221, with the translation by
         * (1/2,1/2,1/2) among spglib's 96 operations); the Hamiltonian keeps the 48 of Fm-3m */
        assert_int_equal(cry_spacegroup(c), 221);
        assert_int_equal(cry_nops(c), 96);
        assert_int_equal(cry_nverified(c), 48);
        int n110 = 0, n100 = 0;
        for (int i = 0; i < cry_nops(c); i++) {
            const cry_op *op = cry_get_op(c, i);
            if (!op->verified || strcmp(op->kind, "m")) continue;
            cz_mirror pl[2];
            assert_true(cz_mirror_planes(c, i, pl, &err) >= 1);
            assert_int_equal(cz_mirror_chern(m, c, &pl[0], 16, 1e-6, &err), 0);
            assert_int_equal(pl[0].status, CZ_DONE);
            int zeros = 0;
            for (int x = 0; x < 3; x++)
                zeros += fabs(op->axis[x]) < 1e-9;
            if (zeros == 1) { /* {110} normal */
                assert_int_equal(abs(pl[0].mirror_chern), inverted ? 2 : 0);
                n110++;
            } else {
                assert_int_equal(pl[0].mirror_chern, 0);
                n100++;
            }
        }
        assert_int_equal(n110, 6);
        assert_int_equal(n100, 3);
        cry_info_free(c);
        tb_model_free(m);
    }
}

static void test_c2_closing_rule(void **state)
{
    const double kz0 = acos(0.25) / (2 * M_PI);
    for (int equal = 0; equal <= 1; equal++) {
        const int shell[2] = {0, rh_index(1, equal ? "pz" : "px")};
        tb_model *before = c2_model(equal, 6.4), *after = c2_model(equal, 6.0);
        bs_err err;
        bs_err_clear(&err);
        assert_int_equal(tb_model_validate(before, 1e-12, "c2", &err), 0);
        cry_opts o;
        cry_opts_default(&o);
        o.shell_index = shell;
        cry_info *c = NULL;
        assert_int_equal(cry_detect(before, &o, &c, &err), 0);
        assert_true(find_c2z(c) >= 0);
        const double k[3] = {0, 0, kz0};
        cz_prediction pred;
        assert_int_equal(cz_predict_closing(before, c, k, 0, &pred, &err), 0);
        print_message("%s: %s\n", equal ? "s+pz" : "s+px", pred.text);
        assert_int_equal(pred.kind, equal ? CZ_PRED_REPEL : CZ_PRED_AXIS_WEYL);
        cry_info_free(c);

        /* found: the smallest gap on the axis after the sweep, and the nodes */
        double complex H[4];
        double axis_gap = INFINITY;
        for (int i = 0; i <= 2000; i++) {
            double kk[3] = {0, 0, i / 2000.0};
            hk_build_direct(after, kk, H);
            double a = creal(H[0]), dd = creal(H[3]);
            double g = sqrt((a - dd) * (a - dd) + 4 * cabs(H[2]) * cabs(H[2])); /* H column-major */
            axis_gap = fmin(axis_gap, g);
        }
        hk_engine *e = NULL;
        assert_int_equal(hk_create(after, 64, &e, &err), 0);
        nodes_result nr;
        nodes_result_init(&nr);
        assert_int_equal(nodes_find(after, e, NULL, &nr, &err), 0);
        int on_axis = 0, plus = 0, minus = 0;
        for (int i = 0; i < nr.nnodes; i++) {
            const double *kn = nr.nodes[i].k;
            double dx = kn[0] - round(kn[0]), dy = kn[1] - round(kn[1]);
            if (fabs(dx) < 1e-5 && fabs(dy) < 1e-5) {
                on_axis++;
                plus += nr.nodes[i].chirality > 0;
                minus += nr.nodes[i].chirality < 0;
            }
        }
        print_message("  axis gap after %.3g eV, %d nodes (%d on the axis: %d +, %d -), net %d\n", axis_gap,
                      nr.nnodes, on_axis, plus, minus, nr.net_chirality);
        if (equal) {
            assert_true(axis_gap > 0.1); /* 2 gamma = 0.8 eV at the crossing of the diagonals */
            assert_int_equal(on_axis, 0);
        } else {
            assert_true(axis_gap < 1e-6);
            assert_int_equal(on_axis, 4);
            assert_int_equal(plus, 2);
            assert_int_equal(minus, 2);
        }
        assert_int_equal(nr.net_chirality, 0);
        nodes_result_clear(&nr);
        hk_free(e);
        tb_model_free(before);
        tb_model_free(after);
    }
}

/* The same two models followed by the phase path (phasepath.h) through the transition: with
 * different C2 eigenvalues the path predicts a Weyl pair on the axis at the first touching and
 * finds a gapless interval with Weyl nodes, so the two agree (New J. Phys. 9, 356 (2007)). With
 * equal eigenvalues the axis stays gapped: no closing there is predicted, and any closing the path
 * finds is elsewhere, where no protecting symmetry acts (a generic pair). The mass enters H(R)
 * linearly, so the interpolation between the two members is the model itself. */
static void test_c2_path_prediction(void **state)
{
    (void)state;
    for (int equal = 0; equal <= 1; equal++) {
        tb_model *a = c2_model(equal, 6.4), *b = c2_model(equal, 5.6);
        int shape[2] = {0, rh_index(1, equal ? "pz" : "px")};
        for (int i = 0; i < 2; i++) {
            tb_model *m = i ? b : a;
            m->orb_shape = malloc(sizeof shape);
            memcpy(m->orb_shape, shape, sizeof shape);
        }
        const tb_model *ms[2] = {a, b};
        double vals[2] = {-6.4, -5.6}; /* increasing values: the parameter is minus the mass */
        bs_err err;
        bs_err_clear(&err);
        pp_source *s = NULL;
        assert_int_equal(pp_source_members(ms, vals, 2, &s, &err), 0);
        pp_opts o;
        pp_opts_init(&o);
        o.nsamples = 17;
        o.no_tracks = 1;
        pp_result r;
        pp_result_init(&r);
        if (pp_run(s, "minus_mass", -6.4, -5.6, &o, &r, &err) != 0) fail_msg("%s", err.msg);
        int weyl_closings = 0;
        for (int i = 0; i < r.nclosing; i++) {
            const pp_closing *c = &r.closings[i];
            print_message("%s: closing %s at %.4f..%.4f, k %.3g %.3g %.6f: %s (agrees %d)\n",
                          equal ? "s+pz" : "s+px", c->kind, c->x_lo, c->x_hi, c->k[0][0], c->k[0][1],
                          c->k[0][2], c->predicted ? c->prediction : "no prediction", c->agrees);
            if (!equal && fabs(c->x_lo + 6.25) < 1e-3) {
                assert_false(c->point);
                assert_int_equal(c->predicted_kind, CZ_PRED_AXIS_WEYL);
                assert_int_equal(c->agrees, 1);
                weyl_closings++;
            }
            if (equal) {
                assert_true(c->predicted_kind != CZ_PRED_AXIS_WEYL);
                assert_true(c->agrees != 0);
            }
        }
        if (!equal) assert_int_equal(weyl_closings, 1);
        pp_result_clear(&r);
        pp_source_free(s);
        tb_model_free(a);
        tb_model_free(b);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_z4),           cmocka_unit_test(test_c2_path_prediction),
        cmocka_unit_test(test_mirror_chern), cmocka_unit_test(test_c2_closing_rule),
        cmocka_unit_test(test_rocksalt_tci),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
