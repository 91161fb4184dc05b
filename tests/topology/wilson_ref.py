"""Reference hybrid Wannier centres for test_wilson.c, computed independently with numpy.

Usage: wilson_ref.py TABLE NOCC DIR K1 K2 K3 NK TAU...
Reads the plain-text hopping table TABLE and the reduced orbital position of every basis state
(TAU: 3 numbers per state). Works in the other gauge from bandsieve: H~(k) = sum_R
exp(2 pi i k.(R + tau_b - tau_a)) H_ab(R) / deg(R), whose eigenvectors are the cell-periodic
parts; the string k_j = K + j/NK e_DIR (j = 0..NK-1) is closed by u~(K + e_DIR) =
diag(exp(-2 pi i tau_a[DIR])) u~(K). The centres are -angle/(2 pi) mod 1 of the eigenvalues of
the product of the NOCC x NOCC overlap matrices (Phys. Rev. B 84, 075119 (2011)); prints them
sorted on one line.
"""
import sys

import numpy as np


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


def main():
    R, H = read_table(sys.argv[1])
    nocc, d = int(sys.argv[2]), int(sys.argv[3])
    k0 = np.array([float(x) for x in sys.argv[4:7]])
    nk = int(sys.argv[7])
    n = H.shape[1]
    tau = np.array([float(x) for x in sys.argv[8:8 + 3 * n]]).reshape(n, 3)
    dtau = tau[None, :, :] - tau[:, None, :]          # tau_b - tau_a at [a, b]
    us = []
    for j in range(nk):
        k = k0.copy()
        k[d] += j / nk
        ph = np.exp(2j * np.pi * (R @ k))[:, None, None] * np.exp(2j * np.pi * (dtau @ k))[None]
        _, v = np.linalg.eigh((ph * H).sum(0))
        us.append(v[:, :nocc])
    us.append(np.exp(-2j * np.pi * tau[:, d])[:, None] * us[0])
    w = np.eye(nocc, dtype=complex)
    for j in range(nk):
        w = w @ (us[j].conj().T @ us[j + 1])
    x = np.sort(np.mod(-np.angle(np.linalg.eigvals(w)) / (2 * np.pi), 1.0))
    print(" ".join("%.15f" % v for v in x))


main()
