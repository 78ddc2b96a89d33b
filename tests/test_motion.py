"""Tests of the motion profiles and CSV traces."""

import math
from fractions import Fraction
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from turnkit.errors import DesignFileError, DesignValueError
from turnkit.motion import (
    AtOutput,
    BackDriveBursts,
    CoastDown,
    CombinedMotion,
    ConstantSpeed,
    Still,
    TrapezoidMove,
    Vibration,
    load_trace_csv,
    merge_intervals,
    output_speed_to_motor_rpm,
    output_travel_to_motor_deg,
)

ROTARY_50 = SimpleNamespace(travel_per_motor_turn=Fraction(360, 50), output_unit="deg", direction=1)
SCREW = SimpleNamespace(travel_per_motor_turn=Fraction(1, 20), output_unit="mm", direction=-1)


def test_constant_speed_turns_six_degrees_per_second_per_rpm():
    p = ConstantSpeed(60.0, start_s=1.0, duration_s=2.0, start_angle_deg=10.0)
    assert p.angle_deg(np.array([0.0, 1.0, 2.0, 3.0, 9.0])).tolist() == [10.0, 10.0, 370.0, 730.0, 730.0]
    s, e = p.motion_intervals()
    assert (s.tolist(), e.tolist()) == ([1.0], [3.0])


@settings(max_examples=100, deadline=None)
@given(st.floats(-1e5, 1e5).filter(lambda d: abs(d) > 1e-3), st.floats(1, 5000), st.floats(10, 1e5))
def test_trapezoid_reaches_its_distance_and_respects_speed(distance, speed, accel):
    m = TrapezoidMove(distance, speed, accel, start_s=0.5, driven=True)
    t = np.linspace(0, 0.5 + m.duration_s + 1, 20001)
    a = m.angle_deg(t)
    assert a[-1] == pytest.approx(distance, rel=1e-9, abs=1e-9)
    v = np.diff(a) / np.diff(t)
    assert np.max(np.abs(v)) <= 6 * speed * (1 + 1e-6)
    assert np.all(np.sign(v[np.abs(v) > 1e-9]) == np.sign(distance))


def test_short_trapezoid_becomes_a_triangle():
    # 6 rpm/s accel = 36 deg/s^2; 36 deg needs 1 s up and 1 s down at peak 36 deg/s.
    m = TrapezoidMove(36.0, 1000.0, 6.0)
    assert m.duration_s == pytest.approx(2.0)
    assert m.angle_deg(np.array([1.0]))[0] == pytest.approx(18.0)


def test_coast_down_travels_speed_times_time_constant():
    # omega0 * tau: 600 rpm = 3600 deg/s, tau 0.2 s -> 720 deg.
    c = CoastDown(600.0, 0.2, start_s=1.0)
    assert c.angle_deg(np.array([1.0 + c.duration_s]))[0] == pytest.approx(720.0, abs=1e-5)
    assert c.angle_deg(np.array([1.2]))[0] == pytest.approx(720.0 * (1 - math.exp(-1)))
    assert c.angle_deg(np.array([1e6]))[0] == c.angle_deg(np.array([1.0 + c.duration_s]))[0]


def test_bursts_are_seeded_and_land_near_the_rate():
    kwargs = dict(rate_per_day=24.0, speed_min_rpm=10, speed_max_rpm=30, duration_min_s=1, duration_max_s=3,
                  horizon_s=100 * 86400)
    a, b = BackDriveBursts(seed=5, **kwargs), BackDriveBursts(seed=5, **kwargs)
    c = BackDriveBursts(seed=6, **kwargs)
    assert np.array_equal(a.starts_s, b.starts_s) and not np.array_equal(a.starts_s, c.starts_s)
    # Poisson count over 100 days at 24/day: mean 2400, sd ~49.
    assert 2200 < a.burst_count < 2600
    speeds = np.abs(a.speeds_deg_per_s) / 6
    assert speeds.min() >= 10 and speeds.max() <= 30
    assert np.all(a.starts_s[1:] > a.ends_s[:-1])


def test_burst_angle_is_continuous_and_flat_between_bursts():
    b = BackDriveBursts(200, 10, 100, 1, 5, 86400, seed=1, start_angle_deg=5.0)
    mid_gap = 0.5 * (b.ends_s[:-1] + b.starts_s[1:])
    assert np.allclose(b.angle_deg(mid_gap), b.angle_deg(b.ends_s[:-1]))
    t = np.sort(np.concatenate([b.starts_s, b.ends_s, np.linspace(0, 86400, 5000)]))
    # Sorted and unsorted evaluation agree.
    perm = np.random.default_rng(0).permutation(t.size)
    assert np.array_equal(b.angle_deg(t)[perm], b.angle_deg(t[perm]))
    assert b.angle_deg(np.array([0.0]))[0] == 5.0


def test_vibration_stays_within_its_amplitude_about_the_boundary():
    v = Vibration(30.0, 7.0, start_s=1.0, duration_s=2.0, boundary_deg=180.0)
    a = v.angle_deg(np.linspace(0, 5, 10001))
    assert a.min() >= 150.0 - 1e-9 and a.max() <= 210.0 + 1e-9


def test_combined_motion_adds_angles_and_merges_intervals():
    c = ConstantSpeed(10, start_s=0, duration_s=2) + ConstantSpeed(20, start_s=1, duration_s=2) + Still(3.0)
    assert isinstance(c, CombinedMotion) and len(c.parts) == 3
    s, e = c.motion_intervals()
    assert (s.tolist(), e.tolist()) == ([0.0], [3.0])
    assert c.angle_deg(np.array([3.0]))[0] == pytest.approx(3 + 120 + 240)


def test_merge_intervals_joins_overlaps():
    s, e = merge_intervals([5, 0, 1, 10], [6, 2, 3, 10])
    assert (s.tolist(), e.tolist()) == ([0.0, 5.0], [3.0, 6.0])


def test_output_side_motion_maps_through_the_train():
    # 50:1 rotary: 1 output rpm = 50 motor rpm.
    assert output_speed_to_motor_rpm(1.0, ROTARY_50) == pytest.approx(50.0)
    # 0.05 mm per motor turn, reversed: 1 mm/s = 20 turns/s = 1200 rpm backwards.
    assert output_speed_to_motor_rpm(1.0, SCREW) == pytest.approx(-1200.0)
    assert output_travel_to_motor_deg(1.0, SCREW) == pytest.approx(-7200.0)
    out = AtOutput(ConstantSpeed(2.0, duration_s=1.0), ROTARY_50)
    assert out.angle_deg(np.array([1.0]))[0] == pytest.approx(12.0 * 50)


def test_csv_angle_trace_with_units(tmp_path):
    f = tmp_path / "trace.csv"
    f.write_text("# recorded hand-wheel turn\ntime [ms],angle [rev]\n0,0\n500,1\n1000,1.5\n")
    p = load_trace_csv(f)
    assert p.angle_deg(np.array([0.25, 0.75, 2.0])).tolist() == pytest.approx([180.0, 450.0, 540.0])
    s, e = p.motion_intervals()
    assert (s[0], e[0]) == (0.0, 1.0)


def test_csv_speed_trace_integrates_exactly():
    # Speed ramps 0 -> 60 rpm (360 deg/s) over 1 s: angle = 180 t^2.
    p = load_trace_csv("time [s],speed [rpm]\n0,0\n1,60\n")
    assert p.angle_deg(np.array([0.5, 1.0])).tolist() == pytest.approx([45.0, 180.0])


def test_csv_linear_trace_at_the_output_needs_a_train():
    text = "time [s], position [mm]\n0,0\n1,0.1\n"
    with pytest.raises(DesignFileError, match="gear train"):
        load_trace_csv(text)
    p = load_trace_csv(text, train=SCREW)
    assert p.angle_deg(np.array([1.0]))[0] == pytest.approx(-720.0)


@pytest.mark.parametrize("text,line,words", [
    ("time [s],angle [deg]\n0,0\n1,x\n", 3, "not a number"),
    ("time [s],angle [deg]\n0,0\n0,1\n", 3, "increase"),
    ("time [s],angle [deg]\n0,0\n1,2,3\n", 3, "2 values"),
    ("time,angle\n0,0\n1,1\n", 1, "name \\[unit\\]"),
    ("time [s],angle [furlong]\n0,0\n1,1\n", 1, "not understood"),
    ("\n# c\ntime [fortnight],angle [deg]\n0,0\n1,1\n", 3, "time"),
    ("time [s],angle [deg]\n0,0\n", 2, "at least 2"),
    ("time [s],angle [deg]\n0,0\n1,nan\n", 3, "finite"),
])
def test_bad_csv_names_the_line(text, line, words):
    with pytest.raises(DesignFileError, match=words) as info:
        load_trace_csv(text)
    assert info.value.line == line
    assert f"line {line}" in str(info.value) or f":{line}" in str(info.value)


def test_missing_csv_file_is_a_clear_error(tmp_path):
    with pytest.raises(DesignFileError, match="cannot read"):
        load_trace_csv(tmp_path / "nope.csv")


@pytest.mark.parametrize("make,field", [
    (lambda: ConstantSpeed(float("inf")), "speed_rpm"),
    (lambda: TrapezoidMove(10, 0, 10), "max_speed_rpm"),
    (lambda: CoastDown(100, 0), "time_constant_s"),
    (lambda: BackDriveBursts(0, 1, 2, 1, 2, 10), "rate_per_day"),
    (lambda: BackDriveBursts(1, 3, 2, 1, 2, 10), "speed_max_rpm"),
    (lambda: Vibration(1, 0), "frequency_hz"),
])
def test_bad_profiles_name_the_field(make, field):
    with pytest.raises(DesignValueError, match=field):
        make()


# --- segments and replayed bursts ------------------------------------------------------------------

from turnkit.motion import (BurstReplay, SegmentedMotion, TrapezoidMove,  # noqa: E402
                            load_bursts_csv, load_segments_csv)


@settings(max_examples=30, deadline=None)
@given(st.lists(st.tuples(st.floats(0.0, 2.0), st.floats(0.01, 3.0), st.floats(-500.0, 500.0),
                          st.floats(-300.0, 300.0)), min_size=1, max_size=6))
def test_segment_angles_are_the_integral_of_their_speed(parts):
    # Source: the angle is the time integral of the speed; scipy.integrate.quad of the piecewise
    # linear speed is an independent oracle of the closed form.
    from scipy.integrate import quad

    starts, t = [], 0.0
    for gap, dur, _, _ in parts:
        t += gap
        starts.append(t)
        t += dur
    durs = [p[1] for p in parts]
    v0 = [p[2] for p in parts]
    acc = [p[3] for p in parts]
    m = SegmentedMotion(starts, durs, v0, acc, start_angle_deg=12.5)

    def speed_deg_per_s(x):
        for s, d, v, a in zip(starts, durs, v0, acc):
            if s <= x <= s + d:
                return 6.0 * (v + a * (x - s))
        return 0.0

    probes = np.linspace(0.0, t + 1.0, 23)
    breaks = sorted(set(starts) | {s + d for s, d in zip(starts, durs)})
    for x in probes:
        ref = 12.5 + quad(speed_deg_per_s, 0.0, x, points=[b for b in breaks if b < x] or None, limit=200)[0]
        assert float(m.angle_deg(x)) == pytest.approx(ref, abs=1e-6 * (1 + abs(ref)))


def test_a_replayed_burst_is_the_trapezoid_move_with_the_same_ramp_and_cruise():
    # Independent cross-check against TrapezoidMove: ramp 0.4 s at 150 rpm/s -> 60 rpm top, 1.1 s cruise.
    a, ramp, cruise = 150.0, 0.4, 1.1
    top_rpm = a * ramp
    distance_deg = 6.0 * top_rpm * (ramp + cruise)
    burst = BurstReplay((2.0,), (ramp,), (cruise,), (a,), start_angle_deg=30.0)
    move = TrapezoidMove(distance_deg=distance_deg, max_speed_rpm=top_rpm, accel_rpm_per_s=a, start_s=2.0,
                         start_angle_deg=30.0, driven=False)
    t = np.linspace(0.0, 6.0, 601)
    assert np.allclose(burst.angle_deg(t), move.angle_deg(t), atol=1e-9)
    assert burst.peak_speed_rpm == pytest.approx(top_rpm)
    s, e = burst.motion_intervals()
    assert s.tolist() == [2.0] and e[0] == pytest.approx(2.0 + 2 * ramp + cruise)


def test_many_segments_are_located_by_search_not_by_scanning_every_part():
    # 200 000 segments: a time's value comes from its own segment only (checked at random times
    # against the per-segment formula), as one binary search per time gives it.
    n = 200_000
    starts = np.arange(n, dtype=float) * 2.0
    m = SegmentedMotion(starts, np.ones(n), np.full(n, 10.0), np.zeros(n))
    rng = np.random.default_rng(1)
    t = np.sort(rng.uniform(0.0, 2.0 * n, 5000))
    k = np.floor(t / 2.0)
    expected = 60.0 * k + 60.0 * np.minimum(t - 2.0 * k, 1.0)
    assert np.allclose(m.angle_deg(t), expected, rtol=1e-12, atol=1e-6)


def test_segment_and_burst_files_read_with_units_and_name_bad_lines():
    seg = load_segments_csv("# pulls\nstart [ms],duration [s],speed [deg/s],acceleration [deg/s^2]\n"
                            "0,1,0,360\n2000,1,360,-360\n")
    assert float(seg.angle_deg(10.0)) == pytest.approx(180.0 + 180.0)
    bursts = load_bursts_csv("start [s],ramp [s],cruise [s],acceleration [rpm/s]\n1,0.5,2,120\n")
    assert float(bursts.angle_deg(10.0)) == pytest.approx(900.0)
    with pytest.raises(DesignFileError, match=":4: row"):
        load_segments_csv("start [s],duration [s],speed [rpm],acceleration [rpm/s]\n0,2,1,0\n# note\n1,1,1,0\n")
    with pytest.raises(DesignFileError, match=":2: row"):
        load_bursts_csv("start [s],ramp [s],cruise [s],acceleration [rpm/s]\n0,0,1,5\n")
    with pytest.raises(DesignFileError, match="acceleration"):
        load_bursts_csv("start [s],ramp [s],cruise [s],speed [rpm]\n0,1,1,5\n")
    with pytest.raises(DesignValueError, match="durations_s"):
        SegmentedMotion((0.0,), (0.0,), (1.0,), (0.0,))
