"""Floating-magnet synthesis: which lifter, floater, plates and number of floaters keep a
stable window over a payload range.

The search runs over standard magnet sizes (cubes, cylinders, rings), grades, plate
materials and thicknesses, and 1, 2 or 3 floaters sharing a rigid payload. It is fast
because everything that does not depend on a grade or a material is tabulated once:

* the lifter's pull on the floater against the lifter distance, for unit polarisations
  (the pull is bilinear in the two remanences): the
  :class:`~matdb.physics.floating.lifter.PullTable` of the pair, resampled finely on its
  falling branch; its error is checked against the direct quadrature
  (:func:`~matdb.physics.floating.lifter.axial_pull`) halfway between the table's nodes;
* the plates' plane integrals of ``B_z^2`` and ``B_h^2`` of the floater (the
  finite-size model of :class:`matdb.physics.floating.plates.FinitePlates`), per shape
  *proportion*: the field of a magnet scaled by ``L`` at points scaled by ``L`` is the
  same, so ``dP/ds(s; L) = (L/L0) dP/ds(s L0/L; L0)`` and one table serves all cubes,
  all cylinders of one aspect ratio, and so on. Grade (``J^2``) and material
  (``|chi_perp|``, ``|chi_par|``) are factors.

Every design that is shown is then re-checked by the exact levitate path
(:func:`matdb.analysis.floating.levitate_stabilized` over the payload range); a design
the exact path does not confirm is rejected with that reason. Sizes, prices and the
default size lists are illustrative: prices come from the catalogue's illustrative
figures.

References
----------
.. [1] M. D. Simon, L. O. Heflinger and A. K. Geim, "Diamagnetically stabilized magnet
   levitation", Am. J. Phys. 69, 702-713 (2001).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Callable, Optional

import joblib
import numpy as np
from scipy.interpolate import CubicSpline

from matdb.errors import InputError
from matdb.analysis.floating import levitate_stabilized
from matdb.constants import G_STANDARD, MU0, T_REF_K, kelvin_to_celsius
from matdb.data.catalog import get_material, list_grades
from matdb.design import parse_stabilized
from matdb.paths import cache_root
from matdb.physics.floating import Body, FinitePlates, axial_pull, pull_table

__all__ = [
    "FLOATERS",
    "LIFTERS",
    "THICKNESSES_M",
    "DEFAULT_MATERIALS",
    "FMRequest",
    "FMResult",
    "plate_slope_table",
    "plate_stiffness_unit",
    "unit_pull",
    "search",
    "records",
    "design_of",
]

MM = 1e-3
# standard sizes (common stock sizes in mm and inches; a choice, not a supplier's list)
FLOATERS = (
    ("cuboid", (3.0, 3.0, 3.0)), ("cuboid", (5.0, 5.0, 5.0)), ("cuboid", (6.35, 6.35, 6.35)),
    ("cuboid", (10.0, 10.0, 10.0)), ("cuboid", (12.7, 12.7, 12.7)), ("cuboid", (20.0, 20.0, 20.0)),
    ("cuboid", (10.0, 10.0, 5.0)), ("cuboid", (20.0, 20.0, 10.0)),
    ("cylinder", (3.0, 1.5)), ("cylinder", (5.0, 2.5)), ("cylinder", (6.35, 3.175)), ("cylinder", (10.0, 5.0)),
    ("cylinder", (12.7, 6.35)), ("cylinder", (20.0, 10.0)), ("cylinder", (25.4, 12.7)),
    ("cylinder", (10.0, 10.0)), ("cylinder", (12.7, 12.7)),
    ("ring", (10.0, 5.0, 5.0)), ("ring", (12.7, 6.35, 6.35)), ("ring", (20.0, 10.0, 10.0)),
)
LIFTERS = (
    ("cylinder", (25.4, 25.4)), ("cylinder", (38.1, 25.4)), ("cylinder", (50.8, 25.4)),
    ("cylinder", (50.8, 50.8)), ("cylinder", (76.2, 50.8)),
    ("cuboid", (25.4, 25.4, 25.4)), ("cuboid", (50.8, 50.8, 50.8)),
    ("ring", (50.8, 25.4, 25.4)),
)
THICKNESSES_M = (1e-3, 2e-3, 3e-3)
DEFAULT_MATERIALS = ("bismuth", "pyrolytic-graphite")
PLATE_WIDTH_FACTOR = 4.0  # plates this many floater widths wide: their width costs < 0.1 % stiffness
N_PAYLOADS = 5  # payloads of the range checked in the search
SCREEN_MARGIN = 1.05  # the search asks this much more window than required, for the exact check to confirm
_L0 = 0.01  # reference size of the normalised plate tables [m]
_C = MU0 / (4 * math.pi)


# ---------------------------------------------------------------------------
# request and result
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class FMRequest:
    """What the floating-magnet search must meet, in SI.

    Attributes
    ----------
    payload_range_kg : tuple
        ``(lo, hi)`` payload carried by the floaters together [kg].
    materials : tuple of str
        Plate material ids.
    min_window_m : float
        Narrowest window of plate distances allowed over the range [m].
    envelope_m : tuple or None
        ``(width, height)`` the rig must fit in [m]; None: sizes are reported only.
    stations : tuple of int
        Numbers of floaters sharing the payload to try (1, 2, 3).
    budget_usd : float or None
        Most the magnets and plates may cost (illustrative prices) [USD].
    families : tuple of str or None
        Magnet families allowed (e.g. ``("NdFeB",)``); None: all.
    temperature_k : float
        Operating temperature [K] (grades rated below it are left out).
    clearance_m : float
        Smallest gap floater face to plate [m].
    top : int
        Designs to confirm with the exact levitate path and show.
    rejected : int or None
        Closest rejected designs to show with their reasons; None: 3 when nothing works,
        none otherwise.
    """

    payload_range_kg: tuple
    materials: tuple = DEFAULT_MATERIALS
    min_window_m: float = 0.5e-3
    envelope_m: Optional[tuple] = None
    stations: tuple = (1, 2, 3)
    budget_usd: Optional[float] = None
    families: Optional[tuple] = None
    temperature_k: float = T_REF_K
    clearance_m: float = 0.5e-3
    top: int = 3
    rejected: Optional[int] = None

    def __post_init__(self):
        lo, hi = self.payload_range_kg
        if not (0 <= lo <= hi and math.isfinite(hi)):
            raise InputError(f"payload range: expected 0 <= from <= to, got {self.payload_range_kg!r}")
        if not self.materials:
            raise InputError("plate materials: expected at least one material id")
        if not self.min_window_m > 0:
            raise InputError(f"minimum window: expected a positive length, got {self.min_window_m!r}")
        if any(n not in (1, 2, 3) for n in self.stations) or not self.stations:
            raise InputError(f"stations: expected some of 1, 2, 3, got {self.stations!r}")
        if self.envelope_m is not None and not all(v > 0 for v in self.envelope_m):
            raise InputError(f"envelope: expected positive width and height, got {self.envelope_m!r}")
        if self.top < 1:
            raise InputError(f"top: expected one or more, got {self.top!r}")
        if self.rejected is not None and self.rejected < 0:
            raise InputError(f"rejected: expected zero or more, got {self.rejected!r}")


@dataclass
class FMResult:
    """Outcome of :func:`search`: shown designs (confirmed first, then the closest
    rejected), counts, the closest-failure sentence when nothing works, and the
    interpolation error of the pull tables."""

    rows: list
    designs: list
    request: FMRequest
    n_candidates: int
    n_screened_feasible: int
    message: str
    pull_interp_error: float
    notes: list = field(default_factory=list)
    rejected_by: dict = field(default_factory=dict)


# ---------------------------------------------------------------------------
# tables
# ---------------------------------------------------------------------------
@dataclass
class _Pull:
    """Falling branch of the unit pull: fine grid of distances, pull and slope."""

    d: np.ndarray
    f: np.ndarray
    dfdd: np.ndarray
    f_peak: float
    d_peak: float
    error: float

    def balance(self, f_target):
        """Lifter distances with unit pull ``f_target`` (array) on the falling branch [m];
        NaN where it exceeds the peak. Beyond the table the pull falls as r^-4 (dipoles)."""
        f_target = np.asarray(f_target, dtype=float)
        lf = np.log(self.f[::-1])
        out = np.exp(np.interp(np.log(np.maximum(f_target, 1e-300)), lf, np.log(self.d[::-1])))
        far = f_target < self.f[-1]
        if np.any(far):
            out = np.where(far, self.d[-1] * (self.f[-1] / np.maximum(f_target, 1e-300)) ** 0.25, out)
        return np.where(f_target > self.f_peak, np.nan, out)

    def slope(self, d):
        """``dF/dD`` of the unit pull at distances ``d`` [N/m]."""
        d = np.asarray(d, dtype=float)
        s = np.interp(d, self.d, self.dfdd)
        far = d > self.d[-1]
        return np.where(far, self.dfdd[-1] * (self.d[-1] / np.where(far, d, 1.0)) ** 5, s)


_TABLE_VERSION = 3  # bump when the tables' physics or grids change (drops the disk cache)
_MEMORY = None


def _memory():
    """joblib's on-disk cache of the tables: ``$MATDB_CACHE_DIR`` or the user cache folder."""
    global _MEMORY
    path = str(cache_root() / "synthesis")
    if _MEMORY is None or _MEMORY.location != path:
        _MEMORY = joblib.Memory(path, verbose=0)
    return _MEMORY


@lru_cache(maxsize=512)
def unit_pull(lshape: str, lsize: tuple, fshape: str, fsize: tuple) -> _Pull:
    """The falling branch of the unit pull of a lifter and floater (shapes, sizes [m]),
    from memory, the disk cache or built (:class:`~matdb.physics.floating.lifter.PullTable`)."""
    d, f, dfdd, f_peak, d_peak, err = _memory().cache(_pull_arrays)(lshape, lsize, fshape, fsize, _TABLE_VERSION)
    return _Pull(d, f, dfdd, f_peak, d_peak, err)


def _pull_arrays(lshape: str, lsize: tuple, fshape: str, fsize: tuple, version: int) -> tuple:
    lifter = Body(lshape, lsize, 1.0)
    floater = Body(fshape, fsize, 1.0)
    table = pull_table(lifter, floater)
    i0 = int(np.argmax(table.f))
    if i0 >= table.d.size - 3:
        raise InputError("lifter: no falling branch in the table")  # pragma: no cover
    x = np.log(table.d[i0:])
    # checked error: the table against the direct quadrature halfway between its nodes
    # on the falling branch, relative to the pull there
    mids = np.exp(0.5 * (x[1:] + x[:-1]))
    err = float(np.max(np.abs(table.pull(mids) / axial_pull(lifter, floater, mids) - 1)))
    df_ = np.exp(np.linspace(x[0], x[-1], 3000))
    ff, df = table.pull(df_), table.slope(df_)
    keep = (df < 0) & (ff > 0)
    return df_[keep], ff[keep], df[keep], float(table.f[i0]), float(table.d[i0]), err


def _norm_key(shape: str, size_m: tuple) -> tuple[tuple, float]:
    """Proportions of a shape (largest dimension 1) and its scale [m]."""
    L = max(size_m)
    return tuple(round(v / L, 9) for v in size_m), L


def _plate_ratio_arrays(shape: str, proportions: tuple, version: int) -> tuple:
    body = Body(shape, tuple(v * _L0 for v in proportions), 1.0)
    fp = FinitePlates(body, -1.0, -1.0, 1.0, g_min=1e-3 * _L0)
    g = np.geomspace(2e-3 * _L0, 100 * _L0, 26)
    s = body.half_height + g
    parts = fp.plane_slope_parts(s)
    dip = -3 * math.pi * _C**2 * body.moment**2 * s**-5
    return g, parts / dip[:, None]


@lru_cache(maxsize=64)
def plate_slope_table(shape: str, proportions: tuple):
    """Plane-integral slopes of a unit-polarised floater of ``shape`` and
    ``proportions`` (scaled to size ``_L0``): a function of the gap above the face
    returning ``(dPz/ds, dPh/ds)`` [T^2 m] (finite-size model), tabulated as the
    ratio to the point-dipole slopes ``-3 pi C^2 m^2 s^-5`` (each part) and kept on disk."""
    body = Body(shape, tuple(v * _L0 for v in proportions), 1.0)
    g, ratio = _memory().cache(_plate_ratio_arrays)(shape, proportions, _TABLE_VERSION)
    spl = CubicSpline(np.log(g), ratio, axis=0)
    last = ratio[-1]

    def slopes(gap):
        gap = np.asarray(gap, dtype=float)
        lg = np.log(np.clip(gap, g[0], None))
        r = np.where((gap > g[-1])[..., None], last, spl(np.minimum(lg, np.log(g[-1]))))
        return r * (-3 * math.pi * _C**2 * body.moment**2 * (body.half_height + gap) ** -5)[..., None]

    return slopes, body.half_height


def plate_stiffness_unit(shape: str, size_m: tuple, chi_perp: float, chi_par: float, t: float, a):
    """Finite-size stiffness of two plates per J_f^2 [N/m/T^2] at plate distances ``a``."""
    prop, L = _norm_key(shape, size_m)
    slopes, h2_0 = plate_slope_table(shape, prop)
    sc = L / _L0
    h2 = h2_0 * sc
    a = np.asarray(a, dtype=float)
    s_lo = slopes((a - h2) / sc) * sc
    s_hi = slopes((a + t - h2) / sc) * sc
    diff = s_hi - s_lo  # positive
    return (abs(chi_perp) * diff[..., 0] + abs(chi_par) * diff[..., 1]) / MU0


# ---------------------------------------------------------------------------
# the search
# ---------------------------------------------------------------------------
def _grades(families, temperature_k):
    gs = [g for g in list_grades() if (families is None or g.family in families)
          and (g.max_temp_c is None or g.max_temp_c >= kelvin_to_celsius(temperature_k))]
    if not gs:
        raise InputError(f"no magnet grade of {', '.join(families or [])} is rated for "
                         f"{kelvin_to_celsius(temperature_k):.0f} C", field="family")
    # keep the grades no other beats on both remanence (up) and price (down)
    out = []
    for g in gs:
        p = g.price_usd_per_kg if g.price_usd_per_kg is not None else math.inf
        dominated = any(
            (h.br_t >= g.br_t and (h.price_usd_per_kg or math.inf) <= p)
            and (h.br_t > g.br_t or (h.price_usd_per_kg or math.inf) < p
                 or (h.grade < g.grade and h.br_t == g.br_t and (h.price_usd_per_kg or math.inf) == p))
            for h in gs if h is not g)
        if not dominated:
            out.append(g)
    return sorted(out, key=lambda g: g.br_t)


def _body_volume(shape, size):
    return Body(shape, size, 1.0).volume


def _width(shape, size):
    return float(max(size[0], size[1]) if shape == "cuboid" else size[0])


def _label(c: dict) -> str:
    def sz(s):
        return "x".join(f"{v * 1e3:.4g}" for v in s) + " mm"

    n = c["stations"]
    return (f"{n} x [{c['floater_shape']} {sz(c['floater_size_m'])} {c['floater_grade']} under "
            f"{c['lifter_shape']} {sz(c['lifter_size_m'])} {c['lifter_grade']}, "
            f"{c['material']} {c['thickness_m'] * 1e3:.3g} mm]")


def search(req: FMRequest, progress: Optional[Callable[[float, str], None]] = None,
           floaters=None, lifters=None, thicknesses=None) -> FMResult:
    """Search floating-magnet designs that keep a window over a payload range.

    Parameters
    ----------
    req : FMRequest
    progress : callable, optional
        ``progress(fraction_done, text)``.
    floaters, lifters : sequence of (shape, size in mm)
        Sizes to try (default :data:`FLOATERS`, :data:`LIFTERS`).
    thicknesses : sequence of float
        Plate thicknesses [m].

    Returns
    -------
    FMResult
        Shown designs ranked by lifter travel times cost (both smaller is better; the
        smallest first), each re-checked by the exact levitate path; every rejection
        keeps its reasons. When nothing works, ``message`` names the requirement that
        fails closest and by how much.

    Notes
    -----
    Per floater the weight share at payload ``p`` is ``(m_f + p/n) g``. The lifter
    distance solves ``Br_l Br_f F_1(D) = W`` on the falling branch; ``dF/dD`` there is
    the lifter's (negative) vertical stiffness. The window at ``p`` is from the
    smallest plate distance (half-height + clearance) to the largest where the plates'
    finite-size stiffness ``Br_f^2 k_1(a)`` still beats ``-dF/dD``, capped where the
    upper plate meets the lifter (``D - t``); the design's window is the narrowest
    over the range (Simon, Heflinger and Geim (2001) for the balance of stiffnesses).
    """
    floaters = FLOATERS if floaters is None else floaters
    lifters = LIFTERS if lifters is None else lifters
    thicknesses = THICKNESSES_M if thicknesses is None else thicknesses
    prog = progress or (lambda f, t="": None)
    g = G_STANDARD
    lo, hi = req.payload_range_kg
    pays = np.linspace(lo, hi, N_PAYLOADS) if hi > lo else np.array([lo])
    grades = _grades(req.families, req.temperature_k)
    br = np.array([gr.br_t for gr in grades])
    alpha = np.array([gr.alpha_br_pct_per_k for gr in grades])
    dens = np.array([gr.density_kg_m3 for gr in grades])
    price = np.array([gr.price_usd_per_kg if gr.price_usd_per_kg is not None else np.nan for gr in grades])
    dt = req.temperature_k - T_REF_K
    br_t = br * (1 + alpha / 100 * dt)
    mats = []
    for mid in req.materials:
        try:
            m = get_material(mid)
        except Exception as exc:  # NotFoundError -> one line naming the option
            raise InputError(f"{exc}", field="plates") from exc
        cz, ch = float(m.chi_vertical), float(m.chi_horizontal)
        if not (cz < 0 and ch < 0):
            raise InputError(f"{mid!r} is not diamagnetic; the plates need a negative susceptibility", field="plates")
        coeff = m.temp_coeff_per_k or 0.0
        mats.append((m.id, cz * (1 + coeff * dt), ch * (1 + coeff * dt), m.density_kg_m3,
                     m.price_usd_per_kg if m.price_usd_per_kg is not None else np.nan))
    ng = len(grades)
    gl, gf = np.meshgrid(np.arange(ng), np.arange(ng), indexing="ij")
    gl, gf = gl.ravel(), gf.ravel()
    cand = []  # rows of arrays, one block per (pair, stations, material, thickness)
    err = 0.0
    pairs = [(f, lft) for f in floaters for lft in lifters]
    u = np.concatenate([[0.0], np.geomspace(1e-6, 0.08, 240)])
    k1_cache: dict = {}
    for ip, ((fs, fz), (ls, lz)) in enumerate(pairs):
        prog(0.8 * ip / len(pairs), f"{fs} {'x'.join(f'{v:g}' for v in fz)} mm under {ls} "
                                    f"{'x'.join(f'{v:g}' for v in lz)} mm")
        fsize = tuple(v * MM for v in fz)
        lsize = tuple(v * MM for v in lz)
        fw, lw = _width(fs, fsize), _width(ls, lsize)
        if fw > lw:
            continue  # a floater wider than its lifter: outside this search
        pull = unit_pull(ls, lsize, fs, fsize)
        err = max(err, pull.error)
        vf, vl = _body_volume(fs, fsize), _body_volume(ls, lsize)
        mf = vf * dens[gf]  # (G,)
        h2 = fsize[-1] / 2
        a_min = h2 + req.clearance_m
        bb = br_t[gl] * br_t[gf]  # (G,)
        for n in req.stations:
            W = (mf[:, None] + pays[None, :] / n) * g  # (G, P)
            D = pull.balance(W / bb[:, None])  # (G, P)
            kz = bb[:, None] * pull.slope(np.nan_to_num(D, nan=pull.d_peak))  # dF/dD < 0
            holds = np.all(np.isfinite(D), axis=1)
            hold_short = np.max(W, axis=1) / (bb * pull.f_peak) - 1
            for mid, cz, ch, mdens, mprice in mats:
                for t in thicknesses:
                    a = a_min + u
                    key = (fs, fsize, mid, t)
                    if key not in k1_cache:
                        k1_cache[key] = np.maximum(plate_stiffness_unit(fs, fsize, cz, ch, t, a), 1e-300)  # (A,)
                    k1 = k1_cache[key]
                    need = -kz / (br_t[gf] ** 2)[:, None]  # (G, P)
                    below = k1[None, None, :] < need[..., None]
                    idx = np.where(below.any(axis=-1), np.argmax(below, axis=-1), u.size)
                    j = np.clip(idx, 1, u.size - 1)
                    k_a, k_b = k1[j - 1], k1[j]
                    frac = np.clip((np.log(k_a) - np.log(np.maximum(need, 1e-300)))
                                   / np.maximum(np.log(k_a) - np.log(k_b), 1e-300), 0.0, 1.0)
                    a_max = np.where(idx >= u.size, a[-1], a[j - 1] + frac * (a[j] - a[j - 1]))
                    a_max = np.where(idx == 0, np.nan, a_max)
                    top = np.fmin(a_max, D - t)
                    win = top - a_min
                    win = np.where(np.isfinite(D) & np.isfinite(a_max), win, np.nan)
                    wmin = np.min(np.where(np.isnan(win), -np.inf, win), axis=1)
                    stiff_short = np.max(np.where(np.isfinite(D), need / k1[0], 0.0), axis=1) - 1
                    travel = D[:, 0] - D[:, -1]
                    plate_w = PLATE_WIDTH_FACTOR * fw
                    plate_mass = 2 * plate_w**2 * t * mdens
                    cost = n * (vl * dens[gl] * price[gl] + vf * dens[gf] * price[gf] + plate_mass * mprice)
                    a_set = a_min + 0.5 * np.clip(wmin, 0, None)
                    height = D[:, 0] + lsize[-1] + a_set + t
                    spread = {1: 0.0, 2: 1.0, 3: 1.0}[n] * np.maximum(3 * D[:, 0], 2 * lw)
                    width = spread + max(lw, plate_w)
                    drift = -(alpha[gl] / (100 + alpha[gl] * dt) + alpha[gf] / (100 + alpha[gf] * dt)) \
                        * W[:, -1] / kz[:, -1] * 1e6
                    cand.append(dict(
                        ip=np.full(ng * ng, ip), n=np.full(ng * ng, n), mat=np.full(ng * ng, mid, dtype=object),
                        t=np.full(ng * ng, t), gl=gl, gf=gf, holds=holds, hold_short=hold_short,
                        wmin=wmin, stiff_short=stiff_short, travel=travel, cost=cost, height=height,
                        width=width, a_set=a_set, d_lo=D[:, 0], d_hi=D[:, -1], drift=drift,
                        plate_w=np.full(ng * ng, plate_w)))
    if not cand:
        raise InputError("search: no floater and lifter pair to try (every floater wider than every lifter)")
    C = {k: np.concatenate([c[k] for c in cand]) for k in cand[0]}
    N = C["ip"].size
    # shortfalls, each relative (0 = just meets it)
    short = {"hold": np.where(C["holds"], 0.0, np.maximum(C["hold_short"], 0.0))}
    wm = C["wmin"]
    short["window"] = np.where(np.isfinite(wm), np.maximum(1 - wm / (SCREEN_MARGIN * req.min_window_m), 0.0),
                               1 + np.maximum(C["stiff_short"], 0.0))
    short["window"] = np.where(C["holds"], short["window"], np.inf)
    if req.envelope_m is not None:
        short["height"] = np.maximum(C["height"] / req.envelope_m[1] - 1, 0.0)
        short["width"] = np.maximum(C["width"] / req.envelope_m[0] - 1, 0.0)
    if req.budget_usd is not None:
        short["budget"] = np.where(np.isnan(C["cost"]), np.inf,
                                   np.maximum(C["cost"] / max(req.budget_usd, 1e-12) - 1, 0.0))
    rejected_by = {k: int(np.sum(v > 0)) for k, v in short.items()}
    worst = np.nanmax(np.column_stack([np.nan_to_num(v, nan=np.inf) for v in short.values()]), axis=1)
    ok = worst <= 0
    score = np.log(np.maximum(C["travel"], 1e-6)) + np.log(np.where(np.isnan(C["cost"]), 1e9, C["cost"]))
    order = np.lexsort((score, ~ok))  # feasible first, then by travel x cost

    def row(i) -> dict:
        (fs, fz), (ls, lz) = pairs[int(C["ip"][i])]
        return {
            "stations": int(C["n"][i]), "floater_shape": fs, "floater_size_m": [v * MM for v in fz],
            "floater_grade": grades[int(C["gf"][i])].grade, "lifter_shape": ls,
            "lifter_size_m": [v * MM for v in lz], "lifter_grade": grades[int(C["gl"][i])].grade,
            "material": str(C["mat"][i]), "thickness_m": float(C["t"][i]), "plate_width_m": float(C["plate_w"][i]),
            "plate_distance_m": float(C["a_set"][i]),
            "screen_window_min_m": None if not np.isfinite(C["wmin"][i]) else float(C["wmin"][i]),
            "lifter_travel_m": None if not np.isfinite(C["travel"][i]) else float(C["travel"][i]),
            "lifter_distance_empty_m": None if not np.isfinite(C["d_lo"][i]) else float(C["d_lo"][i]),
            "lifter_distance_full_m": None if not np.isfinite(C["d_hi"][i]) else float(C["d_hi"][i]),
            "lifter_distance_drift_um_per_k": None if not np.isfinite(C["drift"][i]) else float(C["drift"][i]),
            "cost_usd": None if np.isnan(C["cost"][i]) else float(C["cost"][i]),
            "envelope_width_m": None if not np.isfinite(C["width"][i]) else float(C["width"][i]),
            "envelope_height_m": None if not np.isfinite(C["height"][i]) else float(C["height"][i]),
            "reasons": _reasons(i, C, short, req, pays),
        }

    shown, designs, tried = [], [], 0
    seen = set()
    feas_idx = [i for i in order if ok[i]]
    prog(0.8, "re-checking the best designs exactly")
    for i in feas_idx:
        key = (int(C["ip"][i]), int(C["n"][i]), C["mat"][i])
        if key in seen:
            continue
        seen.add(key)
        if tried >= 3 * req.top or len([r for r in shown if r["feasible"]]) >= req.top:
            break
        tried += 1
        r = row(i)
        prog(0.8 + 0.2 * min(tried / (2 * req.top), 1.0), f"exact check {tried}: {_label(r)}")
        design = design_of(r, req)
        exact = levitate_stabilized(design, payloads_kg=np.linspace(lo, hi, N_PAYLOADS) if hi > lo else [lo])
        r["window_min_m"] = exact.get("window_min_m")
        r["exact_checked"] = True
        rows_w = exact["window"]
        res = [w.get("resolution_m") for w in rows_w]
        last = res[-1]
        r["resolution_m"] = min(last) if isinstance(last, list) and all(v is not None for v in last) else (
            last if not isinstance(last, list) else None)
        why = []
        if r["window_min_m"] is None or r["window_min_m"] < req.min_window_m * (1 - 1e-9):
            got = "none" if r["window_min_m"] is None else f"{r['window_min_m'] * 1e3:.3g} mm"
            why.append(f"exact check: narrowest window {got} over the range, below {req.min_window_m * 1e3:.3g} mm")
        if not exact.get("floats"):
            why.append("exact check: not stable at the heaviest payload (" + (
                "; ".join(w for w in exact.get("warnings", []) if "stable" in w or "tips" in w or "slides" in w)[:200]
                or "tilt or lateral stability") + ")")
        r["feasible"] = not why
        r["reasons"] = why
        shown.append(r)
        designs.append(design)
    confirmed = [r for r in shown if r["feasible"]]
    # when nothing is confirmed: the closest rejected designs, with their reasons
    n_rej = (0 if confirmed else 3) if req.rejected is None else req.rejected
    if not confirmed:
        n_rej = max(n_rej, 1)
    rej = [int(i) for i in np.argsort(worst, kind="stable") if not ok[i]][:n_rej]
    for i in rej:
        r = row(i)
        r.update(feasible=False, exact_checked=False, window_min_m=r["screen_window_min_m"], resolution_m=None)
        shown.append(r)
        designs.append(None)
    pairs_out = sorted(zip(shown, designs), key=lambda x: not x[0]["feasible"])
    message = ""
    if not confirmed:
        i = rej[0] if rej else 0
        if rej:
            message = (f"nothing meets every requirement; closest: {_label(row(i))}: "
                       + "; ".join(row(i)["reasons"]))
        else:
            message = "the designs that passed the search failed the exact check: " + "; ".join(
                "; ".join(r["reasons"]) for r in shown if r["reasons"])
    for k, r in enumerate(confirmed, 1):
        r["rank"] = k
    for r in shown:
        r.setdefault("rank", None)
    prog(1.0, "done")
    return FMResult(rows=[r for r, _ in pairs_out], designs=[d for _, d in pairs_out],
                    request=req, n_candidates=int(N), n_screened_feasible=int(ok.sum()), message=message,
                    pull_interp_error=float(err), rejected_by=rejected_by,
                    notes=["prices are illustrative (catalogue figures), not quotes",
                           f"the search asks {100 * (SCREEN_MARGIN - 1):.0f}% more window than required; "
                           "the exact levitate path has the last word"])


def _reasons(i, C, short, req: FMRequest, pays) -> list[str]:
    """Why candidate ``i`` fails, each with by how much (empty when it meets all)."""
    out = []
    hi = pays[-1]
    if not C["holds"][i]:
        out.append(f"the lifter cannot hold the heaviest load ({hi * 1e3:.3g} g shared): its largest pull is "
                   f"{100 * (1 - 1 / (1 + C['hold_short'][i])):.3g}% short")
        return out
    wm = C["wmin"][i]
    if not np.isfinite(wm):
        out.append(f"no stable plate distance at some payload: the plates' stiffness at the smallest plate "
                   f"distance is {100 * (1 - 1 / (1 + max(C['stiff_short'][i], 0))):.3g}% short of the lifter's")
    elif wm < SCREEN_MARGIN * req.min_window_m:
        need = SCREEN_MARGIN * req.min_window_m
        out.append(f"narrowest window {wm * 1e3:.3g} mm over the range, {(need - wm) * 1e3:.2g} mm short of "
                   f"{need * 1e3:.3g} mm (the required {req.min_window_m * 1e3:.3g} mm plus the search's "
                   f"{100 * (SCREEN_MARGIN - 1):.0f}% margin)")
    if "height" in short and short["height"][i] > 0:
        out.append(f"height {C['height'][i] * 1e3:.4g} mm, {(C['height'][i] - req.envelope_m[1]) * 1e3:.3g} mm "
                   f"over the envelope's {req.envelope_m[1] * 1e3:.4g} mm")
    if "width" in short and short["width"][i] > 0:
        out.append(f"width {C['width'][i] * 1e3:.4g} mm, {(C['width'][i] - req.envelope_m[0]) * 1e3:.3g} mm "
                   f"over the envelope's {req.envelope_m[0] * 1e3:.4g} mm")
    if "budget" in short and short["budget"][i] > 0:
        cost = C["cost"][i]
        out.append("no price for a grade or material" if np.isnan(cost) else
                   f"cost {cost:.3g} USD, {cost - req.budget_usd:.3g} USD over the budget")
    return out


def design_of(r: dict, req: FMRequest):
    """The design file document of a search row, parsed into a
    :class:`~matdb.design.model.StabilizedDesign` (demo: a suggestion, not a tested
    build)."""
    def mm(v):
        return f"{v * 1e3:.6g} mm"

    lo, hi = req.payload_range_kg
    lifter = {"shape": r["lifter_shape"], "size": [mm(v) for v in r["lifter_size_m"]], "grade": r["lifter_grade"]}
    floater = {"shape": r["floater_shape"], "size": [mm(v) for v in r["floater_size_m"]], "grade": r["floater_grade"]}
    plates = {"material": r["material"], "thickness": mm(r["thickness_m"]), "distance": mm(r["plate_distance_m"]),
              "clearance": mm(req.clearance_m), "width": mm(r["plate_width_m"])}
    doc = {
        "name": "demo: suggested floating-magnet design",
        "description": (f"demo suggestion of matdb optimise --floating-magnet for {lo * 1e3:.4g} g to "
                        f"{hi * 1e3:.4g} g; check it before building"),
        "payload_range": f"{lo * 1e3:.6g} g..{hi * 1e3:.6g} g",
        "conditions": {"temperature": f"{req.temperature_k:.6g} K"},
        "lifter": lifter, "plates": plates,
    }
    n = r["stations"]
    if n == 1:
        doc["floater"] = dict(floater, payload=f"{hi * 1e3:.6g} g")
    else:
        doc["floater"] = floater
        s = max(3 * (r["lifter_distance_empty_m"] or 0.0), 2 * _width(r["lifter_shape"], r["lifter_size_m"]))
        if n == 2:
            pos = [(-s / 2, 0.0), (s / 2, 0.0)]
        else:
            R = s / math.sqrt(3)
            pos = [(R * math.cos(th), R * math.sin(th)) for th in (math.pi / 2, math.pi * 7 / 6, math.pi * 11 / 6)]
        doc["station"] = [{"x": mm(round(x, 9)), "y": mm(round(y, 9))} for x, y in pos]
        doc["payload"] = {"mass": f"{hi * 1e3:.6g} g", "centre_of_mass": ["0 mm", "0 mm"]}
    return parse_stabilized(doc)


def records(result: FMResult) -> list[dict]:
    """The shown designs as JSON-ready records (each with ``window_min_m`` and
    ``feasible``)."""
    return [dict(r) for r in result.rows]
