"""The turnkit command: new, size, schema, lab, help texts and exit codes.

Most `size` tests put a stand-in sizing module in place so they test the
command's own behaviour (exit codes, output files, error reporting) on known
results; one end-to-end test sizes the design template with the real engine.
"""

from __future__ import annotations

import json
import subprocess
import sys
import types
import warnings
from pathlib import Path

import pytest

from test_export import sample_result
from turnkit import TurnkitWarning, cli
from turnkit.cli import EXIT_ERROR, EXIT_FAIL, EXIT_PASS, main
from turnkit.designfile import load_design, loads_design

DESIGN_TEMPLATE = Path(cli.__file__).parent / "templates" / "design.toml"

NOTEBOOK = {
    "cells": [
        {"cell_type": "markdown", "metadata": {}, "source": ["# Sizing notebook\n"]},
        {"cell_type": "code", "metadata": {}, "execution_count": None, "outputs": [],
         "source": ["from turnkit.designfile import load_design\n", "design = load_design('design.toml')\n"]},
    ],
    "metadata": {}, "nbformat": 4, "nbformat_minor": 5,
}


@pytest.fixture
def templates(tmp_path, monkeypatch):
    """A template folder with the real design template and a small notebook template."""
    folder = tmp_path / "templates"
    folder.mkdir()
    (folder / "design.toml").write_text(DESIGN_TEMPLATE.read_text(encoding="utf-8"), encoding="utf-8")
    (folder / "notebook.ipynb").write_text(json.dumps(NOTEBOOK), encoding="utf-8")
    monkeypatch.setattr(cli, "TEMPLATES", folder)
    return folder


@pytest.fixture
def design_file(tmp_path):
    path = tmp_path / "vent.toml"
    path.write_text(DESIGN_TEMPLATE.read_text(encoding="utf-8"), encoding="utf-8")
    return path


def fake_sizing(monkeypatch, result, warn: str | None = None):
    """Replace turnkit.sizing by a module whose size() returns ``result``; record the designs it got."""
    seen = []

    def size(design, *, base_dir=None, curves=True):
        seen.append((design, base_dir, curves))
        if warn:
            warnings.warn(warn, TurnkitWarning)
        return result

    module = types.ModuleType("turnkit.sizing")
    module.size = size
    monkeypatch.setitem(sys.modules, "turnkit.sizing", module)
    return seen


# --- design template ---------------------------------------------------------------

def test_design_template_is_a_valid_commented_design():
    text = DESIGN_TEMPLATE.read_text(encoding="utf-8")
    design = load_design(DESIGN_TEMPLATE)
    assert design.name == "greenhouse roof vent"
    assert [s.KIND for s in design.gear_train] == ["planetary", "external", "rack"]
    assert design.battery is not None and len(design.motion) == 3 and len(design.power.consumers) == 3
    assert design.requirements.backdrive_speed_mm_per_s == 25.0
    assert text.count("\n#") > 20  # explained, not just listed


# --- new ------------------------------------------------------------------------------

def test_new_writes_a_design_and_a_notebook_named_after_the_actuator(tmp_path, templates, capsys):
    out = tmp_path / "designs"
    assert main(["new", "shade winder \"B\"", "--dir", str(out)]) == EXIT_PASS
    design = load_design(out / 'shade winder "B".toml')
    assert design.name == 'shade winder "B"'
    notebook = json.loads((out / 'shade winder "B".ipynb').read_text(encoding="utf-8"))
    code = "".join(notebook["cells"][1]["source"])
    assert "load_design('shade winder \\\"B\\\".toml')" in code
    assert "wrote" in capsys.readouterr().out


def test_new_design_differs_from_the_template_only_in_its_name(tmp_path, templates):
    assert main(["new", "lid-lifter", "--dir", str(tmp_path)]) == EXIT_PASS
    written = (tmp_path / "lid-lifter.toml").read_text(encoding="utf-8").splitlines()
    template = DESIGN_TEMPLATE.read_text(encoding="utf-8").splitlines()
    diff = [(a, b) for a, b in zip(written, template) if a != b]
    assert diff == [('name = "lid-lifter"', 'name = "greenhouse roof vent"')]


def test_new_copies_a_notebook_template_without_a_design_reference_verbatim(tmp_path, templates):
    (templates / "notebook.ipynb").write_text('{"cells": [], "nbformat": 4}', encoding="utf-8")
    assert main(["new", "x", "--dir", str(tmp_path)]) == EXIT_PASS
    assert (tmp_path / "x.ipynb").read_text(encoding="utf-8") == '{"cells": [], "nbformat": 4}'


def test_new_never_overwrites_and_writes_nothing_when_one_file_exists(tmp_path, templates, capsys):
    (tmp_path / "valve.ipynb").write_text("mine")
    assert main(["new", "valve", "--dir", str(tmp_path)]) == EXIT_ERROR
    err = capsys.readouterr().err
    assert "valve.ipynb already exists" in err and "nothing was written" in err
    assert (tmp_path / "valve.ipynb").read_text() == "mine"
    assert not (tmp_path / "valve.toml").exists()


def test_new_names_a_missing_notebook_template(tmp_path, templates, capsys):
    (templates / "notebook.ipynb").unlink()
    assert main(["new", "valve", "--dir", str(tmp_path)]) == EXIT_ERROR
    err = capsys.readouterr().err
    assert "notebook.ipynb" in err and "missing" in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["templates"]


@pytest.mark.parametrize("name", ["sub/valve", "..\\valve", ".hidden", "", " padded"])
def test_new_rejects_names_that_are_not_plain_file_names(tmp_path, templates, capsys, name):
    assert main(["new", name, "--dir", str(tmp_path)]) == EXIT_ERROR
    assert "plain file name" in capsys.readouterr().err


def test_new_accepts_a_name_given_with_its_toml_extension(tmp_path, templates):
    assert main(["new", "valve.toml", "--dir", str(tmp_path)]) == EXIT_PASS
    assert (tmp_path / "valve.toml").is_file() and (tmp_path / "valve.ipynb").is_file()


def test_real_notebook_template_is_installed_or_new_says_it_is_missing(tmp_path, capsys):
    # Without monkeypatching: whatever the package holds, `new` either works or names the template.
    code = main(["new", "real", "--dir", str(tmp_path)])
    template = cli.TEMPLATES / "notebook.ipynb"
    if template.is_file():
        assert code == EXIT_PASS
        cells = json.loads((tmp_path / "real.ipynb").read_text(encoding="utf-8"))["cells"]
        code_text = "".join("".join(c["source"]) for c in cells if c["cell_type"] == "code")
        if "design.toml" in template.read_text(encoding="utf-8"):
            assert "design.toml" not in code_text and "real.toml" in code_text
    else:
        assert code == EXIT_ERROR and "notebook.ipynb" in capsys.readouterr().err
        assert list(tmp_path.iterdir()) == []


# --- size -----------------------------------------------------------------------------

def test_size_prints_the_summary_and_exits_0_when_all_pass(design_file, monkeypatch, capsys):
    seen = fake_sizing(monkeypatch, sample_result())
    assert main(["size", str(design_file)]) == EXIT_PASS
    out = capsys.readouterr().out
    assert "REQUIREMENTS" in out and "PASS: 3 of 3 requirements met" in out
    design, base_dir, curves = seen[0]
    assert design.name == "greenhouse roof vent"
    assert base_dir == design_file.parent  # trace files are found beside the design file
    assert curves is False  # the printed text has no plots: no need to compute them


def test_size_exits_1_when_a_requirement_fails(design_file, monkeypatch, capsys):
    fake_sizing(monkeypatch, sample_result(fail=True))
    assert main(["size", str(design_file)]) == EXIT_FAIL
    out = capsys.readouterr().out
    assert "FAIL" in out and "poll every 25 ms instead of 10 ms" in out


def test_size_exits_1_when_only_a_motion_scenario_fails(design_file, monkeypatch):
    from turnkit.result import Scenario

    bad = Scenario("push", "constant", 1.0, 900.0, 100, 3, 0, 1, 0, 5.6, "mm")
    fake_sizing(monkeypatch, sample_result(scenarios=(bad,)))
    assert main(["size", str(design_file)]) == EXIT_FAIL


def test_size_exits_2_on_a_bad_design_file_with_the_error_on_stderr(tmp_path, monkeypatch, capsys):
    fake_sizing(monkeypatch, sample_result())
    bad = tmp_path / "bad.toml"
    bad.write_text(DESIGN_TEMPLATE.read_text(encoding="utf-8").replace('poll_period = "15 ms"',
                                                                       'poll_period = "20 mA"'))
    assert main(["size", str(bad)]) == EXIT_ERROR
    captured = capsys.readouterr()
    assert captured.out == ""
    assert "schedule.poll_period" in captured.err and "bad.toml" in captured.err


def test_size_exits_2_on_a_missing_file(tmp_path, monkeypatch, capsys):
    fake_sizing(monkeypatch, sample_result())
    assert main(["size", str(tmp_path / "nope.toml")]) == EXIT_ERROR
    assert "not found" in capsys.readouterr().err


@pytest.mark.parametrize("suffix, probe", [(".html", "<!DOCTYPE html>"), (".md", "| Requirement |"),
                                           (".json", '"format": "turnkit-sizing-summary"')])
def test_size_writes_the_summary_in_the_format_of_the_extension(design_file, tmp_path, monkeypatch, capsys,
                                                                suffix, probe):
    seen = fake_sizing(monkeypatch, sample_result(fail=True))
    out = tmp_path / f"summary{suffix}"
    assert main(["size", str(design_file), "-o", str(out)]) == EXIT_FAIL
    assert seen[0][2] is True  # plot data asked for
    assert probe in out.read_text(encoding="utf-8")
    printed = capsys.readouterr().out
    assert f"wrote {out} (FAIL: Battery lasts at least 5 years failed)" in printed


def test_size_keeps_an_existing_output_unless_overwrite(design_file, tmp_path, monkeypatch, capsys):
    fake_sizing(monkeypatch, sample_result())
    out = tmp_path / "summary.md"
    out.write_text("keep me")
    assert main(["size", str(design_file), "-o", str(out)]) == EXIT_ERROR
    assert "--overwrite" in capsys.readouterr().err and out.read_text() == "keep me"
    assert main(["size", str(design_file), "-o", str(out), "--overwrite"]) == EXIT_PASS
    assert out.read_text(encoding="utf-8").startswith("# Sizing summary")


def test_size_rejects_an_unknown_output_extension_before_sizing(design_file, tmp_path, monkeypatch, capsys):
    seen = fake_sizing(monkeypatch, sample_result())
    assert main(["size", str(design_file), "-o", str(tmp_path / "summary.pdf")]) == EXIT_ERROR
    assert ".html, .md, .json" in capsys.readouterr().err
    assert seen == [] and not (tmp_path / "summary.pdf").exists()


def test_size_reports_engine_warnings_on_stderr_once(design_file, monkeypatch, capsys):
    fake_sizing(monkeypatch, sample_result(), warn="pinion may be undercut")
    assert main(["size", str(design_file)]) == EXIT_PASS
    assert capsys.readouterr().err.count("warning: pinion may be undercut") == 1


def test_size_crash_is_not_mistaken_for_a_failed_requirement(design_file, monkeypatch, capsys):
    module = types.ModuleType("turnkit.sizing")

    def size(design, **kwargs):
        raise ZeroDivisionError("boom")

    module.size = size
    monkeypatch.setitem(sys.modules, "turnkit.sizing", module)
    assert main(["size", str(design_file)]) == EXIT_ERROR
    err = capsys.readouterr().err
    assert "ZeroDivisionError: boom" in err and "internal error" in err


# --- schema, usage, help --------------------------------------------------------------

def test_schema_prints_the_design_file_schema_as_json(capsys):
    from turnkit.designfile import design_schema

    assert main(["schema"]) == EXIT_PASS
    assert json.loads(capsys.readouterr().out) == json.loads(json.dumps(design_schema()))


def test_schema_accepts_the_design_template(capsys):
    import tomllib

    import jsonschema

    main(["schema"])
    schema = json.loads(capsys.readouterr().out)
    jsonschema.validate(tomllib.loads(DESIGN_TEMPLATE.read_text(encoding="utf-8")), schema)


@pytest.mark.parametrize("argv", [[], ["bogus"], ["size"], ["size", "a.toml", "--colour"], ["schema", "x"],
                                  ["new"]])
def test_bad_usage_exits_2_with_usage_on_stderr(argv, capsys):
    assert main(argv) == EXIT_ERROR
    captured = capsys.readouterr()
    assert captured.out == ""
    assert "usage: turnkit" in captured.err


@pytest.mark.parametrize("command", ["new", "size", "schema", "lab"])
def test_every_subcommand_has_help_with_examples(command, capsys):
    assert main([command, "--help"]) == EXIT_PASS
    out = capsys.readouterr().out
    assert "examples:" in out and f"turnkit {command}" in out


def test_top_level_help_lists_commands_and_exit_status(capsys):
    assert main(["--help"]) == EXIT_PASS
    out = capsys.readouterr().out
    for word in ("new", "size", "schema", "lab", "exit status"):
        assert word in out
    assert main(["--version"]) == EXIT_PASS
    assert capsys.readouterr().out.startswith("turnkit ")


def test_python_dash_m_turnkit_runs_the_same_command():
    done = subprocess.run([sys.executable, "-m", "turnkit", "schema"], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 0
    assert json.loads(done.stdout)["type"] == "object"
    bad = subprocess.run([sys.executable, "-m", "turnkit", "size"], capture_output=True, text=True, timeout=120)
    assert bad.returncode == 2 and "FILE" in bad.stderr


# --- lab ------------------------------------------------------------------------------

def test_lab_starts_jupyterlab_on_the_notebook_and_passes_other_options(tmp_path, monkeypatch):
    notebook = tmp_path / "vent.ipynb"
    notebook.write_text("{}")
    calls = []
    monkeypatch.setattr(cli, "_run_forwarding_signals", lambda command: calls.append(command) or 0)
    monkeypatch.setattr(cli.os, "geteuid", lambda: 1000)
    monkeypatch.chdir(tmp_path)
    assert main(["lab", str(notebook), "--port", "8890", "--no-browser"]) == 0
    assert calls == [[sys.executable, "-m", "jupyterlab", str(notebook), "--port", "8890", "--no-browser",
                      "--LabApp.default_url=/lab/tree/vent.ipynb"]]


def test_lab_shows_the_notebooks_folder_when_started_elsewhere(tmp_path, monkeypatch):
    # Lab's file browser must show the folder of the notebook (and its design file).
    (tmp_path / "designs").mkdir()
    notebook = tmp_path / "designs" / "vent.ipynb"
    notebook.write_text("{}")
    (tmp_path / "elsewhere").mkdir()
    monkeypatch.chdir(tmp_path / "elsewhere")
    calls = []
    monkeypatch.setattr(cli, "_run_forwarding_signals", lambda command: calls.append(command) or 0)
    assert main(["lab", str(notebook)]) == 0
    assert f"--ServerApp.root_dir={notebook.parent}" in calls[0]


def test_lab_adds_allow_root_only_when_running_as_root(monkeypatch):
    monkeypatch.setattr(cli.os, "geteuid", lambda: 0)
    assert cli.lab_command(None)[-1] == "--allow-root"
    assert cli.lab_command(None, ["--allow-root"]).count("--allow-root") == 1
    monkeypatch.setattr(cli.os, "geteuid", lambda: 1000)
    assert "--allow-root" not in cli.lab_command(None)


def test_lab_returns_jupyterlabs_exit_status(monkeypatch, tmp_path):
    monkeypatch.chdir(tmp_path)
    monkeypatch.setattr(subprocess, "Popen", lambda command: _Exited(3))
    assert main(["lab"]) == 3


class _Exited:
    """A finished child process with a given exit status."""

    def __init__(self, status):
        self.returncode = status

    def wait(self, timeout=None):
        return self.returncode

    def poll(self):
        return self.returncode


def test_lab_on_a_missing_notebook_exits_2(tmp_path, capsys):
    assert main(["lab", str(tmp_path / "none.ipynb")]) == EXIT_ERROR
    assert "none.ipynb not found" in capsys.readouterr().err


def test_options_meant_for_jupyterlab_are_refused_by_other_commands(capsys):
    assert main(["schema", "--port", "8890"]) == EXIT_ERROR
    assert "unrecognized arguments: --port 8890" in capsys.readouterr().err


def test_loads_design_reads_what_new_writes(tmp_path, templates):
    main(["new", "copy", "--dir", str(tmp_path)])
    text = (tmp_path / "copy.toml").read_text(encoding="utf-8")
    assert loads_design(text).name == "copy"


def test_command_and_export_modules_import_nothing_heavy():
    # `turnkit --help` must stay quick: units, templates and plotting load only when used.
    code = (
        "import sys, turnkit.cli, turnkit.export, turnkit.svgplot\n"
        "bad = [m for m in ('sympy', 'bokeh', 'ipywidgets', 'pint', 'jinja2') if m in sys.modules]\n"
        "print(','.join(bad))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True, timeout=120)
    assert done.stdout.strip() == ""


# --- end to end with the real sizing engine ----------------------------------------------

ROOT = Path(__file__).resolve().parents[1]
DEMOS = sorted((ROOT / "demo").glob("*.toml"))


def test_size_of_the_template_end_to_end(tmp_path, capsys):
    from turnkit.sizing import size

    expected = size(load_design(DESIGN_TEMPLATE), base_dir=DESIGN_TEMPLATE.parent)
    code = main(["size", str(DESIGN_TEMPLATE)])
    out = capsys.readouterr().out
    assert code == (EXIT_PASS if expected.passed else EXIT_FAIL)
    assert out.startswith("Sizing summary: greenhouse roof vent")
    for check in expected.checks:
        row = next(line for line in out.splitlines() if line.strip().startswith(check.label))
        assert row.rstrip().endswith("PASS" if check.passed else "FAIL")
    html = tmp_path / "vent.html"
    assert main(["size", str(DESIGN_TEMPLATE), "-o", str(html)]) == code
    page = html.read_text(encoding="utf-8")
    assert page.count("<svg") == len(expected.curves) > 0
    assert expected.design_hash in page


@pytest.mark.parametrize("design", DEMOS, ids=[p.stem for p in DEMOS])
def test_demo_designs_size_and_export_end_to_end(design, tmp_path):
    # Run as a user would, from another folder: trace files must be found beside the design.
    out = tmp_path / f"{design.stem}.json"
    done = subprocess.run([sys.executable, "-m", "turnkit", "size", str(design), "-o", str(out)],
                          capture_output=True, text=True, timeout=300, cwd=tmp_path)
    assert done.returncode in (EXIT_PASS, EXIT_FAIL), done.stderr
    summary = json.loads(out.read_text(encoding="utf-8"))
    assert summary["format"] == "turnkit-sizing-summary"
    assert done.returncode == (EXIT_PASS if summary["passed"] else EXIT_FAIL)
    assert summary["cautions"] and summary["checks"] and summary["curves"]


def test_summary_prints_on_a_terminal_without_unicode(design_file, monkeypatch):
    import io

    fake_sizing(monkeypatch, sample_result(cautions=("Keep below 60 °C.",)))
    raw = io.BytesIO()
    monkeypatch.setattr(sys, "stdout", io.TextIOWrapper(raw, encoding="ascii"))
    assert main(["size", str(design_file)]) == EXIT_PASS
    sys.stdout.flush()
    text = raw.getvalue().decode("ascii")
    assert "Keep below 60 ?C." in text and "<= 0.05 mm" in text


# --- several design files -------------------------------------------------------

_DEMO = Path(__file__).resolve().parents[1] / "demo"


def test_size_several_files_into_a_folder_names_each_summary_and_reports_the_worst(tmp_path, capsys):
    files = [str(_DEMO / f"{n}.toml") for n in ("irrigation-gate-valve", "camera-crane-joint")]
    status = main(["size", *files, "-o", str(tmp_path / "out"), "--format", "json"])
    assert status == EXIT_FAIL  # the crane demo fails on purpose
    written = sorted(p.name for p in (tmp_path / "out").iterdir())
    assert written == ["camera-crane-joint.json", "irrigation-gate-valve.json"]
    verdicts = {p.stem: json.loads(p.read_text())["passed"] for p in (tmp_path / "out").iterdir()}
    assert verdicts == {"irrigation-gate-valve": True, "camera-crane-joint": False}


def test_size_several_files_exits_2_when_any_file_is_bad_but_still_sizes_the_rest(tmp_path, capsys):
    status = main(["size", str(_DEMO / "irrigation-gate-valve.toml"), str(tmp_path / "missing.toml")])
    captured = capsys.readouterr()
    assert status == EXIT_ERROR
    assert "Irrigation gate valve" in captured.out
    assert "missing.toml" in captured.err


def test_size_several_files_refuses_a_file_as_the_output_folder(tmp_path, capsys):
    target = tmp_path / "summary.html"
    target.write_text("keep me")
    files = [str(_DEMO / f"{n}.toml") for n in ("irrigation-gate-valve", "window-shade-winder")]
    assert main(["size", *files, "-o", str(target)]) == EXIT_ERROR
    assert target.read_text() == "keep me"
    assert "folder" in capsys.readouterr().err


def test_design_template_lists_every_cell_of_the_battery_table():
    from turnkit.battery import available_cells

    text = (cli.TEMPLATES / "design.toml").read_text()
    assert all(key in text for key in available_cells())


def test_size_leaves_the_garbage_collector_running_with_the_imported_model_frozen_out_of_it():
    # In a fresh process the model is imported with the collector paused, then frozen out of later
    # collections; the collector runs again for sizing itself and whatever the caller does next.
    code = ("import gc, io, contextlib\nfrom turnkit.cli import main\n"
            "with contextlib.redirect_stdout(io.StringIO()):\n"
            f"    status = main(['size', {str(ROOT / 'demo' / 'camera-crane-joint.toml')!r}])\n"
            "print(status, gc.isenabled(), gc.get_freeze_count() > 0)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.split()
    assert out[1:] == ["True", "True"] and out[0] in ("0", "1")
