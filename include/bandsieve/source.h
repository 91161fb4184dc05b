/* One material from wherever the command line names it: a card, an entry of a material set, or a
 * built-in published model. */
#ifndef BANDSIEVE_SOURCE_H
#define BANDSIEVE_SOURCE_H

#include "bandsieve/err.h"
#include "bandsieve/model.h"

/* Loads the validated model named by source (borrowed):
 *   model:NAME[:key=val,...]   a built-in model, built by lm_build (lattice_models.h)
 *   PATH.h5:ID                 entry ID of a material set (split at the last ":" after ".h5")
 *   PATH.json                  a material card and its hopping table
 * The caller owns *out. Errors: those of the loader, BS_EUSAGE for a source of none of these
 * forms (the message says which forms are accepted). */
int src_load(const char *source, tb_model **out, bs_err *err);

#endif
