"""Uniformly polarised, axis-aligned cuboids: the surface-charge closed form.

Each component of ``mu0 H`` is a signed sum over the cuboid's eight corners of one
arctangent or one logarithm (Engel-Herbert and Hesjedal [1]_, equivalently Yang et
al. [2]_). Touching neighbours share corners, so :class:`CuboidSet` evaluates each
distinct corner once with its net signed coefficient. SI: points and sizes in metres,
polarisations and fields in tesla.

References
----------
.. [1] R. Engel-Herbert and T. Hesjedal, "Calculation of the magnetic stray field of a
   uniaxial magnetic domain", J. Appl. Phys. 97, 074504 (2005).
.. [2] Z. J. Yang, T. H. Johansen, H. Bratsberg, G. Helgesen and A. T. Skjeltorp,
   "Potential and force between a magnet and a bulk Y1Ba2Cu3O7-d superconductor studied
   by a mechanical pendulum", Supercond. Sci. Technol. 3, 591 (1990).
"""

from __future__ import annotations

import math

import numpy as np

from matdb.physics.fields._common import (
    EDGE_ROUNDING,
    EDGE_SNAP,
    _FOUR_PI,
    _as_rows,
    _chunks,
    _same_count,
)

__all__ = ["CuboidSet", "cuboid_B"]


def _snap(values: np.ndarray, tol: float) -> np.ndarray:
    """Replace values closer than ``tol`` by one representative (the first seen)."""
    flat = values.ravel()
    key = np.round(flat / tol)
    _, first, inverse = np.unique(key, return_index=True, return_inverse=True)
    return flat[first][inverse.ravel()].reshape(values.shape)


def _log_term(t: np.ndarray, r: np.ndarray, rho2: np.ndarray, ell: float) -> np.ndarray:
    """``ln(t + r)`` with ``r = sqrt(t^2 + rho2)``, cancellation-free, finite everywhere.

    For ``t < 0`` the identity ``t + r = rho2 / (r - t)`` avoids the cancellation. On the
    line ``rho2 = 0`` (to within ``EDGE_SNAP * ell``, so that rounding of the inputs does
    not matter) the divergent ``ln(rho2)`` is evaluated at ``rho = ell``, the rounding
    length: for points on an edge's extension the substitution cancels exactly between
    the two corners at the ends of the edge, and on the edge itself it replaces the
    logarithmic edge singularity by its value at ``ell``. At a corner the term is
    ``ln(ell)``.
    """
    neg = t < 0
    arg = np.abs(t)
    arg += r  # |t| + r
    np.divide(rho2, arg, out=arg, where=neg)
    with np.errstate(divide="ignore"):
        out = np.log(arg)
    snap = EDGE_SNAP * ell
    near = rho2 <= snap * snap
    if np.any(near):
        tb, rb = t[near], r[near]
        log_ell = math.log(ell)
        with np.errstate(divide="ignore", invalid="ignore"):
            s = np.abs(tb) + rb
            line = np.where(tb < 0, 2.0 * log_ell - np.log(s), np.log(s))
        out[near] = np.where(rb <= snap, log_ell, line)
    return out


def _atan_term(a: np.ndarray, b: np.ndarray, c: np.ndarray, r: np.ndarray) -> np.ndarray:
    """``atan(a b / (c r))`` without a division; 0 where ``c r = 0``.

    Written as ``arctan2(sign(c) a b, |c| r)``, equal to the arctangent wherever ``c r``
    is non-zero; at ``c = 0`` it gives 0, the mean of the two one-sided limits.
    """
    num = a * b
    num *= np.sign(c)
    den = np.abs(c)
    den *= r
    return np.arctan2(num, den, out=num)


class CuboidSet:
    """A set of uniformly polarised, axis-aligned cuboids, ready for repeated evaluation.

    The corners of all cuboids are merged once (coordinates closer than ``1e-12`` of the
    set's extent are one corner), each distinct corner carrying its net signed
    polarisation coefficient; corners whose coefficients cancel are dropped.

    Parameters
    ----------
    dimensions : array_like, shape (m, 3)
        Side lengths along x, y, z [m].
    polarizations : array_like, shape (m, 3)
        Polarisation vectors J = mu0 M [T].
    positions : array_like, shape (m, 3)
        Centres [m].

    Notes
    -----
    With corner ``c`` of a cuboid, ``(u, v, w) = x - c``, ``r = |x - c|`` and the sign
    ``s_c = prod(+1 upper, -1 lower)`` over the three axes, the surface-charge solution of
    [1]_ (generalised to the three polarisation directions by cyclic permutation of
    the axes) is

    .. math::

        \\mu_0 H = \\frac{1}{4\\pi} \\sum_c s_c\\, T(u, v, w)\\, J,\\qquad
        T = \\begin{pmatrix}
            \\arctan\\frac{vw}{ur} & -\\ln(w+r) & -\\ln(v+r) \\\\
            -\\ln(w+r) & \\arctan\\frac{uw}{vr} & -\\ln(u+r) \\\\
            -\\ln(v+r) & -\\ln(u+r) & \\arctan\\frac{uv}{wr}
        \\end{pmatrix}

    and ``B = mu0 H + J`` inside. Where ``c r = 0`` the arctangent is the mean of its
    one-sided limits, so on a charged face this gives the mean of the two sides;
    :class:`MagnetSet` adds J and moves face values to the owning magnet's side.

    References
    ----------
    .. [1] R. Engel-Herbert and T. Hesjedal, J. Appl. Phys. 97, 074504 (2005).
    """

    def __init__(self, dimensions, polarizations, positions):
        dims = _as_rows(dimensions, 3, "dimensions", positive=True)
        pols = _as_rows(polarizations, 3, "polarizations")
        pos = _as_rows(positions, 3, "positions")
        m = _same_count({"dimensions": dims, "polarizations": pols, "positions": pos})
        self.count = m
        if m == 0:
            self.corners = np.zeros((0, 3))
            self.coefficients = np.zeros((0, 3))
            self.edge_length = 1.0
            self.lo = self.hi = np.zeros((0, 3))
            self.polarizations = pols
            return
        lo = pos - dims / 2.0
        hi = pos + dims / 2.0
        extent = float(max(np.max(np.abs(lo)), np.max(np.abs(hi)), np.max(dims)))
        tol = 1e-12 * extent
        # snap every coordinate per axis so shared corners and faces are bit-identical
        both = np.stack([lo, hi], axis=1)  # (m, 2, 3)
        for ax in range(3):
            both[:, :, ax] = _snap(both[:, :, ax], tol)
        lo, hi = both[:, 0, :], both[:, 1, :]
        # 8 corners per cuboid: index bits (ix, iy, iz), 1 = upper
        bits = np.array([[(k >> 2) & 1, (k >> 1) & 1, k & 1] for k in range(8)])  # (8,3)
        corners = np.where(bits[None, :, :] == 1, hi[:, None, :], lo[:, None, :])  # (m,8,3)
        signs = np.prod(np.where(bits == 1, 1.0, -1.0), axis=1)  # (8,)
        coeffs = signs[None, :, None] * pols[:, None, :]  # (m,8,3)
        corners = corners.reshape(-1, 3)
        coeffs = coeffs.reshape(-1, 3)
        uniq, inverse = np.unique(corners, axis=0, return_inverse=True)
        net = np.zeros((uniq.shape[0], 3))
        np.add.at(net, inverse.ravel(), coeffs)
        jmax = float(np.max(np.abs(pols))) if pols.size else 0.0
        keep = np.any(np.abs(net) > 1e-13 * max(jmax, 1e-300), axis=1)
        self.corners = uniq[keep]
        self.coefficients = net[keep]
        self.edge_length = EDGE_ROUNDING * float(np.min(hi - lo))  # rounding length [m]
        self.lo = lo
        self.hi = hi
        self.polarizations = pols

    # -- field ---------------------------------------------------------------
    def mu0_h_mean(self, p: np.ndarray, atan: bool = True, log: bool = True) -> np.ndarray:
        """mu0 H [T] at points ``p`` (n, 3), the mean of the one-sided limits on faces.

        ``atan`` / ``log`` select the bounded diagonal part (arctangents) and the
        off-diagonal part (logarithms, divergent on edge lines) of the corner sum.
        """
        out = np.zeros_like(p)
        if self.corners.shape[0] == 0 or p.shape[0] == 0:
            return out
        for sl in _chunks(p.shape[0], self.corners.shape[0]):
            out[sl] = self._mu0_h(p[sl], atan, log)
        return out

    def _mu0_h(self, p: np.ndarray, atan: bool = True, log: bool = True) -> np.ndarray:
        c = self.corners
        C = self.coefficients
        u = p[:, 0:1] - c[None, :, 0]
        v = p[:, 1:2] - c[None, :, 1]
        w = p[:, 2:3] - c[None, :, 2]
        uu, vv, ww = u * u, v * v, w * w
        r = uu + vv
        r += ww
        np.sqrt(r, out=r)
        cx, cy, cz = C[:, 0], C[:, 1], C[:, 2]
        nx, ny, nz = np.any(cx != 0), np.any(cy != 0), np.any(cz != 0)
        bx = np.zeros(p.shape[0])
        by = np.zeros(p.shape[0])
        bz = np.zeros(p.shape[0])
        if atan and nx:
            bx += _atan_term(v, w, u, r) @ cx
        if atan and ny:
            by += _atan_term(u, w, v, r) @ cy
        if atan and nz:
            bz += _atan_term(u, v, w, r) @ cz
        if not log:
            return np.stack([bx, by, bz], axis=1) / _FOUR_PI
        if nx or ny:  # ln(w + r): couples x and y
            lw = _log_term(w, r, uu + vv, self.edge_length)
            bx -= lw @ cy
            by -= lw @ cx
        if nx or nz:  # ln(v + r): couples x and z
            lv = _log_term(v, r, uu + ww, self.edge_length)
            bx -= lv @ cz
            bz -= lv @ cx
        if ny or nz:  # ln(u + r): couples y and z
            lu = _log_term(u, r, vv + ww, self.edge_length)
            by -= lu @ cz
            bz -= lu @ cy
        return np.stack([bx, by, bz], axis=1) / _FOUR_PI


def cuboid_B(observers, dimensions, polarizations, positions) -> np.ndarray:
    """Flux density of uniformly polarised, axis-aligned cuboids, summed.

    Parameters
    ----------
    observers : array_like, shape (n, 3)
        Field points [m].
    dimensions : array_like, shape (m, 3)
        Side lengths along x, y, z [m].
    polarizations : array_like, shape (m, 3)
        Polarisation J = mu0 M of each cuboid, any direction [T].
    positions : array_like, shape (m, 3)
        Centres [m].

    Returns
    -------
    ndarray, shape (n, 3)
        B [T], including J inside the magnets; finite everywhere (see module notes).

    Notes
    -----
    Surface-charge closed form of Engel-Herbert and Hesjedal [1]_, the same
    as Yang et al. [2]_: for polarisation along z, with corners ``x_i, y_j, z_k``
    (``i, j, k`` = 1 lower, 2 upper) and ``r_ijk`` the distance to the corner,

    .. math::

        B_x = -\\frac{J}{4\\pi} \\sum (-1)^{i+j+k} \\ln(y - y_j + r_{ijk}),\\quad
        B_y = -\\frac{J}{4\\pi} \\sum (-1)^{i+j+k} \\ln(x - x_i + r_{ijk}),

        B_z = \\frac{J}{4\\pi} \\sum (-1)^{i+j+k}
              \\arctan\\frac{(x - x_i)(y - y_j)}{(z - z_k) r_{ijk}} + J\\,[\\text{inside}],

    and the x and y polarisations follow by cyclic permutation of the axes. Distinct
    corners are evaluated once; see :class:`CuboidSet`.

    References
    ----------
    .. [1] R. Engel-Herbert and T. Hesjedal, J. Appl. Phys. 97, 074504 (2005).
    .. [2] Z. J. Yang et al., Supercond. Sci. Technol. 3, 591 (1990).
    """
    dims = _as_rows(dimensions, 3, "dimensions", positive=True)
    pols = _as_rows(polarizations, 3, "polarizations")
    pos = _as_rows(positions, 3, "positions")
    m = _same_count({"dimensions": dims, "polarizations": pols, "positions": pos})
    # lazy: MagnetSet is built on this module (the import would be circular at load time)
    from matdb.physics.fields.magnet_set import MagnetSet

    return MagnetSet(["cuboid"] * m, dims, pols, pos).B(observers)

