"""The CFA rig log in design_core: inputs refused with the field named, the increments, the
pressure and over-drilling checks, and the helpers the recheck uses."""

import math

import pytest

from design_core import checks
from design_core.cfa import (
    CODES, RigLog, RigReading, cage_length_below_cutoff, check_increment_volume,
    check_overdrilling, check_pressure, increments, integrity_tests_due,
    smallest_effective_diameter,
)
from design_core.rules import Rules

AREA = math.pi * 0.6 ** 2 / 4


@pytest.fixture(autouse=True)
def _codes_known(monkeypatch):
    """These codes join CHECK_CODES when the branches are merged; until then Check is told of them."""
    missing = tuple(c for c in CODES if c not in checks.CHECK_CODES)
    if missing:
        monkeypatch.setattr(checks, "CHECK_CODES", checks.CHECK_CODES + missing)


def log(toe=4.0, ratio=1.2, pressure=100.0, base_pump=0.0, step=0.5, rpm=None):
    """Drill to ``toe``, pump ``base_pump`` m3 at the toe, withdraw at ``ratio`` x the auger volume."""
    rows = [RigReading(float(z), 30.0 * z, "drilling", revolutions=None if rpm else 3.0 * z,
                       auger_rpm=rpm) for z in range(int(toe) + 1)]
    t, vol = 200.0, 0.0
    rows.append(RigReading(toe, t, "extraction", 0.0, concrete_pressure_kpa=pressure))
    vol += base_pump
    rows.append(RigReading(toe, t + 5, "extraction", vol, concrete_pressure_kpa=pressure))
    z = toe
    while z > 1e-9:
        z = round(z - step, 6)
        vol += ratio * AREA * step
        t += 10
        rows.append(RigReading(z, t, "extraction", vol, concrete_pressure_kpa=pressure))
    return RigLog(tuple(rows))


def test_reading_refuses_bad_values_naming_the_field():
    with pytest.raises(ValueError, match="phase"):
        RigReading(1.0, 0.0, "boring")
    with pytest.raises(ValueError, match="concrete_volume_m3"):
        RigReading(1.0, 0.0, "drilling", -1.0)
    with pytest.raises(ValueError, match="auger_rpm"):
        RigReading(1.0, 0.0, "drilling", auger_rpm=1000.0)


def test_log_refuses_depth_going_back_within_a_phase():
    a = RigReading(2.0, 0, "drilling")
    b = RigReading(1.5, 1, "drilling")
    with pytest.raises(ValueError, match=r"readings\[1\]: depth_m"):
        RigLog((a, b, RigReading(1.5, 2, "extraction")))


def test_log_refuses_volume_going_down_and_drilling_after_extraction():
    with pytest.raises(ValueError, match="concrete_volume_m3"):
        RigLog((RigReading(3, 0, "extraction", 1.0), RigReading(2, 1, "extraction", 0.5)))
    with pytest.raises(ValueError, match="drilling after extraction"):
        RigLog((RigReading(3, 0, "extraction"), RigReading(3, 1, "drilling")))
    with pytest.raises(ValueError, match="no extraction"):
        RigLog((RigReading(3, 0, "drilling"),))


def test_good_log_passes_every_check():
    lg = log()
    prof = increments(lg, 0.6)
    assert len(prof.increments) == 8
    assert all(i.ratio == pytest.approx(1.2) for i in prof.increments)
    assert check_increment_volume(prof).ok is True
    assert check_pressure(lg).ok is True
    assert check_overdrilling(lg, 0.3, [(0, 10, "cohesive")]).ok is True


def test_concrete_pumped_at_the_toe_is_not_counted():
    # 0.5 m3 pumped before the auger lifts fills below the toe: the increments stay at 1.2
    prof = increments(log(base_pump=0.5), 0.6)
    assert prof.increments[0].ratio == pytest.approx(1.2)


def test_short_remainder_joins_the_increment_below():
    prof = increments(log(toe=4.2, step=0.1), 0.6)
    tops = [i.top_depth_m for i in prof.increments]
    assert tops[-1] == pytest.approx(0.0)
    assert prof.increments[-1].bottom_depth_m - prof.increments[-1].top_depth_m == pytest.approx(0.7)


def test_increment_volume_below_cutoff_only():
    lg = log(ratio=1.2)
    prof = increments(lg, 0.6)
    c = check_increment_volume(prof, cutoff_depth_m=4.0)
    assert c.ok is None


def test_pressure_not_positive_is_short_with_depths():
    c = check_pressure(log(pressure=0.0))
    assert c.ok is False and "without positive pressure" in c.reason


def test_missing_pressure_is_not_checked():
    c = check_pressure(log(pressure=None))
    assert c.ok is None


def test_overdrilling_stricter_where_soil_unknown():
    lg = log()
    # 3 revolutions a metre at 0.6 m pitch: 1.8 revolutions per pitch; clay allows 2.0,
    # cohesionless and unknown 1.5
    assert check_overdrilling(lg, 0.6, [(0, 10, "cohesive")]).ok is True
    c = check_overdrilling(lg, 0.6)
    assert c.ok is False and "not known" in c.reason
    assert check_overdrilling(lg, 0.6, [(0, 2, "cohesive"), (2, 10, "cohesionless")]).ok is False


def test_overdrilling_from_rpm_over_time():
    # 6 rev/min for 30 s a metre = 3 revolutions a metre -> 0.9 per 0.3 m pitch
    c = check_overdrilling(log(rpm=6.0), 0.3)
    assert c.value == pytest.approx(0.9)


def test_overdrilling_not_checked_without_pitch():
    assert check_overdrilling(log(), None).ok is None


def test_smallest_diameter_none_outside_the_log():
    prof = increments(log(), 0.6)
    assert smallest_effective_diameter(prof, 10.0, 2.0, 1.0) is None
    with pytest.raises(ValueError, match="bottom_level"):
        smallest_effective_diameter(prof, 10.0, 5.0, 6.0)


def test_cage_and_integrity_helpers():
    assert cage_length_below_cutoff(9.0, 1.0) == pytest.approx(8.0)
    # 20 % of 23 piles = 4.6 -> 5 tests; 2 done -> 3 due
    assert integrity_tests_due(23, 2) == 3
    assert integrity_tests_due(23, 9) == 0
    assert integrity_tests_due(10, 0, Rules(cfa_integrity_test_fraction=0.1)) == 1


def test_profile_to_dict_is_plain():
    d = increments(log(), 0.6).to_dict()
    assert isinstance(d["increments"][0]["ratio"], float)
    assert isinstance(d["increments"][0]["ok"], bool)


def test_auger_lifted_before_the_log_starts_shows_an_empty_increment():
    rows = [RigReading(0.0, 0, "drilling"), RigReading(4.0, 60, "drilling"),
            RigReading(3.0, 100, "extraction", 0.0, concrete_pressure_kpa=100)]
    vol = 0.0
    for k in range(1, 7):
        vol += 1.2 * AREA * 0.5
        rows.append(RigReading(3.0 - 0.5 * k, 100 + 10 * k, "extraction", vol, concrete_pressure_kpa=100))
    prof = increments(RigLog(tuple(rows)), 0.6)
    c = check_increment_volume(prof)
    assert c.ok is False and c.value == 0.0 and "3.50-4.00 m" in c.reason


def test_log_stopping_below_the_cutoff_is_not_checked():
    rows = [r for r in log().readings if r.depth_m >= 1.0]
    prof = increments(RigLog(tuple(rows)), 0.6)
    c = check_increment_volume(prof, cutoff_depth_m=0.5)
    assert c.ok is None and "not covered" in c.reason
