"""Gauss-Legendre rules: one place for every 1-D, compound, graded and disc rule.

Everything here is geometry-free: intervals, break points and radii in metres (or any
length; the rules are scale-free), nodes and weights as numpy arrays. Rules are cached
(``functools.lru_cache`` on hashable arguments) and returned as read-only arrays, so a
caller can never corrupt a cached rule.

References
----------
.. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
   Academic Press (1984), ch. 2 (Gauss-Legendre and compound rules, subdivision towards
   singular points).
.. [2] G. H. Golub and J. H. Welsch, "Calculation of Gauss quadrature rules", Math. Comp.
   23, 221-230 (1969) (the nodes and weights numpy's ``leggauss`` returns).
"""

from __future__ import annotations

import bisect
import math
from functools import lru_cache
from typing import Sequence

import numpy as np

GRADING_RATIO = 3.0  # geometric growth of the panels away from a singular line

__all__ = ["GRADING_RATIO", "gauss_legendre", "gauss_on", "gauss_panels", "graded_breaks",
           "graded_rule", "disc_rule"]


def _frozen(*arrays: np.ndarray) -> tuple[np.ndarray, ...]:
    for a in arrays:
        a.setflags(write=False)
    return arrays


@lru_cache(maxsize=None)
def gauss_legendre(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Nodes and weights of the ``n``-point Gauss-Legendre rule on [-1, 1] (cached).

    References
    ----------
    .. [1] G. H. Golub and J. H. Welsch, Math. Comp. 23, 221 (1969).
    """
    x, w = np.polynomial.legendre.leggauss(int(n))
    return _frozen(x, w)


def gauss_on(a: float, b: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    """``n``-point Gauss-Legendre nodes and weights on ``[a, b]``.

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2.
    """
    x, w = gauss_legendre(n)
    return 0.5 * (b - a) * x + 0.5 * (a + b), 0.5 * (b - a) * w


def gauss_panels(breaks, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Compound Gauss-Legendre nodes and weights, ``n`` per panel between ``breaks``.

    Parameters
    ----------
    breaks : array_like (k + 1,)
        Sorted panel boundaries.
    n : int
        Nodes per panel.

    Returns
    -------
    x, w : ndarray (k n,)

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 (compound rules).
    """
    xi, wi = gauss_legendre(n)
    breaks = np.asarray(breaks, dtype=float)
    a, b = breaks[:-1, None], breaks[1:, None]
    half = 0.5 * (b - a)
    return ((a + b) * 0.5 + half * xi).ravel(), (half * wi).ravel()


def graded_breaks(lo: float, hi: float, singular: Sequence[float], scale: float,
                  ratio: float = GRADING_RATIO) -> np.ndarray:
    """Panel boundaries on ``[lo, hi]``, graded geometrically towards ``singular`` points.

    Around every point ``s`` the boundaries ``s +- scale * ratio**k`` (k = 0, 1, ...) that
    fall inside the interval are added, and ``s`` itself when inside. ``scale`` is the
    distance of the integration line from the singular line (e.g. its height above the
    magnets), which sets the width of the integrand's variation there. Boundaries are
    then merged while every panel stays no wider than ``(ratio - 1)`` times its distance
    from the nearest singular point (at least ``scale``): each panel sees the nearest
    singularity at about one half-width or more, which keeps Gauss-Legendre converging
    geometrically, and no panel is narrower than it needs to be.

    Returns
    -------
    ndarray
        Sorted boundaries including ``lo`` and ``hi`` (read-only, cached).

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 (subdivision towards singular points).
    """
    return _graded_breaks(float(lo), float(hi), tuple(float(v) for v in singular),
                          float(scale), float(ratio))


@lru_cache(maxsize=8192)
def _graded_breaks(lo: float, hi: float, singular: tuple[float, ...], scale: float,
                   ratio: float) -> np.ndarray:
    # plain Python on purpose: a few dozen candidates, built anew for every height the
    # root finders visit, so per-call overhead is what counts (same arithmetic as numpy)
    length = hi - lo
    if not (length > 0) or scale <= 0:
        return _frozen(np.array([lo, hi]))[0]
    half = 0.5 * length
    sing = sorted(x for x in singular if max(lo - x, x - hi, 0.0) <= half)
    if not sing:
        return _frozen(np.array([lo, hi]))[0]
    levels = int(math.ceil(math.log(max(2.0 * length / scale, 1.0)) / math.log(ratio))) + 1
    steps = [scale * ratio ** k for k in range(levels)]
    cand = set(sing)
    for x in sing:
        cand.update(x - st for st in steps)
        cand.update(x + st for st in steps)
    pts = sorted(c for c in cand if lo < c < hi)
    hard = {x for x in sing if lo < x < hi}
    allowed = ratio - 1.0
    n_sing = len(sing)
    tiny = 1e-9 * length
    out = [lo]
    last = lo
    pts.append(hi)
    for i in range(len(pts) - 1):
        p, nxt = pts[i], pts[i + 1]
        if p in hard:
            cut = True
        else:
            # distance from the panel [last, nxt] to the nearest singular point
            k = bisect.bisect_left(sing, last)
            if k < n_sing and sing[k] <= nxt:
                d = 0.0
            else:
                left = last - sing[k - 1] if k > 0 else math.inf
                right = sing[k] - nxt if k < n_sing else math.inf
                d = min(left, right)
            cut = (nxt - last) > allowed * max(d, scale)
        if cut and p - last > tiny:
            out.append(p)
            last = p
    out.append(hi)
    return _frozen(np.array(out))[0]


@lru_cache(maxsize=4096)
def _graded_rule(lo: float, hi: float, singular: tuple[float, ...], scale: float, n: int,
                 ratio: float) -> tuple[np.ndarray, np.ndarray]:
    return _frozen(*gauss_panels(_graded_breaks(lo, hi, singular, scale, ratio), n))


def graded_rule(lo: float, hi: float, singular: Sequence[float], scale: float, n: int,
                ratio: float = GRADING_RATIO) -> tuple[np.ndarray, np.ndarray]:
    """Compound Gauss-Legendre rule on :func:`graded_breaks` (cached, read-only).

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2.
    """
    return _graded_rule(float(lo), float(hi), tuple(float(v) for v in singular), float(scale),
                        int(n), float(ratio))


def disc_rule(cx: float, cy: float, radius: float, singular_x: Sequence[float],
              singular_y: Sequence[float], scale: float, n: int,
              ratio: float = GRADING_RATIO) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Quadrature over the disc of ``radius`` centred at ``(cx, cy)``, graded towards the
    lines ``x = singular_x`` and ``y = singular_y`` (cached, read-only).

    Across the disc ``x = cx + R sin(phi)`` (so the chord half-length ``R cos(phi)`` is
    smooth in ``phi``), with the graded compound rule in ``phi`` and, along each chord,
    in ``y``. Every chord's breaks come from the cached :func:`graded_breaks`; the nodes
    and weights of all chords are then assembled in one vectorised step.

    Returns
    -------
    x, y, w : ndarray
        Nodes [m] and area weights [m^2]; ``sum(w)`` is ``pi R^2`` to rounding.

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2 and sec. 5.6 (product rules over a disc).
    """
    return _disc_rule(float(cx), float(cy), float(radius),
                      tuple(float(v) for v in singular_x), tuple(float(v) for v in singular_y),
                      float(scale), int(n), float(ratio))


@lru_cache(maxsize=512)
def _disc_rule(cx: float, cy: float, r: float, sx: tuple[float, ...], sy: tuple[float, ...],
               scale: float, n: int, ratio: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    xb = _graded_breaks(cx - r, cx + r, sx, scale, ratio)
    phib = np.arcsin(np.clip((xb - cx) / r, -1.0, 1.0))
    phi, wphi = gauss_panels(phib, n)
    half = r * np.cos(phi)
    # panel boundaries of every chord (cached per chord); the rest is vectorised
    chords = [_graded_breaks(cy - c, cy + c, sy, scale, ratio) for c in half.tolist()]
    counts = np.array([b.size - 1 for b in chords])
    a = np.concatenate([b[:-1] for b in chords])
    b = np.concatenate([b[1:] for b in chords])
    xi, wi = gauss_legendre(n)
    hw = 0.5 * (b - a)
    y = ((a + b)[:, None] * 0.5 + hw[:, None] * xi).ravel()
    per_node = counts * n  # nodes per chord
    wy = (hw[:, None] * wi).ravel()
    x = np.repeat(cx + r * np.sin(phi), per_node)
    w = wy * np.repeat(wphi * half, per_node)  # dx = R cos(phi) dphi
    return _frozen(x, y, w)
