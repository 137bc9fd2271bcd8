"""Shared input checks, constants and chunking of the field kernels (SI throughout)."""

from __future__ import annotations

import math

import numpy as np

from matdb.errors import InputError
from matdb.constants import MU0

_FOUR_PI = 4.0 * math.pi
MU0_OVER_4PI = MU0 / _FOUR_PI  # [T m / A]

# Number of (point x source) pairs evaluated at once. Temporaries of 128 kB stay below
# the allocator's mmap threshold and in cache; larger chunks are measurably slower.
_CHUNK_ELEMENTS = 1 << 14

#: On an edge or corner line the logarithmically divergent term is evaluated at this
#: fraction of the smallest dimension of the magnets (an edge rounding about the size of
#: a real chamfer), which keeps the value finite and independent of the length unit.
EDGE_ROUNDING = 0.01
#: Points closer to an edge line than this fraction of the rounding length count as on it
#: (1e-9 of the magnet size: far below any meaningful distance, far above rounding).
EDGE_SNAP = 1e-7


# ---------------------------------------------------------------------------
# input checking
# ---------------------------------------------------------------------------
def _as_points(observers, field: str = "observers") -> np.ndarray:
    p = np.asarray(observers, dtype=float)
    if p.ndim == 1 and p.shape[0] == 3:
        p = p.reshape(1, 3)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(f"{field}: expected an array of shape (n, 3) in metres, got shape {p.shape}")
    if not np.all(np.isfinite(p)):
        raise InputError(f"{field}: expected finite coordinates, got NaN or inf")
    return p


def _as_rows(values, width: int, field: str, *, positive: bool = False) -> np.ndarray:
    a = np.asarray(values, dtype=float)
    if width == 1:
        a = np.atleast_1d(a)
        if a.ndim != 1:
            raise InputError(f"{field}: expected a 1-d array, got shape {a.shape}")
    else:
        if a.ndim == 1 and a.shape[0] == width:
            a = a.reshape(1, width)
        if a.ndim != 2 or a.shape[1] != width:
            raise InputError(f"{field}: expected an array of shape (m, {width}), got shape {a.shape}")
    if not np.all(np.isfinite(a)):
        raise InputError(f"{field}: expected finite values, got NaN or inf")
    if positive and not np.all(a > 0):
        raise InputError(f"{field}: expected positive lengths in metres")
    return a


def _same_count(field_arrays: dict[str, np.ndarray]) -> int:
    counts = {k: v.shape[0] for k, v in field_arrays.items()}
    m = set(counts.values())
    if len(m) != 1:
        raise InputError(
            "magnets: expected the same number of rows in "
            + ", ".join(f"{k} ({n})" for k, n in counts.items())
        )
    return m.pop()


def _chunks(n_points: int, n_sources: int, elements: int | None = None):
    step = max(1, (elements or _CHUNK_ELEMENTS) // max(1, n_sources))
    for start in range(0, n_points, step):
        yield slice(start, min(n_points, start + step))

