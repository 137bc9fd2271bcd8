"""Values derived through the physics (matdb.analysis.inversions): Br from a surface field
read on the axis of a magnet, chi from the gap a plate floats at; recorded as lab values."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from matdb.analysis import inversions
from matdb.data import catalog


def _cuboid_axis_bz(br, a, b, h, z):
    """On-axis Bz above the centre of a uniformly magnetised cuboid of sides 2a x 2b x h
    (textbook closed form from the charge-sheet model, e.g. Furlani, Permanent Magnet and
    Electromechanical Devices, 2001, ch. 4)."""
    def term(zz):
        return math.atan(a * b / (zz * math.sqrt(a * a + b * b + zz * zz)))
    return br / math.pi * (term(z) - term(z + h))


def _cylinder_axis_bz(br, r, h, z):
    """On-axis Bz of a uniformly magnetised cylinder (same source; current-sheet model)."""
    return br / 2 * ((h + z) / math.sqrt(r * r + (h + z) ** 2) - z / math.sqrt(r * r + z * z))


def test_surface_field_inverts_to_br_cuboid(fresh_db, run_cli, record_json):
    r = record_json("magnet", "N42", "--surface-field", "0.40 T", "--shape", "cuboid",
             "--size", "10 mm,10 mm,10 mm", "--probe-offset", "0.5 mm", "--source", "gaussmeter, axial probe")
    expected = 0.40 / _cuboid_axis_bz(1.0, 5e-3, 5e-3, 10e-3, 0.5e-3)
    assert r["br_t"] == pytest.approx(expected, rel=1e-6)
    # the note says what was assumed
    for part in ("cuboid", "10 mm,10 mm,10 mm", "0.5 mm", "0.4 T"):
        assert part in r["note"], part
    # the offset matters: the field of a 10 mm cube falls steeply over the first millimetre
    assert _cuboid_axis_bz(1, 5e-3, 5e-3, 10e-3, 1e-3) < 0.85 * _cuboid_axis_bz(1, 5e-3, 5e-3, 10e-3, 1e-9)


def test_surface_field_inverts_to_br_cylinder(fresh_db):
    br, note = inversions.surface_field_to_br("4800 G", "cylinder", "12 mm,6 mm", None)
    assert br == pytest.approx(0.48 / _cylinder_axis_bz(1.0, 6e-3, 6e-3, 0.0), rel=1e-6)
    assert "0 mm above" in note and "cylinder" in note


def test_unit_field_is_linear_in_br():
    # B is linear in Br (superposition of magnetic charge; Furlani 2001, ch. 4): doubling the
    # measured field doubles the inferred Br
    a, _ = inversions.surface_field_to_br("0.25 T", "cuboid", "20 mm, 20 mm, 10 mm", "1 mm")
    b, _ = inversions.surface_field_to_br("0.5 T", "cuboid", "20 mm, 20 mm, 10 mm", "1 mm")
    assert b == pytest.approx(2 * a, rel=1e-12)


# ---------------------------------------------------------------------------
# float-gap inversion
# ---------------------------------------------------------------------------
DESIGN = Path(__file__).resolve().parent / "data" / "plate_checkerboard.toml"


def test_float_gap_inverts_the_plate_physics(fresh_db, run_cli, record_json):
    from matdb.design import load_design
    from matdb.analysis.levitate import levitate

    hb = catalog.get_material("pyrolytic-graphite")  # handbook chi (Simon and Geim 2000, seed data)
    gap = levitate(load_design(DESIGN))["gap_m"]
    r = record_json("material", "pyrolytic-graphite", "--from-float-gap", f"{gap * 1000!r} mm",
             "--design", str(DESIGN), "--source", "floated sheet 3 over the demo array, feeler gauge")
    # the forward equilibrium of the handbook value, inverted, gives that value back; the
    # perp/par ratio is kept
    assert r["chi_si"] == pytest.approx(hb.chi_vertical, rel=1e-4)
    assert r["chi_par_si"] / r["chi_si"] == pytest.approx(hb.chi_horizontal / hb.chi_vertical, rel=1e-12)
    assert "float gap" in r["note"] and "plate_checkerboard.toml" in r["note"] and 'grade = "N42"' in r["note"]
    assert r["temperature_c"] == pytest.approx(20.0)
    # lift is linear in |chi| (Berry and Geim 1997): a higher float means a larger |chi|
    higher = inversions.record_chi_from_float_gap("pyrolytic-graphite", f"{gap * 1.2} m", str(DESIGN),
                                                  source="higher")
    assert abs(higher["chi_si"]) > abs(r["chi_si"])


def test_float_gap_errors_write_nothing(fresh_db, run_cli, tmp_path, export_text):
    other = tmp_path / "bismuth.toml"
    other.write_text(DESIGN.read_text(encoding="utf-8").replace('"pyrolytic-graphite"', '"bismuth"'),
                     encoding="utf-8")
    before = export_text()
    cases = [
        (["--from-float-gap", "0.9 mm", "--design", str(other)], "--design"),         # another material
        (["--from-float-gap", "0.9 mm", "--design", str(tmp_path / "none.toml")], "--design"),
        (["--from-float-gap", "0.9 mm"], "--design"),
        (["--from-float-gap", "0.9", "--design", str(DESIGN)], "--from-float-gap"),    # missing unit
        (["--from-float-gap", "40 mm", "--design", str(DESIGN)], "--from-float-gap"),  # absurd |chi|
        (["--from-float-gap", "0.9 mm", "--design", str(DESIGN), "--chi", "-1e-4"], "--from-float-gap"),
    ]
    for extra, field in cases:
        code, _, err = run_cli("record", "material", "pyrolytic-graphite", *extra, "--source", "s")
        assert code == 2 and field in err, (extra, err)
    assert export_text() == before
