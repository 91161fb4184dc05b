#!/usr/bin/env bash
# Installs bandsieve's build and test dependencies from Debian's archive.
# Idempotent: checks each package first and is silent when everything is present.
set -euo pipefail

PACKAGES=(
  build-essential cmake pkg-config
  openmpi-bin libopenmpi-dev
  libopenblas-dev liblapacke-dev
  libscalapack-openmpi-dev
  libhdf5-dev hdf5-tools
  libsqlite3-dev sqlite3
  libcjson-dev
  libsymspg-dev
  libcmocka-dev
  python3-numpy python3-scipy
  chromium
  procps
  clang-format
  clang libclang-rt-dev
)

missing=()
for p in "${PACKAGES[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$p")
  fi
done

if [ "${#missing[@]}" -eq 0 ]; then
  exit 0
fi

SUDO=""
if [ "$(id -u)" -ne 0 ]; then
  SUDO="sudo"
fi
echo "install-deps: installing ${missing[*]}" >&2
export DEBIAN_FRONTEND=noninteractive
$SUDO apt-get update -qq
$SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
