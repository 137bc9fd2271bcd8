"""What people type for a value, parsed and checked: one job, no database and no physics.

Turns the strings of the CLI, the page and imported files (``"-1.31e-5 cgs-volume"``,
``"20 degC"``, ``"5 %"``, ``"2026-10-01"``) into SI numbers and unsaved model rows, refusing
anything implausible in one line that names the field. The plausibility checks
(:func:`check_density`, :func:`check_chi_magnitude`, :func:`check_br`, :func:`check_hcj`,
:func:`check_temp_coeff`) are the ones the seed loader (:mod:`matdb.data.seed`) applies
to ``seed_data/*.csv``: one set of limits, :mod:`matdb.constants`.
"""

from __future__ import annotations

import datetime as _dt
import math
import re
from dataclasses import dataclass
from typing import Any, Optional

from matdb.constants import (
    ALPHA_MAX_PCT_PER_K,
    BR_RANGE_T,
    CHI_MAX_ABS,
    DENSITY_RANGE_KG_M3,
    HCJ_MAX_KA_M,
    kelvin_to_celsius,
)
from matdb.data.models import Material, SusceptibilityValue
from matdb.errors import InputError
from matdb.units import (
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
    _split_number_unit,
)

LAB_SOURCE_KEY = "lab"
LAB_CITATION = "lab-measured value; see the value's source note"
SLUG_RE = re.compile(r"^[a-z0-9]+(-[a-z0-9]+)*$")  # material ids: 'pyrolytic-graphite'
GRADE_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9._+-]*$")  # magnet grades: 'N42SH', 'SmCo-26'
DATE_RE = re.compile(r"^\d{4}-\d{2}-\d{2}$")


# ---------------------------------------------------------------------------
# plausibility (shared with the seed loader)
# ---------------------------------------------------------------------------
def check_density(rho: float, label: str) -> float:
    """``rho`` [kg/m^3] within :data:`matdb.constants.DENSITY_RANGE_KG_M3`, else InputError."""
    lo, hi = DENSITY_RANGE_KG_M3
    if not (lo <= rho <= hi):
        raise InputError(f"implausible density {rho!r} kg/m^3 (expected {lo:g} to {hi:g} kg/m^3)", field=label)
    return rho


def check_chi_magnitude(chi: float, label: str, typed: Any = None) -> float:
    """|chi| (SI volume) at most :data:`matdb.constants.CHI_MAX_ABS`, else InputError."""
    if abs(chi) > CHI_MAX_ABS:
        what = f" from {text_of(typed)!r}" if typed is not None else ""
        raise InputError(f"|chi| = {abs(chi):.3g} (SI volume){what} is implausible for a dia- or "
                         f"paramagnet (limit {CHI_MAX_ABS:g}); check the convention or unit", field=label)
    return chi


def check_br(br: float, label: str) -> float:
    """Remanence [T] within :data:`matdb.constants.BR_RANGE_T`, else InputError."""
    lo, hi = BR_RANGE_T
    if not (lo <= br <= hi):
        raise InputError(f"implausible remanence {br:.4g} T (expected {lo:g} to {hi:g} T)", field=label)
    return br


def check_hcj(h: float, label: str) -> float:
    """Intrinsic coercivity [kA/m] above 0 and at most :data:`matdb.constants.HCJ_MAX_KA_M`."""
    if not (0 < h <= HCJ_MAX_KA_M):
        raise InputError(f"implausible coercivity {h:.4g} kA/m (expected above 0 and at most "
                         f"{HCJ_MAX_KA_M:g} kA/m)", field=label)
    return h


def check_temp_coeff(a: float, label: str) -> float:
    """A temperature coefficient of Br or Hcj [%/K] within +-ALPHA_MAX_PCT_PER_K."""
    if abs(a) > ALPHA_MAX_PCT_PER_K:
        raise InputError(f"implausible temperature coefficient {a:g} %/K "
                         f"(expected |value| <= {ALPHA_MAX_PCT_PER_K:g})", field=label)
    return a


# ---------------------------------------------------------------------------
# small parsers (field-named errors)
# ---------------------------------------------------------------------------
def text_of(value: Any) -> str:
    """A typed value as a stripped string ('' for None); removes the padding the CLI core
    adds to negative numbers."""
    if value is None:
        return ""
    return str(value).strip()


def given(value: Any) -> bool:
    """Was anything typed (not None, not blank)?"""
    return value is not None and text_of(value) != ""


def require_source(text: Any, label: str) -> str:
    """The free-text note saying where a value comes from; refused when empty."""
    s = text_of(text)
    if not s:
        raise InputError("required: say where the value comes from "
                         "(e.g. 'Gouy balance, sample B3, lab notebook 4 p. 12')", field=label)
    return s


def parse_date(text: Any, label: str = "date") -> Optional[_dt.date]:
    """``YYYY-MM-DD`` (not in the future), or None when empty."""
    s = text_of(text)
    if not s:
        return None
    if not DATE_RE.match(s):
        raise InputError(f"expected a date YYYY-MM-DD, got {s!r}", field=label)
    try:
        d = _dt.date.fromisoformat(s)
    except ValueError:
        raise InputError(f"not a calendar date: {s!r}", field=label) from None
    if d > _dt.date.today() + _dt.timedelta(days=1):
        raise InputError(f"{s} is in the future", field=label)
    return d


def parse_entered(text: Any, label: str) -> Optional[_dt.datetime]:
    """An ISO date and time (entry times are UTC; a naive one is taken as UTC), or None."""
    s = text_of(text)
    if not s:
        return None
    try:
        d = _dt.datetime.fromisoformat(s)
    except ValueError:
        raise InputError(f"expected an ISO date and time, got {s!r}", field=label) from None
    if d.tzinfo is None:  # entry times are UTC (matdb.data.models)
        return d.replace(tzinfo=_dt.timezone.utc)
    return d.astimezone(_dt.timezone.utc)


def optional_number(text: Any, label: str) -> Optional[float]:
    """A plain number, or None when nothing was typed."""
    s = text_of(text)
    return parse_number(s, label) if s else None


def parse_bool(text: Any, label: str, default: bool = False) -> bool:
    """true/yes/1 or false/no/0 (any case); ``default`` when empty."""
    s = text_of(text).lower()
    if not s:
        return default
    if s in ("true", "yes", "1"):
        return True
    if s in ("false", "no", "0"):
        return False
    raise InputError(f"expected true or false, got {s!r}", field=label)


def parse_chi_text(text: Any, label: str, rho: Optional[float], mm: Optional[float],
                   rho_label: str, mm_label: str, convention_default: Optional[str] = None
                   ) -> tuple[float, float, str]:
    """(chi_si, value as typed, convention) from ``"-1.6e-4"`` or ``"-280e-6 cm^3/mol"``."""
    s = text_of(text)
    if not s:
        raise InputError("required: a susceptibility such as -1.6e-4 or '-1.31e-5 cgs-volume'", field=label)
    try:
        value, unit = _split_number_unit(s, label)
    except InputError:
        raise InputError(f"expected a susceptibility such as -1.6e-4 or "
                         f"'-280e-6 cm^3/mol', got {s!r}", field=label) from None
    conv = parse_convention(unit, label) if unit else (convention_default or "si-volume")
    if needs_density(conv) and rho is None:
        raise InputError(f"needed to convert {label} from {conv}; give e.g. {rho_label} '9.78 g/cm^3'", field=rho_label)
    if needs_molar_mass(conv) and mm is None:
        raise InputError(f"needed to convert {label} from {conv}; give e.g. {mm_label} '208.98 g/mol'", field=mm_label)
    chi = chi_to_si_volume(value, conv, rho, mm)
    if not math.isfinite(chi):
        raise InputError(f"expected a finite susceptibility, got {s!r}", field=label)
    return chi, value, conv


def check_measured_chi(chi: float, label: str, typed: Any) -> None:
    """A measured chi: plausible (:func:`check_chi_magnitude`) and not exactly zero."""
    check_chi_magnitude(chi, label, typed)
    if chi == 0:
        raise InputError("a susceptibility of exactly zero is not a measurement", field=label)


def parse_uncertainty(text: Any, label: str, chi_si: float, conv: str, rho, mm) -> float:
    """Absolute in the value's convention (``"0.5e-6"``), with its own unit, or ``"5 %"``."""
    s = text_of(text)
    if s.endswith("%"):
        pct = parse_number(s[:-1].strip(), label)
        if not (0 <= pct <= 100):
            raise InputError(f"expected a percentage from 0 to 100, got {s!r}", field=label)
        return abs(chi_si) * pct / 100.0
    try:
        value, unit = _split_number_unit(s, label)
    except InputError:
        raise InputError(f"expected an absolute uncertainty in the value's convention "
                         f"(e.g. 0.5e-6) or a percentage (e.g. '5%'), got {s!r}", field=label) from None
    if value < 0:
        raise InputError(f"expected an uncertainty of zero or more, got {s!r}", field=label)
    c = parse_convention(unit, label) if unit else conv
    if (needs_density(c) and rho is None) or (needs_molar_mass(c) and mm is None):
        raise InputError(f"cannot convert {c} without density and molar mass", field=label)
    return check_uncertainty(abs(chi_to_si_volume(value, c, rho, mm)), label)


def check_uncertainty(unc: float, label: str) -> float:
    """An absolute uncertainty of chi (SI volume) from 0 to CHI_MAX_ABS."""
    if not (0 <= unc <= CHI_MAX_ABS):
        raise InputError(f"implausible uncertainty {unc:.3g} (SI volume; expected 0 to {CHI_MAX_ABS:g})", field=label)
    return unc


def parse_alpha(text: Any, label: str) -> float:
    """A temperature coefficient typed as ``-0.12`` or ``"-0.12 %/K"`` [%/K]."""
    s = re.sub(r"\s*%\s*/\s*(K|degC|C|°C)$", "", text_of(text))
    return check_temp_coeff(parse_number(s, label), label)


def parse_br(text: Any, label: str) -> float:
    """Remanence typed with a unit (``"1.29 T"``, ``"12900 G"``) [T]."""
    return check_br(parse_flux_density(text_of(text), label), label)


def parse_hcj(text: Any, label: str) -> float:
    """Intrinsic coercivity typed with a unit (``"960 kA/m"``, ``"12 kOe"``) [kA/m]."""
    return check_hcj(parse_quantity(text_of(text), "kA/m", label, positive=True), label)


def parse_max_temp_c(text: Any, label: str) -> float:
    """Maximum working temperature typed with a unit (``"80 degC"``) [degC]."""
    return kelvin_to_celsius(parse_temperature(text_of(text), label))


# ---------------------------------------------------------------------------
# measured susceptibility rows (shared by record and import)
# ---------------------------------------------------------------------------
@dataclass
class MaterialFacts:
    """What a measured value needs to know of its material (stored or about to be made)."""

    id: str
    name: str
    kind: str
    density: float
    molar_mass: Optional[float]
    anisotropic: bool
    new: bool = False
    preferred_value_id: Optional[int] = None

    @classmethod
    def of(cls, m: Material) -> "MaterialFacts":
        return cls(m.id, m.name, m.kind, m.density_kg_m3, m.molar_mass_kg_mol, m.anisotropic, False,
                   m.preferred_value_id)

    def to_row(self) -> Material:
        """A new Material row of a material created by a measured value."""
        return Material(id=self.id, name=self.name, kind=self.kind, density_kg_m3=self.density,
                        molar_mass_kg_mol=self.molar_mass, anisotropic=self.anisotropic, origin="user",
                        price_illustrative=True)


def check_sign(mat: MaterialFacts, chi: float, field: str, allow_paramagnetic: bool) -> None:
    """A diamagnet's chi is negative, a paramagnet's positive, unless the person says otherwise
    (``allow_paramagnetic``)."""
    if mat.kind == "diamagnetic" and chi > 0 and not allow_paramagnetic:
        raise InputError(f"{mat.id} is diamagnetic but chi = {chi:.4g} > 0; if the sample really "
                         "is paramagnetic, say so with allow_paramagnetic", field=field)
    if mat.kind == "paramagnetic" and chi < 0 and not allow_paramagnetic:
        raise InputError(f"{mat.id} is paramagnetic but chi = {chi:.4g} < 0; check the sign, "
                         "or say so with allow_paramagnetic", field=field)


def build_chi_value(mat: MaterialFacts, f: dict, source_key: str = LAB_SOURCE_KEY) -> SusceptibilityValue:
    """A measured SusceptibilityValue (not yet stored) from typed fields ``f``: ``chi`` (or
    ``chi_perp`` and ``chi_par``), ``source``, optional ``density``, ``molar_mass``,
    ``convention``, ``uncertainty``, ``temperature``, ``date``, ``measured_by``, ``method``,
    ``note``, ``allow_paramagnetic``. Errors name these fields."""
    source_note = require_source(f.get("source"), "source")
    rho_measured = parse_density(text_of(f["density"]), "density") if given(f.get("density")) else None
    mm = parse_molar_mass(text_of(f["molar_mass"]), "molar_mass") if given(f.get("molar_mass")) else mat.molar_mass
    rho = rho_measured if rho_measured is not None else mat.density
    allow = bool(f.get("allow_paramagnetic"))
    chi_t, perp_t, par_t = f.get("chi"), f.get("chi_perp"), f.get("chi_par")
    conv_default = text_of(f.get("convention")) or None
    if conv_default:
        conv_default = parse_convention(conv_default, "convention")
    if given(chi_t) and given(perp_t):
        raise InputError("give chi or chi_perp, not both", field="chi_perp")
    main_t, main_field = (perp_t, "chi_perp") if given(perp_t) else (chi_t, "chi")
    if not given(main_t):
        raise InputError("required: the measured susceptibility, e.g. -1.6e-4 or '-1.31e-5 cgs-volume'",
                         field="chi")
    if mat.anisotropic and not given(par_t):
        raise InputError(f"{mat.id} is anisotropic: give the in-plane value too (chi_perp for the field "
                         "along the c axis, chi_par in the plane)", field="chi_par")
    if not mat.anisotropic and (given(par_t) or given(perp_t)):
        raise InputError(f"{mat.id} is isotropic: give one value with chi",
                         field="chi_par" if given(par_t) else "chi_perp")
    chi, published, conv = parse_chi_text(main_t, main_field, rho, mm, "density", "molar_mass", conv_default)
    check_measured_chi(chi, main_field, main_t)
    check_sign(mat, chi, main_field, allow)
    chi_par = par_published = None
    if given(par_t):
        chi_par, _, _ = parse_chi_text(par_t, "chi_par", rho, mm, "density", "molar_mass", conv)
        check_measured_chi(chi_par, "chi_par", par_t)
        check_sign(mat, chi_par, "chi_par", allow)
        par_published = chi_from_si_volume(chi_par, conv, rho, mm)
    unc = None
    if given(f.get("uncertainty")):
        unc = parse_uncertainty(f["uncertainty"], "uncertainty", chi, conv, rho, mm)
    t_k = parse_temperature(text_of(f["temperature"]), "temperature") if given(f.get("temperature")) else None
    return SusceptibilityValue(
        material_id=mat.id, value_published=published, value_par_published=par_published,
        convention=conv, chi_si=chi, chi_perp_si=chi if chi_par is not None else None, chi_par_si=chi_par,
        temperature_k=t_k, uncertainty_si=unc, density_kg_m3=rho_measured, quality="measured",
        source_key=source_key, source_note=source_note, note=text_of(f.get("note")),
        measured_by=text_of(f.get("measured_by")) or None, measured_on=parse_date(f.get("date"), "date"),
        method=text_of(f.get("method")) or None,
    )


def new_material(mid: str, f: dict) -> MaterialFacts:
    """A material created by its first measured value (typed ``name`` and ``density``)."""
    if not SLUG_RE.match(mid):
        raise InputError(f"a new id must be a lower-case slug such as 'bismuth-casting-b3', got {mid!r}",
                         field="material")
    name = text_of(f.get("name"))
    if not name:
        raise InputError(f"unknown id {mid!r}; to create a new material give name and density", field="material")
    if not given(f.get("density")):
        raise InputError(f"needed for a new material ({mid})", field="density")
    rho = parse_density(text_of(f["density"]), "density")
    mm = parse_molar_mass(text_of(f["molar_mass"]), "molar_mass") if given(f.get("molar_mass")) else None
    typed_chi = text_of(f.get("chi_perp")) or text_of(f.get("chi"))
    chi_positive = bool(typed_chi) and not typed_chi.startswith("-")
    kind = "paramagnetic" if (chi_positive and f.get("allow_paramagnetic")) else "diamagnetic"
    return MaterialFacts(mid, name, kind, rho, mm, given(f.get("chi_par")), new=True)
