"""The calibration fit's reweighting median is numpy's median."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.calibration import _median


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6, allow_nan=False), min_size=1, max_size=400))
def test_reweighting_median_is_numpy_median_to_the_bit(values):
    # Source: numpy.median (reference library).
    a = np.asarray(values)
    assert np.float64(_median(a)).tobytes() == np.median(a).tobytes() or _median(a) == np.median(a) == 0.0
    assert np.isnan(_median(np.append(a, np.nan)))
