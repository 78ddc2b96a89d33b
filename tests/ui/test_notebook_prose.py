"""Numbers that the demo notebooks' text quotes agree with what sizing gives for the same design."""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest

from turnkit.designfile import load_design
from turnkit.sizing import size

ROOT = Path(__file__).resolve().parents[2]
_WORDS = {"one": 1, "two": 2, "three": 3, "four": 4, "five": 5, "six": 6, "seven": 7, "eight": 8, "nine": 9,
          "ten": 10}


def _prose(name: str) -> str:
    cells = json.loads((ROOT / "notebooks" / f"{name}.ipynb").read_text(encoding="utf-8"))["cells"]
    text = " ".join("".join(c["source"]) for c in cells if c["cell_type"] == "markdown")
    return re.sub(r"\s+", " ", text)


def _number(text: str) -> float:
    return float(_WORDS.get(text.lower(), text))


def _result(name: str):
    design = load_design(ROOT / "demo" / f"{name}.toml")
    return design, size(design, base_dir=ROOT / "demo")


def _quoted(value: float, quoted: str) -> bool:
    """True when ``value`` rounds to the number as quoted (to its decimals, or its whole number)."""
    decimals = len(quoted.split(".")[1]) if "." in quoted else 0
    return round(value, decimals) == pytest.approx(float(quoted))


# (pattern with one group per quoted number, and what each group must equal)
CLAIMS = {
    "window-shade-winder": [
        (r"\((\d+):1 overall\)", lambda d, r: [r.value("ratio_float").value]),
        (r"up to (\d+) times the tube speed", lambda d, r: [r.value("ratio_float").value]),
        (r"A (\d+) rpm pull on the tube is (\d+) rpm at the motor",
         lambda d, r: [d.requirements.backdrive_speed_rpm, r.value("backdrive_motor_speed_rpm").value]),
        (r"at most ([\d.]+) ms between polls", lambda d, r: [r.value("max_poll_period_ms").value]),
        (r"narrowest quadrant of (\d+)°", lambda d, r: [r.value("narrowest_quadrant_deg").value]),
        (r"needs a poll at least every ([\d.]+) ms", lambda d, r: [r.value("max_poll_period_ms").value]),
        (r"with ([\d.]+) years of battery life", lambda d, r: [r.value("service_life_years").value]),
        (r"must last (\w+) years", lambda d, r: [d.requirements.battery_life_years]),
    ],
    "irrigation-gate-valve": [
        (r"raises a (\d+) mm sluice gate", lambda d, r: [d.requirements.stroke_mm]),
        (r"\(([\d.]+) mm/s at the gate is required\)", lambda d, r: [d.requirements.backdrive_speed_mm_per_s]),
        (r"cells must last (\w+) years", lambda d, r: [d.requirements.battery_life_years]),
    ],
    "camera-crane-joint": [
        (r"\((\d+):1\)", lambda d, r: [r.value("ratio_float").value]),
        (r"up to (\d+) rpm at the joint", lambda d, r: [d.requirements.backdrive_speed_rpm]),
        (r"coin cell holds (\d+) mAh", lambda d, r: [r.value("battery_capacity_mAh").value]),
        (r"waking every (\d+) ms", lambda d, r: [d.schedule.poll_period_ms]),
    ],
}


@pytest.mark.parametrize("name", sorted(CLAIMS))
def test_notebook_text_quotes_the_sizing_result(name):
    text = _prose(name)
    design, result = _result(name)
    found = 0
    for pattern, expected in CLAIMS[name]:
        match = re.search(pattern, text)
        if match is None:
            continue  # the sentence was rewritten; the claims still quoted are checked
        found += 1
        for quoted, value in zip(match.groups(), expected(design, result)):
            assert _quoted(float(value), str(_number(quoted)) if quoted.isalpha() else quoted), \
                f"{name}: the text says {match.group(0)!r}, sizing gives {value}"
    assert found >= 2, f"{name}: the notebook quotes almost none of the numbers this test knows"


def test_window_shade_text_says_the_narrowest_quadrant_sets_the_poll_period():
    # The counter is sure of a step only below the narrowest quadrant (less than a quarter-turn of
    # the motor once the latch tolerances are counted) between polls, never half a revolution.
    text = _prose("window-shade-winder")
    assert "narrowest quadrant" in text
    assert "half a revolution" not in text and "half revolution" not in text
    design, result = _result("window-shade-winder")
    rpm = result.value("backdrive_motor_speed_rpm").value
    width = result.value("narrowest_quadrant_deg").value
    assert width < 90.0
    # Source: (derived, shown in docs/counter.md §6): T_max = w / (6 n) · (1 − m) / (1 + 2 j).
    expected_ms = width / (6.0 * rpm) * (1.0 - design.requirements.counting_margin) \
        / (1.0 + 2.0 * design.schedule.jitter) * 1e3
    assert result.value("max_poll_period_ms").value == pytest.approx(expected_ms)


@pytest.mark.parametrize("name", ["window-shade-winder", "irrigation-gate-valve", "camera-crane-joint", "template"])
def test_notebook_text_says_correct_not_safe_and_describes_the_verdict_colours(name):
    text = _prose(name)
    assert not re.search(r"\b(count|decision) (is |stays )?safe\b", text)
    assert not re.search(r"\bturns red\b|\bred row\b|\bgreen\b", text)
