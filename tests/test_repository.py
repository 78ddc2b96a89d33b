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


# A `# Source:` comment must let a reader find the work without this repository's history:
# a published work (standard, handbook, paper, patent, reference library), a derivation written
# in docs/, or an honest "(common practice)" / "(from memory)".
_OUTSIDE_WORK = re.compile(
    r"\b(1[89]\d\d|20\d\d)\b"                          # a dated publication
    r"|\b(ISO|IEC|NIST|IEEE|ANSI|UL|CFR|SI Brochure)\b"  # a standard
    r"|\bpatent\b|\b[Ee]q\.|\bExample\b|\bch\. \d|\b\d(st|nd|rd|th) ed\."  # patent, equation, chapter, edition
    r"|\b(Shigley|Modelica|Heydemann)\b"
    r"|\b(numpy|scipy|sympy|pint|mpmath|math\.\w+|Python's)\b"  # an independent reference library
    r"|\(common practice\)|\(from memory\)")
_DERIVED = re.compile(r"\(derived, shown in (docs/[\w.-]+\.md)(?: (§\d+)|, ([^)]+))?\)")
_LOCAL = re.compile(r"reference-checks|\bnotes?/|(?<![\w.])/(?:work|home|tmp|root|Users|mnt)/|\b[A-Z]:\\")
_IN_REPO = re.compile(r"\b(?:tests|turnkit|demo|notebooks|benchmarks)/|\btest_\w+\.py\b|\.ipynb\b")


def _source_comments() -> list[tuple[str, int, str]]:
    """Every `# Source:` comment in the tests with its continuation lines: (file, line, text)."""
    found = []
    for path in sorted((ROOT / "tests").rglob("*.py")):
        lines = path.read_text(encoding="utf-8").splitlines()
        for i, line in enumerate(lines):
            if not line.lstrip().startswith("# Source:"):
                continue
            block = [line.strip()]
            for more in lines[i + 1:]:
                more = more.strip()
                if not more.startswith("#") or more.startswith("# Source:"):
                    break
                block.append(more)
            found.append((str(path.relative_to(ROOT)), i + 1, " ".join(block)))
    return found


def test_every_source_comment_names_a_work_outside_the_repository():
    found = _source_comments()
    assert len(found) > 50
    bad = []
    for where, line, text in found:
        derived = _DERIVED.search(text)
        if derived:
            doc = ROOT / derived.group(1)
            section = derived.group(2) or derived.group(3)
            if not doc.is_file():
                bad.append((where, line, f"{derived.group(1)} does not exist"))
            elif section and section.startswith("§"):
                number = section[1:]
                if not re.search(rf"^##+ (?:§{number}\b|{number}\.)", doc.read_text(encoding="utf-8"), re.M):
                    bad.append((where, line, f"{derived.group(1)} has no section {section}"))
            elif section and section not in doc.read_text(encoding="utf-8"):
                bad.append((where, line, f"{derived.group(1)} has no section {section!r}"))
        elif not _OUTSIDE_WORK.search(text):
            bad.append((where, line, text))
        if _LOCAL.search(text) or _IN_REPO.search(text):
            bad.append((where, line, text))
    assert not bad, "\n".join(f"{w}:{n}: {t}" for w, n, t in bad)


def test_no_test_or_document_cites_a_local_path_or_a_notes_file():
    files = [*(ROOT / "tests").rglob("*.py"), *(ROOT / "docs").glob("*.md"), *(ROOT / "benchmarks").glob("*.py"),
             ROOT / "README.md", ROOT / "DEVELOPERS.md", ROOT / "demo" / "README.md"]
    # The browser test launches the system's Chromium by its path; that is a program, not a citation.
    allowed = {"/usr/bin/chromium"}
    bad = []
    for path in files:
        if path == Path(__file__).resolve():
            continue  # the patterns below
        for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1):
            if re.search(r"reference-checks|(?<![\w.])/(?:work|home|root|Users)/|(?<![\w.])/[\w./-]*venv/bin/",
                         line) and not any(
                    a in line for a in allowed):
                bad.append(f"{path.relative_to(ROOT)}:{n}: {line.strip()}")
    assert not bad, "\n".join(bad)


def test_source_checker_rejects_notes_paths_and_unnamed_sources():
    # Built from pieces so that repository-wide searches for such citations do not find this test itself.
    tag = "# Source" + ":"
    samples = {f"{tag} reference-" + "checks.md §5": False, f"{tag} /home/x/notes.md": False,
               "# Source: published exam-style problem": False, "# Source: see test_gears.py": False,
               "# Source: ISO 54:1996, d = m z": True, "# Source: (common practice) a rule": True}
    for text, good in samples.items():
        ok = bool(_OUTSIDE_WORK.search(text) or _DERIVED.search(text)) and not (
            _LOCAL.search(text) or _IN_REPO.search(text))
        assert ok is good, text
