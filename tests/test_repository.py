"""The repository itself: README commands, CI script and import hygiene."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def _readme_commands() -> list[str]:
    text = (ROOT / "README.md").read_text()
    two = text.split("## Two commands", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```bash\n(.*?)\n```", two, flags=re.S)


def test_readme_opens_with_the_job():
    first = (ROOT / "README.md").read_text().split("\n\n")[1]
    for word in ("actuator", "gear", "battery", "counter"):
        assert word in first


def test_readme_has_exactly_two_commands():
    commands = _readme_commands()
    assert len(commands) == 2
    assert all("\n" not in c for c in commands)


def test_ci_runs_the_readme_test_command_verbatim():
    ci = (ROOT / ".ci" / "run").read_text().splitlines()
    assert _readme_commands()[1] in ci


def test_importing_turnkit_loads_no_symbolic_plotting_or_widget_package():
    code = (
        "import sys, turnkit\n"
        "import turnkit.gears, turnkit.sensor, turnkit.latches, turnkit.angle_error, turnkit.calibration\n"
        "import turnkit.counter, turnkit.schedule, turnkit.motion, turnkit.simulation, turnkit.bounds\n"
        "import turnkit.power, turnkit.battery, turnkit.equations, turnkit.design, turnkit.designfile\n"
        "import turnkit.result, turnkit.sizing, turnkit.tuning, turnkit.export, turnkit.explore, turnkit.ui\n"
        "bad = [m for m in ('sympy', 'bokeh', 'ipywidgets', 'jupyter_bokeh', 'pint') if m in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_readme_python_examples_run(monkeypatch):
    monkeypatch.chdir(ROOT)
    text = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```python\n(.*?)\n```", text, flags=re.S)
    assert blocks
    for block in blocks:
        exec(compile(block, "README.md", "exec"), {})


def test_readme_example_numbers_match_the_code(monkeypatch):
    # The comments in the README's first example quote these results.
    monkeypatch.chdir(ROOT)
    from turnkit.designfile import load_design
    from turnkit.sizing import size

    result = size(load_design("demo/camera-crane-joint.toml"), base_dir="demo", curves=False)
    text = (ROOT / "README.md").read_text()
    for key in ("max_poll_period_ms", "battery_life_years"):
        assert f"'{result.value(key).formatted()}'" in text
