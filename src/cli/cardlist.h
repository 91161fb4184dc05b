/* The inputs of pack and check: card files named one by one, every *.json in a folder (sorted,
 * not recursive), or the lines of a list file. */
#ifndef BANDSIEVE_CLI_CARDLIST_H
#define BANDSIEVE_CLI_CARDLIST_H

#include <stddef.h>

#include "bandsieve/err.h"

/* A growing list of paths; the caller owns it (cardlist_clear). */
typedef struct cardlist {
    char **path;
    size_t n, cap;
} cardlist;

void cardlist_clear(cardlist *l);

/* Adds arg: a folder gives its *.json files in name order; anything else is added as it is.
 * BS_EIO when a folder cannot be read, BS_EINVAL when it holds no card. */
int cardlist_add_arg(cardlist *l, const char *arg, bs_err *err);

/* Adds the paths of a list file, one per line; relative paths are taken from the list file's
 * folder; blank lines and lines starting with '#' are skipped. Errors name "list:line". */
int cardlist_add_file(cardlist *l, const char *list_path, bs_err *err);

/* 1 when path names an HDF5 file (by its signature), else 0: check accepts sets as inputs. */
int cardlist_is_hdf5(const char *path);

#endif
