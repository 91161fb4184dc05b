#!/usr/bin/env python3
"""The catalogue views at scale, checked without timing anything:

1. summary and top_spin_hall pick, for every material, the row that their definition in
   db/README.md names (summary: rows about the material's current content first, then status
   'ok', then the highest mesh among ok rows, NULL meshes last, then the latest run; top_spin_hall: among ok rows with shc_xy, highest mesh then
   latest run). The rule is applied here in Python to a few thousand invented rows (several runs
   per material, every status, NULL meshes, ties) and compared with the views row by row.
2. The query plans that keep one material and the whole views cheap at 10^6 rows (db/README.md,
   "Query plans"): one material's summary row is found through an index (no scan of results),
   failures reads the partial index of non-ok rows, run_progress only its covering index.

Usage: catalogue_views.py BINARY WORKDIR. The rows are invented test data (no physics).
"""
import os
import random
import shutil
import sqlite3
import subprocess
import sys

ENV = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1")


def make_catalogue(binary, work):
    shutil.rmtree(work, ignore_errors=True)
    os.makedirs(work)
    tiny = os.path.join(work, "tiny.h5")
    cat = os.path.join(work, "cat.sqlite")
    subprocess.run([binary, "demo-set", "-o", tiny, "--count", "12", "--seed", "3"], env=ENV, check=True,
                   capture_output=True)
    # Stops before its first hand-out: the binary creates the catalogue with its schema and views.
    subprocess.run([binary, "screen", tiny, "-c", cat, "--max-seconds", "0.5"], env=ENV, capture_output=True)
    if not os.path.exists(cat):
        sys.exit("the screen did not create the catalogue")
    return cat


def fill(con, rng, nmat, nrun):
    con.executemany("INSERT INTO runs (run_id, kind, status, started, settings) VALUES (?, ?, 'done', "
                    "'2026-01-01T00:00:00.000Z', '{}')",
                    [(100 + r, "screen" if r == 0 else "rescreen") for r in range(nrun)])
    rows = []
    current = {}
    for i in range(nmat):
        mid = f"m{i:05d}"
        # Content hashes (invented): the material's current one, and rows about it or another.
        current[mid] = rng.choice(["c1", "c2", None]) if i % 7 else None
        if i % 7:
            con.execute("INSERT INTO materials (material_id, updated, content) VALUES (?, '2026', ?)",
                        (mid, current[mid]))
        for r in rng.sample(range(nrun), rng.randint(1, nrun)):
            status = rng.choice(["ok", "ok", "ok", "failed", "timeout", "invalid"])
            mesh = rng.choice([None, 8, 14, 14, 28])
            shc = rng.choice([None, rng.uniform(-1, 1)]) if status == "ok" else None
            rows.append((100 + r, mid, status, mesh, shc, "x" if shc is not None else None,
                         f"2026-01-0{1 + r}T00:00:00.000Z", rng.random(), rng.choice(["c1", "c2", None])))
    rng.shuffle(rows)  # insertion order must not matter
    con.executemany("INSERT INTO results (run_id, material_id, status, mesh, shc_xy, shc_units, finished, "
                    "confidence, content) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)", rows)
    con.commit()
    return rows, current


def expected_summary(rows, current):
    best = {}
    for r in rows:
        run, mid, status, mesh, content = r[0], r[1], r[2], r[3], r[8]
        ok = status == "ok"
        key = (content == current[mid], ok, ok and mesh is not None, (mesh or 0) if ok else 0, run)
        if mid not in best or key > best[mid][0]:
            best[mid] = (key, run)
    return {mid: v[1] for mid, v in best.items()}


def expected_shc(rows):
    best = {}
    for r in rows:
        run, mid, status, mesh, shc = r[0], r[1], r[2], r[3], r[4]
        if status != "ok" or shc is None:
            continue
        key = (mesh is not None, mesh or 0, run)
        if mid not in best or key > best[mid][0]:
            best[mid] = (key, run)
    return {mid: v[1] for mid, v in best.items()}


def plan(con, sql):
    return "\n".join(r[3] for r in con.execute("EXPLAIN QUERY PLAN " + sql))


def main():
    binary, work = sys.argv[1], sys.argv[2]
    cat = make_catalogue(binary, work)
    con = sqlite3.connect(cat)
    rows, current = fill(con, random.Random(16), 2000, 4)
    errors = []
    got = {mid: run for mid, run in con.execute("SELECT material_id, run_id FROM summary")}
    want = expected_summary(rows, current)
    if got != want:
        bad = sorted(m for m in set(got) | set(want) if got.get(m) != want.get(m))
        errors.append(f"summary picks differ for {len(bad)} materials, e.g. {bad[:3]}: "
                      f"view {[got.get(m) for m in bad[:3]]}, rule {[want.get(m) for m in bad[:3]]}")
    ids = [r[0] for r in con.execute("SELECT material_id FROM summary")]
    if ids != sorted(ids):
        errors.append("summary rows are not in material_id order")
    got = {mid: run for mid, run in con.execute("SELECT material_id, run_id FROM top_spin_hall")}
    if got != expected_shc(rows):
        errors.append("top_spin_hall picks differ from the rule")
    nfail = sum(1 for r in rows if r[2] != "ok")
    if con.execute("SELECT COUNT(*) FROM failures").fetchone()[0] != nfail:
        errors.append("failures does not list every non-ok row")
    one = plan(con, "SELECT * FROM summary WHERE material_id = 'm00042'")
    if "SCAN" in one.replace("SCAN CONSTANT ROW", ""):
        errors.append("one material's summary row scans a table:\n" + one)
    fp = plan(con, "SELECT * FROM failures")
    if "results_failed" not in fp:
        errors.append("failures does not use the partial index results_failed:\n" + fp)
    rp = plan(con, "SELECT * FROM run_progress")
    if "COVERING INDEX results_progress" not in rp:
        errors.append("run_progress does not read the covering index results_progress:\n" + rp)
    sp = plan(con, "SELECT * FROM summary")
    if "WINDOW" in sp.upper() or "CO-ROUTINE" in sp:
        errors.append("the full summary materialises a window or subquery:\n" + sp)
    # The best row of the current content comes from one range of results_best, in index order:
    # one temporary b-tree (the fallback over every content) at most, not one per subquery.
    if "results_best (material_id=? AND content=?)" not in sp or sp.count("TEMP B-TREE FOR ORDER BY") > 1:
        errors.append("the summary's choice does not read results_best in order:\n" + sp)
    con.close()
    for e in errors:
        print("FAIL:", e)
    if errors:
        sys.exit(1)
    print(f"views agree with their definition on {len(rows)} rows; plans use the indexes")


if __name__ == "__main__":
    main()
