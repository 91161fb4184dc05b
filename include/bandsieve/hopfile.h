/* The plain-text hopping table of the trade: a comment line; the number of orbitals n; the number
 * of lattice vectors N_R; N_R integer degeneracy weights, 15 per line; then N_R*n*n lines
 * `R1 R2 R3 m n Re Im` (m the row, 1-based, varying fastest; blocks of n*n lines per R).
 * H(k) = sum_R exp(2 pi i k.R) H(R) / deg(R), k in reduced coordinates. */
#ifndef BANDSIEVE_HOPFILE_H
#define BANDSIEVE_HOPFILE_H

#include "bandsieve/err.h"
#include "bandsieve/model.h"

/* Reads the table at path into a new model (lattice, orbitals and filling keep the defaults of
 * tb_model_create; the card reader fills them). spinful != 0 requires an even orbital count.
 * Structure is checked strictly, every message names "path:line": missing or extra lines, field
 * counts (1 on the n and N_R lines, 15 weights per line except the last, 7 per hopping line),
 * non-numeric or non-finite numbers, header sizes against config.h limits (checked before any
 * allocation), weights < 1, R constant within a block, orbital indices in range and in order,
 * duplicate R blocks. Hermiticity is not checked here (tb_model_validate does it).
 * Errors: BS_EIO (cannot open/read), BS_EPARSE (malformed), BS_EINVAL (sizes, weights, duplicates),
 * BS_ENOMEM. The caller owns *out (tb_model_free). */
int hop_read(const char *path, int spinful, tb_model **out, bs_err *err);

/* Writes m's hoppings to path in the same format; comment (borrowed, may be NULL) is the first
 * line, newlines in it replaced by spaces. Numbers are printed with %.17g so that hop_read gives
 * back the identical doubles. Errors: BS_EIO naming path (open, write or close failure). */
int hop_write(const char *path, const tb_model *m, const char *comment, bs_err *err);

#endif
