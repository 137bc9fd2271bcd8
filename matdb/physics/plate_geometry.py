"""Floating-plate geometry and its quadrature rules: the footprint, side faces, closed
surface and volume of a level plate, graded towards the magnets' edge lines.

See :mod:`matdb.physics.plate` for the physics these rules integrate. Lengths in metres.

References
----------
.. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
   Academic Press (1984), ch. 2 (Gauss-Legendre and compound rules, subdivision towards
   singular points).
"""

from __future__ import annotations

import math
from functools import lru_cache
from dataclasses import dataclass, replace
from typing import Callable, Sequence

import numpy as np

from matdb.errors import InputError
from matdb.physics import quadrature as Q

FieldFn = Callable[[np.ndarray], np.ndarray]

DEFAULT_ORDER = 8  # Gauss-Legendre nodes per panel
CHUNK = 250_000  # points per field call
MIN_GAP = 5e-5  # lowest gap of the lift curve above the cover [m]


# ---------------------------------------------------------------------------
# geometry
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class PlateGeometry:
    """A flat plate with vertical sides, level, its c axis vertical.

    Parameters
    ----------
    shape : {"rectangle", "disc"}
    lx, ly : float
        Side lengths along x and y [m]; for a disc both are the diameter.
    thickness : float
        [m]
    cx, cy : float
        Centre of the footprint [m].
    breaks_x, breaks_y : tuple of float
        ``x`` (``y``) positions of the magnets' edge lines [m]; quadrature panels are
        bounded and graded there (see :func:`edge_lines`).
    mirrors : tuple of (float or None)
        ``(x0, y0)``: lines ``x = x0`` and ``y = y0`` [m] in which the field's energy
        densities ``B_z^2`` and ``B_x^2 + B_y^2`` are mirror-symmetric (see
        :func:`field_mirrors`), None where not known; a level plate centred on such a line
        integrates over one half of its footprint (:func:`footprint_rule`).
    swap : bool
        The energy densities are also symmetric under exchanging ``x - x0`` and
        ``y - y0`` (both mirror lines given; :func:`field_swaps`): a square plate centred
        at ``(x0, y0)`` integrates over one eighth of its footprint.
    """

    shape: str
    lx: float
    ly: float
    thickness: float
    cx: float = 0.0
    cy: float = 0.0
    breaks_x: tuple[float, ...] = ()
    breaks_y: tuple[float, ...] = ()
    mirrors: tuple[float | None, float | None] = (None, None)
    swap: bool = False

    def __post_init__(self):
        if self.shape not in ("rectangle", "disc"):
            raise InputError(f"plate.shape: expected 'rectangle' or 'disc', got {self.shape!r}")
        for name in ("lx", "ly", "thickness"):
            v = getattr(self, name)
            if not (v > 0 and math.isfinite(v)):
                raise InputError(f"plate.{name}: expected a positive length, got {v!r}")
        if self.shape == "disc" and self.lx != self.ly:
            raise InputError("plate.size: a disc has one diameter (lx == ly)")

    @property
    def area(self) -> float:
        """Footprint area [m^2]."""
        if self.shape == "disc":
            return math.pi * self.lx * self.lx / 4.0
        return self.lx * self.ly

    @property
    def volume(self) -> float:
        """[m^3]"""
        return self.area * self.thickness

    @property
    def is_square(self) -> bool:
        return self.shape == "rectangle" and abs(self.lx - self.ly) <= 1e-9 * max(self.lx, self.ly)

    def with_side(self, side: float) -> "PlateGeometry":
        """The same plate with both sides (or the diameter) set to ``side`` [m]."""
        return replace(self, lx=side, ly=side)

    def shifted(self, dx: float = 0.0, dy: float = 0.0) -> "PlateGeometry":
        return replace(self, cx=self.cx + dx, cy=self.cy + dy)


def edge_lines(magnets) -> tuple[tuple[float, ...], tuple[float, ...]]:
    """x and y positions of the edge lines of magnets (cuboids; cylinders and rings by
    their extreme tangent lines and axis).

    Parameters
    ----------
    magnets : iterable
        Objects with ``shape``, ``size`` and ``position`` (as ``Arrangement.magnets``).

    Returns
    -------
    xs, ys : tuple of float
        Sorted, de-duplicated [m].

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 (Gauss-Legendre and compound rules, subdivision
       towards singular points).
    """
    xs: list[float] = []
    ys: list[float] = []
    for m in magnets:
        px, py = float(m.position[0]), float(m.position[1])
        size = tuple(float(s) for s in m.size)
        if m.shape == "cuboid":
            xs += [px - size[0] / 2, px + size[0] / 2]
            ys += [py - size[1] / 2, py + size[1] / 2]
        else:  # cylinder (d, h) or ring (do, di, h)
            radii = [size[0] / 2] + ([size[1] / 2] if m.shape == "ring" else [])
            for r in radii:
                xs += [px - r, px + r]
                ys += [py - r, py + r]
            xs.append(px)
            ys.append(py)
    return _dedupe(xs), _dedupe(ys)


def _dedupe(values: Sequence[float], tol: float = 1e-12) -> tuple[float, ...]:
    v = np.sort(np.asarray(values, dtype=float))
    if v.size == 0:
        return ()
    keep = np.concatenate([[True], np.diff(v) > tol])
    return tuple(float(x) for x in v[keep])


def field_mirrors(magnets, x0: float, y0: float, rel_tol: float = 1e-9
                  ) -> tuple[float | None, float | None]:
    """Mirror lines of the magnets' energy densities through the point ``(x0, y0)`` [m].

    Reflecting the arrangement in the plane ``x = x0`` moves each magnet to the mirrored
    position and turns its polarisation, a pseudo-vector, into ``(J_x, -J_y, -J_z)`` (in
    ``y = y0``: ``(-J_x, J_y, -J_z)``); when the result is the same set of magnets (shape,
    size, position) with the same polarisations, or all reversed, the field at the mirrored
    point is the mirrored field up to one sign, so ``B_z^2`` and ``B_x^2 + B_y^2`` are
    symmetric. An ideal steel back plate under the magnets keeps the symmetry (its images
    are mirrored with them), and so does the recoil correction, which the same geometry
    determines.

    Parameters
    ----------
    magnets : iterable
        Objects with ``shape``, ``size``, ``position`` and ``polarization`` [m, T].
    x0, y0 : float
        The lines to test [m].

    Returns
    -------
    (x0 or None, y0 or None)

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 6.10
       (B and M are axial vectors: their behaviour under reflection).
    """
    mags = list(magnets)
    if not mags:
        return (None, None)
    pos = np.array([[float(v) for v in m.position] for m in mags])
    pol = np.array([[float(v) for v in m.polarization] for m in mags])
    size = [(m.shape, tuple(float(v) for v in m.size)) for m in mags]
    scale = max(float(np.ptp(pos, axis=0).max()), max(max(sz) for _, sz in size))
    jmax = float(np.abs(pol).max()) or 1.0

    def symmetric(axis: int, c: float) -> bool:
        mp = pos.copy()
        mp[:, axis] = 2.0 * c - mp[:, axis]
        flip = -np.ones(3)
        flip[axis] = 1.0
        return _same_set(pos, pol, size, mp, pol * flip, size, rel_tol * scale, rel_tol * jmax)

    return (float(x0) if symmetric(0, float(x0)) else None,
            float(y0) if symmetric(1, float(y0)) else None)


@lru_cache(maxsize=4096)
def _folded_rule(lo: float, hi: float, breaks: tuple[float, ...], scale: float, order: int,
                 centre: float) -> tuple[np.ndarray, np.ndarray]:
    """:func:`matdb.physics.quadrature.graded_rule` on ``[lo, hi]`` folded about ``centre``
    (:func:`_fold`), cached."""
    x, w = Q.graded_rule(lo, hi, breaks, scale, order)
    x, w = _fold(x, w, centre, 0.5 * (hi - lo))
    x.flags.writeable = False
    w.flags.writeable = False
    return x, w


def field_swaps(magnets, x0: float, y0: float, rel_tol: float = 1e-9) -> bool:
    """Whether the magnets' energy densities are symmetric under the reflection
    ``(x - x0, y - y0) -> (y - y0, x - x0)`` (the diagonal through ``(x0, y0)``).

    The reflection moves a magnet to the swapped position with its ``x`` and ``y`` sizes
    exchanged and turns its polarisation, a pseudo-vector, into ``(-J_y, -J_x, -J_z)``;
    when that gives the same set of magnets with the same polarisations, or all reversed,
    ``B_z^2`` and ``B_x^2 + B_y^2`` are symmetric (as in :func:`field_mirrors`).

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 6.10.
    """
    mags = list(magnets)
    if not mags:
        return False
    pos = np.array([[float(v) for v in m.position] for m in mags])
    pol = np.array([[float(v) for v in m.polarization] for m in mags])
    size = [(m.shape, tuple(float(v) for v in m.size)) for m in mags]
    scale = max(float(np.ptp(pos, axis=0).max()), max(max(sz) for _, sz in size))
    jmax = float(np.abs(pol).max()) or 1.0
    mp = np.column_stack([x0 + (pos[:, 1] - y0), y0 + (pos[:, 0] - x0), pos[:, 2]])
    mj = -pol[:, [1, 0, 2]]
    msize = [(sh, (sz[1], sz[0]) + sz[2:]) if sh == "cuboid" else (sh, sz) for sh, sz in size]
    return _same_set(pos, pol, size, mp, mj, msize, rel_tol * scale, rel_tol * jmax)


def _same_set(pos, pol, size, mp, mj, msize, tol_pos: float, tol_j: float) -> bool:
    """Whether the magnets (mp, mj, msize) are those of (pos, pol, size), all with the same
    polarisation or all reversed."""
    for sign in (1.0, -1.0):
        used = np.zeros(len(size), dtype=bool)
        ok = True
        for i in range(len(size)):
            d = np.abs(pos - mp[i]).max(axis=1) <= tol_pos
            d &= np.abs(pol - sign * mj[i]).max(axis=1) <= tol_j
            d &= np.array([sz == msize[i] for sz in size]) & ~used
            hit = np.nonzero(d)[0]
            if hit.size == 0:
                ok = False
                break
            used[hit[0]] = True
        if ok:
            return True
    return False


def _fold(x: np.ndarray, w: np.ndarray, centre: float | None, half: float
          ) -> tuple[np.ndarray, np.ndarray]:
    """A 1-D rule folded about ``centre`` for integrands symmetric about it: each node
    whose mirror image is also a node of equal weight stands for both (weight doubled, the
    image dropped); nodes without an image, and a node on the centre, keep their weight.
    The sum is the rule's own sum for every symmetric integrand. Unchanged when ``centre``
    is None."""
    if centre is None:
        return x, w
    m = x - centre
    tol = 1e-12 * half
    order = np.argsort(m)
    ms, ws = m[order], w[order]
    if (np.abs(ms + ms[::-1]).max() <= tol
            and np.abs(ws - ws[::-1]).max() <= 1e-12 * np.abs(ws).max()):
        # the whole rule is its own mirror image
        up = ms > tol
        sel = up | (np.abs(ms) <= tol)
        return (x[order])[sel], np.where(up, 2.0 * ws, ws)[sel]
    j = np.clip(np.searchsorted(ms, -ms), 0, ms.size - 1)  # candidate image of each node
    for k in (j, np.clip(j - 1, 0, ms.size - 1)):
        better = np.abs(ms[k] + ms) < np.abs(ms[j] + ms)
        j = np.where(better, k, j)
    paired = (np.abs(ms[j] + ms) <= tol) & np.isclose(ws[j], ws, rtol=1e-12, atol=0) \
        & (np.abs(ms) > tol)
    keep = ~paired | (ms > 0)
    wt = np.where(paired, 2.0 * ws, ws)
    return (x[order])[keep], wt[keep]


# ---------------------------------------------------------------------------
# quadrature rules (matdb.physics.quadrature)
# ---------------------------------------------------------------------------
def footprint_rule(plate: PlateGeometry, scale: float, order: int = DEFAULT_ORDER,
                   folded: bool = False) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Quadrature over the footprint (:func:`_footprint_rule`), cached and read-only."""
    return _footprint_cached(plate, float(scale), int(order), bool(folded))


@lru_cache(maxsize=2048)
def _footprint_cached(plate: PlateGeometry, scale: float, order: int, folded: bool
                      ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    out = tuple(np.ascontiguousarray(a, dtype=float) for a in
                _footprint_rule(plate, scale, order, folded))
    for a in out:
        a.flags.writeable = False
    return out


def _footprint_rule(plate: PlateGeometry, scale: float, order: int = DEFAULT_ORDER,
                    folded: bool = False) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Quadrature over the footprint, graded for a plane at distance ``scale`` from the
    magnets' edges.

    With ``folded``, for integrands with the mirror symmetry of ``plate.mirrors`` (the
    energy densities of the field), a rectangle centred on a mirror line keeps only the
    nodes on one side of it with doubled weights: the same sum at half the field points
    (a quarter with both lines; an eighth for a square with ``plate.swap``, the nodes on
    one side of the diagonal). The rule must be symmetric itself (its panels end at the
    magnets' edge lines, mirrored too); otherwise nothing is folded.

    Returns
    -------
    x, y, w : ndarray
        Node coordinates [m] and area weights [m^2]; ``sum(w)`` is the area.

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 (Gauss-Legendre and compound rules, subdivision
       towards singular points).
    """
    if plate.shape == "rectangle":
        x, wx = Q.graded_rule(plate.cx - plate.lx / 2, plate.cx + plate.lx / 2, plate.breaks_x,
                              scale, order)
        y, wy = Q.graded_rule(plate.cy - plate.ly / 2, plate.cy + plate.ly / 2, plate.breaks_y,
                              scale, order)
        if folded:
            mx, my = plate.mirrors
            fx = mx is not None and abs(mx - plate.cx) <= 1e-12 * plate.lx
            fy = my is not None and abs(my - plate.cy) <= 1e-12 * plate.ly
            if fx:
                x, wx = _folded_rule(plate.cx - plate.lx / 2, plate.cx + plate.lx / 2,
                                     plate.breaks_x, float(scale), int(order), plate.cx)
            if fy:
                y, wy = _folded_rule(plate.cy - plate.ly / 2, plate.cy + plate.ly / 2,
                                     plate.breaks_y, float(scale), int(order), plate.cy)
            if (plate.swap and fx and fy and x.size == y.size
                    and ((x is y and wx is wy and plate.cx == plate.cy)  # one cached rule
                         or (np.array_equal(x - plate.cx, y - plate.cy)
                             and np.array_equal(wx, wy)))):
                # one eighth: the nodes with u >= v (u, v from the centre), off-diagonal
                # ones standing for their swapped images too
                u, v = x - plate.cx, y - plate.cy
                i, j = np.nonzero(u[:, None] >= v[None, :])  # row-major, as a mask of the grid
                ui, vj = u[i], v[j]
                ww = wx[i] * wy[j]
                return (ui + plate.cx, vj + plate.cy, np.where(ui > vj, 2.0 * ww, ww))
        return (np.repeat(x, y.size), np.tile(y, x.size), np.outer(wx, wy).ravel())
    return Q.disc_rule(plate.cx, plate.cy, plate.lx / 2, plate.breaks_x, plate.breaks_y, scale,
                       order)


def z_rule(z_lo: float, z_hi: float, order: int) -> tuple[np.ndarray, np.ndarray]:
    """Nodes through the thickness, graded towards the magnets' top faces at z = 0.

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 (Gauss-Legendre and compound rules, subdivision
       towards singular points).
    """
    return Q.graded_rule(z_lo, z_hi, (0.0,), max(z_lo, 1e-9), order)


def side_rule(plate: PlateGeometry, z_lo: float, z_hi: float, order: int = DEFAULT_ORDER
              ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Quadrature over the vertical side faces between heights ``z_lo`` and ``z_hi``.

    Returns
    -------
    points : (m, 3) ndarray [m]
    normals : (m, 3) ndarray, outward unit normals
    w : (m,) ndarray, area weights [m^2]

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 (Gauss-Legendre and compound rules, subdivision
       towards singular points).
    """
    z, wz = z_rule(z_lo, z_hi, order)
    scale = max(z_lo, 1e-9)
    pts, nrm, wts = [], [], []
    if plate.shape == "rectangle":
        y, wy = Q.graded_rule(plate.cy - plate.ly / 2, plate.cy + plate.ly / 2, plate.breaks_y,
                              scale, order)
        x, wx = Q.graded_rule(plate.cx - plate.lx / 2, plate.cx + plate.lx / 2, plate.breaks_x,
                              scale, order)
        yy, zy = np.repeat(y, z.size), np.tile(z, y.size)
        xx, zx = np.repeat(x, z.size), np.tile(z, x.size)
        wyz, wxz = np.outer(wy, wz).ravel(), np.outer(wx, wz).ravel()
        for sgn in (1.0, -1.0):
            xf = plate.cx + sgn * plate.lx / 2
            pts.append(np.column_stack([np.full(yy.size, xf), yy, zy]))
            nrm.append(np.tile([sgn, 0.0, 0.0], (yy.size, 1)))
            wts.append(wyz)
            yf = plate.cy + sgn * plate.ly / 2
            pts.append(np.column_stack([xx, np.full(xx.size, yf), zx]))
            nrm.append(np.tile([0.0, sgn, 0.0], (xx.size, 1)))
            wts.append(wxz)
        return np.concatenate(pts), np.concatenate(nrm), np.concatenate(wts)
    r = plate.lx / 2
    cross = []
    for s in plate.breaks_x:
        u = (s - plate.cx) / r
        if abs(u) <= 1:
            a = math.acos(u)
            cross += [a, 2 * math.pi - a]
    for s in plate.breaks_y:
        u = (s - plate.cy) / r
        if abs(u) <= 1:
            a = math.asin(u)
            cross += [a % (2 * math.pi), math.pi - a]
    cross = [c + k * 2 * math.pi for c in cross for k in (-1, 0, 1)]
    phi, wphi = Q.graded_rule(0.0, 2 * math.pi, cross, scale / r, order)
    cph, sph = np.cos(phi), np.sin(phi)
    pp = np.column_stack([np.repeat(plate.cx + r * cph, z.size),
                          np.repeat(plate.cy + r * sph, z.size), np.tile(z, phi.size)])
    nn = np.column_stack([np.repeat(cph, z.size), np.repeat(sph, z.size), np.zeros(pp.shape[0])])
    return pp, nn, np.outer(wphi * r, wz).ravel()


def surface_rule(plate: PlateGeometry, gap: float, order: int = DEFAULT_ORDER
                 ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Closed-surface quadrature of the level plate with its bottom at ``gap``.

    Returns points (m, 3) [m], outward normals (m, 3) and weights (m,) [m^2].

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 (Gauss-Legendre and compound rules, subdivision
       towards singular points).
    """
    t = plate.thickness
    xb, yb, wb = footprint_rule(plate, gap, order)
    xt, yt, wt = footprint_rule(plate, gap + t, order)
    ps, ns, ws = side_rule(plate, gap, gap + t, order)
    pts = np.concatenate([np.column_stack([xb, yb, np.full(xb.size, gap)]),
                          np.column_stack([xt, yt, np.full(xt.size, gap + t)]), ps])
    nrm = np.concatenate([np.tile([0.0, 0.0, -1.0], (xb.size, 1)),
                          np.tile([0.0, 0.0, 1.0], (xt.size, 1)), ns])
    return pts, nrm, np.concatenate([wb, wt, ws])


def volume_rule(plate: PlateGeometry, gap: float, order: int = DEFAULT_ORDER
                ) -> tuple[np.ndarray, np.ndarray]:
    """Volume quadrature of the level plate: points (m, 3) [m], weights (m,) [m^3].

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 (Gauss-Legendre and compound rules, subdivision
       towards singular points).
    """
    x, y, w = footprint_rule(plate, gap, order)
    z, wz = z_rule(gap, gap + plate.thickness, max(4, order // 2 + 1))
    pts = np.column_stack([np.repeat(x, z.size), np.repeat(y, z.size), np.tile(z, x.size)])
    return pts, np.outer(w, wz).ravel()


def mirrored_rules(plate: PlateGeometry, gap: float, order: int = DEFAULT_ORDER
                   ) -> tuple[bool, bool]:
    """For x and y: whether the level plate is centred on the field's mirror line
    (``plate.mirrors``) and its closed-surface and side rules at ``gap``
    (:func:`surface_rule`, :func:`side_rule`) are their own mirror images in it (points,
    normals and weights), so a pose and its mirrored pose integrate mirrored values.
    Rectangles only (False for discs)."""
    if plate.shape != "rectangle":
        return (False, False)
    out = []
    for line, centre, size, breaks in ((plate.mirrors[0], plate.cx, plate.lx, plate.breaks_x),
                                       (plate.mirrors[1], plate.cy, plate.ly, plate.breaks_y)):
        ok = line is not None and abs(line - centre) <= 1e-12 * size
        ok = ok and all(_symmetric_rule(centre - size / 2, centre + size / 2, breaks, float(h),
                                        int(order), centre)
                        for h in (max(gap, 1e-9), gap + plate.thickness))
        out.append(bool(ok))
    return out[0], out[1]


def swapped_rules(plate: PlateGeometry, gap: float, order: int = DEFAULT_ORDER) -> bool:
    """Whether the level plate's closed-surface and side rules at ``gap`` are their own
    images under the exchange of ``x - cx`` and ``y - cy``: a square whose rules along x
    and y are the same (its edge lines placed alike on both axes). Rectangles only."""
    if plate.shape != "rectangle" or not plate.is_square:
        return False
    for h in (max(gap, 1e-9), gap + plate.thickness):
        x, wx = Q.graded_rule(plate.cx - plate.lx / 2, plate.cx + plate.lx / 2, plate.breaks_x,
                              float(h), int(order))
        y, wy = Q.graded_rule(plate.cy - plate.ly / 2, plate.cy + plate.ly / 2, plate.breaks_y,
                              float(h), int(order))
        if not (x.size == y.size and np.allclose(x - plate.cx, y - plate.cy, rtol=0,
                                                 atol=1e-12 * plate.lx)
                and np.allclose(wx, wy, rtol=1e-12, atol=0)):
            return False
    return True


@lru_cache(maxsize=4096)
def _symmetric_rule(lo: float, hi: float, breaks: tuple[float, ...], scale: float, order: int,
                    centre: float) -> bool:
    x, w = Q.graded_rule(lo, hi, breaks, scale, order)
    o = np.argsort(x - centre)
    ms, ws = (x - centre)[o], w[o]
    return bool(np.allclose(ms, -ms[::-1], rtol=0, atol=1e-12 * (hi - lo))
                and np.allclose(ws, ws[::-1], rtol=1e-12, atol=0))


def eval_field(field: FieldFn, points: np.ndarray) -> np.ndarray:
    out = np.empty_like(points)
    for i in range(0, points.shape[0], CHUNK):
        out[i:i + CHUNK] = field(points[i:i + CHUNK])
    return out


def surface_images(plate: PlateGeometry, gap: float, order: int = DEFAULT_ORDER
                   ) -> tuple[tuple[int, np.ndarray, np.ndarray], ...]:
    """Mirror images among the nodes of :func:`surface_rule`: for each line ``x = cx`` (0)
    and ``y = cy`` (1) in which the level plate's rules are their own mirror images
    (:func:`mirrored_rules`), ``(axis, image, kept)``: ``image[m]`` is the index of node
    ``m``'s mirror image (same weight, mirrored normal) and ``kept`` marks the nodes on the
    line or on its + side. Empty for discs and plates off the field's mirror lines.

    The closed surface is laid out as :func:`surface_rule` builds it (bottom and top
    footprints as x-major grids, then the side faces +x, +y, -x, -y), each 1-D rule
    sorted and symmetric, so an image reverses one grid index or swaps two opposite faces.

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 6.10.
    """
    mirrored = mirrored_rules(plate, gap, order)
    if not any(mirrored):
        return ()
    return _surface_images(plate, float(gap), int(order), mirrored)


@lru_cache(maxsize=512)
def _surface_images(plate: PlateGeometry, gap: float, order: int,
                    mirrored: tuple[bool, bool]) -> tuple[tuple[int, np.ndarray, np.ndarray], ...]:
    t = plate.thickness

    def counts(scale: float) -> tuple[int, int]:  # nodes of the x and y rules
        return (Q.graded_rule(plate.cx - plate.lx / 2, plate.cx + plate.lx / 2, plate.breaks_x,
                              scale, order)[0].size,
                Q.graded_rule(plate.cy - plate.ly / 2, plate.cy + plate.ly / 2, plate.breaks_y,
                              scale, order)[0].size)

    (nxb, nyb), (nxt, nyt) = counts(gap), counts(gap + t)  # as footprint_rule grades them
    nxs, nys = counts(max(gap, 1e-9))  # as side_rule grades the side faces
    nz = z_rule(gap, gap + t, order)[0].size
    blocks = [(nxb, nyb), (nxt, nyt)]
    sizes = [nxb * nyb, nxt * nyt, nys * nz, nxs * nz, nys * nz, nxs * nz]
    starts = np.concatenate([[0], np.cumsum(sizes)])
    n = int(starts[-1])
    out = []
    pts = surface_rule(plate, gap, order)[0]
    if pts.shape[0] != n:
        return ()  # not the layout this function knows: no images
    for axis in (0, 1):
        if not mirrored[axis]:
            continue
        image = np.empty(n, dtype=np.intp)
        for b, (nx, ny) in enumerate(blocks):  # footprints: reverse the grid index of `axis`
            g = np.arange(nx * ny).reshape(nx, ny)
            g = g[::-1, :] if axis == 0 else g[:, ::-1]
            image[starts[b]:starts[b + 1]] = starts[b] + g.ravel()
        # side faces 2..5 = +x (y-major grid), +y (x-major), -x, -y
        for f in range(4):
            lo, hi = starts[2 + f], starts[3 + f]
            normal_axis = 0 if f % 2 == 0 else 1
            if normal_axis == axis:  # the opposite face, node for node
                other = 2 + (f + 2) % 4
                image[lo:hi] = starts[other] + np.arange(hi - lo)
            else:  # the same face, its along-face index reversed
                m_along = (nys if f % 2 == 0 else nxs)
                g = np.arange(hi - lo).reshape(m_along, nz)[::-1, :]
                image[lo:hi] = lo + g.ravel()
        c, size = ((plate.cx, plate.lx), (plate.cy, plate.ly))[axis]
        u = pts[:, axis] - c
        mirrored_pts = pts.copy()
        mirrored_pts[:, axis] = 2.0 * c - pts[:, axis]
        if not np.allclose(pts[image], mirrored_pts, rtol=0, atol=1e-12 * size):
            return ()  # not the layout this function knows: no images
        image.flags.writeable = False
        kept = u >= -1e-12 * size
        kept.flags.writeable = False
        out.append((axis, image, kept))
    return tuple(out)
