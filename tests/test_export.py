"""The exported sizing summary: HTML, Markdown, JSON and plain text, and the safe file write.

The results here are built by hand: the summary is a view, so it is tested on
known data, independent of the sizing engine.
"""

from __future__ import annotations

import json
import math
import os
import re
from datetime import datetime, timezone
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from turnkit import DesignValueError
from turnkit import export
from turnkit.export import to_dict, to_html, to_json, to_markdown, to_text, write_summary
from turnkit.result import Band, Check, Curve, EquationText, Marker, Scenario, Series, SizingResult, Value

WHEN = datetime(2026, 3, 4, 5, 6, 7, tzinfo=timezone.utc)
EVIL = "<script>alert(1)</script>"


def sample_result(*, name: str = "Greenhouse vent opener", fail: bool = False, **changes) -> SizingResult:
    """A small, plausible result: three checks, two scenarios, one plot.

    With ``fail=True`` the battery-life check fails and carries advice.
    """
    period = np.logspace(0, 3, 40)
    life = 9.0 * period / (period + 4.0)
    fields = dict(
        design_name=name,
        design_hash="ab" * 32,
        turnkit_version="0.1.0",
        output_unit="mm",
        values=(
            Value("gear_ratio", "Gear ratio (motor turns per output turn)", 20.0, "", "gear train",
                  "gear_ratio", "product of the stage ratios"),
            Value("travel_per_motor_turn_mm", "Travel per motor turn", 1.885, "mm", "gear train",
                  "travel_per_turn"),
            Value("counter_bits_needed", "Counter bits needed", 11, "", "counter"),
            Value("battery_life_years", "Battery life", 3.2 if fail else 7.5, "years", "battery",
                  "battery_life", "derated for 20 degC and self-discharge"),
            Value("trackable_speed_mm_per_s", "Fastest motion followed while asleep", math.inf, "mm/s",
                  "schedule"),
        ),
        checks=(
            Check("output_resolution", "Output resolution at most 0.05 mm", 0.0052, 0.05, "mm", "<="),
            Check("backdrive_speed", "Follows hand push up to 20 mm/s while asleep", 37.7, 20.0, "mm/s", ">="),
            Check("battery_life", "Battery lasts at least 5 years", 3.2 if fail else 7.5, 5.0, "years", ">=",
                  "poll every 25 ms instead of 10 ms, or use a larger cell" if fail else ""),
        ),
        scenarios=(
            Scenario("hand push", "constant", 5.0, 637.0, 500, 0, 0, 0, 0, 0.0, "mm"),
            Scenario("coast after stop", "coast_down", 0.2, 3000.0, 20, 0, 0, 0, 0, 0.0, "mm",
                     "motor coasting down from full speed"),
        ),
        curves=(
            Curve("life_vs_poll_period", "Battery life against poll period", "poll period", "ms",
                  "battery life", "years", (Series("battery life", period, life),),
                  markers=(Marker("this design", 10.0, 6.43),), bands=(Band("too slow to follow", 47.0, math.inf),),
                  vlines=(Marker("required life", 5.0, 0.0),), log_x=True,
                  note="The shaded poll periods miss quarter-turns at the required speed."),
        ),
        equations=(
            EquationText("gear_ratio", "i = i_1 * i_2 * ... * i_n", r"i = \prod_k i_k", "ISO 1122-1 (from memory)"),
            EquationText("battery_life", "L = C * k_T * (1 - s) / I_avg", "", "common practice"),
        ),
        warnings=("The rack pinion has 12 teeth; check for undercut.",),
        cautions=("Powered actuators pinch and crush: guard the vent edge.",),
        assumptions=(("Self-discharge 1 % per year", "cell maker's typical value (from memory)"),),
        inputs={"format_version": 1, "name": name, "schedule": {"poll_period": "10 ms"},
                "gear_train": [{"kind": "external", "teeth_driver": 10, "teeth_driven": 40}]},
    )
    fields.update(changes)
    return SizingResult(**fields)


class _Resources(HTMLParser):
    """Collects every attribute that can fetch something, every script and every url(...)."""

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.urls: list[str] = []
        self.scripts = 0
        self.tags: list[str] = []
        self.text: list[str] = []
        self._in_style = False

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        if tag == "script":
            self.scripts += 1
        if tag == "style":
            self._in_style = True
        for key, value in attrs:
            if key in ("src", "href", "xlink:href", "srcset", "action", "poster", "data") and value:
                self.urls.append(value)
            if key == "style" and value:
                self.urls.extend(re.findall(r"url\(([^)]*)\)", value))

    def handle_endtag(self, tag):
        if tag == "style":
            self._in_style = False

    def handle_data(self, data):
        if self._in_style:
            self.urls.extend(re.findall(r"url\(([^)]*)\)", data))
            self.urls.extend(re.findall(r"@import\s+([^;]+)", data))
        else:
            self.text.append(data)


def _parse(html: str) -> _Resources:
    parser = _Resources()
    parser.feed(html)
    parser.close()
    return parser


# --- HTML -------------------------------------------------------------------------

def test_html_page_fetches_nothing_from_the_network():
    page = to_html(sample_result(fail=True), generated_at=WHEN)
    parsed = _parse(page)
    assert parsed.scripts == 0
    assert "svg" in parsed.tags and "polyline" in parsed.tags
    remote = [u for u in parsed.urls if re.match(r"\s*['\"]?\s*(https?:)?//", u, flags=re.I)]
    assert remote == []
    # Only in-page links remain (equation anchors).
    assert all(u.startswith("#") for u in parsed.urls), parsed.urls
    assert "<link" not in page and "@import" not in page


def test_html_escapes_a_malicious_actuator_name_everywhere():
    result = sample_result(
        name=EVIL,
        warnings=(EVIL,), cautions=(EVIL,), assumptions=((EVIL, EVIL),),
        curves=(Curve("c", EVIL, EVIL, EVIL, "y", "", (Series(EVIL, [1, 2], [3, 4]),),
                      markers=(Marker(EVIL, 1, 3),), note=EVIL),),
    )
    page = to_html(result, generated_at=WHEN)
    assert "<script>" not in page
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in page
    parsed = _parse(page)
    assert parsed.scripts == 0
    # The escaped name still reads correctly as text.
    assert EVIL in "".join(parsed.text)


def test_html_fragment_is_one_div_for_notebooks():
    fragment = to_html(sample_result(), standalone=False, generated_at=WHEN)
    assert fragment.lstrip().startswith('<div class="turnkit-summary">')
    assert fragment.rstrip().endswith("</div>")
    assert "<html" not in fragment and "<body" not in fragment
    page = to_html(sample_result(), generated_at=WHEN)
    assert page.startswith("<!DOCTYPE html>") and page.rstrip().endswith("</html>")


def test_result_renders_itself_in_a_notebook():
    assert sample_result()._repr_html_().lstrip().startswith('<div class="turnkit-summary">')


def test_html_holds_every_part_of_the_summary():
    result = sample_result(fail=True)
    page = to_html(result, generated_at=WHEN)
    text = " ".join("".join(_parse(page).text).split())
    for needle in ("Greenhouse vent opener", "turnkit 0.1.0", "2026-03-04 05:06 UTC", "ab" * 32,
                   "Safety cautions", "guard the vent edge", "Battery lasts at least 5 years", "3.2 years",
                   "≥ 5 years", "-36.0 %", "FAIL", "poll every 25 ms instead of 10 ms", "Gear ratio",
                   "1.885 mm", "unlimited mm/s", "i = i_1 * i_2 * ... * i_n", "ISO 1122-1",
                   "Self-discharge 1 % per year", "hand push", "coast after stop", "check for undercut",
                   'poll_period = "10 ms"', "Battery life against poll period", "poll period (ms), log scale",
                   "The shaded poll periods miss quarter-turns"):
        assert needle in text, needle
    # Values are grouped by section, in the usual order.
    headings = re.findall(r"<h3>(.*?)</h3>", page)
    assert headings == ["gear train", "counter", "schedule", "battery"]


def test_html_links_values_to_their_equations():
    page = to_html(sample_result(), generated_at=WHEN)
    assert 'href="#eq-gear_ratio"' in page and 'id="eq-gear_ratio"' in page
    # travel_per_turn has no equation text in this result: no dangling link.
    assert 'href="#eq-travel_per_turn"' not in page


def test_cautions_come_before_the_results_even_without_specific_cautions():
    page = to_html(sample_result(cautions=()), generated_at=WHEN)
    assert "Safety cautions" in page
    assert page.index("Safety cautions") < page.index("<h2>Requirements")
    assert "functional-safety standards" in page
    assert "functional-safety standards" in to_markdown(sample_result(cautions=()), generated_at=WHEN)
    # The result's own cautions replace the general one rather than repeat it.
    assert "functional-safety standards" not in to_html(sample_result(), generated_at=WHEN)


@pytest.mark.parametrize("value, text", [(5.5, "+10.0 %"), (80.0, "+1500 %"), (5e6, "+1.00e+08 %"),
                                         (4.0, "-20.0 %")])
def test_margins_are_written_as_signed_percentages(value, text):
    check = Check("c", "life", value, 5.0, "years", ">=")
    line = next(l for l in to_text(sample_result(checks=(check,)), generated_at=WHEN).splitlines()
                if l.strip().startswith("life"))
    assert text in line


def test_margin_signs_follow_pass_and_fail():
    result = sample_result(fail=True)
    text = to_text(result, generated_at=WHEN)
    # 0.05 mm asked, 0.0052 mm given: (0.05 - 0.0052) / 0.05 = +89.6 %.
    assert re.search(r"Output resolution at most 0\.05 mm\s+0\.0052 mm\s+<= 0\.05 mm\s+\+89\.6 %\s+PASS", text)
    # 5 years asked, 3.2 given: (3.2 - 5) / 5 = -36 %.
    assert re.search(r"Battery lasts at least 5 years\s+3\.2 years\s+>= 5 years\s+-36\.0 %\s+FAIL", text)


# --- Markdown -----------------------------------------------------------------------

def test_markdown_tables_have_equal_column_counts():
    md = to_markdown(sample_result(fail=True), generated_at=WHEN)
    lines = md.splitlines()
    tables: list[list[str]] = []
    for line in lines:
        if line.startswith("|"):
            if tables and lines[lines.index(line) - 1].startswith("|") and tables[-1]:
                tables[-1].append(line)
            else:
                tables.append([line])
    assert len(tables) >= 5
    for table in tables:
        counts = {len(re.split(r"(?<!\\)\|", row)) for row in table}
        assert len(counts) == 1, table


def test_markdown_neutralises_html_and_table_breaks_in_user_text():
    result = sample_result(name=EVIL, warnings=("a | b\nc",))
    md = to_markdown(result, generated_at=WHEN)
    # Inside the fenced block of the design as read, text is shown literally and is harmless.
    outside_code = re.sub(r"```toml\n.*?\n```", "", md, flags=re.S)
    assert "<script>" not in outside_code
    assert "&lt;script&gt;" in outside_code
    assert "- a \\| b c" in md


def test_markdown_fence_outlasts_backticks_in_the_design():
    md = to_markdown(sample_result(inputs={"name": "a ```` b"}), generated_at=WHEN)
    assert "`````toml\n" in md and '\nname = "a ```` b"\n`````\n' in md


def test_markdown_states_the_result_and_the_fix():
    md = to_markdown(sample_result(fail=True), generated_at=WHEN)
    assert "**FAIL: 2 of 3 requirements met; 2 of 2 motion scenarios counted exactly**" in md
    assert "poll every 25 ms instead of 10 ms" in md
    assert "## ⚠ Safety cautions" in md
    assert "```toml" in md and 'poll_period = "10 ms"' in md


# --- JSON -------------------------------------------------------------------------

# The documented layout (docs/cli.md). Changing it means raising export.FORMAT_VERSION.
TOP_KEYS = {"format", "format_version", "turnkit_version", "generated_utc", "design", "passed", "summary",
            "checks", "values", "scenarios", "equations", "assumptions", "warnings", "cautions", "curves",
            "inputs"}
DESIGN_KEYS = {"name", "sha256", "output_unit"}
CHECK_KEYS = {"key", "label", "value", "target", "unit", "comparison", "margin_fraction", "passed", "advice"}
VALUE_KEYS = {"key", "label", "group", "value", "unit", "equation", "note"}
SCENARIO_KEYS = {"name", "kind", "passed", "duration_s", "peak_motor_speed_rpm", "polls", "final_count_error_qt",
                 "ambiguous_count", "silent_error_count", "overflow_count", "max_output_error", "note"}
EQUATION_KEYS = {"key", "text", "latex", "source"}
CURVE_KEYS = {"key", "title", "x", "y", "series", "markers", "bands", "vlines", "note"}


def test_json_summary_keys_are_stable():
    data = json.loads(to_json(sample_result(fail=True), generated_at=WHEN))
    assert set(data) == TOP_KEYS
    assert data["format"] == "turnkit-sizing-summary" and data["format_version"] == 1
    assert set(data["design"]) == DESIGN_KEYS
    assert all(set(c) == CHECK_KEYS for c in data["checks"])
    assert all(set(v) == VALUE_KEYS for v in data["values"])
    assert all(set(s) == SCENARIO_KEYS for s in data["scenarios"])
    assert all(set(s["max_output_error"]) == {"value", "unit"} for s in data["scenarios"])
    assert all(set(e) == EQUATION_KEYS for e in data["equations"])
    assert all(set(a) == {"text", "source"} for a in data["assumptions"])
    assert all(set(c) == CURVE_KEYS for c in data["curves"])
    curve = data["curves"][0]
    assert set(curve["x"]) == set(curve["y"]) == {"label", "unit", "log"}
    assert set(curve["series"][0]) == {"name", "style", "x", "y"}
    assert set(curve["markers"][0]) == {"name", "x", "y"}
    assert set(curve["bands"][0]) == {"name", "x_start", "x_end"}
    assert set(curve["vlines"][0]) == {"name", "x"}


def test_json_keys_do_not_depend_on_the_content():
    full = to_dict(sample_result(fail=True), generated_at=WHEN)
    empty = to_dict(sample_result(values=(), checks=(), scenarios=(), curves=(), equations=(), warnings=(),
                                  cautions=(), assumptions=(), inputs={}), generated_at=WHEN)
    assert set(full) == set(empty) == TOP_KEYS


def test_json_is_strict_and_reads_back():
    text = to_json(sample_result(), generated_at=WHEN)
    data = json.loads(text, parse_constant=lambda c: pytest.fail(f"non-standard JSON constant {c}"))
    assert data["generated_utc"] == "2026-03-04T05:06:07Z"
    assert data["passed"] is True
    speed = next(v for v in data["values"] if v["key"] == "trackable_speed_mm_per_s")
    assert speed["value"] == "inf" and float(speed["value"]) == math.inf and speed["unit"] == "mm/s"
    life = next(c for c in data["checks"] if c["key"] == "battery_life")
    assert life["margin_fraction"] == pytest.approx((7.5 - 5.0) / 5.0)
    assert life["unit"] == "years" and life["comparison"] == ">="
    band = data["curves"][0]["bands"][0]
    assert band["x_end"] == "inf"
    assert data["curves"][0]["series"][0]["x"][0] == 1.0
    assert data["inputs"]["schedule"]["poll_period"] == "10 ms"


def test_json_unwraps_numpy_scalars():
    result = sample_result(values=(Value("bits", "Bits", np.int64(11), "", "counter"),
                                   Value("ok", "Fits", np.bool_(True), "", "counter"),
                                   Value("ratio", "Ratio", np.float32(0.5), "", "gear train")))
    values = {v["key"]: v["value"] for v in to_dict(result, generated_at=WHEN)["values"]}
    assert values == {"bits": 11, "ok": True, "ratio": 0.5}
    assert type(values["bits"]) is int and type(values["ok"]) is bool


def test_summary_date_follows_source_date_epoch(monkeypatch):
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1700000000")
    assert to_dict(sample_result())["generated_utc"] == "2023-11-14T22:13:20Z"
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "yesterday")
    with pytest.raises(DesignValueError, match="SOURCE_DATE_EPOCH"):
        to_dict(sample_result())


def test_same_result_and_date_give_identical_files():
    a, b = sample_result(fail=True), sample_result(fail=True)
    for render in (to_html, to_markdown, to_json, to_text):
        assert render(a, generated_at=WHEN) == render(b, generated_at=WHEN)


def test_exports_refuse_things_that_are_not_results():
    with pytest.raises(TypeError, match="SizingResult"):
        to_html({"design_name": "x"})
    with pytest.raises(TypeError):
        to_json(sample_result(), colour="red")


# --- plain text -------------------------------------------------------------------

def test_text_summary_aligns_columns_and_ends_with_the_verdict():
    text = to_text(sample_result(fail=True), generated_at=WHEN)
    lines = text.splitlines()
    header = next(line for line in lines if line.strip().startswith("requirement"))
    rule = lines[lines.index(header) + 1]
    assert set(rule.strip()) <= {"-", " "}
    rows = lines[lines.index(header) + 2: lines.index(header) + 5]
    # Every row's result column starts where the header's does.
    col = header.index("result")
    assert [row[col:col + 4] for row in rows] == ["PASS", "PASS", "FAIL"]
    assert "CAUTIONS" in text and "WARNINGS" in text and "MOTION SCENARIOS" in text
    assert lines[-2].startswith("FAIL: 2 of 3 requirements met")
    assert lines[-1].strip().startswith("-> Battery lasts at least 5 years: poll every 25 ms")


# --- writing files ----------------------------------------------------------------

@pytest.mark.parametrize("suffix, probe", [(".html", "<!DOCTYPE html>"), (".md", "# Sizing summary"),
                                           (".json", '"format": "turnkit-sizing-summary"'),
                                           (".txt", "REQUIREMENTS"), (".HTML", "<!DOCTYPE html>")])
def test_write_summary_picks_the_format_from_the_extension(tmp_path, suffix, probe):
    path = write_summary(sample_result(), tmp_path / f"out{suffix}", generated_at=WHEN)
    assert path == tmp_path / f"out{suffix}"
    assert probe in path.read_text(encoding="utf-8")
    assert [p.name for p in tmp_path.iterdir()] == [f"out{suffix}"]  # no temporary file left


def test_write_summary_names_the_allowed_extensions(tmp_path):
    with pytest.raises(DesignValueError, match=r"\.html, \.md, \.json, \.txt") as info:
        write_summary(sample_result(), tmp_path / "out.pdf")
    assert "'.pdf'" in str(info.value)
    with pytest.raises(DesignValueError, match="none"):
        write_summary(sample_result(), tmp_path / "out")
    assert list(tmp_path.iterdir()) == []


def test_write_summary_keeps_an_existing_file_unless_asked(tmp_path):
    target = tmp_path / "review.json"
    target.write_text("precious")
    with pytest.raises(FileExistsError, match="overwrite"):
        write_summary(sample_result(), target)
    assert target.read_text() == "precious"
    write_summary(sample_result(), target, overwrite=True)
    assert json.loads(target.read_text())["format"] == "turnkit-sizing-summary"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["review.json"]


def test_write_summary_into_a_missing_folder_says_which(tmp_path):
    with pytest.raises(FileNotFoundError, match="nowhere"):
        write_summary(sample_result(), tmp_path / "nowhere" / "out.md")


def test_failed_write_leaves_the_old_file_and_no_temporary(tmp_path, monkeypatch):
    target = tmp_path / "out.md"
    target.write_text("old")

    def broken_replace(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", broken_replace)
    with pytest.raises(OSError, match="disk full"):
        write_summary(sample_result(), target, overwrite=True)
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["out.md"]


def test_written_file_has_ordinary_permissions(tmp_path):
    old = os.umask(0o022)
    try:
        path = write_summary(sample_result(), tmp_path / "out.html")
    finally:
        os.umask(old)
    assert path.stat().st_mode & 0o777 == 0o644


def test_write_summary_also_works_without_hard_links(tmp_path, monkeypatch):
    def no_links(src, dst):
        raise OSError("hard links not supported")

    monkeypatch.setattr(os, "link", no_links)
    target = tmp_path / "out.json"
    write_summary(sample_result(), target)
    assert json.loads(target.read_text())["passed"] is True
    with pytest.raises(FileExistsError):
        write_summary(sample_result(), target)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["out.json"]


def test_module_exports_its_public_names():
    assert set(export.__all__) >= {"to_html", "to_markdown", "to_json", "to_dict", "to_text", "write_summary"}
    assert Path(export.__file__).with_name("templates").joinpath("summary.html.j2").is_file()
