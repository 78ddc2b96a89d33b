"""Tests of the symbolic design equations and inverse design.

Every symbolic solution is checked against a formula written out here by hand
(or a published worked value), and against numpy through sympy.lambdify.
"""

from __future__ import annotations

import math
import subprocess
import sys
from functools import lru_cache

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit.equations import (
    BATTERY_CAUTION,
    EQUATIONS,
    HOURS_PER_YEAR,
    LOST_COUNT_CAUTION,
    SYMBOLS,
    equation,
    max_poll_period_for_speed_s,
    max_sleep_current_for_life_uA,
    max_travel_per_turn_for_resolution,
    min_capacity_for_life_mAh,
    min_reduction_for_resolution,
    relax_advice,
    solve_for,
)
from turnkit.errors import DesignValueError

sympy = pytest.importorskip("sympy")

REL = 1e-9
FAST = settings(max_examples=30, deadline=None)


# --------------------------------------------------------------------------- registry


def test_importing_equations_does_not_import_sympy():
    code = "import sys, turnkit, turnkit.equations; print('sympy' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"


def test_every_equation_has_units_source_and_both_forms():
    assert len(EQUATIONS) == 13
    for key, eq in EQUATIONS.items():
        assert eq.key == key
        assert set(eq.units) == set(eq.symbols)
        assert all(eq.units[name] for name in eq.symbols)
        assert eq.source.startswith("(common practice)") or "(" in eq.source
        assert eq.text.startswith(eq.symbols[0] + " = ")
        assert eq.latex.startswith(SYMBOLS[eq.symbols[0]].latex + " = ")
        assert {s.name for s in eq.sympy_eq.free_symbols} == set(eq.symbols)


def _same_equation(a, b) -> bool:
    return sympy.simplify((a.lhs - a.rhs) - (b.lhs - b.rhs)) == 0


@pytest.mark.parametrize("key", list(EQUATIONS))
def test_plain_text_form_parses_to_the_same_equation(key):
    eq = EQUATIONS[key]
    names = {name: sympy.Symbol(name, real=True) for name in SYMBOLS}
    lhs, rhs = eq.text.split(" = ")
    parsed = sympy.Eq(sympy.sympify(lhs, locals=names), sympy.sympify(rhs, locals=names))
    assert _same_equation(parsed, eq.sympy_eq)


@pytest.mark.parametrize("key", list(EQUATIONS))
def test_latex_form_parses_to_the_same_equation(key):
    from sympy.parsing.latex import parse_latex

    eq = EQUATIONS[key]
    by_latex = {info.latex: sympy.Symbol(name, real=True) for name, info in SYMBOLS.items()}
    parsed = parse_latex(eq.latex, backend="lark")
    parsed = parsed.xreplace({s: by_latex[str(s.name)] for s in parsed.free_symbols})
    assert _same_equation(parsed, eq.sympy_eq)


def test_unknown_equation_key_suggests_a_close_one():
    with pytest.raises(DesignValueError, match="average_current"):
        equation("average_curent")


# --------------------------------------------------------------------------- reference values


@pytest.mark.parametrize("period_s, speed_rpm", [(0.1, 150.0), (0.01, 1500.0), (0.001, 15000.0)])
def test_trackable_speed_matches_published_poll_bound(period_s, speed_rpm):
    # Source: (derived, shown in docs/counter.md §6) guaranteed tracking: n_max = 15 / T_poll
    # (from modulo-4 quadrant arithmetic).
    assert solve_for("n_max_rpm", T=period_s) == pytest.approx(speed_rpm, rel=REL)
    assert solve_for("T_max", n_motor_rpm=speed_rpm) == pytest.approx(period_s, rel=REL)
    # Half a turn per poll is where three quadrant steps (silent aliasing) become possible.
    assert solve_for("n_silent_rpm", T=period_s) == pytest.approx(2 * speed_rpm, rel=REL)


def test_output_side_trackable_speed_divides_by_the_reduction():
    # Source: (derived, shown in docs/counter.md §6): output side ÷ G (G 50, 10 ms → 30 rpm).
    # A rotary output in degrees: 360 deg per output turn, so v_out = n_out * 360 / 60.
    p = solve_for("p", l_out=360.0, G=50.0)
    v_out = 30.0 * 360.0 / 60.0
    assert solve_for("n_motor_rpm", v_out=v_out, p=p) == pytest.approx(1500.0, rel=REL)
    assert solve_for("T_max", v_out=v_out, l_out=360.0, G=50.0) == pytest.approx(0.01, rel=REL)


def test_output_resolution_of_12_bit_amr_through_50_to_1():
    # Source: (derived, shown in docs/derivations.md §4): 12-bit AMR mech LSB 180°/2^12 = 0.0439453125°;
    # through G 50 → 0.00087890625° at the output.
    lsb_mech = 180.0 / 2**12
    r_out = solve_for("r_out", r_motor_deg=lsb_mech, l_out=360.0, G=50.0)
    assert r_out == pytest.approx(0.00087890625, rel=REL)
    result = min_reduction_for_resolution(output_resolution=0.00087890625, sensor_resolution_deg=lsb_mech,
                                          travel_per_output_turn=360.0, output_unit="deg")
    assert result.value == pytest.approx(50.0, rel=REL)


def test_counter_range_16_bits_covers_65535_quarter_turns():
    # Source: (derived, shown in docs/derivations.md §1) counter range: k bits hold 2^k quarter-turn counts;
    # k 16, G 50 → 16 384 sensor turns = 327.68 output turns.
    quarters = solve_for("N_q", S=327.68 * 360.0, l_out=360.0, G=50.0)
    assert quarters == pytest.approx(65536.0, rel=REL)
    # 65536 quarters from one end need 65537 counts: 17 bits; one fewer fits in 16.
    assert solve_for("b", N_q=65536.0, g=0) == 17
    assert solve_for("b", N_q=65535.0, g=0) == 16
    assert solve_for("b", N_q=65535.0, g=1) == 17


@pytest.mark.parametrize("k", range(1, 53))
def test_counter_bits_exact_at_powers_of_two(k):
    # (common practice) ceil(log2(n + 1)) equals n.bit_length() for whole n >= 0; float log2
    # of 2^k must not add a spurious bit.
    for n in (2**k - 1, 2**k):
        assert solve_for("b", N_q=float(n), g=0) == n.bit_length()


def test_average_current_and_life_match_worked_example():
    # Source: (derived, shown in docs/derivations.md §6): 1 uA sleep, 1 mA for 100 us every 10 ms → 10.99 uA;
    # 225 mAh / 10.99 uA = 20 473 h = 2.3355 yr (8766 h/yr); with s = 1 %/yr → 2.2822 yr.
    i_avg = solve_for("I_avg", I_sleep=0.001, I_awake=1.0, t_awake=100e-6, T=0.01)
    assert i_avg * 1000 == pytest.approx(10.99, rel=1e-9)  # 1 + (100 us / 10 ms)*(1000 - 1) uA, by hand
    life = solve_for("L", C_use=225.0, I_avg=i_avg, s=0.0, C_nom=225.0)
    assert life == pytest.approx(2.3355, abs=5e-5)
    life_sd = solve_for("L", C_nom=225.0, k_T=1.0, u=1.0, I_avg=i_avg, s=0.01)
    assert life_sd == pytest.approx(2.2822, abs=5e-5)


def test_life_agrees_with_pint_unit_arithmetic():
    # Source: pint 0.25: (225 mAh / 10 uA).to('hour') = 22 500 h;
    # pint's year is the Julian year of 365.25 days, the same 8766 h the model uses.
    from turnkit.units import registry

    ureg = registry()
    years_pint = (225 * ureg.mAh / (10 * ureg.uA)).to("year").magnitude
    years_model = solve_for("L", C_nom=225.0, k_T=1.0, u=1.0, I_avg=0.010, s=0.0)
    assert years_model == pytest.approx(years_pint, rel=1e-12)
    assert ureg.Quantity(1, "year").to("hour").magnitude == pytest.approx(HOURS_PER_YEAR, rel=1e-12)


def test_trackable_speed_agrees_with_pint_unit_arithmetic():
    # Source: pint, independent unit arithmetic: a quarter revolution per poll period, in rpm.
    from turnkit.units import registry

    ureg = registry()
    for period in (0.004, 0.025, 0.3):
        expected = (0.25 * ureg.revolution / (period * ureg.s)).to("revolution / minute").magnitude
        assert solve_for("n_max_rpm", T=period) == pytest.approx(expected, rel=1e-12)


@FAST
@given(period=st.floats(1e-4, 10.0))
def test_speed_bounds_agree_with_the_numeric_bounds_module(period):
    # The numeric engine's own bounds (turnkit.bounds, derived there from the 90-degree
    # quantization of the quadrant code) must give the same numbers as the symbolic model.
    from turnkit import bounds

    assert solve_for("n_max_rpm", T=period) == pytest.approx(bounds.max_trackable_speed_rpm(period), rel=1e-12)
    assert solve_for("n_silent_rpm", T=period) == pytest.approx(bounds.silent_error_speed_rpm(period), rel=1e-12)
    speed = bounds.max_trackable_speed_rpm(period)
    assert max_poll_period_for_speed_s(motor_speed_rpm=speed).value == pytest.approx(
        bounds.max_poll_period_s(speed), rel=1e-12)


# --------------------------------------------------------------------------- hand formulas


# Each case: unknown, knowns, the same quantity computed by a formula written out here.
# (common practice) for all: the algebra is done by hand, independently of sympy.
HAND_CASES = [
    ("G", dict(r_out=0.002, r_motor_deg=0.09, l_out=4.0), lambda k: k["r_motor_deg"] * k["l_out"] / (360 * k["r_out"])),
    ("p", dict(r_out=0.01, r_motor_deg=0.5), lambda k: 360 * k["r_out"] / k["r_motor_deg"]),
    ("v_out", dict(n_motor_rpm=3000.0, p=0.2), lambda k: k["n_motor_rpm"] * k["p"] / 60),
    ("p", dict(n_motor_rpm=1200.0, v_out=5.0), lambda k: 60 * k["v_out"] / k["n_motor_rpm"]),
    ("T", dict(n_max_rpm=600.0), lambda k: 15 / k["n_max_rpm"]),
    ("T", dict(n_silent_rpm=600.0), lambda k: 30 / k["n_silent_rpm"]),
    ("S", dict(N_q=1000.0, p=0.5), lambda k: k["N_q"] * k["p"] / 4),
    ("T", dict(I_avg=0.02, I_sleep=0.002, I_awake=3.0, t_awake=0.0005),
     lambda k: k["t_awake"] * (k["I_awake"] - k["I_sleep"]) / (k["I_avg"] - k["I_sleep"])),
    ("I_sleep", dict(I_avg=0.02, I_awake=3.0, t_awake=0.0005, T=0.1),
     lambda k: (k["I_avg"] - k["t_awake"] / k["T"] * k["I_awake"]) / (1 - k["t_awake"] / k["T"])),
    ("t_awake", dict(D=0.004, T=0.25), lambda k: k["D"] * k["T"]),
    ("I_avg", dict(L=3.0, C_nom=1000.0, k_T=0.8, u=0.9, s=0.02),
     lambda k: (k["C_nom"] * k["k_T"] * k["u"] / k["L"] - k["s"] * k["C_nom"]) / 8766),
    ("C_nom", dict(I_avg=0.015, L=10.0, k_T=0.9, u=0.95, s=0.01),
     lambda k: k["I_avg"] * 8766 * k["L"] / (k["k_T"] * k["u"] - k["s"] * k["L"])),
    ("s", dict(L=4.0, C_use=200.0, I_avg=0.005, C_nom=240.0),
     lambda k: (k["C_use"] / k["L"] - k["I_avg"] * 8766) / k["C_nom"]),
    ("k_T", dict(C_use=150.0, C_nom=225.0, u=0.9), lambda k: k["C_use"] / (k["C_nom"] * k["u"])),
    # Chains through several equations: life from the whole schedule and battery.
    ("L", dict(I_sleep=0.0015, I_awake=2.0, t_awake=0.0002, T=0.05, C_nom=1200.0, k_T=0.85, u=0.95, s=0.01),
     lambda k: k["C_nom"] * k["k_T"] * k["u"]
     / ((k["I_sleep"] + k["t_awake"] / k["T"] * (k["I_awake"] - k["I_sleep"])) * 8766 + k["s"] * k["C_nom"])),
    ("b", dict(S=250.0, l_out=2.0, G=37.5, g=1),
     lambda k: math.ceil(math.log2(4 * k["S"] / (k["l_out"] / k["G"]) + 1)) + k["g"]),
]


@pytest.mark.parametrize("unknown, knowns, hand", HAND_CASES, ids=[c[0] for c in HAND_CASES])
def test_symbolic_solution_matches_hand_formula(unknown, knowns, hand):
    assert solve_for(unknown, **knowns) == pytest.approx(hand(knowns), rel=REL)


@lru_cache(maxsize=None)
def _numpy_solution(key: str, unknown: str):
    """Solve one equation with sympy directly and lambdify it for numpy."""
    eq = EQUATIONS[key].sympy_eq
    target = sympy.Symbol(unknown, real=True)
    (expr,) = sympy.solve(eq, target)
    args = sorted(expr.free_symbols, key=lambda s: s.name)
    return tuple(a.name for a in args), sympy.lambdify(args, expr, modules="numpy")


# Realistic ranges per symbol, in the model's units, so that forward values stay feasible.
RANGES = {
    "I_avg": (0.001, 0.1), "I_sleep": (0.0005, 0.01), "I_awake": (0.5, 20.0),
    "t_awake": (1e-5, 1e-2), "T": (0.01, 1.0), "C_nom": (100.0, 3000.0), "C_use": (100.0, 3000.0),
    "k_T": (0.6, 1.0), "u": (0.6, 1.0), "s": (0.0, 0.03), "L": (1.0, 10.0), "N_q": (1.0, 1e6),
    "w_q": (10.0, 90.0), "w_2q": (100.0, 180.0), "j": (0.0, 0.4), "m": (0.0, 0.7),
}


def _draw(rng, name):
    if SYMBOLS[name].domain == "flag":
        return float(rng.integers(0, 2))
    low, high = RANGES.get(name, (0.5, 50.0))
    return float(rng.uniform(low, high))


SOLVABLE = [(key, name) for key, eq in EQUATIONS.items() for name in eq.solvable_for]


@pytest.mark.parametrize("key, unknown", SOLVABLE, ids=[f"{k}-{n}" for k, n in SOLVABLE])
def test_solve_for_agrees_with_numpy_lambdify_and_satisfies_equation(key, unknown):
    # Draw a point, compute the left-hand side forward with numpy, remove one symbol and
    # solve for it again: solve_for must return the drawn value, as numpy does.
    rng = np.random.default_rng(7)
    eq = EQUATIONS[key].sympy_eq
    lhs_name = eq.lhs.name
    fwd_names, fwd = _numpy_solution(key, lhs_name)
    names, fn = _numpy_solution(key, unknown)
    for _ in range(15):
        point = {n: _draw(rng, n) for n in EQUATIONS[key].symbols if n != lhs_name}
        point[lhs_name] = float(fwd(*(np.float64(point[n]) for n in fwd_names)))
        knowns = {n: v for n, v in point.items() if n != unknown}
        expected = float(fn(*(np.float64(knowns[n]) for n in names)))
        got = solve_for(unknown, equation=key, **knowns)
        assert got == pytest.approx(expected, rel=1e-12)
        assert got == pytest.approx(point[unknown], rel=1e-9)
        # Exact rational residual: put the solved value back into the equation.
        subs = {sympy.Symbol(n, real=True): sympy.Rational(v) for n, v in {**knowns, unknown: got}.items()}
        residual = (eq.lhs - eq.rhs).xreplace(subs)
        scale = abs(float(eq.lhs.xreplace(subs))) + 1.0
        assert abs(float(residual)) <= 1e-9 * scale


def test_substituted_form_evaluates_to_the_value():
    result = solve_for("L", detail=True, I_sleep=0.0015, I_awake=2.0, t_awake=0.0002, T=0.05,
                       C_nom=1200.0, k_T=0.85, u=0.95, s=0.01)
    _, numbers, _ = result.substituted_text.split(" = ", 2)
    assert float(sympy.sympify(numbers)) == pytest.approx(result.value, rel=1e-8)
    assert result.equation_keys == ("average_current", "usable_capacity", "battery_life")
    assert len(result.steps_text) == 3
    for step in result.steps_text:
        _, _, numbers, shown = step.split(" = ")
        assert float(sympy.sympify(numbers)) == pytest.approx(float(shown.split()[0]), rel=1e-5)
    assert r"\frac" in result.equation_latex


# --------------------------------------------------------------------------- round trips


@FAST
@given(G=st.floats(1.0, 5000.0), r_motor=st.floats(0.001, 2.0), lead=st.floats(0.1, 400.0))
def test_reduction_round_trip(G, r_motor, lead):
    r_out = solve_for("r_out", r_motor_deg=r_motor, l_out=lead, G=G)
    back = min_reduction_for_resolution(output_resolution=r_out, sensor_resolution_deg=r_motor,
                                        travel_per_output_turn=lead)
    assert back.value == pytest.approx(G, rel=1e-9)
    p = max_travel_per_turn_for_resolution(output_resolution=r_out, sensor_resolution_deg=r_motor)
    assert p.value == pytest.approx(lead / G, rel=1e-9)


@FAST
@given(period=st.floats(1e-4, 10.0), lead=st.floats(0.01, 100.0))
def test_poll_period_round_trip(period, lead):
    n = solve_for("n_max_rpm", T=period)
    assert max_poll_period_for_speed_s(motor_speed_rpm=n).value == pytest.approx(period, rel=1e-9)
    v_out = n * lead / 60.0
    back = max_poll_period_for_speed_s(output_speed=v_out, travel_per_turn=lead)
    assert back.value == pytest.approx(period, rel=1e-9)


@FAST
@given(
    sleep_uA=st.floats(0.1, 50.0), awake_uA=st.floats(100.0, 20000.0), awake_s=st.floats(1e-5, 1e-2),
    periods=st.floats(2.0, 1000.0), capacity=st.floats(50.0, 20000.0),
    k_T=st.floats(0.5, 1.0), u=st.floats(0.5, 1.0), sd=st.floats(0.0, 0.03),
)
def test_sleep_current_and_capacity_round_trip(sleep_uA, awake_uA, awake_s, periods, capacity, k_T, u, sd):
    period = awake_s * periods
    life = solve_for("L", I_sleep=sleep_uA / 1000, I_awake=awake_uA / 1000, t_awake=awake_s, T=period,
                     C_nom=capacity, k_T=k_T, u=u, s=sd)
    battery = dict(temperature_derating=k_T, usable_fraction=u, self_discharge_per_year=sd)
    back = max_sleep_current_for_life_uA(life_years=life, capacity_mAh=capacity, awake_current_uA=awake_uA,
                                         awake_time_s=awake_s, poll_period_s=period, **battery)
    assert back.value == pytest.approx(sleep_uA, rel=1e-6)
    cap = min_capacity_for_life_mAh(life_years=life, sleep_current_uA=sleep_uA, awake_current_uA=awake_uA,
                                    awake_time_s=awake_s, poll_period_s=period, **battery)
    assert cap.value == pytest.approx(capacity, rel=1e-9)


# --------------------------------------------------------------------------- bad input, infeasible


def test_negative_known_names_field_value_and_unit():
    with pytest.raises(DesignValueError, match=r"I_sleep must be a finite number >= 0, not -0\.5 mA") as err:
        solve_for("I_avg", I_sleep=-0.5, I_awake=1.0, t_awake=0.001, T=0.1)
    assert err.value.field == "I_sleep"


def test_numpy_scalars_are_accepted_and_booleans_rejected():
    assert solve_for("n_max_rpm", T=np.float32(0.5)) == pytest.approx(30.0, rel=1e-6)
    with pytest.raises(DesignValueError, match="g must be a real number"):
        solve_for("b", N_q=10.0, g=True)


def test_unknown_keyword_is_rejected_with_suggestion():
    with pytest.raises(TypeError, match="did you mean I_sleep"):
        solve_for("I_avg", I_slep=0.001, I_awake=1.0, t_awake=0.001, T=0.1)
    with pytest.raises(TypeError):
        max_poll_period_for_speed_s(motor_speed_rpm=100.0, speed_rpm=3.0)


def test_awake_longer_than_period_is_infeasible():
    with pytest.raises(DesignValueError, match="D must be"):
        solve_for("D", t_awake=0.2, T=0.1)


def test_too_few_knowns_says_what_to_give():
    with pytest.raises(DesignValueError, match="average_current: give"):
        solve_for("I_sleep", I_avg=0.01)


def test_step_function_is_not_inverted():
    with pytest.raises(DesignValueError, match="N_q"):
        solve_for("N_q", b=12.0, g=0)


def test_disagreeing_knowns_are_reported():
    with pytest.raises(DesignValueError, match="consistent with"):
        solve_for("T_max", T=0.1, n_max_rpm=100.0, n_motor_rpm=10.0)


def test_wake_pulses_alone_exceed_life_budget():
    # By hand: 1 mA for 10 ms every 100 ms averages 100 uA; 225 mAh for 5 years allows
    # 225/(5*8766) mA = 5.13 uA; even with no sleep current the life is 225/(0.1*8766) = 0.2567 yr.
    with pytest.raises(DesignValueError, match=r"< 0\.2567 years.*wake pulses alone") as err:
        max_sleep_current_for_life_uA(life_years=5.0, capacity_mAh=225.0, awake_current_uA=1000.0,
                                      awake_time_s=0.01, poll_period_s=0.1)
    assert err.value.field == "life_years"


def test_self_discharge_alone_makes_capacity_infeasible():
    # 3 %/yr over 40 years takes 120 % of the cell: no capacity suffices.
    with pytest.raises(DesignValueError, match=r"life_years must be < 33\.3333 years") as err:
        min_capacity_for_life_mAh(life_years=40.0, average_current_uA=5.0, self_discharge_per_year=0.03)
    assert "no capacity" in str(err.value)


def test_helpers_carry_cautions():
    assert max_poll_period_for_speed_s(motor_speed_rpm=60.0).caution == LOST_COUNT_CAUTION
    assert "wrong place" in LOST_COUNT_CAUTION and "functional-safety" in LOST_COUNT_CAUTION
    cap = min_capacity_for_life_mAh(life_years=1.0, average_current_uA=10.0)
    assert cap.caution == BATTERY_CAUTION and "coin cell" in BATTERY_CAUTION
    # Source: (derived, shown in docs/derivations.md §6): 225 mAh / 10 uA = 22 500 h; one 8766 h year → 87.66 mAh.
    assert cap.value == pytest.approx(87.66, rel=1e-12)


# --------------------------------------------------------------------------- conflicts


SCHEDULE = dict(life_years=5.0, capacity_mAh=225.0, sleep_current_uA=1.0, awake_current_uA=1000.0,
                awake_time_s=100e-6)


def test_relax_advice_finds_window_when_requirements_fit():
    advice = relax_advice(backdrive_motor_speed_rpm=300.0, **SCHEDULE)
    # By hand (common practice): T_hi = 15/300 = 0.05 s; budget I_max = 225/(5*8766) mA;
    # T_lo = t_a (I_a - I_s)/(I_max - I_s).
    i_max = 225.0 / (5 * 8766)
    t_lo = 100e-6 * (1.0 - 0.001) / (i_max - 0.001)
    assert advice.feasible
    assert advice.longest_poll_period_s == pytest.approx(0.05, rel=REL)
    assert advice.shortest_poll_period_s == pytest.approx(t_lo, rel=1e-9)
    assert advice.options == () and advice.recommended is None
    assert "meet both" in advice.summary


def test_relax_advice_numbers_each_just_resolve_the_conflict():
    speed = 1500.0
    advice = relax_advice(backdrive_motor_speed_rpm=speed, travel_per_turn=2.0, **SCHEDULE)
    assert not advice.feasible
    assert advice.shortest_poll_period_s > advice.longest_poll_period_s
    by_name = {o.requirement: o for o in advice.options}
    assert set(by_name) == {"backdrive_speed", "life", "sleep_current", "wake_charge", "capacity"}
    # Here the wake pulses alone (9.99 uA) exceed the 5.13 uA budget: sleep current cannot help.
    assert not by_name["sleep_current"].possible
    # Source: (derived, shown in docs/derivations.md §6): at T = 10 ms the schedule averages 10.99 uA → 2.3355 years
    # from 225 mAh; that is the life to accept.
    assert by_name["life"].needed == pytest.approx(2.3355, abs=5e-5)
    assert advice.recommended is by_name["life"] or advice.recommended == by_name["life"]

    def apply(option, factor):
        kw = dict(SCHEDULE, backdrive_motor_speed_rpm=speed)
        if option.requirement == "backdrive_speed":
            kw["backdrive_motor_speed_rpm"] = option.needed * factor
        elif option.requirement == "life":
            kw["life_years"] = option.needed * factor
        elif option.requirement == "capacity":
            kw["capacity_mAh"] = option.needed / factor
        elif option.requirement == "wake_charge":
            kw["awake_time_s"] = SCHEDULE["awake_time_s"] * option.needed / option.current * factor
        return relax_advice(**kw).feasible

    for option in advice.options:
        if not option.possible:
            continue
        assert apply(option, 0.999), option.requirement   # just past the advice: fits
        assert not apply(option, 1.001), option.requirement  # just short: still conflicts
    assert "50 mm/s" in advice.summary


def test_relax_advice_sleep_current_when_it_is_the_lever():
    kw = dict(SCHEDULE, sleep_current_uA=8.0, awake_time_s=10e-6)
    advice = relax_advice(backdrive_motor_speed_rpm=1500.0, **kw)
    sleep = next(o for o in advice.options if o.requirement == "sleep_current")
    assert sleep.possible
    # By hand: budget 225/(5*8766) mA = 5.1335 uA minus the wake share 0.001 * 1000 uA,
    # shared over the sleeping fraction.
    i_max_uA = 225.0 / (5 * 8766) * 1000
    duty = 10e-6 / 0.01
    assert sleep.needed == pytest.approx((i_max_uA - duty * 1000.0) / (1 - duty), rel=1e-9)
    assert relax_advice(backdrive_motor_speed_rpm=1500.0, **dict(kw, sleep_current_uA=sleep.needed * 0.999)).feasible


def test_relax_advice_when_self_discharge_rules_out_the_life():
    advice = relax_advice(backdrive_motor_speed_rpm=100.0, self_discharge_per_year=0.03,
                          **dict(SCHEDULE, life_years=40.0))
    assert not advice.feasible and math.isinf(advice.shortest_poll_period_s)
    by_name = {o.requirement: o for o in advice.options}
    assert not by_name["capacity"].possible and not by_name["backdrive_speed"].possible
    assert by_name["life"].possible and by_name["life"].needed < 1 / 0.03
    assert advice.recommended == by_name["life"]


def test_relax_advice_when_speed_needs_polls_shorter_than_awake_time():
    advice = relax_advice(backdrive_motor_speed_rpm=200000.0, **SCHEDULE)
    assert not advice.feasible
    assert [o.requirement for o in advice.options if o.possible] == ["backdrive_speed"]
    assert advice.recommended.needed == pytest.approx(15 / advice.shortest_poll_period_s, rel=REL)


def test_relax_advice_rejects_awake_current_below_sleep_current():
    with pytest.raises(DesignValueError, match="awake_current_uA"):
        relax_advice(backdrive_motor_speed_rpm=100.0, **dict(SCHEDULE, awake_current_uA=0.5))


@FAST
@given(period=st.floats(0.001, 1.0), w=st.floats(20.0, 90.0), j=st.floats(0.0, 0.45), m=st.floats(0.0, 0.8))
def test_latch_geometry_bounds_agree_with_the_numeric_bounds_module(period, w, j, m):
    # The symbolic max_trackable_speed and max_poll_period with the narrowest quadrant, jitter and
    # margin equal turnkit.bounds (derived, shown in docs/counter.md); silent onset likewise.
    from turnkit import bounds

    assert solve_for("n_max_rpm", T=period, w_q=w, j=j) == pytest.approx(
        bounds.max_trackable_speed_rpm(period, w, j), rel=1e-12)
    assert solve_for("n_silent_rpm", T=period, w_2q=w + 90.0, j=j) == pytest.approx(
        bounds.silent_error_speed_rpm(period, w + 90.0, j), rel=1e-12)
    speed = bounds.max_trackable_speed_rpm(period, w, j)
    solved = max_poll_period_for_speed_s(motor_speed_rpm=speed, narrowest_quadrant_deg=w, jitter=j, margin=m)
    assert solved.value == pytest.approx(bounds.max_poll_period_s(speed, w, j, m), rel=1e-12)
    assert solved.value == pytest.approx(period * (1 - m), rel=1e-9)
