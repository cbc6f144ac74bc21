#!/usr/bin/env python3
"""Ideal proton sites for the test CIFs in tests/data/cif/ (not run in CI).

The published structures give the oxygen positions (Wyckoff positions and parameters);
the proton sites of a proton-disordered ice or hydrate are written here on the O–O lines
at 1.00 Å from each oxygen (ideal geometry, not a refinement), each half occupied. For
every structure the script expands the oxygens with the space group's operators (gemmi's
tables, independent of groundcount's), finds the O–O pairs closer than 3.2 Å, places the
two proton sites of each bond, and prints one representative of every orbit with its
multiplicity, as rows of an _atom_site loop.

    python3 -m venv /tmp/v && /tmp/v/bin/pip install gemmi
    /tmp/v/bin/python scripts/cif-fixtures.py
"""
import math

import gemmi

STRUCTURES = {
    # name: (space group, a, b, c, alpha, beta, gamma, oxygens [(label, x, y, z)])
    "ice-ih": ("P 63/m m c", 4.4969, 4.4969, 7.3211, 90, 90, 120,
               [("O1", 1 / 3, 2 / 3, 0.0621)]),
    "ice-vii": ("P n -3 m:2", 3.3501, 3.3501, 3.3501, 90, 90, 90,
                [("O1", 0.25, 0.25, 0.25)]),
    "clathrate-si": ("P m -3 n", 11.877, 11.877, 11.877, 90, 90, 90,
                     [("O1", 0.0, 0.5, 0.25), ("O2", 0.1837, 0.1837, 0.1837),
                      ("O3", 0.0, 0.3077, 0.1172)]),
    "clathrate-sii": ("F d -3 m:2", 17.31, 17.31, 17.31, 90, 90, 90,
                      [("O1", 0.125, 0.125, 0.125), ("O2", 0.2179, 0.2179, 0.2179),
                       ("O3", 0.0681, 0.0681, 0.3713)]),
}

OH = 1.00  # Å, proton site from its oxygen


def orbit(ops, p):
    out = []
    for op in ops:
        q = [v % 1.0 for v in op.apply_to_xyz(p)]
        if not any(max(abs(((q[i] - r[i]) + 0.5) % 1.0 - 0.5) for i in range(3)) < 1e-4 for r in out):
            out.append(q)
    return out


for name, (sg_name, a, b, c, al, be, ga, oxygens) in STRUCTURES.items():
    sg = gemmi.SpaceGroup(sg_name)
    ops = list(sg.operations())
    cell = gemmi.UnitCell(a, b, c, al, be, ga)
    atoms = []
    for label, x, y, z in oxygens:
        for p in orbit(ops, [x, y, z]):
            atoms.append((label, p))
    print(f"# {name}: {sg.xhm()}, {len(ops)} operators, {len(atoms)} O in the cell")
    protons = []  # fractional positions of proton sites
    for i, (_, p) in enumerate(atoms):
        fp = gemmi.Fractional(*p)
        for j, (_, q) in enumerate(atoms):
            for dx in (-1, 0, 1):
                for dy in (-1, 0, 1):
                    for dz in (-1, 0, 1):
                        fq = gemmi.Fractional(q[0] + dx, q[1] + dy, q[2] + dz)
                        d = cell.orthogonalize(fq) - cell.orthogonalize(fp)
                        r = d.length()
                        if 0.1 < r < 3.2:
                            t = OH / r
                            protons.append([(p[k] + t * (fq.tolist()[k] - p[k])) % 1.0 for k in range(3)])
    reps = []
    seen = []
    for h in protons:
        if any(max(abs(((h[i] - r[i]) + 0.5) % 1.0 - 0.5) for i in range(3)) < 1e-4 for r in seen):
            continue
        o = orbit(ops, h)
        seen.extend(o)
        reps.append((h, len(o)))
    print(f"#   {len(protons)} proton sites, {len(reps)} orbits")
    for k, (h, m) in enumerate(reps):
        print(f"D{k + 1} D {h[0]:.5f} {h[1]:.5f} {h[2]:.5f} 0.5 {m}")
