"""The lifter's pull on the floater magnet: force, stiffness, energy and its Hessian, and
a table of the on-axis pull against the lifter distance.

The floater is a rigid, uniformly magnetised body in the lifter's closed-form field
(:mod:`matdb.physics.fields`): its force from the equivalent surface charges of its pole
faces, its energy ``-int M.B dV`` for torques and tilt.

References
----------
.. [1] J. D. Jackson, "Classical Electrodynamics", 3rd ed., Wiley (1999), sec. 5.9, 5.12
   and 5.16 (force and energy of a magnetisation in an external field).
.. [2] M. D. Simon, L. O. Heflinger and A. K. Geim, "Diamagnetically stabilized magnet
   levitation", Am. J. Phys. 69, 702-713 (2001).
.. [3] M. D. Simon and A. K. Geim, "Diamagnetic levitation: Flying frogs and floating
   magnets", J. Appl. Phys. 87, 6200-6204 (2000).
"""

from __future__ import annotations

import math
from functools import lru_cache
from typing import Optional

import numpy as np
from scipy.interpolate import CubicSpline
from scipy.spatial.transform import Rotation

from matdb.physics.quadrature import gauss_on
from matdb.physics.floating.body import Body
from matdb.constants import MU0

__all__ = ["lifter_force", "lifter_forces", "lifter_stiffness", "lifter_energy", "lifter_energies",
           "lifter_hessian", "axial_pull", "PullTable", "pull_table"]


@lru_cache(maxsize=256)
def _face_rule(shape: str, size: tuple, n: int, n_phi: int) -> tuple[np.ndarray, np.ndarray]:
    s = size
    if shape == "cuboid":
        x, wx = gauss_on(-0.5 * s[0], 0.5 * s[0], n)
        y, wy = gauss_on(-0.5 * s[1], 0.5 * s[1], n)
        X, Y = np.meshgrid(x, y, indexing="ij")
        return np.column_stack([X.ravel(), Y.ravel()]), np.outer(wx, wy).ravel()
    r0 = 0.0 if shape == "cylinder" else 0.5 * s[1]
    r, wr = gauss_on(r0, 0.5 * s[0], n)
    phi = (np.arange(n_phi) + 0.5) * (2 * math.pi / n_phi)
    R, P = np.meshgrid(r, phi, indexing="ij")
    W = np.outer(wr * r, np.full(n_phi, 2 * math.pi / n_phi))
    return np.column_stack([(R * np.cos(P)).ravel(), (R * np.sin(P)).ravel()]), W.ravel()


def _face_nodes(body: Body, n: int = 12, n_phi: int = 24) -> tuple[np.ndarray, np.ndarray]:
    """Gauss nodes (k, 2) relative to the axis and weights (k,) [m^2] over a pole face
    (built once per shape and size)."""
    return _face_rule(body.shape, tuple(float(v) for v in body.size), n, n_phi)


@lru_cache(maxsize=256)
def _volume_rule(shape: str, size: tuple, n: int = 10, n_phi: int = 24, n_z: int = 8):
    xy, w = _face_rule(shape, size, n, n_phi)
    z, wz = gauss_on(-0.5 * size[-1], 0.5 * size[-1], n_z)
    pts = np.column_stack([np.repeat(xy, z.size, axis=0), np.tile(z, xy.shape[0])])
    return pts, np.repeat(w, z.size) * np.tile(wz, xy.shape[0])


def _volume_nodes(body: Body):
    """Gauss nodes (k, 3) relative to the centre and weights [m^3] over the body."""
    return _volume_rule(body.shape, tuple(float(v) for v in body.size))


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
    return lifter_forces(lifter, floater, [floater.centre], n, n_phi)[0]


def lifter_forces(lifter, floater: Body, centres, n: int = 12, n_phi: int = 24) -> np.ndarray:
    """:func:`lifter_force` with the floater's centre at each of ``centres`` (k, 3) [m],
    in one field evaluation -> (k, 3) [N]."""
    xy, w = _face_nodes(floater, n, n_phi)
    c = np.asarray(centres, dtype=float).reshape(-1, 1, 3)
    face = np.column_stack([xy, np.zeros(w.size)])[None, :, :]
    hz = np.array([0.0, 0.0, floater.half_height])
    pts = np.concatenate([c + face + hz, c + face - hz], axis=1)  # (k, 2 nodes, 3)
    b = lifter.B(pts.reshape(-1, 3)).reshape(c.shape[0], 2, w.size, 3)
    return floater.j_t / MU0 * (np.einsum("n,knj->kj", w, b[:, 0]) - np.einsum("n,knj->kj", w, b[:, 1]))


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
    shifts = np.array([[0, 0, h], [0, 0, -h], [h, 0, 0], [-h, 0, 0]], dtype=float)
    f = lifter_forces(lifter, floater, c + shifts)
    return -(f[0, 2] - f[1, 2]) / (2 * h), -(f[2, 0] - f[3, 0]) / (2 * h)


def lifter_energy(lifter: Body, floater: Body, shift=(0.0, 0.0, 0.0), rotvec=(0.0, 0.0, 0.0)) -> float:
    """Energy of the floater in the lifter's field, displaced and rotated [J].

    Parameters
    ----------
    lifter, floater : Body
    shift : array_like (3,)
        Displacement of the floater's centre [m].
    rotvec : array_like (3,)
        Rotation vector of the floater about its centre [rad].

    Returns
    -------
    float
        :math:`U = -\\int_V M \\cdot B_{lifter}\\, dV` [J] (Jackson (1999), sec. 5.16).
    """
    return float(lifter_energies(lifter, floater, [shift], [rotvec])[0])


def lifter_energies(lifter, floater: Body, shifts, rotvecs) -> np.ndarray:
    """:func:`lifter_energy` for k displacements (k, 3) [m] and rotation vectors (k, 3)
    [rad] at once, in one field evaluation -> (k,) [J]."""
    pts, w = _volume_nodes(floater)
    R = Rotation.from_rotvec(np.asarray(rotvecs, dtype=float).reshape(-1, 3)).as_matrix()  # (k, 3, 3)
    sh = np.asarray(shifts, dtype=float).reshape(-1, 1, 3) + np.asarray(floater.centre, dtype=float)
    p = np.einsum("nj,kij->kni", pts, R) + sh
    m = floater.j_t / MU0 * R[:, :, 2]  # the rotated moment direction, (k, 3)
    b = lifter.B(p.reshape(-1, 3)).reshape(p.shape)
    return -np.einsum("n,kni,ki->k", w, b, m)


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
    h = 1e-3 * max(floater.height, floater.lateral)
    d = 1e-3
    e = np.eye(3)
    z = np.zeros(3)
    # the configurations: rest; +-x, +-y shifts; +-x, +-y, +-z rotations; the two couplings' corners
    shifts, rots = [z], [z]
    for ax in (0, 1):
        shifts += [h * e[ax], -h * e[ax]]
        rots += [z, z]
    for ax in (0, 1, 2):
        shifts += [z, z]
        rots += [d * e[ax], -d * e[ax]]
    for sax, rax in ((0, 1), (1, 0)):
        for ss, rs in ((1, 1), (1, -1), (-1, 1), (-1, -1)):
            shifts.append(ss * h * e[sax])
            rots.append(rs * d * e[rax])
    u = lifter_energies(lifter, floater, shifts, rots)
    u0 = u[0]
    out = {}
    for i, name in enumerate(("x", "y")):
        out[f"k_{name}"] = (u[1 + 2 * i] + u[2 + 2 * i] - 2 * u0) / h**2
    for i, name in enumerate(("x", "y", "z")):
        out[f"kappa_{name}"] = (u[5 + 2 * i] + u[6 + 2 * i] - 2 * u0) / d**2
    for i, name in enumerate(("c_x_ty", "c_y_tx")):
        c = u[11 + 4 * i: 15 + 4 * i]
        out[name] = (c[0] - c[1] - c[2] + c[3]) / (4 * h * d)
    return out


# ---------------------------------------------------------------------------
# the on-axis pull, tabulated against the lifter distance
# ---------------------------------------------------------------------------
@lru_cache(maxsize=256)
def _axial_face_rule(lifter_shape: str, shape: str, size: tuple, n: int = 12, n_phi: int = 24):
    """The face rule of :func:`_face_nodes` folded by the symmetry of a pair on one axis.

    Every lifter shape is symmetric under ``x -> -x`` and ``y -> -y``, and the face
    rules hold no node on those lines, so a quarter of the nodes with four times the
    weight is the same rule; a lifter that is a body of revolution gives ``B_z`` that
    depends on the radius alone, so a round floater needs one node per ring.
    """
    xy, w = _face_rule(shape, size, n, n_phi)
    if lifter_shape in ("cylinder", "ring") and shape != "cuboid":
        rings = xy.reshape(n, n_phi, 2)[:, 0, :]
        return np.column_stack([np.hypot(rings[:, 0], rings[:, 1]), np.zeros(n)]), w.reshape(n, n_phi).sum(axis=1)
    keep = (xy[:, 0] > 0) & (xy[:, 1] > 0)
    return xy[keep], 4.0 * w[keep]


def axial_pull(lifter: Body, floater: Body, distances) -> np.ndarray:
    """Upward pull of ``lifter`` on ``floater`` on a common vertical axis [N].

    Parameters
    ----------
    lifter, floater : Body
        Both magnetised along +z (centres ignored).
    distances : array_like
        Lifter distances: floater centre to the lifter's near face [m].

    Returns
    -------
    ndarray
        ``F_z`` [N] at each distance, in one field evaluation; the same quadrature as
        :func:`lifter_force` (folded by the pair's symmetry).
    """
    d = np.atleast_1d(np.asarray(distances, dtype=float))
    xy, w = _axial_face_rule(lifter.shape, floater.shape, tuple(float(v) for v in floater.size))
    zc = d + lifter.half_height  # lifter centre above the floater's centre
    z = np.stack([floater.half_height - zc, -floater.half_height - zc], axis=1)  # (nd, 2)
    pts = np.empty((d.size, 2, w.size, 3))
    pts[..., 0] = xy[:, 0]
    pts[..., 1] = xy[:, 1]
    pts[..., 2] = z[:, :, None]
    bz = lifter.at((0.0, 0.0, 0.0)).B(pts.reshape(-1, 3))[:, 2].reshape(d.size, 2, w.size)
    return floater.j_t / MU0 * (bz[:, 0] @ w - bz[:, 1] @ w)


class PullTable:
    """The on-axis pull of a lifter on a floater against the lifter distance, both at
    unit polarisation (1 T), tabulated once and interpolated.

    Parameters
    ----------
    lifter, floater : Body
        Shapes and sizes (polarisations and centres ignored).
    n : int
        Table nodes, geometric in the gap ``u = D - h_f`` (floater's top face to the
        lifter's face) from ``1e-4`` to ``100`` times the larger magnet's size.

    Notes
    -----
    The pull is bilinear in the two polarisations (superposition, Jackson (1999)
    sec. 5.9), so ``F(D) = J_l J_f F_1(D)`` at any temperature. ``F_1`` is a cubic
    spline in ``log u``; :attr:`error` is its largest deviation from
    :func:`axial_pull` halfway between nodes, relative to the peak pull. With 179
    nodes it stays below ``1e-6`` of the peak pull (about ``2e-7`` for cylinders, cuboids
    and rings; checked in the tests against :func:`lifter_force`), and the slope below
    ``1e-4`` of its largest value. Callers that need the quadrature's own value polish a
    root found on the table with a few direct evaluations.
    """

    def __init__(self, lifter: Body, floater: Body, n: int = 179):
        self.half_height = floater.half_height
        self.size = max(lifter.height, 2 * lifter.lateral, floater.height)
        u = np.geomspace(1e-4 * self.size, 100 * self.size, n)
        lif, flo = Body(lifter.shape, lifter.size, 1.0), Body(floater.shape, floater.size, 1.0)
        mid = np.sqrt(u[1:] * u[:-1])
        f = axial_pull(lif, flo, self.half_height + np.concatenate([u, mid]))
        self.d, self.f = self.half_height + u, f[:n]
        # splined: the pull times (1 + u/size)^4, which tends to a constant far away (dipoles)
        self._spline = CubicSpline(np.log(u), self.f * self._far(u))
        self._dspline = self._spline.derivative()
        err = np.abs(self.pull(self.half_height + mid) - f[n:])
        self.error = float(np.max(err) / np.max(np.abs(self.f)))
        self.error_local = float(np.max(err / np.abs(f[n:])))

    def _far(self, u):
        return (1.0 + u / self.size) ** 4

    def pull(self, distance):
        """``F_1`` at lifter distances inside the table [N/T^2]."""
        u = np.asarray(distance, dtype=float) - self.half_height
        return self._spline(np.log(u)) / self._far(u)

    def slope(self, distance):
        """``dF_1/dD`` at lifter distances inside the table [N/(m T^2)]."""
        u = np.asarray(distance, dtype=float) - self.half_height
        x = np.log(u)
        return (self._dspline(x) / u - 4.0 * self._spline(x) / (self.size + u)) / self._far(u)


@lru_cache(maxsize=128)
def _pull_table(lshape: str, lsize: tuple, fshape: str, fsize: tuple) -> PullTable:
    return PullTable(Body(lshape, lsize, 1.0), Body(fshape, fsize, 1.0))


def pull_table(lifter: Body, floater: Body) -> PullTable:
    """The :class:`PullTable` of a lifter and floater pair (built once per shapes and sizes)."""
    return _pull_table(lifter.shape, tuple(float(v) for v in lifter.size),
                       floater.shape, tuple(float(v) for v in floater.size))
