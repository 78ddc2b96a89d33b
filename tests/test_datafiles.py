"""Data files named by a design file: confined to its folder, decoded as UTF-8 with clear refusals."""

from __future__ import annotations

import codecs
import os

import pytest

from turnkit.calibration import read_sweep_csv
from turnkit.datafiles import read_text_file
from turnkit.designfile import load_design
from turnkit.errors import DesignFileError
from turnkit.motion import load_trace_csv

DESIGN = """\
format_version = 1
name = "confined"

[[gear_train]]
kind = "lead_screw"
pitch = "2 mm"

[[motion]]
name = "recorded"
kind = "trace"
at = "motor"
trace = "{trace}"
"""

TRACE = "time [s],angle [deg]\n0,0\n1,90\n2,180\n"
SWEEP = "angle [deg],x [mV],y [mV]\n" + "".join(
    f"{a},{60 * __import__('math').cos(__import__('math').radians(2 * a)):.6f},"
    f"{60 * __import__('math').sin(__import__('math').radians(2 * a)):.6f}\n" for a in range(0, 180, 5))


def _design(folder, trace: str):
    path = folder / "design.toml"
    path.write_text(DESIGN.format(trace=trace), encoding="utf-8")
    return path


def test_a_trace_inside_the_folder_loads(tmp_path):
    (tmp_path / "traces").mkdir()
    (tmp_path / "traces" / "t.csv").write_text(TRACE, encoding="utf-8")
    assert load_design(_design(tmp_path, "traces/t.csv")).motion[0].trace == "traces/t.csv"


@pytest.mark.parametrize("written", ["/proc/self/environ", "../outside.csv", "ABSOLUTE"])
def test_paths_outside_the_design_folder_are_refused_without_reading_them(tmp_path, written):
    # A design file used to make turnkit read /proc/self/environ and print it into the error.
    folder = tmp_path / "designs"
    folder.mkdir()
    (tmp_path / "outside.csv").write_text("SECRET=1\n", encoding="utf-8")
    written = str(tmp_path / "outside.csv") if written == "ABSOLUTE" else written
    with pytest.raises(DesignFileError, match="outside the design file's folder") as info:
        load_design(_design(folder, written))
    assert "SECRET" not in str(info.value) and "PATH=" not in str(info.value)
    assert "motion[0].trace" in str(info.value)


def test_outside_paths_load_when_allowed_explicitly(tmp_path):
    folder = tmp_path / "designs"
    folder.mkdir()
    (tmp_path / "outside.csv").write_text(TRACE, encoding="utf-8")
    design = load_design(_design(folder, "../outside.csv"), allow_outside_paths=True)
    assert design.motion[0].trace == "../outside.csv"


def test_a_link_leading_out_of_the_folder_is_refused(tmp_path):
    folder = tmp_path / "designs"
    folder.mkdir()
    (tmp_path / "outside.csv").write_text(TRACE, encoding="utf-8")
    (folder / "t.csv").symlink_to(tmp_path / "outside.csv")
    with pytest.raises(DesignFileError, match="outside"):
        load_design(_design(folder, "t.csv"))


NEEDS_FIFO = pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="POSIX pipes")


@NEEDS_FIFO
def test_folders_pipes_and_link_loops_get_their_own_messages(tmp_path):
    (tmp_path / "adir").mkdir()
    with pytest.raises(DesignFileError, match="is a folder"):
        load_design(_design(tmp_path, "adir"))
    os.mkfifo(tmp_path / "pipe.csv")
    with pytest.raises(DesignFileError, match="not a regular file"):
        load_design(_design(tmp_path, "pipe.csv"))
    (tmp_path / "a.csv").symlink_to(tmp_path / "b.csv")
    (tmp_path / "b.csv").symlink_to(tmp_path / "a.csv")
    with pytest.raises(DesignFileError, match="loop of symbolic links"):
        load_design(_design(tmp_path, "a.csv"))


@NEEDS_FIFO
def test_a_pipe_is_refused_by_the_readers_without_blocking(tmp_path):
    os.mkfifo(tmp_path / "pipe.csv")
    with pytest.raises(DesignFileError, match="not a regular file"):
        load_trace_csv(tmp_path / "pipe.csv")
    with pytest.raises(DesignFileError, match="not a regular file"):
        read_sweep_csv(tmp_path / "pipe.csv")


def test_binary_content_is_refused_without_echoing_it(tmp_path):
    path = tmp_path / "t.csv"
    path.write_bytes(b"PATH=/secret/bin\x00HOME=/root\x00")
    with pytest.raises(DesignFileError, match="not a text file") as info:
        load_trace_csv(path)
    assert "secret" not in str(info.value)


def test_a_utf8_byte_order_mark_keeps_the_sweeps_reference_angle_column(tmp_path):
    # The mark used to glue itself to the first header, so the angle column was silently dropped.
    path = tmp_path / "sweep.csv"
    path.write_bytes(codecs.BOM_UTF8 + SWEEP.encode("utf-8"))
    data = read_sweep_csv(path)
    assert data.angle_deg is not None and data.angle_deg[1] == 5.0


def test_a_utf8_byte_order_mark_is_accepted_on_traces_and_design_files(tmp_path):
    (tmp_path / "t.csv").write_bytes(codecs.BOM_UTF8 + TRACE.encode("utf-8"))
    assert load_trace_csv(tmp_path / "t.csv").times_s[-1] == 2.0
    path = _design(tmp_path, "t.csv")
    path.write_bytes(codecs.BOM_UTF8 + path.read_bytes())
    assert load_design(path).name == "confined"


@pytest.mark.parametrize("encoding", ["utf-16", "utf-16-le", "utf-16-be"])
def test_utf16_files_are_named_as_utf16(tmp_path, encoding):
    (tmp_path / "t.csv").write_bytes(TRACE.encode(encoding))
    with pytest.raises(DesignFileError, match="UTF-16"):
        load_trace_csv(tmp_path / "t.csv")
    (tmp_path / "s.csv").write_bytes(SWEEP.encode(encoding))
    with pytest.raises(DesignFileError, match="UTF-16"):
        read_sweep_csv(tmp_path / "s.csv")
    path = tmp_path / "d.toml"
    path.write_bytes(DESIGN.format(trace="t.csv").encode(encoding))
    with pytest.raises(DesignFileError, match="UTF-16"):
        load_design(path)


def test_latin1_text_is_named_as_not_utf8_with_its_line(tmp_path):
    (tmp_path / "t.csv").write_bytes("# r\xe9glage\ntime [s],angle [deg]\n0,0\n1,1\n".encode("latin-1"))
    with pytest.raises(DesignFileError, match="not UTF-8") as info:
        load_trace_csv(tmp_path / "t.csv")
    assert info.value.line == 1


@pytest.mark.parametrize(("separator", "word"), [(";", "semicolons"), ("\t", "tabs")])
def test_semicolon_and_tab_separated_files_get_a_hint(tmp_path, separator, word):
    text = TRACE.replace(",", separator)
    (tmp_path / "t.csv").write_text(text, encoding="utf-8")
    with pytest.raises(DesignFileError, match=word) as info:
        load_trace_csv(tmp_path / "t.csv")
    assert info.value.line == 1


def test_decimal_commas_get_a_hint_with_the_line(tmp_path):
    (tmp_path / "t.csv").write_text("time [s],angle [deg]\n0,0\n0,5,12,5\n", encoding="utf-8")
    with pytest.raises(DesignFileError, match="decimal point") as info:
        load_trace_csv(tmp_path / "t.csv")
    assert info.value.line == 3
    assert "12,5" not in str(info.value)


def test_reading_names_the_file(tmp_path):
    (tmp_path / "t.csv").write_text(TRACE, encoding="utf-8")
    name, text = read_text_file(tmp_path / "t.csv", "trace")
    assert name == str(tmp_path / "t.csv") and text == TRACE


@NEEDS_FIFO
def test_a_design_file_that_is_a_pipe_is_refused(tmp_path):
    os.mkfifo(tmp_path / "d.toml")
    with pytest.raises(DesignFileError, match="not a regular file"):
        load_design(tmp_path / "d.toml")
