#!/usr/bin/env bash
# Installs bandsieve's build and test dependencies from Debian's archive.
# Idempotent: checks each package first and is silent when everything is present. Installs only
# as root; otherwise prints the apt-get command and exits 1 (it never calls sudo).
set -euo pipefail

PACKAGES=(
  build-essential cmake pkg-config
  openmpi-bin libopenmpi-dev
  libopenblas-dev liblapacke-dev
  libblas-dev liblapack-dev    # a second BLAS/LAPACK for the CI build of tests/scripts/cluster_build.sh
  libscalapack-openmpi-dev
  libhdf5-dev hdf5-tools
  libsqlite3-dev sqlite3
  libcjson-dev
  libsymspg-dev
  libcmocka-dev
  python3-numpy python3-scipy
  chromium
  libplplot-dev plplot-driver-cairo
  poppler-utils
  procps
  clang-format
  clang libclang-rt-dev
)

if ! command -v dpkg-query >/dev/null 2>&1 || ! command -v apt-get >/dev/null 2>&1; then
  echo "install-deps: not a Debian system (no dpkg-query/apt-get); install the equivalents of:" >&2
  echo "  ${PACKAGES[*]}" >&2
  echo "or build with the site's libraries: README.md, \"Building on a cluster\"" >&2
  exit 1
fi

missing=()
for p in "${PACKAGES[@]}"; do
  if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
    missing+=("$p")
  fi
done

if [ "${#missing[@]}" -eq 0 ]; then
  exit 0
fi

# Never sudo: a user who is not root gets the command to run (or to hand to an administrator).
if [ "$(id -u)" -ne 0 ]; then
  echo "install-deps: missing Debian packages; as root, run:" >&2
  echo "  apt-get install --no-install-recommends ${missing[*]}" >&2
  exit 1
fi
echo "install-deps: installing ${missing[*]}" >&2
export DEBIAN_FRONTEND=noninteractive
apt-get update -qq
apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
