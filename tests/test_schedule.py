"""matdb.reporting.schedule: the floating-magnet payload schedule as a flat table
(regression checks of the CSV contract; spacing by arithmetic)."""

from __future__ import annotations

import numpy as np
import pytest

from matdb.errors import InputError
from matdb.reporting.schedule import SCHEDULE_COLUMNS, payload_steps, schedule_records


def test_one_record_per_payload_and_station():
    # regression check: per-station lists are split, single values repeated per station
    result = {"mode": "stabilized", "window": [
        {"payload_kg": 0.0, "lifter_distance_m": [0.02, 0.021], "window_m": [1e-3, 2e-3], "resolution_m": 5e-6},
        {"payload_kg": 1e-3, "lifter_distance_m": [0.019, 0.02], "window_m": [None, 1e-3], "resolution_m": 4e-6},
    ]}
    recs = schedule_records(result)
    assert [(r["payload_kg"], r["station"]) for r in recs] == [(0.0, 0), (0.0, 1), (1e-3, 0), (1e-3, 1)]
    assert recs[1]["lifter_distance_m"] == 0.021 and recs[1]["resolution_m"] == 5e-6
    assert recs[2]["window_m"] is None
    assert all(set(r) == set(SCHEDULE_COLUMNS) for r in recs)


def test_a_plate_result_has_no_schedule():
    with pytest.raises(InputError) as exc:
        schedule_records({"mode": "plate"})
    assert exc.value.field == "format"


def test_payload_steps_are_even_and_include_both_ends():
    steps = payload_steps((0.0, 5e-3), 11)
    assert steps[0] == 0.0 and steps[-1] == 5e-3 and len(steps) == 11
    assert np.diff(steps) == pytest.approx(np.full(10, 5e-4))
    assert list(payload_steps((2e-3, 2e-3), 11)) == [2e-3]
