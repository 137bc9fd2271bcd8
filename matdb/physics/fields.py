"""Closed-form magnetic flux density of permanent magnets: bare vectorised cores.

Everything here is SI: observers ``(n, 3)`` in metres, magnet sizes and centres in
metres, polarisations ``J = mu0 M`` in tesla (for a permanent magnet ``|J| = Br``),
dipole moments in A m^2, and every function returns ``B`` of shape ``(n, 3)`` in tesla.

The field includes the polarisation inside the magnets (``B = mu0 H + J``), so the
functions can be sampled inside magnets (the demagnetisation check does). They return
finite numbers everywhere:

* strictly inside or outside a magnet the closed forms are exact;
* on a face the value is the limit from inside the magnet (the normal component of B is
  continuous there anyway; the tangential one takes the inside value); where magnets
  touch, from inside the first one listed (see :class:`MagnetSet`);
* on an edge or corner the part of B that stays bounded (for a cuboid the arctangent
  terms, which carry the component along each polarisation component; Bz of a
  cylinder) is the limit from inside the magnet along the bisector of its faces there;
  the part that diverges logarithmically on an ideal sharp edge (the logarithm terms;
  B_rho of a cylinder on its rim) is evaluated at a rounding length of
  :data:`EDGE_ROUNDING` (1 %) of the magnet's smallest dimension instead, the way
  published treatments mask those terms but independent of the length unit;
* points closer than 1e-9 of the magnet size to a face, edge or corner count as on it,
  so rounding of the inputs does not change the result.

Scaling every length by one factor leaves every value unchanged, edges included.

Uniformly polarised, axis-aligned cuboids use the surface-charge solution of
Engel-Herbert and Hesjedal [1]_ (equivalently Yang et al. [2]_): each component is a
signed sum over the cuboid's eight corners of one arctangent or one logarithm. Because
the sum is over corners, touching neighbours share corners, and :class:`CuboidSet`
evaluates each distinct corner once, with its net signed coefficient (corners whose
coefficients cancel are dropped).

Axially polarised cylinders use the current-sheet solution of Derby and Olbert [3]_
with Bulirsch's generalised complete elliptic integral ``cel`` [4]_; rings are an outer
cylinder minus an inner one.

References
----------
.. [1] R. Engel-Herbert and T. Hesjedal, "Calculation of the magnetic stray field of a
   uniaxial magnetic domain", J. Appl. Phys. 97, 074504 (2005).
.. [2] Z. J. Yang, T. H. Johansen, H. Bratsberg, G. Helgesen and A. T. Skjeltorp,
   "Potential and force between a magnet and a bulk Y1Ba2Cu3O7-d superconductor studied
   by a mechanical pendulum", Supercond. Sci. Technol. 3, 591 (1990).
.. [3] N. Derby and S. Olbert, "Cylindrical magnets and ideal solenoids",
   Am. J. Phys. 78, 229-235 (2010).
.. [4] R. Bulirsch, "Numerical calculation of elliptic integrals and elliptic
   functions. III", Numer. Math. 13, 305-315 (1969).
"""

from __future__ import annotations

import math

import numpy as np

from matdb.errors import InputError
from matdb.constants import MU0

__all__ = [
    "CuboidSet",
    "MagnetSet",
    "cel",
    "cuboid_B",
    "cylinder_B",
    "ring_B",
    "dipole_B",
]

_FOUR_PI = 4.0 * math.pi
MU0_OVER_4PI = MU0 / _FOUR_PI  # [T m / A]

# Number of (point x source) pairs evaluated at once. Temporaries of 128 kB stay below
# the allocator's mmap threshold and in cache; larger chunks are measurably slower.
_CHUNK_ELEMENTS = 1 << 14

#: On an edge or corner line the logarithmically divergent term is evaluated at this
#: fraction of the smallest dimension of the magnets (an edge rounding about the size of
#: a real chamfer), which keeps the value finite and independent of the length unit.
EDGE_ROUNDING = 0.01
#: Points closer to an edge line than this fraction of the rounding length count as on it
#: (1e-9 of the magnet size: far below any meaningful distance, far above rounding).
EDGE_SNAP = 1e-7


# ---------------------------------------------------------------------------
# input checking
# ---------------------------------------------------------------------------
def _as_points(observers, field: str = "observers") -> np.ndarray:
    p = np.asarray(observers, dtype=float)
    if p.ndim == 1 and p.shape[0] == 3:
        p = p.reshape(1, 3)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(f"{field}: expected an array of shape (n, 3) in metres, got shape {p.shape}")
    if not np.all(np.isfinite(p)):
        raise InputError(f"{field}: expected finite coordinates, got NaN or inf")
    return p


def _as_rows(values, width: int, field: str, *, positive: bool = False) -> np.ndarray:
    a = np.asarray(values, dtype=float)
    if width == 1:
        a = np.atleast_1d(a)
        if a.ndim != 1:
            raise InputError(f"{field}: expected a 1-d array, got shape {a.shape}")
    else:
        if a.ndim == 1 and a.shape[0] == width:
            a = a.reshape(1, width)
        if a.ndim != 2 or a.shape[1] != width:
            raise InputError(f"{field}: expected an array of shape (m, {width}), got shape {a.shape}")
    if not np.all(np.isfinite(a)):
        raise InputError(f"{field}: expected finite values, got NaN or inf")
    if positive and not np.all(a > 0):
        raise InputError(f"{field}: expected positive lengths in metres")
    return a


def _same_count(field_arrays: dict[str, np.ndarray]) -> int:
    counts = {k: v.shape[0] for k, v in field_arrays.items()}
    m = set(counts.values())
    if len(m) != 1:
        raise InputError(
            "magnets: expected the same number of rows in "
            + ", ".join(f"{k} ({n})" for k, n in counts.items())
        )
    return m.pop()


def _chunks(n_points: int, n_sources: int):
    step = max(1, _CHUNK_ELEMENTS // max(1, n_sources))
    for start in range(0, n_points, step):
        yield slice(start, min(n_points, start + step))


# ---------------------------------------------------------------------------
# cuboids
# ---------------------------------------------------------------------------
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
    return MagnetSet(["cuboid"] * m, dims, pols, pos).B(observers)


# ---------------------------------------------------------------------------
# Bulirsch's cel and cylinders
# ---------------------------------------------------------------------------
def cel(kc, p, c, s, *, rtol: float = 1e-8, max_iter: int = 40) -> np.ndarray:
    """Bulirsch's generalised complete elliptic integral, vectorised.

    .. math::

        \\mathrm{cel}(k_c, p, c, s) = \\int_0^{\\pi/2}
        \\frac{c \\cos^2\\varphi + s \\sin^2\\varphi}
             {(\\cos^2\\varphi + p \\sin^2\\varphi)\\sqrt{\\cos^2\\varphi + k_c^2 \\sin^2\\varphi}}
        \\, d\\varphi

    Parameters
    ----------
    kc : array_like
        Complementary modulus, non-zero [1].
    p, c, s : array_like
        Parameters, broadcast against ``kc``; ``p`` non-zero [1].
    rtol : float
        Relative tolerance of the arithmetic-geometric iteration, run on the whole array
        until every element has converged. The iteration converges quadratically, so
        Bulirsch's choice of the square root of the working precision gives results
        accurate to the working precision.

    Returns
    -------
    ndarray
        The integral; NaN where ``kc == 0`` or ``p == 0`` (divergent or undefined there).

    References
    ----------
    .. [1] R. Bulirsch, Numer. Math. 13, 305-315 (1969), algorithm ``cel``; in the form
       given in the appendix of N. Derby and S. Olbert, Am. J. Phys. 78, 229 (2010).
    """
    kc, p, c, s = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (kc, p, c, s)))
    bad = (kc == 0) | (p == 0)
    any_bad = bool(np.any(bad))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if any_bad:
            kc = np.where(bad, 1.0, kc)
            p = np.where(bad, 1.0, p)
        k = np.abs(kc)
        if np.all(p > 0):
            pp = np.sqrt(p)
            ss = s / pp
            cc = np.array(c, dtype=float, copy=True)
        else:  # Bulirsch's transformation for p < 0 (Cauchy principal value)
            pos = p > 0
            pp_pos = np.sqrt(np.abs(p))
            f = k * k
            q = (1.0 - f) * (s - c * p)
            g = 1.0 - p
            f = f - p
            pp_neg = np.sqrt(np.abs(f / g))
            cc_neg = (c - s) / g
            ss_neg = -q / (g * g * pp_neg) + cc_neg * pp_neg
            pp = np.where(pos, pp_pos, pp_neg)
            cc = np.where(pos, c, cc_neg)
            ss = np.where(pos, s / pp_pos, ss_neg)
        em = np.ones_like(k)
        f = cc.copy()
        cc += ss / pp
        g = k / pp
        ss += f * g
        ss *= 2.0
        pp += g
        g = em
        em = k + em
        kk = k
        for _ in range(max_iter):
            if not np.any(np.abs(g - k) > g * rtol):
                break
            k = 2.0 * np.sqrt(kk)
            kk = k * em
            f = cc.copy()
            cc += ss / pp
            g = kk / pp
            ss += f * g
            ss *= 2.0
            pp += g
            g = em
            em = k + em
        out = 0.5 * math.pi * (ss + cc * em) / (em * (em + pp))
    if any_bad:
        out = np.where(bad, np.nan, out)
    return out


def _cyl_core(p: np.ndarray, radius, half_h, jz, centre, ell) -> np.ndarray:
    """B of axially polarised cylinders; p (n,3); per-source arrays (m,).

    On the side wall (``rho == a`` exactly) the formula with ``gamma = 0`` gives the mean
    of the inside and outside values of Bz. On the rim (``k = 0``) the divergent term is
    evaluated at the distance ``ell`` (m,) from the rim, i.e. at ``k = ell / (2 a)``.
    """
    x = p[:, 0:1] - centre[None, :, 0]
    y = p[:, 1:2] - centre[None, :, 1]
    z = p[:, 2:3] - centre[None, :, 2]
    a = radius[None, :]
    b = half_h[None, :]
    rho = np.hypot(x, y)
    zp = z + b
    zm = z - b
    sum2 = (a + rho) ** 2
    dif2 = (a - rho) ** 2
    dp = np.sqrt(zp * zp + sum2)
    dm = np.sqrt(zm * zm + sum2)
    kp = np.sqrt(zp * zp + dif2) / dp
    km = np.sqrt(zm * zm + dif2) / dm
    tol = EDGE_SNAP * ell[None, :]
    on_wall = np.abs(a - rho) <= tol
    gamma = np.where(on_wall, 0.0, (a - rho) / (a + rho))
    # rim: kc == 0 only where rho == a and z == +-b; the divergent term is masked
    k_rim = ell[None, :] / (2.0 * a)
    kp_ok = kp > EDGE_SNAP * k_rim  # off the rim (k is the distance to the rim / 2a)
    km_ok = km > EDGE_SNAP * k_rim
    kp_s = np.where(kp_ok, kp, k_rim)
    km_s = np.where(km_ok, km, k_rim)
    one = np.ones_like(kp_s)
    p1p = cel(kp_s, one, one, -one)
    p1m = cel(km_s, one, one, -one)
    g2 = np.where(on_wall, 1.0, gamma * gamma)
    gs = np.where(on_wall, 1.0, gamma)  # on the wall cel(kc, 0, 1, 0) = cel(kc, 1, 1, 1)
    p2p = cel(kp_s, g2, one, gs)
    p2m = cel(km_s, g2, one, gs)
    alp = a / dp * p1p
    alm = a / dm * p1m
    bep = np.where(kp_ok, zp / dp * p2p, 0.0)  # z_+ = 0 on the rim: beta K -> 0
    bem = np.where(km_ok, zm / dm * p2m, 0.0)
    j = jz[None, :]
    b_rho = j / math.pi * (alp - alm)
    b_z = j / math.pi * a / (a + rho) * (bep - bem)
    with np.errstate(divide="ignore", invalid="ignore"):
        cphi = np.where(rho > 0, x / rho, 0.0)
        sphi = np.where(rho > 0, y / rho, 0.0)
    bx = np.sum(b_rho * cphi, axis=1)
    by = np.sum(b_rho * sphi, axis=1)
    bz = np.sum(b_z, axis=1)
    return np.stack([bx, by, bz], axis=1)


def _cyl_sum(p: np.ndarray, radii, half_h, jz, positions, ell) -> np.ndarray:
    out = np.zeros_like(p)
    m = radii.shape[0]
    if m == 0 or p.shape[0] == 0:
        return out
    for sl in _chunks(p.shape[0], m):
        out[sl] = _cyl_core(p[sl], radii, half_h, jz, positions, ell)
    return out


def cylinder_B(observers, diameters, heights, polarizations_z, positions) -> np.ndarray:
    """Flux density of axially polarised solid cylinders, summed.

    Parameters
    ----------
    observers : array_like, shape (n, 3)
        Field points [m].
    diameters, heights : array_like, shape (m,)
        Diameter and height (along z) of each cylinder [m].
    polarizations_z : array_like, shape (m,)
        Signed polarisation J_z = mu0 M_z along +z [T].
    positions : array_like, shape (m, 3)
        Centres [m].

    Returns
    -------
    ndarray, shape (n, 3)
        B [T], including J inside; finite everywhere (the log-divergent term on the rim
        is masked; on the side wall Bz is the inside limit).

    Notes
    -----
    The closed form of Derby and Olbert [1]_ in terms of Bulirsch's ``cel``: with radius
    a, half-height b, (rho, z) measured from the centre, ``z_+- = z +- b`` and, for each
    of ``z_+`` and ``z_-``, ``alpha = a / sqrt(z^2 + (rho + a)^2)``,
    ``beta = z / sqrt(z^2 + (rho + a)^2)``, ``gamma = (a - rho)/(a + rho)``,
    ``k = sqrt((z^2 + (a - rho)^2)/(z^2 + (a + rho)^2))`` (the complementary modulus),

    .. math::

        B_\\rho = \\frac{J}{\\pi}\\left[\\alpha_+ \\mathrm{cel}(k_+, 1, 1, -1)
                  - \\alpha_- \\mathrm{cel}(k_-, 1, 1, -1)\\right],

        B_z = \\frac{J}{\\pi}\\frac{a}{a + \\rho}\\left[
              \\beta_+ \\mathrm{cel}(k_+, \\gamma^2, 1, \\gamma)
              - \\beta_- \\mathrm{cel}(k_-, \\gamma^2, 1, \\gamma)\\right],

    which is the exact B of the equivalent current sheet (inside and outside).

    References
    ----------
    .. [1] N. Derby and S. Olbert, "Cylindrical magnets and ideal solenoids",
       Am. J. Phys. 78, 229-235 (2010).
    """
    d = _as_rows(diameters, 1, "diameters", positive=True)
    h = _as_rows(heights, 1, "heights", positive=True)
    j = _as_rows(polarizations_z, 1, "polarizations_z")
    pos = _as_rows(positions, 3, "positions")
    _same_count({"diameters": d, "heights": h, "polarizations_z": j, "positions": pos})
    m = d.shape[0]
    pols = np.column_stack([np.zeros(m), np.zeros(m), j])
    return MagnetSet(["cylinder"] * m, np.column_stack([d, h]), pols, pos).B(observers)


def ring_B(observers, outer_diameters, inner_diameters, heights, polarizations_z, positions) -> np.ndarray:
    """Flux density of axially polarised rings (outer cylinder minus inner), summed.

    Parameters
    ----------
    observers : array_like, shape (n, 3)
        Field points [m].
    outer_diameters, inner_diameters, heights : array_like, shape (m,)
        Outer and inner diameter (0 <= inner < outer) and height [m].
    polarizations_z : array_like, shape (m,)
        Signed polarisation J_z [T].
    positions : array_like, shape (m, 3)
        Centres [m].

    Returns
    -------
    ndarray, shape (n, 3)
        B [T]; on both side walls Bz is the limit from inside the ring material.

    References
    ----------
    .. [1] N. Derby and S. Olbert, Am. J. Phys. 78, 229-235 (2010) (superposition of
       two of their cylinders, the inner one with -J).
    """
    do = _as_rows(outer_diameters, 1, "outer_diameters", positive=True)
    di = _as_rows(inner_diameters, 1, "inner_diameters")
    h = _as_rows(heights, 1, "heights", positive=True)
    j = _as_rows(polarizations_z, 1, "polarizations_z")
    pos = _as_rows(positions, 3, "positions")
    _same_count(
        {"outer_diameters": do, "inner_diameters": di, "heights": h, "polarizations_z": j, "positions": pos}
    )
    if np.any(di < 0) or np.any(di >= do):
        raise InputError("inner_diameters: expected 0 <= inner diameter < outer diameter")
    m = do.shape[0]
    pols = np.column_stack([np.zeros(m), np.zeros(m), j])
    return MagnetSet(["ring"] * m, np.column_stack([do, di, h]), pols, pos).B(observers)


# ---------------------------------------------------------------------------
# mixed sets: superposition, J inside, values on faces
# ---------------------------------------------------------------------------
_KINDS = ("cuboid", "cylinder", "ring")


def _interval_weight(d: np.ndarray, half: np.ndarray, tol) -> np.ndarray:
    """1 inside ``|d| < half``, 1/2 within ``tol`` of the end points, 0 outside."""
    ad = np.abs(d)
    return np.where(np.abs(ad - half) <= tol, 0.5, np.where(ad < half, 1.0, 0.0))


class MagnetSet:
    """Uniformly polarised magnets of mixed shapes, evaluated together.

    The order of the magnets is their priority: a point on the boundary of several magnets
    belongs to the first one (its *owner*).

    Parameters
    ----------
    kinds : sequence of str
        "cuboid", "cylinder" or "ring" per magnet.
    sizes : sequence of tuples
        cuboid (x, y, height); cylinder (diameter, height); ring (outer diameter, inner
        diameter, height) [m].
    polarizations : array_like, shape (m, 3)
        J = mu0 M [T]; cylinders and rings must be polarised along z.
    positions : array_like, shape (m, 3)
        Centres [m].

    Notes
    -----
    The closed forms (Engel-Herbert and Hesjedal [1]_ for cuboids, Derby and Olbert [2]_
    for cylinders) are exact off the magnets' surfaces. On a surface they give the mean
    of the two one-sided limits ``B_mean``; across a face with outward normal ``n`` the
    normal component of B is continuous and the tangential one jumps by the tangential
    part of ``J_owner - J_other`` (``mu0 H`` tangential is continuous there, Jackson [3]_
    section 5.9). The value returned on a face is the limit from inside the owner:

    .. math::

        B = B_{mean} + \\tfrac12 \\left[(J_o - J_n) - ((J_o - J_n)\\cdot n)\\, n\\right]

    on a face of the owner.
    ``J_n`` is the mean polarisation just across the face (a touching neighbour, an image
    magnet, or none). On an edge or corner of the owner the bounded part of B is the limit
    from inside the owner along the bisector of its faces there, and the part that
    diverges logarithmically on an ideal sharp edge is regularised (:data:`EDGE_ROUNDING`).

    References
    ----------
    .. [1] R. Engel-Herbert and T. Hesjedal, J. Appl. Phys. 97, 074504 (2005).
    .. [2] N. Derby and S. Olbert, Am. J. Phys. 78, 229-235 (2010).
    .. [3] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999).
    """

    def __init__(self, kinds, sizes, polarizations, positions):
        kinds = [str(k) for k in kinds]
        m = len(kinds)
        for k in kinds:
            if k not in _KINDS:
                raise InputError(f"shape: expected one of {', '.join(_KINDS)}, got {k!r}")
        sizes = list(sizes)
        if len(sizes) != m:
            raise InputError(f"sizes: expected {m} sizes, got {len(sizes)}")
        J = _as_rows(np.reshape(np.asarray(polarizations, dtype=float), (-1, 3)), 3, "polarizations")
        pos = _as_rows(np.reshape(np.asarray(positions, dtype=float), (-1, 3)), 3, "positions")
        _same_count({"shapes": np.zeros(m), "polarizations": J, "positions": pos})
        self.count = m
        self.J = J
        self.positions = pos
        self.is_cuboid = np.array([k == "cuboid" for k in kinds], dtype=bool)
        self.cub_idx = np.nonzero(self.is_cuboid)[0]
        self.cyl_idx = np.nonzero(~self.is_cuboid)[0]
        lo = np.zeros((m, 3))
        hi = np.zeros((m, 3))
        radius = np.zeros(m)
        inner = np.zeros(m)
        half_h = np.zeros(m)
        for i, (k, sz) in enumerate(zip(kinds, sizes)):
            sz = np.asarray(sz, dtype=float).ravel()
            want = 3 if k != "cylinder" else 2
            if sz.shape[0] != want or not np.all(np.isfinite(sz)):
                raise InputError(f"sizes: expected {want} finite lengths for a {k}, got {sz.tolist()}")
            if k == "cuboid":
                if not np.all(sz > 0):
                    raise InputError(f"dimensions: expected positive lengths in metres, got {sz.tolist()}")
                lo[i], hi[i] = pos[i] - sz / 2, pos[i] + sz / 2
                continue
            if not (sz[0] > 0 and sz[-1] > 0):
                raise InputError(f"sizes: expected positive diameter and height for a {k}, got {sz.tolist()}")
            if k == "ring" and not (0 <= sz[1] < sz[0]):
                raise InputError("inner_diameters: expected 0 <= inner diameter < outer diameter")
            if J[i, 0] != 0 or J[i, 1] != 0:
                raise InputError(f"polarizations: a {k} is polarised along z, got {J[i].tolist()}")
            radius[i] = sz[0] / 2
            inner[i] = sz[1] / 2 if k == "ring" else 0.0
            half_h[i] = sz[-1] / 2
            lo[i] = pos[i] - (radius[i], radius[i], half_h[i])
            hi[i] = pos[i] + (radius[i], radius[i], half_h[i])
        self.cuboids = None
        if self.cub_idx.size:
            ci = self.cub_idx
            self.cuboids = CuboidSet(hi[ci] - lo[ci], J[ci], pos[ci])
            lo[ci], hi[ci] = self.cuboids.lo, self.cuboids.hi  # snapped, shared faces identical
        self.lo, self.hi = lo, hi
        self.radius, self.inner, self.half_h = radius, inner, half_h
        # rim rounding length per cylinder/ring: a fraction of its smallest dimension
        wall = np.where(inner > 0, radius - inner, 2.0 * radius)
        self.ell = EDGE_ROUNDING * np.minimum(wall, 2.0 * half_h)
        if m:
            self.glo, self.ghi = lo.min(axis=0), hi.max(axis=0)
            extent = float(max(np.max(np.abs(lo)), np.max(np.abs(hi)), np.max(hi - lo)))
        else:
            self.glo = self.ghi = np.zeros(3)
            extent = 1.0
        # distances below tol (1e-9 of the smallest dimension) count as on a face
        self.tol = EDGE_SNAP * self.ell
        if self.cub_idx.size:
            ci = self.cub_idx
            self.tol[ci] = EDGE_SNAP * self.cuboids.edge_length
            # face planes of the cuboids per axis: observers this close are put on them
            self._planes = [np.unique(np.concatenate([lo[ci, ax], hi[ci, ax]])) for ax in range(3)]
            self._plane_tol = EDGE_SNAP * self.cuboids.edge_length
        else:
            self._planes = None
        self._eps = 10.0 * float(np.max(self.tol)) if m else 0.0  # step across a face
        self.glo = self.glo - self._eps  # candidate box, generous by the face tolerance
        self.ghi = self.ghi + self._eps
        del extent
        holes = self.cyl_idx[inner[self.cyl_idx] > 0]
        self._holes = holes

    # -- geometry ----------------------------------------------------------------
    def weights(self, q: np.ndarray) -> np.ndarray:
        """Mean indicator (c, m): 1 inside, 1/2 on a face, 1/4 on an edge, 0 outside."""
        out = np.zeros((q.shape[0], self.count))
        if self.cub_idx.size:
            ci = self.cub_idx
            # exact comparisons against the snapped faces
            d = q[:, None, :]
            inside = (d > self.lo[None, ci]) & (d < self.hi[None, ci])
            on = (d == self.lo[None, ci]) | (d == self.hi[None, ci])
            w = np.where(inside, 1.0, np.where(on, 0.5, 0.0))
            out[:, ci] = np.prod(w, axis=2)
        if self.cyl_idx.size:
            k = self.cyl_idx
            dx = q[:, 0:1] - self.positions[None, k, 0]
            dy = q[:, 1:2] - self.positions[None, k, 1]
            dz = q[:, 2:3] - self.positions[None, k, 2]
            rho = np.hypot(dx, dy)
            tol = self.tol[None, k]
            wr = _interval_weight(rho, self.radius[None, k], tol)
            ri = self.inner[None, k]
            wr = wr - np.where(ri > 0, _interval_weight(rho, ri, tol), 0.0)
            out[:, k] = wr * _interval_weight(dz, self.half_h[None, k], tol)
        return out

    def owner(self, observers) -> np.ndarray:
        """Index of the first magnet containing each point (faces included), -1 outside."""
        p = self._snap_points(_as_points(observers))
        out = np.full(p.shape[0], -1, dtype=int)
        if self.count == 0:
            return out
        cand = np.nonzero(np.all((p >= self.glo) & (p <= self.ghi), axis=1))[0]
        for sl in _chunks(cand.size, self.count):
            idx = cand[sl]
            has = self.weights(p[idx]) > 0
            any_ = has.any(axis=1)
            out[idx[any_]] = np.argmax(has[any_], axis=1)
        return out

    # -- field -------------------------------------------------------------------
    def _snap_points(self, p: np.ndarray) -> np.ndarray:
        """Put coordinates within the face tolerance of a cuboid face plane on the plane."""
        if self._planes is None or p.shape[0] == 0:
            return p
        out = p.copy()
        for ax, planes in enumerate(self._planes):
            x = out[:, ax]
            i = np.searchsorted(planes, x)
            lo_p = planes[np.maximum(i - 1, 0)]
            hi_p = planes[np.minimum(i, planes.size - 1)]
            near_lo = np.abs(x - lo_p) <= self._plane_tol
            near_hi = np.abs(x - hi_p) <= self._plane_tol
            x[near_hi] = hi_p[near_hi]
            x[near_lo] = lo_p[near_lo]
        return out

    def B(self, observers) -> np.ndarray:
        """Flux density B [T] at ``observers`` (n, 3) [m], shape (n, 3)."""
        p = self._snap_points(_as_points(observers))
        out = np.zeros_like(p)
        if self.count == 0 or p.shape[0] == 0:
            return out
        if self.cuboids is not None:
            out += self.cuboids.mu0_h_mean(p)
        if self.cyl_idx.size:
            out += self._cyl_raw(p)
        self._add_inside(p, out)
        return out

    def _cyl_raw(self, p: np.ndarray) -> np.ndarray:
        """Cylinders and rings (Derby-Olbert B, mean of the two sides on the walls)."""
        k = self.cyl_idx
        out = _cyl_sum(p, self.radius[k], self.half_h[k], self.J[k, 2], self.positions[k], self.ell[k])
        hk = self._holes
        if hk.size:
            out += _cyl_sum(p, self.inner[hk], self.half_h[hk], -self.J[hk, 2], self.positions[hk], self.ell[hk])
        return out

    def _add_inside(self, p: np.ndarray, out: np.ndarray) -> None:
        cand = np.nonzero(np.all((p >= self.glo) & (p <= self.ghi), axis=1))[0]
        ci = self.cub_idx
        for sl in _chunks(cand.size, self.count):
            idx = cand[sl]
            q = p[idx]
            w = self.weights(q)
            if ci.size:  # cuboids: B = mu0 H + J (mean J on faces)
                out[idx] += w[:, ci] @ self.J[ci]
            has = w > 0
            any_ = has.any(axis=1)
            own = np.argmax(has, axis=1)
            w_own = w[np.arange(q.shape[0]), own]
            bnd = np.nonzero(any_ & (w_own < 1.0))[0]
            if bnd.size == 0:
                continue
            normals, valid = self._owner_faces(q[bnd], own[bnd])
            nf = valid.sum(axis=1)
            face = nf == 1
            if np.any(face):
                out[idx[bnd[face]]] += self._face_correction(q[bnd[face]], own[bnd[face]],
                                                             normals[face], valid[face])
            edge = nf >= 2
            if np.any(edge):
                out[idx[bnd[edge]]] = self._edge_value(q[bnd[edge]], own[bnd[edge]], normals[edge], valid[edge])

    def _edge_value(self, q: np.ndarray, own: np.ndarray, normals: np.ndarray, valid: np.ndarray) -> np.ndarray:
        """B on an edge or corner of the owner.

        The bounded part (the arctangent terms of cuboids, Bz of cylinders, J) is the limit
        approached from inside the owner along the bisector of its faces through the point;
        the part that diverges logarithmically on the edge line (logarithm terms, B_rho of
        cylinders) is taken at the point itself, regularised (see :data:`EDGE_ROUNDING`).
        """
        d_in = -np.sum(normals * valid[:, :, None], axis=1)
        d_in /= np.linalg.norm(d_in, axis=1)[:, None]
        # 1e-7 of the owner's smallest dimension: the bounded part is then within ~1e-8 of
        # its limit (it converges like delta ln delta) and well clear of rounding noise
        p_in = q + (100.0 * self.tol[own])[:, None] * d_in
        val = np.zeros_like(q)
        if self.cuboids is not None:
            ci = self.cub_idx
            val += self.cuboids.mu0_h_mean(p_in, log=False)
            val += self.cuboids.mu0_h_mean(q, atan=False)
            val += self.weights(p_in)[:, ci] @ self.J[ci]
        if self.cyl_idx.size:
            val[:, 2] += self._cyl_raw(p_in)[:, 2]
            val[:, :2] += self._cyl_raw(q)[:, :2]
        return val

    def _owner_faces(self, q: np.ndarray, own: np.ndarray):
        """Outward normals (b, 6, 3) of the owner's faces and which of them pass through q."""
        nb = q.shape[0]
        normals = np.zeros((nb, 6, 3))
        valid = np.zeros((nb, 6), dtype=bool)
        cub = self.is_cuboid[own]
        if np.any(cub):
            o = own[cub]
            qc = q[cub]
            for ax in range(3):
                lo_hit = qc[:, ax] == self.lo[o, ax]
                hi_hit = qc[:, ax] == self.hi[o, ax]
                valid[cub, 2 * ax] = lo_hit
                valid[cub, 2 * ax + 1] = hi_hit
            for ax in range(3):
                normals[:, 2 * ax, ax] = -1.0
                normals[:, 2 * ax + 1, ax] = 1.0
        cyl = ~cub
        if np.any(cyl):
            o = own[cyl]
            d = q[cyl] - self.positions[o]
            rho = np.hypot(d[:, 0], d[:, 1])
            with np.errstate(divide="ignore", invalid="ignore"):
                er = np.where(rho[:, None] > 0, np.column_stack([d[:, 0], d[:, 1], np.zeros_like(rho)])
                              / rho[:, None], 0.0)
            ncyl = np.zeros((o.size, 6, 3))
            ncyl[:, 0, 2] = -1.0
            ncyl[:, 1, 2] = 1.0
            ncyl[:, 2] = er
            ncyl[:, 3] = -er
            vcyl = np.zeros((o.size, 6), dtype=bool)
            tol = self.tol[o]
            on_z = np.abs(np.abs(d[:, 2]) - self.half_h[o]) <= tol
            vcyl[:, 0] = on_z & (d[:, 2] < 0)
            vcyl[:, 1] = on_z & (d[:, 2] > 0)
            vcyl[:, 2] = np.abs(rho - self.radius[o]) <= tol
            vcyl[:, 3] = (self.inner[o] > 0) & (np.abs(rho - self.inner[o]) <= tol)
            normals[cyl] = ncyl
            valid[cyl] = vcyl
        return normals, valid

    def _face_correction(self, q, own, normals, valid) -> np.ndarray:
        """Half the tangential jump of J toward the owner across the owner's face at q."""
        rows, faces = np.nonzero(valid)
        if rows.size == 0:
            return np.zeros_like(q)
        n = normals[rows, faces]
        j_n = self.weights(q[rows] + self._eps * n) @ self.J
        dj = self.J[own[rows]] - j_n
        dt = dj - np.sum(dj * n, axis=1)[:, None] * n
        corr = np.zeros_like(q)
        np.add.at(corr, rows, 0.5 * dt)
        return corr


# ---------------------------------------------------------------------------
# dipoles
# ---------------------------------------------------------------------------
def dipole_B(observers, moments, positions) -> np.ndarray:
    """Flux density of point dipoles, summed.

    Parameters
    ----------
    observers : array_like, shape (n, 3)
        Field points [m].
    moments : array_like, shape (m, 3)
        Dipole moments [A m^2].
    positions : array_like, shape (m, 3)
        Dipole positions [m].

    Returns
    -------
    ndarray, shape (n, 3)
        :math:`B = \\frac{\\mu_0}{4\\pi} \\frac{3 \\hat r (\\hat r \\cdot m) - m}{r^3}` [T];
        0 at the dipole itself (the singular point is masked).

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), eq. (5.56).
    """
    p = _as_points(observers)
    mom = _as_rows(moments, 3, "moments")
    pos = _as_rows(positions, 3, "positions")
    m = _same_count({"moments": mom, "positions": pos})
    out = np.zeros_like(p)
    if m == 0 or p.shape[0] == 0:
        return out
    for sl in _chunks(p.shape[0], m):
        d = p[sl][:, None, :] - pos[None, :, :]  # (c,m,3)
        r2 = np.einsum("cma,cma->cm", d, d)
        mdotr = np.einsum("cma,ma->cm", d, mom)
        with np.errstate(divide="ignore", invalid="ignore"):
            inv_r3 = np.where(r2 > 0, r2 ** -1.5, 0.0)
            inv_r5 = np.where(r2 > 0, r2 ** -2.5, 0.0)
        b = 3.0 * d * (mdotr * inv_r5)[:, :, None] - mom[None, :, :] * inv_r3[:, :, None]
        out[sl] = MU0_OVER_4PI * b.sum(axis=1)
    return out
