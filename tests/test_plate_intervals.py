"""Stability over plate size at the lateral equilibrium (matdb.physics.plate) against an
energy Hessian written here from an independent field source.

References used below:
- magpylib (an independent, general-purpose field library) gives B; the plate's energy
  is U = (1/(2 mu0)) integral_V [|chi_perp| (B.e)^2 + |chi_par| (|B|^2 - (B.e)^2)] dV
  (Berry & Geim, Eur. J. Phys. 18, 307 (1997); Jackson, Classical Electrodynamics,
  3rd ed., sec. 5.16), integrated here by a plain composite Gauss-Legendre rule.
- Goldstein, Classical Mechanics, 3rd ed., ch. 6: a rest point is stable when the
  Hessian of the potential energy (here over x, y, roll and pitch about the centre of
  mass, where gravity adds nothing) is positive definite; it is a rest point when the
  gradient vanishes.
"""

from __future__ import annotations

import math

import magpylib as magpy
import numpy as np
import pytest
from scipy import optimize
from scipy.spatial.transform import Rotation

from matdb.physics import plate as P
from matdb.physics.arrangement import build_arrangement
from matdb.constants import G_STANDARD, MU0

A = 0.0127  # 1/2 inch cube [m]
PG = (4.5e-4, 8.5e-5)  # |chi_perp|, |chi_par| of pyrolytic graphite, Simon & Geim (2000)
ISO = (4.5e-4, 4.5e-4)  # an isotropic diamagnet of graphite's |chi| (hypothetical)
RHO = 2200.0  # kg/m^3, Simon & Geim (2000)


def _magpy(arr):
    """The arrangement rebuilt in magpylib (cuboids only)."""
    c = magpy.Collection()
    for m in arr.magnets:
        c.add(magpy.magnet.Cuboid(polarization=m.polarization, dimension=m.size,
                                  position=m.position))
    return c


def _gl_axis(lo, hi, n_panels, n=5, breaks=()):
    """Composite Gauss-Legendre rule, panel boundaries also at ``breaks`` (edge lines)."""
    x, w = np.polynomial.legendre.leggauss(n)
    b = np.linspace(lo, hi, n_panels + 1)
    b = np.unique(np.concatenate([b, [v for v in breaks if lo + 1e-5 < v < hi - 1e-5]]))
    a, c = b[:-1, None], b[1:, None]
    return ((a + c) / 2 + (c - a) / 2 * x).ravel(), ((c - a) / 2 * w).ravel()


class Energy:
    """U(pose) of a square plate (side s, thickness t) from magpylib fields."""

    def __init__(self, src, side, t, chi, centre=(0.0, 0.0), edges=((), ())):
        self.src, self.side, self.t, self.chi = src, side, t, chi
        npan = 4 if side < 4e-3 else 8
        # panels end at the magnets' edge lines and close to them (the field varies fast there)
        near = [d * k for d in (0.0, 3e-4, 1e-3) for k in (-1, 1)]
        x, wx = _gl_axis(-side / 2, side / 2, npan, 4,
                         breaks=[e - centre[0] + d for e in edges[0] for d in near])
        y, wy = _gl_axis(-side / 2, side / 2, npan, 4,
                         breaks=[e - centre[1] + d for e in edges[1] for d in near])
        # through the thickness: panels graded from the bottom face, near the magnets
        zb = [-t / 2 + d for d in 5e-5 * 4.0 ** np.arange(6) if d < 0.9 * t]
        z, wz = _gl_axis(-t / 2, t / 2, 1, 3, breaks=zb)
        X, Y, Z = np.meshgrid(x, y, z, indexing="ij")
        self.local = np.column_stack([X.ravel(), Y.ravel(), Z.ravel()])
        self.w = np.einsum("i,j,k->ijk", wx, wy, wz).ravel()
        self.mass = RHO * side * side * t

    def __call__(self, cx, cy, gap, poses):
        """Energy [J] at poses (P, 5): dx, dy, dz, roll, pitch about the centre of mass."""
        poses = np.atleast_2d(poses)
        com = np.array([cx, cy, gap + self.t / 2])
        rot = Rotation.from_rotvec(np.column_stack([poses[:, 3], poses[:, 4],
                                                    np.zeros(len(poses))])).as_matrix()
        pts = com + poses[:, None, :3] + np.einsum("pij,mj->pmi", rot, self.local)
        b = magpy.getB(self.src, pts.reshape(-1, 3)).reshape(pts.shape)
        e = rot[:, :, 2]
        be2 = np.einsum("pmi,pi->pm", b, e) ** 2
        w = self.chi[0] * be2 + self.chi[1] * (np.einsum("pmi,pmi->pm", b, b) - be2)
        return w @ self.w / (2 * MU0)

    def lift(self, cx, cy, gap, h=2e-6):
        u = self(cx, cy, gap, [[0, 0, h, 0, 0], [0, 0, -h, 0, 0]])
        return -(u[0] - u[1]) / (2 * h)

    def gap(self, cx, cy):
        """Highest gap where the lift equals the weight and falls with height."""
        weight = self.mass * G_STANDARD
        gs = np.geomspace(5e-5, 6e-3, 12)
        f = np.array([self.lift(cx, cy, g) for g in gs]) - weight
        i = np.nonzero((f[:-1] >= 0) & (f[1:] < 0))[0]
        assert i.size, "does not float"
        k = int(i[-1])
        return optimize.brentq(lambda g: self.lift(cx, cy, g) - weight, gs[k], gs[k + 1],
                               xtol=1e-9)

    def gradient(self, cx, cy, gap, h=2e-5):
        u = self(cx, cy, gap, [[h, 0, 0, 0, 0], [-h, 0, 0, 0, 0], [0, h, 0, 0, 0], [0, -h, 0, 0, 0]])
        return np.array([u[0] - u[1], u[2] - u[3]]) / (2 * h)

    def hessian(self, cx, cy, gap, hm=5e-5, hr=2e-3):
        """Hessian over (x, y, roll, pitch) by central differences of U."""
        steps = np.array([hm, hm, 0, hr, hr])
        dofs = [0, 1, 3, 4]
        poses, index = [np.zeros(5)], {}
        for a in dofs:
            for b in dofs:
                if b < a:
                    continue
                for sa in (1, -1):
                    for sb in (1, -1):
                        p = np.zeros(5)
                        p[a] += sa * steps[a]
                        p[b] += sb * steps[b]
                        index[(a, b, sa, sb)] = len(poses)
                        poses.append(p)
        u = self(cx, cy, gap, np.array(poses))
        hmat = np.zeros((4, 4))
        for i, a in enumerate(dofs):
            for j, b in enumerate(dofs):
                if b < a:
                    continue
                val = (u[index[(a, b, 1, 1)]] - u[index[(a, b, 1, -1)]]
                       - u[index[(a, b, -1, 1)]] + u[index[(a, b, -1, -1)]]) / (4 * steps[a] * steps[b])
                hmat[i, j] = hmat[j, i] = val
        return hmat


def _pos_def(h):
    return bool(np.all(np.linalg.eigvalsh(h) > 0))


def _geom(arr, side, t, cx=0.0, cy=0.0):
    bx, by = P.edge_lines(arr.magnets)
    return P.PlateGeometry("rectangle", side, side, t, cx, cy, bx, by)


def _inside(intervals, side, margin=0.15):
    return any(lo * (1 + margin) <= side <= hi * (1 - margin) for lo, hi in intervals)


def _outside(intervals, side, margin=0.15):
    return all(side < lo * (1 - margin) or side > hi * (1 + margin) for lo, hi in intervals)


def _check_sides(arr, t, chi, extent, cx=0.0, cy=0.0):
    """Every scanned verdict agrees with the magpylib energy Hessian, for sides well
    inside an interval and well outside all of them."""
    src = _magpy(arr)
    iv = P.stable_side_intervals(arr.B, _geom(arr, extent / 2, t, cx, cy), *chi, RHO, extent)
    assert iv, "no stable interval"
    inside = [0.5 * (lo + hi) for lo, hi in iv]
    outside = [1.3 * iv[-1][1]]
    first = max(1.2 * extent, 1.1 * extent / 2) / 48  # the smallest side scanned
    if iv[0][0] > first * (1 + 1e-9):
        outside.append(first)  # too small (below the first interval)
    checked = 0
    for side, expect in [(s, True) for s in inside] + [(s, False) for s in outside]:
        assert _inside(iv, side) if expect else _outside(iv, side)
        es = P.stability_at_equilibrium(arr.B, _geom(arr, side, t, cx, cy), *chi, RHO)
        assert es.stable == expect
        if not es.equilibrium.found:
            continue
        en = Energy(src, side, t, chi, (es.equilibrium.cx, es.equilibrium.cy), P.edge_lines(arr.magnets))
        g = en.gap(es.equilibrium.cx, es.equilibrium.cy)
        # the same rest point: the gap and a vanishing sideways gradient (magpylib energy)
        assert g == pytest.approx(es.equilibrium.gap, rel=1e-2)
        grad = en.gradient(es.equilibrium.cx, es.equilibrium.cy, g)
        assert np.all(np.abs(grad) < 2e-3 * en.mass * G_STANDARD)
        h = en.hessian(es.equilibrium.cx, es.equilibrium.cy, g)
        assert _pos_def(h) == expect, (side, np.linalg.eigvalsh(h))
        # and the stiffnesses themselves (order-4 rule against the plain energy rule)
        st = es.stability
        assert st.k_x == pytest.approx(h[0, 0], rel=0.05, abs=0.02 * abs(h[0, 0]) + 1e-6)
        checked += 1
    return iv, checked


@pytest.mark.slow
def test_small_chip_over_one_cube():
    # a chip much smaller than one cube's face sits over its middle (an isotropic
    # diamagnet; the |B| minimum holds it); a plate wider than the stable range slides off
    m = build_arrangement("cuboid", (0.010, 0.010, 0.010), "single", br=1.45)
    iv, checked = _check_sides(m, 2e-4, ISO, 0.010)
    assert checked >= 2
    assert iv[0][0] < 0.002 < iv[0][1] < 0.010
    # pyrolytic graphite weighs B_z^2 most, which peaks over the middle of the face:
    # there a 2 mm chip is not stable (Hessian of the magpylib energy not positive definite)
    es = P.stability_at_equilibrium(m.B, _geom(m, 0.002, 2e-4), *PG, RHO)
    assert es.equilibrium.found and not es.stable
    en = Energy(_magpy(m), 0.002, 2e-4, PG, (0.0, 0.0), P.edge_lines(m.magnets))
    g = en.gap(0.0, 0.0)
    assert not _pos_def(en.hessian(0.0, 0.0, g))


@pytest.mark.slow
def test_plate_over_2x2_checkerboard_fails_small_and_large():
    # common practice, no source: a graphite plate floats stably over a 2 x 2
    # checkerboard of 1/2 inch cubes for a range of sides; a chip over the middle (where
    # four cubes meet) and a plate much wider than the array both fail
    c = build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 2, br=1.3)
    iv, checked = _check_sides(c, 1e-3, PG, 2 * A)
    assert checked >= 3  # a stable side, a too-large side and a too-small side
    assert len(iv) >= 1 and iv[0][0] > 2 * A * 1.2 / 48  # not stable down to the smallest


@pytest.mark.slow
def test_plate_placed_off_its_equilibrium():
    # placed 1.5 mm, 0.7 mm off the middle, the plate is pushed sideways (non-zero energy
    # gradient); it is judged where the gradient vanishes, which the energy confirms
    c = build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 2, br=1.3)
    side, t = 0.010, 1e-3
    start = (0.0015, 0.0007)
    geom = _geom(c, side, t, *start)
    eq = P.lateral_equilibrium(c.B, geom, *PG, RHO)
    assert eq.found and eq.force_at_start_n > 0.01 * eq.weight_n
    edges = P.edge_lines(c.magnets)
    en = Energy(_magpy(c), side, t, PG, start, edges)
    g0 = en.gap(*start)
    grad0 = en.gradient(*start, g0)
    # the force where it was placed: F = -grad U
    np.testing.assert_allclose(np.hypot(*grad0), eq.force_at_start_n, rtol=0.03)
    en = Energy(_magpy(c), side, t, PG, (eq.cx, eq.cy), edges)
    g = en.gap(eq.cx, eq.cy)
    assert np.all(np.abs(en.gradient(eq.cx, eq.cy, g)) < 2e-3 * eq.weight_n)
    assert math.hypot(eq.cx, eq.cy) < 1e-4  # the middle of the checkerboard, by symmetry
    es = P.stability_at_equilibrium(c.B, geom, *PG, RHO)
    assert es.stable == _pos_def(en.hessian(eq.cx, eq.cy, g))
    # the intervals of the plate placed off-centre are judged at the equilibrium too
    _check_sides(c, t, PG, 2 * A, *start)


def test_interval_holding():
    iv = [[0.001, 0.002], [0.004, 0.006]]
    assert P.interval_holding(iv, 0.005) == [0.004, 0.006]
    assert P.interval_holding(iv, 0.003) is None
    assert P.interval_holding([], 0.003) is None


def test_lateral_force_is_minus_energy_gradient():
    # Gauss (divergence) theorem: the side-face force equals -dU/dx of the volume energy
    c = build_arrangement("cuboid", (A, A, A), "checkerboard", 2, 2, br=1.3)
    geom = _geom(c, 0.008, 1e-3, 0.002, -0.001)
    f = P.lateral_force(c.B, geom, 5e-4, *PG, order=8)
    en = Energy(_magpy(c), 0.008, 1e-3, PG, (0.002, -0.001), P.edge_lines(c.magnets))
    grad = en.gradient(0.002, -0.001, 5e-4)
    np.testing.assert_allclose(f, -grad, rtol=0.02, atol=1e-3 * np.abs(grad).max())
