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

Real latches. The 90° and 180° above are the quadrant widths of ideal
edges. Every function here takes the narrowest quadrant ``w₁`` and the
narrowest two-quadrant span ``w₂`` of a unit inside the latch tolerances
(:func:`turnkit.latches.quadrant_widths`: 90° − 2·spread and 180° − 2·spread)
and the poll jitter ``j`` as a fraction of each poll period, whose worst
interval between reads is T·(1 + 2j):

    n_max = w₁ / (6 · T · (1 + 2j))       (inclusive)
    n_silent = w₂ / (6 · T · (1 + 2j))    (silent errors only strictly above)
    T_max = w₁ · (1 − m) / (6 · n · (1 + 2j))

where m is the counting margin asked for (a speed counted with margin m runs
at no more than (1 − m) of the bound). Derived, shown in docs/counter.md §6.
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
    "worst_intervals_s",
    "counting_margin",
    "speed_limit_rpm",
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


def _width(name: str, value, upper: float) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)) \
            or not (0 < float(value) <= upper):
        raise DesignValueError(name, value, f"in (0, {upper:g}]", unit="deg")
    return float(value)


def _fraction(name: str, value, upper: float = 1.0) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)) \
            or not (0 <= float(value) < upper):
        raise DesignValueError(name, value, f"in [0, {upper:g})")
    return float(value)


def max_trackable_speed_rpm(poll_period_s: float, narrowest_quadrant_deg: float = TRACKING_DEG_PER_POLL,
                            jitter: float = 0.0) -> float:
    """Fastest motor speed that every read decodes correctly, rpm (inclusive).

    n_max = w₁ / (6°/s per rpm · T · (1 + 2j)); with ideal latches and no
    jitter 90° / (6 · T) = 15 / T.

    Parameters
    ----------
    poll_period_s : float
        Nominal time between two reads, s.
    narrowest_quadrant_deg : float
        Narrowest quadrant of a unit inside the latch tolerances, deg
        (:func:`turnkit.latches.quadrant_widths`); 90 for ideal edges.
    jitter : float
        Poll jitter as a fraction of the period (each read within ±j·T of
        its nominal time), in [0, 0.5).

    Examples
    --------
    >>> max_trackable_speed_rpm(0.01)
    1500.0
    >>> round(max_trackable_speed_rpm(0.01, 66.0), 6)
    1100.0
    """
    w = _width("narrowest_quadrant_deg", narrowest_quadrant_deg, TRACKING_DEG_PER_POLL)
    j = _fraction("jitter", jitter, 0.5)
    return w / (_DEG_PER_S_PER_RPM * _period("poll_period_s", poll_period_s) * (1.0 + 2.0 * j))


def silent_error_speed_rpm(poll_period_s: float, narrowest_two_quadrants_deg: float = SILENT_DEG_PER_POLL,
                           jitter: float = 0.0) -> float:
    """Motor speed above which (strictly) a read can be silently wrong, rpm.

    n_silent = w₂ / (6°/s per rpm · T · (1 + 2j)); 30 / T for ideal edges.
    Between :func:`max_trackable_speed_rpm` and this speed errors are
    always flagged as ambiguous.

    Parameters
    ----------
    poll_period_s : float
        Nominal time between two reads, s.
    narrowest_two_quadrants_deg : float
        Narrowest span of two neighbouring quadrants, deg; 180 for ideal edges.
    jitter : float
        Poll jitter as a fraction of the period, in [0, 0.5).
    """
    w = _width("narrowest_two_quadrants_deg", narrowest_two_quadrants_deg, SILENT_DEG_PER_POLL)
    j = _fraction("jitter", jitter, 0.5)
    return w / (_DEG_PER_S_PER_RPM * _period("poll_period_s", poll_period_s) * (1.0 + 2.0 * j))


def max_poll_period_s(speed_rpm: float, narrowest_quadrant_deg: float = TRACKING_DEG_PER_POLL,
                      jitter: float = 0.0, margin: float = 0.0) -> float:
    """Longest poll period that tracks a motor speed with a margin, s (inclusive).

    T = w₁ · (1 − m) / (6 · n · (1 + 2j)); 15 / n for ideal edges, no jitter
    and no margin.

    Parameters
    ----------
    speed_rpm : float
        Fastest motor speed that can occur while polling, rpm (> 0; sign ignored).
    narrowest_quadrant_deg : float
        Narrowest quadrant, deg (see :func:`max_trackable_speed_rpm`).
    jitter : float
        Poll jitter as a fraction of the period, in [0, 0.5).
    margin : float
        Counting margin asked for, in [0, 1): the speed may use at most
        (1 − margin) of the bound.
    """
    if isinstance(speed_rpm, bool) or not isinstance(speed_rpm, (int, float, np.floating, np.integer)) \
            or not (0 < abs(float(speed_rpm)) < math.inf):
        raise DesignValueError("speed_rpm", speed_rpm, "a finite non-zero number", unit="rpm")
    w = _width("narrowest_quadrant_deg", narrowest_quadrant_deg, TRACKING_DEG_PER_POLL)
    j = _fraction("jitter", jitter, 0.5)
    m = _fraction("margin", margin)
    return w * (1.0 - m) / (_DEG_PER_S_PER_RPM * abs(float(speed_rpm)) * (1.0 + 2.0 * j))


def counting_margin(speed_rpm: float, limit_rpm: float) -> float:
    """Share of the speed bound left unused: 1 − |n| / n_max (negative above the bound).

    Parameters
    ----------
    speed_rpm : float
        Motor speed that must be counted, rpm.
    limit_rpm : float
        The bound, e.g. :func:`max_trackable_speed_rpm`, rpm (> 0).

    Examples
    --------
    >>> counting_margin(700.0, 1000.0)
    0.3
    """
    return 1.0 - abs(float(speed_rpm)) / float(limit_rpm)


def _motor_rpm_per_output_speed(train) -> float:
    from .motion import output_speed_to_motor_rpm

    return abs(float(output_speed_to_motor_rpm(1.0, train)))


def max_poll_period_at_output_s(output_speed: float, train, narrowest_quadrant_deg: float = TRACKING_DEG_PER_POLL,
                                jitter: float = 0.0, margin: float = 0.0) -> float:
    """Longest poll period that tracks a back-drive speed at the output, s.

    Parameters
    ----------
    output_speed : float
        Fastest output speed while asleep: rpm for a rotary output, mm/s for
        a linear one (``train.output_unit`` "deg" or "mm").
    train : object
        Gear train with ``travel_per_motor_turn``, ``output_unit``, ``direction``.
    narrowest_quadrant_deg, jitter, margin : float
        As for :func:`max_poll_period_s` (deg, fraction, fraction).

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
    return max_poll_period_s(abs(float(output_speed)) * _motor_rpm_per_output_speed(train),
                             narrowest_quadrant_deg, jitter, margin)


def max_trackable_output_speed(poll_period_s: float, train, narrowest_quadrant_deg: float = TRACKING_DEG_PER_POLL,
                               jitter: float = 0.0) -> float:
    """Fastest output speed a poll period tracks: rpm (rotary) or mm/s (linear)."""
    return max_trackable_speed_rpm(poll_period_s, narrowest_quadrant_deg, jitter) \
        / _motor_rpm_per_output_speed(train)


def _fast_jitter_s(schedule) -> float:
    fast = getattr(schedule, "fast_jitter_s", None)
    return schedule.jitter_s if fast is None else fast


def worst_intervals_s(schedule) -> dict[str, float]:
    """Longest time between two reads in each schedule state, s.

    ``{"polling": T + 2·jitter}`` for a fixed schedule; an adaptive one adds
    ``"fast_polling"`` with its fast period and the jitter of its fast polls.
    """
    out = {"polling": schedule.poll_period_s + 2.0 * schedule.jitter_s}
    if hasattr(schedule, "fast_period_s"):
        out["fast_polling"] = schedule.fast_period_s + 2.0 * _fast_jitter_s(schedule)
    return out


def worst_interval_s(schedule) -> float:
    """Longest time between two reads while idle: the largest of :func:`worst_intervals_s`, s.

    Motion that starts while the counter polls slowly is first read up to
    the slow period plus twice its jitter after the previous read, so the
    slow period sets the guarantee even for an adaptive schedule.
    """
    return max(worst_intervals_s(schedule).values())


def speed_limit_rpm(interval_s: float, narrowest_quadrant_deg: float = TRACKING_DEG_PER_POLL) -> float:
    """Fastest motor speed counted right when reads are at most ``interval_s`` apart, rpm.

    n = w₁ / (6 · interval); the interval already holds the jitter.
    """
    return max_trackable_speed_rpm(interval_s, narrowest_quadrant_deg)


def schedule_speed_limit_rpm(schedule, narrowest_quadrant_deg: float = TRACKING_DEG_PER_POLL) -> float:
    """Guaranteed trackable motor speed of a schedule (jitter and latch widths included), rpm."""
    return speed_limit_rpm(worst_interval_s(schedule), narrowest_quadrant_deg)
