/* Phase paths: a one-parameter family of Hamiltonians H(x) (a built-in model with one key varied, or
 * members at given values interpolated linearly on the union of their lattice vectors), scanned for
 * gap closings, cut into phase intervals with their diagnosis, with the Weyl nodes of every gapless
 * interval followed by continuation in x.
 *
 * Physics checked against (see tests/topology/test_phasepath.c):
 *   with inversion and time reversal the gap closes at a TRIM, at one x, with a parity exchange
 *   (Phys. Rev. B 76, 045302 (2007)); without inversion in 3D the closing opens a Weyl phase of
 *   finite width, nodes created and annihilated in pairs of opposite chirality (New J. Phys. 9, 356
 *   (2007); Phys. Rev. B 78, 165313 (2008)); without inversion in 2D the closing is at one x at a
 *   time-reversed pair of generic k (Phys. Rev. B 76, 205304 (2007)).
 *
 * Method: the minimal direct gap g(x) (gaps.h, with the node search merged in 3D when the gap is
 * small, as the diagnosis does) on a uniform sample; runs of samples with g < closed_ev are gapless
 * regions whose edges are bisected to tol_x; every other local minimum of g is narrowed by golden
 * section until g < closed_ev or g is V-shaped down to a bracket far below tol_x (a closing), or
 * stays smooth (an avoided closing, noted and ignored). A closed region wider than what a linear
 * closing at its slope gives is a gapless interval; otherwise it is a point closing. The diagnosis
 * (diag_run) runs once per interval, at its midpoint. */
#ifndef BANDSIEVE_PHASEPATH_H
#define BANDSIEVE_PHASEPATH_H

#include "bandsieve/diagnosis.h"
#include "bandsieve/err.h"
#include "bandsieve/model.h"

/* A family H(x). */
typedef struct pp_source pp_source;

/* Built-in model spec (lattice_models.h syntax, without the varied key) with key `param` set to x.
 * The caller owns *out. BS_EINVAL when the spec already sets param or the key is unknown. */
int pp_source_builtin(const char *spec, const char *param, pp_source **out, bs_err *err);

/* n >= 2 members (borrowed; they must outlive the source) at strictly increasing values. Members
 * must share dimension, basis (state count, spatial orbitals, their l, spin layout) and filling;
 * BS_EINVAL names both members otherwise. Between neighbours, H(R)/deg(R), the lattice and the
 * orbital positions are interpolated linearly (virtual-crystal idea, common practice); for a
 * pressure or strain series this is a model of the path between the fits. */
int pp_source_members(const tb_model *const *members, const double *values, int n, pp_source **out,
                      bs_err *err);

/* The model at x (the caller owns *out). Members: x must lie in [values[0], values[n-1]]. */
int pp_source_model(const pp_source *s, double x, tb_model **out, bs_err *err);

/* Frees s; accepts NULL. */
void pp_source_free(pp_source *s);

/* Checks that b can be interpolated with a (see pp_source_members); BS_EINVAL naming both. */
int pp_same_basis(const tb_model *a, const tb_model *b, bs_err *err);

typedef struct pp_opts {
    int nsamples;     /* uniform samples of the gap (0: 41) */
    double tol_x;     /* tolerance on closing positions and interval edges (0: 1e-5) */
    double closed_ev; /* a refined direct gap below this is closed (0: 1e-6 eV) */
    int gap_mesh;     /* k-mesh of the gap scan and node search (0: diag_default_mesh) */
    int track_steps;  /* continuation steps across a gapless interval (0: 24) */
    int no_tracks;    /* skip the node tracks */
    diag_opts diag;   /* for the diagnoses of the intervals */
} pp_opts;

void pp_opts_init(pp_opts *o);

enum { PP_MAX_KPTS = 16 };

/* A gap closing: a point (x_lo ~ x_hi) or the edge pair of a gapless interval. */
typedef struct pp_closing {
    double x_lo, x_hi; /* closed on [x_lo, x_hi], each edge within tol_x */
    double x;          /* where g is smallest (point closings) or the middle */
    double gap_ev;     /* g(x) */
    int point;         /* 1: a single critical value; 0: a gapless interval of finite width */
    int nk;            /* touching k-points found at x (point) or at the opening edge (interval) */
    double k[PP_MAX_KPTS][3];
    int at_trim[PP_MAX_KPTS];
    char k_label[PP_MAX_KPTS][24];
    int all_at_trims;    /* every touching at a TRIM */
    int parity_checked;  /* both sides have inversion, Kramers pairs and parities */
    int parity_exchange; /* occupied odd-parity counts differ at the closing TRIMs */
    int trim_changed[8]; /* TRIMs (n1 + 2 n2 + 4 n3) whose odd count differs between the sides */
    int before, after;   /* indices of the intervals on either side */
    int predicted;       /* prediction holds what the symmetry eigenvalues of the two bands at the
                            first touching k, just before the closing, say it becomes (crystalline.h);
                            0 when no prediction could be made (degenerate bands, no symmetry found) */
    char prediction[200];
    int predicted_kind; /* CZ_PRED_* of the prediction (crystalline.h), 0 when none */
    int agrees;         /* 1: the path found what the symmetry predicts; 0: it found something else
                           (the intervals on both sides lose confidence, and their reasons say so);
                           -1: not compared (no prediction, or one that says nothing about the path) */
    char kind[48];      /* "band inversion", "gap closing", "Weyl phase", "nodal line", "metal" */
    char text[240];     /* one line: "band inversion at X (3 TRIMs) at dt = 0.0000" */
} pp_closing;

typedef struct pp_interval {
    double x_lo, x_hi, x_rep;
    int gapless;
    double gap_ev; /* g(x_rep) */
    res_diag diag; /* owned: diag_run at x_rep */
    int diag_rc;   /* 0 or the error of diag_run (then diag.cls is "undetermined") */
} pp_interval;

/* One Weyl node followed through a gapless interval. */
typedef struct pp_track {
    int chirality;
    int npts;
    double *x;                /* npts parameter values */
    double (*k)[3];           /* npts reduced positions in [0,1) */
    int born_with, died_with; /* partner tracks at creation and annihilation (-1: none found) */
    int crossings;            /* zone-boundary crossings */
} pp_track;

enum { PP_EV_CREATED = 0, PP_EV_ANNIHILATED = 1, PP_EV_BOUNDARY = 2, PP_EV_COUNT = 3, PP_EV_NET = 4 };

typedef struct pp_event {
    int kind; /* PP_EV_* */
    double x;
    double k[3];
    int a, b; /* tracks (-1 when none) */
    int interval;
} pp_event;

typedef struct pp_result {
    int dim;
    double x_lo, x_hi;
    char param[64];
    double tol_x; /* the tolerance the closings were refined to */
    int nsamples;
    double *xs, *gaps; /* nsamples each, owned */
    int nclosing;
    pp_closing *closings; /* owned, by increasing x */
    int ninterval;
    pp_interval *intervals; /* owned, by increasing x */
    int ntrack;
    pp_track *tracks; /* owned */
    int nevent;
    pp_event *events;    /* owned */
    double confidence;   /* of the path as a whole: lowered by count / chirality events */
    char note[400];      /* avoided closings, interpolation notice, lowered confidence */
    long long gap_evals; /* evaluations of g */
    long long diag_runs;
    double seconds;
} pp_result;

void pp_result_init(pp_result *r);
void pp_result_clear(pp_result *r);

/* Runs the path of s (borrowed) over [x_lo, x_hi] (x_lo < x_hi); param names x in the output.
 * o may be NULL. r is initialised by the caller. BS_ENUMERIC from LAPACK, errors of the source. */
int pp_run(const pp_source *s, const char *param, double x_lo, double x_hi, const pp_opts *o, pp_result *r,
           bs_err *err);

/* The minimal direct gap of m (borrowed) and where it sits (reduced), as the path scans it. */
int pp_gap(const tb_model *m, int mesh, double *gap_ev, double k[3], bs_err *err);

/* Name of reduced point k of m: "Gamma", "X", "L", "K", "K'", "M", "R", or "(a,b,c)" for TRIMs of
 * other lattices, or "" for a generic point; *trim receives 1 at a TRIM. */
void pp_kpoint_label(const tb_model *m, const double k[3], char *buf, int len, int *trim);

const char *pp_event_name(int kind);

/* Classes of a phase map: the diagnosis classes, "critical point" (a grid point within tol_x of a
 * single-value closing) and "undetermined" for anything else. */
enum { PP_CLASS_UNDETERMINED = 0, PP_CLASS_CRITICAL = 9, PP_NCLASS = 11 };
const char *pp_class_name(int i);
int pp_class_index(const char *cls);

/* One row of a phase map: the path of s over [x_lo, x_hi] with its samples on the nx grid points
 * x_lo + (x_hi - x_lo) i / (nx - 1); cls[i] is the class of the interval holding grid point i
 * (PP_CLASS_CRITICAL within tol_x of a single-value closing), gap[i] the direct gap there. r
 * (initialised by the caller) receives the path. nx >= 3. */
int pp_map_row(const pp_source *s, const char *param, double x_lo, double x_hi, int nx, const pp_opts *o,
               int *cls, double *gap, pp_result *r, bs_err *err);

#endif
