"""Tests of the polling schedules."""

import math

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from turnkit.errors import DesignValueError
from turnkit.schedule import AdaptiveSchedule, FixedSchedule, grid_count, grid_times


@settings(max_examples=200, deadline=None)
@given(st.floats(0, 100), st.floats(0, 100), st.floats(0, 5), st.floats(0.01, 3))
def test_grid_count_matches_brute_force(a, length, anchor, period):
    b = a + length
    k = np.arange(1, math.floor((b - anchor) / period) + 3)
    t = anchor + k * period
    brute = int(np.count_nonzero((t > a) & (t <= b)))
    # Closed form and listing agree with the brute-force count; an end within
    # GRID_TOLERANCE of a grid instant counts as on it, so only there may
    # the brute force (exact float comparison) differ by one.
    def near_grid(x):
        r = (x - anchor) / period
        return abs(r - round(r)) < 1e-6
    if near_grid(a) or near_grid(b):
        assert abs(grid_count(a, b, anchor, period) - brute) <= 1
    else:
        assert grid_count(a, b, anchor, period) == brute
    assert grid_times(a, b, anchor, period).size == grid_count(a, b, anchor, period)


def test_grid_count_of_ten_years_at_ten_ms():
    year = 365.25 * 86400
    assert grid_count(0.0, 10 * year, 0.0, 0.01) == 31_557_600_000


def test_awake_time_is_wake_plus_settle_plus_poll():
    s = FixedSchedule(0.01, wake_time_s=1e-4, settle_time_s=5e-5, poll_time_s=2e-5)
    assert s.awake_per_poll_s == pytest.approx(1.7e-4)
    assert s.fastest_period_s == 0.01


def test_adaptive_exposes_both_periods_and_the_hold():
    s = AdaptiveSchedule(poll_period_s=0.2, fast_period_s=0.01, hold_s=3.0)
    assert (s.poll_period_s, s.fast_period_s, s.hold_s, s.fastest_period_s) == (0.2, 0.01, 3.0, 0.01)


def test_jitter_is_seeded_and_bounded():
    s = FixedSchedule(0.01, jitter_s=0.001, seed=7)
    nominal = np.arange(1, 1001) * 0.01
    a = s.jittered(nominal, s.rng())
    b = s.jittered(nominal, s.rng())
    assert np.array_equal(a, b)
    assert np.all(np.abs(a - nominal) <= 0.001) and np.all(np.diff(a) > 0)
    c = FixedSchedule(0.01, jitter_s=0.001, seed=8)
    assert not np.array_equal(a, c.jittered(nominal, c.rng()))


@pytest.mark.parametrize("make,field", [
    (lambda: FixedSchedule(0.0), "poll_period_s"),
    (lambda: FixedSchedule(-1), "poll_period_s"),
    (lambda: FixedSchedule(float("nan")), "poll_period_s"),
    (lambda: FixedSchedule(1e-4, wake_time_s=1e-4), "wake_time_s"),
    (lambda: FixedSchedule(0.01, jitter_s=0.006), "jitter_s"),
    (lambda: FixedSchedule(0.01, seed=-1), "seed"),
    (lambda: AdaptiveSchedule(0.01, 0.02, 1.0), "fast_period_s"),
    (lambda: AdaptiveSchedule(0.1, 0.01, -1.0), "hold_s"),
])
def test_bad_schedules_name_the_field(make, field):
    with pytest.raises(DesignValueError, match=field):
        make()


def test_schedules_reject_unknown_keywords_and_are_frozen():
    with pytest.raises(TypeError):
        FixedSchedule(0.01, period=2)
    s = FixedSchedule(0.01)
    with pytest.raises(AttributeError):
        s.poll_period_s = 0.02
