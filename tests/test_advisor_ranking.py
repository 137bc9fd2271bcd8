"""matdb.advisor.ranking: Pareto front, score, ordering facts and rejections in words."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matdb import advisor as A
from matdb.data import catalog
from matdb.physics import thermal as TH

from advisor_cases import CUBE10_2X2, PLATE, best_row as _best


def _brute_front(m, c, d):
    n = len(m)
    out = np.ones(n, dtype=bool)
    for i in range(n):
        for j in range(n):
            if i != j and m[j] >= m[i] and c[j] <= c[i] and d[j] <= d[i] and \
                    (m[j] > m[i] or c[j] < c[i] or d[j] < d[i]):
                out[i] = False
                break
    return out


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 4), st.integers(0, 4), st.integers(0, 3)), min_size=1, max_size=25))
def test_pareto_front_matches_the_definition(points):
    # small integer grids force many ties, the hard case of the sweep
    m, c, d = (np.array(v, dtype=float) for v in zip(*points))
    assert np.array_equal(A.pareto_front(m, c, d), _brute_front(m, c, d))


def test_score_prefers_margin_low_cost_low_derating():
    w = A.Weights()
    s = A.score_values([2.0, 1.0, 2.0, 2.0], [5.0, 5.0, 10.0, 5.0], [5.0, 5.0, 5.0, 20.0], w)
    assert s[0] > s[1] and s[0] > s[2] and s[0] > s[3]
    assert A.score_values([1.0], [math.e], [0.0], A.Weights(1, 1, 1))[0] == pytest.approx(-1.0)


# ---------------------------------------------------------------------------
# ordering facts and rejections
# ---------------------------------------------------------------------------
def test_pyrolytic_graphite_outranks_bismuth():
    # Handbook values: |chi|/rho of pyrolytic graphite along its c axis (-4.5e-4, 2.2 g/cm^3;
    # Simon and Geim, J. Appl. Phys. 87, 6200 (2000)) is about ten times that of bismuth
    # (-1.66e-4, 9.78 g/cm^3; CRC Handbook), so a graphite plate lifts far more per weight.

    df = A.advise("0 g", PLATE, materials=["pyrolytic-graphite", "bismuth"], grades=["N42"],
                  thickness="1 mm", arrangements=[CUBE10_2X2], polish=0)
    pg = _best(df, material="pyrolytic-graphite")
    bi = _best(df, material="bismuth")
    assert pg["rank"] < bi["rank"]
    assert pg["feasible"] and not bi["feasible"]
    assert any("weight" in r for r in bi["reasons"])
    # With no payload the lift/weight ratio between the plates is a weighted mean of the
    # |chi|/rho ratios seen by the vertical (c axis) and horizontal (basal plane) field parts.
    g, b = catalog.get_material("pyrolytic-graphite"), catalog.get_material("bismuth")
    per_rho = lambda chi, m: abs(chi) / m.density_kg_m3  # noqa: E731
    hi = per_rho(g.chi_perp_si, g) / per_rho(b.chi_si, b)
    lo = per_rho(g.chi_par_si, g) / per_rho(b.chi_si, b)
    assert 9 < hi < 14  # "about ten times" (handbook values above)
    ratio = pg["margin_nominal"] / bi["margin_nominal"]
    assert lo < ratio < hi


def test_stronger_grade_gives_more_margin_on_the_same_arrangement():
    # Lift scales with Br^2 (Berry and Geim, Eur. J. Phys. 18, 307 (1997)); N52 (Br about
    # 1.45 T) is a stronger grade than N35 (about 1.2 T) in the usual grade tables (common
    # practice, no source).
    df = A.advise("0.05 g", PLATE, materials=["pyrolytic-graphite"], grades=["N35", "N42", "N52"],
                  thickness="1 mm", arrangements=[CUBE10_2X2], polish=0)
    m = {r["grade"]: r["margin"] for _, r in df.iterrows()}
    assert m["N35"] < m["N42"] < m["N52"]


def test_hot_plain_n_grade_rejected_high_temperature_grade_survives():
    # Maximum working temperatures by suffix (common practice, no source): plain N about
    # 80 C, SH about 150 C; both N42 and N42SH have Br about 1.3 T.
    df = A.advise("0.01 g", PLATE, min_gap="0.1 mm", temp_max="140 degC",
                  materials=["pyrolytic-graphite"], grades=["N42", "N42SH"], thickness="1 mm",
                  arrangements=[CUBE10_2X2], polish=2)
    n = _best(df, grade="N42")
    sh = _best(df, grade="N42SH")
    assert not n["feasible"]
    assert any("rated to 80 C" in r for r in n["reasons"])
    assert n["demag_risk"]  # NdFeB loses coercivity when hot (thermal.demag_check)
    assert sh["feasible"], sh["reasons"]
    assert sh["derating_pct"] > 20  # lift falls with Br^2 and |chi|: about 37 % at 140 C
    assert sh["rank"] < n["rank"]


def test_heavy_payload_gives_no_feasible_candidate_and_reasons():
    df = A.advise("2 kg", PLATE, materials=["pyrolytic-graphite", "bismuth", "aluminium"],
                  grades=["N52", "Ferrite-C8"], thickness="1 mm", arrangements=[CUBE10_2X2], polish=1)
    assert len(df) == 6 and not df["feasible"].any()
    assert all(len(r) > 0 for r in df["reasons"])
    assert not df["pareto"].any()
    feas = A.advise("2 kg", PLATE, materials=["pyrolytic-graphite"], grades=["N52"],
                    thickness="1 mm", arrangements=[CUBE10_2X2], feasible_only=True, polish=0)
    assert feas.empty


def test_paramagnet_rejected_with_reason():
    # Aluminium is paramagnetic (CRC Handbook, +16.5e-6 cm^3/mol): it is attracted, never lifted.
    df = A.advise("0 g", PLATE, materials=["aluminium"], grades=["N42"], thickness="1 mm",
                  arrangements=[CUBE10_2X2], polish=0)
    r = df.iloc[0]
    assert not r["feasible"] and r["margin"] < 0
    assert any("paramagnetic" in x for x in r["reasons"])


def test_budget_and_cost():

    df = A.advise("0.02 g", PLATE, materials=["pyrolytic-graphite"], grades=["N42"],
                  thickness="1 mm", arrangements=[CUBE10_2X2], budget="0.5 USD", polish=0)
    r = df.iloc[0]
    g, m = catalog.get_grade("N42"), catalog.get_material("pyrolytic-graphite")
    expect = 4 * 1e-6 * g.density_kg_m3 * g.price_usd_per_kg + 64e-6 * 1e-3 * m.density_kg_m3 * m.price_usd_per_kg
    assert r["cost_usd"] == pytest.approx(expect, rel=1e-12)
    assert r["price_illustrative"]
    assert not r["feasible"] and any("over the budget" in x for x in r["reasons"])


def test_ferrite_demag_cold_matches_the_direct_check():
    # Hard ferrite loses coercivity when cold (positive beta; MMPA 0100-00): the advisor's
    # scaled check must equal thermal.demag_check run on the real arrangement.

    df = A.advise("0 g", PLATE, temp_min="-40 degC", temp_max="20 degC", materials=["bismuth"],
                  grades=["Ferrite-C5"], thickness="1 mm", arrangements=[CUBE10_2X2], polish=0)
    r = df.iloc[0]
    g = catalog.get_grade("Ferrite-C5")
    direct = TH.demag_check(CUBE10_2X2.build(g.br_t), g.hcj_ka_m * 1e3, g.beta_hcj_pct_per_k,
                            g.family, [233.15, 293.15], alpha_pct_per_k=g.alpha_br_pct_per_k)
    assert r["demag_ratio"] == pytest.approx(direct.worst_ratio, rel=1e-9)
    assert bool(r["demag_risk"]) == direct.risk
    assert r["demag_temp_k"] == pytest.approx(direct.worst_temp_k)
    assert direct.worst_temp_k == pytest.approx(233.15)  # worst when cold


def test_lift_scales_with_chi_and_br_squared():
    # F = |chi| / (2 mu0) * integral of grad(B^2) (Berry and Geim, Eur. J. Phys. 18, 307
    # (1997)): for one geometry the lift of an isotropic plate scales with |chi| and with Br^2.

    df = A.advise("0 g", PLATE, materials=["bismuth", "antimony"], grades=["N35", "N52"],
                  thickness="1 mm", arrangements=[CUBE10_2X2], polish=0)
    lift = {(r["material"], r["grade"]): r["lift_nominal_n"] for _, r in df.iterrows()}
    bi, sb = catalog.get_material("bismuth"), catalog.get_material("antimony")
    n35, n52 = catalog.get_grade("N35"), catalog.get_grade("N52")
    assert n35.alpha_br_pct_per_k == n52.alpha_br_pct_per_k  # same temperature factor
    assert lift[("bismuth", "N52")] / lift[("antimony", "N52")] == pytest.approx(bi.chi_si / sb.chi_si, rel=1e-12)
    assert lift[("bismuth", "N52")] / lift[("bismuth", "N35")] == pytest.approx((n52.br_t / n35.br_t) ** 2, rel=1e-12)
