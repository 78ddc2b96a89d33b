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
    assert result.value("ratio").value == Fraction(3) and result.value("ratio").formatted() == "3"
    assert result.value("travel_per_motor_turn").value == pytest.approx(2 / 3)
    # 100 mm at 2/3 mm per turn = 150 turns = 600 quarter-turns -> 10 bits + sign.
    assert result.value("stroke_quarter_turns").value == 600
    assert result.value("counter_bits_needed").value == 11


def test_speed_bound_and_poll_period_agree_with_the_symbolic_model(small):
    result = size(small, curves=False)
    # Symbolic solution (sympy) against the numeric engine.
    # Default latches: 5 deg tolerance, 2 deg hysteresis, powered only around polls -> each edge
    # within +-6 deg, narrowest quadrant 78 deg; default counting margin 30 %.
    t_max = eq.max_poll_period_for_speed_s(output_speed=5.0, travel_per_turn=2 / 3, output_unit="mm",
                                           narrowest_quadrant_deg=78.0, margin=0.3)
    assert result.value("max_poll_period_ms").value == pytest.approx(t_max.value * 1e3, rel=1e-12)
    # Source: (derived, shown in docs/counter.md §6): n_max = w / (6 T): 78 deg per 20 ms -> 650 rpm.
    assert result.value("narrowest_quadrant_deg").value == 78.0
    assert result.value("trackable_motor_speed_rpm").value == pytest.approx(650.0)
    assert eq.solve_for("n_max_rpm", T=0.020, w_q=78.0) == pytest.approx(650.0)


def test_battery_life_agrees_with_the_symbolic_life_equation(small):
    result = size(small, curves=False)
    pack = batt.Pack(batt.cell("li_fes2_aa"), series=2)
    # u: the share above the cut-off under the wake pulse's sag, from the discharge curve.
    u = result.value("usable_fraction_percent").value / 100
    assert 0.999 < u <= 1.0
    life = eq.solve_for("L", C_nom=pack.capacity_mAh, k_T=1.0, u=u, s=pack.self_discharge_per_year,
                        I_avg=result.value("average_current_uA").value / 1e3)
    assert result.value("battery_life_years").value == pytest.approx(life, rel=1e-9)


def test_average_current_matches_a_hand_calculation(small):
    # 2 uA asleep; awake 170 us per 20 ms poll at 1 mA (waking and polling alike).
    # Source: (derived, shown in docs/derivations.md §6): I_avg = I_sleep + (I_wake - I_sleep) t_wake / T.
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
                                       self_discharge_per_year=batt.cell("li_mno2_2032").self_discharge_per_year,
                                       usable_fraction=result.value("usable_fraction_percent").value / 100)
    assert sym.value == pytest.approx(need, rel=1e-9)


def test_a_poll_period_past_the_bound_fails_the_backdrive_check_and_the_simulation_agrees(small):
    result = size(small, curves=True)
    t_max_ms = result.value("max_poll_period_ms").value
    # 2.2 times the period with 30 % margin: about 1.5 times the bound itself.
    slow = tunable(small, "schedule.poll_period_ms").set(small, t_max_ms * 2.2)
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
    unknown = size(small, curves=False)
    # A sliding screw without a mean diameter is assumed to back-drive (and said to be unknown):
    # the cautious side for a counter that must see every back-drive.
    assert unknown.value("can_backdrive").value is True
    assert any("back-drives" in c for c in unknown.cautions)
    assert any("unknown" in w and "assumed to back-drive" in w for w in unknown.warnings)
    locking = size(load_design(DEMO / "irrigation-gate-valve.toml"), base_dir=DEMO, curves=False, simulate=False)
    assert locking.value("can_backdrive").value is False
    assert any("creep" in c for c in locking.cautions)
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
    # Two Li-FeS2 AA cells: rated end 1.8 V. A 2.8 V cut-off (1.4 V a cell) sits at the end of the
    # plateau: the share is where the tabulated curve, less the wake pulse's sag, reaches it.
    base = size(small, curves=False)
    cut = replace(small, power=replace(small.power, cutoff_voltage_V=2.8))
    result = size(cut, curves=False)
    pack = batt.Pack(batt.cell("li_fes2_aa"), series=2)
    sag = result.value("largest_pulse_sag_V").value
    u = batt.usable_fraction_under_pulse(pack, 2.8, sag)
    assert result.value("usable_fraction_percent").value == pytest.approx(100 * u)
    assert 0.8 < u < 0.9
    expected = eq.solve_for("L", C_nom=pack.capacity_mAh, k_T=1.0, u=u, s=pack.self_discharge_per_year,
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


# --- a measured calibration sweep named in [sensor] --------------------------------------

SWEEP_SENSOR = """
[sensor]
amplitude = "60 mV"
offset_x = "0.6 mV"
offset_y = "-0.4 mV"
gain_mismatch = "1.5 %"
phase_error = "0.8 deg"
noise_rms = "40 uV"
"""


def _write_sweep(path: Path, *, offset_x=0.6, offset_y=-0.4, gain=0.015, phase_deg=0.8, amplitude=60.0,
                 n=720, turn_deg=360.0, angles=True, glitches=(), seed=5):
    # Written from the textbook model x = p + A cos 2θ, y = q + A(1 + g) sin(2θ + δ), not from turnkit.
    theta = np.arange(n) * turn_deg / n
    phi = np.radians(2.0 * theta)
    rng = np.random.default_rng(seed)
    x = offset_x + amplitude * np.cos(phi) + rng.normal(0.0, 0.04, n)
    y = offset_y + amplitude * (1 + gain) * np.sin(phi + math.radians(phase_deg)) + rng.normal(0.0, 0.04, n)
    for i, dx in glitches:
        x[i] += dx
    lines = ["# sweep for a test", "angle_deg,x_mV,y_mV" if angles else "x [mV],y [mV]"]
    for a, xi, yi in zip(theta, x, y):
        lines.append(f"{a:.3f},{xi:.5f},{yi:.5f}" if angles else f"{xi:.5f},{yi:.5f}")
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def _sweep_design(tmp_path: Path, sensor: str = SWEEP_SENSOR, sweep: str = "sweeps/bench.csv"):
    text = SMALL + sensor + f'sweep = "{sweep}"\n'
    file = tmp_path / "valve.toml"
    file.write_text(text, encoding="utf-8")
    return load_design(file)


def test_sweep_fit_values_recover_the_bridge_parameters_that_made_the_sweep(tmp_path):
    _write_sweep(tmp_path / "sweeps" / "bench.csv", glitches=((100, 12.0), (400, -9.0)))
    result = size(_sweep_design(tmp_path), base_dir=tmp_path, curves=False, simulate=False)
    val = {v.key: v for v in result.values if v.key.startswith("sensor_sweep")}
    assert all(v.group == "sensor" for v in val.values())
    # Synthetic round trip: the invented sweep was generated with these parameters (40 uV noise on 720 samples: the
    # fit's standard error is about 0.04/sqrt(360) mV, so 0.02 mV is a safe bound).
    assert val["sensor_sweep_offset_x_mV"].value == pytest.approx(0.6, abs=0.02)
    assert val["sensor_sweep_offset_y_mV"].value == pytest.approx(-0.4, abs=0.02)
    assert val["sensor_sweep_gain_mismatch_percent"].value == pytest.approx(1.5, abs=0.05)
    assert val["sensor_sweep_phase_error_deg"].value == pytest.approx(0.8, abs=0.05)
    assert val["sensor_sweep_offset_x_mV"].unit == "mV" and val["sensor_sweep_phase_error_deg"].unit == "deg"
    assert val["sensor_sweep_samples"].value == 720 and val["sensor_sweep_outliers"].value == 2
    assert val["sensor_sweep_coverage_deg"].value == pytest.approx(359.0, abs=0.01)
    # 40 uV of noise on 60 mV is 0.04/60 rad electrical RMS, half that mechanical: 0.019 deg.
    assert val["sensor_sweep_residual_rms_deg"].value == pytest.approx(math.degrees(0.04 / 60) / 2, rel=0.2)
    assert val["sensor_sweep_residual_peak_deg"].value > val["sensor_sweep_residual_rms_deg"].value
    assert "sensor_sweep_radial_residual_percent" not in val
    assert not [w for w in result.warnings if "disagree" in w]
    assert any("Heydemann" in src for _, src in result.assumptions)
    with pytest.raises(KeyError):
        result.curve("calibration_sweep")  # curves=False leaves the plot out


def test_sweep_without_reference_angles_reports_the_radial_residual(tmp_path):
    _write_sweep(tmp_path / "sweeps" / "bench.csv", angles=False)
    result = size(_sweep_design(tmp_path), base_dir=tmp_path, curves=False, simulate=False)
    keys = {v.key for v in result.values}
    assert "sensor_sweep_residual_peak_deg" not in keys and "sensor_sweep_residual_rms_deg" not in keys
    radial = result.value("sensor_sweep_radial_residual_percent")
    # Synthetic round trip: 40 uV of noise on each bridge of a 60 mV circle moves the radius by 0.04/60 RMS.
    assert radial.value == pytest.approx(100 * 0.04 / 60, rel=0.2) and radial.unit == "%"


def test_sweep_curve_draws_the_samples_as_points_and_the_fitted_ellipse_as_a_line(tmp_path):
    _write_sweep(tmp_path / "sweeps" / "bench.csv", glitches=((200, 15.0),))
    result = size(_sweep_design(tmp_path), base_dir=tmp_path, simulate=False)
    curve = result.curve("calibration_sweep")
    assert (curve.x_unit, curve.y_unit) == ("mV", "mV")
    styles = {s.name: s.style for s in curve.series}
    assert styles == {"measured samples": "points", "rejected as outliers": "points", "fitted ellipse": "line"}
    by_name = {s.name: s for s in curve.series}
    assert by_name["measured samples"].x.size == 719 and by_name["rejected as outliers"].x.size == 1
    ellipse = by_name["fitted ellipse"]
    area = 0.5 * abs(np.sum(ellipse.x[:-1] * ellipse.y[1:] - ellipse.x[1:] * ellipse.y[:-1]))
    a = result.value("sensor_sweep_amplitude_mV").value
    b = a * (1 + result.value("sensor_sweep_gain_mismatch_percent").value / 100)
    d = math.radians(result.value("sensor_sweep_phase_error_deg").value)
    # Source: the ellipse x = a cos t, y = b sin(t + d) is the unit circle under a linear map of
    # determinant a b cos d, so its area is pi a b cos d (from memory); shoelace over 360 chords.
    assert area == pytest.approx(math.pi * a * b * math.cos(d), rel=1e-3)


def test_sweep_that_disagrees_with_the_sensor_parameters_warns(tmp_path):
    _write_sweep(tmp_path / "sweeps" / "bench.csv", offset_x=2.5, phase_deg=3.0)
    result = size(_sweep_design(tmp_path), base_dir=tmp_path, curves=False, simulate=False)
    warning = [w for w in result.warnings if "disagree" in w]
    assert len(warning) == 1
    assert "offset_x" in warning[0] and "phase_error" in warning[0] and "sweeps/bench.csv" in warning[0]
    assert "offset_y" not in warning[0] and "gain_mismatch" not in warning[0]


def test_small_differences_within_half_a_percent_of_the_amplitude_do_not_warn(tmp_path):
    # Stated offsets zero, measured 0.25 mV: under 0.5 % of 60 mV (0.3 mV), so no warning.
    sensor = '\n[sensor]\namplitude = "60 mV"\ngain_mismatch = "1.5 %"\nphase_error = "0.8 deg"\n'
    _write_sweep(tmp_path / "sweeps" / "bench.csv", offset_x=0.25, offset_y=-0.25)
    result = size(_sweep_design(tmp_path, sensor), base_dir=tmp_path, curves=False, simulate=False)
    assert not [w for w in result.warnings if "disagree" in w]
    _write_sweep(tmp_path / "sweeps" / "other.csv", offset_x=0.6, offset_y=-0.25)
    result = size(_sweep_design(tmp_path, sensor, "sweeps/other.csv"), base_dir=tmp_path, curves=False,
                  simulate=False)
    assert [w for w in result.warnings if "disagree" in w and "offset_x" in w]


def test_bad_sweep_line_names_the_field_file_and_line(tmp_path):
    from turnkit.errors import DesignFileError

    path = tmp_path / "sweeps" / "bench.csv"
    _write_sweep(path)
    lines = path.read_text().splitlines()
    lines[9] = "3.5,abc,1.0"
    path.write_text("\n".join(lines) + "\n")
    design = _sweep_design(tmp_path)
    with pytest.raises(DesignFileError) as info:
        size(design, base_dir=tmp_path, curves=False, simulate=False)
    message = str(info.value)
    assert "sensor.sweep" in message and f"{path}:10" in message and "abc" not in message and "x_mV" in message
    assert info.value.line == 10


def test_sweep_short_of_half_a_turn_is_refused_naming_the_field_and_file(tmp_path):
    _write_sweep(tmp_path / "sweeps" / "bench.csv", turn_deg=90.0)
    with pytest.raises(DesignValueError) as info:
        size(_sweep_design(tmp_path), base_dir=tmp_path, curves=False, simulate=False)
    message = str(info.value)
    assert message.startswith("sensor.sweep must be one full electrical period") and "bench.csv" in message


@pytest.mark.parametrize("rows, expected", [
    ("0,1\n90,1\n", "at least 8 samples"),
    ("".join(f"{i},{2 * i}\n" for i in range(12)), "collinear"),
])
def test_too_short_or_degenerate_sweep_is_refused_naming_the_field(tmp_path, rows, expected):
    path = tmp_path / "sweeps" / "bench.csv"
    path.parent.mkdir()
    path.write_text("x_mV,y_mV\n" + rows)
    with pytest.raises(DesignValueError) as info:
        size(_sweep_design(tmp_path), base_dir=tmp_path, curves=False, simulate=False)
    assert str(info.value).startswith("sensor.sweep") and expected in str(info.value)
    assert str(path) in str(info.value)


def test_sweep_removed_after_loading_is_reported_at_sizing(tmp_path):
    from turnkit.errors import DesignFileError

    path = tmp_path / "sweeps" / "bench.csv"
    _write_sweep(path)
    design = _sweep_design(tmp_path)
    path.unlink()
    with pytest.raises(DesignFileError, match=r"sensor\.sweep: calibration sweep file 'sweeps/bench.csv' not found"):
        size(design, base_dir=tmp_path, curves=False, simulate=False)


def test_sweep_fit_is_reused_until_the_file_changes(tmp_path):
    import os

    from turnkit.sizing import _sweep_fit_cached

    path = tmp_path / "sweeps" / "bench.csv"
    _write_sweep(path)
    design = _sweep_design(tmp_path)
    first = size(design, base_dir=tmp_path, curves=False, simulate=False)
    hits = _sweep_fit_cached.cache_info().hits
    size(design, base_dir=tmp_path, curves=False, simulate=False)
    assert _sweep_fit_cached.cache_info().hits == hits + 1
    stat = path.stat()
    _write_sweep(path, offset_x=1.1)
    os.utime(path, ns=(stat.st_atime_ns, stat.st_mtime_ns + 1_000_000_000))
    again = size(design, base_dir=tmp_path, curves=False, simulate=False)
    assert first.value("sensor_sweep_offset_x_mV").value == pytest.approx(0.6, abs=0.02)
    assert again.value("sensor_sweep_offset_x_mV").value == pytest.approx(1.1, abs=0.02)


def test_irrigation_demo_fits_its_bench_sweep_and_agrees_with_its_sensor_model():
    design = load_design(DEMO / "irrigation-gate-valve.toml")
    assert design.sensor.sweep == "sweeps/gate-sensor-sweep.csv"
    result = size(design, base_dir=DEMO, curves=False, simulate=False)
    assert result.value("sensor_sweep_samples").value == 720
    assert result.value("sensor_sweep_outliers").value == 2
    assert result.value("sensor_sweep_gain_mismatch_percent").value == pytest.approx(1.5, abs=0.05)
    assert not [w for w in result.warnings if "disagree" in w]


def test_sweep_that_cannot_be_resolved_without_base_dir_is_skipped_with_a_warning(tmp_path, monkeypatch):
    _write_sweep(tmp_path / "sweeps" / "bench.csv")
    design = _sweep_design(tmp_path)
    monkeypatch.chdir(ROOT)  # the relative sweep path does not exist from here
    result = size(design, simulate=False)
    assert not [v for v in result.values if v.key.startswith("sensor_sweep")]
    assert [w for w in result.warnings if "'sweeps/bench.csv' was not fitted" in w and "base_dir" in w]
    assert "calibration_sweep" not in {c.key for c in result.curves}
    monkeypatch.chdir(tmp_path)  # from the design file's folder it resolves
    assert size(design, curves=False, simulate=False).value("sensor_sweep_samples").value == 720


def test_inverse_values_agree_with_the_symbolic_solutions(small):
    result = size(small, curves=False)
    # Smallest reduction for the required resolution (0.01 mm) against sympy's inverse.
    sol = eq.min_reduction_for_resolution(output_resolution=0.01,
                                          sensor_resolution_deg=result.value("sensor_resolution_deg").value,
                                          travel_per_output_turn=2.0)
    assert result.value("min_reduction_for_resolution").value == pytest.approx(sol.value, rel=1e-9)
    # Largest sleep current for a 5-year life: one consumer, 2 uA asleep, 1 mA for 170 us per 20 ms.
    pack = batt.Pack(batt.cell("li_fes2_aa"), series=2)
    sym = eq.max_sleep_current_for_life_uA(life_years=5.0, capacity_mAh=pack.capacity_mAh, awake_current_uA=1000.0,
                                           awake_time_s=170e-6, poll_period_s=0.020,
                                           self_discharge_per_year=pack.self_discharge_per_year,
                                           usable_fraction=result.value("usable_fraction_percent").value / 100)
    assert result.value("max_sleep_current_uA").value == pytest.approx(sym.value, rel=1e-9)
    # Sizing with exactly that sleep current lasts exactly the required life.
    consumer = replace(small.power.consumers[0], asleep_uA=result.value("max_sleep_current_uA").value)
    edge = replace(small, power=replace(small.power, consumers=(consumer,)))
    assert size(edge, curves=False).value("battery_life_years").value == pytest.approx(5.0, rel=1e-9)


def test_rotary_speed_at_the_output_of_a_linear_train_is_refused_naming_the_scenario():
    # Regression: an rpm at the output of a lead screw was read as 360 mm per revolution.
    text = SMALL + '''
[[motion]]
name = "spin"
kind = "constant"
at = "output"
speed = "30 rpm"
duration = "2 s"
'''
    with pytest.raises(DesignValueError) as info:
        size(loads_design(text), curves=False)
    assert info.value.field == "motion[spin].speed"
    assert "mm/s" in str(info.value)


def test_motor_speed_for_output_speed_matches_the_train(small):
    train = build_train(small)  # 2/3 mm per motor turn
    from turnkit.sizing import motor_rpm_for_output_speed

    assert motor_rpm_for_output_speed(5.0, train, "mm/s") == pytest.approx(450.0)
    assert motor_rpm_for_output_speed(-5.0, train, "mm/s") == pytest.approx(-450.0)
