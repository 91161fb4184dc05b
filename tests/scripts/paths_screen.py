#!/usr/bin/env python3
"""`screen --paths` end to end (issue 11): families as units of work, paths stored by the
coordinator in the catalogue's path tables and the transitions view.

usage: paths_screen.py BANDSIEVE CASE WORKDIR
cases:
  transitions  a set with three families (the invented demo families and a Haldane family written
               here) screened with --paths on 2 ranks: every row of the transitions view agrees with
               `bandsieve path --family` run directly on the same family, and the closings sit where
               published theory puts them:
                 Kane-Mele, lambda_v = 3 sqrt3 lambda_SO at K/K' (Phys. Rev. Lett. 95, 226801 (2005));
                 Haldane, M = +-3 sqrt3 t2 sin phi, C changing by one (Phys. Rev. Lett. 61, 2015 (1988));
                 Fu-Kane-Mele with a staggered potential: a Weyl phase of finite width away from the
                 TRIMs with Z2 different on its two sides, nodes created and annihilated in pairs of
                 opposite chirality (New J. Phys. 9, 356 (2007); Phys. Rev. B 78, 165313 (2008)).
               A second screen --paths finds every path done; rescreen --paths --path-tol refines one
               family and replaces its rows.
  ranks        the same paths at 1, 2 and 3 ranks, and the Haldane critical masses.
  journal      a family lost with its job in two sessions is recorded failed, one lost once retried.
  resume       a screen --paths on 2 ranks is killed with SIGKILL (mpirun and its ranks) while paths
               are in flight, then resumed; the path tables are compared row by row with a one-shot
               screen --paths of the same set: nothing lost, duplicated or changed.
"""
import json
import math
import os
import re
import shutil
import signal
import sqlite3
import subprocess
import sys
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from haldane_card import haldane_card  # noqa: E402

BIN, CASE, WORK = sys.argv[1], sys.argv[2], sys.argv[3]
ENV = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1", OMPI_MCA_rmaps_base_oversubscribe="1")
PATH_OPTS = ["--path-samples", "21", "--path-track-steps", "8"]


def fail(msg):
    print(f"FAIL: {msg}", file=sys.stderr)
    sys.exit(1)


def run(args, ok=(0,)):
    p = subprocess.run(args, env=ENV, capture_output=True, text=True, timeout=900)
    if p.returncode not in ok:
        fail(f"{' '.join(args)}: exit {p.returncode}: {p.stderr[-1500:]}")
    return p


def fresh(name):
    d = os.path.join(WORK, name)
    shutil.rmtree(d, ignore_errors=True)
    os.makedirs(d)
    return d


def haldane_family(folder, family, t2, masses=(-2.0, 0.0, 2.0)):
    return [haldane_card(folder, f"{family}_m{i}", m, t2=t2, family=family) for i, m in enumerate(masses)]


def rows(cat, sql):
    con = sqlite3.connect(cat)
    try:
        return con.execute(sql).fetchall()
    finally:
        con.close()


def screen(s, cat, *extra, ranks=2):
    return run(["mpirun", "-n", str(ranks), BIN, "screen", s, "-c", cat, "--paths", *PATH_OPTS, *extra])


def direct_path(s, family):
    p = run([BIN, "path", "--family", family, s, "--samples", "21", "--track-steps", "8", "--json"])
    return json.loads(p.stdout)


def close(a, b, tol):
    return a is not None and b is not None and abs(a - b) <= tol


def check_against_direct(cat, s, family):
    """The stored path of family equals `bandsieve path --family` on the same set."""
    j = direct_path(s, family)
    tr = rows(cat, "SELECT value, value_from, value_to, kind, single_value, class_before, class_after, k1, k2, k3 "
                   f"FROM transitions WHERE family = '{family}' ORDER BY value")
    cl = j["closings"]
    if len(tr) != len(cl):
        fail(f"{family}: {len(tr)} transitions in the catalogue, {len(cl)} closings from bandsieve path")
    iv = j["intervals"]
    for t, c in zip(tr, cl):
        # Same code, settings and seed on the same members: equal to rounding of the stored text.
        if not (close(t[0], c["x"], 1e-12) and close(t[1], c["x_lo"], 1e-12) and close(t[2], c["x_hi"], 1e-12)):
            fail(f"{family}: transition at {t[0:3]} vs bandsieve path {c['x'], c['x_lo'], c['x_hi']}")
        if t[3] != c["kind"] or bool(t[4]) != c["single_value"]:
            fail(f"{family}: kind {t[3]}/{t[4]} vs {c['kind']}/{c['single_value']}")
        before = iv[c["interval_before"]]["class"] if c["interval_before"] is not None else None
        after = iv[c["interval_after"]]["class"] if c["interval_after"] is not None else None
        if (t[5], t[6]) != (before, after):
            fail(f"{family}: classes {t[5]} -> {t[6]} vs bandsieve path {before} -> {after}")
        if c["k"] and any(not close(t[7 + a], c["k"][0]["k"][a], 1e-12) for a in range(3)):
            fail(f"{family}: k {t[7:10]} vs {c['k'][0]['k']}")
    agree = [r[0] for r in rows(cat, f"SELECT prediction_agrees FROM path_events WHERE family = '{family}' "
                                     "AND kind = 'closing' ORDER BY event")]
    want = [None if c.get("symmetry_agrees") is None else int(c["symmetry_agrees"]) for c in cl]
    if agree != want:
        fail(f"{family}: stored symmetry agreement {agree} vs bandsieve path {want}")
    ns = rows(cat, f"SELECT count(*) FROM path_samples WHERE family = '{family}'")[0][0]
    nt = rows(cat, f"SELECT count(*) FROM path_tracks WHERE family = '{family}'")[0][0]
    ne = rows(cat, f"SELECT count(*) FROM path_events WHERE family = '{family}' AND kind <> 'closing'")[0][0]
    ni = rows(cat, f"SELECT count(*) FROM path_intervals WHERE family = '{family}'")[0][0]
    if (ns, nt, ne, ni) != (len(j["samples"]), len(j["node_tracks"]), len(j["events"]), len(iv)):
        fail(f"{family}: stored samples/tracks/events/intervals {(ns, nt, ne, ni)} vs bandsieve path "
             f"{(len(j['samples']), len(j['node_tracks']), len(j['events']), len(iv))}")
    return tr


def case_transitions():
    d = fresh("transitions")
    s = os.path.join(d, "set.h5")
    run([BIN, "demo-set", "-o", s, "--count", "12", "--seed", "5", "--families"])
    t2 = 0.2
    run([BIN, "pack", "-o", s, *haldane_family(d, "haldane-M", t2)])
    cat = os.path.join(d, "cat.sqlite")
    p = screen(s, cat)
    if "3 families' paths to do" not in p.stderr:
        fail(f"expected 3 paths to do: {p.stderr[-600:]}")
    # one progress line per stored path, numbered against the total
    for fam in ("JaQi1-xQox", "Jo2Qu-pressure", "haldane-M"):
        if not re.search(r"path [123]/3 " + re.escape(fam) + r": ok \(", p.stderr):
            fail(f"no progress line for the path of {fam}: {p.stderr[-600:]}")
    st = rows(cat, "SELECT family, status, nmembers FROM paths ORDER BY family")
    if st != [("JaQi1-xQox", "ok", 2), ("Jo2Qu-pressure", "ok", 5), ("haldane-M", "ok", 3)]:
        fail(f"paths rows: {st}")

    # Kane-Mele alloy (demo: lambda_SO = 0.06, lambda_v = 0.1 + 0.4 x): the gap closes at
    # lambda_v = 3 sqrt3 lambda_SO (Phys. Rev. Lett. 95, 226801 (2005)), at K and K', 2D TI -> trivial.
    # H(R) is linear in lambda_v, so the path's x is exact up to the refinement tolerance 1e-5.
    tr = check_against_direct(cat, s, "JaQi1-xQox")
    x_km = (3 * math.sqrt(3) * 0.06 - 0.1) / 0.4
    if len(tr) != 1 or not close(tr[0][0], x_km, 1e-4) or tr[0][5:7] != ("2D topological insulator", "trivial insulator"):
        fail(f"Kane-Mele: transitions {tr}, expected one at x = {x_km:.6f}, 2D TI -> trivial")
    lab = rows(cat, "SELECT k_label, at_trim, z2_before, z2_after FROM transitions WHERE family = 'JaQi1-xQox'")[0]
    if lab[0] not in ("K", "K'") or lab[1] != 0 or (lab[2], lab[3]) != ("1", "0"):
        fail(f"Kane-Mele: closing at {lab}, expected K or K', not a TRIM, Z2 1 -> 0")

    # Haldane, M from -2 to 2 eV: closings at M = -+3 sqrt3 t2 sin phi (Phys. Rev. Lett. 61, 2015
    # (1988)), trivial -> Chern insulator -> trivial, C changing by one at each.
    tr = check_against_direct(cat, s, "haldane-M")
    mc = 3 * math.sqrt(3) * t2
    ch = rows(cat, "SELECT value, class_before, class_after, chern_before, chern_after, k_label FROM transitions "
                   "WHERE family = 'haldane-M' ORDER BY value")
    if len(ch) != 2 or not close(ch[0][0], -mc, 1e-4) or not close(ch[1][0], mc, 1e-4):
        fail(f"Haldane: transitions {ch}, expected at M = -+{mc:.6f}")
    if [c[1:3] for c in ch] != [("trivial insulator", "Chern insulator"), ("Chern insulator", "trivial insulator")]:
        fail(f"Haldane: classes {ch}")
    if any(c[3] is None or c[4] is None or abs(c[3] - c[4]) != 1 for c in ch) or any(c[5] not in ("K", "K'") for c in ch):
        fail(f"Haldane: Chern numbers must change by one at K or K': {ch}")

    # Fu-Kane-Mele with the staggered potential (demo pressure series): a Weyl phase of finite width,
    # away from the TRIMs, Z2 different on its two sides (New J. Phys. 9, 356 (2007)); nodes come
    # and go in pairs, and the tracks' chiralities sum to zero (Nucl. Phys. B 185, 20 (1981)).
    tr = check_against_direct(cat, s, "Jo2Qu-pressure")
    w = rows(cat, "SELECT kind, single_value, value_to - value_from, at_trim, z2_before, z2_after FROM transitions "
                  "WHERE family = 'Jo2Qu-pressure'")
    if len(w) != 1 or w[0][0] != "Weyl phase" or w[0][1] != 0 or not w[0][2] > 1e-3 or w[0][3] != 0 or w[0][4] == w[0][5]:
        fail(f"Fu-Kane-Mele: expected one Weyl phase of finite width off the TRIMs with Z2 changing: {w}")
    created = rows(cat, "SELECT count(*) FROM path_events WHERE family = 'Jo2Qu-pressure' AND kind = 'pair created'")[0][0]
    gone = rows(cat, "SELECT count(*) FROM path_events WHERE family = 'Jo2Qu-pressure' AND kind = 'pair annihilated'")[0][0]
    chir = rows(cat, "SELECT count(*), sum(chirality) FROM path_tracks WHERE family = 'Jo2Qu-pressure'")[0]
    if created == 0 or created != gone or chir[0] != 2 * created or chir[1] != 0 or (2 * created) % 4:
        fail(f"Fu-Kane-Mele nodes: {created} pairs created, {gone} annihilated, tracks {chir}")
    pts = rows(cat, "SELECT count(*) FROM path_track_points p JOIN path_tracks t USING (family, track) "
                    "WHERE family = 'Jo2Qu-pressure'")[0][0]
    if pts != rows(cat, "SELECT sum(npoints) FROM path_tracks WHERE family = 'Jo2Qu-pressure'")[0][0]:
        fail("track points do not add up to the tracks' npoints")

    # The path figure: gap against M with the intervals shaded by class, rendered by Chromium: not
    # blank, the trivial (grey) and Chern (teal) colours of src/cli/figures.c both present.
    import figures
    svg, png = os.path.join(d, "haldane.svg"), os.path.join(d, "haldane_shot.png")
    run([BIN, "path", "--family", "haldane-M", s, "--samples", "21", "--figure", svg])
    if not figures.chromium_shot(svg, png, "1300,650"):
        fail("chromium could not render the path figure")
    total, drawn, counts = figures.colour_stats(png)
    grey, teal = figures.near(counts, (219, 219, 214), 10), figures.near(counts, (26, 133, 128), 10)
    if drawn / total < 0.3 or grey < 5000 or teal < 5000:
        fail(f"path figure: {drawn / total:.2f} drawn, {grey} trivial and {teal} Chern pixels")
    p = run([BIN, "path", "--family", "haldane-M", s, "--figure", os.path.join(d, "x.gif")], ok=(2,))
    if ".svg, .png or .pdf" not in p.stderr:
        fail(f"--figure x.gif: {p.stderr}")

    # Again: every path is done (same members, same tolerance).
    p = screen(s, cat)
    if "0 families' paths to do, 3 already done" not in p.stderr:
        fail(f"second screen --paths: {p.stderr[-600:]}")

    # rescreen --paths refines the Kane-Mele family at 1e-7 and replaces its rows in one go.
    old = rows(cat, "SELECT value_from, value_to FROM transitions WHERE family = 'JaQi1-xQox'")[0]
    run(["mpirun", "-n", "2", BIN, "rescreen", s, "-c", cat, "--where", "material_id = 'JQF-JaQi'", "--paths",
         "--path-tol", "1e-7", *PATH_OPTS[:2]])
    new = rows(cat, "SELECT value, value_from, value_to, tol_x FROM transitions WHERE family = 'JaQi1-xQox'")
    if len(new) != 1 or new[0][3] != 1e-7 or not (new[0][2] - new[0][1]) < (old[1] - old[0]) or not close(new[0][0], x_km, 1e-6):
        fail(f"rescreen --paths: {new} (before: {old}); expected one finer bracket at x = {x_km:.7f}")
    n = rows(cat, "SELECT count(*) FROM paths")[0][0]
    if n != 3:
        fail(f"{n} paths rows after the rescreen, expected 3")
    print(f"transitions: 3 families agree with bandsieve path; Kane-Mele x = {x_km:.6f}, "
          f"Haldane M = +-{mc:.5f}, Weyl phase of width {w[0][2]:.4f}; rescreen bracket {new[0][2] - new[0][1]:.2e}")


def descendants(pid):
    """Process ids below pid (mpirun puts its ranks in process groups of their own)."""
    out, todo = [], [pid]
    while todo:
        p = todo.pop()
        try:
            for t in os.listdir(f"/proc/{p}/task"):
                with open(f"/proc/{p}/task/{t}/children") as f:
                    kids = [int(x) for x in f.read().split()]
                out += kids
                todo += kids
        except OSError:
            pass
    return out


def kill_job(proc):
    """SIGKILL to mpirun and every rank at once, as a scheduler's hard kill does."""
    for pid in [proc.pid] + descendants(proc.pid):
        try:
            os.kill(pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
    proc.wait()


def path_dump(cat):
    """Every path row that must not depend on how the job was run (no times, ranks or runs)."""
    out = []
    for t, cols in (("paths", "family, status, parameter, x_from, x_to, nmembers, content, tol_x, nsamples, confidence"),
                    ("path_samples", "family, sample, x, gap_direct_ev"),
                    ("path_intervals", "family, interval, x_from, x_to, gapless, class, z2, chern"),
                    ("path_events", "family, event, kind, x, x_lo, x_hi, transition, k1, k2, k3"),
                    ("path_tracks", "family, track, chirality, npoints"),
                    ("path_track_points", "family, track, point, x, k1, k2, k3")):
        out.append((t, rows(cat, f"SELECT {cols} FROM {t} ORDER BY 1, 2, 3")))
    return out


def case_resume():
    d = fresh("resume")
    cards = []
    for i in range(8):
        cards += haldane_family(d, f"haldane-{i}", 0.1 + 0.02 * i, masses=(-2.0, -1.0, 0.0, 1.0, 2.0))
    s = os.path.join(d, "set.h5")
    run([BIN, "pack", "-o", s, *cards])
    ref = os.path.join(d, "ref.sqlite")
    screen(s, ref, "--path-samples", "41")
    want = path_dump(ref)
    cat = os.path.join(d, "cat.sqlite")
    kills = 0
    for attempt in range(3):
        proc = subprocess.Popen(["mpirun", "-n", "2", BIN, "screen", s, "-c", cat, "--paths", *PATH_OPTS,
                                 "--path-samples", "41"],
                                env=ENV, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
        deadline = time.monotonic() + 300
        done = 0
        while proc.poll() is None and time.monotonic() < deadline:
            try:
                done = rows(cat, "SELECT count(*) FROM paths")[0][0]
            except sqlite3.Error:
                done = 0
            if done >= 2 + 2 * attempt:
                break
            time.sleep(0.01)
        if proc.poll() is None:
            kill_job(proc)
            left = rows(cat, "SELECT count(*) FROM paths")[0][0]
            if left < 8:
                kills += 1
        if rows(cat, "SELECT count(*) FROM paths")[0][0] >= 8:
            break
    if kills == 0:
        fail("no kill landed while paths were left to do")
    screen(s, cat, "--path-samples", "41")
    got = path_dump(cat)
    for (t, a), (_, b) in zip(want, got):
        if a != b:
            diff = [(x, y) for x, y in zip(a, b) if x != y][:2]
            fail(f"{t}: {len(b)} rows after {kills} kills vs {len(a)} in the one-shot screen; first differences {diff}")
    dup = rows(cat, "SELECT count(*) FROM (SELECT family, event FROM path_events GROUP BY 1, 2 HAVING count(*) > 1)")[0][0]
    runs = rows(cat, "SELECT count(*), max(sessions) FROM runs")[0]
    if dup or runs[0] != 1:
        fail(f"{dup} duplicated events, {runs[0]} runs")
    print(f"resume: {kills} SIGKILLs during the path phase, {runs[1]} sessions in one run; "
          f"{sum(len(r) for _, r in got)} path rows equal to the one-shot screen")


def kill_in_path_phase(s, cat, after, total):
    """Starts screen --paths on 2 ranks and kills it (SIGKILL to mpirun and the ranks) once `after`
    paths are stored; returns the number of paths stored then (< total, else the test fails)."""
    proc = subprocess.Popen(["mpirun", "-n", "2", BIN, "screen", s, "-c", cat, "--paths", *PATH_OPTS, "--path-samples", "41"],
                            env=ENV, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, start_new_session=True)
    deadline = time.monotonic() + 300
    while proc.poll() is None and time.monotonic() < deadline:
        try:
            if rows(cat, "SELECT count(*) FROM paths")[0][0] >= after:
                break
        except sqlite3.Error:
            pass
        time.sleep(0.01)
    if proc.poll() is not None:
        fail("the screen ended before the kill")
    kill_job(proc)
    n = rows(cat, "SELECT count(*) FROM paths")[0][0]
    if n >= total:
        fail("every path was stored before the kill landed")
    return n


def case_journal():
    """A family whose path was in flight when its job died in two sessions is recorded failed on the
    next resume (otherwise a path that crashes its worker would take every resume down); one loss
    is retried. The deaths are written to the hand-out journal as a worker crash under MPI leaves
    them (handed out, never received), beside one real SIGKILL in the path phase."""
    d = fresh("journal")
    cards = []
    for i in range(6):
        cards += haldane_family(d, f"haldane-{i}", 0.1 + 0.02 * i, masses=(-2.0, -1.0, 0.0, 1.0, 2.0))
    s = os.path.join(d, "set.h5")
    run([BIN, "pack", "-o", s, *cards])
    cat = os.path.join(d, "cat.sqlite")
    kill_in_path_phase(s, cat, 1, 6)
    stored = {f for (f,) in rows(cat, "SELECT family FROM paths")}
    missing = [f"haldane-{i}" for i in range(6) if f"haldane-{i}" not in stored]
    # The first missing family was in flight at the kill (families go out in order, one per worker):
    # it has a strike of its own, so the invented ones go to two others.
    if len(missing) < 3:
        fail(f"only {len(missing)} paths missing after the kill")
    twice, once = missing[-1], missing[-2]
    run_id = rows(cat, "SELECT max(run_id) FROM runs")[0][0]
    with open(cat + ".journal", "a") as j:
        j.write(f"H {run_id} crashed.1 path:{twice}\nH {run_id} crashed.1 path:{once}\nH {run_id} crashed.2 path:{twice}\n")
    p = screen(s, cat, "--path-samples", "41")
    st = dict(rows(cat, "SELECT family, status FROM paths"))
    msg = rows(cat, f"SELECT message FROM paths WHERE family = '{twice}'")[0][0]
    mats = rows(cat, "SELECT count(*) FROM results WHERE material_id LIKE 'path:%'")[0][0]
    if len(st) != 6 or st[twice] != "failed" or "died" not in (msg or "") or st[once] != "ok" or mats:
        fail(f"after the resume: {st}, message {msg!r}, {mats} result rows named after paths; {p.stderr[-400:]}")
    p = screen(s, cat, "--path-samples", "41")
    if "0 families' paths to do, 6 already done" not in p.stderr:
        fail(f"the failed path must not be retried by the same screen: {p.stderr[-400:]}")
    print(f"journal: {twice} (lost twice) recorded failed, {once} (lost once) retried and ok")


def case_ranks():
    """The same families screened with --paths at 1, 2 and 3 ranks give the same path rows (a path
    depends only on its family, whichever rank computes it), and each family is stored once."""
    d = fresh("ranks")
    cards = []
    for i in range(4):
        cards += haldane_family(d, f"haldane-{i}", 0.1 + 0.05 * i)
    s = os.path.join(d, "set.h5")
    run([BIN, "pack", "-o", s, *cards])
    dumps = []
    for ranks in (1, 2, 3):
        cat = os.path.join(d, f"cat{ranks}.sqlite")
        run(["mpirun", "--oversubscribe", "-n", str(ranks), BIN, "screen", s, "-c", cat, "--paths", *PATH_OPTS])
        dumps.append(path_dump(cat))
        used = rows(cat, "SELECT count(DISTINCT rank), count(*) FROM paths")[0]
        if used[1] != 4 or (ranks == 3 and used[0] != 2):
            fail(f"{ranks} ranks: {used[1]} paths from {used[0]} distinct ranks (3 ranks: 2 workers expected)")
        # Haldane closings at M = -+3 sqrt3 t2 (Phys. Rev. Lett. 61, 2015 (1988)), every family.
        for fam, t2v in ((f"haldane-{i}", 0.1 + 0.05 * i) for i in range(4)):
            v = [r[0] for r in rows(cat, f"SELECT value FROM transitions WHERE family = '{fam}' ORDER BY value")]
            mc = 3 * math.sqrt(3) * t2v
            if len(v) != 2 or not close(v[0], -mc, 1e-4) or not close(v[1], mc, 1e-4):
                fail(f"{ranks} ranks, {fam}: closings {v}, expected -+{mc:.6f}")
    for ranks, got in zip((2, 3), dumps[1:]):
        if got != dumps[0]:
            fail(f"path rows at {ranks} ranks differ from 1 rank")
    print(f"ranks: 4 families, identical path rows at 1, 2 and 3 ranks ({sum(len(r) for _, r in dumps[0])} rows)")


CASES = {"transitions": case_transitions, "resume": case_resume, "ranks": case_ranks, "journal": case_journal}

if __name__ == "__main__":
    if CASE not in CASES:
        fail(f"unknown case {CASE}")
    os.makedirs(WORK, exist_ok=True)
    CASES[CASE]()
