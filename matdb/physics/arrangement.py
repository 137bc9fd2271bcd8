"""Magnet arrangements: superposition of closed-form fields, steel back plate by images.

Conventions (other modules rely on them): magnets' top faces at z = 0, the arrangement
centred on the z axis; ``cols`` run along x, ``rows`` along y; ``spacing`` is the clear
gap between neighbours; magnet (row 0, col 0) at -x, -y is magnetised +z; the sign is
(-1)^(row+col) for "checkerboard" and (-1)^row for "stripes"; "grid" is all +z;
"single" is one magnet centred at x = y = 0. A "list" keeps the x, y given for each
magnet and is shifted in z so that its highest top face is at z = 0.

A back plate is an ideal high-permeability half-space under the magnets, its surface at
the lowest bottom face. By the method of images its effect above the surface is that
of the mirror image of every magnet in that plane with J' = (-Jx, -Jy, +Jz) [1]_: a
magnet standing on the plate acts as one of twice its height.

References
----------
.. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), section 5.9
   (boundary conditions at a high-permeability surface; image of a magnetic charge
   distribution in a mu -> infinity half-space).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any, Sequence

import numpy as np

from matdb.errors import InputError
from matdb.constants import MU0
from matdb.physics.fields import MagnetSet, as_points
from matdb.physics.recoil import effective_polarizations, polarization_cells
from matdb.physics.recoil_field import CorrectionField, family_field

__all__ = ["Magnet", "Arrangement", "build_arrangement", "linear_fields", "SHAPES", "PATTERNS", "SIZE_FORMS"]

SHAPES = ("cuboid", "cylinder", "ring")
PATTERNS = ("single", "grid", "checkerboard", "stripes", "list")
#: Per magnet shape: how many lengths its ``size`` holds and in which order (the design
#: model adds the plate shapes to these).
SIZE_FORMS = {
    "cuboid": (3, "[x, y, height]"),
    "cylinder": (2, "[diameter, height]"),
    "ring": (3, "[outer diameter, inner diameter, height]"),
}


def _float(value: Any, field_name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{field_name}: expected a number, got {value!r}") from exc
    if not math.isfinite(v):
        raise InputError(f"{field_name}: expected a finite number, got {value!r}")
    return v


def _vector(value: Any, field_name: str) -> tuple[float, float, float]:
    try:
        items = list(value)
    except TypeError as exc:
        raise InputError(f"{field_name}: expected 3 numbers, got {value!r}") from exc
    if len(items) != 3:
        raise InputError(f"{field_name}: expected 3 numbers, got {value!r}")
    return tuple(_float(v, field_name) for v in items)  # type: ignore[return-value]


def _check_shape(shape: Any) -> str:
    s = str(shape).strip().lower() if isinstance(shape, str) else shape
    if s not in SHAPES:
        raise InputError(f"shape: expected one of {', '.join(SHAPES)}, got {shape!r}")
    return s


def _check_size(shape: str, size: Any) -> tuple[float, ...]:
    n, form = SIZE_FORMS[shape]
    try:
        items = list(size)
    except TypeError as exc:
        raise InputError(f"size: expected {form} in metres for a {shape}, got {size!r}") from exc
    if len(items) != n:
        raise InputError(f"size: expected {form} in metres for a {shape}, got {size!r}")
    vals = tuple(_float(v, "size") for v in items)
    if shape == "ring":
        outer, inner, h = vals
        if not (outer > 0 and h > 0 and 0 <= inner < outer):
            raise InputError(
                f"size: expected {form} with 0 <= inner < outer and positive lengths, got {size!r}"
            )
    elif not all(v > 0 for v in vals):
        raise InputError(f"size: expected {form} of positive lengths in metres, got {size!r}")
    return vals


@dataclass(frozen=True)
class Magnet:
    """One uniformly magnetised permanent magnet (SI).

    Attributes
    ----------
    shape : str
        "cuboid", "cylinder" or "ring" (axis-aligned; cylinders and rings along z).
    size : tuple of float
        cuboid (x, y, height); cylinder (diameter, height); ring (outer diameter,
        inner diameter, height) [m].
    position : tuple of float
        Centre [m].
    direction : tuple of float
        Magnetisation direction, normalised on creation; (0, 0, +-1) for cylinders and
        rings.
    br : float
        Remanence [T]; the polarisation is J = br * direction.
    grade : str or None
        Grade name, descriptive.
    """

    shape: str
    size: tuple[float, ...]
    position: tuple[float, float, float]
    direction: tuple[float, float, float]
    br: float
    grade: str | None = None

    def __post_init__(self) -> None:
        shape = _check_shape(self.shape)
        size = _check_size(shape, self.size)
        pos = _vector(self.position, "position")
        d = _vector(self.direction, "direction")
        n = math.sqrt(sum(c * c for c in d))
        if n == 0:
            raise InputError(f"direction: expected a non-zero vector, got {self.direction!r}")
        d = tuple(c / n for c in d)
        if shape != "cuboid" and (abs(d[0]) > 1e-12 or abs(d[1]) > 1e-12):
            raise InputError(
                f"direction: a {shape} is magnetised along its axis, expected (0, 0, 1) or (0, 0, -1), "
                f"got {self.direction!r}"
            )
        if shape != "cuboid":
            d = (0.0, 0.0, math.copysign(1.0, d[2]))
        br = _float(self.br, "br")
        object.__setattr__(self, "shape", shape)
        object.__setattr__(self, "size", size)
        object.__setattr__(self, "position", pos)
        object.__setattr__(self, "direction", d)
        object.__setattr__(self, "br", br)

    @property
    def height(self) -> float:
        """Extent along z [m]."""
        return self.size[-1]

    @property
    def polarization(self) -> tuple[float, float, float]:
        """J = br * direction [T]."""
        return tuple(self.br * c for c in self.direction)  # type: ignore[return-value]

    @property
    def half_extents(self) -> tuple[float, float, float]:
        """Half sizes of the bounding box along x, y, z [m]."""
        if self.shape == "cuboid":
            return (self.size[0] / 2, self.size[1] / 2, self.size[2] / 2)
        r = self.size[0] / 2
        return (r, r, self.size[-1] / 2)

    @property
    def volume(self) -> float:
        """Volume [m^3]."""
        if self.shape == "cuboid":
            return self.size[0] * self.size[1] * self.size[2]
        if self.shape == "cylinder":
            return math.pi / 4 * self.size[0] ** 2 * self.size[1]
        return math.pi / 4 * (self.size[0] ** 2 - self.size[1] ** 2) * self.size[2]

    @property
    def top_z(self) -> float:
        return self.position[2] + self.height / 2

    @property
    def bottom_z(self) -> float:
        return self.position[2] - self.height / 2


def _sources(magnets: Sequence[Magnet], plate_z: float | None) -> MagnetSet:
    """All sources in priority order: the real magnets, then their images (if any)."""
    kinds = [m.shape for m in magnets]
    sizes = [m.size for m in magnets]
    pols = [m.polarization for m in magnets]
    pos = [m.position for m in magnets]
    if plate_z is not None:
        for shape, size, (jx, jy, jz), (x, y, z) in list(zip(kinds, sizes, pols, pos)):
            kinds.append(shape)
            sizes.append(size)
            pols.append((-jx, -jy, jz))
            pos.append((x, y, 2.0 * plate_z - z))
    return MagnetSet(kinds, sizes, np.asarray(pols, dtype=float), np.asarray(pos, dtype=float))


@dataclass(frozen=True)
class Arrangement:
    """A set of magnets, optionally on an ideal steel back plate.

    Attributes
    ----------
    magnets : tuple of Magnet
    back_plate : bool
        Ideal high-permeability half-space under the magnets, surface at the lowest
        bottom face, modelled by image magnets with J' = (-Jx, -Jy, +Jz).
    pattern, rows, cols : descriptive.
    cells : tuple or None
        Magnets on their recoil lines (:meth:`with_recoil`): cells of each magnet whose
        polarisation departs from the magnet's mean (sizes (k, 3) [m], centres (k, 3)
        [m], departures dJ (k, 3) [T], magnet index (k,)); their field
        (:class:`matdb.physics.recoil_field.CorrectionField`, tabulated above the magnets)
        is added to that of the magnets with their mean polarisation.
    tabulated : bool
        False: the cells' field is always evaluated exactly (cell by cell).
    """

    magnets: tuple[Magnet, ...]
    back_plate: bool = False
    pattern: str = "list"
    rows: int = 1
    cols: int = 1
    cells: tuple | None = field(default=None, compare=False, repr=False)
    tabulated: bool = field(default=True, compare=False, repr=False)
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        mags = tuple(self.magnets)
        if not mags:
            raise InputError("magnets: expected at least one magnet")
        for m in mags:
            if not isinstance(m, Magnet):
                raise InputError(f"magnets: expected Magnet objects, got {type(m).__name__}")
        object.__setattr__(self, "magnets", mags)
        object.__setattr__(self, "back_plate", bool(self.back_plate))

    # -- geometry --------------------------------------------------------------
    @property
    def count(self) -> int:
        return len(self.magnets)

    @property
    def magnet_volume_m3(self) -> float:
        """Total magnet volume [m^3] (images not counted)."""
        return float(sum(m.volume for m in self.magnets))

    @property
    def top_z(self) -> float:
        """Highest top face [m]."""
        return max(m.top_z for m in self.magnets)

    @property
    def bottom_z(self) -> float:
        """Lowest bottom face [m] (the back plate surface when there is one)."""
        return min(m.bottom_z for m in self.magnets)

    def bounds(self) -> tuple[float, float, float, float, float, float]:
        """Bounding box of the real magnets: (xmin, xmax, ymin, ymax, zmin, zmax) [m]."""
        lo = np.array([[p - h for p, h in zip(m.position, m.half_extents)] for m in self.magnets])
        hi = np.array([[p + h for p, h in zip(m.position, m.half_extents)] for m in self.magnets])
        mn, mx = lo.min(axis=0), hi.max(axis=0)
        return (float(mn[0]), float(mx[0]), float(mn[1]), float(mx[1]), float(mn[2]), float(mx[2]))

    # -- fields ----------------------------------------------------------------
    def _fields(self) -> MagnetSet:
        f = self._cache.get("fields")
        if f is None:
            f = _sources(self.magnets, self.bottom_z if self.back_plate else None)
            self._cache["fields"] = f
        return f

    def correction(self) -> CorrectionField | None:
        """Field of the cells' departures from their magnets' mean polarisation (None for
        rigid or one-cell magnets)."""
        if self.cells is None:
            return None
        c = self._cache.get("correction")
        if c is None:
            # the pattern of the magnets' polarisation directions: checkerboards and stripes
            # of the same magnets keep apart departure tables
            label = tuple(np.sign(np.round([m.direction for m in self.magnets], 6)).astype(int).ravel().tolist())
            c = CorrectionField(*self.cells[:3], self.bottom_z if self.back_plate else None,
                                self.top_z, tabulate=self.tabulated, owner=self.cells[3], label=label,
                                ref=max(abs(m.br) for m in self.magnets))
            self._cache["correction"] = c
        return c

    def B(self, points) -> np.ndarray:
        """Total flux density (images included) at ``points`` (3,) or (n, 3) [m].

        Returns shape (n, 3) [T] (n = 1 for a single point). Inside a magnet B includes
        its polarisation; on faces the inside limit, finite on edges (see
        :mod:`matdb.physics.fields`). With a back plate, values below the plate surface
        (inside the steel) include the images and have no physical meaning.
        """
        p = as_points(points, "points")
        b = self._fields().B(p)
        if self.cells is not None:
            b += self.correction().B(p)
        return b

    def _pol_table(self) -> np.ndarray:
        t = self._cache.get("pol")
        if t is None:
            t = np.array([m.polarization for m in self.magnets], dtype=float)
            self._cache["pol"] = t
        return t

    def H(self, points) -> np.ndarray:
        """Magnetic field H = (B - J_inside) / mu0 [A/m], shape (n, 3).

        J_inside is the polarisation of the real magnet containing the point (0 outside).
        """
        p = as_points(points, "points")
        b = self.B(p)
        idx = self.inside(p)
        j = np.zeros_like(p)
        hit = idx >= 0
        j[hit] = self._pol_table()[idx[hit]]
        if self.cells is not None and np.any(hit):  # the cells' departures inside
            k = self.cells[2].shape[0]
            w = self.correction().exact_set().weights(p[hit])[:, :k]
            j[hit] += w @ self.cells[2]
        return (b - j) / MU0

    def inside(self, points) -> np.ndarray:
        """Index of the (real) magnet containing each point, -1 outside; shape (n,).

        Magnets are closed sets (faces count as inside); where magnets touch, the lower
        index wins (the same owner whose inside limit :meth:`B` returns on the face).
        """
        p = as_points(points, "points")
        idx = self._fields().owner(p)
        idx[idx >= self.count] = -1  # images are not magnets
        return idx

    # -- derived arrangements --------------------------------------------------
    def scaled(self, factor: float) -> "Arrangement":
        """Every br multiplied by ``factor`` (the field is linear in J)."""
        f = _float(factor, "factor")
        mags = tuple(replace(m, br=m.br * f) for m in self.magnets)
        cells = None if self.cells is None else (*self.cells[:2], self.cells[2] * f, self.cells[3])
        return Arrangement(mags, self.back_plate, self.pattern, self.rows, self.cols, cells, self.tabulated)

    def with_recoil(self, chis: Sequence[float], subdivision: int | None = None,
                    tabulated: bool = True) -> "Arrangement":
        """The magnets on their recoil lines (:mod:`matdb.physics.recoil`), with recoil
        susceptibility ``chis[i] = mu_rec - 1`` (their own and their neighbours'
        demagnetising fields, images in the back plate included).

        ``br`` and ``direction`` of the returned magnets are the magnitude and direction
        of each magnet's mean polarisation; the non-uniform part (stronger demagnetisation
        near the face centres and next to opposite neighbours) is carried by
        :attr:`cells` and included in :meth:`B` (tabulated above the magnets once per
        geometry, :mod:`matdb.physics.recoil_field`; ``tabulated=False``: cell by cell).
        ``subdivision`` cells per edge (default :data:`matdb.physics.recoil.SUBDIVISION`,
        reduced for large arrangements; 1: one uniform polarisation per magnet). All
        zeros: ``self``."""
        chis = [_float(c, "mu_rec") for c in chis]
        if len(chis) != self.count:
            raise InputError(f"mu_rec: expected {self.count} values, got {len(chis)}")
        if all(c == 0 for c in chis):
            return self
        plate_z = self.bottom_z if self.back_plate else None
        J = effective_polarizations(self.magnets, chis, plate_z, subdivision)
        cells = polarization_cells(self.magnets, chis, plate_z, subdivision)
        # components at the solver's tolerance (symmetry makes them zero) are zero: the field code
        # then skips the terms of those components, as for the rigid magnets
        J = np.where(np.abs(J) < 1e-9 * np.abs(J).max(axis=1, keepdims=True), 0.0, J)
        mags = []
        seen: list[float] = []
        for m, j in zip(self.magnets, J):
            n = float(np.linalg.norm(j))
            # magnitudes equal to the solver's tolerance (symmetry makes them equal) are equal:
            # the field code shares the terms of magnets with the same polarisation
            n = next((v for v in seen if abs(v - n) <= 1e-9 * n), n)
            seen.append(n)
            mags.append(replace(m, direction=tuple(float(c) / np.linalg.norm(j) for c in j), br=n)
                        if n > 0 else m)
        return Arrangement(tuple(mags), self.back_plate, self.pattern, self.rows, self.cols, cells,
                           tabulated)

    def with_unit_polarization(self) -> "Arrangement":
        """Every |br| = 1 T, magnetisation directions kept (sign of br kept)."""
        mags = tuple(replace(m, br=-1.0 if m.br < 0 else 1.0) for m in self.magnets)
        cells = self.cells
        if cells is not None:  # each magnet's blocks scaled with it
            f = np.array([1.0 / abs(m.br) if m.br != 0 else 0.0 for m in self.magnets])[cells[3]]
            cells = (*cells[:2], cells[2] * f[:, None], cells[3])
        return Arrangement(mags, self.back_plate, self.pattern, self.rows, self.cols, cells, self.tabulated)


def linear_fields(arrangements, rtol: float = 1e-12, stacked=None):
    """One field function for arrangements on recoil lines that differ only in their
    polarisations (the same magnets and cells; several recoil susceptibilities, say).

    The field is linear in the sources ([1]_ of :mod:`matdb.physics.recoil`: superposition):
    the magnets' part is the field of ``r`` basis arrangements, ``r`` the rank of the
    magnets' mean polarisations (singular values below ``rtol`` of the largest dropped),
    and the cells' departures are read from their shared tables once for all
    (:func:`matdb.physics.recoil_field.family_field`).

    ``stacked``: a function that returns one field function for the magnets alone (cells
    removed) or None (then the basis above), e.g.
    :func:`matdb.physics.plate_tables.stacked_field`.

    Returns
    -------
    callable or None
        ``field(points (n, 3) [m]) -> B (k, n, 3) [T]``; None when some arrangement has no
        cells or they do not share their tables.
    """
    arrs = list(arrangements)
    if not arrs or any(a.cells is None for a in arrs):
        return None
    corr = family_field([a.correction() for a in arrs])
    if corr is None:
        return None
    bare = stacked([replace(a, cells=None) for a in arrs]) if stacked is not None else None
    if bare is not None:
        def field_stacked(points) -> np.ndarray:
            p = as_points(points, "points")
            out = corr(p)
            out += bare(p)
            return out

        return field_stacked
    V = np.column_stack([np.ravel([m.polarization for m in a.magnets]) for a in arrs])
    _, sv, zt = np.linalg.svd(V, full_matrices=False)
    r = int(np.sum(sv > rtol * sv[0])) if sv.size and sv[0] > 0 else 0
    Z = zt[:r]
    first = arrs[0]
    basis = []
    for u in (V @ Z.T).T:
        mags = []
        for m, j in zip(first.magnets, u.reshape(-1, 3)):
            n = float(np.linalg.norm(j))
            mags.append(replace(m, direction=tuple(float(c) / n for c in j), br=n) if n > 0
                        else replace(m, br=0.0))
        basis.append(Arrangement(tuple(mags), first.back_plate, first.pattern, first.rows, first.cols))

    def field(points) -> np.ndarray:
        p = as_points(points, "points")
        out = corr(p)
        if r:
            b = np.stack([a.B(p) for a in basis])
            out += np.einsum("kj,knc->jnc", Z, b)
        return out

    return field


def _footprint(shape: str, size: tuple[float, ...]) -> tuple[float, float]:
    if shape == "cuboid":
        return size[0], size[1]
    return size[0], size[0]


def _positive_int(value: Any, field_name: str) -> int:
    if isinstance(value, bool):
        raise InputError(f"{field_name}: expected a positive whole number, got {value!r}")
    try:
        f = float(value)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{field_name}: expected a positive whole number, got {value!r}") from exc
    if not math.isfinite(f) or f != int(f) or f < 1:
        raise InputError(f"{field_name}: expected a positive whole number, got {value!r}")
    return int(f)


def build_arrangement(
    shape: str,
    size: Sequence[float],
    pattern: str = "single",
    rows: int = 1,
    cols: int = 1,
    spacing: float = 0.0,
    br: float = 1.0,
    back_plate: bool = False,
    items: Sequence[dict] | None = None,
    grade: str | None = None,
) -> Arrangement:
    """Build an arrangement by the matdb conventions (see the module docstring).

    Parameters
    ----------
    shape : str
        "cuboid", "cylinder" or "ring".
    size : sequence of float
        cuboid (x, y, height); cylinder (diameter, height); ring (outer d, inner d,
        height) [m].
    pattern : str
        "single", "grid" (all +z), "checkerboard", "stripes" or "list".
    rows, cols : int
        Magnets along y and along x.
    spacing : float
        Clear gap between neighbouring magnets [m].
    br : float
        Remanence [T], positive.
    back_plate : bool
        Ideal steel back plate under the magnets (image method).
    items : list of dict
        For "list": each with ``position`` (3 floats, centre [m]), ``direction``
        (3 floats, normalised; zero refused) and optional ``size``, ``shape``, ``grade``,
        ``br`` (defaults from the call).
    grade : str, optional
        Grade name, stored on each magnet.

    Returns
    -------
    Arrangement
    """
    shape = _check_shape(shape)
    size_t = _check_size(shape, size)
    if not isinstance(pattern, str) or pattern.strip().lower() not in PATTERNS:
        raise InputError(f"pattern: expected one of {', '.join(PATTERNS)}, got {pattern!r}")
    pattern = pattern.strip().lower()
    br_v = _float(br, "br")
    if br_v <= 0:
        raise InputError(f"br: expected a positive remanence in tesla, got {br!r}")
    gap = _float(spacing, "spacing")
    if gap < 0:
        raise InputError(f"spacing: expected a clear gap of zero or more metres, got {spacing!r}")
    h = size_t[-1]

    if pattern == "list":
        if items is None or len(items) == 0:
            raise InputError("items: expected a non-empty list of magnets for pattern 'list'")
        mags = []
        for i, it in enumerate(items):
            if not isinstance(it, dict):
                raise InputError(f"items[{i}]: expected a dict with position and direction, got {it!r}")
            if "position" not in it or "direction" not in it:
                raise InputError(f"items[{i}]: expected keys 'position' and 'direction'")
            shp = _check_shape(it.get("shape", shape))
            sz = _check_size(shp, it.get("size", size_t if shp == shape else None))
            b = _float(it.get("br", br_v), f"items[{i}].br")
            mags.append(
                Magnet(
                    shape=shp,
                    size=sz,
                    position=_vector(it["position"], f"items[{i}].position"),
                    direction=_vector(it["direction"], f"items[{i}].direction"),
                    br=b,
                    grade=it.get("grade", grade),
                )
            )
        shift = max(m.top_z for m in mags)
        mags = [replace(m, position=(m.position[0], m.position[1], m.position[2] - shift)) for m in mags]
        return Arrangement(tuple(mags), back_plate, "list", 1, len(mags))

    if pattern == "single":
        rows_i = cols_i = 1
    else:
        rows_i = _positive_int(rows, "rows")
        cols_i = _positive_int(cols, "cols")
    fx, fy = _footprint(shape, size_t)
    px, py = fx + gap, fy + gap
    mags = []
    for r in range(rows_i):
        for c in range(cols_i):
            if pattern == "checkerboard":
                sign = (-1) ** (r + c)
            elif pattern == "stripes":
                sign = (-1) ** r
            else:
                sign = 1
            x = (c - (cols_i - 1) / 2) * px
            y = (r - (rows_i - 1) / 2) * py
            mags.append(Magnet(shape, size_t, (x, y, -h / 2), (0.0, 0.0, float(sign)), br_v, grade))
    return Arrangement(tuple(mags), back_plate, pattern, rows_i, cols_i)
