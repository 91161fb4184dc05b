/* `bandsieve bands`: band energies of one material at the reduced k-points given, or along a
 * labelled path (the lattice's standard path or the user's) with the gap and Fermi level marked. */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "bandsieve/eig.h"
#include "bandsieve/hk.h"
#include "bandsieve/source.h"
#include "bandpath.h"
#include "cliutil.h"
#include "commands.h"

/* Largest accepted magnitude of a reduced k component (see the check in cmd_bands). */
#define BANDS_MAX_K 1.0e6

static void bands_help(FILE *out)
{
    fprintf(out, "usage: bandsieve bands SOURCE --k k1,k2,k3 [--k ...] [--json]\n"
                 "       bandsieve bands SOURCE --path auto|\"LABEL:k1,k2,k3 ...\" [--points N] [--fermi E] "
                 "[--json]\n\n"
                 "Prints the band energies (eV, ascending) of SOURCE at each reduced k-point\n"
                 "(fractions of the reciprocal lattice vectors; in 2D the third is ignored).\n"
                 "SOURCE is a card (path.json), SET.h5:ID, or model:NAME[:key=val,...].\n\n"
                 "  --k K        a k-point, repeatable\n"
                 "  --path P     a band path instead: 'auto' is the standard path of the lattice\n"
                 "               (Comput. Mater. Sci. 49, 299 (2010); CUB FCC BCC TET ORC HEX, 2D square,\n"
                 "               rectangular, hexagonal), or labelled points 'G:0,0,0 X:1/2,0,1/2 | U:...'\n"
                 "               ('|' jumps; fractions allowed). The output labels the path points and\n"
                 "               marks the band edges at the filling and the Fermi level\n"
                 "  --points N   samples along the path (default 200)\n"
                 "  --fermi E    Fermi level in eV (default: the card's, else mid-gap on the path)\n"
                 "  --json       print {\"k\": [[...]], \"energies_eV\": [[...]]}; with --path also\n"
                 "               \"x\", \"labels\", \"path\", \"path_points\", \"lattice_type\",\n"
                 "               \"reciprocal_vectors\" (rows, 1/A), \"gap\", \"fermi_eV\"\n"
                 "  -h, --help   this text\n");
}

static int print_json(int nk, const double *k, int norb, const double *E)
{
    cJSON *root = cJSON_CreateObject();
    cJSON *ks = cJSON_AddArrayToObject(root, "k");
    cJSON *es = cJSON_AddArrayToObject(root, "energies_eV");
    for (int j = 0; j < nk; j++) {
        cJSON_AddItemToArray(ks, cJSON_CreateDoubleArray(k + 3 * j, 3));
        cJSON_AddItemToArray(es, cJSON_CreateDoubleArray(E + (size_t)j * norb, norb));
    }
    char *text = cJSON_PrintUnformatted(root);
    int rc = text ? 0 : 1;
    if (text) printf("%s\n", text);
    free(text);
    cJSON_Delete(root);
    return rc;
}

static void print_table(int nk, const double *k, int norb, const double *E)
{
    printf("# k1 k2 k3 | %d band energies (eV)\n", norb);
    for (int j = 0; j < nk; j++) {
        printf("%.6f %.6f %.6f |", k[3 * j], k[3 * j + 1], k[3 * j + 2]);
        for (int b = 0; b < norb; b++)
            printf(" %.8f", E[(size_t)j * norb + b]);
        printf("\n");
    }
}

/* Builds and diagonalises H(k) at nk points, one batch at a time; E receives nk*norb values. */
static int compute_bands(const tb_model *m, int nk, const double *k, double *E, bs_err *err)
{
    const int batch = 64;
    hk_engine *hk = NULL;
    eig_ws *ws = NULL;
    double complex *H = NULL;
    int rc = hk_create(m, batch, &hk, err);
    if (rc == 0) rc = eig_create(m->norb, &ws, err);
    size_t nn = (size_t)m->norb * m->norb;
    if (rc == 0 && !(H = malloc(batch * nn * sizeof *H))) rc = bs_fail(err, BS_ENOMEM, "out of memory");
    for (int j0 = 0; rc == 0 && j0 < nk; j0 += batch) {
        int nb = nk - j0 < batch ? nk - j0 : batch;
        rc = hk_build(hk, nb, k + 3 * j0, H, err);
        for (int j = 0; rc == 0 && j < nb; j++)
            rc = eig_values(ws, H + j * nn, E + (size_t)(j0 + j) * m->norb, err);
    }
    free(H);
    eig_free(ws);
    hk_free(hk);
    return rc;
}

static cJSON *k_json(const band_path *bp, int i)
{
    return cJSON_CreateDoubleArray(bp->s.k + 3 * i, 3);
}

static cJSON *edge_json(const band_path *bp, int i, double e)
{
    char lab[KPATH_LABEL_LEN];
    cJSON *o = cJSON_CreateObject();
    band_path_label(bp, i, lab, sizeof lab);
    cJSON_AddNumberToObject(o, "energy_eV", e);
    cJSON_AddItemToObject(o, "k", k_json(bp, i));
    cJSON_AddNumberToObject(o, "x", bp->s.x[i]);
    cJSON_AddStringToObject(o, "label", lab);
    return o;
}

static int print_path_json(const tb_model *m, const band_path *bp)
{
    char desc[512];
    kpath_describe(&bp->path, desc, sizeof desc);
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "id", m->id);
    cJSON_AddStringToObject(root, "lattice_type", bp->path.lattice);
    cJSON_AddStringToObject(root, "path", desc);
    double b[3][3];
    tb_model_reciprocal(m, b);
    cJSON *rv = cJSON_AddArrayToObject(root, "reciprocal_vectors");
    for (int i = 0; i < 3; i++)
        cJSON_AddItemToArray(rv, cJSON_CreateDoubleArray(b[i], 3));
    cJSON *pts = cJSON_AddArrayToObject(root, "path_points");
    for (int v = 0; v < bp->path.npoint; v++) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "label", bp->path.point[v].label);
        cJSON_AddItemToObject(o, "k", cJSON_CreateDoubleArray(bp->path.point[v].k, 3));
        cJSON_AddNumberToObject(o, "x", bp->s.vertex_x[v]);
        cJSON_AddBoolToObject(o, "jump", bp->path.point[v].jump);
        cJSON_AddItemToArray(pts, o);
    }
    cJSON_AddNumberToObject(root, "occupied_bands", bp->nocc);
    cJSON *ks = cJSON_AddArrayToObject(root, "k"), *xs = cJSON_AddArrayToObject(root, "x");
    cJSON *ls = cJSON_AddArrayToObject(root, "labels"), *es = cJSON_AddArrayToObject(root, "energies_eV");
    for (int i = 0; i < bp->s.nk; i++) {
        char lab[KPATH_LABEL_LEN];
        band_path_label(bp, i, lab, sizeof lab);
        cJSON_AddItemToArray(ks, k_json(bp, i));
        cJSON_AddItemToArray(xs, cJSON_CreateNumber(bp->s.x[i]));
        cJSON_AddItemToArray(ls, cJSON_CreateString(lab));
        cJSON_AddItemToArray(es, cJSON_CreateDoubleArray(bp->E + (size_t)i * bp->norb, bp->norb));
    }
    cJSON *gap = cJSON_AddObjectToObject(root, "gap");
    cJSON_AddBoolToObject(gap, "gapped_on_path", bp->gapped);
    cJSON_AddNumberToObject(gap, "indirect_eV", bp->cbm_ev - bp->vbm_ev);
    cJSON_AddItemToObject(gap, "vbm", edge_json(bp, bp->i_vbm, bp->vbm_ev));
    cJSON_AddItemToObject(gap, "cbm", edge_json(bp, bp->i_cbm, bp->cbm_ev));
    cJSON_AddItemToObject(gap, "direct", edge_json(bp, bp->i_direct, bp->direct_ev));
    if (bp->has_fermi) {
        cJSON_AddNumberToObject(root, "fermi_eV", bp->fermi_ev);
        cJSON_AddStringToObject(root, "fermi_source", bp->fermi_source);
    } else {
        cJSON_AddNullToObject(root, "fermi_eV");
        cJSON_AddNullToObject(root, "fermi_source");
    }
    char *text = cJSON_PrintUnformatted(root);
    int rc = text ? 0 : 1;
    if (text) printf("%s\n", text);
    free(text);
    cJSON_Delete(root);
    return rc;
}

static void print_path_table(const tb_model *m, const band_path *bp)
{
    char desc[512], lv[KPATH_LABEL_LEN], lc[KPATH_LABEL_LEN];
    kpath_describe(&bp->path, desc, sizeof desc);
    band_path_label(bp, bp->i_vbm, lv, sizeof lv);
    band_path_label(bp, bp->i_cbm, lc, sizeof lc);
    printf("# %s: path %s (%s%s), %d points; %d occupied bands\n", m->id, desc, bp->path.lattice,
           strcmp(bp->path.lattice, "user") ? ", Comput. Mater. Sci. 49, 299 (2010)" : "", bp->s.nk,
           bp->nocc);
    if (bp->gapped)
        printf(
            "# gap on the path: %.6f eV indirect (VBM %.6f eV at x = %.4f %s, CBM %.6f eV at x = %.4f %s), "
            "%.6f eV direct at x = %.4f\n",
            bp->cbm_ev - bp->vbm_ev, bp->vbm_ev, bp->s.x[bp->i_vbm], lv, bp->cbm_ev, bp->s.x[bp->i_cbm], lc,
            bp->direct_ev, bp->s.x[bp->i_direct]);
    else
        printf(
            "# no gap at the filling on the path: band %d reaches %.6f eV, band %d comes down to %.6f eV\n",
            bp->nocc, bp->vbm_ev, bp->nocc + 1, bp->cbm_ev);
    if (bp->has_fermi)
        printf("# Fermi level %.6f eV (%s)\n", bp->fermi_ev, bp->fermi_source);
    else
        printf("# Fermi level: not determined (no gap on the path and none on the card; give --fermi)\n");
    printf("# label x(1/A) k1 k2 k3 | %d band energies (eV); '|' separates occupied from empty | mark\n",
           bp->norb);
    for (int i = 0; i < bp->s.nk; i++) {
        char lab[KPATH_LABEL_LEN];
        band_path_label(bp, i, lab, sizeof lab);
        const double *k = bp->s.k + 3 * i;
        printf("%-4s %.6f %.6f %.6f %.6f |", lab[0] ? lab : "-", bp->s.x[i], k[0], k[1], k[2]);
        for (int b = 0; b < bp->norb; b++)
            printf("%s %.8f", b == bp->nocc ? " |" : "", bp->E[(size_t)i * bp->norb + b]);
        printf(" |%s%s%s\n", i == bp->i_vbm ? " VBM" : "", i == bp->i_cbm ? " CBM" : "",
               i == bp->i_direct ? " direct-gap" : "");
    }
}

static int run_path(const char *source, const char *spec, int npoints, const double *fermi, int json)
{
    tb_model *m = NULL;
    band_path bp;
    bs_err err;
    bs_err_clear(&err);
    memset(&bp, 0, sizeof bp);
    int status = 1;
    if (src_load(source, &m, &err) != 0) {
        fprintf(stderr, "bandsieve bands: %s\n", err.msg);
        goto done;
    }
    if (band_path_compute(m, spec, npoints, NULL, fermi, &bp, &err) != 0) {
        fprintf(stderr, "bandsieve bands: %s: %s\n", m->id, err.msg);
        status = err.code == BS_EPARSE || err.code == BS_EUSAGE ? 2 : 1;
        goto done;
    }
    if (json)
        status = print_path_json(m, &bp);
    else {
        print_path_table(m, &bp);
        status = 0;
    }
done:
    band_path_clear(&bp);
    tb_model_free(m);
    return status;
}

int cmd_bands(int argc, char **argv)
{
    static const struct option longopts[] = {{"k", required_argument, NULL, 'k'},
                                             {"json", no_argument, NULL, 'j'},
                                             {"path", required_argument, NULL, 'p'},
                                             {"points", required_argument, NULL, 'n'},
                                             {"fermi", required_argument, NULL, 'f'},
                                             {"help", no_argument, NULL, 'h'},
                                             {NULL, 0, NULL, 0}};
    int json = 0, nk = 0, cap = 0, status = 1, has_fermi = 0;
    long npoints = 200;
    double fermi = 0;
    const char *path = NULL;
    double *k = NULL, *E = NULL;
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "h", longopts, NULL)) != -1) {
        if (c == 'h') {
            bands_help(stdout);
            status = 0;
            goto done;
        }
        if (c == 'j') {
            json = 1;
            continue;
        }
        if (c == 'p') {
            path = optarg;
            continue;
        }
        if (c == 'n' && cli_parse_int(optarg, 2, 1000000, &npoints) == 0) continue;
        if (c == 'f' && cli_parse_double(optarg, &fermi) == 0) {
            has_fermi = 1;
            continue;
        }
        if (c == 'n' || c == 'f') {
            fprintf(stderr, "bandsieve bands: --%s: bad value '%s'\n", c == 'n' ? "points" : "fermi", optarg);
            status = 2;
            goto done;
        }
        if (c != 'k') {
            bands_help(stderr);
            status = 2;
            goto done;
        }
        if (nk == cap) {
            cap = cap ? 2 * cap : 16;
            double *p = realloc(k, 3 * (size_t)cap * sizeof *k);
            if (!p) {
                fprintf(stderr, "bandsieve bands: out of memory\n");
                goto done;
            }
            k = p;
        }
        if (cli_parse_vec3(optarg, k + 3 * nk) != 0) {
            fprintf(stderr, "bandsieve bands: --k expects k1,k2[,k3] numbers, got '%s'\n", optarg);
            status = 2;
            goto done;
        }
        /* Reduced coordinates repeat with period 1; past BANDS_MAX_K the phase 2 pi k.R keeps
         * fewer than ten correct digits (doubles hold 16), and at 1e308 it is not even finite. */
        for (int d = 0; d < 3; d++)
            if (fabs(k[3 * nk + d]) > BANDS_MAX_K) {
                fprintf(stderr,
                        "bandsieve bands: --k %s: component %d is outside +-%g (reduced coordinates "
                        "repeat with period 1)\n",
                        optarg, d + 1, BANDS_MAX_K);
                status = 2;
                goto done;
            }
        nk++;
    }
    if (optind == argc - 1 && path && nk == 0) {
        status = run_path(argv[optind], path, (int)npoints, has_fermi ? &fermi : NULL, json);
        goto done;
    }
    if (optind != argc - 1 || nk == 0 || path) {
        fprintf(stderr, "bandsieve bands: need one SOURCE and either --k points or one --path\n");
        bands_help(stderr);
        status = 2;
        goto done;
    }
    if (src_load(argv[optind], &m, &err) != 0) {
        fprintf(stderr, "bandsieve bands: %s\n", err.msg);
        goto done;
    }
    E = malloc((size_t)nk * m->norb * sizeof *E);
    if (!E) {
        fprintf(stderr, "bandsieve bands: out of memory\n");
        goto done;
    }
    if (compute_bands(m, nk, k, E, &err) != 0) {
        fprintf(stderr, "bandsieve bands: %s: %s\n", m->id, err.msg);
        goto done;
    }
    if (json)
        status = print_json(nk, k, m->norb, E);
    else {
        print_table(nk, k, m->norb, E);
        status = 0;
    }
done:
    free(k);
    free(E);
    tb_model_free(m);
    return status;
}
