#!/usr/bin/env bash
# Merges catalogues written by separate jobs (workflows/slurm-split.sh) into one:
#   bash workflows/merge-catalogues.sh OUT.sqlite PART.sqlite [PART.sqlite ...]
# OUT is created from the first part (schema included) if it does not exist. Each further part's
# runs are renumbered past OUT's largest run_id and copied with their sessions, results, nodes and
# artifact index; materials are inserted or replaced. Artifact HDF5 files are copied beside OUT
# (their names carry the part's catalogue name, so they cannot collide). Every part must have the
# same schema version (PRAGMA user_version). Uses Debian's sqlite3 shell.
set -euo pipefail
[ $# -ge 2 ] || { echo "usage: $0 OUT.sqlite PART.sqlite [PART.sqlite ...]" >&2; exit 2; }
out=$1; shift
outdir=$(dirname "$out")
# Paths go into SQL string literals: double any single quote.
sqlq() { printf "%s" "$1" | sed "s/'/''/g"; }
for part in "$@"; do
  [ -f "$part" ] || { echo "merge: $part: no such catalogue" >&2; exit 1; }
  partdir=$(dirname "$part")
  # Artifact files first: a name already taken by a different file would leave the index pointing
  # at the wrong arrays, so that stops the merge before anything is written.
  for f in $(sqlite3 "$part" "SELECT DISTINCT file FROM artifacts"); do
    [ -f "$partdir/$f" ] || continue
    if [ -e "$outdir/$f" ] && ! [ "$partdir/$f" -ef "$outdir/$f" ] && ! cmp -s "$partdir/$f" "$outdir/$f"; then
      echo "merge: $outdir/$f exists and differs from $partdir/$f (two parts with the same catalogue name?);" \
           "rename one part's catalogue and artifact files first" >&2
      exit 1
    fi
  done
  if [ ! -f "$out" ]; then
    sqlite3 "$part" "VACUUM INTO '$(sqlq "$out")'"
  else
    vo=$(sqlite3 "$out" "PRAGMA user_version"); vp=$(sqlite3 "$part" "PRAGMA user_version")
    [ "$vo" = "$vp" ] || { echo "merge: $part has schema $vp, $out has $vo" >&2; exit 1; }
    # The stored columns of results (its generated integer columns cannot be inserted into).
    rcols=$(sqlite3 "$out" "SELECT group_concat(name, ', ') FROM pragma_table_xinfo('results') WHERE hidden = 0")
    sqlite3 "$out" <<SQL
PRAGMA foreign_keys = OFF;
ATTACH '$(sqlq "$part")' AS p;
BEGIN;
CREATE TEMP TABLE off AS SELECT COALESCE(MAX(run_id), 0) AS n FROM main.runs;
INSERT OR REPLACE INTO main.materials SELECT * FROM p.materials;
CREATE TEMP TABLE t_runs AS SELECT * FROM p.runs;
UPDATE t_runs SET run_id = run_id + (SELECT n FROM off);
INSERT INTO main.runs SELECT * FROM t_runs;
CREATE TEMP TABLE t_sessions AS SELECT * FROM p.run_sessions;
UPDATE t_sessions SET run_id = run_id + (SELECT n FROM off);
INSERT INTO main.run_sessions SELECT * FROM t_sessions;
CREATE TEMP TABLE t_results AS SELECT * FROM p.results;
UPDATE t_results SET run_id = run_id + (SELECT n FROM off);
INSERT INTO main.results ($rcols) SELECT $rcols FROM t_results;
CREATE TEMP TABLE t_nodes AS SELECT * FROM p.nodes;
UPDATE t_nodes SET run_id = run_id + (SELECT n FROM off);
INSERT INTO main.nodes SELECT * FROM t_nodes;
CREATE TEMP TABLE t_artifacts AS SELECT * FROM p.artifacts;
UPDATE t_artifacts SET run_id = run_id + (SELECT n FROM off);
INSERT INTO main.artifacts SELECT * FROM t_artifacts;
COMMIT;
PRAGMA main.integrity_check;
SQL
  fi
  for f in $(sqlite3 "$part" "SELECT DISTINCT file FROM artifacts"); do
    [ -f "$partdir/$f" ] || { echo "merge: warning: artifact $partdir/$f is missing" >&2; continue; }
    [ "$partdir/$f" -ef "$outdir/$f" ] || [ -e "$outdir/$f" ] || cp "$partdir/$f" "$outdir/$f"
  done
  echo "merge: added $part" >&2
done
