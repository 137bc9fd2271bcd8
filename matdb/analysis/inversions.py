"""Measured quantities turned back into material properties through matdb's own physics.

Two inversions a lab uses when it has no susceptometer or no hysteresigraph:

* :func:`surface_field_to_br` -- Br of a magnet from the field a gaussmeter reads on its
  axis above the face centre (the field is linear in Br);
* :func:`invert_float_gap` -- the susceptibility of a plate from the gap it floats at over
  a known arrangement (the lift is linear in |chi|).

:func:`record_magnet_from_surface_field` and :func:`record_chi_from_float_gap` record the
result as a lab value (:mod:`matdb.data.lab_store`) with a note saying what was assumed.
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from typing import Any, Optional

import numpy as np

from matdb.analysis.levitate import plate_geometry
from matdb.constants import CHI_MAX_ABS, G_STANDARD, kelvin_to_celsius
from matdb.data import catalog, lab_store
from matdb.data.lab_input import check_br, given, require_source, text_of
from matdb.design import PlateDesign, load_design
from matdb.errors import InputError
from matdb.limits import MAX_FILE_BYTES, read_text_limited
from matdb.physics import plate as P
from matdb.physics.arrangement import build_arrangement
from matdb.units import parse_flux_density, parse_length


def _parse_size(text: Any, label: str) -> tuple[float, ...]:
    parts = [p for p in re.split(r"\s*[,x×]\s*(?=[-+.\d])", text_of(text)) if p.strip()]
    if not parts:
        raise InputError("expected lengths such as '10 mm,10 mm,5 mm'", field=label)
    return tuple(parse_length(p, label, positive=True) for p in parts)


def surface_field_to_br(surface_field: Any, shape: Any, size: Any, probe_offset: Any = None) -> tuple[float, str]:
    """Br of a magnet from the on-axis field measured above its face centre.

    The field of a uniformly magnetised magnet is proportional to Br, so
    ``Br = B_measured / B_unit(offset)`` with ``B_unit`` the on-axis Bz of the same
    magnet at Br = 1 T, ``offset`` above the face centre (the sensor sits below the
    probe's face). Returns (Br in T, the note stating what was assumed).

    References
    ----------
    .. [1] E. P. Furlani, "Permanent Magnet and Electromechanical Devices", Academic
       Press, 2001, ch. 4 (fields of uniformly magnetised cuboids and cylinders).
    """
    b_meas = parse_flux_density(text_of(surface_field), "surface_field")
    if not (b_meas > 0):
        raise InputError("expected a positive field, e.g. '0.52 T' or '5200 G'", field="surface_field")
    shp = text_of(shape).lower()
    if shp not in ("cuboid", "cylinder"):
        raise InputError(f"expected cuboid or cylinder, got {text_of(shape)!r}", field="shape")
    if not given(size):
        raise InputError("needed with surface_field, e.g. '10 mm,10 mm,10 mm' (cuboid: x,y,height) "
                         "or '10 mm,5 mm' (cylinder: diameter,height)", field="size")
    dims = _parse_size(size, "size")
    want = 3 if shp == "cuboid" else 2
    if len(dims) != want:
        raise InputError(f"a {shp} needs {want} lengths "
                         f"({'x,y,height' if shp == 'cuboid' else 'diameter,height'}), got {text_of(size)!r}", field="size")
    offset = parse_length(text_of(probe_offset), "probe_offset") if given(probe_offset) else 0.0
    arr = build_arrangement(shp, dims, pattern="single", br=1.0)
    b_unit = float(np.asarray(arr.B(np.array([[0.0, 0.0, offset]])))[0, 2])
    if not (math.isfinite(b_unit) and b_unit > 0):
        raise InputError("the model gives no usable field there; check size and probe_offset", field="probe_offset")
    br = b_meas / b_unit
    try:
        check_br(br, "surface_field")
    except InputError:
        raise InputError(f"{text_of(surface_field)!r} on this {shp} implies Br = {br:.3g} T, "
                         "which is implausible; check size and probe_offset", field="surface_field") from None
    dims_txt = ",".join(f"{d * 1000:g} mm" for d in dims)
    assumed = (f"Br from surface field: measured {b_meas:.6g} T on the axis {offset * 1000:g} mm above the "
               f"face centre of a single {shp} {dims_txt} (model field there at Br = 1 T: "
               f"{b_unit:.6g} T), so Br = {br:.6g} T")
    return br, assumed


def invert_float_gap(gap_m: float, design_path: Path, material) -> tuple[float, dict]:
    """The vertical-field chi (SI volume, negative) that floats the design's plate at ``gap_m``.

    The lift is linear in the susceptibilities, ``F(g) = |chi_perp| F_perp(g) + |chi_par|
    F_par(g)`` (:mod:`matdb.physics.plate`), so with the material's ratio ``r =
    chi_par / chi_perp`` kept (1 for an isotropic material) the measured gap gives
    ``|chi_perp| = W / (F_perp(g) + r F_par(g))``, ``W`` the weight of plate and payload.
    Returns (chi_perp, what was assumed: temperature_k, ratio, weight_n, unit_lift_n).

    References
    ----------
    .. [1] M. V. Berry and A. K. Geim, "Of flying frogs and levitrons", Eur. J. Phys. 18,
       307-313 (1997) (diamagnetic lift proportional to |chi|).
    """
    d = load_design(design_path)
    if not isinstance(d, PlateDesign):
        raise InputError("expected a floating-plate design ([magnets] and [plate] tables)", field="design")
    if d.plate.material != material.id:
        raise InputError(f"the plate in {str(design_path)!r} is {d.plate.material!r}, "
                         f"not {material.id!r}; use a design of the sample that was floated", field="design")
    if material.kind != "diamagnetic":
        raise InputError(f"{material.id} is not diamagnetic; it cannot float", field="from_float_gap")
    cover = d.magnets.cover_m
    if gap_m <= cover:
        raise InputError(f"the gap ({gap_m * 1000:g} mm, plate bottom above the magnets' "
                         f"top faces) must exceed the cover sheet ({cover * 1000:g} mm)", field="from_float_gap")
    t_k = d.conditions.nominal_k
    arr = d.arrangement(t_k)
    geom = plate_geometry(d, arr)
    ratio = 1.0
    if material.anisotropic and material.chi_perp_si and material.chi_par_si is not None:
        ratio = material.chi_par_si / material.chi_perp_si
    weight = (material.density_kg_m3 * d.plate.volume_m3 + d.plate.payload_kg) * G_STANDARD
    f1, f2 = (float(x) for x in P.lift_force(arr.B, geom, [gap_m, gap_m * 1.02], 1.0, ratio))
    if not (f1 > 0 and math.isfinite(f1)):
        raise InputError("the design gives no lift at that gap", field="from_float_gap")
    if f2 >= f1:
        raise InputError(f"at {gap_m * 1000:g} mm the lift of this design still rises with "
                         "the gap, so a plate cannot rest there stably; check the gap and the design", field="from_float_gap")
    chi_abs = weight / f1
    if chi_abs > CHI_MAX_ABS:
        raise InputError(f"a float at {gap_m * 1000:g} mm needs |chi| = {chi_abs:.3g}, "
                         "implausible for a diamagnet; check the gap and the design", field="from_float_gap")
    return -chi_abs, {"temperature_k": t_k, "ratio": ratio, "weight_n": weight, "unit_lift_n": f1}


def chi_fields_from_float_gap(material_id: str, gap: Any, design: Any, url: Optional[str] = None) -> dict:
    """Typed fields of a lab value (``chi`` or ``chi_perp``/``chi_par`` as SI numbers,
    ``temperature``, ``note``) from a measured float gap over a design file."""
    gap_m = parse_length(text_of(gap), "from_float_gap", positive=True)
    path = Path(text_of(design))
    content = read_text_limited(path, "design", MAX_FILE_BYTES)
    m = catalog.get_material(material_id, url)
    chi_v, assumed = invert_float_gap(gap_m, path, m)
    aniso = m.anisotropic and m.chi_par_si is not None
    one_line = " | ".join(x.strip() for x in content.splitlines() if x.strip() and not x.strip().startswith("#"))
    note = (f"chi from float gap: plate bottom {gap_m * 1000:g} mm above the magnets' top faces over the design "
            f"{str(path)!r}; magnets at {kelvin_to_celsius(assumed['temperature_k']):g} C; weight "
            f"{assumed['weight_n']:.6g} N with density {m.density_kg_m3:g} kg/m^3; lift taken linear in |chi|"
            + (f", chi_par/chi_perp = {assumed['ratio']:.6g} kept from value {m.value_id}" if aniso else "")
            + f"; design: {one_line}")
    out: dict = {"note": note, "temperature": f"{assumed['temperature_k']} K"}
    if aniso:
        out["chi_perp"] = repr(chi_v)
        out["chi_par"] = repr(chi_v * assumed["ratio"])
        out["chi"] = None
    else:
        out["chi"] = repr(chi_v)
    return out


def record_chi_from_float_gap(material_id: str, gap: Any, design: Any, *, chi: Any = None, chi_perp: Any = None,
                              chi_par: Any = None, temperature: Any = None, name: Any = None,
                              url: Optional[str] = None, **fields) -> dict:
    """Record the susceptibility a float gap implies (:func:`invert_float_gap`) as a lab value
    of an existing material; ``fields`` are those of :func:`matdb.data.lab_store.record_material_value`
    (source, measured_by, date, method...). A typed ``temperature`` replaces the design's."""
    require_source(fields.get("source"), "source")
    if given(chi) or given(chi_perp) or given(chi_par):
        raise InputError("give either chi, or from_float_gap with design, not both", field="from_float_gap")
    if not (given(gap) and given(design)):
        missing = "design" if given(gap) else "from_float_gap"
        raise InputError("from_float_gap and design go together", field=missing)
    if given(name):
        raise InputError("needs an existing material (its perp/par ratio and density)", field="from_float_gap")
    mid = text_of(material_id).lower()
    derived = chi_fields_from_float_gap(mid, gap, design, url)
    if given(temperature):
        derived["temperature"] = temperature
    note = "; ".join(x for x in (text_of(fields.pop("note", "")), derived.pop("note")) if x)
    return lab_store.record_material_value(mid, **derived, note=note, url=url, **fields)


def record_magnet_from_surface_field(grade: str, surface_field: Any, shape: Any, size: Any,
                                     probe_offset: Any = None, *, br: Any = None, note: str = "",
                                     url: Optional[str] = None, **fields) -> dict:
    """Record the Br a surface-field reading implies (:func:`surface_field_to_br`) as a lab
    value of ``grade``; ``fields`` are those of :func:`matdb.data.lab_store.record_magnet_value`
    (hcj, alpha, source...)."""
    if not given(surface_field):
        for flag, val in (("shape", shape), ("size", size), ("probe_offset", probe_offset)):
            if given(val):
                raise InputError("only used with surface_field", field=flag)
    if given(br):
        raise InputError("give br or surface_field, not both", field="surface_field")
    require_source(fields.get("source"), "source")
    br_t, assumed = surface_field_to_br(surface_field, shape, size, probe_offset)
    note = "; ".join(x for x in (text_of(note), assumed) if x)
    return lab_store.record_magnet_value(grade, br=f"{br_t!r} T", note=note, url=url, **fields)
