/* The tight-binding model: lattice, orbitals, spin layout, filling, and real-space hoppings H(R).
 * Every other layer reads this struct; only the model layer builds one. */
#ifndef BANDSIEVE_MODEL_H
#define BANDSIEVE_MODEL_H

#include <complex.h>
#include <stddef.h>

#include "bandsieve/err.h"

enum { TB_SPIN_NONE = 0, TB_SPIN_BLOCKS = 1, TB_SPIN_INTERLEAVED = 2 };

/* What the user states about the compound's magnetism (card key "magnetism"): unknown (detect
 * time reversal from H), none (time reversal holds; its breaking in H is fit error), magnetic
 * (time reversal is broken; no Z2 index). */
enum { TB_MAG_UNKNOWN = 0, TB_MAG_NONE = 1, TB_MAG_MAGNETIC = 2 };

/* The model is a plain struct because every numerical layer reads its arrays directly;
 * it is created and freed only through tb_model_create/tb_model_free.
 *
 * Basis states: norb of them (rows of H). For a spinless model, state i is spatial orbital i.
 * For a spinful model nspatial = norb/2 and, with TB_SPIN_BLOCKS, state i is orbital i % nspatial
 * with spin up for i < nspatial; with TB_SPIN_INTERLEAVED, state i is orbital i/2, spin up for even i.
 *
 * Hoppings: H_r[m*norb + n] = <m, 0| H | n, R_r> in eV, already divided by nothing: the degeneracy
 * weight deg[r] is kept separately and H(k) = sum_r exp(2 pi i k.R_r) H_r / deg[r], k in reduced
 * coordinates (the convention of the plain-text hopping table). Read them with tb_hop or
 * tb_hop_block: a folded model (tb_model_fold) stores H_R and H_-R once when H_-R = H_R^dagger
 * exactly. A model fresh from tb_model_create is unfolded: hsrc is NULL and H_r is the block
 * H + r*norb*norb, which is where builders write. */
typedef struct tb_model {
    char id[128];
    char formula[64];
    char source[256];     /* where the model comes from (free text) */
    int dim;              /* 2 or 3; in 2D, R3 = 0 and k3 is ignored */
    double lattice[3][3]; /* rows a1, a2, a3, Cartesian, Angstrom */
    int norb;             /* basis states */
    int nspatial;         /* spatial orbitals */
    int spinful;
    int spin_layout;      /* TB_SPIN_* */
    double (*orb_pos)[3]; /* nspatial reduced positions */
    int *orb_l;           /* nspatial angular momenta 0..3 */
    int *orb_shape;       /* nspatial indices within the shell (tb_shape_name), or NULL: the
                             card named no shapes and the default order applies */
    int nocc;             /* occupied bands (1..norb-1) */
    int has_fermi;
    double fermi_ev;
    int magnetism;        /* TB_MAG_*: the card's statement, TB_MAG_UNKNOWN when it makes none */
    int has_inversion_op; /* the card gave an explicit inversion operator */
    int *inv_perm;        /* norb: state i maps to state inv_perm[i] ... */
    double *inv_sign;     /* ... with factor inv_sign[i] (+1/-1); inv_shift below */
    int (*inv_shift)[3];  /* norb: lattice vector added (tau_i -> -tau_i = tau_j + shift) */
    int nR;
    int (*R)[3];       /* nR lattice vectors */
    int *deg;          /* nR degeneracy weights (>= 1) */
    double complex *H; /* hopping blocks, norb * norb each, eV: nR of them unless folded */
    int *hsrc;         /* nR, or NULL (unfolded): H_r is block hsrc[r], or the adjoint of block
                          -1 - hsrc[r] when hsrc[r] < 0 */
    /* Provenance, not data: the material card as read (compact JSON text: every key including
     * comment, orbital labels and meta), owned, NULL when the model did not come from a card.
     * It does not enter the content hash (content.h). */
    char *card_json;
    /* Family membership (card key "family"): the material sits at family_value of parameter
     * family_param (unit family_unit) along the path of family `family`. Members of one family
     * share the basis (phasepath.h). has_family is 0 when the card gives none. */
    int has_family;
    char family[64];
    char family_param[32];
    char family_unit[16];
    double family_value;
} tb_model;

/* Allocates a model for norb states, nspatial orbitals and nR lattice vectors, all arrays zeroed.
 * The caller owns *out (free with tb_model_free). Fails with BS_EINVAL past the limits in config.h. */
int tb_model_create(int norb, int nR, int spinful, tb_model **out, bs_err *err);

/* Frees m and everything it owns; accepts NULL. */
void tb_model_free(tb_model *m);

/* Deep copy; the caller owns *out. */
int tb_model_copy(const tb_model *m, tb_model **out, bs_err *err);

/* Element (a, b) of H_r (eV, not divided by deg[r]). */
double complex tb_hop(const tb_model *m, int r, int a, int b);

/* The block H_r, row-major norb x norb (eV, not divided by deg[r]): a pointer into m when H_r is
 * stored as such, else buf (norb * norb, the caller's) filled with it, or NULL when buf is NULL.
 * Valid while m is unchanged. */
const double complex *tb_hop_block(const tb_model *m, int r, double complex *buf);

/* Stores H_R and H_-R once wherever H_-R equals H_R^dagger bit for bit (tb_hop gives zero imaginary
 * parts of an adjoint as +0) and their weights agree, which halves the memory of a Hermitian table and
 * changes no value read back. Shrinks m->H in place; cannot fail (a refused shrink keeps the larger array).
 */
void tb_model_fold(tb_model *m);

/* Folding while reading, for a reader that writes one block at a time: block r (its R and deg
 * set) has just been written at block *nblock of m->H, and m->hsrc (allocated by the reader, nR
 * entries) holds entries 0..r-1. Records block r as the adjoint of an earlier block where
 * tb_model_fold would (the slot is then free for the next block), else as its own (*nblock grows).
 * The reader calls tb_model_fold at the end, which gives back the unused blocks. */
void tb_model_fold_next(tb_model *m, int r, int *nblock);

/* Undoes tb_model_fold (one block per lattice vector again), for code that writes m->H in place.
 * Fails with BS_ENOMEM, m unchanged. A no-op on an unfolded model. */
int tb_model_unfold(tb_model *m, bs_err *err);

/* Replaces the hoppings of m by H (nR blocks, unfolded; m takes ownership) and frees the old ones. */
void tb_model_set_hops(tb_model *m, double complex *H);

/* Index of the lattice vector R in m, or -1. Linear search; fine outside hot loops. */
int tb_model_find_R(const tb_model *m, const int R[3]);

/* Spatial orbital and spin (0 up, 1 down; 0 for spinless) of basis state i. */
int tb_state_orbital(const tb_model *m, int i);
int tb_state_spin(const tb_model *m, int i);
/* Basis state of spatial orbital o with spin s (s ignored when spinless). */
int tb_state_index(const tb_model *m, int o, int s);

/* Checks consistency: dim, nocc range, finite values, degeneracies >= 1, R3 = 0 in 2D, and
 * hermiticity H(-R) = H(R)^dagger within tol_ev (also requires -R present for every R).
 * `where` names the source (file path) for the message. */
int tb_model_validate(const tb_model *m, double tol_ev, const char *where, bs_err *err);

/* Real orbital shapes by angular momentum, in our documented default order (by m: 0, +1, -1, +2,
 * -2, +3, -3): s; pz px py; dz2 dxz dyz dx2-y2 dxy; fz3 fxz2 fyz2 fz(x2-y2) fxyz fx(x2-3y2)
 * fy(3x2-y2). tb_shape_name gives the name of index idx of l (NULL out of range), tb_shape_index
 * the index of a name for l (-1 when it is not a shape of that l). */
const char *tb_shape_name(int l, int idx);
int tb_shape_index(int l, const char *name);

/* "unknown", "none" or "magnetic" for a TB_MAG_* value; tb_magnetism_parse is its inverse and
 * returns -1 for any other text. */
const char *tb_magnetism_name(int mag);
int tb_magnetism_parse(const char *text);

/* Reciprocal lattice vectors b_i (rows, 1/Angstrom, with the 2 pi) from m->lattice. */
void tb_model_reciprocal(const tb_model *m, double b[3][3]);

/* The same for lattice rows a (Angstrom): b_i . a_j = 2 pi delta_ij. */
void tb_lattice_reciprocal(const double a[3][3], double b[3][3]);

#endif
