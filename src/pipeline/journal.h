/* The hand-out journal: a plain text file beside the catalogue (CAT.sqlite.journal) where the
 * coordinator appends a line when it hands a material out and one when its outcome arrives. A job
 * that dies (a worker crash aborts every rank under MPI, a scheduler kill) leaves materials handed
 * out without an outcome; a resumed run reads the journal to find them, so that an entry that
 * kills its worker every time is recorded `failed` instead of killing every resume.
 * No MPI here. Private to src/pipeline. */
#ifndef BANDSIEVE_PIPELINE_JOURNAL_H
#define BANDSIEVE_PIPELINE_JOURNAL_H

#include <stdint.h>
#include <stdio.h>

#include "bandsieve/err.h"

typedef struct pl_journal pl_journal;

/* Opens (creates) the journal at path for appending lines of run_id under a fresh session token.
 * The caller owns *out (pl_journal_close). BS_EIO when the file cannot be opened. */
int pl_journal_open(const char *path, int64_t run_id, pl_journal **out, bs_err *err);

/* Adds a "handed out" / "outcome received" line for material id to the lines waiting for
 * pl_journal_sync. BS_ENOMEM when the line cannot be kept. */
int pl_journal_handed(pl_journal *j, const char *id, bs_err *err);
int pl_journal_received(pl_journal *j, const char *id, bs_err *err);

/* Writes the waiting lines with one write(2), so that they survive the process being killed
 * (the kernel keeps them). The coordinator syncs before it sends the work a "handed out" line is
 * about: a worker crash under MPI kills the coordinator too, and the line must be there for the
 * resume. BS_EIO on a write error (the waiting lines are then dropped). */
int pl_journal_sync(pl_journal *j, bs_err *err);

/* Writes what is waiting and closes j; accepts NULL. */
void pl_journal_close(pl_journal *j);

/* Materials of run_id that earlier sessions handed out and never got back, with the number of
 * sessions in which that happened. *ids (n entries, owned, free each and the array) and *strikes.
 * A missing journal is an empty answer. BS_EIO, BS_ENOMEM. */
int pl_journal_lost(const char *path, int64_t run_id, char ***ids, int **strikes, int *n, bs_err *err);

#endif
