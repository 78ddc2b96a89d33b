"""Primary cells, packs of cells, and battery life for a given average current.

The life model (kept exactly so that the symbolic design equations agree):

* usable capacity ``C_use = C_nominal * temperature_factor * usable_fraction``,
  where ``usable_fraction`` is the share of the rated capacity delivered above
  the electronics' own cut-off voltage;
* self-discharge is linear: a fraction ``s`` of the *nominal* capacity per year;
* life and self-discharge are solved together, not one after the other::

      L_years = C_use_mAh / (I_avg_mA * 8766 h/yr + s * C_nominal_mAh)

* capacity needed for a target life ``L``::

      C_nominal = I_avg_mA * 8766 * L / (temperature_factor * usable_fraction - s * L)

  which is infeasible when the denominator is <= 0 (self-discharge alone
  empties any cell of this chemistry before the target life).

A year is 365.25 days = 8766 hours (the Julian year, as pint's ``year``).

The cell table holds generic sizes only. Every value carries its source or
``(common practice)``; "typical" figures are what makers' data sheets show at
low drain and room temperature and vary by maker and lot: check the data sheet
of the cell you buy. Peukert's law is deliberately not applied: at micro-amp
averages a primary lithium cell is limited by self-discharge, passivation and
the cut-off voltage under pulses, not by rate (common practice), so pulses are
checked against the cell's pulse capability instead.

Adding a chemistry or size: append a :class:`Cell` to ``_TABLE`` with every
field filled and a source (or ``(common practice)``) for each value in
``sources``; the key must be unique, lower case, with underscores.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np

from .errors import DesignValueError, TurnkitWarning

__all__ = [
    "HOURS_PER_YEAR",
    "COIN_CELL_CAUTION",
    "BATTERY_EVENT_CAUTION",
    "Cell",
    "Pack",
    "LifeEstimate",
    "cell",
    "available_cells",
    "estimate_life",
    "life_years",
    "life_from_capacity_years",
    "capacity_needed_mAh",
    "BOLTZMANN_EV_PER_K",
    "ACTIVATION_ENERGY_EV",
    "SiteDerating",
    "self_discharge_factor",
    "annual_temperatures_C",
    "site_derating",
    "open_circuit_voltage_V",
    "internal_resistance_ohm",
    "pulse_sag_V",
    "usable_fraction_under_pulse",
    "buffer_capacitance_needed_uF",
]

#: Hours in a Julian year of 365.25 days.
HOURS_PER_YEAR = 8766.0

#: Boltzmann constant, eV/K (CODATA 2018, exact in the 2019 SI).
BOLTZMANN_EV_PER_K = 8.617333262e-5

#: Default activation energy of self-discharge, eV: the rate doubling for
#: every +10 °C near room temperature (common practice), i.e.
#: ``ln 2 * k_B / (1/293.15 K - 1/303.15 K)`` (derived, shown in docs/power.md).
ACTIVATION_ENERGY_EV = 0.531

#: Temperature at which the table's self-discharge is given, °C.
REFERENCE_TEMPERATURE_C = 20.0

COIN_CELL_CAUTION = (
    "Coin cell: keep new and used cells out of reach of children. A swallowed "
    "lithium coin cell can burn through body tissue within hours; if one may "
    "have been swallowed or placed in the body, seek medical help at once. "
    "Design the battery compartment, packaging and markings to the applicable "
    "standards and local law (for example IEC 60086-4 and, in the US, "
    "16 CFR part 1263)."
)

BATTERY_EVENT_CAUTION = (
    "A flat, removed or replaced battery loses the turn count (sometimes "
    "silently): re-home the actuator after any battery event. Life figures "
    "are design estimates; if the position feeds a safety function, assess "
    "it under the applicable functional-safety standards and licensed practice."
)

_PRIMARY_LITHIUM_CAUTION = (
    "Primary lithium cells must never be charged: protect against reverse "
    "insertion, short circuit and charging from parallel cells (common practice)."
)

_SRC_NOMINAL = (
    "IEC 60086-1 system letters and nominal voltages (seen via a national "
    "battery association summary); Linden's Handbook of Batteries, Table 4.3"
)
_SRC_CAPACITY = (
    "(from memory: typical makers' figures at low drain, 20 °C, to the stated "
    "cut-off, inside the ranges encyclopedic summaries of makers' data give; no "
    "data sheet or handbook table was at hand to check the figure itself)"
)
_SRC_CAPACITY_MEMORY = (
    "(from memory: typical makers' data at low drain, 20 °C; no data sheet or "
    "handbook table was at hand to check it)"
)
_SRC_CUTOFF = (
    "(from memory: the end voltage makers rate capacity to for this system; "
    "no data sheet or handbook table was at hand to check it)"
)
_SRC_SELF_DISCHARGE = (
    "(common practice) encyclopedia article 'Self-discharge', citing Garche "
    "et al., Encyclopedia of Electrochemical Power Sources (2013)"
)
_SRC_ACTIVATION = (
    "(common practice) self-discharge rate doubling per +10 °C near room "
    "temperature, in Arrhenius form; the activation energy is derived from "
    "that rule (derived, shown in docs/power.md)"
)
_SRC_CURRENT = (
    "(from memory: typical makers' data for this size; no data sheet was at "
    "hand to check it)"
)
_SRC_TEMPERATURE = (
    "(common practice) usable capacity falls in the cold; alkaline steeply "
    "below 0 °C; lithium systems hold up to about -20 °C or below; the points "
    "are (from memory), not read off a checked table"
)
_SRC_SHELF = (
    "(common practice; from memory: storage life makers state for the "
    "chemistry at room temperature, not checked against a data sheet)"
)
_SRC_SIZE = "IEC 60086-2 size designations (generic size name only)"
_SRC_DISCHARGE = (
    "(from memory: the shape of makers' published low-drain discharge curves "
    "at 20 °C, flat plateau for lithium systems and sloping for alkaline; no "
    "handbook table was at hand to check the points, so treat them as shape only)"
)
_SRC_RESISTANCE = (
    "(from memory: the order of magnitude of makers' internal-resistance "
    "figures for this size, rising several-fold from 20 °C to -20 °C; no "
    "handbook table was at hand to check the points)"
)


def _check_positive(field_name: str, value: float, unit: str) -> None:
    if not (isinstance(value, (int, float)) and not isinstance(value, bool)
            and math.isfinite(value) and value > 0):
        raise DesignValueError(field_name, value, "a finite number > 0", unit=unit)


def _checked_discharge_curve(c) -> tuple[tuple[float, float], ...]:
    curve = tuple((float(d), float(v)) for d, v in c.discharge_curve)
    if not curve:
        return curve
    depths = [d for d, _ in curve]
    volts = [v for _, v in curve]
    if (len(curve) < 2 or depths[0] != 0.0 or depths[-1] != 1.0
            or any(b <= a for a, b in zip(depths, depths[1:]))):
        raise DesignValueError("Cell.discharge_curve", c.discharge_curve,
                               "(depth of discharge, V) points from 0 to 1, strictly increasing")
    if any(b > a for a, b in zip(volts, volts[1:])) or not all(math.isfinite(v) and v > 0 for v in volts):
        raise DesignValueError("Cell.discharge_curve", c.discharge_curve,
                               "voltages > 0 that never rise as the cell discharges", unit="V")
    if volts[-1] > c.cutoff_voltage_V + 1e-9:
        raise DesignValueError("Cell.discharge_curve", volts[-1],
                               f"ending at or below the cut-off ({c.cutoff_voltage_V} V)", unit="V")
    return curve


def _checked_resistance_curve(c) -> tuple[tuple[float, float], ...]:
    curve = tuple((float(t), float(r)) for t, r in c.resistance_curve)
    if not curve:
        return curve
    temps = [t for t, _ in curve]
    if any(b <= a for a, b in zip(temps, temps[1:])) or not all(
            math.isfinite(t) and math.isfinite(r) and r >= 0 for t, r in curve):
        raise DesignValueError("Cell.resistance_curve", c.resistance_curve,
                               "(temperature °C, resistance >= 0 ohm) points, strictly increasing "
                               "in temperature")
    return curve


@dataclass(frozen=True, slots=True)
class Cell:
    """One primary cell: a table entry or the user's own numbers.

    Parameters
    ----------
    key : str
        Short identifier, lower case with underscores (``"li_socl2_aa"``).
    name : str
        Readable name: chemistry and generic size.
    chemistry : str
        Electrochemical system in words (``"lithium thionyl chloride"``).
    size : str
        Generic size name (``"AA"``, ``"2032 coin"``).
    nominal_voltage_V : float
        Nominal voltage of one cell, V.
    capacity_mAh : float
        Typical capacity at low drain and 20 °C to ``cutoff_voltage_V``, mAh.
    self_discharge_per_year : float
        Linear loss per year as a fraction of the nominal capacity, in [0, 1).
    max_pulse_mA : float
        Recommended largest pulse current, mA.
    max_continuous_mA : float
        Recommended largest continuous current, mA.
    shelf_life_years : float
        Storage life the chemistry's data support, years.
    temperature_curve : tuple of (float, float)
        ``(temperature_C, capacity_factor)`` points, strictly increasing in
        temperature, interpolated linearly; outside the first and last point
        the cell is outside its operating range.
    cutoff_voltage_V : float
        Cut-off voltage per cell at which ``capacity_mAh`` is rated, V.
    rating_condition : str
        In words, the drain at which the capacity is rated.
    is_coin : bool
        True for coin (button) cells; these carry the ingestion caution.
    is_lithium : bool
        True for primary lithium systems (never charge).
    sources : tuple of (str, str)
        ``(field, source)`` for each value.
    notes : str
        Anything a designer should know about this cell.
    discharge_curve : tuple of (float, float)
        ``(depth_of_discharge, voltage_V)`` points of one cell at low drain,
        depth of discharge from 0 (fresh) to 1 (the rated capacity
        delivered), voltage falling; the last point is at or below
        ``cutoff_voltage_V``. Empty when unknown (then the usable share
        above a higher cut-off falls linearly, a cautious stand-in).
    resistance_curve : tuple of (float, float)
        ``(temperature_C, resistance_ohm)`` points of one cell's internal
        resistance, strictly increasing in temperature, interpolated
        linearly and held flat outside. Empty when unknown (pulse sag is
        then not checked).
    self_discharge_activation_eV : float
        Activation energy of the self-discharge, eV, for the Arrhenius
        temperature factor (see :func:`self_discharge_factor`).
    """

    key: str
    name: str
    chemistry: str
    size: str
    nominal_voltage_V: float
    capacity_mAh: float
    self_discharge_per_year: float
    max_pulse_mA: float
    max_continuous_mA: float
    shelf_life_years: float
    temperature_curve: tuple[tuple[float, float], ...]
    cutoff_voltage_V: float
    rating_condition: str = ""
    is_coin: bool = False
    is_lithium: bool = False
    sources: tuple[tuple[str, str], ...] = ()
    notes: str = ""
    discharge_curve: tuple[tuple[float, float], ...] = ()
    resistance_curve: tuple[tuple[float, float], ...] = ()
    self_discharge_activation_eV: float = ACTIVATION_ENERGY_EV

    def __post_init__(self) -> None:
        for name in ("key", "name", "chemistry", "size"):
            value = getattr(self, name)
            if not isinstance(value, str) or not value.strip():
                raise DesignValueError(f"Cell.{name}", value, "a non-empty string")
        _check_positive("Cell.nominal_voltage_V", self.nominal_voltage_V, "V")
        _check_positive("Cell.capacity_mAh", self.capacity_mAh, "mAh")
        _check_positive("Cell.max_pulse_mA", self.max_pulse_mA, "mA")
        _check_positive("Cell.max_continuous_mA", self.max_continuous_mA, "mA")
        _check_positive("Cell.shelf_life_years", self.shelf_life_years, "years")
        _check_positive("Cell.cutoff_voltage_V", self.cutoff_voltage_V, "V")
        s = self.self_discharge_per_year
        if not (isinstance(s, (int, float)) and math.isfinite(s) and 0 <= s < 1):
            raise DesignValueError("Cell.self_discharge_per_year", s, "in [0, 1)",
                                   unit="1/year", hint="give 2 %/year as 0.02")
        if self.max_pulse_mA < self.max_continuous_mA:
            raise DesignValueError(
                "Cell.max_pulse_mA", self.max_pulse_mA,
                f">= max_continuous_mA ({self.max_continuous_mA} mA)", unit="mA")
        if self.cutoff_voltage_V >= self.nominal_voltage_V:
            raise DesignValueError(
                "Cell.cutoff_voltage_V", self.cutoff_voltage_V,
                f"below the nominal voltage ({self.nominal_voltage_V} V)", unit="V")
        curve = tuple((float(t), float(f)) for t, f in self.temperature_curve)
        if len(curve) < 2:
            raise DesignValueError("Cell.temperature_curve", self.temperature_curve,
                                   "at least two (temperature_C, factor) points")
        temps = [t for t, _ in curve]
        if any(b <= a for a, b in zip(temps, temps[1:])) or not all(map(math.isfinite, temps)):
            raise DesignValueError("Cell.temperature_curve", self.temperature_curve,
                                   "points strictly increasing in temperature", unit="°C")
        if not all(math.isfinite(f) and 0 <= f <= 1.2 for _, f in curve):
            raise DesignValueError("Cell.temperature_curve", self.temperature_curve,
                                   "capacity factors in [0, 1.2]")
        object.__setattr__(self, "temperature_curve", curve)
        object.__setattr__(self, "sources", tuple((str(a), str(b)) for a, b in self.sources))
        object.__setattr__(self, "discharge_curve", _checked_discharge_curve(self))
        object.__setattr__(self, "resistance_curve", _checked_resistance_curve(self))
        _check_positive("Cell.self_discharge_activation_eV", self.self_discharge_activation_eV, "eV")

    @classmethod
    def custom(
        cls,
        name: str,
        *,
        nominal_voltage_V: float,
        capacity_mAh: float,
        self_discharge_per_year: float,
        max_pulse_mA: float,
        max_continuous_mA: float,
        shelf_life_years: float,
        cutoff_voltage_V: float,
        temperature_curve: tuple[tuple[float, float], ...] = ((-20.0, 1.0), (60.0, 1.0)),
        chemistry: str = "user-defined",
        size: str = "user-defined",
        is_coin: bool = False,
        is_lithium: bool = False,
        notes: str = "",
        discharge_curve: tuple[tuple[float, float], ...] = (),
        resistance_curve: tuple[tuple[float, float], ...] = (),
    ) -> "Cell":
        """A cell from the user's own numbers (e.g. from a data sheet).

        The default temperature curve is flat (factor 1.0) from -20 °C to
        60 °C; give the cell's own curve when it is known. All values are
        recorded with the source ``"user data"``.
        """
        key = "user_" + "_".join(name.lower().split()) if isinstance(name, str) else name
        return cls(
            key=key, name=name, chemistry=chemistry, size=size,
            nominal_voltage_V=nominal_voltage_V, capacity_mAh=capacity_mAh,
            self_discharge_per_year=self_discharge_per_year, max_pulse_mA=max_pulse_mA,
            max_continuous_mA=max_continuous_mA, shelf_life_years=shelf_life_years,
            temperature_curve=temperature_curve, cutoff_voltage_V=cutoff_voltage_V,
            rating_condition="as given by the user", is_coin=is_coin, is_lithium=is_lithium,
            sources=(("all", "user data"),), notes=notes,
            discharge_curve=discharge_curve, resistance_curve=resistance_curve,
        )

    # The Cell and Pack share this interface so life functions take either.
    @property
    def cell(self) -> "Cell":
        """The cell itself (a single cell is a 1S1P pack)."""
        return self

    @property
    def series(self) -> int:
        return 1

    @property
    def parallel(self) -> int:
        return 1

    @property
    def operating_range_C(self) -> tuple[float, float]:
        """Lowest and highest temperature of the capacity curve, °C."""
        return self.temperature_curve[0][0], self.temperature_curve[-1][0]

    def temperature_factor(self, temperature_C):
        """Capacity factor at ``temperature_C`` (°C), linear between points.

        Accepts a float or an array. Raises :class:`DesignValueError` outside
        the operating range of the curve.
        """
        low, high = self.operating_range_C
        if type(temperature_C) in (float, int) and low <= temperature_C <= high:
            # One plain number inside the range (what sizing asks): no array checks needed.
            temps, factors = zip(*self.temperature_curve)
            return float(np.interp(float(temperature_C), temps, factors))
        t = np.asarray(temperature_C, dtype=float)
        if not np.all(np.isfinite(t)) or np.any(t < low) or np.any(t > high):
            bad = t[(t < low) | (t > high) | ~np.isfinite(t)] if t.ndim else t
            raise DesignValueError(
                "temperature_C", float(np.ravel(bad)[0]), f"in [{low:g}, {high:g}]",
                unit="°C", hint=f"that is the operating range of the {self.name}")
        temps, factors = zip(*self.temperature_curve)
        out = np.interp(t, temps, factors)
        return float(out) if out.ndim == 0 else out

    @property
    def cautions(self) -> tuple[str, ...]:
        """Safety cautions for this cell."""
        out = [BATTERY_EVENT_CAUTION]
        if self.is_coin:
            out.append(COIN_CELL_CAUTION)
        if self.is_lithium:
            out.append(_PRIMARY_LITHIUM_CAUTION)
        return tuple(out)

    def source_of(self, field_name: str) -> str:
        """The recorded source of one value (or of ``"all"`` for user cells)."""
        for name, text in self.sources:
            if name in (field_name, "all"):
                return text
        raise DesignValueError("field_name", field_name,
                               "one of " + ", ".join(n for n, _ in self.sources))


@dataclass(frozen=True, slots=True)
class Pack:
    """Identical cells, ``series`` in series times ``parallel`` in parallel.

    Voltage and cut-off scale with ``series``; capacity and current limits
    with ``parallel``. Self-discharge (a fraction), temperature behaviour and
    shelf life are the cell's.
    """

    cell: Cell
    series: int = 1
    parallel: int = 1

    def __post_init__(self) -> None:
        if not isinstance(self.cell, Cell):
            raise DesignValueError("Pack.cell", self.cell, "a turnkit.battery.Cell")
        for name in ("series", "parallel"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, int) or value < 1:
                raise DesignValueError(f"Pack.{name}", value, "an integer >= 1")

    @property
    def name(self) -> str:
        return f"{self.series}S{self.parallel}P {self.cell.name}"

    @property
    def key(self) -> str:
        return f"{self.cell.key}_{self.series}s{self.parallel}p"

    @property
    def nominal_voltage_V(self) -> float:
        return self.series * self.cell.nominal_voltage_V

    @property
    def cutoff_voltage_V(self) -> float:
        return self.series * self.cell.cutoff_voltage_V

    @property
    def capacity_mAh(self) -> float:
        return self.parallel * self.cell.capacity_mAh

    @property
    def max_pulse_mA(self) -> float:
        return self.parallel * self.cell.max_pulse_mA

    @property
    def max_continuous_mA(self) -> float:
        return self.parallel * self.cell.max_continuous_mA

    @property
    def self_discharge_per_year(self) -> float:
        return self.cell.self_discharge_per_year

    @property
    def shelf_life_years(self) -> float:
        return self.cell.shelf_life_years

    @property
    def is_coin(self) -> bool:
        return self.cell.is_coin

    @property
    def operating_range_C(self) -> tuple[float, float]:
        return self.cell.operating_range_C

    def temperature_factor(self, temperature_C):
        """Capacity factor at ``temperature_C`` (°C); see :meth:`Cell.temperature_factor`."""
        return self.cell.temperature_factor(temperature_C)

    @property
    def cautions(self) -> tuple[str, ...]:
        out = list(self.cell.cautions)
        if self.series > 1 or self.parallel > 1:
            out.append("Use cells of one type and lot, all new; never mix used and new "
                       "cells in a pack (common practice).")
        if self.parallel > 1 and self.cell.is_lithium:
            out.append("Parallel strings of primary lithium cells need a blocking diode "
                       "per string so that no cell charges another (common practice).")
        return tuple(out)


def _cell(key, name, chemistry, size, v, cap, s, pulse, cont, shelf, curve, cutoff,
          rating, *, coin=False, lithium=False, capacity_src=_SRC_CAPACITY, notes="",
          discharge=(), resistance=()):
    return Cell(
        key=key, name=name, chemistry=chemistry, size=size, nominal_voltage_V=v,
        capacity_mAh=cap, self_discharge_per_year=s, max_pulse_mA=pulse,
        max_continuous_mA=cont, shelf_life_years=shelf, temperature_curve=curve,
        cutoff_voltage_V=cutoff, rating_condition=rating, is_coin=coin, is_lithium=lithium,
        sources=(
            ("size", _SRC_SIZE),
            ("nominal_voltage_V", _SRC_NOMINAL),
            ("capacity_mAh", capacity_src),
            ("cutoff_voltage_V", _SRC_CUTOFF),
            ("self_discharge_per_year", _SRC_SELF_DISCHARGE),
            ("self_discharge_activation_eV", _SRC_ACTIVATION),
            ("max_pulse_mA", _SRC_CURRENT),
            ("max_continuous_mA", _SRC_CURRENT),
            ("temperature_curve", _SRC_TEMPERATURE),
            ("shelf_life_years", _SRC_SHELF),
            ("discharge_curve", _SRC_DISCHARGE),
            ("resistance_curve", _SRC_RESISTANCE),
        ),
        notes=notes, discharge_curve=discharge, resistance_curve=resistance,
    )


# Capacity-vs-temperature points (°C, factor) at low drain, (common practice).
_ALKALINE_T = ((-20.0, 0.15), (-10.0, 0.35), (0.0, 0.6), (10.0, 0.85), (20.0, 1.0),
               (40.0, 1.0), (55.0, 0.95))
_LIFES2_T = ((-40.0, 0.6), (-20.0, 0.8), (0.0, 0.95), (20.0, 1.0), (60.0, 1.0))
_COIN_T = ((-20.0, 0.7), (0.0, 0.9), (20.0, 1.0), (60.0, 1.0), (70.0, 0.95))
_CYL_T = ((-40.0, 0.5), (-20.0, 0.8), (0.0, 0.95), (20.0, 1.0), (70.0, 1.0))
_BOBBIN_T = ((-55.0, 0.35), (-40.0, 0.5), (-20.0, 0.75), (0.0, 0.9), (20.0, 1.0),
             (60.0, 1.0), (85.0, 0.9))

# Low-drain voltage of one cell against depth of discharge (0 fresh .. 1 rated
# capacity delivered), 20 °C: (from memory), see _SRC_DISCHARGE. Alkaline slopes
# the whole way; the lithium systems hold a plateau and fall only at the end.
_ALKALINE_V = ((0.0, 1.58), (0.1, 1.42), (0.3, 1.32), (0.5, 1.24), (0.7, 1.16), (0.85, 1.08),
               (0.95, 1.0), (1.0, 0.9))
_LIFES2_V = ((0.0, 1.78), (0.03, 1.6), (0.2, 1.52), (0.5, 1.48), (0.8, 1.42), (0.93, 1.32),
             (0.98, 1.15), (1.0, 0.9))
_LIMNO2_V = ((0.0, 3.2), (0.05, 3.0), (0.3, 2.92), (0.6, 2.85), (0.85, 2.75), (0.93, 2.6),
             (0.98, 2.3), (1.0, 2.0))
_LISOCL2_V = ((0.0, 3.67), (0.05, 3.6), (0.4, 3.55), (0.75, 3.45), (0.9, 3.35), (0.95, 3.15),
              (0.97, 3.0), (1.0, 2.0))

# Internal resistance of one cell against temperature, (°C, ohm): (from memory),
# see _SRC_RESISTANCE.
_ALKALINE_AA_R = ((-20.0, 0.9), (0.0, 0.35), (20.0, 0.15), (55.0, 0.12))
_ALKALINE_AAA_R = ((-20.0, 1.5), (0.0, 0.6), (20.0, 0.25), (55.0, 0.2))
_LIFES2_R = ((-40.0, 0.6), (-20.0, 0.35), (0.0, 0.2), (20.0, 0.12), (60.0, 0.1))
_COIN_R = ((-20.0, 60.0), (0.0, 30.0), (20.0, 15.0), (70.0, 10.0))
_CYL_R = ((-40.0, 2.0), (-20.0, 0.8), (0.0, 0.45), (20.0, 0.3), (70.0, 0.2))
_BOBBIN_AA_R = ((-55.0, 80.0), (-40.0, 45.0), (-20.0, 22.0), (0.0, 12.0), (20.0, 8.0),
                (60.0, 5.0), (85.0, 4.0))
_BOBBIN_C_R = tuple((t, r / 2.5) for t, r in _BOBBIN_AA_R)
_BOBBIN_D_R = tuple((t, r / 3.5) for t, r in _BOBBIN_AA_R)

_LOW_DRAIN = "low drain (about 1 mA or less continuous), 20 °C"

_TABLE: tuple[Cell, ...] = (
    _cell("alkaline_aa", "alkaline AA", "alkaline zinc-manganese dioxide", "AA",
          1.5, 2500.0, 0.025, 1500.0, 500.0, 5.0, _ALKALINE_T, 0.9, _LOW_DRAIN,
          notes="Capacity falls steeply below 0 °C; leaks when deeply discharged.",
          discharge=_ALKALINE_V, resistance=_ALKALINE_AA_R),
    _cell("alkaline_aaa", "alkaline AAA", "alkaline zinc-manganese dioxide", "AAA",
          1.5, 1100.0, 0.025, 1000.0, 300.0, 5.0, _ALKALINE_T, 0.9, _LOW_DRAIN,
          capacity_src=_SRC_CAPACITY_MEMORY, discharge=_ALKALINE_V, resistance=_ALKALINE_AAA_R),
    _cell("li_fes2_aa", "lithium iron disulfide AA", "lithium iron disulfide", "AA",
          1.5, 3000.0, 0.01, 3000.0, 2000.0, 15.0, _LIFES2_T, 0.9, _LOW_DRAIN,
          lithium=True, capacity_src=_SRC_CAPACITY_MEMORY, discharge=_LIFES2_V,
          resistance=_LIFES2_R),
    _cell("li_mno2_2032", "lithium manganese dioxide 2032 coin",
          "lithium manganese dioxide", "2032 coin", 3.0, 225.0, 0.01, 15.0, 3.0, 10.0,
          _COIN_T, 2.0, "about 0.2 mA continuous, 20 °C", coin=True, lithium=True,
          notes="High internal resistance: pulses of a few mA sag the voltage; "
                "a buffer capacitor helps (common practice).",
          discharge=_LIMNO2_V, resistance=_COIN_R),
    _cell("li_mno2_2_3a", "lithium manganese dioxide 2/3A cylinder",
          "lithium manganese dioxide", "2/3A", 3.0, 1400.0, 0.01, 3000.0, 1500.0, 10.0,
          _CYL_T, 2.0, _LOW_DRAIN, lithium=True, capacity_src=_SRC_CAPACITY_MEMORY,
          discharge=_LIMNO2_V, resistance=_CYL_R),
    _cell("li_mno2_123", "lithium manganese dioxide 123 cylinder",
          "lithium manganese dioxide", "123", 3.0, 1500.0, 0.01, 3000.0, 1500.0, 10.0,
          _CYL_T, 2.0, _LOW_DRAIN, lithium=True, discharge=_LIMNO2_V, resistance=_CYL_R),
    _cell("li_socl2_aa", "lithium thionyl chloride bobbin AA",
          "lithium thionyl chloride", "AA", 3.6, 2600.0, 0.01, 150.0, 100.0, 20.0,
          _BOBBIN_T, 2.0, _LOW_DRAIN, lithium=True,
          notes="Bobbin cells passivate in storage: the first pulse after a rest "
                "can sag (voltage delay); low pulse capability (common practice).",
          discharge=_LISOCL2_V, resistance=_BOBBIN_AA_R),
    _cell("li_socl2_c", "lithium thionyl chloride bobbin C",
          "lithium thionyl chloride", "C", 3.6, 8500.0, 0.01, 300.0, 150.0, 20.0,
          _BOBBIN_T, 2.0, _LOW_DRAIN, lithium=True, capacity_src=_SRC_CAPACITY_MEMORY,
          notes="Bobbin cells passivate in storage (voltage delay) (common practice).",
          discharge=_LISOCL2_V, resistance=_BOBBIN_C_R),
    _cell("li_socl2_d", "lithium thionyl chloride bobbin D",
          "lithium thionyl chloride", "D", 3.6, 19000.0, 0.01, 400.0, 250.0, 20.0,
          _BOBBIN_T, 2.0, _LOW_DRAIN, lithium=True, capacity_src=_SRC_CAPACITY_MEMORY,
          notes="Bobbin cells passivate in storage (voltage delay) (common practice).",
          discharge=_LISOCL2_V, resistance=_BOBBIN_D_R),
)

_CELLS: dict[str, Cell] = {c.key: c for c in _TABLE}


def available_cells() -> tuple[str, ...]:
    """Keys of the cells in the built-in table."""
    return tuple(_CELLS)


def cell(key: str) -> Cell:
    """Look up a built-in cell by key (see :func:`available_cells`)."""
    try:
        return _CELLS[key]
    except (KeyError, TypeError):
        raise DesignValueError("cell", key, "one of " + ", ".join(_CELLS)) from None


def life_from_capacity_years(usable_capacity_mAh, nominal_capacity_mAh,
                             self_discharge_per_year, average_current_uA):
    """The life equation itself, vectorised.

    ``L = C_use / (I_avg_mA * 8766 + s * C_nominal)`` in years. Returns
    ``inf`` where both the load and the self-discharge are zero.
    """
    c_use = np.asarray(usable_capacity_mAh, dtype=float)
    c_nom = np.asarray(nominal_capacity_mAh, dtype=float)
    s = np.asarray(self_discharge_per_year, dtype=float)
    i_mA = np.asarray(average_current_uA, dtype=float) * 1e-3
    drain_mAh_per_year = i_mA * HOURS_PER_YEAR + s * c_nom
    with np.errstate(divide="ignore", over="ignore"):
        out = np.where(drain_mAh_per_year > 0, c_use / np.where(drain_mAh_per_year > 0,
                                                                   drain_mAh_per_year, 1.0),
                       np.inf)
    return float(out) if out.ndim == 0 else out


@dataclass(frozen=True, slots=True)
class LifeEstimate:
    """Battery life for one average current, with the derating shown.

    Attributes
    ----------
    life_years : float
        Service life, years (8766 h each).
    average_current_uA : float
        Average load current, µA.
    nominal_capacity_mAh, usable_capacity_mAh : float
        Rated and usable capacity, mAh.
    temperature_factor, usable_fraction, self_discharge_per_year : float
        The derating factors used.
    drawn_by_load_mAh, lost_to_self_discharge_mAh : float
        Where the usable capacity goes over the life; they add up to
        ``usable_capacity_mAh``.
    shelf_life_years : float
        The chemistry's shelf life, years.
    warnings : tuple of str
        Findings that deserve a second look (pulse over the cell's limit,
        life beyond shelf life, hot site).
    cautions : tuple of str
        Safety cautions (battery events, coin-cell ingestion, lithium).
    """

    life_years: float
    average_current_uA: float
    nominal_capacity_mAh: float
    usable_capacity_mAh: float
    temperature_factor: float
    usable_fraction: float
    self_discharge_per_year: float
    drawn_by_load_mAh: float
    lost_to_self_discharge_mAh: float
    shelf_life_years: float
    warnings: tuple[str, ...] = field(default=())
    cautions: tuple[str, ...] = field(default=())


def _check_fraction(name: str, value, *, allow_zero: bool = False) -> float:
    v = np.asarray(value, dtype=float)
    low_ok = (v >= 0) if allow_zero else (v > 0)
    if not np.all(np.isfinite(v) & low_ok & (v <= 1)):
        shown = float(np.ravel(v)[0]) if v.ndim == 0 else value
        raise DesignValueError(name, shown, "in [0, 1]" if allow_zero else "in (0, 1]")
    return value


def _derating(battery, temperature_C, usable_fraction, temperature_factor,
              self_discharge_per_year):
    if not isinstance(battery, (Cell, Pack)):
        raise DesignValueError("battery", battery, "a turnkit.battery.Cell or Pack")
    # 0 is allowed: a cell that browns out under its pulses from the start delivers nothing.
    _check_fraction("usable_fraction", usable_fraction, allow_zero=True)
    if temperature_factor is None:
        tf = battery.temperature_factor(temperature_C)
    else:
        tf = temperature_factor
        tv = np.asarray(tf, dtype=float)
        if not np.all(np.isfinite(tv) & (tv > 0) & (tv <= 1.2)):
            raise DesignValueError("temperature_factor", temperature_factor, "in (0, 1.2]")
    if self_discharge_per_year is None:
        s = battery.self_discharge_per_year
    else:
        s = self_discharge_per_year
        if not (math.isfinite(s) and 0 <= s < 1):
            raise DesignValueError("self_discharge_per_year", s, "in [0, 1)", unit="1/year")
    return tf, s


def _check_current(average_current_uA) -> np.ndarray:
    i = np.asarray(average_current_uA, dtype=float)
    if not np.all(np.isfinite(i) & (i >= 0)):
        bad = np.ravel(i[~(np.isfinite(i) & (i >= 0))])[0] if i.ndim else float(i)
        raise DesignValueError("average_current_uA", float(bad), "a finite number >= 0",
                               unit="uA")
    return i


def _warnings_for(battery, life, i_uA, peak_current_mA, temperature_C,
                  self_discharge_given) -> list[str]:
    out: list[str] = []
    if peak_current_mA is not None:
        _check_current(peak_current_mA)
        if peak_current_mA > battery.max_pulse_mA:
            out.append(
                f"The wake pulse of {peak_current_mA:.4g} mA exceeds the recommended "
                f"pulse current of the {battery.name} ({battery.max_pulse_mA:.4g} mA): the "
                "voltage may sag below the cut-off; add a buffer capacitor, cells in "
                "parallel, or a chemistry with more pulse capability.")
    i_max = float(np.max(i_uA)) if np.size(i_uA) else 0.0
    if i_max * 1e-3 > battery.max_continuous_mA:
        out.append(
            f"The average current of {i_max:.4g} uA exceeds the recommended continuous "
            f"current of the {battery.name} ({battery.max_continuous_mA:.4g} mA).")
    life_max = float(np.max(life)) if np.size(life) else 0.0
    if life_max > battery.shelf_life_years:
        out.append(
            f"The computed life of {life_max:.3g} years exceeds the {battery.shelf_life_years:g}-"
            f"year shelf life of the {battery.name}; beyond it the data do not support the "
            "estimate, so plan on the shelf life.")
    if temperature_C is not None and temperature_C > 30 and not self_discharge_given:
        out.append(
            f"At {temperature_C:g} °C self-discharge is higher than the 20 °C table value "
            "(roughly doubling per +10 °C, common practice): set self_discharge_per_year "
            "for a hot site.")
    return out


def estimate_life(
    battery: Cell | Pack,
    average_current_uA: float,
    *,
    temperature_C: float = 20.0,
    usable_fraction: float = 1.0,
    peak_current_mA: float | None = None,
    temperature_factor: float | None = None,
    self_discharge_per_year: float | None = None,
) -> LifeEstimate:
    """Battery life at one average current, with derating and warnings.

    Parameters
    ----------
    battery : Cell or Pack
        The battery.
    average_current_uA : float
        Average load current, µA (>= 0).
    temperature_C : float, optional
        Site temperature for the capacity factor, °C (default 20).
    usable_fraction : float, optional
        Share of the rated capacity delivered above the electronics' cut-off
        voltage, in (0, 1] (default 1: the electronics run down to the
        cell's rated cut-off).
    peak_current_mA : float, optional
        Largest current of the wake pulse, mA; checked against the pulse
        capability.
    temperature_factor : float, optional
        Override the table's capacity factor at ``temperature_C``.
    self_discharge_per_year : float, optional
        Override the table's self-discharge fraction per year.

    Returns
    -------
    LifeEstimate
        Life with the derating shown; warnings are returned as strings, not
        issued (see :func:`life_years` for the issuing variant).
    """
    i = float(_check_current(average_current_uA))
    tf, s = _derating(battery, temperature_C, usable_fraction, temperature_factor,
                      self_discharge_per_year)
    c_nom = battery.capacity_mAh
    c_use = c_nom * float(tf) * float(usable_fraction)
    life = life_from_capacity_years(c_use, c_nom, s, i)
    drawn = i * 1e-3 * HOURS_PER_YEAR * life if math.isfinite(life) else c_use
    lost = s * c_nom * life if math.isfinite(life) else 0.0
    warn = _warnings_for(battery, life, i, peak_current_mA,
                         None if temperature_factor is not None else temperature_C,
                         self_discharge_per_year is not None)
    return LifeEstimate(
        life_years=life, average_current_uA=i, nominal_capacity_mAh=c_nom,
        usable_capacity_mAh=c_use, temperature_factor=float(tf),
        usable_fraction=float(usable_fraction), self_discharge_per_year=float(s),
        drawn_by_load_mAh=drawn, lost_to_self_discharge_mAh=lost,
        shelf_life_years=battery.shelf_life_years, warnings=tuple(warn),
        cautions=battery.cautions,
    )


def life_years(
    battery: Cell | Pack,
    average_current_uA,
    *,
    temperature_C: float = 20.0,
    usable_fraction: float = 1.0,
    peak_current_mA: float | None = None,
    temperature_factor: float | None = None,
    self_discharge_per_year: float | None = None,
    warn: bool = True,
):
    """Battery life in years; vectorised over ``average_current_uA``.

    Same parameters as :func:`estimate_life`. Findings (pulse over the
    cell's limit, life beyond shelf life) are issued as
    :class:`turnkit.errors.TurnkitWarning` unless ``warn`` is False.

    Returns
    -------
    float or numpy.ndarray
        ``C_use / (I_avg_mA * 8766 + s * C_nominal)``, years.

    Examples
    --------
    >>> from turnkit.battery import Cell, life_years
    >>> coin = Cell.custom("test coin", nominal_voltage_V=3.0, capacity_mAh=225.0,
    ...     self_discharge_per_year=0.0, max_pulse_mA=15.0, max_continuous_mA=3.0,
    ...     shelf_life_years=10.0, cutoff_voltage_V=2.0)
    >>> round(life_years(coin, 10.0), 4)
    2.5667
    """
    i = _check_current(average_current_uA)
    tf, s = _derating(battery, temperature_C, usable_fraction, temperature_factor,
                      self_discharge_per_year)
    c_nom = battery.capacity_mAh
    life = life_from_capacity_years(c_nom * np.asarray(tf) * usable_fraction, c_nom, s, i)
    if warn:
        for text in _warnings_for(battery, life, i, peak_current_mA,
                                  None if temperature_factor is not None else temperature_C,
                                  self_discharge_per_year is not None):
            warnings.warn(text, TurnkitWarning, stacklevel=2)
    return life


def capacity_needed_mAh(
    average_current_uA,
    target_life_years,
    battery: Cell | Pack | None = None,
    *,
    temperature_C: float = 20.0,
    usable_fraction: float = 1.0,
    temperature_factor: float | None = None,
    self_discharge_per_year: float | None = None,
):
    """Nominal capacity needed to last ``target_life_years``; vectorised.

    ``C_nominal = I_avg_mA * 8766 * L / (temperature_factor * usable_fraction - s * L)``.

    Parameters
    ----------
    average_current_uA : float or array
        Average load current, µA.
    target_life_years : float or array
        Required life, years (> 0).
    battery : Cell or Pack, optional
        Supplies the chemistry's self-discharge and temperature factor; its
        own capacity is not used. Without it, give ``self_discharge_per_year``
        (and ``temperature_factor`` unless 1.0 applies).
    temperature_C, usable_fraction, temperature_factor, self_discharge_per_year
        As in :func:`estimate_life`.

    Returns
    -------
    float or numpy.ndarray
        Nominal capacity, mAh.

    Raises
    ------
    DesignValueError
        When the target is infeasible: self-discharge alone would use up the
        derated capacity before the target life, whatever the capacity.
    """
    i = _check_current(average_current_uA)
    life = np.asarray(target_life_years, dtype=float)
    if not np.all(np.isfinite(life) & (life > 0)):
        raise DesignValueError("target_life_years", target_life_years, "a finite number > 0",
                               unit="years")
    if battery is None:
        if self_discharge_per_year is None:
            raise DesignValueError(
                "self_discharge_per_year", None, "a fraction in [0, 1) per year",
                hint="give a battery or the chemistry's self-discharge fraction")
        _check_fraction("usable_fraction", usable_fraction)
        tf = 1.0 if temperature_factor is None else temperature_factor
        if not (math.isfinite(tf) and 0 < tf <= 1.2):
            raise DesignValueError("temperature_factor", tf, "in (0, 1.2]")
        s = self_discharge_per_year
        if not (math.isfinite(s) and 0 <= s < 1):
            raise DesignValueError("self_discharge_per_year", s, "in [0, 1)", unit="1/year")
    else:
        tf, s = _derating(battery, temperature_C, usable_fraction, temperature_factor,
                          self_discharge_per_year)
    denominator = np.asarray(tf, dtype=float) * usable_fraction - s * life
    if np.any(denominator <= 0):
        limit = float(np.min(np.asarray(tf, dtype=float) * usable_fraction / s))
        raise DesignValueError(
            "target_life_years", float(np.max(life)), f"below {limit:.4g}", unit="years",
            hint=(f"Infeasible: with {s:.3g} of the capacity lost to self-discharge each "
                  f"year and {float(np.min(tf)) * usable_fraction:.3g} of it usable, no "
                  "capacity of this chemistry lasts that long; shorten the target life or "
                  "choose a chemistry with lower self-discharge"))
    out = i * 1e-3 * HOURS_PER_YEAR * life / denominator
    return float(out) if np.ndim(out) == 0 else out


# ---------------------------------------------------------------- site temperature


def self_discharge_factor(temperature_C, activation_eV: float = ACTIVATION_ENERGY_EV,
                          reference_C: float = REFERENCE_TEMPERATURE_C):
    """Arrhenius factor of the self-discharge rate against the 20 °C rate; vectorised.

    ``exp(Ea / k_B * (1/T_ref - 1/T))`` with absolute temperatures.

    Parameters
    ----------
    temperature_C : float or array
        Cell temperature, °C (above -273.15).
    activation_eV : float
        Activation energy, eV.
    reference_C : float
        Temperature at which the factor is 1, °C.

    Returns
    -------
    float or numpy.ndarray
        Rate at ``temperature_C`` divided by the rate at ``reference_C``.

    References
    ----------
    S. Arrhenius, Z. Phys. Chem. 4, 226 (1889). The default activation energy
    turns the common-practice rule "doubling per +10 °C near room temperature"
    into this form (derived, shown in docs/power.md).

    Examples
    --------
    >>> round(self_discharge_factor(30.0), 3)
    2.0
    """
    t = np.asarray(temperature_C, dtype=float) + 273.15
    if not np.all(np.isfinite(t) & (t > 0)):
        raise DesignValueError("temperature_C", temperature_C, "a finite temperature above -273.15",
                               unit="°C")
    out = np.exp(activation_eV / BOLTZMANN_EV_PER_K * (1.0 / (reference_C + 273.15) - 1.0 / t))
    return float(out) if out.ndim == 0 else out


def annual_temperatures_C(minimum_C: float, maximum_C: float, points: int = 365) -> np.ndarray:
    """A year of site temperatures swinging as a sine between a minimum and a maximum, °C.

    ``T(d) = mean + half_swing * cos(2 pi (d + 1/2) / points)`` for ``d = 0 ..
    points-1`` (evenly spaced over the year; only the spread of values matters
    for the averages taken over it).
    """
    lo, hi = float(minimum_C), float(maximum_C)
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi < lo:
        raise DesignValueError("temperature_max", hi, f">= temperature_min ({lo:g} °C)", unit="°C")
    phase = 2.0 * np.pi * (np.arange(points) + 0.5) / points
    return 0.5 * (lo + hi) + 0.5 * (hi - lo) * np.cos(phase)


@dataclass(frozen=True, slots=True)
class SiteDerating:
    """What a site's temperatures do to a battery.

    Attributes
    ----------
    coldest_C, hottest_C, mean_C : float
        The site's temperature range and mean, °C.
    temperature_factor : float
        Capacity factor at the coldest temperature (the cell must deliver
        the capacity there; cautious).
    self_discharge_factor : float
        Year-mean Arrhenius factor of the self-discharge against 20 °C.
    self_discharge_per_year : float
        Table value times that factor, fraction of the nominal capacity per year.
    shelf_life_years : float
        The chemistry's 20 °C shelf life divided by the same factor when it
        exceeds 1 (the storage losses that set it speed up alike; derived,
        docs/power.md); never longer than the 20 °C figure, which is all the
        data support.
    activation_eV : float
        Activation energy used, eV.
    """

    coldest_C: float
    hottest_C: float
    mean_C: float
    temperature_factor: float
    self_discharge_factor: float
    self_discharge_per_year: float
    shelf_life_years: float
    activation_eV: float


def site_derating(battery: Cell | Pack, temperature_C: float = REFERENCE_TEMPERATURE_C, *,
                  temperature_min_C: float | None = None,
                  temperature_max_C: float | None = None) -> SiteDerating:
    """Capacity, self-discharge and shelf life of a battery at a site.

    Parameters
    ----------
    battery : Cell or Pack
    temperature_C : float
        Constant site temperature, °C (used when no range is given).
    temperature_min_C, temperature_max_C : float, optional
        The site's coldest and hottest temperatures over a year, °C; the
        year is a sine between them (both or neither).

    Returns
    -------
    SiteDerating

    Examples
    --------
    >>> from turnkit.battery import cell, site_derating
    >>> d = site_derating(cell("li_socl2_aa"), 30.0)
    >>> round(d.self_discharge_per_year, 4), round(d.shelf_life_years, 2)
    (0.02, 10.0)
    """
    if not isinstance(battery, (Cell, Pack)):
        raise DesignValueError("battery", battery, "a turnkit.battery.Cell or Pack")
    if (temperature_min_C is None) != (temperature_max_C is None):
        raise DesignValueError("temperature_min" if temperature_min_C is None else "temperature_max",
                               None, "given together with the other end of the range", unit="°C")
    if temperature_min_C is None:
        temps = np.array([float(temperature_C)])
        cold = hot = float(temperature_C)
    else:
        temps = annual_temperatures_C(temperature_min_C, temperature_max_C)
        cold, hot = float(temperature_min_C), float(temperature_max_C)
    tf = float(battery.temperature_factor(cold))
    battery.temperature_factor(hot)  # refuses a site hotter than the cell's range
    ea = battery.cell.self_discharge_activation_eV
    factor = float(np.mean(self_discharge_factor(temps, ea)))
    return SiteDerating(
        coldest_C=cold, hottest_C=hot, mean_C=float(temps.mean()), temperature_factor=tf,
        self_discharge_factor=factor,
        self_discharge_per_year=battery.self_discharge_per_year * factor,
        shelf_life_years=battery.shelf_life_years / max(factor, 1.0), activation_eV=ea)


# ---------------------------------------------------------------- discharge curve and pulses


def open_circuit_voltage_V(battery: Cell | Pack, depth_of_discharge):
    """Low-drain voltage of the battery at a depth of discharge, V; vectorised.

    The cell's ``discharge_curve`` interpolated linearly, times the cells in
    series. Without a curve, a straight line from the nominal voltage at 0
    to the rated end voltage at 1 (a stand-in).
    """
    c = battery.cell
    d = np.clip(np.asarray(depth_of_discharge, dtype=float), 0.0, 1.0)
    if c.discharge_curve:
        dod, volts = zip(*c.discharge_curve)
    else:
        dod, volts = (0.0, 1.0), (c.nominal_voltage_V, c.cutoff_voltage_V)
    out = np.interp(d, dod, volts) * battery.series
    return float(out) if out.ndim == 0 else out


def internal_resistance_ohm(battery: Cell | Pack, temperature_C):
    """Internal resistance of the battery at a temperature, ohm; vectorised.

    The cell's ``resistance_curve`` interpolated linearly (held flat beyond
    its ends), times ``series / parallel``; 0 when the curve is unknown.
    """
    c = battery.cell
    t = np.asarray(temperature_C, dtype=float)
    if not c.resistance_curve:
        out = np.zeros_like(t)
    else:
        temps, ohms = zip(*c.resistance_curve)
        out = np.interp(t, temps, ohms) * battery.series / battery.parallel
    return float(out) if out.ndim == 0 else out


def pulse_sag_V(current_mA, duration_s, resistance_ohm, buffer_uF=0.0):
    """Voltage drop at the end of a current pulse, V; vectorised.

    Without a buffer capacitor the drop is ``I * R``. A capacitor ``C`` across
    the battery supplies the pulse at first; the drop then rises as
    ``I * R * (1 - exp(-t / (R * C)))``, never more than ``I * t / C``
    (the capacitor alone carrying the whole pulse charge).

    Parameters
    ----------
    current_mA : float or array
        Pulse current, mA.
    duration_s : float or array
        Pulse length, s.
    resistance_ohm : float or array
        Battery internal resistance, ohm.
    buffer_uF : float or array
        Buffer capacitance across the battery, µF (0: none).

    Returns
    -------
    float or numpy.ndarray
        Drop below the battery's open-circuit voltage, V.

    References
    ----------
    First-order RC step response (derived, shown in docs/power.md).
    """
    if all(isinstance(x, (int, float)) for x in (current_mA, duration_s, resistance_ohm, buffer_uF)):
        # Scalars (sizing): the same formula without array overhead.
        tau = resistance_ohm * buffer_uF * 1e-6
        frac = -math.expm1(-duration_s / tau) if tau > 0 else 1.0
        return current_mA * 1e-3 * resistance_ohm * frac
    i = np.asarray(current_mA, dtype=float) * 1e-3
    t = np.asarray(duration_s, dtype=float)
    r = np.asarray(resistance_ohm, dtype=float)
    c = np.asarray(buffer_uF, dtype=float) * 1e-6
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        tau = r * c
        frac = np.where(tau > 0, -np.expm1(-t / np.where(tau > 0, tau, 1.0)), 1.0)
    out = i * r * frac
    return float(out) if out.ndim == 0 else out


def usable_fraction_under_pulse(battery: Cell | Pack, cutoff_voltage_V, pulse_sag_V_=0.0):
    """Depth of discharge at which the supply under a pulse reaches the cut-off; vectorised.

    Solves ``V_oc(D) - sag = V_cut`` for ``D`` on the battery's discharge
    curve (which never rises, so the crossing is unique); 1 when the loaded
    voltage stays above the cut-off down to the rated end, 0 when a fresh
    cell already sags below it.

    Parameters
    ----------
    battery : Cell or Pack
    cutoff_voltage_V : float or array
        Supply voltage below which the electronics stop (lose the count), V.
    pulse_sag_V_ : float or array
        Drop under the largest pulse (see :func:`pulse_sag_V`), V.

    Returns
    -------
    float or numpy.ndarray
        Share of the rated capacity delivered before the count is lost.
    """
    c = battery.cell
    if c.discharge_curve:
        dod = np.array([d for d, _ in c.discharge_curve])
        volts = np.array([v for _, v in c.discharge_curve]) * battery.series
    else:
        dod = np.array([0.0, 1.0])
        volts = np.array([c.nominal_voltage_V, c.cutoff_voltage_V]) * battery.series
    need = np.asarray(cutoff_voltage_V, dtype=float) + np.asarray(pulse_sag_V_, dtype=float)
    # np.interp wants increasing x: read the curve backwards (voltage up, depth down).
    # Flat stretches of the curve give several depths per voltage; the deepest is kept.
    v_rev, d_rev = volts[::-1], dod[::-1]
    keep = np.concatenate([[True], np.diff(v_rev) > 0])
    out = np.interp(need, v_rev[keep], d_rev[keep], left=1.0, right=0.0)
    return float(out) if out.ndim == 0 else out


def buffer_capacitance_needed_uF(current_mA, duration_s, allowed_drop_V):
    """Smallest buffer capacitor that carries a pulse alone within a voltage drop, µF.

    ``C >= I * t / dV``: the capacitor supplies the whole pulse charge, so
    the battery's own contribution is margin (cautious). ``inf`` where no
    drop is allowed.

    Examples
    --------
    10 mA for 1 ms within 0.1 V needs 100 µF:

    >>> round(buffer_capacitance_needed_uF(10.0, 1e-3, 0.1), 6)
    100.0
    """
    i = np.asarray(current_mA, dtype=float) * 1e-3
    t = np.asarray(duration_s, dtype=float)
    dv = np.asarray(allowed_drop_V, dtype=float)
    with np.errstate(divide="ignore"):
        out = np.where(dv > 0, i * t / np.where(dv > 0, dv, 1.0) * 1e6, np.inf)
    return float(out) if out.ndim == 0 else out
