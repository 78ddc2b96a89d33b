"""Closed forms used by the relax advice: the same solutions as sympy.solve, and no sympy at sizing time."""

from __future__ import annotations

import inspect

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit import equations as eq
from turnkit.errors import DesignValueError

@pytest.mark.parametrize("unknown", sorted(eq.CLOSED_FORMS))
def test_closed_form_is_the_sympy_solution_of_its_equations(unknown):
    import sympy

    keys, form = eq.CLOSED_FORMS[unknown]
    ns = eq._sym()
    system = [eq._sympy_eq(k) for k in keys]
    # Solve the registry equations for the unknown and every other symbol they share but the form does not take.
    names = set(inspect.signature(form).parameters)
    free = {s for e in system for s in e.free_symbols}
    unknowns = [s for s in free if s.name not in names]
    assert getattr(ns, unknown) in unknowns
    solutions = sympy.solve(system, unknowns, dict=True)
    assert len(solutions) == 1
    expected = solutions[0][getattr(ns, unknown)]
    written = form(**{n: getattr(ns, n) for n in names})
    assert sympy.simplify(written - expected) == 0


positive = st.floats(1e-3, 1e4)
unit = st.floats(0.05, 1.0)


@settings(max_examples=60)
@given(n=positive, w_q=st.floats(10, 90), m=st.floats(0, 0.9), j=st.floats(0, 0.5), c=st.floats(10, 5000), life=st.floats(0.1, 20), k_t=unit, u=unit, s=st.floats(0, 0.05),
       i_s=st.floats(0, 0.05), i_a=st.floats(0.1, 20), t_a=st.floats(1e-5, 1e-2), i_avg=st.floats(1e-4, 1.0))
def test_closed_forms_give_the_same_floats_as_solve_for(n, w_q, m, j, c, life, k_t, u, s, i_s, i_a, t_a, i_avg):
    cases = [("T_max", dict(n_motor_rpm=n)), ("T_max", dict(n_motor_rpm=n, w_q=w_q, m=m, j=j)),
             ("I_avg", dict(L=life, C_nom=c, k_T=k_t, u=u, s=s)),
             ("T", dict(I_avg=i_avg + i_s, I_sleep=i_s, I_awake=i_a + i_avg + i_s, t_awake=t_a)),
             ("L", dict(I_avg=i_avg, C_use=c * k_t * u, C_nom=c, s=s)),
             ("C_nom", dict(I_avg=i_avg, L=life, k_T=k_t, u=u, s=s))]
    for unknown, knowns in cases:
        try:
            expected = eq.solve_for(unknown, **knowns)
        except DesignValueError:
            with pytest.raises(DesignValueError):
                eq.solve_closed(unknown, **knowns)
            continue
        assert eq.solve_closed(unknown, **knowns) == pytest.approx(expected, rel=1e-12, abs=0.0)


def test_infeasible_closed_form_is_refused_naming_the_unknown():
    # Self-discharge of 20 %/year empties a cell derated to 0.9 within 4.5 years: no capacity lasts 5.
    with pytest.raises(DesignValueError, match="C_nom"):
        eq.solve_closed("C_nom", I_avg=0.01, L=5.0, k_T=0.9, u=1.0, s=0.2)
