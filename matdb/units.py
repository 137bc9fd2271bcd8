"""The one unit registry, parsing of what people type, and susceptibility conventions.

Everything below the boundary works in SI floats. This module turns strings such as
``"12.7 mm"``, ``"5000 G"``, ``"20 degC"`` or ``"-280.1e-6 cm^3/mol"`` into SI numbers
and back, and converts magnetic susceptibilities between the six conventions found in
handbooks.

Susceptibility conventions
--------------------------
=============  ==================  ===========================================
name           unit as published   to SI volume susceptibility chi_v
=============  ==================  ===========================================
si-volume      1                   chi_v
cgs-volume     emu/(cm^3 Oe)       4 pi chi
si-mass        m^3/kg              chi * rho
cgs-mass       cm^3/g              4 pi * 1e-3 * chi * rho
si-molar       m^3/mol             chi * rho / M
cgs-molar      cm^3/mol            4 pi * 1e-6 * chi * rho / M
=============  ==================  ===========================================

rho in kg/m^3, M in kg/mol. The factor 4 pi is the rationalisation between the
Gaussian (emu) and SI systems; cm^3/g and cm^3/mol are the emu conventions, so a
plain volume-unit conversion would be wrong by 4 pi. The factor lives in one place,
:data:`_FOUR_PI_CGS`, and nowhere else in matdb.

References
----------
.. [1] IUPAC, "Quantities, Units and Symbols in Physical Chemistry" (Green Book),
   3rd ed., 2007, section 7.4 (conversion of electromagnetic quantities).
.. [2] R. B. Goldfarb and F. R. Fickett, "Units for Magnetic Properties",
   NBS Special Publication 696 (1985).
"""

from __future__ import annotations

import functools
import math
import re
from typing import TYPE_CHECKING, Iterable

from matdb.constants import DENSITY_RANGE_KG_M3
from matdb.errors import InputError
from matdb.limits import check_chi, check_magnitude, check_temperature

if TYPE_CHECKING:
    import pint


@functools.cache
def registry() -> "pint.UnitRegistry":
    """The one unit registry of matdb, built on first use.

    Building it (importing pint and reading its definitions) costs about half a second, so
    it is not built at import: commands that only list tables never pay for it; pint keeps
    its parsed definitions in ``<cache>/pint`` (:func:`matdb.paths.cache_root`), which cuts
    reading them from about 0.35 s to 0.05 s after the first run. Offset temperatures
    ("20 degC") convert to kelvin; ``MGOe`` and ``USD`` are added.
    """
    import pint  # lazy: keeps `matdb --help` and table commands from importing pint at all

    from matdb.paths import cache_root

    folder = cache_root() / "pint"
    try:
        folder.mkdir(parents=True, exist_ok=True)
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True, cache_folder=folder)
    except OSError:  # a read-only or full cache folder: read the definitions each time
        ureg = pint.UnitRegistry(autoconvert_offset_to_baseunit=True)
    ureg.define("MGOe = 1e5 / (4 * pi) * J / m**3")
    ureg.define("USD = [currency]")
    return ureg


def quantity(value, unit=None) -> "pint.Quantity":
    """``Quantity(value, unit)`` in :func:`registry` (``unit`` may be a string or a Unit)."""
    return registry().Quantity(value, unit)


def __getattr__(name: str):
    """``units.ureg`` and ``units.Q_`` (the registry and its Quantity), built on first access."""
    if name == "ureg":
        return registry()
    if name == "Q_":
        return registry().Quantity
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


CONVENTIONS = ("si-volume", "cgs-volume", "si-mass", "cgs-mass", "si-molar", "cgs-molar")

# 4 pi times the unit scale between the emu convention and SI, per convention.
_FOUR_PI_CGS = {
    "si-volume": 1.0,
    "cgs-volume": 4.0 * math.pi,
    "si-mass": 1.0,
    "cgs-mass": 4.0 * math.pi * 1e-3,  # cm^3/g -> m^3/kg is 1e-3
    "si-molar": 1.0,
    "cgs-molar": 4.0 * math.pi * 1e-6,  # cm^3/mol -> m^3/mol is 1e-6
}

_UNIT_ALIASES = {
    "si-volume": "si-volume",
    "si": "si-volume",
    "cgs-volume": "cgs-volume",
    "si-mass": "si-mass",
    "cgs-mass": "cgs-mass",
    "si-molar": "si-molar",
    "cgs-molar": "cgs-molar",
    "m^3/kg": "si-mass",
    "m^3/mol": "si-molar",
    "cm^3/g": "cgs-mass",
    "cm^3/mol": "cgs-molar",
    "emu/(gOe)": "cgs-mass",
    "emu/(molOe)": "cgs-molar",
    "emu/(cm^3Oe)": "cgs-volume",
}

ACCEPTED_CHI_UNITS = (
    "si-volume, cgs-volume, si-mass, cgs-mass, si-molar, cgs-molar, "
    "m^3/kg, m^3/mol (SI), cm^3/g, cm^3/mol, emu/(g Oe), emu/(mol Oe) (CGS-emu)"
)

_NUMBER_RE = re.compile(r"^[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?$")
_NEG_NUMBER_RE = re.compile(r"^-(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?(\s.*)?$")


# ---------------------------------------------------------------------------
# numbers and quantities
# ---------------------------------------------------------------------------
def parse_number(text: str | float | int, field: str) -> float:
    """A finite float from a number or a string such as ``"-1.6e-4"``."""
    if isinstance(text, bool):
        raise InputError(f"expected a number, got {text!r}", field=field)
    if isinstance(text, (int, float)):
        value = float(text)
    else:
        s = str(text).strip()
        if not _NUMBER_RE.match(s):
            raise InputError(f"expected a number such as -1.6e-4, got {text!r}", field=field)
        value = float(s)
    if not math.isfinite(value):
        raise InputError(f"expected a finite number, got {text!r}", field=field)
    return value


def _normalise_unit_text(text: str) -> str:
    s = text.strip().replace("**", "^").replace("·", " ").replace("µ", "u").replace("μ", "u")
    s = re.sub(r"\bdeg\s*C\b|°C|℃", "degC", s)
    s = re.sub(r"°F", "degF", s)
    return s


def _split_number_unit(text: str, field: str) -> tuple[float, str]:
    s = str(text).strip()
    m = re.match(r"^([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*)$", s)
    if not m:
        raise InputError(f"expected a number with a unit, got {text!r}", field=field)
    value = parse_number(m.group(1), field)
    return value, m.group(2).strip()


def to_quantity(text: str | float | int, field: str) -> pint.Quantity:
    """Parse ``text`` into a pint Quantity (number and unit), with a field-named error."""
    ureg = registry()
    if isinstance(text, ureg.Quantity):
        return text
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        return ureg.Quantity(parse_number(text, field), "")
    value, unit = _split_number_unit(str(text), field)
    unit = _normalise_unit_text(unit)
    if unit in ("C",):
        unit = "degC"
    elif unit in ("F",):
        unit = "degF"
    try:
        u = ureg.parse_units(unit) if unit else ureg.dimensionless
    except Exception as exc:  # pint raises several types for junk units
        raise InputError(f"unknown unit {unit!r} in {text!r}", field=field) from exc
    return ureg.Quantity(value, u)


def _convert(q: pint.Quantity, unit: str, field: str, text) -> float:
    for ctx in ((), ("Gaussian",)):
        try:
            return float(q.to(unit, *ctx).magnitude)
        except Exception:  # pint's DimensionalityError and offset-unit errors alike: try the next
            continue
    want = registry().parse_units(unit).dimensionality
    raise InputError(f"expected a quantity with units of {want} (e.g. '1 {unit}'), got {text!r}", field=field)


def parse_quantity(
    text: str | float | int,
    unit: str,
    field: str,
    *,
    require_unit: bool = True,
    min_value: float | None = None,
    positive: bool = False,
) -> float:
    """Parse a quantity a person typed and return its magnitude in ``unit``.

    Parameters
    ----------
    text : str or number
        ``"12.7 mm"``, ``"0.5 T"``, ``"5000 G"``, ``"9.78 g/cm^3"``...
    unit : str
        pint unit to return the magnitude in, e.g. ``"m"``, ``"T"``, ``"kg/m^3"``.
    field : str
        Name of the input, used in error messages.
    require_unit : bool
        When True a bare number is refused (``"12.7"`` for a length is ambiguous).
    min_value, positive : optional bounds, checked in ``unit``.
    """
    q = to_quantity(text, field)
    target = registry().parse_units(unit)
    if str(q.units) == "dimensionless" and not (1 * target).dimensionless:
        if require_unit:
            raise InputError(f"missing unit in {text!r}; expected a quantity such as '1 {unit}'", field=field)
        value = float(q.magnitude)
    else:
        value = _convert(q, unit, field, text)
    if not math.isfinite(value):
        raise InputError(f"expected a finite value, got {text!r}", field=field)
    check_magnitude(value, unit, field, text)
    if positive and value <= 0:
        raise InputError(f"expected a positive value, got {text!r}", field=field)
    if min_value is not None and value < min_value:
        raise InputError(f"expected at least {min_value:g} {unit}, got {text!r}", field=field)
    return value


def parse_length(text, field: str, *, positive: bool = False, allow_zero: bool = True) -> float:
    """Length in metres; negative lengths are refused."""
    v = parse_quantity(text, "m", field)
    if v < 0 or (positive and v == 0) or (not allow_zero and v == 0):
        raise InputError(f"expected a positive length, got {text!r}", field=field)
    return v


def parse_mass(text, field: str) -> float:
    """Mass in kg, not negative."""
    v = parse_quantity(text, "kg", field)
    if v < 0:
        raise InputError(f"expected a mass of zero or more, got {text!r}", field=field)
    return v


def parse_flux_density(text, field: str) -> float:
    """Magnetic flux density in tesla ("1.32 T", "13200 G", "1320 mT")."""
    return parse_quantity(text, "T", field)


def parse_temperature(text, field: str) -> float:
    """Absolute temperature in kelvin from ``"20 degC"``, ``"293.15 K"``, ``"68 degF"``."""
    q = to_quantity(text, field)
    if str(q.units) == "dimensionless":
        raise InputError(f"missing unit in {text!r}; expected e.g. '20 degC' or '293 K'", field=field)
    try:
        k = float(q.to("K").magnitude)
    except Exception as exc:
        raise InputError(f"expected a temperature such as '20 degC', got {text!r}", field=field) from exc
    if k <= 0:
        raise InputError(f"temperature below absolute zero: {text!r}", field=field)
    check_temperature(k, field, text)
    return k


def parse_density(text, field: str = "density") -> float:
    """Density in kg/m^3, refusing values outside :data:`matdb.constants.DENSITY_RANGE_KG_M3`."""
    v = parse_quantity(text, "kg/m^3", field)
    lo, hi = DENSITY_RANGE_KG_M3
    if not (lo <= v <= hi):
        raise InputError(f"density {text!r} is outside {lo:g} to {hi:g} kg/m^3", field=field)
    return v


def parse_molar_mass(text, field: str = "molar_mass") -> float:
    """Molar mass in kg/mol ("208.98 g/mol")."""
    return parse_quantity(text, "kg/mol", field, positive=True)


def format_quantity(value_si: float, si_unit: str, unit: str, digits: int = 4) -> str:
    """Format an SI magnitude in a human unit: ``format_quantity(1.2e-3, "m", "mm")``."""
    q = quantity(value_si, si_unit)
    ctx = () if q.is_compatible_with(unit) else ("Gaussian",)
    mag = q.to(unit, *ctx).magnitude
    return f"{mag:.{digits}g} {unit}"


def tesla_to_gauss(b_t: float) -> float:
    """Flux density in gauss, via pint's Gaussian context."""
    return float(quantity(b_t, "T").to("gauss", "Gaussian").magnitude)


# ---------------------------------------------------------------------------
# susceptibility conventions
# ---------------------------------------------------------------------------
def parse_convention(unit_text: str, field: str = "unit") -> str:
    """Map a convention name or a unit string to one of :data:`CONVENTIONS`."""
    key = re.sub(r"\s+", "", _normalise_unit_text(str(unit_text))).replace("*", "")
    key = key.replace("cm3", "cm^3").replace("m3", "m^3")
    key = key.replace("(g.Oe)", "(gOe)").replace("(mol.Oe)", "(molOe)")
    conv = _UNIT_ALIASES.get(key) or _UNIT_ALIASES.get(key.lower())
    if conv is None:
        raise InputError(f"unknown susceptibility unit {unit_text!r}; accepted: {ACCEPTED_CHI_UNITS}", field=field)
    return conv


def needs_density(convention: str) -> bool:
    return convention in ("si-mass", "cgs-mass", "si-molar", "cgs-molar")


def needs_molar_mass(convention: str) -> bool:
    return convention in ("si-molar", "cgs-molar")


def _check_inputs(convention: str, density_kg_m3, molar_mass_kg_mol, what: str) -> None:
    if convention not in CONVENTIONS:
        raise InputError(f"expected one of {', '.join(CONVENTIONS)}, got {convention!r}", field="convention")
    if needs_density(convention) and density_kg_m3 is None:
        raise InputError(f"needed to convert {what} {convention}; give a density such as '9.78 g/cm^3'",
                         field="density")
    if needs_molar_mass(convention) and molar_mass_kg_mol is None:
        raise InputError(f"needed to convert {what} {convention}; give a molar mass such as '208.98 g/mol'",
                         field="molar_mass")
    if density_kg_m3 is not None and not (density_kg_m3 > 0 and math.isfinite(density_kg_m3)):
        raise InputError(f"expected a positive density, got {density_kg_m3!r}", field="density")
    if molar_mass_kg_mol is not None and not (molar_mass_kg_mol > 0 and math.isfinite(molar_mass_kg_mol)):
        raise InputError(f"expected a positive molar mass, got {molar_mass_kg_mol!r}", field="molar_mass")


def chi_to_si_volume(
    value: float,
    convention: str,
    density_kg_m3: float | None = None,
    molar_mass_kg_mol: float | None = None,
) -> float:
    """Convert a susceptibility in ``convention`` to the SI volume susceptibility [1].

    Parameters
    ----------
    value : float
        The number as published.
    convention : str
        One of :data:`CONVENTIONS`.
    density_kg_m3 : float, optional
        Needed for mass and molar conventions [kg/m^3].
    molar_mass_kg_mol : float, optional
        Needed for molar conventions [kg/mol].
    """
    _check_inputs(convention, density_kg_m3, molar_mass_kg_mol, "from")
    chi = float(value) * _FOUR_PI_CGS[convention]
    if convention in ("si-mass", "cgs-mass"):
        chi *= density_kg_m3
    elif convention in ("si-molar", "cgs-molar"):
        chi *= density_kg_m3 / molar_mass_kg_mol
    return chi


def chi_from_si_volume(
    chi_si: float,
    convention: str,
    density_kg_m3: float | None = None,
    molar_mass_kg_mol: float | None = None,
) -> float:
    """Inverse of :func:`chi_to_si_volume`."""
    _check_inputs(convention, density_kg_m3, molar_mass_kg_mol, "to")
    value = float(chi_si) / _FOUR_PI_CGS[convention]
    if convention in ("si-mass", "cgs-mass"):
        value /= density_kg_m3
    elif convention in ("si-molar", "cgs-molar"):
        value *= molar_mass_kg_mol / density_kg_m3
    return value


def parse_chi(
    text: str | float,
    field: str = "chi",
    *,
    density_kg_m3: float | None = None,
    molar_mass_kg_mol: float | None = None,
) -> tuple[float, float, str]:
    """Parse ``"-1.6e-4"``, ``"-1.31e-5 cgs-volume"`` or ``"-280e-6 cm^3/mol"``.

    Returns ``(chi_si_volume, value_as_published, convention)``. A bare number is an SI
    volume susceptibility. A dimension that is not a susceptibility ("5 kg") is refused.
    """
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        v = parse_number(text, field)
        check_chi(v, field, text)
        return v, v, "si-volume"
    value, unit = _split_number_unit(str(text), field)
    if not unit:
        check_chi(value, field, text)
        return value, value, "si-volume"
    conv = parse_convention(unit, field)
    chi = chi_to_si_volume(value, conv, density_kg_m3, molar_mass_kg_mol)
    check_chi(chi, field, text)
    return chi, value, conv


# ---------------------------------------------------------------------------
# command lines
# ---------------------------------------------------------------------------
def protect_negative_numbers(argv: Iterable[str]) -> list[str]:
    """Make argparse accept negative numbers in exponent notation.

    argparse takes ``-1.6e-4`` for an option flag (its negative-number rule does not cover
    exponent notation). A token that reads as a negative number, alone or followed by a
    unit (``"-280e-6 cm^3/mol"``), gets a leading space, which argparse never treats as a
    flag and which every parser here strips again.
    """
    out = []
    for tok in argv:
        if _NEG_NUMBER_RE.match(tok):
            out.append(" " + tok)
        else:
            out.append(tok)
    return out
