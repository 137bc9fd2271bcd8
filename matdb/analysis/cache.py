"""Persistent cache of computed results, keyed on what they are computed from.

A result (the levitate analysis of a design, the advisor's ranking for a request) is
stored on disk with :class:`joblib.Memory` under a key made of

* the design's content: every field of the parsed design, written out canonically, with
  the catalogue values it resolved to (the plate material's susceptibility, density and
  value id, each magnet grade's remanence, coefficients and value id...), so the same
  design from a form, an editor or a saved copy shares one entry; its name, description
  and file name are left out;
* for the advisor, the request and the whole catalogue in force (every material's and
  grade's values in use);
* :func:`code_fingerprint`: the source of the modules that compute the result.

A new lab value that takes over, a retraction or an import changes the values in use,
hence the key: the next call computes afresh and the old entry is never read again.
Nothing here knows about the web page; ``MATDB_CACHE_DIR`` (else the user cache folder)
holds a ``results`` sub-folder.
"""

from __future__ import annotations

import dataclasses
import hashlib
import json
from pathlib import Path
from typing import Any

from matdb.data import catalog
from matdb.paths import cache_root

# joblib, the advisor and the levitate analysis are imported on first use: the light pages
# key their tables on :func:`catalogue_key` without paying for the analysis modules

#: Bumped when the layout of a cached value changes.
CACHE_VERSION = "1"

_HERE = Path(__file__).resolve().parent.parent
#: Folders and modules whose source feeds the cached results.
_CODE = ("physics", "analysis", "design", "advisor", "data/catalog.py", "units.py", "constants.py", "limits.py")
#: Top-level design fields that do not change a result.
_NOT_CONTENT = ("name", "description", "source")

_FINGERPRINT: str | None = None
_MEMORY: dict = {}


def cache_dir() -> Path:
    """``$MATDB_CACHE_DIR/results``, else the user cache folder's ``results`` (beside the
    advisor's tables, :func:`matdb.advisor.tables.cache_dir`)."""
    return cache_root() / "results"


def memory():
    """The :class:`joblib.Memory` store in :func:`cache_dir` (one per folder, so tests can move it)."""
    import joblib

    path = str(cache_dir())
    mem = _MEMORY.get(path)
    if mem is None:
        mem = _MEMORY[path] = joblib.Memory(path, verbose=0)
    return mem


def code_fingerprint() -> str:
    """SHA-256 (16 hex digits) of the source of every module a cached result depends on,
    read once per process: an edit to the physics recomputes."""
    global _FINGERPRINT
    if _FINGERPRINT is None:
        h = hashlib.sha256(CACHE_VERSION.encode())
        for part in _CODE:
            p = _HERE / part
            files = sorted(p.rglob("*.py")) if p.is_dir() else [p] if p.is_file() else []
            for f in files:
                h.update(str(f.relative_to(_HERE)).encode())
                h.update(f.read_bytes())
        _FINGERPRINT = h.hexdigest()[:16]
    return _FINGERPRINT


def canonical(obj: Any) -> Any:
    """A JSON-ready, order-stable picture of ``obj``: dataclasses field by field (fields
    hidden from ``repr`` and comparison too, so resolved catalogue values count), floats
    by ``repr`` (exact), mappings sorted by key."""
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return [type(obj).__name__, {f.name: canonical(getattr(obj, f.name)) for f in dataclasses.fields(obj)}]
    if isinstance(obj, dict):
        return {str(k): canonical(v) for k, v in sorted(obj.items(), key=lambda kv: str(kv[0]))}
    if isinstance(obj, (list, tuple)):
        return [canonical(v) for v in obj]
    if isinstance(obj, float):
        return repr(obj)
    if obj is None or isinstance(obj, (bool, int, str)):
        return obj
    return repr(obj)


def _digest(value: Any) -> str:
    text = json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def content_key(obj) -> str:
    """SHA-256 of :func:`canonical` of ``obj`` (any parsed design part)."""
    return _digest(canonical(obj))


def design_key(design) -> str:
    """Key of a parsed design's results: its content and the catalogue values it resolved
    to (not its name, description or file name), with :func:`code_fingerprint`."""
    c = canonical(design)
    if isinstance(c, list) and len(c) == 2 and isinstance(c[1], dict):
        c = [c[0], {k: v for k, v in c[1].items() if k not in _NOT_CONTENT}]
    return _digest(["design", code_fingerprint(), c])


def catalogue_key(url: str | None = None) -> str:
    """Key of the whole catalogue in force: every material's and grade's values in use
    (a new lab value that takes over, a retraction or an import changes it)."""
    return _digest(["catalogue", [canonical(m) for m in catalog.list_materials(url)],
                    [canonical(g) for g in catalog.list_grades(url)]])


# ---------------------------------------------------------------------------
# cached calls
# ---------------------------------------------------------------------------
@dataclasses.dataclass(frozen=True)
class CachedCall:
    """One call through the disk cache: ``key`` names its result (content, catalogue and
    code), :meth:`cached` says whether calling reads the disk instead of computing."""

    key: str
    fn: Any = dataclasses.field(repr=False)
    args: tuple = dataclasses.field(repr=False)

    def cached(self) -> bool:
        """True when the result is on disk (calling reads it, no compute)."""
        return bool(self.fn.check_call_in_cache(*self.args))

    def __call__(self):
        return self.fn(*self.args)


_FUNCS: dict[tuple[str, str], Any] = {}


def _memorized(func, ignore: list[str]):
    """``memory().cache(func)``, made once per cache folder."""
    k = (str(cache_dir()), func.__name__)
    fn = _FUNCS.get(k)
    if fn is None:
        fn = _FUNCS[k] = memory().cache(func, ignore=ignore)
    return fn


def _levitate_fn(design, **kw) -> dict:
    from matdb.analysis.levitate import levitate

    return levitate(design, **kw)


def _levitate(key: str, temp_k, gap_m, payloads, resolution_m, design) -> dict:
    return _levitate_fn(design, temp_k=temp_k, gap_m=gap_m,
                        payloads_kg=None if payloads is None else list(payloads), resolution_m=resolution_m)


def levitate_call(design, temp_k: float | None = None, gap_m: float | None = None, payloads=None,
                  resolution_m: float | None = None) -> CachedCall:
    """:func:`matdb.analysis.levitate.levitate` of a parsed design through the disk cache:
    computed only for a design content, catalogue values, arguments or code not seen before."""
    payloads = None if payloads is None else tuple(float(p) for p in payloads)
    key = _digest(["levitate", design_key(design), canonical([temp_k, gap_m, payloads, resolution_m])])
    return CachedCall(key, _memorized(_levitate, ["design"]), (key, temp_k, gap_m, payloads, resolution_m, design))


def levitate(design, temp_k: float | None = None, gap_m: float | None = None, payloads=None,
             resolution_m: float | None = None) -> dict:
    """:func:`levitate_call` and call it."""
    return levitate_call(design, temp_k, gap_m, payloads, resolution_m)()


def _advise(key: str, params: tuple, url):
    from matdb import advisor as engine

    return engine.advise(url=url, **dict(params))


def advise_call(params, url: str | None = None) -> CachedCall:
    """:func:`matdb.advisor.engine.advise` (keyword arguments as ``(name, value)`` items)
    through the disk cache, keyed on the request and the whole catalogue in force."""
    params = tuple(sorted(params))
    key = _digest(["advise", code_fingerprint(), catalogue_key(url), canonical(list(params))])
    return CachedCall(key, _memorized(_advise, ["params", "url"]), (key, params, url))


def advise(params, url: str | None = None):
    """:func:`advise_call` and call it."""
    return advise_call(params, url)()


def trim(bytes_limit: str | int = "1G") -> None:
    """Drop the least recently used results beyond ``bytes_limit`` (joblib's size units)."""
    memory().reduce_size(bytes_limit=bytes_limit)
