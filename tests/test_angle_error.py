"""Angle error: curves, closed-form peaks, noise, resolution and the gear-train mapping."""

import dataclasses
from pathlib import Path
import math
from fractions import Fraction
from types import SimpleNamespace

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.angle_error import (
    angle_error_deg,
    effective_resolution,
    error_summary,
    first_order_error_deg,
    gain_peak_error,
    harmonic3_peak_error,
    noise_sigma_deg,
    offset_peak_error,
    phase_peak_error,
    to_output,
    wrap_mech_deg,
)
from turnkit.errors import DesignValueError
from turnkit.sensor import BridgeSensor

# Dense grid over one electrical period (180° of shaft) for brute-force peaks.
THETA = np.linspace(0.0, 180.0, 400_000, endpoint=False)
PHI = np.radians(2.0 * THETA)


def _peak_mech(sensor):
    return float(np.max(np.abs(angle_error_deg(sensor, THETA))))


def _peak_el(x, y):
    """Brute-force electrical peak error of a signal pair, numpy.arctan2 as oracle."""
    e = np.mod(np.arctan2(y, x) - PHI + np.pi, 2 * np.pi) - np.pi
    return float(np.degrees(np.max(np.abs(e))))


def test_gain_mismatch_peak_matches_reference_example():
    # Source: (derived, shown in docs/derivations.md §3) gain on one channel: k = 1.01 -> exact peak
    # arcsin((k-1)/(k+1)) = 0.2850548° el -> 0.1425274° mech; first order 0.2864789° el.
    peak = gain_peak_error(1.01)
    assert peak.exact_el_deg == pytest.approx(0.2850548, abs=5e-8)
    assert peak.exact_mech_deg == pytest.approx(0.1425274, abs=5e-8)
    assert peak.first_order_el_deg == pytest.approx(0.2864789, abs=5e-8)
    assert _peak_mech(BridgeSensor(amplitude_mV=1.0, gain_mismatch=0.01)) == pytest.approx(
        0.1425274, abs=1e-6)


def test_split_gain_peak_matches_reference_example():
    # Source: (derived, shown in docs/derivations.md §3) gain split ±ε/2: ε = 1 % -> arcsin(ε/2) = 0.2864801° el
    # -> 0.1432400° mech. Brute force with numpy.arctan2 as oracle.
    peak = gain_peak_error(1.01, split=True)
    assert peak.exact_el_deg == pytest.approx(0.2864801, abs=5e-8)
    assert peak.exact_mech_deg == pytest.approx(0.1432400, abs=5e-8)
    assert _peak_el(0.995 * np.cos(PHI), 1.005 * np.sin(PHI)) == pytest.approx(0.2864801, abs=1e-6)


def test_offset_peak_matches_reference_examples():
    # Source: (derived, shown in docs/derivations.md §3) offsets: o = 1 % on x -> arcsin(o) = 0.5729673° el
    # -> 0.2864837° mech; 1 % on both -> 0.8103117° el.
    assert offset_peak_error(0.01).exact_el_deg == pytest.approx(0.5729673, abs=5e-8)
    assert offset_peak_error(0.01).exact_mech_deg == pytest.approx(0.2864837, abs=5e-8)
    assert offset_peak_error(0.01, 0.01).exact_el_deg == pytest.approx(0.8103117, abs=5e-8)
    assert _peak_mech(BridgeSensor(amplitude_mV=1.0, offset_x_mV=0.01)) == pytest.approx(
        0.2864837, abs=1e-6)
    both = BridgeSensor(amplitude_mV=1.0, offset_x_mV=0.01, offset_y_mV=0.01)
    assert 2 * _peak_mech(both) == pytest.approx(0.8103117, abs=2e-6)


def test_split_phase_peak_matches_reference_example():
    # Source: (derived, shown in docs/derivations.md §3) phase split ±δ/2: δ = 1° -> arcsin(tan(δ/2)) =
    # 0.5000190° el -> 0.2500095° mech. Brute force with numpy.arctan2 as oracle.
    peak = phase_peak_error(1.0, split=True)
    assert peak.exact_el_deg == pytest.approx(0.5000190, abs=5e-8)
    assert peak.exact_mech_deg == pytest.approx(0.2500095, abs=5e-8)
    h = math.radians(0.5)
    assert _peak_el(np.cos(PHI - h), np.sin(PHI + h)) == pytest.approx(0.5000190, abs=1e-6)


def test_one_channel_phase_error_has_mean_shift_and_ripple():
    # Source: (derived, shown in docs/derivations.md §3) phase on one channel: δ = 1° -> max 1.0000190° el,
    # min ≈ 0, mean 0.5° el.
    e_el = 2.0 * angle_error_deg(BridgeSensor(amplitude_mV=1.0, phase_error_deg=1.0), THETA)
    assert e_el.max() == pytest.approx(1.0000190, abs=2e-6)
    assert e_el.min() == pytest.approx(0.0, abs=1e-4)
    assert e_el.mean() == pytest.approx(0.5, abs=1e-4)
    assert phase_peak_error(1.0).exact_el_deg == pytest.approx(1.0000190, abs=5e-8)


def test_third_harmonic_peak_is_arcsin_of_its_size():
    # Source: (derived, shown in docs/derivations.md §3): z = e^{iφ} − h3·e^{−3iφ} so
    # e = arg(1 − h3·e^{−4iφ}), whose peak is arcsin(h3); brute force confirms.
    s = BridgeSensor(amplitude_mV=1.0, harmonic3=0.02)
    assert _peak_mech(s) == pytest.approx(harmonic3_peak_error(0.02).exact_mech_deg, abs=1e-6)
    # Its error has period 90° el (4th harmonic): shifting by 45° of shaft repeats it.
    e = angle_error_deg(s, np.array([10.0, 55.0, 100.0]))
    np.testing.assert_allclose(e, e[0], atol=1e-12)


def test_first_order_gain_term_agrees_with_sympy_series():
    # Source: sympy as oracle: series of atan2((1+ε) sin φ, cos φ) − φ in ε gives (ε/2)·sin 2φ.
    sp = pytest.importorskip("sympy")
    eps, phi = sp.symbols("epsilon phi", real=True)
    e = sp.atan((1 + eps) * sp.tan(phi)) - phi
    first = sp.simplify(sp.series(e, eps, 0, 2).removeO())
    sensor = BridgeSensor(amplitude_mV=1.0, gain_mismatch=0.01)
    # atan(k·tan φ) is on the principal branch for |φ| < 90°.
    for value in (0.3, 1.1, -0.7):
        ours_el_rad = 2.0 * math.radians(first_order_error_deg(sensor, math.degrees(value) / 2))
        assert float(first.subs({eps: 0.01, phi: value})) == pytest.approx(ours_el_rad, rel=1e-12)


@settings(max_examples=40, deadline=None)
@given(
    ox=st.floats(-0.01, 0.01), oy=st.floats(-0.01, 0.01), g=st.floats(-0.01, 0.01),
    d=st.floats(-0.6, 0.6), h2=st.floats(-0.005, 0.005), h3=st.floats(-0.005, 0.005),
)
def test_numeric_error_matches_sum_of_first_order_terms(ox, oy, g, d, h2, h3):
    # Source: (derived, shown in docs/derivations.md §3) combined: first-order terms add; brute force vs the
    # sum of terms within O(ε²).
    s = BridgeSensor(amplitude_mV=1.0, offset_x_mV=ox, offset_y_mV=oy, gain_mismatch=g,
                     phase_error_deg=d, harmonic2=h2, harmonic3=h3)
    theta = np.linspace(0, 180, 721)
    eps = max(abs(ox), abs(oy), abs(g), math.radians(abs(d)), abs(h2), abs(h3))
    diff = angle_error_deg(s, theta) - first_order_error_deg(s, theta)
    # 6 sources of size eps: second-order remainder below ~ (6·eps)² rad.
    assert np.max(np.abs(diff)) <= math.degrees(36 * eps * eps) + 1e-12


def test_noise_sigma_matches_reference_and_monte_carlo():
    # Source: (derived, shown in docs/derivations.md §4) noise to angle: A 50 mV, σ_v 50 µV -> 1.000 mrad
    # = 0.05730° el = 0.02865° mech (Monte Carlo 2·10⁵ draws: 0.998 mrad).
    s = BridgeSensor(amplitude_mV=50.0, noise_rms_mV=0.05)
    assert noise_sigma_deg(s) == pytest.approx(0.02865, abs=5e-6)
    theta = np.full(200_000, 33.0)
    e = angle_error_deg(s, theta, noise=True, rng=np.random.default_rng(3))
    # 2e5 draws: standard error of the std ≈ 0.16 %; allow 1 %.
    assert float(np.std(e)) == pytest.approx(0.02865, rel=0.01)


def test_effective_bits_of_a_twelve_bit_equivalent_noise():
    # Source: (derived, shown in docs/derivations.md §4); W. R. Bennett, "Spectra of quantized signals",
    # Bell Syst. Tech. J. 27 (1948) (from memory): 12-bit angle LSB 0.087890625° el, quantisation
    # rms LSB/√12 = 0.0253718° el. A noise giving that RMS reads as 12 effective bits.
    sigma_el = 0.087890625 / math.sqrt(12.0)
    s = BridgeSensor(amplitude_mV=50.0, noise_rms_mV=50.0 * math.radians(sigma_el))
    res, bits = effective_resolution(s)
    assert res == pytest.approx(0.0439453125, rel=1e-12)  # mech LSB
    assert bits == pytest.approx(12.0, abs=1e-12)


def test_adc_rounding_counts_as_step_over_root_twelve():
    s = BridgeSensor(amplitude_mV=50.0, adc_bits=12, adc_full_scale_mV=200.0)  # peak to peak
    step = 200.0 / 4096
    assert noise_sigma_deg(s) == pytest.approx(0.5 * math.degrees(step / math.sqrt(12) / 50.0))
    assert noise_sigma_deg(s, include_adc=False) == 0.0


def test_noiseless_sensor_has_unbounded_effective_bits():
    assert effective_resolution(BridgeSensor()) == (0.0, math.inf)


def test_output_resolution_through_gearing():
    # Source: (derived, shown in docs/derivations.md §4) output resolution through gearing: 12-bit AMR
    # (0.0439453125° mech), G 50 -> 0.00087890625° at the output.
    train = SimpleNamespace(travel_per_motor_turn=Fraction(360, 50), output_unit="deg")
    assert to_output(0.0439453125, train) == pytest.approx(0.00087890625, rel=1e-15)
    screw = SimpleNamespace(travel_per_motor_turn=Fraction(2, 10), output_unit="mm")
    np.testing.assert_allclose(to_output(np.array([360.0, 180.0]), screw), [0.2, 0.1])


def test_output_mapping_rejects_objects_without_travel():
    with pytest.raises(DesignValueError, match="gear_train"):
        to_output(1.0, object())
    with pytest.raises(DesignValueError, match="output_unit"):
        to_output(1.0, SimpleNamespace(travel_per_motor_turn=1, output_unit="inch"))


def test_summary_calibration_removes_offset_gain_and_phase():
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=1.0, offset_y_mV=-0.7, gain_mismatch=0.02,
                     phase_error_deg=1.5)
    before = error_summary(s, calibrated=False)
    after = error_summary(s, calibrated=True)
    assert before.peak_error_deg > 1.0
    assert after.peak_error_deg < 1e-9
    np.testing.assert_array_equal(before.error_after_deg, after.error_deg)
    np.testing.assert_array_equal(after.error_before_deg, before.error_deg)
    assert before.rms_error_deg == pytest.approx(np.sqrt(np.mean(before.error_deg ** 2)))
    assert before.angle_deg.shape == (3600,) and before.angle_deg[-1] < 360.0


def test_summary_peak_equals_exact_closed_form_for_gain_only():
    # Source: (derived, shown in docs/derivations.md §3): k = 1.01 -> 0.1425274° mech.
    s = BridgeSensor(amplitude_mV=1.0, gain_mismatch=0.01)
    assert error_summary(s, calibrated=False).peak_error_deg == pytest.approx(0.1425274, abs=1e-6)


def test_summary_after_calibration_keeps_harmonic_error():
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=1.0, harmonic3=0.01, noise_rms_mV=0.02)
    after = error_summary(s, calibrated=True, rng=5)
    # The ellipse fit cannot remove a 3rd harmonic: arcsin(0.01)/2 mech remains (±noise of the fit).
    assert after.peak_error_deg == pytest.approx(math.degrees(math.asin(0.01)) / 2, abs=0.01)


def test_summary_maps_to_output_and_is_frozen():
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=1.0, noise_rms_mV=0.05)
    train = SimpleNamespace(travel_per_motor_turn=Fraction(1, 5), output_unit="mm")
    r = error_summary(s, calibrated=False, n=720, gear_train=train)
    assert r.output_unit == "mm"
    assert r.peak_error_output == pytest.approx(r.peak_error_deg / 360 * 0.2)
    assert r.resolution_output == pytest.approx(r.resolution_deg / 360 * 0.2)
    with pytest.raises(dataclasses.FrozenInstanceError):
        r.peak_error_deg = 0.0
    with pytest.raises(ValueError):
        r.error_deg[0] = 1.0


@pytest.mark.parametrize("kwargs, field", [
    ({"calibrated": "yes"}, "calibrated"),
    ({"calibrated": True, "n": 4}, "n"),
    ({"calibrated": True, "sweep_samples": 3.5}, "sweep_samples"),
])
def test_summary_rejects_bad_arguments(kwargs, field):
    with pytest.raises(DesignValueError, match=field):
        error_summary(BridgeSensor(), **kwargs)


def test_closed_forms_reject_out_of_range_inputs():
    with pytest.raises(DesignValueError, match="offset"):
        offset_peak_error(0.8, 0.8)
    with pytest.raises(DesignValueError, match="gain_ratio"):
        gain_peak_error(-1.0)
    with pytest.raises(DesignValueError, match="phase_error_deg"):
        phase_peak_error(60.0)


def test_wrap_keeps_errors_in_one_amr_period():
    np.testing.assert_allclose(wrap_mech_deg([179.0, -179.0, 90.0, 0.5]), [-1.0, 1.0, -90.0, 0.5])


def test_worked_example_in_docs_prints_what_the_docs_show(capsys):
    # The docs' numbers must come from running the docs' code.
    text = (Path(__file__).resolve().parents[1] / "docs" / "sensor.md").read_text(encoding="utf-8")
    section = text.split("## Worked example", 1)[1]
    code = section.split("```python\n", 1)[1].split("```", 1)[0]
    shown = section.split("Output", 1)[1].split("```\n", 1)[1].split("```", 1)[0]
    exec(compile(code, "docs/sensor.md", "exec"), {"__name__": "docs_example"})
    assert capsys.readouterr().out == shown


def test_summary_through_the_package_gear_train():
    # Source: (derived, shown in docs/derivations.md §4) with the compound train value of Shigley, Mechanical
    # Engineering Design, ch. 13 (section from memory): two 16→88 stages (e = 1/30.25) and a
    # 2 mm, 2-start screw (lead 4 mm) move 4/30.25 = 16/121 mm per motor turn.
    from turnkit.gears import ExternalPair, GearTrain, LeadScrew

    train = GearTrain((ExternalPair(16, 88), ExternalPair(16, 88), LeadScrew(pitch_mm=2, starts=2)))
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=0.5, noise_rms_mV=0.05)
    r = error_summary(s, calibrated=False, n=720, gear_train=train)
    assert r.output_unit == "mm"
    assert r.peak_error_output == pytest.approx(r.peak_error_deg / 360.0 * 16 / 121, rel=1e-12)
