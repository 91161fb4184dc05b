"""Reference Hall conductivities for test_transport.c, computed independently with numpy.

Usage: transport_ref.py MODEL_FILE E_F KT N
MODEL_FILE (written by the test): "dim norb nR"; the 3 lattice rows (Angstrom) on one line; norb
lines "x y z s" (reduced position and spin +1/-1, 0 when spinless); then per lattice vector a line
"R1 R2 R3 deg" followed by norb*norb lines "re im" of <m,0|H|n,R> (n varying fastest).

H(k) is built directly in the position gauge, H_mn(k) = sum_R exp(i k.(R + r_n - r_m)) H_mn(R)/deg,
and the Cartesian velocity is its analytic derivative i (R + r_n - r_m) H_mn(R) ... (not the
reduced derivatives of the C code). On an N x N midpoint mesh of the 2D zone, with Fermi-Dirac
occupations at temperature KT (eV), the Kubo sums (Phys. Rev. Lett. 49, 405 (1982))
  S_ab = sum_n f_n (-2) Im sum_{m != n} <n|A|m><m|v_y|n> / (E_m - E_n)^2
with A = v_x (AHC) and A = (1/2){s_z, v_x} (SHC, Phys. Rev. Lett. 92, 126603 (2004)) give
sigma_xy = (2 pi / area) <S> in e^2/h and sigma^{s_z}_xy = (pi / area) <S> in e/(2 pi).
Prints one line: ahc shc.
"""
import sys

import numpy as np


def read_model(path):
    with open(path) as f:
        tok = f.read().split()
    pos = 0

    def take(n, conv=float):
        nonlocal pos
        out = [conv(t) for t in tok[pos:pos + n]]
        pos += n
        return out

    dim, norb, nr = take(3, int)
    lat = np.array(take(9)).reshape(3, 3)
    st = np.array(take(4 * norb)).reshape(norb, 4)
    rs, hs = [], []
    for _ in range(nr):
        r = take(4, int)
        vals = np.array(take(2 * norb * norb)).reshape(norb * norb, 2)
        h = (vals[:, 0] + 1j * vals[:, 1]).reshape(norb, norb) / r[3]
        rs.append(r[:3])
        hs.append(h)
    return dim, lat, st[:, :3], st[:, 3], np.array(rs, dtype=float), np.array(hs)


def main():
    path, ef, kt, n = sys.argv[1], float(sys.argv[2]), float(sys.argv[3]), int(sys.argv[4])
    dim, lat, tau, spin, rs, hs = read_model(path)
    if dim != 2:
        raise SystemExit("2D only")
    rcart = tau @ lat                                   # orbital positions, Angstrom
    bvec = 2 * np.pi * np.linalg.inv(lat).T             # rows b_i with a_i . b_j = 2 pi delta_ij
    t = (np.arange(n) + 0.5) / n
    k1, k2 = np.meshgrid(t, t, indexing="ij")
    kred = np.stack([k1.ravel(), k2.ravel(), np.zeros(n * n)], axis=1)
    kc = kred @ bvec                                    # Cartesian k, 1/Angstrom
    # d[R, m, n] = R_cart + r_n - r_m
    d = (rs @ lat)[:, None, None, :] + rcart[None, None, :, :] - rcart[None, :, None, :]
    S = np.diag(spin)
    area = abs(lat[0, 0] * lat[1, 1] - lat[0, 1] * lat[1, 0])
    total = np.zeros(2)
    for c0 in range(0, n * n, 4000):                    # chunks keep the phase table small
        kcc = kc[c0:c0 + 4000]
        phase = np.exp(1j * np.einsum("kc,rmnc->krmn", kcc, d))
        H = np.einsum("krmn,rmn->kmn", phase, hs)
        vx = np.einsum("krmn,rmn->kmn", phase * 1j * d[None, :, :, :, 0], hs)
        vy = np.einsum("krmn,rmn->kmn", phase * 1j * d[None, :, :, :, 1], hs)
        E, U = np.linalg.eigh(H)
        Ud = np.conj(np.swapaxes(U, 1, 2))
        Vx, Vy = Ud @ vx @ U, Ud @ vy @ U
        Jx = Ud @ (0.5 * (S @ vx + vx @ S)) @ U
        x = np.clip((E - ef) / kt, -700, 700)
        f = 1 / (1 + np.exp(x))
        de = E[:, None, :] - E[:, :, None]              # de[k, n, m] = E_m - E_n
        off = ~np.eye(E.shape[1], dtype=bool)[None, :, :]
        den = np.where(off, de ** 2, 1.0)
        for i, A in enumerate((Vx, Jx)):
            prod = np.imag(A * np.swapaxes(Vy, 1, 2)) * off / den  # Im A_nm Vy_mn / dE^2
            omega = -2 * prod.sum(axis=2)
            total[i] += (f * omega).sum()
    out = [2 * np.pi / area * total[0] / (n * n), np.pi / area * total[1] / (n * n)]
    print("%.12e %.12e" % (out[0], out[1]))


main()
