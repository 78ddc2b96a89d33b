"""The shaft magnet and its field at the AMR sensor and at the two Hall latches.

The magnet is a diametrically magnetised disc (a cylinder magnetised across
its axis) on the end of the motor shaft. The board carrying the AMR sensor
(on the shaft axis) and the two Hall latches (90° apart, at ``latch_radius``
from the axis) sits ``airgap`` below the magnet's face.

Field model
-----------
The magnet is uniformly magnetised, so its field is that of the magnetic
surface charge σ = M·n on its curved side (the flat faces carry none), the
Coulombian model of E. P. Furlani, *Permanent Magnet and Electromechanical
Devices*, Academic Press (2001), ch. 2. With μ0·M = Br and the point a
distance g below the near face, the integral along the magnet's height is
done in closed form and the one around its circumference numerically (a
periodic trapezoid rule, spectrally accurate); see docs/accuracy.md.

On the axis the second integral is also closed and gives the transverse field

    B(g) = (Br / 4) · [ (g + t) / √(R² + (g + t)²) − g / √(R² + g²) ]

(R radius, t thickness), the on-axis case of the exact expression of
G. Caciagli, R. J. Baars, A. P. Philipse, B. W. M. Kuipers, "Exact expression
for the magnetic field of a finite cylinder with arbitrary uniform
magnetization", J. Magn. Magn. Mater. 456, 423–432 (2018). It tends to Br/4
at the face of a long magnet and to the dipole field μ0·m / (4π·g³) far away.

Because the field is linear in the magnetisation, each field component at a
fixed point varies exactly as a sine of the shaft angle. A latch reading the
field across the board therefore sees B_peak·sin(θ − θ_latch); it switches
on where that reaches its operate point and off where it falls to its
release point, which gives its switch angles and their spread.

Remanence falls with temperature: Br(T) = Br20·(1 + α·(T − 20 °C)), α the
reversible temperature coefficient of :data:`GRADES`.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from .errors import DesignValueError

__all__ = [
    "MagnetGrade",
    "GRADES",
    "REFERENCE_TEMPERATURE_DEGC",
    "remanence_mT",
    "axial_field_on_axis_mT",
    "field_mT",
    "sensor_field_mT",
    "latch_peak_field_mT",
    "eccentricity_error_deg",
    "tilt_error_deg",
    "stray_field_error_deg",
    "finite_field_error_deg",
    "LatchSwitching",
    "latch_switching",
    "latch_switch_spread_deg",
]

#: Temperature at which remanence and threshold data are referred (degC).
REFERENCE_TEMPERATURE_DEGC = 20.0

_MU0_OVER_4PI = 1e-7  # T·m/A


@dataclass(frozen=True, slots=True)
class MagnetGrade:
    """One magnet material: typical remanence and its temperature behaviour.

    Attributes
    ----------
    key : str
        Design-file name of the grade.
    name : str
        Plain description.
    remanence_mT : float
        Typical remanence at 20 °C (mT).
    remanence_drift_pct_per_K : float
        Reversible temperature coefficient of the remanence (%/K).
    max_temperature_degC : float
        Highest working temperature before irreversible loss (degC), for a
        disc of ordinary proportions.
    source : str
        Where the values come from.
    """

    key: str
    name: str
    remanence_mT: float
    remanence_drift_pct_per_K: float
    max_temperature_degC: float
    source: str


_TABLE_SOURCE = ("typical values as tabulated in MMPA Standard No. 0100-00, Standard Specifications for "
                 "Permanent Magnet Materials (Magnetic Materials Producers Association, 2000) and "
                 "IEC 60404-8-1 (from memory)")

#: Magnet grades by design-file key.
GRADES: dict[str, MagnetGrade] = {g.key: g for g in (
    MagnetGrade("ndfeb", "sintered NdFeB, standard grade (e.g. N35)", 1190.0, -0.12, 80.0, _TABLE_SOURCE),
    MagnetGrade("ndfeb_high_temperature", "sintered NdFeB, high-coercivity grade (e.g. N35SH)", 1180.0, -0.11,
                150.0, _TABLE_SOURCE),
    MagnetGrade("ndfeb_bonded", "bonded (polymer) NdFeB", 680.0, -0.13, 120.0, _TABLE_SOURCE),
    MagnetGrade("smco5", "sintered SmCo5", 900.0, -0.04, 250.0, _TABLE_SOURCE),
    MagnetGrade("sm2co17", "sintered Sm2Co17", 1050.0, -0.035, 300.0, _TABLE_SOURCE),
    MagnetGrade("ferrite", "sintered hard ferrite (strontium ferrite)", 400.0, -0.2, 250.0, _TABLE_SOURCE),
)}


def _positive(value, field: str, unit: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)) \
            or not math.isfinite(float(value)) or float(value) <= 0:
        raise DesignValueError(field, value, "a finite number > 0", unit=unit)
    return float(value)


def remanence_mT(remanence_20C_mT: float, drift_pct_per_K: float, temperature_degC):
    """Remanence at a temperature (mT), linear in the reversible coefficient.

    Parameters
    ----------
    remanence_20C_mT : float
        Remanence at 20 °C (mT).
    drift_pct_per_K : float
        Reversible temperature coefficient (%/K), e.g. −0.12 for NdFeB.
    temperature_degC : float or array_like
        Magnet temperature (degC).

    Returns
    -------
    float or numpy.ndarray
        Remanence (mT), never below zero.
    """
    t = np.asarray(temperature_degC, dtype=float)
    out = remanence_20C_mT * np.maximum(1.0 + drift_pct_per_K / 100.0 * (t - REFERENCE_TEMPERATURE_DEGC), 0.0)
    return float(out) if out.ndim == 0 else out


def axial_field_on_axis_mT(remanence_mT_: float, diameter_mm: float, thickness_mm: float, airgap_mm):
    """Field on the magnet's axis, across the axis, at ``airgap`` below its face (mT).

    Parameters
    ----------
    remanence_mT_ : float
        Remanence Br (mT).
    diameter_mm, thickness_mm : float
        Magnet diameter and thickness along the axis (mm).
    airgap_mm : float or array_like
        Distance from the magnet's face to the sensing plane (mm), >= 0.

    Returns
    -------
    float or numpy.ndarray
        Size of the field (mT); it points against the magnetisation.

    References
    ----------
    G. Caciagli et al., J. Magn. Magn. Mater. 456, 423–432 (2018), on-axis case
    (derived, shown in docs/accuracy.md).
    """
    r = 0.5 * _positive(diameter_mm, "magnet.diameter", "mm")
    t = _positive(thickness_mm, "magnet.thickness", "mm")
    g = np.asarray(airgap_mm, dtype=float)
    far = g + t
    out = 0.25 * remanence_mT_ * (far / np.sqrt(r * r + far * far) - g / np.sqrt(r * r + g * g))
    return float(out) if out.ndim == 0 else out


_PHI_POINTS = 720


def field_mT(remanence_mT_: float, diameter_mm: float, thickness_mm: float, x_mm, y_mm, airgap_mm: float,
             points: int = _PHI_POINTS) -> np.ndarray:
    """Field of a disc magnetised along +x at points of a plane ``airgap`` below it (mT).

    Parameters
    ----------
    remanence_mT_ : float
        Remanence Br (mT).
    diameter_mm, thickness_mm : float
        Magnet size (mm).
    x_mm, y_mm : float or array_like
        Positions in the plane, measured from the magnet's axis (mm).
    airgap_mm : float
        Distance from the magnet's face to the plane (mm), > 0.
    points : int
        Quadrature points around the circumference.

    Returns
    -------
    numpy.ndarray
        Shape ``(..., 3)``: Bx, By (in the plane) and Bz (along the axis, towards
        the magnet), mT.

    Notes
    -----
    Surface-charge model (Furlani 2001, ch. 2) with the integral over the
    height done in closed form (derived, shown in docs/accuracy.md).
    """
    radius = 0.5 * _positive(diameter_mm, "magnet.diameter", "mm")
    t = _positive(thickness_mm, "magnet.thickness", "mm")
    g = _positive(airgap_mm, "magnet.airgap", "mm")
    x = np.asarray(x_mm, dtype=float)[..., None]
    y = np.asarray(y_mm, dtype=float)[..., None]
    phi = np.linspace(0.0, 2 * np.pi, points, endpoint=False)
    c, s = np.cos(phi), np.sin(phi)
    dx = x - radius * c
    dy = y - radius * s
    a2 = dx * dx + dy * dy
    near = np.sqrt(a2 + g * g)
    far = np.sqrt(a2 + (g + t) ** 2)
    # ∫ dw/(a²+w²)^{3/2} and ∫ w dw/(a²+w²)^{3/2} over w = g .. g+t
    i1 = ((g + t) / far - g / near) / np.where(a2 > 0, a2, np.inf)
    i1 = np.where(a2 > 0, i1, 0.0)
    i2 = 1.0 / near - 1.0 / far
    weight = remanence_mT_ * radius / (4 * np.pi) * (2 * np.pi / points) * c
    bx = np.sum(weight * dx * i1, axis=-1)
    by = np.sum(weight * dy * i1, axis=-1)
    bz = np.sum(-weight * i2, axis=-1)
    return np.stack([bx, by, bz], axis=-1)


def sensor_field_mT(remanence_mT_, diameter_mm: float, thickness_mm: float, airgap_mm: float):
    """Field at the AMR sensor on the shaft axis (mT); vectorised over remanence."""
    return np.asarray(remanence_mT_, dtype=float) * axial_field_on_axis_mT(1.0, diameter_mm, thickness_mm,
                                                                            airgap_mm)


def latch_peak_field_mT(remanence_mT_, diameter_mm: float, thickness_mm: float, airgap_mm: float,
                        latch_radius_mm: float):
    """Peak field across the board at a latch over one turn (mT); vectorised over remanence.

    A latch at radius r sees B_peak·sin(θ − θ_latch); B_peak is the axial
    field at (r, 0) with the magnet pointing at the latch.
    """
    _positive(latch_radius_mm, "magnet.latch_radius", "mm")
    unit = abs(float(field_mT(1.0, diameter_mm, thickness_mm, latch_radius_mm, 0.0, airgap_mm)[2]))
    return np.asarray(remanence_mT_, dtype=float) * unit


@lru_cache(maxsize=256)
def eccentricity_error_deg(diameter_mm: float, thickness_mm: float, airgap_mm: float,
                           eccentricity_mm: float, angles: int = 90) -> float:
    """Peak angle error at the shaft from the sensor sitting off the magnet's axis (deg).

    The field direction at the displaced sensor is computed over a turn from
    the field model; the constant part (taken out by the zero calibration)
    is removed and the peak of the rest returned.

    Parameters
    ----------
    diameter_mm, thickness_mm, airgap_mm : float
        Magnet and airgap (mm).
    eccentricity_mm : float
        Distance between the sensor centre and the magnet's axis (mm), >= 0.
    angles : int
        Shaft angles evaluated over a half turn (the error repeats every 180°).

    Returns
    -------
    float
        Peak angle error (deg).
    """
    e = float(eccentricity_mm)
    if not math.isfinite(e) or e < 0:
        raise DesignValueError("accuracy.eccentricity", eccentricity_mm, ">= 0", unit="mm")
    if e == 0:
        return 0.0
    theta = np.linspace(0.0, np.pi, angles, endpoint=False)
    # In the magnet's frame the fixed sensor point turns backwards.
    px, py = e * np.cos(-theta), e * np.sin(-theta)
    b = field_mT(1.0, diameter_mm, thickness_mm, px, py, airgap_mm)
    # Field direction in the board frame is atan2(b) + θ; its departure from θ is atan2(b).
    lag = np.arctan2(b[:, 1], b[:, 0])
    error = np.angle(np.exp(1j * (lag - lag[0])))
    error = error - 0.5 * (error.max() + error.min())
    return float(np.degrees(np.max(np.abs(error))))


def tilt_error_deg(tilt_deg: float) -> float:
    """Peak angle error of a sensor tilted by ``tilt_deg`` against the magnet's face (deg).

    The tilt scales the field along one in-plane axis by cos τ: a gain
    mismatch, peak error asin((1 − cos τ)/(1 + cos τ)) = asin(tan²(τ/2))
    (derived, shown in docs/accuracy.md).
    """
    tau = math.radians(abs(float(tilt_deg)))
    if tau >= math.pi / 2:
        raise DesignValueError("accuracy.tilt", tilt_deg, "below 90", unit="deg")
    return math.degrees(math.asin(math.tan(tau / 2) ** 2))


def stray_field_error_deg(stray_field_mT: float, magnet_field_mT):
    """Peak angle error from a uniform stray field, asin(B_stray / B_magnet) (deg).

    Returns 90° when the stray field reaches the magnet's field (the angle is
    then lost). Vectorised over ``magnet_field_mT``.
    """
    ratio = abs(float(stray_field_mT)) / np.maximum(np.asarray(magnet_field_mT, dtype=float), 1e-300)
    out = np.degrees(np.arcsin(np.minimum(ratio, 1.0)))
    return float(out) if out.ndim == 0 else out


def finite_field_error_deg(anisotropy_field_mT: float, magnet_field_mT):
    """Peak angle error of an AMR film in a finite field, B_k / (2B) in radians (deg).

    First-order lag of the film's magnetisation behind the field in the
    Stoner–Wohlfarth model (E. C. Stoner, E. P. Wohlfarth, Phil. Trans. R. Soc.
    A 240, 599 (1948)); derived, shown in docs/accuracy.md. Vectorised over
    ``magnet_field_mT``.
    """
    b = np.maximum(np.asarray(magnet_field_mT, dtype=float), 1e-300)
    ratio = np.minimum(abs(float(anisotropy_field_mT)) / (2.0 * b), 1.0)
    out = np.degrees(np.arcsin(ratio))
    return float(out) if out.ndim == 0 else out


@dataclass(frozen=True, slots=True)
class LatchSwitching:
    """How the latches switch on the magnet's field over temperature.

    Attributes
    ----------
    temperatures_degC : numpy.ndarray
        Temperatures evaluated (degC).
    peak_field_mT : numpy.ndarray
        Peak field at a latch at each temperature (mT).
    operate_needed_mT, release_needed_mT : numpy.ndarray
        Largest operate point and largest release point size (part spread and
        drift included) at each temperature (mT).
    operates, releases : bool
        True when the field reaches the operate (release) point at every temperature.
    worst_operate_index, worst_release_index : int
        Temperature index with the least field to spare.
    hysteresis_deg : float
        Nominal angle between switch-on and switch-off of one latch (deg).
    switch_spread_deg : float
        Largest shift of a switch angle from its nominal place over parts and
        temperatures, either way (deg): the field-derived switch-point tolerance.
        90° when a latch can fail to switch.
    """

    temperatures_degC: np.ndarray
    peak_field_mT: np.ndarray
    operate_needed_mT: np.ndarray
    release_needed_mT: np.ndarray
    operates: bool
    releases: bool
    worst_operate_index: int
    worst_release_index: int
    hysteresis_deg: float
    switch_spread_deg: float


def latch_switching(peak_field_mT, temperatures_degC, *, operate_field_mT: float, release_field_mT: float,
                    threshold_spread_mT: float = 0.0, threshold_drift_pct_per_K: float = 0.0) -> LatchSwitching:
    """Latch operate/release checks and switch angles over temperature.

    Parameters
    ----------
    peak_field_mT : array_like
        Peak field at the latch at each temperature (mT).
    temperatures_degC : array_like
        The temperatures (degC), same length.
    operate_field_mT : float
        Typical operate point (mT, > 0).
    release_field_mT : float
        Typical release point (mT, < 0 for a latch).
    threshold_spread_mT : float
        Part-to-part spread of each threshold, either way (mT, >= 0).
    threshold_drift_pct_per_K : float
        Temperature coefficient of the thresholds' size (%/K, referred to 20 °C).

    Returns
    -------
    LatchSwitching
    """
    b = np.asarray(peak_field_mT, dtype=float)
    temps = np.asarray(temperatures_degC, dtype=float)
    if operate_field_mT <= 0 or release_field_mT >= 0:
        raise DesignValueError("latches.operate_field", (operate_field_mT, release_field_mT),
                               "an operate point > 0 and a release point < 0 (a latch)", unit="mT")
    scale = np.maximum(1.0 + threshold_drift_pct_per_K / 100.0 * (temps - REFERENCE_TEMPERATURE_DEGC), 0.0)
    op_hi = (operate_field_mT + threshold_spread_mT) * scale
    op_lo = np.maximum(operate_field_mT - threshold_spread_mT, 0.0) * scale
    rel_hi = (abs(release_field_mT) + threshold_spread_mT) * scale
    rel_lo = np.maximum(abs(release_field_mT) - threshold_spread_mT, 0.0) * scale
    op_margin = b - op_hi
    rel_margin = b - rel_hi
    operates = bool(np.all(op_margin > 0))
    releases = bool(np.all(rel_margin > 0))
    b_nom = float(np.interp(REFERENCE_TEMPERATURE_DEGC, temps, b)) if temps.size > 1 else float(b[0])
    b_nom = max(b_nom, 1e-300)
    op_nom = math.degrees(math.asin(min(operate_field_mT / b_nom, 1.0)))
    rel_nom = math.degrees(math.asin(min(abs(release_field_mT) / b_nom, 1.0)))
    hysteresis = op_nom + rel_nom
    if operates and releases:
        # Each edge's shift from the zero crossing, against the nominal half-hysteresis.
        half = 0.5 * hysteresis
        shifts = [np.degrees(np.arcsin(np.minimum(v / b, 1.0))) for v in (op_hi, op_lo, rel_hi, rel_lo)]
        spread = float(max(np.max(np.abs(s - half)) for s in shifts))
    else:
        spread = 90.0
    return LatchSwitching(temperatures_degC=temps, peak_field_mT=b, operate_needed_mT=op_hi,
                          release_needed_mT=rel_hi, operates=operates, releases=releases,
                          worst_operate_index=int(np.argmin(op_margin)), worst_release_index=int(np.argmin(rel_margin)),
                          hysteresis_deg=float(hysteresis), switch_spread_deg=spread)


def latch_switch_spread_deg(peak_field_mT, temperatures_degC, *, operate_field_mT: float,
                            release_field_mT: float, threshold_spread_mT: float = 0.0,
                            threshold_drift_pct_per_K: float = 0.0) -> tuple[float, float]:
    """Field-derived switch-point tolerance and hysteresis of a latch (deg, deg).

    The pair to feed a narrowest-quadrant bound in place of the hand-set
    ``latches.switch_point_tolerance`` and ``latches.hysteresis``.

    Returns
    -------
    (float, float)
        Switch-angle spread either way (deg; 90 when a latch may not switch)
        and nominal hysteresis (deg).
    """
    s = latch_switching(peak_field_mT, temperatures_degC, operate_field_mT=operate_field_mT,
                        release_field_mT=release_field_mT, threshold_spread_mT=threshold_spread_mT,
                        threshold_drift_pct_per_K=threshold_drift_pct_per_K)
    return s.switch_spread_deg, s.hysteresis_deg
