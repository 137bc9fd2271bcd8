"""The payload schedule of a floating-magnet result as a flat table (one record per payload
and station), shared by ``matdb levitate --format csv``, the page's download and the report.

Light on purpose (numpy only): the CLI imports it on its start-up path.
"""

from __future__ import annotations

import numpy as np

from matdb.errors import InputError

__all__ = ["SCHEDULE_COLUMNS", "schedule_records", "payload_steps"]

#: Columns of the schedule, SI (stations numbered from 0); JSON/CSV keys are a contract.
SCHEDULE_COLUMNS = ("payload_kg", "station", "lifter_distance_m", "lifter_travel_m", "min_plate_distance_m",
                    "max_plate_distance_m", "window_m", "resolution_m", "lifter_distance_drift_um_per_k",
                    "dforce_dd_n_m")


def schedule_records(result: dict) -> list[dict]:
    """The payload schedule of a floating-magnet result, one record per payload and
    station (:data:`SCHEDULE_COLUMNS`, SI; stations numbered from 0): a table a motorised
    stage can follow.

    Raises
    ------
    InputError
        Field ``format``: a floating-plate result has no schedule.
    """
    if result.get("mode") != "stabilized":
        raise InputError("the schedule exists for floating-magnet designs only; "
                         "use json or table for a floating plate", field="format")
    out = []
    for w in result.get("window") or []:
        d = w.get("lifter_distance_m")
        n = len(d) if isinstance(d, list) else 1
        for i in range(n):
            rec = {"payload_kg": w["payload_kg"], "station": i}
            for k in SCHEDULE_COLUMNS[2:]:
                v = w.get(k)
                rec[k] = v[i] if isinstance(v, list) else v
            out.append(rec)
    return out


def payload_steps(payload_range, steps: int) -> np.ndarray:
    """``steps`` payloads evenly over ``(lo, hi)`` [kg] (one when they are equal)."""
    lo, hi = payload_range
    return np.array([lo]) if hi == lo else np.linspace(lo, hi, max(int(steps), 2))
