#!/usr/bin/env python3
"""Scale benchmark (not a test): what grows with the size of a screen, timed for this build and,
when given, for an older binary in the same run, so every figure is also a ratio measured on the
same machine at the same time. Run through bench/bench_scale.sh; see its header for usage.

Figures (each best of --repeat runs; the machine may be shared, so the ratios are what counts):
  * rescreen set-up: `rescreen --where 1 --max-seconds 0.5` over a set and a catalogue of N
    entries, so the job reads the selection, builds the work list, writes the material rows and
    stops before handing anything out (wall time of the process, MPI start-up included);
  * catalogue views on a synthetic catalogue of N materials and 1.1 N results (every material in
    one screen run, every tenth again in a rescreen at a higher mesh, every 50th failed), each
    catalogue made by its own binary so that it has that version's views and indexes: one
    material's summary row, the full summary and candidates (every column of each program's view,
    and the old program's columns selected by name from both), failures, run_progress;
  * the coordinator's CPU time per result (`screen` with 1 coordinator and 2 workers on a set of
    entries that cost a worker one read each), as results per second of coordinator CPU;
  * `inspect` of a 64-state model: CPU time (user + system) and wall time with the default
    settings, and with two BLAS threads;
  * workers' busy fraction on materials of about 1 ms (`screen` with 1 coordinator and 2 workers,
    and with 1 worker): the same set of error entries, with bench/busy_preload.c loaded into every
    rank (LD_PRELOAD; nothing in the program knows of it) so that each worker spends
    --busy-us microseconds of CPU in a loop whenever it opens a material; the fraction is the sum of
    the workers' seconds per material (as the catalogue records them) over the run's wall time
    (runs.started to runs.ended) times the number of workers.
The synthetic rows and the 64-state model are invented test data (no physics).
"""
import argparse
import math
import os
import random
import shutil
import subprocess
import sys
import tempfile
import time

ENV = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1")
# The BLAS figures compare defaults: no thread variable may leak in from the caller.
for _v in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS", "BLIS_NUM_THREADS",
           "BS_BLAS_THREADS"):
    ENV.pop(_v, None)


def log(*a):
    print(*a, file=sys.stderr, flush=True)


def run(args, env=None, check=True, timeout=None):
    p = subprocess.run(args, env=env or ENV, capture_output=True, text=True, timeout=timeout)
    if check and p.returncode != 0:
        sys.exit(f"bench_scale: command failed ({p.returncode}): {' '.join(args)}\n{p.stderr[-2000:]}")
    return p


def wall(args, env=None):
    t = time.perf_counter()
    run(args, env=env, check=False)
    return time.perf_counter() - t


def cpu_wall(args, env=None):
    """(user + system CPU seconds, wall seconds) of one command, from /usr/bin/time."""
    p = run(["/usr/bin/time", "-f", "BENCHTIME %U %S %e", *args], env=env, check=False)
    line = [l for l in p.stderr.splitlines() if l.startswith("BENCHTIME")][-1].split()
    return float(line[1]) + float(line[2]), float(line[3])


# ---- synthetic data ----

def make_set(bench_set, path, n):
    if not os.path.exists(path):
        log(f"  set of {n} entries")
        run([bench_set, path, str(n)])


SYNTH_SQL = """
PRAGMA journal_mode = WAL;
PRAGMA synchronous = OFF;
BEGIN;
INSERT INTO runs (run_id, kind, status, started, ended, version, settings, ranks, set_path)
VALUES (1000, 'screen', 'done', '2026-01-01T00:00:00.000Z', '2026-01-01T01:00:00.000Z', 'bench',
        '{{"mesh":14}}', 3, '{set}'),
       (1001, 'rescreen', 'done', '2026-01-02T00:00:00.000Z', '2026-01-02T01:00:00.000Z', 'bench',
        '{{"mesh":28}}', 3, '{set}');
WITH RECURSIVE c(i) AS (SELECT 0 UNION ALL SELECT i + 1 FROM c WHERE i < {n} - 1)
INSERT INTO materials (material_id, dimension, norb, nr, nocc, spinful, set_path, updated)
SELECT printf('s%07d', i), 3, 16, 27, 8, 1, '{set}', '2026-01-01T00:00:00.000Z' FROM c;
WITH RECURSIVE c(i) AS (SELECT 0 UNION ALL SELECT i + 1 FROM c WHERE i < {n} - 1)
INSERT INTO results (run_id, material_id, status, message, class, confidence, reason, gap_direct_ev,
                     gap_indirect_ev, time_reversal, inversion, z2, chern, plane_chern, n_weyl,
                     net_chirality, nodal_line, mesh, diag_seconds, seconds, rank, finished)
SELECT 1000, printf('s%07d', i),
       CASE WHEN i % 50 = 7 THEN 'failed' ELSE 'ok' END,
       CASE WHEN i % 50 = 7 THEN 'eigensolver did not converge (invented)' END,
       CASE WHEN i % 50 = 7 THEN NULL WHEN i % 3 = 0 THEN 'strong topological insulator'
            ELSE 'trivial insulator' END,
       0.5 + 0.5 * (i % 97) / 97.0, 'invented benchmark row',
       0.001 * (i % 500), 0.0008 * (i % 500), 1, i % 2,
       CASE WHEN i % 3 = 0 THEN '1;000' ELSE '0;000' END, NULL, '0;0;0;0;0;0', 0, 0, 0,
       14, 0.1, 0.11, 1 + i % 2, '2026-01-01T00:30:00.000Z'
FROM c;
WITH RECURSIVE c(i) AS (SELECT 0 UNION ALL SELECT i + 10 FROM c WHERE i < {n} - 10)
INSERT INTO results (run_id, material_id, status, class, confidence, reason, gap_direct_ev,
                     gap_indirect_ev, time_reversal, inversion, z2, plane_chern, n_weyl,
                     net_chirality, nodal_line, mesh, diag_seconds, seconds, rank, finished)
SELECT 1001, printf('s%07d', i), 'ok',
       CASE WHEN i % 3 = 0 THEN 'strong topological insulator' ELSE 'trivial insulator' END,
       0.9, 'invented benchmark row (rescreen)', 0.001 * (i % 500), 0.0008 * (i % 500), 1, i % 2,
       CASE WHEN i % 3 = 0 THEN '1;000' ELSE '0;000' END, '0;0;0;0;0;0', 0, 0, 0,
       28, 0.8, 0.81, 1 + i % 2, '2026-01-02T00:30:00.000Z'
FROM c;
COMMIT;
PRAGMA wal_checkpoint(TRUNCATE);
"""


def set_contents(path, n):
    """Where the schema has content hashes, the materials and their rows carry the hash the set's
    error entries have (bench_scale_set: SHA-256 of "bandsieve-error-1 <id> <code> <message>"), as
    after a screen of that set, so a rescreen finds every material current."""
    import hashlib
    import sqlite3
    con = sqlite3.connect(path)
    if "content" not in [r[1] for r in con.execute("PRAGMA table_info(materials)")]:
        con.close()
        return
    msg = "benchmark entry without data (invented)"
    hashes = [(hashlib.sha256(f"bandsieve-error-1 s{i:07d} -1 {msg}".encode()).hexdigest(), f"s{i:07d}")
              for i in range(n)]
    con.execute("PRAGMA synchronous = OFF")
    con.executemany("UPDATE materials SET content = ? WHERE material_id = ?", hashes)
    con.executemany("UPDATE results SET content = ? WHERE material_id = ?", hashes)
    con.commit()
    con.close()


def make_catalogue(binary, work, tag, set_path, n):
    """A catalogue made by `binary` (its schema, views and indexes), filled with the synthetic rows."""
    path = os.path.join(work, f"cat_{tag}_{n}.sqlite")
    if os.path.exists(path):
        return path
    log(f"  catalogue of {n} materials for {tag}")
    tiny = os.path.join(work, "tiny.h5")
    if not os.path.exists(tiny):
        run([binary, "demo-set", "-o", tiny, "--count", "12", "--seed", "5"])
    # A screen that stops before its first hand-out: the binary creates the file its way.
    run([binary, "screen", tiny, "-c", path, "--max-seconds", "0.5"], check=False)
    if not os.path.exists(path):
        sys.exit(f"bench_scale: {binary} did not create {path}")
    sql = SYNTH_SQL.format(n=n, set=set_path)
    p = subprocess.run(["sqlite3", path], input=sql, capture_output=True, text=True)
    if p.returncode != 0:
        sys.exit(f"bench_scale: filling {path}: {p.stderr}")
    set_contents(path, n)
    # The screen above added its own run; only the synthetic ones stay.
    run(["sqlite3", path, "DELETE FROM run_sessions WHERE run_id < 1000; DELETE FROM runs WHERE run_id < 1000;"
         " DELETE FROM materials WHERE material_id NOT LIKE 's%'; VACUUM;"])
    for f in (path + ".journal",):
        if os.path.exists(f):
            os.remove(f)
    return path


# ---- figures ----

def rescreen_setup(binary, work, set_path, cat, repeat):
    best = math.inf
    for _ in range(repeat):
        copy = os.path.join(work, "rescreen.sqlite")
        for f in (copy, copy + "-wal", copy + "-shm", copy + ".journal", copy + ".lock"):
            if os.path.exists(f):
                os.remove(f)
        shutil.copyfile(cat, copy)
        best = min(best, wall([binary, "rescreen", set_path, "-c", copy, "--where", "1",
                               "--max-seconds", "0.5"]))
    return best


# The columns that the old program's summary has (new ones came later: content, current, contents,
# the symmetry columns): selected by name from both, the two print the same rows and columns.
OLD_SUMMARY_COLUMNS = ("material_id, formula, dimension, status, class, confidence, gap_direct_ev, "
                       "gap_indirect_ev, z2, chern, plane_chern, n_weyl, net_chirality, nodal_line, "
                       "nontrivial, mesh, run_id, finished, reason, message, ahc_xy, ahc_yz, ahc_zx, "
                       "ahc_units, shc_xy, shc_units")

QUERIES = [
    ("summary, one material", "SELECT * FROM summary WHERE material_id = 's{mid:07d}';"),
    ("summary, all rows", "SELECT * FROM summary;"),
    ("candidates", "SELECT * FROM candidates;"),
    ("summary, all rows, same columns", f"SELECT {OLD_SUMMARY_COLUMNS} FROM summary;"),
    ("candidates, same columns", f"SELECT {OLD_SUMMARY_COLUMNS}, why FROM candidates;"),
    ("failures", "SELECT * FROM failures;"),
    ("run_progress", "SELECT * FROM run_progress;"),
    ("rescreen --where selection", "SELECT material_id FROM summary WHERE (confidence < 0.6);"),
]


def query_times(cat, n, repeat):
    """Best-of-repeat CPU seconds per query, timed by the sqlite3 shell itself (rows to /dev/null)."""
    script = ".timer on\n.output /dev/null\n"
    for _name, q in QUERIES:
        script += (q.format(mid=n // 2 + 3) + "\n") * repeat
    p = subprocess.run(["sqlite3", "-readonly", cat], input=script, capture_output=True, text=True)
    # CPU (user + system) rather than real time: the machine may be shared.
    times = [float(l.split()[5]) + float(l.split()[7]) for l in (p.stdout + p.stderr).splitlines()
             if l.startswith("Run Time:")]
    if len(times) != repeat * len(QUERIES):
        sys.exit(f"bench_scale: sqlite3 timing of {cat} failed:\n{p.stderr[-2000:]}")
    return [min(times[i * repeat:(i + 1) * repeat]) for i in range(len(QUERIES))]


def coordinator_rate(binary, work, set_path, n, repeat):
    """Results per second of coordinator CPU: 1 coordinator (under /usr/bin/time) and 2 workers."""
    best = 0.0
    for _ in range(repeat):
        cat = os.path.join(work, "coord.sqlite")
        for f in (cat, cat + "-wal", cat + "-shm", cat + ".journal", cat + ".lock"):
            if os.path.exists(f):
                os.remove(f)
        for f in os.listdir(work):
            if f.startswith("coord.sqlite"):
                os.remove(os.path.join(work, f))
        args = ["mpirun", "--oversubscribe", "-n", "1", "/usr/bin/time", "-f", "BENCHTIME %U %S %e",
                binary, "screen", set_path, "-c", cat, ":", "-n", "2", binary, "screen", set_path, "-c", cat]
        p = run(args, check=False)
        lines = [l for l in p.stderr.splitlines() if l.startswith("BENCHTIME")]
        if not lines:
            sys.exit(f"bench_scale: coordinator run failed:\n{p.stderr[-2000:]}")
        f = lines[-1].split()
        cpu = float(f[1]) + float(f[2])
        best = max(best, n / cpu)
    return best


def build_busy_preload(work):
    so = os.path.join(work, "busy_preload.so")
    if not os.path.exists(so):
        cc = os.environ.get("CC", "cc")
        run([cc, "-O2", "-shared", "-fPIC", "-o", so,
             os.path.join(os.path.dirname(os.path.abspath(__file__)), "busy_preload.c"), "-ldl"])
    return so


def busy_fraction(binary, work, set_path, workers, busy_us, preload, repeat):
    """Best of repeat: (fraction of the workers' wall time spent on materials, per-worker fractions,
    mean seconds per material, run wall seconds)."""
    import sqlite3
    env = dict(ENV, LD_PRELOAD=preload, BS_BENCH_BUSY_US=str(busy_us))
    best = None
    for _ in range(repeat):
        cat = os.path.join(work, "busy.sqlite")
        for f in os.listdir(work):
            if f.startswith("busy.sqlite"):
                os.remove(os.path.join(work, f))
        args = ["mpirun", "--oversubscribe", "-n", "1", binary, "screen", set_path, "-c", cat, ":",
                "-n", str(workers), binary, "screen", set_path, "-c", cat]
        # Exit status 1 says "some entries invalid" (all are here); what counts is a finished run.
        p = run(args, env=env, check=False)
        con = sqlite3.connect(cat) if os.path.exists(cat) else None
        row_ = con.execute("SELECT (julianday(ended) - julianday(started)) * 86400 FROM runs"
                           " WHERE ended IS NOT NULL").fetchone() if con else None
        if not row_:
            sys.exit(f"bench_scale: busy run failed:\n{p.stderr[-2000:]}")
        wall_s = row_[0]
        per = [r[0] / wall_s for r in con.execute("SELECT SUM(seconds) FROM results GROUP BY rank ORDER BY rank")]
        mean = con.execute("SELECT AVG(seconds) FROM results").fetchone()[0]
        con.close()
        frac = sum(per) / workers
        if best is None or frac > best[0]:
            best = (frac, per, mean, wall_s)
    return best


def write_model64(work):
    """A 64-state spinless 3D model (invented): two groups of 32 orbitals at -2 and +2 eV, coupled
    by real symmetric random hoppings of up to 0.15 eV to the six nearest cells, so it is an
    insulator with time reversal and inversion (H(R) = H(-R), all orbitals at the origin)."""
    card = os.path.join(work, "model64.json")
    if os.path.exists(card):
        return card
    rng = random.Random(64)
    n = 64
    rs = [(0, 0, 0), (1, 0, 0), (-1, 0, 0), (0, 1, 0), (0, -1, 0), (0, 0, 1), (0, 0, -1)]
    hr = {}
    for r in rs[1::2]:
        m = [[0.0] * n for _ in range(n)]
        for a in range(n):
            for b in range(a, n):
                v = rng.uniform(-0.15, 0.15) / math.sqrt(n / 8)
                m[a][b] = m[b][a] = v
        hr[r] = m
        hr[(-r[0], -r[1], -r[2])] = m
    hr[(0, 0, 0)] = [[(-2.0 if a < 32 else 2.0) if a == b else 0.0 for b in range(n)] for a in range(n)]
    with open(os.path.join(work, "model64_hr.dat"), "w") as f:
        f.write("invented 64-state benchmark model\n%d\n%d\n" % (n, len(rs)))
        f.write(" ".join("1" for _ in rs) + "\n")
        for r in rs:
            for b in range(n):
                for a in range(n):
                    f.write("%d %d %d %d %d %.10f 0.0\n" % (*r, a + 1, b + 1, hr[r][a][b]))
    import json
    with open(card, "w") as f:
        json.dump({"id": "bench64", "formula": "invented", "dimension": 3,
                   "lattice": [[4, 0, 0], [0, 4, 0], [0, 0, 4]], "hoppings": "model64_hr.dat",
                   "occupied_bands": 32, "spinful": False,
                   "orbitals": [{"position": [0, 0, 0], "l": 0} for _ in range(n)]}, f)
    return card


def inspect_cpu(binary, card, repeat, threads=None):
    env = dict(ENV)
    if threads:
        env[threads[0]] = threads[1]
    best = (math.inf, math.inf)
    for _ in range(repeat):
        c, w = cpu_wall([binary, "inspect", card, "--json"], env=env)
        best = (min(best[0], c), min(best[1], w))
    return best


def fit_exponent(points):
    """Least-squares slope of log t against log n over the last three sizes (two if fewer)."""
    p = points[-3:]
    xs = [math.log(n) for n, _ in p]
    ys = [math.log(t) for _, t in p]
    mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
    return sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("build")
    ap.add_argument("--old", help="an older bandsieve binary to compare with")
    ap.add_argument("--n", type=int, default=1000000, help="size of the largest catalogue and set")
    ap.add_argument("--old-max", type=int, default=40000,
                    help="largest rescreen set-up timed with the old binary (quadratic there)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--coord-n", type=int, default=20000, help="entries of the coordinator run")
    ap.add_argument("--work", default=None)
    ap.add_argument("--busy-us", type=int, default=1000, help="CPU microseconds per material of the busy part")
    ap.add_argument("--busy-n", type=int, default=10000, help="entries of the busy part")
    ap.add_argument("--skip", default="", help="comma list of parts to skip: setup,views,coord,busy,inspect")
    a = ap.parse_args()
    new = os.path.join(a.build, "bandsieve")
    bench_set = os.path.join(a.build, "bench", "bench_scale_set")
    work = a.work or tempfile.mkdtemp(prefix="bs_scale_")
    os.makedirs(work, exist_ok=True)
    skip = set(filter(None, a.skip.split(",")))
    bins = [("new", new)] + ([("old", a.old)] if a.old else [])
    out = []

    def row(name, vals, unit, better_high=False):
        line = f"{name:34s}" + "".join(f" {tag} {v:10.4g} {unit}" for tag, v in vals)
        if len(vals) == 2 and vals[0][1] > 0 and vals[1][1] > 0:
            r = vals[1][1] / vals[0][1] if not better_high else vals[0][1] / vals[1][1]
            line += f"   speed-up {r:8.3g}x"
        out.append(line)
        print(line, flush=True)

    sizes = sorted({s for s in (10000, 20000, 40000, 100000, 1000000) if s <= a.n} | {a.n})
    if "setup" not in skip:
        log("rescreen set-up")
        pts = {tag: [] for tag, _ in bins}
        for n in sizes:
            set_path = os.path.join(work, f"set_{n}.h5")
            make_set(bench_set, set_path, n)
            for tag, b in bins:
                if tag == "old" and n > a.old_max:
                    continue
                cat = make_catalogue(b, work, tag, set_path, n)
                t = rescreen_setup(b, work, set_path, cat, a.repeat)
                pts[tag].append((n, t))
                print(f"rescreen set-up, {n:8d} ids: {tag} {t:8.3f} s", flush=True)
        vals = []
        for tag, _ in bins:
            p = pts[tag]
            e = fit_exponent(p) if len(p) >= 2 else float("nan")
            at = p[-1][1] * (a.n / p[-1][0]) ** e if p[-1][0] != a.n else p[-1][1]
            print(f"rescreen set-up exponent {tag}: {e:.2f} (fit over the last three sizes); at {a.n} ids "
                  f"{'measured' if p[-1][0] == a.n else 'extrapolated'} {at:.3g} s; at 1e7 "
                  f"extrapolated {at * (1e7 / a.n) ** e:.3g} s", flush=True)
            if tag == "old" and p[-1][0] != a.n:
                # The old work list scans the set once per selected id: O(N^2) once N is large,
                # which a fit over small sizes (where fixed costs dominate) underestimates.
                q = p[-1][1] * (a.n / p[-1][0]) ** 2
                print(f"rescreen set-up old at {a.n} ids with exponent 2 from {p[-1][0]}: {q:.3g} s", flush=True)
                at = max(at, q)
            vals.append((tag, at))
        row(f"rescreen set-up at {a.n} ids", vals, "s")
    if "views" not in skip:
        log("views")
        set_path = os.path.join(work, f"set_{a.n}.h5")
        res = {}
        for tag, b in bins:
            cat = make_catalogue(b, work, tag, set_path, a.n)
            res[tag] = query_times(cat, a.n, a.repeat)
        for i, (name, _q) in enumerate(QUERIES):
            row(f"{name} ({a.n})", [(tag, res[tag][i]) for tag, _ in bins], "s")
    if "coord" not in skip:
        log("coordinator")
        set_path = os.path.join(work, f"set_{a.coord_n}.h5")
        make_set(bench_set, set_path, a.coord_n)
        rates = [(tag, coordinator_rate(b, work, set_path, a.coord_n, a.repeat)) for tag, b in bins]
        row("coordinator results/s of CPU", rates, "/s", better_high=True)
        r = rates[0][1]
        print("workers one coordinator core feeds (new): "
              + ", ".join(f"{s:g} s materials {r * s:.3g}" for s in (0.1, 1, 10)), flush=True)
    if "busy" not in skip:
        log("workers' busy fraction")
        set_path = os.path.join(work, f"set_{a.busy_n}.h5")
        make_set(bench_set, set_path, a.busy_n)
        preload = build_busy_preload(work)
        for workers in (2, 1):
            vals = []
            for tag, b in bins:
                frac, per, mean, wall_s = busy_fraction(b, work, set_path, workers, a.busy_us, preload, a.repeat)
                vals.append((tag, frac))
                print(f"workers busy, {workers} worker(s), {a.busy_us} us CPU per material: {tag} {frac:.3f} "
                      f"(per worker {', '.join(f'{x:.3f}' for x in per)}; {mean * 1e3:.2f} ms per material; "
                      f"run {wall_s:.2f} s)", flush=True)
            row(f"workers busy fraction, {workers} worker(s)", vals, "", better_high=True)
        print(f"load average at the end of the busy part: {os.getloadavg()[0]:.1f}", flush=True)
    if "inspect" not in skip:
        log("inspect n = 64")
        card = write_model64(work)
        cpu = [(tag, inspect_cpu(b, card, a.repeat)) for tag, b in bins]
        row("inspect n=64 CPU, default", [(t, v[0]) for t, v in cpu], "s")
        row("inspect n=64 wall, default", [(t, v[1]) for t, v in cpu], "s")
        two = inspect_cpu(new, card, a.repeat, ("BS_BLAS_THREADS", "2"))
        print(f"inspect n=64 new with BS_BLAS_THREADS=2: CPU {two[0]:.3g} s, wall {two[1]:.3g} s "
              f"(CPU {two[0] / cpu[0][1][0]:.2f}x the default)", flush=True)
    print(f"(work folder {work})")


if __name__ == "__main__":
    main()
