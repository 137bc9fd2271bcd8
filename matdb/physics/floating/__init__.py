"""Floating-magnet mode: a floater magnet under a lifter, held stable by two diamagnetic
plates.

A small floater magnet hangs a little below a larger lifter magnet; both are magnetised
along +z on a common vertical axis. The lifter's pull balances the weight at one lifter
distance, but the balance is unstable vertically (Earnshaw): closer, the pull grows.
Two diamagnetic plates, one above and one below the floater, repel it from both sides
and, when close enough, make the vertical stiffness positive (diamagnetically
stabilised levitation, Simon, Heflinger and Geim [1]_; Simon and Geim [2]_).

Geometry and signs
------------------
The floater's centre is at the origin; the lifter's near (lower) face at height
``D`` (the *lifter distance*). Each plate's facing surface lies at ``a`` above and below
the floater's centre (the *plate distance*); the plates have thickness ``t`` and extend
laterally well beyond the floater (modelled as slabs, c axis vertical). Stiffness
``k = -dF/dq`` (positive restores); torsional stiffness ``kappa = d^2U/dtheta^2``.

Modules (by topic)
------------------
* :mod:`~matdb.physics.floating.body`: the magnets (:class:`Body`, :class:`BodySet`).
* :mod:`~matdb.physics.floating.lifter`: the lifter on the floater: force from the
  equivalent surface charges of its pole faces, energy ``-int M.B dV`` for torques and
  tilt, and the on-axis pull tabulated against the lifter distance.
* :mod:`~matdb.physics.floating.dipole`: the plates, image-dipole model (the floater as
  a point dipole with an image of strength ``chi/2`` in each plate).
* :mod:`~matdb.physics.floating.plates`: the plates, finite-size model (used for the
  verdict): the floater's real field over the plates' volume,
  ``U = 1/(2 mu0) int (|chi_perp| B_z^2 + |chi_par| B_h^2) dV``, reduced to plane
  integrals over the plates' faces. It tends to the dipole model far away.
* :mod:`~matdb.physics.floating.station`: one station: balance, stiffness, window,
  largest load, schedule row.
* :mod:`~matdb.physics.floating.stations`: several stations under one payload.

The whole analysis is :func:`matdb.analysis.floating.levitate_stabilized`.

Both plate models keep the energy to first order in chi; the plates' interaction with
the lifter's field (a correction of relative order |chi| to the lifter's own force and
stiffness) is omitted.

References
----------
.. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, "Diamagnetically stabilized magnet
   levitation", Am. J. Phys. 69, 702-713 (2001).
.. [2] M. D. Simon and A. K. Geim, "Diamagnetic levitation: Flying frogs and floating
   magnets", J. Appl. Phys. 87, 6200-6204 (2000).
.. [3] J. D. Jackson, "Classical Electrodynamics", 3rd ed., Wiley (1999): eq. (5.56)
   (dipole field), sec. 5.12 (force and energy of a magnetisation in an external field),
   sec. 4.4 (image charges at a plane boundary between two linear media).
.. [4] L. D. Landau and E. M. Lifshitz, "Electrodynamics of Continuous Media", 2nd ed.,
   Pergamon (1984), sec. 32 (energy of a weakly magnetic body, ``-chi B^2/(2 mu0)``).
"""

from matdb.physics.floating import lifter as _lifter
from matdb.physics.floating import plates as _plates
from matdb.physics.floating.body import Body, BodySet
from matdb.physics.floating.dipole import (
    dipole_plate_force,
    dipole_plates_stiffness,
    dipole_plates_tilt_stiffness,
    effective_chi,
)
from matdb.physics.floating.lifter import (
    PullTable,
    axial_pull,
    lifter_energy,
    lifter_force,
    lifter_hessian,
    lifter_stiffness,
    pull_table,
)
from matdb.physics.floating.plates import FinitePlates
from matdb.physics.floating.station import (
    StationModel,
    lift_temperature_slope,
    lifter_distance_drift,
    schedule_row,
    station_model,
)
from matdb.physics.floating.stations import body_stiffness, coupled_heights, weight_shares

__all__ = [
    "Body",
    "BodySet",
    "effective_chi",
    "dipole_plate_force",
    "dipole_plates_stiffness",
    "dipole_plates_tilt_stiffness",
    "lifter_force",
    "lifter_stiffness",
    "lifter_energy",
    "lifter_hessian",
    "axial_pull",
    "PullTable",
    "pull_table",
    "FinitePlates",
    "StationModel",
    "station_model",
    "lifter_distance_drift",
    "lift_temperature_slope",
    "schedule_row",
    "weight_shares",
    "body_stiffness",
    "coupled_heights",
    "clear_tables",
]


def clear_tables() -> None:
    """Forget the pull tables and the plates' tables (for timing a cold start)."""
    _lifter._pull_table.cache_clear()
    _plates._TABLES.clear()
