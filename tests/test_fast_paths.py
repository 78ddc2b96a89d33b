"""Fast paths for the common case give exactly what the general path gives."""

import numbers

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit import battery
from turnkit.calibration import _median
from turnkit.equations import _is_real_number


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=1, max_size=400))
def test_reweighting_median_is_numpy_median_to_the_bit(values):
    # Source: numpy.median (reference library).
    a = np.asarray(values)
    assert np.float64(_median(a)).tobytes() == np.median(a).tobytes() or _median(a) == np.median(a) == 0.0
    assert np.isnan(_median(np.append(a, np.nan)))


@settings(max_examples=200, deadline=None)
@given(key=st.sampled_from(battery.available_cells()), where=st.floats(0, 1), integer=st.booleans())
def test_temperature_factor_of_one_number_is_the_array_path_value(key, where, integer):
    cell = battery.cell(key)
    low, high = cell.operating_range_C
    t = low + where * (high - low)
    t = int(np.clip(round(t), np.ceil(low), np.floor(high))) if integer else t
    general = cell.temperature_factor(np.array([t]))[0]
    quick = cell.temperature_factor(t)
    assert type(quick) is float and quick == general


def test_real_number_check_answers_as_the_abstract_class_does():
    for value in (1, 1.5, -0.0, float("nan"), np.float64(2), np.int32(3), True, np.bool_(True), "1", None, 1j):
        assert _is_real_number(value) == (isinstance(value, numbers.Real) and not isinstance(value, bool))
