"""matdb.physics.levitation: the field-gradient product a diamagnet needs and what an
arrangement offers, checked against published values and closed forms (source beside each)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from matdb.errors import InputError
from matdb.physics import levitation as L
from matdb.physics.arrangement import build_arrangement


def test_levitation_requirement_water_and_sign():
    # Berry and Geim, Eur. J. Phys. 18, 307 (1997): water (chi = -9.0e-6, 1000 kg/m^3) needs ~1400 T^2/m
    assert L.levitation_requirement(-9.0e-6, 1000.0) == pytest.approx(1400, rel=0.03)
    # a paramagnet is pulled into the field: no finite requirement (Berry and Geim, sec. 2)
    assert L.levitation_requirement(2.2e-5, 2700.0) == math.inf
    with pytest.raises(InputError, match="density"):
        L.levitation_requirement(-1e-5, 0.0)


def test_gradient_product_matches_closed_form_on_cylinder_axis():
    """On the axis of an axially magnetised cylinder (radius R, length L, top face at
    z = 0): Bz(z) = Br/2 [(z + L)/sqrt(R^2 + (z + L)^2) - z/sqrt(R^2 + z^2)], Bx = By = 0
    (E. P. Furlani, Permanent Magnet and Electromechanical Devices, Academic Press 2001,
    sec. 4.3; also any textbook solenoid formula). So -(1/2) d(B^2)/dz = -Bz dBz/dz."""
    br, d, length = 1.3, 0.020, 0.010
    r = d / 2
    arr = build_arrangement(shape="cylinder", size=(d, length), br=br)
    z = np.array([0.2e-3, 0.5e-3, 1e-3, 3e-3, 10e-3])
    bz = br / 2 * ((z + length) / np.sqrt(r**2 + (z + length) ** 2) - z / np.sqrt(r**2 + z**2))
    dbz = br / 2 * (r**2 / (r**2 + (z + length) ** 2) ** 1.5 - r**2 / (r**2 + z**2) ** 1.5)
    expected = -bz * dbz
    pts = np.column_stack([np.zeros_like(z), np.zeros_like(z), z])
    got = L.gradient_product(arr, pts)
    assert got == pytest.approx(expected, rel=1e-6)


def test_reach_plate_average_is_the_mean_of_the_local_product():
    """The plate figure [B^2(g) - B^2(g+t)]/(2t) is the thickness average of
    -(1/2) d(B^2)/dz (fundamental theorem of calculus): compare with a Gauss-Legendre
    average of the local product over the same footprint grid."""
    arr = build_arrangement(shape="cuboid", size=(0.0127, 0.0127, 0.0127), pattern="checkerboard",
                            rows=2, cols=2, br=1.3)
    gap, t, n = 0.5e-3, 1e-3, 21
    r = L.reach_of(arr, gap, t, n=n)
    xg, wg = np.polynomial.legendre.leggauss(12)
    zs = gap + (xg + 1) / 2 * t
    base = L.footprint_grid(arr, 0.0, n)
    vals = [np.mean(L.gradient_product(arr, base + np.array([0, 0, z]))) for z in zs]
    assert r["plate_avg_t2_m"] == pytest.approx(float(np.dot(wg, vals) / 2), rel=1e-5)
    assert r["peak_t2_m"] >= r["plate_avg_t2_m"]


def test_levitation_requirement_is_vectorised():
    # the same law element by element (Berry and Geim 1997, eq. 3): an array in, an array out
    chi = np.array([-9.0e-6, -4.5e-4, 2.2e-5])
    rho = np.array([1000.0, 2200.0, 2700.0])
    got = L.levitation_requirement(chi, rho)
    assert got.shape == (3,)
    for c, r, v in zip(chi, rho, got):
        assert v == L.levitation_requirement(float(c), float(r))
    with pytest.raises(InputError, match="chi"):
        L.levitation_requirement(float("nan"), 1000.0)
