#!/usr/bin/env bash
# Fails when a C source or header under src, include, tests or bench differs from the layout of the
# tree's .clang-format (clang-format --dry-run --Werror: nothing is rewritten). Prints the
# differences clang-format reports.
set -euo pipefail
here="$(cd "$(dirname "$0")/.." && pwd)"
cd "$here"
command -v clang-format >/dev/null || { echo "check-format: clang-format not found (workflows/install-deps.sh)" >&2; exit 2; }
find src include tests bench -name '*.[ch]' -print0 | sort -z | xargs -0 clang-format --style=file --dry-run --Werror
echo "check-format: ok"
