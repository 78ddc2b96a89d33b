"""Calibration of an AMR bridge pair from a sweep (Heydemann-type ellipse fit).

Over a sweep the raw samples (x, y) of the cos and sin bridge lie on an
ellipse::

    x = p + a·cos φ,     y = q + b·sin(φ + δ)

(offsets p, q; amplitudes a, b; phase error δ, electrical). The conic

    A x² + B y² + C x y + D x + E y = 1

is fitted by linear least squares and turned into the five parameters
(P. L. M. Heydemann, Appl. Opt. 20(19), 1981, 3382–3384)::

    p = (2BD − EC)/(C² − 4AB),  q = (2AE − DC)/(C² − 4AB)
    G = 1 + A p² + B q² + C p q,  sin(−δ) = C/(2√(AB))
    a = √(G/A)/cos δ,  b = √(G/B)/cos δ

The correction u₁ = x − p, u₂ = ((a/b)(y − q) − u₁ sin δ)/cos δ puts the
samples back on a circle of radius a, after which atan2(u₂, u₁) is free of
offset, gain and phase errors (harmonics and noise remain).

Robustness to outliers: iteratively reweighted least squares on the radial
residual ρ = |u|/a − 1 of each sample. A few Huber iterations (c = 1.345)
move the fit away from gross outliers, then Tukey biweight iterations
(c = 4.685) give zero weight to samples farther than 4.685 robust standard
deviations (1.4826 × median absolute deviation) from the circle. Samples with
zero final weight are reported as outliers. Data are centred and scaled
before the fit for numerical conditioning.

A sweep must cover one electrical period (180° of shaft): the largest gap
between neighbouring electrical angles of the samples may not exceed
``max_gap_deg`` (default max(10°, 540°/n) electrical for n samples).
"""

from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass, field

import numpy as np

from .errors import DesignFileError, DesignValueError
from .sensor import decode_deg

__all__ = [
    "BridgeCorrection",
    "CalibrationFit",
    "SweepData",
    "fit_sweep",
    "read_sweep_csv",
    "fit_sweep_csv",
]

_HUBER_C = 1.345
_TUKEY_C = 4.685
_MIN_SAMPLES = 8


@dataclass(frozen=True, slots=True)
class BridgeCorrection:
    """Fitted offsets, amplitudes and phase error of a bridge pair, and their removal.

    Attributes
    ----------
    offset_x_mV, offset_y_mV : float
        Zero offsets of the cos and sin bridge (mV, or the sweep's unit).
    amplitude_x_mV, amplitude_y_mV : float
        Amplitudes a and b (mV).
    phase_error_deg : float
        δ in y = q + b·sin(φ + δ) (electrical deg), the convention of
        :class:`turnkit.sensor.BridgeSensor`.
    """

    offset_x_mV: float
    offset_y_mV: float
    amplitude_x_mV: float
    amplitude_y_mV: float
    phase_error_deg: float

    def __post_init__(self):
        for field in ("offset_x_mV", "offset_y_mV", "amplitude_x_mV", "amplitude_y_mV",
                      "phase_error_deg"):
            v = getattr(self, field)
            if not isinstance(v, (int, float, np.floating, np.integer)) or isinstance(v, bool) \
                    or not math.isfinite(float(v)):
                raise DesignValueError(f"BridgeCorrection.{field}", v, "a finite number")
            object.__setattr__(self, field, float(v))
        for field in ("amplitude_x_mV", "amplitude_y_mV"):
            if getattr(self, field) <= 0:
                raise DesignValueError(f"BridgeCorrection.{field}", getattr(self, field), "> 0",
                                       unit="mV")
        if abs(self.phase_error_deg) >= 90.0:
            raise DesignValueError("BridgeCorrection.phase_error_deg", self.phase_error_deg,
                                   "in (-90, 90)", unit="deg")

    @property
    def gain_mismatch(self) -> float:
        """amplitude_y/amplitude_x − 1 (fraction), the ``BridgeSensor`` convention."""
        return self.amplitude_y_mV / self.amplitude_x_mV - 1.0

    def apply(self, x_mV, y_mV):
        """Corrected signals (cos, sin), both of amplitude ``amplitude_x_mV`` (mV).

        Parameters
        ----------
        x_mV, y_mV : array_like
            Raw cos and sin bridge samples (mV).

        Returns
        -------
        (u1, u2) : tuple of numpy.ndarray
        """
        d = math.radians(self.phase_error_deg)
        u1 = np.asarray(x_mV, dtype=float) - self.offset_x_mV
        yy = np.asarray(y_mV, dtype=float) - self.offset_y_mV
        u2 = ((self.amplitude_x_mV / self.amplitude_y_mV) * yy - u1 * math.sin(d)) / math.cos(d)
        return u1, u2

    def decode_deg(self, x_mV, y_mV) -> np.ndarray:
        """Corrected mechanical angle in [0, 180) from raw samples (deg)."""
        return decode_deg(*self.apply(x_mV, y_mV))


@dataclass(frozen=True, slots=True)
class CalibrationFit:
    """Result of fitting a sweep.

    Attributes
    ----------
    correction : BridgeCorrection
    n_samples, n_outliers : int
        Samples used and samples given zero weight.
    weights : numpy.ndarray
        Final robust weight of each sample, in [0, 1].
    radial_residual_rms : float
        RMS of |u|/a − 1 over the inliers after correction (fraction of amplitude).
    coverage_el_deg : float
        360° minus the largest gap between neighbouring electrical angles (deg).
    angle_residual_peak_deg, angle_residual_rms_deg : float or None
        When reference angles came with the sweep: peak and RMS of the
        corrected angle minus the reference over the inliers, after removing
        the mean (mechanical deg). None otherwise.
    iterations : int
        Reweighting iterations run.
    """

    correction: BridgeCorrection
    n_samples: int
    n_outliers: int
    weights: np.ndarray = field(repr=False)
    radial_residual_rms: float
    coverage_el_deg: float
    angle_residual_peak_deg: float | None
    angle_residual_rms_deg: float | None
    iterations: int


def _conic_lstsq(xs, ys, w, m=None):
    if m is None:
        m = _conic_matrix(xs, ys)
    sw = np.sqrt(w)
    coef, _, rank, sv = np.linalg.lstsq(m * sw[:, None], sw, rcond=None)
    return coef, rank, sv


def _conic_matrix(xs, ys):
    """Columns x², y², xy, x, y of the conic fit (the same for every reweighting pass)."""
    return np.column_stack((xs * xs, ys * ys, xs * ys, xs, ys))


def _conic_to_params(coef):
    """(p, q, a, b, delta_rad) from conic coefficients, or None if not a real ellipse."""
    a_, b_, c_, d_, e_ = (float(v) for v in coef)
    den = c_ * c_ - 4.0 * a_ * b_
    if not (den < 0 and a_ > 0 and b_ > 0):
        return None
    p = (2.0 * b_ * d_ - e_ * c_) / den
    q = (2.0 * a_ * e_ - d_ * c_) / den
    g = 1.0 + a_ * p * p + b_ * q * q + c_ * p * q
    if not g > 0:
        return None
    s = c_ / (2.0 * math.sqrt(a_ * b_))
    if not -1.0 < s < 1.0:
        return None
    alpha = math.asin(s)
    amp_x = math.sqrt(g / a_) / math.cos(alpha)
    amp_y = math.sqrt(g / b_) / math.cos(alpha)
    return p, q, amp_x, amp_y, -alpha


def _corrected_polar(params, xs, ys):
    u1, u2 = _corrected_xy(params, xs, ys)
    return np.hypot(u1, u2) / params[2] - 1.0, np.arctan2(u2, u1)


def _corrected_radius(params, xs, ys):
    """The radial part of :func:`_corrected_polar` alone (the reweighting passes need no angle)."""
    u1, u2 = _corrected_xy(params, xs, ys)
    return np.hypot(u1, u2) / params[2] - 1.0


def _corrected_xy(params, xs, ys):
    p, q, ax, ay, d = params
    u1 = xs - p
    u2 = ((ax / ay) * (ys - q) - u1 * math.sin(d)) / math.cos(d)
    return u1, u2


def _largest_gap_deg(phase_rad) -> float:
    if phase_rad.size == 0:
        return 360.0
    s = np.sort(np.mod(np.degrees(phase_rad), 360.0))
    gaps = np.diff(np.concatenate((s, [s[0] + 360.0])))
    return float(np.max(gaps))


def _as_samples(values, field):
    arr = np.ravel(np.asarray(values, dtype=float))
    if not np.all(np.isfinite(arr)):
        bad = int(np.flatnonzero(~np.isfinite(arr))[0])
        raise DesignValueError(f"{field}[{bad}]", float(arr[bad]), "a finite number", unit="mV")
    return arr


def fit_sweep(x_mV, y_mV, *, angle_deg=None, robust: bool = True,
              max_gap_deg: float | None = None) -> CalibrationFit:
    """Fit offsets, gains and phase error to a sweep of raw bridge samples.

    Parameters
    ----------
    x_mV, y_mV : array_like
        Raw cos and sin bridge samples (mV), at least 8 of them.
    angle_deg : array_like, optional
        Reference shaft angles of the samples (deg), e.g. from a reference
        encoder; used for the coverage check and the angle residual.
    robust : bool
        Reweight against outliers (Huber then Tukey biweight, see module notes).
        False gives the plain least-squares fit.
    max_gap_deg : float, optional
        Largest allowed gap between neighbouring electrical angles (deg), in
        (0, 90]. Default max(10°, 540°/n): a uniform sweep of one electrical
        period passes with any n >= 8, while a sweep short of about 175° of
        shaft is rejected.

    Returns
    -------
    CalibrationFit

    Raises
    ------
    DesignValueError
        Too few samples, non-finite samples, collinear or otherwise
        degenerate data, or a sweep covering less than one electrical period.
    """
    x = _as_samples(x_mV, "x_mV")
    y = _as_samples(y_mV, "y_mV")
    if x.size != y.size:
        raise DesignValueError("y_mV", f"{y.size} samples", f"as many samples as x_mV ({x.size})")
    n = x.size
    if n < _MIN_SAMPLES:
        raise DesignValueError("sweep", f"{n} samples", f"at least {_MIN_SAMPLES} samples",
                               hint="record one electrical period (180° of shaft) or more")
    if max_gap_deg is None:
        max_gap_deg = max(10.0, 540.0 / n)
    if isinstance(max_gap_deg, bool) or not isinstance(max_gap_deg, (int, float)) \
            or not 0 < max_gap_deg <= 90:
        raise DesignValueError("max_gap_deg", max_gap_deg, "in (0, 90]", unit="deg")
    ref = None
    if angle_deg is not None:
        ref = np.ravel(np.asarray(angle_deg, dtype=float))
        if ref.size != n or not np.all(np.isfinite(ref)):
            raise DesignValueError("angle_deg", f"{ref.size} values",
                                   f"{n} finite reference angles, one per sample", unit="deg")
        gap = _largest_gap_deg(np.radians(2.0 * ref))
        if gap > max_gap_deg:
            raise _short_sweep(360.0 - gap, max_gap_deg)

    # Centre and scale so the 5x5 normal equations stay well conditioned.
    mx, my = float(np.mean(x)), float(np.mean(y))
    scale = float(np.sqrt(np.mean((x - mx) ** 2 + (y - my) ** 2)))
    if scale == 0.0:
        raise DesignValueError("sweep", "all samples equal", "samples spread around an ellipse",
                               hint="the magnet did not turn or the bridges are not connected")
    xs, ys = (x - mx) / scale, (y - my) / scale
    sv = np.linalg.svd(np.column_stack((xs, ys)), compute_uv=False)
    if sv[1] <= 1e-6 * sv[0]:
        raise DesignValueError("sweep", "collinear samples", "samples spread around an ellipse",
                               hint="one bridge seems constant or both move together; "
                                    "check wiring and magnet")

    weights = np.ones(n)
    conic = _conic_matrix(xs, ys)
    params, iterations = _fit_once(xs, ys, weights, conic)
    if params is None:
        gap = _largest_gap_deg(np.arctan2(ys, xs))
        if gap > max_gap_deg:
            raise _short_sweep(360.0 - gap, max_gap_deg)
        raise _not_ellipse()
    if robust:
        for tuning, count in ((_HUBER_C, 10), (_TUKEY_C, 40)):
            for _ in range(count):
                rho = _corrected_radius(params, xs, ys)
                new_w = _weights(rho, tuning, huber=tuning == _HUBER_C)
                if new_w is None:
                    break
                new_params, _ = _fit_once(xs, ys, new_w, conic)
                iterations += 1
                if new_params is None:
                    break
                change = max(abs(u - v) for u, v in zip(new_params, params))
                params, weights = new_params, new_w
                if change < 1e-12:
                    break
        if np.count_nonzero(weights) < _MIN_SAMPLES:
            raise _not_ellipse()

    rho, phase = _corrected_polar(params, xs, ys)
    inlier = weights > 0
    if ref is None:
        gap = _largest_gap_deg(phase[inlier])
        if gap > max_gap_deg:
            raise _short_sweep(360.0 - gap, max_gap_deg)
    else:
        gap = _largest_gap_deg(np.radians(2.0 * ref[inlier]))
    p, q, ax, ay, d = params
    correction = BridgeCorrection(mx + scale * p, my + scale * q, scale * ax, scale * ay,
                                  math.degrees(d))
    peak = rms = None
    if ref is not None:
        err = np.mod(correction.decode_deg(x, y) - ref + 90.0, 180.0) - 90.0
        err = err[inlier]
        # The reference and sensor zeros need not agree; take out the mean (circularly).
        mean = 0.5 * math.degrees(math.atan2(np.mean(np.sin(np.radians(2 * err))),
                                             np.mean(np.cos(np.radians(2 * err)))))
        err = np.mod(err - mean + 90.0, 180.0) - 90.0
        peak = float(np.max(np.abs(err)))
        rms = float(np.sqrt(np.mean(err ** 2)))
    weights = weights.copy()
    weights.flags.writeable = False
    return CalibrationFit(
        correction=correction,
        n_samples=n,
        n_outliers=int(np.count_nonzero(~inlier)),
        weights=weights,
        radial_residual_rms=float(np.sqrt(np.mean(rho[inlier] ** 2))),
        coverage_el_deg=360.0 - gap,
        angle_residual_peak_deg=peak,
        angle_residual_rms_deg=rms,
        iterations=iterations,
    )


def _fit_once(xs, ys, w, m=None):
    coef, rank, _ = _conic_lstsq(xs, ys, w, m)
    if rank < 5:
        return None, 0
    return _conic_to_params(coef), 0


def _median(a: np.ndarray) -> float:
    """``np.median`` of a 1-D float array, the same value, without its general-purpose overhead
    (the reweighting loop takes two medians per iteration)."""
    n = a.size
    if n == 0:
        return np.median(a)
    k = n // 2
    part = np.partition(a, [k - 1, k, n - 1] if n % 2 == 0 and n > 1 else [k, n - 1])
    if np.isnan(part[-1]):
        return np.nan
    return (part[k - 1] + part[k]) / 2.0 if n % 2 == 0 else part[k]


def _weights(rho, tuning, huber):
    centred = rho - _median(rho)
    sigma = 1.4826 * float(_median(np.abs(centred)))
    if sigma < 1e-12:
        # Noise-free data: nothing to reweight.
        return None
    z = np.abs(rho) / (tuning * sigma)
    if huber:
        return np.where(z <= 1.0, 1.0, 1.0 / np.maximum(z, 1e-300))
    return np.where(z < 1.0, (1.0 - z * z) ** 2, 0.0)


def _short_sweep(coverage, max_gap):
    return DesignValueError(
        "sweep", f"{coverage:.1f} deg electrical of coverage",
        f"one full electrical period (360 deg el = 180 deg of shaft) with no gap over {max_gap:g} deg el",
        hint="turn the shaft through at least half a revolution while recording")


def _not_ellipse():
    return DesignValueError("sweep", "samples that fit no ellipse around the origin",
                            "samples on an ellipse (offset, gain and phase errors only)",
                            hint="check that both bridges were recorded and the sweep is not "
                                 "mostly outliers")


@dataclass(frozen=True, slots=True)
class SweepData:
    """A sweep read from a file: bridge samples in mV and optional reference angles in deg."""

    x_mV: np.ndarray
    y_mV: np.ndarray
    angle_deg: np.ndarray | None
    source: str


_SIMPLE_UNITS = {
    "v": ("V", 1000.0), "mv": ("V", 1.0), "uv": ("V", 1e-3), "µv": ("V", 1e-3), "μv": ("V", 1e-3),
    "deg": ("deg", 1.0), "degree": ("deg", 1.0), "degrees": ("deg", 1.0),
    "rad": ("deg", 180.0 / math.pi), "radian": ("deg", 180.0 / math.pi),
}


def _split_header(cell: str):
    """'x [mV]', 'x (mV)' or 'x_mV' -> ('x', 'mV'); no unit -> (name, '')."""
    text = cell.strip()
    for open_, close in (("[", "]"), ("(", ")")):
        if text.endswith(close) and open_ in text:
            i = text.rindex(open_)
            return text[:i].strip().lower(), text[i + 1:-1].strip()
    if "_" in text:
        name, unit = text.rsplit("_", 1)
        if unit.lower() in _SIMPLE_UNITS or _is_unit(unit):
            return name.strip().lower(), unit
    return text.lower(), ""


def _is_unit(text: str) -> bool:
    from .units import registry

    try:
        registry().parse_units(text)
    except Exception:  # pint raises several unrelated types for unknown names
        return False
    return True


def _unit_factor(unit: str, kind: str, column: str, source: str):
    """Factor taking ``unit`` to mV (kind 'V') or deg (kind 'deg')."""
    known = _SIMPLE_UNITS.get(unit.lower())
    if known is not None and known[0] == kind:
        return known[1]
    target = "mV" if kind == "V" else "deg"
    from .units import is_plain_unit

    if unit and is_plain_unit(unit):  # only a unit of the fixed grammar reaches pint: nothing is evaluated
        from .units import registry

        try:
            return float(registry().Quantity(1.0, unit).to(target).magnitude)
        except Exception:
            pass
    wanted = "a voltage unit such as mV or V" if kind == "V" else "an angle unit, deg or rad"
    raise DesignFileError(column, f"header must give {wanted}, e.g. '{column}_{target}' or "
                                  f"'{column} [{target}]'", source, 1)


def read_sweep_csv(source, *, x_column: str = "x", y_column: str = "y",
                   angle_column: str | None = "angle") -> SweepData:
    """Read a calibration sweep from CSV.

    The first non-comment line is a header naming the columns with their
    units: ``x_mV``, ``x [mV]`` or ``x (V)``. Lines starting with ``#`` and
    blank lines are skipped.

    Parameters
    ----------
    source : str, os.PathLike or text file object
        The CSV file.
    x_column, y_column : str
        Names (without unit, any case) of the cos and sin bridge columns;
        their units must be voltages.
    angle_column : str or None
        Name of an optional reference-angle column (deg or rad).

    Raises
    ------
    DesignFileError
        Missing columns or units, or a missing/non-numeric value; the
        message names the file, line and column.
    """
    if isinstance(source, (str, os.PathLike)):
        from .datafiles import read_text_file

        name, text = read_text_file(source, "calibration sweep")
    elif isinstance(source, io.TextIOBase) or hasattr(source, "read"):
        name = str(getattr(source, "name", ""))
        text = source.read()
    else:
        raise DesignValueError("source", source, "a file path or a text file object")
    rows = [(i, row) for i, row in enumerate(csv.reader(io.StringIO(text)), start=1)
            if row and any(c.strip() for c in row) and not row[0].lstrip().startswith("#")]
    if not rows:
        raise DesignFileError("", "the sweep file is empty; it needs a header line", name)
    header_line, header = rows[0]
    parsed = [_split_header(c) for c in header]
    names = [p[0] for p in parsed]

    def locate(col, kind, required):
        if col is None:
            return None
        if col.lower() not in names:
            if not required:
                return None
            raise DesignFileError(col, f"no column named {col!r} in the header ({len(header)} columns; the "
                                       "header's own text is not repeated here)", name, header_line)
        j = names.index(col.lower())
        return j, _unit_factor(parsed[j][1], kind, col, name)

    xcol = locate(x_column, "V", True)
    ycol = locate(y_column, "V", True)
    acol = locate(angle_column, "deg", False)
    cols = [c for c in (xcol, ycol, acol) if c is not None]
    data = [[] for _ in cols]
    for line, row in rows[1:]:
        if len(row) != len(header):
            raise DesignFileError("", f"has {len(row)} values but the header has {len(header)}",
                                  name, line)
        for k, (j, factor) in enumerate(cols):
            cell = row[j].strip()
            try:
                value = float(cell)
            except ValueError:
                value = math.nan
            if not math.isfinite(value):
                what = "is missing" if cell == "" else "is not a finite number (a decimal point, no units)"
                raise DesignFileError(header[j].strip(), f"value {what}", name, line)
            data[k].append(value * factor)
    arrays = [np.asarray(d, dtype=float) for d in data]
    return SweepData(arrays[0], arrays[1], arrays[2] if acol is not None else None, name)


def fit_sweep_csv(source, *, x_column: str = "x", y_column: str = "y",
                  angle_column: str | None = "angle", robust: bool = True,
                  max_gap_deg: float | None = None) -> CalibrationFit:
    """:func:`read_sweep_csv` then :func:`fit_sweep` (see both for the arguments)."""
    sweep = read_sweep_csv(source, x_column=x_column, y_column=y_column, angle_column=angle_column)
    return fit_sweep(sweep.x_mV, sweep.y_mV, angle_deg=sweep.angle_deg, robust=robust,
                     max_gap_deg=max_gap_deg)
