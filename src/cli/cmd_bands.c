/* `bandsieve bands`: band energies of one material at the reduced k-points given. */
#include <getopt.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "bandsieve/eig.h"
#include "bandsieve/hk.h"
#include "bandsieve/source.h"
#include "cliutil.h"
#include "commands.h"

/* Largest accepted magnitude of a reduced k component (see the check in cmd_bands). */
#define BANDS_MAX_K 1.0e6

static void bands_help(FILE *out)
{
    fprintf(out,
            "usage: bandsieve bands SOURCE --k k1,k2,k3 [--k ...] [--json]\n\n"
            "Prints the band energies (eV, ascending) of SOURCE at each reduced k-point\n"
            "(fractions of the reciprocal lattice vectors; in 2D the third is ignored).\n"
            "SOURCE is a card (path.json), SET.h5:ID, or model:NAME[:key=val,...].\n\n"
            "  --k K       a k-point, repeatable (at least one)\n"
            "  --json      print {\"k\": [[...]], \"energies_eV\": [[...]]}\n"
            "  -h, --help  this text\n");
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
        for (int b = 0; b < norb; b++) printf(" %.8f", E[(size_t)j * norb + b]);
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

int cmd_bands(int argc, char **argv)
{
    static const struct option longopts[] = {
        {"k", required_argument, NULL, 'k'}, {"json", no_argument, NULL, 'j'},
        {"help", no_argument, NULL, 'h'}, {NULL, 0, NULL, 0}};
    int json = 0, nk = 0, cap = 0, status = 1;
    double *k = NULL, *E = NULL;
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "h", longopts, NULL)) != -1) {
        if (c == 'h') { bands_help(stdout); status = 0; goto done; }
        if (c == 'j') { json = 1; continue; }
        if (c != 'k') { bands_help(stderr); status = 2; goto done; }
        if (nk == cap) {
            cap = cap ? 2 * cap : 16;
            double *p = realloc(k, 3 * (size_t)cap * sizeof *k);
            if (!p) { fprintf(stderr, "bandsieve bands: out of memory\n"); goto done; }
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
                fprintf(stderr, "bandsieve bands: --k %s: component %d is outside +-%g (reduced coordinates "
                                "repeat with period 1)\n", optarg, d + 1, BANDS_MAX_K);
                status = 2;
                goto done;
            }
        nk++;
    }
    if (optind != argc - 1 || nk == 0) {
        fprintf(stderr, "bandsieve bands: need one SOURCE and at least one --k\n");
        bands_help(stderr);
        status = 2;
        goto done;
    }
    if (src_load(argv[optind], &m, &err) != 0) {
        fprintf(stderr, "bandsieve bands: %s\n", err.msg);
        goto done;
    }
    E = malloc((size_t)nk * m->norb * sizeof *E);
    if (!E) { fprintf(stderr, "bandsieve bands: out of memory\n"); goto done; }
    if (compute_bands(m, nk, k, E, &err) != 0) {
        fprintf(stderr, "bandsieve bands: %s: %s\n", m->id, err.msg);
        goto done;
    }
    if (json) status = print_json(nk, k, m->norb, E);
    else { print_table(nk, k, m->norb, E); status = 0; }
done:
    free(k);
    free(E);
    tb_model_free(m);
    return status;
}
