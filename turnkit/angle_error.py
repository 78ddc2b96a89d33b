"""Angle error of an AMR bridge pair: curves, closed forms, noise and resolution.

Electrical angle φ = 2θ. With the cos bridge x = cos φ + o_x and the sin
bridge y = k·sin(φ + δ) + o_y (amplitude normalised to 1), the decoded error
e(φ) = atan2(y, x) − φ is, to first order (electrical radians)::

    offsets     o_y·cos φ − o_x·sin φ          peak √(o_x² + o_y²)   exact arcsin(√(o_x² + o_y²))
    gain k=1+ε  (ε/2)·sin 2φ                   peak |ε|/2            exact arcsin(|k − 1|/(k + 1))
    phase δ     δ/2 + (δ/2)·cos 2φ             peak |δ|              exact |δ|/2 + arcsin(tan(|δ|/2))
    3rd harm.   h3·sin 4φ                      peak |h3|             exact arcsin(|h3|)
    2nd harm.   h2·sin 2φ·(sin φ + cos φ)

(the phase error here sits on one bridge; split ±δ/2 over both it is
(δ/2)·cos 2φ with exact peak arcsin(tan(δ/2))). Offsets give a first-harmonic
error, gain and phase a second-harmonic one. Every electrical error halves on
the shaft because θ = φ/2.

Noise: independent Gaussian noise σ_v on both bridges of amplitude A gives an
angle standard deviation σ_φ ≈ σ_v/A electrical radians at every angle
(σ_θ = σ_φ/2 mechanically). ADC rounding is counted as extra noise of
step/√12 per bridge. The effective resolution is the step of an ideal angle
quantiser with the same RMS: resolution = √12·σ_θ, and the effective bits are
log2(180°/resolution) over one electrical period (180° mechanical).

Through a gear train that moves ``travel_per_motor_turn`` output units per
motor turn, a motor angle maps to ``motor_deg/360 · travel_per_motor_turn``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import DesignValueError
from .sensor import BridgeSensor, decode_deg, make_rng

__all__ = [
    "PeakError",
    "ErrorSummary",
    "wrap_mech_deg",
    "angle_error_deg",
    "first_order_error_deg",
    "offset_peak_error",
    "gain_peak_error",
    "phase_peak_error",
    "harmonic3_peak_error",
    "noise_sigma_deg",
    "effective_resolution",
    "to_output",
    "error_summary",
]


def wrap_mech_deg(error_deg) -> np.ndarray:
    """Wrap mechanical angle differences (deg) into [-90, 90), the AMR period."""
    return np.mod(np.asarray(error_deg, dtype=float) + 90.0, 180.0) - 90.0


def angle_error_deg(sensor: BridgeSensor, angle_deg, *, correction=None, noise: bool = False,
                    rng=None) -> np.ndarray:
    """Decoded minus true shaft angle (mechanical deg, wrapped to [-90, 90)).

    Parameters
    ----------
    sensor : BridgeSensor
    angle_deg : array_like
        True mechanical angles (deg).
    correction : object with ``apply(x_mV, y_mV)``, optional
        A calibration (e.g. :class:`turnkit.calibration.BridgeCorrection`)
        applied to the signals before decoding.
    noise : bool
        Include the sensor's random noise (default False: the systematic error).
    rng : None, int or numpy.random.Generator
        Noise source when ``noise`` is True.
    """
    _check_sensor(sensor)
    angle = np.asarray(angle_deg, dtype=float)
    x, y = sensor.signals(angle, rng=rng, noise=noise)
    if correction is not None:
        x, y = correction.apply(x, y)
    return wrap_mech_deg(decode_deg(x, y) - angle)


def first_order_error_deg(sensor: BridgeSensor, angle_deg) -> np.ndarray:
    """Sum of the first-order error terms above (mechanical deg); ignores noise and ADC."""
    _check_sensor(sensor)
    phi = 2.0 * np.radians(np.asarray(angle_deg, dtype=float))
    a = sensor.amplitude_mV
    ox, oy = sensor.offset_x_mV / a, sensor.offset_y_mV / a
    eps = sensor.gain_mismatch
    delta = math.radians(sensor.phase_error_deg)
    h2, h3 = sensor.harmonic2, sensor.harmonic3
    e = (oy * np.cos(phi) - ox * np.sin(phi) + 0.5 * eps * np.sin(2 * phi)
         + 0.5 * delta * (1.0 + np.cos(2 * phi))
         + h2 * np.sin(2 * phi) * (np.sin(phi) + np.cos(phi)) + h3 * np.sin(4 * phi))
    return 0.5 * np.degrees(e)


@dataclass(frozen=True, slots=True)
class PeakError:
    """Peak angle error of one error source, first order and exact.

    Attributes
    ----------
    first_order_el_deg, exact_el_deg : float
        Peak of the absolute error in electrical degrees.
    """

    first_order_el_deg: float
    exact_el_deg: float

    @property
    def first_order_mech_deg(self) -> float:
        """First-order peak in mechanical degrees (half the electrical)."""
        return 0.5 * self.first_order_el_deg

    @property
    def exact_mech_deg(self) -> float:
        """Exact peak in mechanical degrees (half the electrical)."""
        return 0.5 * self.exact_el_deg


def _fraction(value, field: str, upper: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise DesignValueError(field, value, "a finite number")
    value = float(value)
    if not (math.isfinite(value) and abs(value) < upper):
        raise DesignValueError(field, value, f"of size below {upper:g}")
    return value


def offset_peak_error(offset_x: float, offset_y: float = 0.0) -> PeakError:
    """Peak error of zero offsets given as fractions of the amplitude."""
    ox = _fraction(offset_x, "offset_x", 1.0)
    oy = _fraction(offset_y, "offset_y", 1.0)
    o = math.hypot(ox, oy)
    if o >= 1.0:
        raise DesignValueError("offset", o, "combined offset below 1 (a fraction of amplitude)")
    return PeakError(math.degrees(o), math.degrees(math.asin(o)))


def gain_peak_error(gain_ratio: float, *, split: bool = False) -> PeakError:
    """Peak error of a gain mismatch.

    Parameters
    ----------
    gain_ratio : float
        k = gain of the sin bridge / gain of the cos bridge (> 0). With
        ``split=True`` the mismatch ε = k − 1 is shared ±ε/2 by the two bridges.
    """
    k = _fraction(gain_ratio, "gain_ratio", 3.0)
    if k <= 0:
        raise DesignValueError("gain_ratio", k, "> 0")
    eps = k - 1.0
    exact = math.asin(abs(eps) / 2.0) if split else math.asin(abs(k - 1.0) / (k + 1.0))
    return PeakError(math.degrees(abs(eps) / 2.0), math.degrees(exact))


def phase_peak_error(phase_error_deg: float, *, split: bool = False) -> PeakError:
    """Peak error of a quadrature (phase) error δ in electrical degrees.

    On one bridge (``split=False``, the :class:`BridgeSensor` convention) the
    error is δ/2 + (δ/2)·cos 2φ; shared ±δ/2 it is (δ/2)·cos 2φ.
    """
    d = math.radians(abs(_fraction(phase_error_deg, "phase_error_deg", 45.0)))
    ripple = math.asin(math.tan(d / 2.0))
    if split:
        return PeakError(math.degrees(d / 2.0), math.degrees(ripple))
    return PeakError(math.degrees(d), math.degrees(d / 2.0 + ripple))


def harmonic3_peak_error(harmonic3: float) -> PeakError:
    """Peak error of a 3rd harmonic h3 (fraction of amplitude) in both bridges' waveform."""
    h = abs(_fraction(harmonic3, "harmonic3", 1.0))
    return PeakError(math.degrees(h), math.degrees(math.asin(h)))


def noise_sigma_deg(sensor: BridgeSensor, *, include_adc: bool = True) -> float:
    """Standard deviation of the decoded shaft angle (mechanical deg).

    σ_θ = ½·σ_v/A rad with σ_v² = noise_rms² + (ADC step)²/12 when
    ``include_adc``.
    """
    _check_sensor(sensor)
    var = sensor.noise_rms_mV ** 2
    if include_adc:
        var += sensor.adc_step_mV ** 2 / 12.0
    return 0.5 * math.degrees(math.sqrt(var) / sensor.amplitude_mV)


def effective_resolution(sensor: BridgeSensor) -> tuple[float, float]:
    """(resolution_deg, effective_bits): ideal-quantiser step with the same RMS as the noise.

    resolution_deg = √12·σ_θ (mechanical deg); bits = log2(180/resolution_deg).
    A sensor without noise or ADC gives (0.0, inf).
    """
    sigma = noise_sigma_deg(sensor)
    if sigma == 0.0:
        return 0.0, math.inf
    res = math.sqrt(12.0) * sigma
    return res, math.log2(180.0 / res)


def to_output(motor_deg, gear_train):
    """Map motor-shaft degrees to output units through a gear train.

    Parameters
    ----------
    motor_deg : float or array_like
        Motor-shaft angle or angle error (deg).
    gear_train : object
        Anything with ``travel_per_motor_turn`` (a number or Fraction, output
        units per motor turn) and ``output_unit`` ("deg" or "mm").

    Returns
    -------
    float or numpy.ndarray
        ``motor_deg/360 · travel_per_motor_turn`` in ``gear_train.output_unit``.
    """
    try:
        travel = float(gear_train.travel_per_motor_turn)
        unit = gear_train.output_unit
    except (AttributeError, TypeError, ValueError):
        raise DesignValueError("gear_train", gear_train,
                               "an object with travel_per_motor_turn and output_unit") from None
    if unit not in ("deg", "mm"):
        raise DesignValueError("gear_train.output_unit", unit, "'deg' or 'mm'")
    if not math.isfinite(travel):
        raise DesignValueError("gear_train.travel_per_motor_turn", travel, "a finite number",
                               unit=unit)
    scale = travel / 360.0
    if np.ndim(motor_deg) == 0:
        return float(motor_deg) * scale
    return np.asarray(motor_deg, dtype=float) * scale


@dataclass(frozen=True, slots=True)
class ErrorSummary:
    """Angle error of a sensor over one shaft turn, at the motor and the output.

    Attributes
    ----------
    calibrated : bool
        Whether the headline numbers are after calibration.
    peak_error_deg, rms_error_deg : float
        Peak of |error| and RMS error of the systematic curve (mechanical deg
        at the motor), before or after calibration as ``calibrated`` says.
    noise_sigma_deg : float
        Random angle standard deviation from noise and ADC rounding (mech deg).
    resolution_deg : float
        Effective resolution, √12·noise_sigma_deg (mech deg at the motor).
    effective_bits : float
        log2(180/resolution_deg); inf for a noiseless sensor.
    angle_deg : numpy.ndarray
        Shaft angles over one turn (deg).
    error_deg : numpy.ndarray
        Systematic error at those angles, as ``calibrated`` says (mech deg).
    error_before_deg, error_after_deg : numpy.ndarray
        The same before and after calibration, for plotting both.
    output_unit : str or None
        Unit of the output-side numbers ("deg" or "mm"); None without a gear train.
    peak_error_output, rms_error_output, resolution_output : float or None
        The headline numbers mapped through the gear train.
    """

    calibrated: bool
    peak_error_deg: float
    rms_error_deg: float
    noise_sigma_deg: float
    resolution_deg: float
    effective_bits: float
    angle_deg: np.ndarray
    error_deg: np.ndarray
    error_before_deg: np.ndarray
    error_after_deg: np.ndarray
    output_unit: str | None = None
    peak_error_output: float | None = None
    rms_error_output: float | None = None
    resolution_output: float | None = None


def error_summary(sensor: BridgeSensor, calibrated: bool, n: int = 3600, *, gear_train=None,
                  sweep_samples: int = 720, rng=None) -> ErrorSummary:
    """Peak/RMS error and effective resolution of a sensor, before or after calibration.

    Calibration is simulated as it would be done on the line: one shaft turn
    of ``sweep_samples`` noisy, ADC-rounded samples is fitted with
    :func:`turnkit.calibration.fit_sweep` (robust Heydemann ellipse fit) and
    the correction is applied to the noiseless error curve.

    Parameters
    ----------
    sensor : BridgeSensor
    calibrated : bool
        Report the headline numbers after (True) or before (False) calibration.
    n : int
        Points of the error curve over one turn (>= 16).
    gear_train : object, optional
        With ``travel_per_motor_turn`` and ``output_unit``; adds output-side numbers.
    sweep_samples : int
        Samples in the simulated calibration sweep (>= 16).
    rng : None, int or numpy.random.Generator
        Noise of the calibration sweep (None: seed 0).

    Returns
    -------
    ErrorSummary
    """
    from .calibration import fit_sweep

    _check_sensor(sensor)
    if not isinstance(calibrated, (bool, np.bool_)):
        raise DesignValueError("calibrated", calibrated, "True or False")
    for field, value in (("n", n), ("sweep_samples", sweep_samples)):
        if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < 16:
            raise DesignValueError(field, value, "an integer >= 16")
    angle = np.linspace(0.0, 360.0, int(n), endpoint=False)
    # The noiseless signals once, decoded as they are and through the correction
    # (what angle_error_deg does, without working the signals out twice).
    x, y = sensor.signals(angle, noise=False)
    before = wrap_mech_deg(decode_deg(x, y) - angle)
    sweep_angle = np.linspace(0.0, 360.0, int(sweep_samples), endpoint=False)
    sx, sy = sensor.signals(sweep_angle, rng=make_rng(rng))
    correction = fit_sweep(sx, sy).correction
    after = wrap_mech_deg(decode_deg(*correction.apply(x, y)) - angle)
    chosen = after if calibrated else before
    peak = float(np.max(np.abs(chosen)))
    rms = float(np.sqrt(np.mean(chosen ** 2)))
    sigma = noise_sigma_deg(sensor)
    res, bits = effective_resolution(sensor)
    out = {}
    if gear_train is not None:
        out = dict(output_unit=gear_train.output_unit,
                   peak_error_output=abs(to_output(peak, gear_train)),
                   rms_error_output=abs(to_output(rms, gear_train)),
                   resolution_output=abs(to_output(res, gear_train)))
    for arr in (angle, chosen, before, after):
        arr.flags.writeable = False
    return ErrorSummary(bool(calibrated), peak, rms, sigma, res, bits, angle, chosen, before,
                        after, **out)


def _check_sensor(sensor):
    if not isinstance(sensor, BridgeSensor):
        raise DesignValueError("sensor", sensor, "a BridgeSensor")
