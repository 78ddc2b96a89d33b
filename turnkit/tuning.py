"""The design quantities a person tunes by hand, as data for any front end.

Each :class:`Tunable` names one quantity of an
:class:`~turnkit.design.ActuatorDesign` with its unit, a sensible range and
scale, how to read it from a design and how to make a new design with another
value (through :func:`dataclasses.replace`, so the design stays immutable and
validated). The notebook dashboard builds one control per tunable and does
nothing else with the design; scripts can use the same table for sweeps.

Examples
--------
>>> from turnkit.designfile import load_design            # doctest: +SKIP
>>> design = load_design("demo/irrigation-gate-valve.toml")  # doctest: +SKIP
>>> period = tunable(design, "schedule.poll_period_ms")       # doctest: +SKIP
>>> faster = period.set(design, 5.0)                         # doctest: +SKIP
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Callable

from .design import ActuatorDesign
from .errors import DesignValueError

__all__ = ["Tunable", "tunables_for", "tunable", "battery_choices"]


@dataclass(frozen=True)
class Tunable:
    """One tunable quantity.

    Parameters
    ----------
    key : str
        Stable name, the design-file path of the quantity
        (``"schedule.poll_period_ms"``, ``"gear_train[1].teeth_driven"``).
    label : str
        Label for people, with the unit.
    unit : str
        Unit of the value (``"ms"``, ``"uA"``, ``""``).
    minimum, maximum : float
        Range offered to the user (the design's own validation still applies).
    log : bool
        True when the control should move on a logarithmic scale.
    step : float
        Step of the control (1 for tooth counts).
    integer : bool
        True for whole numbers.
    choices : tuple of str
        For a choice (e.g. the battery), the allowed values; empty otherwise.
    getter, setter : callables
        ``getter(design) -> value``; ``setter(design, value) -> new design``.
    explain : callable, optional
        ``explain(old_design, new_design) -> str``: what a change did besides
        this quantity (e.g. a planetary stage's planet teeth), "" when nothing.
    """

    key: str
    label: str
    unit: str
    minimum: float
    maximum: float
    log: bool
    step: float
    getter: Callable[[ActuatorDesign], Any]
    setter: Callable[[ActuatorDesign, Any], ActuatorDesign]
    integer: bool = False
    choices: tuple[str, ...] = ()
    group: str = ""
    explain: Callable[[ActuatorDesign, ActuatorDesign], str] | None = None

    def get(self, design: ActuatorDesign):
        """The current value in ``design``."""
        return self.getter(design)

    def set(self, design: ActuatorDesign, value) -> ActuatorDesign:
        """A new design with this quantity set to ``value`` (validated).

        ``value`` is a number in :attr:`unit`, or text as a person types it:
        a quantity with a unit (``"50 ms"``, ``"0.05 s"``) or a bare number
        in :attr:`unit`. The value is stored as given (no grid, no clamping);
        the design's own validation still applies.
        """
        if self.choices:
            if value not in self.choices:
                raise DesignValueError(self.key, value, "one of " + ", ".join(self.choices))
        else:
            value = self.parse(value) if isinstance(value, str) else value
            value = int(round(value)) if self.integer else float(value)
        return self.setter(design, value)

    def parse(self, text: str) -> float:
        """The number in :attr:`unit` that ``text`` ("50 ms", "0.05 s", "50") stands for.

        Raises
        ------
        DesignValueError
            When the text is not a quantity of this unit's dimension, or a
            tooth count is not a whole number.
        """
        from .units import to_magnitude

        if self.choices:
            raise DesignValueError(self.key, text, "one of " + ", ".join(self.choices))
        value = to_magnitude(text, self.unit or "dimensionless", self.key)
        if not math.isfinite(value):
            raise DesignValueError(self.key, text, "a finite number", unit=self.unit)
        if self.integer and not float(value).is_integer():
            raise DesignValueError(self.key, text, "a whole number")
        return value

    def in_range(self, value: float) -> bool:
        """True when ``value`` lies in the range the control offers."""
        return self.minimum <= value <= self.maximum


def battery_choices() -> tuple[str, ...]:
    """Keys of the built-in cells (the battery choice list)."""
    from .battery import available_cells

    return available_cells()


def _stage_setter(index: int, attr: str, extra: Callable[[Any, int], dict] | None = None):
    def setter(design: ActuatorDesign, value):
        stages = list(design.gear_train)
        changes = {attr: value}
        if extra is not None:
            changes.update(extra(stages[index], value))
        stages[index] = replace(stages[index], **changes)
        return replace(design, gear_train=tuple(stages))
    return setter


def _planet_for(stage, ring: int) -> dict:
    # Keep the planets meshing (ring = sun + 2 planet) when the ring changes.
    if stage.planet_teeth is None:
        return {}
    diff = ring - stage.sun_teeth
    return {"planet_teeth": diff // 2} if diff % 2 == 0 and diff > 0 else {"planet_teeth": None}


def _planet_change(index: int):
    """Say what a ring-teeth change did to the stage's planet teeth."""
    def explain(old: ActuatorDesign, new: ActuatorDesign) -> str:
        before, after = old.gear_train[index].planet_teeth, new.gear_train[index].planet_teeth
        if before == after:
            return ""
        where = f"stage {index + 1}"
        if after is None:
            return (f"{where}: planet teeth cleared (were {before}): ring minus sun teeth is odd, so no planet "
                    "size meshes with both")
        return f"{where}: planet teeth changed from {before} to {after} so the planets still mesh"
    return explain


def _scale_currents(states: tuple[str, ...]):
    def getter(design: ActuatorDesign) -> float:
        return sum(getattr(c, f"{states[0]}_uA") for c in design.power.consumers)

    def setter(design: ActuatorDesign, value: float) -> ActuatorDesign:
        consumers = design.power.consumers
        total = getter(design)
        new = []
        for i, c in enumerate(consumers):
            if total > 0:
                factor = value / total
                new.append(replace(c, **{f"{s}_uA": getattr(c, f"{s}_uA") * factor for s in states}))
            else:
                # Nothing to scale: put the whole value on the first consumer.
                new.append(replace(c, **{f"{s}_uA": (value if i == 0 else getattr(c, f"{s}_uA")) for s in states}))
        return replace(design, power=replace(design.power, consumers=tuple(new)))
    return getter, setter


def _section_setter(section: str, attr: str):
    def setter(design: ActuatorDesign, value):
        return replace(design, **{section: replace(getattr(design, section), **{attr: value})})
    return setter


def _span(value: float, low_factor: float, high_factor: float, floor: float, ceiling: float) -> tuple[float, float]:
    lo = max(floor, min(value * low_factor, value))
    hi = min(ceiling, max(value * high_factor, value))
    return lo, hi


def tunables_for(design: ActuatorDesign) -> tuple[Tunable, ...]:
    """The tunables that make sense for ``design``, in display order.

    Gear teeth (one per rotary stage, the driven member), the lead or module
    of a final screw or rack, the poll period (and the fast period and hold
    time of an adaptive schedule), wake and settle time, the total sleep and
    wake currents (each scaled across the consumers in proportion), the
    latch switch-point tolerance, the battery cell and cell count, the
    required back-drive speed and the required counting margin.
    """
    out: list[Tunable] = []
    for i, stage in enumerate(design.gear_train):
        kind = stage.KIND
        name = f"Stage {i + 1} ({kind.replace('_', ' ')})"
        if kind in ("external", "internal") or (kind == "belt" and stage.teeth_driven is not None):
            lo = stage.teeth_driver + (10 if kind == "internal" else 1)
            hi = max(stage.teeth_driver * 8, stage.teeth_driven + 10)
            out.append(Tunable(f"gear_train[{i}].teeth_driven", f"{name}: driven teeth", "", lo, hi, False, 1,
                               (lambda d, i=i: d.gear_train[i].teeth_driven), _stage_setter(i, "teeth_driven"),
                               integer=True, group="gear train"))
        elif kind == "planetary":
            lo = stage.sun_teeth + 6
            hi = max(stage.sun_teeth * 8, stage.ring_teeth + 10)
            out.append(Tunable(f"gear_train[{i}].ring_teeth", f"{name}: ring teeth", "", lo, hi, False, 1,
                               (lambda d, i=i: d.gear_train[i].ring_teeth),
                               _stage_setter(i, "ring_teeth", _planet_for), integer=True, group="gear train",
                               explain=_planet_change(i)))
        elif kind == "worm":
            out.append(Tunable(f"gear_train[{i}].wheel_teeth", f"{name}: wheel teeth", "", 10,
                               max(120, stage.wheel_teeth + 20), False, 1,
                               (lambda d, i=i: d.gear_train[i].wheel_teeth), _stage_setter(i, "wheel_teeth"),
                               integer=True, group="gear train"))
        elif kind == "lead_screw":
            lo, hi = _span(stage.pitch_mm, 0.2, 5.0, 0.25, 50.0)
            out.append(Tunable(f"gear_train[{i}].pitch_mm", f"{name}: pitch (mm)", "mm", lo, hi, True, 0.05,
                               (lambda d, i=i: d.gear_train[i].pitch_mm), _stage_setter(i, "pitch_mm"),
                               group="gear train"))
        elif kind == "rack":
            lo, hi = _span(stage.module_mm, 0.25, 4.0, 0.1, 20.0)
            out.append(Tunable(f"gear_train[{i}].module_mm", f"{name}: module (mm)", "mm", lo, hi, True, 0.05,
                               (lambda d, i=i: d.gear_train[i].module_mm), _stage_setter(i, "module_mm"),
                               group="gear train"))

    s = design.schedule
    awake_ms = (s.wake_time_us + s.settle_time_us + s.poll_time_us) / 1e3
    lo, hi = _span(s.poll_period_ms, 0.05, 20.0, max(awake_ms * 1.5, 0.05), 10_000.0)
    if s.kind == "adaptive":
        lo = max(lo, s.fast_poll_period_ms)
    out.append(Tunable("schedule.poll_period_ms", "Poll period while asleep (ms)", "ms", lo, hi, True, 0.01,
                       lambda d: d.schedule.poll_period_ms, _section_setter("schedule", "poll_period_ms"),
                       group="schedule"))
    if s.kind == "adaptive":
        flo, fhi = _span(s.fast_poll_period_ms, 0.1, 10.0, max(awake_ms * 1.5, 0.05), 10_000.0)
        out.append(Tunable("schedule.fast_poll_period_ms", "Fast poll period after motion (ms)", "ms", flo, fhi, True,
                           0.01, lambda d: d.schedule.fast_poll_period_ms,
                           _section_setter("schedule", "fast_poll_period_ms"), group="schedule"))
        hlo, hhi = _span(max(s.hold_time_s, 0.01), 0.05, 20.0, 0.01, 3600.0)
        out.append(Tunable("schedule.hold_time_s", "Fast polling lasts after motion (s)", "s", hlo, hhi, True, 0.01,
                           lambda d: d.schedule.hold_time_s, _section_setter("schedule", "hold_time_s"),
                           group="schedule"))
    wlo, whi = _span(max(s.wake_time_us, 1.0), 0.1, 10.0, 1.0, 100_000.0)
    out.append(Tunable("schedule.wake_time_us", "Wake-up time (us)", "us", wlo, whi, True, 1.0,
                       lambda d: d.schedule.wake_time_us, _section_setter("schedule", "wake_time_us"),
                       group="schedule"))
    slo, shi = _span(max(s.settle_time_us, 1.0), 0.1, 10.0, 1.0, 100_000.0)
    out.append(Tunable("schedule.settle_time_us", "Latch settle time (us)", "us", slo, shi, True, 1.0,
                       lambda d: d.schedule.settle_time_us, _section_setter("schedule", "settle_time_us"),
                       group="schedule"))

    # Latch tolerance: it sets the narrowest quadrant and so every counting bound.
    lt = design.latches
    hyst = 0.5 * lt.hysteresis_deg if lt.powered == "during_polls" else 0.0
    out.append(Tunable("latches.switch_point_tolerance_deg", "Latch switch-point tolerance (deg)", "deg", 0.0,
                       max(min(30.0, 44.0 - hyst), lt.switch_point_tolerance_deg), False, 0.1,
                       lambda d: d.latches.switch_point_tolerance_deg,
                       _section_setter("latches", "switch_point_tolerance_deg"), group="latches"))

    if design.power.consumers:
        g, st = _scale_currents(("asleep",))
        now = g(design)
        lo, hi = _span(max(now, 0.01), 0.01, 100.0, 0.001, 10_000.0)
        out.append(Tunable("power.sleep_current_uA", "Sleep current, all consumers (uA)", "uA", lo, hi, True, 0.001,
                           g, st, group="power"))
        g2, st2 = _scale_currents(("waking", "polling"))
        now = g2(design)
        lo, hi = _span(max(now, 1.0), 0.05, 20.0, 1.0, 1_000_000.0)
        out.append(Tunable("power.wake_current_uA", "Wake and poll current, all consumers (uA)", "uA", lo, hi, True,
                           1.0, g2, st2, group="power"))

    b = design.battery
    if b is not None and b.chemistry is not None:
        choices = battery_choices()
        if b.chemistry in choices:
            out.append(Tunable("battery.chemistry", "Battery cell", "", 0, 0, False, 0,
                               lambda d: d.battery.chemistry, _section_setter("battery", "chemistry"),
                               choices=choices, group="battery"))
    if b is not None:
        out.append(Tunable("battery.cells_parallel", "Cells in parallel", "", 1, 8, False, 1,
                           lambda d: d.battery.cells_parallel, _section_setter("battery", "cells_parallel"),
                           integer=True, group="battery"))
    out.extend(_energy_tunables(design))

    r = design.requirements
    for attr, unit_, label in (("backdrive_speed_mm_per_s", "mm/s", "Required back-drive speed at the output (mm/s)"),
                               ("backdrive_speed_rpm", "rpm", "Required back-drive speed at the output (rpm)")):
        value = getattr(r, attr)
        if value is not None:
            lo, hi = _span(value, 0.05, 20.0, 1e-4, 1e5)
            out.append(Tunable(f"requirements.{attr}", label, unit_, lo, hi, True, value / 1000.0,
                               (lambda d, a=attr: getattr(d.requirements, a)),
                               _section_setter("requirements", attr), group="requirements"))
    if r.backdrive_speed_mm_per_s is not None or r.backdrive_speed_rpm is not None:
        out.append(Tunable("requirements.counting_margin", "Required counting margin (share of the bound unused)",
                           "", 0.0, max(0.8, r.counting_margin), False, 0.01,
                           lambda d: d.requirements.counting_margin,
                           _section_setter("requirements", "counting_margin"), group="requirements"))
    out.extend(_magnet_and_temperature_tunables(design))
    return tuple(out)


def _energy_tunables(design: ActuatorDesign) -> list[Tunable]:
    """Driven moves per day, the load, the motor's start current, and the site temperature
    (the coldest, when a range is given)."""
    out = []
    p = design.power
    if p.moves_per_day:
        lo, hi = _span(p.moves_per_day, 0.05, 20.0, 0.001, 1000.0)
        out.append(Tunable("power.moves_per_day", "Driven moves per day", "", lo, hi, True, 0.001,
                           lambda d: d.power.moves_per_day, _section_setter("power", "moves_per_day"),
                           group="power"))
        for attr, unit_ in (("move_load_N", "N"), ("move_load_N_m", "N*m")):
            value = getattr(p, attr)
            if value:
                lo, hi = _span(value, 0.05, 20.0, 1e-6, 1e6)
                out.append(Tunable(f"power.{attr}", f"Load at the output while driving ({unit_})", unit_, lo, hi,
                                   True, value / 1000.0, (lambda d, a=attr: getattr(d.power, a)),
                                   _section_setter("power", attr), group="power"))
        if p.motor_start_current_mA:
            lo, hi = _span(p.motor_start_current_mA, 0.05, 20.0, 0.1, 1e6)
            out.append(Tunable("power.motor_start_current_mA", "Motor start current (mA)", "mA", lo, hi, True,
                               0.1, lambda d: d.power.motor_start_current_mA,
                               _section_setter("power", "motor_start_current_mA"), group="power"))
    b = design.battery
    if b is not None:
        attr = "temperature_degC" if b.temperature_min_degC is None else "temperature_min_degC"
        value = getattr(b, attr)
        hi = 85.0 if attr == "temperature_degC" else b.temperature_max_degC
        lo = -40.0
        if b.chemistry is not None:
            from .battery import available_cells, cell

            if b.chemistry in available_cells():
                low_c, high_c = cell(b.chemistry).operating_range_C
                lo, hi = max(lo, low_c), min(hi, high_c)
        lo, hi = min(lo, value), max(hi, value)
        label = "Site temperature (degC)" if attr == "temperature_degC" else "Coldest site temperature (degC)"
        out.append(Tunable(f"battery.{attr}", label, "degC", lo, hi, False, 1.0,
                           (lambda d, a=attr: getattr(d.battery, a)), _section_setter("battery", attr),
                           group="battery"))
    return out


def tunable(design: ActuatorDesign, key: str) -> Tunable:
    """The tunable named ``key`` for ``design`` (KeyError lists the known keys)."""
    for t in tunables_for(design):
        if t.key == key:
            return t
    raise KeyError(f"no tunable {key!r}; known: {', '.join(t.key for t in tunables_for(design))}")


def log_position(t: Tunable, value: float) -> float:
    """Position 0..1 of ``value`` on the tunable's scale (for front ends)."""
    if t.log:
        return (math.log(value) - math.log(t.minimum)) / (math.log(t.maximum) - math.log(t.minimum))
    return (value - t.minimum) / (t.maximum - t.minimum)


def _magnet_and_temperature_tunables(design: ActuatorDesign) -> list[Tunable]:
    """Airgap and grade of the magnet (when described) and the service temperature range."""
    from .magnet import GRADES

    out: list[Tunable] = []
    m = design.magnet
    if m is not None:
        lo, hi = _span(m.airgap_mm, 0.1, 4.0, 0.1, 20.0)
        out.append(Tunable("magnet.airgap_mm", "Magnet airgap (mm)", "mm", lo, hi, False, 0.05,
                           lambda d: d.magnet.airgap_mm, _section_setter("magnet", "airgap_mm"), group="magnet"))
        out.append(Tunable("magnet.grade", "Magnet grade", "", 0, 0, False, 0, lambda d: d.magnet.grade,
                           _section_setter("magnet", "grade"), choices=tuple(GRADES), group="magnet"))
    for index, (attr, label) in enumerate((("service_temperature_low_degC", "Lowest service temperature (degC)"),
                                           ("service_temperature_high_degC", "Highest service temperature (degC)"))):
        out.append(Tunable(f"requirements.{attr}", label, "degC", -60.0, 125.0, False, 1.0,
                           lambda d, i=index: d.requirements.temperature_range_degC()[i],
                           _section_setter("requirements", attr), group="requirements"))
    return out

