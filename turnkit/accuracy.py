"""The accuracy budget at the output: every contribution, three ways of summing them.

Each :class:`Contribution` is an error at the output (mm or deg) known at a
set of temperatures. It is either *systematic* (a bounded error whose size is
given as a half-width ``a``, with a shape: a sine over the turn, uniform in
its band, or one of two values such as backlash taken up one way or the
other) or *random* (zero-mean normal with standard deviation ``σ``).

:func:`budget` sums them at every temperature in three ways, side by side:

* worst case: Σ a + k·Σ σ (every error at its extreme at once);
* RSS (root sum of squares): √(Σ a² + Σ (k·σ)²), treating each bound as if
  it were k standard deviations (common practice);
* Monte Carlo: the two-sided quantile at coverage p = erf(k/√2) (99.73 % for
  k = 3) of |Σ errors| drawn from their shapes; the same draws at every
  temperature, with a fixed seed, so results repeat run to run.

RSS is never above the worst case; nor is Monte Carlo when every term is
systematic (with random terms it can pass it by its sampling error, since a
normal error is unbounded). Tests check both.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np

from .errors import DesignValueError

__all__ = [
    "SHAPES",
    "METHODS",
    "Contribution",
    "Budget",
    "budget",
    "largest_contribution",
    "scale_to_pass",
]

#: Error shapes: sine over the turn, uniform in ±a, one of ±a, normal (random).
SHAPES = ("sine", "uniform", "two_point", "normal")

#: Ways of summing the budget, by design-file name.
METHODS = ("worst_case", "rss", "monte_carlo")


@dataclass(frozen=True, slots=True)
class Contribution:
    """One error contribution at the output.

    Parameters
    ----------
    key : str
        Stable machine name (``"backlash"``).
    label : str
        Plain words for people.
    size : numpy.ndarray
        Half-width ``a`` (systematic) or standard deviation ``σ`` (random) at
        each temperature of the budget, in the output unit (mm or deg).
    shape : str
        One of :data:`SHAPES`; ``"normal"`` makes it random.
    note : str
        How it was obtained.
    """

    key: str
    label: str
    size: np.ndarray
    shape: str = "uniform"
    note: str = ""

    def __post_init__(self):
        if self.shape not in SHAPES:
            raise DesignValueError(f"Contribution({self.key}).shape", self.shape, f"one of {SHAPES}")
        size = np.atleast_1d(np.asarray(self.size, dtype=float)).copy()
        if not np.isfinite(size).all() or (size < 0).any():
            raise DesignValueError(f"Contribution({self.key}).size", self.size, "finite and >= 0")
        size.flags.writeable = False
        object.__setattr__(self, "size", size)

    @property
    def random(self) -> bool:
        """True for a random (normal) contribution."""
        return self.shape == "normal"

    def extreme(self, k: float) -> np.ndarray:
        """Size counted in the worst case: a, or k·σ for a random term (output unit)."""
        return self.size * (k if self.random else 1.0)


@dataclass(frozen=True, slots=True)
class Budget:
    """The summed accuracy budget over temperature.

    Attributes
    ----------
    temperatures_degC : numpy.ndarray
        Temperatures (degC).
    contributions : tuple of Contribution
        The parts, sizes over ``temperatures_degC``.
    coverage_factor : float
        k: random terms count k·σ; Monte Carlo coverage erf(k/√2).
    worst_case, rss, monte_carlo : numpy.ndarray
        The three sums at each temperature (output unit).
    samples : int
        Monte Carlo draws per temperature.
    """

    temperatures_degC: np.ndarray
    contributions: tuple[Contribution, ...]
    coverage_factor: float
    worst_case: np.ndarray
    rss: np.ndarray
    monte_carlo: np.ndarray
    samples: int

    @property
    def coverage(self) -> float:
        """Two-sided coverage of the Monte Carlo quantile, erf(k/√2)."""
        return math.erf(self.coverage_factor / math.sqrt(2.0))

    def total(self, method: str) -> np.ndarray:
        """The sum by ``method`` (one of :data:`METHODS`) at each temperature (output unit)."""
        if method not in METHODS:
            raise DesignValueError("accuracy.method", method, f"one of {', '.join(METHODS)}")
        return {"worst_case": self.worst_case, "rss": self.rss, "monte_carlo": self.monte_carlo}[method]

    def worst(self, method: str) -> tuple[float, float]:
        """(largest sum by ``method``, the temperature where it occurs) (output unit, degC)."""
        tot = self.total(method)
        i = int(np.argmax(tot))
        return float(tot[i]), float(self.temperatures_degC[i])

    def at(self, index: int) -> dict[str, float]:
        """Each contribution's worst-case size (a or k·σ) at temperature ``index`` (output unit)."""
        return {c.key: float(c.extreme(self.coverage_factor)[index]) for c in self.contributions}


def budget(contributions, temperatures_degC, *, coverage_factor: float = 3.0, samples: int = 20000,
           seed: int = 1) -> Budget:
    """Sum the contributions worst case, RSS and by Monte Carlo at each temperature.

    Parameters
    ----------
    contributions : sequence of Contribution
        Sizes given at each of ``temperatures_degC`` (or one size for all).
    temperatures_degC : array_like
        Temperatures (degC).
    coverage_factor : float
        k > 0 (3 by default).
    samples : int
        Monte Carlo draws (>= 100).
    seed : int
        Seed of the draws.

    Returns
    -------
    Budget
    """
    temps = np.atleast_1d(np.asarray(temperatures_degC, dtype=float))
    k = float(coverage_factor)
    if not (math.isfinite(k) and k > 0):
        raise DesignValueError("accuracy.noise_coverage", coverage_factor, "> 0")
    if int(samples) < 100:
        raise DesignValueError("accuracy.monte_carlo_samples", samples, ">= 100")
    parts = []
    for c in contributions:
        size = c.size
        if size.size == 1:
            size = np.full(temps.size, float(size[0]))
        elif size.size != temps.size:
            raise DesignValueError(f"Contribution({c.key}).size", size.size,
                                   f"one value or {temps.size} (one per temperature)")
        parts.append(c if size is c.size else replace(c, size=size))
    n_t = temps.size
    wc = np.zeros(n_t)
    sq = np.zeros(n_t)
    draws = _draws(tuple(c.shape for c in parts), int(samples), int(seed))
    for c in parts:
        ext = c.extreme(k)
        wc += ext
        sq += ext * ext
    p = math.erf(k / math.sqrt(2.0))
    if parts:
        sizes = tuple(c.size for c in parts)
        mc = _tail_quantiles(sizes, draws, n_t, p)
        if mc is None:
            sums, row_of = _summed_draws(sizes, draws, n_t)
            mc = _quantile_rows([np.abs(row, out=row) for row in sums], p)[row_of]
    else:
        mc = np.zeros(n_t)
    return Budget(temperatures_degC=temps, contributions=tuple(parts), coverage_factor=k, worst_case=wc,
                  rss=np.sqrt(sq), monte_carlo=np.asarray(mc, dtype=float), samples=int(samples))


def _summed_draws(sizes: tuple[np.ndarray, ...], draws: tuple[np.ndarray, ...],
                  n_rows: int) -> tuple[list[np.ndarray], np.ndarray]:
    """Σ size·draw over the contributions, in order, for each of ``n_rows`` temperatures.

    Temperatures whose sizes agree on every contribution so far share one running sum (most
    contributions do not change with temperature), and a shared sum splits where a later
    contribution differs. Each number is still the same products added in the same order, so
    the sums are those of summing every temperature on its own, bit for bit. The sums are kept
    one per row, which stays in the processor's cache while the contributions are added.

    Returns
    -------
    (sums, row_of)
        The distinct sums (each ``samples`` long) and, for each temperature, the index of its sum.
    """
    group = [0] * n_rows
    rows = [np.zeros(draws[0].size)]
    product = np.empty(draws[0].size)
    for size, draw in zip(sizes, draws):
        keys = list(zip(group, size.tolist()))
        # New groups in the order their first row comes; a sum split in two is copied before either
        # part adds its term.
        index = {key: i for i, key in enumerate(dict.fromkeys(keys))}
        used: set[int] = set()
        split = []
        for parent, _ in index:
            split.append(rows[parent].copy() if parent in used else rows[parent])
            used.add(parent)
        for row, (_, factor) in zip(split, index):
            np.multiply(factor, draw, out=product)
            row += product
        rows = split
        group = [index[key] for key in keys]
    return rows, np.array(group, dtype=np.intp)


def _tail_quantiles(sizes: tuple[np.ndarray, ...], draws: tuple[np.ndarray, ...], n_rows: int,
                    p: float) -> np.ndarray | None:
    """The quantile at ``p`` (near the top) of |Σ size·draw| for each temperature, from the draws that can
    reach it.

    Most budgets begin with contributions that are the same at every temperature; their running
    sum ``P`` is one row. The later ones move |P| by at most ``B`` (their largest sizes times
    |draw|), so every temperature's value lies below |P| + B, draw by draw. Only about the eighth of
    the draws with the largest bounds are summed: when a temperature's order statistics come out at
    or above the smallest bound kept, no other draw can reach them, so they are exact. Kept draws
    are summed with the same products added in the same order as the full sums, so the numbers
    are the same, bit for bit. Returns None where this does not apply (no shared or no changing
    contributions, a quantile far from the top, an overflow, a statistic below the bound):
    then every draw is summed.
    """
    n = draws[0].size
    pos = p * (n - 1)
    lo = int(np.floor(pos))
    hi = min(lo + 1, n - 1)
    shared = 0
    while shared < len(sizes) and len(set(sizes[shared].tolist())) == 1:
        shared += 1
    if shared in (0, len(sizes)) or 32 * (n - lo) > n:
        return None
    product = np.empty(n)
    prefix = np.zeros(n)
    for size, draw in zip(sizes[:shared], draws[:shared]):
        np.multiply(float(size[0]), draw, out=product)
        prefix += product
    bound = np.abs(prefix)
    for size, draw in zip(sizes[shared:], draws[shared:]):
        np.abs(draw, out=product)
        product *= float(np.max(size))
        bound += product
    if not np.isfinite(bound.sum()):  # an overflow: sum every draw as it comes
        return None
    # A margin far above the rounding of a few additions (relative 1e-16 each, or one step of the
    # smallest numbers) keeps the bound above every sum.
    bound *= 1.0 + 1e-9
    bound += 1e-300
    # About the eighth of the draws with the largest bounds (the threshold from every eighth bound).
    every_eighth = bound[::8]
    j = every_eighth.size - max(every_eighth.size // 8, 1)
    least = np.partition(every_eighth, j)[j]
    kept = np.flatnonzero(bound >= least)
    top = kept.size - (n - lo)  # the lower statistic's rank among the kept draws
    if top < 0:
        return None
    # One row per distinct set of later sizes, all rows summed at once.
    rows = list(zip(*(size.tolist() for size in sizes[shared:])))
    index = {factors: i for i, factors in enumerate(dict.fromkeys(rows))}
    factors = np.array(list(index))
    sums = np.repeat(prefix[kept][None, :], len(index), axis=0)
    for k, draw in enumerate(draws[shared:]):
        sums += factors[:, k, None] * draw[kept][None, :]
    part = np.partition(np.abs(sums, out=sums), (top, top + hi - lo), axis=1)
    a, b = part[:, top], part[:, top + hi - lo]
    if not np.all(a >= least):  # a draw left out could lie between: sum them all
        return None
    return (a + (pos - lo) * (b - a))[[index[r] for r in rows]]


def _quantile_rows(values, p: float) -> np.ndarray:
    """Each row's quantile at ``p`` (linear interpolation, as numpy.quantile), by partial sorting.

    The two order statistics around ``p`` are exact. For a quantile near the top (the usual
    99.73 %) only the values above a threshold are sorted: the threshold comes from every
    eighth value, and counting the values below it proves the two statistics lie above it;
    when that count fails (or a row holds NaN) the whole row is partially sorted instead.
    """
    out = np.empty(len(values))
    for r, row in enumerate(values):
        n = row.size
        pos = p * (n - 1)
        lo = int(np.floor(pos))
        hi = min(lo + 1, n - 1)
        above = n - lo  # values at or above the lower statistic
        step = 8
        below = n
        if above * step * 4 <= n and not np.isnan(row.sum()):
            sub = row[::step]
            j = max(sub.size - 4 * (above // step + 1) - 8, 0)
            top = row[row >= np.partition(sub, j)[j]]
            below = n - top.size
        if below <= lo:  # the lo-th and hi-th smallest of the row are the same ranks of ``top``
            part = np.partition(top, (lo - below, hi - below))
            a, b = part[lo - below], part[hi - below]
        else:
            part = np.partition(row, (lo, hi))
            a, b = part[lo], part[hi]
        out[r] = a + (pos - lo) * (b - a)
    return out


@lru_cache(maxsize=32)
def _draws(shapes: tuple[str, ...], n: int, seed: int) -> tuple[np.ndarray, ...]:
    """Unit draws for each shape in order, from one seeded generator (cached: re-sizing reuses them)."""
    rng = np.random.default_rng(seed)
    out = []
    for shape in shapes:
        draw = _draw(shape, rng, n)
        draw.flags.writeable = False
        out.append(draw)
    return tuple(out)


def _draw(shape: str, rng, n: int) -> np.ndarray:
    """Unit draws of one shape: a sine at a random phase, uniform, ±1, or standard normal."""
    if shape == "sine":
        return np.sin(rng.uniform(0.0, 2 * np.pi, n))
    if shape == "uniform":
        return rng.uniform(-1.0, 1.0, n)
    if shape == "two_point":
        return rng.choice((-1.0, 1.0), n)
    return rng.standard_normal(n)


def largest_contribution(result: Budget, method: str) -> Contribution | None:
    """The contribution with the largest worst-case size at the temperature where ``method`` is worst."""
    if not result.contributions:
        return None
    i = int(np.argmax(result.total(method)))
    sizes = result.at(i)
    key = max(sizes, key=sizes.get)
    return next(c for c in result.contributions if c.key == key)


def scale_to_pass(result: Budget, key: str, method: str, target: float, *, samples: int | None = None,
                  seed: int = 1) -> float | None:
    """Largest factor on contribution ``key`` that brings ``method``'s sum to ``target`` or below.

    Solved by bisection on the same :func:`budget` the check uses, so scaling
    the contribution by the returned factor passes the check.

    Returns
    -------
    float or None
        Factor in [0, 1]; None when even removing the contribution does not pass.
    """

    def worst(factor: float) -> float:
        parts = [replace(c, size=c.size * factor) if c.key == key else c for c in result.contributions]
        b = budget(parts, result.temperatures_degC, coverage_factor=result.coverage_factor,
                   samples=samples or result.samples, seed=seed)
        return b.worst(method)[0]

    if worst(0.0) > target:
        return None
    if worst(1.0) <= target:
        return 1.0
    lo, hi = 0.0, 1.0
    for _ in range(40):
        mid = 0.5 * (lo + hi)
        if worst(mid) <= target:
            lo = mid
        else:
            hi = mid
    return lo
