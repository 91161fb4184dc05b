/* `bandsieve check`: validates cards, folders of cards and material sets without computing anything,
 * reports repeated ids and contents, and estimates what a screen of the valid entries costs on P
 * ranks from the scheduler's cost model (pl_cost, pl_makespan), in seconds when a catalogue of an
 * earlier screen is given to calibrate it. */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/card.h"
#include "bandsieve/catalogue.h"
#include "bandsieve/content.h"
#include "bandsieve/matset.h"
#include "bandsieve/pipeline.h"
#include "cardlist.h"
#include "cliutil.h"
#include "commands.h"

static void check_help(FILE *out)
{
    fprintf(out,
            "usage: bandsieve check [options] (CARD.json | FOLDER | SET.h5 | --list FILE) ...\n\n"
            "Validates every card (its table included) or every entry of a set as `pack` and `screen`\n"
            "would, without computing; prints one line per problem and per note, the repeated ids and\n"
            "contents, and the estimated cost of screening the valid entries on P ranks (rank 0\n"
            "coordinates, so P - 1 compute; P = 1 computes alone).\n\n"
            "  --ranks P          ranks of the planned screen (default 1)\n"
            "  --mesh N           k-mesh of the planned screen (default: the screen's, 36 in 2D, 14 in 3D)\n"
            "  -c, --catalogue F  calibrate seconds per cost unit from the ok results of an earlier\n"
            "                     screen in F (median over its rows); without it the estimate is in\n"
            "                     cost units, (norb^3 + nR norb^2) x mesh^dim\n"
            "  --list FILE        read card paths from FILE, one per line (repeatable)\n"
            "  -h, --help         this text\n\n"
            "Exit status: 0 every entry valid, 1 some are not (or repeat an id with other content),\n"
            "2 usage or an unreadable input.\n");
}

typedef struct check_state {
    cli_strmap ids, contents;
    double *cost;
    int n, cap;
    int nvalid, ninvalid, dup_ids, dup_contents, conflicts;
    int mesh;
    char (*where)[300]; /* per valid entry: where it came from, for duplicate messages */
} check_state;

static int remember(check_state *cs, const char *id, const char *content, const char *where, double cost)
{
    int prev = cli_strmap_get(&cs->ids, id);
    if (prev >= 0) {
        int same = cli_strmap_get(&cs->contents, content);
        cs->dup_ids++;
        if (same >= 0 && same == prev) {
            printf("%s: id '%s' repeats %s with the same content\n", where, id, cs->where[prev]);
        } else {
            printf("%s: id '%s' repeats %s with different content\n", where, id, cs->where[prev]);
            cs->conflicts++;
        }
        return 0;
    }
    int same = cli_strmap_get(&cs->contents, content);
    if (same >= 0) {
        cs->dup_contents++;
        printf("%s: note: '%s' has the same content as %s\n", where, id, cs->where[same]);
    }
    if (cs->n == cs->cap) {
        int cap = cs->cap ? 2 * cs->cap : 256;
        double *c = realloc(cs->cost, (size_t)cap * sizeof *c);
        if (c) cs->cost = c;
        char(*w)[300] = realloc(cs->where, (size_t)cap * sizeof *w);
        if (w) cs->where = w;
        if (!c || !w) return -1;
        cs->cap = cap;
    }
    snprintf(cs->where[cs->n], sizeof cs->where[cs->n], "%s", where);
    cs->cost[cs->n] = cost;
    if (cli_strmap_put(&cs->ids, id, cs->n) || (same < 0 && cli_strmap_put(&cs->contents, content, cs->n)))
        return -1;
    cs->n++;
    return 0;
}

static int check_card(check_state *cs, const char *path)
{
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    char notes[2048];
    int rc = card_read_notes(path, 0, &m, notes, sizeof notes, &err);
    if (notes[0]) printf("note: %s", notes);
    if (rc != 0) {
        printf("%s\n", err.msg);
        cs->ninvalid++;
        return 0;
    }
    char content[65];
    tb_content_hash(m, content);
    cs->nvalid++;
    rc = remember(cs, m->id, content, path, pl_cost(m->dim, m->norb, m->nR, cs->mesh, 1));
    tb_model_free(m);
    return rc;
}

static int check_set(check_state *cs, const char *path)
{
    bs_err err;
    bs_err_clear(&err);
    ms_set *set = NULL;
    if (ms_open(path, &set, &err) != 0) {
        fprintf(stderr, "bandsieve check: %s\n", err.msg);
        return -2;
    }
    int rc = 0;
    for (int i = 0; i < ms_count(set) && rc == 0; i++) {
        const ms_entry *e = ms_entry_at(set, i);
        tb_model *m = NULL;
        bs_err_clear(&err);
        if (ms_read(set, i, &m, &err) != 0) {
            printf("%s\n", err.msg);
            cs->ninvalid++;
            continue;
        }
        char content[65], where[300];
        if (ms_content(set, i, content, &err) != 0) tb_content_hash(m, content);
        snprintf(where, sizeof where, "%s:%s", path, e->id);
        cs->nvalid++;
        rc = remember(cs, e->id, content, where, pl_cost(m->dim, m->norb, m->nR, cs->mesh, 1));
        tb_model_free(m);
    }
    ms_free(set);
    return rc;
}

typedef struct calib {
    double *ratio;
    int n, cap;
} calib;

static int calib_row(void *ctx, const cat_row *row, bs_err *err)
{
    calib *c = ctx;
    if (row->index < 0) return 0;
    for (int i = 0; i < 5; i++)
        if (!row->text[i]) return 0;
    double cost = pl_cost(atoi(row->text[0]), atoi(row->text[1]), atoi(row->text[2]), atoi(row->text[3]), 1);
    double sec = atof(row->text[4]);
    if (!(cost > 0) || !(sec > 0)) return 0;
    if (c->n == c->cap) {
        int cap = c->cap ? 2 * c->cap : 256;
        double *r = realloc(c->ratio, (size_t)cap * sizeof *r);
        if (!r) return bs_fail(err, BS_ENOMEM, "out of memory");
        c->ratio = r;
        c->cap = cap;
    }
    c->ratio[c->n++] = sec / cost;
    return 0;
}

static int by_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

/* Median seconds per cost unit over the ok rows of an earlier screen; 0 when there are none. */
static int calibrate(const char *cat_path, double *sec_per_unit, int *nrows, bs_err *err)
{
    *sec_per_unit = 0;
    *nrows = 0;
    cat_db *cat = NULL;
    int rc = cat_open(cat_path, CAT_RO, &cat, err);
    calib c = {NULL, 0, 0};
    if (rc == 0)
        rc = cat_query(cat,
                       "SELECT m.dimension, m.norb, m.nr, r.mesh, r.seconds FROM results r JOIN materials m"
                       " ON m.material_id = r.material_id WHERE r.status = 'ok'",
                       calib_row, &c, err);
    cat_close(cat, NULL);
    if (rc == 0 && c.n > 0) {
        qsort(c.ratio, (size_t)c.n, sizeof *c.ratio, by_double);
        *sec_per_unit = c.n % 2 ? c.ratio[c.n / 2] : 0.5 * (c.ratio[c.n / 2 - 1] + c.ratio[c.n / 2]);
        *nrows = c.n;
    }
    free(c.ratio);
    return rc;
}

static void report_cost(check_state *cs, int ranks, double sec_per_unit, int ncal)
{
    int nworkers = ranks > 1 ? ranks - 1 : 1;
    double total = 0, largest = 0;
    for (int i = 0; i < cs->n; i++) {
        total += cs->cost[i];
        if (cs->cost[i] > largest) largest = cs->cost[i];
    }
    double span = pl_makespan(cs->cost, cs->n, nworkers);
    double balance = span > 0 ? total / (nworkers * span) : 1;
    printf("estimate for %d rank(s) (%d computing): total %.3g cost units, longest worker %.3g "
           "(work balance %.0f%%; the largest entry is %.1f%% of the total)\n",
           ranks, nworkers, total, span, 100 * balance, total > 0 ? 100 * largest / total : 0);
    if (sec_per_unit > 0)
        printf(
            "estimated wall time: %.3g s (%.2f h), from %.3g s per unit, the median of %d earlier ok rows\n",
            span * sec_per_unit, span * sec_per_unit / 3600, sec_per_unit, ncal);
}

int cmd_check(int argc, char **argv)
{
    static const struct option opts[] = {{"ranks", required_argument, NULL, 'P'},
                                         {"mesh", required_argument, NULL, 'm'},
                                         {"catalogue", required_argument, NULL, 'c'},
                                         {"list", required_argument, NULL, 'l'},
                                         {"help", no_argument, NULL, 'h'},
                                         {NULL, 0, NULL, 0}};
    cardlist inputs = {0};
    const char *cat = NULL;
    long ranks = 1, mesh = 0;
    bs_err err;
    bs_err_clear(&err);
    int c, status = -1;
    optind = 1;
    while (status < 0 && (c = getopt_long(argc, argv, "c:h", opts, NULL)) != -1) {
        switch (c) {
        case 'P':
            if (cli_parse_int(optarg, 1, 1 << 24, &ranks)) {
                fprintf(stderr, "bandsieve check: --ranks expects a positive integer, got '%s'\n", optarg);
                status = 2;
            }
            break;
        case 'm':
            if (cli_parse_int(optarg, 4, 4096, &mesh)) {
                fprintf(stderr, "bandsieve check: --mesh expects an integer 4..4096, got '%s'\n", optarg);
                status = 2;
            }
            break;
        case 'c':
            cat = optarg;
            break;
        case 'l':
            if (cardlist_add_file(&inputs, optarg, &err) != 0) {
                fprintf(stderr, "bandsieve check: %s\n", err.msg);
                status = 2;
            }
            break;
        case 'h':
            check_help(stdout);
            status = 0;
            break;
        default:
            check_help(stderr);
            status = 2;
        }
    }
    for (int i = optind; status < 0 && i < argc; i++)
        if (cardlist_add_arg(&inputs, argv[i], &err) != 0) {
            fprintf(stderr, "bandsieve check: %s\n", err.msg);
            status = 2;
        }
    if (status < 0 && inputs.n == 0) {
        fprintf(stderr, "bandsieve check: nothing to check\n");
        check_help(stderr);
        status = 2;
    }
    if (status >= 0) {
        cardlist_clear(&inputs);
        return status;
    }
    check_state cs;
    memset(&cs, 0, sizeof cs);
    cs.mesh = (int)mesh;
    int rc = 0;
    for (size_t i = 0; rc == 0 && i < inputs.n; i++)
        rc = cardlist_is_hdf5(inputs.path[i]) ? check_set(&cs, inputs.path[i])
                                              : check_card(&cs, inputs.path[i]);
    double spu = 0;
    int ncal = 0;
    if (rc == 0 && cat && calibrate(cat, &spu, &ncal, &err) != 0) {
        fprintf(stderr, "bandsieve check: %s\n", err.msg);
        rc = -2;
    }
    if (rc == 0) {
        printf(
            "%d valid, %d invalid; %d repeated id(s) (%d with different content), %d repeated content(s)\n",
            cs.nvalid, cs.ninvalid, cs.dup_ids, cs.conflicts, cs.dup_contents);
        report_cost(&cs, (int)ranks, spu, ncal);
        if (cat && ncal == 0) printf("no ok rows in %s to calibrate seconds from\n", cat);
    } else if (rc == -1) {
        fprintf(stderr, "bandsieve check: out of memory\n");
    }
    status = rc != 0 ? 2 : cs.ninvalid || cs.conflicts ? 1 : 0;
    cli_strmap_clear(&cs.ids);
    cli_strmap_clear(&cs.contents);
    free(cs.cost);
    free(cs.where);
    cardlist_clear(&inputs);
    return status;
}
