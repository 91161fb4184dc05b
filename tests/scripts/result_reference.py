#!/usr/bin/env python3
"""Pins what a diagnosis looks like from outside: `inspect --json` of the built-in models and the
catalogue rows (result columns, the `diagnosis` JSON, nodes and the views) of screens of the
invented demo set, against a reference produced by the program before the result struct and its
one JSON module replaced the hand-written serialisers (tests/data/reference/result.json).

Usage: result_reference.py BINARY WORKDIR [--write REFERENCE]
Without --write, regenerates everything and compares field by field: numbers to a relative
tolerance of 1e-9 (with an absolute floor of 1e-12 for values that are round-off around zero),
integers, strings, booleans and nulls exactly, and every key must be present on both sides (a
dropped or renamed key fails). Timings, timestamps and host names are left out.
"""
import json
import math
import os
import shutil
import sqlite3
import subprocess
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
REFERENCE = os.path.join(HERE, "..", "data", "reference", "result.json")
ENV = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1",
           OPENBLAS_NUM_THREADS="1")
# Keys that measure time or the machine, never the diagnosis.
SKIP = {"seconds", "diag_seconds", "finished", "started", "ended", "hosts", "updated"}
# Catalogue columns added after the reference was recorded, by content identity (schema 2): the
# entry's content hash, summary's current/contents, failures' cause, and the integer Z2 and plane
# Chern columns generated from the text ones. They are new keys here, not changed ones; their
# values are checked by tests/catalogue/test_identity.c and tests/scripts/pipeline_test.py.
ADDED = {"content", "current", "contents", "cause", "z2_nu0", "z2_nu1", "z2_nu2", "z2_nu3",
         "chern_k1_0", "chern_k1_half", "chern_k2_0", "chern_k2_half", "chern_k3_0", "chern_k3_half"}
RTOL, ATOL = 1e-9, 1e-12

# inspect cases: name -> arguments after `inspect`.
MODELS = ["graphene", "haldane", "kane_mele", "bhz", "fkm", "weyl", "nodal_line", "atomic",
          "metal"]
INSPECT = {m: [f"model:{m}"] for m in MODELS}
INSPECT.update({
    "haldane_trivial": ["model:haldane:M=0.8"],
    "kane_mele_trivial": ["model:kane_mele:lambda_v=0.5,lambda_R=0"],
    "fkm_weak": ["model:fkm:dt=-0.4"],
    "bhz_mesh": ["model:bhz:M=-1", "--mesh", "20"],
    "atomic_2d": ["model:atomic:dim=2"],
    "metal_2d": ["model:metal:dim=2"],
    "fkm_broken_inversion": ["model:fkm:stag=0.2"],
    "kane_mele_flows": ["model:kane_mele", "--flows"],
    "haldane_transport": ["model:haldane", "--transport", "--scan", "-0.5,0.5,3"],
    "weyl_transport": ["model:weyl", "--transport"],
})


def run(args):
    p = subprocess.run(args, env=ENV, capture_output=True, text=True)
    if p.returncode not in (0, 1):
        sys.exit(f"command failed ({p.returncode}): {' '.join(args)}\n{p.stdout}\n{p.stderr}")
    return p.stdout


def rows(con, sql):
    cur = con.execute(sql)
    names = [c[0] for c in cur.description]
    return [dict(zip(names, r)) for r in cur.fetchall()]


def screen(binary, work, name, count, *flags):
    d = os.path.join(work, name)
    shutil.rmtree(d, ignore_errors=True)
    os.makedirs(d)
    set_path = os.path.join(d, "set.h5")
    cat = os.path.join(d, "cat.sqlite")
    run([binary, "demo-set", "-o", set_path, "--count", str(count), "--seed", "7"])
    run([binary, "screen", set_path, "-c", cat, *flags])
    con = sqlite3.connect(cat)
    out = {
        "results": rows(con, "SELECT * FROM results ORDER BY material_id"),
        "nodes": rows(con, "SELECT * FROM nodes ORDER BY material_id, node"),
    }
    for view in ("summary", "candidates", "failures", "top_spin_hall", "surfaces"):
        # failures leads with its cause column since schema 2: order it by run and id as before.
        order = "run_id, material_id" if view == "failures" else "1, 2"
        out["view_" + view] = rows(con, f"SELECT * FROM {view} ORDER BY {order}")
    con.close()
    # The set's path is the work folder's: stored as SET.h5 wherever a message or view shows it.
    for table in out.values():
        for r in table:
            for k, v in r.items():
                if isinstance(v, str):
                    r[k] = v.replace(set_path, "SET.h5")
    for r in out["results"]:
        if r.get("diagnosis"):
            r["diagnosis"] = json.loads(r["diagnosis"])
    return out


def generate(binary, work):
    ref = {"inspect": {}, "catalogue": {}}
    for name, args in INSPECT.items():
        ref["inspect"][name] = json.loads(run([binary, "inspect", *args, "--json"]))
    ref["catalogue"]["surfaces40"] = screen(binary, work, "surfaces40", 40, "--surfaces")
    ref["catalogue"]["transport12"] = screen(binary, work, "transport12", 12, "--transport")
    return ref


def compare(ref, new, path, errors):
    if isinstance(ref, dict) and isinstance(new, dict):
        for k in ref:
            if k in SKIP:
                continue
            if k not in new:
                errors.append(f"{path}.{k}: key missing")
            else:
                compare(ref[k], new[k], f"{path}.{k}", errors)
        for k in new:
            if k not in ref and k not in SKIP and k not in ADDED:
                errors.append(f"{path}.{k}: new key not in the reference")
    elif isinstance(ref, list) and isinstance(new, list):
        if len(ref) != len(new):
            errors.append(f"{path}: length {len(new)}, reference {len(ref)}")
        for i, (a, b) in enumerate(zip(ref, new)):
            compare(a, b, f"{path}[{i}]", errors)
    elif isinstance(ref, bool) or isinstance(new, bool) or ref is None or new is None \
            or isinstance(ref, str) or isinstance(new, str):
        if ref != new or type(ref) is not type(new):
            errors.append(f"{path}: {new!r}, reference {ref!r}")
    elif isinstance(ref, int) and isinstance(new, int):
        if ref != new:
            errors.append(f"{path}: {new}, reference {ref}")
    elif isinstance(ref, (int, float)) and isinstance(new, (int, float)):
        if isinstance(ref, int) != isinstance(new, int):
            errors.append(f"{path}: {new!r} and reference {ref!r} differ in type")
        elif not math.isclose(ref, new, rel_tol=RTOL, abs_tol=ATOL):
            errors.append(f"{path}: {new!r}, reference {ref!r}")
    else:
        errors.append(f"{path}: {new!r} ({type(new).__name__}), reference {ref!r}")


def main():
    binary, work = sys.argv[1], sys.argv[2]
    os.makedirs(work, exist_ok=True)
    new = generate(binary, work)
    if len(sys.argv) > 4 and sys.argv[3] == "--write":
        with open(sys.argv[4], "w") as f:
            json.dump(new, f, indent=1, sort_keys=True)
            f.write("\n")
        print("wrote", sys.argv[4])
        return
    with open(REFERENCE) as f:
        ref = json.load(f)
    errors = []
    compare(ref, new, "", errors)
    if errors:
        print(f"FAIL: {len(errors)} differences from the reference; the first ones:")
        for e in errors[:int(os.environ.get("BS_REF_SHOW", "40"))]:
            print("  ", e)
        sys.exit(1)
    print("ok:", len(ref["inspect"]), "inspect outputs and",
          sum(len(c["results"]) for c in ref["catalogue"].values()),
          "catalogue rows match the reference")


if __name__ == "__main__":
    main()
