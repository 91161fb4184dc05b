/* The JSON form of a diagnosis result. The scalar keys are one table (name, kind, offset into
 * res_diag), written in table order; the structured keys (index lists with their status, Chern
 * numbers, nodes, flows, transport, surface) are rows of the same table with a writer of their own,
 * so a new field is one struct member and one row here. */
#include "bandsieve/result_json.h"

#include <math.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/err.h"

typedef enum key_kind {
    KEY_STR,          /* char array, always written */
    KEY_STR_NONEMPTY, /* char array, written only when not empty */
    KEY_INT,
    KEY_INT_OPT, /* int, -1 written as null (not computed) */
    KEY_LLONG,
    KEY_NUM,
    KEY_BOOL,
    KEY_VEC3,    /* double[3] */
    KEY_CLASS,   /* res_class by name */
    KEY_STATUS,  /* res_status by name */
    KEY_VERDICT, /* res_verdict by name */
    KEY_SPECIAL  /* written by the row's own function */
} key_kind;

typedef struct key_row {
    const char *name;
    key_kind kind;
    size_t off, size;   /* of the member (0 for KEY_SPECIAL) */
    const char *column; /* catalogue column holding the same value (results table), or NULL */
    /* KEY_SPECIAL: adds the key(s) of this row; 0, or -1 when out of memory. */
    int (*write)(cJSON *o, const res_diag *r, int with_flows);
    /* KEY_SPECIAL: reads the key(s) of this row from o into r; 0 or BS_EPARSE/BS_ENOMEM. */
    int (*read)(const cJSON *o, res_diag *r, bs_err *err);
} key_row;

#define AT(m) offsetof(res_diag, m), sizeof(((res_diag *)0)->m)

static int nz2(const res_diag *r)
{
    return r->dim == 2 ? 1 : 4;
}

/* An index list when its method is done, else null. */
static int add_indices(cJSON *o, const char *key, res_status st, const int *v, int n)
{
    cJSON *x = st == RES_DONE ? cJSON_CreateIntArray(v, n) : cJSON_CreateNull();
    return x && cJSON_AddItemToObject(o, key, x) ? 0 : (cJSON_Delete(x), -1);
}

static int w_z2(cJSON *o, const res_diag *r, int f)
{
    return add_indices(o, "z2", r->z2_status, r->z2, nz2(r));
}
static int w_z2_parity(cJSON *o, const res_diag *r, int f)
{
    return add_indices(o, "z2_parity", r->z2_parity_status, r->z2_parity, nz2(r));
}
static int w_z2_wcc(cJSON *o, const res_diag *r, int f)
{
    return add_indices(o, "z2_wcc", r->z2_wcc_status, r->z2_wcc, nz2(r));
}

static int add_int_list(cJSON *o, const char *key, const int *v, int n)
{
    cJSON *x = cJSON_CreateIntArray(v, n);
    return x && cJSON_AddItemToObject(o, key, x) ? 0 : (cJSON_Delete(x), -1);
}

static int w_parities(cJSON *o, const res_diag *r, int f)
{
    if (r->ntrim <= 0) return 0;
    cJSON *p = cJSON_AddObjectToObject(o, "parities");
    if (!p || add_int_list(p, "delta", r->par_delta, r->ntrim) != 0) return -1;
    return add_int_list(p, "odd_occupied", r->par_nodd, r->ntrim);
}

/* "chern" (2D) and "plane_chern" (3D), null where not shown (res_chern_shown). */
static int w_chern(cJSON *o, const res_diag *r, int f)
{
    int c = 0;
    cJSON *x = res_chern_shown(r, &c) ? cJSON_CreateNumber(c) : cJSON_CreateNull();
    if (!x || !cJSON_AddItemToObject(o, "chern", x)) return cJSON_Delete(x), -1;
    if (res_plane_chern_shown(r)) return add_int_list(o, "plane_chern", r->plane_chern, 6);
    return cJSON_AddNullToObject(o, "plane_chern") ? 0 : -1;
}

/* Weyl nodes (res_node_is_weyl) with their details; other touchings as points under gap_closings. */
static int w_nodes(cJSON *o, const res_diag *r, int f)
{
    cJSON *nodes = cJSON_AddArrayToObject(o, "weyl_nodes");
    cJSON *closings = cJSON_AddArrayToObject(o, "gap_closings");
    if (!nodes || !closings) return -1;
    for (int i = 0; i < r->nnodes; i++) {
        const res_node *nd = &r->nodes[i];
        if (!res_node_is_weyl(r, i)) {
            if (!cJSON_AddItemToArray(closings, cJSON_CreateDoubleArray(nd->k, 3))) return -1;
            continue;
        }
        cJSON *n = cJSON_CreateObject();
        if (!n || !cJSON_AddItemToArray(nodes, n)) return cJSON_Delete(n), -1;
        if (!cJSON_AddItemToObject(n, "k", cJSON_CreateDoubleArray(nd->k, 3)) ||
            !cJSON_AddNumberToObject(n, "chirality", nd->chirality) ||
            !cJSON_AddNumberToObject(n, "energy_eV", nd->energy_ev) ||
            !cJSON_AddNumberToObject(n, "gap_eV", nd->gap_ev))
            return -1;
        if (nd->symmetry[0] && !cJSON_AddStringToObject(n, "symmetry", nd->symmetry)) return -1;
    }
    return 0;
}

static int w_flows(cJSON *o, const res_diag *r, int with_flows)
{
    if (!with_flows || r->nflows <= 0) return 0;
    cJSON *list = cJSON_AddArrayToObject(o, "wcc_flows");
    if (!list) return -1;
    for (int i = 0; i < r->nflows; i++) {
        const res_flow *fl = &r->flows[i];
        cJSON *x = cJSON_CreateObject();
        if (!x || !cJSON_AddItemToArray(list, x)) return cJSON_Delete(x), -1;
        cJSON *w = NULL;
        if (!cJSON_AddNumberToObject(x, "plane", fl->plane) ||
            !cJSON_AddItemToObject(x, "kpar", cJSON_CreateDoubleArray(fl->kpar, fl->nstring)) ||
            !(w = cJSON_AddArrayToObject(x, "wcc")))
            return -1;
        for (int s = 0; s < fl->nstring; s++)
            if (!cJSON_AddItemToArray(w, cJSON_CreateDoubleArray(fl->wcc + (size_t)s * fl->nband, fl->nband)))
                return -1;
    }
    return 0;
}

static double max_err(const double *v, int n)
{
    double x = 0;
    for (int i = 0; i < n; i++)
        if (v[i] > x) x = v[i];
    return x;
}

/* "ahc" and "shc" hold the reference Fermi energy (their "error" is the largest component error);
 * "transport" the scan and the integration's details. */
static int w_transport(cJSON *o, const res_diag *r, int f)
{
    if (!r->has_transport) return 0;
    const res_transport *t = &r->transport;
    static const char *const ahc_key[3] = {"ahc_xy", "ahc_yz", "ahc_zx"};
    int nahc = t->dim == 3 ? 3 : 1;
    cJSON *ahc = cJSON_AddObjectToObject(o, "ahc");
    if (!ahc || !cJSON_AddNumberToObject(ahc, "xy", t->ahc[0][0])) return -1;
    if (nahc == 3 && (!cJSON_AddNumberToObject(ahc, "yz", t->ahc[0][1]) ||
                      !cJSON_AddNumberToObject(ahc, "zx", t->ahc[0][2])))
        return -1;
    if (!cJSON_AddStringToObject(ahc, "units", t->ahc_units) ||
        !cJSON_AddNumberToObject(ahc, "fermi_eV", t->fermi_ev[0]) ||
        !cJSON_AddNumberToObject(ahc, "error", max_err(t->ahc_err[0], nahc)))
        return -1;
    if (t->has_shc) {
        cJSON *shc = cJSON_AddObjectToObject(o, "shc");
        if (!shc || !cJSON_AddNumberToObject(shc, "xy_z", t->shc[0]) ||
            !cJSON_AddStringToObject(shc, "units", t->shc_units) ||
            !cJSON_AddNumberToObject(shc, "fermi_eV", t->fermi_ev[0]) ||
            !cJSON_AddNumberToObject(shc, "error", t->shc_err[0]))
            return -1;
    }
    cJSON *tr = cJSON_AddObjectToObject(o, "transport");
    cJSON *scan = tr ? cJSON_AddArrayToObject(tr, "scan") : NULL;
    if (!scan) return -1;
    for (int e = 0; e < t->nfermi; e++) {
        cJSON *p = cJSON_CreateObject();
        if (!p || !cJSON_AddItemToArray(scan, p)) return cJSON_Delete(p), -1;
        if (!cJSON_AddNumberToObject(p, "fermi_eV", t->fermi_ev[e])) return -1;
        for (int a = 0; a < nahc; a++)
            if (!cJSON_AddNumberToObject(p, ahc_key[a], t->ahc[e][a])) return -1;
        if (!cJSON_AddNumberToObject(p, "ahc_error", max_err(t->ahc_err[e], nahc))) return -1;
        if (t->has_shc && (!cJSON_AddNumberToObject(p, "shc_xy_z", t->shc[e]) ||
                           !cJSON_AddNumberToObject(p, "shc_error", t->shc_err[e])))
            return -1;
    }
    int ok = cJSON_AddNumberToObject(tr, "kpoints", (double)t->nk) &&
             cJSON_AddNumberToObject(tr, "cells", (double)t->ncells) &&
             cJSON_AddNumberToObject(tr, "depth", t->depth) &&
             cJSON_AddBoolToObject(tr, "converged", t->converged) &&
             cJSON_AddNumberToObject(tr, "tolerance", t->tol) &&
             cJSON_AddStringToObject(tr, "fermi_source", res_fermi_source_name(t->fermi_source)) &&
             cJSON_AddNumberToObject(tr, "eta_eV", t->eta_ev) &&
             cJSON_AddNumberToObject(tr, "smear_eV", t->smear_ev) &&
             cJSON_AddStringToObject(tr, "gauge", res_gauge_name(t->gauge)) &&
             cJSON_AddNumberToObject(tr, "min_gap_eV", t->min_gap_ev);
    /* What limits the result: the Fermi-surface cells (transport.c); null where there were none. */
    cJSON *fs = ok ? cJSON_AddObjectToObject(tr, "fermi_surface") : NULL;
    ok = fs && cJSON_AddNumberToObject(fs, "cells", (double)t->fs_cells) &&
         cJSON_AddNumberToObject(fs, "unresolved_cells", (double)t->fs_open) &&
         cJSON_AddStringToObject(fs, "limited_by", res_limit_name(t->limit));
    const char *fkey[3] = {"smallest_split_eV", "smallest_feature", "finest_cell"};
    const double fval[3] = {t->fs_split_ev, t->fs_feature, t->fs_finest_cell};
    for (int i = 0; ok && i < 3; i++)
        ok = isfinite(fval[i]) ? cJSON_AddNumberToObject(fs, fkey[i], fval[i]) != NULL
                               : cJSON_AddNullToObject(fs, fkey[i]) != NULL;
    return ok ? 0 : -1;
}

/* The gap search's resolution; null when no convergence check was possible (HUGE_VAL). */
static int w_gap_resolution(cJSON *o, const res_diag *r, int f)
{
    (void)f;
    if (isfinite(r->gap_resolution_ev))
        return cJSON_AddNumberToObject(o, "gap_resolution_eV", r->gap_resolution_ev) ? 0 : -1;
    return cJSON_AddNullToObject(o, "gap_resolution_eV") ? 0 : -1;
}
/* Names of res_surface_status, and of the surface TRIMs (slab: n1 n2; ribbon: n1). */
static const char *const SURF_STATUS[3] = {"unchecked", "consistent", "inconclusive"};
static const char *const SURF_TRIM[2][4] = {{"00", "10", "01", "11"}, {"0", "1", "?", "?"}};

static int w_surface(cJSON *o, const res_diag *r, int f)
{
    if (!r->has_surface) return 0;
    const res_surface *s = &r->surface;
    cJSON *x = cJSON_AddObjectToObject(o, "surface");
    cJSON *cr = NULL, *bt = NULL;
    int ok =
        x && cJSON_AddItemToObject(x, "direction", cJSON_CreateIntArray(s->miller, s->kdim == 1 ? 2 : 3)) &&
        cJSON_AddNumberToObject(x, "layers", s->layers) &&
        cJSON_AddNumberToObject(x, "fermi_eV", s->fermi_ev) &&
        (cr = cJSON_AddObjectToObject(x, "crossings")) && cJSON_AddNumberToObject(cr, "top", s->n_top) &&
        cJSON_AddNumberToObject(cr, "bottom", s->n_bottom) &&
        cJSON_AddNumberToObject(cr, "other", s->n_other) && (bt = cJSON_AddArrayToObject(x, "between")) &&
        cJSON_AddItemToArray(bt, cJSON_CreateDoubleArray(s->ka, s->kdim)) &&
        cJSON_AddItemToArray(bt, cJSON_CreateDoubleArray(s->kb, s->kdim)) &&
        cJSON_AddNumberToObject(x, "dirac_points_top", s->ndirac_top) &&
        cJSON_AddStringToObject(x, "status", SURF_STATUS[s->status]) &&
        cJSON_AddStringToObject(x, "reason", s->reason);
    cJSON *sp = ok ? cJSON_AddArrayToObject(x, "surface_parities") : NULL, *pairs = NULL;
    ok = ok && sp && (pairs = cJSON_AddArrayToObject(x, "pairs"));
    for (int t = 0; ok && t < s->ntrim; t++)
        ok = cJSON_AddItemToArray(sp, s->surface_parity[t] ? cJSON_CreateNumber(s->surface_parity[t])
                                                           : cJSON_CreateNull());
    for (int i = 0; ok && i < s->npair; i++) {
        const res_surface_pair *p = &s->pair[i];
        cJSON *q = cJSON_CreateObject();
        const char *ab[2] = {SURF_TRIM[s->kdim == 1][p->a & 3], SURF_TRIM[s->kdim == 1][p->b & 3]};
        ok = q && cJSON_AddItemToArray(pairs, q) &&
             cJSON_AddItemToObject(q, "between", cJSON_CreateStringArray(ab, 2)) &&
             cJSON_AddNumberToObject(q, "top", p->n_top) &&
             cJSON_AddNumberToObject(q, "bottom", p->n_bottom) &&
             cJSON_AddNumberToObject(q, "other", p->n_other);
        if (ok && p->expected_odd < 0)
            ok = cJSON_AddNullToObject(q, "expected_odd") && cJSON_AddNullToObject(q, "agrees");
        else if (ok)
            ok = cJSON_AddBoolToObject(q, "expected_odd", p->expected_odd) &&
                 cJSON_AddBoolToObject(q, "agrees", (p->n_top % 2 == 1) == p->expected_odd);
    }
    return ok ? 0 : -1;
}

/* ---- reading ---- */

static int key_fail(bs_err *err, const char *key, const char *expected)
{
    return bs_fail(err, BS_EPARSE, "diagnosis key \"%s\": expected %s", key, expected);
}

/* A present, non-null member (NULL when missing or JSON null). */
static const cJSON *member(const cJSON *o, const char *key)
{
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(o, key);
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

/* n integers of a JSON list into out. */
static int json_ints(const cJSON *v, int n, int *out)
{
    if (!cJSON_IsArray(v) || cJSON_GetArraySize(v) != n) return -1;
    int i = 0;
    for (const cJSON *c = v->child; c; c = c->next, i++)
        if (json_int(c, &out[i]) != 0) return -1;
    return 0;
}

static int read_num(const cJSON *o, const char *key, double *out, bs_err *err)
{
    const cJSON *v = member(o, key);
    if (!v) return 0;
    if (!cJSON_IsNumber(v)) return key_fail(err, key, "a number");
    *out = v->valuedouble;
    return 0;
}

static int read_int(const cJSON *o, const char *key, int *out, bs_err *err)
{
    const cJSON *v = member(o, key);
    if (v && json_int(v, out) != 0) return key_fail(err, key, "an integer");
    return 0;
}

/* true/false, or 0/1 as numbers. */
static int read_bool(const cJSON *o, const char *key, int *out, bs_err *err)
{
    const cJSON *v = member(o, key);
    int x = 0;
    if (!v) return 0;
    if (cJSON_IsBool(v))
        x = cJSON_IsTrue(v);
    else if (json_int(v, &x) != 0 || (x != 0 && x != 1))
        return key_fail(err, key, "true or false");
    *out = x;
    return 0;
}

static int read_str(const cJSON *o, const char *key, char *out, size_t size, bs_err *err)
{
    const cJSON *v = member(o, key);
    if (!v) return 0;
    if (!cJSON_IsString(v)) return key_fail(err, key, "a string");
    snprintf(out, size, "%s", v->valuestring);
    return 0;
}

/* An index list: [nu] (2D) or [nu0, nu1, nu2, nu3] (3D), each 0 or 1; null when its method was not
 * done (the status is then RES_NA: ambiguous and not applicable print alike). */
static int read_indices(const cJSON *o, const char *key, res_status *st, int *v, bs_err *err)
{
    const cJSON *x = member(o, key);
    const char *expected = "a list of 1 (2D) or 4 (3D) indices, each 0 or 1";
    if (!x) return 0;
    int n = cJSON_IsArray(x) ? cJSON_GetArraySize(x) : -1;
    if ((n != 1 && n != 4) || json_ints(x, n, v) != 0) return key_fail(err, key, expected);
    for (int i = 0; i < n; i++)
        if (v[i] != 0 && v[i] != 1) return key_fail(err, key, expected);
    if (st) *st = RES_DONE;
    return 0;
}

static int r_z2(const cJSON *o, res_diag *r, bs_err *err)
{
    return read_indices(o, "z2", NULL, r->z2, err);
}
static int r_z2_parity(const cJSON *o, res_diag *r, bs_err *err)
{
    return read_indices(o, "z2_parity", &r->z2_parity_status, r->z2_parity, err);
}
static int r_z2_wcc(const cJSON *o, res_diag *r, bs_err *err)
{
    return read_indices(o, "z2_wcc", &r->z2_wcc_status, r->z2_wcc, err);
}

static int r_parities(const cJSON *o, res_diag *r, bs_err *err)
{
    const cJSON *p = member(o, "parities");
    const char *expected = "{\"delta\": [4 or 8 integers], \"odd_occupied\": [as many]}";
    if (!p) return 0;
    const cJSON *d = cJSON_IsObject(p) ? member(p, "delta") : NULL;
    int n = cJSON_IsArray(d) ? cJSON_GetArraySize(d) : -1;
    if ((n != 4 && n != 8) || json_ints(d, n, r->par_delta) != 0 ||
        json_ints(member(p, "odd_occupied"), n, r->par_nodd) != 0)
        return key_fail(err, "parities", expected);
    r->ntrim = n;
    return 0;
}

static int r_chern(const cJSON *o, res_diag *r, bs_err *err)
{
    const cJSON *c = member(o, "chern"), *pc = member(o, "plane_chern");
    if (c && json_int(c, &r->chern) != 0) return key_fail(err, "chern", "an integer");
    if (pc && json_ints(pc, 6, r->plane_chern) != 0)
        return key_fail(err, "plane_chern", "a list of 6 integers");
    return 0;
}

static int add_node(res_diag *r, const res_node *n, int cap)
{
    if (r->nnodes >= cap) return -1;
    r->nodes[r->nnodes++] = *n;
    return 0;
}

/* Weyl nodes and gap closings go back into one node list (Weyl nodes first). The chirality status
 * is not a key of its own: a 3D closing implies every flux was an integer (done), a Weyl node of
 * chirality 0 that some was not (ambiguous); either way the object prints again as it was read. */
static int r_nodes(const cJSON *o, res_diag *r, bs_err *err)
{
    const cJSON *w = member(o, "weyl_nodes"), *g = member(o, "gap_closings");
    const char *expected =
        "a list of {\"k\": [3 numbers], \"chirality\": integer, \"energy_eV\": number, \"gap_eV\": number}";
    if ((w && !cJSON_IsArray(w))) return key_fail(err, "weyl_nodes", expected);
    if (g && !cJSON_IsArray(g)) return key_fail(err, "gap_closings", "a list of [3 numbers]");
    int cap = (w ? cJSON_GetArraySize(w) : 0) + (g ? cJSON_GetArraySize(g) : 0);
    if (cap == 0) return 0;
    r->nodes = calloc((size_t)cap, sizeof *r->nodes);
    if (!r->nodes) return bs_fail(err, BS_ENOMEM, "out of memory for %d nodes", cap);
    int zero_weyl = 0;
    bs_err inner;
    bs_err_clear(&inner);
    for (const cJSON *x = w ? w->child : NULL; x; x = x->next) {
        res_node n = {{0, 0, 0}, 0, 0, 0, ""};
        if (!cJSON_IsObject(x) || json_vec(cJSON_GetObjectItemCaseSensitive(x, "k"), 3, n.k) != 0 ||
            read_int(x, "chirality", &n.chirality, &inner) ||
            read_num(x, "energy_eV", &n.energy_ev, &inner) || read_num(x, "gap_eV", &n.gap_ev, &inner))
            return key_fail(err, "weyl_nodes", expected);
        const cJSON *sym = cJSON_GetObjectItemCaseSensitive(x, "symmetry");
        if (sym && !cJSON_IsString(sym))
            return key_fail(err, "weyl_nodes", "a node's \"symmetry\" as a string");
        if (sym) snprintf(n.symmetry, sizeof n.symmetry, "%s", sym->valuestring);
        zero_weyl |= n.chirality == 0;
        add_node(r, &n, cap);
    }
    for (const cJSON *x = g ? g->child : NULL; x; x = x->next) {
        res_node n = {{0, 0, 0}, 0, 0, 0, ""};
        if (json_vec(x, 3, n.k) != 0) return key_fail(err, "gap_closings", "a list of [3 numbers]");
        add_node(r, &n, cap);
    }
    if (zero_weyl)
        r->chirality_status = RES_AMBIGUOUS;
    else if (g && cJSON_GetArraySize(g) > 0)
        r->chirality_status = RES_DONE;
    return 0;
}

static int read_flow(const cJSON *o, res_flow *f, bs_err *err)
{
    const char *expected =
        "a list of {\"plane\": 0..5, \"kpar\": [n numbers], \"wcc\": [n lists of nband numbers]}";
    const cJSON *kpar = cJSON_IsObject(o) ? member(o, "kpar") : NULL;
    const cJSON *wcc = cJSON_IsObject(o) ? member(o, "wcc") : NULL;
    if (!kpar || json_int(member(o, "plane"), &f->plane) != 0 || f->plane < 0 || f->plane > 5 ||
        !cJSON_IsArray(kpar) || !cJSON_IsArray(wcc))
        return key_fail(err, "wcc_flows", expected);
    f->nstring = cJSON_GetArraySize(kpar);
    f->nband = f->nstring > 0 ? cJSON_GetArraySize(cJSON_GetArrayItem(wcc, 0)) : 0;
    if (f->nstring < 1 || f->nband < 1 || cJSON_GetArraySize(wcc) != f->nstring)
        return key_fail(err, "wcc_flows", expected);
    f->kpar = malloc((size_t)f->nstring * sizeof *f->kpar);
    f->wcc = malloc((size_t)f->nstring * (size_t)f->nband * sizeof *f->wcc);
    if (!f->kpar || !f->wcc) return bs_fail(err, BS_ENOMEM, "out of memory for a flow");
    if (json_vec(kpar, f->nstring, f->kpar) != 0) return key_fail(err, "wcc_flows", expected);
    int i = 0;
    for (const cJSON *row = wcc->child; row; row = row->next, i++)
        if (json_vec(row, f->nband, f->wcc + (size_t)i * (size_t)f->nband) != 0)
            return key_fail(err, "wcc_flows", "every string of \"wcc\" to hold the same number of centres");
    return 0;
}

static int r_flows(const cJSON *o, res_diag *r, bs_err *err)
{
    const cJSON *v = member(o, "wcc_flows");
    if (!v) return 0;
    if (!cJSON_IsArray(v)) return key_fail(err, "wcc_flows", "a list");
    int n = cJSON_GetArraySize(v);
    if (n == 0) return 0;
    r->flows = calloc((size_t)n, sizeof *r->flows);
    if (!r->flows) return bs_fail(err, BS_ENOMEM, "out of memory for %d flows", n);
    r->nflows = n;
    int i = 0;
    for (const cJSON *x = v->child; x; x = x->next, i++) {
        int rc = read_flow(x, &r->flows[i], err);
        if (rc != 0) return rc;
        for (int j = 0; j < i; j++)
            if (r->flows[j].plane == r->flows[i].plane)
                return key_fail(err, "wcc_flows", "at most one flow per plane");
    }
    return 0;
}

/* Null or missing: no check was possible (HUGE_VAL). */
static int r_gap_resolution(const cJSON *o, res_diag *r, bs_err *err)
{
    r->gap_resolution_ev = HUGE_VAL;
    return read_num(o, "gap_resolution_eV", &r->gap_resolution_ev, err);
}

/* The reference values are read from "ahc" and "shc", the scan and details from "transport"; a
 * scan entry's "ahc_error" (the largest component error) becomes the xy error. */
static int r_transport(const cJSON *o, res_diag *r, bs_err *err)
{
    const cJSON *ahc = member(o, "ahc"), *shc = member(o, "shc"), *tr = member(o, "transport");
    const char *expected = "an object of numbers and a \"units\" string";
    if (!ahc && !shc) return 0;
    if (ahc && !cJSON_IsObject(ahc)) return key_fail(err, "ahc", expected);
    if (shc && !cJSON_IsObject(shc)) return key_fail(err, "shc", expected);
    if (tr && !cJSON_IsObject(tr)) return key_fail(err, "transport", "an object");
    res_transport *t = &r->transport;
    t->dim = r->dim;
    t->nfermi = 1;
    t->has_shc = shc != NULL;
    bs_err inner;
    bs_err_clear(&inner);
    int bad = 0;
    if (ahc) {
        bad |= read_num(ahc, "xy", &t->ahc[0][0], &inner) || read_num(ahc, "yz", &t->ahc[0][1], &inner) ||
               read_num(ahc, "zx", &t->ahc[0][2], &inner) ||
               read_str(ahc, "units", t->ahc_units, sizeof t->ahc_units, &inner) ||
               read_num(ahc, "fermi_eV", &t->fermi_ev[0], &inner) ||
               read_num(ahc, "error", &t->ahc_err[0][0], &inner);
        if (bad) return key_fail(err, "ahc", expected);
    }
    if (shc) {
        bad |= read_num(shc, "xy_z", &t->shc[0], &inner) ||
               read_str(shc, "units", t->shc_units, sizeof t->shc_units, &inner) ||
               read_num(shc, "error", &t->shc_err[0], &inner) ||
               (!ahc && read_num(shc, "fermi_eV", &t->fermi_ev[0], &inner));
        if (bad) return key_fail(err, "shc", expected);
    }
    if (!tr) return r->has_transport = 1, 0;
    const cJSON *scan = member(tr, "scan");
    if (scan && (!cJSON_IsArray(scan) || cJSON_GetArraySize(scan) > RES_MAX_FERMI))
        return key_fail(err, "transport", "a \"scan\" list of at most 101 Fermi energies");
    int e = 0;
    for (const cJSON *p = scan ? scan->child : NULL; p; p = p->next, e++) {
        bad |= !cJSON_IsObject(p) || read_num(p, "fermi_eV", &t->fermi_ev[e], &inner) ||
               read_num(p, "ahc_xy", &t->ahc[e][0], &inner) || read_num(p, "ahc_yz", &t->ahc[e][1], &inner) ||
               read_num(p, "ahc_zx", &t->ahc[e][2], &inner) ||
               read_num(p, "ahc_error", &t->ahc_err[e][0], &inner) ||
               read_num(p, "shc_xy_z", &t->shc[e], &inner) ||
               read_num(p, "shc_error", &t->shc_err[e], &inner);
        if (bad) return key_fail(err, "transport", "scan entries of numbers");
    }
    if (e > 0) {
        t->nfermi = e;
        for (int a = 1; a < 3; a++)
            t->ahc_err[0][a] = 0;
    }
    char source[16] = "", gauge[16] = "";
    double nk = 0, ncells = 0;
    bad |= read_num(tr, "kpoints", &nk, &inner) || read_num(tr, "cells", &ncells, &inner) ||
           read_int(tr, "depth", &t->depth, &inner) || read_bool(tr, "converged", &t->converged, &inner) ||
           read_num(tr, "tolerance", &t->tol, &inner) ||
           read_str(tr, "fermi_source", source, sizeof source, &inner) ||
           read_num(tr, "eta_eV", &t->eta_ev, &inner) || read_num(tr, "smear_eV", &t->smear_ev, &inner) ||
           read_str(tr, "gauge", gauge, sizeof gauge, &inner) ||
           read_num(tr, "min_gap_eV", &t->min_gap_ev, &inner);
    if (bad) return key_fail(err, "transport", "the integration's numbers, flags and names");
    t->nk = (long long)nk;
    t->ncells = (long long)ncells;
    for (int i = 0; i < 4; i++)
        if (!strcmp(source, res_fermi_source_name(i))) t->fermi_source = i;
    t->gauge = !strcmp(gauge, res_gauge_name(RES_GAUGE_LATTICE)) ? RES_GAUGE_LATTICE : RES_GAUGE_POSITION;
    t->fs_split_ev = t->fs_feature = t->fs_finest_cell = HUGE_VAL;
    const cJSON *fs = member(tr, "fermi_surface");
    if (fs) {
        char limit[24] = "";
        double cells = 0, open = 0;
        bad |= !cJSON_IsObject(fs) || read_num(fs, "cells", &cells, &inner) ||
               read_num(fs, "unresolved_cells", &open, &inner) ||
               read_str(fs, "limited_by", limit, sizeof limit, &inner) ||
               read_num(fs, "smallest_split_eV", &t->fs_split_ev, &inner) ||
               read_num(fs, "smallest_feature", &t->fs_feature, &inner) ||
               read_num(fs, "finest_cell", &t->fs_finest_cell, &inner);
        if (bad)
            return key_fail(err, "transport",
                            "a \"fermi_surface\" object of numbers and a \"limited_by\" name");
        t->fs_cells = (long long)cells;
        t->fs_open = (long long)open;
        for (int i = 0; i < 3; i++)
            if (!strcmp(limit, res_limit_name(i))) t->limit = i;
    }
    r->has_transport = 1;
    return 0;
}

/* The crossing check of a surface object (absent in results stored before it existed: unchecked). */
static int read_surface_check(const cJSON *x, res_surface *s)
{
    bs_err inner;
    bs_err_clear(&inner);
    char st[16] = "";
    if (read_str(x, "status", st, sizeof st, &inner) ||
        read_str(x, "reason", s->reason, sizeof s->reason, &inner))
        return -1;
    for (int i = 0; i < 3; i++)
        if (!strcmp(st, SURF_STATUS[i])) s->status = (res_surface_status)i;
    const cJSON *sp = member(x, "surface_parities"), *pairs = member(x, "pairs");
    int nt = cJSON_IsArray(sp) ? cJSON_GetArraySize(sp) : 0,
        np = cJSON_IsArray(pairs) ? cJSON_GetArraySize(pairs) : 0;
    if (nt > 4 || np > 6 || (sp && !cJSON_IsArray(sp)) || (pairs && !cJSON_IsArray(pairs))) return -1;
    s->ntrim = nt;
    for (int t = 0; t < nt; t++) {
        const cJSON *v = cJSON_GetArrayItem(sp, t);
        if (!cJSON_IsNull(v) && json_int(v, &s->surface_parity[t]) != 0) return -1;
    }
    s->npair = np;
    for (int i = 0; i < np; i++) {
        const cJSON *q = cJSON_GetArrayItem(pairs, i), *bt = member(q, "between"),
                    *e = member(q, "expected_odd");
        res_surface_pair *p = &s->pair[i];
        if (!cJSON_IsArray(bt) || cJSON_GetArraySize(bt) != 2) return -1;
        for (int j = 0; j < 2; j++) {
            const cJSON *nm = cJSON_GetArrayItem(bt, j);
            int *dst = j ? &p->b : &p->a;
            *dst = -1;
            for (int t = 0; t < 4 && cJSON_IsString(nm); t++)
                if (!strcmp(nm->valuestring, SURF_TRIM[s->kdim == 1][t])) *dst = t;
            if (*dst < 0) return -1;
        }
        p->expected_odd = e ? cJSON_IsTrue(e) : -1;
        if (read_int(q, "top", &p->n_top, &inner) || read_int(q, "bottom", &p->n_bottom, &inner) ||
            read_int(q, "other", &p->n_other, &inner))
            return -1;
    }
    return 0;
}

static int r_surface(const cJSON *o, res_diag *r, bs_err *err)
{
    const cJSON *x = member(o, "surface");
    const char *expected =
        "{\"direction\", \"layers\", \"fermi_eV\", \"crossings\", \"between\", \"dirac_points_top\"}";
    if (!x) return 0;
    res_surface *s = &r->surface;
    const cJSON *dir = cJSON_IsObject(x) ? member(x, "direction") : NULL,
                *cr = cJSON_IsObject(x) ? member(x, "crossings") : NULL;
    const cJSON *bt = cJSON_IsObject(x) ? member(x, "between") : NULL;
    int nd = cJSON_IsArray(dir) ? cJSON_GetArraySize(dir) : -1;
    s->kdim = nd == 2 ? 1 : 2;
    bs_err inner;
    bs_err_clear(&inner);
    if ((nd != 2 && nd != 3) || json_ints(dir, nd, s->miller) != 0 || !cJSON_IsObject(cr) ||
        !cJSON_IsArray(bt) || cJSON_GetArraySize(bt) != 2 ||
        json_vec(cJSON_GetArrayItem(bt, 0), s->kdim, s->ka) != 0 ||
        json_vec(cJSON_GetArrayItem(bt, 1), s->kdim, s->kb) != 0 ||
        read_int(x, "layers", &s->layers, &inner) || read_num(x, "fermi_eV", &s->fermi_ev, &inner) ||
        read_int(cr, "top", &s->n_top, &inner) || read_int(cr, "bottom", &s->n_bottom, &inner) ||
        read_int(cr, "other", &s->n_other, &inner) || read_int(x, "dirac_points_top", &s->ndirac_top, &inner))
        return key_fail(err, "surface", expected);
    if (read_surface_check(x, s) != 0)
        return key_fail(err, "surface",
                        "\"status\", \"reason\", \"surface_parities\" and \"pairs\" as written");
    r->has_surface = 1;
    return 0;
}

/* Every key of the diagnosis object, in the order written, with the results column that holds the
 * same value where there is one (the structured keys' columns are bound by the catalogue). */
static const key_row KEYS[] = {
    {"id", KEY_STR, AT(id), NULL, NULL, NULL},
    {"formula", KEY_STR_NONEMPTY, AT(formula), NULL, NULL, NULL},
    {"class", KEY_CLASS, AT(cls), "class", NULL, NULL},
    {"confidence", KEY_NUM, AT(confidence), "confidence", NULL, NULL},
    {"reason", KEY_STR, AT(reason), "reason", NULL, NULL},
    {"dimension", KEY_INT, AT(dim), NULL, NULL, NULL},
    {"norb", KEY_INT, AT(norb), NULL, NULL, NULL},
    {"occupied_bands", KEY_INT, AT(nocc), NULL, NULL, NULL},
    {"gap_direct_eV", KEY_NUM, AT(gap_direct_ev), "gap_direct_ev", NULL, NULL},
    {"gap_indirect_eV", KEY_NUM, AT(gap_indirect_ev), "gap_indirect_ev", NULL, NULL},
    {"k_gap_direct", KEY_VEC3, AT(k_gap_direct), NULL, NULL, NULL},
    {"k_vbm", KEY_VEC3, AT(k_vbm), NULL, NULL, NULL},
    {"k_cbm", KEY_VEC3, AT(k_cbm), NULL, NULL, NULL},
    {"gap_resolution_eV", KEY_SPECIAL, 0, 0, NULL, w_gap_resolution, r_gap_resolution},
    {"gap_converged", KEY_BOOL, AT(gap_converged), NULL, NULL, NULL},
    {"time_reversal", KEY_BOOL, AT(time_reversal), "time_reversal", NULL, NULL},
    {"inversion", KEY_BOOL, AT(inversion), "inversion", NULL, NULL},
    {"time_reversal_residual", KEY_NUM, AT(tr_residual), NULL, NULL, NULL},
    {"inversion_residual", KEY_NUM, AT(inv_residual), NULL, NULL, NULL},
    {"magnetism", KEY_STR, AT(magnetism), "magnetism", NULL, NULL},
    {"time_reversal_verdict", KEY_VERDICT, AT(tr_verdict), "tr_verdict", NULL, NULL},
    {"inversion_verdict", KEY_VERDICT, AT(inv_verdict), "inv_verdict", NULL, NULL},
    {"time_reversal_breaking_eV", KEY_NUM, AT(tr_break_ev), "tr_breaking_ev", NULL, NULL},
    {"time_reversal_breaking_lower_eV", KEY_NUM, AT(tr_break_lower_ev), NULL, NULL, NULL},
    {"inversion_breaking_eV", KEY_NUM, AT(inv_break_ev), "inv_breaking_ev", NULL, NULL},
    {"inversion_breaking_lower_eV", KEY_NUM, AT(inv_break_lower_ev), NULL, NULL, NULL},
    {"symmetrised", KEY_BOOL, AT(symmetrised), "symmetrised", NULL, NULL},
    {"restored", KEY_STR, AT(restored_names), "restored", NULL, NULL},
    {"breaking_eV", KEY_NUM, AT(breaking_ev), "breaking_ev", NULL, NULL},
    {"breaking_bound", KEY_STR, AT(breaking_bound), "breaking_bound", NULL, NULL},
    {"symmetry_margin", KEY_NUM, AT(margin), "symmetry_margin", NULL, NULL},
    {"z2", KEY_SPECIAL, 0, 0, NULL, w_z2, r_z2},
    {"z2_parity", KEY_SPECIAL, 0, 0, NULL, w_z2_parity, r_z2_parity},
    {"z2_wcc", KEY_SPECIAL, 0, 0, NULL, w_z2_wcc, r_z2_wcc},
    {"z2_status", KEY_STATUS, AT(z2_status), "z2_status", NULL, NULL},
    {"z2_note", KEY_STR, AT(z2_note), "z2_note", NULL, NULL},
    {"parities", KEY_SPECIAL, 0, 0, NULL, w_parities, r_parities},
    {"chern", KEY_SPECIAL, 0, 0, NULL, w_chern, r_chern}, /* and plane_chern */
    {"chern_status", KEY_STATUS, AT(chern_status), "chern_status", NULL, NULL},
    {"weyl_nodes", KEY_SPECIAL, 0, 0, NULL, w_nodes, r_nodes}, /* and gap_closings */
    {"net_chirality", KEY_INT, AT(net_chirality), "net_chirality", NULL, NULL},
    {"nodal_line", KEY_BOOL, AT(nodal_line), "nodal_line", NULL, NULL},
    {"nodal_points", KEY_INT, AT(nodal_points), NULL, NULL, NULL},
    {"nodal_extent", KEY_NUM, AT(nodal_extent), NULL, NULL, NULL},
    {"spacegroup", KEY_INT, AT(spacegroup), NULL, NULL, NULL},
    {"symmetry_ops", KEY_INT, AT(symmetry_ops), "symmetry_ops", NULL, NULL},
    {"crystal_symmetrised", KEY_BOOL, AT(crystal_symmetrised), NULL, NULL, NULL},
    {"crystal_breaking_eV", KEY_NUM, AT(crystal_breaking_ev), "crystal_breaking_ev", NULL, NULL},
    {"crystal_verdicts", KEY_STR_NONEMPTY, AT(crystal_verdicts), NULL, NULL, NULL},
    {"z4", KEY_INT_OPT, AT(z4), "z4", NULL, NULL},
    {"mirror_chern", KEY_INT, AT(mirror_chern), NULL, NULL, NULL},
    {"mirror_chern_status", KEY_STATUS, AT(mirror_chern_status), "mirror_chern_status", NULL, NULL},
    {"gap_point_symmetry", KEY_STR_NONEMPTY, AT(gap_symmetry), NULL, NULL, NULL},
    {"mesh", KEY_INT, AT(mesh), "mesh", NULL, NULL},
    {"seconds", KEY_NUM, AT(seconds), "diag_seconds", NULL, NULL},
    {"k_points", KEY_LLONG, AT(nk_evaluated), NULL, NULL, NULL},
    {"evidence", KEY_STR_NONEMPTY, AT(evidence), NULL, NULL, NULL},
    {"evidence_skipped", KEY_STR_NONEMPTY, AT(evidence_skipped), NULL, NULL, NULL},
    {"wcc_flows", KEY_SPECIAL, 0, 0, NULL, w_flows, r_flows},
    {"ahc", KEY_SPECIAL, 0, 0, NULL, w_transport, r_transport}, /* and shc, transport */
    {"surface", KEY_SPECIAL, 0, 0, NULL, w_surface, r_surface},
};

static int write_row(cJSON *o, const key_row *k, const res_diag *r, int with_flows)
{
    const char *base = (const char *)r + k->off;
    switch (k->kind) {
    case KEY_STR:
        return cJSON_AddStringToObject(o, k->name, base) ? 0 : -1;
    case KEY_STR_NONEMPTY:
        return !*base || cJSON_AddStringToObject(o, k->name, base) ? 0 : -1;
    case KEY_INT:
        return cJSON_AddNumberToObject(o, k->name, *(const int *)base) ? 0 : -1;
    case KEY_INT_OPT:
        if (*(const int *)base == -1) return cJSON_AddNullToObject(o, k->name) ? 0 : -1;
        return cJSON_AddNumberToObject(o, k->name, *(const int *)base) ? 0 : -1;
    case KEY_LLONG:
        return cJSON_AddNumberToObject(o, k->name, (double)*(const long long *)base) ? 0 : -1;
    case KEY_NUM:
        return cJSON_AddNumberToObject(o, k->name, *(const double *)base) ? 0 : -1;
    case KEY_BOOL:
        return cJSON_AddBoolToObject(o, k->name, *(const int *)base) ? 0 : -1;
    case KEY_VEC3: {
        cJSON *v = cJSON_CreateDoubleArray((const double *)base, 3);
        return v && cJSON_AddItemToObject(o, k->name, v) ? 0 : (cJSON_Delete(v), -1);
    }
    case KEY_CLASS: {
        const char *name = res_class_name(*(const res_class *)base);
        return cJSON_AddStringToObject(o, k->name, name ? name : res_class_name(RES_UNDETERMINED)) ? 0 : -1;
    }
    case KEY_STATUS:
        return cJSON_AddStringToObject(o, k->name, res_status_name(*(const res_status *)base)) ? 0 : -1;
    case KEY_VERDICT:
        return cJSON_AddStringToObject(o, k->name, res_verdict_name(*(const res_verdict *)base)) ? 0 : -1;
    case KEY_SPECIAL:
        return k->write(o, r, with_flows);
    }
    return -1;
}

cJSON *res_to_json(const res_diag *r, int with_flows)
{
    cJSON *o = cJSON_CreateObject();
    for (size_t i = 0; o && i < sizeof KEYS / sizeof KEYS[0]; i++)
        if (write_row(o, &KEYS[i], r, with_flows) != 0) {
            cJSON_Delete(o);
            return NULL;
        }
    return o;
}

char *res_to_text(const res_diag *r, int with_flows)
{
    cJSON *o = res_to_json(r, with_flows);
    char *text = o ? cJSON_PrintUnformatted(o) : NULL;
    cJSON_Delete(o);
    return text;
}

static int read_row(const cJSON *o, const key_row *k, res_diag *r, bs_err *err)
{
    char *base = (char *)r + k->off;
    switch (k->kind) {
    case KEY_STR:
    case KEY_STR_NONEMPTY:
        return read_str(o, k->name, base, k->size, err);
    case KEY_INT:
        return read_int(o, k->name, (int *)base, err);
    case KEY_INT_OPT: {
        const cJSON *v = member(o, k->name);
        if (v && cJSON_IsNull(v)) {
            *(int *)base = -1;
            return 0;
        }
        return read_int(o, k->name, (int *)base, err);
    }
    case KEY_LLONG: {
        double v = 0;
        int rc = read_num(o, k->name, &v, err);
        if (rc == 0 && member(o, k->name)) *(long long *)base = (long long)v;
        return rc;
    }
    case KEY_NUM:
        return read_num(o, k->name, (double *)base, err);
    case KEY_BOOL:
        return read_bool(o, k->name, (int *)base, err);
    case KEY_VEC3: {
        const cJSON *v = member(o, k->name);
        return v && json_vec(v, 3, (double *)base) != 0 ? key_fail(err, k->name, "a list of 3 numbers") : 0;
    }
    case KEY_CLASS: {
        const cJSON *v = member(o, k->name);
        int c = v && cJSON_IsString(v) ? res_class_parse(v->valuestring) : -1;
        if (v && c < 0)
            return key_fail(err, k->name, "a class name (\"trivial insulator\", ..., \"undetermined\")");
        if (v) *(res_class *)base = (res_class)c;
        return 0;
    }
    case KEY_STATUS: {
        const cJSON *v = member(o, k->name);
        int st = v && cJSON_IsString(v) ? res_status_parse(v->valuestring) : -1;
        if (v && st < 0)
            return key_fail(err, k->name, "one of \"not applicable\", \"done\", \"ambiguous\", \"disagree\"");
        if (v) *(res_status *)base = (res_status)st;
        return 0;
    }
    case KEY_VERDICT: {
        const cJSON *v = member(o, k->name);
        int vd = v && cJSON_IsString(v) ? res_verdict_parse(v->valuestring) : -2;
        if (v && vd < -1)
            return key_fail(err, k->name,
                            "one of \"exact\", \"approximate\", \"broken\", \"not applicable\"");
        if (v) *(res_verdict *)base = (res_verdict)vd;
        return 0;
    }
    case KEY_SPECIAL:
        return k->read(o, r, err);
    }
    return BS_EINVAL;
}

int res_from_json(const cJSON *o, res_diag *r, bs_err *err)
{
    res_clear(r);
    if (!cJSON_IsObject(o)) return bs_fail(err, BS_EPARSE, "the diagnosis is not a JSON object");
    int rc = 0;
    for (size_t i = 0; rc == 0 && i < sizeof KEYS / sizeof KEYS[0]; i++)
        rc = read_row(o, &KEYS[i], r, err);
    if (rc == 0 && r->has_transport) r->transport.dim = r->dim;
    /* A diagnosis written by hand may leave out the statuses: lists that are there were done. */
    if (rc == 0 && !member(o, "z2_status") && member(o, "z2")) r->z2_status = RES_DONE;
    if (rc == 0 && !member(o, "chern_status") && (member(o, "chern") || member(o, "plane_chern")))
        r->chern_status = RES_DONE;
    if (rc == 0 && r->z2_status == RES_DONE && !member(o, "z2"))
        rc = key_fail(err, "z2", "a list when z2_status is \"done\"");
    if (rc != 0) res_clear(r);
    return rc;
}

int res_from_text(const char *text, size_t len, res_diag *r, bs_err *err)
{
    res_clear(r);
    const char *end = NULL;
    cJSON *o = cJSON_ParseWithLengthOpts(text, len, &end, 0);
    if (!o) {
        /* cJSON points end at the byte where parsing stopped. */
        long off = end && end >= text && end <= text + len ? (long)(end - text) : -1;
        return bs_fail(err, BS_EPARSE, "malformed diagnosis JSON at byte %ld of %zu", off, len);
    }
    for (const char *p = end; p < text + len; p++)
        if (*p != ' ' && *p != '\t' && *p != '\n' && *p != '\r' && *p != '\0') {
            cJSON_Delete(o);
            return bs_fail(err, BS_EPARSE, "unexpected bytes after the diagnosis JSON at byte %ld of %zu",
                           (long)(p - text), len);
        }
    int rc = res_from_json(o, r, err);
    cJSON_Delete(o);
    return rc;
}

int res_for_each_column(const res_diag *r, int (*fn)(void *ctx, const char *column, const res_value *v),
                        void *ctx)
{
    for (size_t i = 0; i < sizeof KEYS / sizeof KEYS[0]; i++) {
        const key_row *k = &KEYS[i];
        if (!k->column) continue;
        const char *base = (const char *)r + k->off;
        res_value v = {RES_VALUE_INT, 0, 0, NULL};
        switch (k->kind) {
        case KEY_STR:
        case KEY_STR_NONEMPTY:
            v.type = RES_VALUE_TEXT;
            v.text = base;
            break;
        case KEY_INT:
        case KEY_BOOL:
            v.i = *(const int *)base;
            break;
        case KEY_INT_OPT:
            v.i = *(const int *)base;
            if (v.i == -1) v.type = RES_VALUE_TEXT, v.text = NULL; /* bound as NULL */
            break;
        case KEY_LLONG:
            v.i = *(const long long *)base;
            break;
        case KEY_NUM:
            v.type = RES_VALUE_REAL;
            v.x = *(const double *)base;
            break;
        case KEY_CLASS:
            v.type = RES_VALUE_TEXT;
            v.text = res_class_name(*(const res_class *)base);
            break;
        case KEY_STATUS:
            v.type = RES_VALUE_TEXT;
            v.text = res_status_name(*(const res_status *)base);
            break;
        case KEY_VERDICT:
            v.type = RES_VALUE_TEXT;
            v.text = res_verdict_name(*(const res_verdict *)base);
            break;
        default:
            continue; /* structured keys have no column of their own here */
        }
        if (k->kind == KEY_BOOL) v.i = v.i != 0;
        int rc = fn(ctx, k->column, &v);
        if (rc != 0) return rc;
    }
    return 0;
}
