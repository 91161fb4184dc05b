/* Basis permutations, orbital phases and spin-layout conversion of tight-binding models. */
#include "bandsieve/transform.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

static int check_perm(const int *p, int n, const char *what, bs_err *err)
{
    char *seen = calloc((size_t)n, 1);
    if (!seen) return bs_fail(err, BS_ENOMEM, "out of memory checking a permutation");
    int rc = 0;
    for (int i = 0; i < n && rc == 0; i++) {
        if (p[i] < 0 || p[i] >= n)
            rc = bs_fail(err, BS_EINVAL, "%s permutation: entry %d is %d, expected 0..%d", what, i, p[i],
                         n - 1);
        else if (seen[p[i]]++)
            rc = bs_fail(err, BS_EINVAL, "%s permutation: %d appears twice", what, p[i]);
    }
    free(seen);
    return rc;
}

int tf_permute_states(const tb_model *m, const int *old_of_new, tb_model **out, bs_err *err)
{
    *out = NULL;
    int n = m->norb;
    int rc = check_perm(old_of_new, n, "state", err);
    if (rc != 0) return rc;
    tb_model *c = NULL;
    int *new_of_old = malloc((size_t)n * sizeof *new_of_old);
    if (!new_of_old) return bs_fail(err, BS_ENOMEM, "out of memory for a permutation");
    if ((rc = tb_model_copy(m, &c, err)) != 0 || (rc = tb_model_unfold(c, err)) != 0) goto done;
    for (int a = 0; a < n; a++)
        new_of_old[old_of_new[a]] = a;
    for (int r = 0; r < m->nR; r++) {
        double complex *Hc = c->H + (size_t)r * n * n;
        for (int a = 0; a < n; a++)
            for (int b = 0; b < n; b++)
                Hc[(size_t)a * n + b] = tb_hop(m, r, old_of_new[a], old_of_new[b]);
    }
    /* P|old i> = s_i |old j>: new state a = old i maps to new state new_of_old[j]. */
    if (m->has_inversion_op)
        for (int a = 0; a < n; a++) {
            int i = old_of_new[a];
            c->inv_perm[a] = new_of_old[m->inv_perm[i]];
            c->inv_sign[a] = m->inv_sign[i];
            memcpy(c->inv_shift[a], m->inv_shift[i], sizeof c->inv_shift[a]);
        }
    *out = c;
    c = NULL;
done:
    tb_model_free(c);
    free(new_of_old);
    return rc;
}

int tf_permute(const tb_model *m, const int *perm, tb_model **out, bs_err *err)
{
    *out = NULL;
    int rc = check_perm(perm, m->nspatial, "orbital", err);
    if (rc != 0) return rc;
    int *states = malloc((size_t)m->norb * sizeof *states);
    if (!states) return bs_fail(err, BS_ENOMEM, "out of memory for a permutation");
    for (int a = 0; a < m->norb; a++)
        states[a] = tb_state_index(m, perm[tb_state_orbital(m, a)], tb_state_spin(m, a));
    tb_model *c = NULL;
    rc = tf_permute_states(m, states, &c, err);
    free(states);
    if (rc != 0) return rc;
    for (int k = 0; k < m->nspatial; k++) {
        memcpy(c->orb_pos[k], m->orb_pos[perm[k]], sizeof c->orb_pos[k]);
        c->orb_l[k] = m->orb_l[perm[k]];
        if (c->orb_shape) c->orb_shape[k] = m->orb_shape[perm[k]];
    }
    *out = c;
    return 0;
}

int tf_phase(const tb_model *m, const double *phi, tb_model **out, bs_err *err)
{
    *out = NULL;
    int n = m->norb;
    for (int o = 0; o < m->nspatial; o++)
        if (!isfinite(phi[o])) return bs_fail(err, BS_EINVAL, "phase of orbital %d is not finite", o + 1);
    double complex *u = malloc((size_t)n * sizeof *u);
    if (!u) return bs_fail(err, BS_ENOMEM, "out of memory for phases");
    tb_model *c = NULL;
    int rc = tb_model_copy(m, &c, err);
    if (rc == 0) rc = tb_model_unfold(c, err);
    if (rc != 0) goto done;
    for (int a = 0; a < n; a++)
        u[a] = cexp(I * phi[tb_state_orbital(m, a)]);
    for (int r = 0; r < m->nR; r++) {
        double complex *H = c->H + (size_t)r * n * n;
        for (int a = 0; a < n; a++)
            for (int b = 0; b < n; b++)
                H[(size_t)a * n + b] *= conj(u[a]) * u[b];
    }
    for (int i = 0; c->has_inversion_op && i < n; i++) {
        int j = m->inv_perm[i];
        double d = phi[tb_state_orbital(m, i)] - phi[tb_state_orbital(m, j)];
        /* exp(i d) must be +-1: 1e-9 rad admits round-off in phases computed as multiples of pi. */
        if (fabs(sin(d)) > 1e-9) {
            rc = bs_fail(err, BS_EINVAL,
                         "phases of states %d and %d (inversion partners) differ by %.6g rad, "
                         "not a multiple of pi: the inversion sign would not be real",
                         i + 1, j + 1, d);
            goto done;
        }
        c->inv_sign[i] = m->inv_sign[i] * (cos(d) > 0 ? 1.0 : -1.0);
    }
    *out = c;
    c = NULL;
done:
    tb_model_free(c);
    free(u);
    return rc;
}

int tf_spin_layout(const tb_model *m, int layout, tb_model **out, bs_err *err)
{
    *out = NULL;
    if (!m->spinful) return bs_fail(err, BS_EINVAL, "%s: spin layout of a spinless model", m->id);
    if (layout != TB_SPIN_BLOCKS && layout != TB_SPIN_INTERLEAVED)
        return bs_fail(err, BS_EINVAL, "unknown spin layout %d", layout);
    int n = m->norb, nsp = m->nspatial;
    int *states = malloc((size_t)n * sizeof *states);
    if (!states) return bs_fail(err, BS_ENOMEM, "out of memory for a permutation");
    for (int a = 0; a < n; a++) {
        int o = layout == TB_SPIN_INTERLEAVED ? a / 2 : a % nsp;
        int s = layout == TB_SPIN_INTERLEAVED ? a % 2 : a / nsp;
        states[a] = tb_state_index(m, o, s);
    }
    tb_model *c = NULL;
    int rc = tf_permute_states(m, states, &c, err);
    free(states);
    if (rc != 0) return rc;
    c->spin_layout = layout;
    *out = c;
    return 0;
}
