/* Private to the built-in lattice models: an accumulator of hopping terms that turns bonds into a
 * tb_model with H(-R) = H(R)^dagger exactly, and the per-model builders. */
#ifndef BANDSIEVE_LM_ACC_H
#define BANDSIEVE_LM_ACC_H

#include <complex.h>

#include "bandsieve/err.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/model.h"

/* Sticky error (as SQLite keeps its status on the handle): the first failure is remembered in rc and
 * every later call is a no-op, so a builder checks once, at lm_acc_finish. */
typedef struct lm_acc {
    int nspatial, norb, spinful, layout;
    double lattice[3][3];
    double to_reduced[3][3]; /* rows b_i / (2 pi): f_i = to_reduced[i] . r */
    double (*pos)[3];        /* nspatial reduced positions, filled by the builder */
    int *orb_l;              /* nspatial angular momenta, filled by the builder */
    int nR, cap;
    int (*R)[3];
    double complex *H; /* cap * norb * norb, row-major per R */
    int rc;
    bs_err *err;
} lm_acc;

/* Pauli matrices s_0, s_x, s_y, s_z. */
extern const double complex lm_pauli[4][2][2];

/* Starts an accumulator for nspatial orbitals, spinful or not, layout 0 (blocks) or 1 (interleaved),
 * with the given lattice rows (Angstrom). err is borrowed until lm_acc_finish or lm_acc_clear. */
int lm_acc_init(lm_acc *acc, int nspatial, int spinful, int layout, const double lattice[3][3], bs_err *err);

/* Frees what acc holds; safe after a failed init. */
void lm_acc_clear(lm_acc *acc);

/* Basis state of orbital o with spin s (0 up, 1 down) in acc's layout. */
int lm_acc_state(const lm_acc *acc, int o, int s);

/* Adds v to <a,0|H|b,R> and conj(v) to <b,0|H|a,-R> (states a, b). For R = 0 and a == b it adds
 * creal(v) once: a bond from a state to itself is an on-site energy. */
void lm_acc_hop(lm_acc *acc, const int R[3], int a, int b, double complex v);

/* Adds v S[s1][s2] between orbital o1 spin s1 (row) and orbital o2 spin s2 at R, as lm_acc_hop, for a
 * 2x2 spin matrix S. For R = 0 and o1 == o2, S must be Hermitian and is added once. */
void lm_acc_spin_hop(lm_acc *acc, const int R[3], int o1, int o2, double complex v,
                     const double complex S[2][2]);

/* Adds coef (S (x) T) to H(R) and its adjoint to H(-R): S a 2x2 spin matrix (NULL when spinless),
 * T an nspatial x nspatial orbital matrix, row-major. For R = 0 the product must be Hermitian and is
 * added once. Each pair +-R is to be entered once. */
void lm_acc_matrix(lm_acc *acc, const int R[3], double complex coef, const double complex S[2][2],
                   const double complex *T);

/* The lattice vector R of the bond from destination orbital o_dst (home cell) to source orbital o_src
 * displaced by the Cartesian vector d (Angstrom) from it: R = reduced(d) + tau_dst - tau_src, which
 * must be integral (a builder bug otherwise, reported through acc->rc). */
void lm_acc_bond_R(lm_acc *acc, int o_dst, int o_src, const double d[3], int R[3]);

/* Second-neighbour path on a bipartite lattice whose nearest-neighbour vectors delta[k] point from
 * sublattice A to B: for destination sublattice sub (0 = A, 1 = B) and bonds k != l, the electron
 * goes from the source site along d1 to the shared neighbour and along d2 to the destination
 * (A: d1 = delta_k, d2 = -delta_l; B: d1 = -delta_k, d2 = delta_l); disp = -(d1 + d2) is the
 * source's Cartesian displacement from the destination. */
void lm_nnn_path(const double (*delta)[3], int sub, int k, int l, double d1[3], double d2[3], double disp[3]);

/* Makes the tb_model: dim, nocc, id (the spec), formula (a short name) and source (the reference).
 * The caller owns *out. Returns acc->rc when an earlier call failed. */
int lm_acc_finish(lm_acc *acc, int dim, int nocc, const char *spec, const char *name, const char *source,
                  tb_model **out);

/* Builders: p holds the values of the model's parameters in catalogue order. */
int lm_build_graphene(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_haldane(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_kane_mele(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_bhz(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_fkm(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_weyl(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_nodal_line(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_atomic(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_metal(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_rocksalt_tci(const double *p, const char *spec, tb_model **out, bs_err *err);
int lm_build_rashba(const double *p, const char *spec, tb_model **out, bs_err *err);

/* Parameter indices, in catalogue order. */
enum { GR_T, GR_A, GR_N };
enum { HA_T1, HA_T2, HA_PHI, HA_M, HA_A, HA_N };
enum { KM_T, KM_LSO, KM_LR, KM_LV, KM_A, KM_LAYOUT, KM_N };
enum { BHZ_A, BHZ_B, BHZ_C, BHZ_D, BHZ_M, BHZ_G, BHZ_DELTA, BHZ_LATT, BHZ_LAYOUT, BHZ_N };
enum { FKM_T, FKM_DT, FKM_LSO, FKM_STAG, FKM_A, FKM_LAYOUT, FKM_N };
enum { WE_T, WE_M, WE_W, WE_A, WE_N };
enum { NL_T, NL_M, NL_TZ, NL_A, NL_N };
enum { AT_DELTA, AT_T, AT_DIM, AT_A, AT_LAYOUT, AT_N };
enum { ME_T, ME_DELTA, ME_V, ME_DIM, ME_A, ME_N };
enum { RS_M, RS_T12, RS_T11, RS_L1, RS_L2, RS_A, RS_LAYOUT, RS_N };
enum { RA_T, RA_LR, RA_A, RA_LAYOUT, RA_N };

#endif
