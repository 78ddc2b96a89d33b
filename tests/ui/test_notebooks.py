"""Every notebook runs headless (nbclient) and its dashboard answers a slider.

The notebooks are copied with the demo designs into a temporary folder, so
running them never writes into the repository. A check cell appended at test
time moves the poll-period slider and asserts that the battery-life readout
and the life-versus-poll-period marker changed (widget observers fire in the
kernel without a front end).
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

ROOT = Path(__file__).resolve().parents[2]
NOTEBOOKS = ROOT / "notebooks"
TEMPLATE = NOTEBOOKS / "template.ipynb"
PACKAGED_TEMPLATE = ROOT / "turnkit" / "templates" / "notebook.ipynb"
DEMOS = ("irrigation-gate-valve", "window-shade-winder", "camera-crane-joint")

CHECK_CELL = """
import numpy as np

key = next(k for k in dashboard.controls if k == "schedule.poll_period_ms")
slider = dashboard.controls[key]
life_before = dashboard.readouts["life"].value
marker = dashboard.figures["life_vs_poll_period"].markers
x_before = np.array(marker.data["x"], dtype=float)
slider.value = slider.value * 2 if slider.value * 2 <= 10 ** slider.max else slider.value / 2
assert dashboard.error == "", dashboard.error
assert dashboard.readouts["life"].value != life_before
assert not np.allclose(np.array(marker.data["x"], dtype=float), x_before)
assert dashboard.result.value("service_life_years").formatted() in dashboard.readouts["life"].value
print("check passed:", key, slider.value)
"""


def _run(path: Path, cwd: Path) -> nbformat.NotebookNode:
    nb = nbformat.read(path, as_version=4)
    nb.cells.append(nbformat.v4.new_code_cell(CHECK_CELL))
    client = nbclient.NotebookClient(nb, timeout=180, kernel_name="python3",
                                     resources={"metadata": {"path": str(cwd)}})
    client.execute()
    out = "".join(o.get("text", "") for o in nb.cells[-1].outputs if o.get("output_type") == "stream")
    assert "check passed" in out
    return nb


def _all_notebooks() -> list[Path]:
    return sorted(NOTEBOOKS.glob("*.ipynb")) + [PACKAGED_TEMPLATE]


@pytest.mark.parametrize("path", _all_notebooks(), ids=lambda p: p.name)
def test_notebook_is_saved_without_outputs(path):
    # Executed notebooks embed BokehJS (megabytes): only clean ones are kept.
    nb = json.loads(path.read_text(encoding="utf-8"))
    for cell in nb["cells"]:
        if cell["cell_type"] == "code":
            assert cell["outputs"] == [], f"{path.name}: a code cell has saved outputs"
            assert cell["execution_count"] is None
    assert path.stat().st_size < 20_000


def test_packaged_template_is_the_notebooks_template():
    assert PACKAGED_TEMPLATE.read_bytes() == TEMPLATE.read_bytes()


def test_template_opens_design_toml_in_its_first_code_cell():
    # `turnkit new NAME` replaces "design.toml" in code cells by "NAME.toml".
    nb = nbformat.read(TEMPLATE, as_version=4)
    first = next(c for c in nb.cells if c.cell_type == "code")
    assert 'DESIGN = "design.toml"' in first.source
    assert "Dashboard(DESIGN)" in first.source


@pytest.mark.parametrize("name", DEMOS)
def test_demo_notebook_loads_its_demo_design(name):
    text = (NOTEBOOKS / f"{name}.ipynb").read_text(encoding="utf-8")
    assert f'../demo/{name}.toml' in text


@pytest.fixture(scope="module")
def workspace(tmp_path_factory):
    root = tmp_path_factory.mktemp("notebooks")
    shutil.copytree(NOTEBOOKS, root / "notebooks")
    shutil.copytree(ROOT / "demo", root / "demo")
    return root


@pytest.mark.parametrize("name", DEMOS)
def test_demo_notebook_runs_and_its_dashboard_follows_the_slider(name, workspace):
    _run(workspace / "notebooks" / f"{name}.ipynb", workspace / "notebooks")


def test_new_project_notebook_runs_on_its_own_design_file(tmp_path):
    from turnkit.cli import main

    assert main(["new", "vent-opener", "--dir", str(tmp_path)]) == 0
    nb = _run(tmp_path / "vent-opener.ipynb", tmp_path)
    assert 'DESIGN = "vent-opener.toml"' in nb.cells[1].source
