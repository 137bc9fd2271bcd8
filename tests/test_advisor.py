"""matdb.advisor.engine: inputs, candidates, ordering facts, rejections, Pareto front, cache, and the
separable scaling against an independent `levitate` run on the saved design."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from matdb.advisor import engine as A
from matdb.errors import InputError, NotFoundError

# Small geometries keep the suite fast: a 2 x 2 checkerboard of 10 mm cubes (the classic
# desk demonstration) under a plate a little smaller than one magnet pair.
CUBE10_2X2 = A.ArrangementSpec("cuboid", (0.01, 0.01, 0.01), "checkerboard", 2, 2)
PLATE = "8 mm x 8 mm"


def _best(df, **eq):
    sel = np.ones(len(df), dtype=bool)
    for k, v in eq.items():
        sel &= (df[k] == v).to_numpy()
    return df[sel].iloc[0]


# ---------------------------------------------------------------------------
# inputs
# ---------------------------------------------------------------------------
def test_footprint_forms():
    assert A.parse_footprint("17 mm x 17 mm") == pytest.approx((0.017, 0.017))
    assert A.parse_footprint("17 x 12 mm") == pytest.approx((0.017, 0.012))
    assert A.parse_footprint("2 cm") == pytest.approx((0.02, 0.02))
    assert A.parse_footprint("0.5 in x 1 in") == pytest.approx((0.0127, 0.0254))  # 1 in = 25.4 mm (NIST SP 811)


@pytest.mark.parametrize("text", ["17 x 17", "17", "17 kg x 17 kg", "-3 mm x 4 mm", "mm x mm"])
def test_footprint_errors_name_the_field(text):
    with pytest.raises(InputError, match="--footprint"):
        A.parse_footprint(text)


def test_impossible_inputs_are_clear_errors():
    with pytest.raises(InputError, match=r"--mass: expected a mass of zero or more, got '-2 g'"):
        A.parse_request("-2 g", "17 mm x 17 mm")
    with pytest.raises(InputError, match="--mass"):
        A.parse_request("2", "17 mm x 17 mm")  # no unit
    with pytest.raises(InputError, match="--temp-min"):
        A.parse_request("1 g", "17 mm x 17 mm", temp_min="80 degC", temp_max="20 degC")
    with pytest.raises(InputError, match="--weights"):
        A.parse_weights("margin=1,colour=2")
    with pytest.raises(InputError, match="--thickness"):
        A.parse_request("1 g", "17 mm x 17 mm", thickness="0 mm")
    with pytest.raises(NotFoundError, match="material"):
        A.advise("1 g", PLATE, materials=["unobtainium"], arrangements=[CUBE10_2X2])


def test_weights_parse():
    w = A.parse_weights("cost=0.5, derating=0")
    assert (w.margin, w.cost, w.derating) == (1.0, 0.5, 0.0)


# ---------------------------------------------------------------------------
# candidates
# ---------------------------------------------------------------------------
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


# ---------------------------------------------------------------------------
# Pareto front and score
# ---------------------------------------------------------------------------
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
    from matdb.data import catalog

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
    from matdb.data import catalog

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
    from matdb.data import catalog
    from matdb.physics import thermal as TH

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


# ---------------------------------------------------------------------------
# cache
# ---------------------------------------------------------------------------
def test_disk_cache_is_reused(tmp_path, monkeypatch):
    from matdb.physics import plate as P

    monkeypatch.setenv("MATDB_CACHE_DIR", str(tmp_path))
    A.clear_memory_cache()
    spec = A.ArrangementSpec("cuboid", (0.00635, 0.00635, 0.00635), "stripes", 2, 2)
    g = A.geometry(spec, (0.008, 0.008))
    hs = np.array([2e-4, 1.2e-3])
    first = g.coarse(hs)
    g.save()
    assert list((tmp_path / "advisor").glob("*.npz"))
    A.clear_memory_cache()

    def boom(*a, **k):
        raise AssertionError("recomputed despite the cache")

    monkeypatch.setattr(P, "plane_integrals", boom)
    again = A.geometry(spec, (0.008, 0.008)).coarse(hs)
    assert np.array_equal(first, again)
    A.clear_memory_cache()


# ---------------------------------------------------------------------------
# THE KEY CHECK: separable scaling == independent levitate run on the saved design
# ---------------------------------------------------------------------------
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
    import matdb.analysis.levitate as L
    from matdb.physics import plate as P

    worst = key == "gap_worst_m"
    t_op = design.conditions.nominal_k
    t = max(design.conditions.extremes()[1], t_op) if worst else t_op  # as matdb.analysis.levitate
    geom = L.plate_geometry(design, design.arrangement(None))
    arr = design.arrangement(t, worst=worst)
    chi = L._chi_at(design, t)
    if worst:
        chi = L._chi_worst(design, *chi)
    f = P._force_fn(arr.B, geom, chi[0], chi[1], P.DEFAULT_ORDER)
    xs = gap + np.linspace(-5e-7, 5e-7, 21)
    fs = np.array([f(x) for x in xs])
    slope, icpt = np.polyfit(xs, fs, 1)
    return float(np.max(np.abs(fs - (slope * xs + icpt))) / abs(slope))


@pytest.mark.parametrize("specs, kw, picks", KEY_CASES)
def test_exact_rows_equal_levitate_on_the_saved_design(tmp_path, specs, kw, picks):
    from matdb.design import load_design
    from matdb.analysis.levitate import levitate_plate
    from matdb.physics import plate as P

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
        # so two correct solvers can differ by that much; the advisor follows the same
        # bracketing and usually agrees to 1e-12 relative. Bound: 1e-9 relative + 4 xtol.
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
        # Stiffnesses at levitate's own gap, from the scaled unit-polarisation integrals: 1e-9.
        same = A.exact_evaluation(row, req, cat, side=False, at_gap_m=direct["gap_m"])
        for k in ("k_z_n_m", "f_z_hz", "k_x_n_m", "k_y_n_m", "k_tilt_n_m_per_rad"):
            assert same[k] == pytest.approx(direct[k], rel=1e-9), k
        assert bool(same["laterally_stable"]) == direct["laterally_stable"]
        assert bool(row["laterally_stable"]) == direct["laterally_stable"]
        assert bool(row["demag_risk"]) == direct["demag_risk"]


def test_screening_is_close_to_the_exact_rows():
    req = A.parse_request("0.05 g", PLATE, materials=["pyrolytic-graphite"], grades=["N42"],
                          thickness="1 mm")
    cat = A.build_catalogue(req, [CUBE10_2X2])
    screen = A._evaluate(req, cat).iloc[0].to_dict()
    exact = A.exact_evaluation(screen, req, cat, side=False)
    # the screening rule is about 1e-4 from the exact quadrature; gaps interpolated on a
    # 0.05-0.25 mm height grid
    assert screen["margin"] == pytest.approx(exact["margin"], rel=1e-3)
    assert screen["gap_m"] == pytest.approx(exact["gap_m"], rel=0.03)
    assert screen["k_x_n_m"] == pytest.approx(exact["k_x_n_m"], rel=0.1)
    assert screen["k_z_n_m"] == pytest.approx(exact["k_z_n_m"], rel=0.1)


def test_screened_tilt_follows_the_exact_matrix_and_a_high_payload_falls():
    # Screening moves the tabulated stiffness matrix to the combined centre of mass; it must
    # track the exact matrix about that point (plate.stability). A payload whose centre of
    # mass is high enough makes the coupled (sliding, tilting) matrix lose positive
    # definiteness through the -h M g term (small-oscillation stability, Goldstein,
    # Classical Mechanics, 3rd ed., ch. 6).
    for height, stable in (("2 mm", True), ("300 mm", False)):
        req = A.parse_request("0.05 g", PLATE, materials=["pyrolytic-graphite"], grades=["N42"],
                              thickness="1 mm", payload_height=height)
        cat = A.build_catalogue(req, [CUBE10_2X2])
        df = A._evaluate(req, cat)
        assert df.at[0, "laterally_stable"]  # sliding alone is restored
        A._screen_tilt(df, [0], req, cat)
        row = df.iloc[0].to_dict()
        exact = A.exact_evaluation(row, req, cat, side=False)
        assert row["tilt_checked"]
        assert bool(exact["laterally_stable"]) == stable
        assert bool(row["laterally_stable"]) == stable
        assert row["k_tilt_n_m_per_rad"] == pytest.approx(exact["k_tilt_n_m_per_rad"], rel=0.1)
        if not stable:
            A._refresh_flags(df, [0], req)
            assert not df.at[0, "feasible"]
            r, _ = A.reasons_for(df.iloc[0].to_dict(), req, cat)
            assert any("sliding and tilting together" in x or "tips over" in x for x in r)


def test_lift_scales_with_chi_and_br_squared():
    # F = |chi| / (2 mu0) * integral of grad(B^2) (Berry and Geim, Eur. J. Phys. 18, 307
    # (1997)): for one geometry the lift of an isotropic plate scales with |chi| and with Br^2.
    from matdb.data import catalog

    df = A.advise("0 g", PLATE, materials=["bismuth", "antimony"], grades=["N35", "N52"],
                  thickness="1 mm", arrangements=[CUBE10_2X2], polish=0)
    lift = {(r["material"], r["grade"]): r["lift_nominal_n"] for _, r in df.iterrows()}
    bi, sb = catalog.get_material("bismuth"), catalog.get_material("antimony")
    n35, n52 = catalog.get_grade("N35"), catalog.get_grade("N52")
    assert n35.alpha_br_pct_per_k == n52.alpha_br_pct_per_k  # same temperature factor
    assert lift[("bismuth", "N52")] / lift[("antimony", "N52")] == pytest.approx(bi.chi_si / sb.chi_si, rel=1e-12)
    assert lift[("bismuth", "N52")] / lift[("bismuth", "N35")] == pytest.approx((n52.br_t / n35.br_t) ** 2, rel=1e-12)
