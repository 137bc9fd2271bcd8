"""Design files: TOML -> frozen dataclasses of SI floats.

A design is a TOML file in which every quantity is a string with units (``"12.7 mm"``,
``"0.2 g"``, ``"60 degC"``), parsed once here through :mod:`matdb.units`; susceptibility
values are SI volume susceptibilities (a bare number), or carry one of the conventions
:func:`matdb.units.parse_chi` knows. Nothing past this module sees a unit string.

Floating-plate designs have the tables ``[magnets]``, ``[plate]`` and optionally
``[conditions]`` and return a :class:`PlateDesign`. A design with a ``[lifter]``,
``[floater]`` or ``[[station]]`` table is a floating-magnet design and is handed to
:func:`matdb.design.floating.parse_stabilized`.

Every error is an :class:`~matdb.errors.InputError` naming the key, e.g.
``plate.size: expected 3 lengths [x, y, thickness] for a rectangle``.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from matdb import limits
from matdb.errors import InputError, NotFoundError
from matdb.units import parse_chi, parse_length, parse_mass, parse_number, parse_temperature
from matdb.constants import T_REF_K, kelvin_to_celsius


MAGNET_KEYS = {"shape", "size", "grade", "br", "pattern", "rows", "cols", "spacing",
               "back_plate", "cover", "item", "rigid"}
ITEM_KEYS = {"position", "direction", "size", "shape", "grade", "br"}
PLATE_KEYS = {"material", "shape", "size", "chi", "chi_perp", "chi_par", "payload",
              "payload_height", "min_gap", "center", "sigma_in_plane", "sigma_across",
              "slots", "holes", "payload_size"}
SLOT_KEYS = {"count", "width", "length", "direction", "start"}
HOLE_KEYS = {"center", "diameter"}
CONDITION_KEYS = {"temperature", "temp_min", "temp_max"}
TOP_KEYS = {"name", "description", "magnets", "plate", "conditions"}
STABILIZED_KEYS = {"lifter", "floater", "station"}

MAGNET_SHAPES = ("cuboid", "cylinder", "ring")
PATTERNS = ("single", "checkerboard", "stripes", "grid", "list")
PLATE_SHAPES = ("rectangle", "disc")
_SIZE_FORM = {
    "cuboid": (3, "[x, y, height]"),
    "cylinder": (2, "[diameter, height]"),
    "ring": (3, "[outer diameter, inner diameter, height]"),
    "rectangle": (3, "[x, y, thickness]"),
    "disc": (2, "[diameter, thickness]"),
}
DEFAULT_MIN_GAP_M = 2e-4


# ---------------------------------------------------------------------------
# dataclasses
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class MagnetItem:
    """One magnet of a ``pattern = "list"`` arrangement (SI)."""

    position: tuple[float, float, float]  # centre [m]
    direction: tuple[float, float, float]  # magnetisation direction
    shape: str | None = None
    size: tuple[float, ...] | None = None  # [m]
    grade: str | None = None
    br_t: float | None = None  # override of the grade's Br at 20 C [T]


@dataclass(frozen=True)
class MagnetSpec:
    """The ``[magnets]`` table (SI). ``grades`` maps each grade name used to its props."""

    shape: str
    size: tuple[float, ...]  # [m]
    grade: str
    br_t: float | None  # override of the grade's Br at 20 C [T]
    pattern: str
    rows: int
    cols: int
    spacing_m: float
    back_plate: bool
    cover_m: float
    items: tuple[MagnetItem, ...] = ()
    grades: dict = field(default_factory=dict, compare=False, repr=False)
    rigid: bool = False  # True: polarisation exactly Br (no recoil permeability)

    @property
    def grade_props(self):
        """GradeProps of the main grade."""
        return self.grades[self.grade]

    def largest_dimension_m(self) -> float:
        sizes = [self.size] + [it.size for it in self.items if it.size is not None]
        return max(max(s) for s in sizes)


@dataclass(frozen=True)
class PlateSpec:
    """The ``[plate]`` table (SI). ``chi_perp``/``chi_par``: what the level plate sees
    (field along / across its c axis), SI volume, negative for a diamagnet."""

    material: str
    shape: str
    size: tuple[float, ...]  # rectangle (x, y, t), disc (d, t) [m]
    chi_si: float | None  # override (isotropic) [1]
    chi_perp_si: float | None  # override [1]
    chi_par_si: float | None  # override [1]
    payload_kg: float
    payload_height_m: float
    min_gap_m: float
    center_m: tuple[float, float] = (0.0, 0.0)
    material_props: Any = field(default=None, compare=False, repr=False)
    sigma_in_plane_s_m: float | None = None  # override of the in-plane conductivity [S/m]
    sigma_across_s_m: float | None = None  # override of the across-plane conductivity [S/m]
    slots: Any = None  # matdb.physics.dynamics.Slots or None
    holes: tuple = ()  # of matdb.physics.dynamics.Hole
    payload_size_m: tuple[float, float, float] | None = None  # payload as a block [m]

    @property
    def thickness_m(self) -> float:
        return self.size[-1]

    @property
    def lx_m(self) -> float:
        return self.size[0]

    @property
    def ly_m(self) -> float:
        return self.size[0] if self.shape == "disc" else self.size[1]

    @property
    def overridden(self) -> bool:
        return self.chi_si is not None or self.chi_perp_si is not None

    @property
    def chi_perp(self) -> float:
        """chi for a field along the c axis (vertical) [1]."""
        if self.chi_perp_si is not None:
            return self.chi_perp_si
        if self.chi_si is not None:
            return self.chi_si
        return self.material_props.chi_vertical

    @property
    def chi_par(self) -> float:
        """chi for a field in the basal plane (horizontal) [1]."""
        if self.chi_par_si is not None:
            return self.chi_par_si
        if self.chi_si is not None:
            return self.chi_si
        return self.material_props.chi_horizontal

    @property
    def density_kg_m3(self) -> float:
        return self.material_props.density_kg_m3

    @property
    def volume_m3(self) -> float:
        if self.shape == "disc":
            return math.pi * self.size[0] ** 2 / 4 * self.size[1]
        return self.size[0] * self.size[1] * self.size[2]

    @property
    def mass_kg(self) -> float:
        return self.density_kg_m3 * self.volume_m3


@dataclass(frozen=True)
class Conditions:
    """The ``[conditions]`` table: temperatures [K] (None when not given)."""

    temperature_k: float | None = None
    temp_min_k: float | None = None
    temp_max_k: float | None = None

    @property
    def nominal_k(self) -> float:
        """``temperature``, else the hottest of the range, else 20 C."""
        if self.temperature_k is not None:
            return self.temperature_k
        if self.temp_max_k is not None:
            return self.temp_max_k
        if self.temp_min_k is not None:
            return self.temp_min_k
        return T_REF_K

    def extremes(self, extra_k: float | None = None) -> tuple[float, float]:
        """Coldest and hottest temperature named anywhere (plus ``extra_k``) [K]."""
        ts = [t for t in (self.temperature_k, self.temp_min_k, self.temp_max_k, extra_k)
              if t is not None] or [T_REF_K]
        return min(ts), max(ts)


@dataclass(frozen=True)
class PlateDesign:
    """A floating-plate design (SI)."""

    magnets: MagnetSpec
    plate: PlateSpec
    conditions: Conditions
    name: str | None = None
    description: str | None = None
    source: str | None = None
    mode: str = "plate"

    def _br20(self, grade: str | None, br: float | None) -> float:
        return br if br is not None else self.magnets.grades[grade or self.magnets.grade].br_t

    def _br(self, grade: str | None, br: float | None, temp_k: float | None, worst: bool) -> float:
        from matdb.physics.thermal import br_at, worst_case_br

        g = self.magnets.grades[grade or self.magnets.grade]
        b20 = self._br20(grade, br)
        if worst:
            b20 = worst_case_br(b20, None if g.br_min_t is None else g.br_min_t * b20 / g.br_t)
        if temp_k is None:
            return float(b20)
        return float(br_at(b20, g.alpha_br_pct_per_k, temp_k))

    def recoil_chis(self, arrangement) -> list[float]:
        """Recoil susceptibility ``mu_rec - 1`` of each magnet (0 when the grade has no
        ``mu_rec``, or for a rigid design)."""
        if self.magnets.rigid:
            return [0.0] * arrangement.count
        out = []
        for m in arrangement.magnets:
            mu = self.magnets.grades[m.grade or self.magnets.grade].mu_rec
            out.append(0.0 if mu is None else float(mu) - 1.0)
        return out

    def arrangement(self, temp_k: float | None = None, worst: bool = False,
                    rigid: bool | None = None):
        """The magnet arrangement (top faces at z = 0).

        Parameters
        ----------
        temp_k : float, optional
            Magnet temperature [K]; None: Br at 20 C. Each magnet's Br follows its
            grade's reversible coefficient.
        worst : bool
            Use the grade's minimum-spec Br (scaled by any ``br`` override).
        rigid : bool, optional
            True: polarisation exactly Br (the idealised model); False: each magnet on
            its recoil line, ``mu_rec`` of its grade
            (:meth:`matdb.physics.arrangement.Arrangement.with_recoil`). Default: the
            design's ``[magnets] rigid`` (false unless set).
        """
        from matdb.physics.arrangement import build_arrangement

        m = self.magnets
        items = None
        if m.pattern == "list":
            items = []
            for it in m.items:
                d = {"position": it.position, "direction": it.direction,
                     "br": self._br(it.grade, it.br_t if it.br_t is not None else
                                    (m.br_t if it.grade in (None, m.grade) else None),
                                    temp_k, worst),
                     "grade": it.grade or m.grade}
                if it.shape is not None:
                    d["shape"] = it.shape
                if it.size is not None:
                    d["size"] = it.size
                items.append(d)
        arr = build_arrangement(m.shape, m.size, m.pattern, m.rows, m.cols, m.spacing_m,
                                br=self._br(None, m.br_t, temp_k, worst),
                                back_plate=m.back_plate, items=items, grade=m.grade)
        if rigid if rigid is not None else m.rigid:
            return arr
        return arr.with_recoil(self.recoil_chis(arr))

    def magnet_mass_kg(self) -> float:
        """Total magnet mass from the grades' densities [kg]."""
        arr = self.arrangement(rigid=True)
        total = 0.0
        for mag in arr.magnets:
            total += mag.volume * self.magnets.grades[mag.grade or self.magnets.grade].density_kg_m3
        return total


# ---------------------------------------------------------------------------
# parsing helpers
# ---------------------------------------------------------------------------
def _check_keys(table: Any, allowed: set[str], where: str) -> dict:
    if not isinstance(table, dict):
        raise InputError(f"{where}: expected a table, got {table!r}")
    for k in table:
        if k not in allowed:
            raise InputError(f"{where}.{k}: unknown key; expected one of {', '.join(sorted(allowed))}"
                             if where else f"{k}: unknown key; expected one of {', '.join(sorted(allowed))}")
    return table


def _choice(value: Any, choices: tuple[str, ...], key: str) -> str:
    if not isinstance(value, str) or value.strip().lower() not in choices:
        raise InputError(f"{key}: expected one of {', '.join(choices)}, got {value!r}")
    return value.strip().lower()


def _lengths(value: Any, key: str, n: int, form: str, what: str, positive: bool = True
             ) -> tuple[float, ...]:
    if not isinstance(value, list) or len(value) != n:
        raise InputError(f"{key}: expected {n} lengths {form} for {what}")
    out = []
    for i, v in enumerate(value):
        x = parse_length(v, f"{key}[{i}]")
        if positive and x <= 0:
            raise InputError(f"{key}[{i}]: expected a positive length, got {v!r}")
        out.append(x)
    return tuple(out)


def _signed_lengths(value: Any, key: str, n: int) -> tuple[float, ...]:
    from matdb.units import parse_quantity

    if not isinstance(value, list) or len(value) != n:
        raise InputError(f"{key}: expected {n} lengths, e.g. [\"0 mm\", \"12.7 mm\", \"0 mm\"]")
    return tuple(parse_quantity(v, "m", f"{key}[{i}]") for i, v in enumerate(value))


def _size(value: Any, shape: str, key: str) -> tuple[float, ...]:
    n, form = _SIZE_FORM[shape]
    what = f"a {shape}"
    size = _lengths(value, key, n, form, what)
    if shape == "ring" and size[1] >= size[0]:
        raise InputError(f"{key}: the inner diameter must be smaller than the outer diameter")
    return size


def _int(value: Any, key: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 1:
        raise InputError(f"{key}: expected a positive whole number, got {value!r}")
    return int(value)


def _bool(value: Any, key: str) -> bool:
    if not isinstance(value, bool):
        raise InputError(f"{key}: expected true or false, got {value!r}")
    return value


def _chi(value: Any, key: str, density: float | None) -> float:
    if isinstance(value, bool):
        raise InputError(f"{key}: expected a susceptibility such as \"-4.5e-4\", got {value!r}")
    chi, _, _ = parse_chi(value, key, density_kg_m3=density)
    if not chi < 0:
        raise InputError(f"{key}: expected a negative (diamagnetic) susceptibility, got {value!r}")
    return chi


def _grade(name: Any, key: str, grades: dict):
    from matdb.data.catalog import get_grade

    if not isinstance(name, str) or not name.strip():
        raise InputError(f"{key}: expected a grade name such as \"N42\", got {name!r}")
    name = name.strip()
    if name not in grades:
        try:
            grades[name] = get_grade(name)
        except NotFoundError as exc:
            msg = str(exc)
            raise InputError(f"{key}: {msg.split(': ', 1)[1] if msg.startswith('grade: ') else msg}") from exc
    return name


# ---------------------------------------------------------------------------
# tables
# ---------------------------------------------------------------------------
def _parse_magnets(t: Any) -> MagnetSpec:
    t = _check_keys(t, MAGNET_KEYS, "magnets")
    grades: dict = {}
    if "grade" not in t:
        raise InputError("magnets.grade: missing; expected a grade name such as \"N42\"")
    grade = _grade(t["grade"], "magnets.grade", grades)
    shape = _choice(t.get("shape", "cuboid"), MAGNET_SHAPES, "magnets.shape")
    if "size" not in t:
        raise InputError(f"magnets.size: missing; expected {_SIZE_FORM[shape][0]} lengths "
                         f"{_SIZE_FORM[shape][1]} for a {shape}")
    size = _size(t["size"], shape, "magnets.size")
    br = None
    if "br" in t:
        from matdb.units import parse_flux_density

        br = parse_flux_density(t["br"], "magnets.br")
        if br <= 0:
            raise InputError(f"magnets.br: expected a positive remanence, got {t['br']!r}")
    pattern = _choice(t.get("pattern", "single"), PATTERNS, "magnets.pattern")
    rows = _int(t.get("rows", 1), "magnets.rows")
    cols = _int(t.get("cols", 1), "magnets.cols")
    limits.check_arrangement(rows, cols, "magnets")
    if pattern == "single" and rows * cols != 1:
        raise InputError("magnets.rows: pattern 'single' is one magnet; use 'grid', "
                         "'checkerboard' or 'stripes' for rows and cols")
    spacing = parse_length(t.get("spacing", "0 mm"), "magnets.spacing")
    back = _bool(t.get("back_plate", False), "magnets.back_plate")
    cover = parse_length(t.get("cover", "0 mm"), "magnets.cover")
    items: list[MagnetItem] = []
    if pattern == "list":
        raw = t.get("item")
        if not isinstance(raw, list) or not raw:
            raise InputError("magnets.item: pattern 'list' needs [[magnets.item]] tables "
                             "with position and direction")
        limits.check_count(len(raw), limits.MAX_MAGNETS, "magnets.item", "magnets")
        for i, it in enumerate(raw):
            key = f"magnets.item[{i}]"
            it = _check_keys(it, ITEM_KEYS, key)
            for need in ("position", "direction"):
                if need not in it:
                    raise InputError(f"{key}.{need}: missing")
            pos = _signed_lengths(it["position"], f"{key}.position", 3)
            d = it["direction"]
            if not isinstance(d, list) or len(d) != 3:
                raise InputError(f"{key}.direction: expected 3 numbers (a unit vector), got {d!r}")
            dvec = tuple(parse_number(v, f"{key}.direction[{j}]") for j, v in enumerate(d))
            if all(v == 0 for v in dvec):
                raise InputError(f"{key}.direction: expected a non-zero vector")
            ishape = _choice(it["shape"], MAGNET_SHAPES, f"{key}.shape") if "shape" in it else None
            isize = _size(it["size"], ishape or shape, f"{key}.size") if "size" in it else None
            if ishape is not None and ishape != shape and isize is None:
                raise InputError(f"{key}.size: needed when the item's shape differs from magnets.shape")
            igrade = _grade(it["grade"], f"{key}.grade", grades) if "grade" in it else None
            ibr = None
            if "br" in it:
                from matdb.units import parse_flux_density

                ibr = parse_flux_density(it["br"], f"{key}.br")
                if ibr <= 0:
                    raise InputError(f"{key}.br: expected a positive remanence, got {it['br']!r}")
            items.append(MagnetItem(pos, dvec, ishape, isize, igrade, ibr))
    elif "item" in t:
        raise InputError("magnets.item: only used with pattern = \"list\"")
    rigid = _bool(t.get("rigid", False), "magnets.rigid")
    return MagnetSpec(shape, size, grade, br, pattern, rows, cols, spacing, back, cover,
                      tuple(items), grades, rigid)


def _parse_plate(t: Any) -> PlateSpec:
    from matdb.data.catalog import get_material

    t = _check_keys(t, PLATE_KEYS, "plate")
    if "material" not in t:
        raise InputError("plate.material: missing; expected a material id such as \"pyrolytic-graphite\"")
    mid = t["material"]
    if not isinstance(mid, str) or not mid.strip():
        raise InputError(f"plate.material: expected a material id, got {mid!r}")
    try:
        mat = get_material(mid.strip())
    except NotFoundError as exc:
        raise InputError(f"plate.{exc}") from exc
    shape = _choice(t.get("shape", "rectangle"), PLATE_SHAPES, "plate.shape")
    if "size" not in t:
        raise InputError(f"plate.size: missing; expected {_SIZE_FORM[shape][0]} lengths "
                         f"{_SIZE_FORM[shape][1]} for a {shape}")
    size = _size(t["size"], shape, "plate.size")
    chi = chi_perp = chi_par = None
    if "chi" in t and ("chi_perp" in t or "chi_par" in t):
        raise InputError("plate.chi: give either chi or chi_perp and chi_par, not both")
    if "chi" in t:
        chi = _chi(t["chi"], "plate.chi", mat.density_kg_m3)
    if ("chi_perp" in t) != ("chi_par" in t):
        missing = "chi_par" if "chi_perp" in t else "chi_perp"
        raise InputError(f"plate.{missing}: missing; chi_perp and chi_par go together")
    if "chi_perp" in t:
        chi_perp = _chi(t["chi_perp"], "plate.chi_perp", mat.density_kg_m3)
        chi_par = _chi(t["chi_par"], "plate.chi_par", mat.density_kg_m3)
    if chi is None and chi_perp is None and not (mat.chi_vertical < 0 and mat.chi_horizontal < 0):
        raise InputError(f"plate.material: {mat.id} is not diamagnetic (chi = {mat.chi_si:.3g}); "
                         "it is pulled towards the magnets and cannot float")
    payload = parse_mass(t.get("payload", "0 g"), "plate.payload")
    ph = parse_length(t.get("payload_height", "0 mm"), "plate.payload_height")
    min_gap = parse_length(t.get("min_gap", "0.2 mm"), "plate.min_gap")
    center = (0.0, 0.0)
    if "center" in t:
        center = _signed_lengths(t["center"], "plate.center", 2)
    sig_ab = _sigma(t["sigma_in_plane"], "plate.sigma_in_plane") if "sigma_in_plane" in t else None
    sig_c = _sigma(t["sigma_across"], "plate.sigma_across") if "sigma_across" in t else None
    slots = _parse_slots(t["slots"], shape, size) if "slots" in t else None
    holes = _parse_holes(t["holes"], shape, size) if "holes" in t else ()
    psize = None
    if "payload_size" in t:
        psize = _lengths(t["payload_size"], "plate.payload_size", 3, "[x, y, height]",
                         "a block payload", positive=False)
    spec = PlateSpec(mat.id, shape, size, chi, chi_perp, chi_par, payload, ph, min_gap,
                     center, mat, sig_ab, sig_c, slots, holes, psize)
    if slots is not None or holes:
        _check_outline(spec)
    return spec


def _sigma(value: Any, key: str) -> float:
    from matdb.units import parse_quantity

    if isinstance(value, bool):
        raise InputError(f"{key}: expected a conductivity such as \"2e5 S/m\", got {value!r}")
    v = parse_quantity(value, "S/m", key)
    if not v >= 0:
        raise InputError(f"{key}: expected a conductivity of zero or more, got {value!r}")
    return v


def _parse_slots(t: Any, shape: str, size: tuple[float, ...]):
    from matdb.physics.dynamics import Slots

    t = _check_keys(t, SLOT_KEYS, "plate.slots")
    for need in ("count", "width", "length"):
        if need not in t:
            raise InputError(f"plate.slots.{need}: missing; slots need count, width and length")
    count = t["count"]
    if isinstance(count, bool) or not isinstance(count, int) or count < 0:
        raise InputError(f"plate.slots.count: expected a whole number of zero or more, got {count!r}")
    width = parse_length(t["width"], "plate.slots.width")
    length = parse_length(t["length"], "plate.slots.length")
    if width <= 0:
        raise InputError(f"plate.slots.width: expected a positive length, got {t['width']!r}")
    if length <= 0:
        raise InputError(f"plate.slots.length: expected a positive length, got {t['length']!r}")
    direction = _choice(t.get("direction", "x"), ("x", "y"), "plate.slots.direction")
    start = _choice(t.get("start", "centre"), ("centre", "edge", "alternate"), "plate.slots.start")
    along = size[0] if (direction == "x" or shape == "disc") else size[1]
    across = size[0] if shape == "disc" else (size[1] if direction == "x" else size[0])
    if count and width * count >= across:
        raise InputError(f"plate.slots.width: {count} slots of {width * 1e3:.3g} mm do not fit "
                         f"across {across * 1e3:.3g} mm")
    if length >= along:
        raise InputError(f"plate.slots.length: expected less than the plate's {along * 1e3:.3g} mm "
                         "(a slot through the whole plate cuts it apart)")
    return Slots(count, width, length, direction, start)


def _parse_holes(value: Any, shape: str, size: tuple[float, ...]) -> tuple:
    from matdb.physics.dynamics import Hole

    if not isinstance(value, list):
        raise InputError("plate.holes: expected a list of tables such as "
                         "[{center = [\"0 mm\", \"0 mm\"], diameter = \"1 mm\"}]")
    out = []
    for i, h in enumerate(value):
        key = f"plate.holes[{i}]"
        h = _check_keys(h, HOLE_KEYS, key)
        if "diameter" not in h:
            raise InputError(f"{key}.diameter: missing")
        d = parse_length(h["diameter"], f"{key}.diameter")
        if d <= 0:
            raise InputError(f"{key}.diameter: expected a positive length, got {h['diameter']!r}")
        c = _signed_lengths(h.get("center", ["0 mm", "0 mm"]), f"{key}.center", 2)
        out.append(Hole(c[0], c[1], d))
    return tuple(out)


def _check_outline(spec: "PlateSpec") -> None:
    from matdb.physics.dynamics import outline_pieces, plate_outline

    geom = plate_outline(spec.shape, spec.lx_m, spec.ly_m, spec.center_m[0], spec.center_m[1],
                         spec.slots, spec.holes)
    n = len(outline_pieces(geom))
    if n > 1:
        raise InputError(f"plate.slots: slots and holes cut the plate into {n} pieces; "
                         "expected one piece")


def _parse_conditions(t: Any) -> Conditions:
    t = _check_keys(t, CONDITION_KEYS, "conditions")
    temps = {k: parse_temperature(t[k], f"conditions.{k}") for k in CONDITION_KEYS if k in t}
    lo, hi = temps.get("temp_min"), temps.get("temp_max")
    if lo is not None and hi is not None and lo > hi:
        raise InputError("conditions.temp_min: expected temp_min <= temp_max")
    return Conditions(temps.get("temperature"), lo, hi)


def parse_design(doc: dict, source: str | None = None, *, need_plate: bool = True):
    """A design from a parsed TOML document (dict).

    With ``need_plate=False`` (a field map needs only magnets) a floating-plate design may
    leave out ``[plate]``; its ``plate`` is then None.

    Returns
    -------
    PlateDesign, or the floating-magnet design of :mod:`matdb.design.floating` when the
    document has a ``lifter``, ``floater`` or ``station`` table.
    """
    if not isinstance(doc, dict):
        raise InputError("design: expected a TOML document")
    if any(k in doc for k in STABILIZED_KEYS):
        from matdb.design.floating import parse_stabilized

        return parse_stabilized(doc, source=source)
    _check_keys(doc, TOP_KEYS, "")
    for need in ("magnets", "plate") if need_plate else ("magnets",):
        if need not in doc:
            raise InputError(f"{need}: missing table [{need}]")
    name = doc.get("name")
    desc = doc.get("description")
    for k, v in (("name", name), ("description", desc)):
        if v is not None and not isinstance(v, str):
            raise InputError(f"{k}: expected a string, got {v!r}")
    plate = _parse_plate(doc["plate"]) if need_plate or "plate" in doc else None
    return PlateDesign(_parse_magnets(doc["magnets"]), plate,
                       _parse_conditions(doc.get("conditions", {})), name, desc, source)


def load_design_text(text: str, source: str | None = None, *, need_plate: bool = True):
    """A design from TOML text (the web page's editor)."""
    where = source or "design"
    if len(text.encode("utf-8", "surrogatepass")) > limits.MAX_FILE_BYTES:
        raise InputError(f"{where}: the design is larger than the limit of {limits.MAX_FILE_BYTES:,} bytes")
    limits.check_nesting(text, where)
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{where}: not valid TOML: {exc}") from exc
    except RecursionError:  # pragma: no cover - check_nesting refuses such text first
        raise InputError(f"{where}: nesting deeper than the limit of {limits.MAX_NESTING} levels") from None
    return parse_design(doc, source, need_plate=need_plate)


def load_design(path, *, need_plate: bool = True) -> Any:
    """A design from a TOML file: :class:`PlateDesign` for floating-plate designs."""
    p = Path(path)
    text = limits.read_text_limited(p, "design", limits.MAX_FILE_BYTES)
    return load_design_text(text, source=str(p), need_plate=need_plate)


# ---------------------------------------------------------------------------
# writing
# ---------------------------------------------------------------------------
def _q(value: float, unit: str, human: str, scale: float) -> str:
    """A quantity string that reads back to exactly ``value`` (human unit when exact)."""
    from matdb.units import parse_quantity

    txt = f"{value / scale!r} {human}"
    try:
        if parse_quantity(txt, unit, "value") == value:
            return txt
    except InputError:  # pragma: no cover
        pass
    return f"{value!r} {unit}"


def _mm(v: float) -> str:
    return _q(v, "m", "mm", 1e-3)


def _temp(v: float) -> str:
    c = f"{kelvin_to_celsius(v)!r} degC"
    return c if parse_temperature(c, "t") == v else f"{v!r} K"


def design_to_toml(design: PlateDesign) -> str:
    """TOML text of a plate design that :func:`load_design_text` reads back equal."""
    import tomli_w

    m, p, c = design.magnets, design.plate, design.conditions
    mags: dict[str, Any] = {"shape": m.shape, "size": [_mm(v) for v in m.size], "grade": m.grade}
    if m.br_t is not None:
        mags["br"] = f"{m.br_t!r} T"
    mags.update({"pattern": m.pattern, "rows": m.rows, "cols": m.cols,
                 "spacing": _mm(m.spacing_m), "back_plate": m.back_plate, "cover": _mm(m.cover_m)})
    if m.rigid:
        mags["rigid"] = True
    if m.items:
        items = []
        for it in m.items:
            d: dict[str, Any] = {"position": [_mm(v) for v in it.position],
                                 "direction": [float(v) for v in it.direction]}
            if it.shape is not None:
                d["shape"] = it.shape
            if it.size is not None:
                d["size"] = [_mm(v) for v in it.size]
            if it.grade is not None:
                d["grade"] = it.grade
            if it.br_t is not None:
                d["br"] = f"{it.br_t!r} T"
            items.append(d)
        mags["item"] = items
    plate: dict[str, Any] = {"material": p.material, "shape": p.shape, "size": [_mm(v) for v in p.size]}
    if p.chi_si is not None:
        plate["chi"] = repr(p.chi_si)
    if p.chi_perp_si is not None:
        plate["chi_perp"] = repr(p.chi_perp_si)
        plate["chi_par"] = repr(p.chi_par_si)
    plate["payload"] = _q(p.payload_kg, "kg", "g", 1e-3)
    plate["payload_height"] = _mm(p.payload_height_m)
    plate["min_gap"] = _mm(p.min_gap_m)
    if p.center_m != (0.0, 0.0):
        plate["center"] = [_mm(v) for v in p.center_m]
    if p.sigma_in_plane_s_m is not None:
        plate["sigma_in_plane"] = f"{p.sigma_in_plane_s_m!r} S/m"
    if p.sigma_across_s_m is not None:
        plate["sigma_across"] = f"{p.sigma_across_s_m!r} S/m"
    if p.payload_size_m is not None:
        plate["payload_size"] = [_mm(v) for v in p.payload_size_m]
    if p.slots is not None:
        plate["slots"] = {"count": p.slots.count, "width": _mm(p.slots.width),
                          "length": _mm(p.slots.length), "direction": p.slots.direction,
                          "start": p.slots.start}
    if p.holes:
        plate["holes"] = [{"center": [_mm(h.x), _mm(h.y)], "diameter": _mm(h.diameter)}
                          for h in p.holes]
    doc: dict[str, Any] = {}
    if design.name is not None:
        doc["name"] = design.name
    if design.description is not None:
        doc["description"] = design.description
    doc["magnets"] = mags
    doc["plate"] = plate
    cond = {}
    for key, v in (("temperature", c.temperature_k), ("temp_min", c.temp_min_k),
                   ("temp_max", c.temp_max_k)):
        if v is not None:
            cond[key] = _temp(v)
    if cond:
        doc["conditions"] = cond
    return tomli_w.dumps(doc)


def write_design(design: PlateDesign, path) -> Path:
    """Write :func:`design_to_toml` to ``path``; returns the path."""
    p = Path(path)
    p.write_text(design_to_toml(design), encoding="utf-8")
    return p
