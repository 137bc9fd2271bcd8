"""Image-dipole model of the diamagnetic plates: the floater as a point dipole with an
image of strength ``chi/2`` in each plate (an idealisation shown beside the finite-size
model of :mod:`matdb.physics.floating.plates`).

References
----------
.. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, "Diamagnetically stabilized magnet
   levitation", Am. J. Phys. 69, 702-713 (2001).
.. [2] J. D. Jackson, "Classical Electrodynamics", 3rd ed., Wiley (1999), sec. 4.4 (image
   charges at a plane boundary between two linear media) and eq. (5.56).
"""

from __future__ import annotations

import math

import numpy as np

from matdb.constants import MU0

__all__ = ["effective_chi", "dipole_plate_force", "dipole_plates_stiffness", "dipole_plates_tilt_stiffness"]


def effective_chi(chi_perp, chi_par):
    """Effective susceptibility of an anisotropic plate for a point dipole [1].

    Parameters
    ----------
    chi_perp, chi_par : float or ndarray
        SI volume susceptibility along the plate normal (c axis) and in its plane [1].

    Returns
    -------
    float or ndarray
        ``(chi_perp + chi_par) / 2`` [1].

    Notes
    -----
    Over any plane parallel to the surface the dipole field satisfies
    :math:`\\int B_z^2 dA = \\int (B_x^2 + B_y^2) dA` for a vertical and for a horizontal
    dipole alike (both are ``3 pi C^2 m^2 / (8 s^4)`` for a vertical one, ``C = mu0/4pi``),
    so the weighted energy ``|chi_perp| B_z^2 + |chi_par| B_h^2`` of a half-space equals
    that of an isotropic one with the mean chi.

    References
    ----------
    .. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001).
    """
    return 0.5 * (np.asarray(chi_perp, dtype=float) + np.asarray(chi_par, dtype=float))


def dipole_plate_force(moment, chi, distance, thickness=math.inf):
    """Repulsion of one diamagnetic plate on a vertical point dipole [N].

    Parameters
    ----------
    moment : float
        Dipole moment [A m^2].
    chi : float
        SI volume susceptibility of the plate (negative) [1].
    distance : float or ndarray
        Dipole to the plate's facing surface [m].
    thickness : float
        Plate thickness [m]; ``inf`` for a half-space.

    Returns
    -------
    float or ndarray
        Force pushing the dipole away from the plate [N].

    Notes
    -----
    The image of a vertical dipole in a weakly magnetic half-space has strength
    ``chi/(2+chi) m ~ chi m / 2`` at the mirror point [1]_, so the energy is
    ``U = mu0 |chi| m^2 / (64 pi a^3)`` and ``F = 3 mu0 |chi| m^2 / (64 pi a^4)``. To
    first order in chi a slab is a half-space minus a half-space at ``a + t``.

    References
    ----------
    .. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001);
       J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 4.4.
    """
    return 3 * MU0 * abs(chi) * moment**2 / (64 * math.pi) * _slab(distance, thickness, 4)


def dipole_plates_stiffness(moment, chi, distance, thickness=math.inf):
    """Vertical stiffness of two symmetric plates on a point dipole between them [N/m].

    Parameters
    ----------
    moment, chi, distance, thickness
        As in :func:`dipole_plate_force`, for each of the two plates (use
        :func:`effective_chi` for graphite) [A m^2, 1, m, m].

    Returns
    -------
    float or ndarray
        ``k`` [N/m], positive (restoring).

    Notes
    -----
    With ``U(z) = c [(a - z)^-3 + (a + z)^-3]``, ``c = mu0 |chi| m^2 / (64 pi)``,

    .. math:: k = U''(0) = \\frac{3 \\mu_0 |\\chi| m^2}{8 \\pi}
              \\left[a^{-5} - (a + t)^{-5}\\right],

    which for thick plates is the published ``3 mu0 |chi| m^2 / (8 pi a^5)`` [1]_.

    References
    ----------
    .. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, Am. J. Phys. 69, 702 (2001).
    """
    return 3 * MU0 * abs(chi) * moment**2 / (8 * math.pi) * _slab(distance, thickness, 5)


def dipole_plates_tilt_stiffness(moment, chi, distance, thickness=math.inf):
    """Torsional stiffness of two symmetric plates on a point dipole [N m/rad].

    Parameters
    ----------
    moment, chi, distance, thickness
        As in :func:`dipole_plates_stiffness`.

    Returns
    -------
    float or ndarray
        ``kappa`` [N m/rad], negative: the plates push the dipole to tilt.

    Notes
    -----
    The image of ``m = m (sin th, 0, cos th)`` is ``(chi/2)(-m_x, -m_y, m_z)``; its
    energy ``U = mu0 |chi| m^2 (1 + cos^2 th) / (128 pi a^3)`` per plate, so

    .. math:: \\kappa = -\\frac{\\mu_0 |\\chi| m^2}{32 \\pi}
              \\left[a^{-3} - (a + t)^{-3}\\right]

    for two plates: a lying dipole is repelled less than a standing one.

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 4.4 (images
       at a plane boundary) and eq. (5.56).
    """
    return -MU0 * abs(chi) * moment**2 / (32 * math.pi) * _slab(distance, thickness, 3)


def _slab(distance, thickness, power: int):
    """``a^-p - (a + t)^-p``: to first order in chi a slab of thickness ``t`` is a
    half-space at ``a`` minus one at ``a + t`` (a float for a scalar ``distance``)."""
    a = np.asarray(distance, dtype=float)
    out = a**-power - (0.0 if math.isinf(thickness) else (a + thickness) ** -power)
    return float(out) if np.ndim(out) == 0 else out
