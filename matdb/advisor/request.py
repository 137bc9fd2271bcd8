"""What the user asked: parse a floating-plate request typed with units into SI.

:func:`parse_request` turns strings with units (numbers are taken as SI) into an
:class:`AdviceRequest` of plain floats (kg, m, K, USD); footprints and envelopes accept
``"20x20 mm"``, ``"20 mm x 20 mm"`` and ``"20 by 20 mm"``. Errors name the field.
"""

from __future__ import annotations

import math
import re
from dataclasses import asdict, dataclass, field

import numpy as np

from matdb.errors import InputError
from matdb.constants import T_REF_K
from matdb.units import parse_length, parse_mass, parse_quantity, parse_temperature

DEFAULT_THICKNESSES_M = (0.5e-3, 1e-3, 2e-3)
#: with a total mass and no fixed plate, plates of these fractions of the footprint are ranked
#: (a plate as wide as a checkerboard is often laterally unstable over it)
PLATE_FRACTIONS = (1.0, 0.8, 0.65)


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

