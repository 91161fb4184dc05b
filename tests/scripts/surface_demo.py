#!/usr/bin/env python3
"""Surface evidence over the strong topological insulators of the demo set.

The demo set is INVENTED data (built-in published models with drawn parameters, `demo-set`); the
checks are published rules, applied to every entry the diagnosis calls a strong TI:

1. Crossing parities (Phys. Rev. Lett. 98, 106803 (2007)): between surface TRIMs a and b the
   number of Fermi-level crossings by the states of one surface has the parity of pi_a pi_b, the
   product of the bulk parity products projecting onto a and b; a strong TI has pi_a not all equal
   on every surface (same paper), so some pair must be odd. Each entry is either `consistent`, with
   every pair's top count of the required parity and at least one odd pair counted odd, or
   `inconclusive` with a non-empty reason; `consistent` with a pair that disagrees fails.
2. Dirac points (same paper): a strong TI has an odd number of surface Dirac points on every
   surface; an even number stored beside a `consistent` verdict must come with the reason why
   (slab too thin: the surfaces hybridise; the top states at a TRIM form no two-fold level, as
   when fit noise breaks time reversal; or the point lies in the projected bulk bands).
3. JQ-0009 (Z2 = 1;111, regression, issue 14, 2026-12-02): an odd count on an odd pair.

Prints the counts by verdict and reason (the README's surface section quotes them). Two worker
processes, one BLAS thread each (the machine is shared).

Usage: surface_demo.py PATH_TO_BANDSIEVE WORKDIR
"""
import collections
import json
import os
import subprocess
import sys
from concurrent.futures import ThreadPoolExecutor

ENV = dict(os.environ, OPENBLAS_NUM_THREADS="1", BS_BLAS_THREADS="1")
FAILS = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what, flush=True)
    if not ok:
        FAILS.append(what)


def inspect(binary, source, surfaces):
    """The JSON diagnosis (None when the entry is refused) and the CPU seconds it took."""
    args = [binary, "inspect", source, "--json"] + (["--surfaces"] if surfaces else [])
    with subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, env=ENV) as p:
        out = p.stdout.read()
        _, status, usage = os.wait4(p.pid, 0)
        p.returncode = os.waitstatus_to_exitcode(status)
    cpu = usage.ru_utime + usage.ru_stime
    return (json.loads(out) if p.returncode == 0 else None), cpu


def dirac_inside(binary, source, s, name):
    """Check 2: the Dirac points of the stored plane and thickness, from `slab --json`, are two-fold
    (a Kramers pair, common practice) and inside the bulk gap by max(5% of the gap, 2 meV) (the
    rule of issue 14: a level at a bulk band edge is not a Dirac point), as many as stored."""
    d = s["direction"]
    res = subprocess.run([binary, "slab", source, "--direction", ",".join(map(str, d)), "--layers",
                          str(s["layers"]), "--json", "--nk", "2"], capture_output=True, text=True, env=ENV)
    if res.returncode != 0:
        check(False, f"{name}: slab --json ran ({res.stderr.strip()[:80]})")
        return
    j = json.loads(res.stdout)
    vbm, cbm = j["bulk_edges_eV"]["valence_max"], j["bulk_edges_eV"]["conduction_min"]
    margin = max(0.05 * (cbm - vbm), 2e-3)
    pts = j["surface_dirac_points"] + j["bottom_dirac_points"]
    check(all(p["degeneracy"] == 2 and vbm + margin < p["energy_eV"] < cbm - margin for p in pts),
          f"{name}: {len(pts)} Dirac points two-fold and inside the gap by {1e3 * margin:.1f} meV")
    check(len(j["surface_dirac_points"]) == s["dirac_points_top"], f"{name}: slab shows the stored Dirac points")


def reason_kind(s):
    r = s["reason"]
    if s["status"] == "consistent":
        if "too thin for the surface Dirac points" in r:
            return "consistent; slab too thin for the Dirac points (hybridised at a TRIM)"
        if "form no two-fold level" in r:
            return "consistent; top-surface states at a TRIM form no Kramers pair (split by fit noise)"
        if "projected bulk bands" in r:
            return "consistent; Dirac point in the projected bulk bands"
        return "consistent"
    if "no global bulk gap" in r:
        return "inconclusive: no global bulk gap"
    if "where the bulk parities require" in r:
        return "inconclusive: counts disagree at the thickest slab"
    return "inconclusive: " + r[:60]


def main():
    binary, work = sys.argv[1], sys.argv[2]
    os.makedirs(work, exist_ok=True)
    demo = os.path.join(work, "demo.h5")
    subprocess.run([binary, "demo-set", "-o", demo, "--force"], check=True, capture_output=True, env=ENV)
    listing = subprocess.run([binary, "list", demo], check=True, capture_output=True, text=True).stdout
    ids = [ln.split()[0] for ln in listing.splitlines()
           if ln.startswith("JQ-") and len(ln.split()) > 2 and ln.split()[1] == "3"]
    with ThreadPoolExecutor(max_workers=2) as pool:
        plain = list(pool.map(lambda i: (i, inspect(binary, f"{demo}:{i}", False)), ids))
    strong = [i for i, (d, _) in plain if d and d.get("class") == "strong topological insulator"]
    cpu_total = sum(c for _, (_, c) in plain)
    check(len(strong) > 0, f"the demo set has strong TIs ({len(strong)})")
    with ThreadPoolExecutor(max_workers=2) as pool:
        done = list(pool.map(lambda i: (i, inspect(binary, f"{demo}:{i}", True)), strong))
    kinds = collections.Counter()
    for i, (d, cpu) in done:
        cpu_total += cpu
        s = (d or {}).get("surface")
        check(s is not None, f"{i}: surface evidence stored")
        if s is None:
            continue
        pairs = s["pairs"]
        odd_pairs = [p for p in pairs if p["expected_odd"]]
        check(len(odd_pairs) > 0, f"{i}: some pair of surface TRIMs is odd (strong TI, PRL 98, 106803)")
        check(s["status"] in ("consistent", "inconclusive"), f"{i}: verdict {s['status']}")
        if s["status"] == "consistent":
            check(all(p["agrees"] for p in pairs), f"{i}: consistent means every pair has its parity")
            check(any(p["top"] % 2 == 1 for p in odd_pairs), f"{i}: an odd count on an odd pair")
            if s["dirac_points_top"] % 2 == 0:
                check(any(w in s["reason"] for w in ("too thin", "projected bulk bands", "no two-fold level")),
                      f"{i}: an even number of Dirac points is explained ({s['reason'][-90:]})")
        else:
            check(len(s["reason"]) > 20, f"{i}: inconclusive with a reason")
        if s["dirac_points_top"] > 0:
            dirac_inside(binary, f"{demo}:{i}", s, i)
        kinds[reason_kind(s)] += 1
        print(f"     {i}: {s['status']}, {s['layers']} layers, E = {s['fermi_eV']:.4f} eV, "
              f"Dirac points {s['dirac_points_top']}, {cpu:.1f} s CPU", flush=True)
        if i == "JQ-0009":
            check(s["status"] == "consistent" and any(p["top"] % 2 == 1 for p in odd_pairs),
                  "JQ-0009 (Z2 = 1;111): odd count on an odd pair (regression, issue 14)")
    check("JQ-0009" in strong, "JQ-0009 is among the strong TIs")
    print(f"strong TIs: {len(strong)}; {cpu_total:.0f} s CPU in all")
    for k, n in sorted(kinds.items()):
        print(f"  {n:3d}  {k}")
    if FAILS:
        print(f"{len(FAILS)} check(s) failed")
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
