"""Analytic speed and poll-period bounds of the polled quarter-turn counter.

Let the motor shaft turn by Δ degrees (net) between two reads and write
u = Δ/90° and x = angle/90° at the first read. The true step is
k = floor(x + u) − floor(x), which for any phase x is floor(u) or
floor(u) + 1, and exactly u when u is an integer. The counter sees only
k modulo 4. For Δ ≥ 0 (the same holds mirrored for Δ < 0):

* u ≤ 1 ⇒ k ∈ {0, 1} (k = 1 at every phase when u = 1): every read decodes
  correctly. **Tracking bound, inclusive: |Δ| ≤ 90° per read.**
* 1 < u ≤ 2 ⇒ k ∈ {1, 2}: a read can be ambiguous (k = 2 is 2 modulo 4 and
  is flagged), never silently wrong. At u = 2 every read is ambiguous.
* u > 2 ⇒ k = 3 is possible for some phase and decodes as −1 with no error
  shown. **Silent errors are possible only strictly above 180° per read.**

Since |Δ| ≤ n·6°/s·T for a shaft never faster than n rpm, the guaranteed
speed is n_max = 90°/(6°/s·T) = 15/T rpm (speeds up to and including it are
tracked with ideal, jitter-free polls), and silent errors need n > 30/T rpm.
Timing jitter of ±j lengthens the worst interval between reads to T + 2j;
latch hysteresis and switch-point tolerance eat into the 90° as well, so
design with margin (a common practice is to stay at or below half the bound).
The simulation reads boundaries 1e-9 quarter-turn early so that a sample
landing exactly on a boundary is not split by floating-point rounding.

The bound is on displacement per read, not on speed: a vibration of peak-to-
peak amplitude of at most 90° never gives an ambiguous read at any frequency.

# Source: 2-bit reflected Gray code, F. Gray, "Pulse code communication",
# US patent 2,632,058 (1953): one bit changes per quarter-turn, so a read
# resolves the index only modulo 4.
# Source: aliasing beyond half a period per sample — Nyquist–Shannon sampling
# theorem (C. E. Shannon, "Communication in the presence of noise", Proc. IRE
# 37, 1949); the 360°-periodic code aliases beyond 180° per read. The tighter
# 90° limit comes from the 90° quantization of the code, derived above
# (common practice for quadrature decoders).

Caution: a miscount moves an actuator to the wrong place, sometimes
silently. These bounds are design estimates; where position feeds a safety
function follow the applicable functional-safety standards, local codes and
licensed practice.
"""

from __future__ import annotations

import math

import numpy as np

from .errors import DesignValueError

__all__ = [
    "TRACKING_DEG_PER_POLL",
    "SILENT_DEG_PER_POLL",
    "max_trackable_speed_rpm",
    "silent_error_speed_rpm",
    "max_poll_period_s",
    "max_poll_period_at_output_s",
    "max_trackable_output_speed",
    "schedule_speed_limit_rpm",
    "worst_interval_s",
]

#: Largest net motor rotation between reads that always decodes right, deg (inclusive).
TRACKING_DEG_PER_POLL = 90.0
#: Net motor rotation between reads above which errors can be silent, deg (exclusive).
SILENT_DEG_PER_POLL = 180.0
_DEG_PER_S_PER_RPM = 6.0


def _period(name: str, value) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)) \
            or not (0 < float(value) < math.inf):
        raise DesignValueError(name, value, "a finite number > 0", unit="s")
    return float(value)


def max_trackable_speed_rpm(poll_period_s: float) -> float:
    """Fastest motor speed that every read decodes correctly, rpm (inclusive).

    n_max = 90° / (6°/s per rpm · T) = 15 / T.

    Parameters
    ----------
    poll_period_s : float
        Longest time between two reads, s.

    Examples
    --------
    >>> max_trackable_speed_rpm(0.01)
    1500.0
    """
    return TRACKING_DEG_PER_POLL / (_DEG_PER_S_PER_RPM * _period("poll_period_s", poll_period_s))


def silent_error_speed_rpm(poll_period_s: float) -> float:
    """Motor speed above which (strictly) a read can be silently wrong, rpm.

    n_silent = 180° / (6°/s per rpm · T) = 30 / T. Between
    :func:`max_trackable_speed_rpm` and this speed errors are always flagged
    as ambiguous.
    """
    return SILENT_DEG_PER_POLL / (_DEG_PER_S_PER_RPM * _period("poll_period_s", poll_period_s))


def max_poll_period_s(speed_rpm: float) -> float:
    """Longest poll period that tracks a motor speed, s (inclusive): T = 15 / n.

    Parameters
    ----------
    speed_rpm : float
        Fastest motor speed that can occur while polling, rpm (> 0; sign ignored).
    """
    if isinstance(speed_rpm, bool) or not isinstance(speed_rpm, (int, float, np.floating, np.integer)) \
            or not (0 < abs(float(speed_rpm)) < math.inf):
        raise DesignValueError("speed_rpm", speed_rpm, "a finite non-zero number", unit="rpm")
    return TRACKING_DEG_PER_POLL / (_DEG_PER_S_PER_RPM * abs(float(speed_rpm)))


def _motor_rpm_per_output_speed(train) -> float:
    from .motion import output_speed_to_motor_rpm

    return abs(float(output_speed_to_motor_rpm(1.0, train)))


def max_poll_period_at_output_s(output_speed: float, train) -> float:
    """Longest poll period that tracks a back-drive speed at the output, s.

    Parameters
    ----------
    output_speed : float
        Fastest output speed while asleep: rpm for a rotary output, mm/s for
        a linear one (``train.output_unit`` "deg" or "mm").
    train : object
        Gear train with ``travel_per_motor_turn``, ``output_unit``, ``direction``.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> from fractions import Fraction
    >>> g50 = SimpleNamespace(travel_per_motor_turn=Fraction(360, 50), output_unit="deg", direction=1)
    >>> round(max_poll_period_at_output_s(30.0, g50), 12)
    0.01
    """
    if isinstance(output_speed, bool) or not isinstance(output_speed, (int, float, np.floating, np.integer)) \
            or not (0 < abs(float(output_speed)) < math.inf):
        unit = "mm/s" if getattr(train, "output_unit", "deg") == "mm" else "rpm"
        raise DesignValueError("output_speed", output_speed, "a finite non-zero number", unit=unit)
    return max_poll_period_s(abs(float(output_speed)) * _motor_rpm_per_output_speed(train))


def max_trackable_output_speed(poll_period_s: float, train) -> float:
    """Fastest output speed a poll period tracks: rpm (rotary) or mm/s (linear)."""
    return max_trackable_speed_rpm(poll_period_s) / _motor_rpm_per_output_speed(train)


def worst_interval_s(schedule) -> float:
    """Longest time between two reads while idle: slow period + 2 × jitter, s.

    Motion that starts while the counter polls slowly is first read up to this
    long after the previous read, so the slow period sets the guarantee even
    for an adaptive schedule.
    """
    return schedule.poll_period_s + 2.0 * schedule.jitter_s


def schedule_speed_limit_rpm(schedule) -> float:
    """Guaranteed trackable motor speed of a schedule (jitter included), rpm."""
    return max_trackable_speed_rpm(worst_interval_s(schedule))
