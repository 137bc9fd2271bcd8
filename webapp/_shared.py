"""Helpers the page scripts share: cached calls into the library, availability of the
parts still being built, and error display. No physics and no SQL here: every number
comes from a public matdb function."""

from __future__ import annotations

import importlib
import os
import re
from contextlib import contextmanager

import streamlit as st

from matdb.analysis import reach
from matdb.data import catalog
from matdb.reporting import presentation
from matdb.data.db import default_url
from matdb.errors import MatdbError
from matdb.output import csv_text

# every ASCII punctuation character may be backslash-escaped in CommonMark (spec 0.31, section 2.4)
_MARKDOWN_PUNCT = re.compile(r"([!-/:-@\[-`{-~])")


_AUTOLINK = re.compile(r"(?<=:)(?=//)|(?<=www)(?=\.)|(?<=@)", re.IGNORECASE)


def plain(text) -> str:
    """Text shown exactly as typed in a Streamlit element that renders Markdown
    (``st.info``, ``st.error``, ``st.caption``...): every ASCII punctuation character is
    backslash-escaped, so no link, image, emphasis, HTML or directive is made from user text
    (notes, sources, names, error messages quoting input). The page's Markdown also turns
    bare ``http://``, ``www.`` and e-mail addresses into links after escapes are read, so an
    invisible zero-width space goes after ``:`` in ``://``, after ``www`` and after ``@``.
    Line breaks are kept."""
    def one(line: str) -> str:
        return _MARKDOWN_PUNCT.sub(r"\\\1", _AUTOLINK.sub("\u200b", line))

    return "  \n".join(one(line) for line in str(text).split("\n"))


# the library names the field at fault (MatdbError.field); the page shows it by its label
FIELD_LABELS = {
    "chi": "chi", "chi_perp": "chi along the c axis", "chi_par": "chi in the basal plane",
    "density": "density", "molar_mass": "molar mass", "temperature": "temperature",
    "uncertainty": "uncertainty", "source": "source note", "date": "date", "method": "method",
    "name": "name", "family": "magnet family", "br": "Br", "hcj": "Hcj", "alpha": "temperature coefficient of Br",
    "max_temp": "maximum working temperature", "reason": "reason",
    "mass": "payload mass", "total_mass": "total mass", "footprint": "footprint", "plate_size": "plate size",
    "magnet_envelope": "magnet envelope", "envelope": "magnet envelope", "min_gap": "smallest gap",
    "temp_min": "coldest temperature", "temp_max": "hottest temperature", "budget": "budget",
    "weights": "score weights", "thickness": "plate thickness", "payload_height": "payload height",
    "pressure": "pressure", "min_q": "smallest Q", "payload_range": "payload range",
    "conditions.temp_min": "coldest temperature", "conditions.temp_max": "hottest temperature",
    "magnets.size": "magnet size", "magnets.grade": "magnet grade", "magnets.rows": "magnet rows",
    "magnets.cols": "magnet columns", "magnets.spacing": "gap between magnets", "plate.material": "plate material",
    "plate.thickness": "plate thickness", "plate.size": "plate size", "plate.cover": "cover sheet",
    "payload.mass": "payload mass", "payload.height": "payload height",
}


def field_label(field: str | None) -> str | None:
    """The page's label for a library field name (a design-file key without one stays as it is)."""
    if not field:
        return None
    return FIELD_LABELS.get(field, field)


def error_text(exc: MatdbError, where: str | None = None) -> str:
    """One line for a matdb error, its field shown by the page's label; ``where`` (optional)
    names the place on the page it belongs to."""
    text = exc.shown_as(field_label(exc.field))
    return f"{where}: {text}" if where else text


def csv_bytes(df) -> bytes:
    """A table as CSV for ``st.download_button``: the same escaping as every CSV matdb writes."""
    return csv_text(df).encode("utf-8")


def run_page(page) -> None:
    """Run one page; a matdb error that no page caught shows as one line. Any other error is
    left to Streamlit, which with ``client.showErrorDetails = "none"`` (.streamlit/config.toml
    and ``matdb serve``) shows a one-line notice in the browser and logs the traceback to the
    server's standard error."""
    try:
        page.run()
    except MatdbError as exc:
        st.error(plain(error_text(exc)))


def db_url() -> str:
    """The database in force (``MATDB_URL`` or the default); part of every cache key."""
    return os.environ.get("MATDB_URL", "").strip() or default_url()


def module_or_none(name: str):
    """The module, or None while that part of matdb has not landed yet."""
    try:
        return importlib.import_module(name)
    except ImportError:
        return None


def not_available(what: str) -> None:
    st.info(plain(f"{what} is not available yet in this version of matdb."))


@contextmanager
def shown_errors(where: str | None = None):
    """Show a matdb error (a bad input, an unknown id, no solution) as a message at this
    place on the page instead of a crash."""
    try:
        yield
    except MatdbError as exc:
        st.error(plain(error_text(exc, where)))


# ---------------------------------------------------------------------------
# cached library calls (keyed by their arguments and the database URL)
# ---------------------------------------------------------------------------

@st.cache_data(show_spinner=False, max_entries=32)
def materials_table(convention: str, url: str):
    return presentation.materials_table(convention, url)


@st.cache_data(show_spinner=False, max_entries=8)
def arrangement_reach(url: str):
    return reach.arrangement_reach(url=url)


@st.cache_data(show_spinner=False, max_entries=8)
def magnets_df(url: str):
    return catalog.magnets_df(url)


@st.cache_data(show_spinner=False, max_entries=64)
def grade_curves(url: str, grades: tuple[str, ...], t_min_c: float, t_max_c: float):
    return presentation.grade_temperature_curves(magnets_df(url), list(grades), t_min_c, t_max_c)


@st.cache_data(show_spinner=False, max_entries=8)
def status_marks(url: str):
    return catalog.status_marks(url)


@st.cache_data(show_spinner=False, max_entries=8)
def sources_table(url: str):
    return presentation.sources_table(url)


def check_column_config(columns) -> dict:
    """Narrow text columns for the provenance marks beside values."""
    return {f"{c}_check": st.column_config.TextColumn(
        "check", width="small", help=catalog.STATUS_LEGEND) for c in columns}


def status_legend() -> None:
    st.caption("check: " + catalog.STATUS_LEGEND + ". Each number's source and locator: 'Sources and checks' "
               "below, or `matdb show ID`.")


def sources_expander(url: str, key: str) -> None:
    """The bibliography with how many values each source supports, by status."""
    with st.expander("Sources and checks"):
        try:
            src = sources_table(url)
        except MatdbError as exc:
            st.error(plain(error_text(exc, "sources")))
            return
        tot = src[["verified", "corrected", "unverified"]].sum()
        n = int(tot.sum())
        if n:
            st.write(f"{n} stored published values: {int(tot['verified'])} verified against a table (v), "
                     f"{int(tot['corrected'])} corrected from one (c), {int(tot['unverified'])} unverified (?).")
        st.dataframe(src[["key", "kind", "year", "values", "verified", "corrected", "unverified", "citation"]],
                     hide_index=True, key=key)


def clear_catalog_caches() -> None:
    """After a write to the database (a lab value), forget cached tables."""
    status_marks.clear()
    materials_table.clear()
    magnets_df.clear()
    grade_curves.clear()
    levitate_text.clear()
    field_map.clear()
    arrangement_reach.clear()
    advise.clear()
    dynamics_prep.clear()
    pressure_sweep.clear()


# ---------------------------------------------------------------------------
# designs (cached by the design text, so unchanged geometry is never recomputed)
# ---------------------------------------------------------------------------

@st.cache_data(show_spinner=False, max_entries=64)
def levitate_text(text: str, temp_k: float | None, gap_m: float | None, url: str,
                  payloads: tuple | None = None, resolution_m: float | None = None):
    """Keyed by the design's content: pass :func:`matdb.reporting.presentation.canonical_design_text`,
    so the same design from the form, the editor or a saved copy computes once."""
    from matdb.design import load_design_text
    from matdb.analysis.levitate import levitate

    return levitate(load_design_text(text), temp_k=temp_k, gap_m=gap_m,
                    payloads_kg=None if payloads is None else list(payloads), resolution_m=resolution_m)


_LEVITATED: set = set()


def levitate_text_cached(text: str, url: str) -> bool:
    """True when :func:`levitate_text` of this content key has run in this process (so no
    progress bar is needed)."""
    return (text, url) in _LEVITATED


def levitate_key(text: str, url: str) -> dict:
    """:func:`levitate_text` at the design's own temperature, remembered as computed."""
    out = levitate_text(text, None, None, url)
    _LEVITATED.add((text, url))
    return out


def evaluate_design_text(text: str, url: str) -> dict:
    """:func:`levitate_text` of any design text, through its content key."""
    from matdb.design import load_design_text

    return levitate_key(presentation.canonical_design_text(load_design_text(text), text), url)


@st.cache_data(show_spinner=False, max_entries=64)
def field_map(magnets_key: str, temp_k: float | None, gap_m: float, extent: tuple, _design):
    """Keyed by the magnets' description only: changing the plate or payload reuses it."""
    return presentation.field_map_df(_design.arrangement(temp_k), gap_m, extent)


def checked(parse, value: str, where: str):
    """Parse one field; on a bad value show the message right under the field."""
    try:
        return parse(value)
    except MatdbError as exc:
        # ``where`` is this field's own label: it stands in for the library's field name
        st.error(plain(exc.shown_as(where) if exc.field else f"{where}: {exc}"))
        return None


class _Memo:
    """A small process-wide cache (least recently used first out) for calls that report
    progress while they run: st.cache_data cannot replay a progress bar made outside the
    cached function, so these are cached here instead."""

    def __init__(self, fn, max_entries: int):
        import threading
        from collections import OrderedDict

        self.fn, self.max_entries = fn, max_entries
        self.store: "OrderedDict" = OrderedDict()
        self.lock = threading.Lock()

    def cached(self, *key) -> bool:
        with self.lock:
            return key in self.store

    def __call__(self, *key):
        with self.lock:
            if key in self.store:
                self.store.move_to_end(key)
                return self.store[key]
        value = self.fn(*key)
        with self.lock:
            self.store[key] = value
            while len(self.store) > self.max_entries:
                self.store.popitem(last=False)
        return value

    def clear(self) -> None:
        with self.lock:
            self.store.clear()


def _advise(params: tuple, url: str):
    from matdb import advisor

    return advisor.advise(url=url, **dict(params))


#: The ranked DataFrame for one set of form values (a sorted tuple of items).
advise = _Memo(_advise, 16)


def run_with_progress(fn, *args, label: str = "Working..."):
    """Call ``fn(*args)`` under a progress bar fed by the advisor's progress reports; the
    bar disappears when done. A cached answer shows no bar."""
    from matdb import advisor

    if isinstance(fn, _Memo) and fn.cached(*args):
        return fn(*args)
    slot = st.empty()
    bar = slot.progress(0.0, text=label)

    def report(fraction: float, text: str) -> None:
        bar.progress(fraction, text=f"{label} {text}")

    try:
        with advisor.reporting_progress(report):
            return fn(*args)
    finally:
        slot.empty()


# ---------------------------------------------------------------------------
# dynamics (modes, damping, Q) of a plate design, cached by the design text
# ---------------------------------------------------------------------------

@st.cache_resource(show_spinner=False, max_entries=16)
def dynamics_prep(text: str, url: str):
    """Not pickled (it holds the factorised finite-element matrices): a shared resource."""
    from matdb.design import load_design_text
    from matdb.analysis.dynamics import prepare_dynamics

    return prepare_dynamics(load_design_text(text))


def dynamics_text(text: str, pressure_pa: float, url: str) -> dict:
    from matdb.analysis.dynamics import evaluate_dynamics

    return evaluate_dynamics(dynamics_prep(text, url), pressure_pa)


@st.cache_data(show_spinner=False, max_entries=16)
def pressure_sweep(text: str, url: str):
    from matdb.design import load_design_text
    from matdb.analysis.dynamics import pressure_sweep_df

    return pressure_sweep_df(load_design_text(text), prep=dynamics_prep(text, url))


def _optimise(key: tuple, url: str, progress=None):
    from matdb import advisor
    from matdb.analysis import synthesis

    params, objective, min_margin = key
    kw = {k: v for k, v in dict(params).items() if k not in ("top", "weights")}
    req = advisor.parse_request(**kw)
    return synthesis.optimise(req, objective=objective, min_margin=min_margin, url=url, top=3,
                              progress=progress)


#: Optimiser results for one set of form values.
optimise = _Memo(lambda key, url: _optimise(key, url, _OPT_PROGRESS.get("cb")), 4)
_OPT_PROGRESS: dict = {}


def run_optimise(key: tuple, url: str, label: str = "Sizing:"):
    """:func:`matdb.analysis.synthesis.optimise` under a progress bar (no bar for a cached answer)."""
    if optimise.cached(key, url):
        return optimise(key, url)
    slot = st.empty()
    bar = slot.progress(0.0, text=label)

    def report(fraction: float, text: str) -> None:
        bar.progress(min(max(fraction, 0.0), 1.0), text=f"{label} {text}")

    _OPT_PROGRESS["cb"] = report
    try:
        return optimise(key, url)
    finally:
        _OPT_PROGRESS.pop("cb", None)
        slot.empty()
