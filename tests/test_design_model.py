"""matdb.design.model: the design dataclasses' own logic (volumes, masses, temperatures,
recoil), checked against geometry, the catalogue and published demagnetising factors."""

from __future__ import annotations

import math

import pytest

from matdb.constants import T_REF_K
from matdb.data import catalog
from matdb.design import Conditions, SingleMagnet, body_volume, parse_design, parse_stabilized


@pytest.mark.parametrize("shape,size,expected", [
    # elementary solid geometry: box x*y*h, cylinder pi d^2 h / 4, tube pi (D^2 - d^2) h / 4
    ("cuboid", (0.01, 0.02, 0.003), 0.01 * 0.02 * 0.003),
    ("rectangle", (0.017, 0.017, 0.001), 0.017 * 0.017 * 0.001),
    ("cylinder", (0.02, 0.01), math.pi * 0.01**2 * 0.01),
    ("disc", (0.012, 0.0005), math.pi * 0.006**2 * 0.0005),
    ("ring", (0.02, 0.01, 0.005), math.pi * (0.01**2 - 0.005**2) * 0.005),
])
def test_body_volume_is_solid_geometry(shape, size, expected):
    assert body_volume(shape, size) == pytest.approx(expected, rel=1e-14)


def test_conditions_default_to_the_catalogue_reference_temperature():
    # magnet catalogues quote Br at 20 C (IEC 60404-8-1): a design naming no temperature uses it
    assert Conditions().nominal_k == T_REF_K
    assert Conditions().extremes() == (T_REF_K, T_REF_K)
    c = Conditions(None, 253.15, 333.15)
    assert c.nominal_k == 333.15  # the hottest: the least lift for NdFeB (alpha < 0)
    assert c.extremes(extra_k=400.0) == (253.15, 400.0)


def test_magnet_mass_is_count_times_volume_times_catalogue_density():
    doc = {"magnets": {"shape": "cuboid", "size": ["10 mm", "10 mm", "5 mm"], "grade": "N42",
                       "pattern": "checkerboard", "rows": 2, "cols": 3},
           "plate": {"material": "pyrolytic-graphite", "size": ["20 mm", "20 mm", "1 mm"]}}
    d = parse_design(doc)
    rho = catalog.get_grade("N42").density_kg_m3
    assert d.magnet_mass_kg() == pytest.approx(6 * 0.01 * 0.01 * 0.005 * rho, rel=1e-12)
    assert d.plate.mass_kg == pytest.approx(catalog.get_material("pyrolytic-graphite").density_kg_m3 * 4e-7)


def test_single_magnet_sizes_and_mass():
    doc = {"lifter": {"shape": "ring", "size": ["20 mm", "8 mm", "5 mm"], "grade": "N42"},
           "floater": {"shape": "cuboid", "size": ["6 mm", "4 mm", "3 mm"], "grade": "N42"},
           "plates": {"material": "pyrolytic-graphite", "thickness": "1 mm"}}
    st = parse_stabilized(doc).stations[0]
    assert st.lifter.width == pytest.approx(0.02) and st.floater.width == pytest.approx(0.006)
    assert st.lifter.height == pytest.approx(0.005)
    assert st.floater.mass_kg == pytest.approx(6e-3 * 4e-3 * 3e-3 * st.floater.density_kg_m3)


def test_recoil_factor_of_a_cube_follows_its_demagnetising_factor():
    # a uniformly polarised magnet on its recoil line: J = Br / (1 + chi_rec N); the
    # volume-averaged (magnetometric) demagnetising factor of a cube is exactly 1/3 by
    # symmetry (D.-X. Chen, J. A. Brug and R. B. Goldfarb, IEEE Trans. Magn. 27, 3601 (1991))
    mu_rec = 1.05
    cube = SingleMagnet("cuboid", (0.01, 0.01, 0.01), "N42", 1.3, False, None, -0.12, 7500.0, mu_rec)
    assert cube.recoil_factor == pytest.approx(1 / (1 + (mu_rec - 1) / 3), rel=1e-3)
    rigid = SingleMagnet("cuboid", (0.01, 0.01, 0.01), "N42", 1.3, False, None, -0.12, 7500.0, mu_rec, rigid=True)
    assert rigid.recoil_factor == 1.0
