"""Image-dipole model of the plates (matdb.physics.floating.dipole): every check against
something outside the module, named beside it."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from matdb.constants import MU0
from matdb.physics import floating as S


C = MU0 / (4 * math.pi)


# ---------------------------------------------------------------------------
# helpers: the point-dipole field, straight from Jackson (1999), eq. (5.56)
# ---------------------------------------------------------------------------
def jackson_b(m_vec, r_vec):
    """B of a point dipole m at the origin, at r (Jackson eq. 5.56)."""
    r = np.asarray(r_vec, dtype=float)
    m = np.asarray(m_vec, dtype=float)
    rn = np.linalg.norm(r)
    n = r / rn
    return C * (3 * n * (n @ m) - m) / rn**3


def b2_vertical(rho, z, m):
    """|B|^2 of a vertical dipole, C^2 m^2 (4 z^2 + rho^2) / r^8 (Jackson eq. 5.56 squared)."""
    return C**2 * m**2 * (4 * z**2 + rho**2) / (rho**2 + z**2) ** 4


def test_hand_derivatives_of_dipole_b2_match_finite_differences():
    # the hand derivatives used below, checked against central differences of Jackson's
    # field itself (numerical differentiation, no source needed)
    m, rho, z, h = 0.3, 2e-3, 3e-3, 1e-7
    d1 = -24 * C**2 * m**2 * z**3 / (rho**2 + z**2) ** 5
    d2 = -24 * C**2 * m**2 * z**2 * (3 * rho**2 - 7 * z**2) / (rho**2 + z**2) ** 6

    def b2(zz):
        b = jackson_b([0, 0, m], [rho, 0, zz])
        return b @ b

    assert d1 == pytest.approx((b2(z + h) - b2(z - h)) / (2 * h), rel=1e-6)
    assert d2 == pytest.approx((b2(z + h) - 2 * b2(z) + b2(z - h)) / h**2, rel=1e-4)


# ---------------------------------------------------------------------------
# image-dipole model against direct integration of the force density
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("thickness", [math.inf, 1e-3])
def test_image_dipole_force_and_stiffness_vs_half_space_integration(thickness):
    # force density on a weak diamagnet (chi/2mu0) grad(B^2) (Landau & Lifshitz sec. 32;
    # Simon, Heflinger & Geim 2001), integrated over the plate's volume with scipy.integrate
    m, chi, a = 0.25, -1.6e-4, 4e-3
    top = a + thickness if math.isfinite(thickness) else np.inf
    d1 = lambda rho, z: -24 * C**2 * m**2 * z**3 / (rho**2 + z**2) ** 5  # noqa: E731
    d2 = lambda rho, z: -24 * C**2 * m**2 * z**2 * (3 * rho**2 - 7 * z**2) / (rho**2 + z**2) ** 6  # noqa: E731
    # force on the plate, z component: (chi/2mu0) * integral of d(B^2)/dz; on the dipole: minus that
    fz_plate, _ = integrate.dblquad(lambda rho, z: chi / (2 * MU0) * d1(rho, z) * 2 * math.pi * rho,
                                    a, top, 0, np.inf, epsabs=0, epsrel=1e-10)
    assert fz_plate > 0  # the plate above is pushed up, away from the dipole (and the dipole down)
    assert S.dipole_plate_force(m, chi, a, thickness) == pytest.approx(fz_plate, rel=1e-7)
    # stiffness of one plate: d2U/dz2 with U = |chi|/(2mu0) * integral of B^2
    k1, _ = integrate.dblquad(lambda rho, z: abs(chi) / (2 * MU0) * d2(rho, z) * 2 * math.pi * rho,
                              a, top, 0, np.inf, epsabs=0, epsrel=1e-10)
    assert S.dipole_plates_stiffness(m, chi, a, thickness) == pytest.approx(2 * k1, rel=1e-7)


def test_dipole_stiffness_is_the_published_formula_for_thick_plates():
    # Simon, Heflinger & Geim, Am. J. Phys. 69, 702 (2001): k = 3 mu0 |chi| m^2 / (8 pi a^5)
    m, chi, a = 0.1, -4e-4, 3e-3
    assert S.dipole_plates_stiffness(m, chi, a) == pytest.approx(3 * MU0 * abs(chi) * m**2 / (8 * math.pi * a**5))


@pytest.mark.parametrize("orientation", ["vertical", "horizontal"])
def test_anisotropic_half_space_equals_mean_chi(orientation):
    # Simon, Heflinger & Geim (2001): effective chi (chi_perp + chi_par)/2 for a dipole;
    # checked by integrating Jackson's field over a plane at depth s (scipy.integrate)
    m = [0, 0, 1.0] if orientation == "vertical" else [1.0, 0, 0]
    s = 2e-3

    def comp(rho, phi, which):
        b = jackson_b(m, [rho * math.cos(phi), rho * math.sin(phi), s])
        v = b[2] ** 2 if which == "z" else b[0] ** 2 + b[1] ** 2
        return v * rho

    bz, _ = integrate.dblquad(lambda rho, phi: comp(rho, phi, "z"), 0, 2 * math.pi, 0, np.inf, epsrel=1e-9)
    bh, _ = integrate.dblquad(lambda rho, phi: comp(rho, phi, "h"), 0, 2 * math.pi, 0, np.inf, epsrel=1e-9)
    assert bz == pytest.approx(bh, rel=1e-6)
    cp, cq = -4.5e-4, -8.5e-5
    assert abs(cp) * bz + abs(cq) * bh == pytest.approx(abs(S.effective_chi(cp, cq)) * (bz + bh), rel=1e-6)


def test_dipole_tilt_stiffness_vs_image_energy_of_a_tilted_dipole():
    # image of a dipole in a weak half-space: (chi/2)(-m_x, -m_y, m_z) at the mirror point
    # (Jackson sec. 4.4 with mu -> 1 + chi); energy -1/2 m.B_image; second difference in tilt
    m0, chi, a, d = 0.2, -3e-4, 5e-3, 1e-3

    def energy(th):
        m = m0 * np.array([math.sin(th), 0, math.cos(th)])
        img = chi / 2 * np.array([-m[0], -m[1], m[2]])
        return 2 * (-0.5 * m @ jackson_b(img, [0, 0, 2 * a]))  # two plates, same by symmetry

    kappa = (energy(d) + energy(-d) - 2 * energy(0)) / d**2
    assert S.dipole_plates_tilt_stiffness(m0, chi, a) == pytest.approx(kappa, rel=1e-5)
    assert kappa < 0  # plates push a dipole to lie down (Simon, Heflinger & Geim 2001)
