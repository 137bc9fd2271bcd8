"""What common magnet arrangements reach: the field-gradient product
(:mod:`matdb.physics.levitation`) over a few arrangements people commonly build, with the
grades' Br from the catalogue, so the Materials page can mark which materials they float.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Iterable

import pandas as pd

from matdb.data import catalog
from matdb.errors import InputError
from matdb.physics.arrangement import build_arrangement
from matdb.physics.levitation import REACH_GAP_M, REACH_PLATE_M, reach_of

__all__ = ["StandardArrangement", "STANDARD_ARRANGEMENTS", "build_standard", "arrangement_reach", "reach_band"]


@dataclass(frozen=True)
class StandardArrangement:
    """A magnet arrangement people commonly build, in design-file terms (SI)."""

    key: str
    description: str
    shape: str
    size_m: tuple[float, ...]
    grade: str
    pattern: str
    rows: int = 1
    cols: int = 1


#: Demo arrangements (common sizes, no source: they only set the scale of the verdicts).
STANDARD_ARRANGEMENTS: tuple[StandardArrangement, ...] = (
    StandardArrangement("cube-10", "one 10 mm N42 cube", "cuboid", (0.010, 0.010, 0.010), "N42", "single"),
    StandardArrangement("cyl-20x10", "one 20 mm x 10 mm N42 disc", "cylinder", (0.020, 0.010), "N42", "single"),
    StandardArrangement("check-2x2-12.7", "2x2 checkerboard of 12.7 mm N42 cubes", "cuboid",
                        (0.0127, 0.0127, 0.0127), "N42", "checkerboard", 2, 2),
    StandardArrangement("check-4x4-6", "4x4 checkerboard of 6 mm N42 cubes", "cuboid",
                        (0.006, 0.006, 0.006), "N42", "checkerboard", 4, 4),
    StandardArrangement("stripes-4-5", "4 stripes of 5 x 5 x 40 mm N52 bars", "cuboid",
                        (0.040, 0.005, 0.005), "N52", "stripes", 4, 1),
)


def build_standard(spec: StandardArrangement, br_t: float | None = None, url: str | None = None):
    """The field-engine arrangement for ``spec`` (Br from the catalogue unless given)."""
    if br_t is None:
        br_t = catalog.get_grade(spec.grade, url).br_t
    return build_arrangement(shape=spec.shape, size=spec.size_m, br=br_t, pattern=spec.pattern,
                             rows=spec.rows, cols=spec.cols, grade=spec.grade)


def arrangement_reach(specs: Iterable[StandardArrangement] = STANDARD_ARRANGEMENTS,
                      gap_m: float = REACH_GAP_M, plate_m: float = REACH_PLATE_M,
                      url: str | None = None) -> pd.DataFrame:
    """Per standard arrangement: ``key``, ``description``, ``grade``, ``br_t``,
    ``gap_m``, ``plate_avg_t2_m``, ``peak_t2_m`` (:func:`matdb.physics.levitation.reach_of`)."""
    rows = []
    for spec in specs:
        br = catalog.get_grade(spec.grade, url).br_t
        r = reach_of(build_standard(spec, br), gap_m, plate_m)
        rows.append({"key": spec.key, "description": spec.description, "grade": spec.grade,
                     "br_t": br, "gap_m": gap_m, **r})
    return pd.DataFrame(rows)


def reach_band(reach_df: pd.DataFrame) -> tuple[float, float]:
    """(low, high) in T^2/m: the best plate average and the best local peak over the
    arrangements. Below ``low`` a plate floats over the best common arrangement; between
    the two only a small piece near the strongest spot can."""
    if reach_df is None or reach_df.empty:
        raise InputError("no arrangements evaluated", field="reach")
    return float(reach_df["plate_avg_t2_m"].max()), float(reach_df["peak_t2_m"].max())
