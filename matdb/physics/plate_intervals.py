"""Floating plate, sideways: lateral force and equilibrium, stability judged there, and
the intervals of square plate sides that float stably (:func:`stable_side_intervals`).

Stability is not monotone in the plate's side; each side is judged at the plate's
lateral equilibrium near the design's centre. Lengths in metres, forces in newtons.

References
----------
.. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
.. [2] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed. (2002), ch. 6.
.. [3] M. J. D. Powell, "A hybrid method for nonlinear equations", in Numerical Methods
   for Nonlinear Algebraic Equations, P. Rabinowitz (ed.), Gordon and Breach (1970).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Sequence

import numpy as np
from scipy import optimize

from matdb.physics.plate_geometry import (DEFAULT_ORDER, MIN_GAP, FieldFn, PlateGeometry,
                                          eval_field, side_rule)
from matdb.physics.plate_lift import equilibrium_gap
from matdb.physics.plate_stiffness import Stability, stability
from matdb.constants import G_STANDARD, MU0

def is_stable_floating(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                       chi_par_abs: float, density: float, payload_kg: float = 0.0,
                       payload_height: float = 0.0, g_start: float = MIN_GAP,
                       order: int = 4) -> bool:
    """True when the plate floats and is laterally stable (a cheaper rule, for scans).

    References
    ----------
    Module reference [1] (a float is stable where the lift falls with height); the gap is
    found as in :func:`matdb.physics.plate_lift.equilibrium_gap` (Brent's root finder).
    """
    mass = density * plate.volume
    weight = (mass + payload_kg) * G_STANDARD
    gap = equilibrium_gap(field, plate, chi_perp_abs, chi_par_abs, weight, g_start, order,
                          xtol=None)
    if gap is None:
        return False
    st = stability(field, plate, gap, chi_perp_abs, chi_par_abs, mass, payload_kg,
                   payload_height, order, full=False, staged=True)
    return st.laterally_stable


def stable_side_max(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                    chi_par_abs: float, density: float, extent: float,
                    payload_kg: float = 0.0, payload_height: float = 0.0,
                    g_start: float = MIN_GAP, tol: float = 1e-4, n_scan: int = 8,
                    order: int = 4) -> float | None:
    """Largest side of a square plate that floats stably over the arrangement [m].

    Scans sides ``1.2 extent * k / n_scan`` upward (``extent``: the larger horizontal
    size of the arrangement) and stops at the first unstable side after a stable one,
    then bisects between the two to ``tol`` (people cut plates down from the smallest
    that works). If the largest scanned side is still stable, it is returned.

    Returns
    -------
    float or None
        None when the plate is not square or no scanned side is stable [m].

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    if not plate.is_square:
        return None
    sides = np.linspace(1.2 * extent / n_scan, 1.2 * extent, n_scan)

    def ok(side: float) -> bool:
        return is_stable_floating(field, plate.with_side(float(side)), chi_perp_abs,
                                  chi_par_abs, density, payload_kg, payload_height, g_start,
                                  order)

    last_ok = None
    for side in sides:
        if ok(side):
            last_ok = float(side)
        elif last_ok is not None:
            lo, hi = last_ok, float(side)
            while hi - lo > tol:
                mid = 0.5 * (lo + hi)
                if ok(mid):
                    lo = mid
                else:
                    hi = mid
            return lo
    return last_ok


# ---------------------------------------------------------------------------
# lateral equilibrium and stability over plate size
# ---------------------------------------------------------------------------
SETTLE_TOL = 1e-3  # a sideways force below this fraction of the weight counts as zero


def lateral_force(field: FieldFn, plate: PlateGeometry, gap: float, chi_perp_abs: float,
                  chi_par_abs: float, order: int = DEFAULT_ORDER) -> np.ndarray:
    """Net sideways magnetic force on the level plate, ``(F_x, F_y)`` [N].

    Only the vertical side faces contribute (the normals of the top and bottom faces are
    vertical): ``F_h = -(1/(2 mu0)) integral_sides w n dS`` with
    ``w = |chi_perp| B_z^2 + |chi_par| (B_x^2 + B_y^2)`` (module docstring).

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]``.
    plate : PlateGeometry
        Level plate, centre ``(cx, cy)`` [m].
    gap : float
        Height of the bottom face above the magnets' top faces [m].
    chi_perp_abs, chi_par_abs : float
        ``|chi|`` along / across the c axis (vertical) [1].

    Returns
    -------
    ndarray (2,)
        ``(F_x, F_y)`` [N]; zero without a field evaluation for a plate centred on both
        mirror lines of the field (``plate.mirrors``), where the sideways forces on
        opposite faces cancel.

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    .. [2] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.16.
    """
    if _centred_on_mirrors(plate):
        return np.zeros(2)  # both components cancel by the field's mirror symmetry
    pts, nrm, w = side_rule(plate, gap, gap + plate.thickness, order)
    b = eval_field(field, pts)
    bz2 = b[:, 2] ** 2
    wd = chi_perp_abs * bz2 + chi_par_abs * (b[:, 0] ** 2 + b[:, 1] ** 2)
    return -(wd * w) @ nrm[:, :2] / (2.0 * MU0)


def _centred_on_mirrors(plate: PlateGeometry) -> bool:
    mx, my = plate.mirrors
    return (mx is not None and my is not None and abs(mx - plate.cx) <= 1e-12 * plate.lx
            and abs(my - plate.cy) <= 1e-12 * plate.ly)


@dataclass(frozen=True)
class LateralEquilibrium:
    """Where a plate placed at ``start`` comes to rest sideways (SI).

    ``found`` is False when no point with a net sideways force below
    :data:`SETTLE_TOL` times the weight was found within ``max_shift`` of the start (or
    the plate does not float there); ``cx``, ``cy``, ``gap`` are then None.
    """

    found: bool
    cx: float | None
    cy: float | None
    gap: float | None
    start: tuple[float, float]
    force_at_start_n: float | None  # |F_h| where the plate was placed [N]
    weight_n: float

    @property
    def shift_m(self) -> float | None:
        """Distance from the start to the equilibrium [m]."""
        if not self.found:
            return None
        return math.hypot(self.cx - self.start[0], self.cy - self.start[1])


def lateral_equilibrium(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                        chi_par_abs: float, density: float, payload_kg: float = 0.0,
                        g_start: float = MIN_GAP, order: int = 4,
                        max_shift: float | None = None) -> LateralEquilibrium:
    """Lateral equilibrium of the floating plate nearest its given centre.

    At each trial centre the plate floats at its equilibrium gap there
    (:func:`equilibrium_gap`), and the net sideways force :func:`lateral_force` is
    driven to zero by Powell's hybrid method (``scipy.optimize.root``) started at the
    given centre. A centre where ``|F_h| <= SETTLE_TOL * W`` is accepted at once (a
    symmetric placement).

    Parameters
    ----------
    max_shift : float, optional
        Largest accepted distance from the given centre [m] (default: a quarter of the
        plate's larger side).

    Returns
    -------
    LateralEquilibrium

    References
    ----------
    .. [1] M. J. D. Powell, "A hybrid method for nonlinear equations", in Numerical
       Methods for Nonlinear Algebraic Equations, P. Rabinowitz (ed.), Gordon and Breach
       (1970) (MINPACK hybrd, behind scipy.optimize.root).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    mass = density * plate.volume
    weight = (mass + payload_kg) * G_STANDARD
    start = (plate.cx, plate.cy)
    scale = max(plate.lx, plate.ly)
    limit = 0.25 * scale if max_shift is None else float(max_shift)

    def force_at(c: np.ndarray) -> tuple[np.ndarray, float | None]:
        pl = replace(plate, cx=float(c[0]), cy=float(c[1]))
        g = equilibrium_gap(field, pl, chi_perp_abs, chi_par_abs, weight, g_start, order,
                            xtol=None)
        if g is None:
            return np.full(2, np.nan), None
        return lateral_force(field, pl, g, chi_perp_abs, chi_par_abs, order), g

    c0 = np.array(start, dtype=float)
    f0, g0 = force_at(c0)
    none = LateralEquilibrium(False, None, None, None, start, None, weight)
    if g0 is None:
        return none
    fmag0 = float(np.hypot(*f0))
    if fmag0 <= SETTLE_TOL * weight:
        return LateralEquilibrium(True, start[0], start[1], g0, start, fmag0, weight)

    # the gap changes little with the lateral position: solve the root at a fixed gap,
    # re-solve the gap there, and repeat until the gap settles
    c, g = c0.copy(), g0
    f = f0
    for _ in range(4):
        def fun(u: np.ndarray, g=g) -> np.ndarray:
            pl = replace(plate, cx=float(c0[0] + u[0] * scale), cy=float(c0[1] + u[1] * scale))
            return lateral_force(field, pl, g, chi_perp_abs, chi_par_abs, order) / weight

        sol = optimize.root(fun, (c - c0) / scale, method="hybr",
                            options={"xtol": 1e-7, "eps": 1e-4})
        c = c0 + sol.x * scale
        if float(np.hypot(*(c - c0))) > limit:
            break
        g_old = g
        f, g = force_at(c)
        if g is None or abs(g - g_old) <= 1e-3 * g_old:
            break
    ok = (g is not None and np.all(np.isfinite(f)) and float(np.hypot(*f)) <= SETTLE_TOL * weight
          and float(np.hypot(*(c - c0))) <= limit)
    if not ok:
        return LateralEquilibrium(False, None, None, None, start, fmag0, weight)
    return LateralEquilibrium(True, float(c[0]), float(c[1]), g, start, fmag0, weight)


@dataclass(frozen=True)
class EquilibriumStability:
    """A plate judged where it comes to rest: its equilibrium and the stiffness there."""

    equilibrium: LateralEquilibrium
    stability: Stability | None

    @property
    def stable(self) -> bool:
        return bool(self.equilibrium.found and self.stability is not None
                    and self.stability.laterally_stable)


def stability_at_equilibrium(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                             chi_par_abs: float, density: float, payload_kg: float = 0.0,
                             payload_height: float = 0.0, g_start: float = MIN_GAP,
                             order: int = 4, max_shift: float | None = None,
                             full: bool = False) -> EquilibriumStability:
    """Find the lateral equilibrium near the plate's centre and judge stability there.

    Not stable when there is no lateral equilibrium near the centre
    (:func:`lateral_equilibrium`); otherwise the verdict of :func:`stability` at the
    equilibrium centre and gap.

    References
    ----------
    .. [1] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed. (2002), ch. 6
       (a rest point is stable when the stiffness matrix there is positive definite).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    eq = lateral_equilibrium(field, plate, chi_perp_abs, chi_par_abs, density, payload_kg,
                             g_start, order, max_shift)
    if not eq.found:
        return EquilibriumStability(eq, None)
    pl = replace(plate, cx=eq.cx, cy=eq.cy)
    st = stability(field, pl, eq.gap, chi_perp_abs, chi_par_abs, density * plate.volume,
                   payload_kg, payload_height, order, full=full, staged=not full)
    return EquilibriumStability(eq, st)


def stable_side_intervals(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                          chi_par_abs: float, density: float, extent: float,
                          payload_kg: float = 0.0, payload_height: float = 0.0,
                          g_start: float = MIN_GAP, tol: float = 1e-4, n_scan: int = 12,
                          order: int = 4, known: dict[float, bool] | None = None
                          ) -> list[list[float]]:
    """Intervals of square plate sides that float stably at their lateral equilibrium.

    Stability is not monotone in the side: a chip much smaller than the magnets can sit
    over an unstable point of the field, and a plate much wider than the arrangement
    slides or tips off. Sides ``s_k = s_max k / n_scan`` (``s_max = 1.2 extent``, and at
    least 1.1 times the plate's own side), and ``s_1 / 4`` and ``s_1 / 2``, are each judged by
    :func:`stability_at_equilibrium` (the plate centred where the design puts it, moved
    to the nearest lateral equilibrium within a quarter of the plate's own side); the
    plate's own side is always one of the
    scanned sides. Each change of verdict between neighbouring sides is bisected to
    ``tol``. An interval ending at the last scanned side is open above (it ends there
    only because the scan does).

    Parameters
    ----------
    extent : float
        Larger horizontal size of the magnet arrangement [m].
    known : dict, optional
        Verdicts already established for some sides (``{side: stable}``), used instead of
        recomputing them (e.g. the plate's own side from a finer analysis).

    Returns
    -------
    list of [low, high]
        Sorted, disjoint [m]; empty when no scanned side is stable or the plate is not
        square.

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    .. [2] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed. (2002), ch. 6.
    """
    if not plate.is_square:
        return []
    own = float(plate.lx)
    top = max(1.2 * extent, 1.1 * own)
    sides = set(float(s) for s in np.linspace(top / n_scan, top, n_scan))
    sides.update((top / n_scan / 4, top / n_scan / 2))  # small chips too
    sides.add(own)
    memo: dict[float, bool] = dict(known or {})
    shift = 0.25 * max(plate.lx, plate.ly)  # "near the centre": a quarter of the plate's side

    def ok(side: float) -> bool:
        if side not in memo:
            memo[side] = stability_at_equilibrium(
                field, plate.with_side(side), chi_perp_abs, chi_par_abs, density, payload_kg,
                payload_height, g_start, order, max_shift=shift).stable
        return memo[side]

    grid = sorted(sides)
    verdict = [ok(s) for s in grid]

    def edge(lo: float, hi: float, lo_ok: bool) -> float:
        # bisect between a stable and an unstable side; returns the last stable side
        a, b = lo, hi
        while b - a > tol:
            mid = 0.5 * (a + b)
            if ok(mid) == lo_ok:
                a = mid
            else:
                b = mid
        return a if lo_ok else b

    out: list[list[float]] = []
    i = 0
    while i < len(grid):
        if not verdict[i]:
            i += 1
            continue
        j = i
        while j + 1 < len(grid) and verdict[j + 1]:
            j += 1
        low = grid[i] if i == 0 else edge(grid[i - 1], grid[i], False)
        high = grid[j] if j == len(grid) - 1 else edge(grid[j], grid[j + 1], True)
        out.append([float(low), float(high)])
        i = j + 1
    return out


def interval_holding(intervals: Sequence[Sequence[float]], side: float,
                     rel_tol: float = 1e-9) -> list[float] | None:
    """The interval of ``intervals`` that contains ``side`` (None when none does).

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    for lo, hi in intervals:
        if lo * (1 - rel_tol) <= side <= hi * (1 + rel_tol):
            return [float(lo), float(hi)]
    return None
