/* Error codes and the message-carrying error record shared by every layer.
 * Library functions return 0 or a negative BS_E* code and fill a bs_err owned by the caller. */
#ifndef BANDSIEVE_ERR_H
#define BANDSIEVE_ERR_H

enum {
    BS_OK = 0,
    BS_EPARSE = -1,       /* malformed input text or JSON */
    BS_EIO = -2,          /* file cannot be opened, read or written */
    BS_ENOMEM = -3,       /* allocation failed */
    BS_EINVAL = -4,       /* input well-formed but not acceptable (ranges, hermiticity, ...) */
    BS_ENUMERIC = -5,     /* numerical failure: LAPACK info != 0, non-convergence */
    BS_EHDF5 = -6,        /* HDF5 call failed */
    BS_ESQL = -7,         /* SQLite call failed */
    BS_EMPI = -8,         /* MPI call failed */
    BS_ETIMEOUT = -9,     /* time budget exceeded */
    BS_EUSAGE = -10,      /* bad command-line usage */
    BS_EUNSUPPORTED = -11 /* the binary was built without what is asked (e.g. figures without PLplot) */
};

typedef struct bs_err {
    int code;
    char msg[512];
} bs_err;

/* Clears e (code 0, empty message). */
void bs_err_clear(bs_err *e);

/* Fills e with code and a printf-style message unless e already holds an error (the first,
 * deepest message is kept). Returns the code e holds afterwards: code, or the earlier error's
 * code when there was one. e may be NULL (then code is returned). */
int bs_fail(bs_err *e, int code, const char *fmt, ...) __attribute__((format(printf, 3, 4)));

/* Prepends context ("material X: ") to the message in e; returns e->code. */
int bs_err_context(bs_err *e, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

/* Fault injection for tests: 1 when the environment variable `var` is set to `key` or to "*",
 * else 0. Used only at a few storage writes (named in the README's reliability section), so that
 * tests can make exactly one material's write fail as a full disk would. */
int bs_fault_hit(const char *var, const char *key);

/* Short name of a code ("parse", "io", ...). */
const char *bs_err_name(int code);

#endif
