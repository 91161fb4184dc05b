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

/* A string set with an index per key (open addressing, FNV-1a), for finding repeated ids and
 * contents among 10^5 cards in linear time. Zero-initialise; the caller owns it (cli_strmap_clear). */
typedef struct cli_strmap {
    char **key;
    int *val;
    size_t cap, n;
} cli_strmap;

/* The value stored under key, or -1. */
int cli_strmap_get(const cli_strmap *m, const char *key);
/* Stores val under key (replacing); 0 or -1 when out of memory. */
int cli_strmap_put(cli_strmap *m, const char *key, int val);
void cli_strmap_clear(cli_strmap *m);

#endif
