"""Driven piles: the FHWA-modified Gates formula and the set arithmetic, checked by hand.

Sources:
  FHWA-modified Gates, FHWA NHI-05-042 (Hannigan, Goble, Likins & Rausche 2006, Design and
  Construction of Driven Pile Foundations): US form R_u = 1.75 sqrt(E) log10(10 N) - 100 kips
  (E rated energy in ft-lb, N blows per inch at final set), SI form R_u = 6.7 sqrt(E_r)
  log10(10 N_b) - 445 kN (E_r in J, N_b blows per 25 mm). Both forms are from memory (not read in
  the primary document); the test below shows by hand that the SI constants are the US form
  converted (1 ft-lb = 1.3558 J, 1 kip = 4.4482 kN, 25 mm = 0.984 in), which checks the one
  against the other. No published driving record with its Gates value was found, so the other
  values are hand calculations, marked as such, with the arithmetic in the comments.
"""

import math

import pytest

from design_core import checks
from design_core.driving import (
    CODES, DrivenElement, DrivingCriterion, DrivingRecord, Hammer, blows_per_25mm,
    check_driving_resistance, check_driving_set, modified_gates, toe_from_elements,
)
from design_core.rules import Rules


@pytest.fixture(autouse=True)
def _codes_known(monkeypatch):
    """These codes join CHECK_CODES when the branches are merged; until then Check is told of them."""
    missing = tuple(c for c in CODES if c not in checks.CHECK_CODES)
    if missing:
        monkeypatch.setattr(checks, "CHECK_CODES", checks.CHECK_CODES + missing)


def test_si_gates_is_the_us_form_converted_by_hand():
    # US form (FHWA NHI-05-042, from memory), E = 40 000 ft-lb, N = 8 blows/in:
    #   1.75 x sqrt(40 000) x log10(80) - 100 = 1.75 x 200 x 1.90309 - 100 = 566.08 kips
    #   566.08 kips x 4.44822 kN/kip = 2518.1 kN
    # The same blow in SI: E_r = 40 000 x 1.355818 J = 54 232.7 J = 54.2327 kJ;
    #   8 blows per inch = 8 x 25 / 25.4 = 7.8740 blows per 25 mm.
    us_kn = 2518.1
    r_si = modified_gates(54.2327, 7.8740)
    # the SI constants 6.7 and 445 are rounded (1.75 x 4.44822 / sqrt(1.355818) = 6.685;
    # 100 x 4.44822 = 444.8): agreement within 0.5 % is the conversion's rounding
    assert r_si == pytest.approx(us_kn, rel=0.005)
    assert 1.75 * 4.44822 / math.sqrt(1.355818) == pytest.approx(6.7, abs=0.02)


def test_gates_si_hand_calculation():
    # hand calculation: E_r = 60 kJ = 60 000 J, N_b = 25 blows per 25 mm
    #   6.7 x sqrt(60 000) x log10(250) - 445 = 6.7 x 244.949 x 2.39794 - 445 = 3490.4 kN
    assert modified_gates(60.0, 25.0) == pytest.approx(3490.4, abs=0.1)


def test_gates_below_zero_is_zero():
    # hand calculation: N_b = 0.1, log10(1) = 0, so R_u = -445 kN: no resistance, reported 0
    assert modified_gates(60.0, 0.1) == 0.0


def test_blows_per_25mm_from_the_set_per_10_blows():
    # definition: 10 blows over the set; 10 mm per 10 blows = 1 mm a blow = 25 blows per 25 mm;
    # 25 mm per 10 blows = 10 blows per 25 mm
    assert blows_per_25mm(10.0) == pytest.approx(25.0)
    assert blows_per_25mm(25.0) == pytest.approx(10.0)


def test_driving_resistance_uses_the_aashto_factor_in_limit_state():
    # hand calculation: sets 12, 10, 9, 8 mm; worst of the last three = 10 mm -> N_b = 25;
    # R_u = 3490.4 kN at 60 kJ (above); phi 0.40 (AASHTO LRFD Table 10.5.5.2.3-1, from memory)
    # -> 1396.2 kN; working load 1000 kN x 1.5 = 1500 kN factored -> utilisation 1.0744
    record = DrivingRecord(Hammer("hydraulic", energy_kj=60.0), final_set_mm_per_10=(12, 10, 9, 8))
    rules = Rules(design_approach="limit_state")
    c = check_driving_resistance(record, 1000.0, rules)
    assert c.limit == pytest.approx(1396.2, abs=0.1)
    assert c.value == pytest.approx(1500.0)
    assert c.utilisation == pytest.approx(1.0744, abs=1e-4)
    assert c.ok is False
    assert "weaker evidence" in c.reason


def test_drop_hammer_energy_is_weight_times_drop():
    # W h: a 50 kN ram falling 1.2 m gives 60 kJ a blow; same result as the 60 kJ case above
    record = DrivingRecord(Hammer("drop", ram_kn=50.0, drop_m=1.2), final_set_mm_per_10=(10, 10, 10))
    c = check_driving_resistance(record, 500.0)
    # working stress, FS 3.5 (FHWA NHI-05-042, from memory): 3490.4 / 3.5 = 997.3 kN
    assert c.limit == pytest.approx(997.3, abs=0.1)


def test_set_check_against_a_criterion_hand_values():
    # criterion 8 mm per 10 blows at 60 kJ; last three sets 7, 8.5, 7.5 mm: worst 8.5 > 8
    record = DrivingRecord(Hammer("hydraulic", energy_kj=60.0), final_set_mm_per_10=(9, 7, 8.5, 7.5))
    c = check_driving_set(record, DrivingCriterion(8.0, 60.0, "wave-equation run W-3"))
    assert c.value == 8.5 and c.limit == 8.0
    assert c.utilisation == pytest.approx(8.5 / 8.0)
    assert c.ok is False


def test_toe_from_elements_hand_calculation():
    # head after driving +5.40 m, elements 10.0 + 8.0 m: toe = 5.40 - 18.0 = -12.60 m;
    # cut-off +5.00 m: trim 0.40 m, 17.60 m below the cut-off
    toe = toe_from_elements(5.0, 5.4, [DrivenElement(10.0, "welded"), DrivenElement(8.0)])
    assert toe.toe_level == pytest.approx(-12.6)
    assert toe.trim_m == pytest.approx(0.4)
    assert toe.length_below_cutoff_m == pytest.approx(17.6)
