"""The one pint unit registry and the helpers that convert at the boundary.

The numeric core works in plain floats whose names carry the unit
(``lead_mm``, ``sleep_current_uA``, ``poll_period_s``). Quantities with units
("2 mm", "15 uA", "5 years") are parsed here, once, at the edge: design files,
the command line and ``from_quantities`` constructors. pint is imported
lazily so that ``import turnkit`` stays light.
"""

from __future__ import annotations

import math
import re
from functools import lru_cache
from typing import Any

from .errors import DesignValueError

__all__ = [
    "registry",
    "parse_quantity",
    "to_magnitude",
    "angle_power",
    "same_kind",
    "format_number",
    "format_quantity",
    "quick_quantity",
    "quick_fraction",
    "is_plain_unit",
]

# The fixed grammar of a quantity: a number, then (optionally) a unit. Only the
# unit part is ever handed to pint, so no text is evaluated as an expression
# ("9**9**9 ms" would otherwise make pint compute a huge power).
_NUMBER = r"[-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?"
_UNIT_NAME = r"(?:[A-Za-z_\u00b0\u2126][A-Za-z_\u00b0\u2126]*|%)"
_UNIT_FACTOR = rf"{_UNIT_NAME}(?:\s*(?:\^|\*\*)\s*[-+]?\d)?"
_UNIT = rf"{_UNIT_FACTOR}(?:\s*[*/]\s*{_UNIT_FACTOR}|\s+{_UNIT_FACTOR})*"
_PLAIN_UNIT = re.compile(rf"^\s*{_UNIT}\s*$")


def is_plain_unit(text: str) -> bool:
    """True when ``text`` is a unit of the fixed grammar (names, ``*``, ``/``, one-digit powers),
    the only unit text ever handed to pint: no numbers, no arithmetic, nothing evaluated.

    Parameters
    ----------
    text : str
        A unit as written, e.g. ``"mV"`` or ``"deg/s^2"``.

    Returns
    -------
    bool
    """
    return isinstance(text, str) and len(text) <= 40 and _PLAIN_UNIT.match(text) is not None
_QUANTITY = re.compile(rf"^\s*({_NUMBER})\s*({_UNIT})?\s*$")
_DECIMAL_COMMA = re.compile(r"^\s*[-+]?\d*,\d")
_STARTS_WITH_NUMBER = re.compile(rf"^\s*{_NUMBER}")
#: Longest quantity text read (longer text is refused before any parsing).
MAX_QUANTITY_CHARS = 80
_ALLOWED = "a number and a unit such as '2 mm', '15 uA' or '5 years'"


@lru_cache(maxsize=1)
def registry():
    """Return the shared pint ``UnitRegistry`` (created on first use)."""
    import pint

    ureg = pint.UnitRegistry()
    # Battery and electronics people write "mAh", "uA", "years" and "rpm".
    ureg.define("revolution_per_minute_alias = revolution / minute")
    ureg.define("quarter_turn = 0.25 * revolution = qt")
    return ureg


def parse_quantity(text: Any, field: str):
    """Parse ``text`` ("2 mm", "15 uA") into a pint Quantity.

    The text must be a number followed by an optional unit: digits with a
    decimal point and an optional exponent (``1.5``, ``2e-3``), then a unit
    made of unit names joined by ``*``, ``/`` or spaces, each with an optional
    one-digit power (``mm/s^2``, ``deg/s**2``). Nothing else is accepted:
    decimal commas (``"1,2 uA"``), a unit without a number (``"ms"``),
    arithmetic (``"2**10 ms"``) and temperature differences
    (``"25 delta_degC"``) are refused with a hint. Only the unit part is
    given to pint.

    Parameters
    ----------
    text : str or number or pint.Quantity
        The value as written by the user. Bare numbers are dimensionless.
    field : str
        The field path, used in error messages.

    Raises
    ------
    DesignValueError
        When the text is not a number and a unit pint knows.
    """
    ureg = registry()
    if isinstance(text, ureg.Quantity):
        return text
    if isinstance(text, bool):
        raise DesignValueError(field, text, _ALLOWED)
    if isinstance(text, (int, float)):
        return ureg.Quantity(text)
    if not isinstance(text, str):
        raise DesignValueError(field, text, _ALLOWED)
    if len(text) > MAX_QUANTITY_CHARS:
        raise DesignValueError(field, text[:20] + "...", _ALLOWED,
                               hint=f"the text is {len(text)} characters long; at most {MAX_QUANTITY_CHARS} are read")
    cleaned = text.replace("\u00b5", "u").replace("\u03bc", "u")
    match = _QUANTITY.match(cleaned)
    if match is None:
        raise DesignValueError(field, text, _ALLOWED, hint=_grammar_hint(cleaned))
    number, unit = match.group(1), (match.group(2) or "").strip()
    value = float(number)
    if not unit:
        return ureg.Quantity(value)
    if "delta_" in unit.lower():
        raise DesignValueError(field, text, _ALLOWED, hint="a temperature difference (delta_...) is not a "
                                                             "temperature; write the temperature itself, "
                                                             "such as '25 degC'")
    try:
        parsed = _parse_unit(unit)
    except DesignValueError as exc:
        raise DesignValueError(field, text, _ALLOWED, hint=exc.hint) from None
    return ureg.Quantity(value, parsed)


def _grammar_hint(text: str) -> str:
    """Why ``text`` is not "number unit", in words a user can act on."""
    if _DECIMAL_COMMA.match(text):
        return "use a decimal point, not a comma (write '1.2 uA', not '1,2 uA'), and no thousands separators"
    if not _STARTS_WITH_NUMBER.match(text):
        return "it must start with a number (write '1 ms', not 'ms')"
    return ("after the number comes one unit such as 'mm', 'uA', 'mm/s' or 'deg/s^2'; arithmetic "
            "('2**3', '2*3') is not read")


@lru_cache(maxsize=512)
def _parse_unit(unit: str):
    """The pint unit for the unit part of a quantity (cached: pint's parser is slow)."""
    try:
        return registry().parse_units(unit)
    except Exception as exc:  # pint raises several unrelated types for unknown names
        raise DesignValueError("unit", unit, "a unit pint knows", hint=f"unknown unit: {exc}") from None


def to_magnitude(text: Any, unit: str, field: str) -> float:
    """Parse ``text`` and return its magnitude in ``unit`` as a float.

    A bare number is taken to be in ``unit`` already. A quantity of the wrong
    dimension raises :class:`DesignValueError` naming the expected unit.

    Examples
    --------
    >>> to_magnitude("2 mm", "m", "lead")
    0.002
    >>> to_magnitude("1 mA", "uA", "sleep_current")
    1000.0
    """
    ureg = registry()
    q = parse_quantity(text, field)
    if q.dimensionless and not ureg.Quantity(1, unit).dimensionless:
        return float(q.magnitude)
    try:
        return float(q.to(unit).magnitude)
    except Exception:
        expected = ureg.Quantity(1, unit).dimensionality
        raise DesignValueError(
            field, str(text), f"a quantity convertible to {unit} (dimension {expected})",
            hint=f"'{text}' has dimension {q.dimensionality}",
        ) from None


def angle_power(quantity) -> int:
    """Return the power of angle in ``quantity``'s unit (deg → 1, rpm → 1, Hz → 0).

    pint treats angles as dimensionless, so "2 deg" and "2 %" or "1 Hz" and
    "1 rpm" would otherwise convert into each other silently. Counting the
    radians in the root units tells an angle from a plain fraction and a
    rotational speed from a frequency.
    """
    ureg = registry()
    _, root = ureg.get_root_units(quantity.units)
    return int(root._units.get("radian", 0))


@lru_cache(maxsize=256)
def _unit_kind(unit: str):
    """(dimensionality, power of angle) of a unit, cached: building it is slow in pint."""
    reference = registry().Quantity(1, unit)
    return reference.dimensionality, angle_power(reference)


def same_kind(quantity, unit: str) -> bool:
    """True when ``quantity`` converts to ``unit`` and has the same power of angle."""
    dimensionality, power = _unit_kind(unit)
    if quantity.dimensionality != dimensionality:
        return False
    return angle_power(quantity) == power


def format_number(value: float) -> str:
    """Shortest text that reads back as exactly ``value`` ("2", "0.1", "1e-05")."""
    value = float(value)
    if not math.isfinite(value):
        raise ValueError(f"cannot write a non-finite number: {value!r}")
    if value.is_integer() and abs(value) < 1e15:
        return str(int(value))
    return repr(value)


def format_quantity(value: float, unit: str) -> str:
    """Write ``value`` in ``unit`` as text a design file accepts, e.g. "2 mm".

    The number is written so that parsing the text gives back exactly the
    same float.
    """
    return f"{format_number(value)} {unit}"


# ---------------------------------------------------------------------------
# reading common quantities without pint
# ---------------------------------------------------------------------------
#
# Design files mostly write "number unit" in a field's own unit or a near prefix ("2 mm",
# "1.5 mA"). Those are read here with the same result as pint (the factors were taken from
# pint once; tests/test_units_quick.py checks every entry against pint), so loading such a
# file never builds the pint registry. Anything else goes to pint as before.

_QUICK_NUMBER = re.compile(
    r"^\s*([-+]?)((?:0|[1-9]\d*)(?:\.\d*)?(?:[eE][-+]?\d+)?|\.\d+(?:[eE][-+]?\d+)?)\s*([A-Za-z%][A-Za-z/^*0-9]*)\s*$")

#: Written unit -> (dimension, canonical unit it converts to, factor). The dimension words are
#: those of :data:`turnkit.design.UNIT_DIMENSIONS`; a factor of 1 keeps the number as written.
QUICK_UNITS: dict[str, tuple[str, str, float]] = {
    **{u: (dim, u, 1) for u, dim in (
        ("mm", "length"), ("deg", "angle"), ("rpm", "rotational speed"), ("mm/s", "linear speed"),
        ("deg/s^2", "angular acceleration"), ("mm/s^2", "linear acceleration"), ("s", "time"), ("ms", "time"),
        ("us", "time"), ("years", "time"), ("mV", "voltage"), ("V", "voltage"), ("uA", "current"),
        ("mAh", "charge"), ("Hz", "frequency"), ("degC", "temperature"))},
    "mA": ("current", "uA", 1000),
    "uV": ("voltage", "mV", 0.001),
}

#: Written unit -> factor to a plain fraction ("2 %" is 0.02).
QUICK_FRACTIONS: dict[str, float] = {"%": 0.01}


def _quick_number(text: str):
    """(number as pint reads it, unit text) of "number unit", or None."""
    match = _QUICK_NUMBER.match(text.replace("µ", "u").replace("μ", "u"))
    if match is None:
        return None
    sign, digits, unit = match.groups()
    if len(digits) > 40:
        return None  # very long numbers go the general way (int() of thousands of digits is refused)
    # The general reader takes the number as a float of the text as written (so "-0" is -0.0).
    return float(sign + digits), unit


def quick_quantity(text: str, units: tuple[str, ...], dimensions: dict[str, tuple[str, str]]):
    """Read "number unit" as one of ``units`` without pint, or return None (then ask pint).

    Parameters
    ----------
    text : str
        The value as written ("2 mm", "1.5 mA").
    units : tuple of str
        The field's canonical units, in order of preference.
    dimensions : dict
        Canonical unit -> (dimension word, attribute suffix), as :data:`turnkit.design.UNIT_DIMENSIONS`.

    Returns
    -------
    (unit, value) or None
        The canonical unit chosen (the first of ``units`` of the written unit's dimension) and the
        value in it, float; the same pair the pint path gives.
    """
    parsed = _quick_number(text)
    if parsed is None:
        return None
    value, written = parsed
    if written in units and written in dimensions:
        # Written in a unit of the field's own: taken as written when it is the field's first unit of
        # that kind (the unit the general reader converts to).
        kind = dimensions[written][0]
        if next(u for u in units if dimensions.get(u, ("",))[0] == kind) == written:
            return written, float(value)
    if written not in QUICK_UNITS:
        return None
    dimension, target, factor = QUICK_UNITS[written]
    first = next((u for u in units if dimensions.get(u, ("",))[0] == dimension), None)
    if first != target:
        return None
    return target, float(value * factor if factor != 1 else value)


def quick_fraction(text: str) -> float | None:
    """Read "number %" as a plain fraction without pint (0.02 for "2 %"), or None."""
    parsed = _quick_number(text)
    if parsed is None or parsed[1] not in QUICK_FRACTIONS:
        return None
    return float(parsed[0] * QUICK_FRACTIONS[parsed[1]])
