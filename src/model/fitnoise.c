/* Fit-like random Hermitian noise on a model: see include/bandsieve/fitnoise.h. */
#include "bandsieve/fitnoise.h"

#include <complex.h>
#include <stdlib.h>
#include <string.h>

/* splitmix64 (common practice): the caller's 64-bit state is the whole generator. */
static double unit_draw(uint64_t *s)
{
    uint64_t z = (*s += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    z ^= z >> 31;
    return 2.0 * ((z >> 11) * (1.0 / 9007199254740992.0)) - 1.0;
}

static int find_R(int (*R)[3], int n, const int r[3])
{
    for (int i = 0; i < n; i++)
        if (R[i][0] == r[0] && R[i][1] == r[1] && R[i][2] == r[2]) return i;
    return -1;
}

/* 1 when R is in the canonical half (first nonzero component positive), -1 in the other, 0 at 0. */
static int half_of(const int R[3])
{
    for (int d = 0; d < 3; d++)
        if (R[d]) return R[d] > 0 ? 1 : -1;
    return 0;
}

/* m's lattice vectors followed by the next shell; *n receives the count. */
static int (*grow_shell(const tb_model *m, int *n))[3]
{
    int cap = m->nR * (1 + 2 * m->dim), k = m->nR;
    int(*R)[3] = malloc((size_t)cap * sizeof *R);
    if (!R) return NULL;
    memcpy(R, m->R, (size_t)m->nR * sizeof *R);
    for (int r = 0; r < m->nR; r++)
        for (int d = 0; d < m->dim; d++)
            for (int sgn = -1; sgn <= 1; sgn += 2) {
                int t[3] = {m->R[r][0], m->R[r][1], m->R[r][2]};
                t[d] += sgn;
                if (find_R(R, k, t) < 0) memcpy(R[k++], t, sizeof t);
            }
    *n = k;
    return R;
}

int fitnoise_apply(const tb_model *m, double rel, uint64_t seed, tb_model **out, bs_err *err)
{
    *out = NULL;
    int n = m->norb, nR = 0;
    size_t n2 = (size_t)n * n;
    int(*R)[3] = grow_shell(m, &nR);
    tb_model *c = NULL;
    int rc =
        R ? tb_model_create(n, nR, m->spinful, &c, err) : bs_fail(err, BS_ENOMEM, "out of memory for noise");
    tb_model *tmp = NULL;
    if (rc == 0) rc = tb_model_copy(m, &tmp, err);
    if (rc != 0) {
        free(R);
        tb_model_free(c);
        return rc;
    }
    /* The copy carries every field of m; its arrays are swapped for the grown ones. */
    free(tmp->R);
    free(tmp->deg);
    tmp->R = R;
    tmp->deg = c->deg;
    tb_model_set_hops(tmp, c->H);
    tmp->nR = nR;
    c->deg = NULL;
    c->H = NULL;
    tb_model_free(c);
    double maxhop = 0;
    for (int r = 0; r < m->nR; r++)
        for (size_t i = 0; i < n2; i++) {
            tmp->H[r * n2 + i] = tb_hop(m, r, (int)(i / n), (int)(i % n)) / m->deg[r];
            if (cabs(tmp->H[r * n2 + i]) > maxhop) maxhop = cabs(tmp->H[r * n2 + i]);
        }
    for (int r = 0; r < nR; r++) {
        int h = half_of(R[r]);
        if (h < 0) continue;
        double size = rel * maxhop * (r < m->nR ? 1.0 : 0.1);
        int mr[3] = {-R[r][0], -R[r][1], -R[r][2]}, q = find_R(R, nR, mr);
        for (int a = 0; a < n; a++)
            for (int b = h == 0 ? a : 0; b < n; b++) {
                double complex z = size * (unit_draw(&seed) + I * unit_draw(&seed));
                if (h == 0 && a == b) z = creal(z);
                tmp->H[r * n2 + (size_t)a * n + b] += z;
                /* The partner element: (b, a) of -R, which for R = 0 is the transposed element. */
                if (h > 0 || a != b) tmp->H[(size_t)q * n2 + (size_t)b * n + a] += conj(z);
            }
    }
    *out = tmp;
    return 0;
}
