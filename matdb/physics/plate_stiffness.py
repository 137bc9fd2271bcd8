"""Floating plate, rigid body: forces and torques at any small pose, the stiffness matrix
about the combined centre of mass and the lateral-stability verdict.

Generalised forces ``Q = (F, tau_C)`` [N, N m] from closed-surface integrals of
``w n`` plus the anisotropic volume torque (module docstring of
:mod:`matdb.physics.plate`); stiffness ``K = -dQ/dq`` [N/m, N/rad, N m/rad] by central
differences, split by chi component.

References
----------
.. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 5.16.
.. [2] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed., Addison-Wesley
   (2002), ch. 6 (small oscillations: stable when the stiffness matrix is positive
   definite).
.. [3] W. Braunbek, Z. Phys. 112, 753-763 (1939) (diamagnets escape Earnshaw's theorem).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np
from scipy.spatial.transform import Rotation

from matdb.physics.plate_geometry import (DEFAULT_ORDER, FieldFn, PlateGeometry, eval_field,
                                          mirrored_rules, side_rule, surface_images,
                                          surface_rule, swapped_rules, volume_rule)
from matdb.constants import MU0

# ---------------------------------------------------------------------------
# forces and torques at any small pose
# ---------------------------------------------------------------------------
def generalized_forces_split(field: FieldFn, plate: PlateGeometry, gap: float, pivot,
                             poses, order: int = DEFAULT_ORDER, torques: bool = True
                             ) -> np.ndarray:
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
    torques : bool
        False: forces only (torques NaN), which needs no volume integral.

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
    vp, vw = volume_rule(plate, gap, order) if torques else (np.zeros((0, 3)), np.zeros(0))
    rot = Rotation.from_rotvec(poses[:, 3:]).as_matrix()  # (P, 3, 3)
    centre = pivot[None, :] + poses[:, :3]  # displaced pivot (P, 3)
    # transformed points (P, m, 3)
    sp_t = centre[:, None, :] + np.einsum("pij,mj->pmi", rot, sp - pivot)
    sn_t = np.einsum("pij,mj->pmi", rot, sn)
    vp_t = centre[:, None, :] + np.einsum("pij,mj->pmi", rot, vp - pivot)
    axis = rot[:, :, 2]  # c axis e = R e_z, (P, 3)
    n_pose, ms, mv = poses.shape[0], sp.shape[0], vp.shape[0]
    b = eval_field(field, np.concatenate([sp_t.reshape(-1, 3), vp_t.reshape(-1, 3)]))
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
    if not torques:
        out[:, :, 3:] = np.nan
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
    b = eval_field(field, vp_t.reshape(-1, 3)).reshape(vp_t.shape)
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
    :func:`generalized_forces_split`; symmetrised. The couplings of a translation with a
    rotation are taken from the force's response to the rotation alone (the mixed second
    derivatives of the energy are equal), so translated poses need no volume integral.

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
    return _symmetric(_columns(field, plate, gap, pivot, order, dofs, dofs, step_m, step_rad))


def _symmetric(k: np.ndarray) -> np.ndarray:
    """``(K + K^T) / 2`` over the last two axes, an entry alone where its mirror is NaN."""
    kt = np.swapaxes(k, -1, -2)
    return np.where(np.isnan(k), kt, np.where(np.isnan(kt), k, 0.5 * (k + kt)))


def _columns(field: FieldFn, plate: PlateGeometry, gap: float, pivot, order: int,
             perturbed: Sequence[int], rows: Sequence[int], step_m: float | None,
             step_rad: float) -> np.ndarray:
    """Unsymmetrised columns ``-dQ_rows/dq_j`` for the ``perturbed`` coordinates j,
    (2, len(rows), len(perturbed)); entries not computed are NaN (their mirror gives them,
    see :func:`_symmetric`).

    - x and y translations: central differences of the sideways force only, which only the
      side faces carry (the normals of the top and bottom faces are vertical), so only the
      side faces are moved; their vertical-force and torque rows are NaN;
    - z translation: central differences of the force on the closed surface (torques NaN);
    - rotations: central differences of the closed-surface force and torque, plus the exact
      rate of change of the anisotropic volume torque (:func:`_intrinsic_rates`) from the
      field at the level pose, shared by every rotation.

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.16.
    .. [2] H. Flanders, "Differentiation under the integral sign", Amer. Math. Monthly 80,
       615-627 (1973) (Reynolds transport: the rate of a volume integral over a moving
       region is the flux of the integrand through its boundary plus the integral of the
       integrand's own rate).
    """
    hs = step_m if step_m is not None else max(1e-7, 5e-4 * min(plate.lx, plate.ly, 10 * gap))
    steps = np.array([hs] * 3 + [step_rad] * 3)
    pivot = np.asarray(pivot, dtype=float)
    perturbed = [int(d) for d in perturbed]
    derived = []  # coordinates whose column the diagonal symmetry gives
    if _swap_ok(plate, gap, order, pivot):
        derived = [d for d, src in _SWAP_SOURCE.items() if d in perturbed and src in perturbed]
    if derived:
        asked = perturbed
        perturbed = [d for d in asked if d not in derived]
        k = _columns(field, plate, gap, pivot, order, perturbed, range(6), step_m, step_rad)
        out = np.full((2, 6, len(asked)), np.nan)
        for j, d in enumerate(asked):
            src = d if d not in derived else _SWAP_SOURCE[d]
            col = k[:, :, perturbed.index(src)]
            out[:, :, j] = col if d == src else np.stack([_swapped_column(c, range(6), d)
                                                           for c in col])
        return out[:, list(rows), :]
    k = np.full((2, 6, len(perturbed)), np.nan)
    sideways = [j for j, d in enumerate(perturbed) if d < 2]
    if sideways:
        pts, nrm, w = side_rule(plate, gap, gap + plate.thickness, order)
        mirror = _mirror_axes(plate, gap, order, pivot)
        pairs = [(j, perturbed[j], _paired(perturbed[j], mirror)) for j in sideways]
        shifts = _poses(pairs, steps)[:, :3]
        folds = {_fold_axes(d, mirror) for _, d, _ in pairs}
        axes = folds.pop() if len(folds) == 1 else ()
        sel, fac = _folded_subset(pts, plate, axes)
        pts, nrm, w = pts[sel], nrm[sel], w[sel] * fac
        b = eval_field(field, (pts[None, :, :] + shifts[:, None, :]).reshape(-1, 3))
        b = b.reshape(shifts.shape[0], pts.shape[0], 3)
        wz = b[:, :, 2] ** 2
        wxy = b[:, :, 0] ** 2 + b[:, :, 1] ** 2
        f = np.zeros((shifts.shape[0], 2, 6))
        f[:, :, :2] = np.stack([(wz * w) @ nrm[:, :2], (wxy * w) @ nrm[:, :2]], axis=1) \
            * (-1.0 / (2.0 * MU0))
        f[:, :, _odd_components(axes)] = 0.0  # zero by the mirror symmetry
        k[:, :2, sideways] = _differences(f, pairs, steps)[:, :2, :]
    others = [j for j, d in enumerate(perturbed) if d >= 2]
    if others:
        mirror = _mirror_axes(plate, gap, order, pivot)
        pairs = [(j, perturbed[j], _paired(perturbed[j], mirror)) for j in others]
        poses = _poses(pairs, steps)
        coords = [d for _, d, axis in pairs for _ in ((0,) if axis is not None else (0, 1))]
        rot = [j for j in others if perturbed[j] >= 3]
        # every pose in one evaluation, each on the surface folded in the mirrors that map
        # it onto itself, with the level surface's field for the intrinsic rates below
        q = _surface_forces_split(field, plate, gap, pivot, poses, order, level=bool(rot),
                                  fold=[_fold_axes(d, mirror) for d in coords])
        q[poses[:, 2] != 0.0, :, 3:] = np.nan  # z translation: forces only
        k[:, :, others] = _differences(q, pairs, steps)
        if rot:
            rates = _intrinsic_rates(field, plate, gap, pivot, order,
                                     [perturbed[j] - 3 for j in rot])  # (n_rot, 3)
            for i, j in enumerate(rot):
                k[0, 3:, j] -= rates[i]
                k[1, 3:, j] += rates[i]
    return k[:, list(rows), :]


#: under the reflection in the diagonal, (x, y, z, roll, pitch, yaw) -> (y, x, z, -pitch,
#: -roll, -yaw): the partner of each coordinate and its sign
_SWAP_PARTNER = (1, 0, 2, 4, 3, 5)
_SWAP_SIGN = (1.0, 1.0, 1.0, -1.0, -1.0, -1.0)
_SWAP_SOURCE = {1: 0, 3: 4}  # y from x, roll from pitch


def _swapped_column(col: np.ndarray, rows: Sequence[int], d: int) -> np.ndarray:
    """Column ``d`` of the stiffness matrix (entries for ``rows``) from the column of its
    diagonal partner: with the energy invariant under the reflection ``q -> T q``,
    ``K = T^T K T``, i.e. ``K[i, p(j)] = t_i t_p(j) K[p(i), j]``. ``col`` holds the
    partner's column over the same ``rows`` (each row's partner among them).

    References
    ----------
    .. [1] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed. (2002),
       ch. 6 (the stiffness matrix as the Hessian of the potential energy).
    """
    rows = list(rows)
    where = {r: i for i, r in enumerate(rows)}
    out = np.empty(len(rows))
    for i, r in enumerate(rows):
        out[i] = _SWAP_SIGN[r] * _SWAP_SIGN[d] * col[where[_SWAP_PARTNER[r]]]
    return out


def _swap_ok(plate: PlateGeometry, gap: float, order: int, pivot: np.ndarray) -> bool:
    """The field is symmetric in the plate's diagonal (``plate.swap``), the plate is a
    square centred on the field's mirror lines with the pivot above its centre, and its
    rules are their own images under the exchange of x and y
    (:func:`~matdb.physics.plate_geometry.swapped_rules`)."""
    if not plate.swap or not all(mirrored_rules(plate, gap, order)):
        return False
    tol = 1e-12 * plate.lx
    return bool(abs(pivot[0] - plate.cx) <= tol and abs(pivot[1] - plate.cy) <= tol
                and swapped_rules(plate, gap, order))


#: the mirror (0: in x, 1: in y) that maps a coordinate's + step onto its - step
_PAIRING = {0: (0,), 1: (1,), 3: (1,), 4: (0,), 5: (0, 1)}


def _paired(d: int, mirror: tuple[bool, bool]) -> int | None:
    return next((a for a in _PAIRING.get(d, ()) if mirror[a]), None)


def _poses(pairs, steps: np.ndarray) -> np.ndarray:
    """The poses to evaluate: ``+step`` of each coordinate, and ``-step`` unless a mirror
    gives it."""
    rows = []
    for _, d, axis in pairs:
        for sgn in ((1.0,) if axis is not None else (1.0, -1.0)):
            p = np.zeros(6)
            p[d] = sgn * steps[d]
            rows.append(p)
    return np.array(rows)


def _differences(q: np.ndarray, pairs, steps: np.ndarray) -> np.ndarray:
    """Central differences ``-(Q(+h) - Q(-h)) / (2 h)`` (2, 6, n) from the evaluated poses
    (:func:`_poses`), with ``Q(-h) = D Q(+h)`` where a mirror in axis ``a`` maps the one
    pose onto the other: forces (polar) change the sign of their ``a`` component, torques
    about a pivot on the mirror (axial) that of the other two."""
    out = np.empty((2, 6, len(pairs)))
    i = 0
    for n, (_, d, axis) in enumerate(pairs):
        plus = q[i]
        if axis is None:
            minus = q[i + 1]
            i += 2
        else:
            flip = np.ones(6)
            flip[axis] = -1.0
            flip[3:] = -1.0
            flip[3 + axis] = 1.0
            minus = plus * flip
            i += 1
        out[:, :, n] = -(plus - minus) / (2.0 * steps[d])
    return out


def _mirror_axes(plate: PlateGeometry, gap: float, order: int, pivot: np.ndarray
                 ) -> tuple[bool, bool]:
    """For each of x and y: the field's mirror line passes through the plate's centre and
    the pivot, and the plate's rules are their own mirror images there
    (:func:`~matdb.physics.plate_geometry.mirrored_rules`)."""
    rules = mirrored_rules(plate, gap, order)
    return tuple(bool(ok and abs(pivot[a] - plate.mirrors[a]) <= 1e-12 * size)
                 for a, (ok, size) in enumerate(zip(rules, (plate.lx, plate.ly))))


def _surface_forces_split(field: FieldFn, plate: PlateGeometry, gap: float, pivot,
                          poses: np.ndarray, order: int, level: bool = False,
                          fold: Sequence[tuple[int, ...]] | None = None) -> np.ndarray:
    """:func:`generalized_forces_split` without the anisotropic volume torque: force and
    torque of the closed-surface integrals alone at each pose, (P, 2, 6), in one field
    evaluation.

    ``fold[p]``: mirror lines (0: ``x = cx``, 1: ``y = cy``) that map pose ``p`` onto
    itself (:func:`_fold_axes`); its surface is integrated over the nodes on one side of
    each with doubled weights (:func:`_folded_subset`) and the components odd under the
    mirror are zero. With ``level``, the field on the level surface is evaluated in the
    same call and kept for :func:`_intrinsic_rates` (unless already kept).

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 6.10 (force a
       polar vector, torque an axial one: their behaviour under reflection).
    """
    sp, sn, sw = surface_rule(plate, gap, order)
    pivot = np.asarray(pivot, dtype=float)
    fold = [()] * poses.shape[0] if fold is None else list(fold)
    rot = Rotation.from_rotvec(poses[:, 3:]).as_matrix()
    centre = pivot[None, :] + poses[:, :3]
    parts, rules = [], []
    for p, axes in enumerate(fold):  # a few poses; the nodes are vectorised
        sel, fac = _folded_subset(sp, plate, axes)
        sp_t = centre[p] + np.einsum("ij,mj->mi", rot[p], sp[sel] - pivot)
        sn_t = np.einsum("ij,mj->mi", rot[p], sn[sel])
        parts.append(sp_t)
        rules.append((sp_t, sn_t, sw[sel] * fac))
    key = _level_key(plate, gap, pivot, order)
    keep_level = level and not _level_kept(key, field)
    if keep_level:
        # the level surface on one side of the field's mirror lines: its field elsewhere
        # is the mirrored field (up to one sign, which the quadratic rates do not see)
        images = surface_images(plate, gap, order)
        kept = np.logical_and.reduce([k for _, _, k in images]) if images else None
        parts.append(sp if kept is None else sp[kept])
    b = eval_field(field, np.concatenate(parts))
    if keep_level:
        bl = b[b.shape[0] - parts[-1].shape[0]:]
        if kept is not None:
            bl = _unfolded(bl, kept, images)
        _LEVEL["entry"] = (key, field, (sp, sn, sw, bl))
    out = np.empty((poses.shape[0], 2, 6))
    start = 0
    for p, (sp_t, sn_t, w) in enumerate(rules):
        bs = b[start:start + sp_t.shape[0]]
        start += sp_t.shape[0]
        out[p] = _surface_terms(bs[None], sp_t[None], sn_t[None], w, centre[p:p + 1],
                                rot[p:p + 1, :, 2])[0]
        out[p, :, _odd_components(fold[p])] = 0.0  # zero by the mirror symmetry
    return out


def _unfolded(b_kept: np.ndarray, kept: np.ndarray, images) -> np.ndarray:
    """The field at every node of a rule from its values at the ``kept`` nodes, through
    the mirror images ``images`` (:func:`~matdb.physics.plate_geometry.surface_images`):
    B at a node's image in the line ``x = cx`` is ``(B_x, -B_y, -B_z)`` (B an axial
    vector; ``y = cy`` likewise), up to one sign for the whole field, (n, 3) [T].

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 6.10.
    """
    n = kept.size
    pos = np.full(n, -1, dtype=np.intp)
    pos[kept] = np.arange(int(kept.sum()))
    cur = np.arange(n)
    sign = np.ones((n, 3))
    for axis, image, side in images:
        flip = ~side[cur]  # on the - side of this line: take the image
        cur = np.where(flip, image[cur], cur)
        m = -np.ones(3)
        m[axis] = 1.0
        sign[flip] *= m
    rep = pos[cur]
    if np.any(rep < 0):  # pragma: no cover - guarded by surface_images' own check
        raise RuntimeError("mirror images of the level surface are not among the kept nodes")
    return b_kept[rep] * sign


#: the mirror lines (0: in x, 1: in y) that map a pose of each coordinate onto itself
_INVARIANT = {0: (1,), 1: (0,), 2: (0, 1), 3: (0,), 4: (1,), 5: ()}


def _fold_axes(d: int, mirror: tuple[bool, bool]) -> tuple[int, ...]:
    """The field's mirror lines through the plate and pivot (``mirror``, as from
    :func:`_mirror_axes`) that map a pose of coordinate ``d`` onto itself: a shift along
    x and a turn about the x axis keep the plane y = cy, and so on."""
    return tuple(a for a in _INVARIANT[d] if mirror[a])


def _folded_subset(points: np.ndarray, plate: PlateGeometry, axes: Sequence[int]
                   ) -> tuple[np.ndarray, np.ndarray]:
    """Nodes of a level rule that is its own mirror image in the lines ``axes`` through
    the plate's centre (0: x = cx, 1: y = cy; see
    :func:`~matdb.physics.plate_geometry.mirrored_rules`): a mask keeping the nodes on the
    centre line or on its + side, and their weight factors (2 off the line, 1 on it). For
    an integrand with that symmetry the folded sum is the full sum."""
    sel = np.ones(points.shape[0], dtype=bool)
    fac = np.ones(points.shape[0])
    for a in axes:
        c, size = ((plate.cx, plate.lx), (plate.cy, plate.ly))[a]
        tol = 1e-12 * size
        u = points[:, a] - c
        sel &= u >= -tol
        fac = np.where(u > tol, 2.0 * fac, fac)
    return sel, fac[sel]


def _odd_components(axes: Sequence[int]) -> list[int]:
    """Components of ``(F, tau)`` odd under the mirrors in ``axes`` (force: a polar
    vector, its ``a`` component; torque about a pivot on the mirror: an axial vector, the
    other two)."""
    out: set[int] = set()
    for a in axes:
        out.add(a)
        out.update(3 + b for b in range(3) if b != a)
    return sorted(out)


def _level_key(plate: PlateGeometry, gap: float, pivot, order: int) -> tuple:
    return (plate, float(gap), tuple(float(v) for v in pivot), int(order))


def _level_kept(key: tuple, field: FieldFn) -> bool:
    entry = _LEVEL.get("entry")
    return entry is not None and entry[0] == key and entry[1] == field


def _surface_terms(bs: np.ndarray, sp_t: np.ndarray, sn_t: np.ndarray, sw: np.ndarray,
                   centre: np.ndarray, axis: np.ndarray) -> np.ndarray:
    """Split force and torque ``-(1/(2 mu0)) closed_integral w (n, (r - C) x n) dS`` at
    posed surface points (P, m, 3) with their field, normals and weights, (P, 2, 6)."""
    be_s = np.einsum("pmi,pi->pm", bs, axis)
    w_perp = be_s ** 2
    w_par = np.einsum("pmi,pmi->pm", bs, bs) - w_perp
    lever = np.cross(sp_t - centre[:, None, :], sn_t)  # (P, m, 3)
    out = np.empty((bs.shape[0], 2, 6))
    for k, wk in enumerate((w_perp, w_par)):
        ww = wk * sw[None, :] * (-1.0 / (2.0 * MU0))
        out[:, k, :3] = np.einsum("pm,pmi->pi", ww, sn_t)
        out[:, k, 3:] = np.einsum("pm,pmi->pi", ww, lever)
    return out


def _intrinsic_rates(field: FieldFn, plate: PlateGeometry, gap: float, pivot, order: int,
                     axes: Sequence[int]) -> np.ndarray:
    """Rate of the anisotropic volume torque ``T = (1/mu0) integral_V (B.e)(B x e) dV`` per
    unit rotation about each of ``axes`` (0, 1, 2 = x, y, z) through ``pivot``, at the
    level pose, (len(axes), 3) [N m/rad per unit (|chi_perp| - |chi_par|)].

    Rotating by ``theta`` about ``a`` moves the region with velocity ``a x (r - C)`` and
    turns the c axis ``e`` at the rate ``a x e``; by Reynolds' transport theorem

        dT/dtheta = (1/mu0) [closed_integral_S (B.e)(B x e) ((a x (r - C)) . n) dS
                             + integral_V ((B.u)(B x e) + (B.e)(B x u)) dV],  u = a x e,

    which needs the field only at the level pose (no field gradient). The volume integral
    is quadratic in ``B``: its moments ``integral_V B_i B_k dV`` are surface integrals too
    (:func:`field_moments`), so only the level closed surface is evaluated. The volume
    torque of :func:`generalized_forces_split` is differenced at turned poses instead; the
    two agree to the quadrature error.

    References
    ----------
    .. [1] H. Flanders, Amer. Math. Monthly 80, 615-627 (1973) (differentiation of an
       integral over a moving region).
    .. [2] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.16 (torque
       ``M x B`` on a magnetised body).
    """
    key = _level_key(plate, gap, pivot, order)
    entry = _LEVEL.get("entry")  # one tuple, read and replaced whole (threads share it)
    if entry is not None and entry[0] == key and entry[1] == field:
        sp, sn, sw, bs = entry[2]
    else:
        sp, sn, sw = surface_rule(plate, gap, order)
        bs = eval_field(field, sp)
        _LEVEL["entry"] = (key, field, (sp, sn, sw, bs))
    pivot = np.asarray(pivot, dtype=float)
    e = np.array([0.0, 0.0, 1.0])
    q = _moments(sp, sn, sw, bs, pivot)  # integral_V B_i B_k dV
    gs = bs[:, 2:3] * np.cross(bs, e)  # (B.e)(B x e) on the surface
    out = np.empty((len(axes), 3))
    for i, ax in enumerate(axes):
        a = np.zeros(3)
        a[ax] = 1.0
        u = np.cross(a, e)
        vn = np.einsum("mi,mi->m", np.cross(a, sp - pivot), sn)
        surf = (sw * vn) @ gs
        # integral (B.u)(B x e) + (B.e)(B x u) dV, written with the moments Q_im
        vol = np.einsum("i,lmn,n,im->l", u, _LEVI, e, q) + np.einsum("i,lmn,n,im->l", e, _LEVI, u, q)
        out[i] = (surf + vol) / MU0
    return out


_LEVEL: dict = {}  # the level pose's surface field, kept for the next rotation stage
_LEVI = np.zeros((3, 3, 3))
_LEVI[0, 1, 2] = _LEVI[1, 2, 0] = _LEVI[2, 0, 1] = 1.0
_LEVI[0, 2, 1] = _LEVI[2, 1, 0] = _LEVI[1, 0, 2] = -1.0


def _moments(sp: np.ndarray, sn: np.ndarray, sw: np.ndarray, b: np.ndarray,
             origin: np.ndarray) -> np.ndarray:
    """``integral_V B_i B_k dV`` (3, 3) [T^2 m^3] over a body bounded by the closed surface
    ``(sp, sn, sw)`` (points, outward normals, weights) with the field ``b`` there, for a
    field free of sources inside the body (no magnet material, no currents).

    The Maxwell stress ``T_ij = B_i B_j - |B|^2 delta_ij / 2`` is divergence-free there,
    so ``integral_V T_ik dV = closed_integral_S (x_k - o_k) T_ij n_j dS`` (divergence
    theorem on ``(x_k - o_k) T_ij``); ``integral |B|^2 dV = -2 trace`` of that.

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.6 and 6.7
       (Maxwell stress tensor, divergence-free in a source-free region).
    """
    b2 = np.einsum("mi,mi->m", b, b)
    tn = b * np.einsum("mj,mj->m", b, sn)[:, None] - 0.5 * b2[:, None] * sn  # T n
    s = np.einsum("m,mi,mk->ik", sw, tn, sp - origin)  # integral_V T_ik dV
    s = 0.5 * (s + s.T)
    # integral B_i B_k = integral T_ik + delta_ik integral |B|^2 / 2, integral |B|^2 = -2 tr
    return s - np.trace(s) * np.eye(3)


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
              full: bool = True, staged: bool = False) -> Stability:
    """Rigid-body stiffness of the floating plate about the combined centre of mass.

    Laterally stable when ``k_x, k_y, k_pitch, k_roll > 0`` and the coupled matrices in
    ``(x, pitch)`` and ``(y, roll)`` are positive definite. ``full`` also perturbs z and
    yaw (reported, not part of the verdict: a disc is neutral in yaw). ``staged`` (with
    ``full=False``, for scans that need only the verdict) perturbs one coordinate at a
    time and stops once the verdict is settled; the verdict is the same, entries not
    computed are NaN.

    References
    ----------
    .. [1] H. Goldstein, Classical Mechanics, 3rd ed. (2002), ch. 6.
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    zc = combined_com_height(plate, gap, plate_mass, payload_kg, payload_height)
    pivot = (plate.cx, plate.cy, zc)
    if staged and not full:
        return _staged_stability(field, plate, gap, pivot, chi_perp_abs, chi_par_abs, order)
    dofs = (0, 1, 2, 3, 4, 5) if full else (0, 1, 3, 4)
    ks = stiffness_split(field, plate, gap, pivot, order, dofs=dofs)
    return _verdict(combine(ks, chi_perp_abs, chi_par_abs), dofs)


def _verdict(k: np.ndarray, dofs: Sequence[int]) -> Stability:
    pos = {d: i for i, d in enumerate(dofs)}
    ix, iy, iroll, ipitch = pos[0], pos[1], pos[3], pos[4]
    xp = k[np.ix_([ix, ipitch], [ix, ipitch])]
    yr = k[np.ix_([iy, iroll], [iy, iroll])]
    diag = [k[ix, ix], k[iy, iy], k[ipitch, ipitch], k[iroll, iroll]]
    xp_ok = bool(np.all(np.isfinite(xp))) and _pos_def(xp)
    yr_ok = bool(np.all(np.isfinite(yr))) and _pos_def(yr)
    return Stability(k=k, dofs=tuple(DOF[d] for d in dofs), k_x=float(k[ix, ix]),
                     k_y=float(k[iy, iy]), k_pitch=float(k[ipitch, ipitch]),
                     k_roll=float(k[iroll, iroll]),
                     k_yaw=float(k[pos[5], pos[5]]) if 5 in pos else None,
                     k_z_matrix=float(k[pos[2], pos[2]]) if 2 in pos else None,
                     xp_definite=xp_ok, yr_definite=yr_ok,
                     laterally_stable=bool(all(d > 0 for d in diag) and xp_ok and yr_ok))


LATERAL_DOFS = (0, 1, 3, 4)  # x, y, roll, pitch: the coordinates of the verdict
_STAGES = ((0,), (1,), (4,), (3,))  # x, y, pitch, roll: one coordinate perturbed at a time


def _staged_stability(field: FieldFn, plate: PlateGeometry, gap: float, pivot,
                      chi_perp_abs: float, chi_par_abs: float, order: int) -> Stability:
    """:func:`stability` over :data:`LATERAL_DOFS`, one perturbed coordinate at a time,
    stopping as soon as the verdict is settled (a non-positive diagonal term or coupled
    block). The matrix entries computed are those of the full computation; entries
    never computed are NaN (only when the verdict is "not stable")."""
    n = len(LATERAL_DOFS)
    pos = {d: i for i, d in enumerate(LATERAL_DOFS)}
    raw = np.full((n, n), np.nan)
    done: list[int] = []
    swap = _swap_ok(plate, gap, order, np.asarray(pivot, dtype=float))
    for stage in _STAGES:
        if swap and len(stage) == 1 and _SWAP_SOURCE.get(stage[0]) in done:
            # y from x, roll from pitch: the diagonal maps the one onto the other
            raw[:, pos[stage[0]]] = _swapped_column(raw[:, pos[_SWAP_SOURCE[stage[0]]]],
                                                    LATERAL_DOFS, stage[0])
        else:
            cols = combine(_columns(field, plate, gap, pivot, order, stage, LATERAL_DOFS, None,
                                    2e-4), chi_perp_abs, chi_par_abs)
            for j, d in enumerate(stage):
                raw[:, pos[d]] = cols[:, j]
        done += list(stage)
        sym = _symmetric(raw)
        ok = all(sym[pos[d], pos[d]] > 0 for d in done)
        for a, b in ((0, 4), (1, 3)):
            if a in done and b in done:
                ok = ok and _pos_def(sym[np.ix_([pos[a], pos[b]], [pos[a], pos[b]])])
        if not ok:
            break
    return _verdict(_symmetric(raw), LATERAL_DOFS)
