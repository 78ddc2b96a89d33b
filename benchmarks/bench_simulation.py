"""Benchmark of two heavy counter simulations against plain numpy run in the same process.

Run:  .venv/bin/python benchmarks/bench_simulation.py [--quick]

* "adaptive 10 years of bursts": ten years of sparse back-drive bursts (10 a
  day, 100–1400 rpm, 4–13 s) on an adaptive schedule (100 ms slow, 10 ms fast,
  2 s hold, guess policy), against the fixed 10 ms schedule on the same bursts,
  and against the same run with bursts taken one at a time (batching across
  bursts switched off, as the simulation did before it batched).
* "1e7 reads at 44 % ambiguous": 10⁷ reads of a 10 ms fixed schedule while the
  motor back-drives at 1–1.9 quarter-turns a read (guess policy), against a
  plain chunked numpy poller (sample, quadrant, decode through a table, sum).

Each line gives the median wall time, its ratio against the baselines (the
poller and one float64 sum pass over an array of as many elements as reads)
and the peak of traced memory (tracemalloc, a separate run).
"""

from __future__ import annotations

import argparse
import tracemalloc

import numpy as np
from bench_counter import median_time  # the script's own folder is on the path

from turnkit.counter import CounterSettings
from turnkit.motion import BackDriveBursts
from turnkit.schedule import AdaptiveSchedule, FixedSchedule
from turnkit import simulation
from turnkit.simulation import BOUNDARY_SNAP_QT, simulate

YEAR_S = 365.25 * 86400
PERIOD_S = 0.01
CHUNK = 1 << 16


def peak_mib(fn) -> float:
    tracemalloc.start()
    try:
        fn()
        return tracemalloc.get_traced_memory()[1] / 2**20
    finally:
        tracemalloc.stop()


def numpy_poller(profile, n_reads: int) -> tuple[int, int]:
    """Reads k·period, k = 1..n, in chunks: quadrant index, step mod 4 through a table, summed.

    Returns (count with ambiguous reads taken as no step, number of ambiguous reads).
    """
    table = np.array([0, 1, 0, -1], dtype=np.int64)
    q_ref = int(np.floor(profile.angle_deg(np.array([0.0]))[0] / 90.0 + BOUNDARY_SNAP_QT))
    count = ambiguous = 0
    for k0 in range(1, n_reads + 1, CHUNK):
        k = np.arange(k0, min(k0 + CHUNK, n_reads + 1), dtype=np.float64)
        q = np.floor(profile.angle_deg_sorted(k * PERIOD_S) / 90.0 + BOUNDARY_SNAP_QT).astype(np.int64)
        d = np.diff(q, prepend=q_ref) & 3
        count += int(table[d].sum())
        ambiguous += int(np.count_nonzero(d == 2))
        q_ref = int(q[-1])
    return count, ambiguous


def report(name, sim_s, base_name, base_s, sum_s, sim_mib, base_mib):
    print(f"{name}: median {sim_s:.3f} s; {base_name} {base_s:.3f} s (ratio {sim_s / base_s:.2f}); "
          f"float64 sum pass {sum_s * 1e3:.1f} ms (ratio {sim_s / sum_s:.1f}); "
          f"peak memory {sim_mib:.1f} MiB against {base_mib:.1f} MiB")


def adaptive_years(years: float, repeats: int) -> None:
    bursts = BackDriveBursts(rate_per_day=10, speed_min_rpm=100, speed_max_rpm=1400, duration_min_s=4.0,
                             duration_max_s=13.28, horizon_s=years * YEAR_S, seed=1)
    guess = CounterSettings(32, ambiguous_policy="guess_last_direction")
    adaptive, fixed = AdaptiveSchedule(0.1, PERIOD_S, 2.0), FixedSchedule(PERIOD_S)
    duration = years * YEAR_S
    run_ad = lambda: simulate(bursts, adaptive, duration, guess)  # noqa: E731
    run_fx = lambda: simulate(bursts, fixed, duration, guess)  # noqa: E731
    def run_one():  # the same run, bursts one at a time (the private switch the tests use too)
        return simulation._Run(bursts, adaptive, duration, guess, (), True, None, 20_000, 1 << 17,  # noqa: SLF001
                               batch=False).execute()

    res = run_ad()
    one = run_one()
    assert (one.final_count, one.poll_count, one.fast_poll_count, one.ambiguous_count) == \
        (res.final_count, res.poll_count, res.fast_poll_count, res.ambiguous_count), "batched and one-burst differ"
    ad_s, fx_s = median_time(run_ad, repeats), median_time(run_fx, repeats)
    one_s = median_time(run_one, max(1, repeats // 2))
    in_motion = int(np.sum(bursts.ends_s - bursts.starts_s) / PERIOD_S)
    arr = np.random.default_rng(0).random(in_motion)
    sum_s = median_time(arr.sum, 7)
    print(f"{years:g} years, {bursts.burst_count:,} bursts; adaptive polls {res.poll_count:,} "
          f"({res.fast_poll_count:,} fast), ambiguous {res.ambiguous_count}, silent {res.silent_error_count}; "
          f"{ad_s / bursts.burst_count * 1e6:.1f} us a burst")
    report("adaptive 10 years of bursts" if years == 10 else f"adaptive {years:g} years", ad_s,
           "fixed 10 ms schedule, same bursts", fx_s, sum_s, peak_mib(run_ad), peak_mib(run_fx))
    print(f"  bursts one at a time: {one_s:.3f} s ({one_s / ad_s:.1f}x the batched run)")


def ambiguous_reads(n: int, repeats: int) -> None:
    duration = n * PERIOD_S
    # Speeds of 1–1.88 quarter-turns a read: about 44 % of the reads step two quarters.
    profile = BackDriveBursts(rate_per_day=86400 / 0.05, speed_min_rpm=1500, speed_max_rpm=2820,
                              duration_min_s=1.0, duration_max_s=9.0, horizon_s=duration, seed=11)
    guess = CounterSettings(32, ambiguous_policy="guess_last_direction")
    run = lambda: simulate(profile, FixedSchedule(PERIOD_S), duration, guess)  # noqa: E731
    res = run()
    _, amb = numpy_poller(profile, n)
    assert res.poll_count == n and res.ambiguous_count == amb, "poller and simulation disagree"
    sim_s = median_time(run, repeats)
    base_s = median_time(lambda: numpy_poller(profile, n), repeats)
    arr = np.random.default_rng(0).random(n)
    sum_s = median_time(arr.sum, 7)
    print(f"{n:.0e} reads, {res.ambiguous_count / n:.1%} ambiguous ({res.ambiguous_count:,}; "
          f"{len(res.ambiguous_events):,} kept)")
    report(f"{n:.0e} reads at {res.ambiguous_count / n:.0%} ambiguous", sim_s, "chunked numpy poller", base_s,
           sum_s, peak_mib(run), peak_mib(lambda: numpy_poller(profile, n)))
    # The same reads with about a quarter as many ambiguous ones: the peak should not follow them.
    fewer = BackDriveBursts(rate_per_day=86400 / 0.05, speed_min_rpm=1500, speed_max_rpm=1800,
                            duration_min_s=1.0, duration_max_s=9.0, horizon_s=duration, seed=11)
    few = simulate(fewer, FixedSchedule(PERIOD_S), duration, guess)
    print(f"  peak memory at {few.ambiguous_count:,} ambiguous reads "
          f"{peak_mib(lambda: simulate(fewer, FixedSchedule(PERIOD_S), duration, guess)):.1f} MiB; "
          f"at {res.ambiguous_count:,} see above (events kept: {guess.kept_events:,} of each kind)")


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one year and 1e6 reads, fewer repeats")
    args = parser.parse_args(argv)
    print(f"numpy {np.__version__}")
    adaptive_years(1 if args.quick else 10, 1 if args.quick else 5)
    ambiguous_reads(10**6 if args.quick else 10**7, 1 if args.quick else 5)


if __name__ == "__main__":
    main()
