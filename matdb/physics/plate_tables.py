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

from typing import Callable

import numpy as np

from matdb.physics import plate as P

FieldFn = Callable[[np.ndarray], np.ndarray]

#: order of the (x, y, roll, pitch) matrices of :func:`tilt_tables`
TILT_DOFS = (0, 1, 3, 4)


def lateral_line_integrals(field: FieldFn, lx: float, ly: float, breaks_x, breaks_y, heights,
                           order: int, floor_m: float, step_m: float) -> np.ndarray:
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

    Returns
    -------
    ndarray, shape (n, 4)
        x faces ``w_z``, x faces ``w_xy``, y faces ``w_z``, y faces ``w_xy`` [T^2].

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    hs = np.atleast_1d(np.asarray(heights, dtype=float))
    d = float(step_m)
    pts, wts, idx, comp = [], [], [], []
    for i, h in enumerate(hs):
        scale = max(float(h), floor_m)
        y, wy = P.gauss_panels(P.graded_breaks(-ly / 2, ly / 2, breaks_y, scale), order)
        x, wx = P.gauss_panels(P.graded_breaks(-lx / 2, lx / 2, breaks_x, scale), order)
        for face in (1.0, -1.0):
            for s in (1.0, -1.0):  # x faces, central difference in x
                pts.append(np.column_stack([np.full(y.size, face * lx / 2 + s * d), y,
                                            np.full(y.size, h)]))
                wts.append(wy * s * face / (2 * d))
                idx.append(np.full(y.size, i))
                comp.append(np.zeros(y.size, dtype=int))
            for s in (1.0, -1.0):  # y faces
                pts.append(np.column_stack([x, np.full(x.size, face * ly / 2 + s * d),
                                            np.full(x.size, h)]))
                wts.append(wx * s * face / (2 * d))
                idx.append(np.full(x.size, i))
                comp.append(np.ones(x.size, dtype=int))
    b = field(np.concatenate(pts))
    w = np.concatenate(wts)
    ii = np.concatenate(idx)
    cc = np.concatenate(comp)
    wz = w * b[:, 2] ** 2
    wxy = w * (b[:, 0] ** 2 + b[:, 1] ** 2)
    out = np.zeros((hs.size, 4))
    for c in (0, 1):
        sel = cc == c
        out[:, 2 * c] = np.bincount(ii[sel], weights=wz[sel], minlength=hs.size)
        out[:, 2 * c + 1] = np.bincount(ii[sel], weights=wxy[sel], minlength=hs.size)
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
    count = np.sum(m[r] >= y[:, None], axis=1)
    n = G.shape[1]
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


def interp_rows(tab: np.ndarray, rows: np.ndarray, x: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Linear interpolation of ``tab[rows[k], :]`` (a function on ``grid``) at ``x[k]``
    (clamped to the grid)."""
    xi = np.clip(x, grid[0], grid[-1])
    j = np.clip(np.searchsorted(grid, xi, side="right") - 1, 0, grid.size - 2)
    f = (xi - grid[j]) / (grid[j + 1] - grid[j])
    return tab[rows, j] * (1 - f) + tab[rows, j + 1] * f
