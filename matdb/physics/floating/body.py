"""Magnet bodies of the floating-magnet mode: a uniformly magnetised magnet with a
vertical axis (cuboid, cylinder or ring) and a set of them as one field source.

The field is the closed-form one of :mod:`matdb.physics.fields`, set up once per shape,
size and polarisation.

References
----------
.. [1] J. D. Jackson, "Classical Electrodynamics", 3rd ed., Wiley (1999), sec. 5.9
   (field of a uniformly magnetised body).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np

from matdb.errors import InputError
from matdb.physics.fields import MagnetSet
from matdb.constants import MU0

__all__ = ["Body", "BodySet"]


@dataclass(frozen=True)
class Body:
    """A uniformly magnetised magnet, polarised along +z, axis vertical.

    Parameters
    ----------
    shape : str
        ``"cuboid"`` (size ``(x, y, height)``), ``"cylinder"`` (``(diameter, height)``)
        or ``"ring"`` (``(outer diameter, inner diameter, height)``) [m].
    size : tuple of float
        See ``shape`` [m].
    j_t : float
        Polarisation ``J = mu0 M`` along +z (``Br`` for a permanent magnet) [T].
    centre : tuple of float
        Centre [m].
    """

    shape: str
    size: tuple
    j_t: float
    centre: tuple = (0.0, 0.0, 0.0)

    def __post_init__(self):
        if self.shape not in ("cuboid", "cylinder", "ring"):
            raise InputError(f"shape: expected cuboid, cylinder or ring, got {self.shape!r}")
        n = 2 if self.shape == "cylinder" else 3
        if len(self.size) != n:
            raise InputError(f"size: expected {n} lengths for a {self.shape}, got {self.size!r}")

    @property
    def height(self) -> float:
        """Height along z [m]."""
        return float(self.size[-1])

    @property
    def half_height(self) -> float:
        """Half the height [m]."""
        return 0.5 * self.height

    @property
    def volume(self) -> float:
        """Volume [m^3]."""
        s = self.size
        if self.shape == "cuboid":
            return float(s[0] * s[1] * s[2])
        if self.shape == "cylinder":
            return float(math.pi / 4 * s[0] ** 2 * s[1])
        return float(math.pi / 4 * (s[0] ** 2 - s[1] ** 2) * s[2])

    @property
    def moment(self) -> float:
        """Dipole moment ``J V / mu0`` [A m^2]."""
        return self.j_t * self.volume / MU0

    @property
    def lateral(self) -> float:
        """Largest lateral half-extent [m]."""
        s = self.size
        return float(0.5 * math.hypot(s[0], s[1]) if self.shape == "cuboid" else 0.5 * s[0])

    def at(self, centre) -> "Body":
        """The same magnet with its centre at ``centre`` [m]."""
        return replace(self, centre=tuple(float(c) for c in centre))

    def B(self, points) -> np.ndarray:
        """Flux density at ``points`` (n, 3) [m] -> (n, 3) [T]."""
        p = np.asarray(points, dtype=float).reshape(-1, 3)
        c = np.asarray(self.centre, dtype=float).reshape(1, 3)
        return _evaluator(self.shape, tuple(float(v) for v in self.size), float(self.j_t))(p - c)

    def bounds(self) -> tuple:
        """``(xmin, xmax, ymin, ymax, zmin, zmax)`` [m]."""
        s = self.size
        hx, hy = (0.5 * s[0], 0.5 * s[1]) if self.shape == "cuboid" else (0.5 * s[0], 0.5 * s[0])
        x, y, z = self.centre
        return (x - hx, x + hx, y - hy, y + hy, z - self.half_height, z + self.half_height)


@lru_cache(maxsize=256)
def _evaluator(shape: str, size: tuple, j_t: float):
    """B of one magnet centred at the origin, as a function of points (set up once)."""
    return MagnetSet([shape], [size], [[0.0, 0.0, j_t]], [[0.0, 0.0, 0.0]]).B


class BodySet:
    """Several bodies as one field source (other stations' lifters, the safety distance)."""

    def __init__(self, bodies):
        self.bodies = list(bodies)
        self._set = MagnetSet([b.shape for b in self.bodies], [tuple(float(v) for v in b.size) for b in self.bodies],
                              [[0.0, 0.0, float(b.j_t)] for b in self.bodies], [b.centre for b in self.bodies])

    def B(self, points) -> np.ndarray:
        """Flux density of all the bodies at ``points`` (n, 3) [m] -> (n, 3) [T]
        (superposition, one evaluation)."""
        return self._set.B(np.asarray(points, dtype=float).reshape(-1, 3))

    def bounds(self) -> tuple:
        """``(xmin, xmax, ymin, ymax, zmin, zmax)`` of all the bodies [m]."""
        bb = np.array([b.bounds() for b in self.bodies])
        return (bb[:, 0].min(), bb[:, 1].max(), bb[:, 2].min(), bb[:, 3].max(), bb[:, 4].min(), bb[:, 5].max())
