"""Unit-polarisation tables of each geometry, kept in memory and on disk.

A geometry is an arrangement under a plate outline, with the magnets on a recoil line of
one susceptibility. Its tables (:class:`GeometryData`) are computed by
:mod:`matdb.physics.plate` and :mod:`matdb.physics.plate_tables` at ``B_r = 1 T`` and
scaled per candidate. They are stored per height, so a request needing a new height
computes only that height, and kept in a :class:`diskcache.Cache` (``MATDB_CACHE_DIR``,
else the user cache directory, sub-folder ``advisor``) keyed by a hash of the geometry,
the quadrature settings, :data:`CODE_VERSION` and the source of the physics package (a
change there recomputes). A damaged or unreadable entry is recomputed, never trusted.
"""

from __future__ import annotations

import hashlib
import json
import threading
from dataclasses import replace
from pathlib import Path
from typing import Any

import diskcache
import numpy as np

from matdb.advisor.candidates import ArrangementSpec
from matdb.constants import T_REF_K
from matdb.paths import cache_root
from matdb.physics import plate as P
from matdb.physics import plate_tables as PT
from matdb.physics import thermal as TH

CODE_VERSION = "advisor-3"

#: screening height grid [m]: 0.05 to 0.2 mm, 0.25 mm steps to 6 mm, then wider to 20 mm
SCREEN_HEIGHTS_M = np.concatenate([[5e-5, 1e-4, 1.5e-4, 2e-4], np.arange(1, 25) * 2.5e-4,
                                   [7e-3, 8.5e-3, 1e-2, 1.3e-2, 1.6e-2, 2e-2]])
SCREEN_ORDER = 4  # Gauss-Legendre nodes per panel of the screening rule
SCREEN_RULE_FLOOR_M = 5e-4  # the screening rule is graded no finer than for this height
LATERAL_STEP_M = 1e-6  # central difference of w across a side face
EXACT_ORDER = P.DEFAULT_ORDER  # the rule of matdb levitate (the exact rows are levitate's)
TILT_ORDER = 3  # tilt tables: diagonal within about 1e-3 of order 8, couplings a few %
HEIGHT_KEY_M = 1e-12  # heights closer than this share a table entry [m]


def cache_dir() -> Path:
    """``MATDB_CACHE_DIR`` or the user cache directory, with an ``advisor`` sub-folder."""
    return cache_root() / "advisor"


_DISKS: dict[str, diskcache.Cache] = {}
_DISK_LOCK = threading.Lock()


def disk_cache() -> diskcache.Cache:
    """The :class:`diskcache.Cache` of :func:`cache_dir` (one per folder and process)."""
    d = str(cache_dir())
    with _DISK_LOCK:
        c = _DISKS.get(d)
        if c is None:
            c = diskcache.Cache(d)
            _DISKS[d] = c
    return c


_FINGERPRINT: str | None = None


def physics_fingerprint() -> str:
    """Hash of the source of the physics package and of the ``levitate`` computation (the
    exact rows are kept too), so a change there invalidates cached tables and results."""
    global _FINGERPRINT
    if _FINGERPRINT is None:
        h = hashlib.sha256(CODE_VERSION.encode())
        pkg = Path(P.__file__).resolve().parent.parent
        files = sorted((pkg / "physics").rglob("*.py")) + [pkg / "analysis" / "levitate.py",
                                                           *sorted((pkg / "design").glob("*.py"))]
        for f in files:
            h.update(f.relative_to(pkg).as_posix().encode())
            h.update(f.read_bytes() if f.exists() else b"")
        _FINGERPRINT = h.hexdigest()[:16]
    return _FINGERPRINT


def _hkeys(heights) -> list[int]:
    """Table keys of heights: whole picometres."""
    return np.rint(np.ravel(np.asarray(heights, dtype=float)) / HEIGHT_KEY_M).astype(np.int64).tolist()


def _empty_stores() -> dict[str, dict[int, tuple]]:
    return {"coarse": {}, "lateral": {}}


class GeometryData:
    """Unit-polarisation tables of one arrangement under one plate outline.

    Stores (all at ``B_r = 1 T``, split by field component):

    * ``coarse``: footprint integrals of ``B_z^2`` and ``B_x^2 + B_y^2`` per height, on the
      screening rule of :func:`matdb.physics.plate_tables.plane_integrals`;
    * ``lateral``: :func:`matdb.physics.plate_tables.lateral_line_integrals` per height;
    * ``tilt<t>``: :func:`matdb.physics.plate_tables.tilt_tables` per gap for a thickness;
    * ``hmax``: the largest reverse field along the magnetisation found by
      :func:`matdb.physics.thermal.demag_check` at unit polarisation [A/m];
    * ``memo``: results of the exact path (keyed by text).
    """

    def __init__(self, spec: ArrangementSpec, plate_m: tuple[float, float],
                 chi_rec: float = 0.0):
        self.spec = spec
        self.plate_m = (float(plate_m[0]), float(plate_m[1]))
        self.chi_rec = float(chi_rec)
        # unit remanence, each magnet on its recoil line (linear in Br: scaled later)
        self._unit = None
        self.breaks = P.edge_lines(_built(spec).magnets)
        self._even: tuple[bool, bool, bool] | None = None
        key = {"v": CODE_VERSION, "arr": spec.key(), "plate": [repr(v) for v in self.plate_m],
               "screen": [SCREEN_ORDER, repr(SCREEN_RULE_FLOOR_M), repr(LATERAL_STEP_M), TILT_ORDER],
               "physics": physics_fingerprint(), "chi_rec": repr(self.chi_rec)}
        self.key = hashlib.sha256(json.dumps(key, sort_keys=True).encode()).hexdigest()[:24]
        self.stores: dict[str, dict[int, tuple]] = _empty_stores()
        self.hmax: float | None = None
        self.memo: dict[str, Any] = {}
        self._arrays: dict[tuple, np.ndarray] = {}  # tables already assembled for a height set
        self._ready: set[tuple] = set()  # height sets found complete
        self.dirty = False
        self._loaded = False

    @property
    def unit(self):
        """The arrangement at unit remanence on its recoil line (built on first use: a
        geometry whose tables are all on disk never solves the recoil problem)."""
        if self._unit is None:
            self._unit = _built(self.spec).with_recoil([self.chi_rec] * self.spec.count)
        return self._unit

    @property
    def even(self) -> tuple[bool, bool, bool]:
        """Whether ``|B|^2`` is even in x and y (:func:`matdb.physics.plate_tables.mirror_symmetry`):
        the plate rules are then folded onto a half or a quarter of the plate; and whether
        it is symmetric under ``x <-> y`` (:func:`matdb.physics.plate_tables.diagonal_symmetry`):
        then about half of the quarter's nodes are evaluated."""
        if self._even is None:
            self._even = (*PT.mirror_symmetry(self.unit), PT.diagonal_symmetry(self.unit))
        return self._even

    # -- persistence ----------------------------------------------------------
    def load(self) -> None:
        """Read the tables from the disk cache (once)."""
        if self._loaded:
            return
        self._loaded = True
        try:
            got = disk_cache().get(self.key)
        except Exception:  # an unreadable cache is recomputed, never trusted
            got = None
        if not isinstance(got, dict):
            return
        try:
            stores = {str(k): {int(h): tuple(float(x) for x in v) for h, v in st.items()}
                      for k, st in got["stores"].items()}
            hmax = got.get("hmax")
            memo = dict(got.get("memo", {}))
        except (KeyError, TypeError, ValueError, AttributeError):
            return
        for k, st in stores.items():
            self.stores.setdefault(k, {}).update(st)
        if hmax is not None and self.hmax is None:
            self.hmax = float(hmax)
        for k, v in memo.items():
            self.memo.setdefault(k, v)

    def save(self) -> None:
        """Write the tables to the disk cache when something new was computed."""
        if not self.dirty:
            return
        disk_cache().set(self.key, {"stores": self.stores, "hmax": self.hmax, "memo": self.memo})
        self.dirty = False

    # -- tables ---------------------------------------------------------------
    def _fill(self, name: str, heights, compute) -> np.ndarray:
        self.load()
        hs = np.atleast_1d(np.asarray(heights, dtype=float)).ravel()
        akey = (name, hs.tobytes())
        got = self._arrays.get(akey)
        if got is not None:
            return got.copy()
        st = self.stores.setdefault(name, {})
        keys = _hkeys(hs)
        missing = sorted({k for k in keys if k not in st})
        if missing:
            vals = compute(np.array(missing, dtype=float) * HEIGHT_KEY_M)
            for k, v in zip(missing, vals):
                st[k] = tuple(np.ravel(v).tolist())
            self.dirty = True
        out = np.array([st[k] for k in keys], dtype=float).reshape(len(hs), -1)
        self._arrays[akey] = out
        return out.copy()

    def coarse(self, heights) -> np.ndarray:
        """(n, 2): ``int B_z^2 dA``, ``int (B_x^2 + B_y^2) dA`` [T^2 m^2] at unit
        polarisation over the plate outline, on the screening rule."""
        def compute(h):
            return PT.plane_integrals(self.unit.B, *self.plate_m, *self.breaks, h, SCREEN_ORDER,
                                      SCREEN_RULE_FLOOR_M, self.even)

        return self._fill("coarse", heights, compute)

    def lateral(self, heights) -> np.ndarray:
        """(n, 4): :func:`matdb.physics.plate_tables.lateral_line_integrals` [T^2]."""
        def compute(hs):
            return PT.lateral_line_integrals(self.unit.B, *self.plate_m, *self.breaks, hs,
                                             SCREEN_ORDER, SCREEN_RULE_FLOOR_M, LATERAL_STEP_M,
                                             self.even)

        return self._fill("lateral", heights, compute)

    def tilt(self, thickness: float, gaps) -> np.ndarray:
        """(n, 2, 4, 4): :func:`matdb.physics.plate_tables.tilt_tables` for a plate of
        ``thickness`` at each gap (Gauss-Legendre order :data:`TILT_ORDER`)."""
        geom = P.PlateGeometry("rectangle", self.plate_m[0], self.plate_m[1], float(thickness),
                               0.0, 0.0, *self.breaks)

        def compute(gs):
            return PT.tilt_tables(self.unit.B, geom, gs, TILT_ORDER).reshape(len(gs), -1)

        name = f"tilt{int(round(thickness * 1e9))}"
        return self._fill(name, gaps, compute).reshape(-1, 2, 4, 4)

    def demag_hmax(self) -> float:
        """Largest reverse field along the magnetisation at unit polarisation [A/m]."""
        self.load()
        if self.hmax is None:
            self.hmax = _HMAX.get(shape_key(self.spec))
            if self.hmax is None:
                knee = TH.KNEE_FRACTION["NdFeB"][0]
                # the idealised (rigid) magnets: their reverse field is a little larger than
                # on the recoil line, so the check errs on the safe side (as levitate's);
                # at the canonical size of the shape, so every size gets the same number
                r = TH.demag_check(canonical_spec(self.spec).build(1.0), 1.0, 0.0, "NdFeB", [T_REF_K])
                self.hmax = float(r.worst_ratio * knee)
            _HMAX[shape_key(self.spec)] = self.hmax
            self.dirty = True
        return self.hmax

    def is_ready(self, heights, lat_heights) -> bool:
        """Whether every table of these heights (and ``hmax``) is already at hand (a set of
        heights found complete is remembered: tables are only ever added)."""
        sig = (np.asarray(heights, dtype=float).tobytes(), np.asarray(lat_heights, dtype=float).tobytes())
        if sig in self._ready:
            return True
        self.load()
        st = self.stores
        ok = (self.hmax is not None and all(k in st["coarse"] for k in _hkeys(heights))
              and all(k in st["lateral"] for k in _hkeys(lat_heights)))
        if ok:
            self._ready.add(sig)
        return ok


def prepare_family(geos: list[GeometryData], heights, lat_heights) -> None:
    """Fill the coarse and lateral tables of geometries that share an arrangement and a
    plate and differ in recoil susceptibility, from one evaluation of their fields
    (:func:`matdb.physics.plate_tables.linear_family`: the field is linear in the
    magnets' polarisations, and the polarisations of the recoil solutions for the
    catalogue's few recoil susceptibilities span fewer dimensions than there are values).
    Each geometry's tables are the ones it would compute alone, to rounding."""
    geos = list(dict.fromkeys(geos))
    for g in geos:
        g.load()
    todo = {}
    for name, hs in (("coarse", heights), ("lateral", lat_heights)):
        keys = sorted({k for g in geos for k in _hkeys(hs) if k not in g.stores[name]})
        if keys:
            todo[name] = keys
    if not todo:
        return
    family = PT.linear_family([g.unit for g in geos]) if len(geos) > 1 else None
    # sources of each, the field once (the family holds every field)
    evens = ({(*PT.mirror_symmetry(g.unit, field=family if i == 0 else False),
               PT.diagonal_symmetry(g.unit, field=family if i == 0 else False))
              for i, g in enumerate(geos)} if family else set())
    if len(evens) != 1:  # one geometry, or symmetries that differ: each on its own
        for g in geos:
            g.coarse(heights)
            g.lateral(lat_heights)
        return
    even = evens.pop()
    for g in geos:
        g._even = even
    first = geos[0]
    for name, keys in todo.items():
        h = np.array(keys, dtype=float) * HEIGHT_KEY_M
        if name == "coarse":
            vals = PT.plane_integrals(family, *first.plate_m, *first.breaks, h, SCREEN_ORDER,
                                      SCREEN_RULE_FLOOR_M, even)
        else:
            vals = PT.lateral_line_integrals(family, *first.plate_m, *first.breaks, h, SCREEN_ORDER,
                                             SCREEN_RULE_FLOOR_M, LATERAL_STEP_M, even)
        for g, v in zip(geos, vals):
            st = g.stores[name]
            for k, row in zip(keys, np.asarray(v).tolist()):
                st.setdefault(k, tuple(row))
            g.dirty = True


_GEOMETRIES: dict[tuple, GeometryData] = {}
#: the reverse field at unit polarisation by :func:`shape_key`: it depends neither on the
#: plate nor on the recoil line (the rigid magnets are checked), nor on the size
_HMAX: dict[tuple, float] = {}


CANONICAL_SIZE_M = 0.01  # first magnet dimension of :func:`canonical_spec` [m]


def canonical_spec(spec: ArrangementSpec) -> ArrangementSpec:
    """``spec`` scaled to a first magnet dimension of :data:`CANONICAL_SIZE_M` (the
    representative of its :func:`shape_key`). The demagnetisation check's worst point is
    often on an edge shared by touching magnets, where the value is sensitive to the
    rounding of coordinates (about 1e-7 of it between sizes): one size for all keeps the
    number independent of which size was seen first."""
    f = CANONICAL_SIZE_M / float(spec.size[0])
    return replace(spec, size=tuple(float(s) * f for s in spec.size), spacing=float(spec.spacing) * f)


def shape_key(spec: ArrangementSpec) -> tuple:
    """``spec`` in units of its first magnet dimension: arrangements equal up to scale share
    it. Magnetostatics has no length scale: scaling every length by ``l`` scales the
    field points with it and leaves H at the scaled points unchanged ([1]_), and the
    demagnetisation check samples each magnet at points fixed relative to it.

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 5.8 (the
       field of a uniform magnetisation from its surface charge, an integral of
       ``(x - x') / |x - x'|^3`` over the surfaces, invariant under ``x -> l x``).
    """
    a = float(spec.size[0])
    return (spec.shape, tuple(float(s) / a for s in spec.size), spec.pattern, spec.rows, spec.cols,
            float(spec.spacing) / a, spec.back_plate)


_BUILT: dict[ArrangementSpec, Any] = {}


def _built(spec: ArrangementSpec):
    """``spec.build(1.0)``, once per arrangement (an immutable :class:`Arrangement`)."""
    a = _BUILT.get(spec)
    if a is None:
        a = _BUILT[spec] = spec.build(1.0)
    return a


def geometry(spec: ArrangementSpec, plate_m: tuple[float, float], chi_rec: float) -> GeometryData:
    """The (memory-cached) :class:`GeometryData` of ``spec`` under a plate of ``plate_m``,
    magnets of recoil susceptibility ``chi_rec`` (``mu_rec - 1`` of their family)."""
    k = (spec, float(plate_m[0]), float(plate_m[1]), float(chi_rec))
    g = _GEOMETRIES.get(k)
    if g is None:
        g = GeometryData(spec, plate_m, chi_rec)
        _GEOMETRIES[k] = g
    return g


def save_all(geos=None) -> None:
    """Write every geometry (or those of ``geos``) with new tables to the disk cache, in
    one transaction."""
    todo = [g for g in (list(_GEOMETRIES.values()) if geos is None else geos) if g.dirty]
    if not todo:
        return
    with disk_cache().transact():
        for g in todo:
            g.save()


def clear_memory_cache() -> None:
    """Forget the in-memory geometry cache (the disk cache stays)."""
    _GEOMETRIES.clear()
    _HMAX.clear()
    _BUILT.clear()
