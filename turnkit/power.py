"""Power budget of a sleep/wake schedule: average current, charge and life.

Each consumer (sensor, microcontroller, regulator quiescent, other loads)
draws a current in each state of the quarter-turn counter's state machine,
plus an optional extra pulse at every wake. The average current is the
time-weighted mean of the per-state totals::

    I_avg = sum_state f_state * I_state + wakes_per_s * Q_pulse

which for a plain sleep/poll schedule is the familiar
``I_avg = I_sleep + (t_awake / T) * (I_awake - I_sleep)``.

State fractions come from one of two places:

* :func:`budget_from_schedule` -- analytic, from a schedule given as plain
  floats (poll period, wake, settle and poll times, optional adaptive fast
  period and hold time, and a motion statistic);
* :func:`budget_from_simulation` / :func:`budget_from_state_times` -- exact,
  from a simulation's time in each state and its number of wakes.

Meaning of the states (times must follow it in both entry points):

``asleep``
    between polls, everything in its lowest-power mode.
``waking``
    from the wake-up event until the readings are valid: the wake time
    (oscillator, regulator start) plus the sensor's settle time.
``polling``
    reading the latches and updating the count in the normal (slow) schedule.
``fast_polling``
    the same read in the fast part of an adaptive schedule (the sleep between
    fast polls counts as ``asleep``).
``tracking``
    continuously awake, following the motor while it is driven.
``fault``
    after an ambiguous step or an overflow fault, waiting to be re-homed. The
    firmware stops polling and sleeps (docs/counter.md), so a consumer's
    fault current defaults to its ``asleep`` current; give a higher one for
    firmware that stays awake in fault.
``power_lost``
    supply below the electronics' minimum: the count is gone and the
    electronics draw nothing (default 0).

Per-wake pulses of a consumer (e.g. latches powered only for a few µs) are
booked under ``waking``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np

from .battery import HOURS_PER_YEAR, Cell, Pack, life_from_capacity_years
from .battery import _derating, _warnings_for as _battery_findings
from .errors import DesignValueError

__all__ = [
    "STATES",
    "SECONDS_PER_DAY",
    "Consumer",
    "CurrentProfile",
    "PowerBudget",
    "QuiescentCheck",
    "LifeCurve",
    "AdaptiveLifeCurve",
    "state_fractions",
    "average_current_uA",
    "budget_from_schedule",
    "budget_from_state_times",
    "budget_from_simulation",
    "check_quiescent_budget",
    "life_vs_poll_period",
    "life_vs_adaptive_schedule",
    "MoveEnergy",
    "move_energy",
    "time_to_flat_days",
]

STATES: tuple[str, ...] = (
    "asleep", "waking", "polling", "fast_polling", "tracking", "fault", "power_lost",
)
_INDEX = {name: k for k, name in enumerate(STATES)}
_WAKE_STATES = (_INDEX["waking"], _INDEX["polling"], _INDEX["fast_polling"])
_REQUIRED = ("asleep", "waking", "polling", "tracking")
SECONDS_PER_DAY = 86400.0
_SECONDS_PER_YEAR = HOURS_PER_YEAR * 3600.0


def _finite_nonneg(name: str, value, unit: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating, np.integer)) \
            or not math.isfinite(value) or value < 0:
        raise DesignValueError(name, value, "a finite number >= 0", unit=unit)
    return float(value)


@dataclass(frozen=True, slots=True)
class Consumer:
    """One load on the supply, with its current in every state.

    Parameters
    ----------
    name : str
        What it is, in plain words (``"angle sensor"``).
    current_uA : mapping of str to float, or sequence of 7 floats
        Current in each state, µA. ``asleep``, ``waking``, ``polling`` and
        ``tracking`` are required; ``fast_polling`` defaults to the
        ``polling`` current, ``fault`` to the ``asleep`` current (the
        firmware stops polling and sleeps in fault), ``power_lost`` to 0.
        Stored as a tuple in :data:`STATES` order.
    wake_pulse_uA : float, optional
        Extra current drawn for ``wake_pulse_s`` at every wake, µA.
    wake_pulse_s : float, optional
        Length of that pulse, s.
    """

    name: str
    current_uA: tuple[float, ...]
    wake_pulse_uA: float = 0.0
    wake_pulse_s: float = 0.0

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name.strip():
            raise DesignValueError("Consumer.name", self.name, "a non-empty string")
        given = self.current_uA
        if isinstance(given, Mapping):
            unknown = [k for k in given if k not in _INDEX]
            if unknown:
                raise DesignValueError(f"Consumer({self.name!r}).current_uA", unknown[0],
                                       "a state name: " + ", ".join(STATES))
            missing = [k for k in _REQUIRED if k not in given]
            if missing:
                raise DesignValueError(
                    f"Consumer({self.name!r}).current_uA[{missing[0]!r}]", None,
                    "given", unit="uA",
                    hint="asleep, waking, polling and tracking are required")
            values = dict(given)
            values.setdefault("fast_polling", values["polling"])
            values.setdefault("fault", values["asleep"])
            values.setdefault("power_lost", 0.0)
            currents = tuple(values[s] for s in STATES)
        else:
            currents = tuple(given)
            if len(currents) != len(STATES):
                raise DesignValueError(f"Consumer({self.name!r}).current_uA", given,
                                       f"a mapping by state or {len(STATES)} values in "
                                       "the order " + ", ".join(STATES), unit="uA")
        checked = tuple(_finite_nonneg(f"Consumer({self.name!r}).current_uA[{s!r}]", v, "uA")
                        for s, v in zip(STATES, currents))
        object.__setattr__(self, "current_uA", checked)
        object.__setattr__(self, "wake_pulse_uA", _finite_nonneg(
            f"Consumer({self.name!r}).wake_pulse_uA", self.wake_pulse_uA, "uA"))
        object.__setattr__(self, "wake_pulse_s", _finite_nonneg(
            f"Consumer({self.name!r}).wake_pulse_s", self.wake_pulse_s, "s"))

    @classmethod
    def sleep_and_awake(cls, name: str, sleep_uA: float, awake_uA: float, *,
                        tracking_uA: float | None = None, wake_pulse_uA: float = 0.0,
                        wake_pulse_s: float = 0.0) -> "Consumer":
        """A load with one sleep current and one awake current.

        ``awake_uA`` applies to waking, polling and fast polling;
        ``tracking_uA`` (default ``awake_uA``) to tracking; ``sleep_uA`` to
        fault (the firmware sleeps in fault); 0 when power is lost.
        """
        track = awake_uA if tracking_uA is None else tracking_uA
        return cls(name, {"asleep": sleep_uA, "waking": awake_uA, "polling": awake_uA,
                          "tracking": track}, wake_pulse_uA, wake_pulse_s)

    @classmethod
    def constant(cls, name: str, current_uA: float) -> "Consumer":
        """A load drawing the same current in every powered state (e.g. a regulator)."""
        return cls(name, {"asleep": current_uA, "waking": current_uA,
                          "polling": current_uA, "tracking": current_uA})

    @classmethod
    def from_quantities(cls, name: str, current: Mapping[str, object], *,
                        wake_pulse: object = 0.0, wake_pulse_time: object = 0.0) -> "Consumer":
        """A consumer from quantities with units (``{"asleep": "1.2 uA", ...}``).

        Bare numbers are taken as µA (currents) and s (pulse time). Parsed
        through :mod:`turnkit.units`; a wrong dimension names the field.
        """
        from .units import to_magnitude

        if not isinstance(current, Mapping):
            raise DesignValueError(f"Consumer({name!r}).current", current,
                                   "a mapping of state name to current")
        currents = {state: to_magnitude(value, "uA", f"Consumer({name!r}).current[{state!r}]")
                    for state, value in current.items()}
        return cls(name, currents,
                   to_magnitude(wake_pulse, "uA", f"Consumer({name!r}).wake_pulse"),
                   to_magnitude(wake_pulse_time, "s", f"Consumer({name!r}).wake_pulse_time"))

    @property
    def pulse_charge_uC(self) -> float:
        """Charge of the per-wake pulse, µC (µA·s)."""
        return self.wake_pulse_uA * self.wake_pulse_s

    def current_in(self, state: str) -> float:
        """Current in one state, µA."""
        if state not in _INDEX:
            raise DesignValueError("state", state, "one of " + ", ".join(STATES))
        return self.current_uA[_INDEX[state]]

    def currents_by_state(self) -> dict[str, float]:
        """Current in each state, µA, by state name."""
        return dict(zip(STATES, self.current_uA))


@dataclass(frozen=True, slots=True)
class CurrentProfile:
    """All consumers on the battery, and the supply voltage.

    Parameters
    ----------
    consumers : sequence of Consumer
        At least one, with unique names.
    supply_voltage_V : float
        Supply voltage used for energy figures, V.
    """

    consumers: tuple[Consumer, ...]
    supply_voltage_V: float

    def __post_init__(self) -> None:
        consumers = tuple(self.consumers)
        if not consumers or not all(isinstance(c, Consumer) for c in consumers):
            raise DesignValueError("CurrentProfile.consumers", self.consumers,
                                   "one or more turnkit.power.Consumer")
        names = [c.name for c in consumers]
        dup = [n for n in names if names.count(n) > 1]
        if dup:
            raise DesignValueError("CurrentProfile.consumers", dup[0], "unique names")
        v = self.supply_voltage_V
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
            raise DesignValueError("CurrentProfile.supply_voltage_V", v, "a finite number > 0",
                                   unit="V")
        object.__setattr__(self, "consumers", consumers)

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(c.name for c in self.consumers)

    def current_matrix_uA(self) -> np.ndarray:
        """Currents, µA, shape (consumers, states) in :data:`STATES` order."""
        return np.array([c.current_uA for c in self.consumers], dtype=float)

    def pulse_charges_uC(self) -> np.ndarray:
        """Per-wake pulse charge of each consumer, µC."""
        return np.array([c.pulse_charge_uC for c in self.consumers], dtype=float)

    def state_totals_uA(self) -> dict[str, float]:
        """Total current in each state, µA (pulses not included)."""
        return dict(zip(STATES, self.current_matrix_uA().sum(axis=0).tolist()))

    @property
    def peak_current_mA(self) -> float:
        """Largest total current, mA: the busiest state, plus every per-wake
        pulse on top of the busiest wake state (a safe upper bound)."""
        totals = self.current_matrix_uA().sum(axis=0)
        wake_peak = max(totals[k] for k in _WAKE_STATES) + sum(
            c.wake_pulse_uA for c in self.consumers)
        return max(float(totals.max()), float(wake_peak)) * 1e-3

    def scaled(self, factor: float, *, states: tuple[str, ...] | None = None,
               consumers: tuple[str, ...] | None = None) -> "CurrentProfile":
        """A copy with some currents multiplied by ``factor``.

        ``states`` and ``consumers`` select what is scaled (default: all);
        e.g. ``scaled(0.5, states=("asleep",))`` halves every sleep current.
        Per-wake pulses scale when ``states`` is None or includes ``"waking"``.
        """
        _finite_nonneg("factor", factor, "")
        pick_states = STATES if states is None else tuple(states)
        for s in pick_states:
            if s not in _INDEX:
                raise DesignValueError("states", s, "state names: " + ", ".join(STATES))
        pick = self.names if consumers is None else tuple(consumers)
        for n in pick:
            if n not in self.names:
                raise DesignValueError("consumers", n, "one of " + ", ".join(self.names))
        out = []
        for c in self.consumers:
            if c.name not in pick:
                out.append(c)
                continue
            cur = tuple(v * factor if s in pick_states else v for s, v in zip(STATES, c.current_uA))
            pulse = c.wake_pulse_uA * factor if "waking" in pick_states else c.wake_pulse_uA
            out.append(replace(c, current_uA=cur, wake_pulse_uA=pulse))
        return replace(self, consumers=tuple(out))


def _arr(name: str, value, unit: str, *, positive: bool = False) -> np.ndarray:
    a = np.asarray(value, dtype=float)
    ok = np.isfinite(a) & ((a > 0) if positive else (a >= 0))
    if not np.all(ok):
        bad = float(np.ravel(a[~ok])[0]) if a.ndim else float(a)
        raise DesignValueError(name, bad, "a finite number > 0" if positive
                               else "a finite number >= 0", unit=unit)
    return a


def state_fractions(
    *,
    poll_period_s,
    wake_time_s,
    settle_time_s,
    poll_time_s,
    fast_period_s=None,
    hold_s=0.0,
    motion_fraction=0.0,
    motion_events_per_day=0.0,
    tracking_fraction=0.0,
):
    """Fraction of time in each state, and wakes per second, for a schedule.

    All inputs broadcast as numpy arrays (vectorised curves).

    Parameters
    ----------
    poll_period_s : float or array
        Normal (slow) poll period, s.
    wake_time_s, settle_time_s : float or array
        Wake-up time and sensor settle time, s; together the ``waking`` state.
    poll_time_s : float or array
        Time to read the latches and update the count, s (``polling``).
    fast_period_s : float or array, optional
        Poll period of the fast part of an adaptive schedule, s. None for a
        fixed schedule (then the motion statistic does not change the power).
    hold_s : float or array, optional
        How long fast polling goes on after motion stops, s (adaptive only).
    motion_fraction : float, optional
        Fraction of the time the output moves while not tracking, in [0, 1].
    motion_events_per_day : float, optional
        Number of separate motions per day (each is followed by a hold).
    tracking_fraction : float, optional
        Fraction of the time spent actively tracking, in [0, 1].

    Returns
    -------
    fractions : numpy.ndarray
        Shape ``(7, *broadcast_shape)`` in :data:`STATES` order; sums to 1.
    wakes_per_s : numpy.ndarray
        Number of wakes per second.

    Notes
    -----
    Fast-polling share ``f_fast = min(motion_fraction + events_per_day * hold_s
    / 86400, 1 - tracking_fraction)`` (overlapping holds merge); slow share
    ``f_slow = 1 - tracking_fraction - f_fast``. Within a share polled every
    ``T``, ``waking`` takes ``(wake + settle) / T`` and the poll ``poll / T``.
    """
    inputs = (poll_period_s, wake_time_s, settle_time_s, poll_time_s, fast_period_s, hold_s, motion_fraction,
              motion_events_per_day, tracking_fraction)
    if all(v is None or type(v) in (float, int) for v in inputs):
        # Plain numbers (a sizing; sweeps and tolerance runs repeat the same schedule): worked out once.
        fractions, wakes = _scalar_state_fractions(*inputs)
        return fractions.copy(), wakes.copy()
    return _state_fractions(*inputs)


@lru_cache(maxsize=256)
def _scalar_state_fractions(*inputs):
    return _state_fractions(*inputs)


def _state_fractions(poll_period_s, wake_time_s, settle_time_s, poll_time_s, fast_period_s, hold_s, motion_fraction,
                     motion_events_per_day, tracking_fraction):
    T = _arr("poll_period_s", poll_period_s, "s", positive=True)
    tw = _arr("wake_time_s", wake_time_s, "s") + _arr("settle_time_s", settle_time_s, "s")
    tp = _arr("poll_time_s", poll_time_s, "s")
    f_track = _arr("tracking_fraction", tracking_fraction, "")
    f_motion = _arr("motion_fraction", motion_fraction, "")
    events = _arr("motion_events_per_day", motion_events_per_day, "1/day")
    hold = _arr("hold_s", hold_s, "s")
    if np.any(f_track > 1) or np.any(f_motion > 1) or np.any(f_track + f_motion > 1):
        raise DesignValueError("tracking_fraction + motion_fraction",
                               float(np.max(f_track + f_motion)), "in [0, 1]",
                               hint="they are shares of the same time")
    too_short = np.broadcast_arrays(T, tw + tp > T)
    if np.any(too_short[1]):
        raise DesignValueError("poll_period_s", float(too_short[0][too_short[1]][0]),
                               "at least wake_time_s + settle_time_s + poll_time_s", unit="s")
    if fast_period_s is None:
        if np.any(hold > 0):
            raise DesignValueError("hold_s", float(np.max(hold)), "0 for a fixed schedule",
                                   unit="s", hint="give fast_period_s for an adaptive schedule")
        Tf = T
        f_fast = np.zeros(())
    else:
        Tf = _arr("fast_period_s", fast_period_s, "s", positive=True)
        if np.any(tw + tp > Tf):
            raise DesignValueError("fast_period_s", float(np.min(Tf)),
                                   "at least wake_time_s + settle_time_s + poll_time_s",
                                   unit="s")
        f_fast = np.minimum(f_motion + events * hold / SECONDS_PER_DAY, 1.0 - f_track)
    f_slow = 1.0 - f_track - f_fast
    waking = f_slow * tw / T + f_fast * tw / Tf
    polling = f_slow * tp / T
    fast_polling = f_fast * tp / Tf
    wakes = f_slow / T + f_fast / Tf
    shape = np.broadcast_shapes(np.shape(waking), np.shape(polling), np.shape(fast_polling),
                                np.shape(f_track), np.shape(wakes))
    zero = np.zeros(shape)
    tracking = f_track + zero
    asleep = 1.0 - tracking - waking - polling - fast_polling
    fractions = np.stack([asleep, waking + zero, polling + zero, fast_polling + zero,
                          tracking, zero, zero])
    return fractions, wakes + zero


def _currents_from_fractions(profile: CurrentProfile, fractions, wakes_per_s):
    """Average current per consumer (µA), shape (consumers, ...)."""
    m = profile.current_matrix_uA()
    f = np.asarray(fractions, dtype=float)
    by_consumer = np.tensordot(m, f, axes=([1], [0]))
    pulses = profile.pulse_charges_uC()
    by_consumer = by_consumer + pulses.reshape((-1,) + (1,) * (by_consumer.ndim - 1)) * wakes_per_s
    return by_consumer


def average_current_uA(profile: CurrentProfile, **schedule):
    """Average current of a schedule, µA; vectorised over the schedule inputs.

    ``schedule`` takes the keyword arguments of :func:`state_fractions`.
    """
    fractions, wakes = state_fractions(**schedule)
    out = _currents_from_fractions(profile, fractions, wakes).sum(axis=0)
    return float(out) if out.ndim == 0 else out


@dataclass(frozen=True, slots=True)
class PowerBudget:
    """Where the charge goes: average current, its breakdown, and charge figures.

    Attributes
    ----------
    source : str
        ``"schedule"`` (analytic) or ``"simulation"`` (exact state times).
    consumer_names : tuple of str
    state_fraction : tuple of float
        Fraction of time in each state, :data:`STATES` order.
    current_by_state_uA : tuple of float
        Contribution of each state to the average current, µA (per-wake
        pulses under ``waking``); sums to ``average_current_uA``.
    current_by_consumer_uA : tuple of float
        Contribution of each consumer, µA; sums to ``average_current_uA``.
    average_current_uA : float
    duty_cycle : float
        Fraction of time awake (not asleep and not without power).
    wakes_per_day : float
    charge_per_wake_uC : float
        Mean charge drawn in the waking and (fast) polling states and pulses
        per wake, µC.
    supply_voltage_V : float
    peak_current_mA : float
        Largest current of the profile (see :attr:`CurrentProfile.peak_current_mA`).
    """

    source: str
    consumer_names: tuple[str, ...]
    state_fraction: tuple[float, ...]
    current_by_state_uA: tuple[float, ...]
    current_by_consumer_uA: tuple[float, ...]
    average_current_uA: float
    duty_cycle: float
    wakes_per_day: float
    charge_per_wake_uC: float
    supply_voltage_V: float
    peak_current_mA: float

    @property
    def charge_per_day_mAh(self) -> float:
        return self.average_current_uA * 1e-3 * 24.0

    @property
    def charge_per_day_C(self) -> float:
        return self.average_current_uA * 1e-6 * SECONDS_PER_DAY

    @property
    def charge_per_year_mAh(self) -> float:
        """Charge per 365.25-day year, mAh."""
        return self.average_current_uA * 1e-3 * HOURS_PER_YEAR

    @property
    def charge_per_year_C(self) -> float:
        return self.average_current_uA * 1e-6 * _SECONDS_PER_YEAR

    @property
    def energy_per_wake_uJ(self) -> float:
        """``charge_per_wake_uC * supply_voltage_V``, µJ."""
        return self.charge_per_wake_uC * self.supply_voltage_V

    @property
    def average_power_uW(self) -> float:
        return self.average_current_uA * self.supply_voltage_V

    def by_state(self) -> dict[str, float]:
        """Average-current contribution of each state, µA."""
        return dict(zip(STATES, self.current_by_state_uA))

    def by_consumer(self) -> dict[str, float]:
        """Average-current contribution of each consumer, µA."""
        return dict(zip(self.consumer_names, self.current_by_consumer_uA))

    def state_fractions(self) -> dict[str, float]:
        return dict(zip(STATES, self.state_fraction))

    @property
    def dominant_consumer(self) -> str:
        k = int(np.argmax(self.current_by_consumer_uA))
        return self.consumer_names[k]

    @property
    def dominant_state(self) -> str:
        return STATES[int(np.argmax(self.current_by_state_uA))]


def _budget(profile: CurrentProfile, fractions: np.ndarray, wakes_per_s: float,
            source: str) -> PowerBudget:
    m = profile.current_matrix_uA()
    by_consumer = _currents_from_fractions(profile, fractions, wakes_per_s)
    by_state = m.sum(axis=0) * fractions
    pulse_total = float(profile.pulse_charges_uC().sum()) * wakes_per_s
    by_state[_INDEX["waking"]] += pulse_total
    average = float(by_consumer.sum())
    wake_current = float(sum(by_state[k] for k in _WAKE_STATES))
    charge_per_wake = wake_current / wakes_per_s if wakes_per_s > 0 else 0.0
    duty = 1.0 - float(fractions[_INDEX["asleep"]]) - float(fractions[_INDEX["power_lost"]])
    return PowerBudget(
        source=source, consumer_names=profile.names,
        state_fraction=tuple(float(x) for x in fractions),
        current_by_state_uA=tuple(float(x) for x in by_state),
        current_by_consumer_uA=tuple(float(x) for x in by_consumer),
        average_current_uA=average, duty_cycle=max(duty, 0.0),
        wakes_per_day=float(wakes_per_s) * SECONDS_PER_DAY,
        charge_per_wake_uC=charge_per_wake, supply_voltage_V=profile.supply_voltage_V,
        peak_current_mA=profile.peak_current_mA,
    )


def _check_profile(profile) -> None:
    if not isinstance(profile, CurrentProfile):
        raise DesignValueError("profile", profile, "a turnkit.power.CurrentProfile")


def budget_from_schedule(
    profile: CurrentProfile,
    *,
    poll_period_s: float,
    wake_time_s: float,
    settle_time_s: float,
    poll_time_s: float,
    fast_period_s: float | None = None,
    hold_s: float = 0.0,
    motion_fraction: float = 0.0,
    motion_events_per_day: float = 0.0,
    tracking_fraction: float = 0.0,
) -> PowerBudget:
    """Power budget of a schedule given as plain floats (analytic).

    Parameters are those of :func:`state_fractions` (scalars here).

    Examples
    --------
    1 µA asleep, 1 mA awake for 100 µs every 10 ms gives 10.99 µA:

    >>> p = CurrentProfile((Consumer.sleep_and_awake("node", 1.0, 1000.0),), 3.0)
    >>> b = budget_from_schedule(p, poll_period_s=0.01, wake_time_s=0.0,
    ...                          settle_time_s=0.0, poll_time_s=100e-6)
    >>> round(b.average_current_uA, 6)
    10.99
    """
    _check_profile(profile)
    values = dict(poll_period_s=poll_period_s, wake_time_s=wake_time_s,
                  settle_time_s=settle_time_s, poll_time_s=poll_time_s,
                  fast_period_s=fast_period_s, hold_s=hold_s, motion_fraction=motion_fraction,
                  motion_events_per_day=motion_events_per_day,
                  tracking_fraction=tracking_fraction)
    for name, v in values.items():
        if v is not None and np.ndim(v) != 0:
            raise DesignValueError(name, v, "a single number here",
                                   hint="use life_vs_poll_period for sweeps")
    fractions, wakes = state_fractions(**values)
    return _budget(profile, fractions, float(wakes), "schedule")


def budget_from_state_times(
    profile: CurrentProfile,
    state_time_s: Mapping[str, float],
    duration_s: float,
    wake_count: int | float,
) -> PowerBudget:
    """Power budget from exact time in each state (e.g. a simulation).

    Parameters
    ----------
    profile : CurrentProfile
    state_time_s : mapping of str to float
        Seconds spent in each state (names from :data:`STATES`; missing
        states count as 0). Must add up to ``duration_s`` (1e-6 relative).
    duration_s : float
        Length of the timeline, s.
    wake_count : int
        Number of wakes in the timeline (each incurs the per-wake pulses).
    """
    _check_profile(profile)
    if isinstance(duration_s, bool) or not isinstance(duration_s, (int, float, np.number)) \
            or not math.isfinite(duration_s) or duration_s <= 0:
        raise DesignValueError("duration_s", duration_s, "a finite number > 0", unit="s")
    if not isinstance(state_time_s, Mapping):
        raise DesignValueError("state_time_s", state_time_s, "a mapping of state name to seconds")
    times = np.zeros(len(STATES))
    for name, t in state_time_s.items():
        if name not in _INDEX:
            raise DesignValueError("state_time_s", name, "keys from: " + ", ".join(STATES))
        times[_INDEX[name]] = _finite_nonneg(f"state_time_s[{name!r}]", t, "s")
    total = float(times.sum())
    if abs(total - duration_s) > 1e-6 * duration_s:
        raise DesignValueError("sum(state_time_s)", total, f"equal to duration_s = {duration_s}",
                               unit="s", hint="every second of the timeline needs a state")
    wakes = _finite_nonneg("wake_count", wake_count, "")
    return _budget(profile, times / total, wakes / float(duration_s), "simulation")


def budget_from_simulation(profile: CurrentProfile, simulation) -> PowerBudget:
    """Power budget from a simulation result (exact state times).

    ``simulation`` is any object with ``state_time_s`` (mapping of state
    name to seconds), ``duration_s`` and ``wake_count`` attributes.
    """
    missing = [a for a in ("state_time_s", "duration_s", "wake_count")
               if not hasattr(simulation, a)]
    if missing:
        raise DesignValueError("simulation", type(simulation).__name__,
                               "an object with state_time_s, duration_s and wake_count",
                               hint=f"missing: {', '.join(missing)}")
    return budget_from_state_times(profile, simulation.state_time_s, simulation.duration_s,
                                   simulation.wake_count)


@dataclass(frozen=True, slots=True)
class QuiescentCheck:
    """Pass/fail of the average current against a host's quiescent budget.

    Attributes
    ----------
    passes : bool
    average_current_uA, budget_uA : float
    margin_uA : float
        ``budget_uA - average_current_uA`` (negative when it fails).
    used_fraction : float
        ``average_current_uA / budget_uA``.
    """

    passes: bool
    average_current_uA: float
    budget_uA: float
    margin_uA: float
    used_fraction: float


def check_quiescent_budget(budget: PowerBudget | float, budget_uA: float) -> QuiescentCheck:
    """Host-supply mode: does the average current fit the quiescent budget?

    Parameters
    ----------
    budget : PowerBudget or float
        A budget, or an average current in µA.
    budget_uA : float
        Largest average current the host allows while it is off, µA.
    """
    i = budget.average_current_uA if isinstance(budget, PowerBudget) else \
        _finite_nonneg("average_current_uA", budget, "uA")
    if isinstance(budget_uA, bool) or not isinstance(budget_uA, (int, float)) \
            or not math.isfinite(budget_uA) or budget_uA <= 0:
        raise DesignValueError("budget_uA", budget_uA, "a finite number > 0", unit="uA")
    return QuiescentCheck(passes=i <= budget_uA, average_current_uA=i, budget_uA=float(budget_uA),
                          margin_uA=float(budget_uA) - i, used_fraction=i / float(budget_uA))


def _frozen(a) -> np.ndarray:
    a = np.array(a, dtype=a.dtype if isinstance(a, np.ndarray) else None)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, slots=True)
class LifeCurve:
    """Battery life against the poll period (arrays are read-only).

    Attributes
    ----------
    poll_period_s, average_current_uA, life_years : numpy.ndarray
    allowed : numpy.ndarray of bool
        True where the poll period is no longer than the longest allowed.
    max_allowed_poll_period_s : float
        ``inf`` when no limit was given.
    life_at_max_allowed_years : float
        Life exactly at the longest allowed period (``nan`` without a limit).
    shelf_life_years : float
        Shelf life of the chemistry, for a reference line.
    warnings : tuple of str
        Pulse over the battery's capability, life beyond shelf life.
    cautions : tuple of str
        The battery's safety cautions (battery events, coin cells, lithium).
    """

    poll_period_s: np.ndarray
    average_current_uA: np.ndarray
    life_years: np.ndarray
    allowed: np.ndarray
    max_allowed_poll_period_s: float
    life_at_max_allowed_years: float
    shelf_life_years: float
    warnings: tuple[str, ...] = ()
    cautions: tuple[str, ...] = ()


@dataclass(frozen=True, slots=True)
class AdaptiveLifeCurve:
    """Battery life of adaptive schedules over fast period and hold time.

    Attributes
    ----------
    fast_period_s : numpy.ndarray, shape (n_fast,)
    hold_s : numpy.ndarray, shape (n_hold,)
    average_current_uA, life_years : numpy.ndarray, shape (n_fast, n_hold)
    allowed : numpy.ndarray of bool, shape (n_fast,)
        True where the fast period is no longer than the longest allowed.
    poll_period_s : float
        The slow poll period.
    fixed_life_years : float
        Life of a fixed schedule polling at the longest allowed period
        (``nan`` without a limit): what the adaptive schedule must beat.
    max_allowed_poll_period_s, shelf_life_years : float
    warnings, cautions : tuple of str
        As in :class:`LifeCurve`.
    """

    fast_period_s: np.ndarray
    hold_s: np.ndarray
    average_current_uA: np.ndarray
    life_years: np.ndarray
    allowed: np.ndarray
    poll_period_s: float
    fixed_life_years: float
    max_allowed_poll_period_s: float
    shelf_life_years: float
    warnings: tuple[str, ...] = ()
    cautions: tuple[str, ...] = ()


def _curve_findings(profile, battery, life, current_uA, temperature_C):
    found = _battery_findings(battery, life, current_uA, profile.peak_current_mA,
                              temperature_C, False)
    return {"warnings": tuple(found), "cautions": battery.cautions}


def _life_array(battery, current_uA, temperature_C, usable_fraction):
    tf, s = _derating(battery, temperature_C, usable_fraction, None, None)
    c_nom = battery.capacity_mAh
    return life_from_capacity_years(c_nom * tf * usable_fraction, c_nom, s, current_uA)


def _check_range(lo_name, lo, hi_name, hi, points, points_name):
    _arr(lo_name, lo, "s", positive=True)
    _arr(hi_name, hi, "s", positive=True)
    if hi < lo:
        raise DesignValueError(hi_name, hi, f">= {lo_name} ({lo} s)", unit="s")
    if isinstance(points, bool) or not isinstance(points, int) or points < 2:
        raise DesignValueError(points_name, points, "an integer >= 2")


def _check_limit(max_allowed_poll_period_s) -> float:
    if max_allowed_poll_period_s is None:
        return math.inf
    return float(_arr("max_allowed_poll_period_s", max_allowed_poll_period_s, "s",
                      positive=True))


def life_vs_poll_period(
    profile: CurrentProfile,
    battery: Cell | Pack,
    *,
    poll_period_min_s: float,
    poll_period_max_s: float,
    wake_time_s: float,
    settle_time_s: float,
    poll_time_s: float,
    points: int = 100,
    max_allowed_poll_period_s: float | None = None,
    fast_period_s: float | None = None,
    hold_s: float = 0.0,
    motion_fraction: float = 0.0,
    motion_events_per_day: float = 0.0,
    tracking_fraction: float = 0.0,
    temperature_C: float = 20.0,
    usable_fraction: float = 1.0,
) -> LifeCurve:
    """Life against poll period, log-spaced, in one vectorised pass.

    Parameters
    ----------
    profile : CurrentProfile
    battery : Cell or Pack
    poll_period_min_s, poll_period_max_s : float
        Range of the sweep, s (log-spaced, ``points`` values).
    wake_time_s, settle_time_s, poll_time_s : float
        As in :func:`state_fractions`, s.
    max_allowed_poll_period_s : float, optional
        Longest poll period that still follows the fastest motion that can
        happen while asleep (from the gear train and the required back-drive
        speed), s.
    fast_period_s, hold_s, motion_fraction, motion_events_per_day, tracking_fraction
        As in :func:`state_fractions`.
    temperature_C, usable_fraction
        As in :func:`turnkit.battery.estimate_life`.
    """
    _check_profile(profile)
    _check_range("poll_period_min_s", poll_period_min_s, "poll_period_max_s",
                 poll_period_max_s, points, "points")
    limit = _check_limit(max_allowed_poll_period_s)
    periods = np.geomspace(poll_period_min_s, poll_period_max_s, points)
    schedule = dict(wake_time_s=wake_time_s, settle_time_s=settle_time_s,
                    poll_time_s=poll_time_s, fast_period_s=fast_period_s, hold_s=hold_s,
                    motion_fraction=motion_fraction,
                    motion_events_per_day=motion_events_per_day,
                    tracking_fraction=tracking_fraction)
    current = average_current_uA(profile, poll_period_s=periods, **schedule)
    life = _life_array(battery, current, temperature_C, usable_fraction)
    if math.isfinite(limit):
        at_limit = float(_life_array(battery, average_current_uA(
            profile, poll_period_s=limit, **schedule), temperature_C, usable_fraction))
    else:
        at_limit = math.nan
    return LifeCurve(
        poll_period_s=_frozen(periods), average_current_uA=_frozen(current),
        life_years=_frozen(life), allowed=_frozen(periods <= limit),
        max_allowed_poll_period_s=limit, life_at_max_allowed_years=at_limit,
        shelf_life_years=battery.shelf_life_years,
        **_curve_findings(profile, battery, life, current, temperature_C),
    )


def life_vs_adaptive_schedule(
    profile: CurrentProfile,
    battery: Cell | Pack,
    *,
    poll_period_s: float,
    fast_period_min_s: float,
    fast_period_max_s: float,
    hold_min_s: float,
    hold_max_s: float,
    wake_time_s: float,
    settle_time_s: float,
    poll_time_s: float,
    motion_fraction: float,
    motion_events_per_day: float,
    fast_points: int = 40,
    hold_points: int = 40,
    max_allowed_poll_period_s: float | None = None,
    tracking_fraction: float = 0.0,
    temperature_C: float = 20.0,
    usable_fraction: float = 1.0,
) -> AdaptiveLifeCurve:
    """Life of adaptive schedules over a log-spaced grid of fast period and hold.

    The slow period ``poll_period_s`` is fixed. ``allowed`` marks fast
    periods no longer than ``max_allowed_poll_period_s``; the slow period
    must still catch the onset of motion, which only a simulation of the
    counter against the motion can confirm.
    """
    _check_profile(profile)
    _check_range("fast_period_min_s", fast_period_min_s, "fast_period_max_s",
                 fast_period_max_s, fast_points, "fast_points")
    _check_range("hold_min_s", hold_min_s, "hold_max_s", hold_max_s, hold_points, "hold_points")
    limit = _check_limit(max_allowed_poll_period_s)
    fast = np.geomspace(fast_period_min_s, fast_period_max_s, fast_points)
    hold = np.geomspace(hold_min_s, hold_max_s, hold_points)
    common = dict(wake_time_s=wake_time_s, settle_time_s=settle_time_s,
                  poll_time_s=poll_time_s, motion_fraction=motion_fraction,
                  motion_events_per_day=motion_events_per_day,
                  tracking_fraction=tracking_fraction)
    current = average_current_uA(profile, poll_period_s=poll_period_s,
                                 fast_period_s=fast[:, None], hold_s=hold[None, :], **common)
    life = _life_array(battery, current, temperature_C, usable_fraction)
    if math.isfinite(limit):
        fixed_current = average_current_uA(profile, poll_period_s=limit, **common)
        fixed = float(_life_array(battery, fixed_current, temperature_C, usable_fraction))
    else:
        fixed = math.nan
    return AdaptiveLifeCurve(
        fast_period_s=_frozen(fast), hold_s=_frozen(hold), average_current_uA=_frozen(current),
        life_years=_frozen(life), allowed=_frozen(fast <= limit), poll_period_s=float(poll_period_s),
        fixed_life_years=fixed, max_allowed_poll_period_s=limit,
        shelf_life_years=battery.shelf_life_years,
        **_curve_findings(profile, battery, life, current, temperature_C),
    )


# ---------------------------------------------------------------- driven moves


@dataclass(frozen=True, slots=True)
class MoveEnergy:
    """Charge and energy of the motor's driven moves.

    Attributes
    ----------
    moves_per_day : float
    motor_turns_per_move : float
        Motor turns over one move's stroke.
    time_per_move_s : float
        Motor turns divided by the motor speed, s (acceleration neglected).
    output_work_per_move_J : float
        Load times stroke at the output, J.
    motor_work_per_move_J : float
        Output work divided by the gear train's forward efficiency, J.
    motor_torque_Nm : float
        Torque at the motor shaft while driving the load, N·m.
    motor_current_mA : float
        Motor current while driving, mA (given, or from the motor constants).
    charge_per_move_C : float
        ``motor_current * time_per_move``, C.
    electrical_energy_per_move_J : float
        Charge per move times the supply voltage, J.
    motor_efficiency : float
        Motor shaft work over electrical energy; above 1 means the given
        current cannot drive this load through this train.
    charge_per_day_mAh : float
    tracking_fraction : float
        Share of the day spent driving (the electronics track meanwhile).
    """

    moves_per_day: float
    motor_turns_per_move: float
    time_per_move_s: float
    output_work_per_move_J: float
    motor_work_per_move_J: float
    motor_torque_Nm: float
    motor_current_mA: float
    charge_per_move_C: float
    electrical_energy_per_move_J: float
    motor_efficiency: float
    charge_per_day_mAh: float
    tracking_fraction: float

    @property
    def average_current_uA(self) -> float:
        """Motor charge per day spread over the day, µA."""
        return self.charge_per_day_mAh / 24.0 * 1e3

    def consumer(self, name: str = "motor") -> Consumer:
        """The motor as a :class:`Consumer` drawing its current only while tracking."""
        return Consumer(name, {"asleep": 0.0, "waking": 0.0, "polling": 0.0,
                               "tracking": self.motor_current_mA * 1e3})


def move_energy(
    *,
    moves_per_day: float,
    motor_turns_per_move: float,
    output_work_per_move_J: float,
    gear_efficiency: float,
    motor_speed_rpm: float,
    supply_voltage_V: float,
    motor_current_mA: float | None = None,
    torque_constant_Nm_per_A: float | None = None,
    no_load_current_mA: float = 0.0,
) -> MoveEnergy:
    """Charge and energy per driven move and per day.

    Parameters
    ----------
    moves_per_day : float
        Driven moves per day (>= 0).
    motor_turns_per_move : float
        Motor turns over one move, turns (> 0).
    output_work_per_move_J : float
        Load force times stroke (linear) or load torque times angle in radians
        (rotary) at the output, J (>= 0).
    gear_efficiency : float
        Forward efficiency of the gear train, in (0, 1].
    motor_speed_rpm : float
        Motor speed while driving, rpm (> 0).
    supply_voltage_V : float
        Battery voltage the motor runs from, V.
    motor_current_mA : float, optional
        Measured or rated motor current while driving this load, mA.
    torque_constant_Nm_per_A, no_load_current_mA : float, optional
        Motor constants: ``I = I_0 + T_motor / k_t`` (give these or
        ``motor_current_mA``).

    Returns
    -------
    MoveEnergy

    Notes
    -----
    Motor shaft work ``W_m = W_out / eta``; shaft torque
    ``T_m = W_m / (2 pi N)``; time per move ``t = N / (n / 60)``; charge
    ``Q = I t`` (derived, shown in docs/power.md).

    Examples
    --------
    A 100 N load over 50 mm (5 J) through a 50 % train at 60 rpm for 100 motor
    turns (100 s), 0.01 N·m/A motor constant:

    >>> m = move_energy(moves_per_day=1, motor_turns_per_move=100.0, output_work_per_move_J=5.0,
    ...                 gear_efficiency=0.5, motor_speed_rpm=60.0, supply_voltage_V=3.0,
    ...                 torque_constant_Nm_per_A=0.01)
    >>> round(m.motor_current_mA, 3), round(m.charge_per_move_C, 3)
    (1591.549, 159.155)
    """
    n = _finite_nonneg("moves_per_day", moves_per_day, "1/day")
    turns = _finite_nonneg("motor_turns_per_move", motor_turns_per_move, "turn")
    work = _finite_nonneg("output_work_per_move_J", output_work_per_move_J, "J")
    eta = _finite_nonneg("gear_efficiency", gear_efficiency, "")
    if not 0 < eta <= 1:
        raise DesignValueError("gear_efficiency", eta, "in (0, 1]")
    rpm = _finite_nonneg("motor_speed_rpm", motor_speed_rpm, "rpm")
    v = _finite_nonneg("supply_voltage_V", supply_voltage_V, "V")
    if rpm <= 0:
        raise DesignValueError("motor_speed_rpm", rpm, "a finite number > 0", unit="rpm")
    if turns <= 0:
        raise DesignValueError("motor_turns_per_move", turns, "a finite number > 0", unit="turn")
    motor_work = work / eta
    torque = motor_work / (2.0 * math.pi * turns)
    if (motor_current_mA is None) == (torque_constant_Nm_per_A is None):
        raise DesignValueError("motor_current_mA", motor_current_mA,
                               "given, or else the torque constant (exactly one of the two)", unit="mA")
    if motor_current_mA is not None:
        current = _finite_nonneg("motor_current_mA", motor_current_mA, "mA")
    else:
        kt = _finite_nonneg("torque_constant_Nm_per_A", torque_constant_Nm_per_A, "N*m/A")
        if kt <= 0:
            raise DesignValueError("torque_constant_Nm_per_A", kt, "a finite number > 0", unit="N*m/A")
        current = _finite_nonneg("no_load_current_mA", no_load_current_mA, "mA") + torque / kt * 1e3
    t_move = turns / (rpm / 60.0)
    if n * t_move > SECONDS_PER_DAY:
        raise DesignValueError("moves_per_day", n, f"at most {SECONDS_PER_DAY / t_move:.4g}",
                               unit="1/day", hint=f"each move takes {t_move:.4g} s at this motor speed")
    charge = current * 1e-3 * t_move
    energy = charge * v
    return MoveEnergy(
        moves_per_day=n, motor_turns_per_move=turns, time_per_move_s=t_move,
        output_work_per_move_J=work, motor_work_per_move_J=motor_work, motor_torque_Nm=torque,
        motor_current_mA=current, charge_per_move_C=charge, electrical_energy_per_move_J=energy,
        motor_efficiency=motor_work / energy if energy > 0 else (math.inf if motor_work > 0 else 0.0),
        charge_per_day_mAh=charge * n / 3.6, tracking_fraction=n * t_move / SECONDS_PER_DAY)


def time_to_flat_days(usable_capacity_mAh: float, current_uA: float,
                      self_discharge_mAh_per_year: float = 0.0) -> float:
    """Days until a battery's usable capacity is gone at a steady current.

    ``C_use / (I_mA * 24 + self_discharge / 365.25)``; ``inf`` when nothing drains it.
    """
    c = _finite_nonneg("usable_capacity_mAh", usable_capacity_mAh, "mAh")
    i = _finite_nonneg("current_uA", current_uA, "uA")
    sd = _finite_nonneg("self_discharge_mAh_per_year", self_discharge_mAh_per_year, "mAh/year")
    drain = i * 1e-3 * 24.0 + sd / 365.25
    return c / drain if drain > 0 else math.inf
