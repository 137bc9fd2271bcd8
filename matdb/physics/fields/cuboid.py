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


#: Corners whose logarithms are multiplied together before one logarithm is taken.
#: Arguments are normalised by the set's extent, so a product of this many stays far
#: inside the floating-point range (smallest factor ~1e-22 next to an edge line).
_LOG_GROUP = 8
_OTHERS = ((1, 2), (0, 2), (0, 1))  # the two axes other than 0, 1, 2
_N_SCRATCH = 10  # (corners, points) scratch arrays of one chunk
#: (point x corner) pairs per chunk: the kernel works in reused scratch arrays, so it takes
#: larger chunks than the other kernels (measured best at 64 k on a 2-core machine)
_CUBOID_CHUNK = 1 << 16


def _weigh(coefficients: np.ndarray, values: np.ndarray) -> np.ndarray:
    """``sum_g coefficients[g, ...] values[g, :]``: shape ``coefficients.shape[1:] + (n,)``.

    Several sets of coefficients are weighed one row at a time (vector-matrix products):
    a matrix product with a few rows is handed to the threaded BLAS, which on a busy
    machine measured several times more CPU time than these."""
    if coefficients.ndim == 1:
        return coefficients @ values
    if coefficients.ndim == 2 and coefficients.shape[1] == 2:  # one set, a log plan's pair
        return coefficients.T @ values
    flat = coefficients.reshape(coefficients.shape[0], int(np.prod(coefficients.shape[1:])))
    out = np.empty((flat.shape[1], values.shape[1]))
    for j in range(flat.shape[1]):
        np.dot(flat[:, j], values, out=out[j])
    return out.reshape(*coefficients.shape[1:], values.shape[1])


def _near_any(x: np.ndarray, values: np.ndarray, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """Which of ``x`` (n,) equal one of the sorted, distinct ``values`` (as ``np.isin``),
    and which lie within ``tol`` of one: one search for both."""
    i = np.searchsorted(values, x)
    lo = values[np.maximum(i - 1, 0)]
    hi = values[np.minimum(i, values.size - 1)]
    return (x == lo) | (x == hi), (np.abs(x - lo) <= tol) | (np.abs(x - hi) <= tol)


class _LogPlan:
    """How the corner logarithms along one axis combine into the two field components.

    The term ``-ln(t + r)`` with ``t`` along axis ``a`` enters component ``b`` with the
    corner coefficients of component ``c`` and component ``c`` with those of ``b``
    (``{a, b, c} = {0, 1, 2}``). Corners with the same pair of coefficients are grouped,
    and each group of up to :data:`_LOG_GROUP` corners costs one logarithm of the product
    of their arguments (``sum k ln x_i = k ln prod x_i``) instead of one per corner.
    """

    def __init__(self, axis: int, coefficients: np.ndarray):
        b, c = _OTHERS[axis]
        self.axis, self.others = axis, (b, c)
        K = coefficients[:, [c, b]]  # (m, 2[, k]): coefficient of output b, of output c
        m = K.shape[0]
        flat = K.reshape(m, int(np.prod(K.shape[1:])))  # several polarisation sets: a group shares every set's pair
        nz = np.nonzero(np.any(flat != 0, axis=1))[0]
        self.active = nz.size > 0
        if not self.active:
            return
        rows, inverse = np.unique(flat[nz], axis=0, return_inverse=True)
        rows = rows.reshape(-1, *K.shape[1:])
        inverse = inverse.ravel()
        cols, coef = [], []
        for g in range(rows.shape[0]):
            members = nz[inverse == g]
            for start in range(0, members.size, _LOG_GROUP):
                part = members[start:start + _LOG_GROUP]
                cols.append(np.concatenate([part, np.full(_LOG_GROUP - part.size, m)]))
                coef.append(rows[g])
        idx = np.array(cols).T  # (G, n_groups); index m is a factor of 1
        # keep only the rows some group needs (a group of one corner has no padding)
        used = int(np.max(np.sum(idx < m, axis=0)))
        self.index = [np.ascontiguousarray(row) for row in idx[:used]]
        self.coefficients = np.array(coef)  # (n_groups, 2[, k])


def _atan_difference(P: np.ndarray, D1: np.ndarray, D2: np.ndarray, branch: bool = True,
                     scratch: tuple | None = None) -> np.ndarray:
    """``atan(P / D1) - atan(P / D2)`` with one arctangent (``D1, D2`` non-zero).

    ``branch=False`` where ``D1 D2 > 0`` is known (no branch to take); ``D1`` is
    overwritten; ``scratch``: two arrays of the same shape for the temporaries.

    ``(x - y) / (1 + x y)`` is the tangent of the difference; where ``1 + x y < 0`` (the
    two angles on opposite sides, ``D1 D2 < 0``) the difference is that arctangent
    ``+- pi``, with the sign of ``x - y`` [1]_.

    References
    ----------
    .. [1] M. Abramowitz and I. A. Stegun, Handbook of Mathematical Functions, Dover
       (1965), eq. 4.4.34.
    """
    num, p2 = scratch if scratch is not None else (np.empty_like(P), np.empty_like(P))
    np.subtract(D2, D1, out=num)
    num *= P
    den = np.multiply(D1, D2, out=D1)
    d12 = den.copy() if branch else None
    den += np.multiply(P, P, out=p2)
    q = np.divide(num, den, out=num)  # = (x - y) / (1 + x y), both scaled by D1 D2
    np.arctan(q, out=q)
    if branch:
        # 1 + x y = den / (D1 D2) < 0 only where D1 D2 < 0 < den; there
        # sign(x - y) = -sign(num) = -sign(q)
        wrap = (d12 < 0) & (den > 0)
        if np.any(wrap):
            q -= np.pi * np.sign(q) * wrap
    return q


class _AtanPlan:
    """Corners paired along the lines of axis ``a`` for the arctangent terms.

    Corners sharing their two other coordinates have the same ``d_b d_c``; consecutive
    ones along the line with coefficients ``k1, k2`` contribute
    ``k1 (atan x1 - atan x2) + (k1 + k2) atan x2``, the difference taken with one
    arctangent (:func:`_atan_difference`); a single-layer array has exactly opposite
    coefficients at the top and bottom of each line, so no remainder.
    """

    def __init__(self, axis: int, corners: np.ndarray, k: np.ndarray):
        b, c = _OTHERS[axis]
        nz = np.nonzero(np.any(k.reshape(k.shape[0], int(np.prod(k.shape[1:]))) != 0, axis=1))[0]
        order = nz[np.lexsort((corners[nz, axis], corners[nz, c], corners[nz, b]))]
        kmax = float(np.max(np.abs(k))) if k.size else 0.0
        i1, i2, kp, single, ks = [], [], [], [], []
        j = 0
        while j < order.size:
            u = order[j]
            if j + 1 < order.size and np.all(corners[order[j + 1], [b, c]] == corners[u, [b, c]]):
                w = order[j + 1]
                i1.append(u)
                i2.append(w)
                kp.append(k[u])
                rest = k[u] + k[w]
                if np.any(np.abs(rest) > 1e-13 * kmax):
                    single.append(w)
                    ks.append(rest)
                j += 2
            else:
                single.append(u)
                ks.append(k[u])
                j += 1
        # pairing pays only when it removes arctangents
        self.pairs = (np.array(i1), np.array(i2), np.array(kp)) if len(i1) > len(single) else None
        self.slices = None  # the pairs as slices, when they are two contiguous halves
        if self.pairs is not None:
            npair = len(i1)
            if np.array_equal(self.pairs[0], np.arange(npair)) and \
                    np.array_equal(self.pairs[1], np.arange(npair, 2 * npair)):
                self.slices = (slice(0, npair), slice(npair, 2 * npair), self.pairs[2])
        self.singles = (np.array(single), np.array(ks)) if single and self.pairs is not None else None


class CuboidSet:
    """A set of uniformly polarised, axis-aligned cuboids, ready for repeated evaluation.

    The corners of all cuboids are merged once (coordinates closer than ``1e-12`` of the
    set's extent are one corner), each distinct corner carrying its net signed
    polarisation coefficient; corners whose coefficients cancel are dropped.

    Parameters
    ----------
    dimensions : array_like, shape (m, 3)
        Side lengths along x, y, z [m].
    polarizations : array_like, shape (m, 3) or (k, m, 3)
        Polarisation vectors J = mu0 M [T]; a stack of ``k`` sets evaluates the fields of
        ``k`` sets of the same cuboids at once (each corner's arctangents and logarithms
        are computed once and weighted by every set: the field is linear in J, [3]_), and
        :meth:`mu0_h_mean` then returns shape (k, n, 3).
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
    .. [3] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 5.8
       (superposition: the field of a magnetisation is linear in it).
    """

    def __init__(self, dimensions, polarizations, positions):
        dims = _as_rows(dimensions, 3, "dimensions", positive=True)
        stack = np.asarray(polarizations, dtype=float)
        if stack.ndim == 3:  # k sets: (k, m, 3) -> corner coefficients (m, 3, k)
            for j in stack:
                _as_rows(j, 3, "polarizations")
            pols = np.moveaxis(stack, 0, -1)
            lead: tuple = (stack.shape[0],)
        else:
            pols = _as_rows(polarizations, 3, "polarizations")
            lead = ()
        self._lead = lead
        pos = _as_rows(positions, 3, "positions")
        m = _same_count({"dimensions": dims, "polarizations": pols, "positions": pos})
        self.count = m
        self._scale = 1.0
        if m == 0:
            self.corners = np.zeros((0, 3))
            self.coefficients = np.zeros((0, 3, *lead))
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
        coeffs = signs.reshape(1, 8, 1, *(1,) * len(lead)) * pols[:, None]  # (m,8,3[,k])
        corners = corners.reshape(-1, 3)
        coeffs = coeffs.reshape(-1, 3, *lead)
        uniq, inverse = np.unique(corners, axis=0, return_inverse=True)
        net = np.zeros((uniq.shape[0], 3, *lead))
        np.add.at(net, inverse.ravel(), coeffs)
        jmax = float(np.max(np.abs(pols))) if pols.size else 0.0
        big = np.abs(net) > 1e-13 * max(jmax, 1e-300)
        keep = np.any(big.any(axis=2) if lead else big, axis=1)
        corners, coeffs = uniq[keep], net[keep]
        # order the corners so that the pairs of the axis with most arctangents are two
        # contiguous halves (the kernel then takes them as slices, without copies)
        nonzero = coeffs != 0
        counts = np.count_nonzero(nonzero.any(axis=2) if lead else nonzero, axis=0)
        main = int(np.argmax(counts))
        pairs = _AtanPlan(main, corners, coeffs[:, main]).pairs
        if pairs is not None:
            i1, i2 = pairs[0], pairs[1]
            rest = np.setdiff1d(np.arange(corners.shape[0]), np.concatenate([i1, i2]))
            order = np.concatenate([i1, i2, rest])
            corners, coeffs = corners[order], coeffs[order]
        self.corners = corners
        self.coefficients = coeffs
        self.edge_length = EDGE_ROUNDING * float(np.min(hi - lo))  # rounding length [m]
        self.lo = lo
        self.hi = hi
        self.polarizations = pols
        # the kernel works in lengths normalised by the extent (the corner sums of the
        # logarithms are scale-free: each cuboid's signed coefficients sum to zero)
        self._scale = extent
        self._cn = self.corners / extent
        self._ell = self.edge_length / extent
        self._cn_cols = [np.ascontiguousarray(self._cn[:, ax])[:, None] for ax in range(3)]
        self._values = [np.unique(self._cn[:, ax]) for ax in range(3)]
        self._plans = [_LogPlan(ax, self.coefficients) for ax in range(3)]
        self._atan_axes = [a for a in range(3) if np.any(self.coefficients[:, a] != 0)]
        self._atan_plans = {a: _AtanPlan(a, self._cn, self.coefficients[:, a]) for a in self._atan_axes}
        self._lo_hi = [(float(v[0]), float(v[-1])) if v.size else (0.0, 0.0) for v in self._values]

    # -- field ---------------------------------------------------------------
    def mu0_h_mean(self, p: np.ndarray, atan: bool = True, log: bool = True) -> np.ndarray:
        """mu0 H [T] at points ``p`` (n, 3), the mean of the one-sided limits on faces.

        ``atan`` / ``log`` select the bounded diagonal part (arctangents) and the
        off-diagonal part (logarithms, divergent on edge lines) of the corner sum.
        """
        out = np.zeros((*self._lead, *p.shape))
        m = self.corners.shape[0]
        if m == 0 or p.shape[0] == 0:
            return out
        pn = p / self._scale
        # which points lie on a corner plane (arctangent masked) or near a corner line
        # (logarithm regularised): found once, so the chunks below skip the masks
        snap = EDGE_SNAP * self._ell
        on_plane, close = zip(*(_near_any(pn[:, a], self._values[a], snap) for a in range(3)))
        on_line = [close[b] & close[c] for b, c in ((1, 2), (0, 2), (0, 1))]
        # strictly between the outermost corner planes of an axis: paired arctangents
        # there may need their branch
        inner = [(pn[:, a] > lo) & (pn[:, a] < hi) for a, (lo, hi) in enumerate(self._lo_hi)]
        slices = list(_chunks(p.shape[0], m, _CUBOID_CHUNK))
        width = max(sl.stop - sl.start for sl in slices)
        # scratch reused by every chunk (no allocation, no page faults per operation)
        ws = np.empty((_N_SCRATCH, m, width))
        ext = np.empty((m + 1, width))
        ext[m] = 1.0  # the factor of 1 that pads the groups of logarithms
        with np.errstate(divide="ignore", invalid="ignore"):
            for sl in slices:
                flags = ([bool(f[sl].any()) for f in on_plane], [bool(f[sl].any()) for f in on_line],
                         [bool(f[sl].any()) for f in inner])
                out[..., sl, :] = self._mu0_h(pn[sl], atan, log, flags, ext, ws)
        return out

    def _mu0_h(self, pn: np.ndarray, atan: bool, log: bool, flags, ext: np.ndarray,
               ws: np.ndarray) -> np.ndarray:
        """mu0 H (c, 3) [T] (or (k, c, 3) for k polarisation sets) at normalised points
        ``pn`` (c, 3); ``ext`` (m+1, >=c) and ``ws`` (_N_SCRATCH, m, >=c) scratch."""
        on_plane, on_line, between = flags
        nc = pn.shape[0]
        C = self.coefficients
        m = C.shape[0]
        w = ws[:, :, :nc]
        # layout (corners, points): rows contiguous, groups gathered by rows
        d = [w[0], w[1], w[2]]  # (m, c) each
        sq = [w[3], w[4], w[5]]
        for ax in range(3):
            np.subtract(pn[:, ax][None, :], self._cn_cols[ax], out=d[ax])
            np.multiply(d[ax], d[ax], out=sq[ax])
        r = np.add(sq[0], sq[1], out=w[6])
        r += sq[2]
        np.sqrt(r, out=r)
        out = np.zeros((3, *self._lead, nc))
        if atan:
            for a in self._atan_axes:
                b, c = _OTHERS[a]
                plan = self._atan_plans[a]
                if on_plane[a] or plan.pairs is None:
                    # atan(d_b d_c / (d_a r)); where d_a = 0 the mean of its one-sided limits, 0
                    q = np.multiply(d[b], d[c], out=w[7])
                    den = np.multiply(d[a], r, out=w[8])
                    q /= den
                    np.arctan(q, out=q)
                    if on_plane[a]:
                        q[den == 0] = 0.0
                    out[a] += _weigh(C[:, a], q)
                    continue
                i1, i2, kp = plan.pairs if plan.slices is None else plan.slices
                P = np.multiply(d[b][i1], d[c][i1], out=w[7][:len(kp)])
                D1 = np.multiply(d[a][i1], r[i1], out=w[8][:len(kp)])
                D2 = np.multiply(d[a][i2], r[i2], out=w[9][:len(kp)])
                n2 = 2 * len(kp)
                out[a] += _weigh(kp, _atan_difference(P, D1, D2, between[a],
                                                      (w[7][len(kp):n2], w[8][len(kp):n2])))
                if plan.singles is not None:
                    i, k = plan.singles
                    q = d[b][i] * d[c][i]
                    q /= d[a][i] * r[i]
                    out[a] += _weigh(k, np.arctan(q, out=q))
        if log:
            e = ext[:, :nc]
            for plan in self._plans:
                if not plan.active:
                    continue
                b, c = plan.others
                rho2 = np.add(sq[b], sq[c], out=w[9])
                self._log_argument(d[plan.axis], r, rho2, on_line[plan.axis], e[:m], w[7], w[8])
                prod = e[plan.index[0]]
                for rows in plan.index[1:]:
                    prod *= e[rows]
                np.log(prod, out=prod)
                out[[b, c]] -= _weigh(plan.coefficients, prod)
        out /= _FOUR_PI
        return np.moveaxis(out, 0, -1)

    def _log_argument(self, t, r, rho2, maybe_near: bool, arg, s, tmp) -> None:
        """``t + r`` into ``arg``, ``r = sqrt(t^2 + rho2)`` (normalised), cancellation-free.

        ``s`` and ``tmp`` are scratch of the same shape.

        For ``t < 0`` the identity ``t + r = rho2 / (r - t)`` avoids the cancellation. On
        the line ``rho2 = 0`` (to within ``EDGE_SNAP`` of the rounding length, so that
        rounding of the inputs does not matter) the divergent ``rho2`` is taken at
        ``rho = ell``, the rounding length: for points on an edge's extension the
        substitution cancels exactly between the two corners at the ends of the edge, and
        on the edge itself it replaces the logarithmic edge singularity by its value at
        ``ell``. At a corner the argument is ``ell``.
        """
        np.abs(t, out=s)
        s += r  # |t| + r
        np.divide(rho2, s, out=tmp)
        # select tmp where t < 0, s elsewhere, exactly (one factor is 0, the other 1)
        np.multiply(tmp, t < 0, out=arg)
        s *= t >= 0
        arg += s
        if not maybe_near:
            return  # no point near a corner line along this axis
        ell = self._ell
        snap = EDGE_SNAP * ell
        near = rho2 <= snap * snap
        if np.any(near):
            tb, rb = t[near], r[near]
            sb = np.abs(tb) + rb
            line = np.where(tb < 0, ell * ell / sb, sb)
            arg[near] = np.where(rb <= snap, ell, line)


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

