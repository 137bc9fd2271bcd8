"""Lab-measured values: recording, preferring, retracting, history, import and export.

Measured values are *appended* beside the published ones (``quality="measured"``, source
key ``lab`` plus a free-text source note); published rows are never changed. Every write
is one transaction (:func:`matdb.data.db.session_scope`): a bad value or a bad row in a batch
raises before anything is committed.

Library functions take what a person typed (strings such as ``"-1.31e-5 cgs-volume"`` or
``"20 degC"``) or plain SI numbers, and return plain dicts (the rows of :func:`history`).
"""

from __future__ import annotations

import csv
import datetime as _dt
import io
import json
import math
import os
import re
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Optional

from sqlmodel import Session, select

from matdb.data import catalog
from matdb.data.db import read_session, session_scope
from matdb.errors import InputError, NotFoundError
from matdb.constants import ALPHA_MAX_PCT_PER_K, BR_RANGE_T, CHI_MAX_ABS, DENSITY_RANGE_KG_M3, HCJ_MAX_KA_M, kelvin_to_celsius
from matdb.output import escape_cell, unescape_cell  # noqa: F401  (also used by callers as labvalues.*)
from matdb.limits import MAX_FILE_BYTES, MAX_IMPORT_BYTES, MAX_IMPORT_ROWS, check_count, check_nesting, read_text_limited
from matdb.data.models import (
    MATERIAL_KINDS,
    QUALITY_CLASSES,
    MagnetGrade,
    MagnetValue,
    Material,
    Source,
    SusceptibilityValue,
)
from matdb.units import (
    _split_number_unit,
    chi_from_si_volume,
    chi_to_si_volume,
    needs_density,
    needs_molar_mass,
    parse_convention,
    parse_density,
    parse_flux_density,
    parse_molar_mass,
    parse_number,
    parse_quantity,
    parse_temperature,
)

LAB_SOURCE_KEY = "lab"
LAB_CITATION = "lab-measured value; see the value's source note"
RHO_LO, RHO_HI = DENSITY_RANGE_KG_M3
SOURCE_KINDS = ("handbook", "standard", "paper", "datasheet", "common-practice", "lab")
SLUG_RE = re.compile(r"^[a-z0-9]+(-[a-z0-9]+)*$")
GRADE_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._+-]*$")
DATE_RE = re.compile(r"^\d{4}-\d{2}-\d{2}$")

# hook for the crash test: pause (inside the transaction) after writing this many value rows
PAUSE_ENV = "MATDB_TEST_IMPORT_PAUSE_AFTER"


# ---------------------------------------------------------------------------
# small parsers (field-named errors)
# ---------------------------------------------------------------------------
def _text(value: Any) -> str:
    """A typed string without the padding the CLI core adds to negative numbers."""
    if value is None:
        return ""
    return str(value).strip()


def _given(value: Any) -> bool:
    return value is not None and _text(value) != ""


def _require_source(text: Any, label: str) -> str:
    s = _text(text)
    if not s:
        raise InputError(f"{label}: required: say where the value comes from "
                         "(e.g. 'Gouy balance, sample B3, lab notebook 4 p. 12')")
    return s


def parse_date(text: Any, label: str = "--date") -> Optional[_dt.date]:
    """``YYYY-MM-DD`` (not in the future), or None when empty."""
    s = _text(text)
    if not s:
        return None
    if not DATE_RE.match(s):
        raise InputError(f"{label}: expected a date YYYY-MM-DD, got {s!r}")
    try:
        d = _dt.date.fromisoformat(s)
    except ValueError:
        raise InputError(f"{label}: not a calendar date: {s!r}") from None
    if d > _dt.date.today() + _dt.timedelta(days=1):
        raise InputError(f"{label}: {s} is in the future")
    return d


def _parse_chi_text(text: Any, label: str, rho: Optional[float], mm: Optional[float],
                    rho_label: str, mm_label: str, convention_default: Optional[str] = None
                    ) -> tuple[float, float, str]:
    """(chi_si, value as typed, convention) from ``"-1.6e-4"`` or ``"-280e-6 cm^3/mol"``."""
    s = _text(text)
    if not s:
        raise InputError(f"{label}: required: a susceptibility such as -1.6e-4 or '-1.31e-5 cgs-volume'")
    try:
        value, unit = _split_number_unit(s, label)
    except InputError:
        raise InputError(f"{label}: expected a susceptibility such as -1.6e-4 or "
                         f"'-280e-6 cm^3/mol', got {s!r}") from None
    conv = parse_convention(unit, label) if unit else (convention_default or "si-volume")
    if needs_density(conv) and rho is None:
        raise InputError(f"{rho_label}: needed to convert {label} from {conv}; give e.g. {rho_label} '9.78 g/cm^3'")
    if needs_molar_mass(conv) and mm is None:
        raise InputError(f"{mm_label}: needed to convert {label} from {conv}; give e.g. {mm_label} '208.98 g/mol'")
    chi = chi_to_si_volume(value, conv, rho, mm)
    if not math.isfinite(chi):
        raise InputError(f"{label}: expected a finite susceptibility, got {s!r}")
    return chi, value, conv


def _check_magnitude(chi: float, label: str, typed: Any) -> None:
    if abs(chi) > CHI_MAX_ABS:
        raise InputError(f"{label}: |chi| = {abs(chi):.3g} (SI volume) from {_text(typed)!r} is absurd for a "
                         f"dia- or paramagnet (limit {CHI_MAX_ABS:g}); check the convention or unit")
    if chi == 0:
        raise InputError(f"{label}: a susceptibility of exactly zero is not a measurement")


def _parse_uncertainty(text: Any, label: str, chi_si: float, conv: str, rho, mm) -> float:
    """Absolute in the value's convention (``"0.5e-6"``), with its own unit, or ``"5 %"``."""
    s = _text(text)
    if s.endswith("%"):
        pct = parse_number(s[:-1].strip(), label)
        if not (0 <= pct <= 100):
            raise InputError(f"{label}: expected a percentage from 0 to 100, got {s!r}")
        return abs(chi_si) * pct / 100.0
    try:
        value, unit = _split_number_unit(s, label)
    except InputError:
        raise InputError(f"{label}: expected an absolute uncertainty in the value's convention "
                         f"(e.g. 0.5e-6) or a percentage (e.g. '5%'), got {s!r}") from None
    if value < 0:
        raise InputError(f"{label}: expected an uncertainty of zero or more, got {s!r}")
    c = parse_convention(unit, label) if unit else conv
    if (needs_density(c) and rho is None) or (needs_molar_mass(c) and mm is None):
        raise InputError(f"{label}: cannot convert {c} without density and molar mass")
    unc = abs(chi_to_si_volume(value, c, rho, mm))
    if unc > CHI_MAX_ABS:
        raise InputError(f"{label}: uncertainty {unc:.3g} (SI volume) is absurd")
    return unc


def _parse_alpha(text: Any, label: str) -> float:
    s = _text(text)
    s2 = re.sub(r"\s*%\s*/\s*(K|degC|C|°C)$", "", s)
    a = parse_number(s2, label)
    if abs(a) > ALPHA_MAX_PCT_PER_K:
        raise InputError(f"{label}: temperature coefficient {a} %/K is implausible (|alpha| <= {ALPHA_MAX_PCT_PER_K:g})")
    return a


def _parse_br(text: Any, label: str) -> float:
    br = parse_flux_density(_text(text), label)
    lo, hi = BR_RANGE_T
    if not (lo <= br <= hi):
        raise InputError(f"{label}: remanence {br:.4g} T is outside {lo} to {hi} T")
    return br


def _parse_hcj(text: Any, label: str) -> float:
    h = parse_quantity(_text(text), "kA/m", label, positive=True)
    if h > HCJ_MAX_KA_M:
        raise InputError(f"{label}: coercivity {h:.4g} kA/m is implausible (limit {HCJ_MAX_KA_M:g} kA/m)")
    return h


def _num(text: Any, label: str) -> Optional[float]:
    s = _text(text)
    return parse_number(s, label) if s else None


def _bool(text: Any, label: str, default: bool = False) -> bool:
    s = _text(text).lower()
    if not s:
        return default
    if s in ("true", "yes", "1"):
        return True
    if s in ("false", "no", "0"):
        return False
    raise InputError(f"{label}: expected true or false, got {s!r}")


def _close(name: str, choices: Iterable[str]) -> str:
    import difflib

    near = difflib.get_close_matches(name, list(choices), n=3, cutoff=0.5)
    return f"; did you mean {', '.join(near)}?" if near else ""


# ---------------------------------------------------------------------------
# database helpers
# ---------------------------------------------------------------------------
def _ensure_source(s: Session, key: str, citation: str, kind: str, year=None, note: str = "") -> None:
    """Insert a Source row unless it exists (safe when several writers do it at once)."""
    if s.get(Source, key) is not None:
        return
    values = {"key": key, "citation": citation, "kind": kind, "year": year, "note": note}
    dialect = s.get_bind().dialect.name
    if dialect == "sqlite":
        from sqlalchemy.dialects.sqlite import insert
    elif dialect == "postgresql":
        from sqlalchemy.dialects.postgresql import insert
    else:  # pragma: no cover - other back ends: plain insert
        s.add(Source(**values))
        s.flush()
        return
    s.exec(insert(Source.__table__).values(**values).on_conflict_do_nothing())


def _ensure_lab_source(s: Session) -> None:
    _ensure_source(s, LAB_SOURCE_KEY, LAB_CITATION, "lab")


def _find_grade(s: Session, grade: str) -> Optional[MagnetGrade]:
    g = s.get(MagnetGrade, grade)
    if g is not None:
        return g
    same = [x for x in s.exec(select(MagnetGrade.grade)).all() if x.lower() == grade.lower()]
    if len(same) == 1:
        return s.get(MagnetGrade, same[0])
    return None


def _pause_hook(written: int, session: Optional[Session] = None) -> None:
    """Crash-test hook: with MATDB_TEST_IMPORT_PAUSE_AFTER=N, stop for a minute after N rows
    (flushed to the database inside the open transaction)."""
    env = os.environ.get(PAUSE_ENV, "").strip()
    if env and env.isdigit() and written == int(env):
        if session is not None:
            session.flush()
        print(f"matdb: import paused after {written} rows", file=sys.stderr, flush=True)
        time.sleep(120)


# ---------------------------------------------------------------------------
# building value rows (shared by record and import)
# ---------------------------------------------------------------------------
@dataclass
class _Mat:
    id: str
    name: str
    kind: str
    density: float
    molar_mass: Optional[float]
    anisotropic: bool
    new: bool = False
    preferred_value_id: Optional[int] = None


def _mat_of(m: Material) -> _Mat:
    return _Mat(m.id, m.name, m.kind, m.density_kg_m3, m.molar_mass_kg_mol, m.anisotropic, False,
                m.preferred_value_id)


def _sign_check(mat: _Mat, chi: float, label: str, allow_paramagnetic: bool, allow_label: str) -> None:
    if mat.kind == "diamagnetic" and chi > 0 and not allow_paramagnetic:
        raise InputError(f"{label}: {mat.id} is diamagnetic but chi = {chi:.4g} > 0; if the sample really "
                         f"is paramagnetic, repeat with {allow_label}")
    if mat.kind == "paramagnetic" and chi < 0 and not allow_paramagnetic:
        raise InputError(f"{label}: {mat.id} is paramagnetic but chi = {chi:.4g} < 0; check the sign, "
                         f"or repeat with {allow_label}")


CLI_LABELS = {
    "chi": "--chi", "chi_perp": "--chi-perp", "chi_par": "--chi-par", "density": "--density",
    "temperature": "--temperature", "uncertainty": "--uncertainty", "molar_mass": "--molar-mass",
    "source": "--source", "date": "--date", "allow_paramagnetic": "--allow-paramagnetic",
    "name": "--name", "br": "--br", "hcj": "--hcj", "alpha": "--alpha", "max_temp": "--max-temp",
    "family": "--family",
}


def _build_chi_value(mat: _Mat, f: dict, labels: dict[str, str]) -> SusceptibilityValue:
    """A measured SusceptibilityValue from typed fields ``f`` (keys as in CLI_LABELS)."""
    L = labels.get
    source_note = _require_source(f.get("source"), L("source", "source"))
    rho_measured = parse_density(_text(f["density"]), L("density", "density")) if _given(f.get("density")) else None
    mm = parse_molar_mass(_text(f["molar_mass"]), L("molar_mass", "molar_mass")) if _given(f.get("molar_mass")) else mat.molar_mass
    rho = rho_measured if rho_measured is not None else mat.density
    allow = bool(f.get("allow_paramagnetic"))
    chi_t, perp_t, par_t = f.get("chi"), f.get("chi_perp"), f.get("chi_par")
    conv_default = _text(f.get("convention")) or None
    if conv_default:
        conv_default = parse_convention(conv_default, L("convention", "convention"))
    if _given(chi_t) and _given(perp_t):
        raise InputError(f"{L('chi_perp', 'chi_perp')}: give {L('chi', 'chi')} or {L('chi_perp', 'chi_perp')}, not both")
    main_t, main_label = (perp_t, L("chi_perp", "chi_perp")) if _given(perp_t) else (chi_t, L("chi", "chi"))
    if not _given(main_t):
        raise InputError(f"{L('chi', 'chi')}: required: the measured susceptibility, e.g. -1.6e-4 "
                         "or '-1.31e-5 cgs-volume'")
    if mat.anisotropic and not _given(par_t):
        raise InputError(f"{L('chi_par', 'chi_par')}: {mat.id} is anisotropic: give the in-plane value too "
                         f"({L('chi_perp', 'chi_perp')} for the field along the c axis, {L('chi_par', 'chi_par')} in the plane)")
    if not mat.anisotropic and (_given(par_t) or _given(perp_t)):
        lab = L("chi_par", "chi_par") if _given(par_t) else L("chi_perp", "chi_perp")
        raise InputError(f"{lab}: {mat.id} is isotropic: give one value with {L('chi', 'chi')}")
    rho_l, mm_l = L("density", "density"), L("molar_mass", "molar_mass")
    chi, published, conv = _parse_chi_text(main_t, main_label, rho, mm, rho_l, mm_l, conv_default)
    _check_magnitude(chi, main_label, main_t)
    _sign_check(mat, chi, main_label, allow, L("allow_paramagnetic", "allow_paramagnetic"))
    chi_par = par_published = None
    if _given(par_t):
        par_label = L("chi_par", "chi_par")
        chi_par, _, _ = _parse_chi_text(par_t, par_label, rho, mm, rho_l, mm_l, conv)
        _check_magnitude(chi_par, par_label, par_t)
        _sign_check(mat, chi_par, par_label, allow, L("allow_paramagnetic", "allow_paramagnetic"))
        par_published = chi_from_si_volume(chi_par, conv, rho, mm)
    unc = None
    if _given(f.get("uncertainty")):
        unc = _parse_uncertainty(f["uncertainty"], L("uncertainty", "uncertainty"), chi, conv, rho, mm)
    t_k = parse_temperature(_text(f["temperature"]), L("temperature", "temperature")) if _given(f.get("temperature")) else None
    return SusceptibilityValue(
        material_id=mat.id, value_published=published, value_par_published=par_published,
        convention=conv, chi_si=chi, chi_perp_si=chi if chi_par is not None else None, chi_par_si=chi_par,
        temperature_k=t_k, uncertainty_si=unc, density_kg_m3=rho_measured, quality="measured",
        source_key=LAB_SOURCE_KEY, source_note=source_note, note=_text(f.get("note")),
        measured_by=_text(f.get("measured_by")) or None, measured_on=parse_date(f.get("date"), L("date", "date")),
        method=_text(f.get("method")) or None,
    )


def _new_material(mid: str, f: dict, labels: dict[str, str], chi_positive: bool, anisotropic: bool) -> _Mat:
    L = labels.get
    if not SLUG_RE.match(mid):
        raise InputError(f"material: a new id must be a lower-case slug such as 'bismuth-casting-b3', got {mid!r}")
    name = _text(f.get("name"))
    if not name:
        raise InputError(f"material: unknown id {mid!r}; to create a new material give {L('name', 'name')} "
                         f"and {L('density', 'density')}")
    if not _given(f.get("density")):
        raise InputError(f"{L('density', 'density')}: needed for a new material ({mid})")
    rho = parse_density(_text(f["density"]), L("density", "density"))
    mm = parse_molar_mass(_text(f["molar_mass"]), L("molar_mass", "molar_mass")) if _given(f.get("molar_mass")) else None
    kind = "paramagnetic" if (chi_positive and f.get("allow_paramagnetic")) else "diamagnetic"
    return _Mat(mid, name, kind, rho, mm, anisotropic, new=True)


def _chi_positive_hint(f: dict) -> bool:
    t = _text(f.get("chi_perp")) or _text(f.get("chi"))
    return bool(t) and not t.startswith("-")


def _resolve_material(s: Session, mid: str, f: dict, labels: dict[str, str],
                      pending: Optional[dict[str, _Mat]] = None) -> _Mat:
    m = s.get(Material, mid)
    if m is not None:
        name = _text(f.get("name"))
        if name and name.lower() != m.name.lower():
            raise InputError(f"{labels.get('name', 'name')}: material {mid} exists already as {m.name!r}; "
                             "leave the name out to add a value to it")
        return _mat_of(m)
    if pending is not None and mid in pending:
        return pending[mid]
    if not _text(f.get("name")):
        ids = s.exec(select(Material.id)).all()
        raise NotFoundError(f"material: unknown id {mid!r}{_close(mid, ids)}; to create a new material "
                            f"give {labels.get('name', 'name')} and {labels.get('density', 'density')}")
    return _new_material(mid, f, labels, _chi_positive_hint(f), _given(f.get("chi_par")))


def _add_material(s: Session, mat: _Mat) -> None:
    s.add(Material(id=mat.id, name=mat.name, kind=mat.kind, density_kg_m3=mat.density,
                   molar_mass_kg_mol=mat.molar_mass, anisotropic=mat.anisotropic, origin="user",
                   price_illustrative=True))


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
    from_float_gap: Any = None,
    design: Any = None,
    note: str = "",
    url: Optional[str] = None,
) -> dict:
    """Append a measured susceptibility of ``material_id`` (created when ``name`` is given).

    Returns the value's history row (``value_id``, ``chi_si``, ``preferred``...) plus
    ``material_id`` and ``created_material``.
    """
    mid = _text(material_id).lower()
    if not mid:
        raise InputError("material: give a material id (see 'matdb materials')")
    f = {"chi": chi, "chi_perp": chi_perp, "chi_par": chi_par, "density": density,
         "temperature": temperature, "uncertainty": uncertainty, "source": source,
         "measured_by": measured_by, "date": date, "method": method, "molar_mass": molar_mass,
         "name": name, "allow_paramagnetic": allow_paramagnetic, "note": note}
    _require_source(source, "--source")
    if _given(from_float_gap) or _given(design):
        if _given(chi) or _given(chi_perp) or _given(chi_par):
            raise InputError("--from-float-gap: give either --chi or --from-float-gap with --design, not both")
        if not (_given(from_float_gap) and _given(design)):
            missing = "--design" if _given(from_float_gap) else "--from-float-gap"
            raise InputError(f"{missing}: --from-float-gap and --design go together")
    with session_scope(url) as s:
        mat = _resolve_material(s, mid, f, CLI_LABELS)
        if _given(from_float_gap):
            if mat.new:
                raise InputError("--from-float-gap: needs an existing material (its perp/par ratio and density)")
            extra = _chi_from_float_gap(mid, from_float_gap, design, url)
            if _given(temperature):
                extra.pop("temperature")
            f.update(extra)
        v = _build_chi_value(mat, f, CLI_LABELS)
        if mat.new:
            _add_material(s, mat)
        _ensure_lab_source(s)
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
    surface_field: Any = None,
    shape: Any = None,
    size: Any = None,
    probe_offset: Any = None,
    note: str = "",
    url: Optional[str] = None,
) -> dict:
    """Append a measured property set of a magnet grade (created when ``family`` is given).

    ``surface_field`` (with ``shape`` and ``size``, optionally ``probe_offset``) is inverted
    to Br through the on-axis field of the magnet; the note says what was assumed.
    """
    gid = _text(grade)
    if not gid:
        raise InputError("grade: give a magnet grade (see 'matdb magnets') or a new id with --family")
    source_note = _require_source(source, "--source")
    note_parts = [_text(note)] if _text(note) else []
    if _given(surface_field):
        if _given(br):
            raise InputError("--surface-field: give --br or --surface-field, not both")
        br_t, assumed = surface_field_to_br(surface_field, shape, size, probe_offset)
        note_parts.append(assumed)
    else:
        for flag, val in (("--shape", shape), ("--size", size), ("--probe-offset", probe_offset)):
            if _given(val):
                raise InputError(f"{flag}: only used with --surface-field")
        br_t = _parse_br(br, "--br") if _given(br) else None
    vals = {
        "br_t": br_t,
        "hcj_ka_m": _parse_hcj(hcj, "--hcj") if _given(hcj) else None,
        "alpha_br_pct_per_k": _parse_alpha(alpha, "--alpha") if _given(alpha) else None,
        "max_temp_c": kelvin_to_celsius(parse_temperature(_text(max_temp), "--max-temp")) if _given(max_temp) else None,
        "density_kg_m3": parse_density(_text(density), "--density") if _given(density) else None,
    }
    if all(v is None for v in vals.values()):
        raise InputError("--br: give at least one measured property (--br, --surface-field, --hcj, --alpha)")
    d = parse_date(date, "--date")
    with session_scope(url) as s:
        g = _find_grade(s, gid)
        created = False
        if g is None:
            if not _given(family):
                grades = s.exec(select(MagnetGrade.grade)).all()
                raise NotFoundError(f"grade: unknown magnet grade {gid!r}{_close(gid, grades)}; "
                                    "to add a new one give --family")
            fam = _check_family(family, "--family")
            if not GRADE_RE.match(gid):
                raise InputError(f"grade: a new id may hold letters, digits, '.', '-', '+', '_', got {gid!r}")
            need = {"--br": "br_t", "--hcj": "hcj_ka_m", "--alpha": "alpha_br_pct_per_k",
                    "--max-temp": "max_temp_c", "--density": "density_kg_m3"}
            missing = [flag for flag, k in need.items() if vals[k] is None]
            if missing:
                raise InputError(f"{missing[0]}: a new grade needs {', '.join(need)} "
                                 f"(missing {', '.join(missing)})")
            g = MagnetGrade(grade=gid, family=fam, origin="user", price_illustrative=True)
            s.add(g)
            created = True
        elif _given(family) and _check_family(family, "--family") != g.family:
            raise InputError(f"--family: grade {g.grade} exists already as {g.family}")
        _ensure_lab_source(s)
        v = MagnetValue(grade=g.grade, quality="measured", source_key=LAB_SOURCE_KEY, source_note=source_note,
                        note="; ".join(note_parts), measured_by=_text(measured_by) or None, measured_on=d,
                        method=_text(method) or None, **vals)
        s.add(v)
        s.flush()
        vid, gname = v.id, g.grade
    rows = catalog.grade_values(gname, url)
    return {"grade": gname, "created_grade": created, **_find_value_row(rows, vid)}


def _check_family(family: Any, label: str) -> str:
    return catalog.check_family(_text(family), label)


# ---------------------------------------------------------------------------
# inversions of the physics
# ---------------------------------------------------------------------------
def _parse_size(text: Any, label: str) -> tuple[float, ...]:
    parts = [p for p in re.split(r"\s*[,x×]\s*(?=[-+.\d])", _text(text)) if p.strip()]
    if not parts:
        raise InputError(f"{label}: expected lengths such as '10 mm,10 mm,5 mm'")
    from matdb.units import parse_length

    return tuple(parse_length(p, label, positive=True) for p in parts)


def surface_field_to_br(surface_field: Any, shape: Any, size: Any, probe_offset: Any = None) -> tuple[float, str]:
    """Br of a magnet from the on-axis field measured above its face centre.

    The field of a uniformly magnetised magnet is proportional to Br, so
    ``Br = B_measured / B_unit(offset)`` with ``B_unit`` the on-axis Bz of the same
    magnet at Br = 1 T, ``offset`` above the face centre (the sensor sits below the
    probe's face). Returns (Br in T, the note stating what was assumed).
    """
    import numpy as np

    b_meas = parse_flux_density(_text(surface_field), "--surface-field")
    if not (b_meas > 0):
        raise InputError("--surface-field: expected a positive field, e.g. '0.52 T' or '5200 G'")
    shp = _text(shape).lower()
    if shp not in ("cuboid", "cylinder"):
        raise InputError(f"--shape: expected cuboid or cylinder, got {_text(shape)!r}")
    if not _given(size):
        raise InputError("--size: needed with --surface-field, e.g. '10 mm,10 mm,10 mm' (cuboid: x,y,height) "
                         "or '10 mm,5 mm' (cylinder: diameter,height)")
    dims = _parse_size(size, "--size")
    want = 3 if shp == "cuboid" else 2
    if len(dims) != want:
        raise InputError(f"--size: a {shp} needs {want} lengths "
                         f"({'x,y,height' if shp == 'cuboid' else 'diameter,height'}), got {_text(size)!r}")
    if _given(probe_offset):
        from matdb.units import parse_length

        offset = parse_length(_text(probe_offset), "--probe-offset")
    else:
        offset = 0.0
    from matdb.physics.arrangement import build_arrangement

    arr = build_arrangement(shp, dims, pattern="single", br=1.0)
    b_unit = float(np.asarray(arr.B(np.array([[0.0, 0.0, offset]])))[0, 2])
    if not (math.isfinite(b_unit) and b_unit > 0):
        raise InputError("--probe-offset: the model gives no usable field there; check --size and --probe-offset")
    br = b_meas / b_unit
    lo, hi = BR_RANGE_T
    if not (lo <= br <= hi):
        raise InputError(f"--surface-field: {_text(surface_field)!r} on this {shp} implies Br = {br:.3g} T, "
                         f"outside {lo} to {hi} T; check --size and --probe-offset")
    dims_txt = ",".join(f"{d * 1000:g} mm" for d in dims)
    assumed = (f"Br from surface field: measured {b_meas:.6g} T on the axis {offset * 1000:g} mm above the "
               f"face centre of a single {shp} {dims_txt} (model field there at Br = 1 T: "
               f"{b_unit:.6g} T), so Br = {br:.6g} T")
    return br, assumed


def _chi_from_float_gap(material_id: str, gap: Any, design: Any, url: Optional[str]) -> dict:
    """Typed fields (chi or chi_perp/chi_par as SI numbers, note) from a measured float gap."""
    from matdb.units import parse_length

    gap_m = parse_length(_text(gap), "--from-float-gap", positive=True)
    path = Path(_text(design))
    content = read_text_limited(path, "--design", MAX_FILE_BYTES)
    m = catalog.get_material(material_id, url)
    chi_v, assumed = invert_float_gap(gap_m, path, m)
    aniso = m.anisotropic and m.chi_par_si is not None
    one_line = " | ".join(x.strip() for x in content.splitlines() if x.strip() and not x.strip().startswith("#"))
    note = (f"chi from float gap: plate bottom {gap_m * 1000:g} mm above the magnets' top faces over the design "
            f"{str(path)!r}; magnets at {kelvin_to_celsius(assumed['temperature_k']):g} C; weight {assumed['weight_n']:.6g} N "
            f"with density {m.density_kg_m3:g} kg/m^3; lift taken linear in |chi|"
            + (f", chi_par/chi_perp = {assumed['ratio']:.6g} kept from value {m.value_id}" if aniso else "")
            + f"; design: {one_line}")
    out: dict = {"note": note, "temperature": f"{assumed['temperature_k']} K"}
    if aniso:
        out["chi_perp"] = repr(chi_v)
        out["chi_par"] = repr(chi_v * assumed["ratio"])
        out["chi"] = None
    else:
        out["chi"] = repr(chi_v)
    return out


def invert_float_gap(gap_m: float, design_path: Path, material) -> tuple[float, dict]:
    """The vertical-field chi (SI volume, negative) that floats the design's plate at ``gap_m``.

    The lift is linear in the susceptibilities, ``F(g) = |chi_perp| F_perp(g) + |chi_par|
    F_par(g)`` (:mod:`matdb.physics.plate`), so with the material's ratio ``r =
    chi_par / chi_perp`` kept (1 for an isotropic material) the measured gap gives
    ``|chi_perp| = W / (F_perp(g) + r F_par(g))``, ``W`` the weight of plate and payload.
    Returns (chi_perp, what was assumed: temperature_k, ratio, weight_n, unit_lift_n).
    """
    from matdb.design import PlateDesign, load_design
    from matdb.analysis.levitate import plate_geometry
    from matdb.physics import plate as P
    from matdb.constants import G_STANDARD

    d = load_design(design_path)
    if not isinstance(d, PlateDesign):
        raise InputError("--design: expected a floating-plate design ([magnets] and [plate] tables)")
    if d.plate.material != material.id:
        raise InputError(f"--design: the plate in {str(design_path)!r} is {d.plate.material!r}, "
                         f"not {material.id!r}; use a design of the sample that was floated")
    if material.kind != "diamagnetic":
        raise InputError(f"--from-float-gap: {material.id} is not diamagnetic; it cannot float")
    cover = d.magnets.cover_m
    if gap_m <= cover:
        raise InputError(f"--from-float-gap: the gap ({gap_m * 1000:g} mm, plate bottom above the magnets' "
                         f"top faces) must exceed the cover sheet ({cover * 1000:g} mm)")
    t_k = d.conditions.nominal_k
    arr = d.arrangement(t_k)
    geom = plate_geometry(d, arr)
    ratio = 1.0
    if material.anisotropic and material.chi_perp_si and material.chi_par_si is not None:
        ratio = material.chi_par_si / material.chi_perp_si
    weight = (material.density_kg_m3 * d.plate.volume_m3 + d.plate.payload_kg) * G_STANDARD
    f1, f2 = (float(x) for x in P.lift_force(arr.B, geom, [gap_m, gap_m * 1.02], 1.0, ratio))
    if not (f1 > 0 and math.isfinite(f1)):
        raise InputError("--from-float-gap: the design gives no lift at that gap")
    if f2 >= f1:
        raise InputError(f"--from-float-gap: at {gap_m * 1000:g} mm the lift of this design still rises with "
                         "the gap, so a plate cannot rest there stably; check the gap and the design")
    chi_abs = weight / f1
    if chi_abs > CHI_MAX_ABS:
        raise InputError(f"--from-float-gap: a float at {gap_m * 1000:g} mm needs |chi| = {chi_abs:.3g}, "
                         "absurd for a diamagnet; check the gap and the design")
    return -chi_abs, {"temperature_k": t_k, "ratio": ratio, "weight_n": weight, "unit_lift_n": f1}


# ---------------------------------------------------------------------------
# preferring, retracting, history
# ---------------------------------------------------------------------------
def _subject(s: Session, ident: str):
    """('material', Material) or ('magnet', MagnetGrade) for an id or a grade."""
    m = s.get(Material, ident) or s.get(Material, ident.lower())
    if m is not None:
        return "material", m
    g = _find_grade(s, ident)
    if g is not None:
        return "magnet", g
    ids = list(s.exec(select(Material.id)).all()) + list(s.exec(select(MagnetGrade.grade)).all())
    raise NotFoundError(f"id: {ident!r} is neither a material id nor a magnet grade{_close(ident, ids)}")


def history(ident: str, url: Optional[str] = None) -> list[dict]:
    """Every value of a material or grade with provenance; ``preferred`` marks the one in use."""
    key = _text(ident)
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
    key = _text(ident)
    with session_scope(url) as s:
        kind, obj = _subject(s, key)
        model = SusceptibilityValue if kind == "material" else MagnetValue
        v = s.get(model, vid)
        owner = getattr(v, "material_id" if kind == "material" else "grade", None) if v else None
        name = obj.id if kind == "material" else obj.grade
        if v is None or owner != name:
            ids = [x.id for x in s.exec(select(model).where(
                (model.material_id if kind == "material" else model.grade) == name)).all()]
            raise NotFoundError(f"VALUE-ID: {vid} is not a value of {name} (its values: "
                                f"{', '.join(map(str, ids))}; see 'matdb history {name}')")
        if v.retracted:
            raise InputError(f"VALUE-ID: value {vid} of {name} is retracted ({v.retract_reason}); it cannot be used")
        obj.preferred_value_id = vid
        s.add(obj)
    return _find_value_row(history(name, url), vid)


def _value_id(value_id: Any) -> int:
    s = _text(value_id)
    if not re.fullmatch(r"\d+", s):
        raise InputError(f"VALUE-ID: expected a value id (a whole number shown by 'matdb history'), got {s!r}")
    return int(s)


def retract(value_id: Any, reason: Any, ident: Any = None, url: Optional[str] = None) -> dict:
    """Hide a wrong measured value from use; it stays in the history with the reason."""
    vid = _value_id(value_id)
    why = _text(reason)
    if not why:
        raise InputError("--reason: required: say why the value is wrong")
    with session_scope(url) as s:
        cands = []
        if _given(ident):
            kind, obj = _subject(s, _text(ident))
            model = SusceptibilityValue if kind == "material" else MagnetValue
            v = s.get(model, vid)
            owner_attr = "material_id" if kind == "material" else "grade"
            name = obj.id if kind == "material" else obj.grade
            if v is None or getattr(v, owner_attr) != name:
                raise NotFoundError(f"VALUE-ID: {vid} is not a value of {name} (see 'matdb history {name}')")
            cands = [(kind, v)]
        else:
            for kind, model in (("material", SusceptibilityValue), ("magnet", MagnetValue)):
                v = s.get(model, vid)
                if v is not None and v.quality == "measured":
                    cands.append((kind, v))
            if not cands:
                raise NotFoundError(f"VALUE-ID: no measured value with id {vid} (see 'matdb history ID')")
            if len(cands) > 1:
                raise InputError(f"VALUE-ID: {vid} is a measured value of both {cands[0][1].material_id} and "
                                 f"{cands[1][1].grade}; add --id MATERIAL-OR-GRADE")
        kind, v = cands[0]
        name = v.material_id if kind == "material" else v.grade
        if v.quality != "measured":
            raise InputError(f"VALUE-ID: value {vid} of {name} is a published ({v.quality}) value; published rows "
                             "are never changed: prefer another value instead ('matdb prefer')")
        if v.retracted:
            raise InputError(f"VALUE-ID: value {vid} of {name} is already retracted ({v.retract_reason})")
        v.retracted = True
        v.retract_reason = why
        s.add(v)
        owner = s.get(Material, name) if kind == "material" else s.get(MagnetGrade, name)
        if owner is not None and owner.preferred_value_id == vid:
            owner.preferred_value_id = None
            s.add(owner)
    return _find_value_row(history(name, url), vid)


# ---------------------------------------------------------------------------
# export
# ---------------------------------------------------------------------------
EXPORT_COLUMNS = [
    "record", "id", "value_kind", "name", "kind", "family",
    "chi_si", "chi_perp_si", "chi_par_si", "value_published", "value_par_published", "convention",
    "temperature_k", "uncertainty_si", "temp_coeff_per_k", "density_kg_m3", "molar_mass_kg_mol", "anisotropic",
    "br_t", "br_min_t", "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3", "alpha_br_pct_per_k", "beta_hcj_pct_per_k",
    "max_temp_c", "mu_rec", "price_usd_per_kg", "price_note", "price_illustrative", "density_source_key",
    "origin", "citation", "year", "source_key", "source", "measured_by", "date", "method", "note",
    "entered_at", "retracted", "retract_reason", "preference_set", "allow_paramagnetic", "value_id",
]
NUMERIC_COLUMNS = {
    "chi_si", "chi_perp_si", "chi_par_si", "value_published", "value_par_published", "temperature_k",
    "uncertainty_si", "temp_coeff_per_k", "density_kg_m3", "molar_mass_kg_mol", "br_t", "br_min_t",
    "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3", "alpha_br_pct_per_k", "beta_hcj_pct_per_k", "max_temp_c",
    "mu_rec", "price_usd_per_kg", "year", "value_id",
}
# friendlier columns accepted by import (typed like the CLI options)
INPUT_COLUMNS = {"material_id", "grade", "chi", "chi_perp", "chi_par", "temperature", "uncertainty",
                 "density", "molar_mass", "br", "hcj", "alpha", "max_temp"}
_MAGNET_NUM = ("br_t", "br_min_t", "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3", "alpha_br_pct_per_k",
               "beta_hcj_pct_per_k", "max_temp_c", "mu_rec", "density_kg_m3")


def _iso(d) -> Optional[str]:
    return d.isoformat() if d is not None else None


def export_data(url: Optional[str] = None) -> dict:
    """Sources, materials, grades and every value with provenance, as plain JSON-able rows."""
    with read_session(url) as s:
        sources = s.exec(select(Source).order_by(Source.key)).all()
        mats = s.exec(select(Material).order_by(Material.id)).all()
        grades = s.exec(select(MagnetGrade).order_by(MagnetGrade.grade)).all()
        chis = s.exec(select(SusceptibilityValue).order_by(SusceptibilityValue.id)).all()
        mags = s.exec(select(MagnetValue).order_by(MagnetValue.id)).all()
        kinds = {m.id: m.kind for m in mats}
        mpref = {m.id: m.preferred_value_id for m in mats}
        gpref = {g.grade: g.preferred_value_id for g in grades}
        out = {"format": "matdb-export", "version": 1, "sources": [], "materials": [], "grades": [], "values": []}
        for x in sources:
            out["sources"].append({"record": "source", "id": x.key, "citation": x.citation, "kind": x.kind,
                                   "year": x.year, "note": x.note})
        for m in mats:
            out["materials"].append({
                "record": "material", "id": m.id, "name": m.name, "kind": m.kind, "density_kg_m3": m.density_kg_m3,
                "molar_mass_kg_mol": m.molar_mass_kg_mol, "anisotropic": m.anisotropic,
                "price_usd_per_kg": m.price_usd_per_kg, "price_note": m.price_note,
                "price_illustrative": m.price_illustrative, "density_source_key": m.density_source_key,
                "note": m.note, "origin": m.origin})
        for g in grades:
            out["grades"].append({"record": "grade", "id": g.grade, "family": g.family,
                                  "price_usd_per_kg": g.price_usd_per_kg, "price_illustrative": g.price_illustrative,
                                  "note": g.note, "origin": g.origin})
        for v in chis:
            kind = kinds.get(v.material_id)
            wrong_sign = (kind == "diamagnetic" and v.chi_si > 0) or (kind == "paramagnetic" and v.chi_si < 0)
            out["values"].append({
                "record": "chi", "id": v.material_id, "value_kind": v.quality, "value_id": v.id,
                "chi_si": v.chi_si, "chi_perp_si": v.chi_perp_si, "chi_par_si": v.chi_par_si,
                "value_published": v.value_published, "value_par_published": v.value_par_published,
                "convention": v.convention, "temperature_k": v.temperature_k, "uncertainty_si": v.uncertainty_si,
                "temp_coeff_per_k": v.temp_coeff_per_k, "density_kg_m3": v.density_kg_m3,
                "source_key": v.source_key, "source": v.source_note, "note": v.note,
                "measured_by": v.measured_by, "date": _iso(v.measured_on), "method": v.method,
                "entered_at": _iso(v.entered_at), "retracted": v.retracted, "retract_reason": v.retract_reason,
                "preference_set": mpref.get(v.material_id) == v.id, "allow_paramagnetic": wrong_sign})
        for v in mags:
            row = {"record": "magnet", "id": v.grade, "value_kind": v.quality, "value_id": v.id}
            row.update({k: getattr(v, k) for k in _MAGNET_NUM})
            row.update({"source_key": v.source_key, "source": v.source_note, "note": v.note,
                        "measured_by": v.measured_by, "date": _iso(v.measured_on), "method": v.method,
                        "entered_at": _iso(v.entered_at), "retracted": v.retracted,
                        "retract_reason": v.retract_reason, "preference_set": gpref.get(v.grade) == v.id})
            out["values"].append(row)
    return out


def _cell_out(col: str, v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, int):
        return str(v)
    s = str(v)
    return s if col in NUMERIC_COLUMNS else escape_cell(s)


def export(fmt: str = "json", url: Optional[str] = None) -> str:
    """The whole database as JSON or CSV text that :func:`import_file` accepts back."""
    data = export_data(url)
    if fmt == "json":
        return json.dumps(data, indent=2, ensure_ascii=False) + "\n"
    if fmt != "csv":
        raise InputError(f"--format: expected csv or json, got {fmt!r}")
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(EXPORT_COLUMNS)
    for group in ("sources", "materials", "grades", "values"):
        for row in data[group]:
            w.writerow([_cell_out(c, row.get(c)) for c in EXPORT_COLUMNS])
    return buf.getvalue()


# ---------------------------------------------------------------------------
# import
# ---------------------------------------------------------------------------
class _Bad(Exception):
    pass


def _read_rows(path: Path) -> tuple[list[tuple[str, dict[str, str]]], str]:
    """(locator, cells) rows from a CSV (or an export JSON) file; cells are unescaped strings."""
    label = path.name
    text = read_text_limited(path, "FILE", MAX_IMPORT_BYTES)
    if not text.strip():
        raise InputError(f"{label}: the file is empty")
    if text.lstrip().startswith("{"):
        return _json_rows(text, label), "json"
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = [h.strip() for h in next(reader)]
    except StopIteration:  # pragma: no cover - caught by the empty check
        raise InputError(f"{label}:1: header row missing") from None
    except csv.Error as exc:
        raise InputError(f"{label}:1: unreadable CSV ({exc})") from None
    dup = sorted({h for h in header if header.count(h) > 1 and h})
    if dup:
        raise InputError(f"{label}:1: duplicated column names in the header: {', '.join(dup)}")
    if any(not h for h in header):
        raise InputError(f"{label}:1: a header cell is empty")
    allowed = set(EXPORT_COLUMNS) | INPUT_COLUMNS
    unknown = [h for h in header if h not in allowed]
    if unknown:
        raise InputError(f"{label}:1: unknown columns {', '.join(unknown)}; accepted: "
                         f"{', '.join(sorted(allowed))}")
    has = set(header)
    if "record" not in has:
        missing = []
        if not has & {"material_id", "id"}:
            missing.append("material_id")
        if not has & {"chi", "chi_perp", "chi_si", "chi_perp_si"}:
            missing.append("chi")
        if "source" not in has:
            missing.append("source")
        if missing:
            raise InputError(f"{label}:1: missing columns {', '.join(missing)} (a measured-value file needs "
                             "material_id, chi and source; optional: " + ", ".join(sorted(INPUT_COLUMNS - {'material_id', 'chi'})) + ")")
    # a file in the export layout (a 'record' column) was written by matdb, which escaped its
    # formula-like cells (output.escape_cell); a measured-value file is read as typed, so a
    # cell typed "'=already quoted" keeps its apostrophe
    unescape = unescape_cell if "record" in has else (lambda c: c)
    rows = []
    try:
        for cells in reader:
            line = reader.line_num
            if not cells or all(not c.strip() for c in cells):
                continue
            if cells[0].lstrip().startswith("#"):
                continue
            if len(cells) != len(header):
                rows.append((f"line {line}", {"__error__": f"expected {len(header)} cells, found {len(cells)}"}))
                continue
            rows.append((f"line {line}", {h: unescape(c) for h, c in zip(header, cells)}))
            if len(rows) > MAX_IMPORT_ROWS:
                check_count(len(rows), MAX_IMPORT_ROWS, label, "rows")
    except csv.Error as exc:
        raise InputError(f"{label}:{reader.line_num}: unreadable CSV ({exc})") from None
    return rows, "csv"


def _json_rows(text: str, label: str) -> list[tuple[str, dict[str, str]]]:
    check_nesting(text, label)
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        raise InputError(f"{label}: not valid JSON (line {exc.lineno}: {exc.msg})") from None
    if not isinstance(data, dict) or data.get("format") != "matdb-export":
        raise InputError(f"{label}: JSON import expects a 'matdb export --format json' file")
    rows = []
    for group in ("sources", "materials", "grades", "values"):
        items = data.get(group, [])
        if not isinstance(items, list):
            raise InputError(f"{label}: {group}: expected a list")
        for i, item in enumerate(items):
            if not isinstance(item, dict):
                rows.append((f"{group}[{i}]", {"__error__": "expected an object"}))
                continue
            rows.append((f"{group}[{i}]", {k: _cell_out("value_id", v) for k, v in item.items()}))
    check_count(len(rows), MAX_IMPORT_ROWS, label, "rows")
    return rows


@dataclass
class _Plan:
    sources: list[Source]
    materials: list[Material]
    grades: list[MagnetGrade]
    values: list[tuple[str, Any, bool]]  # (kind, new row, preference_set)
    retractions: list[tuple[Any, str]]
    preferences: list[tuple[str, Any]]  # (kind, existing row) to pin
    skipped: int


def _close_enough(a: Optional[float], b: Optional[float]) -> bool:
    if a is None or b is None:
        return a is None and b is None
    return math.isclose(a, b, rel_tol=1e-9, abs_tol=1e-15)


def _parse_entered(text: str, label: str) -> Optional[_dt.datetime]:
    if not text:
        return None
    try:
        d = _dt.datetime.fromisoformat(text)
    except ValueError:
        raise InputError(f"{label}: expected an ISO date and time, got {text!r}") from None
    if d.tzinfo is None:  # entry times are UTC (matdb.data.models)
        return d.replace(tzinfo=_dt.timezone.utc)
    return d.astimezone(_dt.timezone.utc)


def _row_chi(s: Session, c: dict[str, str], mat: _Mat, source_keys: set[str]) -> SusceptibilityValue:
    quality = c.get("value_kind", "").strip() or "measured"
    if quality not in QUALITY_CLASSES:
        raise InputError(f"value_kind: expected one of {', '.join(QUALITY_CLASSES)}, got {quality!r}")
    skey = c.get("source_key", "").strip() or (LAB_SOURCE_KEY if quality == "measured" else "")
    if not skey:
        raise InputError("source_key: required for a published value")
    if skey not in source_keys:
        raise InputError(f"source_key: unknown source {skey!r}")
    allow = _bool(c.get("allow_paramagnetic"), "allow_paramagnetic")
    if _given(c.get("chi_si")):
        chi = parse_number(c["chi_si"], "chi_si")
        perp = _num(c.get("chi_perp_si"), "chi_perp_si")
        par = _num(c.get("chi_par_si"), "chi_par_si")
        if perp is not None and not _close_enough(perp, chi):
            raise InputError("chi_perp_si: must equal chi_si (chi_si is the value along the c axis)")
        if mat.anisotropic and par is None:
            raise InputError(f"chi_par_si: {mat.id} is anisotropic: the in-plane value is needed")
        if not mat.anisotropic and par is not None:
            raise InputError(f"chi_par_si: {mat.id} is isotropic")
        for val, lab in ((chi, "chi_si"), (par, "chi_par_si")):
            if val is not None:
                _check_magnitude(val, lab, val)
                _sign_check(mat, val, lab, allow, "allow_paramagnetic=true")
        conv = c.get("convention", "").strip() or "si-volume"
        conv = parse_convention(conv, "convention")
        pub = _num(c.get("value_published"), "value_published")
        unc = _num(c.get("uncertainty_si"), "uncertainty_si")
        if unc is not None and (unc < 0 or unc > CHI_MAX_ABS):
            raise InputError(f"uncertainty_si: expected 0 to {CHI_MAX_ABS:g}, got {unc!r}")
        t_k = _num(c.get("temperature_k"), "temperature_k")
        if t_k is not None and t_k <= 0:
            raise InputError(f"temperature_k: expected a temperature above 0 K, got {t_k!r}")
        rho = _num(c.get("density_kg_m3"), "density_kg_m3")
        if rho is not None and not (RHO_LO <= rho <= RHO_HI):
            raise InputError(f"density_kg_m3: density {rho!r} is outside {RHO_LO:g} to {RHO_HI:g} kg/m^3")
        if quality == "measured":
            _require_source(c.get("source"), "source")
        v = SusceptibilityValue(
            material_id=mat.id, value_published=pub if pub is not None else chi,
            value_par_published=_num(c.get("value_par_published"), "value_par_published"),
            convention=conv if pub is not None else "si-volume", chi_si=chi,
            chi_perp_si=chi if par is not None else None, chi_par_si=par, temperature_k=t_k,
            uncertainty_si=unc, temp_coeff_per_k=_num(c.get("temp_coeff_per_k"), "temp_coeff_per_k"),
            density_kg_m3=rho, quality=quality, source_key=skey, source_note=_text(c.get("source")),
            note=_text(c.get("note")), measured_by=_text(c.get("measured_by")) or None,
            measured_on=parse_date(c.get("date"), "date"), method=_text(c.get("method")) or None)
    else:
        if quality != "measured":
            raise InputError("chi_si: a published value needs chi_si")
        f = {k: c.get(k) for k in ("chi", "chi_perp", "chi_par", "temperature", "uncertainty", "source",
                                   "measured_by", "date", "method", "molar_mass", "note", "convention")}
        f["density"] = c.get("density")
        f["allow_paramagnetic"] = allow
        labels = {k: k for k in CLI_LABELS}
        labels["allow_paramagnetic"] = "allow_paramagnetic=true"
        v = _build_chi_value(mat, f, labels)
        v.source_key = skey
    entered = _parse_entered(_text(c.get("entered_at")), "entered_at")
    if entered is not None:
        v.entered_at = entered
    v.retracted = _bool(c.get("retracted"), "retracted")
    v.retract_reason = _text(c.get("retract_reason")) or None
    if v.retracted and not v.retract_reason:
        raise InputError("retract_reason: a retracted value needs its reason")
    return v


def _row_magnet(c: dict[str, str], grade: str, source_keys: set[str]) -> MagnetValue:
    quality = c.get("value_kind", "").strip() or "measured"
    if quality not in QUALITY_CLASSES:
        raise InputError(f"value_kind: expected one of {', '.join(QUALITY_CLASSES)}, got {quality!r}")
    skey = c.get("source_key", "").strip() or (LAB_SOURCE_KEY if quality == "measured" else "")
    if skey not in source_keys:
        raise InputError(f"source_key: unknown source {skey!r}")
    if quality == "measured":
        _require_source(c.get("source"), "source")
    vals = {k: _num(c.get(k), k) for k in _MAGNET_NUM}
    if _given(c.get("br")):
        vals["br_t"] = _parse_br(c["br"], "br")
    if _given(c.get("hcj")):
        vals["hcj_ka_m"] = _parse_hcj(c["hcj"], "hcj")
    if _given(c.get("alpha")):
        vals["alpha_br_pct_per_k"] = _parse_alpha(c["alpha"], "alpha")
    if _given(c.get("max_temp")):
        vals["max_temp_c"] = kelvin_to_celsius(parse_temperature(_text(c["max_temp"]), "max_temp"))
    if _given(c.get("density")):
        vals["density_kg_m3"] = parse_density(_text(c["density"]), "density")
    if vals["br_t"] is not None and not (BR_RANGE_T[0] <= vals["br_t"] <= BR_RANGE_T[1]):
        raise InputError(f"br_t: remanence {vals['br_t']} T is outside {BR_RANGE_T[0]} to {BR_RANGE_T[1]} T")
    if vals["hcj_ka_m"] is not None and not (0 < vals["hcj_ka_m"] <= HCJ_MAX_KA_M):
        raise InputError(f"hcj_ka_m: coercivity {vals['hcj_ka_m']} kA/m is implausible")
    if vals["density_kg_m3"] is not None and not (RHO_LO <= vals["density_kg_m3"] <= RHO_HI):
        raise InputError(f"density_kg_m3: density {vals['density_kg_m3']} is outside {RHO_LO:g} to {RHO_HI:g} kg/m^3")
    if all(v is None for v in vals.values()):
        raise InputError("br_t: no property given")
    v = MagnetValue(grade=grade, quality=quality, source_key=skey, source_note=_text(c.get("source")),
                    note=_text(c.get("note")), measured_by=_text(c.get("measured_by")) or None,
                    measured_on=parse_date(c.get("date"), "date"), method=_text(c.get("method")) or None, **vals)
    entered = _parse_entered(_text(c.get("entered_at")), "entered_at")
    if entered is not None:
        v.entered_at = entered
    v.retracted = _bool(c.get("retracted"), "retracted")
    v.retract_reason = _text(c.get("retract_reason")) or None
    if v.retracted and not v.retract_reason:
        raise InputError("retract_reason: a retracted value needs its reason")
    return v


def _r(x: Optional[float]) -> Optional[float]:
    """A float rounded to 12 significant digits: the matching key of a stored number."""
    return None if x is None else float(f"{x:.12g}")


def _chi_key(v: SusceptibilityValue) -> tuple:
    """What makes two susceptibility rows the same measurement (numbers to 12 digits, date, source)."""
    return ("chi", v.material_id, v.quality, _r(v.chi_si), _r(v.chi_par_si), _r(v.temperature_k), v.measured_on,
            v.source_key, v.source_note or "")


def _magnet_key(v: MagnetValue) -> tuple:
    return ("magnet", v.grade, v.quality, *(_r(getattr(v, k)) for k in _MAGNET_NUM), v.measured_on,
            v.source_key, v.source_note or "")


def _utc(d: Optional[_dt.datetime]) -> Optional[_dt.datetime]:
    if d is None:
        return None
    return d.astimezone(_dt.timezone.utc).replace(tzinfo=None) if d.tzinfo is not None else d


class _Existing:
    """The value rows the database held before the import, indexed for matching.

    Each stored row matches at most one imported row (a value recorded twice is two rows
    and comes back as two), so an export imported into an empty database recreates every
    row and re-importing it adds nothing. Lookups are dictionary hits: the import is linear
    in the number of rows.
    """

    def __init__(self, rows, key_fn, owner_attr: str):
        self.key_fn = key_fn
        self.by_key: dict[tuple, list] = {}
        self.published: dict[tuple, Any] = {}
        for v in rows:
            self.by_key.setdefault(key_fn(v), []).append(v)
            if v.quality != "measured":
                self.published.setdefault((getattr(v, owner_attr), v.source_key), v)
        self.used: set[int] = set()

    def take(self, v, owner: str, entered_given: bool):
        """The stored row that is the same as imported row ``v`` (None: it is new)."""
        cands = [o for o in self.by_key.get(self.key_fn(v), ()) if id(o) not in self.used]
        same = None
        if cands:
            if entered_given:  # an export row: the copy entered at the same moment first
                t = _utc(v.entered_at)
                same = next((o for o in cands if _utc(o.entered_at) == t), None)
            same = same or cands[0]
        elif v.quality != "measured":
            # a published value: the database's own published row for that source wins
            same = self.published.get((owner, v.source_key))
        if same is not None:
            self.used.add(id(same))
        return same


def _plan_value(plan, kind: str, owner: str, v, pref: bool, existing: _Existing, pinned: set,
                entered_given: bool = False) -> None:
    """Plan one imported value row: skip it when the database already holds the same row
    (carrying over a retraction with its reason, or a preference); otherwise plan the
    insert with its own status. ``pinned`` owners already got a preference."""
    same = existing.take(v, owner, entered_given)
    if same is not None:
        plan.skipped += 1
        if v.retracted and not same.retracted and same.quality == "measured":
            plan.retractions.append((same, v.retract_reason))
        if pref and owner not in pinned:
            plan.preferences.append((kind, same))
            pinned.add(owner)
        return
    plan.values.append((kind, v, pref and owner not in pinned))
    if pref:
        pinned.add(owner)


def _plan_import(s: Session, rows: list[tuple[str, dict[str, str]]], label: str) -> _Plan:
    errors: list[str] = []
    plan = _Plan([], [], [], [], [], [], 0)

    def bad(loc: str, exc: Exception) -> None:
        errors.append(f"{loc}: {exc}")

    kinds = {"source": [], "material": [], "grade": [], "chi": [], "magnet": []}
    for loc, c in rows:
        if "__error__" in c:
            errors.append(f"{loc}: {c['__error__']}")
            continue
        rec = (c.get("record") or "chi").strip() or "chi"
        if rec not in kinds:
            errors.append(f"{loc}: record: expected one of {', '.join(kinds)}, got {rec!r}")
            continue
        kinds[rec].append((loc, c))

    source_keys = set(s.exec(select(Source.key)).all()) | {LAB_SOURCE_KEY}
    # strong references: the session's identity map holds rows weakly, so without these every
    # s.get(Material, id) of a row would be a new query (one per imported row)
    held = (s.exec(select(Material)).all(), s.exec(select(MagnetGrade)).all())
    for loc, c in kinds["source"]:
        try:
            key = _text(c.get("id"))
            if not key:
                raise InputError("id: the source key is empty")
            if key in source_keys:
                continue
            kind = _text(c.get("kind"))
            if kind not in SOURCE_KINDS:
                raise InputError(f"kind: expected one of {', '.join(SOURCE_KINDS)}, got {kind!r}")
            cit = _text(c.get("citation"))
            if not cit:
                raise InputError("citation: required")
            year = _num(c.get("year"), "year")
            plan.sources.append(Source(key=key, citation=cit, kind=kind, year=int(year) if year is not None else None,
                                       note=_text(c.get("note"))))
            source_keys.add(key)
        except InputError as exc:
            bad(loc, exc)

    pending: dict[str, _Mat] = {}
    for loc, c in kinds["material"]:
        try:
            mid = _text(c.get("id"))
            if s.get(Material, mid) is not None or mid in pending:
                continue
            if not SLUG_RE.match(mid):
                raise InputError(f"id: expected a lower-case slug, got {mid!r}")
            name = _text(c.get("name"))
            if not name:
                raise InputError("name: required for a new material")
            kind = _text(c.get("kind")) or "diamagnetic"
            if kind not in MATERIAL_KINDS:
                raise InputError(f"kind: expected one of {', '.join(MATERIAL_KINDS)}, got {kind!r}")
            rho = _num(c.get("density_kg_m3"), "density_kg_m3")
            if rho is None or not (RHO_LO <= rho <= RHO_HI):
                raise InputError(f"density_kg_m3: expected {RHO_LO:g} to {RHO_HI:g} kg/m^3, got {c.get('density_kg_m3')!r}")
            mm = _num(c.get("molar_mass_kg_mol"), "molar_mass_kg_mol")
            if mm is not None and mm <= 0:
                raise InputError("molar_mass_kg_mol: expected a positive molar mass")
            dsk = _text(c.get("density_source_key")) or None
            if dsk and dsk not in source_keys:
                raise InputError(f"density_source_key: unknown source {dsk!r}")
            aniso = _bool(c.get("anisotropic"), "anisotropic")
            m = Material(id=mid, name=name, kind=kind, density_kg_m3=rho, molar_mass_kg_mol=mm, anisotropic=aniso,
                         price_usd_per_kg=_num(c.get("price_usd_per_kg"), "price_usd_per_kg"),
                         price_note=_text(c.get("price_note")),
                         price_illustrative=_bool(c.get("price_illustrative"), "price_illustrative", True),
                         density_source_key=dsk, note=_text(c.get("note")),
                         origin=_text(c.get("origin")) or "user")
            plan.materials.append(m)
            pending[mid] = _Mat(mid, name, kind, rho, mm, aniso, new=True)
        except InputError as exc:
            bad(loc, exc)

    pending_grades: set[str] = set()
    for loc, c in kinds["grade"]:
        try:
            gid = _text(c.get("id"))
            if _find_grade(s, gid) is not None or gid in pending_grades:
                continue
            if not GRADE_RE.match(gid):
                raise InputError(f"id: not a grade name: {gid!r}")
            fam = _check_family(c.get("family"), "family")
            plan.grades.append(MagnetGrade(grade=gid, family=fam,
                                           price_usd_per_kg=_num(c.get("price_usd_per_kg"), "price_usd_per_kg"),
                                           price_illustrative=_bool(c.get("price_illustrative"), "price_illustrative", True),
                                           note=_text(c.get("note")), origin=_text(c.get("origin")) or "user"))
            pending_grades.add(gid)
        except InputError as exc:
            bad(loc, exc)

    existing_chi = _Existing(s.exec(select(SusceptibilityValue)).all(), _chi_key, "material_id")
    existing_mag = _Existing(s.exec(select(MagnetValue)).all(), _magnet_key, "grade")
    pinned_materials: set[str] = set()
    for loc, c in kinds["chi"]:
        try:
            mid = (_text(c.get("material_id")) or _text(c.get("id"))).lower()
            if not mid:
                raise InputError("material_id: empty")
            mat = _resolve_material(s, mid, {"name": c.get("name"), "density": c.get("density"),
                                             "molar_mass": c.get("molar_mass"), "chi": c.get("chi"),
                                             "chi_perp": c.get("chi_perp"), "chi_par": c.get("chi_par"),
                                             "allow_paramagnetic": _bool(c.get("allow_paramagnetic"), "allow_paramagnetic")},
                                    {**{k: k for k in CLI_LABELS}, "name": "name", "density": "density"}, pending)
            if mat.new and mid not in pending:
                pending[mid] = mat
                plan.materials.append(Material(id=mat.id, name=mat.name, kind=mat.kind, density_kg_m3=mat.density,
                                               molar_mass_kg_mol=mat.molar_mass, anisotropic=mat.anisotropic,
                                               origin="user", price_illustrative=True))
            v = _row_chi(s, c, mat, source_keys)
            pref = _bool(c.get("preference_set"), "preference_set")
            _plan_value(plan, "material", mid, v, pref, existing_chi, pinned_materials,
                        entered_given=bool(_text(c.get("entered_at"))))
        except InputError as exc:
            bad(loc, exc)

    pinned_grades: set[str] = set()
    for loc, c in kinds["magnet"]:
        try:
            gid = _text(c.get("grade")) or _text(c.get("id"))
            g = _find_grade(s, gid)
            name = g.grade if g is not None else gid
            if g is None and gid not in pending_grades:
                raise InputError(f"id: unknown magnet grade {gid!r} (add a grade row for it)")
            v = _row_magnet(c, name, source_keys)
            pref = _bool(c.get("preference_set"), "preference_set")
            _plan_value(plan, "magnet", name, v, pref, existing_mag, pinned_grades,
                        entered_given=bool(_text(c.get("entered_at"))))
        except InputError as exc:
            bad(loc, exc)

    del held
    if errors:
        n = len(errors)
        raise InputError(f"{label}: {n} bad row{'s' if n > 1 else ''}, nothing imported: " + "; ".join(errors))
    return plan


def import_file(path: Any, *, dry_run: bool = False, url: Optional[str] = None) -> dict:
    """Import measured values (and any new materials, grades, sources) from a CSV or export JSON.

    Every row is validated first; one bad row rejects the file (every bad row named) and
    nothing is written. Rows already in the database are skipped, so re-importing is safe.
    Returns counts: ``added``, ``already_present``, ``materials_added``, ``grades_added``,
    ``sources_added``, ``retracted``, ``preferences_set``.
    """
    p = Path(_text(path))
    rows, _fmt = _read_rows(p)
    with session_scope(url) as s:
        plan = _plan_import(s, rows, p.name)
        summary = {"file": str(p), "rows": len(rows), "added": len(plan.values),
                   "already_present": plan.skipped, "materials_added": len(plan.materials),
                   "grades_added": len(plan.grades), "sources_added": len(plan.sources),
                   "retracted": len(plan.retractions), "preferences_set": 0, "dry_run": dry_run}
        if dry_run:
            s.rollback()
            return summary
        if any(v.source_key == LAB_SOURCE_KEY for _, v, _ in plan.values):
            if not any(x.key == LAB_SOURCE_KEY for x in plan.sources):
                _ensure_lab_source(s)
        for x in plan.sources:
            s.add(x)
        s.flush()
        for m in plan.materials:
            s.add(m)
        for g in plan.grades:
            s.add(g)
        s.flush()
        pins: list[tuple[str, Any]] = []
        for i, (kind, v, pref) in enumerate(plan.values, start=1):
            s.add(v)  # inserted in batches (executemany), not one flush per row
            if i % 2000 == 0:
                s.flush()
            _pause_hook(i, s)
            if pref:
                pins.append((kind, v))
        s.flush()
        for v, why in plan.retractions:
            v.retracted = True
            v.retract_reason = why
            s.add(v)
        pins += plan.preferences
        for kind, v in pins:
            owner = s.get(Material, v.material_id) if kind == "material" else s.get(MagnetGrade, v.grade)
            if owner is not None and owner.preferred_value_id is None and not v.retracted:
                owner.preferred_value_id = v.id
                s.add(owner)
                summary["preferences_set"] += 1
    return summary


import_csv = import_file
