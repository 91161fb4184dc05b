#!/usr/bin/env python3
"""Diagnosis-cost benchmark (not a test): eigensolves per diagnosis and CPU time of `inspect`, for
this build and an older binary on the same files in one run, so that every figure is also a ratio.

* Eigensolves: every zheevd/zheevr/zheev call on a matrix of the model's size, counted by a small
  LD_PRELOAD library (bench/eigcount_preload.c) that both binaries load, so both are counted the same
  way whatever they report themselves. The JSON's k_points is printed beside it.
* Models: realistic-size 3D insulators made by bench_diagcost_models (published built-in models
  dressed with invented extra orbitals, clean and with fit-like noise, one without inversion); the
  median ratio over them is the headline figure. Each model's class and Z2 must be the same for
  this build with and without --verify (every method computed); a difference is printed as
  MISMATCH. Where the old binary's answer differs (its handling of noisy fits was older), a note
  says so.
* CPU: user + system time from /usr/bin/time, best of --repeat runs, default settings: the 48-state
  models and the invented 64-state model of bench_scale.py.
* Memory: maximum resident set size (/usr/bin/time -v) of inspect on a 128-state model with 729
  lattice vectors, clean and with fit noise of 1e-5 (a noisy fit also holds its restored model,
  whose inversion images bring 1,215 lattice vectors).
The dressed models and the 64-state model are invented benchmark data (no physics).

Usage: bench/bench_diagcost.sh BUILD_DIR [--old OLD_BINARY] [--repeat R] [--work DIR] [--skip mem,cpu64]
"""
import argparse
import json
import os
import shutil
import statistics
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
from bench_scale import write_model64  # noqa: E402  (the same invented 64-state model)

MODELS_48 = ["fkm_strong_48", "fkm_weak_48", "atomic_48", "fkm_strong_48_noisy", "fkm_weak_48_noisy",
             "atomic_48_noisy", "fkm_strong_48_noisier", "fkm_strong_64", "fkm_noinv_48"]
MODELS_MEM = ["fkm_strong_128_long", "fkm_strong_128_long_noisy"]


def log(*a):
    print(*a, file=sys.stderr, flush=True)


def build_preload(work):
    so = os.path.join(work, "eigcount_preload.so")
    if not os.path.exists(so):
        cc = os.environ.get("CC", "cc")
        subprocess.run([cc, "-O2", "-shared", "-fPIC", "-o", so, os.path.join(HERE, "eigcount_preload.c"), "-ldl"],
                       check=True)
    return so


def timed(args, env, verbose=False):
    """Runs args under /usr/bin/time; returns (stdout, user+sys seconds, max RSS kB)."""
    with tempfile.NamedTemporaryFile("r", suffix=".time") as tf:
        fmt = ["-v"] if verbose else ["-f", "%U %S %M"]
        p = subprocess.run(["/usr/bin/time", *fmt, "-o", tf.name, *args], env=env, capture_output=True,
                           text=True)
        if p.returncode != 0:
            raise RuntimeError(f"{' '.join(args)} failed: {p.stderr.strip()[-400:]}")
        text = tf.read()
    if verbose:
        rss = int(next(l for l in text.splitlines() if "Maximum resident set size" in l).split(":")[1])
        u = float(next(l for l in text.splitlines() if "User time" in l).split(":")[1])
        s = float(next(l for l in text.splitlines() if "System time" in l).split(":")[1])
        return p.stdout, u + s, rss
    u, s, m = text.split()[-3:]
    return p.stdout, float(u) + float(s), int(m)


def count_run(binary, card, norb, preload, work, extra=()):
    out = os.path.join(work, "eigcount.txt")
    if os.path.exists(out):
        os.remove(out)
    env = dict(os.environ, LD_PRELOAD=preload, BS_EIGCOUNT_OUT=out)
    stdout, cpu, _ = timed([binary, "inspect", card, "--json", *extra], env)
    res = json.loads(stdout)
    n = 0
    with open(out) as f:
        for line in f:
            size, c = line.split()
            if int(size) == norb:
                n += int(c)
    return res, n, cpu


def best_cpu(binary, card, repeat, extra=()):
    return min(timed([binary, "inspect", card, "--json", *extra], dict(os.environ))[1] for _ in range(repeat))


def answer(res):
    return (res["class"], json.dumps(res.get("z2")))


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("build")
    ap.add_argument("--old", help="an older bandsieve binary to compare with")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--work")
    ap.add_argument("--skip", default="", help="comma list: mem, cpu64, cpu48")
    a = ap.parse_args()
    skip = set(filter(None, a.skip.split(",")))
    new = os.path.join(a.build, "bandsieve")
    work = a.work or tempfile.mkdtemp(prefix="bench_diagcost_")
    os.makedirs(work, exist_ok=True)
    preload = build_preload(work)
    mdir = os.path.join(work, "models")
    if not os.path.isdir(mdir):
        os.makedirs(mdir)
        subprocess.run([os.path.join(a.build, "bench", "bench_diagcost_models"), mdir], check=True,
                       stdout=subprocess.DEVNULL)
    cards = {}
    for m in MODELS_48 + MODELS_MEM:
        path = os.path.join(mdir, m + ".json")
        with open(path) as f:
            c = json.load(f)
        cards[m] = (path, len(c["orbitals"]) * (2 if c["spinful"] else 1))
    bins = [("new", new)] + ([("old", a.old)] if a.old else [])

    print("== eigensolves per diagnosis (full-size H(k) diagonalisations) ==")
    print(f"{'model':24} {'norb':>4} {'old':>7} {'new':>7} {'ratio':>6} {'new --verify':>12}  class (new) / evidence")
    ratios, mismatches = [], 0
    for m in MODELS_48:
        card, norb = cards[m]
        log("counting", m)
        rn, nn, _ = count_run(new, card, norb, preload, work)
        rv, nv, _ = count_run(new, card, norb, preload, work, ("--verify",))
        if answer(rv) != answer(rn):
            mismatches += 1
            print(f"MISMATCH {m}: new {answer(rn)} vs new --verify {answer(rv)}")
        if a.old:
            ro, no, _ = count_run(a.old, card, norb, preload, work)
            if answer(ro) != answer(rn):
                print(f"note {m}: the old binary says {answer(ro)}, this build {answer(rn)}")
            ratios.append(nn / no)
            print(f"{m:24} {norb:4d} {no:7d} {nn:7d} {nn / no:6.2f} {nv:12d}  {rn['class']} / {rn.get('evidence')}")
        else:
            print(f"{m:24} {norb:4d} {'-':>7} {nn:7d} {'-':>6} {nv:12d}  {rn['class']} / {rn.get('evidence')}")
    if ratios:
        print(f"median eigensolve ratio new/old over {len(ratios)} models: {statistics.median(ratios):.2f} "
              f"(range {min(ratios):.2f}-{max(ratios):.2f}); mismatches with --verify: {mismatches}")

    if "cpu48" not in skip:
        print("\n== inspect CPU time (user + system, best of %d), default settings ==" % a.repeat)
        for m in ["fkm_strong_48", "fkm_strong_48_noisy", "fkm_noinv_48"]:
            card, _ = cards[m]
            log("cpu", m)
            cpu = {t: best_cpu(b, card, a.repeat) for t, b in bins}
            ratio = f"{cpu['new'] / cpu['old']:.2f}" if a.old else "-"
            print(f"{m:24} new {cpu['new']:.2f} s" + (f"  old {cpu['old']:.2f} s  ratio {ratio}" if a.old else ""))
    if "cpu64" not in skip:
        card = write_model64(work)
        log("cpu bench64")
        cpu = {t: best_cpu(b, card, a.repeat) for t, b in bins}
        print(f"{'bench64 (n = 64)':24} new {cpu['new']:.2f} s" +
              (f"  old {cpu['old']:.2f} s  ratio {cpu['new'] / cpu['old']:.2f}" if a.old else ""))
    if "mem" not in skip:
        print("\n== peak memory of inspect, n = 128, 729 lattice vectors (max RSS) ==")
        for m in MODELS_MEM:
            card, _ = cards[m]
            rss = {}
            for t, b in bins:
                log("memory", m, t)
                out, cpu, rss[t] = timed([b, "inspect", card, "--json"], dict(os.environ), verbose=True)
                r = json.loads(out)
                print(f"{m} {t}: {rss[t] / 1024:.0f} MB, CPU {cpu:.1f} s, {r['class']}, k_points {r['k_points']}")
            if a.old:
                print(f"{m} ratio new/old: {rss['new'] / rss['old']:.2f}")
    if not a.work:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
