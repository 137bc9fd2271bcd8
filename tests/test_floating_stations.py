"""Several stations under one payload (matdb.physics.floating.stations): statics and the
rigid-body stiffness, each check named beside it."""

from __future__ import annotations

import numpy as np
import pytest

from matdb.errors import InputError
from matdb.physics import floating as S


def test_two_stations_lever_rule():
    # statics of a rigid beam on two supports (lever rule): equal shares when centred,
    # W * (distance to the other support) / span otherwise
    pos = [(-30e-3, 0), (30e-3, 0)]
    assert S.weight_shares(pos, 1.0, (0, 0)) == pytest.approx([0.5, 0.5])
    assert S.weight_shares(pos, 1.0, (-15e-3, 0)) == pytest.approx([0.75, 0.25])
    with pytest.raises(InputError, match="centre_of_mass"):
        S.weight_shares(pos, 1.0, (0, 5e-3))


def test_three_stations_statics_exact():
    # three supports not in a line: shares from force and moment balance (statics)
    pos = np.array([(0, 0), (40e-3, 0), (0, 30e-3)])
    s = S.weight_shares(pos, 2.0, (10e-3, 5e-3))
    assert s.sum() == pytest.approx(2.0)
    assert s @ pos[:, 0] == pytest.approx(2.0 * 10e-3)
    assert s @ pos[:, 1] == pytest.approx(2.0 * 5e-3)


def test_rigid_body_tilt_needs_positive_station_stiffness():
    # rigid body on springs: a tilt mode is stable when every support is (vertical springs
    # k_i at lever arms r_i give K = sum k_i r_i^2); one negative spring can make it unstable
    st = {"k_x": 1.0, "k_y": 1.0, "k_z": 2.0, "kappa_x": 1e-4, "kappa_y": 1e-4, "kappa_z": 0.0,
          "c_x_ty": 0.0, "c_y_tx": 0.0}
    pos = [(-0.03, 0.0), (0.03, 0.0)]
    K = S.body_stiffness([st, st], pos, (0.0, 0.0, 0.0), 0.01)
    assert K[4, 4] == pytest.approx(2 * 2.0 * 0.03**2 + 2e-4)
    bad = dict(st, k_z=-0.5)
    K2 = S.body_stiffness([st, bad], pos, (0.0, 0.0, 0.0), 0.01)
    assert K2[4, 4] < K[4, 4]
    # a centre of mass above the floaters lowers the tilt stiffness by W z (pendulum, inverted)
    K3 = S.body_stiffness([st, st], pos, (0.0, 0.0, 0.01), 0.01)
    assert K3[3, 3] == pytest.approx(K[3, 3] - 0.01 * 0.01)
