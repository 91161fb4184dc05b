#!/usr/bin/env bash
# Configures and builds bandsieve into build/ (or $BS_BUILD_DIR). Extra arguments go to cmake.
# Debian packages: BS_DEPS=auto (default) installs missing ones on a Debian machine with apt-get,
# BS_DEPS=yes always runs workflows/install-deps.sh, BS_DEPS=no never does (use the libraries the
# environment provides: README.md, "Building on a cluster").
set -euo pipefail
here="$(cd "$(dirname "$0")/.." && pwd)"
case "${BS_DEPS:-auto}" in
  yes) bash "$here/workflows/install-deps.sh" ;;
  no) ;;
  auto)
    if [ -f /etc/debian_version ] && command -v apt-get >/dev/null 2>&1 && command -v dpkg-query >/dev/null 2>&1; then
      bash "$here/workflows/install-deps.sh"
    fi ;;
  *) echo "build.sh: BS_DEPS must be auto, yes or no, not '$BS_DEPS'" >&2; exit 2 ;;
esac
build="${BS_BUILD_DIR:-$here/build}"
cmake -S "$here" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo "$@" >/dev/null
cmake --build "$build" -j"$(nproc)" >/dev/null
