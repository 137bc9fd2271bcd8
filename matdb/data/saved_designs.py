"""Saved designs: name a design, keep it in the database with a note, list, reopen,
duplicate, delete, and compare the key figures of a few of them side by side.

A saved design is the design-file text (TOML, see :mod:`matdb.design.toml_io`) as the person had
it, so reopening gives back exactly what was saved. Every write checks its input first
and runs in one transaction: a bad name or a design that does not parse writes nothing.
"""

from __future__ import annotations

import datetime as _dt
import math
from typing import Any, Callable, Iterable, Optional, Sequence

import pandas as pd
from sqlmodel import select

from matdb.data.db import read_session, session_scope
from matdb.errors import InputError, NotFoundError
from matdb.data.models import SavedDesign

NAME_MAX = 80
NOTE_MAX = 2000
COMPARE_MIN, COMPARE_MAX = 2, 4

#: Columns of :func:`list_designs` (a contract for pages and scripts).
LIST_COLUMNS = ["id", "name", "note", "created_at", "updated_at"]


def _now() -> _dt.datetime:
    return _dt.datetime.now(_dt.timezone.utc)


def _clean_name(name: Any, field: str = "name") -> str:
    text = " ".join(str(name or "").split())
    if not text:
        raise InputError("expected a name for the design, got nothing", field=field)
    if len(text) > NAME_MAX:
        raise InputError(f"expected at most {NAME_MAX} characters, got {len(text)}", field=field)
    return text


def _clean_note(note: Any) -> str:
    text = str(note or "").strip()
    if len(text) > NOTE_MAX:
        raise InputError(f"expected at most {NOTE_MAX} characters, got {len(text)}", field="note")
    return text


def _check_text(text: Any) -> str:
    from matdb.design import load_design_text  # lazy: the data layer calls up into design only here

    if not isinstance(text, str) or not text.strip():
        raise InputError("expected the design-file text (TOML), got nothing", field="design")
    load_design_text(text)  # raises InputError naming the bad key
    return text


def _row(d: SavedDesign, with_text: bool = True) -> dict:
    out = {"id": d.id, "name": d.name, "note": d.note, "created_at": d.created_at, "updated_at": d.updated_at}
    if with_text:
        out["design_toml"] = d.design_toml
    return out


def _find(s, ident: Any) -> Optional[SavedDesign]:
    if isinstance(ident, int) or (isinstance(ident, str) and ident.strip().isdigit()):
        d = s.get(SavedDesign, int(ident))
        if d is not None:
            return d
    name = " ".join(str(ident or "").split())
    return s.exec(select(SavedDesign).where(SavedDesign.name == name)).first()


def _get(s, ident: Any) -> SavedDesign:
    d = _find(s, ident)
    if d is None:
        names = [n for n in s.exec(select(SavedDesign.name).order_by(SavedDesign.name)).all()]
        known = ", ".join(names[:10]) + (" ..." if len(names) > 10 else "") if names else "none saved yet"
        raise NotFoundError(f"no saved design {str(ident)!r} (saved: {known})", field="design")
    return d


def save_design(name: Any, text: str, note: Any = "", *, overwrite: bool = False,
                url: Optional[str] = None) -> dict:
    """Save the design-file ``text`` under ``name`` with a ``note``.

    The text must parse as a design. An existing name is an error unless ``overwrite``
    (then its text and note are replaced and ``updated_at`` moves). Returns the saved
    row (``id``, ``name``, ``note``, ``created_at``, ``updated_at``, ``design_toml``).
    """
    nm = _clean_name(name)
    nt = _clean_note(note)
    body = _check_text(text)
    with session_scope(url) as s:
        d = s.exec(select(SavedDesign).where(SavedDesign.name == nm)).first()
        if d is not None:
            if not overwrite:
                raise InputError(f"a saved design called {nm!r} exists; choose another name or overwrite it", field="name")
            d.design_toml, d.note, d.updated_at = body, nt, _now()
        else:
            d = SavedDesign(name=nm, note=nt, design_toml=body)
        s.add(d)
        s.flush()
        return _row(d)


def list_designs(url: Optional[str] = None) -> pd.DataFrame:
    """Every saved design, newest change first: :data:`LIST_COLUMNS`."""
    with read_session(url) as s:
        rows = [_row(d, with_text=False) for d in
                s.exec(select(SavedDesign).order_by(SavedDesign.updated_at.desc(), SavedDesign.id.desc())).all()]
    return pd.DataFrame(rows, columns=LIST_COLUMNS)


def get_design(ident: Any, url: Optional[str] = None) -> dict:
    """One saved design by name or id, with its ``design_toml`` text."""
    with read_session(url) as s:
        return _row(_get(s, ident))


def _free_copy_name(s, base: str) -> str:
    taken = set(s.exec(select(SavedDesign.name)).all())
    for i in range(1, 10_000):
        cand = f"{base} (copy{'' if i == 1 else ' ' + str(i)})"
        if len(cand) > NAME_MAX:
            cand = cand[-NAME_MAX:]
        if cand not in taken:
            return cand
    raise InputError(f"no free copy name for {base!r}", field="name")  # pragma: no cover


def duplicate_design(ident: Any, new_name: Any = None, url: Optional[str] = None) -> dict:
    """Copy a saved design (text and note) under ``new_name`` (default "<name> (copy)")."""
    with session_scope(url) as s:
        src = _get(s, ident)
        nm = _clean_name(new_name, "new name") if new_name not in (None, "") else _free_copy_name(s, src.name)
        if s.exec(select(SavedDesign).where(SavedDesign.name == nm)).first() is not None:
            raise InputError(f"a saved design called {nm!r} exists; choose another name", field="new_name")
        d = SavedDesign(name=nm, note=src.note, design_toml=src.design_toml)
        s.add(d)
        s.flush()
        return _row(d)


def delete_design(ident: Any, url: Optional[str] = None) -> dict:
    """Delete one saved design; returns what was deleted (so it can be shown or undone)."""
    with session_scope(url) as s:
        d = _get(s, ident)
        out = _row(d)
        s.delete(d)
        return out


# ---------------------------------------------------------------------------
# comparison
# ---------------------------------------------------------------------------

#: Rows of the comparison table: (key, label with unit, SI-to-shown factor, result key).
COMPARE_FIGURES = [
    ("floats", "floats", None, "floats"),
    ("gap_mm", "equilibrium gap (mm)", 1e3, "gap_m"),
    ("gap_worst_mm", "worst-case gap (mm)", 1e3, "gap_worst_m"),
    ("margin", "margin at the required gap (lift / weight)", 1.0, "margin"),
    ("max_payload_g", "largest payload at the required gap (g)", 1e3, "max_payload_kg"),
    ("k_z_n_m", "vertical stiffness k_z (N/m)", 1.0, "k_z_n_m"),
    ("f_z_hz", "vertical natural frequency (Hz)", 1.0, "f_z_hz"),
    ("k_x_n_m", "lateral stiffness k_x (N/m)", 1.0, "k_x_n_m"),
    ("laterally_stable", "laterally stable", None, "laterally_stable"),
    ("lift_derating_pct", "lift lost when hot (%)", 1.0, "lift_derating_pct"),
    ("weight_mn", "weight, plate and payload (mN)", 1e3, "weight_n"),
    ("safe_distance_cm", "distance to 0.5 mT (cm)", 1e2, "safe_distance_m"),
]


def _names(idents: Sequence[Any]) -> list:
    items = list(idents or [])
    if not (COMPARE_MIN <= len(items) <= COMPARE_MAX):
        raise InputError(f"expected {COMPARE_MIN} to {COMPARE_MAX} saved designs to compare, got {len(items)}", field="designs")
    if len({str(i) for i in items}) != len(items):
        raise InputError("expected different saved designs, got one twice", field="designs")
    return items


def _default_evaluate(text: str) -> dict:
    from matdb.analysis.levitate import levitate  # lazy: an upward call (data -> analysis), default only
    from matdb.design import load_design_text

    return levitate(load_design_text(text))


def evaluate_saved(idents: Sequence[Any], url: Optional[str] = None,
                   evaluate: Callable[[str], dict] | None = None) -> list[tuple[dict, dict]]:
    """(saved row, levitation result) for 2 to 4 saved designs. ``evaluate`` maps the
    design text to the result of :func:`matdb.analysis.levitate.levitate` (the page passes its
    cached call); the default computes it."""
    items = _names(idents)
    rows = [get_design(i, url) for i in items]
    ev = evaluate or _default_evaluate
    return [(r, ev(r["design_toml"])) for r in rows]


def _num(v) -> float | None:
    if v is None or isinstance(v, bool):
        return None
    f = float(v)
    return f if math.isfinite(f) else None


def compare_table(evaluated: Iterable[tuple[dict, dict]]) -> pd.DataFrame:
    """Key figures side by side: one row per figure (``figure`` with its unit), one column
    per design name; numbers in the unit the label names, exact (round when showing).
    Floating-magnet designs fill the rows they have."""
    evaluated = list(evaluated)
    data: dict[str, list] = {"figure": [label for _k, label, _f, _r in COMPARE_FIGURES]}
    for row, res in evaluated:
        col = []
        for _key, _label, factor, rkey in COMPARE_FIGURES:
            v = res.get(rkey)
            if factor is None:
                col.append(None if v is None else ("yes" if v else "no"))
            else:
                x = _num(v)
                col.append(None if x is None else x * factor)
        data[row["name"]] = col
    return pd.DataFrame(data)


def compare_curves(evaluated: Iterable[tuple[dict, dict]]) -> pd.DataFrame:
    """Lift curves of the compared plate designs in long form: ``design``, ``gap_mm``,
    ``force_mn``, ``weight_mn`` (floating-magnet designs have no lift curve and are left out)."""
    parts = []
    for row, res in evaluated:
        lc = res.get("lift_curve")
        if not lc:
            continue
        df = pd.DataFrame(lc)
        parts.append(pd.DataFrame({"design": row["name"], "gap_mm": df["gap_m"] * 1e3, "force_mn": df["force_n"] * 1e3,
                                   "weight_mn": float(res["weight_n"]) * 1e3}))
    if not parts:
        return pd.DataFrame(columns=["design", "gap_mm", "force_mn", "weight_mn"])
    return pd.concat(parts, ignore_index=True)
