/* `bandsieve inspect`: the full diagnosis of one material, as a readable report or as JSON. */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>

#include <cjson/cJSON.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/diagnosis.h"
#include "bandsieve/source.h"
#include "bandsieve/transport.h"
#include "cliutil.h"
#include "commands.h"

static void inspect_help(FILE *out)
{
    fprintf(out,
            "usage: bandsieve inspect SOURCE [--json] [--mesh N] [--max-seconds S] [--flows] [--transport]\n\n"
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
            "  --transport      add the intrinsic anomalous Hall (\"ahc\") and, for spinful models,\n"
            "                   spin Hall (\"shc\") conductivities from the Berry curvature\n"
            "  --fermi E        Fermi energy for --transport (eV; default: card value, mid-gap,\n"
            "                   or the filling for a metal)\n"
            "  --scan LO,HI,N   also N Fermi energies from E+LO to E+HI (eV) in the same pass\n"
            "  --eta W          broadening of the energy denominators (eV, default 0)\n"
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
    const cJSON *ahc = cJSON_GetObjectItem(j, "ahc"), *shc = cJSON_GetObjectItem(j, "shc");
    if (ahc) {
        printf("  anomalous Hall        xy %.6g", cJSON_GetNumberValue(cJSON_GetObjectItem(ahc, "xy")));
        if (cJSON_GetObjectItem(ahc, "yz"))
            printf(", yz %.6g, zx %.6g", cJSON_GetNumberValue(cJSON_GetObjectItem(ahc, "yz")),
                   cJSON_GetNumberValue(cJSON_GetObjectItem(ahc, "zx")));
        printf(" %s (error %.2g) at E_F = %.4f eV\n", cJSON_GetStringValue(cJSON_GetObjectItem(ahc, "units")),
               cJSON_GetNumberValue(cJSON_GetObjectItem(ahc, "error")), cJSON_GetNumberValue(cJSON_GetObjectItem(ahc, "fermi_eV")));
    }
    if (shc)
        printf("  spin Hall (s_z, xy)   %.6g %s (error %.2g)\n", cJSON_GetNumberValue(cJSON_GetObjectItem(shc, "xy_z")),
               cJSON_GetStringValue(cJSON_GetObjectItem(shc, "units")), cJSON_GetNumberValue(cJSON_GetObjectItem(shc, "error")));
    if (r->nodal_line)
        printf("  nodal line            %d points, extent %.3f (reduced)\n", r->nodal_points, r->nodal_extent);
    printf("  mesh %d, %lld k-points, %.2f s\n", r->mesh, r->nk_evaluated, r->seconds);
}

int cmd_inspect(int argc, char **argv)
{
    static const struct option longopts[] = {
        {"json", no_argument, NULL, 'j'}, {"mesh", required_argument, NULL, 'm'},
        {"max-seconds", required_argument, NULL, 't'}, {"flows", no_argument, NULL, 'f'},
        {"seed", required_argument, NULL, 's'}, {"symmetry-tol", required_argument, NULL, 'y'},
        {"transport", no_argument, NULL, 'a'}, {"fermi", required_argument, NULL, 'e'},
        {"scan", required_argument, NULL, 'n'}, {"eta", required_argument, NULL, 'E'},
        {"help", no_argument, NULL, 'h'}, {NULL, 0, NULL, 0}};
    int json = 0, transport = 0, c;
    tr_opts topts;
    tr_opts_default(&topts);
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
        case 'a': transport = 1; break;
        case 'e':
            if (cli_parse_double(optarg, &d)) { fprintf(stderr, "bandsieve inspect: --fermi expects a number (eV), got '%s'\n", optarg); return 2; }
            topts.has_fermi = 1;
            topts.fermi_ev = d;
            break;
        case 'E':
            if (cli_parse_double(optarg, &d) || d < 0) { fprintf(stderr, "bandsieve inspect: --eta expects a non-negative number (eV), got '%s'\n", optarg); return 2; }
            topts.eta_ev = d;
            break;
        case 'n': {
            double v3[3];
            if (cli_parse_vec3(optarg, v3) || v3[2] < 2 || v3[2] > TR_MAX_FERMI - 1 || v3[2] != (int)v3[2] || v3[1] <= v3[0]) {
                fprintf(stderr, "bandsieve inspect: --scan expects LO,HI,N (eV offsets from the Fermi energy, 2 <= N <= %d), got '%s'\n", TR_MAX_FERMI - 1, optarg);
                return 2;
            }
            topts.scan_lo_ev = v3[0];
            topts.scan_hi_ev = v3[1];
            topts.nscan = (int)v3[2];
            break;
        }
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
    if (!transport && (topts.has_fermi || topts.nscan > 0 || topts.eta_ev > 0)) {
        fprintf(stderr, "bandsieve inspect: --fermi, --scan and --eta apply to --transport only\n");
        return 2;
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
        if (transport) {
            tr_result tr;
            if (opts.max_seconds > 0) topts.deadline = bp_now() + opts.max_seconds;
            if (tr_compute(m, &topts, &tr, &err) != 0) {
                fprintf(stderr, "bandsieve inspect: %s: transport: %s (%s)\n", m->id, err.msg, bs_err_name(err.code));
                status = 1;
            } else {
                diag_attach_transport(j, tr_to_json(&tr));
            }
        }
        if (status == 0 && json) {
            char *text = cJSON_PrintUnformatted(j);
            if (text) printf("%s\n", text);
            else status = 1;
            free(text);
        } else if (status == 0) {
            print_report(&r, j);
        }
        cJSON_Delete(j);
    }
    diag_result_clear(&r);
    tb_model_free(m);
    return status;
}
