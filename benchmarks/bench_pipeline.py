"""Benchmark: fixed cost per sizing call, Monte Carlo per core, and motion-heavy simulations.

Run:  .venv/bin/python benchmarks/bench_pipeline.py [--quick] [--baseline REF] [--only NAME ...]

Workloads (each reported as a median over repeats, with ratios against references
measured in the same run):

* ``cold``: a cold ``turnkit size FILE`` (new process: imports, reading the design
  file, sizing, printing) for a passing demo and for the camera crane, whose
  requirements conflict (relax advice); against ``python -c "import numpy"``.
* ``mc``: Monte Carlo samples per second on one core (serial, the camera-crane joint, 300
  samples a repeat, a new seed each repeat) for two sets of tolerances: with the
  sensor's offsets, gain and phase drawn (every sample re-runs the sensor error analysis and
  its simulated calibration fit), and a build spread with the sensor fixed (backlash, latch
  tolerance, battery capacity, sleep current).
* ``stitched``: a year of 462 recorded traces summed into one motion (each trace 5-60 s,
  sampled every 50 ms, at random times) simulated on a 10 ms fixed schedule; against a plain
  numpy poller that interpolates the same stitched samples at the same poll times and counts
  quarter-turns.
* ``adaptive``: 10 years of sparse back-drive bursts on an adaptive schedule (100 ms slow,
  10 ms fast, 2 s hold; guess policy); against turnkit's own fixed schedule on the same
  bursts and a skip-idle numpy poller (reads at 10 ms inside each burst only).
* ``ambiguous``: 10^7 reads of a shaft turning 1.44 quarter-turns per read (44 % of reads
  step two quarters; guess policy); against a plain chunked numpy poller doing the same
  decode; peak memory of each in its own process.

In-process times are CPU seconds of this process (the machine is shared); cold starts report
wall and CPU time of the child process. Every workload also reports its time over one float64 sum pass of 10^7 numbers measured in
the same run, a yardstick of the machine's speed at that moment.

``--baseline REF`` also loads turnkit as of the git revision REF (e.g. ``main``) into this
process as a second package and runs the ``mc`` and ``stitched`` workloads on both, and
``cold`` from a copy of REF, reporting the ratio (REF time / current time).
"""

from __future__ import annotations

import argparse
import importlib
import io
import os
import resource
import statistics
import subprocess
import sys
import tarfile
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo"
YEAR_S = 365.25 * 86400
PERIOD_S = 0.01


def median_cpu(fn, repeats: int) -> float:
    """Median CPU seconds of this process over ``repeats`` calls: the machine is shared, and CPU time
    is what a call costs whatever else runs (wall time is reported where it matters: cold start)."""
    times = []
    for _ in range(repeats):
        c0 = time.process_time()
        fn()
        times.append(time.process_time() - c0)
    return statistics.median(times)


def children_cpu_s() -> float:
    r = resource.getrusage(resource.RUSAGE_CHILDREN)
    return r.ru_utime + r.ru_stime


def sum_pass_s() -> float:
    arr = np.random.default_rng(0).random(10**7)
    return median_cpu(arr.sum, 7)


def load_baseline(ref: str):
    """turnkit as of git revision ``ref``, imported here as the package ``turnkit_base``."""
    tmp = Path(tempfile.mkdtemp(prefix="turnkit-baseline-"))
    data = subprocess.run(["git", "archive", ref, "turnkit"], cwd=ROOT, capture_output=True, check=True).stdout
    with tarfile.open(fileobj=io.BytesIO(data)) as tar:
        tar.extractall(tmp, filter="data")
    (tmp / "turnkit").rename(tmp / "turnkit_base")
    sys.path.insert(0, str(tmp))
    return "turnkit_base", tmp


def mod(pkg: str, name: str):
    return importlib.import_module(f"{pkg}.{name}")


# --- cold size ---------------------------------------------------------------------------

def cold(args, baseline_dir):
    # Two settings: with compiled bytecode cached (as after an install; the cache goes to a
    # temporary folder, warmed by the first round) and compiling every module from source (as
    # with PYTHONDONTWRITEBYTECODE=1), which costs turnkit far more than numpy, whose
    # installed bytecode is used unless a cache folder is set.
    with tempfile.TemporaryDirectory(prefix="turnkit-pycache-") as cache:
        env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
        _cold(args, baseline_dir, dict(env, PYTHONPYCACHEPREFIX=cache), "bytecode cached")
    _cold(args, baseline_dir, dict(os.environ, PYTHONDONTWRITEBYTECODE="1"), "compiled from source each time")


def _cold(args, baseline_dir, env, label):
    files = [DEMO / "irrigation-gate-valve.toml", DEMO / "camera-crane-joint.toml"]
    repeats = 5 if args.quick else 11
    commands = {"import numpy": [sys.executable, "-c", "import numpy"]}
    for f in files:
        commands[f"size {f.stem}"] = [sys.executable, "-m", "turnkit", "size", str(f)]
        if baseline_dir is not None:
            commands[f"size {f.stem} ({args.baseline})"] = [sys.executable, "-m", "turnkit_base", "size", str(f)]
    base_env = dict(env, PYTHONPATH=str(baseline_dir)) if baseline_dir is not None else env
    times = {k: [] for k in commands}
    cpu = {k: [] for k in commands}
    for rep in range(repeats + 1):  # alternate, so that load from other jobs hits all alike
        for key, cmd in commands.items():
            t0, c0 = time.perf_counter(), children_cpu_s()
            subprocess.run(cmd, cwd=ROOT, capture_output=True, env=base_env if "turnkit_base" in cmd else env)
            if rep:  # the first round warms the bytecode cache and the disk
                times[key].append(time.perf_counter() - t0)
                cpu[key].append(children_cpu_s() - c0)
    ref = statistics.median(times["import numpy"])
    ref_cpu = statistics.median(cpu["import numpy"])
    print(f"cold start, {label}, median of {repeats} (each in a new process; wall and CPU time):")
    for key, ts in times.items():
        med, med_cpu = statistics.median(ts), statistics.median(cpu[key])
        print(f"  {key:<42} wall {med * 1e3:6.0f} ms = {med / ref:5.2f}x import numpy; "
              f"CPU {med_cpu * 1e3:6.0f} ms = {med_cpu / ref_cpu:5.2f}x")
    print()


# --- Monte Carlo per core ------------------------------------------------------------------

def mc_tolerances(pkg: str, which: str):
    Tolerance = mod(pkg, "explore").Tolerance
    if which == "sensor drawn":
        return {"sensor.offset_x_mV": Tolerance.normal(0.3), "sensor.offset_y_mV": Tolerance.normal(0.3),
                "sensor.gain_mismatch": Tolerance.normal(0.005), "sensor.phase_error_deg": Tolerance.normal(0.5),
                "latches.switch_point_tolerance_deg": Tolerance.uniform(2.0),
                "gear_train[2].backlash_deg": Tolerance.uniform(0.3, relative=True),
                "battery.capacity_mAh": Tolerance.normal(0.05, relative=True)}
    return {"gear_train[2].backlash_deg": Tolerance.uniform(0.3, relative=True),
            "latches.switch_point_tolerance_deg": Tolerance.uniform(2.0),
            "battery.capacity_mAh": Tolerance.normal(0.05, relative=True),
            "power.consumers[0].asleep_uA": Tolerance.normal(0.1, relative=True)}


def mc(args, pkgs, sum_s):
    n = 300
    repeats = 3 if args.quick else 7
    print(f"Monte Carlo on one core (camera-crane joint, {n} samples a repeat, median of {repeats}):")
    for which in ("sensor drawn", "sensor fixed"):
        designs = {pkgs[0]: mod(pkgs[0], "designfile").load_design(DEMO / "camera-crane-joint.toml")}
        if len(pkgs) == 2:
            # The baseline sizes the demo file as it was at its own revision (the format has grown since).
            text = subprocess.run(["git", "show", f"{args.baseline}:demo/camera-crane-joint.toml"], cwd=ROOT,
                                  capture_output=True, text=True, check=True).stdout
            designs[pkgs[1]] = mod(pkgs[1], "designfile").loads_design(text, source="camera-crane-joint.toml")
        tols = {p: mc_tolerances(p, which) for p in pkgs}
        first = {}
        for p in pkgs:  # warm up
            r = mod(p, "explore").monte_carlo(designs[p], tols[p], 40, seed=1, base_dir=DEMO)
            first[p] = (r.all_passed.tolist(), {k: v.tobytes() for k, v in r.values.items()})
        if len(pkgs) == 2 and first[pkgs[0]] != first[pkgs[1]]:
            print("  (the two versions' models differ, so their results differ; only their speed is compared)")
        times = {p: [] for p in pkgs}
        for rep in range(repeats):
            for p in (pkgs if rep % 2 == 0 else pkgs[::-1]):
                fn = mod(p, "explore").monte_carlo
                c0 = time.process_time()
                fn(designs[p], tols[p], n, seed=100 + rep, base_dir=DEMO)
                times[p].append(time.process_time() - c0)
        med = {p: statistics.median(t) for p, t in times.items()}
        line = (f"  {which:<13} current {n / med[pkgs[0]]:7.0f} samples/s ({med[pkgs[0]] / n * 1e3:.2f} ms a "
                f"sample = {med[pkgs[0]] / n / sum_s:.2f}x the sum pass)")
        if len(pkgs) == 2:
            line += (f"; {args.baseline} {n / med[pkgs[1]]:7.0f} samples/s; "
                     f"speed-up {med[pkgs[1]] / med[pkgs[0]]:.2f}x")
        print(line)
    print()


# --- a stitched year of recorded traces ---------------------------------------------------

def stitched_samples(count: int = 462, seed: int = 7):
    """(start times, sample times, angles) of ``count`` invented hand-moved traces over a year."""
    rng = np.random.default_rng(seed)
    lengths = rng.uniform(5.0, 60.0, count)
    starts = np.sort(rng.uniform(0.0, YEAR_S - 120.0, count))
    starts = starts + np.arange(count) * 1e-3  # keep them apart
    traces = []
    for start, length in zip(starts, lengths):
        t = np.arange(0.0, length, 0.05)
        speed = np.convolve(rng.normal(0, 1500, t.size), np.ones(20) / 20, mode="same")  # deg/s, smooth
        speed = np.clip(speed, -5000, 5000)
        angle = np.concatenate(([0.0], np.cumsum(0.5 * (speed[1:] + speed[:-1]) * 0.05)))
        traces.append((start + t, angle))
    return traces


def stitched(args, pkgs, sum_s):
    traces = stitched_samples()
    repeats = 3 if args.quick else 5
    results = {}
    times = {}
    for p in pkgs:
        motion, schedule, counter, simulation = (mod(p, m) for m in ("motion", "schedule", "counter", "simulation"))
        profile = motion.CombinedMotion(tuple(motion.RecordedTrace(t, a) for t, a in traces))
        run = (lambda profile=profile, simulation=simulation, schedule=schedule, counter=counter:
               simulation.simulate(profile, schedule.FixedSchedule(PERIOD_S), YEAR_S, counter.CounterSettings(32)))
        res = run()
        results[p] = (res.poll_count, res.final_count, res.final_count_error, res.ambiguous_count)
        times[p] = median_cpu(run, 1 if args.quick else repeats)
    if len(pkgs) == 2:
        assert results[pkgs[0]] == results[pkgs[1]], (results, "current and baseline disagree")

    # Plain numpy: the same stitched samples as one array (each trace offset by the ones before),
    # read at 10 ms inside each trace only, quarter-turns counted from the decoded quadrants.
    ends = np.cumsum([a[-1] for _, a in traces])
    offsets = np.concatenate(([0.0], ends[:-1]))
    st = np.concatenate([t for t, _ in traces])
    sa = np.concatenate([a + o for (_, a), o in zip(traces, offsets)])

    def numpy_poller():
        count = 0
        for (t, a), off in zip(traces, offsets):
            polls = np.arange(np.ceil(t[0] / PERIOD_S), np.floor(t[-1] / PERIOD_S) + 1) * PERIOD_S
            q = np.floor(np.interp(polls, st, sa) / 90.0).astype(np.int64)
            count += int(q[-1] - q[0]) if q.size else 0
        return count

    numpy_poller()
    ref_s = median_cpu(numpy_poller, repeats)
    cur = times[pkgs[0]]
    polls_in_motion = sum(int(np.floor(t[-1] / PERIOD_S) - np.ceil(t[0] / PERIOD_S) + 1) for t, _ in traces)
    print(f"stitched year: {len(traces)} recorded traces summed, {PERIOD_S * 1e3:g} ms fixed schedule, "
          f"~{polls_in_motion:,} reads in motion; final count error {results[pkgs[0]][2]}")
    line = (f"  current {cur:.3f} s = {cur / ref_s:.2f}x the plain numpy poller ({ref_s:.3f} s), "
            f"{cur / sum_s:.1f}x the sum pass")
    if len(pkgs) == 2:
        line += f"; {args.baseline} {times[pkgs[1]]:.3f} s; speed-up {times[pkgs[1]] / cur:.1f}x"
    print(line)
    print()


# --- adaptive schedule over 10 years ---------------------------------------------------------

def adaptive(args, sum_s):
    from turnkit.counter import CounterSettings
    from turnkit.motion import BackDriveBursts
    from turnkit.schedule import AdaptiveSchedule, FixedSchedule
    from turnkit.simulation import simulate

    bursts = BackDriveBursts(rate_per_day=10, speed_min_rpm=100, speed_max_rpm=1400, duration_min_s=4.0,
                             duration_max_s=13.28, horizon_s=10 * YEAR_S, seed=1)
    guess = CounterSettings(32, ambiguous_policy="guess_last_direction")
    sched = AdaptiveSchedule(0.1, PERIOD_S, 2.0)
    repeats = 1 if args.quick else 3
    res = simulate(bursts, sched, 10 * YEAR_S, guess)
    ad_s = median_cpu(lambda: simulate(bursts, sched, 10 * YEAR_S, guess), repeats)
    fixed_s = median_cpu(lambda: simulate(bursts, FixedSchedule(PERIOD_S), 10 * YEAR_S, guess), repeats)
    starts, ends, speeds = bursts.starts_s, bursts.ends_s, bursts.speeds_deg_per_s
    base = bursts._base_deg  # noqa: SLF001 - the reference reads the same burst table

    def numpy_poller():
        # Reads every 10 ms inside each burst only (skip idle), a few hundred bursts per array pass.
        first_all = np.ceil(starts / PERIOD_S)
        n_all = (np.floor(ends / PERIOD_S) - first_all + 1).astype(np.int64)
        two = 0
        for lo in range(0, starts.size, 256):
            sl = slice(lo, lo + 256)
            first, n = first_all[sl], n_all[sl]
            idx = np.repeat(np.arange(n.size), n)
            k = np.arange(n.sum()) - np.repeat(np.cumsum(n) - n, n)
            t = (first[idx] + k) * PERIOD_S
            s0 = starts[sl]
            q = np.floor((base[sl][idx] + speeds[sl][idx] * (t - s0[idx])) / 90.0).astype(np.int64)
            two += int(np.count_nonzero(np.abs(np.diff(q)) == 2))
        return two

    numpy_poller()
    ref_s = median_cpu(numpy_poller, 3)
    print(f"adaptive schedule, 10 years, {bursts.burst_count:,} bursts: "
          f"{res.poll_count:,} reads ({res.fast_poll_count:,} fast)")
    print(f"  adaptive {ad_s:.2f} s = {ad_s / bursts.burst_count * 1e6:.0f} us a burst; "
          f"{ad_s / fixed_s:.1f}x turnkit's fixed schedule on the same bursts ({fixed_s:.3f} s); "
          f"{ad_s / ref_s:.1f}x the skip-idle numpy poller ({ref_s:.3f} s); {ad_s / sum_s:.0f}x the sum pass")
    print()


# --- 44 % ambiguous reads ---------------------------------------------------------------------

_AMBIGUOUS_CHILD = r"""
import sys, time
import numpy as np
which, n = sys.argv[1], int(float(sys.argv[2]))
period = 0.01
speed_rpm = 1.44 * 90.0 / period / 6.0   # 1.44 quarter-turns per read
if which == "turnkit":
    from turnkit.counter import CounterSettings
    from turnkit.motion import ConstantSpeed
    from turnkit.schedule import FixedSchedule
    from turnkit.simulation import simulate
    prof = ConstantSpeed(speed_rpm, start_s=0.0)
    settings = CounterSettings(32, ambiguous_policy="guess_last_direction")
    t0 = time.process_time()
    r = simulate(prof, FixedSchedule(period), n * period, settings)
    dt = time.process_time() - t0
    amb = r.ambiguous_count
else:
    # Plain chunked poller: angle, quadrant, step by the 4-entry table, guess at two-quarter steps.
    t0 = time.process_time()
    deg_per_s = speed_rpm * 6.0
    count, last_dir, amb, q_prev = 0, 1, 0, 0
    chunk = 1 << 16
    table = np.array([0, 1, 2, -1], dtype=np.int8)
    for s in range(1, n + 1, chunk):
        k = np.arange(s, min(s + chunk, n + 1), dtype=np.float64)
        q = np.floor(deg_per_s * (k * period) / 90.0).astype(np.int64)
        d = table[np.diff(q, prepend=q_prev) & 3]
        two = d == 2
        amb += int(np.count_nonzero(two))
        count += int(d[~two].sum()) + 2 * last_dir * int(np.count_nonzero(two))
        q_prev = int(q[-1])
    dt = time.process_time() - t0
# Peak resident memory of this process (VmHWM; ru_maxrss would include the parent's before exec).
hwm_kb = next(int(line.split()[1]) for line in open("/proc/self/status") if line.startswith("VmHWM"))
print(dt, amb, hwm_kb)
"""


def ambiguous(args, sum_s):
    n = 10**6 if args.quick else 10**7
    out = {}
    for which in ("numpy", "turnkit"):
        runs = []
        for _ in range(1 if args.quick else 3):
            proc = subprocess.run([sys.executable, "-c", _AMBIGUOUS_CHILD, which, str(n)], cwd=ROOT,
                                  capture_output=True, text=True, check=True)
            dt, amb, rss_kb = proc.stdout.split()
            runs.append((float(dt), int(amb), int(rss_kb)))
        out[which] = (statistics.median(r[0] for r in runs), runs[0][1], max(r[2] for r in runs))
    tk, ref = out["turnkit"], out["numpy"]
    print(f"ambiguous reads (simulation as it is today): {n:,} reads at 1.44 quarter-turns a read, guess policy; "
          f"{tk[1]:,} ambiguous ({tk[1] / n:.0%})")
    print(f"  turnkit {tk[0]:.2f} s, peak {tk[2] / 1024:.0f} MiB; plain chunked numpy poller {ref[0]:.3f} s, peak "
          f"{ref[2] / 1024:.0f} MiB ({ref[1]:,} ambiguous); ratio {tk[0] / ref[0]:.1f}x; "
          f"{tk[0] / sum_s:.0f}x the sum pass")
    print()


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats, smaller sizes")
    parser.add_argument("--baseline", metavar="REF", help="also time turnkit as of this git revision")
    parser.add_argument("--only", nargs="+", choices=("cold", "mc", "stitched", "adaptive", "ambiguous"),
                        help="run only these workloads")
    args = parser.parse_args(argv)
    only = set(args.only or ("cold", "mc", "stitched", "adaptive", "ambiguous"))
    pkgs = ["turnkit"]
    baseline_dir = None
    if args.baseline:
        name, baseline_dir = load_baseline(args.baseline)
        pkgs.append(name)
    s = sum_pass_s()
    print(f"numpy {np.__version__}; float64 sum pass of 10^7 numbers: {s * 1e3:.2f} ms (median of 7)")
    print()
    if "cold" in only:
        cold(args, baseline_dir)
    if "mc" in only:
        mc(args, pkgs, s)
    if "stitched" in only:
        stitched(args, pkgs, s)
    if "adaptive" in only:
        adaptive(args, s)
    if "ambiguous" in only:
        ambiguous(args, s)


if __name__ == "__main__":
    main()
