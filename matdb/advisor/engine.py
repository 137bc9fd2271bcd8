"""Selection advisor: rank plate-material x magnet-grade x arrangement candidates.

The question it answers: "this payload (mass, footprint) must float at least this high,
between these temperatures, within this budget: which plate material, which grade,
which arrangement, and how sure can I be?"

How it stays fast
-----------------
The field of an arrangement of one remanence is linear in ``B_r``, and every force and
stiffness of a weak diamagnet is linear in ``(|chi_perp|, |chi_par|)`` and in ``B_r^2``
(:mod:`matdb.physics.plate`). So each *geometry* (arrangement x plate footprint) is
integrated once at unit polarisation, split by field component, and every grade (its
``B_r^2``), temperature (:func:`matdb.physics.thermal.lift_factor`) and material (its two
chi parts) is a multiplication. The gravity term of the tilt stiffness does not scale:
the stiffness matrix is tabulated about the plate's own centre and moved to the combined
centre of mass of each candidate, which adds ``-h W`` (``h`` the height of that centre
above the plate's, ``W`` the weight) besides the scaled terms (:func:`_screen_tilt`).

Two levels of precision:

* **Screening** (every candidate): the lift at the required gap, the equilibrium gaps,
  ``k_z`` and the lateral stiffnesses come from per-geometry tables on a height grid,
  integrated with a coarser rule of :func:`matdb.physics.plate.plane_integrals` (about
  1e-4 relative from the exact rule), gaps and stiffnesses interpolated between heights.
  Tilt (and the coupled sliding-tilting matrices) is screened for the first rows shown
  (``tilt_rows``, column ``tilt_checked``), tables computed only at the gaps needed.
* **Exact** (the first ``polish`` rows, default 1): the same steps as
  :func:`matdb.analysis.levitate.levitate_plate` -- lift curve, highest stable root, vertical
  stiffness, full stiffness matrix about the combined centre of mass, worst case -- but
  evaluated from unit-polarisation integrals scaled per candidate. Column ``exact``
  says which rows are.

Unit-polarisation integrals are cached in memory and on disk (``MATDB_CACHE_DIR``, else
the user cache directory), keyed by a hash of the geometry, the quadrature settings,
:data:`CODE_VERSION` and the source of the field, plate and thermal modules (a change there
recomputes).

Score and Pareto front
----------------------
``score = w_margin ln(margin) - w_cost ln(cost / 1 USD) - w_derating derating_pct / 10``
(higher is better; ``margin`` is the worst-case lift / weight at the required gap). The
Pareto front is taken over the feasible candidates on (margin up, cost down, derating
down): a candidate is on it when no other feasible candidate is at least as good on all
three and better on one.
"""

from __future__ import annotations

import hashlib
import json
import math
import os
import re
import contextvars
import threading
from contextlib import contextmanager
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any, Sequence

import numpy as np
import pandas as pd

from matdb import limits as _limits
from matdb.errors import InputError
from matdb.constants import G_STANDARD, MU0, T_REF_K, kelvin_to_celsius
from matdb.units import parse_length, parse_mass, parse_quantity, parse_temperature

CODE_VERSION = "advisor-1"

#: standard cube edges [m] and cylinder (diameter, height) [m] of the default arrangements
STANDARD_CUBES_M = (6.35e-3, 10e-3, 12.7e-3, 19.05e-3, 25.4e-3)
STANDARD_CYLINDERS_M = ((10e-3, 5e-3), (12.7e-3, 6.35e-3), (20e-3, 10e-3))
DEFAULT_THICKNESSES_M = (0.5e-3, 1e-3, 2e-3)
DEFAULT_PATTERNS = ("checkerboard", "stripes")
MAX_MAGNETS = _limits.MAX_MAGNETS  # default arrangements with more magnets are skipped (cost grows with count)
MIN_PLATE_THICKNESS_M = 5e-5  # thinnest plate proposed when the thickness is matched to a total mass
MAX_PLATE_THICKNESS_M = 5e-3  # thickest plate proposed when the thickness is matched to a total mass
#: with a total mass and no fixed plate, plates of these fractions of the footprint are ranked
#: (a plate as wide as a checkerboard is often laterally unstable over it)
PLATE_FRACTIONS = (1.0, 0.8, 0.65)

#: screening height grid [m]: 0.05 to 0.2 mm, 0.25 mm steps to 6 mm, then wider to 20 mm
SCREEN_HEIGHTS_M = np.concatenate([[5e-5, 1e-4, 1.5e-4, 2e-4], np.arange(1, 25) * 2.5e-4,
                                   [7e-3, 8.5e-3, 1e-2, 1.3e-2, 1.6e-2, 2e-2]])
SCREEN_ORDER = 4  # Gauss-Legendre nodes per panel of the screening rule
SCREEN_RULE_FLOOR_M = 5e-4  # the screening rule is graded no finer than for this height
LATERAL_STEP_M = 1e-6  # central difference of w across a side face
EXACT_ORDER = 8  # = matdb.physics.plate.DEFAULT_ORDER (kept equal: checked in tests)
TILT_ORDER = 3  # tilt tables: diagonal within about 1e-3 of order 8, couplings a few %

COLUMNS = ["rank", "material", "grade", "family", "arrangement", "pattern", "shape",
           "size_m", "rows", "cols", "thickness_m", "feasible", "lift_per_area_n_m2",
           "gap_m", "gap_worst_m", "margin", "margin_nominal", "laterally_stable",
           "derating_pct", "cost_usd", "score", "pareto", "reasons", "notes", "exact",
           "plate_mass_kg", "payload_kg", "array_w_m", "array_l_m", "array_h_m", "magnet_count"]


# ---------------------------------------------------------------------------
# inputs
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Weights:
    """Weights of the score terms (zero or more)."""

    margin: float = 1.0
    cost: float = 1.0
    derating: float = 1.0


@dataclass(frozen=True)
class AdviceRequest:
    """What the user asked, in SI (kg, m, K, USD)."""

    mass_kg: float
    footprint_m: tuple[float, float]
    plate_m: tuple[float, float]
    min_gap_m: float = 2e-4
    temp_min_k: float = T_REF_K
    temp_max_k: float = T_REF_K
    budget_usd: float | None = None
    materials: tuple[str, ...] | None = None
    families: tuple[str, ...] | None = None
    grades: tuple[str, ...] | None = None
    max_magnet_size_m: float | None = None
    thicknesses_m: tuple[float, ...] = DEFAULT_THICKNESSES_M
    weights: Weights = field(default_factory=Weights)
    payload_height_m: float = 0.0
    #: plate plus payload [kg]; when set, ``mass_kg`` is 0 and each candidate's payload is
    #: this minus its plate's mass (the plate thickness is matched to it per material)
    total_mass_kg: float | None = None
    #: bounding box of the magnet array (width x, length y, height z) [m]
    envelope_m: tuple[float, float, float] | None = None
    #: the thicknesses were typed (not the default list)
    thickness_given: bool = False
    #: plate outlines to rank (default: ``plate_m`` alone) [m]
    plate_options: tuple = ()

    @property
    def plates(self) -> tuple:
        return self.plate_options or (self.plate_m,)

    @property
    def total_mode(self) -> bool:
        return self.total_mass_kg is not None

    def payload_for(self, plate_mass_kg):
        """Payload on a plate of this mass [kg] (negative: the plate alone is too heavy)."""
        if self.total_mass_kg is None:
            return self.mass_kg + 0.0 * np.asarray(plate_mass_kg)
        return self.total_mass_kg - np.asarray(plate_mass_kg)


_SEP_RE = re.compile(r"\s*(?:[x×X*]|\bby\b)\s*")
_NUM_RE = r"[-+]?(\d+\.?\d*|\.\d+)([eE][-+]?\d+)?"


def parse_dimensions(text, n: int, field_name: str, example: str) -> tuple[float, ...]:
    """``n`` lengths typed as ``"20 mm x 20 mm"``, ``"20x20 mm"`` or ``"20 by 20 mm"``
    (a bare number takes the unit of the last length) -> [m], all positive."""
    if isinstance(text, (tuple, list)):
        if len(text) != n:
            raise InputError(f"{field_name}: expected {n} lengths such as {example!r}, got {text!r}")
        vals = [_length_si(v, field_name) for v in text]
    else:
        s = str(text).strip()
        parts = [q for q in _SEP_RE.split(s)]
        if len(parts) != n or not all(parts):
            raise InputError(f"{field_name}: expected {n} lengths such as {example!r}, got {text!r}")
        unit = re.sub(r"^" + _NUM_RE + r"\s*", "", parts[-1])
        fixed = []
        for q in parts:
            if re.fullmatch(_NUM_RE, q):
                if not unit or unit == parts[-1]:
                    raise InputError(f"{field_name}: missing unit in {text!r}; expected e.g. {example!r}")
                q = f"{q} {unit}"
            fixed.append(q)
        try:
            vals = [parse_length(q, field_name, positive=True) for q in fixed]
        except InputError as exc:
            raise InputError(f"{field_name}: expected {n} lengths such as {example!r}, got {text!r} "
                             f"({str(exc).split(': ', 1)[-1]})") from None
    if not all(v > 0 for v in vals):
        raise InputError(f"{field_name}: expected positive lengths, got {text!r}")
    return tuple(float(v) for v in vals)


def parse_footprint(text, field_name: str = "--footprint") -> tuple[float, float]:
    """``"17 mm x 17 mm"``, ``"17x17 mm"``, ``"17 by 17 mm"`` or ``"17 mm"`` (a square)
    -> (x, y) [m]."""
    if not isinstance(text, (tuple, list)) and len(_SEP_RE.split(str(text).strip())) == 1:
        v = parse_dimensions(text, 1, field_name, "17 mm x 17 mm")[0]
        return v, v
    return parse_dimensions(text, 2, field_name, "17 mm x 17 mm")  # type: ignore[return-value]


def parse_envelope(text, field_name: str = "--magnet-envelope") -> tuple[float, float, float]:
    """``"24 x 24 x 15 mm"`` (width x length x height of the magnet array) -> [m]."""
    return parse_dimensions(text, 3, field_name, "24 mm x 24 mm x 15 mm")  # type: ignore[return-value]


def parse_weights(text) -> Weights:
    """``"margin=1,cost=0.5,derating=1"`` (any subset) or a dict -> :class:`Weights`."""
    if text is None:
        return Weights()
    if isinstance(text, Weights):
        return text
    if isinstance(text, dict):
        items = list(text.items())
    else:
        items = []
        for part in str(text).split(","):
            if not part.strip():
                continue
            if "=" not in part:
                raise InputError(f"--weights: expected name=value pairs such as 'margin=1,cost=1,derating=1', got {text!r}")
            k, v = part.split("=", 1)
            items.append((k.strip(), v.strip()))
    out = asdict(Weights())
    for k, v in items:
        if k not in out:
            raise InputError(f"--weights: unknown weight {k!r}; expected margin, cost or derating")
        try:
            f = float(v)
        except (TypeError, ValueError):
            raise InputError(f"--weights: expected a number for {k}, got {v!r}") from None
        if not math.isfinite(f) or f < 0:
            raise InputError(f"--weights: expected a weight of zero or more for {k}, got {v!r}")
        out[k] = f
    return Weights(**out)


def _length_si(v, field_name: str) -> float:
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        if not (math.isfinite(v) and v >= 0):
            raise InputError(f"{field_name}: expected a length of zero or more, got {v!r}")
        return float(v)
    return parse_length(v, field_name)


def _temp_si(v, field_name: str) -> float:
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        if not (math.isfinite(v) and v > 0):
            raise InputError(f"{field_name}: expected an absolute temperature in K, got {v!r}")
        return float(v)
    return parse_temperature(v, field_name)


def _names(values, field_name: str) -> tuple[str, ...] | None:
    if values is None:
        return None
    if isinstance(values, str):
        values = [values]
    out = []
    for v in values:
        for part in str(v).split(","):
            if part.strip():
                out.append(part.strip())
    if not out:
        raise InputError(f"{field_name}: expected at least one name")
    return tuple(out)


def _mass_si(v, field_name: str) -> float:
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        if not (math.isfinite(v) and v >= 0):
            raise InputError(f"{field_name}: expected a mass of zero or more, got {v!r}")
        return float(v)
    return parse_mass(v, field_name)


def parse_request(mass=None, footprint=None, *, min_gap="0.2 mm", temp_min="20 degC",
                  temp_max="20 degC", budget=None, materials=None, families=None, grades=None,
                  max_magnet_size=None, thickness=None, plate_size=None, weights=None,
                  payload_height="0 mm", total_mass=None, envelope=None) -> AdviceRequest:
    """Parse what a person typed (strings with units; numbers are taken as SI).

    Give ``mass`` (the payload on top of the plate) or ``total_mass`` (plate plus payload:
    each candidate's plate thickness is then matched to it). ``footprint`` is required;
    ``plate_size`` fixes the plate outline (default: the footprint); ``envelope``
    ("W x L x H") bounds the magnet array.
    """
    def _s(v):
        return v.strip() if isinstance(v, str) else v

    (mass, footprint, min_gap, temp_min, temp_max, budget, max_magnet_size, plate_size, payload_height,
     total_mass, envelope) = (
        _s(v) for v in (mass, footprint, min_gap, temp_min, temp_max, budget, max_magnet_size,
                        plate_size, payload_height, total_mass, envelope))
    if mass in ("", None) and total_mass in ("", None):
        raise InputError("--mass/--total-mass: expected one of them, e.g. --mass '0.2 g' (payload) "
                         "or --total-mass '0.3 g' (plate plus payload)")
    if mass not in ("", None) and total_mass not in ("", None):
        raise InputError("--total-mass: expected either --mass (payload) or --total-mass (plate plus "
                         "payload), not both")
    total = None
    if total_mass not in ("", None):
        total = _mass_si(total_mass, "--total-mass")
        if total <= 0:
            raise InputError(f"--total-mass: expected a positive mass, got {total_mass!r}")
        m = 0.0
    else:
        m = _mass_si(mass, "--mass")
    if footprint in ("", None):
        raise InputError("--footprint: expected the plate outline, e.g. '20 mm x 20 mm'")
    fp = parse_footprint(footprint, "--footprint")
    plate = parse_footprint(plate_size, "--plate-size") if plate_size not in ("", None) else fp
    env = parse_envelope(envelope, "--magnet-envelope") if envelope not in ("", None) else None
    gap = _length_si(min_gap, "--min-gap")
    t_lo = _temp_si(temp_min, "--temp-min")
    t_hi = _temp_si(temp_max, "--temp-max")
    if t_lo > t_hi:
        raise InputError(f"--temp-min: expected at most --temp-max, got {temp_min!r} > {temp_max!r}")
    b = None
    if budget is not None:
        if isinstance(budget, (int, float)) and not isinstance(budget, bool):
            b = float(budget)
        else:
            b = parse_quantity(budget, "USD", "--budget", require_unit=False)
        if not (math.isfinite(b) and b >= 0):
            raise InputError(f"--budget: expected an amount of zero or more, got {budget!r}")
    mms = None
    if max_magnet_size is not None:
        mms = _length_si(max_magnet_size, "--max-magnet-size")
        if mms <= 0:
            raise InputError(f"--max-magnet-size: expected a positive length, got {max_magnet_size!r}")
    th = DEFAULT_THICKNESSES_M
    if thickness is not None and thickness != () and thickness != []:
        items = [thickness] if isinstance(thickness, (str, int, float)) else list(thickness)
        vals = []
        for it in items:
            parts = str(it).split(",") if isinstance(it, str) else [it]
            for p in parts:
                v = _length_si(p.strip() if isinstance(p, str) else p, "--thickness")
                if v <= 0:
                    raise InputError(f"--thickness: expected a positive length, got {p!r}")
                vals.append(v)
        if not vals:
            raise InputError("--thickness: expected at least one thickness such as '1 mm'")
        th = tuple(sorted(set(vals)))
    ph = _length_si(payload_height, "--payload-height")
    plates = ()
    if total is not None and plate_size in ("", None):
        plates = tuple((fp[0] * f, fp[1] * f) for f in PLATE_FRACTIONS)
    return AdviceRequest(mass_kg=m, footprint_m=fp, plate_m=plate, min_gap_m=gap, temp_min_k=t_lo,
                         temp_max_k=t_hi, budget_usd=b, materials=_names(materials, "--material"),
                         families=_names(families, "--family"), grades=_names(grades, "--grade"),
                         max_magnet_size_m=mms, thicknesses_m=th, weights=parse_weights(weights),
                         payload_height_m=ph, total_mass_kg=total, envelope_m=env,
                         thickness_given=th is not DEFAULT_THICKNESSES_M, plate_options=plates)


# ---------------------------------------------------------------------------
# arrangements
# ---------------------------------------------------------------------------
def _mm_text(v: float) -> str:
    return f"{v * 1e3:.4g}"


@dataclass(frozen=True)
class ArrangementSpec:
    """A magnet arrangement by the matdb conventions (sizes in metres)."""

    shape: str  # "cuboid" or "cylinder"
    size: tuple[float, ...]  # cuboid (x, y, h); cylinder (d, h)
    pattern: str
    rows: int
    cols: int
    spacing: float = 0.0
    back_plate: bool = False

    @property
    def count(self) -> int:
        return self.rows * self.cols

    @property
    def pitch(self) -> tuple[float, float]:
        fx = self.size[0]
        fy = self.size[1] if self.shape == "cuboid" else self.size[0]
        return fx + self.spacing, fy + self.spacing

    @property
    def extent(self) -> tuple[float, float]:
        px, py = self.pitch
        return self.cols * px - self.spacing, self.rows * py - self.spacing

    @property
    def max_dimension(self) -> float:
        return float(max(self.size))

    @property
    def height(self) -> float:
        """Height of the array (the magnets' height) [m]."""
        return float(self.size[-1])

    def envelope_excess(self, envelope_m) -> tuple[float, float, float]:
        """How far the array's width, length and height exceed ``envelope_m`` [m] (0 inside)."""
        if envelope_m is None:
            return (0.0, 0.0, 0.0)
        w, ln = self.extent
        return (max(0.0, w - envelope_m[0]), max(0.0, ln - envelope_m[1]),
                max(0.0, self.height - envelope_m[2]))

    @property
    def magnet_volume_m3(self) -> float:
        if self.shape == "cuboid":
            v = self.size[0] * self.size[1] * self.size[2]
        else:
            v = math.pi / 4 * self.size[0] ** 2 * self.size[1]
        return v * self.count

    @property
    def description(self) -> str:
        if self.shape == "cuboid":
            a, b, h = self.size
            what = (f"{_mm_text(a)} mm cubes" if a == b == h
                    else f"{_mm_text(a)}x{_mm_text(b)}x{_mm_text(h)} mm blocks")
        else:
            what = f"{_mm_text(self.size[0])}x{_mm_text(self.size[1])} mm cylinders"
        extra = " on a steel back plate" if self.back_plate else ""
        gap = f", {_mm_text(self.spacing)} mm apart" if self.spacing else ""
        return f"{self.rows}x{self.cols} {self.pattern} of {what}{gap}{extra}"

    def build(self, br: float = 1.0, grade: str | None = None):
        from matdb.physics.arrangement import build_arrangement

        return build_arrangement(self.shape, self.size, self.pattern, self.rows, self.cols,
                                 self.spacing, br=br, back_plate=self.back_plate, grade=grade)

    def key(self) -> dict:
        return {"shape": self.shape, "size": [repr(float(s)) for s in self.size],
                "pattern": self.pattern, "rows": self.rows, "cols": self.cols,
                "spacing": repr(float(self.spacing)), "back_plate": self.back_plate}

    def record(self) -> dict:
        return {"description": self.description, "pattern": self.pattern, "shape": self.shape,
                "size_m": [float(s) for s in self.size], "rows": self.rows, "cols": self.cols}


def _counts(length: float, pitch: float) -> list[int]:
    n = max(2, int(round(length / pitch)))
    return [n, n + 1]


def default_arrangements(plate_m: tuple[float, float], max_magnet_size_m: float | None = None,
                         patterns: Sequence[str] = DEFAULT_PATTERNS,
                         envelope_m: tuple[float, float, float] | None = None) -> list[ArrangementSpec]:
    """Checkerboards and stripes of the standard cubes and cylinders, rows x cols scaled to
    the plate: about as many magnets as cover it, and one more per axis (so some
    arrangements are larger than the plate); with an envelope, also the most magnets that
    fit inside it."""
    sizes: list[tuple[str, tuple[float, ...]]] = [("cuboid", (a, a, a)) for a in STANDARD_CUBES_M]
    sizes += [("cylinder", (d, h)) for d, h in STANDARD_CYLINDERS_M]
    out: list[ArrangementSpec] = []
    for shape, size in sizes:
        if max_magnet_size_m is not None and max(size) > max_magnet_size_m * (1 + 1e-9):
            continue
        p = size[0]
        pairs = list(zip(_counts(plate_m[0], p), _counts(plate_m[1], p)))
        if envelope_m is not None:
            fit = (int(envelope_m[0] // p + 1e-9), int(envelope_m[1] // p + 1e-9))
            if min(fit) >= 2 and fit not in pairs:
                pairs.append(fit)
        for nc, nr in pairs:
            if nr * nc > MAX_MAGNETS:
                continue
            for pat in patterns:
                out.append(ArrangementSpec(shape, tuple(size), pat, nr, nc))
    return out


# ---------------------------------------------------------------------------
# cache of unit-polarisation integrals
# ---------------------------------------------------------------------------
def cache_dir() -> Path:
    """``MATDB_CACHE_DIR`` or the user cache directory, with an ``advisor`` sub-folder."""
    env = os.environ.get("MATDB_CACHE_DIR")
    if env:
        base = Path(env)
    else:
        from platformdirs import user_cache_dir

        base = Path(user_cache_dir("matdb"))
    return base / "advisor"


_FINGERPRINT: str | None = None


def _physics_fingerprint() -> str:
    """Hash of the field and plate code, so a change there invalidates cached integrals."""
    global _FINGERPRINT
    if _FINGERPRINT is None:
        h = hashlib.sha256(CODE_VERSION.encode())
        here = Path(__file__).resolve().parent.parent / "physics"
        for name in ("fields.py", "arrangement.py", "plate.py", "plate_geometry.py", "plate_lift.py",
                     "plate_stiffness.py", "plate_intervals.py", "quadrature.py", "thermal.py", "recoil.py"):
            try:
                h.update((here / name).read_bytes())
            except OSError:
                h.update(name.encode())
        _FINGERPRINT = h.hexdigest()[:16]
    return _FINGERPRINT


def _hkey(h: float) -> int:
    """Dictionary key of a height: the float's bits (exact reuse only)."""
    return int(np.float64(h).view(np.int64))


class GeometryData:
    """Unit-polarisation integrals of one arrangement under one plate footprint.

    Stores (all at ``B_r = 1 T``, split by field component):

    * ``exact``: footprint integrals of ``B_z^2`` and ``B_x^2 + B_y^2`` at single heights
      with the quadrature of :func:`matdb.physics.plate.plane_integrals` (order
      :data:`EXACT_ORDER`, graded for each height);
    * ``coarse``: the same on the screening rule;
    * ``lateral``: line integrals across the side faces of ``d(B_z^2)/dn`` and
      ``d(B_x^2+B_y^2)/dn`` (x faces, then y faces) per height, screening rule;
    * ``hmax``: the largest reverse field along the magnetisation found by
      :func:`matdb.physics.thermal.demag_check` at unit polarisation [A/m];
    * ``curves``: memo of per-thickness quantities from the exact path (keyed by text).
    """

    def __init__(self, spec: ArrangementSpec, plate_m: tuple[float, float],
                 chi_rec: float = 0.0):
        from matdb.physics import plate as P

        self.spec = spec
        self.plate_m = (float(plate_m[0]), float(plate_m[1]))
        self.chi_rec = float(chi_rec)
        # unit remanence, each magnet on its recoil line (linear in Br: scaled later)
        self.unit = spec.build(1.0).with_recoil([self.chi_rec] * spec.count)
        bx, by = P.edge_lines(self.unit.magnets)
        self.breaks = (bx, by)
        self.geom = P.PlateGeometry("rectangle", self.plate_m[0], self.plate_m[1], 1e-3, 0.0, 0.0, bx, by)
        key = {"v": CODE_VERSION, "arr": spec.key(), "plate": [repr(v) for v in self.plate_m],
               "exact_order": EXACT_ORDER, "screen": [SCREEN_ORDER, repr(SCREEN_RULE_FLOOR_M),
                                                      repr(LATERAL_STEP_M), TILT_ORDER],
               "physics": _physics_fingerprint(), "chi_rec": repr(self.chi_rec)}
        self.key = hashlib.sha256(json.dumps(key, sort_keys=True).encode()).hexdigest()[:24]
        self.stores: dict[str, dict[int, tuple]] = {"exact": {}, "coarse": {}, "lateral": {}}
        self.hmax: float | None = None
        self.memo: dict[str, Any] = {}
        self.dirty = False
        self._loaded = False

    # -- persistence ----------------------------------------------------------
    @property
    def path(self) -> Path:
        return cache_dir() / f"{self.key}.npz"

    def load(self) -> None:
        if self._loaded:
            return
        self._loaded = True
        p = self.path
        if not p.exists():
            return
        try:
            with np.load(p, allow_pickle=False) as z:
                for f in z.files:
                    if f.endswith("_h"):
                        name = f[:-2]
                        hs, vals = z[f], z[f"{name}_v"]
                        st = self.stores.setdefault(name, {})
                        for h, v in zip(hs, vals):
                            st[_hkey(h)] = tuple(float(x) for x in v)
                if "hmax" in z:
                    self.hmax = float(z["hmax"])
                if "memo" in z:
                    self.memo.update(json.loads(str(z["memo"])))
        except Exception:  # a damaged cache file is recomputed, never trusted
            self.stores = {"exact": {}, "coarse": {}, "lateral": {}}
            self.hmax = None

    def save(self) -> None:
        if not self.dirty:
            return
        d = cache_dir()
        d.mkdir(parents=True, exist_ok=True)
        arrays: dict[str, Any] = {}
        for name, st in self.stores.items():
            if st:
                hs = np.array(list(st.keys()), dtype=np.int64).view(np.float64)
                arrays[f"{name}_h"] = hs
                arrays[f"{name}_v"] = np.array(list(st.values()), dtype=float)
        if self.hmax is not None:
            arrays["hmax"] = np.array(self.hmax)
        arrays["memo"] = np.array(json.dumps(self.memo))
        tmp = d / f".{self.key}.{os.getpid()}.{threading.get_ident()}.tmp.npz"
        np.savez(tmp, **arrays)
        os.replace(tmp, self.path)
        self.dirty = False

    # -- integrals --------------------------------------------------------------
    def _fill(self, name: str, heights: np.ndarray, compute) -> np.ndarray:
        self.load()
        st = self.stores[name]
        hs = np.asarray(heights, dtype=float).ravel()
        missing = sorted({float(h) for h in hs if _hkey(h) not in st})
        if missing:
            vals = compute(np.asarray(missing))
            for h, v in zip(missing, vals):
                st[_hkey(h)] = tuple(float(x) for x in v)
            self.dirty = True
        return np.array([st[_hkey(h)] for h in hs], dtype=float).reshape(len(hs), -1)

    def exact(self, heights) -> np.ndarray:
        """(n, 2): ``int B_z^2 dA``, ``int (B_x^2 + B_y^2) dA`` [T^2 m^2] at unit polarisation,
        each height on its own rule (as :func:`matdb.physics.plate.plate_surface_integrals`)."""
        from matdb.physics import plate as P

        def compute(h):
            iz, ixy = P.plane_integrals(self.unit.B, self.geom, h, EXACT_ORDER)
            return np.column_stack([iz, ixy])

        return self._fill("exact", heights, compute)

    def coarse(self, heights) -> np.ndarray:
        """Like :meth:`exact` on the screening rule."""
        from matdb.physics import plate as P

        def compute(h):
            iz, ixy = P.plane_integrals(self.unit.B, self.geom, h, SCREEN_ORDER,
                                        rule_heights=np.maximum(h, SCREEN_RULE_FLOOR_M))
            return np.column_stack([iz, ixy])

        return self._fill("coarse", heights, compute)

    def lateral(self, heights) -> np.ndarray:
        """(n, 4): per height, ``int [d_x w]_(+x face) - [d_x w]_(-x face) dy`` for the
        ``B_z^2`` and ``B_x^2+B_y^2`` parts, then the same across the y faces [T^2]."""
        from matdb.physics import plate as P

        lx, ly = self.plate_m
        bx, by = self.breaks
        d = LATERAL_STEP_M

        def compute(hs):
            pts, wts, idx, comp = [], [], [], []
            for i, h in enumerate(hs):
                scale = max(float(h), SCREEN_RULE_FLOOR_M)
                yb = P.graded_breaks(-ly / 2, ly / 2, by, scale)
                y, wy = P.gauss_panels(yb, SCREEN_ORDER)
                xb = P.graded_breaks(-lx / 2, lx / 2, bx, scale)
                x, wx = P.gauss_panels(xb, SCREEN_ORDER)
                for face in (1.0, -1.0):
                    for s in (1.0, -1.0):  # x faces, central difference in x
                        pts.append(np.column_stack([np.full(y.size, face * lx / 2 + s * d), y,
                                                    np.full(y.size, h)]))
                        wts.append(wy * s * face / (2 * d))
                        idx.append(np.full(y.size, i))
                        comp.append(np.zeros(y.size, dtype=int))
                    for s in (1.0, -1.0):  # y faces
                        pts.append(np.column_stack([x, np.full(x.size, face * ly / 2 + s * d),
                                                    np.full(x.size, h)]))
                        wts.append(wx * s * face / (2 * d))
                        idx.append(np.full(x.size, i))
                        comp.append(np.ones(x.size, dtype=int))
            p = np.concatenate(pts)
            b = self.unit.B(p)
            w = np.concatenate(wts)
            ii = np.concatenate(idx)
            cc = np.concatenate(comp)
            wz = b[:, 2] ** 2
            wxy = b[:, 0] ** 2 + b[:, 1] ** 2
            out = np.zeros((len(hs), 4))
            for c in (0, 1):
                sel = cc == c
                out[:, 2 * c] = np.bincount(ii[sel], weights=(w * wz)[sel], minlength=len(hs))
                out[:, 2 * c + 1] = np.bincount(ii[sel], weights=(w * wxy)[sel], minlength=len(hs))
            return out

        return self._fill("lateral", heights, compute)

    def tilt(self, thickness: float, gaps) -> np.ndarray:
        """(n, 2, 4, 4): stiffness matrices over (x, y, roll, pitch) about the plate's own
        centre, split by chi part, at unit polarisation (Gauss-Legendre order
        :data:`TILT_ORDER`), for a plate of ``thickness`` at each gap."""
        from matdb.physics import plate as P

        geom = P.PlateGeometry("rectangle", self.plate_m[0], self.plate_m[1], float(thickness),
                               0.0, 0.0, *self.breaks)

        def compute(gs):
            out = []
            for g in gs:
                k = P.stiffness_split(self.unit.B, geom, float(g), (0.0, 0.0, float(g) + thickness / 2),
                                      TILT_ORDER, dofs=(0, 1, 3, 4))
                out.append(k.ravel())
            return np.array(out)

        name = f"tilt{int(round(thickness * 1e9))}"
        self.stores.setdefault(name, {})
        return self._fill(name, gaps, compute).reshape(-1, 2, 4, 4)

    def demag_hmax(self) -> float:
        """Largest reverse field along the magnetisation at unit polarisation [A/m]."""
        self.load()
        if self.hmax is None:
            from matdb.physics import thermal as TH

            knee = TH.KNEE_FRACTION["NdFeB"][0]
            # the idealised (rigid) magnets: their reverse field is a little larger than
            # on the recoil line, so the check errs on the safe side (as levitate's)
            r = TH.demag_check(self.spec.build(1.0), 1.0, 0.0, "NdFeB", [T_REF_K])
            self.hmax = float(r.worst_ratio * knee)
            self.dirty = True
        return self.hmax


_GEOMETRIES: dict[tuple, GeometryData] = {}


SCREEN_CHI_REC = 0.05  # recoil susceptibility of the screening integrals (sintered NdFeB)


def grade_chi_rec(grade) -> float:
    """``mu_rec - 1`` of a grade (0 when the table has no mu_rec)."""
    mu = getattr(grade, "mu_rec", None)
    return 0.0 if mu is None else float(mu) - 1.0


def geometry(spec: ArrangementSpec, plate_m: tuple[float, float],
             chi_rec: float = SCREEN_CHI_REC) -> GeometryData:
    """The (memory-cached) :class:`GeometryData` of ``spec`` under a plate of ``plate_m``,
    magnets of recoil susceptibility ``chi_rec`` (screening: :data:`SCREEN_CHI_REC` for
    every grade; the exact path: the grade's own)."""
    k = (spec, float(plate_m[0]), float(plate_m[1]), float(chi_rec))
    g = _GEOMETRIES.get(k)
    if g is None:
        g = GeometryData(spec, plate_m, chi_rec)
        _GEOMETRIES[k] = g
    return g


def clear_memory_cache() -> None:
    """Forget the in-memory geometry cache (the disk cache stays)."""
    _GEOMETRIES.clear()


# ---------------------------------------------------------------------------
# candidates
# ---------------------------------------------------------------------------
def _select_materials(req: AdviceRequest, url=None):
    from matdb.data import catalog

    if req.materials:
        return [catalog.get_material(m, url) for m in req.materials]
    return catalog.list_materials(url)


def _select_grades(req: AdviceRequest, url=None):
    from matdb.data import catalog

    grades = catalog.list_grades(url)
    if req.grades:
        wanted = [catalog.get_grade(g, url).grade for g in req.grades]
        grades = [g for g in grades if g.grade in wanted]
    if req.families:
        want = {catalog.check_family(f, "--family") for f in req.families}
        grades = [g for g in grades if g.family in want]
    if not grades:
        raise InputError("--grade/--family: no magnet grade matches the restrictions")
    return grades


def _fnum(x, none=np.nan) -> float:
    return none if x is None else float(x)


def _brf(alpha_pct, t_k):
    return 1.0 + np.asarray(alpha_pct, dtype=float) / 100.0 * (t_k - T_REF_K)


def _lin(coeff, t_k):
    c = np.nan_to_num(np.asarray(coeff, dtype=float), nan=0.0)
    return 1.0 + c * (t_k - T_REF_K)


def _highest_root_grid(G: np.ndarray, y: np.ndarray, gaps: np.ndarray):
    """Highest g with G(g) = y on tabulated curves (rows of G), log-linear between nodes.

    Returns (gap or nan, index i of the bracketing node, fraction) per row.
    """
    m = np.maximum.accumulate(G[:, ::-1], axis=1)[:, ::-1]  # max over g' >= g
    count = np.sum(m >= y[:, None], axis=1)
    n = G.shape[1]
    ok = (count > 0) & (count < n) & (y > 0)
    i = np.clip(count - 1, 0, n - 2)
    r = np.arange(G.shape[0])
    g0, g1 = G[r, i], G[r, i + 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        pos = (g0 > 0) & (g1 > 0)
        fr_log = (np.log(y) - np.log(g0)) / (np.log(g1) - np.log(g0))
        fr_lin = (y - g0) / (g1 - g0)
        fr = np.where(pos, fr_log, fr_lin)
    fr = np.clip(np.nan_to_num(fr, nan=0.0), 0.0, 1.0)
    gap = np.where(ok, gaps[i] + fr * (gaps[i + 1] - gaps[i]), np.nan)
    return gap, i, fr


def _interp_rows(tab: np.ndarray, rows: np.ndarray, x: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Linear interpolation of ``tab[rows[k], :]`` (a function on ``grid``) at ``x[k]``."""
    xi = np.clip(x, grid[0], grid[-1])
    j = np.clip(np.searchsorted(grid, xi, side="right") - 1, 0, grid.size - 2)
    f = (xi - grid[j]) / (grid[j + 1] - grid[j])
    return tab[rows, j] * (1 - f) + tab[rows, j + 1] * f


def pareto_front(margin, cost, derating) -> np.ndarray:
    """Mask of points no other point dominates (margin up, cost down, derating down).

    NaN cost counts as the worst cost; NaN margin or derating as the worst of theirs.
    """
    m = np.nan_to_num(np.asarray(margin, dtype=float), nan=-np.inf)
    c = np.nan_to_num(np.asarray(cost, dtype=float), nan=np.inf)
    d = np.nan_to_num(np.asarray(derating, dtype=float), nan=np.inf)
    n = m.size
    dominated = np.zeros(n, dtype=bool)
    if n == 0:
        return ~dominated
    levels = np.unique(d)
    order = np.argsort(c, kind="stable")
    cs = c[order]

    def prefix_max(sel: np.ndarray):
        """cost-sorted costs and running max margin over points in ``sel``."""
        o = order[sel[order]]
        return c[o], np.maximum.accumulate(m[o]) if o.size else np.array([])

    prev = None
    for lev in levels:
        sel_le = d <= lev
        c_le, mx_le = prefix_max(sel_le)
        here = np.nonzero(d == lev)[0]
        ci, mi = c[here], m[here]
        # (c) some j with c_j <= c_i, d_j <= d_i and m_j > m_i
        k = np.searchsorted(c_le, ci, side="right") - 1
        best = np.where(k >= 0, mx_le[np.maximum(k, 0)], -np.inf)
        dom = best > mi
        # (a) some j with c_j < c_i strictly, d_j <= d_i, m_j >= m_i
        k = np.searchsorted(c_le, ci, side="left") - 1
        best = np.where(k >= 0, mx_le[np.maximum(k, 0)], -np.inf)
        dom |= best >= mi
        # (b) some j with d_j < d_i strictly, c_j <= c_i, m_j >= m_i
        if prev is not None:
            c_lt, mx_lt = prev
            k = np.searchsorted(c_lt, ci, side="right") - 1
            best = np.where(k >= 0, mx_lt[np.maximum(k, 0)], -np.inf)
            dom |= best >= mi
        dominated[here] = dom
        prev = (c_le, mx_le)
    del cs
    return ~dominated


def score_values(margin, cost, derating, weights: Weights) -> np.ndarray:
    """``w_m ln(margin) - w_c ln(cost / 1 USD) - w_d derating_pct / 10`` (NaN when unknown)."""
    m = np.asarray(margin, dtype=float)
    c = np.asarray(cost, dtype=float)
    d = np.asarray(derating, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        s = weights.margin * np.log(np.maximum(m, 1e-9)) if weights.margin else np.zeros_like(m)
        if weights.cost:
            s = s - weights.cost * np.log(np.maximum(c, 1e-6))
        if weights.derating:
            s = s - weights.derating * d / 10.0
    return s


@dataclass
class _Catalogue:
    mats: list
    grades: list
    specs: list
    thick: tuple
    #: per thickness: the material indices it is matched to (None: every material)
    thick_owner: tuple = ()


_PROGRESS: contextvars.ContextVar = contextvars.ContextVar("matdb_advisor_progress", default=None)


@contextmanager
def reporting_progress(callback):
    """Within this block, ranking calls ``callback(fraction, text)`` as it goes
    (``fraction`` from 0 to 1), so a page or a terminal can draw a progress bar."""
    token = _PROGRESS.set(callback)
    try:
        yield
    finally:
        _PROGRESS.reset(token)


def _report(fraction: float, text: str) -> None:
    cb = _PROGRESS.get()
    if cb is not None:
        cb(min(1.0, max(0.0, float(fraction))), text)


def _prepare_all(geos: list, heights: np.ndarray, lat_heights: np.ndarray) -> None:
    """Fill the integrals every candidate needs. ``MATDB_ADVISOR_THREADS`` > 1 computes cold
    geometries in threads (numpy releases the GIL); the default is one thread, since on a
    busy 2-core machine threads measured no faster."""
    def prep(g: GeometryData) -> None:
        g.coarse(heights)
        g.lateral(lat_heights)
        g.demag_hmax()
        g.save()

    cold = []
    for g in geos:
        g.load()
        st = g.stores
        if g.hmax is None or any(_hkey(h) not in st["coarse"] for h in heights) or \
                any(_hkey(h) not in st["lateral"] for h in lat_heights):
            cold.append(g)
    try:
        want = int(os.environ.get("MATDB_ADVISOR_THREADS", "1"))
    except ValueError:
        want = 1
    workers = max(1, min(len(cold), want, os.cpu_count() or 1))
    if workers <= 1:
        for i, g in enumerate(cold):
            _report(0.05 + 0.55 * i / len(cold), f"field integrals of {g.spec.description} ({i + 1} of {len(cold)})")
            prep(g)
        return
    from concurrent.futures import ThreadPoolExecutor

    cold.sort(key=lambda g: -g.spec.count * (3 if g.spec.shape == "cylinder" else 1))
    with ThreadPoolExecutor(max_workers=workers) as ex:
        list(ex.map(prep, cold))


def _evaluate(req: AdviceRequest, cat: _Catalogue) -> pd.DataFrame:
    """Screen every candidate (vectorised); returns the unsorted frame."""
    mats, grades, specs, thick = cat.mats, cat.grades, cat.specs, cat.thick
    nm, ng, ns, nt = len(mats), len(grades), len(specs), len(thick)
    if ns == 0:
        raise InputError("--max-magnet-size: no default arrangement has magnets that small")
    lx, ly = req.plate_m
    area = lx * ly
    t_op = req.temp_max_k  # nominal: typical values at the hottest temperature
    t_w = req.temp_max_k  # worst case for lift: hottest, minimum Br, low |chi|
    g_start = 5e-5
    g_req = max(req.min_gap_m, g_start)

    # per material
    chi_v = np.array([m.chi_vertical for m in mats])
    chi_h = np.array([m.chi_horizontal for m in mats])
    coeff = np.array([_fnum(m.temp_coeff_per_k, 0.0) for m in mats])
    rho_p = np.array([m.density_kg_m3 for m in mats])
    price_p = np.array([_fnum(m.price_usd_per_kg) for m in mats])
    unc_f = np.ones(nm)
    for i, m in enumerate(mats):
        ref = abs(m.chi_vertical)
        if m.uncertainty_si is not None and ref > 0:
            unc_f[i] = max(ref - abs(m.uncertainty_si), 0.0) / ref
    diamag = (chi_v < 0) & (chi_h < 0)
    cf_op = _lin(coeff, t_op)
    a_nom = -chi_v * cf_op
    b_nom = -chi_h * cf_op
    a_w = a_nom * unc_f
    b_w = b_nom * unc_f

    # per grade
    br = np.array([g.br_t for g in grades])
    br_min = np.array([(g.br_min_t * g.br_t / g.br_t) if g.br_min_t is not None else g.br_t for g in grades])
    alpha = np.array([g.alpha_br_pct_per_k for g in grades])
    beta = np.array([_fnum(g.beta_hcj_pct_per_k, 0.0) for g in grades])
    hcj = np.array([g.hcj_ka_m * 1e3 for g in grades])
    tmax_c = np.array([g.max_temp_c for g in grades])
    rho_m = np.array([g.density_kg_m3 for g in grades])
    price_m = np.array([_fnum(g.price_usd_per_kg) for g in grades])
    from matdb.physics.thermal import KNEE_FRACTION

    knee = np.array([KNEE_FRACTION.get(g.family, (0.5, ""))[0] for g in grades])
    s_nom = (br * _brf(alpha, t_op)) ** 2 / (2 * MU0)
    s_w = (br_min * _brf(alpha, t_w)) ** 2 / (2 * MU0)

    # per geometry
    geos = [geometry(s, req.plate_m) for s in specs]
    vol = np.array([s.magnet_volume_m3 for s in specs])
    grid = SCREEN_HEIGHTS_M
    th = np.asarray(thick)
    ng_ = grid.size
    # group tables (spec, thickness): lift parts on the grid, exact parts at g_req, lateral
    Zc = np.empty((ns, nt, ng_))
    Xc = np.empty((ns, nt, ng_))
    Zr = np.empty((ns, nt))
    Xr = np.empty((ns, nt))
    lat_heights = grid  # the cumulative over height is interpolated at g and g + t
    LAT = np.empty((ns, 4, lat_heights.size))
    hs_all = np.concatenate([grid, (grid[None, :] + th[:, None]).ravel(), [g_req], g_req + th])
    _prepare_all(geos, hs_all, lat_heights)
    for si, g in enumerate(geos):
        hs = np.concatenate([grid, (grid[None, :] + th[:, None]).ravel()])
        c = g.coarse(hs)
        base = c[:ng_]
        tops = c[ng_:].reshape(nt, ng_, 2)
        Zc[si] = base[None, :, 0] - tops[:, :, 0]
        Xc[si] = base[None, :, 1] - tops[:, :, 1]
        e = g.coarse(np.concatenate([[g_req], g_req + th]))
        Zr[si] = e[0, 0] - e[1:, 0]
        Xr[si] = e[0, 1] - e[1:, 1]
        lat = g.lateral(lat_heights)  # (nh, 4)
        # cumulative integral over height (trapezoid) of each part
        cum = np.concatenate([np.zeros((1, 4)), np.cumsum(0.5 * (lat[1:] + lat[:-1]) * np.diff(lat_heights)[:, None], axis=0)])
        LAT[si] = cum.T
        g.save()

    hmax = np.array([g.demag_hmax() for g in geos])

    # candidates: material x grade x spec x thickness (a thickness matched to one material's
    # total mass is paired with that material only)
    im, ig, is_, it = (a.ravel() for a in np.meshgrid(np.arange(nm), np.arange(ng), np.arange(ns),
                                                         np.arange(nt), indexing="ij"))
    if cat.thick_owner:
        keep = np.ones(im.size, dtype=bool)
        for ti, owners in enumerate(cat.thick_owner):
            if owners is not None:
                keep &= ~((it == ti) & ~np.isin(im, list(owners)))
        im, ig, is_, it = im[keep], ig[keep], is_[keep], it[keep]
    n = im.size
    t_c = th[it]
    plate_mass = rho_p[im] * area * t_c
    payload = req.payload_for(plate_mass)
    too_heavy = payload < -1e-9 * (req.total_mass_kg or 0.0)
    payload = np.maximum(payload, 0.0)
    m_tot = plate_mass + payload
    weight = m_tot * G_STANDARD
    # the array against the envelope
    excess = np.array([s.envelope_excess(req.envelope_m) for s in specs]).reshape(ns, 3)
    outside = (excess > 1e-9).any(axis=1)[is_]

    # lift at the required gap (screening rule; exact for the rows worked out)
    fz_r, fx_r = Zr[is_, it], Xr[is_, it]
    lift_nom = s_nom[ig] * (a_nom[im] * fz_r + b_nom[im] * fx_r)
    lift_w = s_w[ig] * (a_w[im] * fz_r + b_w[im] * fx_r)
    with np.errstate(divide="ignore", invalid="ignore"):
        margin = np.where(weight > 0, lift_w / weight, np.inf)
        margin_nom = np.where(weight > 0, lift_nom / weight, np.inf)

    # equilibrium gaps on the screening tables
    grp = is_ * nt + it
    Zg = Zc.reshape(ns * nt, ng_)
    Xg = Xc.reshape(ns * nt, ng_)
    gap_nom = np.full(n, np.nan)
    gap_w = np.full(n, np.nan)
    kz = np.full(n, np.nan)
    ok = diamag[im] & (weight > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        r_nom = np.where(a_nom[im] > 0, b_nom[im] / a_nom[im], 0.0)
        y_nom = weight / (s_nom[ig] * a_nom[im])
        y_w = weight / (s_w[ig] * a_w[im])
    sel = np.nonzero(ok)[0]
    if sel.size:
        G = Zg[grp[sel]] + r_nom[sel, None] * Xg[grp[sel]]
        gn, i_n, f_n = _highest_root_grid(G, y_nom[sel], grid)
        gw, _, _ = _highest_root_grid(G, np.where(np.isfinite(y_w[sel]), y_w[sel], np.inf), grid)
        gap_nom[sel] = gn
        gap_w[sel] = gw
        dZ = np.gradient(Zg, grid, axis=1)
        dX = np.gradient(Xg, grid, axis=1)
        gs = grp[sel]
        i1 = np.minimum(i_n + 1, ng_ - 1)
        d_at = ((dZ[gs, i_n] + r_nom[sel] * dX[gs, i_n]) * (1 - f_n)
                + (dZ[gs, i1] + r_nom[sel] * dX[gs, i1]) * f_n)
        kz[sel] = np.where(np.isfinite(gn), -d_at * s_nom[ig[sel]] * a_nom[im[sel]], np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        f_z = np.where(kz > 0, np.sqrt(np.maximum(kz, 0) / m_tot) / (2 * math.pi), 0.0)

    # lateral stiffness at the nominal gap (screening)
    kx = np.full(n, np.nan)
    ky = np.full(n, np.nan)
    fin = np.nonzero(np.isfinite(gap_nom))[0]
    if fin.size:
        g0 = gap_nom[fin]
        g1 = g0 + t_c[fin]
        rows = is_[fin]
        parts = []
        for q in range(4):
            tab = LAT[:, q, :]
            parts.append(_interp_rows(tab, rows, g1, lat_heights) - _interp_rows(tab, rows, g0, lat_heights))
        sa, sb = s_nom[ig[fin]] * a_nom[im[fin]], s_nom[ig[fin]] * b_nom[im[fin]]
        kx[fin] = sa * parts[0] + sb * parts[1]
        ky[fin] = sa * parts[2] + sb * parts[3]
    lat_stable = np.isfinite(kx) & (kx > 0) & (ky > 0)

    # thermal
    from matdb.physics.thermal import lift_derating_pct

    der_m_g = np.array([np.broadcast_to(lift_derating_pct(alpha, req.temp_max_k, mm.temp_coeff_per_k), (ng,))
                        for mm in mats])  # (nm, ng)
    derating = der_m_g[im, ig]
    temps = sorted({req.temp_min_k, req.temp_max_k})
    ratio_g = np.full((ns, ng), -np.inf)
    ratio_t = np.full((ns, ng), temps[0])
    bad_model = np.zeros(ng, dtype=bool)
    for t in temps:
        bf = _brf(alpha, t)
        hf = 1.0 + beta / 100.0 * (t - T_REF_K)
        bad_model |= (bf <= 0) | (hf <= 0)
        with np.errstate(divide="ignore", invalid="ignore"):
            r = hmax[:, None] * (br * bf)[None, :] / (knee * hcj * hf)[None, :]
        r = np.where((hf > 0)[None, :], r, np.inf)
        upd = r > ratio_g
        ratio_g = np.where(upd, r, ratio_g)
        ratio_t = np.where(upd, t, ratio_t)
    demag_ratio = ratio_g[is_, ig]
    demag_temp = ratio_t[is_, ig]
    demag_risk = demag_ratio >= 1.0
    too_hot = kelvin_to_celsius(req.temp_max_k) > tmax_c[ig] + 1e-9

    # cost
    magnet_mass = vol[is_] * rho_m[ig]
    cost = magnet_mass * price_m[ig] + plate_mass * price_p[im]
    illus = np.array([g.price_illustrative for g in grades])[ig] | np.array([m.price_illustrative for m in mats])[im]
    over_budget = np.zeros(n, dtype=bool) if req.budget_usd is None else ~(cost <= req.budget_usd)

    feasible = (diamag[im] & (margin >= 1.0) & lat_stable & ~demag_risk & ~too_hot & ~over_budget
                & ~outside & ~too_heavy)
    score = score_values(margin, cost, derating, req.weights)
    ext = np.array([s.extent for s in specs]).reshape(ns, 2)

    df = pd.DataFrame({
        "material": np.array([m.id for m in mats], dtype=object)[im],
        "grade": np.array([g.grade for g in grades], dtype=object)[ig],
        "family": np.array([g.family for g in grades], dtype=object)[ig],
        "spec_index": is_, "mat_index": im, "grade_index": ig,
        "thickness_m": t_c, "plate_mass_kg": plate_mass, "magnet_mass_kg": magnet_mass,
        "payload_kg": payload, "too_heavy": too_heavy, "outside_envelope": outside,
        "array_w_m": ext[is_, 0], "array_l_m": ext[is_, 1],
        "array_h_m": np.array([s.height for s in specs])[is_],
        "magnet_count": np.array([s.count for s in specs])[is_],
        "weight_n": weight, "feasible": feasible,
        "lift_per_area_n_m2": lift_w / area, "lift_nominal_n": lift_nom, "lift_worst_n": lift_w,
        "gap_m": gap_nom, "gap_worst_m": gap_w, "margin": margin, "margin_nominal": margin_nom,
        "max_payload_worst_kg": np.maximum(lift_w / G_STANDARD - plate_mass, 0.0),
        "k_z_n_m": kz, "f_z_hz": f_z, "k_x_n_m": kx, "k_y_n_m": ky,
        "k_tilt_n_m_per_rad": np.full(n, np.nan), "laterally_stable": lat_stable,
        "derating_pct": derating, "demag_risk": demag_risk, "demag_ratio": demag_ratio,
        "demag_temp_k": demag_temp, "too_hot": too_hot, "diamagnetic": diamag[im],
        "cost_usd": cost, "price_illustrative": illus, "over_budget": over_budget,
        "score": score, "exact": np.zeros(n, dtype=bool),
        "stable_plate_side_max_m": np.full(n, np.nan), "tilt_stable": np.ones(n, dtype=bool),
        "stable_sides_text": np.full(n, "", dtype=object),
        "tilt_checked": np.zeros(n, dtype=bool),
    })
    return df


# ---------------------------------------------------------------------------
# plain-words reasons
# ---------------------------------------------------------------------------
def _c(t_k: float) -> str:
    return f"{kelvin_to_celsius(t_k):.0f} C"


def _mm(v: float) -> str:
    return f"{v * 1e3:.3g} mm"


def _intervals_text(iv) -> str:
    """Stable side intervals [m] in words ("none" when empty)."""
    from matdb.analysis.levitate import format_intervals

    return "stable sides: " + format_intervals(iv)


def envelope_reason(spec: ArrangementSpec, envelope_m) -> str:
    """'array W x L x H mm is outside the magnet envelope ... (by how much)'."""
    w, ln = spec.extent
    ex = spec.envelope_excess(envelope_m)
    by = [f"{e * 1e3:.3g} mm too {word}" for e, word in zip(ex, ("wide", "long", "tall")) if e > 1e-9]
    return (f"the array ({w * 1e3:.4g} x {ln * 1e3:.4g} x {spec.height * 1e3:.4g} mm) is outside the "
            f"magnet envelope {envelope_m[0] * 1e3:.4g} x {envelope_m[1] * 1e3:.4g} x "
            f"{envelope_m[2] * 1e3:.4g} mm: " + ", ".join(by))


def reasons_for(row: dict, req: AdviceRequest, cat: _Catalogue) -> tuple[list[str], list[str]]:
    """(reasons it is rejected, notes) for one candidate row, in plain words."""
    mat = cat.mats[int(row["mat_index"])]
    grade = cat.grades[int(row["grade_index"])]
    spec = cat.specs[int(row["spec_index"])]
    reasons: list[str] = []
    notes: list[str] = []
    g_req = max(req.min_gap_m, 5e-5)
    if not row["diamagnetic"]:
        reasons.append(f"{mat.id} is paramagnetic (chi = {mat.chi_si:+.3g}): it is pulled towards "
                       "the magnets and cannot float")
    else:
        m = row["margin"]
        if not (m >= 1.0):
            if math.isfinite(m):
                mt = f"{m:.2f}" if abs(m) >= 0.01 else f"{m:.2g}"
                reasons.append(f"worst-case margin {mt}, needs 1.00: lift at {_mm(g_req)} is {mt}x the weight "
                               f"at {_c(req.temp_max_k)} in the worst case (minimum Br, low end of |chi|)")
            if not math.isfinite(row["gap_worst_m"]) and not math.isfinite(row["gap_m"]):
                reasons.append("it does not float at any gap with this payload")
        if row["too_hot"]:
            over = kelvin_to_celsius(req.temp_max_k) - grade.max_temp_c
            reasons.append(f"{grade.grade} is rated to {grade.max_temp_c:g} C; the range reaches "
                           f"{_c(req.temp_max_k)} ({over:.0f} K over)")
        if row["demag_risk"]:
            why = ""
            if grade.beta_hcj_pct_per_k is not None and grade.beta_hcj_pct_per_k > 0 and \
                    row["demag_temp_k"] == req.temp_min_k and req.temp_min_k < req.temp_max_k:
                why = f" ({grade.family} loses coercivity when cold)"
            elif row["demag_temp_k"] == req.temp_max_k and req.temp_min_k < req.temp_max_k:
                why = f" ({grade.family} loses coercivity when hot)"
            ratio = row["demag_ratio"]
            rtxt = f"{ratio:.2f}x" if math.isfinite(ratio) else "beyond"
            reasons.append(f"irreversible loss of magnetisation: the reverse field reaches {rtxt} "
                           f"the knee at {_c(row['demag_temp_k'])}{why}")
        if math.isfinite(row["gap_m"]) and not row["laterally_stable"]:
            sides = row.get("stable_sides_text")
            if isinstance(sides, str) and sides:
                reasons.append(f"the plate side {_mm(max(req.plate_m))} is in no stable interval "
                               f"of square sides over this arrangement ({sides})")
            kx, ky = row["k_x_n_m"], row["k_y_n_m"]
            if not (kx > 0 and ky > 0):
                reasons.append(f"laterally unstable: it slides off the magnets (k_x = {kx:.3g} N/m, "
                               f"k_y = {ky:.3g} N/m)")
            elif not row.get("tilt_stable", True):
                reasons.append(f"it tips over (tilt stiffness {row['k_tilt_n_m_per_rad']:.3g} N m/rad "
                               "not positive)")
            else:
                reasons.append("sliding and tilting together have no restoring force")
        if row.get("too_heavy"):
            pm = float(row["plate_mass_kg"])
            reasons.append(f"the plate alone weighs {pm * 1e3:.3g} g, {(pm - req.total_mass_kg) * 1e3:.2g} g "
                           f"more than the total mass of {req.total_mass_kg * 1e3:.3g} g")
        if row.get("outside_envelope"):
            reasons.append(envelope_reason(spec, req.envelope_m))
        if row["over_budget"]:
            c = row["cost_usd"]
            if math.isfinite(c):
                reasons.append(f"cost {c:.2f} USD is over the budget of {req.budget_usd:.2f} USD "
                               f"(by {c - req.budget_usd:.2f} USD)")
            else:
                reasons.append("no price in the database for "
                               + ("the plate material" if mat.price_usd_per_kg is None else "the magnets")
                               + "; the budget cannot be checked")
    if not row["feasible"] and not reasons:
        if not math.isfinite(row["gap_m"]):
            reasons.append(f"no equilibrium found between 0.05 mm and {SCREEN_HEIGHTS_M[-1] * 1e3:.0f} mm "
                           "in screening (see --exact)")
        else:
            reasons.append("not feasible after the exact check")
    if row["price_illustrative"]:
        notes.append("prices are illustrative")
    if not math.isfinite(row["cost_usd"]):
        notes.append("cost unknown (no price in the database)")
    if spec.pattern == "stripes" and row["feasible"]:
        notes.append("stripes restore almost nothing along the stripes (x)")
    if not row["exact"]:
        notes.append("screening values (gaps and stiffnesses interpolated)" if row.get("tilt_checked")
                     else "screening values (gaps and stiffnesses interpolated; tilt not checked)")
    return reasons, notes


# ---------------------------------------------------------------------------
# the exact path for the rows shown
# ---------------------------------------------------------------------------
def _scaled_force(g: GeometryData, t: float, s: float, a: float, b: float):
    """``F(g) = s (a (Iz(g) - Iz(g+t)) + b (Ixy(g) - Ixy(g+t)))`` from unit integrals."""
    def force(gaps):
        gg = np.atleast_1d(np.asarray(gaps, dtype=float))
        e = g.exact(np.concatenate([gg, gg + t]))
        k = gg.size
        return (a * (e[:k, 0] - e[k:, 0]) + b * (e[:k, 1] - e[k:, 1])) * s
    return force


def _curve(force, weight: float, g_start: float, n_gaps: int):
    """Lift curve as :func:`matdb.physics.plate.analyse_plate` samples it, and the root."""
    from matdb.physics import plate as P

    f1 = lambda x: float(force([x])[0])  # noqa: E731
    top = max(3e-3, g_start + 1e-3)
    while f1(top) >= weight and top < 0.2:
        top *= 2.0
    gaps = np.linspace(g_start, top, n_gaps)
    forces = force(gaps)
    gap = None if forces[-1] >= weight else P.highest_stable_root(gaps, forces, weight, f1)
    if gap is not None and gap > 0.8 * top:
        gaps = np.linspace(g_start, 1.25 * gap, n_gaps)
        forces = force(gaps)
    return gaps, forces, gap, f1


def exact_evaluation(row: dict, req: AdviceRequest, cat: _Catalogue, *, side: bool = True,
                     at_gap_m: float | None = None) -> dict:
    """Work one candidate out the way ``matdb levitate`` does, from unit-polarisation
    integrals scaled by ``B_r^2`` and the chi parts. Returns updated row values.

    ``at_gap_m`` evaluates the stiffnesses at that gap instead of the equilibrium found
    (to compare with another solver's root at the same point)."""
    from matdb.physics import plate as P
    from matdb.physics.thermal import worst_case_abs_chi, worst_case_br

    mat = cat.mats[int(row["mat_index"])]
    grade = cat.grades[int(row["grade_index"])]
    spec = cat.specs[int(row["spec_index"])]
    g = geometry(spec, req.plate_m, grade_chi_rec(grade))
    t = float(row["thickness_m"])
    lx, ly = req.plate_m
    geom = P.PlateGeometry("rectangle", lx, ly, t, 0.0, 0.0, *g.breaks)
    g_start = 5e-5
    g_req = max(req.min_gap_m, g_start)
    t_op = t_w = req.temp_max_k
    coeff = mat.temp_coeff_per_k
    cf = 1.0 if coeff is None else 1.0 + coeff * (t_op - T_REF_K)
    a, b = abs(mat.chi_vertical * cf), abs(mat.chi_horizontal * cf)
    br_op = grade.br_t * (1.0 + grade.alpha_br_pct_per_k / 100.0 * (t_op - T_REF_K))
    s_op = br_op ** 2 / (2.0 * MU0)
    plate_mass = mat.density_kg_m3 * geom.volume
    payload = max(float(req.payload_for(plate_mass)), 0.0)
    weight = (plate_mass + payload) * G_STANDARD
    m_tot = plate_mass + payload
    out: dict[str, Any] = {"exact": True, "tilt_checked": True}
    if not (mat.chi_vertical < 0 and mat.chi_horizontal < 0):
        return out
    force = _scaled_force(g, t, s_op, a, b)
    gaps, forces, gap, f1 = _curve(force, weight, g_start, 60)
    out["lift_nominal_n"] = float(force([g_req])[0])
    out["margin_nominal"] = out["lift_nominal_n"] / weight if weight > 0 else math.inf
    out["gap_m"] = np.nan if gap is None else float(gap)
    if at_gap_m is not None:
        gap = float(at_gap_m)
    kz = fz = kx = ky = kt = np.nan
    stable = False
    tilt_ok = True
    if gap is not None:
        h = max(1e-7, 1e-3 * gap)
        hs = np.array([gap + h, gap - h, gap + h + t, gap - h + t])
        iz, ixy = P.plane_integrals(g.unit.B, geom, hs, EXACT_ORDER,
                                    rule_heights=[gap, gap, gap + t, gap + t])
        fp = (a * (iz[0] - iz[2]) + b * (ixy[0] - ixy[2])) * s_op
        fm = (a * (iz[1] - iz[3]) + b * (ixy[1] - ixy[3])) * s_op
        kz = -(fp - fm) / (2 * h)
        fz = math.sqrt(kz / m_tot) / (2 * math.pi) if kz > 0 else 0.0
        st = P.stability(g.unit.B, geom, gap, a * br_op ** 2, b * br_op ** 2, plate_mass,
                         payload, req.payload_height_m, EXACT_ORDER)
        kx, ky, kt = st.k_x, st.k_y, min(st.k_pitch, st.k_roll)
        stable = st.laterally_stable
        tilt_ok = st.k_pitch > 0 and st.k_roll > 0
        if side and not stable and geom.is_square:
            # where a square plate would be stable: the intervals of sides judged at their
            # lateral equilibrium (the plate's own side is in none of them: not stable)
            ext = g.unit.bounds()
            size = max(ext[1] - ext[0], ext[3] - ext[2])
            iv = P.stable_side_intervals(g.unit.B, geom, a * br_op ** 2, b * br_op ** 2,
                                         mat.density_kg_m3, size, payload,
                                         req.payload_height_m, g_start, known={lx: False})
            out["stable_sides_text"] = _intervals_text(iv)
    out.update({"k_z_n_m": kz, "f_z_hz": fz, "k_x_n_m": kx, "k_y_n_m": ky,
                "k_tilt_n_m_per_rad": kt, "laterally_stable": bool(stable), "tilt_stable": tilt_ok})
    # worst case
    ref = abs(mat.chi_vertical)
    fw = 1.0
    if mat.uncertainty_si is not None and ref > 0:
        fw = worst_case_abs_chi(mat.chi_vertical, mat.uncertainty_si) / ref
    cfw = 1.0 if coeff is None else 1.0 + coeff * (t_w - T_REF_K)
    aw, bw = abs(mat.chi_vertical * cfw) * fw, abs(mat.chi_horizontal * cfw) * fw
    b20 = worst_case_br(grade.br_t, None if grade.br_min_t is None else grade.br_min_t * grade.br_t / grade.br_t)
    br_w = b20 * (1.0 + grade.alpha_br_pct_per_k / 100.0 * (t_w - T_REF_K))
    force_w = _scaled_force(g, t, br_w ** 2 / (2.0 * MU0), aw, bw)
    gaps_w, forces_w, gap_w, f1w = _curve(force_w, weight, g_start, 30)
    out["gap_worst_m"] = np.nan if gap_w is None else float(gap_w)
    lift_w = float(force_w([g_req])[0])
    out["lift_worst_n"] = lift_w
    out["lift_per_area_n_m2"] = lift_w / geom.area
    out["margin"] = lift_w / weight if weight > 0 else math.inf
    best, _ = P.max_lift_above(gaps_w, forces_w, g_req, f1w)
    out["max_payload_worst_kg"] = float(max(best / G_STANDARD - plate_mass, 0.0))
    return out


# ---------------------------------------------------------------------------
# the API
# ---------------------------------------------------------------------------
def build_catalogue(req: AdviceRequest, arrangements: Sequence[ArrangementSpec] | None = None,
                    url=None) -> _Catalogue:
    mats = _select_materials(req, url)
    grades = _select_grades(req, url)
    specs = list(arrangements) if arrangements is not None else \
        default_arrangements(req.plate_m, req.max_magnet_size_m, envelope_m=req.envelope_m)
    if req.max_magnet_size_m is not None and arrangements is not None:
        specs = [s for s in specs if s.max_dimension <= req.max_magnet_size_m * (1 + 1e-9)]
    thick, owner = matched_thicknesses(req, mats)
    return _Catalogue(mats, grades, specs, thick, owner)


def matched_thickness(total_kg: float, density_kg_m3: float, plate_m) -> float | None:
    """Plate thickness whose mass over ``plate_m`` is ``total_kg`` (rounded down to 1 um), or
    None outside :data:`MIN_PLATE_THICKNESS_M` .. :data:`MAX_PLATE_THICKNESS_M` [m]."""
    if not (density_kg_m3 > 0):
        return None
    t = math.floor(total_kg / (density_kg_m3 * plate_m[0] * plate_m[1]) * 1e6 + 1e-6) / 1e6
    if t < MIN_PLATE_THICKNESS_M or t > MAX_PLATE_THICKNESS_M:
        return None
    return t


def matched_thicknesses(req: AdviceRequest, mats) -> tuple[tuple, tuple]:
    """The thicknesses to rank and, per thickness, the materials it belongs to.

    Without a total mass: the request's thicknesses for every material. With one: the
    typed thicknesses (or the default list) for every material, plus, unless thicknesses
    were typed, each diamagnet's thickness matched to the total mass (plate alone = total).
    """
    base = [float(t) for t in req.thicknesses_m]
    if req.total_mode and not req.thickness_given:
        base = [t for t in base if any(m.chi_vertical < 0 and m.chi_horizontal < 0
                                       and m.density_kg_m3 * req.plate_m[0] * req.plate_m[1] * t
                                       <= req.total_mass_kg for m in mats)]
    owner: dict[float, set | None] = {t: None for t in base}
    if req.total_mode and not req.thickness_given:
        for i, m in enumerate(mats):
            if not (m.chi_vertical < 0 and m.chi_horizontal < 0):
                continue
            t = matched_thickness(req.total_mass_kg, m.density_kg_m3, req.plate_m)
            if t is None:
                continue
            if t in owner and owner[t] is None:
                continue
            owner.setdefault(t, set()).add(i)
    ts = tuple(sorted(owner))
    if not ts:  # nothing matches: rank the default list (rejected with the reason)
        return tuple(req.thicknesses_m), ()
    owners = tuple(None if owner[t] is None else frozenset(owner[t]) for t in ts)
    if all(o is None for o in owners):
        owners = ()
    return ts, owners


def _failures(df: pd.DataFrame) -> np.ndarray:
    """How many of the feasibility criteria a candidate misses (0 when feasible)."""
    return (np.asarray(~df["diamagnetic"], dtype=int) + np.asarray(~(df["margin"] >= 1.0), dtype=int)
            + np.asarray(~df["laterally_stable"].astype(bool), dtype=int)
            + np.asarray(df["demag_risk"], dtype=int) + np.asarray(df["too_hot"], dtype=int)
            + np.asarray(df["over_budget"], dtype=int)
            + np.asarray(df["outside_envelope"], dtype=int) + np.asarray(df["too_heavy"], dtype=int))


def _sort(df: pd.DataFrame) -> pd.DataFrame:
    """Feasible first by score; then the rejected ones, fewest failed criteria first."""
    key_s = df["score"].fillna(-np.inf)
    key_m = df["margin"].fillna(-np.inf)
    order = np.lexsort((-key_m.to_numpy(), -key_s.to_numpy(), _failures(df),
                        ~df["feasible"].to_numpy()))
    return df.iloc[order].reset_index(drop=True)


def _refresh_flags(df: pd.DataFrame, idx, req: AdviceRequest) -> None:
    sub = df.loc[idx]
    feas = (sub["diamagnetic"] & (sub["margin"] >= 1.0) & sub["laterally_stable"].astype(bool)
            & ~sub["demag_risk"] & ~sub["too_hot"] & ~sub["over_budget"]
            & ~sub["outside_envelope"] & ~sub["too_heavy"])
    df.loc[idx, "feasible"] = feas.astype(bool)
    df.loc[idx, "score"] = score_values(sub["margin"], sub["cost_usd"], sub["derating_pct"], req.weights)


#: gaps of the tilt tables [m] (interpolated in log gap)
TILT_GAPS_M = np.array([5e-5, 1e-4, 2e-4, 3.5e-4, 6e-4, 1e-3, 1.7e-3, 3e-3, 5e-3])


def _screen_tilt(df: pd.DataFrame, idx, req: AdviceRequest, cat: _Catalogue) -> None:
    """Tilt (and coupled) stability of screened rows ``idx``.

    The stiffness matrix over (x, y, roll, pitch) about the plate's centre ``O`` is tabulated
    per geometry and thickness at unit polarisation, split by chi part, and scaled by
    ``B_r^2`` and the chi parts; it is moved to the combined centre of mass ``C``, a height
    ``h`` above ``O``, by the rigid-body change of pivot:
    ``k_pitch,C = k_pitch,O - 2 h k_x,pitch + h^2 k_x - h F_z`` (roll likewise with
    ``+2 h k_y,roll``), ``k_x,pitch,C = k_x,pitch,O - h k_x``. The last term is the one
    that does not scale with ``|chi| B_r^2``: at equilibrium ``F_z`` is the weight.
    """
    rows = [i for i in idx if math.isfinite(df.at[i, "gap_m"]) and not df.at[i, "exact"]
            and bool(df.at[i, "diamagnetic"])]
    groups: dict[tuple, list] = {}
    for i in rows:
        pk = (float(df.at[i, "plate_x_m"]), float(df.at[i, "plate_y_m"])) if "plate_x_m" in df.columns \
            else tuple(req.plate_m)
        groups.setdefault((int(df.at[i, "spec_index"]), float(df.at[i, "thickness_m"]), pk), []).append(i)
    lg = np.log(TILT_GAPS_M)
    for (si, t, pk), members in groups.items():
        g = geometry(cat.specs[si], pk)
        where = {}
        for i in members:
            x = float(np.clip(math.log(float(df.at[i, "gap_m"])), lg[0], lg[-1]))
            j = int(np.clip(np.searchsorted(lg, x) - 1, 0, lg.size - 2))
            where[i] = (j, (x - lg[j]) / (lg[j + 1] - lg[j]))
        need = sorted({j for j, _ in where.values()} | {j + 1 for j, _ in where.values()})
        K = dict(zip(need, g.tilt(t, TILT_GAPS_M[need])))  # only the brackets used
        g.save()
        for i in members:
            mat = cat.mats[int(df.at[i, "mat_index"])]
            grade = cat.grades[int(df.at[i, "grade_index"])]
            gap = float(df.at[i, "gap_m"])
            j, f = where[i]
            kk = K[j] * (1 - f) + K[j + 1] * f
            coeff = mat.temp_coeff_per_k
            cf = 1.0 if coeff is None else 1.0 + coeff * (req.temp_max_k - T_REF_K)
            a, b = abs(mat.chi_vertical * cf), abs(mat.chi_horizontal * cf)
            br = grade.br_t * (1.0 + grade.alpha_br_pct_per_k / 100.0 * (req.temp_max_k - T_REF_K))
            k = br ** 2 * (a * kk[0] + b * kk[1])  # about O; order x, y, roll, pitch
            pm = float(df.at[i, "plate_mass_kg"])
            pl = float(df.at[i, "payload_kg"])
            m_tot = pm + pl
            zo = gap + t / 2
            zl = gap + t + req.payload_height_m
            zc = (pm * zo + pl * zl) / m_tot if m_tot > 0 else zo
            h = zc - zo
            w = float(df.at[i, "weight_n"])
            kx, ky = k[0, 0], k[1, 1]
            kp = k[3, 3] - 2 * h * k[0, 3] + h * h * kx - h * w
            kr = k[2, 2] + 2 * h * k[1, 2] + h * h * ky - h * w
            kxp = k[0, 3] - h * kx
            kyr = k[1, 2] + h * ky
            xp_ok = kx > 0 and kp > 0 and kx * kp - kxp * kxp > 0
            yr_ok = ky > 0 and kr > 0 and ky * kr - kyr * kyr > 0
            df.at[i, "k_tilt_n_m_per_rad"] = float(min(kp, kr))
            df.at[i, "tilt_stable"] = bool(kp > 0 and kr > 0)
            df.at[i, "laterally_stable"] = bool(df.at[i, "laterally_stable"]) and xp_ok and yr_ok
            df.at[i, "tilt_checked"] = True


def rank(req: AdviceRequest, arrangements: Sequence[ArrangementSpec] | None = None, *,
         polish: int = 1, url=None, catalogue: _Catalogue | None = None,
         tilt_rows: int = 20) -> tuple[pd.DataFrame, _Catalogue]:
    """Screen and sort every candidate; check tilt on the first ``tilt_rows`` feasible-looking
    rows (:func:`_screen_tilt`); work the first ``polish`` rows out exactly.

    Returns the full frame (internal columns included) and the catalogue used.
    """
    cat = catalogue or build_catalogue(req, arrangements, url)
    with _LOCK:  # the geometry caches are shared by every caller in the process (page sessions)
        return _rank_locked(req, cat, polish, tilt_rows)


_LOCK = threading.RLock()


def row_request(row, req: AdviceRequest) -> AdviceRequest:
    """The request with the plate outline of ``row`` (rows may rank several plates)."""
    px, py = row.get("plate_x_m"), row.get("plate_y_m")
    if px is None or (float(px), float(py)) == tuple(req.plate_m):
        return req
    return replace(req, plate_m=(float(px), float(py)), plate_options=())


def _evaluate_plates(req: AdviceRequest, cat: _Catalogue) -> pd.DataFrame:
    """:func:`_evaluate` for each plate outline of the request (thicknesses matched per plate)."""
    frames = []
    for p in req.plates:
        rq = replace(req, plate_m=(float(p[0]), float(p[1])), plate_options=())
        cp = cat
        if len(req.plates) > 1:
            th, own = matched_thicknesses(rq, cat.mats)
            cp = _Catalogue(cat.mats, cat.grades, cat.specs, th, own)
        f = _evaluate(rq, cp)
        f["plate_x_m"] = float(p[0])
        f["plate_y_m"] = float(p[1])
        frames.append(f)
    return frames[0] if len(frames) == 1 else pd.concat(frames, ignore_index=True)


def _rank_locked(req: AdviceRequest, cat: _Catalogue, polish: int, tilt_rows: int):
    _report(0.02, "screening every candidate")
    df = _evaluate_plates(req, cat)
    df = _sort(df)
    _report(0.65, "checking tilt of the best candidates")
    for _ in range(6):  # until the first `tilt_rows` feasible rows have had their tilt checked
        head = df.head(tilt_rows)
        todo = [i for i in head.index if head.at[i, "feasible"] and not head.at[i, "tilt_checked"]
                and not head.at[i, "exact"]]
        if not todo:
            break
        _screen_tilt(df, todo, req, cat)
        _refresh_flags(df, todo, req)
        df = _sort(df)
    _report(0.8, "working the best candidate out exactly")
    for _ in range(8):  # polish until the first `polish` rows are all exact
        head = df.head(polish)
        todo = [i for i in head.index if not df.at[i, "exact"]]
        if not todo:
            break
        for i in todo:
            row = df.loc[i].to_dict()
            key = _polish_key(row, row_request(row, req), cat)
            rq = row_request(row, req)
            g = geometry(cat.specs[int(row["spec_index"])], rq.plate_m)
            upd = g.memo.get(key)
            if upd is None:
                upd = exact_evaluation(row, rq, cat)
                upd = {k: (float(v) if isinstance(v, (float, np.floating)) else v) for k, v in upd.items()}
                g.memo[key] = upd
                g.dirty = True
            for k, v in upd.items():
                df.at[i, k] = v
        _refresh_flags(df, todo, req)
        df = _sort(df)
    for g in list(_GEOMETRIES.values()):  # every plate and recoil susceptibility used
        g.save()
    # the Pareto front over feasible candidates
    feas = df["feasible"].to_numpy(dtype=bool)
    par = np.zeros(len(df), dtype=bool)
    if feas.any():
        par[feas] = pareto_front(df.loc[feas, "margin"], df.loc[feas, "cost_usd"], df.loc[feas, "derating_pct"])
    df["pareto"] = par
    df["rank"] = np.arange(1, len(df) + 1)
    _report(1.0, "ranked")
    return df, cat


def _polish_key(row: dict, req: AdviceRequest, cat: _Catalogue) -> str:
    mat = cat.mats[int(row["mat_index"])]
    grade = cat.grades[int(row["grade_index"])]
    d = {"m": [mat.id, repr(mat.chi_vertical), repr(mat.chi_horizontal), repr(mat.uncertainty_si),
               repr(mat.temp_coeff_per_k), repr(mat.density_kg_m3)],
         "g": [grade.grade, repr(grade.br_t), repr(grade.br_min_t), repr(grade.alpha_br_pct_per_k)],
         "t": repr(float(row["thickness_m"])), "mass": repr(req.mass_kg),
         "total": repr(req.total_mass_kg), "gap": repr(req.min_gap_m),
         "T": repr(req.temp_max_k), "ph": repr(req.payload_height_m)}
    return hashlib.sha256(json.dumps(d, sort_keys=True).encode()).hexdigest()[:20]


def finish(df: pd.DataFrame, req: AdviceRequest, cat: _Catalogue, top: int | None = None,
           feasible_only: bool = False) -> pd.DataFrame:
    """The public frame: contract columns first, reasons in words, ``top`` rows."""
    if feasible_only:
        df = df[df["feasible"]]
    if top is not None:
        df = df.head(top)
    df = df.copy()
    reasons, notes, descr, pat, shp, size, rows, cols = [], [], [], [], [], [], [], []
    for row in df.to_dict(orient="records"):
        r, n_ = reasons_for(row, row_request(row, req), cat)
        reasons.append(r)
        notes.append(n_)
        spec = cat.specs[int(row["spec_index"])]
        descr.append(spec.description)
        pat.append(spec.pattern)
        shp.append(spec.shape)
        size.append([float(s) for s in spec.size])
        rows.append(spec.rows)
        cols.append(spec.cols)
    df["reasons"] = reasons
    df["notes"] = notes
    if "plate_x_m" not in df.columns:
        df["plate_x_m"] = float(req.plate_m[0])
        df["plate_y_m"] = float(req.plate_m[1])
    df["lift_per_area_nominal_n_m2"] = df["lift_nominal_n"] / (df["plate_x_m"] * df["plate_y_m"])
    df["arrangement"] = descr
    df["pattern"] = pat
    df["shape"] = shp
    df["size_m"] = size
    df["rows"] = rows
    df["cols"] = cols
    df["plate_m"] = [[float(a), float(b)] for a, b in zip(df["plate_x_m"], df["plate_y_m"])]
    front = [c for c in COLUMNS if c in df.columns]
    rest = [c for c in df.columns if c not in front]
    return df[front + rest].reset_index(drop=True)


def advise(mass=None, footprint=None, *, min_gap="0.2 mm", temp_min="20 degC", temp_max="20 degC",
           budget=None, materials=None, families=None, grades=None, max_magnet_size=None,
           thickness=None, plate_size=None, weights=None, payload_height="0 mm",
           total_mass=None, envelope=None,
           arrangements: Sequence[ArrangementSpec] | None = None, top: int | None = None,
           feasible_only: bool = False, polish: int | None = None, url=None,
           objective: str = "score", min_q: float | None = None,
           pressure_pa: float = 101325.0) -> pd.DataFrame:
    """Rank every plate material x magnet grade x arrangement x thickness for a payload.

    Parameters are what a person types (strings with units; numbers are SI): ``mass``
    (payload), ``footprint`` ("17 mm x 17 mm"), ``min_gap``, ``temp_min``/``temp_max``,
    ``budget`` ("20 USD"), restrictions ``materials``, ``families``, ``grades``,
    ``max_magnet_size``, ``thickness`` (one or more), ``plate_size`` (default the
    footprint), ``weights`` ("margin=1,cost=1,derating=1"), ``payload_height`` (payload
    centre of mass above the plate), ``total_mass`` (plate plus payload, instead of
    ``mass``: each plate's thickness is matched to it), ``envelope`` ("24 x 24 x 15 mm":
    arrays outside it are rejected with by how much). ``top`` limits the rows returned; the first ``polish``
    rows (default 1) are worked out exactly as ``matdb levitate`` does (column ``exact``).
    ``objective="noise"`` ranks the feasible rows by the lowest noise floor and ``min_q``
    rejects rows below a vertical-mode Q, both at ``pressure_pa``
    (:mod:`matdb.advisor.dynamics`).

    Returns
    -------
    pandas.DataFrame
        Best first: feasible candidates by score, then the rejected ones with their
        ``reasons``. Contract columns: rank, material, grade, arrangement (description),
        pattern, shape, size_m, rows, cols, feasible, lift_per_area_n_m2, gap_m,
        gap_worst_m, margin, laterally_stable, derating_pct, cost_usd, score, pareto,
        reasons, plate_mass_kg, payload_kg, array_w_m, array_l_m, array_h_m,
        magnet_count; more follow (SI units in the names).
    """
    req = parse_request(mass, footprint, min_gap=min_gap, temp_min=temp_min, temp_max=temp_max,
                        budget=budget, materials=materials, families=families, grades=grades,
                        max_magnet_size=max_magnet_size, thickness=thickness, plate_size=plate_size,
                        weights=weights, payload_height=payload_height, total_mass=total_mass,
                        envelope=envelope)
    return advise_request(req, arrangements, top=top, feasible_only=feasible_only, polish=polish,
                          url=url, objective=objective, min_q=min_q, pressure_pa=pressure_pa)[0]


def advise_request(req: AdviceRequest, arrangements=None, *, top=None, feasible_only=False,
                   polish=None, url=None, objective: str = "score", min_q: float | None = None,
                   pressure_pa: float = 101325.0):
    """:func:`advise` for an already parsed :class:`AdviceRequest`; returns (frame, catalogue).

    ``objective="noise"`` (lowest noise floor) and ``min_q`` re-rank the feasible rows by
    the dynamics of each candidate (:mod:`matdb.advisor.dynamics`: screening for a pool,
    exact for the rows shown) at ``pressure_pa``.
    """
    n_pol = polish if polish is not None else 1
    df, cat = rank(req, arrangements, polish=n_pol, url=url, tilt_rows=max(top or 20, n_pol))
    if objective != "score" or min_q is not None:
        from matdb.advisor.dynamics import apply_dynamics_objective, reason_q_too_low

        df = apply_dynamics_objective(df, req, cat, objective=objective, min_q=min_q,
                                      pressure_pa=pressure_pa, shown=top or 10)
        out = finish(df, req, cat, top=top, feasible_only=feasible_only)
        if min_q is not None:
            from matdb.advisor.dynamics import GENERIC_REASON

            out["reasons"] = [
                ([x for x in r if x != GENERIC_REASON] + [reason_q_too_low(row, min_q)])
                if row["q_too_low"] else list(r)
                for r, row in zip(out["reasons"], out.to_dict(orient="records"))]
        return out, cat
    return finish(df, req, cat, top=top, feasible_only=feasible_only), cat


# ---------------------------------------------------------------------------
# output helpers
# ---------------------------------------------------------------------------
def _jnum(v):
    if v is None:
        return None
    if isinstance(v, (bool, np.bool_)):
        return bool(v)
    if isinstance(v, (int, np.integer)):
        return int(v)
    f = float(v)
    return f if math.isfinite(f) else None


JSON_EXTRA = ["family", "thickness_m", "margin_nominal", "lift_per_area_nominal_n_m2",
              "max_payload_worst_kg", "k_z_n_m", "f_z_hz", "k_x_n_m", "k_y_n_m",
              "k_tilt_n_m_per_rad", "demag_risk", "demag_ratio", "plate_mass_kg", "magnet_mass_kg",
              "price_illustrative", "stable_plate_side_max_m", "exact", "tilt_checked", "notes",
              "payload_kg", "plate_m", "array_w_m", "array_l_m", "array_h_m", "magnet_count"]


def records(df: pd.DataFrame) -> list[dict]:
    """Rows as the JSON objects of ``matdb advise --format json`` (contract keys first)."""
    out = []
    for r in df.to_dict(orient="records"):
        d = {"rank": int(r["rank"]), "material": r["material"], "grade": r["grade"],
             "arrangement": {"description": r["arrangement"], "pattern": r["pattern"],
                             "shape": r["shape"], "size_m": list(r["size_m"]),
                             "rows": int(r["rows"]), "cols": int(r["cols"])},
             "feasible": bool(r["feasible"])}
        for k in ("lift_per_area_n_m2", "gap_m", "gap_worst_m", "margin"):
            d[k] = _jnum(r[k])
        d["laterally_stable"] = bool(r["laterally_stable"])
        for k in ("derating_pct", "cost_usd", "score"):
            d[k] = _jnum(r[k])
        d["pareto"] = bool(r["pareto"])
        d["reasons"] = list(r["reasons"])
        for k in JSON_EXTRA:
            v = r.get(k)
            d[k] = list(v) if isinstance(v, list) else _jnum(v) if not isinstance(v, str) else v
        if "noise_m_s2_rthz" in r:  # dynamics objective (matdb.advisor.dynamics)
            for k in ("q_vertical", "noise_m_s2_rthz", "f_vertical_hz"):
                d[k] = _jnum(r[k])
            d["dynamics_exact"] = bool(r["dynamics_exact"])
        out.append(d)
    return out


def candidate_design(row: dict, req: AdviceRequest, cat: _Catalogue | None = None, name: str | None = None):
    """A :class:`matdb.design.model.PlateDesign` of one candidate row (for ``--save``)."""
    from matdb.data import catalog
    from matdb.design import Conditions, MagnetSpec, PlateDesign, PlateSpec

    grade = catalog.get_grade(row["grade"])
    mat = catalog.get_material(row["material"])
    if cat is not None:
        spec = cat.specs[int(row["spec_index"])]
    else:
        spec = ArrangementSpec(row["shape"], tuple(row["size_m"]), row["pattern"], int(row["rows"]),
                               int(row["cols"]))
    mags = MagnetSpec(spec.shape, tuple(spec.size), grade.grade, None, spec.pattern, spec.rows,
                      spec.cols, spec.spacing, spec.back_plate, 0.0, (), {grade.grade: grade})
    req = row_request(row, req)
    lx, ly = req.plate_m
    t = float(row["thickness_m"])
    payload = row.get("payload_kg")
    if payload is None or not math.isfinite(float(payload)):
        payload = max(float(req.payload_for(mat.density_kg_m3 * lx * ly * t)), 0.0)
    plate = PlateSpec(mat.id, "rectangle", (lx, ly, t), None, None, None,
                      float(payload), req.payload_height_m, req.min_gap_m, (0.0, 0.0), mat)
    cond = Conditions(None, req.temp_min_k, req.temp_max_k)
    desc = f"matdb advise: {mat.id} plate over a {spec.description}, grade {grade.grade}"
    return PlateDesign(mags, plate, cond, name=name or f"{mat.id}-{grade.grade}", description=desc)


def save_design(row: dict, req: AdviceRequest, path, cat: _Catalogue | None = None) -> Path:
    """Write one candidate as a design file ``matdb levitate`` reads."""
    from matdb.design import write_design

    return write_design(candidate_design(row, req, cat), path)
