/* `bandsieve list`: the index of a material set, as a table or as JSON. */
#include <getopt.h>
#include <stdio.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "bandsieve/matset.h"
#include "commands.h"

static void list_help(FILE *out)
{
    fprintf(out,
            "usage: bandsieve list SET.h5 [--json]\n\n"
            "Prints what a material set holds, one line per material: id, dimension, basis states,\n"
            "lattice vectors, occupied bands, spin, status (ok; broken: stored unvalidated or only\n"
            "as an error, screened as invalid) and the estimated cost per k-point (norb^3 + nR norb^2).\n\n"
            "Families (cards with a \"family\" key) are listed after the materials: name, parameter,\n"
            "unit, members and the range of values; `bandsieve path --family NAME SET.h5` follows one.\n\n"
            "  --json      one JSON object: path, description, invented, count, content (the set's\n"
            "              content hash), materials[] (with each entry's content hash), families[]\n"
            "  -h, --help  this text\n");
}

static const char *status_name(int status)
{
    return status == MS_STATUS_OK ? "ok" : status == MS_STATUS_BROKEN ? "broken" : "error";
}

static void list_table(const ms_set *set)
{
    printf("%s: %d material(s)%s\n", ms_path(set), ms_count(set), ms_invented(set) ? ", INVENTED data" : "");
    if (ms_description(set)[0]) printf("description: %s\n", ms_description(set));
    printf("%-32s %3s %6s %7s %5s %4s %-7s %12s\n", "id", "dim", "states", "R", "occ", "spin", "status",
           "cost");
    for (int i = 0; i < ms_count(set); i++) {
        const ms_entry *e = ms_entry_at(set, i);
        printf("%-32s %3d %6d %7d %5d %4s %-7s %12.4g\n", e->id, e->dim, e->norb, e->nR, e->nocc,
               e->spinful ? "yes" : "no", status_name(e->status), e->cost);
    }
}

/* Members of family `name`: count and value range. */
static void family_stats(const ms_set *set, const char *name, int *n, double *lo, double *hi,
                         const ms_entry **first)
{
    *n = 0;
    *first = NULL;
    for (int i = 0; i < ms_count(set); i++) {
        const ms_entry *e = ms_entry_at(set, i);
        if (!e->has_family || strcmp(e->family, name) != 0) continue;
        if (*n == 0 || e->family_value < *lo) *lo = e->family_value;
        if (*n == 0 || e->family_value > *hi) *hi = e->family_value;
        if (!*first) *first = e;
        (*n)++;
    }
}

static void list_families(const ms_set *set)
{
    const char *names[256];
    int nf = ms_families(set, names, 256);
    if (nf == 0) return;
    printf("\nfamilies\n%-24s %-16s %-8s %7s  %s\n", "family", "parameter", "unit", "members", "values");
    for (int f = 0; f < nf; f++) {
        int n;
        double lo = 0, hi = 0;
        const ms_entry *e;
        family_stats(set, names[f], &n, &lo, &hi, &e);
        printf("%-24s %-16s %-8s %7d  %g .. %g\n", names[f], e->family_param, e->family_unit, n, lo, hi);
    }
}

static int list_json(const ms_set *set)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "path", ms_path(set));
    cJSON_AddStringToObject(root, "description", ms_description(set));
    cJSON_AddBoolToObject(root, "invented", ms_invented(set));
    cJSON_AddNumberToObject(root, "count", ms_count(set));
    char set_content[65];
    bs_err err;
    bs_err_clear(&err);
    if (ms_set_content(set, set_content, &err) == 0) cJSON_AddStringToObject(root, "content", set_content);
    cJSON *list = cJSON_AddArrayToObject(root, "materials");
    for (int i = 0; i < ms_count(set); i++) {
        const ms_entry *e = ms_entry_at(set, i);
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "id", e->id);
        cJSON_AddNumberToObject(o, "dimension", e->dim);
        cJSON_AddNumberToObject(o, "norb", e->norb);
        cJSON_AddNumberToObject(o, "nR", e->nR);
        cJSON_AddNumberToObject(o, "occupied_bands", e->nocc);
        cJSON_AddBoolToObject(o, "spinful", e->spinful);
        cJSON_AddStringToObject(o, "status", status_name(e->status));
        cJSON_AddNumberToObject(o, "cost", e->cost);
        if (e->content[0]) cJSON_AddStringToObject(o, "content", e->content);
        if (e->has_family) {
            cJSON *f = cJSON_AddObjectToObject(o, "family");
            cJSON_AddStringToObject(f, "name", e->family);
            cJSON_AddStringToObject(f, "parameter", e->family_param);
            cJSON_AddStringToObject(f, "unit", e->family_unit);
            cJSON_AddNumberToObject(f, "value", e->family_value);
        }
        cJSON_AddItemToArray(list, o);
    }
    const char *names[256];
    int nf = ms_families(set, names, 256);
    cJSON *fams = cJSON_AddArrayToObject(root, "families");
    for (int f = 0; f < nf; f++) {
        int n;
        double lo = 0, hi = 0;
        const ms_entry *e;
        family_stats(set, names[f], &n, &lo, &hi, &e);
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "name", names[f]);
        cJSON_AddStringToObject(o, "parameter", e->family_param);
        cJSON_AddStringToObject(o, "unit", e->family_unit);
        cJSON_AddNumberToObject(o, "members", n);
        cJSON_AddNumberToObject(o, "from", lo);
        cJSON_AddNumberToObject(o, "to", hi);
        cJSON_AddItemToArray(fams, o);
    }
    char *text = cJSON_Print(root);
    cJSON_Delete(root);
    if (!text) {
        fprintf(stderr, "bandsieve list: out of memory\n");
        return 1;
    }
    printf("%s\n", text);
    cJSON_free(text);
    return 0;
}

int cmd_list(int argc, char **argv)
{
    static const struct option opts[] = {
        {"json", no_argument, NULL, 'j'}, {"help", no_argument, NULL, 'h'}, {NULL, 0, NULL, 0}};
    int json = 0, c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "h", opts, NULL)) != -1) {
        switch (c) {
        case 'j':
            json = 1;
            break;
        case 'h':
            list_help(stdout);
            return 0;
        default:
            list_help(stderr);
            return 2;
        }
    }
    if (optind != argc - 1) {
        fprintf(stderr, "bandsieve list: expected one SET.h5\n");
        list_help(stderr);
        return 2;
    }
    bs_err err;
    bs_err_clear(&err);
    ms_set *set = NULL;
    if (ms_open(argv[optind], &set, &err) != 0) {
        fprintf(stderr, "bandsieve list: %s\n", err.msg);
        return 1;
    }
    int rc = 0;
    if (json)
        rc = list_json(set);
    else {
        list_table(set);
        list_families(set);
    }
    ms_free(set);
    return rc;
}
