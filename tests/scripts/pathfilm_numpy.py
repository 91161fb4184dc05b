#!/usr/bin/env python3
"""Films over thickness: `bandsieve path SOURCE --direction 0,0,1 --layers 1..6` on the Fu-Kane-Mele
strong TI (Phys. Rev. Lett. 98, 106803 (2007)) against an independent numpy construction of the same
films.

A 3D topological insulator made thin is a 2D system whose 2D Z2 depends on the number of layers
(Phys. Rev. B 81, 041307 (2010)). bandsieve cuts the films with its slab builder (a unimodular
rebasing of H(R)); here each film is built instead by enumerating its sites explicitly (A and B of
cells n3 = 0..N-1 of the fcc primitive cell, plane spanned by a1 and a2, which is the cubic (111)
plane) and connecting every pair that a bulk hopping of the model links. The minimal direct gap at
half filling (2N of 4N bands, 16^2 mesh + Nelder-Mead) must agree with bandsieve's film gap to 1e-5 eV,
for every N. The 2D Z2 sequence must change with thickness, and bandsieve's two Z2 methods (parity
and Wannier-centre flow) must agree on each film (confidence 0.97).

Usage: pathfilm_numpy.py PATH_TO_BANDSIEVE
"""
import json
import os
import subprocess
import sys

import numpy as np
from scipy.optimize import minimize

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from phasepath_numpy import A, fkm_terms  # noqa: E402  (same model, numpy form)

TOL_EV = 1e-5
DT = 0.4


def film(N):
    D, Ms = fkm_terms(DT, 0.0)
    lat = A / 2 * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]], float)
    tau = [np.zeros(3), lat.sum(axis=0) / 4]
    to_red = np.linalg.inv(lat.T)
    idx = {}
    for n3 in range(N):
        for sub in (0, 1):
            for sp in (0, 1):
                idx[(sub, n3, sp)] = len(idx)
    entries = []   # (row, col, value, m1, m2)
    for t in range(len(D)):
        M = Ms[t]
        for sa in (0, 1):
            for sb in (0, 1):
                blk = M[np.ix_([sa, 2 + sa], [sb, 2 + sb])]
                if not np.any(blk):
                    continue
                red = to_red @ (tau[sa] + D[t] - tau[sb])
                m = np.rint(red)
                if not np.allclose(red, m, atol=1e-9):
                    continue
                for n3 in range(N):
                    nb = n3 + int(m[2])
                    if not 0 <= nb < N:
                        continue
                    for s1 in (0, 1):
                        for s2 in (0, 1):
                            if blk[s1, s2] != 0:
                                entries.append((idx[(sa, n3, s1)], idx[(sb, nb, s2)], blk[s1, s2], m[0], m[1]))
    rows = np.array([e[0] for e in entries])
    cols = np.array([e[1] for e in entries])
    vals = np.array([e[2] for e in entries])
    mm = np.array([[e[3], e[4]] for e in entries])
    n = len(idx)

    def gaps(k):
        k = np.atleast_2d(k)
        ph = np.exp(2j * np.pi * k @ mm.T) * vals      # nk x nentries
        H = np.zeros((len(k), n, n), complex)
        for j in range(len(entries)):
            H[:, rows[j], cols[j]] += ph[:, j]
        e = np.linalg.eigvalsh(H)
        return e[:, 2 * N] - e[:, 2 * N - 1]
    g = np.arange(16) / 16
    kk = np.array(np.meshgrid(g, g, indexing="ij")).reshape(2, -1).T
    gg = gaps(kk)
    best = gg.min()
    for i in np.argsort(gg)[:6]:
        res = minimize(lambda x: gaps(x)[0], kk[i], method="Nelder-Mead",
                       options={"xatol": 1e-10, "fatol": 1e-13, "maxiter": 3000})
        best = min(best, res.fun)
    return best


def main():
    binary = sys.argv[1]
    out = subprocess.run([binary, "path", f"model:fkm:dt={DT}", "--direction", "0,0,1", "--layers", "1..6",
                          "--json"], check=True, capture_output=True, text=True).stdout
    p = json.loads(out)
    films = p["films"]
    assert [f["layers"] for f in films] == list(range(1, 7))
    z2 = []
    for f in films:
        ref = film(f["layers"])
        print(f"N={f['layers']}: bandsieve gap {f['gap_direct_eV']:.8f} eV, numpy {ref:.8f} eV, "
              f"{f['class']} Z2={f['z2']}")
        assert abs(f["gap_direct_eV"] - ref) < TOL_EV, "film gaps disagree"
        assert f["states"] == 4 * f["layers"]
        assert f["z2"] is not None and f["confidence"] > 0.95, f
        z2.append(f["z2"])
    assert len(set(z2)) == 2, f"the 2D Z2 should change with thickness: {z2}"
    assert len(p["transitions"]) >= 1
    print("ok")


if __name__ == "__main__":
    main()
