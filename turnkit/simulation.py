"""Simulate the polled quarter-turn counter against the exact motion.

Truth is the signed number of quarter-boundary crossings of the continuous
motor angle: ``floor(angle/90°)`` now minus at the start. The counter sees
only the latch code (the quadrant index modulo 4) at each read and decodes it
with the rule of :mod:`turnkit.counter`.

Cost grows with the amount of motion, not with the length of the timeline:

* idle spans (no motion interval) are never polled one by one — the number of
  polls in them has a closed form, and so has the time in each state;
* inside motion intervals all poll instants of a batch of intervals are made
  at once, the profile is sampled at all of them in one call, and the
  quadrant changes are decoded and classified with array operations;
* on an adaptive schedule without jitter, whole bursts (slow reads until one
  sees a step, fast reads until the hold expires after the burst) are taken
  many at a time, and the fast reads of a constant-speed burst slow enough for
  the fast period follow from its speed without being sampled one by one;
* only rare events (a fault, an overflow, a burst that does not fit that
  pattern, a driven move, a power loss) are handled one at a time.

A 0.1 % motion duty over ten years at a 10 ms poll period is about 3·10⁷
decoded polls; see ``benchmarks/bench_counter.py``.

Caution: results are design estimates. A lost or wrong count moves an
actuator to the wrong place, sometimes silently; where position feeds a
safety function follow the applicable functional-safety standards, local
codes and licensed practice, and re-home after any fault or battery event.
"""

from __future__ import annotations

import math
import threading
from dataclasses import dataclass

import numpy as np

from .counter import (
    _DECODE_TABLE,
    AMBIGUOUS,
    AmbiguousPolicy,
    CounterMode,
    CounterSettings,
    apply_count,
    decode_index_changes,
    quarter_turns_to_output,
)
from .errors import DesignValueError
from .motion import BackDriveBursts, MotionProfile, merge_intervals
from .schedule import GRID_TOLERANCE, AdaptiveSchedule, FixedSchedule, grid_count, grid_index

__all__ = ["SimulationResult", "StepEvents", "simulate", "quadrant_index", "edge_index", "BOUNDARY_SNAP_QT"]

#: Switching points are taken 1e-9 quarter-turn (about 1e-7°) early, so that a
#: shaft sampled exactly on a boundary reads the same quadrant whatever the last
#: bit of floating-point rounding; this is far below any latch tolerance.
BOUNDARY_SNAP_QT = 1e-9

_STATES = tuple(m.value for m in CounterMode)

_RAMP = np.arange(1 << 16, dtype=np.float64)
_RAMP.flags.writeable = False


_MIN, _MAX = np.minimum.reduce, np.maximum.reduce
#: The decoding rule of :mod:`turnkit.counter` as a 4-entry int8 table, indexed by (step mod 4).
_DECODE_INT8 = _DECODE_TABLE.astype(np.int8)
_WORK = threading.local()


def _work_buffers(n: int) -> tuple[np.ndarray, ...]:
    """Four float64 work arrays of at least ``n`` elements, reused by every run in this thread.

    Reusing them keeps a chunk's large arrays out of the allocator: freeing
    and re-allocating several such arrays per chunk makes the C heap give the
    pages back and fault them in again, which costs more than the arithmetic.
    """
    bufs = getattr(_WORK, "buffers", None)
    if bufs is None or bufs[0].size < n:
        bufs = tuple(np.empty(n) for _ in range(4))
        _WORK.buffers = bufs
    return bufs


def _last_nonzero(a: np.ndarray) -> int:
    """Index of the last non-zero element of ``a``, or −1 (scans back in growing blocks)."""
    end, block = a.size, 64
    while end > 0:
        start = max(end - block, 0)
        nz = a[start:end].nonzero()[0]
        if nz.size:
            return start + int(nz[-1])
        end, block = start, block * 4
    return -1


def _ramp(n: int) -> np.ndarray:
    """0, 1, …, n−1 as float64 (a read-only view of a cached array)."""
    global _RAMP
    if n > _RAMP.size:
        _RAMP = np.arange(max(n, 2 * _RAMP.size), dtype=np.float64)
        _RAMP.flags.writeable = False
    return _RAMP[:n]


def quadrant_index(angle_deg) -> np.ndarray:
    """Unbounded quadrant index floor(angle/90°) of motor angles (int64)."""
    a = np.asarray(angle_deg, dtype=np.float64)
    return np.floor(a * (1.0 / 90.0) + BOUNDARY_SNAP_QT).astype(np.int64)


def _edge_offsets(edge_shifts_deg) -> np.ndarray | None:
    """Per-edge offsets in turns for :func:`edge_index`, or None for ideal edges."""
    if edge_shifts_deg is None:
        return None
    from .latches import _edge_shifts

    s = _edge_shifts(edge_shifts_deg, "simulate.edge_shifts_deg")
    if s.shape != (4,):
        raise DesignValueError("simulate.edge_shifts_deg", edge_shifts_deg, "four shifts (one unit)", unit="deg")
    if not np.any(s):
        return None
    return (np.arange(4) * 90.0 + s) / 360.0 - 0.25 * BOUNDARY_SNAP_QT


def _edge_index_into(a: np.ndarray, offsets: np.ndarray) -> np.ndarray:
    """In place: motor angles (deg) -> number of the unit's edges passed, as float64."""
    turns = a * (1.0 / 360.0)
    np.subtract(turns, offsets[0], out=a)
    np.floor(a, out=a)
    tmp = np.empty_like(a)
    for off in offsets[1:]:
        np.subtract(turns, off, out=tmp)
        np.floor(tmp, out=tmp)
        a += tmp
    a += 3.0
    return a


def _into(values: np.ndarray, out: np.ndarray) -> np.ndarray:
    """``values`` copied into ``out`` unless they already are ``out``."""
    if values is not out:
        np.copyto(out, values)
    return out


def edge_index(angle_deg, edge_shifts_deg) -> np.ndarray:
    """Unbounded quadrant index of motor angles for one unit's latch edges (int64).

    The unit's edges sit at 90°·k + s_k (k = 0..3, repeating every turn);
    the index is the number of edges at or below the angle, counted so that
    ideal edges (all s_k = 0) give :func:`quadrant_index`.

    Parameters
    ----------
    angle_deg : array_like
        Motor angles, deg.
    edge_shifts_deg : sequence of 4 floats
        Shifts of the edges at 0°, 90°, 180°, 270°, deg (each within ±45°),
        e.g. :func:`turnkit.latches.worst_case_edge_shifts_deg`.
    """
    offsets = _edge_offsets(edge_shifts_deg)
    if offsets is None:
        return quadrant_index(angle_deg)
    a = np.array(angle_deg, dtype=np.float64, ndmin=1)
    return _edge_index_into(a, offsets).astype(np.int64).reshape(np.shape(angle_deg))


@dataclass(frozen=True, slots=True, eq=False)
class StepEvents:
    """Reads where the counter went wrong: when, and the true step size.

    Attributes
    ----------
    times_s : ndarray
        Read times, s.
    true_steps : ndarray of int
        True change of the quarter-turn index since the previous read.
    """

    times_s: np.ndarray
    true_steps: np.ndarray

    def __len__(self) -> int:
        return int(self.times_s.size)

    def __iter__(self):
        return iter(zip(self.times_s.tolist(), self.true_steps.tolist()))


@dataclass(frozen=True, slots=True, eq=False)
class SimulationResult:
    """What the counter did over the timeline.

    Attributes
    ----------
    duration_s : float
        Timeline length, s.
    state_time_s : dict[str, float]
        Time in each state (keys: :class:`~turnkit.counter.CounterMode` values), s;
        the values sum to ``duration_s``.
    state_entries : dict[str, int]
        Number of entries into each state.
    wake_count : int
        Wake-ups from sleep (one wake pulse each) = slow + fast polls.
    poll_count : int
        Latch reads on the schedule (slow and fast).
    fast_poll_count : int
        The part of ``poll_count`` made on the fast period.
    move_count : int
        Driven moves tracked.
    final_count, true_final_count : int
        Counter value and true count at the end, quarter-turns.
    final_count_error : int
        ``final_count − true_final_count``, quarter-turns.
    ambiguous_events : StepEvents
        The first ``settings.kept_events`` ambiguous reads (two quarters modulo 4).
    ambiguous_count : int
        Number of ambiguous reads (all of them).
    silent_events : StepEvents
        The first ``settings.kept_events`` reads decoded as a valid step but
        wrong (|true step| ≥ 3).
    silent_error_count : int
        Number of such silent reads (all of them).
    overflow_count : int
    fault_count : int
        Entries into the fault state.
    rehome_count : int
    error_history_times_s, error_history_quarter_turns : ndarray
        Count error (counter − truth) after every event that changed it (the
        first ``settings.kept_events`` entries); the error is constant between
        entries except while in fault or power loss (no reads then).
    max_abs_error_quarter_turns : int
        Largest magnitude of the count error over every entry of the error
        history, kept or not (0 without entries), quarter-turns.
    trace_poll_times_s, trace_true_count, trace_decoded_count : ndarray
        Reads inside the trace window (bounded length, for plots).
    trace_time_s, trace_angle_deg : ndarray
        The true motor angle sampled densely over the trace window.
    """

    duration_s: float
    state_time_s: dict
    state_entries: dict
    wake_count: int
    poll_count: int
    fast_poll_count: int
    move_count: int
    final_count: int
    true_final_count: int
    final_count_error: int
    ambiguous_events: StepEvents
    ambiguous_count: int
    silent_events: StepEvents
    silent_error_count: int
    overflow_count: int
    fault_count: int
    rehome_count: int
    error_history_times_s: np.ndarray
    error_history_quarter_turns: np.ndarray
    max_abs_error_quarter_turns: int
    trace_poll_times_s: np.ndarray
    trace_true_count: np.ndarray
    trace_decoded_count: np.ndarray
    trace_time_s: np.ndarray
    trace_angle_deg: np.ndarray
    trace_window_s: tuple

    def output_error(self, train) -> tuple[np.ndarray, np.ndarray]:
        """Output position error over the timeline, through a gear train.

        Returns
        -------
        times_s : ndarray
            Event times (starting at 0), s.
        error : ndarray
            Output error after each event (counter − truth), in ``train.output_unit``.
        """
        t = np.concatenate(([0.0], self.error_history_times_s))
        e = np.concatenate(([0], self.error_history_quarter_turns))
        return t, quarter_turns_to_output(e, train)

    def trace_output_error(self, train) -> tuple[np.ndarray, np.ndarray]:
        """Output position error at the traced reads, in ``train.output_unit``."""
        return self.trace_poll_times_s, quarter_turns_to_output(
            self.trace_decoded_count - self.trace_true_count, train)


class _EventLog:
    """Counts every event; keeps the time and true step of the first ``limit`` of them."""

    __slots__ = ("times", "steps", "total", "room")

    def __init__(self, limit: int):
        self.times: list[np.ndarray] = []
        self.steps: list[np.ndarray] = []
        self.total = 0
        self.room = limit

    def add_where(self, times, idx, steps, mask, n):
        """Add the ``n`` events at ``times[idx[mask]]`` (true steps ``steps[mask]``; no mask: all).

        Only the events that are kept are gathered.
        """
        if not self.room:
            self.total += n
            return
        if mask is not None:
            idx, steps = idx[mask], steps[mask]
        m = min(n, self.room)
        self.add(times[idx[:m]], steps[:m])
        self.total += n - m

    def add(self, times, steps):
        n = len(times)
        self.total += n
        if n and self.room:
            m = min(n, self.room)
            self.room -= m
            # Copies: the reads may be views of reused work arrays.
            self.times.append(np.array(times[:m], dtype=np.float64))
            self.steps.append(np.array(steps[:m], dtype=np.int64))

    def freeze(self) -> StepEvents:
        if not self.times:
            return StepEvents(np.empty(0), np.empty(0, dtype=np.int64))
        return StepEvents(np.concatenate(self.times), np.concatenate(self.steps))


def simulate(profile: MotionProfile, schedule, duration_s: float, settings: CounterSettings | None = None,
             *, power_loss_s=(), rehome_on_drive: bool = True, trace_window_s=None,
             trace_max_polls: int = 20_000, chunk_polls: int | None = None,
             edge_shifts_deg=None) -> SimulationResult:
    """Run the counter through the schedule against the motion.

    Parameters
    ----------
    profile : MotionProfile
        Motor motion (see :mod:`turnkit.motion`).
    schedule : FixedSchedule or AdaptiveSchedule
    duration_s : float
        Timeline length, s.
    settings : CounterSettings, optional
        Counter width and policies (default 16-bit signed, wrap, flag and hold).
    power_loss_s : sequence of (start_s, end_s)
        Spans with the supply below the electronics' minimum, s. They may not
        overlap driven moves.
    rehome_on_drive : bool
        A counter in fault re-homes at the start of the next driven move (count
        set to the truth); otherwise it stays in fault to the end.
    trace_window_s : (start_s, end_s), optional
        Window for the plotting arrays; default: the first motion interval.
    trace_max_polls : int
        At most this many reads are kept for plotting.
    chunk_polls : int, optional
        Reads decoded per array batch (memory bound). Default 65 536 for a
        fixed schedule; 131 072 for an adaptive one without jitter; 32 768
        for an adaptive schedule with jitter, whose random draws follow the
        batches (so there the results depend on this value).
    edge_shifts_deg : sequence of 4 floats, optional
        The latch edges of one unit: shifts of the edges at 0°, 90°, 180°
        and 270° of the motor shaft, deg (e.g.
        :func:`turnkit.latches.worst_case_edge_shifts_deg` or a draw of
        :func:`turnkit.latches.random_edge_shifts_deg`). Both the counter's
        reads and the truth use these edges (:func:`edge_index`). Default:
        ideal edges every 90°.

    Returns
    -------
    SimulationResult
    """
    if not isinstance(profile, MotionProfile):
        raise DesignValueError("simulate.profile", type(profile).__name__, "a turnkit.motion profile")
    if not isinstance(schedule, (FixedSchedule, AdaptiveSchedule)):
        raise DesignValueError("simulate.schedule", type(schedule).__name__,
                               "a FixedSchedule or AdaptiveSchedule")
    if isinstance(duration_s, bool) or not isinstance(duration_s, (int, float, np.floating, np.integer)) \
            or not (0 < duration_s < math.inf):
        raise DesignValueError("simulate.duration_s", duration_s, "a finite number > 0", unit="s")
    settings = CounterSettings() if settings is None else settings
    if not isinstance(settings, CounterSettings):
        raise DesignValueError("simulate.settings", type(settings).__name__, "a CounterSettings")
    if chunk_polls is None:
        if isinstance(schedule, AdaptiveSchedule):
            # Without jitter whole bursts are taken many at a time; larger batches save calls.
            chunk_polls = 1 << 15 if _any_jitter(schedule) else 1 << 17
        else:
            chunk_polls = 1 << 16
    if isinstance(chunk_polls, bool) or not isinstance(chunk_polls, int) or chunk_polls < 16:
        raise DesignValueError("simulate.chunk_polls", chunk_polls, "an integer >= 16")
    offsets = _edge_offsets(edge_shifts_deg)
    run = _Run(profile, schedule, float(duration_s), settings, power_loss_s, bool(rehome_on_drive),
               trace_window_s, int(trace_max_polls), chunk_polls, edges=offsets)
    return run.execute()


def _any_jitter(schedule) -> bool:
    return bool(schedule.jitter_s or getattr(schedule, "fast_jitter_s", None))


class _Run:
    def __init__(self, profile, schedule, duration, settings, power_loss, rehome, trace_window, trace_max,
                 chunk, lean=True, edges=None, sparse=True, batch=True):
        self.profile, self.schedule, self.duration, self.settings = profile, schedule, duration, settings
        self.rehome, self.chunk, self.trace_max = rehome, chunk, trace_max
        self.edges = edges  # None: ideal edges every 90 deg
        self.adaptive = isinstance(schedule, AdaptiveSchedule)
        self.rng = schedule.rng() if _any_jitter(schedule) else None  # only jitter draws from it
        self.t_buf, self.q_buf, self.d_buf, self.a_buf = _work_buffers(chunk)
        self.count_range = (settings.min_count, settings.max_count)
        # Without jitter the adaptive schedule may take the one-burst shortcuts
        # (with jitter the random draws must follow the general path exactly).
        self.lean = self.adaptive and not _any_jitter(schedule) and lean
        self.sparse = sparse  # reads that cannot overflow decoded at the non-single steps only
        # Whole bursts of a lean adaptive run taken many at a time (see _burst_batch).
        self.batching = self.lean and batch
        self.derive_fast_reads = True  # constant-speed bursts: fast reads follow from the speed
        self.batched_bursts = self._batch_fails = 0
        self._batch_skip = -1
        self._bursts = None
        s, e = profile.motion_intervals()
        s, e = merge_intervals(np.clip(s, 0.0, duration), np.clip(e, 0.0, duration))
        self.motion_s, self.motion_e = s, e
        if schedule.track_when_driven:
            ds, de = profile.driven_intervals()
            ds, de = merge_intervals(np.clip(ds, 0.0, duration), np.clip(de, 0.0, duration))
        else:
            ds, de = np.empty(0), np.empty(0)
        ps, pe = self._power_loss(power_loss)
        for a, b in zip(ps, pe):
            if np.any((ds < b) & (de > a)):
                raise DesignValueError("simulate.power_loss_s", (float(a), float(b)),
                                       "spans that do not overlap a driven move", unit="s")
        specials = [(float(a), float(b), "drive") for a, b in zip(ds, de)] + \
                   [(float(a), float(b), "power") for a, b in zip(ps, pe)]
        self.specials = sorted(specials)
        # Counter state.
        self.q_origin = int(self._q(np.array([0.0]))[0])
        self.q_ref = self.q_origin
        self.count = settings.start_count
        self.last_dir = 0
        self.fault = False
        self.last_change_s = -math.inf
        # Tallies.
        self.slow_polls = self.fast_polls = 0
        self.moves = self.faults = self.rehomes = self.losses = 0
        self.poll_faults = self.move_faults = 0
        self.overflows = 0
        self.t_tracking = self.t_fault = self.t_power = 0.0
        self.ambiguous, self.silent = _EventLog(settings.kept_events), _EventLog(settings.kept_events)
        self.err_t: list[float] = []
        self.err_v: list[int] = []
        self.err_t_arrays: list[np.ndarray] = []
        self.err_v_arrays: list[np.ndarray] = []
        self.err_room = settings.kept_events
        self.err_max = 0
        # Adaptive schedule phase.
        self.fast = False
        self.slow_anchor = 0.0
        self.fast_anchor = 0.0
        self.fast_until = -math.inf
        # Trace.
        if trace_window is None:
            if s.size:
                t0 = float(s[0])
                span = min(float(e[0]) - t0, 2000 * schedule.poll_period_s)
                trace_window = (max(0.0, t0 - 2 * schedule.poll_period_s),
                                min(duration, t0 + span + 2 * schedule.poll_period_s))
            else:
                trace_window = (0.0, min(duration, 100 * schedule.poll_period_s))
        w0, w1 = (float(x) for x in trace_window)
        if not (0 <= w0 < w1):
            raise DesignValueError("simulate.trace_window_s", trace_window, "(start, end) with 0 <= start < end",
                                   unit="s")
        self.trace_window = (w0, w1)
        self.tr_t: list[np.ndarray] = []
        self.tr_true: list[np.ndarray] = []
        self.tr_count: list[np.ndarray] = []
        self.tr_n = 0

    def _power_loss(self, spans):
        try:
            arr = np.asarray(list(spans), dtype=np.float64).reshape(-1, 2)
        except (TypeError, ValueError):
            raise DesignValueError("simulate.power_loss_s", spans, "a sequence of (start_s, end_s) pairs",
                                   unit="s") from None
        if arr.size and (np.any(~np.isfinite(arr)) or np.any(arr[:, 1] <= arr[:, 0]) or np.any(arr < 0)):
            raise DesignValueError("simulate.power_loss_s", spans, "pairs with 0 <= start_s < end_s", unit="s")
        return merge_intervals(np.clip(arr[:, 0], 0, self.duration), np.clip(arr[:, 1], 0, self.duration))

    # ----------------------------------------------------------------- helpers
    def _q(self, times):
        if self.edges is not None:
            return _edge_index_into(np.array(self.profile.angle_deg(times), dtype=np.float64),
                                    self.edges).astype(np.int64)
        return quadrant_index(self.profile.angle_deg(times))

    def _read_index(self, times, q):
        """Quadrant index at the read ``times`` written into ``q`` (float64), returned.

        Ideal edges: floor(angle/90° + snap) straight into the work array; a unit's own
        edges: :func:`edge_index` of the sampled angles.
        """
        if self.edges is not None:
            return _edge_index_into(_into(self.profile._angle_deg_into(times, q), q), self.edges)  # noqa: SLF001
        np.multiply(self.profile._angle_deg_into(times, q), 1.0 / 90.0, out=q)  # noqa: SLF001
        q += BOUNDARY_SNAP_QT
        np.floor(q, out=q)
        return q

    def _truth(self, q):
        return self.settings.start_count + (q - self.q_origin)

    def _log_error(self, t, count, q):
        e = int(count - self._truth(q))
        self.err_max = max(self.err_max, abs(e))
        if self.err_room:
            self.err_room -= 1
            self.err_t.append(float(t))
            self.err_v.append(e)

    def _log_errors(self, times, errors, idx=None, offset=0):
        """Error history entries ``errors + offset`` at ``times`` (or at ``times[idx]``).

        ``times`` may view a work array.
        """
        if not errors.size:
            return
        self.err_max = max(self.err_max, abs(int(_MAX(errors)) + offset), abs(int(_MIN(errors)) + offset))
        m = min(errors.size, self.err_room)
        if m:
            self.err_room -= m
            self.err_t_arrays.append(np.array(times[:m] if idx is None else times[idx[:m]], dtype=np.float64))
            self.err_v_arrays.append(np.add(errors[:m], offset, dtype=np.int64))

    def _enter_fault(self, t):
        self.fault = True
        self.faults += 1

    # ------------------------------------------------------------ main loop
    def execute(self) -> SimulationResult:
        t = 0.0
        for a, b, kind in self.specials:
            self._free_run(t, a)
            if kind == "drive":
                self._drive(a, b)
            else:
                self._lose_power(a, b)
            t = b
        self._free_run(t, self.duration)
        if not self.fault:
            # One last read at the end (not a scheduled poll) so that motion
            # after the last poll is compared fairly.
            end = np.array([self.duration])
            if self._apply(end, end, self._q(end), stop_on_change=False) is not None:
                self.poll_faults -= 1
        return self._result()

    def _free_run(self, t_a, t_b):
        if t_b <= t_a:
            return
        if self.fault:
            self.t_fault += t_b - t_a
            return
        if not self.adaptive:
            period = self.schedule.poll_period_s
            stop = self._poll_windows(t_a, t_b, 0.0, period, "all")
            end = t_b if stop is None else stop
            self.slow_polls += grid_count(t_a, end, 0.0, period)
            if stop is not None:
                self.t_fault += t_b - stop
            return
        sch = self.schedule
        t = t_a
        while t < t_b:
            if self.fast:
                self.fast_end = None
                stop = None if self.lean and self._one_burst_fast(t, t_b) else \
                    self._poll_windows(t, t_b, self.fast_anchor, sch.fast_period_s, "fast")
                if stop is not None:
                    self.fast_polls += grid_count(t, stop, self.fast_anchor, sch.fast_period_s)
                    self.t_fault += t_b - stop
                    return
                end = self.fast_end
                if end is None and self.fast_until <= t_b:
                    end = self.fast_until
                if end is None:
                    self.fast_polls += grid_count(t, t_b, self.fast_anchor, sch.fast_period_s)
                    return
                end = max(end, t)
                self.fast_polls += grid_count(t, end, self.fast_anchor, sch.fast_period_s)
                self.fast = False
                self.slow_anchor = end
                t = end
            else:
                if self.batching:
                    reached = self._burst_batches(t, t_b)
                    if reached is not None:
                        t = reached
                        continue
                self.change_at = None
                stop = None if self.lean and self._one_burst_slow(t, t_b) else \
                    self._poll_windows(t, t_b, self.slow_anchor, sch.poll_period_s, "until_change")
                if stop is not None:
                    self.slow_polls += grid_count(t, stop, self.slow_anchor, sch.poll_period_s)
                    self.t_fault += t_b - stop
                    return
                if self.change_at is None:
                    self.slow_polls += grid_count(t, t_b, self.slow_anchor, sch.poll_period_s)
                    return
                tc_nominal, tc = self.change_at
                self.slow_polls += grid_count(t, tc_nominal, self.slow_anchor, sch.poll_period_s)
                self.fast = True
                self.fast_anchor = tc_nominal
                self.fast_until = tc + sch.hold_s
                t = tc_nominal

    # ------------------------------------------- adaptive: one burst at a time
    # The common adaptive case is a burst seen first on the slow schedule, then
    # followed on the fast one until the hold expires in the idle gap after it.
    # These two methods handle exactly that with a few array operations and no
    # generality; whenever anything else happens (a read of more than one
    # step, a range limit, the hold reaching into the next burst, the trace
    # window) they change nothing and return False, and _poll_windows does
    # the work. They give the same state as _poll_windows in every case they
    # accept.

    def _burst_reads(self, anchor, period, k_lo, k_hi):
        n = k_hi - k_lo + 1
        times = np.add(_ramp(n), float(k_lo), out=self.t_buf[:n])
        times *= period
        if anchor != 0.0:
            times += anchor
        q = self._read_index(times, self.q_buf[:n])
        d = self.d_buf[:n]
        d[0] = q[0] - self.q_ref
        np.subtract(q[1:], q[:-1], out=d[1:])
        return times, q, d

    def _burst_grid(self, i, t_a, t_b, anchor, period):
        """Grid index range of polls in motion interval ``i`` (from ``t_a``), or None."""
        s = max(float(self.motion_s[i]), t_a)
        e = min(float(self.motion_e[i]), t_b)
        k_lo = max(math.floor((s - anchor) / period + GRID_TOLERANCE) + 1, 1)
        k_hi = min(math.floor((e - anchor) / period + GRID_TOLERANCE) + 1,
                   math.floor((t_b - anchor) / period + GRID_TOLERANCE))
        if k_hi < k_lo or k_hi - k_lo >= self.chunk:
            return None
        return k_lo, k_hi

    def _traced(self, t0, t1):
        w0, w1 = self.trace_window
        return self.tr_n < self.trace_max and t0 <= w1 and t1 >= w0

    def _one_burst_slow(self, t_a, t_b) -> bool:
        """Slow polls up to the first read that sees a step, within one burst."""
        i0 = int(self.motion_e.searchsorted(t_a, side="right"))
        if i0 >= int(self.motion_s.searchsorted(t_b, side="left")):
            return True  # no motion before t_b: change_at stays None
        grid = self._burst_grid(i0, t_a, t_b, self.slow_anchor, self.schedule.poll_period_s)
        if grid is None:
            return False
        k_lo, k_hi = grid
        times, q, d = self._burst_reads(self.slow_anchor, self.schedule.poll_period_s, k_lo, k_hi)
        moved = d.nonzero()[0]
        if not moved.size:
            return False
        # The first read whose change is not a multiple of four quarters ends
        # the slow phase; reads before it decode as "no change" (wrongly, and
        # silently, if they moved by four or eight quarters).
        first = (d[moved].astype(np.int64) & 3).nonzero()[0]
        if not first.size:
            return False
        j = int(moved[first[0]])
        true_step = int(d[j])
        decoded = (0, 1, AMBIGUOUS, -1)[true_step & 3]
        if decoded == AMBIGUOUS:
            if self.settings.ambiguous_policy is AmbiguousPolicy.FLAG_AND_HOLD:
                return False
            step = 0 if self.settings.ambiguous_policy is AmbiguousPolicy.FLAG_AND_CONTINUE \
                else 2 * (self.last_dir or 1)
        else:
            step = decoded
        c_min, c_max = self.count_range
        if not c_min <= self.count + step <= c_max or self._traced(times[0], times[j]):
            return False
        silent_at = moved[:first[0]]
        if decoded != AMBIGUOUS and decoded != true_step:
            silent_at = moved[:first[0] + 1]
        if decoded == AMBIGUOUS:
            self.ambiguous.add(times[j:j + 1], [true_step])
        if silent_at.size:
            self.silent.add(times[silent_at], d[silent_at])
        if decoded == AMBIGUOUS or silent_at.size:
            ev = np.append(silent_at, j) if decoded == AMBIGUOUS else silent_at
            counts = np.where(ev == j, self.count + step, self.count)
            self._log_errors(times[ev], counts - self._truth(q[ev].astype(np.int64)))
        self.count += step
        self.q_ref = int(q[j])
        self.last_change_s = float(times[j])
        if decoded != AMBIGUOUS:
            self.last_dir = decoded
        self.change_at = (float(times[j]), float(times[j]))
        return True

    def _one_burst_fast(self, t_a, t_b) -> bool:
        """Fast polls from ``t_a`` until the hold expires, within one burst and the gap after it."""
        S = self.motion_s
        i1 = int(S.searchsorted(t_b, side="left"))
        i0 = int(self.motion_e.searchsorted(t_a, side="right"))
        if i0 >= i1:
            return True  # no motion before t_b: fast_end stays None
        if self.fast_until < S[i0]:
            self.fast_end = max(self.fast_until, t_a)
            return True
        anchor, period = self.fast_anchor, self.schedule.fast_period_s
        grid = self._burst_grid(i0, t_a, t_b, anchor, period)
        if grid is None:
            return False
        k_lo, k_hi = grid
        times, q, d = self._burst_reads(anchor, period, k_lo, k_hi)
        if _MIN(d) < -1 or _MAX(d) > 1:
            return False
        # The hold, as _fast_cut finds it.
        hold = self.schedule.hold_s
        seen_at = d.nonzero()[0]
        x0 = until = self.fast_until
        if seen_at.size:
            c = times[seen_at]
            expiry = np.maximum(x0, np.concatenate(([x0], c[:-1] + hold)))
            gap = c > expiry
            if gap.any():
                end = float(expiry[int(np.argmax(gap))])
            else:
                until = max(x0, float(c[-1]) + hold)
                end = until if until < times[-1] else None
        else:
            end = x0 if x0 < times[-1] else None
        n = times.size
        if end is not None:
            n = int(times.searchsorted(end, side="right"))
            fast_end = end
        elif i0 + 1 < i1:
            if not until < S[i0 + 1]:
                return False  # the next burst starts within the hold
            fast_end = max(until, t_a)
        else:
            fast_end = None
        if n:
            c_min, c_max = self.count_range
            if not (c_min <= self.count - n and self.count + n <= c_max):
                lo = self.count + int(_MIN(q[:n])) - self.q_ref
                hi = self.count + int(_MAX(q[:n])) - self.q_ref
                if lo < c_min or hi > c_max:
                    return False
            if self._traced(times[0], times[n - 1]):
                return False
            self.count += int(q[n - 1]) - self.q_ref
            self.q_ref = int(q[n - 1])
            last = _last_nonzero(d[:n])
            if last >= 0:
                self.last_change_s = float(times[last])
                self.last_dir = int(d[last])
        self.fast_until = until
        self.fast_end = fast_end
        return True

    # ------------------------------------- adaptive: many bursts in one pass
    # Without jitter, each burst of an adaptive run is usually the same story:
    # slow reads until one sees a step, fast reads through the burst, and the
    # hold expiring in the idle gap after it, where the next slow grid is
    # anchored. The anchors are a chain (each burst's grid starts where the
    # previous hold expired), so they are found first by scalar arithmetic,
    # predicting each burst's reads from a straight-line model of its motion
    # (the burst's own speed for constant-speed bursts). The reads of many
    # bursts are then made and sampled in one array pass (for constant-speed
    # bursts slow enough for the fast period, only the slow reads and the two
    # fast reads around the last step: see _verify_and_apply), and the
    # prediction is checked against the real reads with the same
    # floating-point operations the one-burst path uses: which slow read
    # first sees a step, that no hold expires inside a burst, and where each
    # hold expires. The bursts before the first one that disagrees are
    # applied in one call of _sparse; that burst goes the one-burst way, and
    # the chain goes on from its real end. The results are those of the
    # one-burst path, bit for bit (tests/test_simulation.py checks them
    # against it and against the general path).

    def _burst_table(self):
        """What the batches predict from, per motion interval (Python lists, made once per run).

        Start and end, s; quadrant index at both; the first and the last boundary
        crossing on the straight line between the two angles (for constant-speed
        bursts, at the burst's own speed), s; whether a slow read may step four
        quarters at that speed; whether the fast reads follow from the speed
        (see :meth:`_verify_and_apply`); the angle at the start, deg, and the speed,
        deg/s. Also the running sum of a bound on each burst's sampled reads.
        """
        if self._bursts is None:
            S, E = self.motion_s, self.motion_e
            a_s = np.asarray(self.profile.angle_deg(S), dtype=np.float64)
            a_e = np.asarray(self.profile.angle_deg(E), dtype=np.float64)
            q_s, q_e = self._q(S), self._q(E)
            sch = self.schedule
            Ts, Tf = sch.poll_period_s, sch.fast_period_s
            speed = self._constant_speeds()
            with np.errstate(all="ignore"):
                slope = (a_e - a_s) / (E - S) if speed is None else speed
                up = q_e > q_s
                t1 = S + (self._begins(np.where(up, q_s + 1, q_s)) - a_s) / slope
                tl = S + (self._begins(np.where(up, q_e, q_e + 1)) - a_s) / slope
                if self.edges is None:
                    narrowest = widest = 90.0
                else:
                    widths = 360.0 * np.diff(np.append(self.edges, self.edges[0] + 1.0))
                    narrowest, widest = float(_MIN(widths)), float(_MAX(widths))
                alias = np.abs(slope) * Ts >= 3.0 * narrowest
                fine = (np.isfinite(t1) & np.isfinite(tl)) | (q_e == q_s)
                # Fast reads follow from the speed where each steps less than the narrowest
                # quadrant and steps come well within the hold (see _verify_and_apply), with
                # room for the rounding of read times (a few ulp of the time) and angles.
                speed_abs, margin = np.abs(slope), 1.0 - 1e-3
                largest = np.maximum(np.abs(a_s), np.abs(a_e))
                slack_deg = 8.0 * np.spacing(largest) + 8.0 * speed_abs * np.spacing(E)
                exact = speed_abs * Tf + slack_deg <= margin * narrowest
                exact &= (widest + slack_deg) / speed_abs + 2.0 * Tf + 8.0 * np.spacing(E) <= margin * sch.hold_s
                exact &= largest < 1e12
                if speed is None or not self.derive_fast_reads:
                    exact[:] = False
                bound = np.where(np.isfinite(t1), (t1 - S) / Ts, 0.0) + 4.0 + \
                    np.where(exact, 0.0, (E - S) / Tf) + np.where(alias, (E - S) / Ts, 0.0)
            bound = np.where(np.isfinite(bound), bound, np.inf)
            self._q_start, self._q_end = q_s, q_e
            self._bursts = (S.tolist(), E.tolist(), q_s.tolist(), q_e.tolist(), t1.tolist(), tl.tolist(),
                            alias.tolist(), fine.tolist(), exact, a_s.tolist(), np.asarray(slope).tolist(),
                            np.concatenate(([0.0], np.cumsum(bound))))
        return self._bursts

    def _constant_speeds(self):
        """Each motion interval's speed (deg/s) where the profile is one constant-speed burst there.

        Such a burst's angle is b + v·(t − s) evaluated as fl(fl(fl(t − s)·v) + b), and
        the angle after it is the same expression at its end; None for other profiles.
        """
        p = self.profile
        if not isinstance(p, BackDriveBursts):
            return None
        n = self.motion_s.size
        if n > p.starts_s.size or not np.array_equal(self.motion_s, p.starts_s[:n]) \
                or not np.array_equal(self.motion_e[:n - 1], p.ends_s[:n - 1]):
            return None
        return p.speeds_deg_per_s[:n].astype(np.float64)

    def _begins(self, m):
        """Angle where quadrant index ``m`` begins, deg (array)."""
        if self.edges is None:
            return (m - BOUNDARY_SNAP_QT) * 90.0
        return 360.0 * (m // 4 + self.edges[m % 4])

    def _index_scalar(self, a):
        """Quadrant index of one angle (deg), as :meth:`_q` gives it."""
        if self.edges is None:
            return math.floor(a * (1.0 / 90.0) + BOUNDARY_SNAP_QT)
        turns = a * (1.0 / 360.0)
        return sum(math.floor(turns - o) for o in self.edges.tolist()) + 3

    def _first_step_read(self, i, k, A):
        """First slow read from index ``k`` (grid ``A``) predicted to see a step not a multiple of four."""
        S, E, QS, _, _, _, _, _, _, AS, V, _ = self._bursts
        Ts = self.schedule.poll_period_s
        while True:  # ends at the read after the burst at the latest
            tk = k * Ts + A
            if tk >= E[i] or (self._index_scalar(AS[i] + V[i] * (tk - S[i])) - QS[i]) & 3:
                return k
            k += 1

    def _burst_batches(self, t, t_b):
        """Apply whole bursts from ``t`` (slow phase) in batches; return the time reached, or None."""
        reached = None
        while self.batching:
            got = self._burst_batch(t, t_b)
            if got is None:
                break
            reached = t = got
        return reached

    def _burst_batch(self, t, t_b):
        i0 = int(self.motion_e.searchsorted(t, side="right"))
        i1 = int(self.motion_s.searchsorted(t_b, side="left"))
        if i0 + 1 >= i1 or i0 <= self._batch_skip:
            return None
        S, E, QS, QE, T1, TL, ALIAS, FINE, EXACT, AS, V, BOUND = self._burst_table()
        if not S[i0] > t or QS[i0] != self.q_ref:
            return None
        sch = self.schedule
        Ts, Tf, hold = sch.poll_period_s, sch.fast_period_s, sch.hold_s
        # As many bursts as a bound of their sampled reads lets into one chunk (at least one).
        i_end = min(int(BOUND.searchsorted(BOUND[i0] + self.chunk, side="right")) - 1, i1 - 1, i0 + 4096)
        if i_end <= i0:  # this burst alone has more reads than a chunk
            self._batch_failed(i0)
            return None
        # The chain of anchors: each burst's slow grid starts where the hold of the one
        # before expired (or goes on over a burst with no step). Only the predicted first
        # slow read that sees a step (k), the last fast read that sees one (j), and the
        # hold's expiry are worked out here; everything else follows in array form below.
        floor = math.floor
        ideal, snap = self.edges is None, BOUNDARY_SNAP_QT
        A = self.slow_anchor
        anchors, ks, js, tcs, untils = [], [], [], [], []
        fail = None
        # The batch stops before a burst whose index range may take the count near a limit
        # (the check in _verify_and_apply is the exact one; this saves wasted work).
        c_min, c_max = self.count_range
        q_lo, q_hi = c_min - self.count + self.q_ref, c_max - self.count + self.q_ref
        for i in range(i0, i_end):
            margin = 64 + 8 * (i - i0)
            if min(QS[i], QE[i]) - margin < q_lo or max(QS[i], QE[i]) + margin > q_hi:
                if i == i0:
                    fail = i
                break
            anchors.append(A)
            if QE[i] == QS[i]:
                ks.append(0)
                js.append(0)
                tcs.append(A)
                untils.append(A)
                continue
            if not FINE[i]:
                fail = i
                break
            k = floor((T1[i] - A) / Ts) + 1
            if ALIAS[i]:  # a slow read may step four quarters: the first that does not
                if ideal:
                    s, a_s, v, e, q_s = S[i], AS[i], V[i], E[i], QS[i]
                    while True:  # ends at the read after the burst at the latest
                        tk = k * Ts + A
                        if tk >= e or (floor((a_s + v * (tk - s)) * (1.0 / 90.0) + snap) - q_s) & 3:
                            break
                        k += 1
                else:
                    k = self._first_step_read(i, k, A)
            tc = k * Ts + A
            if not tc < E[i] and not (QE[i] - QS[i]) & 3:
                # Every slow read steps a multiple of four quarters: no step is seen, and
                # the slow phase goes on over this burst.
                ks.append(0)
                js.append(0)
                tcs.append(A)
                untils.append(A)
                continue
            j = floor((TL[i] - tc) / Tf) + 1 if TL[i] > tc and tc < E[i] else 0
            A = (j * Tf + tc if j else tc) + hold  # = max(tc + hold, c + hold): c is not before tc
            ks.append(k)
            js.append(j)
            tcs.append(tc)
            untils.append(A)
        n = len(ks)
        if n == 0:
            if fail is not None:
                self._batch_failed(fail)
            return None
        del anchors[n:]
        tol = GRID_TOLERANCE
        A = np.array(anchors)
        kc = np.array(ks, dtype=np.int64)
        jc = np.array(js, dtype=np.int64)
        tc = np.array(tcs)
        until = np.array(untils)
        has = kc > 0
        Sx, Ex = self.motion_s[i0:i0 + n], self.motion_e[i0:i0 + n]
        S_next = self.motion_s[i0 + 1:i0 + n + 1]
        # Slow reads: the one-burst and the windowed paths' grid ranges, the read after
        # each burst included; over a burst with no step the phase goes on with the same
        # grid, never reading an index twice.
        k_lo = np.maximum(np.floor((Sx - A) / Ts + tol).astype(np.int64) + 1, 1)
        k_hi = np.minimum(np.floor((Ex - A) / Ts + tol).astype(np.int64) + 1,
                          np.floor((t_b - A) / Ts + tol).astype(np.int64))
        if n > 1:
            carried = np.flatnonzero(~has[:-1]) + 1
            if carried.size:
                k_lo[carried] = np.maximum(k_lo[carried], k_hi[carried - 1] + 1)
        n_slow = np.where(has, kc - k_lo + 1, np.maximum(k_hi - k_lo + 1, 0))
        bad = has & ((kc < k_lo) | (kc > k_hi))
        # Fast reads: indices 1, 2, … from tc through the first read after the burst.
        fast = has & (tc < Ex)
        kf_lo = np.where(tc >= Sx, 1, np.maximum(np.floor((Sx - tc) / Tf + tol).astype(np.int64) + 1, 1))
        kf_hi = np.minimum(np.floor((Ex - tc) / Tf + tol).astype(np.int64) + 1,
                           np.floor((t_b - tc) / Tf + tol).astype(np.int64))
        bad |= fast & ((kf_lo != 1) | (kf_hi < kf_lo) | (until < kf_hi * Tf + tc) | (jc > kf_hi))
        n_fast = np.where(fast, kf_hi, 0)
        exact = fast & EXACT[i0:i0 + n]
        # The hold must expire before the next burst; the next burst must start where this one ends.
        bad |= has & ~(until < S_next)
        bad[1:] |= self._q_start[i0 + 1:i0 + n] != self._q_end[i0:i0 + n - 1]
        if self.tr_n < self.trace_max:
            w0, w1 = self.trace_window
            bad |= (Sx - Ts <= w1) & (Ex + Ts >= w0)
        bad |= np.cumsum(n_slow + np.where(exact, 2, n_fast)) > self.chunk
        cut = np.flatnonzero(bad)
        if cut.size:
            n = int(cut[0])
            fail = i0 + n if fail is None else min(fail, i0 + n)
        if not has[:n].any():
            if fail is not None:
                self._batch_failed(fail)
            return None
        m, agreed = self._verify_and_apply(i0, A[:n], k_lo[:n], n_slow[:n], has[:n], tc[:n], n_fast[:n],
                                           until[:n], exact[:n], jc[:n])
        if agreed < n:
            fail = i0 + agreed if fail is None else min(fail, i0 + agreed)
        if fail is not None:
            self._batch_failed(fail)
        if m is None:
            return None
        self.batched_bursts += m + 1
        # Polls on each grid, as the one-burst path adds them up (grid_count).
        done = np.flatnonzero(has[:m + 1])
        phase_start = np.concatenate(([t], until[done[:-1]]))
        a, c, u = A[done], tc[done], until[done]
        lo = np.maximum(np.floor((phase_start - a) / Ts + tol), 0)
        self.slow_polls += int(np.sum(np.where(c <= phase_start, 0,
                                               np.maximum(np.floor((c - a) / Ts + tol) - lo, 0))))
        self.fast_polls += int(np.sum(np.where(u <= c, 0, np.maximum(np.floor((u - c) / Tf + tol), 0))))
        self.fast = False
        end = float(until[m])
        self.slow_anchor = self.fast_until = end
        return end

    def _batch_failed(self, i):
        """Burst ``i`` goes the one-burst way; batching stops for good if it fails often."""
        self._batch_skip = max(self._batch_skip, i)
        self._batch_fails += 1
        if self._batch_fails >= 16 and 4 * self._batch_fails > self.batched_bursts:
            self.batching = False

    def _verify_and_apply(self, i0, A, k_lo, n_slow, has, tc, n_fast, until, exact, jc):
        """Make the predicted reads of a batch of bursts, check them, apply the bursts that agree.

        Per burst (the first is motion interval ``i0``): slow grid anchor ``A`` (s),
        first slow index and number of slow reads; whether a read sees a step
        (``has``: the last slow read does); fast grid anchor ``tc`` (s) and number of
        fast reads (indices 1, 2, …); predicted hold expiry ``until`` (s); whether the
        fast reads follow from the speed (``exact``) and the predicted index of the
        last fast read that sees a step (``jc``, 0: none).

        The slow reads (a few a burst) are made and sampled. So are the fast reads of
        the bursts that are not ``exact``. Those of an ``exact`` burst are not: its
        angle is fl(fl(fl(t − s)·v) + b), and every step of that is monotone in t,
        so the index is monotone over the burst's reads; a speed with less than the
        narrowest quadrant per fast period makes each read step at most one quarter
        (decoded right, no event), and one that crosses the widest quadrant within
        the hold less two fast periods leaves no gap longer than the hold between
        reads that see a step (both with 0.1 % to spare, and room for the rounding
        of the read times and angles: see :meth:`_burst_table`). What remains is
        which read sees the last step: the predicted one and the read before it
        are sampled.

        Returns the index of the last burst applied (None: none) and the number of
        bursts that agreed with the prediction.
        """
        sch = self.schedule
        Ts, Tf, hold = sch.poll_period_s, sch.fast_period_s, sch.hold_s
        nb = has.size
        ok = np.ones(nb, dtype=bool)
        q_end = self._q_end[i0:i0 + nb].astype(np.float64)
        q_start = self._q_start[i0:i0 + nb].astype(np.float64)
        n_eval = np.where(exact, 0, n_fast)
        s_at = np.cumsum(n_slow) - n_slow
        f_at = np.cumsum(n_eval) - n_eval
        ns, nf = int(s_at[-1] + n_slow[-1]), int(f_at[-1] + n_eval[-1])
        # Read times exactly as the one-burst path makes them: float(k) * period + anchor.
        t_s = np.repeat((k_lo - s_at).astype(np.float64), n_slow)
        t_s += _ramp(ns)
        t_s *= Ts
        t_s += np.repeat(A, n_slow)
        q_s = self._read_index(t_s, np.empty(ns)) if ns else t_s
        t_f = np.add(_ramp(nf), np.repeat((1 - f_at).astype(np.float64), n_eval), out=self.t_buf[:nf])
        t_f *= Tf
        t_f += np.repeat(tc, n_eval)
        q_f = self._read_index(t_f, self.q_buf[:nf]) if nf else t_f
        # Exact bursts: the predicted last read that sees a step and the read before it.
        xb = np.flatnonzero(exact & (jc > 0))
        if xb.size:
            t_x = np.empty(2 * xb.size)
            t_x[0::2] = (jc[xb] - 1).astype(np.float64) * Tf + tc[xb]
            t_x[1::2] = jc[xb].astype(np.float64) * Tf + tc[xb]
            q_x = self._read_index(t_x, np.empty(t_x.size))
            ok[xb] &= (q_x[1::2] == q_end[xb]) & (q_x[0::2] != q_end[xb])
        # The index before each burst's slow reads: the last read of the bursts before.
        s_last, f_last = s_at + n_slow - 1, f_at + n_eval - 1
        last_q = np.where(n_slow > 0, q_s[np.clip(s_last, 0, max(ns - 1, 0))] if ns else np.nan, np.nan)
        last_q = np.where(exact, q_end, last_q)
        if nf:
            last_q = np.where(n_eval > 0, q_f[np.clip(f_last, 0, nf - 1)], last_q)
        before = np.concatenate(([float(self.q_ref)], last_q[:-1]))
        gaps = np.isnan(before)
        if gaps.any():  # a burst with no reads of its own: carry the index forward
            valid = np.where(~gaps, np.arange(nb), 0)
            before = before[np.maximum.accumulate(valid)]
        d_s = np.empty(ns)
        if ns:
            d_s[1:] = q_s[1:] - q_s[:-1]
            w = n_slow > 0
            d_s[s_at[w]] = q_s[s_at[w]] - before[w]
        d_f = self.d_buf[:nf]
        fb = np.flatnonzero(n_eval)
        if nf:
            np.subtract(q_f[1:], q_f[:-1], out=d_f[1:])
            d_f[f_at[fb]] = q_f[f_at[fb]] - q_s[s_last[fb]]
        # Slow reads: no step (modulo four quarters) before the last one, which sees one
        # exactly where predicted.
        di = d_s.astype(np.int64)
        steps = np.cumsum(np.concatenate(([0], (di & 3) != 0)))
        seen_before = steps[np.maximum(s_last, s_at)] - steps[s_at]
        last_sees = np.where(n_slow > 0, steps[s_at + n_slow] - steps[np.maximum(s_last, s_at)], 0)
        ok &= (seen_before == 0) & (last_sees == has)
        # An exact burst with no fast step predicted: its slow read already sees the end index.
        ok &= ~(exact & (jc == 0)) | (q_s[np.clip(s_last, 0, max(ns - 1, 0))] == q_end if ns else False)
        if self.settings.ambiguous_policy is AmbiguousPolicy.FLAG_AND_HOLD:
            amb = np.flatnonzero((di & 3) == 2)
            if amb.size:  # a fault: the one-burst way handles it
                ok[int(s_at.searchsorted(amb[0], side="right")) - 1:] = False
        # Sampled fast reads: every one at most one step (else the one-burst way decodes them).
        if nf and (_MIN(d_f) < -1 or _MAX(d_f) > 1):
            big = np.flatnonzero(np.abs(d_f) > 1)
            ok[int(f_at.searchsorted(big[0], side="right")) - 1:] = False
        # The hold expires hold_s after the last read that saw a step, as predicted.
        c_last = tc.copy()
        rep = np.full(nb, -1)
        if fb.size:
            width = 64
            idx = f_last[fb, None] - np.arange(width - 1, -1, -1)
            inside = idx >= f_at[fb, None]
            moved = (d_f[np.maximum(idx, 0)] != 0.0) & inside
            seen = moved.any(axis=1)
            pos = idx[np.arange(fb.size), width - 1 - np.argmax(moved[:, ::-1], axis=1)]
            rep[fb[seen]] = pos[seen]
            for b in fb[~seen & (n_eval[fb] > width)].tolist():
                last = _last_nonzero(d_f[f_at[b]:f_at[b] + n_eval[b]])
                if last >= 0:
                    rep[b] = f_at[b] + last
            got = rep >= 0
            c_last[got] = t_f[rep[got]]
        if xb.size:
            c_last[xb] = t_x[1::2]
        ok &= ~has | (c_last + hold == until)
        # No hold expires inside a sampled burst: no gap longer than the hold between reads
        # that see a step. Blocks of `span` reads each with a step rule that out where
        # 2·span reads fit in the hold; bursts with a block without one are checked read
        # by read, as the one-burst path does.
        span = int(hold / Tf / 2.0) - 1
        if fb.size:
            if span >= 4 and nf >= span:
                # A block with a step changes the index unless it also steps back: blocks whose
                # index ends where it began are the only ones that may have none.
                ends = q_f[span - 1:nf - nf % span:span]
                starts = np.flatnonzero(ends == np.concatenate(([q_f[0] - d_f[0]], ends[:-1]))) * span
                look = np.unique(np.concatenate((f_at.searchsorted(starts, side="right"),
                                                 f_at.searchsorted(starts + span - 1, side="right"))) - 1)
            else:
                look = fb
            for b in look[n_eval[look] > 0].tolist():
                seg = slice(f_at[b], f_at[b] + n_eval[b])
                c = t_f[seg][np.flatnonzero(d_f[seg])]
                if c.size and (c[0] > tc[b] + hold or np.any(c[1:] > c[:-1] + hold)):
                    ok[b] = False
        # The counter's range: no read may take the count past a limit. Within burst b the
        # index stays within exc of where it was before the burst (slow steps, one quarter a
        # sampled fast read, the burst's own travel), and the count error within the
        # largest error the slow reads can add up to it (two quarters a read beyond the step).
        slow_sum = np.concatenate(([0.0], np.cumsum(np.abs(d_s))))
        moved_slow = slow_sum[s_at + n_slow] - slow_sum[s_at]
        reach = np.cumsum(moved_slow + 2.0 * n_slow)
        exc = 2.0 * moved_slow + np.where(exact, 0, n_eval) + np.abs(q_end - before)
        c_min, c_max = self.count_range
        base = self.count - self.q_ref + before
        ok &= np.logical_and.accumulate((base + exc + reach <= c_max) & (base - exc - reach >= c_min))
        bad = np.flatnonzero(~ok)
        agreed = int(bad[0]) if bad.size else nb
        done = np.flatnonzero(has[:agreed])
        if not done.size:
            return None, agreed
        m = int(done[-1])
        # The reads that can change the count error or the guessed direction: the slow
        # reads and each burst's last fast read that saw a step (every other fast read
        # steps by at most one and is decoded right). Under flag-and-hold the batch holds
        # no ambiguous read (checked above), so _sparse decodes it as the one-burst path does.
        n_s = int(s_at[m] + n_slow[m])
        r = rep[:m + 1]
        r = r[r >= 0]
        x = xb[xb <= m]
        times = np.concatenate((t_s[:n_s], t_f[r], t_x[1:2 * x.size:2] if x.size else t_s[:0]))
        order = np.argsort(times, kind="stable")
        times = times[order]
        q = np.concatenate((q_s[:n_s], q_f[r], q_end[x]))[order]
        d = np.concatenate((d_s[:n_s], d_f[r], q_end[x] - q_x[0:2 * x.size:2] if x.size else d_s[:0]))[order]
        self._sparse(times, q, d)
        return m, agreed

    def _poll_windows(self, t_a, t_b, anchor, period, mode):
        """Decode the grid polls ``anchor + k*period`` inside motion intervals in (t_a, t_b].

        ``mode`` is "all"; "until_change" (stop after the first read that sees
        a change, stored in ``self.change_at``); or "fast" (stop where the
        fast-polling hold expires, stored in ``self.fast_end``, extending
        ``self.fast_until`` with every change seen). Intervals are taken in
        groups that grow geometrically, so stopping early wastes little.

        Returns the nominal time of the poll that caused a fault, else None.
        """
        S, E = self.motion_s, self.motion_e
        i0 = int(np.searchsorted(E, t_a, side="right"))
        i1 = int(np.searchsorted(S, t_b, side="left"))
        k_cap = math.floor((t_b - anchor) / period + GRID_TOLERANCE)
        k_prev = 0
        group = 4096 if mode == "all" else 1
        # Each schedule state polls with its own jitter (a fraction of its own period).
        jitter = self.schedule.fast_poll_jitter_s if mode == "fast" else self.schedule.jitter_s
        w = i0
        while w < i1:
            if mode == "fast" and self.fast_until < S[w]:
                # The hold expires in the idle gap before the next interval.
                self.fast_end = max(self.fast_until, t_a)
                return None
            w_end = min(w + group, i1)
            group = min(group * 4, 4096)
            s = np.maximum(S[w:w_end], t_a)
            e = np.minimum(E[w:w_end], t_b)
            w = w_end
            if s.size == 1:
                # One interval (the adaptive schedule's usual case): plain ints.
                lo = max(math.floor((float(s[0]) - anchor) / period + GRID_TOLERANCE) + 1, 1, k_prev + 1)
                hi = min(math.floor((float(e[0]) - anchor) / period + GRID_TOLERANCE) + 1, k_cap)
                k_prev = max(k_prev, hi)
                k_lo, k_hi = np.array([lo]), np.array([hi])
            else:
                k_lo = np.maximum(grid_index(s, anchor, period) + 1, 1)
                # Include the first poll after each interval: it sees the final angle.
                k_hi = np.minimum(grid_index(e, anchor, period) + 1, k_cap)
                before = np.maximum.accumulate(np.concatenate(([k_prev], k_hi)))
                k_lo = np.maximum(k_lo, before[:-1] + 1)
                k_prev = int(before[-1])
            for nominal in self._grid_chunks(k_lo, k_hi, anchor, period):
                times = nominal if jitter == 0.0 else nominal + self.rng.uniform(-jitter, jitter, nominal.size)
                # Quadrant index kept in float64 (exact for |index| < 2**53) to
                # save a conversion pass; _apply converts only when it decodes.
                q = self._read_index(times, self.q_buf[:times.size])
                if mode == "fast":
                    cut = self._fast_cut(times, q)
                    if cut is not None:
                        times, nominal, q = times[:cut], nominal[:cut], q[:cut]
                fault_at = self._apply(times, nominal, q, mode == "until_change") if times.size else None
                if fault_at is not None:
                    return fault_at
                if mode == "until_change" and self.change_at is not None:
                    return None
                if mode == "fast" and self.fast_end is not None:
                    return None
        return None

    def _grid_chunks(self, k_lo, k_hi, anchor, period):
        """Nominal poll times ``anchor + k*period`` for k in every range [k_lo, k_hi], in chunks.

        The poll indices are made as float64 (exact below 2**53, and the
        products equal those of integer indices) from one cached ramp: a chunk
        inside a single range is one addition, a chunk spanning several ranges
        one repeat and one addition.
        """
        chunk = self.chunk
        n = np.maximum(k_hi - k_lo + 1, 0)
        if n.size == 1:
            total = int(n[0])
            base = int(k_lo[0])
            for p in range(0, total, chunk):
                m = min(chunk, total - p)
                k = np.add(_ramp(m), float(base + p), out=self.t_buf[:m])
                k *= period
                if anchor != 0.0:
                    k += anchor
                yield k
            return
        keep = n > 0
        if not keep.all():
            n, k_lo = n[keep], k_lo[keep]
        if n.size == 0:
            return
        first = np.cumsum(n) - n
        total = int(first[-1] + n[-1])
        # Pieces: the ranges, also cut at every chunk boundary. A piece's base
        # index plus its position in the chunk gives k.
        if total > chunk:
            # The sorted union of the two (np.union1d would import numpy.ma on a cold start).
            starts = np.sort(np.concatenate((first, np.arange(chunk, total, chunk, dtype=np.int64))), kind="stable")
            starts = starts[np.concatenate(([True], starts[1:] != starts[:-1]))]
        else:
            starts = first
        w = np.searchsorted(first, starts, side="right") - 1
        lengths = np.diff(starts, append=total)
        base = (k_lo[w] - first[w] + (starts // chunk) * chunk).astype(np.float64)
        bounds = np.searchsorted(starts, np.arange(0, total + chunk, chunk, dtype=np.int64)).tolist()
        for j in range(len(bounds) - 1):
            a, b = bounds[j], bounds[j + 1]
            m = min(chunk, total - j * chunk)
            if b - a == 1:
                k = np.add(_ramp(m), base[a], out=self.t_buf[:m])
            else:
                k = np.add(base[a:b].repeat(lengths[a:b]), _ramp(m), out=self.t_buf[:m])
            k *= period
            if anchor != 0.0:
                k += anchor
            yield k

    def _fast_cut(self, times, q):
        """Where the fast-polling hold expires among these reads (vectorised).

        The hold lasts until ``hold_s`` after the last read that saw a change;
        before change j it expires at max(fast_until, time of change j−1 + hold).
        Returns how many reads belong to the fast phase, or None for all of
        them (then ``fast_until`` is extended past the last change).
        """
        hold = self.schedule.hold_s
        seen_at = np.flatnonzero((np.diff(q, prepend=float(self.q_ref)) % 4.0) != 0.0)
        x0 = self.fast_until
        if seen_at.size:
            c = times[seen_at]
            expiry = np.maximum(x0, np.concatenate(([x0], c[:-1] + hold)))
            gap = c > expiry
            if gap.any():
                end = float(expiry[int(np.argmax(gap))])
            else:
                self.fast_until = max(x0, float(c[-1]) + hold)
                end = self.fast_until if self.fast_until < times[-1] else None
        else:
            end = x0 if x0 < times[-1] else None
        if end is None:
            return None
        self.fast_end = end
        return int(np.searchsorted(times, end, side="right"))

    def _apply(self, times, nominal, q, stop_on_change):
        """Apply reads at ``times`` (quadrant indices ``q``) to the counter.

        Returns the nominal time of a read that put the counter in fault, else None.
        """
        d = self.d_buf[:q.size] if q.dtype == np.float64 and q.size <= self.d_buf.size else np.empty_like(q)
        d[0] = q[0] - self.q_ref
        np.subtract(q[1:], q[:-1], out=d[1:])
        if stop_on_change:
            q, d = q.astype(np.int64, copy=False), d.astype(np.int64, copy=False)
            nz = np.flatnonzero(d & 3)
            if nz.size:
                cut = int(nz[0]) + 1
                times, nominal, q, d = times[:cut], nominal[:cut], q[:cut], d[:cut]
                self.change_at = (float(nominal[-1]), float(times[-1]))
        st = self.settings
        n = d.size
        if n and _MIN(d) >= -1 and _MAX(d) <= 1:
            # Fast path: every read saw at most one step, so the count follows
            # the quadrant index exactly; only the range needs checking.
            c_min, c_max = self.count_range
            # |count change| <= n; look at the extremes only near a limit.
            if c_min <= self.count - n and self.count + n <= c_max:
                lo, hi = self.count, self.count
            else:
                lo = self.count + int(_MIN(q)) - self.q_ref
                hi = self.count + int(_MAX(q)) - self.q_ref
            if lo >= c_min and hi <= c_max:
                self._follow(times, q, d)
                return None
        if self.sparse and not stop_on_change and st.ambiguous_policy is not AmbiguousPolicy.FLAG_AND_HOLD:
            # A read steps at most two quarters as decoded: far from the limits no step can overflow.
            c_min, c_max = self.count_range
            if c_min <= self.count - 2 * n and self.count + 2 * n <= c_max:
                self._sparse(times, q, d)
                return None
        q, d = q.astype(np.int64, copy=False), d.astype(np.int64, copy=False)
        decoded, amb, silent = decode_index_changes(d)
        flag = st.ambiguous_policy is AmbiguousPolicy.FLAG_AND_HOLD
        n = d.size
        i = 0
        while i < n:
            stop = n
            steps = decoded[i:]
            amb_seg = amb[i:]
            if amb_seg.any():
                if flag:
                    stop = i + int(np.argmax(amb_seg))
                    steps = decoded[i:stop]
                elif st.ambiguous_policy is AmbiguousPolicy.FLAG_AND_CONTINUE:
                    steps = np.where(amb_seg, 0, decoded[i:])  # flagged, count kept, polling goes on
                else:
                    steps = self._guess(decoded[i:], amb_seg)
            path = self.count + np.cumsum(steps)
            bad = (path < st.min_count) | (path > st.max_count)
            if bad.any():
                j = int(np.argmax(bad))
                self._bulk(times, q, d, decoded, amb, silent, path, i, i + j)
                k = i + j
                self._single_overflow(times, q, amb, silent, d, int(steps[j]), k)
                if self.fault:
                    self.poll_faults += 1
                    return float(nominal[k])
                i = k + 1
                continue
            self._bulk(times, q, d, decoded, amb, silent, path, i, stop)
            i = stop
            if i < n:  # an ambiguous read under flag-and-hold
                self.ambiguous.add(times[i:i + 1], d[i:i + 1])
                self.q_ref = int(q[i])
                self.last_change_s = float(times[i])
                self._log_error(times[i], self.count, q[i])
                self._trace(times[i:i + 1], q[i:i + 1], np.array([self.count]))
                self._enter_fault(float(times[i]))
                self.poll_faults += 1
                return float(nominal[i])
        return None

    def _follow(self, times, q, d):
        """Apply reads that each saw at most one step and stay in range."""
        self.count += int(q[-1]) - self.q_ref
        self.q_ref = int(q[-1])
        if self.adaptive or self.settings.ambiguous_policy is AmbiguousPolicy.GUESS_LAST_DIRECTION:
            last = _last_nonzero(d)
            if last >= 0:
                self.last_change_s = float(times[last])
                self.last_dir = int(d[last])
        w0, w1 = self.trace_window
        if self.tr_n < self.trace_max and times[0] <= w1 and times[-1] >= w0:
            m = (times >= w0) & (times <= w1)
            self._trace(times[m], q[m], self._truth(q[m]) + (self.count - self._truth(self.q_ref)))

    def _sparse(self, times, q, d):
        """Apply reads that cannot overflow, under guess-last-direction or flag-and-continue.

        A read whose true step is −1, 0 or +1 is decoded right and leaves the
        count error as it was, so only the other reads (ambiguous or silent)
        are decoded, through the int8 table, and only at their indices; the
        guessed direction is looked up for the ambiguous ones alone. The count
        follows from the quadrant index plus the sum of the error changes.
        """
        n = d.size
        a = np.abs(d, out=self.a_buf[:n]) if d.dtype == np.float64 and n <= self.a_buf.size else np.abs(d)
        big = np.flatnonzero(a > 1)
        db = d[big].astype(np.int64)
        r = (db & 3).astype(np.int8)
        dec = _DECODE_INT8[r]
        amb = r == AMBIGUOUS
        guess = self.settings.ambiguous_policy is AmbiguousPolicy.GUESS_LAST_DIRECTION
        track = self.adaptive or guess
        if track:
            odd = (r & 1).astype(bool)  # silent reads decoded as a single step
            single = a == 1  # single steps decoded right
            single[big[odd]] = True
        steps = dec.astype(np.int64)
        if amb.any():
            if guess:
                steps[amb] = 2 * self._directions(d, single, big[odd], dec[odd], big[amb])
            else:
                steps[amb] = 0
        err = np.cumsum(steps - db)  # count error change up to each of these reads
        err_before = self.count - self._truth(self.q_ref)
        if self._traced(times[0], times[-1]):
            w0, w1 = self.trace_window
            at = np.flatnonzero((times >= w0) & (times <= w1))
            qt = q[at].astype(np.int64)
            k = big.searchsorted(at, side="right") - 1
            change = np.where(k >= 0, err[np.maximum(k, 0)], 0) if err.size else 0
            self._trace(times[at], qt, self.count + (qt - self.q_ref) + change)
        self.count += int(q[-1]) - self.q_ref + (int(err[-1]) if err.size else 0)
        self.q_ref = int(q[-1])
        if track:
            last_single = _last_nonzero(single)
            if last_single >= 0:
                self.last_dir = int(_DECODE_TABLE[int(d[last_single]) & 3])
            moving = _last_nonzero(r)  # decoded as a step (ambiguous included)
            changed = max(last_single, int(big[moving]) if moving >= 0 else -1)
            if changed >= 0:
                self.last_change_s = float(times[changed])
        if big.size:
            n_amb = int(np.count_nonzero(amb))
            self.ambiguous.add_where(times, big, db, amb, n_amb)
            self.silent.add_where(times, big, db, ~amb if n_amb else None, big.size - n_amb)
            self._log_errors(times, err, big, err_before)

    def _directions(self, d, single, odd_at, odd_dec, at):
        """Direction of the last single step before each read ``at`` (earlier reads: ``last_dir`` or +1).

        Directions change rarely, so only the singles that turn the direction
        round are searched.
        """
        one = np.flatnonzero(single)
        if not one.size:
            return np.full(at.size, self.last_dir or 1, dtype=np.int64)
        way = d[one]  # ±1 where decoded right ...
        if odd_at.size:
            way[one.searchsorted(odd_at)] = odd_dec  # ... the decoded single step of a silent read
        turns = np.flatnonzero(way[1:] != way[:-1]) + 1
        # Each direction holds from a single step to the next turn: cut the reads ``at`` there.
        cuts = np.empty(turns.size + 3, dtype=np.int64)
        cuts[0], cuts[-1] = 0, at.size
        cuts[1:-1] = at.searchsorted(np.concatenate((one[:1], one[turns])))
        ways = np.concatenate(([self.last_dir or 1], way[:1], way[turns])).astype(np.int64)
        return ways.repeat(np.diff(cuts))

    def _guess(self, decoded, amb):
        single = (decoded == 1) | (decoded == -1)
        idx = np.where(single, np.arange(decoded.size), -1)
        last = np.maximum.accumulate(idx)
        fallback = self.last_dir or 1
        direction = np.where(last >= 0, decoded[np.maximum(last, 0)], fallback)
        return np.where(amb, 2 * direction, decoded)

    def _bulk(self, times, q, d, decoded, amb, silent, path, i, j):
        """Apply reads i..j-1 that stay in range (``path`` starts at read i)."""
        if j <= i:
            return
        seg = slice(i, j)
        self.count = int(path[j - i - 1])
        self.q_ref = int(q[j - 1])
        dec = decoded[seg]
        moved = np.flatnonzero(dec) if (self.adaptive or self.settings.ambiguous_policy
                                         is AmbiguousPolicy.GUESS_LAST_DIRECTION) else np.empty(0)
        if moved.size:
            self.last_change_s = float(times[i + moved[-1]])
            singles = np.flatnonzero((dec == 1) | (dec == -1))
            if singles.size:
                self.last_dir = int(dec[singles[-1]])
        a, s_ = amb[seg], silent[seg]
        if a.any() or s_.any():
            d_true = d[seg]
            if a.any():
                self.ambiguous.add(times[seg][a], d_true[a])
            if s_.any():
                self.silent.add(times[seg][s_], d_true[s_])
            ev = a | s_
            self._log_errors(times[seg][ev], path[: j - i][ev] - self._truth(q[seg][ev]))
        w0, w1 = self.trace_window
        if self.tr_n < self.trace_max and times[i] <= w1 and times[j - 1] >= w0:
            tt = times[seg]
            m = (tt >= w0) & (tt <= w1)
            self._trace(tt[m], q[seg][m], path[: j - i][m])

    def _single_overflow(self, times, q, amb, silent, d, step, k):
        new, overflowed, fault = apply_count(self.count, step, self.settings)
        self.count = new
        self.overflows += overflowed
        self.q_ref = int(q[k])
        self.last_change_s = float(times[k])
        if step in (1, -1):
            self.last_dir = step
        if amb[k]:
            self.ambiguous.add(times[k:k + 1], d[k:k + 1])
        if silent[k]:
            self.silent.add(times[k:k + 1], d[k:k + 1])
        self._log_error(times[k], self.count, q[k])
        self._trace(times[k:k + 1], q[k:k + 1], np.array([self.count]))
        if fault:
            self._enter_fault(float(times[k]))

    def _trace(self, t, q, count):
        w0, w1 = self.trace_window
        if not len(t) or self.tr_n >= self.trace_max or t[0] > w1 or t[-1] < w0:
            return
        room = self.trace_max - self.tr_n
        t, q, count = t[:room], q[:room], count[:room]
        self.tr_t.append(np.array(t, dtype=np.float64))  # copy: t may view a work array
        self.tr_true.append(self._truth(np.asarray(q)))
        self.tr_count.append(np.asarray(count, dtype=np.int64))
        self.tr_n += len(t)

    # ------------------------------------------------------- special spans
    def _rehome(self, t, q):
        truth = int(self._truth(q))
        st = self.settings
        self.count = truth if st.min_count <= truth <= st.max_count else \
            apply_count(st.start_count, truth - st.start_count, st)[0]
        self.fault = False
        self.rehomes += 1
        self.last_dir = 0
        self.q_ref = q
        self._log_error(t, self.count, q)

    def _drive(self, a, b):
        qa = int(self._q(np.array([a]))[0])
        if not self.fault:
            at = np.array([a])
            if self._apply(at, at, np.array([qa]), stop_on_change=False) is not None:
                self.poll_faults -= 1  # the fault came from the read at the drive start
                self.move_faults += 1
        if self.fault:
            if not self.rehome:
                self.t_fault += b - a
                return
            self._rehome(a, qa)
        qb = int(self._q(np.array([b]))[0])
        new, overflowed, fault = apply_count(self.count, qb - self.q_ref, self.settings)
        self.count, self.q_ref = new, qb
        self.overflows += overflowed
        self.moves += 1
        self.t_tracking += b - a
        if overflowed:
            self._log_error(b, self.count, qb)
        if fault:
            self._enter_fault(b)
            self.move_faults += 1
        if self.adaptive:
            self.fast = True
            self.fast_anchor = b
            self.fast_until = b + self.schedule.hold_s
        w0, w1 = self.trace_window
        if a <= w1 and b >= w0:
            self._trace(np.array([b]), np.array([qb]), np.array([self.count]))

    def _lose_power(self, a, b):
        self.t_power += b - a
        self.losses += 1
        qb = int(self._q(np.array([b]))[0])
        self.count = self.settings.start_count
        self.q_ref = qb
        self.last_dir = 0
        self.fast = False
        self.slow_anchor = b
        self._log_error(b, self.count, qb)
        if not self.fault:
            self._enter_fault(b)

    # --------------------------------------------------------------- result
    def _result(self) -> SimulationResult:
        sch = self.schedule
        polls = self.slow_polls + self.fast_polls
        times = {
            "waking": polls * (sch.wake_time_s + sch.settle_time_s),
            "polling": self.slow_polls * sch.poll_time_s,
            "fast_polling": self.fast_polls * sch.poll_time_s,
            "tracking": self.t_tracking,
            "fault": self.t_fault,
            "power_lost": self.t_power,
        }
        times["asleep"] = self.duration - sum(times.values())
        state_time = {name: float(times[name]) for name in _STATES}
        entries = {
            "asleep": polls - self.poll_faults + self.moves - self.move_faults,
            "waking": polls,
            "polling": self.slow_polls,
            "fast_polling": self.fast_polls,
            "tracking": self.moves,
            "fault": self.faults,
            "power_lost": self.losses,
        }
        q_end = int(self._q(np.array([self.duration]))[0])
        truth_end = int(self._truth(q_end))
        err_t = np.concatenate([np.asarray(self.err_t)] + self.err_t_arrays) if self.err_t_arrays \
            else np.asarray(self.err_t, dtype=np.float64)
        err_v = np.concatenate([np.asarray(self.err_v, dtype=np.int64)] + self.err_v_arrays) \
            if self.err_v_arrays else np.asarray(self.err_v, dtype=np.int64)
        order = np.argsort(err_t, kind="stable")
        w0, w1 = self.trace_window
        dense_t = np.linspace(w0, w1, 4001)
        cat = (lambda parts, dt: np.concatenate(parts) if parts else np.empty(0, dtype=dt))
        ambiguous = self.ambiguous.freeze()
        silent = self.silent.freeze()
        return SimulationResult(
            duration_s=self.duration,
            state_time_s=state_time,
            state_entries={name: int(entries[name]) for name in _STATES},
            wake_count=polls,
            poll_count=polls,
            fast_poll_count=self.fast_polls,
            move_count=self.moves,
            final_count=int(self.count),
            true_final_count=truth_end,
            final_count_error=int(self.count) - truth_end,
            ambiguous_events=ambiguous,
            ambiguous_count=self.ambiguous.total,
            silent_events=silent,
            silent_error_count=self.silent.total,
            overflow_count=self.overflows,
            fault_count=self.faults,
            rehome_count=self.rehomes,
            error_history_times_s=err_t[order],
            error_history_quarter_turns=err_v[order],
            max_abs_error_quarter_turns=int(self.err_max),
            trace_poll_times_s=cat(self.tr_t, np.float64),
            trace_true_count=cat(self.tr_true, np.int64).astype(np.int64),
            trace_decoded_count=cat(self.tr_count, np.int64),
            trace_time_s=dense_t,
            trace_angle_deg=self.profile.angle_deg(dense_t),
            trace_window_s=(w0, w1),
        )
