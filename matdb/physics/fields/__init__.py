"""Closed-form magnetic flux density of permanent magnets: bare vectorised cores.

Everything here is SI: observers ``(n, 3)`` in metres, magnet sizes and centres in
metres, polarisations ``J = mu0 M`` in tesla (for a permanent magnet ``|J| = Br``),
dipole moments in A m^2, and every function returns ``B`` of shape ``(n, 3)`` in tesla.

The field includes the polarisation inside the magnets (``B = mu0 H + J``), so the
functions can be sampled inside magnets (the demagnetisation check does). They return
finite numbers everywhere:

* strictly inside or outside a magnet the closed forms are exact;
* on a face the value is the limit from inside the magnet (the normal component of B is
  continuous there anyway; the tangential one takes the inside value); where magnets
  touch, from inside the first one listed (see :class:`MagnetSet`);
* on an edge or corner the part of B that stays bounded (for a cuboid the arctangent
  terms, which carry the component along each polarisation component; Bz of a
  cylinder) is the limit from inside the magnet along the bisector of its faces there;
  the part that diverges logarithmically on an ideal sharp edge (the logarithm terms;
  B_rho of a cylinder on its rim) is evaluated at a rounding length of
  :data:`EDGE_ROUNDING` (1 %) of the magnet's smallest dimension instead, the way
  published treatments mask those terms but independent of the length unit;
* points closer than 1e-9 of the magnet size to a face, edge or corner count as on it,
  so rounding of the inputs does not change the result.

Scaling every length by one factor leaves every value unchanged, edges included.

One file per geometry: :mod:`.cuboid` (:class:`CuboidSet`, :func:`cuboid_B`),
:mod:`.cylinder` (:func:`cel`, :func:`cylinder_B`, :func:`ring_B`), :mod:`.dipole`
(:func:`dipole_B`); :mod:`.magnet_set` (:class:`MagnetSet`) superposes them and resolves
values on surfaces; :mod:`._common` holds the input checks shared by all of them.

Uniformly polarised, axis-aligned cuboids use the surface-charge solution of
Engel-Herbert and Hesjedal (2005), equivalently Yang et al. (1990): each component is a
signed sum over the cuboid's eight corners of one arctangent or one logarithm; touching
neighbours share corners, and :class:`CuboidSet` evaluates each distinct corner once.
Axially polarised cylinders use the current-sheet solution of Derby and Olbert (2010)
with Bulirsch's generalised complete elliptic integral ``cel`` (1969); rings are an outer
cylinder minus an inner one.

References
----------
The full entries are in the docstrings of :mod:`.cuboid` and :mod:`.cylinder`, beside
the formulas that use them.
"""

from __future__ import annotations

from matdb.physics.fields._common import EDGE_ROUNDING, EDGE_SNAP, MU0_OVER_4PI
from matdb.physics.fields._common import _as_points as as_points
from matdb.physics.fields.cuboid import CuboidSet, cuboid_B
from matdb.physics.fields.cylinder import cel, cylinder_B, ring_B
from matdb.physics.fields.dipole import dipole_B
from matdb.physics.fields.magnet_set import MagnetSet

__all__ = [
    "CuboidSet",
    "MagnetSet",
    "cel",
    "cuboid_B",
    "cylinder_B",
    "ring_B",
    "dipole_B",
    "EDGE_ROUNDING",
    "EDGE_SNAP",
    "MU0_OVER_4PI",
    "as_points",
]
