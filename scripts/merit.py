#!/usr/bin/env python3
"""The Monte Carlo figure of merit: σ(ln W per formula unit) · √(CPU seconds).

A smaller figure is a better sampler: the error bar a run reaches in one CPU-second
(σ falls as 1/√time at fixed settings, so the product does not depend on the run's
length). For each lattice and cell below, the script runs `groundcount sample` on one
thread over several seeds with three samplers, all with equilibration a quarter of the
sweeps, and prints every run, the medians of the figure and their ratios to the first:

- `before`: one chain per replica, without the defect-focused moves, the conditional
  estimate and the allocation of sweeps (`--no-defect-moves --plain-estimator
  --equal-sweeps --no-lanes`), the sampler before issue 15;
- `one-chain`: one chain per replica with those three (`--no-lanes`);
- `now`: the defaults (64 chains in machine words per replica below β = 6).

    cargo build --release
    python3 scripts/merit.py              # 5 seeds, about 25 minutes on one core
    python3 scripts/merit.py --seeds 3 --sweeps 200
    python3 scripts/merit.py --seeds 3 --variants now

CPU time is the child's user + system time (getrusage), so a busy machine changes the
wall time but little the figure. The σ is the run's whole reported σ of ln W per formula
unit (statistical, quadrature, tail and equilibration parts).
"""
import argparse
import json
import math
import os
import resource
import statistics
import subprocess
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BINARY = os.path.join(ROOT, "target", "release", "groundcount")
CASES = [
    ("lattices/ice-ih.yaml", "8x8x4"),   # 1024 H2O, 2048 arrows
    ("lattices/spin-ice.yaml", "8x8x8"),  # 2048 spins
]


VARIANTS = [
    ("before", ["--no-defect-moves", "--plain-estimator", "--equal-sweeps", "--no-lanes"]),
    ("one-chain", ["--no-lanes"]),
    ("now", []),
]


def timed_json(args):
    """Run the binary with `args` (JSON output): the parsed document and the child's CPU
    seconds (user + system)."""
    start = resource.getrusage(resource.RUSAGE_CHILDREN)
    out = subprocess.run([BINARY] + args, cwd=ROOT, check=True, capture_output=True,
                         text=True).stdout
    end = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (end.ru_utime - start.ru_utime) + (end.ru_stime - start.ru_stime)
    return json.loads(out), cpu


def run(lattice, cells, seed, replicas, sweeps, flags):
    args = ["sample", os.path.join(ROOT, lattice), "--cells", cells,
            "--replicas", str(replicas), "--sweeps", str(sweeps), "--seed", str(seed),
            "--threads", "1", "--format", "json"]
    args += ["--equilibration", str(sweeps // 4)]
    args += flags
    d, cpu = timed_json(args)
    sigma = math.sqrt(sum(d[k] ** 2 for k in (
        "sigma_ln_w_statistical", "sigma_ln_w_quadrature", "sigma_ln_w_tail",
        "sigma_ln_w_equilibration")))
    return d["s_over_r"], sigma, cpu, d["hysteresis_ln_w_per_unit"] / d["sigma_hysteresis"]


def main():
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--seeds", type=int, default=5)
    p.add_argument("--replicas", type=int, default=16)
    p.add_argument("--sweeps", type=int, default=400)
    p.add_argument("--variants", default=",".join(n for n, _ in VARIANTS),
                   help="comma-separated samplers to run (ratios need `before`)")
    a = p.parse_args()
    chosen = a.variants.split(",")
    if not os.path.exists(BINARY):
        sys.exit("build first: cargo build --release")
    for lattice, cells in CASES:
        medians = {}
        for name, flags in VARIANTS:
            if name not in chosen:
                continue
            figures = []
            for seed in range(1, a.seeds + 1):
                value, sigma, cpu, hyst = run(lattice, cells, seed, a.replicas, a.sweeps, flags)
                figure = sigma * math.sqrt(cpu)
                figures.append(figure)
                print(f"{lattice} {cells} {name:9} seed {seed}: ln W per formula unit "
                      f"{value:.6f} ± {sigma:.6f}, {cpu:6.1f} CPU s, σ·√s = {figure:.3e}, "
                      f"up − down {hyst:+.1f}σ", flush=True)
            medians[name] = statistics.median(figures)
        base = medians.get("before")
        if base is None:
            print(f"{lattice} {cells}: median σ·√(CPU s) " + ", ".join(
                f"{name} {m:.3e}" for name, m in medians.items()) + "\n", flush=True)
            continue
        parts = ", ".join(
            f"{name} {m:.3e} (ratio {base / m:.2f}, variance × time {(base / m) ** 2:.1f})"
            for name, m in medians.items())
        print(f"{lattice} {cells}: median σ·√(CPU s) {parts}\n", flush=True)


if __name__ == "__main__":
    main()
