"""Lookups over the database: the value in use for each material and grade, as plain
dataclasses of SI floats (for the physics) or pandas DataFrames (for tables and the page).

Reads go through :func:`matdb.data.db.reading` (SQLAlchemy Core on the tables as the
database has them; rows read as attributes), so a lookup or a listing imports neither the
ORM models nor Alembic when the database is ready (start-up of the command line).

The value in use is the *preferred* value: the one set with ``matdb prefer``; else the
newest measured value (by measurement date, then entry time); else the published value
(standard, then handbook, then estimate). Retracted values are never used.
"""

from __future__ import annotations

import datetime as _dt
import difflib
import re
from dataclasses import asdict, dataclass
from typing import TYPE_CHECKING, Iterable, Optional

if TYPE_CHECKING:
    import pandas as pd

from sqlalchemy import select

from matdb.constants import kelvin_to_celsius
from matdb.data.db import Reader, get_engine, reading
from matdb.data.vocab import FAMILIES, PROVENANCE_STATUSES
from matdb.errors import InputError, NotFoundError

_QUALITY_RANK = {"standard": 0, "handbook": 1, "estimate": 2, "measured": 3}
_MAGNET_FIELDS = (
    "br_t", "br_min_t", "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3", "alpha_br_pct_per_k",
    "beta_hcj_pct_per_k", "max_temp_c", "mu_rec", "density_kg_m3",
)


@dataclass(frozen=True)
class MaterialProps:
    id: str
    name: str
    kind: str
    density_kg_m3: float
    chi_si: float
    chi_perp_si: Optional[float]
    chi_par_si: Optional[float]
    uncertainty_si: Optional[float]
    temp_coeff_per_k: Optional[float]
    temperature_k: Optional[float]
    value_kind: str
    value_id: int
    source_key: str
    source: str
    anisotropic: bool
    molar_mass_kg_mol: Optional[float]
    price_usd_per_kg: Optional[float]
    price_illustrative: bool

    @property
    def chi_vertical(self) -> float:
        """chi seen by a vertical field in a plate with its c axis vertical."""
        return self.chi_perp_si if self.chi_perp_si is not None else self.chi_si

    @property
    def chi_horizontal(self) -> float:
        """chi seen by an in-plane field."""
        return self.chi_par_si if self.chi_par_si is not None else self.chi_si

    @property
    def abs_chi_per_density(self) -> float:
        return abs(self.chi_si) / self.density_kg_m3


@dataclass(frozen=True)
class GradeProps:
    grade: str
    family: str
    br_t: float
    br_min_t: Optional[float]
    hcb_ka_m: Optional[float]
    hcj_ka_m: float
    bhmax_kj_m3: Optional[float]
    alpha_br_pct_per_k: float
    beta_hcj_pct_per_k: Optional[float]
    max_temp_c: float
    mu_rec: Optional[float]
    density_kg_m3: float
    price_usd_per_kg: Optional[float]
    price_illustrative: bool
    value_kind: str
    value_id: int
    source_key: str
    source: str


def check_family(name, field: str = "family") -> str:
    """The family name as matdb spells it (any case accepted); an unknown one is refused.

    Every command and page that takes a magnet family goes through here, so each refuses
    the same names with the same one line listing the families.
    """
    text = str(name if name is not None else "").strip()
    for f in FAMILIES:
        if f.lower() == text.lower():
            return f
    raise NotFoundError(f"unknown magnet family {text!r}; expected one of {', '.join(FAMILIES)}"
                        + did_you_mean(text, FAMILIES), field=field)


def did_you_mean(name: str, choices: Iterable[str]) -> str:
    """``"; did you mean a, b?"`` naming up to three close matches of ``name``, or ``""``."""
    near = difflib.get_close_matches(name, list(choices), n=3, cutoff=0.5)
    return f"; did you mean {', '.join(near)}?" if near else ""


def _sort_date(v) -> tuple:
    d = v.measured_on or (v.entered_at.date() if v.entered_at else _dt.date.min)
    return (d, v.entered_at or _dt.datetime.min, v.id or 0)


def choose_preferred(values: list, preferred_id: Optional[int]):
    """The value in use among ``values`` (rows of one material or grade)."""
    live = [v for v in values if not v.retracted]
    if not live:
        return None
    if preferred_id is not None:
        for v in live:
            if v.id == preferred_id:
                return v
    measured = [v for v in live if v.quality == "measured"]
    if measured:
        return max(measured, key=_sort_date)
    return min(live, key=lambda v: (_QUALITY_RANK.get(v.quality, 9), v.id or 0))


def _sources(r: Reader) -> dict:
    return {src.key: src for src in r.rows("source")}


def _material_props(m, values: list, sources) -> MaterialProps:
    v = choose_preferred(values, m.preferred_value_id)
    if v is None:
        raise NotFoundError(f"material {m.id}: every value is retracted")
    src = sources.get(v.source_key)
    citation = src.citation if src else v.source_key
    if v.quality == "measured" and v.source_note:
        citation = v.source_note
    return MaterialProps(
        id=m.id, name=m.name, kind=m.kind,
        density_kg_m3=v.density_kg_m3 or m.density_kg_m3,
        chi_si=v.chi_si, chi_perp_si=v.chi_perp_si, chi_par_si=v.chi_par_si,
        uncertainty_si=v.uncertainty_si, temp_coeff_per_k=v.temp_coeff_per_k,
        temperature_k=v.temperature_k, value_kind=v.quality, value_id=v.id,
        source_key=v.source_key, source=citation, anisotropic=m.anisotropic,
        molar_mass_kg_mol=m.molar_mass_kg_mol, price_usd_per_kg=m.price_usd_per_kg,
        price_illustrative=m.price_illustrative,
    )


def _grade_props(g, values: list, sources) -> GradeProps:
    v = choose_preferred(values, g.preferred_value_id)
    if v is None:
        raise NotFoundError(f"grade {g.grade}: every value is retracted")
    published = choose_preferred([x for x in values if x.quality != "measured"], None)
    merged = {}
    for f in _MAGNET_FIELDS:
        val = getattr(v, f)
        if val is None and published is not None:
            val = getattr(published, f)
        merged[f] = val
    if v.quality == "measured" and published is not None and v.br_t is not None and v.br_min_t is None:
        merged["br_min_t"] = v.br_t  # a measured magnet is its own minimum
    src = sources.get(v.source_key)
    citation = src.citation if src else v.source_key
    if v.quality == "measured" and v.source_note:
        citation = v.source_note
    return GradeProps(
        grade=g.grade, family=g.family, price_usd_per_kg=g.price_usd_per_kg,
        price_illustrative=g.price_illustrative, value_kind=v.quality, value_id=v.id,
        source_key=v.source_key, source=citation, **merged,
    )


def _values_by(r: Reader, table: str, key_attr: str) -> dict[str, list]:
    out: dict[str, list] = {}
    for v in r.rows(table):
        out.setdefault(getattr(v, key_attr), []).append(v)
    return out


def list_materials(url: str | None = None) -> list[MaterialProps]:
    with reading(url) as r:
        sources = _sources(r)
        values = _values_by(r, "susceptibilityvalue", "material_id")
        mats = r.rows("material", order_by=[lambda t: t.c.id])
        return [_material_props(m, values.get(m.id, []), sources) for m in mats if values.get(m.id)]


def list_grades(url: str | None = None) -> list[GradeProps]:
    with reading(url) as r:
        sources = _sources(r)
        values = _values_by(r, "magnetvalue", "grade")
        grades = r.rows("magnetgrade")
        out = [_grade_props(g, values.get(g.grade, []), sources) for g in grades if values.get(g.grade)]
    return sorted(out, key=grade_sort_key)


_FAMILY_ORDER = {"NdFeB": 0, "SmCo": 1, "ferrite": 2, "AlNiCo": 3, "bonded-NdFeB": 4}
_SUFFIX_ORDER = {"": 0, "M": 1, "H": 2, "SH": 3, "UH": 4, "EH": 5, "AH": 6}


def grade_sort_key(g) -> tuple:
    """Family, then the usual temperature-suffix order (N, M, H, SH, UH, EH, AH), then Br."""
    m = re.match(r"^N(\d+)([A-Z]*)$", g.grade)
    suffix = _SUFFIX_ORDER.get(m.group(2), 9) if m else 0
    return (_FAMILY_ORDER.get(g.family, 9), suffix, g.br_t, g.grade)


def _material_row(r: Reader, material_id: str):
    m = r.first("material", lambda t: t.c.id == material_id)
    if m is None:
        ids = [x.id for x in r.rows("material")]
        raise NotFoundError(f"unknown id {material_id!r}{did_you_mean(material_id, ids)}", field="material")
    return m


def _grade_row(r: Reader, grade: str):
    g = r.first("magnetgrade", lambda t: t.c.grade == grade)
    if g is None:
        # grades are case-sensitive in the trade (N42SH); accept any case when unique
        rows = r.rows("magnetgrade")
        same = [x for x in rows if x.grade.lower() == grade.lower()]
        if len(same) != 1:
            raise NotFoundError(f"unknown magnet grade {grade!r}{did_you_mean(grade, [x.grade for x in rows])}",
                                field="grade")
        g = same[0]
    return g


def get_material(material_id: str, url: str | None = None) -> MaterialProps:
    with reading(url) as r:
        m = _material_row(r, material_id)
        values = r.rows("susceptibilityvalue", lambda t: t.c.material_id == m.id)
        return _material_props(m, values, _sources(r))


def get_grade(grade: str, url: str | None = None) -> GradeProps:
    with reading(url) as r:
        g = _grade_row(r, grade)
        values = r.rows("magnetvalue", lambda t: t.c.grade == g.grade)
        return _grade_props(g, values, _sources(r))


def material_record(p: MaterialProps) -> dict:
    """The public JSON record of a material (contract keys first)."""
    return {
        "id": p.id,
        "name": p.name,
        "kind": p.kind,
        "chi_si": p.chi_si,
        "chi_perp_si": p.chi_perp_si,
        "chi_par_si": p.chi_par_si,
        "density_kg_m3": p.density_kg_m3,
        "abs_chi_per_density_m3_kg": abs(p.chi_si) / p.density_kg_m3,
        "uncertainty_si": p.uncertainty_si,
        "temp_coeff_per_k": p.temp_coeff_per_k,
        "source": p.source,
        "source_key": p.source_key,
        "value_kind": p.value_kind,
        "value_id": p.value_id,
        "price_usd_per_kg": p.price_usd_per_kg,
        "price_illustrative": p.price_illustrative,
    }


def grade_record(g: GradeProps) -> dict:
    d = asdict(g)
    first = ["grade", "family", "br_t", "br_min_t", "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3",
             "alpha_br_pct_per_k", "beta_hcj_pct_per_k", "max_temp_c", "density_kg_m3", "source"]
    return {k: d[k] for k in first} | {k: v for k, v in d.items() if k not in first}


def _frame(rows, columns=None) -> "pd.DataFrame":
    """Rows as a DataFrame (for the page)."""
    import pandas as pd  # lazy: the CLI's table commands need no pandas (keeps start-up light)

    return pd.DataFrame(rows, columns=columns)


def magnets_df(url: str | None = None) -> "pd.DataFrame":
    return _frame([grade_record(g) for g in list_grades(url)])


def material_values(material_id: str, url: str | None = None) -> list[dict]:
    """Every susceptibility row of a material with its provenance (for show/history)."""
    with reading(url) as r:
        m = _material_row(r, material_id)
        values = r.rows("susceptibilityvalue", lambda t: t.c.material_id == m.id, order_by=[lambda t: t.c.id])
        pref = choose_preferred(values, m.preferred_value_id)
        sources = _sources(r)
        prov = _prov_by_row(r, "chi")
        rows = []
        for v in values:
            src = sources.get(v.source_key)
            rows.append({
                "value_id": v.id, "value_kind": v.quality, "chi_si": v.chi_si,
                "chi_perp_si": v.chi_perp_si, "chi_par_si": v.chi_par_si,
                "value_published": v.value_published, "value_par_published": v.value_par_published,
                "convention": v.convention,
                "temperature_c": None if v.temperature_k is None else round(kelvin_to_celsius(v.temperature_k), 6),
                "uncertainty": v.uncertainty_si, "temp_coeff_per_k": v.temp_coeff_per_k,
                "density_kg_m3": v.density_kg_m3,
                "source": (v.source_note or (src.citation if src else v.source_key)),
                "source_key": v.source_key, "measured_by": v.measured_by,
                "date": v.measured_on.isoformat() if v.measured_on else None,
                "method": v.method, "note": v.note,
                "entered_at": v.entered_at.isoformat(timespec="seconds") if v.entered_at else None,
                "preferred": pref is not None and v.id == pref.id,
                "retracted": v.retracted, "retract_reason": v.retract_reason,
                "provenance": _row_provenance(
                    v, prov, sources, ("value_published", "value_par_published", "temperature_k",
                                       "uncertainty_si", "temp_coeff_per_k", "density_kg_m3")),
            })
        return rows


def grade_values(grade: str, url: str | None = None) -> list[dict]:
    g = get_grade(grade, url)  # unknown grade, or every value retracted: one line
    with reading(url) as r:
        grade_row = _grade_row(r, g.grade)
        values = r.rows("magnetvalue", lambda t: t.c.grade == grade_row.grade, order_by=[lambda t: t.c.id])
        pref = choose_preferred(values, grade_row.preferred_value_id)
        sources = _sources(r)
        prov = _prov_by_row(r, "magnet")
        rows = []
        for v in values:
            src = sources.get(v.source_key)
            d = {"value_id": v.id, "value_kind": v.quality}
            d.update({f: getattr(v, f) for f in _MAGNET_FIELDS})
            d.update({
                "source": v.source_note or (src.citation if src else v.source_key),
                "source_key": v.source_key, "measured_by": v.measured_by,
                "date": v.measured_on.isoformat() if v.measured_on else None,
                "method": v.method, "note": v.note,
                "preferred": pref is not None and v.id == pref.id,
                "retracted": v.retracted, "retract_reason": v.retract_reason,
                "provenance": _row_provenance(v, prov, sources, _MAGNET_FIELDS),
            })
            rows.append(d)
        return rows


# ---------------------------------------------------------------------------
# provenance: which published table each stored number was checked against
# ---------------------------------------------------------------------------
#: Text marks printed beside a value (tables and the page): never colour alone.
STATUS_MARKS = {"verified": "v", "corrected": "c", "unverified": "?", "measured": "m"}
STATUS_LEGEND = ("v = verified against the cited table, c = corrected from it, "
                 "? = unverified (no reachable source; see matdb show ID), m = lab measurement")

#: What each grade column means (grade tables mix nominal and minimum values).
GRADE_COLUMN_MEANING = {
    "br_t": "Br nominal: mid-point of the grade's published Br range (typical magnets)",
    "br_min_t": "Br minimum: lower end of the published range (what a purchase guarantees)",
    "hcb_ka_m": "Hcb minimum as published",
    "hcj_ka_m": "Hcj minimum as published (the coercivity class of the suffix)",
    "bhmax_kj_m3": "BHmax nominal: mid-point of the published range",
    "alpha_br_pct_per_k": "reversible temperature coefficient of Br, typical, %/K",
    "beta_hcj_pct_per_k": "temperature coefficient of Hcj, typical, %/K",
    "max_temp_c": "maximum working temperature as published (assumes a working point near "
                  "Pc 1-2; a thin magnet in an open circuit may lose flux below it)",
    "mu_rec": "recoil (relative) permeability, typical",
    "density_kg_m3": "density, typical",
}

_CHI_FIELD_OF_COLUMN = {"chi_si": "value_published", "chi_perp_si": "value_published",
                        "chi_par_si": "value_par_published", "temp_coeff_per_k": "temp_coeff_per_k",
                        "uncertainty_si": "uncertainty_published", "uncertainty": "uncertainty_published"}


def _prov_dict(p, sources: dict) -> dict:
    src = sources.get(p.source_key) if p.source_key else None
    return {"field": p.field, "status": p.status, "locator": p.locator, "source_key": p.source_key,
            "source": src.citation if src else None, "sources_tried": p.sources_tried, "note": p.note}


def _prov_by_row(r: Reader, value_kind: str) -> dict:
    """value_row_id (or owner id for materials and properties) -> [valueprovenance rows]."""
    out: dict = {}
    for p in r.rows("valueprovenance", lambda t: t.c.value_kind == value_kind):
        key = p.value_row_id if value_kind in ("chi", "magnet") else p.owner_id
        out.setdefault(key, []).append(p)
    return out


def _measured_provenance(v, fields: Iterable[str]) -> list[dict]:
    """A lab row is primary data: nothing published to compare it with."""
    where = v.source_note or v.method or "lab record"
    return [{"field": f, "status": "unverified", "locator": where, "source_key": v.source_key,
             "source": v.source_note or None, "sources_tried": "",
             "note": "lab measurement (primary data, not compared with a published table)"}
            for f in fields if getattr(v, f, None) is not None]


def _row_provenance(v, prov: dict, sources: dict, fields: Iterable[str]) -> list[dict]:
    if v.quality == "measured":
        return _measured_provenance(v, fields)
    return [_prov_dict(p, sources) for p in prov.get(v.id, [])]


def material_provenance(material_id: str, url: str | None = None) -> list[dict]:
    """Provenance of the material row's own numbers (density, molar mass)."""
    with reading(url) as r:
        prov = _prov_by_row(r, "material")
        return [_prov_dict(p, _sources(r)) for p in prov.get(material_id, [])]


def status_marks(url: str | None = None) -> dict[str, dict[str, dict[str, str]]]:
    """Status of each number in use: ``{"material": {id: {column: status}}, "magnet": {...}}``.

    Columns are those of :func:`material_record` / :func:`grade_record`; a number taken from
    a lab row is ``measured``.
    """
    out: dict[str, dict[str, dict[str, str]]] = {"material": {}, "magnet": {}}
    with reading(url) as r:
        chi_prov, mag_prov, mat_prov = _prov_by_row(r, "chi"), _prov_by_row(r, "magnet"), _prov_by_row(r, "material")
        chi_values = _values_by(r, "susceptibilityvalue", "material_id")
        mag_values = _values_by(r, "magnetvalue", "grade")
        for m in r.rows("material"):
            v = choose_preferred(chi_values.get(m.id, []), m.preferred_value_id)
            if v is None:
                continue
            by_field = {p.field: p.status for p in chi_prov.get(v.id, [])}
            marks = {}
            for col, f in _CHI_FIELD_OF_COLUMN.items():
                marks[col] = "measured" if v.quality == "measured" else by_field.get(f, "unverified")
            dens = {p.field: p.status for p in mat_prov.get(m.id, [])}
            marks["density_kg_m3"] = ("measured" if v.quality == "measured" and v.density_kg_m3
                                      else dens.get("density_kg_m3", "unverified"))
            out["material"][m.id] = marks
        for g in r.rows("magnetgrade"):
            vals = mag_values.get(g.grade, [])
            v = choose_preferred(vals, g.preferred_value_id)
            if v is None:
                continue
            published = choose_preferred([x for x in vals if x.quality != "measured"], None)
            pub = {p.field: p.status for p in mag_prov.get(published.id, [])} if published else {}
            own = {p.field: p.status for p in mag_prov.get(v.id, [])}
            marks = {}
            for f in _MAGNET_FIELDS:
                if v.quality == "measured" and getattr(v, f) is not None:
                    marks[f] = "measured"
                elif v.quality == "measured":
                    marks[f] = pub.get(f, "unverified")
                else:
                    marks[f] = own.get(f, "unverified")
            out["magnet"][g.grade] = marks
    return out


def mark(status: str | None) -> str:
    return STATUS_MARKS.get(status or "unverified", "?")


def list_properties(subject_id: str | None = None, url: str | None = None) -> list[dict]:
    """Further published properties (resistivity, thermal expansion, ...) with provenance."""
    with reading(url) as r:
        sources = _sources(r)
        prov = _prov_by_row(r, "property")
        rows = []
        for p in r.rows("propertyvalue", order_by=[lambda t: t.c.subject_kind, lambda t: t.c.subject_id,
                                                   lambda t: t.c.key]):
            if subject_id is not None and p.subject_id.lower() != subject_id.lower():
                continue
            pv = [_prov_dict(x, sources) for x in prov.get(p.key, [])]
            rows.append({
                "key": p.key, "subject_kind": p.subject_kind, "subject_id": p.subject_id,
                "property": p.property, "axis": p.axis, "value_si": p.value_si, "unit_si": p.unit_si,
                "value_published": p.value_published, "unit_published": p.unit_published,
                "temperature_c": None if p.temperature_k is None else round(kelvin_to_celsius(p.temperature_k), 6),
                "quality": p.quality, "source_key": p.source_key,
                "source": sources[p.source_key].citation if p.source_key in sources else p.source_key,
                "note": p.note, "status": pv[0]["status"] if pv else "unverified",
                "locator": pv[0]["locator"] if pv else "", "provenance": pv,
            })
        return rows


def sources_summary(status: str | None = None, url: str | None = None) -> list[dict]:
    """The bibliography with how many stored values each supports, by status.

    ``status`` (verified, corrected, unverified) keeps only sources with values of that status.
    """
    if status is not None and status not in PROVENANCE_STATUSES:
        raise InputError(f"expected one of {', '.join(PROVENANCE_STATUSES)}, got {status!r}", field="status")
    with reading(url) as r:
        counts: dict[str, dict[str, int]] = {}
        for p in r.rows("valueprovenance"):
            c = counts.setdefault(p.source_key or "", {k: 0 for k in PROVENANCE_STATUSES})
            c[p.status] += 1
        rows = []
        for src in r.rows("source", order_by=[lambda t: t.c.key]):
            c = counts.get(src.key, {k: 0 for k in PROVENANCE_STATUSES})
            if status is not None and c[status] == 0:
                continue
            rows.append({"key": src.key, "kind": src.kind, "year": src.year, "values": sum(c.values()),
                         **c, "citation": src.citation, "note": src.note})
        return rows


def provenance_totals(url: str | None = None) -> dict[str, int]:
    """How many stored published numbers have each status."""
    with reading(url) as r:
        out = {k: 0 for k in PROVENANCE_STATUSES}
        for p in r.rows("valueprovenance"):
            out[p.status] += 1
        return out
# electrical conductivities (eddy damping)
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class ConductivityProps:
    """Conductivity in use for a material [S/m]: in the plate plane and across it."""

    material_id: str
    sigma_in_plane_s_m: float
    sigma_across_s_m: float
    quality: str
    source_key: str
    source: str
    note: str
    value_id: int


def _ensure_conductivities(url: str | None) -> None:
    """A database made before conductivities existed gets them from the seed files
    (the seed write is idempotent and never touches measured rows)."""
    from matdb.data.seed import seed_database  # lazy: seeding needs the ORM models

    with reading(url) as r:
        if r.conn.execute(select(r.table("conductivityvalue").c.id).limit(1)).first() is not None:
            return
    seed_database(get_engine(url))


def get_conductivity(material_id: str, url: str | None = None) -> Optional[ConductivityProps]:
    """The conductivity in use for ``material_id``, or None when none is recorded.

    Measured rows win over published ones (newest first), then handbook/standard before
    estimate; retracted rows are never used.
    """
    _ensure_conductivities(url)
    with reading(url) as r:
        rows = [v for v in r.rows("conductivityvalue", lambda t: t.c.material_id == material_id)
                if not v.retracted]
        if not rows:
            return None
        rows.sort(key=lambda r: (_QUALITY_RANK.get(r.quality, 2), -(r.id or 0)))
        measured = [r for r in rows if r.quality == "measured"]
        v = measured[0] if measured else rows[0]
        src = _sources(r).get(v.source_key)
        return ConductivityProps(material_id, float(v.sigma_in_plane_s_m),
                                 float(v.sigma_across_s_m), v.quality, v.source_key,
                                 v.source_note or (src.citation if src else v.source_key),
                                 v.note, int(v.id))


def conductivities_df(url: str | None = None) -> "pd.DataFrame":
    """Every material's conductivity in use (materials without one are left out)."""
    rows = []
    for m in list_materials(url):
        c = get_conductivity(m.id, url)
        if c is None:
            continue
        rows.append({"material": m.id, "name": m.name,
                     "sigma_in_plane_s_m": c.sigma_in_plane_s_m,
                     "sigma_across_s_m": c.sigma_across_s_m, "quality": c.quality,
                     "source_key": c.source_key, "source": c.source, "note": c.note})
    return _frame(rows, columns=["material", "name", "sigma_in_plane_s_m",
                                       "sigma_across_s_m", "quality", "source_key", "source",
                                       "note"])
