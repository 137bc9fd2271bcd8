"""Helpers the page scripts share: cached calls into the library, availability of the
parts still being built, and error display. No physics and no SQL here: every number
comes from a public matdb function."""

from __future__ import annotations

import cProfile
import hashlib
import os
import re
import threading
from contextlib import contextmanager
from pathlib import Path

import pandas as pd
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


def csv_bytes(df) -> bytes:
    """A table as CSV for ``st.download_button``: the same escaping as every CSV matdb writes."""
    return csv_text(df).encode("utf-8")


def run_page(page) -> None:
    """Run one page; a matdb error that no page caught shows as one line. Any other error is
    left to Streamlit, which with ``client.showErrorDetails = "none"`` (.streamlit/config.toml
    and ``matdb serve``) shows a one-line notice in the browser and logs the traceback to the
    server's standard error.

    For developers: with ``MATDB_PAGE_PROFILE`` set to a folder, each run of a page is
    profiled (:mod:`cProfile`) into ``<folder>/<page>-<n>.prof``."""
    folder = os.environ.get("MATDB_PAGE_PROFILE")
    prof = cProfile.Profile() if folder else None
    try:
        if prof is not None:
            prof.enable()
        page.run()
    except MatdbError as exc:
        st.error(plain(error_text(exc)))
    finally:
        if prof is not None:
            prof.disable()
            _dump_profile(prof, Path(folder), getattr(page, "url_path", "") or "materials")


def _dump_profile(prof, folder: Path, name: str) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    n = len(list(folder.glob(f"{name}-*.prof")))
    prof.dump_stats(str(folder / f"{name}-{n}.prof"))


_WARMED: set = set()
_WARMED_LOCK = threading.Lock()


def warm_up_in_background(url: str) -> None:
    """Once per server and database: compute what the Design and Advisor pages show as
    they open, in a background thread, while the person reads another page."""
    with _WARMED_LOCK:
        if url in _WARMED:
            return
        _WARMED.add(url)

    def work():
        # imported here, in the background: the analysis modules stay out of the light pages' first render
        from webapp import _results

        try:
            _results.prefetch_defaults(url)
        except Exception as exc:  # best effort: each page computes what it needs and shows any error
            _results._LOG.info("warm-up failed: %s", exc)

    threading.Thread(target=work, daemon=True, name="matdb-warm-up").start()


def db_url() -> str:
    """The database in force (``MATDB_URL`` or the default); part of every cache key."""
    return os.environ.get("MATDB_URL", "").strip() or default_url()


@contextmanager
def shown_errors(where: str | None = None):
    """Show a matdb error (a bad input, an unknown id, no solution) as a message at this
    place on the page instead of a crash."""
    try:
        yield
    except MatdbError as exc:
        st.error(plain(error_text(exc, where)))


# ---------------------------------------------------------------------------
# cached library calls, keyed by their arguments and the catalogue's content
# ---------------------------------------------------------------------------

_STAMP = "_catalogue_stamp"


def catalogue_stamp(url: str) -> str:
    """Content key of the catalogue in force (every material's and grade's values in use,
    :func:`matdb.analysis.cache.catalogue_key`), read once per page run (about 10 ms):
    the page's tables are cached under it, so a value recorded, retracted or imported
    anywhere (the CLI, another session) shows on the next run."""
    held = st.session_state.get(_STAMP)
    if held is not None and held[0] == url:
        return held[1]
    from matdb.analysis.cache import catalogue_key

    stamp = catalogue_key(url)
    st.session_state[_STAMP] = (url, stamp)
    return stamp


def begin_run(url: str) -> None:
    """At the start of every page run: read the catalogue's content key afresh."""
    st.session_state.pop(_STAMP, None)
    catalogue_stamp(url)


@st.cache_data(show_spinner=False, max_entries=32)
def _materials_table(convention: str, url: str, stamp: str):
    return presentation.materials_table(convention, url)


def materials_table(convention: str, url: str):
    """Materials with their values in use, in a susceptibility convention."""
    return _materials_table(convention, url, catalogue_stamp(url))


_REACH_DONE: set = set()  # (url, grades key) of reaches computed by this server


@st.cache_data(show_spinner=False, max_entries=8)
def _arrangement_reach(url: str, grades_key: str):
    value = reach.arrangement_reach(url=url)
    _REACH_DONE.add((url, grades_key))
    return value


def _reach_key(url: str) -> str:
    used = sorted({spec.grade for spec in reach.STANDARD_ARRANGEMENTS})
    grades = magnets_df(url)
    return frame_key(grades[grades["grade"].isin(used)])


def arrangement_reach(url: str):
    """The reach of the common arrangements, keyed on the values of the grades they use."""
    return _arrangement_reach(url, _reach_key(url))


def arrangement_reach_ready(url: str) -> bool:
    """True when :func:`arrangement_reach` has these grade values computed (no progress bar)."""
    return (url, _reach_key(url)) in _REACH_DONE


@st.cache_data(show_spinner=False, max_entries=8)
def _magnets_df(url: str, stamp: str):
    return catalog.magnets_df(url)


def magnets_df(url: str):
    """Magnet grades with their values in use."""
    return _magnets_df(url, catalogue_stamp(url))


@st.cache_data(show_spinner=False, max_entries=64)
def _grade_curves(url: str, stamp: str, grades: tuple[str, ...], t_min_c: float, t_max_c: float):
    return presentation.grade_temperature_curves(magnets_df(url), list(grades), t_min_c, t_max_c)


def grade_curves(url: str, grades: tuple[str, ...], t_min_c: float, t_max_c: float):
    return _grade_curves(url, catalogue_stamp(url), grades, t_min_c, t_max_c)


@st.cache_data(show_spinner=False, max_entries=8)
def _status_marks(url: str, stamp: str):
    return catalog.status_marks(url)


def status_marks(url: str):
    return _status_marks(url, catalogue_stamp(url))


@st.cache_data(show_spinner=False, max_entries=8)
def _sources_table(url: str, stamp: str):
    return presentation.sources_table(url)


def sources_table(url: str):
    return _sources_table(url, catalogue_stamp(url))


def check_column_config(columns) -> dict:
    """Narrow text columns for the provenance marks beside values."""
    return {f"{c}_check": st.column_config.TextColumn(
        "check", width="small", help=catalog.STATUS_LEGEND) for c in columns}


def status_legend() -> None:
    st.caption("check: " + catalog.STATUS_LEGEND + ". Each number's source and locator: 'Sources and checks' "
               "below, or `matdb show ID`.")


def sources_expander(url: str, key: str) -> None:
    """The bibliography with how many values each source supports, by status (built when
    the panel is opened: ``key`` names its table, ``key`` + "_panel" the panel)."""
    panel = st.expander("Sources and checks", key=f"{key}_panel", on_change="rerun")
    if not panel.open:
        return
    with panel:
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


# ---------------------------------------------------------------------------
# charts: built once per content (building and checking an Altair chart takes
# 0.1-0.5 s each; the page would pay it on every run)
# ---------------------------------------------------------------------------

try:  # Streamlit's own Altair -> Vega-Lite conversion (data as Arrow), the one st.altair_chart uses
    from streamlit.elements.vega_charts import _convert_altair_to_vega_lite_spec as _to_vega_lite
except ImportError:  # pragma: no cover - another Streamlit version: charts are built on every run
    _to_vega_lite = None


@st.cache_data(show_spinner=False, max_entries=256)
def _chart_spec(content: tuple, _build) -> dict:
    return _to_vega_lite(_build())


def frame_key(df) -> str | None:
    """Content key of a DataFrame (values, index and column names) for :func:`chart`."""
    if df is None:
        return None
    h = hashlib.sha256(pd.util.hash_pandas_object(df, index=True).to_numpy().tobytes())
    h.update(repr(list(df.columns)).encode())
    return h.hexdigest()


def chart(content: tuple, build, where=None, canvas: bool = False, **kwargs):
    """Show the Altair chart ``build()`` (``st.altair_chart`` arguments in ``kwargs``),
    built and converted once per ``content``: a tuple naming everything the chart is drawn
    from (content keys of results, form values). ``where``: a column or container.
    ``canvas``: drawn on a canvas, not as SVG (a map of a thousand cells or more: far less
    work for the browser; its title and axis titles are drawn the same)."""
    where = st if where is None else where
    if _to_vega_lite is None:
        return where.altair_chart(build(), **kwargs)
    spec = _chart_spec(content, build)
    if canvas:
        spec = {**spec, "usermeta": {**spec.get("usermeta", {}), "embedOptions": {"renderer": "canvas"}}}
    return where.vega_lite_chart(spec, **kwargs)


def clear_catalog_caches() -> None:
    """After a write to the database by this page: read the catalogue's content key afresh
    (tables and results are keyed on it, or on the values they use) and forget what is
    keyed on something else (status marks and sources follow provenance rows too)."""
    st.session_state.pop(_STAMP, None)
    _status_marks.clear()
    _sources_table.clear()


def checked(parse, value: str, where: str):
    """Parse one field; on a bad value show the message right under the field."""
    try:
        return parse(value)
    except MatdbError as exc:
        # ``where`` is this field's own label: it stands in for the library's field name
        st.error(plain(exc.shown_as(where) if exc.field else f"{where}: {exc}"))
        return None
