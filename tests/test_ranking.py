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


def test_reasons_carry_the_factors_they_used():
    # Rules defaults (working stress): T_d = 0.75 Q_s / 3 + 0.9 W'; R_d = min(Q_u / 2.5,
    # Q_s / 1.5 + Q_b / 3). The reason's own numbers rebuild the value to its rounding.
    import re

    v = recheck(DESIGN, ASBUILT, GROUND)
    t = v.check("axial_tension")
    shaft, weight = (float(x.replace(",", "")) for x in
                     re.search(r"0\.75 x shaft ([\d,]+) kN / FS 3 \+ 0\.9 x pile weight ([\d,]+) kN",
                               t.reason).groups())
    assert t.limit == pytest.approx(0.75 * shaft / 3.0 + 0.9 * weight, abs=1.0)
    c = v.check("axial_compression")
    qu, qs, qb = (float(x.replace(",", "")) for x in re.search(
        r"min\(Q_u ([\d,]+) kN / 2\.5, shaft ([\d,]+) kN / 1\.5 \+ base ([\d,]+) kN / 3\)",
        c.reason).groups())
    assert c.limit == pytest.approx(min(qu / 2.5, qs / 1.5 + qb / 3.0), abs=1.0)
    ls = recheck(DESIGN, ASBUILT, GROUND, Rules(design_approach="limit_state"))
    assert "phi_g 0.55 x 0.75 x shaft" in ls.check("axial_tension").reason
    assert "phi_g 0.55 x (shaft" in ls.check("axial_compression").reason
