"""Exit classes of `turnkit size`: 1 when a requirement or physical limit fails (with advice), 2 when the
file is wrong (naming the file and the key the user wrote); never a traceback."""

from __future__ import annotations

import shutil
import warnings
from pathlib import Path

import pytest

from turnkit.cli import EXIT_ERROR, EXIT_FAIL, main

DEMO = Path(__file__).resolve().parents[1] / "demo"
GATE = (DEMO / "irrigation-gate-valve.toml").read_text(encoding="utf-8")


@pytest.fixture
def folder(tmp_path):
    for sub in ("traces", "sweeps"):
        shutil.copytree(DEMO / sub, tmp_path / sub)
    return tmp_path


def _size(folder: Path, text: str, capsys, *extra) -> tuple[int, str, str]:
    path = folder / "case.toml"
    path.write_text(text, encoding="utf-8")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        status = main(["size", str(path), *extra])
    out, err = capsys.readouterr()
    assert "Traceback" not in err and "internal error" not in err, err
    return status, out, err


def _edit(old: str, new: str) -> str:
    assert old in GATE, old
    return GATE.replace(old, new, 1)


@pytest.mark.parametrize(("old", "new", "words"), [
    # Each used to give a traceback, a misread or an internal name.
    ('bits = 16', 'bits = 64', "counter.bits: 64 is out of range; expected an integer in [4, 63]"),
    ('speed = "0.5 mm/s"', 'speed = "0 mm/s"', "motion[1].speed: must be more than 0 for a 'bursts' motion"),
    ('poll_period = "20 ms"', 'poll_period = "1e300 ms"', "schedule.poll_period: '1e300 ms'"),
    ('asleep = "0.9 uA"', 'asleep = "0,9 uA"', "use a decimal point"),
    ('poll_period = "20 ms"', 'poll_period = "ms"', "it must start with a number"),
    ('poll_period = "20 ms"', 'poll_period = "9**9**9 ms"', "arithmetic"),
    ('poll_period = "20 ms"', 'poll_period = "2**2**2**2**2 ms"', "arithmetic"),
    ('temperature_min = "-10 degC"', 'temperature_min = "25 delta_degC"', "write the temperature itself"),
    ('bursts_per_day = 0.2', 'bursts_per_day = 1e6', "motion[1].duration must be short enough to simulate"),
    ('trace = "traces/gate-handwheel.csv"', 'trace = "/proc/self/environ"', "outside the design file's folder"),
    ('kind = "external"', 'kind = []', "gear_train[0].kind: [] is not a stage kind"),
])
def test_a_wrong_file_exits_2_naming_the_file_and_key(folder, capsys, old, new, words):
    status, _, err = _size(folder, _edit(old, new), capsys)
    assert status == EXIT_ERROR
    assert words in err and "case.toml" in err, err


def test_a_coarse_adc_names_adc_bits_not_a_sweep_file(folder, capsys):
    text = _edit("adc_bits = 12", "adc_bits = 2").replace('sweep = "sweeps/gate-sensor-sweep.csv"', "")
    status, _, err = _size(folder, text, capsys)
    assert status == EXIT_ERROR
    assert "sensor.adc_bits must be at least" in err and "case.toml" in err
    # The advised width works (the same function decides).
    bits = int(err.split("must be at least ")[1].split()[0])
    assert _size(folder, text.replace("adc_bits = 2", f"adc_bits = {bits}"), capsys)[0] != EXIT_ERROR


def test_an_impossible_back_drive_speed_is_a_failed_requirement_with_advice(folder, capsys):
    # Used to exit 2 with "poll_period_s must be at least wake_time_s + ...".
    status, out, _ = _size(folder, _edit('backdrive_speed = "0.6 mm/s"', 'backdrive_speed = "5000 mm/s"'), capsys)
    assert status == EXIT_FAIL
    assert "no poll period can" in " ".join(out.split()) and "wake_time_s" not in out


def test_a_long_two_row_trace_is_refused_before_simulating(folder, capsys):
    (folder / "traces" / "long.csv").write_text("time [s],angle [deg]\n0,0\n1e9,1e9\n", encoding="utf-8")
    status, _, err = _size(folder, _edit("traces/gate-handwheel.csv", "traces/long.csv"), capsys)
    assert status == EXIT_ERROR
    assert "motion[2].trace" in err and "polls" in err


def test_deep_nesting_is_a_named_error(folder, capsys):
    status, _, err = _size(folder, GATE + "deep = " + "[" * 5000 + "]" * 5000 + "\n", capsys)
    assert status == EXIT_ERROR and "case.toml" in err


def test_terminal_escape_codes_in_a_name_are_printed_as_text(folder, capsys):
    text = _edit('name = "Irrigation gate valve"', 'name = "gate \\u001b]0;owned\\u0007\\u001b[31mred"')
    status, out, _ = _size(folder, text, capsys)
    assert status in (0, 1)
    assert "\x1b" not in out and "\x07" not in out
    assert "\\x1b[31mred" in out


def test_batch_export_refuses_two_files_that_would_write_the_same_summary(tmp_path, capsys):
    for sub in ("a", "b"):
        (tmp_path / sub).mkdir()
        shutil.copytree(DEMO / "traces", tmp_path / sub / "traces")
        shutil.copytree(DEMO / "sweeps", tmp_path / sub / "sweeps")
        (tmp_path / sub / "valve.toml").write_text(GATE, encoding="utf-8")
    out_dir = tmp_path / "out"
    status = main(["size", str(tmp_path / "a" / "valve.toml"), str(tmp_path / "b" / "valve.toml"),
                   "-o", str(out_dir)])
    err = capsys.readouterr().err
    assert status == EXIT_ERROR and "would both write" in err
    assert not out_dir.exists() or not any(out_dir.iterdir())


def test_too_many_consumers_are_refused_by_name(folder, capsys):
    consumer = '[[power.consumers]]\nname = "c{}"\nasleep = "1 uA"\nwaking = "1 mA"\npolling = "1 mA"\n' \
               'tracking = "1 mA"\n'
    text = GATE + "".join(consumer.format(i) for i in range(1001))
    status, _, err = _size(folder, text, capsys)
    assert status == EXIT_ERROR
    assert "power.consumers: has 1004 entries; at most 1000 are read" in err


def test_a_huge_design_file_is_refused_before_parsing(folder, capsys):
    status, _, err = _size(folder, GATE + "# padding\n" * 120_000, capsys)
    assert status == EXIT_ERROR and "at most 1048576" in err
