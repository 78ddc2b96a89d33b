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
]

# A number at the start of a quantity string, used to read offset units
# ("25 degC") that pint refuses to multiply out of a string expression.
_LEADING_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


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

    Parameters
    ----------
    text : str or number or pint.Quantity
        The value as written by the user. Bare numbers are dimensionless.
    field : str
        The field path, used in error messages.

    Raises
    ------
    DesignValueError
        When the text is not a quantity pint understands.
    """
    ureg = registry()
    if isinstance(text, ureg.Quantity):
        return text
    if isinstance(text, bool):
        raise DesignValueError(field, text, "a number or a quantity with a unit such as '2 mm'")
    if isinstance(text, (int, float)):
        return ureg.Quantity(text)
    if not isinstance(text, str):
        raise DesignValueError(field, text, "a number or a quantity with a unit such as '2 mm'")
    cleaned = text.strip().replace("µ", "u").replace("μ", "u")
    try:
        q = ureg.Quantity(cleaned)
    except Exception as exc:  # pint raises several unrelated types here
        offset = _parse_offset_quantity(cleaned)
        if offset is not None:
            return offset
        raise DesignValueError(
            field, text, "a quantity with a unit such as '2 mm', '15 uA' or '5 years'",
            hint=f"pint said: {exc}",
        ) from None
    return q


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


def _parse_offset_quantity(text: str):
    """Read "number unit" with an offset unit (degC, degF) as one quantity.

    pint parses "25 degC" as the product 25 * degC, which is ambiguous for
    offset units; building the quantity from its two parts is not.
    """
    ureg = registry()
    match = _LEADING_NUMBER.match(text)
    if match is None or not match.group(2):
        return None
    try:
        return ureg.Quantity(float(match.group(1)), match.group(2))
    except Exception:  # not a unit pint knows either: report the original error
        return None


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
    r"^\s*([-+]?)((?:0|[1-9]\d*)(?:\.\d*)?(?:[eE][-+]?\d+)?|\.\d+(?:[eE][-+]?\d+)?)\s*([A-Za-z%][A-Za-z/^0-9]*)\s*$")

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
    if unit == "degC":
        # Offset units are read from their leading number as a float (see _parse_offset_quantity).
        return float(sign + digits), unit
    # pint keeps whole numbers as int (so "-0" is 0, not -0.0) and applies the sign afterwards.
    value = int(digits) if digits.isdigit() else float(digits)
    return (-value if sign == "-" else value), unit


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
    if parsed is None or parsed[1] not in QUICK_UNITS:
        return None
    value, written = parsed
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
