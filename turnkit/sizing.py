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
``"current_profile"``, ``"sensor_error"``, ``"accuracy_vs_temperature"``,
``"accuracy_waterfall"`` and, when the design names a measured
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
Fraction(3, 1)
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
from . import angle_error, battery as batt, counting, gears, latches as latch_mod, power
from . import sensor as sensor_mod
from . import export as _export  # noqa: F401  (registers how a result draws itself in a notebook)
from . import simulation as sim
from .counter import CounterSettings
from .design import ActuatorDesign, MotionScenario
from .errors import DesignValueError, TurnkitWarning
from .motion import (BackDriveBursts, CoastDown, ConstantSpeed, MotionProfile, TrapezoidMove,
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
    "A hand wheel or crank on the motor shaft spins whenever the motor runs and can strike or catch "
    "the hand on it: declutch it from the motor, or fit an interlock that keeps the motor off while it "
    "is engaged (common practice).",
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

_AMBIGUOUS_POLICY = {"hold": "flag_and_hold", "guess": "guess_last_direction", "continue": "flag_and_continue"}
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
    return counting.latches_of(design)


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
            # The jitter is a fraction of each poll period, so each period has its own.
            return AdaptiveSchedule(poll_period_s=period_s, fast_period_s=fast_s, hold_s=s.hold_time_s,
                                    jitter_s=s.jitter * period_s, fast_jitter_s=s.jitter * fast_s, **common)
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
                                "tracking": c.tracking_uA,
                                "fault": c.asleep_uA if c.fault_uA is None else c.fault_uA})
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
        The depth of discharge at which the cell's tabulated low-drain voltage reaches
        the cut-off (no pulse; see :func:`turnkit.battery.usable_fraction_under_pulse`);
        1 at or below the pack's rated end voltage. Cells without a discharge curve fall
        linearly from 1 at the end voltage to 0 at the nominal voltage (a stand-in).

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
    return float(batt.usable_fraction_under_pulse(pack, cutoff_voltage_V))


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
        if sc.kind in ("segments", "burst_replay"):
            return _logged_motion(sc, train, base_dir, start_deg)
        if sc.kind == "trace":
            path = Path(sc.trace)
            if not path.is_absolute() and base_dir is not None:
                path = Path(base_dir) / path
            if base_dir is None and not path.is_absolute() and not path.exists():
                raise DesignValueError(f"{where}.trace", sc.trace, "a trace file that exists",
                                       hint="trace paths are relative to the design file's folder: pass "
                                            "base_dir=<that folder> to size()")
            try:
                st = path.stat()
            except OSError:  # let the reader say what is wrong with it
                return _trace_motion(path, train, sc.at == "output", start_deg)
            return _trace_motion_cached(str(path), st.st_mtime_ns, st.st_size, train, sc.at == "output", start_deg)
    except DesignValueError as exc:
        raise _relabel(exc, where) from None
    raise DesignValueError(f"{where}.kind", sc.kind, "a known motion kind")


# ---------------------------------------------------------------------------
# cached pieces (the dashboard re-sizes on every slider move)
# ---------------------------------------------------------------------------

def _trace_motion(path, train, at_output: bool, start_deg: float) -> tuple[MotionProfile, float, float]:
    """A recorded trace as (profile, duration_s, peak motor rpm)."""
    prof = load_trace_csv(path, train=train, at_output=at_output, start_angle_deg=start_deg)
    t = np.asarray(prof.times_s if hasattr(prof, "times_s") else prof.profile.times_s, dtype=float)
    ang = np.asarray(prof.angle_deg(t), dtype=float)
    peak = float(np.max(np.abs(np.diff(ang) / np.diff(t)))) / 6.0 if t.size > 1 else 0.0
    return prof, float(t[-1]) + 0.5, peak


@lru_cache(maxsize=32)
def _trace_motion_cached(path: str, mtime_ns: int, size_bytes: int, train, at_output: bool, start_deg: float):
    # Keyed on the file's modification time and size: the dashboard re-sizes on every slider move and
    # would otherwise read and parse the same trace each time (profiles are immutable, so sharing is safe).
    return _trace_motion(Path(path), train, at_output, start_deg)


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


def _kinematics_of(train) -> _Kinematics:
    return _Kinematics(train.travel_per_motor_turn, train.direction, train.output_unit)


@lru_cache(maxsize=512)
def _simulate_scenario(sc: MotionScenario, kinematics: _Kinematics, schedule, settings, base_dir: str | None,
                       edges: tuple | None = None):
    # Keyed on the train's kinematics, so that points differing only in backlash or efficiency
    # (a tolerance run) share one simulation (and one read of a trace file).
    prof, duration, peak = build_motion(sc, kinematics, Path(base_dir) if base_dir else None)
    result = sim.simulate(prof, schedule, duration, settings, edge_shifts_deg=edges)
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

    def extend_values(self, values) -> None:
        for v in values:
            self.values.append(v)
            if v.equation:
                self.equation_keys.append(v.equation)

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
    """Counting stage, limits part: the schedule, the narrowest-quadrant limits, the back-drive check and the
    longest allowed poll period."""

    section: Section
    schedule: Any
    limits: Any
    guaranteed_rpm: float
    out_speed_unit: str
    req_speed: float | None
    required_rpm: float | None
    max_period_s: float | None
    awake_s: float


@dataclass(frozen=True, slots=True)
class PowerLife:
    """Power stage: the current budget (driven moves included), the battery derated for its site, its life."""

    section: Section
    pack: Any
    profile: power.CurrentProfile
    budget: power.PowerBudget
    sched_kw: MappingProxyType
    temperature_C: float
    usable: float
    life: float | None
    shelf_life_years: float | None


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
    add("ratio", "Overall reduction (motor turns per turn of the last rotary member)", ratio, "",
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
    return Mechanics(out.done(), stages, train, unit, _kinematics_of(train))


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
    resolution and accuracy (belt creep included), and the half-turn margin of the quadrant latches.

    The sensor error analysis (with its simulated calibration fit) is cached on the ``[sensor]``
    section alone, and a measured sweep's fit on its file's path, modification time and size.
    """
    req = design.requirements
    train, unit = mech.train, mech.unit
    out = _SectionBuilder()
    add = out.add
    summary = _sensor_summary_named(design.sensor, bool(design.sensor.calibrated))
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
    stroke = req.stroke_mm if unit == "mm" else req.stroke_deg
    creep_out, creep_warns = _belt_creep(train, stroke)   # friction belts slip: creep over the stroke
    out.warnings.extend(creep_warns)
    accuracy_out = sensor_err_out + backlash_out + creep_out
    add("output_accuracy", "Output accuracy (sensor peak error + backlash"
        + (" + belt creep)" if creep_warns else ")"), accuracy_out, unit, "sensor",
        note=f"sensor {sensor_err_out:.3g} {unit} + backlash {backlash_out:.3g} {unit}"
             + (f" + belt creep {creep_out:.3g} {unit}" if creep_warns else ""))
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
                             "Latch tolerances and sensor error leave the half-turn decision correct",
                             margin.consumed_deg, margin.available_deg, "deg", "<=",
                             advice="tighten the latch switch-point tolerance, the hysteresis or the magnet "
                                    "alignment"))
    if not margin.ok:
        zones = ", ".join(f"{a:.0f}-{b:.0f} deg" for a, b in margin.fail_zones_deg[:4])
        out.warnings.append(f"The half-turn decision can fail near {zones} of each motor turn.")
    return Sensing(out.done(), summary, resolution_out, sweep_curve)


def speed_bounds_stage(design: ActuatorDesign, mech: Mechanics) -> SpeedBounds:
    """Counting, limits: the poll schedule, the narrowest quadrant of the worst unit inside the latch
    tolerances, the fastest motor speed counted, the onset of silent miscounts, the back-drive check with
    the required counting margin and its followable advice (:mod:`turnkit.counting`)."""
    req = design.requirements
    train, unit = mech.train, mech.unit
    out = _SectionBuilder()
    add = out.add
    schedule = build_schedule(design)
    add("poll_period_ms", "Poll period while asleep", design.schedule.poll_period_ms, "ms", "schedule")
    awake_s = schedule.wake_time_s + schedule.settle_time_s + schedule.poll_time_s
    add("duty_cycle_percent", "Duty cycle (awake share while idle)", 100 * awake_s / schedule.poll_period_s, "%",
        "schedule", equation="duty_cycle")
    req_speed = (req.backdrive_speed_mm_per_s if unit == "mm" else req.backdrive_speed_rpm)
    wrong_speed = req.backdrive_speed_rpm if unit == "mm" else req.backdrive_speed_mm_per_s
    if wrong_speed is not None:
        raise DesignValueError("requirements.backdrive_speed", wrong_speed,
                               "given in mm/s for a linear output, rpm for a rotary one",
                               unit="rpm" if unit == "mm" else "mm/s")
    required_rpm = None
    if req_speed is not None:
        required_rpm = motor_rpm_for_output_speed(req_speed, train, "mm/s" if unit == "mm" else "rpm",
                                                  "requirements.backdrive_speed")
    limits = counting.counting_limits(design)
    out_per_rpm, out_speed_unit = output_speed_for_motor_rpm(1.0, train)
    report = counting.backdrive_report(design, limits, required_rpm, req_speed, out_speed_unit, out_per_rpm,
                                       float(train.ratio))
    out.extend_values(report.values)
    if report.check is not None:
        out.checks.append(report.check)
    return SpeedBounds(out.done(), schedule, limits, limits.trackable_rpm, out_speed_unit, req_speed, required_rpm,
                       report.max_poll_period_s, awake_s)


def power_stage(design: ActuatorDesign, mech: Mechanics, speed: SpeedBounds) -> PowerLife:
    """Power: the average current and its breakdown (driven moves included), the battery derated for its
    site (temperature, self-discharge, pulse sag and brown-out, fault drain), its usable capacity and life."""
    req = design.requirements
    train = mech.train
    schedule = speed.schedule
    out = _SectionBuilder()
    add = out.add
    pack = build_battery(design)
    profile = build_profile(design, pack.nominal_voltage_V if pack is not None else None)
    # Driven moves: the motor (and any buffer leakage) join the budget; the electronics track meanwhile.
    electronics = profile
    profile, moves, move_values = _moves_stage(design, train, profile)
    out.extend_values(move_values)
    out.warnings.extend(_move_warnings(moves, design.power))
    motion_events = sum(sc.bursts_per_day or 0.0 for sc in design.motion if sc.kind == "bursts")
    motion_fraction = 0.0
    for sc in design.motion:
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
    if moves is not None:
        sched_kw["tracking_fraction"] = moves.tracking_fraction
    budget = power.budget_from_schedule(profile, **sched_kw)
    add("average_current_uA", "Average current", budget.average_current_uA, "uA", "power",
        equation="average_current")
    add("charge_per_year_mAh", "Charge drawn per year", budget.charge_per_year_mAh, "mAh", "power")
    add("charge_per_wake_uC", "Charge per wake-up", budget.charge_per_wake_uC, "uC", "power")
    add("peak_current_mA", "Peak current", budget.peak_current_mA, "mA", "power")
    add("dominant_consumer", "Largest consumer", budget.dominant_consumer, "", "power",
        note=f"{budget.by_consumer()[budget.dominant_consumer]:.3g} uA of the average")
    add("dominant_state", "State that costs the most charge", budget.dominant_state, "", "power")
    out.extend_values(_breakdown_values(budget))
    if motion_events:
        out.assumptions.append((f"Back-drive bursts: {motion_events:g} a day (from the motion scenarios) in the "
                                "average current", "design file"))
    temperature_C = design.battery.temperature_degC if design.battery is not None else 20.0
    if req.service_temperature_degC is not None:
        temperature_C = req.service_temperature_degC
    life = None
    usable = 1.0
    shelf = None
    if pack is not None:
        # Site temperature, pulse sag and brown-out, fault drain: the pack comes back derated for the site.
        energy = _energy_stage(design, pack, electronics, schedule, moves, temperature_C, budget.average_current_uA)
        pack, usable, shelf = energy.pack, energy.usable, energy.shelf_life_years
        out.extend_values(energy.values)
        out.checks.extend(energy.checks)
        out.warnings.extend(energy.warnings)
        out.assumptions.extend(energy.assumptions)
        est = batt.estimate_life(pack, budget.average_current_uA, temperature_C=temperature_C,
                                 usable_fraction=usable, peak_current_mA=budget.peak_current_mA,
                                 self_discharge_per_year=pack.self_discharge_per_year)
        life = est.life_years
        add("battery", "Battery", f"{pack.name}", "", "battery")
        add("battery_capacity_mAh", "Battery nominal capacity", pack.capacity_mAh, "mAh", "battery",
            note=pack.cell.source_of("capacity_mAh"))
        add("usable_fraction_percent", "Share of the capacity delivered before the largest pulse browns out "
            "the electronics", 100 * usable, "%", "battery")
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
        out.assumptions.append(("Battery derated for the site: capacity at the coldest temperature, linear "
                                "self-discharge at the year-mean rate, 8766 h per year", "(common practice)"))
    return PowerLife(out.done(), pack, profile, budget, MappingProxyType(sched_kw), temperature_C, usable, life,
                     shelf)


def advice_stage(design: ActuatorDesign, mech: Mechanics, speed: SpeedBounds, pw: PowerLife) -> Section:
    """Checks and advice: battery life (judged on the charge or shelf life, whichever ends first) and
    quiescent budget checks with what would fix them, and whether any poll period meets both the
    back-drive speed and the life (with how far each must move if none does)."""
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
            # Rounded up, so that a battery of the size named does last the life.
            advice = (f"a battery of at least {counting.round_up_sig(need_cap):.4g} mAh at the present poll "
                      f"period of {schedule.poll_period_s * 1e3:.4g} ms, or a lower average current")
            if req_speed is not None and max_period_s > schedule.poll_period_s * 1.01:
                advice += (f"; polling only as often as the back-drive speed needs (every "
                           f"{max_period_s * 1e3:.4g} ms) also saves charge")
            add("capacity_needed_mAh", "Capacity needed for the required life at the present poll period",
                need_cap, "mAh", "battery", equation="capacity_for_life",
                note=f"polling every {schedule.poll_period_s * 1e3:.4g} ms while asleep")
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
                    note=("negative: even zero sleep current cannot make the life; the wake-ups and moves "
                          "alone cost too much") if max_sleep < 0 else f"now {sleep_now:.3g} uA")
        except DesignValueError:
            advice = (f"this chemistry cannot last {req.battery_life_years:g} years against its own "
                      "self-discharge: choose another chemistry")
        out.checks.append(_check("battery_life", "Battery lasts the required life", life, req.battery_life_years,
                                 "years", ">=", advice=advice))
    if pack is not None:
        out.values.append(_service_life(out.checks, life, pw.shelf_life_years, req.battery_life_years))
    host = design.power.host_supply
    budget_uA = req.quiescent_budget_uA
    if budget_uA is None and host is not None:
        budget_uA = host.quiescent_budget_uA
    if budget_uA is not None:
        out.checks.append(_check("quiescent_budget", "Average current within the quiescent budget",
                                 budget.average_current_uA, budget_uA, "uA", "<=",
                                 advice="poll less often or cut the sleep current"))

    # Conflicts between speed and life.
    if max_period_s is not None and life is not None and req.battery_life_years is not None \
            and max_period_s > speed.awake_s:
        life_at_limit = float(batt.life_years(
            pack, power.average_current_uA(profile, **{**pw.sched_kw, "poll_period_s": max_period_s}),
            temperature_C=temperature_C, usable_fraction=usable, warn=False))
        add("life_at_max_poll_period_years", "Battery life at the longest allowed poll period", life_at_limit,
            "years", "battery")
        if life_at_limit < req.battery_life_years:
            out.warnings.append(
                f"No poll period meets both requirements: polling every {max_period_s * 1e3:.4g} ms (the "
                f"longest that follows {req_speed:g} {speed.out_speed_unit}) lasts only {life_at_limit:.3g} years "
                f"against {req.battery_life_years:g} required.")
            out.warnings.extend(_relax_lines(profile, pack, schedule, speed.required_rpm, req.battery_life_years,
                                             temperature_C, train, usable, limits=speed.limits))
    return out.done()


def accuracy_stage(design: ActuatorDesign, curves: bool = True) -> tuple[Section, tuple[str, ...]]:
    """The output accuracy budget over the service temperatures, the magnet's field checks and count
    keeping through supply events; also the keys of earlier checks it replaces."""
    b = _accuracy_stage(design, curves)
    return (Section(values=tuple(b.values), checks=tuple(b.checks), warnings=tuple(b.warnings),
                    assumptions=tuple(b.assumptions), curves=tuple(b.curves)), tuple(b.replaced_checks))


def scenarios_stage(design: ActuatorDesign, mech: Mechanics, counter: CounterRange, speed: SpeedBounds,
                    base_dir: str | Path | None = None) -> Section:
    """Counting, scenarios: each motion scenario simulated through the counter on the design's schedule,
    for the worst unit inside the latch tolerances (or the unit the design gives), after an estimate of
    the work that refuses unbounded runs.

    Each scenario's simulation is cached on the scenario, the train's kinematics (travel per motor
    turn, direction, output unit), the schedule, the counter and the latch edges.
    """
    train, unit = mech.train, mech.unit
    base = str(Path(base_dir).resolve()) if base_dir is not None else None
    edges = counting.unit_edge_shifts_deg(design)
    _refuse_unbounded_work(design, base)
    scenarios: list[Scenario] = []
    for sc in design.motion:
        result, peak = _simulate_scenario(sc, mech.kinematics, speed.schedule, counter.settings, base, edges)
        scenarios.append(counting.scenario_row(design, sc, result, peak, train, speed.limits, unit,
                                               _scenario_peak_to_peak(sc, train)))
    return Section(scenarios=tuple(scenarios))


def curves_stage(design: ActuatorDesign, mech: Mechanics, counter: CounterRange, sensing: Sensing,
                 speed: SpeedBounds, pw: PowerLife, base_dir: str | Path | None = None) -> Section:
    """Plot data: life (or current) against poll period with the limit that counts every speed (the
    requirement and each scenario's peak), a simulated back-drive event and its output error, resolution
    and back-drive speed against reduction, current over a poll cycle, sensor error over a turn, and a
    measured calibration sweep's fit."""
    base = str(Path(base_dir).resolve()) if base_dir is not None else None
    allowed_s, allowed_why = counting.allowed_poll_period_s(speed.limits, speed.required_rpm,
                                                            _scenario_peaks(design, mech.stages, base))
    out = _curves(design, mech.train, speed.schedule, counter.settings, pw.profile, pw.pack, sensing.summary,
                  pw.sched_kw, allowed_s, speed.required_rpm, speed.req_speed, speed.out_speed_unit,
                  pw.temperature_C, speed.guaranteed_rpm, sensing.resolution_out, base, pw.usable,
                  edges=counting.unit_edge_shifts_deg(design), limit_note=(allowed_why, speed.limits.margin))
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
    ("Counted by the model: at most the narrowest quadrant between two latch edges (worst unit inside "
     "the latch tolerances) between two polls, any phase, the longest interval between polls "
     "including jitter",
     "2-bit Gray code, one bit changes per step: F. Gray, US patent 2,632,058 (1953); narrowest "
     "quadrant (derived, shown in docs/counter.md)"),
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
    accuracy, replaced = accuracy_stage(design, curves)
    scenarios = scenarios_stage(design, mech, counter, speed, base_dir) if simulate else Section()
    plots = curves_stage(design, mech, counter, sensing, speed, pw, base_dir) if curves else Section()
    # The accuracy budget over temperature replaces the one-temperature accuracy check.
    sensed = replace(sensing.section, checks=tuple(c for c in sensing.section.checks if c.key not in replaced))
    return assemble(design, mech.unit,
                    (mech.section, counter.section, sensed, speed.section, pw.section, advice, accuracy, scenarios,
                     plots), identify=identify)


def _relax_lines(profile, pack, schedule, required_rpm, life_years, temperature_C, train,
                 usable: float = 1.0, limits=None) -> list[str]:
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
            travel_per_turn=float(train.travel_per_motor_turn), output_unit=train.output_unit,
            **({} if limits is None else dict(narrowest_quadrant_deg=limits.widths.narrowest_quadrant_deg,
                                              jitter=limits.jitter, margin=limits.margin)))
    except DesignValueError as exc:
        return [f"Relaxation advice unavailable: {exc}"]
    rec = advice.recommended
    return [f"To make both fit{' (the smallest change)' if o == rec else ''}: {o.text}"
            for o in advice.options if o.possible]


def _curves(design, train, schedule, settings, profile, pack, summary, sched_kw, max_period_s, required_rpm,
            req_speed, speed_unit, temperature_C, guaranteed_rpm, resolution_out, base, usable=1.0, edges=None,
            limit_note=("the required back-drive speed", 0.0)) -> list[Curve]:
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
        # The charge life cannot outlast the shelf life at the site: the life check uses the lower.
        hlines = hlines + (Series("shelf life at the site", np.array([lo_s * 1e3, hi_s * 1e3]),
                                  np.full(2, lc.shelf_life_years), style="dashed"),)
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
            bands = (Band("not counted with the margin", max_period_s * 1e3, hi_s * 1e3),)
    out.append(Curve(key, title, "poll period", "ms", ylab, yunit, series,
                     markers=(Marker("this design", period_ms, marker_y),), bands=bands, vlines=vlines,
                     log_x=True, log_y=True,
                     note=(f"longest poll period counting every speed with {limit_note[1] * 100:.3g} % margin "
                           f"(latch tolerances and jitter included): {max_period_s * 1e3:.4g} ms, set by "
                           f"{limit_note[0]}" if max_period_s is not None else "no back-drive speed required")))

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
                       trace_window_s=(0.0, duration), trace_max_polls=200, edge_shifts_deg=edges)
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

    # (d) current over one poll cycle, on a log time axis from the wake-up on: a pulse of a few
    # microseconds and a sleep of many milliseconds both get room, so the pulse's shape shows.
    totals = profile.state_totals_uA()
    t_wake = schedule.wake_time_s + schedule.settle_time_s
    T = schedule.poll_period_s
    t_awake = t_wake + schedule.poll_time_s
    t_first = min(t_wake, schedule.poll_time_s, T - t_awake) / 10.0 if T > t_awake else t_awake / 100.0
    cyc_t = np.array([t_first, t_wake, t_wake, t_awake, t_awake, T]) * 1e3
    cyc_i = np.array([totals["waking"], totals["waking"], totals["polling"], totals["polling"], totals["asleep"],
                      totals["asleep"]])
    avg = float(power.average_current_uA(profile, **sched_kw))
    out.append(Curve("current_profile", "Current over one poll cycle", "time since wake-up", "ms", "current", "uA",
                     (Series("supply current", cyc_t, cyc_i),
                      Series("average", cyc_t[[0, -1]], np.full(2, avg), style="dashed")),
                     log_x=True, log_y=True,
                     note=f"awake {t_awake * 1e6:.4g} us of every {T * 1e3:.4g} ms: duty cycle "
                          f"{awake_s / T * 100:.3g} %, average {avg:.4g} uA"))

    # (e) sensor angle error over a turn
    out.append(Curve("sensor_error", "Sensor angle error over one motor turn", "motor angle", "deg", "angle error",
                     "deg", (Series("before calibration", summary.angle_deg, summary.error_before_deg),
                             Series("after calibration", summary.angle_deg, summary.error_after_deg)),
                     note=f"peak {np.max(np.abs(summary.error_before_deg)):.3g} deg before, "
                          f"{np.max(np.abs(summary.error_after_deg)):.3g} deg after calibration"))
    return out


# ---------------------------------------------------------------------------
# bounded work: an estimate before simulating
# ---------------------------------------------------------------------------

#: Most polls simulated one by one (while something moves) in one sizing, over all scenarios.
#: Idle time is counted in closed form and costs nothing; at some 5·10⁷ polls/s on a laptop
#: core this keeps one sizing under about twenty seconds, in bounded memory (polls go in chunks).
MAX_SIMULATED_POLLS = 1e9
#: Most back-drive bursts drawn for one scenario (each is a few numbers in memory).
MAX_BURSTS = 2e6


def estimate_work(design: ActuatorDesign, base_dir: str | Path | None = None) -> dict[str, float]:
    """How much simulation sizing ``design`` takes, counted before any of it is done.

    Each motion scenario is simulated poll by poll only while it moves, so its
    cost is about the time in motion divided by the shortest poll period
    (for an adaptive schedule, plus the fast-polling hold after each motion).
    Bursts are counted from ``bursts_per_day × duration`` without drawing
    them; other shapes are built (cheap) and their motion spans summed; a
    trace is read to find its span.

    Parameters
    ----------
    design : ActuatorDesign
        The design.
    base_dir : path, optional
        Folder that relative trace paths are relative to.

    Returns
    -------
    dict
        ``{"polls": polls simulated one by one, "bursts": bursts drawn in the
        largest bursts scenario, "by_scenario": {name: polls}}`` (counts).
    """
    periods = [design.schedule.poll_period_ms]
    if design.schedule.kind == "adaptive":
        periods.append(design.schedule.fast_poll_period_ms)
    shortest_s = min(periods) / 1e3
    hold_s = design.schedule.hold_time_s if design.schedule.kind == "adaptive" else 0.0
    stages = tuple(design.gear_train)
    base = str(base_dir) if base_dir is not None else None
    by_scenario: dict[str, float] = {}
    most_bursts = 0.0
    for sc in design.motion:
        moving_s, episodes, bursts = _scenario_motion(sc, stages, base)
        most_bursts = max(most_bursts, bursts)
        by_scenario[sc.name] = moving_s / shortest_s + episodes * hold_s / shortest_s + episodes
    return {"polls": float(sum(by_scenario.values())), "bursts": most_bursts, "by_scenario": by_scenario}


@lru_cache(maxsize=256)
def _scenario_motion(sc: MotionScenario, stages: tuple, base_dir: str | None) -> tuple[float, float, float]:
    """(time in motion s, motion episodes, bursts drawn) of one scenario; no schedule involved.

    Cached: the dashboard and sweeps re-size on every change and a trace would be read each time.
    """
    train = _train_cached(stages)[0]
    if sc.kind == "bursts":
        count, mean_s = _burst_count(sc, train)
        return min(count * mean_s, sc.duration_s), count, count
    # Built from the train's kinematics, as the simulation builds it, so that a trace file read here
    # is the one the simulation reuses (its cache is keyed on what the motion reads of the train).
    profile, duration, _ = build_motion(sc, _kinematics_of(train), Path(base_dir) if base_dir is not None else None)
    starts, ends = profile.motion_intervals()
    if not np.size(starts):
        return 0.0, 0.0, 0.0
    moving_s = float(np.sum(np.clip(np.minimum(ends, duration) - np.maximum(starts, 0.0), 0.0, None)))
    return moving_s, float(np.size(starts)), 0.0


def _burst_count(sc: MotionScenario, train) -> tuple[float, float]:
    """Expected number of bursts over the scenario, and their mean length (s), as ``build_motion`` draws them."""
    speed = abs(_scenario_motor(sc, train, "speed")[0] or 0.0)
    distance = abs(_scenario_motor(sc, train, "distance")[0] or 0.0)
    mean_s = 0.75 * distance / (speed * 6.0) if speed > 0 else math.inf
    return sc.duration_s / (86400.0 / sc.bursts_per_day + mean_s), mean_s


def _refuse_unbounded_work(design: ActuatorDesign, base_dir: str | Path | None) -> None:
    """Raise before simulating when :func:`estimate_work` exceeds the documented limits."""
    work = estimate_work(design, base_dir)
    train = _train_cached(tuple(design.gear_train))[0]
    for index, sc in enumerate(design.motion):
        count = _burst_count(sc, train)[0] if sc.kind == "bursts" else 0.0
        if count > MAX_BURSTS:
            raise DesignValueError(f"motion[{index}].bursts_per_day", sc.bursts_per_day,
                                   f"at most {MAX_BURSTS:.3g} bursts over the duration",
                                   hint=f"{count:.3g} bursts would be drawn for '{sc.name}'; shorten the "
                                        "duration (a year shows the pattern) or lower bursts_per_day")
    if not work["polls"] <= MAX_SIMULATED_POLLS:
        name, polls = max(work["by_scenario"].items(), key=lambda item: item[1])
        index = [sc.name for sc in design.motion].index(name)
        sc = design.motion[index]
        key, value, unit = ("trace", sc.trace, "") if sc.kind == "trace" else ("duration", sc.duration_s, "s")
        raise DesignValueError(f"motion[{index}].{key}", value,
                               f"short enough to simulate in at most {MAX_SIMULATED_POLLS:.3g} polls while moving "
                               "(all scenarios together)", unit=unit,
                               hint=f"the scenarios need about {work['polls']:.3g} polls, '{name}' about "
                                    f"{polls:.3g}; shorten it or poll less often")


# ---------------------------------------------------------------------------
# limits named in the user's words
# ---------------------------------------------------------------------------

def _sensor_summary_named(sensor_design, calibrated: bool):
    """:func:`_sensor_summary`, with a failed fit of the simulated calibration sweep named by the design's key.

    The summary fits a simulated sweep of the sensor; with a very coarse ADC
    (or huge noise) the sweep has gaps and cannot be fitted. That is reported
    as ``sensor.adc_bits`` with the smallest width that fits (found with the
    same function), not as a problem with a measured sweep file.
    """
    try:
        return _sensor_summary(sensor_design, calibrated)
    except DesignValueError as exc:
        if not exc.field.startswith("sweep"):
            raise
        reason = exc.args[0] if exc.args else str(exc)
    for bits in range(sensor_design.adc_bits + 1, 33):
        try:
            _sensor_summary(replace(sensor_design, adc_bits=bits), calibrated)
        except DesignValueError:
            continue
        raise DesignValueError("sensor.adc_bits", sensor_design.adc_bits, f"at least {bits} for this sensor",
                               unit="bit", hint="with fewer bits the angle sensor's simulated calibration sweep "
                                                f"has gaps and cannot be fitted ({reason})")
    raise DesignValueError("sensor", "the [sensor] section", "a sensor whose simulated calibration sweep can be "
                                                             "fitted", hint=reason)


# ---------------------------------------------------------------------------
# accuracy budget over temperature, magnet and latch fields, count keeping
# ---------------------------------------------------------------------------

class _BudgetStage(tuple):
    """What :func:`_accuracy_stage` adds to a sizing: values, checks, curves, warnings, assumptions."""

    __slots__ = ()
    values = property(lambda self: self[0])
    checks = property(lambda self: self[1])
    curves = property(lambda self: self[2])
    warnings = property(lambda self: self[3])
    assumptions = property(lambda self: self[4])
    replaced_checks = property(lambda self: ("output_accuracy",))


def _floor_digits(value: float, digits: int = 3) -> str:
    """``value`` rounded down to ``digits`` significant figures, as text (advice never rounds past a limit)."""
    if value <= 0:
        return "0"
    step = 10.0 ** (math.floor(math.log10(value)) - digits + 1)
    return f"{math.floor(value / step) * step:.{digits}g}"


def _service_temperatures_degC(design: ActuatorDesign) -> np.ndarray:
    """Budget temperatures: the service range in up to 9 steps plus the calibration temperature inside it."""
    low, high = design.requirements.temperature_range_degC()
    return _temperature_grid(low, high, design.accuracy.calibration_temperature_degC)


@lru_cache(maxsize=64)
def _temperature_grid(low: float, high: float, cal: float) -> np.ndarray:
    # Cached on the three temperatures it reads (degC); read-only, since every caller shares it.
    grid = np.linspace(low, high, 9) if high > low else np.array([low])
    if low <= cal <= high:
        grid = np.append(grid, cal)
    grid = np.array(sorted(set(grid.tolist())))  # np.unique would import a numpy submodule on a cold start
    grid.flags.writeable = False
    return grid


def _magnet_numbers(mag):
    """(remanence at 20 degC in mT, its coefficient in %/K, highest temperature in degC, grade)."""
    from .magnet import GRADES

    grade = GRADES[mag.grade]
    return (mag.remanence_mT if mag.remanence_mT is not None else grade.remanence_mT,
            mag.remanence_drift_pct_per_K if mag.remanence_drift_pct_per_K is not None
            else grade.remanence_drift_pct_per_K,
            mag.max_temperature_degC if mag.max_temperature_degC is not None else grade.max_temperature_degC,
            grade)


def _field_state(design: ActuatorDesign, temps: np.ndarray, airgap_mm: float, fine_error_deg: float):
    """Fields at the sensor and the latches over temperature, and whether each field check passes.

    A read-only mapping. The fields are cached on exactly what they read (:func:`_fields`), so a
    tolerance run that draws backlash, latch tolerances, the sensor or battery figures works them out
    once; only the re-sync check, which also reads the sensor error, is worked out each time.
    """
    from . import countkeeping

    lat = design.latches
    thresholds = (lat.operate_field_mT, lat.release_field_mT, lat.threshold_spread_mT, lat.threshold_drift_pct_per_K)
    state = _fields(design.magnet, tuple(temps.tolist()), float(airgap_mm), design.sensor.minimum_field_mT,
                    thresholds)
    sw = state["switching"]
    if sw is None or design.count_memory is None:
        return state
    # The re-sync check (count keeping) also reads the sensor error, which a tolerance run may draw.
    rs = countkeeping.resync(sw.hysteresis_deg, min(sw.switch_spread_deg, 90.0), fine_error_deg)
    return MappingProxyType({**state, "resync": rs, "all_ok": state["all_ok"] and rs.ok})


def _remanence(mag, temps: np.ndarray) -> np.ndarray:
    """Remanence of the magnet over temperature (mT)."""
    from . import magnet as mag_mod

    br20, drift, _, _ = _magnet_numbers(mag)
    return np.atleast_1d(mag_mod.remanence_mT(br20, drift, temps))


def _latch_peak_field(mag, br: np.ndarray, airgap_mm: float) -> np.ndarray:
    """Peak field at a latch (mT) for the remanence ``br`` (mT)."""
    from . import magnet as mag_mod

    latch_r = mag.latch_radius_mm if mag.latch_radius_mm is not None else 0.5 * mag.diameter_mm
    return np.atleast_1d(mag_mod.latch_peak_field_mT(br, mag.diameter_mm, mag.thickness_mm, airgap_mm, latch_r))


@lru_cache(maxsize=256)
def _fields(mag, temps: tuple, airgap_mm: float, minimum_field_mT: float, thresholds: tuple) -> MappingProxyType:
    """:func:`_field_state` without the re-sync check, from the [magnet] section, the temperatures (degC),
    the airgap (mm), the sensor's minimum field (mT) and the latches' (operate mT, release mT, threshold
    spread mT, threshold drift %/K)."""
    from . import magnet as mag_mod

    temps = np.array(temps)
    br = _remanence(mag, temps)
    b_sensor = np.atleast_1d(mag_mod.sensor_field_mT(br, mag.diameter_mm, mag.thickness_mm, airgap_mm))
    b_latch = _latch_peak_field(mag, br, airgap_mm)
    b_sensor.flags.writeable = False
    b_latch.flags.writeable = False
    state = {"b_sensor": b_sensor, "b_latch": b_latch, "switching": None,
             "sensor_ok": bool(np.min(b_sensor) >= minimum_field_mT)}
    operate, release, spread, threshold_drift = thresholds
    passes = [state["sensor_ok"]]
    if operate is not None:
        sw = mag_mod.latch_switching(b_latch, temps, operate_field_mT=operate, release_field_mT=release,
                                     threshold_spread_mT=spread, threshold_drift_pct_per_K=threshold_drift)
        state["switching"] = sw
        passes += [sw.operates, sw.releases]
    state["all_ok"] = all(passes)
    return MappingProxyType(state)


def _largest_airgap_mm(design: ActuatorDesign, temps: np.ndarray, fine_error_deg: float) -> float | None:
    """Largest airgap at which every field check passes (bisection on the same checks), or None."""
    hi = design.magnet.airgap_mm
    lo = min(0.05, hi)
    if not _field_state(design, temps, lo, fine_error_deg)["all_ok"]:
        return None
    if _field_state(design, temps, hi, fine_error_deg)["all_ok"]:
        return hi
    for _ in range(30):
        mid = 0.5 * (lo + hi)
        if _field_state(design, temps, mid, fine_error_deg)["all_ok"]:
            lo = mid
        else:
            hi = mid
    return math.floor(lo * 1000.0) / 1000.0 if lo >= 0.001 else lo


def _airgap_advice(design, temps, fine_error_deg) -> str:
    gap = _largest_airgap_mm(design, temps, fine_error_deg)
    if gap is None:
        return ("no airgap makes every field check pass: use a stronger grade, a larger magnet or latches with "
                "lower operate and release points")
    return (f"reduce the magnet airgap to at most {gap:g} mm (now {design.magnet.airgap_mm:g} mm), or use a "
            "stronger grade or a larger magnet")


def _accuracy_stage(design: ActuatorDesign, curves: bool = True) -> _BudgetStage:
    """The output accuracy budget over the service temperatures, the magnet's field checks and the
    count-keeping checks (each with advice computed from the same function as its check).

    Cached on the sections it reads: a poll-period or battery change on the dashboard reuses it.
    """
    counter, schedule, power_ = _unread_sections()
    key = replace(design, name="-", description="", counter=counter, schedule=schedule, power=power_, battery=None,
                  motion=())
    return _accuracy_stage_cached(key, bool(curves))


@lru_cache(maxsize=1)
def _unread_sections():
    """Default [counter], [schedule] and [power] sections, which stand in for the design's in the accuracy
    stage's cache key (made once: each is validated when made)."""
    from .design import CounterDesign, PowerDesign, ScheduleDesign

    return CounterDesign(), ScheduleDesign(), PowerDesign()


@lru_cache(maxsize=64)
def _accuracy_stage_cached(design: ActuatorDesign, curves: bool) -> _BudgetStage:
    from . import accuracy as acc_mod, countkeeping, magnet as mag_mod

    stages = tuple(design.gear_train)
    train = _train_cached(stages)[0]
    summary = _sensor_summary_named(design.sensor, bool(design.sensor.calibrated))
    unit = train.output_unit
    stroke = design.requirements.stroke_mm if unit == "mm" else design.requirements.stroke_deg
    acc = design.accuracy
    temps = _service_temperatures_degC(design)
    low, high = float(temps[0]), float(temps[-1])
    values: list[Value] = []
    checks: list[Check] = []
    warns: list[str] = []
    assumptions: list[tuple[str, str]] = []
    curve_list: list[Curve] = []
    per_motor_deg = train.output_resolution(1.0)
    fine_err = summary.peak_error_deg

    def add(key, label, value, unit_="", group="accuracy", note=""):
        values.append(Value(key, label, value, unit_, group, "", note))

    # -- magnet and fields ----------------------------------------------------
    state = None
    if design.magnet is not None:
        mag = design.magnet
        br20, drift, max_t, grade = _magnet_numbers(mag)
        state = _field_state(design, temps, mag.airgap_mm, fine_err)
        add("magnet_grade", "Magnet grade", grade.name, "", "magnet",
            note=f"remanence {br20:g} mT at 20 degC, {drift:g} %/K")
        add("sensor_field_cold_mT", f"Field at the AMR sensor at {low:g} degC", float(state["b_sensor"][0]), "mT",
            "magnet", note="on-axis closed form for a diametrically magnetised disc")
        add("sensor_field_hot_mT", f"Field at the AMR sensor at {high:g} degC", float(state["b_sensor"][-1]), "mT",
            "magnet")
        add("latch_peak_field_hot_mT", f"Peak field at a latch at {high:g} degC", float(state["b_latch"][-1]), "mT",
            "magnet")
        assumptions.append((f"Magnet remanence {br20:g} mT at 20 degC, falling {-drift:g} %/K (reversible, linear)",
                            grade.source if mag.remanence_mT is None and mag.remanence_drift_pct_per_K is None
                            else "design file"))
        assumptions.append(("Magnet field from the surface-charge model of a uniformly, diametrically magnetised "
                            "disc; on the axis in closed form",
                            "E. P. Furlani, Permanent Magnet and Electromechanical Devices (2001), ch. 2; "
                            "G. Caciagli et al., J. Magn. Magn. Mater. 456, 423 (2018)"))
        weakest = int(np.argmin(state["b_sensor"]))
        checks.append(_check("magnet_field_at_sensor", "Magnet field at the AMR sensor reaches its minimum field "
                             f"over {low:g}..{high:g} degC", float(state["b_sensor"][weakest]),
                             design.sensor.minimum_field_mT, "mT", ">=",
                             advice="" if state["sensor_ok"] else _airgap_advice(design, temps, fine_err)))
        rated = sorted((g for g in mag_mod.GRADES.values() if g.max_temperature_degC >= high),
                       key=lambda g: -g.remanence_mT)
        t_advice = (f"choose a grade rated to at least {high:g} degC, e.g. grade = '{rated[0].key}' "
                    f"({rated[0].name}, up to {rated[0].max_temperature_degC:g} degC)") if rated else \
            "no grade in turnkit's table is rated that hot: keep the magnet cooler"
        checks.append(_check("magnet_temperature", "Magnet stays below its highest working temperature", high, max_t,
                             "degC", "<=", advice=t_advice))
        sw = state["switching"]
        if sw is not None:
            io, ir = sw.worst_operate_index, sw.worst_release_index
            advice = "" if sw.operates and sw.releases else _airgap_advice(design, temps, fine_err)
            checks.append(_check("latch_operates", f"Latch field reaches the operate point (worst at "
                                 f"{temps[io]:g} degC)", float(sw.peak_field_mT[io]), float(sw.operate_needed_mT[io]),
                                 "mT", ">=", advice=advice))
            checks.append(_check("latch_releases", f"Latch field reaches the release point (worst at "
                                 f"{temps[ir]:g} degC)", float(sw.peak_field_mT[ir]), float(sw.release_needed_mT[ir]),
                                 "mT", ">=", advice=advice))
            add("latch_switch_spread_deg", "Latch switch-angle spread from the field (either way)",
                sw.switch_spread_deg, "deg", "magnet",
                note="operate/release spread and drift against the field over temperature")
            add("latch_field_hysteresis_deg", "Latch hysteresis from the field", sw.hysteresis_deg, "deg", "magnet")
            if sw.switch_spread_deg > design.latches.switch_point_tolerance_deg:
                warns.append(f"The magnet's field gives a latch switch-angle spread of {sw.switch_spread_deg:.3g} deg, "
                             f"more than the {design.latches.switch_point_tolerance_deg:g} deg in [latches] "
                             "switch_point_tolerance, which the half-turn margin uses.")
    elif design.accuracy.eccentricity_mm > 0 or design.accuracy.stray_field_mT > 0:
        key = "eccentricity" if design.accuracy.eccentricity_mm > 0 else "stray_field"
        raise DesignValueError(f"accuracy.{key}", getattr(design.accuracy, f"{key}_mm" if key == "eccentricity"
                                                          else "stray_field_mT"),
                               "left out without a [magnet] section", hint="describe the magnet in [magnet]")

    # -- contributions at the output ------------------------------------------
    parts: list[acc_mod.Contribution] = []

    def part(key, label, motor_deg=None, out=None, shape="sine", note=""):
        size = np.asarray(out if out is not None else np.asarray(motor_deg, dtype=float) * per_motor_deg, dtype=float)
        if (size > 0).any():
            parts.append(acc_mod.Contribution(key, label, size, shape, note))

    part("sensor_residual", "sensor error" + (" after calibration" if design.sensor.calibrated else
                                              " (uncalibrated)"), summary.peak_error_deg)
    part("noise", "noise", summary.noise_sigma_deg, shape="normal", note="1 sigma; counted k times")
    if acc.approach == "either":
        part("backlash", "backlash, approached from either side", out=0.5 * train.backlash_at_output(),
             shape="two_point", note="half the lost motion either way of a zero set mid-band")
    dt = temps - acc.calibration_temperature_degC
    s = design.sensor
    amp = s.amplitude_mV * np.maximum(1.0 + s.amplitude_drift_pct_per_K / 100.0 * dt, 1e-6)
    off = s.offset_drift_uV_per_K * 1e-3 * np.abs(dt) / amp
    if np.any(off > 0):
        if np.any(off >= 0.7):
            raise DesignValueError("sensor.offset_drift", s.offset_drift_uV_per_K,
                                   "small enough that the drifted offset stays well below the amplitude", unit="uV/K")
        part("offset_drift", "bridge offset drift since calibration",
             [angle_error.offset_peak_error(o, o).exact_mech_deg for o in off])
    gain = s.gain_mismatch_drift_pct_per_K / 100.0 * np.abs(dt)
    if np.any(gain > 0):
        part("gain_drift", "bridge gain-mismatch drift since calibration",
             [angle_error.gain_peak_error(1.0 + g).exact_mech_deg for g in np.minimum(gain, 2.0)])
    if state is not None:
        mag = design.magnet
        if acc.eccentricity_mm > 0:
            part("eccentricity", "sensor off the magnet axis", np.full(temps.size, mag_mod.eccentricity_error_deg(
                mag.diameter_mm, mag.thickness_mm, mag.airgap_mm, acc.eccentricity_mm)),
                note="field direction at the displaced sensor, from the field model")
        if acc.stray_field_mT > 0:
            part("stray_field", "stray field", mag_mod.stray_field_error_deg(acc.stray_field_mT, state["b_sensor"]),
                 note="asin(B_stray / B_magnet)")
        if s.anisotropy_field_mT > 0:
            part("finite_field", "finite magnet field (AMR film lag)",
                 mag_mod.finite_field_error_deg(s.anisotropy_field_mT, state["b_sensor"]), note="B_k / (2B)")
    if acc.tilt_deg > 0:
        part("tilt", "sensor tilt", np.full(temps.size, mag_mod.tilt_error_deg(acc.tilt_deg)))
    te = acc.transmission_error_mm if unit == "mm" else acc.transmission_error_deg
    wrong = acc.transmission_error_deg if unit == "mm" else acc.transmission_error_mm
    if wrong is not None:
        raise DesignValueError("accuracy.transmission_error", wrong, f"given in {unit} (the output's unit)",
                               unit="deg" if unit == "mm" else "mm")
    if te:
        part("transmission_error", "gear transmission error and runout", out=np.full(temps.size, te))
    if acc.lead_error_mm is not None:
        if unit != "mm":
            raise DesignValueError("accuracy.lead_error", acc.lead_error_mm, "left out for a rotary output", unit="mm")
        part("lead_error", "screw lead error", out=np.full(temps.size, acc.lead_error_mm), shape="uniform")
    if acc.screw_expansion_ppm_per_K is not None:
        if unit != "mm" or stroke is None:
            raise DesignValueError("accuracy.screw_expansion", acc.screw_expansion_ppm_per_K,
                                   "used only with a linear output and requirements.stroke", unit="ppm/K")
        diff = abs(acc.screw_expansion_ppm_per_K - acc.housing_expansion_ppm_per_K) * 1e-6
        part("thermal_expansion", "thermal expansion, screw against housing", out=diff * stroke * np.abs(dt),
             shape="uniform", note="over the whole stroke from the calibration temperature")
    result = acc_mod.budget(parts, temps, coverage_factor=acc.noise_coverage, samples=acc.monte_carlo_samples,
                            seed=acc.seed)
    names = {"worst_case": "worst case", "rss": "RSS", "monte_carlo": "Monte Carlo"}
    for method in acc_mod.METHODS:
        worst, at_t = result.worst(method)
        add(f"accuracy_{method}", f"Output accuracy over {low:g}..{high:g} degC, {names[method]}", worst, unit,
            note=f"largest at {at_t:g} degC" + ("; the method checked" if method == acc.method else ""))
    chosen, chosen_t = result.worst(acc.method)
    assumptions.append((f"Accuracy budget: systematic errors as bounds, random errors at k = {acc.noise_coverage:g} "
                        f"sigma; Monte Carlo quantile at {100 * result.coverage:.4g} % of |error|, "
                        f"{result.samples} draws, seed {acc.seed}; the requirement is checked against the "
                        f"{names[acc.method]} sum (design-file choice, default worst case)", "(common practice)"))
    target = design.requirements.output_accuracy_mm if unit == "mm" else design.requirements.output_accuracy_deg
    if target is not None:
        advice = ""
        top = acc_mod.largest_contribution(result, acc.method) if chosen > target else None
        if top is not None:
            i = int(np.argmax(result.total(acc.method)))
            now = float(top.extreme(result.coverage_factor)[i])
            factor = acc_mod.scale_to_pass(result, top.key, acc.method, target, seed=acc.seed)
            if factor is None:
                advice = (f"the largest part is {top.label} ({now:.3g} {unit} at {temps[i]:g} degC), but even without "
                          "it the sum is too large: cut several parts, or relax the requirement")
            else:
                advice = (f"the largest part is {top.label} ({now:.3g} {unit} at {temps[i]:g} degC); the "
                          f"{names[acc.method]} sum passes with it at most {_floor_digits(now * factor)} {unit}")
        checks.append(_check("output_accuracy", f"Output accuracy over {low:g}..{high:g} degC "
                             f"({names[acc.method]} sum) is within the allowed error", chosen, target, unit, "<=",
                             advice=advice))

    # -- count keeping through supply events ------------------------------------
    mem = design.count_memory
    if mem is not None:
        travel = mem.travel_per_day_mm if unit == "mm" else mem.travel_per_day_deg
        wrong = mem.travel_per_day_deg if unit == "mm" else mem.travel_per_day_mm
        if wrong is not None:
            raise DesignValueError("count_memory.travel_per_day", wrong, f"given in {unit} (the output's unit)",
                                   unit="deg" if unit == "mm" else "mm")
        qt_day = 4.0 * (travel or 0.0) / float(train.travel_per_motor_turn)
        life = mem.service_life_years or design.requirements.battery_life_years or 10.0
        per_day = countkeeping.writes_per_day(mem.write_strategy, quarter_turns_per_day=qt_day,
                                              write_period_s=mem.write_period_s,
                                              supply_events_per_day=mem.supply_events_per_day)
        end = countkeeping.endurance(per_day, life, mem.rated_write_cycles, mem.wear_leveling_slots)
        add("memory_writes_per_day", "Count writes to non-volatile memory per day", per_day, "", "count keeping",
            note=f"strategy {mem.write_strategy}")
        need_slots = countkeeping.slots_needed(per_day, life, mem.rated_write_cycles)
        checks.append(_check("memory_endurance", f"Count writes over {life:g} years stay within the memory's rated "
                             "cycles", end.lifetime_writes, end.rated_writes, "writes", "<=",
                             advice=f"spread the writes over at least {need_slots} locations "
                                    f"(wear_leveling_slots = {need_slots}), or write less often"))
        if mem.write_strategy == "on_brownout":
            hu = countkeeping.hold_up(mem.holdup_capacitance_uF, mem.brownout_threshold_V, mem.minimum_write_voltage_V,
                                      mem.save_power_mW, mem.save_time_ms, mem.detection_latency_us)
            c_need = countkeeping.capacitance_needed_uF(mem.brownout_threshold_V, mem.minimum_write_voltage_V,
                                                        mem.save_power_mW, mem.save_time_ms, mem.detection_latency_us)
            add("holdup_capacitance_needed_uF", "Hold-up capacitance needed for one save", c_need, "uF",
                "count keeping", note="1/2 C (V1^2 - V2^2) >= P (t_detect + t_save)")
            checks.append(_check("holdup_energy", "Hold-up capacitor carries the brown-out detection and one save",
                                 hu.available_uJ, hu.needed_uJ, "uJ", ">=",
                                 advice=f"a hold-up capacitance of at least {math.ceil(c_need * 100) / 100:g} uF"))
        if state is not None and "resync" in state:
            rs = state["resync"]
            rs_advice = "" if rs.ok else _airgap_advice(design, temps, fine_err)
            basis = "from the magnet's field"
        else:
            lat = design.latches
            rs = countkeeping.resync(lat.hysteresis_deg, lat.switch_point_tolerance_deg, fine_err)
            room = 2.0 * (45.0 - lat.switch_point_tolerance_deg - fine_err)
            rs_advice = (f"latches with a hysteresis of at most {math.floor(room * 100) / 100:g} deg"
                         if room > 0 else "tighten the latch switch-point tolerance and the sensor error")
            basis = "from [latches]"
        add("resync_guard_deg", "Power-up guard band around each latch edge", rs.guard_deg, "deg", "count keeping",
            note=f"half the hysteresis + switch-angle spread + sensor error, {basis}; "
                 f"{100 * rs.untrusted_fraction:.3g} % of a turn is re-synced from the stored count")
        checks.append(_check("power_up_resync", "Power-up re-sync inside the latch hysteresis band is decidable",
                             rs.guard_deg, 45.0, "deg", "<=", advice=rs_advice))
        assumptions.append(("A count kept through a supply event assumes nothing moved while the electronics had no "
                            "power at all; re-home after a power loss where a wrong position can hurt someone",
                            "(common practice)"))

    # -- plots ------------------------------------------------------------------------
    if curves:
        series = [Series("worst case", temps, result.worst_case), Series("RSS", temps, result.rss),
                  Series("Monte Carlo", temps, result.monte_carlo)]
        if target is not None:
            series.append(Series("allowed error", temps[[0, -1]], np.full(2, target), style="dashed"))
        curve_list.append(Curve("accuracy_vs_temperature", "Output accuracy budget over temperature", "temperature",
                                "degC", "output error", unit, tuple(series),
                                markers=(Marker(f"checked ({names[acc.method]})", chosen_t, chosen),),
                                note=f"checked against the {names[acc.method]} sum"))
        i = int(np.argmax(result.total(acc.method)))
        sizes = result.at(i)
        order = sorted(sizes, key=sizes.get, reverse=True)
        labels = {c.key: c.label for c in result.contributions}
        cumulative = np.concatenate([[0.0], np.cumsum([sizes[k] for k in order])])
        x = np.arange(len(order) + 1, dtype=float)
        wf = [Series("worst-case running sum", x, cumulative, style="step")]
        for method in ("rss", "monte_carlo"):
            wf.append(Series(names[method], x[[0, -1]], np.full(2, float(result.total(method)[i])), style="dashed"))
        curve_list.append(Curve(
            "accuracy_waterfall", f"Accuracy budget at {temps[i]:g} degC, largest part first", "contribution", "",
            "output error", unit, tuple(wf),
            note="; ".join(f"{n + 1}: {labels[k]} {sizes[k]:.3g} {unit}" for n, k in enumerate(order))))
    return _BudgetStage((tuple(values), tuple(checks), tuple(curve_list), tuple(warns), tuple(assumptions)))


def latch_switch_spread_from_field(design: ActuatorDesign) -> tuple[float, float] | None:
    """Field-derived latch switch-point tolerance and hysteresis of a design (deg, deg), or None.

    The switch-angle spread (either way) and nominal hysteresis that the magnet's field
    gives the latches over the service temperatures (:func:`turnkit.magnet.latch_switch_spread_deg`),
    for a counting bound that narrows the quadrant by them. None when the design has no
    ``[magnet]`` or no latch operate/release points.
    """
    if design.magnet is None or design.latches.operate_field_mT is None:
        return None
    lat = design.latches
    return _switch_spread(design.magnet, tuple(_service_temperatures_degC(design).tolist()), lat.operate_field_mT,
                          lat.release_field_mT, lat.threshold_spread_mT, lat.threshold_drift_pct_per_K)


@lru_cache(maxsize=64)
def _switch_spread(mag, temps: tuple, operate_field_mT: float, release_field_mT: float, threshold_spread_mT: float,
                   threshold_drift_pct_per_K: float) -> tuple[float, float]:
    # Cached on exactly what it reads (the counting limits ask for it several times a sizing, and a
    # tolerance run that draws the latches' stated tolerance or the backlash reuses it).
    from .magnet import latch_switch_spread_deg

    temps = np.array(temps)
    return latch_switch_spread_deg(_latch_peak_field(mag, _remanence(mag, temps), mag.airgap_mm), temps,
                                   operate_field_mT=operate_field_mT, release_field_mT=release_field_mT,
                                   threshold_spread_mT=threshold_spread_mT,
                                   threshold_drift_pct_per_K=threshold_drift_pct_per_K)


# ---------------------------------------------------------------------------
# energy: driven moves, site temperature, pulse sag, fault and shelf life
# ---------------------------------------------------------------------------

def _moves_stage(design: ActuatorDesign, train, profile) -> tuple:
    """The motor's driven moves in the budget.

    Returns ``(profile, moves, values)``: the profile with the motor (drawing
    only while tracking) and the buffer capacitor's leakage added as
    consumers, the :class:`~turnkit.power.MoveEnergy` (None without moves),
    and the values to show.
    """
    p = design.power
    extra = []
    if p.buffer_leakage_uA:
        extra.append(power.Consumer.constant("buffer capacitor leakage", p.buffer_leakage_uA))
    moves = None
    values: list[Value] = []
    if p.moves_per_day:
        unit = train.output_unit
        stroke = p.move_stroke_mm if unit == "mm" else p.move_stroke_deg
        if (p.move_stroke_deg if unit == "mm" else p.move_stroke_mm) is not None:
            raise DesignValueError("power.move_stroke", p.move_stroke_deg if unit == "mm" else p.move_stroke_mm,
                                   f"given in {unit} for this {'linear' if unit == 'mm' else 'rotary'} output")
        if stroke is None:
            req = design.requirements
            stroke = req.stroke_mm if unit == "mm" else req.stroke_deg
        if stroke is None:
            raise DesignValueError("power.move_stroke", None, "given (or requirements.stroke)", unit=unit,
                                   hint="the travel of one driven move sets the motor turns per move")
        load = p.move_load_N if unit == "mm" else p.move_load_N_m
        wrong = p.move_load_N_m if unit == "mm" else p.move_load_N
        if wrong is not None:
            raise DesignValueError("power.move_load", wrong,
                                   "a force in N for a linear output" if unit == "mm"
                                   else "a torque in N*m for a rotary output",
                                   unit="N*m" if unit == "mm" else "N")
        load = load or 0.0
        work_J = load * stroke / 1000.0 if unit == "mm" else load * math.radians(stroke)
        try:
            moves = power.move_energy(
                moves_per_day=p.moves_per_day, motor_turns_per_move=float(train.motor_turns_for_stroke(stroke)),
                output_work_per_move_J=work_J, gear_efficiency=train.efficiency,
                motor_speed_rpm=p.motor_speed_rpm, supply_voltage_V=profile.supply_voltage_V,
                motor_current_mA=p.motor_current_mA, torque_constant_Nm_per_A=p.motor_torque_constant_N_m_per_A,
                no_load_current_mA=p.motor_no_load_current_mA or 0.0)
        except DesignValueError as exc:
            raise _relabel(exc, "power") from None
        extra.append(moves.consumer())
        how = "given" if p.motor_current_mA is not None else "I_0 + T_motor / k_t"
        values += [
            Value("moves_per_day", "Driven moves per day", moves.moves_per_day, "", "power"),
            Value("time_per_move_s", "Motor running time per move", moves.time_per_move_s, "s", "power",
                  note=f"{moves.motor_turns_per_move:.4g} motor turns at {p.motor_speed_rpm:g} rpm"),
            Value("motor_torque_Nm", "Motor torque while driving the load", moves.motor_torque_Nm, "N*m", "power",
                  note=f"through the train's forward efficiency {train.efficiency:.3g}"),
            Value("motor_current_mA", "Motor current while driving", moves.motor_current_mA, "mA", "power",
                  note=how),
            Value("energy_per_move_J", "Battery energy per move", moves.electrical_energy_per_move_J, "J", "power",
                  note=f"{moves.charge_per_move_C:.4g} C; load work {moves.output_work_per_move_J:.4g} J at the "
                       f"output, {moves.motor_work_per_move_J:.4g} J at the motor"),
            Value("move_charge_per_day_mAh", "Motor charge per day", moves.charge_per_day_mAh, "mAh", "power"),
        ]
    if extra:
        profile = power.CurrentProfile(profile.consumers + tuple(extra), profile.supply_voltage_V)
    return profile, moves, values


def _breakdown_values(budget) -> list[Value]:
    """Where the average current goes, by consumer (the motor among them) and by state."""
    total = budget.average_current_uA or 1.0
    by_consumer = "; ".join(f"{n} {v:.3g} uA ({100 * v / total:.3g} %)" for n, v in budget.by_consumer().items())
    by_state = "; ".join(f"{n} {v:.3g} uA" for n, v in budget.by_state().items() if v > 0)
    return [Value("current_by_consumer", "Average current by consumer", by_consumer, "", "power"),
            Value("current_by_state", "Average current by counter state", by_state, "", "power",
                  note="tracking: while the motor is driven; fault and power lost are not in the daily budget")]


def _move_warnings(moves, p=None) -> list[str]:
    out = []
    if moves is not None and moves.motor_efficiency > 1.0:
        out.append(f"The motor current ({moves.motor_current_mA:.4g} mA) carries less energy than the load "
                   f"needs at the motor shaft ({moves.motor_work_per_move_J:.4g} J a move against "
                   f"{moves.electrical_energy_per_move_J:.4g} J drawn): check the current, the load or the motor "
                   "speed.")
    if moves is not None and p is not None and p.motor_torque_constant_N_m_per_A is not None:
        # In SI units the back-EMF constant equals the torque constant (V per rad/s = N*m/A).
        emf = p.motor_torque_constant_N_m_per_A * p.motor_speed_rpm * math.pi / 30.0
        supply = moves.electrical_energy_per_move_J / moves.charge_per_move_C if moves.charge_per_move_C else 0.0
        if emf >= supply:
            out.append(f"At {p.motor_speed_rpm:g} rpm the motor's back-EMF (k_t * speed = {emf:.3g} V) reaches the "
                       f"{supply:.3g} V supply: it cannot run that fast; check the motor speed or constants.")
    return out


@dataclass(frozen=True)
class _EnergyReport:
    pack: Any
    usable: float
    values: tuple
    checks: tuple
    warnings: tuple
    assumptions: tuple
    shelf_life_years: float


def _pulses(profile_electronics, schedule, moves, p) -> list[tuple[str, float, float]]:
    """(name, current mA, duration s) of the largest current pulses on the battery."""
    totals = profile_electronics.state_totals_uA()
    wake_mA = (max(totals["waking"], totals["polling"], totals["fast_polling"])
               + sum(c.wake_pulse_uA for c in profile_electronics.consumers)) * 1e-3
    awake_s = schedule.wake_time_s + schedule.settle_time_s + schedule.poll_time_s
    out = [("wake-up and poll", wake_mA, awake_s)]
    if moves is not None:
        track_mA = totals["tracking"] * 1e-3
        out.append(("motor running", track_mA + moves.motor_current_mA, moves.time_per_move_s))
        if p.motor_start_current_mA is not None:
            out.append(("motor start", track_mA + p.motor_start_current_mA, p.motor_start_time_ms * 1e-3))
    return out


def _energy_stage(design: ActuatorDesign, pack, profile_electronics, schedule, moves, temperature_C: float,
                  average_current_uA: float) -> _EnergyReport:
    """Site temperature, pulse sag and brown-out, fault drain and shelf life of a battery design.

    Returns the battery derated for the site (capacity factor at the coldest
    temperature, year-mean Arrhenius self-discharge, shelf life shortened alike),
    the usable share of the capacity before the largest pulse browns the
    electronics out (the count is lost there), the brown-out check with its
    buffer-capacitor advice, and the values, warnings and assumptions to show.
    """
    b, p = design.battery, design.power
    try:
        site, derated = _site_pack(pack, temperature_C, b.temperature_min_degC, b.temperature_max_degC)
    except DesignValueError as exc:
        if not exc.field.endswith("temperature_C"):
            raise
        # Name the key the user wrote: an end of the site's range, or the one site temperature.
        if b.temperature_min_degC is not None:
            key = "battery.temperature_min" if exc.value == b.temperature_min_degC else "battery.temperature_max"
        elif design.requirements.service_temperature_degC is not None:
            key = "requirements.service_temperature"
        else:
            key = "battery.temperature"
        raise DesignValueError(key, exc.value, exc.allowed, unit="degC", hint=exc.hint) from None
    cutoff = p.cutoff_voltage_V if p.cutoff_voltage_V is not None else pack.cutoff_voltage_V
    if cutoff >= pack.nominal_voltage_V:
        raise DesignValueError("power.cutoff_voltage", cutoff,
                               f"below the battery's nominal voltage ({pack.nominal_voltage_V:g} V for "
                               f"{pack.name})", unit="V", hint="add cells in series or lower the cut-off")
    r_ohm = batt.internal_resistance_ohm(pack, site.coldest_C)
    c_uF = p.buffer_capacitance_uF or 0.0
    pulses = _pulses(profile_electronics, schedule, moves, p)
    sags = [float(batt.pulse_sag_V(i, t, r_ohm, c_uF)) for _, i, t in pulses]
    worst = int(np.argmax(sags))
    usable = float(batt.usable_fraction_under_pulse(pack, cutoff, sags[worst]))
    values = [
        Value("site_temperature_range_degC", "Site temperature, coldest to hottest",
              f"{site.coldest_C:g} to {site.hottest_C:g}" if site.hottest_C > site.coldest_C
              else f"{site.coldest_C:g}", "degC", "battery"),
        Value("self_discharge_site_per_year_percent", "Self-discharge at the site (year mean, Arrhenius)",
              100 * site.self_discharge_per_year, "%/year", "battery",
              note=f"{site.self_discharge_factor:.3g} x the 20 degC value; activation energy "
                   f"{site.activation_eV:g} eV"),
        Value("shelf_life_site_years", "Shelf life at the site", site.shelf_life_years, "years", "battery",
              note=f"{pack.shelf_life_years:g} years at 20 degC, shortened by the same factor when above 1"),
        Value("internal_resistance_ohm", f"Battery internal resistance at {site.coldest_C:g} degC", r_ohm, "ohm",
              "battery", note=pack.cell.source_of("resistance_curve") if pack.cell.resistance_curve else
              "unknown for this cell: pulse sag not modelled"),
        Value("largest_pulse_sag_V", f"Voltage sag under the largest pulse ({pulses[worst][0]})", sags[worst], "V",
              "battery", note=f"{pulses[worst][1]:.4g} mA for {pulses[worst][2]:.4g} s"
                              + (f", {c_uF:g} uF buffer" if c_uF else "")),
    ]
    warnings: list[str] = []
    checks: list[Check] = []
    # Brown-out: judged where the required life leaves the cell (or on a fresh cell).
    req_life = design.requirements.battery_life_years
    if req_life is not None:
        drawn = (average_current_uA * 1e-3 * _HOURS_PER_YEAR + site.self_discharge_per_year * pack.capacity_mAh) \
            * req_life
        depth = min(drawn / (pack.capacity_mAh * site.temperature_factor), 1.0)
        where = f"after {req_life:g} years ({100 * depth:.3g} % discharged)"
    else:
        depth, where = 0.0, "on a fresh battery"
    v_open = float(batt.open_circuit_voltage_V(pack, depth))
    loaded = v_open - sags[worst]
    values.append(Value("min_supply_under_pulse_V", f"Lowest supply voltage under a pulse {where}",
                        loaded, "V", "battery", note=f"cut-off {cutoff:g} V at {site.coldest_C:g} degC"))
    if v_open > cutoff:
        need = max(float(batt.buffer_capacitance_needed_uF(i, t, v_open - cutoff)) for _, i, t in pulses)
        advice = (f"a buffer capacitor of at least {_capacitance_text(need)} across the battery "
                  "(C >= I*t/dV for the largest pulse"
                  + ("; at this size a supercapacitor, whose leakage adds to the sleep current: give "
                     "buffer_leakage" if need >= 1e5 else "") + "), or cells with less internal resistance")
    else:
        advice = (f"the battery is below the {cutoff:g} V cut-off {where} even without load, so no capacitor "
                  "helps: a larger battery or a lower average current (see the battery-life check)")
    checks.append(_check("brown_out", f"Supply stays above the cut-off under the largest pulse {where}",
                         loaded, cutoff, "V", ">=", advice=advice))
    assumptions = [(f"The count is lost when the supply under the largest pulse ({pulses[worst][0]}, "
                    f"{pulses[worst][1]:.4g} mA) at {site.coldest_C:g} degC falls to the {cutoff:g} V cut-off: usable "
                    f"share {100 * usable:.3g} % of the rated capacity, from the cell's discharge curve and internal "
                    "resistance", pack.cell.source_of("discharge_curve") if pack.cell.discharge_curve
                    else "no discharge curve for this cell: straight line from nominal to end voltage (a stand-in)"),
                   (f"Self-discharge {100 * pack.self_discharge_per_year:.3g} %/year at 20 degC times the year-mean "
                    f"Arrhenius factor {site.self_discharge_factor:.3g} (activation energy {site.activation_eV:g} eV)"
                    + (", the site a sine year between its coldest and hottest temperatures"
                       if b.temperature_min_degC is not None else ""),
                    pack.cell.source_of("self_discharge_activation_eV") if pack.cell.key in batt.available_cells()
                    else "(common practice) doubling per +10 degC (derived, shown in docs/power.md)"),
                   ("Fault: the firmware stops polling until re-homed (each consumer's fault current, the asleep "
                    "current unless given); power lost: no current and the count is gone",
                    "(derived, shown in docs/counter.md)")]
    fault_uA = profile_electronics.state_totals_uA()["fault"]
    usable_mAh = pack.capacity_mAh * site.temperature_factor * usable
    days = power.time_to_flat_days(usable_mAh, fault_uA, site.self_discharge_per_year * pack.capacity_mAh)
    values.append(Value("fault_current_uA", "Current while in fault (until re-homed)", fault_uA, "uA", "power"))
    values.append(Value("fault_days_to_flat", "A fresh battery left in fault is flat after", days, "days", "battery"))
    if fault_uA > profile_electronics.state_totals_uA()["asleep"] * 1.001:
        warnings.append(f"In fault the electronics stay awake at {fault_uA:.4g} uA: a fresh battery is flat after "
                        f"{days:.3g} days unless the actuator is re-homed; let the firmware sleep in fault, or "
                        "re-home promptly.")
    return _EnergyReport(derated, usable, tuple(values), tuple(checks), tuple(warnings), tuple(assumptions),
                         site.shelf_life_years)


@lru_cache(maxsize=64)
def _site_pack(pack, temperature_C: float, temperature_min_C, temperature_max_C):
    """The site derating and the pack derated for it (cached: slider moves rarely change either)."""
    try:
        site = batt.site_derating(pack, temperature_C, temperature_min_C=temperature_min_C,
                                  temperature_max_C=temperature_max_C)
    except DesignValueError as exc:
        raise _relabel(exc, "battery") from None
    if site.self_discharge_per_year >= 1.0:
        raise DesignValueError("battery.temperature", site.hottest_C, "a cooler site",
                               unit="degC", hint=f"self-discharge there is {site.self_discharge_per_year:.3g} "
                                                 "of the capacity a year")
    cell = replace(pack.cell, temperature_curve=((-273.0, site.temperature_factor), (1000.0, site.temperature_factor)),
                   self_discharge_per_year=site.self_discharge_per_year, shelf_life_years=site.shelf_life_years)
    return site, batt.Pack(cell, series=pack.series, parallel=pack.parallel)


def _capacitance_text(uF: float) -> str:
    if uF >= 1e6:
        return f"{uF / 1e6:.3g} F"
    if uF >= 1e3:
        return f"{uF / 1e3:.3g} mF"
    return f"{uF:.3g} uF"


def _service_life(checks: list, life_years: float, shelf_years: float, required: float | None):
    """The battery-life check judged on min(charge life, shelf life at the site)."""
    service = min(life_years, shelf_years)
    value = Value("service_life_years", "Battery service life: charge or shelf life at the site, whichever "
                  "ends first", service, "years", "battery",
                  note="shelf life" if shelf_years < life_years else "charge (to the brown-out point)")
    for k, c in enumerate(checks):
        if c.key == "battery_life":
            advice = c.advice
            if shelf_years < c.target:
                advice = (f"the shelf life at this site is {shelf_years:.3g} years: no capacity or poll period "
                          "makes the required life; choose a chemistry with a longer shelf life, a cooler place, "
                          "or plan a battery change")
            checks[k] = _check("battery_life", c.label, service, c.target, c.unit, c.comparison, advice=advice)
    return value


# ---------------------------------------------------------------------------
# scenario speeds for the counting limits
# ---------------------------------------------------------------------------

def _scenario_peak_to_peak(sc: MotionScenario, train) -> float | None:
    """Peak-to-peak motor angle of a vibration scenario, deg (None for other kinds)."""
    if sc.kind != "vibration":
        return None
    amp = _scenario_motor(sc, train, "amplitude")[0]
    return None if amp is None else 2.0 * abs(amp)


@lru_cache(maxsize=256)
def _scenario_peak(sc: MotionScenario, stages: tuple, base_dir: str | None) -> float:
    train = _train_cached(stages)[0]
    return float(build_motion(sc, _kinematics_of(train), Path(base_dir) if base_dir else None)[2])


def _scenario_peaks(design: ActuatorDesign, stages: tuple, base_dir: str | None) -> tuple:
    """(name, kind, peak motor rpm, peak-to-peak motor deg or None) of every scenario that can be built."""
    train = _train_cached(stages)[0]
    out = []
    for sc in design.motion:
        try:
            out.append((sc.name, sc.kind, _scenario_peak(sc, stages, base_dir), _scenario_peak_to_peak(sc, train)))
        except (DesignValueError, OSError, ValueError):
            continue  # a scenario that cannot be built is reported where it is simulated
    return tuple(out)


def counting_advice(design: ActuatorDesign, *, base_dir: str | Path | None = None) -> dict:
    """The followable counting advice of a design, as design changes.

    Computed by the same functions as the back-drive check and the scenario
    rows of :func:`size`, so each change makes its check pass when applied
    (``change.apply(design)``, then size again).

    Parameters
    ----------
    design : ActuatorDesign
    base_dir : path, optional
        Folder that relative trace paths are relative to.

    Returns
    -------
    dict
        ``{"backdrive_speed": (DesignChange, ...), "scenario:<name>": (DesignChange, ...)}``, only for
        what fails.
    """
    train = build_train(design)
    req = design.requirements
    req_speed = req.backdrive_speed_mm_per_s if train.output_unit == "mm" else req.backdrive_speed_rpm
    limits = counting.counting_limits(design)
    out: dict = {}
    if req_speed is not None:
        rpm = motor_rpm_for_output_speed(req_speed, train, "mm/s" if train.output_unit == "mm" else "rpm",
                                         "requirements.backdrive_speed")
        per_rpm, speed_unit = output_speed_for_motor_rpm(1.0, train)
        report = counting.backdrive_report(design, limits, rpm, req_speed, speed_unit, per_rpm, float(train.ratio))
        if report.changes:
            out["backdrive_speed"] = report.changes
    result = size(design, base_dir=base_dir, curves=False)
    for row, sc in zip(result.scenarios, design.motion):
        if not row.passed:
            changes = counting.scenario_changes(design, limits, sc.kind, row.peak_motor_speed_rpm,
                                                row.overflow_count > 0, _scenario_peak_to_peak(sc, train))
            if changes:
                out[f"scenario:{sc.name}"] = changes
    return out


#: Share of the travel a friction belt (given by pitch diameters) can creep or slip (common practice
#: for flat and V belts: 1-2 %; the larger figure is taken).
BELT_CREEP_FRACTION = 0.02


def _belt_creep(train, stroke: float | None) -> tuple[float, list[str]]:
    """Output position error from friction-belt creep over the stroke, and the warnings.

    A belt given by pitch diameters is taken to be a friction belt: it slips, so the count at the
    motor stops following the output. The creep over the whole stroke joins the accuracy figure.
    """
    slipping = [i for i, s in enumerate(train.stages) if isinstance(s, gears.BeltStage) and s.teeth_driver is None]
    if not slipping:
        return 0.0, []
    where = ", ".join(f"gear_train[{i}]" for i in slipping)
    creep = BELT_CREEP_FRACTION * float(stroke) if stroke is not None else 0.0
    text = (f"{where}: a belt given by pitch diameters is taken as a friction belt, which creeps and slips "
            f"(about {BELT_CREEP_FRACTION * 100:g} % of the travel, common practice): the count at the motor "
            "no longer follows the output. Use a toothed belt (give teeth) for position keeping, or re-home "
            "often; ")
    text += (f"the output accuracy includes {creep:.3g} {train.output_unit} of creep over the stroke."
             if stroke is not None else "give the stroke to include the creep in the output accuracy.")
    return creep, [text]


def _logged_motion(sc: MotionScenario, train, base_dir, start_deg: float) -> tuple[MotionProfile, float, float]:
    """A ``segments`` or ``burst_replay`` scenario: (profile, duration_s, peak motor rpm)."""
    from .motion import load_bursts_csv, load_segments_csv

    path = Path(sc.trace)
    if not path.is_absolute() and base_dir is not None:
        path = Path(base_dir) / path
    load = load_segments_csv if sc.kind == "segments" else load_bursts_csv
    prof = load(path, train=train, at_output=(sc.at == "output"), start_angle_deg=start_deg)
    inner = prof
    while not hasattr(inner, "peak_speed_rpm"):   # AtOutput, or AtOutput plus a resting offset
        inner = inner.profile if hasattr(inner, "profile") else inner.profiles[0]
    peak = abs(inner.peak_speed_rpm)
    if inner is not prof:
        from .motion import output_travel_to_motor_deg

        # The inner profile turns in output units (deg or mm) at "rpm" = output units per 6 s;
        # motor degrees per output unit map both to the motor.
        peak *= abs(float(output_travel_to_motor_deg(1.0, train)))
    _, ends = prof.motion_intervals()
    end = float(ends[-1]) if ends.size else 0.0
    return prof, end + 0.5, peak
