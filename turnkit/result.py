"""The sizing result: every number the views show, as immutable data.

The sizing engine (:mod:`turnkit.sizing`) fills these objects; the views
(notebook dashboard, exported summary, command line) only read them. Nothing
here computes physics.

Conventions
-----------
* Every :class:`Value` carries its unit as text (``"mm"``, ``"uA"``,
  ``"years"``, ``""`` for counts and ratios).
* Every :class:`Check` compares a value against a requirement with
  ``comparison`` ``"<="`` (value must not exceed the target) or ``">="``
  (value must reach the target) and reports a relative ``margin``: positive
  when it passes, negative when it fails, as a fraction of the target.
* A :class:`Curve` is plot data in plain arrays with axis labels and units,
  drawn the same way by the notebook (Bokeh) and the exported summary (SVG).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any, Callable

import numpy as np

__all__ = [
    "Value",
    "Check",
    "Scenario",
    "Series",
    "Marker",
    "Band",
    "Curve",
    "EquationText",
    "SizingResult",
    "relative_margin",
    "micro_sign",
    "duration_text",
    "register_view",
]


def relative_margin(value: float, target: float, comparison: str) -> float:
    """Margin of ``value`` against ``target`` as a fraction of the target.

    Positive passes, negative fails. ``"<="``: (target - value) / target;
    ``">="``: (value - target) / target.
    """
    if comparison not in ("<=", ">="):
        raise ValueError(f"comparison must be '<=' or '>=', not {comparison!r}")
    if target == 0:
        diff = (0.0 - value) if comparison == "<=" else value
        return math.copysign(math.inf, diff) if diff else 0.0
    if comparison == "<=":
        return (target - value) / abs(target)
    return (value - target) / abs(target)


@dataclass(frozen=True, slots=True)
class Value:
    """One derived value.

    Parameters
    ----------
    key : str
        Stable machine name, with the unit in it where it has one
        (``"output_resolution_mm"``).
    label : str
        Plain-English label for people.
    value : float or int or str
        The number (or a word, e.g. ``"yes"``).
    unit : str
        Unit text; ``""`` for counts and ratios.
    group : str
        Section it belongs to: ``"gear train"``, ``"sensor"``, ``"counter"``,
        ``"schedule"``, ``"power"``, ``"battery"``.
    equation : str
        Key of the equation that gives it (see :mod:`turnkit.equations`), or ``""``.
    note : str
        How it was obtained, or its source.
    """

    key: str
    label: str
    value: Any
    unit: str = ""
    group: str = ""
    equation: str = ""
    note: str = ""

    def formatted(self, digits: int = 4) -> str:
        """The value with its unit, to ``digits`` significant figures."""
        v = self.value
        if isinstance(v, bool):
            text = "yes" if v else "no"
        elif isinstance(v, (int, np.integer)):
            text = f"{int(v):,}".replace(",", " ")
        elif isinstance(v, (float, np.floating)):
            text = _fmt(float(v), digits)
        else:
            text = str(v)
        return f"{text} {micro_sign(self.unit)}".rstrip()


def _fmt(v: float, digits: int = 4) -> str:
    if not math.isfinite(v):
        return "unlimited" if v > 0 else ("-unlimited" if v < 0 else "n/a")
    if v == 0:
        return "0"
    mag = abs(v)
    if 1e-3 <= mag < 1e6:
        return f"{v:.{digits}g}"
    return f"{v:.{max(digits - 1, 1)}e}"


@dataclass(frozen=True, slots=True)
class Check:
    """A requirement and whether the design meets it.

    Parameters
    ----------
    key : str
        Stable machine name (``"battery_life"``).
    label : str
        Plain-English statement of the requirement.
    value, target : float
        What the design gives and what is required, both in ``unit``.
    unit : str
        Unit of value and target.
    comparison : {"<=", ">="}
        ``value <= target`` or ``value >= target`` passes.
    advice : str
        What to change when it fails (empty when it passes).
    """

    key: str
    label: str
    value: float
    target: float
    unit: str
    comparison: str
    advice: str = ""

    @property
    def passed(self) -> bool:
        """True when the requirement is met."""
        if self.comparison == "<=":
            return bool(self.value <= self.target)
        return bool(self.value >= self.target)

    @property
    def margin(self) -> float:
        """Relative margin: positive passes, negative fails (fraction of target)."""
        return relative_margin(float(self.value), float(self.target), self.comparison)


@dataclass(frozen=True, slots=True)
class Scenario:
    """One motion scenario simulated through the counter and its schedule.

    Counts are in quarter-turns of the motor shaft; ``max_output_error`` is
    in the output unit of the train (mm or deg).
    """

    name: str
    kind: str
    duration_s: float
    peak_motor_speed_rpm: float
    polls: int
    final_count_error_qt: int
    ambiguous_count: int
    silent_error_count: int
    overflow_count: int
    max_output_error: float
    output_unit: str
    note: str = ""

    @property
    def passed(self) -> bool:
        """True when the count came through exact, with no ambiguous or silent step."""
        return (self.final_count_error_qt == 0 and self.ambiguous_count == 0
                and self.silent_error_count == 0 and self.overflow_count == 0)


@dataclass(frozen=True, slots=True)
class Series:
    """One line on a plot: x and y arrays with a name."""

    name: str
    x: np.ndarray
    y: np.ndarray
    style: str = "line"  # "line", "dashed" (a reference line), "step", "points"

    def __post_init__(self) -> None:
        x = np.asarray(self.x, dtype=float)
        y = np.asarray(self.y, dtype=float)
        if x.shape != y.shape:
            raise ValueError(f"Series {self.name!r}: x and y differ in shape {x.shape} vs {y.shape}")
        x.flags.writeable = False
        y.flags.writeable = False
        object.__setattr__(self, "x", x)
        object.__setattr__(self, "y", y)


@dataclass(frozen=True, slots=True)
class Marker:
    """A labelled point (e.g. the current design) on a plot."""

    name: str
    x: float
    y: float


@dataclass(frozen=True, slots=True)
class Band:
    """A shaded x-range on a plot (e.g. the infeasible poll periods)."""

    name: str
    x_start: float
    x_end: float


@dataclass(frozen=True, slots=True)
class Curve:
    """Plot data with axis labels and units, for any view to draw."""

    key: str
    title: str
    x_label: str
    x_unit: str
    y_label: str
    y_unit: str
    series: tuple[Series, ...]
    markers: tuple[Marker, ...] = ()
    bands: tuple[Band, ...] = ()
    vlines: tuple[Marker, ...] = ()  # vertical reference lines: x used, y ignored
    log_x: bool = False
    log_y: bool = False
    note: str = ""


@dataclass(frozen=True, slots=True)
class EquationText:
    """An equation as shown in a summary."""

    key: str
    text: str
    latex: str = ""
    source: str = ""


@dataclass(frozen=True, slots=True)
class SizingResult:
    """Everything the sizing engine found for one design.

    Parameters
    ----------
    design_name : str
        The actuator's name as the user wrote it (escape before showing in HTML).
    design_hash : str
        SHA-256 (hex) of the design's canonical file text.
    turnkit_version : str
        Version that produced the result.
    output_unit : str
        ``"mm"`` or ``"deg"``.
    values, checks, scenarios, curves, equations : tuples
        See :class:`Value`, :class:`Check`, :class:`Scenario`, :class:`Curve`,
        :class:`EquationText`.
    warnings : tuple of str
        Things that work but deserve a second look.
    cautions : tuple of str
        Safety cautions for this design.
    assumptions : tuple of (str, str)
        Assumption text and its source.
    inputs : dict
        The design as read, with defaults filled in (quantities as text with units).
    """

    design_name: str
    design_hash: str
    turnkit_version: str
    output_unit: str
    values: tuple[Value, ...] = ()
    checks: tuple[Check, ...] = ()
    scenarios: tuple[Scenario, ...] = ()
    curves: tuple[Curve, ...] = ()
    equations: tuple[EquationText, ...] = ()
    warnings: tuple[str, ...] = ()
    cautions: tuple[str, ...] = ()
    assumptions: tuple[tuple[str, str], ...] = ()
    inputs: dict = field(default_factory=dict, compare=False, hash=False)

    @property
    def passed(self) -> bool:
        """True when every requirement and every scenario passes."""
        return all(c.passed for c in self.checks) and all(s.passed for s in self.scenarios)

    @property
    def failed_checks(self) -> tuple[Check, ...]:
        """The requirements that are not met."""
        return tuple(c for c in self.checks if not c.passed)

    def value(self, key: str) -> Value:
        """The derived value named ``key`` (KeyError lists the known keys)."""
        for v in self.values:
            if v.key == key:
                return v
        raise KeyError(f"no value {key!r}; known: {', '.join(v.key for v in self.values)}")

    def check(self, key: str) -> Check:
        """The requirement check named ``key``."""
        for c in self.checks:
            if c.key == key:
                return c
        raise KeyError(f"no check {key!r}; known: {', '.join(c.key for c in self.checks)}")

    def curve(self, key: str) -> Curve:
        """The plot data named ``key``."""
        for c in self.curves:
            if c.key == key:
                return c
        raise KeyError(f"no curve {key!r}; known: {', '.join(c.key for c in self.curves)}")

    def _repr_html_(self) -> str | None:
        # The view is registered by turnkit.export (imported by the sizing engine), so this
        # data module depends on no view. None lets a notebook fall back to the plain repr.
        view = _VIEWS.get("text/html")
        return view(self) if view is not None else None


# "u" as the micro prefix of a unit: after a digit, a digit and a space, or an opening bracket or
# slash, and followed by a unit symbol that ends the word ("15 uA", "(us)", "[uC]", "mAh/uA").
_MICRO_PREFIX = re.compile(r"(?:(?<=\d)|(?<=\d )|(?<=[(\[/])|^)u(?=(?:A|Ah|s|C|J|V|W|Wh|F|H|m)(?![\w]))")


def micro_sign(text: str) -> str:
    """Text with the ASCII micro prefix ``u`` of units written as ``µ`` (``"15 uA"`` → ``"15 µA"``).

    Design files and the JSON summary keep ``uA`` and ``us`` (plain ASCII, what pint reads); labels,
    readouts and tables that people read show ``µA`` and ``µs``.

    Parameters
    ----------
    text : str
        A unit (``"uA"``) or a sentence with quantities in it.

    Returns
    -------
    str
        The same text with each micro prefix written as the micro sign (U+00B5).
    """
    return _MICRO_PREFIX.sub("µ", text) if "u" in text else text


_SECONDS_PER_YEAR = 365.25 * 86400.0  # the Julian year, as everywhere in turnkit


def duration_text(seconds: float, digits: int = 4) -> str:
    """A duration in the unit people read it in: s, min, h, days or years.

    Parameters
    ----------
    seconds : float
        The duration in s.
    digits : int
        Significant figures.

    Returns
    -------
    str
        For example ``"15.49 s"``, ``"30 days"``, ``"10 years"`` (a year is 365.25 days).
    """
    s = float(seconds)
    if not math.isfinite(s) or abs(s) < 120.0:
        unit, scale = "s", 1.0
    elif abs(s) < 2 * 3600.0:
        unit, scale = "min", 60.0
    elif abs(s) < 2 * 86400.0:
        unit, scale = "h", 3600.0
    elif abs(s) < _SECONDS_PER_YEAR:
        unit, scale = "days", 86400.0
    else:
        unit, scale = "years", _SECONDS_PER_YEAR
    if not math.isfinite(s):
        return _fmt(s, digits)
    text = _fmt(s / scale, digits)
    return f"{text} {unit[:-1] if text == '1' and unit.endswith('s') and unit != 's' else unit}"


#: Views that draw a :class:`SizingResult`, by MIME type (see :func:`register_view`).
_VIEWS: dict[str, Callable[[SizingResult], str]] = {}


def register_view(mime_type: str, view: Callable[[SizingResult], str]) -> None:
    """Register the function that draws a result as ``mime_type`` (e.g. ``"text/html"`` for notebooks).

    Parameters
    ----------
    mime_type : str
        The MIME type the view produces.
    view : callable
        Takes a :class:`SizingResult`, returns its text in that type.
    """
    _VIEWS[mime_type] = view
