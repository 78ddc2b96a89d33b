"""The shaft magnet: field at the sensor and the latches, temperature, switch angles, mounting errors."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate

from turnkit import design as d
from turnkit import magnet as m
from turnkit.errors import DesignValueError


def _surface_charge_field_mT(br_mT, radius, thickness, point):
    """Brute force: integrate the side-surface charge Br·cos(phi)/mu0 over phi and height with scipy."""
    px, py, pz = point

    def comp(i):
        def f(zeta, phi):
            sx, sy, sz = radius * math.cos(phi), radius * math.sin(phi), zeta
            dx, dy, dz = px - sx, py - sy, pz - sz
            r3 = (dx * dx + dy * dy + dz * dz) ** 1.5
            return math.cos(phi) * (dx, dy, dz)[i] / r3 * radius

        val, _ = integrate.dblquad(f, 0.0, 2 * math.pi, 0.0, thickness, epsabs=1e-10, epsrel=1e-9)
        return br_mT / (4 * math.pi) * val

    return np.array([comp(0), comp(1), comp(2)])


@pytest.mark.parametrize("gap", [0.5, 1.5, 4.0])
def test_on_axis_closed_form_matches_a_numerical_integration(gap):
    # Source: surface-charge (Coulombian) model, E. P. Furlani, Permanent Magnet and Electromechanical
    # Devices (2001), ch. 2, integrated numerically with scipy.integrate.dblquad.
    numeric = _surface_charge_field_mT(1190.0, 3.0, 2.5, (0.0, 0.0, -gap))
    closed = m.axial_field_on_axis_mT(1190.0, 6.0, 2.5, gap)
    assert abs(numeric[0]) == pytest.approx(closed, rel=1e-7)
    assert numeric[0] < 0  # the field on the axis points against the magnetisation


@pytest.mark.parametrize("point", [(3.5, 0.0), (2.0, 1.0), (0.4, -0.3)])
def test_off_axis_field_matches_a_numerical_integration(point):
    # Source: E. P. Furlani, Permanent Magnet and Electromechanical Devices, Academic Press, 2001 (surface-charge
    # model, from memory), integrated here with scipy.integrate.dblquad; field_mT does the height integral in closed
    # form and the circumference numerically.
    numeric = _surface_charge_field_mT(1000.0, 3.0, 2.5, (*point, -1.5))
    model = m.field_mT(1000.0, 6.0, 2.5, point[0], point[1], 1.5)
    np.testing.assert_allclose(model, numeric, rtol=1e-6, atol=1e-6 * 1000)


def test_field_at_the_face_of_a_long_magnet_tends_to_a_quarter_of_the_remanence():
    # Source: a transversely magnetised infinite cylinder has demagnetising factor 1/2 (H = -M/2 inside);
    # half of that reaches the end face: B = Br/4. J. A. Osborn, Phys. Rev. 67, 351 (1945) (from memory).
    assert m.axial_field_on_axis_mT(1000.0, 2.0, 1e5, 0.0) == pytest.approx(250.0, rel=1e-6)


def test_far_field_tends_to_the_dipole_field():
    # Source: J. D. Jackson, Classical Electrodynamics, 3rd ed., eq. (5.56): on the plane through the dipole
    # perpendicular to its moment, |B| = mu0 m / (4 pi r^3); here m = (Br/mu0) * volume.
    br, diameter, thickness, gap = 1200.0, 4.0, 2.0, 200.0
    volume = math.pi * (diameter / 2) ** 2 * thickness
    distance = gap + thickness / 2
    dipole = br * volume / (4 * math.pi * distance ** 3)
    assert m.axial_field_on_axis_mT(br, diameter, thickness, gap) == pytest.approx(dipole, rel=1e-3)


def test_the_field_at_a_fixed_point_is_a_sine_of_the_shaft_angle():
    # Linear in the magnetisation: any component at a fixed point goes as B_peak * cos(theta - theta0).
    theta = np.radians(np.arange(0, 360, 15))
    px, py = 3.5 * np.cos(-theta), 3.5 * np.sin(-theta)  # the board point seen from the turning magnet
    bz = m.field_mT(1000.0, 6.0, 2.5, px, py, 1.5)[:, 2]
    peak = m.latch_peak_field_mT(1000.0, 6.0, 2.5, 1.5, 3.5)
    np.testing.assert_allclose(np.abs(bz), peak * np.abs(np.cos(theta)), atol=1e-9 * peak)


def test_remanence_falls_with_the_grade_coefficient():
    grade = m.GRADES["ndfeb"]
    hot = m.remanence_mT(grade.remanence_mT, grade.remanence_drift_pct_per_K, 80.0)
    assert hot == pytest.approx(grade.remanence_mT * (1 - 0.0012 * 60))


def test_grade_table_and_design_file_choices_agree():
    assert tuple(m.GRADES) == d._GRADE_KEYS
    for g in m.GRADES.values():
        assert g.remanence_drift_pct_per_K < 0 and "(from memory)" in g.source


def test_grades_keep_their_published_order_of_temperature_sensitivity():
    # Source: reversible coefficients of remanence, e.g. MMPA Standard No. 0100-00 (from memory):
    # ferrite about -0.2 %/K, NdFeB about -0.1 %/K, SmCo about -0.03 to -0.04 %/K.
    g = m.GRADES
    assert g["ferrite"].remanence_drift_pct_per_K < g["ndfeb"].remanence_drift_pct_per_K \
        < g["smco5"].remanence_drift_pct_per_K <= g["sm2co17"].remanence_drift_pct_per_K + 0.01


def test_eccentricity_error_is_zero_on_axis_and_grows_with_the_square_of_the_offset():
    # By symmetry the field tensor is isotropic on the axis and departs from it as r^2 (derived, shown in
    # docs/accuracy.md).
    assert m.eccentricity_error_deg(6.0, 2.5, 1.5, 0.0) == 0.0
    small = m.eccentricity_error_deg(6.0, 2.5, 1.5, 0.05)
    double = m.eccentricity_error_deg(6.0, 2.5, 1.5, 0.1)
    assert double / small == pytest.approx(4.0, rel=0.02)


def test_eccentricity_error_matches_the_brute_force_field_direction():
    # Source: the field direction from scipy's integration of the surface charge at the displaced sensor.
    e, gap = 0.4, 1.5
    errors = []
    for theta in np.radians([0.0, 45.0, 90.0, 135.0]):
        point = (e * math.cos(-theta), e * math.sin(-theta), -gap)
        b = _surface_charge_field_mT(1.0, 3.0, 2.5, point)
        errors.append(math.atan2(b[1], b[0]))
    errors = np.unwrap(np.array(errors))
    brute = math.degrees((errors.max() - errors.min()) / 2)
    assert m.eccentricity_error_deg(6.0, 2.5, gap, e) == pytest.approx(brute, rel=0.03)


@given(st.floats(0.0, 30.0))
@settings(max_examples=30, deadline=None)
def test_tilt_error_matches_a_projection_of_the_field(tilt):
    # A field turning in the magnet's plane, projected on a sensor plane tilted about the x axis.
    phi = np.linspace(0, np.pi, 2001)
    seen = np.arctan2(np.sin(phi) * math.cos(math.radians(tilt)), np.cos(phi))
    peak = np.degrees(np.max(np.abs(seen - phi)))
    assert m.tilt_error_deg(tilt) == pytest.approx(peak, abs=1e-4)


def test_stray_field_error_is_the_arcsine_of_the_field_ratio():
    assert m.stray_field_error_deg(1.0, 50.0) == pytest.approx(math.degrees(math.asin(0.02)))
    assert m.stray_field_error_deg(60.0, 50.0) == 90.0


def test_latch_switch_angles_match_a_brute_force_threshold_crossing():
    # Operate at +3 mT, release at -3 mT, peak 60 mT: switch on at asin(3/60) past the zero crossing.
    sw = m.latch_switching([60.0], [20.0], operate_field_mT=3.0, release_field_mT=-3.0)
    theta = np.linspace(0.0, 90.0, 900001)
    first_on = theta[np.argmax(60.0 * np.sin(np.radians(theta)) >= 3.0)]
    assert sw.hysteresis_deg == pytest.approx(2 * first_on, abs=1e-3)
    assert sw.switch_spread_deg == pytest.approx(0.0, abs=1e-12)


@given(st.floats(0.0, 2.0), st.floats(20.0, 200.0))
@settings(max_examples=40, deadline=None)
def test_a_wider_threshold_spread_never_narrows_the_switch_angle_spread(spread, peak):
    narrow = m.latch_switch_spread_deg([peak, peak * 0.9], [0.0, 60.0], operate_field_mT=3.0, release_field_mT=-3.0,
                                       threshold_spread_mT=spread)
    wide = m.latch_switch_spread_deg([peak, peak * 0.9], [0.0, 60.0], operate_field_mT=3.0, release_field_mT=-3.0,
                                     threshold_spread_mT=spread + 0.5)
    assert wide[0] >= narrow[0] - 1e-12 and narrow[0] >= 0


def test_a_latch_whose_field_is_too_weak_does_not_switch():
    sw = m.latch_switching([5.0, 2.0], [20.0, 80.0], operate_field_mT=3.0, release_field_mT=-3.0)
    assert not sw.operates and not sw.releases and sw.worst_operate_index == 1 and sw.switch_spread_deg == 90.0


def test_bad_magnet_dimensions_name_the_field():
    with pytest.raises(DesignValueError, match="magnet.airgap"):
        m.field_mT(1000.0, 6.0, 2.5, 0.0, 0.0, 0.0)
    with pytest.raises(DesignValueError, match="magnet.diameter"):
        m.axial_field_on_axis_mT(1000.0, -1.0, 2.5, 1.0)


def test_sizing_offers_the_field_derived_switch_spread_it_reports():
    from dataclasses import replace
    from pathlib import Path

    from turnkit.designfile import load_design
    from turnkit.sizing import latch_switch_spread_from_field, size

    demo = Path(__file__).resolve().parents[1] / "demo"
    design = load_design(demo / "irrigation-gate-valve.toml")
    spread, hysteresis = latch_switch_spread_from_field(design)
    result = size(design, base_dir=demo, curves=False)
    assert spread == pytest.approx(result.value("latch_switch_spread_deg").value)
    assert hysteresis == pytest.approx(result.value("latch_field_hysteresis_deg").value)
    assert 0 < spread < design.latches.switch_point_tolerance_deg
    assert latch_switch_spread_from_field(replace(design, magnet=None)) is None
