#!/usr/bin/env python3
"""The figure of merit of the extrapolated value, measured in pairs over many seeds.

σ(W∞)·√(CPU seconds) of a whole `groundcount sample --cells …` run (several cells and the
size fit), for the sampler before issue 15 and today's, run seed by seed in turn on the
same binary so that a change in the machine's load falls on both alike:

- `before`: `--replicas 16 --sweeps 1000 --no-defect-moves --plain-estimator
  --equal-sweeps --no-lanes`, and the fit with b free (the size fit before issue 15);
- `now`: `--replicas 8 --sweeps 400`, the cited fit.

Since the one chain's sweep skips the variables next to no violation (2026-12-04, ice-rule
models), `before` skips too at large β: its one-chain steps there cost about half of
what the sampler before issue 15 paid, so the ratio this script prints is a little
smaller than against the true old sampler (the ratios in docs/performance.md up to 8.5
were measured with the build before it).

Prints every run, the medians, the pooled figure √(mean σ²·CPU s) of each sampler and the
ratio of the pooled figures with its bootstrap range over seeds (68 % and 95 %). A σ from
8 or 16 replicas scatters by a fifth or more from seed to seed, so three seeds give the
ratio to about ±25 %; twenty-odd give it to about ±10 %.

    cargo build --release
    python3 scripts/merit_pairs.py                       # ice Ih, seeds 5-20: ~25 min
    python3 scripts/merit_pairs.py --lattice lattices/spin-ice.yaml \\
        --cells 3x3x3,4x4x4,5x5x5,6x6x6 --seeds 24       # spin ice: ~20 min

CPU time is the child's user + system time (getrusage); the runs use `--threads 2`.
"""
import argparse
import math
import os
import random
import statistics
import sys

from merit import BINARY, VARIANTS, timed_json

FLAGS = {
    "before": ["--replicas", "16", "--sweeps", "1000"] + dict(VARIANTS)["before"],
    "now": ["--replicas", "8", "--sweeps", "400"],
}


def run(lattice, cells, flags, seed):
    """One run: (W∞, σ(W∞), CPU s) of the fit this sampler is judged by."""
    d, cpu = timed_json(["sample", lattice, "--cells", cells, "--threads", "2", "--seed",
                         str(seed), "--format", "json", "-q"] + FLAGS[flags])
    fit = d.get("fit")
    if not fit or (flags == "before" and fit.get("alternative_ln_w_per_unit") is None):
        sys.exit(f"{lattice} --cells {cells}: no size fit with b free to compare; give at "
                 "least four cells of a three-dimensional lattice with the flux law")
    if flags == "before":
        w = math.exp(fit["alternative_ln_w_per_unit"])
        return w, w * fit["alternative_sigma_ln_w"], cpu
    return d["w_per_unit"], d["w_uncertainty"], cpu


def pooled(rows):
    """√(mean σ²·CPU s): the figure of merit of all runs together."""
    return math.sqrt(statistics.mean(s * s * c for _, s, c in rows))


def main():
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--lattice", default="lattices/ice-ih.yaml")
    p.add_argument("--cells", default="4x4x2,6x6x3,8x8x4,10x10x5")
    p.add_argument("--seeds", type=int, default=16, help="number of seeds, from --first")
    p.add_argument("--first", type=int, default=5, help="first seed")
    args = p.parse_args()
    if not os.path.exists(BINARY):
        sys.exit(f"{BINARY} not found: run `cargo build --release` first")
    rows = {"before": [], "now": []}
    for seed in range(args.first, args.first + args.seeds):
        for flags in ("before", "now"):
            w, s, c = run(args.lattice, args.cells, flags, seed)
            rows[flags].append((w, s, c))
            print(f"{flags:6} seed {seed:3}: W∞ = {w:.6f} ± {s:.2e} per formula unit, "
                  f"{c:6.1f} CPU s, σ·√(CPU s) = {s * math.sqrt(c):.2e}", flush=True)
    for flags, r in rows.items():
        merits = [s * math.sqrt(c) for _, s, c in r]
        print(f"{flags:6}: median σ·√(CPU s) {statistics.median(merits):.2e}, "
              f"pooled {pooled(r):.2e}, CPU s {min(c for *_, c in r):.0f}–"
              f"{max(c for *_, c in r):.0f}")
    ratio = pooled(rows["before"]) / pooled(rows["now"])
    rng = random.Random(1)
    boot = sorted(
        pooled([rng.choice(rows["before"]) for _ in rows["before"]])
        / pooled([rng.choice(rows["now"]) for _ in rows["now"]])
        for _ in range(4000))
    q = lambda f: boot[int(f * len(boot))]
    print(f"ratio of the pooled figures (before / now): {ratio:.2f}; bootstrap over seeds "
          f"{q(0.16):.2f}–{q(0.84):.2f} (68 %), {q(0.025):.2f}–{q(0.975):.2f} (95 %)")


if __name__ == "__main__":
    main()
