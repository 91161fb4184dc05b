/* `bandsieve inspect`: the full diagnosis of one material, as a readable report or as JSON. */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>

#include <cjson/cJSON.h>

#include "bandsieve/diagnosis.h"
#include "bandsieve/source.h"
#include "cliutil.h"
#include "commands.h"

static void inspect_help(FILE *out)
{
    fprintf(out,
            "usage: bandsieve inspect SOURCE [--json] [--mesh N] [--max-seconds S] [--flows] [--seed S]\n\n"
            "Diagnoses one material: gaps, time reversal and inversion, Z2 from parities and from\n"
            "the Wannier-centre flow, Chern numbers, Weyl nodes and nodal lines, and a class with a\n"
            "confidence and a one-line reason.\n"
            "SOURCE is a card (path.json), SET.h5:ID, or model:NAME[:key=val,...] (bandsieve models).\n\n"
            "  --json           one JSON object on stdout (keys documented in the README)\n"
            "  --mesh N         coarse k-mesh per direction for the gap and node search\n"
            "                   (default 36 in 2D, 14 in 3D); Wilson strings and Chern meshes start at N\n"
            "  --max-seconds S  give up after S seconds (exit 1, status timeout)\n"
            "  --flows          include the Wannier-centre flows in the JSON (key wcc_flows)\n"
            "  --seed S         seed of the random verification k-points (default 1)\n"
            "  --symmetry-tol T relative residual accepted when verifying time reversal and\n"
            "                   inversion on H(k) (default 1e-6; ~1e-3 for unsymmetrised fits)\n"
            "  -h, --help       this text\n");
}

static void print_indices(const char *label, const cJSON *list)
{
    printf("  %-22s", label);
    if (!cJSON_IsArray(list)) { printf("-\n"); return; }
    int n = cJSON_GetArraySize(list);
    for (int i = 0; i < n; i++) printf(i == 1 ? ";%d" : "%d", cJSON_GetArrayItem(list, i)->valueint);
    printf("\n");
}

static void print_report(const diag_result *r, const cJSON *j)
{
    printf("%s  (%dD, %d states, %d occupied)\n", r->id, r->dim, r->norb, r->nocc);
    printf("  class                 %s   (confidence %.2f)\n", r->cls, r->confidence);
    printf("  why                   %s\n", r->reason);
    printf("  direct gap            %.6f eV at k = (%.4f, %.4f, %.4f)\n", r->gap_direct_ev,
           r->k_gap_direct[0], r->k_gap_direct[1], r->k_gap_direct[2]);
    printf("  indirect gap          %.6f eV\n", r->gap_indirect_ev);
    printf("  time reversal         %s (residual %.2g)\n", r->time_reversal ? "yes" : "no", r->tr_residual);
    printf("  inversion             %s (residual %.2g)\n", r->inversion ? "yes" : "no", r->inv_residual);
    print_indices("Z2", cJSON_GetObjectItem(j, "z2"));
    print_indices("Z2 from parities", cJSON_GetObjectItem(j, "z2_parity"));
    print_indices("Z2 from WCC flow", cJSON_GetObjectItem(j, "z2_wcc"));
    if (r->z2_note[0]) printf("  Z2 note               %s\n", r->z2_note);
    if (r->ntrim > 0) {
        printf("  parity products       ");
        for (int t = 0; t < r->ntrim; t++) printf("%c", r->par_delta[t] > 0 ? '+' : '-');
        printf("   (TRIM n1 + 2 n2 + 4 n3 order)\n");
    }
    const cJSON *ch = cJSON_GetObjectItem(j, "chern");
    if (cJSON_IsNumber(ch)) printf("  Chern number          %d\n", ch->valueint);
    const cJSON *pc = cJSON_GetObjectItem(j, "plane_chern");
    if (cJSON_IsArray(pc)) {
        printf("  plane Chern numbers   ");
        for (int p = 0; p < 6; p++) printf("%d ", cJSON_GetArrayItem(pc, p)->valueint);
        printf(" (k1=0, k1=1/2, k2=0, k2=1/2, k3=0, k3=1/2)\n");
    }
    if (r->nnodes > 0) {
        printf("  %s %d (net chirality %d)\n", r->dim == 3 ? "Weyl nodes           " : "2D gap closings      ",
               r->nnodes, r->net_chirality);
        for (int i = 0; i < r->nnodes; i++)
            printf("      k = (%+.6f, %+.6f, %+.6f)  chirality %+d  E = %.4f eV\n", r->nodes[i].k[0],
                   r->nodes[i].k[1], r->nodes[i].k[2], r->nodes[i].chirality, r->nodes[i].energy_ev);
    }
    if (r->nodal_line)
        printf("  nodal line            %d points, extent %.3f (reduced)\n", r->nodal_points, r->nodal_extent);
    printf("  mesh %d, %lld k-points, %.2f s\n", r->mesh, r->nk_evaluated, r->seconds);
}

int cmd_inspect(int argc, char **argv)
{
    static const struct option longopts[] = {
        {"json", no_argument, NULL, 'j'}, {"mesh", required_argument, NULL, 'm'},
        {"max-seconds", required_argument, NULL, 't'}, {"flows", no_argument, NULL, 'f'},
        {"seed", required_argument, NULL, 's'}, {"symmetry-tol", required_argument, NULL, 'y'}, {"help", no_argument, NULL, 'h'}, {NULL, 0, NULL, 0}};
    int json = 0, c;
    diag_opts opts = {0};
    opts.seed = 1;
    optind = 1;
    while ((c = getopt_long(argc, argv, "h", longopts, NULL)) != -1) {
        long v;
        double d;
        switch (c) {
        case 'h': inspect_help(stdout); return 0;
        case 'j': json = 1; break;
        case 'f': opts.want_flows = 1; break;
        case 'm':
            if (cli_parse_int(optarg, 4, 4096, &v)) { fprintf(stderr, "bandsieve inspect: --mesh expects an integer 4..4096, got '%s'\n", optarg); return 2; }
            opts.mesh = (int)v;
            break;
        case 't':
            if (cli_parse_double(optarg, &d) || d <= 0) { fprintf(stderr, "bandsieve inspect: --max-seconds expects a positive number, got '%s'\n", optarg); return 2; }
            opts.max_seconds = d;
            break;
        case 'y':
            if (cli_parse_double(optarg, &d) || d <= 0 || d >= 1) { fprintf(stderr, "bandsieve inspect: --symmetry-tol expects a number in (0,1), got '%s'\n", optarg); return 2; }
            opts.symmetry_tol = d;
            break;
        case 's':
            if (cli_parse_int(optarg, 1, 1L << 30, &v)) { fprintf(stderr, "bandsieve inspect: --seed expects a positive integer, got '%s'\n", optarg); return 2; }
            opts.seed = (unsigned long long)v;
            break;
        default: inspect_help(stderr); return 2;
        }
    }
    if (optind != argc - 1) {
        fprintf(stderr, "bandsieve inspect: need exactly one SOURCE\n");
        inspect_help(stderr);
        return 2;
    }
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    if (src_load(argv[optind], &m, &err) != 0) {
        fprintf(stderr, "bandsieve inspect: %s\n", err.msg);
        return 1;
    }
    diag_result r;
    diag_result_init(&r);
    int rc = diag_run(m, &opts, &r, &err);
    int status = 0;
    if (rc != 0) {
        fprintf(stderr, "bandsieve inspect: %s: %s (%s)\n", m->id, err.msg, bs_err_name(rc));
        status = 1;
    } else {
        cJSON *j = diag_to_json(&r, opts.want_flows);
        if (json) {
            char *text = cJSON_PrintUnformatted(j);
            if (text) printf("%s\n", text);
            else status = 1;
            free(text);
        } else {
            print_report(&r, j);
        }
        cJSON_Delete(j);
    }
    diag_result_clear(&r);
    tb_model_free(m);
    return status;
}
