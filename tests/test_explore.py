"""Design-space sweeps, Pareto fronts and Monte Carlo yield, serial and on executors."""

from __future__ import annotations

import math
import multiprocessing
import pickle
from concurrent.futures import ProcessPoolExecutor, ThreadPoolExecutor
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from turnkit import battery as batt
from turnkit.designfile import load_design
from turnkit.errors import DesignValueError, TurnkitWarning
from turnkit.explore import (MonteCarloResult, SweepResult, Tolerance, monte_carlo, pareto_front, pareto_mask,
                             sweep, wilson_interval)
from turnkit.sizing import size
from turnkit.tuning import tunable

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "demo"


@pytest.fixture(scope="module")
def valve():
    return load_design(DEMO / "irrigation-gate-valve.toml")


@pytest.fixture(scope="module")
def crane():
    return load_design(DEMO / "camera-crane-joint.toml")


@pytest.fixture(scope="module")
def valve_at_105ms(valve):
    return tunable(valve, "schedule.poll_period_ms").set(valve, 105.0)


@pytest.fixture(scope="module")
def valve_grid(valve):
    return sweep(valve, {"schedule.poll_period_ms": np.geomspace(2, 200, 6),
                         "gear_train[0].teeth_driven": range(40, 80, 8)}, base_dir=DEMO)


def _same(a: np.ndarray, b: np.ndarray) -> bool:
    if a.dtype == object:
        return a.shape == b.shape and a.tolist() == b.tolist()
    return np.array_equal(a, b, equal_nan=a.dtype.kind == "f")


def _assert_same_sweep(a, b) -> None:
    assert a.all_passed.shape == b.all_passed.shape
    for key in getattr(a, "inputs", {}):
        assert _same(a.inputs[key], b.inputs[key]), key
    for name in ("values", "passed", "margins"):
        da, db = getattr(a, name), getattr(b, name)
        assert list(da) == list(db)
        for key in da:
            assert _same(da[key], db[key]), (name, key)
    for name in ("all_passed", "valid", "reasons"):
        assert _same(getattr(a, name), getattr(b, name)), name


# --- sweeps -------------------------------------------------------------------

def test_grid_is_shaped_like_the_axes(valve_grid):
    assert valve_grid.shape == (6, 5)
    assert list(valve_grid.axes) == ["schedule.poll_period_ms", "gear_train[0].teeth_driven"]
    assert valve_grid.axis_units == {"schedule.poll_period_ms": "ms", "gear_train[0].teeth_driven": ""}
    for key, arr in valve_grid.values.items():
        assert arr.shape == (6, 5), key
    for key in ("counter_range", "output_resolution", "output_accuracy", "half_turn_margin", "backdrive_speed",
                "battery_life"):
        assert valve_grid.passed[key].shape == (6, 5)
        assert valve_grid.margins[key].shape == (6, 5)
    assert valve_grid.units["battery_life_years"] == "years"
    assert valve_grid.units["trackable_output_speed"] == "mm/s"
    assert not valve_grid.values["battery_life_years"].flags.writeable


@pytest.mark.parametrize("index", [(0, 0), (2, 3), (5, 4), (4, 1)])
def test_grid_points_equal_direct_sizing(valve, valve_grid, index):
    i, j = index
    period = float(np.geomspace(2, 200, 6)[i])
    teeth = range(40, 80, 8)[j]
    design = tunable(valve, "schedule.poll_period_ms").set(valve, period)
    design = tunable(design, "gear_train[0].teeth_driven").set(design, teeth)
    direct = size(design, base_dir=DEMO, curves=False, simulate=False)
    assert valve_grid.point(index) == {"schedule.poll_period_ms": period, "gear_train[0].teeth_driven": teeth}
    for v in direct.values:
        if isinstance(v.value, (int, float)) and not isinstance(v.value, bool):
            assert valve_grid.values[v.key][index] == v.value, v.key
    for c in direct.checks:
        assert valve_grid.passed[c.key][index] == c.passed
        assert valve_grid.margins[c.key][index] == c.margin
    assert valve_grid.all_passed[index] == direct.passed
    assert (valve_grid.reasons[index] == "") == direct.passed
    assert valve_grid.design_at(index) == design


def test_failing_points_say_which_requirement_fails(valve_grid):
    # The longest poll period with the least reduction misses the 0.6 mm/s back-drive speed.
    assert not valve_grid.passed["backdrive_speed"][-1, 0]
    assert "backdrive_speed" in valve_grid.reasons[-1, 0]
    assert "needs >= 0.6 mm/s" in valve_grid.reasons[-1, 0]
    assert valve_grid.passing_count == int(np.count_nonzero(valve_grid.all_passed))


def test_invalid_points_are_kept_as_nan_with_their_message(valve):
    res = sweep(valve, {"gear_train[0].teeth_driven": [2, 56, 70], "schedule.poll_period_ms": [20.0, 40.0]},
                outputs=("battery_life_years", "output_resolution"))
    assert res.shape == (3, 2)
    assert res.valid.tolist() == [[False, False], [True, True], [True, True]]
    assert res.invalid_count == 2
    assert np.isnan(res.values["battery_life_years"][0]).all()
    assert np.isnan(res.margins["battery_life"][0]).all()
    assert not res.passed["battery_life"][0].any()
    for msg in res.reasons[0]:
        assert msg.startswith("gear_train[0].teeth_driven = 2: ")
        assert "teeth_driven must be an integer >= 3, not 2" in msg
    assert np.isfinite(res.values["battery_life_years"][1:]).all()
    with pytest.raises(DesignValueError, match="teeth_driven"):
        res.design_at((0, 0))


def test_choice_axis_takes_cell_names(valve):
    res = sweep(valve, {"battery.chemistry": ["li_fes2_aa", "no_such_cell"]}, outputs=("battery_life_years",))
    assert res.valid.tolist() == [True, False]
    assert "battery.chemistry" in res.reasons[1] and "no_such_cell" in res.reasons[1]


def test_unknown_keys_and_outputs_are_refused_by_name(valve):
    with pytest.raises(DesignValueError, match=r"axes\['schedule.poll_period'\]"):
        sweep(valve, {"schedule.poll_period": [1.0]})
    with pytest.raises(DesignValueError, match="sensor.offset_z_mV.*SensorDesign has the fields"):
        sweep(valve, {"sensor.offset_z_mV": [1.0]})
    with pytest.raises(DesignValueError, match="outputs must be a numeric value or check key"):
        sweep(valve, {"schedule.poll_period_ms": [20.0]}, outputs=("battery_life",  "no_such_value"))
    # The exact reduction is a number too (a fraction): it sweeps like its decimal twin.
    exact = sweep(valve, {"schedule.poll_period_ms": [20.0]}, outputs=("ratio", "ratio_float"))
    assert float(exact.values["ratio"][0]) == float(exact.values["ratio_float"][0])
    with pytest.raises(DesignValueError, match="at least one value"):
        sweep(valve, {"schedule.poll_period_ms": []})
    with pytest.raises(TypeError):
        sweep(valve, {"schedule.poll_period_ms": [20.0]}, curves=True)
    with pytest.raises(DesignValueError, match="an ActuatorDesign"):
        sweep("demo/irrigation-gate-valve.toml", {"schedule.poll_period_ms": [20.0]})


def test_check_keys_as_outputs_give_the_check_value(valve):
    res = sweep(valve, {"schedule.poll_period_ms": [10.0, 50.0]}, outputs=("battery_life", "backdrive_speed"))
    direct = size(tunable(valve, "schedule.poll_period_ms").set(valve, 50.0), curves=False, simulate=False)
    assert res.values["backdrive_speed"][1] == direct.check("backdrive_speed").value
    assert res.units["backdrive_speed"] == "mm/s"


def test_design_field_paths_vary_sensor_latch_battery_and_currents(valve):
    res = sweep(valve, {"latches.switch_point_tolerance_deg": [2.0, 30.0],
                        "power.consumers[2].asleep_uA": [0.5, 50.0]},
                outputs=("half_turn_margin_deg", "average_current_uA"))
    expected = replace(valve, latches=replace(valve.latches, switch_point_tolerance_deg=30.0))
    consumers = list(expected.power.consumers)
    consumers[2] = replace(consumers[2], asleep_uA=50.0)
    expected = replace(expected, power=replace(expected.power, consumers=tuple(consumers)))
    direct = size(expected, curves=False, simulate=False)
    assert res.values["half_turn_margin_deg"][1, 1] == direct.value("half_turn_margin_deg").value
    assert res.values["average_current_uA"][1, 1] == direct.value("average_current_uA").value
    assert res.axis_units == {"latches.switch_point_tolerance_deg": "deg", "power.consumers[2].asleep_uA": "uA"}
    assert res.design_at((1, 1)) == expected


def test_simulated_scenarios_get_pass_masks(valve):
    res = sweep(valve, {"schedule.poll_period_ms": [20.0, 300.0]}, base_dir=DEMO, simulate=True,
                outputs=("battery_life_years",))
    key = "scenario:hand wheel, fast crank"
    assert key in res.passed
    direct = size(tunable(valve, "schedule.poll_period_ms").set(valve, 300.0), base_dir=DEMO, curves=False)
    by_name = {s.name: s.passed for s in direct.scenarios}
    assert res.passed[key][1] == by_name["hand wheel, fast crank"]
    assert res.all_passed[1] == direct.passed
    if not by_name["hand wheel, fast crank"]:
        assert "scenario 'hand wheel, fast crank'" in res.reasons[1]


def test_executors_and_chunk_sizes_give_identical_arrays(valve):
    axes = {"schedule.poll_period_ms": [0.5, 5.0, 20.0, 120.0],
            "gear_train[1].teeth_driven": [2, 40, 51, 90],
            "power.sleep_current_uA": [1.4, 30.0]}
    serial = sweep(valve, axes, base_dir=DEMO)
    assert serial.invalid_count > 0
    other_chunks = sweep(valve, axes, base_dir=DEMO, chunk_size=5)
    _assert_same_sweep(serial, other_chunks)
    with ThreadPoolExecutor(max_workers=2) as pool:
        threaded = sweep(valve, axes, base_dir=DEMO, executor=pool, chunk_size=3)
    _assert_same_sweep(serial, threaded)
    # spawn: the workers get everything by pickle, nothing inherited from this process.
    with ProcessPoolExecutor(max_workers=2, mp_context=multiprocessing.get_context("spawn")) as pool:
        processes = sweep(valve, axes, base_dir=DEMO, executor=pool, chunk_size=4)
    _assert_same_sweep(serial, processes)


def test_progress_bar_does_not_change_results(valve, capsys):
    axes = {"schedule.poll_period_ms": [10.0, 20.0, 40.0]}
    quiet = sweep(valve, axes)
    shown = sweep(valve, axes, progress=True)
    _assert_same_sweep(quiet, shown)


def test_designs_and_results_pickle(valve, crane, valve_grid):
    for design in (valve, crane, load_design(DEMO / "window-shade-winder.toml")):
        again = pickle.loads(pickle.dumps(design))
        assert again == design and hash(again) == hash(design)
    grid = pickle.loads(pickle.dumps(valve_grid))
    _assert_same_sweep(grid, valve_grid)
    assert isinstance(grid, SweepResult)


# --- Pareto front ---------------------------------------------------------------

def _oracle(points: np.ndarray, maximize: list[bool]) -> np.ndarray:
    """O(n^2) reference: a row is kept unless another row dominates it."""
    n = len(points)
    keep = np.ones(n, dtype=bool)
    sign = np.where(maximize, -1.0, 1.0)
    for a in range(n):
        if np.isnan(points[a]).any():
            keep[a] = False
            continue
        ca = sign * points[a]
        for b in range(n):
            if b == a or np.isnan(points[b]).any():
                continue
            cb = sign * points[b]
            if np.all(cb <= ca) and np.any(cb < ca):
                keep[a] = False
                break
    return keep


@st.composite
def _point_sets(draw):
    k = draw(st.integers(1, 4))
    n = draw(st.integers(0, 40))
    # Small integers so ties and duplicates are common; a few NaN.
    cell = st.one_of(st.integers(-3, 3).map(float), st.just(math.nan)) if draw(st.booleans()) \
        else st.integers(-3, 3).map(float)
    rows = draw(st.lists(st.lists(cell, min_size=k, max_size=k), min_size=n, max_size=n))
    maximize = draw(st.lists(st.booleans(), min_size=k, max_size=k))
    return np.array(rows, dtype=float).reshape(n, k), maximize


@settings(max_examples=150, deadline=None)
@given(_point_sets())
def test_pareto_mask_matches_brute_force(case):
    points, maximize = case
    assert pareto_mask(points, maximize).tolist() == _oracle(points, maximize).tolist()


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 2**32 - 1))
def test_pareto_mask_matches_brute_force_on_continuous_clouds(seed):
    rng = np.random.default_rng(seed)
    points = rng.normal(size=(120, 3))
    maximize = [True, False, True]
    assert pareto_mask(points, maximize).tolist() == _oracle(points, maximize).tolist()


def test_pareto_front_of_a_sweep_is_the_non_dominated_set(valve_grid):
    objectives = {"battery_life_years": "max", "trackable_output_speed": "max"}
    front = pareto_front(valve_grid, objectives)
    pts = np.column_stack([valve_grid.values[k].reshape(-1) for k in objectives])
    expected = np.flatnonzero(_oracle(pts, [True, True]))
    assert sorted(front.flat_indices.tolist()) == expected.tolist()
    assert np.all(np.diff(front.points[:, 0]) >= 0)
    assert front.units == {"battery_life_years": "years", "trackable_output_speed": "mm/s"}
    i = front.flat_indices[0]
    assert front.axis_values["schedule.poll_period_ms"][0] == valve_grid.point(int(i))["schedule.poll_period_ms"]
    # Longer polling buys life and costs speed: along the front one rises as the other falls.
    assert np.all(np.diff(front.points[:, 1]) <= 0)


def test_pareto_front_honours_a_mask_and_skips_invalid_points(valve):
    res = sweep(valve, {"gear_train[0].teeth_driven": [2, 40, 56, 90], "schedule.poll_period_ms": [5.0, 50.0]},
                outputs=("battery_life_years", "trackable_output_speed"))
    objectives = {"battery_life_years": "max", "trackable_output_speed": "max"}
    front = pareto_front(res, objectives)
    assert res.valid.reshape(-1)[front.flat_indices].all()
    only_fast = res.values["trackable_output_speed"] > 5.0
    masked = pareto_front(res, objectives, mask=only_fast)
    assert only_fast.reshape(-1)[masked.flat_indices].all()
    with pytest.raises(DesignValueError, match="'max' or 'min'"):
        pareto_front(res, {"battery_life_years": "maximum"})
    with pytest.raises(DesignValueError, match="an output of the sweep"):
        pareto_front(res, {"average_current_uA": "min"})


# --- Wilson interval --------------------------------------------------------------

@pytest.mark.parametrize("k,n,conf", [(0, 20, 0.95), (1, 29, 0.95), (15, 148, 0.95), (81, 263, 0.95),
                                      (200, 200, 0.95), (97, 200, 0.9), (3, 7, 0.99), (1, 1, 0.5)])
def test_wilson_interval_equals_scipy(k, n, conf):
    from scipy import stats  # in the test extra

    # Source: E. B. Wilson, "Probable inference, the law of succession, and statistical inference",
    # J. Amer. Statist. Assoc. 22 (1927) 209-212; reference implementation
    # scipy.stats.binomtest(k, n).proportion_ci(method="wilson").
    ci = stats.binomtest(k, n).proportion_ci(confidence_level=conf, method="wilson")
    low, high = wilson_interval(k, n, conf)
    assert low == pytest.approx(ci.low, rel=1e-12, abs=1e-15)
    assert high == pytest.approx(ci.high, rel=1e-12, abs=1e-15)


def test_wilson_interval_worked_example():
    # Source: R. G. Newcombe, "Two-sided confidence intervals for the single proportion: comparison of
    # seven methods", Statistics in Medicine 17 (1998) 857-872, example 81/263 -> 0.2553 to 0.3662
    # with the score method (from memory; recomputed by hand to 4 digits).
    low, high = wilson_interval(81, 263)
    assert round(low, 4) == 0.2553 and round(high, 4) == 0.3662


def test_wilson_interval_refuses_impossible_counts():
    with pytest.raises(DesignValueError, match="successes"):
        wilson_interval(5, 4)
    with pytest.raises(DesignValueError, match="trials"):
        wilson_interval(0, 0)
    with pytest.raises(DesignValueError, match="confidence"):
        wilson_interval(1, 4, 1.0)


# --- Monte Carlo ----------------------------------------------------------------------

def test_tolerances_validate_their_inputs():
    with pytest.raises(DesignValueError, match="Tolerance.distribution"):
        Tolerance("triangular", 1.0)
    with pytest.raises(DesignValueError, match="Tolerance.spread"):
        Tolerance.normal(-0.1)
    with pytest.raises(DesignValueError, match="Tolerance.spread"):
        Tolerance.uniform(math.inf)


def test_yield_of_a_known_binomial_case_lies_in_its_wilson_interval(valve):
    # Only the back-drive check depends on the poll period here, and it passes exactly when the
    # motor turns at most the narrowest quadrant with the 30 % margin per poll: latches of 8 deg
    # tolerance and 3 deg hysteresis powered per poll leave 90 - 2 (8 + 1.5) = 71 deg; 0.6 mm/s at
    # 0.25 mm per motor turn is 864 deg/s, so 71 * 0.7 / 864 s = 57.523 ms (derived, shown in
    # docs/counter.md).
    nominal = size(valve, curves=False, simulate=False)
    limit_ms = nominal.value("max_poll_period_ms").value
    assert limit_ms == pytest.approx(71.0 * 0.7 / 864.0 * 1e3)
    n = 200
    valve_at_57ms = tunable(valve, "schedule.poll_period_ms").set(valve, 57.0)
    mc = monte_carlo(valve_at_57ms, {"schedule.poll_period_ms": Tolerance.uniform(25.0)}, n, seed=7,
                     outputs=("trackable_output_speed",))
    drawn = mc.inputs["schedule.poll_period_ms"]
    assert drawn.min() >= 32.0 and drawn.max() <= 82.0
    assert mc.nominal_inputs == {"schedule.poll_period_ms": 57.0}
    assert mc.all_passed.tolist() == (drawn <= limit_ms).tolist()
    true_p = (limit_ms - 32.0) / 50.0  # uniform on [32, 82] around a nominal of 57 ms
    assert mc.passing_count == int(np.count_nonzero(drawn <= limit_ms))
    assert mc.yield_fraction == mc.passing_count / n
    low, high = mc.yield_interval
    assert low <= true_p <= high
    assert (low, high) == wilson_interval(mc.passing_count, n, 0.95)
    assert mc.most_failing == "backdrive_speed"
    assert mc.fail_counts["backdrive_speed"] == n - mc.passing_count
    assert mc.fail_counts["battery_life"] == 0


def test_monte_carlo_is_reproducible_by_seed(valve_at_105ms):
    tol = {"schedule.poll_period_ms": Tolerance.normal(10.0),
           "power.sleep_current_uA": Tolerance.normal(0.2, relative=True)}
    a = monte_carlo(valve_at_105ms, tol, 60, seed=3, outputs=("battery_life_years",))
    b = monte_carlo(valve_at_105ms, tol, 60, seed=3, outputs=("battery_life_years",))
    c = monte_carlo(valve_at_105ms, tol, 60, seed=4, outputs=("battery_life_years",))
    for key in tol:
        assert np.array_equal(a.inputs[key], b.inputs[key])
        assert not np.array_equal(a.inputs[key], c.inputs[key])
    assert np.array_equal(a.values["battery_life_years"], b.values["battery_life_years"])
    assert a.all_passed.tolist() == b.all_passed.tolist()
    assert a.yield_interval == b.yield_interval
    # The draws follow numpy's generator in the mapping's order.
    rng = np.random.default_rng(3)
    assert np.array_equal(a.inputs["schedule.poll_period_ms"], 105.0 + 10.0 * rng.standard_normal(60))
    assert np.array_equal(a.inputs["power.sleep_current_uA"], 1.4 * (1 + 0.2 * rng.standard_normal(60)))


def test_monte_carlo_identical_whatever_the_executor(valve_at_105ms):
    tol = {"schedule.poll_period_ms": Tolerance.uniform(25.0),
           "gear_train[0].teeth_driven": Tolerance.uniform(3.0),
           "battery.capacity_mAh": Tolerance.normal(0.1, relative=True)}
    serial = monte_carlo(valve_at_105ms, tol, 48, seed=11)
    with ThreadPoolExecutor(max_workers=2) as pool:
        threaded = monte_carlo(valve_at_105ms, tol, 48, seed=11, executor=pool, chunk_size=5)
    with ProcessPoolExecutor(max_workers=2, mp_context=multiprocessing.get_context("spawn")) as pool:
        processes = monte_carlo(valve_at_105ms, tol, 48, seed=11, executor=pool, chunk_size=7)
    for other in (threaded, processes):
        _assert_same_sweep(serial, other)
        assert other.yield_fraction == serial.yield_fraction
        assert other.fail_counts == serial.fail_counts


def test_sensor_latch_battery_and_current_tolerances_reach_the_sizing(crane):
    tol = {"sensor.offset_x_mV": Tolerance.normal(0.3),
           "sensor.gain_mismatch": Tolerance.uniform(0.004),
           "sensor.phase_error_deg": Tolerance.normal(0.3),
           "latches.switch_point_tolerance_deg": Tolerance.uniform(3.0),
           "gear_train[2].backlash_deg": Tolerance.uniform(0.5, relative=True),
           "battery.capacity_mAh": Tolerance.normal(0.05, relative=True),
           "power.consumers[1].waking_uA": Tolerance.normal(0.1, relative=True)}
    mc = monte_carlo(crane, tol, 12, seed=5, base_dir=DEMO)
    assert mc.nominal_inputs["battery.capacity_mAh"] == batt.cell("li_mno2_2032").capacity_mAh
    assert mc.input_units["sensor.offset_x_mV"] == "mV" and mc.input_units["sensor.gain_mismatch"] == ""
    assert np.all(np.abs(mc.inputs["sensor.gain_mismatch"] - 0.008) <= 0.004)
    s = 7
    x = {k: float(v[s]) for k, v in mc.inputs.items()}
    stages = list(crane.gear_train)
    stages[2] = replace(stages[2], backlash_deg=x["gear_train[2].backlash_deg"])
    consumers = list(crane.power.consumers)
    consumers[1] = replace(consumers[1], waking_uA=x["power.consumers[1].waking_uA"])
    by_hand = replace(
        crane,
        sensor=replace(crane.sensor, offset_x_mV=x["sensor.offset_x_mV"], gain_mismatch=x["sensor.gain_mismatch"],
                       phase_error_deg=x["sensor.phase_error_deg"]),
        latches=replace(crane.latches, switch_point_tolerance_deg=x["latches.switch_point_tolerance_deg"]),
        gear_train=tuple(stages),
        battery=replace(crane.battery, capacity_mAh=x["battery.capacity_mAh"]),
        power=replace(crane.power, consumers=tuple(consumers)))
    assert mc.design_at(s) == by_hand
    direct = size(by_hand, base_dir=DEMO, curves=False, simulate=False)
    for key in ("output_accuracy", "sensor_peak_error_deg", "half_turn_margin_deg", "battery_life_years",
                "average_current_uA"):
        assert mc.values[key][s] == direct.value(key).value, key
    # The demo crane misses its battery life at every sample.
    assert mc.fail_counts["battery_life"] == 12
    assert mc.yield_fraction == 0.0 and mc.yield_interval[0] == 0.0
    assert mc.check_yield("counter_range") == (1.0, wilson_interval(12, 12))
    assert mc.cautions and any("functional-safety" in c for c in mc.cautions)


def test_rejected_samples_count_as_failing_with_a_warning(valve):
    with pytest.warns(TurnkitWarning, match="rejected by the design"):
        mc = monte_carlo(valve, {"sensor.gain_mismatch": Tolerance.uniform(1.0)}, 20, seed=2,
                         outputs=("output_accuracy",))
    bad = ~mc.valid
    assert bad.any() and (mc.valid.any())
    assert np.all(np.abs(mc.inputs["sensor.gain_mismatch"][bad]) > 0.5)
    assert all("sensor.gain_mismatch" in r and "gain_mismatch must be in [-0.5, 0.5]" in r
               for r in mc.reasons[bad])
    assert mc.passing_count <= int(np.count_nonzero(mc.valid))
    assert np.isnan(mc.values["output_accuracy"][bad]).all()


def test_monte_carlo_refuses_bad_arguments(valve):
    tol = {"schedule.poll_period_ms": Tolerance.normal(1.0)}
    with pytest.raises(DesignValueError, match="n must be"):
        monte_carlo(valve, tol, 0, seed=1)
    with pytest.raises(DesignValueError, match="seed"):
        monte_carlo(valve, tol, 10, seed=None)
    with pytest.raises(DesignValueError, match="a numeric quantity"):
        monte_carlo(valve, {"battery.chemistry": Tolerance.normal(1.0)}, 10, seed=1)
    with pytest.raises(DesignValueError, match="not set in this design"):
        monte_carlo(valve, {"requirements.quiescent_budget_uA": Tolerance.normal(1.0)}, 10, seed=1)
    with pytest.raises(DesignValueError, match="ExternalStage has the fields"):
        monte_carlo(valve, {"gear_train[0].efficiency_x": Tolerance.normal(1.0)}, 10, seed=1)
    with pytest.raises(DesignValueError, match="gear_train has 3 entries"):
        monte_carlo(valve, {"gear_train[3].teeth_driven": Tolerance.normal(1.0)}, 10, seed=1)
    with pytest.raises(DesignValueError, match="a Tolerance"):
        monte_carlo(valve, {"schedule.poll_period_ms": 1.0}, 10, seed=1)
    with pytest.raises(DesignValueError, match="executor"):
        monte_carlo(valve, tol, 4, seed=1, executor=object())


def test_monte_carlo_result_pickles(valve_at_105ms):
    mc = monte_carlo(valve_at_105ms, {"schedule.poll_period_ms": Tolerance.normal(5.0)}, 8, seed=1)
    again = pickle.loads(pickle.dumps(mc))
    assert isinstance(again, MonteCarloResult)
    _assert_same_sweep(mc, again)


# --- Dask -----------------------------------------------------------------------------

def test_dask_client_executor_gives_identical_arrays(valve, valve_at_105ms):
    pytest.importorskip("dask", reason="optional extra 'scale' (dask[distributed]) not installed")
    distributed = pytest.importorskip("distributed",
                                      reason="optional extra 'scale' (dask[distributed]) not installed")
    axes = {"schedule.poll_period_ms": [5.0, 20.0, 150.0], "gear_train[0].teeth_driven": [2, 56, 80]}
    serial = sweep(valve, axes, base_dir=DEMO)
    with distributed.Client(processes=False, n_workers=1, threads_per_worker=2,
                            dashboard_address=None) as client:
        pool = client.get_executor()
        on_dask = sweep(valve, axes, base_dir=DEMO, executor=pool, chunk_size=2)
        mc_dask = monte_carlo(valve_at_105ms, {"schedule.poll_period_ms": Tolerance.normal(30.0)}, 20, seed=9,
                              executor=pool, chunk_size=6)
    _assert_same_sweep(serial, on_dask)
    mc_serial = monte_carlo(valve_at_105ms, {"schedule.poll_period_ms": Tolerance.normal(30.0)}, 20, seed=9)
    _assert_same_sweep(mc_serial, mc_dask)
