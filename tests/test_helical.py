"""Screw piles in design_core: inputs refused with the field named, the final torque, K_t by
shaft and the torque check with the bearing estimate beside it."""

import pytest

from design_core import checks
from design_core.helical import (
    CODES, Helix, HelixSoil, TorqueReading, check_torque_capacity, default_kt, final_torque,
    helix_bearing, torque_capacity, torque_log,
)
from design_core.rules import Rules

LOG = [{"depth_m": 0.25 * k, "torque_knm": 2.0 * k} for k in range(1, 25)]   # to 6.0 m, 48 kN m


@pytest.fixture(autouse=True)
def _codes_known(monkeypatch):
    """These codes join CHECK_CODES when the branches are merged; until then Check is told of them."""
    missing = tuple(c for c in CODES if c not in checks.CHECK_CODES)
    if missing:
        monkeypatch.setattr(checks, "CHECK_CODES", checks.CHECK_CODES + missing)


def test_inputs_refused_naming_the_field():
    with pytest.raises(ValueError, match="torque_knm"):
        TorqueReading(1.0, -5.0)
    with pytest.raises(ValueError, match="kt_per_m"):
        torque_capacity(10.0, 0.0)
    with pytest.raises(ValueError, match="shaft_shape"):
        default_kt("hexagonal", 80)
    with pytest.raises(ValueError, match="cu_kpa"):
        HelixSoil("cohesive", 50.0)
    with pytest.raises(ValueError, match="diameter_mm"):
        Helix(50, 75, 3.0)


def test_torque_log_depth_must_increase():
    with pytest.raises(ValueError, match=r"torque\[1\]"):
        torque_log([{"depth_m": 1.0, "torque_knm": 3}, {"depth_m": 1.0, "torque_knm": 4}])


def test_final_torque_averages_the_last_readings():
    f = final_torque(LOG)
    # last three: 44, 46, 48 -> 46
    assert f.torque_knm == pytest.approx(46.0) and f.final_depth_m == pytest.approx(6.0)


def test_final_torque_needs_enough_readings_in_the_last_metre():
    sparse = [{"depth_m": 2.0, "torque_knm": 10}, {"depth_m": 4.0, "torque_knm": 20},
              {"depth_m": 6.0, "torque_knm": 30}]
    assert isinstance(final_torque(sparse), str)
    c = check_torque_capacity(sparse, 100.0, "square", 45)
    assert c.ok is None and "last 1 m" in c.reason


def test_kt_by_shaft_size():
    assert default_kt("round", 60)[1] == "helical_kt_small_per_m"
    assert default_kt("round", 89)[1] == "helical_kt_89_per_m"
    assert default_kt("round", 114.3)[1] == "helical_kt_large_per_m"
    assert default_kt("square", 114.3)[1] == "helical_kt_small_per_m"


def test_engineers_kt_replaces_the_default():
    c = check_torque_capacity(LOG, 100.0, kt_per_m=20.0)
    # 20 x 46 = 920 kN / 2 = 460 kN
    assert c.limit == pytest.approx(460.0) and "engineer's K_t" in c.reason


def test_no_shaft_and_no_kt_is_not_checked():
    assert check_torque_capacity(LOG, 100.0).ok is None


def test_limit_state_uses_the_resistance_factor_and_factored_load():
    rules = Rules(design_approach="limit_state")
    c = check_torque_capacity(LOG, 400.0, "square", 45, rules=rules)
    # 33 x 46 = 1518 kN x 0.5 = 759 kN; 400 x 1.5 = 600 kN factored
    assert c.limit == pytest.approx(759.0) and c.value == pytest.approx(600.0)


def test_under_torqued_pile_is_short():
    c = check_torque_capacity(LOG[:8], 200.0, "square", 45)
    # to 2.0 m, last three 12, 14, 16 -> 14 kN m; 33 x 14 / 2 = 231 kN; 200 within
    assert c.ok is True
    c = check_torque_capacity(LOG[:6], 200.0, "square", 45)
    # last three 8, 10, 12 -> 10 kN m; 165 kN < 200
    assert c.ok is False


def test_weaker_bearing_estimate_governs():
    bearing = helix_bearing([Helix(300, 75, 5.0)], [HelixSoil("cohesive", 60.0, cu_kpa=100.0)], 89.0)
    c = check_torque_capacity(LOG, 100.0, "square", 45, bearing=bearing)
    assert c.limit == pytest.approx(bearing.design_kn) and c.ok is False and "governs" in c.reason


def test_bearing_in_sand_uses_nq_and_sigma_v():
    res = helix_bearing([Helix(400, 75, 6.0)], [HelixSoil("cohesionless", 80.0, phi_deg=30.0)], 89.0)
    # Reissner N_q at 30 degrees = 18.40 -> q = 1472 kPa
    assert res.rows[0].q_kpa == pytest.approx(18.401 * 80.0, rel=1e-3)


def test_no_load_is_ok():
    assert check_torque_capacity(LOG, 0.0, "square", 45).ok is True


def test_helix_soils_from_the_ground_model():
    from design_core.ground import GroundModel, Layer
    from design_core.helical import helix_list, helix_soils

    # platform +10.0 m; clay 18 kN/m3 to +4.0 m, sand 20 kN/m3 below; water at +10.0 (surface)
    ground = GroundModel([Layer(10.0, 4.0, "cohesive", 18.0, cu=80.0),
                          Layer(4.0, -10.0, "cohesionless", 20.0, phi=32.0)], water_level=10.0)
    helices = helix_list([{"diameter_mm": 300, "pitch_mm": 75, "depth_m": 5.0},
                          {"diameter_mm": 350, "pitch_mm": 75, "depth_m": 8.0}])
    soils = helix_soils(ground, 10.0, helices)
    # hand calculation: 5 m of clay under water: 5 x (18 - 9.81) = 40.95 kPa;
    # at 8 m: 6 x 8.19 + 2 x (20 - 9.81) = 49.14 + 20.38 = 69.52 kPa
    assert soils[0].material == "cohesive" and soils[0].cu_kpa == 80.0
    assert soils[0].sigma_v_eff_kpa == pytest.approx(40.95)
    assert soils[1].material == "cohesionless" and soils[1].sigma_v_eff_kpa == pytest.approx(69.52)
    assert isinstance(helix_soils(ground, 10.0, [Helix(300, 75, 30.0)]), str)
    with pytest.raises(ValueError, match=r"helices\[0\]"):
        helix_list([{"diameter_mm": 5, "pitch_mm": 75, "depth_m": 1}])
