"""Computed results for the Design and Advisor pages: the levitate analysis, the advisor's
ranking, the field map, dynamics and the sizing optimiser.

Results are kept in memory for this server and on disk across restarts
(:mod:`matdb.analysis.cache`), keyed on the design's content and the catalogue values it
uses, so nothing is computed twice and a new lab value, a retraction or an import (which
change those values) computes afresh. Anything computed shows a progress bar. No physics
here: every number comes from a public matdb function. Kept apart from
:mod:`webapp._shared` so the Materials, Magnets and Lab values pages do not import the
analysis modules.
"""

from __future__ import annotations

import logging
import os
import threading
import time
from collections import OrderedDict

import streamlit as st

from matdb import advisor as advisor_engine
from matdb.analysis import cache, synthesis
from matdb.analysis.dynamics import evaluate_dynamics, prepare_dynamics, pressure_sweep_df
from matdb.design import load_design_text
from matdb.reporting import presentation
from webapp import _shared as sh


_LOG = logging.getLogger("matdb.page")


class _Memo:
    """A small process-wide store (least recently used first out) of results by their
    content key. Results are shared between sessions: pages read them, never change them."""

    def __init__(self, max_entries: int):
        self.max_entries = max_entries
        self.store: OrderedDict = OrderedDict()
        self.lock = threading.Lock()

    def cached(self, key) -> bool:
        with self.lock:
            return key in self.store

    def get(self, key):
        with self.lock:
            self.store.move_to_end(key)
            return self.store[key]

    def put(self, key, value) -> None:
        with self.lock:
            self.store[key] = value
            while len(self.store) > self.max_entries:
                self.store.popitem(last=False)

    def clear(self) -> None:
        with self.lock:
            self.store.clear()


_RESULTS = _Memo(64)


def is_ready(call: cache.CachedCall) -> bool:
    """True when ``call``'s result is in memory or on disk (no compute, no progress bar)."""
    return _RESULTS.cached(call.key) or call.cached()


def _with_bar(fn, label: str, bar=None):
    """``fn(report)`` under a progress bar (``bar``: an existing ``st.progress`` element),
    moved by ``report(fraction, text)``; a new bar disappears when done."""
    slot = None if bar is not None else st.empty()
    if bar is None:
        bar = slot.progress(0.0, text=label)
    bar.progress(0.05, text=label)

    def report(fraction: float, text: str = "") -> None:
        bar.progress(min(max(float(fraction), 0.0), 1.0), text=f"{label} {text}".strip()[:160])

    try:
        return fn(report)
    finally:
        if slot is not None:
            slot.empty()


_INFLIGHT: dict = {}  # key -> threading.Event, set when that computation ends
_INFLIGHT_LOCK = threading.Lock()


def _compute(call: cache.CachedCall, run):
    """``run()`` once per key across sessions and threads: a second caller of a key being
    computed waits for the first (``None`` back: read the store)."""
    with _INFLIGHT_LOCK:
        done = _INFLIGHT.get(call.key)
        mine = done is None
        if mine:
            done = _INFLIGHT[call.key] = threading.Event()
    if not mine:
        done.wait()
        if _RESULTS.cached(call.key):
            return _RESULTS.get(call.key)
        return run()  # the first caller failed: compute here and show its error
    try:
        value = run()
        _RESULTS.put(call.key, value)
        return value
    finally:
        with _INFLIGHT_LOCK:
            _INFLIGHT.pop(call.key, None)
        done.set()


def result_of(call: cache.CachedCall, label: str = "Working...", bar=None, how: dict | None = None):
    """The result of ``call``: from memory, else from disk, else computed under a progress
    bar (``label``; the advisor's progress reports move it). ``how``, when given, receives
    ``computed`` (True when computed by this call or a background one it waited for) and
    ``seconds`` (time spent here)."""
    t0 = time.perf_counter()
    computed = False
    if _RESULTS.cached(call.key):
        value = _RESULTS.get(call.key)
    elif call.cached():
        value = _compute(call, call)
    else:
        computed = True

        def run(report):
            with advisor_engine.reporting_progress(report):
                return call()

        value = _with_bar(lambda report: _compute(call, lambda: run(report)), label, bar)
    if how is not None:
        how.update(computed=computed, seconds=time.perf_counter() - t0)
    return value


def provenance_text(how: dict) -> str:
    """One line saying whether a result was computed now or read from the results cache."""
    if how.get("computed"):
        return f"Computed now ({how['seconds']:.1f} s); kept for this design content and catalogue values."
    return "From the results cache: computed before for this design content and the catalogue values in use."


_PENDING: dict = {}  # the one call waiting for the background worker ("next")
_WORKER: dict = {}  # the running background worker thread ("thread")


def background_enabled() -> bool:
    """Background computing is on unless ``MATDB_PAGE_WARM_UP=0``."""
    return os.environ.get("MATDB_PAGE_WARM_UP", "1") != "0"


def prefetch(call: cache.CachedCall) -> None:
    """Queue ``call`` for one background worker when it is not ready, so a page that asks
    for it next finds it done (or waits for it: no second computation). One computation
    at a time in the background; a newer request replaces one still waiting."""
    if not background_enabled() or is_ready(call):
        return
    with _INFLIGHT_LOCK:
        if call.key in _INFLIGHT:
            return
        _PENDING["next"] = call
        running = _WORKER.get("thread")
        if running is not None and running.is_alive():
            return

        def work():
            while True:
                with _INFLIGHT_LOCK:
                    nxt = _PENDING.pop("next", None)
                    if nxt is None:
                        _WORKER.pop("thread", None)
                        return
                try:
                    if not is_ready(nxt):
                        _compute(nxt, nxt)
                except Exception as exc:  # best effort: the page that asks for it computes again and shows any error
                    _LOG.info("background computation %s failed: %s", nxt.key[:12], exc)

        _WORKER["thread"] = threading.Thread(target=work, daemon=True, name="matdb-prefetch")
        _WORKER["thread"].start()


def levitate_call(design, temp_k=None, gap_m=None, payloads=None, resolution_m=None) -> cache.CachedCall:
    """:func:`matdb.analysis.cache.levitate_call`: the levitate analysis of a parsed design."""
    return cache.levitate_call(design, temp_k, gap_m, payloads, resolution_m)


def levitate_design(design, temp_k=None, gap_m=None, payloads=None, resolution_m=None,
                    label: str = "Computing the lift curve, stiffnesses and checks...", bar=None) -> dict:
    """The levitate analysis of a parsed design, computed once per content (see :func:`result_of`)."""
    return result_of(levitate_call(design, temp_k, gap_m, payloads, resolution_m), label, bar)


def levitate_text(text: str, temp_k=None, gap_m=None, payloads=None, resolution_m=None) -> dict:
    """:func:`levitate_design` of a design file's text."""
    return levitate_design(load_design_text(text), temp_k, gap_m, payloads, resolution_m)


def advise_call(params, url: str) -> cache.CachedCall:
    """:func:`matdb.analysis.cache.advise_call`: the advisor's ranking for one set of form values."""
    return cache.advise_call(params, url)


def advise(params, url: str, label: str = "Ranking every plate material, grade and arrangement:"):
    """The advisor's ranked DataFrame for one set of form values (``(name, value)`` items),
    computed once per request and catalogue (see :func:`result_of`)."""
    return result_of(cache.advise_call(params, url), label)


def design_key(design) -> str:
    """Content key of a parsed design (:func:`matdb.analysis.cache.design_key`)."""
    return cache.design_key(design)


#: The Advisor page's form as it opens.
ADVISOR_DEFAULTS = {"mass": "0.2 g", "footprint": "17 mm x 17 mm", "min_gap": "0.2 mm", "temp_min": "20 degC",
                    "temp_max": "20 degC", "budget": "", "materials": (), "families": (), "top": 30,
                    "weights": "margin=1,cost=1,derating=1"}


def advisor_params(*, mass, footprint, min_gap, temp_min, temp_max, budget="", plate_size="", envelope="",
                   materials=(), families=(), weights="", top=30, total=False) -> dict:
    """The advisor's keyword arguments from the Advisor page's form values (text as typed)."""
    return dict(mass=None if total else mass.strip(), total_mass=mass.strip() if total else None,
                footprint=footprint.strip(), min_gap=min_gap.strip(), temp_min=temp_min.strip(),
                temp_max=temp_max.strip(), budget=budget.strip() or None,
                plate_size=plate_size.strip() or None, envelope=envelope.strip() or None,
                materials=tuple(materials) or None, families=tuple(families) or None,
                weights=weights.strip() or None, top=int(top))


def design_as_the_form_shows(text: str):
    """The parsed design the Design page computes for ``text`` opened there: through the
    form's fields when the form can show it (as "Open" does), else the text itself."""
    design = load_design_text(text)
    fields = presentation.form_fields_from_design(design)
    return design if fields is None else load_design_text(presentation.design_text_from_fields(fields))


def prefetch_defaults(url: str) -> None:
    """Compute what the Design and Advisor pages show as they open, one after the other
    (call it from a background thread)."""
    d = ADVISOR_DEFAULTS
    for call in (levitate_call(load_design_text(presentation.design_text_from_fields(presentation.DESIGN_FORM_DEFAULTS))),
                 advise_call(tuple(sorted(advisor_params(
                     mass=d["mass"], footprint=d["footprint"], min_gap=d["min_gap"], temp_min=d["temp_min"],
                     temp_max=d["temp_max"], budget=d["budget"], materials=d["materials"], families=d["families"],
                     weights=d["weights"], top=d["top"]).items())), url)):
        if not is_ready(call):
            _compute(call, call)


def magnets_key(design) -> str:
    """Content key of a design's magnets, catalogue values of their grades included."""
    return cache.content_key(design.magnets)


@st.cache_data(show_spinner=False, max_entries=64)
def field_map(magnets: str, temp_k: float | None, gap_m: float, extent: tuple, _design):
    """Keyed by the magnets' content (:func:`magnets_key`): changing the plate or payload reuses it."""
    return presentation.field_map_df(_design.arrangement(temp_k), gap_m, extent)


# ---------------------------------------------------------------------------
# dynamics (modes, damping, Q) of a plate design, keyed on its content
# ---------------------------------------------------------------------------

def dynamics_key(design) -> str:
    """Content key of a plate design's dynamics: its content with the catalogue values it
    resolved to (:func:`design_key`) and the plate material's conductivity in use."""
    from matdb.data.catalog import get_conductivity

    return cache.content_key([design_key(design), get_conductivity(design.plate.material)])


@st.cache_resource(show_spinner=False, max_entries=16)
def _dynamics_prep(key: str, _design):
    """Not pickled (it holds the factorised finite-element matrices): a shared resource."""
    return prepare_dynamics(_design)


def dynamics_prep(design):
    """:func:`matdb.analysis.dynamics.prepare_dynamics` once per :func:`dynamics_key`."""
    return _dynamics_prep(dynamics_key(design), design)


def dynamics(design, pressure_pa: float) -> dict:
    """Modes, damping, Q and noise of a parsed plate design at one gas pressure."""
    return evaluate_dynamics(dynamics_prep(design), pressure_pa)


@st.cache_data(show_spinner=False, max_entries=16)
def _pressure_sweep(key: str, _design):
    return pressure_sweep_df(_design, prep=dynamics_prep(_design))


def pressure_sweep(design):
    """Q against pressure for each mode, once per :func:`dynamics_key`."""
    return _pressure_sweep(dynamics_key(design), design)


# ---------------------------------------------------------------------------
# sizing optimiser
# ---------------------------------------------------------------------------

_OPTIMISED = _Memo(4)


def _optimise_key(key: tuple, url: str) -> tuple:
    return key, url, sh.catalogue_stamp(url)


def optimise_done(key: tuple, url: str) -> bool:
    """True when the optimiser has run for these form values and this catalogue."""
    return _OPTIMISED.cached(_optimise_key(key, url))


def run_optimise(key: tuple, url: str, label: str = "Sizing:"):
    """:func:`matdb.analysis.synthesis.optimise` under a progress bar (no bar for a cached answer)."""
    k = _optimise_key(key, url)
    if _OPTIMISED.cached(k):
        return _OPTIMISED.get(k)
    params, objective, min_margin = key
    kw = {n: v for n, v in dict(params).items() if n not in ("top", "weights")}
    req = advisor_engine.parse_request(**kw)
    value = _with_bar(lambda report: synthesis.optimise(req, objective=objective, min_margin=min_margin, url=url,
                                                        top=3, progress=report), label)
    _OPTIMISED.put(k, value)
    return value


