"""Database tables (sqlmodel).

Every number is a *value row* with provenance, never a column of the material or grade
itself, so lab-measured values can be appended beside the published ones without touching
them. A material or grade points to a preferred value (``preferred_value_id``); when that
is unset the newest measured value (by measurement date, then entry time) is used, else
the handbook value.
"""

from __future__ import annotations

import datetime as _dt
from typing import Optional

from sqlmodel import Field, SQLModel

from matdb.data.vocab import (  # noqa: F401  (re-exported: the words of the text columns)
    AXES,
    FAMILIES,
    MATERIAL_KINDS,
    PROVENANCE_STATUSES,
    QUALITY_CLASSES,
    SOURCE_KINDS,
    VALUE_KINDS,
)


def _now() -> _dt.datetime:
    return _dt.datetime.now(_dt.timezone.utc)


class Source(SQLModel, table=True):
    """A bibliography entry every value row cites by key."""

    key: str = Field(primary_key=True)
    citation: str
    kind: str  # handbook | standard | paper | datasheet | common-practice | lab
    year: Optional[int] = None
    note: str = ""


class Material(SQLModel, table=True):
    id: str = Field(primary_key=True)  # lower-case slug
    name: str
    kind: str  # diamagnetic | paramagnetic
    density_kg_m3: float
    molar_mass_kg_mol: Optional[float] = None
    anisotropic: bool = False
    price_usd_per_kg: Optional[float] = None
    price_note: str = ""
    price_illustrative: bool = True
    density_source_key: Optional[str] = Field(default=None, foreign_key="source.key")
    note: str = ""
    preferred_value_id: Optional[int] = None
    origin: str = "seed"  # seed | user


class SusceptibilityValue(SQLModel, table=True):
    """One published or measured susceptibility of a material.

    ``chi_si`` is the SI volume susceptibility in use for the row: the isotropic value, or
    for anisotropic materials the value with the field perpendicular to the basal plane
    (``chi_perp_si``); ``chi_par_si`` the in-plane value.
    """

    id: Optional[int] = Field(default=None, primary_key=True)
    material_id: str = Field(foreign_key="material.id", index=True)
    value_published: float
    value_par_published: Optional[float] = None
    convention: str = "si-volume"
    chi_si: float
    chi_perp_si: Optional[float] = None
    chi_par_si: Optional[float] = None
    temperature_k: Optional[float] = None
    uncertainty_si: Optional[float] = None
    temp_coeff_per_k: Optional[float] = None
    density_kg_m3: Optional[float] = None  # measured density, if given with the value
    quality: str = "handbook"
    source_key: str = Field(foreign_key="source.key")
    source_note: str = ""  # free text given with a measurement
    note: str = ""
    measured_by: Optional[str] = None
    measured_on: Optional[_dt.date] = None
    method: Optional[str] = None
    entered_at: _dt.datetime = Field(default_factory=_now)
    retracted: bool = False
    retract_reason: Optional[str] = None


class MagnetGrade(SQLModel, table=True):
    grade: str = Field(primary_key=True)
    family: str
    price_usd_per_kg: Optional[float] = None
    price_illustrative: bool = True
    note: str = ""
    preferred_value_id: Optional[int] = None
    origin: str = "seed"


class MagnetValue(SQLModel, table=True):
    """One published or measured property set of a magnet grade.

    A measured row may hold only some properties (say, Br from a gaussmeter); the rest are
    taken from the grade's published row.
    """

    id: Optional[int] = Field(default=None, primary_key=True)
    grade: str = Field(foreign_key="magnetgrade.grade", index=True)
    br_t: Optional[float] = None
    br_min_t: Optional[float] = None
    hcb_ka_m: Optional[float] = None
    hcj_ka_m: Optional[float] = None
    bhmax_kj_m3: Optional[float] = None
    alpha_br_pct_per_k: Optional[float] = None
    beta_hcj_pct_per_k: Optional[float] = None
    max_temp_c: Optional[float] = None
    mu_rec: Optional[float] = None
    density_kg_m3: Optional[float] = None
    quality: str = "standard"
    source_key: str = Field(foreign_key="source.key")
    source_note: str = ""
    note: str = ""
    measured_by: Optional[str] = None
    measured_on: Optional[_dt.date] = None
    method: Optional[str] = None
    entered_at: _dt.datetime = Field(default_factory=_now)
    retracted: bool = False
    retract_reason: Optional[str] = None


class ValueProvenance(SQLModel, table=True):
    """Where one stored number was checked, and with what outcome.

    One row per published number (a grade's Br, Hcj, ... each carry their own row, as they
    may come from different tables). ``value_kind`` says which table holds the number:
    ``chi`` (a susceptibility value row), ``magnet`` (a magnet value row), ``material``
    (density and molar mass of a material) or ``property`` (a :class:`PropertyValue`);
    ``owner_id`` is the material id, grade or property key, ``value_row_id`` the id of the
    value row when there is one. ``status`` is ``verified`` (equal to the source within its
    printed rounding), ``corrected`` (the stored number was replaced by the source's) or
    ``unverified`` (no reachable source; ``sources_tried`` says which were tried).
    Rows are rebuilt from ``seed_data/provenance.csv`` on every seeding.
    """

    id: Optional[int] = Field(default=None, primary_key=True)
    value_kind: str = Field(index=True)
    owner_id: str = Field(index=True)
    value_row_id: Optional[int] = Field(default=None, index=True)
    field: str
    status: str
    source_key: Optional[str] = Field(default=None, foreign_key="source.key")
    locator: str = ""
    sources_tried: str = ""
    note: str = ""


class PropertyValue(SQLModel, table=True):
    """A further published property of a material or a magnet family, in SI.

    Electrical resistivity (eddy currents), thermal expansion (gap model), the temperature
    coefficient of susceptibility, recoil permeability and working limits per magnet family,
    ... ``key`` is ``<subject_id>:<property>[:<axis>]`` and stable across seedings.
    """

    id: Optional[int] = Field(default=None, primary_key=True)
    key: str = Field(index=True, unique=True)
    subject_kind: str  # material | family
    subject_id: str = Field(index=True)
    property: str
    axis: str = "iso"
    value_si: float
    unit_si: str
    value_published: float
    unit_published: str
    temperature_k: Optional[float] = None
    quality: str = "handbook"
    source_key: str = Field(foreign_key="source.key")
    note: str = ""
class ConductivityValue(SQLModel, table=True):
    """Electrical conductivity of a material: in the plate's plane and across it.

    Isotropic materials give the same value twice. Effectively insulating materials (a
    graphite-powder composite in an insulating binder, polymers, glass) carry 0.
    """

    id: Optional[int] = Field(default=None, primary_key=True)
    material_id: str = Field(foreign_key="material.id", index=True)
    sigma_in_plane_s_m: float
    sigma_across_s_m: float
    temperature_k: Optional[float] = None
    quality: str = "handbook"
    source_key: str = Field(foreign_key="source.key")
    source_note: str = ""
    note: str = ""
    entered_at: _dt.datetime = Field(default_factory=_now)
    retracted: bool = False


class QualityFactorValue(SQLModel, table=True):
    """A measured quality factor or ring-down time of a floating plate (lab value).

    Appended, never overwritten; ``source_note`` says where it comes from. ``q`` and
    ``ring_down_s`` (1/e of amplitude) are related by ``Q = pi f tau`` and either may be
    derived from the other when the frequency is known.
    """

    id: Optional[int] = Field(default=None, primary_key=True)
    material_id: str = Field(foreign_key="material.id", index=True)
    design: str = ""  # design file name or short description of the set-up
    mode: str = ""  # e.g. "vertical"
    frequency_hz: Optional[float] = None
    q: Optional[float] = None
    ring_down_s: Optional[float] = None
    pressure_pa: Optional[float] = None
    temperature_k: Optional[float] = None
    source_key: str = Field(default="lab", foreign_key="source.key")
    source_note: str = ""
    measured_by: Optional[str] = None
    measured_on: Optional[_dt.date] = None
    method: Optional[str] = None
    note: str = ""
    entered_at: _dt.datetime = Field(default_factory=_now)
    retracted: bool = False


class SavedDesign(SQLModel, table=True):
    """A design a person named and saved, with a note (the design-file text as typed)."""

    id: Optional[int] = Field(default=None, primary_key=True)
    name: str = Field(index=True, unique=True)
    note: str = ""
    design_toml: str
    created_at: _dt.datetime = Field(default_factory=_now)
    updated_at: _dt.datetime = Field(default_factory=_now)
