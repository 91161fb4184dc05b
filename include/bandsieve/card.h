/* The material card: a JSON file describing one material (lattice, orbitals, spin layout, filling,
 * optional inversion operator) and naming its hopping table. Keys (all others are rejected, so that
 * a misspelt optional key is not silently ignored; "comment" is allowed anywhere at the top level):
 *
 *   id               string, 1..127 characters from [A-Za-z0-9_.+-], not starting with '.'
 *   dimension        2 or 3
 *   lattice          [[a1],[a2],[a3]]: three rows of three numbers, Cartesian, Angstrom
 *   hoppings         path of the hopping table, relative to the card's folder unless absolute
 *   occupied_bands   integer, 1..norb-1; or instead
 *   electrons        integer: electrons in the Wannier subspace (the table's bands). Spinful: one
 *                    per band, occupied_bands = electrons. Spinless: the model stands for two
 *                    spin-degenerate copies, two per band, occupied_bands = electrons / 2 (an odd
 *                    count is refused). Exactly one of the two keys.
 *   spinful          boolean
 *   spin_layout      "blocks" | "interleaved"; required when spinful; on a spinless card accepted,
 *                    ignored, and reported as a note
 *   orbitals         [{"position": [3 reduced], "l": 0..3, "label": optional string}, ...], one per
 *                    spatial orbital; the table holds (spinful ? 2 : 1) * len(orbitals) states
 *   formula          optional string (< 64 characters)
 *   source           optional string (< 256 characters)
 *   fermi_energy_eV  optional number
 *   meta             optional object, free-form (any keys and values), stored as given with the
 *                    card; the place for extra information, since unknown top-level keys are
 *                    refused (with a "did you mean" suggestion for near misses)
 *   magnetism        optional "none" | "magnetic" | "unknown" (default): the user's statement about
 *                    the compound; "none" makes time reversal hold whatever the fit's breaking
 *                    (it is symmetrised away and reported), "magnetic" makes it broken (no Z2)
 *   inversion        optional explicit inversion operator, one entry per basis state i (in table
 *                    order): {"maps_to": j (1-based state), "sign": +1|-1, "shift": [3 integers]}.
 *                    Meaning: P c+_{i,R} P^-1 = sign_i c+_{j,-R+shift_i}, i.e. the state i at
 *                    position R + tau_i is carried to -R - tau_i = (-R + shift_i) + tau_j, so
 *                    shift_i = -tau_i - tau_j (reduced; checked against the positions within 1e-4,
 *                    and in 2D only in the first two components, with shift_3 = 0). sign_i is the
 *                    orbital's intrinsic parity ((-1)^l for pure atomic orbitals). Spin is not
 *                    flipped by inversion, so j must have the spin of i. Stored in tb_model as
 *                    inv_perm[i] = j-1 (0-based), inv_sign[i], inv_shift[i].
 */
#ifndef BANDSIEVE_CARD_H
#define BANDSIEVE_CARD_H

#include <stddef.h>

#include "bandsieve/err.h"
#include "bandsieve/model.h"

/* card_read_opts flag: skip the checks that tb_model_validate makes (hermiticity, -R present,
 * filling range), so that a structurally sound but physically broken card can still be stored as
 * a broken entry of a material set. */
enum { CARD_NO_VALIDATE = 1 };

/* Reads the card at path and its hopping table into a new, validated model (hermiticity within
 * BS_HERMITIAN_TOL_EV). Every message names the card path and, where it applies, the key and its
 * line ("card.json:7: key 'dimension': expected 2 or 3, found 4"); table errors keep the table's
 * own "table:line" message, prefixed with the card path. Errors: BS_EIO, BS_EPARSE (JSON syntax,
 * missing or mistyped key), BS_EINVAL (values out of range, counts that disagree, non-Hermitian),
 * BS_ENOMEM. The caller owns *out. */
int card_read(const char *path, tb_model **out, bs_err *err);

/* As card_read; flags is 0 or CARD_NO_VALIDATE. */
int card_read_opts(const char *path, int flags, tb_model **out, bs_err *err);

/* As card_read_opts, and fills notes (capacity cap; may be NULL) with lines
 * "card.json:LINE: key 'K': ..." about things accepted but worth saying (a spin_layout on a
 * spinless card); "" when there are none. The model's card_json holds the card as read. */
int card_read_notes(const char *path, int flags, tb_model **out, char *notes, size_t cap, bs_err *err);

/* 1 when id is acceptable as a material id (see the id key above), else 0. Material ids become
 * file names and HDF5 group names, hence the restricted alphabet. */
int card_id_ok(const char *id);

/* Writes m as <dir>/<id>.json with its table <dir>/<id>_hop.dat (the card names the table by its
 * relative name, so the folder can be moved). m is borrowed. The card's path is copied to
 * card_path (capacity cap) when card_path is not NULL. Errors: BS_EINVAL (bad id), BS_EIO. */
int card_write(const tb_model *m, const char *dir, char *card_path, size_t cap, bs_err *err);

#endif
