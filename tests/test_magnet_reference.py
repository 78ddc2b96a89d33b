"""The magnet model against an independent magnetics library: field of the diametric disc at the
sensor and the latches, and the eccentricity error found by turning the magnet itself."""

from __future__ import annotations

import magpylib as magpy
import numpy as np
import pytest
from scipy.spatial.transform import Rotation

from turnkit import magnet as m

# Source: Magpylib, an open-source library of analytic magnet fields (M. Ortner and L. G. Coliado
# Bandeira, "Magpylib: A free Python package for magnetic field computation", SoftwareX 11,
# 100466 (2020), from memory); its cylinder field is an implementation independent of ours.
# Magpylib works in SI units (m, T): the disc is polarised along +x with J = Br, its face
# ``airgap`` above the plane z = 0, so +z points towards the magnet as in turnkit.


def _disc(br_mT: float, diameter_mm: float, thickness_mm: float, airgap_mm: float):
    return magpy.magnet.Cylinder(polarization=(br_mT / 1000.0, 0.0, 0.0),
                                 dimension=(diameter_mm / 1000.0, thickness_mm / 1000.0),
                                 position=(0.0, 0.0, (airgap_mm + thickness_mm / 2.0) / 1000.0))


@pytest.mark.parametrize("br, diameter, thickness, airgap", [(1200.0, 6.0, 2.5, 1.8), (400.0, 10.0, 3.0, 4.0),
                                                            (1000.0, 4.0, 4.0, 0.5)])
@pytest.mark.parametrize("x, y", [(0.0, 0.0), (3.5, 0.0), (2.0, 1.0), (0.4, -0.3), (6.0, 2.0)])
def test_disc_field_in_the_sensing_plane_matches_the_reference_library(br, diameter, thickness, airgap, x, y):
    reference = magpy.getB(_disc(br, diameter, thickness, airgap), (x / 1000.0, y / 1000.0, 0.0)) * 1000.0
    ours = m.field_mT(br, diameter, thickness, x, y, airgap)
    np.testing.assert_allclose(ours, reference, rtol=1e-6, atol=1e-6 * br)


@pytest.mark.parametrize("airgap", [0.5, 1.8, 5.0])
def test_on_axis_closed_form_matches_the_reference_library(airgap):
    reference = magpy.getB(_disc(1200.0, 6.0, 2.5, airgap), (0.0, 0.0, 0.0)) * 1000.0
    # Across the axis, against the magnetisation, of the size the closed form gives.
    assert reference[0] < 0 and abs(reference[1]) < 1e-9 and abs(reference[2]) < 1e-9
    assert m.axial_field_on_axis_mT(1200.0, 6.0, 2.5, airgap) == pytest.approx(-reference[0], rel=1e-9)


@pytest.mark.parametrize("eccentricity", [0.1, 0.3, 0.8])
def test_eccentricity_error_matches_turning_the_magnet_in_the_reference_library(eccentricity):
    # Turn the magnet itself over a whole turn and read the field direction at the fixed,
    # displaced sensor: its departure from the shaft angle (less the constant part) is the error.
    diameter, thickness, airgap = 6.0, 2.5, 1.8
    theta = np.linspace(0.0, 2.0 * np.pi, 720, endpoint=False)
    sensor = (eccentricity / 1000.0, 0.0, 0.0)
    angles = []
    for th in theta:
        disc = _disc(1000.0, diameter, thickness, airgap)
        disc.rotate(Rotation.from_rotvec((0.0, 0.0, th)), anchor=(0.0, 0.0, 0.0))
        b = magpy.getB(disc, sensor)
        angles.append(np.arctan2(b[1], b[0]))
    error = np.angle(np.exp(1j * (np.asarray(angles) - theta - np.pi)))
    error = error - 0.5 * (error.max() + error.min())
    reference_deg = float(np.degrees(np.max(np.abs(error))))
    # turnkit samples 90 angles over half a turn: its peak may fall a little short of the finer grid's.
    assert m.eccentricity_error_deg(diameter, thickness, airgap, eccentricity) == \
        pytest.approx(reference_deg, rel=2e-3)
