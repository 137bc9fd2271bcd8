"""One floating-magnet station: a lifter, a floater and its two plates at one temperature.

Balance (the lifter distance where the pull equals the load), the lifter's and the plates'
stiffness, the window of stable plate distances, the largest load, and one row of the
payload schedule. The pull is read from a table (:class:`~matdb.physics.floating.lifter.PullTable`)
to find roots and brackets; every root is then polished on the direct quadrature, so
results agree with :func:`~matdb.physics.floating.lifter.lifter_force` to the root
tolerances.

References
----------
.. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, "Diamagnetically stabilized magnet
   levitation", Am. J. Phys. 69, 702-713 (2001).
.. [2] IEC 60404-8-1, "Magnetic materials - Part 8-1: Specifications for individual
   materials - Magnetically hard materials" (reversible temperature coefficients).
"""

from __future__ import annotations

import math
from typing import Optional

import numpy as np
from scipy.optimize import brentq

from matdb.constants import T_REF_K
from matdb.errors import InputError, PhysicsError
from matdb.physics.floating.body import Body, BodySet
from matdb.physics.floating.dipole import dipole_plates_stiffness, dipole_plates_tilt_stiffness
from matdb.physics.floating.lifter import (
    axial_pull,
    lifter_force,
    lifter_forces,
    lifter_hessian,
    lifter_stiffness,
    pull_table,
)
from matdb.physics.floating.plates import FinitePlates
from matdb.physics.thermal import br_at, chi_at

__all__ = ["StationModel", "station_model", "lifter_distance_drift", "lift_temperature_slope", "schedule_row",
           "finite_or_none"]


def _polish(fun, x0: float, lo: float, hi: float, slope: float, xtol: float, rtol: float) -> float:
    """Root of ``fun`` (direct evaluations) near ``x0`` (a root found on a table), with
    ``fun`` changing sign on ``[lo, hi]``: a Newton step with the table's slope, then
    secant steps, to ``|step| <= xtol + rtol |x|``; Brent's method on ``[lo, hi]`` when
    a step leaves the bracket or ten steps do not converge."""
    f0 = fun(x0)
    if f0 == 0.0 or not (slope != 0.0 and math.isfinite(slope)):
        return x0 if f0 == 0.0 else float(brentq(fun, lo, hi, xtol=xtol, rtol=rtol))
    x1 = x0 - f0 / slope
    for _ in range(10):
        if not lo <= x1 <= hi:
            break
        if abs(x1 - x0) <= xtol + rtol * abs(x1):
            return float(x1)
        f1 = fun(x1)
        if f1 == 0.0:
            return float(x1)
        if f1 == f0:
            break
        x0, f0, x1 = x1, f1, x1 - f1 * (x1 - x0) / (f1 - f0)
    return float(brentq(fun, lo, hi, xtol=xtol, rtol=rtol))


class StationModel:
    """A lifter, a floater and its plates at one temperature: balance, stiffness, window.

    Parameters
    ----------
    lifter, floater : Body
        Magnets (centres ignored; the floater is put at the origin).
    floater_mass_kg : float
        Mass of the floater magnet [kg].
    chi_perp, chi_par : float
        Plates' susceptibilities [1].
    thickness, clearance : float
        Plate thickness; smallest gap floater face to plate [m].
    width : float, optional
        Side of square plates [m]; None for very wide plates.
    """

    def __init__(self, lifter: Body, floater: Body, floater_mass_kg: float, chi_perp: float,
                 chi_par: float, thickness: float, clearance: float, width: Optional[float] = None):
        self.lifter0 = lifter
        self.floater = floater.at((0.0, 0.0, 0.0))
        self.mass = float(floater_mass_kg)
        self.t = float(thickness)
        self.clearance = float(clearance)
        self.a_min = self.floater.half_height + self.clearance
        g_min = max(self.clearance, 1e-3 * self.floater.height)
        self.plates = FinitePlates(self.floater, chi_perp, chi_par, thickness, g_min=0.5 * g_min, width=width)
        self.chi_dip = self.plates.chi_dipole
        self._scan = None
        self.others: tuple = ()
        self._table = pull_table(lifter, self.floater)
        self._scale = float(lifter.j_t) * float(self.floater.j_t)  # the pull is bilinear in J_l, J_f
        self._f_others, self._k_others = 0.0, (0.0, 0.0)
        self._h = 1e-4 * max(self.floater.height, self.floater.lateral)  # lifter_stiffness's default step

    # -- lifter
    def lifter_at(self, distance: float) -> Body:
        """The lifter with its near face ``distance`` above the floater's centre."""
        return self.lifter0.at((0.0, 0.0, distance + self.lifter0.half_height))

    def set_others(self, bodies) -> None:
        """Other stations' lifters, placed relative to this floater's centre (held fixed)."""
        self.others = tuple(bodies)
        self._scan = None
        if self.others:
            src = BodySet(self.others)
            self._f_others = float(lifter_force(src, self.floater)[2])
            self._k_others = lifter_stiffness(src, self.floater, self._h)
        else:
            self._f_others, self._k_others = 0.0, (0.0, 0.0)

    def source(self, distance: float):
        """What pulls on the floater: its lifter at ``distance`` plus any other lifters."""
        own = self.lifter_at(distance)
        return BodySet((own,) + self.others) if self.others else own

    def force(self, distance: float) -> float:
        """Upward pull at lifter distance ``distance`` [N]: the quadrature of
        :func:`~matdb.physics.floating.lifter.lifter_force`, the own lifter's part on the
        axis (:func:`~matdb.physics.floating.lifter.axial_pull`) plus the other lifters'
        (fixed, computed once)."""
        return float(axial_pull(self.lifter0, self.floater, distance)[0]) + self._f_others

    def k_z(self, distance: float) -> float:
        """The lifter's vertical stiffness ``k_z = -dF_z/dz`` at ``distance`` [N/m]: the
        central difference of :func:`~matdb.physics.floating.lifter.lifter_stiffness`
        (raising the floater by ``h`` is lowering the lifter by ``h``)."""
        h = self._h
        f = axial_pull(self.lifter0, self.floater, [distance - h, distance + h])
        return float(-(f[0] - f[1]) / (2 * h)) + self._k_others[0]

    def stiffness(self, distance: float) -> tuple[float, float]:
        """``(k_z, k_r)`` of the lifter (and any other lifters) at ``distance`` [N/m]."""
        h = self._h
        fx = lifter_forces(self.lifter_at(distance), self.floater, [[h, 0.0, 0.0], [-h, 0.0, 0.0]])[:, 0]
        return self.k_z(distance), float(-(fx[0] - fx[1]) / (2 * h)) + self._k_others[1]

    def pull(self, distance):
        """The pull at lifter distances ``distance`` from the table (:class:`PullTable`;
        other lifters held where they are) [N]."""
        return self._scale * self._table.pull(distance) + self._f_others

    def pull_slope(self, distance):
        """``dF/dD`` at lifter distances ``distance`` from the table [N/m]; the lifter's
        ``k_z`` (moving the lifter down is moving the floater up)."""
        return self._scale * self._table.slope(distance) + self._k_others[0]

    def _grid(self):
        """Every other node of the pull table: lifter distances and pulls [m, N]."""
        if self._scan is None:
            d = self._table.d[::2]
            self._scan = (d, self.pull(d))
        return self._scan

    def peak_force(self) -> tuple[float, float]:
        """``(distance, force)`` at the largest pull over lifter distances [m, N]."""
        d, f = self._grid()
        i = int(np.argmax(f))
        return float(d[i]), float(f[i])

    def balance(self, weight_n: float) -> Optional[float]:
        """Lifter distance where the pull equals ``weight_n`` on the falling branch [m].

        The largest root of ``F(D) = W`` with ``dF/dD < 0``; None when the lifter cannot
        hold the weight at any distance.
        """
        d, f = self._grid()
        W = float(weight_n)
        if not W > 0:
            raise InputError(f"weight: expected a positive weight, got {weight_n!r}")
        i0 = int(np.argmax(f))
        if f[i0] < W:
            return None
        if W <= f[-1]:  # lighter than the pull at the far end of the table: go further
            hi = d[-1]
            while self.force(hi) >= W:
                hi *= 2.0
                if hi > 1e4:
                    raise PhysicsError("weight: too light to find a balance distance")
            return brentq(lambda x: self.force(x) - W, d[-1], hi, xtol=1e-12, rtol=1e-12)
        above = np.nonzero(f[i0:] >= W)[0]
        j = i0 + int(above[-1])
        if f[j] == W:
            return float(d[j])
        x0 = brentq(lambda x: self.pull(x) - W, d[j], d[j + 1], xtol=1e-15, rtol=1e-13)
        return _polish(lambda x: self.force(x) - W, x0, d[j], d[j + 1], self.pull_slope(x0), 1e-13, 1e-13)

    # -- plates
    def k_plates(self, distance: float) -> float:
        """Finite-size plates' vertical stiffness at plate distance ``distance`` [N/m]."""
        return self.plates.stiffness(distance)

    def k_plates_dipole(self, distance: float) -> float:
        """Image-dipole plates' vertical stiffness [N/m]."""
        return dipole_plates_stiffness(self.floater.moment, self.chi_dip, distance, self.t)

    def max_plate_distance(self, k_lifter_z: float, model: str = "finite-size") -> Optional[float]:
        """Largest plate distance with ``k_lifter_z + k_plates > 0`` [m]; None if none.

        The search starts at the smallest plate distance (half-height + clearance) for
        the finite-size model and at the floater's half-height for the dipole model.
        """
        k = self.k_plates if model == "finite-size" else self.k_plates_dipole
        lo = self.a_min if model == "finite-size" else self.floater.half_height * (1 + 1e-9)
        need = -float(k_lifter_z)
        if need <= 0:
            return math.inf
        if k(lo) <= need:
            return lo if k(lo) >= need * (1 - 1e-6) else None
        hi = 2 * lo
        while k(hi) > need:
            hi *= 2.0
        return float(brentq(lambda a: k(a) - need, lo, hi, xtol=1e-12, rtol=1e-10))

    def smallest_stable_distance(self, plate_distance: Optional[float] = None) -> Optional[float]:
        """Smallest lifter distance that still leaves a stable window [m].

        The window closes when the plates at their smallest distance can no longer beat
        the lifter's negative stiffness, or when the upper plate no longer fits between
        floater and lifter (``D >= a_min + t``), or at the force peak.
        """
        d, f = self._grid()
        i0 = int(np.argmax(f))
        d_peak = float(d[i0])
        a = self.a_min if plate_distance is None else float(plate_distance)
        kp = self.k_plates(a)
        d_clear = a + self.t
        lo = max(d_peak, d_clear)

        def margin(x):
            return self.k_z(x) + kp

        def margin_table(x):
            return self.pull_slope(x) + kp if x <= self._table.d[-1] else margin(x)

        if margin(lo) > 0:
            return lo
        hi = lo * 1.5
        while margin_table(hi) <= 0:
            hi *= 1.5
            if hi > 1e3:
                return None
        x0 = brentq(margin_table, lo, hi, xtol=1e-13, rtol=1e-12)
        slope = (margin_table(x0 * (1 + 1e-6)) - margin_table(x0 * (1 - 1e-6))) / (2e-6 * x0)
        return float(_polish(margin, x0, lo, hi, slope, 1e-12, 1e-10))

    def max_weight(self, plate_distance: Optional[float] = None) -> Optional[float]:
        """Largest total weight (floater plus load) with a stable window [N].

        With ``plate_distance`` the plates stay there; otherwise they may be set anywhere
        in the window (the smallest distance is then the best).
        """
        d = self.smallest_stable_distance(plate_distance)
        return None if d is None else self.force(d)

    def tilt(self, distance: float, plate_distance: float) -> dict:
        """Lateral and tilt stiffnesses at lifter distance ``distance``, plates at ``plate_distance``."""
        hz = lifter_hessian(self.source(distance), self.floater)
        kp = self.plates.tilt_stiffness(plate_distance)
        kd = dipole_plates_tilt_stiffness(self.floater.moment, self.chi_dip, plate_distance, self.t)
        return {**hz, "kappa_plates": kp, "kappa_plates_dipole": kd}


def _recoil(spec) -> float:
    """:attr:`matdb.design.model.SingleMagnet.recoil_factor` (1 for other specs)."""
    return float(getattr(spec, "recoil_factor", 1.0))


def station_model(st, temp_k: float) -> StationModel:
    """The :class:`StationModel` of a design's station at ``temp_k`` [K]: Br of both
    magnets and the plates' chi at that temperature, the magnets on their recoil lines
    unless the design says rigid."""
    # polarisation on the recoil line (mu_rec of the grade) unless the design says rigid
    bl = float(br_at(st.lifter.br_t, st.lifter.alpha_br_pct_per_k, temp_k)) * _recoil(st.lifter)
    bf = float(br_at(st.floater.br_t, st.floater.alpha_br_pct_per_k, temp_k)) * _recoil(st.floater)
    cp = float(chi_at(st.plates.chi_perp, st.plates.temp_coeff_per_k, temp_k))
    cq = float(chi_at(st.plates.chi_par, st.plates.temp_coeff_per_k, temp_k))
    lifter = Body(st.lifter.shape, tuple(st.lifter.size), bl)
    floater = Body(st.floater.shape, tuple(st.floater.size), bf)
    return StationModel(lifter, floater, st.floater.mass_kg, cp, cq, st.plates.thickness, st.plates.clearance,
                        getattr(st.plates, "width", None))


def lifter_distance_drift(st, temp_k: float, weight_n: float, dt: float = 5.0) -> Optional[float]:
    """d(lifter distance)/dT at fixed weight [m/K], central difference over +-dt kelvin.

    Br falls as the magnets warm (reversible coefficient, IEC 60404-8-1), so a lifter
    set at one temperature must come closer when it is warmer.
    """
    lo, hi = temp_k - dt, temp_k + dt
    if lo <= 0:
        return None
    d_lo = station_model(st, lo).balance(weight_n)
    d_hi = station_model(st, hi).balance(weight_n)
    if d_lo is None or d_hi is None:
        return None
    return (d_hi - d_lo) / (2 * dt)


def lift_temperature_slope(st, temp_k: float) -> float:
    """Relative change of the lifter's pull per kelvin, ``d ln F / dT`` [1/K].

    The pull of one uniformly magnetised magnet on another scales with the product of
    their remanences, ``F = Br_l(T) Br_f(T) F_1(D)``, so
    ``d ln F/dT = alpha_l/(100 + alpha_l dT) + alpha_f/(100 + alpha_f dT)`` with
    ``dT = T - 20 C`` (linear law of IEC 60404-8-1). The plates do not enter: at the
    symmetric plate position their vertical forces cancel.
    """
    dt = float(temp_k) - T_REF_K
    out = 0.0
    for a in (st.lifter.alpha_br_pct_per_k, st.floater.alpha_br_pct_per_k):
        out += a / (100.0 + a * dt)
    return out


def schedule_row(model: StationModel, weight_n: float, d_empty: Optional[float], dlnf_dt: float,
                 plate_distance: Optional[float] = None, shift_m: Optional[float] = None) -> dict:
    """One station's entry of the payload schedule at total weight ``weight_n`` [N].

    Parameters
    ----------
    model : StationModel
    weight_n : float
        Floater plus its load [N].
    d_empty : float or None
        Lifter distance with no payload (the empty-float position) [m].
    dlnf_dt : float
        ``d ln F / dT`` of the pull (:func:`lift_temperature_slope`) [1/K].
    plate_distance : float, optional
        Where the plates are set [m]; default the smallest plate distance.
    shift_m : float, optional
        Allowed shift of the floater's equilibrium [m]; default a tenth of its clearance
        to the nearer plate.

    Returns
    -------
    dict
        ``lifter_distance_m``, ``min_plate_distance_m``, ``max_plate_distance_m``
        (both None when no plate distance is stable), ``window_m``,
        ``lifter_travel_m`` (``d_empty - D``: how far the lifter has come towards the
        floater), ``dforce_dd_n_m`` (``dF/dD``), ``resolution_m``,
        ``lifter_distance_drift_um_per_k``, ``k_lifter_z_n_m``, ``k_z_total_n_m``.

    Notes
    -----
    Moving the lifter by ``dD`` changes the pull by ``(dF/dD) dD``; the floater, held by
    the total vertical stiffness ``k = k_lifter + k_plates``, moves by
    ``(dF/dD) dD / k``. The lifter step that moves it by ``s`` is
    ``s k / |dF/dD|`` (``s`` = 0.1 x clearance unless given). At fixed weight,
    ``F(D, T) = W`` gives ``dD/dT = -(d ln F/dT) W / (dF/dD)``. Moving the floater up
    by ``dz`` is moving the lifter down by ``dz``, so ``dF/dD = -dF/dz = k_lifter_z``.
    """
    D = model.balance(weight_n) if weight_n > 0 else None
    row: dict = {"lifter_distance_m": finite_or_none(D), "min_plate_distance_m": None, "max_plate_distance_m": None,
                 "window_m": None, "lifter_travel_m": None, "dforce_dd_n_m": None, "resolution_m": None,
                 "lifter_distance_drift_um_per_k": None, "k_lifter_z_n_m": None, "k_z_total_n_m": None}
    if D is None:
        return row
    kz = model.k_z(D)
    a_max = model.max_plate_distance(kz)
    hi = None if a_max is None else min(a_max, D - model.t)
    if hi is not None and hi >= model.a_min:
        row.update(min_plate_distance_m=model.a_min, max_plate_distance_m=finite_or_none(hi),
                   window_m=finite_or_none(hi - model.a_min))
    a = model.a_min if plate_distance is None else float(plate_distance)
    k_tot = kz + model.k_plates(a)
    shift = 0.1 * (a - model.floater.half_height) if shift_m is None else float(shift_m)
    row.update(
        lifter_travel_m=None if d_empty is None else float(d_empty - D),
        dforce_dd_n_m=float(kz),
        k_lifter_z_n_m=float(kz),
        k_z_total_n_m=float(k_tot),
        resolution_m=float(shift * k_tot / abs(kz)) if (k_tot > 0 and kz != 0) else None,
        lifter_distance_drift_um_per_k=float(-dlnf_dt * weight_n / kz * 1e6) if kz != 0 else None,
    )
    return row


def finite_or_none(x) -> Optional[float]:
    """``x`` as a float, None when it is None, infinite or NaN (JSON has no inf)."""
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None
