"""Temperature dependence, irreversible-loss (knee) check and safety distance.

Everything here takes and returns SI floats: temperatures in kelvin, fields in A/m,
flux densities in tesla, lengths in metres. Temperature coefficients of permanent
magnets follow the trade convention: ``alpha_pct_per_k`` (remanence) and
``beta_pct_per_k`` (intrinsic coercivity) in percent per kelvin relative to the value
at 20 C (:data:`T_REF_K`). The linear model holds over the usual working range of a
grade; it is not an extrapolation tool.

References
----------
.. [1] IEC 60404-8-1:2015, "Magnetic materials - Part 8-1: Specifications for
   individual materials - Magnetically hard materials" (definitions of the reversible
   temperature coefficients of remanence and coercivity).
.. [2] MMPA Standard No. 0100-00, "Standard Specifications for Permanent Magnet
   Materials", Magnetic Materials Producers Association, 2000.
.. [3] J. D. Jackson, "Classical Electrodynamics", 3rd ed., Wiley, 1999, eq. (5.56)
   (field of a magnetic dipole).
.. [4] J. M. D. Coey, "Magnetism and Magnetic Materials", Cambridge University Press,
   2010, ch. 13 (permanent magnets: hysteresis loops, demagnetising field, squareness).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from matdb.errors import InputError, PhysicsError
from matdb.constants import T_REF_K, kelvin_to_celsius


# ---------------------------------------------------------------------------
# reversible temperature dependence
# ---------------------------------------------------------------------------


def _as_out(x):
    """A Python float for 0-d results, the array otherwise."""
    arr = np.asarray(x, dtype=float)
    return float(arr) if arr.ndim == 0 else arr


def _check_temperature(t_k, field: str = "t_k") -> np.ndarray:
    t = np.asarray(t_k, dtype=float)
    if not np.all(np.isfinite(t)) or np.any(t <= 0):
        raise InputError(f"{field}: expected absolute temperatures above 0 K, got {t_k!r}")
    return t


def _linear_factor(coeff_per_k, t_k, field: str) -> np.ndarray:
    """``1 + c (T - T_ref)`` with ``c`` in 1/K."""
    t = _check_temperature(t_k)
    c = np.asarray(coeff_per_k, dtype=float)
    if not np.all(np.isfinite(c)):
        raise InputError(f"{field}: expected a finite temperature coefficient, got {coeff_per_k!r}")
    return 1.0 + c * (t - T_REF_K)


def br_at(br_20, alpha_pct_per_k, t_k):
    """Remanence at temperature ``t_k`` from the reversible coefficient.

    Parameters
    ----------
    br_20 : float or ndarray
        Remanence at 20 C [T].
    alpha_pct_per_k : float or ndarray
        Reversible temperature coefficient of Br [%/K] (NdFeB about -0.12).
    t_k : float or ndarray
        Temperature [K].

    Returns
    -------
    float or ndarray
        ``Br(T) = Br20 (1 + alpha/100 (T - 293.15))`` [T].

    References
    ----------
    .. [1] IEC 60404-8-1:2015; MMPA 0100-00 (reversible temperature coefficient).
    """
    return _as_out(np.asarray(br_20, dtype=float) * _linear_factor(
        np.asarray(alpha_pct_per_k, dtype=float) / 100.0, t_k, "alpha_pct_per_k"))


def hcj_at(hcj_20, beta_pct_per_k, t_k):
    """Intrinsic coercivity at temperature ``t_k`` from the reversible coefficient.

    Parameters
    ----------
    hcj_20 : float or ndarray
        Intrinsic coercivity at 20 C [A/m].
    beta_pct_per_k : float or ndarray
        Temperature coefficient of Hcj [%/K] (NdFeB about -0.6, hard ferrite about +0.3).
    t_k : float or ndarray
        Temperature [K].

    Returns
    -------
    float or ndarray
        ``Hcj(T) = Hcj20 (1 + beta/100 (T - 293.15))`` [A/m].

    References
    ----------
    .. [1] IEC 60404-8-1:2015; MMPA 0100-00 (temperature coefficient of coercivity).
    """
    return _as_out(np.asarray(hcj_20, dtype=float) * _linear_factor(
        np.asarray(beta_pct_per_k, dtype=float) / 100.0, t_k, "beta_pct_per_k"))


def chi_at(chi_20, temp_coeff_per_k, t_k):
    """Volume susceptibility at temperature ``t_k``.

    Parameters
    ----------
    chi_20 : float or ndarray
        SI volume susceptibility at 20 C [1].
    temp_coeff_per_k : float or None
        Relative change of ``|chi|`` per kelvin [1/K]; ``None`` means no known
        dependence (value returned unchanged).
    t_k : float or ndarray
        Temperature [K].

    Returns
    -------
    float or ndarray
        ``chi(T) = chi20 (1 + c (T - 293.15))`` [1]; the sign of chi is kept.

    References
    ----------
    .. [1] Linear first-order expansion about 20 C, the form in which handbooks quote
       temperature coefficients (e.g. CRC Handbook of Chemistry and Physics,
       "Magnetic susceptibility of the elements and inorganic compounds").
    """
    t = _check_temperature(t_k)
    chi = np.asarray(chi_20, dtype=float)
    if temp_coeff_per_k is None:
        return _as_out(chi * np.ones_like(t))
    return _as_out(chi * _linear_factor(temp_coeff_per_k, t, "temp_coeff_per_k"))


def lift_factor(alpha_pct_per_k, t_k, chi_temp_coeff_per_k=None):
    """Diamagnetic lift at ``t_k`` relative to the lift at 20 C.

    The force on a weakly magnetic body is ``F = chi / (2 mu0) grad(B^2) V``, so it
    scales with the square of the magnets' remanence and linearly with chi.

    Parameters
    ----------
    alpha_pct_per_k : float
        Reversible temperature coefficient of Br [%/K].
    t_k : float or ndarray
        Temperature of magnets and plate [K].
    chi_temp_coeff_per_k : float or None
        Relative change of ``|chi|`` of the plate per kelvin [1/K].

    Returns
    -------
    float or ndarray
        ``(Br(T)/Br20)^2 * chi(T)/chi20`` [1].

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, "Of flying frogs and levitrons", Eur. J. Phys.
       18, 307-313 (1997): energy of a weakly magnetic body -chi V B^2 / (2 mu0);
       Br(T) per IEC 60404-8-1.
    """
    fb = br_at(1.0, alpha_pct_per_k, t_k)
    fc = chi_at(1.0, chi_temp_coeff_per_k, t_k)
    return _as_out(np.asarray(fb) ** 2 * np.asarray(fc))


def lift_derating_pct(alpha_pct_per_k, t_k, chi_temp_coeff_per_k=None):
    """Percent of the 20 C lift lost at ``t_k`` (negative when lift is gained).

    Parameters
    ----------
    alpha_pct_per_k : float
        Reversible temperature coefficient of Br [%/K].
    t_k : float or ndarray
        Temperature [K].
    chi_temp_coeff_per_k : float or None
        Relative change of ``|chi|`` per kelvin [1/K].

    Returns
    -------
    float or ndarray
        ``100 (1 - lift_factor)`` [%].

    References
    ----------
    .. [1] See :func:`lift_factor`.
    """
    return _as_out(100.0 * (1.0 - np.asarray(lift_factor(alpha_pct_per_k, t_k, chi_temp_coeff_per_k))))


# ---------------------------------------------------------------------------
# tolerances
# ---------------------------------------------------------------------------


def worst_case_br(br_t: float, br_min_t: float | None) -> float:
    """The guaranteed minimum remanence when the catalogue gives one, else the typical.

    Parameters
    ----------
    br_t : float
        Typical remanence [T].
    br_min_t : float or None
        Minimum remanence of the grade [T].

    Returns
    -------
    float
        [T].

    References
    ----------
    .. [1] IEC 60404-8-1:2015 (grades are specified by minimum values).
    """
    return float(br_t if br_min_t is None else br_min_t)


def worst_case_abs_chi(chi: float, uncertainty: float | None) -> float:
    """The smallest ``|chi|`` consistent with a quoted uncertainty.

    Parameters
    ----------
    chi : float
        Volume susceptibility [1].
    uncertainty : float or None
        Absolute uncertainty of chi [1]; ``None`` means none quoted.

    Returns
    -------
    float
        ``max(|chi| - uncertainty, 0)`` [1].

    References
    ----------
    .. [1] Common practice, no source: design for the lower end of the stated range.
    """
    a = abs(float(chi))
    if uncertainty is None:
        return a
    return max(a - abs(float(uncertainty)), 0.0)


# ---------------------------------------------------------------------------
# irreversible loss: the knee of the intrinsic loop
# ---------------------------------------------------------------------------

KNEE_FRACTION: dict[str, tuple[float, str]] = {
    "NdFeB": (
        0.90,
        "Sintered NdFeB has a square intrinsic loop: the squareness Hk/Hcj (Hk = reverse "
        "field at which J falls to 0.9 Jr, MMPA 0100-00) is typically 0.9 or above; "
        "from memory of Coey, Magnetism and Magnetic Materials (2010) ch. 13; verify.",
    ),
    "SmCo": (
        0.85,
        "Sintered SmCo5 is very square, Sm2Co17 grades less so (Hk/Hcj often 0.85-0.95); "
        "0.85 covers both; from memory of Campbell, Permanent Magnet Materials and their "
        "Application (1994); verify.",
    ),
    "ferrite": (
        0.80,
        "Anisotropic sintered hard ferrite has a less square intrinsic loop (Hk/Hcj about "
        "0.8-0.9) and its Hcj falls when cold (positive beta), so the knee moves to low "
        "reverse fields at low temperature; from memory of Campbell (1994) and MMPA "
        "0100-00; verify.",
    ),
    "AlNiCo": (
        0.50,
        "AlNiCo's loop is not square and its coercivity is small, so it leaves its "
        "recoil line at low reverse fields; half of Hcj is a conservative choice, not a "
        "measured squareness; from memory of Parker, Advances in Permanent Magnetism "
        "(1990); verify.",
    ),
    "bonded-NdFeB": (
        0.50,
        "Bonded isotropic NdFeB (melt-spun powder) has a rounded intrinsic loop, Hk/Hcj "
        "roughly 0.4-0.6; 0.5 taken; from memory of Coey (2010) ch. 13; verify.",
    ),
}


_FAMILY_WORDS = {
    "NdFeB": "sintered NdFeB",
    "SmCo": "SmCo",
    "ferrite": "hard ferrite",
    "AlNiCo": "AlNiCo",
    "bonded-NdFeB": "bonded NdFeB",
}


@dataclass(frozen=True)
class DemagResult:
    """Outcome of :func:`demag_check`.

    Attributes
    ----------
    risk : bool
        True when some sample point reaches the knee at some temperature.
    worst_ratio : float
        Largest ``H_reverse / H_knee(T)`` over sample points and temperatures [1].
    worst_temp_k : float
        Temperature of the worst ratio [K].
    worst_magnet : int
        0-based index into ``arrangement.magnets`` (messages count from 1).
    worst_point : tuple of float
        The worst sample point [m].
    temps_k : tuple of float
        Temperatures checked [K].
    message : str
        One plain sentence.
    """

    risk: bool
    worst_ratio: float
    worst_temp_k: float
    worst_magnet: int
    worst_point: tuple
    temps_k: tuple
    message: str


_EPS_REL = 1e-9  # pull sample points this far (relative to the size) inside the magnet


def _per_magnet(value, n: int, field: str, *, allow_none: bool = False) -> list:
    """Broadcast a scalar or check a per-magnet sequence."""
    if value is None and allow_none:
        return [None] * n
    if isinstance(value, str) or np.ndim(value) == 0:
        return [value] * n
    seq = list(value)
    if len(seq) != n:
        raise InputError(f"{field}: expected one value or one per magnet ({n}), got {len(seq)}")
    return seq


def _axis_samples(lo: float, hi: float, n: int, delta: float) -> tuple[np.ndarray, np.ndarray]:
    """``n`` samples from ``lo`` to ``hi``, the two ends pulled inside by ``delta``."""
    x = np.linspace(lo, hi, n)
    x[0] += delta
    x[-1] -= delta
    ends = np.zeros(n, dtype=bool)
    ends[[0, -1]] = True
    return x, ends


def _sample_local(shape: str, size, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Sample points in a magnet's own frame (centre at the origin, height along z).

    Every coordinate that lies on a boundary is pulled inside by the same absolute
    distance, ``1e-9`` of the magnet's largest dimension, so a corner sample approaches
    the corner along the cube diagonal whatever the aspect ratio (at an ideal sharp
    corner the field depends on the direction of approach).

    Returns the points (m, 3) [m] and a location code per point: 0 inside, 1 face,
    2 edge, 3 corner (cylinders and rings: 1 face or side, 2 rim edge).
    """
    if shape == "cuboid":
        a, b, h = (float(s) for s in size)
        delta = _EPS_REL * max(a, b, h)
        (x, ex), (y, ey), (z, ez) = (_axis_samples(-s / 2, s / 2, n, delta) for s in (a, b, h))
        gx, gy, gz = np.meshgrid(x, y, z, indexing="ij")
        cx, cy, cz = np.meshgrid(ex, ey, ez, indexing="ij")
        pts = np.stack([gx.ravel(), gy.ravel(), gz.ravel()], axis=1)
        code = (cx.astype(int) + cy + cz).ravel()
        return pts, code
    if shape in ("cylinder", "ring"):
        d_out = float(size[0])
        d_in, h = (float(size[1]), float(size[2])) if shape == "ring" else (0.0, float(size[1]))
        delta = _EPS_REL * max(d_out, h)
        r, er = _axis_samples(d_in / 2, d_out / 2, n, delta)
        if d_in == 0.0:  # the axis is not a surface
            r[0], er[0] = 0.0, False
        z, ez = _axis_samples(-h / 2, h / 2, n, delta)
        n_phi = max(8, 2 * (n // 2) + 2)
        phi = np.linspace(0.0, 2 * np.pi, n_phi, endpoint=False)
        gr, gp, gz = np.meshgrid(r, phi, z, indexing="ij")
        cr, _, cz = np.meshgrid(er, phi, ez, indexing="ij")
        pts = np.stack([gr * np.cos(gp), gr * np.sin(gp), gz], axis=-1).reshape(-1, 3)
        code = (cr.astype(int) + cz).ravel()
        if d_in == 0.0:  # one axis point per z, not n_phi copies
            keep = ~((gr == 0.0) & (gp > 0.0)).ravel()
            pts, code = pts[keep], code[keep]
        return pts, code
    raise InputError(f"shape: expected cuboid, cylinder or ring, got {shape!r}")


def _describe(mag, point: np.ndarray, code: int, index: int) -> str:
    """Plain words for where a sample point sits, e.g. 'at a corner of magnet 3'."""
    who = f"magnet {index + 1}"
    if code == 0:
        return f"inside {who}"
    dz = float(point[2]) - float(mag.position[2])
    on_z = abs(abs(dz) - mag.height / 2) <= 1e-6 * mag.height
    if code == 1:
        if on_z:
            return f"at the {'top' if dz > 0 else 'bottom'} face of {who}"
        return f"at {'a side face' if mag.shape == 'cuboid' else 'the side'} of {who}"
    if mag.shape == "cuboid":
        return f"at {'an edge' if code == 2 else 'a corner'} of {who}"
    return f"at {'the' if mag.shape == 'cylinder' else 'a'} rim edge of {who}"


def _magnetisation_axis(mag) -> np.ndarray:
    """Unit vector along the magnet's polarisation J = br * direction."""
    d = np.asarray(mag.direction, dtype=float).reshape(3)
    d = d / float(np.linalg.norm(d))
    return -d if float(mag.br) < 0 else d


def _rescaled(arrangement, factors: np.ndarray):
    """The arrangement with magnet i's br multiplied by ``factors[i]``."""
    mags = tuple(replace(m, br=m.br * float(f)) for m, f in zip(arrangement.magnets, factors))
    return replace(arrangement, magnets=mags)


def _celsius(t_k: float) -> str:
    return f"{kelvin_to_celsius(t_k):.0f} C"


def demag_check(
    arrangement,
    hcj_20_a_m,
    beta_pct_per_k,
    family,
    temps_k,
    *,
    n_per_axis: int = 7,
    alpha_pct_per_k=None,
) -> DemagResult:
    """Check whether any magnet is pushed past the knee of its intrinsic loop.

    Every magnet is sampled on the surface points of a grid of ``n_per_axis`` points
    per axis (cylinders and rings: radius, height and at least 8 angles), its faces,
    edges and corners, each boundary coordinate pulled inside by the same distance,
    1e-9 of the magnet's largest dimension; interior points are skipped because each
    component of H is harmonic inside a uniformly magnetised body and so peaks on its
    boundary (maximum principle). At each sample point the reverse
    field along the magnet's own magnetisation, ``H_rev = -H . d_hat`` (positive
    demagnetises), comes from the whole arrangement, neighbours and steel images
    included. It is compared with ``KNEE_FRACTION[family] * Hcj(T)`` at every
    temperature given, with the field evaluated at ``Br(T)``.

    Parameters
    ----------
    arrangement : Arrangement
        Magnets as built by :func:`matdb.physics.arrangement.build_arrangement`.
    hcj_20_a_m : float or sequence of float
        Intrinsic coercivity at 20 C, one value or one per magnet [A/m].
    beta_pct_per_k : float, sequence of float, or None
        Temperature coefficient of Hcj [%/K]; ``None`` (no coefficient known, as for
        some AlNiCo grades) holds Hcj at its 20 C value.
    family : str or sequence of str
        Key of :data:`KNEE_FRACTION`.
    temps_k : sequence of float
        Temperatures to check, include the coldest and the hottest [K].
    n_per_axis : int
        Sample points per axis (at least 2; 2 samples only the corners).
    alpha_pct_per_k : float or sequence of float, optional
        Reversible coefficient of Br [%/K]; ``None`` keeps the 20 C field.

    Returns
    -------
    DemagResult

    Notes
    -----
    The magnets are treated as rigid (recoil permeability 1), which slightly
    overstates the reverse field of a material with ``mu_rec > 1``: the check errs
    towards caution.

    At an ideal sharp edge or corner the component of H along J depends on the
    direction from which the point is approached; the equal pull-in on every axis
    fixes that direction (the cube diagonal at a corner). Just inside a pole face the
    magnet's own surface charge alone gives ``H_rev >= M/2``, so an isolated magnet
    is flagged whenever ``KNEE_FRACTION * Hcj(T) < Br(T) / (2 mu0)`` whatever its
    shape (every bare AlNiCo magnet, plain NdFeB grades well above their rating).

    References
    ----------
    .. [1] Coey (2010), ch. 13: demagnetising field, the intrinsic loop and squareness.
    .. [2] IEC 60404-8-1:2015; MMPA 0100-00 (Hcj and its temperature coefficient).
    .. [3] L. C. Evans, "Partial Differential Equations", 2nd ed., AMS, 2010,
       section 2.2.3 (strong maximum principle for harmonic functions).
    """
    magnets = tuple(arrangement.magnets)
    n_mag = len(magnets)
    if n_mag == 0:
        raise InputError("arrangement: expected at least one magnet, got none")
    if isinstance(n_per_axis, bool) or int(n_per_axis) != n_per_axis or n_per_axis < 2:
        raise InputError(f"n_per_axis: expected an integer of at least 2, got {n_per_axis!r}")
    n = int(n_per_axis)
    temps = np.atleast_1d(_check_temperature(temps_k, "temps_k")).astype(float).ravel()
    if temps.size == 0:
        raise InputError("temps_k: expected at least one temperature, got none")

    hcj20 = np.array([float(v) for v in _per_magnet(hcj_20_a_m, n_mag, "hcj_20_a_m")])
    if not np.all(np.isfinite(hcj20)) or np.any(hcj20 <= 0):
        raise InputError(f"hcj_20_a_m: expected positive coercivities in A/m, got {hcj_20_a_m!r}")
    betas = _per_magnet(beta_pct_per_k, n_mag, "beta_pct_per_k", allow_none=True)
    beta = np.array([0.0 if b is None else float(b) for b in betas])
    fams = _per_magnet(family, n_mag, "family")
    for f in fams:
        if f not in KNEE_FRACTION:
            raise InputError(f"family: expected one of {', '.join(KNEE_FRACTION)}, got {f!r}")
    knee = np.array([KNEE_FRACTION[f][0] for f in fams])
    alphas = _per_magnet(alpha_pct_per_k, n_mag, "alpha_pct_per_k", allow_none=True)
    alpha = np.array([0.0 if a is None else float(a) for a in alphas])

    # knee field per temperature and magnet, (n_t, n_mag)
    shape_tm = (temps.size, n_mag)
    hcj_t = np.asarray(hcj_at(hcj20[None, :], beta[None, :], temps[:, None]), dtype=float).reshape(shape_tm)
    if np.any(hcj_t <= 0):
        # The reversible coefficient is a straight line fitted over a limited range; where
        # it extrapolates to no coercivity at all the model has no knee left to compare
        # with. That is a risk verdict, not a crash: the magnet is far outside the range
        # its coefficient describes.
        k_bad, i_bad = (int(v[0]) for v in np.nonzero(hcj_t <= 0))
        return DemagResult(
            risk=True,
            worst_ratio=math.inf,
            worst_temp_k=float(temps[k_bad]),
            worst_magnet=i_bad,
            worst_point=tuple(float(v) for v in magnets[i_bad].position),
            temps_k=tuple(float(t) for t in temps),
            message=(f"at {_celsius(temps[k_bad])} the linear coefficient {beta[i_bad]:g} %/K of magnet "
                     f"{i_bad + 1} extrapolates Hcj to zero: outside the coefficient's range, "
                     f"treat as at risk of irreversible loss"),
        )
    br_f = np.asarray(br_at(1.0, alpha[None, :], temps[:, None]), dtype=float).reshape(shape_tm)
    if np.any(br_f <= 0):
        k_bad, i_bad = (int(v[0]) for v in np.nonzero(br_f <= 0))
        raise PhysicsError(
            f"temps_k: at {_celsius(temps[k_bad])} the linear coefficient {alpha[i_bad]:g} %/K "
            f"gives Br <= 0; the linear model does not reach that far"
        )
    h_knee = knee[None, :] * hcj_t

    # sample points of every magnet, one field evaluation
    pts_all, owner, where, d_hat = [], [], [], []
    for i, mag in enumerate(magnets):
        local, code = _sample_local(mag.shape, mag.size, n)
        # Inside a uniformly magnetised body with no free currents every component of
        # H is harmonic (div H = -div M = 0, curl H = 0), so its largest value lies on
        # the boundary (maximum principle): interior samples cannot be the worst.
        surface = code > 0
        local, code = local[surface], code[surface]
        d = _magnetisation_axis(mag)
        pts_all.append(local + np.asarray(mag.position, dtype=float).reshape(1, 3))
        owner.append(np.full(len(local), i))
        where.append(code)
        d_hat.append(np.broadcast_to(d, local.shape))
    pts = np.concatenate(pts_all)
    owner = np.concatenate(owner)
    where = np.concatenate(where)
    d_hat = np.concatenate(d_hat)

    # Fields are linear in each magnet's polarisation: with one common Br factor per
    # temperature a single evaluation scales; otherwise each temperature gets its own
    # scaled arrangement.
    common = bool(np.all(br_f == br_f[:, :1]))
    h_rev = np.empty((temps.size, len(pts)))
    if common:
        h0 = np.asarray(arrangement.H(pts), dtype=float)
        hr0 = -np.einsum("ij,ij->i", h0, d_hat)
        h_rev[:] = br_f[:, :1] * hr0[None, :]
    else:
        for k in range(temps.size):
            hk = np.asarray(_rescaled(arrangement, br_f[k]).H(pts), dtype=float)
            h_rev[k] = -np.einsum("ij,ij->i", hk, d_hat)

    if not np.all(np.isfinite(h_rev)):
        raise PhysicsError("arrangement: the field inside the magnets came out non-finite")
    ratio = h_rev / h_knee[:, owner]
    k_t, j = np.unravel_index(int(np.argmax(ratio)), ratio.shape)
    worst = float(ratio[k_t, j])
    i_mag = int(owner[j])
    t_w = float(temps[k_t])
    place = _describe(magnets[i_mag], pts[j], int(where[j]), i_mag)
    why = ""
    if temps.size > 1:
        b = beta[i_mag]
        name = _FAMILY_WORDS.get(fams[i_mag], fams[i_mag])
        if b > 0 and t_w == temps.min():
            why = f" ({name} loses coercivity when cold)"
        elif b < 0 and t_w == temps.max():
            why = f" ({name} loses coercivity when hot)"
    risk = worst >= 1.0
    shown = f"{math.floor(worst * 100.0) / 100.0:.2f}"  # never rounds across 1
    if risk:
        msg = (f"reverse field {place} reaches {shown}x the knee at {_celsius(t_w)}{why}: "
               f"expect irreversible loss of magnetisation")
    else:
        msg = (f"no irreversible loss expected: the largest reverse field, {place} at "
               f"{_celsius(t_w)}, is {shown}x the knee")
    return DemagResult(
        risk=bool(risk),
        worst_ratio=worst,
        worst_temp_k=t_w,
        worst_magnet=i_mag,
        worst_point=tuple(float(v) for v in pts[j]),
        temps_k=tuple(float(t) for t in temps),
        message=msg,
    )


# ---------------------------------------------------------------------------
# safety distance for implanted medical devices
# ---------------------------------------------------------------------------

PACEMAKER_THRESHOLD_T = 5e-4  # 0.5 mT, see safe_distance [T]


def safe_distance(arrangement, threshold_t: float = PACEMAKER_THRESHOLD_T) -> float:
    """Distance from the magnets beyond which ``|B|`` stays below ``threshold_t``.

    Rays leave the arrangement's bounding box from its centre in +z, -z, +x, -x, +y,
    -y and the four horizontal diagonals. Along each ray ``|B|`` is evaluated on a
    log-spaced grid of distances (measured from the point where the ray leaves the
    box), the farthest crossing of the threshold is bracketed and refined with
    Brent's method, and the largest distance over the rays is returned.

    Parameters
    ----------
    arrangement : Arrangement
        Magnets as built by :func:`matdb.physics.arrangement.build_arrangement`.
    threshold_t : float
        Flux density limit [T]; 0.5 mT is the level customarily kept away from
        pacemakers and implanted defibrillators.

    Returns
    -------
    float
        Distance from the bounding box [m]; 0 when the field is below the threshold
        everywhere on the rays.

    Notes
    -----
    With a steel back plate, the image model describes the field above the plate
    only; the -z ray then passes through a region the model does not describe, and
    its value (the field of the magnets and their images) is reported as is.

    References
    ----------
    .. [1] ISO 14117:2019, "Active implantable medical devices - Electromagnetic
       compatibility - EMC test protocols for implantable cardiac pacemakers,
       implantable cardioverter defibrillators and cardiac resynchronization
       devices" (static magnetic field immunity; from memory, verify). Keeping
       wearers of such devices outside the 0.5 mT line is common practice, as around
       MR scanners (from memory of IEC 60601-2-33; verify).
    .. [2] Jackson (1999), eq. (5.56): the far field falls as a dipole's, r^-3, so
       the threshold is crossed once at large distance.
    """
    from scipy.optimize import brentq  # lazy: scipy.optimize is heavy to import (start-up)

    thr = float(threshold_t)
    if not (math.isfinite(thr) and thr > 0):
        raise InputError(f"threshold_t: expected a positive flux density in T, got {threshold_t!r}")
    xmin, xmax, ymin, ymax, zmin, zmax = (float(v) for v in arrangement.bounds())
    centre = np.array([(xmin + xmax) / 2, (ymin + ymax) / 2, (zmin + zmax) / 2])
    half = np.array([(xmax - xmin) / 2, (ymax - ymin) / 2, (zmax - zmin) / 2])
    scale = float(max(np.max(2 * half), 1e-6))

    s = 1 / math.sqrt(2)
    dirs = np.array([
        [0, 0, 1], [0, 0, -1], [1, 0, 0], [-1, 0, 0], [0, 1, 0], [0, -1, 0],
        [s, s, 0], [s, -s, 0], [-s, s, 0], [-s, -s, 0],
    ], dtype=float)
    with np.errstate(divide="ignore"):
        t_exit = np.min(np.where(np.abs(dirs) > 0, half[None, :] / np.abs(dirs), np.inf), axis=1)
    starts = centre[None, :] + t_exit[:, None] * dirs

    def bmag(p: np.ndarray) -> np.ndarray:
        return np.linalg.norm(np.asarray(arrangement.B(p), dtype=float).reshape(-1, 3), axis=1)

    d_far = 1e3 * scale
    for _ in range(6):  # extend the grid until every ray ends below the threshold
        d = np.geomspace(1e-6 * scale, d_far, 240)
        p = starts[:, None, :] + d[None, :, None] * dirs[:, None, :]
        b = bmag(p.reshape(-1, 3)).reshape(len(dirs), d.size)
        if np.all(b[:, -1] < thr):
            break
        d_far *= 1e3
    else:
        raise PhysicsError(f"threshold_t: |B| stays above {thr:g} T out to {d_far:g} m")

    best = 0.0
    for k in range(len(dirs)):
        above = np.nonzero(b[k] >= thr)[0]
        if above.size == 0:
            continue
        i = int(above[-1])
        lo, hi = float(d[i]), float(d[i + 1])
        start, u = starts[k], dirs[k]

        def f(x: float) -> float:
            return float(bmag((start + x * u)[None, :])[0]) - thr

        root = brentq(f, lo, hi, xtol=1e-9 * scale, rtol=1e-10)
        best = max(best, float(root))
    return best


# ---------------------------------------------------------------------------
# cautions
# ---------------------------------------------------------------------------

SAFETY_TEXT = (
    "Strong magnets need care.\n"
    "- Pinching: two magnets, or a magnet and a piece of steel, snap together hard "
    "enough to trap and crush fingers or skin. Handle one magnet at a time, keep the "
    "others well apart, and slide magnets off each other rather than pulling.\n"
    "- Shattering: sintered magnets are brittle. When they collide they chip or break "
    "and send sharp splinters flying; wear eye protection while handling them.\n"
    "- Swallowing: keep magnets away from children and pets. Two swallowed magnets, or "
    "a magnet and a piece of metal, can pull together through the gut wall and cause "
    "serious injury; if a magnet may have been swallowed, get medical help at once.\n"
    "- Implanted devices: magnetic fields can disturb pacemakers, defibrillators, "
    "insulin pumps and other implants. Anyone who wears one should stay farther away "
    "than the 0.5 mT distance shown for this design.\n"
    "- Other objects: keep magnets away from bank cards and other magnetic stripes, "
    "mechanical watches, hearing aids, phones, hard drives and other electronics.\n"
    "These notes are general. Local codes, the supplier's safety data and the advice "
    "of licensed professionals take precedence over them."
)
