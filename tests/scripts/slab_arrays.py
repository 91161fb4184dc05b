#!/usr/bin/env python3
"""`bandsieve slab --arrays` writes the surface spectra as HDF5 datasets (read back with HDF5's own
h5dump tool): the Weyl model's (001) spectral map at E = 0 must be a finite, non-negative array
(a spectral function, -Im G / pi >= 0: common practice) with its arc visible (max well above the
median). Usage: slab_arrays.py BINARY WORKDIR"""
import os, re, subprocess, sys

binary, work = sys.argv[1], sys.argv[2]
os.makedirs(work, exist_ok=True)
out = os.path.join(work, "weyl001.h5")
subprocess.run([binary, "slab", "model:weyl", "--direction", "0,0,1", "--layers", "12", "--energy", "0",
                "--mesh", "24", "--arrays", out], check=True, stdout=subprocess.DEVNULL)
names = subprocess.run(["h5ls", out], check=True, capture_output=True, text=True).stdout
for want in ("spectral_map", "bands", "weight_top", "path_k"):
    if want not in names:
        sys.exit(f"FAIL: dataset {want} missing from {out}:\n{names}")
# -y: no element indices in the listing, so every number in DATA { } is a value.
dump = subprocess.run(["h5dump", "-y", "-w", "0", "-m", "%.10g", "-d", "spectral_map", out], check=True,
                      capture_output=True, text=True).stdout
data = dump[dump.index("DATA {") + len("DATA {"):]
data = data[:data.index("}")]
vals = [float(x) for x in re.split(r"[\s,]+", data) if x]
if len(vals) != 24 * 24:
    sys.exit(f"FAIL: spectral_map has {len(vals)} values, want 576")
if min(vals) < -1e-9:
    sys.exit(f"FAIL: negative spectral weight {min(vals)}")
med = sorted(vals)[len(vals) // 2]
if not max(vals) > 10 * max(med, 1e-12):
    sys.exit(f"FAIL: no arc: max {max(vals)} median {med}")
print(f"ok: spectral_map 24x24, max {max(vals):.3g}, median {med:.3g}; bands and weights present")
