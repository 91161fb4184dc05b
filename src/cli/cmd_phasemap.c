/* `bandsieve phasemap`: classes on a grid of two parameters of a built-in model, one phase path
 * per row, the rows spread over the MPI ranks; an HDF5 file of arrays and an optional figure. */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/phasemap.h"
#include "cliutil.h"
#include "commands.h"
#include "figures.h"

static void phasemap_help(FILE *out)
{
    fprintf(
        out,
        "usage: [mpirun -n P] bandsieve phasemap model:NAME[:key=val,...] --x KEY=LO..HI:N --y KEY=LO..HI:M\n"
        "                     -o MAP.h5 [--figure MAP.svg] [--tol T] [--mesh N] [--closed-ev E] [--quiet]\n\n"
        "Classifies a built-in model on an N x M grid of two of its parameters. Each row (fixed y)\n"
        "is one phase path over x (as `bandsieve path`): closings bracketed and refined, each\n"
        "interval diagnosed once; a grid point takes the class of the interval holding it, or\n"
        "\"critical point\" within the tolerance of a single-value closing. Rows are dealt\n"
        "round-robin over the MPI ranks; the map does not depend on the number of ranks.\n"
        "Rank 0 writes MAP.h5 (datasets x, y, class [M][N], gap_direct_eV, class_names,\n"
        "closings [M][16][5] = x_lo, x_hi, x, single value, kind; closing_kinds) and prints the map.\n\n"
        "  --x KEY=LO..HI:N   parameter along the rows and its N >= 3 grid points\n"
        "  --y KEY=LO..HI:M   parameter across the rows and its M >= 1 grid points\n"
        "  -o, --output FILE  HDF5 output (required)\n"
        "  --figure FILE      also a picture of the classes (.svg, .png or .pdf by the extension);\n"
        "                     --svg FILE is the same option\n"
        "  --tol T            tolerance on closings and edges in x (default 1e-4)\n"
        "  --mesh N           k-mesh of the gap scan (default 14 in 3D, 36 in 2D)\n"
        "  --closed-ev E      a refined gap below E is closed (default 1e-6)\n"
        "  --quiet            no map on stdout\n"
        "  -h, --help         this text\n");
}

static int parse_axis(const char *text, char *key, size_t cap, double *lo, double *hi, long *n)
{
    const char *eq = strchr(text, '='), *dots = strstr(text, ".."), *colon = strrchr(text, ':');
    if (!eq || !dots || !colon || eq == text || (size_t)(eq - text) >= cap || dots < eq || colon < dots)
        return -1;
    memcpy(key, text, (size_t)(eq - text));
    key[eq - text] = '\0';
    char a[64], b[64];
    size_t la = (size_t)(dots - eq - 1), lb = (size_t)(colon - dots - 2);
    if (la == 0 || la >= sizeof a || lb == 0 || lb >= sizeof b) return -1;
    memcpy(a, eq + 1, la);
    a[la] = '\0';
    memcpy(b, dots + 2, lb);
    b[lb] = '\0';
    if (cli_parse_double(a, lo) || cli_parse_double(b, hi) || cli_parse_int(colon + 1, 1, 100000, n))
        return -1;
    return *hi >= *lo ? 0 : -1;
}

static const char CLASS_CHAR[PP_NCLASS] = {'?', 'o', 'S', 'w', 'Q', 'C', 'W', 'N', 'm', '*', 'T'};

static void print_map(const pm_map *m, const pm_spec *s)
{
    printf("phase map of %s: %s = %g..%g (%d points, columns) x %s = %g..%g (%d rows), %d rank(s), %.2f s\n",
           s->spec, s->xkey, s->x_lo, s->x_hi, m->nx, s->ykey, s->y_lo, s->y_hi, m->ny, m->ranks, m->seconds);
    for (int j = m->ny - 1; j >= 0; j--) {
        printf("  %s = %-10.4g ", s->ykey, m->y[j]);
        for (int i = 0; i < m->nx; i++)
            putchar(CLASS_CHAR[m->cls[(size_t)j * m->nx + i]]);
        printf("   ");
        for (int k = 0; k < m->nclosing[j]; k++) {
            const double *c = m->closings + ((size_t)j * PM_MAX_CLOSINGS + k) * 5;
            if (c[3] > 0.5)
                printf(" %s at %.5g;", pm_kind_name((int)c[4]), c[2]);
            else
                printf(" %s %.5g..%.5g;", pm_kind_name((int)c[4]), c[0], c[1]);
        }
        printf("\n");
    }
    printf("  legend:");
    for (int c = 0; c < PP_NCLASS; c++)
        printf(" %c %s%s", CLASS_CHAR[c], pp_class_name(c), c + 1 < PP_NCLASS ? "," : "\n");
}

/* The picture of the map through the figures module (the extension of path picks SVG, PNG or PDF). */
static int write_figure(const pm_map *m, const pm_spec *s, const char *path, bs_err *err)
{
    const char *names[PP_NCLASS];
    for (int c = 0; c < PP_NCLASS; c++)
        names[c] = pp_class_name(c);
    char title[700];
    snprintf(title, sizeof title, "phase map of %s", s->spec);
    return fig_classmap(path, title, s->xkey, s->ykey, m->nx, m->ny, m->x, m->y, m->cls, PP_NCLASS, names,
                        NULL, err);
}

int cmd_phasemap(int argc, char **argv)
{
    static const struct option longopts[] = {{"x", required_argument, NULL, 'x'},
                                             {"y", required_argument, NULL, 'y'},
                                             {"output", required_argument, NULL, 'o'},
                                             {"svg", required_argument, NULL, 'g'},
                                             {"figure", required_argument, NULL, 'g'},
                                             {"tol", required_argument, NULL, 't'},
                                             {"mesh", required_argument, NULL, 'm'},
                                             {"closed-ev", required_argument, NULL, 'c'},
                                             {"quiet", no_argument, NULL, 'q'},
                                             {"help", no_argument, NULL, 'h'},
                                             {NULL, 0, NULL, 0}};
    pm_spec s;
    memset(&s, 0, sizeof s);
    pp_opts_init(&s.opts);
    s.opts.no_tracks = 1;
    s.opts.tol_x = 1e-4;
    s.opts.diag.seed = 1;
    const char *out = NULL, *svg = NULL, *xs = NULL, *ys = NULL;
    int quiet = 0, c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "ho:", longopts, NULL)) != -1) {
        long v;
        double d;
        switch (c) {
        case 'h':
            phasemap_help(stdout);
            return 0;
        case 'x':
            xs = optarg;
            break;
        case 'y':
            ys = optarg;
            break;
        case 'o':
            out = optarg;
            break;
        case 'g':
            if (!cli_figure_path_ok(optarg)) {
                fprintf(stderr, "bandsieve phasemap: --figure %s: figure files end in .svg, .png or .pdf\n",
                        optarg);
                return 2;
            }
            svg = optarg;
            break;
        case 'q':
            quiet = 1;
            break;
        case 't':
            if (cli_parse_double(optarg, &d) || d <= 0 || d > 0.1) {
                fprintf(stderr, "bandsieve phasemap: --tol expects a number in (0, 0.1], got '%s'\n", optarg);
                return 2;
            }
            s.opts.tol_x = d;
            break;
        case 'm':
            if (cli_parse_int(optarg, 4, 4096, &v)) {
                fprintf(stderr, "bandsieve phasemap: --mesh expects an integer 4..4096, got '%s'\n", optarg);
                return 2;
            }
            s.opts.gap_mesh = (int)v;
            break;
        case 'c':
            if (cli_parse_double(optarg, &d) || d <= 0 || d > 0.1) {
                fprintf(stderr, "bandsieve phasemap: --closed-ev expects a number in (0, 0.1], got '%s'\n",
                        optarg);
                return 2;
            }
            s.opts.closed_ev = d;
            break;
        default:
            phasemap_help(stderr);
            return 2;
        }
    }
    long nx, ny;
    if (optind != argc - 1 || strncmp(argv[optind], "model:", 6) != 0) {
        fprintf(stderr,
                "bandsieve phasemap: need exactly one built-in model source (model:NAME[:key=val,...])\n");
        return 2;
    }
    if (!xs || parse_axis(xs, s.xkey, sizeof s.xkey, &s.x_lo, &s.x_hi, &nx) || nx < 3 || s.x_hi <= s.x_lo) {
        fprintf(stderr, "bandsieve phasemap: --x expects KEY=LO..HI:N with LO < HI and N >= 3, got '%s'\n",
                xs ? xs : "");
        return 2;
    }
    if (!ys || parse_axis(ys, s.ykey, sizeof s.ykey, &s.y_lo, &s.y_hi, &ny) || (ny > 1 && s.y_hi <= s.y_lo)) {
        fprintf(stderr, "bandsieve phasemap: --y expects KEY=LO..HI:M with M >= 1, got '%s'\n", ys ? ys : "");
        return 2;
    }
    if (!out) {
        fprintf(stderr, "bandsieve phasemap: -o MAP.h5 is required\n");
        return 2;
    }
    if (strlen(argv[optind] + 6) >= sizeof s.spec) {
        fprintf(stderr, "bandsieve phasemap: model spec too long\n");
        return 2;
    }
    snprintf(s.spec, sizeof s.spec, "%s", argv[optind] + 6);
    s.nx = (int)nx;
    s.ny = (int)ny;
    /* check the spec and both keys before MPI starts */
    bs_err err;
    bs_err_clear(&err);
    pp_source *probe = NULL;
    char spec_y[700];
    snprintf(spec_y, sizeof spec_y, "%s%c%s=%.17g", s.spec, strchr(s.spec, ':') ? ',' : ':', s.ykey, s.y_lo);
    if (strcmp(s.xkey, s.ykey) == 0 || pp_source_builtin(spec_y, s.xkey, &probe, &err) != 0) {
        fprintf(stderr, "bandsieve phasemap: %s\n", err.code ? err.msg : "--x and --y name the same key");
        return 2;
    }
    pp_source_free(probe);
    pm_map *m = NULL;
    int root = 1;
    int rc = pm_run(&argc, &argv, &s, &m, &root, &err);
    if (rc != 0) {
        fprintf(stderr, "bandsieve phasemap: %s (%s)\n", err.msg, bs_err_name(rc));
        pm_map_free(m);
        return root ? 1 : 0;
    }
    if (!root) return 0;
    int status = 0;
    if (pm_write_h5(m, &s, out, &err) != 0) {
        fprintf(stderr, "bandsieve phasemap: %s\n", err.msg);
        status = 1;
    }
    if (svg && write_figure(m, &s, svg, &err) != 0) {
        fprintf(stderr, "bandsieve phasemap: %s\n", err.msg);
        status = 1;
    }
    if (!quiet) print_map(m, &s);
    pm_map_free(m);
    return status;
}
