/* The screening job under MPI: rank 0 coordinates and alone writes the catalogue; the other ranks
 * ask for work, compute one material at a time and send back the outcome. A worker whose
 * materials are short holds one more material than it computes (a prefetch), so it never waits
 * for the coordinator's reply. The coordinator works in rounds: it takes every message waiting
 * (up to PL_ROUND), hands out the next materials, writes the journal once, sends, and only then
 * records the results in the catalogue. Between rounds it polls with MPI_Iprobe and sleeps,
 * because Open MPI's blocking receives spin (with P = cores + 1 the coordinator must leave its
 * core to a worker); the sleep doubles from PL_NAP_MIN_US while nothing arrives, up to
 * PL_NAP_MAX_US while some worker waits for work. While every worker holds all it may, the sleep
 * is half the work the least supplied worker has queued (coord_nap_us), up to PL_NAP_LONG_US: each
 * empty poll costs the coordinator two context switches (Open MPI yields the core in MPI_Iprobe
 * when ranks outnumber cores, then the sleep), so it polls about as often as results can come. */
#include "bandsieve/pipeline.h"

#include <mpi.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <errno.h>
#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "bandsieve/catalogue.h"
#include "bandsieve/clock.h"
#include "bandsieve/config.h"
#include "bandsieve/diagnosis.h"
#include "bandsieve/matset.h"
#include "bandsieve/result_json.h"
#include "bandsieve/pzheev.h"
#include "group.h"
#include "journal.h"
#include "pathrun.h"
#include "work.h"

enum { TAG_RESULT = 11, TAG_WORK = 12, TAG_STOP = 13 };

/* The diagnosis default of symmetry_tol (diagnosis.h: 0 means 1e-6); an explicit 1e-6 is the same
 * setting. */
#define PL_DEFAULT_SYMMETRY_TOL 1e-6

/* Worker -> coordinator: this header, then, when code == 0, the diagnosis JSON and, when it has
 * flows, the same without them (stored_len bytes; the catalogue stores that text as it is).
 * kind 0 is the first request of a worker (no result yet). Same binary on every rank, so the
 * struct layout agrees. */
typedef struct wire_head {
    int kind;
    int seq;        /* the worker's count of messages sent before this one */
    int stored_len; /* bytes of the text without flows at the end; 0: none (the JSON is that form) */
    int code;
    int rank;
    int job_limited;
    double seconds;
    char id[128];
    char message[512];
} wire_head;

/* Coordinator -> worker. */
typedef struct wire_work {
    int index;
    int mesh;        /* this entry's k-mesh, 0: the job's */
    int group;       /* compute as the rank group (lockstep, distributed eigensolver) */
    int job_limited; /* the budget below is what remains of the job, not the material budget */
    int after;       /* seq of the worker's message this answers: the budget was measured after it */
    double max_seconds;
} wire_work;

/* Materials a worker may hold beyond the one it computes. While its materials take under
 * PL_PREFETCH_SECONDS, one more: the round trip to the coordinator (up to a millisecond under
 * load) is then hidden; for materials shorter than PL_PREFETCH_COVER, enough to fill that
 * time, up to PL_PREFETCH_MAX, so that the coordinator can sleep a few milliseconds (on a loaded
 * machine it may wake late) and take several results per wake-up. Longer
 * materials gain nothing from it and would only wait in a queue at the end of the job, so they are
 * handed out one at a time; so is a worker's first material. */
enum { PL_PREFETCH_MAX = 64 };
#define PL_PREFETCH_SECONDS 0.25
#define PL_PREFETCH_COVER   20e-3

/* Messages taken per round, and the coordinator's sleeps between polls (microseconds). */
enum { PL_ROUND = 64, PL_NAP_MIN_US = 100, PL_NAP_MAX_US = 500, PL_NAP_LONG_US = 4000 };

/* The send times a worker keeps, by seq modulo this, to know how long a material waited in its
 * queue; more than it can hold. */
enum { PL_SENT_RING = PL_PREFETCH_MAX + 4 };

typedef struct coord {
    const pl_opts *o;
    MPI_Comm comm;
    cat_db *cat;
    ms_set *set;
    pl_item *items;
    int nitems, next;
    unsigned char *taken;       /* nitems: handed out */
    int next_large, next_small; /* cursors of the group's and the single workers' queues */
    int leader;                 /* world rank of the group leader, -1 without a group */
    int nworkers;               /* ranks that ask the coordinator for work (group members do not) */
    int64_t run_id;
    double t0;
    double last_tick;
    pl_task task;
    pl_counts counts;
    int lock_fd;   /* CAT.sqlite.lock, held with flock for the whole job; -1 when none */
    int lock_held; /* this job holds the lock: it removes the file at the end */
    char lock_path[4096];
    pl_journal *journal;  /* CAT.sqlite.journal: hand-outs and outcomes */
    int *held;            /* per world rank: materials sent and not yet answered */
    int *depth;           /* per world rank: how many it may hold (1 + a prefetch for short materials) */
    double *last_seconds; /* per world rank: its last material's seconds, 0 before the first */
    unsigned char *holds_suspect; /* per world rank: it holds a suspect (and nothing else) */
    int hungry;                   /* requesting ranks that hold half their depth or less */
    cat_ids suspects;             /* ids lost once in an earlier session of this run (give_up_lost) */
    int *susp;                    /* work-list positions of the suspects, in cost order */
    int nsusp, susp_left;         /* how many; how many not yet handed out */
    int discarded;                /* the new run had nothing to do and was removed again */
    double memory_budget;         /* bytes per material (per rank; a group has group_size times it) */
    int had_materials;            /* the catalogue had material rows before the set-up (else all stale) */
} coord;

/* Sessions in which a material may take its worker down before it is given up as failed. */
enum { PL_MAX_STRIKES = 2 };

static int mpi_check(int code, const char *what, bs_err *err)
{
    if (code == MPI_SUCCESS) return 0;
    char text[MPI_MAX_ERROR_STRING];
    int len = 0;
    MPI_Error_string(code, text, &len);
    return bs_fail(err, BS_EMPI, "%s: %s", what, text);
}

/* Host names of every rank, gathered to rank 0 and joined with commas (duplicates removed). */
static int gather_hosts(MPI_Comm comm, int rank, int size, char *out, size_t outlen, bs_err *err)
{
    char name[MPI_MAX_PROCESSOR_NAME] = {0};
    int len = 0;
    MPI_Get_processor_name(name, &len);
    char *all = rank == 0 ? calloc((size_t)size, MPI_MAX_PROCESSOR_NAME) : NULL;
    if (rank == 0 && !all) return bs_fail(err, BS_ENOMEM, "out of memory for host names");
    int rc = mpi_check(
        MPI_Gather(name, MPI_MAX_PROCESSOR_NAME, MPI_CHAR, all, MPI_MAX_PROCESSOR_NAME, MPI_CHAR, 0, comm),
        "MPI_Gather of host names", err);
    if (rank == 0 && rc == 0) {
        out[0] = '\0';
        for (int r = 0; r < size; r++) {
            const char *h = all + (size_t)r * MPI_MAX_PROCESSOR_NAME;
            int seen = 0;
            for (int q = 0; q < r; q++)
                seen |= !strcmp(h, all + (size_t)q * MPI_MAX_PROCESSOR_NAME);
            if (seen) continue;
            size_t used = strlen(out);
            snprintf(out + used, outlen - used, "%s%s", used ? "," : "", h);
        }
    }
    free(all);
    return rc;
}

/* The per-material settings of a job. */
static pl_task task_of(const pl_opts *o, const struct eig_dist *dist)
{
    pl_task t = {o->mesh, o->mesh_factor, o->symmetry_tol, o->transport, o->surfaces,
                 dist,    o->magnetism,   o->pos_tol_ang,  o->verify};
    return t;
}

/* The settings that decide results, normalised so that equal work matches: the mesh each
 * dimension present in the set gets (an explicit default equals the default; for a rescreen
 * without --mesh, the rule "double each entry's best"), the per-material budget when given, a
 * symmetry tolerance other than the default, the extra tasks and the rescreen condition. Options
 * that cannot change a result (job budget, progress interval, batching, rank groups) are left out,
 * so a batch script that adds them still resumes a hand-started run. The JSON text is owned by the
 * caller (free); NULL when out of memory. The --where condition is stored whole, however long. */
static char *settings_json(const pl_opts *o, const ms_set *set)
{
    int has_dim[4] = {0};
    for (int i = 0; i < ms_count(set); i++) {
        int d = ms_entry_at(set, i)->dim;
        if (d == 2 || d == 3) has_dim[d] = 1;
    }
    cJSON *s = cJSON_CreateObject();
    if (!s) return NULL;
    if (!strcmp(o->kind, "rescreen") && o->mesh == 0) {
        cJSON_AddStringToObject(s, "mesh", "twice the best");
    } else {
        if (has_dim[2]) cJSON_AddNumberToObject(s, "mesh_2d", pl_entry_mesh(2, o->mesh, o->mesh_factor));
        if (has_dim[3]) cJSON_AddNumberToObject(s, "mesh_3d", pl_entry_mesh(3, o->mesh, o->mesh_factor));
    }
    if (o->material_seconds > 0) cJSON_AddNumberToObject(s, "material_seconds", o->material_seconds);
    if (o->symmetry_tol > 0 && o->symmetry_tol != PL_DEFAULT_SYMMETRY_TOL)
        cJSON_AddNumberToObject(s, "symmetry_tol", o->symmetry_tol);
    if (o->magnetism > 0) cJSON_AddStringToObject(s, "magnetism", tb_magnetism_name(o->magnetism - 1));
    if (o->pos_tol_ang > 0) cJSON_AddNumberToObject(s, "position_tol_A", o->pos_tol_ang);
    if (o->transport) cJSON_AddBoolToObject(s, "transport", 1);
    if (o->surfaces) cJSON_AddBoolToObject(s, "surfaces", 1);
    /* A rescreen always verifies: only a screen's choice is a setting of its own. */
    if (o->verify && strcmp(o->kind, "rescreen") != 0) cJSON_AddBoolToObject(s, "verify", 1);
    if (o->where_sql) cJSON_AddStringToObject(s, "where", o->where_sql);
    char *text = cJSON_PrintUnformatted(s);
    cJSON_Delete(s);
    return text;
}

/* One writing job per catalogue: a second screen on the same file would resume the same run and
 * compute everything twice. An exclusive flock on CAT.sqlite.lock, held until the job ends, says
 * so at once. File systems without flock (some parallel ones) get no protection, silently. The
 * job removes the file when it ends (release_lock), still holding the lock; so a job that opened
 * the file just before may hold a lock on a removed file, which it sees by comparing the inode
 * of its descriptor with the path's, and then tries again on the new file. A killed job leaves
 * the file, which is harmless: the kernel released its lock. */
static int take_lock(coord *c, bs_err *err)
{
    char *path = c->lock_path;
    snprintf(path, sizeof c->lock_path, "%s.lock", c->o->catalogue_path);
    for (int attempt = 0; attempt < 5; attempt++) {
        int fd = open(path, O_RDWR | O_CREAT | O_CLOEXEC, 0644);
        if (fd < 0) return bs_fail(err, BS_EIO, "%s: cannot create the lock file: %s", path, strerror(errno));
        if (flock(fd, LOCK_EX | LOCK_NB) != 0) {
            int e = errno;
            close(fd);
            if (e == EWOULDBLOCK)
                return bs_fail(err, BS_EIO,
                               "%s is being written by another screen or rescreen (%s is locked); "
                               "wait for it to finish",
                               c->o->catalogue_path, path);
            return 0;
        }
        struct stat held, at_path;
        if (fstat(fd, &held) == 0 && stat(path, &at_path) == 0 && held.st_dev == at_path.st_dev &&
            held.st_ino == at_path.st_ino) {
            c->lock_fd = fd;
            c->lock_held = 1;
            return 0;
        }
        close(fd);
    }
    return bs_fail(err, BS_EIO, "%s: the lock file keeps being replaced by other jobs", path);
}

/* Removes the lock file while the lock is still held, then releases it. */
static void release_lock(coord *c)
{
    if (c->lock_held) unlink(c->lock_path);
    if (c->lock_fd >= 0) close(c->lock_fd);
    c->lock_held = 0;
    c->lock_fd = -1;
}

/* Materials that earlier sessions of this run handed out and never got back died with their job.
 * One such loss is retried (the job may have been killed for another reason); after
 * PL_MAX_STRIKES the material is recorded failed, so that it cannot take down every resume.
 * Every material in flight when a job dies is lost, the one that killed it and the others that
 * workers held; so that the others do not collect a second loss beside the same killer, a
 * material lost once (a suspect) is handed out alone: to a worker that holds nothing, and
 * nothing is queued behind it (pick_suspect). */
static int by_string(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* Adds id to c->suspects, which stays sorted (cat_ids_contains) once give_up_lost is done. */
static int add_suspect(coord *c, const char *id, bs_err *err)
{
    char **grown = realloc(c->suspects.id, (c->suspects.n + 1) * sizeof *grown);
    if (!grown) return bs_fail(err, BS_ENOMEM, "out of memory for the journal's lost materials");
    c->suspects.id = grown;
    if (!(grown[c->suspects.n] = strdup(id))) return bs_fail(err, BS_ENOMEM, "out of memory");
    c->suspects.n++;
    return 0;
}

static int give_up_lost(coord *c, const char *jpath, bs_err *err)
{
    char **ids = NULL;
    int *strikes = NULL, n = 0;
    int rc = pl_journal_lost(jpath, c->run_id, &ids, &strikes, &n, err);
    cat_ids done;
    cat_ids_init(&done);
    if (rc == 0 && n > 0) rc = cat_done_ids(c->cat, c->run_id, &done, err);
    for (int i = 0; rc == 0 && i < n; i++) {
        if (cat_ids_contains(&done, ids[i])) continue;
        if (!strncmp(ids[i], PL_PATH_JOURNAL_PREFIX, strlen(PL_PATH_JOURNAL_PREFIX)))
            continue; /* families: pathrun.c */
        if (strikes[i] < PL_MAX_STRIKES) {
            rc = add_suspect(c, ids[i], err);
            continue;
        }
        char msg[256];
        snprintf(msg, sizeof msg,
                 "its job died while it was being computed in %d sessions (a worker crash, for "
                 "instance on a corrupt entry, or a kill); not retried again (screen --rerun tries it in a "
                 "new run)",
                 strikes[i]);
        rc = cat_result_put_text(c->cat, c->run_id, ids[i], CAT_RES_FAILED, msg, NULL, 0, -1, 0.0, err);
    }
    if (rc == 0) rc = cat_flush(c->cat, err);
    if (c->suspects.n > 1) qsort(c->suspects.id, c->suspects.n, sizeof *c->suspects.id, by_string);
    for (int i = 0; i < n; i++)
        free(ids[i]);
    free(ids);
    free(strikes);
    cat_ids_clear(&done);
    return rc;
}

/* The card's comment, orbital labels (a JSON list, null for an orbital without one) and meta
 * object, as text owned by the caller (free); NULL where the card has none. */
static void card_extras(const char *card_json, char **comment, char **labels, char **meta)
{
    *comment = *labels = *meta = NULL;
    cJSON *j = card_json ? cJSON_Parse(card_json) : NULL;
    if (!j) return;
    const char *cm = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(j, "comment"));
    if (cm) *comment = strdup(cm);
    const cJSON *orb = cJSON_GetObjectItemCaseSensitive(j, "orbitals");
    int any = 0;
    cJSON *list = cJSON_CreateArray();
    for (const cJSON *o = cJSON_IsArray(orb) ? orb->child : NULL; o && list; o = o->next) {
        const char *l = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(o, "label"));
        cJSON_AddItemToArray(list, l ? cJSON_CreateString(l) : cJSON_CreateNull());
        any |= l != NULL;
    }
    if (any && list) *labels = cJSON_PrintUnformatted(list);
    cJSON_Delete(list);
    const cJSON *meta_obj = cJSON_GetObjectItemCaseSensitive(j, "meta");
    if (meta_obj) *meta = cJSON_PrintUnformatted(meta_obj);
    cJSON_Delete(j);
}

/* Records what the set says about entry i: sizes, its content hash (so result rows carry it) and,
 * when the row is missing or about another content, the provenance from the stored card. */
static int record_material(coord *c, int i, const char *set_content, bs_err *err)
{
    const ms_entry *e = ms_entry_at(c->set, i);
    char content[65];
    int stale = 1;
    int rc = ms_content(c->set, i, content, err);
    if (rc == 0 && c->had_materials) rc = cat_material_stale(c->cat, e->id, content, &stale, err);
    if (rc != 0) return rc;
    /* --rerun redoes everything, so its few extra reads refresh cards edited without a change of
     * content (a new comment or meta). */
    if (c->o->rerun) stale = 1;
    char *card = NULL, *comment = NULL, *labels = NULL, *meta = NULL;
    const char *formula = NULL, *source = NULL;
    cJSON *j = NULL;
    if (stale) {
        bs_err cerr;
        bs_err_clear(&cerr);
        /* A card that cannot be read costs its provenance, not the run. */
        if (ms_read_card(c->set, i, &card, &cerr) != 0) card = NULL;
        card_extras(card, &comment, &labels, &meta);
        j = card ? cJSON_Parse(card) : NULL;
        formula = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(j, "formula"));
        source = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(j, "source"));
    }
    cat_material mat = {.material_id = e->id,
                        .formula = formula,
                        .dimension = e->dim,
                        .norb = e->norb,
                        .nr = e->nR,
                        .nocc = e->nocc,
                        .spinful = e->spinful,
                        .set_path = c->o->set_path,
                        .source = source,
                        .card_json = card,
                        .content = content,
                        .set_content = set_content,
                        .comment = comment,
                        .orbital_labels = labels,
                        .meta = meta,
                        .provenance = stale};
    rc = cat_material_upsert(c->cat, &mat, err);
    cJSON_Delete(j);
    free(card);
    free(comment);
    free(labels);
    free(meta);
    return rc;
}

/* Rescreen without --mesh: each entry at twice the mesh of its best ok result of the current
 * content (never at a coarser or equal one); an entry without one at twice the default. */
static int double_best_meshes(coord *c, bs_err *err)
{
    for (int i = 0; i < c->nitems; i++) {
        const ms_entry *e = ms_entry_at(c->set, c->items[i].index);
        int best = 0;
        int rc = cat_best_mesh(c->cat, e->id, &best, err);
        if (rc != 0) return rc;
        int base = best > 0 ? best : pl_entry_mesh(e->dim, 0, 1);
        c->items[i].mesh = 2 * base;
        /* Costs grow as mesh^dim: keep the list in its cost order with the real meshes. */
        c->items[i].cost *= pow(2.0 * base / pl_entry_mesh(e->dim, 0, 2), e->dim > 0 ? e->dim : 3);
    }
    return 0;
}

/* A --mesh above what the diagnosis accepts for a dimension present in the set is a usage error
 * of the whole job, refused before the catalogue is touched: otherwise every entry of that
 * dimension would become a permanent invalid row. */
static int check_mesh(coord *c, bs_err *err)
{
    if (c->o->mesh <= 0) return 0;
    for (int i = 0; i < ms_count(c->set); i++) {
        const ms_entry *e = ms_entry_at(c->set, i);
        int max = e->dim == 3 ? BS_MAX_MESH_3D : BS_MAX_MESH_2D;
        if ((e->dim == 2 || e->dim == 3) && c->o->mesh > max)
            return bs_fail(err, BS_EUSAGE,
                           "--mesh %d is above %d, the largest mesh for %dD materials such as %s "
                           "(screen 2D and 3D materials separately, or use a smaller mesh)",
                           c->o->mesh, max, e->dim, e->id);
    }
    return 0;
}

static int by_item_cost(const void *a, const void *b)
{
    const pl_item *x = a, *y = b;
    if (x->cost != y->cost) return x->cost < y->cost ? 1 : -1;
    return x->index - y->index;
}

/* The selected ids the set does not hold: counted and the first few named for the announcement. */
static void note_missing(coord *c, const cat_ids *sel)
{
    for (size_t i = 0; i < sel->n; i++) {
        if (ms_find(c->set, sel->id[i]) >= 0) continue;
        if (c->counts.missing++ < 5) {
            size_t used = strlen(c->counts.missing_ids);
            snprintf(c->counts.missing_ids + used, sizeof c->counts.missing_ids - used, "%s%s",
                     used ? ", " : "", sel->id[i]);
        }
    }
}

static void note_resumed(coord *c, int rerun_asked, bs_err *err)
{
    cat_run_state rs;
    if (cat_run_get(c->cat, c->run_id, &rs, err) != 0) {
        bs_err_clear(err);
        return;
    }
    int n = snprintf(c->counts.note, sizeof c->counts.note,
                     "resuming run %lld (started %s%s, session %d, %lld "
                     "results so far, set first read from %s)",
                     (long long)c->run_id, rs.started, rs.rerun ? " by --rerun" : "", rs.sessions,
                     rs.nresults, rs.set_path);
    if (rerun_asked && n > 0 && (size_t)n < sizeof c->counts.note)
        snprintf(c->counts.note + n, sizeof c->counts.note - (size_t)n,
                 "; --rerun resumes the unfinished run it started instead of starting over, and starts a "
                 "new run once that one has finished");
}

static int refuse_over_budget(coord *c, bs_err *err);

/* Moves the suspects of the work list (c->suspects) to their own queue, c->susp, in the list's
 * order; taken in the list, so its cursors pass them. */
static int mark_suspects(coord *c, bs_err *err)
{
    if (c->suspects.n == 0) return 0;
    c->susp = malloc(((size_t)c->suspects.n + 1) * sizeof *c->susp);
    if (!c->susp) return bs_fail(err, BS_ENOMEM, "out of memory for the journal's lost materials");
    for (int i = 0; i < c->nitems && c->nsusp < (int)c->suspects.n; i++) {
        if (c->taken[i] || !cat_ids_contains(&c->suspects, ms_entry_at(c->set, c->items[i].index)->id))
            continue;
        c->taken[i] = 1;
        c->susp[c->nsusp++] = i;
    }
    c->susp_left = c->nsusp;
    return 0;
}

/* Opens set and catalogue, starts or resumes the run, builds the ordered work list. */
static int coord_setup(coord *c, int ranks, const char *hosts, bs_err *err)
{
    const pl_opts *o = c->o;
    int rc = take_lock(c, err);
    if (rc == 0) rc = ms_open(o->set_path, &c->set, err);
    if (rc == 0) rc = check_mesh(c, err);
    if (rc == 0) rc = cat_open(o->catalogue_path, CAT_RW, &c->cat, err);
    if (rc != 0) return rc;
    char *settings = settings_json(o, c->set), set_content[65];
    if (!settings) return bs_fail(err, BS_ENOMEM, "out of memory");
    rc = ms_set_content(c->set, set_content, err);
    if (rc != 0) {
        free(settings);
        return rc;
    }
    cat_run_info info = {.kind = o->kind,
                         .settings_json = settings,
                         .version = o->version,
                         .ranks = ranks,
                         .hosts = hosts,
                         .cmdline = o->cmdline,
                         .set_path = o->set_path,
                         .set_content = set_content,
                         .rerun = o->rerun};
    cat_ids sel, done;
    cat_ids_init(&sel);
    cat_ids_init(&done);
    int resumed = 0;
    /* The selection reads summary before this set's contents are recorded: it sees what the
     * user saw when writing the condition. A runaway condition (a recursive CTE) must not hold the
     * catalogue past a signal. */
    if (o->where_sql) {
        cat_set_limits(c->cat, o->stop_flag, o->where_seconds);
        rc = cat_select_ids(c->cat, o->where_sql, &sel, err);
        cat_set_limits(c->cat, NULL, 0);
    }
    if (rc == 0 && o->where_sql) note_missing(c, &sel);
    /* The material rows go in one transaction (a commit per batch of 64 would cost a sync each,
     * seconds for 10^5 entries); the result batching is restored after. */
    if (rc == 0) rc = cat_set_batch(c->cat, 1 << 30, 1e9, err);
    /* In a new catalogue every entry is stale: no look-up per entry (the set has no id twice). */
    if (rc == 0) rc = cat_has_materials(c->cat, &c->had_materials, err);
    for (int i = 0; rc == 0 && i < ms_count(c->set); i++)
        if (!o->where_sql || cat_ids_contains(&sel, ms_entry_at(c->set, i)->id))
            rc = record_material(c, i, set_content, err);
    if (rc == 0) rc = cat_flush(c->cat, err);
    if (rc == 0)
        rc = cat_set_batch(c->cat, o->batch_rows > 0 ? o->batch_rows : CAT_BATCH_ROWS,
                           o->batch_seconds > 0 ? o->batch_seconds : CAT_BATCH_SECONDS, err);
    if (rc == 0) {
        if (o->rerun)
            rc = cat_run_rerun(c->cat, &info, &c->run_id, &resumed, err);
        else
            rc = cat_run_resume(c->cat, &info, &c->run_id, &resumed, err);
    }
    char jpath[4096];
    snprintf(jpath, sizeof jpath, "%s.journal", o->catalogue_path);
    if (rc == 0 && resumed) note_resumed(c, o->rerun, err);
    if (rc == 0 && resumed) rc = give_up_lost(c, jpath, err);
    if (rc == 0 && resumed) rc = cat_done_ids(c->cat, c->run_id, &done, err);
    /* A new run skips every entry whose current content already has a row from a run with the
     * same settings (any set path, any run status); --rerun does them all. */
    if (rc == 0 && !resumed && !o->rerun) rc = cat_finished_ids(c->cat, &info, &done, err);
    if (rc == 0) rc = pl_journal_open(jpath, c->run_id, &c->journal, err);
    int nmissing = 0;
    if (rc == 0)
        rc = pl_work_list(c->set, o->where_sql ? &sel : NULL, &done, o->mesh, o->mesh_factor, &c->items,
                          &c->nitems, &nmissing, err);
    if (rc == 0 && !strcmp(o->kind, "rescreen") && o->mesh == 0) {
        rc = double_best_meshes(c, err);
        if (rc == 0) qsort(c->items, (size_t)c->nitems, sizeof *c->items, by_item_cost);
    }
    c->counts.run_id = c->run_id;
    /* A new run with nothing to do (a repeated screen of a finished set) leaves no trace. */
    if (rc == 0 && !resumed && c->nitems == 0 && !o->paths) { /* with --paths: pl_paths_coordinate */
        rc = cat_run_discard(c->cat, c->run_id, err);
        if (rc == 0) c->discarded = 1;
    }
    c->counts.run_id = c->discarded ? 0 : c->run_id;
    c->counts.resumed = resumed;
    c->counts.skipped = (int)done.n;
    c->counts.total = c->nitems;
    c->taken = calloc((size_t)c->nitems + 1, 1);
    if (rc == 0 && !c->taken) rc = bs_fail(err, BS_ENOMEM, "out of memory for the work list");
    if (rc == 0) rc = cat_flush(c->cat, err);
    if (rc == 0) rc = refuse_over_budget(c, err);
    if (rc == 0) rc = mark_suspects(c, err);
    cat_ids_clear(&sel);
    cat_ids_clear(&done);
    free(settings);
    return rc;
}

/* Whether a catalogue error is a fault of its storage (the SQLite file or an artifact file could
 * not be written) rather than of the result: such a result is left to a resumed run. */
static int is_storage_fault(int code)
{
    return code == BS_ESQL || code == BS_EHDF5 || code == BS_EIO || code == BS_ENOMEM;
}

static int item_large(const coord *c, int i);

/* Entries whose estimated memory exceeds the budget are recorded `invalid` with the estimate
 * and the budget before any work starts, instead of running a rank out of memory (which would kill
 * the whole job). A rank group gets group_size times the budget for the entries it takes. */
static int refuse_over_budget(coord *c, bs_err *err)
{
    const pl_opts *o = c->o;
    int rc = 0;
    for (int i = 0; rc == 0 && c->memory_budget > 0 && i < c->nitems; i++) {
        const ms_entry *e = ms_entry_at(c->set, c->items[i].index);
        if (e->status != MS_STATUS_OK || (e->dim != 2 && e->dim != 3)) continue;
        int mesh =
            o->mesh > 0 ? o->mesh : (o->mesh_factor > 1 ? o->mesh_factor : 1) * diag_default_mesh(e->dim);
        double need = diag_memory_bytes(e->dim, e->norb, e->nR, e->nocc, mesh);
        double budget = c->memory_budget * (c->leader >= 0 && item_large(c, i) ? o->group_size : 1);
        if (!(need > budget)) continue;
        char msg[400];
        snprintf(msg, sizeof msg,
                 "needs an estimated %.1f MB (%d states, %d lattice vectors, mesh %d), above the "
                 "per-material memory budget of %.1f MB; screen it with a larger --material-memory (fewer "
                 "ranks per "
                 "node) or in a rank group (--group-size)",
                 need / 1e6, e->norb, e->nR, mesh, budget / 1e6);
        rc = cat_result_put_text(c->cat, c->run_id, e->id, CAT_RES_INVALID, msg, NULL, 0, 0, 0.0, err);
        c->taken[i] = 1;
        c->counts.done++;
        c->counts.invalid++;
    }
    if (rc == 0) rc = cat_flush(c->cat, err);
    return rc;
}

/* Records one outcome (its journal line is the caller's); a timeout caused by the job's own
 * budget is not recorded, so that a resumed run does that material again. */
static int coord_record(coord *c, const pl_outcome *out, int job_limited, bs_err *err)
{
    if (out->code == BS_ETIMEOUT && job_limited) {
        c->counts.interrupted = 1;
        return 0;
    }
    cat_status st = cat_status_from_code(out->code);
    /* Read once here into the struct: the catalogue, the class counts and the formula all use it. */
    res_diag r;
    res_init(&r);
    int has = out->json != NULL;
    int rc = has ? res_from_text(out->json, strlen(out->json), &r, err) : 0;
    /* The content hash the set-up recorded for this entry (record_material), kept by the set:
     * the row's content without a look-up in the catalogue. */
    char content[65];
    int at = ms_find(c->set, out->id);
    bs_err cerr;
    bs_err_clear(&cerr);
    int known = at >= 0 && ms_content(c->set, at, content, &cerr) == 0;
    if (rc != 0)
        bs_err_context(err, "from rank %d: ", out->rank);
    else
        rc = cat_result_put_stored(c->cat, c->run_id, out->id, st, out->code ? out->message : NULL,
                                   has ? &r : NULL, has ? (out->stored ? out->stored : out->json) : NULL,
                                   known ? content : NULL, out->rank, out->seconds, err);
    if (rc != 0 && is_storage_fault(rc)) {
        /* The result is fine but cannot be stored (disk full, unwritable artifact file): it is
         * not recorded at all, so a resumed run computes it again, and the job stops. */
        res_clear(&r);
        bs_err_context(err, "material %s was computed but not stored (a resumed run redoes it): ", out->id);
        return rc;
    }
    if (rc != 0) {
        /* A result the catalogue refuses (malformed JSON from a bug) must not stop the job:
         * it becomes a failed row naming the problem. */
        char msg[700];
        snprintf(msg, sizeof msg, "catalogue refused the result: %s", err->msg);
        bs_err_clear(err);
        has = 0;
        rc = cat_result_put(c->cat, c->run_id, out->id, CAT_RES_FAILED, msg, NULL, out->rank, out->seconds,
                            err);
        st = CAT_RES_FAILED;
    }
    if (rc == 0) {
        c->counts.done++;
        if (st == CAT_RES_OK)
            c->counts.ok++;
        else if (st == CAT_RES_INVALID)
            c->counts.invalid++;
        else if (st == CAT_RES_TIMEOUT)
            c->counts.timeout++;
        else
            c->counts.failed++;
    }
    if (rc == 0 && st == CAT_RES_OK && has) {
        c->counts.by_class[r.cls]++;
        /* The set's index has no formula; the worker read it from the material itself. */
        if (r.formula[0]) {
            cat_material mat = {.material_id = out->id, .formula = r.formula, .spinful = -1};
            rc = cat_material_upsert(c->cat, &mat, err);
        }
    }
    res_clear(&r);
    return rc;
}

/* Whether item i is for the group: at least group_min_states states. */
static int item_large(const coord *c, int i)
{
    int min = c->o->group_min_states > 0 ? c->o->group_min_states : PZ_DEFAULT_THRESHOLD;
    return ms_entry_at(c->set, c->items[i].index)->norb >= min;
}

/* The next suspect for a requester that holds nothing, in the rules of pick_item; -1 when none
 * is left for it. */
static int pick_suspect(coord *c, int from_leader)
{
    for (int k = 0; c->susp_left > 0 && k < c->nsusp; k++) {
        int i = c->susp[k];
        if (i < 0 || (c->leader >= 0 && item_large(c, i) && !from_leader)) continue;
        c->susp[k] = -1;
        c->susp_left--;
        return i;
    }
    return -1;
}

/* The next item for a requester: the group leader takes the largest remaining large item, else a
 * small one that it computes alone; single workers take small items only while a group exists
 * (large ones wait for it); without a group, items go in order. -1 when none is left. */
static int pick_item(coord *c, int from_leader)
{
    int has_group = c->leader >= 0;
    if (!has_group) {
        while (c->next < c->nitems && c->taken[c->next])
            c->next++;
        return c->next < c->nitems ? c->next : -1;
    }
    if (from_leader) {
        while (c->next_large < c->nitems && (c->taken[c->next_large] || !item_large(c, c->next_large)))
            c->next_large++;
        if (c->next_large < c->nitems) return c->next_large;
    }
    while (c->next_small < c->nitems && (c->taken[c->next_small] || item_large(c, c->next_small)))
        c->next_small++;
    return c->next_small < c->nitems ? c->next_small : -1;
}

/* The next material and its budget for rank `from`, or 0 when it should get nothing more. */
static int coord_next(coord *c, int from, wire_work *w)
{
    const pl_opts *o = c->o;
    if (o->stop_flag && *o->stop_flag) {
        c->counts.interrupted = 1;
        return 0;
    }
    double left = o->max_seconds > 0 ? o->max_seconds - (bs_now() - c->t0) : 0;
    if (o->max_seconds > 0 && left <= 0.5) {
        c->counts.interrupted = 1;
        return 0;
    }
    int from_leader = c->leader >= 0 && from == c->leader;
    int alone = !c->held || c->held[from] == 0;
    int i = alone ? pick_suspect(c, from_leader) : -1;
    if (i >= 0 && c->holds_suspect) c->holds_suspect[from] = 1;
    if (i < 0) i = pick_item(c, from_leader);
    if (i < 0) return 0;
    c->taken[i] = 1;
    w->index = c->items[i].index;
    w->mesh = c->items[i].mesh;
    w->group = from_leader && item_large(c, i);
    bs_err jerr;
    bs_err_clear(&jerr);
    /* A journal that cannot be written loses only the crash bookkeeping, not results. The line
     * waits in memory; the caller syncs before it sends the work. */
    if (c->journal) pl_journal_handed(c->journal, ms_entry_at(c->set, w->index)->id, &jerr);
    w->after = 0;
    w->max_seconds = o->material_seconds;
    w->job_limited = 0;
    if (o->max_seconds > 0 && (w->max_seconds <= 0 || left < w->max_seconds)) {
        w->max_seconds = left;
        w->job_limited = 1;
    }
    return 1;
}

static void coord_tick(coord *c, int final)
{
    c->counts.elapsed = bs_now() - c->t0;
    if (c->o->progress) c->o->progress(c->o->progress_ctx, &c->counts, final);
    c->last_tick = bs_now();
}

/* The journal's waiting lines to the kernel; a failure costs only the crash bookkeeping. */
static void journal_sync(coord *c)
{
    bs_err jerr;
    bs_err_clear(&jerr);
    if (c->journal) pl_journal_sync(c->journal, &jerr);
}

static void journal_received(coord *c, const char *id)
{
    bs_err jerr;
    bs_err_clear(&jerr);
    if (c->journal) pl_journal_received(c->journal, id, &jerr);
}

/* One process does everything (P = 1). */
static int run_serial(coord *c, bs_err *err)
{
    wire_work w;
    int rc = 0;
    while (rc == 0 && coord_next(c, 0, &w)) {
        pl_outcome out;
        pl_task task = c->task;
        if (w.mesh > 0) task.mesh = w.mesh;
        journal_sync(c);
        pl_compute(c->set, w.index, &task, w.max_seconds, 0, &out);
        journal_received(c, out.id);
        rc = coord_record(c, &out, w.job_limited, err);
        pl_outcome_clear(&out);
        if (rc == 0) rc = cat_flush_if_due(c->cat, err);
        coord_tick(c, 0);
    }
    return rc;
}

/* One message of a worker, as received. */
typedef struct msg_in {
    pl_outcome out;
    int kind; /* 0 the first request, 1 a result */
    int job_limited;
    int seq;
    int from; /* world rank */
} msg_in;

static int recv_outcome(MPI_Comm comm, const MPI_Status *st, msg_in *m, bs_err *err)
{
    memset(m, 0, sizeof *m);
    m->from = st->MPI_SOURCE;
    int nbytes = 0;
    int rc = mpi_check(MPI_Get_count(st, MPI_BYTE, &nbytes), "MPI_Get_count", err);
    if (rc != 0) return rc;
    char *buf = malloc((size_t)nbytes + 1);
    if (!buf) return bs_fail(err, BS_ENOMEM, "out of memory for a result of %d bytes", nbytes);
    rc = mpi_check(MPI_Recv(buf, nbytes, MPI_BYTE, st->MPI_SOURCE, TAG_RESULT, comm, MPI_STATUS_IGNORE),
                   "MPI_Recv of a result", err);
    if (rc == 0 && (size_t)nbytes < sizeof(wire_head))
        rc = bs_fail(err, BS_EMPI, "short result message (%d bytes)", nbytes);
    pl_outcome *out = &m->out;
    if (rc == 0) {
        wire_head h;
        memcpy(&h, buf, sizeof h);
        m->kind = h.kind;
        m->job_limited = h.job_limited;
        m->seq = h.seq;
        out->code = h.code;
        out->rank = h.rank;
        out->seconds = h.seconds;
        memcpy(out->id, h.id, sizeof out->id);
        out->id[sizeof out->id - 1] = '\0';
        memcpy(out->message, h.message, sizeof out->message);
        out->message[sizeof out->message - 1] = '\0';
        size_t rest = (size_t)nbytes - sizeof h;
        size_t slen = h.stored_len > 0 ? (size_t)h.stored_len : 0;
        if (slen > rest)
            rc = bs_fail(err, BS_EMPI, "result message of %d bytes shorter than its parts", nbytes);
        size_t jlen = rc == 0 ? rest - slen : 0;
        if (rc == 0 && h.code == 0 && slen > 0) {
            out->stored = malloc(slen + 1);
            if (!out->stored) rc = bs_fail(err, BS_ENOMEM, "out of memory for a result of %d bytes", nbytes);
            if (rc == 0) {
                memcpy(out->stored, buf + sizeof h + jlen, slen);
                out->stored[slen] = '\0';
            }
        }
        if (rc == 0 && h.code == 0 && jlen > 0) {
            /* The text is moved, not copied: it starts the buffer, NUL-terminated. */
            memmove(buf, buf + sizeof h, jlen);
            buf[jlen] = '\0';
            out->json = buf;
            buf = NULL;
        }
    }
    free(buf);
    return rc;
}

/* A reply of a round: work (stop = 0) or stop for world rank `to`. */
typedef struct reply {
    int to;
    int stop;
    wire_work w;
} reply;

/* The replies to message m: work until its sender holds as many materials as it may, or stop when
 * it holds none and none is left for it. Short materials raise the sender's depth. */
static int plan_replies(coord *c, const msg_in *m, int rc, reply *out, int *nout, int *active)
{
    int r = m->from;
    int was_hungry = c->held[r] <= c->depth[r] / 2;
    if (m->kind == 1) {
        if (c->held[r] > 0) c->held[r]--;
        c->holds_suspect[r] = 0; /* it held the suspect alone: this was its outcome */
        double t = m->out.seconds;
        c->last_seconds[r] = t > 0 ? t : 0;
        int extra = t >= PL_PREFETCH_SECONDS ? 0
                    : t >= PL_PREFETCH_COVER ? 1
                                             : (int)ceil(PL_PREFETCH_COVER / (t > 1e-6 ? t : 1e-6));
        c->depth[r] = 1 + (extra < PL_PREFETCH_MAX ? extra : PL_PREFETCH_MAX);
    }
    /* While suspects wait, workers hold one material at a time, so that they soon hold none. */
    int want = c->susp_left > 0 || c->holds_suspect[r] ? 1 : c->depth[r];
    /* Refilled only once it holds half its depth or less, so that the materials of a deep queue
     * go out several to a round rather than one per result. */
    int refill = c->held[r] <= want / 2;
    /* After a catalogue error nothing more is handed out: results could not be kept. */
    while (rc == 0 && refill && c->held[r] < want) {
        reply *p = &out[*nout];
        if (!coord_next(c, r, &p->w)) break;
        p->to = r;
        p->stop = 0;
        p->w.after = m->seq;
        c->held[r]++;
        (*nout)++;
    }
    int stop = c->held[r] == 0;
    if (stop) {
        out[*nout].to = r;
        out[*nout].stop = 1;
        (*nout)++;
        (*active)--;
        c->depth[r] = 0; /* gone: never hungry again */
    }
    c->hungry += (c->depth[r] > 0 && c->held[r] <= c->depth[r] / 2) - was_hungry;
    return stop;
}

static int send_replies(coord *c, const reply *rs, int n, bs_err *err)
{
    int rc = 0;
    for (int i = 0; rc == 0 && i < n; i++) {
        if (rs[i].stop)
            rc = mpi_check(MPI_Send(NULL, 0, MPI_BYTE, rs[i].to, TAG_STOP, c->comm), "MPI_Send of stop", err);
        else
            rc = mpi_check(MPI_Send(&rs[i].w, (int)sizeof rs[i].w, MPI_BYTE, rs[i].to, TAG_WORK, c->comm),
                           "MPI_Send of work", err);
    }
    return rc;
}

/* The sleep while no worker is hungry (each holds more than half its depth): a quarter of the
 * shortest queue of work beyond the material in hand (a quarter: on a loaded machine the
 * coordinator may wake late), as estimated from each worker's last material, but at least
 * PL_NAP_MAX_US (a worker of materials of 0.25 s or more holds one and waits for the reply that
 * long, 0.2% of its time) and at most PL_NAP_LONG_US. */
static long coord_nap_us(const coord *c, int size)
{
    double least = PL_NAP_LONG_US * 1e-6;
    for (int r = 1; r < size; r++) {
        if (c->depth[r] <= 0 || c->held[r] <= 0) continue; /* gone, or a group member */
        double queued = (c->held[r] - 1) * c->last_seconds[r] * 0.25;
        if (queued < least) least = queued;
    }
    long us = (long)(least * 1e6);
    return us < PL_NAP_MAX_US ? PL_NAP_MAX_US : us;
}

/* Coordinator loop with worker ranks 1..size-1, in rounds (see the top of this file): receive what
 * is waiting, plan the replies, write the journal (the outcomes received and the hand-outs, before
 * the work leaves), send, then record the outcomes while the workers compute. */
static int run_coordinator(coord *c, int size, bs_err *err)
{
    int active = c->nworkers, rc = 0;
    c->held = calloc((size_t)size, sizeof *c->held);
    c->depth = malloc((size_t)size * sizeof *c->depth);
    c->last_seconds = calloc((size_t)size, sizeof *c->last_seconds);
    c->holds_suspect = calloc((size_t)size, 1);
    msg_in *msgs = calloc(PL_ROUND, sizeof *msgs);
    reply *replies = malloc(PL_ROUND * (size_t)(2 + PL_PREFETCH_MAX) * sizeof *replies);
    if (!c->held || !c->depth || !c->last_seconds || !c->holds_suspect || !msgs || !replies) {
        free(msgs);
        free(replies);
        return bs_fail(err, BS_ENOMEM, "out of memory for the coordinator");
    }
    for (int r = 0; r < size; r++)
        c->depth[r] = 1;
    c->hungry = c->nworkers;
    long nap_us = PL_NAP_MIN_US;
    int mrc = 0;
    while (mrc == 0 && active > 0) {
        int n = 0;
        while (mrc == 0 && n < PL_ROUND) {
            int flag = 0;
            MPI_Status st;
            mrc = mpi_check(MPI_Iprobe(MPI_ANY_SOURCE, TAG_RESULT, c->comm, &flag, &st), "MPI_Iprobe", err);
            if (mrc != 0 || !flag) break;
            mrc = recv_outcome(c->comm, &st, &msgs[n], err);
            if (mrc == 0) n++;
        }
        if (mrc != 0) break;
        if (n == 0) {
            /* While every worker holds all it may, the next result is no hurry: each has more
             * material queued than the sleep (coord_nap_us). */
            long us = c->hungry == 0 ? coord_nap_us(c, size) : nap_us;
            const struct timespec nap = {us / 1000000, (us % 1000000) * 1000};
            nanosleep(&nap, NULL);
            if (nap_us < PL_NAP_MAX_US) nap_us = nap_us * 2 < PL_NAP_MAX_US ? nap_us * 2 : PL_NAP_MAX_US;
            if (rc == 0) rc = cat_flush_if_due(c->cat, err);
            if (bs_now() - c->last_tick > 1.0) coord_tick(c, 0);
            continue;
        }
        nap_us = PL_NAP_MIN_US;
        int nreply = 0;
        for (int i = 0; i < n; i++) {
            /* After a storage fault results are dropped, not lost: their line keeps them from
             * counting against the material. */
            if (msgs[i].kind == 1) journal_received(c, msgs[i].out.id);
            plan_replies(c, &msgs[i], rc, replies, &nreply, &active);
        }
        journal_sync(c);
        mrc = send_replies(c, replies, nreply, err);
        for (int i = 0; i < n; i++) {
            if (msgs[i].kind == 1 && rc == 0) rc = coord_record(c, &msgs[i].out, msgs[i].job_limited, err);
            pl_outcome_clear(&msgs[i].out);
        }
        if (rc == 0) rc = cat_flush_if_due(c->cat, err);
        coord_tick(c, 0);
        if (mrc == 0 && n < PL_ROUND && c->hungry == 0 && active > 0) {
            /* Every worker has work queued: sleep before the next poll, so that the next round
             * takes the results of that time together (one journal write, one poll) rather
             * than one result each as they trickle in. */
            long us = coord_nap_us(c, size);
            const struct timespec nap = {us / 1000000, (us % 1000000) * 1000};
            nanosleep(&nap, NULL);
        }
    }
    for (int i = 0; i < PL_ROUND; i++)
        pl_outcome_clear(&msgs[i].out);
    free(msgs);
    free(replies);
    return mrc != 0 ? mrc : rc;
}

/* A worker's result messages still on their way: sent with MPI_Isend, so that a worker whose
 * coordinator is between polls goes on computing its queued materials instead of waiting in
 * MPI_Send (which, with ranks outnumbering cores, yields the core until the coordinator drains its
 * queue). Each buffer is kept until its send completes. */
enum { PL_SENDS = PL_PREFETCH_MAX + 2 };
typedef struct send_queue {
    MPI_Request req[PL_SENDS];
    char *buf[PL_SENDS];
} send_queue;

/* Frees the buffers of completed sends; with wait, waits (polling and napping) until every send
 * has completed or, with wait = 2, until at least one slot is free. */
static int sends_settle(send_queue *q, int wait, bs_err *err)
{
    const struct timespec nap = {0, 50 * 1000};
    for (;;) {
        int pending = 0, free_slot = 0, rc = 0;
        for (int i = 0; i < PL_SENDS && rc == 0; i++) {
            if (!q->buf[i]) {
                free_slot = 1;
                continue;
            }
            int done = 0;
            rc = mpi_check(MPI_Test(&q->req[i], &done, MPI_STATUS_IGNORE), "MPI_Test of a result send", err);
            if (rc == 0 && done) {
                free(q->buf[i]);
                q->buf[i] = NULL;
                free_slot = 1;
            } else {
                pending++;
            }
        }
        if (rc != 0) return rc;
        if (wait == 0 || (wait == 1 && pending == 0) || (wait == 2 && free_slot)) return 0;
        nanosleep(&nap, NULL);
    }
}

static int send_outcome_q(MPI_Comm comm, int kind, int seq, const pl_outcome *out, int job_limited,
                          send_queue *q, bs_err *err)
{
    wire_head h;
    memset(&h, 0, sizeof h);
    h.kind = kind;
    h.seq = seq;
    h.code = out ? out->code : 0;
    h.rank = out ? out->rank : 0;
    h.job_limited = job_limited;
    h.seconds = out ? out->seconds : 0;
    if (out) {
        memcpy(h.id, out->id, sizeof h.id);
        memcpy(h.message, out->message, sizeof h.message);
    }
    size_t jlen = out && out->json ? strlen(out->json) : 0;
    size_t slen = jlen && out->stored ? strlen(out->stored) : 0;
    if (sizeof h + jlen + slen > (size_t)2147483647)
        return bs_fail(err, BS_EMPI, "result of %zu bytes too large for one message", jlen + slen);
    h.stored_len = (int)slen;
    char *buf = malloc(sizeof h + jlen + slen);
    if (!buf) return bs_fail(err, BS_ENOMEM, "out of memory");
    memcpy(buf, &h, sizeof h);
    if (jlen) memcpy(buf + sizeof h, out->json, jlen);
    if (slen) memcpy(buf + sizeof h + jlen, out->stored, slen);
    int slot = -1;
    int rc = q ? sends_settle(q, 2, err) : 0;
    for (int i = 0; q && rc == 0 && i < PL_SENDS && slot < 0; i++)
        if (!q->buf[i]) slot = i;
    if (rc != 0) {
        free(buf);
        return rc;
    }
    if (slot < 0) {
        rc = mpi_check(MPI_Send(buf, (int)(sizeof h + jlen + slen), MPI_BYTE, 0, TAG_RESULT, comm),
                       "MPI_Send of a result", err);
        free(buf);
        return rc;
    }
    rc =
        mpi_check(MPI_Isend(buf, (int)(sizeof h + jlen + slen), MPI_BYTE, 0, TAG_RESULT, comm, &q->req[slot]),
                  "MPI_Isend of a result", err);
    if (rc == 0)
        q->buf[slot] = buf;
    else
        free(buf);
    return rc;
}

static int send_outcome(MPI_Comm comm, int kind, int seq, const pl_outcome *out, int job_limited, bs_err *err)
{
    return send_outcome_q(comm, kind, seq, out, job_limited, NULL, err);
}

/* What a group leader tells its members: stop, or compute entry `index` together. */
typedef struct group_cmd {
    int cmd; /* 0 stop, 1 compute */
    int index;
    int mesh; /* the entry's k-mesh, 0: the job's */
} group_cmd;

/* Broadcast from the leader (group rank 0), waiting by polling and napping rather than spinning. */
static int group_bcast(MPI_Comm g, group_cmd *cmd, bs_err *err)
{
    MPI_Request req;
    int rc = mpi_check(MPI_Ibcast(cmd, (int)sizeof *cmd, MPI_BYTE, 0, g, &req), "MPI_Ibcast", err);
    const struct timespec nap = {0, 200 * 1000};
    int done = 0;
    while (rc == 0 && !done) {
        rc = mpi_check(MPI_Test(&req, &done, MPI_STATUS_IGNORE), "MPI_Test", err);
        if (rc == 0 && !done) nanosleep(&nap, NULL);
    }
    return rc;
}

/* Worker loop: request, compute, send, until told to stop. Workers open the set read-only.
 * A group leader (gcomm not MPI_COMM_NULL) also drives its members for group work. */
static int run_worker(const pl_opts *o, MPI_Comm comm, MPI_Comm gcomm, pl_group *group, int rank, bs_err *err)
{
    ms_set *set = NULL;
    int rc = ms_open(o->set_path, &set, err);
    /* Even without a readable set the worker takes part in the protocol: it reports each material
     * it is given as failed, so the coordinator never waits for it. */
    bs_err open_err = *err;
    bs_err_clear(err);
    /* When each message left, by seq: a material's budget counts from the message it answers. */
    double sent_at[PL_SENT_RING];
    int seq = 0;
    send_queue sq;
    memset(&sq, 0, sizeof sq);
    sent_at[0] = bs_now();
    rc = send_outcome(comm, 0, seq++, NULL, 0, err);
    while (rc == 0) {
        MPI_Status st;
        /* Poll and nap rather than MPI_Probe, which spins: with P = cores + 1 a spinning worker
         * would take the core the coordinator needs to answer it. */
        int flag = 0;
        const struct timespec nap = {0, 200 * 1000};
        while (rc == 0 && !flag) {
            rc = mpi_check(MPI_Iprobe(0, MPI_ANY_TAG, comm, &flag, &st), "MPI_Iprobe", err);
            if (rc == 0) rc = sends_settle(&sq, 0, err);
            if (rc == 0 && !flag) nanosleep(&nap, NULL);
        }
        if (rc != 0) break;
        if (st.MPI_TAG == TAG_STOP) {
            rc = mpi_check(MPI_Recv(NULL, 0, MPI_BYTE, 0, TAG_STOP, comm, MPI_STATUS_IGNORE),
                           "MPI_Recv of stop", err);
            break;
        }
        wire_work w;
        rc = mpi_check(MPI_Recv(&w, (int)sizeof w, MPI_BYTE, 0, TAG_WORK, comm, MPI_STATUS_IGNORE),
                       "MPI_Recv of work", err);
        if (rc != 0) break;
        /* What is left of the job's time was measured when the work was handed out; a prefetched
         * material waited in the queue since, at most since the message it answers left. */
        if (w.job_limited && w.after >= 0 && w.after < seq && seq - w.after <= PL_SENT_RING) {
            w.max_seconds -= bs_now() - sent_at[w.after % PL_SENT_RING];
            /* 0 would mean "no limit": a budget used up while waiting times out at once. */
            if (w.max_seconds < 1e-6) w.max_seconds = 1e-6;
        }
        pl_outcome out;
        pl_task task = task_of(o, NULL);
        if (w.mesh > 0) task.mesh = w.mesh;
        if (w.group && gcomm != MPI_COMM_NULL) {
            group_cmd cmd = {1, w.index, w.mesh};
            rc = group_bcast(gcomm, &cmd, err);
            if (rc != 0) break;
            task.dist = pl_group_solver(group);
        }
        if (set) {
            pl_compute(set, w.index, &task, w.max_seconds, rank, &out);
        } else {
            memset(&out, 0, sizeof out);
            out.code = BS_EIO;
            out.rank = rank;
            snprintf(out.id, sizeof out.id, "#%d", w.index);
            snprintf(out.message, sizeof out.message, "worker %d cannot read the set: %.400s", rank,
                     open_err.msg);
        }
        sent_at[seq % PL_SENT_RING] = bs_now();
        rc = send_outcome_q(comm, 1, seq++, &out, w.job_limited, &sq, err);
        pl_outcome_clear(&out);
    }
    /* The stop comes only after every result has arrived; after an error, whatever is still on its
     * way is finished before the buffers go. */
    bs_err serr;
    bs_err_clear(&serr);
    int src = sends_settle(&sq, 1, &serr);
    if (rc == 0 && src != 0) {
        *err = serr;
        rc = src;
    }
    if (gcomm != MPI_COMM_NULL) {
        group_cmd cmd = {0, 0, 0};
        bs_err gerr;
        bs_err_clear(&gerr);
        int grc = group_bcast(gcomm, &cmd, &gerr);
        if (rc == 0 && grc != 0) {
            *err = gerr;
            rc = grc;
        }
    }
    ms_free(set);
    return rc;
}

/* A group member other than the leader: compute in lockstep whatever the leader announces; the
 * leader alone reports the outcome. */
static int run_member(const pl_opts *o, MPI_Comm gcomm, pl_group *group, int rank, bs_err *err)
{
    ms_set *set = NULL;
    int rc = ms_open(o->set_path, &set, err);
    if (rc != 0) set = NULL;
    bs_err_clear(err);
    rc = 0;
    while (rc == 0) {
        group_cmd cmd;
        rc = group_bcast(gcomm, &cmd, err);
        if (rc != 0 || cmd.cmd == 0) break;
        pl_task task = task_of(o, pl_group_solver(group));
        if (cmd.mesh > 0) task.mesh = cmd.mesh;
        pl_outcome out;
        if (set) {
            pl_compute(set, cmd.index, &task, 0, rank, &out);
            pl_outcome_clear(&out);
        }
    }
    ms_free(set);
    return rc;
}

static void coord_clear(coord *c, bs_err *err)
{
    bs_err close_err;
    bs_err_clear(&close_err);
    if (cat_close(c->cat, &close_err) != 0 && err->code == 0) *err = close_err;
    ms_free(c->set);
    free(c->items);
    free(c->taken);
    free(c->held);
    free(c->depth);
    free(c->last_seconds);
    free(c->holds_suspect);
    free(c->susp);
    cat_ids_clear(&c->suspects);
    pl_journal_close(c->journal);
    release_lock(c);
}

/* The node's physical memory divided by the ranks on this node (0 when unknown: no limit). */
static double node_share(MPI_Comm comm)
{
    MPI_Comm node = MPI_COMM_NULL;
    int local = 1;
    if (MPI_Comm_split_type(comm, MPI_COMM_TYPE_SHARED, 0, MPI_INFO_NULL, &node) == MPI_SUCCESS) {
        MPI_Comm_size(node, &local);
        MPI_Comm_free(&node);
    }
    long pages = sysconf(_SC_PHYS_PAGES), page = sysconf(_SC_PAGE_SIZE);
    if (pages <= 0 || page <= 0) return 0;
    return (double)pages * (double)page / (local > 0 ? local : 1);
}

int pl_run(MPI_Comm user_comm, const pl_opts *o, pl_counts *counts, int *is_root, bs_err *err)
{
    memset(counts, 0, sizeof *counts);
    *is_root = 1;
    /* A communicator of our own, whose errors come back as codes (translated by mpi_check), not
     * as an abort; the caller's keeps its own handler. */
    MPI_Comm comm = MPI_COMM_NULL;
    int rc = mpi_check(MPI_Comm_dup(user_comm, &comm), "MPI_Comm_dup", err);
    if (rc != 0) return rc;
    MPI_Comm_set_errhandler(comm, MPI_ERRORS_RETURN);
    int rank = 0, size = 1;
    MPI_Comm_rank(comm, &rank);
    MPI_Comm_size(comm, &size);
    *is_root = rank == 0;
    char hosts[2048] = "";
    rc = gather_hosts(comm, rank, size, hosts, sizeof hosts, err);
    double share = node_share(comm); /* collective: every rank calls it */
    /* The rank group: the last group_size ranks, when at least one rank is left besides rank 0
     * (P = 1 + G also works: the group then takes small materials too, its leader alone). */
    int gsize = o->group_size >= 2 && size - 1 >= o->group_size ? o->group_size : 0;
    int leader = gsize ? size - gsize : -1;
    int in_group = gsize && rank >= leader;
    MPI_Comm gcomm = MPI_COMM_NULL;
    if (rc == 0 && gsize)
        rc = mpi_check(MPI_Comm_split(comm, in_group ? 1 : MPI_UNDEFINED, rank, &gcomm), "MPI_Comm_split",
                       err);
    if (rank != 0) {
        int setup_ok = 0;
        pl_group *group = NULL;
        if (rc == 0) rc = mpi_check(MPI_Bcast(&setup_ok, 1, MPI_INT, 0, comm), "MPI_Bcast", err);
        if (rc == 0 && in_group) rc = pl_group_create(gcomm, o->group_min_states, &group, err);
        if (rc == 0 && setup_ok) {
            if (in_group && rank != leader)
                rc = run_member(o, gcomm, group, rank, err);
            else
                rc = run_worker(o, comm, in_group ? gcomm : MPI_COMM_NULL, group, rank, err);
        }
        if (rc == 0 && setup_ok && o->paths && !(in_group && rank != leader))
            rc = pl_paths_work(comm, o, rank, err);
        pl_group_free(group);
        if (gcomm != MPI_COMM_NULL) MPI_Comm_free(&gcomm);
        MPI_Comm_free(&comm);
        return rc;
    }
    coord c;
    memset(&c, 0, sizeof c);
    c.o = o;
    c.comm = comm;
    c.lock_fd = -1;
    c.leader = leader;
    c.memory_budget = o->material_memory > 0 ? o->material_memory : share;
    c.nworkers = size - 1 - (gsize ? gsize - 1 : 0);
    c.t0 = bs_now();
    c.task = task_of(o, NULL);
    if (rc == 0) rc = coord_setup(&c, size, hosts, err);
    int setup_ok = rc == 0;
    if (size > 1) {
        int brc = mpi_check(MPI_Bcast(&setup_ok, 1, MPI_INT, 0, comm), "MPI_Bcast", err);
        if (rc == 0) rc = brc;
    }
    if (rc == 0 && o->announce) o->announce(o->progress_ctx, &c.counts, o->kind);
    if (rc == 0) rc = size > 1 ? run_coordinator(&c, size, err) : run_serial(&c, err);
    if (setup_ok && o->paths)
        rc = pl_paths_coordinate(comm, size > 1 ? c.nworkers : 0, o, c.cat, c.set, c.run_id, c.journal,
                                 &c.counts, &c.discarded, rc, err);
    if (setup_ok && !c.discarded) {
        bs_err end_err;
        bs_err_clear(&end_err);
        /* A storage fault (disk full, unwritable artifacts) leaves the run interrupted, so that
         * the same command resumes it once the fault is fixed; other job failures end it failed. */
        cat_run_status rs = rc != 0 ? (is_storage_fault(rc) ? CAT_RUN_INTERRUPTED : CAT_RUN_FAILED)
                            : c.counts.interrupted ? CAT_RUN_INTERRUPTED
                                                   : CAT_RUN_DONE;
        if (cat_run_end(c.cat, c.run_id, rs, &end_err) != 0 && rc == 0) {
            *err = end_err;
            rc = end_err.code;
        }
    }
    if (setup_ok) coord_tick(&c, 1);
    *counts = c.counts;
    coord_clear(&c, err);
    if (gcomm != MPI_COMM_NULL) MPI_Comm_free(&gcomm);
    MPI_Comm_free(&comm);
    return rc;
}

/* The member phase's message helpers, for the path phase (pathrun.h). */
int pl_wire_check(int code, const char *what, bs_err *err)
{
    return mpi_check(code, what, err);
}
int pl_wire_probe(MPI_Comm comm, int *flag, MPI_Status *st, bs_err *err)
{
    return mpi_check(MPI_Iprobe(MPI_ANY_SOURCE, TAG_RESULT, comm, flag, st), "MPI_Iprobe", err);
}
int pl_wire_recv(MPI_Comm comm, MPI_Status *st, pl_outcome *out, int *kind, bs_err *err)
{
    msg_in m;
    int rc = recv_outcome(comm, st, &m, err);
    *out = m.out; /* the texts move to the caller */
    *kind = m.kind;
    return rc;
}
int pl_wire_send(MPI_Comm comm, int kind, const pl_outcome *out, bs_err *err)
{
    return send_outcome(comm, kind, 0, out, 0, err);
}
