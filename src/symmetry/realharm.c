/* Real spherical harmonics (l <= 3), their rotation matrices fitted from the functions, and the
 * SU(2) spin rotation. Conventions: include/bandsieve/realharm.h. */
#include "bandsieve/realharm.h"

#include "bandsieve/model.h"

#include <lapacke.h>
#include <math.h>
#include <string.h>

const char *rh_name(int l, int idx)
{
    return tb_shape_name(l, idx);
}

int rh_index(int l, const char *name)
{
    return tb_shape_index(l, name);
}

/* m of shell index idx: 0, +1, -1, +2, -2, ... */
static int idx_to_m(int idx)
{
    return idx == 0 ? 0 : (idx % 2 ? (idx + 1) / 2 : -(idx / 2));
}

/* Associated Legendre function P_l^m(x), m >= 0, without the Condon–Shortley phase, by the
 * standard upward recurrence in l (common practice; e.g. Numerical Recipes, 3rd ed., sec. 6.7). */
static double legendre(int l, int m, double x)
{
    double pmm = 1.0;
    double s = sqrt(fmax(0.0, (1.0 - x) * (1.0 + x)));
    for (int i = 1; i <= m; i++)
        pmm *= (2 * i - 1) * s;
    if (l == m) return pmm;
    double pm1 = x * (2 * m + 1) * pmm;
    if (l == m + 1) return pm1;
    double pl = 0.0;
    for (int ll = m + 2; ll <= l; ll++) {
        pl = (x * (2 * ll - 1) * pm1 - (ll + m - 1) * pmm) / (ll - m);
        pmm = pm1;
        pm1 = pl;
    }
    return pl;
}

static double factorial(int n)
{
    double f = 1.0;
    for (int i = 2; i <= n; i++)
        f *= i;
    return f;
}

double rh_eval(int l, int idx, const double r[3])
{
    double len = sqrt(r[0] * r[0] + r[1] * r[1] + r[2] * r[2]);
    if (len == 0.0 || l < 0 || l > RH_LMAX || idx < 0 || idx > 2 * l) return 0.0;
    int m = idx_to_m(idx), am = abs(m);
    double ct = r[2] / len, phi = atan2(r[1], r[0]);
    double norm = sqrt((2 * l + 1) / (4.0 * M_PI) * factorial(l - am) / factorial(l + am));
    double p = legendre(l, am, ct);
    if (m == 0) return norm * p;
    /* Without the Condon–Shortley phase, cos(m phi) P and sin(|m| phi) P have positive leading
     * coefficients for the named polynomials (px ~ x, fy(3x2-y2) ~ 3x^2 y - y^3). */
    return sqrt(2.0) * norm * p * (m > 0 ? cos(am * phi) : sin(am * phi));
}

/* Directions for the fit: a Fibonacci lattice on the sphere (well spread, deterministic). */
enum { RH_NPOINT = 48 };

static void fib_point(int i, double r[3])
{
    double golden = M_PI * (3.0 - sqrt(5.0));
    double z = 1.0 - (2.0 * i + 1.0) / RH_NPOINT;
    double rad = sqrt(1.0 - z * z);
    r[0] = rad * cos(golden * i);
    r[1] = rad * sin(golden * i);
    r[2] = z;
}

static int check_orthogonal(const double R[3][3], bs_err *err)
{
    for (int a = 0; a < 3; a++)
        for (int b = 0; b < 3; b++) {
            double s = 0.0;
            for (int c = 0; c < 3; c++)
                s += R[c][a] * R[c][b];
            if (fabs(s - (a == b)) > 1e-8)
                return bs_fail(err, BS_EINVAL, "rotation matrix is not orthogonal (R^T R - 1 = %.2g)",
                               s - (a == b));
        }
    return 0;
}

int rh_rotation(int l, const double R[3][3], double *D, bs_err *err)
{
    if (l < 0 || l > RH_LMAX) return bs_fail(err, BS_EINVAL, "angular momentum %d outside 0..%d", l, RH_LMAX);
    int rc = check_orthogonal(R, err);
    if (rc != 0) return rc;
    int nm = 2 * l + 1;
    double A[RH_NPOINT * 7], B[RH_NPOINT * 7];
    for (int p = 0; p < RH_NPOINT; p++) {
        double r[3], rr[3];
        fib_point(p, r);
        for (int a = 0; a < 3; a++)
            rr[a] = R[0][a] * r[0] + R[1][a] * r[1] + R[2][a] * r[2];
        for (int j = 0; j < nm; j++) {
            A[p + j * RH_NPOINT] = rh_eval(l, j, r);
            B[p + j * RH_NPOINT] = rh_eval(l, j, rr);
        }
    }
    lapack_int info = LAPACKE_dgels(LAPACK_COL_MAJOR, 'N', RH_NPOINT, nm, nm, A, RH_NPOINT, B, RH_NPOINT);
    if (info != 0) return bs_fail(err, BS_ENUMERIC, "dgels failed fitting D^%d (info %d)", l, (int)info);
    for (int j = 0; j < nm; j++)
        for (int i = 0; i < nm; i++)
            D[i + j * nm] = B[i + j * RH_NPOINT];
    return 0;
}

static double det3(const double R[3][3])
{
    return R[0][0] * (R[1][1] * R[2][2] - R[1][2] * R[2][1]) -
           R[0][1] * (R[1][0] * R[2][2] - R[1][2] * R[2][0]) +
           R[0][2] * (R[1][0] * R[2][1] - R[1][1] * R[2][0]);
}

void rh_spin_rotation(const double R[3][3], double complex U[4])
{
    double P[3][3], s = det3(R) < 0 ? -1.0 : 1.0;
    for (int a = 0; a < 3; a++)
        for (int b = 0; b < 3; b++)
            P[a][b] = s * R[a][b];
    double tr = P[0][0] + P[1][1] + P[2][2];
    double theta = acos(fmax(-1.0, fmin(1.0, 0.5 * (tr - 1.0))));
    double n[3] = {P[2][1] - P[1][2], P[0][2] - P[2][0], P[1][0] - P[0][1]};
    double nlen = sqrt(n[0] * n[0] + n[1] * n[1] + n[2] * n[2]);
    if (nlen > 1e-8) {
        for (int a = 0; a < 3; a++)
            n[a] /= nlen;
    } else if (theta > 1.0) {
        /* theta = pi: the axis is the column of (P + 1)/2 = n n^T with the largest norm. */
        int best = 0;
        double bn = -1.0;
        for (int c = 0; c < 3; c++) {
            double v = P[c][c] + 1.0;
            if (v > bn) bn = v, best = c;
        }
        double len = 0.0;
        for (int a = 0; a < 3; a++) {
            n[a] = 0.5 * (P[a][best] + (a == best));
            len += n[a] * n[a];
        }
        len = sqrt(len);
        for (int a = 0; a < 3; a++)
            n[a] /= len;
    } else {
        n[0] = 0.0, n[1] = 0.0, n[2] = 1.0;
        theta = 0.0;
    }
    double c = cos(0.5 * theta), sn = sin(0.5 * theta);
    /* exp(-i theta n.sigma/2) = c - i sn (nx sx + ny sy + nz sz), column-major. */
    U[0] = c - I * sn * n[2];
    U[1] = -I * sn * (n[0] + I * n[1]);
    U[2] = -I * sn * (n[0] - I * n[1]);
    U[3] = c + I * sn * n[2];
}
