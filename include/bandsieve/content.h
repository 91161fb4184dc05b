/* Content identity of a material: a SHA-256 (sha256.h) of everything that determines its answer,
 * so that a catalogue can tell a changed table from an unchanged one whatever the set's path or
 * name. What is hashed, in this order, as little-endian 64-bit integers and IEEE-754 doubles
 * (-0.0 written as +0.0, since both give the same H(k)):
 *
 *   the tag "bandsieve-content-1"; dimension; lattice (9 numbers); norb, nspatial, spinful,
 *   spin_layout; occupied bands; orbital positions (nspatial x 3) and angular momenta; when the
 *   card names orbital shapes, the tag "orbital-shapes" and each orbital's shape index; has_fermi and
 *   the Fermi energy (0 when absent; transport is evaluated there); has_inversion_op and, when set,
 *   the operator (perm, sign, shift per state); nR; then per lattice vector R (3 integers), its
 *   weight and H(R) (norb x norb complex, row-major).
 *
 * Not hashed: id, formula, source, the card text (comment, labels, meta): they are provenance and do
 * not change a result. Documented with the set layout in db/material-set.md. */
#ifndef BANDSIEVE_CONTENT_H
#define BANDSIEVE_CONTENT_H

#include "bandsieve/model.h"
#include "bandsieve/sha256.h"

/* The content hash of m (borrowed) as 64 lower-case hexadecimal characters. Cannot fail. */
void tb_content_hash(const tb_model *m, char hex[BS_SHA256_HEX]);

#endif
