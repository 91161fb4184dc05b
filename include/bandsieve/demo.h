/* The invented demonstration family: a material set of fictitious compounds, each a built-in
 * published lattice model with varied parameters (spin-orbit strength, strain-like distortion,
 * sublattice and inversion-breaking potentials), some with invented fit noise that breaks their
 * symmetries slightly as real Wannier fits do, plus a few deliberately broken entries, so that a
 * screen meets every class and every status. Nothing in it describes a real material. */
#ifndef BANDSIEVE_DEMO_H
#define BANDSIEVE_DEMO_H

#include <stdint.h>

#include "bandsieve/err.h"
#include "bandsieve/model.h"

/* Writes the demo set of count entries (>= 12; at least 3 broken ones among them) to path,
 * drawing parameters from a generator seeded with seed (same seed, same set). The set's metadata
 * say it is invented. Errors from the set writer and the model builder. */
int demo_write_set(const char *path, int count, uint64_t seed, bs_err *err);

/* As demo_write_set; with families set, also 7 entries in two invented families (card key
 * "family"): Jo2Qu-pressure (5 members, 0..8 GPa) and the alloy JaQi1-xQox (end members at x = 0
 * and 1), ids JQF-*. */
int demo_write_set_families(const char *path, int count, uint64_t seed, int families, bs_err *err);

/* The spec (lm_build syntax) and invented formula of demo entry i, for tests and listings:
 * spec and formula receive at most speclen / formlen bytes; *broken is the kind of damage for a
 * broken entry (0 none, 1 non-Hermitian, 2 occupied_bands out of range, 3 NaN, 4 unreadable card);
 * *noise_rel is the relative size of the invented fit noise of the entry (fitnoise.h; 0 for
 * none): about one entry in four that is not broken carries noise of 1e-4 to 1e-3 of its largest
 * hopping, as Wannier fits of symmetric compounds do, and *noise_seed seeds it. */
void demo_entry(int i, int count, uint64_t seed, char *spec, int speclen, char *formula, int formlen,
                int *broken, double *noise_rel, uint64_t *noise_seed);

/* The model of entry i as demo_write_set stores it (spec, then the fit noise if any; the damage of
 * a broken entry is not applied). The caller owns *out. Errors of lm_build and fitnoise_apply. */
int demo_model(int i, int count, uint64_t seed, tb_model **out, bs_err *err);

#endif
