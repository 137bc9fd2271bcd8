"""Selection advisor: rank plate-material x magnet-grade x arrangement candidates.

The question it answers: "this payload (mass, footprint) must float at least this high,
between these temperatures, within this budget: which plate material, which grade,
which arrangement, and how sure can I be?"

The flow, one module per step: :mod:`~matdb.advisor.request` (what was asked, in SI) ->
:mod:`~matdb.advisor.candidates` (arrangements, materials, grades, thicknesses) ->
:mod:`~matdb.advisor.tables` (unit-polarisation tables per geometry and their disk cache)
-> :mod:`~matdb.advisor.screening` (every candidate from the tables) ->
:mod:`~matdb.advisor.ranking` (sort, tilt check, exact rows, Pareto front; the API) with
:mod:`~matdb.advisor.exact` (the best rows worked out by ``matdb levitate`` itself) and
:mod:`~matdb.advisor.reasons` (rejections in words); :mod:`~matdb.advisor.dynamics` adds
the noise and Q objectives.

This package's namespace is its public API (the names below).
"""

from matdb.advisor.candidates import (DEFAULT_PATTERNS, MAX_MAGNETS, STANDARD_CUBES_M,
                                      STANDARD_CYLINDERS_M, ArrangementSpec, Catalogue,
                                      build_catalogue, default_arrangements, grade_chi_rec,
                                      matched_thickness, matched_thicknesses, row_request)
from matdb.advisor.exact import candidate_design, exact_evaluation, save_design
from matdb.advisor.reasons import envelope_reason, reasons_for
from matdb.advisor.request import (DEFAULT_THICKNESSES_M, PLATE_FRACTIONS, AdviceRequest, Weights,
                                   parse_dimensions, parse_envelope, parse_footprint,
                                   parse_request, parse_weights)
from matdb.advisor.ranking import (COLUMNS, JSON_EXTRA, advise, advise_request, finish,
                                   pareto_front, rank, records, refresh_flags, score_values,
                                   screen_plates)
from matdb.advisor.screening import check_tilt, reporting_progress, screen
from matdb.advisor.tables import (EXACT_ORDER, SCREEN_HEIGHTS_M, GeometryData, cache_dir,
                                  clear_memory_cache, geometry)

__all__ = [
    "DEFAULT_PATTERNS", "MAX_MAGNETS", "STANDARD_CUBES_M", "STANDARD_CYLINDERS_M",
    "ArrangementSpec", "Catalogue", "build_catalogue", "default_arrangements", "grade_chi_rec",
    "matched_thickness", "matched_thicknesses", "row_request", "candidate_design",
    "exact_evaluation", "save_design", "envelope_reason", "reasons_for", "DEFAULT_THICKNESSES_M",
    "PLATE_FRACTIONS", "AdviceRequest", "Weights", "parse_dimensions", "parse_envelope",
    "parse_footprint", "parse_request", "parse_weights", "COLUMNS", "JSON_EXTRA", "advise",
    "advise_request", "finish", "pareto_front", "rank", "records", "refresh_flags",
    "score_values", "screen_plates", "check_tilt", "reporting_progress", "screen",
    "EXACT_ORDER", "SCREEN_HEIGHTS_M", "GeometryData", "cache_dir", "clear_memory_cache",
    "geometry",
]
