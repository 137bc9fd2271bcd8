"""Design files for the floating-magnet ("stabilized") mode.

A floater magnet hangs under a lifter magnet above it, and two diamagnetic plates, one
above and one below the floater, make the balance stable. A design is a TOML document
whose quantities are strings with units (parsed by pint through :mod:`matdb.units`);
this module turns it into a :class:`StabilizedDesign` of SI floats, checking every key,
and writes a design back to TOML (:func:`to_toml`).

One floater::

    [lifter]
    shape = "cylinder"              # cuboid [x, y, height] | cylinder [diameter, height]
    size = ["25.4 mm", "25.4 mm"]   # | ring [outer diameter, inner diameter, height]
    grade = "N42"
    br = "1.30 T"                   # optional: replaces the grade's Br at 20 C

    [floater]
    shape = "cylinder"
    size = ["6.35 mm", "3.175 mm"]
    grade = "N42"
    payload = "0.5 g"               # optional, default 0

    [plates]
    material = "pyrolytic-graphite"
    chi = "-1.6e-4"                 # optional override; or chi_perp and chi_par
    thickness = "1 mm"
    distance = "3 mm"               # optional: floater centre to each plate's facing surface
    clearance = "0.5 mm"            # optional: smallest gap floater face to plate (default 0.5 mm)
    width = "30 mm"                 # optional: side of square plates centred on the floater
                                    # (default: very wide); at least the floater's width

    [conditions]
    temperature = "20 degC"         # optional

    payload_range = "0 g..5 g"      # optional, top level: the payloads of the schedule
                                    # (for stations: the shared payload's mass)

Several floaters carrying one rigid payload: ``[[station]]`` tables, each with ``x``,
``y`` and its own ``lifter``, ``floater`` and ``plates`` sub-tables (a station that
omits one takes the top-level table of that name), and a ``[payload]`` table with
``mass`` and ``centre_of_mass`` (2 lengths x, y, or 3 with the height z above the
floaters' centres).

Both magnets are magnetised along +z and share a vertical axis; the plates extend
laterally well beyond the floater, with their c axis (for anisotropic graphite)
vertical, so a vertical field sees ``chi_perp`` and an in-plane one ``chi_par``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Optional

from matdb.errors import InputError, NotFoundError
from matdb.units import parse_chi, parse_length, parse_mass, parse_temperature
from matdb.constants import T_REF_K

__all__ = [
    "DEFAULT_CLEARANCE_M",
    "MagnetSpec",
    "PlatesSpec",
    "Station",
    "PayloadSpec",
    "StabilizedDesign",
    "parse_stabilized",
    "parse_payload_range",
    "to_toml",
]

# matdb's default smallest gap between the floater's face and a plate (a choice, not a
# published figure: room for the floater to move and for plates that are not flat).
DEFAULT_CLEARANCE_M = 0.5e-3

_SHAPES = {"cuboid": 3, "cylinder": 2, "ring": 3}
_SIZE_FORM = {
    "cuboid": "[x, y, height]",
    "cylinder": "[diameter, height]",
    "ring": "[outer diameter, inner diameter, height]",
}
_TOP_KEYS = {"lifter", "floater", "plates", "station", "payload", "conditions", "name", "description",
             "payload_range"}
_MAGNET_KEYS = {"shape", "size", "grade", "br", "rigid"}
_FLOATER_KEYS = _MAGNET_KEYS | {"payload"}
_PLATES_KEYS = {"material", "chi", "chi_perp", "chi_par", "thickness", "distance", "clearance", "width"}
_STATION_KEYS = {"x", "y", "lifter", "floater", "plates", "name"}
_PAYLOAD_KEYS = {"mass", "centre_of_mass"}
_CONDITION_KEYS = {"temperature", "temp_min", "temp_max"}



@dataclass(frozen=True)
class MagnetSpec:
    """A lifter or floater magnet, magnetised along +z, in SI.

    Attributes
    ----------
    shape : str
        ``"cuboid"``, ``"cylinder"`` or ``"ring"``.
    size : tuple of float
        Cuboid ``(x, y, height)``, cylinder ``(diameter, height)``, ring ``(outer
        diameter, inner diameter, height)`` [m].
    grade : str
        Magnet grade as stored in the catalogue.
    br_t : float
        Remanence at 20 C in use [T] (the override when ``br_override``).
    br_override : bool
        True when the design gave ``br``.
    br_min_t : float or None
        The grade's minimum-spec Br [T].
    alpha_br_pct_per_k : float
        Reversible temperature coefficient of Br [%/K].
    density_kg_m3 : float
        Density of the magnet material [kg/m^3].
    """

    shape: str
    size: tuple
    grade: str
    br_t: float
    br_override: bool
    br_min_t: Optional[float]
    alpha_br_pct_per_k: float
    density_kg_m3: float
    mu_rec: Optional[float] = None
    rigid: bool = False

    @property
    def recoil_factor(self) -> float:
        """Polarisation over remanence of this magnet on its own recoil line (its own
        demagnetising field, :mod:`matdb.physics.recoil`); 1 for a rigid magnet or a
        grade without ``mu_rec``. The lifter's field at the floater (tens of mT) changes
        the floater's polarisation by ``chi_rec`` times that, below 0.1 %, and is left out."""
        if self.rigid or self.mu_rec is None or self.mu_rec == 1.0:
            return 1.0
        from matdb.physics.arrangement import build_arrangement

        arr = build_arrangement(self.shape, self.size, "single", br=1.0)
        return float(arr.with_recoil([self.mu_rec - 1.0]).magnets[0].br)

    @property
    def height(self) -> float:
        """Height along the magnetisation [m]."""
        return float(self.size[-1])

    @property
    def volume(self) -> float:
        """Volume [m^3]."""
        import math

        if self.shape == "cuboid":
            return float(self.size[0] * self.size[1] * self.size[2])
        if self.shape == "cylinder":
            return float(math.pi / 4 * self.size[0] ** 2 * self.size[1])
        return float(math.pi / 4 * (self.size[0] ** 2 - self.size[1] ** 2) * self.size[2])

    @property
    def mass_kg(self) -> float:
        """Mass of the magnet [kg]."""
        return self.volume * self.density_kg_m3

    @property
    def width(self) -> float:
        """Largest side-to-side size across the magnetisation [m] (a cuboid's longer
        side, a cylinder's or ring's outer diameter)."""
        return float(max(self.size[0], self.size[1]) if self.shape == "cuboid" else self.size[0])


@dataclass(frozen=True)
class PlatesSpec:
    """The two diamagnetic plates around one floater, in SI.

    Attributes
    ----------
    material : str
        Material id in the catalogue.
    chi_perp, chi_par : float
        SI volume susceptibility for a field along the plate normal and in the plate's
        plane (equal for an isotropic material) [1].
    chi_override : tuple or None
        ``("chi", value)`` or ``("chi_perp_par", perp, par)`` when the design overrides
        the catalogue; None otherwise (kept for :func:`to_toml`).
    temp_coeff_per_k : float or None
        Relative change of ``|chi|`` per kelvin from the catalogue [1/K].
    thickness : float
        Thickness of each plate [m].
    distance : float or None
        Floater centre to each plate's facing surface [m]; None when not given.
    clearance : float
        Smallest gap between the floater's face and a plate [m].
    width : float or None
        Side of square plates centred on the floater's axis [m]; None for plates much
        wider than the floater.
    """

    material: str
    chi_perp: float
    chi_par: float
    chi_override: Optional[tuple]
    temp_coeff_per_k: Optional[float]
    thickness: float
    distance: Optional[float]
    clearance: float
    width: Optional[float] = None

    @property
    def chi_dipole(self) -> float:
        """Effective chi of the plates for a point dipole, ``(chi_perp + chi_par)/2`` [1]."""
        return 0.5 * (self.chi_perp + self.chi_par)


@dataclass(frozen=True)
class Station:
    """One lifter, its floater and the floater's plates, at ``(x, y)`` [m]."""

    lifter: MagnetSpec
    floater: MagnetSpec
    plates: PlatesSpec
    x: float = 0.0
    y: float = 0.0
    payload_kg: float = 0.0
    name: str = ""


@dataclass(frozen=True)
class PayloadSpec:
    """A rigid payload shared by the stations: mass [kg], centre of mass (x, y, z) [m]."""

    mass_kg: float
    centre_of_mass: tuple


@dataclass(frozen=True)
class StabilizedDesign:
    """A floating-magnet design in SI floats.

    ``stations`` holds one station for a single-floater design (``multi`` False), or
    one per ``[[station]]`` table with the shared ``payload``.
    """

    stations: tuple
    payload: Optional[PayloadSpec] = None
    multi: bool = False
    temperature_k: float = T_REF_K
    temp_min_k: Optional[float] = None
    temp_max_k: Optional[float] = None
    name: str = ""
    description: str = ""
    source: Optional[str] = field(default=None, compare=False)
    payload_range: Optional[tuple] = None

    mode = "stabilized"


# ---------------------------------------------------------------------------
# parsing
# ---------------------------------------------------------------------------
def _table(value: Any, key: str) -> dict:
    if not isinstance(value, dict):
        raise InputError(f"{key}: expected a table, got {type(value).__name__}")
    return value


def _check_keys(table: dict, allowed: set, key: str) -> None:
    unknown = sorted(set(table) - allowed)
    if unknown:
        raise InputError(
            f"{key}.{unknown[0]}: unknown key; expected one of {', '.join(sorted(allowed))}"
        )


def _require(table: dict, name: str, key: str):
    if name not in table:
        raise InputError(f"{key}.{name}: missing; this key is required")
    return table[name]


def _string(value: Any, key: str) -> str:
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"{key}: expected a non-empty string, got {value!r}")
    return value.strip()


def _grade(name: str, key: str):
    from matdb.data.catalog import get_grade

    try:
        return get_grade(name)
    except NotFoundError as exc:
        raise InputError(f"{key}: {exc}") from exc


def _material(name: str, key: str):
    from matdb.data.catalog import get_material

    try:
        return get_material(name)
    except NotFoundError as exc:
        raise InputError(f"{key}: {exc}") from exc


def _parse_magnet(t: dict, key: str, allowed: set) -> tuple[MagnetSpec, float]:
    _check_keys(t, allowed, key)
    shape = _string(_require(t, "shape", key), f"{key}.shape").lower()
    if shape not in _SHAPES:
        raise InputError(f"{key}.shape: expected cuboid, cylinder or ring, got {shape!r}")
    raw = _require(t, "size", key)
    n = _SHAPES[shape]
    if not isinstance(raw, (list, tuple)) or len(raw) != n:
        raise InputError(f"{key}.size: expected {n} lengths {_SIZE_FORM[shape]} for a {shape}, got {raw!r}")
    size = []
    for i, v in enumerate(raw):
        inner_ok = shape == "ring" and i == 1
        size.append(parse_length(v, f"{key}.size[{i}]", positive=not inner_ok))
    if shape == "ring" and not size[1] < size[0]:
        raise InputError(f"{key}.size: expected the inner diameter below the outer diameter, got {raw!r}")
    grade_name = _string(_require(t, "grade", key), f"{key}.grade")
    g = _grade(grade_name, f"{key}.grade")
    override = "br" in t
    if override:
        from matdb.units import parse_flux_density

        br = parse_flux_density(t["br"], f"{key}.br")
        if not br > 0:
            raise InputError(f"{key}.br: expected a positive flux density, got {t['br']!r}")
    else:
        br = float(g.br_t)
    payload = parse_mass(t["payload"], f"{key}.payload") if "payload" in t else 0.0
    rigid = t.get("rigid", False)
    if not isinstance(rigid, bool):
        raise InputError(f"{key}.rigid: expected true or false, got {rigid!r}")
    spec = MagnetSpec(
        shape=shape,
        size=tuple(size),
        grade=g.grade,
        br_t=float(br),
        br_override=override,
        br_min_t=None if g.br_min_t is None else float(g.br_min_t),
        alpha_br_pct_per_k=float(g.alpha_br_pct_per_k),
        density_kg_m3=float(g.density_kg_m3),
        mu_rec=None if g.mu_rec is None else float(g.mu_rec),
        rigid=rigid,
    )
    return spec, payload


def _chi_value(value: Any, key: str, density: float) -> float:
    chi, _, _ = parse_chi(value, key, density_kg_m3=density)
    if not chi < 0:
        raise InputError(f"{key}: expected a negative (diamagnetic) susceptibility, got {value!r}")
    return float(chi)


def _parse_plates(t: dict, key: str, floater: MagnetSpec) -> PlatesSpec:
    _check_keys(t, _PLATES_KEYS, key)
    mat_id = _string(_require(t, "material", key), f"{key}.material")
    m = _material(mat_id, f"{key}.material")
    has_chi = "chi" in t
    has_pp = ("chi_perp" in t) or ("chi_par" in t)
    if has_chi and has_pp:
        raise InputError(f"{key}.chi: give either chi or chi_perp and chi_par, not both")
    if has_chi:
        c = _chi_value(t["chi"], f"{key}.chi", m.density_kg_m3)
        perp = par = c
        override = ("chi", c)
    elif has_pp:
        if "chi_perp" not in t or "chi_par" not in t:
            missing = "chi_par" if "chi_perp" in t else "chi_perp"
            raise InputError(f"{key}.{missing}: missing; chi_perp and chi_par go together")
        perp = _chi_value(t["chi_perp"], f"{key}.chi_perp", m.density_kg_m3)
        par = _chi_value(t["chi_par"], f"{key}.chi_par", m.density_kg_m3)
        override = ("chi_perp_par", perp, par)
    else:
        perp, par = float(m.chi_vertical), float(m.chi_horizontal)
        override = None
        if not (perp < 0 and par < 0):
            raise InputError(
                f"{key}.material: {mat_id!r} is not diamagnetic (chi = {m.chi_si:g}); "
                "the plates need a negative susceptibility"
            )
    thickness = parse_length(_require(t, "thickness", key), f"{key}.thickness", positive=True)
    clearance = (
        parse_length(t["clearance"], f"{key}.clearance") if "clearance" in t else DEFAULT_CLEARANCE_M
    )
    distance = None
    if "distance" in t:
        distance = parse_length(t["distance"], f"{key}.distance", positive=True)
        half = floater.height / 2
        if not distance > half:
            raise InputError(
                f"{key}.distance: expected more than the floater's half-height "
                f"({half * 1e3:.4g} mm), got {t['distance']!r}: the plates would cut into the floater"
            )
    width = None
    if "width" in t:
        width = parse_length(t["width"], f"{key}.width", positive=True)
        fw = floater.width
        if width < fw * (1 - 1e-9):
            raise InputError(
                f"{key}.width: expected plates at least as wide as the floater ({fw * 1e3:.4g} mm), "
                f"got {t['width']!r}: narrower plates cannot hold it on the axis"
            )
    return PlatesSpec(
        material=m.id,
        chi_perp=float(perp),
        chi_par=float(par),
        chi_override=override,
        temp_coeff_per_k=None if m.temp_coeff_per_k is None else float(m.temp_coeff_per_k),
        thickness=thickness,
        distance=distance,
        clearance=clearance,
        width=width,
    )


def _parse_station(t: dict, key: str, defaults: dict, x: float, y: float, name: str = "") -> Station:
    tables = {}
    for part in ("lifter", "floater", "plates"):
        if part in t:
            tables[part] = (_table(t[part], f"{key}.{part}"), f"{key}.{part}")
        elif part in defaults:
            tables[part] = (defaults[part], part)
        else:
            raise InputError(f"{key}.{part}: missing; a [{part}] table is required")
    lt, lk = tables["lifter"]
    lifter, _ = _parse_magnet(lt, lk, _MAGNET_KEYS)
    ft, fk = tables["floater"]
    floater, payload = _parse_magnet(ft, fk, _FLOATER_KEYS)
    pt, pk = tables["plates"]
    plates = _parse_plates(pt, pk, floater)
    return Station(lifter=lifter, floater=floater, plates=plates, x=x, y=y, payload_kg=payload, name=name)


def _parse_conditions(doc: dict) -> tuple[float, Optional[float], Optional[float]]:
    if "conditions" not in doc:
        return T_REF_K, None, None
    c = _table(doc["conditions"], "conditions")
    _check_keys(c, _CONDITION_KEYS, "conditions")
    t = parse_temperature(c["temperature"], "conditions.temperature") if "temperature" in c else None
    tmin = parse_temperature(c["temp_min"], "conditions.temp_min") if "temp_min" in c else None
    tmax = parse_temperature(c["temp_max"], "conditions.temp_max") if "temp_max" in c else None
    if (tmin is None) != (tmax is None):
        missing = "temp_max" if tmax is None else "temp_min"
        raise InputError(f"conditions.{missing}: missing; temp_min and temp_max go together")
    if tmin is not None and not tmin <= tmax:
        raise InputError("conditions.temp_min: expected at most conditions.temp_max")
    if t is None:
        t = T_REF_K if tmin is None else 0.5 * (tmin + tmax)
    return t, tmin, tmax


def parse_stabilized(doc: dict, source: Optional[str] = None) -> StabilizedDesign:
    """Check a floating-magnet design document and convert it to SI floats.

    Parameters
    ----------
    doc : dict
        The parsed TOML document (see the module docstring for its keys).
    source : str, optional
        Where the document came from (a path), kept for messages.

    Returns
    -------
    StabilizedDesign

    Raises
    ------
    InputError
        For an unknown key, a missing key or unit, a negative size, an unknown grade or
        material, a positive chi, or plates that would cut into the floater; the message
        names the key.
    """
    doc = _table(doc, "design")
    _check_keys(doc, _TOP_KEYS, "design")
    name = _string(doc["name"], "name") if "name" in doc else ""
    description = _string(doc["description"], "description") if "description" in doc else ""
    temp, tmin, tmax = _parse_conditions(doc)
    prange = parse_payload_range(doc["payload_range"], "payload_range") if "payload_range" in doc else None
    defaults = {}
    for part, allowed in (("lifter", _MAGNET_KEYS), ("floater", _FLOATER_KEYS), ("plates", _PLATES_KEYS)):
        if part in doc:
            defaults[part] = _table(doc[part], part)
            _check_keys(defaults[part], allowed, part)

    if "station" not in doc:
        if "payload" in doc:
            raise InputError(
                "payload: a shared [payload] table needs [[station]] tables; "
                "for one floater give floater.payload"
            )
        st = _parse_station({}, "design", defaults, 0.0, 0.0)
        return StabilizedDesign(
            stations=(st,), payload=None, multi=False, temperature_k=temp,
            temp_min_k=tmin, temp_max_k=tmax, name=name, description=description, source=source,
            payload_range=prange,
        )

    raw = doc["station"]
    if not isinstance(raw, list) or not raw:
        raise InputError("station: expected one or more [[station]] tables")
    from matdb.limits import MAX_MAGNETS, check_count

    check_count(len(raw), MAX_MAGNETS // 2, "station", "stations (two magnets each)")
    stations = []
    for i, s in enumerate(raw):
        key = f"station[{i}]"
        s = _table(s, key)
        _check_keys(s, _STATION_KEYS, key)
        x = _signed_length(_require(s, "x", key), f"{key}.x")
        y = _signed_length(_require(s, "y", key), f"{key}.y")
        sname = _string(s["name"], f"{key}.name") if "name" in s else ""
        stations.append(_parse_station(s, key, defaults, x, y, sname))
    for i in range(len(stations)):
        for j in range(i):
            if abs(stations[i].x - stations[j].x) < 1e-9 and abs(stations[i].y - stations[j].y) < 1e-9:
                raise InputError(f"station[{i}].x: same position as station[{j}]")
    p = _table(_require(doc, "payload", "design"), "payload")
    _check_keys(p, _PAYLOAD_KEYS, "payload")
    mass = parse_mass(_require(p, "mass", "payload"), "payload.mass")
    com_raw = p.get("centre_of_mass", ["0 mm", "0 mm"])
    if not isinstance(com_raw, (list, tuple)) or len(com_raw) not in (2, 3):
        raise InputError(f"payload.centre_of_mass: expected 2 or 3 lengths [x, y] or [x, y, z], got {com_raw!r}")
    com = [_signed_length(v, f"payload.centre_of_mass[{i}]") for i, v in enumerate(com_raw)]
    if len(com) == 2:
        com.append(0.0)
    return StabilizedDesign(
        stations=tuple(stations), payload=PayloadSpec(mass_kg=mass, centre_of_mass=tuple(com)),
        multi=True, temperature_k=temp, temp_min_k=tmin, temp_max_k=tmax, name=name,
        description=description, source=source, payload_range=prange,
    )


def parse_payload_range(text: Any, field: str = "payload_range") -> tuple[float, float]:
    """``"0 g..5 g"`` (or ``"0..5 g"``: one unit for both) -> ``(lo, hi)`` [kg].

    Raises
    ------
    InputError
        Naming ``field`` when the text is not two masses joined by ``..``, a mass is
        negative or the first is larger than the second.
    """
    import re

    if not isinstance(text, str) or text.count("..") != 1:
        raise InputError(f"{field}: expected a range of masses such as '0 g..5 g', got {text!r}")
    a, b = (x.strip() for x in text.split(".."))
    if not a or not b:
        raise InputError(f"{field}: expected a range of masses such as '0 g..5 g', got {text!r}")
    bare = r"^[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$"
    if re.match(bare, a) and not re.match(bare, b):
        unit = re.sub(r"^[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?\s*", "", b)
        a = f"{a} {unit}"
    lo = parse_mass(a, f"{field} (from)")
    hi = parse_mass(b, f"{field} (to)")
    if not lo <= hi:
        raise InputError(f"{field}: expected the first mass at most the second, got {text!r}")
    return lo, hi


def _signed_length(text: Any, key: str) -> float:
    from matdb.units import parse_quantity

    return parse_quantity(text, "m", key)


# ---------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------
def _mm(v: float) -> str:
    return f"{v * 1e3:.12g} mm"


def _magnet_table(m: MagnetSpec, payload_kg: Optional[float] = None) -> dict:
    t: dict = {"shape": m.shape, "size": [_mm(v) for v in m.size], "grade": m.grade}
    if m.br_override:
        t["br"] = f"{m.br_t:.12g} T"
    if payload_kg:
        t["payload"] = f"{payload_kg * 1e3:.12g} g"
    if m.rigid:
        t["rigid"] = True
    return t


def _plates_table(p: PlatesSpec) -> dict:
    t: dict = {"material": p.material}
    if p.chi_override is not None:
        if p.chi_override[0] == "chi":
            t["chi"] = f"{p.chi_override[1]:.12g}"
        else:
            t["chi_perp"] = f"{p.chi_override[1]:.12g}"
            t["chi_par"] = f"{p.chi_override[2]:.12g}"
    t["thickness"] = _mm(p.thickness)
    if p.distance is not None:
        t["distance"] = _mm(p.distance)
    t["clearance"] = _mm(p.clearance)
    if p.width is not None:
        t["width"] = _mm(p.width)
    return t


def to_toml(design: StabilizedDesign) -> str:
    """Write ``design`` as a TOML design document (quantities as strings with units).

    ``parse_stabilized(tomllib.loads(to_toml(d)))`` gives back ``d`` (grades and
    materials resolved again from the catalogue).
    """
    import tomli_w

    doc: dict = {}
    if design.name:
        doc["name"] = design.name
    if design.description:
        doc["description"] = design.description
    if design.payload_range is not None:
        lo, hi = design.payload_range
        doc["payload_range"] = f"{lo * 1e3:.12g} g..{hi * 1e3:.12g} g"
    cond: dict = {"temperature": f"{design.temperature_k:.12g} K"}
    if design.temp_min_k is not None:
        cond["temp_min"] = f"{design.temp_min_k:.12g} K"
        cond["temp_max"] = f"{design.temp_max_k:.12g} K"
    if not design.multi:
        st = design.stations[0]
        doc["lifter"] = _magnet_table(st.lifter)
        doc["floater"] = _magnet_table(st.floater, st.payload_kg)
        doc["plates"] = _plates_table(st.plates)
    else:
        stations = []
        for st in design.stations:
            t: dict = {"x": _mm(st.x), "y": _mm(st.y)}
            if st.name:
                t["name"] = st.name
            t["lifter"] = _magnet_table(st.lifter)
            t["floater"] = _magnet_table(st.floater, st.payload_kg)
            t["plates"] = _plates_table(st.plates)
            stations.append(t)
        doc["station"] = stations
        p = design.payload
        doc["payload"] = {
            "mass": f"{p.mass_kg * 1e3:.12g} g",
            "centre_of_mass": [_mm(v) for v in p.centre_of_mass],
        }
    doc["conditions"] = cond
    return tomli_w.dumps(doc)
