"""Counting with real latches: the limits, the back-drive check, its advice and the scenarios.

Everything here rests on one function, :func:`turnkit.latches.quadrant_widths`
(the narrowest quadrant of a unit inside the latch tolerances), and on the
bounds of :mod:`turnkit.bounds` built on it, with the poll jitter taken as a
fraction of each period (worst interval T·(1 + 2j)). The sizing engine, the
symbolic equations, the dashboard's limit line and every piece of advice use
the same numbers, so advice computed here passes its check when applied.

Wording: a check says the model counts a speed "with N % margin" (N = share
of the bound left unused); it never says a count is always right.

Caution: a lost or wrong count moves an actuator to the wrong place,
sometimes silently. These are design estimates; where position feeds a
safety function follow the applicable functional-safety standards, local
codes and licensed practice.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from decimal import ROUND_CEILING, ROUND_FLOOR, Decimal
from typing import Any

from . import bounds
from .errors import DesignValueError
from .latches import QuadrantLatches, QuadrantWidths, quadrant_widths, worst_case_edge_shifts_deg
from .result import Check, Scenario, Value

__all__ = [
    "CountingLimits",
    "DesignChange",
    "BackdriveReport",
    "counting_limits",
    "latches_of",
    "effective_latch_angles_deg",
    "field_latch_angles_deg",
    "unit_edge_shifts_deg",
    "backdrive_report",
    "allowed_poll_period_s",
    "scenario_row",
    "scenario_changes",
    "round_up_sig",
]


def field_latch_angles_deg(design) -> tuple[float, float] | None:
    """Switch-angle spread and hysteresis (deg, deg) that the magnet's field gives the latches over the
    service temperatures, or None without ``[magnet]`` and latch operate/release points."""
    if getattr(design, "magnet", None) is None or design.latches.operate_field_mT is None:
        return None
    from .sizing import latch_switch_spread_from_field

    return latch_switch_spread_from_field(design)


def effective_latch_angles_deg(design) -> tuple[float, float]:
    """Switch-point tolerance and hysteresis (deg, deg) the counting model uses: the ``[latches]`` values,
    or the magnet's field-derived ones where those are wider (the field sets where a latch really switches)."""
    lt = design.latches
    field = field_latch_angles_deg(design)
    if field is None:
        return lt.switch_point_tolerance_deg, lt.hysteresis_deg
    tolerance = max(lt.switch_point_tolerance_deg, float(field[0]))
    hysteresis = max(lt.hysteresis_deg, float(field[1]))
    if not tolerance + hysteresis / 2.0 < 45.0:
        # The field does not switch the latches cleanly (too weak, too far): the latch field checks
        # fail and say so; the counting bounds keep the stated values rather than no bound at all.
        return lt.switch_point_tolerance_deg, lt.hysteresis_deg
    return tolerance, hysteresis


def latches_of(design) -> QuadrantLatches:
    """The :class:`~turnkit.latches.QuadrantLatches` of a design: its ``[latches]`` section, widened to the
    magnet's field-derived switch spread and hysteresis where those are larger."""
    lt = design.latches
    tolerance_deg, hysteresis_deg = effective_latch_angles_deg(design)
    try:
        return QuadrantLatches(switch_point_tolerance_deg=tolerance_deg,
                               hysteresis_deg=hysteresis_deg,
                               magnet_misalignment_deg=lt.magnet_misalignment_deg, powered=lt.powered)
    except DesignValueError as exc:
        name = exc.field.split(".", 1)[-1]
        raise DesignValueError(f"latches.{name}", exc.value, exc.allowed, unit=exc.unit, hint=exc.hint) from None


def unit_edge_shifts_deg(design) -> tuple[float, float, float, float]:
    """Latch edge shifts of the simulated unit, deg: the design's own, else the worst case."""
    given = design.latches.edge_shifts_deg
    return tuple(given) if given is not None else worst_case_edge_shifts_deg(latches_of(design))


@dataclass(frozen=True, slots=True)
class CountingLimits:
    """The counter's speed limits for one design (latch widths, jitter and margin included).

    Attributes
    ----------
    widths : QuadrantWidths
        Narrowest quadrant and two-quadrant span (deg).
    jitter : float
        Poll jitter as a fraction of each poll period.
    margin : float
        Counting margin asked for (fraction of the bound left unused).
    slow_period_s : float
        Nominal slow (idle) poll period, s; it sets the guarantee.
    worst_interval_s : float
        Longest time between two reads, slow period · (1 + 2·jitter), s.
    trackable_rpm : float
        Fastest motor speed every read decodes right, rpm (no margin).
    silent_rpm : float
        Motor speed above which (strictly) a read can be silently wrong, rpm.
    """

    widths: QuadrantWidths
    jitter: float
    margin: float
    slow_period_s: float
    worst_interval_s: float
    trackable_rpm: float
    silent_rpm: float

    def max_poll_period_s(self, speed_rpm: float) -> float:
        """Longest slow poll period that counts ``speed_rpm`` with the margin, s."""
        return bounds.max_poll_period_s(speed_rpm, self.widths.narrowest_quadrant_deg, self.jitter, self.margin)

    def margin_at(self, speed_rpm: float) -> float:
        """Share of the bound left unused at ``speed_rpm`` (negative above the bound)."""
        return bounds.counting_margin(speed_rpm, self.trackable_rpm)


def counting_limits(design) -> CountingLimits:
    """The :class:`CountingLimits` of a design.

    Parameters
    ----------
    design : ActuatorDesign

    Returns
    -------
    CountingLimits
    """
    widths = quadrant_widths(latches_of(design))
    j = design.schedule.jitter
    slow_s = design.schedule.poll_period_ms / 1e3
    return CountingLimits(
        widths=widths, jitter=j, margin=design.requirements.counting_margin, slow_period_s=slow_s,
        worst_interval_s=slow_s * (1.0 + 2.0 * j),
        trackable_rpm=bounds.max_trackable_speed_rpm(slow_s, widths.narrowest_quadrant_deg, j),
        silent_rpm=bounds.silent_error_speed_rpm(slow_s, widths.narrowest_two_quadrants_deg, j))


@dataclass(frozen=True, slots=True)
class DesignChange:
    """One piece of advice as changes to design fields.

    Attributes
    ----------
    text : str
        The advice in words, with the value(s) as applied.
    changes : tuple of (section, attribute, value)
        Each a section attribute of :class:`~turnkit.design.ActuatorDesign`
        (``"schedule"``), a field attribute of that section
        (``"poll_period_ms"``) and its new value (in the attribute's unit).
    """

    text: str
    changes: tuple[tuple[str, str, Any], ...]

    def apply(self, design):
        """The design with these changes (validated again)."""
        by_section: dict[str, dict[str, Any]] = {}
        for section, attr, value in self.changes:
            by_section.setdefault(section, {})[attr] = value
        return dataclasses.replace(design, **{
            section: dataclasses.replace(getattr(design, section), **fields)
            for section, fields in by_section.items()})


def _floor_sig(x: float, digits: int = 4) -> float:
    """``x`` rounded down to ``digits`` significant figures (a hair below x, so it is never above)."""
    if not (math.isfinite(x) and x > 0):
        return x
    d = Decimal(repr(x * (1.0 - 1e-9)))
    step = Decimal(1).scaleb(d.adjusted() - (digits - 1))
    return float((d / step).to_integral_value(rounding=ROUND_FLOOR) * step)


def round_up_sig(x: float, digits: int = 4) -> float:
    """``x`` rounded up to ``digits`` significant figures, so that advice "at least x" passes when followed.

    Examples
    --------
    >>> round_up_sig(1309.1305)
    1310.0
    """
    if not (math.isfinite(x) and x > 0):
        return x
    d = Decimal(repr(x * (1.0 + 1e-9)))
    step = Decimal(1).scaleb(d.adjusted() - (digits - 1))
    return float((d / step).to_integral_value(rounding=ROUND_CEILING) * step)


def _valid(design, change: DesignChange) -> bool:
    try:
        change.apply(design)
    except (DesignValueError, ValueError):
        return False
    return True


def _poll_change(design, period_s: float, why: str) -> DesignChange | None:
    """Advice to poll at least every ``period_s`` (rounded down), or None when the electronics cannot."""
    t_ms = _floor_sig(period_s * 1e3)
    s = design.schedule
    changes = [("schedule", "poll_period_ms", t_ms)]
    text = f"poll at least every {t_ms:.4g} ms"
    if s.kind == "adaptive" and s.fast_poll_period_ms >= t_ms:
        fast = _floor_sig(t_ms * s.fast_poll_period_ms / s.poll_period_ms)
        changes.append(("schedule", "fast_poll_period_ms", fast))
        text += f" (fast polls every {fast:.4g} ms)"
    change = DesignChange(text + why, tuple(changes))
    return change if _valid(design, change) else None


@dataclass(frozen=True, slots=True)
class BackdriveReport:
    """The back-drive counting values, check and advice of one design.

    Attributes
    ----------
    values : tuple of Value
    check : Check or None
        The back-drive check (None without a required back-drive speed).
    changes : tuple of DesignChange
        Followable advice when the check fails, each computed from the check's own bound.
    max_poll_period_s : float or None
        Longest slow poll period counting the required speed with the margin, s.
    """

    values: tuple[Value, ...]
    check: Check | None
    changes: tuple[DesignChange, ...]
    max_poll_period_s: float | None


def backdrive_report(design, limits: CountingLimits, required_rpm: float | None, req_speed: float | None,
                     out_speed_unit: str, output_per_motor_rpm: float, reduction: float) -> BackdriveReport:
    """Values, the back-drive check and its advice.

    Parameters
    ----------
    design : ActuatorDesign
    limits : CountingLimits
    required_rpm : float or None
        Motor speed at the required back-drive speed, rpm.
    req_speed : float or None
        The required back-drive speed at the output (``out_speed_unit``).
    out_speed_unit : str
        "rpm" or "mm/s".
    output_per_motor_rpm : float
        Output speed per motor rpm (``out_speed_unit`` per rpm).
    reduction : float
        Overall reduction (for the reduction advice), :1.

    Returns
    -------
    BackdriveReport
    """
    w = limits.widths
    m_req = limits.margin
    trackable_out = limits.trackable_rpm * output_per_motor_rpm
    where = "latches powered only around each poll" if w.powered == "during_polls" else "latches always powered"
    vals = [
        Value("narrowest_quadrant_deg", "Narrowest quadrant between two latch edges (worst unit)",
              w.narrowest_quadrant_deg, "deg", "schedule", equation="max_trackable_speed",
              note=f"90 deg less twice {w.edge_spread_deg:.3g} deg (tolerance {w.switch_point_tolerance_deg:.3g}"
                   f" deg + hysteresis counted {w.hysteresis_counted_deg:.3g} deg; {where})"),
        Value("trackable_motor_speed_rpm", "Fastest motor speed counted by the model while asleep (no margin)",
              limits.trackable_rpm, "rpm", "schedule", equation="max_trackable_speed",
              note=f"narrowest quadrant per longest interval between reads ({limits.worst_interval_s * 1e3:.4g} ms"
                   f" with jitter)"),
        Value("trackable_output_speed", "Fastest output speed counted by the model while asleep (no margin)",
              trackable_out, out_speed_unit, "schedule"),
        Value("silent_error_motor_speed_rpm", "Motor speed above which miscounts can be silent", limits.silent_rpm,
              "rpm", "schedule", equation="silent_error_onset_speed",
              note=f"narrowest two quadrants {w.narrowest_two_quadrants_deg:.4g} deg per interval"),
    ]
    if required_rpm is None:
        return BackdriveReport(tuple(vals), None, (), None)
    n = abs(required_rpm)
    t_max = limits.max_poll_period_s(n)
    m_now = limits.margin_at(n)
    vals += [
        Value("backdrive_motor_speed_rpm", "Motor speed at the required back-drive speed", required_rpm, "rpm",
              "schedule", equation="backdrive_motor_speed"),
        Value("max_poll_period_ms", f"Longest poll period counting the required back-drive speed with "
              f"{m_req * 100:.3g} % margin", t_max * 1e3, "ms", "schedule", equation="max_poll_period",
              note="latch tolerances and jitter included"),
        Value("backdrive_counting_margin_percent", "Margin with which the model counts the required back-drive "
              "speed", m_now * 100, "%", "schedule",
              note=(f"counted by the model with {m_now * 100:.3g} % margin (asked: {m_req * 100:.3g} %)"
                    if m_now >= 0 else f"not counted: {-m_now * 100:.3g} % beyond the model's bound")),
    ]
    label = (f"Required back-drive speed counted by the model with at least {m_req * 100:.3g} % margin "
             "while asleep")
    counted = trackable_out * (1.0 - m_req)
    if abs(counted - req_speed) <= 1e-12 * abs(req_speed):
        counted = float(req_speed)  # the bound is inclusive: exactly at it passes, whatever the last bit
    check = Check("backdrive_speed", label, counted, float(req_speed), out_speed_unit, ">=")
    changes: list[DesignChange] = []
    if not check.passed:
        why = f" (counts {req_speed:g} {out_speed_unit} with {m_req * 100:.3g} % margin, jitter included)"
        poll = _poll_change(design, t_max, why)
        if poll is not None:
            changes.append(poll)
        no_poll = ""
        if poll is None:
            sch = design.schedule
            awake_ms = (sch.wake_time_us + sch.settle_time_us + sch.poll_time_us) / 1e3
            no_poll = (f"no poll period can: the speed needs a poll every {t_max * 1e3:.4g} ms, which the "
                       f"electronics cannot reach (each wake-up takes {awake_ms:.4g} ms: wake, settle and poll "
                       "time); ")
        # Narrowest quadrant needed at this poll period, then the tolerance that gives it.
        w_need = n * 6.0 * limits.worst_interval_s / (1.0 - m_req)
        spread_max = (90.0 - w_need) / 2.0
        tol = _floor_sig(spread_max - w.hysteresis_counted_deg, 3)
        field = field_latch_angles_deg(design)
        if field is not None and float(field[0]) > tol:
            tol = 0.0  # the magnet's field alone spreads the switch angles wider: a tighter part cannot help
        if tol > 0:
            c = DesignChange(f"tighten the latch switch-point tolerance to {tol:.3g} deg",
                             (("latches", "switch_point_tolerance_deg", tol),))
            if _valid(design, c):
                changes.append(c)
        if w.hysteresis_counted_deg > 0 and w.switch_point_tolerance_deg <= spread_max:
            changes.append(DesignChange("keep the latches powered all the time (powered = 'always'), so that "
                                        "their hysteresis no longer narrows the quadrant",
                                        (("latches", "powered", "always"),)))
        if 0 < m_now < m_req:
            m_ok = _floor_sig(m_now, 2)
            changes.append(DesignChange(f"after review, accept a counting margin of {m_ok * 100:.3g} % "
                                        "(requirements.counting_margin)",
                                        (("requirements", "counting_margin", m_ok),)))
        g_max = reduction * (1.0 - m_req) * limits.trackable_rpm / n
        advice = "; or ".join(c.text for c in changes)
        advice += (f"; or lower the reduction to at most {_floor_sig(g_max):.4g}:1" if advice else
                   f"lower the reduction to at most {_floor_sig(g_max):.4g}:1")
        check = dataclasses.replace(check, advice=no_poll + advice)
    return BackdriveReport(tuple(vals), check, tuple(changes), t_max)


def _scenario_limited(kind: str, peak_rpm: float, peak_to_peak_deg: float | None, limits: CountingLimits) -> bool:
    """True when a scenario's speed limits the poll period (a small vibration never does)."""
    if not peak_rpm or not math.isfinite(peak_rpm):
        return False
    if kind == "vibration" and peak_to_peak_deg is not None:
        return peak_to_peak_deg > limits.widths.narrowest_quadrant_deg * (1.0 - limits.margin)
    return True


def allowed_poll_period_s(limits: CountingLimits, required_rpm: float | None,
                          scenario_peaks: tuple[tuple[str, str, float, float | None], ...]
                          ) -> tuple[float | None, str]:
    """Longest slow poll period that counts every speed with the margin, and what sets it.

    Parameters
    ----------
    limits : CountingLimits
    required_rpm : float or None
        Motor speed at the required back-drive speed, rpm.
    scenario_peaks : tuple of (name, kind, peak motor rpm, peak-to-peak motor deg or None)

    Returns
    -------
    (period_s or None, reason)
    """
    best, why = None, ""
    if required_rpm:
        best, why = limits.max_poll_period_s(required_rpm), "the required back-drive speed"
    for name, kind, peak, p2p in scenario_peaks:
        if _scenario_limited(kind, peak, p2p, limits):
            t = limits.max_poll_period_s(peak)
            if best is None or t < best:
                best, why = t, f"scenario {name!r} ({peak:.4g} rpm at the motor)"
    return best, why


def scenario_changes(design, limits: CountingLimits, kind: str, peak_rpm: float, overflowed: bool,
                     peak_to_peak_deg: float | None = None) -> tuple[DesignChange, ...]:
    """Followable advice for a failed scenario: a poll period that counts its peak speed with the margin."""
    if overflowed:
        return ()
    if not _scenario_limited(kind, peak_rpm, peak_to_peak_deg, limits):
        return ()
    t = limits.max_poll_period_s(peak_rpm)
    change = _poll_change(design, t, f" to count its {abs(peak_rpm):.4g} rpm (motor) with {limits.margin * 100:.3g}"
                                     " % margin")
    return (change,) if change is not None else ()


def scenario_row(design, sc, result, peak_rpm: float, train, limits: CountingLimits, unit: str,
                 peak_to_peak_deg: float | None = None) -> Scenario:
    """The :class:`~turnkit.result.Scenario` of one simulated motion, with advice when it fails.

    The output error is the largest count error at the output over the run,
    the final one included (motion after a fault is not counted, so the
    final error can be the largest).
    """
    from .counter import quarter_turns_to_output

    # The largest history error comes with the result, so the history may keep only its first entries.
    final_out = abs(float(quarter_turns_to_output(result.final_count_error, train)))
    max_err = max(abs(float(quarter_turns_to_output(result.max_abs_error_quarter_turns, train))), final_out)
    note = ""
    if result.silent_error_count:
        note = "silent miscounts: the count is wrong with no error flagged"
    elif result.ambiguous_count:
        note = "ambiguous steps flagged: position no longer trusted, re-homing needed"
    elif peak_rpm > limits.trackable_rpm:
        note = "faster than the model's bound at times, but counted right in this run"
    row = Scenario(
        name=sc.name, kind=sc.kind, duration_s=result.duration_s, peak_motor_speed_rpm=peak_rpm,
        polls=result.poll_count, final_count_error_qt=result.final_count_error,
        ambiguous_count=result.ambiguous_count, silent_error_count=result.silent_error_count,
        overflow_count=result.overflow_count, max_output_error=max_err, output_unit=unit, note=note)
    if not row.passed:
        if result.overflow_count:
            advice = "widen the counter or home nearer the middle of its range"
        else:
            changes = scenario_changes(design, limits, sc.kind, peak_rpm, False, peak_to_peak_deg)
            if changes:
                advice = changes[0].text
            elif _scenario_limited(sc.kind, peak_rpm, peak_to_peak_deg, limits):
                advice = ("no poll period the electronics can reach counts it with the margin: lower the reduction "
                          "or the speed")
            else:
                advice = "its speed is inside the model's bound, so check the scenario itself and the counter policy"
        row = dataclasses.replace(row, note=(note + "; " if note else "") + "to fix: " + advice)
    return row
