"""Finding and reading the data files a design file names (motion traces, calibration sweeps).

Two concerns live here, so that every reader treats them the same way:

* **Where a file may be.** A path written in a design file is taken relative
  to the design file's folder and must stay inside that folder (after
  following symbolic links), unless the user allows other places explicitly
  (``turnkit size --allow-outside-paths``, ``load_design(...,
  allow_outside_paths=True)``). A design file from someone else can then not
  make turnkit read, say, ``/proc/self/environ`` and print it into a CI log.
  Folders, pipes, devices and symbolic-link loops each get their own message.
* **How a file is decoded.** Data files are UTF-8 text. A UTF-8 byte-order
  mark (as spreadsheet programs write) is accepted and removed; UTF-16 text
  is recognised and named; other binary content is refused. CSV files
  separated by semicolons or tabs, and numbers written with decimal commas,
  get a hint instead of a puzzling column count.

No error message here quotes the content of a file: only its path, the line
number and what was expected.
"""

from __future__ import annotations

import codecs
import errno
import os
import re
import stat
from pathlib import Path

from .errors import DesignFileError

__all__ = [
    "MAX_DATA_FILE_BYTES",
    "resolve_data_path",
    "read_text_file",
    "read_file_bytes",
    "decode_text",
]

#: Largest data file read, bytes (64 MiB): a trace or sweep is a few megabytes at most,
#: and reading stays bounded in memory whatever a design file names.
MAX_DATA_FILE_BYTES = 64 * 1024 * 1024

_DIGIT_COMMA_DIGIT = re.compile(r"\d,\d")


def resolve_data_path(written: str, design_dir: str | os.PathLike, field: str, *, source: str = "",
                      allow_outside: bool = False, what: str = "data file") -> Path:
    """The regular file a design file's path entry names, checked.

    Parameters
    ----------
    written : str
        The path as written in the design file (relative to ``design_dir``, or absolute).
    design_dir : str or path-like
        The design file's folder.
    field : str
        The entry that holds the path (``"motion[2].trace"``), named in errors.
    source : str
        The design file, named in errors.
    allow_outside : bool
        Accept a file outside ``design_dir`` (absolute paths, ``../``, links
        pointing elsewhere). Off by default.
    what : str
        Words for the file in messages ("trace file", "calibration sweep file").

    Returns
    -------
    pathlib.Path
        The file's real path (symbolic links followed).

    Raises
    ------
    DesignFileError
        When the file is missing, outside the folder (and not allowed), a
        folder, a pipe or device, or part of a symbolic-link loop.
    """
    folder = Path(design_dir) if str(design_dir) else Path(".")
    path = Path(written)
    if not path.is_absolute():
        path = folder / path
    try:
        real = Path(os.path.realpath(path, strict=True))
    except FileNotFoundError:
        raise DesignFileError(field, f"{what} {written!r} not found (looked for {path}); paths are relative "
                                     "to the design file's folder", source=source) from None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise DesignFileError(field, f"{what} {written!r} is a loop of symbolic links; point it at a file",
                                  source=source) from None
        raise DesignFileError(field, f"cannot open {what} {written!r}: {exc.strerror}", source=source) from None
    if not allow_outside:
        base = Path(os.path.realpath(folder))
        if real != base and base not in real.parents:
            raise DesignFileError(
                field, f"{what} {written!r} is outside the design file's folder ({base}); turnkit reads data "
                       "files only inside that folder unless allowed explicitly (turnkit size "
                       "--allow-outside-paths, or allow_outside_paths=True)", source=source)
    _check_regular(real, f"{what} {written!r}", field, source)
    return real


def _check_regular(path: Path, shown: str, field: str, source: str) -> os.stat_result:
    try:
        info = os.stat(path)
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise DesignFileError(field, f"{shown} is a loop of symbolic links; point it at a file",
                                  source=source) from None
        if isinstance(exc, FileNotFoundError):
            raise DesignFileError(field, f"cannot read {shown}: no such file", source=source) from None
        raise DesignFileError(field, f"cannot open {shown}: {exc.strerror}", source=source) from None
    if stat.S_ISDIR(info.st_mode):
        raise DesignFileError(field, f"{shown} is a folder, not a file", source=source)
    if not stat.S_ISREG(info.st_mode):
        raise DesignFileError(field, f"{shown} is not a regular file (a pipe, socket or device); turnkit "
                                     "reads only ordinary files", source=source)
    return info


def read_text_file(path: str | os.PathLike, what: str = "data file", *, csv: bool = True) -> tuple[str, str]:
    """Read a data file as text: ``(name, text)``.

    Only regular files of at most :data:`MAX_DATA_FILE_BYTES` are read (a
    pipe would block, a device never end). The bytes are decoded by
    :func:`decode_text`; with ``csv`` the text is checked for semicolon or
    tab separators and decimal commas, which get a hint.

    Parameters
    ----------
    path : str or path-like
        The file.
    what : str
        Words for the file in messages ("trace", "calibration sweep").
    csv : bool
        Check the comma-separated layout.

    Returns
    -------
    tuple of str
        The path as text, and the file's text.

    Raises
    ------
    DesignFileError
        Naming the file (and the line, when one is at fault); never quoting its content.
    """
    name = os.fspath(path)
    text = decode_text(read_file_bytes(name, what), name, what)
    if csv:
        _check_csv_layout(text, name, what)
    return name, text


def read_file_bytes(path: str | os.PathLike, what: str = "data file") -> bytes:
    """The bytes of a regular file of at most :data:`MAX_DATA_FILE_BYTES`.

    Raises
    ------
    DesignFileError
        When the file is missing, not a regular file, unreadable or too large.
    """
    name = os.fspath(path)
    info = _check_regular(Path(name), f"the {what} file", "", name)
    if info.st_size > MAX_DATA_FILE_BYTES:
        raise DesignFileError("", f"the {what} file is {info.st_size} bytes; at most {MAX_DATA_FILE_BYTES} "
                                  "bytes are read", source=name)
    try:
        with open(name, "rb") as handle:
            data = handle.read(MAX_DATA_FILE_BYTES + 1)
    except OSError as exc:
        raise DesignFileError("", f"cannot read the {what} file: {exc.strerror}", source=name) from None
    if len(data) > MAX_DATA_FILE_BYTES:
        raise DesignFileError("", f"the {what} file is longer than {MAX_DATA_FILE_BYTES} bytes, the most "
                                  "that is read", source=name)
    return data


def decode_text(data: bytes, name: str, what: str = "file") -> str:
    """Decode a data file's bytes as UTF-8, accepting a byte-order mark.

    UTF-16 (with or without a byte-order mark) is recognised and named, so
    the message says how to fix it; other binary content is refused without
    quoting it.

    Raises
    ------
    DesignFileError
        When the bytes are not UTF-8 text.
    """
    if data.startswith(codecs.BOM_UTF8):
        data = data[len(codecs.BOM_UTF8):]
    elif data.startswith((codecs.BOM_UTF16_LE, codecs.BOM_UTF16_BE)) or _looks_utf16(data):
        raise DesignFileError("", f"the {what} file is UTF-16 text; turnkit reads UTF-8: save it as UTF-8 "
                                  "(in a spreadsheet: 'CSV UTF-8')", source=name)
    if b"\x00" in data:
        raise DesignFileError("", f"the {what} file is not a text file (it contains NUL bytes); expected "
                                  "UTF-8 text", source=name)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data.count(b"\n", 0, exc.start) + 1
        raise DesignFileError("", f"the {what} file is not UTF-8 text (byte {exc.start}); save it as UTF-8",
                              source=name, line=line) from None


def _looks_utf16(data: bytes) -> bool:
    """UTF-16 without a byte-order mark: ASCII text with every other byte NUL."""
    head = data[:256]
    if len(head) < 4:
        return False
    even, odd = head[0::2], head[1::2]
    return even.count(0) > 0.8 * len(even) or odd.count(0) > 0.8 * len(odd)


def _check_csv_layout(text: str, name: str, what: str) -> None:
    """Hints for the two spreadsheet habits that break a comma-separated file."""
    header = None
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        if header is None:
            header = line.count(",")
            if header == 0 and (";" in line or "\t" in line):
                separator = "semicolons" if ";" in line else "tabs"
                raise DesignFileError("", f"the {what} file separates its columns with {separator}; turnkit "
                                          "reads comma-separated values with a decimal point (export as CSV "
                                          "with ',' between columns)", source=name, line=number)
            continue
        if line.count(",") > header and _DIGIT_COMMA_DIGIT.search(line):
            raise DesignFileError("", f"this line has more comma-separated values than the header ({header + 1}); "
                                      "if its numbers use decimal commas, write them with a decimal point",
                                  source=name, line=number)
