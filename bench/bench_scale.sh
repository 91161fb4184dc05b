#!/usr/bin/env bash
# Scale benchmark (not a test): rescreen set-up at 10^4..10^6 ids, catalogue views at 10^6
# materials, the coordinator's results per second of CPU, workers' busy fraction on ~1 ms materials
# and inspect's CPU time at 64 states,
# each also for an older binary when one is given, so the figures are ratios measured in one run.
# Needs python3, sqlite3 (the shell), mpirun and /usr/bin/time. Builds its data (about 1.5 GB at
# 10^6) in a temporary folder, or in --work DIR to reuse it between runs.
# Usage: bench/bench_scale.sh BUILD_DIR [--old OLD_BINARY] [--n N] [--repeat R] [--work DIR]
#                             [--skip setup,views,coord,busy,inspect] [--busy-us US] [--busy-n N]
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
build=${1:?usage: bench_scale.sh BUILD_DIR [--old OLD_BINARY] [--n N] [--repeat R] [--work DIR]}
shift
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
exec python3 "$here/bench_scale.py" "$build" "$@"
