"""The design model: frozen dataclasses of SI floats for both kinds of design.

A design file (TOML, read and written by :mod:`matdb.design.toml_io`) describes either

* a floating plate (mode ``"plate"``): a diamagnetic plate over an arrangement of magnets
  -- :class:`PlateDesign` of :class:`MagnetSpec` (the ``[magnets]`` table, with
  :class:`MagnetItem` rows for ``pattern = "list"``), :class:`PlateSpec` (``[plate]``) and
  :class:`Conditions` (``[conditions]``); or
* a floating magnet (mode ``"stabilized"``): a floater magnet hanging under a lifter magnet
  between two diamagnetic plates -- :class:`StabilizedDesign` of one or more
  :class:`Station` (a lifter and a floater, each a :class:`SingleMagnet`, and their
  :class:`PlatesSpec`), with a shared :class:`PayloadSpec` for several stations.

Both modes share the shapes and their size forms (:data:`SIZE_FORMS`), the temperatures of
:class:`Conditions`, and :func:`body_volume`. Nothing here sees a unit string.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Optional

from matdb.constants import T_REF_K
from matdb.physics.arrangement import PATTERNS, SHAPES, build_arrangement
from matdb.physics.arrangement import SIZE_FORMS as MAGNET_SIZE_FORMS
from matdb.physics.thermal import br_at, worst_case_br

__all__ = [
    "DEFAULT_CLEARANCE_M", "MAGNET_SHAPES", "PLATE_SHAPES", "PATTERNS", "SIZE_FORMS",
    "body_volume", "MagnetItem", "MagnetSpec", "PlateSpec", "Conditions", "PlateDesign",
    "SingleMagnet", "PlatesSpec", "Station", "PayloadSpec", "StabilizedDesign",
]

#: matdb's default smallest gap between a floater's face and a plate (a choice, not a
#: published figure: room for the floater to move and for plates that are not flat) [m].
DEFAULT_CLEARANCE_M = 0.5e-3

MAGNET_SHAPES = SHAPES
PLATE_SHAPES = ("rectangle", "disc")

#: Per shape: how many lengths its ``size`` holds and in which order (design-file form):
#: the magnet shapes of :data:`matdb.physics.arrangement.SIZE_FORMS` and the plate shapes.
SIZE_FORMS = {
    **MAGNET_SIZE_FORMS,
    "rectangle": (3, "[x, y, thickness]"),
    "disc": (2, "[diameter, thickness]"),
}


def body_volume(shape: str, size: tuple[float, ...]) -> float:
    """Volume of a magnet or plate of ``shape`` with ``size`` in the form of
    :data:`SIZE_FORMS` [m^3] (sizes in [m])."""
    if shape in ("cuboid", "rectangle"):
        return float(size[0] * size[1] * size[2])
    if shape in ("cylinder", "disc"):
        return float(math.pi / 4 * size[0] ** 2 * size[1])
    return float(math.pi / 4 * (size[0] ** 2 - size[1] ** 2) * size[2])


# ---------------------------------------------------------------------------
# floating plate
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
    #: cells along each cube edge in the recoil model (None: the default, one cell per magnet;
    #: 5: the accurate model, :data:`matdb.physics.recoil.ACCURATE_SUBDIVISION`)
    recoil_cells: int | None = None

    @property
    def grade_props(self):
        """GradeProps of the main grade."""
        return self.grades[self.grade]

    def largest_dimension_m(self) -> float:
        """Largest size of any magnet of the arrangement [m]."""
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

    def _chi(self, own: float | None, catalogue_attr: str) -> float:
        """The axis's own override, else the isotropic ``chi``, else the catalogue value."""
        if own is not None:
            return own
        if self.chi_si is not None:
            return self.chi_si
        return getattr(self.material_props, catalogue_attr)

    @property
    def chi_perp(self) -> float:
        """chi for a field along the c axis (vertical) [1]."""
        return self._chi(self.chi_perp_si, "chi_vertical")

    @property
    def chi_par(self) -> float:
        """chi for a field in the basal plane (horizontal) [1]."""
        return self._chi(self.chi_par_si, "chi_horizontal")

    @property
    def density_kg_m3(self) -> float:
        return self.material_props.density_kg_m3

    @property
    def volume_m3(self) -> float:
        return body_volume(self.shape, self.size)

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
        return arr.with_recoil(self.recoil_chis(arr), subdivision=m.recoil_cells)

    def magnet_mass_kg(self) -> float:
        """Total magnet mass from the grades' densities [kg]."""
        arr = self.arrangement(rigid=True)
        total = 0.0
        for mag in arr.magnets:
            total += mag.volume * self.magnets.grades[mag.grade or self.magnets.grade].density_kg_m3
        return total


# ---------------------------------------------------------------------------
# floating magnet
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class SingleMagnet:
    """A lifter or floater magnet, magnetised along +z, in SI.

    Attributes
    ----------
    shape : str
        ``"cuboid"``, ``"cylinder"`` or ``"ring"``.
    size : tuple of float
        In the form of :data:`SIZE_FORMS` [m].
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
    mu_rec : float or None
        Recoil permeability of the grade [1].
    rigid : bool
        True: polarisation exactly Br.
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
        arr = build_arrangement(self.shape, self.size, "single", br=1.0)
        return float(arr.with_recoil([self.mu_rec - 1.0]).magnets[0].br)

    @property
    def height(self) -> float:
        """Height along the magnetisation [m]."""
        return float(self.size[-1])

    @property
    def volume(self) -> float:
        """Volume [m^3]."""
        return body_volume(self.shape, self.size)

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
        the catalogue; None otherwise (kept for the writer).
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

    lifter: SingleMagnet
    floater: SingleMagnet
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
    one per ``[[station]]`` table with the shared ``payload``. ``temperature_k`` is the
    temperature in use: ``conditions.temperature``, else the middle of ``temp_min`` and
    ``temp_max``, else 20 C.
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
