/* Tests of the built-in lattice models (lattice_models.h): every model validates, bands agree with
 * published analytic results (dispersions, gaps at K, phase boundaries, parities, Weyl nodes and
 * their chiralities, nodal loops), and bad specs fail with messages that name them. */
#include <complex.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "bandsieve/eig.h"
#include "bandsieve/hk.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/model.h"

#define MAXN 8

/* |a - b| <= tol, printing both values when it fails (this cmocka has no double comparison). */
#define assert_near(a, b, tol) near_check((a), (b), (tol), #a, __FILE__, __LINE__)
static void near_check(double a, double b, double tol, const char *what, const char *file, int line)
{
    if (!(fabs(a - b) <= tol)) {
        fprintf(stderr, "%s:%d: %s = %.17g, expected %.17g within %g\n", file, line, what, a, b, tol);
        fail();
    }
}

static tb_model *build_ok(const char *spec)
{
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    int rc = lm_build(spec, &m, &err);
    if (rc != 0) fprintf(stderr, "lm_build(%s): %s\n", spec, err.msg);
    assert_int_equal(rc, 0);
    assert_non_null(m);
    return m;
}

/* Eigenvalues (ascending) of H(k), k reduced; vectors (column-major) into vec when not NULL. */
static void bands_at(const tb_model *m, const double k[3], double *w, double complex *vec)
{
    double complex H[MAXN * MAXN];
    assert_true(m->norb <= MAXN);
    hk_build_direct(m, k, H);
    eig_ws *ws = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(eig_create(m->norb, &ws, &err), 0);
    if (vec) {
        assert_int_equal(eig_vectors(ws, H, w, &err), 0);
        memcpy(vec, H, (size_t)m->norb * m->norb * sizeof *H);
    } else {
        assert_int_equal(eig_values(ws, H, w, &err), 0);
    }
    eig_free(ws);
}

/* Deterministic uniform numbers in [0,1) (xorshift64*), seeded per test. */
static double uniform(uint64_t *s)
{
    *s ^= *s >> 12;
    *s ^= *s << 25;
    *s ^= *s >> 27;
    return (double)((*s * 2685821657736338717ULL) >> 11) / 9007199254740992.0;
}

static void test_every_model_validates(void **state)
{
    (void)state;
    int n = 0;
    const lm_info *cat = lm_catalogue(&n);
    assert_true(n >= 9);
    for (int i = 0; i < n; i++) {
        for (int layout = 0; layout <= cat[i].spinful; layout++) {
            char spec[64];
            snprintf(spec, sizeof spec, layout ? "%s:layout=1" : "%s", cat[i].name);
            tb_model *m = build_ok(spec);
            bs_err err;
            bs_err_clear(&err);
            /* Zero tolerance: the builders make H(-R) = H(R)^dagger exactly (brief). */
            assert_int_equal(tb_model_validate(m, 0.0, spec, &err), 0);
            assert_string_equal(m->id, spec);
            assert_true(strlen(m->source) > 10);
            assert_int_equal(m->spinful, cat[i].spinful);
            assert_int_equal(m->spin_layout, !m->spinful ? TB_SPIN_NONE
                                             : layout    ? TB_SPIN_INTERLEAVED
                                                         : TB_SPIN_BLOCKS);
            if (cat[i].dim) assert_int_equal(m->dim, cat[i].dim);
            assert_true(m->nocc >= 1 && m->nocc < m->norb);
            for (int r = 0; r < m->nR; r++)
                assert_int_equal(m->deg[r], 1);
            for (int j = 0; j < cat[i].nparam; j++) {
                const lm_param *p = &cat[i].params[j];
                assert_true(p->def >= p->lo && p->def <= p->hi);
                assert_non_null(p->meaning);
            }
            tb_model_free(m);
        }
    }
    assert_ptr_equal(lm_find("trivial"), lm_find("atomic"));
    assert_null(lm_find("kane"));
}

/* Graphene: E = +-t |1 + e^{ik.a1} + e^{ik.a2}|, Rev. Mod. Phys. 81, 109 (2009). Tolerance 1e-12 eV:
 * double-precision 2x2 diagonalisation of entries ~3 eV is exact to ~1e-15; 1e-12 is the brief's. */
static void test_graphene_dispersion(void **state)
{
    (void)state;
    tb_model *m = build_ok("graphene:t=2.8");
    hk_engine *hk = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(hk_create(m, 1, &hk, &err), 0);
    uint64_t seed = 0x9e3779b97f4a7c15ULL;
    for (int trial = 0; trial < 50; trial++) {
        double k[3] = {2 * uniform(&seed) - 1, 2 * uniform(&seed) - 1, 0};
        double complex f = 1 + cexp(2 * M_PI * I * k[0]) + cexp(2 * M_PI * I * k[1]);
        double w[2];
        bands_at(m, k, w, NULL);
        assert_near(w[0], -2.8 * cabs(f), 1e-12);
        assert_near(w[1], 2.8 * cabs(f), 1e-12);
        /* The batched builder must agree with the direct sum (same tolerance, same reason). */
        double complex H[4], Hd[4];
        assert_int_equal(hk_build(hk, 1, k, H, &err), 0);
        hk_build_direct(m, k, Hd);
        for (int i = 0; i < 4; i++)
            assert_true(cabs(H[i] - Hd[i]) < 1e-12);
    }
    /* Orbital positions are the true ones: A (1/3,1/3), B (2/3,2/3), bond length a/sqrt3. */
    assert_near(m->orb_pos[0][0], 1.0 / 3.0, 1e-15);
    assert_near(m->orb_pos[1][1], 2.0 / 3.0, 1e-15);
    hk_free(hk);
    tb_model_free(m);
}

/* Kane-Mele at lambda_R = 0: at K the spin sectors have masses lambda_v -+ 3 sqrt3 lambda_SO, so
 * E(K) = {+-(lambda_v - 3 sqrt3 lambda_SO), +-(lambda_v + 3 sqrt3 lambda_SO)} and the gap closes at
 * lambda_v = 3 sqrt3 lambda_SO, the 2D TI / trivial boundary of Phys. Rev. Lett. 95, 226801 (2005).
 * Tolerance 1e-12 eV: exact arithmetic up to round-off. */
static void test_kane_mele_gap_at_K(void **state)
{
    (void)state;
    const double lso = 0.06, lv = 0.1, b = 3 * sqrt(3.0) * lso;
    tb_model *m = build_ok("kane_mele:lambda_R=0,lambda_SO=0.06,lambda_v=0.1,t=1.3");
    const double K[2][3] = {{1.0 / 3, -1.0 / 3, 0}, {-1.0 / 3, 1.0 / 3, 0}};
    double expect[4] = {-(b + lv), -(b - lv), b - lv, b + lv};
    for (int v = 0; v < 2; v++) {
        double w[4];
        bands_at(m, K[v], w, NULL);
        for (int i = 0; i < 4; i++)
            assert_near(w[i], expect[i], 1e-12);
    }
    tb_model_free(m);
    /* On the boundary lambda_v = 3 sqrt3 lambda_SO the gap at K is zero (within round-off). */
    char spec[96];
    snprintf(spec, sizeof spec, "kane_mele:lambda_R=0,lambda_SO=0.05,lambda_v=%.17g", 3 * sqrt(3.0) * 0.05);
    m = build_ok(spec);
    double w[4];
    bands_at(m, K[0], w, NULL);
    assert_true(w[2] - w[1] < 1e-12);
    tb_model_free(m);
}

/* Kane-Mele at lambda_v = 0: the Rashba term closes the gap (at K) at lambda_R = 2 sqrt3 lambda_SO,
 * Phys. Rev. Lett. 95, 226801 (2005). Closed: 1e-12 eV round-off; open at 0.9 times the critical
 * value: the gap there is 0.062 eV (computed), so 0.05 eV is a safe lower bound. */
static void test_kane_mele_rashba_closing(void **state)
{
    (void)state;
    const double K[3] = {1.0 / 3, -1.0 / 3, 0};
    const double factor[2] = {1.0, 0.9};
    for (int i = 0; i < 2; i++) {
        char spec[96];
        snprintf(spec, sizeof spec, "kane_mele:lambda_v=0,lambda_SO=0.06,lambda_R=%.17g",
                 factor[i] * 2 * sqrt(3.0) * 0.06);
        tb_model *m = build_ok(spec);
        double w[4];
        bands_at(m, K, w, NULL);
        if (i == 0)
            assert_true(w[2] - w[1] < 1e-12);
        else
            assert_true(w[2] - w[1] > 0.05);
        tb_model_free(m);
    }
}

/* Lattice Chern number of the lower band of a 2D two-band model on an n x n mesh, from plaquette
 * link products (J. Phys. Soc. Jpn. 74, 1674 (2005)), with the sign of Omega = curl A,
 * A = i<u|grad u>, and b1 x b2 along +z. */
static double chern_lower(const tb_model *m, int n)
{
    double complex *u = malloc((size_t)n * n * 2 * sizeof *u);
    assert_non_null(u);
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++) {
            double k[3] = {(double)i / n, (double)j / n, 0}, w[2];
            double complex v[4];
            bands_at(m, k, w, v);
            u[2 * (i * n + j)] = v[0];
            u[2 * (i * n + j) + 1] = v[1];
        }
    double total = 0;
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++) {
            int c[4] = {i * n + j, ((i + 1) % n) * n + j, ((i + 1) % n) * n + (j + 1) % n,
                        i * n + (j + 1) % n};
            double complex prod = 1;
            for (int q = 0; q < 4; q++) {
                const double complex *a = u + 2 * c[q], *b = u + 2 * c[(q + 1) % 4];
                prod *= conj(a[0]) * b[0] + conj(a[1]) * b[1];
            }
            total += -carg(prod);
        }
    free(u);
    return total / (2 * M_PI);
}

/* Haldane: |C| = 1 for |M| < 3 sqrt3 |t2 sin phi|, 0 beyond (Phys. Rev. Lett. 61, 2015 (1988)); the
 * sign, C = -sign(t2 sin phi) in the convention of chern_lower, is this implementation's orientation
 * (documented in lattice_models.h). The link-variable sum is an integer up to round-off: 1e-9. */
static void test_haldane_chern(void **state)
{
    (void)state;
    static const struct {
        const char *spec;
        double chern;
    } cases[] = {
        {"haldane", -1},      {"haldane:phi=-0.5", 1}, {"haldane:M=0.45", -1},
        {"haldane:M=0.6", 0}, {"haldane:M=-0.6", 0},   {"haldane:t2=-0.1,phi=0.3", 1},
    };
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++) {
        tb_model *m = build_ok(cases[i].spec);
        assert_near(chern_lower(m, 24), cases[i].chern, 1e-9);
        tb_model_free(m);
    }
}

/* Haldane, Phys. Rev. Lett. 61, 2015 (1988): at K and K', E = -3 t2 cos phi +- (M -+ 3 sqrt3 t2 sin phi);
 * the gap closes at M = +-3 sqrt3 t2 sin phi. Tolerance 1e-12 eV, round-off only. */
static void test_haldane_gap_at_K(void **state)
{
    (void)state;
    const double t2 = 0.13, phi = 0.3 * M_PI, M = 0.2;
    tb_model *m = build_ok("haldane:t2=0.13,phi=0.3,M=0.2,t1=0.9");
    const double K[2][3] = {{1.0 / 3, -1.0 / 3, 0}, {-1.0 / 3, 1.0 / 3, 0}};
    for (int v = 0; v < 2; v++) {
        double mass = fabs(M - (v == 0 ? 1 : -1) * 3 * sqrt(3.0) * t2 * sin(phi)), w[2];
        bands_at(m, K[v], w, NULL);
        assert_near(w[0], -3 * t2 * cos(phi) - mass, 1e-12);
        assert_near(w[1], -3 * t2 * cos(phi) + mass, 1e-12);
    }
    tb_model_free(m);
}

/* Fu-Kane parity criterion, Phys. Rev. B 76, 045302 (2007): with inversion about the [111] bond
 * centre, P|A,R> = |B,-R>, which is the sublattice swap at every TRIM in the gauge of model.h.
 * delta_i = product of the parities of the occupied Kramers pairs; nu0 from all eight TRIM, nu_j
 * from the four with n_j = 1. Phys. Rev. Lett. 98, 106803 (2007): dt > 0 gives (1;111) and
 * dt < 0 gives (0;111). Exact: parities are +-1 and rounded from values within 1e-10 of them. */
static void fkm_indices(const char *spec, int nu[4])
{
    tb_model *m = build_ok(spec);
    int n = m->norb;
    double delta[8];
    for (int t = 0; t < 8; t++) {
        double k[3] = {0.5 * (t & 1), 0.5 * (t >> 1 & 1), 0.5 * (t >> 2 & 1)}, w[MAXN];
        double complex v[MAXN * MAXN];
        bands_at(m, k, w, v);
        /* At a TRIM the occupied Kramers pair is one degenerate P eigenspace (partners share their
         * parity), so every occupied vector has <P> = +-1; one of each pair enters delta. */
        delta[t] = 1.0;
        for (int b = 0; b < m->nocc; b++) {
            double complex xi = 0;
            for (int i = 0; i < n; i++) {
                int o = tb_state_orbital(m, i), s = tb_state_spin(m, i);
                xi += conj(v[b * n + i]) * v[b * n + tb_state_index(m, 1 - o, s)];
            }
            assert_true(fabs(fabs(creal(xi)) - 1.0) < 1e-10);
            if (b % 2 == 0) delta[t] *= creal(xi) > 0 ? 1.0 : -1.0;
        }
    }
    double all = 1.0, weak[3] = {1, 1, 1};
    for (int t = 0; t < 8; t++) {
        all *= delta[t];
        for (int j = 0; j < 3; j++)
            if (t >> j & 1) weak[j] *= delta[t];
    }
    nu[0] = all < 0;
    for (int j = 0; j < 3; j++)
        nu[j + 1] = weak[j] < 0;
    tb_model_free(m);
}

static void test_fkm_strong_and_weak(void **state)
{
    (void)state;
    int nu[4];
    const char *strong[] = {"fkm", "fkm:dt=0.1,layout=1", "fkm:dt=0.6,lambda_SO=0.2"};
    for (int i = 0; i < 3; i++) {
        fkm_indices(strong[i], nu);
        assert_int_equal(nu[0], 1);
        assert_int_equal(nu[1] & nu[2] & nu[3], 1);
    }
    const char *weak[] = {"fkm:dt=-0.4", "fkm:dt=-0.1,layout=1"};
    for (int i = 0; i < 2; i++) {
        fkm_indices(weak[i], nu);
        assert_int_equal(nu[0], 0);
        assert_int_equal(nu[1] & nu[2] & nu[3], 1);
    }
    /* dt = 0: the gap closes at the X points, reduced (1/2, 1/2, 0) and permutations (same paper).
     * 1e-12 eV: a symmetry-enforced degeneracy, exact up to round-off. */
    tb_model *m = build_ok("fkm:dt=0");
    double w[4], X[3] = {0.5, 0.5, 0};
    bands_at(m, X, w, NULL);
    assert_true(w[2] - w[1] < 1e-12);
    tb_model_free(m);
}

/* BHZ, Science 314, 1757 (2006), lattice form: inversion P = tau_z (E1 even, H1 odd); parities at
 * the four TRIM are -sign d3 = -sign(M - 2B n_pi) with n_pi = 0, 2, 2, 4 (n_pi cosines equal to -1),
 * so Z2 = 1 exactly when 0 < M/B < 8 (common practice, from the lattice form). */
static int bhz_z2(const char *spec)
{
    tb_model *m = build_ok(spec);
    int n = m->norb;
    double prod = 1.0;
    for (int t = 0; t < 4; t++) {
        double k[3] = {0.5 * (t & 1), 0.5 * (t >> 1 & 1), 0}, w[MAXN];
        double complex v[MAXN * MAXN];
        bands_at(m, k, w, v);
        double complex xi = 0;
        for (int i = 0; i < n; i++) {
            double parity = m->orb_l[tb_state_orbital(m, i)] % 2 ? -1.0 : 1.0;
            xi += parity * conj(v[i]) * v[i];
        }
        assert_true(fabs(fabs(creal(xi)) - 1.0) < 1e-10);
        prod *= creal(xi);
    }
    tb_model_free(m);
    return prod < 0;
}

static void test_bhz_phases(void **state)
{
    (void)state;
    assert_int_equal(bhz_z2("bhz"), 1);
    assert_int_equal(bhz_z2("bhz:M=5,layout=1"), 1);
    assert_int_equal(bhz_z2("bhz:M=-1"), 0);
    assert_int_equal(bhz_z2("bhz:M=9"), 0);
    assert_int_equal(bhz_z2("bhz:M=1,g=0.4"), 1);
}

/* BHZ with g: g sin ky s_x tau_x anticommutes with every other term, so
 * E = eps +- sqrt(d3^2 + A^2 sin^2 kx + (A^2 + g^2) sin^2 ky), each twice (common practice, algebra).
 * Time reversal Theta = i s_y K: H(-k) = s_y H(k)^* s_y, also with delta != 0. 1e-12 eV round-off. */
static void test_bhz_sz_breaking(void **state)
{
    (void)state;
    const double A = 0.9, B = 1.1, C = 0.1, D = 0.3, M = 1.4, g = 0.35;
    tb_model *m = build_ok("bhz:A=0.9,B=1.1,C=0.1,D=0.3,M=1.4,g=0.35");
    uint64_t seed = 12345;
    int coupled = 0;
    for (int trial = 0; trial < 20; trial++) {
        double k[3] = {uniform(&seed), uniform(&seed), 0}, w[4];
        double kx = 2 * M_PI * k[0], ky = 2 * M_PI * k[1], c = 2 - cos(kx) - cos(ky);
        double eps = C - 2 * D * c, d3 = M - 2 * B * c;
        double r = sqrt(d3 * d3 + A * A * sin(kx) * sin(kx) + (A * A + g * g) * sin(ky) * sin(ky));
        bands_at(m, k, w, NULL);
        assert_near(w[0], eps - r, 1e-12);
        assert_near(w[1], eps - r, 1e-12);
        assert_near(w[2], eps + r, 1e-12);
        assert_near(w[3], eps + r, 1e-12);
        double complex H[16];
        hk_build_direct(m, k, H);
        for (int a = 0; a < 4; a++)
            for (int b = 0; b < 4; b++)
                if (tb_state_spin(m, a) != tb_state_spin(m, b) && cabs(H[a + 4 * b]) > 1e-3) coupled = 1;
    }
    assert_true(coupled); /* S_z is really broken */
    tb_model_free(m);

    const char *specs[] = {"bhz:g=0.3,delta=0.2", "bhz:delta=0.25,D=0.2,layout=1"};
    for (int s = 0; s < 2; s++) {
        m = build_ok(specs[s]);
        for (int trial = 0; trial < 10; trial++) {
            double k[3] = {uniform(&seed), uniform(&seed), 0}, mk[3] = {-k[0], -k[1], 0};
            double complex Hk[16], Hm[16];
            hk_build_direct(m, k, Hk);
            hk_build_direct(m, mk, Hm);
            /* (i s_y) H^* (i s_y)^dagger: element (a,b) = sign * H^*(a', b') with spins flipped. */
            for (int a = 0; a < 4; a++)
                for (int b = 0; b < 4; b++) {
                    int oa = tb_state_orbital(m, a), sa = tb_state_spin(m, a);
                    int ob = tb_state_orbital(m, b), sb = tb_state_spin(m, b);
                    int a2 = tb_state_index(m, oa, 1 - sa), b2 = tb_state_index(m, ob, 1 - sb);
                    double sign = (sa == sb) ? 1.0 : -1.0;
                    double complex th = sign * conj(Hk[a2 + 4 * b2]);
                    assert_true(cabs(th - Hm[a + 4 * b]) < 1e-12);
                }
        }
        tb_model_free(m);
    }
}

/* Berry flux of the lower band out of the surface of a small cube around c (reduced, cubic lattice
 * so reduced axes are Cartesian), from plaquette link products: the plaquette phase is
 * -arg(U1 U2 U3 U4) = flux of Omega = curl A, A = i<u|grad u>. */
static double weyl_flux(const tb_model *m, const double c[3], double h, int nside)
{
    static const int faces[6][3] = {{0, 1, 2}, {0, 2, 1}, {1, 2, 0}, {1, 0, 2}, {2, 0, 1}, {2, 1, 0}};
    double total = 0;
    for (int f = 0; f < 6; f++) {
        int normal = faces[f][0], iu = faces[f][1], iv = faces[f][2];
        /* e_u x e_v is +e_normal for the even rows (the + faces) and -e_normal for the odd rows
         * (the - faces): outward on every face. */
        double side = (f % 2 == 0) ? 1.0 : -1.0;
        for (int i = 0; i < nside; i++)
            for (int j = 0; j < nside; j++) {
                double complex u[4][MAXN * MAXN];
                for (int corner = 0; corner < 4; corner++) {
                    int di = corner == 1 || corner == 2, dj = corner >= 2;
                    double k[3];
                    k[normal] = c[normal] + side * h;
                    k[iu] = c[iu] - h + 2 * h * (i + di) / nside;
                    k[iv] = c[iv] - h + 2 * h * (j + dj) / nside;
                    double w[MAXN];
                    bands_at(m, k, w, u[corner]);
                }
                double complex prod = 1;
                for (int corner = 0; corner < 4; corner++) {
                    double complex link = 0;
                    for (int a = 0; a < m->norb; a++)
                        link += conj(u[corner][a]) * u[(corner + 1) % 4][a];
                    prod *= link;
                }
                total += -carg(prod);
            }
    }
    return total / (2 * M_PI);
}

/* Weyl model (header): nodes at (+-w, 0, 0) with chirality -1 at +w and +1 at -w for t > 0,
 * chirality = lower-band Berry flux (Nucl. Phys. B 185, 20 (1981) for the pairing; signs from the
 * analytic Jacobian, common practice). Degeneracy 1e-12 eV (exact zero up to round-off); flux within
 * 1e-6 of an integer (a closed surface gives an integer up to round-off once plaquettes are small). */
static void test_weyl_nodes(void **state)
{
    (void)state;
    const char *specs[] = {"weyl", "weyl:t=0.8,m=1.2,w=0.15"};
    const double ws[] = {0.25, 0.15};
    for (int s = 0; s < 2; s++) {
        tb_model *m = build_ok(specs[s]);
        for (int sign = -1; sign <= 1; sign += 2) {
            double node[3] = {sign * ws[s], 0, 0}, w[2];
            bands_at(m, node, w, NULL);
            assert_true(w[1] - w[0] < 1e-12);
            double flux = weyl_flux(m, node, 0.01, 4);
            assert_true(fabs(flux - (-sign)) < 1e-6);
            /* The other candidate planes (ky, kz in {0, pi}) are gapped at the defaults. */
            double other[3] = {sign * ws[s], 0.5, 0};
            bands_at(m, other, w, NULL);
            assert_true(w[1] - w[0] > 0.5);
        }
        /* A cube away from the nodes carries no flux. */
        double empty[3] = {0.0, 0.2, 0.1};
        assert_true(fabs(weyl_flux(m, empty, 0.01, 2)) < 1e-6);
        tb_model_free(m);
    }
}

/* Nodal line (header): bands touch at E = 0 on k3 = 0, cos kx + cos ky = m - 1, and nowhere off
 * the plane nearby. 1e-12 eV: exact zeros up to round-off. */
static void test_nodal_loop(void **state)
{
    (void)state;
    const double mval = 1.7;
    tb_model *m = build_ok("nodal_line:m=1.7,tz=0.8,t=1.1");
    for (int i = 0; i < 16; i++) {
        double kx = -M_PI / 2 + M_PI * i / 15.0; /* cos ky = m - 1 - cos kx needs |.| <= 1 */
        double cy = mval - 1 - cos(kx);
        if (fabs(cy) > 1) continue;
        double k[3] = {kx / (2 * M_PI), acos(cy) / (2 * M_PI), 0}, w[2];
        bands_at(m, k, w, NULL);
        assert_true(fabs(w[0]) < 1e-12 && fabs(w[1]) < 1e-12);
        k[2] = 0.05;
        bands_at(m, k, w, NULL);
        assert_true(w[1] - w[0] > 0.1);
    }
    double gamma[3] = {0, 0, 0}, w[2];
    bands_at(m, gamma, w, NULL);
    assert_near(w[1] - w[0], 2 * 1.1 * fabs(mval - 3), 1e-12);
    tb_model_free(m);
}

/* Atomic insulator: E = +-sqrt(delta^2 + |f|^2), f = 8t cos(pi k1) cos(pi k2) cos(pi k3) in 3D
 * (4t cos cos in 2D), each twice; metal: bands overlap (max of band 1 > min of band 2). Algebra of
 * the documented forms, 1e-12 eV round-off. */
static void test_atomic_and_metal(void **state)
{
    (void)state;
    tb_model *m = build_ok("atomic:t=0.15,delta=1.5");
    uint64_t seed = 777;
    for (int trial = 0; trial < 20; trial++) {
        double k[3] = {uniform(&seed), uniform(&seed), uniform(&seed)}, w[4];
        double f = 8 * 0.15 * cos(M_PI * k[0]) * cos(M_PI * k[1]) * cos(M_PI * k[2]);
        double e = sqrt(1.5 * 1.5 + f * f);
        bands_at(m, k, w, NULL);
        assert_near(w[0], -e, 1e-12);
        assert_near(w[1], -e, 1e-12);
        assert_near(w[2], e, 1e-12);
    }
    assert_near(m->orb_pos[1][2], 0.5, 0);
    tb_model_free(m);
    m = build_ok("trivial:dim=2");
    assert_int_equal(m->dim, 2);
    tb_model_free(m);

    m = build_ok("metal");
    double top[3] = {0.5, 0.5, 0.5}, bottom[3] = {0, 0, 0}, wt[2], wb[2];
    bands_at(m, top, wt, NULL);
    bands_at(m, bottom, wb, NULL);
    assert_near(wt[0], 6 - sqrt(0.25 + 0.04), 1e-12);
    assert_true(wt[0] > wb[1]);
    tb_model_free(m);
}

/* Models with every orbital at the origin have inversion P = diag((-1)^l) (common practice):
 * P H(-k) P = H(k) for bhz (tau_z), weyl and nodal_line (s_z), metal (identity), exactly up to
 * round-off (1e-12 eV); bhz with delta != 0 must break it (by 2 delta at k = 0, so > 0.1 eV). */
static double parity_residual(const char *spec)
{
    tb_model *m = build_ok(spec);
    uint64_t seed = 4242;
    double worst = 0;
    int nb = m->norb;
    for (int trial = 0; trial < 10; trial++) {
        double k[3] = {uniform(&seed), uniform(&seed), uniform(&seed)}, mk[3] = {-k[0], -k[1], -k[2]};
        if (trial == 0) k[0] = k[1] = k[2] = mk[0] = mk[1] = mk[2] = 0;
        double complex Hk[MAXN * MAXN], Hm[MAXN * MAXN];
        hk_build_direct(m, k, Hk);
        hk_build_direct(m, mk, Hm);
        for (int a = 0; a < nb; a++)
            for (int b = 0; b < nb; b++) {
                double pa = m->orb_l[tb_state_orbital(m, a)] % 2 ? -1 : 1;
                double pb = m->orb_l[tb_state_orbital(m, b)] % 2 ? -1 : 1;
                double d = cabs(pa * pb * Hm[a + nb * b] - Hk[a + nb * b]);
                if (d > worst) worst = d;
            }
    }
    tb_model_free(m);
    return worst;
}

static void test_parity_from_l(void **state)
{
    (void)state;
    const char *sym[] = {"bhz", "bhz:g=0.3,layout=1", "weyl", "weyl:w=0.1,m=2", "nodal_line", "metal"};
    for (size_t i = 0; i < sizeof sym / sizeof sym[0]; i++)
        assert_true(parity_residual(sym[i]) < 1e-12);
    assert_true(parity_residual("bhz:delta=0.2") > 0.1);
}

/* Bad specs: BS_EINVAL, no model, and a message quoting the spec and naming what is wrong. */
static void test_bad_specs(void **state)
{
    (void)state;
    static const struct {
        const char *spec, *needle;
    } bad[] = {
        {"kane_mel", "unknown model"},        {"kane_mele:lamda_SO=0.1", "no parameter 'lamda_SO'"},
        {"haldane:phi=pi", "finite number"},  {"haldane:phi=", "finite number"},
        {"haldane:phi", "key=value"},         {"graphene:", "key=value"},
        {"graphene:t=1,", "key=value"},       {"graphene:t=1,t=2", "given twice"},
        {"graphene:t=nan", "finite number"},  {"graphene:t=1e999", "finite number"},
        {"graphene:t=1.5x", "finite number"}, {"graphene:a=0", "outside"},
        {"bhz:layout=0.5", "integer"},        {"fkm:layout=2", "outside"},
        {"atomic:dim=4", "outside"},          {"weyl:w=0.7", "outside"},
        {"Graphene", "unknown model"},
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        bs_err err;
        bs_err_clear(&err);
        tb_model *m = (tb_model *)&err; /* must be reset to NULL */
        int rc = lm_build(bad[i].spec, &m, &err);
        if (rc != BS_EINVAL || !strstr(err.msg, bad[i].spec) || !strstr(err.msg, bad[i].needle))
            fprintf(stderr, "spec '%s': rc %d, message '%s'\n", bad[i].spec, rc, err.msg);
        assert_int_equal(rc, BS_EINVAL);
        assert_null(m);
        assert_non_null(strstr(err.msg, bad[i].spec));
        assert_non_null(strstr(err.msg, bad[i].needle));
    }
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    assert_int_equal(lm_build("", &m, &err), BS_EINVAL);
    char longspec[200];
    memset(longspec, 'x', sizeof longspec - 1);
    longspec[sizeof longspec - 1] = '\0';
    memcpy(longspec, "graphene:t=", 11);
    bs_err_clear(&err);
    assert_int_equal(lm_build(longspec, &m, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "longer than"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_every_model_validates),
        cmocka_unit_test(test_graphene_dispersion),
        cmocka_unit_test(test_kane_mele_gap_at_K),
        cmocka_unit_test(test_kane_mele_rashba_closing),
        cmocka_unit_test(test_haldane_gap_at_K),
        cmocka_unit_test(test_haldane_chern),
        cmocka_unit_test(test_fkm_strong_and_weak),
        cmocka_unit_test(test_bhz_phases),
        cmocka_unit_test(test_bhz_sz_breaking),
        cmocka_unit_test(test_weyl_nodes),
        cmocka_unit_test(test_nodal_loop),
        cmocka_unit_test(test_atomic_and_metal),
        cmocka_unit_test(test_parity_from_l),
        cmocka_unit_test(test_bad_specs),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
