#!/usr/bin/env bash
# Fuzz smoke run: builds the three libFuzzer harnesses (card, hopping table, material set) with
# clang, AddressSanitizer and UndefinedBehaviorSanitizer, and runs each for SECONDS on a seed corpus
# made from the test fixtures. Prints the executions of each; fails on any crash or sanitizer report.
# Usage: run.sh BANDSIEVE_BINARY WORKDIR [SECONDS]   (a longer campaign: SECONDS=600)
set -euo pipefail
bin="$1"; work="$2"; seconds="${3:-8}"
src="$(cd "$(dirname "$0")/../.." && pwd)"
cc="${BS_FUZZ_CC:-clang}"
command -v "$cc" >/dev/null || { echo "fuzz: $cc not found (workflows/install-deps.sh installs clang)"; exit 1; }
rm -rf "$work"; mkdir -p "$work/tmp" "$work/corpus/card" "$work/corpus/table" "$work/corpus/set"
# glibc defines CMPLX for gcc only; clang has the same builtin.
flags=(-std=c11 -D_GNU_SOURCE -g -O1 -fsanitize=fuzzer,address,undefined -fno-sanitize-recover=undefined
       "-DCMPLX(x,y)=__builtin_complex((double)(x),(double)(y))" -I"$src/include")
deps=($(pkg-config --cflags --libs hdf5 libcjson) -lm)
lib=("$src"/src/base/*.c "$src"/src/model/*.c)
for h in card table set; do
  "$cc" "${flags[@]}" -o "$work/fuzz_$h" "$src/tests/fuzz/fuzz_$h.c" "${lib[@]}" "${deps[@]}"
done
good="$src/tests/data/good"
cp "$good"/*.json "$work/corpus/card/"
cp "$good"/*.dat "$work/corpus/table/"
cp "$good"/*.dat "$work/tmp/"          # the tables the card seeds name, beside the fuzzed card
"$bin" demo-set -o "$work/corpus/set/demo.h5" --count 12 --seed 3 >/dev/null 2>&1
"$bin" pack -o "$work/corpus/set/good.h5" "$good"/*.json >/dev/null
cp "$src"/tests/data/fuzz-found/set/*.h5 "$work/corpus/set/"  # inputs that once broke the reader
export TMPDIR="$work/tmp"
# HDF5 keeps library-wide allocations until exit; leak reports would be about those.
export ASAN_OPTIONS=detect_leaks=0:abort_on_error=1
total=0
for h in card table set; do
  log="$work/fuzz_$h.log"
  if ! "$work/fuzz_$h" -max_total_time="$seconds" -print_final_stats=1 -max_len=65536 -timeout=20 \
        -artifact_prefix="$work/crash_$h-" "$work/corpus/$h" >"$log" 2>&1; then
    tail -40 "$log"
    echo "fuzz: the $h reader failed; the input is in $work/crash_$h-*"
    exit 1
  fi
  n=$(sed -n 's/^stat::number_of_executed_units: *//p' "$log")
  echo "fuzz: $h reader: $n executions in ${seconds} s, no crash, no sanitizer report"
  total=$((total + n))
done
echo "fuzz: $total executions in all"
