/* `bandsieve demo-set` and `bandsieve models`: the invented demo set and the built-in models. */
#include <getopt.h>
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include "bandsieve/demo.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/matset.h"
#include "cliutil.h"
#include "commands.h"

static void demo_help(FILE *out)
{
    fprintf(out, "usage: bandsieve demo-set -o SET.h5 [--count N] [--seed S] [--force] [--families]\n\n"
                 "Writes the INVENTED demonstration set: fictitious compounds (the Jo-Qu family), each a\n"
                 "built-in published lattice model with drawn parameters, plus a few broken entries, so a\n"
                 "screen meets every class and status. Not real materials.\n\n"
                 "  -o, --output F  the set to write\n"
                 "  --count N       entries (default 300, at least 12)\n"
                 "  --seed S        generator seed (default 2026): same seed, same set\n"
                 "  --force         replace SET.h5 if it exists (otherwise an existing file is refused)\n"
                 "  --families      also two invented families (bandsieve list shows them): a pressure\n"
                 "                  series Jo2Qu-pressure (0..8 GPa) and an alloy JaQi1-xQox (x = 0, 1),\n"
                 "                  7 more entries (ids JQF-*) for bandsieve path --family\n"
                 "  -h, --help      this text\n");
}

int cmd_demo_set(int argc, char **argv)
{
    static const struct option longopts[] = {{"output", required_argument, NULL, 'o'},
                                             {"count", required_argument, NULL, 'n'},
                                             {"seed", required_argument, NULL, 's'},
                                             {"force", no_argument, NULL, 'f'},
                                             {"families", no_argument, NULL, 'F'},
                                             {"help", no_argument, NULL, 'h'},
                                             {NULL, 0, NULL, 0}};
    int families = 0;
    const char *path = NULL;
    long count = 300, seed = 2026;
    int force = 0, c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "o:h", longopts, NULL)) != -1) {
        switch (c) {
        case 'h':
            demo_help(stdout);
            return 0;
        case 'o':
            path = optarg;
            break;
        case 'f':
            force = 1;
            break;
        case 'F':
            families = 1;
            break;
        case 'n':
            if (cli_parse_int(optarg, 12, 1000000, &count)) {
                fprintf(stderr, "bandsieve demo-set: --count expects 12..1000000, got '%s'\n", optarg);
                return 2;
            }
            break;
        case 's':
            if (cli_parse_int(optarg, 0, 1L << 62, &seed)) {
                fprintf(stderr, "bandsieve demo-set: --seed expects a non-negative integer, got '%s'\n",
                        optarg);
                return 2;
            }
            break;
        default:
            demo_help(stderr);
            return 2;
        }
    }
    if (!path || optind != argc) {
        fprintf(stderr, "bandsieve demo-set: need -o SET.h5 and nothing else\n");
        demo_help(stderr);
        return 2;
    }
    if (!force && access(path, F_OK) == 0) {
        fprintf(stderr, "bandsieve demo-set: %s exists; pass --force to replace it\n", path);
        return 2;
    }
    /* The set is written to PATH.partial and renamed at the end; a signal removes the partial file. */
    char partial[4300];
    snprintf(partial, sizeof partial, "%s" MS_PARTIAL_SUFFIX, path);
    cli_remove_on_signal(partial);
    bs_err err;
    bs_err_clear(&err);
    if (demo_write_set_families(path, (int)count, (uint64_t)seed, families, &err) != 0) {
        fprintf(stderr, "bandsieve demo-set: %s\n", err.msg);
        return 1;
    }
    fprintf(stderr, "bandsieve demo-set: wrote %ld invented entries%s to %s\n", count,
            families ? " and 7 in two invented families" : "", path);
    return 0;
}

static void models_help(FILE *out)
{
    fprintf(out, "usage: bandsieve models [NAME]\n\n"
                 "Lists the built-in published lattice models, usable as SOURCE model:NAME[:key=val,...],\n"
                 "with each parameter's default and meaning; with NAME, only that model.\n");
}

int cmd_models(int argc, char **argv)
{
    if (argc > 1 && (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h"))) {
        models_help(stdout);
        return 0;
    }
    if (argc > 2 || (argc == 2 && argv[1][0] == '-')) {
        models_help(stderr);
        return 2;
    }
    int n = 0;
    const lm_info *all = lm_catalogue(&n);
    int shown = 0;
    for (int i = 0; i < n; i++) {
        const lm_info *m = &all[i];
        if (argc == 2 && strcmp(argv[1], m->name) && !(m->alias && !strcmp(argv[1], m->alias))) continue;
        shown++;
        printf("%s%s%s%s — %s\n  %s; %s; at the defaults: %s\n", m->name, m->alias ? " (alias " : "",
               m->alias ? m->alias : "", m->alias ? ")" : "", m->summary, m->reference,
               m->spinful ? "spinful" : "spinless", m->at_defaults);
        for (int p = 0; p < m->nparam; p++)
            printf("    %-10s %10g   %s\n", m->params[p].key, m->params[p].def, m->params[p].meaning);
    }
    if (argc == 2 && !shown) {
        fprintf(stderr, "bandsieve models: no built-in model '%s'\n", argv[1]);
        return 1;
    }
    return 0;
}
