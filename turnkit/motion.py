"""Motion profiles of the motor shaft (angle in degrees against time in seconds).

Every profile answers three questions, all vectorised:

* ``angle_deg(t_s)`` — the motor angle at any times (continuous, multi-turn);
* ``motion_intervals()`` — where the angle may change (outside them it is
  constant), as sorted, non-overlapping ``(starts_s, ends_s)`` arrays;
* ``driven_intervals()`` — where the motor is driven (the counter tracks).

The simulation polls only inside motion intervals, so a profile must report
every span where its angle changes. Profiles add up with ``+``
(:class:`CombinedMotion`). Motion described at the output is mapped to the
motor through a gear train with :class:`AtOutput` (rotary outputs) or
:func:`output_speed_to_motor_rpm` / :func:`output_travel_to_motor_deg`, and
recorded traces come from CSV files with units in the header
(:func:`load_trace_csv`).

A gear train is used only through ``travel_per_motor_turn`` (output units per
motor turn), ``output_unit`` ("deg" or "mm") and ``direction`` (+1/−1).
"""

from __future__ import annotations

import io
import math
import re
from dataclasses import dataclass, field
from fractions import Fraction

import numpy as np

from .errors import DesignFileError, DesignValueError

__all__ = [
    "MotionProfile",
    "ConstantSpeed",
    "TrapezoidMove",
    "CoastDown",
    "BackDriveBursts",
    "Vibration",
    "RecordedTrace",
    "CombinedMotion",
    "AtOutput",
    "Still",
    "load_trace_csv",
    "output_speed_to_motor_rpm",
    "output_travel_to_motor_deg",
    "merge_intervals",
    "SegmentedMotion",
    "BurstReplay",
    "load_segments_csv",
    "load_bursts_csv",
]

DEG_PER_S_PER_RPM = 6.0  # 360 deg per revolution / 60 s per minute


def _num(cls: str, name: str, value, unit: str, *, lo=None, lo_open=False, allow_inf=False) -> float:
    ok = isinstance(value, (int, float, np.floating, np.integer)) and not isinstance(value, bool)
    if ok:
        v = float(value)
        ok = (math.isfinite(v) or (allow_inf and v == math.inf)) and not math.isnan(v)
        if ok and lo is not None:
            ok = v > lo if lo_open else v >= lo
    if not ok:
        allowed = "a finite number" if lo is None else f"a {'finite ' if not allow_inf else ''}number " \
            f"{'>' if lo_open else '>='} {lo}"
        raise DesignValueError(f"{cls}.{name}", value, allowed, unit=unit)
    return float(value)


def merge_intervals(starts, ends) -> tuple[np.ndarray, np.ndarray]:
    """Sort and merge overlapping or touching intervals, s."""
    s = np.asarray(starts, dtype=np.float64).ravel()
    e = np.asarray(ends, dtype=np.float64).ravel()
    keep = e > s
    s, e = s[keep], e[keep]
    if s.size == 0:
        return s, e
    order = np.argsort(s, kind="stable")
    s, e = s[order], e[order]
    run_end = np.maximum.accumulate(e)
    new = np.empty(s.size, dtype=bool)
    new[0] = True
    new[1:] = s[1:] > run_end[:-1]
    idx = np.flatnonzero(new)
    return s[idx], np.maximum.reduceat(e, idx)


class MotionProfile:
    """Base of all profiles (see the module docstring for the contract)."""

    __slots__ = ()

    def angle_deg(self, t_s) -> np.ndarray:  # pragma: no cover - every subclass defines it
        raise TypeError(f"{type(self).__name__} does not define angle_deg")

    def angle_deg_sorted(self, t_s) -> np.ndarray:
        """:meth:`angle_deg` for increasing times; profiles may do this faster."""
        return self.angle_deg(t_s)

    def _angle_deg_into(self, t_s: np.ndarray, out: np.ndarray) -> np.ndarray:
        """:meth:`angle_deg_sorted` of a float64 array, written into ``out`` where the
        profile can do so without temporaries of its own; returns the result
        (``out`` or a new array). Values are bit-identical to ``angle_deg_sorted``."""
        return self.angle_deg_sorted(t_s)

    def motion_intervals(self) -> tuple[np.ndarray, np.ndarray]:
        return np.empty(0), np.empty(0)

    def driven_intervals(self) -> tuple[np.ndarray, np.ndarray]:
        return np.empty(0), np.empty(0)

    def __add__(self, other: "MotionProfile") -> "CombinedMotion":
        if not isinstance(other, MotionProfile):
            return NotImplemented
        return CombinedMotion((self, other))


def _driven(profile, start_s, end_s):
    if profile.driven:
        return np.array([start_s]), np.array([end_s])
    return np.empty(0), np.empty(0)


@dataclass(frozen=True, slots=True)
class Still(MotionProfile):
    """No motion: the shaft rests at ``angle_deg_at_rest``."""

    angle_deg_at_rest: float = 0.0

    def __post_init__(self):
        _num("Still", "angle_deg_at_rest", self.angle_deg_at_rest, "deg")

    def angle_deg(self, t_s):
        return np.full(np.shape(t_s), float(self.angle_deg_at_rest))


@dataclass(frozen=True, slots=True)
class ConstantSpeed(MotionProfile):
    """Constant motor speed from ``start_s`` for ``duration_s``.

    Parameters
    ----------
    speed_rpm : float
        Motor speed, rpm (signed).
    start_s : float
        Start time, s.
    duration_s : float
        Duration, s (``inf`` for the whole timeline).
    start_angle_deg : float
        Motor angle before the start, deg.
    driven : bool
        True if the motor drives this motion (the counter then tracks).
    """

    speed_rpm: float
    start_s: float = 0.0
    duration_s: float = math.inf
    start_angle_deg: float = 0.0
    driven: bool = False

    def __post_init__(self):
        _num("ConstantSpeed", "speed_rpm", self.speed_rpm, "rpm")
        _num("ConstantSpeed", "start_s", self.start_s, "s", lo=0)
        _num("ConstantSpeed", "duration_s", self.duration_s, "s", lo=0, lo_open=True, allow_inf=True)
        _num("ConstantSpeed", "start_angle_deg", self.start_angle_deg, "deg")

    def angle_deg(self, t_s):
        t = np.asarray(t_s, dtype=np.float64)
        dt = np.clip(t - self.start_s, 0.0, self.duration_s)
        return self.start_angle_deg + DEG_PER_S_PER_RPM * self.speed_rpm * dt

    def motion_intervals(self):
        if self.speed_rpm == 0:
            return np.empty(0), np.empty(0)
        return np.array([self.start_s]), np.array([self.start_s + self.duration_s])

    def driven_intervals(self):
        return _driven(self, self.start_s, self.start_s + self.duration_s)


@dataclass(frozen=True, slots=True)
class TrapezoidMove(MotionProfile):
    """A point-to-point move: accelerate, cruise, decelerate (triangle if short).

    Parameters
    ----------
    distance_deg : float
        Signed motor travel, deg.
    max_speed_rpm : float
        Cruise speed, rpm (> 0).
    accel_rpm_per_s : float
        Acceleration and deceleration, rpm/s (> 0).
    start_s, start_angle_deg, driven
        As for :class:`ConstantSpeed`; a commanded move is driven by default.
    """

    distance_deg: float
    max_speed_rpm: float
    accel_rpm_per_s: float
    start_s: float = 0.0
    start_angle_deg: float = 0.0
    driven: bool = True
    _accel_s: float = field(init=False, repr=False, compare=False, default=0.0)
    _cruise_s: float = field(init=False, repr=False, compare=False, default=0.0)
    _peak_deg_per_s: float = field(init=False, repr=False, compare=False, default=0.0)

    def __post_init__(self):
        d = _num("TrapezoidMove", "distance_deg", self.distance_deg, "deg")
        v = DEG_PER_S_PER_RPM * _num("TrapezoidMove", "max_speed_rpm", self.max_speed_rpm, "rpm",
                                     lo=0, lo_open=True)
        a = DEG_PER_S_PER_RPM * _num("TrapezoidMove", "accel_rpm_per_s", self.accel_rpm_per_s, "rpm/s",
                                     lo=0, lo_open=True)
        _num("TrapezoidMove", "start_s", self.start_s, "s", lo=0)
        _num("TrapezoidMove", "start_angle_deg", self.start_angle_deg, "deg")
        dist = abs(d)
        if dist >= v * v / a:
            ta, tc, peak = v / a, (dist - v * v / a) / v, v
        else:
            ta = math.sqrt(dist / a)
            tc, peak = 0.0, a * ta
        object.__setattr__(self, "_accel_s", ta)
        object.__setattr__(self, "_cruise_s", tc)
        object.__setattr__(self, "_peak_deg_per_s", peak)

    @property
    def duration_s(self) -> float:
        """Total move time, s."""
        return 2 * self._accel_s + self._cruise_s

    def angle_deg(self, t_s):
        t = np.clip(np.asarray(t_s, dtype=np.float64) - self.start_s, 0.0, self.duration_s)
        ta, tc, vp = self._accel_s, self._cruise_s, self._peak_deg_per_s
        a = vp / ta if ta > 0 else 0.0
        s_acc = 0.5 * a * np.minimum(t, ta) ** 2
        s_cru = vp * np.clip(t - ta, 0.0, tc)
        td = np.clip(t - ta - tc, 0.0, ta)
        s_dec = vp * td - 0.5 * a * td ** 2
        return self.start_angle_deg + math.copysign(1.0, self.distance_deg) * (s_acc + s_cru + s_dec)

    def motion_intervals(self):
        if self.distance_deg == 0:
            return np.empty(0), np.empty(0)
        return np.array([self.start_s]), np.array([self.start_s + self.duration_s])

    def driven_intervals(self):
        if self.distance_deg == 0:
            return np.empty(0), np.empty(0)
        return _driven(self, self.start_s, self.start_s + self.duration_s)


@dataclass(frozen=True, slots=True)
class CoastDown(MotionProfile):
    """The motor coasting after the drive stops: speed decays as exp(−t/τ).

    The angle is ω0·τ·(1 − exp(−t/τ)); the interval ends when less than
    ``rest_deg`` of travel remains, and the angle is held there afterwards.

    Parameters
    ----------
    initial_speed_rpm : float
        Speed when the drive stops, rpm (signed).
    time_constant_s : float
        Mechanical time constant τ, s.
    start_s, start_angle_deg, driven
        As for :class:`ConstantSpeed` (not driven by default).
    rest_deg : float
        Remaining travel below which the shaft counts as stopped, deg.
    """

    initial_speed_rpm: float
    time_constant_s: float
    start_s: float = 0.0
    start_angle_deg: float = 0.0
    driven: bool = False
    rest_deg: float = 1e-6

    def __post_init__(self):
        _num("CoastDown", "initial_speed_rpm", self.initial_speed_rpm, "rpm")
        _num("CoastDown", "time_constant_s", self.time_constant_s, "s", lo=0, lo_open=True)
        _num("CoastDown", "start_s", self.start_s, "s", lo=0)
        _num("CoastDown", "start_angle_deg", self.start_angle_deg, "deg")
        _num("CoastDown", "rest_deg", self.rest_deg, "deg", lo=0, lo_open=True)

    @property
    def duration_s(self) -> float:
        """Time until less than ``rest_deg`` remains, s."""
        total = abs(DEG_PER_S_PER_RPM * self.initial_speed_rpm) * self.time_constant_s
        return self.time_constant_s * math.log(total / self.rest_deg) if total > self.rest_deg else 0.0

    def angle_deg(self, t_s):
        t = np.clip(np.asarray(t_s, dtype=np.float64) - self.start_s, 0.0, self.duration_s)
        w0 = DEG_PER_S_PER_RPM * self.initial_speed_rpm
        return self.start_angle_deg + w0 * self.time_constant_s * -np.expm1(-t / self.time_constant_s)

    def motion_intervals(self):
        if self.duration_s == 0:
            return np.empty(0), np.empty(0)
        return np.array([self.start_s]), np.array([self.start_s + self.duration_s])

    def driven_intervals(self):
        return _driven(self, self.start_s, self.start_s + self.duration_s) if self.duration_s else \
            (np.empty(0), np.empty(0))


@dataclass(frozen=True, slots=True)
class BackDriveBursts(MotionProfile):
    """Random bursts of undriven motion (hand wheel, load back-driving), seeded.

    Bursts arrive as a Poisson process (``rate_per_day``, exponential gaps
    between the end of one burst and the start of the next); each has a
    constant speed drawn uniformly in [speed_min_rpm, speed_max_rpm], a
    duration drawn uniformly in [duration_min_s, duration_max_s] and a
    direction that is forward with probability ``forward_fraction``.

    Parameters
    ----------
    rate_per_day : float
        Mean number of bursts per day (> 0).
    speed_min_rpm, speed_max_rpm : float
        Range of motor speed magnitudes, rpm.
    duration_min_s, duration_max_s : float
        Range of burst durations, s.
    horizon_s : float
        Bursts are generated over [start_s, start_s + horizon_s], s.
    seed : int
        Random seed (same seed, same bursts).
    forward_fraction : float
        Probability that a burst runs forward.
    start_s, start_angle_deg
        Start of the horizon, s; motor angle before the first burst, deg.
    """

    rate_per_day: float
    speed_min_rpm: float
    speed_max_rpm: float
    duration_min_s: float
    duration_max_s: float
    horizon_s: float
    seed: int = 0
    forward_fraction: float = 0.5
    start_s: float = 0.0
    start_angle_deg: float = 0.0
    driven: bool = False
    starts_s: np.ndarray = field(init=False, repr=False, compare=False, default=None)
    ends_s: np.ndarray = field(init=False, repr=False, compare=False, default=None)
    speeds_deg_per_s: np.ndarray = field(init=False, repr=False, compare=False, default=None)
    _base_deg: np.ndarray = field(init=False, repr=False, compare=False, default=None)
    _tables: tuple = field(init=False, repr=False, compare=False, default=None)

    def __post_init__(self):
        c = "BackDriveBursts"
        rate = _num(c, "rate_per_day", self.rate_per_day, "1/day", lo=0, lo_open=True)
        vmin = _num(c, "speed_min_rpm", self.speed_min_rpm, "rpm", lo=0)
        vmax = _num(c, "speed_max_rpm", self.speed_max_rpm, "rpm", lo=0)
        dmin = _num(c, "duration_min_s", self.duration_min_s, "s", lo=0, lo_open=True)
        dmax = _num(c, "duration_max_s", self.duration_max_s, "s", lo=0, lo_open=True)
        horizon = _num(c, "horizon_s", self.horizon_s, "s", lo=0, lo_open=True)
        if vmax < vmin:
            raise DesignValueError(f"{c}.speed_max_rpm", vmax, f">= speed_min_rpm ({vmin})", unit="rpm")
        if dmax < dmin:
            raise DesignValueError(f"{c}.duration_max_s", dmax, f">= duration_min_s ({dmin})", unit="s")
        ff = _num(c, "forward_fraction", self.forward_fraction, "", lo=0)
        if ff > 1:
            raise DesignValueError(f"{c}.forward_fraction", ff, "in [0, 1]")
        _num(c, "start_s", self.start_s, "s", lo=0)
        _num(c, "start_angle_deg", self.start_angle_deg, "deg")
        if isinstance(self.seed, bool) or not isinstance(self.seed, (int, np.integer)) or self.seed < 0:
            raise DesignValueError(f"{c}.seed", self.seed, "an integer >= 0")
        rng = np.random.default_rng(self.seed)
        mean_gap = 86400.0 / rate
        # Draw in blocks sized to the expected count so long horizons stay vectorised.
        expected = horizon / (mean_gap + 0.5 * (dmin + dmax)) + 1
        n = int(expected + 5 * math.sqrt(expected) + 16)
        while True:
            gaps = rng.exponential(mean_gap, n)
            durs = rng.uniform(dmin, dmax, n)
            ends = np.cumsum(gaps + durs)
            if ends[-1] > horizon:
                break
            n *= 2
        starts = self.start_s + ends - durs
        ends = self.start_s + ends
        speeds = DEG_PER_S_PER_RPM * rng.uniform(vmin, vmax, n)
        speeds = np.where(rng.random(n) < ff, speeds, -speeds)
        keep = starts < self.start_s + horizon
        starts, durs, ends, speeds = starts[keep], durs[keep], ends[keep], speeds[keep]
        ends = np.minimum(ends, self.start_s + horizon)
        base = self.start_angle_deg + np.concatenate(([0.0], np.cumsum(speeds * (ends - starts))))
        object.__setattr__(self, "starts_s", starts)
        object.__setattr__(self, "ends_s", ends)
        object.__setattr__(self, "speeds_deg_per_s", speeds)
        object.__setattr__(self, "_base_deg", base)
        b0 = np.concatenate(([self.start_angle_deg], base[:-1]))
        v0 = np.concatenate(([0.0], speeds))
        s0 = np.concatenate(([0.0], starts))
        e0 = np.concatenate(([0.0], ends))
        # Angle held after each burst, as b + v·(min(t, e) − s) gives it for t ≥ e.
        object.__setattr__(self, "_tables", (b0, v0, s0, e0, (e0 - s0) * v0 + b0))

    @property
    def burst_count(self) -> int:
        """Number of bursts generated."""
        return int(self.starts_s.size)

    def angle_deg(self, t_s):
        t = np.asarray(t_s, dtype=np.float64)
        if self.starts_s.size == 0:
            return np.full(t.shape, self.start_angle_deg)
        if t.ndim == 1 and t.size > 256 and bool(np.all(t[1:] >= t[:-1])):
            return self.angle_deg_sorted(t)
        i = np.searchsorted(self.starts_s, t, side="right")
        # Index 0 of the extended tables stands for "before the first burst"
        # (zero speed), so no masking is needed.
        b0, v0, s0, e0, _ = self._tables
        out = np.minimum(t, e0.take(i))
        out -= s0.take(i)
        out *= v0.take(i)
        out += b0.take(i)
        return out

    def angle_deg_sorted(self, t_s):
        """:meth:`angle_deg` for increasing times (not checked), O(n) in the times."""
        t = np.asarray(t_s, dtype=np.float64)
        if t.size == 0:
            return np.empty(0)
        return self._angle_deg_into(t, np.empty(t.shape))

    def _angle_deg_into(self, t, out):
        starts = self.starts_s
        if starts.size == 0:
            return self.angle_deg(t)
        # Merge the few burst starts inside [t[0], t[-1]] into the times
        # instead of a binary search per time: run r of the times lies in
        # table row lo + r (row 0 stands for "before the first burst", zero
        # speed). Times past the end of their burst form the run's tail and
        # hold the end angle, computed exactly as min(t, end) would give it.
        b0, v0, s0, e0, held = self._tables
        n = t.size
        lo, hi = starts.searchsorted((t[0], t[-1]), side="right").tolist()
        if hi == lo:
            np.subtract(t, s0[lo], out=out)
            out *= v0[lo]
            out += b0[lo]
            j = int(t.searchsorted(e0[lo], side="right"))
            if j < n:
                out[j:] = held[lo]
            return out
        rows = slice(lo, hi + 1)
        bounds = np.empty(hi - lo + 2, dtype=np.int64)
        bounds[0] = 0
        bounds[1:-1] = t.searchsorted(starts[lo:hi], side="right")
        bounds[-1] = n
        run_end = bounds[1:]
        runs = run_end - bounds[:-1]
        # One run-length temporary alive at a time keeps the C heap steady.
        np.subtract(t, s0[rows].repeat(runs), out=out)
        out *= v0[rows].repeat(runs)
        out += b0[rows].repeat(runs)
        tail = t.searchsorted(e0[rows], side="right")
        np.minimum(tail, run_end, out=tail)
        n_tail = run_end - tail
        longest = int(np.maximum.reduce(n_tail))
        if longest == 1:
            one = n_tail.astype(bool)
            out[tail[one]] = held[rows][one]
        elif longest > 1:
            ahead = np.cumsum(n_tail) - n_tail
            idx = np.repeat(tail - ahead, n_tail) + np.arange(int(ahead[-1] + n_tail[-1]))
            out[idx] = np.repeat(held[rows], n_tail)
        return out

    def motion_intervals(self):
        return self.starts_s.copy(), self.ends_s.copy()

    def driven_intervals(self):
        return (self.starts_s.copy(), self.ends_s.copy()) if self.driven else (np.empty(0), np.empty(0))


@dataclass(frozen=True, slots=True)
class Vibration(MotionProfile):
    """Sinusoidal vibration of the shaft about a quadrant boundary.

    angle = boundary_deg + offset_deg + amplitude_deg · sin(2π f (t − start_s))
    during [start_s, start_s + duration_s], and continuous outside.

    Parameters
    ----------
    amplitude_deg : float
        Peak amplitude, deg (≥ 0).
    frequency_hz : float
        Vibration frequency, Hz (> 0).
    start_s, duration_s : float
        Interval of the vibration, s.
    boundary_deg : float
        The quadrant boundary vibrated about, deg (default 90).
    offset_deg : float
        Mean offset from the boundary, deg.
    """

    amplitude_deg: float
    frequency_hz: float
    start_s: float = 0.0
    duration_s: float = 1.0
    boundary_deg: float = 90.0
    offset_deg: float = 0.0
    driven: bool = False

    def __post_init__(self):
        c = "Vibration"
        _num(c, "amplitude_deg", self.amplitude_deg, "deg", lo=0)
        _num(c, "frequency_hz", self.frequency_hz, "Hz", lo=0, lo_open=True)
        _num(c, "start_s", self.start_s, "s", lo=0)
        _num(c, "duration_s", self.duration_s, "s", lo=0, lo_open=True)
        _num(c, "boundary_deg", self.boundary_deg, "deg")
        _num(c, "offset_deg", self.offset_deg, "deg")

    def angle_deg(self, t_s):
        t = np.clip(np.asarray(t_s, dtype=np.float64) - self.start_s, 0.0, self.duration_s)
        return self.boundary_deg + self.offset_deg + self.amplitude_deg * np.sin(2 * np.pi * self.frequency_hz * t)

    def motion_intervals(self):
        if self.amplitude_deg == 0:
            return np.empty(0), np.empty(0)
        return np.array([self.start_s]), np.array([self.start_s + self.duration_s])

    def driven_intervals(self):
        return _driven(self, self.start_s, self.start_s + self.duration_s)


@dataclass(frozen=True, slots=True)
class RecordedTrace(MotionProfile):
    """A recorded motion: motor angle (linear between samples) or motor speed.

    With speed samples the speed is linear between samples and the angle is
    its exact integral (piecewise quadratic), starting at ``start_angle_deg``.
    Before the first sample and after the last the shaft is at rest.

    Parameters
    ----------
    times_s : array
        Strictly increasing sample times, s (≥ 0).
    values : array
        Motor angle, deg (``kind="angle"``) or motor speed, deg/s (``kind="speed"``).
    kind : str
        "angle" or "speed".
    start_angle_deg : float
        Angle at the first sample for speed traces, deg.
    driven : bool
        True if the motor drives this motion.
    """

    times_s: np.ndarray
    values: np.ndarray
    kind: str = "angle"
    start_angle_deg: float = 0.0
    driven: bool = False
    _angles: np.ndarray = field(init=False, repr=False, compare=False, default=None)

    def __post_init__(self):
        t = np.asarray(self.times_s, dtype=np.float64).ravel()
        v = np.asarray(self.values, dtype=np.float64).ravel()
        if self.kind not in ("angle", "speed"):
            raise DesignValueError("RecordedTrace.kind", self.kind, "'angle' or 'speed'")
        _num("RecordedTrace", "start_angle_deg", self.start_angle_deg, "deg")
        if t.size < 2 or t.size != v.size:
            raise DesignValueError("RecordedTrace.times_s", t.size,
                                   "at least 2 samples, as many as values", hint=f"{v.size} values given")
        if not (np.all(np.isfinite(t)) and np.all(np.isfinite(v))):
            raise DesignValueError("RecordedTrace.values", "non-finite", "finite numbers")
        if t[0] < 0 or np.any(np.diff(t) <= 0):
            raise DesignValueError("RecordedTrace.times_s", "not increasing", "strictly increasing, >= 0",
                                   unit="s")
        object.__setattr__(self, "times_s", t)
        object.__setattr__(self, "values", v)
        if self.kind == "angle":
            angles = v
        else:
            h = np.diff(t)
            angles = self.start_angle_deg + np.concatenate(([0.0], np.cumsum(0.5 * (v[1:] + v[:-1]) * h)))
        object.__setattr__(self, "_angles", angles)

    def angle_deg(self, t_s):
        t = np.asarray(t_s, dtype=np.float64)
        if self.kind == "angle":
            return np.interp(t, self.times_s, self._angles)
        tt = np.clip(t, self.times_s[0], self.times_s[-1])
        i = np.clip(np.searchsorted(self.times_s, tt, side="right") - 1, 0, self.times_s.size - 2)
        dt = tt - self.times_s[i]
        h = self.times_s[i + 1] - self.times_s[i]
        v0, v1 = self.values[i], self.values[i + 1]
        return self._angles[i] + v0 * dt + 0.5 * (v1 - v0) / h * dt * dt

    def angle_deg_sorted(self, t_s):
        # At rest before the first sample and after the last: fill those stretches with the
        # value the general formula gives there (the same for every such time) and work out
        # only the times inside the recording.
        t = np.asarray(t_s, dtype=np.float64)
        if t.ndim != 1 or t.size < 2:
            return self.angle_deg(t)
        i0 = int(np.searchsorted(t, self.times_s[0], side="left"))
        i1 = int(np.searchsorted(t, self.times_s[-1], side="right"))
        if i0 == 0 and i1 == t.size:
            return self.angle_deg(t)
        out = np.empty_like(t)
        if i0:
            out[:i0] = self.angle_deg(t[:1])[0]
        if i1 < t.size:
            out[i1:] = self.angle_deg(t[-1:])[0]
        if i1 > i0:
            out[i0:i1] = self.angle_deg(t[i0:i1])
        return out

    def motion_intervals(self):
        return np.array([self.times_s[0]]), np.array([self.times_s[-1]])

    def driven_intervals(self):
        return _driven(self, self.times_s[0], self.times_s[-1])


@dataclass(frozen=True, slots=True)
class CombinedMotion(MotionProfile):
    """The sum of several profiles (angles add; intervals are merged)."""

    parts: tuple
    # Per part, worked out on first use (the parts are immutable): the first and last time its
    # angle changes (+inf for a part that never moves) and its resting angle before and after.
    _spans: tuple | None = field(init=False, repr=False, compare=False, default=None)

    def __post_init__(self):
        parts = tuple(self.parts)
        if not parts or not all(isinstance(p, MotionProfile) for p in parts):
            raise DesignValueError("CombinedMotion.parts", self.parts, "one or more motion profiles")
        flat = []
        for p in parts:
            flat.extend(p.parts if isinstance(p, CombinedMotion) else (p,))
        object.__setattr__(self, "parts", tuple(flat))
        object.__setattr__(self, "_spans", None)

    def _part_spans(self) -> tuple:
        spans = self._spans
        if spans is None:
            lo, hi, before, after = [], [], [], []
            for p in self.parts:
                a, b = p.motion_intervals()
                if np.size(a):
                    first, last = float(np.min(a)), float(np.max(b))
                    # Any time outside the span gives the resting value; take the nearest ones.
                    rest = np.array([np.nextafter(first, -np.inf), np.nextafter(last, np.inf)])
                    v = p.angle_deg_sorted(rest)
                    lo.append(first), hi.append(last), before.append(v[0]), after.append(v[1])
                else:
                    v = p.angle_deg_sorted(np.zeros(1))[0]
                    lo.append(np.inf), hi.append(np.inf), before.append(v), after.append(v)
            spans = (np.array(lo), np.array(hi), tuple(before), tuple(after))
            object.__setattr__(self, "_spans", spans)
        return spans

    def angle_deg(self, t_s):
        t = np.asarray(t_s, dtype=np.float64)
        total = self.parts[0].angle_deg(t)
        for p in self.parts[1:]:
            total = total + p.angle_deg(t)
        return total

    def angle_deg_sorted(self, t_s):
        # Each part is worked out only at the times inside its span of motion; before and after
        # that span it is at rest, so its resting value is added as a constant. The parts are
        # added in order, element by element, exactly as the plain sum does, so the result is
        # the same to the last bit.
        t = np.asarray(t_s, dtype=np.float64)
        n = t.size
        if t.ndim != 1 or n < 2:
            return self.angle_deg(t)
        lo, hi, before, after = self._part_spans()
        first = np.searchsorted(t, lo, side="left").tolist()
        last = np.searchsorted(t, hi, side="right").tolist()
        # While every part so far is at rest over all of t, the running sum is one number (the
        # same additions in the same order as for each element of an array).
        uniform = None
        total = None
        exact_zero_skip = False
        for k, p in enumerate(self.parts):
            i0, i1 = first[k], last[k]
            if total is None and (i0 == n or i1 == 0):
                rest = float(before[k] if i0 == n else after[k])
                uniform = rest if uniform is None else uniform + rest
                continue
            pieces = []
            if i0 > 0:
                pieces.append((0, i0, before[k]))
            if i1 > i0:
                pieces.append((i0, i1, p.angle_deg_sorted(t[i0:i1])))
            if i1 < n:
                pieces.append((i1, n, after[k]))
            if total is None:
                if uniform is None:
                    total = np.empty(n)
                    for a, b, v in pieces:
                        total[a:b] = v
                else:
                    total = np.full(n, uniform)
                    for a, b, v in pieces:
                        total[a:b] += v
                # x + 0.0 changes x only when x is -0.0, and a sum is -0.0 only when every term
                # is: with no -0.0 in the running sum, adding a zero constant can be skipped.
                exact_zero_skip = not np.any((total == 0.0) & np.signbit(total))
                continue
            for a, b, v in pieces:
                if np.ndim(v) == 0 and v == 0.0 and (exact_zero_skip or np.signbit(v)):
                    continue
                total[a:b] += v
        if total is None:
            total = np.full(n, uniform)
        return total

    def motion_intervals(self):
        pairs = [p.motion_intervals() for p in self.parts]
        return merge_intervals(np.concatenate([a for a, _ in pairs]), np.concatenate([b for _, b in pairs]))

    def driven_intervals(self):
        pairs = [p.driven_intervals() for p in self.parts]
        return merge_intervals(np.concatenate([a for a, _ in pairs]), np.concatenate([b for _, b in pairs]))


def _motor_deg_per_output_unit(train) -> float:
    travel = Fraction(train.travel_per_motor_turn)
    if travel == 0:
        raise DesignValueError("train.travel_per_motor_turn", travel, "non-zero")
    return float(360 * int(train.direction) / travel)


def output_travel_to_motor_deg(travel, train):
    """Motor angle (deg) for an output travel in ``train.output_unit`` (deg or mm)."""
    return np.asarray(travel, dtype=np.float64) * _motor_deg_per_output_unit(train)


def output_speed_to_motor_rpm(speed, train):
    """Motor speed (rpm) for an output speed: rpm for a rotary output, mm/s for a linear one."""
    k = _motor_deg_per_output_unit(train)
    if train.output_unit == "mm":
        return np.asarray(speed, dtype=np.float64) * k / DEG_PER_S_PER_RPM
    return np.asarray(speed, dtype=np.float64) * k


@dataclass(frozen=True, slots=True)
class AtOutput(MotionProfile):
    """A profile written for the output shaft, seen at the motor.

    The wrapped profile's angles are output degrees (rotary outputs) or, for a
    :class:`RecordedTrace` loaded from a file in mm, output millimetres; they
    are mapped to motor degrees with the gear train.
    """

    profile: MotionProfile
    train: object
    _scale: float = field(init=False, repr=False, compare=False, default=1.0)

    def __post_init__(self):
        if not isinstance(self.profile, MotionProfile):
            raise DesignValueError("AtOutput.profile", self.profile, "a motion profile")
        object.__setattr__(self, "_scale", _motor_deg_per_output_unit(self.train))

    def angle_deg(self, t_s):
        return self._scale * self.profile.angle_deg(t_s)

    def angle_deg_sorted(self, t_s):
        return self._scale * self.profile.angle_deg_sorted(t_s)

    def _angle_deg_into(self, t_s, out):
        return np.multiply(self.profile._angle_deg_into(t_s, out), self._scale, out=out)

    def motion_intervals(self):
        return self.profile.motion_intervals()

    def driven_intervals(self):
        return self.profile.driven_intervals()


# Units accepted in CSV headers: factor to deg, deg/s, mm, mm/s or s.
_TIME_UNITS = {"s": 1.0, "ms": 1e-3, "us": 1e-6, "min": 60.0, "h": 3600.0}
_ANGLE_UNITS = {"deg": 1.0, "rad": 180.0 / math.pi, "rev": 360.0, "turn": 360.0}
_LENGTH_UNITS = {"mm": 1.0, "um": 1e-3, "m": 1000.0}
_ANGULAR_SPEED_UNITS = {"rpm": DEG_PER_S_PER_RPM, "deg/s": 1.0, "rad/s": 180.0 / math.pi, "rev/s": 360.0}
_LINEAR_SPEED_UNITS = {"mm/s": 1.0, "m/s": 1000.0, "um/s": 1e-3}
_HEADER = re.compile(r"^\s*([A-Za-z_]+)\s*\[\s*([^\]]+?)\s*\]\s*$")


def load_trace_csv(source, *, train=None, at_output: bool = False, driven: bool = False,
                   start_angle_deg: float = 0.0) -> MotionProfile:
    """Load a recorded motion from CSV with units in the header.

    The first non-comment line is the header: ``time [unit]`` then one of
    ``angle [unit]``, ``position [unit]`` or ``speed [unit]``. Time units: s,
    ms, us, min, h. Angle: deg, rad, rev, turn. Position (linear outputs):
    mm, um, m. Speed: rpm, deg/s, rad/s, rev/s, or mm/s, m/s, um/s. Lines
    starting with ``#`` and blank lines are skipped.

    Parameters
    ----------
    source : str or os.PathLike or file-like
        A path, or an open text file; a string containing a newline is read
        as the CSV text itself.
    train : object, optional
        Gear train; required for output-side traces.
    at_output : bool
        The trace describes the output shaft (implied by mm units).
    driven : bool
        The motor drove this motion.
    start_angle_deg : float
        Motor angle at the first sample of a speed trace, deg.

    Raises
    ------
    DesignFileError
        Naming the file and line of the first bad entry.
    """
    name, text = _read_source(source)
    lines = text.splitlines()
    header_line = None
    rows: list[tuple[int, list[str]]] = []
    for n, raw in enumerate(lines, start=1):
        s = raw.strip()
        if not s or s.startswith("#"):
            continue
        cells = [c.strip() for c in s.split(",")]
        if header_line is None:
            header_line = (n, cells)
        else:
            rows.append((n, cells))
    if header_line is None:
        raise DesignFileError("", "no header line; expected e.g. 'time [s],angle [deg]'", source=name)
    hn, hcells = header_line
    if len(hcells) != 2:
        raise DesignFileError("header", f"expected 2 columns 'time [unit]' and 'angle|position|speed [unit]', "
                              f"got {len(hcells)}", source=name, line=hn)
    parsed = []
    for k, cell in enumerate(hcells, start=1):
        m = _HEADER.match(cell)
        if not m:
            raise DesignFileError("header", f"column {k} must be written 'name [unit]', e.g. 'time [s]'",
                                  source=name, line=hn)
        parsed.append((m.group(1).lower(), m.group(2).replace(" ", "")))
    (tname, tunit), (vname, vunit) = parsed
    if tname != "time" or tunit not in _TIME_UNITS:
        raise DesignFileError("header", f"first column must be 'time [unit]' with unit one of "
                              f"{sorted(_TIME_UNITS)}", source=name, line=hn)
    linear = False
    if vname == "angle" and vunit in _ANGLE_UNITS:
        kind, scale = "angle", _ANGLE_UNITS[vunit]
    elif vname == "position" and vunit in _LENGTH_UNITS:
        kind, scale, linear = "angle", _LENGTH_UNITS[vunit], True
    elif vname == "speed" and vunit in _ANGULAR_SPEED_UNITS:
        kind, scale = "speed", _ANGULAR_SPEED_UNITS[vunit]
    elif vname == "speed" and vunit in _LINEAR_SPEED_UNITS:
        kind, scale, linear = "speed", _LINEAR_SPEED_UNITS[vunit], True
    else:
        raise DesignFileError(
            "header", "the second column's name or unit is not understood; use 'angle [deg|rad|rev|turn]', "
            "'position [mm|um|m]' or 'speed [rpm|deg/s|rad/s|rev/s|mm/s|m/s|um/s]'", source=name, line=hn)
    times, values = [], []
    previous = -math.inf
    for n, cells in rows:
        if len(cells) != 2:
            raise DesignFileError("row", f"expected 2 values, got {len(cells)}", source=name, line=n)
        try:
            t, v = float(cells[0]), float(cells[1])
        except ValueError:
            raise DesignFileError("row", "a value is not a number (a decimal point, no units or thousands "
                                  "separators)", source=name, line=n) from None
        if not (math.isfinite(t) and math.isfinite(v)):
            raise DesignFileError("row", "values must be finite numbers", source=name, line=n)
        t *= _TIME_UNITS[tunit]
        if t < 0:
            raise DesignFileError("time", f"time must be >= 0, got {cells[0]} {tunit}", source=name, line=n)
        if t <= previous:
            raise DesignFileError("time", f"time must increase, got {cells[0]} {tunit} after a later or "
                                  f"equal time", source=name, line=n)
        previous = t
        times.append(t)
        values.append(v * scale)
    if len(times) < 2:
        raise DesignFileError("", f"need at least 2 data rows, found {len(times)}", source=name,
                              line=len(lines))
    if (linear or at_output) and train is None:
        raise DesignFileError("train", "an output-side trace needs a gear train to map it to the motor",
                              source=name, line=hn)
    if linear and train.output_unit != "mm":
        raise DesignFileError("header", f"a linear trace needs a linear output, the train's output is "
                              f"in {train.output_unit}", source=name, line=hn)
    if not linear and (at_output and train.output_unit != "deg"):
        raise DesignFileError("header", "an angle trace at the output needs a rotary output "
                              f"(the train's output is in {train.output_unit})", source=name, line=hn)
    trace = RecordedTrace(np.array(times), np.array(values), kind=kind, driven=driven,
                          start_angle_deg=0.0 if (linear or at_output) else start_angle_deg)
    if linear or at_output:
        wrapped = AtOutput(trace, train)
        if start_angle_deg:
            return CombinedMotion((wrapped, Still(start_angle_deg)))
        return wrapped
    return trace


def _read_source(source) -> tuple[str, str]:
    if isinstance(source, io.TextIOBase) or hasattr(source, "read"):
        return getattr(source, "name", "<stream>"), source.read()
    if isinstance(source, str) and "\n" in source:
        return "<text>", source
    from .datafiles import read_text_file

    return read_text_file(source, "trace")


# ---------------------------------------------------------------------------
# general motion input: segments and replayed bursts
# ---------------------------------------------------------------------------

def _float_tuple(cls: str, name: str, values, unit: str) -> np.ndarray:
    try:
        a = np.asarray(values, dtype=np.float64).ravel()
    except (TypeError, ValueError):
        raise DesignValueError(f"{cls}.{name}", values, "a sequence of numbers", unit=unit) from None
    bad = np.flatnonzero(~np.isfinite(a))
    if bad.size:
        raise DesignValueError(f"{cls}.{name}[{int(bad[0])}]", float(a[bad[0]]), "a finite number", unit=unit)
    return a


def _in_order(cls: str, starts: np.ndarray, ends: np.ndarray, what: str) -> None:
    """Refuse parts that overlap or come out of time order, naming the first one."""
    overlap = np.flatnonzero(starts[1:] < ends[:-1])
    if overlap.size:
        k = int(overlap[0]) + 1
        raise DesignValueError(f"{cls}.starts_s[{k}]", float(starts[k]),
                               f">= the end of {what} {k - 1} ({float(ends[k - 1]):g} s)", unit="s",
                               hint=f"{what}s are in time order and do not overlap")


@dataclass(frozen=True, slots=True)
class SegmentedMotion(MotionProfile):
    """Motion made of segments, each with a start, a duration, a start speed and an acceleration.

    Inside segment k (``starts_s[k]`` ≤ t ≤ ``starts_s[k] + durations_s[k]``)
    the motor turns at v_k + a_k·τ (τ = t − start); between segments the
    shaft rests where the previous one left it. The angle is the exact
    integral, continuous from one segment to the next. A time is located
    with one binary search over the segment starts, so evaluation costs
    O(log m) per time for m segments, never O(m).

    Parameters
    ----------
    starts_s : sequence of float
        Segment start times, s (≥ 0, increasing; a segment may not start
        before the previous one ends).
    durations_s : sequence of float
        Segment durations, s (> 0).
    start_speeds_rpm : sequence of float
        Motor speed at the start of each segment, rpm (signed).
    accelerations_rpm_per_s : sequence of float
        Constant motor acceleration in each segment, rpm/s (signed).
    start_angle_deg : float
        Motor angle before the first segment, deg.
    driven : bool
        True if the motor drives this motion (the counter tracks it).

    Examples
    --------
    >>> m = SegmentedMotion((0.0, 2.0), (1.0, 1.0), (0.0, 60.0), (60.0, -60.0))
    >>> [round(float(a), 9) for a in m.angle_deg([0.5, 1.0, 1.5, 3.0])]
    [45.0, 180.0, 180.0, 360.0]
    """

    starts_s: tuple
    durations_s: tuple
    start_speeds_rpm: tuple
    accelerations_rpm_per_s: tuple
    start_angle_deg: float = 0.0
    driven: bool = False
    _tables: tuple = field(init=False, repr=False, compare=False, default=None)

    def __post_init__(self):
        c = "SegmentedMotion"
        st = _float_tuple(c, "starts_s", self.starts_s, "s")
        du = _float_tuple(c, "durations_s", self.durations_s, "s")
        v = _float_tuple(c, "start_speeds_rpm", self.start_speeds_rpm, "rpm")
        a = _float_tuple(c, "accelerations_rpm_per_s", self.accelerations_rpm_per_s, "rpm/s")
        if not (st.size == du.size == v.size == a.size) or st.size == 0:
            raise DesignValueError(f"{c}.starts_s", f"{st.size} starts, {du.size} durations, {v.size} speeds, "
                                   f"{a.size} accelerations", "at least one segment, as many of each")
        if np.any(st < 0):
            k = int(np.flatnonzero(st < 0)[0])
            raise DesignValueError(f"{c}.starts_s[{k}]", float(st[k]), ">= 0", unit="s")
        if np.any(du <= 0):
            k = int(np.flatnonzero(du <= 0)[0])
            raise DesignValueError(f"{c}.durations_s[{k}]", float(du[k]), "> 0", unit="s")
        ends = st + du
        _in_order(c, st, ends, "segment")
        _num(c, "start_angle_deg", self.start_angle_deg, "deg")
        for name, arr in (("starts_s", st), ("durations_s", du), ("start_speeds_rpm", v),
                          ("accelerations_rpm_per_s", a)):
            object.__setattr__(self, name, tuple(arr.tolist()))
        vd, ad = v * DEG_PER_S_PER_RPM, a * DEG_PER_S_PER_RPM
        moved = vd * du + 0.5 * ad * du * du
        # Angle at the start of each segment; row 0 stands for "before the first segment"
        # (zero speed and duration, the start angle).
        at_start = self.start_angle_deg + np.concatenate(([0.0], np.cumsum(moved)[:-1]))
        base = np.concatenate(([self.start_angle_deg], at_start))
        object.__setattr__(self, "_tables", (
            np.concatenate(([0.0], st)), np.concatenate(([0.0], du)), np.concatenate(([0.0], vd)),
            np.concatenate(([0.0], ad)), base, st, ends))

    @property
    def peak_speed_rpm(self) -> float:
        """Largest motor speed magnitude anywhere in the segments, rpm."""
        v = np.asarray(self.start_speeds_rpm)
        end = v + np.asarray(self.accelerations_rpm_per_s) * np.asarray(self.durations_s)
        return float(max(np.max(np.abs(v)), np.max(np.abs(end))))

    def angle_deg(self, t_s):
        t = np.asarray(t_s, dtype=np.float64)
        s0, d0, v0, a0, base, starts, _ = self._tables
        i = np.searchsorted(starts, t, side="right")
        tau = np.clip(t - s0[i], 0.0, d0[i])
        return base[i] + tau * (v0[i] + 0.5 * a0[i] * tau)

    def motion_intervals(self):
        _, d0, v0, a0, _, starts, ends = self._tables
        moving = (v0[1:] != 0.0) | (a0[1:] != 0.0)
        return merge_intervals(starts[moving], ends[moving])

    def driven_intervals(self):
        if not self.driven:
            return np.empty(0), np.empty(0)
        _, _, _, _, _, starts, ends = self._tables
        return merge_intervals(starts, ends)


@dataclass(frozen=True, slots=True)
class BurstReplay(MotionProfile):
    """Given bursts replayed: each ramps up, cruises and ramps down at a constant acceleration.

    Burst k starts at ``starts_s[k]``, accelerates at ``accelerations_rpm_per_s[k]``
    (signed: its sign is the direction) for ``ramps_s[k]``, cruises at the
    speed reached for ``cruises_s[k]`` and decelerates to rest in another
    ``ramps_s[k]``. A logged field history replays without stitching traces;
    evaluation is that of :class:`SegmentedMotion` (three segments a burst).

    Parameters
    ----------
    starts_s, ramps_s, cruises_s : sequence of float
        Burst starts (≥ 0, in time order, not overlapping), ramp times (> 0)
        and cruise times (≥ 0), s.
    accelerations_rpm_per_s : sequence of float
        Motor acceleration of each burst's ramps, rpm/s (signed, non-zero).
    start_angle_deg : float
        Motor angle before the first burst, deg.
    driven : bool
        True if the motor drives the bursts.

    Examples
    --------
    >>> b = BurstReplay((1.0,), (0.5,), (2.0,), (120.0,))
    >>> round(b.peak_speed_rpm, 9), round(float(b.angle_deg(10.0)), 9)
    (60.0, 900.0)
    """

    starts_s: tuple
    ramps_s: tuple
    cruises_s: tuple
    accelerations_rpm_per_s: tuple
    start_angle_deg: float = 0.0
    driven: bool = False
    _segments: SegmentedMotion = field(init=False, repr=False, compare=False, default=None)

    def __post_init__(self):
        c = "BurstReplay"
        st = _float_tuple(c, "starts_s", self.starts_s, "s")
        ramp = _float_tuple(c, "ramps_s", self.ramps_s, "s")
        cruise = _float_tuple(c, "cruises_s", self.cruises_s, "s")
        acc = _float_tuple(c, "accelerations_rpm_per_s", self.accelerations_rpm_per_s, "rpm/s")
        if not (st.size == ramp.size == cruise.size == acc.size) or st.size == 0:
            raise DesignValueError(f"{c}.starts_s", f"{st.size} starts, {ramp.size} ramps, {cruise.size} cruises, "
                                   f"{acc.size} accelerations", "at least one burst, as many of each")
        for name, arr, ok, allowed in (("ramps_s", ramp, ramp > 0, "> 0"), ("cruises_s", cruise, cruise >= 0, ">= 0"),
                                       ("accelerations_rpm_per_s", acc, acc != 0, "non-zero")):
            if not np.all(ok):
                k = int(np.flatnonzero(~ok)[0])
                raise DesignValueError(f"{c}.{name}[{k}]", float(arr[k]), allowed)
        ends = st + 2 * ramp + cruise
        _in_order(c, st, ends, "burst")
        for name, arr in (("starts_s", st), ("ramps_s", ramp), ("cruises_s", cruise),
                          ("accelerations_rpm_per_s", acc)):
            object.__setattr__(self, name, tuple(arr.tolist()))
        top = acc * ramp
        # Three segments a burst: ramp up, cruise (dropped when zero long), ramp down.
        seg_start = np.stack([st, st + ramp, st + ramp + cruise], axis=1)
        seg_dur = np.stack([ramp, cruise, ramp], axis=1)
        seg_v = np.stack([np.zeros_like(top), top, top], axis=1)
        seg_a = np.stack([acc, np.zeros_like(acc), -acc], axis=1)
        keep = (seg_dur > 0).ravel()
        object.__setattr__(self, "_segments", SegmentedMotion(
            seg_start.ravel()[keep], seg_dur.ravel()[keep], seg_v.ravel()[keep], seg_a.ravel()[keep],
            start_angle_deg=self.start_angle_deg, driven=self.driven))

    @property
    def peak_speed_rpm(self) -> float:
        """Largest cruise speed magnitude, rpm."""
        return float(np.max(np.abs(np.asarray(self.accelerations_rpm_per_s) * np.asarray(self.ramps_s))))

    def angle_deg(self, t_s):
        return self._segments.angle_deg(t_s)

    def motion_intervals(self):
        return self._segments.motion_intervals()

    def driven_intervals(self):
        return self._segments.driven_intervals()


_ACCEL_UNITS = {"rpm/s": DEG_PER_S_PER_RPM, "deg/s^2": 1.0, "deg/s2": 1.0, "rad/s^2": 180.0 / math.pi,
                "rad/s2": 180.0 / math.pi}
_LINEAR_ACCEL_UNITS = {"mm/s^2": 1.0, "mm/s2": 1.0, "m/s^2": 1000.0, "m/s2": 1000.0}


def _table_csv(source, columns: tuple[tuple[str, dict], ...]) -> tuple[str, list[int], list[str], list[np.ndarray]]:
    """Read a CSV with a 'name [unit]' header of the given columns; values in the table's base units.

    Returns the source name, the line numbers (header first, then each data row), the units
    written and one array per column.
    """
    name, text = _read_source(source)
    header = None
    rows: list[tuple[int, list[str]]] = []
    for n, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if not line or line.startswith("#"):
            continue
        cells = [cell.strip() for cell in line.split(",")]
        if header is None:
            header = (n, cells)
        else:
            rows.append((n, cells))
    want = ",".join(f"{col} [unit]" for col, _ in columns)
    if header is None:
        raise DesignFileError("", f"no header line; expected {want!r}", source=name)
    hn, cells = header
    if len(cells) != len(columns):
        raise DesignFileError("header", f"expected {len(columns)} columns {want!r}, got {len(cells)}", source=name,
                              line=hn)
    scales, units = [], []
    for cell, (col, allowed) in zip(cells, columns):
        m = _HEADER.match(cell)
        unit = m.group(2).replace(" ", "") if m else ""
        if not m or m.group(1).lower() != col or unit not in allowed:
            raise DesignFileError("header", f"column '{col}' must be '{col} [unit]' with unit one of "
                                  f"{sorted(allowed)}", source=name, line=hn)
        scales.append(allowed[unit])
        units.append(unit)
    if not rows:
        raise DesignFileError("", "no data rows", source=name, line=hn)
    values = np.empty((len(rows), len(columns)))
    for r, (n, row) in enumerate(rows):
        if len(row) != len(columns):
            raise DesignFileError("row", f"expected {len(columns)} values, got {len(row)}", source=name, line=n)
        try:
            nums = [float(x) for x in row]
        except ValueError:
            raise DesignFileError("row", "a value is not a number (a decimal point, no units or thousands "
                                  "separators)", source=name, line=n) from None
        if not all(math.isfinite(x) for x in nums):
            raise DesignFileError("row", "values must be finite numbers", source=name, line=n)
        values[r] = nums
    return name, [hn] + [n for n, _ in rows], units, [values[:, k] * scales[k] for k in range(len(columns))]


def _output_side(profile, train, linear: bool, at_output: bool, name: str, line: int, start_angle_deg: float):
    if (linear or at_output) and train is None:
        raise DesignFileError("train", "an output-side motion needs a gear train to map it to the motor",
                              source=name, line=line)
    if linear and train.output_unit != "mm":
        raise DesignFileError("header", f"linear units need a linear output, the train's output is in "
                              f"{train.output_unit}", source=name, line=line)
    if not linear and at_output and train.output_unit != "deg":
        raise DesignFileError("header", "rotary units at the output need a rotary output (the train's output "
                              f"is in {train.output_unit})", source=name, line=line)
    if not (linear or at_output):
        return profile
    wrapped = AtOutput(profile, train)
    return CombinedMotion((wrapped, Still(start_angle_deg))) if start_angle_deg else wrapped


def _check_rows(exc: DesignValueError, name: str, lines: list[int]):
    # A bad row found by the profile (an overlap, a zero duration) names the line of the file.
    m = re.search(r"\[(\d+)\]", exc.field)
    row = int(m.group(1)) if m else None
    return DesignFileError("row", str(exc), source=name, line=lines[0] if row is None else lines[1 + row])


def load_segments_csv(source, *, train=None, at_output: bool = False, driven: bool = False,
                      start_angle_deg: float = 0.0) -> MotionProfile:
    """Load a :class:`SegmentedMotion` from CSV with units in the header.

    Header: ``start [s],duration [s],speed [rpm],acceleration [rpm/s]`` (times s, ms,
    us, min, h; speeds rpm, deg/s, rad/s, rev/s or mm/s, m/s, um/s at a linear output;
    accelerations rpm/s, deg/s^2, rad/s^2 or mm/s^2, m/s^2). One row per segment, with
    the speed at its start. Speeds at the output (``at_output`` or linear units) are
    mapped to the motor through ``train``.

    Raises
    ------
    DesignFileError
        Naming the file and the line of the first bad entry.
    """
    speed_units = {**_ANGULAR_SPEED_UNITS, **_LINEAR_SPEED_UNITS}
    accel_units = {**_ACCEL_UNITS, **_LINEAR_ACCEL_UNITS}
    name, lines, units, (st, du, v, a) = _table_csv(source, (("start", _TIME_UNITS), ("duration", _TIME_UNITS),
                                                          ("speed", speed_units), ("acceleration", accel_units)))
    linear = units[2] in _LINEAR_SPEED_UNITS
    if linear != (units[3] in _LINEAR_ACCEL_UNITS):
        raise DesignFileError("header", "speed and acceleration must both be rotary or both linear", source=name,
                              line=lines[0])
    # Profiles take rpm and rpm/s; output-side values stay in output units and AtOutput scales them.
    try:
        prof = SegmentedMotion(st, du, v / DEG_PER_S_PER_RPM, a / DEG_PER_S_PER_RPM,
                               start_angle_deg=0.0 if (linear or at_output) else start_angle_deg, driven=driven)
    except DesignValueError as exc:
        raise _check_rows(exc, name, lines) from None
    return _output_side(prof, train, linear, at_output, name, lines[0], start_angle_deg)


def load_bursts_csv(source, *, train=None, at_output: bool = False, driven: bool = False,
                    start_angle_deg: float = 0.0) -> MotionProfile:
    """Load a :class:`BurstReplay` from CSV with units in the header.

    Header: ``start [s],ramp [s],cruise [s],acceleration [rpm/s]`` (units as for
    :func:`load_segments_csv`); one row per burst, the acceleration signed by the
    burst's direction.

    Raises
    ------
    DesignFileError
        Naming the file and the line of the first bad entry.
    """
    accel_units = {**_ACCEL_UNITS, **_LINEAR_ACCEL_UNITS}
    name, lines, units, (st, ramp, cruise, a) = _table_csv(
        source, (("start", _TIME_UNITS), ("ramp", _TIME_UNITS), ("cruise", _TIME_UNITS),
                 ("acceleration", accel_units)))
    linear = units[3] in _LINEAR_ACCEL_UNITS
    try:
        prof = BurstReplay(st, ramp, cruise, a / DEG_PER_S_PER_RPM,
                           start_angle_deg=0.0 if (linear or at_output) else start_angle_deg, driven=driven)
    except DesignValueError as exc:
        raise _check_rows(exc, name, lines) from None
    return _output_side(prof, train, linear, at_output, name, lines[0], start_angle_deg)
