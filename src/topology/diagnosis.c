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
#include "bandsieve/clock.h"
#include "bandsieve/config.h"
#include "bandsieve/crystal.h"
#include "bandsieve/crystalline.h"
#include "bandsieve/gaps.h"
#include "bandsieve/hk.h"
#include "bandsieve/nodes.h"
#include "bandsieve/parity.h"
#include "bandsieve/symfit.h"
#include "bandsieve/symmetry.h"
#include "bandsieve/wilson.h"

/* Everything diag_run allocates, released through one exit. */
typedef struct diag_ctx {
    const tb_model *m;
    const diag_opts *o;
    double deadline;
    hk_engine *hk;
    bp_eval *bp;
    bp_mesh *mesh;
    sym_info *sym;
    int z4;             /* from the parity counts, -1 when not computed */
    tb_model *ms;       /* the symmetrised model (owned), NULL when nothing was restored */
    const tb_model *zm; /* model of the symmetry-protected quantities: ms, or m */
    symfit_break trb, invb;
    int measured;            /* trb and invb measured already (measure_breaking) */
    int tr_exact, inv_exact; /* what sym_detect found on H itself */
    int mag;                 /* TB_MAG_* statement used: the card's, or the run's override */
    int tr_physical;         /* time reversal broken for real: the card says so, or the breaking
                                reaches the gap even at its lower bound, or a Chern number is nonzero */
    gaps_result gaps;
    nodes_result nodes;
} diag_ctx;

/* Evidence accounting: appends "stage:eigensolves" to r->evidence (the sum over the stages is
 * r->nk_evaluated; the text is cut, never the count, when it is full). */
static void account(res_diag *r, const char *stage, long long nk)
{
    size_t used = strlen(r->evidence);
    if (used + 1 < sizeof r->evidence)
        snprintf(r->evidence + used, sizeof r->evidence - used, "%s%s:%lld", used ? "," : "", stage, nk);
}

int diag_default_mesh(int dim)
{
    return dim == 2 ? 36 : 14;
}

/* Elements of H(k) held per batch (the same budget as the occupied-state batches of occ.c). */
#define DIAG_BATCH_ELEMENTS (64.0 * 200 * 200)

int diag_batch(int norb)
{
    double b = DIAG_BATCH_ELEMENTS / ((double)norb * norb);
    return b >= 64 ? 64 : b < 1 ? 1 : (int)b;
}

double diag_memory_bytes(int dim, int norb, int nR, int nocc, int mesh)
{
    double n2 = (double)norb * norb, batch = diag_batch(norb);
    double model = 16.0 * n2 * nR;                  /* H(R), complex */
    double tables = 3 * 8.0 * n2 * (nR + 1);        /* coefficient tables: full, plane and line engines */
    double batches = (32.0 + 16 + 16) * n2 * batch; /* packed triangles, H(k) and states per batch */
    double solver = 64.0 * n2;                      /* zheevd: matrix copy, work and rwork (~2 n^2 each) */
    double points = 24.0 * pow((double)mesh, dim);  /* band edges and k of the coarse mesh */
    double strings = 2 * 16.0 * (double)(2 * mesh) * norb * nocc; /* occupied states along a string */
    /* 25% for what the terms leave out (node search lists, LAPACK's blocked workspaces): a random
     * 160-state 2D metal peaked 154 MB above the process baseline against 142 MB of terms. */
    return 1.25 * (model + tables + batches + solver + points + strings);
}

static int default_mesh(const tb_model *m, const diag_opts *o)
{
    if (o && o->mesh > 0) return o->mesh;
    int factor = o && o->mesh_factor > 1 ? o->mesh_factor : 1;
    return factor * diag_default_mesh(m->dim);
}

/* A spin layout is questioned whenever time reversal is not exact (a wrong layout can leave a
 * small residual: 0.04 for the diamond model read as spinless, whose spin-orbit coupling is weak
 * against its hopping). Another layout is named when its relative residual is at most
 * DIAG_LAYOUT_PASS (fit errors of 1e-2 of the largest hopping give ~0.04) and at most
 * DIAG_LAYOUT_RATIO times the card's (so that fit noise on top of a wrong layout, which raises
 * both, still points to the right one, and a magnetic model that happens to fit another layout
 * less badly, as the Haldane model read as spinful does at 0.08 against 0.42, is not refused). */
#define DIAG_LAYOUT_PASS  0.05
#define DIAG_LAYOUT_RATIO 0.3

static const char *layout_name(int spinful, int layout)
{
    if (!spinful) return "spinless";
    return layout == TB_SPIN_INTERLEAVED ? "interleaved" : "blocks";
}

/* A copy of m read with another spin layout (TB_SPIN_NONE: spinless); positions of the new
 * orbitals are those of the states they come from. Only time reversal is checked on it. */
static int relayout(const tb_model *m, int layout, tb_model **out, bs_err *err)
{
    tb_model *c = NULL;
    int rc = tb_model_copy(m, &c, err);
    if (rc != 0) return rc;
    int ns = layout == TB_SPIN_NONE ? m->norb : m->norb / 2;
    double(*pos)[3] = malloc((size_t)ns * sizeof *pos);
    int *l = malloc((size_t)ns * sizeof *l);
    if (!pos || !l) {
        free(pos);
        free(l);
        tb_model_free(c);
        return bs_fail(err, BS_ENOMEM, "out of memory checking the spin layout");
    }
    c->spinful = layout != TB_SPIN_NONE;
    c->spin_layout = layout;
    c->nspatial = ns;
    for (int o = 0; o < ns; o++) {
        int state = tb_state_index(c, o, 0);
        int src = m->spinful ? tb_state_orbital(m, state) : state;
        memcpy(pos[o], m->orb_pos[src], sizeof pos[o]);
        l[o] = m->orb_l[src];
    }
    free(c->orb_pos);
    free(c->orb_l);
    free(c->orb_shape);
    c->orb_pos = pos;
    c->orb_l = l;
    c->orb_shape = NULL;
    free(c->inv_perm);
    free(c->inv_sign);
    free(c->inv_shift);
    c->inv_perm = NULL;
    c->inv_sign = NULL;
    c->inv_shift = NULL;
    c->has_inversion_op = 0;
    *out = c;
    return 0;
}

/* 1 when no hopping couples opposite spins in m's layout (a collinear model without spin-orbit
 * coupling): such a table passes spinless time reversal whatever its magnetism, so "spinless"
 * is no evidence of a wrong card for it. */
static int spin_diagonal(const tb_model *m)
{
    size_t n = (size_t)m->norb;
    for (int r = 0; r < m->nR; r++)
        for (size_t a = 0; a < n; a++)
            for (size_t b = 0; b < n; b++)
                if (tb_state_spin(m, (int)a) != tb_state_spin(m, (int)b) && tb_hop(m, r, (int)a, (int)b) != 0)
                    return 0;
    return 1;
}

/* Wrong spin layout: when time reversal is not exact, the other layouts are tried; one that passes
 * makes the entry invalid (BS_EINVAL) with a message naming the layout the table looks like. */
static int check_spin_layout(diag_ctx *c, const sym_opts *so, bs_err *err)
{
    const tb_model *m = c->m;
    if (c->sym->time_reversal) return 0;
    sym_opts tro = *so;
    tro.skip_inversion = 1;
    int alts[2], nalt = 0;
    if (m->spinful) {
        alts[nalt++] = m->spin_layout == TB_SPIN_BLOCKS ? TB_SPIN_INTERLEAVED : TB_SPIN_BLOCKS;
        if (!spin_diagonal(m)) alts[nalt++] = TB_SPIN_NONE;
    } else if (m->norb % 2 == 0) {
        alts[nalt++] = TB_SPIN_BLOCKS;
        alts[nalt++] = TB_SPIN_INTERLEAVED;
    }
    for (int i = 0; i < nalt; i++) {
        tb_model *alt = NULL;
        sym_info *s = NULL;
        int rc = relayout(m, alts[i], &alt, err);
        if (rc == 0) rc = sym_detect(alt, &tro, &s, err);
        double res = s ? s->tr_residual : 1.0;
        sym_info_free(s);
        tb_model_free(alt);
        if (rc != 0) return rc;
        if (res <= DIAG_LAYOUT_PASS && res <= DIAG_LAYOUT_RATIO * c->sym->tr_residual)
            return bs_fail(
                err, BS_EINVAL,
                "time reversal fails with the card's spin layout (%s: residual %.2g) "
                "but holds for %s (residual %.2g): the table looks %s; correct the card's spinful / "
                "spin_layout, or state \"magnetism\": \"magnetic\" if the compound breaks time reversal",
                layout_name(m->spinful, m->spin_layout), c->sym->tr_residual,
                layout_name(alts[i] != TB_SPIN_NONE, alts[i]), res,
                layout_name(alts[i] != TB_SPIN_NONE, alts[i]));
    }
    return 0;
}

static int run_symmetry(diag_ctx *c, res_diag *r, bs_err *err)
{
    sym_opts so;
    sym_opts_default(&so);
    if (c->o && c->o->seed) so.seed = c->o->seed;
    if (c->o && c->o->symmetry_tol > 0) so.tol = c->o->symmetry_tol;
    if (c->o && c->o->pos_tol_ang > 0) so.pos_tol_ang = c->o->pos_tol_ang;
    /* One coefficient table per material: the checks of other spin layouts (check_spin_layout)
     * read the same H(R) under other labels, so they share it too. */
    so.hk = c->hk;
    int rc = sym_detect(c->m, &so, &c->sym, err);
    if (rc != 0) return rc;
    c->mag = c->o && c->o->magnetism > 0 ? c->o->magnetism - 1 : c->m->magnetism;
    snprintf(r->magnetism, sizeof r->magnetism, "%s", tb_magnetism_name(c->mag));
    if (c->mag != TB_MAG_MAGNETIC) rc = check_spin_layout(c, &so, err);
    if (rc != 0) return rc;
    r->time_reversal = c->tr_exact = c->sym->time_reversal;
    r->inversion = c->inv_exact = c->sym->inversion;
    r->tr_residual = c->sym->tr_residual;
    r->inv_residual = c->sym->inv_residual;
    return 0;
}

/* 2 max_k ||H - H_s|| for the average over `which`: at most the sum of the breakings of the
 * operations that are not exact (H - H_s = [(H - gH) + ...]/4 over the group, and
 * H - P Theta H = (H - P H) + P (H - Theta H)), each taken as symfit_estimate; *bound names the
 * estimate. This spares a third pass over the k mesh. */
static double restored_breaking(const diag_ctx *c, int which, const char **bound)
{
    const char *b1 = "upper bound", *b2 = "upper bound";
    double d = 0;
    if ((which & SYMFIT_TR) && !c->tr_exact) d += symfit_estimate(&c->trb, &b1);
    if ((which & SYMFIT_INV) && !c->inv_exact) d += symfit_estimate(&c->invb, &b2);
    *bound = strcmp(b1, "upper bound") != 0 ? b1 : b2;
    return d;
}

/* Restores the symmetries in `which` by averaging (symfit.h) into c->ms, and records the distance
 * and the margin. Inversion whose map does not commute with time reversal's is dropped (noted). */
static int restore(diag_ctx *c, res_diag *r, int which, bs_err *err)
{
    tb_model_free(c->ms);
    c->ms = NULL;
    int rc = symfit_symmetrise(c->m, c->sym, which, NULL, &c->ms, NULL, err);
    if (rc == BS_EINVAL && which == (SYMFIT_TR | SYMFIT_INV)) {
        bs_err_clear(err);
        which = SYMFIT_TR;
        r->inversion = c->sym->inversion = 0;
        rc = symfit_symmetrise(c->m, c->sym, which, NULL, &c->ms, NULL, err);
    }
    if (rc != 0) return rc;
    if (which & SYMFIT_TR) c->sym->time_reversal = 1;
    if (which & SYMFIT_INV) c->sym->inversion = 1;
    r->restored = which & ~((r->tr_verdict == RES_SYM_EXACT ? SYMFIT_TR : 0) |
                            (r->inv_verdict == RES_SYM_EXACT ? SYMFIT_INV : 0));
    r->symmetrised = r->restored != 0;
    snprintf(r->restored_names, sizeof r->restored_names, "%s%s%s",
             r->restored & SYMFIT_TR ? "time_reversal" : "",
             r->restored == (SYMFIT_TR | SYMFIT_INV) ? "," : "", r->restored & SYMFIT_INV ? "inversion" : "");
    /* 2 max ||H - H_s|| is the breaking that the margin compares with the gap (symfit.h). */
    const char *bound = NULL;
    r->breaking_ev = restored_breaking(c, which, &bound);
    snprintf(r->breaking_bound, sizeof r->breaking_bound, "%s", bound);
    r->margin = r->breaking_ev > 0 ? c->gaps.gap_direct_ev / r->breaking_ev : INFINITY;
    c->zm = c->ms;
    return 0;
}

/* Breaking of time reversal and inversion by H where sym_detect did not find them exact, into
 * c->trb and c->invb; once per diagnosis. */
static int measure_breaking(diag_ctx *c, bs_err *err)
{
    const sym_info *s = c->sym;
    if (c->measured) return 0;
    c->measured = 1;
    c->trb = (symfit_break){.available = 1};
    c->invb = (symfit_break){.available = s->inv_source != SYM_INV_NONE};
    int rc = 0;
    if (!s->time_reversal) rc = symfit_measure(c->m, s, SYMFIT_TR, NULL, &c->trb, err);
    if (rc == 0 && !s->inversion) rc = symfit_measure(c->m, s, SYMFIT_INV, NULL, &c->invb, err);
    return rc;
}

/* Breaking of the symmetries that are not exact, their verdicts against the direct gap (the
 * bandwidth of the two bands when gapless), and the restoring of the approximate ones for a
 * gapped material. The margin uses H's direct gap: Weyl's inequality bounds the gap along the
 * straight path from H to H_s by either end's gap minus 2 max ||H - H_s||, and H's gap is the one
 * the gap search measured (symmetry-free quantities come from H). */
static int run_breaking(diag_ctx *c, res_diag *r, int gapless, bs_err *err)
{
    sym_info *s = c->sym;
    double scale = gapless ? c->gaps.width_ev : c->gaps.gap_direct_ev;
    int rc = measure_breaking(c, err);
    if (rc != 0) return rc;
    r->tr_break_ev = c->trb.upper_ev;
    r->tr_break_lower_ev = c->trb.lower_ev;
    if (c->invb.available) {
        r->inv_break_ev = c->invb.upper_ev;
        r->inv_break_lower_ev = c->invb.lower_ev;
    }
    r->tr_verdict = (res_verdict)symfit_verdict(s->time_reversal, &c->trb, scale);
    r->inv_verdict = (res_verdict)symfit_verdict(s->inversion, &c->invb, scale);
    int mag = c->mag;
    /* Physical against the direct gap, zero when gapless: there any coherent breaking is real
     * (the time-reversal-broken Weyl model's, say), however it compares with the bandwidth. */
    double gap = gapless ? 0.0 : scale;
    c->tr_physical = mag == TB_MAG_MAGNETIC || (mag == TB_MAG_UNKNOWN && r->tr_verdict != RES_SYM_EXACT &&
                                                symfit_physical(&c->trb, gap));
    /* A physical breaking is a broken symmetry whatever the margin would allow. */
    if (c->tr_physical && r->tr_verdict == RES_SYM_APPROX && mag != TB_MAG_NONE)
        r->tr_verdict = RES_SYM_BROKEN;
    if (r->inv_verdict == RES_SYM_APPROX && symfit_physical(&c->invb, gap)) r->inv_verdict = RES_SYM_BROKEN;
    int tr_holds = mag != TB_MAG_MAGNETIC && (r->tr_verdict == RES_SYM_EXACT || mag == TB_MAG_NONE ||
                                              (r->tr_verdict == RES_SYM_APPROX && !c->tr_physical));
    /* Inversion only adds the parity method (the flow needs time reversal alone), so it is
     * restored only with a safe margin of its own rather than thinning the margin of the class. */
    int inv_holds =
        r->inv_verdict == RES_SYM_EXACT ||
        (r->inv_verdict == RES_SYM_APPROX && scale >= SYMFIT_MARGIN_SAFE * symfit_estimate(&c->invb, NULL));
    r->time_reversal = tr_holds;
    r->inversion = inv_holds;
    if (gapless || !tr_holds) return 0;
    /* Averaging over the whole group {1, Theta, P, P Theta} keeps an exact partner exact. */
    int which = 0;
    if (!s->time_reversal || (inv_holds && !s->inversion)) which = SYMFIT_TR | (inv_holds ? SYMFIT_INV : 0);
    return which ? restore(c, r, which, err) : 0;
}

/* A breaking that is fit-like: incoherent (symfit.h). */
static int incoherent(const symfit_break *b)
{
    return b->available && b->upper_ev > 0 && b->lower_ev < SYMFIT_COHERENT_RATIO * b->upper_ev;
}

/* Relative residual (sym_detect's) below which time reversal or inversion makes E(-k) = E(k) hold
 * to round-off, so that the gap and node meshes evaluate one point of each pair k, -k. Exact
 * symmetries of published models sit at ~1e-16; a fit's approximate ones at 1e-5..1e-2 are not
 * used: their H is not even, and the symmetry-free quantities are computed on H as given. */
#define DIAG_EVEN_RESIDUAL 1e-12

/* The gap search of a fit whose time reversal is only approximate (fit-like breaking: incoherent,
 * symfit.h) runs on the restored model H_s (time reversal, and inversion when its breaking is
 * fit-like too), whose E(-k) = E(k) halves the meshes: every band of H lies within b of H_s's
 * (Weyl's inequality), b an upper bound of max_k ||H(k) - H_s(k)||_2 (symfit_symmetrise's
 * moved.kmax_ev: from ||H(k) - H_s(k)||_F on a mesh with Bernstein's inequality, about the square
 * root of the number of lattice vectors below the sum over R of ||H(R) - H_s(R)||, which it
 * falls back to for very long-ranged models); not delta = restored_breaking, the estimate that verdicts
 * and margins use: its mesh x 1.5 is no bound (a breaking on a lattice vector that the symmetry
 * mesh aliases, e.g. sin 8 pi k1 on its 8 points, is invisible to it). H's extremes sit in H_s's
 * basins that come within 2 b of its best, and short local minimisations on H from those
 * (gaps_find_near) give H's own gaps. Taken only when H's direct gap so found is at least
 * SYMFIT_MARGIN_SAFE delta (the margin of a class built on the restored symmetry without
 * reservation), wide enough that no node search is due, the search converged, and no band at an
 * extreme moved by more than b (what the bound allows); otherwise the
 * search runs on H as given (fallback), and H_s's eigensolves were spent for nothing (only eight
 * when those at the time-reversal-invariant momenta already show a thin margin, one mesh when the
 * mesh does). Returns 1 when c->gaps was filled this
 * way, 0 for the fallback, or an error code. */
static int gaps_symmetric(diag_ctx *c, res_diag *r, bs_err *err)
{
    sym_info *s = c->sym;
    if (s->time_reversal || c->mag == TB_MAG_MAGNETIC || c->m->dim != 3) return 0;
    int rc = measure_breaking(c, err);
    if (rc != 0 || !incoherent(&c->trb)) return rc;
    /* With inversion restored as well (when its breaking is fit-like too) the bands of H_s are
     * Kramers doublets everywhere and its band edges sit at the time-reversal-invariant momenta,
     * as in a clean model, where the refinements diagonalise half their stencils; with time
     * reversal alone they move off them (the cone of a split doublet) and cost twice as much. */
    int which = SYMFIT_TR | (!s->inversion && incoherent(&c->invb) ? SYMFIT_INV : 0);
    tb_model *ms = NULL;
    symfit_break moved;
    rc = symfit_symmetrise(c->m, s, which, NULL, &ms, &moved, err);
    if (rc == BS_EINVAL && which != SYMFIT_TR) {
        bs_err_clear(err);
        which = SYMFIT_TR;
        rc = symfit_symmetrise(c->m, s, which, NULL, &ms, &moved, err);
    }
    if (rc != 0) return rc;
    const char *bound;
    double delta = restored_breaking(c, which, &bound);
    hk_engine *hk = NULL;
    bp_eval *e = NULL;
    bp_mesh *g = NULL;
    rc = hk_create(ms, diag_batch(ms->norb), &hk, err);
    if (rc == 0) rc = bp_create_dist(ms, hk, c->o ? c->o->dist : NULL, c->deadline, &e, err);
    /* Any k's direct gap, and the indirect gap of any set of k, bound H_s's from above: below the
     * margin already, the rest of the search here would be spent for nothing (a thin margin, a
     * metal; where bands overlap or nearly so, many basins fall within the slack of
     * gaps_find_near). First the eight time-reversal-invariant momenta, where band edges usually
     * sit (on an even mesh they are mesh points, taken from the band pair's cache), then the mesh. */
    double trim[8 * 3], tlo[8], thi[8];
    for (int t = 0; t < 8; t++)
        for (int a = 0; a < 3; a++)
            trim[3 * t + a] = 0.5 * ((t >> a) & 1);
    if (rc == 0) {
        bp_set_even(e, 1);
        rc = bp_bands(e, 8, trim, tlo, thi, err);
    }
    double mesh_gap = INFINITY, vbm = -INFINITY, cbm = INFINITY;
    for (int t = 0; rc == 0 && t < 8; t++) {
        mesh_gap = fmin(mesh_gap, thi[t] - tlo[t]);
        vbm = fmax(vbm, tlo[t]);
        cbm = fmin(cbm, thi[t]);
    }
    int hopeless = rc == 0 && fmin(mesh_gap, cbm - vbm) < SYMFIT_MARGIN_SAFE * delta;
    if (rc == 0 && !hopeless) rc = bp_mesh_eval(e, r->mesh, &g, err);
    for (int i = 0; rc == 0 && g && i < g->npts; i++) {
        mesh_gap = fmin(mesh_gap, g->hi[i] - g->lo[i]);
        vbm = fmax(vbm, g->lo[i]);
        cbm = fmin(cbm, g->hi[i]);
    }
    hopeless = hopeless || (rc == 0 && fmin(mesh_gap, cbm - vbm) < SYMFIT_MARGIN_SAFE * delta);
    if (rc == 0 && !hopeless) {
        gaps_opts go;
        gaps_opts_init(&go);
        go.grid = g;
        go.deadline = c->deadline;
        /* ||H(k) - H_s(k)|| <= moved.kmax_ev moves each band by at most that. */
        rc = gaps_find_near(e, c->bp, moved.kmax_ev, &go, &c->gaps, err);
    }
    long long nk = e ? bp_count(e) : 0;
    bp_mesh_free(g);
    bp_free(e);
    hk_free(hk);
    tb_model_free(ms);
    if (rc != 0) return rc;
    r->nk_evaluated += nk;
    account(r, "gaps_symmetric", nk);
    if (hopeless) return 0;
    /* H's own gaps (c->gaps) judged as a search on H would be: no node search due, a safe margin,
     * and H's extremes within the bound of H_s's. */
    const gaps_result *h = &c->gaps;
    double suspicious = fmax(BS_GAP_CLOSED_EV, 0.02 * h->width_ev);
    if (h->closed || h->metallic || !h->converged || h->gap_direct_ev < SYMFIT_MARGIN_SAFE * delta ||
        h->gap_direct_ev < suspicious || h->shift_ev > moved.kmax_ev)
        return 0;
    return 1;
}

static int run_gaps(diag_ctx *c, res_diag *r, bs_err *err)
{
    int rc = bp_create_dist(c->m, c->hk, c->o ? c->o->dist : NULL, c->deadline, &c->bp, err);
    const sym_info *s = c->sym;
    int even = (s->time_reversal && s->tr_residual <= DIAG_EVEN_RESIDUAL) ||
               (s->inversion && s->inv_residual <= DIAG_EVEN_RESIDUAL);
    if (rc == 0) bp_set_even(c->bp, even);
    if (rc == 0 && !even) {
        rc = gaps_symmetric(c, r, err);
        if (rc == 1) return 0;
    }
    if (rc == 0) rc = bp_mesh_eval(c->bp, r->mesh, &c->mesh, err);
    if (rc != 0) return rc;
    gaps_opts go;
    gaps_opts_init(&go);
    go.grid = c->mesh;
    go.deadline = c->deadline;
    /* k-points of the shared evaluator are counted once, at the end (bp_count); the gaps go into
     * r once, by take_gaps, after the node search has had its say. */
    return gaps_find_eval(c->bp, &go, &c->gaps, err);
}

/* Parity Z2 (with inversion) into r. */
static int run_parity(diag_ctx *c, res_diag *r, bs_err *err)
{
    par_opts po;
    par_opts_default(&po);
    po.dist = c->o ? c->o->dist : NULL;
    po.hk = c->zm == c->m ? c->hk : NULL; /* the restored model has tables of its own */
    par_result pr;
    int rc = par_z2(c->zm, c->sym, &po, &pr, err);
    if (rc != 0) return rc;
    if (pr.status == PAR_NA) return 0;
    r->ntrim = pr.ntrim;
    /* One diagonalisation of H at each time-reversal-invariant momentum. */
    r->nk_evaluated += pr.ntrim;
    account(r, "parity", pr.ntrim);
    for (int t = 0; t < pr.ntrim; t++) {
        r->par_delta[t] = pr.delta[t];
        r->par_nodd[t] = pr.nodd[t];
    }
    bs_err z4err;
    bs_err_clear(&z4err);
    if (pr.status == PAR_DONE && c->m->dim == 3 && cz_z4(&pr, &c->z4, &z4err) != 0) c->z4 = -1;
    if (pr.status == PAR_DONE) {
        r->z2_parity_status = RES_DONE;
        memcpy(r->z2_parity, pr.z2, sizeof pr.z2);
    } else {
        r->z2_parity_status = RES_AMBIGUOUS;
        snprintf(r->z2_note, sizeof r->z2_note, "parity: %s", pr.reason);
    }
    return 0;
}

/* Wannier-centre flow Z2 (time reversal with Kramers pairs) into r. */
static int run_wcc(diag_ctx *c, res_diag *r, bs_err *err)
{
    wilson_ws *w = NULL;
    wilson_z2 wz;
    memset(&wz, 0, sizeof wz);
    /* The flow needs time reversal only: with time reversal exact it is computed on H itself, so
     * that restoring inversion (for the parities) leaves it untouched. */
    const tb_model *wm = c->tr_exact ? c->m : c->zm;
    int rc =
        wilson_create_shared(wm, c->m->nocc, c->o ? c->o->dist : NULL, wm == c->m ? c->hk : NULL, &w, err);
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
        account(r, "wcc", wz.nk);
        if (wz.status == RES_DONE) {
            r->z2_wcc_status = RES_DONE;
            memcpy(r->z2_wcc, wz.z2, sizeof wz.z2);
        } else if (wz.gap_closed) {
            r->wcc_gap_closed = 1;
        } else {
            r->z2_wcc_status = RES_AMBIGUOUS;
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
static int run_chern(diag_ctx *c, res_diag *r, bs_err *err)
{
    chern_ws *cw = NULL;
    int rc = chern_create_shared(c->m, c->m->nocc, c->o ? c->o->dist : NULL, c->hk, &cw, err);
    if (rc != 0) return rc;
    chern_opts co;
    chern_opts_default(&co, 0);
    co.deadline = c->deadline;
    if (r->mesh > co.mesh) co.mesh = r->mesh;
    if (co.max_mesh < 4 * co.mesh) co.max_mesh = 4 * co.mesh;
    int first = c->m->dim == 2 ? 4 : 0, last = c->m->dim == 2 ? 4 : 5;
    long long before = r->nk_evaluated;
    r->chern_status = RES_DONE;
    for (int p = first; rc == 0 && p <= last; p++) {
        chern_value v;
        rc = chern_plane(cw, p, &co, &v, err);
        if (rc != 0) break;
        r->nk_evaluated += v.nk;
        r->plane_chern[p] = v.chern;
        if (v.status != RES_DONE) r->chern_status = RES_AMBIGUOUS;
        if (p == 4) r->chern = v.chern;
    }
    account(r, "chern", r->nk_evaluated - before);
    chern_free(cw);
    return rc;
}

/* The gaps and their k-points into r (their k-points are counted by the shared evaluator). */
static void take_gaps(const gaps_result *g, res_diag *r)
{
    r->gap_direct_ev = g->gap_direct_ev;
    r->gap_indirect_ev = g->gap_indirect_ev;
    memcpy(r->k_gap_direct, g->k_direct, sizeof r->k_gap_direct);
    memcpy(r->k_vbm, g->k_vbm, sizeof r->k_vbm);
    memcpy(r->k_cbm, g->k_cbm, sizeof r->k_cbm);
    r->vbm_ev = g->vbm_ev;
    r->cbm_ev = g->cbm_ev;
    r->gap_resolution_ev = g->resolution_ev;
    r->gap_converged = g->converged;
}

/* Moves the nodes and the line summary of n into r: r takes the node array, n keeps the line
 * points. */
static void take_nodes(nodes_result *n, res_diag *r)
{
    free(r->nodes);
    r->nnodes = n->nnodes;
    r->nodes = n->nodes;
    n->nodes = NULL;
    n->nnodes = 0;
    r->net_chirality = n->net_chirality;
    r->nodal_line = n->nodal_line;
    r->nodal_points = n->nodal_points;
    r->nodal_extent = n->nodal_extent;
}

static int run_nodes(diag_ctx *c, res_diag *r, bs_err *err)
{
    long long before = bp_count(c->bp);
    /* After a gap search on the restored model, H's own mesh is made here. */
    if (!c->mesh) {
        int rc = bp_mesh_eval(c->bp, r->mesh, &c->mesh, err);
        if (rc != 0) return rc;
    }
    nodes_opts no;
    nodes_opts_init(&no);
    no.grid = c->mesh;
    no.deadline = c->deadline;
    int rc = nodes_find_eval(c->m, c->bp, &no, &c->nodes, err);
    if (rc != 0) return rc;
    /* Only the chirality fluxes are outside the shared evaluator's count. */
    long long flux_nk = c->nodes.nk_evaluated - (bp_count(c->bp) - before);
    r->chirality_status = c->nodes.chirality_status;
    r->nodes_tr_ok = c->tr_exact ? nodes_check_time_reversal(&c->nodes, c->m->dim, 1e-5) : 1;
    /* The node search starts from more cells than the gap search's few basins: a node it finds
     * is the true direct gap. */
    gaps_merge_nodes(&c->gaps, &c->nodes);
    take_nodes(&c->nodes, r);
    r->nk_evaluated += flux_nk > 0 ? flux_nk : 0;
    account(r, "nodes", bp_count(c->bp) - before + (flux_nk > 0 ? flux_nk : 0));
    return 0;
}

/* Combines the parity and Wannier-centre indices: both done and equal, or one done; two done
 * and different is a disagreement, reported and never resolved here. */
static void combine_z2(res_diag *r)
{
    int n = r->dim == 2 ? 1 : 4;
    int pd = r->z2_parity_status == RES_DONE, wd = r->z2_wcc_status == RES_DONE;
    if (pd && wd) {
        if (memcmp(r->z2_parity, r->z2_wcc, n * sizeof(int)) != 0) {
            r->z2_status = RES_DISAGREE;
            size_t used = strlen(r->z2_note);
            snprintf(r->z2_note + used, sizeof r->z2_note - used,
                     "%sparity and Wannier-centre indices disagree", used ? "; " : "");
            return;
        }
        r->z2_status = RES_DONE;
        memcpy(r->z2, r->z2_parity, n * sizeof(int));
    } else if (pd || wd) {
        r->z2_status = RES_DONE;
        memcpy(r->z2, pd ? r->z2_parity : r->z2_wcc, n * sizeof(int));
    } else if (r->z2_parity_status == RES_AMBIGUOUS || r->z2_wcc_status == RES_AMBIGUOUS) {
        r->z2_status = RES_AMBIGUOUS;
    }
}

static void set_class(res_diag *r, res_class cls, double conf, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

static void set_class(res_diag *r, res_class cls, double conf, const char *fmt, ...)
{
    r->cls = cls;
    r->confidence = conf;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(r->reason, sizeof r->reason, fmt, ap);
    va_end(ap);
}

/* Bands at the filling that overlap in energy by more than this (eV) have Fermi pockets: the
 * nodes of a Weyl semimetal sit at (or within this of) one Fermi level with no other Fermi surface
 * (Phys. Rev. B 83, 205101 (2011)); 10 meV is about kT at 120 K, our choice of "near". */
#define DIAG_POCKET_EV 0.01

/* A metal with Fermi pockets: the class is metal whatever touchings it has; the touchings between
 * bands N and N+1 (all of them inside the overlap window [cbm, vbm], so near any Fermi level of
 * this filling) are listed as evidence. */
static void classify_pocket_metal(res_diag *r)
{
    int nweyl = res_weyl_count(r), nother = r->nnodes - nweyl;
    char ev[160] = "";
    if (nweyl > 0)
        snprintf(ev, sizeof ev, "; evidence: %d Weyl node%s (net chirality %d) within the overlap window",
                 nweyl, nweyl == 1 ? "" : "s", r->net_chirality);
    if (nother > 0) {
        size_t used = strlen(ev);
        snprintf(ev + used, sizeof ev - used, "%s%d other gap closing%s",
                 used ? ", " : "; evidence: ", nother, nother == 1 ? "" : "s");
    }
    if (r->nodal_line) {
        size_t used = strlen(ev);
        snprintf(ev + used, sizeof ev - used, "%sa nodal line", used ? ", " : "; evidence: ");
    }
    set_class(r, RES_METAL, r->gap_indirect_ev < -2 * DIAG_POCKET_EV ? 0.95 : 0.7,
              "Fermi pockets: bands at the filling overlap in energy (indirect gap %.4g eV)%s",
              r->gap_indirect_ev, ev);
}

/* Fermi pockets are an overlap beyond DIAG_POCKET_EV and beyond this fraction of the two bands'
 * width: a fit's error of a few tens of meV on bands eV wide moves Weyl nodes apart in energy without
 * making the material a metal in the sense of the classification (our choice; the reason says
 * "shallow pockets" and the confidence falls). */
#define DIAG_POCKET_WIDTH_FRACTION 0.02

static void classify_gapless(res_diag *r, int degenerate, int tr_exact, int inv_exact, double width_ev)
{
    if (degenerate) {
        set_class(r, RES_METAL, 0.8, "the filling of %d bands splits degenerate bands over most of the zone",
                  r->nocc);
        return;
    }
    if (r->gap_indirect_ev < -fmax(DIAG_POCKET_EV, DIAG_POCKET_WIDTH_FRACTION * width_ev)) {
        classify_pocket_metal(r);
        return;
    }
    if (r->dim == 3 && r->nodal_line) {
        set_class(r, RES_NODAL_LINE, 0.8,
                  "the gap closes on a curve: %d touching points over %.3g "
                  "(reduced units)",
                  r->nodal_points, r->nodal_extent);
        return;
    }
    int nweyl = res_weyl_count(r), nchiral = 0;
    for (int i = 0; i < r->nnodes; i++)
        nchiral += r->nodes[i].chirality != 0;
    /* With inversion and time reversal the Berry curvature vanishes (or the bands are Kramers
     * degenerate) at every k, so no Weyl node can exist (common practice). */
    int weyl_forbidden = inv_exact && tr_exact;
    if (r->dim == 3 && r->nnodes > 0 && nchiral == 0 && (r->chirality_status == RES_DONE || weyl_forbidden)) {
        set_class(r, RES_METAL, 0.5,
                  "the gap closes at %d points of zero chirality (Dirac points%s): a semimetal, "
                  "at a phase transition or protected",
                  r->nnodes,
                  weyl_forbidden ? "; inversion with time "
                                   "reversal forbids Weyl nodes"
                                 : "");
        return;
    }
    if (r->dim == 3 && r->nnodes > 0 && nchiral == 0) {
        set_class(r, RES_UNDETERMINED, 0.3,
                  "the gap closes at %d points whose chirality could not be resolved", r->nnodes);
        return;
    }
    if (r->dim == 3 && r->nnodes > 0) {
        double conf = 0.9;
        char extra[160] = "";
        if (r->chirality_status != RES_DONE) {
            conf = 0.4;
            snprintf(extra, sizeof extra, "; some chiralities not integer");
        } else if (r->net_chirality != 0) {
            conf = 0.4;
            snprintf(extra, sizeof extra, "; net chirality %+d: nodes were missed", r->net_chirality);
        } else if (r->time_reversal && !r->nodes_tr_ok) {
            conf = 0.6;
            snprintf(extra, sizeof extra, "; nodes not in time-reversed sets of four");
        }
        if (r->gap_indirect_ev < -BS_GAP_CLOSED_EV) {
            conf *= 0.8;
            size_t used = strlen(extra);
            snprintf(extra + used, sizeof extra - used, "; shallow pockets: the bands overlap by %.2g eV",
                     -r->gap_indirect_ev);
        }
        set_class(r, RES_WEYL, conf, "%d Weyl nodes, net chirality %d%s", nweyl, r->net_chirality, extra);
        return;
    }
    if (r->dim == 2 && r->nnodes > 0) {
        set_class(r, RES_METAL, 0.5,
                  "the 2D gap closes at %d points: a Dirac semimetal at this filling, at a phase "
                  "transition or protected",
                  r->nnodes);
        return;
    }
    if (r->gap_direct_ev < BS_GAP_CLOSED_EV) {
        set_class(r, RES_METAL, 0.5,
                  "the direct gap closes (%.2g eV) but no isolated node or line was resolved",
                  r->gap_direct_ev);
        return;
    }
    set_class(r, RES_METAL, r->gap_indirect_ev < -0.01 ? 0.95 : 0.7,
              "bands at the filling overlap in energy: indirect gap %.4g eV", r->gap_indirect_ev);
}

/* What the classification needs to know about the symmetry call besides r. */
typedef struct sym_call {
    int tr_physical;        /* diag_ctx.tr_physical */
    int both_readings;      /* time reversal neither approximate nor physically broken: r's Z2 (if
                               any) is the reading of the time-reversal-restored model */
    int spinful;            /* the model has Kramers pairs when time reversal holds */
    double tr_fit_ev;       /* upper bound of a fit-like (incoherent, symfit.h) time-reversal
                               breaking when the card does not say magnetic, else 0 */
    int crosscheck_skipped; /* the parities were decisive and the flow was not computed */
} sym_call;

static void classify_no_tr(res_diag *r, const sym_call *sc, double small)
{
    if (r->chern_status == RES_NA) {
        set_class(r, RES_UNDETERMINED, 0.2, "no time reversal and no Chern number computed");
        return;
    }
    int any = 0;
    for (int p = 0; p < (r->dim == 2 ? 0 : 6); p++)
        any |= r->plane_chern[p] != 0;
    if (r->dim == 2) any = r->chern != 0;
    double conf = (r->chern_status == RES_DONE ? 0.95 : 0.5) * small;
    if (any && sc->tr_fit_ev > 0) {
        /* A Chern number of H is exact for H, but a gap smaller than a fit-like (incoherent)
         * breaking of time reversal says little about the material the fit describes. */
        conf *= symfit_confidence_factor(r->gap_direct_ev / sc->tr_fit_ev);
    }
    if (any) {
        if (r->dim == 2)
            set_class(r, RES_CHERN_INSULATOR, conf, "time reversal broken, Chern number %d", r->chern);
        else
            set_class(r, RES_CHERN_INSULATOR, conf,
                      "time reversal broken, plane Chern numbers %d,%d,%d,%d,%d,%d", r->plane_chern[0],
                      r->plane_chern[1], r->plane_chern[2], r->plane_chern[3], r->plane_chern[4],
                      r->plane_chern[5]);
        return;
    }
    const char *planes = r->dim == 3 ? "s of all six planes" : "";
    if (sc->tr_physical) {
        if (strcmp(r->magnetism, "magnetic") == 0)
            set_class(r, RES_TRIVIAL, conf * (r->dim == 3 ? 0.9 : 1.0),
                      "time reversal broken (the card says magnetic), Chern number%s zero", planes);
        else
            set_class(
                r, RES_TRIVIAL, conf * (r->dim == 3 ? 0.9 : 1.0),
                "time reversal broken by %.3g eV (at least %.3g eV), %.2g x the direct gap: physical; Chern "
                "number%s zero",
                r->tr_break_ev, r->tr_break_lower_ev, r->tr_break_lower_ev / r->gap_direct_ev, planes);
        return;
    }
    /* Between the regimes: the breaking may be fit error or physical. Both readings are given;
     * a label only where they agree (spinless: no Z2 either way; or a trivial restored Z2). */
    if (!sc->both_readings && sc->spinful) {
        set_class(r, RES_UNDETERMINED, 0.2,
                  "time reversal broken by %.3g eV (at least %.3g eV) against a direct gap of "
                  "%.3g eV: fit error or physical, and the Chern number%s could not be settled",
                  r->tr_break_ev, r->tr_break_lower_ev, r->gap_direct_ev, planes);
        return;
    }
    if (!sc->both_readings) {
        set_class(r, RES_TRIVIAL, 0.6 * small,
                  "time reversal broken by %.3g eV (at least %.3g eV) against "
                  "a direct gap of %.3g eV: fit error or physical, the Chern number%s zero and no Z2 index "
                  "(spinless) make it trivial either way",
                  r->tr_break_ev, r->tr_break_lower_ev, r->gap_direct_ev, planes);
        return;
    }
    char reading[96] = "the Z2 of the restored model could not be determined";
    int done = r->z2_status == RES_DONE;
    int trivial = done && r->z2[0] == 0 && (r->dim == 2 || !(r->z2[1] || r->z2[2] || r->z2[3]));
    if (done && r->dim == 2)
        snprintf(reading, sizeof reading, "Z2 = %d of the restored model (%s)", r->z2[0],
                 r->z2[0] ? "2D topological insulator" : "trivial insulator");
    else if (done)
        snprintf(reading, sizeof reading, "Z2 = %d;%d%d%d of the restored model%s", r->z2[0], r->z2[1],
                 r->z2[2], r->z2[3], trivial ? " (trivial)" : "");
    set_class(
        r, trivial ? RES_TRIVIAL : RES_UNDETERMINED, trivial ? 0.6 * small : 0.3,
        "time reversal broken by %.3g eV (at least %.3g eV) against a direct gap of %.3g eV: if fit error, "
        "%s; if physical, Chern number%s zero (trivial); state \"magnetism\" on the card to decide",
        r->tr_break_ev, r->tr_break_lower_ev, r->gap_direct_ev, reading, planes);
}

static int any_chern(const res_diag *r)
{
    if (r->chern_status == RES_NA) return 0;
    if (r->dim == 2) return r->chern != 0;
    for (int p = 0; p < 6; p++)
        if (r->plane_chern[p] != 0) return 1;
    return 0;
}

static void classify_insulator(res_diag *r, int kramers, const sym_call *sc)
{
    double small = r->gap_indirect_ev < 5e-3 ? 0.7 : 1.0;
    if (!r->time_reversal) {
        classify_no_tr(r, sc, small);
        return;
    }
    if (any_chern(r)) {
        /* A nonzero Chern number of H is symmetry-free: the restored time reversal was not there. */
        double f = sc->tr_fit_ev > 0 ? symfit_confidence_factor(r->gap_direct_ev / sc->tr_fit_ev) : 1.0;
        set_class(r, RES_CHERN_INSULATOR, (r->chern_status == RES_DONE ? 0.9 : 0.5) * small * f,
                  "Chern number%s nonzero although time reversal looked approximate (breaking %.3g eV)",
                  r->dim == 3 ? "s of some planes" : "", r->tr_break_ev);
        return;
    }
    if (!kramers) {
        set_class(r, RES_TRIVIAL, 0.8 * small,
                  "spinless time reversal: no Z2 index, Chern numbers vanish by symmetry");
        return;
    }
    if (r->z2_status == RES_DISAGREE) {
        set_class(r, RES_UNDETERMINED, 0.1, "%s", r->z2_note);
        return;
    }
    if (r->z2_status != RES_DONE) {
        set_class(r, RES_UNDETERMINED, 0.2, "Z2 could not be determined: %s",
                  r->z2_note[0] ? r->z2_note : "no method applied");
        return;
    }
    int both = r->z2_parity_status == RES_DONE && r->z2_wcc_status == RES_DONE;
    int other_ambiguous = r->z2_parity_status == RES_AMBIGUOUS || r->z2_wcc_status == RES_AMBIGUOUS;
    /* Decisive parities whose cross-check was skipped start where two agreeing methods do; the
     * caller caps the result at DIAG_SKIPPED_CONFIDENCE after the margin factor, so that the
     * confidence stays continuous and non-decreasing in the margin across the tier boundary. */
    double conf = (both || sc->crosscheck_skipped ? 0.97 : other_ambiguous ? 0.6 : 0.9) * small;
    const char *how = both                     ? "parity and Wannier-centre flow agree"
                      : sc->crosscheck_skipped ? "from decisive parities; Wannier-centre cross-check skipped"
                      : r->z2_parity_status == RES_DONE ? "from parities only"
                                                        : "from the Wannier-centre flow";
    if (r->dim == 2) {
        if (r->z2[0])
            set_class(r, RES_2D_TI, conf, "Z2 = 1 (%s)", how);
        else
            set_class(r, RES_TRIVIAL, conf, "Z2 = 0 (%s)", how);
        return;
    }
    if (r->z2[0])
        set_class(r, RES_STRONG_TI, conf, "Z2 = %d;%d%d%d (%s)", r->z2[0], r->z2[1], r->z2[2], r->z2[3], how);
    else if (r->z2[1] || r->z2[2] || r->z2[3])
        set_class(r, RES_WEAK_TI, conf, "Z2 = 0;%d%d%d (%s)", r->z2[1], r->z2[2], r->z2[3], how);
    else
        set_class(r, RES_TRIVIAL, conf, "Z2 = 0;000 (%s)", how);
}

/* Crystal symmetry (crystal.h): the space group of the sites and the operations H keeps. On a
 * noisy fit each operation g of the group is, as time reversal and inversion are (symfit.h),
 * exact (verified to round-off), approximate or broken. Approximate: its relative residual is that
 * of noise (below CRYSTAL_APPROX_RESIDUAL) and twice its breaking bound b_g = sum_R ||gH - H||_F,
 * which bounds max_k ||g H(k) g^-1 - H(k)||, is below the direct gap. The average over a group G of
 * such operations then differs from H by ||H_s - H|| <= max_g b_g, so 2 max_g b_g (the recorded
 * crystal_breaking_eV, the same measure as breaking_eV) below the direct gap joins H to H_s without
 * closing the gap (Weyl's inequality): the indices of H_s belong to H. The approximate operations
 * are restored only when they close into a group with the exact ones; the classes built on them
 * (mirror Chern numbers) take the margin's confidence factor. For a Z2-trivial insulator with
 * Kramers pairs, the mirror Chern numbers of the kept mirrors follow (crystalline.h): a nonzero one
 * makes it a topological crystalline insulator. Failures of this optional evidence (a structure
 * spglib cannot read) leave the fields empty, not the result. */
enum { CRYSTAL_MIRROR_MESH = 16 };
#define CRYSTAL_APPROX_RESIDUAL 0.05 /* relative residual of an operation a fit breaks only by noise */

static int restore_approximate(const tb_model *m, cry_info *ci, double gap_ev, res_diag *r,
                               tb_model **sym_out, cry_info **ci_out, bs_err *err)
{
    *sym_out = NULL;
    *ci_out = NULL;
    int n = cry_nops(ci), nuse = 0, napprox = 0, nexact = 0, nbroken = 0;
    int *use = malloc((size_t)n * sizeof *use);
    if (!use) return bs_fail(err, BS_ENOMEM, "out of memory (crystal symmetry)");
    double worst = 0.0;
    int rc = 0;
    for (int i = 0; i < n && rc == 0; i++) {
        const cry_op *op = cry_get_op(ci, i);
        if (op->verified) {
            use[nuse++] = i;
            nexact++;
            continue;
        }
        double bound = INFINITY;
        if (op->residual >= 0 && op->residual <= CRYSTAL_APPROX_RESIDUAL)
            rc = cry_breaking_ev(m, ci, i, &bound, err);
        if (rc == 0 && 2.0 * bound < gap_ev) {
            use[nuse++] = i;
            napprox++;
            worst = fmax(worst, bound);
        } else {
            nbroken++;
        }
    }
    int group = rc == 0 && napprox > 0 && cry_is_group(ci, use, nuse);
    snprintf(r->crystal_verdicts, sizeof r->crystal_verdicts, "%d exact, %d approximate%s, %d broken", nexact,
             napprox, napprox > 0 && !group ? " (not a group with the exact ones: not restored)" : "",
             nbroken);
    if (group) {
        rc = cry_symmetrise(m, ci, use, nuse, sym_out, err);
        cry_opts o;
        cry_opts_default(&o);
        if (rc == 0) rc = cry_detect(*sym_out, &o, ci_out, err);
        if (rc == 0) {
            r->crystal_symmetrised = 1;
            r->crystal_breaking_ev = 2.0 * worst;
        }
    }
    free(use);
    return rc;
}

/* 1 when a kept operation carries the normal of mirror a onto +-the normal of mirror b: the two
 * mirrors are conjugate, and their mirror Chern numbers agree in magnitude. */
static int conjugate_mirrors(const cry_info *ci, const cry_op *a, const cry_op *b)
{
    for (int g = 0; g < cry_nops(ci); g++) {
        const cry_op *op = cry_get_op(ci, g);
        if (!op->verified) continue;
        double v[3], dot = 0;
        for (int i = 0; i < 3; i++) {
            v[i] = op->Rc[i][0] * a->axis[0] + op->Rc[i][1] * a->axis[1] + op->Rc[i][2] * a->axis[2];
            dot += v[i] * b->axis[i];
        }
        if (fabs(fabs(dot) - 1.0) < 1e-6) return 1;
    }
    return 0;
}

static void append_reason(res_diag *r, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

static int mirror_cherns(const tb_model *m, const cry_info *ci, res_diag *r, bs_err *err)
{
    int best = 0, ndone = 0, nambiguous = 0, rc = 0;
    double best_normal[3] = {0, 0, 0};
    for (int i = 0; i < cry_nops(ci) && rc == 0; i++) {
        const cry_op *op = cry_get_op(ci, i);
        if (!op->verified || strcmp(op->kind, "m") != 0) continue;
        int seen = 0; /* one mirror per conjugacy class: the others repeat its numbers */
        for (int j = 0; j < i && !seen; j++) {
            const cry_op *q = cry_get_op(ci, j);
            seen = q->verified && !strcmp(q->kind, "m") && conjugate_mirrors(ci, q, op);
        }
        if (seen) continue;
        /* in 2D only the mirror of the plane itself leaves the whole zone invariant; a vertical
         * mirror's invariant set is a line, which carries no Chern number */
        if (m->dim == 2 && !(op->W[0][0] == 1 && op->W[1][1] == 1 && op->W[0][1] == 0 && op->W[1][0] == 0))
            continue;
        cz_mirror pl[2];
        int np = cz_mirror_planes(ci, i, pl, err);
        if (np < 0) return np;
        if (m->dim == 2) np = 1; /* k3 is not a coordinate of a 2D zone */
        for (int p = 0; p < np && rc == 0; p++) {
            rc = cz_mirror_chern(m, ci, &pl[p], CRYSTAL_MIRROR_MESH, BS_GAP_CLOSED_EV, err);
            if (rc != 0) break;
            r->nk_evaluated += (long long)pl[p].mesh * pl[p].mesh;
            if (pl[p].status != CZ_DONE) {
                nambiguous++;
                continue;
            }
            ndone++;
            if (abs(pl[p].mirror_chern) > abs(best)) {
                best = pl[p].mirror_chern;
                memcpy(best_normal, pl[p].normal, sizeof best_normal);
            }
        }
    }
    if (rc != 0 || ndone + nambiguous == 0) return rc;
    r->mirror_chern = best;
    r->mirror_chern_status = nambiguous ? RES_AMBIGUOUS : RES_DONE;
    if (best != 0) {
        double conf = r->confidence * (nambiguous ? 0.8 : 1.0);
        if (r->crystal_symmetrised && r->crystal_breaking_ev > 0)
            conf *= symfit_confidence_factor(r->gap_direct_ev / r->crystal_breaking_ev);
        set_class(r, RES_TCI, conf,
                  "Z2 trivial, mirror Chern number %d on the mirror plane normal to (%.3f, %.3f, %.3f)%s",
                  best, best_normal[0], best_normal[1], best_normal[2],
                  r->crystal_symmetrised ? "; crystal symmetry restored by averaging a noisy fit" : "");
        if (r->crystal_symmetrised)
            append_reason(r, " (breaking %.2g eV against the direct gap %.3g eV, margin %.3g)",
                          r->crystal_breaking_ev, r->gap_direct_ev,
                          r->gap_direct_ev / r->crystal_breaking_ev);
    } else if (nambiguous) {
        size_t used = strlen(r->reason);
        snprintf(r->reason + used, sizeof r->reason - used, "; %d mirror Chern number%s undetermined",
                 nambiguous, nambiguous > 1 ? "s" : "");
    }
    return 0;
}

/* The little group at the direct-gap point, its eigenvalues on the two bands at the gap, and the
 * prediction of crystalline.h for a closing there, as one line of evidence. Skipped when either
 * band is degenerate at that point (a multiplet needs its own analysis). */
static void gap_point_symmetry(const tb_model *m, const cry_info *ci, res_diag *r)
{
    cz_prediction pred;
    bs_err local;
    bs_err_clear(&local);
    if (m->nocc < 1 || m->nocc >= m->norb) return;
    if (cz_predict_closing(m, ci, r->k_gap_direct, m->nocc - 1, &pred, &local) != 0) return;
    int *lg = malloc((size_t)cry_nops(ci) * sizeof *lg);
    if (!lg) return;
    int nl = cry_little_group(ci, r->k_gap_direct, lg);
    snprintf(r->gap_symmetry, sizeof r->gap_symmetry, "little group of %d operation%s; %s", nl,
             nl == 1 ? "" : "s", pred.text);
    free(lg);
}

/* Every Weyl node on a symmetry line or plane (a little group of more than the identity): the
 * little group and what its eigenvalues on the two crossing bands say. The bands are degenerate at
 * the node, so the eigenvalues are read a step of 1e-3 away from it inside the invariant line or
 * plane (a displacement averaged over the little group, which keeps it), where the two bands are
 * apart and the little group the same (crystalline.h). */
static void node_symmetry(const tb_model *m, const cry_info *ci, res_diag *r)
{
    if (m->nocc < 1 || m->nocc >= m->norb || r->dim != 3) return;
    int *lg = malloc((size_t)cry_nops(ci) * sizeof *lg);
    if (!lg) return;
    for (int i = 0; i < r->nnodes; i++) {
        res_node *nd = &r->nodes[i];
        if (!res_node_is_weyl(r, i)) continue;
        int nl = cry_little_group(ci, nd->k, lg);
        if (nl <= 1) continue;
        /* the invariant direction: a generic displacement averaged over the little group. Its
         * k-space action is W^-T; over a group the average of W^-T d equals that of W^T d (the
         * group holds every inverse), so no inverse is needed. */
        const double d0[3] = {0.577, 0.318, 0.751};
        double d[3] = {0, 0, 0};
        for (int g = 0; g < nl; g++) {
            const cry_op *op = cry_get_op(ci, lg[g]);
            for (int a = 0; a < 3; a++)
                d[a] += (op->W[0][a] * d0[0] + op->W[1][a] * d0[1] + op->W[2][a] * d0[2]) / nl;
        }
        double len = sqrt(d[0] * d[0] + d[1] * d[1] + d[2] * d[2]);
        if (len < 1e-9) continue; /* an isolated invariant point: no line or plane through it */
        double kp[3];
        for (int a = 0; a < 3; a++)
            kp[a] = nd->k[a] + 1e-3 * d[a] / len;
        cz_prediction pred;
        bs_err local;
        bs_err_clear(&local);
        if (cz_predict_closing(m, ci, kp, m->nocc - 1, &pred, &local) != 0) continue;
        snprintf(nd->symmetry, sizeof nd->symmetry, "little group of %d operations; %s", nl, pred.text);
    }
    free(lg);
}

static int run_crystal(diag_ctx *c, res_diag *r, int kramers, bs_err *err)
{
    r->z4 = c->z4;
    cry_opts o;
    cry_opts_default(&o);
    o.hk = c->hk;
    cry_info *ci = NULL, *ci_sym = NULL;
    tb_model *msym = NULL;
    bs_err local;
    bs_err_clear(&local);
    if (cry_detect(c->m, &o, &ci, &local) != 0)
        return local.code == BS_ENOMEM ? bs_fail(err, BS_ENOMEM, "%s", local.msg) : 0;
    r->spacegroup = cry_spacegroup(ci);
    r->symmetry_ops = cry_nverified(ci);
    int rc = 0, insulator = res_class_is_insulator(r->cls) && r->gap_direct_ev > BS_GAP_CLOSED_EV;
    if (insulator)
        rc = restore_approximate(c->m, ci, r->gap_direct_ev, r, &msym, &ci_sym, err);
    else if (cry_nops(ci) > cry_nverified(ci))
        snprintf(r->crystal_verdicts, sizeof r->crystal_verdicts,
                 "%d exact; the other %d not judged (no gap to weigh a breaking against)", cry_nverified(ci),
                 cry_nops(ci) - cry_nverified(ci));
    else
        snprintf(r->crystal_verdicts, sizeof r->crystal_verdicts, "%d exact", cry_nverified(ci));
    if (rc == 0 && ci_sym) r->symmetry_ops = cry_nverified(ci_sym);
    if (rc == 0 && r->gap_direct_ev > BS_GAP_CLOSED_EV)
        gap_point_symmetry(msym ? msym : c->m, ci_sym ? ci_sym : ci, r);
    if (rc == 0 && r->nnodes > 0) node_symmetry(c->m, ci, r);
    int z2_trivial =
        r->z2_status == RES_DONE && !r->z2[0] && (r->dim == 2 || (!r->z2[1] && !r->z2[2] && !r->z2[3]));
    if (rc == 0 && insulator && kramers && r->cls == RES_TRIVIAL && z2_trivial) {
        if (c->deadline > 0 && bs_now() > c->deadline)
            rc = bs_fail(err, BS_ETIMEOUT, "time budget exceeded");
        else
            rc = mirror_cherns(msym ? msym : c->m, ci_sym ? ci_sym : ci, r, err);
    }
    cry_info_free(ci_sym);
    tb_model_free(msym);
    cry_info_free(ci);
    return rc;
}

static void append_reason(res_diag *r, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

static void append_reason(res_diag *r, const char *fmt, ...)
{
    size_t used = strlen(r->reason);
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(r->reason + used, sizeof r->reason - used, fmt, ap);
    va_end(ap);
}

/* A class built on restored symmetries: its confidence falls with the margin (symfit.h), and the
 * reason says what was restored and how thin the margin is. */
static void apply_margin(res_diag *r)
{
    if (!r->restored || !r->time_reversal) return;
    const char *what = r->restored == (SYMFIT_TR | SYMFIT_INV) ? "time reversal and inversion"
                       : r->restored == SYMFIT_TR              ? "time reversal"
                                                               : "inversion";
    /* Only inversion restored and the flow done on H with exact time reversal: the class does not
     * rest on the restored symmetry (a parity disagreement would have made it undetermined). */
    if (!(r->restored == SYMFIT_INV && r->z2_wcc_status == RES_DONE))
        r->confidence *= symfit_confidence_factor(r->margin);
    append_reason(r, "; %s restored: breaking %.2g eV against the direct gap %.3g eV (margin %.3g%s)", what,
                  r->breaking_ev, r->gap_direct_ev, r->margin,
                  r->margin < SYMFIT_MARGIN_SAFE ? ", thin: the symmetric reading is not certain" : "");
    if (strcmp(r->magnetism, "none") == 0 && (r->restored & SYMFIT_TR) && r->margin < SYMFIT_MARGIN_SAFE)
        append_reason(
            r, "; the card says non-magnetic, but the time-reversal breaking is not small against the gap");
}

/* A fit whose fit-like symmetry breaking reaches this relative residual (||gH - H|| / ||H|| at
 * random k; 5% of the Hamiltonian) gets margin 1 for its gapless call; ordinary fits (1e-3) are
 * untouched. Our choice, stated in the reason. */
#define DIAG_FIT_RESIDUAL 0.05

/* A gapless call on a fit whose symmetry breaking is fit-like (incoherent, symfit.h) and not small
 * against the band overlap may be an artefact of the fit: restoring those symmetries can open the
 * gap. When it does, the call's confidence falls with gap(H_s) / breaking as a restored class's
 * does with its margin, and the reason says so. A coherent (physical) breaking, a real Weyl
 * model's, is left alone. The extra gap search runs only in that case. */
static int check_gapless_artefact(diag_ctx *c, res_diag *r, bs_err *err)
{
    int which = 0;
    double fit = 0;
    if (!c->tr_exact && c->mag != TB_MAG_MAGNETIC && incoherent(&c->trb)) {
        which |= SYMFIT_TR;
        fit = symfit_estimate(&c->trb, NULL);
    }
    if (!c->inv_exact && incoherent(&c->invb)) {
        which |= SYMFIT_INV;
        fit = fmax(fit, symfit_estimate(&c->invb, NULL));
    }
    if (!which ||
        !(r->gap_direct_ev < BS_GAP_CLOSED_EV || -r->gap_indirect_ev < 10 * SYMFIT_MARGIN_SAFE * fit))
        return 0;
    tb_model *ms = NULL;
    hk_engine *hk = NULL;
    const char *bound;
    int rc = symfit_symmetrise(c->m, c->sym, which, NULL, &ms, NULL, err);
    double moved = 0.5 * restored_breaking(c, which, &bound);
    if (rc == BS_EINVAL) { /* maps that do not commute: nothing to compare with */
        bs_err_clear(err);
        return 0;
    }
    gaps_result g;
    gaps_opts go;
    gaps_opts_init(&go);
    go.deadline = c->deadline;
    if (rc == 0) rc = hk_create(ms, 64, &hk, err);
    if (rc == 0) rc = gaps_find(ms, hk, &go, &g, err);
    if (rc == 0) r->nk_evaluated += g.nk_evaluated;
    if (rc == 0) account(r, "gaps_restored", g.nk_evaluated);
    if (rc == 0 && !g.closed && !g.metallic && moved > 0) {
        double margin = g.gap_direct_ev / (2 * moved);
        r->confidence *= symfit_confidence_factor(margin);
        append_reason(
            r,
            "; restoring the fit-like symmetry breaking (%.2g eV) opens a gap of %.3g eV: possibly an "
            "artefact of the fit",
            2 * moved, g.gap_direct_ev);
    } else if (rc == 0) {
        /* Gapless either way: the call stands unless the fit's error is a sizeable part of H
         * itself (its relative residual against DIAG_FIT_RESIDUAL, margin counted as for a gap). */
        double rho = fmax(which & SYMFIT_TR ? r->tr_residual : 0, which & SYMFIT_INV ? r->inv_residual : 0);
        double margin = rho > 0 ? DIAG_FIT_RESIDUAL / rho : INFINITY;
        /* A residual of the order of H itself (ten times DIAG_FIT_RESIDUAL) is no fit error: the
         * material lacks the symmetry (a random metal), and the gapless call does not rest on it. */
        if (rho < 10 * DIAG_FIT_RESIDUAL && margin < 10 * SYMFIT_MARGIN_SAFE) {
            r->confidence *= symfit_confidence_factor(margin);
            append_reason(r,
                          "; the fit breaks its symmetries by %.2g of H (relative residual): features of the "
                          "gapless bands may not be resolved",
                          rho);
        }
    }
    hk_free(hk);
    tb_model_free(ms);
    return rc;
}

/* Insulator or semimetal by the sign of the indirect gap; where the gap is small against the gap
 * search's resolution (gaps.h), the class stands with a low confidence and the other reading. */
static void append_unsure_gap(res_diag *r)
{
    if (!gaps_unsure(r->gap_indirect_ev, r->gap_resolution_ev)) return;
    const char *other = res_class_is_insulator(r->cls) ? "possible semimetal"
                        : r->cls == RES_METAL          ? "possible insulator"
                                                       : NULL;
    if (!other || r->gap_direct_ev < BS_GAP_CLOSED_EV) return;
    if (r->confidence > 0.4) r->confidence = 0.4;
    size_t used = strlen(r->reason);
    snprintf(r->reason + used, sizeof r->reason - used,
             "; %s: indirect gap %.2g eV within %.0f times the gap "
             "search's resolution %.2g eV%s",
             other, r->gap_indirect_ev, GAPS_UNSURE_FACTOR, r->gap_resolution_ev,
             r->gap_converged ? "" : " (not converged)");
}

static void append_small_gap_note(res_diag *r)
{
    if (!res_class_is_insulator(r->cls)) return;
    if (r->gap_indirect_ev > 0 && r->gap_indirect_ev < 5e-3) {
        size_t used = strlen(r->reason);
        snprintf(r->reason + used, sizeof r->reason - used, "; gap only %.2g eV: near a transition",
                 r->gap_indirect_ev);
    }
}

/* Evidence in tiers. With time reversal (Kramers pairs) and inversion, the Z2 indices are products
 * of parity eigenvalues at the eight time-reversal-invariant momenta (Phys. Rev. B 76, 045302
 * (2007)): eight eigensolves against thousands for the six planes of Wannier-centre strings. The
 * parities are decisive, and the flow (their cross-check) is skipped, when
 *  - the diagnosis is 3D with at least tier_min_norb states (below it, or in 2D where the flow is
 *    one plane, the cross-check is cheap and always runs), and neither opts->verify nor a rescreen
 *    asked for every method;
 *  - both symmetries hold: exact, or approximate and restored by averaging with a safe margin
 *    (SYMFIT_MARGIN_SAFE: a restored model joined to H without closing the gap);
 *  - the gap is wide: the direct gap is at least DIAG_WIDE_GAP_FRACTION of the two bands' width
 *    (2.5 times the fraction below which nodes are searched), the indirect gap at least 5 meV (the
 *    "near a transition" line of the reasons) and sure against the gap search's resolution, and
 *    the search converged. A closing the coarse mesh missed, which the strings would find, needs a
 *    gap of the order of the mesh's resolution; a wide gap leaves no room for one.
 * What is left out of such a diagnosis is what the cross-check guards against: an inversion map that
 * is wrong for the orbitals (a wrong l on the card). Hence the confidence cap of
 * DIAG_SKIPPED_CONFIDENCE, just under that of two agreeing methods. */
#define DIAG_WIDE_GAP_FRACTION  0.05
#define DIAG_SKIPPED_CONFIDENCE 0.96

static int parities_decisive(const diag_ctx *c, res_diag *r, int searched)
{
    const tb_model *m = c->m;
    int min_norb = c->o && c->o->tier_min_norb > 0 ? c->o->tier_min_norb : DIAG_TIER_MIN_NORB;
    if ((c->o && c->o->verify) || m->dim != 3 || m->norb < min_norb) return 0;
    if (r->z2_parity_status != RES_DONE || !r->inversion || !r->time_reversal || searched) return 0;
    if (r->restored && !(r->margin >= SYMFIT_MARGIN_SAFE)) return 0;
    const gaps_result *g = &c->gaps;
    if (g->closed || g->metallic || !g->converged ||
        g->gap_direct_ev < DIAG_WIDE_GAP_FRACTION * g->width_ev || g->gap_indirect_ev < 5e-3 ||
        gaps_unsure(g->gap_indirect_ev, g->resolution_ev))
        return 0;
    snprintf(r->evidence_skipped, sizeof r->evidence_skipped,
             "wcc: parities decisive (time reversal and inversion %s, direct gap %.3g eV, %.0f%% of the "
             "two bands' width); --verify computes it",
             r->restored ? "restored with a safe margin" : "exact", g->gap_direct_ev,
             100 * g->gap_direct_ev / g->width_ev);
    return 1;
}

int diag_run(const tb_model *m, const diag_opts *opts, res_diag *r, bs_err *err)
{
    double t0 = bs_now();
    diag_ctx c;
    memset(&c, 0, sizeof c);
    nodes_result_init(&c.nodes);
    c.m = m;
    c.o = opts;
    c.z4 = -1;
    c.deadline = opts && opts->max_seconds > 0 ? t0 + opts->max_seconds : 0;
    snprintf(r->id, sizeof r->id, "%s", m->id);
    snprintf(r->formula, sizeof r->formula, "%s", m->formula);
    r->dim = m->dim;
    r->norb = m->norb;
    r->nocc = m->nocc;
    r->mesh = default_mesh(m, opts);

    c.zm = m;
    /* Batches shrink for large materials, so that memory grows as n^2 x (batch), not 64 n^2. */
    int rc = hk_create(m, diag_batch(m->norb), &c.hk, err);
    if (rc == 0) rc = run_symmetry(&c, r, err);
    if (rc == 0) rc = run_gaps(&c, r, err);
    if (rc == 0) account(r, "gaps", bp_count(c.bp));
    int gapless = 0, kramers = 0, searched = 0, direct_open = 0;
    if (rc == 0) {
        /* In 3D a small refined gap may hide Weyl nodes between the gap search's basins: search for
         * nodes whenever the gap is below 2% of the two bands' width (or closed). */
        double suspicious = fmax(BS_GAP_CLOSED_EV, 0.02 * c.gaps.width_ev);
        if (c.gaps.closed || (m->dim == 3 && c.gaps.gap_direct_ev < suspicious)) {
            rc = run_nodes(&c, r, err);
            searched = 1;
        }
    }
    if (rc == 0) {
        direct_open = !c.gaps.closed;
        gapless = c.gaps.closed || c.gaps.metallic;
        rc = run_breaking(&c, r, !direct_open, err);
    }
    sym_call sc = {0, 0, m->spinful, 0, 0};
    if (rc == 0) {
        /* Symmetry-protected quantities on c.zm (the restored model when one was built), the
         * symmetry-free ones (gaps, nodes, Chern numbers) on m as given. */
        kramers = r->time_reversal && c.sym->tr_squared == -1;
        if (direct_open && kramers && r->inversion) rc = run_parity(&c, r, err);
        /* Tiers: the flow is the cross-check of decisive parities, and the only method without them. */
        if (rc == 0 && direct_open && kramers && parities_decisive(&c, r, searched))
            sc.crosscheck_skipped = 1;
        else if (rc == 0 && direct_open && kramers)
            rc = run_wcc(&c, r, err);
        /* A thin margin is checked against the symmetry-free Chern number, which must vanish if
         * the restored time reversal describes H. */
        int thin = (r->restored & SYMFIT_TR) && r->margin < SYMFIT_MARGIN_SAFE;
        if (rc == 0 && direct_open && (!r->time_reversal || thin)) rc = run_chern(&c, r, err);
        sc.tr_physical = c.tr_physical;
        if (!c.tr_exact && c.mag != TB_MAG_MAGNETIC &&
            c.trb.lower_ev < SYMFIT_COHERENT_RATIO * c.trb.upper_ev)
            sc.tr_fit_ev = symfit_estimate(&c.trb, NULL);
        if (rc == 0 && direct_open && !r->time_reversal && !c.tr_physical && m->spinful &&
            r->chern_status == RES_DONE && !any_chern(r)) {
            /* Between the regimes: the reading "fit error" needs the Z2 of the restored model. */
            rc = restore(&c, r, SYMFIT_TR | (r->inversion ? SYMFIT_INV : 0), err);
            if (rc == 0 && c.sym->tr_squared == -1) {
                sc.both_readings = 1;
                if (r->inversion) rc = run_parity(&c, r, err);
                if (rc == 0) rc = run_wcc(&c, r, err);
            }
        }
        if (rc == 0 && r->wcc_gap_closed) {
            /* The strings found a closing that the gap mesh missed: trust the finer probe. */
            gapless = 1;
            if (!searched) rc = run_nodes(&c, r, err);
        }
    }
    take_gaps(&c.gaps, r);
    if (rc == 0) {
        combine_z2(r);
        if (gapless)
            classify_gapless(r, c.nodes.degenerate, c.tr_exact, c.inv_exact, c.gaps.width_ev);
        else
            classify_insulator(r, kramers, &sc);
        apply_margin(r);
        if (sc.crosscheck_skipped && !gapless && r->confidence > DIAG_SKIPPED_CONFIDENCE)
            r->confidence = DIAG_SKIPPED_CONFIDENCE;
        if (gapless) rc = check_gapless_artefact(&c, r, err);
        long long before = r->nk_evaluated;
        if (rc == 0) rc = run_crystal(&c, r, kramers, err);
        if (rc == 0 && r->nk_evaluated > before) account(r, "mirror_chern", r->nk_evaluated - before);
        append_small_gap_note(r);
        append_unsure_gap(r);
    }
    if (c.bp) r->nk_evaluated += bp_count(c.bp);
    r->seconds = bs_now() - t0;
    nodes_result_clear(&c.nodes);
    bp_mesh_free(c.mesh);
    bp_free(c.bp);
    sym_info_free(c.sym);
    tb_model_free(c.ms);
    hk_free(c.hk);
    return rc;
}
