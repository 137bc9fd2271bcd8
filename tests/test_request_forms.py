"""Requests as people state them: total mass (plate sized to it), plate size, magnet
envelope with rejection reasons, footprint spellings, --gap alias, and the ranking's plate
mass, array size and magnet count."""

from __future__ import annotations

import json

import pytest

from matdb import advisor as A
from matdb.errors import InputError


@pytest.mark.parametrize("text", ["20x20 mm", "20 mm x 20 mm", "20 by 20 mm", "20 X 20 mm",
                                  "2 cm x 20 mm", "20 mm"])
def test_footprint_spellings(text):
    # 20 mm = 0.02 m (SI definition of the millimetre)
    assert A.parse_footprint(text) == pytest.approx((0.02, 0.02), rel=1e-12)


def test_envelope_spellings_and_errors():
    assert A.parse_envelope("24 x 24 x 15 mm") == pytest.approx((0.024, 0.024, 0.015))
    assert A.parse_envelope("24 by 24 by 15 mm") == pytest.approx((0.024, 0.024, 0.015))
    # library errors name the request field; the CLI shows it as its flag (tested below)
    with pytest.raises(InputError, match="expected 3 lengths") as exc:
        A.parse_envelope("24 x 24 mm")
    assert exc.value.field == "magnet_envelope"
    with pytest.raises(InputError, match="missing unit") as exc:
        A.parse_footprint("20 x 20")  # no unit
    assert exc.value.field == "footprint"


def test_mass_and_total_mass_exclusive():
    with pytest.raises(InputError, match="not both") as exc:
        A.parse_request("0.1 g", "20 mm", total_mass="0.3 g")
    assert exc.value.field == "total_mass"
    with pytest.raises(InputError, match="payload mass") as exc:
        A.parse_request(None, "20 mm")
    assert exc.value.field == "mass"
    req = A.parse_request(footprint="20 x 20 mm", total_mass="0.3 g")
    assert req.total_mode and req.mass_kg == 0.0
    # the plate is sized: several sides within the footprint, none larger
    assert len(req.plates) > 1 and max(max(p) for p in req.plates) == pytest.approx(0.02)


def test_matched_thickness_gives_the_total_mass():
    """Plate mass = density x area x thickness (geometry); the matched plate weighs the total."""
    from matdb.data import catalog

    pg = catalog.get_material("pyrolytic-graphite")
    t = A.matched_thickness(0.3e-3, pg.density_kg_m3, (0.02, 0.02))
    assert t is not None
    assert pg.density_kg_m3 * 0.02 * 0.02 * t == pytest.approx(0.3e-3, rel=1e-2)
    assert pg.density_kg_m3 * 0.02 * 0.02 * t <= 0.3e-3


SMALL = dict(footprint="12 by 12 mm", min_gap="0.3 mm", materials=["pyrolytic-graphite"],
             grades=["N42"], max_magnet_size="10 mm", polish=0)


def test_total_mass_ranking_columns():
    df = A.advise(total_mass="0.1 g", **SMALL)
    assert {"plate_mass_kg", "payload_kg", "array_w_m", "array_l_m", "array_h_m", "magnet_count"} <= set(df.columns)
    ok = ~df["too_heavy"]
    # plate + payload = the total for every candidate whose plate is not already too heavy
    assert (df.loc[ok, "plate_mass_kg"] + df.loc[ok, "payload_kg"]).to_numpy() == pytest.approx(1e-4, rel=1e-9)
    # array size = count x magnet size (no spacing in the default arrangements)
    for r in df.head(20).to_dict(orient="records"):
        assert r["array_w_m"] == pytest.approx(r["cols"] * r["size_m"][0])
        assert r["magnet_count"] == r["rows"] * r["cols"]


def test_envelope_rejections_say_by_how_much():
    df = A.advise(mass="0.02 g", envelope="15 x 15 x 4 mm", thickness="1 mm", **SMALL)
    out = df[df["outside_envelope"]]
    assert not out.empty and not out["feasible"].any()
    r = out.iloc[0]
    text = "; ".join(r["reasons"])
    assert "outside the magnet envelope" in text
    over_w = (r["array_w_m"] - 0.015) * 1e3
    if over_w > 0:
        assert f"{over_w:.3g} mm too wide" in text
    over_h = (r["array_h_m"] - 0.004) * 1e3
    if over_h > 0:
        assert f"{over_h:.3g} mm too tall" in text
    inside = df[~df["outside_envelope"]]
    assert ((inside["array_w_m"] <= 0.015 + 1e-12) & (inside["array_h_m"] <= 0.004 + 1e-12)).all()


def test_too_heavy_plate_is_rejected_with_the_excess():
    df = A.advise(total_mass="0.05 g", thickness="2 mm", **SMALL)  # 12 mm x 12 mm x 2 mm graphite ~ 0.5 g
    assert df["too_heavy"].all() and not df["feasible"].any()
    assert "more than the total mass" in "; ".join(df.iloc[0]["reasons"])


def test_cli_gap_alias_and_new_columns(run_cli):
    args = ["--total-mass", "0.1 g", "--footprint", "12x12 mm", "--material", "pyrolytic-graphite",
            "--grade", "N42", "--max-magnet-size", "10 mm", "--exact", "0", "--format", "json", "--top", "5"]
    code, out, err = run_cli("advise", *args, "--gap", "0.3 mm")
    assert code == 0, err
    rows = json.loads(out)
    for k in ("plate_mass_kg", "payload_kg", "plate_m", "array_w_m", "array_l_m", "array_h_m", "magnet_count"):
        assert k in rows[0]
    code2, out2, _ = run_cli("advise", *args, "--min-gap", "0.3 mm")
    assert json.loads(out2) == rows
    code, out, err = run_cli("advise", "--mass", "0.1 g", "--total-mass", "0.1 g", "--footprint", "12 mm")
    assert code == 2 and "--total-mass" in err and out == ""
    code, out, err = run_cli("advise", "--mass", "0.1 g", "--footprint", "12 mm", "--magnet-envelope", "3 mm")
    assert code == 2 and "--magnet-envelope" in err
