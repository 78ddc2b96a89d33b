"""The sizing engine: values, checks, scenarios and curves of whole designs."""

from __future__ import annotations

import math
from fractions import Fraction
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit import battery as batt
from turnkit import equations as eq
from turnkit.designfile import load_design, loads_design
from turnkit.errors import DesignValueError
from turnkit.sizing import build_train, size
from turnkit.tuning import tunable, tunables_for

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo"
DEMOS = ["irrigation-gate-valve", "window-shade-winder", "camera-crane-joint"]

SMALL = """
format_version = 1
name = "bench valve"
[[gear_train]]
kind = "external"
teeth_driver = 18
teeth_driven = 54
[[gear_train]]
kind = "lead_screw"
pitch = "2 mm"
length = "150 mm"
[schedule]
poll_period = "20 ms"
wake_time = "50 us"
settle_time = "100 us"
poll_time = "20 us"
[[power.consumers]]
name = "electronics"
asleep = "2 uA"
waking = "1 mA"
polling = "1 mA"
tracking = "3 mA"
[battery]
chemistry = "li_fes2_aa"
cells_series = 2
[requirements]
stroke = "100 mm"
output_resolution = "0.01 mm"
backdrive_speed = "5 mm/s"
battery_life = "5 years"
"""


@pytest.fixture(scope="module")
def small():
    return loads_design(SMALL)


@pytest.fixture(scope="module", params=DEMOS)
def demo(request):
    return load_design(DEMO / f"{request.param}.toml")


def test_every_demo_sizes_with_all_curves(demo):
    result = size(demo, base_dir=DEMO)
    keys = {c.key for c in result.curves}
    assert {"life_vs_poll_period", "backdrive_event", "backdrive_error", "resolution_vs_reduction",
            "backdrive_speed_vs_reduction", "current_profile", "sensor_error"} <= keys
    assert len(result.scenarios) == len(demo.motion)
    assert result.cautions and result.equations
    assert len(result.design_hash) == 64


def test_the_crane_demo_fails_on_purpose_and_says_what_to_change():
    result = size(load_design(DEMO / "camera-crane-joint.toml"), base_dir=DEMO)
    assert not result.passed
    life = result.check("battery_life")
    assert not life.passed and life.margin < 0
    assert "mAh" in life.advice
    assert any("coin cell" in c.lower() for c in result.cautions)


def test_ratio_and_travel_come_from_the_exact_train(small):
    result = size(small, curves=False)
    assert result.value("ratio").value == "3"
    assert result.value("travel_per_motor_turn").value == pytest.approx(2 / 3)
    # 100 mm at 2/3 mm per turn = 150 turns = 600 quarter-turns -> 10 bits + sign.
    assert result.value("stroke_quarter_turns").value == 600
    assert result.value("counter_bits_needed").value == 11


def test_speed_bound_and_poll_period_agree_with_the_symbolic_model(small):
    result = size(small, curves=False)
    # Symbolic solution (sympy) against the numeric engine.
    t_max = eq.max_poll_period_for_speed_s(output_speed=5.0, travel_per_turn=2 / 3, output_unit="mm")
    assert result.value("max_poll_period_ms").value == pytest.approx(t_max.value * 1e3, rel=1e-12)
    # Source: reference-checks.md section 5: n_max [rpm] = 15 / T_poll [s] -> 20 ms -> 750 rpm.
    assert result.value("trackable_motor_speed_rpm").value == pytest.approx(750.0)
    assert eq.solve_for("n_max_rpm", T=0.020) == pytest.approx(750.0)


def test_battery_life_agrees_with_the_symbolic_life_equation(small):
    result = size(small, curves=False)
    pack = batt.Pack(batt.cell("li_fes2_aa"), series=2)
    life = eq.solve_for("L", C_nom=pack.capacity_mAh, k_T=1.0, u=1.0, s=pack.self_discharge_per_year,
                        I_avg=result.value("average_current_uA").value / 1e3)
    assert result.value("battery_life_years").value == pytest.approx(life, rel=1e-9)


def test_average_current_matches_a_hand_calculation(small):
    # 2 uA asleep; awake 170 us per 20 ms poll at 1 mA (waking and polling alike).
    # Source: reference-checks.md section 4: I_avg = I_sleep + (I_wake - I_sleep) t_wake / T.
    expected = 2.0 + (1000.0 - 2.0) * 170e-6 / 20e-3
    assert size(small, curves=False).value("average_current_uA").value == pytest.approx(expected, rel=1e-9)


def test_inverse_resolution_solution_meets_the_target_exactly(small):
    result = size(small, curves=False)
    sensor_res = result.value("sensor_resolution_deg").value
    target = 1e-5
    sol = eq.min_reduction_for_resolution(output_resolution=target, sensor_resolution_deg=sensor_res,
                                          travel_per_output_turn=2.0)
    # A train of that reduction resolves exactly the target.
    assert sensor_res / 360.0 * 2.0 / sol.value == pytest.approx(target, rel=1e-12)
    # And the engine's advice names a reduction at least that large when the target fails.
    tight = replace(small, requirements=replace(small.requirements, output_resolution_mm=target))
    check = size(tight, curves=False).check("output_resolution")
    assert not check.passed
    assert f"{sol.value:.4g}" in check.advice


def test_capacity_needed_lasts_exactly_the_required_life():
    design = load_design(DEMO / "camera-crane-joint.toml")
    result = size(design, base_dir=DEMO, curves=False)
    need = result.value("capacity_needed_mAh").value
    bigger = replace(design, battery=replace(design.battery, capacity_mAh=need))
    again = size(bigger, base_dir=DEMO, curves=False)
    assert again.value("battery_life_years").value == pytest.approx(2.0, rel=1e-9)
    sym = eq.min_capacity_for_life_mAh(life_years=2.0, average_current_uA=result.value("average_current_uA").value,
                                       self_discharge_per_year=batt.cell("li_mno2_2032").self_discharge_per_year)
    assert sym.value == pytest.approx(need, rel=1e-9)


def test_a_poll_period_past_the_bound_fails_the_backdrive_check_and_the_simulation_agrees(small):
    result = size(small, curves=True)
    t_max_ms = result.value("max_poll_period_ms").value
    slow = tunable(small, "schedule.poll_period_ms").set(small, t_max_ms * 1.6)
    bad = size(slow, curves=True)
    assert result.check("backdrive_speed").passed
    assert not bad.check("backdrive_speed").passed
    assert "ms" in bad.check("backdrive_speed").advice
    # The simulated back-drive event at the required speed: clean inside the bound, ambiguous past it.
    assert "0 ambiguous, 0 silent" in result.curve("backdrive_event").note
    assert "0 ambiguous" not in bad.curve("backdrive_event").note


def test_life_curve_marks_the_design_and_shades_the_infeasible_side(small):
    result = size(small)
    curve = result.curve("life_vs_poll_period")
    (vline,) = curve.vlines
    assert vline.x == pytest.approx(result.value("max_poll_period_ms").value)
    (band,) = curve.bands
    assert band.x_start == pytest.approx(vline.x)
    (marker,) = curve.markers
    assert marker.x == pytest.approx(20.0)
    assert marker.y == pytest.approx(result.value("battery_life_years").value, rel=1e-9)
    life = curve.series[0]
    assert np.all(np.diff(life.y) >= -1e-12)  # longer poll period never shortens life


def test_stroke_longer_than_the_screw_names_the_requirement(small):
    long = replace(small, requirements=replace(small.requirements, stroke_mm=200.0))
    with pytest.raises(DesignValueError, match=r"requirements\.stroke.*length_mm = 150 mm"):
        size(long, curves=False)


def test_unknown_battery_key_suggests_the_nearest():
    design = loads_design(SMALL.replace('chemistry = "li_fes2_aa"', 'chemistry = "li_fes2_aaa"'))
    with pytest.raises(DesignValueError) as info:
        size(design, curves=False)
    assert info.value.field == "battery.chemistry"
    assert "li_fes2_aa" in str(info.value)


def test_design_without_consumers_is_refused_with_the_section_named():
    design = loads_design(SMALL.split("[[power.consumers]]")[0] + SMALL.split('tracking = "3 mA"')[1])
    with pytest.raises(DesignValueError, match=r"power\.consumers"):
        size(design, curves=False)


def test_host_supply_design_checks_the_quiescent_budget():
    text = SMALL.split("[battery]")[0] + """
[power.host_supply]
quiescent_budget = "5 uA"
[requirements]
stroke = "100 mm"
"""
    result = size(loads_design(text))
    check = result.check("quiescent_budget")
    assert not check.passed  # 10.5 uA against 5 uA
    assert any(c.key == "current_vs_poll_period" for c in result.curves)


def test_self_locking_train_gets_the_creep_caution_and_backdriving_train_the_runaway_caution(small):
    locking = size(small, curves=False)
    # A sliding screw without a mean diameter is assumed self-locking (and said to be unknown).
    assert locking.value("can_backdrive").value is False
    assert any("creep" in c for c in locking.cautions)
    assert any("unknown" in w for w in locking.warnings)
    shade = size(load_design(DEMO / "window-shade-winder.toml"), base_dir=DEMO, curves=False)
    assert shade.value("can_backdrive").value is True
    assert any("back-drives" in c for c in shade.cautions)


def test_sizing_the_same_design_twice_gives_equal_results(small):
    a = size(small, curves=False)
    b = size(small, curves=False)
    assert a == b


def test_sizing_imports_no_widget_or_plotting_package():
    code = ("import sys\nfrom turnkit.designfile import load_design\nfrom turnkit.sizing import size\n"
            f"size(load_design({str(DEMO / 'irrigation-gate-valve.toml')!r}), base_dir={str(DEMO)!r})\n"
            "print([m for m in ('bokeh', 'ipywidgets', 'jupyter_bokeh') if m in sys.modules])\n")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


@settings(max_examples=25, deadline=None)
@given(st.floats(min_value=1.0, max_value=500.0), st.floats(min_value=1.0, max_value=500.0))
def test_polling_faster_never_lengthens_battery_life(small, a, b):
    t = tunable(small, "schedule.poll_period_ms")
    fast, slow = sorted((a, b))
    life_fast = size(t.set(small, fast), curves=False, simulate=False).value("battery_life_years").value
    life_slow = size(t.set(small, slow), curves=False, simulate=False).value("battery_life_years").value
    assert life_fast <= life_slow * (1 + 1e-12)


@settings(max_examples=25, deadline=None)
@given(st.integers(min_value=19, max_value=150))
def test_more_reduction_gives_finer_resolution_and_faster_backdrive(small, teeth):
    t = tunable(small, "gear_train[0].teeth_driven")
    lo = size(t.set(small, teeth), curves=False, simulate=False)
    hi = size(t.set(small, teeth + 1), curves=False, simulate=False)
    assert hi.value("output_resolution").value < lo.value("output_resolution").value
    assert hi.value("backdrive_motor_speed_rpm").value > lo.value("backdrive_motor_speed_rpm").value
    assert hi.value("max_poll_period_ms").value < lo.value("max_poll_period_ms").value


def test_every_tunable_round_trips_through_its_setter(demo):
    for t in tunables_for(demo):
        value = t.get(demo)
        again = t.set(demo, value)
        assert t.get(again) == value
        assert build_train(again).ratio == build_train(demo).ratio or t.group != "gear train"


def test_tunable_set_validates_through_the_design():
    design = load_design(DEMO / "irrigation-gate-valve.toml")
    with pytest.raises(DesignValueError):
        tunable(design, "schedule.poll_period_ms").set(design, -5.0)
    with pytest.raises(DesignValueError):
        tunable(design, "battery.chemistry").set(design, "no_such_cell")


def test_planetary_ring_tunable_keeps_planets_meshing():
    design = load_design(DEMO / "window-shade-winder.toml")
    t = tunable(design, "gear_train[0].ring_teeth")
    changed = t.set(design, 51)
    stage = changed.gear_train[0]
    assert stage.ring_teeth == stage.sun_teeth + 2 * stage.planet_teeth
    assert build_train(changed).ratio == (1 + Fraction(51, 15)) * 16


def test_electronics_cutoff_above_the_rated_end_voltage_shortens_life(small):
    # Two Li-FeS2 AA cells: nominal 3.0 V, rated end 1.8 V. A 2.4 V cut-off keeps half (linear stand-in).
    base = size(small, curves=False)
    cut = replace(small, power=replace(small.power, cutoff_voltage_V=2.4))
    result = size(cut, curves=False)
    assert result.value("usable_fraction_percent").value == pytest.approx(50.0)
    pack = batt.Pack(batt.cell("li_fes2_aa"), series=2)
    expected = eq.solve_for("L", C_nom=pack.capacity_mAh, k_T=1.0, u=0.5, s=pack.self_discharge_per_year,
                            I_avg=result.value("average_current_uA").value / 1e3)
    assert result.value("battery_life_years").value == pytest.approx(expected, rel=1e-9)
    assert result.value("battery_life_years").value < base.value("battery_life_years").value
    assert any("cut-off" in a[0] or "stop at" in a[0] for a in result.assumptions)


def test_cutoff_at_or_above_the_nominal_voltage_is_refused_naming_the_field(small):
    cut = replace(small, power=replace(small.power, cutoff_voltage_V=3.0))
    with pytest.raises(DesignValueError) as info:
        size(cut, curves=False)
    assert info.value.field == "power.cutoff_voltage"
    assert "3 V" in str(info.value) or "3.0" in str(info.value)
