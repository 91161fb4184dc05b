/* `bandsieve plot`: one figure of one material through the plot module: bands along a path,
 * Wannier-centre flows, a Berry-curvature map, or its Weyl nodes. */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "bandsieve/berrymap.h"
#include "bandsieve/diagnosis.h"
#include "bandsieve/plot.h"
#include "bandsieve/source.h"
#include "bandpath.h"
#include "cliutil.h"
#include "commands.h"
#include "figures.h"

typedef struct plot_args {
    const char *kind, *source, *out, *data, *path, *weight;
    long points, mesh, project, map_mesh;
    int has_fermi, fixed_axis;
    double fermi, kfixed;
} plot_args;

static void plot_help(FILE *out)
{
    fprintf(out, "usage: bandsieve plot KIND SOURCE -o FILE.svg|FILE.png|FILE.pdf [options]\n\n"
                 "Draws one figure of SOURCE (a card, SET.h5:ID, or model:NAME[:key=val,...]). KIND:\n"
                 "  bands       bands along a path; the gap at the filling shaded, the Fermi level dashed\n"
                 "  flow        Wannier-centre flows of every plane with the largest-gap line\n"
                 "  curvature   Berry curvature of the occupied bands over the 2D zone (3D: a plane)\n"
                 "  nodes       the Weyl nodes found by the diagnosis, projected, coloured by chirality\n"
                 "(slab bands and surface spectral maps: bandsieve slab ... --figure FILE)\n\n"
                 "  -o, --output FILE   the figure; the extension picks SVG, PNG or PDF\n"
                 "  --data FILE.json    also write the plotted arrays as JSON\n"
                 "  --path P            bands: 'auto' (default) or labelled points, as for `bands --path`\n"
                 "  --points N          bands: samples along the path (default 300)\n"
                 "  --weight W          bands: colour by 'spin' (<s_z>) or 'orbitals:i,j' (their weight)\n"
                 "  --fermi E           bands: Fermi level in eV\n"
                 "  --mesh N            flow, nodes: the diagnosis mesh (default: inspect's)\n"
                 "  --map-mesh N        curvature: plaquettes per direction (default 60)\n"
                 "  --plane kI=V        curvature in 3D: the plane normal to b_I at k_I = V (default k3=0)\n"
                 "  --project I         nodes: project along k_I (default 3)\n"
                 "  -h, --help          this text\n");
}

static int parse_plane(const char *text, int *axis, double *v)
{
    if (text[0] != 'k' || text[1] < '1' || text[1] > '3' || text[2] != '=') return -1;
    *axis = text[1] - '1';
    return cli_parse_double(text + 3, v);
}

static int parse_args(int argc, char **argv, plot_args *a)
{
    static const struct option longopts[] = {
        {"output", required_argument, NULL, 'o'}, {"data", required_argument, NULL, 'd'},
        {"path", required_argument, NULL, 'p'},   {"points", required_argument, NULL, 'n'},
        {"weight", required_argument, NULL, 'w'}, {"fermi", required_argument, NULL, 'f'},
        {"mesh", required_argument, NULL, 'm'},   {"map-mesh", required_argument, NULL, 'M'},
        {"plane", required_argument, NULL, 'P'},  {"project", required_argument, NULL, 'j'},
        {"help", no_argument, NULL, 'h'},         {NULL, 0, NULL, 0}};
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "ho:", longopts, NULL)) != -1) {
        int bad = 0;
        switch (c) {
        case 'h':
            plot_help(stdout);
            return -1;
        case 'o':
            a->out = optarg;
            break;
        case 'd':
            a->data = optarg;
            break;
        case 'p':
            a->path = optarg;
            break;
        case 'w':
            a->weight = optarg;
            break;
        case 'n':
            bad = cli_parse_int(optarg, 2, 100000, &a->points);
            break;
        case 'm':
            bad = cli_parse_int(optarg, 4, 400, &a->mesh);
            break;
        case 'M':
            bad = cli_parse_int(optarg, 4, 400, &a->map_mesh);
            break;
        case 'j':
            bad = cli_parse_int(optarg, 1, 3, &a->project);
            break;
        case 'f':
            bad = cli_parse_double(optarg, &a->fermi);
            a->has_fermi = 1;
            break;
        case 'P':
            bad = parse_plane(optarg, &a->fixed_axis, &a->kfixed);
            break;
        default:
            plot_help(stderr);
            return 2;
        }
        if (bad) {
            fprintf(stderr, "bandsieve plot: bad value '%s' for an option (see --help)\n", optarg);
            return 2;
        }
    }
    if (argc - optind != 2 || !a->out) {
        fprintf(stderr, "bandsieve plot: need KIND SOURCE and -o FILE\n");
        plot_help(stderr);
        return 2;
    }
    a->kind = argv[optind], a->source = argv[optind + 1];
    if (strcmp(a->kind, "bands") && strcmp(a->kind, "flow") && strcmp(a->kind, "curvature") &&
        strcmp(a->kind, "nodes")) {
        fprintf(stderr, "bandsieve plot: unknown KIND '%s' (bands, flow, curvature, nodes)\n", a->kind);
        return 2;
    }
    return 0;
}

static int draw_diagnosis(const tb_model *m, const plot_args *a, cJSON *data, bs_err *err)
{
    diag_opts o = {0};
    o.seed = 1;
    o.mesh = (int)a->mesh;
    o.want_flows = strcmp(a->kind, "flow") == 0;
    o.verify = o.want_flows; /* a flow figure needs the flow whatever the evidence plan */
    res_diag r;
    res_init(&r);
    int rc = diag_run(m, &o, &r, err);
    char title[200];
    snprintf(title, sizeof title, "%s (%s)", m->id, res_class_name(r.cls));
    if (rc == 0 && o.want_flows) {
        if (r.nflows == 0)
            rc = bs_fail(err, BS_EINVAL, "%s: no Wannier-centre flow (%s)", m->id, r.reason);
        else
            rc = fig_flows(a->out, title, r.nflows, r.flows, data, err);
    } else if (rc == 0) {
        double(*k)[3] = malloc((size_t)(r.nnodes + 1) * sizeof *k);
        int *ch = malloc((size_t)(r.nnodes + 1) * sizeof *ch);
        if (!k || !ch) rc = bs_fail(err, BS_ENOMEM, "out of memory");
        for (int i = 0; rc == 0 && i < r.nnodes; i++)
            memcpy(k[i], r.nodes[i].k, sizeof k[i]), ch[i] = r.nodes[i].chirality;
        if (rc == 0)
            rc =
                fig_nodes(a->out, title, r.nnodes, (const double(*)[3])k, ch, (int)a->project - 1, data, err);
        free(k), free(ch);
    }
    if (data && rc == 0) cJSON_AddStringToObject(data, "class", res_class_name(r.cls));
    res_clear(&r);
    return rc;
}

static int draw(const tb_model *m, const plot_args *a, cJSON *data, bs_err *err)
{
    if (strcmp(a->kind, "bands") == 0) {
        band_path bp;
        int rc = band_path_compute(m, a->path ? a->path : "auto", (int)a->points, a->weight,
                                   a->has_fermi ? &a->fermi : NULL, &bp, err);
        char title[200];
        snprintf(title, sizeof title, "%s: bands along %s", m->id, bp.path.lattice);
        if (rc == 0) rc = fig_bands(a->out, title, &bp, data, err);
        band_path_clear(&bp);
        return rc;
    }
    if (strcmp(a->kind, "curvature") == 0) {
        berry_map bm;
        int axis = m->dim == 2 ? 2 : a->fixed_axis;
        int rc = berry_map_plane(m, m->nocc, axis, a->kfixed, (int)a->map_mesh, &bm, err);
        char title[200];
        if (m->dim == 3)
            snprintf(title, sizeof title, "%s, plane k%d = %.3g", m->id, axis + 1, a->kfixed);
        else
            snprintf(title, sizeof title, "%s", m->id);
        if (rc == 0) rc = fig_berry(a->out, title, &bm, data, err);
        berry_map_clear(&bm);
        return rc;
    }
    return draw_diagnosis(m, a, data, err);
}

static int write_data(const char *path, cJSON *data, bs_err *err)
{
    char *text = cJSON_PrintUnformatted(data);
    FILE *fp = text ? fopen(path, "w") : NULL;
    int rc = fp && fputs(text, fp) >= 0 ? 0 : bs_fail(err, BS_EIO, "%s: cannot be written", path);
    if (fp && fclose(fp) != 0) rc = bs_fail(err, BS_EIO, "%s: cannot be written", path);
    free(text);
    return rc;
}

int cmd_plot(int argc, char **argv)
{
    plot_args a = {0};
    a.points = 300, a.map_mesh = 60, a.project = 3, a.fixed_axis = 2;
    int status = parse_args(argc, argv, &a);
    if (status != 0) return status < 0 ? 0 : status;
    bs_err err;
    bs_err_clear(&err);
    if (!plot_available()) {
        plot_open(a.out, 800, 600, 1, 1, &(plot_fig *){NULL}, &err);
        fprintf(stderr, "bandsieve plot: %s\n", err.msg);
        return 1;
    }
    tb_model *m = NULL;
    cJSON *data = a.data ? cJSON_CreateObject() : NULL;
    if (data) cJSON_AddStringToObject(data, "kind", a.kind);
    status = 1;
    if (src_load(a.source, &m, &err) != 0) {
        fprintf(stderr, "bandsieve plot: %s\n", err.msg);
    } else if (draw(m, &a, data, &err) != 0 || (data && write_data(a.data, data, &err) != 0)) {
        fprintf(stderr, "bandsieve plot: %s: %s\n", m->id, err.msg);
        status = err.code == BS_EUSAGE || err.code == BS_EPARSE ? 2 : 1;
    } else {
        status = 0;
    }
    cJSON_Delete(data);
    tb_model_free(m);
    return status;
}
