"""Finite-size model of the plates (matdb.physics.floating.plates): every check against
something outside the module, named beside it."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate

from matdb.constants import MU0
from matdb.physics import floating as S
from matdb.physics.quadrature import gauss_panels
from matdb.physics.floating.plates import panel_edges


FLOATER = S.Body("cylinder", (6.35e-3, 3.175e-3), 1.3)


def test_plane_integral_vs_scipy_quad():
    # P(s) for the real cylinder field, integrated with scipy.integrate.quad over the radius
    # (independent adaptive quadrature of the same integrand)
    fp = S.FinitePlates(FLOATER, -4.5e-4, -8.5e-5, 1e-3)
    s = FLOATER.half_height + 0.4e-3

    def f(rho):
        b = FLOATER.B(np.array([[rho, 0.0, s]]))[0]
        return (4.5e-4 * b[2] ** 2 + 8.5e-5 * (b[0] ** 2 + b[1] ** 2)) * 2 * math.pi * rho

    R = FLOATER.size[0] / 2
    pts = [0, R - 1e-3, R, R + 1e-3, 5 * R, 50 * R]
    ref = sum(integrate.quad(f, lo, hi, epsabs=0, epsrel=1e-11, limit=400)[0] for lo, hi in zip(pts[:-1], pts[1:]))
    ref += integrate.quad(f, pts[-1], np.inf, epsabs=0, epsrel=1e-9)[0]
    assert fp.plane_integral(s) == pytest.approx(ref, rel=1e-7)


def test_slab_energy_vs_depth_integral_of_plane_integrals():
    # U = 2 * 1/(2 mu0) * integral over depth of P(s) (Landau & Lifshitz sec. 32), the depth
    # integral done by scipy.integrate.quad: checks the volume quadrature used for tilt
    fp = S.FinitePlates(FLOATER, -1.6e-4, -1.6e-4, 1e-3)
    a = FLOATER.half_height + 0.5e-3
    q, _ = integrate.quad(fp.plane_integral, a, a + 1e-3, epsabs=0, epsrel=1e-10, limit=200)
    assert fp.energy(a) == pytest.approx(q / MU0, rel=1e-6)


@pytest.mark.parametrize("shape,size", [("cylinder", (6.35e-3, 3.175e-3)), ("cuboid", (5e-3, 5e-3, 5e-3))])
def test_finite_size_plates_tend_to_the_dipole_model(shape, size):
    # Simon, Heflinger & Geim (2001): far from the plates the floater acts as its dipole
    body = S.Body(shape, size, 1.3)
    fp = S.FinitePlates(body, -4.5e-4, -8.5e-5, 1e-3)
    errs, terrs = [], []
    for a in (5 * max(size), 10 * max(size), 25 * max(size)):
        kd = S.dipole_plates_stiffness(body.moment, fp.chi_dipole, a, 1e-3)
        td = S.dipole_plates_tilt_stiffness(body.moment, fp.chi_dipole, a, 1e-3)
        errs.append(abs(fp.stiffness(a) / kd - 1))
        terrs.append(abs(fp.tilt_stiffness(a) / td - 1))
    assert errs[0] > errs[1] > errs[2] and errs[2] < 2e-3
    assert terrs[-1] < 2e-2 and terrs[-1] < terrs[0]


def test_finite_size_table_matches_direct_evaluation():
    # the tabulated stiffness against the same integrals without the table (convergence of
    # the interpolation; numerical, no source needed)
    fp = S.FinitePlates(FLOATER, -4.5e-4, -8.5e-5, 1e-3, g_min=0.2e-3)
    for a in (FLOATER.half_height + 0.3e-3, 3e-3, 7.7e-3, 30e-3):
        assert fp.stiffness(a) == pytest.approx(fp.stiffness_direct(a), rel=1e-4)


def test_plate_stiffness_quadrature_converges_as_the_plates_close_in():
    # finer Gauss-Legendre panels give the same plane-integral slope near the face
    # (convergence test, numerical, no source needed)
    fp = S.FinitePlates(FLOATER, -1.6e-4, -1.6e-4, 1e-3)
    for gap in (1e-3, 1e-4, 1e-5):
        s = FLOATER.half_height + gap
        xy, w = fp.plane_nodes(s)
        coarse = fp.plane_integral_slope(s)
        # halve every panel: recompute with twice the Gauss order on the same edges
        r_edges = panel_edges(fp.features()[0], gap, 1e3 * (s + FLOATER.lateral))
        r, wr = gauss_panels(r_edges, 16)
        d = 1e-3 * gap
        vals = []
        for z in s + d * np.array([-2.0, -1.0, 1.0, 2.0]):
            b = FLOATER.B(np.column_stack([r, np.zeros_like(r), np.full(r.size, z)]))
            vals.append((2 * math.pi * r * wr) @ fp.weighted(b))
        fine = (vals[0] - 8 * vals[1] + 8 * vals[2] - vals[3]) / (12 * d)
        assert coarse == pytest.approx(fine, rel=1e-6)
        assert np.isfinite(coarse) and coarse < 0
