"""Reference gaps for test_gaps.c, computed independently with numpy and scipy.

Usage: gaps_ref.py TABLE NOCC DIM
Reads the plain-text hopping table TABLE, builds H(k) = sum_R exp(2 pi i k.R) H(R) / deg(R) with
numpy, scans a 28^dim grid of E_N and E_{N+1} (N = NOCC), refines the best few grid points of the
direct gap, of -E_N and of E_{N+1} with scipy's Nelder-Mead (xatol 1e-9, fatol 1e-12) and prints
one line: gap_direct vbm cbm k_direct(3) k_vbm(3) k_cbm(3).
"""
import sys

import numpy as np
from scipy.optimize import minimize


def read_table(path):
    with open(path) as f:
        f.readline()
        n = int(f.readline())
        nr = int(f.readline())
        deg = []
        while len(deg) < nr:
            deg += [int(x) for x in f.readline().split()]
        data = np.loadtxt(f)
    data = data.reshape(nr, n * n, 7)
    R = data[:, 0, :3].astype(int)
    H = np.zeros((nr, n, n), complex)
    for r in range(nr):
        m = data[r, :, 3].astype(int) - 1
        c = data[r, :, 4].astype(int) - 1
        H[r, m, c] = data[r, :, 5] + 1j * data[r, :, 6]
    return R, H / np.array(deg)[:, None, None]


def bands(R, H, ks, nocc):
    ph = np.exp(2j * np.pi * ks @ R.T)
    Hk = np.einsum("kr,rmn->kmn", ph, H)
    e = np.linalg.eigvalsh(Hk)
    return e[:, nocc - 1], e[:, nocc]


def main():
    R, H = read_table(sys.argv[1])
    nocc, dim = int(sys.argv[2]), int(sys.argv[3])
    n = 28
    axes = [np.arange(n) / n] * dim + [np.zeros(1)] * (3 - dim)
    ks = np.stack(np.meshgrid(*axes, indexing="ij"), -1).reshape(-1, 3)
    lo, hi = bands(R, H, ks, nocc)
    funcs = [lambda a, b: b - a, lambda a, b: -a, lambda a, b: b]
    out_v, out_k = [], []
    for fn in funcs:
        grid = fn(lo, hi)
        best = (np.inf, None)
        for i in np.argsort(grid)[:6]:
            def f(x):
                k = np.zeros(3)
                k[:dim] = x
                a, b = bands(R, H, k[None, :], nocc)
                return fn(a[0], b[0])
            res = minimize(f, ks[i, :dim], method="Nelder-Mead",
                           options={"xatol": 1e-9, "fatol": 1e-12, "maxiter": 20000})
            if res.fun < best[0]:
                k = np.zeros(3)
                k[:dim] = np.mod(res.x, 1.0)
                best = (res.fun, k)
        out_v.append(best[0])
        out_k.append(best[1])
    vals = [out_v[0], -out_v[1], out_v[2]]
    print(" ".join("%.12f" % v for v in vals + list(np.concatenate(out_k))))


main()
