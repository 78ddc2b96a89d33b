"""Design-space sweeps, Pareto fronts and Monte Carlo tolerance analysis.

Three questions a person asks once one design sizes well:

* **What if?** :func:`sweep` sizes every point of a full grid over chosen
  quantities (e.g. poll period × the driven teeth of one stage) and returns
  numpy arrays shaped like the grid: every derived value with its unit, a
  pass mask and a margin per requirement check, and the reason each point
  fails. A point whose quantities the design rejects (a
  :class:`~turnkit.errors.DesignValueError`) stays in the grid as NaN with
  the error message; nothing is dropped silently.
* **Which trade-offs are worth having?** :func:`pareto_front` picks the
  non-dominated points of a sweep for objectives to maximise or minimise
  (battery life against the fastest output speed the counter follows).
* **Will the parts we buy meet it?** :func:`monte_carlo` draws quantities
  from their tolerances (normal or uniform, absolute or relative: sensor
  offsets, gain mismatch, phase error, latch switch-point spread, currents,
  battery capacity, tooth counts...), sizes every sample and reports the
  yield (share of samples meeting every requirement) with a Wilson score
  interval and the requirement that fails most often.

Quantities are named by key: any key of :func:`turnkit.tuning.tunables_for`
(``"schedule.poll_period_ms"``, ``"gear_train[0].teeth_driven"``,
``"power.sleep_current_uA"``) or the path of a numeric design field
(``"sensor.offset_x_mV"``, ``"latches.switch_point_tolerance_deg"``,
``"battery.capacity_mAh"``, ``"power.consumers[1].waking_uA"``). Each point is
sized with :func:`turnkit.sizing.size` (``curves=False``).

Scale-out
---------
Points are independent. They are cut into chunks (at most a few hundred
points each) and handed to any :class:`concurrent.futures.Executor`
(``ThreadPoolExecutor``, ``ProcessPoolExecutor``, or the executor of a Dask
``distributed.Client``); chunks come back in any order and are put in place
by their position, so the arrays are identical whatever the executor and
chunk size. Random samples are drawn once, in the calling process, from the
given seed. Designs are frozen dataclasses and travel to workers by pickle.

These figures are design estimates: a high yield or a point on the front is
not a safety case (see :data:`turnkit.sizing.GENERAL_CAUTIONS`, which every
result here carries).

Examples
--------
>>> import numpy as np
>>> from turnkit.designfile import load_design                      # doctest: +SKIP
>>> valve = load_design("demo/irrigation-gate-valve.toml")            # doctest: +SKIP
>>> grid = sweep(valve, {"schedule.poll_period_ms": np.geomspace(2, 200, 20),
...                      "gear_train[0].teeth_driven": range(40, 80, 4)})  # doctest: +SKIP
>>> grid.values["battery_life_years"].shape                            # doctest: +SKIP
(20, 10)
"""

from __future__ import annotations

import math
from fractions import Fraction
import pickle
import re
import threading
import warnings
from concurrent.futures import as_completed
from dataclasses import dataclass, fields, is_dataclass, replace
from itertools import product
from pathlib import Path
from statistics import NormalDist
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from .design import UNIT_DIMENSIONS, ActuatorDesign
from .errors import DesignValueError, TurnkitWarning

__all__ = [
    "Tolerance",
    "SweepResult",
    "ParetoFront",
    "MonteCarloResult",
    "sweep",
    "pareto_mask",
    "pareto_front",
    "monte_carlo",
    "wilson_interval",
]

#: Largest number of points handed to one worker task.
MAX_CHUNK_POINTS = 250

# sizing builds gear trains inside ``warnings.catch_warnings``, which swaps
# process-wide state; building the train under a lock first (it is cached)
# keeps threads from interleaving those swaps.
_TRAIN_LOCK = threading.Lock()

_SEGMENT = re.compile(r"^([A-Za-z_][A-Za-z0-9_]*)(?:\[(\d+)\])?$")
# Attribute suffix -> unit, longest suffix first ("mm_per_s" before "s").
_SUFFIX_UNITS = sorted(((suffix, unit) for unit, (_, suffix) in UNIT_DIMENSIONS.items()),
                       key=lambda pair: -len(pair[0]))
_BATTERY_TABLE_FIELDS = ("capacity_mAh", "nominal_voltage_V", "self_discharge_per_year")


# ---------------------------------------------------------------------------
# naming quantities: tunable keys and design field paths
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class _Accessor:
    key: str
    unit: str
    integer: bool
    choices: tuple[str, ...]
    getter: Callable[[ActuatorDesign], Any]
    setter: Callable[[ActuatorDesign, Any], ActuatorDesign]


def _field_unit(attr: str) -> str:
    """The unit carried in a design attribute's name (``"asleep_uA"`` -> ``"uA"``; ``""`` if none)."""
    for suffix, unit in _SUFFIX_UNITS:
        if attr.endswith("_" + suffix):
            return unit
    return ""


def _unknown_key(where: str, key: Any, tunable_keys: Sequence[str], detail: str = "") -> DesignValueError:
    return DesignValueError(
        where, key,
        "a tunable key (" + ", ".join(tunable_keys) + ") or the path of a numeric design field such as "
        "'sensor.offset_x_mV', 'latches.switch_point_tolerance_deg', 'battery.capacity_mAh' or "
        "'power.consumers[0].asleep_uA'",
        hint=detail)


def _set_path(obj, steps: tuple[tuple[str, int | None], ...], value):
    name, index = steps[0]
    if len(steps) == 1:
        return replace(obj, **{name: value})
    child = getattr(obj, name)
    if index is None:
        return replace(obj, **{name: _set_path(child, steps[1:], value)})
    items = list(child)
    items[index] = _set_path(items[index], steps[1:], value)
    return replace(obj, **{name: tuple(items)})


def _field_accessor(design: ActuatorDesign, key: str, where: str, tunable_keys: Sequence[str]) -> _Accessor:
    if not isinstance(key, str):
        raise _unknown_key(where, key, tunable_keys)
    steps: list[tuple[str, int | None]] = []
    for part in key.split("."):
        match = _SEGMENT.match(part)
        if match is None:
            raise _unknown_key(where, key, tunable_keys, detail=f"cannot read the path part {part!r}")
        steps.append((match.group(1), None if match.group(2) is None else int(match.group(2))))
    obj: Any = design
    for depth, (name, index) in enumerate(steps):
        if obj is None or not is_dataclass(obj):
            raise _unknown_key(where, key, tunable_keys,
                               detail=f"{'.'.join(p for p, _ in steps[:depth])} is not set in this design")
        names = [f.name for f in fields(obj)]
        if name not in names:
            raise _unknown_key(where, key, tunable_keys,
                               detail=f"{type(obj).__name__} has the fields {', '.join(names)}")
        parent, obj = obj, getattr(obj, name)
        if index is not None:
            if not isinstance(obj, tuple) or not 0 <= index < len(obj):
                size = len(obj) if isinstance(obj, tuple) else 0
                raise _unknown_key(where, key, tunable_keys, detail=f"{name} has {size} entries")
            obj = obj[index]
    last_name, last_index = steps[-1]
    if last_index is not None or is_dataclass(obj) or isinstance(obj, (tuple, str, bool)):
        raise _unknown_key(where, key, tunable_keys, detail=f"{key} is not a single number")
    fallback = None
    if obj is None:
        # A battery field left to the cell table varies around the table's value.
        chemistry = getattr(parent, "chemistry", None)
        if type(parent).__name__ == "BatteryDesign" and last_name in _BATTERY_TABLE_FIELDS and chemistry:
            from .battery import available_cells, cell

            if chemistry in available_cells():
                fallback = float(getattr(cell(chemistry), last_name))
        if fallback is None:
            raise _unknown_key(where, key, tunable_keys,
                               detail=f"{key} is not set in this design; give it a value first")
    integer = isinstance(obj, (int, np.integer))
    frozen_steps = tuple(steps)

    def getter(d: ActuatorDesign):
        value: Any = d
        for name, index in frozen_steps:
            value = getattr(value, name)
            if index is not None:
                value = value[index]
        return fallback if value is None else value

    def setter(d: ActuatorDesign, value) -> ActuatorDesign:
        value = int(round(float(value))) if integer else float(value)
        return _set_path(d, frozen_steps, value)

    return _Accessor(key, _field_unit(last_name), integer, (), getter, setter)


def _check_design(design) -> None:
    if not isinstance(design, ActuatorDesign):
        raise DesignValueError("design", type(design).__name__, "an ActuatorDesign",
                               hint="load one with turnkit.designfile.load_design")


def _resolve_all(design: ActuatorDesign, keys: Sequence[str], where: str) -> tuple[_Accessor, ...]:
    from .tuning import tunables_for

    table = {t.key: t for t in tunables_for(design)}
    out = []
    for key in keys:
        t = table.get(key)
        if t is not None:
            out.append(_Accessor(key, t.unit, t.integer, t.choices, t.get, t.set))
        else:
            out.append(_field_accessor(design, key, f"{where}[{key!r}]", tuple(table)))
    return tuple(out)


# ---------------------------------------------------------------------------
# tolerances and the Wilson interval
# ---------------------------------------------------------------------------

@dataclass(frozen=True, slots=True)
class Tolerance:
    """How one quantity spreads from part to part.

    Parameters
    ----------
    distribution : {"normal", "uniform"}
        Normal with standard deviation ``spread``, or uniform over
        ``nominal ± spread``.
    spread : float
        The standard deviation (normal) or half width (uniform), in the
        quantity's own unit, or as a fraction of the nominal value when
        ``relative`` (0.05 for ±5 %).
    relative : bool
        True when ``spread`` is a fraction of the nominal value.

    Examples
    --------
    >>> Tolerance.uniform(0.05, relative=True)
    Tolerance(distribution='uniform', spread=0.05, relative=True)
    """

    distribution: str
    spread: float
    relative: bool = False

    def __post_init__(self) -> None:
        if self.distribution not in ("normal", "uniform"):
            raise DesignValueError("Tolerance.distribution", self.distribution, "'normal' or 'uniform'")
        if isinstance(self.spread, bool) or not isinstance(self.spread, (int, float, np.floating, np.integer)) \
                or not math.isfinite(self.spread) or self.spread < 0:
            raise DesignValueError("Tolerance.spread", self.spread, "a finite number >= 0",
                                   hint="a fraction of the nominal value when relative (0.05 for 5 %)")
        if not isinstance(self.relative, bool):
            raise DesignValueError("Tolerance.relative", self.relative, "true or false")
        object.__setattr__(self, "spread", float(self.spread))

    @classmethod
    def normal(cls, sigma: float, *, relative: bool = False) -> "Tolerance":
        """A normal spread with standard deviation ``sigma`` (unit of the quantity, or a fraction)."""
        return cls("normal", sigma, relative)

    @classmethod
    def uniform(cls, half_width: float, *, relative: bool = False) -> "Tolerance":
        """A uniform spread over ``nominal ± half_width`` (unit of the quantity, or a fraction)."""
        return cls("uniform", half_width, relative)

    def draw(self, nominal: float, rng: np.random.Generator, n: int) -> np.ndarray:
        """``n`` values around ``nominal`` from ``rng`` (one standard draw per value)."""
        unit_draws = rng.standard_normal(n) if self.distribution == "normal" else rng.uniform(-1.0, 1.0, n)
        if self.relative:
            return nominal * (1.0 + self.spread * unit_draws)
        return nominal + self.spread * unit_draws


def wilson_interval(successes: int, trials: int, confidence: float = 0.95) -> tuple[float, float]:
    """Wilson score interval of a binomial proportion.

    Parameters
    ----------
    successes : int
        Number of successes (samples meeting every requirement).
    trials : int
        Number of trials, >= 1.
    confidence : float
        Two-sided confidence level in (0, 1).

    Returns
    -------
    (low, high) : tuple of float
        Bounds of the proportion, within [0, 1]; exactly 0 when there is no
        success and exactly 1 when every trial succeeds.

    Notes
    -----
    With p = k/n and z the two-sided normal quantile,
    centre = (p + z²/2n) / (1 + z²/n) and
    half width = z / (1 + z²/n) · sqrt(p(1 - p)/n + z²/4n²).
    Unlike the normal (Wald) interval it stays inside [0, 1] and keeps its
    coverage near 0 and 1, where yields usually are.

    References
    ----------
    E. B. Wilson, "Probable inference, the law of succession, and
    statistical inference", J. Amer. Statist. Assoc. 22 (1927) 209-212.
    """
    if isinstance(trials, bool) or not isinstance(trials, (int, np.integer)) or trials < 1:
        raise DesignValueError("trials", trials, "an integer >= 1")
    if isinstance(successes, bool) or not isinstance(successes, (int, np.integer)) \
            or not 0 <= successes <= trials:
        raise DesignValueError("successes", successes, f"an integer in [0, {trials}]")
    if not isinstance(confidence, (int, float)) or not 0.0 < confidence < 1.0:
        raise DesignValueError("confidence", confidence, "in (0, 1)")
    n = float(trials)
    p = successes / n
    z = NormalDist().inv_cdf(0.5 + 0.5 * confidence)
    scale = 1.0 + z * z / n
    centre = (p + z * z / (2.0 * n)) / scale
    half = z / scale * math.sqrt(p * (1.0 - p) / n + z * z / (4.0 * n * n))
    low = 0.0 if successes == 0 else max(0.0, centre - half)
    high = 1.0 if successes == trials else min(1.0, centre + half)
    return low, high


# ---------------------------------------------------------------------------
# evaluating points (runs in workers: module-level and picklable)
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class _Task:
    design: ActuatorDesign
    keys: tuple[str, ...]
    rows: tuple[tuple, ...]
    start: int
    value_keys: tuple[str, ...]
    check_keys: tuple[str, ...]
    scenario_names: tuple[str, ...]
    base_dir: str | None
    simulate: bool


@dataclass(frozen=True)
class _Chunk:
    start: int
    values: np.ndarray        # (m, n_values)
    check_values: np.ndarray  # (m, n_checks)
    margins: np.ndarray       # (m, n_checks)
    passed: np.ndarray        # (m, n_checks + n_scenarios)
    all_passed: np.ndarray    # (m,)
    valid: np.ndarray         # (m,)
    reasons: tuple[str, ...]


def _number(value) -> float:
    if isinstance(value, (bool, np.bool_)):
        return float(value)
    if isinstance(value, (int, float, np.integer, np.floating, Fraction)):
        return float(value)  # an exact ratio (Fraction) as its nearest float
    return math.nan


def _failure_text(result, check_keys: Sequence[str]) -> str:
    parts = []
    for c in result.checks:
        if not c.passed:
            unit = f" {c.unit}" if c.unit else ""
            parts.append(f"{c.key}: {c.value:.4g}{unit}, needs {c.comparison} {c.target:.4g}{unit}")
    present = {c.key for c in result.checks}
    parts.extend(f"{k}: not evaluated for this point" for k in check_keys if k not in present)
    for s in result.scenarios:
        if not s.passed:
            parts.append(f"scenario {s.name!r}: {s.ambiguous_count} ambiguous, {s.silent_error_count} silent, "
                         f"final count error {s.final_count_error_qt} quarter-turns")
    return "; ".join(parts)


def _evaluate(task: _Task) -> _Chunk:
    from .sizing import build_train, size

    accessors = _resolve_all(task.design, task.keys, "keys")
    m, nv, nc, ns = len(task.rows), len(task.value_keys), len(task.check_keys), len(task.scenario_names)
    values = np.full((m, nv), np.nan)
    check_values = np.full((m, nc), np.nan)
    margins = np.full((m, nc), np.nan)
    passed = np.zeros((m, nc + ns), dtype=bool)
    all_passed = np.zeros(m, dtype=bool)
    valid = np.zeros(m, dtype=bool)
    reasons = [""] * m
    check_col = {k: i for i, k in enumerate(task.check_keys)}
    scen_col = {k: nc + i for i, k in enumerate(task.scenario_names)}
    for j, row in enumerate(task.rows):
        design = task.design
        try:
            for accessor, value in zip(accessors, row):
                design = accessor.setter(design, value)
        except DesignValueError as exc:
            # Say which quantity of the point was refused, then the design's own words.
            shown = f"{value:g}" if isinstance(value, float) else repr(value)
            reasons[j] = f"{accessor.key} = {shown} {accessor.unit}".rstrip() + f": {exc}"
            continue
        try:
            with _TRAIN_LOCK:
                build_train(design)
            result = size(design, base_dir=task.base_dir, curves=False, simulate=task.simulate,
                          identify=False)
        except DesignValueError as exc:
            reasons[j] = str(exc)
            continue
        valid[j] = True
        by_key = {v.key: v.value for v in result.values}
        for i, key in enumerate(task.value_keys):
            if key in by_key:
                values[j, i] = _number(by_key[key])
        for c in result.checks:
            i = check_col.get(c.key)
            if i is not None:
                check_values[j, i] = c.value
                margins[j, i] = c.margin
                passed[j, i] = c.passed
        for s in result.scenarios:
            i = scen_col.get(s.name)
            if i is not None:
                passed[j, i] = s.passed
        present = {c.key for c in result.checks}
        ok = result.passed and all(k in present for k in task.check_keys)
        all_passed[j] = ok
        if not ok:
            reasons[j] = _failure_text(result, task.check_keys)
        # Checks that are values too (same number) fill their value column.
        for i, key in enumerate(task.value_keys):
            if key not in by_key and key in check_col:
                values[j, i] = check_values[j, check_col[key]]
    return _Chunk(task.start, values, check_values, margins, passed, all_passed, valid, tuple(reasons))


# ---------------------------------------------------------------------------
# running points on an executor
# ---------------------------------------------------------------------------

@dataclass(frozen=True)
class _Plan:
    value_keys: tuple[str, ...]
    units: dict[str, str]
    check_keys: tuple[str, ...]
    scenario_names: tuple[str, ...]
    cautions: tuple[str, ...]
    nominal_passed: bool


def _plan(design: ActuatorDesign, outputs, base_dir, simulate: bool) -> _Plan:
    from .sizing import size

    with _TRAIN_LOCK:
        nominal = size(design, base_dir=base_dir, curves=False, simulate=simulate)
    numeric = {v.key: v for v in nominal.values
               if isinstance(v.value, (int, float, np.integer, np.floating, Fraction)) and not isinstance(v.value, bool)}
    all_values = {v.key: v for v in nominal.values}
    checks = {c.key: c for c in nominal.checks}
    if outputs is None:
        value_keys = tuple(numeric)
    else:
        if isinstance(outputs, str):
            outputs = (outputs,)
        value_keys = tuple(dict.fromkeys(outputs))
        allowed = "a numeric value or check key of this design: " + ", ".join(list(numeric) + [
            k for k in checks if k not in numeric])
        for key in value_keys:
            if key in all_values and not isinstance(all_values[key].value, str):
                continue
            if key in checks:
                continue
            raise DesignValueError("outputs", key, allowed)
    units = {}
    for key in value_keys:
        units[key] = all_values[key].unit if key in all_values else checks[key].unit
    scenario_names = tuple(s.name for s in nominal.scenarios) if simulate else ()
    return _Plan(value_keys, units, tuple(checks), scenario_names, nominal.cautions, nominal.passed)


def _chunk_size(total: int, chunk_size: int | None) -> int:
    if chunk_size is not None:
        if isinstance(chunk_size, bool) or not isinstance(chunk_size, (int, np.integer)) or chunk_size < 1:
            raise DesignValueError("chunk_size", chunk_size, "an integer >= 1 (points per task)")
        return int(chunk_size)
    # Enough tasks to balance a handful of workers, few enough to keep overhead small.
    return max(1, min(MAX_CHUNK_POINTS, math.ceil(total / 16)))


def _progress_bar(total: int, desc: str):
    try:
        from tqdm.auto import tqdm
    except ImportError:
        warnings.warn("progress=True needs tqdm (pip install 'turnkit[scale]'); running without a progress bar",
                      TurnkitWarning, stacklevel=4)
        return None
    return tqdm(total=total, desc=desc, unit="point")


def _run(design, keys, rows: list[tuple], plan: _Plan, *, executor, chunk_size, progress, base_dir,
         simulate, desc) -> dict[str, Any]:
    total = len(rows)
    size_ = _chunk_size(total, chunk_size)
    base = str(Path(base_dir).resolve()) if base_dir is not None else None
    tasks = [_Task(design, tuple(keys), tuple(rows[i:i + size_]), i, plan.value_keys, plan.check_keys,
                   plan.scenario_names, base, bool(simulate)) for i in range(0, total, size_)]
    nc = len(plan.check_keys)
    out = {
        "values": np.full((total, len(plan.value_keys)), np.nan),
        "check_values": np.full((total, nc), np.nan),
        "margins": np.full((total, nc), np.nan),
        "passed": np.zeros((total, nc + len(plan.scenario_names)), dtype=bool),
        "all_passed": np.zeros(total, dtype=bool),
        "valid": np.zeros(total, dtype=bool),
        "reasons": np.empty(total, dtype=object),
    }

    def place(chunk: _Chunk) -> None:
        sl = slice(chunk.start, chunk.start + len(chunk.reasons))
        for name in ("values", "check_values", "margins", "passed", "all_passed", "valid"):
            out[name][sl] = getattr(chunk, name)
        out["reasons"][sl] = chunk.reasons

    bar = _progress_bar(total, desc) if progress else None
    try:
        if executor is None:
            for task in tasks:
                place(_evaluate(task))
                if bar is not None:
                    bar.update(len(task.rows))
        else:
            if not callable(getattr(executor, "submit", None)):
                raise DesignValueError("executor", type(executor).__name__,
                                       "a concurrent.futures.Executor (or None to run here)")
            try:
                pickle.dumps(design)
            except Exception as exc:
                raise DesignValueError("design", type(design).__name__, "a design that pickles",
                                       hint=f"workers receive it by pickle: {exc}") from None
            futures = [executor.submit(_evaluate, task) for task in tasks]
            try:
                for future in as_completed(futures):
                    chunk = future.result()
                    place(chunk)
                    if bar is not None:
                        bar.update(len(chunk.reasons))
            except BaseException:
                for future in futures:
                    future.cancel()
                raise
    finally:
        if bar is not None:
            bar.close()
    return out


def _split(plan: _Plan, out: dict[str, Any], shape: tuple[int, ...]):
    def frozen(a):
        a = a.reshape(shape)
        a.flags.writeable = False
        return a

    values = {}
    check_col = {k: i for i, k in enumerate(plan.check_keys)}
    for i, key in enumerate(plan.value_keys):
        values[key] = frozen(out["values"][:, i].copy())
    passed = {k: frozen(out["passed"][:, i].copy()) for i, k in enumerate(plan.check_keys)}
    passed.update({f"scenario:{name}": frozen(out["passed"][:, len(plan.check_keys) + i].copy())
                   for i, name in enumerate(plan.scenario_names)})
    margins = {k: frozen(out["margins"][:, i].copy()) for k, i in check_col.items()}
    return (values, passed, margins, frozen(out["all_passed"]), frozen(out["valid"]),
            frozen(out["reasons"]))


# ---------------------------------------------------------------------------
# sweeps
# ---------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class SweepResult:
    """Every point of a full grid, as arrays shaped like the grid.

    Attributes
    ----------
    design : ActuatorDesign
        The design the grid varies.
    axes : dict of str to ndarray
        The grid axes in order (one array dimension each): key -> values.
    axis_units : dict of str to str
        Unit of each axis.
    values : dict of str to ndarray
        Each output (value or check key) at every point, NaN where the point
        is invalid or the output does not exist there.
    units : dict of str to str
        Unit of each output.
    passed : dict of str to ndarray of bool
        Per requirement check (and per simulated scenario,
        ``"scenario:<name>"``): True where it is met.
    margins : dict of str to ndarray
        Relative margin of each check (positive passes), NaN where invalid.
    all_passed : ndarray of bool
        True where every check and scenario passes.
    valid : ndarray of bool
        False where the design rejected the point's quantities.
    reasons : ndarray of str
        Why each point fails: the error message of an invalid point, the
        failing checks of a valid one; ``""`` where it passes.
    simulate : bool
        Whether motion scenarios were simulated.
    cautions : tuple of str
        Safety cautions of the design (they hold for every point).
    """

    design: ActuatorDesign
    axes: dict[str, np.ndarray]
    axis_units: dict[str, str]
    values: dict[str, np.ndarray]
    units: dict[str, str]
    passed: dict[str, np.ndarray]
    margins: dict[str, np.ndarray]
    all_passed: np.ndarray
    valid: np.ndarray
    reasons: np.ndarray
    simulate: bool = False
    cautions: tuple[str, ...] = ()

    @property
    def shape(self) -> tuple[int, ...]:
        """Grid shape, one dimension per axis."""
        return self.all_passed.shape

    @property
    def invalid_count(self) -> int:
        """Points the design rejected."""
        return int(np.count_nonzero(~self.valid))

    @property
    def passing_count(self) -> int:
        """Points meeting every requirement."""
        return int(np.count_nonzero(self.all_passed))

    def _index(self, index) -> tuple[int, ...]:
        if isinstance(index, (int, np.integer)):
            return tuple(int(i) for i in np.unravel_index(int(index), self.shape))
        index = tuple(int(i) for i in index)
        if len(index) != len(self.shape):
            raise DesignValueError("index", index, f"a flat index or {len(self.shape)} grid indices")
        return index

    def point(self, index) -> dict[str, Any]:
        """The axis values at a point (flat index or tuple of grid indices)."""
        idx = self._index(index)
        return {key: axis[i].item() for (key, axis), i in zip(self.axes.items(), idx)}

    def design_at(self, index) -> ActuatorDesign:
        """The design at a point (raises :class:`DesignValueError` for an invalid point)."""
        point = self.point(index)
        design = self.design
        for accessor in _resolve_all(self.design, tuple(point), "axes"):
            design = accessor.setter(design, point[accessor.key])
        return design


def sweep(design: ActuatorDesign, axes: Mapping[str, Sequence], *, outputs: Sequence[str] | None = None,
          executor=None, base_dir: str | Path | None = None, progress: bool = False, simulate: bool = False,
          chunk_size: int | None = None) -> SweepResult:
    """Size every point of a full grid over tunable quantities.

    Parameters
    ----------
    design : ActuatorDesign
        The design to vary; it must size on its own.
    axes : mapping of str to sequence
        Quantity key -> values along that axis, in the quantity's unit
        (``{"schedule.poll_period_ms": np.geomspace(2, 200, 20),
        "gear_train[0].teeth_driven": range(40, 80, 4)}``). Keys are tunable
        keys or numeric design field paths; a choice (``"battery.chemistry"``)
        takes strings. Integer quantities are rounded. Setters are applied in
        axis order.
    outputs : sequence of str, optional
        Value or check keys to keep as arrays; default every numeric value.
        Pass masks and margins are kept for every check regardless.
    executor : concurrent.futures.Executor, optional
        Where to size the points; None sizes them here, one after another.
    base_dir : path, optional
        Folder that relative trace paths are relative to (the design file's folder).
    progress : bool
        Show a tqdm progress bar (needs tqdm).
    simulate : bool
        Also simulate the motion scenarios at every point (slower).
    chunk_size : int, optional
        Points per task; default at most 250 and at least 16 tasks' worth.

    Returns
    -------
    SweepResult
        Arrays shaped ``tuple(len(values) for values in axes.values())``.

    Raises
    ------
    DesignValueError
        For an unknown key, an empty or non-numeric axis, an unknown output,
        or a base design that cannot be sized. Points the design rejects do
        not raise: they are recorded as invalid with their message.
    """
    _check_design(design)
    if not isinstance(axes, Mapping) or not axes:
        raise DesignValueError("axes", axes, "a mapping of at least one quantity key to its values")
    keys = tuple(axes)
    accessors = _resolve_all(design, keys, "axes")
    axis_arrays: dict[str, np.ndarray] = {}
    for accessor in accessors:
        raw = axes[accessor.key]
        if isinstance(raw, (str, bytes)):
            raise DesignValueError(f"axes[{accessor.key!r}]", raw, "a sequence of values")
        items = list(raw)
        if not items:
            raise DesignValueError(f"axes[{accessor.key!r}]", items, "at least one value")
        if accessor.choices:
            arr = np.array([str(v) for v in items], dtype=object)
        else:
            try:
                arr = np.asarray(items, dtype=float)
            except (TypeError, ValueError):
                raise DesignValueError(f"axes[{accessor.key!r}]", items, "numbers", unit=accessor.unit) from None
            if arr.ndim != 1:
                raise DesignValueError(f"axes[{accessor.key!r}]", items, "a one-dimensional sequence")
        arr.flags.writeable = False
        axis_arrays[accessor.key] = arr
    plan = _plan(design, outputs, base_dir, simulate)
    rows = list(product(*(a.tolist() for a in axis_arrays.values())))
    shape = tuple(len(a) for a in axis_arrays.values())
    out = _run(design, keys, rows, plan, executor=executor, chunk_size=chunk_size, progress=progress,
               base_dir=base_dir, simulate=simulate, desc="sweep")
    values, passed, margins, all_passed, valid, reasons = _split(plan, out, shape)
    return SweepResult(design=design, axes=axis_arrays, axis_units={a.key: a.unit for a in accessors},
                       values=values, units=dict(plan.units), passed=passed, margins=margins,
                       all_passed=all_passed, valid=valid, reasons=reasons, simulate=bool(simulate),
                       cautions=plan.cautions)


# ---------------------------------------------------------------------------
# Pareto front
# ---------------------------------------------------------------------------

def pareto_mask(points, maximize: Sequence[bool]) -> np.ndarray:
    """Which rows of ``points`` no other row dominates.

    Row a dominates row b when a is at least as good in every column and
    strictly better in one. Equal rows do not dominate each other, so
    duplicates on the front are all kept. Rows with NaN are never on the
    front and never dominate.

    Parameters
    ----------
    points : array_like, shape (n, k)
        Objective values, one row per point.
    maximize : sequence of bool, length k
        Per column: True to maximise, False to minimise.

    Returns
    -------
    ndarray of bool, shape (n,)

    Notes
    -----
    Each surviving point in turn removes every point it dominates (one
    vectorised comparison against all remaining rows), starting from the
    smallest cost sum, which no other point can dominate. The cost is
    O(n · f · k) for a front of f points.
    """
    pts = np.asarray(points, dtype=float)
    if pts.ndim != 2:
        raise DesignValueError("points", pts.shape, "a two-dimensional array (points x objectives)")
    senses = np.asarray(maximize, dtype=bool).reshape(-1)
    if senses.size != pts.shape[1]:
        raise DesignValueError("maximize", tuple(senses.tolist()), f"{pts.shape[1]} flags, one per objective")
    mask = np.zeros(pts.shape[0], dtype=bool)
    finite = ~np.isnan(pts).any(axis=1)
    costs = np.where(senses, -pts, pts)[finite]
    index = np.flatnonzero(finite)
    order = np.argsort(costs.sum(axis=1), kind="stable")
    costs, index = costs[order], index[order]
    i = 0
    while i < costs.shape[0]:
        pivot = costs[i]
        dominated = np.all(pivot <= costs, axis=1) & np.any(pivot < costs, axis=1)
        if dominated.any():
            keep = ~dominated
            i = int(np.count_nonzero(keep[:i]))
            costs, index = costs[keep], index[keep]
        i += 1
    mask[index] = True
    return mask


@dataclass(frozen=True, eq=False)
class ParetoFront:
    """The non-dominated points of a sweep.

    Attributes
    ----------
    objectives : dict of str to str
        Output key -> ``"max"`` or ``"min"``.
    flat_indices : ndarray of int
        Flat grid indices of the front points, ordered by the first objective.
    indices : tuple of ndarray
        The same points as grid indices (one array per axis, like
        :func:`numpy.nonzero`).
    points : ndarray, shape (m, k)
        The objective values at the front points.
    axis_values : dict of str to ndarray
        The axis values at the front points.
    units : dict of str to str
        Unit of each objective.
    """

    objectives: dict[str, str]
    flat_indices: np.ndarray
    indices: tuple[np.ndarray, ...]
    points: np.ndarray
    axis_values: dict[str, np.ndarray]
    units: dict[str, str]

    def __len__(self) -> int:
        return int(self.flat_indices.size)


def pareto_front(sweep_result: SweepResult, objectives: Mapping[str, str], *,
                 mask=None) -> ParetoFront:
    """The Pareto front of a sweep for objectives to maximise or minimise.

    Parameters
    ----------
    sweep_result : SweepResult
    objectives : mapping of str to {"max", "min"}
        Output keys of the sweep (``sweep_result.values``) and their sense,
        e.g. ``{"battery_life_years": "max", "trackable_output_speed": "max"}``.
    mask : array of bool shaped like the grid, optional
        Only these points are candidates (e.g. ``result.passed["output_accuracy"]``).
        Invalid points never are.

    Returns
    -------
    ParetoFront
    """
    if not isinstance(sweep_result, SweepResult):
        raise DesignValueError("sweep_result", type(sweep_result).__name__, "a SweepResult")
    if not isinstance(objectives, Mapping) or not objectives:
        raise DesignValueError("objectives", objectives, "a mapping of at least one output key to 'max' or 'min'")
    for key, sense in objectives.items():
        if key not in sweep_result.values:
            raise DesignValueError("objectives", key, "an output of the sweep: " + ", ".join(sweep_result.values))
        if sense not in ("max", "min"):
            raise DesignValueError(f"objectives[{key!r}]", sense, "'max' or 'min'")
    candidates = sweep_result.valid.reshape(-1).copy()
    if mask is not None:
        m = np.asarray(mask, dtype=bool)
        if m.shape != sweep_result.shape:
            raise DesignValueError("mask", m.shape, f"a boolean array shaped like the grid {sweep_result.shape}")
        candidates &= m.reshape(-1)
    keys = tuple(objectives)
    pts = np.column_stack([sweep_result.values[k].reshape(-1) for k in keys])
    pts[~candidates] = np.nan
    on_front = pareto_mask(pts, [objectives[k] == "max" for k in keys])
    flat = np.flatnonzero(on_front)
    flat = flat[np.argsort(pts[flat, 0], kind="stable")]
    grid = np.unravel_index(flat, sweep_result.shape)
    axis_values = {key: axis[g] for (key, axis), g in zip(sweep_result.axes.items(), grid)}
    return ParetoFront(objectives=dict(objectives), flat_indices=flat, indices=tuple(grid), points=pts[flat],
                       axis_values=axis_values, units={k: sweep_result.units[k] for k in keys})


# ---------------------------------------------------------------------------
# Monte Carlo tolerance analysis
# ---------------------------------------------------------------------------

@dataclass(frozen=True, eq=False)
class MonteCarloResult:
    """Samples of a design under tolerances, and the yield.

    Attributes
    ----------
    design : ActuatorDesign
        The nominal design.
    n : int
        Number of samples.
    seed : int
        The seed they were drawn from.
    tolerances : dict of str to Tolerance
    nominal_inputs : dict of str to float
        The nominal value of each toleranced quantity.
    inputs : dict of str to ndarray, shape (n,)
        The value drawn for each sample (integers already rounded).
    input_units : dict of str to str
    values, units, passed, margins, all_passed, valid, reasons
        As in :class:`SweepResult`, one entry per sample.
    confidence : float
        Confidence level of ``yield_interval``.
    yield_fraction : float
        Share of samples meeting every requirement (invalid samples count as
        failing).
    yield_interval : tuple of float
        Wilson score interval of the yield.
    fail_counts : dict of str to int
        Per check (and simulated scenario): valid samples that fail it.
    most_failing : str or None
        The check failing in the most samples (None when none fails).
    nominal_passed : bool
        Whether the nominal design meets every requirement.
    cautions : tuple of str
        Safety cautions of the design.
    """

    design: ActuatorDesign
    n: int
    seed: int
    tolerances: dict[str, Tolerance]
    nominal_inputs: dict[str, float]
    inputs: dict[str, np.ndarray]
    input_units: dict[str, str]
    values: dict[str, np.ndarray]
    units: dict[str, str]
    passed: dict[str, np.ndarray]
    margins: dict[str, np.ndarray]
    all_passed: np.ndarray
    valid: np.ndarray
    reasons: np.ndarray
    confidence: float
    yield_fraction: float
    yield_interval: tuple[float, float]
    fail_counts: dict[str, int]
    most_failing: str | None
    nominal_passed: bool
    cautions: tuple[str, ...] = ()

    @property
    def passing_count(self) -> int:
        """Samples meeting every requirement."""
        return int(np.count_nonzero(self.all_passed))

    @property
    def invalid_count(self) -> int:
        """Samples the design rejected (e.g. a drawn value outside a field's range)."""
        return int(np.count_nonzero(~self.valid))

    def check_yield(self, key: str) -> tuple[float, tuple[float, float]]:
        """Share of samples meeting one check, with its Wilson interval."""
        if key not in self.passed:
            raise DesignValueError("key", key, "a check of this design: " + ", ".join(self.passed))
        k = int(np.count_nonzero(self.passed[key]))
        return k / self.n, wilson_interval(k, self.n, self.confidence)

    def design_at(self, sample: int) -> ActuatorDesign:
        """The design of one sample (raises :class:`DesignValueError` for an invalid sample)."""
        design = self.design
        for accessor in _resolve_all(self.design, tuple(self.inputs), "tolerances"):
            design = accessor.setter(design, self.inputs[accessor.key][int(sample)].item())
        return design


def monte_carlo(design: ActuatorDesign, tolerances: Mapping[str, Tolerance], n: int, *, seed: int,
                executor=None, base_dir: str | Path | None = None, outputs: Sequence[str] | None = None,
                simulate: bool = False, confidence: float = 0.95, progress: bool = False,
                chunk_size: int | None = None) -> MonteCarloResult:
    """Size ``n`` random variants of a design drawn from its tolerances.

    Parameters
    ----------
    design : ActuatorDesign
        The nominal design; it must size on its own.
    tolerances : mapping of str to Tolerance
        Quantity key -> its spread. Keys are tunable keys or numeric design
        field paths (``"sensor.offset_x_mV"``, ``"sensor.gain_mismatch"``,
        ``"sensor.phase_error_deg"``, ``"latches.switch_point_tolerance_deg"``,
        ``"battery.capacity_mAh"`` (around the cell table's value when the
        design leaves it out), ``"power.consumers[0].asleep_uA"``,
        ``"power.wake_current_uA"``). Quantities are drawn independently, in
        the mapping's order; integer quantities are rounded.
    n : int
        Number of samples, >= 1.
    seed : int
        Seed of :func:`numpy.random.default_rng`; the same seed gives the
        same samples and results whatever the executor.
    executor : concurrent.futures.Executor, optional
        Where to size the samples; None sizes them here.
    base_dir : path, optional
        Folder that relative trace paths are relative to.
    outputs : sequence of str, optional
        Value or check keys to keep per sample; default every numeric value.
    simulate : bool
        Also simulate the motion scenarios for every sample.
    confidence : float
        Confidence level of the yield interval, in (0, 1).
    progress : bool
        Show a tqdm progress bar (needs tqdm).
    chunk_size : int, optional
        Samples per task.

    Returns
    -------
    MonteCarloResult

    Raises
    ------
    DesignValueError
        For an unknown or non-numeric key, a bad tolerance, ``n`` or seed.
        Samples the design rejects (a drawn value outside a field's range)
        are recorded as invalid with their message and count as failing.
    """
    _check_design(design)
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
        raise DesignValueError("n", n, "an integer >= 1 (number of samples)")
    if isinstance(seed, bool) or not isinstance(seed, (int, np.integer)) or seed < 0:
        raise DesignValueError("seed", seed, "an integer >= 0", hint="a fixed seed makes the run repeatable")
    if not isinstance(confidence, (int, float)) or not 0.0 < confidence < 1.0:
        raise DesignValueError("confidence", confidence, "in (0, 1)")
    if not isinstance(tolerances, Mapping) or not tolerances:
        raise DesignValueError("tolerances", tolerances, "a mapping of at least one quantity key to a Tolerance")
    keys = tuple(tolerances)
    accessors = _resolve_all(design, keys, "tolerances")
    rng = np.random.default_rng(int(seed))
    nominal_inputs: dict[str, float] = {}
    inputs: dict[str, np.ndarray] = {}
    for accessor in accessors:
        tol = tolerances[accessor.key]
        if not isinstance(tol, Tolerance):
            raise DesignValueError(f"tolerances[{accessor.key!r}]", tol, "a Tolerance (normal or uniform)")
        if accessor.choices:
            raise DesignValueError(f"tolerances[{accessor.key!r}]", accessor.key, "a numeric quantity",
                                   hint="sweep a choice instead")
        nominal = float(accessor.getter(design))
        drawn = tol.draw(nominal, rng, int(n))
        if accessor.integer:
            drawn = np.round(drawn)
        drawn.flags.writeable = False
        nominal_inputs[accessor.key] = nominal
        inputs[accessor.key] = drawn
    plan = _plan(design, outputs, base_dir, simulate)
    rows = [tuple(r) for r in np.column_stack([inputs[k] for k in keys]).tolist()]
    out = _run(design, keys, rows, plan, executor=executor, chunk_size=chunk_size, progress=progress,
               base_dir=base_dir, simulate=simulate, desc="monte carlo")
    values, passed, margins, all_passed, valid, reasons = _split(plan, out, (int(n),))
    k = int(np.count_nonzero(all_passed))
    fail_counts = {key: int(np.count_nonzero(valid & ~mask)) for key, mask in passed.items()}
    worst = max(fail_counts, key=fail_counts.get) if fail_counts else None
    if worst is not None and fail_counts[worst] == 0:
        worst = None
    invalid = int(np.count_nonzero(~valid))
    if invalid:
        first = next(r for r, ok in zip(reasons, valid) if not ok)
        warnings.warn(f"{invalid} of {n} samples were rejected by the design and count as failing; "
                      f"first: {first}", TurnkitWarning, stacklevel=2)
    return MonteCarloResult(
        design=design, n=int(n), seed=int(seed), tolerances=dict(tolerances), nominal_inputs=nominal_inputs,
        inputs=inputs, input_units={a.key: a.unit for a in accessors}, values=values, units=dict(plan.units),
        passed=passed, margins=margins, all_passed=all_passed, valid=valid, reasons=reasons,
        confidence=float(confidence), yield_fraction=k / int(n),
        yield_interval=wilson_interval(k, int(n), confidence), fail_counts=fail_counts, most_failing=worst,
        nominal_passed=plan.nominal_passed, cautions=plan.cautions)
