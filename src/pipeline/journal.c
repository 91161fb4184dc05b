/* The hand-out journal (see journal.h). Lines: "H <run> <session> <id>" when a material is handed
 * out, "R <run> <session> <id>" when its outcome arrives. Lines are collected in memory and
 * written with one write(2) per pl_journal_sync: the coordinator syncs once per round of
 * messages instead of calling the kernel twice per material. */
#include "journal.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

struct pl_journal {
    int fd;
    int64_t run_id;
    char session[64];
    char middle[96]; /* " <run> <session> ", the part every line of this job shares */
    size_t middle_len;
    char *buf; /* lines not yet written */
    size_t len, cap;
};

int pl_journal_open(const char *path, int64_t run_id, pl_journal **out, bs_err *err)
{
    *out = NULL;
    pl_journal *j = calloc(1, sizeof *j);
    if (!j) return bs_fail(err, BS_ENOMEM, "out of memory for the journal");
    j->fd = open(path, O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
    if (j->fd < 0) {
        free(j);
        return bs_fail(err, BS_EIO, "%s: cannot open the hand-out journal: %s", path, strerror(errno));
    }
    struct timespec t;
    clock_gettime(CLOCK_REALTIME, &t);
    /* Unique enough: a job's start time in nanoseconds and its process id. */
    snprintf(j->session, sizeof j->session, "%lld.%09ld.%ld", (long long)t.tv_sec, t.tv_nsec, (long)getpid());
    j->run_id = run_id;
    int n = snprintf(j->middle, sizeof j->middle, " %lld %s ", (long long)run_id, j->session);
    j->middle_len = n > 0 && (size_t)n < sizeof j->middle ? (size_t)n : 0;
    *out = j;
    return 0;
}

/* One line, "K <run> <session> <id>", put together from the shared middle (formatting the whole
 * line with snprintf cost more than the rest of the journal's work per material). */
static int journal_line(pl_journal *j, char kind, const char *id, bs_err *err)
{
    size_t idlen = strlen(id);
    size_t need = j->middle_len + idlen + 3;
    if (j->len + need > j->cap) {
        size_t cap = j->cap ? 2 * j->cap : 4096;
        while (cap < j->len + need)
            cap *= 2;
        char *p = realloc(j->buf, cap);
        if (!p) return bs_fail(err, BS_ENOMEM, "out of memory for the hand-out journal");
        j->buf = p;
        j->cap = cap;
    }
    char *p = j->buf + j->len;
    *p++ = kind;
    memcpy(p, j->middle, j->middle_len);
    p += j->middle_len;
    memcpy(p, id, idlen);
    p += idlen;
    *p++ = '\n';
    j->len = (size_t)(p - j->buf);
    return 0;
}

int pl_journal_handed(pl_journal *j, const char *id, bs_err *err)
{
    return journal_line(j, 'H', id, err);
}
int pl_journal_received(pl_journal *j, const char *id, bs_err *err)
{
    return journal_line(j, 'R', id, err);
}

int pl_journal_sync(pl_journal *j, bs_err *err)
{
    size_t done = 0;
    while (done < j->len) {
        ssize_t w = write(j->fd, j->buf + done, j->len - done);
        if (w < 0 && errno == EINTR) continue;
        if (w <= 0) {
            /* The unwritten lines are dropped: keeping them would only grow the buffer. */
            j->len = 0;
            return bs_fail(err, BS_EIO, "cannot write the hand-out journal: %s",
                           w < 0 ? strerror(errno) : "nothing written");
        }
        done += (size_t)w;
    }
    j->len = 0;
    return 0;
}

void pl_journal_close(pl_journal *j)
{
    if (!j) return;
    bs_err err;
    bs_err_clear(&err);
    pl_journal_sync(j, &err);
    close(j->fd);
    free(j->buf);
    free(j);
}

/* One (session, id) pair still open. */
typedef struct open_pair {
    char session[64];
    char id[128];
} open_pair;

typedef struct pair_list {
    open_pair *p;
    int n, cap;
} pair_list;

static int pair_find(const pair_list *l, const char *session, const char *id)
{
    for (int i = l->n - 1; i >= 0; i--)
        if (!strcmp(l->p[i].id, id) && !strcmp(l->p[i].session, session)) return i;
    return -1;
}

int pl_journal_lost(const char *path, int64_t run_id, char ***ids, int **strikes, int *n, bs_err *err)
{
    *ids = NULL;
    *strikes = NULL;
    *n = 0;
    FILE *fp = fopen(path, "r");
    if (!fp)
        return errno == ENOENT
                   ? 0
                   : bs_fail(err, BS_EIO, "%s: cannot read the journal: %s", path, strerror(errno));
    pair_list open = {0};
    char line[512];
    int rc = 0;
    while (rc == 0 && fgets(line, sizeof line, fp)) {
        char kind, session[64], id[128];
        long long run;
        if (sscanf(line, "%c %lld %63s %127s", &kind, &run, session, id) != 4 || run != run_id) continue;
        int at = pair_find(&open, session, id);
        if (kind == 'H' && at < 0) {
            if (open.n == open.cap) {
                int cap = open.cap ? 2 * open.cap : 64;
                open_pair *p = realloc(open.p, (size_t)cap * sizeof *p);
                if (!p) {
                    rc = bs_fail(err, BS_ENOMEM, "out of memory reading the journal");
                    break;
                }
                open.p = p;
                open.cap = cap;
            }
            snprintf(open.p[open.n].session, sizeof open.p[open.n].session, "%s", session);
            snprintf(open.p[open.n].id, sizeof open.p[open.n].id, "%s", id);
            open.n++;
        } else if (kind == 'R' && at >= 0) {
            open.p[at] = open.p[--open.n];
        }
    }
    fclose(fp);
    /* Count, per id, the sessions that left it open. */
    char **out_ids = rc == 0 ? calloc((size_t)open.n + 1, sizeof *out_ids) : NULL;
    int *out_strikes = rc == 0 ? calloc((size_t)open.n + 1, sizeof *out_strikes) : NULL;
    if (rc == 0 && (!out_ids || !out_strikes))
        rc = bs_fail(err, BS_ENOMEM, "out of memory reading the journal");
    int k = 0;
    for (int i = 0; rc == 0 && i < open.n; i++) {
        int found = -1;
        for (int q = 0; q < k && found < 0; q++)
            if (!strcmp(out_ids[q], open.p[i].id)) found = q;
        if (found >= 0) {
            out_strikes[found]++;
            continue;
        }
        out_ids[k] = strdup(open.p[i].id);
        if (!out_ids[k]) {
            rc = bs_fail(err, BS_ENOMEM, "out of memory reading the journal");
            break;
        }
        out_strikes[k++] = 1;
    }
    free(open.p);
    if (rc != 0) {
        for (int q = 0; q < k; q++)
            free(out_ids[q]);
        free(out_ids);
        free(out_strikes);
        return rc;
    }
    *ids = out_ids;
    *strikes = out_strikes;
    *n = k;
    return 0;
}
