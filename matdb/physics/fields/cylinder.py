"""Axially polarised cylinders and rings: the current-sheet closed form.

B of a uniformly, axially polarised cylinder by Derby and Olbert [1]_ in terms of
Bulirsch's generalised complete elliptic integral ``cel`` [2]_; a ring is an outer
cylinder minus an inner one. SI: points and sizes in metres, polarisations and fields
in tesla.

References
----------
.. [1] N. Derby and S. Olbert, "Cylindrical magnets and ideal solenoids",
   Am. J. Phys. 78, 229-235 (2010).
.. [2] R. Bulirsch, "Numerical calculation of elliptic integrals and elliptic
   functions. III", Numer. Math. 13, 305-315 (1969).
"""

from __future__ import annotations

import math

import numpy as np

from matdb.errors import InputError
from matdb.physics.fields._common import EDGE_SNAP, _as_rows, _chunks, _same_count

__all__ = ["cel", "cylinder_B", "ring_B"]


def cel(kc, p, c, s, *, rtol: float = 1e-8, max_iter: int = 40) -> np.ndarray:
    """Bulirsch's generalised complete elliptic integral, vectorised.

    .. math::

        \\mathrm{cel}(k_c, p, c, s) = \\int_0^{\\pi/2}
        \\frac{c \\cos^2\\varphi + s \\sin^2\\varphi}
             {(\\cos^2\\varphi + p \\sin^2\\varphi)\\sqrt{\\cos^2\\varphi + k_c^2 \\sin^2\\varphi}}
        \\, d\\varphi

    Parameters
    ----------
    kc : array_like
        Complementary modulus, non-zero [1].
    p, c, s : array_like
        Parameters, broadcast against ``kc``; ``p`` non-zero [1].
    rtol : float
        Relative tolerance of the arithmetic-geometric iteration, run on the whole array
        until every element has converged. The iteration converges quadratically, so
        Bulirsch's choice of the square root of the working precision gives results
        accurate to the working precision.

    Returns
    -------
    ndarray
        The integral; NaN where ``kc == 0`` or ``p == 0`` (divergent or undefined there).

    References
    ----------
    .. [1] R. Bulirsch, Numer. Math. 13, 305-315 (1969), algorithm ``cel``; in the form
       given in the appendix of N. Derby and S. Olbert, Am. J. Phys. 78, 229 (2010).
    """
    kc, p, c, s = np.broadcast_arrays(*(np.asarray(x, dtype=float) for x in (kc, p, c, s)))
    bad = (kc == 0) | (p == 0)
    any_bad = bool(np.any(bad))
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        if any_bad:
            kc = np.where(bad, 1.0, kc)
            p = np.where(bad, 1.0, p)
        k = np.abs(kc)
        if np.all(p > 0):
            pp = np.sqrt(p)
            ss = s / pp
            cc = np.array(c, dtype=float, copy=True)
        else:  # Bulirsch's transformation for p < 0 (Cauchy principal value)
            pos = p > 0
            pp_pos = np.sqrt(np.abs(p))
            f = k * k
            q = (1.0 - f) * (s - c * p)
            g = 1.0 - p
            f = f - p
            pp_neg = np.sqrt(np.abs(f / g))
            cc_neg = (c - s) / g
            ss_neg = -q / (g * g * pp_neg) + cc_neg * pp_neg
            pp = np.where(pos, pp_pos, pp_neg)
            cc = np.where(pos, c, cc_neg)
            ss = np.where(pos, s / pp_pos, ss_neg)
        (out,) = _cel_iterate(k, [(pp, cc, ss)], rtol, max_iter)
    if any_bad:
        out = np.where(bad, np.nan, out)
    return out


def _agm_steps(kmin: float, rtol: float, max_iter: int) -> int:
    """Iterations Bulirsch's stopping rule needs for the complementary modulus ``kmin``.

    The arithmetic-geometric sequence converges slowest for the smallest ``|kc|``, so this
    count (run on the scalar) is enough for every element of an array whose smallest
    modulus is ``kmin``.
    """
    k, em, n = kmin, 1.0, 0
    g, em, kk = em, k + em, k
    while n < max_iter and abs(g - k) > g * rtol:
        k = 2.0 * math.sqrt(kk)
        kk = k * em
        g, em = em, k + em
        n += 1
    return n


def _cel_iterate(k: np.ndarray, sets: list, rtol: float, max_iter: int) -> list:
    """Bulirsch's ``cel`` iteration [1]_ for one modulus and several ``(p, c, s)``.

    ``k = |kc|``; each set is ``(sqrt(p), c, s / sqrt(p))`` after the transformation for
    the sign of ``p``. Returns ``cel`` of each set (see :func:`_cel_run`).

    References
    ----------
    .. [1] R. Bulirsch, Numer. Math. 13, 305-315 (1969), algorithm ``cel``.
    """
    runs = []
    for pp, cc, ss in sets:
        g = k / pp
        runs.append([pp + g, cc + ss / pp, 2.0 * (ss + cc * g)])
    return [0.5 * math.pi * r for r in _cel_run(k, runs, rtol, max_iter)]


def _cel_run(k: np.ndarray, runs: list, rtol: float, max_iter: int) -> list:
    """The arithmetic-geometric part of Bulirsch's ``cel`` [1]_, shared by several sets.

    ``k = |kc|``; each run is ``[p, c, s]`` after the algorithm's first step (``g = k / pp``,
    ``p = pp + g``, ``c = cc + ss / pp``, ``s = 2 (ss + cc g)``); the arrays are updated in
    place (0-d input gives scalars: the list is rebound). The arithmetic-geometric sequence of ``k`` is shared; only the three running sums
    of each set differ. The number of iterations is the one the smallest modulus needs
    (:func:`_agm_steps`), so no element is tested on the way. Returns ``cel / (pi / 2)``
    of each set.

    References
    ----------
    .. [1] R. Bulirsch, Numer. Math. 13, 305-315 (1969), algorithm ``cel``.
    """
    steps = _agm_steps(float(np.min(k)), rtol, max_iter) if k.size else 0
    em = k + 1.0
    kk = k
    for _ in range(steps):
        k = np.sqrt(kk)
        k *= 2.0
        kk = k * em
        for r in runs:
            pp, cc, ss = r
            inv = 1.0 / pp  # one division serves s / p and kk / p
            g = kk * inv
            inv *= ss
            inv += cc  # c + s / p
            cc *= g
            ss += cc
            ss *= 2.0
            pp += g
            r[:] = [pp, inv, ss]  # the same arrays, or new scalars for 0-d input
        em += k
    out = []
    for pp, cc, ss in runs:
        cc *= em
        cc += ss
        pp += em
        pp *= em
        cc /= pp
        out.append(cc)
    return out


def _cel_two(kc: np.ndarray, gamma: np.ndarray, rtol: float = 1e-8, max_iter: int = 40,
             kmin: float | None = None) -> tuple[np.ndarray, np.ndarray]:
    """``cel(kc, 1, 1, -1)`` and ``cel(kc, gamma^2, 1, gamma)``, both divided by pi / 2,
    in one pass (``kc > 0``, ``gamma != 0``).

    Bulirsch's algorithm [1]_ with its first step written out for these parameters. For
    ``p = 1`` its running ``p`` equals the arithmetic mean ``em`` at every step (both start
    at ``1 + k`` and grow by the new ``k``), so that set needs no division by ``p``; the
    second set runs as in :func:`_cel_run`. Same tolerance and stopping rule as :func:`cel`;
    ``kmin`` is the smallest ``kc`` when the caller knows it.

    References
    ----------
    .. [1] R. Bulirsch, Numer. Math. 13, 305-315 (1969), algorithm ``cel``.
    """
    k = kc
    if kmin is None:
        kmin = float(np.min(k)) if k.size else 1.0
    steps = _agm_steps(kmin, rtol, max_iter)
    em = k + 1.0
    # set 1 (p = 1, c = 1, s = -1): after the first step c = 0, s = 2 (k - 1), p = em
    c1 = np.zeros_like(k)
    s1 = k - 1.0
    s1 *= 2.0
    # set 2 (p = gamma^2, c = 1, s = gamma): sqrt(p) = |gamma|, s / sqrt(p) = sign(gamma)
    p2 = np.abs(gamma)
    g = k / p2
    c2 = np.empty_like(k)
    np.divide(1.0, gamma, out=c2)  # broadcast over both end faces
    c2 += 1.0
    s2 = np.sign(gamma) + g
    s2 *= 2.0
    p2 = p2 + g
    kk = k
    for _ in range(steps):
        k = np.sqrt(kk)
        k *= 2.0
        kk = k * em
        # set 1: g = kk / em = k
        t = c1 * k
        c1 += s1 / em
        s1 += t
        s1 *= 2.0
        # set 2
        inv = 1.0 / p2
        g = kk * inv
        inv *= s2
        inv += c2
        c2 *= g
        s2 += c2
        s2 *= 2.0
        p2 += g
        c2 = inv
        em += k
    c1 *= em
    c1 += s1
    c1 /= em
    c1 /= em
    c1 *= 0.5  # (s + c em) / (em (em + p)) with p = em
    c2 *= em
    c2 += s2
    p2 += em
    p2 *= em
    c2 /= p2
    return c1, c2


def _cyl_core(p: np.ndarray, radius, half_h, jz, centre, ell) -> np.ndarray:
    """B of axially polarised cylinders; p (n,3); per-source arrays (m,).

    The two end faces (``z_+``, ``z_-``) are evaluated together along a leading axis of
    length 2. On the side wall (``rho == a`` exactly) the formula with ``gamma = 0`` gives
    the mean of the inside and outside values of Bz. On the rim (``k = 0``) the divergent
    term is evaluated at the distance ``ell`` (m,) from the rim, i.e. at ``k = ell / (2 a)``.
    """
    x = p[:, 0:1] - centre[None, :, 0]
    y = p[:, 1:2] - centre[None, :, 1]
    zz = np.empty((2, p.shape[0], radius.shape[0]))  # z_+ and z_- (2, n, m)
    np.subtract(p[:, 2:3], centre[:, 2] - half_h, out=zz[0])
    np.subtract(p[:, 2:3], centre[:, 2] + half_h, out=zz[1])
    a = radius[None, :]
    rho = x * x
    rho += y * y
    np.sqrt(rho, out=rho)
    zz2 = zz * zz
    apr = a + rho
    amr = a - rho
    den = apr * apr
    den = zz2 + den  # (2, n, m)
    num = amr * amr
    num = zz2 + num
    d = np.sqrt(den)
    kc = num / den
    np.sqrt(kc, out=kc)
    on_wall = np.abs(amr) <= EDGE_SNAP * ell
    gamma = amr / apr
    if on_wall.any():  # on the wall cel(kc, 0, 1, 0) = cel(kc, 1, 1, 1)
        gamma[on_wall] = 1.0
    # rim: kc == 0 only where rho == a and z == +-b; the divergent term is masked
    k_rim = ell / (2.0 * radius)
    kmin = float(kc.min())
    any_rim = kmin <= EDGE_SNAP * float(k_rim.max())
    if any_rim:
        rim = kc <= EDGE_SNAP * k_rim
        any_rim = bool(rim.any())
        kc = np.where(rim, k_rim, kc)
        kmin = float(kc.min())
    # one iteration for both moduli and both parameter sets
    c1, c2 = _cel_two(kc, gamma[None], kmin=kmin)
    np.divide(1.0, d, out=d)
    c1 *= d  # alpha cel / a
    c2 *= d
    c2 *= zz  # beta cel
    if any_rim:
        c2[rim] = 0.0  # z_+- = 0 on the rim: beta K -> 0
    multi = np.ndim(jz) == 2  # k polarisation sets (k, m): unit fields, weighted at the end
    half_ja = 0.5 * radius if multi else 0.5 * jz * radius  # J / pi times the pi / 2 of cel, times a
    b_rho = c1[0] - c1[1]
    b_rho *= half_ja
    b_z = c2[0] - c2[1]
    b_z *= half_ja
    b_z /= apr
    if rho.min() > 0:
        w = np.divide(b_rho, rho, out=b_rho)  # B_rho / rho
    else:  # on an axis: B_rho = 0
        w = np.divide(b_rho, rho, out=np.zeros_like(b_rho), where=rho > 0)
    if multi:  # (k, n, 3)
        return np.stack([(w * x) @ jz.T, (w * y) @ jz.T, b_z @ jz.T], axis=-1).transpose(1, 0, 2)
    return np.stack([np.einsum("ij,ij->i", w, x), np.einsum("ij,ij->i", w, y), b_z.sum(axis=1)], axis=1)


def _cyl_sum(p: np.ndarray, radii, half_h, jz, positions, ell) -> np.ndarray:
    """Sum of :func:`_cyl_core` in chunks; ``jz`` (m,) gives (n, 3), a stack (k, m) of
    polarisation sets gives (k, n, 3) (the field is linear in ``jz``)."""
    out = np.zeros((*np.shape(jz)[:-1], *p.shape))
    m = radii.shape[0]
    if m == 0 or p.shape[0] == 0:
        return out
    # both end faces are stacked (2, n, m): half the usual chunk keeps each temporary at
    # 64 kB, below the allocator's mmap threshold (measured 2.4x faster than 128 kB)
    for sl in _chunks(p.shape[0], 4 * m):
        out[..., sl, :] = _cyl_core(p[sl], radii, half_h, jz, positions, ell)
    return out


def cylinder_B(observers, diameters, heights, polarizations_z, positions) -> np.ndarray:
    """Flux density of axially polarised solid cylinders, summed.

    Parameters
    ----------
    observers : array_like, shape (n, 3)
        Field points [m].
    diameters, heights : array_like, shape (m,)
        Diameter and height (along z) of each cylinder [m].
    polarizations_z : array_like, shape (m,)
        Signed polarisation J_z = mu0 M_z along +z [T].
    positions : array_like, shape (m, 3)
        Centres [m].

    Returns
    -------
    ndarray, shape (n, 3)
        B [T], including J inside; finite everywhere (the log-divergent term on the rim
        is masked; on the side wall Bz is the inside limit).

    Notes
    -----
    The closed form of Derby and Olbert [1]_ in terms of Bulirsch's ``cel``: with radius
    a, half-height b, (rho, z) measured from the centre, ``z_+- = z +- b`` and, for each
    of ``z_+`` and ``z_-``, ``alpha = a / sqrt(z^2 + (rho + a)^2)``,
    ``beta = z / sqrt(z^2 + (rho + a)^2)``, ``gamma = (a - rho)/(a + rho)``,
    ``k = sqrt((z^2 + (a - rho)^2)/(z^2 + (a + rho)^2))`` (the complementary modulus),

    .. math::

        B_\\rho = \\frac{J}{\\pi}\\left[\\alpha_+ \\mathrm{cel}(k_+, 1, 1, -1)
                  - \\alpha_- \\mathrm{cel}(k_-, 1, 1, -1)\\right],

        B_z = \\frac{J}{\\pi}\\frac{a}{a + \\rho}\\left[
              \\beta_+ \\mathrm{cel}(k_+, \\gamma^2, 1, \\gamma)
              - \\beta_- \\mathrm{cel}(k_-, \\gamma^2, 1, \\gamma)\\right],

    which is the exact B of the equivalent current sheet (inside and outside).

    References
    ----------
    .. [1] N. Derby and S. Olbert, "Cylindrical magnets and ideal solenoids",
       Am. J. Phys. 78, 229-235 (2010).
    """
    d = _as_rows(diameters, 1, "diameters", positive=True)
    h = _as_rows(heights, 1, "heights", positive=True)
    j = _as_rows(polarizations_z, 1, "polarizations_z")
    pos = _as_rows(positions, 3, "positions")
    _same_count({"diameters": d, "heights": h, "polarizations_z": j, "positions": pos})
    m = d.shape[0]
    pols = np.column_stack([np.zeros(m), np.zeros(m), j])
    from matdb.physics.fields.magnet_set import MagnetSet  # lazy: circular at load time

    return MagnetSet(["cylinder"] * m, np.column_stack([d, h]), pols, pos).B(observers)


def ring_B(observers, outer_diameters, inner_diameters, heights, polarizations_z, positions) -> np.ndarray:
    """Flux density of axially polarised rings (outer cylinder minus inner), summed.

    Parameters
    ----------
    observers : array_like, shape (n, 3)
        Field points [m].
    outer_diameters, inner_diameters, heights : array_like, shape (m,)
        Outer and inner diameter (0 <= inner < outer) and height [m].
    polarizations_z : array_like, shape (m,)
        Signed polarisation J_z [T].
    positions : array_like, shape (m, 3)
        Centres [m].

    Returns
    -------
    ndarray, shape (n, 3)
        B [T]; on both side walls Bz is the limit from inside the ring material.

    References
    ----------
    .. [1] N. Derby and S. Olbert, Am. J. Phys. 78, 229-235 (2010) (superposition of
       two of their cylinders, the inner one with -J).
    """
    do = _as_rows(outer_diameters, 1, "outer_diameters", positive=True)
    di = _as_rows(inner_diameters, 1, "inner_diameters")
    h = _as_rows(heights, 1, "heights", positive=True)
    j = _as_rows(polarizations_z, 1, "polarizations_z")
    pos = _as_rows(positions, 3, "positions")
    _same_count(
        {"outer_diameters": do, "inner_diameters": di, "heights": h, "polarizations_z": j, "positions": pos}
    )
    if np.any(di < 0) or np.any(di >= do):
        raise InputError("inner_diameters: expected 0 <= inner diameter < outer diameter")
    m = do.shape[0]
    pols = np.column_stack([np.zeros(m), np.zeros(m), j])
    from matdb.physics.fields.magnet_set import MagnetSet  # lazy: circular at load time

    return MagnetSet(["ring"] * m, np.column_stack([do, di, h]), pols, pos).B(observers)

