"""The notebook dashboard without a browser: controls drive plot sources, readouts and checks.

Two kinds of test: against a small stand-in (a toy design, a toy sizing
function returning hand-made results, a tiny control table), which pins the
widget layer's own behaviour exactly; and against the real demo designs,
which shows the layer works with the real sizing engine and design files.
Widgets run without a front end, as in ipywidgets' own tests: observers fire
in Python when a value is set.
"""

from __future__ import annotations

import html
import json
import math
import shutil
import sys
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Callable

import numpy as np
import pytest

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

from turnkit.errors import DesignValueError  # noqa: E402
from turnkit.result import Band, Check, Curve, Marker, Scenario, Series, SizingResult, Value, micro_sign  # noqa: E402
from turnkit.ui import plots  # noqa: E402
from turnkit.ui.dashboard import Dashboard  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
DEMOS = ("irrigation-gate-valve", "window-shade-winder", "camera-crane-joint")


# ---------------------------------------------------------------- stand-in layer
@dataclass(frozen=True, slots=True)
class ToyDesign:
    name: str = "toy winder"
    reduction: float = 50.0
    poll_period_ms: float = 10.0
    sleep_current_uA: float = 2.0
    cells: int = 1

    def __post_init__(self):
        if self.poll_period_ms <= 0.5:
            raise DesignValueError("schedule.poll_period", self.poll_period_ms, "> 0.5", unit="ms")


@dataclass(frozen=True, slots=True)
class ToyTunable:
    key: str
    label: str
    unit: str
    minimum: float
    maximum: float
    log: bool
    step: float
    get: Callable
    set: Callable


def toy_tunables():
    def setter(attr, cast=float):
        return lambda d, v: replace(d, **{attr: cast(v)})

    return (
        ToyTunable("reduction", "Overall reduction", "", 5, 500, True, 0.01,
                   lambda d: d.reduction, setter("reduction")),
        ToyTunable("poll_period_ms", "Poll period", "ms", 0.1, 1000, True, 0.01,
                   lambda d: d.poll_period_ms, setter("poll_period_ms")),
        ToyTunable("sleep_current_uA", "Sleep current", "uA", 0.1, 100, True, 0.01,
                   lambda d: d.sleep_current_uA, setter("sleep_current_uA")),
        ToyTunable("cells", "Cells in parallel", "", 1, 4, False, 1,
                   lambda d: d.cells, setter("cells", int)),
    )


def toy_life_years(d: ToyDesign, period_ms):
    # A toy model only: fixed wake charge per poll on top of the sleep floor.
    avg_uA = d.sleep_current_uA + 50.0 / np.asarray(period_ms, dtype=float)
    return 1000.0 * d.cells / avg_uA / 8.766


def toy_size(d: ToyDesign) -> SizingResult:
    periods = np.geomspace(0.5, 1000, 60)
    life = toy_life_years(d, periods)
    max_period_ms = 3000.0 / d.reduction
    here = float(toy_life_years(d, d.poll_period_ms))
    reductions = np.geomspace(5, 500, 40)
    curves = (
        Curve("life_vs_poll_period", "Battery life vs poll period", "poll period", "ms", "battery life",
              "years", (Series("battery life", periods, life),),
              markers=(Marker("this design", d.poll_period_ms, here),),
              bands=(Band("too slow to follow back-drive", max_period_ms, math.inf),),
              vlines=(Marker("longest safe poll period", max_period_ms, 0.0),), log_x=True, log_y=True),
        Curve("resolution_vs_reduction", "Resolution vs reduction", "reduction", "", "output resolution",
              "mm", (Series("output resolution", reductions, 2.0 / reductions),),
              markers=(Marker("this design", d.reduction, 2.0 / d.reduction),), log_x=True, log_y=True),
        Curve("backdrive_event", "Back-drive event", "time", "ms", "motor position", "quarter-turns",
              (Series("true", np.arange(10.0), np.arange(10.0)),
               Series("decoded", np.arange(10.0), np.floor(np.arange(10.0) / 2) * 2, style="step"),
               Series("polls", np.arange(0, 10, 2.0), np.arange(0, 10, 2.0), style="points"))),
        Curve("current_profile", "Current over one poll cycle", "time", "ms", "current", "uA",
              (Series("current", [0, 0.2, 0.2, d.poll_period_ms], [500, 500, d.sleep_current_uA,
                                                                   d.sleep_current_uA], style="step"),),
              note=f"duty cycle {0.2 / d.poll_period_ms * 100:.3g} %"),
        Curve("sensor_error", "Sensor angle error", "shaft angle", "deg", "angle error", "deg",
              (Series("before calibration", np.arange(0, 360, 10.0), np.sin(np.arange(0, 360, 10.0))),
               Series("after calibration", np.arange(0, 360, 10.0), np.zeros(36)))),
    )
    checks = (
        Check("battery_life", "Battery lasts the required life", here, 5.0, "years", ">=",
              advice="" if here >= 5 else "poll less often or lower the sleep current"),
        Check("poll_period", "Poll fast enough for back-drive", d.poll_period_ms, max_period_ms, "ms", "<=",
              advice="poll more often"),
    )
    return SizingResult(
        design_name=d.name, design_hash="0" * 64, turnkit_version="test", output_unit="mm",
        values=(Value("battery_life_years", "battery life", here, "years", "battery"),
                Value("output_resolution_mm", "output resolution", 2.0 / d.reduction, "mm", "gear train")),
        checks=checks,
        scenarios=(Scenario("hand-wheel <spin>", "constant", 1.0, 300.0, 100, 0, 0, 0, 0, 0.01, "mm"),),
        curves=curves,
        warnings=("a <b>warning</b> & more",),
        cautions=("a powered actuator can pinch",),
    )


@pytest.fixture(scope="module")
def _toy_dashboard():
    # Building Bokeh figures takes about a second; share one dashboard and reset it.
    return Dashboard(ToyDesign(), size=toy_size, tunables=toy_tunables())


@pytest.fixture
def toy(_toy_dashboard):
    _toy_dashboard.reset()
    _toy_dashboard.files.value = ""
    assert _toy_dashboard.design == ToyDesign()
    return _toy_dashboard


def _life_text(dash) -> str:
    return dash.readouts["life"].value


# ---------------------------------------------------------------- stand-in tests
def test_dashboard_builds_one_control_per_tunable_with_units_in_labels(toy):
    assert list(toy.controls) == ["reduction", "poll_period_ms", "sleep_current_uA", "cells"]
    assert "Poll period (ms)" in toy.labels["poll_period_ms"].value
    assert "Sleep current (µA)" in toy.labels["sleep_current_uA"].value
    assert toy.controls["poll_period_ms"].tooltip == "Poll period (ms)"
    assert type(toy.controls["poll_period_ms"]).__name__ == "FloatLogSlider"
    assert type(toy.controls["cells"]).__name__ == "IntSlider"
    assert "tk-control-poll-period-ms" in toy.controls["poll_period_ms"]._dom_classes


def test_log_slider_spans_the_tunable_range_in_decades(toy):
    s = toy.controls["poll_period_ms"]
    assert (s.base, s.min, s.max) == (10.0, -1.0, 3.0)
    assert s.value == pytest.approx(10.0)


def test_moving_poll_period_replaces_plot_data_and_readout(toy):
    fig = toy.figures["life_vs_poll_period"]
    before_marker = dict(fig.markers.data)
    before_life = _life_text(toy)
    figure_id = fig.figure.id
    source_id = fig.markers.id
    toy.controls["poll_period_ms"].value = 100.0
    assert toy.design.poll_period_ms == pytest.approx(100.0)
    assert fig.markers.data["x"][0] == pytest.approx(100.0)
    assert fig.markers.data["y"][0] == pytest.approx(float(toy_life_years(toy.design, 100.0)))
    assert fig.markers.data["y"][0] > before_marker["y"][0]
    assert _life_text(toy) != before_life
    # Same figure and source objects: data replaced in place, nothing re-created.
    assert toy.figures["life_vs_poll_period"].figure.id == figure_id
    assert toy.figures["life_vs_poll_period"].markers.id == source_id


def test_life_readout_shows_the_result_value_with_its_unit(toy):
    toy.controls["poll_period_ms"].value = 100.0
    expected = toy.result.value("battery_life_years").formatted()
    assert "years" in expected
    assert f"id='tk-life-value'>{expected}<" in _life_text(toy)


def test_reduction_moves_resolution_marker_and_limit_line(toy):
    toy.controls["reduction"].value = 200.0
    res = toy.figures["resolution_vs_reduction"]
    assert res.markers.data["y"][0] == pytest.approx(0.01)
    life = toy.figures["life_vs_poll_period"]
    assert life.vlines.data["x"][0] == pytest.approx(15.0)
    # The infinite band is drawn to just past the data, never to infinity.
    assert life.bands.data["x0"][0] == pytest.approx(15.0)
    assert np.isfinite(life.bands.data["x1"]).all()


def test_requirement_panel_follows_the_checks(toy):
    toy.controls["poll_period_ms"].value = 100.0   # slower than the 60 ms limit
    panel = toy.requirements.value
    assert "data-key='poll_period'" in panel
    row = panel.split("data-key='poll_period'")[1].split("</tr>")[0]
    assert "FAIL" in row and "poll more often" in row
    assert "tk-fail" in toy._header.value
    toy.controls["poll_period_ms"].value = 10.0
    row = toy.requirements.value.split("data-key='poll_period'")[1].split("</tr>")[0]
    assert "PASS" in row


def test_panel_escapes_text_from_the_design(toy):
    panel = toy.requirements.value
    assert "<b>warning</b>" not in panel
    assert "&lt;b&gt;warning&lt;/b&gt; &amp; more" in panel
    assert "hand-wheel &lt;spin&gt;" in panel
    assert "a powered actuator can pinch" in panel


def test_rejected_value_keeps_last_result_and_shows_the_reason(toy):
    good = toy.result
    toy.controls["poll_period_ms"].value = 0.2
    assert toy.result is good
    assert "schedule.poll_period" in toy.error
    assert "schedule.poll_period" in toy.message.value
    toy.controls["poll_period_ms"].value = 20.0
    assert toy.error == "" and toy.message.value == ""
    assert toy.design.poll_period_ms == pytest.approx(20.0)


def test_a_plot_the_result_no_longer_has_is_hidden_not_left_stale():
    def size_without_sensor_plot_for_two_cells(d):
        r = toy_size(d)
        if d.cells == 2:
            r = replace(r, curves=tuple(c for c in r.curves if c.key != "sensor_error"))
        return r

    dash = Dashboard(ToyDesign(), size=size_without_sensor_plot_for_two_cells, tunables=toy_tunables())
    dash.set(cells=2)
    assert dash.plot_widgets["sensor_error"].layout.display == "none"
    assert dash.plot_widgets["life_vs_poll_period"].layout.display is None
    dash.set(cells=1)
    assert dash.plot_widgets["sensor_error"].layout.display is None


def test_set_rejects_unknown_control_keys(toy):
    with pytest.raises(TypeError, match="unknown control 'gear_teeth'"):
        toy.set(gear_teeth=12)


def test_set_applies_several_controls_at_once(toy):
    toy.set(poll_period_ms=50.0, cells=2)
    assert toy.controls["poll_period_ms"].value == pytest.approx(50.0)
    assert toy.controls["cells"].value == 2
    assert toy.result.value("battery_life_years").value == pytest.approx(
        float(toy_life_years(ToyDesign(poll_period_ms=50.0, cells=2), 50.0)))


def test_reset_returns_to_the_design_as_loaded(toy):
    toy.controls["poll_period_ms"].value = 70.0
    toy.reset()
    assert toy.design == ToyDesign()
    assert toy.controls["poll_period_ms"].value == pytest.approx(10.0)
    assert toy.figures["life_vs_poll_period"].markers.data["x"][0] == pytest.approx(10.0)


def test_save_is_disabled_without_a_design_file(toy):
    assert toy.save_button.disabled
    toy._click(toy.save)
    assert "no design file" in toy.message.value


def test_export_writes_three_named_files_with_the_injected_writer(tmp_path):
    written = []
    dash = Dashboard(ToyDesign(), size=toy_size, tunables=toy_tunables(), export_dir=tmp_path,
                     export=lambda result, path, overwrite: written.append((result.design_name, path, overwrite)))
    paths = dash.export()
    assert [p.name for p in paths] == ["toy-winder-summary.html", "toy-winder-summary.md",
                                       "toy-winder-summary.json"]
    assert all(w[2] is True and w[0] == "toy winder" for w in written)
    for p in paths:
        assert p.name in dash.files.value


def test_debounce_must_be_a_non_negative_number():
    with pytest.raises(ValueError, match="debounce_s"):
        Dashboard(ToyDesign(), size=toy_size, tunables=toy_tunables(), debounce_s=-1)


def test_drag_values_from_the_browser_are_coalesced_into_one_update():
    import asyncio

    calls = []

    def counting_size(d):
        calls.append(d.poll_period_ms)
        return toy_size(d)

    async def drag():
        dash = Dashboard(ToyDesign(), size=counting_size, tunables=toy_tunables(), debounce_s=0.05)
        slider = dash.controls["poll_period_ms"]
        for v in (11.0, 12.0, 13.0, 14.0):
            _from_front_end(slider, v)
        assert dash.design.poll_period_ms == 10.0   # nothing applied yet
        await asyncio.sleep(0.2)
        return dash

    # A loop of its own in a thread: the browser test's session may hold this thread's loop.
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(1) as pool:
        dash = pool.submit(asyncio.run, drag()).result(timeout=30)
    assert calls == [10.0, 14.0]
    assert dash.figures["life_vs_poll_period"].markers.data["x"][0] == pytest.approx(14.0)


def _from_front_end(slider, value):
    # What ipywidgets does with a state message from the browser.
    with slider._lock_property(value=value), slider.hold_trait_notifications():
        slider.value = value


def test_browser_rounding_of_a_value_to_the_slider_step_does_not_change_the_design():
    dash = Dashboard(ToyDesign(poll_period_ms=20.0), size=toy_size, tunables=toy_tunables(), debounce_s=0)
    slider = dash.controls["poll_period_ms"]
    snapped = 10 ** (round(math.log10(20.0) / slider.step) * slider.step)   # 19.95: what the page sends back
    assert snapped != 20.0
    _from_front_end(slider, snapped)
    assert dash.design.poll_period_ms == 20.0
    _from_front_end(slider, 10 ** (math.log10(snapped) + slider.step))      # one real step
    assert dash.design.poll_period_ms == pytest.approx(10 ** (math.log10(snapped) + slider.step))


def test_importing_the_ui_package_loads_no_widget_or_plotting_module():
    import subprocess

    code = ("import sys, turnkit.ui\n"
            "print([m for m in ('bokeh', 'ipywidgets', 'jupyter_bokeh') if m in sys.modules])")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"


def test_building_a_dashboard_does_not_load_bokehjs(monkeypatch):
    import bokeh.io

    called = []
    monkeypatch.setattr(bokeh.io, "output_notebook", lambda *a, **k: called.append(a))
    Dashboard(ToyDesign(), size=toy_size, tunables=toy_tunables())
    assert called == []


# ---------------------------------------------------------------- plots alone
def _curve(y_scale=1.0, names=("a", "b")):
    x = np.linspace(1, 10, 5)
    return Curve("k", "T", "time", "s", "speed", "rpm",
                 tuple(Series(n, x, x * y_scale * (i + 1)) for i, n in enumerate(names)),
                 markers=(Marker("here", 2.0, 4.0),))


def test_update_swaps_series_data_without_new_renderers():
    h = plots.build_figure(_curve())
    n = len(h.figure.renderers)
    plots.update(h, _curve(3.0))
    assert n == len(h.figure.renderers)
    np.testing.assert_allclose(h.series["b"].data["y"], np.linspace(1, 10, 5) * 6.0)


def test_update_leaves_unchanged_sources_alone():
    h = plots.build_figure(_curve())
    changed = []
    for name, source in h.series.items():
        source.on_change("data", lambda attr, old, new, name=name: changed.append(name))
    h.markers.on_change("data", lambda attr, old, new: changed.append("markers"))
    plots.update(h, _curve())
    assert changed == []
    plots.update(h, replace(_curve(), series=(
        _curve().series[0], Series("b", np.linspace(1, 10, 5), np.ones(5)))))
    assert changed == ["b"]


def test_update_empties_a_vanished_series_and_adds_a_new_one():
    h = plots.build_figure(_curve())
    plots.update(h, _curve(names=("a", "c")))
    assert len(h.series["b"].data["x"]) == 0
    assert len(h.series["c"].data["x"]) == 5


def test_update_refuses_a_curve_of_another_key():
    h = plots.build_figure(_curve())
    with pytest.raises(ValueError, match="draws curve 'k'"):
        plots.update(h, replace(_curve(), key="other"))


def test_axis_labels_carry_units_and_hover_tools_exist():
    from bokeh.models import HoverTool

    h = plots.build_figure(_curve())
    assert h.figure.xaxis[0].axis_label == "time [s]"
    assert h.figure.yaxis[0].axis_label == "speed [rpm]"
    assert sum(isinstance(t, HoverTool) for t in h.figure.tools) >= 2


def test_series_colours_are_the_okabe_ito_palette_in_order():
    # Source: B. Wong, Nature Methods 8, 441 (2011), Fig. 2 — the eight colours.
    assert set(plots.OKABE_ITO.values()) == {"#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442",
                                            "#0072B2", "#D55E00", "#CC79A7"}
    h = plots.build_figure(_curve())
    colours = [r.glyph.line_color for r in h.figure.renderers if r.name in ("a", "b")]
    assert colours == list(plots.SERIES_COLOURS[:2])


def test_caption_names_the_marked_point_with_units():
    h = plots.build_figure(_curve())
    assert "here: 2 s → 4 rpm" in h.caption.text


# ---------------------------------------------------------------- the real thing
def _demo(name: str) -> Path:
    path = ROOT / "demo" / f"{name}.toml"
    if not path.exists():
        pytest.fail(f"demo design {path} is missing")
    return path


def _poll_key(dash) -> str:
    assert "schedule.poll_period_ms" in dash.controls, list(dash.controls)
    return "schedule.poll_period_ms"


@pytest.fixture(scope="module")
def demo_dashboards():
    return {name: Dashboard(_demo(name)) for name in DEMOS}


@pytest.fixture
def demo(demo_dashboards, request):
    dash = demo_dashboards[request.param]
    dash.reset()
    return dash


@pytest.mark.parametrize("demo", DEMOS, indirect=True)
def test_demo_dashboard_draws_every_curve_of_the_result(demo):
    assert set(demo.figures) == {c.key for c in demo.result.curves}
    assert {"life_vs_poll_period", "backdrive_event", "resolution_vs_reduction", "current_profile",
            "sensor_error"} <= set(demo.figures)
    for key, handles in demo.figures.items():
        curve = demo.result.curve(key)
        for series in curve.series:
            np.testing.assert_array_equal(handles.series[series.name].data["y"], series.y)


@pytest.mark.parametrize("demo", DEMOS, indirect=True)
def test_demo_controls_are_labelled_with_their_unit_once(demo):
    for key, tunable in zip(demo.controls, demo.tunables):
        text = demo.labels[key].value
        # Labels show the micro sign: "(µs)", where the tunable's own unit is "us".
        assert html.escape(micro_sign(tunable.label)) in text
        if tunable.unit:
            assert text.count(f"({html.escape(micro_sign(tunable.unit))})") == 1, text
    assert type(demo.controls["schedule.poll_period_ms"]).__name__ == "FloatLogSlider"


@pytest.mark.parametrize("demo", DEMOS, indirect=True)
def test_demo_log_sliders_hold_the_design_value_on_a_step(demo):
    # Otherwise the page would round the value and send it back as a change.
    for key, control in demo.controls.items():
        if type(control).__name__ == "FloatLogSlider":
            steps = (math.log10(control.value) - control.min) / control.step
            assert steps == pytest.approx(round(steps), abs=1e-6), key


@pytest.mark.parametrize("demo", DEMOS, indirect=True)
def test_demo_dashboard_follows_the_poll_period_slider(demo):
    dash = demo
    key = _poll_key(dash)
    slider = dash.controls[key]
    fig = dash.figures["life_vs_poll_period"]
    marker_before = np.array(fig.markers.data["x"], dtype=float)
    readout_before = dash.readouts["life"].value
    new = slider.value * 2.0 if slider.value * 2.0 <= 10 ** slider.max else slider.value / 2.0
    slider.value = new
    assert dash.error == ""
    assert not np.allclose(np.array(fig.markers.data["x"], dtype=float), marker_before)
    assert dash.readouts["life"].value != readout_before
    assert dash.result.value("service_life_years").formatted() in dash.readouts["life"].value


@pytest.mark.parametrize("demo", ["irrigation-gate-valve"], indirect=True)
def test_demo_teeth_slider_moves_the_resolution_marker(demo):
    from turnkit.sizing import size

    before = float(demo.figures["resolution_vs_reduction"].markers.data["x"][0])
    slider = demo.controls["gear_train[0].teeth_driven"]
    assert type(slider).__name__ == "IntSlider"
    slider.value = slider.value + 8
    after = float(demo.figures["resolution_vs_reduction"].markers.data["x"][0])
    assert after > before
    expected = size(demo.design, base_dir=ROOT / "demo").curve("resolution_vs_reduction").markers[0]
    assert after == pytest.approx(expected.x)
    assert float(demo.figures["resolution_vs_reduction"].markers.data["y"][0]) == pytest.approx(expected.y)


@pytest.mark.parametrize("demo", ["camera-crane-joint"], indirect=True)
def test_demo_battery_choice_is_a_drop_down_that_changes_the_life(demo):
    dropdown = demo.controls["battery.chemistry"]
    assert type(dropdown).__name__ == "Dropdown"
    assert dict(dropdown.options)["lithium manganese dioxide 2032 coin"] == "li_mno2_2032"
    life_before = demo.result.value("battery_life_years").value
    dropdown.value = "li_socl2_aa"
    assert demo.error == ""
    assert demo.design.battery.chemistry == "li_socl2_aa"
    assert demo.result.value("battery_life_years").value > life_before
    assert demo.result.value("service_life_years").formatted() in demo.readouts["life"].value


@pytest.mark.parametrize("demo", ["camera-crane-joint"], indirect=True)
def test_demo_failing_requirement_shows_its_advice(demo):
    failed = demo.result.failed_checks
    assert failed, "the camera-crane demo is expected to fail a requirement"
    for check in failed:
        row = demo.requirements.value.split(f"data-key='{check.key}'")[1].split("</tr>")[0]
        assert "FAIL" in row
        if check.advice:
            assert html.escape(check.advice) in row


def test_demo_save_and_export_round_trip(tmp_path):
    from turnkit.designfile import load_design

    src = _demo("window-shade-winder")
    path = tmp_path / src.name
    shutil.copy(src, path)
    shutil.copytree(src.parent / "traces", tmp_path / "traces")
    dash = Dashboard(path, export_dir=tmp_path)
    key = _poll_key(dash)
    dash.controls[key].value = dash.controls[key].value / 2.0
    assert dash.error == ""
    dash.save_button.click()
    assert dash.error == "", dash.error
    assert load_design(path) == dash.design
    dash.export_button.click()
    assert dash.error == "", dash.error
    for suffix in ("html", "md", "json"):
        assert (tmp_path / f"window-shade-winder-summary.{suffix}").exists()
        assert f"window-shade-winder-summary.{suffix}" in dash.files.value
    data = json.loads((tmp_path / "window-shade-winder-summary.json").read_text())
    assert json.dumps(data).count(dash.result.design_name) >= 1


@pytest.mark.parametrize("demo", ["irrigation-gate-valve"], indirect=True)
def test_demo_airgap_grade_and_temperature_controls_drive_the_accuracy_and_field_checks(demo):
    for key in ("magnet.airgap_mm", "magnet.grade", "requirements.service_temperature_low_degC",
                "requirements.service_temperature_high_degC"):
        assert key in demo.controls, list(demo.controls)
    assert type(demo.controls["magnet.grade"]).__name__ == "Dropdown"
    budget = demo.figures["accuracy_vs_temperature"]
    waterfall = demo.figures["accuracy_waterfall"].figure.xaxis[0]
    first_part = demo.result.curve("accuracy_waterfall").note.split("; ")[0]
    assert first_part.startswith("1: " + waterfall.major_label_overrides[1] + " ")
    demo.controls["magnet.airgap_mm"].value = demo.controls["magnet.airgap_mm"].max
    assert demo.error == ""
    row = demo.requirements.value.split("data-key='magnet_field_at_sensor'")[1].split("</tr>")[0]
    assert "FAIL" in row and "airgap to at most" in row
    demo.controls["requirements.service_temperature_high_degC"].value = 70.0
    np.testing.assert_array_equal(budget.series["worst case"].data["x"],
                                  demo.result.curve("accuracy_vs_temperature").series[0].x)
    assert max(budget.series["worst case"].data["x"]) == 70.0
    demo.controls["magnet.grade"].value = "smco5"
    assert demo.design.magnet.grade == "smco5" and demo.error == ""


@pytest.mark.parametrize("demo", ["irrigation-gate-valve"], indirect=True)
def test_demo_moves_load_and_cold_move_the_life_and_its_checks(demo):
    # The gate valve passes with little to spare: daily moves, a heavier gate or a colder site fail.
    assert demo.result.check("battery_life").passed and demo.result.check("brown_out").passed
    life_before = demo.readouts["life"].value
    for key, value, fails in (("power.moves_per_day", 1.0, "battery_life"),
                              ("power.move_load_N", 80.0, "brown_out"),
                              ("power.motor_start_current_mA", 3000.0, "brown_out"),
                              ("battery.temperature_min_degC", -25.0, "brown_out")):
        demo.reset()
        demo.set(**{key: value})
        assert demo.error == ""
        assert demo.readouts["life"].value != life_before
        assert not demo.result.check(fails).passed
        row = demo.requirements.value.split(f"data-key='{fails}'")[1].split("</tr>")[0]
        assert "FAIL" in row
