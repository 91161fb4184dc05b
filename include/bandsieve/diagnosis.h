/* The full diagnosis of one material: gaps, symmetries, Z2 (parity and Wannier-centre flow),
 * Chern numbers, Weyl nodes, nodal lines, and a class with a confidence and a reason.
 * This is the unit of work of `inspect` and of every worker in `screen`. */
#ifndef BANDSIEVE_DIAGNOSIS_H
#define BANDSIEVE_DIAGNOSIS_H

#include "bandsieve/eig.h"
#include "bandsieve/err.h"
#include "bandsieve/model.h"
#include "bandsieve/result.h"

typedef struct diag_opts {
    int mesh;                /* base k-mesh per reduced direction (0: default) */
    int mesh_factor;         /* when mesh is 0: the default mesh times this (0 or 1: the default);
                                a rescreen uses 2 so that 2D and 3D entries are both refined */
    double max_seconds;      /* wall-clock budget for this material (0: none) */
    int want_flows;          /* keep Wannier-centre flows in the result (artifacts) */
    unsigned long long seed; /* for random verification points */
    double symmetry_tol;     /* relative residual under which a symmetry is exact (0: 1e-6); larger
                                breakings are measured in eV and judged against the gap */
    double pos_tol_ang;      /* Angstrom tolerance of the inversion map from orbital centres (0: 0.05) */
    int magnetism;           /* 0: the card's statement; 1 + TB_MAG_* overrides it for this run */
    int verify;              /* compute every method's evidence, also the cross-checks that the plan
                                skips when cheaper evidence is decisive (a rescreen, --verify) */
    int tier_min_norb;       /* evidence is planned in tiers from this many states on (0: the default
                                DIAG_TIER_MIN_NORB; below it every method runs) */
    const eig_dist *dist;    /* distributed eigensolver for large matrices (a rank group's, whose
                                members then run the diagnosis in lockstep); borrowed; NULL: LAPACK */
} diag_opts;

/* States from which a 3D diagnosis plans its evidence in tiers: the Wannier-centre flow, whose six
 * planes of strings are 55-62% of a 3D insulator's eigensolves, is skipped when the parities are
 * decisive (diagnosis.c, parities_decisive). Below it the flow costs milliseconds and runs always. */
#define DIAG_TIER_MIN_NORB 16

/* The default k-mesh per direction for a model of dimension dim (36 in 2D, 14 in 3D). */
int diag_default_mesh(int dim);

/* k-points per H(k) batch of the diagnosis for norb states: 64 for small materials, fewer above
 * 200 states, so that the batch tables hold about 64 x 200^2 elements whatever the size. */
int diag_batch(int norb);

/* Estimated peak memory (bytes) of diagnosing a material of dimension dim with norb states, nR
 * lattice vectors, nocc occupied bands on a coarse mesh of `mesh` points per direction: H(R) and
 * the H(k) coefficient tables, the batch tables, the eigensolver's workspace, the mesh arrays and
 * the occupied states of the Wilson strings. An estimate (checked against measured peaks in
 * tests/scripts/faults_test.py), used to refuse a material before it runs out of memory. */
double diag_memory_bytes(int dim, int norb, int nR, int nocc, int mesh);

/* Runs the whole diagnosis of m (borrowed) into r (res_init by the caller; transport and surface
 * are left to the caller, see pl_diagnose).
 * BS_ETIMEOUT when opts->max_seconds is exceeded; BS_ENUMERIC on a LAPACK failure. */
int diag_run(const tb_model *m, const diag_opts *opts, res_diag *r, bs_err *err);

#endif
