/* Compile-time settings in one place (tolerances, limits). Everything else is a command-line option. */
#ifndef BANDSIEVE_CONFIG_H
#define BANDSIEVE_CONFIG_H

#define BS_VERSION "0.1.0"

/* Input limits: a header asking for more is rejected before anything is allocated. */
#define BS_MAX_NORB 20000      /* basis states per material */
#define BS_MAX_NR 200000       /* lattice vectors in a hopping table */
#define BS_MAX_HR_ELEMENTS 400000000LL /* nR * norb^2 complex numbers (6.4 GB) */

/* |H(-R) - H(R)^dagger| above this (eV) makes a table non-Hermitian. Wannier fits print
 * 6 decimals, so 1e-5 eV admits round-off and nothing else (common practice). */
#define BS_HERMITIAN_TOL_EV 1e-5

/* A hopping or on-site energy larger than this (eV) is refused as implausible: tight-binding
 * elements of real materials are tens of eV at most, and sums of huge values lose the gaps to
 * round-off (LAPACK fails on values near DBL_MAX). */
#define BS_MAX_HOPPING_EV 1.0e4

/* A gap below this (eV) counts as closed. */
#define BS_GAP_CLOSED_EV 1e-4

#endif
