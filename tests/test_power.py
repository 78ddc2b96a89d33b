"""Tests for turnkit.power: per-state currents, schedules, budgets and life curves."""

from __future__ import annotations

import subprocess
import sys
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.battery import Pack, cell, life_years
from turnkit.errors import DesignValueError
from turnkit.power import (
    STATES,
    Consumer,
    CurrentProfile,
    average_current_uA,
    budget_from_schedule,
    budget_from_simulation,
    budget_from_state_times,
    check_quiescent_budget,
    life_vs_adaptive_schedule,
    life_vs_poll_period,
    state_fractions,
)
from turnkit.units import registry


def _three_loads() -> CurrentProfile:
    return CurrentProfile((
        Consumer("sensor", {"asleep": 0.1, "waking": 2000.0, "polling": 2000.0,
                            "tracking": 2000.0}),
        Consumer("microcontroller", {"asleep": 1.0, "waking": 500.0, "polling": 1500.0,
                                     "tracking": 1500.0}),
        Consumer.constant("regulator", 0.5),
    ), supply_voltage_V=3.0)


_SCHEDULE = dict(poll_period_s=0.025, wake_time_s=50e-6, settle_time_s=100e-6,
                 poll_time_s=30e-6)


def _node() -> CurrentProfile:
    """The invented sensor node of docs/power.md."""
    return CurrentProfile((
        Consumer("microcontroller", {"asleep": 1.2, "waking": 600.0, "polling": 1500.0,
                                     "tracking": 3000.0}),
        Consumer("Hall latches (2)", {"asleep": 0.0, "waking": 5000.0, "polling": 5000.0,
                                      "tracking": 5000.0}),
        Consumer("AMR sensor", {"asleep": 0.1, "waking": 0.0, "polling": 0.0,
                                "tracking": 4000.0}),
        Consumer.constant("regulator quiescent", 0.6),
        Consumer.constant("leakage and pull-ups", 0.3),
    ), supply_voltage_V=3.0)


_NODE_SCHEDULE = dict(poll_period_s=0.025, wake_time_s=20e-6, settle_time_s=30e-6,
                      poll_time_s=15e-6, tracking_fraction=30.0 / 86400.0)


# ---------------------------------------------------------------- hand calculations


def test_duty_cycle_example_from_the_reference_table():
    # Source: (derived, shown in docs/derivations.md §6): 1 uA sleep, 1 mA for
    # 100 us every 10 ms -> I = 1 + (1000 - 1) * 0.01 = 10.99 uA.
    p = CurrentProfile((Consumer.sleep_and_awake("node", 1.0, 1000.0),), 3.0)
    b = budget_from_schedule(p, poll_period_s=0.01, wake_time_s=0.0, settle_time_s=0.0,
                             poll_time_s=100e-6)
    assert b.average_current_uA == pytest.approx(10.99, rel=1e-12)
    assert b.duty_cycle == pytest.approx(0.01, rel=1e-12)
    assert b.wakes_per_day == pytest.approx(8_640_000.0)
    # One wake: 1 mA for 100 us = 0.1 uC; at 3 V, 0.3 uJ.
    assert b.charge_per_wake_uC == pytest.approx(0.1, rel=1e-12)
    assert b.energy_per_wake_uJ == pytest.approx(0.3, rel=1e-12)


def test_three_consumers_hand_calculation():
    # Hand calculation, T = 25 ms, waking = 50 + 100 us, polling = 30 us:
    #   f_waking = 150e-6/0.025 = 0.006, f_polling = 30e-6/0.025 = 0.0012,
    #   f_asleep = 1 - 0.0072 = 0.9928
    #   sensor          0.9928*0.1 + 0.006*2000 + 0.0012*2000 = 14.49928 uA
    #   microcontroller 0.9928*1.0 + 0.006*500  + 0.0012*1500 =  5.7928  uA
    #   regulator       0.5                                    =  0.5    uA
    #   total                                                   = 20.79208 uA
    b = budget_from_schedule(_three_loads(), **_SCHEDULE)
    by = b.by_consumer()
    assert by["sensor"] == pytest.approx(14.49928, rel=1e-12)
    assert by["microcontroller"] == pytest.approx(5.7928, rel=1e-12)
    assert by["regulator"] == pytest.approx(0.5, rel=1e-12)
    assert b.average_current_uA == pytest.approx(20.79208, rel=1e-12)
    assert b.dominant_consumer == "sensor"
    # By state: waking 0.006*2500.5 = 15.003, polling 0.0012*3500.5 = 4.2006,
    # asleep 0.9928*1.6 = 1.58848.
    st_ = b.by_state()
    assert st_["waking"] == pytest.approx(15.003, rel=1e-12)
    assert st_["polling"] == pytest.approx(4.2006, rel=1e-12)
    assert st_["asleep"] == pytest.approx(1.58848, rel=1e-12)
    assert b.dominant_state == "waking"
    # Charge per wake: 2500.5 uA * 150 us + 3500.5 uA * 30 us = 0.375075 + 0.105015 uC.
    assert b.charge_per_wake_uC == pytest.approx(0.48009, rel=1e-12)
    assert b.energy_per_wake_uJ == pytest.approx(1.44027, rel=1e-12)


def test_adaptive_schedule_hand_calculation():
    # Hand calculation: slow 1 s, fast 10 ms, poll 100 us, no wake/settle time,
    # one load 1 uA asleep / 1001 uA awake (1000 uA above the floor).
    #   f_fast = 0.001 + 10 events * 60 s / 86400 s = 0.001 + 0.00694444 = 0.00794444
    #   f_slow = 1 - f_fast = 0.99205556
    #   I = 1 + 1000 * (f_slow * 1e-4 / 1 + f_fast * 1e-4 / 0.01)
    #     = 1 + 0.09920556 + 0.07944444 = 1.17865000 uA
    p = CurrentProfile((Consumer.sleep_and_awake("node", 1.0, 1001.0),), 3.0)
    b = budget_from_schedule(p, poll_period_s=1.0, wake_time_s=0.0, settle_time_s=0.0,
                             poll_time_s=100e-6, fast_period_s=0.01, hold_s=60.0,
                             motion_fraction=0.001, motion_events_per_day=10.0)
    f_fast = 0.001 + 600.0 / 86400.0
    assert b.average_current_uA == pytest.approx(
        1.0 + 1000.0 * ((1 - f_fast) * 1e-4 + f_fast * 1e-2), rel=1e-12)
    assert b.average_current_uA == pytest.approx(1.17865, abs=1e-8)
    assert b.state_fractions()["fast_polling"] == pytest.approx(f_fast * 1e-2, rel=1e-12)


def test_adaptive_schedule_with_wake_time_hand_calculation():
    # Hand calculation: as above but waking = 100 us wake + 100 us settle and
    # separate currents: asleep 1, waking 501, polling 1001, fast polling 2001 uA.
    #   f_waking       = f_slow*200e-6/1 + f_fast*200e-6/0.01 = 0.00035730
    #   f_polling      = f_slow*100e-6/1                       = 0.0000992056
    #   f_fast_polling = f_fast*100e-6/0.01                    = 0.0000794444
    #   I = 1 + 500*0.00035730 + 1000*0.0000992056 + 2000*0.0000794444
    #     = 1 + 0.178650 + 0.0992056 + 0.1588889 = 1.4367444 uA
    p = CurrentProfile((Consumer("node", {"asleep": 1.0, "waking": 501.0, "polling": 1001.0,
                                          "fast_polling": 2001.0, "tracking": 1001.0}),), 3.0)
    b = budget_from_schedule(p, poll_period_s=1.0, wake_time_s=100e-6, settle_time_s=100e-6,
                             poll_time_s=100e-6, fast_period_s=0.01, hold_s=60.0,
                             motion_fraction=0.001, motion_events_per_day=10.0)
    assert b.state_fractions()["waking"] == pytest.approx(0.00035730, rel=1e-9)
    assert b.average_current_uA == pytest.approx(1.4367444444, rel=1e-9)
    # Wakes per day: f_slow/1 s + f_fast/0.01 s, times 86400 s.
    f_fast = 0.001 + 600.0 / 86400.0
    assert b.wakes_per_day == pytest.approx(((1 - f_fast) + f_fast / 0.01) * 86400.0)


def test_fixed_schedule_ignores_motion_statistic():
    a = budget_from_schedule(_three_loads(), **_SCHEDULE)
    b = budget_from_schedule(_three_loads(), **_SCHEDULE, motion_fraction=0.2,
                             motion_events_per_day=100.0)
    assert a.average_current_uA == b.average_current_uA


def test_tracking_share_hand_calculation():
    # Hand calculation: 10 % tracking at 3500.5 uA; the rest polled as before:
    # I = 0.1*3500.5 + 0.9*20.79208 = 350.05 + 18.712872 = 368.762872 uA.
    b = budget_from_schedule(_three_loads(), **_SCHEDULE, tracking_fraction=0.1)
    assert b.average_current_uA == pytest.approx(368.762872, rel=1e-12)


def test_overlapping_holds_saturate_at_all_the_time():
    # 1000 events a day with 10-minute holds would be 6.9 days of hold per day:
    # fast polling merges into all of the non-tracking time.
    f, _ = state_fractions(poll_period_s=1.0, wake_time_s=0.0, settle_time_s=0.0,
                           poll_time_s=1e-3, fast_period_s=0.01, hold_s=600.0,
                           motion_events_per_day=1000.0, tracking_fraction=0.25)
    assert f[STATES.index("polling")] == 0.0
    assert f[STATES.index("fast_polling")] == pytest.approx(0.75 * 0.1)
    assert f.sum() == pytest.approx(1.0)


def test_exact_state_times_hand_calculation_with_wake_pulse():
    # Hand calculation: 1000 s timeline, 100 wakes; a latch pair draws an extra
    # 200 uA for 50 us per wake = 0.01 uC -> 100*0.01/1000 = 0.001 uA average.
    #   microcontroller: (990*1 + 4*500 + 5*1500 + 1*1500)/1000 = 11.99 uA
    #   latches:         (1*300)/1000 + 0.001                    =  0.301 uA
    p = CurrentProfile((
        Consumer("microcontroller", {"asleep": 1.0, "waking": 500.0, "polling": 1500.0,
                                     "tracking": 1500.0}),
        Consumer("latches", {"asleep": 0.0, "waking": 0.0, "polling": 0.0,
                             "tracking": 300.0}, wake_pulse_uA=200.0, wake_pulse_s=50e-6),
    ), 3.6)
    times = {"asleep": 990.0, "waking": 4.0, "polling": 5.0, "tracking": 1.0}
    b = budget_from_state_times(p, times, 1000.0, 100)
    assert b.by_consumer()["microcontroller"] == pytest.approx(11.99, rel=1e-12)
    assert b.by_consumer()["latches"] == pytest.approx(0.301, rel=1e-12)
    assert b.source == "simulation"
    # Pulses are booked under waking: 4*500/1000 + 0.001 = 2.001 uA.
    assert b.by_state()["waking"] == pytest.approx(2.001, rel=1e-12)
    # Charge per wake: (2.001 + 7.5) uA * 1000 s / 100 wakes = 95.01 uC.
    assert b.charge_per_wake_uC == pytest.approx(95.01, rel=1e-12)
    assert b.duty_cycle == pytest.approx(0.01)


def test_simulation_object_is_read_by_its_attributes():
    sim = SimpleNamespace(state_time_s={"asleep": 9.0, "polling": 1.0}, duration_s=10.0,
                          wake_count=10)
    p = CurrentProfile((Consumer.sleep_and_awake("node", 2.0, 102.0),), 3.0)
    assert budget_from_simulation(p, sim).average_current_uA == pytest.approx(12.0)
    with pytest.raises(DesignValueError, match="wake_count"):
        budget_from_simulation(p, SimpleNamespace(state_time_s={}, duration_s=1.0))


def test_exact_and_analytic_agree_on_the_same_state_times():
    p = _three_loads()
    kw = dict(_SCHEDULE, fast_period_s=0.005, hold_s=30.0, motion_fraction=0.01,
              motion_events_per_day=20.0, tracking_fraction=0.02)
    analytic = budget_from_schedule(p, **kw)
    f, wakes = state_fractions(**kw)
    duration = 86400.0 * 365.25
    times = {s: float(x) * duration for s, x in zip(STATES, f)}
    exact = budget_from_state_times(p, times, duration, float(wakes) * duration)
    assert exact.average_current_uA == pytest.approx(analytic.average_current_uA, rel=1e-12)
    assert exact.by_state() == pytest.approx(analytic.by_state(), rel=1e-9)
    assert exact.charge_per_wake_uC == pytest.approx(analytic.charge_per_wake_uC, rel=1e-9)


def test_state_times_must_cover_the_timeline():
    p = _three_loads()
    with pytest.raises(DesignValueError, match=r"sum\(state_time_s\).*duration_s"):
        budget_from_state_times(p, {"asleep": 5.0}, 10.0, 1)
    with pytest.raises(DesignValueError, match="keys from"):
        budget_from_state_times(p, {"dozing": 10.0}, 10.0, 1)


# ---------------------------------------------------------------- unit cross-checks


def test_charge_per_day_and_year_agree_with_pint():
    # Source: pint 0.25 (1 A*h = 3600 C per NIST SP 811; year = 365.25 day).
    u = registry()
    b = budget_from_schedule(_three_loads(), **_SCHEDULE)
    i = b.average_current_uA * u.uA
    assert b.charge_per_day_C == pytest.approx((i * u.day).to("C").magnitude, rel=1e-12)
    assert b.charge_per_day_mAh == pytest.approx((i * u.day).to("mAh").magnitude, rel=1e-12)
    assert b.charge_per_year_mAh == pytest.approx((i * u.year).to("mAh").magnitude, rel=1e-12)
    assert b.charge_per_year_C == pytest.approx((i * u.year).to("C").magnitude, rel=1e-12)
    # mAh <-> C: 1 mAh = 3.6 C.
    assert b.charge_per_year_C == pytest.approx(3.6 * b.charge_per_year_mAh, rel=1e-12)
    assert (1 * u.mAh).to("C").magnitude == pytest.approx(3.6)


def test_energy_per_wake_agrees_with_pint():
    # Source: pint 0.25: 1 uC * 1 V = 1 uJ.
    u = registry()
    b = budget_from_schedule(_three_loads(), **_SCHEDULE)
    e = (b.charge_per_wake_uC * u.uC * 3.0 * u.V).to("uJ").magnitude
    assert b.energy_per_wake_uJ == pytest.approx(e, rel=1e-12)


# ---------------------------------------------------------------- host supply


def test_quiescent_budget_passes_and_fails_with_margin():
    b = budget_from_schedule(_three_loads(), **_SCHEDULE)
    ok = check_quiescent_budget(b, 50.0)
    assert ok.passes and ok.margin_uA == pytest.approx(50.0 - 20.79208)
    bad = check_quiescent_budget(b, 20.0)
    assert not bad.passes and bad.margin_uA < 0
    assert bad.used_fraction == pytest.approx(20.79208 / 20.0)
    with pytest.raises(DesignValueError, match=r"budget_uA.*uA"):
        check_quiescent_budget(b, 0.0)


# ---------------------------------------------------------------- validation


def test_poll_period_shorter_than_the_wake_is_refused():
    with pytest.raises(DesignValueError, match=r"poll_period_s.*wake_time_s.*s"):
        budget_from_schedule(_three_loads(), poll_period_s=100e-6, wake_time_s=50e-6,
                             settle_time_s=100e-6, poll_time_s=30e-6)


def test_hold_without_fast_period_is_refused():
    with pytest.raises(DesignValueError, match="fast_period_s"):
        budget_from_schedule(_three_loads(), **_SCHEDULE, hold_s=10.0)


def test_shares_of_time_above_one_are_refused():
    with pytest.raises(DesignValueError, match="tracking_fraction"):
        budget_from_schedule(_three_loads(), **_SCHEDULE, tracking_fraction=0.7,
                             motion_fraction=0.5)


def test_consumer_needs_the_main_states_and_knows_state_names():
    with pytest.raises(DesignValueError, match="tracking"):
        Consumer("mcu", {"asleep": 1.0, "waking": 2.0, "polling": 3.0})
    with pytest.raises(DesignValueError, match="dozing"):
        Consumer("mcu", {"asleep": 1.0, "waking": 2.0, "polling": 3.0, "tracking": 4.0,
                         "dozing": 0.0})
    with pytest.raises(DesignValueError, match=r"current_uA\['asleep'\].*uA"):
        Consumer("mcu", {"asleep": -1.0, "waking": 2.0, "polling": 3.0, "tracking": 4.0})


def test_consumer_defaults_follow_the_documented_rule():
    # In fault the firmware stops polling and sleeps (docs/counter.md, section 7), so the
    # fault state costs the sleep current unless a consumer says otherwise.
    c = Consumer("mcu", {"asleep": 1.0, "waking": 2.0, "polling": 3.0, "tracking": 4.0})
    assert c.current_in("fast_polling") == 3.0
    assert c.current_in("fault") == 1.0
    assert c.current_in("power_lost") == 0.0


def test_duplicate_consumer_names_are_refused():
    c = Consumer.constant("regulator", 1.0)
    with pytest.raises(DesignValueError, match="unique"):
        CurrentProfile((c, c), 3.0)


def test_unknown_schedule_keyword_is_rejected():
    with pytest.raises(TypeError):
        budget_from_schedule(_three_loads(), **_SCHEDULE, pol_time_s=1.0)


def test_core_import_stays_light():
    code = ("import sys, turnkit.power, turnkit.battery; "
            "print(sorted(m for m in ('sympy', 'pint', 'bokeh', 'ipywidgets') "
            "if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"


# ---------------------------------------------------------------- curves


def test_life_curve_is_log_spaced_and_matches_scalar_life():
    battery = Pack(cell("li_fes2_aa"), series=2)
    curve = life_vs_poll_period(_node(), battery, poll_period_min_s=1e-3,
                                poll_period_max_s=1.0, points=31,
                                max_allowed_poll_period_s=0.05, **{
                                    k: v for k, v in _NODE_SCHEDULE.items()
                                    if k != "poll_period_s"})
    ratios = curve.poll_period_s[1:] / curve.poll_period_s[:-1]
    assert np.allclose(ratios, ratios[0])
    assert curve.poll_period_s[0] == pytest.approx(1e-3)
    assert curve.poll_period_s[-1] == pytest.approx(1.0)
    k = 17
    b = budget_from_schedule(_node(), **dict(_NODE_SCHEDULE,
                                             poll_period_s=float(curve.poll_period_s[k])))
    assert curve.average_current_uA[k] == pytest.approx(b.average_current_uA, rel=1e-12)
    assert curve.life_years[k] == pytest.approx(
        life_years(battery, b.average_current_uA, warn=False), rel=1e-12)
    assert np.all(curve.allowed == (curve.poll_period_s <= 0.05))
    assert curve.life_at_max_allowed_years == pytest.approx(life_years(
        battery, average_current_uA(_node(), **dict(_NODE_SCHEDULE, poll_period_s=0.05)),
        warn=False))
    assert np.all(np.diff(curve.life_years) >= 0)
    with pytest.raises(ValueError):
        curve.life_years[0] = 0.0


def test_adaptive_curve_grid_matches_scalar_budgets():
    battery = cell("li_socl2_aa")
    common = dict(wake_time_s=20e-6, settle_time_s=30e-6, poll_time_s=15e-6,
                  motion_fraction=0.002, motion_events_per_day=40.0)
    curve = life_vs_adaptive_schedule(_node(), battery, poll_period_s=0.5,
                                      fast_period_min_s=0.005, fast_period_max_s=0.1,
                                      hold_min_s=1.0, hold_max_s=300.0, fast_points=7,
                                      hold_points=5, max_allowed_poll_period_s=0.025, **common)
    assert curve.life_years.shape == (7, 5)
    b = budget_from_schedule(_node(), poll_period_s=0.5, fast_period_s=float(curve.fast_period_s[3]),
                             hold_s=float(curve.hold_s[2]), **common)
    assert curve.average_current_uA[3, 2] == pytest.approx(b.average_current_uA, rel=1e-12)
    assert np.all(curve.allowed == (curve.fast_period_s <= 0.025))
    # Longer holds cost life; a longer fast period saves it.
    assert np.all(np.diff(curve.life_years, axis=1) <= 0)
    assert np.all(np.diff(curve.life_years, axis=0) >= 0)
    fixed = life_years(battery, average_current_uA(_node(), poll_period_s=0.025, **common),
                       warn=False)
    assert curve.fixed_life_years == pytest.approx(fixed)


# ---------------------------------------------------------------- the docs example


def test_worked_example_in_the_docs():
    # docs/power.md: the invented node at 25 ms on two lithium iron disulfide AA
    # cells in series, -10 °C site (factor 0.875), 95 % usable above cut-off.
    b = budget_from_schedule(_node(), **_NODE_SCHEDULE)
    battery = Pack(cell("li_fes2_aa"), series=2)
    life = life_years(battery, b.average_current_uA, temperature_C=-10.0,
                      usable_fraction=0.95, warn=False)
    # Hand calculation of the current: f_waking = 50e-6/0.025 = 0.002,
    # f_polling = 15e-6/0.025 = 0.0006, f_tracking = 30/86400, the rest asleep;
    # totals: asleep 2.2, waking 5600.9, polling 6500.9, tracking 12000.9 uA.
    ft = 30.0 / 86400.0
    fw, fp = 0.002 * (1 - ft), 0.0006 * (1 - ft)
    expected = (1 - ft - fw - fp) * 2.2 + fw * 5600.9 + fp * 6500.9 + ft * 12000.9
    assert b.average_current_uA == pytest.approx(expected, rel=1e-12)
    assert b.dominant_consumer == "Hall latches (2)"
    assert life == pytest.approx(3000 * 0.875 * 0.95 / (expected * 1e-3 * 8766 + 30.0),
                                 rel=1e-12)
    halved = budget_from_schedule(_node().scaled(0.5, states=("asleep",)), **_NODE_SCHEDULE)
    assert halved.average_current_uA == pytest.approx(
        expected - 0.5 * 2.2 * (1 - ft - fw - fp), rel=1e-12)


# ---------------------------------------------------------------- properties

_current = st.floats(0.0, 5000.0, allow_nan=False)


@st.composite
def _profiles(draw):
    consumers = []
    for k in range(draw(st.integers(1, 4))):
        sleep = draw(st.floats(0.0, 20.0))
        # Awake states draw at least the sleep current, as real loads do.
        waking, polling, tracking = (sleep + draw(_current) for _ in range(3))
        consumers.append(Consumer(f"load {k}", {
            "asleep": sleep, "waking": waking, "polling": polling, "tracking": tracking,
            "fast_polling": sleep + draw(_current), "fault": draw(_current)},
            wake_pulse_uA=draw(st.floats(0.0, 1e4)), wake_pulse_s=draw(st.floats(0.0, 1e-4))))
    return CurrentProfile(tuple(consumers), 3.0)


_schedules = st.fixed_dictionaries({
    "wake_time_s": st.floats(0.0, 5e-4),
    "settle_time_s": st.floats(0.0, 5e-4),
    "poll_time_s": st.floats(1e-6, 5e-4),
    "tracking_fraction": st.floats(0.0, 0.3),
    "motion_fraction": st.floats(0.0, 0.3),
    "motion_events_per_day": st.floats(0.0, 500.0),
    "hold_s": st.floats(0.0, 600.0),
    "fast_period_s": st.floats(2e-3, 0.05),
})


@settings(max_examples=60, deadline=None)
@given(profile=_profiles(), schedule=_schedules, t1=st.floats(2e-3, 2.0),
       stretch=st.floats(1.0, 100.0))
def test_life_never_increases_when_the_poll_period_shrinks(profile, schedule, t1, stretch):
    battery = cell("li_socl2_aa")
    short = average_current_uA(profile, poll_period_s=t1, **schedule)
    long_ = average_current_uA(profile, poll_period_s=t1 * stretch, **schedule)
    assert short >= long_ * (1 - 1e-12)
    assert life_years(battery, short, warn=False) <= life_years(battery, long_, warn=False) * (
        1 + 1e-12)


@settings(max_examples=60, deadline=None)
@given(profile=_profiles(), schedule=_schedules, period=st.floats(2e-3, 2.0),
       which=st.integers(0, 3), state=st.sampled_from(STATES + ("pulse",)),
       extra=st.floats(0.0, 1e3))
def test_life_never_increases_when_any_current_grows(profile, schedule, period, which, state,
                                                     extra):
    battery = Pack(cell("li_fes2_aa"), series=2)
    c = profile.consumers[which % len(profile.consumers)]
    if state == "pulse":
        grown = Consumer(c.name, c.current_uA, c.wake_pulse_uA + extra, c.wake_pulse_s)
    else:
        cur = list(c.current_uA)
        cur[STATES.index(state)] += extra
        grown = Consumer(c.name, tuple(cur), c.wake_pulse_uA, c.wake_pulse_s)
    bigger = CurrentProfile(tuple(grown if x is c else x for x in profile.consumers), 3.0)
    before = average_current_uA(profile, poll_period_s=period, **schedule)
    after = average_current_uA(bigger, poll_period_s=period, **schedule)
    assert after >= before * (1 - 1e-12)
    assert life_years(battery, after, warn=False) <= life_years(battery, before, warn=False) * (
        1 + 1e-12)


@settings(max_examples=60, deadline=None)
@given(profile=_profiles(), schedule=_schedules, period=st.floats(2e-3, 2.0))
def test_breakdowns_sum_to_the_total(profile, schedule, period):
    b = budget_from_schedule(profile, poll_period_s=period, **schedule)
    assert sum(b.state_fraction) == pytest.approx(1.0, abs=1e-12)
    assert min(b.state_fraction) >= -1e-15
    assert sum(b.current_by_state_uA) == pytest.approx(b.average_current_uA, rel=1e-9,
                                                       abs=1e-12)
    assert sum(b.current_by_consumer_uA) == pytest.approx(b.average_current_uA, rel=1e-9,
                                                          abs=1e-12)


@settings(max_examples=40, deadline=None)
@given(profile=_profiles(), first=st.floats(1.0, 1e6),
       rest=st.lists(st.floats(0.0, 1e6), min_size=6, max_size=6),
       wakes=st.integers(0, 10**7))
def test_exact_breakdowns_sum_to_the_total(profile, first, rest, wakes):
    times = [first] + rest
    b = budget_from_state_times(profile, dict(zip(STATES, times)), sum(times), wakes)
    assert sum(b.state_fraction) == pytest.approx(1.0, abs=1e-12)
    assert sum(b.current_by_state_uA) == pytest.approx(b.average_current_uA, rel=1e-9,
                                                       abs=1e-12)
    assert sum(b.current_by_consumer_uA) == pytest.approx(b.average_current_uA, rel=1e-9,
                                                          abs=1e-12)


# ---------------------------------------------------------------- docs


def test_docs_worked_example_runs_as_written():
    # The examples in docs/power.md are doctests: their printed numbers must hold.
    import doctest
    from pathlib import Path

    path = Path(__file__).resolve().parent.parent / "docs" / "power.md"
    result = doctest.testfile(str(path), module_relative=False, verbose=False,
                              optionflags=doctest.NORMALIZE_WHITESPACE)
    assert result.attempted >= 10
    assert result.failed == 0


def test_module_docstring_examples_run():
    import doctest

    import turnkit.battery
    import turnkit.power

    for module in (turnkit.power, turnkit.battery):
        result = doctest.testmod(module, verbose=False)
        assert result.attempted >= 1 and result.failed == 0, module.__name__


def test_curves_carry_pulse_and_shelf_life_warnings_and_coin_caution():
    from turnkit.battery import COIN_CELL_CAUTION

    coin = cell("li_mno2_2032")  # 15 mA pulse capability; the node peaks at 12 mA
    curve = life_vs_poll_period(_node(), coin, poll_period_min_s=1e-3, poll_period_max_s=1.0,
                                points=5, wake_time_s=20e-6, settle_time_s=30e-6,
                                poll_time_s=15e-6)
    assert not any("pulse" in w for w in curve.warnings)
    assert COIN_CELL_CAUTION in curve.cautions
    hungry = _node().scaled(2.0, consumers=("Hall latches (2)",))
    curve = life_vs_poll_period(hungry, coin, poll_period_min_s=1e-3, poll_period_max_s=1.0,
                                points=5, wake_time_s=20e-6, settle_time_s=30e-6,
                                poll_time_s=15e-6)
    assert any("pulse" in w for w in curve.warnings)
    long_lived = life_vs_adaptive_schedule(
        _node(), Pack(cell("li_socl2_d"), parallel=2), poll_period_s=1.0,
        fast_period_min_s=0.01, fast_period_max_s=0.1, hold_min_s=1.0, hold_max_s=10.0,
        fast_points=2, hold_points=2, wake_time_s=20e-6, settle_time_s=30e-6,
        poll_time_s=15e-6, motion_fraction=0.0, motion_events_per_day=1.0)
    assert any("shelf life" in w for w in long_lived.warnings)


def test_consumer_from_quantities_converts_units_at_the_edge():
    c = Consumer.from_quantities("mcu", {"asleep": "1.2 uA", "waking": "0.6 mA",
                                         "polling": "1.5 mA", "tracking": 3000},
                                 wake_pulse="2 mA", wake_pulse_time="20 us")
    assert c.current_in("waking") == pytest.approx(600.0)
    assert c.current_in("tracking") == 3000.0
    assert c.pulse_charge_uC == pytest.approx(2000.0 * 20e-6)
    with pytest.raises(DesignValueError, match=r"current\['asleep'\].*uA"):
        Consumer.from_quantities("mcu", {"asleep": "1.2 mm", "waking": 1, "polling": 1,
                                         "tracking": 1})


def test_budget_from_a_real_counter_simulation_matches_the_analytic_schedule():
    # A still shaft for one hour on a fixed 25 ms schedule: the simulator's exact
    # state times (144 000 wakes) must give the analytic budget.
    from turnkit.motion import Still
    from turnkit.schedule import FixedSchedule
    from turnkit.simulation import simulate

    sched = dict(poll_period_s=0.025, wake_time_s=20e-6, settle_time_s=30e-6,
                 poll_time_s=15e-6)
    result = simulate(Still(), FixedSchedule(**sched), 3600.0)
    exact = budget_from_simulation(_node(), result)
    analytic = budget_from_schedule(_node(), **sched)
    assert result.wake_count == 144_000
    assert exact.average_current_uA == pytest.approx(analytic.average_current_uA, rel=1e-9)
    assert exact.by_consumer() == pytest.approx(analytic.by_consumer(), rel=1e-9)


# ---------------------------------------------------------------- driven moves and fault


from turnkit.power import move_energy, time_to_flat_days  # noqa: E402


def test_move_energy_hand_calculation_with_motor_constants():
    # Hand calculation (derived, shown in docs/power.md): 200 N over 100 mm is 20 J at the
    # output, 50 J at the motor through a 40 % train; 1200 motor turns at 3000 rpm take 24 s;
    # T = 50 J / (2 pi 1200) = 6.631 mN*m; I = 50 mA + T / (0.01 N*m/A) = 713.1 mA; Q = I * 24 s.
    m = move_energy(moves_per_day=4, motor_turns_per_move=1200.0, output_work_per_move_J=20.0,
                    gear_efficiency=0.4, motor_speed_rpm=3000.0, supply_voltage_V=3.0,
                    torque_constant_Nm_per_A=0.01, no_load_current_mA=50.0)
    torque = 50.0 / (2 * np.pi * 1200.0)
    assert m.time_per_move_s == pytest.approx(24.0)
    assert m.motor_torque_Nm == pytest.approx(torque)
    assert m.motor_current_mA == pytest.approx(50.0 + torque / 0.01 * 1e3)
    assert m.charge_per_move_C == pytest.approx(m.motor_current_mA * 1e-3 * 24.0)
    assert m.tracking_fraction == pytest.approx(4 * 24.0 / 86400.0)


def test_move_charge_per_day_agrees_with_pint():
    # Source: pint unit conversion (independent reference library).
    ureg = registry()
    m = move_energy(moves_per_day=6, motor_turns_per_move=500.0, output_work_per_move_J=3.0,
                    gear_efficiency=0.5, motor_speed_rpm=1500.0, supply_voltage_V=3.6,
                    motor_current_mA=180.0)
    t = (500 * ureg.turn / (1500 * ureg.rpm)).to("s")
    q_day = (180 * ureg.mA * t * 6).to("mA*h")
    assert m.charge_per_day_mAh == pytest.approx(q_day.magnitude, rel=1e-12)
    assert m.electrical_energy_per_move_J == pytest.approx((180 * ureg.mA * t * 3.6 * ureg.V).to("J").magnitude)
    assert m.motor_efficiency == pytest.approx(6.0 / m.electrical_energy_per_move_J)


def test_more_moves_or_more_load_never_lower_the_average_current():
    p = _three_loads()
    base = None
    for n, load in ((0.5, 1.0), (2.0, 1.0), (2.0, 4.0), (8.0, 4.0)):
        m = move_energy(moves_per_day=n, motor_turns_per_move=300.0, output_work_per_move_J=load,
                        gear_efficiency=0.6, motor_speed_rpm=2000.0, supply_voltage_V=3.0,
                        torque_constant_Nm_per_A=0.005, no_load_current_mA=20.0)
        prof = CurrentProfile(p.consumers + (m.consumer(),), 3.0)
        i = budget_from_schedule(prof, **_SCHEDULE, tracking_fraction=m.tracking_fraction).average_current_uA
        assert base is None or i > base
        base = i


def test_motor_charge_is_conserved_against_the_simulation_exact_budget():
    # Charge conservation: a day with six driven moves simulated through the counter and
    # schedule gives exact state times; the motor's charge in that budget must equal six
    # moves' charge, and the analytic budget (tracking share from the move time) must agree
    # with the exact one to within the polls that the move boundaries round off.
    from turnkit.motion import CombinedMotion, ConstantSpeed
    from turnkit.schedule import FixedSchedule
    from turnkit.simulation import simulate

    rpm, turns, n = 600.0, 300.0, 6
    m = move_energy(moves_per_day=n, motor_turns_per_move=turns, output_work_per_move_J=2.0,
                    gear_efficiency=0.5, motor_speed_rpm=rpm, supply_voltage_V=3.0, motor_current_mA=120.0)
    moves = CombinedMotion(tuple(ConstantSpeed(rpm, start_s=3600.0 * (1 + 3 * k), duration_s=m.time_per_move_s,
                                               driven=True) for k in range(n)))
    sched = FixedSchedule(poll_period_s=_SCHEDULE["poll_period_s"], wake_time_s=_SCHEDULE["wake_time_s"],
                          settle_time_s=_SCHEDULE["settle_time_s"], poll_time_s=_SCHEDULE["poll_time_s"])
    res = simulate(moves, sched, 86400.0)
    assert res.state_time_s["tracking"] == pytest.approx(n * m.time_per_move_s, rel=1e-9)
    prof = CurrentProfile(_three_loads().consumers + (m.consumer(),), 3.0)
    exact = budget_from_simulation(prof, res)
    motor_C = exact.by_consumer()["motor"] * 1e-6 * 86400.0
    assert motor_C == pytest.approx(n * m.charge_per_move_C, rel=1e-9)
    # The parts add up to the whole, by consumer and by state.
    assert sum(exact.current_by_consumer_uA) == pytest.approx(exact.average_current_uA, rel=1e-12)
    assert sum(exact.current_by_state_uA) == pytest.approx(exact.average_current_uA, rel=1e-12)
    analytic = budget_from_schedule(prof, **_SCHEDULE, tracking_fraction=m.tracking_fraction)
    one_poll_uA = (exact.charge_per_wake_uC) / 86400.0
    assert abs(analytic.average_current_uA - exact.average_current_uA) <= 2 * n * one_poll_uA + 1e-9
    assert analytic.by_consumer()["motor"] == pytest.approx(exact.by_consumer()["motor"], rel=1e-9)


def test_a_day_in_fault_costs_the_sleep_current_not_the_poll_current():
    # The firmware stops polling in fault (docs/counter.md): a whole day in fault averages the
    # sleep current, where billing it at the polling current gave milliamps.
    p = CurrentProfile((Consumer.sleep_and_awake("node", 1.5, 3900.0),), 3.0)
    day = budget_from_state_times(p, {"fault": 86400.0}, 86400.0, 0)
    assert day.average_current_uA == pytest.approx(1.5)
    awake = CurrentProfile((Consumer("node", {"asleep": 1.5, "waking": 3900.0, "polling": 3900.0,
                                              "tracking": 3900.0, "fault": 3900.0}),), 3.0)
    assert budget_from_state_times(awake, {"fault": 86400.0}, 86400.0, 0).average_current_uA == 3900.0


def test_time_to_flat_hand_calculation():
    # 1000 mAh at 3.9 mA is 256.4 days; with 36.525 mAh/year self-discharge 0.1 mAh/day more.
    assert time_to_flat_days(1000.0, 3900.0) == pytest.approx(1000.0 / (3.9 * 24.0))
    assert time_to_flat_days(1000.0, 3900.0, 36.525) == pytest.approx(1000.0 / (3.9 * 24.0 + 0.1))
    assert time_to_flat_days(1000.0, 0.0) == np.inf


def test_moves_that_do_not_fit_in_a_day_are_refused_with_the_move_time():
    with pytest.raises(DesignValueError, match="each move takes 60 s"):
        move_energy(moves_per_day=2000, motor_turns_per_move=60.0, output_work_per_move_J=0.0,
                    gear_efficiency=1.0, motor_speed_rpm=60.0, supply_voltage_V=3.0, motor_current_mA=10.0)
    with pytest.raises(DesignValueError, match="exactly one"):
        move_energy(moves_per_day=1, motor_turns_per_move=60.0, output_work_per_move_J=0.0,
                    gear_efficiency=1.0, motor_speed_rpm=60.0, supply_voltage_V=3.0)


def test_state_fractions_of_plain_numbers_are_reused_and_follow_every_input():
    from turnkit.power import _scalar_state_fractions, state_fractions

    kw = dict(poll_period_s=0.02, wake_time_s=50e-6, settle_time_s=20e-6, poll_time_s=30e-6,
              fast_period_s=0.005, hold_s=2.0, motion_fraction=0.01, motion_events_per_day=20.0,
              tracking_fraction=0.001)
    _scalar_state_fractions.cache_clear()
    first, wakes = state_fractions(**kw)
    first[:] = -1.0  # the caller's copy: the reused numbers are not touched
    again, wakes_again = state_fractions(**kw)
    assert _scalar_state_fractions.cache_info().hits == 1
    vectorised, vectorised_wakes = state_fractions(**{k: np.array([v]) for k, v in kw.items()})
    np.testing.assert_array_equal(again, vectorised[:, 0])
    np.testing.assert_array_equal(wakes_again, vectorised_wakes[0])
    for key in kw:
        changed, changed_wakes = state_fractions(**{**kw, key: kw[key] * 1.5})
        assert not (np.array_equal(changed, again) and np.array_equal(changed_wakes, wakes_again)), key
