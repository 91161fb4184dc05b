#!/usr/bin/env python3
"""Figures and reports rendered for built-in models and checked for content.

Every figure kind is drawn (`plot`, `slab --figure`, `report`), rasterised (PNG from PLplot's cairo
driver, PDF through pdftoppm, SVG and HTML through headless Chromium) and checked: not blank, the
axis labels present as text, and the drawn data right against an outside reference:
* flow of the Kane-Mele 2D TI: the centres jump over the largest-gap line an odd number of times,
  counted here from the plotted arrays with the rule of Phys. Rev. B 84, 075119 (2011); the
  trivial phase (lambda_v = 0.5 > 3 sqrt3 lambda_SO, Phys. Rev. Lett. 95, 146802 (2005)) even;
* Berry curvature of the Haldane model: the plotted map integrates to |C| = 1 (Phys. Rev. Lett. 61,
  2015 (1988));
* Weyl nodes of the two-node model: two nodes of opposite chirality (Nucl. Phys. B 185, 20 (1981));
* bands: one curve per band, equal to `bands --path --json`;
* slab bands of the Kane-Mele ribbon: top and bottom edge states both visible (pixels of both
  marker colours), the edge states of a 2D TI being on both edges (common practice).
The report of a demo candidate is screenshotted in Chromium from a catalogue alone, and its size is
bounded (2 MB: six figures of up to ~300 kB each and text).

Usage: figures.py BANDSIEVE WORKDIR
"""
import html
import json
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import zlib

FAILS = []
REPORT_MAX_BYTES = 2_000_000


def check(ok, what):
    print(("ok   " if ok else "FAIL ") + what)
    if not ok:
        FAILS.append(what)


def run(binary, args, expect=0, env=None):
    p = subprocess.run([binary] + args, capture_output=True, text=True, env=env)
    if p.returncode != expect:
        print(p.stdout[-1500:], p.stderr[-1500:])
    check(p.returncode == expect, f"{' '.join(args[:4])}: exit {p.returncode}")
    return p


def png_pixels(path):
    """Decodes an 8-bit, non-interlaced RGB/RGBA/grey PNG into (width, height, rows of RGB tuples)."""
    data = open(path, "rb").read()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", path
    pos, idat, w = 8, b"", 0
    while pos < len(data):
        n, typ = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if typ == b"IHDR":
            w, h, depth, ctype, _, _, interlace = struct.unpack(">IIBBBBB", body)
            assert depth == 8 and interlace == 0 and ctype in (0, 2, 6), (depth, ctype, interlace)
        elif typ == b"IDAT":
            idat += body
        pos += 12 + n
    bpp = {0: 1, 2: 3, 6: 4}[ctype]
    raw = zlib.decompress(idat)
    stride = w * bpp
    rows, prev, i = [], bytearray(stride), 0
    for _ in range(h):
        f = raw[i]
        line = bytearray(raw[i + 1:i + 1 + stride])
        i += 1 + stride
        for x in range(stride):
            a = line[x - bpp] if x >= bpp else 0
            b = prev[x]
            c = prev[x - bpp] if x >= bpp else 0
            if f == 1:
                line[x] = (line[x] + a) & 255
            elif f == 2:
                line[x] = (line[x] + b) & 255
            elif f == 3:
                line[x] = (line[x] + (a + b) // 2) & 255
            elif f == 4:
                p = a + b - c
                pa, pb, pc = abs(p - a), abs(p - b), abs(p - c)
                line[x] = (line[x] + (a if pa <= pb and pa <= pc else (b if pb <= pc else c))) & 255
        rows.append([tuple(line[x:x + 3]) if bpp >= 3 else (line[x],) * 3 for x in range(0, stride, bpp)])
        prev = line
    return w, h, rows


def colour_stats(path):
    w, h, rows = png_pixels(path)
    counts = {}
    nonwhite = 0
    for r in rows:
        for px in r:
            if px != (255, 255, 255):
                nonwhite += 1
            counts[px] = counts.get(px, 0) + 1
    return w * h, nonwhite, counts


def near(counts, rgb, tol=40):
    """Pixels within tol (per channel) of rgb."""
    return sum(n for px, n in counts.items() if all(abs(px[i] - rgb[i]) <= tol for i in range(3)))


def svg_text(path):
    """The text of an SVG (PLplot writes characters as numeric entities)."""
    raw = open(path, encoding="utf-8").read()
    return html.unescape(" ".join(re.findall(r"<tspan[^>]*>(.*?)</tspan>", raw, re.S)))


def chromium_shot(target, png, size="1000,2400"):
    chromium = shutil.which("chromium")
    if chromium is None:
        check(False, "chromium not installed (workflows/install-deps.sh installs it)")
        return False
    with tempfile.TemporaryDirectory() as ud:
        subprocess.run([chromium, "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
                        "--disable-component-update", "--disable-sync", "--no-first-run", f"--user-data-dir={ud}",
                        f"--screenshot={png}", f"--window-size={size}", "file://" + os.path.abspath(target)],
                       capture_output=True, timeout=120)
    ok = os.path.exists(png) and os.path.getsize(png) > 0
    check(ok, f"chromium screenshot of {os.path.basename(target)}")
    return ok


def nonblank(path, what, frac=0.01):
    total, nonwhite, counts = colour_stats(path)
    check(nonwhite / total > frac, f"{what}: {100 * nonwhite / total:.1f}% of pixels drawn")
    return counts


def flow_jumps(plane):
    """Centres jumping over the largest-gap line between neighbouring strings (PRB 84, 075119)."""
    total = 0
    for s in range(len(plane["kpar"]) - 1):
        lo, hi = sorted((plane["gap_line"][s], plane["gap_line"][s + 1]))
        total += sum(1 for x in plane["wcc"][s + 1] if lo < x < hi)
    return total


def largest_gap_mid(wcc):
    w = sorted(wcc)
    best, mid = -1, 0.5
    for i, a in enumerate(w):
        b = w[i + 1] if i + 1 < len(w) else w[0] + 1
        if b - a > best:
            best, mid = b - a, ((a + b) / 2) % 1
    return mid


def test_bands(b, work):
    svg, png, data = (os.path.join(work, f) for f in ("fkm_bands.svg", "fkm_bands.png", "fkm_bands.json"))
    run(b, ["plot", "bands", "model:fkm", "-o", svg, "--data", data])
    run(b, ["plot", "bands", "model:fkm", "-o", png])
    text = svg_text(svg)
    check("energy (eV)" in text and "wave vector along the path" in text, "bands SVG: axis labels as text")
    check(all(l in text for l in ("\u0393", "X", "W", "K", "L", "U|X" if "U|X" in text else "U")),
          "bands SVG: path labels (capital gamma, X, W, K, L, U)")
    d = json.load(open(data))
    ref = json.loads(run(b, ["bands", "model:fkm", "--path", "auto", "--points", "300", "--json"]).stdout)
    e = ref["energies_eV"]
    check(len(d["bands"]) == len(e[0]) == 4, f"bands: {len(d['bands'])} curves for 4 bands")
    err = max(abs(d["bands"][n][i] - e[i][n]) for n in range(4) for i in range(len(e)))
    check(err < 1e-12, "bands: the plotted curves are the energies of `bands --path`")
    counts = nonblank(png, "bands PNG")
    check(near(counts, (25, 25, 35), 20) > 200 and near(counts, (30, 80, 160), 20) > 200,
          "bands PNG: occupied (ink) and empty (blue) curves both drawn")
    svg2 = os.path.join(work, "fkm_bands_shot.png")
    if chromium_shot(svg, svg2, "1300,1000"):
        nonblank(svg2, "bands SVG in chromium")


def test_flows(b, work):
    for spec, odd in (("model:kane_mele", True), ("model:kane_mele:lambda_v=0.5", False)):
        png, data = os.path.join(work, "flow.png"), os.path.join(work, "flow.json")
        run(b, ["plot", "flow", spec, "-o", png, "--data", data])
        d = json.load(open(data))
        plane = d["planes"][0]
        mids = [largest_gap_mid(w) for w in plane["wcc"]]
        check(max(abs(m - g) for m, g in zip(mids, plane["gap_line"])) < 1e-12,
              f"{spec}: the plotted line is the largest-gap midpoint of each string")
        n = flow_jumps(plane)
        check((n % 2 == 1) == odd, f"{spec}: {n} jumps over the largest-gap line ({'odd: Z2 = 1' if odd else 'even: Z2 = 0'})")
        counts = nonblank(png, f"{spec} flow PNG", 0.005)
        check(near(counts, (230, 140, 30), 30) > 50, f"{spec}: largest-gap line drawn (orange pixels)")
    pdf = os.path.join(work, "fkm_flow.pdf")
    run(b, ["plot", "flow", "model:fkm", "-o", pdf])
    if shutil.which("pdftoppm"):
        subprocess.run(["pdftoppm", "-png", "-r", "50", "-singlefile", pdf, os.path.join(work, "fkm_flow_pdf")], check=True)
        nonblank(os.path.join(work, "fkm_flow_pdf.png"), "fkm flows PDF (six planes) through pdftoppm", 0.01)
    else:
        check(False, "pdftoppm missing (poppler-utils, workflows/install-deps.sh)")


def test_curvature(b, work):
    pdf, data = os.path.join(work, "haldane.pdf"), os.path.join(work, "haldane.json")
    run(b, ["plot", "curvature", "model:haldane", "-o", pdf, "--data", data, "--map-mesh", "48"])
    d = json.load(open(data))
    chern = json.loads(run(b, ["inspect", "model:haldane", "--json"]).stdout)["chern"]
    check(abs(abs(d["flux"]) - 1) < 1e-9 and round(d["flux"]) == chern,
          f"Haldane curvature: the plotted map integrates to {d['flux']:.6f} = C = {chern}")
    check(len(d["omega"]) == 48 * 48, "Haldane curvature: 48 x 48 plaquettes drawn")
    subprocess.run(["pdftoppm", "-png", "-r", "60", "-singlefile", pdf, os.path.join(work, "haldane_pdf")], check=True)
    counts = nonblank(os.path.join(work, "haldane_pdf.png"), "curvature PDF through pdftoppm", 0.2)
    check(near(counts, (26, 61, 143), 45) > 20 and near(counts, (224, 133, 26), 45) > 20,
          "curvature: both ends of the diverging map appear (blue and orange)")


def test_nodes(b, work):
    svg, data = os.path.join(work, "weyl.svg"), os.path.join(work, "weyl.json")
    run(b, ["plot", "nodes", "model:weyl", "-o", svg, "--data", data])
    d = json.load(open(data))
    ch = sorted(n["chirality"] for n in d["nodes"])
    check(ch == [-1, 1], f"weyl: two nodes of opposite chirality drawn ({ch})")
    text = svg_text(svg)
    check("chirality +1 (1)" in text and "chirality -1 (1)" in text and "k1 (units of b1)" in text,
          "weyl SVG: legend and axis labels as text")
    shot = os.path.join(work, "weyl_shot.png")
    if chromium_shot(svg, shot, "1100,1000"):
        counts = nonblank(shot, "weyl SVG in chromium", 0.005)
        check(near(counts, (230, 140, 30), 30) > 30 and near(counts, (30, 80, 160), 30) > 30,
              "weyl: one orange (+1) and one blue (-1) marker")


def test_slab(b, work):
    png = os.path.join(work, "km_ribbon.png")
    run(b, ["slab", "model:kane_mele", "--direction", "0,1", "--layers", "12", "--figure", png])
    counts = nonblank(png, "ribbon bands PNG", 0.02)
    top, bottom = near(counts, (230, 140, 30), 30), near(counts, (30, 80, 160), 30)
    check(top > 300 and bottom > 300, f"ribbon: top ({top} px) and bottom ({bottom} px) edge states both visible")


def test_report(b, work):
    env = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1", OPENBLAS_NUM_THREADS="1")
    h5, cat = os.path.join(work, "jq.h5"), os.path.join(work, "jq.sqlite")
    for f in (h5, cat):
        if os.path.exists(f):
            os.remove(f)
    run(b, ["demo-set", "-o", h5, "--count", "24", "--seed", "7"], env=env)
    # Exit 1: the demo set holds deliberately broken entries (README, demo data).
    p = subprocess.run([b, "screen", h5, "-c", cat], capture_output=True, text=True, env=env)
    check(p.returncode in (0, 1), f"screen of the demo set: exit {p.returncode}")
    rows = json.loads(run(b, ["query", cat, "SELECT material_id, class FROM candidates LIMIT 3", "--format",
                                "json"]).stdout)
    check(len(rows) >= 1, f"demo catalogue has {len(rows)} candidates")
    mid = rows[0]["material_id"]
    page = os.path.join(work, "candidate.html")
    run(b, ["report", "-c", cat, mid, "-o", page])            # the catalogue alone
    text = open(page, encoding="utf-8").read()
    size = os.path.getsize(page)
    check(size < REPORT_MAX_BYTES, f"report of {mid}: {size} bytes < {REPORT_MAX_BYTES}")
    check(not re.search(r"(src|href)=\"(https?:)?//", text) and "<script" not in text and "<link" not in text,
          "report: no network resources (no external src/href, scripts or links)")
    check(rows[0]["class"] in text and "Confidence:" in text and "Reason:" in text, "report: verdict, confidence, reason")
    check("A screen is evidence for further first-principles" in text and "Correlations, disorder" in text,
          "report: the README's caveats")
    check("run settings" in text and "run version" in text and "material set_path" in text,
          "report: provenance (run settings, version, set)")
    check("Wannier-centre flows" in text and text.count("<svg") >= 1, "report: flow evidence with an inline figure")
    shot = os.path.join(work, "candidate.png")
    if chromium_shot(page, shot):
        nonblank(shot, "report in chromium", 0.05)
    out = os.path.join(work, "top")
    run(b, ["report", "--top", "3", "-c", cat, h5, "-o", out])
    pages = sorted(f for f in os.listdir(out) if f.endswith(".html") and f != "index.html")
    idx = open(os.path.join(out, "index.html"), encoding="utf-8").read()
    check(len(pages) == len(rows) and all(f'href="{p}"' in idx for p in pages),
          f"report --top 3: {len(pages)} pages linked from index.html")
    with_set = open(os.path.join(out, pages[0]), encoding="utf-8").read()
    check("Bands along the high-symmetry path" in with_set and "Not available: the report was made from the catalogue"
          not in with_set, "report with the set: bands drawn")
    run(b, ["report", "-c", cat, "no-such-id", "-o", os.path.join(work, "x.html")], expect=1)


def main():
    b, work = sys.argv[1], sys.argv[2]
    os.makedirs(work, exist_ok=True)
    p = subprocess.run([b, "plot", "--help"], capture_output=True, text=True)
    check(p.returncode == 0 and "curvature" in p.stdout, "plot --help")
    run(b, ["plot", "bands", "model:fkm", "-o", os.path.join(work, "x.gif")], expect=1)
    test_bands(b, work)
    test_flows(b, work)
    test_curvature(b, work)
    test_nodes(b, work)
    test_slab(b, work)
    test_report(b, work)
    if FAILS:
        print(f"{len(FAILS)} check(s) failed")
        sys.exit(1)


if __name__ == "__main__":
    main()
