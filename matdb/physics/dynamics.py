"""Dynamics of a floating plate: rigid-body modes, eddy-current and air damping, Q, noise.

Physics
-------
**Modes.** Small motions about the equilibrium obey ``M q'' + C q' + K q = 0`` with
``q = (x, y, z, roll, pitch, yaw)``: displacement of a reference point ``C`` (the combined
centre of mass used for the stiffness matrix of :mod:`matdb.physics.plate`) and rotation
about the x, y and z axes through it. ``M`` is the rigid-body mass matrix of plate plus
payload about ``C`` (:func:`rigid_mass_matrix`), ``K`` the magnetic stiffness matrix. The
undamped modes solve the generalised eigenproblem ``K v = omega^2 M v`` [1]_; a negative
eigenvalue is an unstable mode. Damping is taken per mode from the undamped mode shapes
(``zeta = v^T C v / (2 omega v^T M v)``, exact for proportional damping, the usual
light-damping approximation otherwise [1]_), ``Q = 1 / (2 zeta)``, and the amplitude decays
as ``exp(-t / tau)`` with ``tau = 2 Q / omega``.

**Eddy currents (quasi-static, thin anisotropic plate).** A conductor moving with
velocity ``v`` through the static field ``B`` carries ``J = sigma (v x B - grad phi)``
with ``div J = 0`` and ``J . n = 0`` on its edges [2]_. Pyrolytic graphite conducts about a
thousand times better in its basal plane (``sigma_ab``) than across it (``sigma_c``), and
the plate is thin, so the across-plane current is blocked by the top and bottom faces and
each layer at height ``z`` carries its own in-plane current: in every layer

    div_xy [ sigma_ab (E_xy - grad_xy phi) ] = 0,   (E_xy - grad_xy phi) . n = 0 on edges,

with ``E = v x B``. This Neumann problem is solved on the plate outline (slots and holes
included, the mesh follows them) with P1 finite elements (scikit-fem [3]_, mesh from
Triangle [4]_); the dissipated power ``P = sum_layers w_l integral sigma |E - grad phi|^2
dA`` over Gauss-Legendre layers through the thickness gives the 6 x 6 damping matrix for
rigid velocities ``q'`` (``P = q'^T C q'``). Quasi-static means the induced field is
small against the applied one: the magnetic Reynolds number of the sheet ``mu0 sigma
omega t L`` must be small (checked by :func:`eddy_validity`). ``sigma_c`` enters only
through this thin-plate condition: with ``sigma_c`` comparable to ``sigma_ab`` the
layers are not independent and the result is an estimate.

**Air.** *Squeeze film* under the plate for vertical and tilting motion: the linearised
incompressible Reynolds equation ``div (h^3 / (12 mu) grad p) = dh/dt`` with ``p = 0`` on
the outline and on slot and hole edges (they vent), solved on the same mesh; valid for a
squeeze number ``12 mu omega L^2 / (p_a h^2) << 1`` [5]_, [6]_ (checked). *Couette*
shear in the gap for sliding and yaw, ``c = mu A / h`` and ``mu J_p / h``, valid while
the gap is thinner than the viscous penetration depth ``sqrt(2 mu / (rho omega))`` [7]_,
plus the Stokes layer on the top face ``c = A sqrt(rho mu omega / 2)`` [8]_. Rarefied gas
uses effective viscosities with the Knudsen number ``Kn = lambda / h``: squeeze film
``mu / (1 + 9.638 Kn^1.159)`` [9]_ and Couette flow ``mu / (1 + 2 Kn + 0.2 Kn^0.788
exp(-Kn / 10))`` [10]_, both fitted for ``0 <= Kn <= 880``; beyond that (high vacuum) the
formulas are extrapolated and the air damping is reported as an estimate (it is then
far below eddy damping of any conductor).

**Thermal noise.** The Brownian force on a mode of mass ``m``, frequency ``omega_0`` and
quality factor ``Q`` has the one-sided density ``4 k_B T m omega_0 / Q``; as an
acceleration ``a_n = sqrt(4 k_B T omega_0 / (m Q))`` [m/s^2/sqrt(Hz)] [11]_.

SI units throughout: metres, kilograms, seconds, tesla, siemens per metre, pascals.

References
----------
.. [1] L. Meirovitch, Fundamentals of Vibrations, McGraw-Hill (2001), ch. 7 (generalised
   eigenproblem, modal damping).
.. [2] W. R. Smythe, Static and Dynamic Electricity, 3rd ed., McGraw-Hill (1968), ch. 11
   (eddy currents in moving conductors); J. D. Jackson, Classical Electrodynamics, 3rd ed.
   (1999), sec. 5.18 (quasi-static limit).
.. [3] T. Gustafsson and G. D. McBain, "scikit-fem: A Python package for finite element
   assembly", J. Open Source Softw. 5(52), 2369 (2020).
.. [4] J. R. Shewchuk, "Triangle: Engineering a 2D quality mesh generator and Delaunay
   triangulator", Lect. Notes Comput. Sci. 1148, 203-222 (1996).
.. [5] J. J. Blech, "On isothermal squeeze films", J. Lubrication Technol. 105, 615-620
   (1983).
.. [6] M. Bao and H. Yang, "Squeeze film air damping in MEMS", Sens. Actuators A 136, 3-27
   (2007).
.. [7] F. M. White, Viscous Fluid Flow, 3rd ed., McGraw-Hill (2006), sec. 3-2 (Couette
   flow) and 3-5 (Stokes' oscillating plate).
.. [8] G. G. Stokes, "On the effect of the internal friction of fluids on the motion of
   pendulums", Trans. Camb. Phil. Soc. 9, 8 (1851).
.. [9] T. Veijola, H. Kuisma, J. Lahdenperae and T. Ryhaenen, "Equivalent-circuit model of
   the squeezed gas film in a silicon accelerometer", Sens. Actuators A 48, 239-248 (1995).
.. [10] T. Veijola and M. Turowski, "Compact damping models for laterally moving
   microstructures with gas-rarefaction effects", J. Microelectromech. Syst. 10, 263-273
   (2001).
.. [11] T. B. Gabrielson, "Mechanical-thermal noise in micromachined acoustic and
   vibration sensors", IEEE Trans. Electron Devices 40, 903-909 (1993).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from dataclasses import field as dc_field
from typing import Callable, Sequence

import numpy as np
from scipy import constants, linalg
from scipy.sparse.linalg import splu

from matdb.errors import InputError, PhysicsError
from matdb.constants import MU0, T_REF_K

FieldFn = Callable[[np.ndarray], np.ndarray]

K_B = constants.k  # Boltzmann constant [J/K] (CODATA, scipy.constants)
P_ATM = 101325.0  # [Pa]
MU_AIR_20C = 1.81e-5  # dynamic viscosity of air at 20 C [Pa s] (CRC Handbook; from memory, verify)
LAMBDA_AIR_1ATM = 68e-9  # mean free path of air at 1 atm, 20 C [m] (Veijola 1995 use ~69 nm; from memory, verify)
M_AIR = 28.96e-3  # molar mass of dry air [kg/mol]
KN_FIT_MAX = 880.0  # upper end of the Knudsen range of the effective-viscosity fits
DOF = ("x", "y", "z", "roll", "pitch", "yaw")
DOF_WORDS = {
    "x": "sliding along x", "y": "sliding along y", "z": "vertical",
    "roll": "roll (tilt about x)", "pitch": "pitch (tilt about y)",
    "yaw": "yaw (turning about z)",
}
DOF_SHORT = {"x": "sliding along x", "y": "sliding along y", "z": "vertical",
             "roll": "roll", "pitch": "pitch", "yaw": "yaw"}


# ---------------------------------------------------------------------------
# outline and mesh
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Slots:
    """Straight through-slots, evenly spaced across the plate.

    ``count`` slots of ``width`` and ``length`` [m], their long side along ``direction``
    ("x" or "y"), at equal pitch across the other side (``count`` slots make
    ``count + 1`` equal strips). ``start``: "centre" (centred on the plate), "edge" (all
    open at the low edge) or "alternate" (open at alternate edges, a meander).
    """

    count: int
    width: float
    length: float
    direction: str = "x"
    start: str = "centre"

    def __post_init__(self):
        if self.count < 0:
            raise InputError("plate.slots.count: expected zero or a positive whole number")
        if not (self.width > 0 and self.length > 0):
            raise InputError("plate.slots: expected a positive width and length")
        if self.direction not in ("x", "y"):
            raise InputError(f"plate.slots.direction: expected 'x' or 'y', got {self.direction!r}")
        if self.start not in ("centre", "edge", "alternate"):
            raise InputError("plate.slots.start: expected 'centre', 'edge' or 'alternate', "
                             f"got {self.start!r}")


@dataclass(frozen=True)
class Hole:
    """A round hole through the plate: centre relative to the plate centre and diameter [m]."""

    x: float
    y: float
    diameter: float


def slot_rectangles(shape: str, lx: float, ly: float, cx: float, cy: float, slots: Slots
                    ) -> list[tuple[float, float, float, float]]:
    """Slot rectangles ``(xmin, ymin, xmax, ymax)`` [m] of :class:`Slots` on a plate.

    References
    ----------
    .. [1] P. Romagnoli, R. Lecamwasam, S. Tian, J. E. Downes and J. Twamley, "Controlling
       the motional quality factor of a diamagnetically levitated graphite plate", Appl.
       Phys. Lett. 122, 094102 (2023) (through-slots that cut the eddy-current loops).
    """
    out = []
    along, across = (lx, ly) if slots.direction == "x" else (ly, lx)
    c_along, c_across = (cx, cy) if slots.direction == "x" else (cy, cx)
    eps = 1e-3 * along  # open slots reach a little past the edge so the cut is clean
    for i in range(slots.count):
        pos = c_across - across / 2 + (i + 1) * across / (slots.count + 1)
        if slots.start == "centre":
            a0, a1 = c_along - slots.length / 2, c_along + slots.length / 2
        else:
            low = slots.start == "edge" or i % 2 == 0
            if low:
                a0, a1 = c_along - along / 2 - eps, c_along - along / 2 + slots.length
            else:
                a0, a1 = c_along + along / 2 - slots.length, c_along + along / 2 + eps
        b0, b1 = pos - slots.width / 2, pos + slots.width / 2
        out.append((a0, b0, a1, b1) if slots.direction == "x" else (b0, a0, b1, a1))
    return out


def plate_outline(shape: str, lx: float, ly: float, cx: float = 0.0, cy: float = 0.0,
                  slots: Slots | None = None, holes: Sequence[Hole] = (), n_arc: int = 96):
    """The plate's footprint as a shapely geometry, slots and holes cut out.

    Returns
    -------
    shapely Polygon or MultiPolygon (several pieces when slots cut through) [m].

    References
    ----------
    .. [1] S. Gillies et al., Shapely: manipulation and analysis of geometric objects
       (general-purpose planar geometry library built on GEOS).
    """
    from shapely.geometry import Point, box
    from shapely.ops import unary_union

    if shape == "disc":
        base = Point(cx, cy).buffer(lx / 2, quad_segs=max(8, n_arc // 4))
    else:
        base = box(cx - lx / 2, cy - ly / 2, cx + lx / 2, cy + ly / 2)
    cuts = []
    if slots is not None and slots.count > 0:
        cuts += [box(*r) for r in slot_rectangles(shape, lx, ly, cx, cy, slots)]
    for h in holes:
        cuts.append(Point(cx + h.x, cy + h.y).buffer(h.diameter / 2, quad_segs=max(6, n_arc // 8)))
    geom = base.difference(unary_union(cuts)) if cuts else base
    if geom.is_empty:
        raise InputError("plate.slots: slots and holes remove the whole plate")
    return geom


def outline_pieces(geom) -> list:
    """Polygons of a shapely geometry (one for a Polygon)."""
    return list(geom.geoms) if geom.geom_type == "MultiPolygon" else [geom]


@dataclass(frozen=True)
class PlateMesh:
    """A triangle mesh of the plate footprint: ``p`` (2, N) [m], ``t`` (3, M)."""

    p: np.ndarray
    t: np.ndarray
    pieces: int

    @property
    def area(self) -> float:
        a = _tri_areas(self.p, self.t)
        return float(a.sum())


def _tri_areas(p: np.ndarray, t: np.ndarray) -> np.ndarray:
    a, b, c = p[:, t[0]], p[:, t[1]], p[:, t[2]]
    return 0.5 * np.abs((b[0] - a[0]) * (c[1] - a[1]) - (c[0] - a[0]) * (b[1] - a[1]))


def mesh_outline(geom, h: float) -> PlateMesh:
    """Quality triangle mesh of a shapely (Multi)Polygon with edge length about ``h`` [m].

    Uses Triangle (constrained conforming Delaunay, minimum angle 30 degrees, maximum
    area ``sqrt(3)/4 h^2``) through the ``triangle`` package; slot and hole edges are
    segments of the planar straight-line graph, so the mesh follows them.

    References
    ----------
    .. [1] J. R. Shewchuk, "Triangle: Engineering a 2D quality mesh generator and Delaunay
       triangulator", LNCS 1148, 203-222 (1996).
    """
    import triangle

    verts, segs, holes = [], [], []
    n0 = 0
    pieces = outline_pieces(geom)
    for poly in pieces:
        rings = [poly.exterior] + list(poly.interiors)
        for k, ring in enumerate(rings):
            xy = np.asarray(ring.coords)[:-1]
            n = xy.shape[0]
            verts.append(xy)
            idx = np.arange(n)
            segs.append(np.column_stack([n0 + idx, n0 + (idx + 1) % n]))
            n0 += n
            if k > 0:
                from shapely.geometry import Polygon

                rp = Polygon(ring).representative_point()
                holes.append([rp.x, rp.y])
    pslg = {"vertices": np.concatenate(verts), "segments": np.concatenate(segs)}
    if holes:
        pslg["holes"] = np.asarray(holes)
    area = math.sqrt(3.0) / 4.0 * h * h
    res = triangle.triangulate(pslg, f"pq30a{area:.15f}Q")  # Triangle reads no exponent
    if "triangles" not in res or len(res["triangles"]) == 0:
        raise PhysicsError("plate outline: the mesher returned no triangles")
    return PlateMesh(np.asarray(res["vertices"], float).T.copy(),
                     np.asarray(res["triangles"], np.int64).T.copy(), len(pieces))


def area_moments(mesh: PlateMesh) -> tuple[float, np.ndarray, np.ndarray]:
    """Area, centroid (2,) and second moments ``[[Ixx, Ixy], [Ixy, Iyy]]`` about the
    centroid (``Ixx = integral (x - xc)^2 dA``) of the meshed outline [m^2, m, m^4].

    Exact for the polygonal mesh (three-point edge-midpoint rule, exact for quadratics).

    References
    ----------
    .. [1] G. Strang and G. Fix, An Analysis of the Finite Element Method, Prentice-Hall
       (1973), ch. 4 (quadrature on triangles).
    """
    p, t = mesh.p, mesh.t
    a = _tri_areas(p, t)
    A = float(a.sum())
    mids = [(p[:, t[i]] + p[:, t[j]]) / 2 for i, j in ((0, 1), (1, 2), (2, 0))]
    c = sum((m * a).sum(axis=1) for m in mids) / (3 * A)
    s = np.zeros((2, 2))
    for m in mids:
        d = m - c[:, None]
        s += np.einsum("ie,je,e->ij", d, d, a) / 3
    return A, c, s


# ---------------------------------------------------------------------------
# mass matrix
# ---------------------------------------------------------------------------
def _skew(c: np.ndarray) -> np.ndarray:
    return np.array([[0.0, -c[2], c[1]], [c[2], 0.0, -c[0]], [-c[1], c[0], 0.0]])


def rigid_mass_matrix(masses, centres, inertias, pivot) -> np.ndarray:
    """6 x 6 mass matrix of rigid parts for ``q = (d, theta)`` about ``pivot``.

    Parameters
    ----------
    masses : sequence of float
        [kg]
    centres : sequence of (3,) arrays
        Each part's centre of mass [m].
    inertias : sequence of (3, 3) arrays
        Each part's inertia tensor about its own centre of mass [kg m^2].
    pivot : (3,) array
        Reference point ``C`` [m].

    Returns
    -------
    ndarray (6, 6)
        ``[[m 1, m [c]x^T], [m [c]x, J_C]]`` with ``c`` the combined centre of mass
        relative to ``C`` and ``J_C`` the inertia about ``C`` (parallel-axis theorem).

    References
    ----------
    .. [1] H. Goldstein, C. Poole and J. Safko, Classical Mechanics, 3rd ed. (2002), sec.
       5.3 (inertia tensor, parallel-axis theorem) and ch. 6 (small oscillations).
    """
    pivot = np.asarray(pivot, float)
    m_tot = float(sum(masses))
    first = np.zeros(3)
    j = np.zeros((3, 3))
    for m, c, i in zip(masses, centres, inertias):
        d = np.asarray(c, float) - pivot
        first += m * d
        j += np.asarray(i, float) + m * (d @ d * np.eye(3) - np.outer(d, d))
    out = np.zeros((6, 6))
    out[:3, :3] = m_tot * np.eye(3)
    s = _skew(first)
    out[3:, :3] = s
    out[:3, 3:] = s.T
    out[3:, 3:] = j
    return out


def plate_inertia(mass: float, second_moments: np.ndarray, area: float, thickness: float
                  ) -> np.ndarray:
    """Inertia tensor of a flat plate about its centre of mass [kg m^2].

    ``second_moments`` are the footprint's ``[[Sxx, Sxy], [Sxy, Syy]]`` about the
    centroid [m^4] (:func:`area_moments`).

    References
    ----------
    .. [1] H. Goldstein et al., Classical Mechanics, 3rd ed. (2002), sec. 5.3.
    """
    rho_a = mass / area  # [kg/m^2]
    sxx, syy, sxy = second_moments[0, 0], second_moments[1, 1], second_moments[0, 1]
    tz = mass * thickness ** 2 / 12.0
    return np.array([[rho_a * syy + tz, -rho_a * sxy, 0.0],
                     [-rho_a * sxy, rho_a * sxx + tz, 0.0],
                     [0.0, 0.0, rho_a * (sxx + syy)]])


def block_inertia(mass: float, sx: float, sy: float, sz: float) -> np.ndarray:
    """Inertia of a uniform block about its centre [kg m^2] (zero size: a point mass).

    References
    ----------
    .. [1] H. Goldstein et al., Classical Mechanics, 3rd ed. (2002), sec. 5.3.
    """
    return mass / 12.0 * np.diag([sy * sy + sz * sz, sx * sx + sz * sz, sx * sx + sy * sy])


# ---------------------------------------------------------------------------
# eddy currents
# ---------------------------------------------------------------------------
@dataclass
class _FemPlate:
    """P1 basis on a mesh and what every solve reuses."""

    mesh: PlateMesh
    basis: object
    xq: np.ndarray  # (2, ne, nq) quadrature points [m]
    dx: np.ndarray  # (ne, nq) weights [m^2]
    grads: np.ndarray  # (3, 2, ne, nq) gradients of the local shape functions [1/m]
    dofs: np.ndarray  # (3, ne)
    lu: object = None  # factorised Neumann stiffness (regularised)
    bnd: np.ndarray | None = None
    lu_dir: object = None  # factorised Dirichlet stiffness (interior nodes)
    interior: np.ndarray | None = None
    extra: dict = dc_field(default_factory=dict)


def fem_plate(mesh: PlateMesh, intorder: int = 2) -> _FemPlate:
    """Set up P1 finite elements (scikit-fem) on a plate mesh.

    ``intorder=2`` (three points per triangle) integrates the load ``E . grad psi`` of P1
    elements to the order of the method; a higher order changed no Q of the demo designs
    in the fourth digit.

    References
    ----------
    .. [1] T. Gustafsson and G. D. McBain, J. Open Source Softw. 5, 2369 (2020).
    """
    from skfem import Basis, BilinearForm, ElementTriP1, MeshTri, asm
    from skfem.helpers import dot, grad

    m = MeshTri(mesh.p, mesh.t)
    basis = Basis(m, ElementTriP1(), intorder=intorder)
    xq = np.asarray(basis.global_coordinates())
    dx = np.asarray(basis.dx)
    grads = np.stack([np.asarray(basis.basis[i][0].grad) for i in range(3)])
    dofs = np.asarray(basis.element_dofs)

    @BilinearForm
    def lap(u, v, w):
        return dot(grad(u), grad(v))

    @BilinearForm
    def mass(u, v, w):
        return u * v

    a = asm(lap, basis).tocsc()
    mm = asm(mass, basis).tocsc()
    # pure Neumann in every piece: a tiny mass term removes the constant null space of
    # each connected piece without changing any gradient beyond round-off
    scale = a.diagonal().mean() / mm.diagonal().mean()
    lu = splu((a + 1e-10 * scale * mm).tocsc())
    bnd = np.asarray(m.boundary_nodes())
    interior = np.setdiff1d(np.arange(m.p.shape[1]), bnd)
    lu_dir = splu(a[interior][:, interior].tocsc()) if interior.size else None
    return _FemPlate(mesh, basis, xq, dx, grads, dofs, lu, bnd, lu_dir, interior)


def _scatter(fp: _FemPlate, local: np.ndarray) -> np.ndarray:
    """Assemble element vectors ``local`` (K, 3, ne) into global vectors (K, N)."""
    n = fp.mesh.p.shape[1]
    out = np.empty((local.shape[0], n))
    idx = fp.dofs.ravel()
    for k in range(local.shape[0]):
        out[k] = np.bincount(idx, weights=local[k].ravel(), minlength=n)
    return out


def rigid_velocities(points: np.ndarray, pivot) -> np.ndarray:
    """Velocity fields of the six unit rigid motions at ``points`` (..., 3).

    Returns (6, ..., 3): translation along x, y, z, then rotation about the x, y, z axes
    through ``pivot`` (``v = e_k x (r - C)``).

    References
    ----------
    .. [1] H. Goldstein et al., Classical Mechanics, 3rd ed. (2002), sec. 4.8 (rigid-body
       velocity field).
    """
    r = points - np.asarray(pivot, float)
    out = np.zeros((6,) + points.shape)
    for k in range(3):
        out[k, ..., k] = 1.0
        e = np.zeros(3)
        e[k] = 1.0
        out[3 + k] = np.cross(e, r)
    return out


def layer_rule(z_lo: float, z_hi: float, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss-Legendre heights and weights through the thickness [m].

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, Methods of Numerical Integration, 2nd ed.,
       Academic Press (1984), ch. 2.
    """
    x, w = np.polynomial.legendre.leggauss(n)
    half = 0.5 * (z_hi - z_lo)
    return 0.5 * (z_lo + z_hi) + half * x, half * w


def motional_fields(field: FieldFn, xq: np.ndarray, heights: np.ndarray, pivot
                    ) -> np.ndarray:
    """In-plane part of ``v x B`` for the six unit rigid motions at every quadrature
    point and layer.

    Returns
    -------
    ndarray (6, n_layers, 2, ne, nq) [V/m per unit velocity]

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.15 (motional
       EMF, ``E' = v x B``).
    """
    nl = heights.size
    ne, nq = xq.shape[1:]
    pts = np.empty((nl, ne, nq, 3))
    pts[..., 0] = xq[0][None]
    pts[..., 1] = xq[1][None]
    pts[..., 2] = heights[:, None, None]
    b = np.asarray(field(pts.reshape(-1, 3)), float).reshape(nl, ne, nq, 3)
    v = rigid_velocities(pts, pivot)  # (6, nl, ne, nq, 3)
    e = np.cross(v, b[None])  # (6, nl, ne, nq, 3)
    return np.moveaxis(e[..., :2], -1, 2)  # (6, nl, 2, ne, nq)


def eddy_damping_matrix(fp: _FemPlate, emf: np.ndarray, layer_weights: np.ndarray,
                        sigma: float) -> np.ndarray:
    """6 x 6 eddy-current damping matrix of a thin plate [N s/m, N s, N m s].

    Parameters
    ----------
    fp : from :func:`fem_plate`
    emf : ndarray (6, n_layers, 2, ne, nq)
        In-plane ``v x B`` of the unit rigid motions (:func:`motional_fields`).
    layer_weights : ndarray (n_layers,)
        Thickness weights [m].
    sigma : float
        In-plane conductivity [S/m].

    Notes
    -----
    Per layer, ``phi_k`` solves ``integral grad phi_k . grad psi = integral E_k . grad psi``
    for all ``psi`` (the weak form of ``div (E_k - grad phi_k) = 0`` with no current
    through any edge), and ``C_ij = sigma sum_l w_l integral (E_i - grad phi_i) . (E_j -
    grad phi_j) dA``.

    References
    ----------
    .. [1] W. R. Smythe, Static and Dynamic Electricity, 3rd ed. (1968), ch. 11.
    .. [2] T. Gustafsson and G. D. McBain, J. Open Source Softw. 5, 2369 (2020).
    """
    n6, nl = emf.shape[:2]
    e = emf.reshape(n6 * nl, 2, *emf.shape[3:])  # (K, 2, ne, nq)
    local = np.einsum("kdeq,ideq,eq->kie", e, fp.grads, fp.dx)
    rhs = _scatter(fp, local)  # (K, N)
    phi = fp.lu.solve(rhs.T)  # (N, K)
    phi_e = phi[fp.dofs]  # (3, ne, K)
    gphi = np.einsum("iek,ideq->kdeq", phi_e, fp.grads)
    j = (e - gphi).reshape(n6, nl, 2, *emf.shape[3:])
    c = np.einsum("ildeq,jldeq,eq,l->ij", j, j, fp.dx, layer_weights)
    c = sigma * 0.5 * (c + c.T)
    return c


def eddy_upper_bound(emf: np.ndarray, dx: np.ndarray, layer_weights: np.ndarray,
                     sigma: float) -> np.ndarray:
    """Screening damping matrix ``sigma integral E_i . E_j dV``: the eddy damping without
    the charges that build up at the edges (no finite-element solve). An upper bound
    of the true damping for every motion (the solve only subtracts a positive term).

    References
    ----------
    .. [1] W. R. Smythe, Static and Dynamic Electricity, 3rd ed. (1968), ch. 11.
    """
    c = np.einsum("ildeq,jldeq,eq,l->ij", emf, emf, dx, layer_weights)
    return sigma * 0.5 * (c + c.T)


def eddy_validity(sigma: float, omega: float, thickness: float, size: float) -> dict:
    """Quasi-static check: skin depth and the sheet's magnetic Reynolds number.

    ``delta = sqrt(2 / (mu0 sigma omega))``; the induced field is negligible when
    ``R = mu0 sigma omega t L << 1`` (``t`` thickness, ``L`` lateral size).

    Returns
    -------
    dict with ``skin_depth_m``, ``reynolds`` and ``ok`` (R < 0.1).

    References
    ----------
    .. [1] J. D. Jackson, Classical Electrodynamics, 3rd ed. (1999), sec. 5.18 (skin
       depth, quasi-static limit).
    """
    if sigma <= 0 or omega <= 0:
        return {"skin_depth_m": None, "reynolds": 0.0, "ok": True}
    delta = math.sqrt(2.0 / (MU0 * sigma * omega))
    r = MU0 * sigma * omega * thickness * size
    return {"skin_depth_m": delta, "reynolds": r, "ok": r < 0.1}


# ---------------------------------------------------------------------------
# air
# ---------------------------------------------------------------------------
def mean_free_path(pressure_pa, temperature_k: float = T_REF_K):
    """Mean free path of air [m], ``lambda = lambda_0 (p_0 / p) (T / T_0)``.

    References
    ----------
    .. [1] T. Veijola et al., Sens. Actuators A 48, 239 (1995) (lambda about 69 nm at
       1 atm; 68 nm used here; from memory, verify).
    """
    return LAMBDA_AIR_1ATM * (P_ATM / np.asarray(pressure_pa, float)) * (temperature_k / T_REF_K)


def mu_eff_squeeze(mu: float, knudsen):
    """Effective viscosity of a rarefied squeeze film, ``mu / (1 + 9.638 Kn^1.159)``.

    Fitted for ``0 <= Kn <= 880``.

    References
    ----------
    .. [1] T. Veijola, H. Kuisma, J. Lahdenperae and T. Ryhaenen, Sens. Actuators A 48,
       239-248 (1995).
    """
    kn = np.asarray(knudsen, float)
    return mu / (1.0 + 9.638 * kn ** 1.159)


def mu_eff_couette(mu: float, knudsen):
    """Effective viscosity for Couette flow in a rarefied gap,
    ``mu / (1 + 2 Kn + 0.2 Kn^0.788 exp(-Kn / 10))``.

    Fitted for ``0 <= Kn <= 880``.

    References
    ----------
    .. [1] T. Veijola and M. Turowski, J. Microelectromech. Syst. 10, 263-273 (2001).
    """
    kn = np.asarray(knudsen, float)
    return mu / (1.0 + 2.0 * kn + 0.2 * kn ** 0.788 * np.exp(-kn / 10.0))


def air_density(pressure_pa: float, temperature_k: float = T_REF_K) -> float:
    """Ideal-gas density of air ``p M / (R T)`` [kg/m^3]."""
    return pressure_pa * M_AIR / (constants.R * temperature_k)


def squeeze_film_matrix(fp: _FemPlate, gap: float, mu: float, pivot) -> np.ndarray:
    """3 x 3 squeeze-film damping of ``(z, roll, pitch)`` [N s/m, N s, N m s].

    Linearised incompressible Reynolds equation ``div (h^3 / (12 mu) grad p) = dh/dt``
    with ``p = 0`` on every edge of the outline (outer edge, slots, holes), ``dh/dt =
    z' + roll' (y - y_C) - pitch' (x - x_C)``; ``C_ij = integral (h^3 / 12 mu) grad p_i .
    grad p_j dA``.

    References
    ----------
    .. [1] J. J. Blech, J. Lubrication Technol. 105, 615-620 (1983).
    .. [2] M. Bao and H. Yang, Sens. Actuators A 136, 3-27 (2007).
    """
    if fp.lu_dir is None:
        return np.zeros((3, 3))
    x = fp.xq[0] - pivot[0]
    y = fp.xq[1] - pivot[1]
    s = np.stack([np.ones_like(x), y, -x])  # dh/dt of unit (z, roll, pitch) [m/s per unit]
    phi = np.stack([np.asarray(fp.basis.basis[i][0]) for i in range(3)])  # (3, ne, nq)
    local = np.einsum("keq,ieq,eq->kie", s, phi, fp.dx)
    rhs = _scatter(fp, local)[:, fp.interior]  # (3, Ni)
    k = gap ** 3 / (12.0 * mu)
    p = fp.lu_dir.solve(rhs.T) / k  # (Ni, 3)
    c = rhs @ p  # integral s_i p_j dA
    return 0.5 * (c + c.T)


def air_damping_matrix(fp: _FemPlate, area: float, polar: float, gap: float,
                       pressure_pa: float, omega: float, pivot, temperature_k: float = T_REF_K,
                       squeeze_unit: np.ndarray | None = None) -> tuple[np.ndarray, dict]:
    """6 x 6 air damping: squeeze film (z, roll, pitch), Couette shear in the gap and
    Stokes drag on the top face (x, y, yaw), at pressure ``pressure_pa`` and angular
    frequency ``omega``.

    Parameters
    ----------
    area, polar : float
        Footprint area [m^2] and polar second moment about the pivot's vertical
        [m^4].
    gap : float
        Air gap under the plate [m].
    squeeze_unit : ndarray (3, 3), optional
        :func:`squeeze_film_matrix` at ``mu = 1`` (reused across pressures).

    Returns
    -------
    C : ndarray (6, 6)
    info : dict
        ``knudsen``, ``mu_squeeze``, ``mu_couette``, ``squeeze_number``,
        ``penetration_depth_m``, ``in_fit_range``.

    References
    ----------
    .. [1] J. J. Blech (1983); [2] T. Veijola et al. (1995); [3] T. Veijola and
       M. Turowski (2001); [4] G. G. Stokes (1851); [5] F. M. White, Viscous Fluid Flow
       (2006), sec. 3-2 and 3-5 -- full citations in the module docstring.
    """
    lam = float(mean_free_path(pressure_pa, temperature_k))
    kn = lam / gap
    mu = MU_AIR_20C
    mu_s = float(mu_eff_squeeze(mu, kn))
    mu_c = float(mu_eff_couette(mu, kn))
    if squeeze_unit is None:
        squeeze_unit = squeeze_film_matrix(fp, gap, 1.0, pivot)
    c = np.zeros((6, 6))
    sq = squeeze_unit * mu_s
    idx = [2, 3, 4]
    c[np.ix_(idx, idx)] = sq
    rho = air_density(pressure_pa, temperature_k)
    c_shear = mu_c * area / gap
    # Stokes layer on the top face (continuum; rarefaction through the Couette effective
    # viscosity at the layer's own Knudsen number)
    delta = math.sqrt(2.0 * mu / (rho * omega)) if rho > 0 and omega > 0 else math.inf
    mu_top = float(mu_eff_couette(mu, lam / delta)) if math.isfinite(delta) else 0.0
    c_top_per_area = math.sqrt(rho * mu_top * omega / 2.0) if omega > 0 else 0.0
    c[0, 0] = c[1, 1] = c_shear + c_top_per_area * area
    c[5, 5] = (mu_c / gap + c_top_per_area) * polar
    size = math.sqrt(area)
    info = {
        "knudsen": kn, "mean_free_path_m": lam, "mu_squeeze_pa_s": mu_s,
        "mu_couette_pa_s": mu_c,
        "squeeze_number": 12.0 * mu_s * omega * size ** 2 / (pressure_pa * gap ** 2),
        "penetration_depth_m": delta if math.isfinite(delta) else None,
        "in_fit_range": kn <= KN_FIT_MAX,
    }
    return c, info


# ---------------------------------------------------------------------------
# modes
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Mode:
    """One rigid-body mode (SI). ``frequency_hz`` is None for an unstable mode."""

    name: str
    dof: str  # dominant coordinate (one of DOF)
    frequency_hz: float | None
    omega: float
    eigenvalue: float
    shape: np.ndarray  # mass-normalised eigenvector (6,)
    participation: dict  # kinetic-energy share per coordinate
    unstable: bool
    neutral: bool


def mode_name(fractions: np.ndarray) -> tuple[str, str]:
    """Plain-words name from the kinetic-energy shares of the six coordinates.

    The largest share names the motion; a second one above 10 % is added ("sliding
    along x with pitch").
    """
    order = np.argsort(fractions)[::-1]
    main = DOF[order[0]]
    name = DOF_WORDS[main]
    if fractions[order[1]] > 0.10:
        name = f"{DOF_SHORT[main]} with {DOF_SHORT[DOF[order[1]]]}"
    return name, main


def _align_degenerate(lam: np.ndarray, vec: np.ndarray, m: np.ndarray, tol: float
                      ) -> np.ndarray:
    """Within each cluster of equal eigenvalues (e.g. x and y sliding of a square plate),
    choose the mass-orthonormal basis closest to the coordinate axes, so each mode is
    named after one motion instead of an arbitrary mixture."""
    vec = vec.copy()
    i = 0
    n = lam.size
    while i < n:
        j = i + 1
        while j < n and abs(lam[j] - lam[i]) <= tol:
            j += 1
        if j - i > 1:
            v = vec[:, i:j]
            proj = v @ v.T @ m  # M-orthogonal projector onto the cluster's span
            norms = np.linalg.norm(proj, axis=0)
            pick = np.sort(np.argsort(norms)[::-1][: j - i])
            w = proj[:, pick]
            g = w.T @ m @ w
            try:
                lc = np.linalg.cholesky(g)
                vec[:, i:j] = w @ np.linalg.inv(lc).T
            except np.linalg.LinAlgError:  # pragma: no cover - keep eigh's basis
                pass
        i = j
    return vec


def rigid_modes(k: np.ndarray, m: np.ndarray, neutral_rel: float = 1e-6) -> list[Mode]:
    """Undamped rigid-body modes of ``K v = omega^2 M v`` (scipy.linalg.eigh).

    Eigenvalues below ``-neutral_rel * max|lambda|`` are unstable modes; those within
    it are neutral (frequency zero, e.g. yaw of a disc over a round magnet).

    References
    ----------
    .. [1] L. Meirovitch, Fundamentals of Vibrations (2001), ch. 7.
    """
    ks = 0.5 * (k + k.T)
    lam, vec = linalg.eigh(ks, m)
    scale = max(np.max(np.abs(lam)), 1e-300)
    vec = _align_degenerate(lam, vec, m, 1e-6 * scale)
    modes = []
    for i in range(lam.size):
        v = vec[:, i]
        ke = v * (m @ v)
        fr = np.abs(ke) / max(np.abs(ke).sum(), 1e-300)
        name, main = mode_name(fr)
        neutral = abs(lam[i]) <= neutral_rel * scale
        unstable = (lam[i] < 0) and not neutral
        omega = math.sqrt(lam[i]) if lam[i] > 0 and not neutral else 0.0
        if unstable:
            name = f"unstable: {name}"
        elif neutral:
            name = f"neutral: {name}"
        modes.append(Mode(name, main, None if unstable else omega / (2 * math.pi), omega,
                          float(lam[i]), v, {d: float(f) for d, f in zip(DOF, fr)},
                          bool(unstable), bool(neutral)))
    return modes


def modal_q(shape: np.ndarray, omega: float, c: np.ndarray) -> float | None:
    """``Q = omega / (v^T C v)`` for a mass-normalised mode shape (None: undamped).

    References
    ----------
    .. [1] L. Meirovitch, Fundamentals of Vibrations (2001), sec. 7.15 (modal damping).
    """
    d = float(shape @ c @ shape)
    if not d > 0 or omega <= 0:
        return None
    return omega / d


def combine_q(*qs: float | None) -> float | None:
    """``1/Q = sum 1/Q_i`` over the damped mechanisms (None: all undamped)."""
    inv = sum(1.0 / q for q in qs if q is not None and q > 0)
    return 1.0 / inv if inv > 0 else None


def thermal_acceleration_noise(temperature_k: float, omega: float, mass: float,
                               q: float | None):
    """Brownian acceleration noise ``sqrt(4 k_B T omega_0 / (m Q))`` [m/s^2/sqrt(Hz)].

    None when the mode is undamped (``Q`` None) or does not oscillate.

    References
    ----------
    .. [1] T. B. Gabrielson, IEEE Trans. Electron Devices 40, 903-909 (1993), Eq. (8)
       (equation number from memory; verify).
    """
    if q is None or omega <= 0 or mass <= 0:
        return None
    return math.sqrt(4.0 * K_B * temperature_k * omega / (mass * q))
