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
import re
from dataclasses import dataclass, field
from pathlib import Path

from sqlalchemy.engine import Engine
from sqlmodel import Session, select

from .errors import DataError, InputError
from .models import (
    AXES,
    FAMILIES,
    MATERIAL_KINDS,
    QUALITY_CLASSES,
    ConductivityValue,
    MagnetGrade,
    MagnetValue,
    Material,
    Source,
    SusceptibilityValue,
)
from .units import CONVENTIONS, celsius_to_kelvin, chi_to_si_volume

SLUG_RE = re.compile(r"^[a-z0-9]+(-[a-z0-9]+)*$")
SOURCE_KINDS = ("handbook", "standard", "paper", "datasheet", "common-practice", "lab")

FILES = {
    "sources": "sources.csv",
    "materials": "materials.csv",
    "susceptibilities": "susceptibilities.csv",
    "grades": "magnet_grades.csv",
    "conductivities": "conductivities.csv",
}
OPTIONAL_FILES = ("conductivities",)  # a seed folder without it loads, with no conductivities

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
    "conductivities": [
        "material_id", "sigma_in_plane_s_m", "sigma_across_s_m", "temperature_c", "quality",
        "source_key", "note",
    ],
}


def seed_dir() -> Path:
    """Folder holding the seed CSV files (``MATDB_SEED_DIR`` overrides)."""
    env = os.environ.get("MATDB_SEED_DIR")
    if env:
        return Path(env)
    here = Path(__file__).resolve().parent
    for cand in (here.parent / "seed_data", here / "seed_data"):
        if (cand / FILES["sources"]).exists():
            return cand
    try:
        from importlib.resources import files

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
        if not (0.01 <= rho <= 25000):
            raise r.err("density_kg_m3", f"implausible density {rho} kg/m^3")
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
        if abs(chi) > 1e-2:
            raise r.err("value_published", f"SI volume susceptibility {chi:.3g} is implausibly large")
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
        if not (0.05 <= vals["br_t"] <= 1.7):
            raise r.err("br_t", f"implausible remanence {vals['br_t']} T")
        if vals["br_min_t"] is not None and vals["br_min_t"] > vals["br_t"]:
            raise r.err("br_min_t", "minimum Br above nominal Br")
        if vals["hcj_ka_m"] <= 0:
            raise r.err("hcj_ka_m", "expected a positive coercivity")
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
    return out


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


def _upsert_value(session: Session, model, value, owner_clause) -> None:
    """Update the published row with the same owner and source in place (ids stay stable);
    measured rows are never matched, so they are never touched."""
    old = session.exec(
        select(model).where(owner_clause, model.source_key == value.source_key, model.quality != "measured")
    ).first()
    if old is None:
        session.add(value)
        return
    for name in model.model_fields:
        if name not in ("id", "entered_at"):
            setattr(old, name, getattr(value, name))
    session.add(old)


def seed_database(engine: Engine, folder: Path | None = None) -> dict[str, int]:
    """Validate the seed files, then write them in one transaction. Idempotent."""
    data = parse_seed(folder)
    counts = {"sources": 0, "materials": 0, "susceptibilities": 0, "grades": 0}
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
            for v in data.chi_values:
                _upsert_value(s, SusceptibilityValue, v, SusceptibilityValue.material_id == v.material_id)
            for v in data.magnet_values:
                _upsert_value(s, MagnetValue, v, MagnetValue.grade == v.grade)
            for v in data.conductivities:
                _upsert_value(s, ConductivityValue, v,
                              ConductivityValue.material_id == v.material_id)
            s.commit()
        except BaseException:
            s.rollback()
            raise
    counts.update(sources=len(data.sources), materials=len(data.materials),
                  susceptibilities=len(data.chi_values), grades=len(data.grades),
                  conductivities=len(data.conductivities))
    return counts
