"""The quarter-turn counter: modes, decoding rule and a pure transition function.

Two Hall latches 90° apart on the motor shaft give a 2-bit reflected Gray code
that runs 00 → 01 → 11 → 10 → 00 once per motor turn (one bit changes per
quarter-turn). Each time the electronics read the latches, the change of the
quadrant index since the previous read is decoded as

======================  ==========  ===========================================
(i_new − i_old) mod 4   decoded     meaning
======================  ==========  ===========================================
0                       0           no step (or a silent 4, 8, … quarter jump)
1                       +1          one step forward (or a silent −3, +5, …)
3                       −1          one step backward (or a silent +3, −5, …)
2                       ambiguous   two quarters, direction unknown
======================  ==========  ===========================================

What the counter does with an ambiguous step is a policy
(:class:`AmbiguousPolicy`); what it does when the count leaves its range is
another (:class:`OverflowPolicy`). The modes of the electronics and every
allowed transition are listed as data in :data:`TRANSITIONS`; :func:`step`
implements exactly that table and nothing else, so it can be replayed and
tested event by event. The fast simulation in :mod:`turnkit.simulation` applies
the same rules to whole arrays of readings.

Caution: a wrong count moves an actuator to the wrong place, sometimes with no
error shown (three quarter-steps between reads decode as one step back). Treat
these models as design estimates; where position feeds a safety function,
follow the applicable functional-safety standards, local codes and licensed
practice, and re-home after any fault or battery event.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from enum import Enum
from fractions import Fraction

import numpy as np

from .errors import DesignValueError
from .latches import GRAY_SEQUENCE, gray_to_quadrant, quadrant_to_gray

__all__ = [
    "CounterMode",
    "AmbiguousPolicy",
    "OverflowPolicy",
    "EventKind",
    "CounterEvent",
    "CounterSettings",
    "CounterState",
    "Transition",
    "TRANSITIONS",
    "transition_rows",
    "AMBIGUOUS",
    "GRAY_SEQUENCE",
    "gray_to_index",
    "index_to_gray",
    "decode_step",
    "decode_index_changes",
    "apply_count",
    "step",
    "quarter_turns_to_motor_turns",
    "quarter_turns_to_output",
    "counter_range_output",
]

#: Marker returned by the decoding rule for a two-quarter (ambiguous) change.
AMBIGUOUS = 2

# The 2-bit reflected Gray code (00, 01, 11, 10) and its conversions live with the latches
# that produce it; the counter takes any integer code modulo 4.
# (i_new - i_old) mod 4 -> decoded step; 2 is the ambiguous marker.
_DECODE_TABLE = np.array([0, 1, AMBIGUOUS, -1], dtype=np.int64)


class CounterMode(str, Enum):
    """What the counter electronics are doing."""

    ASLEEP = "asleep"
    """Sleeping between reads; only the wake timer runs."""
    WAKING = "waking"
    """Wake-up and settle time before the latches can be read."""
    POLLING = "polling"
    """Reading the latches on the slow schedule."""
    FAST_POLLING = "fast_polling"
    """Reading the latches on the fast schedule (hold time after motion was seen)."""
    TRACKING = "tracking"
    """Motor driven, sensor on: every latch edge is counted as it happens."""
    FAULT = "fault"
    """An ambiguous step or an overflow fault was seen: position not trusted, re-homing needed."""
    POWER_LOST = "power_lost"
    """Supply below the electronics' minimum: the count is gone."""


class AmbiguousPolicy(str, Enum):
    """What the counter does when a read shows a two-quarter change."""

    FLAG_AND_HOLD = "flag_and_hold"
    """Keep the count, enter :attr:`CounterMode.FAULT` (re-homing needed)."""
    GUESS_LAST_DIRECTION = "guess_last_direction"
    """Add two quarters in the direction of the last single step (forward if none yet)."""
    FLAG_AND_CONTINUE = "flag_and_continue"
    """Count the read as ambiguous, keep the count as it was and keep polling (no fault): a
    design review can count every ambiguous read over a long run without guessing."""


class OverflowPolicy(str, Enum):
    """What the counter does when a step would leave its range."""

    WRAP = "wrap"
    """Wrap around modulo 2**width_bits (the position is then off by the range)."""
    SATURATE = "saturate"
    """Stay at the limit; steps beyond it are lost."""
    FAULT = "fault"
    """Stay at the limit and enter :attr:`CounterMode.FAULT`."""


class EventKind(str, Enum):
    """Inputs to :func:`step`."""

    WAKE_TIMER = "wake_timer"
    SETTLED = "settled"
    LATCH_READ = "latch_read"
    DRIVE_START = "drive_start"
    LATCH_EDGE = "latch_edge"
    DRIVE_STOP = "drive_stop"
    REHOMED = "rehomed"
    SUPPLY_LOW = "supply_low"
    SUPPLY_RESTORED = "supply_restored"


@dataclass(frozen=True, slots=True)
class CounterEvent:
    """One input to the counter.

    Parameters
    ----------
    kind : EventKind
        What happened.
    time_s : float
        When it happened, s. Used for the fast-polling hold.
    latch_code : int, optional
        The 2-bit Gray code read from the latches (0..3), for ``latch_read``,
        ``latch_edge``, ``drive_start``, ``rehomed`` and ``supply_restored``.
    count : int, optional
        The known count after re-homing, quarter-turns (``rehomed`` only).
    """

    kind: EventKind
    time_s: float = 0.0
    latch_code: int | None = None
    count: int | None = None

    def __post_init__(self):
        object.__setattr__(self, "kind", EventKind(self.kind))
        if self.latch_code is not None and self.latch_code not in (0, 1, 2, 3):
            raise DesignValueError("CounterEvent.latch_code", self.latch_code, "a 2-bit code 0..3")


@dataclass(frozen=True, slots=True)
class CounterSettings:
    """Counter width, sign and the two policies.

    Parameters
    ----------
    width_bits : int
        Counter width in bits, 2..63.
    signed : bool
        Two's-complement range [−2**(w−1), 2**(w−1) − 1] if True, else [0, 2**w − 1].
    overflow_policy : OverflowPolicy or str
        "wrap", "saturate" or "fault".
    ambiguous_policy : AmbiguousPolicy or str
        "flag_and_hold", "guess_last_direction" or "flag_and_continue".
    start_count : int
        The count at the start (after homing), quarter-turns.
    hold_s : float
        How long the electronics poll fast after motion was seen, s (used by
        :func:`step`; the simulation takes it from the schedule).
    kept_events : int
        The simulation keeps the times and true steps of at most this many
        ambiguous reads, as many silent ones and as many entries of the count
        error history (the first ones); it counts all of them. Bounds the
        memory of a run whatever the number of events.
    """

    width_bits: int = 16
    signed: bool = True
    overflow_policy: OverflowPolicy = OverflowPolicy.WRAP
    ambiguous_policy: AmbiguousPolicy = AmbiguousPolicy.FLAG_AND_HOLD
    start_count: int = 0
    hold_s: float = 0.0
    kept_events: int = 100_000

    def __post_init__(self):
        if isinstance(self.width_bits, bool) or not isinstance(self.width_bits, (int, np.integer)) \
                or not 2 <= self.width_bits <= 63:
            raise DesignValueError("CounterSettings.width_bits", self.width_bits, "an integer in [2, 63]",
                                   unit="bit")
        object.__setattr__(self, "width_bits", int(self.width_bits))
        try:
            object.__setattr__(self, "overflow_policy", OverflowPolicy(self.overflow_policy))
        except ValueError:
            raise DesignValueError("CounterSettings.overflow_policy", self.overflow_policy,
                                   "one of 'wrap', 'saturate', 'fault'") from None
        try:
            object.__setattr__(self, "ambiguous_policy", AmbiguousPolicy(self.ambiguous_policy))
        except ValueError:
            raise DesignValueError("CounterSettings.ambiguous_policy", self.ambiguous_policy,
                                   "one of 'flag_and_hold', 'guess_last_direction', 'flag_and_continue'"
                                   ) from None
        if not isinstance(self.start_count, (int, np.integer)) or isinstance(self.start_count, bool) \
                or not self.min_count <= self.start_count <= self.max_count:
            raise DesignValueError("CounterSettings.start_count", self.start_count,
                                   f"an integer in [{self.min_count}, {self.max_count}]", unit="quarter-turn")
        object.__setattr__(self, "start_count", int(self.start_count))
        if not (isinstance(self.hold_s, (int, float)) and 0.0 <= self.hold_s < float("inf")):
            raise DesignValueError("CounterSettings.hold_s", self.hold_s, "a finite number >= 0", unit="s")
        if isinstance(self.kept_events, bool) or not isinstance(self.kept_events, (int, np.integer)) \
                or self.kept_events < 0:
            raise DesignValueError("CounterSettings.kept_events", self.kept_events, "an integer >= 0")
        object.__setattr__(self, "kept_events", int(self.kept_events))

    @property
    def min_count(self) -> int:
        """Smallest count the counter holds, quarter-turns."""
        return -(1 << (self.width_bits - 1)) if self.signed else 0

    @property
    def max_count(self) -> int:
        """Largest count the counter holds, quarter-turns."""
        return (1 << (self.width_bits - 1)) - 1 if self.signed else (1 << self.width_bits) - 1

    @property
    def range_quarter_turns(self) -> int:
        """Number of distinct counts, 2**width_bits."""
        return 1 << self.width_bits


@dataclass(frozen=True, slots=True)
class CounterState:
    """The counter's full state; :func:`step` returns a new one.

    Parameters
    ----------
    mode : CounterMode
        What the electronics are doing.
    count : int
        Counter value, quarter-turns.
    quadrant_index : int or None
        Quadrant index 0..3 at the last read; None when unknown (after power loss).
    last_direction : int
        +1 or −1 for the last single step seen, 0 before any.
    fast_until_s : float
        The fast-polling hold ends at this time, s (−inf when not holding).
    ambiguous_count, overflow_count : int
        Events seen so far.
    """

    mode: CounterMode = CounterMode.ASLEEP
    count: int = 0
    quadrant_index: int | None = 0
    last_direction: int = 0
    fast_until_s: float = float("-inf")
    ambiguous_count: int = 0
    overflow_count: int = 0

    def __post_init__(self):
        object.__setattr__(self, "mode", CounterMode(self.mode))
        if self.quadrant_index is not None and self.quadrant_index not in (0, 1, 2, 3):
            raise DesignValueError("CounterState.quadrant_index", self.quadrant_index, "0..3 or None")
        if self.last_direction not in (-1, 0, 1):
            raise DesignValueError("CounterState.last_direction", self.last_direction, "-1, 0 or +1")

    @classmethod
    def homed(cls, settings: CounterSettings, latch_code: int = 0) -> "CounterState":
        """The state right after homing: asleep, count = ``settings.start_count``."""
        return cls(mode=CounterMode.ASLEEP, count=settings.start_count,
                   quadrant_index=int(gray_to_index(latch_code)))


@dataclass(frozen=True, slots=True)
class Transition:
    """One row of the transition table."""

    source: tuple[CounterMode, ...]
    event: EventKind
    guard: str
    target: CounterMode
    effect: str


_ANY_POWERED = tuple(m for m in CounterMode if m is not CounterMode.POWER_LOST)
_READING = (CounterMode.POLLING, CounterMode.FAST_POLLING)
_M = CounterMode
_E = EventKind

#: Every transition of the counter, as data (docs and summaries print it).
TRANSITIONS: tuple[Transition, ...] = (
    Transition((_M.ASLEEP,), _E.WAKE_TIMER, "", _M.WAKING, "one wake pulse; wake-up and settle time start"),
    Transition((_M.WAKING,), _E.SETTLED, "fast hold not expired", _M.FAST_POLLING, "read the latches"),
    Transition((_M.WAKING,), _E.SETTLED, "fast hold expired", _M.POLLING, "read the latches"),
    Transition(_READING, _E.LATCH_READ, "no change", _M.ASLEEP, "count kept"),
    Transition(_READING, _E.LATCH_READ, "one step, count stays in range", _M.ASLEEP,
               "count ±1; fast hold restarts"),
    Transition(_READING, _E.LATCH_READ, "ambiguous, policy flag_and_hold", _M.FAULT,
               "count held; position not trusted"),
    Transition(_READING, _E.LATCH_READ, "ambiguous, policy guess_last_direction", _M.ASLEEP,
               "count ±2 in the last direction; fast hold restarts"),
    Transition(_READING, _E.LATCH_READ, "ambiguous, policy flag_and_continue", _M.ASLEEP,
               "count kept; ambiguous read counted; fast hold restarts"),
    Transition(_READING, _E.LATCH_READ, "step leaves the range, policy wrap", _M.ASLEEP,
               "count wraps modulo 2**width_bits; overflow counted"),
    Transition(_READING, _E.LATCH_READ, "step leaves the range, policy saturate",
               _M.ASLEEP, "count stays at the limit; overflow counted"),
    Transition(_READING, _E.LATCH_READ, "step leaves the range, policy fault", _M.FAULT,
               "count stays at the limit; overflow counted"),
    Transition((_M.ASLEEP, _M.WAKING, _M.POLLING, _M.FAST_POLLING), _E.DRIVE_START, "", _M.TRACKING,
               "sensor on; the latch code read now is decoded like a poll"),
    Transition((_M.ASLEEP, _M.WAKING, _M.POLLING, _M.FAST_POLLING), _E.DRIVE_START,
               "the start read is ambiguous (flag_and_hold) or overflows (policy fault)", _M.FAULT,
               "count held; re-home before moving"),
    Transition((_M.TRACKING,), _E.LATCH_EDGE, "one step", _M.TRACKING, "count ±1 (range policy applies)"),
    Transition((_M.TRACKING,), _E.LATCH_EDGE, "overflow, policy fault", _M.FAULT,
               "count stays at the limit; overflow counted"),
    Transition((_M.TRACKING,), _E.LATCH_EDGE, "two quarters at once, policy flag_and_hold", _M.FAULT,
               "count held; position not trusted"),
    Transition((_M.TRACKING,), _E.LATCH_EDGE, "two quarters at once, policy guess_last_direction",
               _M.TRACKING, "count ±2 in the last direction"),
    Transition((_M.TRACKING,), _E.LATCH_EDGE, "two quarters at once, policy flag_and_continue",
               _M.TRACKING, "count kept; ambiguous read counted"),
    Transition((_M.TRACKING,), _E.DRIVE_STOP, "", _M.ASLEEP, "fast hold starts"),
    Transition((_M.FAULT,), _E.REHOMED, "", _M.ASLEEP, "count set to the homed value"),
    Transition(_ANY_POWERED, _E.SUPPLY_LOW, "", _M.POWER_LOST, "count lost"),
    Transition((_M.POWER_LOST,), _E.SUPPLY_RESTORED, "", _M.FAULT,
               "count restarts at start_count; re-homing needed"),
)


def transition_rows() -> list[dict[str, str]]:
    """The transition table as rows of plain strings (for summaries and docs).

    Each row has the keys ``from``, ``event``, ``when``, ``to`` and ``effect``.
    """
    return [{"from": ", ".join(m.value for m in t.source), "event": t.event.value,
             "when": t.guard or "always", "to": t.target.value, "effect": t.effect} for t in TRANSITIONS]


def gray_to_index(code):
    """Quadrant index 0..3 of a 2-bit Gray code (b1 = g1, b0 = g1 xor g0).

    Parameters
    ----------
    code : int or array of int
        Latch code, bit 1 = second latch, bit 0 = first latch.
    """
    return gray_to_quadrant(np.asarray(code, dtype=np.int64) & 3)


def index_to_gray(index):
    """2-bit Gray code of a quadrant index (any integer; taken modulo 4)."""
    return quadrant_to_gray(np.asarray(index, dtype=np.int64) & 3)


def decode_step(old_index: int, new_index: int) -> int:
    """Decode one read: +1, −1, 0 or :data:`AMBIGUOUS` (= 2).

    Parameters
    ----------
    old_index, new_index : int
        Quadrant indices (any integers; only their difference modulo 4 counts).
    """
    return int(_DECODE_TABLE[(int(new_index) - int(old_index)) & 3])


def decode_index_changes(true_steps):
    """Vectorised decoding of true quadrant changes between reads.

    Parameters
    ----------
    true_steps : array of int
        True signed change of the quarter-turn index between consecutive
        reads (the counter sees only its value modulo 4).

    Returns
    -------
    decoded : ndarray of int64
        +1, −1, 0, or :data:`AMBIGUOUS` (2) where ``ambiguous`` is True.
    ambiguous : ndarray of bool
        A two-quarter change modulo 4 (|true step| = 2, 6, …).
    silent : ndarray of bool
        Decoded as a single or no step but wrong (|true step| ≥ 3 and not ambiguous).
    """
    d = np.asarray(true_steps, dtype=np.int64)
    decoded = _DECODE_TABLE[d & 3]
    ambiguous = decoded == AMBIGUOUS
    silent = ~ambiguous & (decoded != d)
    return decoded, ambiguous, silent


def apply_count(count: int, delta: int, settings: CounterSettings) -> tuple[int, bool, bool]:
    """Add ``delta`` quarter-turns to ``count`` under the overflow policy.

    Returns
    -------
    new_count : int
    overflowed : bool
        The result left the range.
    fault : bool
        The policy is "fault" and the range was left.
    """
    lo, hi = settings.min_count, settings.max_count
    new = count + delta
    if lo <= new <= hi:
        return new, False, False
    policy = settings.overflow_policy
    if policy is OverflowPolicy.WRAP:
        return (new - lo) % settings.range_quarter_turns + lo, True, False
    limited = hi if new > hi else lo
    return limited, True, policy is OverflowPolicy.FAULT


def _counted(state: CounterState, delta: int, settings: CounterSettings, next_mode: CounterMode,
             **changes) -> CounterState:
    count, overflowed, fault = apply_count(state.count, delta, settings)
    return dataclasses.replace(
        state, count=count, overflow_count=state.overflow_count + overflowed,
        mode=CounterMode.FAULT if fault else next_mode, **changes)


def step(state: CounterState, event: CounterEvent, settings: CounterSettings) -> CounterState:
    """Apply one event to the counter and return the new state (pure).

    Events that the table has no row for in the current mode leave the state
    unchanged (e.g. a wake timer while tracking).

    Parameters
    ----------
    state : CounterState
    event : CounterEvent
    settings : CounterSettings

    Returns
    -------
    CounterState
    """
    m, k = state.mode, event.kind
    if k is EventKind.SUPPLY_LOW:
        if m is CounterMode.POWER_LOST:
            return state
        return dataclasses.replace(state, mode=CounterMode.POWER_LOST, quadrant_index=None,
                                   fast_until_s=float("-inf"))
    if m is CounterMode.POWER_LOST:
        if k is EventKind.SUPPLY_RESTORED:
            return dataclasses.replace(state, mode=CounterMode.FAULT, count=settings.start_count,
                                       quadrant_index=_index_of(event), last_direction=0)
        return state
    if m is CounterMode.FAULT:
        if k is EventKind.REHOMED:
            count = settings.start_count if event.count is None else int(event.count)
            if not settings.min_count <= count <= settings.max_count:
                raise DesignValueError("CounterEvent.count", count,
                                       f"in [{settings.min_count}, {settings.max_count}]", unit="quarter-turn")
            return dataclasses.replace(state, mode=CounterMode.ASLEEP, count=count,
                                       quadrant_index=_index_of(event), last_direction=0)
        return state
    if m is CounterMode.ASLEEP and k is EventKind.WAKE_TIMER:
        return dataclasses.replace(state, mode=CounterMode.WAKING)
    if m is CounterMode.WAKING and k is EventKind.SETTLED:
        fast = event.time_s <= state.fast_until_s
        return dataclasses.replace(state, mode=CounterMode.FAST_POLLING if fast else CounterMode.POLLING)
    if k is EventKind.DRIVE_START and m is not CounterMode.TRACKING:
        read = _read(state, event, settings, CounterMode.TRACKING, hold=False)
        return dataclasses.replace(read, mode=CounterMode.TRACKING) if read.mode is not CounterMode.FAULT \
            else read
    if m in (CounterMode.POLLING, CounterMode.FAST_POLLING) and k is EventKind.LATCH_READ:
        return _read(state, event, settings, CounterMode.ASLEEP, hold=True)
    if m is CounterMode.TRACKING and k is EventKind.LATCH_EDGE:
        new_index = _index_of(event)
        d = decode_step(state.quadrant_index, new_index)
        if d == AMBIGUOUS:
            # While tracking every edge is seen; two quarters at once means a
            # missed edge, handled like an ambiguous read.
            return _read(state, event, settings, CounterMode.TRACKING, hold=False)
        return _counted(state, d, settings, CounterMode.TRACKING, quadrant_index=new_index,
                        last_direction=d if d else state.last_direction)
    if m is CounterMode.TRACKING and k is EventKind.DRIVE_STOP:
        return dataclasses.replace(state, mode=CounterMode.ASLEEP, fast_until_s=event.time_s + settings.hold_s)
    return state


def _index_of(event: CounterEvent) -> int | None:
    return None if event.latch_code is None else int(gray_to_index(event.latch_code))


def _read(state: CounterState, event: CounterEvent, settings: CounterSettings, next_mode: CounterMode,
          hold: bool) -> CounterState:
    new_index = _index_of(event)
    if new_index is None:
        raise DesignValueError("CounterEvent.latch_code", None, "a 2-bit code 0..3 for a latch read")
    old = state.quadrant_index if state.quadrant_index is not None else new_index
    d = decode_step(old, new_index)
    hold_until = event.time_s + settings.hold_s if hold else state.fast_until_s
    if d == 0:
        return dataclasses.replace(state, mode=next_mode, quadrant_index=new_index)
    if d != AMBIGUOUS:
        return _counted(state, d, settings, next_mode, quadrant_index=new_index, last_direction=d,
                        fast_until_s=hold_until)
    ambiguous = state.ambiguous_count + 1
    if settings.ambiguous_policy is AmbiguousPolicy.FLAG_AND_HOLD:
        return dataclasses.replace(state, mode=CounterMode.FAULT, quadrant_index=new_index,
                                   ambiguous_count=ambiguous)
    if settings.ambiguous_policy is AmbiguousPolicy.FLAG_AND_CONTINUE:
        return dataclasses.replace(state, mode=next_mode, quadrant_index=new_index, ambiguous_count=ambiguous,
                                   fast_until_s=hold_until)
    guess = 2 * (state.last_direction or 1)
    return _counted(state, guess, settings, next_mode, quadrant_index=new_index,
                    ambiguous_count=ambiguous, fast_until_s=hold_until)


def quarter_turns_to_motor_turns(count):
    """Motor turns for a count of quarter-turns (count / 4)."""
    return np.asarray(count, dtype=np.float64) / 4.0


def quarter_turns_to_output(count, train):
    """Output travel for a count of quarter-turns, through a gear train.

    Parameters
    ----------
    count : int or array
        Quarter-turns of the motor.
    train : object
        Anything with ``travel_per_motor_turn`` (Fraction, output units per
        motor turn) and ``direction`` (+1/−1); e.g. :class:`turnkit.gears.GearTrain`.

    Returns
    -------
    float or ndarray
        Output travel in ``train.output_unit`` ("deg" or "mm").
    """
    per_quarter = Fraction(train.travel_per_motor_turn) / 4 * int(train.direction)
    return np.asarray(count, dtype=np.float64) * float(per_quarter)


def counter_range_output(settings: CounterSettings, train) -> float:
    """Output travel covered by the full counter range, in ``train.output_unit``."""
    return abs(float(quarter_turns_to_output(settings.range_quarter_turns, train)))
