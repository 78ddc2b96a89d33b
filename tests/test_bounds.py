"""Tests of the analytic bounds, each cross-checked by simulation."""

from fractions import Fraction
from types import SimpleNamespace

import numpy as np
import pytest

from turnkit.bounds import (
    max_poll_period_at_output_s,
    max_poll_period_s,
    max_trackable_output_speed,
    max_trackable_speed_rpm,
    schedule_speed_limit_rpm,
    silent_error_speed_rpm,
)
from turnkit.counter import CounterSettings
from turnkit.errors import DesignValueError
from turnkit.motion import AtOutput, ConstantSpeed
from turnkit.schedule import AdaptiveSchedule, FixedSchedule
from turnkit.simulation import simulate

G50 = SimpleNamespace(travel_per_motor_turn=Fraction(360, 50), output_unit="deg", direction=1)
GUESS = CounterSettings(32, ambiguous_policy="guess_last_direction")


@pytest.mark.parametrize("period,rpm", [(0.1, 150.0), (0.01, 1500.0), (0.001, 15000.0)])
def test_guaranteed_speed_reference_values(period, rpm):
    # Source: (derived, shown in docs/counter.md §6) guaranteed tracking n_max = 15 / T_poll:
    # 100 ms -> 150 rpm; 10 ms -> 1500 rpm; 1 ms -> 15 000 rpm.
    assert max_trackable_speed_rpm(period) == pytest.approx(rpm, rel=1e-12)
    assert silent_error_speed_rpm(period) == pytest.approx(2 * rpm, rel=1e-12)
    assert max_poll_period_s(rpm) == pytest.approx(period, rel=1e-12)


def test_output_side_reference_value():
    # Source: (derived, shown in docs/counter.md §6): output side ÷ G (G 50, 10 ms -> 30 rpm).
    assert max_trackable_output_speed(0.01, G50) == pytest.approx(30.0)
    assert max_poll_period_at_output_s(30.0, G50) == pytest.approx(0.01)
    screw = SimpleNamespace(travel_per_motor_turn=Fraction(1, 20), output_unit="mm", direction=-1)
    # 1 mm/s -> 1200 motor rpm -> 12.5 ms.
    assert max_poll_period_at_output_s(1.0, screw) == pytest.approx(0.0125)


def test_schedule_limit_includes_jitter_and_uses_the_slow_period():
    assert schedule_speed_limit_rpm(FixedSchedule(0.01, jitter_s=0.0005)) == pytest.approx(15 / 0.011)
    assert schedule_speed_limit_rpm(AdaptiveSchedule(0.1, 0.01, 1.0)) == pytest.approx(150.0)


def _worst(speed_rpm, period, phases=np.linspace(0, 90, 37), **kw):
    amb = silent = err = 0
    for phase in phases:
        for start in (0.0, 0.3 * period, 0.77 * period):
            r = simulate(ConstantSpeed(speed_rpm, start_s=start, duration_s=200 * period, start_angle_deg=phase),
                         FixedSchedule(period, wake_time_s=0, settle_time_s=0, poll_time_s=0),
                         start + 210 * period, GUESS, **kw)
            amb += len(r.ambiguous_events)
            silent += r.silent_error_count
            err = max(err, abs(r.final_count_error))
    return amb, silent, err


@pytest.mark.parametrize("period", [0.01, 0.05])
@pytest.mark.parametrize("sign", [1, -1])
def test_simulation_tracks_at_the_bound_for_every_phase(period, sign):
    # Inclusive: exactly 90° per poll is tracked.
    assert _worst(sign * max_trackable_speed_rpm(period), period) == (0, 0, 0)


def test_simulation_flags_just_above_the_bound_for_some_phase():
    amb, silent, _ = _worst(1.02 * max_trackable_speed_rpm(0.01), 0.01)
    assert amb > 0 and silent == 0


def test_no_silent_error_up_to_twice_the_bound_but_some_just_above():
    # Inclusive at 180° per poll: ambiguous at every read, never silent.
    assert _worst(silent_error_speed_rpm(0.01), 0.01)[1] == 0
    assert _worst(1.02 * silent_error_speed_rpm(0.01), 0.01)[1] > 0


def test_output_bound_cross_checked_through_the_train():
    period = 0.02
    n_out = max_trackable_output_speed(period, G50)
    ok = simulate(AtOutput(ConstantSpeed(n_out, duration_s=10.0, start_angle_deg=0.3), G50), FixedSchedule(period),
                  11.0)
    bad = simulate(AtOutput(ConstantSpeed(1.05 * n_out, duration_s=10.0, start_angle_deg=1.78), G50),
                   FixedSchedule(period), 11.0)
    assert ok.final_count_error == 0 and len(ok.ambiguous_events) == 0
    assert bad.fault_count == 1


@pytest.mark.parametrize("call", [lambda: max_trackable_speed_rpm(0), lambda: max_poll_period_s(0.0),
                                  lambda: silent_error_speed_rpm(float("inf")),
                                  lambda: max_poll_period_at_output_s(0, G50)])
def test_bad_bound_inputs_raise(call):
    with pytest.raises(DesignValueError):
        call()


# --- real latches: the narrowest quadrant sets the bounds ----------------------------------------

from hypothesis import given, settings, strategies as st  # noqa: E402

from turnkit.latches import (QuadrantLatches, edge_set_widths, quadrant_widths,  # noqa: E402
                             worst_case_edge_shifts_deg)
from turnkit.simulation import edge_index, quadrant_index  # noqa: E402


def _worst_unit(delta_deg, edges, period=0.01, phases=np.linspace(0.0, 360.0, 73, endpoint=False)):
    """Ambiguous and silent reads over many phases for a shaft turning ``delta_deg`` per poll."""
    rpm = delta_deg / (6.0 * period)
    amb = silent = 0
    for phase in phases:
        for start in (0.0, 0.41 * period):
            r = simulate(ConstantSpeed(rpm, start_s=start, duration_s=60 * period, start_angle_deg=phase),
                         FixedSchedule(period, wake_time_s=0, settle_time_s=0, poll_time_s=0),
                         start + 62 * period, GUESS, edge_shifts_deg=edges)
            amb += len(r.ambiguous_events)
            silent += r.silent_error_count
    return amb, silent


def test_ideal_edges_give_the_plain_quadrant_index():
    angles = np.linspace(-1000.0, 1000.0, 20001)
    assert np.array_equal(edge_index(angles, (0.0, 0.0, 0.0, 0.0)), quadrant_index(angles))
    # Any common shift s moves every edge: the index of angle + s equals the ideal index of angle.
    assert np.array_equal(edge_index(angles + 7.25, (7.25,) * 4), quadrant_index(angles))


def test_narrowest_quadrant_of_the_window_shade_latches():
    # 10 deg tolerance, 4 deg hysteresis, latches powered only around polls: each edge within
    # +-12 deg, so 90 - 24 = 66 deg and 180 - 24 = 156 deg (derived, shown in docs/counter.md).
    w = quadrant_widths(QuadrantLatches(10.0, 4.0, powered="during_polls"))
    assert (w.narrowest_quadrant_deg, w.narrowest_two_quadrants_deg) == (66.0, 156.0)
    always = quadrant_widths(QuadrantLatches(10.0, 4.0, powered="always"))
    assert (always.narrowest_quadrant_deg, always.narrowest_two_quadrants_deg) == (70.0, 160.0)
    # The worst-case unit realises both narrowest spans at once.
    assert edge_set_widths(worst_case_edge_shifts_deg(QuadrantLatches(10.0, 4.0))) == (66.0, 156.0)
    # Misalignment turns all edges alike and changes no width.
    assert quadrant_widths(QuadrantLatches(10.0, 4.0, 20.0)) == w


def test_bounds_scale_with_the_narrowest_quadrant_and_the_jitter():
    # Source: worst interval between reads T(1 + 2j) for reads within +-jT of their nominal time,
    # and n = w / (6 T) (derived, shown in docs/counter.md).
    assert max_trackable_speed_rpm(0.01, 66.0, 0.05) == pytest.approx(66.0 / (6 * 0.011))
    assert silent_error_speed_rpm(0.01, 156.0, 0.05) == pytest.approx(156.0 / (6 * 0.011))
    t = max_poll_period_s(1000.0, 66.0, 0.05, 0.3)
    assert max_trackable_speed_rpm(t, 66.0, 0.05) * 0.7 == pytest.approx(1000.0)


def test_adaptive_worst_interval_takes_each_period_with_its_own_jitter():
    sch = AdaptiveSchedule(0.006, 0.002, 1.0, jitter_s=0.0006, fast_jitter_s=0.0002)
    from turnkit.bounds import worst_intervals_s
    assert worst_intervals_s(sch) == pytest.approx({"polling": 0.0072, "fast_polling": 0.0024})
    assert schedule_speed_limit_rpm(sch, 66.0) == pytest.approx(66.0 / (6 * 0.0072))


_SHIFT = st.floats(-30.0, 30.0, allow_nan=False)


@settings(max_examples=15, deadline=None)
@given(st.tuples(_SHIFT, _SHIFT, _SHIFT, _SHIFT))
def test_random_edge_sets_never_miscount_below_the_bound_and_do_just_above(edges):
    # Brute force over phases, for one unit's edges drawn at random: at the narrowest quadrant
    # per poll no read is wrong (inclusive); 3 % above it some phase is ambiguous; at the
    # narrowest two-quadrant span none is silent, and 3 % above it some phase is.
    w1, w2 = edge_set_widths(edges)
    assert _worst_unit(w1, edges) == (0, 0)
    assert _worst_unit(1.03 * w1, edges)[0] > 0
    assert _worst_unit(w2, edges)[1] == 0
    assert _worst_unit(1.03 * w2, edges)[1] > 0
