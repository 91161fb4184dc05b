#!/usr/bin/env python3
"""Independent numpy check of the Weyl window of `bandsieve path` on the Fu-Kane-Mele model with a
staggered potential (inversion broken).

Physics: without inversion, in 3D, the transition between the weak TI (dt < 0) and the strong TI
(dt > 0) of the Fu-Kane-Mele model (Phys. Rev. Lett. 98, 106803 (2007)) passes through a Weyl
semimetal of finite width; Weyl nodes are created in pairs of opposite chirality away from the TRIMs,
move, and annihilate with other partners (New J. Phys. 9, 356 (2007); Phys. Rev. B 78, 165313
(2008)). Time reversal maps a node at k to one at -k of the same chirality, so their number is a
multiple of 4.

Independent reference: H(k) of the model written here from the paper's real-space form (nearest
neighbour t, t + dt on the [111] bond, i (8 lambda_SO / a^2) s.(d1 x d2) on second neighbours found
by a neighbour search, +-stag on the sublattices), evaluated vectorised in Cartesian k; the minimal
direct gap between bands 2 and 3 by a 16^3 mesh and scipy's Nelder-Mead from the 8 lowest cells;
each window edge bisected in dt to 2e-4 from 0.02 outside bandsieve's edge (checked open). bandsieve's edges must agree to 1e-3 (the brief's).

Usage: phasepath_numpy.py PATH_TO_BANDSIEVE
"""
import json
import subprocess
import sys

import numpy as np
from scipy.optimize import minimize

SX = np.array([[0, 1], [1, 0]], dtype=complex)
SY = np.array([[0, -1j], [1j, 0]], dtype=complex)
SZ = np.array([[1, 0], [0, -1]], dtype=complex)
A = 3.567
LSO = 0.125
CLOSED = 1e-5          # eV: a minimised gap below this is closed (the gap is linear in k near a node)
EDGE_TOL = 1e-3


def fkm_terms(dt, stag, t=1.0):
    """List of (D, M): Cartesian displacement source->destination and the 4x4 block (A up, B up,
    A down, B down) so that H(k) = sum M exp(i k.D)."""
    nn = [A / 4 * np.array(v, float) for v in ([1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1])]
    hop = [t + dt, t, t, t]
    terms = []
    for d, tt in zip(nn, hop):          # B at A + d: <A|H|B> with phase exp(ik.d), and conjugate
        for s in (0, 1):
            M = np.zeros((4, 4), complex)
            M[2 * s, 2 * s + 1] = tt
            terms.append((d, M))
            terms.append((-d, M.conj().T))
    for sub in (0, 1):
        own = nn if sub == 0 else [-v for v in nn]   # from a site of this sublattice to its neighbours
        for m in own:
            for q in own:
                if np.allclose(m, q):
                    continue
                # source = dest + m - q: path source -> (dest + m) -> dest, bonds d1 = -q, d2 = -m
                d1, d2 = -q, -m
                c = np.cross(d1, d2)
                spin = 1j * 8 * LSO / A ** 2 * (c[0] * SX + c[1] * SY + c[2] * SZ)
                M = np.zeros((4, 4), complex)
                for s1 in (0, 1):
                    for s2 in (0, 1):
                        M[2 * s1 + sub, 2 * s2 + sub] = spin[s1, s2]
                terms.append((m - q, M))
        xi = 1 if sub == 0 else -1
        M = np.zeros((4, 4), complex)
        M[sub, sub] = M[2 + sub, 2 + sub] = stag * xi
        terms.append((np.zeros(3), M))
    D = np.array([d for d, _ in terms])
    Ms = np.array([m for _, m in terms])
    return D, Ms


def recip():
    lat = A / 2 * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]], float)
    return 2 * np.pi * np.linalg.inv(lat).T


def gap(D, Ms, kc):
    ph = np.exp(1j * kc @ D.T)                      # nk x nterms
    H = np.einsum("kt,tij->kij", ph, Ms)
    H = 0.5 * (H + np.conj(np.transpose(H, (0, 2, 1))))
    e = np.linalg.eigvalsh(H)
    return e[:, 2] - e[:, 1]


def min_gap(dt, stag, n=16):
    D, Ms = fkm_terms(dt, stag)
    B = recip()
    g = np.arange(n) / n
    kr = np.array(np.meshgrid(g, g, g, indexing="ij")).reshape(3, -1).T
    gg = gap(D, Ms, kr @ B)
    best = np.inf
    for idx in np.argsort(gg)[:8]:
        f = lambda x: gap(D, Ms, (x @ B)[None, :])[0]
        res = minimize(f, kr[idx], method="Nelder-Mead",
                       options={"xatol": 1e-9, "fatol": 1e-12, "maxiter": 4000})
        best = min(best, res.fun)
        if best < CLOSED:
            break
    return best


def edge(stag, x_open, x_closed):
    while abs(x_closed - x_open) > 2e-4:
        mid = 0.5 * (x_open + x_closed)
        if min_gap(mid, stag) < CLOSED:
            x_closed = mid
        else:
            x_open = mid
    return 0.5 * (x_open + x_closed)


def run_path(binary, stag):
    out = subprocess.run([binary, "path", f"model:fkm:stag={stag}", "--param", "dt=-0.5..0.6",
                          "--samples", "23", "--track-steps", "8", "--tol", "1e-4", "--json"],
                         check=True, capture_output=True, text=True).stdout
    return json.loads(out)


def check(binary, stag):
    p = run_path(binary, stag)
    gl = [iv for iv in p["intervals"] if iv["gapless"]]
    assert len(gl) == 1, f"stag={stag}: expected one gapless interval, got {len(gl)}"
    w = gl[0]
    assert w["class"] == "Weyl semimetal", w["class"]
    lo, hi = w["from"], w["to"]
    # independent edges: bracket from the middle of bandsieve's window outward to +-0.3
    mid = 0.5 * (lo + hi)
    assert min_gap(mid, stag) < CLOSED, "numpy finds the gap open inside bandsieve's window"
    # brackets 0.02 outside bandsieve's edges, checked open here first
    assert min_gap(lo - 0.02, stag) > CLOSED and min_gap(hi + 0.02, stag) > CLOSED
    ref_lo = edge(stag, lo - 0.02, mid)
    ref_hi = edge(stag, hi + 0.02, mid)
    print(f"stag={stag}: bandsieve [{lo:.5f}, {hi:.5f}], numpy [{ref_lo:.5f}, {ref_hi:.5f}]")
    assert abs(lo - ref_lo) < EDGE_TOL and abs(hi - ref_hi) < EDGE_TOL, "window edges disagree"
    cl = [c for c in p["closings"] if c["kind"] == "Weyl phase"]
    assert len(cl) == 1
    assert not cl[0]["at_trims"], "the closing should be away from the TRIMs"
    assert all(not k["trim"] for k in cl[0]["k"])
    # the symmetry eigenvalues at the first touching predict Weyl pairs (crystalline.h)
    assert cl[0]["symmetry_prediction"] and "Weyl" in cl[0]["symmetry_prediction"], cl[0]["symmetry_prediction"]
    side = [iv for iv in p["intervals"] if not iv["gapless"]]
    assert len(side) == 2
    z_lo, z_hi = side[0]["invariants"]["z2"], side[1]["invariants"]["z2"]
    assert z_lo == [0, 1, 1, 1] and z_hi == [1, 1, 1, 1], (z_lo, z_hi)
    tracks = p["node_tracks"]
    assert len(tracks) > 0 and len(tracks) % 4 == 0, len(tracks)
    kinds = [e["kind"] for e in p["events"]]
    assert "node count not a multiple of 4 under time reversal" not in kinds
    assert "net chirality not zero" not in kinds
    created = [e for e in p["events"] if e["kind"] == "pair created"]
    killed = [e for e in p["events"] if e["kind"] == "pair annihilated"]
    assert len(created) == len(tracks) // 2 and len(killed) == len(tracks) // 2
    for e in created + killed:
        a, b = e["tracks"]
        assert tracks[a]["chirality"] == -tracks[b]["chirality"], "pair of equal chirality"
    moved = max(np.abs(np.array(t["points"][-1][1:]) - np.array(t["points"][0][1:])).max() for t in tracks)
    assert moved > 0.01, "nodes do not move"
    swapped = sum(t["created_with"] != t["annihilated_with"] for t in tracks)
    assert swapped > 0, "every node annihilates with its creation partner"
    assert p["confidence"] > 0.9
    return hi - lo


def main():
    binary = sys.argv[1]
    w1 = check(binary, 0.15)
    w2 = check(binary, 0.3)
    assert 0 < w1 < w2, f"the Weyl window should grow with the inversion breaking: {w1} then {w2}"
    print("ok")


if __name__ == "__main__":
    main()
