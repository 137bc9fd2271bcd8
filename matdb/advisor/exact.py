"""The exact rows: a candidate as a design file, worked out by ``matdb levitate``.

:func:`candidate_design` turns a ranked row into a :class:`matdb.design.PlateDesign`
(the file ``--save`` writes); :func:`exact_evaluation` runs
:func:`matdb.analysis.levitate.levitate_plate` on it -- the very computation of
``matdb levitate`` -- and maps its keys onto the ranking's columns. The worst-case
margin is the worst-case lift at the required gap over the weight.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

from matdb.advisor.candidates import ArrangementSpec, Catalogue, row_request
from matdb.advisor.request import AdviceRequest
from matdb.analysis.levitate import format_intervals, levitate_plate
from matdb.data import catalog
from matdb.design import Conditions, MagnetSpec, PlateDesign, PlateSpec, write_design


def _props(row: dict, cat: Catalogue | None):
    """(grade, material) records of a row: the catalogue's when given, else the database's."""
    if cat is not None and "grade_index" in row and "mat_index" in row:
        return cat.grades[int(row["grade_index"])], cat.mats[int(row["mat_index"])]
    return catalog.get_grade(row["grade"]), catalog.get_material(row["material"])


def candidate_design(row: dict, req: AdviceRequest, cat: Catalogue | None = None,
                     name: str | None = None) -> PlateDesign:
    """A :class:`matdb.design.PlateDesign` of one candidate row (for ``--save``)."""
    grade, mat = _props(row, cat)
    if cat is not None and "spec_index" in row:
        spec = cat.specs[int(row["spec_index"])]
    else:
        spec = ArrangementSpec(row["shape"], tuple(row["size_m"]), row["pattern"], int(row["rows"]),
                               int(row["cols"]))
    mags = MagnetSpec(spec.shape, tuple(spec.size), grade.grade, None, spec.pattern, spec.rows,
                      spec.cols, spec.spacing, spec.back_plate, 0.0, (), {grade.grade: grade})
    req = row_request(row, req)
    lx, ly = req.plate_m
    t = float(row["thickness_m"])
    payload = row.get("payload_kg")
    if payload is None or not math.isfinite(float(payload)):
        payload = max(float(req.payload_for(mat.density_kg_m3 * lx * ly * t)), 0.0)
    plate = PlateSpec(mat.id, "rectangle", (lx, ly, t), None, None, None,
                      float(payload), req.payload_height_m, req.min_gap_m, (0.0, 0.0), mat)
    cond = Conditions(None, req.temp_min_k, req.temp_max_k)
    desc = f"matdb advise: {mat.id} plate over a {spec.description}, grade {grade.grade}"
    return PlateDesign(mags, plate, cond, name=name or f"{mat.id}-{grade.grade}", description=desc)


def save_design(row: dict, req: AdviceRequest, path, cat: Catalogue | None = None) -> Path:
    """Write one candidate as a design file ``matdb levitate`` reads."""
    return write_design(candidate_design(row, req, cat), path)


def _num(v) -> float:
    return math.nan if v is None else float(v)


def exact_evaluation(row: dict, req: AdviceRequest, cat: Catalogue) -> dict[str, Any]:
    """Work one candidate out with :func:`matdb.analysis.levitate.levitate_plate` on its
    design (:func:`candidate_design`); returns the updated row values.

    The row's ``margin`` is the worst-case lift at the required gap (minimum-spec Br,
    ``|chi|`` minus its uncertainty, hottest temperature) over the weight;
    ``margin_nominal`` the nominal one; gaps, stiffnesses, stability, irreversible-loss
    risk and the largest worst-case payload are levitate's own figures.
    """
    grade, mat = _props(row, cat)
    out: dict[str, Any] = {"exact": True, "tilt_checked": True}
    if not (mat.chi_vertical < 0 and mat.chi_horizontal < 0):
        return out
    design = candidate_design(row, req, cat)
    lev = levitate_plate(design)
    weight = lev["weight_n"]
    area = design.plate.lx_m * design.plate.ly_m
    lift_w = float(lev["lift_worst_at_required_gap_n"])
    k_pitch, k_roll = lev.get("k_pitch_n_m_per_rad"), lev.get("k_roll_n_m_per_rad")
    out.update({
        "gap_m": _num(lev["gap_m"]), "gap_worst_m": _num(lev["gap_worst_m"]),
        "lift_nominal_n": float(lev["lift_at_required_gap_n"]),
        "margin_nominal": float(lev["margin"]) if lev["margin"] is not None else math.inf,
        "lift_worst_n": lift_w, "lift_per_area_n_m2": lift_w / area,
        "margin": lift_w / weight if weight > 0 else math.inf,
        "max_payload_worst_kg": float(lev["max_payload_worst_kg"]),
        "k_z_n_m": _num(lev["k_z_n_m"]), "f_z_hz": _num(lev["f_z_hz"]),
        "k_x_n_m": _num(lev["k_x_n_m"]), "k_y_n_m": _num(lev["k_y_n_m"]),
        "k_tilt_n_m_per_rad": _num(lev["k_tilt_n_m_per_rad"]),
        "laterally_stable": bool(lev["laterally_stable"]),
        "tilt_stable": bool(k_pitch is not None and k_roll is not None and k_pitch > 0 and k_roll > 0),
        "stable_plate_side_max_m": _num(lev["stable_plate_side_max_m"]),
        "demag_risk": bool(lev["demag_risk"]),
        "weight_n": float(weight),
    })
    if lev["gap_m"] is not None and not lev["laterally_stable"] and design.plate.lx_m == design.plate.ly_m:
        # where a square plate would be stable: levitate's intervals of sides judged at their
        # lateral equilibrium (the plate's own side is in none of them)
        out["stable_sides_text"] = "stable sides: " + format_intervals(lev["stable_side_intervals_m"])
    return out
