#!/usr/bin/env bash
# Configures and builds bandsieve into build/ (or $BS_BUILD_DIR). Extra arguments go to cmake.
set -euo pipefail
here="$(cd "$(dirname "$0")/.." && pwd)"
bash "$here/workflows/install-deps.sh"
build="${BS_BUILD_DIR:-$here/build}"
cmake -S "$here" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo "$@" >/dev/null
cmake --build "$build" -j"$(nproc)" >/dev/null
