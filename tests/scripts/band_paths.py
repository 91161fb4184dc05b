#!/usr/bin/env python3
"""`bandsieve bands --path`: standard paths against the published coordinates, energies against numpy.

Published points (Comput. Mater. Sci. 49, 299 (2010), the tables of the FCC and HEX lattices,
transcribed here by hand in the paper's primitive reciprocal basis, with the paper's standard cells):
  FCC, a1 = (0, a/2, a/2), a2 = (a/2, 0, a/2), a3 = (a/2, a/2, 0):
    G (0,0,0), K (3/8,3/8,3/4), L (1/2,1/2,1/2), U (5/8,1/4,5/8), W (1/2,1/4,3/4), X (1/2,0,1/2);
    path G-X-W-K-G-L-U-W-L-K|U-X.
  HEX, a1 = (a/2, -a sqrt3/2, 0), a2 = (a/2, a sqrt3/2, 0), a3 = (0, 0, c):
    G (0,0,0), A (0,0,1/2), H (1/3,1/3,1/2), K (1/3,1/3,0), L (1/2,0,1/2), M (1/2,0,0);
    path G-M-K-G-A-L-H-A|L-M|K-H.
The program gets cells in other bases (a re-based fcc cell with a 135 degree angle, a hexagonal
cell with 60 degrees) and must find the same points: the test maps the published Cartesian points
onto the program's by the best orthogonal matrix (Procrustes) and requires an exact fit (1e-9
relative: both are exact rationals times the reciprocal vectors) by a matrix that maps the
reciprocal lattice onto itself (a symmetry of the lattice, so the points are equivalent).

Energies: each card carries random Hermitian hoppings (seeded); numpy builds
H(k) = sum_R exp(2 pi i k.R) H(R) from the same table and diagonalises it at every k the program
printed; agreement to 1e-9 eV (double precision on 3x3 matrices of O(1) eV entries gives ~1e-14).

Usage: band_paths.py BANDSIEVE WORKDIR
"""
import json
import os
import subprocess
import sys

import numpy as np

FAILS = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        FAILS.append(what)


def run(binary, args, expect=0):
    p = subprocess.run([binary] + args, capture_output=True, text=True)
    if p.returncode != expect:
        print(p.stdout[-2000:], p.stderr[-2000:])
    check(p.returncode == expect, f"bands {' '.join(args[:3])}...: exit {p.returncode} (expected {expect})")
    return p


def write_card(work, name, lattice, dim, rng, norb=3):
    """A spinless card with norb s orbitals and random Hermitian hoppings to R in {-1,0,1}^dim."""
    rs = []
    r3 = [-1, 0, 1] if dim == 3 else [0]
    for i in (-1, 0, 1):
        for j in (-1, 0, 1):
            for k in r3:
                rs.append((i, j, k))
    H = {}
    for R in rs:
        if R in H:
            continue
        m = rng.normal(size=(norb, norb)) + 1j * rng.normal(size=(norb, norb))
        if R == (0, 0, 0):
            m = m + m.conj().T
        H[R] = m
        H[tuple(-x for x in R)] = m.conj().T
    hop = os.path.join(work, name + "_hop.dat")
    with open(hop, "w") as f:
        f.write("random hoppings for the band-path test (seeded)\n%d\n%d\n" % (norb, len(rs)))
        for i in range(0, len(rs), 15):
            f.write(" ".join(["1"] * len(rs[i:i + 15])) + "\n")
        for R in rs:
            for n in range(norb):
                for m in range(norb):
                    v = H[R][m, n]
                    f.write("%d %d %d %d %d %.15f %.15f\n" % (R[0], R[1], R[2], m + 1, n + 1, v.real, v.imag))
    card = {"id": name, "dimension": dim, "lattice": lattice, "hoppings": os.path.basename(hop),
            "occupied_bands": 1, "spinful": False,
            "orbitals": [{"position": [0.1 * o, 0.05 * o, 0.0], "l": 0} for o in range(norb)]}
    path = os.path.join(work, name + ".json")
    with open(path, "w") as f:
        json.dump(card, f)
    return path, H


def numpy_bands(H, ks):
    out = []
    for k in ks:
        h = sum(np.exp(2j * np.pi * np.dot(k, R)) * m for R, m in H.items())
        out.append(np.linalg.eigvalsh(h))
    return np.array(out)


def reciprocal(a):
    return 2 * np.pi * np.linalg.inv(np.array(a, dtype=float)).T


def check_points(res, published, std_cell, what):
    pts = res["path_points"]
    labels = [p["label"] for p in pts]
    check(labels == [p[0] for p in published], f"{what}: labels {'-'.join(labels)}")
    jumps = [p["jump"] for p in pts]
    check(jumps == [p[2] for p in published], f"{what}: jumps where the paper's path jumps")
    B = np.array(res["reciprocal_vectors"])
    ours = np.array([p["k"] for p in pts]) @ B
    Bs = reciprocal(std_cell)
    pub = np.array([p[1] for p in published], dtype=float) @ Bs
    u, _, vt = np.linalg.svd(pub.T @ ours)
    R = u @ vt
    resid = np.abs(pub @ R - ours).max()
    check(resid < 1e-9 * np.abs(pub).max(), f"{what}: points match the published ones up to a rotation "
          f"(residual {resid:.2e} 1/A)")
    # R must map the reciprocal lattice onto itself: a vector G = n.B goes to G R = (n M) B with M integer.
    M = B @ R @ np.linalg.inv(B)
    check(np.abs(M - np.round(M)).max() < 1e-9, f"{what}: the rotation is a symmetry of the lattice")


def check_energies(res, H, what):
    ks = np.array(res["k"])
    e = np.array(res["energies_eV"])
    ref = numpy_bands(H, ks)
    err = np.abs(e - ref).max()
    check(err < 1e-9, f"{what}: {len(ks)} k-points agree with numpy eigvalsh (max error {err:.1e} eV)")
    check(len(ks) >= 100, f"{what}: --points 120 gives {len(ks)} samples")
    g = res["gap"]
    vb, cb = e[:, 0].max(), e[:, 1].min()
    check(abs(g["vbm"]["energy_eV"] - vb) < 1e-12 and abs(g["cbm"]["energy_eV"] - cb) < 1e-12,
          f"{what}: band edges at the filling marked at the path's extremes")
    if vb < cb:
        check(res["fermi_source"] == "mid-gap" and abs(res["fermi_eV"] - 0.5 * (vb + cb)) < 1e-12,
              f"{what}: Fermi level mid-gap when the card gives none")


def main():
    binary, work = sys.argv[1], sys.argv[2]
    os.makedirs(work, exist_ok=True)
    rng = np.random.default_rng(20261202)
    a = 5.0
    # A re-based fcc cell: a1, a2 of the standard cell and a3 - a1 - a2 = (0, 0, -a) (135 degrees).
    fcc = [[0, a / 2, a / 2], [a / 2, 0, a / 2], [0, 0, -a]]
    card, H = write_card(work, "fcc_rebased", fcc, 3, rng)
    p = run(binary, ["bands", card, "--path", "auto", "--points", "120", "--json"])
    res = json.loads(p.stdout)
    check(res["lattice_type"] == "FCC", f"fcc: recognised as {res['lattice_type']}")
    F = {"G": (0, 0, 0), "K": (3 / 8, 3 / 8, 3 / 4), "L": (.5, .5, .5), "U": (5 / 8, 1 / 4, 5 / 8),
         "W": (1 / 2, 1 / 4, 3 / 4), "X": (.5, 0, .5)}
    order = ["G", "X", "W", "K", "G", "L", "U", "W", "L", "K", "|U", "X"]
    published = [(s.strip("|"), F[s.strip("|")], s.startswith("|")) for s in order]
    std_fcc = [[0, a / 2, a / 2], [a / 2, 0, a / 2], [a / 2, a / 2, 0]]
    check_points(res, published, std_fcc, "fcc (re-based cell)")
    check_energies(res, H, "fcc (re-based cell)")

    # A hexagonal cell with 60 degrees between a1 and a2 (the paper's has 120).
    c = 7.0
    hexa = [[a, 0, 0], [a / 2, a * np.sqrt(3) / 2, 0], [0, 0, c]]
    card, H = write_card(work, "hex60", hexa, 3, rng)
    p = run(binary, ["bands", card, "--path", "auto", "--points", "120", "--json"])
    res = json.loads(p.stdout)
    check(res["lattice_type"] == "HEX", f"hex: recognised as {res['lattice_type']}")
    Hx = {"G": (0, 0, 0), "A": (0, 0, .5), "H": (1 / 3, 1 / 3, .5), "K": (1 / 3, 1 / 3, 0), "L": (.5, 0, .5),
          "M": (.5, 0, 0)}
    order = ["G", "M", "K", "G", "A", "L", "H", "A", "|L", "M", "|K", "H"]
    published = [(s.strip("|"), Hx[s.strip("|")], s.startswith("|")) for s in order]
    std_hex = [[a / 2, -a * np.sqrt(3) / 2, 0], [a / 2, a * np.sqrt(3) / 2, 0], [0, 0, c]]
    check_points(res, published, std_hex, "hex (60-degree cell)")
    check_energies(res, H, "hex (60-degree cell)")

    # The built-in Fu-Kane-Mele model sits on the paper's own fcc cell: its coordinates read as published.
    res = json.loads(run(binary, ["bands", "model:fkm", "--path", "auto", "--json"]).stdout)
    got = {p["label"]: p["k"] for p in res["path_points"]}
    check(all(np.allclose(got[l], F[l]) for l in got), "fkm (standard cell): reduced points equal the table's")

    # A user path: labels, fractions and a jump; text output marks the band edges and the Fermi level.
    p = run(binary, ["bands", "model:kane_mele", "--path", "G:0,0 M:1/2,0 | K:1/3,2/3 G:0,0", "--points", "40"])
    lines = p.stdout.splitlines()
    check(any(l.startswith("# Fermi level") for l in lines) and any("VBM" in l for l in lines)
          and any(l.startswith("K ") for l in lines), "user path: labelled rows, band edges and Fermi level marked")
    # Kane-Mele at K = (1/3, 2/3) of its 60-degree cell: the gap |6 sqrt3 lambda_SO - 2 lambda_v| at
    # lambda_R = 0 (Phys. Rev. Lett. 95, 146802 (2005)); defaults lambda_SO = 0.06, lambda_v = 0.1.
    res = json.loads(run(binary, ["bands", "model:kane_mele:lambda_R=0", "--path", "G:0,0 K:1/3,2/3",
                                  "--points", "30", "--json"]).stdout)
    e = np.array(res["energies_eV"])[-1]
    check(abs((e[2] - e[1]) - abs(6 * np.sqrt(3) * 0.06 - 2 * 0.1)) < 1e-9,
          f"Kane-Mele gap at K {e[2] - e[1]:.6f} eV = |6 sqrt3 lambda_SO - 2 lambda_v|")

    # Refusals: a lattice without a standard path here, malformed user paths.
    tri = [[4.0, 0, 0], [1.1, 4.7, 0], [0.7, 0.9, 5.3]]
    card, _ = write_card(work, "triclinic", tri, 3, rng)
    p = run(binary, ["bands", card, "--path", "auto"], expect=1)
    check("give --path" in p.stderr, "triclinic cell: refused, the message says to give a path")
    p = run(binary, ["bands", "model:bhz", "--path", "G:0,0 X"], expect=2)
    check("item 2" in p.stderr, "malformed user path: usage error naming the item")
    run(binary, ["bands", "model:bhz", "--path", "G:0,0"], expect=2)
    if FAILS:
        print(f"{len(FAILS)} check(s) failed")
        sys.exit(1)


if __name__ == "__main__":
    main()
