"""Benchmark: AMR angle decode + half-turn combine, vectorised vs a plain Python loop.

Run:  .venv/bin/python benchmarks/bench_sensor.py [--samples 1000000] [--loop-samples 100000]

Both paths start from the same raw bridge samples (x, y in mV) and latch
codes and produce the 0–360° shaft angle. The vectorised path is
``turnkit.latches.decode_full_turn_deg`` (one fused pass over cache-sized
blocks, float64); the same with ``dtype=np.float32`` (from the same float64
samples, so its time includes the casts) and the two-step path
``turnkit.sensor.decode_deg`` then ``turnkit.latches.combine_half_turn_deg``
are timed too.
The baseline is a per-sample Python loop with ``math.atan2`` doing the same
arithmetic. To keep the run short the loop is timed on the first
``--loop-samples`` samples and its rate is scaled to samples per second; the
ratio compares rates. Medians of ``--repeats`` runs are reported.
"""

from __future__ import annotations

import argparse
import math
import statistics
import time

import numpy as np

from turnkit.latches import QuadrantLatches, combine_half_turn_deg, decode_full_turn_deg
from turnkit.sensor import BridgeSensor, decode_deg

_GRAY_TO_QUADRANT = (0, 1, 3, 2)


def vectorised(x, y, code):
    return decode_full_turn_deg(x, y, code)


def vectorised_float32(x, y, code):
    return decode_full_turn_deg(x, y, code, dtype=np.float32)


def two_step(x, y, code):
    return combine_half_turn_deg(decode_deg(x, y), code)


def python_loop(x, y, code):
    out = [0.0] * len(x)
    for i in range(len(x)):
        fine = 0.5 * math.degrees(math.atan2(y[i], x[i])) % 180.0
        centre = 90.0 * _GRAY_TO_QUADRANT[code[i]] + 45.0
        d = (fine - centre + 180.0) % 360.0 - 180.0
        out[i] = fine if abs(d) <= 90.0 else (fine + 180.0) % 360.0
    return out


def _median_time(fn, repeats):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--samples", type=int, default=1_000_000)
    ap.add_argument("--loop-samples", type=int, default=100_000)
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args(argv)

    sensor = BridgeSensor(amplitude_mV=50.0, offset_x_mV=0.5, offset_y_mV=-0.3,
                          gain_mismatch=0.01, phase_error_deg=0.5, noise_rms_mV=0.05,
                          adc_bits=12, adc_full_scale_mV=200.0)
    rng = np.random.default_rng(0)
    theta = np.cumsum(rng.normal(0.0, 2.0, args.samples))  # a random walk of the shaft
    x, y = sensor.signals(theta, rng=rng)
    code = QuadrantLatches(switch_point_tolerance_deg=5.0, hysteresis_deg=4.0).code(theta)

    vec = vectorised(x, y, code)
    n_loop = min(args.loop_samples, args.samples)
    xl, yl, cl = x[:n_loop].tolist(), y[:n_loop].tolist(), code[:n_loop].tolist()
    loop = python_loop(xl, yl, cl)
    diff = np.abs(np.mod(np.asarray(loop) - vec[:n_loop] + 180.0, 360.0) - 180.0)
    assert diff.max() < 1e-9, "loop and vectorised paths disagree"

    np.testing.assert_array_equal(two_step(x, y, code), vec)
    vec32 = vectorised_float32(x, y, code)
    diff32 = np.abs(np.mod(vec32.astype(float) - vec + 180.0, 360.0) - 180.0)
    assert diff32.max() < 1e-4, "float32 path strays from float64 by 1e-4 deg or more"

    t_vec = _median_time(lambda: vectorised(x, y, code), args.repeats)
    t_32 = _median_time(lambda: vectorised_float32(x, y, code), args.repeats)
    t_two = _median_time(lambda: two_step(x, y, code), args.repeats)
    t_loop = _median_time(lambda: python_loop(xl, yl, cl), max(1, args.repeats // 2))
    rate_vec = args.samples / t_vec
    rate_loop = n_loop / t_loop
    print(f"decode + half-turn combine, {args.samples:,} samples")
    print(f"  vectorised : median {t_vec * 1e3:8.2f} ms  -> {rate_vec / 1e6:8.2f} M samples/s")
    print(f"  float32    : median {t_32 * 1e3:8.2f} ms  -> {args.samples / t_32 / 1e6:8.2f} M samples/s"
          f"  (ratio vs loop {args.samples / t_32 / rate_loop:.0f}x, "
          f"max deviation from float64 {diff32.max():.1e} deg)")
    print(f"  two-step   : median {t_two * 1e3:8.2f} ms  -> {args.samples / t_two / 1e6:8.2f} M samples/s"
          f"  (ratio vs loop {args.samples / t_two / rate_loop:.0f}x)")
    print(f"  python loop: median {t_loop * 1e3:8.2f} ms on {n_loop:,} samples "
          f"-> {rate_loop / 1e6:8.3f} M samples/s (scaled to {args.samples:,}: "
          f"{t_loop * args.samples / n_loop:.2f} s)")
    print(f"  ratio vectorised (float64) / loop: {rate_vec / rate_loop:.0f}x")
    return rate_vec / rate_loop


if __name__ == "__main__":
    main()
