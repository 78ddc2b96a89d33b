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
