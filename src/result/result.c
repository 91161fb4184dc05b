/* The shared result type: initialisation, release and the one table of class and status names. */
#include "bandsieve/result.h"

#include <stdlib.h>

#include "bandsieve/config.h"
#include <math.h>
#include <stdio.h>
#include <string.h>

static const char *const STATUS_NAMES[] = {"not applicable", "done", "ambiguous", "disagree"};

static const char *const CLASS_NAMES[RES_NCLASS] = {
    [RES_TRIVIAL] = "trivial insulator",          [RES_STRONG_TI] = "strong topological insulator",
    [RES_WEAK_TI] = "weak topological insulator", [RES_2D_TI] = "2D topological insulator",
    [RES_CHERN_INSULATOR] = "Chern insulator",    [RES_WEYL] = "Weyl semimetal",
    [RES_NODAL_LINE] = "nodal-line semimetal",    [RES_METAL] = "metal",
    [RES_UNDETERMINED] = "undetermined",          [RES_TCI] = "topological crystalline insulator"};

static const char *const FERMI_SOURCE_NAMES[] = {"given", "card", "midgap", "filling"};
static const char *const GAUGE_NAMES[] = {"position", "lattice"};

const char *res_status_name(res_status s)
{
    return (int)s >= 0 && (int)s < 4 ? STATUS_NAMES[s] : "unknown";
}

int res_status_parse(const char *name)
{
    for (int i = 0; name && i < 4; i++)
        if (!strcmp(name, STATUS_NAMES[i])) return i;
    return -1;
}

const char *res_class_name(res_class c)
{
    return (int)c >= 0 && c < RES_NCLASS ? CLASS_NAMES[c] : NULL;
}

int res_class_parse(const char *name)
{
    for (int i = 0; name && i < RES_NCLASS; i++)
        if (!strcmp(name, CLASS_NAMES[i])) return i;
    return -1;
}

int res_class_is_insulator(res_class c)
{
    return c == RES_TRIVIAL || c == RES_STRONG_TI || c == RES_WEAK_TI || c == RES_2D_TI ||
           c == RES_CHERN_INSULATOR || c == RES_TCI;
}

int res_class_has_surface_states(res_class c)
{
    return c == RES_STRONG_TI || c == RES_WEAK_TI || c == RES_2D_TI || c == RES_CHERN_INSULATOR ||
           c == RES_TCI;
}

const char *res_fermi_source_name(int source)
{
    return source >= 0 && source < 4 ? FERMI_SOURCE_NAMES[source] : "unknown";
}

const char *res_limit_name(int limit)
{
    switch (limit) {
    case RES_LIMIT_NONE:
        return "none";
    case RES_LIMIT_BUDGET:
        return "k-point budget";
    case RES_LIMIT_DEPTH:
        return "depth limit";
    default:
        return "unknown";
    }
}

const char *res_gauge_name(int gauge)
{
    return GAUGE_NAMES[gauge == RES_GAUGE_LATTICE];
}

int res_chern_shown(const res_diag *r, int *c)
{
    int computed = r->chern_status == RES_DONE || r->chern_status == RES_AMBIGUOUS;
    if (r->dim != 2) return 0;
    if (computed)
        *c = r->chern;
    else if (r->time_reversal && r->gap_direct_ev > BS_GAP_CLOSED_EV)
        *c = 0;
    else
        return 0;
    return 1;
}

int res_plane_chern_shown(const res_diag *r)
{
    return r->dim == 3 && (r->chern_status == RES_DONE || r->chern_status == RES_AMBIGUOUS);
}

/* A 3D node whose flux was not an integer stays a Weyl-node candidate with chirality 0, and the
 * confidence says so. */
int res_node_is_weyl(const res_diag *r, int i)
{
    return r->dim == 3 && (r->nodes[i].chirality != 0 || r->chirality_status != RES_DONE);
}

int res_weyl_count(const res_diag *r)
{
    int n = 0;
    for (int i = 0; i < r->nnodes; i++)
        n += res_node_is_weyl(r, i);
    return n;
}

void res_init(res_diag *r)
{
    memset(r, 0, sizeof *r);
    r->cls = RES_UNDETERMINED;
    r->z4 = -1;
    for (int i = 0; i < 4; i++)
        r->z2[i] = r->z2_parity[i] = r->z2_wcc[i] = -1;
    r->tr_verdict = r->inv_verdict = RES_SYM_NA;
    r->inv_break_ev = r->inv_break_lower_ev = -1;
    r->margin = INFINITY;
    snprintf(r->magnetism, sizeof r->magnetism, "unknown");
}

const char *res_verdict_name(res_verdict v)
{
    switch (v) {
    case RES_SYM_EXACT:
        return "exact";
    case RES_SYM_APPROX:
        return "approximate";
    case RES_SYM_BROKEN:
        return "broken";
    default:
        return "not applicable";
    }
}

int res_verdict_parse(const char *name)
{
    for (int v = RES_SYM_NA; v <= RES_SYM_BROKEN; v++)
        if (name && strcmp(name, res_verdict_name((res_verdict)v)) == 0) return v;
    return -2;
}

void res_clear_flows(res_diag *r)
{
    for (int f = 0; f < r->nflows; f++) {
        free(r->flows[f].kpar);
        free(r->flows[f].wcc);
    }
    free(r->flows);
    r->flows = NULL;
    r->nflows = 0;
}

void res_clear(res_diag *r)
{
    if (!r) return;
    free(r->nodes);
    res_clear_flows(r);
    res_init(r);
}
