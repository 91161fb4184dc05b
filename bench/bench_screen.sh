#!/usr/bin/env bash
# Benchmark (not a test): screening throughput with 1 worker (mpirun -n 2) and 2 workers (-n 3),
# measured in one run on the same invented demo set, reported as materials per second and their
# ratio. On a 2-core machine the coordinator shares a core with a worker; it sleeps between polls.
# Usage: bench/bench_screen.sh BUILD_DIR [COUNT] [MESH]
set -euo pipefail
build=${1:?usage: bench_screen.sh BUILD_DIR [COUNT] [MESH]}
count=${2:-200}
mesh=${3:-16}
bin="$build/bandsieve"
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1 OPENBLAS_NUM_THREADS=1
"$bin" demo-set -o "$work/set.h5" --count "$count" --seed 99 2>/dev/null
# The run's own elapsed time (its closing line), so MPI start-up is not counted.
rate() {
  local ranks=$1 cat="$work/cat$1.sqlite"
  mpirun -n "$ranks" --oversubscribe "$bin" screen "$work/set.h5" -c "$cat" --mesh "$mesh" 2>"$work/log$1" >/dev/null || true
  local secs
  secs=$(grep -E "^bandsieve screen: run [0-9]+ (finished|interrupted)" "$work/log$1" | sed -E 's/.* ([0-9.]+) s$/\1/')
  awk -v n="$count" -v t="$secs" 'BEGIN { print n / t }'
}
r1=$(rate 2)
r2=$(rate 3)
printf "materials per second: 1 worker %.2f, 2 workers %.2f, ratio %.2f (count %d, mesh %d)\n" \
  "$r1" "$r2" "$(awk -v a="$r1" -v b="$r2" 'BEGIN { print b / a }')" "$count" "$mesh"
