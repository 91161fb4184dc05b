/* Honeycomb-lattice models: graphene (nearest neighbours), Haldane and Kane-Mele.
 * Geometry shared by all three: a1 = a(1,0,0), a2 = a(1/2,sqrt3/2,0), a3 = (0,0,20) Angstrom,
 * p_z orbitals on A = (1/3,1/3,0) and B = (2/3,2/3,0) (reduced); nearest-neighbour vectors from A to B
 * delta_1 = (a1 + a2)/3, delta_2 = delta_1 - a1, delta_3 = delta_1 - a2. */
#include <math.h>

#include "lm_acc.h"

enum { HC_A = 0, HC_B = 1 };

static const char GRAPHENE_REF[] =
    "graphene, nearest-neighbour tight binding: Rev. Mod. Phys. 81, 109 (2009)";
static const char HALDANE_REF[] = "Haldane model: Phys. Rev. Lett. 61, 2015 (1988)";
static const char KM_REF[] = "Kane-Mele model: Phys. Rev. Lett. 95, 226801 (2005); 95, 146802 (2005)";

/* Lattice, orbitals and nearest-neighbour vectors (Cartesian, Angstrom). */
static int honeycomb_init(lm_acc *acc, double a, int spinful, int layout, double delta[3][3], bs_err *err)
{
    const double lat[3][3] = {{a, 0, 0}, {0.5 * a, 0.5 * sqrt(3.0) * a, 0}, {0, 0, 20.0}};
    int rc = lm_acc_init(acc, 2, spinful, layout, lat, err);
    if (rc != 0) return rc;
    for (int i = 0; i < 2; i++) {
        acc->pos[HC_A][i] = 1.0 / 3.0;
        acc->pos[HC_B][i] = 2.0 / 3.0;
        acc->orb_l[i] = 1;
    }
    for (int d = 0; d < 3; d++) {
        delta[0][d] = (lat[0][d] + lat[1][d]) / 3.0;
        delta[1][d] = delta[0][d] - lat[0][d];
        delta[2][d] = delta[0][d] - lat[1][d];
    }
    return 0;
}

/* The chirality nu_ij = sign[(d1 x d2)_z] of a second-neighbour hop: with unit bonds at 120 degrees,
 * (2/sqrt3)(d1^ x d2^)_z is exactly +-1, as in Phys. Rev. Lett. 95, 226801 (2005). */
static double nnn_nu(const double d1[3], const double d2[3])
{
    return d1[0] * d2[1] - d1[1] * d2[0] > 0 ? 1.0 : -1.0;
}

int lm_build_graphene(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    lm_acc acc;
    double delta[3][3];
    int rc = honeycomb_init(&acc, p[GR_A], 0, 0, delta, err);
    for (int k = 0; k < 3 && rc == 0; k++) {
        int R[3];
        lm_acc_bond_R(&acc, HC_A, HC_B, delta[k], R);
        lm_acc_hop(&acc, R, HC_A, HC_B, -p[GR_T]);
    }
    if (rc == 0) rc = lm_acc_finish(&acc, 2, 1, spec, "graphene", GRAPHENE_REF, out);
    lm_acc_clear(&acc);
    return rc;
}

int lm_build_haldane(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    lm_acc acc;
    double delta[3][3];
    int rc = honeycomb_init(&acc, p[HA_A], 0, 0, delta, err);
    if (rc != 0) goto done;
    double phi = M_PI * p[HA_PHI];
    for (int k = 0; k < 3; k++) {
        int R[3];
        lm_acc_bond_R(&acc, HC_A, HC_B, delta[k], R);
        lm_acc_hop(&acc, R, HC_A, HC_B, -p[HA_T1]);
    }
    /* Each second-neighbour bond once (k < l); its reverse, with -nu, comes from the conjugate. */
    for (int sub = 0; sub < 2; sub++)
        for (int k = 0; k < 3; k++)
            for (int l = k + 1; l < 3; l++) {
                double d1[3], d2[3], disp[3];
                int R[3];
                lm_nnn_path((const double(*)[3])delta, sub, k, l, d1, d2, disp);
                lm_acc_bond_R(&acc, sub, sub, disp, R);
                lm_acc_hop(&acc, R, sub, sub, p[HA_T2] * cexp(I * nnn_nu(d1, d2) * phi));
            }
    int zero[3] = {0, 0, 0};
    lm_acc_hop(&acc, zero, HC_A, HC_A, p[HA_M]);
    lm_acc_hop(&acc, zero, HC_B, HC_B, -p[HA_M]);
    rc = lm_acc_finish(&acc, 2, 1, spec, "Haldane model", HALDANE_REF, out);
done:
    lm_acc_clear(&acc);
    return rc;
}

/* Nearest-neighbour term of the Kane-Mele model for the bond from B (source) to A (destination):
 * t s_0 + i lambda_R (s x d^)_z with d^ the unit vector from source to destination. */
static void km_nn_matrix(double t, double lambda_r, const double delta[3], double complex S[2][2])
{
    double len = hypot(delta[0], delta[1]);
    double dx = -delta[0] / len, dy = -delta[1] / len;
    for (int s1 = 0; s1 < 2; s1++)
        for (int s2 = 0; s2 < 2; s2++)
            S[s1][s2] = t * lm_pauli[0][s1][s2] +
                        I * lambda_r * (lm_pauli[1][s1][s2] * dy - lm_pauli[2][s1][s2] * dx);
}

int lm_build_kane_mele(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    lm_acc acc;
    double delta[3][3];
    int rc = honeycomb_init(&acc, p[KM_A], 1, (int)p[KM_LAYOUT], delta, err);
    if (rc != 0) goto done;
    for (int k = 0; k < 3; k++) {
        int R[3];
        double complex S[2][2];
        km_nn_matrix(p[KM_T], p[KM_LR], delta[k], S);
        lm_acc_bond_R(&acc, HC_A, HC_B, delta[k], R);
        lm_acc_spin_hop(&acc, R, HC_A, HC_B, 1.0, (const double complex(*)[2])S);
    }
    /* i lambda_SO nu_ij s_z with |nu_ij| = 1: spin up is the Haldane model at phi = pi/2 and
     * t2 = lambda_SO, whence the boundary lambda_v = 3 sqrt3 lambda_SO at lambda_R = 0. */
    for (int sub = 0; sub < 2; sub++)
        for (int k = 0; k < 3; k++)
            for (int l = k + 1; l < 3; l++) {
                double d1[3], d2[3], disp[3];
                int R[3];
                lm_nnn_path((const double(*)[3])delta, sub, k, l, d1, d2, disp);
                lm_acc_bond_R(&acc, sub, sub, disp, R);
                lm_acc_spin_hop(&acc, R, sub, sub, I * p[KM_LSO] * nnn_nu(d1, d2), lm_pauli[3]);
            }
    int zero[3] = {0, 0, 0};
    lm_acc_spin_hop(&acc, zero, HC_A, HC_A, p[KM_LV], lm_pauli[0]);
    lm_acc_spin_hop(&acc, zero, HC_B, HC_B, -p[KM_LV], lm_pauli[0]);
    rc = lm_acc_finish(&acc, 2, 2, spec, "Kane-Mele model", KM_REF, out);
done:
    lm_acc_clear(&acc);
    return rc;
}
