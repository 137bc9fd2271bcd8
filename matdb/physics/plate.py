"""Floating-plate mode: a diamagnetic plate over a permanent-magnet arrangement.

Physics
-------
A weakly magnetisable body (``|chi| << 1``) in an applied field ``B`` has the induced
magnetisation ``M = chi B / mu0`` and the energy

    U = -(1 / (2 mu0)) * integral_V  B . chi B  dV  =  (1 / (2 mu0)) * integral_V w dV,

with, for a plate whose crystal c axis is along the unit vector ``e`` (vertical when the
plate is level),

    w = |chi_perp| (B . e)^2 + |chi_par| (|B|^2 - (B . e)^2)       [T^2]

(``chi_perp``: field along the c axis, ``chi_par``: field in the basal plane; an isotropic
material has ``chi_perp = chi_par``). Self-demagnetisation changes ``w`` by a relative
``O(|chi|)`` (< 5e-4 for graphite) and is neglected, as in [1]_ and [2]_.

**Surface integrals (divergence theorem).** Translating the body by ``d`` moves the region
``V`` through the fixed function ``w``, so ``dU/dd = (1/(2 mu0)) integral_V grad w dV =
(1/(2 mu0)) closed_integral_S w n dS`` and the force is

    F = -(1 / (2 mu0)) * closed_integral_S  w n dS.

For a plate with vertical sides, bottom face at height ``g`` and top at ``g + t``, the
vertical part is exactly ``F_z(g) = (1/(2 mu0)) integral_footprint [w(g) - w(g + t)] dA``
and the lateral part ``F_x = -(1/(2 mu0)) [integral_(+x side) w dS - integral_(-x side) w dS]``.
Rotating the body by a small angle about the axis ``a`` through the point ``C`` moves the
surface with velocity ``(a x (r - C))``, giving the torque about ``C``

    tau = -(1 / (2 mu0)) * closed_integral_S  w (r - C) x n dS
          + (1 / mu0) * integral_V (|chi_perp| - |chi_par|) (B . e) (B x e) dV,

where the second (volume) term is ``integral M x B dV``, the turning of the anisotropic
susceptibility tensor with the plate (zero for an isotropic plate). Only the torque needs
a volume integral, and only for anisotropic plates.

**Separation.** Every force, torque and stiffness is linear in ``(|chi_perp|, |chi_par|)``
and, for an arrangement of one remanence ``B_r``, proportional to ``B_r^2``. The functions
below therefore return their results split by component: index 0 is the part multiplying
``|chi_perp|`` (the ``(B . e)^2`` integrals), index 1 the part multiplying ``|chi_par|``.
With a field at unit polarisation ``B_1`` (``B = B_r B_1``),

    F(g) = (|chi_perp| (Iz(g) - Iz(g + t)) + |chi_par| (Ixy(g) - Ixy(g + t))) B_r^2 / (2 mu0)

where ``Iz(h) = integral_footprint B_z^2 dA`` and ``Ixy(h) = integral_footprint (B_x^2 +
B_y^2) dA`` at height ``h`` (:func:`plate_surface_integrals`). The same split holds for
forces and torques at any pose (:func:`generalized_forces_split`) and for the stiffness
matrix (:func:`stiffness_split`): computed once with the unit-polarisation field at a
given gap and centre-of-mass height, ``K = B_r^2 (|chi_perp| K[0] + |chi_par| K[1])``.
Only the equilibrium gap, which depends on the weight, has to be found per material.

**Quadrature.** Tensor Gauss-Legendre panels whose boundaries fall on the magnets' edge
lines (``x`` and ``y`` of every magnet edge), geometrically graded towards those lines
with a first panel as wide as the height of the surface above the magnets: the field of a
magnet edge varies on the scale of the distance to the edge, so the rule converges fast
and stays accurate as ``g -> 0``. Discs use ``x = x0 + R sin(phi)`` across the footprint
so the chord length is smooth. All heights and all nodes go to the field in one call
(chunked when large).

**Rigid-body stability.** Poses are parametrised by the displacement ``d`` of the combined
centre of mass ``C`` of plate and payload and a rotation vector about ``C``. Gravity then
contributes ``M g d_z`` only, linear, so the stiffness matrix ``K = -dQ/dq`` (generalised
forces ``Q = (F, tau_C)``) is the Hessian of the magnetic energy alone; it is computed by
central differences of ``Q``. The payload's height enters through ``C``: relative to the
plate's own centre the tilt stiffness gains ``-h M g`` (the familiar destabilising term of
a high centre of mass) and couplings with lateral motion. The plate is laterally stable
when ``k_x, k_y, k_pitch, k_roll > 0`` and the coupled 2x2 matrices in ``(x, pitch)`` and
``(y, roll)`` are positive definite (Earnshaw's theorem forbids this for a paramagnet or a
permanent magnet alone; Braunbek showed that diamagnets escape it [3]_).

Conventions: stiffness ``k = -dF/dq`` (positive restores); pitch is rotation about the
``y`` axis (couples with ``x``), roll about the ``x`` axis (couples with ``y``), yaw about
``z``. SI units throughout: metres, tesla, newtons, joules.

References
----------
.. [1] M. V. Berry and A. K. Geim, "Of flying frogs and levitrons", Eur. J. Phys. 18,
   307-313 (1997).
.. [2] M. D. Simon and A. K. Geim, "Diamagnetic levitation: flying frogs and floating
   magnets", J. Appl. Phys. 87, 6200-6204 (2000).
.. [3] W. Braunbek, "Freischwebende Koerper im elektrischen und magnetischen Feld",
   Z. Phys. 112, 753-763 (1939).
.. [4] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 5.16 (energy
   of a linear magnetisable body in an applied field; section number from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable, Sequence

import numpy as np
from scipy import optimize
from scipy.interpolate import CubicSpline
from scipy.spatial.transform import Rotation

from matdb.errors import InputError
from matdb.constants import G_STANDARD, MU0
from matdb.physics import quadrature as Q
from matdb.physics.quadrature import GRADING_RATIO, gauss_panels, graded_breaks  # noqa: F401  (public API)

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


def _z_rule(z_lo: float, z_hi: float, order: int) -> tuple[np.ndarray, np.ndarray]:
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
    z, wz = _z_rule(z_lo, z_hi, order)
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
    z, wz = _z_rule(gap, gap + plate.thickness, max(4, order // 2 + 1))
    pts = np.column_stack([np.repeat(x, z.size), np.repeat(y, z.size), np.tile(z, x.size)])
    return pts, np.outer(w, wz).ravel()


def _eval_field(field: FieldFn, points: np.ndarray) -> np.ndarray:
    out = np.empty_like(points)
    for i in range(0, points.shape[0], CHUNK):
        out[i:i + CHUNK] = field(points[i:i + CHUNK])
    return out


# ---------------------------------------------------------------------------
# vertical force
# ---------------------------------------------------------------------------
def plane_integrals(field: FieldFn, plate: PlateGeometry, heights, order: int = DEFAULT_ORDER,
                    rule_heights=None) -> tuple[np.ndarray, np.ndarray]:
    """Footprint integrals of ``B_z^2`` and ``B_x^2 + B_y^2`` on horizontal planes.

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]``.
    plate : PlateGeometry
    heights : array_like
        Heights of the planes above the magnets' top faces [m].
    order : int
        Gauss-Legendre nodes per panel.
    rule_heights : array_like, optional
        Heights the quadrature is graded for (default: ``heights``); giving the same rule
        to neighbouring heights makes finite differences smooth.

    Returns
    -------
    Iz, Ixy : ndarray
        ``integral B_z^2 dA`` and ``integral (B_x^2 + B_y^2) dA`` per height [T^2 m^2].

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997) (energy density
       ``-chi B^2 / (2 mu0)`` of a weak diamagnet).
    """
    h = np.atleast_1d(np.asarray(heights, dtype=float))
    rh = h if rule_heights is None else np.broadcast_to(np.asarray(rule_heights, float), h.shape)
    cache: dict[float, tuple] = {}
    pts, wts, idx = [], [], []
    for i, (hi, ri) in enumerate(zip(h, rh)):
        key = float(ri)
        if key not in cache:
            cache[key] = footprint_rule(plate, max(key, 1e-9), order)
        x, y, w = cache[key]
        pts.append(np.column_stack([x, y, np.full(x.size, hi)]))
        wts.append(w)
        idx.append(np.full(x.size, i))
    b = _eval_field(field, np.concatenate(pts))
    w = np.concatenate(wts)
    idx = np.concatenate(idx)
    iz = np.bincount(idx, weights=w * b[:, 2] ** 2, minlength=h.size)
    ixy = np.bincount(idx, weights=w * (b[:, 0] ** 2 + b[:, 1] ** 2), minlength=h.size)
    return iz, ixy


def plate_surface_integrals(field: FieldFn, plate: PlateGeometry, gaps,
                            order: int = DEFAULT_ORDER) -> tuple[np.ndarray, np.ndarray]:
    """Bottom- and top-face integrals of the plate for each gap, split by field component.

    Computed once per geometry at unit polarisation, they give the lift of any material
    and any remanence of a one-Br arrangement:

        F(g) = (|chi_perp| (Iz[:, 0] - Iz[:, 1]) + |chi_par| (Ixy[:, 0] - Ixy[:, 1]))
               * B_r^2 / (2 mu0)

    (:func:`lift_from_integrals`).

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]``, e.g. ``Arrangement.B``.
    plate : PlateGeometry
    gaps : array_like
        Heights of the plate's bottom face above the magnets' top faces [m].

    Returns
    -------
    Iz, Ixy : ndarray, shape (n_gaps, 2)
        Column 0 at the bottom face (height ``g``), column 1 at the top face
        (``g + t``) [T^2 m^2].

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    g = np.atleast_1d(np.asarray(gaps, dtype=float))
    if np.any(g < 0):
        raise InputError("gap: expected a gap of zero or more")
    iz, ixy = plane_integrals(field, plate, np.concatenate([g, g + plate.thickness]), order)
    n = g.size
    return np.column_stack([iz[:n], iz[n:]]), np.column_stack([ixy[:n], ixy[n:]])


def lift_from_integrals(iz: np.ndarray, ixy: np.ndarray, chi_perp_abs: float,
                        chi_par_abs: float, br_scale: float = 1.0) -> np.ndarray:
    """Vertical magnetic force [N] from :func:`plate_surface_integrals`.

    Parameters
    ----------
    iz, ixy : (n, 2) ndarray [T^2 m^2]
    chi_perp_abs, chi_par_abs : float
        Magnitudes of the SI volume susceptibilities (c axis vertical).
    br_scale : float
        Factor on the field (``B_r`` [T] when the integrals are at unit polarisation).

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    return (chi_perp_abs * (iz[:, 0] - iz[:, 1]) + chi_par_abs * (ixy[:, 0] - ixy[:, 1])) \
        * br_scale ** 2 / (2.0 * MU0)


def lift_force(field: FieldFn, plate: PlateGeometry, gaps, chi_perp_abs: float,
               chi_par_abs: float, order: int = DEFAULT_ORDER) -> np.ndarray:
    """Vertical magnetic force on the plate, positive upward [N], for each gap [m].

    ``F(g) = (1/(2 mu0)) integral_footprint [w(g) - w(g + t)] dA`` with
    ``w = |chi_perp| B_z^2 + |chi_par| (B_x^2 + B_y^2)``.

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    iz, ixy = plate_surface_integrals(field, plate, gaps, order)
    return lift_from_integrals(iz, ixy, chi_perp_abs, chi_par_abs)


def vertical_stiffness(field: FieldFn, plate: PlateGeometry, gap: float, chi_perp_abs: float,
                       chi_par_abs: float, order: int = DEFAULT_ORDER,
                       step: float | None = None) -> float:
    """``k_z = -dF/dg`` [N/m] by a central difference on one fixed quadrature rule.

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    h = step if step is not None else max(1e-7, 1e-3 * gap)
    t = plate.thickness
    hs = np.array([gap + h, gap - h, gap + h + t, gap - h + t])
    iz, ixy = plane_integrals(field, plate, hs, order, rule_heights=[gap, gap, gap + t, gap + t])
    f = lambda i, j: (chi_perp_abs * (iz[i] - iz[j]) + chi_par_abs * (ixy[i] - ixy[j])) / (2 * MU0)
    return -(f(0, 2) - f(1, 3)) / (2 * h)


# ---------------------------------------------------------------------------
# forces and torques at any small pose
# ---------------------------------------------------------------------------
def generalized_forces_split(field: FieldFn, plate: PlateGeometry, gap: float, pivot,
                             poses, order: int = DEFAULT_ORDER) -> np.ndarray:
    """Force and torque on the plate at several rigid poses, split by chi component.

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]``.
    plate : PlateGeometry
        The plate level with its bottom at ``gap`` [m] is the reference pose.
    pivot : array_like (3,)
        Point ``C`` the rotations turn about and torques are taken about [m].
    poses : array_like (P, 6)
        ``(dx, dy, dz, rx, ry, rz)``: displacement of the pivot [m] and rotation vector
        about it [rad]; the pose maps ``r -> C + d + R (r - C)``.

    Returns
    -------
    Q : ndarray (P, 2, 6)
        ``(F_x, F_y, F_z, tau_x, tau_y, tau_z)`` about the displaced pivot [N, N m]; index
        1 = 0 multiplies ``|chi_perp|``, 1 multiplies ``|chi_par|``.

    Notes
    -----
    ``F = -(1/(2 mu0)) closed_integral w n dS``; ``tau = -(1/(2 mu0)) closed_integral
    w (r - C) x n dS + (1/mu0) integral (|chi_perp| - |chi_par|) (B.e)(B x e) dV`` with
    ``e`` the plate's c axis (module docstring).

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.16.
    .. [2] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    poses = np.atleast_2d(np.asarray(poses, dtype=float))
    pivot = np.asarray(pivot, dtype=float)
    sp, sn, sw = surface_rule(plate, gap, order)
    vp, vw = volume_rule(plate, gap, order)
    rot = Rotation.from_rotvec(poses[:, 3:]).as_matrix()  # (P, 3, 3)
    centre = pivot[None, :] + poses[:, :3]  # displaced pivot (P, 3)
    # transformed points (P, m, 3)
    sp_t = centre[:, None, :] + np.einsum("pij,mj->pmi", rot, sp - pivot)
    sn_t = np.einsum("pij,mj->pmi", rot, sn)
    vp_t = centre[:, None, :] + np.einsum("pij,mj->pmi", rot, vp - pivot)
    axis = rot[:, :, 2]  # c axis e = R e_z, (P, 3)
    n_pose, ms, mv = poses.shape[0], sp.shape[0], vp.shape[0]
    b = _eval_field(field, np.concatenate([sp_t.reshape(-1, 3), vp_t.reshape(-1, 3)]))
    bs = b[: n_pose * ms].reshape(n_pose, ms, 3)
    bv = b[n_pose * ms:].reshape(n_pose, mv, 3)
    be_s = np.einsum("pmi,pi->pm", bs, axis)
    w_perp = be_s ** 2
    w_par = np.einsum("pmi,pmi->pm", bs, bs) - w_perp
    lever = np.cross(sp_t - centre[:, None, :], sn_t)  # (P, m, 3)
    out = np.empty((n_pose, 2, 6))
    for k, wk in enumerate((w_perp, w_par)):
        ww = wk * sw[None, :] * (-1.0 / (2.0 * MU0))
        out[:, k, :3] = np.einsum("pm,pmi->pi", ww, sn_t)
        out[:, k, 3:] = np.einsum("pm,pmi->pi", ww, lever)
    be_v = np.einsum("pmi,pi->pm", bv, axis)
    bxe = np.cross(bv, axis[:, None, :])
    intrinsic = np.einsum("pm,pmi->pi", be_v * vw[None, :], bxe) / MU0
    out[:, 0, 3:] += intrinsic
    out[:, 1, 3:] -= intrinsic
    return out


def stored_energy_split(field: FieldFn, plate: PlateGeometry, gap: float, pivot, poses,
                        order: int = DEFAULT_ORDER) -> np.ndarray:
    """Magnetic energy ``U = (1/(2 mu0)) integral_V w dV`` at each pose, split (P, 2) [J].

    A volume quadrature, independent of the surface integrals; used to check them.

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.16.
    """
    poses = np.atleast_2d(np.asarray(poses, dtype=float))
    pivot = np.asarray(pivot, dtype=float)
    vp, vw = volume_rule(plate, gap, order)
    rot = Rotation.from_rotvec(poses[:, 3:]).as_matrix()
    centre = pivot[None, :] + poses[:, :3]
    vp_t = centre[:, None, :] + np.einsum("pij,mj->pmi", rot, vp - pivot)
    b = _eval_field(field, vp_t.reshape(-1, 3)).reshape(vp_t.shape)
    be = np.einsum("pmi,pi->pm", b, rot[:, :, 2])
    wz = be ** 2
    wxy = np.einsum("pmi,pmi->pm", b, b) - wz
    return np.stack([wz @ vw, wxy @ vw], axis=1) / (2.0 * MU0)


DOF = ("x", "y", "z", "roll", "pitch", "yaw")


def stiffness_split(field: FieldFn, plate: PlateGeometry, gap: float, pivot,
                    order: int = DEFAULT_ORDER, step_m: float | None = None,
                    step_rad: float = 2e-4, dofs: Sequence[int] = (0, 1, 2, 3, 4, 5)
                    ) -> np.ndarray:
    """Stiffness matrices ``K = -dQ/dq`` about ``pivot``, split by chi component.

    Coordinates ``q = (x, y, z, roll, pitch, yaw)`` (:data:`DOF`): displacement of the
    pivot [m] and rotation about the x (roll), y (pitch) and z (yaw) axes through it
    [rad]; ``dofs`` selects which (indices into :data:`DOF`). Central differences of
    :func:`generalized_forces_split`; symmetrised.

    Returns
    -------
    K : ndarray (2, n, n)
        For the selected coordinates; ``K[0]`` multiplies ``|chi_perp|``, ``K[1]``
        ``|chi_par|`` [N/m, N/rad, N m/rad].

    References
    ----------
    .. [1] H. Goldstein, Classical Mechanics, 3rd ed. (2002), ch. 6 (small oscillations:
       stable when the stiffness matrix is positive definite).
    """
    dofs = [int(d) for d in dofs]
    hs = step_m if step_m is not None else max(1e-7, 5e-4 * min(plate.lx, plate.ly, 10 * gap))
    steps = np.array([hs] * 3 + [step_rad] * 3)[dofs]
    poses = np.zeros((2 * len(dofs), 6))
    for j, d in enumerate(dofs):
        poses[2 * j, d] = steps[j]
        poses[2 * j + 1, d] = -steps[j]
    q = generalized_forces_split(field, plate, gap, pivot, poses, order)[:, :, dofs]
    k = -(q[0::2] - q[1::2]) / (2.0 * steps[:, None, None])  # (j, comp, i)
    k = np.transpose(k, (1, 2, 0))  # (comp, i, j)
    return 0.5 * (k + np.transpose(k, (0, 2, 1)))


def combine(split: np.ndarray, chi_perp_abs: float, chi_par_abs: float) -> np.ndarray:
    """``|chi_perp| split[0] + |chi_par| split[1]``.

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.16: the energy
       of a weakly magnetisable body is linear in its susceptibility tensor.
    """
    return chi_perp_abs * split[0] + chi_par_abs * split[1]


# ---------------------------------------------------------------------------
# analysis
# ---------------------------------------------------------------------------
def combined_com_height(plate: PlateGeometry, gap: float, plate_mass: float,
                        payload_kg: float, payload_height: float) -> float:
    """Height of the centre of mass of plate plus payload [m].

    The payload's centre of mass sits ``payload_height`` above the plate's top face.

    References
    ----------
    .. [1] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed., Addison-Wesley
       (2002), sec. 5.1 (centre of mass) and ch. 6 (small oscillations).
    """
    zp = gap + plate.thickness / 2
    zl = gap + plate.thickness + payload_height
    m = plate_mass + payload_kg
    return (plate_mass * zp + payload_kg * zl) / m if m > 0 else zp


@dataclass(frozen=True)
class Stability:
    """Stiffness at equilibrium about the combined centre of mass (SI).

    ``k`` is the stiffness matrix over the coordinates ``dofs`` (names in :data:`DOF`);
    ``k_z_matrix`` and ``k_yaw`` are None when those coordinates were not perturbed.
    """

    k: np.ndarray
    dofs: tuple[str, ...]
    k_x: float
    k_y: float
    k_pitch: float
    k_roll: float
    k_yaw: float | None
    k_z_matrix: float | None
    xp_definite: bool  # (x, pitch) block positive definite
    yr_definite: bool  # (y, roll) block positive definite
    laterally_stable: bool


def _pos_def(m: np.ndarray) -> bool:
    return bool(np.all(np.linalg.eigvalsh(0.5 * (m + m.T)) > 0))


def stability(field: FieldFn, plate: PlateGeometry, gap: float, chi_perp_abs: float,
              chi_par_abs: float, plate_mass: float, payload_kg: float = 0.0,
              payload_height: float = 0.0, order: int = DEFAULT_ORDER,
              full: bool = True) -> Stability:
    """Rigid-body stiffness of the floating plate about the combined centre of mass.

    Laterally stable when ``k_x, k_y, k_pitch, k_roll > 0`` and the coupled matrices in
    ``(x, pitch)`` and ``(y, roll)`` are positive definite. ``full`` also perturbs z and
    yaw (reported, not part of the verdict: a disc is neutral in yaw).

    References
    ----------
    .. [1] H. Goldstein, Classical Mechanics, 3rd ed. (2002), ch. 6.
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    zc = combined_com_height(plate, gap, plate_mass, payload_kg, payload_height)
    dofs = (0, 1, 2, 3, 4, 5) if full else (0, 1, 3, 4)
    ks = stiffness_split(field, plate, gap, (plate.cx, plate.cy, zc), order, dofs=dofs)
    k = combine(ks, chi_perp_abs, chi_par_abs)
    pos = {d: i for i, d in enumerate(dofs)}
    ix, iy, iroll, ipitch = pos[0], pos[1], pos[3], pos[4]
    xp = k[np.ix_([ix, ipitch], [ix, ipitch])]
    yr = k[np.ix_([iy, iroll], [iy, iroll])]
    diag = [k[ix, ix], k[iy, iy], k[ipitch, ipitch], k[iroll, iroll]]
    xp_ok, yr_ok = _pos_def(xp), _pos_def(yr)
    return Stability(k=k, dofs=tuple(DOF[d] for d in dofs), k_x=float(k[ix, ix]),
                     k_y=float(k[iy, iy]), k_pitch=float(k[ipitch, ipitch]),
                     k_roll=float(k[iroll, iroll]),
                     k_yaw=float(k[pos[5], pos[5]]) if 5 in pos else None,
                     k_z_matrix=float(k[pos[2], pos[2]]) if 2 in pos else None,
                     xp_definite=xp_ok, yr_definite=yr_ok,
                     laterally_stable=bool(all(d > 0 for d in diag) and xp_ok and yr_ok))


def highest_stable_root(gaps: np.ndarray, forces: np.ndarray, weight: float,
                        force_at: Callable[[float], float], xtol: float = 1e-9) -> float | None:
    """Highest gap where ``F(g) = W`` with ``dF/dg < 0`` (brentq on the bracketing pair).

    Parameters
    ----------
    gaps, forces : ndarray
        A sampled lift curve, gaps increasing [m], [N].
    weight : float
        [N]
    force_at : callable
        ``F(g)`` for the refinement.

    Returns
    -------
    float or None
        The equilibrium gap [m], or None when the curve never falls through ``W``.

    References
    ----------
    .. [1] R. P. Brent, Algorithms for Minimization without Derivatives, Prentice-Hall
       (1973) (the root finder behind scipy.optimize.brentq and the bounded minimiser).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000) (stable float: the
       lift falls with height at the equilibrium).
    """
    above = forces >= weight
    idx = np.nonzero(above[:-1] & ~above[1:])[0]
    if idx.size == 0:
        return None
    i = int(idx[-1])
    a, b = float(gaps[i]), float(gaps[i + 1])
    fa, fb = forces[i] - weight, forces[i + 1] - weight
    if fa == 0:
        return a
    return float(optimize.brentq(lambda g: force_at(g) - weight, a, b, xtol=xtol, rtol=1e-12)) \
        if fb < 0 else b


def max_lift_above(gaps: np.ndarray, forces: np.ndarray, g_req: float,
                   force_at: Callable[[float], float]) -> tuple[float, float]:
    """Largest magnetic lift available at or above the required gap.

    A load ``W`` floats at a gap >= ``g_req`` when ``W <= max_{g >= g_req} F(g)`` (if the
    curve rises then falls, the equilibrium sits above the peak).

    Returns
    -------
    (force [N], gap where it is reached [m])

    References
    ----------
    .. [1] R. P. Brent, Algorithms for Minimization without Derivatives, Prentice-Hall
       (1973) (the root finder behind scipy.optimize.brentq and the bounded minimiser).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000) (stable float: the
       lift falls with height at the equilibrium).
    """
    f_req = float(force_at(g_req))
    sel = gaps > g_req
    best_f, best_g = f_req, g_req
    if np.any(sel):
        gs, fs = gaps[sel], forces[sel]
        j = int(np.argmax(fs))
        if fs[j] > best_f:
            lo = gs[j - 1] if j > 0 else g_req
            hi = gs[j + 1] if j + 1 < gs.size else gs[j]
            res = optimize.minimize_scalar(lambda g: -force_at(g), bounds=(lo, hi),
                                           method="bounded", options={"xatol": 1e-8})
            cand = [(float(fs[j]), float(gs[j])), (float(-res.fun), float(res.x))]
            best_f, best_g = max(cand + [(best_f, best_g)])
    return best_f, best_g


@dataclass(frozen=True)
class PlateResult:
    """Outcome of :func:`analyse_plate` (SI)."""

    gaps: np.ndarray
    forces: np.ndarray
    weight: float
    gap: float | None
    k_z: float | None
    f_z: float | None
    stability: Stability | None
    max_lift: float
    max_lift_gap: float
    plate_mass: float

    @property
    def floats(self) -> bool:
        return self.gap is not None


def _force_fn(field, plate, chi_perp_abs, chi_par_abs, order):
    def f(g: float) -> float:
        return float(lift_force(field, plate, [g], chi_perp_abs, chi_par_abs, order)[0])
    return f


def lift_curve_range(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                     chi_par_abs: float, weight: float, g_start: float, g_end: float = 3e-3,
                     order: int = DEFAULT_ORDER, g_cap: float = 0.2) -> float:
    """Upper end of the lift curve: ``g_end``, or doubled until ``F < W`` (at most ``g_cap``).

    References
    ----------
    .. [1] R. P. Brent, Algorithms for Minimization without Derivatives, Prentice-Hall
       (1973) (the root finder behind scipy.optimize.brentq and the bounded minimiser).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000) (stable float: the
       lift falls with height at the equilibrium).
    """
    f = _force_fn(field, plate, chi_perp_abs, chi_par_abs, order)
    g = max(g_end, g_start + 1e-3)
    while f(g) >= weight and g < g_cap:
        g *= 2.0
    return g


def analyse_plate(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                  chi_par_abs: float, density: float, payload_kg: float = 0.0,
                  payload_height: float = 0.0, g_start: float = MIN_GAP,
                  g_req: float | None = None, n_gaps: int = 60,
                  order: int = DEFAULT_ORDER, with_stability: bool = True,
                  g_end: float = 3e-3) -> PlateResult:
    """Lift curve, equilibrium, vertical frequency, stability and lift at a required gap.

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]``.
    plate : PlateGeometry
    chi_perp_abs, chi_par_abs : float
        ``|chi|`` for field along / across the c axis (SI volume).
    density : float
        Plate density [kg/m^3].
    payload_kg, payload_height : float
        Payload mass [kg] and its centre-of-mass height above the plate top [m].
    g_start : float
        Lowest gap of the curve [m] (the cover thickness + 0.05 mm).
    g_req : float, optional
        Required gap for :attr:`PlateResult.max_lift` [m] (default ``g_start``).
    n_gaps : int
        Points of the lift curve (equally spaced from ``g_start`` to 3 mm, or beyond
        the equilibrium).

    Returns
    -------
    PlateResult

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    .. [2] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    mass = density * plate.volume
    weight = (mass + payload_kg) * G_STANDARD
    f = _force_fn(field, plate, chi_perp_abs, chi_par_abs, order)
    top = lift_curve_range(field, plate, chi_perp_abs, chi_par_abs, weight, g_start, g_end, order)
    gaps = np.linspace(g_start, top, n_gaps)
    forces = lift_force(field, plate, gaps, chi_perp_abs, chi_par_abs, order)
    if forces[-1] >= weight:
        gap = None  # still lifting at the cap: treat as not found
    else:
        gap = highest_stable_root(gaps, forces, weight, f)
    if gap is not None and gap > 0.8 * top:  # keep the curve beyond the equilibrium
        gaps = np.linspace(g_start, 1.25 * gap, n_gaps)
        forces = lift_force(field, plate, gaps, chi_perp_abs, chi_par_abs, order)
    req = g_start if g_req is None else max(g_req, g_start)
    max_f, max_g = max_lift_above(gaps, forces, req, f)
    k_z = f_z = None
    stab = None
    if gap is not None:
        k_z = vertical_stiffness(field, plate, gap, chi_perp_abs, chi_par_abs, order)
        m_tot = mass + payload_kg
        f_z = math.sqrt(k_z / m_tot) / (2 * math.pi) if k_z > 0 else 0.0
        if with_stability:
            stab = stability(field, plate, gap, chi_perp_abs, chi_par_abs, mass,
                             payload_kg, payload_height, order)
    return PlateResult(gaps=gaps, forces=forces, weight=weight, gap=gap, k_z=k_z, f_z=f_z,
                       stability=stab, max_lift=max_f, max_lift_gap=max_g, plate_mass=mass)


def equilibrium_gap(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                    chi_par_abs: float, weight: float, g_start: float = MIN_GAP,
                    order: int = DEFAULT_ORDER, n_gaps: int = 12, xtol: float | None = 1e-8
                    ) -> float | None:
    """Equilibrium gap from a short geometric lift curve [m] (None: it does not float).

    With ``xtol`` the bracketing pair is refined by brentq on the quadrature itself;
    with ``xtol=None`` the root is taken on a cubic spline through ``log F`` (cheaper;
    good to about 1e-4 relative for the smooth, nearly exponential lift, enough for the
    stiffness scans).

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    top = lift_curve_range(field, plate, chi_perp_abs, chi_par_abs, weight, g_start, 3e-3, order)
    gaps = np.geomspace(g_start, top, n_gaps)
    forces = lift_force(field, plate, gaps, chi_perp_abs, chi_par_abs, order)
    if forces[-1] >= weight:
        return None
    if xtol is not None:
        f = _force_fn(field, plate, chi_perp_abs, chi_par_abs, order)
        return highest_stable_root(gaps, forces, weight, f, xtol=xtol)
    if np.all(forces > 0) and weight > 0:
        spl = CubicSpline(gaps, np.log(forces))
        target = math.log(weight)
    else:
        spl = CubicSpline(gaps, forces)
        target = weight
    return highest_stable_root(gaps, forces, weight, lambda g: float(spl(g)) - target + weight,
                               xtol=1e-10)


def is_stable_floating(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                       chi_par_abs: float, density: float, payload_kg: float = 0.0,
                       payload_height: float = 0.0, g_start: float = MIN_GAP,
                       order: int = 4) -> bool:
    """True when the plate floats and is laterally stable (a cheaper rule, for scans).

    References
    ----------
    .. [1] R. P. Brent, Algorithms for Minimization without Derivatives, Prentice-Hall
       (1973) (the root finder behind scipy.optimize.brentq and the bounded minimiser).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000) (stable float: the
       lift falls with height at the equilibrium).
    """
    mass = density * plate.volume
    weight = (mass + payload_kg) * G_STANDARD
    gap = equilibrium_gap(field, plate, chi_perp_abs, chi_par_abs, weight, g_start, order,
                          xtol=None)
    if gap is None:
        return False
    st = stability(field, plate, gap, chi_perp_abs, chi_par_abs, mass, payload_kg,
                   payload_height, order, full=False)
    return st.laterally_stable


def stable_side_max(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                    chi_par_abs: float, density: float, extent: float,
                    payload_kg: float = 0.0, payload_height: float = 0.0,
                    g_start: float = MIN_GAP, tol: float = 1e-4, n_scan: int = 8,
                    order: int = 4) -> float | None:
    """Largest side of a square plate that floats stably over the arrangement [m].

    Scans sides ``1.2 extent * k / n_scan`` upward (``extent``: the larger horizontal
    size of the arrangement) and stops at the first unstable side after a stable one,
    then bisects between the two to ``tol`` (people cut plates down from the smallest
    that works). If the largest scanned side is still stable, it is returned.

    Returns
    -------
    float or None
        None when the plate is not square or no scanned side is stable [m].

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    if not plate.is_square:
        return None
    sides = np.linspace(1.2 * extent / n_scan, 1.2 * extent, n_scan)

    def ok(side: float) -> bool:
        return is_stable_floating(field, plate.with_side(float(side)), chi_perp_abs,
                                  chi_par_abs, density, payload_kg, payload_height, g_start,
                                  order)

    last_ok = None
    for side in sides:
        if ok(side):
            last_ok = float(side)
        elif last_ok is not None:
            lo, hi = last_ok, float(side)
            while hi - lo > tol:
                mid = 0.5 * (lo + hi)
                if ok(mid):
                    lo = mid
                else:
                    hi = mid
            return lo
    return last_ok


# ---------------------------------------------------------------------------
# lateral equilibrium and stability over plate size
# ---------------------------------------------------------------------------
SETTLE_TOL = 1e-3  # a sideways force below this fraction of the weight counts as zero


def lateral_force(field: FieldFn, plate: PlateGeometry, gap: float, chi_perp_abs: float,
                  chi_par_abs: float, order: int = DEFAULT_ORDER) -> np.ndarray:
    """Net sideways magnetic force on the level plate, ``(F_x, F_y)`` [N].

    Only the vertical side faces contribute (the normals of the top and bottom faces are
    vertical): ``F_h = -(1/(2 mu0)) integral_sides w n dS`` with
    ``w = |chi_perp| B_z^2 + |chi_par| (B_x^2 + B_y^2)`` (module docstring).

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]``.
    plate : PlateGeometry
        Level plate, centre ``(cx, cy)`` [m].
    gap : float
        Height of the bottom face above the magnets' top faces [m].
    chi_perp_abs, chi_par_abs : float
        ``|chi|`` along / across the c axis (vertical) [1].

    Returns
    -------
    ndarray (2,)
        ``(F_x, F_y)`` [N].

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    .. [2] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.16.
    """
    pts, nrm, w = side_rule(plate, gap, gap + plate.thickness, order)
    b = _eval_field(field, pts)
    bz2 = b[:, 2] ** 2
    wd = chi_perp_abs * bz2 + chi_par_abs * (b[:, 0] ** 2 + b[:, 1] ** 2)
    return -(wd * w) @ nrm[:, :2] / (2.0 * MU0)


@dataclass(frozen=True)
class LateralEquilibrium:
    """Where a plate placed at ``start`` comes to rest sideways (SI).

    ``found`` is False when no point with a net sideways force below
    :data:`SETTLE_TOL` times the weight was found within ``max_shift`` of the start (or
    the plate does not float there); ``cx``, ``cy``, ``gap`` are then None.
    """

    found: bool
    cx: float | None
    cy: float | None
    gap: float | None
    start: tuple[float, float]
    force_at_start_n: float | None  # |F_h| where the plate was placed [N]
    weight_n: float

    @property
    def shift_m(self) -> float | None:
        """Distance from the start to the equilibrium [m]."""
        if not self.found:
            return None
        return math.hypot(self.cx - self.start[0], self.cy - self.start[1])


def lateral_equilibrium(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                        chi_par_abs: float, density: float, payload_kg: float = 0.0,
                        g_start: float = MIN_GAP, order: int = 4,
                        max_shift: float | None = None) -> LateralEquilibrium:
    """Lateral equilibrium of the floating plate nearest its given centre.

    At each trial centre the plate floats at its equilibrium gap there
    (:func:`equilibrium_gap`), and the net sideways force :func:`lateral_force` is
    driven to zero by Powell's hybrid method (``scipy.optimize.root``) started at the
    given centre. A centre where ``|F_h| <= SETTLE_TOL * W`` is accepted at once (a
    symmetric placement).

    Parameters
    ----------
    max_shift : float, optional
        Largest accepted distance from the given centre [m] (default: a quarter of the
        plate's larger side).

    Returns
    -------
    LateralEquilibrium

    References
    ----------
    .. [1] M. J. D. Powell, "A hybrid method for nonlinear equations", in Numerical
       Methods for Nonlinear Algebraic Equations, P. Rabinowitz (ed.), Gordon and Breach
       (1970) (MINPACK hybrd, behind scipy.optimize.root).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    mass = density * plate.volume
    weight = (mass + payload_kg) * G_STANDARD
    start = (plate.cx, plate.cy)
    scale = max(plate.lx, plate.ly)
    limit = 0.25 * scale if max_shift is None else float(max_shift)

    def force_at(c: np.ndarray) -> tuple[np.ndarray, float | None]:
        pl = replace(plate, cx=float(c[0]), cy=float(c[1]))
        g = equilibrium_gap(field, pl, chi_perp_abs, chi_par_abs, weight, g_start, order,
                            xtol=None)
        if g is None:
            return np.full(2, np.nan), None
        return lateral_force(field, pl, g, chi_perp_abs, chi_par_abs, order), g

    c0 = np.array(start, dtype=float)
    f0, g0 = force_at(c0)
    none = LateralEquilibrium(False, None, None, None, start, None, weight)
    if g0 is None:
        return none
    fmag0 = float(np.hypot(*f0))
    if fmag0 <= SETTLE_TOL * weight:
        return LateralEquilibrium(True, start[0], start[1], g0, start, fmag0, weight)

    # the gap changes little with the lateral position: solve the root at a fixed gap,
    # re-solve the gap there, and repeat until the gap settles
    c, g = c0.copy(), g0
    f = f0
    for _ in range(4):
        def fun(u: np.ndarray, g=g) -> np.ndarray:
            pl = replace(plate, cx=float(c0[0] + u[0] * scale), cy=float(c0[1] + u[1] * scale))
            return lateral_force(field, pl, g, chi_perp_abs, chi_par_abs, order) / weight

        sol = optimize.root(fun, (c - c0) / scale, method="hybr",
                            options={"xtol": 1e-7, "eps": 1e-4})
        c = c0 + sol.x * scale
        if float(np.hypot(*(c - c0))) > limit:
            break
        g_old = g
        f, g = force_at(c)
        if g is None or abs(g - g_old) <= 1e-3 * g_old:
            break
    ok = (g is not None and np.all(np.isfinite(f)) and float(np.hypot(*f)) <= SETTLE_TOL * weight
          and float(np.hypot(*(c - c0))) <= limit)
    if not ok:
        return LateralEquilibrium(False, None, None, None, start, fmag0, weight)
    return LateralEquilibrium(True, float(c[0]), float(c[1]), g, start, fmag0, weight)


@dataclass(frozen=True)
class EquilibriumStability:
    """A plate judged where it comes to rest: its equilibrium and the stiffness there."""

    equilibrium: LateralEquilibrium
    stability: Stability | None

    @property
    def stable(self) -> bool:
        return bool(self.equilibrium.found and self.stability is not None
                    and self.stability.laterally_stable)


def stability_at_equilibrium(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                             chi_par_abs: float, density: float, payload_kg: float = 0.0,
                             payload_height: float = 0.0, g_start: float = MIN_GAP,
                             order: int = 4, max_shift: float | None = None,
                             full: bool = False) -> EquilibriumStability:
    """Find the lateral equilibrium near the plate's centre and judge stability there.

    Not stable when there is no lateral equilibrium near the centre
    (:func:`lateral_equilibrium`); otherwise the verdict of :func:`stability` at the
    equilibrium centre and gap.

    References
    ----------
    .. [1] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed. (2002), ch. 6
       (a rest point is stable when the stiffness matrix there is positive definite).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    eq = lateral_equilibrium(field, plate, chi_perp_abs, chi_par_abs, density, payload_kg,
                             g_start, order, max_shift)
    if not eq.found:
        return EquilibriumStability(eq, None)
    pl = replace(plate, cx=eq.cx, cy=eq.cy)
    st = stability(field, pl, eq.gap, chi_perp_abs, chi_par_abs, density * plate.volume,
                   payload_kg, payload_height, order, full=full)
    return EquilibriumStability(eq, st)


def stable_side_intervals(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                          chi_par_abs: float, density: float, extent: float,
                          payload_kg: float = 0.0, payload_height: float = 0.0,
                          g_start: float = MIN_GAP, tol: float = 1e-4, n_scan: int = 12,
                          order: int = 4, known: dict[float, bool] | None = None
                          ) -> list[list[float]]:
    """Intervals of square plate sides that float stably at their lateral equilibrium.

    Stability is not monotone in the side: a chip much smaller than the magnets can sit
    over an unstable point of the field, and a plate much wider than the arrangement
    slides or tips off. Sides ``s_k = s_max k / n_scan`` (``s_max = 1.2 extent``, and at
    least 1.1 times the plate's own side), and ``s_1 / 4`` and ``s_1 / 2``, are each judged by
    :func:`stability_at_equilibrium` (the plate centred where the design puts it, moved
    to the nearest lateral equilibrium within a quarter of the plate's own side); the
    plate's own side is always one of the
    scanned sides. Each change of verdict between neighbouring sides is bisected to
    ``tol``. An interval ending at the last scanned side is open above (it ends there
    only because the scan does).

    Parameters
    ----------
    extent : float
        Larger horizontal size of the magnet arrangement [m].
    known : dict, optional
        Verdicts already established for some sides (``{side: stable}``), used instead of
        recomputing them (e.g. the plate's own side from a finer analysis).

    Returns
    -------
    list of [low, high]
        Sorted, disjoint [m]; empty when no scanned side is stable or the plate is not
        square.

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    .. [2] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed. (2002), ch. 6.
    """
    if not plate.is_square:
        return []
    own = float(plate.lx)
    top = max(1.2 * extent, 1.1 * own)
    sides = set(float(s) for s in np.linspace(top / n_scan, top, n_scan))
    sides.update((top / n_scan / 4, top / n_scan / 2))  # small chips too
    sides.add(own)
    memo: dict[float, bool] = dict(known or {})
    shift = 0.25 * max(plate.lx, plate.ly)  # "near the centre": a quarter of the plate's side

    def ok(side: float) -> bool:
        if side not in memo:
            memo[side] = stability_at_equilibrium(
                field, plate.with_side(side), chi_perp_abs, chi_par_abs, density, payload_kg,
                payload_height, g_start, order, max_shift=shift).stable
        return memo[side]

    grid = sorted(sides)
    verdict = [ok(s) for s in grid]

    def edge(lo: float, hi: float, lo_ok: bool) -> float:
        # bisect between a stable and an unstable side; returns the last stable side
        a, b = lo, hi
        while b - a > tol:
            mid = 0.5 * (a + b)
            if ok(mid) == lo_ok:
                a = mid
            else:
                b = mid
        return a if lo_ok else b

    out: list[list[float]] = []
    i = 0
    while i < len(grid):
        if not verdict[i]:
            i += 1
            continue
        j = i
        while j + 1 < len(grid) and verdict[j + 1]:
            j += 1
        low = grid[i] if i == 0 else edge(grid[i - 1], grid[i], False)
        high = grid[j] if j == len(grid) - 1 else edge(grid[j], grid[j + 1], True)
        out.append([float(low), float(high)])
        i = j + 1
    return out


def interval_holding(intervals: Sequence[Sequence[float]], side: float,
                     rel_tol: float = 1e-9) -> list[float] | None:
    """The interval of ``intervals`` that contains ``side`` (None when none does).

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    for lo, hi in intervals:
        if lo * (1 - rel_tol) <= side <= hi * (1 + rel_tol):
            return [float(lo), float(hi)]
    return None
