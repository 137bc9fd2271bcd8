"""matdb.advisor.candidates: default arrangements, their description and volume, recoil susceptibility."""

from __future__ import annotations

import math

import pytest

from matdb import advisor as A
from matdb.data import catalog


def test_default_arrangements_scale_to_the_plate():
    plate = (0.017, 0.017)
    specs = A.default_arrangements(plate)
    assert {s.pattern for s in specs} == {"checkerboard", "stripes"}
    assert {s.shape for s in specs} == {"cuboid", "cylinder"}
    # some arrangements are larger than the plate in both directions, some not
    bigger = [s for s in specs if s.extent[0] > plate[0] and s.extent[1] > plate[1]]
    assert bigger and len(bigger) < len(specs) or all(s.rows >= 2 for s in specs)
    assert any(s.extent[0] < plate[0] for s in specs) or len(bigger) == len(specs)
    # more magnets per side for smaller magnets
    small = [s for s in specs if s.shape == "cuboid" and s.size[0] == A.STANDARD_CUBES_M[0]]
    large = [s for s in specs if s.shape == "cuboid" and s.size[0] == A.STANDARD_CUBES_M[-1]]
    assert min(s.cols for s in small) > min(s.cols for s in large)
    capped = A.default_arrangements(plate, max_magnet_size_m=0.0127)
    assert capped and all(s.max_dimension <= 0.0127 + 1e-12 for s in capped)
    assert len(capped) < len(specs)


def test_arrangement_description_and_volume():
    s = A.ArrangementSpec("cylinder", (0.0127, 0.00635), "stripes", 3, 2)
    assert s.description == "3x2 stripes of 12.7x6.35 mm cylinders"
    assert s.magnet_volume_m3 == pytest.approx(6 * math.pi / 4 * 0.0127 ** 2 * 0.00635)
    assert s.extent == pytest.approx((2 * 0.0127, 3 * 0.0127))


def test_recoil_susceptibility_is_the_family_value_of_the_grade_table():
    # sintered NdFeB recoil permeability 1.05, hard ferrite 1.1 (handbook values stored in
    # seed_data/properties.csv and the grade table)
    assert A.grade_chi_rec(catalog.get_grade("N42")) == pytest.approx(0.05)
    assert A.grade_chi_rec(catalog.get_grade("Ferrite-C8")) == pytest.approx(0.1)
