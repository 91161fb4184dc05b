/* The material set: many materials in one HDF5 file, plus an index table that the coordinator
 * reads without touching the hoppings. Layout in db/material-set.md. Written by one process
 * (pack, demo-set); read by any number of processes at once (read-only opens, no file locking). */
#ifndef BANDSIEVE_MATSET_H
#define BANDSIEVE_MATSET_H

#include "bandsieve/err.h"
#include "bandsieve/model.h"

typedef struct ms_set ms_set;

/* Entry status, stored in the index and in each material group. */
enum {
    MS_STATUS_OK = 0,     /* validated when it was added */
    MS_STATUS_BROKEN = 1, /* stored unvalidated; reading it validates and (normally) fails */
    MS_STATUS_ERROR = 2   /* only an error text: its card could not be read at all */
};

/* One row of the index. cost is the estimated work per k-point, norb^3 (diagonalisation) +
 * nR*norb^2 (Fourier sum), in units of floating-point operations up to a constant; the coordinator
 * multiplies it by its k-point count. Entries with status MS_STATUS_ERROR have zero sizes. */
typedef struct ms_entry {
    char id[128];
    int dim, norb, nR, nocc, spinful, status;
    double cost;
    char content[65]; /* content hash (content.h), "" in sets written before it existed:
                         ms_content computes it then */
    /* Family membership, from the card (tb_model.has_family ...) and stored in /families; not
     * part of the /index table. */
    int has_family;
    char family[64], family_param[32], family_unit[16];
    double family_value;
    unsigned long long basis; /* writer only: hash of the basis (orbitals' l, spin layout) */
} ms_entry;

/* Suffix of the file a set is written to before it takes its name (see ms_create). */
#define MS_PARTIAL_SUFFIX ".partial"

/* Creates a set for writing at path. Everything goes to "<path>.partial" until ms_close renames
 * it onto path, so a failed pack never leaves a half-written set under the final name.
 * The caller owns *out (ms_close, then ms_free). Errors: BS_EHDF5, BS_EIO, BS_ENOMEM. */
int ms_create(const char *path, ms_set **out, bs_err *err);

/* Sets the free-text description (borrowed, < 4096 bytes) and whether the set's data are invented
 * (demo data are labelled invented). Writer only. */
int ms_set_meta(ms_set *s, const char *description, int invented, bs_err *err);

/* Validates m (tb_model_validate with BS_HERMITIAN_TOL_EV) and adds it under m->id (card_id_ok).
 * m is borrowed. Errors: BS_EINVAL (invalid model, bad or duplicate id), BS_EHDF5. */
int ms_add(ms_set *s, const tb_model *m, bs_err *err);

/* Adds m as given, without validation, with status MS_STATUS_BROKEN: the reader will validate it
 * and return that error (demo sets need entries that screen as `invalid`). m must still be
 * structurally sound (made by tb_model_create). Errors as ms_add, less validation. */
int ms_add_broken(ms_set *s, const tb_model *m, bs_err *err);

/* Adds an entry holding only an error (code, message; borrowed) for a material whose card could
 * not be read; reading it returns that code and message. id must pass card_id_ok. */
int ms_add_error(ms_set *s, const char *id, int code, const char *message, bs_err *err);

/* Copies entry i of src (an open reader; borrowed) into the writer dst as it is stored (all
 * datasets and attributes, status and content hash; the hash is computed when src lacks it).
 * Used by pack to append to an existing set. Errors: BS_EINVAL (duplicate id), BS_EHDF5. */
int ms_copy_entry(ms_set *dst, const ms_set *src, int i, bs_err *err);

/* Writer: writes the index and metadata, closes the file and renames it onto the final path.
 * Reader: closes the file. The set must still be freed. Errors: BS_EHDF5, BS_EIO. */
int ms_close(ms_set *s, bs_err *err);

/* Frees s; a writer that was not closed successfully is discarded (its .partial file removed).
 * Accepts NULL. */
void ms_free(ms_set *s);

/* Opens the set at path read-only, with HDF5 file locking off so that many ranks can open it
 * together (on file systems without working locks, too), and reads the index into memory.
 * Errors: BS_EIO (cannot open), BS_EPARSE (not an HDF5 file, not a bandsieve set, unsupported
 * version, malformed index), BS_EHDF5. The caller owns *out (ms_free). */
int ms_open(const char *path, ms_set **out, bs_err *err);

/* Number of entries, and entry i (0 <= i < count; borrowed, valid until ms_free). */
int ms_count(const ms_set *s);
const ms_entry *ms_entry_at(const ms_set *s, int i);

/* Families of the set: the distinct family names in order of first appearance (names[i] borrowed
 * from the entries, valid until ms_free), at most cap of them; returns the count. */
int ms_families(const ms_set *s, const char **names, int cap);

/* Index of the entry with this id, or -1. O(log n) on an opened set (a sorted index built by
 * ms_open); a set being written scans its entries. */
int ms_find(const ms_set *s, const char *id);

/* Reads entry i (or the one named id) into a new validated model; the caller owns *out.
 * Errors name "<path>:/materials/<id>[/dataset]": BS_EPARSE (missing or malformed datasets and
 * attributes, shapes that disagree), BS_EINVAL (validation: sizes, hermiticity), the stored code
 * for MS_STATUS_ERROR entries, BS_EINVAL for an unknown id or index, BS_EHDF5. Reader only. */
int ms_read(const ms_set *s, int i, tb_model **out, bs_err *err);
int ms_read_id(const ms_set *s, const char *id, tb_model **out, bs_err *err);

/* The content hash of entry i (64 hexadecimal characters and a NUL) into hex: the stored one,
 * or for sets written before hashes were stored, computed by reading the entry (unvalidated;
 * an error entry hashes its stored message). Reader only; BS_EHDF5/BS_EPARSE when the entry
 * cannot be read at all. */
int ms_content(const ms_set *s, int i, char hex[65], bs_err *err);

/* The whole set's content hash: SHA-256 of the lines "<id> <content hash>\n" in id order, so it
 * does not depend on the file's path, name or entry order. Reader only; errors as ms_content. */
int ms_set_content(const ms_set *s, char hex[65], bs_err *err);

/* The card of entry i as JSON text (what the card held, comment, labels and meta included); the
 * caller owns *json (free). *json is NULL when the entry stores no card (sets written before
 * cards were kept, built-in models, error entries). Reader only. */
int ms_read_card(const ms_set *s, int i, char **json, bs_err *err);

/* The description ("" when none), the invented flag, and the path the set was opened with. */
const char *ms_description(const ms_set *s);
int ms_invented(const ms_set *s);
const char *ms_path(const ms_set *s);

#endif
