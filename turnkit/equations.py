"""One symbolic model of the design equations, and inverse design from it.

The registry (:data:`EQUATIONS`, :data:`SYMBOLS`) is plain data: importing
this module does not import sympy. sympy is imported inside the functions
that need it (building an equation, solving it), and every solved and
lambdified form is cached, so only the first call of a kind pays for it.

The model works in one fixed set of units, listed in :data:`SYMBOLS`:

========================  =======================================================
quantity                  unit in the model
========================  =======================================================
angles of the motor shaft deg
output travel             the user's output unit ("out": mm for a linear output,
                          deg for a rotary one); speeds in out/s
shaft speeds              rpm (turns per minute)
times                     s
currents                  mA
capacities                mAh
life                      years of 8766 h (365.25 days)
self-discharge            fraction of the nominal capacity lost per year
========================  =======================================================

The inverse-design helpers (:func:`min_reduction_for_resolution`,
:func:`max_poll_period_for_speed_s`, :func:`max_sleep_current_for_life_uA`,
:func:`min_capacity_for_life_mAh`) and :func:`relax_advice` take keyword
arguments whose names carry their units (``sleep_current_uA``) and convert
to the model's units once, at the call.

Examples
--------
>>> from turnkit.equations import solve_for
>>> round(solve_for("n_max_rpm", T=0.1), 9)
150.0
"""

from __future__ import annotations

import math
import numbers
from dataclasses import dataclass, field
from functools import lru_cache
from types import MappingProxyType
from typing import Callable, Mapping

from .errors import DesignValueError

__all__ = [
    "SymbolInfo",
    "Equation",
    "EquationSolution",
    "RelaxOption",
    "RelaxAdvice",
    "SYMBOLS",
    "EQUATIONS",
    "HOURS_PER_YEAR",
    "equation",
    "solve_for",
    "max_travel_per_turn_for_resolution",
    "min_reduction_for_resolution",
    "max_poll_period_for_speed_s",
    "max_sleep_current_for_life_uA",
    "min_capacity_for_life_mAh",
    "relax_advice",
    "CLOSED_FORMS",
    "solve_closed",
]

#: Hours in a year of 365.25 days, the year used by every life figure.
HOURS_PER_YEAR = 8766.0

# Allowed ranges of a symbol's value, in words for error messages.
_DOMAIN_WORDS = {
    "positive": "> 0",
    "nonnegative": ">= 0",
    "unit_interval": "in (0, 1]",
    "fraction": "in [0, 1)",
    "flag": "0 (unsigned counter) or 1 (signed counter)",
}

LOST_COUNT_CAUTION = (
    "Caution: this bound holds only for the narrowest quadrant, jitter and margin given "
    "(with their ideal values 90 deg, 0 and 0 it has no allowance for real latches at all). "
    "Latch edges outside their stated tolerances and speed peaks above the stated back-drive "
    "speed can lose quarter-turns, sometimes with no error flag, and a lost count moves the "
    "actuator to the wrong place, where it can pinch or crush. Keep a counting margin (common "
    "practice: use no more than 50-70 % of the bound), re-home after any battery event, and "
    "where a wrong position can hurt someone follow local codes, the applicable "
    "functional-safety standards and licensed practice."
)

BATTERY_CAUTION = (
    "Caution: battery figures are design estimates; confirm them with the cell maker's "
    "data at the real temperature, pulse load and cut-off voltage. When the count is lost "
    "because the cell runs flat the actuator must be re-homed. Keep lithium coin cells out "
    "of reach of children: a swallowed coin cell can cause severe internal burns within "
    "hours; follow IEC 60086-4 and local law on compartments and warnings."
)


def _check_domain(domain: str, value: float) -> bool:
    """Return True when ``value`` lies in the named domain."""
    if not math.isfinite(value):
        return False
    if domain == "positive":
        return value > 0
    if domain == "nonnegative":
        return value >= 0
    if domain == "unit_interval":
        return 0 < value <= 1
    if domain == "fraction":
        return 0 <= value < 1
    if domain == "flag":
        return value in (0, 1)
    raise ValueError(f"unknown domain {domain!r}")


@dataclass(frozen=True, slots=True)
class SymbolInfo:
    """One symbol of the model.

    Parameters
    ----------
    name : str
        The Python name, used as keyword in :func:`solve_for` (``"I_sleep"``).
    latex : str
        The LaTeX form (``"I_{sleep}"``).
    unit : str
        Unit of the value in the model (``"mA"``); ``"1"`` for pure numbers.
        ``"out"`` is the user's output unit (mm or deg).
    description : str
        One line saying what the symbol is.
    domain : str
        Allowed values: ``"positive"``, ``"nonnegative"``, ``"unit_interval"``
        (0, 1], ``"fraction"`` [0, 1) or ``"flag"`` (0 or 1).
    ideal : float, optional
        Value taken when the symbol is not given (ideal latch edges, no
        jitter, no margin); None for symbols that must be given.
    """

    name: str
    latex: str
    unit: str
    description: str
    domain: str = "positive"
    ideal: float | None = None

    def __post_init__(self):
        if not self.name.isidentifier():
            raise DesignValueError("SymbolInfo.name", self.name, "a Python identifier")
        if self.domain not in _DOMAIN_WORDS:
            raise DesignValueError("SymbolInfo.domain", self.domain, f"one of {sorted(_DOMAIN_WORDS)}")

    @property
    def allowed(self) -> str:
        """The allowed range in words, e.g. ``"> 0"``."""
        return _DOMAIN_WORDS[self.domain]


def _symbols_table() -> dict[str, SymbolInfo]:
    rows = [
        ("G", "G", "1", "overall reduction: motor turns per turn of the output member"),
        ("l_out", "l_{out}", "out/turn",
         "output travel per turn of the output member (screw lead in mm, or 360 deg for a rotary output)"),
        ("p", "p", "out/turn", "output travel per motor turn"),
        ("r_motor_deg", "r_{motor}", "deg", "angle resolution on the motor shaft (sensor resolution)"),
        ("r_out", "r_{out}", "out", "output resolution"),
        ("v_out", "v_{out}", "out/s", "output speed while back-driven (e.g. by a hand-wheel)"),
        ("n_motor_rpm", "n_{motor}", "rpm", "motor shaft speed while back-driven"),
        ("T", "T", "s", "poll period (time between wake-ups)"),
        ("n_max_rpm", "n_{max}", "rpm",
         "highest motor speed the schedule is guaranteed to track (at most the narrowest quadrant per poll)"),
        ("n_silent_rpm", "n_{silent}", "rpm",
         "motor speed above which a miscount can go unflagged (more than the narrowest two quadrants per poll)"),
        ("T_max", "T_{max}", "s", "longest poll period that tracks a given motor speed with the margin m"),
        ("w_q", "w_{q}", "deg", "narrowest quadrant between two latch edges of a unit inside the tolerances "
         "(90 deg for ideal edges)", "positive", 90.0),
        ("w_2q", "w_{pair}", "deg", "narrowest span of two neighbouring quadrants (180 deg for ideal edges)",
         "positive", 180.0),
        ("j", "j", "1", "poll jitter as a fraction of the poll period (worst interval T (1 + 2 j))",
         "fraction", 0.0),
        ("m", "m", "1", "counting margin: share of the speed bound left unused", "fraction", 0.0),
        ("S", "S", "out", "stroke: full output travel"),
        ("N_q", "N_{q}", "quarter turns", "motor quarter-turns over the stroke"),
        ("b", "b", "bit", "counter bits needed", "nonnegative"),
        ("g", "g", "1", "sign bit: 1 for a signed counter, 0 for an unsigned one", "flag"),
        ("I_avg", "I_{avg}", "mA", "average current"),
        ("I_sleep", "I_{sleep}", "mA", "current while asleep", "nonnegative"),
        ("I_awake", "I_{awake}", "mA", "current while awake for a poll"),
        ("t_awake", "t_{awake}", "s", "time awake per poll (wake, settle, read)"),
        ("D", "D", "1", "duty cycle: fraction of the time awake", "unit_interval"),
        ("C_nom", "C_{nom}", "mAh", "nominal capacity of the battery"),
        ("C_use", "C_{use}", "mAh", "usable capacity after derating"),
        ("k_T", "k_{T}", "1", "temperature derating factor", "unit_interval"),
        ("u", "u", "1", "usable fraction (cut-off voltage, pulse limit)", "unit_interval"),
        ("s", "s", "1/year", "self-discharge: fraction of the nominal capacity lost per year", "fraction"),
        ("L", "L", "year", "battery life (years of 8766 h)"),
    ]
    table = {}
    for row in rows:
        info = SymbolInfo(*row)
        table[info.name] = info
    return table


#: Every symbol of the model, by name.
SYMBOLS: Mapping[str, SymbolInfo] = MappingProxyType(_symbols_table())


@dataclass(frozen=True, slots=True)
class Equation:
    """One named design equation.

    Parameters
    ----------
    key : str
        Registry key (``"average_current"``).
    title : str
        One line saying what the equation gives.
    symbols : tuple of str
        Names of the symbols it relates (keys of :data:`SYMBOLS`).
    text : str
        Plain-text form, parseable by sympy with the symbol names.
    latex : str
        LaTeX form.
    source : str
        One line: ``"(common practice) ..."`` or a citation.
    solvable_for : tuple of str
        Symbols this equation may be solved for (an equation with a step
        function such as ``ceil`` is solved only for its left-hand side).
    """

    key: str
    title: str
    symbols: tuple[str, ...]
    text: str
    latex: str
    source: str
    solvable_for: tuple[str, ...]
    build: Callable = field(repr=False, compare=False)

    def __post_init__(self):
        for name in self.symbols + self.solvable_for:
            if name not in SYMBOLS:
                raise DesignValueError(f"Equation({self.key}).symbols", name, "a name in SYMBOLS")
        if not set(self.solvable_for) <= set(self.symbols):
            raise DesignValueError(f"Equation({self.key}).solvable_for", self.solvable_for,
                                   "a subset of the equation's symbols")

    @property
    def units(self) -> dict[str, str]:
        """Unit of each symbol of the equation, by name."""
        return {name: SYMBOLS[name].unit for name in self.symbols}

    @property
    def sympy_eq(self):
        """The equation as a ``sympy.Eq`` (imports sympy on first use)."""
        return _sympy_eq(self.key)


def _eq_table() -> dict[str, Equation]:
    cp = "(common practice)"
    rows = [
        ("travel_per_motor_turn", "output travel per motor turn from the overall reduction",
         ("p", "l_out", "G"), "p = l_out / G", r"p = \frac{l_{out}}{G}",
         f"{cp} kinematics of a reduction: the motor turns G times per output turn",
         ("p", "l_out", "G"),
         lambda s, sp: sp.Eq(s.p, s.l_out / s.G)),
        ("output_resolution", "output resolution from the motor-shaft resolution",
         ("r_out", "r_motor_deg", "p"), "r_out = r_motor_deg / 360 * p",
         r"r_{out} = \frac{r_{motor}}{360} p",
         f"{cp} a sensor on the fast shaft has its resolution divided by the reduction",
         ("r_out", "r_motor_deg", "p"),
         lambda s, sp: sp.Eq(s.r_out, s.r_motor_deg * s.p / 360)),
        ("backdrive_motor_speed", "motor speed when the output is back-driven",
         ("n_motor_rpm", "v_out", "p"), "n_motor_rpm = v_out / p * 60",
         r"n_{motor} = \frac{60 v_{out}}{p}",
         f"{cp} speed through a reduction; 60 s per minute",
         ("n_motor_rpm", "v_out", "p"),
         lambda s, sp: sp.Eq(s.n_motor_rpm, 60 * s.v_out / s.p)),
        ("max_trackable_speed", "motor speed the schedule is guaranteed to track (inclusive)",
         ("n_max_rpm", "w_q", "T", "j"), "n_max_rpm = w_q / (6 * T * (1 + 2 * j))",
         r"n_{max} = \frac{w_{q}}{6 \left(1 + 2 j\right) T}",
         "(derived, shown in docs/counter.md) every read decodes right while the shaft moves at most "
         "the narrowest quadrant w_q between reads; the longest interval between reads is T (1 + 2 j); "
         "6 deg/s per rpm",
         ("n_max_rpm", "w_q", "T", "j"),
         lambda s, sp: sp.Eq(s.n_max_rpm, s.w_q / (6 * s.T * (1 + 2 * s.j)))),
        ("silent_error_onset_speed", "motor speed above which (strictly) a miscount can go unflagged",
         ("n_silent_rpm", "w_2q", "T", "j"), "n_silent_rpm = w_2q / (6 * T * (1 + 2 * j))",
         r"n_{silent} = \frac{w_{pair}}{6 \left(1 + 2 j\right) T}",
         "(derived, shown in docs/counter.md) beyond the narrowest two quadrants per poll three "
         "quadrant steps can occur and read as one step backwards (modulo-4 aliasing)",
         ("n_silent_rpm", "w_2q", "T", "j"),
         lambda s, sp: sp.Eq(s.n_silent_rpm, s.w_2q / (6 * s.T * (1 + 2 * s.j)))),
        ("max_poll_period", "longest poll period that tracks a motor speed with the margin m (inclusive)",
         ("T_max", "w_q", "m", "n_motor_rpm", "j"), "T_max = w_q * (1 - m) / (6 * n_motor_rpm * (1 + 2 * j))",
         r"T_{max} = \frac{\left(1 - m\right) w_{q}}{6 \left(1 + 2 j\right) n_{motor}}",
         "(derived, shown in docs/counter.md) the max_trackable_speed bound with the speed at most "
         "(1 - m) of it",
         ("T_max", "n_motor_rpm"),
         lambda s, sp: sp.Eq(s.T_max, s.w_q * (1 - s.m) / (6 * s.n_motor_rpm * (1 + 2 * s.j)))),
        ("quarter_turns_per_stroke", "motor quarter-turns over the stroke",
         ("N_q", "S", "p"), "N_q = 4 * S / p", r"N_{q} = \frac{4 S}{p}",
         f"{cp} four quadrant steps per motor turn",
         ("N_q", "S", "p"),
         lambda s, sp: sp.Eq(s.N_q, 4 * s.S / s.p)),
        ("counter_bits", "counter bits needed for the stroke",
         ("b", "N_q", "g"), "b = ceiling(log(N_q + 1, 2)) + g",
         r"b = \left\lceil \log_{2}\left(N_{q} + 1\right) \right\rceil + g",
         f"{cp} N_q + 1 distinct counts from one end of the stroke; one more bit if signed",
         ("b",),
         lambda s, sp: sp.Eq(s.b, sp.ceiling(sp.log(s.N_q + 1, 2)) + s.g)),
        ("average_current", "average current of a fixed poll schedule",
         ("I_avg", "I_sleep", "I_awake", "t_awake", "T"),
         "I_avg = I_sleep + (t_awake / T) * (I_awake - I_sleep)",
         r"I_{avg} = I_{sleep} + \frac{t_{awake}}{T} \left(I_{awake} - I_{sleep}\right)",
         f"{cp} time-weighted mean of the sleep and awake currents",
         ("I_avg", "I_sleep", "I_awake", "t_awake", "T"),
         lambda s, sp: sp.Eq(s.I_avg, s.I_sleep + s.t_awake / s.T * (s.I_awake - s.I_sleep))),
        ("duty_cycle", "fraction of the time awake",
         ("D", "t_awake", "T"), "D = t_awake / T", r"D = \frac{t_{awake}}{T}",
         f"{cp} definition of duty cycle",
         ("D", "t_awake", "T"),
         lambda s, sp: sp.Eq(s.D, s.t_awake / s.T)),
        ("usable_capacity", "capacity left after derating",
         ("C_use", "C_nom", "k_T", "u"), "C_use = C_nom * k_T * u",
         r"C_{use} = C_{nom} k_{T} u",
         f"{cp} multiplicative derating for temperature and usable fraction",
         ("C_use", "C_nom", "k_T", "u"),
         lambda s, sp: sp.Eq(s.C_use, s.C_nom * s.k_T * s.u)),
        ("battery_life", "battery life with linear self-discharge",
         ("L", "C_use", "I_avg", "s", "C_nom"),
         "L = C_use / (I_avg * 8766 + s * C_nom)",
         r"L = \frac{C_{use}}{8766 I_{avg} + s C_{nom}}",
         f"{cp} linear self-discharge model: the load and self-discharge drain the usable "
         "capacity together; 8766 h per year",
         ("L", "C_use", "I_avg", "s", "C_nom"),
         lambda s, sp: sp.Eq(s.L, s.C_use / (s.I_avg * 8766 + s.s * s.C_nom))),
        ("capacity_for_life", "nominal capacity needed for a life",
         ("C_nom", "I_avg", "L", "k_T", "u", "s"),
         "C_nom = I_avg * 8766 * L / (k_T * u - s * L)",
         r"C_{nom} = \frac{8766 I_{avg} L}{k_{T} u - s L}",
         f"{cp} the battery_life equation solved for C_nom with C_use = C_nom k_T u",
         ("C_nom", "I_avg", "L", "k_T", "u", "s"),
         lambda s, sp: sp.Eq(s.C_nom, s.I_avg * 8766 * s.L / (s.k_T * s.u - s.s * s.L))),
    ]
    table = {}
    for key, title, symbols, text, latex, source, solvable, build in rows:
        table[key] = Equation(key, title, symbols, text, latex, source, solvable, build)
    return table


#: Every design equation, by key, in the order they are tried when solving.
EQUATIONS: Mapping[str, Equation] = MappingProxyType(_eq_table())


def _close_matches(word, options) -> list[str]:
    """Up to three names in ``options`` close to ``word`` (difflib is imported only for a misspelt name)."""
    import difflib

    return difflib.get_close_matches(str(word), options, n=3)


def _equation_by_key(key: str) -> Equation:
    try:
        return EQUATIONS[key]
    except KeyError:
        close = _close_matches(key, EQUATIONS)
        hint = f"Did you mean {', '.join(close)}?" if close else ""
        raise DesignValueError("equation", key, f"one of {', '.join(EQUATIONS)}", hint=hint) from None


def equation(key: str) -> Equation:
    """Return the equation registered under ``key``.

    Raises
    ------
    DesignValueError
        When no equation has that key (the message suggests close keys).
    """
    return _equation_by_key(key)


# --------------------------------------------------------------------------- sympy side


@lru_cache(maxsize=1)
def _sym():
    """The sympy symbols of the model, as a namespace (imports sympy)."""
    import types

    import sympy

    return types.SimpleNamespace(**{name: sympy.Symbol(name, real=True) for name in SYMBOLS})


@lru_cache(maxsize=None)
def _sympy_eq(key: str):
    import sympy

    return EQUATIONS[key].build(_sym(), sympy)


def _ceil_log2(a):
    """ceil(log2(a)) exactly: floating log2 near powers of two can miss the step."""
    a = float(a)
    if a >= 1 and math.isfinite(a):
        # For real a >= 1, ceil(log2(a)) = (ceil(a) - 1).bit_length() in integers.
        return float((math.ceil(a) - 1).bit_length())
    return float(math.ceil(math.log2(a)))


@dataclass(frozen=True, slots=True)
class _Plan:
    target: str
    keys: tuple[str, ...]          # equations used, in solving order
    produced: tuple[str, ...]      # symbols they determine, same order
    inputs: tuple[str, ...]        # knowns the solution depends on (sorted)


def _plan(target: str, known: frozenset[str], only: tuple[str, ...] | None) -> _Plan | None:
    """Choose the equations that determine ``target`` from ``known`` (no sympy)."""
    keys = only if only is not None else tuple(EQUATIONS)
    have = set(known)
    producer: dict[str, str] = {}
    progress = True
    while target not in have and progress:
        progress = False
        for key in keys:
            eq = EQUATIONS[key]
            missing = [name for name in eq.symbols if name not in have]
            if len(missing) == 1 and missing[0] in eq.solvable_for:
                producer[missing[0]] = key
                have.add(missing[0])
                progress = True
                if target in have:
                    break
    if target not in have:
        return None
    # Walk back from the target to keep only the equations it needs.
    needed_syms: list[str] = []
    stack = [target]
    while stack:
        name = stack.pop()
        if name in needed_syms or name in known:
            continue
        needed_syms.append(name)
        stack.extend(n for n in EQUATIONS[producer[name]].symbols if n != name)
    order = [name for name in producer if name in needed_syms]
    inputs = sorted({n for name in order for n in EQUATIONS[producer[name]].symbols if n in known})
    return _Plan(target, tuple(producer[n] for n in order), tuple(order), tuple(inputs))


@lru_cache(maxsize=256)
def _closed_forms(plan: _Plan):
    """Solve the plan's equations symbolically: {symbol name: expression of the inputs}."""
    import sympy

    ns = _sym()
    eqs = [_sympy_eq(key) for key in plan.keys]
    unknowns = [getattr(ns, name) for name in plan.produced]
    try:
        solutions = sympy.solve(eqs, unknowns, dict=True)
    except RuntimeError:
        # sympy reports an equation it cannot invert with a RuntimeError subclass.
        solutions = []
    # Each branch is a dict; keep branches that give every produced symbol.
    branches = []
    for sol in solutions:
        if all(u in sol for u in unknowns):
            branches.append({u.name: sympy.simplify(sol[u]) for u in unknowns})
    return tuple(branches)


def _lambdify(expr, inputs: tuple[str, ...]):
    import sympy

    ns = _sym()
    # Counter bits: evaluate ceil(log2(.)) in integers rather than through float logs.
    w = sympy.Wild("w")
    expr = expr.replace(sympy.ceiling(sympy.log(w) / sympy.log(2)), sympy.Function("ceil_log2")(w))
    args = [getattr(ns, name) for name in inputs]
    return sympy.lambdify(args, expr, modules=[{"ceil_log2": _ceil_log2}, "math"])


@lru_cache(maxsize=256)
def _compiled(plan: _Plan):
    """For each solution branch: ((symbol, input names, function), ...) in solving order."""
    compiled = []
    for branch in _closed_forms(plan):
        steps = []
        for name in plan.produced:
            expr = branch[name]
            inputs = tuple(sorted(s.name for s in expr.free_symbols))
            steps.append((name, inputs, _lambdify(expr, inputs)))
        compiled.append(tuple(steps))
    return tuple(compiled)


@lru_cache(maxsize=None)
def _sides(key: str):
    """Compiled left- and right-hand sides of one equation, with their input names."""
    e = _sympy_eq(key)
    out = []
    for side in (e.lhs, e.rhs):
        inputs = tuple(sorted(s.name for s in side.free_symbols))
        out.append((inputs, _lambdify(side, inputs)))
    return tuple(out)


def _format_number(value: float, digits: int = 6) -> str:
    return f"{value:.{digits}g}"


def _format_latex_number(value: float, digits: int = 6) -> str:
    text = _format_number(value, digits)
    if "e" in text:
        mantissa, exponent = text.split("e")
        return rf"{mantissa} \cdot 10^{{{int(exponent)}}}"
    return text


def _render(expr, values: Mapping[str, float] | None, latex: bool) -> str:
    """Print ``expr``; with ``values``, print numbers in place of those symbols."""
    from sympy.printing.latex import LatexPrinter
    from sympy.printing.str import StrPrinter

    values = values or {}
    base = LatexPrinter if latex else StrPrinter

    class _Printer(base):
        def _print_Symbol(self, sym, *args, **kwargs):
            if sym.name in values:
                v = values[sym.name]
                # Inputs keep ten digits so the working can be checked by hand.
                text = _format_latex_number(v, 10) if latex else _format_number(v, 10)
                return f"({text})" if v < 0 else text
            if latex:
                return SYMBOLS[sym.name].latex
            return sym.name

    return _Printer().doprint(expr)


@dataclass(frozen=True, slots=True)
class EquationSolution:
    """A value solved from the design equations, with the working shown.

    Attributes
    ----------
    quantity : str
        What was solved for: a symbol name of :data:`SYMBOLS`.
    value : float
        The value, in ``unit``.
    unit : str
        Unit of ``value`` (a helper may convert from the model's unit, e.g.
        mA to uA; ``substituted_text`` stays in the model's units).
    equation_keys : tuple of str
        Registry keys of the equations used.
    equation_text, equation_latex : str
        The solved form, ``quantity = expression of the knowns``.
    substituted_text, substituted_latex : str
        The same with the known numbers put in and the result.
    knowns : tuple of (name, value, unit)
        The known values used, in the model's units.
    steps_text, steps_latex : tuple of str
        One line per equation used, in order, each solved for the value it
        gives and with numbers put in (easier to follow than the fused form).
    caution : str
        Safety caution that goes with the value (may be empty).
    """

    quantity: str
    value: float
    unit: str
    equation_keys: tuple[str, ...]
    equation_text: str
    equation_latex: str
    substituted_text: str
    substituted_latex: str
    knowns: tuple[tuple[str, float, str], ...]
    steps_text: tuple[str, ...] = ()
    steps_latex: tuple[str, ...] = ()
    caution: str = ""

    def __str__(self) -> str:
        if len(self.steps_text) > 1:
            return "\n".join(self.steps_text)
        return self.substituted_text


def _is_real_number(value) -> bool:
    # numbers.Real covers int, float and numpy scalars; bool is excluded on purpose. Plain floats and
    # ints (the common case) are answered before the slower abstract-class check.
    kind = type(value)
    if kind is float or kind is int:
        return True
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def _unit_of(name: str) -> str:
    """Unit of a symbol for messages; empty for pure numbers."""
    unit = SYMBOLS[name].unit
    return "" if unit == "1" else unit


def _check_known(name: str, value) -> float:
    info = SYMBOLS[name]
    if not _is_real_number(value):
        raise DesignValueError(name, value, f"a real number {info.allowed}", unit=_unit_of(info.name))
    value = float(value)
    if not _check_domain(info.domain, value):
        raise DesignValueError(name, value, f"a finite number {info.allowed}", unit=_unit_of(info.name),
                               hint=f"{name} is the {info.description}")
    return value


def _solve(unknown: str, knowns: dict[str, float], only: tuple[str, ...] | None):
    """Return (value, plan, expression) for ``unknown``; raises on infeasibility."""
    plan = _plan(unknown, frozenset(knowns), only)
    if plan is None:
        candidates = [key for key in (only or EQUATIONS) if unknown in EQUATIONS[key].symbols]
        needs = "; ".join(
            f"{key}: give {', '.join(n for n in EQUATIONS[key].symbols if n != unknown)}"
            for key in candidates if unknown in EQUATIONS[key].solvable_for
        ) or "no equation can be solved for it"
        raise DesignValueError(
            "unknown", unknown, "a quantity the given knowns determine",
            hint=f"known: {', '.join(sorted(knowns)) or 'nothing'}. Equations that give {unknown}: {needs}",
        )
    branches = _compiled(plan)
    if not branches:
        raise DesignValueError("unknown", unknown, "a quantity with a closed-form solution",
                               hint=f"sympy found no solution of {', '.join(plan.keys)} for {unknown}")
    problems = []
    for index, branch in enumerate(branches):
        values = {}
        ok = True
        for name, inputs, fn in branch:
            try:
                val = float(fn(*(knowns[n] for n in inputs)))
            except (ZeroDivisionError, OverflowError, ValueError):
                val = math.nan
            values[name] = val
            if not _check_domain(SYMBOLS[name].domain, val):
                problems.append((name, val))
                ok = False
                break
        if ok:
            return values[unknown], plan, _closed_forms(plan)[index][unknown], values
    name, val = problems[0]
    info = SYMBOLS[name]
    given = ", ".join(f"{n} = {_format_number(knowns[n])} {_unit_of(n)}".rstrip() for n in plan.inputs)
    what = "the requested" if name == unknown else "an intermediate"
    raise DesignValueError(
        name, val, f"{info.allowed} ({info.description})", unit=_unit_of(info.name),
        hint=f"No feasible design: {what} value {name} comes out of range from "
             f"{', '.join(plan.keys)} with {given}. Change one of these inputs",
    )


def _check_consistency(knowns: dict[str, float]) -> None:
    """Raise when the knowns over-determine an equation and disagree with it."""
    for key, eq in EQUATIONS.items():
        if not all(n in knowns for n in eq.symbols):
            continue
        (lhs_inputs, lhs), (rhs_inputs, rhs) = _sides(key)
        left = float(lhs(*(knowns[n] for n in lhs_inputs)))
        try:
            right = float(rhs(*(knowns[n] for n in rhs_inputs)))
        except ZeroDivisionError:
            right = math.inf
        if not math.isclose(left, right, rel_tol=1e-6, abs_tol=1e-12):
            name = eq.symbols[0]
            raise DesignValueError(
                name, knowns[name], f"consistent with {eq.text} (= {_format_number(right)})",
                unit=_unit_of(name), hint="Give fewer knowns or make them agree",
            )


def _solution(unknown: str, knowns: dict[str, float], only=None, *, value_scale: float = 1.0,
              unit: str | None = None, caution: str = "") -> EquationSolution:
    value, plan, expr, produced = _solve(unknown, knowns, only)
    info = SYMBOLS[unknown]
    steps_text, steps_latex = _steps(plan, {**knowns, **produced})
    used = {n: knowns[n] for n in plan.inputs}
    lhs_text, lhs_latex = unknown, info.latex
    body_text = _render(expr, None, latex=False)
    body_latex = _render(expr, None, latex=True)
    num_text = _render(expr, used, latex=False)
    num_latex = _render(expr, used, latex=True)
    unit_text = "" if info.unit == "1" else info.unit
    result_text = f"{_format_number(value)} {unit_text}".rstrip()
    result_latex = _format_latex_number(value) + (rf"\ \mathrm{{{unit_text}}}" if unit_text else "")
    unit = info.unit if unit is None else unit
    shown = value * value_scale
    if unit != info.unit:
        result_text += f" = {_format_number(shown)} {unit}"
        result_latex += rf" = {_format_latex_number(shown)}\ \mathrm{{{unit}}}"
    return EquationSolution(
        quantity=unknown,
        value=shown,
        unit=unit,
        equation_keys=plan.keys,
        equation_text=f"{lhs_text} = {body_text}",
        equation_latex=f"{lhs_latex} = {body_latex}",
        substituted_text=f"{lhs_text} = {num_text} = {result_text}",
        substituted_latex=f"{lhs_latex} = {num_latex} = {result_latex}",
        knowns=tuple((n, v, SYMBOLS[n].unit) for n, v in used.items()),
        steps_text=steps_text,
        steps_latex=steps_latex,
        caution=caution,
    )


def _steps(plan: _Plan, values: Mapping[str, float]) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """Each equation of the plan solved for its own symbol, with numbers in."""
    texts, latexes = [], []
    for key, name in zip(plan.keys, plan.produced):
        eq = EQUATIONS[key]
        others = frozenset(n for n in eq.symbols if n != name)
        step = _plan(name, others, (key,))
        expr = _closed_forms(step)[0][name]
        used = {n: values[n] for n in others}
        info = SYMBOLS[name]
        unit = "" if info.unit == "1" else info.unit
        texts.append(f"{name} = {_render(expr, None, False)} = {_render(expr, used, False)} = "
                     f"{_format_number(values[name])} {unit}".rstrip())
        latexes.append(f"{info.latex} = {_render(expr, None, True)} = {_render(expr, used, True)} = "
                       + _format_latex_number(values[name]) + (rf"\ \mathrm{{{unit}}}" if unit else ""))
    return tuple(texts), tuple(latexes)


def _validate_knowns(knowns: dict) -> dict[str, float]:
    checked = {}
    for name, value in knowns.items():
        if name not in SYMBOLS:
            close = _close_matches(name, SYMBOLS)
            extra = f"; did you mean {', '.join(close)}?" if close else ""
            raise TypeError(f"unknown symbol {name!r}{extra} Known symbols: {', '.join(SYMBOLS)}")
        checked[name] = _check_known(name, value)
    return checked


def _with_ideal(knowns: dict[str, float], unknown: str) -> dict[str, float]:
    """The knowns plus the ideal value of every symbol that has one and was not given."""
    out = dict(knowns)
    for name, info in SYMBOLS.items():
        if info.ideal is not None and name != unknown and name not in out:
            out[name] = info.ideal
    return out


def solve_for(unknown: str, *, equation: str | None = None, detail: bool = False, **knowns):
    """Solve the design equations for one unknown.

    The equations needed are chosen from the registry (or only ``equation``
    when given), solved symbolically with sympy (cached) and evaluated with
    the knowns.

    Parameters
    ----------
    unknown : str
        Symbol to solve for, a key of :data:`SYMBOLS` (e.g. ``"T_max"``).
    equation : str, optional
        Use only this registry equation.
    detail : bool, optional
        Return an :class:`EquationSolution` with the working instead of a float.
    **knowns : float
        Known values by symbol name, in the units of :data:`SYMBOLS`.

    Returns
    -------
    float or EquationSolution
        The value of ``unknown`` in its model unit.

    Raises
    ------
    TypeError
        For a keyword that is not a symbol name.
    DesignValueError
        When a known is out of range (field = the symbol name), the knowns
        disagree with each other, they do not determine ``unknown``, or the
        solution (or a value on the way) is out of range: no feasible design.

    Examples
    --------
    >>> round(solve_for("T_max", n_motor_rpm=1500), 12)
    0.01
    """
    if unknown not in SYMBOLS:
        close = _close_matches(unknown, SYMBOLS)
        raise DesignValueError("unknown", unknown, f"one of {', '.join(SYMBOLS)}",
                               hint=f"Did you mean {', '.join(close)}?" if close else "")
    if unknown in knowns:
        raise DesignValueError("unknown", unknown, "a symbol not also given as known")
    only = None
    if equation is not None:
        only = (_equation_by_key(equation).key,)
    checked = _with_ideal(_validate_knowns(knowns), unknown)
    _check_consistency(checked)
    if detail:
        return _solution(unknown, checked, only)
    return _solve(unknown, checked, only)[0]


# --------------------------------------------------------------------------- helpers


def _require(field_name: str, value, domain: str, unit: str = "", describe: str = "") -> float:
    if not _is_real_number(value):
        raise DesignValueError(field_name, value, f"a number {_DOMAIN_WORDS[domain]}", unit=unit)
    value = float(value)
    if not _check_domain(domain, value):
        raise DesignValueError(field_name, value, f"a finite number {_DOMAIN_WORDS[domain]}", unit=unit,
                               hint=describe)
    return value


def max_travel_per_turn_for_resolution(*, output_resolution: float, sensor_resolution_deg: float,
                                       output_unit: str = "mm") -> EquationSolution:
    """Largest output travel per motor turn that still gives an output resolution.

    Parameters
    ----------
    output_resolution : float
        Required output resolution, in ``output_unit`` (mm or deg).
    sensor_resolution_deg : float
        Angle resolution of the sensor on the motor shaft, deg.
    output_unit : str, optional
        Label of the output unit, used in the returned unit ("mm" or "deg").

    Returns
    -------
    EquationSolution
        ``p`` in ``output_unit`` per motor turn; any travel per turn up to
        this value meets the resolution.
    """
    r_out = _require("output_resolution", output_resolution, "positive", output_unit)
    r_motor = _require("sensor_resolution_deg", sensor_resolution_deg, "positive", "deg")
    return _solution("p", {"r_out": r_out, "r_motor_deg": r_motor}, ("output_resolution",),
                     unit=f"{output_unit}/turn")


def min_reduction_for_resolution(*, output_resolution: float, sensor_resolution_deg: float,
                                 travel_per_output_turn: float, output_unit: str = "mm") -> EquationSolution:
    """Smallest overall reduction that gives a required output resolution.

    Parameters
    ----------
    output_resolution : float
        Required output resolution, in ``output_unit``.
    sensor_resolution_deg : float
        Angle resolution of the sensor on the motor shaft, deg.
    travel_per_output_turn : float
        Output travel per turn of the output member, ``output_unit`` per turn
        (the lead of a screw in mm; 360 for a rotary output in deg).
    output_unit : str, optional
        Label of the output unit ("mm" or "deg").

    Returns
    -------
    EquationSolution
        ``G`` (motor turns per output turn). A real train must have a
        reduction of at least this value.

    Examples
    --------
    >>> r = min_reduction_for_resolution(output_resolution=0.001, sensor_resolution_deg=0.09,
    ...                                  travel_per_output_turn=2.0)
    >>> round(r.value, 9)
    0.5
    """
    r_out = _require("output_resolution", output_resolution, "positive", output_unit)
    r_motor = _require("sensor_resolution_deg", sensor_resolution_deg, "positive", "deg")
    lead = _require("travel_per_output_turn", travel_per_output_turn, "positive", f"{output_unit}/turn")
    return _solution("G", {"r_out": r_out, "r_motor_deg": r_motor, "l_out": lead},
                     ("output_resolution", "travel_per_motor_turn"))


def max_poll_period_for_speed_s(*, motor_speed_rpm: float | None = None, output_speed: float | None = None,
                                travel_per_turn: float | None = None, output_unit: str = "mm",
                                narrowest_quadrant_deg: float = 90.0, jitter: float = 0.0,
                                margin: float = 0.0) -> EquationSolution:
    """Longest poll period that tracks a back-drive speed without losing a count.

    Give either ``motor_speed_rpm``, or ``output_speed`` with ``travel_per_turn``.
    The latch geometry, jitter and margin are those of
    :func:`turnkit.bounds.max_poll_period_s` (the same formula, solved here
    symbolically).

    Parameters
    ----------
    motor_speed_rpm : float, optional
        Fastest motor-shaft speed while asleep, rpm.
    output_speed : float, optional
        Fastest output speed while asleep, ``output_unit`` per second.
    travel_per_turn : float, optional
        Output travel per motor turn, ``output_unit`` per turn.
    output_unit : str, optional
        Label of the output unit ("mm" or "deg").
    narrowest_quadrant_deg : float, optional
        Narrowest quadrant of a unit inside the latch tolerances, deg
        (:func:`turnkit.latches.quadrant_widths`); 90 for ideal edges.
    jitter : float, optional
        Poll jitter as a fraction of the poll period, in [0, 0.5).
    margin : float, optional
        Counting margin asked for, in [0, 1).

    Returns
    -------
    EquationSolution
        ``T_max`` in s, with the lost-count caution.
    """
    geometry = {"w_q": _require("narrowest_quadrant_deg", narrowest_quadrant_deg, "positive", "deg"),
                "j": _require("jitter", jitter, "fraction"), "m": _require("margin", margin, "fraction")}
    if motor_speed_rpm is not None:
        if output_speed is not None or travel_per_turn is not None:
            raise TypeError("give either motor_speed_rpm, or output_speed with travel_per_turn, not both")
        n = _require("motor_speed_rpm", motor_speed_rpm, "positive", "rpm")
        return _solution("T_max", {"n_motor_rpm": n, **geometry}, ("max_poll_period",),
                         caution=LOST_COUNT_CAUTION)
    if output_speed is None or travel_per_turn is None:
        raise TypeError("give motor_speed_rpm, or both output_speed and travel_per_turn")
    v = _require("output_speed", output_speed, "positive", f"{output_unit}/s")
    p = _require("travel_per_turn", travel_per_turn, "positive", f"{output_unit}/turn")
    return _solution("T_max", {"v_out": v, "p": p, **geometry}, ("backdrive_motor_speed", "max_poll_period"),
                     caution=LOST_COUNT_CAUTION)


@dataclass(frozen=True, slots=True)
class _Battery:
    life_years: float
    capacity_mAh: float | None
    k_T: float
    u: float
    s: float


def _battery(life_years, capacity_mAh, temperature_derating, usable_fraction, self_discharge_per_year):
    return _Battery(
        _require("life_years", life_years, "positive", "year"),
        None if capacity_mAh is None else _require("capacity_mAh", capacity_mAh, "positive", "mAh"),
        _require("temperature_derating", temperature_derating, "unit_interval"),
        _require("usable_fraction", usable_fraction, "unit_interval"),
        _require("self_discharge_per_year", self_discharge_per_year, "fraction", "1/year"),
    )


def _self_discharge_check(b: _Battery) -> None:
    # With linear self-discharge the cell is empty after k_T·u/s years even with no load.
    if b.s > 0 and b.k_T * b.u - b.s * b.life_years <= 0:
        limit = b.k_T * b.u / b.s
        raise DesignValueError(
            "life_years", b.life_years, f"< {_format_number(limit)} years (k_T*u/s)", unit="year",
            hint=f"Self-discharge of {b.s:.3g} of the capacity per year uses up the usable fraction "
                 f"{b.k_T * b.u:.3g} (k_T*u) before that life even with no load; no capacity or current meets it",
        )


def max_sleep_current_for_life_uA(*, life_years: float, capacity_mAh: float, awake_current_uA: float,
                                  awake_time_s: float, poll_period_s: float, temperature_derating: float = 1.0,
                                  usable_fraction: float = 1.0,
                                  self_discharge_per_year: float = 0.0) -> EquationSolution:
    """Largest sleep current that still gives the required battery life.

    Parameters
    ----------
    life_years : float
        Required life, years (8766 h each).
    capacity_mAh : float
        Nominal capacity, mAh.
    awake_current_uA : float
        Current while awake for a poll, uA.
    awake_time_s : float
        Time awake per poll, s.
    poll_period_s : float
        Poll period, s (at least ``awake_time_s``).
    temperature_derating, usable_fraction : float, optional
        Derating factors in (0, 1].
    self_discharge_per_year : float, optional
        Fraction of the nominal capacity lost per year, in [0, 1).

    Returns
    -------
    EquationSolution
        ``I_sleep`` in uA (the working is shown in mA).

    Raises
    ------
    DesignValueError
        When the wake pulses alone (or self-discharge) use up the budget.
    """
    b = _battery(life_years, capacity_mAh, temperature_derating, usable_fraction, self_discharge_per_year)
    i_awake = _require("awake_current_uA", awake_current_uA, "positive", "uA") / 1000.0
    t_awake = _require("awake_time_s", awake_time_s, "positive", "s")
    period = _require("poll_period_s", poll_period_s, "positive", "s")
    if t_awake >= period:
        raise DesignValueError("awake_time_s", t_awake, f"< poll_period_s ({period:g} s)", unit="s",
                               hint="the device would never sleep")
    _self_discharge_check(b)
    knowns = {"L": b.life_years, "C_nom": b.capacity_mAh, "k_T": b.k_T, "u": b.u, "s": b.s,
              "I_awake": i_awake, "t_awake": t_awake, "T": period}
    i_max = solve_for("I_avg", L=b.life_years, C_nom=b.capacity_mAh, k_T=b.k_T, u=b.u, s=b.s)
    wake_share = t_awake / period * i_awake
    if i_max <= wake_share:
        longest = b.capacity_mAh * b.k_T * b.u / (wake_share * HOURS_PER_YEAR + b.s * b.capacity_mAh)
        raise DesignValueError(
            "life_years", b.life_years,
            f"< {_format_number(longest, 4)} years, the life of this schedule with zero sleep current",
            unit="year",
            hint=f"The wake pulses alone average {wake_share * 1000:.4g} uA, more than the "
                 f"{i_max * 1000:.4g} uA this battery allows for {b.life_years:g} years even with zero "
                 "sleep current; poll less often, wake for less time or at lower current, or use a bigger battery",
        )
    return _solution("I_sleep", knowns, ("usable_capacity", "battery_life", "average_current"),
                     value_scale=1000.0, unit="uA", caution=BATTERY_CAUTION)


def min_capacity_for_life_mAh(*, life_years: float, average_current_uA: float | None = None,
                              sleep_current_uA: float | None = None, awake_current_uA: float | None = None,
                              awake_time_s: float | None = None, poll_period_s: float | None = None,
                              temperature_derating: float = 1.0, usable_fraction: float = 1.0,
                              self_discharge_per_year: float = 0.0) -> EquationSolution:
    """Smallest nominal capacity that lasts the required life.

    Give ``average_current_uA``, or the schedule (``sleep_current_uA``,
    ``awake_current_uA``, ``awake_time_s``, ``poll_period_s``).

    Parameters
    ----------
    life_years : float
        Required life, years (8766 h each).
    average_current_uA : float, optional
        Average current, uA.
    sleep_current_uA, awake_current_uA : float, optional
        Currents asleep and awake, uA.
    awake_time_s, poll_period_s : float, optional
        Awake time per poll and poll period, s.
    temperature_derating, usable_fraction : float, optional
        Derating factors in (0, 1].
    self_discharge_per_year : float, optional
        Fraction of the nominal capacity lost per year, in [0, 1).

    Returns
    -------
    EquationSolution
        ``C_nom`` in mAh.

    Raises
    ------
    DesignValueError
        When self-discharge alone empties any cell before ``life_years``.

    Examples
    --------
    >>> r = min_capacity_for_life_mAh(life_years=1.0, average_current_uA=10.0)
    >>> round(r.value, 6)
    87.66
    """
    b = _battery(life_years, None, temperature_derating, usable_fraction, self_discharge_per_year)
    _self_discharge_check(b)
    base = {"L": b.life_years, "k_T": b.k_T, "u": b.u, "s": b.s}
    schedule = (sleep_current_uA, awake_current_uA, awake_time_s, poll_period_s)
    if average_current_uA is not None:
        if any(v is not None for v in schedule):
            raise TypeError("give either average_current_uA or the schedule, not both")
        base["I_avg"] = _require("average_current_uA", average_current_uA, "positive", "uA") / 1000.0
        return _solution("C_nom", base, ("capacity_for_life",), caution=BATTERY_CAUTION)
    if any(v is None for v in schedule):
        raise TypeError("give average_current_uA, or all of sleep_current_uA, awake_current_uA, "
                        "awake_time_s and poll_period_s")
    base["I_sleep"] = _require("sleep_current_uA", sleep_current_uA, "nonnegative", "uA") / 1000.0
    base["I_awake"] = _require("awake_current_uA", awake_current_uA, "positive", "uA") / 1000.0
    base["t_awake"] = _require("awake_time_s", awake_time_s, "positive", "s")
    base["T"] = _require("poll_period_s", poll_period_s, "positive", "s")
    if base["t_awake"] > base["T"]:
        raise DesignValueError("awake_time_s", base["t_awake"], f"<= poll_period_s ({base['T']:g} s)", unit="s")
    return _solution("C_nom", base, ("average_current", "capacity_for_life"), caution=BATTERY_CAUTION)


# --------------------------------------------------------------------------- conflicts


@dataclass(frozen=True, slots=True)
class RelaxOption:
    """One way out of a conflict: change one requirement or design value.

    Attributes
    ----------
    requirement : str
        ``"backdrive_speed"``, ``"life"``, ``"sleep_current"``,
        ``"wake_charge"`` or ``"capacity"``.
    current : float
        Its value now, in ``unit``.
    needed : float
        The value that just makes a poll period fit (nan when impossible).
    unit : str
        Unit of ``current`` and ``needed``.
    change_percent : float
        Relative change needed, percent of ``current`` (inf when impossible).
    possible : bool
        False when changing this alone cannot resolve the conflict.
    text : str
        One sentence saying what to do.
    """

    requirement: str
    current: float
    needed: float
    unit: str
    change_percent: float
    possible: bool
    text: str


@dataclass(frozen=True, slots=True)
class RelaxAdvice:
    """Whether any poll period meets both the back-drive speed and the life.

    Attributes
    ----------
    feasible : bool
        True when some poll period meets both.
    shortest_poll_period_s : float
        Shortest period the life allows (inf when none does).
    longest_poll_period_s : float
        Longest period the back-drive speed allows.
    summary : str
        The verdict in words, with numbers.
    options : tuple of RelaxOption
        When infeasible: each requirement and how far it must move, smallest
        relative change first. Empty when feasible.
    recommended : RelaxOption or None
        The possible option with the smallest relative change.
    equation_keys : tuple of str
        The equations behind the bounds.
    caution : str
        Lost-count and battery cautions.
    """

    feasible: bool
    shortest_poll_period_s: float
    longest_poll_period_s: float
    summary: str
    options: tuple[RelaxOption, ...]
    recommended: RelaxOption | None
    equation_keys: tuple[str, ...]
    caution: str


def _pct(current: float, needed: float) -> float:
    return abs(needed - current) / current * 100.0 if current else math.inf


#: Closed forms of the solves :func:`relax_advice` needs: unknown -> (equations, function of the
#: knowns). Written out once from sympy's solutions of the registry equations, in the order of
#: operations of their lambdified form (so they give the same floats), so that sizing gives its
#: advice without sympy; tests/test_closed_forms.py checks each against ``sympy.solve``.
CLOSED_FORMS = MappingProxyType({
    "T_max": (("max_poll_period",),
              lambda n_motor_rpm, w_q=90.0, m=0.0, j=0.0: w_q*(1 - m)/(6*n_motor_rpm*(1 + 2*j))),
    "I_avg": (("usable_capacity", "battery_life"),
              lambda C_nom, L, k_T, s, u: (1/8766)*C_nom*(-L*s + k_T*u)/L),
    "T": (("average_current",), lambda I_avg, I_awake, I_sleep, t_awake: t_awake*(I_awake - I_sleep)/(I_avg - I_sleep)),
    "L": (("battery_life",), lambda C_nom, C_use, I_avg, s: C_use/(C_nom*s + 8766*I_avg)),
    "C_nom": (("capacity_for_life",), lambda I_avg, L, k_T, s, u: -8766*I_avg*L/(L*s - k_T*u)),
})


def solve_closed(unknown: str, **knowns: float) -> float:
    """Value of ``unknown`` from its closed form in :data:`CLOSED_FORMS` (no sympy).

    Same value and the same refusals as :func:`solve_for` for those unknowns and knowns.

    Parameters
    ----------
    unknown : str
        A key of :data:`CLOSED_FORMS`.
    **knowns : float
        The knowns, by symbol name, in the units of :data:`SYMBOLS`.

    Returns
    -------
    float
        ``unknown`` in its model unit.

    Raises
    ------
    DesignValueError
        When a known or the result is out of its symbol's range (no feasible design).
    """
    keys, form = CLOSED_FORMS[unknown]
    checked = _validate_knowns(knowns)
    try:
        value = float(form(**checked))
    except (ZeroDivisionError, OverflowError, ValueError):
        value = math.nan
    info = SYMBOLS[unknown]
    if not _check_domain(info.domain, value):
        given = ", ".join(f"{n} = {_format_number(checked[n])} {_unit_of(n)}".rstrip() for n in sorted(checked))
        raise DesignValueError(
            unknown, value, f"{info.allowed} ({info.description})", unit=_unit_of(info.name),
            hint=f"No feasible design: the requested value {unknown} comes out of range from "
                 f"{', '.join(keys)} with {given}. Change one of these inputs",
        )
    return value


def relax_advice(*, backdrive_motor_speed_rpm: float, life_years: float, capacity_mAh: float,
                 sleep_current_uA: float, awake_current_uA: float, awake_time_s: float,
                 temperature_derating: float = 1.0, usable_fraction: float = 1.0,
                 self_discharge_per_year: float = 0.0, travel_per_turn: float | None = None,
                 output_unit: str = "mm", narrowest_quadrant_deg: float = 90.0, jitter: float = 0.0,
                 margin: float = 0.0) -> RelaxAdvice:
    """Say whether a poll period meets both the back-drive speed and the life.

    The back-drive speed bounds the poll period from above
    (``max_poll_period``); the life bounds it from below through
    ``average_current`` and ``battery_life``. When the bounds cross, each
    requirement is moved alone, the others held, to where they just meet.

    Parameters
    ----------
    backdrive_motor_speed_rpm : float
        Fastest motor-shaft speed to track while asleep, rpm.
    life_years : float
        Required battery life, years (8766 h each).
    capacity_mAh : float
        Nominal battery capacity, mAh.
    sleep_current_uA, awake_current_uA : float
        Currents asleep and awake, uA (awake >= sleep).
    awake_time_s : float
        Time awake per poll, s.
    temperature_derating, usable_fraction : float, optional
        Derating factors in (0, 1].
    self_discharge_per_year : float, optional
        Fraction of the nominal capacity lost per year, in [0, 1).
    travel_per_turn : float, optional
        Output travel per motor turn, ``output_unit`` per turn; when given,
        the speed advice is also stated at the output.
    output_unit : str, optional
        Label of the output unit ("mm" or "deg").
    narrowest_quadrant_deg, jitter, margin : float, optional
        Latch geometry (deg), poll jitter (fraction of the period) and counting
        margin (fraction), as for :func:`max_poll_period_for_speed_s`.

    Returns
    -------
    RelaxAdvice
    """
    n = _require("backdrive_motor_speed_rpm", backdrive_motor_speed_rpm, "positive", "rpm")
    b = _battery(life_years, capacity_mAh, temperature_derating, usable_fraction, self_discharge_per_year)
    i_s = _require("sleep_current_uA", sleep_current_uA, "nonnegative", "uA") / 1000.0
    i_a = _require("awake_current_uA", awake_current_uA, "positive", "uA") / 1000.0
    if i_a < i_s:
        raise DesignValueError("awake_current_uA", i_a * 1000, f">= sleep_current_uA ({i_s * 1000:g} uA)", unit="uA")
    t_a = _require("awake_time_s", awake_time_s, "positive", "s")
    p = None if travel_per_turn is None else _require("travel_per_turn", travel_per_turn, "positive",
                                                      f"{output_unit}/turn")
    c = b.capacity_mAh
    battery = {"C_nom": c, "k_T": b.k_T, "u": b.u, "s": b.s}
    geometry = {"w_q": _require("narrowest_quadrant_deg", narrowest_quadrant_deg, "positive", "deg"),
                "j": _require("jitter", jitter, "fraction"), "m": _require("margin", margin, "fraction")}
    t_hi = solve_closed("T_max", n_motor_rpm=n, **geometry)
    # Average current the life allows; none at all when self-discharge alone empties the cell.
    margin = b.k_T * b.u - b.s * b.life_years
    i_max = solve_closed("I_avg", L=b.life_years, **battery) if margin > 0 else 0.0
    wake_charge = t_a * (i_a - i_s)  # mA*s above the sleep current, per poll
    if i_max > i_s and wake_charge > 0:
        t_life = solve_closed("T", I_avg=i_max, I_sleep=i_s, I_awake=i_a, t_awake=t_a)
    elif i_max >= i_s and wake_charge == 0:
        t_life = 0.0
    else:
        t_life = math.inf
    t_lo = max(t_life, t_a)
    keys = ("max_poll_period", "usable_capacity", "battery_life", "average_current")
    caution = LOST_COUNT_CAUTION + " " + BATTERY_CAUTION
    speed_words = f"{n:.4g} rpm at the motor"
    if p is not None:
        speed_words += f" ({n * p / 60:.4g} {output_unit}/s at the output)"
    if t_lo <= t_hi:
        summary = (f"Poll periods from {t_lo:.4g} s to {t_hi:.4g} s meet both the back-drive speed of "
                   f"{speed_words} and the life of {b.life_years:g} years (the longest counts the speed "
                   f"with {geometry['m'] * 100:.3g} % margin, latch tolerances and jitter included).")
        return RelaxAdvice(True, t_lo, t_hi, summary, (), None, keys, caution)

    options = []
    # 1. Back-drive speed: slow enough that the shortest life-allowed period tracks it.
    if math.isfinite(t_lo):
        # The max_poll_period equation solved for the speed at T_max = t_lo.
        n_new = geometry["w_q"] * (1.0 - geometry["m"]) / (6.0 * t_lo * (1.0 + 2.0 * geometry["j"]))
        text = f"Lower the back-drive speed to {n_new:.4g} rpm at the motor"
        if p is not None:
            text += f" ({n_new * p / 60:.4g} {output_unit}/s at the output)"
        text += f", from {n:.4g} rpm."
        options.append(RelaxOption("backdrive_speed", n, n_new, "rpm", _pct(n, n_new), True, text))
    else:
        options.append(RelaxOption("backdrive_speed", n, math.nan, "rpm", math.inf, False,
                                   "Lowering the back-drive speed alone does not help: no poll period, "
                                   "however long, meets the life."))
    # Average current at the longest period the speed allows.
    if t_hi >= t_a:
        i_at_hi = i_s + t_a / t_hi * (i_a - i_s)
        life_new = solve_closed("L", I_avg=i_at_hi, C_use=c * b.k_T * b.u, C_nom=c, s=b.s)
        options.append(RelaxOption("life", b.life_years, life_new, "year", _pct(b.life_years, life_new), True,
                                   f"Accept a life of {life_new:.4g} years instead of {b.life_years:g}."))
        # 3. Sleep current, everything else held, at T = t_hi.
        duty = t_a / t_hi
        i_s_new = (i_max - duty * i_a) / (1 - duty) if duty < 1 else -1.0
        if i_s_new > 0:
            options.append(RelaxOption(
                "sleep_current", i_s * 1000, i_s_new * 1000, "uA", _pct(i_s * 1000, i_s_new * 1000), True,
                f"Cut the sleep current to {i_s_new * 1000:.4g} uA, from {i_s * 1000:.4g} uA."))
        else:
            options.append(RelaxOption(
                "sleep_current", i_s * 1000, math.nan, "uA", math.inf, False,
                "Cutting the sleep current alone does not help: the wake pulses alone exceed the budget."))
        # 4. Wake charge per poll (above the sleep current).
        if i_max > i_s:
            q_new = (i_max - i_s) * t_hi  # mA*s
            q_now = wake_charge
            text = (f"Cut the charge per wake-up to {q_new * 1000:.4g} uC from {q_now * 1000:.4g} uC "
                    f"(e.g. awake time {q_new / (i_a - i_s) * 1e6:.4g} us at {i_a * 1000:.4g} uA, "
                    f"from {t_a * 1e6:.4g} us)." if i_a > i_s else
                    f"Cut the charge per wake-up to {q_new * 1000:.4g} uC.")
            options.append(RelaxOption("wake_charge", q_now * 1000, q_new * 1000, "uC",
                                       _pct(q_now * 1000, q_new * 1000), True, text))
        else:
            options.append(RelaxOption(
                "wake_charge", wake_charge * 1000, math.nan, "uC", math.inf, False,
                "Cutting the wake-up charge alone does not help: the sleep current alone exceeds the budget."))
        # 5. Capacity.
        if margin > 0:
            c_new = solve_closed("C_nom", I_avg=i_at_hi, L=b.life_years, k_T=b.k_T, u=b.u, s=b.s)
            options.append(RelaxOption("capacity", c, c_new, "mAh", _pct(c, c_new), True,
                                       f"Use a battery of at least {c_new:.4g} mAh nominal, from {c:.4g} mAh, "
                                       f"polling every {t_hi * 1e3:.4g} ms."))
        else:
            options.append(RelaxOption(
                "capacity", c, math.nan, "mAh", math.inf, False,
                "A bigger battery alone does not help: self-discharge empties any cell before this life."))
    else:
        for req, cur, unit in (("life", b.life_years, "year"), ("sleep_current", i_s * 1000, "uA"),
                               ("wake_charge", wake_charge * 1000, "uC"), ("capacity", c, "mAh")):
            options.append(RelaxOption(
                req, cur, math.nan, unit, math.inf, False,
                f"Changing the {req.replace('_', ' ')} alone does not help: the back-drive speed needs a poll "
                f"period of {t_hi:.4g} s, shorter than the awake time of {t_a:.4g} s."))
    options.sort(key=lambda o: (not o.possible, o.change_percent))
    recommended = next((o for o in options if o.possible), None)
    lo_words = f"at least {t_lo:.4g} s" if math.isfinite(t_lo) else "a longer period than any"
    summary = (f"No poll period meets both requirements: the back-drive speed of {speed_words} needs a "
               f"poll period of at most {t_hi:.4g} s, while the life of {b.life_years:g} years needs "
               f"{lo_words}.")
    if recommended is not None:
        summary += f" Smallest change: {recommended.text}"
    else:
        summary += " No single change resolves it; change the design (gear train, schedule or battery)."
    return RelaxAdvice(False, t_lo, t_hi, summary, tuple(options), recommended, keys, caution)
