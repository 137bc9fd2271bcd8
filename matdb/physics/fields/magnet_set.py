"""Uniformly polarised magnets of mixed shapes: superposition, J inside, face values.

:class:`MagnetSet` sums the closed forms of :mod:`.cuboid` and :mod:`.cylinder`, adds the
polarisation inside the magnets and resolves values on faces, edges and corners (see the
package notes in :mod:`matdb.physics.fields`).
"""

from __future__ import annotations

import numpy as np

from matdb.errors import InputError
from matdb.physics.fields._common import EDGE_ROUNDING, EDGE_SNAP, _as_points, _as_rows, _chunks, _same_count
from matdb.physics.fields.cuboid import CuboidSet
from matdb.physics.fields.cylinder import _cyl_sum

__all__ = ["MagnetSet"]

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

