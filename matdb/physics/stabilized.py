"""Floating-magnet ("stabilized") mode: a floater magnet under a lifter, held stable by
two diamagnetic plates.

A small floater magnet hangs a little below a larger lifter magnet; both are magnetised
along +z on a common vertical axis. The lifter's pull balances the weight at one lifter
distance, but the balance is unstable vertically (Earnshaw): closer, the pull grows.
Two diamagnetic plates, one above and one below the floater, repel it from both sides
and, when close enough, make the vertical stiffness positive (diamagnetically
stabilised levitation, Simon, Heflinger and Geim [1]_; Simon and Geim [2]_).

Geometry and signs
------------------
The floater's centre is at the origin; the lifter's near (lower) face at height
``D`` (the *lifter distance*). Each plate's facing surface lies at ``a`` above and below
the floater's centre (the *plate distance*); the plates have thickness ``t`` and extend
laterally well beyond the floater (modelled as infinite slabs, c axis vertical).
Stiffness ``k = -dF/dq`` (positive restores); torsional stiffness ``kappa = d^2U/dtheta^2``.

Models
------
* Lifter on floater: the floater as a uniformly magnetised rigid body in the lifter's
  closed-form field (:mod:`matdb.physics.fields`). Force from the equivalent magnetic
  surface charges of its pole faces, energy ``-\\int M.B dV`` for torques and tilt.
* Plates, image-dipole model: the floater as a point dipole ``m = J V / mu0`` with an
  image of strength ``chi/2`` in each plate.
* Plates, finite-size model (used for the verdict): the floater's real field over the
  plates' volume, ``U = 1/(2 mu0) \\int (|chi_perp| B_z^2 + |chi_par| B_h^2) dV``,
  reduced to plane integrals over the plates' faces. It tends to the dipole model far
  away.

Both models keep the energy to first order in chi; the plates' interaction with the
lifter's field (a correction of relative order |chi| to the lifter's own force and
stiffness) is omitted.

References
----------
.. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, "Diamagnetically stabilized magnet
   levitation", Am. J. Phys. 69, 702-713 (2001).
.. [2] M. D. Simon and A. K. Geim, "Diamagnetic levitation: Flying frogs and floating
   magnets", J. Appl. Phys. 87, 6200-6204 (2000).
.. [3] J. D. Jackson, "Classical Electrodynamics", 3rd ed., Wiley (1999): eq. (5.56)
   (dipole field), sec. 5.12 (force and energy of a magnetisation in an external field),
   sec. 4.4 (image charges at a plane boundary between two linear media).
.. [4] L. D. Landau and E. M. Lifshitz, "Electrodynamics of Continuous Media", 2nd ed.,
   Pergamon (1984), sec. 32 (energy of a weakly magnetic body, ``-chi B^2/(2 mu0)``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from functools import lru_cache
from typing import Optional

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.optimize import brentq

from matdb.errors import InputError, PhysicsError
from matdb.constants import G_STANDARD, MU0, T_REF_K
from matdb.physics.fields import MagnetSet

__all__ = [
    "Body",
    "effective_chi",
    "dipole_plate_force",
    "dipole_plates_stiffness",
    "dipole_plates_tilt_stiffness",
    "lifter_force",
    "lifter_stiffness",
    "lifter_energy",
    "lifter_hessian",
    "FinitePlates",
    "StationModel",
    "weight_shares",
    "levitate_stabilized",
    "format_table",
]

_C = MU0 / (4.0 * math.pi)  # mu0 / 4 pi [T m / A]


# ---------------------------------------------------------------------------
# bodies
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Body:
    """A uniformly magnetised magnet, polarised along +z, axis vertical.

    Parameters
    ----------
    shape : str
        ``"cuboid"`` (size ``(x, y, height)``), ``"cylinder"`` (``(diameter, height)``)
        or ``"ring"`` (``(outer diameter, inner diameter, height)``) [m].
    size : tuple of float
        See ``shape`` [m].
    j_t : float
        Polarisation ``J = mu0 M`` along +z (``Br`` for a permanent magnet) [T].
    centre : tuple of float
        Centre [m].
    """

    shape: str
    size: tuple
    j_t: float
    centre: tuple = (0.0, 0.0, 0.0)

    def __post_init__(self):
        if self.shape not in ("cuboid", "cylinder", "ring"):
            raise InputError(f"shape: expected cuboid, cylinder or ring, got {self.shape!r}")
        n = 2 if self.shape == "cylinder" else 3
        if len(self.size) != n:
            raise InputError(f"size: expected {n} lengths for a {self.shape}, got {self.size!r}")

    @property
    def height(self) -> float:
        """Height along z [m]."""
        return float(self.size[-1])

    @property
    def half_height(self) -> float:
        """Half the height [m]."""
        return 0.5 * self.height

    @property
    def volume(self) -> float:
        """Volume [m^3]."""
        s = self.size
        if self.shape == "cuboid":
            return float(s[0] * s[1] * s[2])
        if self.shape == "cylinder":
            return float(math.pi / 4 * s[0] ** 2 * s[1])
        return float(math.pi / 4 * (s[0] ** 2 - s[1] ** 2) * s[2])

    @property
    def moment(self) -> float:
        """Dipole moment ``J V / mu0`` [A m^2]."""
        return self.j_t * self.volume / MU0

    @property
    def lateral(self) -> float:
        """Largest lateral half-extent [m]."""
        s = self.size
        return float(0.5 * math.hypot(s[0], s[1]) if self.shape == "cuboid" else 0.5 * s[0])

    def at(self, centre) -> "Body":
        """The same magnet with its centre at ``centre`` [m]."""
        return replace(self, centre=tuple(float(c) for c in centre))

    def B(self, points) -> np.ndarray:
        """Flux density at ``points`` (n, 3) [m] -> (n, 3) [T]."""
        p = np.asarray(points, dtype=float).reshape(-1, 3)
        c = np.asarray(self.centre, dtype=float).reshape(1, 3)
        return _evaluator(self.shape, tuple(float(v) for v in self.size), float(self.j_t))(p - c)

    def bounds(self) -> tuple:
        """``(xmin, xmax, ymin, ymax, zmin, zmax)`` [m]."""
        s = self.size
        hx, hy = (0.5 * s[0], 0.5 * s[1]) if self.shape == "cuboid" else (0.5 * s[0], 0.5 * s[0])
        x, y, z = self.centre
        return (x - hx, x + hx, y - hy, y + hy, z - self.half_height, z + self.half_height)


@lru_cache(maxsize=256)
def _evaluator(shape: str, size: tuple, j_t: float):
    """B of one magnet centred at the origin, as a function of points (set up once)."""
    return MagnetSet([shape], [size], [[0.0, 0.0, j_t]], [[0.0, 0.0, 0.0]]).B


class _System:
    """Several bodies as one field source (for the safety distance)."""

    def __init__(self, bodies):
        self.bodies = list(bodies)

    def B(self, points) -> np.ndarray:
        p = np.asarray(points, dtype=float).reshape(-1, 3)
        return sum(b.B(p) for b in self.bodies)

    def bounds(self) -> tuple:
        bb = np.array([b.bounds() for b in self.bodies])
        return (bb[:, 0].min(), bb[:, 1].max(), bb[:, 2].min(), bb[:, 3].max(), bb[:, 4].min(), bb[:, 5].max())


# ---------------------------------------------------------------------------
# quadrature
# ---------------------------------------------------------------------------
@lru_cache(maxsize=None)
def _gl(n: int) -> tuple:
    x, w = np.polynomial.legendre.leggauss(n)
    return x, w


def _gl_on(a: float, b: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    x, w = _gl(n)
    return 0.5 * (b - a) * x + 0.5 * (a + b), 0.5 * (b - a) * w


def _composite(edges, n: int) -> tuple[np.ndarray, np.ndarray]:
    xs, ws = [], []
    for a, b in zip(edges[:-1], edges[1:]):
        x, w = _gl_on(a, b, n)
        xs.append(x)
        ws.append(w)
    return np.concatenate(xs), np.concatenate(ws)


def _face_nodes(body: Body, n: int = 12, n_phi: int = 24) -> tuple[np.ndarray, np.ndarray]:
    """Gauss nodes (k, 2) relative to the axis and weights (k,) [m^2] over a pole face."""
    s = body.size
    if body.shape == "cuboid":
        x, wx = _gl_on(-0.5 * s[0], 0.5 * s[0], n)
        y, wy = _gl_on(-0.5 * s[1], 0.5 * s[1], n)
        X, Y = np.meshgrid(x, y, indexing="ij")
        return np.column_stack([X.ravel(), Y.ravel()]), np.outer(wx, wy).ravel()
    r0 = 0.0 if body.shape == "cylinder" else 0.5 * s[1]
    r, wr = _gl_on(r0, 0.5 * s[0], n)
    phi = (np.arange(n_phi) + 0.5) * (2 * math.pi / n_phi)
    R, P = np.meshgrid(r, phi, indexing="ij")
    W = np.outer(wr * r, np.full(n_phi, 2 * math.pi / n_phi))
    return np.column_stack([(R * np.cos(P)).ravel(), (R * np.sin(P)).ravel()]), W.ravel()


def _volume_nodes(body: Body, n: int = 10, n_phi: int = 24, n_z: int = 8):
    xy, w = _face_nodes(body, n, n_phi)
    z, wz = _gl_on(-body.half_height, body.half_height, n_z)
    pts = np.column_stack([np.repeat(xy, z.size, axis=0), np.tile(z, xy.shape[0])])
    return pts, np.repeat(w, z.size) * np.tile(wz, xy.shape[0])


def _rotation(rotvec) -> np.ndarray:
    """Rotation matrix of the rotation vector ``rotvec`` [rad] (Rodrigues)."""
    v = np.asarray(rotvec, dtype=float)
    th = float(np.linalg.norm(v))
    if th == 0.0:
        return np.eye(3)
    k = v / th
    K = np.array([[0, -k[2], k[1]], [k[2], 0, -k[0]], [-k[1], k[0], 0]])
    return np.eye(3) + math.sin(th) * K + (1 - math.cos(th)) * (K @ K)


# ---------------------------------------------------------------------------
# image-dipole model of the plates
# ---------------------------------------------------------------------------
def effective_chi(chi_perp, chi_par):
    """Effective susceptibility of an anisotropic plate for a point dipole [1].

    Parameters
    ----------
    chi_perp, chi_par : float or ndarray
        SI volume susceptibility along the plate normal (c axis) and in its plane [1].

    Returns
    -------
    float or ndarray
        ``(chi_perp + chi_par) / 2`` [1].

    Notes
    -----
    Over any plane parallel to the surface the dipole field satisfies
    :math:`\\int B_z^2 dA = \\int (B_x^2 + B_y^2) dA` for a vertical and for a horizontal
    dipole alike (both are ``3 pi C^2 m^2 / (8 s^4)`` for a vertical one, ``C = mu0/4pi``),
    so the weighted energy ``|chi_perp| B_z^2 + |chi_par| B_h^2`` of a half-space equals
    that of an isotropic one with the mean chi.

    References
    ----------
    .. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001).
    """
    return 0.5 * (np.asarray(chi_perp, dtype=float) + np.asarray(chi_par, dtype=float))


def dipole_plate_force(moment, chi, distance, thickness=math.inf):
    """Repulsion of one diamagnetic plate on a vertical point dipole [N].

    Parameters
    ----------
    moment : float
        Dipole moment [A m^2].
    chi : float
        SI volume susceptibility of the plate (negative) [1].
    distance : float or ndarray
        Dipole to the plate's facing surface [m].
    thickness : float
        Plate thickness [m]; ``inf`` for a half-space.

    Returns
    -------
    float or ndarray
        Force pushing the dipole away from the plate [N].

    Notes
    -----
    The image of a vertical dipole in a weakly magnetic half-space has strength
    ``chi/(2+chi) m ~ chi m / 2`` at the mirror point [1]_, so the energy is
    ``U = mu0 |chi| m^2 / (64 pi a^3)`` and ``F = 3 mu0 |chi| m^2 / (64 pi a^4)``. To
    first order in chi a slab is a half-space minus a half-space at ``a + t``.

    References
    ----------
    .. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001);
       J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 4.4.
    """
    a = np.asarray(distance, dtype=float)
    far = 0.0 if math.isinf(thickness) else (a + thickness) ** -4
    out = 3 * MU0 * abs(chi) * moment**2 / (64 * math.pi) * (a**-4 - far)
    return float(out) if np.ndim(out) == 0 else out


def dipole_plates_stiffness(moment, chi, distance, thickness=math.inf):
    """Vertical stiffness of two symmetric plates on a point dipole between them [N/m].

    Parameters
    ----------
    moment : float
        Dipole moment [A m^2].
    chi : float
        SI volume susceptibility (use :func:`effective_chi` for graphite) [1].
    distance : float or ndarray
        Dipole to each plate's facing surface [m].
    thickness : float
        Plate thickness [m]; ``inf`` for half-spaces.

    Returns
    -------
    float or ndarray
        ``k`` [N/m], positive (restoring).

    Notes
    -----
    With ``U(z) = c [(a - z)^-3 + (a + z)^-3]``, ``c = mu0 |chi| m^2 / (64 pi)``,

    .. math:: k = U''(0) = \\frac{3 \\mu_0 |\\chi| m^2}{8 \\pi}
              \\left[a^{-5} - (a + t)^{-5}\\right],

    which for thick plates is the published ``3 mu0 |chi| m^2 / (8 pi a^5)`` [1]_.

    References
    ----------
    .. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001).
    """
    a = np.asarray(distance, dtype=float)
    far = 0.0 if math.isinf(thickness) else (a + thickness) ** -5
    out = 3 * MU0 * abs(chi) * moment**2 / (8 * math.pi) * (a**-5 - far)
    return float(out) if np.ndim(out) == 0 else out


def dipole_plates_tilt_stiffness(moment, chi, distance, thickness=math.inf):
    """Torsional stiffness of two symmetric plates on a point dipole [N m/rad].

    Parameters
    ----------
    moment, chi, distance, thickness
        As in :func:`dipole_plates_stiffness`.

    Returns
    -------
    float or ndarray
        ``kappa`` [N m/rad], negative: the plates push the dipole to tilt.

    Notes
    -----
    The image of ``m = m (sin th, 0, cos th)`` is ``(chi/2)(-m_x, -m_y, m_z)``; its
    energy ``U = mu0 |chi| m^2 (1 + cos^2 th) / (128 pi a^3)`` per plate, so

    .. math:: \\kappa = -\\frac{\\mu_0 |\\chi| m^2}{32 \\pi}
              \\left[a^{-3} - (a + t)^{-3}\\right]

    for two plates: a lying dipole is repelled less than a standing one.

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 4.4 (images
       at a plane boundary) and eq. (5.56).
    """
    a = np.asarray(distance, dtype=float)
    far = 0.0 if math.isinf(thickness) else (a + thickness) ** -3
    out = -MU0 * abs(chi) * moment**2 / (32 * math.pi) * (a**-3 - far)
    return float(out) if np.ndim(out) == 0 else out


# ---------------------------------------------------------------------------
# lifter on floater
# ---------------------------------------------------------------------------
def lifter_force(lifter: Body, floater: Body, n: int = 12, n_phi: int = 24) -> np.ndarray:
    """Force of the lifter's field on the floater magnet [N], shape (3,).

    Parameters
    ----------
    lifter : Body
        Source magnet (its ``centre`` placed).
    floater : Body
        Rigid, uniformly magnetised target magnet with vertical pole faces' normals.
    n, n_phi : int
        Gauss-Legendre order across a face (radius or side) and points around it.

    Returns
    -------
    ndarray, shape (3,)
        ``F`` on the floater [N] (``F_z > 0``: pulled up).

    Notes
    -----
    For a rigid body of uniform magnetisation ``M`` in a current-free external field
    ``F = \\int (M . grad) B dV`` [1]_. With ``M = (J/mu0) e_z`` the z integral is done
    exactly: only the pole faces remain, i.e. the equivalent surface charges
    ``sigma = M . n`` (``+M`` on the top face, ``-M`` on the bottom one):

    .. math:: F = \\frac{J}{\\mu_0}\\left[\\int_{top} B\\, dA - \\int_{bottom} B\\, dA\\right].

    The faces are integrated with Gauss-Legendre nodes (tensor for a cuboid, radius x
    uniform angle for a disc or annulus).

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.9 and 5.12.
    """
    xy, w = _face_nodes(floater, n, n_phi)
    c = np.asarray(floater.centre, dtype=float)
    top = np.column_stack([xy + c[:2], np.full(w.size, c[2] + floater.half_height)])
    bot = np.column_stack([xy + c[:2], np.full(w.size, c[2] - floater.half_height)])
    b = lifter.B(np.concatenate([top, bot]))
    return floater.j_t / MU0 * (w @ b[: w.size] - w @ b[w.size:])


def lifter_stiffness(lifter: Body, floater: Body, step: Optional[float] = None) -> tuple[float, float]:
    """Vertical and horizontal stiffness of the lifter on the floater [N/m].

    Returns
    -------
    (k_z, k_r) : tuple of float
        ``k_z = -dF_z/dz`` (negative on the falling branch: unstable) and
        ``k_r = -dF_x/dx`` on the axis [N/m].

    Notes
    -----
    Central differences of :func:`lifter_force` moving the floater. On the axis the
    energy ``-\\int M.B dV`` is harmonic in the floater's position (each component of B
    is), so ``k_x + k_y + k_z = 0``; with the axial symmetry ``k_z + 2 k_r = 0``
    (Earnshaw) [1]_.

    References
    ----------
    .. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001).
    """
    h = step if step is not None else 1e-4 * max(floater.height, floater.lateral)
    c = np.asarray(floater.centre, dtype=float)
    fz = [lifter_force(lifter, floater.at(c + [0, 0, d]))[2] for d in (h, -h)]
    fx = [lifter_force(lifter, floater.at(c + [d, 0, 0]))[0] for d in (h, -h)]
    return -(fz[0] - fz[1]) / (2 * h), -(fx[0] - fx[1]) / (2 * h)


def lifter_energy(lifter: Body, floater: Body, shift=(0.0, 0.0, 0.0), rotvec=(0.0, 0.0, 0.0),
                  nodes=None) -> float:
    """Energy of the floater in the lifter's field, displaced and rotated [J].

    Parameters
    ----------
    lifter, floater : Body
    shift : array_like (3,)
        Displacement of the floater's centre [m].
    rotvec : array_like (3,)
        Rotation vector of the floater about its centre [rad].
    nodes : tuple, optional
        Precomputed ``_volume_nodes(floater)``.

    Returns
    -------
    float
        :math:`U = -\\int_V M \\cdot B_{lifter}\\, dV` [J] (Jackson (1999), sec. 5.16).
    """
    pts, w = nodes if nodes is not None else _volume_nodes(floater)
    R = _rotation(rotvec)
    p = pts @ R.T + np.asarray(floater.centre, dtype=float) + np.asarray(shift, dtype=float)
    m = floater.j_t / MU0 * R[:, 2]
    return -float(w @ (lifter.B(p) @ m))


def lifter_hessian(lifter: Body, floater: Body) -> dict:
    """Lateral, tilt and coupling stiffnesses of the lifter on the floater.

    Returns
    -------
    dict
        ``k_x``, ``k_y`` [N/m]; ``kappa_x``, ``kappa_y``, ``kappa_z`` (rotations about
        x, y, z) [N m/rad]; ``c_x_ty`` (x with rotation about y), ``c_y_tx`` [N/rad].

    Notes
    -----
    Second central differences of :func:`lifter_energy` with fixed quadrature nodes.
    For a dipole ``kappa = m B`` and ``c = m B'/2`` (``B' = dB_z/dz``), so relaxing the
    tilt lowers the lateral stiffness by ``c^2/kappa = m B'^2/(4B)`` [1]_.

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    nodes = _volume_nodes(floater)
    h = 1e-3 * max(floater.height, floater.lateral)
    d = 1e-3

    def U(sh=(0, 0, 0), rv=(0, 0, 0)):
        return lifter_energy(lifter, floater, sh, rv, nodes)

    u0 = U()
    out = {}
    for ax, name in ((0, "x"), (1, "y")):
        e = np.zeros(3)
        e[ax] = h
        out[f"k_{name}"] = (U(e) + U(-e) - 2 * u0) / h**2
    for ax, name in ((0, "x"), (1, "y"), (2, "z")):
        e = np.zeros(3)
        e[ax] = d
        out[f"kappa_{name}"] = (U(rv=e) + U(rv=-e) - 2 * u0) / d**2
    for sax, rax, name in ((0, 1, "c_x_ty"), (1, 0, "c_y_tx")):
        s = np.zeros(3)
        s[sax] = h
        r = np.zeros(3)
        r[rax] = d
        out[name] = (U(s, r) - U(s, -r) - U(-s, r) + U(-s, -r)) / (4 * h * d)
    return out


# ---------------------------------------------------------------------------
# finite-size model of the plates
# ---------------------------------------------------------------------------
_TABLES: dict = {}  # FinitePlates tables by floater, chi, gap range and width (thickness-free)


def _axis_edges(features, g: float, far: float) -> np.ndarray:
    """Panel edges on [0, far) graded towards the lateral features (rims, edges)."""
    L = max(features)
    ds = g * 2.0 ** np.arange(-3, 80)
    ds = ds[ds <= max(L, g)]
    edges = [0.0]
    for c in features:
        edges.append(c)
        edges.extend(c + ds)
        edges.extend(c - ds[ds < c])
    e = max(edges)
    while e < far:
        e = 2.0 * e if e > 0 else g
        edges.append(e)
    edges = np.unique(np.asarray(edges))
    return edges[np.concatenate([[True], np.diff(edges) > 1e-9 * max(g, L)])]


class FinitePlates:
    """Two diamagnetic slabs around a floater: the finite-size model.

    Parameters
    ----------
    floater : Body
        The floater magnet (its centre is taken as the origin).
    chi_perp, chi_par : float
        SI volume susceptibility along the plate normal and in its plane [1].
    thickness : float
        Thickness of each plate [m].
    g_min : float, optional
        Smallest gap between the floater's face and a plate that will be asked for [m]
        (the tabulated range starts there).
    width : float, optional
        Side of square plates centred on the floater's axis [m]; None for plates that
        extend laterally without limit.

    Notes
    -----
    To first order in chi the energy of the plates in the floater's field is [1]_, [2]_

    .. math:: U = \\frac{1}{2\\mu_0}\\int_{plates}
              \\left(|\\chi_\\perp| B_z^2 + |\\chi_\\parallel| (B_x^2 + B_y^2)\\right) dV.

    With ``P(s)`` that integrand over the whole plane at height ``s`` above the
    floater's centre, a plate facing the floater at distance ``a`` contributes
    ``Q(a) = \\int_a^{a+t} P ds``. The floater displaced by ``z`` sees ``a - z`` and
    ``a + z``; since a z-magnetised, centrosymmetric floater has ``P(-s) = P(s)``,

    .. math:: k = U''(0) = \\frac{1}{\\mu_0}\\left[P'(a + t) - P'(a)\\right],

    a difference of two plane integrals. ``P`` is integrated with composite
    Gauss-Legendre panels graded towards the floater's rim (width set by the gap), out
    to 1000 times the size; ``P'`` by a five-point difference on fixed nodes. The tilt
    stiffness is a volume integral over the slabs of the rotated field
    ``R B(R^T x)``. Far away ``P -> (|chi_perp|+|chi_par|)/2 * 3 pi C^2 m^2 / (2 s^4)``,
    the dipole model.

    Square plates of side ``w`` integrate ``P`` over the square only: for an
    axisymmetric floater the integrand depends on the radius alone and the square
    holds the arc ``theta(r) = 2 pi`` for ``r <= w/2`` and
    ``8 (pi/4 - arccos(w / 2r))`` up to the corner ``w/sqrt(2)``; a cuboid floater
    has its tensor grid cut at ``+-w/2``. Narrow plates stiffen less; the effect fades
    as ``w`` grows.

    References
    ----------
    .. [1] L. D. Landau and E. M. Lifshitz, Electrodynamics of Continuous Media, 2nd ed.
       (1984), sec. 32.
    .. [2] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001).
    """

    def __init__(self, floater: Body, chi_perp: float, chi_par: float, thickness: float,
                 g_min: Optional[float] = None, width: Optional[float] = None):
        if not (chi_perp < 0 and chi_par < 0):
            raise InputError("chi: expected negative (diamagnetic) susceptibilities for the plates")
        if not thickness > 0:
            raise InputError(f"thickness: expected a positive length, got {thickness!r}")
        self.floater = floater.at((0.0, 0.0, 0.0))
        self.wz, self.wh = abs(float(chi_perp)), abs(float(chi_par))
        self.t = float(thickness)
        self.h2 = self.floater.half_height
        size = max(self.floater.height, 2 * self.floater.lateral)
        self.g_lo = float(g_min) if g_min else 1e-3 * size
        self.g_lo = max(min(self.g_lo, 0.05 * size), 1e-4 * size)
        self.g_hi = 300.0 * size
        self._spline = None
        if width is not None and not (math.isfinite(width) and width > 0):
            raise InputError(f"width: expected a positive plate width, got {width!r}")
        self.width = None if width is None else float(width)

    @property
    def chi_dipole(self) -> float:
        """Dipole-model chi, ``-(|chi_perp| + |chi_par|)/2`` [1]."""
        return -0.5 * (self.wz + self.wh)

    def _features(self):
        s = self.floater.size
        if self.floater.shape == "cuboid":
            return [0.5 * s[0]], [0.5 * s[1]]
        if self.floater.shape == "ring" and s[1] > 0:
            return [0.5 * s[1], 0.5 * s[0]], None
        return [0.5 * s[0]], None

    def _plane_nodes(self, s: float, full: bool = False):
        """Points (k, 2) in a plane at height s and weights [m^2] (over the plates' square
        when they have a width)."""
        g = max(s - self.h2, 1e-6 * self.floater.height)
        far = 1e3 * (s + self.floater.lateral)
        fx, fy = self._features()
        hw = None if self.width is None else 0.5 * self.width
        if fy is None:
            if hw is None:
                r, wr = _composite(_axis_edges(fx, g, far), 8 if not full else 6)
                arc = np.full(r.size, 2 * math.pi)
            else:
                corner = math.sqrt(2.0) * hw
                e = _axis_edges(list(fx) + [hw], g, corner)
                e = np.unique(np.concatenate([e[e < corner], [hw, corner]]))
                r, wr = _composite(e, 8 if not full else 6)
                with np.errstate(invalid="ignore"):
                    arc = np.where(r <= hw, 2 * math.pi,
                                   8 * (math.pi / 4 - np.arccos(np.minimum(1.0, hw / np.maximum(r, 1e-300)))))
            if not full:
                return np.column_stack([r, np.zeros_like(r)]), arc * r * wr
            n_phi = 32
            phi = (np.arange(n_phi) + 0.5) * (2 * math.pi / n_phi)
            R, P = np.meshgrid(r, phi, indexing="ij")
            W = np.outer(wr * r, np.full(n_phi, 2 * math.pi / n_phi))
            X, Y = R * np.cos(P), R * np.sin(P)
            if hw is not None:  # the square only: drop the nodes outside, rescale each ring to its arc
                inside = (np.abs(X) <= hw) & (np.abs(Y) <= hw)
                frac = inside.sum(axis=1) / n_phi
                scale = np.where(frac > 0, arc / (2 * math.pi) / np.maximum(frac, 1e-300), 0.0)
                W = W * inside * scale[:, None]
            return np.column_stack([X.ravel(), Y.ravel()]), W.ravel()
        ex, ey = _axis_edges(fx, g, far), _axis_edges(fy, g, far)
        if hw is not None:
            ex = np.unique(np.concatenate([ex[ex < hw], [hw]]))
            ey = np.unique(np.concatenate([ey[ey < hw], [hw]]))
        x, wx = _composite(ex, 5)
        y, wy = _composite(ey, 5)
        X, Y = np.meshgrid(x, y, indexing="ij")
        xy = np.column_stack([X.ravel(), Y.ravel()])
        w = np.outer(wx, wy).ravel()
        if not full:
            return xy, 4 * w
        sx = np.array([[1, 1], [-1, 1], [1, -1], [-1, -1]], dtype=float)
        return np.concatenate([xy * q for q in sx]), np.tile(w, 4)

    def _weighted(self, B: np.ndarray) -> np.ndarray:
        return self.wz * B[:, 2] ** 2 + self.wh * (B[:, 0] ** 2 + B[:, 1] ** 2)

    def plane_integral(self, s: float) -> float:
        """``P(s)`` [T^2 m^2]: the weighted B^2 over the plane at height ``s`` (> half-height)."""
        xy, w = self._plane_nodes(s)
        pts = np.column_stack([xy, np.full(w.size, s)])
        return float(w @ self._weighted(self.floater.B(pts)))

    def plane_integral_slope(self, s: float) -> float:
        """``dP/ds`` [T^2 m] by a five-point difference on fixed nodes."""
        xy, w = self._plane_nodes(s)
        g = s - self.h2
        d = 1e-3 * g
        zs = s + d * np.array([-2.0, -1.0, 1.0, 2.0])
        pts = np.concatenate([np.column_stack([xy, np.full(w.size, z)]) for z in zs])
        vals = (self._weighted(self.floater.B(pts)).reshape(4, w.size)) @ w
        return float((vals[0] - 8 * vals[1] + 8 * vals[2] - vals[3]) / (12 * d))

    def plane_slope_parts(self, s) -> np.ndarray:
        """``d/ds`` of the plane integrals of ``B_z^2`` and of ``B_x^2 + B_y^2`` at heights
        ``s`` (unweighted by chi) [T^2 m], shape (n, 2); five-point differences on fixed
        nodes, as :meth:`plane_integral_slope`."""
        out = []
        for si in np.atleast_1d(np.asarray(s, dtype=float)):
            xy, w = self._plane_nodes(float(si))
            d = 1e-3 * (si - self.h2)
            zs = si + d * np.array([-2.0, -1.0, 1.0, 2.0])
            pts = np.concatenate([np.column_stack([xy, np.full(w.size, z)]) for z in zs])
            b = self.floater.B(pts)
            parts = np.column_stack([b[:, 2] ** 2, b[:, 0] ** 2 + b[:, 1] ** 2]).reshape(4, w.size, 2)
            vals = np.einsum("ikj,k->ij", parts, w)
            out.append((vals[0] - 8 * vals[1] + 8 * vals[2] - vals[3]) / (12 * d))
        return np.asarray(out)

    def _slope_dipole(self, s):
        m = self.floater.moment
        return -0.5 * (self.wz + self.wh) * 6 * math.pi * _C**2 * m**2 * np.asarray(s, dtype=float) ** -5

    def _build(self):
        key = (self.floater.shape, tuple(self.floater.size), float(self.floater.j_t), self.wz, self.wh,
               self.g_lo, self.g_hi, self.width)
        hit = _TABLES.get(key)
        if hit is not None:  # the same plates around the same floater: same table
            self._spline, self._ratio_hi = hit
            return
        g = np.geomspace(self.g_lo, self.g_hi, 40)
        ratio = np.array([self.plane_integral_slope(self.h2 + gi) for gi in g]) / self._slope_dipole(self.h2 + g)
        self._spline = CubicSpline(np.log(g), ratio)
        self._ratio_hi = float(ratio[-1])
        if len(_TABLES) > 256:
            _TABLES.clear()
        _TABLES[key] = (self._spline, self._ratio_hi)

    def slope(self, s) -> np.ndarray:
        """``dP/ds`` [T^2 m] at heights ``s``, tabulated (exact below the table)."""
        s = np.atleast_1d(np.asarray(s, dtype=float))
        if np.any(s <= self.h2):
            raise InputError("distance: expected more than the floater's half-height")
        if self._spline is None:
            self._build()
        g = s - self.h2
        out = np.empty_like(s)
        lo = g < self.g_lo
        hi = g > self.g_hi
        mid = ~(lo | hi)
        out[mid] = self._spline(np.log(g[mid])) * self._slope_dipole(s[mid])
        out[hi] = self._ratio_hi * self._slope_dipole(s[hi])
        for i in np.nonzero(lo)[0]:
            out[i] = self.plane_integral_slope(float(s[i]))
        return out

    def stiffness(self, distance):
        """Vertical stiffness of the two plates at plate distance ``distance`` [N/m]."""
        a = np.asarray(distance, dtype=float)
        k = (self.slope(a + self.t) - self.slope(a)) / MU0
        return float(k[0]) if np.ndim(distance) == 0 else k

    def stiffness_direct(self, distance: float) -> float:
        """As :meth:`stiffness` without the table (for checks) [N/m]."""
        a = float(distance)
        return (self.plane_integral_slope(a + self.t) - self.plane_integral_slope(a)) / MU0

    def energy(self, distance: float, rotvec=(0.0, 0.0, 0.0)) -> float:
        """Energy of both plates with the floater rotated by ``rotvec`` [J]."""
        a = float(distance)
        g = a - self.h2
        xy, w = self._plane_nodes(a, full=True)
        edges = [a] + [a + g * 2.0**k for k in range(-2, 60) if g * 2.0**k < self.t] + [a + self.t]
        z, wz = _composite(np.unique(edges), 3)
        pts = np.column_stack([np.repeat(xy, z.size, axis=0), np.tile(z, xy.shape[0])])
        ww = np.repeat(w, z.size) * np.tile(wz, xy.shape[0])
        R = _rotation(rotvec)
        b = self.floater.B(pts @ R) @ R.T  # R B(R^T x), row-vector form
        upper = float(ww @ self._weighted(b)) / (2 * MU0)
        return 2.0 * upper  # the lower plate is the upper one's inversion image

    def tilt_stiffness(self, distance: float, step: float = 3e-3) -> float:
        """Torsional stiffness of the two plates on the floater [N m/rad] (negative).

        Second difference of :meth:`energy` in the tilt about a horizontal axis
        (``U(+th) = U(-th)`` by mirror symmetry).
        """
        u0 = self.energy(distance)
        u1 = self.energy(distance, (0.0, step, 0.0))
        return 2.0 * (u1 - u0) / step**2


# ---------------------------------------------------------------------------
# one station
# ---------------------------------------------------------------------------
class StationModel:
    """A lifter, a floater and its plates at one temperature: balance, stiffness, window.

    Parameters
    ----------
    lifter, floater : Body
        Magnets (centres ignored; the floater is put at the origin).
    floater_mass_kg : float
        Mass of the floater magnet [kg].
    chi_perp, chi_par : float
        Plates' susceptibilities [1].
    thickness, clearance : float
        Plate thickness; smallest gap floater face to plate [m].
    width : float, optional
        Side of square plates [m]; None for very wide plates.
    """

    def __init__(self, lifter: Body, floater: Body, floater_mass_kg: float, chi_perp: float,
                 chi_par: float, thickness: float, clearance: float, width: Optional[float] = None):
        self.lifter0 = lifter
        self.floater = floater.at((0.0, 0.0, 0.0))
        self.mass = float(floater_mass_kg)
        self.t = float(thickness)
        self.clearance = float(clearance)
        self.a_min = self.floater.half_height + self.clearance
        g_min = max(self.clearance, 1e-3 * self.floater.height)
        self.plates = FinitePlates(self.floater, chi_perp, chi_par, thickness, g_min=0.5 * g_min, width=width)
        self.chi_dip = self.plates.chi_dipole
        self._scan = None
        self.others: tuple = ()

    # -- lifter
    def lifter_at(self, distance: float) -> Body:
        """The lifter with its near face ``distance`` above the floater's centre."""
        return self.lifter0.at((0.0, 0.0, distance + self.lifter0.half_height))

    def set_others(self, bodies) -> None:
        """Other stations' lifters, placed relative to this floater's centre (held fixed)."""
        self.others = tuple(bodies)
        self._scan = None

    def source(self, distance: float):
        """What pulls on the floater: its lifter at ``distance`` plus any other lifters."""
        own = self.lifter_at(distance)
        return _System((own,) + self.others) if self.others else own

    def force(self, distance: float) -> float:
        """Upward pull of the lifter at lifter distance ``distance`` [N]."""
        return float(lifter_force(self.source(distance), self.floater)[2])

    def stiffness(self, distance: float) -> tuple[float, float]:
        """``(k_z, k_r)`` of the lifter at ``distance`` [N/m]."""
        return lifter_stiffness(self.source(distance), self.floater)

    def _grid(self):
        if self._scan is None:
            size = max(self.lifter0.height, 2 * self.lifter0.lateral, self.floater.height)
            u = np.geomspace(1e-4 * size, 100 * size, 90)
            d = self.floater.half_height + u
            f = np.array([self.force(x) for x in d])
            self._scan = (d, f)
        return self._scan

    def peak_force(self) -> tuple[float, float]:
        """``(distance, force)`` at the largest pull over lifter distances [m, N]."""
        d, f = self._grid()
        i = int(np.argmax(f))
        return float(d[i]), float(f[i])

    def balance(self, weight_n: float) -> Optional[float]:
        """Lifter distance where the pull equals ``weight_n`` on the falling branch [m].

        The largest root of ``F(D) = W`` with ``dF/dD < 0``; None when the lifter cannot
        hold the weight at any distance.
        """
        d, f = self._grid()
        W = float(weight_n)
        if not W > 0:
            raise InputError(f"weight: expected a positive weight, got {weight_n!r}")
        i0 = int(np.argmax(f))
        if f[i0] < W:
            return None
        if W <= f[-1]:  # lighter than the pull at the far end of the table: go further
            hi = d[-1]
            while self.force(hi) >= W:
                hi *= 2.0
                if hi > 1e4:
                    raise PhysicsError("weight: too light to find a balance distance")
            return brentq(lambda x: self.force(x) - W, d[-1], hi, xtol=1e-12, rtol=1e-12)
        above = np.nonzero(f[i0:] >= W)[0]
        j = i0 + int(above[-1])
        if f[j] == W:
            return float(d[j])
        return brentq(lambda x: self.force(x) - W, d[j], d[j + 1], xtol=1e-13, rtol=1e-13)

    # -- plates
    def k_plates(self, distance: float) -> float:
        """Finite-size plates' vertical stiffness at plate distance ``distance`` [N/m]."""
        return self.plates.stiffness(distance)

    def k_plates_dipole(self, distance: float) -> float:
        """Image-dipole plates' vertical stiffness [N/m]."""
        return dipole_plates_stiffness(self.floater.moment, self.chi_dip, distance, self.t)

    def max_plate_distance(self, k_lifter_z: float, model: str = "finite-size") -> Optional[float]:
        """Largest plate distance with ``k_lifter_z + k_plates > 0`` [m]; None if none.

        The search starts at the smallest plate distance (half-height + clearance) for
        the finite-size model and at the floater's half-height for the dipole model.
        """
        k = self.k_plates if model == "finite-size" else self.k_plates_dipole
        lo = self.a_min if model == "finite-size" else self.floater.half_height * (1 + 1e-9)
        need = -float(k_lifter_z)
        if need <= 0:
            return math.inf
        if k(lo) <= need:
            return lo if k(lo) >= need * (1 - 1e-6) else None
        hi = 2 * lo
        while k(hi) > need:
            hi *= 2.0
        return float(brentq(lambda a: k(a) - need, lo, hi, xtol=1e-12, rtol=1e-10))

    def smallest_stable_distance(self, plate_distance: Optional[float] = None) -> Optional[float]:
        """Smallest lifter distance that still leaves a stable window [m].

        The window closes when the plates at their smallest distance can no longer beat
        the lifter's negative stiffness, or when the upper plate no longer fits between
        floater and lifter (``D >= a_min + t``), or at the force peak.
        """
        d, f = self._grid()
        i0 = int(np.argmax(f))
        d_peak = float(d[i0])
        a = self.a_min if plate_distance is None else float(plate_distance)
        kp = self.k_plates(a)
        d_clear = a + self.t
        lo = max(d_peak, d_clear)

        def margin(x):
            return self.stiffness(x)[0] + kp

        if margin(lo) > 0:
            return lo
        hi = lo * 1.5
        while margin(hi) <= 0:
            hi *= 1.5
            if hi > 1e3:
                return None
        return float(brentq(margin, lo, hi, xtol=1e-12, rtol=1e-10))

    def max_weight(self, plate_distance: Optional[float] = None) -> Optional[float]:
        """Largest total weight (floater plus load) with a stable window [N].

        With ``plate_distance`` the plates stay there; otherwise they may be set anywhere
        in the window (the smallest distance is then the best).
        """
        d = self.smallest_stable_distance(plate_distance)
        return None if d is None else self.force(d)

    def tilt(self, distance: float, plate_distance: float) -> dict:
        """Lateral and tilt stiffnesses at lifter distance ``distance``, plates at ``plate_distance``."""
        hz = lifter_hessian(self.source(distance), self.floater)
        kp = self.plates.tilt_stiffness(plate_distance)
        kd = dipole_plates_tilt_stiffness(self.floater.moment, self.chi_dip, plate_distance, self.t)
        return {**hz, "kappa_plates": kp, "kappa_plates_dipole": kd}


def _recoil(spec) -> float:
    """:attr:`matdb.design.model.SingleMagnet.recoil_factor` (1 for other specs)."""
    return float(getattr(spec, "recoil_factor", 1.0))


def _station_model(st, temp_k: float) -> StationModel:
    from matdb.physics.thermal import br_at, chi_at

    # polarisation on the recoil line (mu_rec of the grade) unless the design says rigid
    bl = float(br_at(st.lifter.br_t, st.lifter.alpha_br_pct_per_k, temp_k)) * _recoil(st.lifter)
    bf = float(br_at(st.floater.br_t, st.floater.alpha_br_pct_per_k, temp_k)) * _recoil(st.floater)
    cp = float(chi_at(st.plates.chi_perp, st.plates.temp_coeff_per_k, temp_k))
    cq = float(chi_at(st.plates.chi_par, st.plates.temp_coeff_per_k, temp_k))
    lifter = Body(st.lifter.shape, tuple(st.lifter.size), bl)
    floater = Body(st.floater.shape, tuple(st.floater.size), bf)
    return StationModel(lifter, floater, st.floater.mass_kg, cp, cq, st.plates.thickness, st.plates.clearance,
                        getattr(st.plates, "width", None))


# ---------------------------------------------------------------------------
# several stations
# ---------------------------------------------------------------------------
def weight_shares(positions, weight_n: float, centre_xy, tol: float = 1e-6) -> np.ndarray:
    """Shares of a rigid payload's weight carried by point supports [N].

    Parameters
    ----------
    positions : array_like, shape (n, 2)
        Support positions (x, y) [m].
    weight_n : float
        Payload weight [N].
    centre_xy : array_like (2,)
        Payload centre of mass (x, y) [m].
    tol : float
        Largest allowed moment mismatch, as a distance [m].

    Returns
    -------
    ndarray, shape (n,)
        Vertical force of each support on the payload [N] (may be negative: a support
        that must pull down).

    Notes
    -----
    Statics of a rigid body: :math:`\\sum s_i = W`, :math:`\\sum s_i x_i = W X`,
    :math:`\\sum s_i y_i = W Y`. Two supports, or three not in a line, determine the
    shares (the lever rule). For more supports (or several in a line) statics leaves the
    split open; matdb takes the least-norm shares (``min sum s_i^2``, the most even split
    statics allows), which is what a rigid payload takes on equally stiff supports set
    to the same height. The lifter distances are then set to carry those shares.

    Raises
    ------
    InputError
        When no set of vertical supports at these positions can hold the payload level
        (centre of mass off the line through collinear supports).
    """
    p = np.asarray(positions, dtype=float).reshape(-1, 2)
    c = np.asarray(centre_xy, dtype=float).reshape(2)
    A = np.vstack([np.ones(p.shape[0]), p[:, 0], p[:, 1]])
    b = float(weight_n) * np.array([1.0, c[0], c[1]])
    s, *_ = np.linalg.lstsq(A, b, rcond=None)
    resid = A @ s - b
    if abs(weight_n) > 0 and np.max(np.abs(resid[1:])) / abs(weight_n) > tol:
        raise InputError(
            "payload.centre_of_mass: off the line through the stations; supports in a line "
            "cannot hold the payload level (add a station off the line or move the centre of mass)"
        )
    return s


def _body_stiffness(stations_k: list[dict], positions, com, payload_weight: float) -> np.ndarray:
    """6x6 stiffness of the rigid payload (x, y, z, rot x, rot y, rot z) about its centre of mass.

    Each station's local stiffness (lateral, vertical, tilt, lateral-tilt coupling) is
    carried to the payload by ``d_i = u + theta x r_i``; the payload's weight at height
    ``z_c`` above the floaters' centres adds ``-W z_c`` to the two tilt terms (a centre
    of mass below the floaters steadies the tilt).
    """
    K = np.zeros((6, 6))
    for kd, (x, y) in zip(stations_k, positions):
        rx, ry = x - com[0], y - com[1]
        Kl = np.zeros((6, 6))
        Kl[0, 0], Kl[1, 1], Kl[2, 2] = kd["k_x"], kd["k_y"], kd["k_z"]
        Kl[3, 3], Kl[4, 4], Kl[5, 5] = kd["kappa_x"], kd["kappa_y"], kd["kappa_z"]
        Kl[0, 4] = Kl[4, 0] = kd["c_x_ty"]
        Kl[1, 3] = Kl[3, 1] = kd["c_y_tx"]
        T = np.eye(6)
        T[0, 5], T[1, 5] = -ry, rx
        T[2, 3], T[2, 4] = ry, -rx
        K += T.T @ Kl @ T
    K[3, 3] -= payload_weight * com[2]
    K[4, 4] -= payload_weight * com[2]
    return 0.5 * (K + K.T)


# ---------------------------------------------------------------------------
# the report
# ---------------------------------------------------------------------------
def _f(x) -> Optional[float]:
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


DIPOLE_NOTE = ("image-dipole values (the floater as a point magnet) are an idealisation shown for "
               "comparison only; near the plates they overstate the stiffness and the window, so the "
               "verdict uses the finite-size model")


def _station_report(st, model: StationModel, weight_n: float, where: str) -> dict:
    """Everything about one station carrying ``weight_n`` (floater included)."""
    warnings: list[str] = []
    label = where.rstrip(".") + ": " if where else ""
    a_design = st.plates.distance
    D = model.balance(weight_n)
    w_max = model.max_weight()
    out: dict = {
        "weight_n": weight_n,
        "lifter_distance_m": _f(D),
        "min_plate_distance_m": model.a_min,
        "plate_distance_m": _f(a_design),
        "max_weight_n": _f(w_max),
    }
    if D is None:
        d_pk, f_pk = model.peak_force()
        warnings.append(
            f"{label}the lifter cannot hold {weight_n:.4g} N at any distance "
            f"(its largest pull is {f_pk:.4g} N, at {d_pk * 1e3:.3g} mm): use a stronger lifter or a lighter load"
        )
        out.update(k_lifter_z_n_m=None, k_lifter_r_n_m=None, k_plates_n_m=None, k_plates_dipole_n_m=None,
                   max_plate_distance_m=None, max_plate_distance_dipole_m=None, k_z_total_n_m=None,
                   k_r_effective_n_m=None, tilt_stable=False, radially_stable=False, stable=False,
                   plate_distance_in_window=False, k_tilt_n_m_per_rad=None, hessian=None)
        return out | {"warnings": warnings}
    kz, kr = model.stiffness(D)
    a_max = model.max_plate_distance(kz)
    a_max_dip = model.max_plate_distance(kz, "dipole")
    if a_design is not None and a_design + st.plates.thickness > D:
        raise InputError(
            f"{where}plates.distance: the lifter cannot clear the upper plate: holding "
            f"{weight_n:.4g} N needs the lifter's face {D * 1e3:.4g} mm above the floater's "
            f"centre, but the upper plate reaches {(a_design + st.plates.thickness) * 1e3:.4g} mm "
            "(distance plus thickness); use closer or thinner plates, a lighter load or a weaker lifter"
        )
    a_check = a_design if a_design is not None else model.a_min
    clear_limit = D - st.plates.thickness
    in_window = bool(
        a_max is not None
        and a_check >= model.a_min - 1e-12
        and a_check <= min(a_max, clear_limit) + 1e-12
    )
    kp = model.k_plates(a_check)
    kp_dip = model.k_plates_dipole(a_check)
    width = model.plates.width
    kp_wide = None
    if width is not None:
        wide = FinitePlates(model.floater, -model.plates.wz, -model.plates.wh, model.t)
        kp_wide = wide.stiffness_direct(a_check)
        if kp_wide > 0 and kp < 0.99 * kp_wide:
            warnings.append(
                f"{label}the plates are {width * 1e3:.3g} mm wide: their stiffness at "
                f"{a_check * 1e3:.3g} mm is {100 * kp / kp_wide:.3g}% of that of very wide plates "
                "(included in the window)"
            )
    tl = model.tilt(D, a_check)
    kappa = 0.5 * (tl["kappa_x"] + tl["kappa_y"]) + tl["kappa_plates"]
    coupling = 0.5 * (abs(tl["c_x_ty"]) + abs(tl["c_y_tx"]))
    tilt_ok = kappa > 0
    kr_eff = kr - coupling**2 / kappa if tilt_ok else -math.inf
    radial_ok = tilt_ok and kr_eff > 0
    kz_tot = kz + kp
    stable = bool(in_window and kz_tot > 0 and tilt_ok and radial_ok)
    if a_max is None:
        warnings.append(
            f"{label}no stable point: even at the smallest plate distance "
            f"({model.a_min * 1e3:.3g} mm) the plates' stiffness ({model.k_plates(model.a_min):.4g} N/m) "
            f"cannot beat the lifter's ({kz:.4g} N/m); use a stronger diamagnet, a lighter load or "
            "a smaller floater-to-lifter size ratio"
        )
    elif a_design is not None and not in_window:
        warnings.append(
            f"{where}plates.distance {a_design * 1e3:.4g} mm is outside the stable window "
            f"{model.a_min * 1e3:.4g} to {min(a_max, clear_limit) * 1e3:.4g} mm"
        )
    if a_max is not None and a_max_dip is not None and a_max_dip > a_max * 1.02 and a_max_dip > model.a_min:
        warnings.append(
            f"{label}the image-dipole idealisation (a point magnet) puts the window's edge at "
            f"{a_max_dip * 1e3:.3g} mm, the finite-size model at {a_max * 1e3:.3g} mm: plates set "
            "between the two would not hold the floater; the verdict uses the finite-size model"
        )
    if a_max is not None and a_max > clear_limit:
        warnings.append(
            f"{label}the lifter, not stability, limits the plate distance: the upper plate must "
            f"stay below {clear_limit * 1e3:.4g} mm"
        )
    if not tilt_ok:
        warnings.append(f"{label}the floater tips over: the plates' tilting push beats the lifter's aligning torque")
    elif not radial_ok:
        warnings.append(f"{label}the floater slides off the axis: lateral stiffness {kr_eff:.4g} N/m with the tilt relaxed")
    out.update(
        k_lifter_z_n_m=kz,
        k_lifter_r_n_m=kr,
        k_plates_n_m=kp if a_design is not None else None,
        k_plates_dipole_n_m=kp_dip if a_design is not None else None,
        k_z_total_n_m=kz_tot if a_design is not None else None,
        max_plate_distance_m=_f(a_max),
        max_plate_distance_dipole_m=_f(a_max_dip),
        lifter_clear_limit_m=clear_limit,
        plate_distance_checked_m=a_check,
        plate_stiffness_dipole_ratio=_f(kp_dip / kp) if kp > 0 else None,
        plate_model_note=DIPOLE_NOTE,
        plate_width_m=_f(width),
        k_plates_wide_n_m=_f(kp_wide),
        k_plates_checked_n_m=float(kp),
        k_plates_dipole_checked_n_m=float(kp_dip),
        plate_distance_in_window=in_window,
        k_tilt_lifter_n_m_per_rad=0.5 * (tl["kappa_x"] + tl["kappa_y"]),
        k_tilt_plates_n_m_per_rad=tl["kappa_plates"],
        k_tilt_plates_dipole_n_m_per_rad=tl["kappa_plates_dipole"],
        k_tilt_n_m_per_rad=kappa,
        k_r_effective_n_m=_f(kr_eff),
        tilt_stable=bool(tilt_ok),
        radially_stable=bool(radial_ok),
        stable=stable,
        hessian={**tl, "k_z": kz_tot},
    )
    return out | {"warnings": warnings}


def _placed_others(stations, models, heights, i: int) -> list:
    """The lifters of every station but ``i``, placed relative to floater ``i``'s centre."""
    out = []
    for j, (sj, mj) in enumerate(zip(stations, models)):
        if j != i:
            c = mj.lifter_at(heights[j]).centre
            out.append(mj.lifter0.at((sj.x - stations[i].x + c[0], sj.y - stations[i].y + c[1], c[2])))
    return out


def _coupled_heights(stations, models, totals, start) -> tuple[list, list]:
    """Lifter distances at which every floater's total pull (all lifters) equals its load.

    Solves ``F_i(D_1..D_n) = W_i`` with scipy's hybrid Powell method from the uncoupled
    distances, then fixes the other lifters in each station model. Returns the
    distances and, per station, the other lifters' share of the pull.
    """
    from scipy.optimize import root

    n = len(models)

    def pulls(h):
        out = np.empty(n)
        for i, m in enumerate(models):
            src = _System([m.lifter_at(h[i])] + _placed_others(stations, models, h, i))
            out[i] = lifter_force(src, m.floater)[2]
        return out

    sol = root(lambda h: pulls(h) / totals - 1.0, np.asarray(start, dtype=float), method="hybr",
               options={"xtol": 1e-12})
    if not sol.success:
        raise PhysicsError(f"station: no set of lifter distances holds every floater ({sol.message})")
    h = [float(v) for v in sol.x]
    cross = []
    for i, m in enumerate(models):
        others = _placed_others(stations, models, h, i)
        m.set_others(others)
        own = lifter_force(m.lifter_at(h[i]), m.floater)[2]
        cross.append(float(abs(1.0 - own / totals[i])))
    return h, cross


def _drift(st, temp_k: float, weight_n: float, dt: float = 5.0) -> Optional[float]:
    """d(lifter distance)/dT at fixed weight [m/K], central difference over +-dt kelvin.

    Br falls as the magnets warm (reversible coefficient, IEC 60404-8-1), so a lifter
    set at one temperature must come closer when it is warmer.
    """
    lo, hi = temp_k - dt, temp_k + dt
    if lo <= 0:
        return None
    d_lo = _station_model(st, lo).balance(weight_n)
    d_hi = _station_model(st, hi).balance(weight_n)
    if d_lo is None or d_hi is None:
        return None
    return (d_hi - d_lo) / (2 * dt)


def lift_temperature_slope(st, temp_k: float) -> float:
    """Relative change of the lifter's pull per kelvin, ``d ln F / dT`` [1/K].

    The pull of one uniformly magnetised magnet on another scales with the product of
    their remanences, ``F = Br_l(T) Br_f(T) F_1(D)``, so
    ``d ln F/dT = alpha_l/(100 + alpha_l dT) + alpha_f/(100 + alpha_f dT)`` with
    ``dT = T - 20 C`` (linear law of IEC 60404-8-1). The plates do not enter: at the
    symmetric plate position their vertical forces cancel.
    """
    dt = float(temp_k) - T_REF_K
    out = 0.0
    for a in (st.lifter.alpha_br_pct_per_k, st.floater.alpha_br_pct_per_k):
        out += a / (100.0 + a * dt)
    return out


def schedule_row(model: StationModel, weight_n: float, d_empty: Optional[float], dlnf_dt: float,
                 plate_distance: Optional[float] = None, shift_m: Optional[float] = None) -> dict:
    """One station's entry of the payload schedule at total weight ``weight_n`` [N].

    Parameters
    ----------
    model : StationModel
    weight_n : float
        Floater plus its load [N].
    d_empty : float or None
        Lifter distance with no payload (the empty-float position) [m].
    dlnf_dt : float
        ``d ln F / dT`` of the pull (:func:`lift_temperature_slope`) [1/K].
    plate_distance : float, optional
        Where the plates are set [m]; default the smallest plate distance.
    shift_m : float, optional
        Allowed shift of the floater's equilibrium [m]; default a tenth of its clearance
        to the nearer plate.

    Returns
    -------
    dict
        ``lifter_distance_m``, ``min_plate_distance_m``, ``max_plate_distance_m``
        (both None when no plate distance is stable), ``window_m``,
        ``lifter_travel_m`` (``d_empty - D``: how far the lifter has come towards the
        floater), ``dforce_dd_n_m`` (``dF/dD``), ``resolution_m``,
        ``lifter_distance_drift_um_per_k``, ``k_lifter_z_n_m``, ``k_z_total_n_m``.

    Notes
    -----
    Moving the lifter by ``dD`` changes the pull by ``(dF/dD) dD``; the floater, held by
    the total vertical stiffness ``k = k_lifter + k_plates``, moves by
    ``(dF/dD) dD / k``. The lifter step that moves it by ``s`` is
    ``s k / |dF/dD|`` (``s`` = 0.1 x clearance unless given). At fixed weight,
    ``F(D, T) = W`` gives ``dD/dT = -(d ln F/dT) W / (dF/dD)``. Moving the floater up
    by ``dz`` is moving the lifter down by ``dz``, so ``dF/dD = -dF/dz = k_lifter_z``.
    """
    D = model.balance(weight_n) if weight_n > 0 else None
    row: dict = {"lifter_distance_m": _f(D), "min_plate_distance_m": None, "max_plate_distance_m": None,
                 "window_m": None, "lifter_travel_m": None, "dforce_dd_n_m": None, "resolution_m": None,
                 "lifter_distance_drift_um_per_k": None, "k_lifter_z_n_m": None, "k_z_total_n_m": None}
    if D is None:
        return row
    kz, _ = model.stiffness(D)
    a_max = model.max_plate_distance(kz)
    hi = None if a_max is None else min(a_max, D - model.t)
    if hi is not None and hi >= model.a_min:
        row.update(min_plate_distance_m=model.a_min, max_plate_distance_m=_f(hi),
                   window_m=_f(hi - model.a_min))
    a = model.a_min if plate_distance is None else float(plate_distance)
    k_tot = kz + model.k_plates(a)
    shift = 0.1 * (a - model.floater.half_height) if shift_m is None else float(shift_m)
    row.update(
        lifter_travel_m=None if d_empty is None else float(d_empty - D),
        dforce_dd_n_m=float(kz),
        k_lifter_z_n_m=float(kz),
        k_z_total_n_m=float(k_tot),
        resolution_m=float(shift * k_tot / abs(kz)) if (k_tot > 0 and kz != 0) else None,
        lifter_distance_drift_um_per_k=float(-dlnf_dt * weight_n / kz * 1e6) if kz != 0 else None,
    )
    return row


def _window(model: StationModel, weights_n, payloads_kg, w_empty: float, dlnf_dt: float,
            plate_distance: Optional[float] = None, shift_m: Optional[float] = None) -> list[dict]:
    d_empty = model.balance(w_empty) if w_empty > 0 else None
    return [{"payload_kg": float(p), **schedule_row(model, float(w), d_empty, dlnf_dt, plate_distance, shift_m)}
            for w, p in zip(weights_n, payloads_kg)]


def window_min(rows: list[dict]) -> Optional[float]:
    """Narrowest plate-distance window over schedule rows and stations [m]; None when
    some payload (or station) has none."""
    out = math.inf
    for r in rows:
        w = r.get("window_m")
        for v in (w if isinstance(w, list) else [w]):
            if v is None:
                return None
            out = min(out, v)
    return None if not math.isfinite(out) else float(out)


def levitate_stabilized(design, temp_k: Optional[float] = None, n_window: int = 11,
                        payloads_kg=None, resolution_m: Optional[float] = None) -> dict:
    """Floating-magnet mode: balance, stiffnesses, stability window and payload schedule.

    Parameters
    ----------
    design : StabilizedDesign
        From :func:`matdb.design.toml_io.parse_stabilized`.
    temp_k : float, optional
        Temperature [K]; default the design's.
    n_window : int
        Number of payloads in the schedule (0 to the largest payload).
    payloads_kg : array_like, optional
        Payloads of the schedule [kg] (a payload range); default the design's
        ``payload_range`` if it has one, else ``n_window`` payloads from 0 to the
        largest. For several stations these are the shared payload's masses.
    resolution_m : float, optional
        Allowed shift of the floater's equilibrium for ``resolution_m`` in the
        schedule [m]; default a tenth of the clearance to the nearer plate.

    Returns
    -------
    dict
        JSON-serialisable: ``mode`` ("stabilized"), ``floats``, ``lifter_distance_m``,
        ``k_lifter_z_n_m``, ``k_lifter_r_n_m``, ``k_plates_n_m``,
        ``k_plates_dipole_n_m``, ``max_plate_distance_m`` (finite-size),
        ``max_plate_distance_dipole_m``, ``max_payload_kg``, ``verdict_model``,
        ``window`` (list of ``payload_kg``, ``lifter_distance_m``,
        ``max_plate_distance_m``, ``min_plate_distance_m``; the largest plate distance
        there is also capped by the lifter, ``D - t``), ``safe_distance_m``,
        ``warnings``, ``tilt_stable``, and extras (``k_z_total_n_m``,
        ``k_r_effective_n_m``, tilt stiffnesses, ``lifter_distance_drift_um_per_k``...).
        With stations: ``stations`` (``share_n``, ``share_fraction``,
        ``lifter_distance_m``... per station), window rows whose
        ``lifter_distance_m`` and ``max_plate_distance_m`` are lists (one per station),
        ``body_stiffness_eigenvalues`` of the rigid payload, and the top-level scalars of
        the most constrained station (``critical_station``).

    Notes
    -----
    Vertical: ``k_z = k_lifter_z + k_plates(a) > 0`` between the smallest plate distance
    (half-height + clearance) and the root ``max_plate_distance_m``; the upper plate must
    also fit under the lifter (``a + t <= D``). Lateral and tilt: the lifter's lateral
    stiffness ``k_r = -k_z/2 > 0`` (Laplace), its aligning torque ``kappa_L`` and the
    plates' tilting push ``kappa_P < 0``; with the tilt relaxed the lateral stiffness is
    ``k_r - c^2 / (kappa_L + kappa_P)`` (``c`` the lateral-tilt coupling), which is how
    the plates lower it. The verdict uses the finite-size plate model; the dipole model
    is reported beside it. The largest payload is where the window closes: the lifter
    distance at which ``k_lifter_z + k_plates(a_min) = 0`` or the upper plate no longer
    fits. Several stations: :func:`weight_shares` and a 6x6 rigid-body stiffness.

    References
    ----------
    .. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    from matdb.physics.thermal import SAFETY_TEXT, safe_distance

    t = float(design.temperature_k if temp_k is None else temp_k)
    if not (math.isfinite(t) and t > 0):
        raise InputError(f"temperature: expected a temperature above 0 K, got {temp_k!r}")
    g = G_STANDARD
    models = [_station_model(st, t) for st in design.stations]
    warnings: list[str] = []
    payloads = None
    if payloads_kg is None and getattr(design, "payload_range", None) is not None:
        lo, hi = design.payload_range
        payloads_kg = np.linspace(lo, hi, n_window) if hi > lo else np.array([lo])
    if payloads_kg is not None:
        payloads = np.atleast_1d(np.asarray(payloads_kg, dtype=float))
        if payloads.size == 0 or not np.all(np.isfinite(payloads)) or np.any(payloads < 0):
            raise InputError(f"payload range: expected payloads of zero or more, got {payloads_kg!r}")
    if resolution_m is not None and not (math.isfinite(resolution_m) and resolution_m > 0):
        raise InputError(f"resolution: expected a positive length, got {resolution_m!r}")

    if not design.multi:
        st, model = design.stations[0], models[0]
        weight = (st.floater.mass_kg + st.payload_kg) * g
        rep = _station_report(st, model, weight, "")
        w_max = rep["max_weight_n"]
        max_payload = None if w_max is None else w_max / g - st.floater.mass_kg
        if max_payload is not None and max_payload < 0:
            max_payload = None
        top = max_payload if max_payload is not None else st.payload_kg
        pay = np.linspace(0.0, top, n_window) if top > 0 else np.array([0.0])
        pay = pay if payloads is None else payloads
        window = _window(model, (st.floater.mass_kg + pay) * g, pay, st.floater.mass_kg * g,
                         lift_temperature_slope(st, t), st.plates.distance, resolution_m)
        D = rep["lifter_distance_m"]
        bodies = [model.floater] + ([model.lifter_at(D)] if D is not None else [])
        floats = bool(rep["stable"])
        if st.plates.distance is None and D is not None:
            floats = bool(rep["max_plate_distance_m"] is not None and rep["tilt_stable"] and rep["radially_stable"])
            if floats:
                warnings.append(
                    f"set the plates {model.a_min * 1e3:.3g} to "
                    f"{min(rep['max_plate_distance_m'], rep['lifter_clear_limit_m']) * 1e3:.3g} mm "
                    "from the floater's centre (each plate's facing surface)"
                )
        result = {k: v for k, v in rep.items() if k not in ("warnings", "hessian", "stable")}
        if st.plates.distance is not None and st.plates.distance >= model.a_min:
            w_here = model.max_weight(st.plates.distance)
            p_here = None if w_here is None else w_here / g - st.floater.mass_kg
            result["max_payload_at_plate_distance_kg"] = None if p_here is None or p_here < 0 else p_here
        else:
            result["max_payload_at_plate_distance_kg"] = None
        drift = _drift(st, t, weight) if D is not None else None
        result["lifter_distance_drift_um_per_k"] = None if drift is None else drift * 1e6
        if design.temp_min_k is not None and D is not None:
            ends = [_station_model(st, tt).balance(weight) for tt in (design.temp_min_k, design.temp_max_k)]
            result["lifter_distance_at_temp_min_m"], result["lifter_distance_at_temp_max_m"] = ends
            if drift is not None:
                warnings.append(
                    f"the lifter distance moves {abs(drift) * 1e6:.3g} um per kelvin "
                    f"({'closer' if drift < 0 else 'farther'} when warmer): re-set it, or regulate it, "
                    "as the temperature changes"
                )
        result.update(
            mode="stabilized",
            floats=floats,
            payload_kg=st.payload_kg,
            floater_mass_kg=st.floater.mass_kg,
            max_payload_kg=_f(max_payload),
            verdict_model="finite-size",
            window=window,
            temperature_k=t,
        )
        warnings = rep["warnings"] + warnings
    else:
        p = design.payload
        wp = p.mass_kg * g
        pos = [(s.x, s.y) for s in design.stations]
        fixed = np.array([(s.floater.mass_kg + s.payload_kg) * g for s in design.stations])
        if len(design.stations) == 1:
            shares = np.array([wp])
            if abs(p.centre_of_mass[0] - pos[0][0]) + abs(p.centre_of_mass[1] - pos[0][1]) > 1e-6:
                raise InputError("payload.centre_of_mass: one station can only carry a payload centred over it")
        else:
            shares = weight_shares(pos, wp, p.centre_of_mass[:2])
        frac = shares / wp if wp > 0 else weight_shares(pos, 1.0, p.centre_of_mass[:2])
        totals = fixed + shares
        for i, total in enumerate(totals):
            if not total > 0:
                raise InputError(
                    f"payload.centre_of_mass: station[{i}] would have to pull its floater down "
                    f"({total:.4g} N); move the centre of mass inside the stations"
                )
        # each floater hangs in the field of every lifter: solve the lifter distances together
        heights = [m.balance(float(w)) for m, w in zip(models, totals)]
        coupled = all(h is not None for h in heights)
        if coupled and len(models) > 1:
            heights, cross = _coupled_heights(design.stations, models, totals, heights)
            for i, c in enumerate(cross):
                if c > 0.01:
                    warnings.append(
                        f"station[{i}]: the other stations' lifters give {100 * c:.3g}% of this "
                        "floater's pull (included in the lifter distances; each station's window and "
                        "largest load hold the other lifters where they are)"
                    )
        reps = [
            _station_report(st, model, float(totals[i]), f"station[{i}].")
            for i, (st, model) in enumerate(zip(design.stations, models))
        ]
        ok = all(r["lifter_distance_m"] is not None for r in reps)
        tilt_stable = False
        eig = None
        if ok:
            ks = []
            for r in reps:
                h = r["hessian"]
                ks.append({
                    "k_x": h["k_x"], "k_y": h["k_y"], "k_z": h["k_z"],
                    "kappa_x": h["kappa_x"] + h["kappa_plates"], "kappa_y": h["kappa_y"] + h["kappa_plates"],
                    "kappa_z": h["kappa_z"], "c_x_ty": h["c_x_ty"], "c_y_tx": h["c_y_tx"],
                })
            K = _body_stiffness(ks, pos, p.centre_of_mass, wp)
            eig = np.linalg.eigvalsh(K)
            tilt_block = np.linalg.eigvalsh(K[3:5, 3:5])
            tilt_stable = bool(np.all(tilt_block > 0) and np.all(eig > 0))
        # largest payload with the same centre of mass
        limits = []
        for i, r in enumerate(reps):
            wm = r["max_weight_n"]
            if frac[i] > 1e-12:
                limits.append((wm - fixed[i]) / frac[i] if wm is not None else 0.0)
            elif frac[i] < -1e-12:
                limits.append(fixed[i] / -frac[i])
        wp_max = max(0.0, min(limits)) if limits else None
        max_payload = None if wp_max is None else wp_max / g
        margins = []
        for r in reps:
            if r["max_plate_distance_m"] is None or r["lifter_distance_m"] is None:
                margins.append(-math.inf)
            else:
                margins.append(min(r["max_plate_distance_m"], r["lifter_clear_limit_m"]) - r["min_plate_distance_m"])
        crit = int(np.argmin(margins))
        top = max_payload if max_payload else p.mass_kg
        pay = np.linspace(0.0, top, n_window) if payloads is None else payloads
        win_st = [_window(m, fixed[i] + frac[i] * pay * g, pay, float(fixed[i]),
                          lift_temperature_slope(design.stations[i], t), design.stations[i].plates.distance,
                          resolution_m)
                  for i, m in enumerate(models)]
        window = [
            {"payload_kg": float(pj), **{k: [w[j][k] for w in win_st] for k in win_st[0][j] if k != "payload_kg"}}
            for j, pj in enumerate(pay)
        ]
        stations = []
        for i, (st, r) in enumerate(zip(design.stations, reps)):
            e = {k: v for k, v in r.items() if k not in ("warnings", "hessian")}
            e.update(name=st.name, x_m=st.x, y_m=st.y, share_n=float(shares[i]),
                     share_fraction=float(frac[i]), floater_mass_kg=st.floater.mass_kg)
            stations.append(e)
            warnings.extend(r["warnings"])
        rc = reps[crit]
        result = {k: v for k, v in rc.items() if k not in ("warnings", "hessian", "stable")}
        floats = bool(ok and all(r["stable"] for r in reps) and tilt_stable)
        if not tilt_stable and ok:
            warnings.append("the payload's rigid-body tilt (one floater rising while another sinks) is unstable")
        result.update(
            mode="stabilized",
            floats=floats,
            payload_kg=p.mass_kg,
            max_payload_kg=_f(max_payload),
            verdict_model="finite-size",
            window=window,
            stations=stations,
            critical_station=crit,
            tilt_stable=tilt_stable,
            body_stiffness_eigenvalues=None if eig is None else [float(v) for v in eig],
            temperature_k=t,
        )
        bodies = []
        for st, m, r in zip(design.stations, models, reps):
            off = np.array([st.x, st.y, 0.0])
            bodies.append(m.floater.at(off))
            if r["lifter_distance_m"] is not None:
                bodies.append(m.lifter_at(r["lifter_distance_m"]).at(
                    off + [0, 0, r["lifter_distance_m"] + m.lifter0.half_height]))
    result["window_min_m"] = window_min(result["window"])
    if result["window_min_m"] is None:
        lo_p = float(min(r["payload_kg"] for r in result["window"]))
        hi_p = float(max(r["payload_kg"] for r in result["window"]))
        warnings.append(
            "some payload has no stable plate distance; 'matdb optimise --floating-magnet "
            f"--payload-range \"{lo_p * 1e3:.3g} g..{hi_p * 1e3:.3g} g\"' searches floater and lifter sizes, "
            "grades, plate materials and thicknesses and two or three floaters sharing the load"
        )
    if payloads is not None:
        result["payload_range_kg"] = [float(payloads.min()), float(payloads.max())]
    result["resolution_shift_m"] = _f(resolution_m)
    result["safe_distance_m"] = float(safe_distance(_System(bodies)))
    result["warnings"] = warnings + [SAFETY_TEXT]
    head = {k: result.pop(k) for k in ("mode", "floats")}
    return _plain({**head, **result})


def format_table(r: dict) -> str:
    """The stabilized-mode result as text for a person (mm, g, N/m, mN m/rad)."""

    def num(v, scale=1.0, unit="", digits=4):
        if v is None:
            return "-"
        return f"{v * scale:.{digits}g} {unit}".rstrip()

    yes = lambda b: "yes" if b else "no"  # noqa: E731

    def span(lo, hi):
        if lo is None or hi is None:
            return "none"
        return f"{num(lo, 1e3, 'mm')} to {num(hi, 1e3, 'mm')}"

    ratio = r.get("plate_stiffness_dipole_ratio")
    dip_stiff = num(r.get("k_plates_dipole_n_m"), 1, "N/m")
    if r.get("k_plates_dipole_n_m") is not None and ratio is not None:
        dip_stiff += f"  ({ratio:.2g} x the finite-size value)"
    dip_edge = num(r.get("max_plate_distance_dipole_m"), 1e3, "mm")
    if r.get("max_plate_distance_dipole_m") is not None and r.get("max_plate_distance_m") is not None \
            and r["max_plate_distance_dipole_m"] > r["max_plate_distance_m"]:
        dip_edge += "  (unsafe: beyond the finite-size edge)"
    rows = [
        ("floats (stable)", yes(r.get("floats"))),
        ("payload", num(r.get("payload_kg"), 1e3, "g")),
        ("lifter distance (floater centre to lifter face)", num(r.get("lifter_distance_m"), 1e3, "mm")),
        ("lifter stiffness k_z / k_r", f"{num(r.get('k_lifter_z_n_m'), 1, 'N/m')} / {num(r.get('k_lifter_r_n_m'), 1, 'N/m')}"),
        ("plate distance (design)", num(r.get("plate_distance_m"), 1e3, "mm")),
        ("plates' stiffness, finite-size (verdict)", num(r.get("k_plates_n_m"), 1, "N/m")),
        ("  image-dipole idealisation, comparison only", dip_stiff),
        ("stable plate distance, finite-size", span(r.get("min_plate_distance_m"), r.get("max_plate_distance_m"))),
        ("  largest, image-dipole idealisation (comparison)", dip_edge),
        ("plate width", "very wide" if r.get("plate_width_m") is None else num(r.get("plate_width_m"), 1e3, "mm")),
        ("plate distance in window", yes(r.get("plate_distance_in_window"))),
        ("tilt stiffness lifter / plates", f"{num(r.get('k_tilt_lifter_n_m_per_rad'), 1e3, 'mN m/rad')} / {num(r.get('k_tilt_plates_n_m_per_rad'), 1e3, 'mN m/rad')}"),
        ("lateral stiffness, tilt relaxed", num(r.get("k_r_effective_n_m"), 1, "N/m")),
        ("tilt stable", yes(r.get("tilt_stable"))),
        ("largest payload", num(r.get("max_payload_kg"), 1e3, "g")),
        ("lifter distance drift", num(r.get("lifter_distance_drift_um_per_k"), 1, "um/K", 3)),
        ("0.5 mT safety distance", num(r.get("safe_distance_m"), 1e3, "mm", 3)),
        ("verdict model", str(r.get("verdict_model"))),
    ]
    width = max(len(k) for k, _ in rows)
    lines = [f"{k.ljust(width)}  {v}" for k, v in rows]
    if r.get("stations"):
        lines += ["", "stations (share of the payload's weight, lifter distance, stable plate distances):"]
        for i, s in enumerate(r["stations"]):
            lines.append(
                f"  [{i}] {s.get('name') or ''} x {num(s['x_m'], 1e3, 'mm')}, y {num(s['y_m'], 1e3, 'mm')}: "
                f"share {num(s['share_n'], 1e3, 'mN')} ({num(s['share_fraction'], 100, '%', 3)}), "
                f"lifter {num(s['lifter_distance_m'], 1e3, 'mm')}, plates "
                f"{num(s['min_plate_distance_m'], 1e3, 'mm')} to {num(s['max_plate_distance_m'], 1e3, 'mm')}"
            )
    if r.get("window"):
        lines += schedule_lines(r)
    lines += ["", "note: " + DIPOLE_NOTE + "."]
    if r.get("warnings"):
        lines += ["", "warnings:"] + [f"- {w}" for w in r["warnings"]]
    return "\n".join(lines)


def _per_station(v) -> list:
    return list(v) if isinstance(v, list) else [v]


def schedule_lines(r: dict) -> list[str]:
    """The payload schedule of a result as text lines (mm, um, N/m); "none" where no
    plate distance is stable."""
    def cell(v, scale, digits=4):
        return "-" if v is None else f"{v * scale:.{digits}g}"

    head = ("payload g", "lifter mm", "travel mm", "stable plates mm", "window mm", "step um",
            "drift um/K", "dF/dd N/m")
    body = []
    for w in r["window"]:
        ds = _per_station(w.get("lifter_distance_m"))
        n = len(ds)
        col = {k: _per_station(w.get(k)) + [None] * n for k in (
            "lifter_travel_m", "min_plate_distance_m", "max_plate_distance_m", "window_m", "resolution_m",
            "lifter_distance_drift_um_per_k", "dforce_dd_n_m")}
        for i in range(n):
            lo, hi = col["min_plate_distance_m"][i], col["max_plate_distance_m"][i]
            body.append((
                cell(w["payload_kg"], 1e3) if i == 0 else "",
                (f"[{i}] " if n > 1 else "") + cell(ds[i], 1e3),
                cell(col["lifter_travel_m"][i], 1e3, 3),
                "none" if lo is None or hi is None else f"{lo * 1e3:.4g} to {hi * 1e3:.4g}",
                "none" if col["window_m"][i] is None else cell(col["window_m"][i], 1e3, 3),
                cell(col["resolution_m"][i], 1e6, 3),
                cell(col["lifter_distance_drift_um_per_k"][i], 1, 3),
                cell(col["dforce_dd_n_m"][i], 1, 4),
            ))
    widths = [max(len(h), *(len(b[j]) for b in body)) for j, h in enumerate(head)]
    out = ["", "schedule (lifter distance, its travel from the empty float, stable plate distances, the "
           "lifter step that moves the floater by " + ("the given shift" if r.get("resolution_shift_m") else
                                                       "a tenth of its clearance") + ", drift, dF/dd):"]
    out.append("  " + " | ".join(h.rjust(wd) for h, wd in zip(head, widths)))
    out += ["  " + " | ".join(c.rjust(wd) for c, wd in zip(b, widths)) for b in body]
    wm = r.get("window_min_m")
    out.append(f"  narrowest window over the schedule: {'none' if wm is None else f'{wm * 1e3:.3g} mm'}")
    return out


def _plain(x):
    """Plain Python floats, lists and dicts (JSON-serialisable; inf/NaN -> None)."""
    if isinstance(x, dict):
        return {k: _plain(v) for k, v in x.items()}
    if isinstance(x, (list, tuple, np.ndarray)):
        return [_plain(v) for v in x]
    if isinstance(x, (bool, np.bool_)):
        return bool(x)
    if isinstance(x, (int, np.integer)) and not isinstance(x, bool):
        return int(x)
    if isinstance(x, (float, np.floating)):
        v = float(x)
        return v if math.isfinite(v) else None
    return x
