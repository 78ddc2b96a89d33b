"""The output accuracy budget: three sums side by side, over temperature, checked and advised."""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from turnkit import accuracy as acc
from turnkit.designfile import load_design, loads_design
from turnkit.errors import DesignFileError, DesignValueError
from turnkit.sizing import size

DEMO = Path(__file__).resolve().parents[1] / "demo"
NAMES = ["irrigation-gate-valve", "window-shade-winder", "camera-crane-joint"]


def _one(shape, size=1.0, k=3.0, samples=400000):
    return acc.budget([acc.Contribution("x", "x", np.array([size]), shape)], [20.0], coverage_factor=k,
                      samples=samples)


def test_monte_carlo_of_one_normal_term_is_k_sigma():
    # Source: scipy.stats.norm: the two-sided 99.73 % quantile of |N(0, 1)| is 3 sigma.
    b = _one("normal", 2.0)
    p = math.erf(3 / math.sqrt(2))
    assert b.monte_carlo[0] == pytest.approx(2.0 * stats.norm.ppf(0.5 + p / 2), rel=0.02)
    assert b.worst_case[0] == pytest.approx(6.0) and b.rss[0] == pytest.approx(6.0)


def test_monte_carlo_of_one_uniform_term_is_its_quantile():
    # Source: |U(-a, a)| is uniform on [0, a]: its quantile at p is p * a (scipy.stats.uniform).
    b = _one("uniform", 0.5)
    p = math.erf(3 / math.sqrt(2))
    assert b.monte_carlo[0] == pytest.approx(stats.uniform(0, 0.5).ppf(p), rel=1e-3)


def test_monte_carlo_of_one_sine_term_follows_the_arcsine_law():
    # Source: a sine at a uniform random phase has the arcsine distribution: P(|a sin| <= x) = (2/pi) asin(x/a)
    # — the standard random-phase sinusoid example of probability texts (from memory).
    b = _one("sine", 1.0)
    p = math.erf(3 / math.sqrt(2))
    assert b.monte_carlo[0] == pytest.approx(math.sin(p * math.pi / 2), rel=1e-3)


@given(st.lists(st.tuples(st.floats(0.0, 5.0), st.sampled_from(acc.SHAPES)), min_size=1, max_size=6))
@settings(max_examples=40, deadline=None)
def test_rss_and_monte_carlo_never_exceed_the_worst_case(parts):
    contributions = [acc.Contribution(f"c{i}", "c", np.array([a, 2 * a]), shape) for i, (a, shape) in enumerate(parts)]
    b = acc.budget(contributions, [0.0, 50.0], samples=2000)
    assert np.all(b.rss <= b.worst_case * (1 + 1e-12) + 1e-15)
    if all(shape != "normal" for _, shape in parts):
        assert np.all(b.monte_carlo <= b.worst_case * (1 + 1e-12) + 1e-15)
    else:
        # a normal term is unbounded: its sampled quantile can pass k sigma by the sampling error
        assert np.all(b.monte_carlo <= b.worst_case * 1.15 + 1e-15)


def test_scaling_the_largest_part_as_advised_passes():
    parts = [acc.Contribution("big", "big", np.array([0.3, 0.5]), "sine"),
             acc.Contribution("small", "small", np.array([0.1, 0.1]), "uniform"),
             acc.Contribution("noise", "noise", np.array([0.01, 0.01]), "normal")]
    b = acc.budget(parts, [0.0, 50.0], samples=5000)
    for method in acc.METHODS:
        assert acc.largest_contribution(b, method).key == "big"
        factor = acc.scale_to_pass(b, "big", method, 0.4)
        scaled = [replace(c, size=c.size * factor) if c.key == "big" else c for c in parts]
        assert acc.budget(scaled, [0.0, 50.0], samples=5000).worst(method)[0] <= 0.4
    assert acc.scale_to_pass(b, "big", "worst_case", 0.05) is None


@pytest.mark.parametrize("name", NAMES)
def test_each_demo_shows_its_budget_over_temperature_with_three_sums(name):
    result = size(load_design(DEMO / f"{name}.toml"), base_dir=DEMO)
    curve = result.curve("accuracy_vs_temperature")
    assert [s.name for s in curve.series[:3]] == ["worst case", "RSS", "Monte Carlo"]
    assert curve.series[0].x.size > 2 and curve.series[0].x[0] < curve.series[0].x[-1]
    for method in acc.METHODS:
        assert result.value(f"accuracy_{method}").value > 0
    assert result.check("output_accuracy").passed
    # the waterfall's running sum ends at the worst case of the temperature the checked sum is worst at
    checked_at = curve.markers[0].x
    worst_there = curve.series[0].y[list(curve.series[0].x).index(checked_at)]
    assert result.curve("accuracy_waterfall").series[0].y[-1] == pytest.approx(worst_there)


def _advised(check, before: str, after: str) -> float:
    """The number a failing check's advice gives between two pieces of its text."""
    assert not check.passed and before in check.advice, check
    return float(check.advice.split(before)[1].split(after)[0])


def _gate():
    return load_design(DEMO / "irrigation-gate-valve.toml")


def test_a_too_large_airgap_fails_the_field_check_and_the_advised_airgap_passes():
    design = _gate()
    far = replace(design, magnet=replace(design.magnet, airgap_mm=9.0))
    check = size(far, base_dir=DEMO, curves=False).check("magnet_field_at_sensor")
    assert not check.passed and "airgap to at most" in check.advice
    gap = _advised(check, "at most ", " mm")
    fixed = size(replace(far, magnet=replace(far.magnet, airgap_mm=gap)), base_dir=DEMO, curves=False)
    for key in ("magnet_field_at_sensor", "latch_operates", "latch_releases", "power_up_resync"):
        assert fixed.check(key).passed


def test_a_too_hot_site_fails_the_magnet_temperature_and_the_advised_grade_passes():
    design = _gate()
    hot = replace(design, requirements=replace(design.requirements, service_temperature_high_degC=110.0))
    result = size(hot, base_dir=DEMO, curves=False)
    check = result.check("magnet_temperature")
    assert not check.passed and "grade = '" in check.advice
    grade = check.advice.split("grade = '")[1].split("'")[0]
    fixed = size(replace(hot, magnet=replace(hot.magnet, grade=grade)), base_dir=DEMO, curves=False)
    assert fixed.check("magnet_temperature").passed
    # the hotter range also widens the budget: drift and expansion grow away from the calibration
    cool = size(design, base_dir=DEMO, curves=False)
    assert result.value("accuracy_worst_case").value > cool.value("accuracy_worst_case").value


def test_a_hot_site_with_a_weak_magnet_loses_the_latch_and_the_advice_recovers_it():
    design = _gate()
    weak = replace(design, magnet=replace(design.magnet, grade="ferrite", airgap_mm=4.0),
                   latches=replace(design.latches, operate_field_mT=9.0, release_field_mT=-9.0,
                                   threshold_drift_pct_per_K=0.3),
                   requirements=replace(design.requirements, service_temperature_high_degC=85.0))
    check = size(weak, base_dir=DEMO, curves=False).check("latch_operates")
    assert not check.passed and "85 degC" in check.label
    gap = _advised(check, "at most ", " mm")
    fixed = size(replace(weak, magnet=replace(weak.magnet, airgap_mm=gap)), base_dir=DEMO, curves=False)
    assert fixed.check("latch_operates").passed and fixed.check("latch_releases").passed


def test_the_accuracy_advice_applied_to_the_design_passes():
    design = _gate()
    rough = replace(design, accuracy=replace(design.accuracy, transmission_error_mm=0.5))
    check = size(rough, base_dir=DEMO, curves=False).check("output_accuracy")
    assert not check.passed and "transmission error" in check.advice
    allowed = _advised(check, "at most ", " mm")
    fixed = replace(rough, accuracy=replace(rough.accuracy, transmission_error_mm=allowed * (1 - 1e-3)))
    assert size(fixed, base_dir=DEMO, curves=False).check("output_accuracy").passed


@pytest.mark.parametrize("method", acc.METHODS)
def test_the_checked_sum_is_the_method_the_design_file_chooses(method):
    design = _gate()
    result = size(replace(design, accuracy=replace(design.accuracy, method=method)), base_dir=DEMO, curves=False)
    assert result.check("output_accuracy").value == pytest.approx(result.value(f"accuracy_{method}").value)


def test_one_direction_approach_leaves_backlash_out():
    design = _gate()
    either = size(design, base_dir=DEMO, curves=False).value("accuracy_worst_case").value
    one = size(replace(design, accuracy=replace(design.accuracy, approach="one_direction")), base_dir=DEMO,
               curves=False).value("accuracy_worst_case").value
    backlash = size(design, base_dir=DEMO, curves=False).value("backlash_at_output").value
    assert either - one == pytest.approx(backlash / 2)


def test_eccentricity_without_a_magnet_is_refused_naming_the_key():
    design = _gate()
    with pytest.raises(DesignValueError, match="accuracy.eccentricity"):
        size(replace(design, magnet=None), base_dir=DEMO, curves=False)


_MINIMAL = '''
format_version = 1
name = "bench"
[[gear_train]]
kind = "lead_screw"
pitch = "2 mm"
[[power.consumers]]
name = "electronics"
asleep = "2 uA"
waking = "1 mA"
polling = "1 mA"
tracking = "2 mA"
[battery]
chemistry = "li_fes2_aa"
'''


def test_a_magnet_key_in_the_wrong_unit_names_the_key_and_the_value():
    with pytest.raises(DesignFileError, match=r"magnet\.airgap.*'2 mT'"):
        loads_design(_MINIMAL + '[magnet]\ndiameter = "6 mm"\nthickness = "2 mm"\nairgap = "2 mT"\n')


def test_an_unknown_grade_suggests_the_nearest():
    with pytest.raises(DesignFileError, match="ndfeb"):
        loads_design(_MINIMAL + '[magnet]\ngrade = "ndfe"\ndiameter = "6 mm"\nthickness = "2 mm"\nairgap = "2 mm"\n')


def test_a_reversed_temperature_range_is_refused():
    with pytest.raises(DesignFileError, match="service_temperature_low"):
        loads_design(_MINIMAL + '[requirements]\nservice_temperature_low = "60 degC"\n'
                                'service_temperature_high = "0 degC"\n')


def test_the_exported_summaries_show_the_three_sums_side_by_side():
    from turnkit.export import to_html, to_markdown

    result = size(_gate(), base_dir=DEMO)
    md = to_markdown(result)
    assert "## Accuracy budget over temperature" in md
    assert "| Temperature | worst case | RSS | Monte Carlo |" in md
    assert md.count(" degC |") >= 9
    html = to_html(result)
    assert "<h2>Accuracy budget over temperature</h2>" in html and "<th>Monte Carlo</th>" in html


def _budget_one_row_at_a_time(parts, temps, k=3.0, samples=20000, seed=1):
    """The Monte Carlo sums the plain way: every temperature summed and partially sorted on its own."""
    draws = acc._draws(tuple(c.shape for c in parts), samples, seed)
    total = np.zeros((len(temps), samples))
    for c, draw in zip(parts, draws):
        total += np.broadcast_to(c.size, (len(temps),))[:, None] * draw[None, :]
    values = np.abs(total)
    p = math.erf(k / math.sqrt(2.0))
    pos = p * (samples - 1)
    lo = int(np.floor(pos))
    part = np.partition(values, (lo, lo + 1), axis=1)
    return part[:, lo] + (pos - lo) * (part[:, lo + 1] - part[:, lo])


@settings(max_examples=40, deadline=None)
@given(st.lists(st.tuples(st.sampled_from(acc.SHAPES), st.floats(0.0, 5.0), st.booleans()), min_size=1, max_size=6),
       st.integers(1, 8), st.sampled_from([100, 1000, 20000]), st.sampled_from([1.0, 2.0, 3.0]))
def test_monte_carlo_sums_shared_between_temperatures_equal_the_plain_sums_bit_for_bit(terms, n_t, samples, k):
    # Terms that do not change with temperature share one running sum until a term that does splits
    # it; the result must be the plain per-temperature sum exactly, not just closely.
    temps = np.linspace(-20.0, 60.0, n_t)
    parts = [acc.Contribution(f"t{i}", "t", size * (1.0 + 0.1 * np.round(np.abs(temps - 20.0) / 20.0)) if varies
                              else np.full(n_t, size), shape)
             for i, (shape, size, varies) in enumerate(terms)]
    b = acc.budget(parts, temps, coverage_factor=k, samples=samples)
    np.testing.assert_array_equal(b.monte_carlo, _budget_one_row_at_a_time(parts, temps, k, samples))


def test_the_quantile_of_a_changed_term_changes_and_of_an_equal_term_does_not():
    temps = np.array([-10.0, 20.0, 50.0])
    base = [acc.Contribution("a", "a", np.full(3, 0.2), "sine"),
            acc.Contribution("b", "b", np.full(3, 0.1), "two_point"),
            acc.Contribution("c", "c", np.array([0.05, 0.0, 0.05]), "uniform")]
    same = acc.budget([replace(c) for c in base], temps).monte_carlo
    np.testing.assert_array_equal(same, acc.budget(base, temps).monte_carlo)
    changed = acc.budget([base[0], replace(base[1], size=np.full(3, 0.11)), base[2]], temps).monte_carlo
    assert np.all(changed != same)
    np.testing.assert_array_equal(changed, _budget_one_row_at_a_time(
        [base[0], replace(base[1], size=np.full(3, 0.11)), base[2]], temps))
    # Rows with the same sizes (the two ends here) share one sum and one quantile.
    assert same[0] == same[2] != same[1]


def test_the_quantile_of_rows_with_a_low_threshold_or_nan_falls_back_to_a_full_sort():
    rng = np.random.default_rng(3)
    values = np.abs(rng.standard_normal((4, 5000)))
    values[1, :] = 1.0  # every value equal: the threshold holds all of them
    values[2, ::2] = 0.0
    for p in (0.5, 0.9973, 0.99999):
        pos = p * 4999
        lo = int(np.floor(pos))
        hi = min(lo + 1, 4999)
        part = np.partition(values, (lo, hi), axis=1)
        expected = part[:, lo] + (pos - lo) * (part[:, hi] - part[:, lo])
        np.testing.assert_array_equal(acc._quantile_rows(values, p), expected)
    with_nan = values.copy()
    with_nan[3, 7] = np.nan
    part = np.partition(with_nan, (4985, 4986), axis=1)
    np.testing.assert_array_equal(acc._quantile_rows(with_nan, 0.9973),
                                  part[:, 4985] + (0.9973 * 4999 - 4985) * (part[:, 4986] - part[:, 4985]))


def _crane_like_parts(later_scale=1.0):
    temps = np.linspace(-20.0, 45.0, 10)
    return temps, [acc.Contribution("sensor", "s", np.full(10, 0.01), "sine"),
                   acc.Contribution("noise", "n", np.full(10, 0.002), "normal"),
                   acc.Contribution("backlash", "b", np.full(10, 0.05), "two_point"),
                   acc.Contribution("drift", "d", later_scale * (np.abs(temps - 20.0) * 1e-4 + 1e-4), "sine"),
                   acc.Contribution("runout", "r", np.full(10, 0.004), "sine")]


def test_the_tail_of_the_sums_alone_gives_the_same_quantiles_as_every_draw_summed():
    # Shared terms first, a temperature-dependent one later (the usual budget): only the draws
    # whose bound reaches the quantile are summed, and the quantiles are those of all draws.
    temps, parts = _crane_like_parts()
    draws = acc._draws(tuple(c.shape for c in parts), 20000, 1)
    p = math.erf(3.0 / math.sqrt(2.0))
    tail = acc._tail_quantiles(tuple(c.size for c in parts), draws, temps.size, p)
    assert tail is not None
    np.testing.assert_array_equal(tail, _budget_one_row_at_a_time(parts, temps))
    np.testing.assert_array_equal(acc.budget(parts, temps).monte_carlo, tail)


def test_a_later_term_larger_than_the_shared_ones_sums_every_draw():
    temps, parts = _crane_like_parts(later_scale=2000.0)  # the drift dwarfs the shared terms at most temperatures
    draws = acc._draws(tuple(c.shape for c in parts), 20000, 1)
    p = math.erf(3.0 / math.sqrt(2.0))
    assert acc._tail_quantiles(tuple(c.size for c in parts), draws, temps.size, p) is None
    np.testing.assert_array_equal(acc.budget(parts, temps).monte_carlo, _budget_one_row_at_a_time(parts, temps))


@settings(max_examples=40, deadline=None)
@given(st.lists(st.sampled_from(acc.SHAPES), min_size=2, max_size=6), st.integers(1, 5),
       st.lists(st.floats(0.5, 1.5), min_size=4, max_size=4), st.sampled_from([0.05, 0.3, 3.0]),
       st.integers(0, 2**16))
def test_budget_quantiles_equal_every_draw_summed_whatever_the_later_terms_do(shapes, first_varying, spread, scale,
                                                                              seed):
    # Shared terms, then terms that change with temperature, small or large against them: the
    # draws left out of the sum never change the quantiles, bit for bit.
    temps = np.array([-20.0, 0.0, 20.0, 45.0])
    rng = np.random.default_rng(seed)
    parts = []
    for i, shape in enumerate(shapes):
        size = float(rng.uniform(0.01, 0.05))
        sizes = scale * size * np.array(spread) if i >= first_varying else np.full(4, size)
        parts.append(acc.Contribution(f"t{i}", "t", sizes, shape))
    np.testing.assert_array_equal(acc.budget(parts, temps, seed=seed).monte_carlo,
                                  _budget_one_row_at_a_time(parts, temps, seed=seed))
