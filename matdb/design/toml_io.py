"""Design files: one TOML reader and one TOML writer for both kinds of design.

Every quantity in a design file is a string with units (``"12.7 mm"``, ``"0.2 g"``,
``"60 degC"``), parsed once here through :mod:`matdb.units`; susceptibilities are SI
volume values (a bare number) or carry one of the conventions
:func:`matdb.units.parse_chi` knows. Nothing past this module sees a unit string.

Floating plate (:class:`~matdb.design.model.PlateDesign`)::

    [magnets]   shape, size, grade, br, pattern, rows, cols, spacing, back_plate, cover,
                rigid, recoil_cells, [[magnets.item]] (position, direction, shape, size, grade, br)
    [plate]     material, shape, size, chi | chi_perp + chi_par, payload, payload_height,
                min_gap, center, sigma_in_plane, sigma_across, slots, holes, payload_size
    [conditions] temperature, temp_min, temp_max

Floating magnet (:class:`~matdb.design.model.StabilizedDesign`), chosen when the document
has a ``[lifter]``, ``[floater]`` or ``[[station]]`` table::

    [lifter]    shape, size, grade, br, rigid
    [floater]   shape, size, grade, br, rigid, payload
    [plates]    material, chi | chi_perp + chi_par, thickness, distance, clearance, width
    [conditions] temperature, temp_min + temp_max
    payload_range = "0 g..5 g"          (top level, optional)
    [[station]] x, y, name, and its own lifter / floater / plates (else the top-level ones)
    [payload]   mass, centre_of_mass    (with stations)

Both magnets of a floating-magnet design are magnetised along +z on one vertical axis; the
plates' c axis (for anisotropic graphite) is vertical, so a vertical field sees
``chi_perp`` and an in-plane one ``chi_par``.

Every error is an :class:`~matdb.errors.InputError` naming the key, e.g.
``plate.size: expected 3 lengths [x, y, thickness] for a rectangle``.

The writer (:func:`design_to_toml`) writes each number in the shortest text that reads
back to exactly the same float, so ``load_design_text(design_to_toml(d)) == d``.
"""

from __future__ import annotations

import re
import tomllib
from pathlib import Path
from typing import TYPE_CHECKING, Any

import tomli_w

if TYPE_CHECKING:
    from matdb.physics.dynamics import Hole, Slots

from matdb import limits
from matdb.constants import T_REF_K, kelvin_to_celsius
from matdb.data.catalog import get_grade, get_material
from matdb.design.model import (DEFAULT_CLEARANCE_M, MAGNET_SHAPES, PATTERNS, PLATE_SHAPES, SIZE_FORMS,
                                Conditions, MagnetItem, MagnetSpec, PayloadSpec, PlateDesign,
                                PlatesSpec, PlateSpec, SingleMagnet, StabilizedDesign, Station)
from matdb.errors import InputError, NotFoundError
from matdb.units import (parse_chi, parse_flux_density, parse_length, parse_mass, parse_number,
                         parse_quantity, parse_temperature)

__all__ = ["load_design", "load_design_text", "parse_design", "parse_stabilized", "parse_payload_range",
           "design_to_toml", "write_design", "document_to_toml", "exact_quantity", "exact_temperature"]

TOP_KEYS = {"name", "description", "magnets", "plate", "conditions"}
MAGNET_KEYS = {"shape", "size", "grade", "br", "pattern", "rows", "cols", "spacing",
               "back_plate", "cover", "item", "rigid", "recoil_cells"}
ITEM_KEYS = {"position", "direction", "size", "shape", "grade", "br"}
PLATE_KEYS = {"material", "shape", "size", "chi", "chi_perp", "chi_par", "payload",
              "payload_height", "min_gap", "center", "sigma_in_plane", "sigma_across",
              "slots", "holes", "payload_size"}
SLOT_KEYS = {"count", "width", "length", "direction", "start"}
HOLE_KEYS = {"center", "diameter"}
CONDITION_KEYS = {"temperature", "temp_min", "temp_max"}
STABILIZED_KEYS = {"lifter", "floater", "station"}
FM_TOP_KEYS = {"lifter", "floater", "plates", "station", "payload", "conditions", "name", "description",
               "payload_range"}
LIFTER_KEYS = {"shape", "size", "grade", "br", "rigid"}
FLOATER_KEYS = LIFTER_KEYS | {"payload"}
PLATES_KEYS = {"material", "chi", "chi_perp", "chi_par", "thickness", "distance", "clearance", "width"}
STATION_KEYS = {"x", "y", "lifter", "floater", "plates", "name"}
PAYLOAD_KEYS = {"mass", "centre_of_mass"}

_BARE = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"


# ---------------------------------------------------------------------------
# checks shared by both modes
# ---------------------------------------------------------------------------
def _table(value: Any, key: str) -> dict:
    if not isinstance(value, dict):
        raise InputError(f"expected a table, got {value!r}", field=key)
    return value


def _check_keys(table: Any, allowed: set[str], where: str) -> dict:
    table = _table(table, where or "design")
    for k in sorted(table):
        if k not in allowed:
            raise InputError(f"unknown key; expected one of {', '.join(sorted(allowed))}",
                             field=f"{where}.{k}" if where else k)
    return table


def _require(table: dict, name: str, key: str, expected: str = "this key is required"):
    if name not in table:
        raise InputError(f"missing; {expected}", field=f"{key}.{name}")
    return table[name]


def _string(value: Any, key: str) -> str:
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"expected a non-empty string, got {value!r}", field=key)
    return value.strip()


def _choice(value: Any, choices: tuple[str, ...], key: str) -> str:
    if not isinstance(value, str) or value.strip().lower() not in choices:
        raise InputError(f"expected one of {', '.join(choices)}, got {value!r}", field=key)
    return value.strip().lower()


def _int(value: Any, key: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise InputError(f"expected a positive whole number, got {value!r}", field=key)
    return int(value)


def _bool(value: Any, key: str) -> bool:
    if not isinstance(value, bool):
        raise InputError(f"expected true or false, got {value!r}", field=key)
    return value


def _lengths(value: Any, key: str, n: int, form: str, what: str, positive: bool = True) -> tuple[float, ...]:
    if not isinstance(value, list) or len(value) != n:
        raise InputError(f"expected {n} lengths {form} for {what}, got {value!r}", field=key)
    out = []
    for i, v in enumerate(value):
        x = parse_length(v, f"{key}[{i}]")
        if positive and x <= 0:
            raise InputError(f"expected a positive length, got {v!r}", field=f"{key}[{i}]")
        out.append(x)
    return tuple(out)


def _signed_lengths(value: Any, key: str, counts: tuple[int, ...]) -> tuple[float, ...]:
    if not isinstance(value, list) or len(value) not in counts:
        form = " or ".join(str(c) for c in counts)
        raise InputError(f"expected {form} lengths, e.g. [\"0 mm\", \"12.7 mm\"], got {value!r}", field=key)
    return tuple(parse_quantity(v, "m", f"{key}[{i}]") for i, v in enumerate(value))


def _size(value: Any, shape: str, key: str) -> tuple[float, ...]:
    """A ``size`` in the form :data:`~matdb.design.model.SIZE_FORMS` gives for ``shape``
    (a ring's inner diameter may be zero, and must be below its outer diameter)."""
    n, form = SIZE_FORMS[shape]
    if not isinstance(value, list) or len(value) != n:
        raise InputError(f"expected {n} lengths {form} for a {shape}, got {value!r}", field=key)
    size = _lengths(value, key, n, form, f"a {shape}", positive=False)
    for i, x in enumerate(size):
        if x <= 0 and not (shape == "ring" and i == 1):
            raise InputError(f"expected a positive length, got {value[i]!r}", field=f"{key}[{i}]")
    if shape == "ring" and not size[1] < size[0]:
        raise InputError("the inner diameter must be smaller than the outer diameter", field=key)
    return size


def _shape_size(t: dict, key: str, shapes: tuple[str, ...], default: str | None) -> tuple[str, tuple]:
    if "shape" not in t and default is None:
        raise InputError(f"missing; expected one of {', '.join(shapes)}", field=f"{key}.shape")
    shape = _choice(t.get("shape", default), shapes, f"{key}.shape")
    n, form = SIZE_FORMS[shape]
    raw = _require(t, "size", key, f"expected {n} lengths {form} for a {shape}")
    return shape, _size(raw, shape, f"{key}.size")


def _catalogue(lookup, name: Any, key: str, expected: str):
    """``lookup(name)`` from the catalogue; an unknown name is an error naming ``key``."""
    if not isinstance(name, str) or not name.strip():
        raise InputError(f"expected {expected}, got {name!r}", field=key)
    try:
        return lookup(name.strip())
    except NotFoundError as exc:
        # the catalogue names its own field (grade, material): the design names the key instead
        text = exc.message if exc.field else str(exc)
        head, _, rest = text.partition(": ")
        raise InputError(rest if head in ("grade", "material") else text, field=key) from exc


def _grade(name: Any, key: str):
    """The catalogue's GradeProps of ``name``."""
    return _catalogue(get_grade, name, key, "a grade name such as \"N42\"")


def _material(name: Any, key: str):
    """The catalogue's MaterialProps of ``name``."""
    return _catalogue(get_material, name, key, "a material id such as \"pyrolytic-graphite\"")


def _br(value: Any, key: str) -> float:
    br = parse_flux_density(value, key)
    if not br > 0:
        raise InputError(f"expected a positive remanence, got {value!r}", field=key)
    return br


def _chi(value: Any, key: str, density: float | None) -> float:
    if isinstance(value, bool):
        raise InputError(f"expected a susceptibility such as \"-4.5e-4\", got {value!r}", field=key)
    chi, _, _ = parse_chi(value, key, density_kg_m3=density)
    if not chi < 0:
        raise InputError(f"expected a negative (diamagnetic) susceptibility, got {value!r}", field=key)
    return float(chi)


def _chi_overrides(t: dict, key: str, mat) -> tuple[float | None, float | None, float | None]:
    """``(chi, chi_perp, chi_par)`` given in table ``t`` (None where not given); refuses a
    material that is not diamagnetic when nothing overrides it."""
    chi = chi_perp = chi_par = None
    if "chi" in t and ("chi_perp" in t or "chi_par" in t):
        raise InputError("give either chi or chi_perp and chi_par, not both", field=f"{key}.chi")
    if "chi" in t:
        chi = _chi(t["chi"], f"{key}.chi", mat.density_kg_m3)
    if ("chi_perp" in t) != ("chi_par" in t):
        missing = "chi_par" if "chi_perp" in t else "chi_perp"
        raise InputError("missing; chi_perp and chi_par go together", field=f"{key}.{missing}")
    if "chi_perp" in t:
        chi_perp = _chi(t["chi_perp"], f"{key}.chi_perp", mat.density_kg_m3)
        chi_par = _chi(t["chi_par"], f"{key}.chi_par", mat.density_kg_m3)
    if chi is None and chi_perp is None and not (mat.chi_vertical < 0 and mat.chi_horizontal < 0):
        raise InputError(f"{mat.id} is not diamagnetic (chi = {mat.chi_si:.3g}); "
                         "it is pulled towards the magnets and cannot float", field=f"{key}.material")
    return chi, chi_perp, chi_par


def _conditions(t: Any, paired: bool) -> Conditions:
    """The ``[conditions]`` table; with ``paired`` temp_min and temp_max go together."""
    t = _check_keys(t, CONDITION_KEYS, "conditions")
    temps = {k: parse_temperature(t[k], f"conditions.{k}") for k in sorted(CONDITION_KEYS) if k in t}
    lo, hi = temps.get("temp_min"), temps.get("temp_max")
    if paired and (lo is None) != (hi is None):
        missing = "temp_max" if hi is None else "temp_min"
        raise InputError("missing; temp_min and temp_max go together", field=f"conditions.{missing}")
    if lo is not None and hi is not None and lo > hi:
        raise InputError("expected temp_min <= temp_max", field="conditions.temp_min")
    return Conditions(temps.get("temperature"), lo, hi)


def _text_keys(doc: dict) -> tuple[str | None, str | None]:
    out = []
    for k in ("name", "description"):
        v = doc.get(k)
        if v is not None and not isinstance(v, str):
            raise InputError(f"expected a string, got {v!r}", field=k)
        out.append(v)
    return out[0], out[1]


# ---------------------------------------------------------------------------
# floating plate
# ---------------------------------------------------------------------------
def _parse_item(it: Any, key: str, shape: str, grades: dict) -> MagnetItem:
    it = _check_keys(it, ITEM_KEYS, key)
    for need in ("position", "direction"):
        _require(it, need, key, "each item needs position and direction")
    pos = _signed_lengths(it["position"], f"{key}.position", (3,))
    d = it["direction"]
    if not isinstance(d, list) or len(d) != 3:
        raise InputError(f"expected 3 numbers (a unit vector), got {d!r}", field=f"{key}.direction")
    dvec = tuple(parse_number(v, f"{key}.direction[{j}]") for j, v in enumerate(d))
    if all(v == 0 for v in dvec):
        raise InputError("expected a non-zero vector", field=f"{key}.direction")
    ishape = _choice(it["shape"], MAGNET_SHAPES, f"{key}.shape") if "shape" in it else None
    isize = _size(it["size"], ishape or shape, f"{key}.size") if "size" in it else None
    if ishape is not None and ishape != shape and isize is None:
        raise InputError("needed when the item's shape differs from magnets.shape", field=f"{key}.size")
    igrade = None
    if "grade" in it:
        g = _grade(it["grade"], f"{key}.grade")
        grades.setdefault(g.grade, g)
        igrade = g.grade
    ibr = _br(it["br"], f"{key}.br") if "br" in it else None
    return MagnetItem(pos, dvec, ishape, isize, igrade, ibr)


def _parse_magnets(t: Any) -> MagnetSpec:
    t = _check_keys(t, MAGNET_KEYS, "magnets")
    g = _grade(_require(t, "grade", "magnets", "expected a grade name such as \"N42\""), "magnets.grade")
    grades = {g.grade: g}
    shape, size = _shape_size(t, "magnets", MAGNET_SHAPES, "cuboid")
    br = _br(t["br"], "magnets.br") if "br" in t else None
    pattern = _choice(t.get("pattern", "single"), PATTERNS, "magnets.pattern")
    rows = _int(t.get("rows", 1), "magnets.rows")
    cols = _int(t.get("cols", 1), "magnets.cols")
    limits.check_arrangement(rows, cols, "magnets")
    if pattern == "single" and rows * cols != 1:
        raise InputError("pattern 'single' is one magnet; use 'grid', "
                         "'checkerboard' or 'stripes' for rows and cols", field="magnets.rows")
    spacing = parse_length(t.get("spacing", "0 mm"), "magnets.spacing")
    back = _bool(t.get("back_plate", False), "magnets.back_plate")
    cover = parse_length(t.get("cover", "0 mm"), "magnets.cover")
    items: list[MagnetItem] = []
    if pattern == "list":
        raw = t.get("item")
        if not isinstance(raw, list) or not raw:
            raise InputError("pattern 'list' needs [[magnets.item]] tables "
                             "with position and direction", field="magnets.item")
        limits.check_count(len(raw), limits.MAX_MAGNETS, "magnets.item", "magnets")
        items = [_parse_item(it, f"magnets.item[{i}]", shape, grades) for i, it in enumerate(raw)]
    elif "item" in t:
        raise InputError("only used with pattern = \"list\"", field="magnets.item")
    rigid = _bool(t.get("rigid", False), "magnets.rigid")
    cells = t.get("recoil_cells")
    if cells is not None:
        cells = _int(cells, "magnets.recoil_cells")
        limits.check_count(cells, limits.MAX_RECOIL_CELLS, "magnets.recoil_cells", "cells along a magnet edge")
    return MagnetSpec(shape, size, g.grade, br, pattern, rows, cols, spacing, back, cover,
                      tuple(items), grades, rigid, cells)


def _sigma(value: Any, key: str) -> float:
    if isinstance(value, bool):
        raise InputError(f"expected a conductivity such as \"2e5 S/m\", got {value!r}", field=key)
    v = parse_quantity(value, "S/m", key)
    if not v >= 0:
        raise InputError(f"expected a conductivity of zero or more, got {value!r}", field=key)
    return v


def _parse_slots(t: Any, shape: str, size: tuple[float, ...]) -> Slots:
    from matdb.physics.dynamics import Slots  # lazy: the plate geometry module imports scipy (start-up)

    t = _check_keys(t, SLOT_KEYS, "plate.slots")
    for need in ("count", "width", "length"):
        _require(t, need, "plate.slots", "slots need count, width and length")
    count = t["count"]
    if isinstance(count, bool) or not isinstance(count, int) or count < 0:
        raise InputError(f"expected a whole number of zero or more, got {count!r}", field="plate.slots.count")
    width = parse_length(t["width"], "plate.slots.width", positive=True)
    length = parse_length(t["length"], "plate.slots.length", positive=True)
    direction = _choice(t.get("direction", "x"), ("x", "y"), "plate.slots.direction")
    start = _choice(t.get("start", "centre"), ("centre", "edge", "alternate"), "plate.slots.start")
    along = size[0] if (direction == "x" or shape == "disc") else size[1]
    across = size[0] if shape == "disc" else (size[1] if direction == "x" else size[0])
    if count and width * count >= across:
        raise InputError(f"{count} slots of {width * 1e3:.3g} mm do not fit "
                         f"across {across * 1e3:.3g} mm", field="plate.slots.width")
    if length >= along:
        raise InputError(f"expected less than the plate's {along * 1e3:.3g} mm "
                         "(a slot through the whole plate cuts it apart)", field="plate.slots.length")
    return Slots(count, width, length, direction, start)


def _parse_holes(value: Any) -> tuple[Hole, ...]:
    from matdb.physics.dynamics import Hole  # lazy: the plate geometry module imports scipy (start-up)

    if not isinstance(value, list):
        raise InputError("expected a list of tables such as "
                         "[{center = [\"0 mm\", \"0 mm\"], diameter = \"1 mm\"}]", field="plate.holes")
    out = []
    for i, h in enumerate(value):
        key = f"plate.holes[{i}]"
        h = _check_keys(h, HOLE_KEYS, key)
        d = parse_length(_require(h, "diameter", key), f"{key}.diameter", positive=True)
        c = _signed_lengths(h.get("center", ["0 mm", "0 mm"]), f"{key}.center", (2,))
        out.append(Hole(c[0], c[1], d))
    return tuple(out)


def _parse_plate(t: Any) -> PlateSpec:
    t = _check_keys(t, PLATE_KEYS, "plate")
    mat = _material(_require(t, "material", "plate", "expected a material id such as \"pyrolytic-graphite\""),
                    "plate.material")
    shape, size = _shape_size(t, "plate", PLATE_SHAPES, "rectangle")
    chi, chi_perp, chi_par = _chi_overrides(t, "plate", mat)
    payload = parse_mass(t.get("payload", "0 g"), "plate.payload")
    ph = parse_length(t.get("payload_height", "0 mm"), "plate.payload_height")
    min_gap = parse_length(t.get("min_gap", "0.2 mm"), "plate.min_gap")
    center = _signed_lengths(t["center"], "plate.center", (2,)) if "center" in t else (0.0, 0.0)
    sig_ab = _sigma(t["sigma_in_plane"], "plate.sigma_in_plane") if "sigma_in_plane" in t else None
    sig_c = _sigma(t["sigma_across"], "plate.sigma_across") if "sigma_across" in t else None
    slots = _parse_slots(t["slots"], shape, size) if "slots" in t else None
    holes = _parse_holes(t["holes"]) if "holes" in t else ()
    psize = None
    if "payload_size" in t:
        psize = _lengths(t["payload_size"], "plate.payload_size", 3, "[x, y, height]",
                         "a block payload", positive=False)
    spec = PlateSpec(mat.id, shape, size, chi, chi_perp, chi_par, payload, ph, min_gap,
                     center, mat, sig_ab, sig_c, slots, holes, psize)
    if slots is not None or holes:
        from matdb.physics.dynamics import outline_pieces, plate_outline  # lazy, as in _parse_slots

        n = len(outline_pieces(plate_outline(spec.shape, spec.lx_m, spec.ly_m, center[0], center[1],
                                             slots, holes)))
        if n > 1:
            raise InputError(f"slots and holes cut the plate into {n} pieces; "
                             "expected one piece", field="plate.slots")
    return spec


# ---------------------------------------------------------------------------
# floating magnet
# ---------------------------------------------------------------------------
def _parse_single(t: dict, key: str, allowed: set) -> tuple[SingleMagnet, float]:
    _check_keys(t, allowed, key)
    shape, size = _shape_size(t, key, MAGNET_SHAPES, None)
    g = _grade(_require(t, "grade", key, "expected a grade name such as \"N42\""), f"{key}.grade")
    override = "br" in t
    br = _br(t["br"], f"{key}.br") if override else float(g.br_t)
    payload = parse_mass(t["payload"], f"{key}.payload") if "payload" in t else 0.0
    spec = SingleMagnet(
        shape=shape, size=size, grade=g.grade, br_t=float(br), br_override=override,
        br_min_t=None if g.br_min_t is None else float(g.br_min_t),
        alpha_br_pct_per_k=float(g.alpha_br_pct_per_k), density_kg_m3=float(g.density_kg_m3),
        mu_rec=None if g.mu_rec is None else float(g.mu_rec),
        rigid=_bool(t.get("rigid", False), f"{key}.rigid"),
    )
    return spec, payload


def _parse_plates(t: dict, key: str, floater: SingleMagnet) -> PlatesSpec:
    _check_keys(t, PLATES_KEYS, key)
    m = _material(_require(t, "material", key), f"{key}.material")
    chi, perp, par = _chi_overrides(t, key, m)
    if chi is not None:
        perp = par = chi
        override: tuple | None = ("chi", chi)
    elif perp is not None:
        override = ("chi_perp_par", perp, par)
    else:
        perp, par, override = float(m.chi_vertical), float(m.chi_horizontal), None
    thickness = parse_length(_require(t, "thickness", key), f"{key}.thickness", positive=True)
    clearance = parse_length(t["clearance"], f"{key}.clearance") if "clearance" in t else DEFAULT_CLEARANCE_M
    distance = None
    if "distance" in t:
        distance = parse_length(t["distance"], f"{key}.distance", positive=True)
        half = floater.height / 2
        if not distance > half:
            raise InputError("expected more than the floater's half-height "
                             f"({half * 1e3:.4g} mm), got {t['distance']!r}: the plates would cut into the floater",
                             field=f"{key}.distance")
    width = None
    if "width" in t:
        width = parse_length(t["width"], f"{key}.width", positive=True)
        fw = floater.width
        if width < fw * (1 - 1e-9):
            raise InputError(f"expected plates at least as wide as the floater ({fw * 1e3:.4g} mm), "
                             f"got {t['width']!r}: narrower plates cannot hold it on the axis", field=f"{key}.width")
    return PlatesSpec(material=m.id, chi_perp=float(perp), chi_par=float(par), chi_override=override,
                      temp_coeff_per_k=None if m.temp_coeff_per_k is None else float(m.temp_coeff_per_k),
                      thickness=thickness, distance=distance, clearance=clearance, width=width)


def _parse_station(t: dict, key: str, defaults: dict, x: float, y: float, name: str = "") -> Station:
    tables = {}
    for part in ("lifter", "floater", "plates"):
        if part in t:
            tables[part] = (_table(t[part], f"{key}.{part}"), f"{key}.{part}")
        elif part in defaults:
            tables[part] = (defaults[part], part)
        else:
            raise InputError(f"missing; a [{part}] table is required", field=f"{key}.{part}")
    lifter, _ = _parse_single(*tables["lifter"], LIFTER_KEYS)
    floater, payload = _parse_single(*tables["floater"], FLOATER_KEYS)
    plates = _parse_plates(*tables["plates"], floater)
    return Station(lifter=lifter, floater=floater, plates=plates, x=x, y=y, payload_kg=payload, name=name)


def parse_stabilized(doc: dict, source: str | None = None) -> StabilizedDesign:
    """Check a floating-magnet design document and convert it to SI floats.

    Parameters
    ----------
    doc : dict
        The parsed TOML document (keys in the module docstring).
    source : str, optional
        Where the document came from (a path), kept for messages.

    Raises
    ------
    InputError
        For an unknown key, a missing key or unit, a negative size, an unknown grade or
        material, a positive chi, or plates that would cut into the floater; the message
        names the key.
    """
    doc = _check_keys(doc, FM_TOP_KEYS, "design")
    name = _string(doc["name"], "name") if "name" in doc else ""
    description = _string(doc["description"], "description") if "description" in doc else ""
    cond = _conditions(doc.get("conditions", {}), paired=True)
    tmin, tmax = cond.temp_min_k, cond.temp_max_k
    temp = cond.temperature_k
    if temp is None:
        temp = T_REF_K if tmin is None else 0.5 * (tmin + tmax)
    prange = parse_payload_range(doc["payload_range"], "payload_range") if "payload_range" in doc else None
    defaults = {part: _check_keys(doc[part], allowed, part)
                for part, allowed in (("lifter", LIFTER_KEYS), ("floater", FLOATER_KEYS), ("plates", PLATES_KEYS))
                if part in doc}
    common = dict(temperature_k=temp, temp_min_k=tmin, temp_max_k=tmax, name=name, description=description,
                  source=source, payload_range=prange)
    if "station" not in doc:
        if "payload" in doc:
            raise InputError("a shared [payload] table needs [[station]] tables; "
                             "for one floater give floater.payload", field="payload")
        return StabilizedDesign(stations=(_parse_station({}, "design", defaults, 0.0, 0.0),), **common)

    raw = doc["station"]
    if not isinstance(raw, list) or not raw:
        raise InputError("expected one or more [[station]] tables", field="station")
    limits.check_count(len(raw), limits.MAX_MAGNETS // 2, "station", "stations (two magnets each)")
    stations = []
    for i, s in enumerate(raw):
        key = f"station[{i}]"
        s = _check_keys(s, STATION_KEYS, key)
        x = parse_quantity(_require(s, "x", key), "m", f"{key}.x")
        y = parse_quantity(_require(s, "y", key), "m", f"{key}.y")
        sname = _string(s["name"], f"{key}.name") if "name" in s else ""
        stations.append(_parse_station(s, key, defaults, x, y, sname))
    for i in range(len(stations)):
        for j in range(i):
            if abs(stations[i].x - stations[j].x) < 1e-9 and abs(stations[i].y - stations[j].y) < 1e-9:
                raise InputError(f"same position as station[{j}]", field=f"station[{i}].x")
    p = _check_keys(_require(doc, "payload", "design"), PAYLOAD_KEYS, "payload")
    mass = parse_mass(_require(p, "mass", "payload"), "payload.mass")
    com = list(_signed_lengths(p.get("centre_of_mass", ["0 mm", "0 mm"]), "payload.centre_of_mass", (2, 3)))
    if len(com) == 2:
        com.append(0.0)
    return StabilizedDesign(stations=tuple(stations), payload=PayloadSpec(mass_kg=mass, centre_of_mass=tuple(com)),
                            multi=True, **common)


def parse_payload_range(text: Any, field: str = "payload_range") -> tuple[float, float]:
    """``"0 g..5 g"`` (or ``"0..5 g"``: one unit for both) -> ``(lo, hi)`` [kg].

    Raises
    ------
    InputError
        Naming ``field`` when the text is not two masses joined by ``..``, a mass is
        negative or the first is larger than the second.
    """
    if not isinstance(text, str) or text.count("..") != 1:
        raise InputError(f"expected a range of masses such as '0 g..5 g', got {text!r}", field=field)
    a, b = (x.strip() for x in text.split(".."))
    if not a or not b:
        raise InputError(f"expected a range of masses such as '0 g..5 g', got {text!r}", field=field)
    if re.fullmatch(_BARE, a) and not re.fullmatch(_BARE, b):
        unit = re.sub(rf"^{_BARE}\s*", "", b)
        a = f"{a} {unit}"
    lo = parse_mass(a, f"{field} (from)")
    hi = parse_mass(b, f"{field} (to)")
    if not lo <= hi:
        raise InputError(f"expected the first mass at most the second, got {text!r}", field=field)
    return lo, hi


# ---------------------------------------------------------------------------
# reading
# ---------------------------------------------------------------------------
def parse_design(doc: dict, source: str | None = None, *, need_plate: bool = True):
    """A design from a parsed TOML document (dict).

    With ``need_plate=False`` (a field map needs only magnets) a floating-plate design may
    leave out ``[plate]``; its ``plate`` is then None.

    Returns
    -------
    PlateDesign, or StabilizedDesign when the document has a ``lifter``, ``floater`` or
    ``station`` table.
    """
    if not isinstance(doc, dict):
        raise InputError("expected a TOML document", field="design")
    if any(k in doc for k in STABILIZED_KEYS):
        return parse_stabilized(doc, source=source)
    _check_keys(doc, TOP_KEYS, "")
    for need in ("magnets", "plate") if need_plate else ("magnets",):
        if need not in doc:
            raise InputError(f"missing table [{need}]", field=need)
    name, desc = _text_keys(doc)
    plate = _parse_plate(doc["plate"]) if need_plate or "plate" in doc else None
    return PlateDesign(_parse_magnets(doc["magnets"]), plate,
                       _conditions(doc.get("conditions", {}), paired=False), name, desc, source)


def load_design_text(text: str, source: str | None = None, *, need_plate: bool = True):
    """A design from TOML text (the web page's editor)."""
    where = source or "design"
    if len(text.encode("utf-8", "surrogatepass")) > limits.MAX_FILE_BYTES:
        raise InputError(f"the design is larger than the limit of {limits.MAX_FILE_BYTES:,} bytes", field=where)
    limits.check_nesting(text, where)
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", field=where) from exc
    except RecursionError:  # pragma: no cover - check_nesting refuses such text first
        raise InputError(f"nesting deeper than the limit of {limits.MAX_NESTING} levels", field=where) from None
    return parse_design(doc, source, need_plate=need_plate)


def load_design(path, *, need_plate: bool = True) -> Any:
    """A design from a TOML file: PlateDesign or StabilizedDesign."""
    p = Path(path)
    text = limits.read_text_limited(p, "design", limits.MAX_FILE_BYTES)
    return load_design_text(text, source=str(p), need_plate=need_plate)


# ---------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------
def _short(x: float) -> str:
    t = repr(float(x))
    return t[:-2] if t.endswith(".0") else t


def _numbers(x: float) -> list[str]:
    """Texts of ``x`` rounded to 1, 2, ... significant digits, up to Python's shortest
    exact repr (``1000``, not ``1e+03``)."""
    shortest = _short(x)
    digits = len(shortest.lstrip("-").split("e")[0].replace(".", "").lstrip("0")) or 1
    return [_short(float(f"{x:.{d}g}")) for d in range(1, min(digits, 17))] + [shortest]


def _reads_back(parse, text: str, value: float, *unit: str) -> bool:
    try:
        return parse(text, *unit, "value") == value
    except InputError:  # outside the plausible range: the caller falls back to SI
        return False


def exact_quantity(value: float, unit: str, human: str, scale: float) -> str:
    """The shortest ``"<number> <human>"`` text that :func:`matdb.units.parse_quantity`
    reads back (in ``unit``) as exactly ``value``; ``scale`` is one ``human`` in ``unit``.
    Falls back to ``repr(value)`` in ``unit`` when no text in ``human`` reads back exactly.
    """
    for num in _numbers(value / scale):
        txt = f"{num} {human}"
        if _reads_back(parse_quantity, txt, value, unit):
            return txt
    return f"{value!r} {unit}"


def exact_temperature(t_k: float) -> str:
    """The shortest degC text that reads back as exactly ``t_k``, else kelvin."""
    for num in _numbers(kelvin_to_celsius(t_k)):
        txt = f"{num} degC"
        if _reads_back(parse_temperature, txt, t_k):
            return txt
    return f"{t_k!r} K"


def _mm(v: float) -> str:
    return exact_quantity(v, "m", "mm", 1e-3)


def _g(v: float) -> str:
    return exact_quantity(v, "kg", "g", 1e-3)


def _mms(values) -> list[str]:
    return [_mm(v) for v in values]


def _conditions_table(c: Conditions) -> dict:
    return {k: exact_temperature(v) for k, v in (("temperature", c.temperature_k), ("temp_min", c.temp_min_k),
                                                  ("temp_max", c.temp_max_k)) if v is not None}


def _plate_doc(design: PlateDesign) -> dict:
    m, p = design.magnets, design.plate
    mags: dict[str, Any] = {"shape": m.shape, "size": _mms(m.size), "grade": m.grade}
    if m.br_t is not None:
        mags["br"] = f"{m.br_t!r} T"
    mags.update({"pattern": m.pattern, "rows": m.rows, "cols": m.cols, "spacing": _mm(m.spacing_m),
                 "back_plate": m.back_plate, "cover": _mm(m.cover_m)})
    if m.rigid:
        mags["rigid"] = True
    if m.recoil_cells is not None:
        mags["recoil_cells"] = m.recoil_cells
    if m.items:
        items = []
        for it in m.items:
            d: dict[str, Any] = {"position": _mms(it.position), "direction": [float(v) for v in it.direction]}
            for k, v in (("shape", it.shape), ("size", None if it.size is None else _mms(it.size)),
                         ("grade", it.grade), ("br", None if it.br_t is None else f"{it.br_t!r} T")):
                if v is not None:
                    d[k] = v
            items.append(d)
        mags["item"] = items
    doc: dict[str, Any] = {k: v for k, v in (("name", design.name), ("description", design.description))
                           if v is not None}
    doc["magnets"] = mags
    if p is not None:
        plate: dict[str, Any] = {"material": p.material, "shape": p.shape, "size": _mms(p.size)}
        if p.chi_si is not None:
            plate["chi"] = repr(p.chi_si)
        if p.chi_perp_si is not None:
            plate["chi_perp"], plate["chi_par"] = repr(p.chi_perp_si), repr(p.chi_par_si)
        plate.update({"payload": _g(p.payload_kg), "payload_height": _mm(p.payload_height_m),
                      "min_gap": _mm(p.min_gap_m)})
        if p.center_m != (0.0, 0.0):
            plate["center"] = _mms(p.center_m)
        if p.sigma_in_plane_s_m is not None:
            plate["sigma_in_plane"] = f"{p.sigma_in_plane_s_m!r} S/m"
        if p.sigma_across_s_m is not None:
            plate["sigma_across"] = f"{p.sigma_across_s_m!r} S/m"
        if p.payload_size_m is not None:
            plate["payload_size"] = _mms(p.payload_size_m)
        if p.slots is not None:
            s = p.slots
            plate["slots"] = {"count": s.count, "width": _mm(s.width), "length": _mm(s.length),
                              "direction": s.direction, "start": s.start}
        if p.holes:
            plate["holes"] = [{"center": [_mm(h.x), _mm(h.y)], "diameter": _mm(h.diameter)} for h in p.holes]
        doc["plate"] = plate
    cond = _conditions_table(design.conditions)
    if cond:
        doc["conditions"] = cond
    return doc


def _single_table(m: SingleMagnet, payload_kg: float = 0.0) -> dict:
    t: dict = {"shape": m.shape, "size": _mms(m.size), "grade": m.grade}
    if m.br_override:
        t["br"] = f"{m.br_t!r} T"
    if payload_kg:
        t["payload"] = _g(payload_kg)
    if m.rigid:
        t["rigid"] = True
    return t


def _plates_table(p: PlatesSpec) -> dict:
    t: dict = {"material": p.material}
    if p.chi_override is not None:
        if p.chi_override[0] == "chi":
            t["chi"] = repr(p.chi_override[1])
        else:
            t["chi_perp"], t["chi_par"] = repr(p.chi_override[1]), repr(p.chi_override[2])
    t["thickness"] = _mm(p.thickness)
    if p.distance is not None:
        t["distance"] = _mm(p.distance)
    t["clearance"] = _mm(p.clearance)
    if p.width is not None:
        t["width"] = _mm(p.width)
    return t


def _station_tables(st: Station) -> dict:
    return {"lifter": _single_table(st.lifter), "floater": _single_table(st.floater, st.payload_kg),
            "plates": _plates_table(st.plates)}


def _stabilized_doc(design: StabilizedDesign) -> dict:
    doc: dict = {k: v for k, v in (("name", design.name), ("description", design.description)) if v}
    if design.payload_range is not None:
        lo, hi = design.payload_range
        doc["payload_range"] = f"{_g(lo)}..{_g(hi)}"
    if not design.multi:
        doc.update(_station_tables(design.stations[0]))
    else:
        stations = []
        for st in design.stations:
            t: dict = {"x": _mm(st.x), "y": _mm(st.y)}
            if st.name:
                t["name"] = st.name
            stations.append({**t, **_station_tables(st)})
        doc["station"] = stations
        doc["payload"] = {"mass": _g(design.payload.mass_kg), "centre_of_mass": _mms(design.payload.centre_of_mass)}
    doc["conditions"] = _conditions_table(Conditions(design.temperature_k, design.temp_min_k, design.temp_max_k))
    return doc


def document_to_toml(doc: dict) -> str:
    """TOML text of a design document (a dict of tables whose quantities are strings with
    units), e.g. one put together from form fields."""
    return tomli_w.dumps(doc)


def design_to_toml(design) -> str:
    """TOML text of a design (either mode) that :func:`load_design_text` reads back equal:
    every number in the shortest text that parses to the same float."""
    doc = _stabilized_doc(design) if design.mode == "stabilized" else _plate_doc(design)
    return document_to_toml(doc)


def write_design(design, path) -> Path:
    """Write :func:`design_to_toml` to ``path``; returns the path."""
    p = Path(path)
    p.write_text(design_to_toml(design), encoding="utf-8")
    return p
