"""Calibration of the bridge pair from a sweep: Heydemann ellipse fit, robustness, files."""

import dataclasses
import io
import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.angle_error import angle_error_deg
from turnkit.calibration import (
    BridgeCorrection,
    fit_sweep,
    fit_sweep_csv,
    read_sweep_csv,
)
from turnkit.errors import DesignFileError, DesignValueError
from turnkit.sensor import BridgeSensor


def test_heydemann_round_trip_reference_example():
    # Source: P. L. M. Heydemann, "Determination and correction of quadrature fringe measurement
    # errors in interferometers", Appl. Opt. 20(19) (1981) 3382-3384 (pages from memory); round
    # trip: x = 0.02 + cos φ, y = −0.01 + 1.02·sin(φ − 1°) → r = 1/1.02 = 0.98039216,
    # α = 1.0°, p = 0.02, q = −0.01, residual < 1e-12°.
    phi = np.linspace(0.0, 2 * np.pi, 360, endpoint=False)
    x = 0.02 + np.cos(phi)
    y = -0.01 + 1.02 * np.sin(phi - np.radians(1.0))
    fit = fit_sweep(x, y, angle_deg=np.degrees(phi) / 2)
    c = fit.correction
    assert c.offset_x_mV == pytest.approx(0.02, abs=1e-12)
    assert c.offset_y_mV == pytest.approx(-0.01, abs=1e-12)
    assert c.amplitude_x_mV / c.amplitude_y_mV == pytest.approx(0.98039216, abs=5e-9)
    assert -c.phase_error_deg == pytest.approx(1.0, abs=1e-10)  # α = −δ
    assert fit.angle_residual_peak_deg < 1e-12
    u1, u2 = c.apply(x, y)
    wrapped = np.mod(np.arctan2(u2, u1) - phi + np.pi, 2 * np.pi) - np.pi
    assert np.max(np.abs(wrapped)) < 1e-12


def test_fit_agrees_with_independent_nonlinear_least_squares():
    # Source: scipy.optimize.least_squares as a second opinion:
    # the sample model x = p + a cos φ, y = q + b sin(φ + δ) fitted directly with the
    # reference angles known, not through the conic.
    opt = pytest.importorskip("scipy.optimize")
    s = BridgeSensor(amplitude_mV=40.0, offset_x_mV=1.3, offset_y_mV=-0.6, gain_mismatch=-0.03,
                     phase_error_deg=2.5, noise_rms_mV=0.05)
    theta = np.linspace(0.0, 360.0, 900, endpoint=False)
    x, y = s.signals(theta, rng=11)
    phi = np.radians(2 * theta)

    def resid(v):
        p, q, a, b, d = v
        return np.concatenate((x - (p + a * np.cos(phi)), y - (q + b * np.sin(phi + d))))

    ref = opt.least_squares(resid, [0, 0, 30, 30, 0]).x
    c = fit_sweep(x, y).correction
    assert c.offset_x_mV == pytest.approx(ref[0], abs=0.01)
    assert c.offset_y_mV == pytest.approx(ref[1], abs=0.01)
    assert c.amplitude_x_mV == pytest.approx(ref[2], abs=0.01)
    assert c.amplitude_y_mV == pytest.approx(ref[3], abs=0.01)
    assert math.radians(c.phase_error_deg) == pytest.approx(ref[4], abs=3e-4)


@settings(max_examples=30, deadline=None)
@given(
    amp=st.floats(5.0, 200.0), ox=st.floats(-0.1, 0.1), oy=st.floats(-0.1, 0.1),
    g=st.floats(-0.1, 0.1), d=st.floats(-5.0, 5.0), noise=st.floats(0.0, 0.002),
    seed=st.integers(0, 2**32 - 1),
)
def test_calibration_recovers_known_errors(amp, ox, oy, g, d, noise, seed):
    # Stated tolerances, with σ the noise as a fraction of the amplitude A and 720 samples
    # over one turn: offsets and amplitude within 0.002·A + 5·σ·A, gain mismatch within
    # 0.002 + 5σ, phase within 0.1° + 300σ°; noiseless sweeps to rounding (1e-9·A, 1e-7°).
    s = BridgeSensor(amplitude_mV=amp, offset_x_mV=ox * amp, offset_y_mV=oy * amp,
                     gain_mismatch=g, phase_error_deg=d, noise_rms_mV=noise * amp)
    theta = np.linspace(0.0, 360.0, 720, endpoint=False)
    x, y = s.signals(theta, rng=np.random.default_rng(seed))
    c = fit_sweep(x, y).correction
    tol = 0.002 * amp + 5 * noise * amp if noise else 1e-9 * amp
    assert c.offset_x_mV == pytest.approx(ox * amp, abs=tol)
    assert c.offset_y_mV == pytest.approx(oy * amp, abs=tol)
    assert c.amplitude_x_mV == pytest.approx(amp, abs=tol)
    assert c.gain_mismatch == pytest.approx(g, abs=(0.002 + 5 * noise) if noise else 1e-9)
    assert c.phase_error_deg == pytest.approx(d, abs=(0.1 + 300 * noise) if noise else 1e-7)


def test_corrected_sensor_has_no_systematic_error_left():
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=2.0, offset_y_mV=-1.0, gain_mismatch=0.03,
                     phase_error_deg=-2.0)
    theta = np.linspace(0.0, 180.0, 400, endpoint=False)
    fit = fit_sweep(*s.signals(theta), angle_deg=theta)
    check = np.linspace(0.0, 360.0, 3601)
    assert np.max(np.abs(angle_error_deg(s, check, correction=fit.correction))) < 1e-9
    assert fit.n_outliers == 0 and fit.radial_residual_rms < 1e-12


def test_robust_fit_ignores_outliers_that_spoil_plain_least_squares():
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=2.0, offset_y_mV=-1.0, gain_mismatch=0.03,
                     phase_error_deg=2.0, noise_rms_mV=0.1)
    rng = np.random.default_rng(1)
    theta = np.linspace(0.0, 360.0, 500, endpoint=False)
    x, y = s.signals(theta, rng)
    bad = rng.choice(500, 40, replace=False)  # 8 % of the samples
    x[bad] += rng.normal(0.0, 30.0, 40)
    y[bad] += rng.normal(0.0, 30.0, 40)
    robust = fit_sweep(x, y)
    plain = fit_sweep(x, y, robust=False)
    assert robust.correction.offset_x_mV == pytest.approx(2.0, abs=0.05)
    assert robust.correction.offset_y_mV == pytest.approx(-1.0, abs=0.05)
    assert robust.correction.gain_mismatch == pytest.approx(0.03, abs=0.003)
    assert robust.correction.phase_error_deg == pytest.approx(2.0, abs=0.2)
    assert abs(plain.correction.offset_x_mV - 2.0) > 0.3  # the plain fit is visibly off
    assert robust.n_outliers >= 30
    assert set(np.flatnonzero(robust.weights == 0)) <= set(bad)


def test_residual_reports_harmonic_the_fit_cannot_remove():
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=1.0, harmonic3=0.01)
    theta = np.linspace(0.0, 180.0, 720, endpoint=False)
    fit = fit_sweep(*s.signals(theta), angle_deg=theta)
    # Source: (derived, shown in docs/derivations.md §3): a 3rd harmonic leaves arcsin(h3)/2 mech.
    assert fit.angle_residual_peak_deg == pytest.approx(math.degrees(math.asin(0.01)) / 2, rel=0.02)
    assert fit.angle_residual_rms_deg < fit.angle_residual_peak_deg


@pytest.mark.parametrize("span_deg", [60.0, 150.0, 170.0])
def test_sweep_shorter_than_one_electrical_period_is_rejected(span_deg):
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=1.0, gain_mismatch=0.02, noise_rms_mV=0.01)
    theta = np.linspace(0.0, span_deg, 300)
    x, y = s.signals(theta)
    with pytest.raises(DesignValueError, match="electrical period"):
        fit_sweep(x, y)
    with pytest.raises(DesignValueError, match="electrical period"):
        fit_sweep(x, y, angle_deg=theta)


def test_exactly_one_electrical_period_is_enough():
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=1.0)
    theta = np.linspace(0.0, 180.0, 64, endpoint=False)
    assert fit_sweep(*s.signals(theta)).coverage_el_deg == pytest.approx(360.0 - 360.0 / 64)


def test_collinear_and_constant_sweeps_are_rejected():
    t = np.linspace(-1, 1, 100)
    with pytest.raises(DesignValueError, match="collinear"):
        fit_sweep(3 * t + 1, -2 * t)
    with pytest.raises(DesignValueError, match="all samples equal"):
        fit_sweep(np.ones(50), np.ones(50))
    with pytest.raises(DesignValueError, match="at least 8 samples"):
        fit_sweep([1, 0, -1], [0, 1, 0])


def test_non_ellipse_data_is_rejected():
    # A hyperbola-like cloud (two straight crossing lines) covers every direction but is no ellipse.
    t = np.linspace(-1, 1, 200)
    x = np.concatenate((t, t))
    y = np.concatenate((t, -t))
    with pytest.raises(DesignValueError, match="sweep"):
        fit_sweep(x, y)


def test_bad_sample_arrays_are_rejected():
    with pytest.raises(DesignValueError, match=r"x_mV\[2\]"):
        fit_sweep([1.0, 2.0, float("nan")] + [0.0] * 10, [0.0] * 13)
    with pytest.raises(DesignValueError, match="y_mV"):
        fit_sweep(np.zeros(10), np.zeros(9))
    with pytest.raises(DesignValueError, match="angle_deg"):
        fit_sweep(np.cos(np.arange(20)), np.sin(np.arange(20)), angle_deg=np.zeros(3))


def _csv_text(sensor, theta, header="angle_deg,x_mV,y_V"):
    x, y = sensor.signals(theta)
    lines = ["# bench sweep, invented sensor", header]
    lines += [f"{a:.6f},{u:.9f},{v / 1000:.12f}" for a, u, v in zip(theta, x, y)]
    return "\n".join(lines) + "\n"


def test_csv_sweep_with_units_in_header_is_read_and_fitted(tmp_path):
    s = BridgeSensor(amplitude_mV=50.0, offset_x_mV=2.0, offset_y_mV=-1.0, gain_mismatch=0.03,
                     phase_error_deg=1.0)
    theta = np.linspace(0.0, 180.0, 200, endpoint=False)
    path = tmp_path / "sweep.csv"
    path.write_text(_csv_text(s, theta))
    data = read_sweep_csv(path)
    np.testing.assert_allclose(data.y_mV, s.signals(theta)[1], atol=1e-8)  # V -> mV
    fit = fit_sweep_csv(path)
    assert fit.correction.offset_y_mV == pytest.approx(-1.0, abs=1e-6)
    assert fit.angle_residual_peak_deg < 1e-5


def test_csv_bracketed_units_and_radians_are_accepted():
    text = "x [mV], y (mV), angle [rad]\n" + "\n".join(
        f"{50 * math.cos(2 * t)},{50 * math.sin(2 * t)},{t}"
        for t in np.linspace(0, math.pi, 40, endpoint=False))
    data = read_sweep_csv(io.StringIO(text))
    assert data.angle_deg[1] == pytest.approx(4.5)


def test_csv_missing_value_names_the_line(tmp_path):
    s = BridgeSensor()
    text = _csv_text(s, np.linspace(0, 180, 20, endpoint=False)).splitlines()
    text[7] = "30.0,,0.01"
    path = tmp_path / "gap.csv"
    path.write_text("\n".join(text))
    with pytest.raises(DesignFileError) as err:
        fit_sweep_csv(path)
    assert err.value.line == 8
    assert "gap.csv:8" in str(err.value) and "x_mV" in str(err.value) and "missing" in str(err.value)


def test_csv_non_numeric_value_names_the_line():
    text = "x_mV,y_mV\n1,0\n0,1\n-1,abc\n"
    with pytest.raises(DesignFileError, match="line 4") as err:
        read_sweep_csv(io.StringIO(text))
    # The line and column are named; the file's own text is never repeated in an error.
    assert err.value.line == 4 and "abc" not in str(err.value) and "y_mV" in str(err.value)


@pytest.mark.parametrize("text, needle", [
    ("a_mV,y_mV\n1,2\n", "no column named 'x'"),
    ("x,y_mV\n1,2\n", "voltage unit"),
    ("x_mV,y_mV,angle_mm\n1,2,3\n", "angle unit"),
    ("x_mV,y_mV\n1,2,3\n", "header has 2"),
    ("# only a comment\n", "empty"),
])
def test_csv_header_problems_are_explained(text, needle):
    with pytest.raises(DesignFileError, match=needle):
        read_sweep_csv(io.StringIO(text))


def test_missing_csv_file_is_reported(tmp_path):
    with pytest.raises(DesignFileError, match="cannot read"):
        read_sweep_csv(tmp_path / "nope.csv")


def test_correction_is_frozen_and_validated():
    c = BridgeCorrection(0.0, 0.0, 1.0, 1.0, 0.0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        c.offset_x_mV = 1.0
    with pytest.raises(DesignValueError, match="amplitude_y_mV"):
        BridgeCorrection(0.0, 0.0, 1.0, -1.0, 0.0)
    with pytest.raises(DesignValueError, match="phase_error_deg"):
        BridgeCorrection(0.0, 0.0, 1.0, 1.0, 95.0)


def test_csv_header_unit_is_never_evaluated():
    # A unit written as arithmetic would make the unit library compute a huge power (a hang):
    # only a unit of the fixed grammar is looked up.
    with pytest.raises(DesignFileError, match="voltage unit"):
        read_sweep_csv(io.StringIO("x [9**9**9],y [mV]\n1,2\n2,3\n"))
