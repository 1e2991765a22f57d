"""Screw (helical) piles: the torque correlation and individual-helix bearing.

Sources:
  Hoyt, R. M. & Clemence, S. P. (1989), "Uplift capacity of helical anchors in soil", Proc. 12th
  ICSMFE, Rio de Janeiro: Q_u = K_t T with K_t = 10 ft^-1 for square shafts and round shafts
  under 3.5 in, 7 ft^-1 for 3.5 in round, 3 ft^-1 for 8 5/8 in round (the first two read in a
  secondary source quoting ICC-ES AC358's defaults; the 3 ft^-1 from memory). The conversions to
  1/m below are hand calculations (1 ft = 0.3048 m).
  Individual bearing: each helix A_h x q, q = 9 c_u in clay (Skempton 1951), helices 3 diameters
  or more apart (Hoyt & Clemence 1989, secondary); the values are hand calculations.
"""

import math

import pytest

from design_core import checks
from design_core.helical import (
    CODES, Helix, HelixSoil, check_torque_capacity, default_kt, final_torque, helix_bearing,
    torque_capacity,
)
from design_core.rules import Rules


@pytest.fixture(autouse=True)
def _codes_known(monkeypatch):
    """These codes join CHECK_CODES when the branches are merged; until then Check is told of them."""
    missing = tuple(c for c in CODES if c not in checks.CHECK_CODES)
    if missing:
        monkeypatch.setattr(checks, "CHECK_CODES", checks.CHECK_CODES + missing)


def test_kt_defaults_are_hoyt_and_clemence_in_si():
    # 10 ft^-1 / 0.3048 = 32.81 m^-1; 7 ft^-1 = 22.97 m^-1; 3 ft^-1 = 9.84 m^-1
    assert default_kt("square", 45)[0] == pytest.approx(10 / 0.3048, rel=0.01)
    assert default_kt("round", 73)[0] == pytest.approx(10 / 0.3048, rel=0.01)
    assert default_kt("round", 88.9)[0] == pytest.approx(7 / 0.3048, rel=0.01)
    assert default_kt("round", 219.1)[0] == pytest.approx(3 / 0.3048, rel=0.01)


def test_torque_capacity_in_us_units_converted_by_hand():
    # Hoyt & Clemence: T = 10 000 ft-lb with K_t = 10 ft^-1 gives Q_u = 100 000 lb = 100 kips.
    # In SI: 10 000 ft-lb x 1.355818 = 13.558 kN m; 10 ft^-1 = 32.808 m^-1;
    # 100 kips x 4.44822 = 444.82 kN
    assert torque_capacity(13.558, 32.808) == pytest.approx(444.82, rel=1e-3)


def test_final_torque_is_the_average_of_the_last_three_over_the_last_metre():
    # hand calculation: readings every 0.25 m to 6.0 m, last three 14, 15, 16 kN m -> 15.0
    readings = [{"depth_m": 0.25 * k, "torque_knm": min(16.0, 10 + 0.25 * k)} for k in range(25)]
    readings[-3:] = [{"depth_m": 5.5, "torque_knm": 14.0}, {"depth_m": 5.75, "torque_knm": 15.0},
                     {"depth_m": 6.0, "torque_knm": 16.0}]
    assert final_torque(readings).torque_knm == pytest.approx(15.0)


def test_torque_check_hand_calculation():
    # hand calculation: final torque 15 kN m, square shaft K_t 33: Q_u = 495 kN; FS 2 (ICC-ES
    # AC358, from memory): 247.5 kN against the working load 250 kN -> short, utilisation 1.0101
    readings = [{"depth_m": 5.5, "torque_knm": 14.0}, {"depth_m": 5.75, "torque_knm": 15.0},
                {"depth_m": 6.0, "torque_knm": 16.0}]
    c = check_torque_capacity(readings, 250.0, "square", 45)
    assert c.limit == pytest.approx(247.5)
    assert c.utilisation == pytest.approx(250 / 247.5)
    assert c.ok is False


def test_individual_helix_bearing_in_clay_hand_calculation():
    # hand calculation: helix 300 mm on an 89 mm shaft: A = pi/4 (0.300^2 - 0.089^2)
    #   = 0.785398 x 0.082079 = 0.064465 m2; q = 9 x 100 = 900 kPa; 58.018 kN a helix.
    # Two helices 1.0 m apart = 3.33 D: individual bearing applies; 116.04 kN ultimate.
    helices = [Helix(300, 75, 5.0), Helix(300, 75, 6.0)]
    soils = [HelixSoil("cohesive", 60.0, cu_kpa=100.0)] * 2
    res = helix_bearing(helices, soils, 89.0)
    assert res.rows[0].area_m2 == pytest.approx(math.pi / 4 * (0.09 - 0.089 ** 2))
    assert [r.force_kn for r in res.rows] == pytest.approx([58.018] * 2, abs=1e-3)
    assert res.ultimate_kn == pytest.approx(116.036, abs=1e-3)
    assert res.spacing_ok is True
    # working stress, FS 2.5 (the rules' global factor): 46.41 kN
    assert res.design_kn == pytest.approx(116.036 / 2.5, abs=1e-3)


def test_helices_closer_than_three_diameters_do_not_act_individually():
    # 0.75 m apart for 300 mm helices = 2.5 D < 3 D (Hoyt & Clemence 1989, secondary)
    helices = [Helix(300, 75, 5.0), Helix(300, 75, 5.75)]
    soils = [HelixSoil("cohesive", 60.0, cu_kpa=100.0)] * 2
    res = helix_bearing(helices, soils, 89.0, Rules())
    assert res.spacing_ok is False and res.design_kn is None
    assert "2.5 D" in res.reason
