/* Fit-like noise on a tight-binding model: what a Wannier-function fit of a symmetric compound
 * looks like (random errors of the gauge and the disentanglement on every H(R), small tails beyond
 * the model's range). Used by the invented demo set and by the tests of approximate symmetry. */
#ifndef BANDSIEVE_FITNOISE_H
#define BANDSIEVE_FITNOISE_H

#include <stdint.h>

#include "bandsieve/err.h"
#include "bandsieve/model.h"

/* A copy of m (borrowed) into *out (caller frees) with random Hermitian noise added: every element
 * of every H(R)/deg(R) gets real and imaginary parts uniform in [-rel, rel] x (the largest
 * |H(R)/deg(R)| element); the next shell of lattice vectors (R + e_i, i periodic, not in m) gets
 * tails a tenth of that size. H(-R) = H(R)^dagger holds exactly (noise on the canonical half, its
 * conjugate on the other), so the result passes tb_model_validate. All weights of the result are 1.
 * The generator is seeded with seed (same seed, same noise). BS_ENOMEM, or the limits of
 * tb_model_create. */
int fitnoise_apply(const tb_model *m, double rel, uint64_t seed, tb_model **out, bs_err *err);

#endif
