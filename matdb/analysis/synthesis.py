"""Sizing optimiser for floating plates: beyond the catalogue of standard magnets.

The advisor (:mod:`matdb.advisor`) ranks standard cubes and cylinders in default counts.
:func:`optimise` starts from its best feasible candidate and varies, for that plate
material, grade, pattern and magnet shape:

* rows and columns (integers: an honest outer loop over every pair that fits),
* the plate side (a square inside the footprint; an outer loop over a few fractions of it,
  since lateral stability is not monotone in the side),
* inside each outer case, continuously with :func:`scipy.optimize.minimize` (COBYQA,
  derivative-free, bounds and constraints): the magnet face and height (or one item of a
  stock list the user gives), the spacing between magnets and, when only the payload is
  given, the plate thickness (with a total mass the plate's mass is the total less any
  payload, so the thickness follows from the side).

Objectives: ``"margin"`` (default) maximises the worst-case margin (lift / weight at the
required gap, hottest temperature, minimum-spec ``B_r``, ``|chi|`` less its uncertainty)
within the budget and envelope; ``"cost"`` finds the cheapest design reaching
``min_margin``. The search uses a coarse quadrature (order 3, graded for 1 mm; about 1e-3
relative on the lift); every design shown is then re-checked by
:func:`matdb.analysis.levitate.levitate_plate`, the exact path of ``matdb levitate``, and kept only
when it floats at the required gap in the worst case, is laterally, tilt- and
coupled-stable, has its plate side inside a stable side interval with at least 10% to
spare, has no irreversible loss at the coldest or hottest temperature, fits the budget
and the envelope. The catalogue start is re-checked the same way, so the improvement
reported compares like with like.

Nothing here is new physics: the field is :mod:`matdb.physics.arrangement`, the lift
:func:`matdb.physics.plate.plane_integrals` (energy density ``-chi B^2 / (2 mu0)``, Berry
and Geim 1997).
"""

from __future__ import annotations

import csv
import math
import time
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np
import pandas as pd
from scipy.optimize import Bounds, NonlinearConstraint, minimize

from matdb import advisor as A  # the optimiser starts from the best catalogue candidate (the one upward import, see DEVELOPERS.md)
from matdb.analysis import levitate as L
from matdb.data import catalog
from matdb.design import Conditions, MagnetSpec, PlateDesign, PlateSpec, write_design
from matdb.errors import InputError
from matdb.physics import plate as P
from matdb.physics import plate_tables as PT
from matdb.physics.thermal import lift_derating_pct
from matdb.constants import G_STANDARD, MU0, T_REF_K, kelvin_to_celsius

#: plate side as a fraction of the array's shorter side (an outer loop: lateral stability
#: over a checkerboard depends mostly on this ratio, and is not monotone in it)
SIDE_RATIOS = (0.3, 0.4, 0.5, 0.6, 0.7, 0.85, 1.0)
SEARCH_ORDER = 3  # Gauss-Legendre nodes per panel in the search
SEARCH_RULE_FLOOR_M = 1e-3  # the search rule is graded no finer than for this height
MIN_MAGNET_M = 1e-3  # smallest magnet dimension the search proposes
MAX_MAGNET_M = 30e-3  # largest, when nothing else bounds it
MAX_SPACING_M = 5e-3
MIN_THICKNESS_M = 1e-4
MAX_THICKNESS_M = 3e-3
MAX_COUNT = 5  # rows and columns go up to this
SIDE_SPARE = 0.10  # the plate side sits inside a stable interval with this much to spare
REFINE_CASES = 8  # outer cases refined continuously (the best by their starting value)
MAX_EVALS = 30  # objective evaluations per refinement
MAX_SCREENS = 10  # stability pre-screens at most
SCREEN_STABILITY_ORDER = 3  # quadrature of the stability pre-screen
OBJECTIVES = ("margin", "cost")

ProgressFn = Callable[[float, str], None]


# ---------------------------------------------------------------------------
# inputs
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class StockItem:
    """One magnet size a supplier stocks (SI)."""

    shape: str  # "cuboid" (x, y, h) or "cylinder" (d, h)
    size: tuple[float, ...]


def read_stock(path) -> tuple[StockItem, ...]:
    """A stock list: CSV with columns ``shape`` and ``size``, e.g. ``cuboid,10 x 10 x 5 mm``
    or ``cylinder,12.7 x 6.35 mm`` (diameter x height)."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8")
    except OSError as exc:
        raise InputError(f"cannot read {str(p)!r}: {exc.strerror or exc}", field="stock") from None
    rows = list(csv.DictReader(text.splitlines()))
    if not rows or "shape" not in rows[0] or "size" not in rows[0]:
        raise InputError(f"expected a CSV with columns shape,size in {str(p)!r}", field="stock")
    out = []
    for i, r in enumerate(rows, start=2):
        shape = (r.get("shape") or "").strip().lower()
        if shape not in ("cuboid", "cylinder"):
            raise InputError(f"line {i}: expected shape cuboid or cylinder, got {shape!r}", field="stock")
        n = 3 if shape == "cuboid" else 2
        size = A.parse_dimensions(r.get("size") or "", n, f"stock, line {i}, size",
                                  "10 x 10 x 5 mm" if n == 3 else "12.7 x 6.35 mm")
        out.append(StockItem(shape, tuple(size)))
    return tuple(out)


@dataclass(frozen=True)
class Sizing:
    """One sized design (SI): magnets, arrangement and plate."""

    shape: str
    size: tuple[float, ...]
    pattern: str
    rows: int
    cols: int
    spacing: float
    side: float  # square plate side [m]
    thickness: float  # plate thickness [m]

    def spec(self) -> A.ArrangementSpec:
        return A.ArrangementSpec(self.shape, tuple(self.size), self.pattern, self.rows, self.cols,
                                 self.spacing)


@dataclass
class OptimiseResult:
    """What :func:`optimise` found: rows (dicts with ``advise``'s keys), the start and notes."""

    rows: list[dict]
    start: dict | None
    improvement: float | None  # best / start - 1 (margin) or 1 - best / start (cost)
    objective: str
    request: A.AdviceRequest
    evaluations: int = 0
    checks: int = 0
    seconds: float = 0.0
    notes: list[str] = field(default_factory=list)

    @property
    def best(self) -> dict | None:
        return self.rows[0] if self.rows else None


# ---------------------------------------------------------------------------
# the fast objective
# ---------------------------------------------------------------------------
class _Model:
    """Worst-case lift, weight and cost of a sizing for one material and grade."""

    def __init__(self, req: A.AdviceRequest, mat, grade):
        self.req, self.mat, self.grade = req, mat, grade
        t_w = req.temp_max_k
        coeff = mat.temp_coeff_per_k
        cf = 1.0 if coeff is None else 1.0 + coeff * (t_w - T_REF_K)
        ref = abs(mat.chi_vertical)
        fw = 1.0
        if mat.uncertainty_si is not None and ref > 0:
            fw = max(ref - abs(mat.uncertainty_si), 0.0) / ref
        self.a_w = abs(mat.chi_vertical * cf) * fw
        self.b_w = abs(mat.chi_horizontal * cf) * fw
        br_op = grade.br_t * (1.0 + grade.alpha_br_pct_per_k / 100.0 * (t_w - T_REF_K))
        self.a_op = abs(mat.chi_vertical * cf) * br_op ** 2  # nominal, times B_r^2 [T^2]
        self.b_op = abs(mat.chi_horizontal * cf) * br_op ** 2
        br_min = grade.br_min_t if grade.br_min_t is not None else grade.br_t
        br_w = br_min * (1.0 + grade.alpha_br_pct_per_k / 100.0 * (t_w - T_REF_K))
        self.s_w = br_w ** 2 / (2 * MU0)
        self.g_req = max(req.min_gap_m, 5e-5)
        self.memo: dict[tuple, float] = {}
        self.evaluations = 0

    def plate_mass(self, z: Sizing) -> float:
        return self.mat.density_kg_m3 * z.side * z.side * z.thickness

    def payload(self, z: Sizing) -> float:
        return float(self.req.payload_for(self.plate_mass(z)))

    def weight(self, z: Sizing) -> float:
        return (self.plate_mass(z) + max(self.payload(z), 0.0)) * G_STANDARD

    def cost(self, z: Sizing) -> float:
        pm = self.grade.price_usd_per_kg
        pp = self.mat.price_usd_per_kg
        if pm is None or pp is None:
            return math.nan
        return z.spec().magnet_volume_m3 * self.grade.density_kg_m3 * pm + self.plate_mass(z) * pp

    def lift(self, z: Sizing) -> float:
        """Worst-case lift at the required gap [N] (search quadrature)."""
        key = (z.shape, tuple(round(v * 1e9) for v in z.size), z.pattern, z.rows, z.cols,
               round(z.spacing * 1e9), round(z.side * 1e9), round(z.thickness * 1e9))
        v = self.memo.get(key)
        if v is None:
            arr = z.spec().build(1.0)
            bx, by = P.edge_lines(arr.magnets)
            h = np.array([self.g_req, self.g_req + z.thickness])
            # both planes on the rule graded for the lower one; folded by the array's mirror
            # symmetry (the same integral on a half or a quarter of the nodes)
            (iz, ixy) = PT.plane_integrals(arr.B, z.side, z.side, bx, by, h, SEARCH_ORDER,
                                           max(self.g_req, SEARCH_RULE_FLOOR_M),
                                           PT.mirror_symmetry(arr), same_rule=True).T
            v = self.s_w * (self.a_w * (iz[0] - iz[1]) + self.b_w * (ixy[0] - ixy[1]))
            self.memo[key] = v
            self.evaluations += 1
        return v

    def stable_with_spare(self, z: Sizing, spare: float = SIDE_SPARE) -> bool:
        """Pre-screen: floats and is laterally stable (nominal, hottest) at the side and at
        the side shrunk and grown by ``spare`` (coarse quadrature)."""
        arr = z.spec().build(1.0)
        bx, by = P.edge_lines(arr.magnets)
        geom = P.PlateGeometry("rectangle", z.side, z.side, z.thickness, 0.0, 0.0, bx, by)
        payload = max(self.payload(z), 0.0)
        for side in (z.side, z.side * (1 + spare), z.side / (1 + spare)):
            if not P.is_stable_floating(arr.B, geom.with_side(side), self.a_op, self.b_op,
                                        self.mat.density_kg_m3, payload, self.req.payload_height_m,
                                        order=SCREEN_STABILITY_ORDER):
                return False
        return True

    def margin(self, z: Sizing) -> float:
        w = self.weight(z)
        return self.lift(z) / w if w > 0 else math.inf


# ---------------------------------------------------------------------------
# one outer case: rows, cols, plate side (and the stock item)
# ---------------------------------------------------------------------------
@dataclass
class _Case:
    rows: int
    cols: int
    side: float | None  # a fixed plate side [m], or
    ratio: float | None = None  # the plate side over the array's shorter side
    stock: StockItem | None = None
    x0: np.ndarray | None = None
    value: float = -math.inf  # objective at the start point (higher is better)
    best: Sizing | None = None
    best_value: float = -math.inf


class _Problem:
    """Variables, bounds and constraints of one case; ``x`` in millimetres."""

    def __init__(self, model: _Model, base, case: _Case, objective: str, min_margin: float,
                 envelope, max_side: float):
        self.m, self.base, self.case, self.obj = model, base, case, objective
        self.max_side = max_side
        self.min_margin = min_margin
        self.env = envelope
        req = model.req
        self.total = req.total_mode
        self.names: list[str] = []
        lo, hi = [], []
        cap = MAX_MAGNET_M if req.max_magnet_size_m is None else req.max_magnet_size_m
        if case.stock is None:
            face_hi = min(cap, (envelope[0] - 0) / case.cols, (envelope[1]) / case.rows)
            self.names += ["face", "height"]
            lo += [MIN_MAGNET_M, MIN_MAGNET_M]
            hi += [max(face_hi, MIN_MAGNET_M), max(min(cap, envelope[2]), MIN_MAGNET_M)]
        self.names.append("spacing")
        lo.append(0.0)
        hi.append(MAX_SPACING_M)
        if not self.total:
            self.names.append("thickness")
            lo.append(MIN_THICKNESS_M)
            hi.append(MAX_THICKNESS_M)
        self.lo = np.array(lo) * 1e3
        self.hi = np.array(hi) * 1e3

    def sizing(self, x) -> Sizing:
        d = dict(zip(self.names, np.asarray(x, dtype=float) * 1e-3))
        c = self.case
        if c.stock is not None:
            shape, size = c.stock.shape, c.stock.size
        elif self.base.shape == "cuboid":
            shape, size = "cuboid", (d["face"], d["face"], d["height"])
        else:
            shape, size = "cylinder", (d["face"], d["height"])
        sp = float(max(d["spacing"], 0.0))
        if c.side is not None:
            side = c.side
        else:
            spec = A.ArrangementSpec(shape, tuple(size), self.base.pattern, c.rows, c.cols, sp)
            side = c.ratio * min(spec.extent)
        if self.total:
            mass = self.m.req.total_mass_kg
            t = mass / (self.m.mat.density_kg_m3 * side * side)
        else:
            t = d["thickness"]
        return Sizing(shape, tuple(float(v) for v in size), self.base.pattern, c.rows, c.cols,
                      sp, float(side), float(t))

    def extent_excess(self, z: Sizing) -> np.ndarray:
        """Envelope minus the array per axis, budget minus cost: all >= 0 when allowed [m, USD]."""
        w, ln = z.spec().extent
        out = [self.env[0] - w, self.env[1] - ln, self.env[2] - z.size[-1]]
        return np.array(out)

    def constraints(self, x) -> np.ndarray:
        """>= 0 when satisfied (scaled to about 1)."""
        z = self.sizing(x)
        g = list(self.extent_excess(z) * 1e3)  # mm
        g.append((self.max_side - z.side) * 1e3)
        budget = self.m.req.budget_usd
        if budget is not None and self.obj == "margin":
            c = self.m.cost(z)
            g.append((budget - c) if math.isfinite(c) else -1.0)
        if self.total:
            t = z.thickness
            g.append((t - MIN_THICKNESS_M) * 1e3)
            g.append((MAX_THICKNESS_M - t) * 1e3)
        if self.obj == "cost":
            g.append(self.m.margin(z) - self.min_margin)
        return np.array(g, dtype=float)

    def value(self, x) -> float:
        """Objective to maximise (margin, or minus the cost)."""
        z = self.sizing(x)
        if self.obj == "margin":
            return self.m.margin(z)
        c = self.m.cost(z)
        return -c if math.isfinite(c) else -math.inf

    def penalised(self, x) -> float:
        """The value with every constraint violation subtracted (for ranking start points)."""
        v = self.value(x)
        viol = np.minimum(self.constraints(x), 0.0).sum()
        return v + 10.0 * viol


def _start_point(prob: _Problem) -> np.ndarray:
    """Largest magnets that fit the envelope (and the budget), no spacing, mid thickness."""
    x = []
    for n, lo, hi in zip(prob.names, prob.lo, prob.hi):
        if n == "spacing":
            x.append(0.0)
        elif n == "thickness":
            x.append(min(max(0.5, lo), hi))
        else:
            x.append(hi)
    x = np.array(x, dtype=float)
    budget = prob.m.req.budget_usd
    if budget is not None and prob.obj == "margin" and prob.case.stock is None:
        for _ in range(30):  # shrink until within the budget
            c = prob.m.cost(prob.sizing(x))
            if not math.isfinite(c) or c <= budget:
                break
            k = [i for i, n in enumerate(prob.names) if n in ("face", "height")]
            x[k] = np.maximum(prob.lo[k], x[k] * 0.9)
    return x


def _refine(prob: _Problem) -> tuple[Sizing, float]:
    """Continuous search of one case (COBYQA: derivative-free, bounds, constraints)."""
    x0 = np.clip(prob.case.x0 if prob.case.x0 is not None else _start_point(prob), prob.lo, prob.hi)
    best = [x0, prob.value(x0) if (prob.constraints(x0) >= -1e-9).all() else -math.inf]

    def f(x):
        v = prob.value(x)
        if v > best[1] and (prob.constraints(x) >= -1e-9).all():
            best[0], best[1] = np.array(x), v
        return -v if math.isfinite(v) else 1e9

    span = float(np.max(prob.hi - prob.lo)) if prob.hi.size else 1.0
    try:
        minimize(f, x0, method="COBYQA", bounds=Bounds(prob.lo, prob.hi),
                 constraints=[NonlinearConstraint(prob.constraints, 0.0, np.inf)],
                 options={"maxfev": MAX_EVALS, "initial_tr_radius": max(0.25 * span, 0.05),
                          "final_tr_radius": 1e-3, "disp": False})
    except (ValueError, np.linalg.LinAlgError):  # pragma: no cover - a degenerate case
        pass
    return prob.sizing(best[0]), best[1]


# ---------------------------------------------------------------------------
# the exact check
# ---------------------------------------------------------------------------
def design_of(z: Sizing, req: A.AdviceRequest, mat, grade, name: str | None = None):
    """A :class:`matdb.design.model.PlateDesign` of a sizing (what ``--save`` writes)."""
    spec = z.spec()
    mags = MagnetSpec(spec.shape, tuple(spec.size), grade.grade, None, spec.pattern, spec.rows,
                      spec.cols, spec.spacing, False, 0.0, (), {grade.grade: grade})
    pm = mat.density_kg_m3 * z.side * z.side * z.thickness
    payload = max(float(req.payload_for(pm)), 0.0)
    plate = PlateSpec(mat.id, "rectangle", (z.side, z.side, z.thickness), None, None, None,
                      payload, req.payload_height_m, req.min_gap_m, (0.0, 0.0), mat)
    cond = Conditions(None, req.temp_min_k, req.temp_max_k)
    desc = f"matdb optimise: {mat.id} plate over a {spec.description}, grade {grade.grade}"
    return PlateDesign(mags, plate, cond, name=name or f"{mat.id}-{grade.grade}-sized",
                       description=desc)


def side_spare_ok(result: dict, side: float, spare: float = SIDE_SPARE, design=None) -> bool:
    """Is ``side`` inside a stable side interval with ``spare`` to spare at both ends?

    Uses ``stable_side_intervals_m`` when the result has it; otherwise (older results)
    checks the design directly: floating and laterally stable at the side grown and shrunk
    by ``spare`` (with the side itself stable, that puts it inside an interval with
    ``spare`` to spare, assuming the interval has no hole in between)."""
    iv = result.get("stable_side_intervals_m")
    if iv is not None:
        return any(lo * (1 + spare) <= side <= hi / (1 + spare) for lo, hi in iv)
    if design is None:
        mx = result.get("stable_plate_side_max_m")
        return mx is not None and side * (1 + spare) <= mx

    t = result["temperature_k"]
    arr = design.arrangement(t)
    geom = L.plate_geometry(design, arr)
    a, b = L.plate_chi_at(design, t)
    p = design.plate
    return all(P.is_stable_floating(arr.B, geom.with_side(sd), a, b, p.density_kg_m3, p.payload_kg,
                                    p.payload_height_m)
               for sd in (side * (1 + spare), side / (1 + spare)))


def check(z: Sizing, req: A.AdviceRequest, mat, grade, require_spare: bool = True) -> dict:
    """Re-check a sizing by the exact path of ``matdb levitate``; returns a row with
    ``advise``'s keys (and the varied sizes) whose ``reasons`` say what fails.

    ``require_spare=False`` (the catalogue start, judged as ``advise`` judges) turns a plate
    side without 10% to spare into a note instead of a reason."""
    design = design_of(z, req, mat, grade)
    res = L.levitate_plate(design)
    # worst-case margin at the required gap, as the advisor's exact rows define it
    t_hot = res["temp_hottest_k"]
    arr_w = design.arrangement(t_hot, worst=True)
    geom = L.plate_geometry(design, arr_w)
    cw = L.plate_chi_worst(design, *L.plate_chi_at(design, t_hot))
    g_req = res["required_gap_m"]
    lift_w = float(P.lift_force(arr_w.B, geom, [g_req], *cw)[0])
    weight = res["weight_n"]
    margin = lift_w / weight if weight > 0 else math.inf
    model = _Model(req, mat, grade)
    cost = model.cost(z)
    spec = z.spec()
    reasons = []
    gw = res.get("gap_worst_m")
    if not (margin >= 1.0) or gw is None or gw < req.min_gap_m * (1 - 1e-9):
        reasons.append(f"in the worst case it does not float at {g_req * 1e3:.3g} mm "
                       f"(margin {margin:.3g})")
    if not res["laterally_stable"]:
        reasons.append("not laterally, tilt- and coupled-stable")
    spare_note = None
    if res["laterally_stable"] and not side_spare_ok(res, z.side, design=design):
        spare_note = (f"the plate side {z.side * 1e3:.3g} mm is not inside a stable side interval "
                      f"with {SIDE_SPARE:.0%} to spare")
        if require_spare:
            reasons.append(spare_note)
    if res["demag_risk"]:
        reasons.append("irreversible loss of magnetisation at the coldest or hottest temperature")
    if grade.max_temp_c is not None and kelvin_to_celsius(req.temp_max_k) > grade.max_temp_c + 1e-9:
        reasons.append(f"{grade.grade} is rated to {grade.max_temp_c:g} C")
    if req.budget_usd is not None and not (cost <= req.budget_usd * (1 + 1e-9)):
        reasons.append(f"cost {cost:.2f} USD is over the budget of {req.budget_usd:.2f} USD"
                       if math.isfinite(cost) else "no price in the database; the budget cannot be checked")
    if req.envelope_m is not None and any(e > 1e-9 for e in spec.envelope_excess(req.envelope_m)):
        reasons.append(A.envelope_reason(spec, req.envelope_m))
    payload = float(req.payload_for(res["plate_mass_kg"]))
    if payload < -1e-12:
        reasons.append("the plate alone is heavier than the total mass")
    w, ln = spec.extent
    row: dict[str, Any] = {
        "rank": 0, "material": mat.id, "grade": grade.grade, "family": grade.family,
        "arrangement": spec.description, "pattern": spec.pattern, "shape": spec.shape,
        "size_m": [float(v) for v in spec.size], "rows": spec.rows, "cols": spec.cols,
        "feasible": not reasons, "lift_per_area_n_m2": lift_w / (z.side * z.side),
        "gap_m": res["gap_m"], "gap_worst_m": gw, "margin": margin,
        "margin_nominal": res.get("margin"), "laterally_stable": bool(res["laterally_stable"]),
        "derating_pct": float(lift_derating_pct(grade.alpha_br_pct_per_k, req.temp_max_k,
                                                mat.temp_coeff_per_k)),
        "cost_usd": cost, "score": float(A.score_values([margin], [cost], [res["lift_derating_pct"]],
                                                          req.weights)[0]),
        "pareto": False, "reasons": reasons, "notes": [],
        "thickness_m": z.thickness, "lift_per_area_nominal_n_m2": res["lift_at_required_gap_n"] / (z.side ** 2),
        "max_payload_worst_kg": res["max_payload_worst_kg"], "k_z_n_m": res["k_z_n_m"],
        "f_z_hz": res["f_z_hz"], "k_x_n_m": res["k_x_n_m"], "k_y_n_m": res["k_y_n_m"],
        "k_tilt_n_m_per_rad": res["k_tilt_n_m_per_rad"], "demag_risk": bool(res["demag_risk"]),
        "demag_ratio": None, "plate_mass_kg": res["plate_mass_kg"],
        "magnet_mass_kg": res["magnet_mass_kg"],
        "price_illustrative": bool(grade.price_illustrative or mat.price_illustrative),
        "stable_plate_side_max_m": res.get("stable_plate_side_max_m"), "exact": True,
        "tilt_checked": True, "payload_kg": max(payload, 0.0), "plate_m": [z.side, z.side],
        "array_w_m": w, "array_l_m": ln, "array_h_m": spec.height, "magnet_count": spec.count,
        # the varied sizes
        "magnet_size_m": [float(v) for v in spec.size], "spacing_m": z.spacing,
        "plate_side_m": z.side, "sizing": z, "levitate": res,
    }
    if "stable_side_intervals_m" in res:
        row["stable_side_intervals_m"] = res["stable_side_intervals_m"]
    if row["price_illustrative"]:
        row["notes"].append("prices are illustrative")
    if spare_note and not require_spare:
        row["notes"].append(spare_note)
    return row


# ---------------------------------------------------------------------------
# the search
# ---------------------------------------------------------------------------
def _objective_of(row: dict, objective: str) -> float:
    if objective == "margin":
        return float(row["margin"])
    c = row["cost_usd"]
    return -float(c) if c is not None and math.isfinite(c) else -math.inf


def _catalogue_start(req: A.AdviceRequest, objective: str, min_margin: float, url=None,
                     progress: ProgressFn | None = None):
    """The best feasible catalogue candidate, re-checked exactly; (row, base, mat, grade, start_row)."""
    cat = A.build_catalogue(req, url=url)
    if req.envelope_m is not None:  # arrays outside the envelope cannot be the start
        inside = [s for s in cat.specs
                  if not any(e > 1e-9 for e in s.envelope_excess(req.envelope_m))]
        cat = A.Catalogue(cat.mats, cat.grades, inside or cat.specs, cat.thick, cat.thick_owner)
    cb = (lambda f, t: progress(0.12 * f, f"catalogue: {t}")) if progress else None
    with A.reporting_progress(cb):
        # no exact row here: the start is re-checked below by the same exact path (check)
        df, cat = A.rank(req, polish=0, catalogue=cat, url=url, tilt_rows=40)
    feas = df[df["feasible"]]
    if objective == "cost":
        feas = feas[feas["margin"] >= min_margin]
    order = (feas.sort_values("margin", ascending=False) if objective == "margin"
             else feas.sort_values("cost_usd", ascending=True))
    if progress:
        progress(0.15, "catalogue ranked")
    for _, r in order.head(4).iterrows():  # the first that passes the exact check
        spec = cat.specs[int(r["spec_index"])]
        mat = cat.mats[int(r["mat_index"])]
        grade = cat.grades[int(r["grade_index"])]
        side = min(float(r["plate_x_m"]) if "plate_x_m" in r else req.plate_m[0],
                   float(r["plate_y_m"]) if "plate_y_m" in r else req.plate_m[1])
        z = Sizing(spec.shape, tuple(spec.size), spec.pattern, spec.rows, spec.cols, spec.spacing,
                   side, float(r["thickness_m"]))
        row = check(z, req, mat, grade, require_spare=False)
        row["catalogue"] = True
        if row["feasible"]:
            return row, spec, mat, grade
    # no feasible catalogue candidate: take the choices of the best diamagnetic one by margin
    cand = df[df["diamagnetic"] & ~df["demag_risk"] & ~df["too_hot"]]
    if cand.empty:
        raise InputError("optimise: no catalogue candidate to start from (no diamagnetic plate "
                         "material or magnet grade matches the restrictions)")
    r = cand.sort_values("margin", ascending=False).iloc[0]
    return None, cat.specs[int(r["spec_index"])], cat.mats[int(r["mat_index"])], \
        cat.grades[int(r["grade_index"])]


def optimise(req: A.AdviceRequest, *, objective: str = "margin", min_margin: float | None = None,
             stock: Sequence[StockItem] | None = None, top: int = 3, url=None,
             progress: ProgressFn | None = None) -> OptimiseResult:
    """Size a floating-plate design for a request (see the module docstring).

    Parameters
    ----------
    req : matdb.advisor.AdviceRequest
        What to float (:func:`matdb.advisor.parse_request`).
    objective : {"margin", "cost"}
        Largest worst-case margin within the budget, or the cheapest design reaching
        ``min_margin``.
    min_margin : float, optional
        Worst-case margin the ``"cost"`` objective must reach (default 1).
    stock : sequence of StockItem, optional
        Magnet sizes to choose from instead of continuous sizes.
    top : int
        Designs to return (each exactly checked and feasible); the catalogue start is
        among them when nothing beats it.
    progress : callable, optional
        ``progress(fraction_done, text)``.

    Returns
    -------
    OptimiseResult
        ``rows`` best first (dicts with the keys of ``matdb advise --format json`` rows
        plus ``magnet_size_m``, ``spacing_m``, ``plate_side_m``), the re-checked catalogue
        ``start`` and the ``improvement`` over it.
    """
    t0 = time.perf_counter()
    if objective not in OBJECTIVES:
        raise InputError(f"expected one of {', '.join(OBJECTIVES)}, got {objective!r}", field="objective")
    if objective == "cost":
        min_margin = 1.0 if min_margin is None else float(min_margin)
        if not (math.isfinite(min_margin) and min_margin > 0):
            raise InputError(f"expected a positive number, got {min_margin!r}", field="min_margin")
    else:
        min_margin = 1.0
    prog = progress or (lambda f, t: None)
    start, base, mat, grade = _catalogue_start(req, objective, min_margin, url, prog)
    model = _Model(req, mat, grade)
    fx, fy = req.footprint_m
    short = min(fx, fy)
    env = req.envelope_m or (1.5 * fx, 1.5 * fy, MAX_MAGNET_M)
    fixed = not (req.plate_options or req.plate_m == req.footprint_m)
    sides: list = [(min(req.plate_m), None)] if fixed else [(None, r) for r in SIDE_RATIOS]
    items: list[StockItem | None] = list(stock) if stock else [None]
    if stock and base.shape not in {s.shape for s in stock}:
        base = replace(base, shape=stock[0].shape)
    min_face = MIN_MAGNET_M
    cases: list[_Case] = []
    counts = range(1 if base.pattern == "stripes" else 2, MAX_COUNT + 1)
    for r in counts:
        for c in counts:
            if abs(r - c) > 1 and base.pattern != "stripes":
                continue
            if c * min_face > env[0] or r * min_face > env[1]:
                continue
            for side, ratio in sides:
                for it in items:
                    if it is not None and it.shape != base.shape:
                        continue
                    cases.append(_Case(r, c, side, ratio, it))
    start_case = None
    if start is not None and not stock:  # the start itself is one of the cases, from its own point
        sz = start["sizing"]
        ratio0 = sz.side / min(sz.spec().extent)
        start_case = _Case(sz.rows, sz.cols, sz.side if fixed else None, None if fixed else ratio0)
        cases.append(start_case)
    # outer loop: every case valued at its start point (penalised for broken constraints)
    probs = []
    for k, cse in enumerate(cases):
        prob = _Problem(model, base, cse, objective, min_margin, env, short)
        if prob.hi.size and (prob.hi < prob.lo).any():
            continue
        x0 = _start_point(prob)
        if cse is start_case:
            sz = start["sizing"]
            vals = {"face": sz.size[0], "height": sz.size[-1], "spacing": sz.spacing,
                    "thickness": sz.thickness}
            x0 = np.array([vals[n] * 1e3 for n in prob.names])
        cse.x0 = x0
        cse.value = prob.penalised(x0)
        probs.append(prob)
        prog(0.15 + 0.25 * (k + 1) / len(cases), f"outer loop {k + 1}/{len(cases)}")
    probs.sort(key=lambda p: -p.case.value)
    # continuous refinement of the most promising cases (at most two per plate-side ratio,
    # since stability decides among them), and always of the start's case
    chosen, seen_sides = [], {}
    for p in probs:
        if p.case is start_case:
            chosen.append(p)
    for p in probs:
        if len(chosen) >= REFINE_CASES:
            break
        key = (p.case.ratio, None if p.case.side is None else round(p.case.side * 1e6))
        if seen_sides.get(key, 0) >= 2 or p in chosen:
            continue
        seen_sides[key] = seen_sides.get(key, 0) + 1
        chosen.append(p)
    for k, p in enumerate(chosen):
        p.case.best, p.case.best_value = _refine(p)
        prog(0.4 + 0.35 * (k + 1) / len(chosen), f"refined {k + 1}/{len(chosen)}")
    cand = [(p.case.best_value, p.case.best) for p in chosen if p.case.best is not None
            and math.isfinite(p.case.best_value)]
    # the other cases enter at their start point
    cand += [(p.case.value, p.sizing(p.case.x0)) for p in probs if p not in chosen
             and math.isfinite(p.case.value) and (p.constraints(p.case.x0) >= -1e-9).all()]
    cand.sort(key=lambda t: -t[0])
    # a stability pre-screen down the list, then the exact check of those that pass
    rows, checks, screens, seen = [], 0, 0, set()
    s_val = _objective_of(start, objective) if start is not None else -math.inf
    for val, z in cand:
        if len(rows) >= top or screens >= MAX_SCREENS:
            break
        key = (z.rows, z.cols, round(z.side * 1e5))
        if key in seen or val <= s_val * (1 + 1e-6 if s_val > 0 else 1 - 1e-6):
            continue  # one design per case; nothing that cannot beat the start
        screens += 1
        ok = model.stable_with_spare(z)
        prog(0.75 + 0.2 * min(screens / MAX_SCREENS, 1.0), f"stability screen {screens}")
        if not ok:
            continue
        seen.add(key)
        checks += 1
        row = check(z, req, mat, grade)
        if row["feasible"] and (objective != "cost" or row["margin"] >= min_margin):
            row["catalogue"] = False
            rows.append(row)
    notes = []
    if start is not None:
        rows.append(start)
    else:
        notes.append("no catalogue candidate is feasible for this request; nothing to compare with")
    rows.sort(key=lambda r: -_objective_of(r, objective))
    rows = rows[:max(top, 1)]
    for i, r in enumerate(rows, start=1):
        r["rank"] = i
    improvement = None
    if start is not None and rows:
        b, s0 = rows[0], start
        if objective == "margin":
            improvement = float(b["margin"] / s0["margin"] - 1.0)
        else:
            improvement = float(1.0 - b["cost_usd"] / s0["cost_usd"]) if s0["cost_usd"] else None
    if not rows:
        notes.append("no sized design passed the exact check")
    prog(1.0, "done")
    return OptimiseResult(rows, start, improvement, objective, req, model.evaluations, checks,
                          time.perf_counter() - t0, notes)


VARIED_KEYS = ("magnet_size_m", "spacing_m", "plate_side_m", "plate_m", "thickness_m", "rows", "cols")


def records(result: OptimiseResult) -> list[dict]:
    """Rows as JSON objects: the keys of ``matdb advise --format json`` plus the varied
    sizes (``magnet_size_m``, ``spacing_m``, ``plate_side_m``), ``catalogue`` (the start)
    and ``improvement`` (the best's over the start, on the first row)."""
    clean = []
    for r in result.rows:
        d = {k: v for k, v in r.items() if k not in ("sizing", "levitate")}
        clean.append(d)
    if not clean:
        return []
    df = pd.DataFrame(clean)
    out = A.records(df)
    for o, r in zip(out, clean):
        o["magnet_size_m"] = list(r["magnet_size_m"])
        o["spacing_m"] = float(r["spacing_m"])
        o["plate_side_m"] = float(r["plate_side_m"])
        o["catalogue"] = bool(r.get("catalogue", False))
        if "stable_side_intervals_m" in r:
            o["stable_side_intervals_m"] = r["stable_side_intervals_m"]
    out[0]["improvement"] = result.improvement
    return out


def save(result: OptimiseResult, path, index: int = 0) -> Path:
    """Write design ``index`` (default the best) as a design file ``matdb levitate`` reads."""
    if not result.rows:
        raise InputError("no design to save", field="save")
    r = result.rows[index]
    mat = catalog.get_material(r["material"])
    grade = catalog.get_grade(r["grade"])
    return write_design(design_of(r["sizing"], result.request, mat, grade), path)
