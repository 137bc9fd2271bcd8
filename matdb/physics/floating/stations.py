"""Several floating-magnet stations under one rigid payload: the payload's weight shared
by the stations (statics), the lifter distances with every lifter pulling on every floater,
and the payload's 6 x 6 rigid-body stiffness.

References
----------
.. [1] J. L. Meriam and L. G. Kraige, "Engineering Mechanics: Statics", 7th ed., Wiley
   (2012), ch. 3 (equilibrium of a rigid body on supports).
.. [2] M. D. Simon, L. O. Heflinger and A. K. Geim, "Diamagnetically stabilized magnet
   levitation", Am. J. Phys. 69, 702-713 (2001).
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import root

from matdb.errors import InputError, PhysicsError
from matdb.physics.floating.body import BodySet
from matdb.physics.floating.lifter import lifter_force

__all__ = ["weight_shares", "body_stiffness", "placed_others", "coupled_heights"]


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


def body_stiffness(stations_k: list[dict], positions, com, payload_weight: float) -> np.ndarray:
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


def placed_others(stations, models, heights, i: int) -> list:
    """The lifters of every station but ``i``, placed relative to floater ``i``'s centre."""
    out = []
    for j, (sj, mj) in enumerate(zip(stations, models)):
        if j != i:
            c = mj.lifter_at(heights[j]).centre
            out.append(mj.lifter0.at((sj.x - stations[i].x + c[0], sj.y - stations[i].y + c[1], c[2])))
    return out


def coupled_heights(stations, models, totals, start) -> tuple[list, list]:
    """Lifter distances at which every floater's total pull (all lifters) equals its load.

    Solves ``F_i(D_1..D_n) = W_i`` with scipy's hybrid Powell method from the uncoupled
    distances, then fixes the other lifters in each station model. Returns the
    distances and, per station, the other lifters' share of the pull.
    """
    n = len(models)

    def pulls(h):
        out = np.empty(n)
        for i, m in enumerate(models):
            src = BodySet([m.lifter_at(h[i])] + placed_others(stations, models, h, i))
            out[i] = lifter_force(src, m.floater)[2]
        return out

    sol = root(lambda h: pulls(h) / totals - 1.0, np.asarray(start, dtype=float), method="hybr",
               options={"xtol": 1e-12})
    if not sol.success:
        raise PhysicsError(f"station: no set of lifter distances holds every floater ({sol.message})")
    h = [float(v) for v in sol.x]
    cross = []
    for i, m in enumerate(models):
        others = placed_others(stations, models, h, i)
        m.set_others(others)
        own = lifter_force(m.lifter_at(h[i]), m.floater)[2]
        cross.append(float(abs(1.0 - own / totals[i])))
    return h, cross
