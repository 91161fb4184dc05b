#!/usr/bin/env python3
"""End-to-end tests of `bandsieve screen`, `rescreen` and `query` under mpirun.

The catalogue is read back with Python's own sqlite3 module (an independent SQLite client), so the
checks do not go through our query code. Usage: pipeline_test.py BINARY CASE WORKDIR
CASE is one of: ranks, resume, broken, query_rescreen.
"""
import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import time

BIN, CASE, WORK = sys.argv[1], sys.argv[2], sys.argv[3]
ENV = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1",
           OMPI_MCA_rmaps_base_oversubscribe="1")
# Columns of summary that must not depend on the rank count or on interruptions.
COLS = ("material_id, status, class, gap_direct_ev, gap_indirect_ev, z2, chern, n_weyl, "
        "net_chirality, confidence, mesh")


def run(args, check=True, **kw):
    p = subprocess.run(args, env=ENV, capture_output=True, text=True, **kw)
    if check and p.returncode not in (0, 1):
        sys.exit(f"command failed ({p.returncode}): {' '.join(args)}\n{p.stdout}\n{p.stderr}")
    return p


def screen_cmd(ranks, set_path, cat, *extra):
    base = [BIN, "screen", set_path, "-c", cat, *extra]
    if ranks == 1:
        return base
    return ["mpirun", "-n", str(ranks), "--oversubscribe"] + base


def summary(cat):
    con = sqlite3.connect(cat)
    rows = con.execute(f"SELECT {COLS} FROM summary ORDER BY material_id").fetchall()
    con.close()
    return rows


def fresh(name):
    d = os.path.join(WORK, name)
    shutil.rmtree(d, ignore_errors=True)
    os.makedirs(d)
    return d


def make_set(d, count, seed=7):
    path = os.path.join(d, "set.h5")
    run([BIN, "demo-set", "-o", path, "--count", str(count), "--seed", str(seed)])
    return path


def fail(msg):
    print("FAIL:", msg)
    sys.exit(1)


def case_ranks():
    """1, 2 and 3 ranks give identical summary rows (timing and rank columns excluded)."""
    d = fresh("ranks")
    s = make_set(d, 40)
    results = {}
    for ranks in (1, 2, 3):
        cat = os.path.join(d, f"cat{ranks}.sqlite")
        run(screen_cmd(ranks, s, cat))
        results[ranks] = summary(cat)
    if len(results[1]) != 40:
        fail(f"expected 40 summary rows, found {len(results[1])}")
    for ranks in (2, 3):
        if results[ranks] != results[1]:
            diff = [(a, b) for a, b in zip(results[1], results[ranks]) if a != b][:3]
            fail(f"{ranks} ranks differ from 1 rank: {diff}")
    print("ok: 1, 2 and 3 ranks agree on", len(results[1]), "rows")


def case_resume():
    """SIGKILL part-way, resume, and compare with an uninterrupted run."""
    d = fresh("resume")
    s = make_set(d, 60, seed=11)
    ref = os.path.join(d, "ref.sqlite")
    run(screen_cmd(1, s, ref, "--mesh", "20"))
    want = summary(ref)
    for ranks in (1, 2):
        cat = os.path.join(d, f"killed{ranks}.sqlite")
        p = subprocess.Popen(screen_cmd(ranks, s, cat, "--mesh", "20", "--batch", "4"), env=ENV,
                             stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
        # Wait until some results are committed, then kill the whole process group at once.
        deadline = time.time() + 120
        committed = 0
        while time.time() < deadline and p.poll() is None:
            time.sleep(0.2)
            try:
                con = sqlite3.connect(f"file:{cat}?mode=ro", uri=True, timeout=1)
                committed = con.execute("SELECT COUNT(*) FROM results").fetchone()[0]
                con.close()
            except sqlite3.Error:
                continue
            if committed >= 12:
                break
        if p.poll() is not None:
            fail(f"screen finished before it could be killed ({committed} rows); make the set larger")
        # A scheduler's kill takes every process of the job: mpirun's process group, and the
        # ranks, which Open MPI starts in process groups of their own.
        os.killpg(p.pid, signal.SIGKILL)
        subprocess.run(["pkill", "-KILL", "-f", cat])
        p.wait()
        time.sleep(0.5)
        con = sqlite3.connect(cat)
        partial = con.execute("SELECT COUNT(*) FROM results").fetchone()[0]
        con.close()
        if not (0 < partial < 60):
            fail(f"killed run kept {partial} rows, expected some but not all")
        r = run(screen_cmd(ranks, s, cat, "--mesh", "20"))
        if "resumed" not in r.stderr:
            fail("the second screen did not say it resumed:\n" + r.stderr)
        con = sqlite3.connect(cat)
        if con.execute("PRAGMA integrity_check").fetchone()[0] != "ok":
            fail("integrity_check failed after the kill")
        dup = con.execute("SELECT COUNT(*) FROM (SELECT run_id, material_id FROM results "
                          "GROUP BY run_id, material_id HAVING COUNT(*) > 1)").fetchone()[0]
        nrows = con.execute("SELECT COUNT(*) FROM results").fetchone()[0]
        nruns = con.execute("SELECT COUNT(DISTINCT run_id) FROM results").fetchone()[0]
        con.close()
        if dup or nrows != 60 or nruns != 1:
            fail(f"after resume: {nrows} rows, {dup} duplicated, {nruns} runs (want 60, 0, 1)")
        if summary(cat) != want:
            fail(f"resumed catalogue ({ranks} ranks) differs from the uninterrupted one")
        print(f"ok: killed at {partial} committed rows with {ranks} rank(s), resumed to the same 60 rows")


def case_broken():
    """Every broken entry is one invalid row with a message naming the set path; the run goes on."""
    d = fresh("broken")
    s = make_set(d, 100, seed=3)
    cat = os.path.join(d, "cat.sqlite")
    r = run(screen_cmd(2, s, cat))
    if r.returncode != 1:
        fail(f"exit status {r.returncode} with broken entries, expected 1")
    con = sqlite3.connect(cat)
    rows = con.execute("SELECT material_id, status, message FROM results ORDER BY material_id").fetchall()
    con.close()
    if len(rows) != 100:
        fail(f"{len(rows)} rows for 100 entries")
    bad = [r for r in rows if r[1] != "ok"]
    # demo_entry puts max(count / 50, 4) broken entries in a set: 4 here.
    if len(bad) != 4 or any(r[1] != "invalid" for r in bad):
        fail(f"expected 4 invalid rows, got {bad}")
    for mid, _, msg in bad:
        if not msg or (s not in msg and "cards/" not in msg):
            fail(f"message of {mid} does not name where: {msg!r}")
    if "4 invalid" not in r.stderr:
        fail("the closing summary line does not count the invalid rows:\n" + r.stderr)
    # Screening the finished catalogue again (the set named another way) does nothing new.
    r = run(screen_cmd(1, os.path.join(d, ".", "set.h5"), cat))
    con = sqlite3.connect(cat)
    n_after = con.execute("SELECT COUNT(*) FROM results").fetchone()[0]
    con.close()
    if n_after != 100 or "0 materials to do, 100 already done" not in r.stderr:
        fail(f"a repeated screen redid work ({n_after} rows):\n" + r.stderr)
    print("ok: 4 broken entries gave 4 invalid rows with messages; 96 ok")


def case_query_rescreen():
    d = fresh("query")
    s = make_set(d, 30, seed=5)
    cat = os.path.join(d, "cat.sqlite")
    run(screen_cmd(1, s, cat))
    before = os.path.getsize(cat)
    con = sqlite3.connect(cat)
    n_before = con.execute("SELECT COUNT(*) FROM results").fetchone()[0]
    con.close()
    for sql in ("DELETE FROM results", "UPDATE results SET class = 'x'", "DROP TABLE results",
                "INSERT INTO runs(run_id) VALUES (999)", "SELECT 1; DELETE FROM results"):
        r = run([BIN, "query", cat, sql], check=False)
        if r.returncode == 0:
            fail(f"query accepted a write: {sql}")
    con = sqlite3.connect(cat)
    if con.execute("SELECT COUNT(*) FROM results").fetchone()[0] != n_before:
        fail("a refused write changed the catalogue")
    con.close()
    r = run([BIN, "query", cat, "SELECT COUNT(*) AS n FROM summary", "--format", "csv"])
    if r.stdout.strip().splitlines()[-1].strip() != "30":
        fail("csv query did not count 30 rows: " + r.stdout)
    # Rescreen the 2D entries at a finer mesh: they must be selected and then win in summary.
    con = sqlite3.connect(cat)
    want = {row[0] for row in con.execute("SELECT material_id FROM summary s JOIN materials m USING (material_id) "
                                          "WHERE m.dimension = 2 AND s.status = 'ok'")}
    con.close()
    r = run(["mpirun", "-n", "2", "--oversubscribe", BIN, "rescreen", s, "-c", cat, "--where",
             "status = 'ok' AND material_id IN (SELECT material_id FROM materials WHERE dimension = 2)",
             "--mesh", "48"])
    if f"{len(want)} materials selected" not in r.stderr:
        fail(f"rescreen did not announce {len(want)} selected:\n" + r.stderr)
    con = sqlite3.connect(cat)
    got = {row[0]: row[1] for row in con.execute("SELECT material_id, mesh FROM summary")}
    con.close()
    if not want or any(got[m] != 48 for m in want):
        fail(f"summary does not show the rescreened mesh for {sorted(want)}: {got}")
    # Without --mesh a rescreen doubles each dimension's default (3D: 14 -> 28), so it still wins.
    con = sqlite3.connect(cat)
    want3 = {row[0] for row in con.execute("SELECT material_id FROM summary s JOIN materials m USING (material_id) "
                                           "WHERE m.dimension = 3 AND s.status = 'ok'")}
    con.close()
    run([BIN, "rescreen", s, "-c", cat, "--where",
         "status = 'ok' AND material_id IN (SELECT material_id FROM materials WHERE dimension = 3)"])
    con = sqlite3.connect(cat)
    got = {row[0]: row[1] for row in con.execute("SELECT material_id, mesh FROM summary")}
    con.close()
    if not want3 or any(got[m] != 28 for m in want3):
        fail(f"a rescreen without --mesh did not win for the 3D entries: {got}")
    print(f"ok: writes refused ({before} bytes unchanged in rows); rescreens of {len(want)} and {len(want3)} "
          "entries win")


def kill_part_way(cmd, cat, rows):
    p = subprocess.Popen(cmd, env=ENV, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.time() + 120
    while time.time() < deadline and p.poll() is None:
        time.sleep(0.2)
        try:
            con = sqlite3.connect(f"file:{cat}?mode=ro", uri=True, timeout=1)
            n = con.execute("SELECT COUNT(*) FROM results").fetchone()[0]
            con.close()
        except sqlite3.Error:
            continue
        if n >= rows:
            break
    if p.poll() is not None:
        fail("screen finished before it could be killed")
    os.killpg(p.pid, signal.SIGKILL)
    subprocess.run(["pkill", "-KILL", "-f", cat])
    p.wait()


def case_crash_journal():
    """A material that was in flight when its job died in two sessions is recorded failed on the
    next resume (it would otherwise take every resume down); one loss is retried."""
    d = fresh("journal")
    s = make_set(d, 60, seed=11)
    cat = os.path.join(d, "cat.sqlite")
    kill_part_way(screen_cmd(1, s, cat, "--mesh", "20", "--batch", "4"), cat, 8)
    con = sqlite3.connect(cat)
    done = {m for (m,) in con.execute("SELECT material_id FROM results")}
    run_id = con.execute("SELECT MAX(run_id) FROM runs").fetchone()[0]
    con.close()
    ids = [f"JQ-{i:04d}" for i in range(1, 61) if f"JQ-{i:04d}" not in done]
    twice, once = ids[-1], ids[-2]
    # Two earlier sessions that died with `twice` in flight, one with `once` (what a worker crash
    # under MPI leaves in the journal: handed out, never received).
    with open(cat + ".journal", "a") as j:
        j.write(f"H {run_id} crashed.1 {twice}\nH {run_id} crashed.1 {once}\nH {run_id} crashed.2 {twice}\n")
    # The set named another way (./) must still find the run to resume.
    run(screen_cmd(1, os.path.join(d, ".", "set.h5"), cat, "--mesh", "20"))
    con = sqlite3.connect(cat)
    st = dict(con.execute("SELECT material_id, status FROM results").fetchall())
    msg = con.execute("SELECT message FROM results WHERE material_id = ?", (twice,)).fetchone()[0]
    con.close()
    if len(st) != 60:
        fail(f"{len(st)} rows after resume, want 60")
    if st[twice] != "failed" or "died" not in (msg or ""):
        fail(f"{twice} lost in two sessions: status {st[twice]}, message {msg!r}")
    if st[once] == "failed":
        fail(f"{once} lost once was not retried")
    print(f"ok: {twice} (lost twice) recorded failed, {once} (lost once) retried: {st[once]}")


def case_groups():
    """--group-size: the last ranks form a group that diagonalises the larger materials together
    through ScaLAPACK (lockstep, results broadcast from the group's first rank); the catalogue must
    be the one a single rank writes (classes and indices exact, gaps to 1e-6 eV: ScaLAPACK and
    LAPACK agree to ~1e-14 relative, tests/scripts/surface_pzheev), and the group's leader must have
    done exactly the materials of at least --group-min-states states."""
    d = fresh("groups")
    s = make_set(d, 24, seed=5)
    ref = os.path.join(d, "ref.sqlite")
    run(screen_cmd(1, s, ref))
    cat = os.path.join(d, "grp.sqlite")
    run(screen_cmd(4, s, cat, "--group-size", "2", "--group-min-states", "4"))
    q = ("SELECT material_id, status, class, round(gap_direct_ev, 6), z2, chern, n_weyl, net_chirality "
         "FROM summary ORDER BY material_id")
    a = sqlite3.connect(ref).execute(q).fetchall()
    con = sqlite3.connect(cat)
    b = con.execute(q).fetchall()
    ranks = dict(con.execute("SELECT r.material_id, r.rank FROM results r JOIN materials m USING (material_id) "
                             "WHERE r.status = 'ok'").fetchall())
    big = {m for (m,) in con.execute("SELECT material_id FROM materials WHERE norb >= 4")}
    con.close()
    if a != b:
        fail(f"group run differs from one rank: {[(x, y) for x, y in zip(a, b) if x != y][:3]}")
    wrong = [m for m, r in ranks.items() if (r == 2) != (m in big)]
    if wrong:
        fail(f"materials on the wrong kind of worker: {wrong} (ranks {ranks})")
    print(f"ok: group of 2 did {sum(1 for r in ranks.values() if r == 2)} large materials, the single rank the "
          "rest; catalogue equal to one rank's")


def case_surfaces_transport():
    """screen --surfaces --transport stores the extra evidence, and it obeys the published
    correspondences: a 2D TI ribbon has an odd number of edge crossings per edge (Phys. Rev. Lett.
    95, 226801 (2005)); a 2D Chern insulator has sigma_xy = C e^2/h (Phys. Rev. Lett. 49, 405
    (1982)); with time reversal sigma_xy = 0 (common practice)."""
    d = fresh("surfaces")
    s = make_set(d, 24, seed=2026)
    cat = os.path.join(d, "cat.sqlite")
    run(screen_cmd(2, s, cat, "--surfaces", "--transport"))
    con = sqlite3.connect(cat)
    rows = con.execute("SELECT material_id, class, crossings_top, crossings_bottom FROM surfaces").fetchall()
    want = {m for (m,) in con.execute("SELECT material_id FROM summary WHERE class IN ('strong topological "
                                      "insulator', 'weak topological insulator', '2D topological insulator', "
                                      "'Chern insulator')")}
    hall = con.execute("SELECT s.material_id, s.class, r.chern, r.ahc_xy, r.time_reversal FROM summary s JOIN results r "
                       "USING (run_id, material_id) WHERE s.status = 'ok' AND r.ahc_xy IS NOT NULL").fetchall()
    con.close()
    if {r[0] for r in rows} != want or not want:
        fail(f"surfaces view rows {sorted(r[0] for r in rows)} != nontrivial insulators {sorted(want)}")
    n2d = 0
    for mid, cls, top, bottom in rows:
        if cls == "2D topological insulator":
            n2d += 1
            if top % 2 != 1 or bottom % 2 != 1:
                fail(f"{mid}: 2D TI ribbon with even edge crossings ({top}, {bottom})")
    nchern = 0
    for mid, cls, chern, ahc, tr in hall:
        if cls == "Chern insulator" and chern is not None:
            nchern += 1
            # 1e-2 e^2/h: the adaptive integration's default tolerance is 1e-3 (transport.h).
            if abs(ahc - chern) > 1e-2:
                fail(f"{mid}: sigma_xy {ahc} e^2/h, Chern number {chern}")
        if tr and cls != "metal" and abs(ahc) > 1e-2:
            fail(f"{mid}: time-reversal-symmetric {cls} with sigma_xy {ahc}")
    print(f"ok: {len(rows)} surface rows ({n2d} 2D TIs odd), {nchern} Chern insulators with sigma = C, "
          f"{len(hall)} Hall values")


{"ranks": case_ranks, "crash_journal": case_crash_journal, "groups": case_groups, "surfaces_transport": case_surfaces_transport, "resume": case_resume, "broken": case_broken,
 "query_rescreen": case_query_rescreen}[CASE]()
