"""Point dipoles (SI: moments in A m^2, fields in tesla)."""

from __future__ import annotations

import numpy as np

from matdb.physics.fields._common import MU0_OVER_4PI, _as_points, _as_rows, _chunks, _same_count

__all__ = ["dipole_B"]


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

