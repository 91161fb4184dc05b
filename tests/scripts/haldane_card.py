"""Card and hopping table of the Haldane model (Phys. Rev. Lett. 61, 2015 (1988)) for the script
tests: written by one function so that every test builds the same model the same way."""
import cmath
import json
import math
import os


def haldane_card(folder, mid, mass, t2=0.2, phi=math.pi / 2, comment=None, meta=None, electrons=False,
                 family=None):
    """Writes a card and table of the Haldane model (Phys. Rev. Lett. 61, 2015 (1988)): honeycomb,
    nearest-neighbour t1 = 1 eV, complex next-nearest t2 e^{+-i phi}, staggered mass +-M. It is a
    Chern insulator (C = +-1) for |M| < 3 sqrt(3) |t2 sin phi| (1.04 eV at t2 = 0.2) and trivial
    beyond. With `family`, the card is a member of that family at value M: H(R) is linear in M, so
    the interpolation between members is exact and a path's closings are the model's."""
    h = {}

    def add(R, m, n, v):
        h[(R, m, n)] = h.get((R, m, n), 0) + v
        mR = (-R[0], -R[1], 0)
        if (R, m, n) != (mR, n, m):
            h[(mR, n, m)] = h.get((mR, n, m), 0) + v.conjugate()

    add((0, 0, 0), 1, 1, complex(mass, 0))
    add((0, 0, 0), 2, 2, complex(-mass, 0))
    for R in ((0, 0, 0), (-1, 0, 0), (0, -1, 0)):
        add(R, 1, 2, complex(-1.0, 0))
    # d1 = a1, d2 = a2 - a1, d3 = -a2: 120 degrees apart; phase +phi on A, -phi on B along them.
    for d in ((1, 0, 0), (-1, 1, 0), (0, -1, 0)):
        add(d, 1, 1, t2 * cmath.exp(1j * phi))
        add(d, 2, 2, t2 * cmath.exp(-1j * phi))
    Rs = sorted({k[0] for k in h})
    lines = [f"Haldane model M={mass} t2={t2} phi={phi} (test data)", "2", str(len(Rs)),
             " ".join("1" for _ in Rs)]
    for R in Rs:
        for n in (1, 2):
            for m in (1, 2):
                v = h.get((R, m, n), 0j)
                lines.append(f"{R[0]} {R[1]} {R[2]} {m} {n} {v.real:.12f} {v.imag:.12f}")
    table = os.path.join(folder, f"{mid}_hop.dat")
    with open(table, "w") as f:
        f.write("\n".join(lines) + "\n")
    card = {"id": mid, "dimension": 2, "formula": "C2", "source": "Haldane model, test data",
            "lattice": [[1, 0, 0], [0.5, math.sqrt(3) / 2, 0], [0, 0, 10]],
            "hoppings": f"{mid}_hop.dat", "spinful": False,
            "orbitals": [{"position": [1 / 3, 1 / 3, 0], "l": 1, "label": "A pz"},
                         {"position": [2 / 3, 2 / 3, 0], "l": 1, "label": "B pz"}]}
    if electrons:
        card["electrons"] = 2
    else:
        card["occupied_bands"] = 1
    if comment:
        card["comment"] = comment
    if meta:
        card["meta"] = meta
    if family:
        card["family"] = {"name": family, "parameter": "M", "unit": "eV", "value": mass}
    path = os.path.join(folder, f"{mid}.json")
    with open(path, "w") as f:
        json.dump(card, f, indent=1)
    return path
