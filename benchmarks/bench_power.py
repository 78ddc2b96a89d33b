"""Benchmark: life-versus-poll-period curve, vectorised vs a Python loop.

Run: .venv/bin/python benchmarks/bench_power.py
Reports the median of repeated runs and ratios against baselines measured in
the same process: (a) a Python loop of scalar budgets + lives, (b) one
streaming numpy float64 sum over an array of the same length.
"""
import statistics
import time

import numpy as np

from turnkit.battery import Pack, cell, life_years
from turnkit.power import Consumer, CurrentProfile, budget_from_schedule, life_vs_poll_period

NODE = CurrentProfile((
    Consumer("microcontroller", {"asleep": 1.2, "waking": 600.0, "polling": 1500.0,
                                 "tracking": 3000.0}),
    Consumer("Hall latches (2)", {"asleep": 0.0, "waking": 5000.0, "polling": 5000.0,
                                  "tracking": 5000.0}),
    Consumer("AMR sensor", {"asleep": 0.1, "waking": 0.0, "polling": 0.0, "tracking": 4000.0}),
    Consumer.constant("regulator quiescent", 0.6),
), supply_voltage_V=3.0)
PACK = Pack(cell("li_fes2_aa"), series=2)
SCHED = dict(wake_time_s=20e-6, settle_time_s=30e-6, poll_time_s=15e-6,
             tracking_fraction=30 / 86400)


def median_time(fn, repeat):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def curve(n):
    return life_vs_poll_period(NODE, PACK, poll_period_min_s=1e-3, poll_period_max_s=10.0,
                               points=n, max_allowed_poll_period_s=0.025, **SCHED)


def loop(n):
    for t in np.geomspace(1e-3, 10.0, n):
        b = budget_from_schedule(NODE, poll_period_s=float(t), **SCHED)
        life_years(PACK, b.average_current_uA, warn=False)


def main():
    print(f"{'points':>9} {'curve ms':>10} {'points/s':>12} {'loop ms':>10} "
          f"{'x loop':>8} {'sum ms':>9} {'x sum':>7}")
    for n in (10**3, 10**5, 10**6):
        t_curve = median_time(lambda: curve(n), 7 if n < 10**6 else 3)
        # The loop is timed on at most 2000 points and scaled (it is linear in n).
        m = min(n, 2000)
        t_loop = median_time(lambda: loop(m), 3) * n / m
        arr = np.random.default_rng(0).random(n)
        t_sum = median_time(lambda: float(arr.sum()), 21)
        print(f"{n:9d} {t_curve*1e3:10.3f} {n/t_curve:12.3g} {t_loop*1e3:10.1f} "
              f"{t_loop/t_curve:8.0f} {t_sum*1e3:9.4f} {t_curve/t_sum:7.0f}")


if __name__ == "__main__":
    main()
