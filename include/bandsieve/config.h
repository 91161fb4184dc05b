/* Compile-time settings in one place (tolerances, limits). Everything else is a command-line option. */
#ifndef BANDSIEVE_CONFIG_H
#define BANDSIEVE_CONFIG_H

#define BS_VERSION "0.1.0"

/* Input limits: a header asking for more is rejected before anything is allocated. */
#define BS_MAX_NORB        20000       /* basis states per material */
#define BS_MAX_NR          200000      /* lattice vectors in a hopping table */
#define BS_MAX_HR_ELEMENTS 400000000LL /* nR * norb^2 complex numbers (6.4 GB) */

/* |H(-R) - H(R)^dagger| above this (eV) makes a table non-Hermitian. Wannier fits print
 * 6 decimals, so 1e-5 eV admits round-off and nothing else (common practice). */
#define BS_HERMITIAN_TOL_EV 1e-5

/* Coefficient table size (bytes) from which hk_create reads a folded model's own blocks instead of
 * building the table (hk.h): half the memory of model plus table, twice the flops per H(k). */
#define BS_HK_BORROW_BYTES 64.0e6

/* A hopping or on-site energy larger than this (eV) is refused as implausible: tight-binding
 * elements of real materials are tens of eV at most, and sums of huge values lose the gaps to
 * round-off (LAPACK fails on values near DBL_MAX). */
#define BS_MAX_HOPPING_EV 1.0e4

/* Lattice vectors outside [BS_MIN_LATTICE_A, BS_MAX_LATTICE_A] Angstrom are refused: bonds are an
 * Angstrom or more, and supercells with vacuum reach a few hundred; a vector of 1e300 (which made
 * the cell volume infinite) or 1e-300 is a units mistake or damage (common practice). */
#define BS_MIN_LATTICE_A 1.0e-2
#define BS_MAX_LATTICE_A 1.0e4

/* Reduced orbital positions farther than this from the home cell are refused: Wannier centres lie
 * within a cell or two of it (common practice); the limit only catches damage. */
#define BS_MAX_REDUCED_POS 100.0

/* A Fermi energy of magnitude above BS_MAX_HOPPING_EV (eV) cannot lie among the bands. */

/* Largest coarse k-mesh per direction: a 3D mesh of 256^3 is 1.7e7 k-points, a 2D one of 4096^2 the
 * same; the diagnosis refuses more, so the command line does too (screen, rescreen, inspect). */
#define BS_MAX_MESH_2D 4096
#define BS_MAX_MESH_3D 256

/* A gap below this (eV) counts as closed. */
#define BS_GAP_CLOSED_EV 1e-4

#endif
