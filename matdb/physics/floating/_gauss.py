"""Gauss-Legendre rules on intervals and composite panels (temporary: replaced by
:mod:`matdb.physics.quadrature` once it exists)."""

from __future__ import annotations

from functools import lru_cache

import numpy as np


@lru_cache(maxsize=None)
def _gl(n: int) -> tuple:
    x, w = np.polynomial.legendre.leggauss(n)
    return x, w


def gl_on(a: float, b: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    """``n`` Gauss-Legendre nodes and weights on ``[a, b]``."""
    x, w = _gl(n)
    return 0.5 * (b - a) * x + 0.5 * (a + b), 0.5 * (b - a) * w


def composite(edges, n: int) -> tuple[np.ndarray, np.ndarray]:
    """``n``-point Gauss-Legendre on each panel between consecutive ``edges``."""
    e = np.asarray(edges, dtype=float)
    x, w = _gl(n)
    half = 0.5 * np.diff(e)[:, None]
    mid = 0.5 * (e[1:] + e[:-1])[:, None]
    return (mid + half * x).ravel(), (half * w).ravel()
