"""Keeping the count through supply events: write endurance, hold-up energy, power-up re-sync."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit import countkeeping as ck
from turnkit.design import CountMemoryDesign
from turnkit.designfile import load_design
from turnkit.errors import DesignValueError
from turnkit.sizing import size
from turnkit.units import registry

DEMO = Path(__file__).resolve().parents[1] / "demo"


def test_hold_up_energy_is_half_c_v_squared_difference():
    # Source: energy stored in a capacitor W = C V^2 / 2 (any physics text); checked with pint.
    ureg = registry()
    available = (0.5 * ureg("470 uF") * ((ureg("2.7 V")) ** 2 - (ureg("2.0 V")) ** 2)).to("uJ").magnitude
    needed = (ureg("6 mW") * (ureg("4 ms") + ureg("50 us"))).to("uJ").magnitude
    h = ck.hold_up(470.0, 2.7, 2.0, 6.0, 4.0, 50.0)
    assert h.available_uJ == pytest.approx(available) and h.needed_uJ == pytest.approx(needed) and h.ok


@given(st.floats(1.5, 5.0), st.floats(0.1, 1.4), st.floats(0.1, 50.0), st.floats(0.1, 50.0), st.floats(0, 500))
@settings(max_examples=50, deadline=None)
def test_the_advised_capacitance_just_carries_the_save(v1, v2, power, t_save, latency):
    c = ck.capacitance_needed_uF(v1, v2, power, t_save, latency)
    assert ck.hold_up(c * (1 + 1e-9), v1, v2, power, t_save, latency).ok
    assert not ck.hold_up(c * 0.99, v1, v2, power, t_save, latency).ok


def test_strategies_count_their_writes():
    assert ck.writes_per_day("on_change", quarter_turns_per_day=500) == 500
    assert ck.writes_per_day("periodic", quarter_turns_per_day=1e6, write_period_s=60) == 1440
    assert ck.writes_per_day("periodic", quarter_turns_per_day=100, write_period_s=60) == 100
    assert ck.writes_per_day("on_brownout", supply_events_per_day=3) == 3
    with pytest.raises(DesignValueError, match="write_strategy"):
        ck.writes_per_day("sometimes")


@given(st.floats(0.1, 1e5), st.floats(0.5, 30), st.integers(1000, 10**7))
@settings(max_examples=50, deadline=None)
def test_the_advised_number_of_slots_covers_the_writes(per_day, years, rated):
    slots = ck.slots_needed(per_day, years, rated)
    assert ck.endurance(per_day, years, rated, slots).ok
    if slots > 1:
        assert not ck.endurance(per_day, years, rated, slots - 1).ok


def test_resync_guard_adds_half_hysteresis_spread_and_fine_error():
    r = ck.resync(4.0, 3.0, 0.5)
    assert r.guard_deg == pytest.approx(5.5) and r.ok
    assert r.untrusted_fraction == pytest.approx(8 * 5.5 / 360)
    assert not ck.resync(60.0, 15.0, 1.0).ok


def test_brownout_strategy_without_a_capacitor_is_refused_naming_the_key():
    with pytest.raises(DesignValueError, match="holdup_capacitance"):
        CountMemoryDesign(write_strategy="on_brownout")
    with pytest.raises(DesignValueError, match="travel_per_day"):
        CountMemoryDesign(write_strategy="on_change")


def _advised(check, before: str, after: str) -> float:
    """The number a failing check's advice gives between two pieces of its text."""
    assert not check.passed and before in check.advice, check
    return float(check.advice.split(before)[1].split(after)[0])


def _gate():
    return load_design(DEMO / "irrigation-gate-valve.toml")


def test_a_too_small_holdup_capacitor_fails_and_the_advice_passes():
    design = _gate()
    small = replace(design, count_memory=replace(design.count_memory, holdup_capacitance_uF=4.7))
    check = size(small, base_dir=DEMO, curves=False).check("holdup_energy")
    assert not check.passed
    c = _advised(check, "at least ", " uF")
    fixed = replace(small, count_memory=replace(small.count_memory, holdup_capacitance_uF=c))
    assert size(fixed, base_dir=DEMO, curves=False).check("holdup_energy").passed


def test_writing_on_every_step_wears_the_memory_out_and_the_advised_slots_pass():
    design = _gate()
    busy = replace(design, count_memory=CountMemoryDesign(write_strategy="on_change", travel_per_day_mm=500.0))
    check = size(busy, base_dir=DEMO, curves=False).check("memory_endurance")
    assert not check.passed
    slots = int(_advised(check, "wear_leveling_slots = ", ")"))
    fixed = replace(busy, count_memory=replace(busy.count_memory, wear_leveling_slots=slots))
    assert size(fixed, base_dir=DEMO, curves=False).check("memory_endurance").passed


def test_a_wide_hysteresis_makes_resync_undecidable_and_the_advice_passes():
    design = replace(_gate(), magnet=None, accuracy=replace(_gate().accuracy, eccentricity_mm=0.0, stray_field_mT=0.0))
    wide = replace(design, latches=replace(design.latches, hysteresis_deg=80.0, switch_point_tolerance_deg=10.0,
                                                 powered="always"))
    check = size(wide, base_dir=DEMO, curves=False, simulate=False).check("power_up_resync")
    assert not check.passed
    h = _advised(check, "at most ", " deg")
    fixed = replace(wide, latches=replace(wide.latches, hysteresis_deg=h))
    assert size(fixed, base_dir=DEMO, curves=False, simulate=False).check("power_up_resync").passed


def test_travel_per_day_in_the_wrong_unit_names_the_key():
    design = _gate()
    bad = replace(design, count_memory=CountMemoryDesign(travel_per_day_deg=100.0))
    with pytest.raises(DesignValueError, match="count_memory.travel_per_day"):
        size(bad, base_dir=DEMO, curves=False, simulate=False)
