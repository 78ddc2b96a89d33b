"""AMR bridge signal model and angle decode."""

import dataclasses
import math
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.errors import DesignValueError
from turnkit.sensor import BridgeSensor, bridge_amplitude_fraction, decode_deg, electrical_deg


def test_bridge_amplitude_matches_worked_examples():
    # Source: (derived, shown in docs/derivations.md §2) half-bridge pair, amplitude r/(2+r):
    # r = 0.03, V_s = 5 V -> ±73.892 mV; r = 0.02 -> ±49.505 mV.
    assert BridgeSensor.from_bridge(0.03, 5.0).amplitude_mV == pytest.approx(73.892, abs=5e-4)
    assert BridgeSensor.from_bridge(0.02, 5.0).amplitude_mV == pytest.approx(49.505, abs=5e-4)


def test_bridge_amplitude_agrees_with_symbolic_bridge():
    # Source: sympy as oracle: two half-bridges with elements along (R0 + dR cos^2)
    # and across (R0 + dR sin^2) the current, Voigt-Thomson law (McGuire & Potter 1975).
    sp = pytest.importorskip("sympy")
    r0, dr, th, vs = sp.symbols("R0 dR theta V_s", positive=True)
    r_along = r0 + dr * sp.cos(th) ** 2
    r_across = r0 + dr * sp.sin(th) ** 2
    v_out = vs * (r_across - r_along) / (r_along + r_across)
    expected = -vs * dr * sp.cos(2 * th) / (2 * r0 + dr)
    assert sp.simplify(sp.expand_trig(v_out - expected)) == 0
    amp = sp.Abs(v_out.subs({th: 0, vs: 1, dr: sp.Rational(3, 100), r0: 1}))
    assert float(amp) == pytest.approx(bridge_amplitude_fraction(0.03), rel=1e-12)


def test_decode_reference_points():
    # Source: (derived, shown in docs/derivations.md §2) angle recovery: (V_sin, V_cos) = (1, 0) -> 45°,
    # (0, -1) -> 90°.
    assert decode_deg(0.0, 1.0) == pytest.approx(45.0)
    assert decode_deg(-1.0, 0.0) == pytest.approx(90.0)


def test_second_bridge_reads_equal_signals_at_22_5_degrees():
    # Source: (derived, shown in docs/derivations.md §2) second bridge rotated 45°: θ = 22.5° -> sin2θ = cos2θ
    # = 0.70711.
    x, y = BridgeSensor(amplitude_mV=1.0).signals(22.5)
    assert x == pytest.approx(0.70711, abs=5e-6)
    assert y == pytest.approx(0.70711, abs=5e-6)


def test_signals_repeat_every_half_turn():
    # Source: (derived, shown in docs/derivations.md §2) period: θ and θ + 180° give identical outputs.
    s = BridgeSensor(amplitude_mV=40.0, offset_x_mV=1.0, gain_mismatch=0.02, phase_error_deg=2.0,
                     harmonic2=0.01, harmonic3=0.02)
    theta = np.linspace(0.0, 180.0, 721)
    a = s.signals(theta)
    b = s.signals(theta + 180.0)
    np.testing.assert_allclose(a, b, atol=1e-12)


@settings(max_examples=60, deadline=None)
@given(st.floats(-1e4, 1e4, allow_nan=False))
def test_ideal_sensor_decodes_shaft_angle_modulo_half_turn(theta):
    # Source: numpy.arctan2 as oracle through θ = ½·atan2(sin 2θ, cos 2θ) mod 180°.
    s = BridgeSensor(amplitude_mV=50.0)
    got = float(s.decode_deg(*s.signals(theta)))
    assert 0.0 <= got < 180.0
    diff = (got - theta + 90.0) % 180.0 - 90.0
    assert abs(diff) < 1e-9


def test_electrical_angle_is_twice_the_shaft_angle():
    s = BridgeSensor()
    theta = np.array([10.0, 100.0, 170.0])
    np.testing.assert_allclose(electrical_deg(*s.signals(theta)), np.mod(2 * theta, 360.0),
                               atol=1e-9)


def test_offsets_gain_and_phase_enter_as_documented():
    s = BridgeSensor(amplitude_mV=10.0, offset_x_mV=0.3, offset_y_mV=-0.2, gain_mismatch=0.05,
                     phase_error_deg=3.0)
    theta = np.linspace(0, 180, 37)
    phi = np.radians(2 * theta)
    x, y = s.signals(theta)
    np.testing.assert_allclose(x, 10 * np.cos(phi) + 0.3, atol=1e-12)
    np.testing.assert_allclose(y, 10.5 * np.sin(phi + np.radians(3.0)) - 0.2, atol=1e-12)


def test_third_harmonic_is_the_same_waveform_shifted_a_quarter_period():
    s = BridgeSensor(amplitude_mV=1.0, harmonic3=0.05)
    u = np.radians(np.linspace(0, 360, 73))
    x, y = s.signals(np.degrees(u) / 2.0)
    np.testing.assert_allclose(y, np.sin(u) + 0.05 * np.sin(3 * u), atol=1e-12)
    np.testing.assert_allclose(x, np.sin(u + np.pi / 2) + 0.05 * np.sin(3 * (u + np.pi / 2)),
                               atol=1e-12)


def test_noise_is_seeded_and_has_the_stated_rms():
    s = BridgeSensor(amplitude_mV=50.0, noise_rms_mV=0.2)
    theta = np.linspace(0, 360, 100_000)
    x1, y1 = s.signals(theta, rng=7)
    x2, _ = s.signals(theta, rng=7)
    x3, _ = s.signals(theta, rng=8)
    np.testing.assert_array_equal(x1, x2)
    assert not np.array_equal(x1, x3)
    x0, y0 = s.signals(theta, noise=False)
    # 1e5 draws: relative standard error of a std estimate ≈ 1/sqrt(2e5) ≈ 0.2 %.
    assert np.std(x1 - x0) == pytest.approx(0.2, rel=0.01)
    assert np.std(y1 - y0) == pytest.approx(0.2, rel=0.01)
    assert abs(np.corrcoef(x1 - x0, y1 - y0)[0, 1]) < 0.02


def test_adc_rounds_to_its_step_and_stays_within_half_a_step():
    # Full scale is the peak-to-peak span: 128 mV over 2**10 codes -> 0.125 mV.
    s = BridgeSensor(amplitude_mV=50.0, adc_bits=10, adc_full_scale_mV=128.0)
    assert s.adc_step_mV == pytest.approx(0.125)
    ideal = dataclasses.replace(s, adc_bits=None)
    theta = np.linspace(0, 180, 5001)
    xq, yq = s.signals(theta)
    xi, yi = ideal.signals(theta)
    np.testing.assert_allclose(xq / 0.125, np.round(xq / 0.125), atol=1e-9)
    np.testing.assert_allclose(yq / 0.125, np.round(yq / 0.125), atol=1e-9)
    assert np.max(np.abs(xq - xi)) <= 0.0625 + 1e-12
    assert np.max(np.abs(yq - yi)) <= 0.0625 + 1e-12


def test_adc_that_would_clip_is_rejected_naming_the_field():
    with pytest.raises(DesignValueError, match="adc_full_scale_mV") as err:
        BridgeSensor(amplitude_mV=50.0, offset_x_mV=5.0, adc_bits=12, adc_full_scale_mV=100.0)
    assert "mV" in str(err.value)


@pytest.mark.parametrize("kwargs, field", [
    ({"amplitude_mV": 0.0}, "amplitude_mV"),
    ({"amplitude_mV": float("nan")}, "amplitude_mV"),
    ({"offset_y_mV": 60.0}, "offset_y_mV"),
    ({"gain_mismatch": 0.7}, "gain_mismatch"),
    ({"phase_error_deg": 50.0}, "phase_error_deg"),
    ({"harmonic3": 0.6}, "harmonic3"),
    ({"noise_rms_mV": -1.0}, "noise_rms_mV"),
    ({"adc_bits": 0}, "adc_bits"),
    ({"adc_bits": 33}, "adc_bits"),
    ({"adc_bits": 12.0}, "adc_bits"),
])
def test_bad_sensor_values_raise_with_field_name(kwargs, field):
    with pytest.raises(DesignValueError, match=field):
        BridgeSensor(**kwargs)


def test_unknown_keyword_and_assignment_are_rejected():
    with pytest.raises(TypeError):
        BridgeSensor(amplitude=50.0)
    s = BridgeSensor()
    with pytest.raises(dataclasses.FrozenInstanceError):
        s.amplitude_mV = 3.0


def test_bad_rng_is_rejected():
    with pytest.raises(DesignValueError, match="rng"):
        BridgeSensor(noise_rms_mV=1.0).signals([0.0], rng="seed")


def test_bridge_ratio_outside_range_is_rejected():
    with pytest.raises(DesignValueError, match="resistance_change_ratio"):
        bridge_amplitude_fraction(1.5)
    with pytest.raises(DesignValueError, match="supply_V"):
        BridgeSensor.from_bridge(0.03, -5.0)


def test_importing_sensor_modules_loads_no_symbolic_or_widget_package():
    code = ("import sys, turnkit.sensor, turnkit.latches, turnkit.angle_error, turnkit.calibration;"
            "bad=[m for m in ('sympy','bokeh','ipywidgets','pint','scipy') if m in sys.modules];"
            "print(bad); sys.exit(1 if bad else 0)")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert done.returncode == 0, done.stdout + done.stderr


def _circular_diff_deg(a, b, period):
    return np.abs(np.mod(np.asarray(a, dtype=float) - b + 0.5 * period, period) - 0.5 * period)


def test_decode_matches_math_atan2_oracle_across_blocks_and_signs():
    # Source: Python's math.atan2 (C99 atan2) as oracle, θ = ½·atan2(y, x) mod 180°.
    rng = np.random.default_rng(11)
    n = 150_000  # spans several internal blocks (2**16 samples each) and a partial one
    x = rng.normal(size=n) * 10.0 ** rng.integers(-3, 4, n)
    y = rng.normal(size=n) * 10.0 ** rng.integers(-3, 4, n)
    got = decode_deg(x, y)
    idx = rng.choice(n, 4000, replace=False)
    ref = np.array([0.5 * math.degrees(math.atan2(y[i], x[i])) % 180.0 for i in idx])
    assert np.max(_circular_diff_deg(got[idx], ref, 180.0)) < 1e-12
    assert got.dtype == np.float64 and got.min() >= 0.0 and got.max() < 180.0


def test_decode_of_signed_zeros_and_tiny_sin_readings_stays_in_range():
    # A negative zero from ADC rounding must read 0°, not 180° or -0°.
    got = decode_deg([1.0, 1.0, -1.0, -1.0, 0.0], [0.0, -0.0, 0.0, -0.0, -0.0])
    np.testing.assert_array_equal(got, [0.0, 0.0, 90.0, 90.0, 0.0])
    assert not np.signbit(got).any()
    # A sin reading just below zero is an angle just below 180°: it must stay below
    # 180° and leave room for the +180° of the half-turn combine.
    near = decode_deg([1.0, 1.0], [-1e-300, -1e-17])
    assert np.all(near < 180.0) and np.all(near + 180.0 < 360.0)
    assert np.all(_circular_diff_deg(near, 180.0, 180.0) < 1e-13)


def test_float32_decode_agrees_with_float64_within_1e_4_deg_over_the_whole_turn():
    # Checked against the float64 path (not an outside source); float32 rounding is 2**-24 relative, so
    # about 1.5e-5 deg near 180° (one step of the result), well inside 1e-4 deg.
    theta = np.linspace(0.0, 360.0, 720_001)
    for sensor in (BridgeSensor(amplitude_mV=50.0),
                   BridgeSensor(amplitude_mV=50.0, offset_x_mV=0.5, gain_mismatch=0.01,
                                phase_error_deg=0.5, noise_rms_mV=0.05, adc_bits=12,
                                adc_full_scale_mV=200.0),
                   BridgeSensor(amplitude_mV=1e-3), BridgeSensor(amplitude_mV=1e5)):
        x, y = sensor.signals(theta)
        f32 = decode_deg(x, y, dtype=np.float32)
        assert f32.dtype == np.float32
        assert f32.min() >= 0.0 and f32.max() < 180.0
        assert np.max(_circular_diff_deg(f32, decode_deg(x, y), 180.0)) < 1e-4
        # float32 samples in give the same answer as float64 samples cast on the way.
        np.testing.assert_array_equal(
            decode_deg(x.astype(np.float32), y.astype(np.float32), dtype=np.float32), f32)


def test_decode_default_precision_stays_float64():
    x = np.array([1.0, 0.3, -2.0], dtype=np.float32)
    y = np.array([0.5, -1.0, 0.1], dtype=np.float32)
    got = decode_deg(x, y)
    assert got.dtype == np.float64
    np.testing.assert_array_equal(got, decode_deg(x.astype(float), y.astype(float)))
    assert BridgeSensor().decode_deg(1.0, 1.0).dtype == np.float64
    assert BridgeSensor().decode_deg(1.0, 1.0, dtype=np.float32).dtype == np.float32


@pytest.mark.parametrize("dtype", [np.float16, np.int64, "complex128", "fast", None])
def test_decode_rejects_other_working_precisions(dtype):
    with pytest.raises(DesignValueError, match="dtype"):
        decode_deg([1.0], [0.0], dtype=dtype)


def test_decode_rejects_unknown_keyword():
    with pytest.raises(TypeError):
        decode_deg([1.0], [0.0], precision=np.float32)
