"""Keeping the count through supply events: non-volatile writes, hold-up energy, power-up re-sync.

Three questions, each a check with advice computed by the same function:

* **Endurance.** How many times the count is written to non-volatile memory
  over the service life, against the memory's rated write cycles times the
  number of slots the writes are spread over (wear levelling). The strategy
  decides the writes per day: ``on_change`` writes at every quarter-turn
  step, ``periodic`` at most once per period and only when the count changed,
  ``on_brownout`` once per supply event.
* **Hold-up energy** (``on_brownout``): after the supply falls to the brown-out
  threshold V₁ the electronics keep running for the detection latency and then
  write, all from the hold-up capacitor, until the voltage may fall to the
  lowest write voltage V₂. The save fits when
  ½·C·(V₁² − V₂²) ≥ P·(t_detect + t_save) (energy in a capacitor, W = ½CV²).
* **Re-sync at power-up.** A Hall latch powered up while its field lies inside
  its hysteresis band may come up either way. The electronics then cannot
  trust a latch bit within (hysteresis/2 + switch-point spread + fine-angle
  error) of its edge and take that quarter from the stored count and the AMR
  angle instead; this is decidable while that guard stays below 45° (half a
  quadrant), leaving each quadrant a middle where the latches are trusted.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from .errors import DesignValueError

__all__ = [
    "STRATEGIES",
    "writes_per_day",
    "Endurance",
    "endurance",
    "slots_needed",
    "HoldUp",
    "hold_up",
    "capacitance_needed_uF",
    "Resync",
    "resync",
]

#: Write strategies by design-file name.
STRATEGIES = ("on_change", "periodic", "on_brownout")

_DAYS_PER_YEAR = 365.25


def writes_per_day(strategy: str, *, quarter_turns_per_day: float = 0.0, write_period_s: float = 60.0,
                   supply_events_per_day: float = 1.0) -> float:
    """Writes to non-volatile memory per day for a strategy.

    Parameters
    ----------
    strategy : str
        One of :data:`STRATEGIES`.
    quarter_turns_per_day : float
        Quarter-turn steps of the count per day (motor quarter-turns).
    write_period_s : float
        Period of a ``periodic`` strategy (s).
    supply_events_per_day : float
        Brown-outs and power losses per day (``on_brownout``).

    Returns
    -------
    float
        Writes per day. ``periodic`` is counted as if every period saw a change,
        capped by the changes themselves.
    """
    if strategy == "on_change":
        return float(quarter_turns_per_day)
    if strategy == "periodic":
        if not write_period_s > 0:
            raise DesignValueError("count_memory.write_period", write_period_s, "> 0", unit="s")
        return float(min(86400.0 / write_period_s, quarter_turns_per_day))
    if strategy == "on_brownout":
        return float(supply_events_per_day)
    raise DesignValueError("count_memory.write_strategy", strategy, f"one of {', '.join(STRATEGIES)}")


@dataclass(frozen=True, slots=True)
class Endurance:
    """Writes over the service life against the memory's rated cycles.

    Attributes
    ----------
    writes_per_day : float
    lifetime_writes : float
        Over the service life.
    rated_writes : float
        Rated cycles × slots.
    ok : bool
    """

    writes_per_day: float
    lifetime_writes: float
    rated_writes: float

    @property
    def ok(self) -> bool:
        """True when the lifetime writes stay within the rating."""
        return self.lifetime_writes <= self.rated_writes


def endurance(writes_per_day_: float, service_life_years: float, rated_write_cycles: float,
              slots: int = 1) -> Endurance:
    """Lifetime writes (writes/day × 365.25 × years) against rated cycles × slots."""
    if slots < 1:
        raise DesignValueError("count_memory.wear_leveling_slots", slots, "an integer >= 1")
    life = float(writes_per_day_) * _DAYS_PER_YEAR * float(service_life_years)
    return Endurance(float(writes_per_day_), life, float(rated_write_cycles) * int(slots))


def slots_needed(writes_per_day_: float, service_life_years: float, rated_write_cycles: float) -> int:
    """Fewest wear-levelling slots whose rating covers the lifetime writes (from :func:`endurance`)."""
    life = endurance(writes_per_day_, service_life_years, rated_write_cycles).lifetime_writes
    return max(1, math.ceil(life / float(rated_write_cycles)))


@dataclass(frozen=True, slots=True)
class HoldUp:
    """Energy in the hold-up capacitor against the energy a save needs.

    Attributes
    ----------
    available_uJ : float
        ½·C·(V₁² − V₂²) (µJ).
    needed_uJ : float
        P·(t_detect + t_save) (µJ).
    """

    available_uJ: float
    needed_uJ: float

    @property
    def ok(self) -> bool:
        """True when the capacitor holds enough energy for detection and the save."""
        return self.available_uJ >= self.needed_uJ


def _volts(threshold_V: float, minimum_V: float) -> float:
    if not threshold_V > minimum_V:
        raise DesignValueError("count_memory.brownout_threshold", threshold_V,
                               f"above minimum_write_voltage ({minimum_V:g} V)", unit="V")
    return threshold_V * threshold_V - minimum_V * minimum_V


def hold_up(capacitance_uF: float, brownout_threshold_V: float, minimum_write_voltage_V: float,
            save_power_mW: float, save_time_ms: float, detection_latency_us: float) -> HoldUp:
    """Hold-up energy ½C(V₁² − V₂²) against P·(t_detect + t_save).

    Parameters
    ----------
    capacitance_uF : float
        Hold-up capacitance (µF).
    brownout_threshold_V, minimum_write_voltage_V : float
        V₁, where the brown-out is detected, and V₂, the lowest voltage a write
        still completes at (V).
    save_power_mW : float
        Power drawn while detecting and saving (mW).
    save_time_ms : float
        Time of one save (ms).
    detection_latency_us : float
        Time from V₁ to the start of the save (µs).

    Returns
    -------
    HoldUp
    """
    dv2 = _volts(brownout_threshold_V, minimum_write_voltage_V)
    available = 0.5 * capacitance_uF * dv2  # uF·V² = µJ
    needed = save_power_mW * (save_time_ms + detection_latency_us * 1e-3)  # mW·ms = µJ
    return HoldUp(available, needed)


def capacitance_needed_uF(brownout_threshold_V: float, minimum_write_voltage_V: float, save_power_mW: float,
                          save_time_ms: float, detection_latency_us: float) -> float:
    """Smallest hold-up capacitance that passes :func:`hold_up` (µF)."""
    unit = hold_up(1.0, brownout_threshold_V, minimum_write_voltage_V, save_power_mW, save_time_ms,
                   detection_latency_us)
    return unit.needed_uJ / unit.available_uJ


@dataclass(frozen=True, slots=True)
class Resync:
    """The power-up re-sync guard band.

    Attributes
    ----------
    guard_deg : float
        Half-width of the zone around each latch edge where a latch bit is not
        trusted at power-up (deg at the motor).
    untrusted_fraction : float
        Share of a turn inside those zones (four edges).
    """

    guard_deg: float
    untrusted_fraction: float

    @property
    def ok(self) -> bool:
        """True when the guard leaves every quadrant a trusted middle (guard below 45°)."""
        return self.guard_deg < 45.0


def resync(hysteresis_deg: float, switch_spread_deg: float, fine_error_deg: float) -> Resync:
    """Guard band for re-sync at power-up (all angles at the motor, deg)."""
    for name, v in (("latches.hysteresis", hysteresis_deg), ("latches.switch_point_tolerance", switch_spread_deg),
                    ("fine angle error", fine_error_deg)):
        if not (math.isfinite(v) and v >= 0):
            raise DesignValueError(name, v, ">= 0", unit="deg")
    guard = 0.5 * hysteresis_deg + switch_spread_deg + fine_error_deg
    return Resync(guard, min(1.0, 4 * 2 * guard / 360.0))
