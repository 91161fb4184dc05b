/* `bandsieve report`: a self-contained HTML page per material, from a source (the diagnosis is run
 * now), from a catalogue row (the stored diagnosis and flows), or for the best N candidates of a
 * catalogue with an index page. */
#include <errno.h>
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cjson/cJSON.h>

#include "bandsieve/catalogue.h"
#include "bandsieve/config.h"
#include "bandsieve/diagnosis.h"
#include "bandsieve/result_json.h"
#include "bandsieve/source.h"
#include "cliutil.h"
#include "commands.h"
#include "report.h"

static void report_help(FILE *out)
{
    fprintf(out,
            "usage: bandsieve report SOURCE -o FILE.html [--mesh N]\n"
            "       bandsieve report -c CAT.sqlite ID [SET.h5] -o FILE.html\n"
            "       bandsieve report --top N -c CAT.sqlite [SET.h5] -o DIR\n\n"
            "Writes one self-contained HTML page per material (no network needed: figures are inline SVG\n"
            "or PNG): the verdict with its confidence and reason, every piece of evidence with its figure\n"
            "(bands along the standard path, parities, Wannier-centre flows, Berry curvature, Weyl nodes,\n"
            "stored surface crossings), the caveats of a tight-binding screen, and the provenance.\n"
            "SOURCE (a card, SET.h5:ID or model:...) is diagnosed now. With -c the stored diagnosis and\n"
            "flows of the material's most resolved run are used; the set, when given, adds the figures\n"
            "that need H(k) (bands, Berry curvature). --top N writes DIR/ID.html for the first N rows of\n"
            "the catalogue's candidates view and DIR/index.html.\n\n"
            "  -o, --output P     the page (or, with --top, the folder)\n"
            "  -c, --catalogue F  the catalogue\n"
            "  --top N            the best N candidates\n"
            "  --mesh N           SOURCE: the diagnosis mesh (default inspect's)\n"
            "  -h, --help         this text\n");
}

typedef struct tmpdir {
    char path[512];
} tmpdir;

static int tmpdir_make(tmpdir *t, bs_err *err)
{
    const char *base = getenv("TMPDIR");
    snprintf(t->path, sizeof t->path, "%s/bandsieve-report-XXXXXX", base && *base ? base : "/tmp");
    return mkdtemp(t->path) ? 0 : bs_fail(err, BS_EIO, "%s: cannot create a temporary folder", t->path);
}

static void tmpdir_remove(tmpdir *t)
{
    static const char *const files[] = {"bands.svg", "flows.svg", "curvature.png", "nodes.svg"};
    char p[700];
    for (size_t i = 0; i < sizeof files / sizeof files[0]; i++) {
        snprintf(p, sizeof p, "%s/%s", t->path, files[i]);
        unlink(p);
    }
    rmdir(t->path);
}

/* SOURCE mode: run the diagnosis with flows and write the page. */
static int report_source(const char *source, const char *out, int mesh, bs_err *err)
{
    tb_model *m = NULL;
    res_diag r;
    res_init(&r);
    cJSON *j = NULL, *prov = cJSON_CreateObject();
    tmpdir t = {{0}};
    int rc = src_load(source, &m, err);
    diag_opts o = {0};
    o.seed = 1, o.mesh = mesh, o.want_flows = 1;
    o.verify = 1; /* the report shows every method's evidence, the flows included */
    if (rc == 0) rc = diag_run(m, &o, &r, err);
    if (rc == 0 && !(j = res_to_json(&r, 0))) rc = bs_fail(err, BS_ENOMEM, "out of memory");
    if (rc == 0) rc = tmpdir_make(&t, err);
    if (rc == 0) {
        cJSON_AddStringToObject(prov, "source", source);
        cJSON_AddStringToObject(prov, "model source", m->source[0] ? m->source : "-");
        cJSON_AddStringToObject(prov, "run", "diagnosed when this report was written (no catalogue)");
        cJSON_AddNumberToObject(prov, "mesh", r.mesh);
        cJSON_AddStringToObject(prov, "version", BS_VERSION);
        rep_input in = {j, m, r.nflows, r.flows, r.reason, prov};
        rc = rep_write(&in, out, t.path, err);
        tmpdir_remove(&t);
    }
    cJSON_Delete(j);
    cJSON_Delete(prov);
    res_clear(&r);
    tb_model_free(m);
    return rc;
}

/* Collects the first row of a query as name -> text pairs into an object. */
static int collect_row(void *ctx, const cat_row *row, bs_err *err)
{
    cJSON *o = ctx;
    if (row->index < 0) return 0;
    if (row->index > 0) return 0;
    for (int i = 0; i < row->ncol; i++) {
        if (strcmp(row->name[i], "card_json") == 0) continue;
        if (row->text[i])
            cJSON_AddStringToObject(o, row->name[i], row->text[i]);
        else
            cJSON_AddNullToObject(o, row->name[i]);
    }
    return 0;
}

/* SQL text literal of s (quotes doubled) into buf. */
static void sql_quote(const char *s, char *buf, size_t n)
{
    size_t j = 0;
    if (n < 3) return;
    buf[j++] = '\'';
    for (; *s && j + 3 < n; s++) {
        if (*s == '\'') buf[j++] = '\'';
        buf[j++] = *s;
    }
    buf[j++] = '\'';
    buf[j] = '\0';
}

/* Catalogue mode for one material: the summary row's run, its diagnosis, flows and provenance. */
static int report_catalogue_one(cat_db *cat, const char *cat_path, const char *id, const char *set,
                                const char *out, bs_err *err)
{
    char q[512], sql[1400];
    sql_quote(id, q, sizeof q);
    cJSON *sum = cJSON_CreateObject(), *res = cJSON_CreateObject(), *run = cJSON_CreateObject();
    cJSON *mat = cJSON_CreateObject(), *diag = NULL, *prov = cJSON_CreateObject();
    tb_model *m = NULL;
    res_flow flows[6];
    int nflow = 0;
    tmpdir t = {{0}};
    snprintf(sql, sizeof sql, "SELECT run_id FROM summary WHERE material_id = %s", q);
    int rc = cat_query(cat, sql, collect_row, sum, err);
    const cJSON *rid = cJSON_GetObjectItemCaseSensitive(sum, "run_id");
    if (rc == 0 && !cJSON_IsString(rid))
        rc = bs_fail(err, BS_EINVAL, "%s: material '%s' has no successful result in the catalogue", cat_path,
                     id);
    long long run_id = rc == 0 ? atoll(rid->valuestring) : 0;
    if (rc == 0) {
        snprintf(sql, sizeof sql, "SELECT diagnosis FROM results WHERE run_id = %lld AND material_id = %s",
                 run_id, q);
        rc = cat_query(cat, sql, collect_row, res, err);
    }
    const char *dtext =
        rc == 0 ? cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(res, "diagnosis")) : NULL;
    if (rc == 0 && !(dtext && (diag = cJSON_Parse(dtext))))
        rc = bs_fail(err, BS_EPARSE, "%s: results.diagnosis of '%s' (run %lld) is not JSON", cat_path, id,
                     run_id);
    if (rc == 0) {
        snprintf(sql, sizeof sql,
                 "SELECT run_id, kind, status, started, ended, version, settings, set_path, ranks, "
                 "cmdline FROM runs WHERE run_id = %lld",
                 run_id);
        rc = cat_query(cat, sql, collect_row, run, err);
    }
    if (rc == 0) {
        snprintf(sql, sizeof sql, "SELECT * FROM materials WHERE material_id = %s", q);
        rc = cat_query(cat, sql, collect_row, mat, err);
    }
    /* Stored flows: plane 4 in 2D, planes 0..5 in 3D; a missing artifact is a note, not an error. */
    const cJSON *dimv = diag ? cJSON_GetObjectItemCaseSensitive(diag, "dimension") : NULL;
    int dim = cJSON_IsNumber(dimv) ? dimv->valueint : 3;
    char flow_note[600] = "";
    for (int p = dim == 2 ? 4 : 0; rc == 0 && p < (dim == 2 ? 5 : 6); p++) {
        cat_flow f = {0};
        bs_err ferr;
        bs_err_clear(&ferr);
        if (cat_flow_read(cat, run_id, id, p, &f, &ferr) != 0) {
            snprintf(flow_note, sizeof flow_note, "%s", ferr.msg);
            cat_flow_clear(&f);
            continue;
        }
        flows[nflow++] = (res_flow){f.plane, f.nstring, f.nband, f.kpar, f.wcc};
    }
    if (rc == 0 && set) {
        char src[1200];
        snprintf(src, sizeof src, "%s:%s", set, id);
        if (src_load(src, &m, err) != 0) rc = bs_err_context(err, "report %s", id);
    }
    if (rc == 0) rc = tmpdir_make(&t, err);
    if (rc == 0) {
        cJSON_AddStringToObject(prov, "catalogue", cat_path);
        for (cJSON *x = run->child; x; x = x->next)
            if (!cJSON_IsNull(x)) {
                char key[80];
                snprintf(key, sizeof key, "run %s", x->string);
                cJSON_AddItemToObject(prov, key, cJSON_Duplicate(x, 1));
            }
        for (cJSON *x = mat->child; x; x = x->next)
            if (!cJSON_IsNull(x)) {
                char key[80];
                snprintf(key, sizeof key, "material %s", x->string);
                cJSON_AddItemToObject(prov, key, cJSON_Duplicate(x, 1));
            }
        if (set) cJSON_AddStringToObject(prov, "set read for the figures", set);
        rep_input in = {diag, m, nflow, flows, flow_note, prov};
        rc = rep_write(&in, out, t.path, err);
        tmpdir_remove(&t);
    }
    for (int i = 0; i < nflow; i++)
        free(flows[i].kpar), free(flows[i].wcc);
    tb_model_free(m);
    cJSON_Delete(sum), cJSON_Delete(res), cJSON_Delete(run), cJSON_Delete(mat), cJSON_Delete(diag),
        cJSON_Delete(prov);
    return rc;
}

typedef struct top_rows {
    cJSON *rows;
} top_rows;

static int collect_rows(void *ctx, const cat_row *row, bs_err *err)
{
    top_rows *t = ctx;
    if (row->index < 0) return 0;
    cJSON *o = cJSON_CreateObject();
    for (int i = 0; i < row->ncol; i++)
        cJSON_AddStringToObject(o, row->name[i], row->text[i] ? row->text[i] : "");
    cJSON_AddItemToArray(t->rows, o);
    return 0;
}

static void html_esc(FILE *fp, const char *s)
{
    for (; s && *s; s++) {
        if (*s == '<')
            fputs("&lt;", fp);
        else if (*s == '>')
            fputs("&gt;", fp);
        else if (*s == '&')
            fputs("&amp;", fp);
        else if (*s == '"')
            fputs("&quot;", fp);
        else
            fputc(*s, fp);
    }
}

/* The file name of a material's page: its id is [A-Za-z0-9_.+-] (card rule), safe as a name. */
static int report_top(cat_db *cat, const char *cat_path, long n, const char *set, const char *dir,
                      bs_err *err)
{
    if (mkdir(dir, 0777) != 0 && errno != EEXIST)
        return bs_fail(err, BS_EIO, "%s: cannot create the folder", dir);
    top_rows t = {cJSON_CreateArray()};
    char sql[300];
    snprintf(sql, sizeof sql,
             "SELECT material_id, class, confidence, z2, chern, n_weyl, gap_indirect_ev, why "
             "FROM candidates LIMIT %ld",
             n);
    int rc = cat_query(cat, sql, collect_rows, &t, err);
    char path[1200];
    snprintf(path, sizeof path, "%s/index.html", dir);
    FILE *fp = rc == 0 ? fopen(path, "w") : NULL;
    if (rc == 0 && !fp) rc = bs_fail(err, BS_EIO, "%s: cannot be written", path);
    if (fp) {
        fprintf(fp,
                "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>bandsieve candidates"
                "</title><style>body{font-family:sans-serif;max-width:980px;margin:1.5em "
                "auto}table{border-collapse:"
                "collapse}th,td{border:1px solid #ccd;padding:.2em "
                ".6em}th{background:#f2f3f7}</style></head><body>\n"
                "<h1>Best %d candidates</h1>\n<p>From ",
                cJSON_GetArraySize(t.rows));
        html_esc(fp, cat_path);
        fprintf(fp, " (view <code>candidates</code>: nontrivial with confidence at least 0.7 first, then by "
                    "gap).</p>\n"
                    "<table><tr><th>material</th><th>class</th><th>confidence</th><th>Z2</th><th>Chern</th>"
                    "<th>Weyl nodes</th><th>indirect gap (eV)</th><th>why listed</th></tr>\n");
    }
    const cJSON *r;
    cJSON_ArrayForEach(r, t.rows)
    {
        if (rc != 0) break;
        const char *id = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(r, "material_id"));
        snprintf(path, sizeof path, "%s/%s.html", dir, id);
        rc = report_catalogue_one(cat, cat_path, id, set, path, err);
        fprintf(fp, "<tr><td><a href=\"%s.html\">", id);
        html_esc(fp, id);
        fprintf(fp, "</a></td>");
        static const char *const cols[] = {"class",  "confidence",      "z2", "chern",
                                           "n_weyl", "gap_indirect_ev", "why"};
        for (size_t c = 0; c < sizeof cols / sizeof cols[0]; c++) {
            fprintf(fp, "<td>");
            html_esc(fp, cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(r, cols[c])));
            fprintf(fp, "</td>");
        }
        fprintf(fp, "</tr>\n");
    }
    if (fp) {
        fprintf(fp, "</table>\n<p>Written by bandsieve %s.</p></body></html>\n", BS_VERSION);
        if (fclose(fp) != 0 && rc == 0) rc = bs_fail(err, BS_EIO, "%s/index.html: cannot be written", dir);
    }
    cJSON_Delete(t.rows);
    return rc;
}

int cmd_report(int argc, char **argv)
{
    static const struct option longopts[] = {
        {"output", required_argument, NULL, 'o'}, {"catalogue", required_argument, NULL, 'c'},
        {"top", required_argument, NULL, 't'},    {"mesh", required_argument, NULL, 'm'},
        {"help", no_argument, NULL, 'h'},         {NULL, 0, NULL, 0}};
    const char *out = NULL, *catp = NULL;
    long top = 0, mesh = 0;
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "ho:c:", longopts, NULL)) != -1) {
        if (c == 'h') {
            report_help(stdout);
            return 0;
        }
        if (c == 'o')
            out = optarg;
        else if (c == 'c')
            catp = optarg;
        else if (c == 't' && cli_parse_int(optarg, 1, 100000, &top) == 0)
            continue;
        else if (c == 'm' && cli_parse_int(optarg, 4, 400, &mesh) == 0)
            continue;
        else {
            if (c == 't' || c == 'm') fprintf(stderr, "bandsieve report: bad value '%s'\n", optarg);
            report_help(stderr);
            return 2;
        }
    }
    int npos = argc - optind;
    int ok = out && (catp ? (top ? npos <= 1 : (npos == 1 || npos == 2)) : (!top && npos == 1));
    if (!ok) {
        fprintf(stderr, "bandsieve report: need SOURCE -o FILE, -c CAT ID [SET] -o FILE, or --top N -c CAT "
                        "[SET] -o DIR\n");
        report_help(stderr);
        return 2;
    }
    bs_err err;
    bs_err_clear(&err);
    int rc;
    if (!catp) {
        rc = report_source(argv[optind], out, (int)mesh, &err);
    } else {
        cat_db *cat = NULL;
        rc = cat_open(catp, CAT_RO, &cat, &err);
        const char *set = top ? (npos == 1 ? argv[optind] : NULL) : (npos == 2 ? argv[optind + 1] : NULL);
        if (rc == 0 && top)
            rc = report_top(cat, catp, top, set, out, &err);
        else if (rc == 0)
            rc = report_catalogue_one(cat, catp, argv[optind], set, out, &err);
        bs_err cerr;
        if (cat) cat_close(cat, &cerr);
    }
    if (rc != 0) {
        fprintf(stderr, "bandsieve report: %s\n", err.msg);
        return rc == BS_EUSAGE ? 2 : 1;
    }
    return 0;
}
