"""Floating-plate mode: a diamagnetic plate over a permanent-magnet arrangement.

Physics
-------
A weakly magnetisable body (``|chi| << 1``) in an applied field ``B`` has the induced
magnetisation ``M = chi B / mu0`` and the energy

    U = -(1 / (2 mu0)) * integral_V  B . chi B  dV  =  (1 / (2 mu0)) * integral_V w dV,

with, for a plate whose crystal c axis is along the unit vector ``e`` (vertical when the
plate is level),

    w = |chi_perp| (B . e)^2 + |chi_par| (|B|^2 - (B . e)^2)       [T^2]

(``chi_perp``: field along the c axis, ``chi_par``: field in the basal plane; an isotropic
material has ``chi_perp = chi_par``). Self-demagnetisation changes ``w`` by a relative
``O(|chi|)`` (< 5e-4 for graphite) and is neglected, as in [1]_ and [2]_.

**Surface integrals (divergence theorem).** Translating the body by ``d`` moves the region
``V`` through the fixed function ``w``, so ``dU/dd = (1/(2 mu0)) integral_V grad w dV =
(1/(2 mu0)) closed_integral_S w n dS`` and the force is

    F = -(1 / (2 mu0)) * closed_integral_S  w n dS.

For a plate with vertical sides, bottom face at height ``g`` and top at ``g + t``, the
vertical part is exactly ``F_z(g) = (1/(2 mu0)) integral_footprint [w(g) - w(g + t)] dA``
and the lateral part ``F_x = -(1/(2 mu0)) [integral_(+x side) w dS - integral_(-x side) w dS]``.
Rotating the body by a small angle about the axis ``a`` through the point ``C`` moves the
surface with velocity ``(a x (r - C))``, giving the torque about ``C``

    tau = -(1 / (2 mu0)) * closed_integral_S  w (r - C) x n dS
          + (1 / mu0) * integral_V (|chi_perp| - |chi_par|) (B . e) (B x e) dV,

where the second (volume) term is ``integral M x B dV``, the turning of the anisotropic
susceptibility tensor with the plate (zero for an isotropic plate). Only the torque needs
a volume integral, and only for anisotropic plates.

**Separation.** Every force, torque and stiffness is linear in ``(|chi_perp|, |chi_par|)``
and, for an arrangement of one remanence ``B_r``, proportional to ``B_r^2``. The functions
below therefore return their results split by component: index 0 is the part multiplying
``|chi_perp|`` (the ``(B . e)^2`` integrals), index 1 the part multiplying ``|chi_par|``.
With a field at unit polarisation ``B_1`` (``B = B_r B_1``),

    F(g) = (|chi_perp| (Iz(g) - Iz(g + t)) + |chi_par| (Ixy(g) - Ixy(g + t))) B_r^2 / (2 mu0)

where ``Iz(h) = integral_footprint B_z^2 dA`` and ``Ixy(h) = integral_footprint (B_x^2 +
B_y^2) dA`` at height ``h`` (:func:`plate_surface_integrals`). The same split holds for
forces and torques at any pose (:func:`generalized_forces_split`) and for the stiffness
matrix (:func:`stiffness_split`): computed once with the unit-polarisation field at a
given gap and centre-of-mass height, ``K = B_r^2 (|chi_perp| K[0] + |chi_par| K[1])``.
Only the equilibrium gap, which depends on the weight, has to be found per material.

**Quadrature.** Tensor Gauss-Legendre panels whose boundaries fall on the magnets' edge
lines (``x`` and ``y`` of every magnet edge), geometrically graded towards those lines
with a first panel as wide as the height of the surface above the magnets: the field of a
magnet edge varies on the scale of the distance to the edge, so the rule converges fast
and stays accurate as ``g -> 0``. Discs use ``x = x0 + R sin(phi)`` across the footprint
so the chord length is smooth. All heights and all nodes go to the field in one call
(chunked when large).

**Rigid-body stability.** Poses are parametrised by the displacement ``d`` of the combined
centre of mass ``C`` of plate and payload and a rotation vector about ``C``. Gravity then
contributes ``M g d_z`` only, linear, so the stiffness matrix ``K = -dQ/dq`` (generalised
forces ``Q = (F, tau_C)``) is the Hessian of the magnetic energy alone; it is computed by
central differences of ``Q``. The payload's height enters through ``C``: relative to the
plate's own centre the tilt stiffness gains ``-h M g`` (the familiar destabilising term of
a high centre of mass) and couplings with lateral motion. The plate is laterally stable
when ``k_x, k_y, k_pitch, k_roll > 0`` and the coupled 2x2 matrices in ``(x, pitch)`` and
``(y, roll)`` are positive definite (Earnshaw's theorem forbids this for a paramagnet or a
permanent magnet alone; Braunbek showed that diamagnets escape it [3]_).

Conventions: stiffness ``k = -dF/dq`` (positive restores); pitch is rotation about the
``y`` axis (couples with ``x``), roll about the ``x`` axis (couples with ``y``), yaw about
``z``. SI units throughout: metres, tesla, newtons, joules.

Layout
------
This module is the public face; the code sits in one module per topic:
:mod:`~matdb.physics.plate_geometry` (plate, edge lines, quadrature rules over its faces
and volume), :mod:`~matdb.physics.plate_lift` (lift integrals, lift force, equilibrium
gap, ``k_z``, :func:`analyse_plate`), :mod:`~matdb.physics.plate_stiffness` (forces and
torques at any pose, stiffness matrix, stability verdict) and
:mod:`~matdb.physics.plate_intervals` (lateral equilibrium, stable side intervals).
Gauss-Legendre rules are in :mod:`~matdb.physics.quadrature`.

References
----------
.. [1] M. V. Berry and A. K. Geim, "Of flying frogs and levitrons", Eur. J. Phys. 18,
   307-313 (1997).
.. [2] M. D. Simon and A. K. Geim, "Diamagnetic levitation: flying frogs and floating
   magnets", J. Appl. Phys. 87, 6200-6204 (2000).
.. [3] W. Braunbek, "Freischwebende Koerper im elektrischen und magnetischen Feld",
   Z. Phys. 112, 753-763 (1939).
.. [4] J. D. Jackson, Classical Electrodynamics, 3rd ed., Wiley (1999), sec. 5.16 (energy
   of a linear magnetisable body in an applied field; section number from memory).
"""

from matdb.physics.plate_geometry import (CHUNK, DEFAULT_ORDER, MIN_GAP, FieldFn,  # noqa: F401
                                          PlateGeometry, edge_lines, eval_field, field_mirrors,
                                          field_swaps, footprint_rule, mirrored_rules,
                                          side_rule, surface_images, surface_rule, swapped_rules,
                                          volume_rule, z_rule)
from matdb.physics.plate_intervals import (SETTLE_TOL, EquilibriumStability,  # noqa: F401
                                           LateralEquilibrium, interval_holding,
                                           is_stable_floating, lateral_equilibrium,
                                           lateral_force, stability_at_equilibrium,
                                           stable_side_intervals, stable_side_max)
from matdb.physics.plate_lift import (PlaneMemo, PlateResult, lift_force_fn, analyse_plate,  # noqa: F401
                                      equilibrium_gap, highest_stable_root, lift_curve_range,
                                      lift_force, lift_from_integrals, max_lift_above,
                                      plane_integrals, plate_surface_integrals,
                                      vertical_stiffness)
from matdb.physics.plate_stiffness import (DOF, Stability, combine,  # noqa: F401
                                           combined_com_height, generalized_forces_split,
                                           stability, stiffness_split, stored_energy_split)
from matdb.physics.quadrature import GRADING_RATIO, gauss_panels, graded_breaks  # noqa: F401
