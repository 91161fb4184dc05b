/* Berry curvature per plaquette from link variables, J. Phys. Soc. Jpn. 74, 1674 (2005). */
#include "bandsieve/berrymap.h"

#include <cblas.h>
#include <complex.h>
#include <lapacke.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/eig.h"
#include "bandsieve/hk.h"

void berry_map_clear(berry_map *b)
{
    if (!b) return;
    free(b->omega);
    memset(b, 0, sizeof *b);
}

/* Occupied eigenvectors at every grid point of the plane: U[(ia * n + ib) * norb * nband]. */
static int grid_vectors(const tb_model *m, int nband, int fa, int fb, int fc, double kfixed, int n,
                        double complex *U, double *min_gap, bs_err *err)
{
    int norb = m->norb;
    size_t nn = (size_t)norb * norb;
    hk_engine *hk = NULL;
    eig_ws *ws = NULL;
    double complex *H = malloc(nn * sizeof *H);
    double *E = malloc((size_t)norb * sizeof *E);
    int rc = (H && E) ? hk_create(m, 1, &hk, err) : bs_fail(err, BS_ENOMEM, "out of memory");
    if (rc == 0) rc = eig_create(norb, &ws, err);
    *min_gap = 1e300;
    for (int p = 0; rc == 0 && p < n * n; p++) {
        double k[3];
        k[fa] = (double)(p / n) / n, k[fb] = (double)(p % n) / n, k[fc] = kfixed;
        rc = hk_build(hk, 1, k, H, err);
        if (rc == 0) rc = eig_vectors(ws, H, E, err);
        if (rc != 0) break;
        memcpy(U + (size_t)p * norb * nband, H, (size_t)norb * nband * sizeof *H);
        if (E[nband] - E[nband - 1] < *min_gap) *min_gap = E[nband] - E[nband - 1];
    }
    eig_free(ws);
    hk_free(hk);
    free(H);
    free(E);
    return rc;
}

/* Normalised det(A^dagger B) of two norb x nband blocks; M (nband^2) and ipiv are scratch. */
static double complex link(const double complex *A, const double complex *B, int norb, int nband,
                           double complex *M, lapack_int *ipiv)
{
    const double complex one = 1, zero = 0;
    cblas_zgemm(CblasColMajor, CblasConjTrans, CblasNoTrans, nband, nband, norb, &one, A, norb, B, norb,
                &zero, M, nband);
    if (LAPACKE_zgetrf(LAPACK_COL_MAJOR, nband, nband, M, nband, ipiv) < 0) return 1;
    double complex d = 1;
    for (int i = 0; i < nband; i++)
        d *= (ipiv[i] != i + 1 ? -1 : 1) * M[(size_t)i * nband + i];
    double a = cabs(d);
    return a > 0 ? d / a : 1;
}

int berry_map_plane(const tb_model *m, int nband, int fixed_axis, double kfixed, int n, berry_map *out,
                    bs_err *err)
{
    memset(out, 0, sizeof *out);
    if (nband < 1 || nband >= m->norb)
        return bs_fail(err, BS_EINVAL, "Berry map: %d bands of %d", nband, m->norb);
    if (n < 4 || n > 400) return bs_fail(err, BS_EINVAL, "Berry map: mesh %d outside 4..400", n);
    if (fixed_axis < 0 || fixed_axis > 2 || (m->dim == 2 && fixed_axis != 2))
        return bs_fail(err, BS_EINVAL, "Berry map: plane normal to axis %d not available in %dD",
                       fixed_axis + 1, m->dim);
    int fa = (fixed_axis + 1) % 3, fb = (fixed_axis + 2) % 3;
    size_t blk = (size_t)m->norb * nband;
    double complex *U = malloc((size_t)n * n * blk * sizeof *U);
    double complex *M = malloc((size_t)nband * nband * sizeof *M);
    lapack_int *ipiv = malloc((size_t)nband * sizeof *ipiv);
    out->omega = malloc((size_t)n * n * sizeof *out->omega);
    int rc = (U && M && ipiv && out->omega) ? 0 : bs_fail(err, BS_ENOMEM, "Berry map: out of memory");
    if (rc == 0) rc = grid_vectors(m, nband, fa, fb, fixed_axis, kfixed, n, U, &out->min_gap_ev, err);
    /* Plaquette area in Cartesian units and the orientation of (b_a, b_b) against b_c: the sign
     * convention of chern.h is right-handed Cartesian whatever the handedness of the lattice. */
    double b[3][3];
    tb_model_reciprocal(m, b);
    double cr[3] = {b[fa][1] * b[fb][2] - b[fa][2] * b[fb][1], b[fa][2] * b[fb][0] - b[fa][0] * b[fb][2],
                    b[fa][0] * b[fb][1] - b[fa][1] * b[fb][0]};
    double area = sqrt(cr[0] * cr[0] + cr[1] * cr[1] + cr[2] * cr[2]) / ((double)n * n);
    double orient =
        cr[0] * b[fixed_axis][0] + cr[1] * b[fixed_axis][1] + cr[2] * b[fixed_axis][2] >= 0 ? 1 : -1;
    double total = 0;
    for (int ia = 0; rc == 0 && ia < n; ia++)
        for (int ib = 0; ib < n; ib++) {
            const double complex *u00 = U + ((size_t)ia * n + ib) * blk;
            const double complex *u10 = U + ((size_t)((ia + 1) % n) * n + ib) * blk;
            const double complex *u11 = U + ((size_t)((ia + 1) % n) * n + (ib + 1) % n) * blk;
            const double complex *u01 = U + ((size_t)ia * n + (ib + 1) % n) * blk;
            double complex loop =
                link(u00, u10, m->norb, nband, M, ipiv) * link(u10, u11, m->norb, nband, M, ipiv) *
                link(u11, u01, m->norb, nband, M, ipiv) * link(u01, u00, m->norb, nband, M, ipiv);
            double F = -orient * carg(loop);
            total += F;
            if (fabs(F) > out->max_f) out->max_f = fabs(F);
            out->omega[(size_t)ia * n + ib] = F / area;
        }
    out->axis_a = fa, out->axis_b = fb, out->n = n;
    out->flux = total / (2 * M_PI);
    free(U);
    free(M);
    free(ipiv);
    if (rc != 0) berry_map_clear(out);
    return rc;
}
