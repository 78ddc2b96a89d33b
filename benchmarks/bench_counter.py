"""Benchmark of the polled quarter-turn counter simulation.

Run:  .venv/bin/python benchmarks/bench_counter.py [--quick]

Prints, for 1e5, 1e6 and 1e7 polls of a busy profile (back-drive bursts
covering most of the timeline, every poll inside a burst decoded):

* polls simulated per second (median of several runs);
* the ratio against a plain Python loop over the same polls (sampling the
  same profile and decoding poll by poll) — the loop is timed on 1e5 polls
  and scaled linearly, as stated in the table;
* the ratio against one streaming numpy pass (float64 sum) over an array of
  the same length, the practical limit of any array code.

Then a 10-year timeline at a 10 ms poll period with motion 0.1 % of the time
(about 3e10 polls, 3e7 of them during motion), and the same 10 years on an
adaptive schedule (100 ms slow, 10 ms fast, 2 s hold; guess policy, since the
bursts outrun the slow period), whose cost follows the number of bursts.
"""

from __future__ import annotations

import argparse
import bisect
import math
import statistics
import time

import numpy as np

from turnkit.counter import CounterSettings
from turnkit.motion import BackDriveBursts
from turnkit.schedule import AdaptiveSchedule, FixedSchedule
from turnkit.simulation import simulate

PERIOD_S = 0.01
YEAR_S = 365.25 * 86400


def busy_profile(duration_s: float) -> BackDriveBursts:
    # Mean gap ~0.9 s between bursts of 1..9 s: motion about 85 % of the time,
    # speeds up to 1400 rpm (the 10 ms bound is 1500 rpm).
    return BackDriveBursts(rate_per_day=86400 / 0.9, speed_min_rpm=100, speed_max_rpm=1400,
                           duration_min_s=1.0, duration_max_s=9.0, horizon_s=duration_s, seed=11)


def median_time(fn, repeats: int) -> float:
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def python_loop(profile: BackDriveBursts, n_polls: int) -> int:
    """The same work poll by poll in plain Python (sample, quadrant, decode, count)."""
    starts = profile.starts_s.tolist()
    ends = profile.ends_s.tolist()
    speeds = profile.speeds_deg_per_s.tolist()
    base = profile._base_deg.tolist()  # noqa: SLF001 - the loop needs the same tables
    a0 = profile.start_angle_deg
    q_ref = math.floor(a0 / 90.0 + 1e-9)
    count = 0
    table = (0, 1, None, -1)
    for k in range(1, n_polls + 1):
        t = k * PERIOD_S
        i = bisect.bisect_right(starts, t) - 1
        a = a0 if i < 0 else base[i] + speeds[i] * (min(t, ends[i]) - starts[i])
        q = math.floor(a / 90.0 + 1e-9)
        step = table[(q - q_ref) & 3]
        if step is None:
            break
        count += step
        q_ref = q
    return count


def main(argv=None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats, skip 1e7")
    args = parser.parse_args(argv)
    sizes = [10**5, 10**6] if args.quick else [10**5, 10**6, 10**7]
    settings = CounterSettings(32)
    schedule = FixedSchedule(PERIOD_S)

    loop_n = 10**5
    loop_profile = busy_profile(loop_n * PERIOD_S)
    # The loop and the simulation must agree before either is timed.
    check = simulate(loop_profile, FixedSchedule(PERIOD_S), loop_n * PERIOD_S, CounterSettings(32))
    assert python_loop(loop_profile, loop_n) == check.final_count, "loop and simulation disagree"
    loop_s = median_time(lambda: python_loop(loop_profile, loop_n), 3)
    loop_rate = loop_n / loop_s

    print(f"numpy {np.__version__}; poll period {PERIOD_S * 1e3:g} ms; busy profile = back-drive bursts, "
          f"motion ~85 % of the time")
    print(f"plain Python loop: {loop_rate:,.0f} polls/s (timed on {loop_n:,} polls, scaled linearly)")
    print()
    header = f"{'polls':>12} {'median s':>10} {'polls/s':>14} {'x loop':>8} {'sum s':>9} {'/ sum':>7} {'error':>6}"
    print(header)
    print("-" * len(header))
    for n in sizes:
        duration = n * PERIOD_S
        profile = busy_profile(duration)
        repeats = 5 if n <= 10**6 else 3
        result = simulate(profile, schedule, duration, settings)
        assert result.poll_count == n, result.poll_count
        sim_s = median_time(lambda: simulate(profile, schedule, duration, settings), 1 if args.quick else repeats)
        arr = np.random.default_rng(0).random(n)
        sum_s = median_time(arr.sum, 7)
        loop_est = n / loop_rate
        print(f"{n:>12,} {sim_s:>10.4f} {n / sim_s:>14,.0f} {loop_est / sim_s:>8.1f} {sum_s:>9.5f} "
              f"{sim_s / sum_s:>7.1f} {result.final_count_error:>6}")
    print()

    bursts = BackDriveBursts(rate_per_day=10, speed_min_rpm=100, speed_max_rpm=1400, duration_min_s=4.0,
                             duration_max_s=13.28, horizon_s=10 * YEAR_S, seed=1)
    moving_s = float(np.sum(bursts.ends_s - bursts.starts_s))
    result = simulate(bursts, schedule, 10 * YEAR_S, settings)
    ten_s = median_time(lambda: simulate(bursts, schedule, 10 * YEAR_S, settings), 1 if args.quick else 3)
    print(f"10-year timeline, {PERIOD_S * 1e3:g} ms polls, {bursts.burst_count:,} bursts, "
          f"motion {moving_s / (10 * YEAR_S):.3%} of the time")
    print(f"  polls on the timeline {result.poll_count:,.0f}; polls during motion ~{moving_s / PERIOD_S:,.0f}")
    print(f"  median wall time {ten_s:.2f} s; final count error {result.final_count_error}; "
          f"ambiguous {len(result.ambiguous_events)}; silent {result.silent_error_count}")

    adaptive = AdaptiveSchedule(0.1, PERIOD_S, 2.0)
    guess = CounterSettings(32, ambiguous_policy="guess_last_direction")
    result = simulate(bursts, adaptive, 10 * YEAR_S, guess)
    ad_s = median_time(lambda: simulate(bursts, adaptive, 10 * YEAR_S, guess), 1 if args.quick else 3)
    print(f"10-year timeline, adaptive schedule (100 ms slow, {PERIOD_S * 1e3:g} ms fast, 2 s hold), "
          f"guess policy")
    print(f"  polls {result.poll_count:,} ({result.fast_poll_count:,} fast); median wall time {ad_s:.2f} s "
          f"= {ad_s / bursts.burst_count * 1e6:.0f} us per burst; ambiguous {len(result.ambiguous_events)}; "
          f"silent {result.silent_error_count}; final count error {result.final_count_error}")


if __name__ == "__main__":
    main()
