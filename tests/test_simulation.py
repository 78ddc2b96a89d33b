"""Tests of the counter simulation against an independent brute-force decoder."""

import math
from fractions import Fraction
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from turnkit.bounds import max_trackable_speed_rpm
from turnkit.counter import CounterEvent, CounterMode, CounterSettings, CounterState, EventKind, step
from turnkit.errors import DesignValueError
from turnkit.motion import (
    BackDriveBursts,
    CombinedMotion,
    ConstantSpeed,
    Still,
    TrapezoidMove,
    Vibration,
)
from turnkit.schedule import GRID_TOLERANCE, AdaptiveSchedule, FixedSchedule
from turnkit.simulation import BOUNDARY_SNAP_QT, simulate

STATES = ("asleep", "waking", "polling", "fast_polling", "tracking", "fault", "power_lost")

# ----------------------------------------------------------------- oracle
# Independent brute force: Hall latch bits from the shaft angle by geometry
# (latch A high on [90°, 270°), latch B high on [180°, 360°)), step decoded by
# looking up neighbours in the written-out Gray cycle, one poll at a time.
# Source: F. Gray, US patent 2,632,058 (1953) for the 00-01-11-10 cycle.
CYCLE = [(0, 0), (0, 1), (1, 1), (1, 0)]  # (latch B, latch A)


def latch_bits(angle_deg):
    a = math.fmod(angle_deg + BOUNDARY_SNAP_QT * 90.0, 360.0)
    a = a + 360.0 if a < 0 else a
    return (1 if a >= 180.0 else 0, 1 if 90.0 <= a < 270.0 else 0)


def crossings(a0, a1):
    """Signed quarter-boundary crossings from a0 to a1 (the truth)."""
    return math.floor(a1 / 90.0 + BOUNDARY_SNAP_QT) - math.floor(a0 / 90.0 + BOUNDARY_SNAP_QT)


def oracle(angle, times, final_t, width=32, policy="flag_and_hold"):
    lo, hi = -(1 << (width - 1)), (1 << (width - 1)) - 1
    a0 = angle(0.0)
    prev_bits, prev_angle = latch_bits(a0), a0
    count, last_dir, fault = 0, 0, False
    ambiguous, silent = [], 0
    for t in list(times) + [final_t]:
        a = angle(t)
        bits = latch_bits(a)
        i, j = CYCLE.index(prev_bits), CYCLE.index(bits)
        true = crossings(prev_angle, a)
        if i == j:
            dec = 0
        elif CYCLE[(i + 1) % 4] == bits:
            dec = 1
        elif CYCLE[(i - 1) % 4] == bits:
            dec = -1
        else:
            dec = None
        if dec is None:
            ambiguous.append((t, true))
            if policy == "flag_and_hold":
                fault = True
                break
            dec = 0 if policy == "flag_and_continue" else 2 * (last_dir or 1)
        elif dec != true:
            silent += 1
        if dec in (1, -1):
            last_dir = dec
        count += dec
        assert lo <= count <= hi
        prev_bits, prev_angle = bits, a
    return SimpleNamespace(count=count, ambiguous=ambiguous, silent=silent, fault=fault,
                           truth=crossings(a0, angle(final_t)))


def check_against_oracle(profile, period, duration, policy):
    res = simulate(profile, FixedSchedule(period), duration,
                   CounterSettings(32, ambiguous_policy=policy))
    n = math.floor(duration / period)
    times = [k * period for k in range(1, n + 1)]
    ref = oracle(lambda t: float(profile.angle_deg(np.array([t]))[0]), times, duration, policy=policy)
    assert len(res.ambiguous_events) == len(ref.ambiguous)
    for (t, size), (t_ref, size_ref) in zip(res.ambiguous_events, ref.ambiguous):
        assert t == pytest.approx(t_ref, abs=1e-9) and size == size_ref
    assert res.silent_error_count == ref.silent
    assert res.true_final_count == ref.truth
    if not ref.fault:
        assert res.final_count == ref.count
        assert res.fault_count == 0
    else:
        assert res.fault_count == 1 and res.final_count == ref.count
    return res


@st.composite
def busy_profiles(draw, max_rpm=6000.0):
    """Sums of constant, trapezoid and vibration motion (undriven)."""
    parts = [Still(draw(st.floats(-720, 720)))]
    for _ in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(["const", "trap", "vib"]))
        start = draw(st.floats(0, 1.5))
        if kind == "const":
            parts.append(ConstantSpeed(draw(st.floats(-max_rpm, max_rpm)), start_s=start,
                                       duration_s=draw(st.floats(0.01, 2))))
        elif kind == "trap":
            parts.append(TrapezoidMove(draw(st.floats(-5000, 5000)), draw(st.floats(1, max(max_rpm, 1.0))),
                                       draw(st.floats(100, 1e5)), start_s=start, driven=False))
        else:
            amp = draw(st.floats(1, 200))
            freq = draw(st.floats(0.1, 50))
            parts.append(Vibration(amp, freq, start_s=start, duration_s=draw(st.floats(0.01, 2))))
    return CombinedMotion(tuple(parts))


@settings(max_examples=40, deadline=None)
@given(busy_profiles(), st.sampled_from([0.005, 0.01, 0.0173]),
       st.sampled_from(["flag_and_hold", "guess_last_direction", "flag_and_continue"]))
def test_every_ambiguous_and_silent_read_matches_the_oracle(profile, period, policy):
    check_against_oracle(profile, period, 3.0, policy)


@settings(max_examples=40, deadline=None)
@given(st.floats(-1.0, 1.0), st.floats(-720, 720), st.floats(0, 0.5), st.sampled_from([0.002, 0.01, 0.05]),
       st.floats(0.0, 1.0))
def test_count_is_exact_under_the_guaranteed_speed(fraction, start_angle, start, period, split):
    # Two constant-speed parts whose speeds add up to at most the bound.
    bound = max_trackable_speed_rpm(period)
    profile = CombinedMotion((
        ConstantSpeed(fraction * split * bound, start_s=start, duration_s=40 * period, start_angle_deg=start_angle),
        TrapezoidMove(fraction * 30 * 90.0, max(abs(fraction) * (1 - split) * bound, 1e-3), bound * 10,
                      start_s=start, driven=False),
    ))
    res = simulate(profile, FixedSchedule(period, wake_time_s=0, settle_time_s=0, poll_time_s=0),
                   start + 60 * period + 100.0)
    assert res.final_count_error == 0
    assert len(res.ambiguous_events) == 0 and res.silent_error_count == 0
    assert np.array_equal(res.trace_decoded_count, res.trace_true_count)


@pytest.mark.parametrize("phase_deg", np.linspace(0.0, 90.0, 19))
def test_exactly_at_the_bound_every_phase_tracks(phase_deg):
    period = 0.01
    profile = ConstantSpeed(max_trackable_speed_rpm(period), start_s=0.0, duration_s=5.0, start_angle_deg=phase_deg)
    res = simulate(profile, FixedSchedule(period), 6.0)
    assert res.final_count_error == 0 and len(res.ambiguous_events) == 0


def test_just_above_the_bound_the_worst_phase_is_flagged():
    period = 0.01
    profile = ConstantSpeed(1.01 * max_trackable_speed_rpm(period), duration_s=1.0, start_angle_deg=89.5)
    res = simulate(profile, FixedSchedule(period), 2.0)
    assert len(res.ambiguous_events) == 1 and res.fault_count == 1
    assert res.ambiguous_events.true_steps[0] == 2
    assert res.state_time_s["fault"] == pytest.approx(2.0 - 0.01)


def test_above_twice_the_bound_errors_go_silent():
    period = 0.01
    # 270° per poll: every read is three quarters forward and decodes as one back.
    res = simulate(ConstantSpeed(3 * max_trackable_speed_rpm(period), duration_s=1.0, start_angle_deg=45),
                   FixedSchedule(period), 1.5)
    assert len(res.ambiguous_events) == 0
    assert res.silent_error_count == 100
    assert res.final_count == -100 and res.true_final_count == 300


def test_vibration_under_ninety_degrees_peak_to_peak_never_miscounts_at_any_frequency():
    # The bound is on displacement per read, not on speed.
    profile = Vibration(44.9, 373.0, start_s=0.1, duration_s=3.0, boundary_deg=90.0)
    res = simulate(profile, FixedSchedule(0.01), 4.0)
    assert res.final_count_error == 0 and len(res.ambiguous_events) == 0


def test_state_times_add_up_and_wakes_are_counted_in_closed_form():
    profile = ConstantSpeed(100, start_s=10.0, duration_s=5.0)
    sch = FixedSchedule(0.05)
    res = simulate(profile, sch, 3600.0)
    assert sum(res.state_time_s.values()) == pytest.approx(3600.0, rel=1e-12)
    assert set(res.state_time_s) == set(STATES)
    assert res.poll_count == res.wake_count == 72000
    assert res.state_time_s["waking"] == pytest.approx(72000 * (sch.wake_time_s + sch.settle_time_s))
    assert res.state_time_s["polling"] == pytest.approx(72000 * sch.poll_time_s)


def test_a_long_idle_timeline_is_cheap_because_idle_is_not_polled():
    year = 365.25 * 86400
    res = simulate(ConstantSpeed(10, start_s=100, duration_s=10), FixedSchedule(0.01), 10 * year)
    assert res.poll_count == math.floor(10 * year / 0.01)
    assert res.final_count_error == 0
    assert sum(res.state_time_s.values()) == pytest.approx(10 * year, rel=1e-12)


def test_driven_moves_are_tracked_exactly_at_any_speed():
    move = TrapezoidMove(36000.0, 20000.0, 1e6, start_s=1.0)  # far above the poll bound
    res = simulate(move, FixedSchedule(0.05), 5.0)
    assert res.final_count_error == 0 and res.move_count == 1
    assert res.state_time_s["tracking"] == pytest.approx(move.duration_s)
    assert res.final_count == 400


def test_untracked_drive_is_polled_and_fails():
    move = TrapezoidMove(36000.0, 20000.0, 1e6, start_s=1.0)
    sch = FixedSchedule(0.05, track_when_driven=False)
    assert simulate(move, sch, 5.0).fault_count == 1


def test_adaptive_schedule_polls_fast_after_motion_and_returns_to_slow():
    sch = AdaptiveSchedule(poll_period_s=0.1, fast_period_s=0.01, hold_s=2.0)
    profile = ConstantSpeed(100.0, start_s=5.0, duration_s=3.0)  # 100 rpm < 150 rpm slow bound
    res = simulate(profile, sch, 60.0)
    assert res.final_count_error == 0
    # Fast polls cover the motion after the first step plus the hold.
    assert 300 <= res.fast_poll_count <= 3 / 0.01 + 2.0 / 0.01 + 2
    assert sum(res.state_time_s.values()) == pytest.approx(60.0)
    slow_only = simulate(profile, FixedSchedule(0.1), 60.0)
    assert res.poll_count > slow_only.poll_count


def test_adaptive_fast_period_tracks_what_the_slow_one_cannot_after_the_first_step():
    # Slow bound 150 rpm, fast bound 1500 rpm. A slow start, then a fast run.
    profile = CombinedMotion((ConstantSpeed(60.0, start_s=1.0, duration_s=10.0),
                              ConstantSpeed(1000.0, start_s=2.0, duration_s=3.0)))
    adaptive = simulate(profile, AdaptiveSchedule(0.1, 0.01, 1.0), 20.0)
    fixed = simulate(profile, FixedSchedule(0.1), 20.0)
    assert adaptive.final_count_error == 0 and len(adaptive.ambiguous_events) == 0
    assert fixed.fault_count == 1 or fixed.final_count_error != 0


def test_fault_is_cleared_by_rehoming_at_the_next_drive():
    profile = CombinedMotion((ConstantSpeed(4000.0, start_s=1.0, duration_s=0.5, start_angle_deg=10),
                              TrapezoidMove(720.0, 100.0, 1000.0, start_s=5.0)))
    res = simulate(profile, FixedSchedule(0.01), 10.0)
    assert res.fault_count >= 1 and res.rehome_count == 1 and res.final_count_error == 0
    stuck = simulate(profile, FixedSchedule(0.01), 10.0, rehome_on_drive=False)
    assert stuck.final_count_error != 0 and stuck.move_count == 0


def test_power_loss_clears_the_count_and_faults_until_rehomed():
    profile = CombinedMotion((ConstantSpeed(60.0, start_s=1.0, duration_s=1.0),
                              TrapezoidMove(360.0, 100.0, 1000.0, start_s=8.0)))
    res = simulate(profile, FixedSchedule(0.01), 12.0, power_loss_s=[(3.0, 4.0)])
    assert res.state_time_s["power_lost"] == pytest.approx(1.0)
    assert res.state_time_s["fault"] == pytest.approx(4.0)
    assert res.final_count_error == 0 and res.rehome_count == 1
    assert sum(res.state_time_s.values()) == pytest.approx(12.0)
    kept = simulate(profile, FixedSchedule(0.01), 7.0, power_loss_s=[(3.0, 4.0)])
    assert kept.final_count_error == -4  # one motor turn forgotten


@pytest.mark.parametrize("policy,final,faults", [("wrap", 20 - 16, 0), ("saturate", 7, 0), ("fault", 7, 1)])
def test_overflow_per_policy(policy, final, faults):
    s = CounterSettings(4, signed=True, overflow_policy=policy)
    res = simulate(ConstantSpeed(600.0, start_s=0.5, duration_s=0.5), FixedSchedule(0.01), 2.0, s)
    assert res.true_final_count == 1800 // 90
    assert res.final_count == final
    assert res.overflow_count == (1 if policy != "saturate" else 13)
    assert res.fault_count == faults


@settings(max_examples=25, deadline=None)
@given(busy_profiles(max_rpm=3000), st.booleans(), st.integers(0, 3),
       st.lists(st.tuples(st.floats(0, 4), st.floats(0.01, 1)), max_size=2))
def test_state_times_sum_to_the_duration(profile, adaptive, seed, losses):
    sch = AdaptiveSchedule(0.05, 0.01, 0.3, jitter_s=0.001, seed=seed) if adaptive else \
        FixedSchedule(0.02, jitter_s=0.002, seed=seed)
    move = TrapezoidMove(900.0, 500.0, 5000.0, start_s=5.0)
    spans = [(a, min(a + b, 4.9)) for a, b in losses if a < 4.8]
    res = simulate(CombinedMotion((profile, move)), sch, 8.0, power_loss_s=spans)
    assert sum(res.state_time_s.values()) == pytest.approx(8.0, rel=1e-12)
    assert all(v >= -1e-12 for v in res.state_time_s.values())
    assert res.wake_count == res.poll_count == res.state_entries["waking"]


def test_jitter_is_seeded():
    profile = ConstantSpeed(2500.0, start_s=0.3, duration_s=1.0, start_angle_deg=30)
    a = simulate(profile, FixedSchedule(0.01, jitter_s=0.002, seed=3), 2.0,
                 CounterSettings(ambiguous_policy="guess_last_direction"))
    b = simulate(profile, FixedSchedule(0.01, jitter_s=0.002, seed=3), 2.0,
                 CounterSettings(ambiguous_policy="guess_last_direction"))
    assert np.array_equal(a.ambiguous_events.times_s, b.ambiguous_events.times_s)
    assert len(a.ambiguous_events) > 0


def test_step_function_replays_the_traced_reads():
    # The pure transition function and the array engine apply the same rule.
    profile = ConstantSpeed(2400.0, start_s=0.2, duration_s=0.6, start_angle_deg=20)
    s = CounterSettings(ambiguous_policy="guess_last_direction")
    res = simulate(profile, FixedSchedule(0.01), 1.0, s, trace_window_s=(0.0, 1.0))
    state = CounterState.homed(s)
    q0 = math.floor(20 / 90)
    for t, true in zip(res.trace_poll_times_s, res.trace_true_count):
        q = int(true) + q0
        state = step(step(state, CounterEvent(EventKind.WAKE_TIMER, t), s), CounterEvent(EventKind.SETTLED, t), s)
        state = step(state, CounterEvent(EventKind.LATCH_READ, t, latch_code=[0, 1, 3, 2][q % 4]), s)
    assert state.mode is CounterMode.ASLEEP
    assert state.count == res.trace_decoded_count[-1] == res.final_count


def test_output_error_goes_through_the_train():
    train = SimpleNamespace(travel_per_motor_turn=Fraction(2, 1), output_unit="mm", direction=-1)
    res = simulate(ConstantSpeed(6000.0, start_s=0.5, duration_s=0.1, start_angle_deg=45), FixedSchedule(0.01), 1.0)
    t, err = res.output_error(train)
    assert err[-1] == pytest.approx(res.final_count_error * 2 / 4 * -1)
    tt, terr = res.trace_output_error(train)
    assert tt.shape == terr.shape and len(tt) > 0


def test_plot_arrays_stay_bounded_on_long_runs():
    bursts = BackDriveBursts(50, 10, 50, 5, 10, 30 * 86400, seed=2)
    res = simulate(bursts, FixedSchedule(0.01), 30 * 86400, trace_max_polls=500)
    assert len(res.trace_poll_times_s) <= 500 and res.trace_angle_deg.size == 4001
    assert res.final_count_error == 0


def test_bad_arguments_name_the_field():
    with pytest.raises(DesignValueError, match="duration_s"):
        simulate(Still(), FixedSchedule(0.01), -1.0)
    with pytest.raises(DesignValueError, match="power_loss_s"):
        simulate(TrapezoidMove(90, 10, 10, start_s=1), FixedSchedule(0.01), 10.0, power_loss_s=[(1.5, 2.0)])
    with pytest.raises(TypeError):
        simulate(Still(), FixedSchedule(0.01), 1.0, poll_period_s=2)


def test_worked_valve_example_needs_the_bound_and_fails_above_it():
    # docs/counter.md: 24:1 spur train and a 2 mm lead screw (1/12 mm per motor
    # turn); a hand wheel on the screw at 3 mm/s spins the motor at 2160 rpm.
    from turnkit.bounds import max_poll_period_at_output_s
    from turnkit.motion import output_speed_to_motor_rpm

    train = SimpleNamespace(travel_per_motor_turn=Fraction(1, 12), output_unit="mm", direction=1)
    motor_rpm = float(output_speed_to_motor_rpm(3.0, train))
    period = max_poll_period_at_output_s(3.0, train)
    assert motor_rpm == pytest.approx(2160.0) and period == pytest.approx(1 / 144)
    for scale, expect_errors in ((1.0, False), (1.1, True)):
        amb = 0
        for phase in np.linspace(0.0, 90.0, 13):
            turn = ConstantSpeed(motor_rpm, start_s=1.0, duration_s=2.0, start_angle_deg=phase)
            r = simulate(turn, FixedSchedule(scale * period), 4.0)
            amb += len(r.ambiguous_events)
            if not expect_errors:
                assert r.final_count_error == 0
        assert (amb > 0) == expect_errors


def brute_force_adaptive(profile, sch, duration):
    """Poll-by-poll adaptive schedule, straight from its definition."""
    angle = lambda t: float(profile.angle_deg(np.array([t]))[0])  # noqa: E731
    q_ref = math.floor(angle(0.0) / 90 + BOUNDARY_SNAP_QT)
    count = slow = fast = 0
    anchor, period, k, fast_until, mode = 0.0, sch.poll_period_s, 1, -math.inf, "slow"
    while True:
        t = anchor + k * period
        # An instant within GRID_TOLERANCE of a period of a limit counts as on
        # it (the engine's documented rounding convention for grid points).
        if mode == "fast" and t > fast_until + GRID_TOLERANCE * period:
            mode, anchor, period, k = "slow", fast_until, sch.poll_period_s, 1
            continue
        if t > duration + GRID_TOLERANCE * period:
            break
        q = math.floor(angle(t) / 90 + BOUNDARY_SNAP_QT)
        d = (q - q_ref) % 4
        assert d != 2, "test profiles stay under the fast bound"
        count += {0: 0, 1: 1, 3: -1}[d]
        q_ref = q
        if mode == "slow":
            slow += 1
        else:
            fast += 1
        if d:
            fast_until = t + sch.hold_s
            if mode == "slow":
                mode, anchor, period, k = "fast", t, sch.fast_period_s, 0
        k += 1
    # The simulation's last (unscheduled) read at the end of the timeline.
    d = (math.floor(angle(duration) / 90 + BOUNDARY_SNAP_QT) - q_ref) % 4
    return count + {0: 0, 1: 1, 3: -1}[d], slow, fast


@settings(max_examples=30, deadline=None)
@given(st.integers(0, 10_000), st.floats(0.05, 3.0), st.floats(5, 140))
def test_adaptive_schedule_matches_a_poll_by_poll_replay(seed, hold, top_rpm):
    bursts = BackDriveBursts(3000, 1, top_rpm, 0.5, 8, 60.0, seed=seed, start_angle_deg=17.0)
    sch = AdaptiveSchedule(0.1, 0.01, hold, wake_time_s=0, settle_time_s=0, poll_time_s=0)
    res = simulate(bursts, sch, 60.0)
    count, slow, fast = brute_force_adaptive(bursts, sch, 60.0)
    assert (res.final_count, res.poll_count - res.fast_poll_count, res.fast_poll_count) == (count, slow, fast)


@settings(max_examples=30, deadline=None)
@given(st.floats(1.0, 6.0), st.sampled_from([1, -1]), st.floats(0, 360), st.floats(20, 300), st.floats(1, 90),
       st.sampled_from(["flag_and_hold", "guess_last_direction", "flag_and_continue"]))
def test_fast_motion_every_error_matches_the_oracle(multiple, sign, phase, amplitude, freq, policy):
    # Well above the 1500 rpm bound of 10 ms polls, plus a strong vibration:
    # ambiguous and silent reads are frequent here.
    period = 0.01
    profile = CombinedMotion((
        ConstantSpeed(sign * multiple * max_trackable_speed_rpm(period), start_s=0.2, duration_s=0.5,
                      start_angle_deg=phase),
        Vibration(amplitude, freq, start_s=0.4, duration_s=0.4),
    ))
    res = check_against_oracle(profile, period, 1.0, policy)
    if multiple > 1.05:
        assert len(res.ambiguous_events) + res.silent_error_count > 0 or res.final_count_error == 0


# --------------------------------------------- shortcuts against the general path
def assert_same_result(a, b):
    """Every field of two SimulationResults equal, arrays element by element and in dtype."""
    for name in type(a).__slots__:
        x, y = getattr(a, name), getattr(b, name)
        if hasattr(x, "times_s"):
            assert np.array_equal(x.times_s, y.times_s), name
            assert np.array_equal(x.true_steps, y.true_steps), name
        elif isinstance(x, np.ndarray):
            assert x.dtype == y.dtype and np.array_equal(x, y), name
        else:
            assert x == y, name


def general_path(profile, sch, duration, settings, trace_window_s=None):
    """The same run with the adaptive one-burst shortcuts switched off."""
    from turnkit import simulation

    return simulation._Run(profile, sch, duration, settings, (), True, trace_window_s, 20_000,  # noqa: SLF001
                           1 << 16, lean=False).execute()


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 10_000), st.floats(1, 3000), st.floats(0.05, 6), st.sampled_from([0.0, 0.05, 0.4, 3.0]),
       st.sampled_from(["flag_and_hold", "guess_last_direction", "flag_and_continue"]),
       st.sampled_from([4, 8, 32]),
       st.sampled_from(["wrap", "saturate", "fault"]), st.booleans(), st.sampled_from([None, (50.0, 52.0)]))
def test_adaptive_burst_shortcut_gives_the_general_result(seed, top_rpm, longest_s, hold, policy, width, overflow,
                                                          with_other_motion, window):
    # Random bursts from barely moving to far beyond the slow bound (multi-step
    # reads, ambiguous and silent ones), holds shorter and longer than the
    # gaps, narrow counters that overflow, other motion mixed in, and the
    # trace window on the first burst or in the middle of the run.
    bursts = BackDriveBursts(2000, 0.5, top_rpm, 0.02, longest_s, 120.0, seed=seed, start_angle_deg=seed % 360)
    profile = CombinedMotion((bursts, Vibration(60.0, 3.0, start_s=30.0, duration_s=5.0),
                              TrapezoidMove(720.0, 300.0, 3000.0, start_s=70.0))) if with_other_motion else bursts
    sch = AdaptiveSchedule(0.1, 0.01, hold, wake_time_s=0, settle_time_s=0, poll_time_s=0)
    s = CounterSettings(width, ambiguous_policy=policy, overflow_policy=overflow)
    assert_same_result(simulate(profile, sch, 120.0, s, trace_window_s=window),
                       general_path(profile, sch, 120.0, s, trace_window_s=window))


def one_burst_path(profile, sch, duration, settings, *, batch=False, derive=True, **kw):
    """The same run with bursts taken one at a time (``batch=False``), or batched with every fast
    read sampled (``derive=False``)."""
    from turnkit import simulation

    run = simulation._Run(profile, sch, duration, settings, kw.get("power_loss_s", ()), True,  # noqa: SLF001
                          kw.get("trace_window_s"), 20_000, kw.get("chunk_polls", 1 << 17),
                          edges=simulation._edge_offsets(kw.get("edge_shifts_deg")), batch=batch)
    run.derive_fast_reads = derive
    return run.execute(), run


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 10_000), st.sampled_from([20.0, 100.0, 400.0]), st.floats(1, 2500), st.floats(0, 1),
       st.sampled_from([(0.1, 0.005), (0.3, 0.002), (0.05, 0.001), (0.1, 0.01)]), st.sampled_from([0.3, 1.0, 2.0, 10.0]),
       st.sampled_from(["flag_and_hold", "guess_last_direction", "flag_and_continue"]), st.sampled_from([8, 16, 32]),
       st.sampled_from(["wrap", "saturate", "fault"]), st.sampled_from([None, (5.0, -20.0, 40.0, -3.0)]),
       st.sampled_from(["none", "drive", "power", "window", "other motion"]), st.sampled_from([1 << 17, 4000]))
def test_batched_bursts_give_the_one_burst_result(seed, rate, top_rpm, low_share, periods, hold, policy, width,
                                                  overflow, edges, extra, chunk):
    # Days of sparse bursts, from barely moving to steps of many quarters a slow read, holds
    # shorter and longer than the steps, narrow counters near their limits, a unit's own latch
    # edges, a driven move, a power loss, the trace window in the middle, other motion mixed in
    # (no speed-derived fast reads then), and batches cut by a small chunk. Batched with the fast
    # reads derived from the speed, batched with every read sampled, and one burst at a time
    # must agree bit for bit.
    days = 2.0
    bursts = BackDriveBursts(rate, low_share * top_rpm, top_rpm, 0.05, 9.0, days * 86400, seed=seed,
                             start_angle_deg=float(seed % 360), forward_fraction=0.3 + 0.4 * (seed % 2))
    profile, kw = bursts, {"edge_shifts_deg": edges, "chunk_polls": chunk}
    if extra == "drive":
        profile = CombinedMotion((bursts, TrapezoidMove(7200.0, 300.0, 3000.0, start_s=40_000.0)))
    elif extra == "other motion":
        profile = CombinedMotion((bursts, Vibration(60.0, 3.0, start_s=30_000.0, duration_s=5.0)))
    elif extra == "power":
        kw["power_loss_s"] = ((50_000.0, 50_030.0),)
    elif extra == "window":
        kw["trace_window_s"] = (60_000.0, 90_000.0)
    slow, fast = periods
    sch = AdaptiveSchedule(slow, fast, hold, wake_time_s=0, settle_time_s=0, poll_time_s=0)
    s = CounterSettings(width, ambiguous_policy=policy, overflow_policy=overflow)
    duration = days * 86400
    derived, _ = one_burst_path(profile, sch, duration, s, batch=True, **kw)
    sampled, _ = one_burst_path(profile, sch, duration, s, batch=True, derive=False, **kw)
    single, _ = one_burst_path(profile, sch, duration, s, **kw)
    assert_same_result(derived, single)
    assert_same_result(sampled, single)
    assert_same_result(simulate(profile, sch, duration, s, **kw), single)


@pytest.mark.parametrize("share", [0.99, 0.9989, 0.9991, 1.0, 1.01])
@pytest.mark.parametrize("start_s", [0.0, 3.0e9])
def test_fast_reads_derived_from_the_speed_match_sampled_ones_near_the_one_step_bound(share, start_s):
    # Constant-speed bursts at and around one quarter per fast read, a century into the
    # timeline (read times then round at about 5e-7 s): derived only with room to spare
    # (the 0.1 % margin), and then the same as sampling every fast read.
    fast = 0.005
    rpm = share * 90.0 / fast / 6.0
    bursts = BackDriveBursts(300, rpm, rpm, 0.5, 6.0, 86400.0, seed=4, start_s=start_s, start_angle_deg=37.0)
    sch = AdaptiveSchedule(0.1, fast, 2.0, wake_time_s=0, settle_time_s=0, poll_time_s=0)
    s = CounterSettings(32, ambiguous_policy="guess_last_direction")
    duration = start_s + 86400.0
    derived, run = one_burst_path(bursts, sch, duration, s, batch=True)
    sampled, _ = one_burst_path(bursts, sch, duration, s, batch=True, derive=False)
    assert_same_result(derived, sampled)
    assert_same_result(derived, one_burst_path(bursts, sch, duration, s)[0])
    derived_any = bool(np.any(run._bursts[8]))  # noqa: SLF001 - which path was taken
    assert derived_any if share <= 0.99 else (not derived_any if share > 0.999 else True)


def test_batches_take_nearly_every_burst_of_plain_back_drive():
    # Sparse constant-speed bursts well inside the fast period's bound: all but the first
    # (the trace window) and the last (the end of the run) go in batches, with the fast reads
    # derived from the speed; the counts are those of the one-burst path.
    bursts = BackDriveBursts(10, 100, 1400, 4.0, 13.28, 60 * 86400, seed=1)
    sch = AdaptiveSchedule(0.1, 0.01, 2.0)
    s = CounterSettings(16, ambiguous_policy="guess_last_direction")
    batched, run = one_burst_path(bursts, sch, 60 * 86400, s, batch=True)
    assert run.batched_bursts >= bursts.burst_count - 2 and run.batching
    assert_same_result(batched, one_burst_path(bursts, sch, 60 * 86400, s)[0])


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 10_000), st.floats(100, 90_000), st.floats(0.01, 2), st.floats(0.0, 8),
       st.lists(st.floats(-5, 130), min_size=1, max_size=300), st.booleans())
def test_sorted_burst_angles_match_the_per_time_formula(seed, rate, shortest_s, extra_s, times, on_edges):
    # angle_deg_sorted merges burst starts into the times and fills the tails
    # after each burst; the reference looks up every time on its own and
    # clamps with min(t, end). A time exactly on a burst start belongs to the
    # stretch before it (the burst has not moved yet). Both must agree bit for
    # bit, also exactly on burst starts and ends.
    bursts = BackDriveBursts(rate, 1, 3000, shortest_s, shortest_s + extra_s, 100.0, seed=seed, start_s=seed % 3,
                             start_angle_deg=float(seed % 97))
    t = np.array(times)
    if on_edges:
        t = np.concatenate((t, bursts.starts_s[:50], bursts.ends_s[:50]))
    t = np.sort(t)
    starts, ends, speeds = bursts.starts_s, bursts.ends_s, bursts.speeds_deg_per_s
    before = bursts.start_angle_deg + np.concatenate(([0.0], np.cumsum(speeds * (ends - starts))))
    row = np.searchsorted(starts, t, side="left")  # bursts started strictly before t
    s0, e0, v0 = (np.concatenate(([0.0], x)) for x in (starts, ends, speeds))
    b0 = np.concatenate(([bursts.start_angle_deg], before[:-1]))
    reference = (np.minimum(t, e0[row]) - s0[row]) * v0[row] + b0[row]
    assert np.array_equal(bursts.angle_deg_sorted(t), reference)


def test_flag_and_continue_counts_every_ambiguous_read_of_a_year_without_a_fault():
    # Bursts faster than the bound: flag-and-hold stops at the first ambiguous read; flag-and-continue
    # keeps polling and counts every one, never guessing (the count is then wrong by what was skipped).
    from turnkit.motion import BackDriveBursts

    period = 0.01
    fast = 1.5 * max_trackable_speed_rpm(period)
    bursts = BackDriveBursts(rate_per_day=20, speed_min_rpm=fast, speed_max_rpm=fast, duration_min_s=1.0,
                             duration_max_s=2.0, horizon_s=365.25 * 86400, seed=3)
    year = 365.25 * 86400
    hold = simulate(bursts, FixedSchedule(period), year, CounterSettings(32), rehome_on_drive=False)
    go_on = simulate(bursts, FixedSchedule(period), year, CounterSettings(32, ambiguous_policy="flag_and_continue"))
    assert hold.fault_count == 1 and hold.ambiguous_count == 1
    assert go_on.fault_count == 0 and go_on.ambiguous_count > 1000
    assert go_on.state_time_s["fault"] == 0.0
    assert go_on.poll_count == int(year / period)


# ------------------------------------------- reads decoded at the non-single steps only
def dense_path(profile, sch, duration, settings, **kw):
    """The same run with every read of a chunk decoded (the sparse decoding switched off)."""
    from turnkit import simulation

    return simulation._Run(profile, sch, duration, settings, kw.get("power_loss_s", ()), True,  # noqa: SLF001
                           kw.get("trace_window_s"), 20_000, kw.get("chunk_polls", 1 << 16),
                           edges=simulation._edge_offsets(kw.get("edge_shifts_deg")), sparse=False).execute()


@settings(max_examples=150, deadline=None)
@given(busy_profiles(max_rpm=20_000.0), st.sampled_from(["guess_last_direction", "flag_and_continue"]),
       st.booleans(), st.sampled_from([0.0, 0.001]), st.sampled_from([None, (5.0, -20.0, 40.0, -3.0)]),
       st.sampled_from([16, 100, 1 << 16]), st.sampled_from([6, 32, 32]), st.sampled_from(["wrap", "saturate", "fault"]),
       st.floats(1.0, 4.0), st.sampled_from([1, -1]))
def test_sparse_decoding_gives_the_dense_result(profile, policy, adaptive, jitter, edges, chunk, width, overflow,
                                                multiple, sign):
    # Fast motion and vibration make ambiguous and silent reads (up to 13 quarters a read), narrow
    # counters make chunks near the limits take the dense path, small chunks split runs of steps
    # (a chunk may start with an ambiguous read whose direction comes from an earlier chunk).
    turn = ConstantSpeed(sign * multiple * max_trackable_speed_rpm(0.005), start_s=0.5, duration_s=2.0)
    profile = CombinedMotion((profile, turn))
    sch = AdaptiveSchedule(0.05, 0.005, 0.2, jitter_s=jitter, wake_time_s=0, settle_time_s=0, poll_time_s=0) \
        if adaptive else FixedSchedule(0.005, jitter_s=jitter, wake_time_s=0, settle_time_s=0, poll_time_s=0)
    s = CounterSettings(width, ambiguous_policy=policy, overflow_policy=overflow)
    kw = {"edge_shifts_deg": edges, "chunk_polls": chunk}
    assert_same_result(simulate(profile, sch, 3.0, s, **kw), dense_path(profile, sch, 3.0, s, **kw))


@settings(max_examples=25, deadline=None)
@given(busy_profiles(max_rpm=20_000.0), st.sampled_from(["flag_and_hold", "guess_last_direction",
                                                         "flag_and_continue"]), st.integers(0, 30))
def test_kept_events_are_the_first_ones_and_every_event_is_counted(profile, policy, kept):
    full = simulate(profile, FixedSchedule(0.005), 3.0, CounterSettings(32, ambiguous_policy=policy))
    few = simulate(profile, FixedSchedule(0.005), 3.0, CounterSettings(32, ambiguous_policy=policy,
                                                                       kept_events=kept))
    assert few.ambiguous_count == full.ambiguous_count == len(full.ambiguous_events)
    assert few.silent_error_count == full.silent_error_count == len(full.silent_events)
    assert (few.final_count, few.poll_count) == (full.final_count, full.poll_count)
    for name in ("ambiguous_events", "silent_events"):
        a, b = getattr(few, name), getattr(full, name)
        assert len(a) == min(kept, len(b))
        assert np.array_equal(a.times_s, b.times_s[:kept]) and np.array_equal(a.true_steps, b.true_steps[:kept])
    assert few.error_history_times_s.size == min(kept, full.error_history_times_s.size)
    assert np.array_equal(few.error_history_quarter_turns, full.error_history_quarter_turns[:kept])
    history = np.abs(full.error_history_quarter_turns)
    assert few.max_abs_error_quarter_turns == full.max_abs_error_quarter_turns == (history.max() if history.size else 0)


def test_a_long_run_of_ambiguous_reads_keeps_only_the_first_events():
    fast = 1.4 * max_trackable_speed_rpm(0.01)  # about 40 % of the reads step two quarters
    turn = ConstantSpeed(fast, start_s=0.0, duration_s=400.0, start_angle_deg=10.0)
    res = simulate(turn, FixedSchedule(0.01), 400.0, CounterSettings(32, ambiguous_policy="flag_and_continue",
                                                                     kept_events=50))
    assert res.ambiguous_count > 10_000 and len(res.ambiguous_events) == 50
    assert res.error_history_times_s.size == 50
    # flag-and-continue drops two quarters per ambiguous read; nothing else goes wrong at this speed
    assert res.final_count_error == -2 * res.ambiguous_count
    assert res.max_abs_error_quarter_turns == 2 * res.ambiguous_count


def test_kept_events_must_be_a_count():
    for bad in (-1, 2.5, True, "10"):
        with pytest.raises(DesignValueError, match="kept_events"):
            CounterSettings(kept_events=bad)


@settings(max_examples=40, deadline=None)
@given(st.floats(1.0, 3.0), st.sampled_from([1, -1]), st.floats(0, 360), st.floats(20, 300), st.floats(1, 30),
       st.sampled_from(["guess_last_direction", "flag_and_continue"]), st.sampled_from([16, 37]))
def test_small_batches_of_fast_reads_match_the_oracle(multiple, sign, phase, amplitude, freq, policy, chunk):
    # Batches of 16 or 37 reads: an ambiguous read often opens a batch, and the guessed direction
    # then comes from the last single step of an earlier batch (a reversal by the vibration included).
    period = 0.01
    profile = CombinedMotion((
        ConstantSpeed(sign * multiple * max_trackable_speed_rpm(period), start_s=0.2, duration_s=1.5,
                      start_angle_deg=phase),
        Vibration(amplitude, freq, start_s=0.9, duration_s=0.6),
    ))
    res = simulate(profile, FixedSchedule(period), 2.0, CounterSettings(32, ambiguous_policy=policy),
                   chunk_polls=chunk)
    times = [k * period for k in range(1, 201)]
    ref = oracle(lambda t: float(profile.angle_deg(np.array([t]))[0]), times, 2.0, policy=policy)
    assert res.ambiguous_count == len(ref.ambiguous) and res.silent_error_count == ref.silent
    assert np.allclose(res.ambiguous_events.times_s, [t for t, _ in ref.ambiguous], rtol=0, atol=1e-9)
    assert res.ambiguous_events.true_steps.tolist() == [s for _, s in ref.ambiguous]
    assert (res.final_count, res.true_final_count) == (ref.count, ref.truth)
