#!/usr/bin/env python3
"""Cross-check groundcount's reading of the test CIFs against gemmi (not run in CI).

For every structure file in tests/data/cif/ that describes a published structure, gemmi
(a general-purpose crystallography library, with its own CIF reader and space-group
tables) expands the asymmetric unit; the script compares, site by site, the number of
atoms in the cell with what `groundcount import` says it found, and counts with gemmi's
expansion the oxygens within 3.2 Å of every oxygen (expected: four) and the O–O pairs
that have a proton site on their line (expected: two per water), against the number of
sites and hydrogen bonds in the lattice file groundcount writes.

    python3 -m venv /tmp/v && /tmp/v/bin/pip install gemmi
    cargo build --release
    /tmp/v/bin/python scripts/cif-crosscheck.py

Ice VII's oxygens have eight oxygens at 2.90 Å and hydrogen bonds to four of them, so the
four-coordination counted is that of the O–O pairs with a proton site on their line.

gemmi 0.7 does not read the DDLm tag names of a CIF 2.0 file (`_cell.length_a`); the
script gives it their CIF 1.1 names, and the symbol with the file's
`_space_group.IT_coordinate_system_code` as its origin choice.
Exits with status 1 if anything differs.
"""
import re
import subprocess
import sys
from collections import Counter

import gemmi

FILES = ["ice-ih", "ice-vii", "clathrate-si", "clathrate-sii"]
BINARY = "target/release/groundcount"


def structure(path):
    text = open(path, encoding="utf-8").read()
    if text.startswith("#\\#CIF_2.0"):
        # DDLm names (`_cell.length_a`) to the CIF 1.1 names gemmi reads, and the origin
        # choice into the symbol.
        code = re.search(r"^_space_group\.IT_coordinate_system_code\s+(\S+)", text, re.M)
        text = re.sub(r"^(_[A-Za-z_]+)\.(\S+)", r"\1_\2", text, flags=re.M)
        if code:
            text = re.sub(r"^(_space_group_name_H-M_alt\s+)'([^']*)'",
                          lambda m: f"{m.group(1)}'{m.group(2)}:{code.group(1)}'", text, flags=re.M)
        doc = gemmi.cif.read_string(text.split("\n", 1)[1])
        return gemmi.make_small_structure_from_block(doc.sole_block())
    return gemmi.read_small_structure(path)


def groundcount(path):
    out = subprocess.run([BINARY, "import", path], capture_output=True, text=True, check=True)
    said = re.search(r"from \d+ sites \((.*)\)", out.stderr).group(1)
    multiplicities = {k: int(v) for k, v in (x.split(" × ") for x in said.split(", "))}
    sites = sum(1 for l in out.stdout.splitlines() if l.startswith("  - {id: ") and "at:" in l)
    bonds = sum(1 for l in out.stdout.splitlines() if l.startswith("  - {id: hb"))
    return multiplicities, sites, bonds


def main():
    bad = 0
    for name in FILES:
        path = f"tests/data/cif/{name}.cif"
        st = structure(path)
        atoms = st.get_all_unit_cell_sites()
        theirs = dict(Counter(a.label for a in atoms))
        mine, sites, bonds = groundcount(path)
        oxygens = [a for a in atoms if a.type_symbol == "O"]
        protons = [a for a in atoms if a.type_symbol in ("H", "D")]
        cell = st.cell
        coordination = []
        within = set()
        pairs = 0
        for i, a in enumerate(oxygens):
            near = 0
            bonded = 0
            for j, b in enumerate(oxygens):
                for dx in (-1, 0, 1):
                    for dy in (-1, 0, 1):
                        for dz in (-1, 0, 1):
                            fb = gemmi.Fractional(b.fract.x + dx, b.fract.y + dy, b.fract.z + dz)
                            pa = cell.orthogonalize(a.fract)
                            pb = cell.orthogonalize(fb)
                            r = pa.dist(pb)
                            if not 0.1 < r < 3.2:
                                continue
                            # A proton site within 0.05 Å of the O–O line, between them.
                            on_line = False
                            for h in protons:
                                ph = cell.orthogonalize(h.fract)
                                for ex in (-1, 0, 1):
                                    for ey in (-1, 0, 1):
                                        for ez in (-1, 0, 1):
                                            q = ph + cell.orthogonalize(gemmi.Fractional(ex, ey, ez))
                                            if abs(pa.dist(q) + q.dist(pb) - r) < 1e-3:
                                                on_line = True
                            near += 1
                            if on_line:
                                bonded += 1
                                if (j, dx, dy, dz) > (i, 0, 0, 0):
                                    pairs += 1
            coordination.append(bonded)
            within.add(near)
        same = theirs == mine and sites == len(oxygens) and bonds == pairs
        ok = same and set(coordination) == {4} and bonds == 2 * len(oxygens)
        bad += not ok
        print(f"{name}: gemmi {st.spacegroup.xhm()} ({len(st.spacegroup.operations())} operators)")
        print(f"  atoms per site, gemmi:       {theirs}")
        print(f"  atoms per site, groundcount: {mine}")
        print(f"  oxygens {len(oxygens)} (groundcount sites {sites}); O within 3.2 Å of each: "
              f"{sorted(within)}, hydrogen-bonded: {sorted(set(coordination))}; O-O pairs with a proton site on their line: "
              f"{pairs} (groundcount bonds {bonds})  {'ok' if ok else 'DIFFERENT'}")
    sys.exit(1 if bad else 0)


main()
