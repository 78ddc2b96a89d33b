"""Benchmark: evaluating segment and burst-replay motion against the number of parts.

Run: .venv/bin/python benchmarks/bench_segments.py
Evaluates 10^6 increasing times of a SegmentedMotion with 10, 10^3, 10^5 and 10^6 segments
and reports the median of repeated runs, the ratio against the 10-segment case (a search per
time grows with log m, a scan of every part would grow with m) and against one numpy float64
sum over the 10^6 times, measured in the same process. A BurstReplay of 10^5 bursts (3·10^5
segments) is timed the same way.
"""
import statistics
import time

import numpy as np

from turnkit.motion import BurstReplay, SegmentedMotion


def median_time(fn, repeat):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def segments(m):
    starts = np.arange(m, dtype=float) * 2.0
    return SegmentedMotion(starts, np.ones(m), np.full(m, 30.0), np.full(m, 5.0))


def main():
    n = 10**6
    rng = np.random.default_rng(0)
    t_sum = None
    base = None
    print(f"{'parts':>9} {'ms':>9} {'x 10 parts':>11} {'x sum':>7}")
    for m in (10, 10**3, 10**5, 10**6):
        prof = segments(m)
        t = np.sort(rng.uniform(0.0, 2.0 * m, n))
        if t_sum is None:
            t_sum = median_time(lambda: float(t.sum()), 21)
        dt = median_time(lambda: prof.angle_deg(t), 7)
        base = base or dt
        print(f"{m:9d} {dt*1e3:9.2f} {dt/base:11.2f} {dt/t_sum:7.0f}")
    k = 10**5
    bursts = BurstReplay(np.arange(k) * 10.0, np.full(k, 0.5), np.full(k, 2.0), np.full(k, 60.0))
    t = np.sort(rng.uniform(0.0, 10.0 * k, n))
    dt = median_time(lambda: bursts.angle_deg(t), 7)
    print(f"BurstReplay, {k} bursts: {dt*1e3:.2f} ms for {n} times ({dt/base:.2f} x 10 segments)")


if __name__ == "__main__":
    main()
