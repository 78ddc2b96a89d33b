"""Common quantities read without pint give exactly what pint gives."""

from __future__ import annotations

import math

from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit import design as d
from turnkit.designfile import _convert_quantity, _pint_unit
from turnkit.units import QUICK_UNITS, parse_quantity, quick_fraction, quick_quantity, same_kind

# Number texts as people write them: whole, decimal, exponent, signed, zero.
numbers = st.one_of(
    st.integers(-10**7, 10**7).map(str),
    st.floats(-1e7, 1e7, allow_nan=False).map(repr),
    st.decimals(-10**4, 10**4, places=4, allow_nan=False, allow_infinity=False).map(str),
    st.sampled_from(["0", "-0", "-0.0", "+5", ".5", "5.", "1e3", "1E-3", "-1.5e+2", "007", "0.1", "05.5"]),
)
spacing = st.sampled_from(["", " ", "  ", "\t"])


def _pint_reading(text: str, units: tuple[str, ...]):
    """What the pint path gives: (canonical unit, value) or None when it refuses."""
    q = parse_quantity(text, "")
    for unit in units:
        if same_kind(q, _pint_unit(unit)):
            return unit, float(q.to(_pint_unit(unit)).magnitude)
    return None


@settings(max_examples=300)
@given(number=numbers, gap=spacing, written=st.sampled_from(sorted(QUICK_UNITS)))
def test_quick_reading_gives_the_same_unit_and_float_as_pint(number, gap, written):
    # Source: pint's own parser and conversion (the reference library for units).
    text = f"{number}{gap}{written}"
    target = QUICK_UNITS[written][1]
    units = (target,)
    quick = quick_quantity(text, units, d.UNIT_DIMENSIONS)
    if quick is None:
        return  # not a form the quick reader takes: pint reads it
    expected = _pint_reading(text, units)
    assert quick[0] == expected[0]
    assert quick[1] == expected[1] and math.copysign(1, quick[1]) == math.copysign(1, expected[1])


@settings(max_examples=100)
@given(number=numbers, gap=spacing)
def test_quick_percentage_is_the_fraction_pint_gives(number, gap):
    # Source: pint's own parser and conversion (the reference library for units).
    text = f"{number}{gap}%"
    quick = quick_fraction(text)
    if quick is None:
        return
    expected = float(parse_quantity(text, "").to("dimensionless").magnitude)
    assert quick == expected and math.copysign(1, quick) == math.copysign(1, expected)


def test_every_field_unit_reads_quickly_as_itself():
    for unit in d.UNIT_DIMENSIONS:
        assert quick_quantity(f"2.5 {unit}", (unit,), d.UNIT_DIMENSIONS) == (unit, 2.5), unit
        assert _convert_quantity(f"2.5 {unit}", (unit,)) == ("ok", unit, 2.5), unit


def test_a_field_whose_first_unit_of_that_kind_differs_goes_to_pint():
    # A time field in seconds does not take "5 ms" quickly (pint converts it), nor a length as a time.
    assert quick_quantity("5 ms", ("s",), d.UNIT_DIMENSIONS) is None
    assert quick_quantity("5 mm", ("s",), d.UNIT_DIMENSIONS) is None
    assert _convert_quantity("5 ms", ("s",)) == ("ok", "s", 0.005)
    assert quick_quantity("5 ms", ("mm", "ms"), d.UNIT_DIMENSIONS) == ("ms", 5.0)
