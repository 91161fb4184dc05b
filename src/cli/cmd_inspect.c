/* `bandsieve inspect`: the full diagnosis of one material, as a readable report or as JSON. */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/config.h"
#include "bandsieve/pipeline.h"
#include "bandsieve/result_json.h"
#include "bandsieve/source.h"
#include "cliutil.h"
#include "commands.h"

static void inspect_help(FILE *out)
{
    fprintf(out,
            "usage: bandsieve inspect SOURCE [--json] [--mesh N] [--max-seconds S] [--flows] [--transport]\n"
            "                         [--surfaces] [--magnetism M] [--position-tol A] [--symmetry-tol T] "
            "[--seed S] [--verify]\n\n"
            "Diagnoses one material: gaps, time reversal and inversion, Z2 from parities and from\n"
            "the Wannier-centre flow, Chern numbers, Weyl nodes and nodal lines, and a class with a\n"
            "confidence and a one-line reason.\n"
            "SOURCE is a card (path.json), SET.h5:ID, or model:NAME[:key=val,...] (bandsieve models).\n\n"
            "  --json           one JSON object on stdout (keys documented in the README)\n"
            "  --mesh N         coarse k-mesh per direction for the gap and node search\n"
            "                   (default 36 in 2D, 14 in 3D); Wilson strings and Chern meshes start at N\n"
            "  --max-seconds S  give up after S seconds (exit 1, status timeout)\n"
            "  --flows          include the Wannier-centre flows in the JSON (key wcc_flows)\n"
            "  --verify         compute every method: also the Wannier-centre cross-check that\n"
            "                   decisive parities make optional for 3D materials of 16 or more\n"
            "                   states (JSON keys evidence, evidence_skipped)\n"
            "  --seed S         seed of the random verification k-points (default 1)\n"
            "  --symmetry-tol T relative residual under which time reversal and inversion are exact\n"
            "                   (default 1e-6); larger breakings are measured in eV against the gap:\n"
            "                   approximate ones are restored by averaging, broken ones are not\n"
            "  --magnetism M    none | magnetic | unknown: overrides the card's \"magnetism\" (none:\n"
            "                   time reversal holds, its breaking is fit error; magnetic: no Z2)\n"
            "  --position-tol A Angstrom tolerance of the inversion map from orbital centres\n"
            "                   (default 0.05)\n"
            "  --transport      add the intrinsic anomalous Hall (\"ahc\") and, for spinful models,\n"
            "                   spin Hall (\"shc\") conductivities from the Berry curvature\n"
            "  --fermi E        Fermi energy for --transport (eV; default: card value, mid-gap,\n"
            "                   or the filling for a metal)\n"
            "  --scan LO,HI,N   also N Fermi energies from E+LO to E+HI (eV) in the same pass\n"
            "  --eta W          broadening of the energy denominators (eV, default 0)\n"
            "  --surfaces       for classes that promise surface or edge states, the Fermi-level\n"
            "                   crossings of surface states on a default plane (key surface),\n"
            "                   as screen --surfaces stores them\n"
            "  -h, --help       this text\n");
}

/* An index list as written in papers: "1" in 2D, "1;111" in 3D; "-" when its method was not done. */
static void print_indices(const char *label, res_status status, const int *v, int dim)
{
    printf("  %-22s", label);
    if (status != RES_DONE) {
        printf("-\n");
        return;
    }
    for (int i = 0; i < (dim == 2 ? 1 : 4); i++)
        printf(i == 1 ? ";%d" : "%d", v[i]);
    printf("\n");
}

static void print_transport(const res_transport *t)
{
    double err = 0;
    for (int a = 0; a < (t->dim == 3 ? 3 : 1); a++)
        if (t->ahc_err[0][a] > err) err = t->ahc_err[0][a];
    printf("  anomalous Hall        xy %.6g", t->ahc[0][0]);
    if (t->dim == 3) printf(", yz %.6g, zx %.6g", t->ahc[0][1], t->ahc[0][2]);
    printf(" %s (error %.2g) at E_F = %.4f eV\n", t->ahc_units, err, t->fermi_ev[0]);
    if (t->has_shc)
        printf("  spin Hall (s_z, xy)   %.6g %s (error %.2g)\n", t->shc[0], t->shc_units, t->shc_err[0]);
}

static void print_surface(const res_surface *s)
{
    /* A 2D material's slab is a ribbon: its surfaces are edges. */
    printf("  %s (%d %d", s->kdim == 1 ? "edge" : "surface", s->miller[0], s->miller[1]);
    if (s->kdim == 2) printf(" %d", s->miller[2]);
    printf("), %d %s: crossings at E = %.4f eV top %d, bottom %d, other %d; %d Dirac points in the gap\n",
           s->layers, s->kdim == 1 ? "cells wide" : "layers", s->fermi_ev, s->n_top, s->n_bottom, s->n_other,
           s->ndirac_top);
    static const char *const status[3] = {"unchecked", "consistent", "inconclusive"};
    if (s->reason[0]) printf("  surface check         %s: %s\n", status[s->status], s->reason);
}

/* One symmetry: its verdict, the breaking bounds when measured, the relative residual. */
static void print_symmetry(const char *name, res_verdict verdict, double upper, double lower, double residual,
                           int restored)
{
    printf("  %-22s%s", name, res_verdict_name(verdict));
    if (verdict == RES_SYM_APPROX || verdict == RES_SYM_BROKEN)
        printf(": breaking <= %.3g eV (>= %.3g eV on the mesh), residual %.2g%s", upper, lower, residual,
               restored ? "; restored" : "");
    else if (verdict == RES_SYM_EXACT)
        printf(" (residual %.2g)", residual);
    printf("\n");
}

static void print_report(const res_diag *r)
{
    printf("%s  (%dD, %d states, %d occupied)\n", r->id, r->dim, r->norb, r->nocc);
    printf("  class                 %s   (confidence %.2f)\n", res_class_name(r->cls), r->confidence);
    printf("  why                   %s\n", r->reason);
    printf("  direct gap            %.6f eV at k = (%.4f, %.4f, %.4f)\n", r->gap_direct_ev,
           r->k_gap_direct[0], r->k_gap_direct[1], r->k_gap_direct[2]);
    printf("  indirect gap          %.6f eV\n", r->gap_indirect_ev);
    print_symmetry("time reversal", r->tr_verdict, r->tr_break_ev, r->tr_break_lower_ev, r->tr_residual,
                   r->restored & RES_RESTORED_TR);
    print_symmetry("inversion", r->inv_verdict, r->inv_break_ev, r->inv_break_lower_ev, r->inv_residual,
                   r->restored & RES_RESTORED_INV);
    printf("  magnetism             %s\n", r->magnetism);
    if (r->restored)
        printf("  symmetrised           yes: breaking %.3g eV (%s), margin %.3g (direct gap / breaking)\n",
               r->breaking_ev, r->breaking_bound, r->margin);
    print_indices("Z2", r->z2_status, r->z2, r->dim);
    print_indices("Z2 from parities", r->z2_parity_status, r->z2_parity, r->dim);
    print_indices("Z2 from WCC flow", r->z2_wcc_status, r->z2_wcc, r->dim);
    if (r->z2_note[0]) printf("  Z2 note               %s\n", r->z2_note);
    if (r->ntrim > 0) {
        printf("  parity products       ");
        for (int t = 0; t < r->ntrim; t++)
            printf("%c", r->par_delta[t] > 0 ? '+' : '-');
        printf("   (TRIM n1 + 2 n2 + 4 n3 order)\n");
    }
    if (r->spacegroup > 0)
        printf("  crystal symmetry      sites in space group %d, %d operations kept%s\n", r->spacegroup,
               r->symmetry_ops, r->crystal_symmetrised ? " (restored by averaging a noisy fit)" : "");
    if (r->crystal_symmetrised)
        printf("  crystal breaking      <= %.3g eV (bound, 2 max ||gH - H||)\n", r->crystal_breaking_ev);
    if (r->crystal_verdicts[0]) printf("  operations            %s\n", r->crystal_verdicts);
    if (r->gap_symmetry[0]) printf("  at the gap point      %s\n", r->gap_symmetry);
    if (r->z4 >= 0) printf("  Z4 indicator          %d\n", r->z4);
    if (r->mirror_chern_status != RES_NA)
        printf("  mirror Chern number   %d (%s)\n", r->mirror_chern, res_status_name(r->mirror_chern_status));
    int chern = 0;
    if (res_chern_shown(r, &chern)) printf("  Chern number          %d\n", chern);
    if (res_plane_chern_shown(r)) {
        printf("  plane Chern numbers   ");
        for (int p = 0; p < 6; p++)
            printf("%d ", r->plane_chern[p]);
        printf(" (k1=0, k1=1/2, k2=0, k2=1/2, k3=0, k3=1/2)\n");
    }
    if (r->nnodes > 0) {
        int nweyl = res_weyl_count(r);
        if (r->dim == 3)
            printf("  Weyl nodes            %d (net chirality %d); other gap closings %d\n", nweyl,
                   r->net_chirality, r->nnodes - nweyl);
        else
            printf("  2D gap closings       %d\n", r->nnodes);
        for (int i = 0; i < r->nnodes; i++) {
            printf("      k = (%+.6f, %+.6f, %+.6f)  chirality %+d  E = %.4f eV\n", r->nodes[i].k[0],
                   r->nodes[i].k[1], r->nodes[i].k[2], r->nodes[i].chirality, r->nodes[i].energy_ev);
            if (r->nodes[i].symmetry[0]) printf("          %s\n", r->nodes[i].symmetry);
        }
    }
    if (r->has_transport) print_transport(&r->transport);
    if (r->has_surface) print_surface(&r->surface);
    if (r->nodal_line)
        printf("  nodal line            %d points, extent %.3f (reduced)\n", r->nodal_points,
               r->nodal_extent);
    printf("  mesh %d, %lld k-points, %.2f s\n", r->mesh, r->nk_evaluated, r->seconds);
}

int cmd_inspect(int argc, char **argv)
{
    static const struct option longopts[] = {{"json", no_argument, NULL, 'j'},
                                             {"mesh", required_argument, NULL, 'm'},
                                             {"max-seconds", required_argument, NULL, 't'},
                                             {"flows", no_argument, NULL, 'f'},
                                             {"verify", no_argument, NULL, 'v'},
                                             {"seed", required_argument, NULL, 's'},
                                             {"symmetry-tol", required_argument, NULL, 'y'},
                                             {"transport", no_argument, NULL, 'a'},
                                             {"fermi", required_argument, NULL, 'e'},
                                             {"scan", required_argument, NULL, 'n'},
                                             {"eta", required_argument, NULL, 'E'},
                                             {"surfaces", no_argument, NULL, 'S'},
                                             {"magnetism", required_argument, NULL, 'M'},
                                             {"position-tol", required_argument, NULL, 'P'},
                                             {"help", no_argument, NULL, 'h'},
                                             {NULL, 0, NULL, 0}};
    int json = 0, c;
    pl_diag_opts po;
    memset(&po, 0, sizeof po);
    tr_opts_default(&po.tr);
    tr_opts *topts = &po.tr;
    diag_opts *opts = &po.diag;
    opts->seed = 1;
    optind = 1;
    while ((c = getopt_long(argc, argv, "h", longopts, NULL)) != -1) {
        long v;
        double d;
        switch (c) {
        case 'h':
            inspect_help(stdout);
            return 0;
        case 'j':
            json = 1;
            break;
        case 'f':
            /* the flows asked for are computed, whatever the evidence plan */
            opts->want_flows = 1;
            opts->verify = 1;
            break;
        case 'v':
            opts->verify = 1;
            break;
        case 'm':
            if (cli_parse_int(optarg, 4, 4096, &v)) {
                fprintf(stderr, "bandsieve inspect: --mesh expects an integer 4..4096, got '%s'\n", optarg);
                return 2;
            }
            opts->mesh = (int)v;
            break;
        case 't':
            if (cli_parse_double(optarg, &d) || d <= 0) {
                fprintf(stderr, "bandsieve inspect: --max-seconds expects a positive number, got '%s'\n",
                        optarg);
                return 2;
            }
            opts->max_seconds = d;
            break;
        case 'a':
            po.transport = 1;
            break;
        case 'S':
            po.surfaces = 1;
            break;
        case 'e':
            if (cli_parse_double(optarg, &d)) {
                fprintf(stderr, "bandsieve inspect: --fermi expects a number (eV), got '%s'\n", optarg);
                return 2;
            }
            topts->has_fermi = 1;
            topts->fermi_ev = d;
            break;
        case 'E':
            if (cli_parse_double(optarg, &d) || d < 0) {
                fprintf(stderr, "bandsieve inspect: --eta expects a non-negative number (eV), got '%s'\n",
                        optarg);
                return 2;
            }
            topts->eta_ev = d;
            break;
        case 'n': {
            double v3[3];
            if (cli_parse_vec3(optarg, v3) || v3[2] < 2 || v3[2] > TR_MAX_FERMI - 1 || v3[2] != (int)v3[2] ||
                v3[1] <= v3[0]) {
                fprintf(stderr,
                        "bandsieve inspect: --scan expects LO,HI,N (eV offsets from the Fermi energy, 2 <= N "
                        "<= %d), got '%s'\n",
                        TR_MAX_FERMI - 1, optarg);
                return 2;
            }
            topts->scan_lo_ev = v3[0];
            topts->scan_hi_ev = v3[1];
            topts->nscan = (int)v3[2];
            break;
        }
        case 'y':
            if (cli_parse_double(optarg, &d) || d <= 0 || d >= 1) {
                fprintf(stderr, "bandsieve inspect: --symmetry-tol expects a number in (0,1), got '%s'\n",
                        optarg);
                return 2;
            }
            opts->symmetry_tol = d;
            break;
        case 'M': {
            int mag = tb_magnetism_parse(optarg);
            if (mag < 0) {
                fprintf(stderr,
                        "bandsieve inspect: --magnetism expects none, magnetic or unknown, got '%s'\n",
                        optarg);
                return 2;
            }
            opts->magnetism = 1 + mag;
            break;
        }
        case 'P':
            if (cli_parse_double(optarg, &d) || d <= 0 || d >= 1) {
                fprintf(stderr, "bandsieve inspect: --position-tol expects Angstrom in (0,1), got '%s'\n",
                        optarg);
                return 2;
            }
            opts->pos_tol_ang = d;
            break;
        case 's':
            if (cli_parse_int(optarg, 1, 1L << 30, &v)) {
                fprintf(stderr, "bandsieve inspect: --seed expects a positive integer, got '%s'\n", optarg);
                return 2;
            }
            opts->seed = (unsigned long long)v;
            break;
        default:
            inspect_help(stderr);
            return 2;
        }
    }
    if (!po.transport && (topts->has_fermi || topts->nscan > 0 || topts->eta_ev > 0)) {
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
    int max_mesh = m->dim == 3 ? BS_MAX_MESH_3D : BS_MAX_MESH_2D;
    if (opts->mesh > max_mesh) {
        fprintf(stderr, "bandsieve inspect: --mesh %d is above %d, the largest mesh for a %dD material\n",
                opts->mesh, max_mesh, m->dim);
        tb_model_free(m);
        return 2;
    }
    res_diag r;
    res_init(&r);
    int status = 0;
    if (pl_diagnose(m, &po, &r, &err) != 0) {
        fprintf(stderr, "bandsieve inspect: %s: %s (%s)\n", m->id, err.msg, bs_err_name(err.code));
        status = 1;
    } else if (json) {
        char *text = res_to_text(&r, opts->want_flows);
        if (text)
            printf("%s\n", text);
        else
            status = 1;
        cJSON_free(text);
    } else {
        print_report(&r);
    }
    res_clear(&r);
    tb_model_free(m);
    return status;
}
