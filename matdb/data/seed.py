"""Load ``seed_data/*.csv`` into the database.

All rows of all files are parsed and validated first; a bad row raises
:class:`~matdb.errors.DataError` naming the file, the line and the field, and nothing is
written. The write is one transaction. Seeding is idempotent: published rows are matched
by their natural key (material + source, grade + source) and updated in place, so value
ids stay stable and lab-measured rows are never touched.
"""

from __future__ import annotations

import csv
import math
import os
from dataclasses import dataclass, field
from importlib.resources import files
from pathlib import Path

from sqlalchemy.engine import Engine
from sqlmodel import Session, select

from matdb.errors import DataError, InputError
from matdb.data.models import (
    AXES,
    FAMILIES,
    MATERIAL_KINDS,
    QUALITY_CLASSES,
    ConductivityValue,
    MagnetGrade,
    PROVENANCE_STATUSES,
    SOURCE_KINDS,
    MagnetValue,
    Material,
    PropertyValue,
    Source,
    SusceptibilityValue,
    ValueProvenance,
)
from matdb.constants import celsius_to_kelvin
from matdb.data.lab_input import SLUG_RE, check_br, check_chi_magnitude, check_density, check_hcj, check_temp_coeff
from matdb.units import CONVENTIONS, chi_to_si_volume, quantity


FILES = {
    "sources": "sources.csv",
    "materials": "materials.csv",
    "susceptibilities": "susceptibilities.csv",
    "grades": "magnet_grades.csv",
    "provenance": "provenance.csv",
    "properties": "properties.csv",
    "conductivities": "conductivities.csv",
}
OPTIONAL_FILES = ("conductivities", "provenance", "properties")  # a seed folder without them loads

COLUMNS = {
    "sources": ["key", "citation", "kind", "year", "note"],
    "materials": [
        "id", "name", "kind", "density_kg_m3", "molar_mass_g_mol", "anisotropic",
        "price_usd_per_kg", "price_note", "density_source_key", "note",
    ],
    "susceptibilities": [
        "material_id", "axis", "value_published", "convention", "temperature_c",
        "uncertainty_published", "temp_coeff_per_k", "quality", "source_key", "note",
    ],
    "grades": [
        "grade", "family", "br_t", "br_min_t", "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3",
        "alpha_br_pct_per_k", "beta_hcj_pct_per_k", "max_temp_c", "mu_rec", "density_kg_m3",
        "price_usd_per_kg", "quality", "source_key", "note",
    ],
    "provenance": ["value_id", "field", "status", "source_key", "locator", "sources_tried", "note"],
    "properties": [
        "subject_kind", "subject_id", "property", "axis", "value_published", "unit_published",
        "temperature_c", "status", "quality", "source_key", "locator", "sources_tried", "note",
    ],
    "conductivities": [
        "material_id", "sigma_in_plane_s_m", "sigma_across_s_m", "temperature_c", "quality",
        "source_key", "note",
    ],
}

#: Checked numbers per kind of value row (``value_id`` prefix in provenance.csv).
PROVENANCE_FIELDS = {
    "chi": ("value_published", "value_par_published", "temperature_c", "uncertainty_published",
            "temp_coeff_per_k"),
    "grade": ("br_t", "br_min_t", "hcb_ka_m", "hcj_ka_m", "bhmax_kj_m3", "alpha_br_pct_per_k",
              "beta_hcj_pct_per_k", "max_temp_c", "mu_rec", "density_kg_m3"),
    "material": ("density_kg_m3", "molar_mass_g_mol"),
    "sigma": ("sigma_in_plane_s_m", "sigma_across_s_m"),
}
#: ``value_kind`` stored in the database for each ``value_id`` prefix.
VALUE_KIND_OF_PREFIX = {"chi": "chi", "grade": "magnet", "material": "material", "prop": "property",
                        "sigma": "conductivity"}

#: Further properties (properties.csv): SI unit each is stored in. Axes: ``iso``; for
#: materials ``perp`` = along the c axis (normal to the basal plane / plate), ``par`` = in
#: the plane; for magnet families ``par`` = along the magnetisation, ``perp`` = across it.
PROPERTY_UNITS = {
    "resistivity": "ohm * m",
    "thermal_expansion": "1 / K",
    "chi_temp_coeff": "1 / K",
    "alpha_br": "1 / K",
    "beta_hcj": "1 / K",
    "max_working_temp": "K",
    "recoil_permeability": "dimensionless",
}
SUBJECT_KINDS = ("material", "family", "grade")


def seed_dir() -> Path:
    """Folder holding the seed CSV files (``MATDB_SEED_DIR`` overrides)."""
    env = os.environ.get("MATDB_SEED_DIR")
    if env:
        return Path(env)
    here = Path(__file__).resolve().parent
    for cand in (here.parent.parent / "seed_data", here.parent / "seed_data"):
        if (cand / FILES["sources"]).exists():
            return cand
    try:
        p = Path(str(files("matdb.seed_data")))
        if (p / FILES["sources"]).exists():
            return p
    except Exception:
        pass
    raise DataError("seed_data: folder with sources.csv not found (set MATDB_SEED_DIR)")


# ---------------------------------------------------------------------------
# row parsing
# ---------------------------------------------------------------------------
class _Row:
    def __init__(self, fname: str, line: int, data: dict[str, str]):
        self.fname, self.line, self.data = fname, line, data

    def err(self, fld: str, msg: str) -> DataError:
        return DataError(f"{self.fname}:{self.line}: {fld}: {msg}")

    def check(self, check_fn, value, fld: str) -> None:
        """Run a shared plausibility check (:mod:`matdb.data.lab_input`) on ``value``; its
        one-line error gets this row's file and line."""
        try:
            check_fn(value, fld)
        except InputError as exc:
            raise DataError(f"{self.fname}:{self.line}: {exc}") from None

    def text(self, fld: str, required: bool = True) -> str:
        v = (self.data.get(fld) or "").strip()
        if required and not v:
            raise self.err(fld, "required value is empty")
        return v

    def num(self, fld: str, required: bool = False) -> float | None:
        v = (self.data.get(fld) or "").strip()
        if not v:
            if required:
                raise self.err(fld, "required number is empty")
            return None
        try:
            x = float(v)
        except ValueError:
            raise self.err(fld, f"expected a plain number, got {v!r}") from None
        if not math.isfinite(x):
            raise self.err(fld, f"expected a finite number, got {v!r}")
        return x

    def choice(self, fld: str, allowed) -> str:
        v = self.text(fld)
        if v not in allowed:
            raise self.err(fld, f"expected one of {', '.join(allowed)}, got {v!r}")
        return v

    def boolean(self, fld: str) -> bool:
        v = self.text(fld).lower()
        if v in ("true", "yes", "1"):
            return True
        if v in ("false", "no", "0"):
            return False
        raise self.err(fld, f"expected true or false, got {v!r}")


def _read_csv(folder: Path, kind: str) -> list[_Row]:
    fname = FILES[kind]
    path = folder / fname
    if not path.exists() and kind in OPTIONAL_FILES:
        return []
    if not path.exists():
        raise DataError(f"{fname}: file missing in {folder}")
    try:
        text = path.read_text(encoding="utf-8")
    except UnicodeDecodeError as exc:
        raise DataError(f"{fname}: not UTF-8 text ({exc.reason} at byte {exc.start})") from None
    reader = csv.reader(text.splitlines())
    try:
        header = [h.strip() for h in next(reader)]
    except StopIteration:
        raise DataError(f"{fname}:1: header row missing") from None
    missing = [c for c in COLUMNS[kind] if c not in header]
    if missing:
        raise DataError(f"{fname}:1: missing columns {', '.join(missing)}")
    if len(set(header)) != len(header):
        raise DataError(f"{fname}:1: duplicated column names in header")
    rows = []
    for i, cells in enumerate(reader, start=2):
        if not cells or all(not c.strip() for c in cells):
            continue
        if cells[0].lstrip().startswith("#"):
            continue
        if len(cells) != len(header):
            raise DataError(f"{fname}:{i}: expected {len(header)} cells, found {len(cells)}")
        rows.append(_Row(fname, i, dict(zip(header, cells))))
    return rows


@dataclass
class SeedSet:
    sources: list[Source] = field(default_factory=list)
    materials: list[Material] = field(default_factory=list)
    chi_values: list[SusceptibilityValue] = field(default_factory=list)
    grades: list[MagnetGrade] = field(default_factory=list)
    magnet_values: list[MagnetValue] = field(default_factory=list)
    properties: list[PropertyValue] = field(default_factory=list)
    #: one dict per checked number: value_kind, owner_id, field, status, source_key, locator,
    #: sources_tried, note (the value row id is filled in when written)
    provenance: list[dict] = field(default_factory=list)
    conductivities: list[ConductivityValue] = field(default_factory=list)


def parse_seed(folder: Path | None = None) -> SeedSet:
    """Parse and validate every seed file; raise DataError at the first bad row."""
    folder = Path(folder) if folder else seed_dir()
    out = SeedSet()
    keys: set[str] = set()
    for r in _read_csv(folder, "sources"):
        key = r.text("key")
        if key in keys:
            raise r.err("key", f"duplicate source key {key!r}")
        keys.add(key)
        year = r.num("year")
        out.sources.append(
            Source(key=key, citation=r.text("citation"), kind=r.choice("kind", SOURCE_KINDS),
                   year=int(year) if year is not None else None, note=r.text("note", False))
        )

    mats: dict[str, Material] = {}
    for r in _read_csv(folder, "materials"):
        mid = r.text("id")
        if not SLUG_RE.match(mid):
            raise r.err("id", f"expected a lower-case slug such as 'pyrolytic-graphite', got {mid!r}")
        if mid in mats:
            raise r.err("id", f"duplicate material id {mid!r}")
        rho = r.num("density_kg_m3", required=True)
        r.check(check_density, rho, "density_kg_m3")
        mm = r.num("molar_mass_g_mol")
        if mm is not None and mm <= 0:
            raise r.err("molar_mass_g_mol", "expected a positive molar mass")
        dsk = r.text("density_source_key", False) or None
        if dsk and dsk not in keys:
            raise r.err("density_source_key", f"unknown source key {dsk!r}")
        price = r.num("price_usd_per_kg")
        if price is not None and price < 0:
            raise r.err("price_usd_per_kg", "expected a price of zero or more")
        mats[mid] = Material(
            id=mid, name=r.text("name"), kind=r.choice("kind", MATERIAL_KINDS), density_kg_m3=rho,
            molar_mass_kg_mol=mm / 1000.0 if mm is not None else None,
            anisotropic=r.boolean("anisotropic"), price_usd_per_kg=price,
            price_note=r.text("price_note", False), price_illustrative=True,
            density_source_key=dsk, note=r.text("note", False), origin="seed",
        )
    out.materials = list(mats.values())

    # susceptibilities: iso rows -> one value; perp + par rows with one source -> one value
    grouped: dict[tuple[str, str], dict[str, tuple[_Row, float, float, float | None]]] = {}
    order: list[tuple[str, str]] = []
    for r in _read_csv(folder, "susceptibilities"):
        mid = r.text("material_id")
        if mid not in mats:
            raise r.err("material_id", f"unknown material {mid!r} (not in materials.csv)")
        m = mats[mid]
        axis = r.choice("axis", AXES)
        if m.anisotropic and axis == "iso":
            raise r.err("axis", f"{mid} is anisotropic: give perp and par rows")
        if not m.anisotropic and axis != "iso":
            raise r.err("axis", f"{mid} is isotropic: axis must be iso")
        conv = r.choice("convention", CONVENTIONS)
        val = r.num("value_published", required=True)
        skey = r.text("source_key")
        if skey not in keys:
            raise r.err("source_key", f"unknown source key {skey!r}")
        try:
            chi = chi_to_si_volume(val, conv, m.density_kg_m3, m.molar_mass_kg_mol)
            unc = r.num("uncertainty_published")
            unc_si = abs(chi_to_si_volume(unc, conv, m.density_kg_m3, m.molar_mass_kg_mol)) if unc is not None else None
        except InputError as exc:
            raise r.err("convention", str(exc)) from None
        r.check(check_chi_magnitude, chi, "value_published")
        if m.kind == "diamagnetic" and chi >= 0:
            raise r.err("value_published", f"{mid} is diamagnetic but chi = {chi:.3g} >= 0")
        if m.kind == "paramagnetic" and chi <= 0:
            raise r.err("value_published", f"{mid} is paramagnetic but chi = {chi:.3g} <= 0")
        g = (mid, skey)
        if g not in grouped:
            grouped[g] = {}
            order.append(g)
        if axis in grouped[g]:
            raise r.err("axis", f"two {axis} rows for {mid} from source {skey}")
        grouped[g][axis] = (r, val, chi, unc_si)
    for g in order:
        mid, skey = g
        parts = grouped[g]
        m = mats[mid]
        if m.anisotropic:
            if "perp" not in parts or "par" not in parts:
                r0 = next(iter(parts.values()))[0]
                raise r0.err("axis", f"{mid} needs both perp and par rows from source {skey}")
            main, par = parts["perp"], parts["par"]
        else:
            main, par = parts["iso"], None
        r = main[0]
        tc = r.num("temperature_c")
        out.chi_values.append(
            SusceptibilityValue(
                material_id=mid, value_published=main[1],
                value_par_published=par[1] if par else None,
                convention=r.text("convention"), chi_si=main[2],
                chi_perp_si=main[2] if par else None, chi_par_si=par[2] if par else None,
                temperature_k=celsius_to_kelvin(tc) if tc is not None else None,
                uncertainty_si=main[3], temp_coeff_per_k=r.num("temp_coeff_per_k"),
                quality=r.choice("quality", [q for q in QUALITY_CLASSES if q != "measured"]),
                source_key=skey, note=r.text("note", False)
                + (("; in-plane: " + par[0].text("note", False)) if par and par[0].text("note", False) else ""),
            )
        )
    with_values = {v.material_id for v in out.chi_values}
    for m in out.materials:
        if m.id not in with_values:
            raise DataError(f"materials.csv: {m.id}: no susceptibility row in susceptibilities.csv")

    seen_grades: set[str] = set()
    for r in _read_csv(folder, "grades"):
        grade = r.text("grade")
        if grade in seen_grades:
            raise r.err("grade", f"duplicate grade {grade!r}")
        seen_grades.add(grade)
        fam = r.choice("family", FAMILIES)
        skey = r.text("source_key")
        if skey not in keys:
            raise r.err("source_key", f"unknown source key {skey!r}")
        vals = {c: r.num(c) for c in COLUMNS["grades"][2:13]}
        for req in ("br_t", "hcj_ka_m", "alpha_br_pct_per_k", "max_temp_c", "density_kg_m3"):
            if vals[req] is None:
                raise r.err(req, "required number is empty")
        r.check(check_br, vals["br_t"], "br_t")
        if vals["br_min_t"] is not None and vals["br_min_t"] > vals["br_t"]:
            raise r.err("br_min_t", "minimum Br above nominal Br")
        r.check(check_hcj, vals["hcj_ka_m"], "hcj_ka_m")
        r.check(check_density, vals["density_kg_m3"], "density_kg_m3")
        for coef in ("alpha_br_pct_per_k", "beta_hcj_pct_per_k"):
            if vals[coef] is not None:
                r.check(check_temp_coeff, vals[coef], coef)
        price = vals.pop("price_usd_per_kg")
        out.grades.append(MagnetGrade(grade=grade, family=fam, price_usd_per_kg=price,
                                      price_illustrative=True, note=r.text("note", False), origin="seed"))
        out.magnet_values.append(
            MagnetValue(grade=grade, quality=r.choice("quality", [q for q in QUALITY_CLASSES if q != "measured"]),
                        source_key=skey, note=r.text("note", False), **vals)
        )

    seen_sigma: set[tuple[str, str]] = set()
    for r in _read_csv(folder, "conductivities"):
        mid = r.text("material_id")
        if mid not in mats:
            raise r.err("material_id", f"unknown material {mid!r} (not in materials.csv)")
        skey = r.text("source_key")
        if skey not in keys:
            raise r.err("source_key", f"unknown source key {skey!r}")
        if (mid, skey) in seen_sigma:
            raise r.err("source_key", f"two conductivity rows for {mid} from source {skey}")
        seen_sigma.add((mid, skey))
        s_ab = r.num("sigma_in_plane_s_m", required=True)
        s_c = r.num("sigma_across_s_m", required=True)
        for col, v in (("sigma_in_plane_s_m", s_ab), ("sigma_across_s_m", s_c)):
            if not (0 <= v <= 1e9):
                raise r.err(col, f"expected a conductivity from 0 to 1e9 S/m, got {v}")
        if not mats[mid].anisotropic and s_ab != s_c:
            raise r.err("sigma_across_s_m", f"{mid} is isotropic: give the same value twice")
        tc = r.num("temperature_c")
        out.conductivities.append(ConductivityValue(
            material_id=mid, sigma_in_plane_s_m=s_ab, sigma_across_s_m=s_c,
            temperature_k=celsius_to_kelvin(tc) if tc is not None else None,
            quality=r.choice("quality", [q for q in QUALITY_CLASSES if q != "measured"]),
            source_key=skey, note=r.text("note", False)))
    _parse_properties(folder, out, keys, set(mats), seen_grades)
    _parse_provenance(folder, out, keys)
    return out


def _status_fields(r: _Row, keys: set[str], source_field: str = "source_key") -> dict:
    """status, source_key, locator, sources_tried of a checked number (one CSV row)."""
    status = r.choice("status", PROVENANCE_STATUSES)
    skey = r.text(source_field, False) or None
    if skey is not None and skey not in keys:
        raise r.err(source_field, f"unknown source key {skey!r}")
    locator = r.text("locator", False)
    tried = r.text("sources_tried", False)
    if status in ("verified", "corrected"):
        if not locator:
            raise r.err("locator", f"a {status} value needs a locator (table, page or DOI and table)")
        if skey is None:
            raise r.err(source_field, f"a {status} value needs the key of the source it was checked against")
    elif not tried:
        raise r.err("sources_tried", "an unverified value says which sources were tried")
    return {"status": status, "source_key": skey, "locator": locator, "sources_tried": tried,
            "note": r.text("note", False)}


def property_key(subject_id: str, prop: str, axis: str) -> str:
    return f"{subject_id}:{prop}" + ("" if axis == "iso" else f":{axis}")


def _parse_properties(folder: Path, out: SeedSet, keys: set[str], material_ids: set[str],
                      grade_ids: set[str]) -> None:
    seen: set[str] = set()
    for r in _read_csv(folder, "properties"):
        kind = r.choice("subject_kind", SUBJECT_KINDS)
        sid = r.text("subject_id")
        if kind == "material" and sid not in material_ids:
            raise r.err("subject_id", f"unknown material {sid!r} (not in materials.csv)")
        if kind == "family" and sid not in FAMILIES:
            raise r.err("subject_id", f"expected one of {', '.join(FAMILIES)}, got {sid!r}")
        if kind == "grade" and sid not in grade_ids:
            raise r.err("subject_id", f"unknown grade {sid!r} (not in magnet_grades.csv)")
        prop = r.choice("property", tuple(PROPERTY_UNITS))
        axis = r.choice("axis", AXES)
        val = r.num("value_published", required=True)
        unit = r.text("unit_published")
        try:
            if PROPERTY_UNITS[prop] == "K" and unit in ("degC", "C", "°C"):
                si = celsius_to_kelvin(val)
            else:
                si = float(quantity(val, unit).to(PROPERTY_UNITS[prop]).magnitude)
        except Exception as exc:  # pint raises several kinds
            raise r.err("unit_published", f"cannot convert {unit!r} to {PROPERTY_UNITS[prop]} ({exc})") from None
        skey = r.text("source_key")
        if skey not in keys:
            raise r.err("source_key", f"unknown source key {skey!r}")
        key = property_key(sid, prop, axis)
        if key in seen:
            raise r.err("property", f"duplicate property row {key!r}")
        seen.add(key)
        tc = r.num("temperature_c")
        st = _status_fields(r, keys)
        st["source_key"] = st["source_key"] or skey
        out.properties.append(PropertyValue(
            key=key, subject_kind=kind, subject_id=sid, property=prop, axis=axis, value_si=si,
            unit_si=PROPERTY_UNITS[prop], value_published=val, unit_published=unit,
            temperature_k=celsius_to_kelvin(tc) if tc is not None else None,
            quality=r.choice("quality", [q for q in QUALITY_CLASSES if q != "measured"]),
            source_key=skey, note=r.text("note", False)))
        out.provenance.append({"value_kind": "property", "owner_id": key, "field": "value", **st})


def _stored_numbers(out: SeedSet) -> dict[tuple[str, str], set[str]]:
    """(prefix, owner) -> the fields that hold a number in the seed rows."""
    have: dict[tuple[str, str], set[str]] = {}
    for v in out.chi_values:
        f = {"value_published"}
        if v.value_par_published is not None:
            f.add("value_par_published")
        for name, val in (("temperature_c", v.temperature_k), ("uncertainty_published", v.uncertainty_si),
                          ("temp_coeff_per_k", v.temp_coeff_per_k)):
            if val is not None:
                f.add(name)
        have[("chi", v.material_id)] = f
    for v in out.magnet_values:
        have[("grade", v.grade)] = {n for n in PROVENANCE_FIELDS["grade"] if getattr(v, n) is not None}
    for m in out.materials:
        have[("material", m.id)] = {"density_kg_m3"} | ({"molar_mass_g_mol"} if m.molar_mass_kg_mol else set())
    for v in out.conductivities:
        have[("sigma", v.material_id)] = set(PROVENANCE_FIELDS["sigma"])
    return have


def _parse_provenance(folder: Path, out: SeedSet, keys: set[str]) -> None:
    have = _stored_numbers(out)
    row_source: dict[tuple[str, str, str], str | None] = {}
    for v in out.chi_values:
        for f in PROVENANCE_FIELDS["chi"]:
            row_source[("chi", v.material_id, f)] = v.source_key
    for v in out.magnet_values:
        for f in PROVENANCE_FIELDS["grade"]:
            row_source[("grade", v.grade, f)] = v.source_key
    for m in out.materials:
        row_source[("material", m.id, "density_kg_m3")] = m.density_source_key
        row_source[("material", m.id, "molar_mass_g_mol")] = m.density_source_key
    for v in out.conductivities:
        for f in PROVENANCE_FIELDS["sigma"]:
            row_source[("sigma", v.material_id, f)] = v.source_key
    seen: set[tuple[str, str]] = set()
    for r in _read_csv(folder, "provenance"):
        vid = r.text("value_id")
        prefix, _, owner = vid.partition(":")
        if prefix not in PROVENANCE_FIELDS or not owner:
            raise r.err("value_id", "expected chi:<material>, grade:<grade>, material:<material> or sigma:<material>, "
                        f"got {vid!r}")
        if (prefix, owner) not in have:
            raise r.err("value_id", f"no seed row {vid!r}")
        fld = r.choice("field", PROVENANCE_FIELDS[prefix])
        if fld not in have[(prefix, owner)]:
            raise r.err("field", f"{vid} stores no number in {fld}")
        if (vid, fld) in seen:
            raise r.err("field", f"second provenance row for {vid} {fld}")
        seen.add((vid, fld))
        st = _status_fields(r, keys)
        # an unverified number is still cited by its row: count it under that source
        st["source_key"] = st["source_key"] or row_source.get((prefix, owner, fld))
        out.provenance.append({"value_kind": VALUE_KIND_OF_PREFIX[prefix], "owner_id": owner, "field": fld, **st})


def coverage(data: SeedSet) -> dict[str, int]:
    """Counts of stored seed numbers by provenance status (numbers with no row: unchecked)."""
    have = _stored_numbers(data)
    recorded = {(p["value_kind"], p["owner_id"], p["field"]): p["status"] for p in data.provenance}
    counts = {s: 0 for s in PROVENANCE_STATUSES} | {"unchecked": 0}
    for (prefix, owner), fields in have.items():
        for f in fields:
            counts[recorded.get((VALUE_KIND_OF_PREFIX[prefix], owner, f), "unchecked")] += 1
    for p in data.provenance:
        if p["value_kind"] == "property":
            counts[p["status"]] += 1
    return counts


# ---------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------
def _upsert(session: Session, obj, pk_name: str) -> None:
    cls = type(obj)
    existing = session.get(cls, getattr(obj, pk_name))
    if existing is None:
        session.add(obj)
        return
    for name in cls.model_fields:
        if name in (pk_name, "preferred_value_id", "origin"):
            continue
        setattr(existing, name, getattr(obj, name))
    session.add(existing)


def _upsert_value(session: Session, model, value, owner_clause):
    """Update the published row with the same owner and source in place (ids stay stable);
    measured rows are never matched, so they are never touched."""
    old = session.exec(
        select(model).where(owner_clause, model.source_key == value.source_key, model.quality != "measured")
    ).first()
    if old is None:
        session.add(value)
        return value
    for name in model.model_fields:
        if name not in ("id", "entered_at"):
            setattr(old, name, getattr(value, name))
    session.add(old)
    return old


def seed_database(engine: Engine, folder: Path | None = None) -> dict[str, int]:
    """Validate the seed files, then write them in one transaction. Idempotent."""
    data = parse_seed(folder)
    counts = {"sources": 0, "materials": 0, "susceptibilities": 0, "grades": 0, "properties": 0,
              "checked values": 0}
    with Session(engine) as s:
        try:
            for src in data.sources:
                _upsert(s, src, "key")
            s.flush()
            for m in data.materials:
                _upsert(s, m, "id")
            for g in data.grades:
                _upsert(s, g, "grade")
            s.flush()
            rows: dict[tuple[str, str], object] = {}
            for v in data.chi_values:
                rows[("chi", v.material_id)] = _upsert_value(
                    s, SusceptibilityValue, v, SusceptibilityValue.material_id == v.material_id)
            for v in data.magnet_values:
                rows[("magnet", v.grade)] = _upsert_value(s, MagnetValue, v, MagnetValue.grade == v.grade)
            keep = {p.key for p in data.properties}
            for old in s.exec(select(PropertyValue)).all():
                if old.key not in keep:
                    s.delete(old)
            s.flush()
            for p in data.properties:
                old = s.exec(select(PropertyValue).where(PropertyValue.key == p.key)).first()
                if old is None:
                    s.add(p)
                    rows[("property", p.key)] = p
                else:
                    for name in PropertyValue.model_fields:
                        if name != "id":
                            setattr(old, name, getattr(p, name))
                    s.add(old)
                    rows[("property", p.key)] = old
            s.flush()
            for v in data.conductivities:
                rows[("conductivity", v.material_id)] = _upsert_value(
                    s, ConductivityValue, v, ConductivityValue.material_id == v.material_id)
            s.flush()
            # provenance is rebuilt from the seed files every time (it describes seed rows only)
            for old in s.exec(select(ValueProvenance)).all():
                s.delete(old)
            s.flush()
            for p in data.provenance:
                row = rows.get((p["value_kind"], p["owner_id"]))
                s.add(ValueProvenance(value_row_id=getattr(row, "id", None), **p))
            s.commit()
        except BaseException:
            s.rollback()
            raise
    counts.update(sources=len(data.sources), materials=len(data.materials),
                  susceptibilities=len(data.chi_values), grades=len(data.grades),
                  conductivities=len(data.conductivities), properties=len(data.properties),
                  **{"checked values": len(data.provenance)})
    return counts
