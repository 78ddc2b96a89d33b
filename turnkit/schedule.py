"""Polling schedules: when the counter electronics wake to read the latches.

* :class:`FixedSchedule` — one poll period, a free-running timer.
* :class:`AdaptiveSchedule` — a slow period while nothing moves; after a read
  sees motion, a fast period until ``hold_s`` has passed without motion.

Both track actively (sensor on, every latch edge counted) while the motor is
driven, unless ``track_when_driven`` is False. Every poll costs one wake-up:
``wake_time_s`` + ``settle_time_s`` of waking, then ``poll_time_s`` of reading.
Optional timing jitter (uniform in ±``jitter_s``, seeded) moves each poll
instant without drifting the timer.

The default wake, settle and poll times are illustrative orders of magnitude
for a low-power microcontroller; take the real values from your parts.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import DesignValueError

__all__ = ["FixedSchedule", "AdaptiveSchedule", "grid_count", "grid_times", "grid_index", "GRID_TOLERANCE"]


def _positive(cls: str, name: str, value, allow_zero: bool = False) -> float:
    ok = isinstance(value, (int, float, np.floating, np.integer)) and not isinstance(value, bool) \
        and math.isfinite(value) and (value >= 0 if allow_zero else value > 0)
    if not ok:
        raise DesignValueError(f"{cls}.{name}", value, "a finite number >= 0" if allow_zero else
                               "a finite number > 0", unit="s")
    return float(value)


#: Instants within this fraction of a period of a grid point count as on it, so
#: that a time computed as ``anchor + k*period`` is recognised as poll k
#: whatever the last bit of rounding.
GRID_TOLERANCE = 1e-9


def grid_index(time_s, anchor_s: float, period_s: float):
    """Index k of the last grid instant ``anchor_s + k*period_s`` at or before ``time_s``."""
    return np.floor((np.asarray(time_s, dtype=np.float64) - anchor_s) / period_s + GRID_TOLERANCE
                    ).astype(np.int64)


def grid_count(start_s: float, end_s: float, anchor_s: float, period_s: float) -> int:
    """Number of instants ``anchor_s + k*period_s`` (k ≥ 1) in (start_s, end_s].

    Closed form, so idle spans of any length cost nothing to count.
    """
    if end_s <= start_s:
        return 0
    k_hi = math.floor((end_s - anchor_s) / period_s + GRID_TOLERANCE)
    k_lo = max(math.floor((start_s - anchor_s) / period_s + GRID_TOLERANCE), 0)
    return max(k_hi - k_lo, 0)


def grid_times(start_s: float, end_s: float, anchor_s: float, period_s: float) -> np.ndarray:
    """The instants ``anchor_s + k*period_s`` (k ≥ 1) in (start_s, end_s], s."""
    k_lo = max(math.floor((start_s - anchor_s) / period_s + GRID_TOLERANCE), 0) + 1
    k_hi = math.floor((end_s - anchor_s) / period_s + GRID_TOLERANCE)
    if k_hi < k_lo:
        return np.empty(0)
    return anchor_s + np.arange(k_lo, k_hi + 1, dtype=np.float64) * period_s


class _Common:
    __slots__ = ()

    @property
    def awake_per_poll_s(self) -> float:
        """Awake time per poll: wake + settle + poll, s."""
        return self.wake_time_s + self.settle_time_s + self.poll_time_s

    def rng(self) -> np.random.Generator:
        """A fresh generator for the poll jitter, seeded from ``seed``."""
        return np.random.default_rng(self.seed)

    def jittered(self, times_s: np.ndarray, rng: np.random.Generator) -> np.ndarray:
        """Add the seeded poll jitter (uniform in ±``jitter_s``) to nominal poll times, s."""
        if self.jitter_s == 0.0 or times_s.size == 0:
            return times_s
        return times_s + rng.uniform(-self.jitter_s, self.jitter_s, times_s.size)

    def _check_common(self, cls: str, shortest_period_s: float) -> None:
        for name in ("wake_time_s", "settle_time_s", "poll_time_s", "jitter_s"):
            object.__setattr__(self, name, _positive(cls, name, getattr(self, name), allow_zero=True))
        if isinstance(self.seed, bool) or not isinstance(self.seed, (int, np.integer)) or self.seed < 0:
            raise DesignValueError(f"{cls}.seed", self.seed, "an integer >= 0")
        if not isinstance(self.track_when_driven, bool):
            raise DesignValueError(f"{cls}.track_when_driven", self.track_when_driven, "True or False")
        if self.awake_per_poll_s >= shortest_period_s:
            raise DesignValueError(
                f"{cls}.wake_time_s + settle_time_s + poll_time_s", self.awake_per_poll_s,
                f"less than the shortest poll period ({shortest_period_s} s)", unit="s",
                hint="the electronics must fall asleep again before the next poll")
        if self.jitter_s * 2 >= shortest_period_s - self.awake_per_poll_s:
            raise DesignValueError(
                f"{cls}.jitter_s", self.jitter_s,
                f"less than half of (shortest poll period − awake time) = "
                f"{(shortest_period_s - self.awake_per_poll_s) / 2} s", unit="s",
                hint="larger jitter would reorder polls")


@dataclass(frozen=True, slots=True)
class FixedSchedule(_Common):
    """Poll every ``poll_period_s`` from a free-running timer.

    Parameters
    ----------
    poll_period_s : float
        Time between polls, s.
    wake_time_s, settle_time_s, poll_time_s : float
        Wake-up, settle and latch-read time per poll, s.
    jitter_s : float
        Half-width of the uniform timing jitter of each poll, s.
    seed : int
        Seed of the jitter.
    track_when_driven : bool
        Count every latch edge while the motor is driven.

    Examples
    --------
    >>> FixedSchedule(0.01).awake_per_poll_s
    0.00017
    """

    poll_period_s: float
    wake_time_s: float = 100e-6
    settle_time_s: float = 50e-6
    poll_time_s: float = 20e-6
    jitter_s: float = 0.0
    seed: int = 0
    track_when_driven: bool = True

    def __post_init__(self):
        object.__setattr__(self, "poll_period_s", _positive("FixedSchedule", "poll_period_s",
                                                            self.poll_period_s))
        self._check_common("FixedSchedule", self.poll_period_s)

    @property
    def fastest_period_s(self) -> float:
        """The shortest time between polls, s (the one the speed bound uses)."""
        return self.poll_period_s


@dataclass(frozen=True, slots=True)
class AdaptiveSchedule(_Common):
    """Slow polls while idle; fast polls for ``hold_s`` after motion was seen.

    Parameters
    ----------
    poll_period_s : float
        Slow poll period, s.
    fast_period_s : float
        Fast poll period, s (< ``poll_period_s``).
    hold_s : float
        Fast polling continues until this long after the last read that saw a
        step (or after a driven move ends), s.
    wake_time_s, settle_time_s, poll_time_s, jitter_s, seed, track_when_driven
        As for :class:`FixedSchedule` (``jitter_s`` applies to the slow polls).
    fast_jitter_s : float, optional
        Half-width of the timing jitter of the fast polls, s; None: the same
        as ``jitter_s``. A wake timer whose error is a fraction of its period
        gives each period its own jitter.

    Notes
    -----
    Only the fast period is covered by the speed bound once motion is seen;
    the first poll of a motion that starts while slow-polling is one slow
    period after the last idle read, so motion faster than the slow-period
    bound can already be miscounted on that first read.
    """

    poll_period_s: float
    fast_period_s: float
    hold_s: float
    wake_time_s: float = 100e-6
    settle_time_s: float = 50e-6
    poll_time_s: float = 20e-6
    jitter_s: float = 0.0
    seed: int = 0
    track_when_driven: bool = True
    fast_jitter_s: float | None = None

    def __post_init__(self):
        for name in ("poll_period_s", "fast_period_s"):
            object.__setattr__(self, name, _positive("AdaptiveSchedule", name, getattr(self, name)))
        object.__setattr__(self, "hold_s", _positive("AdaptiveSchedule", "hold_s", self.hold_s,
                                                     allow_zero=True))
        if self.fast_period_s >= self.poll_period_s:
            raise DesignValueError("AdaptiveSchedule.fast_period_s", self.fast_period_s,
                                   f"less than poll_period_s ({self.poll_period_s} s)", unit="s")
        if self.fast_jitter_s is None:
            self._check_common("AdaptiveSchedule", self.fast_period_s)
            return
        object.__setattr__(self, "fast_jitter_s", _positive("AdaptiveSchedule", "fast_jitter_s",
                                                            self.fast_jitter_s, allow_zero=True))
        self._check_common("AdaptiveSchedule", self.poll_period_s)
        awake = self.awake_per_poll_s
        if awake >= self.fast_period_s:
            raise DesignValueError(
                "AdaptiveSchedule.wake_time_s + settle_time_s + poll_time_s", awake,
                f"less than the shortest poll period ({self.fast_period_s} s)", unit="s",
                hint="the electronics must fall asleep again before the next poll")
        if self.fast_jitter_s * 2 >= self.fast_period_s - awake:
            raise DesignValueError(
                "AdaptiveSchedule.fast_jitter_s", self.fast_jitter_s,
                f"less than half of (fast poll period − awake time) = {(self.fast_period_s - awake) / 2} s",
                unit="s", hint="larger jitter would reorder polls")

    @property
    def fastest_period_s(self) -> float:
        """The shortest time between polls, s."""
        return self.fast_period_s

    @property
    def fast_poll_jitter_s(self) -> float:
        """Half-width of the jitter of the fast polls, s."""
        return self.jitter_s if self.fast_jitter_s is None else self.fast_jitter_s
