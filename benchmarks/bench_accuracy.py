"""Benchmark: cost of the accuracy budget, magnet and count-keeping stage inside ``size()``.

For each demo design, 20 designs are made by changing the magnet airgap (each one
recomputes the stage: fields over temperature, the contributions and the three sums,
with 20 000 Monte Carlo draws at every temperature) and 20 by changing the battery
temperature (the stage and the motion simulations are reused from their caches). Each
is sized once. The baseline, measured in the same process, is ``size()`` of the
battery-temperature designs: the ratio shows what a change that touches the budget
costs against one that touches neither it nor the simulations.

Run::

    .venv/bin/python benchmarks/bench_accuracy.py
    .venv/bin/python benchmarks/bench_accuracy.py --designs 50
"""

from __future__ import annotations

import argparse
import statistics
import time
from dataclasses import replace
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
DEMOS = ("irrigation-gate-valve", "window-shade-winder", "camera-crane-joint")


def _median_ms(fn, items) -> float:
    times = []
    for item in items:
        start = time.perf_counter()
        fn(item)
        times.append(time.perf_counter() - start)
    return statistics.median(times) * 1000.0


def bench_one(name: str, designs: int) -> tuple[float, float]:
    from turnkit.designfile import load_design
    from turnkit.sizing import size

    design = load_design(ROOT / "demo" / f"{name}.toml")
    base = ROOT / "demo"
    size(design, base_dir=base)  # warm the caches shared by both runs (sensor summary, simulations)
    gaps = np.linspace(0.8, 1.2, designs) * design.magnet.airgap_mm
    temperatures = np.linspace(0.0, 30.0, designs)
    by_gap = [replace(design, magnet=replace(design.magnet, airgap_mm=float(g))) for g in gaps]
    by_battery = [replace(design, battery=replace(design.battery, temperature_degC=float(t))) for t in temperatures]
    baseline = _median_ms(lambda d: size(d, base_dir=base), by_battery)
    budget = _median_ms(lambda d: size(d, base_dir=base), by_gap)
    return baseline, budget


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--designs", type=int, default=20)
    args = parser.parse_args()
    print(f"{'demo':<24}{'battery change (ms)':>26}{'airgap change (ms)':>22}{'ratio':>8}")
    for name in DEMOS:
        baseline, budget = bench_one(name, args.designs)
        print(f"{name:<24}{baseline:>26.2f}{budget:>22.2f}{budget / baseline:>8.2f}")


if __name__ == "__main__":
    main()
