"""Fuzzing the inputs a user writes: design files, quantities, traces and sweeps.

Whatever is written, turnkit ends with a result or a clear error of its own — never a traceback,
a hang (the work is estimated and bounded before simulating) or an exit status outside the
documented classes (0 pass, 1 a requirement or limit fails, 2 the file is wrong).
"""

from __future__ import annotations

import re
import shutil
import string
import warnings
from pathlib import Path

import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from turnkit.calibration import fit_sweep, read_sweep_csv
from turnkit.cli import EXIT_ERROR, main
from turnkit.designfile import loads_design
from turnkit.errors import DesignFileError, DesignValueError, TurnkitError
from turnkit.motion import load_trace_csv
from turnkit.units import parse_quantity

DEMO = Path(__file__).resolve().parents[1] / "demo"
FUZZ = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])

# Values a person (or a spreadsheet) might type where a quantity goes.
_UNITS = ["mm", "ms", "s", "uA", "mA", "deg", "rpm", "mm/s", "years", "degC", "delta_degC", "%", "Hz", "",
          "m", "us", "**2", "^2", " ms ms", "mAh"]
_NUMBERS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True).map(repr),
    st.integers(-10**30, 10**30).map(str),
    st.sampled_from(["1,2", "1,000", "0", "-0", "1e308", "1e-320", "9**9**9", "2**2**2**2**2", ".5", "5.",
                     "1e400", "nan", "inf", "", "0x10", "1_000"]),
)
QUANTITY_TEXT = st.one_of(
    st.tuples(_NUMBERS, st.sampled_from(["", " "]), st.sampled_from(_UNITS)).map("".join),
    st.text(alphabet=string.printable + "µ°", max_size=30),
)


@FUZZ
@given(QUANTITY_TEXT)
def test_any_quantity_text_parses_or_is_refused_by_name(text):
    try:
        q = parse_quantity(text, "fuzz.key")
    except DesignValueError as exc:
        assert str(exc).startswith("fuzz.key")
        return
    # Accepted: a number and at most a unit, nothing evaluated.
    assert re.match(r"^\s*[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?", text.replace("µ", "u"))
    assert "," not in text and "**" not in re.sub(r"[A-Za-z_]\s*\*\*\s*\d", "", text)
    float(q.magnitude)


# --- whole design files through the command line ------------------------------------------------

_DESIGN = (DEMO / "window-shade-winder.toml").read_text(encoding="utf-8")
_VALUE_LINES = [i for i, line in enumerate(_DESIGN.splitlines()) if re.match(r"^[a-z_]+ = ", line)]
_RAW = st.one_of(
    QUANTITY_TEXT.map(lambda t: '"' + t.replace("\\", "\\\\").replace('"', '\\"') + '"'),
    st.integers(-2**70, 2**70).map(str),
    st.floats(allow_nan=False).map(lambda f: repr(f) if f == f and abs(f) != float("inf") else "1.0"),
    st.sampled_from(["true", "[]", "{}", "[" * 50 + "]" * 50, '"\\u001b[31mred"', "0", "-1", "1e300"]),
)


@pytest.fixture(scope="module")
def demo_copy(tmp_path_factory):
    folder = tmp_path_factory.mktemp("fuzz-demo")
    for sub in ("traces", "sweeps"):
        shutil.copytree(DEMO / sub, folder / sub)
    return folder


def _size_checked(path: Path, capsys) -> int:
    """`turnkit size PATH`: a documented status, no traceback, and a named file on errors."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        status = main(["size", str(path)])
    err = capsys.readouterr().err
    event(f"exit status {status}")
    assert "Traceback" not in err and "internal error" not in err, err
    assert status in (0, 1, 2)
    if status == EXIT_ERROR:
        # The message names the design file; no raw escape code reaches the terminal.
        assert str(path) in err and "\x1b" not in err, err
    return status


@FUZZ
@given(st.lists(st.tuples(st.sampled_from(_VALUE_LINES), _RAW), min_size=1, max_size=3))
def test_any_edited_design_file_sizes_or_fails_with_a_documented_status(demo_copy, capsys, edits):
    lines = _DESIGN.splitlines()
    for index, raw in edits:
        key = lines[index].split(" = ", 1)[0]
        lines[index] = f"{key} = {raw}"
    path = demo_copy / "edited.toml"
    text = "\n".join(lines) + "\n"
    path.write_text(text, encoding="utf-8")
    status = _size_checked(path, capsys)
    try:
        loads_design(text, source=str(path))
    except DesignFileError:
        assert status == EXIT_ERROR


@FUZZ
@given(key=st.sampled_from(["poll_period", "wake_time", "duration", "speed", "bursts_per_day", "bits",
                            "adc_bits", "backdrive_speed", "noise_rms", "amplitude"]),
       value=st.one_of(st.floats(0, 1e300), st.sampled_from([0.0, 1e-300, 1e9, 5000.0, 64.0, 2.0])))
def test_extreme_numbers_give_a_verdict_or_a_named_error(demo_copy, capsys, key, value):
    text = (DEMO / "irrigation-gate-valve.toml").read_text(encoding="utf-8")
    pattern = re.compile(rf"^{key} = (\"[-0-9.e+]+ ?([^\"]*)\"|[-0-9.e+]+)", re.M)
    match = pattern.search(text)
    assert match, key
    unit = match.group(2)
    number = str(int(value)) if match.group(2) is None and key in ("bits", "adc_bits") else repr(value)
    new = f'{key} = "{number} {unit}"' if unit is not None else f"{key} = {number}"
    path = demo_copy / "extreme.toml"
    path.write_text(text[:match.start()] + new + text[match.end():], encoding="utf-8")
    _size_checked(path, capsys)


@FUZZ
@given(st.one_of(st.text(max_size=300), st.lists(st.sampled_from(
    ["[sensor]", "[[motion]]", "[[gear_train]]", 'kind = "worm"', "format_version = 1", 'name = "x"', "a.b.c = 1",
     "[power]", "consumers = []", "x = [[[1]]]", "= 3", '"\\u0000" = 1', "[[power.consumers]]", "[battery]"]),
    max_size=12).map("\n".join)))
def test_any_text_reads_as_a_design_or_a_named_error(text):
    try:
        loads_design(text, source="fuzz.toml")
    except DesignFileError as exc:
        assert str(exc).startswith("fuzz.toml")


# --- traces and sweeps ------------------------------------------------------------------------------

_CELL = st.one_of(st.floats(allow_nan=True).map(repr), st.integers(-10**20, 10**20).map(str),
                  st.sampled_from(["", "1,5", "x", "1e400", "-0"]))
_CSV = st.one_of(
    st.lists(st.lists(_CELL, min_size=1, max_size=3).map(",".join), max_size=8).map(
        lambda rows: "\n".join(["time [s],angle [deg]", *rows])),
    st.text(max_size=200),
)
_ENCODINGS = st.sampled_from(["utf-8", "utf-8-sig", "utf-16", "latin-1"])


@FUZZ
@given(_CSV, _ENCODINGS)
def test_any_trace_file_loads_or_is_refused_by_name(tmp_path, text, encoding):
    path = tmp_path / "trace.csv"
    try:
        path.write_bytes(text.encode(encoding))
    except UnicodeEncodeError:
        return
    try:
        load_trace_csv(path)
    except (DesignFileError, DesignValueError) as exc:
        assert isinstance(exc, TurnkitError)


@FUZZ
@given(st.lists(st.tuples(_CELL, _CELL, _CELL).map(",".join), max_size=40), _ENCODINGS)
def test_any_sweep_file_fits_or_is_refused_by_name(tmp_path, rows, encoding):
    path = tmp_path / "sweep.csv"
    text = "\n".join(["angle [deg],x [mV],y [mV]", *rows])
    try:
        path.write_bytes(text.encode(encoding))
    except UnicodeEncodeError:
        return
    try:
        data = read_sweep_csv(path)
        fit_sweep(data.x_mV, data.y_mV, angle_deg=data.angle_deg)
    except (DesignFileError, DesignValueError):
        pass
