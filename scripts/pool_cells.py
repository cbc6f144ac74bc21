#!/usr/bin/env python3
"""Pool the cells of many `sample --format json` runs of one lattice (independent seeds)
and fit the finite-size form to the pooled cell means.

Each cell's ln W per formula unit is averaged over the runs with weights 1/σ² (σ from the
run's own `w_uncertainty`; the larger of that and the scatter over the runs is kept), then
s(N) = s∞ + a/N + (1/6) ln N/N is fitted by weighted least squares, with c/N² added and
with b free beside it, on all cells and on the cells from each size on. This is how the
pooled values of docs/known-gaps.md were made. `--power K` reports exp(K s∞) (spin ice
per Dy squared is W of ice Ic).

    python3 scripts/pool_cells.py runs/si-*.json runs/sil-*.json --power 2

Standard library only.
"""
import argparse
import glob
import json
import math


def solve(a, b):
    """Gauss-Jordan solve with partial pivoting; returns x and the inverse of a."""
    n = len(a)
    m = [row[:] + [b[i]] + [1.0 if j == i else 0.0 for j in range(n)] for i, row in enumerate(a)]
    for c in range(n):
        p = max(range(c, n), key=lambda r: abs(m[r][c]))
        m[c], m[p] = m[p], m[c]
        d = m[c][c]
        m[c] = [x / d for x in m[c]]
        for r in range(n):
            if r != c:
                f = m[r][c]
                m[r] = [x - f * y for x, y in zip(m[r], m[c])]
    return [m[i][n] for i in range(n)], [m[i][n + 1:] for i in range(n)]


def fit(points, basis):
    """Weighted least squares of y on the basis functions; returns s∞, σ, χ², dof, params."""
    k = len(basis)
    # Scale each column to unit size so that the normal equations are well conditioned.
    scale = [max(abs(f(n)) for n, _, _ in points) or 1.0 for f in basis]
    a = [[0.0] * k for _ in range(k)]
    b = [0.0] * k
    for n, y, s in points:
        row = [f(n) / scale[i] for i, f in enumerate(basis)]
        w = 1.0 / s**2
        for i in range(k):
            b[i] += w * row[i] * y
            for j in range(k):
                a[i][j] += w * row[i] * row[j]
    x, inv = solve(a, b)
    params = [x[i] / scale[i] for i in range(k)]
    chi2 = sum(((y - sum(p * f(n) for p, f in zip(params, basis))) / s) ** 2 for n, y, s in points)
    return params[0], math.sqrt(inv[0][0]) / scale[0], chi2, len(points) - k, params


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("files", nargs="+")
    ap.add_argument("--power", type=float, default=1.0)
    args = ap.parse_args()
    cells = {}
    for pattern in args.files:
        for f in sorted(glob.glob(pattern)):
            try:
                d = json.load(open(f))
            except (OSError, ValueError):
                print(f"skipped {f}: not a sample JSON file")
                continue
            for c in d["cells_sampled"]:
                s = c["w_uncertainty"] / c["w_per_unit"]
                cells.setdefault(c["formula_units"], []).append((math.log(c["w_per_unit"]), s))
    points = []
    for n, v in sorted(cells.items()):
        w = [1 / s**2 for _, s in v]
        m = sum(x * wi for (x, _), wi in zip(v, w)) / sum(w)
        e = 1 / math.sqrt(sum(w))
        if len(v) > 1:
            mean = sum(x for x, _ in v) / len(v)
            scatter = math.sqrt(sum((x - mean) ** 2 for x, _ in v) / (len(v) - 1) / len(v))
            e = max(e, scatter)
        print(f"N = {n:7.0f}  runs {len(v):3d}  ln W per unit {m:.7f} ± {e:.1e}")
        points.append((n, m, e))
    one = lambda n: 1.0
    inv = lambda n: 1 / n
    inv2 = lambda n: 1 / n**2
    lnn = lambda n: math.log(n) / n
    k = args.power
    sizes = [n for n, _, _ in points]
    for lo in sizes:
        sel = [p for p in points if p[0] >= lo]
        fixed = [(n, y - lnn(n) / 6, s) for n, y, s in sel]
        for label, pts, basis in [
            ("b = 1/6, a/N", fixed, [one, inv]),
            ("b = 1/6, a/N + c/N^2", fixed, [one, inv, inv2]),
            ("b free, a/N", sel, [one, lnn, inv]),
        ]:
            if len(pts) <= len(basis):
                continue
            s, e, chi2, dof, params = fit(pts, basis)
            w = math.exp(k * s)
            rest = " ".join(f"{p:.4g}" for p in params[1:])
            print(f"from N = {lo:6.0f}  {label:22s} s∞ = {s:.7f} ± {e:.1e}  "
                  f"exp({k:g} s∞) = {w:.6f} ± {k * w * e:.1e}  χ² {chi2:.2f} / {dof}  ({rest})")


if __name__ == "__main__":
    main()
