/* `bandsieve pack`: reads material cards and writes them into a material set, or adds them to an
 * existing one (the set is rewritten through SET.h5.partial and renamed, so a failed pack leaves
 * the old set as it was). */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <cjson/cJSON.h>

#include "bandsieve/card.h"
#include "bandsieve/content.h"
#include "bandsieve/matset.h"
#include "cardlist.h"
#include "cliutil.h"
#include "commands.h"

static void pack_help(FILE *out)
{
    fprintf(out, "usage: bandsieve pack -o SET.h5 [options] (CARD.json | FOLDER | --list FILE) ...\n\n"
                 "Reads each material card and its hopping table, validates it (hermiticity, counts,\n"
                 "ranges) and stores it in the material set SET.h5 (HDF5; layout in db/material-set.md),\n"
                 "with the card itself and the entry's content hash (what determines its answer).\n"
                 "A FOLDER gives every *.json in it; --list FILE names cards one per line (relative to\n"
                 "the list's folder; blank lines and # comments skipped).\n\n"
                 "When SET.h5 exists the cards are added to it: new ids are appended, an id whose\n"
                 "content is unchanged is kept (its card text refreshed), and an id whose content\n"
                 "differs is replaced only with --force (otherwise reported, and nothing is written).\n"
                 "The same id given twice with the same content is stored once; with different\n"
                 "contents it is an error; two ids with the same content are reported.\n"
                 "A card that fails is reported on stderr with its message; then nothing is written and\n"
                 "the exit status is 1, unless --keep-broken stores it as a broken entry (the model as\n"
                 "given when the card itself could be read, else only the error), which `screen` reports\n"
                 "as invalid.\n\n"
                 "  -o, --output SET.h5   the set to write or add to (replaced only when packing succeeds)\n"
                 "  --list FILE           read card paths from FILE (repeatable)\n"
                 "  --force               replace entries whose content changed\n"
                 "  --keep-broken         store failing cards as broken entries instead of failing\n"
                 "  --description TEXT    free-text description stored in the set (default: the old one)\n"
                 "  --invented            mark the set's data as invented (demonstration data)\n"
                 "  -h, --help            this text\n\n"
                 "Exit status: 0 written, 1 a card failed or a changed entry needs --force (nothing\n"
                 "written), 2 usage.\n");
}

/* The card's file name without folder and ".json", with characters a material id cannot hold
 * replaced by '_': the id of an error entry, whose card gave no usable id. */
static void stem_id(const char *path, char *id, size_t cap)
{
    const char *base = strrchr(path, '/');
    base = base ? base + 1 : path;
    size_t n = strlen(base);
    if (n > 5 && strcmp(base + n - 5, ".json") == 0) n -= 5;
    if (n >= cap) n = cap - 1;
    for (size_t i = 0; i < n; i++) {
        char c = base[i];
        int ok = (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_' ||
                 c == '.' || c == '+' || c == '-';
        id[i] = ok ? c : '_';
    }
    id[n] = '\0';
    if (n == 0 || id[0] == '.') id[0] = '_';
    if (n == 0) id[1] = '\0';
}

/* The "id" of a card, read without its table (for deciding which old entries are replaced);
 * "" when the card cannot be parsed (it then fails properly later). */
static void peek_id(const char *path, char *id, size_t cap)
{
    id[0] = '\0';
    FILE *fp = fopen(path, "rb");
    if (!fp) return;
    char *text = NULL;
    long size = fseek(fp, 0, SEEK_END) == 0 ? ftell(fp) : -1;
    if (size > 0 && size < (64L << 20) && fseek(fp, 0, SEEK_SET) == 0 &&
        (text = calloc((size_t)size + 1, 1)) && fread(text, 1, (size_t)size, fp) == (size_t)size) {
        cJSON *j = cJSON_Parse(text);
        const char *v = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(j, "id"));
        if (v && card_id_ok(v)) snprintf(id, cap, "%s", v);
        cJSON_Delete(j);
    }
    free(text);
    fclose(fp);
}

typedef struct pack_state {
    ms_set *set;       /* the writer */
    const ms_set *old; /* the existing set, or NULL */
    int keep, force;
    cli_strmap ids;      /* ids written from the inputs -> input number */
    cli_strmap contents; /* contents written -> input number */
    const cardlist *cards;
    int failed, conflicts, nbroken, added, replaced, unchanged, dup_ids, dup_contents;
} pack_state;

/* Stores a failed card as a broken entry. Returns 0 or the storing error (already printed). */
static int keep_broken(pack_state *ps, const char *card, const bs_err *why)
{
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    int rc;
    if (card_read_opts(card, CARD_NO_VALIDATE, &m, &err) == 0) {
        bs_err_clear(&err);
        rc = ms_add_broken(ps->set, m, &err);
    } else {
        char id[128];
        stem_id(card, id, sizeof id);
        bs_err_clear(&err);
        rc = ms_add_error(ps->set, id, why->code, why->msg, &err);
    }
    tb_model_free(m);
    if (rc != 0) fprintf(stderr, "bandsieve pack: %s\n", err.msg);
    return rc;
}

/* Checks a read model against the inputs so far and the old set: 1 store it, 0 skip it (a
 * duplicate of an earlier input), -1 refuse it (a conflict, already reported). */
static int decide(pack_state *ps, int k, const tb_model *m, const char *content)
{
    const char *card = ps->cards->path[k];
    int prev = cli_strmap_get(&ps->ids, m->id);
    if (prev >= 0) {
        ps->dup_ids++;
        char other[65];
        tb_model *pm = NULL;
        bs_err e;
        bs_err_clear(&e);
        /* The earlier input with this id: compare by content. */
        if (card_read(ps->cards->path[prev], &pm, &e) == 0)
            tb_content_hash(pm, other);
        else
            other[0] = '\0';
        tb_model_free(pm);
        if (!strcmp(other, content)) {
            fprintf(stderr,
                    "bandsieve pack: %s: id '%s' already given by %s with the same content; stored once\n",
                    card, m->id, ps->cards->path[prev]);
            return 0;
        }
        fprintf(stderr, "bandsieve pack: %s: id '%s' already given by %s with different content\n", card,
                m->id, ps->cards->path[prev]);
        return -1;
    }
    int same = cli_strmap_get(&ps->contents, content);
    if (same >= 0) {
        ps->dup_contents++;
        fprintf(stderr, "bandsieve pack: note: %s ('%s') has the same content as %s\n", card, m->id,
                ps->cards->path[same]);
    }
    int oi = ps->old ? ms_find(ps->old, m->id) : -1;
    if (oi < 0) {
        ps->added++;
        return 1;
    }
    char oldc[65];
    bs_err e;
    bs_err_clear(&e);
    if (ms_content(ps->old, oi, oldc, &e) != 0) oldc[0] = '\0';
    if (!strcmp(oldc, content)) {
        ps->unchanged++;
        return 1;
    }
    if (ps->force) {
        ps->replaced++;
        return 1;
    }
    fprintf(stderr,
            "bandsieve pack: %s: '%s' is in %s with different content (%.12s..., now %.12s...); "
            "--force replaces it\n",
            card, m->id, ms_path(ps->old), oldc, content);
    return -1;
}

/* Packs input k; failures and conflicts are counted in ps. Returns nonzero only when the set
 * itself cannot be written. */
static void pack_one(pack_state *ps, int k)
{
    const char *card = ps->cards->path[k];
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    char notes[2048];
    int rc = card_read_notes(card, 0, &m, notes, sizeof notes, &err);
    if (notes[0]) fprintf(stderr, "bandsieve pack: note: %s", notes);
    if (rc == 0) {
        char content[65];
        tb_content_hash(m, content);
        int d = decide(ps, k, m, content);
        if (d < 0) ps->conflicts++;
        if (d > 0) rc = ms_add(ps->set, m, &err);
        if (d > 0 && rc == 0 &&
            (cli_strmap_put(&ps->ids, m->id, k) || cli_strmap_put(&ps->contents, content, k)))
            rc = bs_fail(&err, BS_ENOMEM, "out of memory");
    }
    tb_model_free(m);
    if (rc == 0) return;
    fprintf(stderr, "bandsieve pack: %s\n", err.msg);
    if (!ps->keep || keep_broken(ps, card, &err) != 0) {
        ps->failed++;
        return;
    }
    fprintf(stderr, "bandsieve pack: %s stored as a broken entry\n", card);
    ps->nbroken++;
}

/* Copies the old set's entries that no input replaces. */
static int copy_old(pack_state *ps, int *nkept, bs_err *err)
{
    cli_strmap incoming = {0};
    int rc = 0;
    for (size_t k = 0; rc == 0 && k < ps->cards->n; k++) {
        char id[128];
        peek_id(ps->cards->path[k], id, sizeof id);
        if (id[0] && cli_strmap_put(&incoming, id, (int)k)) rc = bs_fail(err, BS_ENOMEM, "out of memory");
    }
    *nkept = 0;
    for (int i = 0; rc == 0 && i < ms_count(ps->old); i++) {
        if (cli_strmap_get(&incoming, ms_entry_at(ps->old, i)->id) >= 0) continue;
        rc = ms_copy_entry(ps->set, ps->old, i, err);
        if (rc == 0) (*nkept)++;
    }
    cli_strmap_clear(&incoming);
    return rc;
}

static int parse_args(int argc, char **argv, const char **output, const char **description, int *keep,
                      int *invented, int *force, cardlist *cards)
{
    static const struct option opts[] = {{"output", required_argument, NULL, 'o'},
                                         {"keep-broken", no_argument, NULL, 'k'},
                                         {"description", required_argument, NULL, 'd'},
                                         {"invented", no_argument, NULL, 'i'},
                                         {"force", no_argument, NULL, 'f'},
                                         {"list", required_argument, NULL, 'l'},
                                         {"help", no_argument, NULL, 'h'},
                                         {NULL, 0, NULL, 0}};
    bs_err err;
    bs_err_clear(&err);
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "o:h", opts, NULL)) != -1) {
        switch (c) {
        case 'o':
            *output = optarg;
            break;
        case 'k':
            *keep = 1;
            break;
        case 'd':
            *description = optarg;
            break;
        case 'i':
            *invented = 1;
            break;
        case 'f':
            *force = 1;
            break;
        case 'l':
            if (cardlist_add_file(cards, optarg, &err) != 0) {
                fprintf(stderr, "bandsieve pack: %s\n", err.msg);
                return 2;
            }
            break;
        case 'h':
            pack_help(stdout);
            return 0;
        default:
            pack_help(stderr);
            return 2;
        }
    }
    for (int i = optind; i < argc; i++)
        if (cardlist_add_arg(cards, argv[i], &err) != 0) {
            fprintf(stderr, "bandsieve pack: %s\n", err.msg);
            return 2;
        }
    if (!*output || cards->n == 0) {
        fprintf(stderr, "bandsieve pack: %s\n", !*output ? "-o SET.h5 is required" : "no cards given");
        pack_help(stderr);
        return 2;
    }
    return -1;
}

int cmd_pack(int argc, char **argv)
{
    const char *output = NULL, *description = NULL;
    int keep = 0, invented = 0, force = 0;
    cardlist cards = {0};
    int status = parse_args(argc, argv, &output, &description, &keep, &invented, &force, &cards);
    if (status >= 0) {
        cardlist_clear(&cards);
        return status;
    }
    bs_err err;
    bs_err_clear(&err);
    ms_set *old = NULL, *set = NULL;
    /* Never replace an input; an existing output must be a set, which the cards are added to. */
    struct stat out_st;
    status = 0;
    if (stat(output, &out_st) == 0) {
        for (size_t i = 0; i < cards.n && status == 0; i++) {
            struct stat in_st;
            if (stat(cards.path[i], &in_st) == 0 && in_st.st_dev == out_st.st_dev &&
                in_st.st_ino == out_st.st_ino) {
                fprintf(stderr, "bandsieve pack: output %s is also an input card\n", output);
                status = 2;
            }
        }
        if (status == 0 && ms_open(output, &old, &err) != 0) {
            fprintf(stderr, "bandsieve pack: %s exists and cannot be added to: %s\n", output, err.msg);
            status = 1;
        }
    }
    /* The set is written to SET.h5.partial and renamed at the end; a signal removes the partial file. */
    char partial[4300];
    snprintf(partial, sizeof partial, "%s" MS_PARTIAL_SUFFIX, output);
    if (status == 0) cli_remove_on_signal(partial);
    if (status == 0 && (ms_create(output, &set, &err) != 0 ||
                        ms_set_meta(set,
                                    description ? description
                                    : old       ? ms_description(old)
                                                : "",
                                    invented || (old && ms_invented(old)), &err) != 0)) {
        fprintf(stderr, "bandsieve pack: %s\n", err.msg);
        status = 1;
    }
    pack_state ps = {set, old, keep, force, {0}, {0}, &cards, 0, 0, 0, 0, 0, 0, 0, 0};
    int nkept = 0;
    if (status == 0 && old && copy_old(&ps, &nkept, &err) != 0) {
        fprintf(stderr, "bandsieve pack: %s\n", err.msg);
        status = 1;
    }
    for (size_t k = 0; status == 0 && k < cards.n; k++)
        pack_one(&ps, (int)k);
    if (status == 0 && (ps.failed || ps.conflicts)) {
        fprintf(stderr, "bandsieve pack: %d card(s) failed, %d conflict(s); %s not written%s\n", ps.failed,
                ps.conflicts, output, ps.failed ? " (--keep-broken stores failing cards)" : "");
        status = 1;
    }
    ms_free(old); /* the reader is closed before the writer renames over its file */
    old = NULL;
    if (status == 0 && ms_close(set, &err) != 0) {
        fprintf(stderr, "bandsieve pack: %s\n", err.msg);
        status = 1;
    }
    if (status == 0)
        printf("%s: %d material(s): %d added, %d replaced, %d unchanged, %d kept from before, %d broken; "
               "%d repeated id(s), %d repeated content(s)\n",
               output, ms_count(set), ps.added, ps.replaced, ps.unchanged, nkept, ps.nbroken, ps.dup_ids,
               ps.dup_contents);
    ms_free(set);
    cli_strmap_clear(&ps.ids);
    cli_strmap_clear(&ps.contents);
    cardlist_clear(&cards);
    return status;
}
