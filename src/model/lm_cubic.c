/* Square- and cubic-lattice models written as Fourier series of Pauli-matrix terms: BHZ, a two-node
 * Weyl semimetal, a nodal-line semimetal, a wide-gap atomic insulator and a two-band metal.
 * A term f cos(k.R) G enters as (f/2) G at R (and its adjoint at -R); f sin(k.R) G as f/(2i) G. */
#include <math.h>

#include "lm_acc.h"

static const char BHZ_REF[] = "BHZ model, lattice form: Science 314, 1757 (2006)";
static const char WEYL_REF[] = "two-band Weyl semimetal on a cubic lattice (common practice form); "
                               "Weyl semimetal: Phys. Rev. B 83, 205101 (2011)";
static const char NODAL_REF[] = "two-band nodal-line semimetal on a cubic lattice (common practice form)";
static const char ATOMIC_REF[] = "two-sublattice atomic-limit insulator (common practice form)";
static const char METAL_REF[] = "two-band cubic-lattice metal (common practice form)";
static const char RASHBA_REF[] = "Rashba two-dimensional electron gas, square-lattice form of the "
                                 "continuum model of Phys. Rev. Lett. 92, 126603 (2004)";

#define PAULI(i) (&lm_pauli[i][0][0])

static const int R_ZERO[3] = {0, 0, 0};
static const int R_X[3] = {1, 0, 0};
static const int R_Y[3] = {0, 1, 0};
static const int R_Z[3] = {0, 0, 1};

/* Square (dim 2, a3 = (0,0,20) Angstrom) or simple cubic lattice of constant a, every orbital at
 * the origin with l = 0 unless the builder changes it. */
static int cubic_init(lm_acc *acc, int dim, double a, int nspatial, int spinful, int layout, bs_err *err)
{
    const double lat[3][3] = {{a, 0, 0}, {0, a, 0}, {0, 0, dim == 2 ? 20.0 : a}};
    return lm_acc_init(acc, nspatial, spinful, layout, lat, err);
}

int lm_build_bhz(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    lm_acc acc;
    int rc = cubic_init(&acc, 2, p[BHZ_LATT], 2, 1, (int)p[BHZ_LAYOUT], err);
    if (rc != 0) goto done;
    acc.orb_l[0] = 0; /* E1: s-like */
    acc.orb_l[1] = 1; /* H1: p-like, so inversion is tau_z */
    double A = p[BHZ_A], B = p[BHZ_B], C = p[BHZ_C], D = p[BHZ_D], M = p[BHZ_M];
    /* eps = C - 2D(2 - cos kx - cos ky), d3 = M - 2B(2 - cos kx - cos ky). */
    lm_acc_matrix(&acc, R_ZERO, C - 4 * D, lm_pauli[0], PAULI(0));
    lm_acc_matrix(&acc, R_ZERO, M - 4 * B, lm_pauli[0], PAULI(3));
    /* delta s_y tau_y: real, time-reversal even (Theta = i s_y K), inversion odd. */
    lm_acc_matrix(&acc, R_ZERO, p[BHZ_DELTA], lm_pauli[2], PAULI(2));
    const int *axes[2] = {R_X, R_Y};
    for (int i = 0; i < 2; i++) {
        lm_acc_matrix(&acc, axes[i], D, lm_pauli[0], PAULI(0));
        lm_acc_matrix(&acc, axes[i], B, lm_pauli[0], PAULI(3));
    }
    /* A sin kx s_z tau_x + A sin ky tau_y: h(k) on spin up, h*(-k) on spin down. */
    lm_acc_matrix(&acc, R_X, A / (2.0 * I), lm_pauli[3], PAULI(1));
    lm_acc_matrix(&acc, R_Y, A / (2.0 * I), lm_pauli[0], PAULI(2));
    /* g sin ky s_x tau_x anticommutes with every other term, so it only adds g^2 sin^2 ky under
     * the square root: S_z broken, gap, time reversal and inversion kept. */
    lm_acc_matrix(&acc, R_Y, p[BHZ_G] / (2.0 * I), lm_pauli[1], PAULI(1));
    rc = lm_acc_finish(&acc, 2, 2, spec, "BHZ model", BHZ_REF, out);
done:
    lm_acc_clear(&acc);
    return rc;
}

int lm_build_weyl(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    lm_acc acc;
    int rc = cubic_init(&acc, 3, p[WE_A], 2, 0, 0, err);
    if (rc != 0) goto done;
    /* An s (l = 0) and a p (l = 1) orbital on one site, so inversion is s_z and shows in l. */
    acc.orb_l[1] = 1;
    double t = p[WE_T], m = p[WE_M], k0 = 2.0 * M_PI * p[WE_W];
    /* t sin ky s_x + t sin kz s_y + [t(cos kx - cos k0) + m(2 - cos ky - cos kz)] s_z. */
    lm_acc_matrix(&acc, R_ZERO, 2 * m - t * cos(k0), NULL, PAULI(3));
    lm_acc_matrix(&acc, R_X, 0.5 * t, NULL, PAULI(3));
    lm_acc_matrix(&acc, R_Y, -0.5 * m, NULL, PAULI(3));
    lm_acc_matrix(&acc, R_Z, -0.5 * m, NULL, PAULI(3));
    lm_acc_matrix(&acc, R_Y, t / (2.0 * I), NULL, PAULI(1));
    lm_acc_matrix(&acc, R_Z, t / (2.0 * I), NULL, PAULI(2));
    rc = lm_acc_finish(&acc, 3, 1, spec, "Weyl semimetal model", WEYL_REF, out);
done:
    lm_acc_clear(&acc);
    return rc;
}

int lm_build_nodal_line(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    lm_acc acc;
    int rc = cubic_init(&acc, 3, p[NL_A], 2, 0, 0, err);
    if (rc != 0) goto done;
    acc.orb_l[1] = 1; /* s and p_z on one site: inversion and the mirror z are both s_z */
    double t = p[NL_T];
    /* t(m - cos kx - cos ky - cos kz) s_z + tz sin kz s_x: real, so PT = K. */
    lm_acc_matrix(&acc, R_ZERO, t * p[NL_M], NULL, PAULI(3));
    const int *axes[3] = {R_X, R_Y, R_Z};
    for (int i = 0; i < 3; i++)
        lm_acc_matrix(&acc, axes[i], -0.5 * t, NULL, PAULI(3));
    lm_acc_matrix(&acc, R_Z, p[NL_TZ] / (2.0 * I), NULL, PAULI(1));
    rc = lm_acc_finish(&acc, 3, 1, spec, "nodal-line semimetal model", NODAL_REF, out);
done:
    lm_acc_clear(&acc);
    return rc;
}

int lm_build_atomic(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    lm_acc acc;
    int dim = (int)p[AT_DIM];
    double a = p[AT_A];
    int rc = cubic_init(&acc, dim, a, 2, 1, (int)p[AT_LAYOUT], err);
    if (rc != 0) goto done;
    for (int i = 0; i < dim; i++)
        acc.pos[1][i] = 0.5;
    lm_acc_spin_hop(&acc, R_ZERO, 0, 0, p[AT_DELTA], lm_pauli[0]);
    lm_acc_spin_hop(&acc, R_ZERO, 1, 1, -p[AT_DELTA], lm_pauli[0]);
    /* A-B bonds to the 2^dim body-centre (face-centre in 2D) neighbours (+-a/2, +-a/2[, +-a/2]). */
    for (int c = 0; c < (1 << dim); c++) {
        double d[3] = {0, 0, 0};
        for (int i = 0; i < dim; i++)
            d[i] = (c >> i & 1) ? 0.5 * a : -0.5 * a;
        int R[3];
        lm_acc_bond_R(&acc, 0, 1, d, R);
        lm_acc_spin_hop(&acc, R, 0, 1, p[AT_T], lm_pauli[0]);
    }
    rc = lm_acc_finish(&acc, dim, 2, spec, "atomic insulator model", ATOMIC_REF, out);
done:
    lm_acc_clear(&acc);
    return rc;
}

int lm_build_metal(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    lm_acc acc;
    int dim = (int)p[ME_DIM];
    int rc = cubic_init(&acc, dim, p[ME_A], 2, 0, 0, err);
    if (rc != 0) goto done;
    /* -2t sum_i cos k_i + (delta/2) s_z + v s_x. */
    lm_acc_matrix(&acc, R_ZERO, 0.5 * p[ME_DELTA], NULL, PAULI(3));
    lm_acc_matrix(&acc, R_ZERO, p[ME_V], NULL, PAULI(1));
    const int *axes[3] = {R_X, R_Y, R_Z};
    for (int i = 0; i < dim; i++)
        lm_acc_matrix(&acc, axes[i], -p[ME_T], NULL, PAULI(0));
    rc = lm_acc_finish(&acc, dim, 1, spec, "two-band metal model", METAL_REF, out);
done:
    lm_acc_clear(&acc);
    return rc;
}

int lm_build_rashba(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    lm_acc acc;
    int rc = cubic_init(&acc, 2, p[RA_A], 1, 1, (int)p[RA_LAYOUT], err);
    if (rc != 0) goto done;
    /* -2t (cos kx + cos ky) + lambda_R (s_x sin ky - s_y sin kx): near k = 0 the continuum
     * p^2/2m + (lambda/hbar)(s_x p_y - s_y p_x) of the source with 1/2m = t a^2, lambda = lambda_R a.
     * Time reversal (i s_y K) holds; inversion is broken by the odd sines. */
    const double complex one[1] = {1.0};
    lm_acc_matrix(&acc, R_X, -p[RA_T], lm_pauli[0], one);
    lm_acc_matrix(&acc, R_Y, -p[RA_T], lm_pauli[0], one);
    lm_acc_matrix(&acc, R_Y, p[RA_LR] / (2.0 * I), lm_pauli[1], one);
    lm_acc_matrix(&acc, R_X, -p[RA_LR] / (2.0 * I), lm_pauli[2], one);
    rc = lm_acc_finish(&acc, 2, 1, spec, "Rashba electron gas model", RASHBA_REF, out);
done:
    lm_acc_clear(&acc);
    return rc;
}
