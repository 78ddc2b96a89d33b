"""Hall latch quadrant code, half-turn resolution and its margin."""

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.errors import DesignValueError
from turnkit.latches import (
    GRAY_SEQUENCE,
    LOST_POSITION_CAUTION,
    QuadrantLatches,
    combine_half_turn_deg,
    decode_full_turn_deg,
    gray_to_quadrant,
    half_turn_margin,
    quadrant_to_gray,
    simulate_half_turn,
)
from turnkit.sensor import BridgeSensor, decode_deg


def test_gray_cycle_changes_one_bit_per_step():
    # Source: F. Gray, "Pulse code communication", US patent 2,632,058 (1953): 2-bit reflected
    # cycle, forward 00 → 01 → 11 → 10 → 00.
    assert GRAY_SEQUENCE == (0b00, 0b01, 0b11, 0b10)
    for a, b in zip(GRAY_SEQUENCE, GRAY_SEQUENCE[1:] + GRAY_SEQUENCE[:1]):
        assert bin(a ^ b).count("1") == 1


def test_gray_to_quadrant_reference_vectors():
    # Source: (derived, shown in docs/derivations.md §1): b1 = g1, b0 = g1 ⊕ g0; 00→0, 01→1, 11→2, 10→3.
    np.testing.assert_array_equal(gray_to_quadrant([0b00, 0b01, 0b11, 0b10]), [0, 1, 2, 3])
    np.testing.assert_array_equal(quadrant_to_gray([0, 1, 2, 3]), [0b00, 0b01, 0b11, 0b10])


def test_gray_rejects_codes_outside_two_bits():
    with pytest.raises(DesignValueError, match="code"):
        gray_to_quadrant(4)
    with pytest.raises(DesignValueError, match="quadrant"):
        quadrant_to_gray(-1)


def test_ideal_latches_report_the_quadrant_of_the_shaft():
    latches = QuadrantLatches(switch_point_tolerance_deg=0.0, hysteresis_deg=0.0)
    theta = np.linspace(0.5, 719.5, 1440)
    code = latches.code(theta)
    np.testing.assert_array_equal(code, quadrant_to_gray(np.floor(np.mod(theta, 360) / 90)))


def test_joining_fine_angle_and_quadrant_reference_example():
    # Source: (derived, shown in docs/derivations.md §1) joining the fine angle and the quadrant: θ = 200°:
    # AMR el 40° → 20°;
    # quadrant 2 → 200°.
    assert combine_half_turn_deg(20.0, quadrant_to_gray(2)) == pytest.approx(200.0)
    assert combine_half_turn_deg(20.0, quadrant_to_gray(0)) == pytest.approx(20.0)


def test_sensor_decode_and_latches_give_the_whole_turn():
    sensor = BridgeSensor(amplitude_mV=50.0)
    latches = QuadrantLatches(switch_point_tolerance_deg=5.0, hysteresis_deg=4.0)
    theta = np.linspace(-720.0, 720.0, 14401)
    fine = sensor.decode_deg(*sensor.signals(theta))
    trace = simulate_half_turn(latches, theta, fine, switch_shift_deg=(5.0, -5.0))
    assert not trace.wrong.any()
    assert np.max(np.abs(trace.error_deg)) < 1e-9


def test_hysteresis_delays_each_edge_by_half_its_width_in_the_direction_of_travel():
    latches = QuadrantLatches(switch_point_tolerance_deg=0.0, hysteresis_deg=6.0)
    up = np.linspace(60.0, 120.0, 60001)
    code_up = latches.code(up)
    first_q1 = up[np.argmax(code_up == quadrant_to_gray(1))]
    assert first_q1 == pytest.approx(93.0, abs=2e-3)
    down = up[::-1]
    code_down = latches.code(down)
    first_q0 = down[np.argmax(code_down == quadrant_to_gray(0))]
    assert first_q0 == pytest.approx(87.0, abs=2e-3)


def test_switch_shift_and_misalignment_move_the_edges():
    latches = QuadrantLatches(switch_point_tolerance_deg=3.0, hysteresis_deg=0.0,
                              magnet_misalignment_deg=2.0)
    up = np.linspace(80.0, 100.0, 20001)
    code = latches.code(up, switch_shift_deg=(0.0, 3.0))
    assert up[np.argmax(code == quadrant_to_gray(1))] == pytest.approx(95.0, abs=2e-3)


def test_margin_adds_up_the_budget():
    # Source: (derived, shown in docs/sensor.md, Half-turn resolution): margin = 45° − (switch-point
    # tolerance + hysteresis/2 + |misalignment| + fine-angle error).
    m = half_turn_margin(QuadrantLatches(5.0, 4.0, -1.0), fine_error_deg=0.5)
    assert m.available_deg == 45.0
    assert m.consumed_deg == pytest.approx(5.0 + 2.0 + 1.0 + 0.5)
    assert m.margin_deg == pytest.approx(36.5)
    assert m.ok and m.fail_zones_deg == ()
    assert m.caution == LOST_POSITION_CAUTION and "crush" in m.caution
    assert not half_turn_margin(QuadrantLatches(5.0, 4.0), required_margin_deg=40.0).ok


def test_negative_margin_flags_zones_next_to_each_edge():
    m = half_turn_margin(QuadrantLatches(48.0, 4.0))
    assert not m.ok and m.margin_deg == pytest.approx(-5.0)
    assert len(m.fail_zones_deg) == 8
    assert (310.0, 315.0) in m.fail_zones_deg and (45.0, 50.0) in m.fail_zones_deg


def _in_zones(angles, zones, slack=1e-6):
    a = np.mod(angles, 360.0)
    inside = np.zeros(a.shape, bool)
    for lo, hi in zones:
        inside |= ((a >= lo - slack) & (a <= hi + slack)) | ((a + 360 >= lo - slack) & (a + 360 <= hi + slack))
    return inside


def test_unit_at_worst_case_beyond_margin_slips_exactly_inside_predicted_zones():
    latches = QuadrantLatches(switch_point_tolerance_deg=50.0, hysteresis_deg=4.0)
    m = half_turn_margin(latches)
    theta = np.linspace(0.0, 720.0, 72001)
    seen = 0
    for shift in ((50.0, 50.0), (-50.0, -50.0), (50.0, -50.0)):
        for path in (theta, theta[::-1]):
            trace = simulate_half_turn(latches, path, switch_shift_deg=shift)
            assert trace.wrong.any()
            assert _in_zones(trace.wrong_angles_deg, m.fail_zones_deg).all()
            seen += trace.wrong.sum()
    assert seen > 0


@settings(max_examples=40, deadline=None)
@given(
    tol=st.floats(0.0, 20.0), hyst=st.floats(0.0, 20.0), mis=st.floats(-10.0, 10.0),
    fine_err=st.floats(0.0, 5.0), u1=st.floats(-1.0, 1.0), u2=st.floats(-1.0, 1.0),
    start=st.floats(-360.0, 360.0),
)
def test_combined_angle_is_true_everywhere_inside_the_margin(tol, hyst, mis, fine_err, u1, u2,
                                                             start):
    latches = QuadrantLatches(tol, hyst, mis)
    m = half_turn_margin(latches, fine_error_deg=fine_err)
    if m.margin_deg <= 0:
        return
    theta = start + np.linspace(0.0, 720.0, 14401)
    # Fine angle carrying an error up to the stated bound (worst at the edges' neighbourhood too).
    fine = np.mod(theta + fine_err * np.sin(np.radians(7 * theta)), 180.0)
    for path, f in ((theta, fine), (theta[::-1], fine[::-1])):
        trace = simulate_half_turn(latches, path, f, switch_shift_deg=(u1 * tol, u2 * tol))
        assert not trace.wrong.any()
        assert np.max(np.abs(trace.error_deg)) <= fine_err + 1e-9


def test_back_and_forth_motion_inside_hysteresis_band_keeps_the_turn():
    latches = QuadrantLatches(switch_point_tolerance_deg=10.0, hysteresis_deg=10.0)
    t = np.linspace(0, 20 * np.pi, 20001)
    theta = 90.0 + 8.0 * np.sin(t)  # dithering over a latch edge
    trace = simulate_half_turn(latches, theta, switch_shift_deg=(0.0, 10.0))
    assert not trace.wrong.any()


@pytest.mark.parametrize("kwargs, field", [
    ({"switch_point_tolerance_deg": -1.0}, "switch_point_tolerance_deg"),
    ({"hysteresis_deg": 95.0}, "hysteresis_deg"),
    ({"magnet_misalignment_deg": float("inf")}, "magnet_misalignment_deg"),
    ({"hysteresis_deg": "4"}, "hysteresis_deg"),
])
def test_bad_latch_values_raise_with_field_name(kwargs, field):
    with pytest.raises(DesignValueError, match=field):
        QuadrantLatches(**kwargs)


def test_margin_and_simulation_reject_bad_inputs():
    with pytest.raises(DesignValueError, match="fine_error_deg"):
        half_turn_margin(QuadrantLatches(), fine_error_deg=-1.0)
    with pytest.raises(DesignValueError, match="latches"):
        half_turn_margin("latches")
    with pytest.raises(DesignValueError, match="fine_deg"):
        simulate_half_turn(QuadrantLatches(), [0.0, 1.0], [0.0])
    with pytest.raises(DesignValueError, match="switch_shift_deg"):
        QuadrantLatches().code([0.0], switch_shift_deg=(1.0,))


def test_latches_are_frozen():
    with pytest.raises(dataclasses.FrozenInstanceError):
        QuadrantLatches().hysteresis_deg = 1.0


def _reference_full_turn(x, y, code):
    """Per-sample pure-Python path with math.atan2, used as an oracle."""
    out = []
    for xi, yi, ci in zip(x, y, code):
        fine = 0.5 * math.degrees(math.atan2(yi, xi)) % 180.0
        q = (0, 1, 3, 2)[ci]
        candidates = (fine, fine + 180.0)
        dist = [abs((c - (90 * q + 45) + 180.0) % 360.0 - 180.0) for c in candidates]
        out.append(candidates[0] if dist[0] <= 90.0 else candidates[1] % 360.0)
    return np.array(out)


def test_fused_decode_matches_two_step_and_python_oracle_across_blocks():
    rng = np.random.default_rng(4)
    n = 150_000  # spans several internal blocks (2**16 samples each) and a partial one
    x, y = rng.normal(size=n), rng.normal(size=n)
    code = rng.integers(0, 4, n)
    fused = decode_full_turn_deg(x, y, code)
    two_step = combine_half_turn_deg(decode_deg(x, y), code)
    np.testing.assert_array_equal(fused, two_step)
    np.testing.assert_allclose(fused[:3000], _reference_full_turn(x[:3000], y[:3000], code[:3000]),
                               atol=1e-9)
    assert fused.min() >= 0.0 and fused.max() < 360.0


@settings(max_examples=60, deadline=None)
@given(st.floats(-1e4, 1e4), st.integers(0, 3))
def test_combine_reduces_any_fine_angle_modulo_half_turn(fine, code):
    got = float(combine_half_turn_deg(fine, code))
    assert 0.0 <= got < 360.0
    assert abs((got - fine + 90.0) % 180.0 - 90.0) < 1e-9
    # The pick lies within 90° of the reported quadrant's centre.
    centre = 90 * int(gray_to_quadrant(code)) + 45
    assert abs((got - centre + 180.0) % 360.0 - 180.0) <= 90.0 + 1e-9


def test_combine_rejects_codes_that_are_not_two_bit_integers():
    with pytest.raises(DesignValueError, match="code"):
        combine_half_turn_deg([10.0], [4])
    with pytest.raises(DesignValueError, match="code"):
        combine_half_turn_deg([10.0], [1.5])


def _circular_diff_deg(a, b, period=360.0):
    return np.abs(np.mod(np.asarray(a, dtype=float) - b + 0.5 * period, period) - 0.5 * period)


def test_full_turn_stays_below_360_next_to_the_wrap():
    # Fine angles one or two rounding steps below 180° (a sin reading just below zero)
    # combined with the second half must not round up to 360°.
    x = np.ones(6)
    y = np.array([-1e-300, -5e-324, -1e-17, -1e-16, -1e-15, -1e-14])
    for code in GRAY_SEQUENCE:
        for dtype in (np.float64, np.float32):
            got = decode_full_turn_deg(x, y, code, dtype=dtype)
            assert got.min() >= 0.0 and got.max() < 360.0
            assert np.max(_circular_diff_deg(got, 0.0, 180.0)) < (1e-12 if dtype is np.float64 else 1e-4)
    fine = [np.nextafter(180.0, 0.0), np.nextafter(360.0, 0.0), -1e-20, np.nextafter(-180.0 * 7, 0.0)]
    for code in GRAY_SEQUENCE:
        got = combine_half_turn_deg(fine, code)
        assert got.min() >= 0.0 and got.max() < 360.0


def test_exact_ties_take_the_half_reported_by_latch_g1():
    # Fine 135° with quadrant 0 (centre 45°): 135° and 315° are both 90° away; g1 = 0 -> 135°.
    # The same fine angle with quadrant 2 (g1 = 1) -> 315°. Fine 45° with quadrant 1 -> 45°,
    # with quadrant 3 -> 225°.
    cases = [(135.0, 0, 135.0), (135.0, 2, 315.0), (45.0, 1, 45.0), (45.0, 3, 225.0)]
    for fine, quadrant, expected in cases:
        for dtype in (np.float64, np.float32):
            got = combine_half_turn_deg(fine, quadrant_to_gray(quadrant), dtype=dtype)
            assert float(got) == expected


def test_combine_folds_fine_angles_far_outside_the_half_turn():
    # Source: math.fmod (exact) as oracle for the reduction modulo 180°.
    rng = np.random.default_rng(8)
    fine = np.concatenate([rng.uniform(-1e4, 1e4, 50_000),
                           np.nextafter(np.arange(-40, 41) * 180.0, -np.inf),
                           np.nextafter(np.arange(-40, 41) * 180.0, np.inf)])
    code = rng.integers(0, 4, fine.size)
    got = combine_half_turn_deg(fine, code)
    assert got.min() >= 0.0 and got.max() < 360.0
    ref = np.array([math.fmod(f, 180.0) for f in fine])
    assert np.max(_circular_diff_deg(got, ref, 180.0)) < 1e-9
    # The pick still lies within 90° of the reported quadrant's centre.
    centre = 90.0 * gray_to_quadrant(code) + 45.0
    assert np.max(_circular_diff_deg(got, centre)) <= 90.0 + 1e-9


def test_code_dtype_and_broadcasting_do_not_change_the_result():
    rng = np.random.default_rng(5)
    x, y = rng.normal(size=5000), rng.normal(size=5000)
    code = rng.integers(0, 4, 5000)
    ref = decode_full_turn_deg(x, y, code.astype(np.uint8))
    for c in (code, code.astype(np.int8), code.astype(np.uint16), code.astype(float)):
        np.testing.assert_array_equal(decode_full_turn_deg(x, y, c), ref)
    np.testing.assert_array_equal(decode_full_turn_deg(x, y, 2),
                                  decode_full_turn_deg(x, y, np.full(5000, 2)))
    grid = decode_full_turn_deg(x.reshape(50, 100), y.reshape(50, 100), code.reshape(50, 100))
    np.testing.assert_array_equal(grid.ravel(), ref)


def test_float32_full_turn_agrees_with_float64_within_1e_4_deg_over_the_whole_turn():
    # Checked against the float64 path (not an outside source); float32 rounding of a 0–360° result is at most
    # half of 2**-15 deg ≈ 1.5e-5 deg per step, well inside 1e-4 deg.
    sensor = BridgeSensor(amplitude_mV=50.0, offset_x_mV=0.5, offset_y_mV=-0.3,
                          gain_mismatch=0.01, phase_error_deg=0.5, noise_rms_mV=0.05,
                          adc_bits=12, adc_full_scale_mV=200.0)
    latches = QuadrantLatches(switch_point_tolerance_deg=5.0, hysteresis_deg=4.0)
    theta = np.concatenate([np.linspace(-360.0, 360.0, 720_001), np.linspace(360.0, -360.0, 7201)])
    x, y = sensor.signals(theta)
    code = latches.code(theta)
    f64 = decode_full_turn_deg(x, y, code)
    f32 = decode_full_turn_deg(x, y, code, dtype=np.float32)
    assert f64.dtype == np.float64 and f32.dtype == np.float32
    assert f32.min() >= 0.0 and f32.max() < 360.0
    assert np.max(_circular_diff_deg(f32, f64)) < 1e-4
    # The float32 two-step path gives exactly the fused float32 result, as in float64.
    np.testing.assert_array_equal(
        combine_half_turn_deg(decode_deg(x, y, dtype=np.float32), code, dtype=np.float32), f32)


@pytest.mark.parametrize("fn, args", [
    (decode_full_turn_deg, ([1.0], [0.0], [0])),
    (combine_half_turn_deg, ([10.0], [0])),
])
def test_full_turn_rejects_other_working_precisions(fn, args):
    with pytest.raises(DesignValueError, match="dtype"):
        fn(*args, dtype=np.float16)
    with pytest.raises(TypeError):
        fn(*args, precision=np.float32)


def test_random_units_stay_inside_the_edge_spread_and_never_beat_the_worst_case():
    from turnkit.latches import edge_set_widths, quadrant_widths, random_edge_shifts_deg

    latches = QuadrantLatches(10.0, 4.0)
    shifts = random_edge_shifts_deg(latches, np.random.default_rng(3), 500)
    assert shifts.shape == (500, 4) and np.all(np.abs(shifts) <= 12.0)
    worst = quadrant_widths(latches)
    widths = np.array([edge_set_widths(s) for s in shifts])
    assert np.all(widths[:, 0] >= worst.narrowest_quadrant_deg)
    assert np.all(widths[:, 1] >= worst.narrowest_two_quadrants_deg)


def test_a_spread_that_closes_the_quadrant_is_refused_naming_the_keys():
    from turnkit.latches import quadrant_widths

    with pytest.raises(DesignValueError, match="switch_point_tolerance"):
        quadrant_widths(QuadrantLatches(40.0, 12.0))
    assert quadrant_widths(QuadrantLatches(40.0, 12.0, powered="always")).narrowest_quadrant_deg == 10.0
