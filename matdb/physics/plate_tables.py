"""Per-geometry tables of a floating plate, at unit polarisation, for fast screening.

The field of an arrangement of one remanence is linear in ``B_r`` and every force and
stiffness of a weak diamagnet is linear in its two susceptibility parts
``(|chi_perp|, |chi_par|)`` and in ``B_r^2`` ([1]_, [2]_). So a geometry (arrangement x
plate outline) is integrated once at ``B_r = 1 T``, split by field component, and each
material, grade and temperature is a multiplication. This module holds the tables and
the small formulas that use them; :mod:`matdb.physics.plate` holds the quadrature.

* :func:`lateral_line_integrals`: lateral stiffness from line integrals across the side
  faces (the derivative of the energy with respect to a sideways shift is a boundary
  integral of the energy density);
* :func:`cumulative_over_height`: those integrals accumulated over height, so the
  lateral stiffness of a plate of any thickness at any gap is a difference;
* :func:`tilt_tables`: the (x, y, roll, pitch) stiffness matrix about the plate's centre;
* :func:`move_pivot`: that matrix moved to the combined centre of mass of plate and payload;
* :func:`highest_root_grid` and :func:`interp_rows`: the equilibrium gap and values between
  tabulated heights.

References
----------
.. [1] M. V. Berry and A. K. Geim, "Of flying frogs and levitrons", Eur. J. Phys. 18,
   307-313 (1997) (energy density ``-chi B^2 / (2 mu0)`` of a weak diamagnet).
.. [2] M. D. Simon and A. K. Geim, "Diamagnetic levitation: flying frogs and floating
   magnets", J. Appl. Phys. 87, 6200-6204 (2000).
.. [3] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed., Addison-Wesley
   (2002), ch. 6 (small oscillations; stable when the stiffness matrix is positive definite).
"""

from __future__ import annotations

from dataclasses import replace
from functools import lru_cache
from typing import Callable

import numpy as np

from matdb.physics import plate as P
from matdb.physics import quadrature as Q
from matdb.physics.plate_geometry import _same_set, field_mirrors

FieldFn = Callable[[np.ndarray], np.ndarray]

#: order of the (x, y, roll, pitch) matrices of :func:`tilt_tables`
TILT_DOFS = (0, 1, 3, 4)


def mirror_symmetry(arrangement, rtol: float = 1e-9, field: FieldFn | None | bool = None
                    ) -> tuple[bool, bool]:
    """Whether ``|B|^2`` of ``arrangement`` is even in ``x`` and in ``y``.

    The magnets are tested by :func:`matdb.physics.plate_geometry.field_mirrors` (mirrored
    set equal to the original up to one sign, [4]_; the recoil cells follow from the same
    geometry), then the symmetry is confirmed on the field at a few points, so
    a field model with parts that are not sources is never folded wrongly; ``field``
    (default ``arrangement.B``) is the field checked, e.g. a :func:`linear_family` whose
    arrangements share these sources (``False``: the sources only).

    Returns
    -------
    (even_in_x, even_in_y) : tuple of bool

    References
    ----------
    .. [4] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 6.10
       (B and M are axial vectors under reflection).
    """
    sources = list(arrangement.magnets)
    if not sources:
        return False, False
    # the recoil cells follow from the same geometry (field_mirrors' notes); the field
    # check below confirms, without matching thousands of cells pair by pair
    mx, my = field_mirrors(sources, 0.0, 0.0, rtol)
    out = []
    for ax, m in ((0, mx), (1, my)):
        out.append(m is not None and (field is False or _field_even(
            arrangement.B if field is None else field, arrangement, ax)))
    return out[0], out[1]


def diagonal_symmetry(arrangement, rtol: float = 1e-9, field: FieldFn | None | bool = None) -> bool:
    """Whether ``|B|^2`` of ``arrangement`` is symmetric under ``x <-> y`` (a checkerboard of
    square magnets or cylinders, say; not stripes).

    The reflection in the plane ``x = y`` moves a magnet at ``(x, y, z)`` of size
    ``(a, b, h)`` to ``(y, x, z)`` with size ``(b, a, h)`` and turns its polarisation, an
    axial vector, into ``-(J_y, J_x, J_z)`` (Jackson sec. 6.10, as in
    :func:`mirror_symmetry`); when that is the same set of magnets with the same
    polarisations, or all reversed, ``|B|^2`` is symmetric. Confirmed on the field at a
    few points as :func:`mirror_symmetry` does (``field`` as there).
    """
    mags = list(arrangement.magnets)
    if not mags:
        return False
    pos = np.array([m.position for m in mags], dtype=float)
    pol = np.array([m.polarization for m in mags], dtype=float)
    size = [(m.shape, tuple(float(v) for v in m.size)) for m in mags]
    msize = [(sh, (sz[1], sz[0], *sz[2:]) if sh == "cuboid" else sz) for sh, sz in size]
    scale = max(float(np.ptp(pos, axis=0).max()), max(max(sz) for _, sz in size))
    jmax = float(np.abs(pol).max()) or 1.0
    swap = [1, 0, 2]
    if not _same_set(pos, pol, size, pos[:, swap], -pol[:, swap], msize, rtol * scale, rtol * jmax):
        return False
    return field is False or _field_even(arrangement.B if field is None else field, arrangement, None)


def _field_even(field: FieldFn, arrangement, ax: int | None) -> bool:
    """``|B|^2`` at a few points above the magnets equals its value at their mirror in
    ``x_ax = 0`` (``ax`` None: in ``x = y``); ``field`` may return one field (n, 3) or
    several (k, n, 3)."""
    p = _probe_points(arrangement)
    q = p.copy()
    if ax is None:
        q[:, [0, 1]] = p[:, [1, 0]]
    else:
        q[:, ax] *= -1.0
    b = np.sum(field(np.concatenate([p, q])) ** 2, axis=-1)
    n = p.shape[0]
    return bool(np.all(np.abs(b[..., :n] - b[..., n:]) <= 1e-7 * float(np.max(b)) + 1e-300))


def _source_vector(arrangement) -> np.ndarray:
    """Every polarisation of the sources (magnets, then recoil blocks) as one vector [T]."""
    j = [np.ravel([m.polarization for m in arrangement.magnets])]
    if getattr(arrangement, "cells", None) is not None:
        j.append(np.ravel(arrangement.cells[2]))
    return np.concatenate(j)


def _with_sources(arrangement, vector: np.ndarray):
    """``arrangement`` with the source polarisations of ``vector`` (:func:`_source_vector`)."""
    mags = []
    m3 = 3 * len(arrangement.magnets)
    for m, j in zip(arrangement.magnets, vector[:m3].reshape(-1, 3)):
        n = float(np.linalg.norm(j))
        mags.append(replace(m, direction=tuple(float(c) / n for c in j), br=n) if n > 0
                    else replace(m, br=0.0))
    cells = arrangement.cells
    if cells is not None:
        cells = (*cells[:2], vector[m3:].reshape(-1, 3), cells[3])
    return replace(arrangement, magnets=tuple(mags), cells=cells)


def linear_family(arrangements, rtol: float = 1e-12) -> FieldFn:
    """One field function for several arrangements that differ only in polarisations.

    The field is linear in the polarisations of its sources ([6]_), so when the
    arrangements' source polarisations (magnets on recoil lines of different recoil
    susceptibilities, say) span ``r`` dimensions, the fields of ``r`` basis arrangements
    combine into all of them: ``B_j = sum_k Z[k, j] B_k``, from the singular value
    decomposition of the polarisation vectors (directions below ``rtol`` of the largest
    singular value dropped). The combination is checked against one arrangement's own
    field at a few points (to 1e-9 of the largest value); where it fails, or the
    arrangements differ in anything but polarisation, each field is evaluated on its own.

    Returns
    -------
    callable
        ``field(points (n, 3) [m]) -> B (k, n, 3) [T]``, one field per arrangement.

    References
    ----------
    .. [6] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 5.8
       (the field of a magnetisation is linear in it: superposition).
    """
    arrs = list(arrangements)

    def separate(p):
        return np.stack([a.B(p) for a in arrs])

    first = arrs[0]
    same = all(len(a.magnets) == len(first.magnets) and a.back_plate == first.back_plate
               and all(m.shape == n.shape and m.size == n.size and m.position == n.position
                       for m, n in zip(a.magnets, first.magnets))
               and (a.cells is None) == (first.cells is None)
               and (a.cells is None or (np.array_equal(a.cells[0], first.cells[0])
                                        and np.array_equal(a.cells[1], first.cells[1])))
               for a in arrs)
    if not same or len(arrs) == 1:
        return separate
    if first.cells is not None:  # magnets on recoil lines: their cells' tables read once for all
        from matdb.physics.arrangement import linear_fields

        fam = linear_fields(arrs, rtol, stacked=stacked_field)
        if fam is not None:
            return fam
    stacked = stacked_field(arrs)
    if stacked is not None:
        return stacked
    V = np.column_stack([_source_vector(a) for a in arrs])  # (sources x 3, k)
    _, sv, zt = np.linalg.svd(V, full_matrices=False)
    r = int(np.sum(sv > rtol * sv[0])) if sv.size and sv[0] > 0 else 0
    if r == 0 or r >= len(arrs):
        return separate
    Z = zt[:r]  # (r, k)
    basis = [_with_sources(first, u) for u in (V @ Z.T).T]  # exact zeros stay zeros

    def combined(p):
        b = np.stack([a.B(p) for a in basis])  # (r, n, 3)
        return np.einsum("kj,knc->jnc", Z, b)

    # the combination, checked on the arrangement furthest from the basis' first direction
    probe = _probe_points(first)
    far = int(np.argmin(np.abs(Z[0]) / np.linalg.norm(Z, axis=0)))
    got, want = combined(probe)[far], arrs[far].B(probe)
    if not np.all(np.abs(got - want) <= 1e-9 * float(np.max(np.abs(want))) + 1e-300):
        return separate
    return combined


def stacked_field(arrangements) -> FieldFn | None:
    """The fields of arrangements that differ only in their magnets' polarisations, from
    one evaluation: each corner term of a cuboid and each elliptic-integral term of a
    cylinder is computed once and weighted by every arrangement's polarisation (the field
    is linear in it: superposition, Jackson sec. 5.8 as in :func:`linear_family`). For
    points above every magnet's top face (where the plate is); elsewhere the full model
    of each arrangement. Returns None for back plates, recoil cells or rings (the caller
    then combines a basis): else ``field(points (n, 3) [m]) -> B (k, n, 3) [T]``.
    """
    arrs = list(arrangements)
    first = arrs[0]
    if any(a.back_plate or a.cells is not None for a in arrs) or \
            any(m.shape not in ("cuboid", "cylinder") for m in first.magnets):
        return None
    from matdb.physics.fields._common import EDGE_ROUNDING
    from matdb.physics.fields.cuboid import CuboidSet
    from matdb.physics.fields.cylinder import _cyl_sum

    J = np.array([[m.polarization for m in a.magnets] for a in arrs], dtype=float)  # (k, m, 3)
    pos = np.array([m.position for m in first.magnets], dtype=float)
    cub = np.array([m.shape == "cuboid" for m in first.magnets])
    size = [m.size for m in first.magnets]
    cuboids = None
    if cub.any():
        ci = np.nonzero(cub)[0]
        cuboids = CuboidSet(np.array([size[i] for i in ci], dtype=float), J[:, ci], pos[ci])
    yi = np.nonzero(~cub)[0]
    radius = np.array([size[i][0] / 2 for i in yi], dtype=float)
    half_h = np.array([size[i][1] / 2 for i in yi], dtype=float)
    ell = EDGE_ROUNDING * np.minimum(2.0 * radius, 2.0 * half_h)
    top = first.top_z

    def field(p):
        p = np.asarray(p, dtype=float)
        if p.shape[0] and not np.all(p[:, 2] > top):  # faces and insides: the full model
            return np.stack([a.B(p) for a in arrs])
        out = np.zeros((len(arrs), *p.shape))
        if cuboids is not None:
            out += cuboids.mu0_h_mean(p)
        if yi.size:
            out += _cyl_sum(p, radius, half_h, J[:, yi, 2], pos[yi], ell)
        return out

    return field


def _probe_points(arrangement) -> np.ndarray:
    """A dozen points above and beside the magnets, for checks of a field model."""
    pos = np.array([m.position for m in arrangement.magnets], dtype=float)
    ext = np.array([m.half_extents for m in arrangement.magnets], dtype=float)
    scale = float(np.max(np.abs(pos) + ext))
    top = float(np.max(pos[:, 2] + ext[:, 2]))
    rng = np.random.default_rng(12345)
    p = rng.uniform(-1.0, 1.0, (12, 3)) * scale
    p[:, 2] = top + scale * rng.uniform(0.02, 1.5, 12)
    return p


def axis_rule(length: float, breaks, scale: float, order: int, even: bool
              ) -> tuple[np.ndarray, np.ndarray]:
    """Graded compound Gauss-Legendre rule across a centred interval of ``length``.

    ``even``: the integrand is even about 0, so only the half ``[0, length/2]`` is ruled
    (graded towards every break, those at negative positions included) and its weights
    doubled; the integral is the same, at half the nodes ([5]_). Otherwise the rule over
    the whole interval of :func:`matdb.physics.quadrature.graded_rule`.

    References
    ----------
    .. [5] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 (compound rules graded towards singular points).
    """
    return _axis_rule(float(length), tuple(float(b) for b in np.ravel(breaks)), float(scale),
                      int(order), bool(even))


@lru_cache(maxsize=4096)
def _axis_rule(length: float, breaks: tuple, scale: float, order: int, even: bool):
    """:func:`axis_rule`, cached (read-only arrays)."""
    half = 0.5 * length
    if not even:
        x, w = Q.graded_rule(-half, half, breaks, scale, order)
    else:
        x, w = Q.graded_rule(0.0, half, breaks, scale, order)
        w = 2.0 * w
    x, w = np.array(x), np.array(w)
    x.flags.writeable = False
    w.flags.writeable = False
    return x, w


def plane_integrals(field: FieldFn, lx: float, ly: float, breaks_x, breaks_y, heights,
                    order: int, floor_m: float, even: tuple[bool, ...] = (False, False),
                    same_rule: bool = False) -> np.ndarray:
    """Integrals of ``B_z^2`` and ``B_x^2 + B_y^2`` over a centred ``lx`` x ``ly``
    rectangle at each height, the rule graded for ``max(h, floor_m)`` (``same_rule``: for
    ``floor_m`` at every height, so differences between heights vary smoothly with them).

    With ``even`` (from :func:`mirror_symmetry`) the rule covers one half (or quarter) of
    the rectangle with doubled weights. Without, the same rule as
    :func:`matdb.physics.plate.plane_integrals`. A third flag ``even[2]``
    (:func:`diagonal_symmetry`) where the rules across x and y are the same: the
    integrand is symmetric in the nodes ``(x_i, y_j)``, so only ``i <= j`` are evaluated,
    those off the diagonal with doubled weight (the same sum, about half the nodes).

    Returns
    -------
    ndarray, shape (n, 2), or (k, n, 2) for a field returning k fields (:func:`linear_family`)
        ``int B_z^2 dA``, ``int (B_x^2 + B_y^2) dA`` [T^2 m^2] per height.

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    hs = np.atleast_1d(np.asarray(heights, dtype=float))
    pts, wts, idx = [], [], []
    rules: dict[float, tuple] = {}
    for i, h in enumerate(hs):
        scale = float(floor_m) if same_rule else max(float(h), floor_m)
        r = rules.get(scale)
        if r is None:
            x, wx = axis_rule(lx, breaks_x, scale, order, even[0])
            y, wy = axis_rule(ly, breaks_y, scale, order, even[1])
            if _diagonal(even, x, y, wx, wy):
                a, b = np.triu_indices(x.size)
                r = rules[scale] = (x[a], y[b], wx[a] * wy[b] * np.where(a < b, 2.0, 1.0))
            else:
                r = rules[scale] = (np.repeat(x, y.size), np.tile(y, x.size), np.outer(wx, wy).ravel())
        pts.append(np.column_stack([r[0], r[1], np.full(r[0].size, h)]))
        wts.append(r[2])
        idx.append(np.full(r[0].size, i))
    b = _evaluate(field, np.concatenate(pts))
    w = np.concatenate(wts)
    ii = np.concatenate(idx)
    z = _sums(ii, w * b[..., 2] ** 2, hs.size)
    xy = _sums(ii, w * (b[..., 0] ** 2 + b[..., 1] ** 2), hs.size)
    return np.stack([z, xy], axis=-1)


def _diagonal(even, x, y, wx, wy) -> bool:
    """Whether the diagonal fold applies: flagged symmetric, and the same rule across x and y."""
    return (len(even) > 2 and bool(even[2]) and x.size == y.size and np.array_equal(x, y)
            and np.array_equal(wx, wy))


def _evaluate(field: FieldFn, points: np.ndarray) -> np.ndarray:
    """``field`` at ``points`` in chunks; (n, 3) or, for several fields, (k, n, 3)."""
    parts = [field(points[i:i + P.CHUNK]) for i in range(0, points.shape[0], P.CHUNK)]
    return np.concatenate(parts, axis=-2)


def _sums(index: np.ndarray, values: np.ndarray, n: int) -> np.ndarray:
    """Sums of ``values`` (..., m) by ``index`` (m,): shape (..., n)."""
    if values.ndim == 1:
        return np.bincount(index, weights=values, minlength=n)
    flat = values.reshape(-1, values.shape[-1])
    out = np.stack([np.bincount(index, weights=v, minlength=n) for v in flat])
    return out.reshape(*values.shape[:-1], n)


def lateral_line_integrals(field: FieldFn, lx: float, ly: float, breaks_x, breaks_y, heights,
                           order: int, floor_m: float, step_m: float,
                           even: tuple[bool, ...] = (False, False)) -> np.ndarray:
    """Line integrals across the side faces of a centred ``lx`` x ``ly`` rectangle.

    For each height ``h`` and each of ``w_z = B_z^2`` and ``w_xy = B_x^2 + B_y^2``:
    ``int [d_x w](x = +lx/2) - [d_x w](x = -lx/2) dy`` (the x faces) and the same across
    the y faces, the normal derivative by a central difference of ``step_m``. The lateral
    stiffness of a slab is the integral of these over its height times
    ``|chi| B_r^2 / (2 mu0)`` ([1]_).

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]`` at unit polarisation.
    lx, ly : float
        Plate outline [m].
    breaks_x, breaks_y : sequence of float
        Magnet edge lines [m] the quadrature is graded towards.
    heights : array_like
        Heights above the magnets' top faces [m].
    order : int
        Gauss-Legendre nodes per panel.
    floor_m : float
        The rule is graded no finer than for this height [m].
    step_m : float
        Central-difference step across a face [m].
    even : (bool, bool[, bool])
        Whether ``|B|^2`` is even in x and in y (:func:`mirror_symmetry`): then half of
        each face (:func:`axis_rule`) and one face of each pair are integrated; and
        whether it is symmetric under ``x <-> y`` (:func:`diagonal_symmetry`): then, where
        the faces' rules are the same, the y faces equal the x faces and are not evaluated.

    Returns
    -------
    ndarray, shape (n, 4), or (k, n, 4) for a field returning k fields
        x faces ``w_z``, x faces ``w_xy``, y faces ``w_z``, y faces ``w_xy`` [T^2].

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    hs = np.atleast_1d(np.asarray(heights, dtype=float))
    d = float(step_m)
    parts = []  # (points, weights, height index, 0 = x faces / 1 = y faces)
    faces_xy = ((ly, lx, breaks_y, even[1], even[0]), (lx, ly, breaks_x, even[0], even[1]))
    # symmetric under x <-> y with the same rules on both pairs of faces: the y faces are
    # the x faces mirrored, their integrals the same
    diag = (len(even) > 2 and bool(even[2]) and float(lx) == float(ly) and even[0] == even[1]
            and tuple(np.ravel(breaks_x)) == tuple(np.ravel(breaks_y)))
    # heights sharing a rule (those below floor_m) take its points once, tiled over them
    groups: dict[float, list[int]] = {}
    for i, h in enumerate(hs):
        groups.setdefault(max(float(h), floor_m), []).append(i)
    for scale, members in groups.items():
        idx = np.array(members)
        for c, (length, across, brk, ev_along, ev_across) in enumerate(faces_xy[:1] if diag else faces_xy):
            t, wt = axis_rule(length, brk, scale, order, ev_along)
            # faces at +-across/2, a central difference of w along the normal at each;
            # w even across: the face at -across/2 adds what the one at +across/2 does
            faces = (1.0,) if ev_across else (1.0, -1.0)
            k = 2 * len(faces)
            normal = np.repeat([f * across / 2 + sd * d for f in faces for sd in (1.0, -1.0)], t.size)
            sign = np.repeat([sd * f * (2.0 if ev_across else 1.0) / (2 * d)
                              for f in faces for sd in (1.0, -1.0)], t.size)
            along = np.tile(t, k)
            xy = (normal, along) if c == 0 else (along, normal)
            n = along.size
            parts.append((np.column_stack([np.tile(xy[0], idx.size), np.tile(xy[1], idx.size),
                                           np.repeat(hs[idx], n)]),
                          np.tile(sign * np.tile(wt, k), idx.size), np.repeat(2 * idx + c, n)))
    b = _evaluate(field, np.concatenate([q[0] for q in parts]))
    w = np.concatenate([q[1] for q in parts])
    ii = np.concatenate([q[2] for q in parts])
    z = _sums(ii, w * b[..., 2] ** 2, 2 * hs.size)  # (..., height x faces)
    xy = _sums(ii, w * (b[..., 0] ** 2 + b[..., 1] ** 2), 2 * hs.size)
    out = np.stack([z, xy], axis=-1)  # (..., height x faces, part)
    out = out.reshape(*out.shape[:-2], hs.size, 4)
    if diag:
        out[..., 2:] = out[..., :2]
    return out


def cumulative_over_height(lateral: np.ndarray, heights: np.ndarray) -> np.ndarray:
    """Trapezoid integral over height of :func:`lateral_line_integrals`, from the lowest.

    Returns
    -------
    ndarray, shape (4, n)
        Part ``q`` at height ``heights[j]`` [T^2 m]; the lateral stiffness of a plate from
        ``g`` to ``g + t`` is ``s (a (C[0](g+t) - C[0](g)) + b (C[1](g+t) - C[1](g)))`` along
        x (rows 2, 3 along y) with ``s = B_r^2 / (2 mu0)``, ``a, b = |chi_perp|, |chi_par|``.

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    lat = np.asarray(lateral, dtype=float)
    steps = 0.5 * (lat[1:] + lat[:-1]) * np.diff(heights)[:, None]
    return np.concatenate([np.zeros((1, lat.shape[1])), np.cumsum(steps, axis=0)]).T


def tilt_tables(field: FieldFn, plate: P.PlateGeometry, gaps, order: int) -> np.ndarray:
    """Stiffness matrices over (x, y, roll, pitch) about the plate's own centre.

    Parameters
    ----------
    field : callable
        Field at unit polarisation [T].
    plate : PlateGeometry
        The plate (its thickness matters).
    gaps : array_like
        Gaps of the plate's bottom face [m].
    order : int
        Gauss-Legendre nodes per panel.

    Returns
    -------
    ndarray, shape (n, 2, 4, 4)
        Per gap, the part multiplying ``|chi_perp|`` then ``|chi_par|``, at ``B_r = 1 T``
        [N/m, N/rad, N m/rad]; multiply by ``B_r^2`` and the chi parts.

    References
    ----------
    .. [1] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed. (2002), ch. 6.
    """
    t = plate.thickness
    out = [P.stiffness_split(field, plate, float(g), (plate.cx, plate.cy, float(g) + t / 2),
                             order, dofs=TILT_DOFS) for g in np.atleast_1d(gaps)]
    return np.array(out).reshape(-1, 2, 4, 4)


def move_pivot(k: np.ndarray, h, weight_n) -> dict:
    """The (x, y, roll, pitch) stiffness matrix about a point ``h`` above its pivot.

    ``k`` is tabulated about the plate's centre ``O``; the combined centre of mass ``C`` of
    plate and payload lies ``h`` above it. The rigid-body change of pivot gives
    ``k_pitch,C = k_pitch,O - 2 h k_x,pitch + h^2 k_x - h W``, ``k_roll,C = k_roll,O +
    2 h k_y,roll + h^2 k_y - h W``, ``k_x,pitch,C = k_x,pitch,O - h k_x`` and
    ``k_y,roll,C = k_y,roll,O + h k_y``; the ``- h W`` term (``W`` the weight, equal to the
    lift at equilibrium) is the one that does not scale with ``|chi| B_r^2`` ([1]_).

    Parameters
    ----------
    k : ndarray, shape (..., 4, 4)
        Stiffness about ``O`` in the order (x, y, roll, pitch) [N/m, N/rad, N m/rad].
    h : float or ndarray
        Height of ``C`` above ``O`` [m].
    weight_n : float or ndarray
        Weight of plate and payload [N].

    Returns
    -------
    dict
        ``k_x``, ``k_y`` [N/m], ``k_pitch``, ``k_roll`` [N m/rad], ``k_x_pitch``,
        ``k_y_roll`` [N/rad]; ``xp_stable`` and ``yr_stable`` (each 2 x 2 block positive
        definite), ``tilt_stable`` (both tilt stiffnesses positive).

    References
    ----------
    .. [1] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed. (2002), ch. 6.
    """
    k = np.asarray(k, dtype=float)
    h = np.asarray(h, dtype=float)
    w = np.asarray(weight_n, dtype=float)
    kx, ky = k[..., 0, 0], k[..., 1, 1]
    kp = k[..., 3, 3] - 2 * h * k[..., 0, 3] + h * h * kx - h * w
    kr = k[..., 2, 2] + 2 * h * k[..., 1, 2] + h * h * ky - h * w
    kxp = k[..., 0, 3] - h * kx
    kyr = k[..., 1, 2] + h * ky
    return {"k_x": kx, "k_y": ky, "k_pitch": kp, "k_roll": kr, "k_x_pitch": kxp, "k_y_roll": kyr,
            "xp_stable": (kx > 0) & (kp > 0) & (kx * kp - kxp * kxp > 0),
            "yr_stable": (ky > 0) & (kr > 0) & (ky * kr - kyr * kyr > 0),
            "tilt_stable": (kp > 0) & (kr > 0)}


def highest_root_grid(G: np.ndarray, y: np.ndarray, gaps: np.ndarray, rows=None):
    """Highest gap ``g`` with ``G(g) = y`` on tabulated lift curves (one per row of ``G``).

    Between nodes the curve is interpolated linearly in ``log G`` (the lift of a magnet
    array decays about exponentially with the gap, [2]_), linearly where a value is not
    positive. A root exists when the curve's running maximum from above crosses ``y``.

    Parameters
    ----------
    G : ndarray, shape (u, n)
        Curves on ``gaps`` (any common scale) [N or N/(unit)].
    y : ndarray, shape (m,)
        Value to reach, on the same scale, on curve ``rows[k]`` (default: curve ``k``).
    rows : ndarray of int, shape (m,), optional
        Which curve each value is sought on (curves shared by many values are scanned once).
    gaps : ndarray, shape (n,)
        Increasing gaps [m].

    Returns
    -------
    gap, i, fraction : ndarray
        The gap [m] (NaN without a root), the index of the bracketing node and the
        fraction of the interval from it.

    References
    ----------
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    m = np.maximum.accumulate(G[:, ::-1], axis=1)[:, ::-1]  # max over g' >= g
    r = np.arange(G.shape[0]) if rows is None else np.asarray(rows)
    n = G.shape[1]
    count = _count_at_least(m, r, y)
    ok = (count > 0) & (count < n) & (y > 0)
    i = np.clip(count - 1, 0, n - 2)
    g0, g1 = G[r, i], G[r, i + 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        pos = (g0 > 0) & (g1 > 0)
        fr_log = (np.log(y) - np.log(g0)) / (np.log(g1) - np.log(g0))
        fr_lin = (y - g0) / (g1 - g0)
        fr = np.where(pos, fr_log, fr_lin)
    fr = np.clip(np.nan_to_num(fr, nan=0.0), 0.0, 1.0)
    gap = np.where(ok, gaps[i] + fr * (gaps[i + 1] - gaps[i]), np.nan)
    return gap, i, fr


def _count_at_least(m: np.ndarray, rows: np.ndarray, y: np.ndarray) -> np.ndarray:
    """How many entries of ``m[rows[k]]`` are at least ``y[k]``, for rows that do not
    increase (running maxima from the right): a bisection per value, without gathering
    whole rows; rows holding NaN are counted entry by entry."""
    if np.isnan(m).any():
        return np.sum(m[rows] >= y[:, None], axis=1)
    n = m.shape[1]
    lo = np.zeros(rows.shape, dtype=np.intp)
    hi = np.full(rows.shape, n, dtype=np.intp)
    while True:
        open_ = lo < hi
        if not open_.any():
            return lo
        mid = (lo + hi) // 2
        up = open_ & (m[rows, np.minimum(mid, n - 1)] >= y)
        lo = np.where(up, mid + 1, lo)
        hi = np.where(open_ & ~up, mid, hi)


def interp_rows(tab: np.ndarray, rows: np.ndarray, x: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Linear interpolation of ``tab[rows[k], :]`` (a function on ``grid``) at ``x[k]``
    (clamped to the grid)."""
    xi = np.clip(x, grid[0], grid[-1])
    j = np.clip(np.searchsorted(grid, xi, side="right") - 1, 0, grid.size - 2)
    f = (xi - grid[j]) / (grid[j + 1] - grid[j])
    return tab[rows, j] * (1 - f) + tab[rows, j + 1] * f
