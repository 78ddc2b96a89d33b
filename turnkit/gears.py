"""Gear trains: what the gearing does to motor turns.

A train is an ordered tuple of stages from the motor to the output. Every
stage is an immutable object with

* ``reduction`` -- input turns per output turn, an exact
  :class:`fractions.Fraction` (rotary stages), or ``travel_per_input_turn_mm``
  (linear stages: lead screw, rack and pinion);
* ``direction`` -- +1 when the output turns the same way as the input, -1
  when it reverses (for a linear stage, +1 means a positive motor turn gives a
  positive travel);
* ``backlash_deg`` / ``backlash_mm`` -- lost motion measured at the stage's
  output member;
* ``efficiency`` (driving forward) and ``backdrive_efficiency`` (driven from
  the output; zero or below means the stage locks itself).

Ratios stay exact: teeth are integers, and lengths given as floats are turned
into fractions through their shortest decimal text (``Fraction("2.5")``), so
``0.1 mm`` is exactly one tenth, not the nearest binary float.

Only a linear stage may be last; everything before it is rotary.

References
----------
.. [1] R. G. Budynas, J. K. Nisbett, *Shigley's Mechanical Engineering
   Design*, ch. 8 (power screws), ch. 13 (gear trains, interference,
   worm efficiency).
.. [2] Modelica Standard Library, ``Rotational.Components.IdealPlanetary``
   (the Willis relation in the form used here).
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field, fields, replace
from fractions import Fraction
from functools import lru_cache
from typing import Any, ClassVar, Iterable, Mapping, Union

import numpy as np

from .errors import DesignValueError, TurnkitWarning

__all__ = [
    "ExternalPair",
    "InternalPair",
    "PlanetaryStage",
    "WormStage",
    "BeltStage",
    "LeadScrew",
    "RackAndPinion",
    "GearTrain",
    "Stage",
    "STAGE_KINDS",
    "stage_from_mapping",
    "min_pinion_teeth",
    "screw_efficiencies",
    "worm_efficiencies",
]

#: Self-locking is judged at this share of the stated friction coefficient: friction
#: coefficients scatter with lubrication, wear and vibration, so a stage counts as
#: self-locking only when it still locks with 20 % less friction (common practice).
LOW_FRICTION_FACTOR = 0.8

Number = Union[int, float, Fraction]


# ----------------------------------------------------------------------------
# small validation helpers
# ----------------------------------------------------------------------------

def _exact(value: Number) -> Fraction:
    """Exact fraction of a user length: floats go through their decimal text."""
    if isinstance(value, Fraction):
        return value
    if isinstance(value, bool):
        raise TypeError("a bool is not a length")
    if isinstance(value, int):
        return Fraction(value)
    return Fraction(repr(float(value)))


def _check_teeth(owner: str, name: str, value: Any, minimum: int = 1) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)):
        if isinstance(value, float) and value.is_integer():
            raise DesignValueError(f"{owner}.{name}", value, f"a whole number of teeth >= {minimum}",
                                   hint="write it without a decimal point")
        raise DesignValueError(f"{owner}.{name}", value, f"a whole number of teeth >= {minimum}")
    if value < minimum:
        raise DesignValueError(f"{owner}.{name}", value, f"a whole number of teeth >= {minimum}")


def _check_positive(owner: str, name: str, value: Any, unit: str) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, float, Fraction, np.floating, np.integer)):
        raise DesignValueError(f"{owner}.{name}", value, "a number > 0", unit=unit)
    if not (math.isfinite(float(value)) and value > 0):
        raise DesignValueError(f"{owner}.{name}", value, "a number > 0", unit=unit)


def _check_nonnegative(owner: str, name: str, value: Any, unit: str) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, float, Fraction, np.floating, np.integer)):
        raise DesignValueError(f"{owner}.{name}", value, "a number >= 0", unit=unit)
    if not (math.isfinite(float(value)) and value >= 0):
        raise DesignValueError(f"{owner}.{name}", value, "a number >= 0", unit=unit)


def _check_efficiency(owner: str, value: Any) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, float, Fraction, np.floating)):
        raise DesignValueError(f"{owner}.efficiency", value, "in (0, 1]")
    if not (0 < float(value) <= 1):
        raise DesignValueError(f"{owner}.efficiency", value, "in (0, 1]")


def _check_friction(owner: str, value: Any) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating)):
        raise DesignValueError(f"{owner}.friction_coefficient", value, "in [0, 1]")
    if not (0 <= float(value) <= 1):
        raise DesignValueError(f"{owner}.friction_coefficient", value, "in [0, 1]")


def _check_angle(owner: str, name: str, value: Any, low: float, high: float) -> None:
    if isinstance(value, bool) or not isinstance(value, (int, float, np.floating)):
        raise DesignValueError(f"{owner}.{name}", value, f"an angle in ({low:g}, {high:g})", unit="deg")
    if not (low < float(value) < high):
        raise DesignValueError(f"{owner}.{name}", value, f"an angle in ({low:g}, {high:g})", unit="deg")


# ----------------------------------------------------------------------------
# reference formulas
# ----------------------------------------------------------------------------

def min_pinion_teeth(mate_to_pinion_ratio: float, pressure_angle_deg: float = 20.0,
                     addendum_factor: float = 1.0) -> float:
    """Smallest pinion (real-valued) that meshes a mate without interference.

    Full-depth teeth, no profile shift. Round up to get a tooth count.

    Parameters
    ----------
    mate_to_pinion_ratio : float
        Mate teeth / pinion teeth (``m`` >= 1); ``math.inf`` for a rack.
    pressure_angle_deg : float
        Pressure angle in degrees.
    addendum_factor : float
        Addendum in modules (``k``; 1 for full depth).

    Returns
    -------
    float
        The limiting number of pinion teeth.

    References
    ----------
    Shigley, Eq. (13-11) for a gear pair and Eq. (13-13) for a rack.

    Examples
    --------
    >>> round(min_pinion_teeth(math.inf), 2)
    17.1
    """
    k = addendum_factor
    s2 = math.sin(math.radians(pressure_angle_deg)) ** 2
    m = mate_to_pinion_ratio
    if math.isinf(m):
        return 2 * k / s2
    return 2 * k / ((1 + 2 * m) * s2) * (m + math.sqrt(m * m + (1 + 2 * m) * s2))


def screw_efficiencies(lead_mm: float, mean_diameter_mm: float, friction_coefficient: float,
                       thread_half_angle_deg: float = 15.0) -> tuple[float, float]:
    """Forward and back-drive efficiency of a sliding power screw (no collar).

    Parameters
    ----------
    lead_mm : float
        Lead (advance per screw turn) in mm.
    mean_diameter_mm : float
        Mean (pitch) diameter in mm.
    friction_coefficient : float
        Thread friction coefficient (dimensionless).
    thread_half_angle_deg : float
        Half the thread angle in degrees (15 for a 30 deg metric trapezoidal
        thread, 14.5 for 29 deg, 0 for a square thread).

    Returns
    -------
    (float, float)
        Efficiency turning the screw to push the load, and efficiency when the
        load drives the screw. A back-drive efficiency <= 0 means the screw is
        self-locking: ``f / cos(alpha) >= tan(lead angle)``.

    References
    ----------
    Shigley, Sec. 8-2, Eqs. (8-1), (8-2), (8-4) and (8-5)/(8-6) with the
    thread angle correction ``f -> f sec(alpha)``.
    """
    tan_lead = lead_mm / (math.pi * mean_diameter_mm)
    mu = friction_coefficient / math.cos(math.radians(thread_half_angle_deg))
    forward = tan_lead * (1 - mu * tan_lead) / (tan_lead + mu)
    back = (tan_lead - mu) / (tan_lead * (1 + mu * tan_lead))
    return forward, back


def worm_efficiencies(lead_angle_deg: float, friction_coefficient: float,
                      normal_pressure_angle_deg: float = 20.0) -> tuple[float, float]:
    """Forward (worm driving) and back-drive (wheel driving) worm efficiency.

    Returns
    -------
    (float, float)
        ``(cos phi_n - f tan L) / (cos phi_n + f cot L)`` and
        ``(cos phi_n - f cot L) / (cos phi_n + f tan L)``; the second is <= 0
        when the pair locks itself.

    References
    ----------
    Shigley, Sec. 13-17 (worm gearing), Eq. (13-46) for the worm driving;
    the wheel-driving form swaps the roles of tan and cot.
    """
    lam = math.radians(lead_angle_deg)
    c = math.cos(math.radians(normal_pressure_angle_deg))
    f = friction_coefficient
    forward = (c - f * math.tan(lam)) / (c + f / math.tan(lam))
    back = (c - f / math.tan(lam)) / (c + f * math.tan(lam))
    return forward, back


# ----------------------------------------------------------------------------
# stages
# ----------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class ExternalPair:
    """Two external spur or helical gears in mesh: the output reverses.

    Parameters
    ----------
    teeth_driver, teeth_driven : int
        Tooth counts of the driving and the driven gear.
    backlash_deg : float
        Backlash at the driven gear, degrees of its rotation.
    efficiency : float
        Mesh efficiency in (0, 1].
    pressure_angle_deg : float
        Used only for the undercut warning.
    """

    teeth_driver: int
    teeth_driven: int
    backlash_deg: float = 0.0
    efficiency: float = 0.98
    pressure_angle_deg: float = 20.0

    kind: ClassVar[str] = "external"
    output_kind: ClassVar[str] = "rotary"

    def __post_init__(self) -> None:
        owner = type(self).__name__
        _check_teeth(owner, "teeth_driver", self.teeth_driver)
        _check_teeth(owner, "teeth_driven", self.teeth_driven)
        _check_nonnegative(owner, "backlash_deg", self.backlash_deg, "deg")
        _check_efficiency(owner, self.efficiency)
        _check_angle(owner, "pressure_angle_deg", self.pressure_angle_deg, 0, 45)
        self._warn_undercut()

    def _warn_undercut(self) -> None:
        small, large = sorted((self.teeth_driver, self.teeth_driven))
        limit = min_pinion_teeth(large / small, self.pressure_angle_deg)
        if small < limit:
            warnings.warn(
                f"{type(self).__name__}: a {small}-tooth pinion meshing {large} teeth is below the "
                f"usual undercut limit of {math.ceil(limit)} teeth at {self.pressure_angle_deg:g} deg "
                "pressure angle (full-depth teeth, no profile shift); use profile shift or more teeth",
                TurnkitWarning, stacklevel=4)

    @property
    def reduction(self) -> Fraction:
        """Input turns per output turn (exact)."""
        return Fraction(self.teeth_driven, self.teeth_driver)

    @property
    def direction(self) -> int:
        """-1: an external mesh reverses the direction."""
        return -1

    @property
    def backdrive_efficiency(self) -> float:
        """Spur and helical meshes back-drive at about the forward efficiency (common practice)."""
        return float(self.efficiency)

    def reversed(self) -> "ExternalPair":
        """The same mesh driven from the other gear."""
        return replace(self, teeth_driver=self.teeth_driven, teeth_driven=self.teeth_driver)


@dataclass(frozen=True, slots=True)
class InternalPair(ExternalPair):
    """An external pinion meshing an internal (ring) gear: same direction.

    ``teeth_driver`` drives ``teeth_driven``; either may be the ring.
    """

    kind: ClassVar[str] = "internal"

    @property
    def direction(self) -> int:
        """+1: an internal mesh keeps the direction."""
        return 1

    def _warn_undercut(self) -> None:
        # Internal meshes have their own interference limits; the external
        # pinion rule would mislead, so only the clearance of teeth counts.
        small, large = sorted((self.teeth_driver, self.teeth_driven))
        if large - small < 10:
            warnings.warn(
                f"InternalPair: ring and pinion differ by {large - small} teeth; fewer than about 10-12 "
                "risks tip interference (common practice)", TurnkitWarning, stacklevel=4)


_MEMBERS = ("sun", "ring", "carrier")


@lru_cache(maxsize=1024)
def _planetary_output_speed(sun_teeth: int, ring_teeth: int, input_member: str, output_member: str) -> Fraction:
    """Output speed per unit input speed of a planetary set (exact; cached: Fraction arithmetic is slow)."""
    # Willis relation as a linear form a*w_s + b*w_r + c*w_c = 0.
    k = Fraction(ring_teeth, sun_teeth)
    coef = {"sun": Fraction(1), "ring": k, "carrier": -(1 + k)}
    # held member at rest, input at unit speed: solve for the output.
    return -coef[input_member] / coef[output_member]


@dataclass(frozen=True, slots=True)
class PlanetaryStage:
    """A simple planetary stage with one member held.

    Speeds obey the Willis relation
    ``(1 + Zr/Zs) * w_carrier = w_sun + (Zr/Zs) * w_ring``.

    Parameters
    ----------
    sun_teeth, ring_teeth : int
        Tooth counts of the sun and of the ring (internal) gear.
    held : {"ring", "sun", "carrier"}
        The member that is held still.
    input_member, output_member : {"sun", "ring", "carrier"}
        The two other members, driving and driven.
    planet_teeth : int, optional
        Planet tooth count; checked against ``Zr = Zs + 2 Zp``.
    planets : int, optional
        Number of planets; equal spacing needs ``(Zs + Zr) / planets`` whole.
    backlash_deg : float
        Backlash at the output member, degrees.
    efficiency : float
        Stage efficiency in (0, 1].
    """

    sun_teeth: int
    ring_teeth: int
    held: str = "ring"
    input_member: str = "sun"
    output_member: str = "carrier"
    planet_teeth: int | None = None
    planets: int | None = None
    backlash_deg: float = 0.0
    efficiency: float = 0.97

    kind: ClassVar[str] = "planetary"
    output_kind: ClassVar[str] = "rotary"

    def __post_init__(self) -> None:
        owner = "PlanetaryStage"
        _check_teeth(owner, "sun_teeth", self.sun_teeth)
        _check_teeth(owner, "ring_teeth", self.ring_teeth)
        if self.ring_teeth <= self.sun_teeth:
            raise DesignValueError(f"{owner}.ring_teeth", self.ring_teeth,
                                   f"more teeth than the sun ({self.sun_teeth})")
        for name in ("held", "input_member", "output_member"):
            value = getattr(self, name)
            if value not in _MEMBERS:
                raise DesignValueError(f"{owner}.{name}", value, "one of 'sun', 'ring', 'carrier'")
        if len({self.held, self.input_member, self.output_member}) != 3:
            raise DesignValueError(
                f"{owner}.output_member", self.output_member,
                "different from the held and the input member",
                hint=f"held={self.held!r}, input_member={self.input_member!r}")
        _check_nonnegative(owner, "backlash_deg", self.backlash_deg, "deg")
        _check_efficiency(owner, self.efficiency)
        if self.planet_teeth is not None:
            _check_teeth(owner, "planet_teeth", self.planet_teeth)
            if self.ring_teeth != self.sun_teeth + 2 * self.planet_teeth:
                warnings.warn(
                    f"PlanetaryStage: ring {self.ring_teeth} != sun {self.sun_teeth} + 2 x planet "
                    f"{self.planet_teeth}; without profile shift the planets will not mesh both gears",
                    TurnkitWarning, stacklevel=3)
        if self.planets is not None:
            _check_teeth(owner, "planets", self.planets)
            if (self.sun_teeth + self.ring_teeth) % self.planets:
                warnings.warn(
                    f"PlanetaryStage: (sun + ring) = {self.sun_teeth + self.ring_teeth} is not divisible "
                    f"by {self.planets} planets; they cannot be spaced equally", TurnkitWarning, stacklevel=3)

    def _output_speed(self) -> Fraction:
        return _planetary_output_speed(self.sun_teeth, self.ring_teeth, self.input_member, self.output_member)

    @property
    def reduction(self) -> Fraction:
        """Input turns per output turn (exact, always positive)."""
        return abs(1 / self._output_speed())

    @property
    def direction(self) -> int:
        """+1 when the output turns with the input, -1 against it."""
        return 1 if self._output_speed() > 0 else -1

    @property
    def backdrive_efficiency(self) -> float:
        """Planetary stages with usual ratios back-drive near their forward efficiency (common practice)."""
        return float(self.efficiency)

    def reversed(self) -> "PlanetaryStage":
        """The same stage driven from its output member."""
        return replace(self, input_member=self.output_member, output_member=self.input_member)

    def planet_speed(self, input_speed: int | float | Fraction = 1) -> Fraction | float:
        """Speed of each planet about its own axis, seen from the housing.

        From the sun–planet mesh relative to the carrier,
        ``w_planet = w_carrier - (Zs/Zp) * (w_sun - w_carrier)``.

        Parameters
        ----------
        input_speed : int, float or Fraction
            Speed of the input member, in any unit of rotational speed (rpm, deg/s).

        Returns
        -------
        Fraction or float
            Planet speed in the unit of ``input_speed``; exact for int or Fraction input.
            Positive means the planet turns the same way as the input.

        Raises
        ------
        DesignValueError
            When the stage has no ``planet_teeth``.
        """
        if self.planet_teeth is None:
            raise DesignValueError("PlanetaryStage.planet_teeth", None, "a tooth count to give the planet speed")
        w = {self.held: Fraction(0), self.input_member: Fraction(1), self.output_member: self._output_speed()}
        w_planet = w["carrier"] - Fraction(self.sun_teeth, self.planet_teeth) * (w["sun"] - w["carrier"])
        if isinstance(input_speed, float):
            return float(w_planet) * input_speed
        return w_planet * input_speed


@dataclass(frozen=True, slots=True)
class WormStage:
    """A worm driving a worm wheel.

    Parameters
    ----------
    starts : int
        Number of starts (threads) on the worm.
    wheel_teeth : int
        Teeth on the wheel.
    lead_angle_deg : float, optional
        Worm lead angle in degrees; needed for the efficiency and the
        self-locking check. Without it, ``efficiency`` is used forward and the
        back-drive behaviour is unknown (assumed to back-drive, the cautious
        side for the counter; a warning says so in
        :meth:`GearTrain.backdrive_report`).
    friction_coefficient : float
        Sliding friction in the mesh.
    normal_pressure_angle_deg : float
        Normal pressure angle in degrees.
    handedness : {"right", "left"}
        Thread hand; sets the sign convention of ``direction``.
    wheel_drives : bool
        True when the wheel drives the worm (a speed-up, seldom used).
    backlash_deg : float
        Backlash at the output member, degrees.
    efficiency : float, optional
        Forward efficiency to use when no lead angle is given.
    """

    starts: int
    wheel_teeth: int
    lead_angle_deg: float | None = None
    friction_coefficient: float = 0.05
    normal_pressure_angle_deg: float = 20.0
    handedness: str = "right"
    wheel_drives: bool = False
    backlash_deg: float = 0.0
    efficiency: float | None = None

    kind: ClassVar[str] = "worm"
    output_kind: ClassVar[str] = "rotary"

    def __post_init__(self) -> None:
        owner = "WormStage"
        _check_teeth(owner, "starts", self.starts)
        _check_teeth(owner, "wheel_teeth", self.wheel_teeth)
        if self.lead_angle_deg is not None:
            _check_angle(owner, "lead_angle_deg", self.lead_angle_deg, 0, 90)
        _check_friction(owner, self.friction_coefficient)
        _check_angle(owner, "normal_pressure_angle_deg", self.normal_pressure_angle_deg, 0, 45)
        if self.handedness not in ("right", "left"):
            raise DesignValueError(f"{owner}.handedness", self.handedness, "'right' or 'left'")
        _check_nonnegative(owner, "backlash_deg", self.backlash_deg, "deg")
        if self.efficiency is not None:
            _check_efficiency(owner, self.efficiency)

    @property
    def reduction(self) -> Fraction:
        """Input turns per output turn: wheel teeth / starts (or its inverse)."""
        r = Fraction(self.wheel_teeth, self.starts)
        return 1 / r if self.wheel_drives else r

    @property
    def direction(self) -> int:
        """Sign convention: +1 for a right-hand worm, -1 for a left-hand one."""
        return 1 if self.handedness == "right" else -1

    def _efficiencies(self) -> tuple[float, float] | None:
        if self.lead_angle_deg is None:
            return None
        fwd, back = worm_efficiencies(self.lead_angle_deg, self.friction_coefficient,
                                      self.normal_pressure_angle_deg)
        return (back, fwd) if self.wheel_drives else (fwd, back)

    @property
    def forward_efficiency(self) -> float:
        """Efficiency in the driving direction: ``efficiency`` when given, else from the lead angle.

        With neither, 0.5 stands in (common practice for a single-start worm).
        """
        if self.efficiency is not None:
            return float(self.efficiency)
        eff = self._efficiencies()
        if eff is not None:
            return eff[0]
        return 0.5

    @property
    def backdrive_efficiency(self) -> float:
        """Efficiency when the output drives the input at the stated friction; <= 0 means self-locking.

        Without a lead angle back-drive is unknown and the pair is assumed to
        back-drive (the forward efficiency stands in), the cautious assumption
        for a counter that must see every motion: see
        :meth:`GearTrain.backdrive_report`.
        """
        eff = self._efficiencies()
        return eff[1] if eff is not None else self.forward_efficiency

    @property
    def backdrive_known(self) -> bool:
        """True when the lead angle is given, so back-drive can be judged."""
        return self.lead_angle_deg is not None

    @property
    def backdrive_efficiency_at_low_friction(self) -> float:
        """Back-drive efficiency at :data:`LOW_FRICTION_FACTOR` times the friction; <= 0: self-locking."""
        if self.lead_angle_deg is None:
            return self.backdrive_efficiency
        fwd, back = worm_efficiencies(self.lead_angle_deg, LOW_FRICTION_FACTOR * self.friction_coefficient,
                                      self.normal_pressure_angle_deg)
        return fwd if self.wheel_drives else back

    def reversed(self) -> "WormStage":
        """The same pair driven from the other member."""
        return replace(self, wheel_drives=not self.wheel_drives)


@dataclass(frozen=True, slots=True)
class BeltStage:
    """A toothed belt, chain or friction belt between two pulleys (open, not crossed).

    Give either tooth counts or pitch diameters.

    Parameters
    ----------
    teeth_driver, teeth_driven : int, optional
        Pulley or sprocket tooth counts.
    pitch_diameter_driver_mm, pitch_diameter_driven_mm : float, optional
        Pitch diameters in mm (used when teeth are not given).
    backlash_deg : float
        Lost motion at the driven pulley, degrees.
    efficiency : float
        Drive efficiency in (0, 1].
    """

    teeth_driver: int | None = None
    teeth_driven: int | None = None
    pitch_diameter_driver_mm: float | None = None
    pitch_diameter_driven_mm: float | None = None
    backlash_deg: float = 0.0
    efficiency: float = 0.97

    kind: ClassVar[str] = "belt"
    output_kind: ClassVar[str] = "rotary"

    def __post_init__(self) -> None:
        owner = "BeltStage"
        has_teeth = self.teeth_driver is not None or self.teeth_driven is not None
        has_diam = self.pitch_diameter_driver_mm is not None or self.pitch_diameter_driven_mm is not None
        if has_teeth == has_diam:
            raise DesignValueError(f"{owner}.teeth_driver", self.teeth_driver,
                                   "given together with teeth_driven, or else both pitch diameters "
                                   "(one way, not both)")
        if has_teeth:
            _check_teeth(owner, "teeth_driver", self.teeth_driver)
            _check_teeth(owner, "teeth_driven", self.teeth_driven)
        else:
            _check_positive(owner, "pitch_diameter_driver_mm", self.pitch_diameter_driver_mm, "mm")
            _check_positive(owner, "pitch_diameter_driven_mm", self.pitch_diameter_driven_mm, "mm")
        _check_nonnegative(owner, "backlash_deg", self.backlash_deg, "deg")
        _check_efficiency(owner, self.efficiency)

    @property
    def reduction(self) -> Fraction:
        """Input turns per output turn (exact)."""
        if self.teeth_driver is not None:
            return Fraction(self.teeth_driven, self.teeth_driver)
        return _exact(self.pitch_diameter_driven_mm) / _exact(self.pitch_diameter_driver_mm)

    @property
    def direction(self) -> int:
        """+1: an open belt keeps the direction."""
        return 1

    @property
    def backdrive_efficiency(self) -> float:
        """Belts back-drive at about their forward efficiency (common practice)."""
        return float(self.efficiency)

    def reversed(self) -> "BeltStage":
        """The same belt driven from the other pulley."""
        return replace(self, teeth_driver=self.teeth_driven, teeth_driven=self.teeth_driver,
                       pitch_diameter_driver_mm=self.pitch_diameter_driven_mm,
                       pitch_diameter_driven_mm=self.pitch_diameter_driver_mm)


@dataclass(frozen=True, slots=True)
class LeadScrew:
    """A lead screw or ball screw turning rotation into travel (last stage only).

    Parameters
    ----------
    pitch_mm : float
        Thread pitch in mm (crest to crest).
    starts : int
        Number of thread starts; lead = pitch x starts.
    length_mm : float, optional
        Usable travel of the nut in mm; a longer stroke is rejected.
    mean_diameter_mm : float, optional
        Mean (pitch) diameter in mm; needed for the efficiency of a sliding
        screw and its self-locking check.
    thread_angle_deg : float
        Included thread angle (30 for metric trapezoidal, 29 for the inch
        form, 0 for square).
    friction_coefficient : float
        Thread friction (sliding screws).
    ball : bool
        True for a ball screw: rolling contact, high efficiency both ways,
        never self-locking.
    ball_efficiency : float
        Efficiency of a ball screw both ways (common practice: 0.85-0.95).
    backlash_mm : float
        Axial lost motion of the nut, mm.
    forward_efficiency : float, optional
        A measured or catalogue forward efficiency of a sliding screw; when
        given it replaces the one computed from the thread (the back-drive
        check still comes from the lead angle and friction).
    """

    pitch_mm: float
    starts: int = 1
    length_mm: float | None = None
    mean_diameter_mm: float | None = None
    thread_angle_deg: float = 30.0
    friction_coefficient: float = 0.15
    ball: bool = False
    ball_efficiency: float = 0.9
    backlash_mm: float = 0.0
    forward_efficiency: float | None = None

    kind: ClassVar[str] = "lead_screw"
    output_kind: ClassVar[str] = "linear"

    def __post_init__(self) -> None:
        owner = "LeadScrew"
        _check_positive(owner, "pitch_mm", self.pitch_mm, "mm")
        _check_teeth(owner, "starts", self.starts)
        if self.length_mm is not None:
            _check_positive(owner, "length_mm", self.length_mm, "mm")
        if self.mean_diameter_mm is not None:
            _check_positive(owner, "mean_diameter_mm", self.mean_diameter_mm, "mm")
        if not (0 <= float(self.thread_angle_deg) < 90):
            raise DesignValueError(f"{owner}.thread_angle_deg", self.thread_angle_deg,
                                   "an angle in [0, 90)", unit="deg")
        _check_friction(owner, self.friction_coefficient)
        _check_efficiency(owner, self.ball_efficiency)
        _check_nonnegative(owner, "backlash_mm", self.backlash_mm, "mm")
        if self.forward_efficiency is not None:
            if not isinstance(self.forward_efficiency, (int, float)) or isinstance(self.forward_efficiency, bool) \
                    or not 0 < float(self.forward_efficiency) <= 1:
                raise DesignValueError(f"{owner}.forward_efficiency", self.forward_efficiency, "in (0, 1]")

    @property
    def lead_mm(self) -> Fraction:
        """Travel per screw turn, mm: pitch x starts (exact)."""
        return _exact(self.pitch_mm) * self.starts

    @property
    def travel_per_input_turn_mm(self) -> Fraction:
        """Travel per input turn, mm (the lead)."""
        return self.lead_mm

    @property
    def direction(self) -> int:
        """+1: a positive screw turn gives positive travel (sign convention)."""
        return 1

    @property
    def lead_angle_deg(self) -> float | None:
        """Lead angle at the mean diameter, degrees (None without a diameter)."""
        if self.mean_diameter_mm is None:
            return None
        return math.degrees(math.atan(float(self.lead_mm) / (math.pi * self.mean_diameter_mm)))

    def _efficiencies(self) -> tuple[float, float] | None:
        if self.ball:
            return float(self.ball_efficiency), float(self.ball_efficiency)
        if self.mean_diameter_mm is None:
            return None
        return screw_efficiencies(float(self.lead_mm), self.mean_diameter_mm,
                                  self.friction_coefficient, self.thread_angle_deg / 2)

    @property
    def efficiency(self) -> float:
        """Forward efficiency (screw turned to move the load)."""
        if self.forward_efficiency is not None and not self.ball:
            return float(self.forward_efficiency)
        eff = self._efficiencies()
        return eff[0] if eff is not None else 0.3

    @property
    def backdrive_efficiency(self) -> float:
        """Efficiency with the load driving the screw at the stated friction; <= 0 means self-locking.

        A sliding screw without a mean diameter has an unknown back-drive and
        is assumed to back-drive (its forward efficiency stands in), the
        cautious assumption for a counter that must see every motion.
        """
        eff = self._efficiencies()
        return eff[1] if eff is not None else self.efficiency

    @property
    def backdrive_known(self) -> bool:
        """True when back-drive can be judged (a ball screw, or a sliding screw with its mean diameter)."""
        return self.ball or self.mean_diameter_mm is not None

    @property
    def backdrive_efficiency_at_low_friction(self) -> float:
        """Back-drive efficiency at :data:`LOW_FRICTION_FACTOR` times the friction; <= 0: self-locking."""
        if self.ball or self.mean_diameter_mm is None:
            return self.backdrive_efficiency
        return screw_efficiencies(float(self.lead_mm), self.mean_diameter_mm,
                                  LOW_FRICTION_FACTOR * self.friction_coefficient, self.thread_angle_deg / 2)[1]


@dataclass(frozen=True, slots=True)
class RackAndPinion:
    """A pinion driving a rack (last stage only): travel per turn = pi m z.

    Parameters
    ----------
    module_mm : float
        Gear module in mm.
    pinion_teeth : int
        Pinion tooth count.
    length_mm : float, optional
        Usable rack travel in mm.
    backlash_mm : float
        Lost motion along the rack, mm.
    efficiency : float
        Mesh efficiency in (0, 1].
    pressure_angle_deg : float
        Used for the undercut warning.
    """

    module_mm: float
    pinion_teeth: int
    length_mm: float | None = None
    backlash_mm: float = 0.0
    efficiency: float = 0.97
    pressure_angle_deg: float = 20.0

    kind: ClassVar[str] = "rack"
    output_kind: ClassVar[str] = "linear"

    def __post_init__(self) -> None:
        owner = "RackAndPinion"
        _check_positive(owner, "module_mm", self.module_mm, "mm")
        _check_teeth(owner, "pinion_teeth", self.pinion_teeth)
        if self.length_mm is not None:
            _check_positive(owner, "length_mm", self.length_mm, "mm")
        _check_nonnegative(owner, "backlash_mm", self.backlash_mm, "mm")
        _check_efficiency(owner, self.efficiency)
        _check_angle(owner, "pressure_angle_deg", self.pressure_angle_deg, 0, 45)
        limit = min_pinion_teeth(math.inf, self.pressure_angle_deg)
        if self.pinion_teeth < limit:
            warnings.warn(
                f"RackAndPinion: a {self.pinion_teeth}-tooth pinion on a rack is below the usual "
                f"undercut limit of {math.ceil(limit)} teeth at {self.pressure_angle_deg:g} deg",
                TurnkitWarning, stacklevel=3)

    @property
    def travel_per_input_turn_mm(self) -> float:
        """Travel per pinion turn in mm, pi x module x teeth (a float: pi is irrational)."""
        return math.pi * float(self.module_mm) * self.pinion_teeth

    @property
    def direction(self) -> int:
        """+1 by convention."""
        return 1

    @property
    def backdrive_efficiency(self) -> float:
        """A rack back-drives at about its forward efficiency (common practice)."""
        return float(self.efficiency)


Stage = Union[ExternalPair, InternalPair, PlanetaryStage, WormStage, BeltStage, LeadScrew, RackAndPinion]

STAGE_KINDS: dict[str, type] = {
    cls.kind: cls for cls in (ExternalPair, InternalPair, PlanetaryStage, WormStage, BeltStage,
                              LeadScrew, RackAndPinion)
}


def stage_from_mapping(spec: Mapping[str, Any], index: int | None = None) -> Stage:
    """Build a stage from ``{"kind": ..., field: value}`` with plain floats.

    Errors name the stage's place in the train, e.g. ``gear_train[2].pitch_mm``.
    """
    where = f"gear_train[{index}]" if index is not None else "stage"
    kind = spec.get("kind")
    if kind not in STAGE_KINDS:
        raise DesignValueError(f"{where}.kind", kind, "one of " + ", ".join(repr(k) for k in STAGE_KINDS))
    cls = STAGE_KINDS[kind]
    names = {f.name for f in fields(cls)}
    unknown = sorted(set(spec) - names - {"kind"})
    if unknown:
        raise DesignValueError(f"{where}.{unknown[0]}", spec[unknown[0]],
                               f"one of the {kind!r} stage fields: " + ", ".join(sorted(names)))
    kwargs = {k: v for k, v in spec.items() if k != "kind"}
    try:
        return cls(**kwargs)
    except DesignValueError as exc:
        # Re-label "ClassName.field" as "gear_train[i].field".
        name = exc.field.split(".", 1)[-1]
        raise DesignValueError(f"{where}.{name}", exc.value, exc.allowed, unit=exc.unit,
                               hint=exc.hint) from None
    except TypeError as exc:
        raise DesignValueError(where, dict(spec), f"a complete {kind!r} stage", hint=str(exc)) from None


# ----------------------------------------------------------------------------
# the train
# ----------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class GearTrain:
    """An ordered, immutable gear train from motor to output.

    Parameters
    ----------
    stages : tuple of stages
        Motor side first. Only the last stage may be linear.

    Examples
    --------
    Two 16:88 spur stages (a 30.25:1 reduction) and a 2 mm, 2-start screw:

    >>> train = GearTrain((ExternalPair(16, 88), ExternalPair(16, 88), LeadScrew(pitch_mm=2, starts=2)))
    >>> train.ratio
    Fraction(121, 4)
    >>> train.travel_per_motor_turn, train.output_unit
    (Fraction(16, 121), 'mm')
    >>> train.motor_turns(Fraction(16, 121))
    Fraction(1, 1)
    """

    stages: tuple = field(default=())
    # The exact ratio, worked out once: sizing reads it many times and Fraction arithmetic is slow.
    _ratio: Fraction | None = field(default=None, init=False, repr=False, compare=False)
    # Likewise the travel per motor turn and the backlash at the output (functions of the stages alone).
    _travel: Fraction | float | None = field(default=None, init=False, repr=False, compare=False)
    _backlash: float | None = field(default=None, init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        stages = tuple(self.stages)
        object.__setattr__(self, "stages", stages)
        object.__setattr__(self, "_ratio", None)
        object.__setattr__(self, "_travel", None)
        object.__setattr__(self, "_backlash", None)
        if not stages:
            raise DesignValueError("gear_train", [], "at least one stage")
        for i, stage in enumerate(stages):
            if type(stage) not in STAGE_KINDS.values():
                raise DesignValueError(f"gear_train[{i}]", stage,
                                       "a stage object (" + ", ".join(c.__name__ for c in STAGE_KINDS.values()) + ")")
            if stage.output_kind == "linear" and i != len(stages) - 1:
                raise DesignValueError(
                    f"gear_train[{i}].kind", stage.kind,
                    f"a rotary stage: a linear stage ({stage.kind}) may only be the last of "
                    f"{len(stages)} stages")

    # -- construction ------------------------------------------------------
    @classmethod
    def from_specs(cls, specs: Iterable[Mapping[str, Any]]) -> "GearTrain":
        """Build a train from mappings ``{"kind": "external", "teeth_driver": 12, ...}``."""
        return cls(tuple(stage_from_mapping(s, i) for i, s in enumerate(specs)))

    @classmethod
    def from_reduction(cls, reduction: Number, lead_mm: Number | None = None) -> "GearTrain":
        """A stand-in train with one exact overall reduction (and a screw).

        Useful for early sizing and sliders before the teeth are chosen.
        ``reduction`` is made exact through its decimal text and realised as a
        single internal-mesh stage so that the direction is +1.
        """
        r = _exact(reduction)
        if r <= 0:
            raise DesignValueError("reduction", reduction, "a number > 0")
        stages: list = [InternalPair.__new__(InternalPair)]
        # Build an exact stage without the tooth-count warnings: teeth may be
        # the numerator and denominator of any fraction.
        object.__setattr__(stages[0], "teeth_driver", r.denominator)
        object.__setattr__(stages[0], "teeth_driven", r.numerator)
        object.__setattr__(stages[0], "backlash_deg", 0.0)
        object.__setattr__(stages[0], "efficiency", 1.0)
        object.__setattr__(stages[0], "pressure_angle_deg", 20.0)
        if lead_mm is not None:
            stages.append(LeadScrew(pitch_mm=float(_exact(lead_mm)), starts=1, ball=True,
                                    ball_efficiency=1.0))
        return cls(tuple(stages))

    # -- ratio and travel --------------------------------------------------
    @property
    def rotary_stages(self) -> tuple:
        """The rotary stages (all but a final linear one)."""
        if self.stages[-1].output_kind == "linear":
            return self.stages[:-1]
        return self.stages

    @property
    def ratio(self) -> Fraction:
        """Overall reduction of the rotary stages: motor turns per turn of the
        last rotary member (the output, or the screw / pinion). Exact."""
        r = self._ratio
        if r is None:
            r = Fraction(1)
            for s in self.rotary_stages:
                r *= s.reduction
            object.__setattr__(self, "_ratio", r)
        return r

    @property
    def direction(self) -> int:
        """+1 when a positive motor turn gives positive output motion."""
        d = 1
        for s in self.stages:
            d *= s.direction
        return d

    @property
    def output_unit(self) -> str:
        """``"mm"`` for a linear output, ``"deg"`` for a rotary one."""
        return "mm" if self.stages[-1].output_kind == "linear" else "deg"

    @property
    def is_linear(self) -> bool:
        """True when the output moves in a straight line."""
        return self.output_unit == "mm"

    @property
    def travel_per_motor_turn(self) -> Fraction | float:
        """Output travel per motor turn, in ``output_unit`` (deg or mm).

        Exact (a Fraction) except behind a rack, whose pitch contains pi.
        """
        travel = self._travel
        if travel is None:
            last = self.stages[-1]
            if last.output_kind == "linear":
                per = last.travel_per_input_turn_mm
                travel = per / self.ratio if isinstance(per, Fraction) else per / float(self.ratio)
            else:
                travel = Fraction(360) / self.ratio
            object.__setattr__(self, "_travel", travel)
        return travel

    def motor_turns(self, travel):
        """Motor turns for an output travel (deg or mm, scalar or array).

        Fractions and ints in, an exact Fraction out; floats and arrays give
        floats.
        """
        per = self.travel_per_motor_turn
        if isinstance(travel, (int, Fraction)) and not isinstance(travel, bool) and isinstance(per, Fraction):
            return Fraction(travel) / per
        return np.asarray(travel, dtype=float) / float(per) if np.ndim(travel) else float(travel) / float(per)

    def travel(self, motor_turns):
        """Output travel (deg or mm) for a number of motor turns (scalar or array)."""
        per = self.travel_per_motor_turn
        if isinstance(motor_turns, (int, Fraction)) and not isinstance(motor_turns, bool) and isinstance(per, Fraction):
            return Fraction(motor_turns) * per
        return np.asarray(motor_turns, dtype=float) * float(per) if np.ndim(motor_turns) else float(motor_turns) * float(per)

    def quarter_turns(self, travel):
        """Quarter-turns of the motor shaft counted over an output travel."""
        t = self.motor_turns(travel)
        return 4 * t

    def check_stroke(self, stroke) -> None:
        """Reject a stroke longer than the screw or rack can travel.

        Parameters
        ----------
        stroke : float
            Output stroke in ``output_unit``.
        """
        unit = self.output_unit
        if not (float(stroke) > 0 and math.isfinite(float(stroke))):
            raise DesignValueError("requirements.stroke", stroke, "a number > 0", unit=unit)
        last = self.stages[-1]
        length = getattr(last, "length_mm", None)
        if length is not None and float(stroke) > float(length):
            raise DesignValueError(
                "requirements.stroke", stroke,
                f"at most the usable length of the {last.kind} (gear_train[{len(self.stages) - 1}]"
                f".length_mm = {length:g} mm)", unit="mm")

    def motor_turns_for_stroke(self, stroke):
        """Motor turns for the whole stroke, after :meth:`check_stroke`."""
        self.check_stroke(stroke)
        return self.motor_turns(stroke)

    def output_resolution(self, motor_resolution_deg: float) -> float:
        """Output resolution (deg or mm) from a motor-side angle resolution in degrees."""
        if not motor_resolution_deg >= 0:
            raise DesignValueError("motor_resolution_deg", motor_resolution_deg, "a number >= 0", unit="deg")
        return float(motor_resolution_deg) / 360.0 * float(self.travel_per_motor_turn)

    # -- lost motion and efficiency ----------------------------------------
    def backlash_at_output(self) -> float:
        """Total backlash seen at the output (deg or mm), worst case sum.

        Each rotary stage's backlash (degrees at its own output member) is
        divided by the reductions of the rotary stages downstream of it; a
        final screw or rack turns degrees into mm by its travel per turn and
        adds its own axial backlash.
        """
        if self._backlash is not None:
            return self._backlash
        rotary = self.rotary_stages
        total_deg = 0.0
        downstream = Fraction(1)
        for s in reversed(rotary):
            total_deg += float(s.backlash_deg) / float(downstream)
            downstream *= s.reduction
        last = self.stages[-1]
        total = total_deg
        if last.output_kind == "linear":
            total = total_deg / 360.0 * float(last.travel_per_input_turn_mm) + float(last.backlash_mm)
        object.__setattr__(self, "_backlash", total)
        return total

    def backlash_per_stage(self) -> tuple[float, ...]:
        """Each stage's contribution to :meth:`backlash_at_output`, same order as ``stages``."""
        rotary = self.rotary_stages
        out: list[float] = []
        last = self.stages[-1]
        scale = float(last.travel_per_input_turn_mm) / 360.0 if last.output_kind == "linear" else 1.0
        for i, s in enumerate(rotary):
            downstream = Fraction(1)
            for t in rotary[i + 1:]:
                downstream *= t.reduction
            out.append(float(s.backlash_deg) / float(downstream) * scale)
        if last.output_kind == "linear":
            out.append(float(last.backlash_mm))
        return tuple(out)

    @property
    def efficiency(self) -> float:
        """Overall forward efficiency (product of the stages')."""
        e = 1.0
        for s in self.stages:
            e *= s.forward_efficiency if isinstance(s, WormStage) else float(s.efficiency)
        return e

    @property
    def backdrive_efficiency(self) -> float:
        """Overall efficiency when the output drives the motor; 0 when any stage locks.

        Worms and sliding screws are taken at :data:`LOW_FRICTION_FACTOR` times
        their friction (the cautious side for a counter that must see every
        back-drive); a stage whose back-drive is unknown is assumed to back-drive.
        """
        e = 1.0
        for s in self.stages:
            b = _backdrive_judged(s)
            if b <= 0:
                return 0.0
            e *= b
        return e

    @property
    def self_locking_stages(self) -> tuple[int, ...]:
        """Indices of the stages that do not back-drive, even at the lowest expected friction."""
        return tuple(i for i, s in enumerate(self.stages) if _backdrive_judged(s) <= 0)

    @property
    def can_backdrive(self) -> bool:
        """True when a force at the output can turn the motor."""
        return not self.self_locking_stages

    def backdrive_report(self) -> tuple[str, ...]:
        """Plain sentences on back-drivability, one per stage that matters."""
        lines: list[str] = []
        low = f"{LOW_FRICTION_FACTOR * 100:.0f} % of the stated friction"
        for i, s in enumerate(self.stages):
            if isinstance(s, WormStage) and s.lead_angle_deg is None:
                lines.append(f"gear_train[{i}] (worm): no lead angle given; back-drive unknown, assumed to "
                             "back-drive (the cautious assumption for a counter that must see every motion); "
                             "give lead_angle to judge it")
            elif isinstance(s, LeadScrew) and not s.ball and s.mean_diameter_mm is None:
                lines.append(f"gear_train[{i}] (lead screw): no mean diameter given; back-drive unknown, "
                             "assumed to back-drive (the cautious assumption for a counter that must see every "
                             "motion); give diameter to judge it")
            elif _backdrive_judged(s) <= 0:
                lines.append(f"gear_train[{i}] ({s.kind}): self-locking, judged at {low} (back-drive "
                             f"efficiency {_backdrive_judged(s):.2f} there); vibration can still creep it")
            elif isinstance(s, (WormStage, LeadScrew)):
                locked = s.backdrive_efficiency <= 0
                lines.append(f"gear_train[{i}] ({s.kind}): back-drives at {low} (efficiency "
                             f"{_backdrive_judged(s):.2f})" + ("; it locks only at the stated friction, "
                                                                "which is too close to count on" if locked else ""))
        return tuple(lines)

    # -- algebra -----------------------------------------------------------
    def then(self, other: "GearTrain") -> "GearTrain":
        """This train followed by ``other`` (composition)."""
        return GearTrain(self.stages + other.stages)

    def reversed(self) -> "GearTrain":
        """The train driven from its output (rotary trains only).

        Its ratio is the inverse of this train's.
        """
        if self.is_linear:
            raise DesignValueError("gear_train", self.stages[-1].kind,
                                   "a rotary train to reverse: a linear output cannot drive")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", TurnkitWarning)
            return GearTrain(tuple(s.reversed() for s in reversed(self.stages)))

    def describe(self) -> tuple[str, ...]:
        """One line per stage: kind, ratio, direction."""
        out = []
        for i, s in enumerate(self.stages):
            if s.output_kind == "linear":
                out.append(f"[{i}] {s.kind}: {float(s.travel_per_input_turn_mm):g} mm per turn")
            else:
                arrow = "same direction" if s.direction > 0 else "reversed"
                out.append(f"[{i}] {s.kind}: {s.reduction} ({float(s.reduction):.4g}:1), {arrow}")
        return tuple(out)


def _backdrive_judged(stage) -> float:
    """A stage's back-drive efficiency as the train judges it (low friction for worms and sliding screws)."""
    return getattr(stage, "backdrive_efficiency_at_low_friction", stage.backdrive_efficiency)
