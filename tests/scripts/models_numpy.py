#!/usr/bin/env python3
"""Independent numpy cross-check of the built-in lattice models (src/model/lm_*.c).

For each model the Bloch Hamiltonian H(k) is written here directly from the published formula, in
Cartesian k and the position gauge (phases exp(i k.(r_source - r_dest))), without reading any H(R)
produced by bandsieve; second-neighbour paths are found by a search over neighbours rather than by
the enumeration the C code uses. Its numpy.linalg.eigvalsh eigenvalues are compared with
`bandsieve bands model:SPEC --k ... --json` at 20 random reduced k per spec. Eigenvalues do not
depend on the gauge (bandsieve uses H(k) = sum_R exp(2 pi i k.R) H(R)), on the spin layout or on the
orbital order, so they compare directly.

Tolerance 1e-9 eV (the brief's): both sides are double precision on matrices of size <= 4 with
entries of order 1 eV, so agreement is ~1e-14; 1e-9 leaves room only for round-off, not for a wrong
term (a 1% error in one hopping moves eigenvalues by ~1e-2 eV). Sign flips that are exact symmetries
of the spectrum (the sign of lambda_R, say) cannot be seen by any eigenvalue comparison; the unit
test checks the published gaps and invariants instead.

Usage: models_numpy.py PATH_TO_BANDSIEVE
"""
import json
import subprocess
import sys

import numpy as np

TOL_EV = 1e-9
NK = 20

S0 = np.eye(2, dtype=complex)
SX = np.array([[0, 1], [1, 0]], dtype=complex)
SY = np.array([[0, -1j], [1j, 0]], dtype=complex)
SZ = np.array([[1, 0], [0, -1]], dtype=complex)
SIGMA = [SX, SY, SZ]


def honeycomb(a):
    """Lattice rows, sublattice positions (Cartesian) and A->B bond vectors."""
    lat = np.array([[a, 0, 0], [a / 2, a * np.sqrt(3) / 2, 0], [0, 0, 20.0]])
    tau = [(lat[0] + lat[1]) / 3, 2 * (lat[0] + lat[1]) / 3]
    nn = [tau[1] - tau[0], tau[1] - tau[0] - lat[0], tau[1] - tau[0] - lat[1]]
    return lat, tau, nn


def nnn_paths(nn, sub):
    """Second-neighbour hops onto a site of sublattice sub (0 = A, 1 = B): list of (D, d1, d2), D
    the source's displacement from the destination, d1 the bond from the source to the shared
    neighbour, d2 from there to the destination. Found by searching all neighbour pairs."""
    own = [np.array(v) for v in nn] if sub == 0 else [-np.array(v) for v in nn]
    out = []
    for m in own:                # destination -> shared neighbour is m, so d2 = -m
        for q in own:            # source -> shared neighbour is d1 = -(other sublattice's bond)
            if np.allclose(q, m):
                continue
            D = m - q            # source = dest + m - q
            d1 = q
            d2 = -m
            out.append((D, d1, d2))
    return out


def graphene(p):
    lat, tau, nn = honeycomb(p["a"])
    t = p["t"]

    def h(k):
        f = sum(np.exp(1j * k @ d) for d in nn)
        return np.array([[0, -t * f], [-t * np.conj(f), 0]])
    return lat, h


def haldane(p):
    """Haldane's closed form, Phys. Rev. Lett. 61, 2015 (1988):
    h = 2 t2 cos(phi) sum_j cos(k.b_j) + t-term + [M - 2 t2 sin(phi) sum_j sin(k.b_j)] s_z, with
    b_j = a1, a2 - a1, -a2 (the second-neighbour vectors along which an A electron picks up +phi:
    a left turn, counter-clockwise circulation)."""
    lat, tau, nn = honeycomb(p["a"])
    t1, t2, phi, M = p["t1"], p["t2"], np.pi * p["phi"], p["M"]
    b = [lat[0], lat[1] - lat[0], -lat[1]]

    def h(k):
        f = sum(np.exp(1j * k @ d) for d in nn)
        cs = sum(np.cos(k @ v) for v in b)
        sn = sum(np.sin(k @ v) for v in b)
        return (2 * t2 * np.cos(phi) * cs * S0 - t1 * (f.real * SX - f.imag * SY)
                + (M - 2 * t2 * np.sin(phi) * sn) * SZ)
    return lat, h


def kane_mele(p):
    """Phys. Rev. Lett. 95, 226801 (2005), Eq. (1): t c+c + i lambda_SO nu_ij c+ s_z c
    + i lambda_R c+ (s x d_ij)_z c + lambda_v xi_i c+c; basis (A up, B up, A down, B down)."""
    lat, tau, nn = honeycomb(p["a"])
    t, lso, lr, lv = p["t"], p["lambda_SO"], p["lambda_R"], p["lambda_v"]

    def h(k):
        H = np.zeros((4, 4), dtype=complex)
        for sub in (0, 1):
            for D, d1, d2 in nnn_paths(nn, sub):
                nu = (2 / np.sqrt(3)) * np.cross(d1 / np.linalg.norm(d1), d2 / np.linalg.norm(d2))[2]
                assert abs(abs(nu) - 1) < 1e-12
                for s, sz in ((0, 1), (1, -1)):
                    H[2 * s + sub, 2 * s + sub] += 1j * lso * nu * sz * np.exp(1j * k @ D)
            xi = 1 if sub == 0 else -1
            H[sub, sub] += lv * xi
            H[2 + sub, 2 + sub] += lv * xi
        for d in nn:             # <A|H|B> with B at +d; d_ij points from B (j) to A (i)
            e = np.exp(1j * k @ d)
            dh = -d / np.linalg.norm(d)
            spin = t * S0 + 1j * lr * (SX * dh[1] - SY * dh[0])
            for s1 in (0, 1):
                for s2 in (0, 1):
                    H[2 * s1, 2 * s2 + 1] += spin[s1, s2] * e
        return hermitian_from_upper_blocks(H)
    return lat, h


def hermitian_from_upper_blocks(H):
    """H holds every A<-B element and the diagonal-sublattice elements; add the B<-A elements as
    the conjugate transpose of the A<-B ones."""
    n = H.shape[0]
    out = H.copy()
    for i in range(n):
        for j in range(n):
            if i % 2 == 0 and j % 2 == 1:
                out[j, i] += np.conj(H[i, j])
    return out


def bhz(p):
    """Science 314, 1757 (2006): H = diag(h(k), h*(-k)), h = eps + d.sigma with d1 = A sin kx,
    d2 = A sin ky, d3 = M - 2B(2 - cos kx - cos ky), eps = C - 2D(2 - cos kx - cos ky), plus the
    spin-block couplings documented in lattice_models.h: g sin ky tau_x in both off-diagonal blocks
    (s_x tau_x) and delta s_y tau_y (blocks -i delta tau_y above, +i delta tau_y below)."""
    a = p["a"]
    lat = np.array([[a, 0, 0], [0, a, 0], [0, 0, 20.0]])

    def hup(kx, ky):
        c = 2 - np.cos(kx) - np.cos(ky)
        eps = p["C"] - 2 * p["D"] * c
        d = [p["A"] * np.sin(kx), p["A"] * np.sin(ky), p["M"] - 2 * p["B"] * c]
        return eps * S0 + sum(di * s for di, s in zip(d, SIGMA))

    def h(k):
        kx, ky = k[0] * a, k[1] * a
        up = hup(kx, ky)
        dn = np.conj(hup(-kx, -ky))
        off = p["g"] * np.sin(ky) * SX - 1j * p["delta"] * SY
        offd = p["g"] * np.sin(ky) * SX + 1j * p["delta"] * SY
        return np.block([[up, off], [offd, dn]])
    return lat, h


def fkm(p):
    """Phys. Rev. Lett. 98, 106803 (2007): t_ij c+c (t + dt on the [111] bond) +
    i (8 lambda_SO / a^2) c+ s.(d1 x d2) c on second neighbours, + stag xi_i."""
    a = p["a"]
    lat = a / 2 * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]], dtype=float)
    nn = [a / 4 * np.array(v, dtype=float) for v in ([1, 1, 1], [1, -1, -1], [-1, 1, -1], [-1, -1, 1])]
    hop = [p["t"] + p["dt"], p["t"], p["t"], p["t"]]

    def h(k):
        H = np.zeros((4, 4), dtype=complex)   # (A up, B up, A down, B down)
        for sub in (0, 1):
            for D, d1, d2 in nnn_paths(nn, sub):
                c = np.cross(d1, d2)
                spin = 1j * 8 * p["lambda_SO"] / a**2 * sum(ci * s for ci, s in zip(c, SIGMA))
                e = np.exp(1j * k @ D)
                for s1 in (0, 1):
                    for s2 in (0, 1):
                        H[2 * s1 + sub, 2 * s2 + sub] += spin[s1, s2] * e
            xi = 1 if sub == 0 else -1
            H[sub, sub] += p["stag"] * xi
            H[2 + sub, 2 + sub] += p["stag"] * xi
        for d, t in zip(nn, hop):
            e = np.exp(1j * k @ d)
            H[0, 1] += t * e
            H[2, 3] += t * e
        return hermitian_from_upper_blocks(H)
    return lat, h


def rocksalt_tci(p):
    """Nat. Commun. 3, 982 (2012), its minimal SnTe-class model (parameters and mass sign from
    memory, as in the C code): p orbitals with spin on the rock-salt sublattices, sigma bonds only
    (t d d^T), t12 to the six nearest neighbours along the cube axes, +-t11 to the twelve second
    neighbours along the face diagonals, mass +m / -m, and on-site i lambda (c+ x c).s. Basis as in
    the C code at layout 0: (site, orbital) = (1,x) (1,y) (1,z) (2,x) (2,y) (2,z), spin up then down.
    Neighbours are found by a search over lattice points within a radius, not enumerated."""
    a = p["a"]
    lat = a / 2 * np.array([[0, 1, 1], [1, 0, 1], [1, 1, 0]], dtype=float)
    tau = [np.zeros(3), a / 2 * np.ones(3)]
    lam = [p["lambda1"], p["lambda2"]]
    eps = np.zeros((3, 3, 3))
    for i, j, k in ((0, 1, 2), (1, 2, 0), (2, 0, 1)):
        eps[i, j, k], eps[j, i, k] = 1, -1
    cells = [np.array(c) @ lat for c in np.ndindex(5, 5, 5)]
    cells = [c - 2 * (lat[0] + lat[1] + lat[2]) for c in cells]

    def h(k):
        H = np.zeros((12, 12), dtype=complex)
        for j in (0, 1):
            for s in (0, 1):
                for o in range(3):
                    H[6 * s + 3 * j + o, 6 * s + 3 * j + o] += p["m"] * (1 if j == 0 else -1)
            for x in range(3):
                for y in range(3):
                    soc = 1j * lam[j] * sum(eps[x, y, z] * SIGMA[z] for z in range(3))
                    for s1 in (0, 1):
                        for s2 in (0, 1):
                            H[6 * s1 + 3 * j + x, 6 * s2 + 3 * j + y] += soc[s1, s2]
        for jd in (0, 1):
            for js in (0, 1):
                for c in cells:
                    d = c + tau[js] - tau[jd]          # source minus destination
                    dist = np.linalg.norm(d)
                    if jd != js and abs(dist - a / 2) < 1e-6:
                        t = p["t12"]
                    elif jd == js and abs(dist - a / np.sqrt(2)) < 1e-6:
                        t = p["t11"] if jd == 0 else -p["t11"]
                    else:
                        continue
                    T = t * np.outer(d, d) / dist**2 * np.exp(1j * k @ d)
                    for s in (0, 1):
                        H[6 * s + 3 * jd:6 * s + 3 * jd + 3, 6 * s + 3 * js:6 * s + 3 * js + 3] += T
        return H
    return lat, h


def weyl(p):
    """t sin ky s_x + t sin kz s_y + [t(cos kx - cos k0) + m(2 - cos ky - cos kz)] s_z."""
    a = p["a"]
    lat = a * np.eye(3)
    t, m, k0 = p["t"], p["m"], 2 * np.pi * p["w"]

    def h(k):
        kx, ky, kz = k * a
        return (t * np.sin(ky) * SX + t * np.sin(kz) * SY
                + (t * (np.cos(kx) - np.cos(k0)) + m * (2 - np.cos(ky) - np.cos(kz))) * SZ)
    return lat, h


def nodal_line(p):
    """t(m - cos kx - cos ky - cos kz) s_z + tz sin kz s_x."""
    a = p["a"]
    lat = a * np.eye(3)

    def h(k):
        kx, ky, kz = k * a
        return p["t"] * (p["m"] - np.cos(kx) - np.cos(ky) - np.cos(kz)) * SZ + p["tz"] * np.sin(kz) * SX
    return lat, h


def atomic(p):
    """+-delta on A (0,0,0) / B (body centre), spin-degenerate A-B hopping t to 2^dim neighbours."""
    a, dim = p["a"], int(p["dim"])
    lat = np.array([[a, 0, 0], [0, a, 0], [0, 0, a if dim == 3 else 20.0]])

    def h(k):
        f = p["t"] * np.prod([2 * np.cos(k[i] * a / 2) for i in range(dim)])
        hs = np.array([[p["delta"], f], [np.conj(f), -p["delta"]]])
        return np.kron(S0, hs)
    return lat, h


def metal(p):
    """-2t sum_i cos k_i + (delta/2) s_z + v s_x."""
    a, dim = p["a"], int(p["dim"])
    lat = np.array([[a, 0, 0], [0, a, 0], [0, 0, a if dim == 3 else 20.0]])

    def h(k):
        e = -2 * p["t"] * sum(np.cos(k[i] * a) for i in range(dim))
        return e * S0 + p["delta"] / 2 * SZ + p["v"] * SX
    return lat, h


DEFAULTS = {
    "graphene": (graphene, {"t": 2.7, "a": 2.46}),
    "haldane": (haldane, {"t1": 1.0, "t2": 0.1, "phi": 0.5, "M": 0.0, "a": 2.46}),
    "kane_mele": (kane_mele, {"t": 1.0, "lambda_SO": 0.06, "lambda_R": 0.05, "lambda_v": 0.1,
                              "a": 2.46, "layout": 0}),
    "bhz": (bhz, {"A": 1.0, "B": 1.0, "C": 0.0, "D": 0.0, "M": 1.0, "g": 0.0, "delta": 0.0,
                  "a": 1.0, "layout": 0}),
    "fkm": (fkm, {"t": 1.0, "dt": 0.4, "lambda_SO": 0.125, "stag": 0.0, "a": 3.567, "layout": 0}),
    "weyl": (weyl, {"t": 1.0, "m": 1.0, "w": 0.25, "a": 1.0}),
    "nodal_line": (nodal_line, {"t": 1.0, "m": 2.0, "tz": 1.0, "a": 1.0}),
    "atomic": (atomic, {"delta": 2.0, "t": 0.1, "dim": 3, "a": 1.0, "layout": 0}),
    "trivial": (atomic, {"delta": 2.0, "t": 0.1, "dim": 3, "a": 1.0, "layout": 0}),
    "metal": (metal, {"t": 1.0, "delta": 1.0, "v": 0.2, "dim": 3, "a": 1.0}),
    "rocksalt_tci": (rocksalt_tci, {"m": 1.65, "t12": 0.9, "t11": 0.5, "lambda1": -0.7, "lambda2": 0.3,
                                    "a": 6.3, "layout": 0}),
}

# Defaults and variants that switch on every optional term (and the interleaved layout).
SPECS = [
    "graphene", "graphene:t=-1.3,a=1",
    "haldane", "haldane:t1=0.7,t2=0.23,phi=0.3,M=0.41",
    "kane_mele", "kane_mele:lambda_R=0,lambda_v=0.4", "kane_mele:t=0.8,lambda_SO=0.11,lambda_R=0.2,"
    "lambda_v=0.07,layout=1",
    "bhz", "bhz:A=0.8,B=1.3,C=0.2,D=0.4,M=2.5,g=0.3,delta=0.15", "bhz:M=-1,delta=0.2,layout=1",
    "fkm", "fkm:dt=-0.4", "fkm:dt=0.25,lambda_SO=0.2,stag=0.3,layout=1,a=5.43",
    "weyl", "weyl:t=0.9,m=1.7,w=0.1",
    "nodal_line", "nodal_line:t=1.2,m=1.5,tz=0.6",
    "atomic", "trivial:dim=2,t=0.3,delta=1,layout=1",
    "metal", "metal:dim=2,t=0.5,delta=0.3,v=0.1",
    "rocksalt_tci", "rocksalt_tci:m=-1.2,t12=0.7,t11=0.3,lambda1=0.4,lambda2=-0.2,layout=1",
]


def parse_spec(spec):
    name, _, rest = spec.partition(":")
    builder, defaults = DEFAULTS[name]
    p = dict(defaults)
    for item in filter(None, rest.split(",")):
        key, _, val = item.partition("=")
        assert key in p, (spec, key)
        p[key] = float(val)
    return builder, p


def run_bands(binary, spec, ks):
    cmd = [binary, "bands", "model:" + spec, "--json"]
    for k in ks:
        cmd += ["--k", ",".join(repr(float(x)) for x in k)]
    res = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    if res.returncode != 0:
        raise RuntimeError(f"{' '.join(cmd[:3])}: exit {res.returncode}: {res.stderr.strip()}")
    out = json.loads(res.stdout)
    return np.array(out["k"], dtype=float), np.array(out["energies_eV"], dtype=float)


def check_spec(binary, spec, rng):
    builder, p = parse_spec(spec)
    lat, h = builder(p)
    recip = 2 * np.pi * np.linalg.inv(lat).T          # rows b_i, a_i . b_j = 2 pi delta_ij
    ks = rng.uniform(-1, 1, size=(NK, 3))
    if spec.split(":")[0] in ("graphene", "haldane", "kane_mele", "bhz") or "dim=2" in spec:
        ks[:, 2] = 0.0                               # 2D: k3 is ignored; keep the echo comparable
    kout, ebs = run_bands(binary, spec, ks)
    if kout.shape != ks.shape or not np.allclose(kout, ks, atol=1e-12, rtol=0):
        return f"{spec}: k-points echoed back differ"
    worst = 0.0
    for j, k in enumerate(ks):
        H = h(k @ recip)
        if np.max(np.abs(H - H.conj().T)) > 1e-12:
            return f"{spec}: numpy reference H(k) not Hermitian (bug in this script)"
        ref = np.linalg.eigvalsh(H)
        if ebs.shape[1] != ref.size:
            return f"{spec}: {ebs.shape[1]} bands from bandsieve, {ref.size} expected"
        worst = max(worst, np.max(np.abs(ebs[j] - ref)))
    status = "ok" if worst <= TOL_EV else "FAIL"
    print(f"{status:4s} {spec:70s} max |dE| = {worst:.2e} eV")
    return None if worst <= TOL_EV else f"{spec}: max |dE| = {worst:.3e} eV > {TOL_EV:g} eV"


def main():
    if len(sys.argv) != 2:
        print(__doc__, file=sys.stderr)
        return 2
    rng = np.random.default_rng(20261202)
    failures = []
    for spec in SPECS:
        try:
            msg = check_spec(sys.argv[1], spec, rng)
        except (RuntimeError, ValueError, KeyError, OSError, subprocess.TimeoutExpired) as e:
            msg = f"{spec}: {e}"
        if msg:
            failures.append(msg)
    for f in failures:
        print("FAIL", f, file=sys.stderr)
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
