"""The sizing engine: one call from a design to every number, check and curve.

:func:`size` turns an :class:`~turnkit.design.ActuatorDesign` into an
immutable :class:`~turnkit.result.SizingResult` through a list of named stages:
mechanics, counter range, sensing, speed bounds, power, advice, scenarios and
curves. Each stage builds its numeric models (gear train, angle sensor,
latches, counter, schedule, power, battery, motion), runs them, compares the
results with the requirements and returns its own :class:`Section` of the
result; :func:`assemble` joins the sections in order. It computes nothing on
its own that a model module already does: the arithmetic here is unit
bookkeeping and comparison.

Result keys (``result.value(key)``) carry their unit in the name; the curve
keys are ``"life_vs_poll_period"`` (or ``"current_vs_poll_period"`` on a host
supply), ``"backdrive_event"``, ``"backdrive_error"``,
``"resolution_vs_reduction"``, ``"backdrive_speed_vs_reduction"``,
``"current_profile"``, ``"sensor_error"`` and, when the design names a measured
sweep (``[sensor] sweep``), ``"calibration_sweep"``.

Examples
--------
>>> from turnkit.designfile import loads_design
>>> design = loads_design('''
... format_version = 1
... name = "bench valve"
... [[gear_train]]
... kind = "external"
... teeth_driver = 18
... teeth_driven = 54
... [[gear_train]]
... kind = "lead_screw"
... pitch = "2 mm"
... [[power.consumers]]
... name = "electronics"
... asleep = "2 uA"
... waking = "1 mA"
... polling = "1.5 mA"
... tracking = "3 mA"
... [battery]
... chemistry = "li_fes2_aa"
... cells_series = 2
... [requirements]
... stroke = "100 mm"
... backdrive_speed = "5 mm/s"
... battery_life = "5 years"
... ''')
>>> result = size(design, curves=False)
>>> result.value("ratio").value
'3'
>>> round(result.value("max_poll_period_ms").value, 3)
33.333
"""

from __future__ import annotations

import hashlib
import math
import tomllib
import warnings
from dataclasses import dataclass, replace
from fractions import Fraction
from functools import lru_cache
from pathlib import Path
from types import MappingProxyType
from typing import Any

import numpy as np

from . import __version__
from . import angle_error, battery as batt, bounds, gears, latches as latch_mod, power
from . import sensor as sensor_mod
from . import export as _export  # noqa: F401  (registers how a result draws itself in a notebook)
from . import simulation as sim
from .counter import CounterSettings
from .design import ActuatorDesign, MotionScenario
from .errors import DesignValueError, TurnkitWarning
from .motion import (AtOutput, BackDriveBursts, CoastDown, ConstantSpeed, MotionProfile, TrapezoidMove,
                     Vibration, load_trace_csv, output_speed_to_motor_rpm)
from .result import (Band, Check, Curve, EquationText, Marker, Scenario, Series, SizingResult, Value)
from .schedule import AdaptiveSchedule, FixedSchedule

__all__ = [
    "size",
    "build_train",
    "build_sensor",
    "build_latches",
    "build_counter",
    "build_schedule",
    "build_profile",
    "build_battery",
    "build_motion",
    "motor_rpm_for_output_speed",
    "usable_fraction",
    "output_speed_for_motor_rpm",
    "GENERAL_CAUTIONS",
]

#: Cautions every summary carries, in our own words.
GENERAL_CAUTIONS: tuple[str, ...] = (
    "Powered actuators pinch and crush: a geared output is slow but strong, and meshes, screw nuts, "
    "racks and the driven load can trap fingers and hands. Assess the machine (for example under "
    "ISO 12100), keep or guard safe gaps, and follow your local codes.",
    "A lost or wrong count moves the actuator to the wrong place, sometimes without any error shown "
    "(three quarter-steps between two polls read as one step back). Re-home after any battery event "
    "or fault, and never rely on the count alone where a wrong position can hurt someone.",
    "These figures are design estimates, not a safety case. Where the position feeds a safety "
    "function, assess it under the applicable functional-safety standard (IEC 61508, ISO 13849-1, "
    "IEC 62061, ISO 26262 or your sector's) and rely on licensed practice where the law asks for it.",
)

_BACKDRIVE_CAUTION = (
    "This gear train back-drives: a load, a spring or a hand can move the output with the power "
    "off, and a load can fall or run away when the motor lets go. Provide a brake or a self-locking "
    "stage where that is dangerous."
)
_CREEP_CAUTION = (
    "A self-locking stage (worm or lead screw) holds statically but can creep under vibration; do not "
    "treat it as a brake."
)

_AMBIGUOUS_POLICY = {"hold": "flag_and_hold", "guess": "guess_last_direction"}
_HOURS_PER_YEAR = 8766.0


# ---------------------------------------------------------------------------
# building the models from the design
# ---------------------------------------------------------------------------

def _relabel(exc: DesignValueError, where: str) -> DesignValueError:
    name = exc.field.split(".", 1)[-1]
    return DesignValueError(f"{where}.{name}", exc.value, exc.allowed, unit=exc.unit, hint=exc.hint)


def _stage(stage, index: int):
    kind = stage.KIND
    eff = getattr(stage, "efficiency", None)
    if kind == "external":
        return gears.ExternalPair(stage.teeth_driver, stage.teeth_driven, backlash_deg=stage.backlash_deg,
                                  efficiency=eff if eff is not None else 0.98)
    if kind == "internal":
        return gears.InternalPair(stage.teeth_driver, stage.teeth_driven, backlash_deg=stage.backlash_deg,
                                  efficiency=eff if eff is not None else 0.98)
    if kind == "planetary":
        return gears.PlanetaryStage(stage.sun_teeth, stage.ring_teeth, held=stage.held,
                                    input_member=stage.input, output_member=stage.output,
                                    planet_teeth=stage.planet_teeth, backlash_deg=stage.backlash_deg,
                                    efficiency=eff if eff is not None else 0.97)
    if kind == "worm":
        return gears.WormStage(starts=stage.starts, wheel_teeth=stage.wheel_teeth,
                               lead_angle_deg=stage.lead_angle_deg,
                               friction_coefficient=stage.friction_coefficient,
                               backlash_deg=stage.backlash_deg, efficiency=eff)
    if kind == "belt":
        return gears.BeltStage(teeth_driver=stage.teeth_driver, teeth_driven=stage.teeth_driven,
                               pitch_diameter_driver_mm=stage.pitch_diameter_driver_mm,
                               pitch_diameter_driven_mm=stage.pitch_diameter_driven_mm,
                               backlash_deg=stage.backlash_deg, efficiency=eff if eff is not None else 0.96)
    if kind == "lead_screw":
        friction = stage.friction_coefficient
        if friction is None:
            # Typical dry-to-greased sliding bronze or plastic nut on steel (common practice).
            friction = 0.1
        kwargs: dict[str, Any] = dict(pitch_mm=stage.pitch_mm, starts=stage.starts, length_mm=stage.length_mm,
                                      mean_diameter_mm=stage.diameter_mm, thread_angle_deg=stage.thread_angle_deg,
                                      friction_coefficient=friction, ball=stage.ball,
                                      backlash_mm=stage.backlash_mm)
        if eff is not None:
            kwargs["ball_efficiency" if stage.ball else "forward_efficiency"] = eff
        return gears.LeadScrew(**kwargs)
    if kind == "rack":
        return gears.RackAndPinion(module_mm=stage.module_mm, pinion_teeth=stage.pinion_teeth,
                                   length_mm=stage.length_mm, backlash_mm=stage.backlash_mm,
                                   efficiency=eff if eff is not None else 0.95)
    raise DesignValueError(f"gear_train[{index}].kind", kind, "a known stage kind")


@lru_cache(maxsize=256)
def _train_cached(stages: tuple) -> tuple[gears.GearTrain, tuple[str, ...]]:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", TurnkitWarning)
        built = []
        for i, s in enumerate(stages):
            try:
                built.append(_stage(s, i))
            except DesignValueError as exc:
                raise _relabel(exc, f"gear_train[{i}]") from None
        train = gears.GearTrain(tuple(built)) if built else gears.GearTrain.from_reduction(1)
    notes = tuple(dict.fromkeys(str(w.message) for w in caught if issubclass(w.category, TurnkitWarning)))
    return train, notes


def build_train(design: ActuatorDesign) -> gears.GearTrain:
    """The :class:`~turnkit.gears.GearTrain` of a design (a direct drive when it has no stages)."""
    return _train_cached(tuple(design.gear_train))[0]


def build_sensor(design: ActuatorDesign) -> sensor_mod.BridgeSensor:
    """The :class:`~turnkit.sensor.BridgeSensor` of a design."""
    return _sensor_of(design.sensor)


def build_latches(design: ActuatorDesign) -> latch_mod.QuadrantLatches:
    """The :class:`~turnkit.latches.QuadrantLatches` of a design."""
    lt = design.latches
    try:
        return latch_mod.QuadrantLatches(switch_point_tolerance_deg=lt.switch_point_tolerance_deg,
                                         hysteresis_deg=lt.hysteresis_deg,
                                         magnet_misalignment_deg=lt.magnet_misalignment_deg)
    except DesignValueError as exc:
        raise _relabel(exc, "latches") from None


def build_counter(design: ActuatorDesign) -> CounterSettings:
    """The :class:`~turnkit.counter.CounterSettings` of a design."""
    return _counter_settings(design.counter)


def _counter_settings(c) -> CounterSettings:
    try:
        return CounterSettings(width_bits=c.bits, signed=c.signed, overflow_policy=c.overflow,
                               ambiguous_policy=_AMBIGUOUS_POLICY[c.on_ambiguous])
    except DesignValueError as exc:
        raise _relabel(exc, "counter") from None


def build_schedule(design: ActuatorDesign):
    """The :class:`~turnkit.schedule.FixedSchedule` or ``AdaptiveSchedule`` of a design."""
    return _schedule_of(design.schedule)


def _schedule_of(s):
    period_s = s.poll_period_ms / 1e3
    common = dict(wake_time_s=s.wake_time_us * 1e-6, settle_time_s=s.settle_time_us * 1e-6,
                  poll_time_s=s.poll_time_us * 1e-6)
    try:
        if s.kind == "adaptive":
            fast_s = s.fast_poll_period_ms / 1e3
            return AdaptiveSchedule(poll_period_s=period_s, fast_period_s=fast_s, hold_s=s.hold_time_s,
                                    jitter_s=s.jitter * fast_s, **common)
        return FixedSchedule(poll_period_s=period_s, jitter_s=s.jitter * period_s, **common)
    except DesignValueError as exc:
        raise _relabel(exc, "schedule") from None


def build_battery(design: ActuatorDesign):
    """The :class:`~turnkit.battery.Pack` of a design, or None on a host supply."""
    b = design.battery
    if b is None:
        return None
    if b.chemistry is not None:
        keys = batt.available_cells()
        if b.chemistry not in keys:
            import difflib

            near = difflib.get_close_matches(b.chemistry, keys, n=1)
            raise DesignValueError("battery.chemistry", b.chemistry, "one of " + ", ".join(keys),
                                   hint=f"did you mean {near[0]!r}?" if near else "")
        cell = batt.cell(b.chemistry)
        changes = {k: v for k, v in (("capacity_mAh", b.capacity_mAh), ("nominal_voltage_V", b.nominal_voltage_V),
                                     ("self_discharge_per_year", b.self_discharge_per_year)) if v is not None}
        if changes:
            cell = replace(cell, key=cell.key + "_custom", name=cell.name + " (with your data)", **changes)
    else:
        v = b.nominal_voltage_V
        cell = batt.Cell.custom(
            "user-defined cell", nominal_voltage_V=v, capacity_mAh=b.capacity_mAh,
            self_discharge_per_year=b.self_discharge_per_year if b.self_discharge_per_year is not None else 0.02,
            # Unknown limits: wide enough never to warn; the summary says they were not checked.
            max_pulse_mA=1e6, max_continuous_mA=1e6, shelf_life_years=100.0, cutoff_voltage_V=0.6 * v)
    return batt.Pack(cell, series=b.cells_series, parallel=b.cells_parallel)


def build_profile(design: ActuatorDesign, supply_voltage_V: float | None = None) -> power.CurrentProfile:
    """The :class:`~turnkit.power.CurrentProfile` of a design's consumers."""
    return _profile_of(design.power.consumers, supply_voltage_V)


def _profile_of(consumers: tuple, supply_voltage_V: float | None) -> power.CurrentProfile:
    if not consumers:
        raise DesignValueError("power.consumers", [], "at least one consumer with its currents",
                               hint="add a [[power.consumers]] table with asleep, waking, polling and tracking")
    built = tuple(
        power.Consumer(c.name, {"asleep": c.asleep_uA, "waking": c.waking_uA, "polling": c.polling_uA,
                                "tracking": c.tracking_uA})
        for c in consumers)
    return power.CurrentProfile(built, supply_voltage_V=supply_voltage_V or 3.0)


def usable_fraction(pack, cutoff_voltage_V: float | None) -> float:
    """Share of the rated capacity delivered above the electronics' cut-off voltage.

    Parameters
    ----------
    pack : turnkit.battery.Pack
        The battery; its rated capacity is to its own end voltage.
    cutoff_voltage_V : float or None
        Pack voltage below which the electronics stop, V (None: the pack's end voltage).

    Returns
    -------
    float
        1 at or below the pack's rated end voltage, falling linearly to 0 at its nominal
        voltage: a cautious stand-in for the discharge curve (common practice), since
        primary cells deliver most of their charge on a plateau near the nominal voltage.

    Raises
    ------
    DesignValueError
        When the cut-off is at or above the pack's nominal voltage (nothing usable).
    """
    if cutoff_voltage_V is None or cutoff_voltage_V <= pack.cutoff_voltage_V:
        return 1.0
    if cutoff_voltage_V >= pack.nominal_voltage_V:
        raise DesignValueError("power.cutoff_voltage", cutoff_voltage_V,
                               f"below the battery's nominal voltage ({pack.nominal_voltage_V:g} V for "
                               f"{pack.name})", unit="V", hint="add cells in series or lower the cut-off")
    return (pack.nominal_voltage_V - cutoff_voltage_V) / (pack.nominal_voltage_V - pack.cutoff_voltage_V)


def _motor_deg_per_output(train) -> float:
    return 360.0 / float(train.travel_per_motor_turn)


def motor_rpm_for_output_speed(speed: float, train, unit: str, field: str = "speed") -> float:
    """Motor speed (rpm) for an output speed: ``unit`` "mm/s" for a linear output, "rpm" for a rotary one.

    The sign follows ``speed`` (the train's direction is not applied).

    Raises
    ------
    DesignValueError
        When ``unit`` does not suit the output (e.g. rpm at the output of a lead screw), naming ``field``.
    """
    expected = "mm/s" if train.output_unit == "mm" else "rpm"
    if unit != expected:
        raise DesignValueError(field, f"{speed:g} {unit}", f"a speed in {expected} for this "
                               f"{'linear' if expected == 'mm/s' else 'rotary'} output")
    # motion.output_speed_to_motor_rpm applies the train's direction; undo it to keep the sign given.
    return float(output_speed_to_motor_rpm(speed, train)) * train.direction


def output_speed_for_motor_rpm(rpm: float, train) -> tuple[float, str]:
    """Output speed for a motor speed: (mm/s, "mm/s") or (rpm, "rpm")."""
    out_per_s = rpm / 60.0 * float(train.travel_per_motor_turn)
    if train.output_unit == "mm":
        return out_per_s, "mm/s"
    return out_per_s * 60.0 / 360.0, "rpm"


def _scenario_motor(sc: MotionScenario, train, what: str) -> tuple[float | None, str]:
    """A scenario quantity at the motor: (value in deg, rpm or deg/s^2 at the motor)."""
    where = f"motion[{sc.name}].{what}"
    if what == "speed":
        if sc.speed_rpm is not None:
            v = sc.speed_rpm
            return (v if sc.at == "motor" else motor_rpm_for_output_speed(v, train, "rpm", where)), "rpm"
        if sc.speed_mm_per_s is not None:
            return motor_rpm_for_output_speed(sc.speed_mm_per_s, train, "mm/s", where), "rpm"
        return None, "rpm"
    attrs = {"distance": ("distance_deg", "distance_mm"), "start": ("start_deg", "start_mm"),
             "amplitude": ("amplitude_deg", "amplitude_mm"),
             "acceleration": ("acceleration_deg_per_s2", "acceleration_mm_per_s2")}[what]
    rot, lin = getattr(sc, attrs[0]), getattr(sc, attrs[1])
    if lin is not None and train.output_unit != "mm":
        raise DesignValueError(where, f"{lin:g} mm", "an angle (deg) for this rotary output")
    if rot is not None and sc.at == "output" and train.output_unit == "mm":
        raise DesignValueError(where, f"{rot:g} deg", "a length (mm) at the output of this linear train",
                               hint="or give it at = 'motor'")
    if rot is not None:
        return (rot if sc.at == "motor" else rot * _motor_deg_per_output(train)), "deg"
    if lin is not None:
        return lin * _motor_deg_per_output(train), "deg"
    return None, "deg"


def build_motion(sc: MotionScenario, train, base_dir: Path | None = None) -> tuple[MotionProfile, float, float]:
    """The motor-side motion profile of a scenario.

    Returns
    -------
    (profile, duration_s, peak_motor_speed_rpm)
        The profile, the timeline to simulate (s) and the fastest motor speed
        in it (rpm).

    Notes
    -----
    Scenario shapes at the motor shaft (our conventions, documented in
    docs/design-file.md): a *constant* motion starts at t = 0.37 s so that it
    is not aligned with the poll grid; a *coast_down* decays exponentially
    with a time constant of a fifth of its ``duration`` (to under 1 % of the
    start speed); *bursts* come as a Poisson process at ``bursts_per_day``,
    each at a speed drawn between half and all of ``speed`` and lasting
    between half and all of ``distance / speed``, in either direction.
    """
    where = f"motion[{sc.name}]"
    speed_rpm, _ = _scenario_motor(sc, train, "speed")
    start_deg = _scenario_motor(sc, train, "start")[0] or 0.0
    try:
        if sc.kind == "constant":
            offset = 0.37
            dur = sc.duration_s
            prof = ConstantSpeed(speed_rpm=speed_rpm, start_s=offset, duration_s=dur,
                                 start_angle_deg=start_deg)
            return prof, dur + 2 * offset, abs(speed_rpm)
        if sc.kind == "trapezoid":
            dist_deg = _scenario_motor(sc, train, "distance")[0]
            acc_deg = _scenario_motor(sc, train, "acceleration")[0]
            prof = TrapezoidMove(distance_deg=dist_deg, max_speed_rpm=abs(speed_rpm),
                                 accel_rpm_per_s=acc_deg / 6.0, start_s=0.37, start_angle_deg=start_deg,
                                 driven=False)
            dur = sc.duration_s if sc.duration_s is not None else prof.duration_s + 1.0
            return prof, dur, abs(speed_rpm)
        if sc.kind == "coast_down":
            prof = CoastDown(initial_speed_rpm=speed_rpm, time_constant_s=sc.duration_s / 5.0, start_s=0.37,
                             start_angle_deg=start_deg)
            return prof, sc.duration_s + 0.74, abs(speed_rpm)
        if sc.kind == "bursts":
            dist_deg = _scenario_motor(sc, train, "distance")[0]
            top = abs(speed_rpm)
            burst_s = dist_deg / (top * 6.0)
            prof = BackDriveBursts(rate_per_day=sc.bursts_per_day, speed_min_rpm=0.5 * top, speed_max_rpm=top,
                                   duration_min_s=0.5 * burst_s, duration_max_s=burst_s,
                                   horizon_s=sc.duration_s, seed=sc.seed or 0, start_angle_deg=start_deg)
            return prof, sc.duration_s, top
        if sc.kind == "vibration":
            amp_deg = _scenario_motor(sc, train, "amplitude")[0]
            boundary = start_deg if start_deg else 90.0
            prof = Vibration(amplitude_deg=amp_deg, frequency_hz=sc.frequency_Hz, start_s=0.37,
                             duration_s=sc.duration_s, boundary_deg=boundary)
            peak = 2 * math.pi * sc.frequency_Hz * amp_deg / 6.0
            return prof, sc.duration_s + 0.74, peak
        if sc.kind == "trace":
            path = Path(sc.trace)
            if not path.is_absolute() and base_dir is not None:
                path = Path(base_dir) / path
            prof = load_trace_csv(path, train=train, at_output=(sc.at == "output"), start_angle_deg=start_deg)
            t = np.asarray(prof.times_s if hasattr(prof, "times_s") else prof.profile.times_s, dtype=float)
            ang = np.asarray(prof.angle_deg(t), dtype=float)
            peak = float(np.max(np.abs(np.diff(ang) / np.diff(t)))) / 6.0 if t.size > 1 else 0.0
            return prof, float(t[-1]) + 0.5, peak
    except DesignValueError as exc:
        raise _relabel(exc, where) from None
    raise DesignValueError(f"{where}.kind", sc.kind, "a known motion kind")


# ---------------------------------------------------------------------------
# cached pieces (the dashboard re-sizes on every slider move)
# ---------------------------------------------------------------------------

@lru_cache(maxsize=64)
def _sensor_summary(sensor_design, calibrated: bool):
    # Keyed on the sensor alone (its motor-side numbers do not depend on the gear train), so a sweep
    # or Monte Carlo run that varies anything else fits the simulated calibration sweep once.
    sensor = _sensor_of(sensor_design)
    return angle_error.error_summary(sensor, calibrated, n=1440, sweep_samples=360, rng=np.random.default_rng(1))


def _sensor_of(sensor_design):
    s = sensor_design
    try:
        return sensor_mod.BridgeSensor(
            amplitude_mV=s.amplitude_mV, offset_x_mV=s.offset_x_mV, offset_y_mV=s.offset_y_mV,
            gain_mismatch=s.gain_mismatch, phase_error_deg=s.phase_error_deg, harmonic2=s.harmonic2,
            harmonic3=s.harmonic3, noise_rms_mV=s.noise_rms_mV, adc_bits=s.adc_bits,
            adc_full_scale_mV=s.adc_full_scale_mV)
    except DesignValueError as exc:
        raise _relabel(exc, "sensor") from None


@dataclass(frozen=True, slots=True)
class _Kinematics:
    """All a motion scenario reads of a gear train (not its backlash or efficiency)."""

    travel_per_motor_turn: Any
    direction: int
    output_unit: str


@lru_cache(maxsize=512)
def _simulate_scenario(sc: MotionScenario, kinematics: _Kinematics, schedule, settings, base_dir: str | None):
    # Keyed on the train's kinematics, so that points differing only in backlash or efficiency
    # (a tolerance run) share one simulation (and one read of a trace file).
    prof, duration, peak = build_motion(sc, kinematics, Path(base_dir) if base_dir else None)
    result = sim.simulate(prof, schedule, duration, settings)
    return result, peak


# ---------------------------------------------------------------------------
# a measured calibration sweep ([sensor] sweep)
# ---------------------------------------------------------------------------

@lru_cache(maxsize=16)
def _sweep_fit_cached(path: str, mtime_ns: int, size_bytes: int):
    """Read and robustly fit one sweep file; keyed on its modification time and size."""
    from .calibration import fit_sweep, read_sweep_csv

    data = read_sweep_csv(path)
    return data, fit_sweep(data.x_mV, data.y_mV, angle_deg=data.angle_deg, robust=True)


def _sweep_report(sensor_design, base_dir) -> tuple[list[Value], list[str], list[tuple[str, str]], Curve | None]:
    """Fit the sensor's measured sweep and compare it with the design's sensor parameters.

    Returns
    -------
    (values, warnings, assumptions, curve)
        Values in group "sensor" (offsets in mV, gain mismatch in %, phase
        error in electrical deg, sample counts, coverage in electrical deg,
        residual angle error in mechanical deg or radial residual in % of
        amplitude), warnings where the fit and the design disagree, and the
        "calibration_sweep" curve (raw samples and the fitted ellipse, mV).
        Without ``base_dir`` a relative path that does not resolve from the
        working folder gives only a warning (nothing to fit, no curve).

    Raises
    ------
    DesignFileError
        Missing or unreadable file, bad CSV header or line (names the file and line).
    DesignValueError
        A sweep too short, too small or degenerate to fit (names ``sensor.sweep``).
    """
    from .errors import DesignFileError

    s = sensor_design
    path = Path(s.sweep)
    if not path.is_absolute() and base_dir is not None:
        path = Path(base_dir) / path
    try:
        st = path.stat()
    except OSError:
        if base_dir is None and not path.is_absolute():
            # Sized without the design file's folder (e.g. from Python): the path cannot be resolved.
            return [], [f"The calibration sweep {s.sweep!r} was not fitted: its path is relative to the design "
                        "file; pass base_dir (the design file's folder) to size it."], [], None
        raise DesignFileError("sensor.sweep", f"calibration sweep file {s.sweep!r} not found (looked for "
                                              f"{path}); sweep paths are relative to the design file") from None
    try:
        data, fit = _sweep_fit_cached(str(path), st.st_mtime_ns, st.st_size)
    except DesignFileError as exc:
        # Re-label the reader's error (file, line, column) as coming from sensor.sweep.
        where = exc.source
        if exc.line is not None:
            where = f"{where}:{exc.line}" if where else f"line {exc.line}"
        message = str(exc).removeprefix(f"{where}: " if where else "").removeprefix(
            f"{exc.path}: " if exc.path else "")
        column = f"column {exc.path!r}: " if exc.path else ""
        raise DesignFileError("sensor.sweep", f"{column}{message}", source=exc.source or str(path),
                              line=exc.line) from None
    except DesignValueError as exc:
        name = exc.field if exc.field != "sweep" else ""
        field = "sensor.sweep" + (f" ({name})" if name else "")
        raise DesignValueError(field, exc.value, exc.allowed, unit=exc.unit,
                               hint=f"{exc.hint} (sweep file {path})" if exc.hint else f"sweep file {path}") from None
    c = fit.correction
    amp = s.amplitude_mV
    group = "sensor"
    vals = [
        Value("sensor_sweep_file", "Calibration sweep file", s.sweep, "", group),
        Value("sensor_sweep_offset_x_mV", "Fitted offset of the cos bridge", c.offset_x_mV, "mV", group),
        Value("sensor_sweep_offset_y_mV", "Fitted offset of the sin bridge", c.offset_y_mV, "mV", group),
        Value("sensor_sweep_amplitude_mV", "Fitted amplitude of the cos bridge", c.amplitude_x_mV, "mV", group),
        Value("sensor_sweep_gain_mismatch_percent", "Fitted gain mismatch (sin over cos bridge)",
              100.0 * c.gain_mismatch, "%", group),
        Value("sensor_sweep_phase_error_deg", "Fitted phase error (electrical)", c.phase_error_deg, "deg", group),
        Value("sensor_sweep_samples", "Samples in the sweep", fit.n_samples, "", group),
        Value("sensor_sweep_outliers", "Samples rejected as outliers", fit.n_outliers, "", group),
        Value("sensor_sweep_coverage_deg", "Sweep coverage (electrical)", fit.coverage_el_deg, "deg", group,
              note="360 deg electrical is half a shaft turn"),
    ]
    if fit.angle_residual_peak_deg is not None:
        vals.append(Value("sensor_sweep_residual_peak_deg", "Angle error left after the fitted correction, peak",
                          fit.angle_residual_peak_deg, "deg", group, note="mechanical, against the sweep's angles"))
        vals.append(Value("sensor_sweep_residual_rms_deg", "Angle error left after the fitted correction, RMS",
                          fit.angle_residual_rms_deg, "deg", group, note="mechanical, against the sweep's angles"))
    else:
        vals.append(Value("sensor_sweep_radial_residual_percent",
                          "Distance from the circle left after the fitted correction, RMS",
                          100.0 * fit.radial_residual_rms, "%", group,
                          note="of the amplitude; the sweep has no reference angles"))

    # Disagreement: more than twice the stated value, and more than 0.5 % of the amplitude
    # (a phase error of 0.005 rad moves the sin bridge by 0.5 % of its amplitude).
    floor_mV, floor_deg = 0.005 * amp, math.degrees(0.005)
    compared = (
        ("offset_x", s.offset_x_mV, c.offset_x_mV, floor_mV, "mV", 1.0),
        ("offset_y", s.offset_y_mV, c.offset_y_mV, floor_mV, "mV", 1.0),
        ("gain_mismatch", s.gain_mismatch, c.gain_mismatch, 0.005, "%", 100.0),
        ("phase_error", s.phase_error_deg, c.phase_error_deg, floor_deg, "deg el.", 1.0),
    )
    off = [f"{key} {stated * k:.3g} {u} in the design, {fitted * k:.3g} {u} fitted"
           for key, stated, fitted, floor, u, k in compared
           if abs(fitted - stated) > max(2.0 * abs(stated), floor)]
    warns = []
    if off:
        warns.append(f"The [sensor] parameters and the measured sweep {s.sweep!r} disagree: " + "; ".join(off)
                     + ". The sizing uses the [sensor] values; update them from the sweep or check the "
                       "measurement.")
    assumptions = [(f"Calibration sweep {s.sweep!r} fitted as an ellipse (offsets, gains, phase) with outliers "
                    "rejected by robust reweighting",
                    "P. L. M. Heydemann, Appl. Opt. 20(19), 1981, 3382-3384")]

    phi = np.linspace(0.0, 2.0 * np.pi, 361)
    d = math.radians(c.phase_error_deg)
    inlier = fit.weights > 0
    series = [Series("measured samples", data.x_mV[inlier], data.y_mV[inlier], style="points")]
    if fit.n_outliers:
        series.append(Series("rejected as outliers", data.x_mV[~inlier], data.y_mV[~inlier], style="points"))
    series.append(Series("fitted ellipse", c.offset_x_mV + c.amplitude_x_mV * np.cos(phi),
                         c.offset_y_mV + c.amplitude_y_mV * np.sin(phi + d)))
    curve = Curve("calibration_sweep", "Measured calibration sweep and fitted ellipse", "cos bridge x", "mV",
                  "sin bridge y", "mV", tuple(series),
                  note=f"{fit.n_samples} samples, {fit.n_outliers} rejected; offsets {c.offset_x_mV:.3g} / "
                       f"{c.offset_y_mV:.3g} mV, gain mismatch {100 * c.gain_mismatch:.3g} %, phase error "
                       f"{c.phase_error_deg:.3g} deg el.")
    return vals, warns, assumptions, curve


# ---------------------------------------------------------------------------
# small helpers of the stages
# ---------------------------------------------------------------------------

def _check(key, label, value, target, unit, comparison, advice="") -> Check:
    """A requirement check; the advice is kept only when it fails."""
    c = Check(key, label, float(value), float(target), unit, comparison)
    return c if c.passed else replace(c, advice=advice)


def _counter_bits_needed(quarter_turns: int, signed: bool) -> int:
    """Smallest width holding 0..quarter_turns (one more bit when signed)."""
    bits = max(int(quarter_turns).bit_length(), 1)
    return bits + 1 if signed else bits


@lru_cache(maxsize=256)
def _design_text(design: ActuatorDesign) -> str:
    # Cached: sweeps and the dashboard size the same design again and again.
    from .designfile import dump_design

    return dump_design(design)


@lru_cache(maxsize=64)
def _equations(keys: tuple) -> tuple[EquationText, ...]:
    from .equations import EQUATIONS

    out = []
    for k in keys:
        if k in EQUATIONS:
            e = EQUATIONS[k]
            out.append(EquationText(key=k, text=f"{e.title}: {e.text}", latex=e.latex, source=e.source))
    return tuple(out)


# ---------------------------------------------------------------------------
# the stages
# ---------------------------------------------------------------------------
#
# ``size()`` is a list of stages. Each stage is a function of the design (and
# of earlier stages' outputs) returning a frozen object: what later stages need,
# plus its own ``section`` of the result (values, checks, warnings, ...). The
# result is the sections joined in stage order. A stage whose inputs are frozen
# design sections is cached on them, so a sweep or a Monte Carlo run recomputes
# only the stages whose inputs changed.

@dataclass(frozen=True, slots=True)
class Section:
    """One stage's part of a :class:`~turnkit.result.SizingResult`.

    Attributes
    ----------
    values, checks, warnings, cautions, assumptions, scenarios, curves : tuple
        As in :class:`~turnkit.result.SizingResult`, in the order the stage found them.
    equation_keys : tuple of str
        Keys of the equations (:mod:`turnkit.equations`) behind the values.
    """

    values: tuple[Value, ...] = ()
    checks: tuple[Check, ...] = ()
    warnings: tuple[str, ...] = ()
    cautions: tuple[str, ...] = ()
    assumptions: tuple[tuple[str, str], ...] = ()
    equation_keys: tuple[str, ...] = ()
    scenarios: tuple[Scenario, ...] = ()
    curves: tuple[Curve, ...] = ()


class _SectionBuilder:
    """Collects one stage's values, checks and notes, then freezes them into a :class:`Section`."""

    __slots__ = ("values", "checks", "warnings", "cautions", "assumptions", "equation_keys")

    def __init__(self):
        self.values: list[Value] = []
        self.checks: list[Check] = []
        self.warnings: list[str] = []
        self.cautions: list[str] = []
        self.assumptions: list[tuple[str, str]] = []
        self.equation_keys: list[str] = []

    def add(self, key, label, value, unit_="", group="", equation="", note=""):
        self.values.append(Value(key, label, value, unit_, group, equation, note))
        if equation:
            self.equation_keys.append(equation)

    def done(self, **extra) -> Section:
        return Section(values=tuple(self.values), checks=tuple(self.checks), warnings=tuple(self.warnings),
                       cautions=tuple(self.cautions), assumptions=tuple(self.assumptions),
                       equation_keys=tuple(self.equation_keys), **extra)


@dataclass(frozen=True, slots=True, eq=False)
class Mechanics:
    """Mechanics stage: the gear train, its exact ratio, travel, backlash and back-drive.

    Compared and hashed by identity: later stages' caches are keyed on it, and the stage
    itself is cached on the gear stages, so equal trains give the same object.
    """

    section: Section
    stages: tuple
    train: gears.GearTrain
    unit: str
    kinematics: _Kinematics


@dataclass(frozen=True, slots=True)
class CounterRange:
    """Counting stage, range part: the stroke in quarter-turns and the counter width that holds it."""

    section: Section
    settings: CounterSettings


@dataclass(frozen=True, slots=True)
class Sensing:
    """Sensing stage: sensor errors, calibration, output resolution and accuracy, half-turn margin."""

    section: Section
    summary: Any
    resolution_out: float
    sweep_curve: Curve | None


@dataclass(frozen=True, slots=True)
class SpeedBounds:
    """Counting stage, bounds part: the schedule, the counted speeds and the longest allowed poll period."""

    section: Section
    schedule: Any
    guaranteed_rpm: float
    out_speed: float
    out_speed_unit: str
    req_speed: float | None
    required_rpm: float | None
    max_period_s: float | None


@dataclass(frozen=True, slots=True)
class PowerLife:
    """Power stage: the current budget, the battery and its life."""

    section: Section
    pack: Any
    profile: power.CurrentProfile
    budget: power.PowerBudget
    sched_kw: MappingProxyType
    temperature_C: float
    usable: float
    life: float | None
    budget_key: tuple


def mechanics_stage(design: ActuatorDesign) -> Mechanics:
    """Mechanics: the gear train's exact ratio, direction, travel per motor turn, backlash and back-drive.

    Cached on the design's gear stages.
    """
    return _mechanics(tuple(design.gear_train))


@lru_cache(maxsize=256)
def _mechanics(stages: tuple) -> Mechanics:
    train, gear_notes = _train_cached(stages)
    unit = train.output_unit
    out = _SectionBuilder()
    out.warnings.extend(gear_notes)
    add = out.add
    ratio = train.ratio
    per_turn = train.travel_per_motor_turn
    add("ratio", "Overall reduction (motor turns per turn of the last rotary member)", str(ratio), "",
        "gear train", note=f"exact; {float(ratio):.6g}:1")
    add("ratio_float", "Overall reduction, decimal", float(ratio), "", "gear train")
    add("direction", "Output direction for a positive motor turn", "same" if train.direction > 0 else "reversed",
        "", "gear train")
    add("travel_per_motor_turn", "Output travel per motor turn", float(per_turn), unit, "gear train",
        equation="travel_per_motor_turn", note=f"exact: {per_turn}" if isinstance(per_turn, Fraction) else "")
    add("backlash_at_output", "Backlash at the output (worst-case sum)", train.backlash_at_output(), unit,
        "gear train")
    add("efficiency", "Forward efficiency", train.efficiency, "", "gear train")
    add("backdrive_efficiency", "Back-drive efficiency (0: self-locking)", train.backdrive_efficiency, "",
        "gear train")
    add("can_backdrive", "Output can turn the motor", train.can_backdrive, "", "gear train")
    for line in train.backdrive_report():
        if "unknown" in line:
            out.warnings.append(line)
    if train.can_backdrive:
        out.cautions.append(_BACKDRIVE_CAUTION)
    elif any(isinstance(s, (gears.WormStage, gears.LeadScrew)) for s in train.stages):
        out.cautions.append(_CREEP_CAUTION)
    return Mechanics(out.done(), stages, train, unit,
                     _Kinematics(train.travel_per_motor_turn, train.direction, train.output_unit))


def counter_range_stage(design: ActuatorDesign, mech: Mechanics) -> CounterRange:
    """Counting, range: motor turns and quarter-turns over the stroke, counter width needed and held.

    Cached on the gear stages, the stroke and the ``[counter]`` section.
    """
    req = design.requirements
    return _counter_range(mech, req.stroke_mm, req.stroke_deg, design.counter)


@lru_cache(maxsize=256)
def _counter_range(mech: Mechanics, stroke_mm, stroke_deg, counter_design) -> CounterRange:
    train, unit = mech.train, mech.unit
    out = _SectionBuilder()
    add = out.add
    stroke = stroke_mm if unit == "mm" else stroke_deg
    other_stroke = stroke_deg if unit == "mm" else stroke_mm
    if other_stroke is not None:
        raise DesignValueError("requirements.stroke", other_stroke,
                               f"given in {unit} for this {'linear' if unit == 'mm' else 'rotary'} output",
                               unit="deg" if unit == "mm" else "mm")
    settings = _counter_settings(counter_design)
    quarter_turns_stroke = None
    if stroke is not None:
        motor_turns = train.motor_turns_for_stroke(stroke)
        quarter_turns_stroke = math.ceil(4 * float(motor_turns) - 1e-9)
        add("stroke_motor_turns", "Motor turns over the stroke", float(motor_turns), "turn", "gear train")
        add("stroke_quarter_turns", "Quarter-turns counted over the stroke", quarter_turns_stroke, "", "counter",
            equation="quarter_turns_per_stroke")
        bits = _counter_bits_needed(quarter_turns_stroke, settings.signed)
        add("counter_bits_needed", "Counter width needed for the stroke", bits, "bit", "counter",
            equation="counter_bits")
    # Homed at zero at one end of the stroke: the travel up to the largest count.
    counter_range = settings.max_count / 4 * float(train.travel_per_motor_turn)
    add("counter_bits", "Counter width", settings.width_bits, "bit", "counter")
    add("counter_range", "Output travel the counter can hold", float(counter_range), unit, "counter",
        note=f"{settings.max_count - settings.min_count + 1} quarter-turns, "
             f"{'signed' if settings.signed else 'unsigned'}, overflow: {settings.overflow_policy.value}")
    if stroke is not None:
        out.checks.append(_check("counter_range", "Counter holds the whole stroke", float(counter_range),
                                 float(stroke), unit, ">=",
                                 advice=f"widen the counter to at least "
                                        f"{_counter_bits_needed(quarter_turns_stroke, settings.signed)} bits"))
    return CounterRange(out.done(), settings)


def sensing_stage(design: ActuatorDesign, mech: Mechanics, base_dir: str | Path | None = None) -> Sensing:
    """Sensing: sensor angle errors (before or after calibration), a measured sweep's fit, output
    resolution and accuracy, and the half-turn margin of the quadrant latches.

    The sensor error analysis (with its simulated calibration fit) is cached on the ``[sensor]``
    section alone, and a measured sweep's fit on its file's path, modification time and size.
    """
    req = design.requirements
    train, unit = mech.train, mech.unit
    out = _SectionBuilder()
    add = out.add
    summary = _sensor_summary(design.sensor, bool(design.sensor.calibrated))
    motor_peak = summary.peak_error_deg
    add("sensor_peak_error_deg", "Sensor angle error at the motor, peak"
        + (" (after calibration)" if design.sensor.calibrated else " (uncalibrated)"), motor_peak, "deg", "sensor")
    add("sensor_rms_error_deg", "Sensor angle error at the motor, RMS", summary.rms_error_deg, "deg", "sensor")
    add("sensor_noise_deg", "Sensor angle noise at the motor (1 sigma)", summary.noise_sigma_deg, "deg", "sensor")
    add("sensor_resolution_deg", "Sensor effective resolution at the motor", summary.resolution_deg, "deg",
        "sensor")
    add("sensor_effective_bits", "Sensor effective resolution", summary.effective_bits, "bit", "sensor")
    sweep_curve = None
    if design.sensor.sweep is not None:
        sweep_values, sweep_warns, sweep_assumptions, sweep_curve = _sweep_report(design.sensor, base_dir)
        out.values.extend(sweep_values)
        out.warnings.extend(sweep_warns)
        out.assumptions.extend(sweep_assumptions)
    resolution_out = train.output_resolution(summary.resolution_deg)
    add("output_resolution", "Output resolution", resolution_out, unit, "sensor", equation="output_resolution")
    sensor_err_out = train.output_resolution(motor_peak)
    backlash_out = train.backlash_at_output()
    accuracy_out = sensor_err_out + backlash_out
    add("output_accuracy", "Output accuracy (sensor peak error + backlash)", accuracy_out, unit, "sensor",
        note=f"sensor {sensor_err_out:.3g} {unit} + backlash {backlash_out:.3g} {unit}")
    target_res = req.output_resolution_mm if unit == "mm" else req.output_resolution_deg
    if target_res is not None:
        need = float(train.ratio) * resolution_out / target_res
        add("min_reduction_for_resolution", "Smallest reduction giving the required resolution", need, ":1",
            "gear train", equation="output_resolution",
            note="with this sensor and the same final stage; inverse of the resolution equation")
        out.checks.append(_check("output_resolution", "Output resolution is fine enough", resolution_out,
                                 target_res, unit, "<=",
                                 advice=f"raise the reduction to at least {need:.4g}:1, or use a "
                                        "quieter sensor or a finer ADC"))
    target_acc = req.output_accuracy_mm if unit == "mm" else req.output_accuracy_deg
    if target_acc is not None:
        parts = "backlash" if backlash_out > sensor_err_out else "sensor error"
        out.checks.append(_check("output_accuracy", "Output accuracy is within the allowed error", accuracy_out,
                                 target_acc, unit, "<=",
                                 advice=f"the larger part is the {parts}: "
                                        + ("reduce backlash (anti-backlash nut, preloaded stages)"
                                           if parts == "backlash" else "calibrate the sensor or raise the reduction")))

    margin = latch_mod.half_turn_margin(build_latches(design), fine_error_deg=motor_peak)
    add("half_turn_margin_deg", "Half-turn margin of the quadrant latches", margin.margin_deg, "deg", "sensor",
        note="45 deg less latch tolerance, half the hysteresis, misalignment and sensor error")
    out.checks.append(_check("half_turn_margin",
                             "Latch tolerances and sensor error leave the half-turn decision safe",
                             margin.consumed_deg, margin.available_deg, "deg", "<=",
                             advice="tighten the latch switch-point tolerance, the hysteresis or the magnet "
                                    "alignment"))
    if not margin.ok:
        zones = ", ".join(f"{a:.0f}-{b:.0f} deg" for a, b in margin.fail_zones_deg[:4])
        out.warnings.append(f"The half-turn decision can fail near {zones} of each motor turn.")
    return Sensing(out.done(), summary, resolution_out, sweep_curve)


def speed_bounds_stage(design: ActuatorDesign, mech: Mechanics) -> SpeedBounds:
    """Counting, bounds: the poll schedule, the fastest motor speed always counted, the onset of silent
    miscounts, and the longest poll period for the required back-drive speed.

    Cached on the train's kinematics, the ``[schedule]`` section and the required back-drive speed.
    """
    req = design.requirements
    return _speed_bounds(mech.kinematics, design.schedule, req.backdrive_speed_mm_per_s, req.backdrive_speed_rpm)


@lru_cache(maxsize=256)
def _speed_bounds(train: _Kinematics, schedule_design, speed_mm_per_s, speed_rpm) -> SpeedBounds:
    unit = train.output_unit
    out = _SectionBuilder()
    add = out.add
    schedule = _schedule_of(schedule_design)
    guaranteed_rpm = bounds.schedule_speed_limit_rpm(schedule)
    silent_rpm = bounds.silent_error_speed_rpm(bounds.worst_interval_s(schedule))
    add("poll_period_ms", "Poll period while asleep", schedule_design.poll_period_ms, "ms", "schedule")
    add("trackable_motor_speed_rpm", "Fastest motor speed always counted right while asleep", guaranteed_rpm,
        "rpm", "schedule", equation="max_trackable_speed")
    out_speed, out_speed_unit = output_speed_for_motor_rpm(guaranteed_rpm, train)
    add("trackable_output_speed", "Fastest output speed always counted right while asleep", out_speed,
        out_speed_unit, "schedule")
    add("silent_error_motor_speed_rpm", "Motor speed above which miscounts can be silent", silent_rpm, "rpm",
        "schedule", equation="silent_error_onset_speed")
    awake_s = schedule.wake_time_s + schedule.settle_time_s + schedule.poll_time_s
    add("duty_cycle_percent", "Duty cycle (awake share while idle)", 100 * awake_s / schedule.poll_period_s, "%",
        "schedule", equation="duty_cycle")
    req_speed = speed_mm_per_s if unit == "mm" else speed_rpm
    wrong_speed = speed_rpm if unit == "mm" else speed_mm_per_s
    if wrong_speed is not None:
        raise DesignValueError("requirements.backdrive_speed", wrong_speed,
                               "given in mm/s for a linear output, rpm for a rotary one",
                               unit="rpm" if unit == "mm" else "mm/s")
    max_period_s = None
    required_rpm = None
    if req_speed is not None:
        required_rpm = motor_rpm_for_output_speed(req_speed, train, "mm/s" if unit == "mm" else "rpm",
                                                  "requirements.backdrive_speed")
        max_period_s = bounds.max_poll_period_s(required_rpm)
        add("backdrive_motor_speed_rpm", "Motor speed at the required back-drive speed", required_rpm, "rpm",
            "schedule", equation="backdrive_motor_speed")
        add("max_poll_period_ms", "Longest poll period for the required back-drive speed", max_period_s * 1e3,
            "ms", "schedule", equation="max_poll_period")
        out.checks.append(_check("backdrive_speed", "Counter follows the required back-drive speed while asleep",
                                 out_speed, req_speed, out_speed_unit, ">=",
                                 advice=f"poll at least every {max_period_s * 1e3:.4g} ms (with jitter "
                                        "included), or lower the reduction"))
    return SpeedBounds(out.done(), schedule, guaranteed_rpm, out_speed, out_speed_unit, req_speed, required_rpm,
                       max_period_s)


def power_stage(design: ActuatorDesign, mech: Mechanics, speed: SpeedBounds) -> PowerLife:
    """Power: the average current and its breakdown, the battery, its usable capacity and its life."""
    req = design.requirements
    train = mech.train
    schedule = speed.schedule
    out = _SectionBuilder()
    add = out.add
    pack = build_battery(design)
    # The current budget does not depend on the battery's capacity or chemistry (only on its
    # voltage), so tolerance runs over the battery reuse it.
    budget_key = (design.power.consumers, design.motion, schedule, mech.kinematics,
                  pack.nominal_voltage_V if pack is not None else None)
    profile, sched_kw, budget, motion_events = _current_budget(*budget_key)
    add("average_current_uA", "Average current", budget.average_current_uA, "uA", "power",
        equation="average_current")
    add("charge_per_year_mAh", "Charge drawn per year", budget.charge_per_year_mAh, "mAh", "power")
    add("charge_per_wake_uC", "Charge per wake-up", budget.charge_per_wake_uC, "uC", "power")
    add("peak_current_mA", "Peak current", budget.peak_current_mA, "mA", "power")
    add("dominant_consumer", "Largest consumer", budget.dominant_consumer, "", "power",
        note=f"{budget.by_consumer()[budget.dominant_consumer]:.3g} uA of the average")
    add("dominant_state", "State that costs the most charge", budget.dominant_state, "", "power")
    if motion_events:
        out.assumptions.append((f"Back-drive bursts: {motion_events:g} a day (from the motion scenarios) in the "
                                "average current", "design file"))
    temperature_C = design.battery.temperature_degC if design.battery is not None else 20.0
    if req.service_temperature_degC is not None:
        temperature_C = req.service_temperature_degC
    life = None
    usable = 1.0
    if pack is not None:
        usable = usable_fraction(pack, design.power.cutoff_voltage_V)
        if usable < 1.0:
            out.assumptions.append((
                f"The electronics stop at {design.power.cutoff_voltage_V:g} V, above the pack's rated end voltage "
                f"{pack.cutoff_voltage_V:g} V: usable fraction {usable:.3g}, falling linearly from 1 at the "
                "rated end voltage to 0 at the nominal voltage (a cautious stand-in for the discharge curve)",
                "(common practice)"))
        est = batt.estimate_life(pack, budget.average_current_uA, temperature_C=temperature_C,
                                 usable_fraction=usable, peak_current_mA=budget.peak_current_mA)
        life = est.life_years
        add("battery", "Battery", f"{pack.name}", "", "battery")
        add("battery_capacity_mAh", "Battery nominal capacity", pack.capacity_mAh, "mAh", "battery")
        add("usable_fraction_percent", "Share of the capacity delivered above the electronics' cut-off",
            100 * usable, "%", "battery")
        add("usable_capacity_mAh", "Usable capacity after temperature and cut-off derating", est.usable_capacity_mAh,
            "mAh", "battery", equation="usable_capacity")
        add("battery_life_years", "Battery life", life, "years", "battery", equation="battery_life")
        add("self_discharge_percent", "Share of the capacity lost to self-discharge",
            100 * est.lost_to_self_discharge_mAh / est.usable_capacity_mAh if est.usable_capacity_mAh else 0.0, "%",
            "battery")
        out.warnings.extend(est.warnings)
        out.cautions.extend(est.cautions)
        out.assumptions.append((f"Battery data for {pack.cell.name}: typical values at low drain", "; ".join(
            dict.fromkeys(src for _, src in pack.cell.sources)) or "user data"))
        out.assumptions.append((f"Battery temperature {temperature_C:g} degC, linear self-discharge, "
                                "8766 h per year", "(common practice)"))
    return PowerLife(out.done(), pack, profile, budget, sched_kw, temperature_C, usable, life, budget_key)


@lru_cache(maxsize=256)
def _current_budget(consumers: tuple, motion: tuple, schedule, train: _Kinematics, supply_voltage_V):
    """(profile, schedule keywords, budget, bursts a day) of the consumers on a schedule."""
    profile = _profile_of(consumers, supply_voltage_V)
    motion_events = sum(sc.bursts_per_day or 0.0 for sc in motion if sc.kind == "bursts")
    motion_fraction = 0.0
    for sc in motion:
        if sc.kind == "bursts":
            sp = abs(_scenario_motor(sc, train, "speed")[0] or 0.0)
            dist = _scenario_motor(sc, train, "distance")[0] or 0.0
            if sp > 0:
                motion_fraction += sc.bursts_per_day * 0.75 * dist / (sp * 6.0) / 86400.0
    sched_kw = dict(poll_period_s=schedule.poll_period_s, wake_time_s=schedule.wake_time_s,
                    settle_time_s=schedule.settle_time_s, poll_time_s=schedule.poll_time_s,
                    motion_fraction=min(motion_fraction, 0.5), motion_events_per_day=motion_events)
    if isinstance(schedule, AdaptiveSchedule):
        sched_kw.update(fast_period_s=schedule.fast_period_s, hold_s=schedule.hold_s)
    # Read-only: the cached keywords are shared by every result that reuses them.
    return profile, MappingProxyType(sched_kw), power.budget_from_schedule(profile, **sched_kw), motion_events


@lru_cache(maxsize=256)
def _average_current_at(budget_key: tuple, poll_period_s: float) -> float:
    """Average current (uA) of the same consumers and schedule at another poll period."""
    profile, sched_kw, _, _ = _current_budget(*budget_key)
    return power.average_current_uA(profile, **{**sched_kw, "poll_period_s": poll_period_s})


def advice_stage(design: ActuatorDesign, mech: Mechanics, speed: SpeedBounds, pw: PowerLife) -> Section:
    """Checks and advice: battery life and quiescent budget checks with what would fix them, and whether any
    poll period meets both the back-drive speed and the life (with how far each must move if none does)."""
    req = design.requirements
    train = mech.train
    schedule, max_period_s, req_speed = speed.schedule, speed.max_period_s, speed.req_speed
    pack, profile, budget, life = pw.pack, pw.profile, pw.budget, pw.life
    temperature_C, usable = pw.temperature_C, pw.usable
    out = _SectionBuilder()
    add = out.add
    if pack is not None and req.battery_life_years is not None:
        advice = ""
        try:
            need_cap = float(batt.capacity_needed_mAh(budget.average_current_uA, req.battery_life_years, pack,
                                                      temperature_C=temperature_C, usable_fraction=usable))
            advice = f"a battery of at least {need_cap:.4g} mAh, or a lower average current"
            if req_speed is not None and max_period_s > schedule.poll_period_s * 1.01:
                advice += (f"; polling only as often as the back-drive speed needs (every "
                           f"{max_period_s * 1e3:.4g} ms) also saves charge")
            add("capacity_needed_mAh", "Capacity needed for the required life", need_cap, "mAh", "battery",
                equation="capacity_for_life")
            # Largest sleep current that still lasts the life: solve the life equation for the
            # average current, then give the whole change to the time spent asleep.
            asleep_share = budget.state_fractions()["asleep"]
            tf = float(pack.temperature_factor(temperature_C))
            c_nom = pack.capacity_mAh
            allowed_uA = (c_nom * tf * usable - pack.self_discharge_per_year * c_nom * req.battery_life_years) \
                / (_HOURS_PER_YEAR * req.battery_life_years) * 1e3
            sleep_now = profile.state_totals_uA()["asleep"]
            if asleep_share > 0:
                max_sleep = sleep_now + (allowed_uA - budget.average_current_uA) / asleep_share
                add("max_sleep_current_uA", "Largest total sleep current that lasts the required life",
                    max_sleep, "uA", "battery", equation="battery_life",
                    note=("negative: even zero sleep current cannot make the life; the wake-ups alone cost "
                          "too much") if max_sleep < 0 else f"now {sleep_now:.3g} uA")
        except DesignValueError:
            advice = (f"this chemistry cannot last {req.battery_life_years:g} years against its own "
                      "self-discharge: choose another chemistry")
        out.checks.append(_check("battery_life", "Battery lasts the required life", life, req.battery_life_years,
                                 "years", ">=", advice=advice))
    host = design.power.host_supply
    budget_uA = req.quiescent_budget_uA
    if budget_uA is None and host is not None:
        budget_uA = host.quiescent_budget_uA
    if budget_uA is not None:
        out.checks.append(_check("quiescent_budget", "Average current within the quiescent budget",
                                 budget.average_current_uA, budget_uA, "uA", "<=",
                                 advice="poll less often or cut the sleep current"))

    # Conflicts between speed and life.
    if max_period_s is not None and life is not None and req.battery_life_years is not None:
        life_at_limit = float(batt.life_years(pack, _average_current_at(pw.budget_key, max_period_s),
                                              temperature_C=temperature_C, usable_fraction=usable, warn=False))
        add("life_at_max_poll_period_years", "Battery life at the longest allowed poll period", life_at_limit,
            "years", "battery")
        if life_at_limit < req.battery_life_years:
            out.warnings.append(
                f"No poll period meets both requirements: polling every {max_period_s * 1e3:.4g} ms (the "
                f"longest that follows {req_speed:g} {speed.out_speed_unit}) lasts only {life_at_limit:.3g} years "
                f"against {req.battery_life_years:g} required.")
            out.warnings.extend(_relax_lines(profile, pack, schedule, speed.required_rpm, req.battery_life_years,
                                             temperature_C, train, usable))
    return out.done()


def scenarios_stage(design: ActuatorDesign, mech: Mechanics, counter: CounterRange, speed: SpeedBounds,
                    base_dir: str | Path | None = None) -> Section:
    """Counting, scenarios: each motion scenario simulated through the counter on the design's schedule.

    Each scenario's simulation is cached on the scenario, the train's kinematics (travel per motor
    turn, direction, output unit), the schedule and the counter.
    """
    train, unit = mech.train, mech.unit
    base = str(Path(base_dir).resolve()) if base_dir is not None else None
    scenarios: list[Scenario] = []
    for sc in design.motion:
        result, peak = _simulate_scenario(sc, mech.kinematics, speed.schedule, counter.settings, base)
        _, err = result.output_error(train)
        max_err = float(np.max(np.abs(err))) if np.size(err) else 0.0
        note = ""
        if result.silent_error_count:
            note = "silent miscounts: the count is wrong with no error flagged"
        elif result.ambiguous_count:
            note = "ambiguous steps flagged: position no longer trusted, re-homing needed"
        elif peak > speed.guaranteed_rpm:
            note = "faster than the guaranteed bound at times, but counted right in this run"
        scenarios.append(Scenario(
            name=sc.name, kind=sc.kind, duration_s=result.duration_s, peak_motor_speed_rpm=peak,
            polls=result.poll_count, final_count_error_qt=result.final_count_error,
            ambiguous_count=result.ambiguous_count, silent_error_count=result.silent_error_count,
            overflow_count=result.overflow_count, max_output_error=max_err, output_unit=unit, note=note))
    return Section(scenarios=tuple(scenarios))


def curves_stage(design: ActuatorDesign, mech: Mechanics, counter: CounterRange, sensing: Sensing,
                 speed: SpeedBounds, pw: PowerLife, base_dir: str | Path | None = None) -> Section:
    """Plot data: life (or current) against poll period, a simulated back-drive event and its output error,
    resolution and back-drive speed against reduction, current over a poll cycle, sensor error over a turn,
    and a measured calibration sweep's fit."""
    base = str(Path(base_dir).resolve()) if base_dir is not None else None
    out = _curves(design, mech.train, speed.schedule, counter.settings, pw.profile, pw.pack, sensing.summary,
                  pw.sched_kw, speed.max_period_s, speed.required_rpm, speed.req_speed, speed.out_speed_unit,
                  pw.temperature_C, speed.guaranteed_rpm, sensing.resolution_out, base, pw.usable)
    if sensing.sweep_curve is not None:
        out.append(sensing.sweep_curve)
    return Section(curves=tuple(out))


def assemble(design: ActuatorDesign, unit: str, sections, *, identify: bool = True) -> SizingResult:
    """Join the stages' sections, in order, into one :class:`~turnkit.result.SizingResult`.

    Parameters
    ----------
    design : ActuatorDesign
        The design sized.
    unit : str
        Output unit of its gear train, ``"mm"`` or ``"deg"``.
    sections : iterable of Section
        The stages' sections in the order they appear in the result.
    identify : bool
        Fill ``design_hash`` and ``inputs`` from the design's canonical file text. Sweeps and Monte
        Carlo runs, which read only values, checks and scenarios, pass False and skip writing and
        reading that text (``design_hash`` is then empty and ``inputs`` an empty dict).
    """
    sections = tuple(sections)
    join = lambda name: tuple(x for s in sections for x in getattr(s, name))  # noqa: E731
    eq_keys = join("equation_keys") + ("max_trackable_speed", "max_poll_period")
    digest, inputs = _identity(design) if identify else ("", {})
    return SizingResult(
        design_name=design.name,
        design_hash=digest,
        turnkit_version=__version__,
        output_unit=unit,
        values=join("values"),
        checks=join("checks"),
        scenarios=join("scenarios"),
        curves=join("curves"),
        equations=_equations(tuple(dict.fromkeys(eq_keys))),
        warnings=tuple(dict.fromkeys(join("warnings"))),
        cautions=tuple(dict.fromkeys(GENERAL_CAUTIONS + join("cautions"))),
        assumptions=join("assumptions") + _ASSUMPTIONS,
        inputs=inputs,
    )


_ASSUMPTIONS = (
    ("Guaranteed counting: less than a quarter-turn of the motor between two polls, any phase",
     "2-bit Gray code, one bit changes per step: F. Gray, US patent 2,632,058 (1953)"),
    ("Gear ratios are exact fractions of tooth counts; lengths are taken at their decimal value",
     "Shigley's Mechanical Engineering Design, ch. 13"),
)


def _identity(design: ActuatorDesign) -> tuple[str, dict]:
    text = _design_text(design)
    return hashlib.sha256(text.encode()).hexdigest(), tomllib.loads(text)


# ---------------------------------------------------------------------------
# the engine
# ---------------------------------------------------------------------------

def size(design: ActuatorDesign, *, base_dir: str | Path | None = None, curves: bool = True,
         simulate: bool = True, identify: bool = True) -> SizingResult:
    """Size one actuator design.

    Parameters
    ----------
    design : ActuatorDesign
        The validated design (from :func:`turnkit.designfile.load_design` or Python).
    base_dir : path, optional
        Folder that relative trace and calibration-sweep paths are relative to
        (the design file's folder).
    curves : bool
        Also compute the plot data (the dashboard and the HTML summary want it;
        the command line without ``-o`` does not).
    simulate : bool
        Simulate each motion scenario through the counter and its schedule.
    identify : bool
        Fill the result's ``design_hash`` and ``inputs`` (see :func:`assemble`).

    Returns
    -------
    SizingResult
        Values with units, requirement checks with margins, simulated scenarios,
        curves, equations, warnings and cautions.

    Raises
    ------
    DesignValueError
        When the design cannot be sized (e.g. no power consumers, unknown
        battery key), naming the field.
    """
    mech = mechanics_stage(design)
    counter = counter_range_stage(design, mech)
    sensing = sensing_stage(design, mech, base_dir)
    speed = speed_bounds_stage(design, mech)
    pw = power_stage(design, mech, speed)
    advice = advice_stage(design, mech, speed, pw)
    scenarios = scenarios_stage(design, mech, counter, speed, base_dir) if simulate else Section()
    plots = curves_stage(design, mech, counter, sensing, speed, pw, base_dir) if curves else Section()
    return assemble(design, mech.unit,
                    (mech.section, counter.section, sensing.section, speed.section, pw.section, advice, scenarios,
                     plots), identify=identify)


def _relax_lines(profile, pack, schedule, required_rpm, life_years, temperature_C, train,
                 usable: float = 1.0) -> list[str]:
    """How far each requirement must move for some poll period to meet both (symbolic model)."""
    from .equations import relax_advice

    totals = profile.state_totals_uA()
    t_wake = schedule.wake_time_s + schedule.settle_time_s
    t_awake = t_wake + schedule.poll_time_s
    # One equivalent awake current carrying the same charge per wake as the two awake states.
    awake_uA = (totals["waking"] * t_wake + totals["polling"] * schedule.poll_time_s) / t_awake
    try:
        advice = relax_advice(
            backdrive_motor_speed_rpm=required_rpm, life_years=life_years, capacity_mAh=pack.capacity_mAh,
            sleep_current_uA=totals["asleep"], awake_current_uA=awake_uA, awake_time_s=t_awake,
            temperature_derating=float(pack.temperature_factor(temperature_C)), usable_fraction=usable,
            self_discharge_per_year=pack.self_discharge_per_year,
            travel_per_turn=float(train.travel_per_motor_turn), output_unit=train.output_unit)
    except DesignValueError as exc:
        return [f"Relaxation advice unavailable: {exc}"]
    rec = advice.recommended
    return [f"To make both fit{' (the smallest change)' if o == rec else ''}: {o.text}"
            for o in advice.options if o.possible]


def _curves(design, train, schedule, settings, profile, pack, summary, sched_kw, max_period_s, required_rpm,
            req_speed, speed_unit, temperature_C, guaranteed_rpm, resolution_out, base, usable=1.0) -> list[Curve]:
    unit = train.output_unit
    out: list[Curve] = []
    period_ms = schedule.poll_period_s * 1e3
    awake_s = schedule.wake_time_s + schedule.settle_time_s + schedule.poll_time_s
    lo_s = max(awake_s * 1.5, min(schedule.poll_period_s, max_period_s or schedule.poll_period_s) / 30.0)
    hi_s = max(schedule.poll_period_s, max_period_s or schedule.poll_period_s) * 30.0
    kw = {k: v for k, v in sched_kw.items() if k != "poll_period_s"}
    if isinstance(schedule, AdaptiveSchedule):
        lo_s = max(lo_s, schedule.fast_period_s * 1.0001)
    # (a) life (or current) versus poll period
    if pack is not None:
        lc = power.life_vs_poll_period(profile, pack, poll_period_min_s=lo_s, poll_period_max_s=hi_s, points=120,
                                       max_allowed_poll_period_s=max_period_s, temperature_C=temperature_C,
                                       usable_fraction=usable, **kw)
        current_life = float(batt.life_years(pack, power.average_current_uA(profile, **sched_kw),
                                             temperature_C=temperature_C, usable_fraction=usable, warn=False))
        series = (Series("battery life", lc.poll_period_s * 1e3, lc.life_years),)
        marker_y, key, title, ylab, yunit = current_life, "life_vs_poll_period", "Battery life against poll period", \
            "battery life", "years"
        hlines = ()
        if design.requirements.battery_life_years is not None:
            hlines = (Series("required life", np.array([lo_s * 1e3, hi_s * 1e3]),
                             np.full(2, design.requirements.battery_life_years), style="dashed"),)
        series = series + hlines
    else:
        periods = np.geomspace(lo_s, hi_s, 120)
        cur = power.average_current_uA(profile, **{**kw, "poll_period_s": periods})
        series = (Series("average current", periods * 1e3, np.asarray(cur, dtype=float)),)
        marker_y = float(power.average_current_uA(profile, **sched_kw))
        key, title, ylab, yunit = "current_vs_poll_period", "Average current against poll period", \
            "average current", "uA"
    bands, vlines = (), ()
    if max_period_s is not None:
        vlines = (Marker("longest allowed poll period", max_period_s * 1e3, 0.0),)
        if max_period_s < hi_s:
            bands = (Band("misses back-drive", max_period_s * 1e3, hi_s * 1e3),)
    out.append(Curve(key, title, "poll period", "ms", ylab, yunit, series,
                     markers=(Marker("this design", period_ms, marker_y),), bands=bands, vlines=vlines,
                     log_x=True, log_y=True,
                     note=(f"longest poll period for the required back-drive speed: {max_period_s * 1e3:.4g} ms"
                           if max_period_s is not None else "no back-drive speed required")))

    # (b) a simulated back-drive event at the required speed (or the fastest scenario's)
    speed_rpm = required_rpm
    if speed_rpm is None and design.motion:
        speed_rpm = max((abs(_scenario_motor(sc, train, "speed")[0] or 0.0) for sc in design.motion), default=None)
    if not speed_rpm:
        speed_rpm = guaranteed_rpm
    polls_wanted = 24
    duration = polls_wanted * schedule.poll_period_s
    move_s = max(duration - 2.5 * schedule.poll_period_s, schedule.poll_period_s)
    prof = ConstantSpeed(speed_rpm=speed_rpm, start_s=1.3 * schedule.poll_period_s, duration_s=move_s)
    res = sim.simulate(prof, schedule, duration, settings,
                       trace_window_s=(0.0, duration), trace_max_polls=200)
    t_ms = res.trace_time_s * 1e3
    true_q = res.trace_angle_deg / 90.0
    amb_t = np.asarray(res.ambiguous_events.times_s, dtype=float) if res.ambiguous_count else np.array([])
    amb_y = np.interp(amb_t, res.trace_poll_times_s, res.trace_decoded_count) if amb_t.size else np.array([])
    event_series = (
        Series("true position", t_ms, true_q),
        Series("polls", res.trace_poll_times_s * 1e3, res.trace_true_count.astype(float), style="points"),
        Series("counted", res.trace_poll_times_s * 1e3, res.trace_decoded_count.astype(float), style="step"),
        Series("ambiguous step", amb_t * 1e3, amb_y, style="points"),
    )
    out.append(Curve("backdrive_event", f"Back-drive at {speed_rpm:.4g} rpm (motor) while asleep", "time", "ms",
                     "motor position", "quarter-turns", event_series,
                     note=(f"{res.ambiguous_count} ambiguous, {res.silent_error_count} silent; final count error "
                           f"{res.final_count_error} quarter-turns")))
    et, ee = res.trace_output_error(train)
    out.append(Curve("backdrive_error", "Output position error during the back-drive event", "time", "ms",
                     "position error", unit, (Series("count error at the output", et * 1e3, ee, style="step"),),
                     note=f"one quarter-turn = {float(train.travel_per_motor_turn) / 4:.4g} {unit} at the output"))

    # (c) resolution and back-drive motor speed against reduction
    ratio = float(train.ratio)
    reductions = np.geomspace(ratio / 10.0, ratio * 10.0, 100)
    last = train.stages[-1]
    if train.is_linear:
        per_turn = float(last.travel_per_input_turn_mm) / reductions
    else:
        per_turn = 360.0 / reductions
    res_curve = summary.resolution_deg / 360.0 * per_turn
    req_res = design.requirements.output_resolution_mm if unit == "mm" else design.requirements.output_resolution_deg
    res_series = [Series("output resolution", reductions, res_curve)]
    if req_res is not None:
        res_series.append(Series("required resolution", reductions[[0, -1]], np.full(2, req_res), style="dashed"))
    out.append(Curve("resolution_vs_reduction", "Output resolution against reduction", "reduction", ":1",
                     "output resolution", unit, tuple(res_series),
                     markers=(Marker("this design", ratio, resolution_out),), log_x=True, log_y=True))
    if req_speed is not None:
        out_per_s = req_speed if unit == "mm" else req_speed * 6.0
        motor_rpm = out_per_s / per_turn * 60.0
        sp_series = (Series("motor speed under back-drive", reductions, motor_rpm),
                     Series("fastest counted speed", reductions[[0, -1]], np.full(2, guaranteed_rpm), style="dashed"))
        out.append(Curve("backdrive_speed_vs_reduction", "Motor speed under back-drive against reduction",
                         "reduction", ":1", "motor speed", "rpm", sp_series,
                         markers=(Marker("this design", ratio, required_rpm),), log_x=True, log_y=True,
                         note="more reduction: finer resolution, but the motor spins faster under back-drive"))

    # (d) current over one poll cycle
    totals = profile.state_totals_uA()
    t_wake = schedule.wake_time_s + schedule.settle_time_s
    T = schedule.poll_period_s
    pts_t = np.array([0.0, 0.0, t_wake, t_wake, t_wake + schedule.poll_time_s, t_wake + schedule.poll_time_s, T])
    pts_i = np.array([totals["asleep"], totals["waking"], totals["waking"], totals["polling"], totals["polling"],
                      totals["asleep"], totals["asleep"]])
    cyc_t = np.concatenate([pts_t, pts_t[1:] + T]) * 1e3
    cyc_i = np.concatenate([pts_i, pts_i[1:]])
    avg = float(power.average_current_uA(profile, **sched_kw))
    out.append(Curve("current_profile", "Current over two poll cycles", "time", "ms", "current", "uA",
                     (Series("supply current", cyc_t, cyc_i),
                      Series("average", cyc_t[[0, -1]], np.full(2, avg), style="dashed")),
                     log_y=True,
                     note=f"duty cycle {awake_s / T * 100:.3g} %, average {avg:.4g} uA"))

    # (e) sensor angle error over a turn
    out.append(Curve("sensor_error", "Sensor angle error over one motor turn", "motor angle", "deg", "angle error",
                     "deg", (Series("before calibration", summary.angle_deg, summary.error_before_deg),
                             Series("after calibration", summary.angle_deg, summary.error_after_deg)),
                     note=f"peak {np.max(np.abs(summary.error_before_deg)):.3g} deg before, "
                          f"{np.max(np.abs(summary.error_after_deg)):.3g} deg after calibration"))
    return out
