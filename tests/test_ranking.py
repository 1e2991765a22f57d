"""Worst first, truly (issue 14): the pile's ranking utilisation is demand over capacity, a
tolerance met exactly is 0, and a short check of any kind still ranks the pile."""

from dataclasses import replace

import pytest

from design_core import Rules, recheck
from design_core.checks import CAPACITY_CODES, CHECK_LABELS, CHECK_CODES
from tests.test_recheck import ASBUILT, DESIGN, GROUND


def test_a_tolerance_met_exactly_is_not_fully_used():
    v = recheck(DESIGN, replace(ASBUILT, diameter_mm=600.0, measured_depth=16.0), GROUND)
    assert v.check("diameter").ok is True and v.check("diameter").utilisation == 0.0
    assert v.check("toe_level").ok is True and v.check("toe_level").utilisation == 0.0
    within = recheck(DESIGN, replace(ASBUILT, diameter_mm=595.0), GROUND,
                     Rules(diameter_tolerance_mm=10.0)).check("diameter")
    assert within.ok is True and within.utilisation == pytest.approx(0.5)   # 5 of the 10 mm


def test_the_ranking_counts_capacity_and_member_checks_and_every_short_check():
    v = recheck(DESIGN, replace(ASBUILT, easting=500.07), GROUND)     # 70 of 75 mm: ok
    assert v.check("position").ok is True and v.check("position").utilisation > 0.9
    capacity = max(c.utilisation for c in v.checks if c.code in CAPACITY_CODES)
    assert v.worst_utilisation == pytest.approx(capacity) and capacity < 0.9
    short = recheck(DESIGN, replace(ASBUILT, easting=500.09), GROUND)  # 90 mm: short
    assert short.worst_utilisation == pytest.approx(short.check("position").utilisation)
    assert short.worst_utilisation > 1.0 > v.worst_utilisation


def test_every_check_has_words_for_screens_and_the_record():
    assert set(CHECK_LABELS) == set(CHECK_CODES)
    assert CHECK_LABELS["base_debris"] == "Base debris"
    assert CHECK_LABELS["durability_cover"] == "Cover for exposure class"
