"""Values typed into the dashboard are kept exactly; out-of-range or unreadable ones are shown, not clamped."""

from __future__ import annotations

import html
import shutil
from pathlib import Path

import pytest

pytest.importorskip("ipywidgets")

from turnkit.designfile import load_design, loads_design  # noqa: E402
from turnkit.tuning import tunable  # noqa: E402
from turnkit.ui import Dashboard  # noqa: E402

DEMO = Path(__file__).resolve().parents[2] / "demo"


@pytest.fixture
def gate(tmp_path):
    for sub in ("traces", "sweeps"):
        shutil.copytree(DEMO / sub, tmp_path / sub)
    path = tmp_path / "gate.toml"
    shutil.copy(DEMO / "irrigation-gate-valve.toml", path)
    return path


def test_a_typed_poll_period_is_saved_as_typed(gate):
    # Typing 50 used to save "50.2377286301916 ms", the log slider's nearest step.
    dash = Dashboard(gate, debounce_s=0)
    dash.type_value("schedule.poll_period_ms", "50")
    assert dash.error == ""
    assert dash.design.schedule.poll_period_ms == 50.0
    dash.save()
    assert 'poll_period = "50 ms"' in gate.read_text(encoding="utf-8")
    assert load_design(gate).schedule.poll_period_ms == 50.0


def test_a_typed_quantity_with_another_unit_is_converted(gate):
    dash = Dashboard(gate, debounce_s=0)
    dash.type_value("schedule.poll_period_ms", "0.04 s")
    assert dash.design.schedule.poll_period_ms == pytest.approx(40.0, rel=1e-15)


@pytest.mark.parametrize(("text", "words"), [("1e9", "outside this control's range"), ("1,5 ms", "decimal point"),
                                             ("5 mm", "convertible to ms")])
def test_a_value_that_cannot_be_applied_is_shown_and_not_clamped(gate, text, words):
    dash = Dashboard(gate, debounce_s=0)
    before = dash.design
    dash.type_value("schedule.poll_period_ms", text)
    assert words in dash.error
    assert words in html.unescape(dash.message.value)
    assert dash.design == before


def test_a_save_after_someone_else_changed_the_file_is_refused_in_the_dashboard(gate):
    dash = Dashboard(gate, debounce_s=0)
    dash.type_value("schedule.poll_period_ms", "30")
    edited = gate.read_text(encoding="utf-8").replace('bits = 16', 'bits = 20')
    gate.write_text(edited, encoding="utf-8")
    dash._click(dash.save)
    assert "changed on disk since" in dash.message.value
    assert gate.read_text(encoding="utf-8") == edited


PLANETARY = """\
format_version = 1
name = "planet"

[[gear_train]]
kind = "planetary"
sun_teeth = 12
ring_teeth = 48
planet_teeth = 18
held = "ring"
input = "sun"
output = "carrier"

[[power.consumers]]
name = "all"
asleep = "1 uA"
waking = "1 mA"
polling = "1 mA"
tracking = "1 mA"
"""


def test_a_ring_teeth_change_says_what_it_did_to_the_planets():
    design = loads_design(PLANETARY)
    ring = tunable(design, "gear_train[0].ring_teeth")
    assert "18 to 19" in ring.explain(design, ring.set(design, 50))
    assert "cleared" in ring.explain(design, ring.set(design, "51"))
    dash = Dashboard(design, debounce_s=0)
    dash.set(**{"gear_train[0].ring_teeth": 50})
    assert "planet teeth changed from 18 to 19" in dash.message.value
