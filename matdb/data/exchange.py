"""Lab values in and out of files: CSV and JSON export, and the import that reads them back.

:func:`export` writes every source, material, grade and value with its provenance;
:func:`import_file` reads that file (or a plain measured-value CSV typed in a spreadsheet)
back, checking every row first: one bad row rejects the file, naming every bad row, and
nothing is written. Rows the database already holds are skipped, so an export re-imported
adds nothing and an export imported into an empty database recreates every row. Text cells
are escaped for spreadsheets by the one escaper, :func:`matdb.output.escape_cell`.
"""

from __future__ import annotations

import csv
import datetime as _dt
import io
import json
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Optional

from sqlmodel import Session, select

from matdb.data import catalog
from matdb.data.db import read_session, session_scope
from matdb.data.lab_input import (
    GRADE_RE,
    LAB_SOURCE_KEY,
    SLUG_RE,
    MaterialFacts,
    build_chi_value,
    check_br,
    check_density,
    check_hcj,
    check_measured_chi,
    check_sign,
    check_uncertainty,
    given,
    optional_number,
    parse_alpha,
    parse_bool,
    parse_br,
    parse_date,
    parse_entered,
    parse_hcj,
    parse_max_temp_c,
    require_source,
    text_of,
)
from matdb.data.lab_store import ensure_lab_source, find_grade, resolve_material
from matdb.data.models import (
    MATERIAL_KINDS,
    QUALITY_CLASSES,
    SOURCE_KINDS,
    MagnetGrade,
    MagnetValue,
    Material,
    Source,
    SusceptibilityValue,
)
from matdb.errors import InputError
from matdb.limits import MAX_IMPORT_BYTES, MAX_IMPORT_ROWS, check_count, check_nesting, read_text_limited
from matdb.output import escape_cell, unescape_cell
from matdb.progress import ProgressFn
from matdb.units import parse_convention, parse_density, parse_number

BATCH_ROWS = 2000  # value rows inserted per flush (executemany) by the import


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
        raise InputError(f"expected csv or json, got {fmt!r}", field="format")
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
        raise InputError(f"{label}: expected a matdb JSON export (an object with \"format\": \"matdb-export\")")
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


def _kind_and_source(c: dict[str, str], source_keys: set[str]) -> tuple[str, str]:
    """(value_kind, source_key) of an imported value row; a measured row cites ``lab``."""
    quality = c.get("value_kind", "").strip() or "measured"
    if quality not in QUALITY_CLASSES:
        raise InputError(f"expected one of {', '.join(QUALITY_CLASSES)}, got {quality!r}", field="value_kind")
    skey = c.get("source_key", "").strip() or (LAB_SOURCE_KEY if quality == "measured" else "")
    if not skey:
        raise InputError("required for a published value", field="source_key")
    if skey not in source_keys:
        raise InputError(f"unknown source {skey!r}", field="source_key")
    return quality, skey


def _with_status(v, c: dict[str, str]):
    """Value row ``v`` with the entry time and retraction of its imported cells ``c``."""
    entered = parse_entered(text_of(c.get("entered_at")), "entered_at")
    if entered is not None:
        v.entered_at = entered
    v.retracted = parse_bool(c.get("retracted"), "retracted")
    v.retract_reason = text_of(c.get("retract_reason")) or None
    if v.retracted and not v.retract_reason:
        raise InputError("a retracted value needs its reason", field="retract_reason")
    return v


def _row_chi(s: Session, c: dict[str, str], mat: MaterialFacts, source_keys: set[str]) -> SusceptibilityValue:
    quality, skey = _kind_and_source(c, source_keys)
    allow = parse_bool(c.get("allow_paramagnetic"), "allow_paramagnetic")
    if given(c.get("chi_si")):
        chi = parse_number(c["chi_si"], "chi_si")
        perp = optional_number(c.get("chi_perp_si"), "chi_perp_si")
        par = optional_number(c.get("chi_par_si"), "chi_par_si")
        if perp is not None and not _close_enough(perp, chi):
            raise InputError("must equal chi_si (chi_si is the value along the c axis)", field="chi_perp_si")
        if mat.anisotropic and par is None:
            raise InputError(f"{mat.id} is anisotropic: the in-plane value is needed", field="chi_par_si")
        if not mat.anisotropic and par is not None:
            raise InputError(f"{mat.id} is isotropic", field="chi_par_si")
        for val, lab in ((chi, "chi_si"), (par, "chi_par_si")):
            if val is not None:
                check_measured_chi(val, lab, val)
                check_sign(mat, val, lab, allow)
        conv = c.get("convention", "").strip() or "si-volume"
        conv = parse_convention(conv, "convention")
        pub = optional_number(c.get("value_published"), "value_published")
        unc = optional_number(c.get("uncertainty_si"), "uncertainty_si")
        if unc is not None:
            check_uncertainty(unc, "uncertainty_si")
        t_k = optional_number(c.get("temperature_k"), "temperature_k")
        if t_k is not None and t_k <= 0:
            raise InputError(f"expected a temperature above 0 K, got {t_k!r}", field="temperature_k")
        rho = optional_number(c.get("density_kg_m3"), "density_kg_m3")
        if rho is not None:
            check_density(rho, "density_kg_m3")
        if quality == "measured":
            require_source(c.get("source"), "source")
        v = SusceptibilityValue(
            material_id=mat.id, value_published=pub if pub is not None else chi,
            value_par_published=optional_number(c.get("value_par_published"), "value_par_published"),
            convention=conv if pub is not None else "si-volume", chi_si=chi,
            chi_perp_si=chi if par is not None else None, chi_par_si=par, temperature_k=t_k,
            uncertainty_si=unc, temp_coeff_per_k=optional_number(c.get("temp_coeff_per_k"), "temp_coeff_per_k"),
            density_kg_m3=rho, quality=quality, source_key=skey, source_note=text_of(c.get("source")),
            note=text_of(c.get("note")), measured_by=text_of(c.get("measured_by")) or None,
            measured_on=parse_date(c.get("date"), "date"), method=text_of(c.get("method")) or None)
    else:
        if quality != "measured":
            raise InputError("a published value needs chi_si", field="chi_si")
        f = {k: c.get(k) for k in ("chi", "chi_perp", "chi_par", "temperature", "uncertainty", "source",
                                   "measured_by", "date", "method", "molar_mass", "note", "convention")}
        f["density"] = c.get("density")
        f["allow_paramagnetic"] = allow
        v = build_chi_value(mat, f, source_key=skey)
    return _with_status(v, c)


def _row_magnet(c: dict[str, str], grade: str, source_keys: set[str]) -> MagnetValue:
    quality, skey = _kind_and_source(c, source_keys)
    if quality == "measured":
        require_source(c.get("source"), "source")
    vals = {k: optional_number(c.get(k), k) for k in _MAGNET_NUM}
    if given(c.get("br")):
        vals["br_t"] = parse_br(c["br"], "br")
    if given(c.get("hcj")):
        vals["hcj_ka_m"] = parse_hcj(c["hcj"], "hcj")
    if given(c.get("alpha")):
        vals["alpha_br_pct_per_k"] = parse_alpha(c["alpha"], "alpha")
    if given(c.get("max_temp")):
        vals["max_temp_c"] = parse_max_temp_c(c["max_temp"], "max_temp")
    if given(c.get("density")):
        vals["density_kg_m3"] = parse_density(text_of(c["density"]), "density")
    for col, check in (("br_t", check_br), ("hcj_ka_m", check_hcj), ("density_kg_m3", check_density)):
        if vals[col] is not None:
            check(vals[col], col)
    if all(v is None for v in vals.values()):
        raise InputError("no property given", field="br_t")
    v = MagnetValue(grade=grade, quality=quality, source_key=skey, source_note=text_of(c.get("source")),
                    note=text_of(c.get("note")), measured_by=text_of(c.get("measured_by")) or None,
                    measured_on=parse_date(c.get("date"), "date"), method=text_of(c.get("method")) or None, **vals)
    return _with_status(v, c)


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
            key = text_of(c.get("id"))
            if not key:
                raise InputError("the source key is empty", field="id")
            if key in source_keys:
                continue
            kind = text_of(c.get("kind"))
            if kind not in SOURCE_KINDS:
                raise InputError(f"expected one of {', '.join(SOURCE_KINDS)}, got {kind!r}", field="kind")
            cit = text_of(c.get("citation"))
            if not cit:
                raise InputError("required", field="citation")
            year = optional_number(c.get("year"), "year")
            plan.sources.append(Source(key=key, citation=cit, kind=kind, year=int(year) if year is not None else None,
                                       note=text_of(c.get("note"))))
            source_keys.add(key)
        except InputError as exc:
            bad(loc, exc)

    pending: dict[str, MaterialFacts] = {}
    for loc, c in kinds["material"]:
        try:
            mid = text_of(c.get("id"))
            if s.get(Material, mid) is not None or mid in pending:
                continue
            if not SLUG_RE.match(mid):
                raise InputError(f"expected a lower-case slug, got {mid!r}", field="id")
            name = text_of(c.get("name"))
            if not name:
                raise InputError("required for a new material", field="name")
            kind = text_of(c.get("kind")) or "diamagnetic"
            if kind not in MATERIAL_KINDS:
                raise InputError(f"expected one of {', '.join(MATERIAL_KINDS)}, got {kind!r}", field="kind")
            rho = optional_number(c.get("density_kg_m3"), "density_kg_m3")
            if rho is None:
                raise InputError("density_kg_m3: required for a new material")
            check_density(rho, "density_kg_m3")
            mm = optional_number(c.get("molar_mass_kg_mol"), "molar_mass_kg_mol")
            if mm is not None and mm <= 0:
                raise InputError("expected a positive molar mass", field="molar_mass_kg_mol")
            dsk = text_of(c.get("density_source_key")) or None
            if dsk and dsk not in source_keys:
                raise InputError(f"unknown source {dsk!r}", field="density_source_key")
            aniso = parse_bool(c.get("anisotropic"), "anisotropic")
            m = Material(id=mid, name=name, kind=kind, density_kg_m3=rho, molar_mass_kg_mol=mm, anisotropic=aniso,
                         price_usd_per_kg=optional_number(c.get("price_usd_per_kg"), "price_usd_per_kg"),
                         price_note=text_of(c.get("price_note")),
                         price_illustrative=parse_bool(c.get("price_illustrative"), "price_illustrative", True),
                         density_source_key=dsk, note=text_of(c.get("note")),
                         origin=text_of(c.get("origin")) or "user")
            plan.materials.append(m)
            pending[mid] = MaterialFacts(mid, name, kind, rho, mm, aniso, new=True)
        except InputError as exc:
            bad(loc, exc)

    pending_grades: set[str] = set()
    for loc, c in kinds["grade"]:
        try:
            gid = text_of(c.get("id"))
            if find_grade(s, gid) is not None or gid in pending_grades:
                continue
            if not GRADE_RE.match(gid):
                raise InputError(f"not a grade name: {gid!r}", field="id")
            fam = catalog.check_family(c.get("family"), "family")
            plan.grades.append(MagnetGrade(grade=gid, family=fam,
                                           price_usd_per_kg=optional_number(c.get("price_usd_per_kg"), "price_usd_per_kg"),
                                           price_illustrative=parse_bool(c.get("price_illustrative"), "price_illustrative", True),
                                           note=text_of(c.get("note")), origin=text_of(c.get("origin")) or "user"))
            pending_grades.add(gid)
        except InputError as exc:
            bad(loc, exc)

    existing_chi = _Existing(s.exec(select(SusceptibilityValue)).all(), _chi_key, "material_id")
    existing_mag = _Existing(s.exec(select(MagnetValue)).all(), _magnet_key, "grade")
    pinned_materials: set[str] = set()
    for loc, c in kinds["chi"]:
        try:
            mid = (text_of(c.get("material_id")) or text_of(c.get("id"))).lower()
            if not mid:
                raise InputError("empty", field="material_id")
            mat = resolve_material(s, mid, {"name": c.get("name"), "density": c.get("density"),
                                             "molar_mass": c.get("molar_mass"), "chi": c.get("chi"),
                                             "chi_perp": c.get("chi_perp"), "chi_par": c.get("chi_par"),
                                             "allow_paramagnetic": parse_bool(c.get("allow_paramagnetic"), "allow_paramagnetic")},
                                    pending)
            if mat.new and mid not in pending:
                pending[mid] = mat
                plan.materials.append(mat.to_row())
            v = _row_chi(s, c, mat, source_keys)
            pref = parse_bool(c.get("preference_set"), "preference_set")
            _plan_value(plan, "material", mid, v, pref, existing_chi, pinned_materials,
                        entered_given=bool(text_of(c.get("entered_at"))))
        except InputError as exc:
            bad(loc, exc)

    pinned_grades: set[str] = set()
    for loc, c in kinds["magnet"]:
        try:
            gid = text_of(c.get("grade")) or text_of(c.get("id"))
            g = find_grade(s, gid)
            name = g.grade if g is not None else gid
            if g is None and gid not in pending_grades:
                raise InputError(f"unknown magnet grade {gid!r} (add a grade row for it)", field="id")
            v = _row_magnet(c, name, source_keys)
            pref = parse_bool(c.get("preference_set"), "preference_set")
            _plan_value(plan, "magnet", name, v, pref, existing_mag, pinned_grades,
                        entered_given=bool(text_of(c.get("entered_at"))))
        except InputError as exc:
            bad(loc, exc)

    del held
    if errors:
        n = len(errors)
        raise InputError(f"{label}: {n} bad row{'s' if n > 1 else ''}, nothing imported: " + "; ".join(errors))
    return plan


def import_file(path: Any, *, dry_run: bool = False, url: Optional[str] = None,
                progress: Optional[ProgressFn] = None) -> dict:
    """Import measured values (and any new materials, grades, sources) from a CSV or export JSON.

    Every row is validated first; one bad row rejects the file (every bad row named) and
    nothing is written. Rows already in the database are skipped, so re-importing is safe.
    Returns counts: ``added``, ``already_present``, ``materials_added``, ``grades_added``,
    ``sources_added``, ``retracted``, ``preferences_set``. ``progress(fraction, text)`` is
    called after each batch of :data:`BATCH_ROWS` value rows is written (before the commit).
    """
    p = Path(text_of(path))
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
                ensure_lab_source(s)
        for x in plan.sources:
            s.add(x)
        s.flush()
        for m in plan.materials:
            s.add(m)
        for g in plan.grades:
            s.add(g)
        s.flush()
        pins: list[tuple[str, Any]] = []
        n = len(plan.values)
        for i, (kind, v, pref) in enumerate(plan.values, start=1):
            s.add(v)  # inserted in batches (executemany), not one flush per row
            if pref:
                pins.append((kind, v))
            if i % BATCH_ROWS == 0 or i == n:
                s.flush()  # the rows are in the database, inside the still open transaction
                if progress is not None:
                    progress(i / n, f"{i} of {n} rows written")
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

