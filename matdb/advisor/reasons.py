"""Why a candidate is rejected, and what to know about it, in plain words.

:func:`reasons_for` turns a ranked row into sentences that say which requirement fails
and by how much (margin, temperature rating, irreversible loss, stability, mass,
envelope, budget); notes flag illustrative prices and screening values.
"""

from __future__ import annotations

import math

from matdb.advisor.candidates import ArrangementSpec, Catalogue
from matdb.advisor.request import AdviceRequest
from matdb.advisor.tables import SCREEN_HEIGHTS_M
from matdb.constants import kelvin_to_celsius


def _c(t_k: float) -> str:
    return f"{kelvin_to_celsius(t_k):.0f} C"


def _mm(v: float) -> str:
    return f"{v * 1e3:.3g} mm"


def envelope_reason(spec: ArrangementSpec, envelope_m) -> str:
    """'array W x L x H mm is outside the magnet envelope ... (by how much)'."""
    w, ln = spec.extent
    ex = spec.envelope_excess(envelope_m)
    by = [f"{e * 1e3:.3g} mm too {word}" for e, word in zip(ex, ("wide", "long", "tall")) if e > 1e-9]
    return (f"the array ({w * 1e3:.4g} x {ln * 1e3:.4g} x {spec.height * 1e3:.4g} mm) is outside the "
            f"magnet envelope {envelope_m[0] * 1e3:.4g} x {envelope_m[1] * 1e3:.4g} x "
            f"{envelope_m[2] * 1e3:.4g} mm: " + ", ".join(by))


def reasons_for(row: dict, req: AdviceRequest, cat: Catalogue) -> tuple[list[str], list[str]]:
    """(reasons it is rejected, notes) for one candidate row, in plain words."""
    mat = cat.mats[int(row["mat_index"])]
    grade = cat.grades[int(row["grade_index"])]
    spec = cat.specs[int(row["spec_index"])]
    reasons: list[str] = []
    notes: list[str] = []
    g_req = max(req.min_gap_m, 5e-5)
    if not row["diamagnetic"]:
        reasons.append(f"{mat.id} is paramagnetic (chi = {mat.chi_si:+.3g}): it is pulled towards "
                       "the magnets and cannot float")
    else:
        m = row["margin"]
        if not (m >= 1.0):
            if math.isfinite(m):
                mt = f"{m:.2f}" if abs(m) >= 0.01 else f"{m:.2g}"
                reasons.append(f"worst-case margin {mt}, needs 1.00: lift at {_mm(g_req)} is {mt}x the weight "
                               f"at {_c(req.temp_max_k)} in the worst case (minimum Br, low end of |chi|)")
            if not math.isfinite(row["gap_worst_m"]) and not math.isfinite(row["gap_m"]):
                reasons.append("it does not float at any gap with this payload")
        if row["too_hot"]:
            over = kelvin_to_celsius(req.temp_max_k) - grade.max_temp_c
            reasons.append(f"{grade.grade} is rated to {grade.max_temp_c:g} C; the range reaches "
                           f"{_c(req.temp_max_k)} ({over:.0f} K over)")
        if row["demag_risk"]:
            why = ""
            if grade.beta_hcj_pct_per_k is not None and grade.beta_hcj_pct_per_k > 0 and \
                    row["demag_temp_k"] == req.temp_min_k and req.temp_min_k < req.temp_max_k:
                why = f" ({grade.family} loses coercivity when cold)"
            elif row["demag_temp_k"] == req.temp_max_k and req.temp_min_k < req.temp_max_k:
                why = f" ({grade.family} loses coercivity when hot)"
            ratio = row["demag_ratio"]
            rtxt = f"{ratio:.2f}x" if math.isfinite(ratio) else "beyond"
            reasons.append(f"irreversible loss of magnetisation: the reverse field reaches {rtxt} "
                           f"the knee at {_c(row['demag_temp_k'])}{why}")
        if math.isfinite(row["gap_m"]) and not row["laterally_stable"]:
            sides = row.get("stable_sides_text")
            if isinstance(sides, str) and sides:
                reasons.append(f"the plate side {_mm(max(req.plate_m))} is in no stable interval "
                               f"of square sides over this arrangement ({sides})")
            kx, ky = row["k_x_n_m"], row["k_y_n_m"]
            if not (kx > 0 and ky > 0):
                reasons.append(f"laterally unstable: it slides off the magnets (k_x = {kx:.3g} N/m, "
                               f"k_y = {ky:.3g} N/m)")
            elif not row.get("tilt_stable", True):
                reasons.append(f"it tips over (tilt stiffness {row['k_tilt_n_m_per_rad']:.3g} N m/rad "
                               "not positive)")
            else:
                reasons.append("sliding and tilting together have no restoring force")
        if row.get("too_heavy"):
            pm = float(row["plate_mass_kg"])
            reasons.append(f"the plate alone weighs {pm * 1e3:.3g} g, {(pm - req.total_mass_kg) * 1e3:.2g} g "
                           f"more than the total mass of {req.total_mass_kg * 1e3:.3g} g")
        if row.get("outside_envelope"):
            reasons.append(envelope_reason(spec, req.envelope_m))
        if row["over_budget"]:
            c = row["cost_usd"]
            if math.isfinite(c):
                reasons.append(f"cost {c:.2f} USD is over the budget of {req.budget_usd:.2f} USD "
                               f"(by {c - req.budget_usd:.2f} USD)")
            else:
                reasons.append("no price in the database for "
                               + ("the plate material" if mat.price_usd_per_kg is None else "the magnets")
                               + "; the budget cannot be checked")
    if not row["feasible"] and not reasons:
        if not math.isfinite(row["gap_m"]):
            reasons.append(f"no equilibrium found between 0.05 mm and {SCREEN_HEIGHTS_M[-1] * 1e3:.0f} mm "
                           "in screening (see --exact)")
        else:
            reasons.append("not feasible after the exact check")
    if row["price_illustrative"]:
        notes.append("prices are illustrative")
    if not math.isfinite(row["cost_usd"]):
        notes.append("cost unknown (no price in the database)")
    if spec.pattern == "stripes" and row["feasible"]:
        notes.append("stripes restore almost nothing along the stripes (x)")
    if not row["exact"]:
        notes.append("screening values (gaps and stiffnesses interpolated)" if row.get("tilt_checked")
                     else "screening values (gaps and stiffnesses interpolated; tilt not checked)")
    return reasons, notes

