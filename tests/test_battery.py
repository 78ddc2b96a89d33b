"""Tests for turnkit.battery: cell table, packs, life and capacity needed."""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from turnkit.battery import (
    BATTERY_EVENT_CAUTION,
    COIN_CELL_CAUTION,
    HOURS_PER_YEAR,
    Cell,
    Pack,
    available_cells,
    capacity_needed_mAh,
    cell,
    estimate_life,
    life_from_capacity_years,
    life_years,
)
from turnkit.errors import DesignValueError, TurnkitWarning
from turnkit.units import registry

_VALUE_FIELDS = (
    "nominal_voltage_V", "capacity_mAh", "cutoff_voltage_V", "self_discharge_per_year",
    "max_pulse_mA", "max_continuous_mA", "temperature_curve", "shelf_life_years",
    "discharge_curve", "resistance_curve", "self_discharge_activation_eV",
)


def _coin(self_discharge=0.0) -> Cell:
    return Cell.custom("test coin", nominal_voltage_V=3.0, capacity_mAh=225.0,
                       self_discharge_per_year=self_discharge, max_pulse_mA=15.0,
                       max_continuous_mA=3.0, shelf_life_years=10.0, cutoff_voltage_V=2.0,
                       is_coin=True, is_lithium=True)


# ---------------------------------------------------------------- the table


def test_every_table_value_names_its_source():
    for key in available_cells():
        c = cell(key)
        for name in _VALUE_FIELDS:
            text = c.source_of(name)
            assert text.strip(), (key, name)
            # A cited source, a rule marked as common practice, or a value marked as
            # recalled, with the reason it could not be checked.
            recalled = "(from memory:" in text and len(text.split("(from memory:", 1)[1]) > 20
            assert "(common practice" in text or "IEC" in text or "Linden" in text or recalled, (key, name)


def test_table_has_the_chemistries_and_sizes_asked_for():
    keys = set(available_cells())
    assert {"alkaline_aa", "alkaline_aaa", "li_fes2_aa", "li_mno2_2032", "li_mno2_2_3a",
            "li_mno2_123", "li_socl2_aa", "li_socl2_c", "li_socl2_d"} <= keys


def test_nominal_voltages_follow_the_system_letters():
    # Source: IEC 60086-1 system table (L alkaline 1.5 V, F Li-FeS2 1.5 V,
    # C Li-MnO2 3.0 V, E Li-SOCl2 3.6 V), as summarised by a national battery association
    # (table number from memory).
    expected = {"alkaline": 1.5, "lithium iron disulfide": 1.5,
                "lithium manganese dioxide": 3.0, "lithium thionyl chloride": 3.6}
    for key in available_cells():
        c = cell(key)
        prefix = next(p for p in expected if c.chemistry.startswith(p))
        assert c.nominal_voltage_V == expected[prefix]


@pytest.mark.parametrize("key, low, high", [
    # Typical capacities (from memory: makers' low-drain figures as summarised in encyclopedic
    # articles; not checked against a data sheet): LR6 2.0-3.0 Ah, CR2032 220-235 mAh,
    # CR17345 (123 size) 1.3-1.55 Ah, ER14505 2.4-2.7 Ah.
    ("alkaline_aa", 2000.0, 3000.0),
    ("li_mno2_2032", 220.0, 235.0),
    ("li_mno2_123", 1300.0, 1550.0),
    ("li_socl2_aa", 2400.0, 2700.0),
])
def test_typical_capacities_sit_inside_published_ranges(key, low, high):
    assert low <= cell(key).capacity_mAh <= high


def test_self_discharge_sits_inside_published_ranges():
    # Source: shelf-life figures of makers' data (common practice): alkaline 2-3 %/yr, Li-MnO2 1-2 %/yr, Li-SOCl2 about 1 %/yr or less.
    assert 0.02 <= cell("alkaline_aa").self_discharge_per_year <= 0.03
    assert 0.01 <= cell("li_mno2_2032").self_discharge_per_year <= 0.02
    assert cell("li_socl2_aa").self_discharge_per_year <= 0.01


def test_only_coin_cells_carry_the_ingestion_caution():
    for key in available_cells():
        c = cell(key)
        assert BATTERY_EVENT_CAUTION in c.cautions
        assert (COIN_CELL_CAUTION in c.cautions) == c.is_coin
    assert cell("li_mno2_2032").is_coin
    text = COIN_CELL_CAUTION.lower()
    assert "out of reach of children" in text and "standards" in text


def test_coin_caution_reaches_the_life_estimate():
    est = estimate_life(cell("li_mno2_2032"), 5.0)
    assert COIN_CELL_CAUTION in est.cautions


def test_unknown_cell_key_lists_the_choices():
    with pytest.raises(DesignValueError, match="li_socl2_aa"):
        cell("unobtainium_aa")


def test_temperature_factor_interpolates_between_points():
    # Hand calculation: li_socl2_aa has (-40 °C, 0.5) and (-20 °C, 0.75);
    # halfway, -30 °C -> 0.625.
    assert cell("li_socl2_aa").temperature_factor(-30.0) == pytest.approx(0.625, rel=1e-12)
    assert cell("li_socl2_aa").temperature_factor(20.0) == 1.0


def test_temperature_outside_operating_range_is_refused_with_the_range():
    with pytest.raises(DesignValueError, match=r"temperature_C.*\[-20, 55\].*°C"):
        cell("alkaline_aa").temperature_factor(-30.0)


# ---------------------------------------------------------------- packs


def test_series_pack_adds_voltage_and_keeps_capacity():
    pack = Pack(cell("li_fes2_aa"), series=2)
    assert pack.nominal_voltage_V == 3.0
    assert pack.cutoff_voltage_V == pytest.approx(1.8)
    assert pack.capacity_mAh == cell("li_fes2_aa").capacity_mAh
    assert pack.max_pulse_mA == cell("li_fes2_aa").max_pulse_mA


def test_parallel_pack_adds_capacity_and_current_and_warns_about_charging():
    pack = Pack(cell("li_socl2_aa"), series=1, parallel=3)
    assert pack.capacity_mAh == 3 * 2600.0
    assert pack.max_pulse_mA == 3 * 150.0
    assert pack.self_discharge_per_year == cell("li_socl2_aa").self_discharge_per_year
    assert any("blocking diode" in c for c in pack.cautions)


def test_parallel_pack_life_is_parallel_times_single_cell_life():
    c = cell("li_socl2_aa")
    one = life_years(c, 30.0, warn=False)
    # Hand calculation: C and s*C both scale with n, so L(n C) = C/(I*8766/n + s C):
    # n = 2, I = 30 uA: 2600 / (0.015*8766 + 26) = 2600 / 157.49 = 16.509 yr.
    two = life_years(Pack(c, parallel=2), 30.0, warn=False)
    assert two == pytest.approx(2600.0 / (0.015 * 8766.0 + 26.0), rel=1e-12)
    assert two > one


@pytest.mark.parametrize("kwargs, field", [
    ({"series": 0}, "Pack.series"),
    ({"parallel": 1.5}, "Pack.parallel"),
    ({"series": True}, "Pack.series"),
])
def test_bad_pack_counts_are_refused_by_name(kwargs, field):
    with pytest.raises(DesignValueError, match=field):
        Pack(cell("alkaline_aa"), **kwargs)


def test_user_cell_validates_its_numbers():
    with pytest.raises(DesignValueError, match=r"Cell.capacity_mAh.*-5.*mAh"):
        Cell.custom("bad", nominal_voltage_V=3.0, capacity_mAh=-5.0,
                    self_discharge_per_year=0.01, max_pulse_mA=10.0, max_continuous_mA=1.0,
                    shelf_life_years=5.0, cutoff_voltage_V=2.0)
    with pytest.raises(DesignValueError, match="Cell.self_discharge_per_year"):
        Cell.custom("bad", nominal_voltage_V=3.0, capacity_mAh=5.0,
                    self_discharge_per_year=2.0, max_pulse_mA=10.0, max_continuous_mA=1.0,
                    shelf_life_years=5.0, cutoff_voltage_V=2.0)
    with pytest.raises(DesignValueError, match="Cell.max_pulse_mA"):
        Cell.custom("bad", nominal_voltage_V=3.0, capacity_mAh=5.0,
                    self_discharge_per_year=0.01, max_pulse_mA=0.5, max_continuous_mA=1.0,
                    shelf_life_years=5.0, cutoff_voltage_V=2.0)
    with pytest.raises(DesignValueError, match="temperature_curve"):
        Cell.custom("bad", nominal_voltage_V=3.0, capacity_mAh=5.0,
                    self_discharge_per_year=0.01, max_pulse_mA=10.0, max_continuous_mA=1.0,
                    shelf_life_years=5.0, cutoff_voltage_V=2.0,
                    temperature_curve=((20.0, 1.0), (0.0, 0.9)))


def test_user_cell_records_user_data_as_source():
    assert _coin().source_of("capacity_mAh") == "user data"


def test_unknown_keyword_is_rejected():
    with pytest.raises(TypeError):
        life_years(cell("alkaline_aa"), 10.0, temprature_C=20.0)


# ---------------------------------------------------------------- life


def test_life_hand_calculation_without_self_discharge():
    # Source: (derived, shown in docs/derivations.md §6):
    # 225 mAh / 10.99 uA = 20 473 h = 2.3355 yr; 225 mAh / 10 uA = 2.5667 yr (8766 h/yr).
    assert life_years(_coin(), 10.99, warn=False) == pytest.approx(2.3355, abs=5e-5)
    assert life_years(_coin(), 10.0, warn=False) == pytest.approx(2.5667, abs=5e-5)


def test_life_hand_calculation_with_self_discharge_solved_jointly():
    # Source: (derived, shown in docs/derivations.md §6): s = 1 %/yr adds 0.25667 uA
    # -> 20 006 h = 2.2822 yr.  L = 225 / (0.01099*8766 + 0.01*225) = 225 / 98.588.
    life = life_years(_coin(0.01), 10.99, warn=False)
    assert life == pytest.approx(225.0 / (0.01099 * 8766.0 + 2.25), rel=1e-12)
    assert life == pytest.approx(2.2822, abs=5e-5)
    # Solving one after the other (capacity less the self-discharge over the
    # load-only life of 2.3355 yr, then divided by the load) gives 2.2810 yr instead.
    sequential = 225.0 * (1 - 0.01 * 2.3355) / (0.01099 * 8766.0)
    assert abs(life - sequential) > 1e-3


def test_life_hand_calculation_with_temperature_and_cutoff():
    # Hand calculation: li_socl2_aa at -20 °C (factor 0.75), 90 % usable above cut-off,
    # 20 uA, s = 0.01: C_use = 2600*0.75*0.9 = 1755 mAh; drain = 0.02*8766 + 0.01*2600
    # = 175.32 + 26 = 201.32 mAh/yr; L = 1755 / 201.32 = 8.71746 yr.
    est = estimate_life(cell("li_socl2_aa"), 20.0, temperature_C=-20.0, usable_fraction=0.9)
    assert est.usable_capacity_mAh == pytest.approx(1755.0, rel=1e-12)
    assert est.life_years == pytest.approx(1755.0 / 201.32, rel=1e-12)
    assert est.drawn_by_load_mAh + est.lost_to_self_discharge_mAh == pytest.approx(1755.0)


def test_life_matches_pint_hours_to_years():
    # Source: pint 0.25 defines year = 365.25 day (Julian year);
    # (225 mAh / 10 uA).to('hour') = 22 500 h.
    u = registry()
    hours = (225 * u.mAh / (10 * u.uA)).to("hour").magnitude
    assert hours == pytest.approx(22500.0)
    expected = (225 * u.mAh / (10 * u.uA)).to("year").magnitude
    assert life_years(_coin(), 10.0, warn=False) == pytest.approx(expected, rel=1e-12)
    assert (1 * u.year).to("hour").magnitude == pytest.approx(HOURS_PER_YEAR)


def test_life_is_vectorised_and_agrees_with_scalar_calls():
    currents = np.array([1.0, 10.0, 100.0])
    out = life_years(cell("li_socl2_aa"), currents, warn=False)
    assert out.shape == (3,)
    for i, value in zip(currents, out):
        assert value == pytest.approx(life_years(cell("li_socl2_aa"), float(i), warn=False))


def test_zero_current_life_is_set_by_self_discharge_alone():
    # Hand calculation: L = C*tf*u / (s*C) = 1/0.01 = 100 yr.
    assert life_years(cell("li_socl2_aa"), 0.0, warn=False) == pytest.approx(100.0)
    assert math.isinf(life_from_capacity_years(100.0, 100.0, 0.0, 0.0))


def test_negative_current_is_refused_with_unit():
    with pytest.raises(DesignValueError, match=r"average_current_uA.*uA"):
        life_years(cell("alkaline_aa"), -1.0)


def test_life_beyond_shelf_life_warns():
    with pytest.warns(TurnkitWarning, match="shelf life"):
        life_years(cell("li_fes2_aa"), 1.0)
    est = estimate_life(cell("li_fes2_aa"), 1.0)
    assert any("shelf life" in w for w in est.warnings)


def test_wake_pulse_over_cell_capability_warns():
    with pytest.warns(TurnkitWarning, match="pulse"):
        life_years(cell("li_mno2_2032"), 20.0, peak_current_mA=25.0)
    est = estimate_life(cell("li_mno2_2032"), 20.0, peak_current_mA=25.0)
    assert any("pulse" in w for w in est.warnings)


def test_pulse_within_capability_gives_no_warning():
    with warnings.catch_warnings():
        warnings.simplefilter("error", TurnkitWarning)
        life_years(cell("li_mno2_2032"), 20.0, peak_current_mA=5.0)


def test_hot_site_warns_that_self_discharge_rises():
    est = estimate_life(cell("li_socl2_aa"), 20.0, temperature_C=60.0)
    assert any("self-discharge" in w for w in est.warnings)


# ---------------------------------------------------------------- capacity needed


def test_capacity_needed_hand_calculation():
    # Hand calculation: 20 uA, 10 years, tf 0.75, u 0.9, s 0.01:
    # C = 0.02*8766*10 / (0.675 - 0.1) = 1753.2 / 0.575 = 3049.0435 mAh.
    c = capacity_needed_mAh(20.0, 10.0, cell("li_socl2_aa"), temperature_C=-20.0,
                            usable_fraction=0.9)
    assert c == pytest.approx(1753.2 / 0.575, rel=1e-12)
    c2 = capacity_needed_mAh(20.0, 10.0, self_discharge_per_year=0.01,
                             temperature_factor=0.75, usable_fraction=0.9)
    assert c2 == pytest.approx(c, rel=1e-12)


def test_capacity_needed_says_clearly_when_infeasible():
    # tf*u/s = 0.675/0.01 = 67.5 years is the longest life any capacity can give.
    with pytest.raises(DesignValueError, match=r"(?s)target_life_years.*67\.5.*Infeasible"):
        capacity_needed_mAh(20.0, 70.0, cell("li_socl2_aa"), temperature_C=-20.0,
                            usable_fraction=0.9)


def test_capacity_needed_uA_years_agree_with_pint():
    # Source: pint 0.25 (year = 365.25 day): 1 uA for 1 year = 8.766 mAh.
    u = registry()
    assert (1 * u.uA * u.year).to("mAh").magnitude == pytest.approx(8.766, rel=1e-12)
    expected = (12.5 * u.uA * 4 * u.year).to("mAh").magnitude
    assert capacity_needed_mAh(12.5, 4.0, self_discharge_per_year=0.0) == pytest.approx(
        expected, rel=1e-12)


@settings(max_examples=60, deadline=None)
@given(
    current=st.floats(0.1, 5000.0),
    life=st.floats(0.1, 20.0),
    s=st.floats(0.0, 0.03),
    tf=st.floats(0.5, 1.0),
    u=st.floats(0.5, 1.0),
)
def test_capacity_needed_and_life_round_trip(current, life, s, tf, u):
    assume(tf * u - s * life > 1e-3)
    cap = capacity_needed_mAh(current, life, self_discharge_per_year=s, temperature_factor=tf,
                              usable_fraction=u)
    back = life_from_capacity_years(cap * tf * u, cap, s, current)
    assert back == pytest.approx(life, rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(i1=st.floats(0.0, 1e4), extra=st.floats(0.0, 1e4), s=st.floats(0.0, 0.05))
def test_life_never_increases_when_current_grows(i1, extra, s):
    a = life_from_capacity_years(1000.0, 1000.0, s, i1)
    b = life_from_capacity_years(1000.0, 1000.0, s, i1 + extra)
    assert b <= a


def test_docs_cell_table_matches_the_code():
    from pathlib import Path

    text = (Path(__file__).resolve().parent.parent / "docs" / "power.md").read_text()
    for key in available_cells():
        c = cell(key)
        row = next(line for line in text.splitlines() if line.startswith(f"| `{key}` |"))
        cells = [x.strip() for x in row.strip("|").split("|")]
        assert float(cells[3]) == c.nominal_voltage_V
        assert float(cells[4]) == c.capacity_mAh
        assert float(cells[6].rstrip(" %")) / 100 == pytest.approx(c.self_discharge_per_year)
        assert cells[7] == f"{c.max_pulse_mA:g} / {c.max_continuous_mA:g}"
        assert float(cells[9]) == c.shelf_life_years


# ---------------------------------------------------------------- site temperature


from turnkit.battery import (  # noqa: E402
    BOLTZMANN_EV_PER_K,
    buffer_capacitance_needed_uF,
    internal_resistance_ohm,
    open_circuit_voltage_V,
    pulse_sag_V,
    self_discharge_factor,
    site_derating,
    usable_fraction_under_pulse,
)


def test_activation_energy_gives_the_doubling_per_ten_degrees_rule():
    # Source: the rule "self-discharge doubles per +10 degC near room temperature" (common practice);
    # the default activation energy is derived from it (docs/power.md).
    assert self_discharge_factor(30.0) == pytest.approx(2.0, rel=1e-3)
    assert self_discharge_factor(20.0) == pytest.approx(1.0)


def test_arrhenius_factor_agrees_with_scipy_constants():
    # Source: CODATA 2018 Boltzmann constant via scipy.constants (independent reference).
    from scipy import constants

    k = constants.k / constants.e
    assert BOLTZMANN_EV_PER_K == pytest.approx(k, rel=1e-9)
    ea, t = 0.7, 60.0
    expected = math.exp(ea / k * (1 / 293.15 - 1 / (t + 273.15)))
    assert self_discharge_factor(t, ea) == pytest.approx(expected, rel=1e-9)


def test_hot_site_multiplies_self_discharge_and_shortens_shelf_life():
    c = cell("li_socl2_aa")
    d = site_derating(c, 60.0)
    assert d.self_discharge_factor == pytest.approx(self_discharge_factor(60.0))
    assert d.self_discharge_factor > 10.0
    assert d.self_discharge_per_year == pytest.approx(c.self_discharge_per_year * d.self_discharge_factor)
    assert d.shelf_life_years == pytest.approx(c.shelf_life_years / d.self_discharge_factor)


def test_site_range_averages_the_arrhenius_factor_over_a_sine_year():
    # Source: independent quadrature of the year-mean with scipy (derived, docs/power.md).
    from scipy import integrate

    c = cell("li_socl2_aa")
    d = site_derating(c, temperature_min_C=-10.0, temperature_max_C=40.0)
    mean, _ = integrate.quad(lambda x: self_discharge_factor(15.0 + 25.0 * math.cos(x)), 0, 2 * math.pi)
    assert d.self_discharge_factor == pytest.approx(mean / (2 * math.pi), rel=1e-6)
    # The year-mean of a convex factor exceeds the factor at the mean temperature (Jensen).
    assert d.self_discharge_factor > self_discharge_factor(15.0)
    # Capacity is derated at the coldest temperature.
    assert d.temperature_factor == pytest.approx(c.temperature_factor(-10.0))


def test_site_range_needs_both_ends_and_the_cells_range():
    with pytest.raises(DesignValueError, match="temperature_max"):
        site_derating(cell("alkaline_aa"), temperature_min_C=-10.0)
    with pytest.raises(DesignValueError, match="operating range"):
        site_derating(cell("alkaline_aa"), temperature_min_C=-30.0, temperature_max_C=20.0)


# ---------------------------------------------------------------- discharge curves and pulses


@pytest.mark.parametrize("key", available_cells())
def test_discharge_curves_start_near_nominal_and_end_at_the_rated_cut_off(key):
    c = cell(key)
    assert open_circuit_voltage_V(c, 1.0) <= c.cutoff_voltage_V + 1e-9
    # Fresh cells sit at or a little above the IEC 60086-1 nominal voltage; half-way
    # down the plateau (lithium) or the slope (alkaline) is within 20 % of it.
    assert c.nominal_voltage_V <= open_circuit_voltage_V(c, 0.0) <= 1.2 * c.nominal_voltage_V
    assert open_circuit_voltage_V(c, 0.5) >= 0.8 * c.nominal_voltage_V
    v = open_circuit_voltage_V(c, np.linspace(0, 1, 101))
    assert np.all(np.diff(v) <= 0)


def test_flat_plateau_cell_delivers_most_of_its_capacity_above_a_high_cut_off():
    # A 3.0 V cut-off on a bobbin Li-SOCl2 cell: the plateau keeps most of the charge
    # above it, where the old straight-line stand-in gave (3.6-3.0)/(3.6-2.0) = 0.375.
    u = usable_fraction_under_pulse(cell("li_socl2_aa"), 3.0)
    assert u > 0.9


def test_usable_fraction_solves_the_loaded_voltage_equation():
    # Hand check: V_oc(D) - I*R = V_cut on the tabulated curve, solved by bisection.
    c = cell("li_mno2_2032")
    r = internal_resistance_ohm(c, 0.0)
    sag = pulse_sag_V(8.0, 5e-3, r)
    d = usable_fraction_under_pulse(c, 2.2, sag)
    lo, hi = 0.0, 1.0
    for _ in range(60):
        mid = 0.5 * (lo + hi)
        lo, hi = (mid, hi) if open_circuit_voltage_V(c, mid) - sag > 2.2 else (lo, mid)
    assert d == pytest.approx(lo, abs=1e-9)
    assert sag == pytest.approx(8e-3 * 30.0)


def test_pack_voltage_and_resistance_scale_with_series_and_parallel():
    c = cell("alkaline_aa")
    p = Pack(c, series=2, parallel=3)
    assert open_circuit_voltage_V(p, 0.5) == pytest.approx(2 * open_circuit_voltage_V(c, 0.5))
    assert internal_resistance_ohm(p, 20.0) == pytest.approx(internal_resistance_ohm(c, 20.0) * 2 / 3)


def test_fresh_cell_that_sags_below_the_cut_off_has_nothing_usable():
    c = cell("li_mno2_2032")
    assert usable_fraction_under_pulse(c, 2.8, pulse_sag_V(40.0, 1e-3, 15.0)) == 0.0


def test_buffer_capacitor_sag_follows_the_rc_step_response():
    # Source: first-order RC step response, v = I*R*(1 - exp(-t/RC)), checked against
    # scipy's ODE solver for the same circuit (derived, docs/power.md).
    from scipy.integrate import solve_ivp

    i, r, c_uF, t = 0.01, 20.0, 470.0, 2e-3
    c = c_uF * 1e-6
    # Drop below open circuit: C dv/dt = I - v/R, v(0) = 0.
    sol = solve_ivp(lambda _t, v: [(i - v[0] / r) / c], (0, t), [0.0], rtol=1e-10, atol=1e-12)
    assert pulse_sag_V(10.0, t, r, c_uF) == pytest.approx(sol.y[0, -1], rel=1e-6)
    assert pulse_sag_V(10.0, t, r, c_uF) <= i * t / c
    assert pulse_sag_V(10.0, t, r) == pytest.approx(i * r)


@given(st.floats(0.1, 500.0), st.floats(1e-5, 0.5), st.floats(0.01, 0.5), st.floats(0.05, 100.0))
def test_capacitor_sized_by_charge_keeps_the_drop_within_the_limit(i_mA, t_s, dv, r):
    # The advice C >= I*t/dV always passes the sag check it is meant to fix.
    c_uF = buffer_capacitance_needed_uF(i_mA, t_s, dv)
    assert pulse_sag_V(i_mA, t_s, r, c_uF) <= dv * (1 + 1e-9)


def test_pulse_sag_is_vectorised_and_agrees_with_scalar_calls():
    i = np.array([1.0, 10.0, 100.0])
    t = np.array([1e-3, 0.02, 5.0])
    out = pulse_sag_V(i, t, 2.0, np.array([0.0, 470.0, 1e6]))
    assert out == pytest.approx([pulse_sag_V(float(a), float(b), 2.0, float(c))
                                 for a, b, c in zip(i, t, [0.0, 470.0, 1e6])])
