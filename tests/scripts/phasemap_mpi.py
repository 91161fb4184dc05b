#!/usr/bin/env python3
"""Phase map of the Fu-Kane-Mele model over the bond distortion dt and the staggered potential stag,
under mpirun at 1 and at 2 ranks.

Checks:
* the two maps are identical (classes, sampled gaps and closings, compared as h5dump text): a row
  depends only on its own y, whichever rank computes it;
* on the inversion-symmetric line (stag = 0) exactly one critical point, a single-value band
  inversion at dt = 0 (Phys. Rev. Lett. 98, 106803 (2007): the gap closes at the X points at dt = 0);
* for stag > 0 a Weyl phase of finite width between the weak and the strong TI, growing with stag:
  the wedge of New J. Phys. 9, 356 (2007) and Phys. Rev. B 78, 165313 (2008);
* the picture (--figure MAP.svg through the plotting module) is byte for byte the same at 1 and 2
  ranks, and rendered by headless Chromium it is not blank and shows the colours of the classes the
  map holds (weak TI, strong TI, Weyl semimetal, critical point) and not those of classes it lacks.

Usage: phasemap_mpi.py PATH_TO_BANDSIEVE WORKDIR
"""
import os
import re
import shutil
import subprocess
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import figures  # noqa: E402  (PNG decoding and the Chromium screenshot of the figure tests)

NX, NY = 9, 3


def run(binary, ranks, work):
    out = os.path.join(work, f"map{ranks}.h5")
    svg = os.path.join(work, f"map{ranks}.svg")
    env = dict(os.environ, OMPI_ALLOW_RUN_AS_ROOT="1", OMPI_ALLOW_RUN_AS_ROOT_CONFIRM="1", OPENBLAS_NUM_THREADS="1")
    cmd = ["mpirun", "--oversubscribe", "-n", str(ranks), binary, "phasemap", "model:fkm",
           "--x", f"dt=-0.2..0.2:{NX}", "--y", f"stag=0..0.3:{NY}", "--mesh", "10", "--tol", "1e-3", "-o", out, "--figure", svg]
    p = subprocess.run(cmd, capture_output=True, text=True, env=env)
    assert p.returncode == 0, p.stderr
    return out, svg, p.stdout


def dump(path, ds):
    text = subprocess.run(["h5dump", "-d", ds, path], capture_output=True, text=True, check=True).stdout
    return "\n".join(line for line in text.splitlines() if not line.startswith("HDF5 "))


def main():
    binary, work = sys.argv[1], sys.argv[2]
    shutil.rmtree(work, ignore_errors=True)
    os.makedirs(work)
    h1, svg1, out1 = run(binary, 1, work)
    h2, svg2, out2 = run(binary, 2, work)
    for ds in ("class", "gap_direct_eV", "closings", "closing_count", "x", "y"):
        assert dump(h1, ds) == dump(h2, ds), f"dataset {ds} differs between 1 and 2 ranks"
    assert "1 rank(s)" in out1 and "2 rank(s)" in out2
    rows = {}
    for line in out1.splitlines():
        m = re.match(r"\s+stag = (\S+)\s+(\S+)\s+(.*)$", line)
        if m:
            rows[float(m.group(1))] = (m.group(2), m.group(3))
    assert sorted(rows) == [0.0, 0.15, 0.3], rows
    cells, closings = rows[0.0]
    assert cells.count("*") == 1 and "W" not in cells, cells
    assert cells == "wwww*SSSS", cells
    m = re.findall(r"band inversion at (\S+);", closings)
    assert len(m) == 1 and abs(float(m[0])) < 1e-4, closings
    widths = []
    for stag in (0.15, 0.3):
        cells, closings = rows[stag]
        w = re.findall(r"Weyl phase (\S+)\.\.(\S+);", closings)
        assert len(w) == 1, closings
        lo, hi = map(float, w[0])
        assert lo < 0 < hi
        widths.append(hi - lo)
        assert cells.startswith("wwww") and cells.endswith("SSSS"), cells
    assert 0 < widths[0] < widths[1], widths
    assert open(svg1, "rb").read() == open(svg2, "rb").read(), "the pictures differ between 1 and 2 ranks"
    png = os.path.join(work, "map_shot.png")
    assert figures.chromium_shot(svg1, png, "1300,650"), "chromium could not render the phase map"
    total, nonwhite, counts = figures.colour_stats(png)
    assert nonwhite / total > 0.3, f"phase map picture nearly blank: {nonwhite / total:.2f} drawn"
    # Class colours of src/cli/figures.c (fig_class_rgb), 0..255.
    colours = {"weak topological insulator": (128, 168, 224), "strong topological insulator": (31, 64, 140),
               "Weyl semimetal": (237, 148, 41), "critical point": (0, 0, 0), "metal": (140, 84, 31),
               "nodal-line semimetal": (245, 209, 133)}
    present = {name: figures.near(counts, rgb, 12) for name, rgb in colours.items()}
    for name in ("weak topological insulator", "strong topological insulator", "Weyl semimetal", "critical point"):
        assert present[name] > 500, f"{name}: {present[name]} pixels in the picture"
    for name in ("metal", "nodal-line semimetal"):
        assert present[name] < 50, f"{name} drawn ({present[name]} pixels) but absent from the map"
    print("ok", widths)


if __name__ == "__main__":
    main()
