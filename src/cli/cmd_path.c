/* `bandsieve path`: a material followed along a parameter (a built-in model's key, or members at
 * given values interpolated between them): gap closings, phase intervals, Weyl-node tracks. */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "bandsieve/diagnosis.h"
#include "bandsieve/phasepath.h"
#include "bandsieve/result_json.h"
#include "bandsieve/source.h"
#include "cliutil.h"
#include "commands.h"
#include "figures.h"
#include "pathfilm.h"

static void path_help(FILE *out)
{
    fprintf(
        out,
        "usage: bandsieve path model:NAME[:key=val,...] --param KEY=LO..HI [options]\n"
        "       bandsieve path SOURCE SOURCE ... --values V1,V2,... [--name NAME] [--unit U] [options]\n"
        "       bandsieve path SOURCE --direction h,k,l --layers LO..HI [options]   (films)\n\n"
        "Follows a material along a parameter. The minimal direct gap is scanned on a uniform\n"
        "sample; every closing is bracketed and refined to --tol in the parameter; at each\n"
        "closing the touching k-points are located (at a TRIM or not) and, when both sides are\n"
        "inversion-symmetric, the parity exchange is read off the TRIM parities. The path is cut\n"
        "into phase intervals, each diagnosed once (as `inspect` does) at its midpoint, and the\n"
        "transition between them is named: band inversion, gap closing, Weyl phase, nodal line\n"
        "or metal. Inside a gapless 3D interval the Weyl nodes are followed by continuation,\n"
        "with their chirality and the events: pair created, pair annihilated, zone-boundary\n"
        "crossing, a node count that is not a multiple of 4 under time reversal.\n\n"
        "With several SOURCEs (cards, SET.h5:ID, models) at increasing --values, H(R) is\n"
        "interpolated linearly between neighbours on the union of their lattice vectors (the\n"
        "virtual-crystal idea). For a pressure or strain series this is a model of the path.\n"
        "Members must share the basis (state count, orbitals, spin layout, filling).\n\n"
        "Films: one 3D SOURCE, a lattice plane (--direction) and a range of layer counts: each\n"
        "film is diagnosed as a 2D material (2D Z2, Chern number, gap).\n\n"
        "  --param KEY=LO..HI   the built-in model's key and its range\n"
        "  --values V1,V2,...   the members' parameter values, increasing\n"
        "  --name NAME          what the parameter is called (default x)\n"
        "  --unit U             its unit, for the output only\n"
        "  --family NAME        all members of family NAME in the material set SOURCE (SET.h5)\n"
        "  --samples N          uniform gap samples (default 41)\n"
        "  --tol T              tolerance on closing positions and edges (default 1e-5)\n"
        "  --closed-ev E        a refined direct gap below E counts as closed (default 1e-6)\n"
        "  --mesh N             k-mesh of the gap scan (default 14 in 3D, 36 in 2D)\n"
        "  --track-steps N      continuation steps across a gapless interval (default 24)\n"
        "  --no-tracks          skip the Weyl-node tracks\n"
        "  --direction h,k,l    film: Miller indices of the plane\n"
        "  --layers LO..HI      film: layer counts\n"
        "  --json               one JSON object on stdout\n"
        "  --figure FILE        the gap against the parameter with the phase intervals shaded by\n"
        "                       class, and the Weyl-node tracks projected on (k1, k2) (.svg, .png, .pdf)\n"
        "  -h, --help           this text\n");
}

static int parse_range(const char *text, double *lo, double *hi)
{
    const char *dots = strstr(text, "..");
    if (!dots) return -1;
    char a[64], b[64];
    size_t la = (size_t)(dots - text);
    if (la == 0 || la >= sizeof a || strlen(dots + 2) >= sizeof b) return -1;
    memcpy(a, text, la);
    a[la] = '\0';
    snprintf(b, sizeof b, "%s", dots + 2);
    if (cli_parse_double(a, lo) || cli_parse_double(b, hi)) return -1;
    return *hi > *lo ? 0 : -1;
}

static cJSON *kvec(const double k[3])
{
    double v[3] = {k[0], k[1], k[2]};
    return cJSON_CreateDoubleArray(v, 3);
}

static cJSON *invariants_json(const res_diag *d)
{
    cJSON *o = cJSON_CreateObject();
    if (d->z2_status == RES_DONE) {
        int n = d->dim == 2 ? 1 : 4;
        cJSON_AddItemToObject(o, "z2", cJSON_CreateIntArray(d->z2, n));
    } else {
        cJSON_AddNullToObject(o, "z2");
    }
    if (d->chern_status == RES_DONE && d->dim == 2)
        cJSON_AddNumberToObject(o, "chern", d->chern);
    else
        cJSON_AddNullToObject(o, "chern");
    if (d->chern_status == RES_DONE && d->dim == 3)
        cJSON_AddItemToObject(o, "plane_chern", cJSON_CreateIntArray(d->plane_chern, 6));
    cJSON_AddNumberToObject(o, "n_weyl", d->nnodes);
    return o;
}

cJSON *path_to_json(const pp_result *r, const char *source, const char *unit, int members)
{
    cJSON *j = cJSON_CreateObject();
    cJSON *p = cJSON_AddObjectToObject(j, "path");
    cJSON_AddStringToObject(p, "source", source);
    cJSON_AddStringToObject(p, "parameter", r->param);
    cJSON_AddStringToObject(p, "unit", unit ? unit : "");
    cJSON_AddNumberToObject(p, "from", r->x_lo);
    cJSON_AddNumberToObject(p, "to", r->x_hi);
    cJSON_AddNumberToObject(p, "dimension", r->dim);
    cJSON_AddStringToObject(p, "interpolation",
                            members ? "linear in H(R) between members (virtual-crystal "
                                      "idea); for pressure or strain series a model of the path"
                                    : "none (built-in model)");
    cJSON *s = cJSON_AddArrayToObject(j, "samples");
    for (int i = 0; i < r->nsamples; i++) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "x", r->xs[i]);
        cJSON_AddNumberToObject(o, "gap_direct_eV", r->gaps[i]);
        cJSON_AddItemToArray(s, o);
    }
    cJSON *iv = cJSON_AddArrayToObject(j, "intervals");
    for (int i = 0; i < r->ninterval; i++) {
        const pp_interval *in = &r->intervals[i];
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "from", in->x_lo);
        cJSON_AddNumberToObject(o, "to", in->x_hi);
        cJSON_AddBoolToObject(o, "gapless", in->gapless);
        cJSON_AddNumberToObject(o, "x_diagnosed", in->x_rep);
        cJSON_AddNumberToObject(o, "gap_direct_eV", in->gap_ev);
        cJSON_AddStringToObject(o, "class", res_class_name(in->diag.cls));
        cJSON_AddNumberToObject(o, "confidence", in->diag.confidence);
        cJSON_AddItemToObject(o, "invariants", invariants_json(&in->diag));
        cJSON_AddItemToObject(o, "diagnosis", res_to_json(&in->diag, 0));
        cJSON_AddItemToArray(iv, o);
    }
    cJSON *cl = cJSON_AddArrayToObject(j, "closings");
    for (int i = 0; i < r->nclosing; i++) {
        const pp_closing *c = &r->closings[i];
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "kind", c->kind);
        cJSON_AddStringToObject(o, "text", c->text);
        cJSON_AddBoolToObject(o, "single_value", c->point);
        cJSON_AddNumberToObject(o, "x", c->x);
        cJSON_AddNumberToObject(o, "x_lo", c->x_lo);
        cJSON_AddNumberToObject(o, "x_hi", c->x_hi);
        cJSON_AddNumberToObject(o, "tolerance", r->tol_x);
        cJSON_AddNumberToObject(o, "gap_eV", c->gap_ev);
        cJSON *ks = cJSON_AddArrayToObject(o, "k");
        for (int q = 0; q < c->nk; q++) {
            cJSON *kk = cJSON_CreateObject();
            cJSON_AddItemToObject(kk, "k", kvec(c->k[q]));
            cJSON_AddStringToObject(kk, "label", c->k_label[q]);
            cJSON_AddBoolToObject(kk, "trim", c->at_trim[q]);
            cJSON_AddItemToArray(ks, kk);
        }
        cJSON_AddBoolToObject(o, "at_trims", c->all_at_trims);
        if (c->predicted)
            cJSON_AddStringToObject(o, "symmetry_prediction", c->prediction);
        else
            cJSON_AddNullToObject(o, "symmetry_prediction");
        if (c->agrees >= 0)
            cJSON_AddBoolToObject(o, "symmetry_agrees", c->agrees);
        else
            cJSON_AddNullToObject(o, "symmetry_agrees");
        if (c->parity_checked) {
            cJSON_AddBoolToObject(o, "parity_exchange", c->parity_exchange);
            cJSON *tc = cJSON_AddArrayToObject(o, "trims_parity_changed");
            for (int t = 0; t < 8; t++)
                if (c->trim_changed[t]) cJSON_AddItemToArray(tc, cJSON_CreateNumber(t));
        } else {
            cJSON_AddNullToObject(o, "parity_exchange");
        }
        if (c->before >= 0)
            cJSON_AddNumberToObject(o, "interval_before", c->before);
        else
            cJSON_AddNullToObject(o, "interval_before");
        if (c->after >= 0)
            cJSON_AddNumberToObject(o, "interval_after", c->after);
        else
            cJSON_AddNullToObject(o, "interval_after");
        cJSON_AddItemToArray(cl, o);
    }
    cJSON *tr = cJSON_AddArrayToObject(j, "node_tracks");
    for (int i = 0; i < r->ntrack; i++) {
        const pp_track *t = &r->tracks[i];
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "chirality", t->chirality);
        if (t->born_with >= 0)
            cJSON_AddNumberToObject(o, "created_with", t->born_with);
        else
            cJSON_AddNullToObject(o, "created_with");
        if (t->died_with >= 0)
            cJSON_AddNumberToObject(o, "annihilated_with", t->died_with);
        else
            cJSON_AddNullToObject(o, "annihilated_with");
        cJSON_AddNumberToObject(o, "boundary_crossings", t->crossings);
        cJSON *pts = cJSON_AddArrayToObject(o, "points");
        for (int q = 0; q < t->npts; q++) {
            double v[4] = {t->x[q], t->k[q][0], t->k[q][1], t->k[q][2]};
            cJSON_AddItemToArray(pts, cJSON_CreateDoubleArray(v, 4));
        }
        cJSON_AddItemToArray(tr, o);
    }
    cJSON *ev = cJSON_AddArrayToObject(j, "events");
    for (int i = 0; i < r->nevent; i++) {
        const pp_event *e = &r->events[i];
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "kind", pp_event_name(e->kind));
        cJSON_AddNumberToObject(o, "x", e->x);
        if (e->kind <= PP_EV_BOUNDARY) cJSON_AddItemToObject(o, "k", kvec(e->k));
        int ids[2] = {e->a, e->b};
        cJSON_AddItemToObject(o, "tracks", cJSON_CreateIntArray(ids, e->b >= 0 ? 2 : e->a >= 0 ? 1 : 0));
        cJSON_AddNumberToObject(o, "interval", e->interval);
        cJSON_AddItemToArray(ev, o);
    }
    cJSON_AddNumberToObject(j, "confidence", r->confidence);
    cJSON_AddStringToObject(j, "note", r->note);
    cJSON *cost = cJSON_AddObjectToObject(j, "cost");
    cJSON_AddNumberToObject(cost, "gap_evaluations", (double)r->gap_evals);
    cJSON_AddNumberToObject(cost, "diagnoses", (double)r->diag_runs);
    cJSON_AddNumberToObject(cost, "seconds", r->seconds);
    return j;
}

void path_print(const pp_result *r, const char *source, const char *unit, int members)
{
    const char *u = unit && unit[0] ? unit : "";
    printf("path of %s over %s = %g..%g %s (%dD)\n", source, r->param, r->x_lo, r->x_hi, u, r->dim);
    if (members)
        printf("  between members H(R) is interpolated linearly (virtual-crystal idea); for a pressure or\n"
               "  strain series this is a model of the path, not a calculation at each point\n");
    printf("phase intervals (direct gap open or closed)\n");
    for (int i = 0; i < r->ninterval; i++) {
        const pp_interval *in = &r->intervals[i];
        char inv[64] = "";
        const res_diag *d = &in->diag;
        if (d->z2_status == RES_DONE && d->dim == 2)
            snprintf(inv, sizeof inv, "Z2 = %d", d->z2[0]);
        else if (d->z2_status == RES_DONE)
            snprintf(inv, sizeof inv, "Z2 = %d;%d%d%d", d->z2[0], d->z2[1], d->z2[2], d->z2[3]);
        else if (d->chern_status == RES_DONE && d->dim == 2)
            snprintf(inv, sizeof inv, "C = %d", d->chern);
        else if (d->nnodes > 0)
            snprintf(inv, sizeof inv, "%d nodes", d->nnodes);
        printf("  [%+.6f, %+.6f] %s  %-30s %-14s gap %.4g eV at %s = %.4g (confidence %.2f)\n", in->x_lo,
               in->x_hi, in->gapless ? "closed" : "open  ", res_class_name(d->cls), inv, in->gap_ev, r->param,
               in->x_rep, d->confidence);
    }
    printf("transitions\n");
    if (r->nclosing == 0) printf("  none: the gap stays open along the path\n");
    for (int i = 0; i < r->nclosing; i++) {
        const pp_closing *c = &r->closings[i];
        printf("  %s\n", c->text);
        if (c->point)
            printf("      critical value %.8g, closed on [%.8g, %.8g], gap %.2g eV\n", c->x, c->x_lo, c->x_hi,
                   c->gap_ev);
        else
            printf("      edges %.8g and %.8g (each to %.1g)\n", c->x_lo, c->x_hi, r->tol_x);
        for (int q = 0; q < c->nk; q++)
            printf("      k = (%.5f, %.5f, %.5f) %s%s\n", c->k[q][0], c->k[q][1], c->k[q][2],
                   c->at_trim[q] ? "TRIM " : "",
                   c->k_label[q][0] == '(' && !c->at_trim[q] ? "" : c->k_label[q]);
        if (c->predicted)
            printf("      symmetry prediction: %s%s\n", c->prediction,
                   c->agrees == 1   ? " (found)"
                   : c->agrees == 0 ? " (NOT what the path found: confidence lowered on both sides)"
                                    : "");
        if (c->parity_checked)
            printf("      parity exchange at the closing TRIMs: %s\n", c->parity_exchange ? "yes" : "no");
    }
    if (r->ntrack > 0) {
        printf("Weyl-node tracks: %d\n", r->ntrack);
        for (int i = 0; i < r->ntrack; i++) {
            const pp_track *t = &r->tracks[i];
            printf("  node %2d  chirality %+d  %s = %.4g..%.4g  (%d points, %d boundary crossings)\n", i,
                   t->chirality, r->param, t->x[0], t->x[t->npts - 1], t->npts, t->crossings);
        }
    }
    if (r->nevent > 0) {
        printf("events\n");
        for (int i = 0; i < r->nevent; i++) {
            const pp_event *e = &r->events[i];
            printf("  %s = %.6g  %s", r->param, e->x, pp_event_name(e->kind));
            if (e->kind <= PP_EV_BOUNDARY) printf(" at k = (%.4f, %.4f, %.4f)", e->k[0], e->k[1], e->k[2]);
            if (e->a >= 0) printf("  nodes %d%s", e->a, "");
            if (e->b >= 0) printf(", %d", e->b);
            printf("\n");
        }
    }
    if (r->note[0]) printf("note: %s\n", r->note);
    printf("confidence %.2f; %lld gap evaluations, %lld diagnoses, %.2f s\n", r->confidence, r->gap_evals,
           r->diag_runs, r->seconds);
}

int path_figure(const pp_result *r, const char *figure, const char *title, const char *unit)
{
    if (!figure) return 0;
    bs_err err;
    bs_err_clear(&err);
    if (fig_path(figure, title, r, unit, NULL, &err) == 0) return 0;
    fprintf(stderr, "bandsieve path: %s\n", err.msg);
    return 1;
}

int cmd_path(int argc, char **argv)
{
    static const struct option longopts[] = {{"param", required_argument, NULL, 'p'},
                                             {"values", required_argument, NULL, 'v'},
                                             {"name", required_argument, NULL, 'n'},
                                             {"unit", required_argument, NULL, 'u'},
                                             {"samples", required_argument, NULL, 's'},
                                             {"tol", required_argument, NULL, 't'},
                                             {"closed-ev", required_argument, NULL, 'c'},
                                             {"mesh", required_argument, NULL, 'm'},
                                             {"track-steps", required_argument, NULL, 'k'},
                                             {"no-tracks", no_argument, NULL, 'N'},
                                             {"json", no_argument, NULL, 'j'},
                                             {"direction", required_argument, NULL, 'd'},
                                             {"layers", required_argument, NULL, 'l'},
                                             {"family", required_argument, NULL, 'f'},
                                             {"figure", required_argument, NULL, 'F'},
                                             {"help", no_argument, NULL, 'h'},
                                             {NULL, 0, NULL, 0}};
    pp_opts o;
    pp_opts_init(&o);
    o.diag.seed = 1;
    int json = 0, c, have_dir = 0;
    const char *param = NULL, *values = NULL, *name = "x", *unit = "", *family = NULL, *layers = NULL;
    const char *figure = NULL;
    double dir[3] = {0, 0, 0};
    optind = 1;
    while ((c = getopt_long(argc, argv, "h", longopts, NULL)) != -1) {
        long v;
        double d;
        switch (c) {
        case 'h':
            path_help(stdout);
            return 0;
        case 'p':
            param = optarg;
            break;
        case 'v':
            values = optarg;
            break;
        case 'n':
            name = optarg;
            break;
        case 'u':
            unit = optarg;
            break;
        case 'f':
            family = optarg;
            break;
        case 'F':
            if (!cli_figure_path_ok(optarg)) {
                fprintf(stderr, "bandsieve path: --figure %s: figure files end in .svg, .png or .pdf\n",
                        optarg);
                return 2;
            }
            figure = optarg;
            break;
        case 'l':
            layers = optarg;
            break;
        case 'd':
            if (cli_parse_vec3(optarg, dir)) {
                fprintf(stderr, "bandsieve path: --direction expects h,k,l, got '%s'\n", optarg);
                return 2;
            }
            have_dir = 1;
            break;
        case 'j':
            json = 1;
            break;
        case 'N':
            o.no_tracks = 1;
            break;
        case 's':
            if (cli_parse_int(optarg, 3, 100000, &v)) {
                fprintf(stderr, "bandsieve path: --samples expects an integer 3..100000, got '%s'\n", optarg);
                return 2;
            }
            o.nsamples = (int)v;
            break;
        case 'k':
            if (cli_parse_int(optarg, 2, 10000, &v)) {
                fprintf(stderr, "bandsieve path: --track-steps expects an integer 2..10000, got '%s'\n",
                        optarg);
                return 2;
            }
            o.track_steps = (int)v;
            break;
        case 'm':
            if (cli_parse_int(optarg, 4, 4096, &v)) {
                fprintf(stderr, "bandsieve path: --mesh expects an integer 4..4096, got '%s'\n", optarg);
                return 2;
            }
            o.gap_mesh = (int)v;
            break;
        case 't':
            if (cli_parse_double(optarg, &d) || d <= 0 || d > 0.1) {
                fprintf(stderr, "bandsieve path: --tol expects a number in (0, 0.1], got '%s'\n", optarg);
                return 2;
            }
            o.tol_x = d;
            break;
        case 'c':
            if (cli_parse_double(optarg, &d) || d <= 0 || d > 0.1) {
                fprintf(stderr, "bandsieve path: --closed-ev expects a number in (0, 0.1], got '%s'\n",
                        optarg);
                return 2;
            }
            o.closed_ev = d;
            break;
        default:
            path_help(stderr);
            return 2;
        }
    }
    int nsrc = argc - optind;
    if (nsrc < 1) {
        fprintf(stderr, "bandsieve path: need a SOURCE\n");
        path_help(stderr);
        return 2;
    }
    if (layers || have_dir) {
        if (!layers || !have_dir || nsrc != 1 || param || values || family) {
            fprintf(stderr, "bandsieve path: films need exactly one SOURCE with --direction and --layers\n");
            return 2;
        }
        return path_films(argv[optind], dir, layers, &o, json);
    }
    if (family) {
        if (nsrc != 1 || param || values) {
            fprintf(stderr,
                    "bandsieve path: --family takes one material set (SET.h5) and no --param/--values\n");
            return 2;
        }
        return path_family(argv[optind], family, &o, json, figure);
    }
    bs_err err;
    bs_err_clear(&err);
    pp_source *src = NULL;
    pp_result r;
    pp_result_init(&r);
    int status = 0, members = 0;
    double lo = 0, hi = 0;
    tb_model **ms = NULL;
    double *vals = NULL;
    const char *label = argv[optind];
    if (param) {
        if (nsrc != 1 || values || strncmp(argv[optind], "model:", 6) != 0) {
            fprintf(stderr, "bandsieve path: --param needs exactly one built-in model source "
                            "(model:NAME[:key=val,...])\n");
            return 2;
        }
        const char *eq = strchr(param, '=');
        char key[64];
        if (!eq || (size_t)(eq - param) >= sizeof key || eq == param || parse_range(eq + 1, &lo, &hi)) {
            fprintf(stderr, "bandsieve path: --param expects KEY=LO..HI with LO < HI, got '%s'\n", param);
            return 2;
        }
        memcpy(key, param, (size_t)(eq - param));
        key[eq - param] = '\0';
        if (pp_source_builtin(argv[optind] + 6, key, &src, &err) != 0) {
            fprintf(stderr, "bandsieve path: %s\n", err.msg);
            return 2;
        }
        name = key;
        if (pp_run(src, key, lo, hi, &o, &r, &err) != 0) {
            fprintf(stderr, "bandsieve path: %s (%s)\n", err.msg, bs_err_name(err.code));
            status = 1;
        }
    } else {
        if (!values || nsrc < 2) {
            fprintf(
                stderr,
                "bandsieve path: give --param for a built-in model, or two or more SOURCEs with --values\n");
            return 2;
        }
        members = 1;
        ms = calloc((size_t)nsrc, sizeof *ms);
        vals = calloc((size_t)nsrc, sizeof *vals);
        char *copy = strdup(values);
        int nv = 0;
        for (char *tok = strtok(copy, ","); tok; tok = strtok(NULL, ",")) {
            if (nv >= nsrc || cli_parse_double(tok, &vals[nv])) {
                nv = -1;
                break;
            }
            nv++;
        }
        free(copy);
        if (nv != nsrc) {
            fprintf(stderr, "bandsieve path: --values needs one number per SOURCE (%d), got '%s'\n", nsrc,
                    values);
            free(ms);
            free(vals);
            return 2;
        }
        for (int i = 0; i < nsrc && status == 0; i++)
            if (src_load(argv[optind + i], &ms[i], &err) != 0) {
                fprintf(stderr, "bandsieve path: %s\n", err.msg);
                status = 1;
            }
        if (status == 0 && pp_source_members((const tb_model *const *)ms, vals, nsrc, &src, &err) != 0) {
            fprintf(stderr, "bandsieve path: %s\n", err.msg);
            status = 1;
        }
        if (status == 0 && pp_run(src, name, vals[0], vals[nsrc - 1], &o, &r, &err) != 0) {
            fprintf(stderr, "bandsieve path: %s (%s)\n", err.msg, bs_err_name(err.code));
            status = 1;
        }
    }
    if (status == 0 && path_figure(&r, figure, label, unit) != 0) status = 1;
    if (status == 0) {
        if (json) {
            cJSON *j = path_to_json(&r, label, unit, members);
            char *text = cJSON_PrintUnformatted(j);
            if (text) printf("%s\n", text);
            free(text);
            cJSON_Delete(j);
        } else {
            path_print(&r, label, unit, members);
        }
    }
    pp_result_clear(&r);
    pp_source_free(src);
    if (ms)
        for (int i = 0; i < nsrc; i++)
            tb_model_free(ms[i]);
    free(ms);
    free(vals);
    return status;
}
