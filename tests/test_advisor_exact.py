"""matdb.advisor.exact: the exact rows are `matdb levitate` on the saved design."""

from __future__ import annotations

import math

import numpy as np
import pytest

import matdb.analysis.levitate as L
from matdb import advisor as A
from matdb.analysis.levitate import levitate_plate
from matdb.design import load_design
from matdb.physics import plate as P

from advisor_cases import CUBE10_2X2, PLATE

KEY_CASES = [
    # (arrangement, request keywords, sampled row positions)
    ([CUBE10_2X2], dict(mass="0.05 g", footprint=PLATE, temp_min="0 degC", temp_max="40 degC",
                        materials=["pyrolytic-graphite"], grades=["N42", "N52"],
                        thickness=["0.5 mm", "1 mm"], payload_height="1 mm"), (0, 3)),
    ([A.ArrangementSpec("cylinder", (0.01, 0.005), "checkerboard", 2, 2)],
     dict(mass="0.02 g", footprint=PLATE, temp_min="-20 degC", temp_max="50 degC",
          materials=["pyrolytic-graphite"], grades=["N42SH", "Sm2Co17-30"], thickness="1 mm"), (0,)),
]


def _root_scatter_m(design, key: str, gap: float) -> float:
    """Scatter of the quadrature lift about a straight line near ``gap``, over its slope [m]."""
    worst = key == "gap_worst_m"
    t_op = design.conditions.nominal_k
    t = max(design.conditions.extremes()[1], t_op) if worst else t_op  # as matdb.analysis.levitate
    geom = L.plate_geometry(design, design.arrangement(None))
    arr = design.arrangement(t, worst=worst)
    chi = L.plate_chi_at(design, t)
    if worst:
        chi = L.plate_chi_worst(design, *chi)
    f = P.lift_force_fn(arr.B, geom, chi[0], chi[1], P.DEFAULT_ORDER)
    xs = gap + np.linspace(-5e-7, 5e-7, 21)
    fs = np.array([f(x) for x in xs])
    slope, icpt = np.polyfit(xs, fs, 1)
    return float(np.max(np.abs(fs - (slope * xs + icpt))) / abs(slope))


@pytest.mark.parametrize("specs, kw, picks", KEY_CASES)
def test_exact_rows_equal_levitate_on_the_saved_design(tmp_path, specs, kw, picks):
    assert A.EXACT_ORDER == P.DEFAULT_ORDER
    kw = dict(kw)
    req = A.parse_request(kw.pop("mass"), kw.pop("footprint"), **kw)
    df, cat = A.advise_request(req, specs, polish=max(picks) + 1)
    for i in picks:
        row = df.iloc[i].to_dict()
        assert row["exact"]
        path = A.save_design(row, req, tmp_path / f"cand{i}.toml", cat)
        direct = levitate_plate(load_design(path))  # real Br, no unit-field scaling
        assert direct["floats"] and math.isfinite(row["gap_m"])
        # The equilibrium gaps: levitate finds them by brentq with xtol = 1e-9 m
        # (plate.highest_stable_root, scipy's brentq returns within about 2 xtol of the root),
        # so two correct solvers can differ by that much; the exact row is levitate's own
        # run on the same design and agrees far closer. Bound: 1e-9 relative + 4 xtol.
        for k in ("gap_m", "gap_worst_m"):
            tol = 1e-9 * direct[k] + 4e-9
            if abs(row[k] - direct[k]) > tol:
                # Below about 0.1 mm the lift of a magnet array is only as smooth as its
                # quadrature (each height on its own graded rule): F(g) scatters by ~1e-4
                # relative between nearby gaps, so brentq on two bit-wise different but
                # equally correct evaluations may stop at different crossings. Then the
                # gaps must agree within that scatter divided by the slope, measured here.
                noise = _root_scatter_m(load_design(path), k, direct[k])
                assert abs(row[k] - direct[k]) <= tol + 2 * noise, (k, row[k], direct[k], noise)
            else:
                assert abs(row[k] - direct[k]) <= tol, k
        # Quantities at the required gap do not involve a root: 1e-9 relative.
        assert row["margin_nominal"] == pytest.approx(direct["margin"], rel=1e-9)
        assert row["max_payload_worst_kg"] == pytest.approx(direct["max_payload_worst_kg"], rel=1e-9)
        assert row["derating_pct"] == pytest.approx(direct["lift_derating_pct"], rel=1e-12)
        # The worst-case margin: the worst-case lift at the required gap over the weight.
        assert row["margin"] == pytest.approx(direct["lift_worst_at_required_gap_n"] / direct["weight_n"],
                                              rel=1e-9)
        # Stiffnesses at levitate's gap (the exact row is levitate's own figures): 1e-9.
        same = A.exact_evaluation(row, req, cat)
        for k in ("k_z_n_m", "f_z_hz", "k_x_n_m", "k_y_n_m", "k_tilt_n_m_per_rad"):
            assert same[k] == pytest.approx(direct[k], rel=1e-9), k
        assert bool(same["laterally_stable"]) == direct["laterally_stable"]
        assert bool(row["laterally_stable"]) == direct["laterally_stable"]
        assert bool(row["demag_risk"]) == direct["demag_risk"]
