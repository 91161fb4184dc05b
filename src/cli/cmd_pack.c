/* `bandsieve pack`: reads material cards and writes them into one material set. */
#include <getopt.h>
#include <stdio.h>
#include <sys/stat.h>
#include <string.h>

#include "bandsieve/card.h"
#include "bandsieve/matset.h"
#include "commands.h"

static void pack_help(FILE *out)
{
    fprintf(out,
            "usage: bandsieve pack -o SET.h5 [--keep-broken] [--description TEXT] [--invented] [--force] CARD.json ...\n\n"
            "Reads each material card and its hopping table, validates it (hermiticity, counts,\n"
            "ranges) and stores it in the material set SET.h5 (HDF5; layout in db/material-set.md).\n"
            "A card that fails is reported on stderr with its message; then nothing is written and\n"
            "the exit status is 1, unless --keep-broken stores it as a broken entry (the model as\n"
            "given when the card itself could be read, else only the error), which `screen` reports\n"
            "as invalid.\n\n"
            "  -o, --output SET.h5   the set to write (replaced only when packing succeeds)\n"
            "  --keep-broken         store failing cards as broken entries instead of failing\n"
            "  --force               replace SET.h5 if it exists (never an input card)\n"
            "  --description TEXT    free-text description stored in the set\n"
            "  --invented            mark the set's data as invented (demonstration data)\n"
            "  -h, --help            this text\n");
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

/* Stores a failed card as a broken entry. Returns 0 or the storing error (already printed). */
static int keep_broken(ms_set *set, const char *card, const bs_err *why)
{
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    int rc;
    if (card_read_opts(card, CARD_NO_VALIDATE, &m, &err) == 0) {
        bs_err_clear(&err);
        rc = ms_add_broken(set, m, &err);
    } else {
        char id[128];
        stem_id(card, id, sizeof id);
        bs_err_clear(&err);
        rc = ms_add_error(set, id, why->code, why->msg, &err);
    }
    tb_model_free(m);
    if (rc != 0) fprintf(stderr, "bandsieve pack: %s\n", err.msg);
    return rc;
}

/* Packs one card; returns 1 when it counts as a failure of the job, else 0. */
static int pack_one(ms_set *set, const char *card, int keep, int *nbroken)
{
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    int rc = card_read(card, &m, &err);
    if (rc == 0) rc = ms_add(set, m, &err);
    tb_model_free(m);
    if (rc == 0) return 0;
    fprintf(stderr, "bandsieve pack: %s\n", err.msg);
    if (!keep) return 1;
    if (keep_broken(set, card, &err) != 0) return 1;
    fprintf(stderr, "bandsieve pack: %s stored as a broken entry\n", card);
    (*nbroken)++;
    return 0;
}

int cmd_pack(int argc, char **argv)
{
    static const struct option opts[] = {{"output", required_argument, NULL, 'o'},
                                         {"keep-broken", no_argument, NULL, 'k'},
                                         {"description", required_argument, NULL, 'd'},
                                         {"invented", no_argument, NULL, 'i'},
                                         {"force", no_argument, NULL, 'f'},
                                         {"help", no_argument, NULL, 'h'},
                                         {NULL, 0, NULL, 0}};
    const char *output = NULL, *description = "";
    int keep = 0, invented = 0, force = 0, c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "o:h", opts, NULL)) != -1) {
        switch (c) {
        case 'o': output = optarg; break;
        case 'k': keep = 1; break;
        case 'd': description = optarg; break;
        case 'i': invented = 1; break;
        case 'f': force = 1; break;
        case 'h': pack_help(stdout); return 0;
        default: pack_help(stderr); return 2;
        }
    }
    if (!output || optind >= argc) {
        fprintf(stderr, "bandsieve pack: %s\n", !output ? "-o SET.h5 is required" : "no cards given");
        pack_help(stderr);
        return 2;
    }
    /* Never replace an input, and replace an existing file only when asked. */
    struct stat out_st;
    if (stat(output, &out_st) == 0) {
        for (int i = optind; i < argc; i++) {
            struct stat in_st;
            if (stat(argv[i], &in_st) == 0 && in_st.st_dev == out_st.st_dev && in_st.st_ino == out_st.st_ino) {
                fprintf(stderr, "bandsieve pack: output %s is also an input card\n", output);
                return 2;
            }
        }
        if (!force) {
            fprintf(stderr, "bandsieve pack: %s exists; pass --force to replace it\n", output);
            return 2;
        }
    }
    bs_err err;
    bs_err_clear(&err);
    ms_set *set = NULL;
    if (ms_create(output, &set, &err) != 0 || ms_set_meta(set, description, invented, &err) != 0) {
        fprintf(stderr, "bandsieve pack: %s\n", err.msg);
        ms_free(set);
        return 1;
    }
    int failed = 0, nbroken = 0;
    for (int i = optind; i < argc; i++) failed += pack_one(set, argv[i], keep, &nbroken);
    if (failed) {
        fprintf(stderr, "bandsieve pack: %d card(s) failed; %s not written (--keep-broken stores them)\n",
                failed, output);
        ms_free(set);
        return 1;
    }
    if (ms_close(set, &err) != 0) {
        fprintf(stderr, "bandsieve pack: %s\n", err.msg);
        ms_free(set);
        return 1;
    }
    ms_free(set);
    printf("%s: %d material(s), %d broken\n", output, argc - optind, nbroken);
    return 0;
}
