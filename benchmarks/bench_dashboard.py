"""Benchmark: time from a dashboard control change to updated plot data (Python side).

For each demo design, the poll-period slider is set to 50 different values
(alternating around the design's own period, so every change really moves
the result). Each timing covers what a browser-side change sets off in the
kernel: building the new design, sizing it, replacing the data of every
Bokeh source (including jupyter_bokeh's patch-message serialisation),
rewriting readouts and the requirement panel. The baseline, measured in the
same process, is one bare ``size(design)`` call on each of the same 50
designs: the ratio shows what the widget layer adds on top of the sizing.

The browser's own repaint is not included (see tests/ui/test_browser.py for
the end-to-end path).

Run::

    .venv/bin/python benchmarks/bench_dashboard.py            # 50 changes per demo
    .venv/bin/python benchmarks/bench_dashboard.py --changes 200
"""

from __future__ import annotations

import argparse
import math
import statistics
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
DEMOS = ("irrigation-gate-valve", "window-shade-winder", "camera-crane-joint")


def _median_ms(samples: list[float]) -> float:
    return statistics.median(samples) * 1000.0


def bench_one(name: str, changes: int) -> dict[str, float]:
    from turnkit.sizing import size
    from turnkit.ui.dashboard import Dashboard

    dash = Dashboard(ROOT / "demo" / f"{name}.toml")
    key = next(k for k in dash.controls if k == "schedule.poll_period_ms")
    slider = dash.controls[key]
    lo, hi = 10 ** slider.min, 10 ** slider.max
    here = float(slider.value)
    # Periods from half to twice the design's own, inside the slider's range,
    # visited in an order that changes the value every time.
    values = np.geomspace(max(here / 2, lo), min(here * 2, hi), changes)
    values = np.concatenate([values[0::2], values[1::2][::-1]])
    life = dash.figures["life_vs_poll_period"].markers

    change_s = []
    for v in values:
        start = time.perf_counter()
        slider.value = float(v)
        change_s.append(time.perf_counter() - start)
        if dash.error:
            raise RuntimeError(f"{name}: {key} = {v}: {dash.error}")
        if not math.isclose(float(life.data["x"][0]), float(slider.value), rel_tol=1e-6):
            raise RuntimeError(f"{name}: the life-vs-period marker did not follow {key}")

    # Baseline: the bare sizing of the same 50 designs, without any widget.
    tunable = dash.tunables[[t.key for t in dash.tunables].index(key)]
    designs = [tunable.set(dash.design, float(v)) for v in values]
    base_s = []
    for design in designs:
        start = time.perf_counter()
        size(design, base_dir=ROOT / "demo")
        base_s.append(time.perf_counter() - start)

    change_ms, base_ms = _median_ms(change_s), _median_ms(base_s)
    return {"change_ms": change_ms, "size_ms": base_ms, "ratio": change_ms / base_ms,
            "p90_ms": float(np.percentile(change_s, 90) * 1000.0)}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--changes", type=int, default=50, help="control changes per demo (default 50)")
    args = parser.parse_args(argv)
    if args.changes < 2:
        parser.error("--changes must be at least 2")
    print(f"python {sys.version.split()[0]}; {args.changes} poll-period changes per demo design")
    print(f"{'demo':<24}{'change → data (median)':>24}{'p90':>10}{'bare size() (median)':>24}{'ratio':>8}")
    for name in DEMOS:
        r = bench_one(name, args.changes)
        print(f"{name:<24}{r['change_ms']:>21.1f} ms{r['p90_ms']:>7.1f} ms{r['size_ms']:>21.1f} ms"
              f"{r['ratio']:>8.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
