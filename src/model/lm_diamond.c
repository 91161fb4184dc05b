/* The Fu-Kane-Mele diamond-lattice model, Phys. Rev. Lett. 98, 106803 (2007): s orbitals on the two
 * fcc sublattices, nearest-neighbour hopping with the [111] bond distorted, second-neighbour
 * spin-orbit coupling i (8 lambda_SO / a^2) s.(d1 x d2), and an optional staggered potential. */
#include "lm_acc.h"

static const char FKM_REF[] = "Fu-Kane-Mele diamond model: Phys. Rev. Lett. 98, 106803 (2007)";

enum { FKM_SITE_A = 0, FKM_SITE_B = 1 };

int lm_build_fkm(const double *p, const char *spec, tb_model **out, bs_err *err)
{
    double a = p[FKM_A];
    const double lat[3][3] = {{0, 0.5 * a, 0.5 * a}, {0.5 * a, 0, 0.5 * a}, {0.5 * a, 0.5 * a, 0}};
    /* Bonds from A to its four B neighbours; delta[0] is the [111] bond, the one given t + dt. */
    const double delta[4][3] = {{0.25 * a, 0.25 * a, 0.25 * a},
                                {0.25 * a, -0.25 * a, -0.25 * a},
                                {-0.25 * a, 0.25 * a, -0.25 * a},
                                {-0.25 * a, -0.25 * a, 0.25 * a}};
    lm_acc acc;
    int rc = lm_acc_init(&acc, 2, 1, (int)p[FKM_LAYOUT], lat, err);
    if (rc != 0) goto done;
    for (int i = 0; i < 3; i++)
        acc.pos[FKM_SITE_B][i] = 0.25;
    for (int k = 0; k < 4; k++) {
        int R[3];
        lm_acc_bond_R(&acc, FKM_SITE_A, FKM_SITE_B, delta[k], R);
        lm_acc_spin_hop(&acc, R, FKM_SITE_A, FKM_SITE_B, p[FKM_T] + (k == 0 ? p[FKM_DT] : 0.0), lm_pauli[0]);
    }
    /* Twelve second neighbours per site, each reached through exactly one shared neighbour; the
     * six with k < l are entered and the reverses (d1 x d2 -> -(d1 x d2)) follow by conjugation. */
    double complex soc = I * 8.0 * p[FKM_LSO] / (a * a);
    for (int sub = 0; sub < 2; sub++)
        for (int k = 0; k < 4; k++)
            for (int l = k + 1; l < 4; l++) {
                double d1[3], d2[3], disp[3];
                int R[3];
                lm_nnn_path(delta, sub, k, l, d1, d2, disp);
                double c[3] = {d1[1] * d2[2] - d1[2] * d2[1], d1[2] * d2[0] - d1[0] * d2[2],
                               d1[0] * d2[1] - d1[1] * d2[0]};
                double complex S[2][2];
                for (int s1 = 0; s1 < 2; s1++)
                    for (int s2 = 0; s2 < 2; s2++)
                        S[s1][s2] = c[0] * lm_pauli[1][s1][s2] + c[1] * lm_pauli[2][s1][s2] +
                                    c[2] * lm_pauli[3][s1][s2];
                lm_acc_bond_R(&acc, sub, sub, disp, R);
                lm_acc_spin_hop(&acc, R, sub, sub, soc, (const double complex(*)[2])S);
            }
    const int zero[3] = {0, 0, 0};
    lm_acc_spin_hop(&acc, zero, FKM_SITE_A, FKM_SITE_A, p[FKM_STAG], lm_pauli[0]);
    lm_acc_spin_hop(&acc, zero, FKM_SITE_B, FKM_SITE_B, -p[FKM_STAG], lm_pauli[0]);
    rc = lm_acc_finish(&acc, 3, 2, spec, "Fu-Kane-Mele model", FKM_REF, out);
done:
    lm_acc_clear(&acc);
    return rc;
}
