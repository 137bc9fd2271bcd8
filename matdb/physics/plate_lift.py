"""Floating plate, vertical: lift integrals, lift force, equilibrium gap, ``k_z`` and the
whole-plate analysis (:func:`analyse_plate`).

``F(g) = (1/(2 mu0)) integral_footprint [w(g) - w(g + t)] dA`` with
``w = |chi_perp| B_z^2 + |chi_par| (B_x^2 + B_y^2)`` [T^2]; forces in newtons, gaps in
metres above the magnets' top faces (module docstring of :mod:`matdb.physics.plate`).

References
----------
.. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997) (full entry in
   :mod:`matdb.physics.plate`).
.. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
.. [3] R. P. Brent, Algorithms for Minimization without Derivatives, Prentice-Hall (1973).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import optimize

from matdb.errors import InputError
from matdb.physics.plate_geometry import (DEFAULT_ORDER, MIN_GAP, FieldFn, PlateGeometry,
                                          eval_field, footprint_rule)
from matdb.physics.plate_stiffness import Stability, stability
from matdb.constants import G_STANDARD, MU0

# ---------------------------------------------------------------------------
# vertical force
# ---------------------------------------------------------------------------
def plane_integrals(field: FieldFn, plate: PlateGeometry, heights, order: int = DEFAULT_ORDER,
                    rule_heights=None, memo: "PlaneMemo | None" = None
                    ) -> tuple[np.ndarray, np.ndarray]:
    """Footprint integrals of ``B_z^2`` and ``B_x^2 + B_y^2`` on horizontal planes.

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]``.
    plate : PlateGeometry
    heights : array_like
        Heights of the planes above the magnets' top faces [m].
    order : int
        Gauss-Legendre nodes per panel.
    rule_heights : array_like, optional
        Heights the quadrature is graded for (default: ``heights``); giving the same rule
        to neighbouring heights makes finite differences smooth.
    memo : PlaneMemo, optional
        Integrals already computed for this field and plate (used and filled; ignored
        when it belongs to another field or plate).

    Returns
    -------
    Iz, Ixy : ndarray
        ``integral B_z^2 dA`` and ``integral (B_x^2 + B_y^2) dA`` per height [T^2 m^2].

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997) (energy density
       ``-chi B^2 / (2 mu0)`` of a weak diamagnet).
    """
    h = np.atleast_1d(np.asarray(heights, dtype=float))
    rh = h if rule_heights is None else np.broadcast_to(np.asarray(rule_heights, float), h.shape)
    if memo is not None and memo.serves(field, plate):
        return memo.planes(h, rh, order)
    return _planes(field, plate, h, rh, order)


def _planes(field: FieldFn, plate: PlateGeometry, h: np.ndarray, rh: np.ndarray, order: int
            ) -> tuple[np.ndarray, np.ndarray]:
    cache: dict[float, tuple] = {}
    pts, wts, idx = [], [], []
    for i, (hi, ri) in enumerate(zip(h, rh)):
        key = float(ri)
        if key not in cache:
            cache[key] = footprint_rule(plate, max(key, 1e-9), order, folded=True)
        x, y, w = cache[key]
        pts.append(np.column_stack([x, y, np.full(x.size, hi)]))
        wts.append(w)
        idx.append(np.full(x.size, i))
    b = eval_field(field, np.concatenate(pts))
    w = np.concatenate(wts)
    idx = np.concatenate(idx)
    iz = np.bincount(idx, weights=w * b[:, 2] ** 2, minlength=h.size)
    ixy = np.bincount(idx, weights=w * (b[:, 0] ** 2 + b[:, 1] ** 2), minlength=h.size)
    return iz, ixy


class PlaneMemo:
    """Plane integrals of one field under one plate, remembered by (height, rule height,
    order) [m].

    Every plate result is linear in ``(|chi_perp|, |chi_par|)`` and quadratic in the
    field's scale (module docstring of :mod:`matdb.physics.plate`): with the field of the
    magnets at one temperature, the analysis at another temperature, or with minimum-spec
    remanence, is the same analysis with both ``|chi|`` multiplied by ``s^2`` (``s`` the
    ratio of remanences), so the same memo serves all of them and integrals at heights
    already visited are not computed again.

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997) (energy linear in chi,
       quadratic in B).
    """

    def __init__(self, field: FieldFn, plate: PlateGeometry):
        self.field = field
        self.plate = plate
        self._store: dict[tuple[float, float, int], tuple[float, float]] = {}

    def serves(self, field: FieldFn, plate: PlateGeometry) -> bool:
        """True when ``field`` and ``plate`` are the ones this memo was made for."""
        return (field is self.field or field == self.field) and plate == self.plate

    def planes(self, h: np.ndarray, rh: np.ndarray, order: int) -> tuple[np.ndarray, np.ndarray]:
        keys = [(float(a), float(b), int(order)) for a, b in zip(h, rh)]
        todo = [k for k in dict.fromkeys(keys) if k not in self._store]
        if todo:
            iz, ixy = _planes(self.field, self.plate, np.array([k[0] for k in todo]),
                              np.array([k[1] for k in todo]), order)
            for k, a, b in zip(todo, iz, ixy):
                self._store[k] = (float(a), float(b))
        vals = np.array([self._store[k] for k in keys], dtype=float).reshape(len(keys), 2)
        return vals[:, 0], vals[:, 1]


def plate_surface_integrals(field: FieldFn, plate: PlateGeometry, gaps,
                            order: int = DEFAULT_ORDER, memo: PlaneMemo | None = None
                            ) -> tuple[np.ndarray, np.ndarray]:
    """Bottom- and top-face integrals of the plate for each gap, split by field component.

    Computed once per geometry at unit polarisation, they give the lift of any material
    and any remanence of a one-Br arrangement:

        F(g) = (|chi_perp| (Iz[:, 0] - Iz[:, 1]) + |chi_par| (Ixy[:, 0] - Ixy[:, 1]))
               * B_r^2 / (2 mu0)

    (:func:`lift_from_integrals`).

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]``, e.g. ``Arrangement.B``.
    plate : PlateGeometry
    gaps : array_like
        Heights of the plate's bottom face above the magnets' top faces [m].

    Returns
    -------
    Iz, Ixy : ndarray, shape (n_gaps, 2)
        Column 0 at the bottom face (height ``g``), column 1 at the top face
        (``g + t``) [T^2 m^2].

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    g = np.atleast_1d(np.asarray(gaps, dtype=float))
    if np.any(g < 0):
        raise InputError("gap: expected a gap of zero or more")
    iz, ixy = plane_integrals(field, plate, np.concatenate([g, g + plate.thickness]), order,
                               memo=memo)
    n = g.size
    return np.column_stack([iz[:n], iz[n:]]), np.column_stack([ixy[:n], ixy[n:]])


def lift_from_integrals(iz: np.ndarray, ixy: np.ndarray, chi_perp_abs: float,
                        chi_par_abs: float, br_scale: float = 1.0) -> np.ndarray:
    """Vertical magnetic force [N] from :func:`plate_surface_integrals`.

    Parameters
    ----------
    iz, ixy : (n, 2) ndarray [T^2 m^2]
    chi_perp_abs, chi_par_abs : float
        Magnitudes of the SI volume susceptibilities (c axis vertical).
    br_scale : float
        Factor on the field (``B_r`` [T] when the integrals are at unit polarisation).

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    return (chi_perp_abs * (iz[:, 0] - iz[:, 1]) + chi_par_abs * (ixy[:, 0] - ixy[:, 1])) \
        * br_scale ** 2 / (2.0 * MU0)


def lift_force(field: FieldFn, plate: PlateGeometry, gaps, chi_perp_abs: float,
               chi_par_abs: float, order: int = DEFAULT_ORDER, memo: PlaneMemo | None = None
               ) -> np.ndarray:
    """Vertical magnetic force on the plate, positive upward [N], for each gap [m].

    ``F(g) = (1/(2 mu0)) integral_footprint [w(g) - w(g + t)] dA`` with
    ``w = |chi_perp| B_z^2 + |chi_par| (B_x^2 + B_y^2)``.

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    .. [2] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    iz, ixy = plate_surface_integrals(field, plate, gaps, order, memo)
    return lift_from_integrals(iz, ixy, chi_perp_abs, chi_par_abs)


def vertical_stiffness(field: FieldFn, plate: PlateGeometry, gap: float, chi_perp_abs: float,
                       chi_par_abs: float, order: int = DEFAULT_ORDER,
                       step: float | None = None, memo: PlaneMemo | None = None) -> float:
    """``k_z = -dF/dg`` [N/m] by a central difference on one fixed quadrature rule.

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    """
    h = step if step is not None else max(1e-7, 1e-3 * gap)
    t = plate.thickness
    hs = np.array([gap + h, gap - h, gap + h + t, gap - h + t])
    iz, ixy = plane_integrals(field, plate, hs, order, rule_heights=[gap, gap, gap + t, gap + t],
                              memo=memo)
    f = lambda i, j: (chi_perp_abs * (iz[i] - iz[j]) + chi_par_abs * (ixy[i] - ixy[j])) / (2 * MU0)
    return -(f(0, 2) - f(1, 3)) / (2 * h)


def highest_stable_root(gaps: np.ndarray, forces: np.ndarray, weight: float,
                        force_at: Callable[[float], float], xtol: float = 1e-9) -> float | None:
    """Highest gap where ``F(g) = W`` with ``dF/dg < 0`` (brentq on the bracketing pair).

    Parameters
    ----------
    gaps, forces : ndarray
        A sampled lift curve, gaps increasing [m], [N].
    weight : float
        [N]
    force_at : callable
        ``F(g)`` for the refinement.

    Returns
    -------
    float or None
        The equilibrium gap [m], or None when the curve never falls through ``W``.

    References
    ----------
    Module references [2] (a float is stable where the lift falls with height) and [3]
    (Brent's root finder behind scipy.optimize.brentq).
    """
    above = forces >= weight
    idx = np.nonzero(above[:-1] & ~above[1:])[0]
    if idx.size == 0:
        return None
    i = int(idx[-1])
    a, b = float(gaps[i]), float(gaps[i + 1])
    fa, fb = forces[i] - weight, forces[i + 1] - weight
    if fa == 0:
        return a
    return float(optimize.brentq(lambda g: force_at(g) - weight, a, b, xtol=xtol, rtol=1e-12)) \
        if fb < 0 else b


def max_lift_above(gaps: np.ndarray, forces: np.ndarray, g_req: float,
                   force_at: Callable[[float], float]) -> tuple[float, float]:
    """Largest magnetic lift available at or above the required gap.

    A load ``W`` floats at a gap >= ``g_req`` when ``W <= max_{g >= g_req} F(g)`` (if the
    curve rises then falls, the equilibrium sits above the peak).

    Returns
    -------
    (force [N], gap where it is reached [m])

    References
    ----------
    Module references [2] (the equilibrium above the peak) and [3] (Brent's bounded
    minimiser behind scipy.optimize.minimize_scalar).
    """
    f_req = float(force_at(g_req))
    sel = gaps > g_req
    best_f, best_g = f_req, g_req
    if np.any(sel):
        gs, fs = gaps[sel], forces[sel]
        j = int(np.argmax(fs))
        if fs[j] > best_f:
            lo = gs[j - 1] if j > 0 else g_req
            hi = gs[j + 1] if j + 1 < gs.size else gs[j]
            res = optimize.minimize_scalar(lambda g: -force_at(g), bounds=(lo, hi),
                                           method="bounded", options={"xatol": 1e-8})
            cand = [(float(fs[j]), float(gs[j])), (float(-res.fun), float(res.x))]
            best_f, best_g = max(cand + [(best_f, best_g)])
    return best_f, best_g


@dataclass(frozen=True)
class PlateResult:
    """Outcome of :func:`analyse_plate` (SI)."""

    gaps: np.ndarray
    forces: np.ndarray
    weight: float
    gap: float | None
    k_z: float | None
    f_z: float | None
    stability: Stability | None
    max_lift: float
    max_lift_gap: float
    plate_mass: float

    @property
    def floats(self) -> bool:
        return self.gap is not None


def lift_force_fn(field, plate, chi_perp_abs, chi_par_abs, order, memo=None):
    """The lift [N] as a function of the gap [m] alone (the other arguments as in
    :func:`lift_force`), for root finders and line fits."""

    def f(g: float) -> float:
        return float(lift_force(field, plate, [g], chi_perp_abs, chi_par_abs, order, memo)[0])
    return f


def lift_curve_range(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                     chi_par_abs: float, weight: float, g_start: float, g_end: float = 3e-3,
                     order: int = DEFAULT_ORDER, g_cap: float = 0.2,
                     memo: PlaneMemo | None = None) -> float:
    """Upper end of the lift curve: ``g_end``, or doubled until ``F < W`` (at most ``g_cap``).

    References
    ----------
    Module reference [2] (the lift falls with height beyond the peak).
    """
    f = lift_force_fn(field, plate, chi_perp_abs, chi_par_abs, order, memo)
    g = max(g_end, g_start + 1e-3)
    while f(g) >= weight and g < g_cap:
        g *= 2.0
    return g


def analyse_plate(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                  chi_par_abs: float, density: float, payload_kg: float = 0.0,
                  payload_height: float = 0.0, g_start: float = MIN_GAP,
                  g_req: float | None = None, n_gaps: int = 60,
                  order: int = DEFAULT_ORDER, with_stability: bool = True,
                  g_end: float = 3e-3, memo: PlaneMemo | None = None,
                  full_stability: bool = True) -> PlateResult:
    """Lift curve, equilibrium, vertical frequency, stability and lift at a required gap.

    Parameters
    ----------
    field : callable
        ``field(points (n, 3) [m]) -> B (n, 3) [T]``.
    plate : PlateGeometry
    chi_perp_abs, chi_par_abs : float
        ``|chi|`` for field along / across the c axis (SI volume).
    density : float
        Plate density [kg/m^3].
    payload_kg, payload_height : float
        Payload mass [kg] and its centre-of-mass height above the plate top [m].
    g_start : float
        Lowest gap of the curve [m] (the cover thickness + 0.05 mm).
    g_req : float, optional
        Required gap for :attr:`PlateResult.max_lift` [m] (default ``g_start``).
    n_gaps : int
        Points of the lift curve (equally spaced from ``g_start`` to 3 mm, or beyond
        the equilibrium).
    memo : PlaneMemo, optional
        Plane integrals shared with other analyses of the same field and plate (e.g.
        at other temperatures, with ``|chi|`` scaled by the squared remanence ratio).
    full_stability : bool
        Also perturb z and yaw (:func:`~matdb.physics.plate_stiffness.stability`).

    Returns
    -------
    PlateResult

    References
    ----------
    .. [1] M. D. Simon and A. K. Geim, J. Appl. Phys. 87, 6200 (2000).
    .. [2] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997).
    """
    mass = density * plate.volume
    weight = (mass + payload_kg) * G_STANDARD
    f = lift_force_fn(field, plate, chi_perp_abs, chi_par_abs, order, memo)
    top = lift_curve_range(field, plate, chi_perp_abs, chi_par_abs, weight, g_start, g_end, order,
                           memo=memo)
    gaps = np.linspace(g_start, top, n_gaps)
    forces = lift_force(field, plate, gaps, chi_perp_abs, chi_par_abs, order, memo)
    if forces[-1] >= weight:
        gap = None  # still lifting at the cap: treat as not found
    else:
        gap = highest_stable_root(gaps, forces, weight, f)
    if gap is not None and gap > 0.8 * top:  # keep the curve beyond the equilibrium
        gaps = np.linspace(g_start, 1.25 * gap, n_gaps)
        forces = lift_force(field, plate, gaps, chi_perp_abs, chi_par_abs, order, memo)
    req = g_start if g_req is None else max(g_req, g_start)
    max_f, max_g = max_lift_above(gaps, forces, req, f)
    k_z = f_z = None
    stab = None
    if gap is not None:
        k_z = vertical_stiffness(field, plate, gap, chi_perp_abs, chi_par_abs, order, memo=memo)
        m_tot = mass + payload_kg
        f_z = math.sqrt(k_z / m_tot) / (2 * math.pi) if k_z > 0 else 0.0
        if with_stability:
            stab = stability(field, plate, gap, chi_perp_abs, chi_par_abs, mass,
                             payload_kg, payload_height, order, full=full_stability)
    return PlateResult(gaps=gaps, forces=forces, weight=weight, gap=gap, k_z=k_z, f_z=f_z,
                       stability=stab, max_lift=max_f, max_lift_gap=max_g, plate_mass=mass)


def equilibrium_gap(field: FieldFn, plate: PlateGeometry, chi_perp_abs: float,
                    chi_par_abs: float, weight: float, g_start: float = MIN_GAP,
                    order: int = DEFAULT_ORDER, n_gaps: int = 12, xtol: float | None = 1e-8
                    ) -> float | None:
    """Equilibrium gap on a short geometric lift curve [m] (None: it does not float).

    The curve ``geomspace(g_start, top, n_gaps)`` is evaluated from the top down, a few
    gaps at a time, until the lift first reaches the weight: that pair brackets the
    highest stable root (the lift falls through ``W`` there), and the gaps below it,
    whose quadrature is the finest, are never needed. The bracket is then refined by
    brentq on the quadrature itself, to ``xtol`` [m], or with ``xtol=None`` (scans) to
    1e-5 relative.

    References
    ----------
    Module references [2] (stable float) and [3] (brentq).
    """
    memo = PlaneMemo(field, plate)
    # the first batch of the curve up to the usual top ends at that top: one field
    # evaluation checks the range (:func:`lift_curve_range`) and starts the curve
    top = max(3e-3, g_start + 1e-3)
    gaps = np.geomspace(g_start, top, n_gaps)  # endpoints exact
    forces = np.full(n_gaps, np.nan)
    lo = max(n_gaps - EQ_BATCH, 0)
    forces[lo:] = lift_force(field, plate, gaps[lo:], chi_perp_abs, chi_par_abs, order, memo)
    hi = n_gaps
    if forces[-1] >= weight:  # still lifting there: extend the range as lift_curve_range does
        top = lift_curve_range(field, plate, chi_perp_abs, chi_par_abs, weight, g_start, 3e-3,
                               order, memo=memo)
        gaps = np.geomspace(g_start, top, n_gaps)
        forces = np.full(n_gaps, np.nan)
    elif np.any(forces[lo:] >= weight):
        hi = 0  # the bracket is in the first batch
    else:
        hi = lo
    while hi > 0:
        lo = max(hi - EQ_BATCH, 0)
        forces[lo:hi] = lift_force(field, plate, gaps[lo:hi], chi_perp_abs, chi_par_abs, order,
                                   memo)
        if forces[-1] >= weight:
            return None
        if np.any(forces[lo:hi] >= weight):
            break
        hi = lo
    k = np.nonzero(forces >= weight)[0]
    if k.size == 0:
        return None
    i = int(k[-1])
    f = lift_force_fn(field, plate, chi_perp_abs, chi_par_abs, order, memo)
    a, b = float(gaps[i]), float(gaps[i + 1])
    if forces[i] == weight:
        return a
    if xtol is None:
        return float(optimize.brentq(lambda g: f(g) - weight, a, b, xtol=1e-15, rtol=1e-5))
    return float(optimize.brentq(lambda g: f(g) - weight, a, b, xtol=xtol, rtol=1e-12))


EQ_BATCH = 3  # gaps of the lift curve evaluated per step, from the top down
