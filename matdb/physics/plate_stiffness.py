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
                                          surface_rule, volume_rule)
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
    (2, len(rows), len(perturbed)); central differences of
    :func:`generalized_forces_split` (the steps of :func:`stiffness_split`)."""
    hs = step_m if step_m is not None else max(1e-7, 5e-4 * min(plate.lx, plate.ly, 10 * gap))
    steps = np.array([hs] * 3 + [step_rad] * 3)[list(perturbed)]
    poses = np.zeros((2 * len(perturbed), 6))
    for j, d in enumerate(perturbed):
        poses[2 * j, d] = steps[j]
        poses[2 * j + 1, d] = -steps[j]
    q = np.empty((poses.shape[0], 2, 6))
    moved = np.array([d < 3 for d in perturbed for _ in (0, 1)], dtype=bool)
    for sel, tq in ((moved, False), (~moved, True)):  # translations: forces only
        if np.any(sel):
            q[sel] = generalized_forces_split(field, plate, gap, pivot, poses[sel], order, tq)
    q = q[:, :, list(rows)]
    k = -(q[0::2] - q[1::2]) / (2.0 * steps[:, None, None])  # (j, comp, i)
    return np.transpose(k, (1, 2, 0))  # (comp, i, j)


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
    for stage in _STAGES:
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
