/* `bandsieve slab`: slab or ribbon of one material along a Miller plane: surface-state crossings
 * between surface TRIMs, surface Dirac points, bands along a surface path, and the semi-infinite
 * surface spectral function (map at one energy, or energy-resolved along the path) as JSON / SVG. */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "bandsieve/slab.h"
#include "bandsieve/source.h"
#include "bandsieve/surfgreen.h"
#include "bandsieve/arrays.h"
#include "bandsieve/surfstates.h"
#include "bandsieve/surfsummary.h"
#include "cliutil.h"
#include "commands.h"
#include "figures.h"

#define SLAB_MAX_PATH 32

/* Said when no Dirac point is found: the slab alone cannot tell a trivial surface from two
 * surfaces that still hybridise; the bulk parities can (screen --surfaces checks them). */
#define THIN_NOTE                                                                                            \
    "no surface Dirac point at this thickness: a trivial surface, or, for a strong or 2D TI, a slab too "    \
    "thin whose two surfaces still hybridise (add --layers; screen --surfaces grows the slab and checks "    \
    "the counts against the bulk parities)"

typedef struct slab_args {
    const char *source, *svg, *arrays;
    int miller[3], nmiller, layers, nsurf, nk, mesh, json, side, has_fermi, has_energy, has_window;
    int between[2]; /* surface TRIM indices t = n1 + 2 n2 */
    int npath;
    double path[SLAB_MAX_PATH][2];
    double cut, fermi, energy, eta, window[2];
} slab_args;

static void slab_help(FILE *out)
{
    fprintf(
        out,
        "usage: bandsieve slab SOURCE --direction h,k,l --layers N [options]\n\n"
        "Cuts SOURCE along the lattice plane with Miller indices h,k,l (relative to the model's own\n"
        "lattice vectors; for a 2D model the edge line h,k, giving a ribbon) and keeps N cells.\n"
        "Reports the bulk gap, the Fermi-level crossings by top- and bottom-surface states between\n"
        "two surface TRIMs (odd: the surface cannot be trivial), and the surface Dirac points\n"
        "(Kramers points of surface bands at surface TRIMs inside the bulk gap).\n"
        "Surface TRIMs are named by n1n2 for k' = (n1, n2)/2: 00 10 01 11 (a ribbon: 0 1).\n\n"
        "  --direction h,k,l   Miller indices (coprime; h,k for a 2D model)\n"
        "  --layers N          cells in the slab (2..%d / states per cell)\n"
        "  --between A,B       the two surface TRIMs for the crossing count (default 00,10; ribbon 0,1)\n"
        "  --fermi E           Fermi level in eV (default: inside the bulk gap, 20-80%% of the way\n"
        "                      up, as far as it allows from the slab's levels at the surface TRIMs)\n"
        "  --surface-layers S  cells counted as a surface (default max(2, N/8))\n"
        "  --cut C             termination: orbitals at stacking coordinate [C, C+1) form a cell (default "
        "0)\n"
        "  --path P            surface path, points k1,k2 (ribbon: k1) joined by ':'\n"
        "                      (default 0,0:0.5,0:0.5,0.5:0,0; ribbon 0:0.5:1)\n"
        "  --nk N              samples per path segment (default 60)\n"
        "  --energy E          surface spectral function at E (eV): a map over the zone, and along the path\n"
        "  --window LO,HI      energy-resolved spectral function along the path over LO..HI (eV)\n"
        "  --eta ETA           broadening in eV (default 0.01)\n"
        "  --mesh M            map resolution M x M (default 60)\n"
        "  --side top|bottom   surface for the spectral function (default top)\n"
        "  --json              print one JSON object\n"
        "  --figure FILE       figure (.svg, .png or .pdf): the --window path map, else the --energy\n"
        "                      map, else the slab bands with top (up triangles) and bottom (down)\n"
        "                      surface weights; --svg FILE is the same option\n"
        "  --arrays FILE.h5    write the computed arrays (path, bands and weights, spectral map and\n"
        "                      path spectra) as HDF5 datasets, for an artifacts folder\n"
        "  -h, --help          this text\n",
        20000);
}

static int parse_ints(const char *text, int *v, int max, int *count)
{
    const char *p = text;
    *count = 0;
    while (*count < max) {
        char *end;
        long x = strtol(p, &end, 10);
        if (end == p || x < -1000 || x > 1000) return -1;
        v[(*count)++] = (int)x;
        if (*end == '\0') return 0;
        if (*end != ',') return -1;
        p = end + 1;
    }
    return -1;
}

/* "00" style name of a surface TRIM into t = n1 + 2 n2; kdim 1 takes "0" or "1". */
static int parse_trim(const char *text, size_t len, int kdim, int *t)
{
    if (len != (size_t)kdim) return -1;
    int n1 = text[0] - '0', n2 = kdim == 2 ? text[1] - '0' : 0;
    if (n1 < 0 || n1 > 1 || n2 < 0 || n2 > 1) return -1;
    *t = n1 + 2 * n2;
    return 0;
}

static int parse_between(const char *text, int kdim, int t[2])
{
    const char *comma = strchr(text, ',');
    if (!comma) return -1;
    if (parse_trim(text, (size_t)(comma - text), kdim, &t[0]) ||
        parse_trim(comma + 1, strlen(comma + 1), kdim, &t[1]))
        return -1;
    return t[0] == t[1] ? -1 : 0;
}

static int parse_path(const char *text, slab_args *a)
{
    char buf[1024];
    if (strlen(text) >= sizeof buf) return -1;
    strcpy(buf, text);
    a->npath = 0;
    for (char *save = NULL, *tok = strtok_r(buf, ":", &save); tok; tok = strtok_r(NULL, ":", &save)) {
        if (a->npath == SLAB_MAX_PATH) return -1;
        double *k = a->path[a->npath++];
        char *comma = strchr(tok, ',');
        k[1] = 0;
        if (comma) {
            *comma = '\0';
            if (cli_parse_double(comma + 1, &k[1])) return -1;
        }
        if (cli_parse_double(tok, &k[0])) return -1;
    }
    return a->npath >= 2 ? 0 : -1;
}

static int usage_error(const char *msg, const char *arg)
{
    fprintf(stderr, "bandsieve slab: %s%s%s%s\n", msg, arg ? " '" : "", arg ? arg : "", arg ? "'" : "");
    return 2;
}

/* Options into a; returns 0, 2 for a usage error, or -1 after --help. The TRIM names and the
 * path are kept as text until the dimension is known. */
static int parse_args(int argc, char **argv, slab_args *a, const char **between, const char **path)
{
    static const struct option longopts[] = {{"direction", required_argument, NULL, 'd'},
                                             {"layers", required_argument, NULL, 'n'},
                                             {"between", required_argument, NULL, 'b'},
                                             {"fermi", required_argument, NULL, 'f'},
                                             {"surface-layers", required_argument, NULL, 's'},
                                             {"cut", required_argument, NULL, 'c'},
                                             {"path", required_argument, NULL, 'p'},
                                             {"nk", required_argument, NULL, 'k'},
                                             {"energy", required_argument, NULL, 'e'},
                                             {"window", required_argument, NULL, 'w'},
                                             {"eta", required_argument, NULL, 't'},
                                             {"mesh", required_argument, NULL, 'm'},
                                             {"side", required_argument, NULL, 'S'},
                                             {"json", no_argument, NULL, 'j'},
                                             {"svg", required_argument, NULL, 'g'},
                                             {"figure", required_argument, NULL, 'g'},
                                             {"arrays", required_argument, NULL, 'A'},
                                             {"help", no_argument, NULL, 'h'},
                                             {NULL, 0, NULL, 0}};
    long v;
    double wv[3];
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "h", longopts, NULL)) != -1) {
        switch (c) {
        case 'h':
            slab_help(stdout);
            return -1;
        case 'd':
            if (parse_ints(optarg, a->miller, 3, &a->nmiller) || a->nmiller < 2)
                return usage_error("--direction expects h,k,l (or h,k for a 2D model) integers, got", optarg);
            break;
        case 'n':
            if (cli_parse_int(optarg, 2, 20000, &v))
                return usage_error("--layers expects an integer 2..20000, got", optarg);
            a->layers = (int)v;
            break;
        case 'b':
            *between = optarg;
            break;
        case 'f':
            if (cli_parse_double(optarg, &a->fermi))
                return usage_error("--fermi expects a number (eV), got", optarg);
            a->has_fermi = 1;
            break;
        case 's':
            if (cli_parse_int(optarg, 1, 20000, &v))
                return usage_error("--surface-layers expects a positive integer, got", optarg);
            a->nsurf = (int)v;
            break;
        case 'c':
            if (cli_parse_double(optarg, &a->cut)) return usage_error("--cut expects a number, got", optarg);
            break;
        case 'p':
            *path = optarg;
            break;
        case 'k':
            if (cli_parse_int(optarg, 2, 100000, &v))
                return usage_error("--nk expects an integer >= 2, got", optarg);
            a->nk = (int)v;
            break;
        case 'e':
            if (cli_parse_double(optarg, &a->energy))
                return usage_error("--energy expects a number (eV), got", optarg);
            a->has_energy = 1;
            break;
        case 'w':
            if (cli_parse_vec3(optarg, wv) || !(wv[1] > wv[0]) || strchr(strchr(optarg, ',') + 1, ','))
                return usage_error("--window expects LO,HI with LO < HI (eV), got", optarg);
            a->window[0] = wv[0];
            a->window[1] = wv[1];
            a->has_window = 1;
            break;
        case 't':
            if (cli_parse_double(optarg, &a->eta) || !(a->eta > 0))
                return usage_error("--eta expects a positive number (eV), got", optarg);
            break;
        case 'm':
            if (cli_parse_int(optarg, 2, 2000, &v))
                return usage_error("--mesh expects an integer 2..2000, got", optarg);
            a->mesh = (int)v;
            break;
        case 'S':
            if (!strcmp(optarg, "top"))
                a->side = SG_TOP;
            else if (!strcmp(optarg, "bottom"))
                a->side = SG_BOTTOM;
            else
                return usage_error("--side expects top or bottom, got", optarg);
            break;
        case 'j':
            a->json = 1;
            break;
        case 'g':
            a->svg = optarg;
            break;
        case 'A':
            a->arrays = optarg;
            break;
        default:
            slab_help(stderr);
            return 2;
        }
    }
    if (optind != argc - 1) return usage_error("need exactly one SOURCE (bandsieve slab --help)", NULL);
    if (a->nmiller == 0 || a->layers == 0) return usage_error("--direction and --layers are required", NULL);
    a->source = argv[optind];
    return 0;
}

/* Dimension-dependent defaults and the deferred parses; 0 or 2. */
static int finish_args(slab_args *a, int kdim, const char *between, const char *path)
{
    if (kdim == 1 && a->nmiller == 3 && a->miller[2] != 0)
        return usage_error("a 2D model takes --direction h,k (an edge line)", NULL);
    if (kdim == 2 && a->nmiller != 3) return usage_error("a 3D model takes --direction h,k,l", NULL);
    if (a->nmiller == 2) a->miller[2] = 0;
    a->between[0] = 0;
    a->between[1] = 1;
    if (between && parse_between(between, kdim, a->between))
        return usage_error(kdim == 2 ? "--between expects two different surface TRIMs among 00,10,01,11, got"
                                     : "--between expects 0,1 or 1,0 for a ribbon, got",
                           between);
    if (path) {
        if (parse_path(path, a))
            return usage_error("--path expects at least two points k1[,k2] joined by ':', got", path);
    } else if (kdim == 2) {
        static const double def[4][2] = {{0, 0}, {0.5, 0}, {0.5, 0.5}, {0, 0}};
        memcpy(a->path, def, sizeof def);
        a->npath = 4;
    } else {
        static const double def[3][2] = {{0, 0}, {0.5, 0}, {1, 0}};
        memcpy(a->path, def, sizeof def);
        a->npath = 3;
    }
    if (kdim == 1)
        for (int i = 0; i < a->npath; i++)
            a->path[i][1] = 0;
    return 0;
}

typedef struct slab_result {
    double vbm, cbm, fermi;
    int n_top, n_bottom, n_other;
    int ndirac;
    ss_dirac dirac[16];
    int nkp;             /* path samples */
    double *kp, *xp;     /* 2 nkp in-plane k, nkp distances along the path */
    double *E, *wt, *wb; /* nkp * nstates bands and weights (when computed) */
    double *map;         /* mesh^2 (or mesh) spectral map at the energy */
    double *apath;       /* nkp spectral function at the energy along the path */
    int ne;
    double *awin; /* nkp * ne energy-resolved along the path */
} slab_result;

static void result_clear(slab_result *r)
{
    free(r->kp);
    free(r->xp);
    free(r->E);
    free(r->wt);
    free(r->wb);
    free(r->map);
    free(r->apath);
    free(r->awin);
}

/* Samples the path (Cartesian length from the rebased reciprocal vectors, so segments are drawn
 * to scale). */
static int sample_path(const slab *s, const slab_args *a, slab_result *r, bs_err *err)
{
    int nk = a->nk, nseg = a->npath - 1;
    r->nkp = nseg * (nk - 1) + 1;
    r->kp = malloc(2 * (size_t)r->nkp * sizeof *r->kp);
    r->xp = malloc((size_t)r->nkp * sizeof *r->xp);
    if (!r->kp || !r->xp) return bs_fail(err, BS_ENOMEM, "out of memory for the path");
    double b[3][3];
    tb_model_reciprocal(slab_rebased(s), b);
    int j = 0;
    double x = 0;
    for (int g = 0; g < nseg; g++)
        for (int i = (g == 0 ? 0 : 1); i < nk; i++) {
            double t = (double)i / (nk - 1), *k = r->kp + 2 * j;
            k[0] = a->path[g][0] + t * (a->path[g + 1][0] - a->path[g][0]);
            k[1] = a->path[g][1] + t * (a->path[g + 1][1] - a->path[g][1]);
            if (j > 0) {
                double d[3] = {0, 0, 0};
                for (int c = 0; c < 3; c++)
                    d[c] = (k[0] - k[-2]) * b[0][c] + (k[1] - k[-1]) * b[1][c];
                x += sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2]);
            }
            r->xp[j++] = x;
        }
    return 0;
}

static int compute_bands(ss_ctx *c, int ns, slab_result *r, bs_err *err)
{
    size_t tot = (size_t)r->nkp * ns;
    r->E = malloc(tot * sizeof *r->E);
    r->wt = malloc(tot * sizeof *r->wt);
    r->wb = malloc(tot * sizeof *r->wb);
    if (!r->E || !r->wt || !r->wb) return bs_fail(err, BS_ENOMEM, "out of memory for the slab bands");
    int rc = 0;
    for (int j = 0; j < r->nkp && rc == 0; j++)
        rc = ss_bands(c, r->kp + 2 * j, r->E + (size_t)j * ns, r->wt + (size_t)j * ns, r->wb + (size_t)j * ns,
                      err);
    return rc;
}

static int compute_spectral(const slab *s, const slab_args *a, slab_result *r, bs_err *err)
{
    sg_ws *g = NULL;
    int rc = sg_create(s, &g, err), n2 = slab_kdim(s) == 2 ? a->mesh : 1;
    if (rc == 0 && a->has_energy) {
        r->map = malloc((size_t)a->mesh * n2 * sizeof *r->map);
        r->apath = malloc((size_t)r->nkp * sizeof *r->apath);
        if (!r->map || !r->apath) rc = bs_fail(err, BS_ENOMEM, "out of memory for the spectral map");
        if (rc == 0) rc = sg_map(g, a->energy, a->eta, a->side, a->mesh, n2, r->map, err);
        for (int j = 0; rc == 0 && j < r->nkp; j++)
            rc = sg_spectral(g, r->kp + 2 * j, a->energy, a->eta, a->side, &r->apath[j], err);
    }
    if (rc == 0 && a->has_window) {
        r->ne = 121;
        r->awin = malloc((size_t)r->nkp * r->ne * sizeof *r->awin);
        if (!r->awin) rc = bs_fail(err, BS_ENOMEM, "out of memory for the spectral path");
        if (rc == 0)
            rc = sg_path(g, r->nkp, r->kp, r->ne, a->window[0], a->window[1], a->eta, a->side, r->awin, err);
    }
    sg_free(g);
    return rc;
}

static int analyse(const slab *s, const tb_model *m, const slab_args *a, slab_result *r, bs_err *err)
{
    ss_opts o;
    ss_opts_default(&o);
    o.nsurf = a->nsurf;
    ss_ctx *c = NULL;
    int rc = ss_create(s, &o, &c, err);
    /* 24 points per axis put every TRIM and the K points of hexagonal lattices (1/3) on the mesh. */
    if (rc == 0) rc = ss_bulk_edges(m, 24, &r->vbm, &r->cbm, err);
    r->fermi = a->has_fermi ? a->fermi : ss_fermi_default(r->vbm, r->cbm);
    if (rc == 0 && !a->has_fermi) rc = ss_fermi_away(c, r->vbm, r->cbm, &r->fermi, err);
    double kt[8];
    int nt;
    if (rc == 0) {
        ss_trims(c, kt, &nt);
        rc = ss_crossings(c, kt + 2 * a->between[0], kt + 2 * a->between[1], r->fermi, &r->n_top,
                          &r->n_bottom, &r->n_other, err);
    }
    if (rc == 0) rc = ss_dirac_points(c, r->dirac, 16, &r->ndirac, err);
    /* Dirac points are kept only inside the global bulk gap by a margin and two-fold (a projected
     * gap alone admits the trivial edge states of, e.g., a zigzag ribbon far below the Fermi level,
     * and a level at a bulk band edge is an artefact of the continuum, not a Dirac point). */
    int keep = 0;
    for (int i = 0; rc == 0 && i < r->ndirac && i < 16; i++)
        if (ssum_dirac_ok(&r->dirac[i], r->vbm, r->cbm)) r->dirac[keep++] = r->dirac[i];
    if (rc == 0) r->ndirac = keep;
    if (rc == 0) rc = sample_path(s, a, r, err);
    if (rc == 0 && (a->json || a->arrays || (a->svg && !a->has_energy && !a->has_window)))
        rc = compute_bands(c, slab_nstates(s), r, err);
    ss_free(c);
    if (rc == 0 && (a->has_energy || a->has_window)) rc = compute_spectral(s, a, r, err);
    return rc;
}

static cJSON *dirac_json(const slab_result *r, int side, int kdim)
{
    cJSON *arr = cJSON_CreateArray();
    for (int i = 0; i < r->ndirac; i++) {
        if (r->dirac[i].side != side) continue;
        cJSON *o = cJSON_CreateObject();
        cJSON_AddItemToObject(o, "k", cJSON_CreateDoubleArray(r->dirac[i].k, kdim));
        cJSON_AddNumberToObject(o, "energy_eV", r->dirac[i].energy_ev);
        cJSON_AddNumberToObject(o, "degeneracy", r->dirac[i].degeneracy);
        cJSON_AddItemToArray(arr, o);
    }
    return arr;
}

static cJSON *rows_json(const double *v, int nrow, int ncol)
{
    cJSON *arr = cJSON_CreateArray();
    for (int j = 0; j < nrow; j++)
        cJSON_AddItemToArray(arr, cJSON_CreateDoubleArray(v + (size_t)j * ncol, ncol));
    return arr;
}

static int print_json(const slab *s, const slab_args *a, const slab_result *r)
{
    int kdim = slab_kdim(s), ns = slab_nstates(s), M[3][3];
    slab_matrix(s, M);
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "source", a->source);
    cJSON_AddItemToObject(root, "direction", cJSON_CreateIntArray(a->miller, kdim == 2 ? 3 : 2));
    cJSON_AddNumberToObject(root, "layers", a->layers);
    cJSON_AddNumberToObject(root, "states", ns);
    cJSON *basis = cJSON_AddArrayToObject(root, "basis");
    for (int i = 0; i < 3; i++)
        cJSON_AddItemToArray(basis, cJSON_CreateIntArray(M[i], 3));
    cJSON *gap = cJSON_AddObjectToObject(root, "bulk_edges_eV");
    cJSON_AddNumberToObject(gap, "valence_max", r->vbm);
    cJSON_AddNumberToObject(gap, "conduction_min", r->cbm);
    cJSON_AddNumberToObject(root, "fermi_eV", r->fermi);
    cJSON *cr = cJSON_AddObjectToObject(root, "crossings");
    cJSON_AddNumberToObject(cr, "top", r->n_top);
    cJSON_AddNumberToObject(cr, "bottom", r->n_bottom);
    cJSON_AddNumberToObject(cr, "other", r->n_other);
    double kt[8];
    for (int t = 0; t < 4; t++) {
        kt[2 * t] = 0.5 * (t % 2);
        kt[2 * t + 1] = 0.5 * (t / 2);
    }
    cJSON *bt = cJSON_AddArrayToObject(cr, "between");
    for (int i = 0; i < 2; i++)
        cJSON_AddItemToArray(bt, cJSON_CreateDoubleArray(kt + 2 * a->between[i], kdim));
    cJSON_AddItemToObject(root, "surface_dirac_points", dirac_json(r, SS_TOP, kdim));
    cJSON_AddItemToObject(root, "bottom_dirac_points", dirac_json(r, SS_BOTTOM, kdim));
    if (r->ndirac == 0 && r->cbm > r->vbm) cJSON_AddStringToObject(root, "note", THIN_NOTE);
    cJSON *path = cJSON_AddObjectToObject(root, "path");
    cJSON_AddItemToObject(path, "k", rows_json(r->kp, r->nkp, 2));
    cJSON_AddItemToObject(path, "distance", cJSON_CreateDoubleArray(r->xp, r->nkp));
    if (r->E) {
        cJSON_AddItemToObject(path, "energies_eV", rows_json(r->E, r->nkp, ns));
        cJSON_AddItemToObject(path, "weight_top", rows_json(r->wt, r->nkp, ns));
        cJSON_AddItemToObject(path, "weight_bottom", rows_json(r->wb, r->nkp, ns));
    }
    if (r->map) {
        int n2 = kdim == 2 ? a->mesh : 1;
        cJSON *sm = cJSON_AddObjectToObject(root, "spectral_map");
        cJSON_AddNumberToObject(sm, "energy_eV", a->energy);
        cJSON_AddNumberToObject(sm, "eta_eV", a->eta);
        cJSON_AddStringToObject(sm, "side", a->side == SG_TOP ? "top" : "bottom");
        cJSON_AddNumberToObject(sm, "mesh", a->mesh);
        cJSON_AddStringToObject(sm, "grid", "values[i1][i2] at k' = (i1/mesh - 1/2, i2/mesh - 1/2)");
        cJSON_AddItemToObject(sm, "values", rows_json(r->map, a->mesh, n2));
        cJSON_AddItemToObject(path, "spectral_at_energy", cJSON_CreateDoubleArray(r->apath, r->nkp));
    }
    if (r->awin) {
        cJSON *sw = cJSON_AddObjectToObject(root, "spectral_path");
        cJSON_AddItemToObject(sw, "window_eV", cJSON_CreateDoubleArray(a->window, 2));
        cJSON_AddNumberToObject(sw, "energies", r->ne);
        cJSON_AddNumberToObject(sw, "eta_eV", a->eta);
        cJSON_AddItemToObject(sw, "values", rows_json(r->awin, r->nkp, r->ne));
    }
    char *text = cJSON_PrintUnformatted(root);
    int rc = text ? 0 : 1;
    if (text) printf("%s\n", text);
    free(text);
    cJSON_Delete(root);
    return rc;
}

static void print_text(const slab *s, const slab_args *a, const slab_result *r)
{
    int M[3][3];
    slab_matrix(s, M);
    printf("%s: %s %d,%d,%d, %d cells, %d states\n", a->source, slab_kdim(s) == 2 ? "slab" : "ribbon",
           a->miller[0], a->miller[1], a->miller[2], a->layers, slab_nstates(s));
    printf("basis (rows, old reduced): [%d %d %d] [%d %d %d] [%d %d %d]\n", M[0][0], M[0][1], M[0][2],
           M[1][0], M[1][1], M[1][2], M[2][0], M[2][1], M[2][2]);
    printf("bulk valence max %.6f eV, conduction min %.6f eV, Fermi level %.6f eV\n", r->vbm, r->cbm,
           r->fermi);
    printf("crossings between TRIMs %d and %d: top %d, bottom %d, other %d\n", a->between[0], a->between[1],
           r->n_top, r->n_bottom, r->n_other);
    for (int i = 0; i < r->ndirac; i++)
        printf("surface Dirac point (%s): k' = (%.3f, %.3f), E = %.6f eV\n",
               r->dirac[i].side == SS_TOP ? "top" : "bottom", r->dirac[i].k[0], r->dirac[i].k[1],
               r->dirac[i].energy_ev);
    if (r->ndirac == 0 && r->cbm > r->vbm) printf("note: %s\n", THIN_NOTE);
}

/* Tick positions and labels ("k1,k2") at the path's vertices. */
static void path_ticks(const slab *s, const slab_args *a, const slab_result *r, double *xt, char (*lab)[32],
                       const char **labp)
{
    for (int g = 0; g < a->npath; g++) {
        xt[g] = r->xp[g * (a->nk - 1)];
        if (slab_kdim(s) == 2)
            snprintf(lab[g], sizeof lab[g], "%.3g,%.3g", a->path[g][0], a->path[g][1]);
        else
            snprintf(lab[g], sizeof lab[g], "%.3g", a->path[g][0]);
        labp[g] = lab[g];
    }
}

/* The figure (through the plot module): the --window path map, else the --energy map, else the
 * slab bands with the top and bottom weights of every state. */
static int write_figure(const slab *s, const slab_args *a, const slab_result *r, bs_err *err)
{
    char title[256], lab[SLAB_MAX_PATH][32];
    double xt[SLAB_MAX_PATH];
    const char *labp[SLAB_MAX_PATH];
    path_ticks(s, a, r, xt, lab, labp);
    const char *side = a->side == SG_TOP ? "top" : "bottom";
    double x1 = r->xp[r->nkp - 1] > r->xp[0] ? r->xp[r->nkp - 1] : r->xp[0] + 1;
    if (r->awin) {
        snprintf(title, sizeof title, "%s: %s-surface spectral function along the path", a->source, side);
        return fig_heatmap(a->svg, title, "surface path, k' (reduced) at the vertices", "energy (eV)",
                           "A(k,E) (1/eV)", r->nkp, r->ne, r->awin, r->xp[0], x1, a->window[0], a->window[1],
                           1, a->npath, xt, labp, err);
    }
    if (r->map) {
        snprintf(title, sizeof title, "%s: %s-surface spectral function at E = %.3f eV", a->source, side,
                 a->energy);
        int n2 = slab_kdim(s) == 2 ? a->mesh : 1;
        return fig_heatmap(a->svg, title, "k'1 (reduced)", slab_kdim(s) == 2 ? "k'2 (reduced)" : "(ribbon)",
                           "A(k,E) (1/eV)", a->mesh, n2, r->map, -0.5, 0.5, -0.5, 0.5, 1, 0, NULL, NULL, err);
    }
    snprintf(title, sizeof title, "%s: %s %d,%d,%d, %d cells", a->source,
             slab_kdim(s) == 2 ? "slab" : "ribbon", a->miller[0], a->miller[1], a->miller[2], a->layers);
    fig_slab_data d = {r->nkp, slab_nstates(s), r->xp,    r->E,     r->wt, r->wb,
                       r->vbm, r->cbm,          r->fermi, a->npath, xt,    labp};
    return fig_slab_bands(a->svg, title, &d, NULL, err);
}

/* The computed arrays (path, bands and weights, spectral map and path spectra) into an HDF5 file. */
static int write_arrays(const slab *s, const tb_model *m, const slab_args *a, const slab_result *r,
                        bs_err *err)
{
    int ns = slab_nstates(s), n2 = slab_kdim(s) == 2 ? a->mesh : 1;
    ar_array arr[] = {
        {"path_k", r->kp, 2, {r->nkp, 2}, "in-plane reduced k of the path samples"},
        {"path_distance", r->xp, 1, {r->nkp, 0}, "distance along the path (1/Angstrom)"},
        {"bands", r->E, 2, {r->nkp, ns}, "slab energies (eV) per path sample"},
        {"weight_top", r->wt, 2, {r->nkp, ns}, "weight of each state on the top layers"},
        {"weight_bottom", r->wb, 2, {r->nkp, ns}, "weight of each state on the bottom layers"},
        {"spectral_map",
         r->map,
         2,
         {a->mesh, n2},
         "surface spectral function at --energy over the surface zone"},
        {"spectral_path_energy",
         r->apath,
         1,
         {r->nkp, 0},
         "surface spectral function at --energy along the path"},
        {"spectral_path_window",
         r->awin,
         2,
         {r->nkp, r->ne},
         "surface spectral function along the path over --window"},
    };
    return ar_write(a->arrays, m->id, arr, (int)(sizeof arr / sizeof arr[0]), err);
}

int cmd_slab(int argc, char **argv)
{
    slab_args a;
    memset(&a, 0, sizeof a);
    a.nk = 60;
    a.mesh = 60;
    a.eta = 0.01;
    a.side = SG_TOP;
    const char *between = NULL, *path = NULL;
    int status = parse_args(argc, argv, &a, &between, &path);
    if (status != 0) return status < 0 ? 0 : status;
    status = 1;
    tb_model *m = NULL;
    slab *s = NULL;
    slab_result r;
    memset(&r, 0, sizeof r);
    bs_err err;
    bs_err_clear(&err);
    if (src_load(a.source, &m, &err) != 0) {
        fprintf(stderr, "bandsieve slab: %s\n", err.msg);
        goto done;
    }
    if ((status = finish_args(&a, m->dim - 1, between, path)) != 0) goto done;
    status = 1;
    if (slab_create(m, a.miller, a.layers, a.cut, &s, &err) != 0 || analyse(s, m, &a, &r, &err) != 0 ||
        (a.svg && write_figure(s, &a, &r, &err) != 0)) {
        fprintf(stderr, "bandsieve slab: %s: %s\n", m->id, err.msg);
        goto done;
    }
    if (a.arrays && write_arrays(s, m, &a, &r, &err) != 0) {
        fprintf(stderr, "bandsieve slab: %s: %s\n", m->id, err.msg);
        goto done;
    }
    if (a.json)
        status = print_json(s, &a, &r);
    else {
        print_text(s, &a, &r);
        status = 0;
    }
done:
    result_clear(&r);
    slab_free(s);
    tb_model_free(m);
    return status;
}
