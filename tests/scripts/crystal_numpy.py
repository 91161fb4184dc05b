#!/usr/bin/env python3
"""Independent numpy check of the symmetry eigenvalues printed by `bandsieve symmetry --json`.

For the Kane-Mele and BHZ models (Phys. Rev. Lett. 95, 226801 (2005); Science 314, 1757 (2006)),
H(k) is built by this folder's numpy implementation (models_numpy.py: position gauge, Cartesian k,
written from the papers). For every operation that bandsieve reports as kept, the operator is built
here in the position gauge, where it is k-independent: sites are carried by the Cartesian map
r -> Rc r + A^T t (from the reported W and t), s orbitals keep their sign and the p orbitals of these
models (pz: the honeycomb models' pi orbitals, and BHZ's p-like orbital taken as pz, the documented
default shape) are multiplied by Rc_zz, and spin by
U = expm(-i theta n.sigma / 2) (scipy) with n the reported axis and theta from the trace of the proper
part. It is checked to commute with H at random k, and at each high-symmetry k the eigenvalues of
(Lambda V) on every band multiplet (Lambda = exp(i G.tau), G = g k - k) are compared with bandsieve's.

Tolerance 1e-8: both sides diagonalise matrices of size 4 in double precision; a wrong spin matrix,
site map or lattice phase changes eigenvalues by O(1).

Usage: crystal_numpy.py PATH_TO_BANDSIEVE
"""
import json
import os
import subprocess
import sys

import numpy as np
from scipy.linalg import expm

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import models_numpy as mn  # noqa: E402

TOL = 1e-8
CASES = [
    ("kane_mele", [(0, 0, 0), (0.5, 0, 0), (1 / 3, 1 / 3, 0), (0, 0.5, 0)]),
    ("kane_mele:lambda_R=0,lambda_v=0.4", [(0, 0, 0), (0.5, 0, 0), (1 / 3, 1 / 3, 0), (2 / 3, 2 / 3, 0)]),
    ("bhz", [(0, 0, 0), (0.5, 0, 0), (0.5, 0.5, 0), (0, 0.5, 0)]),
    ("bhz:M=-1,g=0.3", [(0, 0, 0), (0.5, 0, 0), (0.5, 0.5, 0)]),
]


def sites_and_orbitals(name, lat):
    """Cartesian site of each basis state, its orbital l, and its spin (0 up, 1 down); both models
    use the blocks layout at layout=0: all up states, then all down states. The honeycomb models
    carry pz orbitals (l = 1), as graphene's pi bands do."""
    if name == "kane_mele":
        tau = [(lat[0] + lat[1]) / 3, 2 * (lat[0] + lat[1]) / 3]
        return [tau[0], tau[1], tau[0], tau[1]], [1, 1, 1, 1], [0, 0, 1, 1]
    zero = np.zeros(3)
    return [zero] * 4, [0, 1, 0, 1], [0, 0, 1, 1]


def operator(op, lat, pos, ls, spins):
    W = np.array(op["W"], dtype=float)
    t = np.array(op["t"], dtype=float)
    Rc = lat.T @ W @ np.linalg.inv(lat.T)
    det = np.linalg.det(Rc)
    P = Rc * np.sign(det)
    theta = np.arccos(np.clip((np.trace(P) - 1) / 2, -1, 1))
    n = np.array(op["axis"], dtype=float)
    U = expm(-0.5j * theta * sum(ni * s for ni, s in zip(n, mn.SIGMA))) if np.linalg.norm(n) > 0 else np.eye(2)
    N = len(pos)
    V = np.zeros((N, N), dtype=complex)
    for i in range(N):
        img = Rc @ pos[i] + lat.T @ t
        for j in range(N):
            d = np.linalg.solve(lat.T, img - pos[j])
            if np.allclose(d, np.round(d), atol=1e-6) and ls[i] == ls[j]:
                orb = 1.0 if ls[i] == 0 else Rc[2, 2]
                V[j, i] += orb * U[spins[j], spins[i]]
    return V, Rc


def check(binary, spec, kpts):
    name = spec.split(":")[0]
    builder, p = mn.parse_spec(spec)
    lat, h = builder(p)
    cmd = [binary, "symmetry", "model:" + spec, "--json"]
    for k in kpts:
        cmd += ["--k", ",".join(repr(float(x)) for x in k)]
    res = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    if res.returncode != 0:
        return f"{spec}: exit {res.returncode}: {res.stderr.strip()}"
    out = json.loads(res.stdout)
    recip = 2 * np.pi * np.linalg.inv(lat).T
    pos, ls, spins = sites_and_orbitals(name, lat)
    rng = np.random.default_rng(3)
    kept = [i for i, op in enumerate(out["operations"]) if op["kept"]]
    worst = 0.0
    for i in kept:
        V, Rc = operator(out["operations"][i], lat, pos, ls, spins)
        for _ in range(3):  # V H(k) V^+ = H(Rc k) at random k
            k = rng.uniform(-1, 1, 3)
            k[2] = 0
            kc = k @ recip
            worst = max(worst, np.max(np.abs(V @ h(kc) @ V.conj().T - h(Rc @ kc))))
    if worst > TOL:
        return f"{spec}: a kept operation does not commute with the numpy H(k) (residual {worst:.2g})"
    checked = 0
    for kp in out["kpoints"]:
        k = np.array(kp["k"])
        kc = k @ recip
        E, psi = np.linalg.eigh(h(kc))
        for mult in kp["multiplets"]:
            lo, hi = mult["bands"]
            if abs(E[lo - 1] - mult["energy_eV"]) > 1e-8:
                return f"{spec}: energy {mult['energy_eV']} vs numpy {E[lo - 1]}"
            block = psi[:, lo - 1:hi]
            for key, ev in mult["eigenvalues"].items():
                V, Rc = operator(out["operations"][int(key)], lat, pos, ls, spins)
                G = Rc @ kc - kc
                Lam = np.diag([np.exp(1j * G @ r) for r in pos])
                M = block.conj().T @ Lam @ V @ block
                mine = np.sort_complex(np.round(np.linalg.eigvals(M), 10))
                theirs = np.sort_complex(np.round(np.array([complex(a, b) for a, b in ev]), 10))
                if np.max(np.abs(mine - theirs)) > TOL:
                    return f"{spec}: k {k}, bands {lo}-{hi}, op {key}: {theirs} vs numpy {mine}"
                checked += 1
    print(f"{spec}: {len(kept)} kept operations commute with the numpy H(k); {checked} eigenvalue sets agree")
    return None if checked > 0 else f"{spec}: no eigenvalues compared"


def main():
    binary = sys.argv[1]
    errors = [e for e in (check(binary, spec, ks) for spec, ks in CASES) if e]
    for e in errors:
        print("FAIL", e)
    return 1 if errors else 0


if __name__ == "__main__":
    sys.exit(main())
