"""Sizing as a pipeline of stages: each stage's own section, reuse of unchanged stages, layering."""

from __future__ import annotations

import ast
import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from turnkit import sizing
from turnkit.designfile import load_design
from turnkit.sizing import size

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo"
DEMOS = ["irrigation-gate-valve", "window-shade-winder", "camera-crane-joint"]


@pytest.fixture(scope="module", params=DEMOS)
def demo(request):
    return load_design(DEMO / f"{request.param}.toml")


def _stages(design):
    mech = sizing.mechanics_stage(design)
    counter = sizing.counter_range_stage(design, mech)
    sensing = sizing.sensing_stage(design, mech, DEMO)
    speed = sizing.speed_bounds_stage(design, mech)
    pw = sizing.power_stage(design, mech, speed)
    advice = sizing.advice_stage(design, mech, speed, pw)
    return mech, counter, sensing, speed, pw, advice


def test_each_stage_returns_the_checks_of_its_own_concern(demo):
    mech, counter, sensing, speed, pw, advice = _stages(demo)
    assert mech.section.checks == ()
    assert {c.key for c in counter.section.checks} <= {"counter_range"}
    assert {c.key for c in sensing.section.checks} <= {"output_resolution", "output_accuracy", "half_turn_margin"}
    assert "half_turn_margin" in {c.key for c in sensing.section.checks}
    assert {c.key for c in speed.section.checks} <= {"backdrive_speed"}
    assert {c.key for c in pw.section.checks} <= {"brown_out"}
    assert {c.key for c in advice.checks} <= {"battery_life", "quiescent_budget"}
    assert {v.group for v in mech.section.values} == {"gear train"}
    assert {v.group for v in speed.section.values} == {"schedule"}
    assert {v.group for v in pw.section.values} <= {"power", "battery"}


def test_result_is_the_stages_sections_joined_in_order(demo):
    result = size(demo, base_dir=DEMO, curves=False, simulate=False)
    parts = [s.section if hasattr(s, "section") else s for s in _stages(demo)]
    accuracy, replaced = sizing.accuracy_stage(demo, curves=False)
    # The accuracy budget over temperature replaces the sensing stage's one-temperature check.
    parts[2] = replace(parts[2], checks=tuple(c for c in parts[2].checks if c.key not in replaced))
    parts.append(accuracy)
    assert result.values == tuple(v for p in parts for v in p.values)
    assert result.checks == tuple(c for p in parts for c in p.checks)


def test_stage_outputs_are_reused_while_their_inputs_are_unchanged(demo):
    # A poll-period change leaves the gear stages alone: the mechanics stage is the same object.
    slower = replace(demo, schedule=replace(demo.schedule, poll_period_ms=demo.schedule.poll_period_ms * 1.5))
    assert sizing.mechanics_stage(slower) is sizing.mechanics_stage(demo)
    assert sizing.speed_bounds_stage(slower, sizing.mechanics_stage(slower)) is not \
        sizing.speed_bounds_stage(demo, sizing.mechanics_stage(demo))


def test_sensor_analysis_runs_once_for_points_that_vary_only_the_gear_train(demo):
    sizing._sensor_summary.cache_clear()
    first = demo.gear_train[0]
    for k in range(4):
        varied = replace(demo, gear_train=(replace(first, backlash_deg=0.1 + 0.05 * k),) + tuple(demo.gear_train[1:]))
        size(varied, base_dir=DEMO, curves=False, simulate=False, identify=False)
    info = sizing._sensor_summary.cache_info()
    # The accuracy stage asks for the same analysis again: more hits, never another miss.
    assert info.misses == 1 and info.hits >= 3


def test_results_without_identity_carry_the_same_values_checks_and_scenarios(demo):
    full = size(demo, base_dir=DEMO, curves=False)
    bare = size(demo, base_dir=DEMO, curves=False, identify=False)
    assert (bare.values, bare.checks, bare.scenarios, bare.warnings) == \
        (full.values, full.checks, full.scenarios, full.warnings)
    assert bare.design_hash == "" and bare.inputs == {}
    assert len(full.design_hash) == 64 and full.inputs["name"] == demo.name


def _turnkit_imports(module: str) -> set[str]:
    tree = ast.parse((ROOT / "turnkit" / f"{module}.py").read_text())
    names = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.level == 1:
            names.add(node.module or "")
            if node.module is None:
                names.update(a.name for a in node.names)
    return names


def test_result_module_imports_no_view_so_result_and_export_form_no_cycle():
    assert "result" in _turnkit_imports("export")
    assert not _turnkit_imports("result") & {"export", "svgplot", "cli", "ui"}


def test_sized_result_draws_itself_in_a_notebook(demo):
    html = size(demo, base_dir=DEMO, curves=False, simulate=False)._repr_html_()
    assert html.lstrip().startswith('<div class="turnkit-summary">')


def test_reading_and_sizing_the_demos_loads_neither_sympy_nor_pint():
    # The crane's requirements conflict, so its sizing also gives the relax advice.
    code = ("import sys\nfrom pathlib import Path\nfrom turnkit.designfile import load_design\n"
            "from turnkit.sizing import size\n"
            "load_design(Path('turnkit/templates/design.toml'))\n"
            "warns = [w for f in sorted(Path('demo').glob('*.toml')) for w in size(load_design(f), base_dir='demo').warnings]\n"
            "assert any(w.startswith('To make both fit') for w in warns), warns\n"
            "print('sympy' in sys.modules, 'pint' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False False"


def test_a_trace_is_read_once_for_the_work_estimate_and_the_simulation():
    crane = load_design(DEMO / "camera-crane-joint.toml")
    sizing._trace_motion_cached.cache_clear()
    sizing._scenario_motion.cache_clear()
    sizing._simulate_scenario.cache_clear()
    first = size(crane, base_dir=DEMO, curves=False)
    assert sizing._trace_motion_cached.cache_info().misses == 1
    # The same trace seen through another gear train is read again: its motor angles differ.
    belt = crane.gear_train[0]
    longer = replace(crane, gear_train=(replace(belt, teeth_driven=belt.teeth_driven + 3),) + crane.gear_train[1:])
    second = size(longer, base_dir=DEMO, curves=False)
    assert sizing._trace_motion_cached.cache_info().misses == 2
    swing = [s for s in first.scenarios if s.kind == "trace"]
    assert swing and swing != [s for s in second.scenarios if s.kind == "trace"]


def test_the_magnet_fields_are_worked_out_again_only_when_an_input_they_read_changes():
    crane = load_design(DEMO / "camera-crane-joint.toml")
    temps = sizing._service_temperatures_degC(crane)
    state = sizing._field_state(crane, temps, crane.magnet.airgap_mm, 0.2)
    # Backlash, the stated latch tolerance and the battery are not read: the same state comes back.
    unread = replace(crane, latches=replace(crane.latches, switch_point_tolerance_deg=7.0),
                     gear_train=(replace(crane.gear_train[0], backlash_deg=0.9),) + crane.gear_train[1:])
    again = sizing._field_state(unread, temps, crane.magnet.airgap_mm, 0.2)
    assert again["b_sensor"] is state["b_sensor"] and again["switching"] is state["switching"]
    assert again == state
    # Each input it reads gives fields worked out anew, and different where the input matters.
    farther = sizing._field_state(crane, temps, crane.magnet.airgap_mm + 0.5, 0.2)
    assert np.all(farther["b_sensor"] < state["b_sensor"]) and np.all(farther["b_latch"] < state["b_latch"])
    weaker = replace(crane, magnet=replace(crane.magnet, remanence_mT=0.8 * sizing._magnet_numbers(crane.magnet)[0]))
    assert np.all(sizing._field_state(weaker, temps, crane.magnet.airgap_mm, 0.2)["b_sensor"] < state["b_sensor"])
    stricter = replace(crane, sensor=replace(crane.sensor, minimum_field_mT=float(np.min(state["b_sensor"])) + 1.0))
    assert state["sensor_ok"] and not sizing._field_state(stricter, temps, crane.magnet.airgap_mm, 0.2)["sensor_ok"]
    later = replace(crane, latches=replace(crane.latches, operate_field_mT=crane.latches.operate_field_mT * 1.5))
    assert sizing._field_state(later, temps, crane.magnet.airgap_mm, 0.2)["switching"].hysteresis_deg != \
        state["switching"].hysteresis_deg
    # The sensor error enters the re-sync guard only (count keeping is described here): the fields are shared.
    other_error = sizing._field_state(crane, temps, crane.magnet.airgap_mm, 0.5)
    assert other_error["resync"].guard_deg == pytest.approx(state["resync"].guard_deg + 0.3)
    assert other_error["b_latch"] is state["b_latch"]
    with pytest.raises(ValueError):
        state["b_sensor"][0] = 0.0  # shared between sizings: read-only


def test_the_latch_switch_spread_is_worked_out_again_only_when_an_input_it_reads_changes():
    crane = load_design(DEMO / "camera-crane-joint.toml")
    sizing._switch_spread.cache_clear()
    spread = sizing.latch_switch_spread_from_field(crane)
    unread = replace(crane, latches=replace(crane.latches, switch_point_tolerance_deg=7.0),
                     battery=replace(crane.battery, capacity_mAh=123.0))
    assert sizing.latch_switch_spread_from_field(unread) == spread
    assert sizing._switch_spread.cache_info().misses == 1
    later = replace(crane.latches, operate_field_mT=crane.latches.operate_field_mT * 1.2)
    for changed in (replace(crane, latches=later),
                    replace(crane, magnet=replace(crane.magnet, airgap_mm=crane.magnet.airgap_mm + 0.4)),
                    replace(crane, requirements=replace(crane.requirements, service_temperature_high_degC=85.0))):
        assert sizing.latch_switch_spread_from_field(changed) != spread
    assert sizing._switch_spread.cache_info().misses == 4


def test_the_budget_temperatures_follow_the_service_range_and_the_calibration_temperature():
    crane = load_design(DEMO / "camera-crane-joint.toml")
    grid = sizing._service_temperatures_degC(crane)
    assert sizing._service_temperatures_degC(replace(crane, name="other")) is grid  # nothing it reads changed
    req = crane.requirements
    hotter = replace(crane, requirements=replace(req, service_temperature_high_degC=60.0))
    assert sizing._service_temperatures_degC(hotter)[-1] == 60.0 and grid[-1] == 45.0
    recal = replace(crane, accuracy=replace(crane.accuracy, calibration_temperature_degC=31.0))
    assert 31.0 in sizing._service_temperatures_degC(recal) and 31.0 not in grid
    with pytest.raises(ValueError):
        grid[0] = 0.0  # shared by every sizing of these temperatures: read-only
