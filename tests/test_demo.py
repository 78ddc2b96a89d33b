"""The demo actuators: files present, summaries regenerated after every design change."""

from __future__ import annotations

from pathlib import Path

import pytest

from turnkit.designfile import load_design
from turnkit.sizing import size

DEMO = Path(__file__).resolve().parents[1] / "demo"
NAMES = ["irrigation-gate-valve", "window-shade-winder", "camera-crane-joint"]


@pytest.mark.parametrize("name", NAMES)
def test_demo_summaries_belong_to_the_current_design_file(name):
    # A summary carries the SHA-256 of its design: a design edited without regenerating the
    # summaries (demo/README.md gives the command) fails here.
    result = size(load_design(DEMO / f"{name}.toml"), base_dir=DEMO, curves=False)
    for suffix in (".html", ".md"):
        text = (DEMO / f"{name}{suffix}").read_text(encoding="utf-8")
        assert result.design_hash in text, f"demo/{name}{suffix} is stale: regenerate it"


@pytest.mark.parametrize("name", NAMES)
def test_each_demo_has_a_recorded_trace_that_it_uses(name):
    design = load_design(DEMO / f"{name}.toml")
    traces = [m.trace for m in design.motion if m.kind == "trace"]
    assert traces and all((DEMO / t).is_file() for t in traces)


def test_exactly_the_crane_demo_fails_and_says_what_to_change():
    verdicts = {n: size(load_design(DEMO / f"{n}.toml"), base_dir=DEMO, curves=False) for n in NAMES}
    assert [n for n, r in verdicts.items() if not r.passed] == ["camera-crane-joint"]
    failed = verdicts["camera-crane-joint"].failed_checks
    assert failed and all(c.advice for c in failed)
    text = (DEMO / "camera-crane-joint.md").read_text(encoding="utf-8")
    assert "FAIL" in text and "mAh" in text
