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
    """

    shape: str
    lx: float
    ly: float
    thickness: float
    cx: float = 0.0
    cy: float = 0.0
    breaks_x: tuple[float, ...] = ()
    breaks_y: tuple[float, ...] = ()

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


# ---------------------------------------------------------------------------
# quadrature rules (matdb.physics.quadrature)
# ---------------------------------------------------------------------------
def footprint_rule(plate: PlateGeometry, scale: float, order: int = DEFAULT_ORDER
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Quadrature over the footprint, graded for a plane at distance ``scale`` from the
    magnets' edges.

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


def eval_field(field: FieldFn, points: np.ndarray) -> np.ndarray:
    out = np.empty_like(points)
    for i in range(0, points.shape[0], CHUNK):
        out[i:i + CHUNK] = field(points[i:i + CHUNK])
    return out
