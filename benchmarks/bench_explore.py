"""Benchmark: sweep and Monte Carlo points per second, serial vs 2 worker processes.

Run: .venv/bin/python benchmarks/bench_explore.py

Two workloads on the demo designs: (a) a 400-point sweep of the irrigation gate
valve (poll period x first-stage teeth), (b) a 300-sample Monte Carlo of the
camera-crane joint with sensor, latch, backlash and battery tolerances (every
sample re-runs the sensor error analysis). Each is timed serially in this
process (the baseline) and on a ProcessPoolExecutor with 2 workers started
before timing, alternating, on the same points; the grid (or seed) changes
between repeats so that no repeat re-uses cached points. Reports the median of
the repeats, points per second, the speed-up against the serial baseline, and
the CPU seconds spent (this process, plus the workers' for the pool run) so the
overhead of farming out can be read even on a busy machine.
"""
import multiprocessing
import os
import statistics
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

from turnkit.designfile import load_design
from turnkit.explore import Tolerance, monte_carlo, sweep

DEMO = Path(__file__).resolve().parents[1] / "demo"
REPEATS = 5


def sweep_job(valve, rep, executor):
    axes = {"schedule.poll_period_ms": np.geomspace(2, 200, 40) * (1 + 1e-3 * rep),
            "gear_train[0].teeth_driven": range(40 + 10 * rep, 50 + 10 * rep)}
    return sweep(valve, axes, base_dir=DEMO, executor=executor).all_passed.size


def mc_job(crane, rep, executor):
    tol = {"sensor.offset_x_mV": Tolerance.normal(0.3), "sensor.offset_y_mV": Tolerance.normal(0.3),
           "sensor.gain_mismatch": Tolerance.normal(0.005), "sensor.phase_error_deg": Tolerance.normal(0.5),
           "latches.switch_point_tolerance_deg": Tolerance.uniform(2.0),
           "gear_train[2].backlash_deg": Tolerance.uniform(0.3, relative=True),
           "battery.capacity_mAh": Tolerance.normal(0.05, relative=True)}
    return monte_carlo(crane, tol, 300, seed=100 + rep, base_dir=DEMO, executor=executor).n


def worker_cpu_s(pool):
    """CPU seconds used so far by the pool's worker processes (Linux /proc; None elsewhere)."""
    try:
        total = 0.0
        for pid in pool._processes:
            fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
            total += (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")
        return total
    except (OSError, AttributeError, IndexError, ValueError):
        return None


def compare(job, design, pool, first_rep):
    """Median wall and CPU times, serial and on the pool; the two alternate so load hits both alike."""
    wall = {"serial": [], "pool": []}
    cpu = {"serial": [], "pool": []}
    points = 0
    for rep in range(first_rep, first_rep + REPEATS):
        for which in (("serial", "pool") if rep % 2 == 0 else ("pool", "serial")):
            executor = None if which == "serial" else pool
            c0, w0 = time.process_time(), worker_cpu_s(pool)
            t0 = time.perf_counter()
            points = job(design, rep, executor)
            wall[which].append(time.perf_counter() - t0)
            used = time.process_time() - c0
            if which == "pool":
                w1 = worker_cpu_s(pool)
                used = used + (w1 - w0) if w0 is not None and w1 is not None else float("nan")
            cpu[which].append(used)
    med = {k: statistics.median(v) for k, v in wall.items()}
    med_cpu = {k: statistics.median(v) for k, v in cpu.items()}
    return med, med_cpu, points


def main():
    valve = load_design(DEMO / "irrigation-gate-valve.toml")
    crane = load_design(DEMO / "camera-crane-joint.toml")
    print(f"cores: {os.cpu_count()}, load average before: {os.getloadavg()[0]:.2f}, repeats: {REPEATS} "
          "(medians)")
    print(f"{'workload':<26} {'points':>6} {'serial s':>9} {'serial pt/s':>12} {'2 proc s':>9} "
          f"{'2 proc pt/s':>12} {'speed-up':>9} {'CPU s serial':>13} {'CPU s 2 proc':>13}")
    ctx = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=2, mp_context=ctx) as pool:
        # Start both workers and their lazy imports before timing.
        sweep_job(valve, 99, pool)
        mc_job(crane, 99, pool)
        for name, job, design in (("sweep, gate valve", sweep_job, valve),
                                  ("Monte Carlo, crane joint", mc_job, crane)):
            wall, cpu, n = compare(job, design, pool, 0)
            print(f"{name:<26} {n:6d} {wall['serial']:9.3f} {n / wall['serial']:12.1f} {wall['pool']:9.3f} "
                  f"{n / wall['pool']:12.1f} {wall['serial'] / wall['pool']:9.2f} {cpu['serial']:13.3f} "
                  f"{cpu['pool']:13.3f}")
    print(f"load average after: {os.getloadavg()[0]:.2f}. Other work on the machine slows both wall-time "
          "columns; CPU s (this process plus the workers) shows the cost of farming out.")


if __name__ == "__main__":
    main()
