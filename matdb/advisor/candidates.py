"""The candidates: magnet arrangements, materials, grades and plate thicknesses to rank.

:func:`default_arrangements` proposes checkerboards and stripes of standard cubes and
cylinders scaled to the plate; :func:`build_catalogue` selects the materials and grades a
request allows and the plate thicknesses (matched to a total mass when one is given).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Sequence

from matdb import limits as _limits
from matdb.advisor.request import AdviceRequest
from matdb.data import catalog
from matdb.errors import InputError
from matdb.physics.arrangement import build_arrangement

#: standard cube edges [m] and cylinder (diameter, height) [m] of the default arrangements
STANDARD_CUBES_M = (6.35e-3, 10e-3, 12.7e-3, 19.05e-3, 25.4e-3)
STANDARD_CYLINDERS_M = ((10e-3, 5e-3), (12.7e-3, 6.35e-3), (20e-3, 10e-3))
DEFAULT_PATTERNS = ("checkerboard", "stripes")
MAX_MAGNETS = _limits.MAX_MAGNETS  # default arrangements with more magnets are skipped (cost grows with count)
MIN_PLATE_THICKNESS_M = 5e-5  # thinnest plate proposed when the thickness is matched to a total mass
MAX_PLATE_THICKNESS_M = 5e-3  # thickest plate proposed when the thickness is matched to a total mass


def _mm_text(v: float) -> str:
    return f"{v * 1e3:.4g}"


@dataclass(frozen=True)
class ArrangementSpec:
    """A magnet arrangement by the matdb conventions (sizes in metres)."""

    shape: str  # "cuboid" or "cylinder"
    size: tuple[float, ...]  # cuboid (x, y, h); cylinder (d, h)
    pattern: str
    rows: int
    cols: int
    spacing: float = 0.0
    back_plate: bool = False

    @property
    def count(self) -> int:
        return self.rows * self.cols

    @property
    def pitch(self) -> tuple[float, float]:
        fx = self.size[0]
        fy = self.size[1] if self.shape == "cuboid" else self.size[0]
        return fx + self.spacing, fy + self.spacing

    @property
    def extent(self) -> tuple[float, float]:
        px, py = self.pitch
        return self.cols * px - self.spacing, self.rows * py - self.spacing

    @property
    def max_dimension(self) -> float:
        return float(max(self.size))

    @property
    def height(self) -> float:
        """Height of the array (the magnets' height) [m]."""
        return float(self.size[-1])

    def envelope_excess(self, envelope_m) -> tuple[float, float, float]:
        """How far the array's width, length and height exceed ``envelope_m`` [m] (0 inside)."""
        if envelope_m is None:
            return (0.0, 0.0, 0.0)
        w, ln = self.extent
        return (max(0.0, w - envelope_m[0]), max(0.0, ln - envelope_m[1]),
                max(0.0, self.height - envelope_m[2]))

    @property
    def magnet_volume_m3(self) -> float:
        if self.shape == "cuboid":
            v = self.size[0] * self.size[1] * self.size[2]
        else:
            v = math.pi / 4 * self.size[0] ** 2 * self.size[1]
        return v * self.count

    @property
    def description(self) -> str:
        if self.shape == "cuboid":
            a, b, h = self.size
            what = (f"{_mm_text(a)} mm cubes" if a == b == h
                    else f"{_mm_text(a)}x{_mm_text(b)}x{_mm_text(h)} mm blocks")
        else:
            what = f"{_mm_text(self.size[0])}x{_mm_text(self.size[1])} mm cylinders"
        extra = " on a steel back plate" if self.back_plate else ""
        gap = f", {_mm_text(self.spacing)} mm apart" if self.spacing else ""
        return f"{self.rows}x{self.cols} {self.pattern} of {what}{gap}{extra}"

    def build(self, br: float = 1.0, grade: str | None = None):
        return build_arrangement(self.shape, self.size, self.pattern, self.rows, self.cols,
                                 self.spacing, br=br, back_plate=self.back_plate, grade=grade)

    def key(self) -> dict:
        return {"shape": self.shape, "size": [repr(float(s)) for s in self.size],
                "pattern": self.pattern, "rows": self.rows, "cols": self.cols,
                "spacing": repr(float(self.spacing)), "back_plate": self.back_plate}

    def record(self) -> dict:
        return {"description": self.description, "pattern": self.pattern, "shape": self.shape,
                "size_m": [float(s) for s in self.size], "rows": self.rows, "cols": self.cols}


def _counts(length: float, pitch: float) -> list[int]:
    n = max(2, int(round(length / pitch)))
    return [n, n + 1]


def default_arrangements(plate_m: tuple[float, float], max_magnet_size_m: float | None = None,
                         patterns: Sequence[str] = DEFAULT_PATTERNS,
                         envelope_m: tuple[float, float, float] | None = None) -> list[ArrangementSpec]:
    """Checkerboards and stripes of the standard cubes and cylinders, rows x cols scaled to
    the plate: about as many magnets as cover it, and one more per axis (so some
    arrangements are larger than the plate); with an envelope, also the most magnets that
    fit inside it."""
    sizes: list[tuple[str, tuple[float, ...]]] = [("cuboid", (a, a, a)) for a in STANDARD_CUBES_M]
    sizes += [("cylinder", (d, h)) for d, h in STANDARD_CYLINDERS_M]
    out: list[ArrangementSpec] = []
    for shape, size in sizes:
        if max_magnet_size_m is not None and max(size) > max_magnet_size_m * (1 + 1e-9):
            continue
        p = size[0]
        pairs = list(zip(_counts(plate_m[0], p), _counts(plate_m[1], p)))
        if envelope_m is not None:
            fit = (int(envelope_m[0] // p + 1e-9), int(envelope_m[1] // p + 1e-9))
            if min(fit) >= 2 and fit not in pairs:
                pairs.append(fit)
        for nc, nr in pairs:
            if nr * nc > MAX_MAGNETS:
                continue
            for pat in patterns:
                out.append(ArrangementSpec(shape, tuple(size), pat, nr, nc))
    return out



def grade_chi_rec(grade) -> float:
    """``mu_rec - 1`` of a grade, the recoil susceptibility of its family as the grade table
    stores it (0 when the table has no mu_rec)."""
    mu = getattr(grade, "mu_rec", None)
    return 0.0 if mu is None else float(mu) - 1.0


@dataclass
class Catalogue:
    """What one ranking combines: materials x grades x arrangements x thicknesses."""

    mats: list
    grades: list
    specs: list
    thick: tuple
    #: per thickness: the material indices it is matched to (None: every material)
    thick_owner: tuple = ()


def select_materials(req: AdviceRequest, url=None):
    """The plate materials the request allows (every one by default)."""
    if req.materials:
        return [catalog.get_material(m, url) for m in req.materials]
    return catalog.list_materials(url)


def select_grades(req: AdviceRequest, url=None):
    """The magnet grades the request allows (by grade name and family)."""
    grades = catalog.list_grades(url)
    if req.grades:
        wanted = [catalog.get_grade(g, url).grade for g in req.grades]
        grades = [g for g in grades if g.grade in wanted]
    if req.families:
        want = {catalog.check_family(f, "--family") for f in req.families}
        grades = [g for g in grades if g.family in want]
    if not grades:
        raise InputError("--grade/--family: no magnet grade matches the restrictions")
    return grades


def build_catalogue(req: AdviceRequest, arrangements: Sequence[ArrangementSpec] | None = None,
                    url=None) -> Catalogue:
    """The :class:`Catalogue` of a request (default arrangements unless given)."""
    mats = select_materials(req, url)
    grades = select_grades(req, url)
    specs = list(arrangements) if arrangements is not None else \
        default_arrangements(req.plate_m, req.max_magnet_size_m, envelope_m=req.envelope_m)
    if req.max_magnet_size_m is not None and arrangements is not None:
        specs = [s for s in specs if s.max_dimension <= req.max_magnet_size_m * (1 + 1e-9)]
    thick, owner = matched_thicknesses(req, mats)
    return Catalogue(mats, grades, specs, thick, owner)


def matched_thickness(total_kg: float, density_kg_m3: float, plate_m) -> float | None:
    """Plate thickness whose mass over ``plate_m`` is ``total_kg`` (rounded down to 1 um), or
    None outside :data:`MIN_PLATE_THICKNESS_M` .. :data:`MAX_PLATE_THICKNESS_M` [m]."""
    if not (density_kg_m3 > 0):
        return None
    t = math.floor(total_kg / (density_kg_m3 * plate_m[0] * plate_m[1]) * 1e6 + 1e-6) / 1e6
    if t < MIN_PLATE_THICKNESS_M or t > MAX_PLATE_THICKNESS_M:
        return None
    return t


def matched_thicknesses(req: AdviceRequest, mats) -> tuple[tuple, tuple]:
    """The thicknesses to rank and, per thickness, the materials it belongs to.

    Without a total mass: the request's thicknesses for every material. With one: the
    typed thicknesses (or the default list) for every material, plus, unless thicknesses
    were typed, each diamagnet's thickness matched to the total mass (plate alone = total).
    """
    base = [float(t) for t in req.thicknesses_m]
    if req.total_mode and not req.thickness_given:
        base = [t for t in base if any(m.chi_vertical < 0 and m.chi_horizontal < 0
                                       and m.density_kg_m3 * req.plate_m[0] * req.plate_m[1] * t
                                       <= req.total_mass_kg for m in mats)]
    owner: dict[float, set | None] = {t: None for t in base}
    if req.total_mode and not req.thickness_given:
        for i, m in enumerate(mats):
            if not (m.chi_vertical < 0 and m.chi_horizontal < 0):
                continue
            t = matched_thickness(req.total_mass_kg, m.density_kg_m3, req.plate_m)
            if t is None:
                continue
            if t in owner and owner[t] is None:
                continue
            owner.setdefault(t, set()).add(i)
    ts = tuple(sorted(owner))
    if not ts:  # nothing matches: rank the default list (rejected with the reason)
        return tuple(req.thicknesses_m), ()
    owners = tuple(None if owner[t] is None else frozenset(owner[t]) for t in ts)
    if all(o is None for o in owners):
        owners = ()
    return ts, owners


def row_request(row, req: AdviceRequest) -> AdviceRequest:
    """The request with the plate outline of ``row`` (rows may rank several plates)."""
    px, py = row.get("plate_x_m"), row.get("plate_y_m")
    if px is None or (float(px), float(py)) == tuple(req.plate_m):
        return req
    return replace(req, plate_m=(float(px), float(py)), plate_options=())


