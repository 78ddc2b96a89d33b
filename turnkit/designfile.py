"""Read and write actuator design files (TOML) and describe them as a JSON Schema.

A design file is TOML with ``format_version = 1``. Quantities are strings
with units ("2 mm", "15 uA", "25 ms", "5 years", "300 rpm"); they are parsed
with pint (through :mod:`turnkit.units`) and converted once, here, into the
plain floats of :mod:`turnkit.design`. Everything about a field — its key,
units, range, default and description — comes from the sections'
``FIELDS`` tables, so loading, saving, validation and the schema agree.

Saving over an existing design file edits it in place with tomlkit: only
changed values are rewritten, and comments, layout and the way unchanged
values are written are kept (see :func:`save_design`).

Every problem raises :class:`turnkit.errors.DesignFileError` naming the entry
(``gear_train[2].pitch``), the value, and what was expected; unknown keys get
a did-you-mean; TOML syntax errors give the line.

Examples
--------
>>> design = loads_design('''
... format_version = 1
... name = "test valve"
... [[gear_train]]
... kind = "lead_screw"
... pitch = "2 mm"
... ''')
>>> design.gear_train[0].pitch_mm
2.0
>>> loads_design(dump_design(design)) == design
True
"""

from __future__ import annotations

import codecs
import dataclasses
import hashlib
import math
import os
import re
import stat
from functools import lru_cache
from pathlib import Path
from typing import Any

from . import design as d
from .errors import DesignFileError, DesignValueError

__all__ = [
    "load_design",
    "load_design_file",
    "LoadedDesign",
    "loads_design",
    "dump_design",
    "save_design",
    "save_loaded_design",
    "design_schema",
    "trace_path",
]

_SECTIONS: dict[str, type] = {
    "sensor": d.SensorDesign,
    "latches": d.LatchDesign,
    "counter": d.CounterDesign,
    "schedule": d.ScheduleDesign,
    "requirements": d.Requirements,
    "accuracy": d.AccuracyDesign,
}
# Optional sections: absent in the file means None in the design.
_OPTIONAL_SECTIONS: dict[str, type] = {
    "magnet": d.MagnetDesign,
    "count_memory": d.CountMemoryDesign,
}
_TOP_KEYS = (
    "format_version", "name", "description", "gear_train", "sensor", "latches", "counter", "schedule",
    "power", "battery", "motion", "requirements", "magnet", "accuracy", "count_memory",
)
_POWER_KEYS = ("cutoff_voltage", "consumers", "host_supply") + tuple(
    spec.key for spec in d.PowerDesign.FIELDS if spec.key != "cutoff_voltage")

# A number followed by a unit, for the JSON Schema (the range is checked on load).
_QUANTITY_PATTERN = r"^\s*[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?\s*[^\s\d.+-].*$"
_PERCENT_PATTERN = r"^\s*[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?\s*(%|percent)\s*$"
_TOML_LINE = re.compile(r"at line (\d+)")

#: Largest design file read, bytes (1 MiB; a design file is a few kilobytes).
MAX_DESIGN_FILE_BYTES = 1024 * 1024
#: Most gear stages, power consumers or motion scenarios in one design file.
MAX_TABLES_PER_ARRAY = 1000

#: An example value for each canonical unit, shown in messages and the schema.
_EXAMPLES = {
    "mm": "2 mm", "deg": "1.5 deg", "rpm": "300 rpm", "mm/s": "5 mm/s", "deg/s^2": "3600 deg/s^2",
    "mm/s^2": "100 mm/s^2", "s": "2 s", "ms": "25 ms", "us": "50 us", "years": "5 years", "mV": "2 mV",
    "V": "1.5 V", "uA": "15 uA", "mAh": "3000 mAh", "Hz": "20 Hz", "degC": "20 degC",
    "mT": "30 mT", "%/K": "-0.12 %/K", "ppm/K": "11.5 ppm/K", "uV/K": "2 uV/K", "uF": "100 uF", "mW": "3 mW",
    "mA": "120 mA", "N": "40 N", "N*m": "0.5 N*m", "N*m/A": "0.012 N*m/A",
}


# --- reading ---------------------------------------------------------------------

def load_design(path: str | os.PathLike, *, allow_outside_paths: bool = False) -> d.ActuatorDesign:
    """Read a design file.

    Parameters
    ----------
    path : str or path-like
        The TOML design file (UTF-8; a byte-order mark is accepted). Motion
        trace paths and the sensor's calibration sweep path in it are
        relative to its folder; each file must exist.
    allow_outside_paths : bool
        Accept trace and sweep files outside the design file's folder
        (absolute paths, ``../``, links pointing elsewhere). Off by default,
        so a design file cannot make turnkit read files elsewhere.

    Returns
    -------
    ActuatorDesign

    Raises
    ------
    DesignFileError
        When the file cannot be read or any entry is invalid.
    """
    return load_design_file(path, allow_outside_paths=allow_outside_paths).design


@dataclasses.dataclass(frozen=True)
class LoadedDesign:
    """A design as read from its file, with a fingerprint of the bytes it was read from.

    Parameters
    ----------
    design : ActuatorDesign
        The design.
    path : pathlib.Path
        The file it was read from.
    sha256 : str
        SHA-256 (hex) of the file's bytes when read; :func:`save_design`
        refuses to save over the file when they changed since.
    """

    design: d.ActuatorDesign
    path: Path
    sha256: str


def load_design_file(path: str | os.PathLike, *, allow_outside_paths: bool = False) -> LoadedDesign:
    """Read a design file and remember what was read (see :class:`LoadedDesign`).

    Parameters
    ----------
    path : str or path-like
        The design file.
    allow_outside_paths : bool
        As for :func:`load_design`.

    Returns
    -------
    LoadedDesign

    Raises
    ------
    DesignFileError
        As :func:`load_design`.
    """
    from .datafiles import decode_text, read_file_bytes, resolve_data_path

    path = Path(path)
    if not path.exists() and not path.is_symlink():
        raise DesignFileError("", "design file not found", source=str(path))
    data = read_file_bytes(path, "design")
    if len(data) > MAX_DESIGN_FILE_BYTES:
        raise DesignFileError("", f"the design file is {len(data)} bytes; at most {MAX_DESIGN_FILE_BYTES} are "
                                  "read (a design file is a few kilobytes)", source=str(path))
    design = loads_design(decode_text(data, str(path), "design"), source=str(path))
    for index, scenario in enumerate(design.motion):
        if scenario.trace is not None:
            resolve_data_path(scenario.trace, path.parent, f"motion[{index}].trace", source=str(path),
                              allow_outside=allow_outside_paths, what="trace file")
    if design.sensor.sweep is not None:
        resolve_data_path(design.sensor.sweep, path.parent, "sensor.sweep", source=str(path),
                          allow_outside=allow_outside_paths, what="calibration sweep file")
    return LoadedDesign(design, path, hashlib.sha256(data).hexdigest())


def loads_design(text: str, source: str = "<string>") -> d.ActuatorDesign:
    """Read a design from TOML text.

    Parameters
    ----------
    text : str
        The TOML text.
    source : str
        Where the text came from, shown in error messages.

    Returns
    -------
    ActuatorDesign

    Raises
    ------
    DesignFileError
        On a TOML syntax error (with its line), an unknown or missing key, a
        value of the wrong type, unit dimension or range.
    """
    import tomllib

    if len(text) > MAX_DESIGN_FILE_BYTES:
        raise DesignFileError("", f"the design text is {len(text)} characters; at most {MAX_DESIGN_FILE_BYTES} "
                                  "are read", source=source)
    try:
        data = tomllib.loads(text)
    except RecursionError:
        raise DesignFileError("", "arrays or tables are nested too deeply to read; a design file needs at "
                                  "most a few levels", source=source) from None
    except tomllib.TOMLDecodeError as exc:
        match = _TOML_LINE.search(str(exc))
        line = int(match.group(1)) if match else None
        raise DesignFileError("", f"TOML syntax error: {exc}", source=source, line=line) from None
    return _Reader(source).design(data)


def trace_path(scenario: d.MotionScenario, design_file: str | os.PathLike) -> Path:
    """Where a trace scenario's CSV file is: its path taken relative to the design file's folder."""
    if scenario.trace is None:
        raise DesignValueError("MotionScenario.trace", None, "a file path", hint="this scenario has no trace")
    trace = Path(scenario.trace)
    if trace.is_absolute():
        return trace
    return Path(design_file).parent / trace


class _Reader:
    """Turns parsed TOML into design objects, naming the path of any bad entry."""

    def __init__(self, source: str):
        self.source = source

    def error(self, path: str, message: str) -> DesignFileError:
        return DesignFileError(path, message, source=self.source)

    # -- structure --

    def design(self, data: dict) -> d.ActuatorDesign:
        self.unknown_keys(data, _TOP_KEYS, "")
        if "format_version" not in data:
            raise self.error("format_version", f"missing; add format_version = {d.FORMAT_VERSION} at the top")
        version = data["format_version"]
        if isinstance(version, bool) or not isinstance(version, int) or version != d.FORMAT_VERSION:
            raise self.error("format_version", f"{_short(version)} is not a format this turnkit reads "
                                               f"(it reads format_version = {d.FORMAT_VERSION})")
        kwargs = self.fields(d.ActuatorDesign, {k: v for k, v in data.items() if k in
                                               ("format_version", "name", "description")}, "")
        stages = self.array_of_tables(data, "gear_train", "")
        kwargs["gear_train"] = tuple(self.stage(stage, f"gear_train[{i}]") for i, stage in enumerate(stages))
        for key, cls in _SECTIONS.items():
            if key in data:
                kwargs[key] = self.section(cls, self.table(data, key, ""), key)
        if "power" in data:
            kwargs["power"] = self.power(self.table(data, "power", ""))
        if "battery" in data:
            kwargs["battery"] = self.section(d.BatteryDesign, self.table(data, "battery", ""), "battery")
        for key, cls in _OPTIONAL_SECTIONS.items():
            if key in data:
                kwargs[key] = self.section(cls, self.table(data, key, ""), key)
        scenarios = self.array_of_tables(data, "motion", "")
        kwargs["motion"] = tuple(
            self.section(d.MotionScenario, m, f"motion[{i}]") for i, m in enumerate(scenarios)
        )
        return self.build(d.ActuatorDesign, kwargs, "")

    def stage(self, table: dict, path: str):
        kinds = tuple(d.STAGE_KINDS)
        if "kind" not in table:
            raise self.error(f"{path}.kind", f"missing; a stage needs kind = one of {', '.join(kinds)}")
        kind = table["kind"]
        if not isinstance(kind, str) or kind not in d.STAGE_KINDS:
            raise self.error(f"{path}.kind", f"{_short(kind)} is not a stage kind; expected one of "
                                             f"{', '.join(kinds)}{self.suggest(kind, kinds)}")
        rest = {k: v for k, v in table.items() if k != "kind"}
        return self.section(d.STAGE_KINDS[kind], rest, path, extra_keys=("kind",))

    def power(self, table: dict) -> d.PowerDesign:
        self.unknown_keys(table, _POWER_KEYS, "power")
        kwargs = self.fields(d.PowerDesign, {k: v for k, v in table.items() if k not in ("consumers", "host_supply")},
                             "power")
        consumers = self.array_of_tables(table, "consumers", "power")
        kwargs["consumers"] = tuple(
            self.section(d.PowerConsumer, c, f"power.consumers[{i}]") for i, c in enumerate(consumers)
        )
        if "host_supply" in table:
            kwargs["host_supply"] = self.section(
                d.HostSupply, self.table(table, "host_supply", "power"), "power.host_supply")
        return self.build(d.PowerDesign, kwargs, "power")

    def section(self, cls: type, table: dict, path: str, extra_keys: tuple[str, ...] = ()):
        self.unknown_keys(table, tuple(spec.key for spec in cls.FIELDS), path, extra_keys)
        return self.build(cls, self.fields(cls, table, path), path)

    def build(self, cls: type, kwargs: dict, path: str):
        try:
            return cls(**kwargs)
        except DesignValueError as exc:
            attr = exc.field.split(".", 1)[1] if "." in exc.field else exc.field
            key = cls.attr_to_key(attr)
            where = f"{path}.{key}" if path else key
            message = f"must be {exc.allowed}"
            if exc.value is not None and exc.value != "set":
                shown = f"{_number(exc.value)} {exc.unit}" if exc.unit and isinstance(exc.value, float) \
                    else repr(exc.value)
                message += f", not {shown}"
            if exc.hint:
                message += f"; {exc.hint}"
            raise self.error(where, message) from None

    def table(self, data: dict, key: str, path: str) -> dict:
        value = data[key]
        where = f"{path}.{key}" if path else key
        if not isinstance(value, dict):
            raise self.error(where, f"must be a table ([{where}]), not {_short(value)}")
        return value

    def array_of_tables(self, data: dict, key: str, path: str) -> list:
        if key not in data:
            return []
        value = data[key]
        where = f"{path}.{key}" if path else key
        if not isinstance(value, list) or not all(isinstance(v, dict) for v in value):
            raise self.error(where, f"must be an array of tables ([[{where}]]), not {_short(value)}")
        if len(value) > MAX_TABLES_PER_ARRAY:
            raise self.error(where, f"has {len(value)} entries; at most {MAX_TABLES_PER_ARRAY} are read")
        return value

    def unknown_keys(self, table: dict, known: tuple[str, ...], path: str, extra: tuple[str, ...] = ()) -> None:
        allowed = tuple(known) + tuple(extra)
        for key in table:
            if key not in allowed:
                where = f"{path}.{key}" if path else key
                raise self.error(where, f"unknown key {key!r}{self.suggest(key, allowed)}")

    @staticmethod
    def suggest(word: Any, options: tuple[str, ...]) -> str:
        import difflib  # here, not at import: only a misspelt key needs it

        close = difflib.get_close_matches(str(word), options, n=1, cutoff=0.6)
        if close:
            return f"; did you mean {close[0]!r}?"
        return f"; expected one of {', '.join(options)}"

    # -- values --

    def fields(self, cls: type, table: dict, path: str) -> dict:
        kwargs: dict[str, Any] = {}
        for spec in cls.FIELDS:
            where = f"{path}.{spec.key}" if path else spec.key
            if spec.key not in table:
                if spec.required:
                    raise self.error(where, f"missing; expected {spec.dimension_text()}")
                continue
            kwargs.update(self.value(spec, table[spec.key], where))
        return kwargs

    def value(self, spec: d.FieldSpec, raw: Any, where: str) -> dict:
        kind = spec.kind
        if kind == "quantity":
            return self.quantity(spec, raw, where)
        if kind == "fraction":
            number = self.fraction(raw, where)
            self.check_range(spec, number, raw, where, "")
            return {spec.key: number}
        if kind == "number":
            if isinstance(raw, bool) or not isinstance(raw, (int, float)):
                raise self.error(where, f"{_short(raw)} is not a number; expected {spec.dimension_text()}")
            self.check_range(spec, float(raw), raw, where, "")
            return {spec.key: float(raw)}
        if kind == "int":
            if isinstance(raw, bool) or not isinstance(raw, int):
                raise self.error(where, f"{_short(raw)} is not an integer; expected an integer {spec.range_text()}")
            if not spec.in_range(raw):
                raise self.error(where, f"{_short(raw)} is out of range; expected an integer {spec.range_text()}")
            return {spec.key: raw}
        if kind == "bool":
            if not isinstance(raw, bool):
                raise self.error(where, f"{_short(raw)} is not true or false")
            return {spec.key: raw}
        if kind == "choice":
            if raw not in spec.choices:
                raise self.error(where, f"{_short(raw)} is not allowed; expected "
                                        f"{spec.dimension_text()}{self.suggest(raw, spec.choices)}")
            return {spec.key: raw}
        if not isinstance(raw, str):
            raise self.error(where, f"{_short(raw)} is not a string; expected {spec.dimension_text()}")
        try:
            spec.check(raw, where)
        except DesignValueError as exc:
            raise self.error(where, f"{_short(raw)} is not allowed; expected {exc.allowed}") from None
        return {spec.key: raw}

    def quantity(self, spec: d.FieldSpec, raw: Any, where: str) -> dict:
        example = _EXAMPLES[spec.units[0]]
        if isinstance(raw, bool) or not isinstance(raw, (str, int, float)):
            raise self.error(where, f"{_short(raw)} is not a quantity; expected {spec.dimension_text()} "
                                    f"written as a string such as {example!r}")
        outcome = _convert_quantity(raw, spec.units) if isinstance(raw, str) else ("unitless",)
        if outcome[0] == "unitless":
            raise self.error(where, f"{_short(raw)} has no unit; expected {spec.dimension_text()}, "
                                    f"written with its unit such as {example!r}")
        if outcome[0] == "unreadable":
            raise self.error(where, f"cannot read {_short(raw)} as a quantity ({outcome[1]}); expected "
                                    f"{spec.dimension_text()} such as {example!r}")
        if outcome[0] == "dimension":
            raise self.error(where, f"{_short(raw)} is {outcome[1]}; expected {spec.dimension_text()}, "
                                    f"such as {example!r}")
        _, unit, value = outcome
        self.check_range(spec, value, raw, where, unit)
        return {spec.attr_for(unit): value}

    def fraction(self, raw: Any, where: str) -> float:
        from .units import angle_power, parse_quantity, quick_fraction

        if isinstance(raw, bool):
            raise self.error(where, f"{_short(raw)} is not a fraction; expected a number such as 0.02 or '2 %'")
        if isinstance(raw, (int, float)):
            return float(raw)
        if not isinstance(raw, str):
            raise self.error(where, f"{_short(raw)} is not a fraction; expected a number such as 0.02 or '2 %'")
        quick = quick_fraction(raw)
        if quick is not None:
            return quick
        try:
            q = parse_quantity(raw, where)
        except DesignValueError as exc:
            raise self.error(where, f"cannot read {_short(raw)} ({exc.hint}); expected a number such as 0.02 "
                                    "or a percentage such as '2 %'") from None
        if not q.dimensionless or angle_power(q) != 0:
            raise self.error(where, f"{_short(raw)} is {_describe_dimension(q)}; expected a fraction "
                                    "(dimensionless), such as 0.02 or '2 %'")
        return float(q.to("dimensionless").magnitude)

    def check_range(self, spec: d.FieldSpec, value: float, raw: Any, where: str, unit: str) -> None:
        if not math.isfinite(value):
            raise self.error(where, f"{_short(raw)} is not a finite number")
        if not spec.in_range(value):
            shown = f"{spec.range_text()} {unit}".rstrip()
            converted = f"{_number(value)} {unit}"
            got = f" (= {converted})" if unit and " ".join(str(raw).split()) != converted else ""
            raise self.error(where, f"{_short(raw)}{got} is out of range; expected {spec.dimension_text()} {shown}")


@lru_cache(maxsize=4096)
def _convert_quantity(raw: str, units: tuple[str, ...]) -> tuple:
    """Read ``raw`` as one of ``units``: ("ok", unit, value), ("unitless",),
    ("unreadable", reason) or ("dimension", words).

    Cached because pint's parser dominates the time to read a design file.
    """
    from .units import parse_quantity, quick_quantity, same_kind

    quick = quick_quantity(raw, units, d.UNIT_DIMENSIONS)
    if quick is not None:
        # A common unit read without building the pint registry; same value as below.
        return ("ok",) + quick
    try:
        q = parse_quantity(raw, "")
    except DesignValueError as exc:
        return ("unreadable", exc.hint)
    if q.unitless:
        return ("unitless",)
    for unit in units:
        if same_kind(q, _pint_unit(unit)):
            return ("ok", unit, float(q.to(_pint_unit(unit)).magnitude))
    return ("dimension", _describe_dimension(q))


def _short(value: Any, limit: int = 60) -> str:
    """``repr(value)`` cut to ``limit`` characters, safe for deeply nested values."""
    try:
        text = repr(value)
    except RecursionError:
        text = f"a deeply nested {type(value).__name__}"
    return text if len(text) <= limit else text[:limit - 3] + "..."


def _pint_unit(unit: str) -> str:
    """The pint spelling of a canonical unit ("deg/s^2" → "deg/s**2")."""
    return unit.replace("^", "**")


def _number(value: float) -> str:
    from .units import format_number

    return format_number(value)


def _describe_dimension(q) -> str:
    """Words for a quantity's dimension ("a time", "an angle", "dimensionless")."""
    from .units import angle_power, same_kind

    for unit, (dimension, _) in d.UNIT_DIMENSIONS.items():
        if same_kind(q, _pint_unit(unit)):
            article = "an" if dimension[0] in "aeiou" else "a"
            return f"{article} {dimension}"
    if q.dimensionless and angle_power(q) == 0:
        return "dimensionless"
    angle = angle_power(q)
    text = str(q.dimensionality)
    if angle:
        text = f"[angle]^{angle} * {text}" if text != "dimensionless" else f"[angle]^{angle}"
    return f"of dimension {text}"


# --- writing ---------------------------------------------------------------------

def _section_table(obj, skip: tuple[str, ...] = ()) -> dict:
    """The TOML table of one section: every field that is set, quantities with units."""
    from .units import format_quantity

    table: dict[str, Any] = {}
    for spec in type(obj).FIELDS:
        if spec.key in skip:
            continue
        for unit, attr in zip(spec.units or ("",), spec.attrs):
            value = getattr(obj, attr)
            if value is None:
                continue
            if spec.kind == "quantity":
                table[spec.key] = format_quantity(value, unit)
            elif spec.kind in ("fraction", "number"):
                table[spec.key] = float(value)
            else:
                table[spec.key] = value
    return table


def _design_dict(design: d.ActuatorDesign) -> dict:
    data = _section_table(design)
    data["gear_train"] = [{"kind": stage.KIND, **_section_table(stage)} for stage in design.gear_train]
    for key in ("sensor", "latches", "counter", "schedule"):
        data[key] = _section_table(getattr(design, key))
    power = _section_table(design.power)
    power["consumers"] = [_section_table(c) for c in design.power.consumers]
    if design.power.host_supply is not None:
        power["host_supply"] = _section_table(design.power.host_supply)
    data["power"] = power
    if design.battery is not None:
        data["battery"] = _section_table(design.battery)
    data["motion"] = [_section_table(m) for m in design.motion]
    requirements = _section_table(design.requirements)
    if requirements:
        data["requirements"] = requirements
    for key in _OPTIONAL_SECTIONS:
        if getattr(design, key) is not None:
            data[key] = _section_table(getattr(design, key))
    accuracy = _section_table(design.accuracy)
    if accuracy:
        data["accuracy"] = accuracy
    for key in ("gear_train", "motion"):
        if not data[key]:
            del data[key]
    if not power["consumers"]:
        del power["consumers"]
    return data


def dump_design(design: d.ActuatorDesign) -> str:
    """Write a design as design-file TOML text.

    Every field that is set is written, quantities as strings with their
    unit ("2 mm", "25 ms"), numbers exactly, so that
    ``loads_design(dump_design(x)) == x``.

    Parameters
    ----------
    design : ActuatorDesign

    Returns
    -------
    str
        TOML text.
    """
    import tomli_w

    if not isinstance(design, d.ActuatorDesign):
        raise TypeError(f"dump_design expects an ActuatorDesign, not {type(design).__name__}")
    header = "# turnkit actuator design file; quantities are strings with units.\n"
    return header + tomli_w.dumps(_design_dict(design))


def save_design(design: d.ActuatorDesign, path: str | os.PathLike, overwrite: bool = False, *,
                expected_sha256: str | None = None) -> Path:
    """Write a design file atomically, keeping what the user wrote in a file it replaces.

    A new file gets :func:`dump_design`'s text. Saving over an existing
    design file (``overwrite=True``) edits that file instead of rewriting it:
    only entries whose value changed are rewritten (with units, in the
    attribute's unit), entries the design gained are added, and entries,
    stages, consumers and motion scenarios it no longer has are removed.
    Comments, blank lines, key order and the way unchanged values are written
    ("0.002 m" stays "0.002 m" while the pitch is still 2 mm) are kept. The
    previous content is kept in ``<name>.bak`` beside the file (one level:
    each save replaces the last backup). When nothing changed the file and
    its backup are left alone.

    Saving is safe against other writers and odd files:

    * with ``expected_sha256`` (the fingerprint of the bytes the design was
      loaded from, :class:`LoadedDesign`), a file that changed on disk since
      is not touched: the save is refused, so nobody's edits are reverted;
    * concurrent saves of the same file (threads or processes) take turns
      on an exclusive lock; a save that would overwrite a newer version is
      refused as above;
    * a symbolic link is followed: its target is edited and the link stays;
    * a read-only file (no write permission bit) is refused;
    * every file is written to a temporary file beside the target and moved
      into place with :func:`os.replace`, then read back: a save that did
      not stick raises instead of returning. Temporary files left by a save
      that was killed are removed by the next save.

    Parameters
    ----------
    design : ActuatorDesign
    path : str or path-like
        Target file (conventionally ``*.toml``).
    overwrite : bool
        Replace an existing file. Without it an existing file raises
        :class:`FileExistsError`.
    expected_sha256 : str, optional
        Refuse to save over the file unless its bytes still have this
        SHA-256 (hex).

    Returns
    -------
    pathlib.Path
        The path written.

    Raises
    ------
    FileExistsError
        When the file exists and ``overwrite`` is false.
    DesignFileError
        When the design would not read back unchanged, the existing file is
        not a design file turnkit reads (bad TOML, unknown keys, invalid
        values), it changed since it was loaded, it is read-only, or the
        written file did not read back: it is then left untouched.
    """
    return _save(design, Path(path), overwrite, expected_sha256)[0]


def save_loaded_design(design: d.ActuatorDesign, loaded: LoadedDesign) -> LoadedDesign:
    """Save ``design`` over the file ``loaded`` came from, only if that file is unchanged since.

    Parameters
    ----------
    design : ActuatorDesign
        The design to write.
    loaded : LoadedDesign
        What was read from the file (:func:`load_design_file`) or returned by
        the previous save.

    Returns
    -------
    LoadedDesign
        The design, its file and the fingerprint of the bytes now on disk
        (pass it to the next save).

    Raises
    ------
    DesignFileError
        As :func:`save_design`; in particular when the file changed on disk
        since ``loaded`` was read (nothing is written then).
    """
    path, digest = _save(design, loaded.path, True, loaded.sha256)
    return LoadedDesign(design, path, digest)


def _sha256(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


def _save(design: d.ActuatorDesign, path: Path, overwrite: bool, expected: str | None) -> tuple[Path, str]:
    text = dump_design(design)
    # A design that does not read back the same would silently lose data.
    if loads_design(text, source=str(path)) != design:
        raise DesignFileError("", "the design does not read back unchanged; not saved", source=str(path))
    target = _save_target(path)
    if not os.path.lexists(target):
        data = text.encode("utf-8")
        try:
            _create_atomic(target, data, str(path))
            return path, _sha256(data)
        except FileExistsError:
            if not overwrite:
                raise FileExistsError(f"{path} exists; pass overwrite=True to replace it") from None
    if not overwrite:
        raise FileExistsError(f"{path} exists; pass overwrite=True to replace it")
    with _locked(target, str(path)) as handle:
        old_bytes = handle.read()
        if expected is not None and _sha256(old_bytes) != expected:
            raise DesignFileError("", "the file changed on disk since this design was loaded (someone or "
                                      "something else saved it); not saved, so their changes are kept. Load "
                                      "the file again, or save your design to another file", source=str(path))
        info = os.fstat(handle.fileno())
        if not info.st_mode & 0o222 or not os.access(target, os.W_OK):
            raise DesignFileError("", "the file is read-only; not saved (make it writable, or save to another "
                                      "file)", source=str(path))
        _remove_stale_temporaries(target)
        bom = codecs.BOM_UTF8 if old_bytes.startswith(codecs.BOM_UTF8) else b""
        new_text = _merge_into_file(old_bytes[len(bom):], design, str(path))
        if new_text is None:
            return path, _sha256(old_bytes)
        new_bytes = bom + new_text.encode("utf-8")
        _write_atomic(target.with_name(target.name + ".bak"), old_bytes, mode=info.st_mode, source=str(path))
        _write_atomic(target, new_bytes, mode=info.st_mode, source=str(path))
        try:
            stuck = target.read_bytes() == new_bytes
        except OSError:
            stuck = False
        if not stuck:
            raise DesignFileError("", "the file on disk is not what was written (another program replaced it "
                                      f"at the same moment); the version read before is in {target.name}.bak",
                                  source=str(path))
        return path, _sha256(new_bytes)


def _save_target(path: Path) -> Path:
    """The file a save writes: a symbolic link's target (the link stays a link)."""
    try:
        target = Path(os.path.realpath(path, strict=False))
    except OSError as exc:
        raise DesignFileError("", f"cannot follow the path: {exc.strerror}", source=str(path)) from None
    if os.path.islink(target):  # realpath stops at a loop and returns a link
        raise DesignFileError("", "the path is a loop of symbolic links; not saved", source=str(path))
    if os.path.lexists(target) and not stat.S_ISREG(os.stat(target).st_mode):
        raise DesignFileError("", "not a regular file (a folder, pipe or device); not saved", source=str(path))
    return target


class _locked:
    """Open ``target`` and hold an exclusive lock on the file that is at that path now.

    A save replaces the file (a new inode), so after taking the lock the
    opened file is compared with the one at the path; a stale one is dropped
    and the lock taken again. Where ``fcntl`` is missing (Windows) saves are
    not serialised.
    """

    def __init__(self, target: Path, source: str):
        self.target = target
        self.source = source
        self.handle = None

    def __enter__(self):
        try:
            import fcntl
        except ImportError:  # pragma: no cover - not on POSIX
            fcntl = None
        for _ in range(1000):
            try:
                handle = open(self.target, "rb")
            except FileNotFoundError:
                raise DesignFileError("", "the file was removed while saving; not saved", source=self.source) \
                    from None
            except OSError as exc:
                raise DesignFileError("", f"cannot open the file: {exc.strerror}", source=self.source) from None
            try:
                if fcntl is not None:
                    fcntl.flock(handle.fileno(), fcntl.LOCK_EX)
                if os.path.samestat(os.fstat(handle.fileno()), os.stat(self.target)):
                    self.handle = handle
                    return handle
            except FileNotFoundError:
                pass
            except BaseException:
                handle.close()
                raise
            handle.close()
        raise DesignFileError("", "the file keeps being replaced by another program; not saved", source=self.source)

    def __exit__(self, *exc) -> None:
        self.handle.close()  # closing releases the lock


def _temporary_prefix(path: Path) -> str:
    return f".{path.name}."


def _remove_stale_temporaries(path: Path) -> None:
    """Remove temporary files beside ``path`` left by a save whose process is gone."""
    prefix = _temporary_prefix(path)
    try:
        names = os.listdir(path.parent if str(path.parent) else ".")
    except OSError:
        return
    for name in names:
        if not (name.startswith(prefix) and name.endswith(".tmp")):
            continue
        pid_text = name[len(prefix):].split(".", 1)[0]
        if not pid_text.isdigit() or int(pid_text) == os.getpid():
            continue
        try:
            os.kill(int(pid_text), 0)
        except ProcessLookupError:
            try:
                os.unlink(path.parent / name)
            except OSError:
                pass
        except OSError:  # alive, owned by someone else
            continue


def _new_file_mode() -> int:
    # A new file gets the permissions of any new file (mkstemp makes it private).
    umask = os.umask(0)
    os.umask(umask)
    return 0o666 & ~umask


def _temporary(path: Path, data: bytes, mode: int, source: str) -> str:
    """A temporary file beside ``path`` holding ``data`` (flushed to disk); returns its name."""
    import tempfile  # here, not at import: reading and sizing never write

    folder = path.parent if str(path.parent) else Path(".")
    try:
        fd, temp_name = tempfile.mkstemp(prefix=f"{_temporary_prefix(path)}{os.getpid()}.", suffix=".tmp",
                                         dir=folder)
    except OSError as exc:
        raise DesignFileError("", f"cannot write in the folder {folder}: {exc.strerror}; not saved",
                              source=source) from None
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        os.chmod(temp_name, stat.S_IMODE(mode))
    except BaseException:
        os.unlink(temp_name)
        raise
    return temp_name


def _create_atomic(path: Path, data: bytes, source: str) -> None:
    """Create ``path`` holding ``data``; FileExistsError when it exists (never replaces a file)."""
    temp_name = _temporary(path, data, _new_file_mode(), source)
    try:
        try:
            os.link(temp_name, path)
        except FileExistsError:
            raise
        except OSError:  # a file system without hard links: exclusive create instead
            with open(path, "xb") as handle:
                handle.write(data)
    finally:
        os.unlink(temp_name)


def _write_atomic(path: Path, data: bytes, mode: int | None = None, source: str = "") -> None:
    """Write ``data`` to a temporary file beside ``path`` and move it into place."""
    temp_name = _temporary(path, data, _new_file_mode() if mode is None else mode, source or str(path))
    try:
        os.replace(temp_name, path)
    except BaseException:
        if os.path.exists(temp_name):
            os.unlink(temp_name)
        raise


def _merge_into_file(old_bytes: bytes, design: d.ActuatorDesign, source: str) -> str | None:
    """The existing file's text edited to describe ``design``; None when nothing changed.

    Raises DesignFileError when the existing file is not a design file turnkit
    reads, or when the edited text would not read back as ``design``.
    """
    import tomlkit

    try:
        old_text = old_bytes.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise DesignFileError("", f"cannot save over this file: it is not UTF-8 text ({exc}); nothing was "
                                  "written", source=source) from None
    try:
        old_design = loads_design(old_text, source=source)
    except DesignFileError as exc:
        raise DesignFileError("", f"cannot save over this file, it is not a design file turnkit reads ({exc}); "
                                  "nothing was written: fix it or save to another file", source=source) from None
    if old_design == design:
        return None
    try:
        doc = tomlkit.parse(old_text)
    except Exception as exc:  # tomlkit raises its own parse errors; tomllib accepted the text
        raise DesignFileError("", f"cannot edit this file while keeping its layout ({exc}); nothing was written",
                              source=source) from None
    merger = _Merger(doc)
    if doc.as_string() != old_text:
        doc, merger = tomlkit.parse(old_text), _Merger(None)
    try:
        merger.design(doc, old_design, design)
        new_text = doc.as_string()
    except Exception as exc:  # an unusual layout tomlkit cannot edit in place
        raise DesignFileError("", f"cannot edit this file while keeping its layout ({type(exc).__name__}: "
                                  f"{exc}); nothing was written: save to another file", source=source) from None
    if "\r\n" in old_text and "\n" not in old_text.replace("\r\n", ""):
        new_text = re.sub(r"(?<!\r)\n", "\r\n", new_text)
    try:
        same = loads_design(new_text, source=source) == design
    except DesignFileError:
        same = False
    if not same:
        raise DesignFileError("", "cannot edit this file while keeping its layout: the edited text would not "
                                  "read back as the design; nothing was written: save to another file",
                              source=source)
    return new_text


class _Defaults:
    """Stands for a section that the file leaves out: every attribute at its default."""

    def __init__(self, cls: type):
        self.values = {f.name: f.default for f in dataclasses.fields(cls)}

    def __getattr__(self, attr: str):
        return self.__dict__["values"].get(attr, dataclasses.MISSING)


class _Merger:
    """Edits a parsed tomlkit document in place so that it describes a new design.

    Values are compared as the loader reads them (old design object against
    new), so an entry is rewritten only when its value changed.
    """

    def __init__(self, doc):
        import tomlkit

        self.tomlkit = tomlkit
        self.created: list = []
        if doc is not None:
            self._attach_leading_comments(doc)

    # -- layout helpers --

    def _attach_leading_comments(self, doc) -> None:
        """Move comment lines that sit directly above a table header into the header's indent.

        tomlkit keeps such comments at the end of the previous table; moved,
        they travel with the table they describe when tables are removed or
        reordered. The rendered text does not change.
        """
        from tomlkit.items import AoT, Comment, Null, Table, Whitespace

        pending: list = []

        def header(table) -> None:
            nonlocal pending
            if pending and "\n" not in table.trivia.indent:
                text = "".join(item.as_string() for _, _, item in pending)
                for body, index, _ in pending:
                    body[index] = (None, Null())
                table.trivia.indent = text + table.trivia.indent
            pending = []

        def walk(container) -> None:
            nonlocal pending
            body = container.body
            for index, (_, item) in enumerate(body):
                if isinstance(item, Null):
                    continue
                if isinstance(item, Comment):
                    if "\n" in item.trivia.indent:
                        pending = []
                    pending.append((body, index, item))
                elif isinstance(item, Whitespace):
                    if "\n" in item.s:
                        pending = []
                elif isinstance(item, AoT):
                    for table in item.body:
                        header(table)
                        walk(table.value)
                elif isinstance(item, Table):
                    if not item.is_super_table():
                        header(item)
                    walk(item.value)
                else:
                    pending = []

        walk(doc)

    @staticmethod
    def _cut_tail(table) -> str:
        """Remove the blank lines and comments after a table's last entry; return their text."""
        from tomlkit.items import Comment, Null, Whitespace

        body = table.value.body
        index = len(body)
        while index > 0 and isinstance(body[index - 1][1], (Comment, Whitespace, Null)):
            index -= 1
        text = "".join(item.as_string() for _, item in body[index:])
        for i in range(index, len(body)):
            body[i] = (None, Null())
        return text

    def _insert(self, table, key: str, value: Any, after: str | None) -> None:
        """Add ``key`` after the entry ``after`` (or before the first entry when None)."""
        from tomlkit.container import Container
        from tomlkit.items import Comment, InlineTable, Null, Table, Whitespace

        container = table if isinstance(table, Container) else table.value if isinstance(table, Table) else None
        if container is None or isinstance(table, InlineTable):
            table[key] = value
            return
        if after is not None and after in container:
            container._insert_after(after, key, value)
            return
        body = container.body
        for index, (k, item) in enumerate(body):
            if k is not None or not isinstance(item, (Comment, Whitespace, Null)):
                container._insert_at(index, key, value)
                return
        if body:
            container._insert_at(0, key, value)
        else:
            container.append(key, value)

    def _space_nested(self, parent, first, last) -> None:
        """Blank lines around a table added inside another one (``[power.host_supply]``).

        Tables added to the document go at its end and need no trailing line;
        tomlkit spaces tables inside a table that is new itself.
        """
        if isinstance(parent, self.tomlkit.TOMLDocument) or any(parent is t for t in self.created):
            return
        if "\n" not in first.trivia.indent:
            first.trivia.indent = "\n" + first.trivia.indent
        last.add(self.tomlkit.nl())

    # -- sections --

    def fields(self, table, old, new, skip: tuple[str, ...] = ()) -> None:
        """Update the entries of one section: ``old`` as read from the file, ``new`` the design's."""
        written = _section_table(new, skip)
        # A stage's kind is not one of its FIELDS; new keys go after it.
        has_kind = any(spec.key == "kind" for spec in type(new).FIELDS)
        previous: str | None = "kind" if "kind" in table and not has_kind else None
        for spec in type(new).FIELDS:
            if spec.key in skip:
                continue
            present = spec.key in table
            if all(getattr(old, a) == getattr(new, a) for a in spec.attrs):
                pass
            elif spec.key not in written:
                if present:
                    del table[spec.key]
                    present = False
            elif present:
                table[spec.key] = written[spec.key]
            else:
                self._insert(table, spec.key, written[spec.key], previous)
                present = True
            if present:
                previous = spec.key

    def new_table(self, obj, fill) -> Any:
        """A new table holding what differs from an empty one."""
        table = self.tomlkit.table()
        self.created.append(table)
        fill(table, _Defaults(type(obj)), obj)
        return table

    def section(self, parent, key: str, old, new, fill=None) -> None:
        """A single table (``[sensor]``, ``[battery]``); ``old``/``new`` None when absent."""
        fill = fill or self.fields
        if old == new:
            return
        if key in parent:
            if new is None:
                del parent[key]
            else:
                fill(parent[key], old if old is not None else _Defaults(type(new)), new)
            return
        table = self.new_table(new, fill)
        self._space_nested(parent, table, table)
        parent.append(key, table)

    def design(self, doc, old: d.ActuatorDesign, new: d.ActuatorDesign) -> None:
        self.fields(doc, old, new)
        self.array(doc, "gear_train", old.gear_train, new.gear_train, self.stage, _align_stages)
        for key in ("sensor", "latches", "counter", "schedule"):
            self.section(doc, key, getattr(old, key), getattr(new, key))
        self.section(doc, "power", old.power, new.power, fill=self.power)
        self.section(doc, "battery", old.battery, new.battery)
        self.array(doc, "motion", old.motion, new.motion, self.fields, _align_named)
        self.section(doc, "requirements", old.requirements, new.requirements)
        for key in (*_OPTIONAL_SECTIONS, "accuracy"):
            self.section(doc, key, getattr(old, key), getattr(new, key))

    def stage(self, table, old, new) -> None:
        if "kind" not in table:
            self._insert(table, "kind", new.KIND, None)
        self.fields(table, old, new)

    def power(self, table, old, new) -> None:
        self.fields(table, old, new)
        empty = d.PowerDesign()
        old_consumers = old.consumers if isinstance(old, d.PowerDesign) else empty.consumers
        old_host = old.host_supply if isinstance(old, d.PowerDesign) else None
        self.array(table, "consumers", old_consumers, new.consumers, self.fields, _align_named)
        self.section(table, "host_supply", old_host, new.host_supply)

    # -- arrays of tables --

    def array(self, parent, key: str, old: tuple, new: tuple, fill, align) -> None:
        """Stages, consumers or motion scenarios: edit matched tables in place, drop and add the rest."""
        if old == new:
            return
        if not new:
            if key in parent:
                del parent[key]
            return
        if key not in parent:
            aot = self.tomlkit.aot()
            for obj in new:
                aot.append(self.new_table(obj, fill))
            self._space_nested(parent, aot.body[0], aot.body[-1])
            parent.append(key, aot)
            return
        container = parent[key]
        pairs = align(old, new)  # for each new item: index of the old item it replaces, or None
        if not isinstance(container, self.tomlkit.items.AoT):
            self._inline_array(container, old, new, pairs, fill)
            return
        originals = list(container.body)
        tails = [self._cut_tail(t) for t in originals]
        end_block = tails[-1]
        separator = tails[0] if len(originals) > 1 and not tails[0].strip() else "\n"
        tables = []
        for obj, index in zip(new, pairs):
            if index is None:
                table = self.new_table(obj, fill)
            else:
                table = originals[index]
                fill(table, old[index], obj)
            tables.append(table)
        if 0 not in pairs:
            # Comments above the first table may describe the whole array: keep them.
            lead, _, _ = originals[0].trivia.indent.rpartition("\n")
            if lead:
                tables[0].trivia.indent = lead + "\n" + tables[0].trivia.indent
        for position, (table, index) in enumerate(zip(tables, pairs)):
            if position == len(tables) - 1:
                own = tails[index] if index is not None and index != len(originals) - 1 else ""
                tail = (own.rstrip("\n") + "\n" if own.strip() else "") + end_block
            elif index is not None and index != len(originals) - 1:
                tail = tails[index]
            else:
                tail = separator
            if tail:
                table.add(self.tomlkit.ws(tail))
        del container[:]
        for table in tables:
            container.append(table)

    def _inline_array(self, array, old, new, pairs, fill) -> None:
        """The same edit for an array written inline (``gear_train = [{...}, {...}]``)."""
        items = list(array)
        result = []
        for obj, index in zip(new, pairs):
            if index is None:
                table = self.tomlkit.inline_table()
                fill(table, _Defaults(type(obj)), obj)
            else:
                table = items[index]
                fill(table, old[index], obj)
            result.append(table)
        kept = [i for i in pairs if i is not None]
        if kept == sorted(kept) and len(kept) == len(set(kept)):
            for index in sorted(set(range(len(items))) - set(kept), reverse=True):
                del array[index]
            for position, index in enumerate(pairs):
                if index is None:
                    array.insert(position, result[position])
        else:
            while len(array):
                del array[len(array) - 1]
            for table in result:
                array.append(table)


def _align_stages(old: tuple, new: tuple) -> list:
    """Match gear stages: unchanged stages by value, changed ones in place when of the same kind."""
    import difflib

    pairs: list = [None] * len(new)
    matcher = difflib.SequenceMatcher(None, list(old), list(new), autojunk=False)
    for tag, i1, i2, j1, j2 in matcher.get_opcodes():
        if tag == "equal":
            for k in range(i2 - i1):
                pairs[j1 + k] = i1 + k
        elif tag == "replace":
            for k in range(min(i2 - i1, j2 - j1)):
                if old[i1 + k].KIND == new[j1 + k].KIND:
                    pairs[j1 + k] = i1 + k
    return pairs


def _align_named(old: tuple, new: tuple) -> list:
    """Match consumers or scenarios by name; a renamed one keeps its place when it can be told."""
    import difflib

    old_names = [item.name for item in old]
    pairs: list = [old_names.index(item.name) if item.name in old_names else None for item in new]
    matcher = difflib.SequenceMatcher(None, old_names, [item.name for item in new], autojunk=False)
    used = {i for i in pairs if i is not None}
    for tag, i1, i2, j1, j2 in matcher.get_opcodes():
        if tag == "replace" and i2 - i1 == j2 - j1:
            for k in range(i2 - i1):
                if pairs[j1 + k] is None and i1 + k not in used:
                    pairs[j1 + k] = i1 + k
                    used.add(i1 + k)
    return pairs


# --- JSON Schema -----------------------------------------------------------------

def _field_schema(spec: d.FieldSpec) -> dict:
    text = spec.description
    if spec.kind == "quantity":
        schema: dict[str, Any] = {
            "type": "string",
            "pattern": _QUANTITY_PATTERN,
            "description": f"{text}. {spec.dimension_text().capitalize()}, {spec.range_text()}.",
            "examples": [_EXAMPLES[u] for u in spec.units],
        }
    elif spec.kind in ("fraction", "number", "int"):
        numeric: dict[str, Any] = {"type": "integer" if spec.kind == "int" else "number"}
        if spec.low is not None:
            numeric["exclusiveMinimum" if spec.low_open else "minimum"] = spec.low
        if spec.high is not None:
            numeric["exclusiveMaximum" if spec.high_open else "maximum"] = spec.high
        if spec.kind == "fraction":
            schema = {"anyOf": [numeric, {"type": "string", "pattern": _PERCENT_PATTERN}]}
        else:
            schema = numeric
        schema["description"] = f"{text}; {spec.dimension_text()}, {spec.range_text()}."
    elif spec.kind == "bool":
        schema = {"type": "boolean", "description": text}
    elif spec.kind == "choice":
        schema = {"enum": list(spec.choices), "description": text}
    elif spec.kind == "identifier":
        schema = {"type": "string", "pattern": r"^[A-Za-z_][A-Za-z0-9_]*$", "description": text}
    elif spec.kind == "path":
        schema = {"type": "string", "minLength": 1, "description": text}
    else:
        schema = {"type": "string", "description": text}
    if spec.default is not d.REQUIRED and spec.default is not None:
        schema["default"] = _default_text(spec)
    return schema


def _default_text(spec: d.FieldSpec) -> Any:
    from .units import format_quantity

    if spec.kind == "quantity":
        return format_quantity(spec.default, spec.units[0])
    if spec.kind in ("fraction", "number"):
        return float(spec.default)
    return spec.default


def _object_schema(cls: type, description: str, extra: dict | None = None, skip: tuple[str, ...] = ()) -> dict:
    properties = {spec.key: _field_schema(spec) for spec in cls.FIELDS if spec.key not in skip}
    properties.update(extra or {})
    schema: dict[str, Any] = {
        "type": "object",
        "description": description,
        "properties": properties,
        "additionalProperties": False,
    }
    required = [spec.key for spec in cls.FIELDS if spec.required and spec.key not in skip]
    if required:
        schema["required"] = required
    return schema


def _doc_line(cls: type) -> str:
    return (cls.__doc__ or "").strip().splitlines()[0]


def design_schema() -> dict:
    """The JSON Schema (draft 2020-12) of the design-file format.

    The schema checks structure, keys, types, choices and the shape of
    quantity strings; unit dimensions and ranges of quantities are stated in
    the descriptions and checked by :func:`loads_design`.

    Returns
    -------
    dict
        A JSON-serialisable schema.
    """
    defs: dict[str, Any] = {}
    for kind, cls in d.STAGE_KINDS.items():
        stage = _object_schema(cls, _doc_line(cls), extra={"kind": {"const": kind, "description": "stage kind"}})
        stage["required"] = ["kind"] + stage.get("required", [])
        if cls is d.BeltStage:
            stage["oneOf"] = [
                {"required": ["teeth_driver", "teeth_driven"]},
                {"required": ["pitch_diameter_driver", "pitch_diameter_driven"]},
            ]
        defs[f"{kind}_stage"] = stage
    motion = _object_schema(d.MotionScenario, _doc_line(d.MotionScenario))
    motion["allOf"] = [
        {
            "if": {"properties": {"kind": {"const": kind}}, "required": ["kind"]},
            "then": {
                "required": sorted(required),
                "propertyNames": {"enum": ["name", "kind", "at", *sorted(required | optional)]},
            },
        }
        for kind, (required, optional) in d.MOTION_FIELDS_BY_KIND.items()
    ]
    power_extra = {
        "consumers": {"type": "array", "items": _object_schema(d.PowerConsumer, _doc_line(d.PowerConsumer))},
        "host_supply": _object_schema(d.HostSupply, _doc_line(d.HostSupply)),
    }
    battery = _object_schema(d.BatteryDesign, _doc_line(d.BatteryDesign))
    battery["anyOf"] = [{"required": ["chemistry"]}, {"required": ["capacity", "nominal_voltage"]}]
    properties = {spec.key: _field_schema(spec) for spec in d.ActuatorDesign.FIELDS}
    properties["format_version"] = {"const": d.FORMAT_VERSION, "description": "design-file format version"}
    properties.update({
        "gear_train": {
            "type": "array",
            "description": "gear stages from the motor to the output",
            "items": {"oneOf": [{"$ref": f"#/$defs/{kind}_stage"} for kind in d.STAGE_KINDS]},
        },
        "sensor": _object_schema(d.SensorDesign, _doc_line(d.SensorDesign)),
        "latches": _object_schema(d.LatchDesign, _doc_line(d.LatchDesign)),
        "counter": _object_schema(d.CounterDesign, _doc_line(d.CounterDesign)),
        "schedule": _object_schema(d.ScheduleDesign, _doc_line(d.ScheduleDesign)),
        "power": _object_schema(d.PowerDesign, _doc_line(d.PowerDesign), extra=power_extra),
        "battery": battery,
        "motion": {"type": "array", "items": motion, "description": "motions that can happen while asleep"},
        "requirements": _object_schema(d.Requirements, _doc_line(d.Requirements)),
        **{key: _object_schema(cls, _doc_line(cls)) for key, cls in (*_OPTIONAL_SECTIONS.items(),
                                                                       ("accuracy", d.AccuracyDesign))},
    })
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "title": "turnkit actuator design file",
        "description": f"Actuator design file, format_version {d.FORMAT_VERSION}. Quantities are strings with "
                       "units, e.g. '2 mm', '15 uA', '25 ms', '5 years', '300 rpm'.",
        "type": "object",
        "required": ["format_version", "name"],
        "additionalProperties": False,
        "properties": properties,
        "$defs": defs,
    }
