"""matdb.analysis.reach: what common magnet arrangements reach, checked against what the
trade knows floats (source beside each check)."""

from __future__ import annotations

import pytest

from matdb.analysis import reach as R
from matdb.errors import InputError
from matdb.reporting import presentation as P


def test_arrangement_reach_orders_materials_as_the_trade_expects():
    """Common practice: pyrolytic graphite plates float over ordinary NdFeB arrays,
    bismuth plates of similar size do not, and water (a frog) needs a ~16 T laboratory
    magnet (Berry and Geim 1997): far beyond any plate average here."""
    reach = R.arrangement_reach()
    low, high = R.reach_band(reach)
    assert 0 < low < high
    mats = P.materials_table()
    need = P.levitation_requirements(mats, (low, high)).set_index("id")
    assert need.loc["pyrolytic-graphite", "verdict"] == "plate floats"
    assert need.loc["bismuth", "verdict"] != "plate floats"
    assert need.loc["water", "required_t2_m"] > low
    assert need.loc["aluminium", "verdict"] == "pulled in (paramagnetic)"
    assert need.index[0] == "pyrolytic-graphite"


def test_reach_band_refuses_an_empty_table():
    # regression check: no arrangements evaluated is a one-line input error
    with pytest.raises(InputError, match="reach"):
        R.reach_band(None)
