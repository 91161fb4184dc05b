#!/usr/bin/env bash
# The whole test suite from a fresh clone: checks the layering (workflows/check-layers.sh), installs
# what is missing, builds, checks the formatting (workflows/check-format.sh), runs every test through CTest (unit tests, numpy/scipy cross-checks, MPI
# runs), rebuilds the unit tests with AddressSanitizer + UndefinedBehaviorSanitizer and runs them
# again, and finally follows README.md's "Building on a cluster" example literally: a build against
# Debian's reference BLAS/LAPACK (a second implementation) with explicit CMake variables and no
# apt-get, running the unit tests.
set -euo pipefail
here="$(cd "$(dirname "$0")/.." && pwd)"
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
# Layering first: a file that includes a higher layer fails before anything is built.
bash "$here/workflows/check-layers.sh"
bash "$here/workflows/build.sh"
# Layout: every C file as the tree's .clang-format lays it out (clang-format comes with the deps).
bash "$here/workflows/check-format.sh"
ctest --test-dir "$here/build" --output-on-failure -j2 --timeout 900
BS_BUILD_DIR="$here/build-sanitize" bash "$here/workflows/build.sh" -DBS_SANITIZE=ON
# Leak checking stays on for our code; UBSan findings are fatal.
export UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1
# Caches that system libraries (fontconfig, cairo) keep until exit are not our leaks.
export LSAN_OPTIONS=suppressions=$here/tests/lsan.supp
ctest --test-dir "$here/build-sanitize" --output-on-failure -j2 -L unit --timeout 900
bash "$here/tests/scripts/cluster_build.sh"
