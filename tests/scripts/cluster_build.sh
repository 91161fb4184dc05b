#!/usr/bin/env bash
# Follows README.md's "Building on a cluster" example word for word: the block after the marker
# <!-- cluster-build-example --> is run as written, in a copy of the source tree, with HOME set to a
# scratch folder (it installs into $HOME/opt/bandsieve). No apt-get, no sudo. Then checks that the
# program and a unit test really load the reference BLAS and LAPACK it names (not the system's
# default through Debian's alternatives), that the unit tests ran, and that the install holds the
# program, the Slurm scripts and the documents.
set -euo pipefail
src="$(cd "$(dirname "$0")/../.." && pwd)"
scratch="$(mktemp -d "${TMPDIR:-/tmp}/bandsieve-cluster.XXXXXX")"
trap 'rm -rf "$scratch"' EXIT
fail() { echo "cluster_build: FAIL: $*" >&2; exit 1; }

block="$(awk '/<!-- cluster-build-example -->/ {m = 1; next}
              m && /^```/ {if (inblk) exit; inblk = 1; next}
              inblk {print}' "$src/README.md")"
[ -n "$block" ] || fail "no example block after <!-- cluster-build-example --> in README.md"
if grep -Eq 'apt-get|sudo|install-deps|build\.sh' <<<"$block"; then
  fail "the README's cluster example must use the environment's libraries only"
fi
grep -q 'cmake --install' <<<"$block" || fail "the README's cluster example does not install"

# The source tree as a user would have it (tracked and new files, no build folders).
mkdir "$scratch/src" "$scratch/home"
(cd "$src" && git ls-files -z --cached --others --exclude-standard | xargs -0 tar -cf - 2>/dev/null) |
  tar -xf - -C "$scratch/src"
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
(cd "$scratch/src" && HOME="$scratch/home" bash -euo pipefail -c "$block") >"$scratch/log" 2>&1 ||
  { tail -40 "$scratch/log" >&2; fail "the README's cluster example failed (log above)"; }
grep -q "100% tests passed" "$scratch/log" || fail "ctest -L unit did not report all tests passing"

build="$scratch/src/build-site"
prefix="$scratch/home/opt/bandsieve"
check_libs() {
  local libs
  libs="$(ldd "$1")"
  grep -Eq 'libblas\.so\.3 => /usr/lib/x86_64-linux-gnu/blas/libblas\.so\.3' <<<"$libs" ||
    fail "$1 does not load the reference BLAS: $(grep -E 'blas' <<<"$libs" | tr -s ' \t' ' ')"
  grep -Eq 'liblapack\.so\.3 => /usr/lib/x86_64-linux-gnu/lapack/liblapack\.so\.3' <<<"$libs" ||
    fail "$1 does not load the reference LAPACK: $(grep -E 'lapack' <<<"$libs" | tr -s ' \t' ' ')"
  if grep -Eq 'openblas|libblis|mkl' <<<"$libs"; then fail "$1 also loads another BLAS"; fi
}
check_libs "$build/bandsieve"
check_libs "$build/tests/kspace_test_eig"
check_libs "$prefix/bin/bandsieve"
for f in bin/bandsieve share/bandsieve/workflows/slurm-screen.sh share/bandsieve/workflows/merge-catalogues.sh \
         share/doc/bandsieve/README.md share/doc/bandsieve/db/README.md; do
  [ -e "$prefix/$f" ] || fail "cmake --install did not install $f"
done
[ -x "$prefix/share/bandsieve/workflows/slurm-screen.sh" ] || fail "installed Slurm script is not executable"
"$prefix/bin/bandsieve" --version >/dev/null || fail "the installed program does not run"
# The installed program computes with the reference libraries: a built-in model's diagnosis.
"$prefix/bin/bandsieve" inspect model:kane_mele --json | grep -q '"class"' || fail "inspect with the reference libraries"
echo "cluster_build: README example built, $(grep -Eo '[0-9]+ tests' "$scratch/log" | tail -1) passed, reference BLAS/LAPACK loaded, install complete"
