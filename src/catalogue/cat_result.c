/* Result rows: a worker's diagnosis (the JSON object of `inspect --json`) becomes one row of
 * results, its Weyl nodes rows of nodes, and its Wannier-centre flows HDF5 datasets indexed in
 * artifacts. Every key is checked before anything is written, so a bad diagnosis writes nothing. */
#include "cat_internal.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

typedef struct put_ctx {
    cat_db *cat;
    sqlite3_stmt *st;     /* the results INSERT being bound */
    const cJSON *diag;    /* may be NULL */
    const char *mid;      /* material id, for messages */
    bs_err *err;
} put_ctx;

typedef struct node_in {
    double k[3];
    int has_chirality, chirality;
    int has_energy, has_gap;
    double energy_ev, gap_ev;
} node_in;

static int key_fail(const put_ctx *pc, const char *key, const char *expected)
{
    return bs_fail(pc->err, BS_EPARSE, "material %s: diagnosis key \"%s\": expected %s", pc->mid, key, expected);
}

static int param(const put_ctx *pc, const char *name)
{
    return sqlite3_bind_parameter_index(pc->st, name);
}

/* A present, non-null key (NULL when missing or JSON null). */
static const cJSON *get(const put_ctx *pc, const char *key)
{
    const cJSON *v = pc->diag ? cJSON_GetObjectItemCaseSensitive(pc->diag, key) : NULL;
    return v && !cJSON_IsNull(v) ? v : NULL;
}

/* An integer-valued JSON number (|v - round(v)| < 1e-9, within int range). */
static int json_int(const cJSON *v, int *out)
{
    if (!cJSON_IsNumber(v)) return -1;
    double d = v->valuedouble, r = nearbyint(d);
    if (fabs(d - r) > 1e-9 || r < -2147483647.0 || r > 2147483647.0) return -1;
    *out = (int)r;
    return 0;
}

static int bind_num(const put_ctx *pc, const char *name, const char *key)
{
    const cJSON *v = get(pc, key);
    if (!v) return 0;
    if (!cJSON_IsNumber(v)) return key_fail(pc, key, "a number");
    sqlite3_bind_double(pc->st, param(pc, name), v->valuedouble);
    return 0;
}

static int bind_int(const put_ctx *pc, const char *name, const char *key)
{
    const cJSON *v = get(pc, key);
    int x = 0;
    if (!v) return 0;
    if (json_int(v, &x) != 0) return key_fail(pc, key, "an integer");
    sqlite3_bind_int(pc->st, param(pc, name), x);
    return 0;
}

/* true/false, or 0/1 as numbers. */
static int bind_bool(const put_ctx *pc, const char *name, const char *key)
{
    const cJSON *v = get(pc, key);
    int x = 0;
    if (!v) return 0;
    if (cJSON_IsBool(v)) x = cJSON_IsTrue(v);
    else if (json_int(v, &x) != 0 || (x != 0 && x != 1)) return key_fail(pc, key, "true or false");
    sqlite3_bind_int(pc->st, param(pc, name), x);
    return 0;
}

static int bind_str(const put_ctx *pc, const char *name, const char *key)
{
    const cJSON *v = get(pc, key);
    if (!v) return 0;
    if (!cJSON_IsString(v)) return key_fail(pc, key, "a string");
    sqlite3_bind_text(pc->st, param(pc, name), v->valuestring, -1, SQLITE_TRANSIENT);
    return 0;
}

/* Z2 indices as text: [nu] -> "nu" (2D), [nu0, nu1, nu2, nu3] -> "nu0;nu1nu2nu3" (3D), the
 * strong index before the semicolon and the weak ones after, as usually written
 * (Phys. Rev. Lett. 98, 106803 (2007)). */
static int bind_z2(const put_ctx *pc, const char *name, const char *key)
{
    const cJSON *v = get(pc, key);
    if (!v) return 0;
    int n = cJSON_IsArray(v) ? cJSON_GetArraySize(v) : -1;
    int nu[4] = {0, 0, 0, 0};
    const char *expected = "a list of 1 (2D) or 4 (3D) indices, each 0 or 1";
    if (n != 1 && n != 4) return key_fail(pc, key, expected);
    for (int i = 0; i < n; i++)
        if (json_int(cJSON_GetArrayItem(v, i), &nu[i]) != 0 || (nu[i] != 0 && nu[i] != 1)) return key_fail(pc, key, expected);
    char text[16];
    if (n == 1) snprintf(text, sizeof text, "%d", nu[0]);
    else snprintf(text, sizeof text, "%d;%d%d%d", nu[0], nu[1], nu[2], nu[3]);
    sqlite3_bind_text(pc->st, param(pc, name), text, -1, SQLITE_TRANSIENT);
    return 0;
}

/* The six plane Chern numbers (planes as in diag_flow.plane) as "c0;c1;c2;c3;c4;c5". */
static int bind_plane_chern(const put_ctx *pc, const char *name, const char *key)
{
    const cJSON *v = get(pc, key);
    if (!v) return 0;
    if (!cJSON_IsArray(v) || cJSON_GetArraySize(v) != 6) return key_fail(pc, key, "a list of 6 integers");
    char text[96] = "";
    size_t len = 0;
    for (int i = 0; i < 6; i++) {
        int c = 0;
        if (json_int(cJSON_GetArrayItem(v, i), &c) != 0) return key_fail(pc, key, "a list of 6 integers");
        len += (size_t)snprintf(text + len, sizeof text - len, i ? ";%d" : "%d", c);
    }
    sqlite3_bind_text(pc->st, param(pc, name), text, -1, SQLITE_TRANSIENT);
    return 0;
}

/* A method status: one of the names diag_to_json writes, "na" for "not applicable", or the
 * DIAG_* number of diagnosis.h (0 not applicable .. 3 disagree). */
static int bind_method_status(const put_ctx *pc, const char *name, const char *key)
{
    static const char *const names[] = {"not applicable", "done", "ambiguous", "disagree"};
    const cJSON *v = get(pc, key);
    int x = -1;
    if (!v) return 0;
    if (cJSON_IsString(v)) {
        for (int i = 0; i < 4; i++)
            if (strcmp(v->valuestring, names[i]) == 0) x = i;
        if (strcmp(v->valuestring, "na") == 0) x = 0;
    } else if (json_int(v, &x) != 0) {
        x = -1;
    }
    if (x < 0 || x > 3)
        return key_fail(pc, key, "one of \"not applicable\", \"done\", \"ambiguous\", \"disagree\" (or 0..3)");
    sqlite3_bind_text(pc->st, param(pc, name), names[x], -1, SQLITE_STATIC);
    return 0;
}

/* n numbers of a JSON list into out. */
static int json_vec(const cJSON *v, int n, double *out)
{
    if (!cJSON_IsArray(v) || cJSON_GetArraySize(v) != n) return -1;
    int i = 0;
    for (const cJSON *c = v->child; c; c = c->next, i++) {
        if (!cJSON_IsNumber(c)) return -1;
        out[i] = c->valuedouble;
    }
    return 0;
}

/* The k-point of the direct gap as a JSON list text "[k1,k2,k3]" (reduced coordinates), so that
 * json_extract(k_gap_direct, '$[0]') reads one component. */
static int bind_kvec(const put_ctx *pc, const char *name, const char *key)
{
    const cJSON *v = get(pc, key);
    double k[3];
    if (!v) return 0;
    if (json_vec(v, 3, k) != 0) return key_fail(pc, key, "a list of 3 numbers");
    char text[96];
    snprintf(text, sizeof text, "[%.10g,%.10g,%.10g]", k[0], k[1], k[2]);
    sqlite3_bind_text(pc->st, param(pc, name), text, -1, SQLITE_TRANSIENT);
    return 0;
}

/* Number member `key` of the object obj into parameter name; absent or null stays NULL. */
static int bind_member_num(const put_ctx *pc, const cJSON *obj, const char *key, const char *name, const char *what)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);
    if (!v || cJSON_IsNull(v)) return 0;
    if (!cJSON_IsNumber(v)) return key_fail(pc, what, "an object of numbers and a \"units\" string");
    sqlite3_bind_double(pc->st, param(pc, name), v->valuedouble);
    return 0;
}

static int bind_member_str(const put_ctx *pc, const cJSON *obj, const char *key, const char *name, const char *what)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(obj, key);
    if (!v || cJSON_IsNull(v)) return 0;
    if (!cJSON_IsString(v)) return key_fail(pc, what, "an object of numbers and a \"units\" string");
    sqlite3_bind_text(pc->st, param(pc, name), v->valuestring, -1, SQLITE_TRANSIENT);
    return 0;
}

/* Transport as tr_to_json writes it: "ahc": {"xy", "yz", "zx", "units", "fermi_eV", ...} (yz and zx
 * only in 3D; units "S/cm" in 3D, "e^2/h" in 2D) and "shc": {"xy_z", "units", "fermi_eV", ...}.
 * The Fermi level of the ahc object is stored (the shc one is the same level). */
static int bind_transport(const put_ctx *pc)
{
    const cJSON *ahc = get(pc, "ahc"), *shc = get(pc, "shc");
    int rc = 0;
    if (ahc && !cJSON_IsObject(ahc)) return key_fail(pc, "ahc", "an object of numbers and a \"units\" string");
    if (shc && !cJSON_IsObject(shc)) return key_fail(pc, "shc", "an object of numbers and a \"units\" string");
    if (ahc) {
        rc = rc ? rc : bind_member_num(pc, ahc, "xy", ":ahc_xy", "ahc");
        rc = rc ? rc : bind_member_num(pc, ahc, "yz", ":ahc_yz", "ahc");
        rc = rc ? rc : bind_member_num(pc, ahc, "zx", ":ahc_zx", "ahc");
        rc = rc ? rc : bind_member_str(pc, ahc, "units", ":ahc_units", "ahc");
        rc = rc ? rc : bind_member_num(pc, ahc, "fermi_eV", ":transport_fermi_ev", "ahc");
    }
    if (shc) {
        rc = rc ? rc : bind_member_num(pc, shc, "xy_z", ":shc_xy", "shc");
        rc = rc ? rc : bind_member_str(pc, shc, "units", ":shc_units", "shc");
        if (!ahc) rc = rc ? rc : bind_member_num(pc, shc, "fermi_eV", ":transport_fermi_ev", "shc");
    }
    return rc;
}

static int parse_node(const put_ctx *pc, const cJSON *o, node_in *nd)
{
    const char *expected = "a list of {\"k\": [3 numbers], \"chirality\": integer, \"energy_eV\": number, \"gap_eV\": number}";
    memset(nd, 0, sizeof *nd);
    if (!cJSON_IsObject(o) || json_vec(cJSON_GetObjectItemCaseSensitive(o, "k"), 3, nd->k) != 0)
        return key_fail(pc, "weyl_nodes", expected);
    const cJSON *c = cJSON_GetObjectItemCaseSensitive(o, "chirality");
    const cJSON *e = cJSON_GetObjectItemCaseSensitive(o, "energy_eV");
    const cJSON *g = cJSON_GetObjectItemCaseSensitive(o, "gap_eV");
    if (c && !cJSON_IsNull(c) && json_int(c, &nd->chirality) != 0) return key_fail(pc, "weyl_nodes", expected);
    if ((e && !cJSON_IsNull(e) && !cJSON_IsNumber(e)) || (g && !cJSON_IsNull(g) && !cJSON_IsNumber(g)))
        return key_fail(pc, "weyl_nodes", expected);
    nd->has_chirality = c && !cJSON_IsNull(c);
    nd->has_energy = cJSON_IsNumber(e);
    nd->has_gap = cJSON_IsNumber(g);
    if (nd->has_energy) nd->energy_ev = e->valuedouble;
    if (nd->has_gap) nd->gap_ev = g->valuedouble;
    return 0;
}

static int parse_nodes(const put_ctx *pc, node_in **out, int *n)
{
    *out = NULL;
    *n = 0;
    const cJSON *v = get(pc, "weyl_nodes");
    if (!v) return 0;
    if (!cJSON_IsArray(v)) return key_fail(pc, "weyl_nodes", "a list");
    int count = cJSON_GetArraySize(v);
    if (count == 0) return 0;
    node_in *nodes = calloc((size_t)count, sizeof *nodes);
    if (!nodes) return bs_fail(pc->err, BS_ENOMEM, "material %s: out of memory for %d nodes", pc->mid, count);
    int i = 0, rc = 0;
    for (const cJSON *o = v->child; o && rc == 0; o = o->next) rc = parse_node(pc, o, &nodes[i++]);
    if (rc != 0) {
        free(nodes);
        return rc;
    }
    *out = nodes;
    *n = count;
    return 0;
}

static void flows_free(cat_flow_in *f, int n)
{
    for (int i = 0; f && i < n; i++) {
        free(f[i].kpar);
        free(f[i].wcc);
    }
    free(f);
}

static int parse_flow(const put_ctx *pc, const cJSON *o, cat_flow_in *f)
{
    const char *expected = "a list of {\"plane\": 0..5, \"kpar\": [n numbers], \"wcc\": [n lists of nband numbers]}";
    const cJSON *kpar = cJSON_IsObject(o) ? cJSON_GetObjectItemCaseSensitive(o, "kpar") : NULL;
    const cJSON *wcc = cJSON_IsObject(o) ? cJSON_GetObjectItemCaseSensitive(o, "wcc") : NULL;
    if (!kpar || json_int(cJSON_GetObjectItemCaseSensitive(o, "plane"), &f->plane) != 0 || f->plane < 0 || f->plane > 5 ||
        !cJSON_IsArray(kpar) || !cJSON_IsArray(wcc))
        return key_fail(pc, "wcc_flows", expected);
    f->nstring = cJSON_GetArraySize(kpar);
    f->nband = f->nstring > 0 ? cJSON_GetArraySize(cJSON_GetArrayItem(wcc, 0)) : 0;
    if (f->nstring < 1 || f->nband < 1 || cJSON_GetArraySize(wcc) != f->nstring) return key_fail(pc, "wcc_flows", expected);
    f->kpar = malloc((size_t)f->nstring * sizeof *f->kpar);
    f->wcc = malloc((size_t)f->nstring * (size_t)f->nband * sizeof *f->wcc);
    if (!f->kpar || !f->wcc) return bs_fail(pc->err, BS_ENOMEM, "material %s: out of memory for a flow", pc->mid);
    if (json_vec(kpar, f->nstring, f->kpar) != 0) return key_fail(pc, "wcc_flows", expected);
    int i = 0;
    for (const cJSON *row = wcc->child; row; row = row->next, i++)
        if (json_vec(row, f->nband, f->wcc + (size_t)i * (size_t)f->nband) != 0)
            return key_fail(pc, "wcc_flows", "every string of \"wcc\" to hold the same number of centres");
    return 0;
}

static int parse_flows(const put_ctx *pc, cat_flow_in **out, int *n)
{
    *out = NULL;
    *n = 0;
    const cJSON *v = get(pc, "wcc_flows");
    if (!v) return 0;
    if (!cJSON_IsArray(v)) return key_fail(pc, "wcc_flows", "a list");
    int count = cJSON_GetArraySize(v);
    if (count == 0) return 0;
    cat_flow_in *flows = calloc((size_t)count, sizeof *flows);
    if (!flows) return bs_fail(pc->err, BS_ENOMEM, "material %s: out of memory for %d flows", pc->mid, count);
    int i = 0, rc = 0;
    for (const cJSON *o = v->child; o && rc == 0; o = o->next) rc = parse_flow(pc, o, &flows[i++]);
    for (int a = 0; rc == 0 && a < count; a++)
        for (int b = 0; b < a; b++)
            if (flows[a].plane == flows[b].plane) rc = key_fail(pc, "wcc_flows", "at most one flow per plane");
    if (rc != 0) {
        flows_free(flows, count);
        return rc;
    }
    *out = flows;
    *n = count;
    return 0;
}

/* The diagnosis as stored in results.diagnosis: everything except the bulky "wcc_flows", which
 * live in the artifact file. When the caller has the JSON text it came from (raw, len bytes) and
 * there are no flows, that text is stored minified, which is cheaper than printing the object
 * again. The caller frees the result with cJSON_free. */
static char *diagnosis_text(const cJSON *diag, const char *raw, size_t len)
{
    int has_flows = cJSON_GetObjectItemCaseSensitive(diag, "wcc_flows") != NULL;
    if (raw && !has_flows) {
        char *text = cJSON_malloc(len + 1);
        if (!text) return NULL;
        memcpy(text, raw, len);
        text[len] = '\0';
        cJSON_Minify(text);
        return text;
    }
    if (!has_flows) return cJSON_PrintUnformatted(diag);
    cJSON *view = cJSON_CreateObject();
    if (!view) return NULL;
    /* References share the children without copying; cJSON's API is not const-qualified, but
     * cJSON_Delete on the view frees only the reference nodes, never the borrowed items. */
    for (cJSON *c = diag->child; c; c = c->next)
        if (strcmp(c->string, "wcc_flows") != 0 && !cJSON_AddItemReferenceToObject(view, c->string, c)) {
            cJSON_Delete(view);
            return NULL;
        }
    char *text = cJSON_PrintUnformatted(view);
    cJSON_Delete(view);
    return text;
}

/* Binds every results column from the arguments and the diagnosis. */
static int bind_row(const put_ctx *pc, int64_t run_id, cat_status status, const char *message, int rank,
                    double seconds, int nnodes, const char *raw, size_t raw_len, char **diag_text)
{
    sqlite3_stmt *st = pc->st;
    sqlite3_bind_int64(st, param(pc, ":run_id"), run_id);
    sqlite3_bind_text(st, param(pc, ":material_id"), pc->mid, -1, SQLITE_TRANSIENT);
    sqlite3_bind_text(st, param(pc, ":status"), cat_status_name(status), -1, SQLITE_STATIC);
    if (message) sqlite3_bind_text(st, param(pc, ":message"), message, -1, SQLITE_TRANSIENT);
    if (rank >= 0) sqlite3_bind_int(st, param(pc, ":rank"), rank);
    int rc = 0;
    rc = rc ? rc : bind_str(pc, ":class", "class");
    rc = rc ? rc : bind_num(pc, ":confidence", "confidence");
    rc = rc ? rc : bind_str(pc, ":reason", "reason");
    rc = rc ? rc : bind_num(pc, ":gap_direct_ev", "gap_direct_eV");
    rc = rc ? rc : bind_num(pc, ":gap_indirect_ev", "gap_indirect_eV");
    rc = rc ? rc : bind_kvec(pc, ":k_gap_direct", "k_gap_direct");
    rc = rc ? rc : bind_bool(pc, ":time_reversal", "time_reversal");
    rc = rc ? rc : bind_bool(pc, ":inversion", "inversion");
    rc = rc ? rc : bind_z2(pc, ":z2", "z2");
    rc = rc ? rc : bind_z2(pc, ":z2_parity", "z2_parity");
    rc = rc ? rc : bind_z2(pc, ":z2_wcc", "z2_wcc");
    rc = rc ? rc : bind_method_status(pc, ":z2_status", "z2_status");
    rc = rc ? rc : bind_str(pc, ":z2_note", "z2_note");
    rc = rc ? rc : bind_int(pc, ":chern", "chern");
    rc = rc ? rc : bind_method_status(pc, ":chern_status", "chern_status");
    rc = rc ? rc : bind_plane_chern(pc, ":plane_chern", "plane_chern");
    rc = rc ? rc : bind_int(pc, ":net_chirality", "net_chirality");
    rc = rc ? rc : bind_bool(pc, ":nodal_line", "nodal_line");
    rc = rc ? rc : bind_int(pc, ":mesh", "mesh");
    rc = rc ? rc : bind_num(pc, ":diag_seconds", "seconds");
    rc = rc ? rc : bind_transport(pc);
    if (rc != 0) return rc;
    if (get(pc, "weyl_nodes")) sqlite3_bind_int(st, param(pc, ":n_weyl"), nnodes);
    else if ((rc = bind_int(pc, ":n_weyl", "n_weyl")) != 0) return rc;
    const cJSON *ds = get(pc, "seconds");
    if (seconds >= 0) sqlite3_bind_double(st, param(pc, ":seconds"), seconds);
    else if (cJSON_IsNumber(ds)) sqlite3_bind_double(st, param(pc, ":seconds"), ds->valuedouble);
    if (pc->diag) {
        *diag_text = diagnosis_text(pc->diag, raw, raw_len);
        if (!*diag_text) return bs_fail(pc->err, BS_ENOMEM, "material %s: out of memory printing the diagnosis", pc->mid);
        sqlite3_bind_text(st, param(pc, ":diagnosis"), *diag_text, -1, SQLITE_STATIC);
    }
    return 0;
}

static int step_reset(cat_db *cat, sqlite3_stmt *st, const char *what, bs_err *err)
{
    int s = sqlite3_step(st);
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    return s == SQLITE_DONE ? 0 : cat_sql_fail(cat, err, what);
}

/* Removes the result of (run, material) with its nodes and artifact rows (children first, for
 * the foreign keys). */
static int delete_result(cat_db *cat, int64_t run_id, const char *mid, bs_err *err)
{
    int rc = 0;
    const int which[3] = {CAT_ST_DEL_NODES, CAT_ST_DEL_ARTS, CAT_ST_DEL_RESULT};
    for (int i = 0; i < 3 && rc == 0; i++) {
        sqlite3_stmt *st = cat->st[which[i]];
        sqlite3_bind_int64(st, 1, run_id);
        sqlite3_bind_text(st, 2, mid, -1, SQLITE_TRANSIENT);
        rc = step_reset(cat, st, "replacing an earlier result", err);
    }
    return rc;
}

/* 1 when (run, material) already has a row, 0 when not, negative on error. */
static int result_exists(cat_db *cat, int64_t run_id, const char *mid, bs_err *err)
{
    sqlite3_stmt *st = cat->st[CAT_ST_EXISTS];
    sqlite3_bind_int64(st, 1, run_id);
    sqlite3_bind_text(st, 2, mid, -1, SQLITE_TRANSIENT);
    int s = sqlite3_step(st);
    sqlite3_reset(st);
    sqlite3_clear_bindings(st);
    if (s == SQLITE_ROW) return 1;
    if (s == SQLITE_DONE) return 0;
    return cat_sql_fail(cat, err, "looking for an earlier result");
}

static int insert_nodes(cat_db *cat, int64_t run_id, const char *mid, const node_in *nodes, int n, bs_err *err)
{
    sqlite3_stmt *st = cat->st[CAT_ST_NODE];
    int rc = 0;
    for (int i = 0; i < n && rc == 0; i++) {
        sqlite3_bind_int64(st, 1, run_id);
        sqlite3_bind_text(st, 2, mid, -1, SQLITE_TRANSIENT);
        sqlite3_bind_int(st, 3, i);
        for (int d = 0; d < 3; d++) sqlite3_bind_double(st, 4 + d, nodes[i].k[d]);
        if (nodes[i].has_chirality) sqlite3_bind_int(st, 7, nodes[i].chirality);
        if (nodes[i].has_energy) sqlite3_bind_double(st, 8, nodes[i].energy_ev);
        if (nodes[i].has_gap) sqlite3_bind_double(st, 9, nodes[i].gap_ev);
        rc = step_reset(cat, st, "writing a Weyl node", err);
    }
    return rc;
}

static int insert_flows(cat_db *cat, int64_t run_id, const char *mid, const cat_flow_in *flows, int n, bs_err *err)
{
    if (n == 0) return 0;
    int session = 0;
    int rc = cat_session_of(cat, run_id, &session, err);
    sqlite3_stmt *st = cat->st[CAT_ST_ARTIFACT];
    for (int i = 0; i < n && rc == 0; i++) {
        char file[512], h5path[512];
        rc = cat_artifact_write(cat, run_id, session, mid, &flows[i], file, sizeof file, h5path, sizeof h5path, err);
        if (rc != 0) break;
        sqlite3_bind_int64(st, 1, run_id);
        sqlite3_bind_text(st, 2, mid, -1, SQLITE_TRANSIENT);
        sqlite3_bind_text(st, 3, "wcc_flow", -1, SQLITE_STATIC);
        sqlite3_bind_int(st, 4, flows[i].plane);
        sqlite3_bind_text(st, 5, file, -1, SQLITE_TRANSIENT);
        sqlite3_bind_text(st, 6, h5path, -1, SQLITE_TRANSIENT);
        sqlite3_bind_int(st, 7, flows[i].nstring);
        sqlite3_bind_int(st, 8, flows[i].nband);
        rc = step_reset(cat, st, "indexing an artifact", err);
    }
    return rc;
}

/* A material seen first in a result gets a row with the sizes the diagnosis reports
 * ("dimension", "norb", "occupied_bands"); values out of range are left NULL, never an error. */
static int ensure_material(cat_db *cat, const char *mid, const cJSON *diag, bs_err *err)
{
    sqlite3_stmt *st = cat->st[CAT_ST_MAT_ENSURE];
    sqlite3_bind_text(st, 1, mid, -1, SQLITE_TRANSIENT);
    static const char *const keys[3] = {"dimension", "norb", "occupied_bands"};
    for (int i = 0; diag && i < 3; i++) {
        int v = 0;
        if (json_int(cJSON_GetObjectItemCaseSensitive(diag, keys[i]), &v) != 0 || v < 1) continue;
        if (i == 0 && v != 2 && v != 3) continue;
        sqlite3_bind_int(st, 2 + i, v);
    }
    return step_reset(cat, st, "recording the material", err);
}

/* All statements of one result in the batch transaction: either the whole result (row, nodes,
 * artifacts) is in the batch or none of it. Keys were checked before, so a failure here is an
 * SQLite or HDF5 error; it is undone by deleting what this put wrote. (A savepoint per put would
 * do the same, but SQLite allocates a journal buffer for each one, which cost a third of the
 * write rate in bench_catalogue.) */
static int write_row(cat_db *cat, int64_t run_id, const char *mid, const cJSON *diag, const node_in *nodes,
                     int nnodes, const cat_flow_in *flows, int nflows, bs_err *err)
{
    int rc = cat_txn_begin(cat, err);
    if (rc != 0) return rc;
    rc = ensure_material(cat, mid, diag, err);
    int exists = rc == 0 ? result_exists(cat, run_id, mid, err) : 0;
    if (exists < 0) rc = exists;
    if (rc == 0 && exists) rc = delete_result(cat, run_id, mid, err);
    if (rc == 0) rc = step_reset(cat, cat->st[CAT_ST_RESULT], "writing the result", err);
    if (rc == 0) rc = insert_nodes(cat, run_id, mid, nodes, nnodes, err);
    if (rc == 0) rc = insert_flows(cat, run_id, mid, flows, nflows, err);
    if (rc == 0) return 0;
    if (sqlite3_get_autocommit(cat->db)) {
        /* SQLite rolled the whole transaction back (disk full, I/O error): the batch is gone. */
        bs_err_context(err, "the open batch of %d results was rolled back: ", cat->pending_results);
        cat->in_txn = 0;
        cat->pending_writes = cat->pending_results = 0;
    } else {
        delete_result(cat, run_id, mid, NULL);
    }
    return rc;
}

static int check_args(cat_db *cat, const char *mid, cat_status status, const cJSON *diag, bs_err *err)
{
    if (cat->mode != CAT_RW) return bs_fail(err, BS_EINVAL, "%s: results need a catalogue opened for writing", cat->path);
    if (!mid || !*mid || strlen(mid) > 127) return bs_fail(err, BS_EINVAL, "result: expected a material id of 1 to 127 bytes");
    if (!cat_status_name(status)) return bs_fail(err, BS_EINVAL, "material %s: result status %d is not a cat_status", mid, (int)status);
    if (status == CAT_RES_OK && !diag) return bs_fail(err, BS_EINVAL, "material %s: an ok result needs a diagnosis", mid);
    if (diag && !cJSON_IsObject(diag)) return bs_fail(err, BS_EPARSE, "material %s: the diagnosis is not a JSON object", mid);
    const cJSON *id = diag ? cJSON_GetObjectItemCaseSensitive(diag, "id") : NULL;
    if (id && !cJSON_IsNull(id) && (!cJSON_IsString(id) || strcmp(id->valuestring, mid) != 0))
        return bs_fail(err, BS_EINVAL, "material %s: the diagnosis is for \"%s\"", mid,
                       cJSON_IsString(id) ? id->valuestring : "(not a string)");
    return 0;
}

/* cat_result_put with the JSON text the diagnosis was parsed from, when there is one (raw). */
static int put_impl(cat_db *cat, int64_t run_id, const char *material_id, cat_status status, const char *message,
                    const cJSON *diag, const char *raw, size_t raw_len, int rank, double seconds, bs_err *err)
{
    int rc = check_args(cat, material_id, status, diag, err);
    if (rc != 0) return rc;
    put_ctx pc = {cat, cat->st[CAT_ST_RESULT], diag, material_id, err};
    node_in *nodes = NULL;
    cat_flow_in *flows = NULL;
    int nnodes = 0, nflows = 0;
    char *diag_text = NULL;
    rc = parse_nodes(&pc, &nodes, &nnodes);
    if (rc == 0) rc = parse_flows(&pc, &flows, &nflows);
    if (rc == 0) rc = bind_row(&pc, run_id, status, message, rank, seconds, nnodes, raw, raw_len, &diag_text);
    if (rc == 0) rc = write_row(cat, run_id, material_id, diag, nodes, nnodes, flows, nflows, err);
    sqlite3_reset(pc.st); /* a failed bind leaves values behind; the next put starts clean */
    sqlite3_clear_bindings(pc.st);
    cJSON_free(diag_text);
    free(nodes);
    flows_free(flows, nflows);
    if (rc != 0) return rc;
    return cat_txn_note(cat, 1, err);
}

int cat_result_put(cat_db *cat, int64_t run_id, const char *material_id, cat_status status, const char *message,
                   const cJSON *diag, int rank, double seconds, bs_err *err)
{
    return put_impl(cat, run_id, material_id, status, message, diag, NULL, 0, rank, seconds, err);
}

int cat_result_put_text(cat_db *cat, int64_t run_id, const char *material_id, cat_status status, const char *message,
                        const char *text, size_t len, int rank, double seconds, bs_err *err)
{
    if (!text) return cat_result_put(cat, run_id, material_id, status, message, NULL, rank, seconds, err);
    const char *end = NULL;
    cJSON *diag = cJSON_ParseWithLengthOpts(text, len, &end, 0);
    if (!diag) {
        /* cJSON points end at the byte where parsing stopped. */
        long off = end && end >= text && end <= text + len ? (long)(end - text) : -1;
        return bs_fail(err, BS_EPARSE, "material %s: malformed diagnosis JSON at byte %ld of %zu", material_id ? material_id : "?",
                       off, len);
    }
    for (const char *p = end; p < text + len; p++)
        if (*p != ' ' && *p != '\t' && *p != '\n' && *p != '\r' && *p != '\0') {
            cJSON_Delete(diag);
            return bs_fail(err, BS_EPARSE, "material %s: unexpected bytes after the diagnosis JSON at byte %ld of %zu",
                           material_id ? material_id : "?", (long)(p - text), len);
        }
    int rc = put_impl(cat, run_id, material_id, status, message, diag, text, (size_t)(end - text), rank, seconds, err);
    cJSON_Delete(diag);
    return rc;
}
