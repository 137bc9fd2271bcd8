"""Quadrature rules of matdb.physics.quadrature, checked against exact integrals and
scipy.integrate."""

import math

import numpy as np
import pytest
from scipy import integrate

from matdb.physics import quadrature as Q


@pytest.mark.parametrize("n", [2, 4, 8])
def test_gauss_legendre_is_exact_to_degree_2n_minus_1(n):
    # Davis & Rabinowitz (1984) ch. 2: the n-point rule integrates x^k exactly for k <= 2n-1
    x, w = Q.gauss_on(-0.3, 1.7, n)
    for k in range(2 * n):
        exact = (1.7 ** (k + 1) - (-0.3) ** (k + 1)) / (k + 1)
        assert np.dot(w, x ** k) == pytest.approx(exact, rel=1e-12, abs=1e-14)


def test_cached_rules_are_read_only():
    x, w = Q.gauss_legendre(6)
    with pytest.raises(ValueError):
        x[0] = 0.0
    xs, ys, ws = Q.disc_rule(0.0, 0.0, 1.0, (), (), 0.1, 4)
    with pytest.raises(ValueError):
        ws[0] = 0.0


def test_graded_rule_near_a_singular_line_matches_scipy_quad():
    # integrand with width `h` around x = 0.2: the field of an edge seen from height h
    h = 1e-3
    f = lambda x: h / (h * h + (x - 0.2) ** 2)  # noqa: E731
    x, w = Q.graded_rule(-1.0, 1.0, [0.2], h, 8)
    ref, _ = integrate.quad(f, -1.0, 1.0, points=[0.2], limit=200, epsabs=1e-13)
    assert np.dot(w, f(x)) == pytest.approx(ref, rel=1e-8)  # geometric convergence, 8 nodes
    breaks = Q.graded_breaks(-1.0, 1.0, [0.2], h)
    assert breaks[0] == -1.0 and breaks[-1] == 1.0 and 0.2 in breaks


@pytest.mark.parametrize("singular", [(), (-0.3, 0.0, 0.4)])
def test_disc_rule_area_and_second_moment(singular):
    # handbook: area pi R^2, polar second moment integral x^2 dA = pi R^4 / 4 about a
    # diameter (e.g. Roark's Formulas for Stress and Strain, table of section properties)
    r, cx, cy = 0.7, 0.1, -0.2
    x, y, w = Q.disc_rule(cx, cy, r, singular, singular, 0.05, 16)
    assert w.sum() == pytest.approx(math.pi * r * r, rel=1e-10)
    assert np.dot(w, (x - cx) ** 2) == pytest.approx(math.pi * r ** 4 / 4, rel=1e-9)
    assert np.dot(w, (y - cy) ** 2) == pytest.approx(math.pi * r ** 4 / 4, rel=1e-9)
    assert np.all(np.hypot(x - cx, y - cy) < r)
