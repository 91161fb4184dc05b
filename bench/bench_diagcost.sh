#!/usr/bin/env bash
# Diagnosis-cost benchmark (not a test): eigensolves per diagnosis, inspect's CPU time and peak
# memory, for this build and, with --old, an older binary on the same invented models in one run.
# Needs python3, a C compiler (for the eigensolve counter it preloads) and /usr/bin/time.
# Usage: bench/bench_diagcost.sh BUILD_DIR [--old OLD_BINARY] [--repeat R] [--work DIR] [--skip mem,cpu64,cpu48]
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
build=${1:?usage: bench_diagcost.sh BUILD_DIR [--old OLD_BINARY] [--repeat R] [--work DIR] [--skip mem,cpu64,cpu48]}
shift
exec python3 "$here/bench_diagcost.py" "$build" "$@"
