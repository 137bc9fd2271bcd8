"""Input limits: the largest inputs matdb accepts, checked where input enters.

Every check raises :class:`~matdb.errors.InputError` with one line naming the field and
the limit, before any work is done. The same numbers are stated in the README
("Input limits"); keep the two in step.

* files (design TOML, ``--points`` CSV, lab-value CSV/JSON imports): at most
  :data:`MAX_FILE_BYTES` (design and points) or :data:`MAX_IMPORT_BYTES` (imports), read
  with a bounded read, UTF-8 text;
* nesting of brackets and braces in a TOML design or JSON import: :data:`MAX_NESTING`;
* magnets in an arrangement: ``rows`` and ``cols`` each at most :data:`MAX_ROWS_COLS`,
  at most :data:`MAX_MAGNETS` magnets in all (grid or list);
* cells along a cube edge in the recoil model (``[magnets] recoil_cells``): :data:`MAX_RECOIL_CELLS`;
* field points (``--at`` plus ``--points``): :data:`MAX_POINTS`;
* rows in one import file: :data:`MAX_IMPORT_ROWS`;
* magnitudes: every quantity finite, and within :data:`LARGEST` for its unit (lengths,
  masses, flux densities...); temperatures within :data:`TEMPERATURE_RANGE_K`;
  susceptibilities within :data:`MAX_ABS_CHI`.
"""

from __future__ import annotations

import re
from pathlib import Path

from matdb.errors import InputError
from matdb.constants import celsius_to_kelvin, kelvin_to_celsius

MAX_FILE_BYTES = 1_000_000          # design files, --points files
MAX_IMPORT_BYTES = 50_000_000       # lab-value CSV / JSON imports
MAX_IMPORT_ROWS = 200_000
MAX_NESTING = 32                    # [ and { nested in TOML or JSON text
MAX_ROWS_COLS = 100                 # magnets.rows, magnets.cols
MAX_MAGNETS = 100                   # magnets in one arrangement (grid, list, or 2 per station); the advisor's own cap
MAX_RECOIL_CELLS = 8                # recoil_cells (the dense solve: recoil.MAX_CELLS caps the total)
MAX_POINTS = 20_000                 # field points in one call (--at plus --points)

#: largest magnitude accepted for a quantity returned in these SI units
LARGEST = {
    "m": 100.0,            # lengths, gaps, sizes: 100 m
    "kg": 10_000.0,        # masses, payloads: 10 t
    "T": 100.0,            # flux densities
    "kg/m^3": 25_000.0,
    "kg/mol": 10.0,
    "A/m": 1e8,
    "kA/m": 1e5,
    "USD": 1e9,
}
TEMPERATURE_RANGE_K = (0.0, celsius_to_kelvin(1000.0))   # above absolute zero, at most 1000 degC
MAX_ABS_CHI = 1e6                      # SI volume susceptibility (a soft ferrite reaches ~1e4)

_HUMAN = {"m": "100 m", "kg": "10000 kg", "T": "100 T", "kg/m^3": "25000 kg/m^3", "kg/mol": "10 kg/mol",
          "A/m": "1e8 A/m", "kA/m": "1e5 kA/m", "USD": "1e9 USD"}


def check_magnitude(value: float, unit: str, field: str, typed) -> None:
    """Refuse a magnitude (in ``unit``) beyond :data:`LARGEST` for that unit."""
    limit = LARGEST.get(unit)
    if limit is not None and abs(value) > limit:
        raise InputError(f"{typed!r} is beyond the largest accepted magnitude, {_HUMAN[unit]}", field=field)


def check_chi(chi_si: float, field: str, typed) -> None:
    """Refuse a susceptibility that is not finite or beyond :data:`MAX_ABS_CHI` (SI volume)."""
    if not (abs(chi_si) <= MAX_ABS_CHI):  # also catches inf and nan
        raise InputError(f"{typed!r} is beyond the largest accepted susceptibility, "
                         f"|chi| <= {MAX_ABS_CHI:g} (SI volume)", field=field)


def check_temperature(kelvin: float, field: str, typed) -> None:
    lo, hi = TEMPERATURE_RANGE_K
    if not (lo < kelvin <= hi):
        raise InputError(f"{typed!r} is outside the accepted temperatures, above 0 K and at most "
                         f"{kelvin_to_celsius(hi):g} degC", field=field)


def check_count(n: int, limit: int, field: str, what: str) -> None:
    if n > limit:
        raise InputError(f"{n} {what} is more than the limit of {limit}", field=field)


def check_arrangement(rows: int, cols: int, field: str = "magnets") -> None:
    """rows and cols each at most :data:`MAX_ROWS_COLS`, rows x cols at most :data:`MAX_MAGNETS`."""
    for name, n in (("rows", rows), ("cols", cols)):
        if n > MAX_ROWS_COLS:
            raise InputError(f"{n} is more than the limit of {MAX_ROWS_COLS}", field=f"{field}.{name}")
    if rows * cols > MAX_MAGNETS:
        raise InputError(f"{rows} x {cols} = {rows * cols} magnets is more than the limit of {MAX_MAGNETS}",
                         field=f"{field}.rows")


_TOKENS = re.compile(r'"""[\s\S]*?"""|\'\'\'[\s\S]*?\'\'\'|"(?:\\.|[^"\\\n])*"|\'[^\'\n]*\'|#[^\n]*|[\[\]{}]')


def check_nesting(text: str, field: str, limit: int = MAX_NESTING) -> None:
    """Refuse TOML or JSON text whose brackets and braces nest deeper than ``limit``.

    Strings and comments are skipped; the scan is linear and never recurses, so it runs
    before a recursive parser could exhaust the stack.
    """
    depth = 0
    for m in _TOKENS.finditer(text):
        t = m.group()
        if t in "[{":
            depth += 1
            if depth > limit:
                line = text.count("\n", 0, m.start()) + 1
                raise InputError(f"line {line}: nesting deeper than the limit of {limit} levels", field=field)
        elif t in "]}":
            depth = max(0, depth - 1)


def read_text_limited(path, field: str, max_bytes: int = MAX_FILE_BYTES) -> str:
    """UTF-8 text of a regular file of at most ``max_bytes`` (bounded read: never more)."""
    p = Path(path)
    try:
        if p.exists() and not p.is_file():
            raise InputError(f"{str(p)!r} is not a regular file", field=field)
        with p.open("rb") as fh:
            raw = fh.read(max_bytes + 1)
    except FileNotFoundError:
        raise InputError(f"no such file {str(p)!r}", field=field) from None
    except IsADirectoryError:
        raise InputError(f"{str(p)!r} is a folder, expected a file", field=field) from None
    except OSError as exc:
        raise InputError(f"cannot read {str(p)!r}: {exc.strerror or exc}", field=field) from None
    if len(raw) > max_bytes:
        raise InputError(f"{str(p)!r} is larger than the limit of {max_bytes:,} bytes", field=field)
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        raise InputError(f"{str(p)!r} is not UTF-8 text ({exc.reason} at byte {exc.start})", field=field) from None
