"""What the dashboard and the summary say: header caution, badge wording, units, verdict colours."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

pytest.importorskip("ipywidgets")
pytest.importorskip("jupyter_bokeh")

from turnkit.designfile import load_design  # noqa: E402
from turnkit.export import to_html  # noqa: E402
from turnkit.result import duration_text, micro_sign  # noqa: E402
from turnkit.sizing import GENERAL_CAUTIONS, size  # noqa: E402
from turnkit.ui import dashboard as dash_module  # noqa: E402
from turnkit.ui.dashboard import HEADER_CAUTION, Dashboard  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="module")
def gate():
    return Dashboard(ROOT / "demo" / "irrigation-gate-valve.toml")


@pytest.fixture(scope="module")
def crane():
    return Dashboard(ROOT / "demo" / "camera-crane-joint.toml")


def test_header_carries_the_one_line_caution(gate):
    assert "id='tk-header-caution'" in gate._header.value
    assert "not a safety case" in HEADER_CAUTION and "pinch and crush" in HEADER_CAUTION
    assert "licensed practice" in HEADER_CAUTION
    assert "\n" not in HEADER_CAUTION


def test_badge_counts_what_passes_or_fails(gate, crane):
    r = gate.result
    total = len(r.checks) + len(r.scenarios)
    assert f">{total} of {total} pass</span>" in gate._header.value
    r = crane.result
    failed = len(r.failed_checks) + sum(not s.passed for s in r.scenarios)
    total = len(r.checks) + len(r.scenarios)
    assert failed >= 1
    assert f">{failed} of {total} fail</span>" in crane._header.value
    assert "PASS ·" not in gate._header.value and "FAIL ·" not in crane._header.value


def test_labels_readouts_and_axes_use_the_micro_sign(gate):
    text = " ".join(label.value for label in gate.labels.values())
    assert "(µs)" in text and "(µA)" in text
    assert not re.search(r"\(u[As]\)", text)
    assert gate.readouts["current"].value.count("µA") == 1
    axis = gate.figures["current_profile"].figure.yaxis[0].axis_label
    assert axis.endswith("[µA]")
    assert not re.search(r"\d u[AsC]\b", gate.requirements.value + gate.values_table.value)


def test_micro_sign_leaves_words_alone():
    assert micro_sign("15 uA, 20 us, (uC) [uJ] mAh/uA") == "15 µA, 20 µs, (µC) [µJ] mAh/µA"
    assert micro_sign("let us know; status; users") == "let us know; status; users"


@pytest.mark.parametrize("seconds, text", [(15.49, "15.49 s"), (2592000.0, "30 days"),
                                           (365.25 * 86400, "1 year"), (10 * 365.25 * 86400, "10 years"),
                                           (5400.0, "90 min"), (7200.0, "2 h")])
def test_durations_read_in_days_or_years(seconds, text):
    assert duration_text(seconds) == text


def test_summary_shows_scenario_durations_in_days_not_seconds():
    result = size(load_design(ROOT / "demo" / "window-shade-winder.toml"), base_dir=ROOT / "demo")
    page = to_html(result)
    assert "30 days" in page            # the "daily tugs" scenario runs for 2 592 000 s
    assert "2.592e+06 s" not in page
    assert "Design as read, with defaults" in page


def test_requirement_numbers_do_not_wrap(crane):
    rows = re.findall(r"<tr class='tk-(?:pass|fail)' data-key=[^>]*>(.*?)</tr>", crane.requirements.value)
    assert rows
    for row in rows:
        cells = re.findall(r"<td([^>]*)>", row)
        assert cells[1:4] == [" class='tk-num'"] * 3, row
    assert "td.tk-num { white-space: nowrap; }" in dash_module._CSS


def _rule(css: str, selector: str) -> dict[str, str]:
    body = re.search(re.escape(selector) + r"\s*\{([^}]*)\}", css).group(1)
    return dict((k.strip(), v.strip()) for k, v in (p.split(":", 1) for p in body.split(";") if ":" in p))


def test_one_pass_colour_and_one_fail_colour_in_dashboard_and_summary(crane):
    page = to_html(crane.result)
    for verdict in ("pass", "fail"):
        board = _rule(dash_module._CSS, f".tk-app .tk-badge.tk-{verdict}")
        summary = _rule(page, f".turnkit-summary .{verdict}")
        assert board == summary, verdict
    assert _rule(dash_module._CSS, ".tk-app tr.tk-fail td")["background"] == \
        _rule(page, ".turnkit-summary .fail")["background"]
    # Blue passes, vermillion fails: the colour-blind-safe pair of B. Wong's palette.
    assert _rule(page, ".turnkit-summary .pass")["border-color"] == "#0072B2"
    assert _rule(page, ".turnkit-summary .fail")["border-color"] == "#D55E00"


def test_every_summary_carries_the_hand_wheel_caution():
    assert any("hand wheel or crank" in c and "interlock" in c for c in GENERAL_CAUTIONS)
    result = size(load_design(ROOT / "demo" / "irrigation-gate-valve.toml"), base_dir=ROOT / "demo")
    assert any("hand wheel or crank" in c for c in result.cautions)


def test_capacity_targets_name_their_poll_period(crane):
    values = {v.key: v for v in crane.result.values}
    need = values["capacity_needed_mAh"]
    assert "present poll period" in need.label and "ms" in need.note
    relax = [w for w in crane.result.warnings if "Use a battery of at least" in w]
    assert relax and all("polling every" in w for w in relax)
    advice = crane.result.check("battery_life").advice
    assert "present poll period of" in advice


def test_new_plot_data_make_the_legend_repaint_its_swatches():
    # In the browser the legend's swatches stayed blank after new data moved the axes (changing the
    # battery cell); a change to the legend model makes BokehJS re-render them. Unchanged data send nothing.
    from turnkit.ui import plots

    dash = Dashboard(ROOT / "demo" / "irrigation-gate-valve.toml")
    legend = dash.figures["life_vs_poll_period"].legend
    events = []
    legend.on_change("tags", lambda attr, old, new: events.append(new))
    dash.set(**{"power.sleep_current_uA": 3.0})
    assert len(events) == 1
    plots.update(dash.figures["life_vs_poll_period"], dash.result.curve("life_vs_poll_period"))
    assert len(events) == 1


def test_log_axes_label_one_two_five_steps_and_linear_axes_keep_bokehs(gate):
    from bokeh.models import CustomJSTicker

    h = gate.figures["life_vs_poll_period"]
    assert isinstance(h.figure.xaxis[0].ticker, CustomJSTicker)
    assert isinstance(h.figure.yaxis[0].ticker, CustomJSTicker)
    assert h.figure.xgrid[0].ticker is h.figure.xaxis[0].ticker
    assert "[1, 3], [1, 2, 5]" in h.figure.xaxis[0].ticker.major_code
    event = gate.figures["backdrive_event"].figure
    assert not isinstance(event.xaxis[0].ticker, CustomJSTicker)


def test_current_profile_shows_the_wake_pulse_on_a_log_time_axis(gate):
    curve = gate.result.curve("current_profile")
    assert curve.log_x and curve.x_label == "time since wake-up"
    x, y = curve.series[0].x, curve.series[0].y
    # The pulse (first points) spans at least a decade of the axis, the sleep the rest.
    assert x[0] > 0 and x[1] / x[0] >= 10
    assert y[0] > 100 * y[-1]
    assert "awake" in curve.note and "µs" in micro_sign(curve.note)
