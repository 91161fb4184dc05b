/* Noisy variants of a model for the tests and the noise-sweep benchmark (the noise itself comes
 * from fitnoise.h, shared with the invented demo set), with the bound of the noise that the
 * acceptance rules compare with the gap, and an exchange field as a physical time-reversal
 * breaking. Header-only, everything static. */
#ifndef BANDSIEVE_TEST_NOISE_H
#define BANDSIEVE_TEST_NOISE_H

#include <complex.h>
#include <math.h>
#include <stdint.h>
#include <string.h>

#include "bandsieve/fitnoise.h"
#include "bandsieve/model.h"
#include "bandsieve/symfit.h"

static inline int bs_noise_find(int (*R)[3], int n, const int r[3])
{
    for (int i = 0; i < n; i++)
        if (R[i][0] == r[0] && R[i][1] == r[1] && R[i][2] == r[2]) return i;
    return -1;
}

/* The noisy copy of m (fitnoise_apply: relative size rel of the largest hopping, tails on the next
 * shell) into *out (caller frees). *bound_ev (may be NULL) receives sum_R symfit_norm_bound of the
 * noise at R: an upper bound of max_k ||noise(k)||_2. 0, or -1 on failure. */
static inline int bs_noise_model(const tb_model *m, double rel, uint64_t seed, tb_model **out,
                                 double *bound_ev)
{
    bs_err err;
    if (fitnoise_apply(m, rel, seed, out, &err) != 0) return -1;
    const tb_model *c = *out;
    size_t n2 = (size_t)c->norb * c->norb;
    double complex *d = malloc(n2 * sizeof *d);
    if (!d) return -1;
    double bound = 0;
    for (int r = 0; r < c->nR; r++) {
        int q = bs_noise_find(m->R, m->nR, c->R[r]);
        for (size_t i = 0; i < n2; i++)
            d[i] = tb_hop(c, r, (int)(i / (size_t)c->norb), (int)(i % (size_t)c->norb)) -
                   (q >= 0 ? tb_hop(m, q, (int)(i / (size_t)c->norb), (int)(i % (size_t)c->norb)) / m->deg[q]
                           : 0);
        bound += symfit_norm_bound(c->norb, d);
    }
    free(d);
    if (bound_ev) *bound_ev = bound;
    return 0;
}

/* Adds an exchange field m_ev s_z on every orbital (spinful models): +m_ev on spin-up states,
 * -m_ev on spin-down, at R = 0 (which every built-in model has). A physical time-reversal breaking. */
static inline void bs_noise_exchange(tb_model *m, double m_ev)
{
    bs_err err;
    if (tb_model_unfold(m, &err) != 0) abort(); /* out of memory ends the test */
    int zero[3] = {0, 0, 0};
    int r = bs_noise_find(m->R, m->nR, zero);
    for (int i = 0; i < m->norb; i++)
        m->H[((size_t)r * m->norb + i) * m->norb + i] += m->deg[r] * (tb_state_spin(m, i) ? -m_ev : m_ev);
}

#endif
