/* The HTML report of one material (see report.h). The page has no external resources: styles are
 * inline, figures are inline SVG or base64 PNG, so it opens offline and can be mailed as one file. */
#include "report.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/berrymap.h"
#include "bandsieve/config.h"
#include "bandsieve/plot.h"
#include "bandpath.h"
#include "figures.h"

extern const char bs_readme_caveats[];

typedef struct sbuf {
    char *p;
    size_t n, cap;
    int oom;
} sbuf;

static void sb_add(sbuf *b, const char *s, size_t len)
{
    if (b->oom) return;
    if (b->n + len + 1 > b->cap) {
        size_t cap = b->cap ? b->cap : 65536;
        while (cap < b->n + len + 1)
            cap *= 2;
        char *p = realloc(b->p, cap);
        if (!p) {
            b->oom = 1;
            return;
        }
        b->p = p, b->cap = cap;
    }
    memcpy(b->p + b->n, s, len);
    b->n += len;
    b->p[b->n] = '\0';
}

static void sb_printf(sbuf *b, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void sb_printf(sbuf *b, const char *fmt, ...)
{
    char tmp[4096];
    va_list ap;
    va_start(ap, fmt);
    int n = vsnprintf(tmp, sizeof tmp, fmt, ap);
    va_end(ap);
    if (n > 0) sb_add(b, tmp, (size_t)n < sizeof tmp ? (size_t)n : sizeof tmp - 1);
}

/* Text with HTML's special characters escaped. */
static void sb_esc(sbuf *b, const char *s)
{
    for (; s && *s; s++) {
        switch (*s) {
        case '<':
            sb_add(b, "&lt;", 4);
            break;
        case '>':
            sb_add(b, "&gt;", 4);
            break;
        case '&':
            sb_add(b, "&amp;", 5);
            break;
        case '"':
            sb_add(b, "&quot;", 6);
            break;
        default:
            sb_add(b, s, 1);
        }
    }
}

static int read_file(const char *path, char **out, size_t *len)
{
    FILE *fp = fopen(path, "rb");
    if (!fp) return -1;
    fseek(fp, 0, SEEK_END);
    long n = ftell(fp);
    fseek(fp, 0, SEEK_SET);
    char *p = n >= 0 ? malloc((size_t)n + 1) : NULL;
    if (!p || fread(p, 1, (size_t)n, fp) != (size_t)n) {
        free(p);
        fclose(fp);
        return -1;
    }
    fclose(fp);
    p[n] = '\0';
    *out = p, *len = (size_t)n;
    return 0;
}

/* The SVG file inline: from its <svg element on, with the fixed size replaced by the page width. */
static int embed_svg(sbuf *b, const char *path)
{
    char *text;
    size_t len;
    if (read_file(path, &text, &len) != 0) return -1;
    char *svg = strstr(text, "<svg");
    char *end = svg ? strchr(svg, '>') : NULL;
    if (!end) {
        free(text);
        return -1;
    }
    sb_add(b, "<svg class=\"fig\" preserveAspectRatio=\"xMidYMid meet\"",
           strlen("<svg class=\"fig\" preserveAspectRatio=\"xMidYMid meet\""));
    /* Keep the root's attributes except width and height. */
    char *p = svg + 4;
    while (p < end) {
        while (p < end && (*p == ' ' || *p == '\n' || *p == '\t'))
            p++;
        char *q = p;
        int quote = 0;
        while (q < end && (quote || (*q != ' ' && *q != '\n' && *q != '\t'))) {
            if (*q == '"') quote = !quote;
            q++;
        }
        if (q > p && strncmp(p, "width=", 6) != 0 && strncmp(p, "height=", 7) != 0) {
            sb_add(b, " ", 1);
            sb_add(b, p, (size_t)(q - p));
        }
        p = q;
    }
    sb_add(b, end, len - (size_t)(end - text));
    free(text);
    return 0;
}

static int embed_png(sbuf *b, const char *path, const char *alt)
{
    static const char tbl[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    char *data;
    size_t len;
    if (read_file(path, &data, &len) != 0) return -1;
    sb_printf(b, "<img class=\"fig\" alt=\"");
    sb_esc(b, alt);
    sb_printf(b, "\" src=\"data:image/png;base64,");
    const unsigned char *u = (const unsigned char *)data;
    for (size_t i = 0; i < len; i += 3) {
        unsigned v =
            (unsigned)u[i] << 16 | (i + 1 < len ? (unsigned)u[i + 1] << 8 : 0) | (i + 2 < len ? u[i + 2] : 0);
        char q[4] = {tbl[v >> 18 & 63], tbl[v >> 12 & 63], i + 1 < len ? tbl[v >> 6 & 63] : '=',
                     i + 2 < len ? tbl[v & 63] : '='};
        sb_add(b, q, 4);
    }
    sb_printf(b, "\">");
    free(data);
    return 0;
}

static void note(sbuf *b, const char *fmt, const char *arg)
{
    sb_printf(b, "<p class=\"note\">");
    char tmp[1024];
    snprintf(tmp, sizeof tmp, fmt, arg ? arg : "");
    sb_esc(b, tmp);
    sb_printf(b, "</p>\n");
}

static const char *jstr(const cJSON *o, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    return cJSON_IsString(v) ? v->valuestring : NULL;
}

static int jnum(const cJSON *o, const char *key, double *out)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
    if (!cJSON_IsNumber(v)) return 0;
    *out = v->valuedouble;
    return 1;
}

/* A JSON value as short text ("1;111" for a 3D Z2 list, numbers compactly). */
static void value_text(const cJSON *v, char *buf, size_t n)
{
    if (!v || cJSON_IsNull(v))
        snprintf(buf, n, "-");
    else if (cJSON_IsBool(v))
        snprintf(buf, n, "%s", cJSON_IsTrue(v) ? "yes" : "no");
    else if (cJSON_IsNumber(v))
        snprintf(buf, n, "%.6g", v->valuedouble);
    else if (cJSON_IsString(v))
        snprintf(buf, n, "%s", v->valuestring);
    else {
        char *t = cJSON_PrintUnformatted(v);
        snprintf(buf, n, "%s", t ? t : "?");
        free(t);
    }
}

static void z2_text(const cJSON *v, char *buf, size_t n)
{
    int cnt = cJSON_IsArray(v) ? cJSON_GetArraySize(v) : 0;
    if (cnt == 4)
        snprintf(buf, n, "%d;%d%d%d", cJSON_GetArrayItem(v, 0)->valueint, cJSON_GetArrayItem(v, 1)->valueint,
                 cJSON_GetArrayItem(v, 2)->valueint, cJSON_GetArrayItem(v, 3)->valueint);
    else if (cnt == 1)
        snprintf(buf, n, "%d", cJSON_GetArrayItem(v, 0)->valueint);
    else
        snprintf(buf, n, "-");
}

static void row(sbuf *b, const char *name, const char *value)
{
    sb_printf(b, "<tr><th>");
    sb_esc(b, name);
    sb_printf(b, "</th><td>");
    sb_esc(b, value);
    sb_printf(b, "</td></tr>\n");
}

static void head(sbuf *b, const char *id, const char *cls)
{
    sb_printf(b, "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>");
    sb_esc(b, id);
    sb_printf(b, ": ");
    sb_esc(b, cls);
    sb_printf(
        b, "</title>\n<style>\n"
           "body{font-family:sans-serif;max-width:980px;margin:1.5em auto;color:#1c1c24;line-height:1.4}\n"
           "h1{font-size:1.6em;margin-bottom:.2em} h2{border-bottom:1px solid #ccd;margin-top:1.6em}\n"
           ".verdict{background:#eef1f6;padding:.8em 1em;border-left:6px solid #1e50a0}\n"
           ".bar{display:inline-block;height:.8em;background:#1e50a0;vertical-align:middle}\n"
           ".barbg{display:inline-block;width:200px;height:.8em;background:#d8dce6;vertical-align:middle}\n"
           "table{border-collapse:collapse;margin:.5em 0} th,td{border:1px solid #ccd;padding:.2em .6em;"
           "text-align:left;font-size:.92em} th{background:#f2f3f7}\n"
           ".fig{width:100%%;height:auto;border:1px solid #e2e4ea} .note{color:#555;font-style:italic}\n"
           "code{background:#f2f3f7;padding:0 .2em}\n</style></head><body>\n");
}

static void verdict(sbuf *b, const cJSON *d)
{
    const char *id = jstr(d, "id"), *cls = jstr(d, "class"), *reason = jstr(d, "reason"),
               *formula = jstr(d, "formula");
    double conf = 0;
    int has_conf = jnum(d, "confidence", &conf);
    sb_printf(b, "<h1>");
    sb_esc(b, id ? id : "?");
    if (formula && *formula) {
        sb_printf(b, " <small>(");
        sb_esc(b, formula);
        sb_printf(b, ")</small>");
    }
    sb_printf(b, "</h1>\n<div class=\"verdict\"><p><b>Verdict:</b> ");
    sb_esc(b, cls ? cls : "no result");
    if (has_conf)
        sb_printf(
            b,
            "</p><p><b>Confidence:</b> %.2f <span class=\"barbg\"><span class=\"bar\" style=\"width:%dpx\">"
            "</span></span>",
            conf, (int)lround(200 * fmin(fmax(conf, 0), 1)));
    sb_printf(b, "</p><p><b>Reason:</b> ");
    sb_esc(b, reason ? reason : "-");
    sb_printf(b, "</p></div>\n");
}

static void numbers(sbuf *b, const cJSON *d)
{
    static const char *const keys[][2] = {{"dimension", "dimension"},
                                          {"norb", "basis states"},
                                          {"occupied_bands", "occupied bands"},
                                          {"gap_direct_eV", "direct gap (eV)"},
                                          {"gap_indirect_eV", "indirect gap (eV)"},
                                          {"k_gap_direct", "direct gap at k (reduced)"},
                                          {"time_reversal", "time reversal"},
                                          {"inversion", "inversion"},
                                          {"z2_status", "Z2 status"},
                                          {"z2_note", "Z2 note"},
                                          {"chern", "Chern number"},
                                          {"plane_chern", "plane Chern numbers"},
                                          {"chern_status", "Chern status"},
                                          {"net_chirality", "net chirality of the nodes"},
                                          {"nodal_line", "nodal line"},
                                          {"mesh", "k-mesh"},
                                          {"k_points", "k-points evaluated"}};
    char v[512];
    sb_printf(b, "<h2>Key numbers</h2>\n<table>\n");
    z2_text(cJSON_GetObjectItemCaseSensitive(d, "z2"), v, sizeof v);
    row(b, "Z2 (combined)", v);
    z2_text(cJSON_GetObjectItemCaseSensitive(d, "z2_parity"), v, sizeof v);
    row(b, "Z2 from parities", v);
    z2_text(cJSON_GetObjectItemCaseSensitive(d, "z2_wcc"), v, sizeof v);
    row(b, "Z2 from Wannier-centre flow", v);
    for (size_t i = 0; i < sizeof keys / sizeof keys[0]; i++) {
        const cJSON *x = cJSON_GetObjectItemCaseSensitive(d, keys[i][0]);
        if (!x) continue;
        value_text(x, v, sizeof v);
        row(b, keys[i][1], v);
    }
    sb_printf(b, "</table>\n");
}

static void section_bands(sbuf *b, const rep_input *in, const char *tmpdir)
{
    sb_printf(b, "<h2>Bands along the high-symmetry path</h2>\n");
    if (!in->model) {
        note(b,
             "Not available: the report was made from the catalogue alone; give the set to draw the bands.%s",
             "");
        return;
    }
    band_path bp;
    bs_err err;
    bs_err_clear(&err);
    char path[1200], title[200];
    snprintf(path, sizeof path, "%s/bands.svg", tmpdir);
    snprintf(title, sizeof title, "%s: bands", in->model->id);
    if (band_path_compute(in->model, "auto", 240, NULL, NULL, &bp, &err) != 0 ||
        fig_bands(path, title, &bp, NULL, &err) != 0 || embed_svg(b, path) != 0) {
        note(b, "Not drawn: %s", err.msg[0] ? err.msg : "figure could not be read back");
    } else {
        char desc[512], txt[800];
        kpath_describe(&bp.path, desc, sizeof desc);
        if (bp.gapped)
            snprintf(txt, sizeof txt,
                     "Path %s (%s lattice, Comput. Mater. Sci. 49, 299 (2010)). Shaded: the gap at the "
                     "filling on the path, %.4f eV; dashed: the Fermi level (%s). The zone's gap (key "
                     "numbers) can be "
                     "smaller than the path's.",
                     desc, bp.path.lattice, bp.cbm_ev - bp.vbm_ev, bp.fermi_source);
        else
            snprintf(txt, sizeof txt,
                     "Path %s (%s lattice). The bands at the filling overlap on the path: no gap.", desc,
                     bp.path.lattice);
        sb_printf(b, "<p>");
        sb_esc(b, txt);
        sb_printf(b, "</p>\n");
    }
    band_path_clear(&bp);
}

static void section_parities(sbuf *b, const cJSON *d)
{
    sb_printf(b, "<h2>Parities at the time-reversal-invariant momenta</h2>\n");
    const cJSON *par = cJSON_GetObjectItemCaseSensitive(d, "parities");
    const cJSON *delta = par ? cJSON_GetObjectItemCaseSensitive(par, "delta") : NULL;
    const cJSON *odd = par ? cJSON_GetObjectItemCaseSensitive(par, "odd_occupied") : NULL;
    int n = cJSON_IsArray(delta) ? cJSON_GetArraySize(delta) : 0;
    if (n == 0) {
        note(b, "Not applicable: the parity criterion needs inversion and time reversal%s.", "");
        return;
    }
    sb_printf(b,
              "<p>One parity per Kramers pair, multiplied over the occupied bands (Phys. Rev. B 76, 045302 "
              "(2007)); the strong index is the product over all TRIMs, the weak ones over the planes "
              "k<sub>i</sub> "
              "= 1/2 (Phys. Rev. Lett. 98, 106803 (2007)).</p>\n<table><tr><th>TRIM (n1 n2 "
              "n3)/2</th><th>&delta;</th>"
              "<th>occupied states of odd parity</th></tr>\n");
    for (int t = 0; t < n; t++) {
        const cJSON *o = cJSON_IsArray(odd) ? cJSON_GetArrayItem(odd, t) : NULL;
        sb_printf(b, "<tr><td>%d %d %d</td><td>%+d</td><td>%d</td></tr>\n", t & 1, (t >> 1) & 1, (t >> 2) & 1,
                  cJSON_GetArrayItem(delta, t)->valueint, o ? o->valueint : -1);
    }
    sb_printf(b, "</table>\n");
}

int rep_flow_crossings(const res_flow *f)
{
    int count = 0;
    for (int s = 0; s + 1 < f->nstring; s++) {
        double z0 = fig_largest_gap_mid(f->nband, f->wcc + (size_t)s * f->nband);
        double z1 = fig_largest_gap_mid(f->nband, f->wcc + (size_t)(s + 1) * f->nband);
        double lo = fmin(z0, z1), hi = fmax(z0, z1);
        for (int j = 0; j < f->nband; j++) {
            double x = f->wcc[(size_t)(s + 1) * f->nband + j];
            count += x > lo && x < hi;
        }
    }
    return count;
}

static void section_flows(sbuf *b, const rep_input *in, const char *tmpdir)
{
    sb_printf(b, "<h2>Wannier-centre flows</h2>\n");
    if (in->nflow == 0) {
        note(b, "No flow: %s", in->flow_note ? in->flow_note : "none stored for this entry");
        return;
    }
    char path[1200];
    bs_err err;
    bs_err_clear(&err);
    snprintf(path, sizeof path, "%s/flows.svg", tmpdir);
    sb_printf(
        b, "<p>Hybrid Wannier centres of the occupied bands against the pumping parameter, and the line "
           "through the largest gap of each string; the parity of the number of centres that jump over it is "
           "the plane's Z2 (Phys. Rev. B 83, 235401 (2011); Phys. Rev. B 84, 075119 (2011)).</p>\n<table><tr>"
           "<th>plane</th><th>strings</th><th>jumps over the line</th><th>Z2</th></tr>\n");
    for (int p = 0; p < in->nflow; p++) {
        int c = rep_flow_crossings(&in->flows[p]);
        sb_printf(b, "<tr><td>%d</td><td>%d</td><td>%d</td><td>%d</td></tr>\n", in->flows[p].plane,
                  in->flows[p].nstring, c, c % 2);
    }
    sb_printf(b, "</table>\n");
    if (fig_flows(path, jstr(in->diag, "id"), in->nflow, in->flows, NULL, &err) != 0 ||
        embed_svg(b, path) != 0)
        note(b, "Not drawn: %s", err.msg[0] ? err.msg : "figure could not be read back");
}

static void section_curvature(sbuf *b, const rep_input *in, const char *tmpdir)
{
    const char *cs = jstr(in->diag, "chern_status");
    int dim = in->model ? in->model->dim : 0;
    sb_printf(b, "<h2>Berry curvature</h2>\n");
    if (!in->model) {
        note(b, "Not available: needs the model (give the set)%s.", "");
        return;
    }
    if (dim != 2) {
        note(b,
             "Drawn for 2D entries; for a 3D entry use: bandsieve plot curvature SOURCE --plane k3=0 -o "
             "FILE%s",
             "");
        return;
    }
    berry_map bm;
    bs_err err;
    bs_err_clear(&err);
    char path[1200];
    snprintf(path, sizeof path, "%s/curvature.png", tmpdir);
    if (berry_map_plane(in->model, in->model->nocc, 2, 0, 48, &bm, &err) != 0 ||
        fig_berry(path, in->model->id, &bm, NULL, &err) != 0 ||
        embed_png(b, path, "Berry curvature map") != 0) {
        note(b, "Not drawn: %s", err.msg);
    } else {
        char txt[400];
        snprintf(
            txt, sizeof txt,
            "Occupied bands on a 48 x 48 mesh, link variables (J. Phys. Soc. Jpn. 74, 1674 "
            "(2005)): flux/2 pi = %.4f, largest plaquette phase %.2f rad (above ~1 the mesh is too coarse); "
            "Chern status of the diagnosis: %s.",
            bm.flux, bm.max_f, cs ? cs : "-");
        sb_printf(b, "<p>");
        sb_esc(b, txt);
        sb_printf(b, "</p>\n");
    }
    berry_map_clear(&bm);
}

static void section_nodes(sbuf *b, const rep_input *in, const char *tmpdir)
{
    const cJSON *nodes = cJSON_GetObjectItemCaseSensitive(in->diag, "weyl_nodes");
    int n = cJSON_IsArray(nodes) ? cJSON_GetArraySize(nodes) : 0;
    sb_printf(b, "<h2>Weyl nodes</h2>\n");
    if (n == 0) {
        note(b, "No Weyl node was found%s.", "");
        return;
    }
    double(*k)[3] = calloc((size_t)n, sizeof *k);
    int *ch = calloc((size_t)n, sizeof *ch);
    if (!k || !ch) {
        free(k);
        free(ch);
        return;
    }
    sb_printf(
        b,
        "<p>Nodes located by minimising the direct gap, chirality from the Berry flux through a small cube "
        "(Nucl. Phys. B 185, 20 (1981)); they come in pairs of opposite chirality.</p>\n"
        "<table><tr><th>k (reduced)</th><th>chirality</th><th>energy (eV)</th><th>gap (eV)</th></tr>\n");
    for (int i = 0; i < n; i++) {
        const cJSON *o = cJSON_GetArrayItem(nodes, i), *kk = cJSON_GetObjectItemCaseSensitive(o, "k");
        for (int c = 0; c < 3 && cJSON_GetArraySize(kk) > c; c++)
            k[i][c] = cJSON_GetArrayItem(kk, c)->valuedouble;
        double chir = 0, e = 0, g = 0;
        jnum(o, "chirality", &chir), jnum(o, "energy_eV", &e), jnum(o, "gap_eV", &g);
        ch[i] = (int)chir;
        sb_printf(b, "<tr><td>%.4f %.4f %.4f</td><td>%+d</td><td>%.5f</td><td>%.2e</td></tr>\n", k[i][0],
                  k[i][1], k[i][2], ch[i], e, g);
    }
    sb_printf(b, "</table>\n");
    char path[1200];
    bs_err err;
    bs_err_clear(&err);
    snprintf(path, sizeof path, "%s/nodes.svg", tmpdir);
    if (fig_nodes(path, jstr(in->diag, "id"), n, (const double(*)[3])k, ch, 2, NULL, &err) != 0 ||
        embed_svg(b, path) != 0)
        note(b, "Not drawn: %s", err.msg[0] ? err.msg : "figure could not be read back");
    free(k);
    free(ch);
}

static void section_surface(sbuf *b, const cJSON *d)
{
    const cJSON *s = cJSON_GetObjectItemCaseSensitive(d, "surface");
    if (!s) return;
    sb_printf(
        b,
        "<h2>Surface</h2>\n<p>Stored surface evidence (screen --surfaces): Fermi-level crossings of surface "
        "states between pairs of surface TRIMs, each beside the parity the bulk parities require, "
        "&pi;<sub>a</sub>&pi;<sub>b</sub> (Phys. Rev. Lett. 98, 106803 (2007)).</p>\n<table>\n");
    char v[512];
    for (const cJSON *x = s->child; x; x = x->next) {
        if (x->string && strcmp(x->string, "pairs") == 0) continue;
        value_text(x, v, sizeof v);
        row(b, x->string ? x->string : "?", v);
    }
    sb_printf(b, "</table>\n");
    const cJSON *pairs = cJSON_GetObjectItemCaseSensitive(s, "pairs"), *p;
    if (!cJSON_IsArray(pairs) || cJSON_GetArraySize(pairs) == 0) return;
    sb_printf(b, "<table><tr><th>between</th><th>top crossings</th><th>bottom crossings</th><th>required</th>"
                 "<th>agrees</th></tr>\n");
    cJSON_ArrayForEach(p, pairs)
    {
        char bt[64], top[32], bot[32], exp[32], ag[32];
        value_text(cJSON_GetObjectItemCaseSensitive(p, "between"), bt, sizeof bt);
        value_text(cJSON_GetObjectItemCaseSensitive(p, "top"), top, sizeof top);
        value_text(cJSON_GetObjectItemCaseSensitive(p, "bottom"), bot, sizeof bot);
        const cJSON *e = cJSON_GetObjectItemCaseSensitive(p, "expected_odd");
        snprintf(exp, sizeof exp, "%s", cJSON_IsBool(e) ? (cJSON_IsTrue(e) ? "odd" : "even") : "unknown");
        value_text(cJSON_GetObjectItemCaseSensitive(p, "agrees"), ag, sizeof ag);
        sb_printf(b, "<tr><td>");
        sb_esc(b, bt);
        sb_printf(b, "</td><td>%s</td><td>%s</td><td>%s</td><td>%s</td></tr>\n", top, bot, exp, ag);
    }
    sb_printf(b, "</table>\n");
}

/* The README's caveats: '## ' heading dropped, '* ' items to a list, `code` to <code>. */
static void section_caveats(sbuf *b)
{
    sb_printf(b, "<h2>What a tight-binding screen can and cannot tell</h2>\n");
    const char *p = strchr(bs_readme_caveats, '\n');
    int in_list = 0, in_item = 0, in_par = 0;
    while (p && *p) {
        p++;
        const char *e = strchr(p, '\n');
        size_t len = e ? (size_t)(e - p) : strlen(p);
        char line[1024];
        snprintf(line, sizeof line, "%.*s", (int)(len < sizeof line ? len : sizeof line - 1), p);
        const char *t = line;
        while (*t == ' ')
            t++;
        if (!*t) {
            if (in_item) sb_printf(b, "</li>"), in_item = 0;
            if (in_list) sb_printf(b, "</ul>\n"), in_list = 0;
            if (in_par) sb_printf(b, "</p>\n"), in_par = 0;
        } else if (t == line && strncmp(t, "* ", 2) == 0) {
            if (in_item) sb_printf(b, "</li>\n");
            if (!in_list) sb_printf(b, "<ul>"), in_list = 1;
            sb_printf(b, "<li>");
            in_item = 1;
            t += 2;
        } else if (!in_list && !in_par) {
            sb_printf(b, "<p>");
            in_par = 1;
        }
        if (*t) {
            int code = 0;
            char *s = (char *)t;
            for (char *q = s; *q; q++) {
                if (*q != '`') continue;
                *q = '\0';
                sb_esc(b, s);
                sb_printf(b, code ? "</code>" : "<code>");
                code = !code;
                s = q + 1;
            }
            sb_esc(b, s);
            sb_printf(b, " ");
        }
        p = e;
    }
    if (in_item) sb_printf(b, "</li>");
    if (in_list) sb_printf(b, "</ul>\n");
    if (in_par) sb_printf(b, "</p>\n");
}

static void section_provenance(sbuf *b, const rep_input *in)
{
    sb_printf(b, "<h2>Provenance</h2>\n<table>\n");
    char v[2048];
    for (const cJSON *x = in->provenance ? in->provenance->child : NULL; x; x = x->next) {
        value_text(x, v, sizeof v);
        row(b, x->string ? x->string : "?", v);
    }
    row(b, "report written by", "bandsieve " BS_VERSION);
    sb_printf(b, "</table>\n");
}

int rep_write(const rep_input *in, const char *out_path, const char *tmpdir, bs_err *err)
{
    sbuf b = {0};
    const char *id = jstr(in->diag, "id"), *cls = jstr(in->diag, "class");
    head(&b, id ? id : "?", cls ? cls : "?");
    verdict(&b, in->diag);
    if (!plot_available())
        note(&b,
             "This bandsieve was built without PLplot: the figures are missing, the numbers are all here.%s",
             "");
    numbers(&b, in->diag);
    section_bands(&b, in, tmpdir);
    section_parities(&b, in->diag);
    section_flows(&b, in, tmpdir);
    section_curvature(&b, in, tmpdir);
    section_nodes(&b, in, tmpdir);
    section_surface(&b, in->diag);
    section_caveats(&b);
    section_provenance(&b, in);
    sb_printf(&b, "</body></html>\n");
    if (b.oom) {
        free(b.p);
        return bs_fail(err, BS_ENOMEM, "out of memory for the report");
    }
    FILE *fp = fopen(out_path, "w");
    int rc =
        fp && fwrite(b.p, 1, b.n, fp) == b.n ? 0 : bs_fail(err, BS_EIO, "%s: cannot be written", out_path);
    if (fp && fclose(fp) != 0 && rc == 0) rc = bs_fail(err, BS_EIO, "%s: cannot be written", out_path);
    free(b.p);
    return rc;
}
