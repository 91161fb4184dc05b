/* Helpers shared by the cmocka tests: a seeded generator, built-in models that must build,
 * random orbital phases for gauge-invariance checks, temporary folders, and a field-by-field model
 * comparison. Include after <cmocka.h>; everything is static, one copy per test program. */
#ifndef BANDSIEVE_TESTUTIL_H
#define BANDSIEVE_TESTUTIL_H

#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/lattice_models.h"
#include "bandsieve/model.h"

/* Uniform in [0,1) from splitmix64: seeded, reproducible (common practice). */
static inline double bs_test_uniform(uint64_t *s)
{
    uint64_t z = (*s += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    z ^= z >> 31;
    return (z >> 11) * (1.0 / 9007199254740992.0);
}

/* The built-in model of spec; the test fails with lm_build's message when it does not build. */
static inline tb_model *bs_test_build(const char *spec)
{
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    if (lm_build(spec, &m, &err) != 0) fail_msg("lm_build(%s): %s", spec, err.msg);
    return m;
}

/* Random orbital phases (radians) for m from a seeded generator; where m carries an explicit
 * inversion operator, partners get the same phase up to a random multiple of pi, as tf_phase
 * requires (the operator's signs must stay real). */
static inline void bs_test_random_phases(const tb_model *m, unsigned long long *seed, double *phi)
{
    for (int o = 0; o < m->nspatial; o++) {
        *seed = *seed * 6364136223846793005ULL + 1442695040888963407ULL;
        phi[o] = 2 * M_PI * (double)(*seed >> 11) / 9007199254740992.0;
    }
    if (!m->has_inversion_op) return;
    for (int o = 0; o < m->nspatial; o++) {
        int j = tb_state_orbital(m, m->inv_perm[tb_state_index(m, o, 0)]);
        if (j > o) phi[j] = phi[o] + ((*seed >> (o % 60)) & 1 ? M_PI : 0.0);
    }
}

/* Makes a fresh folder /tmp/bs_test_<name>_XXXXXX into dir (capacity len); 0 or -1. */
static inline int bs_test_tmpdir(char *dir, size_t len, const char *name)
{
    snprintf(dir, len, "/tmp/bs_test_%s_XXXXXX", name);
    return mkdtemp(dir) ? 0 : -1;
}

/* Removes dir and everything in it; 0 or -1. */
static inline int bs_test_rmtree(const char *dir)
{
    char cmd[600];
    snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
    return system(cmd) == 0 ? 0 : -1;
}

/* Every field of two models is equal, bit for bit (round trips). */
/* 1 when a and b hold the same hoppings bit for bit (nR and norb equal), whether folded or not. */
static inline int bs_test_same_hops(const tb_model *a, const tb_model *b)
{
    if (a->nR != b->nR || a->norb != b->norb) return 0;
    for (int r = 0; r < a->nR; r++)
        for (int i = 0; i < a->norb; i++)
            for (int j = 0; j < a->norb; j++) {
                double complex x = tb_hop(a, r, i, j), y = tb_hop(b, r, i, j);
                if (memcmp(&x, &y, sizeof x) != 0) return 0;
            }
    return 1;
}

static inline void bs_test_expect_same_model(const tb_model *a, const tb_model *b)
{
    assert_string_equal(a->id, b->id);
    assert_string_equal(a->formula, b->formula);
    assert_string_equal(a->source, b->source);
    assert_int_equal(a->dim, b->dim);
    assert_memory_equal(a->lattice, b->lattice, sizeof a->lattice);
    assert_int_equal(a->norb, b->norb);
    assert_int_equal(a->nspatial, b->nspatial);
    assert_int_equal(a->spinful, b->spinful);
    assert_int_equal(a->spin_layout, b->spin_layout);
    assert_int_equal(a->nocc, b->nocc);
    assert_int_equal(a->has_fermi, b->has_fermi);
    assert_true(a->fermi_ev == b->fermi_ev);
    assert_memory_equal(a->orb_pos, b->orb_pos, (size_t)a->nspatial * sizeof *a->orb_pos);
    assert_memory_equal(a->orb_l, b->orb_l, (size_t)a->nspatial * sizeof *a->orb_l);
    assert_int_equal(a->nR, b->nR);
    assert_memory_equal(a->R, b->R, (size_t)a->nR * sizeof *a->R);
    assert_memory_equal(a->deg, b->deg, (size_t)a->nR * sizeof *a->deg);
    assert_true(bs_test_same_hops(a, b));
    assert_int_equal(a->magnetism, b->magnetism);
    assert_int_equal(a->has_inversion_op, b->has_inversion_op);
    if (a->has_inversion_op) {
        assert_memory_equal(a->inv_perm, b->inv_perm, (size_t)a->norb * sizeof *a->inv_perm);
        assert_memory_equal(a->inv_sign, b->inv_sign, (size_t)a->norb * sizeof *a->inv_sign);
        assert_memory_equal(a->inv_shift, b->inv_shift, (size_t)a->norb * sizeof *a->inv_shift);
    }
}

#endif
