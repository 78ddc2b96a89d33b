"""Sums of motion profiles and recorded traces work out only the stretches where a part moves,
with the same values, to the last bit, as evaluating every part at every time."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.motion import (BackDriveBursts, BurstReplay, CoastDown, CombinedMotion, ConstantSpeed, MotionProfile,
                            RecordedTrace, SegmentedMotion, Still, TrapezoidMove, Vibration)


def _trace(seed: int, kind: str, shift: float) -> RecordedTrace:
    rng = np.random.default_rng(seed)
    t = shift + np.cumsum(rng.uniform(0.01, 0.5, 12))
    values = np.cumsum(rng.normal(0, 30, 12)) if kind == "angle" else rng.normal(0, 200, 12)
    values[0] = 0.0
    return RecordedTrace(t, values, kind=kind, start_angle_deg=float(rng.normal(0, 5)))


def _profile(draw_kind: int, seed: int, shift: float) -> MotionProfile:
    rng = np.random.default_rng(seed)
    if draw_kind == 0:
        return ConstantSpeed(float(rng.normal(0, 300)), start_s=shift, duration_s=float(rng.uniform(0.1, 3)),
                             start_angle_deg=float(rng.normal(0, 10)))
    if draw_kind == 1:
        return TrapezoidMove(distance_deg=float(rng.normal(0, 500)), max_speed_rpm=200.0, accel_rpm_per_s=500.0,
                             start_s=shift)
    if draw_kind == 2:
        return CoastDown(initial_speed_rpm=float(rng.normal(0, 300)), time_constant_s=0.3, start_s=shift)
    if draw_kind == 3:
        return BackDriveBursts(rate_per_day=86400 / 2, speed_min_rpm=50, speed_max_rpm=400, duration_min_s=0.1,
                               duration_max_s=0.5, horizon_s=6.0, seed=seed, start_s=shift)
    if draw_kind == 4:
        return Vibration(amplitude_deg=5.0, frequency_hz=3.0, start_s=shift, duration_s=1.0)
    if draw_kind == 5:
        return Still(float(rng.normal(0, 10)))
    if draw_kind == 8:
        starts = shift + np.cumsum(rng.uniform(0.0, 1.0, 4))
        durations = np.diff(np.append(starts, starts[-1] + 0.7)) * rng.uniform(0.2, 1.0, 4)
        return SegmentedMotion(starts, durations, rng.normal(0, 200, 4), rng.normal(0, 400, 4),
                               start_angle_deg=float(rng.normal(0, 10)))
    if draw_kind == 9:
        starts = shift + np.arange(3) * 2.0
        return BurstReplay(starts, rng.uniform(0.05, 0.3, 3), rng.uniform(0.0, 1.0, 3),
                           rng.choice([-1.0, 1.0], 3) * rng.uniform(100, 900, 3),
                           start_angle_deg=float(rng.normal(0, 10)))
    return _trace(seed, "angle" if draw_kind == 6 else "speed", shift)


def _plain_sum(parts, t):
    total = parts[0].angle_deg_sorted(t)
    for p in parts[1:]:
        total = total + p.angle_deg_sorted(t)
    return total


@settings(max_examples=150, deadline=None)
@given(kinds=st.lists(st.tuples(st.integers(0, 9), st.integers(0, 10**6), st.floats(0, 8)), min_size=1, max_size=6),
       times=st.lists(st.floats(-1, 12), min_size=2, max_size=300))
def test_sum_gives_the_same_bits_as_every_part_at_every_time(kinds, times):
    parts = tuple(_profile(k, seed, shift) for k, seed, shift in kinds)
    t = np.sort(np.asarray(times))
    combined = CombinedMotion(parts)
    assert combined.angle_deg_sorted(t).tobytes() == _plain_sum(parts, t).tobytes()


@settings(max_examples=100, deadline=None)
@given(kind=st.sampled_from(["angle", "speed"]), seed=st.integers(0, 10**6), shift=st.floats(0, 5),
       times=st.lists(st.floats(-1, 12), min_size=2, max_size=300))
def test_recorded_trace_at_rest_outside_its_samples_gives_the_same_bits(kind, seed, shift, times):
    trace = _trace(seed, kind, shift)
    t = np.sort(np.asarray(times))
    assert trace.angle_deg_sorted(t).tobytes() == trace.angle_deg(t).tobytes()


def test_a_part_whose_motion_ends_before_a_zero_minus_sum_keeps_its_sign():
    # -0.0 from the first part survives only while every later term is -0.0; a +0.0 term makes it +0.0.
    first = Still(-0.0)
    second = ConstantSpeed(60.0, start_s=5.0, duration_s=1.0, start_angle_deg=0.0)
    t = np.array([0.0, 1.0, 2.0])
    out = CombinedMotion((first, second)).angle_deg_sorted(t)
    assert out.tobytes() == _plain_sum((first, second), t).tobytes()


@dataclass(frozen=True, slots=True)
class _Counting(MotionProfile):
    """Wraps a profile and counts the times it is asked for."""

    inner: MotionProfile
    asked: list = field(default_factory=list, compare=False)

    def angle_deg(self, t_s):
        self.asked.append(np.size(t_s))
        return self.inner.angle_deg(t_s)

    def angle_deg_sorted(self, t_s):
        self.asked.append(np.size(t_s))
        return self.inner.angle_deg_sorted(t_s)

    def motion_intervals(self):
        return self.inner.motion_intervals()


def test_sum_of_stitched_traces_asks_each_trace_only_for_its_own_times():
    parts = [_Counting(_trace(k, "angle", 10.0 * k)) for k in range(20)]
    t = np.linspace(0.0, 200.0, 20001)
    CombinedMotion(tuple(parts)).angle_deg_sorted(t)
    for p in parts:
        lo, hi = p.inner.times_s[0], p.inner.times_s[-1]
        inside = int(np.count_nonzero((t >= lo) & (t <= hi)))
        # Its own stretch, plus at most one time before and one after to read its resting value.
        assert sum(p.asked) <= inside + 2
