/* Band paths through the Brillouin zone: the standard high-symmetry path of a lattice
 * (Comput. Mater. Sci. 49, 299 (2010)), found from the lattice vectors alone, or a user path of
 * labelled points; and their sampling into k-points with a path coordinate for plotting. */
#ifndef BANDSIEVE_KPATH_H
#define BANDSIEVE_KPATH_H

#include "bandsieve/err.h"

#define KPATH_MAX_POINTS 32
#define KPATH_LABEL_LEN  16

typedef struct kpath_point {
    char label[KPATH_LABEL_LEN]; /* "G" is the zone centre */
    double k[3];                 /* reduced, in the basis of the lattice given */
    int jump;                    /* 1: the path jumps to this point (no segment from the previous) */
} kpath_point;

typedef struct kpath {
    char lattice[16]; /* "CUB", "FCC", "BCC", "TET", "ORC", "HEX", 2D "SQR", "REC", "HEX2D";
                         "user" for a given path */
    int npoint;
    kpath_point point[KPATH_MAX_POINTS];
} kpath;

/* The standard path of the lattice with rows a (Angstrom) in dimension dim (2: a3 is the
 * out-of-plane vector, must be orthogonal to a1 and a2). The Bravais lattice is recognised from
 * the metric, up to an integer change of basis (entries -1..1), among CUB, FCC, BCC, TET, ORC, HEX
 * and, in 2D, square, rectangular and hexagonal; the published coordinates (given for the
 * paper's standard primitive cell) are converted to the basis of a. BS_EINVAL, naming the cell
 * lengths and angles, for any other lattice (give a path instead). tol: relative tolerance on
 * lengths and angle cosines (0: 1e-4). */
int kpath_auto(const double a[3][3], int dim, double tol, kpath *out, bs_err *err);

/* Parses a user path "G:0,0,0 X:0.5,0,0 | K:0.375,0.375,0.75 ...": whitespace-separated
 * LABEL:k1,k2[,k3] items; "|" makes the next point a jump. At least two points, labels of 1..15
 * characters [A-Za-z0-9_'+-]. BS_EPARSE naming the item. */
int kpath_parse(const char *text, kpath *out, bs_err *err);

/* The path sampled into k-points; owned arrays, kpath_samples_clear frees them. */
typedef struct kpath_samples {
    int nk;
    double *k;        /* nk * 3 reduced */
    double *x;        /* nk path coordinates, 1/Angstrom (Cartesian length, 2 pi included) */
    int *vertex;      /* nk: index of the path point at this sample, or -1 */
    int nvertex;      /* equals the path's npoint */
    double *vertex_x; /* nvertex: x of each path point (a jump shares the previous x) */
} kpath_samples;

/* Samples p with about npoints k-points in all (at least 2 per segment, every path point exactly
 * once, spread by Cartesian length with reciprocal vectors of a). BS_EINVAL for npoints < 2,
 * BS_ENOMEM. out is overwritten. */
int kpath_sample(const kpath *p, const double a[3][3], int npoints, kpath_samples *out, bs_err *err);

void kpath_samples_clear(kpath_samples *s);

/* The path as "G-X-W|U-X" text into buf (size n). */
void kpath_describe(const kpath *p, char *buf, int n);

#endif
