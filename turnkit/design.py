"""The actuator design: immutable sections with one declarative field table each.

An :class:`ActuatorDesign` is what a design file describes: a gear train
(stages from motor to output), the AMR angle sensor, the two Hall latches, the
quarter-turn counter, the polling schedule, the power consumers, the battery,
the motions that can happen while the electronics sleep, and the requirements.

Every section is a frozen dataclass of plain floats, integers, booleans and
strings whose names carry their unit (``pitch_mm``, ``poll_period_ms``,
``asleep_uA``). Each section class lists its fields once, in ``FIELDS``, as
:class:`FieldSpec` entries (file key, units, range, default, description).
That one table drives validation here, reading and writing design files and
the JSON Schema in :mod:`turnkit.designfile`, so the four cannot drift apart.

A field that may be either an angle or a length (a stroke, a back-drive speed)
is stored as one attribute per unit, e.g. ``stroke_mm`` and ``stroke_deg``, at
most one of which is set. The objects hold data only; the numeric models
interpret them.

Change a design with :func:`dataclasses.replace`; the copy is validated again.

Examples
--------
>>> from dataclasses import replace
>>> stage = LeadScrewStage(pitch_mm=2.0, starts=2)
>>> replace(stage, starts=1).starts
1
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Any, ClassVar

from .errors import DesignValueError

__all__ = [
    "FORMAT_VERSION",
    "MAX_POLL_PERIOD_MS",
    "REQUIRED",
    "UNIT_DIMENSIONS",
    "FieldSpec",
    "ExternalStage",
    "InternalStage",
    "PlanetaryStage",
    "WormStage",
    "BeltStage",
    "LeadScrewStage",
    "RackStage",
    "GearStageDesign",
    "STAGE_KINDS",
    "SensorDesign",
    "LatchDesign",
    "CounterDesign",
    "ScheduleDesign",
    "PowerConsumer",
    "HostSupply",
    "PowerDesign",
    "BatteryDesign",
    "MotionScenario",
    "MOTION_FIELDS_BY_KIND",
    "Requirements",
    "MagnetDesign",
    "AccuracyDesign",
    "CountMemoryDesign",
    "ActuatorDesign",
]

#: The design-file format this module reads and writes.
FORMAT_VERSION = 1

#: Longest poll period accepted, ms (one day): longer ones count nothing useful while asleep
#: and would overflow the simulation's poll counts.
MAX_POLL_PERIOD_MS = 86_400_000.0


class _Required:
    """Marker for a field that has no default."""

    _instance = None

    def __new__(cls):
        if cls._instance is None:
            cls._instance = super().__new__(cls)
        return cls._instance

    def __repr__(self) -> str:
        return "REQUIRED"


#: Default of a field that must be given.
REQUIRED: Any = _Required()

#: Canonical units used in design objects: unit → (dimension name, attribute suffix).
UNIT_DIMENSIONS: dict[str, tuple[str, str]] = {
    "mm": ("length", "mm"),
    "deg": ("angle", "deg"),
    "rpm": ("rotational speed", "rpm"),
    "mm/s": ("linear speed", "mm_per_s"),
    "deg/s^2": ("angular acceleration", "deg_per_s2"),
    "mm/s^2": ("linear acceleration", "mm_per_s2"),
    "s": ("time", "s"),
    "ms": ("time", "ms"),
    "us": ("time", "us"),
    "years": ("time", "years"),
    "mV": ("voltage", "mV"),
    "V": ("voltage", "V"),
    "uA": ("current", "uA"),
    "mAh": ("charge", "mAh"),
    "Hz": ("frequency", "Hz"),
    "degC": ("temperature", "degC"),
    "mT": ("magnetic flux density", "mT"),
    "%/K": ("temperature coefficient", "pct_per_K"),
    "ppm/K": ("expansion coefficient", "ppm_per_K"),
    "uV/K": ("voltage drift", "uV_per_K"),
    "uF": ("capacitance", "uF"),
    "mW": ("power", "mW"),
    "mA": ("current", "mA"),
    "N": ("force", "N"),
    "N*m": ("torque", "N_m"),
    "N*m/A": ("torque constant", "N_m_per_A"),
}

_IDENTIFIER = re.compile(r"^[A-Za-z_][A-Za-z0-9_]*$")

#: Field kinds a :class:`FieldSpec` may have.
_KINDS = ("quantity", "fraction", "number", "int", "bool", "choice", "text", "identifier", "path")


@dataclass(frozen=True, slots=True)
class FieldSpec:
    """One field of a design section, as written in a design file.

    Parameters
    ----------
    key : str
        The key in the design file (``"pitch"``).
    kind : str
        ``"quantity"`` (a number with a unit, stored in one of ``units``),
        ``"fraction"`` (a plain number or a percentage such as ``"2 %"``),
        ``"number"`` (a plain float), ``"int"``, ``"bool"``, ``"choice"``
        (one of ``choices``), ``"text"``, ``"identifier"`` (a non-empty
        name of letters, digits and underscores) or ``"path"`` (a file path
        kept as written).
    units : tuple of str
        For quantities, the canonical units accepted, one per dimension
        (``("mm",)`` or ``("deg", "mm")``). The value is stored in the
        attribute ``f"{key}_{suffix}"`` of the matching unit.
    low, high : float, optional
        Allowed range in the canonical unit; ``None`` for no bound.
    low_open, high_open : bool
        True when the bound itself is not allowed.
    default : object
        Default value (in the canonical unit), :data:`REQUIRED` when the key
        must be given, ``None`` when the field is optional.
    description : str
        One line for the documentation and the JSON Schema.
    choices : tuple of str
        Allowed values of a ``"choice"`` field.
    """

    key: str
    kind: str
    description: str
    units: tuple[str, ...] = ()
    low: float | None = None
    high: float | None = None
    low_open: bool = False
    high_open: bool = False
    default: Any = None
    choices: tuple[str, ...] = ()

    def __post_init__(self):
        if self.kind not in _KINDS:
            raise DesignValueError("FieldSpec.kind", self.kind, f"one of {_KINDS}")
        if (self.kind == "quantity") != bool(self.units):
            raise DesignValueError("FieldSpec.units", self.units, "non-empty exactly for quantities")
        for unit in self.units:
            if unit not in UNIT_DIMENSIONS:
                raise DesignValueError("FieldSpec.units", unit, f"one of {sorted(UNIT_DIMENSIONS)}")
        if self.kind == "choice" and not self.choices:
            raise DesignValueError("FieldSpec.choices", self.choices, "non-empty for a choice")

    @property
    def required(self) -> bool:
        """True when the field has no default."""
        return self.default is REQUIRED

    @property
    def attrs(self) -> tuple[str, ...]:
        """The attribute names that store this field, one per unit."""
        if not self.units:
            return (self.key,)
        return tuple(self.attr_for(unit) for unit in self.units)

    def attr_for(self, unit: str) -> str:
        """Attribute name that stores this field in ``unit``."""
        return f"{self.key}_{UNIT_DIMENSIONS[unit][1]}"

    def dimension_text(self) -> str:
        """Words for what is expected, e.g. "a length in mm or an angle in deg"."""
        if self.kind == "quantity":
            parts = []
            for unit in self.units:
                dimension = UNIT_DIMENSIONS[unit][0]
                article = "an" if dimension[0] in "aeiou" else "a"
                parts.append(f"{article} {dimension} in {unit}")
            return " or ".join(parts)
        return {
            "fraction": "a fraction (a plain number such as 0.02, or a percentage such as '2 %')",
            "number": "a number",
            "int": "an integer",
            "bool": "true or false",
            "choice": "one of " + ", ".join(repr(c) for c in self.choices),
            "text": "a string",
            "identifier": "a name of letters, digits and underscores",
            "path": "a file path (relative to the design file)",
        }[self.kind]

    def range_text(self) -> str:
        """The allowed range in words ("in (0, 1]", ">= 0", "any value")."""
        low, high = self.low, self.high
        fmt = _short
        if low is not None and high is not None:
            left = "(" if self.low_open else "["
            right = ")" if self.high_open else "]"
            return f"in {left}{fmt(low)}, {fmt(high)}{right}"
        if low is not None:
            return f"{'>' if self.low_open else '>='} {fmt(low)}"
        if high is not None:
            return f"{'<' if self.high_open else '<='} {fmt(high)}"
        return "any finite value"

    def in_range(self, value: float) -> bool:
        """True when ``value`` (canonical unit) lies in the allowed range."""
        if self.low is not None and (value < self.low or (self.low_open and value == self.low)):
            return False
        if self.high is not None and (value > self.high or (self.high_open and value == self.high)):
            return False
        return True

    def check(self, value: Any, where: str, unit: str = "") -> None:
        """Raise :class:`DesignValueError` unless ``value`` is valid for this field.

        Parameters
        ----------
        value : object
            The stored value (canonical unit for quantities); ``None`` is
            accepted for optional fields.
        where : str
            Field path used in the message.
        unit : str
            The unit ``value`` is in, for quantities.
        """
        if value is None:
            if self.required:
                raise DesignValueError(where, value, f"given ({self.dimension_text()})")
            return
        kind = self.kind
        if kind in ("quantity", "fraction", "number"):
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise DesignValueError(where, value, "a number", unit=unit)
            if not math.isfinite(value):
                raise DesignValueError(where, value, "a finite number", unit=unit)
            if not self.in_range(float(value)):
                raise DesignValueError(where, value, self.range_text(), unit=unit)
        elif kind == "int":
            if isinstance(value, bool) or not isinstance(value, int):
                raise DesignValueError(where, value, f"an integer {self.range_text()}")
            if not self.in_range(value):
                raise DesignValueError(where, value, f"an integer {self.range_text()}")
        elif kind == "bool":
            if not isinstance(value, bool):
                raise DesignValueError(where, value, "true or false")
        elif kind == "choice":
            if value not in self.choices:
                raise DesignValueError(where, value, self.dimension_text())
        elif kind == "identifier":
            if not isinstance(value, str) or not _IDENTIFIER.match(value):
                raise DesignValueError(where, value, "a non-empty name of letters, digits and underscores")
        elif kind == "path":
            if not isinstance(value, str) or not value.strip():
                raise DesignValueError(where, value, "a non-empty file path")
        elif kind == "text":
            if not isinstance(value, str):
                raise DesignValueError(where, value, "a string")


def _short(value: float) -> str:
    value = float(value)
    if value.is_integer() and abs(value) < 1e15:
        return str(int(value))
    return repr(value)


class _Section:
    """Shared validation of the frozen design sections (a mixin; no state)."""

    __slots__ = ()
    FIELDS: ClassVar[tuple[FieldSpec, ...]] = ()

    def __post_init__(self):
        name = type(self).__name__
        for spec, several_units, stored in _stored_fields(type(self)):
            if several_units:
                set_attrs = [a for a in spec.attrs if getattr(self, a) is not None]
                if len(set_attrs) > 1:
                    raise DesignValueError(
                        f"{name}.{spec.key}", tuple(getattr(self, a) for a in set_attrs),
                        f"given in one unit only ({' or '.join(spec.units)})",
                        hint=f"set only one of {', '.join(set_attrs)}",
                    )
                if spec.required and not set_attrs:
                    raise DesignValueError(f"{name}.{spec.key}", None, f"given ({spec.dimension_text()})")
            for unit, attr, where in stored:
                value = getattr(self, attr)
                if value is None and several_units:
                    continue
                spec.check(value, where, unit)
        self._check_together()

    def _check_together(self) -> None:
        """Checks that involve more than one field (overridden per section)."""

    @classmethod
    def field_spec(cls, key: str) -> FieldSpec:
        """Return the :class:`FieldSpec` whose file key is ``key``."""
        for spec in cls.FIELDS:
            if spec.key == key:
                return spec
        raise KeyError(key)

    @classmethod
    def attr_to_key(cls, attr: str) -> str:
        """The file key that stores attribute ``attr``."""
        for spec in cls.FIELDS:
            if attr in spec.attrs:
                return spec.key
        return attr


_STORED_FIELDS: dict[type, tuple] = {}


def _stored_fields(cls) -> tuple:
    """``(spec, several units, ((unit, attribute, field path), ...))`` for each of ``cls.FIELDS``.

    Worked out once per section class (a design is validated again at every change, and a
    tolerance run changes it for every sample); again if ``FIELDS`` is replaced.
    """
    fields_, plan = _STORED_FIELDS.get(cls, (None, ()))
    if fields_ is not cls.FIELDS:
        name = cls.__name__
        plan = tuple((spec, spec.kind == "quantity" and len(spec.units) > 1,
                      tuple((unit, attr, f"{name}.{attr}") for unit, attr in zip(spec.units or ("",), spec.attrs)))
                     for spec in cls.FIELDS)
        _STORED_FIELDS[cls] = (cls.FIELDS, plan)
    return plan


def _fail(section: _Section, attr: str, value: Any, allowed: str, unit: str = "", hint: str = ""):
    raise DesignValueError(f"{type(section).__name__}.{attr}", value, allowed, unit=unit, hint=hint)


def _both_or_neither(section: _Section, first: tuple[str, str], second: tuple[str, str]) -> None:
    """Refuse a pair of (attribute, file key) fields of which only one is given."""
    given = [getattr(section, attr) is not None for attr, _ in (first, second)]
    if given[0] != given[1]:
        attr, _ = second if given[0] else first
        other = (first if given[0] else second)[1]
        _fail(section, attr, None, f"given together with {other}", hint=f"give both {first[1]} and {second[1]}, "
                                                                         "or neither")


# --- gear train -------------------------------------------------------------------

_BACKLASH_DEG = FieldSpec(
    "backlash", "quantity", "lost motion of this stage, measured at its output shaft",
    units=("deg",), low=0.0, default=0.0,
)
_BACKLASH_MM = FieldSpec(
    "backlash", "quantity", "lost motion of this stage, measured along its linear output",
    units=("mm",), low=0.0, default=0.0,
)


def _efficiency(default: float | None, note: str) -> FieldSpec:
    return FieldSpec(
        "efficiency", "fraction", f"power out / power in of this stage driven forward; {note}",
        low=0.0, high=1.0, low_open=True, default=default,
    )


def _teeth(key: str, description: str) -> FieldSpec:
    return FieldSpec(key, "int", description, low=3, default=REQUIRED)


@dataclass(frozen=True, slots=True)
class ExternalStage(_Section):
    """A pair of external spur or helical gears (the output turns the other way)."""

    KIND: ClassVar[str] = "external"
    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        _teeth("teeth_driver", "teeth on the driving gear (motor side)"),
        _teeth("teeth_driven", "teeth on the driven gear (output side)"),
        _BACKLASH_DEG,
        _efficiency(0.98, "0.98 for a spur mesh (common practice)"),
    )
    teeth_driver: int
    teeth_driven: int
    backlash_deg: float = 0.0
    efficiency: float | None = 0.98


@dataclass(frozen=True, slots=True)
class InternalStage(_Section):
    """A pinion driving an internal (ring) gear (the output turns the same way)."""

    KIND: ClassVar[str] = "internal"
    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        _teeth("teeth_driver", "teeth on the driving pinion"),
        _teeth("teeth_driven", "teeth on the driven ring gear"),
        _BACKLASH_DEG,
        _efficiency(0.98, "0.98 for a spur mesh (common practice)"),
    )
    teeth_driver: int
    teeth_driven: int
    backlash_deg: float = 0.0
    efficiency: float | None = 0.98

    def _check_together(self) -> None:
        if self.teeth_driven <= self.teeth_driver:
            _fail(self, "teeth_driven", self.teeth_driven, f"more than teeth_driver ({self.teeth_driver})",
                  hint="a ring gear has more teeth than the pinion inside it")


_MEMBERS = ("sun", "ring", "carrier")


@dataclass(frozen=True, slots=True)
class PlanetaryStage(_Section):
    """A simple planetary set: one member held, one driven, one taken as output."""

    KIND: ClassVar[str] = "planetary"
    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        _teeth("sun_teeth", "teeth on the sun gear"),
        _teeth("ring_teeth", "teeth on the ring gear"),
        FieldSpec("planet_teeth", "int", "teeth on each planet (optional; for geometry checks)", low=3),
        FieldSpec("held", "choice", "the member held still", choices=_MEMBERS, default="ring"),
        FieldSpec("input", "choice", "the member driven from the motor side", choices=_MEMBERS, default="sun"),
        FieldSpec("output", "choice", "the member that drives the next stage", choices=_MEMBERS, default="carrier"),
        _BACKLASH_DEG,
        _efficiency(0.97, "0.97 for one planetary stage (common practice)"),
    )
    sun_teeth: int
    ring_teeth: int
    planet_teeth: int | None = None
    held: str = "ring"
    input: str = "sun"
    output: str = "carrier"
    backlash_deg: float = 0.0
    efficiency: float | None = 0.97

    def _check_together(self) -> None:
        if self.ring_teeth <= self.sun_teeth:
            _fail(self, "ring_teeth", self.ring_teeth, f"more than sun_teeth ({self.sun_teeth})")
        if len({self.held, self.input, self.output}) != 3:
            _fail(self, "held", (self.held, self.input, self.output),
                  "a different member from input and output",
                  hint="held, input and output must name sun, ring and carrier once each")


@dataclass(frozen=True, slots=True)
class WormStage(_Section):
    """A worm (motor side) driving a worm wheel."""

    KIND: ClassVar[str] = "worm"
    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("starts", "int", "number of thread starts on the worm", low=1, default=1),
        _teeth("wheel_teeth", "teeth on the worm wheel"),
        FieldSpec("lead_angle", "quantity", "lead angle of the worm thread (optional; for the self-locking check)",
                  units=("deg",), low=0.0, high=90.0, low_open=True, high_open=True),
        FieldSpec("friction_coefficient", "number", "sliding friction coefficient between worm and wheel",
                  low=0.0, default=0.05),
        _BACKLASH_DEG,
        _efficiency(None, "omitted: computed from lead angle and friction"),
    )
    wheel_teeth: int
    starts: int = 1
    lead_angle_deg: float | None = None
    friction_coefficient: float = 0.05
    backlash_deg: float = 0.0
    efficiency: float | None = None


@dataclass(frozen=True, slots=True)
class BeltStage(_Section):
    """A toothed belt or chain, given by tooth counts or by pitch diameters."""

    KIND: ClassVar[str] = "belt"
    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("teeth_driver", "int", "teeth on the driving pulley or sprocket", low=3),
        FieldSpec("teeth_driven", "int", "teeth on the driven pulley or sprocket", low=3),
        FieldSpec("pitch_diameter_driver", "quantity", "pitch diameter of the driving pulley",
                  units=("mm",), low=0.0, low_open=True),
        FieldSpec("pitch_diameter_driven", "quantity", "pitch diameter of the driven pulley",
                  units=("mm",), low=0.0, low_open=True),
        _BACKLASH_DEG,
        _efficiency(0.96, "0.96 for a toothed belt (common practice)"),
    )
    teeth_driver: int | None = None
    teeth_driven: int | None = None
    pitch_diameter_driver_mm: float | None = None
    pitch_diameter_driven_mm: float | None = None
    backlash_deg: float = 0.0
    efficiency: float | None = 0.96

    def _check_together(self) -> None:
        teeth = (self.teeth_driver, self.teeth_driven)
        diameters = (self.pitch_diameter_driver_mm, self.pitch_diameter_driven_mm)
        teeth_complete = all(v is not None for v in teeth)
        diameters_complete = all(v is not None for v in diameters)
        teeth_any = any(v is not None for v in teeth)
        diameters_any = any(v is not None for v in diameters)
        if not ((teeth_complete and not diameters_any) or (diameters_complete and not teeth_any)):
            _fail(self, "teeth_driver", teeth + diameters,
                  "given as one pair: teeth_driver and teeth_driven, or "
                  "pitch_diameter_driver and pitch_diameter_driven")


@dataclass(frozen=True, slots=True)
class LeadScrewStage(_Section):
    """A lead screw or ball screw turning rotation into travel (lead = pitch × starts)."""

    KIND: ClassVar[str] = "lead_screw"
    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("pitch", "quantity", "distance between adjacent threads", units=("mm",),
                  low=0.0, low_open=True, default=REQUIRED),
        FieldSpec("starts", "int", "number of thread starts", low=1, default=1),
        FieldSpec("length", "quantity", "threaded length (optional; limits the travel)",
                  units=("mm",), low=0.0, low_open=True),
        FieldSpec("diameter", "quantity", "mean (pitch) diameter of the thread (optional; for efficiency "
                  "and self-locking)", units=("mm",), low=0.0, low_open=True),
        FieldSpec("thread_angle", "quantity", "included thread angle (30 deg for a metric trapezoidal thread)",
                  units=("deg",), low=0.0, high=90.0, high_open=True, default=30.0),
        FieldSpec("friction_coefficient", "number", "thread friction coefficient (omitted: the model's typical "
                  "value, about 0.1 sliding or 0.005 for a ball screw)", low=0.0),
        FieldSpec("ball", "bool", "true for a ball screw (rolling contact)", default=False),
        _BACKLASH_MM,
        _efficiency(None, "omitted: computed from lead, diameter and friction"),
    )
    pitch_mm: float
    starts: int = 1
    length_mm: float | None = None
    diameter_mm: float | None = None
    thread_angle_deg: float = 30.0
    friction_coefficient: float | None = None
    ball: bool = False
    backlash_mm: float = 0.0
    efficiency: float | None = None


@dataclass(frozen=True, slots=True)
class RackStage(_Section):
    """A pinion driving a rack (linear output)."""

    KIND: ClassVar[str] = "rack"
    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("module", "quantity", "gear module (pitch diameter / teeth)", units=("mm",),
                  low=0.0, low_open=True, default=REQUIRED),
        _teeth("pinion_teeth", "teeth on the pinion"),
        FieldSpec("length", "quantity", "rack length (optional; limits the travel)", units=("mm",),
                  low=0.0, low_open=True),
        _BACKLASH_MM,
        _efficiency(0.95, "0.95 for a spur rack and pinion (common practice)"),
    )
    module_mm: float
    pinion_teeth: int
    length_mm: float | None = None
    backlash_mm: float = 0.0
    efficiency: float | None = 0.95


GearStageDesign = ExternalStage | InternalStage | PlanetaryStage | WormStage | BeltStage | LeadScrewStage | RackStage

#: Stage classes by the ``kind`` written in the design file.
STAGE_KINDS: dict[str, type] = {
    cls.KIND: cls
    for cls in (ExternalStage, InternalStage, PlanetaryStage, WormStage, BeltStage, LeadScrewStage, RackStage)
}

_LINEAR_STAGE_KINDS = frozenset({"lead_screw", "rack"})


# --- sensor, latches, counter, schedule --------------------------------------------

@dataclass(frozen=True, slots=True)
class SensorDesign(_Section):
    """The AMR angle sensor: two Wheatstone bridges (sin 2θ, cos 2θ) and the ADC.

    ``sweep`` optionally names a measured calibration sweep (a CSV path kept as
    written, relative to the design file); sizing fits it and compares the fit
    with the parameters given here.
    """

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("amplitude", "quantity", "peak amplitude of each bridge output at the ADC input",
                  units=("mV",), low=0.0, low_open=True, default=100.0),
        FieldSpec("offset_x", "quantity", "offset of the cos bridge output", units=("mV",), default=0.0),
        FieldSpec("offset_y", "quantity", "offset of the sin bridge output", units=("mV",), default=0.0),
        FieldSpec("gain_mismatch", "fraction", "relative amplitude difference between the two bridges",
                  low=-0.5, high=0.5, default=0.0),
        FieldSpec("phase_error", "quantity", "departure of the two bridge signals from quadrature, in electrical degrees (twice the mechanical)",
                  units=("deg",), low=-45.0, high=45.0, default=0.0),
        FieldSpec("harmonic2", "fraction", "second-harmonic content relative to the amplitude",
                  low=-0.5, high=0.5, low_open=True, high_open=True, default=0.0),
        FieldSpec("harmonic3", "fraction", "third-harmonic content relative to the amplitude",
                  low=-0.5, high=0.5, low_open=True, high_open=True, default=0.0),
        FieldSpec("noise_rms", "quantity", "RMS noise on each bridge output", units=("mV",),
                  low=0.0, default=0.0),
        FieldSpec("adc_bits", "int", "ADC resolution", low=1, high=32, default=12),
        FieldSpec("adc_full_scale", "quantity", "ADC input span, peak to peak, centred on the bridge midpoint",
                  units=("mV",), low=0.0, low_open=True, default=250.0),
        FieldSpec("calibrated", "bool", "true when offsets, gain and phase are calibrated out",
                  default=False),
        FieldSpec("sweep", "path", "CSV file of a measured calibration sweep (columns x and y in mV, "
                  "optionally angle in deg), relative to the design file"),
        FieldSpec("offset_drift", "quantity", "drift of each bridge's offset with temperature, either way, "
                  "left over after a calibration at one temperature", units=("uV/K",), low=0.0, default=0.0),
        FieldSpec("gain_mismatch_drift", "quantity", "drift of the gain mismatch between the bridges with "
                  "temperature, either way", units=("%/K",), low=0.0, default=0.0),
        FieldSpec("amplitude_drift", "quantity", "temperature coefficient of the bridge amplitude (both bridges)",
                  units=("%/K",), low=-2.0, high=2.0, default=0.0),
        FieldSpec("minimum_field", "quantity", "smallest magnet field for the sensor's rated accuracy "
                  "(saturation field); 25 mT when omitted (common practice)", units=("mT",),
                  low=0.0, low_open=True, default=25.0),
        FieldSpec("anisotropy_field", "quantity", "anisotropy field of the AMR film, for the finite-field angle "
                  "error B_k/(2B) (omitted: not counted)", units=("mT",), low=0.0, default=0.0),
    )
    amplitude_mV: float = 100.0
    offset_x_mV: float = 0.0
    offset_y_mV: float = 0.0
    gain_mismatch: float = 0.0
    phase_error_deg: float = 0.0
    harmonic2: float = 0.0
    harmonic3: float = 0.0
    noise_rms_mV: float = 0.0
    adc_bits: int = 12
    adc_full_scale_mV: float = 250.0
    calibrated: bool = False
    sweep: str | None = None
    offset_drift_uV_per_K: float = 0.0
    gain_mismatch_drift_pct_per_K: float = 0.0
    amplitude_drift_pct_per_K: float = 0.0
    minimum_field_mT: float = 25.0
    anisotropy_field_mT: float = 0.0


@dataclass(frozen=True, slots=True)
class LatchDesign(_Section):
    """The two Hall latches 90° apart that give the quadrant (angles at the motor shaft)."""

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("switch_point_tolerance", "quantity", "spread of each latch's switching angle",
                  units=("deg",), low=0.0, high=45.0, high_open=True, default=5.0),
        FieldSpec("hysteresis", "quantity", "difference between a latch's switch-on and switch-off angles",
                  units=("deg",), low=0.0, high=90.0, high_open=True, default=2.0),
        FieldSpec("magnet_misalignment", "quantity", "angle between the magnet's poles and the latch positions",
                  units=("deg",), low=-45.0, high=45.0, default=0.0),
        FieldSpec("operate_field", "quantity", "typical field at which a latch switches on (operate point; "
                  "needs [magnet] to be checked)", units=("mT",), low=0.0, low_open=True),
        FieldSpec("release_field", "quantity", "typical field at which a latch switches off (release point, "
                  "negative for a latch)", units=("mT",), high=0.0, high_open=True),
        FieldSpec("threshold_spread", "quantity", "part-to-part spread of the operate and release points, "
                  "either way", units=("mT",), low=0.0, default=0.0),
        FieldSpec("threshold_drift", "quantity", "temperature coefficient of the size of the operate and "
                  "release points, referred to 20 degC", units=("%/K",), low=-2.0, high=2.0, default=0.0),
        FieldSpec("powered", "choice", "when the latches have power: only around each poll (during_polls; "
                  "inside its hysteresis a latch may then wake in either state) or all the time (always)",
                  choices=("during_polls", "always"), default="during_polls"),
        FieldSpec("edge_shift_0", "quantity", "one unit's actual shift of the latch edge at 0 deg, for "
                  "simulating that unit (all four edge shifts or none; omitted: the worst case inside the "
                  "tolerances)", units=("deg",), low=-45.0, high=45.0, low_open=True, high_open=True),
        FieldSpec("edge_shift_90", "quantity", "one unit's actual shift of the latch edge at 90 deg",
                  units=("deg",), low=-45.0, high=45.0, low_open=True, high_open=True),
        FieldSpec("edge_shift_180", "quantity", "one unit's actual shift of the latch edge at 180 deg",
                  units=("deg",), low=-45.0, high=45.0, low_open=True, high_open=True),
        FieldSpec("edge_shift_270", "quantity", "one unit's actual shift of the latch edge at 270 deg",
                  units=("deg",), low=-45.0, high=45.0, low_open=True, high_open=True),
    )
    switch_point_tolerance_deg: float = 5.0
    hysteresis_deg: float = 2.0
    magnet_misalignment_deg: float = 0.0
    operate_field_mT: float | None = None
    release_field_mT: float | None = None
    threshold_spread_mT: float = 0.0
    threshold_drift_pct_per_K: float = 0.0
    powered: str = "during_polls"
    edge_shift_0_deg: float | None = None
    edge_shift_90_deg: float | None = None
    edge_shift_180_deg: float | None = None
    edge_shift_270_deg: float | None = None

    @property
    def edge_shifts_deg(self) -> tuple[float, float, float, float] | None:
        """The unit's four edge shifts (deg), or None when not given."""
        shifts = (self.edge_shift_0_deg, self.edge_shift_90_deg, self.edge_shift_180_deg, self.edge_shift_270_deg)
        return None if shifts[0] is None else shifts

    def _check_together(self) -> None:
        _both_or_neither(self, ("operate_field_mT", "operate_field"), ("release_field_mT", "release_field"))
        names = ("edge_shift_0_deg", "edge_shift_90_deg", "edge_shift_180_deg", "edge_shift_270_deg")
        given = [n for n in names if getattr(self, n) is not None]
        if given and len(given) != 4:
            missing = [n for n in names if getattr(self, n) is None]
            _fail(self, missing[0], None, "given with the other edge shifts (all four or none)", unit="deg")


@dataclass(frozen=True, slots=True)
class CounterDesign(_Section):
    """The quarter-turn counter fed by the latches."""

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("bits", "int", "counter width", low=4, high=63, default=16),
        FieldSpec("signed", "bool", "true for a counter that goes below zero", default=True),
        FieldSpec("overflow", "choice", "what the counter does past its range",
                  choices=("wrap", "saturate", "fault"), default="fault"),
        FieldSpec("on_ambiguous", "choice", "what to do on a two-quadrant step between polls: hold (flag it, "
                  "stop counting until re-homed), guess (add two quarters in the last direction) or continue "
                  "(flag it, keep the count, keep polling)",
                  choices=("hold", "guess", "continue"), default="hold"),
    )
    bits: int = 16
    signed: bool = True
    overflow: str = "fault"
    on_ambiguous: str = "hold"


@dataclass(frozen=True, slots=True)
class ScheduleDesign(_Section):
    """When the electronics wake to poll the latches."""

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("kind", "choice", "fixed: poll every poll_period; adaptive: poll at fast_poll_period "
                  "for hold_time after motion is seen", choices=("fixed", "adaptive"), default="fixed"),
        FieldSpec("poll_period", "quantity", "time between polls while asleep", units=("ms",),
                  low=0.0, low_open=True, high=MAX_POLL_PERIOD_MS, default=10.0),
        FieldSpec("fast_poll_period", "quantity", "time between polls after motion (adaptive)", units=("ms",),
                  low=0.0, low_open=True, high=MAX_POLL_PERIOD_MS, default=1.0),
        FieldSpec("hold_time", "quantity", "how long fast polling lasts after the last motion (adaptive)",
                  units=("s",), low=0.0, default=2.0),
        FieldSpec("wake_time", "quantity", "time from wake-up to the supply being ready", units=("us",),
                  low=0.0, default=50.0),
        FieldSpec("settle_time", "quantity", "time for the latches to settle once powered", units=("us",),
                  low=0.0, default=100.0),
        FieldSpec("poll_time", "quantity", "time to read the latches and update the count", units=("us",),
                  low=0.0, default=20.0),
        FieldSpec("jitter", "fraction", "random spread of each poll period, as a fraction of it",
                  low=0.0, high=0.5, default=0.0),
    )
    kind: str = "fixed"
    poll_period_ms: float = 10.0
    fast_poll_period_ms: float = 1.0
    hold_time_s: float = 2.0
    wake_time_us: float = 50.0
    settle_time_us: float = 100.0
    poll_time_us: float = 20.0
    jitter: float = 0.0

    def _check_together(self) -> None:
        # The fast period matters only to an adaptive schedule; a fixed one ignores it.
        if self.kind == "adaptive" and self.fast_poll_period_ms > self.poll_period_ms:
            _fail(self, "fast_poll_period_ms", self.fast_poll_period_ms,
                  f"<= poll_period ({_short(self.poll_period_ms)} ms)", unit="ms")
        awake_ms = (self.wake_time_us + self.settle_time_us + self.poll_time_us) / 1000.0
        shortest = self.fast_poll_period_ms if self.kind == "adaptive" else self.poll_period_ms
        if awake_ms >= shortest:
            _fail(self, "poll_period_ms" if self.kind == "fixed" else "fast_poll_period_ms", shortest,
                  f"longer than wake_time + settle_time + poll_time ({_short(awake_ms)} ms)", unit="ms")


# --- power and battery ------------------------------------------------------------

def _current(key: str, description: str) -> FieldSpec:
    return FieldSpec(key, "quantity", description, units=("uA",), low=0.0, default=REQUIRED)


@dataclass(frozen=True, slots=True)
class PowerConsumer(_Section):
    """One part of the electronics and its current in each counter state."""

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("name", "text", "what this consumer is (e.g. 'microcontroller')", default=REQUIRED),
        _current("asleep", "current while asleep"),
        _current("waking", "current while waking and settling"),
        _current("polling", "current while reading the latches"),
        _current("tracking", "current while actively tracking motion"),
        FieldSpec("fault", "quantity", "current while in fault, waiting to be re-homed (omitted: the asleep "
                  "current, since the firmware stops polling and sleeps in fault)", units=("uA",), low=0.0),
    )
    name: str
    asleep_uA: float
    waking_uA: float
    polling_uA: float
    tracking_uA: float
    fault_uA: float | None = None

    def _check_together(self) -> None:
        if not self.name.strip():
            _fail(self, "name", self.name, "a non-empty name")


@dataclass(frozen=True, slots=True)
class HostSupply(_Section):
    """Power drawn from a host's supply instead of (or as well as) a battery."""

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("quiescent_budget", "quantity", "largest average current the host allows",
                  units=("uA",), low=0.0, low_open=True, default=REQUIRED),
    )
    quiescent_budget_uA: float


@dataclass(frozen=True, slots=True)
class PowerDesign(_Section):
    """The electronics' consumers and the supply limits."""

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("cutoff_voltage", "quantity", "supply voltage below which the electronics stop "
                  "(omitted: the battery chemistry's end voltage)", units=("V",), low=0.0, low_open=True),
        FieldSpec("moves_per_day", "number", "driven moves of the motor per day (omitted: none)", low=0.0),
        FieldSpec("move_stroke", "quantity", "output travel of one driven move (omitted: the required stroke)",
                  units=("mm", "deg"), low=0.0, low_open=True),
        FieldSpec("move_load", "quantity", "load the motor drives at the output: a force for a linear output, "
                  "a torque for a rotary one (omitted: no load)", units=("N", "N*m"), low=0.0),
        FieldSpec("motor_speed", "quantity", "motor speed while driving", units=("rpm",), low=0.0,
                  low_open=True),
        FieldSpec("motor_current", "quantity", "motor current while driving the load (or give the torque "
                  "constant)", units=("mA",), low=0.0),
        FieldSpec("motor_torque_constant", "quantity", "motor torque constant k_t, for the current "
                  "I = I_0 + T / k_t (instead of motor_current)", units=("N*m/A",), low=0.0, low_open=True),
        FieldSpec("motor_no_load_current", "quantity", "motor current with no load, I_0 (with the torque "
                  "constant)", units=("mA",), low=0.0),
        FieldSpec("motor_start_current", "quantity", "peak motor current at start (for the voltage sag)",
                  units=("mA",), low=0.0, low_open=True),
        FieldSpec("motor_start_time", "quantity", "how long the start current lasts", units=("ms",), low=0.0,
                  low_open=True),
        FieldSpec("buffer_capacitance", "quantity", "capacitor across the battery that carries the pulses "
                  "(omitted: none)", units=("uF",), low=0.0),
        FieldSpec("buffer_leakage", "quantity", "leakage current of that capacitor, drawn all the time",
                  units=("uA",), low=0.0),
    )
    consumers: tuple[PowerConsumer, ...] = ()
    cutoff_voltage_V: float | None = None
    host_supply: HostSupply | None = None
    moves_per_day: float | None = None
    move_stroke_mm: float | None = None
    move_stroke_deg: float | None = None
    move_load_N: float | None = None
    move_load_N_m: float | None = None
    motor_speed_rpm: float | None = None
    motor_current_mA: float | None = None
    motor_torque_constant_N_m_per_A: float | None = None
    motor_no_load_current_mA: float | None = None
    motor_start_current_mA: float | None = None
    motor_start_time_ms: float | None = None
    buffer_capacitance_uF: float | None = None
    buffer_leakage_uA: float | None = None

    def _check_together(self) -> None:
        if not isinstance(self.consumers, tuple) or not all(
                isinstance(c, PowerConsumer) for c in self.consumers):
            _fail(self, "consumers", self.consumers, "a tuple of PowerConsumer")
        names = [c.name for c in self.consumers]
        for name in names:
            if names.count(name) > 1:
                _fail(self, "consumers", name, "unique consumer names")
        if self.host_supply is not None and not isinstance(self.host_supply, HostSupply):
            _fail(self, "host_supply", self.host_supply, "a HostSupply or None")
        if self.moves_per_day:
            if self.motor_speed_rpm is None:
                _fail(self, "motor_speed_rpm", None, "given when moves_per_day is set", unit="rpm",
                      hint="the motor speed sets how long each move takes")
            if (self.motor_current_mA is None) == (self.motor_torque_constant_N_m_per_A is None):
                _fail(self, "motor_current_mA", self.motor_current_mA,
                      "given, or else motor_torque_constant (exactly one of the two)", unit="mA")
        if self.motor_no_load_current_mA is not None and self.motor_torque_constant_N_m_per_A is None:
            _fail(self, "motor_no_load_current_mA", self.motor_no_load_current_mA,
                  "given only with motor_torque_constant", unit="mA")
        if (self.motor_start_current_mA is None) != (self.motor_start_time_ms is None):
            _fail(self, "motor_start_time_ms" if self.motor_start_time_ms is None else "motor_start_current_mA",
                  None, "given together with the other (start current and its duration)")


@dataclass(frozen=True, slots=True)
class BatteryDesign(_Section):
    """The battery: a chemistry from turnkit's table, or custom cell data.

    With ``chemistry`` given, ``capacity_mAh``, ``nominal_voltage_V`` and
    ``self_discharge_per_year`` override the table's values when set. Without
    it, ``capacity_mAh`` and ``nominal_voltage_V`` are required.
    """

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("chemistry", "identifier", "key of a cell in turnkit's battery table, e.g. "
                  "'li_fes2_aa' (omitted: a custom cell)"),
        FieldSpec("cells_series", "int", "cells in series", low=1, default=1),
        FieldSpec("cells_parallel", "int", "strings in parallel", low=1, default=1),
        FieldSpec("temperature", "quantity", "cell temperature used for derating", units=("degC",),
                  low=-60.0, high=125.0, default=20.0),
        FieldSpec("capacity", "quantity", "capacity of one cell", units=("mAh",), low=0.0, low_open=True),
        FieldSpec("nominal_voltage", "quantity", "nominal voltage of one cell", units=("V",),
                  low=0.0, low_open=True),
        FieldSpec("self_discharge_per_year", "fraction", "fraction of capacity lost per year on the shelf",
                  low=0.0, high=1.0, high_open=True),
        FieldSpec("temperature_min", "quantity", "coldest site temperature over a year (with temperature_max; "
                  "replaces temperature)", units=("degC",), low=-60.0, high=125.0),
        FieldSpec("temperature_max", "quantity", "hottest site temperature over a year (with temperature_min)",
                  units=("degC",), low=-60.0, high=125.0),
    )
    chemistry: str | None = None
    cells_series: int = 1
    cells_parallel: int = 1
    temperature_degC: float = 20.0
    capacity_mAh: float | None = None
    nominal_voltage_V: float | None = None
    self_discharge_per_year: float | None = None
    temperature_min_degC: float | None = None
    temperature_max_degC: float | None = None

    def _check_together(self) -> None:
        if (self.temperature_min_degC is None) != (self.temperature_max_degC is None):
            _fail(self, "temperature_max_degC" if self.temperature_max_degC is None else "temperature_min_degC",
                  None, "given together with the other end of the site's range", unit="degC")
        if self.temperature_min_degC is not None and self.temperature_max_degC < self.temperature_min_degC:
            _fail(self, "temperature_max_degC", self.temperature_max_degC,
                  f">= temperature_min ({_short(self.temperature_min_degC)} degC)", unit="degC")
        if self.chemistry is None:
            missing = [k for k, v in (("capacity", self.capacity_mAh), ("nominal_voltage", self.nominal_voltage_V))
                       if v is None]
            if missing:
                _fail(self, missing[0] + ("_mAh" if missing[0] == "capacity" else "_V"), None,
                      "given for a custom cell (no chemistry)",
                      hint="give chemistry, or capacity and nominal_voltage")


# --- motion -----------------------------------------------------------------------

_SPEED_UNITS = ("rpm", "mm/s")
_POSITION_UNITS = ("deg", "mm")
_ACCELERATION_UNITS = ("deg/s^2", "mm/s^2")

#: Which keys each motion kind requires and allows (besides name, kind, at).
MOTION_FIELDS_BY_KIND: dict[str, tuple[frozenset[str], frozenset[str]]] = {
    "constant": (frozenset({"speed", "duration"}), frozenset({"start"})),
    "trapezoid": (frozenset({"distance", "speed", "acceleration"}), frozenset({"start", "duration"})),
    "coast_down": (frozenset({"speed", "duration"}), frozenset({"start"})),
    "bursts": (frozenset({"speed", "distance", "bursts_per_day", "duration"}), frozenset({"start", "seed"})),
    "vibration": (frozenset({"amplitude", "frequency", "duration"}), frozenset({"start"})),
    "trace": (frozenset({"trace"}), frozenset({"start"})),
    "segments": (frozenset({"trace"}), frozenset({"start"})),
    "burst_replay": (frozenset({"trace"}), frozenset({"start"})),
}


@dataclass(frozen=True, slots=True)
class MotionScenario(_Section):
    """A motion that can happen while the electronics sleep.

    Speeds, distances and positions are rotational (deg, rpm) or linear (mm,
    mm/s), at the motor or at the output as ``at`` says; the dimension written
    in the file is kept. A trace is a CSV file path, relative to the design
    file, kept as written.
    """

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("name", "text", "short name of the scenario", default=REQUIRED),
        FieldSpec("kind", "choice", "shape of the motion", choices=tuple(MOTION_FIELDS_BY_KIND),
                  default=REQUIRED),
        FieldSpec("at", "choice", "where speeds and distances are measured", choices=("motor", "output"),
                  default="output"),
        FieldSpec("speed", "quantity", "speed (constant), top speed (trapezoid, bursts) or starting "
                  "speed (coast_down)", units=_SPEED_UNITS),
        FieldSpec("distance", "quantity", "distance of one move (trapezoid) or of each burst",
                  units=_POSITION_UNITS, low=0.0, low_open=True),
        FieldSpec("acceleration", "quantity", "acceleration and deceleration of a trapezoid move",
                  units=_ACCELERATION_UNITS, low=0.0, low_open=True),
        FieldSpec("duration", "quantity", "time simulated (coast_down: time to stop)", units=("s",),
                  low=0.0, low_open=True),
        FieldSpec("start", "quantity", "position where the motion starts (e.g. at a latch switching point)",
                  units=_POSITION_UNITS),
        FieldSpec("bursts_per_day", "number", "mean number of back-drive bursts per day", low=0.0,
                  low_open=True),
        FieldSpec("seed", "int", "random seed, so that bursts repeat run to run", low=0),
        FieldSpec("amplitude", "quantity", "peak amplitude of the vibration", units=_POSITION_UNITS,
                  low=0.0, low_open=True),
        FieldSpec("frequency", "quantity", "frequency of the vibration", units=("Hz",), low=0.0, low_open=True),
        FieldSpec("trace", "path", "CSV file of recorded motion (trace), of motion segments (segments) or of "
                  "bursts to replay (burst_replay), relative to the design file"),
    )
    name: str
    kind: str
    at: str = "output"
    speed_rpm: float | None = None
    speed_mm_per_s: float | None = None
    distance_deg: float | None = None
    distance_mm: float | None = None
    acceleration_deg_per_s2: float | None = None
    acceleration_mm_per_s2: float | None = None
    duration_s: float | None = None
    start_deg: float | None = None
    start_mm: float | None = None
    bursts_per_day: float | None = None
    seed: int | None = None
    amplitude_deg: float | None = None
    amplitude_mm: float | None = None
    frequency_Hz: float | None = None
    trace: str | None = None

    def given_keys(self) -> frozenset[str]:
        """File keys of the kind-specific fields that are set."""
        return frozenset(
            spec.key for spec in self.FIELDS[3:]
            if any(getattr(self, attr) is not None for attr in spec.attrs)
        )

    def _check_together(self) -> None:
        if not self.name.strip():
            _fail(self, "name", self.name, "a non-empty name")
        required, optional = MOTION_FIELDS_BY_KIND[self.kind]
        given = self.given_keys()
        for key in sorted(required - given):
            _fail(self, key, None, f"given for a '{self.kind}' motion",
                  hint=f"a '{self.kind}' motion needs {', '.join(sorted(required))}")
        for key in sorted(given - required - optional):
            allowed = sorted(required | optional)
            _fail(self, key, "set", f"left out of a '{self.kind}' motion",
                  hint=f"a '{self.kind}' motion takes {', '.join(allowed)}")
        linear = [spec.key for spec in self.FIELDS if len(spec.units) == 2
                  and getattr(self, spec.attrs[1]) is not None]
        rotary = [spec.key for spec in self.FIELDS if len(spec.units) == 2
                  and getattr(self, spec.attrs[0]) is not None]
        if linear and self.at == "motor":
            _fail(self, linear[0], "linear", "rotary (deg, rpm) when at = 'motor'",
                  hint="the motor shaft turns; give linear motion at = 'output'")
        if self.kind in ("trapezoid", "bursts") and 0.0 in (self.speed_rpm, self.speed_mm_per_s):
            _fail(self, "speed", 0.0, f"more than 0 for a '{self.kind}' motion",
                  hint="a move or burst at zero speed never covers its distance")
        if linear and rotary:
            _fail(self, linear[0], "linear", f"rotary like {rotary[0]}",
                  hint="give all speeds and distances of one scenario as rotary (deg, rpm) or all as linear "
                       "(mm, mm/s)")


# --- requirements -----------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class Requirements(_Section):
    """What the actuator must achieve; every field is optional."""

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("stroke", "quantity", "full travel of the output", units=("mm", "deg"),
                  low=0.0, low_open=True),
        FieldSpec("output_resolution", "quantity", "smallest output step that must be resolved",
                  units=("mm", "deg"), low=0.0, low_open=True),
        FieldSpec("output_accuracy", "quantity", "largest allowed output position error",
                  units=("mm", "deg"), low=0.0, low_open=True),
        FieldSpec("backdrive_speed", "quantity", "fastest output speed that must be followed while asleep",
                  units=("mm/s", "rpm"), low=0.0, low_open=True),
        FieldSpec("battery_life", "quantity", "required battery life", units=("years",),
                  low=0.0, low_open=True),
        FieldSpec("quiescent_budget", "quantity", "largest allowed average current", units=("uA",),
                  low=0.0, low_open=True),
        FieldSpec("service_temperature", "quantity", "temperature the requirements must hold at",
                  units=("degC",), low=-60.0, high=125.0),
        FieldSpec("service_temperature_low", "quantity", "lowest temperature in service, for the accuracy "
                  "budget and the magnet checks (omitted: service_temperature, else 20 degC)",
                  units=("degC",), low=-60.0, high=125.0),
        FieldSpec("service_temperature_high", "quantity", "highest temperature in service (omitted: "
                  "service_temperature, else 20 degC)", units=("degC",), low=-60.0, high=125.0),
        FieldSpec("counting_margin", "fraction", "share of the counter's speed bound left unused at the "
                  "required back-drive speed (default 30 %: count at no more than 70 % of the bound, "
                  "common practice)", low=0.0, high=1.0, high_open=True, default=0.3),
    )
    stroke_mm: float | None = None
    stroke_deg: float | None = None
    output_resolution_mm: float | None = None
    output_resolution_deg: float | None = None
    output_accuracy_mm: float | None = None
    output_accuracy_deg: float | None = None
    backdrive_speed_mm_per_s: float | None = None
    backdrive_speed_rpm: float | None = None
    battery_life_years: float | None = None
    quiescent_budget_uA: float | None = None
    service_temperature_degC: float | None = None
    service_temperature_low_degC: float | None = None
    service_temperature_high_degC: float | None = None
    counting_margin: float = 0.3

    def _check_together(self) -> None:
        low, high = self.temperature_range_degC()
        if low > high:
            _fail(self, "service_temperature_low_degC", low, f"<= service_temperature_high ({_short(high)} degC)",
                  unit="degC")

    def temperature_range_degC(self) -> tuple[float, float]:
        """(lowest, highest) service temperature (degC), defaults applied."""
        one = self.service_temperature_degC if self.service_temperature_degC is not None else 20.0
        low = self.service_temperature_low_degC
        high = self.service_temperature_high_degC
        return (low if low is not None else min(one, high if high is not None else one),
                high if high is not None else max(one, low if low is not None else one))


# --- magnet, accuracy budget, count memory ----------------------------------------

_GRADE_KEYS = ("ndfeb", "ndfeb_high_temperature", "ndfeb_bonded", "smco5", "sm2co17", "ferrite")


@dataclass(frozen=True, slots=True)
class MagnetDesign(_Section):
    """The diametrically magnetised disc on the motor shaft and where the board sits.

    The AMR sensor is on the shaft axis and the Hall latches at
    ``latch_radius`` from it, all on one board ``airgap`` below the magnet.
    """

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("grade", "choice", "magnet material (remanence and its temperature coefficient from turnkit's "
                  "table)", choices=_GRADE_KEYS, default="ndfeb"),
        FieldSpec("diameter", "quantity", "magnet diameter", units=("mm",), low=0.0, low_open=True,
                  default=REQUIRED),
        FieldSpec("thickness", "quantity", "magnet thickness along the shaft", units=("mm",), low=0.0,
                  low_open=True, default=REQUIRED),
        FieldSpec("airgap", "quantity", "distance from the magnet's face to the sensor board", units=("mm",),
                  low=0.0, low_open=True, default=REQUIRED),
        FieldSpec("latch_radius", "quantity", "distance of the Hall latches from the shaft axis "
                  "(omitted: under the magnet's edge)", units=("mm",), low=0.0, low_open=True),
        FieldSpec("remanence", "quantity", "remanence at 20 degC (omitted: the grade's typical value)",
                  units=("mT",), low=0.0, low_open=True),
        FieldSpec("remanence_drift", "quantity", "reversible temperature coefficient of the remanence "
                  "(omitted: the grade's)", units=("%/K",), low=-2.0, high=0.0),
        FieldSpec("max_temperature", "quantity", "highest working temperature of the magnet "
                  "(omitted: the grade's)", units=("degC",), low=-60.0, high=400.0),
    )
    diameter_mm: float
    thickness_mm: float
    airgap_mm: float
    grade: str = "ndfeb"
    latch_radius_mm: float | None = None
    remanence_mT: float | None = None
    remanence_drift_pct_per_K: float | None = None
    max_temperature_degC: float | None = None


@dataclass(frozen=True, slots=True)
class AccuracyDesign(_Section):
    """How the output accuracy budget is summed and the errors the sensor model does not hold."""

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("method", "choice", "sum checked against the accuracy requirement: worst_case (every error "
                  "at its extreme), rss (root sum of squares) or monte_carlo", choices=("worst_case", "rss",
                                                                                       "monte_carlo"),
                  default="worst_case"),
        FieldSpec("noise_coverage", "number", "coverage factor k: random errors count k standard deviations",
                  low=0.0, high=10.0, low_open=True, default=3.0),
        FieldSpec("approach", "choice", "either: the output reaches a position from both directions (backlash "
                  "counts); one_direction: always from the same side (backlash taken up)",
                  choices=("either", "one_direction"), default="either"),
        FieldSpec("calibration_temperature", "quantity", "temperature of the one sensor calibration",
                  units=("degC",), low=-60.0, high=125.0, default=20.0),
        FieldSpec("eccentricity", "quantity", "distance between the sensor centre and the magnet axis not "
                  "taken out by calibration (needs [magnet])", units=("mm",), low=0.0, default=0.0),
        FieldSpec("tilt", "quantity", "tilt of the sensor against the magnet's face", units=("deg",), low=0.0,
                  high=45.0, default=0.0),
        FieldSpec("stray_field", "quantity", "largest uniform stray field at the sensor (needs [magnet])",
                  units=("mT",), low=0.0, default=0.0),
        FieldSpec("transmission_error", "quantity", "transmission error and runout of the last stages, peak, "
                  "at the output", units=("mm", "deg"), low=0.0),
        FieldSpec("lead_error", "quantity", "largest cumulative lead deviation of the screw over the stroke",
                  units=("mm",), low=0.0),
        FieldSpec("screw_expansion", "quantity", "thermal expansion coefficient of the screw or rack "
                  "(with housing_expansion; needs a stroke)", units=("ppm/K",), low=0.0),
        FieldSpec("housing_expansion", "quantity", "thermal expansion coefficient of the housing the stroke is "
                  "measured against", units=("ppm/K",), low=0.0),
        FieldSpec("monte_carlo_samples", "int", "Monte Carlo draws per temperature", low=100, high=1_000_000,
                  default=20000),
        FieldSpec("seed", "int", "seed of the Monte Carlo draws", low=0, default=1),
    )
    method: str = "worst_case"
    noise_coverage: float = 3.0
    approach: str = "either"
    calibration_temperature_degC: float = 20.0
    eccentricity_mm: float = 0.0
    tilt_deg: float = 0.0
    stray_field_mT: float = 0.0
    transmission_error_mm: float | None = None
    transmission_error_deg: float | None = None
    lead_error_mm: float | None = None
    screw_expansion_ppm_per_K: float | None = None
    housing_expansion_ppm_per_K: float | None = None
    monte_carlo_samples: int = 20000
    seed: int = 1

    def _check_together(self) -> None:
        _both_or_neither(self, ("screw_expansion_ppm_per_K", "screw_expansion"),
                         ("housing_expansion_ppm_per_K", "housing_expansion"))


@dataclass(frozen=True, slots=True)
class CountMemoryDesign(_Section):
    """Where the count survives supply events: non-volatile writes, hold-up and re-sync."""

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("write_strategy", "choice", "when the count is written: on_change (every quarter-turn step), "
                  "periodic (at most once per write_period, if changed) or on_brownout (once per supply event, "
                  "from the hold-up capacitor)", choices=("on_change", "periodic", "on_brownout"),
                  default="on_change"),
        FieldSpec("travel_per_day", "quantity", "output travel per day, all moves together", units=("mm", "deg"),
                  low=0.0),
        FieldSpec("write_period", "quantity", "time between writes (periodic)", units=("s",), low=0.0,
                  low_open=True, default=60.0),
        FieldSpec("supply_events_per_day", "number", "brown-outs and power losses per day", low=0.0, default=1.0),
        FieldSpec("service_life", "quantity", "service life for the write count (omitted: the required battery "
                  "life, else 10 years)", units=("years",), low=0.0, low_open=True),
        FieldSpec("rated_write_cycles", "int", "write cycles the memory is rated for, per location", low=1,
                  default=100000),
        FieldSpec("wear_leveling_slots", "int", "locations the writes are spread over", low=1, default=1),
        FieldSpec("holdup_capacitance", "quantity", "hold-up capacitance on the electronics' supply",
                  units=("uF",), low=0.0),
        FieldSpec("brownout_threshold", "quantity", "supply voltage at which the brown-out is detected",
                  units=("V",), low=0.0, low_open=True),
        FieldSpec("minimum_write_voltage", "quantity", "lowest supply voltage a write still completes at",
                  units=("V",), low=0.0),
        FieldSpec("save_power", "quantity", "power drawn while detecting the brown-out and saving",
                  units=("mW",), low=0.0),
        FieldSpec("save_time", "quantity", "time of one save", units=("ms",), low=0.0),
        FieldSpec("detection_latency", "quantity", "time from the brown-out threshold to the start of the save",
                  units=("us",), low=0.0, default=0.0),
    )
    write_strategy: str = "on_change"
    travel_per_day_mm: float | None = None
    travel_per_day_deg: float | None = None
    write_period_s: float = 60.0
    supply_events_per_day: float = 1.0
    service_life_years: float | None = None
    rated_write_cycles: int = 100000
    wear_leveling_slots: int = 1
    holdup_capacitance_uF: float | None = None
    brownout_threshold_V: float | None = None
    minimum_write_voltage_V: float | None = None
    save_power_mW: float | None = None
    save_time_ms: float | None = None
    detection_latency_us: float = 0.0

    _HOLD_UP = ("holdup_capacitance_uF", "brownout_threshold_V", "minimum_write_voltage_V", "save_power_mW",
                "save_time_ms")

    def _check_together(self) -> None:
        if self.write_strategy in ("on_change", "periodic") and self.travel_per_day_mm is None \
                and self.travel_per_day_deg is None:
            _fail(self, "travel_per_day", None, f"given for write_strategy = '{self.write_strategy}'",
                  hint="say how far the output moves in a day, e.g. travel_per_day = \"500 mm\"")
        if self.write_strategy == "on_brownout":
            for attr in self._HOLD_UP:
                if getattr(self, attr) is None:
                    _fail(self, attr, None, "given for write_strategy = 'on_brownout'",
                          hint="a save on brown-out needs holdup_capacitance, brownout_threshold, "
                               "minimum_write_voltage, save_power and save_time")
            if self.brownout_threshold_V <= self.minimum_write_voltage_V:
                _fail(self, "brownout_threshold_V", self.brownout_threshold_V,
                      f"above minimum_write_voltage ({_short(self.minimum_write_voltage_V)} V)", unit="V")


# --- the whole design ------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class ActuatorDesign(_Section):
    """One actuator: gear train, sensing, counting, schedule, power and requirements.

    Parameters
    ----------
    name : str
        Name of the actuator.
    description : str
        Free text.
    gear_train : tuple of stage objects
        Stages from the motor to the output (empty for a direct drive).
    sensor, latches, counter, schedule, power : sections
        Defaults are the sections' defaults.
    battery : BatteryDesign or None
        None when the actuator has no battery (host supply).
    motion : tuple of MotionScenario
        Motions that can happen while the electronics sleep.
    requirements : Requirements
    format_version : int
        The design-file format version.
    magnet : MagnetDesign or None
        The shaft magnet and airgap; None when not described (no field checks).
    accuracy : AccuracyDesign
        How the output accuracy budget is summed, and errors outside the sensor model.
    count_memory : CountMemoryDesign or None
        Non-volatile writes, hold-up and re-sync; None when not described.
    """

    FIELDS: ClassVar[tuple[FieldSpec, ...]] = (
        FieldSpec("format_version", "int", "design-file format version", low=FORMAT_VERSION,
                  high=FORMAT_VERSION, default=REQUIRED),
        FieldSpec("name", "text", "name of the actuator", default=REQUIRED),
        FieldSpec("description", "text", "free text about the actuator", default=""),
    )
    name: str
    description: str = ""
    gear_train: tuple[GearStageDesign, ...] = ()
    sensor: SensorDesign = field(default_factory=SensorDesign)
    latches: LatchDesign = field(default_factory=LatchDesign)
    counter: CounterDesign = field(default_factory=CounterDesign)
    schedule: ScheduleDesign = field(default_factory=ScheduleDesign)
    power: PowerDesign = field(default_factory=PowerDesign)
    battery: BatteryDesign | None = None
    motion: tuple[MotionScenario, ...] = ()
    requirements: Requirements = field(default_factory=Requirements)
    format_version: int = FORMAT_VERSION
    magnet: MagnetDesign | None = None
    accuracy: AccuracyDesign = field(default_factory=AccuracyDesign)
    count_memory: CountMemoryDesign | None = None

    def _check_together(self) -> None:
        if not self.name.strip():
            _fail(self, "name", self.name, "a non-empty name")
        if not isinstance(self.gear_train, tuple):
            _fail(self, "gear_train", self.gear_train, "a tuple of gear stages")
        for index, stage in enumerate(self.gear_train):
            if type(stage) not in STAGE_KINDS.values():
                _fail(self, f"gear_train[{index}]", stage, "a gear stage object")
            if stage.KIND in _LINEAR_STAGE_KINDS and index != len(self.gear_train) - 1:
                _fail(self, f"gear_train[{index}]", stage.KIND, "a rotary stage",
                      hint="a linear stage (lead_screw, rack) can only be the last stage")
        for attr, cls in (("sensor", SensorDesign), ("latches", LatchDesign), ("counter", CounterDesign),
                          ("schedule", ScheduleDesign), ("power", PowerDesign), ("requirements", Requirements)):
            if not isinstance(getattr(self, attr), cls):
                _fail(self, attr, getattr(self, attr), f"a {cls.__name__}")
        if self.battery is not None and not isinstance(self.battery, BatteryDesign):
            _fail(self, "battery", self.battery, "a BatteryDesign or None")
        for attr, cls in (("magnet", MagnetDesign), ("count_memory", CountMemoryDesign)):
            if getattr(self, attr) is not None and not isinstance(getattr(self, attr), cls):
                _fail(self, attr, getattr(self, attr), f"a {cls.__name__} or None")
        if not isinstance(self.accuracy, AccuracyDesign):
            _fail(self, "accuracy", self.accuracy, f"a {AccuracyDesign.__name__}")
        if not isinstance(self.motion, tuple) or not all(isinstance(m, MotionScenario) for m in self.motion):
            _fail(self, "motion", self.motion, "a tuple of MotionScenario")
        names = [m.name for m in self.motion]
        for name in names:
            if names.count(name) > 1:
                _fail(self, "motion", name, "unique scenario names")

    @property
    def output_is_linear(self) -> bool:
        """True when the last stage is a lead screw or a rack."""
        return bool(self.gear_train) and self.gear_train[-1].KIND in _LINEAR_STAGE_KINDS

