"""Rock socket resistance from q_u against the published correlations, by hand calculation.

Sources (all FROM MEMORY, as the rules say; check against the papers):
  Rowe, R.K. & Armitage, H.H. (1987), "A design method for drilled piers in soft rock", Can.
  Geotech. J. 24: 126-142: f_s = 0.45 sqrt(q_u) MPa smooth, 0.6 sqrt(q_u) MPa rough; end
  bearing 2.5 q_u.
  Kulhawy, F.H. & Prakoso, W.A. (2005): f_s / p_a = C sqrt(q_u / p_a), C about 1.

Expected values are HAND CALCULATIONS from these formulas.
"""

import math

import pytest

from design_core import Rules
from design_core.rock import (
    RockSocket, socket_base_resistance, socket_capacity, socket_side_resistance,
)


def test_rowe_armitage_smooth_and_rough():
    # q_u = 16 MPa, sqrt = 4: smooth 0.45 x 4 = 1.80 MPa, rough 0.6 x 4 = 2.40 MPa.
    assert socket_side_resistance(16.0, "smooth") == pytest.approx(1800.0)
    assert socket_side_resistance(16.0, "rough") == pytest.approx(2400.0)


def test_kulhawy_prakoso():
    # q_u = 10.1325 MPa = 100 p_a: f_s = 1 x p_a x sqrt(100) = 10 x 101.325 = 1013.25 kPa.
    rules = Rules(rock_socket_rule="kulhawy_prakoso")
    assert socket_side_resistance(10.1325, "smooth", rules) == pytest.approx(1013.25)


def test_base_is_two_and_a_half_q_u():
    # 2.5 x 16 MPa = 40 MPa = 40 000 kPa.
    assert socket_base_resistance(16.0) == pytest.approx(40_000.0)


def test_socket_capacity():
    # D 0.9 m, 3 m smooth socket, q_u 16 MPa: Q_s = pi 0.9 x 3 x 1800 = 15 268.14 kN;
    # Q_b = 40 000 x pi 0.81 / 4 (0.636173) = 25 446.90 kN.
    r = socket_capacity(RockSocket(16.0, 80.0, "smooth"), 0.9, 3.0)
    assert r.shaft == pytest.approx(math.pi * 0.9 * 3 * 1800, rel=1e-12)
    assert r.shaft == pytest.approx(15268.14, abs=0.01)
    assert r.base == pytest.approx(25446.90, abs=0.01)


def test_fractured_rock_is_not_checked_from_q_u():
    rock = RockSocket(16.0, 30.0, "rough")
    ok, why = rock.usable()
    assert not ok and "RQD 30" in why
    with pytest.raises(ValueError, match="RQD 30"):
        socket_capacity(rock, 0.9, 3.0)


@pytest.mark.parametrize("kwargs, field", [
    ({"q_u_mpa": 0.1, "rqd_pct": 80}, "q_u_mpa"),
    ({"q_u_mpa": 10, "rqd_pct": 120}, "rqd_pct"),
    ({"q_u_mpa": 10, "rqd_pct": 80, "roughness": "grooved"}, "roughness"),
])
def test_rock_inputs_are_validated(kwargs, field):
    with pytest.raises(ValueError, match=field):
        RockSocket(**kwargs)
