#!/usr/bin/env python3
"""`bandsieve slab` end to end.

1. Slab Hamiltonians against numpy: the bulk H(k) of tests/scripts/models_numpy.py (written from the
   published formulas, position gauge, nothing read from bandsieve) is put in the lattice gauge of the
   rebased cell (basis M from the JSON, orbitals moved into their home layer [0, 1)), Fourier
   transformed along the stacking axis on a 32-point grid (exact for couplings reaching < 16 cells),
   and assembled into the N-cell slab; its numpy.linalg.eigvalsh eigenvalues are compared with the
   JSON path energies. Tolerance 1e-9 eV: double precision on matrices of <= 100 states with entries
   of order 1 eV agrees to ~1e-13 (common practice); a wrong block or sign is off by >= 1e-3 eV.
2. Published topology through the command line: Kane-Mele zigzag ribbons have odd crossings per
   edge in the 2D TI phase and even in the trivial one (Phys. Rev. Lett. 95, 226801 (2005)); the
   strong Fu-Kane-Mele phase has an odd number of (111) surface Dirac points (Phys. Rev. Lett. 98,
   106803 (2007)).
3. The weyl model's spectral map at E = 0 (Fermi arc on k'2 = 0 beyond the projected nodes at
   |k'1| = 1/4, lattice_models.h) and its SVG rendered by headless Chromium into a PNG that is not
   blank (several colours, a real share of non-white pixels); the bands SVG likewise.
4. Bad input: exit status 2 with a message for usage errors, 1 for input the model refuses.

Usage: surface_cli.py PATH_TO_BANDSIEVE WORKDIR
"""
import json
import os
import shutil
import struct
import subprocess
import sys
import tempfile
import zlib

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import models_numpy  # noqa: E402

TOL_EV = 1e-9
FAILS = []


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        FAILS.append(what)


def run(binary, args, expect=0):
    res = subprocess.run([binary, "slab"] + args, capture_output=True, text=True, timeout=300,
                         env=dict(os.environ, OPENBLAS_NUM_THREADS="1"))
    if res.returncode != expect:
        raise RuntimeError(f"slab {' '.join(args)}: exit {res.returncode} (expected {expect}): {res.stderr.strip()}")
    return res


# Reduced orbital positions per basis state (A up, B up, A down, B down), from lattice_models.h.
POSITIONS = {
    "kane_mele": [(1 / 3, 1 / 3, 0), (2 / 3, 2 / 3, 0)] * 2,
    "fkm": [(0, 0, 0), (0.25, 0.25, 0.25)] * 2,
}


def numpy_slab_energies(spec, M, layers, kpar, dim):
    builder, p = models_numpy.parse_spec(spec)
    lat, h = builder(p)
    M = np.array(M, dtype=float)
    lat_new = M @ lat
    recip_new = 2 * np.pi * np.linalg.inv(lat_new).T
    ax = 2 if dim == 3 else 1
    tau_old = np.array(POSITIONS[spec.split(":")[0]], dtype=float)
    tau_new = tau_old @ np.linalg.inv(M)           # x' = M^-T x, rows
    tau_new[:, ax] -= np.floor(tau_new[:, ax] + 1e-9)
    cart = tau_new @ lat_new
    nq = 32
    n = len(tau_old)
    blocks = {r: np.zeros((n, n), dtype=complex) for r in range(-15, 16)}
    for iq in range(nq):
        kr = np.zeros(3)
        kr[0] = kpar[0]
        if dim == 3:
            kr[1] = kpar[1]
        kr[ax] = iq / nq
        kc = kr @ recip_new
        D = np.diag(np.exp(1j * cart @ kc))
        Hl = D @ h(kc) @ D.conj().T                  # position gauge -> lattice gauge
        for r in blocks:
            blocks[r] += Hl * np.exp(-2j * np.pi * iq * r / nq) / nq
    assert np.max(np.abs(blocks[15])) < 1e-12 and np.max(np.abs(blocks[-15])) < 1e-12
    H = np.zeros((n * layers, n * layers), dtype=complex)
    for j in range(layers):
        for jp in range(layers):
            if abs(jp - j) <= 14:
                H[j * n:(j + 1) * n, jp * n:(jp + 1) * n] = blocks[jp - j]
    return np.linalg.eigvalsh(H)


def check_numpy_slab(binary, spec, direction, layers, dim):
    path = "0.13,0.27:0.41,-0.08" if dim == 3 else "0.13:0.41"
    out = json.loads(run(binary, ["model:" + spec, "--direction", direction, "--layers", str(layers),
                                  "--path", path, "--nk", "3", "--json"]).stdout)
    worst = 0.0
    for k, e in zip(out["path"]["k"], out["path"]["energies_eV"]):
        ref = numpy_slab_energies(spec, out["basis"], layers, k, dim)
        worst = max(worst, float(np.max(np.abs(np.array(e) - ref))))
    check(worst < TOL_EV, f"numpy slab {spec} {direction} x{layers}: max |dE| = {worst:.2e} eV (tol {TOL_EV})")


def png_pixels(path):
    """RGB(A) rows of a PNG (8-bit, colour type 2 or 6), decoded with zlib and the five filters."""
    data = open(path, "rb").read()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG"
    pos, idat, w = 8, b"", 0
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + length]
        if kind == b"IHDR":
            w, hgt, depth, ctype = struct.unpack(">IIBB", body[:10])
            assert depth == 8 and ctype in (2, 6), (depth, ctype)
            bpp = 3 if ctype == 2 else 4
        elif kind == b"IDAT":
            idat += body
        pos += 12 + length
    raw = zlib.decompress(idat)
    stride = w * bpp
    rows, prev = [], bytearray(stride)
    for y in range(hgt):
        f = raw[y * (stride + 1)]
        line = bytearray(raw[y * (stride + 1) + 1:(y + 1) * (stride + 1)])
        for i in range(stride):
            a = line[i - bpp] if i >= bpp else 0
            b = prev[i]
            c = prev[i - bpp] if i >= bpp else 0
            if f == 1:
                line[i] = (line[i] + a) & 255
            elif f == 2:
                line[i] = (line[i] + b) & 255
            elif f == 3:
                line[i] = (line[i] + (a + b) // 2) & 255
            elif f == 4:
                pa, pb, pc = abs(b - c), abs(a - c), abs(a + b - 2 * c)
                line[i] = (line[i] + (a if pa <= pb and pa <= pc else b if pb <= pc else c)) & 255
        rows.append(bytes(line))
        prev = line
    return [tuple(r[i:i + 3]) for r in rows for i in range(0, stride, bpp)]


def check_render(svg, png, what):
    chromium = shutil.which("chromium")
    if chromium is None:
        check(False, f"{what}: chromium not installed (workflows/install-deps.sh installs it)")
        return
    profile = tempfile.mkdtemp()
    subprocess.run([chromium, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                    "--disable-component-update", "--disable-sync", "--no-first-run", f"--user-data-dir={profile}",
                    f"--screenshot={png}", "--window-size=800,600", "file://" + os.path.abspath(svg)],
                   capture_output=True, timeout=120)
    shutil.rmtree(profile, ignore_errors=True)
    if not os.path.exists(png):
        check(False, f"{what}: chromium wrote no screenshot")
        return
    px = png_pixels(png)
    colours = len(set(px))
    nonwhite = sum(1 for p in px if p != (255, 255, 255)) / len(px)
    # A blank or failed render is one colour; the plot has a ramp of 64+ colours and covers a
    # large share of the page (thresholds from the layout: plot area 520 x 420 of 800 x 600).
    check(colours >= 10 and nonwhite > 0.05, f"{what}: {colours} colours, {nonwhite:.0%} non-white pixels")


def main():
    binary, work = sys.argv[1], sys.argv[2]
    os.makedirs(work, exist_ok=True)

    check_numpy_slab(binary, "kane_mele", "0,1", 6, 2)
    check_numpy_slab(binary, "kane_mele:lambda_R=0.2,lambda_v=0.3", "1,1", 5, 2)
    check_numpy_slab(binary, "fkm", "1,1,1", 5, 3)
    check_numpy_slab(binary, "fkm:dt=-0.3,stag=0.2", "1,1,0", 4, 3)
    check_numpy_slab(binary, "fkm", "2,1,3", 3, 3)

    for spec, odd in (("kane_mele", 1), ("kane_mele:lambda_v=0.5", 0)):
        out = json.loads(run(binary, ["model:" + spec, "--direction", "0,1", "--layers", "30", "--json"]).stdout)
        c = out["crossings"]
        check(c["top"] % 2 == odd and c["bottom"] % 2 == odd and c["other"] == 0,
              f"{spec} ribbon crossings top {c['top']} bottom {c['bottom']} (expected {'odd' if odd else 'even'})")
    out = json.loads(run(binary, ["model:fkm", "--direction", "1,1,1", "--layers", "24", "--json"]).stdout)
    n = len(out["surface_dirac_points"])
    check(n % 2 == 1, f"fkm strong (111): {n} surface Dirac points (expected odd)")

    svg = os.path.join(work, "weyl_map.svg")
    out = json.loads(run(binary, ["model:weyl", "--direction", "0,0,1", "--layers", "2", "--energy", "0",
                                  "--mesh", "40", "--json", "--svg", svg]).stdout)
    A = np.array(out["spectral_map"]["values"])
    k = np.arange(40) / 40 - 0.5
    hot = np.argwhere(A > 0.05 * A.max())
    on_line = all(abs(k[i2]) <= 1 / 40 + 1e-12 for _, i2 in hot)
    beyond = all(abs(k[i1]) >= 0.25 - 1 / 40 for i1, _ in hot)
    check(len(hot) >= 10 and on_line and beyond,
          f"weyl (001) arc: {len(hot)} points, on k'2 = 0: {on_line}, beyond |k'1| = 1/4: {beyond}")
    check_render(svg, os.path.join(work, "weyl_map.png"), "weyl map SVG in chromium")
    svg2 = os.path.join(work, "km_bands.svg")
    run(binary, ["model:kane_mele", "--direction", "0,1", "--layers", "12", "--svg", svg2])
    check_render(svg2, os.path.join(work, "km_bands.png"), "ribbon bands SVG in chromium")

    for args, code, msg in (
        (["model:fkm", "--direction", "1,1", "--layers", "8"], 2, "a 3D model takes --direction h,k,l"),
        (["model:fkm", "--direction", "2,2,0", "--layers", "8"], 1, "coprime"),
        (["model:fkm", "--direction", "1,1,1", "--layers", "8", "--between", "00,00"], 2, "--between"),
        (["model:fkm", "--direction", "1,1,1"], 2, "--layers"),
        (["model:fkm", "--direction", "x,1,1", "--layers", "8"], 2, "--direction expects"),
        (["no-such-card.json", "--direction", "1,1,1", "--layers", "8"], 1, "no-such-card.json"),
    ):
        res = run(binary, args, expect=code)
        check(msg in res.stderr, f"slab {' '.join(args)}: exit {code}, message contains '{msg}'")

    print(f"{len(FAILS)} failed")
    return 1 if FAILS else 0


if __name__ == "__main__":
    sys.exit(main())
