#!/usr/bin/env bash
# The main job on the invented demo data, from a fresh clone: installs what is missing, builds,
# generates the demo set, screens it on two ranks into a catalogue and prints the candidates.
# Outputs go to demo-out/ (override with BS_DEMO_DIR). Run it again to see a resumed screen.
set -euo pipefail
here="$(cd "$(dirname "$0")/.." && pwd)"
bash "$here/workflows/build.sh"
bin="$here/build/bandsieve"
out="${BS_DEMO_DIR:-$here/demo-out}"
mkdir -p "$out"
# Open MPI refuses to start as root unless told; harmless otherwise.
export OMPI_ALLOW_RUN_AS_ROOT=1 OMPI_ALLOW_RUN_AS_ROOT_CONFIRM=1
[ -f "$out/jq-demo.h5" ] || "$bin" demo-set -o "$out/jq-demo.h5" --count 300 --seed 2026 --families
# Two ranks: a coordinator and one worker (P = cores + 1 also works: the coordinator sleeps).
# It exits 0 although a few invented entries are broken on purpose: they are counted, not fatal.
# --paths: after the materials, each invented family's phase path is one unit of work (H(R)
# interpolated between members), stored in the catalogue's path tables.
mpirun -n 2 --oversubscribe "$bin" screen "$out/jq-demo.h5" -c "$out/jq-demo.sqlite" --paths \
  --path-samples 21 --path-track-steps 8
echo
echo "== classes"
"$bin" query "$out/jq-demo.sqlite" "SELECT class, COUNT(*) AS n FROM summary GROUP BY class ORDER BY n DESC"
echo
echo "== candidates (first 25; all with: $bin query $out/jq-demo.sqlite --view candidates)"
"$bin" query "$out/jq-demo.sqlite" "SELECT material_id, class, z2, chern, n_weyl, confidence, gap_indirect_ev FROM candidates LIMIT 25"
echo
echo "== entries that could not be screened"
"$bin" query "$out/jq-demo.sqlite" --view failures
echo
echo "== transitions along the invented families (catalogue view transitions; H(R) interpolated between members)"
"$bin" query "$out/jq-demo.sqlite" "SELECT family, parameter, unit, printf('%.5f', value) AS value, kind, k_label, class_before, class_after, z2_before, z2_after FROM transitions"
echo
echo "== Weyl-node events along the paths"
"$bin" query "$out/jq-demo.sqlite" "SELECT family, kind, COUNT(*) AS n, printf('%.4f', MIN(x)) AS first, printf('%.4f', MAX(x)) AS last FROM path_events WHERE kind <> 'closing' GROUP BY family, kind"
