"""Printing records as an aligned table, JSON or CSV (pandas-readable)."""

from __future__ import annotations

import json
import math
import os
import sys
from pathlib import Path
from typing import TYPE_CHECKING, Any, Iterable, Sequence

if TYPE_CHECKING:
    import pandas as pd

from matdb.errors import InputError

FORMATS = ("table", "json", "csv")


_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def escape_cell(text: str) -> str:
    """Neutralise spreadsheet formulas: a text cell beginning with = + - @ tab CR (or a quote)
    gets a leading ``'``. Every CSV matdb writes (command line and page) goes through here.

    References: OWASP, "CSV Injection" (prefix such cells with a single quote).
    """
    if text and (text[0] in _FORMULA_START or text[0] == "'"):
        return "'" + text
    return text


def unescape_cell(text: str) -> str:
    """Undo :func:`escape_cell` (a ``'`` before = + - @ tab CR or a quote is removed)."""
    if len(text) >= 2 and text[0] == "'" and (text[1] in _FORMULA_START or text[1] == "'"):
        return text[1:]
    return text


def _flatten(v: Any) -> Any:
    if isinstance(v, (list, dict)):
        return json.dumps(v, default=_json_default)
    if isinstance(v, tuple):
        return json.dumps(list(v), default=_json_default)
    return v


def csv_text(data, columns: Sequence[str] | None = None, float_format: str | None = None) -> str:
    """CSV text of a DataFrame or a list of records, safe to open in a spreadsheet.

    Text cells go through :func:`escape_cell`; lists and dicts become JSON text; numbers are
    written exactly (``repr``) unless ``float_format`` is given. The one CSV writer behind
    every download and every ``--format csv``.
    """
    import pandas as pd  # lazy: tables and JSON need no pandas (keeps `matdb materials` start-up light)

    df = data.copy() if isinstance(data, pd.DataFrame) else pd.DataFrame(list(data))
    if columns:
        df = df[[c for c in columns if c in df.columns]]
    for c in df.columns:
        if df[c].dtype == object or str(df[c].dtype) in ("string", "str"):
            df[c] = df[c].map(lambda v: escape_cell(w) if isinstance(w := _flatten(v), str) else w)
    df.columns = [escape_cell(str(c)) for c in df.columns]
    return df.to_csv(index=False, float_format=float_format, lineterminator="\n")


class Marked:
    """A number printed with a short text mark after it (table output only), e.g. ``1.3 v``."""

    __slots__ = ("value", "mark")

    def __init__(self, value: Any, mark: str):
        self.value, self.mark = value, mark

    def __repr__(self) -> str:  # pragma: no cover
        return f"Marked({self.value!r}, {self.mark!r})"


def with_marks(rows: Sequence[dict], marks: dict[str, dict[str, str]], key: str,
               columns: Iterable[str]) -> list[dict]:
    """Copies of ``rows`` whose ``columns`` carry the mark ``marks[row[key]][column]``."""
    out = []
    for r in rows:
        m = marks.get(r.get(key), {})
        d = dict(r)
        for c in columns:
            if c in d and d[c] is not None and c in m:
                d[c] = Marked(d[c], m[c])
        out.append(d)
    return out


def add_format_argument(parser, choices: Sequence[str] = FORMATS, default: str = "table") -> None:
    parser.add_argument("--format", choices=list(choices), default=default,
                        help=f"output format ({', '.join(choices)}; default {default})")


def _json_default(o: Any):
    try:
        import numpy as np  # lazy: keeps numpy off the CLI start-up path (only numbers from numpy need it)

        if isinstance(o, np.generic):
            return o.item()
        if isinstance(o, np.ndarray):
            return o.tolist()
    except ImportError:  # pragma: no cover
        pass
    if hasattr(o, "isoformat"):
        return o.isoformat()
    raise TypeError(f"not JSON serialisable: {type(o).__name__}")


def _clean(o):
    """NaN and inf are not JSON: turn them into null."""
    if isinstance(o, float) and not math.isfinite(o):
        return None
    if isinstance(o, dict):
        return {k: _clean(v) for k, v in o.items()}
    if isinstance(o, (list, tuple)):
        return [_clean(v) for v in o]
    return o


def to_json(data: Any) -> str:
    return json.dumps(_clean(data), indent=2, default=_json_default, ensure_ascii=False)


def _fmt_cell(v: Any) -> str:
    if isinstance(v, Marked):
        return f"{_fmt_cell(v.value)} {v.mark}"
    if v is None:
        return "-"
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        if not math.isfinite(v):
            return "-"
        if v == 0:
            return "0"
        a = abs(v)
        if a >= 1e7 or a < 1e-3:
            return f"{v:.4g}"
        decimals = max(0, 3 - int(math.floor(math.log10(a))))
        return f"{v:.{decimals}f}".rstrip("0").rstrip(".") if "." in f"{v:.{decimals}f}" else f"{v:.{decimals}f}"
    if isinstance(v, (list, dict)):
        return json.dumps(v, default=_json_default)[:40]
    return str(v)


def format_table(rows: Sequence[dict], columns: Sequence[str] | None = None,
                 headers: dict[str, str] | None = None, max_width: int = 60) -> str:
    """Aligned plain-text table; numbers right-aligned."""
    if not rows:
        return "(no rows)"
    columns = list(columns or rows[0].keys())
    headers = headers or {}
    cells = [[_fmt_cell(r.get(c)) for c in columns] for r in rows]
    cells = [[c if len(c) <= max_width else c[: max_width - 3] + "..." for c in row] for row in cells]
    head = [headers.get(c, c) for c in columns]
    widths = [max(len(h), *(len(row[i]) for row in cells)) for i, h in enumerate(head)]
    numeric = [all(isinstance(r.get(c), (int, float, Marked)) and not isinstance(r.get(c), bool)
                   for r in rows if r.get(c) is not None) for c in columns]
    def line(vals):
        return "  ".join(v.rjust(w) if num else v.ljust(w) for v, w, num in zip(vals, widths, numeric)).rstrip()
    out = [line(head), "  ".join("-" * w for w in widths)]
    out += [line(row) for row in cells]
    return "\n".join(out)


def format_keyvalue(record: dict, units: dict[str, str] | None = None) -> str:
    units = units or {}
    width = max(len(k) for k in record) if record else 0
    lines = []
    for k, v in record.items():
        if isinstance(v, (list, dict)):
            continue
        u = units.get(k, "")
        lines.append(f"{k.ljust(width)}  {_fmt_cell(v)}{(' ' + u) if u and v is not None else ''}")
    return "\n".join(lines)


def emit(data: Any, fmt: str, columns: Sequence[str] | None = None,
         headers: dict[str, str] | None = None, stream=None) -> None:
    """Print ``data`` (a list of records or one record) in ``fmt``."""
    stream = stream or sys.stdout
    if fmt == "json":
        stream.write(to_json(data) + "\n")
        return
    rows = data if isinstance(data, list) else [data]
    if fmt == "csv":
        stream.write(csv_text(rows, columns, float_format="%.10g"))
        return
    if isinstance(data, dict):
        stream.write(format_keyvalue(data) + "\n")
    else:
        stream.write(format_table(rows, columns, headers) + "\n")


def check_output_path(path, field: str) -> Path:
    """Refuse, before any work is done, an output file that cannot be written.

    The folder must exist and be writable, and the path must not be a folder. Returns the
    path. Commands call this first, so a long computation never ends in a failed write.
    """
    text = str(path).strip()
    if not text:
        raise InputError("expected a file name, got an empty one", field=field)
    p = Path(text).expanduser()
    if p.is_dir():
        raise InputError(f"{text!r} is a folder, expected a file name", field=field)
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"folder {str(folder)!r} does not exist", field=field)
    if not os.access(folder, os.W_OK | os.X_OK) or (p.exists() and not os.access(p, os.W_OK)):
        raise InputError(f"cannot write {text!r} (permission denied)", field=field)
    return p


def records(df: "pd.DataFrame") -> list[dict]:
    """DataFrame rows as plain dicts with None for missing values."""
    out = []
    for r in df.to_dict(orient="records"):
        out.append({k: (None if (isinstance(v, float) and math.isnan(v)) else v) for k, v in r.items()})
    return out
