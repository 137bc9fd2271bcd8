"""Lab-measured values in the database: appending, preferring, retracting, history.

Measured values are *appended* beside the published ones (``quality="measured"``, source
key ``lab`` plus a free-text source note); published rows are never changed. Every write
is one transaction (:func:`matdb.data.db.session_scope`): a bad value raises before
anything is committed. What people type is parsed by :mod:`matdb.data.lab_input`;
values derived through the physics (a float gap, a surface field) by
:mod:`matdb.analysis.inversions`; files in and out by :mod:`matdb.data.exchange`.
"""

from __future__ import annotations

import re
from typing import Any, Optional

from sqlalchemy.dialects import postgresql, sqlite
from sqlmodel import Session, select

from matdb.data import catalog
from matdb.data.db import read_session, session_scope
from matdb.data.lab_input import (
    GRADE_RE,
    LAB_CITATION,
    LAB_SOURCE_KEY,
    MaterialFacts,
    build_chi_value,
    given,
    new_material,
    parse_alpha,
    parse_br,
    parse_date,
    parse_hcj,
    parse_max_temp_c,
    require_source,
    text_of,
)
from matdb.data.models import MagnetGrade, MagnetValue, Material, Source, SusceptibilityValue
from matdb.errors import InputError, NotFoundError
from matdb.units import parse_density

_INSERT = {"sqlite": sqlite.insert, "postgresql": postgresql.insert}


# ---------------------------------------------------------------------------
# database helpers (also used by the importer)
# ---------------------------------------------------------------------------
def ensure_source(s: Session, key: str, citation: str, kind: str, year=None, note: str = "") -> None:
    """Insert a Source row unless it exists (safe when several writers do it at once)."""
    if s.get(Source, key) is not None:
        return
    values = {"key": key, "citation": citation, "kind": kind, "year": year, "note": note}
    insert = _INSERT.get(s.get_bind().dialect.name)
    if insert is None:  # pragma: no cover - other back ends: plain insert
        s.add(Source(**values))
        s.flush()
        return
    s.exec(insert(Source.__table__).values(**values).on_conflict_do_nothing())


def ensure_lab_source(s: Session) -> None:
    """The ``lab`` source every measured value cites (created on first use)."""
    ensure_source(s, LAB_SOURCE_KEY, LAB_CITATION, "lab")


def find_grade(s: Session, grade: str) -> Optional[MagnetGrade]:
    """The grade row by exact name, else by a unique case-insensitive match, else None."""
    g = s.get(MagnetGrade, grade)
    if g is not None:
        return g
    same = [x for x in s.exec(select(MagnetGrade.grade)).all() if x.lower() == grade.lower()]
    if len(same) == 1:
        return s.get(MagnetGrade, same[0])
    return None


def resolve_material(s: Session, mid: str, f: dict, pending: Optional[dict[str, MaterialFacts]] = None
                     ) -> MaterialFacts:
    """The stored material ``mid``, one planned in ``pending``, or a new one from typed
    ``name`` and ``density`` (``f``)."""
    m = s.get(Material, mid)
    if m is not None:
        name = text_of(f.get("name"))
        if name and name.lower() != m.name.lower():
            raise InputError(f"material {mid} exists already as {m.name!r}; leave the name out to add a "
                             "value to it", field="name")
        return MaterialFacts.of(m)
    if pending is not None and mid in pending:
        return pending[mid]
    if not text_of(f.get("name")):
        ids = s.exec(select(Material.id)).all()
        raise NotFoundError(f"unknown id {mid!r}{catalog.did_you_mean(mid, ids)}; to create a new material "
                            "give name and density", field="material")
    return new_material(mid, f)


def _find_value_row(rows: list[dict], value_id: int) -> dict:
    for r in rows:
        if r["value_id"] == value_id:
            return r
    raise NotFoundError(f"value id {value_id} not found")  # pragma: no cover


# ---------------------------------------------------------------------------
# recording
# ---------------------------------------------------------------------------
def record_material_value(
    material_id: str,
    *,
    chi: Any = None,
    chi_perp: Any = None,
    chi_par: Any = None,
    density: Any = None,
    temperature: Any = None,
    uncertainty: Any = None,
    source: Any = None,
    measured_by: Any = None,
    date: Any = None,
    method: Any = None,
    molar_mass: Any = None,
    name: Any = None,
    allow_paramagnetic: bool = False,
    note: str = "",
    url: Optional[str] = None,
) -> dict:
    """Append a measured susceptibility of ``material_id`` (created when ``name`` is given).

    Returns the value's history row (``value_id``, ``chi_si``, ``preferred``...) plus
    ``material_id`` and ``created_material``.
    """
    mid = text_of(material_id).lower()
    if not mid:
        raise InputError("give a material id (see 'matdb materials')", field="material")
    f = {"chi": chi, "chi_perp": chi_perp, "chi_par": chi_par, "density": density,
         "temperature": temperature, "uncertainty": uncertainty, "source": source,
         "measured_by": measured_by, "date": date, "method": method, "molar_mass": molar_mass,
         "name": name, "allow_paramagnetic": allow_paramagnetic, "note": note}
    require_source(source, "source")
    with session_scope(url) as s:
        mat = resolve_material(s, mid, f)
        v = build_chi_value(mat, f)
        if mat.new:
            s.add(mat.to_row())
        ensure_lab_source(s)
        s.add(v)
        s.flush()
        vid = v.id
    row = _find_value_row(catalog.material_values(mid, url), vid)
    return {"material_id": mid, "created_material": mat.new, **row}


def record_magnet_value(
    grade: str,
    *,
    br: Any = None,
    hcj: Any = None,
    alpha: Any = None,
    max_temp: Any = None,
    density: Any = None,
    family: Any = None,
    source: Any = None,
    measured_by: Any = None,
    date: Any = None,
    method: Any = None,
    note: str = "",
    url: Optional[str] = None,
) -> dict:
    """Append a measured property set of a magnet grade (created when ``family`` is given)."""
    gid = text_of(grade)
    if not gid:
        raise InputError("give a magnet grade (see 'matdb magnets') or a new id with its family", field="grade")
    source_note = require_source(source, "source")
    vals = {
        "br_t": parse_br(br, "br") if given(br) else None,
        "hcj_ka_m": parse_hcj(hcj, "hcj") if given(hcj) else None,
        "alpha_br_pct_per_k": parse_alpha(alpha, "alpha") if given(alpha) else None,
        "max_temp_c": parse_max_temp_c(max_temp, "max_temp") if given(max_temp) else None,
        "density_kg_m3": parse_density(text_of(density), "density") if given(density) else None,
    }
    if all(v is None for v in vals.values()):
        raise InputError("give at least one measured property (br, surface_field, hcj, alpha)", field="br")
    d = parse_date(date, "date")
    with session_scope(url) as s:
        g = find_grade(s, gid)
        created = False
        if g is None:
            if not given(family):
                grades = s.exec(select(MagnetGrade.grade)).all()
                raise NotFoundError(f"unknown magnet grade {gid!r}{catalog.did_you_mean(gid, grades)}; "
                                    "to add a new one give its family", field="family")
            fam = catalog.check_family(text_of(family), "family")
            if not GRADE_RE.match(gid):
                raise InputError(f"a new id may hold letters, digits, '.', '-', '+', '_', got {gid!r}", field="grade")
            need = {"br": "br_t", "hcj": "hcj_ka_m", "alpha": "alpha_br_pct_per_k",
                    "max_temp": "max_temp_c", "density": "density_kg_m3"}
            missing = [flag for flag, k in need.items() if vals[k] is None]
            if missing:
                raise InputError(f"a new grade needs {', '.join(need)} (missing {', '.join(missing)})",
                                 field=missing[0])
            g = MagnetGrade(grade=gid, family=fam, origin="user", price_illustrative=True)
            s.add(g)
            created = True
        elif given(family) and catalog.check_family(text_of(family), "family") != g.family:
            raise InputError(f"grade {g.grade} exists already as {g.family}", field="family")
        ensure_lab_source(s)
        v = MagnetValue(grade=g.grade, quality="measured", source_key=LAB_SOURCE_KEY, source_note=source_note,
                        note=text_of(note), measured_by=text_of(measured_by) or None, measured_on=d,
                        method=text_of(method) or None, **vals)
        s.add(v)
        s.flush()
        vid, gname = v.id, g.grade
    rows = catalog.grade_values(gname, url)
    return {"grade": gname, "created_grade": created, **_find_value_row(rows, vid)}


# ---------------------------------------------------------------------------
# preferring, retracting, history
# ---------------------------------------------------------------------------
def _subject(s: Session, ident: str):
    """('material', Material) or ('magnet', MagnetGrade) for an id or a grade."""
    m = s.get(Material, ident) or s.get(Material, ident.lower())
    if m is not None:
        return "material", m
    g = find_grade(s, ident)
    if g is not None:
        return "magnet", g
    ids = list(s.exec(select(Material.id)).all()) + list(s.exec(select(MagnetGrade.grade)).all())
    raise NotFoundError(f"{ident!r} is neither a material id nor a magnet grade{catalog.did_you_mean(ident, ids)}", field="id")


def history(ident: str, url: Optional[str] = None) -> list[dict]:
    """Every value of a material or grade with provenance; ``preferred`` marks the one in use."""
    key = text_of(ident)
    with read_session(url) as s:
        kind, obj = _subject(s, key)
        name = obj.id if kind == "material" else obj.grade
        pinned = obj.preferred_value_id
    if kind == "material":
        rows = catalog.material_values(name, url)
    else:
        rows = catalog.grade_values(name, url)
    out = []
    for r in rows:
        d = {"value_id": r["value_id"], "value_kind": r["value_kind"], "chi_si": r.get("chi_si"),
             "source": r["source"], "measured_by": r["measured_by"], "date": r["date"], "method": r["method"],
             "uncertainty": r.get("uncertainty"), "preferred": r["preferred"], "retracted": r["retracted"]}
        d.update({k: v for k, v in r.items() if k not in d})
        d["subject"] = name
        d["subject_kind"] = kind
        d["preference_set"] = pinned is not None and pinned == r["value_id"]
        out.append(d)
    return out


def prefer(ident: str, value_id: Any, url: Optional[str] = None) -> dict:
    """Make ``value_id`` the value in use for a material or grade (handbook rows untouched)."""
    vid = _value_id(value_id)
    key = text_of(ident)
    with session_scope(url) as s:
        kind, obj = _subject(s, key)
        model = SusceptibilityValue if kind == "material" else MagnetValue
        v = s.get(model, vid)
        owner = getattr(v, "material_id" if kind == "material" else "grade", None) if v else None
        name = obj.id if kind == "material" else obj.grade
        if v is None or owner != name:
            ids = [x.id for x in s.exec(select(model).where(
                (model.material_id if kind == "material" else model.grade) == name)).all()]
            raise NotFoundError(f"{vid} is not a value of {name} (its values: "
                                f"{', '.join(map(str, ids))}; see 'matdb history {name}')", field="value_id")
        if v.retracted:
            raise InputError(f"value {vid} of {name} is retracted ({v.retract_reason}); it cannot be used", field="value_id")
        obj.preferred_value_id = vid
        s.add(obj)
    return _find_value_row(history(name, url), vid)


def _value_id(value_id: Any) -> int:
    s = text_of(value_id)
    if not re.fullmatch(r"\d+", s):
        raise InputError(f"expected a value id (a whole number shown by 'matdb history'), got {s!r}", field="value_id")
    return int(s)


def retract(value_id: Any, reason: Any, ident: Any = None, url: Optional[str] = None) -> dict:
    """Hide a wrong measured value from use; it stays in the history with the reason."""
    vid = _value_id(value_id)
    why = text_of(reason)
    if not why:
        raise InputError("required: say why the value is wrong", field="reason")
    with session_scope(url) as s:
        cands = []
        if given(ident):
            kind, obj = _subject(s, text_of(ident))
            model = SusceptibilityValue if kind == "material" else MagnetValue
            v = s.get(model, vid)
            owner_attr = "material_id" if kind == "material" else "grade"
            name = obj.id if kind == "material" else obj.grade
            if v is None or getattr(v, owner_attr) != name:
                raise NotFoundError(f"{vid} is not a value of {name} (see 'matdb history {name}')", field="value_id")
            cands = [(kind, v)]
        else:
            for kind, model in (("material", SusceptibilityValue), ("magnet", MagnetValue)):
                v = s.get(model, vid)
                if v is not None and v.quality == "measured":
                    cands.append((kind, v))
            if not cands:
                raise NotFoundError(f"no measured value with id {vid} (see 'matdb history ID')", field="value_id")
            if len(cands) > 1:
                raise InputError(f"{vid} is a measured value of both {cands[0][1].material_id} and "
                                 f"{cands[1][1].grade}; name the material or grade too", field="value_id")
        kind, v = cands[0]
        name = v.material_id if kind == "material" else v.grade
        if v.quality != "measured":
            raise InputError(f"value {vid} of {name} is a published ({v.quality}) value; published rows "
                             "are never changed: prefer another value instead ('matdb prefer')", field="value_id")
        if v.retracted:
            raise InputError(f"value {vid} of {name} is already retracted ({v.retract_reason})", field="value_id")
        v.retracted = True
        v.retract_reason = why
        s.add(v)
        owner = s.get(Material, name) if kind == "material" else s.get(MagnetGrade, name)
        if owner is not None and owner.preferred_value_id == vid:
            owner.preferred_value_id = None
            s.add(owner)
    return _find_value_row(history(name, url), vid)
