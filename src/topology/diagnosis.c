/* The diagnosis of one material: runs the gap search, symmetry detection, parity and
 * Wannier-centre Z2, Chern numbers and node search in the order where each informs the next,
 * then classifies with a confidence. Methods are cited in the modules that implement them. */
#include "bandsieve/diagnosis.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/bandpair.h"
#include "bandsieve/chern.h"
#include "bandsieve/config.h"
#include "bandsieve/gaps.h"
#include "bandsieve/hk.h"
#include "bandsieve/nodes.h"
#include "bandsieve/parity.h"
#include "bandsieve/symmetry.h"
#include "bandsieve/wilson.h"

void diag_result_init(diag_result *r)
{
    memset(r, 0, sizeof *r);
    snprintf(r->cls, sizeof r->cls, "undetermined");
    for (int i = 0; i < 4; i++) r->z2[i] = r->z2_parity[i] = r->z2_wcc[i] = -1;
}

void diag_result_clear(diag_result *r)
{
    if (!r) return;
    free(r->nodes);
    for (int f = 0; f < r->nflows; f++) {
        free(r->flows[f].kpar);
        free(r->flows[f].wcc);
    }
    free(r->flows);
    diag_result_init(r);
}

/* Everything diag_run allocates, released through one exit. */
typedef struct diag_ctx {
    const tb_model *m;
    const diag_opts *o;
    double deadline;
    hk_engine *hk;
    bp_eval *bp;
    bp_mesh *mesh;
    sym_info *sym;
    gaps_result gaps;
    nodes_result nodes;
} diag_ctx;

int diag_default_mesh(int dim) { return dim == 2 ? 36 : 14; }

static int default_mesh(const tb_model *m, const diag_opts *o)
{
    if (o && o->mesh > 0) return o->mesh;
    int factor = o && o->mesh_factor > 1 ? o->mesh_factor : 1;
    return factor * diag_default_mesh(m->dim);
}

static int run_symmetry(diag_ctx *c, diag_result *r, bs_err *err)
{
    sym_opts so;
    sym_opts_default(&so);
    if (c->o && c->o->seed) so.seed = c->o->seed;
    if (c->o && c->o->symmetry_tol > 0) so.tol = c->o->symmetry_tol;
    int rc = sym_detect(c->m, &so, &c->sym, err);
    if (rc != 0) return rc;
    r->time_reversal = c->sym->time_reversal;
    r->inversion = c->sym->inversion;
    r->tr_residual = c->sym->tr_residual;
    r->inv_residual = c->sym->inv_residual;
    return 0;
}

static int run_gaps(diag_ctx *c, diag_result *r, bs_err *err)
{
    int rc = bp_create(c->m, c->hk, c->deadline, &c->bp, err);
    if (rc == 0) rc = bp_mesh_eval(c->bp, r->mesh, &c->mesh, err);
    if (rc != 0) return rc;
    gaps_opts go;
    gaps_opts_init(&go);
    go.grid = c->mesh;
    go.deadline = c->deadline;
    rc = gaps_find_eval(c->bp, &go, &c->gaps, err);
    if (rc != 0) return rc;
    /* k-points of the shared evaluator are counted once, at the end (bp_count). */
    long long keep = r->nk_evaluated;
    gaps_to_diag(&c->gaps, r);
    r->nk_evaluated = keep;
    return 0;
}

/* Parity Z2 (with inversion) into r. */
static int run_parity(diag_ctx *c, diag_result *r, bs_err *err)
{
    par_result pr;
    int rc = par_z2(c->m, c->sym, NULL, &pr, err);
    if (rc != 0) return rc;
    if (pr.status == PAR_NA) return 0;
    r->ntrim = pr.ntrim;
    for (int t = 0; t < pr.ntrim; t++) {
        r->par_delta[t] = pr.delta[t];
        r->par_nodd[t] = pr.nodd[t];
    }
    if (pr.status == PAR_DONE) {
        r->z2_parity_status = DIAG_DONE;
        memcpy(r->z2_parity, pr.z2, sizeof pr.z2);
    } else {
        r->z2_parity_status = DIAG_AMBIGUOUS;
        snprintf(r->z2_note, sizeof r->z2_note, "parity: %s", pr.reason);
    }
    return 0;
}

/* Wannier-centre flow Z2 (time reversal with Kramers pairs) into r. */
static int run_wcc(diag_ctx *c, diag_result *r, bs_err *err)
{
    wilson_ws *w = NULL;
    wilson_z2 wz;
    memset(&wz, 0, sizeof wz);
    int rc = wilson_create(c->m, c->m->nocc, &w, err);
    if (rc != 0) return rc;
    wilson_opts wo;
    wilson_opts_default(&wo);
    wo.deadline = c->deadline;
    if (r->mesh > wo.nk) wo.nk = r->mesh;
    /* A finer mesh also buys a finer and longer bisection of the pumping parameter, so that a
     * rescreen can resolve flows that the default left ambiguous near a transition. */
    double scale = r->mesh / (double)diag_default_mesh(c->m->dim);
    if (scale > 1) {
        wo.min_spacing /= scale * scale;
        wo.max_strings = (int)(wo.max_strings * scale);
    }
    rc = wilson_z2_run(w, &wo, &wz, err);
    if (rc == 0) {
        r->nk_evaluated += wz.nk;
        if (wz.status == DIAG_DONE) {
            r->z2_wcc_status = DIAG_DONE;
            memcpy(r->z2_wcc, wz.z2, sizeof wz.z2);
        } else if (wz.gap_closed) {
            r->wcc_gap_closed = 1;
        } else {
            r->z2_wcc_status = DIAG_AMBIGUOUS;
            size_t used = strlen(r->z2_note);
            snprintf(r->z2_note + used, sizeof r->z2_note - used, "%swcc: %s", used ? "; " : "", wz.reason);
        }
        if (c->o && c->o->want_flows) rc = wilson_z2_take_flows(&wz, &r->flows, &r->nflows, err);
    }
    wilson_z2_clear(&wz);
    wilson_free(w);
    return rc;
}

/* Chern numbers without time reversal: the zone in 2D, the six planes in 3D. */
static int run_chern(diag_ctx *c, diag_result *r, bs_err *err)
{
    chern_ws *cw = NULL;
    int rc = chern_create(c->m, c->m->nocc, &cw, err);
    if (rc != 0) return rc;
    chern_opts co;
    chern_opts_default(&co, 0);
    co.deadline = c->deadline;
    if (r->mesh > co.mesh) co.mesh = r->mesh;
    if (co.max_mesh < 4 * co.mesh) co.max_mesh = 4 * co.mesh;
    int first = c->m->dim == 2 ? 4 : 0, last = c->m->dim == 2 ? 4 : 5;
    r->chern_status = DIAG_DONE;
    for (int p = first; rc == 0 && p <= last; p++) {
        chern_value v;
        rc = chern_plane(cw, p, &co, &v, err);
        if (rc != 0) break;
        r->nk_evaluated += v.nk;
        r->plane_chern[p] = v.chern;
        if (v.status != DIAG_DONE) r->chern_status = DIAG_AMBIGUOUS;
        if (p == 4) r->chern = v.chern;
    }
    chern_free(cw);
    return rc;
}

static int run_nodes(diag_ctx *c, diag_result *r, bs_err *err)
{
    nodes_opts no;
    nodes_opts_init(&no);
    no.grid = c->mesh;
    no.deadline = c->deadline;
    long long before = bp_count(c->bp);
    int rc = nodes_find_eval(c->m, c->bp, &no, &c->nodes, err);
    if (rc != 0) return rc;
    /* Only the chirality fluxes are outside the shared evaluator's count. */
    long long flux_nk = c->nodes.nk_evaluated - (bp_count(c->bp) - before);
    r->chirality_status = c->nodes.chirality_status;
    r->nodes_tr_ok = r->time_reversal ? nodes_check_time_reversal(&c->nodes, c->m->dim, 1e-5) : 1;
    /* The node search starts from more cells than the gap search's few basins: a node it finds
     * is the true direct gap. */
    gaps_merge_nodes(&c->gaps, &c->nodes);
    long long keep = r->nk_evaluated;
    gaps_to_diag(&c->gaps, r);
    nodes_to_diag(&c->nodes, r);
    r->nk_evaluated = keep + (flux_nk > 0 ? flux_nk : 0);
    return 0;
}

/* Combines the parity and Wannier-centre indices: both done and equal, or one done; two done
 * and different is a disagreement, reported and never resolved here. */
static void combine_z2(diag_result *r)
{
    int n = r->dim == 2 ? 1 : 4;
    int pd = r->z2_parity_status == DIAG_DONE, wd = r->z2_wcc_status == DIAG_DONE;
    if (pd && wd) {
        if (memcmp(r->z2_parity, r->z2_wcc, n * sizeof(int)) != 0) {
            r->z2_status = DIAG_DISAGREE;
            size_t used = strlen(r->z2_note);
            snprintf(r->z2_note + used, sizeof r->z2_note - used,
                     "%sparity and Wannier-centre indices disagree", used ? "; " : "");
            return;
        }
        r->z2_status = DIAG_DONE;
        memcpy(r->z2, r->z2_parity, n * sizeof(int));
    } else if (pd || wd) {
        r->z2_status = DIAG_DONE;
        memcpy(r->z2, pd ? r->z2_parity : r->z2_wcc, n * sizeof(int));
    } else if (r->z2_parity_status == DIAG_AMBIGUOUS || r->z2_wcc_status == DIAG_AMBIGUOUS) {
        r->z2_status = DIAG_AMBIGUOUS;
    }
}

static void set_class(diag_result *r, const char *cls, double conf, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

static void set_class(diag_result *r, const char *cls, double conf, const char *fmt, ...)
{
    snprintf(r->cls, sizeof r->cls, "%s", cls);
    r->confidence = conf;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(r->reason, sizeof r->reason, fmt, ap);
    va_end(ap);
}

static void classify_gapless(diag_result *r, int degenerate)
{
    if (degenerate) {
        set_class(r, "metal", 0.8, "the filling of %d bands splits degenerate bands over most of the zone",
                  r->nocc);
        return;
    }
    if (r->dim == 3 && r->nodal_line) {
        set_class(r, "nodal-line semimetal", 0.8, "the gap closes on a curve: %d touching points over %.3g "
                  "(reduced units)", r->nodal_points, r->nodal_extent);
        return;
    }
    int nweyl = 0;
    for (int i = 0; i < r->nnodes; i++) nweyl += r->nodes[i].chirality != 0;
    /* With inversion and time reversal the Berry curvature vanishes (or the bands are Kramers
     * degenerate) at every k, so no Weyl node can exist (common practice). */
    int weyl_forbidden = r->inversion && r->time_reversal;
    if (r->dim == 3 && r->nnodes > 0 && nweyl == 0 && (r->chirality_status == DIAG_DONE || weyl_forbidden)) {
        set_class(r, "metal", 0.5, "the gap closes at %d points of zero chirality (Dirac points%s): a semimetal, "
                  "at a phase transition or protected", r->nnodes, weyl_forbidden ? "; inversion with time "
                  "reversal forbids Weyl nodes" : "");
        return;
    }
    if (r->dim == 3 && r->nnodes > 0 && nweyl == 0) {
        set_class(r, "undetermined", 0.3, "the gap closes at %d points whose chirality could not be resolved",
                  r->nnodes);
        return;
    }
    if (r->dim == 3 && r->nnodes > 0) {
        double conf = 0.9;
        char extra[160] = "";
        if (r->chirality_status != DIAG_DONE) { conf = 0.4; snprintf(extra, sizeof extra, "; some chiralities not integer"); }
        else if (r->net_chirality != 0) { conf = 0.4; snprintf(extra, sizeof extra, "; net chirality %+d: nodes were missed", r->net_chirality); }
        else if (r->time_reversal && !r->nodes_tr_ok) { conf = 0.6; snprintf(extra, sizeof extra, "; nodes not in time-reversed sets of four"); }
        if (r->gap_indirect_ev < -BS_GAP_CLOSED_EV) {
            conf *= 0.8;
            size_t used = strlen(extra);
            snprintf(extra + used, sizeof extra - used, "; other bands overlap the nodes' energy (Fermi pockets)");
        }
        set_class(r, "Weyl semimetal", conf, "%d Weyl nodes, net chirality %d%s", nweyl, r->net_chirality, extra);
        return;
    }
    if (r->dim == 2 && r->nnodes > 0) {
        set_class(r, "metal", 0.5, "the 2D gap closes at %d points: a Dirac semimetal at this filling, at a phase "
                  "transition or protected", r->nnodes);
        return;
    }
    if (r->gap_direct_ev < BS_GAP_CLOSED_EV) {
        set_class(r, "metal", 0.5, "the direct gap closes (%.2g eV) but no isolated node or line was resolved",
                  r->gap_direct_ev);
        return;
    }
    set_class(r, "metal", r->gap_indirect_ev < -0.01 ? 0.95 : 0.7,
              "bands at the filling overlap in energy: indirect gap %.4g eV", r->gap_indirect_ev);
}

static void classify_insulator(diag_result *r, int kramers)
{
    double small = r->gap_indirect_ev < 5e-3 ? 0.7 : 1.0;
    if (!r->time_reversal) {
        if (r->chern_status == DIAG_NA) {
            set_class(r, "undetermined", 0.2, "no time reversal and no Chern number computed");
            return;
        }
        int any = 0;
        for (int p = 0; p < (r->dim == 2 ? 0 : 6); p++) any |= r->plane_chern[p] != 0;
        if (r->dim == 2) any = r->chern != 0;
        double conf = (r->chern_status == DIAG_DONE ? 0.95 : 0.5) * small;
        if (any) {
            if (r->dim == 2)
                set_class(r, "Chern insulator", conf, "time reversal broken, Chern number %d", r->chern);
            else
                set_class(r, "Chern insulator", conf, "time reversal broken, plane Chern numbers %d,%d,%d,%d,%d,%d",
                          r->plane_chern[0], r->plane_chern[1], r->plane_chern[2], r->plane_chern[3],
                          r->plane_chern[4], r->plane_chern[5]);
        } else {
            set_class(r, "trivial insulator", conf * (r->dim == 3 ? 0.9 : 1.0),
                      "time reversal broken, Chern number%s zero", r->dim == 3 ? "s of all six planes" : "");
        }
        return;
    }
    if (!kramers) {
        set_class(r, "trivial insulator", 0.8 * small,
                  "spinless time reversal: no Z2 index, Chern numbers vanish by symmetry");
        return;
    }
    if (r->z2_status == DIAG_DISAGREE) {
        set_class(r, "undetermined", 0.1, "%s", r->z2_note);
        return;
    }
    if (r->z2_status != DIAG_DONE) {
        set_class(r, "undetermined", 0.2, "Z2 could not be determined: %s", r->z2_note[0] ? r->z2_note : "no method applied");
        return;
    }
    int both = r->z2_parity_status == DIAG_DONE && r->z2_wcc_status == DIAG_DONE;
    int other_ambiguous = r->z2_parity_status == DIAG_AMBIGUOUS || r->z2_wcc_status == DIAG_AMBIGUOUS;
    double conf = (both ? 0.97 : other_ambiguous ? 0.6 : 0.9) * small;
    const char *how = both ? "parity and Wannier-centre flow agree" :
                      r->z2_parity_status == DIAG_DONE ? "from parities only" : "from the Wannier-centre flow";
    if (r->dim == 2) {
        if (r->z2[0]) set_class(r, "2D topological insulator", conf, "Z2 = 1 (%s)", how);
        else set_class(r, "trivial insulator", conf, "Z2 = 0 (%s)", how);
        return;
    }
    if (r->z2[0]) set_class(r, "strong topological insulator", conf, "Z2 = %d;%d%d%d (%s)", r->z2[0], r->z2[1], r->z2[2], r->z2[3], how);
    else if (r->z2[1] || r->z2[2] || r->z2[3])
        set_class(r, "weak topological insulator", conf, "Z2 = 0;%d%d%d (%s)", r->z2[1], r->z2[2], r->z2[3], how);
    else set_class(r, "trivial insulator", conf, "Z2 = 0;000 (%s)", how);
}

static void append_small_gap_note(diag_result *r)
{
    if (!strstr(r->cls, "insulator")) return;
    if (r->gap_indirect_ev > 0 && r->gap_indirect_ev < 5e-3) {
        size_t used = strlen(r->reason);
        snprintf(r->reason + used, sizeof r->reason - used, "; gap only %.2g eV: near a transition", r->gap_indirect_ev);
    }
}

int diag_run(const tb_model *m, const diag_opts *opts, diag_result *r, bs_err *err)
{
    double t0 = bp_now();
    diag_ctx c;
    memset(&c, 0, sizeof c);
    nodes_result_init(&c.nodes);
    c.m = m;
    c.o = opts;
    c.deadline = opts && opts->max_seconds > 0 ? t0 + opts->max_seconds : 0;
    snprintf(r->id, sizeof r->id, "%s", m->id);
    snprintf(r->formula, sizeof r->formula, "%s", m->formula);
    r->dim = m->dim;
    r->norb = m->norb;
    r->nocc = m->nocc;
    r->mesh = default_mesh(m, opts);

    int rc = hk_create(m, 64, &c.hk, err);
    if (rc == 0) rc = run_symmetry(&c, r, err);
    if (rc == 0) rc = run_gaps(&c, r, err);
    int gapless = 0, kramers = 0, searched = 0;
    if (rc == 0) {
        kramers = r->time_reversal && c.sym->tr_squared == -1;
        /* In 3D a small refined gap may hide Weyl nodes between the gap search's basins: search for
         * nodes whenever the gap is below 2% of the two bands' width (or closed). */
        double suspicious = fmax(BS_GAP_CLOSED_EV, 0.02 * c.gaps.width_ev);
        if (c.gaps.closed || (m->dim == 3 && c.gaps.gap_direct_ev < suspicious)) {
            rc = run_nodes(&c, r, err);
            searched = 1;
        }
    }
    if (rc == 0) {
        int direct_open = !c.gaps.closed;
        gapless = c.gaps.closed || c.gaps.metallic;
        if (direct_open && kramers && r->inversion) rc = run_parity(&c, r, err);
        if (rc == 0 && direct_open && kramers) rc = run_wcc(&c, r, err);
        if (rc == 0 && direct_open && !r->time_reversal) rc = run_chern(&c, r, err);
        if (rc == 0 && r->wcc_gap_closed) {
            /* The strings found a closing that the gap mesh missed: trust the finer probe. */
            gapless = 1;
            if (!searched) rc = run_nodes(&c, r, err);
        }
    }
    if (rc == 0) {
        combine_z2(r);
        if (gapless) classify_gapless(r, c.nodes.degenerate);
        else classify_insulator(r, kramers);
        append_small_gap_note(r);
    }
    if (c.bp) r->nk_evaluated += bp_count(c.bp);
    r->seconds = bp_now() - t0;
    nodes_result_clear(&c.nodes);
    bp_mesh_free(c.mesh);
    bp_free(c.bp);
    sym_info_free(c.sym);
    hk_free(c.hk);
    return rc;
}

static cJSON *int_list_or_null(int status, const int *v, int n)
{
    if (status != DIAG_DONE) return cJSON_CreateNull();
    return cJSON_CreateIntArray(v, n);
}

static const char *status_name(int s)
{
    switch (s) {
    case DIAG_DONE: return "done";
    case DIAG_AMBIGUOUS: return "ambiguous";
    case DIAG_DISAGREE: return "disagree";
    default: return "not applicable";
    }
}

static cJSON *flows_json(const diag_result *r)
{
    cJSON *list = cJSON_CreateArray();
    for (int f = 0; f < r->nflows; f++) {
        const diag_flow *fl = &r->flows[f];
        cJSON *o = cJSON_CreateObject();
        cJSON_AddNumberToObject(o, "plane", fl->plane);
        cJSON_AddItemToObject(o, "kpar", cJSON_CreateDoubleArray(fl->kpar, fl->nstring));
        cJSON *w = cJSON_AddArrayToObject(o, "wcc");
        for (int s = 0; s < fl->nstring; s++)
            cJSON_AddItemToArray(w, cJSON_CreateDoubleArray(fl->wcc + (size_t)s * fl->nband, fl->nband));
        cJSON_AddItemToArray(list, o);
    }
    return list;
}

cJSON *diag_to_json(const diag_result *r, int with_flows)
{
    cJSON *o = cJSON_CreateObject();
    if (!o) return NULL;
    int nz = r->dim == 2 ? 1 : 4;
    cJSON_AddStringToObject(o, "id", r->id);
    if (r->formula[0]) cJSON_AddStringToObject(o, "formula", r->formula);
    cJSON_AddStringToObject(o, "class", r->cls);
    cJSON_AddNumberToObject(o, "confidence", r->confidence);
    cJSON_AddStringToObject(o, "reason", r->reason);
    cJSON_AddNumberToObject(o, "dimension", r->dim);
    cJSON_AddNumberToObject(o, "norb", r->norb);
    cJSON_AddNumberToObject(o, "occupied_bands", r->nocc);
    cJSON_AddNumberToObject(o, "gap_direct_eV", r->gap_direct_ev);
    cJSON_AddNumberToObject(o, "gap_indirect_eV", r->gap_indirect_ev);
    cJSON_AddItemToObject(o, "k_gap_direct", cJSON_CreateDoubleArray(r->k_gap_direct, 3));
    cJSON_AddItemToObject(o, "k_vbm", cJSON_CreateDoubleArray(r->k_vbm, 3));
    cJSON_AddItemToObject(o, "k_cbm", cJSON_CreateDoubleArray(r->k_cbm, 3));
    cJSON_AddBoolToObject(o, "time_reversal", r->time_reversal);
    cJSON_AddBoolToObject(o, "inversion", r->inversion);
    cJSON_AddNumberToObject(o, "time_reversal_residual", r->tr_residual);
    cJSON_AddNumberToObject(o, "inversion_residual", r->inv_residual);
    cJSON_AddItemToObject(o, "z2", int_list_or_null(r->z2_status, r->z2, nz));
    cJSON_AddItemToObject(o, "z2_parity", int_list_or_null(r->z2_parity_status, r->z2_parity, nz));
    cJSON_AddItemToObject(o, "z2_wcc", int_list_or_null(r->z2_wcc_status, r->z2_wcc, nz));
    cJSON_AddStringToObject(o, "z2_status", status_name(r->z2_status));
    cJSON_AddStringToObject(o, "z2_note", r->z2_note);
    if (r->ntrim > 0) {
        cJSON *p = cJSON_AddObjectToObject(o, "parities");
        cJSON_AddItemToObject(p, "delta", cJSON_CreateIntArray(r->par_delta, r->ntrim));
        cJSON_AddItemToObject(p, "odd_occupied", cJSON_CreateIntArray(r->par_nodd, r->ntrim));
    }
    if (r->chern_status == DIAG_DONE || r->chern_status == DIAG_AMBIGUOUS) {
        if (r->dim == 2) cJSON_AddNumberToObject(o, "chern", r->chern);
        else cJSON_AddNullToObject(o, "chern");
        if (r->dim == 3) cJSON_AddItemToObject(o, "plane_chern", cJSON_CreateIntArray(r->plane_chern, 6));
        else cJSON_AddNullToObject(o, "plane_chern");
    } else if (r->time_reversal && r->gap_direct_ev > BS_GAP_CLOSED_EV) {
        /* Time reversal forces every Chern number to zero (common practice). */
        if (r->dim == 2) cJSON_AddNumberToObject(o, "chern", 0);
        else cJSON_AddNullToObject(o, "chern");
        cJSON_AddNullToObject(o, "plane_chern");
    } else {
        cJSON_AddNullToObject(o, "chern");
        cJSON_AddNullToObject(o, "plane_chern");
    }
    cJSON_AddStringToObject(o, "chern_status", status_name(r->chern_status));
    cJSON *nodes = cJSON_AddArrayToObject(o, "weyl_nodes");
    cJSON *closings = cJSON_CreateArray();
    for (int i = 0; i < r->nnodes; i++) {
        /* A touching of zero chirality (a Dirac point, a point of a nodal line, any 2D closing) is
         * not a Weyl node; it is listed under gap_closings. A 3D node whose flux was not an integer
         * stays a Weyl-node candidate with chirality 0, and the confidence says so. */
        int weyl = r->dim == 3 && (r->nodes[i].chirality != 0 || r->chirality_status != DIAG_DONE);
        if (!weyl) {
            cJSON_AddItemToArray(closings, cJSON_CreateDoubleArray(r->nodes[i].k, 3));
            continue;
        }
        cJSON *n = cJSON_CreateObject();
        cJSON_AddItemToObject(n, "k", cJSON_CreateDoubleArray(r->nodes[i].k, 3));
        cJSON_AddNumberToObject(n, "chirality", r->nodes[i].chirality);
        cJSON_AddNumberToObject(n, "energy_eV", r->nodes[i].energy_ev);
        cJSON_AddNumberToObject(n, "gap_eV", r->nodes[i].gap_ev);
        cJSON_AddItemToArray(nodes, n);
    }
    cJSON_AddItemToObject(o, "gap_closings", closings);
    cJSON_AddNumberToObject(o, "net_chirality", r->net_chirality);
    cJSON_AddBoolToObject(o, "nodal_line", r->nodal_line);
    cJSON_AddNumberToObject(o, "nodal_points", r->nodal_points);
    cJSON_AddNumberToObject(o, "nodal_extent", r->nodal_extent);
    cJSON_AddNumberToObject(o, "mesh", r->mesh);
    cJSON_AddNumberToObject(o, "seconds", r->seconds);
    cJSON_AddNumberToObject(o, "k_points", (double)r->nk_evaluated);
    if (with_flows && r->nflows > 0) cJSON_AddItemToObject(o, "wcc_flows", flows_json(r));
    return o;
}

void diag_attach_transport(cJSON *diag, cJSON *tr)
{
    if (!diag || !tr) {
        cJSON_Delete(tr);
        return;
    }
    cJSON *ahc = cJSON_DetachItemFromObject(tr, "ahc");
    cJSON *shc = cJSON_DetachItemFromObject(tr, "shc");
    if (ahc) cJSON_AddItemToObject(diag, "ahc", ahc);
    if (shc) cJSON_AddItemToObject(diag, "shc", shc);
    cJSON_AddItemToObject(diag, "transport", tr);
}
