/* The result of diagnosing one material, as every layer shares it: the method modules of topology
 * fill their parts, the diagnosis assembles it, result_json.h turns it into JSON and back, and the
 * catalogue and the command line read it. Plain data with fixed arrays except the nodes and flows.
 * The layer sits below topology and catalogue and includes no other header (no cJSON, MPI or
 * SQLite). */
#ifndef BANDSIEVE_RESULT_H
#define BANDSIEVE_RESULT_H

/* Verdict on one symmetry (symfit.h decides it): exact (round-off), approximate (breaking below
 * the gap: restored by averaging), broken; NA when no operator exists (no inversion map). */
typedef enum res_verdict {
    RES_SYM_NA = -1,
    RES_SYM_EXACT = 0,
    RES_SYM_APPROX = 1,
    RES_SYM_BROKEN = 2
} res_verdict;
/* Bits of res_diag.restored. */
enum { RES_RESTORED_TR = 1, RES_RESTORED_INV = 2 };
/* "exact", "approximate", "broken", "not applicable". */
const char *res_verdict_name(res_verdict v);
/* The verdict of a name, or -2. */
int res_verdict_parse(const char *name);

/* Status of an index computed by one method. */
typedef enum res_status { RES_NA = 0, RES_DONE = 1, RES_AMBIGUOUS = 2, RES_DISAGREE = 3 } res_status;

/* The class of a material; names in res_class_name. The order is the one of the progress counts. */
typedef enum res_class {
    RES_TRIVIAL = 0,
    RES_STRONG_TI,
    RES_WEAK_TI,
    RES_2D_TI,
    RES_CHERN_INSULATOR,
    RES_WEYL,
    RES_NODAL_LINE,
    RES_METAL,
    RES_UNDETERMINED,
    RES_TCI, /* topological crystalline insulator: Z2 trivial, a mirror Chern number not */
    RES_NCLASS
} res_class;

/* "not applicable", "done", "ambiguous", "disagree"; "unknown" for a bad value. */
const char *res_status_name(res_status s);
/* The status of a name (also "na" and "0".."3" are not accepted here), or -1. */
int res_status_parse(const char *name);
/* "trivial insulator", ..., "undetermined"; NULL for a bad value. */
const char *res_class_name(res_class c);
/* The class of a name, or -1. */
int res_class_parse(const char *name);
/* 1 for the insulating classes (trivial, strong, weak, 2D topological, Chern). */
int res_class_is_insulator(res_class c);
/* 1 for the classes whose invariants promise surface or edge states. */
int res_class_has_surface_states(res_class c);

typedef struct res_node {
    double k[3];        /* reduced coordinates, in [0,1) */
    int chirality;      /* +1 / -1, 0 when the flux was not an integer */
    double energy_ev;   /* mean of the two touching bands */
    double gap_ev;      /* refined direct gap at the node */
    char symmetry[240]; /* on a symmetry line or plane: its little group and the eigenvalues of the
                           deciding operation on the two crossing bands (crystalline.h); "" else */
} res_node;

typedef struct res_flow {
    int plane;    /* 0..5: k1=0, k1=1/2, k2=0, k2=1/2, k3=0, k3=1/2 (2D: plane 4 = whole zone) */
    int nstring;  /* strings from the TRIM line to the half-way line */
    int nband;    /* occupied bands */
    double *kpar; /* nstring pumping parameters in [0, 1/2] */
    double *wcc;  /* nstring * nband centres in [0,1), sorted per string */
} res_flow;

/* Most Fermi energies of one transport result (the reference plus the scan). */
#define RES_MAX_FERMI 101

/* Where the reference Fermi energy of a transport result came from. */
typedef enum res_fermi_source {
    RES_FERMI_GIVEN = 0,
    RES_FERMI_CARD = 1,
    RES_FERMI_MIDGAP = 2,
    RES_FERMI_FILLING = 3
} res_fermi_source;

/* Velocity gauge of a transport result (see transport.h). */
typedef enum res_gauge { RES_GAUGE_POSITION = 0, RES_GAUGE_LATTICE = 1 } res_gauge;

/* What stopped a transport integration before its tolerance was met. */
typedef enum res_limit { RES_LIMIT_NONE = 0, RES_LIMIT_BUDGET = 1, RES_LIMIT_DEPTH = 2 } res_limit;

/* "none", "k-point budget", "depth limit"; "unknown" for a bad value. */
const char *res_limit_name(int limit);

/* "given", "card", "midgap", "filling"; "unknown" for a bad value. */
const char *res_fermi_source_name(int source);
/* "position", "lattice". */
const char *res_gauge_name(int gauge);

/* Anomalous and spin Hall conductivities (transport.h computes them; its tr_result is this type).
 * Index 0 of every array is the reference Fermi energy, 1..nfermi-1 the scan. Errors are the
 * adaptive integration's estimates, same units as the values. */
typedef struct res_transport {
    int dim;     /* 2 or 3 */
    int has_shc; /* spinful and asked for */
    int nfermi;
    int fermi_source; /* RES_FERMI_* of index 0 */
    double fermi_ev[RES_MAX_FERMI];
    double ahc[RES_MAX_FERMI][3]; /* xy, yz, zx (yz, zx are 0 in 2D) */
    double ahc_err[RES_MAX_FERMI][3];
    double shc[RES_MAX_FERMI]; /* sigma^{s_z}_{xy} */
    double shc_err[RES_MAX_FERMI];
    char ahc_units[16]; /* "e^2/h" or "S/cm" */
    char shc_units[16]; /* "e/2pi" or "(hbar/e)S/cm" */
    long long nk;       /* H(k) evaluations, including the Fermi-energy pre-pass */
    long long ncells;   /* cells of the final partition */
    int depth;          /* deepest refinement reached */
    int converged;      /* total error estimate <= tol (unresolved Fermi cells included) */
    int limit;          /* RES_LIMIT_*: what stopped it when not converged */
    double tol;         /* the tolerance used (output units) */
    double err_total;   /* the refinement's scalar total error estimate */
    double min_gap_ev;  /* smallest E_nocc - E_(nocc-1) seen */
    /* Fermi surface (cells whose band window may hold one of the Fermi energies, transport.c):
     * the smallest distance in energy from a crossing band to the nearest other band there (the
     * split between two Fermi sheets, eV), the same over the band velocity (the sheets' distance
     * in reduced k: the smallest feature), the finest such cell's width (reduced k), and the cells
     * left unresolved (at the depth limit or when the budget ended; where all their points saw a
     * zero integrand, their error is raised to their volume times the largest integrand seen).
     * HUGE_VAL where there is no such cell. */
    long long fs_cells, fs_open;
    double fs_split_ev, fs_feature, fs_finest_cell;
    double eta_ev, smear_ev;
    int gauge; /* RES_GAUGE_* */
} res_transport;

/* Verdict on a plane's crossing counts against the bulk (surfsummary.h). */
typedef enum res_surface_status {
    RES_SURF_UNCHECKED = 0,   /* no parities or Z2 indices to check against */
    RES_SURF_CONSISTENT = 1,  /* every pair of surface TRIMs has the parity the bulk requires */
    RES_SURF_INCONCLUSIVE = 2 /* a pair still disagrees at the thickest slab tried, or no bulk gap */
} res_surface_status;

/* Crossings between two surface TRIMs a and b, and what the bulk requires. */
typedef struct res_surface_pair {
    int a, b; /* surface TRIM indices t = n1 + 2 n2 (k' = (n1, n2) / 2) */
    int n_top, n_bottom, n_other;
    int expected_odd; /* 1: pi_a pi_b = -1, odd count required; 0: even; -1: unknown */
} res_surface_pair;

/* Surface evidence for one lattice plane (surfsummary.h computes it; its ssum_result is this). */
typedef struct res_surface {
    int miller[3];
    int layers;
    int kdim;                     /* 2 for a slab, 1 for a ribbon */
    double fermi_ev;              /* where crossings were counted */
    double vbm_ev, cbm_ev;        /* bulk band edges at the filling */
    double ka[2], kb[2];          /* the two surface TRIMs (in-plane reduced) */
    int n_top, n_bottom, n_other; /* between the first two surface TRIMs (ka, kb) */
    int ndirac_top;               /* two-fold top-surface Dirac points inside the bulk gap by a margin */
    int ntrim;                    /* surface TRIMs: 4 (slab) or 2 (ribbon); 0 in results stored before */
    int surface_parity[4];        /* pi_a = product of the bulk deltas projecting onto TRIM a; 0 unknown */
    int npair;
    res_surface_pair pair[6]; /* every pair a < b, at the last slab thickness tried */
    res_surface_status status;
    char reason[360];
} res_surface;

/* The diagnosis of one material. */
typedef struct res_diag {
    char id[128];
    char formula[64];  /* from the card, "" when none */
    res_class cls;     /* RES_UNDETERMINED when no call was made */
    double confidence; /* [0,1] */
    char reason[320];
    int dim;
    int norb, nocc;

    double gap_direct_ev, gap_indirect_ev;
    double k_gap_direct[3];
    double k_vbm[3], k_cbm[3];
    double vbm_ev, cbm_ev;    /* max E_N and min E_{N+1} (eV): gap_indirect_ev = cbm_ev - vbm_ev */
    double gap_resolution_ev; /* what the gaps may still be off by (gaps.h resolution_ev; HUGE_VAL
                                 when no check was possible) */
    int gap_converged;        /* a displaced mesh changed no gap beyond GAPS_CONV_TOL_EV */

    int time_reversal, inversion; /* treated as symmetries: exact, or approximate and restored */
    double tr_residual, inv_residual;
    char magnetism[12]; /* the statement used: "none", "magnetic", "unknown" */
    res_verdict tr_verdict, inv_verdict;
    double tr_break_ev, tr_break_lower_ev;   /* breaking bounds in eV (symfit.h); 0 when exact */
    double inv_break_ev, inv_break_lower_ev; /* -1 when there is no inversion map */
    int restored;                            /* RES_RESTORED_TR | RES_RESTORED_INV restored by averaging */
    int symmetrised;                         /* restored != 0 */
    char restored_names[32]; /* "time_reversal", "inversion", "time_reversal,inversion" or "" */
    double breaking_ev;      /* 2 x estimate of max_k ||H - H_s||: the delta of the margin (0: none) */
    char breaking_bound[16]; /* which estimate: "upper bound" or "mesh x 1.5" */
    double margin;           /* direct gap / breaking_ev when symmetrised, else INFINITY (JSON null) */

    res_status z2_status; /* of the combined z2 */
    int z2[4];            /* 2D: z2[0] = nu; 3D: nu0, nu1, nu2, nu3 */
    res_status z2_parity_status;
    int z2_parity[4];
    res_status z2_wcc_status;
    int z2_wcc[4];
    char z2_note[240];           /* why an index is ambiguous or the methods disagree */
    int ntrim;                   /* 4 or 8 when parities were computed, else 0 */
    int par_delta[8];            /* product of one parity per Kramers pair at TRIM n1 + 2 n2 + 4 n3 */
    int par_nodd[8];             /* occupied states of odd parity there */
    int wcc_gap_closed;          /* a Wilson-loop string met a gap closing */
    res_status chirality_status; /* of the node chiralities */
    int nodes_tr_ok;             /* with time reversal: nodes in time-reversed sets of four */

    res_status chern_status;
    int chern;          /* 2D Chern number */
    int plane_chern[6]; /* 3D planes as in res_flow.plane, when chern_status == RES_DONE */

    int nnodes;
    res_node *nodes; /* owned */
    int net_chirality;
    int nodal_line;
    int nodal_points;
    double nodal_extent; /* largest distance between gap-closing points, reduced units */

    int nflows;
    res_flow *flows; /* owned, when the flows were asked for */

    int has_transport; /* transport below was computed */
    res_transport transport;
    int has_surface; /* surface below was computed */
    res_surface surface;

    int spacegroup;                 /* space group of the orbital sites (spglib), 0 when none was found */
    int symmetry_ops;               /* crystal operations the Hamiltonian keeps (or keeps approximately,
                                       see crystal_symmetrised), the order of its point group */
    int crystal_symmetrised;        /* the kept operations were restored by averaging a noisy fit */
    double crystal_breaking_ev;     /* 2 x the largest breaking bound of an operation restored by
                                       averaging (the measure of breaking_ev), 0 when none was */
    char crystal_verdicts[128];     /* the space group's operations as exact / approximate / broken */
    int z4;                         /* Z4 indicator kappa from the parities (3D), -1 when not computed */
    res_status mirror_chern_status; /* of the mirror Chern numbers (computed for Z2-trivial insulators) */
    int mirror_chern;               /* the mirror Chern number of largest magnitude over the kept mirrors */
    char gap_symmetry[240];         /* at the direct-gap point: the little group's eigenvalues on the two
                                       bands at the gap and what a closing there would become ("" when
                                       the bands are degenerate there or nothing was found) */

    int mesh;
    double seconds;
    long long nk_evaluated;     /* k-points diagonalised (eigensolves of H(k)), for cost reporting */
    char evidence[200];         /* the evidence computed, in order, each with its eigensolves:
                                   "gaps:2744,parity:8,wcc:6120" (the sum is nk_evaluated) */
    char evidence_skipped[240]; /* evidence the plan left out and why ("" when none) */
} res_diag;

/* The 2D Chern number as shown (JSON "chern", column chern): 1 with *c when it was computed, or is
 * zero by time reversal with an open gap (common practice); 0 when it is not shown (3D, or none). */
int res_chern_shown(const res_diag *r, int *c);
/* 1 when the six plane Chern numbers are shown (3D, computed). */
int res_plane_chern_shown(const res_diag *r);
/* 1 when node i of r is listed as a Weyl node (3D, with a chirality, or one that could not be
 * resolved), 0 for a gap closing of zero chirality (a Dirac point, a point of a line, any 2D one). */
int res_node_is_weyl(const res_diag *r, int i);
/* The number of nodes of r for which res_node_is_weyl holds: the one count behind the reason, the
 * JSON list, the text output and the catalogue. */
int res_weyl_count(const res_diag *r);

/* Initialises r to an empty result (NA everywhere, class undetermined, indices -1). */
void res_init(res_diag *r);
/* Frees the nodes and flows r owns and initialises it again; accepts NULL. */
void res_clear(res_diag *r);
/* Frees the flows alone (the catalogue keeps them in artifact files, not in rows). */
void res_clear_flows(res_diag *r);

#endif
