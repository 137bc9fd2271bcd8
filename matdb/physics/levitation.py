"""What a diamagnet needs to float in a static field, and what a magnet arrangement offers.

A body of volume susceptibility chi < 0 and density rho floats freely where the upward
magnetic force per volume, (|chi| / mu0) (-B dB/dz), reaches its weight per volume rho g,
i.e. where the field-gradient product

    -B dB/dz = -(1/2) d(B^2)/dz  >=  mu0 rho g / |chi|                       [T^2/m]

(Berry and Geim [1]_; water needs about 1400 T^2/m). :func:`levitation_requirement`
gives the right-hand side; :func:`gradient_product` and :func:`reach_of` evaluate the
left-hand side over an arrangement of magnets (any object with ``B(points)`` and
``bounds()``, e.g. :class:`matdb.physics.arrangement.Arrangement`).

References
----------
.. [1] M. V. Berry and A. K. Geim, "Of flying frogs and levitrons", Eur. J. Phys. 18,
   307-313 (1997), doi:10.1088/0143-0807/18/4/012.
"""

from __future__ import annotations

import numpy as np

from matdb.errors import InputError
from matdb.constants import G_STANDARD, MU0

__all__ = ["REACH_GAP_M", "REACH_PLATE_M", "FD_STEP_M", "levitation_requirement", "gradient_product",
           "footprint_grid", "reach_of"]

REACH_GAP_M = 0.2e-3  #: gap above the magnets' top faces where the reach is read [m]
REACH_PLATE_M = 1.0e-3  #: plate thickness for the plate-averaged figure [m]
FD_STEP_M = 1e-6  #: central-difference step for d(B^2)/dz [m]


def levitation_requirement(chi_si, density_kg_m3, g: float = G_STANDARD):
    """Field-gradient product a free body needs to float: mu0 rho g / |chi| [T^2/m].

    Parameters
    ----------
    chi_si : float or array_like
        SI volume susceptibility [1].
    density_kg_m3 : float or array_like
        Density [kg/m^3], positive.
    g : float
        Gravitational acceleration [m/s^2].

    Returns
    -------
    float or ndarray
        [T^2/m]; ``inf`` for chi >= 0 (a paramagnet is pulled into the field, no field
        floats it from below).

    Raises
    ------
    InputError
        Naming ``density`` for a density that is not positive and finite, ``chi`` for a
        susceptibility that is not finite.

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997), eq. (3).
    """
    chi = np.asarray(chi_si, dtype=float)
    rho = np.asarray(density_kg_m3, dtype=float)
    if not np.all(np.isfinite(rho) & (rho > 0)):
        raise InputError(f"expected a positive density in kg/m^3, got {density_kg_m3!r}", field="density")
    if not np.all(np.isfinite(chi)):
        raise InputError(f"expected a finite susceptibility, got {chi_si!r}", field="chi")
    with np.errstate(divide="ignore"):
        out = np.where(chi < 0, MU0 * rho * g / np.abs(chi), np.inf)
    return float(out) if out.ndim == 0 else out


def gradient_product(arrangement, points, step_m: float = FD_STEP_M) -> np.ndarray:
    """-(1/2) d(B^2)/dz at ``points`` [T^2/m], by central differences of ``arrangement.B``.

    Parameters
    ----------
    arrangement : object with ``B(points)`` giving (n, 3) flux densities [T]
    points : array_like, shape (n, 3)
        Where [m] (off the magnets, where B^2 is smooth and the O(h^2) error tiny).
    step_m : float
        Difference step [m].

    Returns
    -------
    ndarray, shape (n,)

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997), eq. (3).
    """
    p = np.asarray(points, dtype=float).reshape(-1, 3)
    dz = np.array([0.0, 0.0, step_m])
    b_up = np.asarray(arrangement.B(p + dz), dtype=float).reshape(-1, 3)
    b_dn = np.asarray(arrangement.B(p - dz), dtype=float).reshape(-1, 3)
    return -0.5 * (np.sum(b_up**2, axis=1) - np.sum(b_dn**2, axis=1)) / (2.0 * step_m)


def footprint_grid(arrangement, z: float, n: int) -> np.ndarray:
    """Cell centres of an n x n grid over the arrangement's footprint at height ``z``
    [m], shape (n*n, 3)."""
    xmin, xmax, ymin, ymax, _zmin, _zmax = (float(v) for v in arrangement.bounds())
    xs = xmin + (np.arange(n) + 0.5) * (xmax - xmin) / n
    ys = ymin + (np.arange(n) + 0.5) * (ymax - ymin) / n
    gx, gy = np.meshgrid(xs, ys, indexing="xy")
    return np.column_stack([gx.ravel(), gy.ravel(), np.full(gx.size, z)])


def reach_of(arrangement, gap_m: float = REACH_GAP_M, plate_m: float = REACH_PLATE_M, n: int = 41) -> dict:
    """What one arrangement offers a diamagnet at ``gap_m`` above its top faces.

    Returns
    -------
    dict
        ``peak_t2_m``: the largest local -(1/2) d(B^2)/dz over the footprint (what a small
        chip at the best spot feels) [T^2/m]; ``plate_avg_t2_m``: the footprint mean of
        [B^2(gap) - B^2(gap + plate)] / (2 plate), the average push on a plate of
        thickness ``plate_m`` covering the arrangement (the vertical lift of such a plate
        is exactly |chi| / mu0 times this times its volume) [T^2/m].

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, Eur. J. Phys. 18, 307 (1997), eq. (3).
    """
    pts = footprint_grid(arrangement, gap_m, n)
    peak = float(np.max(gradient_product(arrangement, pts)))
    b0 = np.asarray(arrangement.B(pts), dtype=float).reshape(-1, 3)
    b1 = np.asarray(arrangement.B(pts + np.array([0.0, 0.0, plate_m])), dtype=float).reshape(-1, 3)
    avg = float(np.mean(np.sum(b0**2, axis=1) - np.sum(b1**2, axis=1)) / (2.0 * plate_m))
    return {"peak_t2_m": peak, "plate_avg_t2_m": avg}
