"""Tolerances as the standards write them.

Sources: ICE *Specification for Piling and Embedded Retaining Walls* (SPERW), 2nd ed., Table B1.4
(found in a secondary source reproducing the table): 75 mm in any direction where the cut-off
is at or above the commencing surface, more below it by the allowance for inclination; 1 in 75
verticality; raked piles 1 in 25 for rakes up to 1:6 and 1 in 15 over 1:6. EN 1536:2010
section 8 (from memory): position 0.10 m for D <= 1.0 m, 0.1 D for 1.0 < D <= 1.5 m, 0.15 m above;
inclination 0.02 for vertical piles and rakes n >= 15, 0.04 for 4 <= n < 15; the scope rakes
n >= 4 (found). The 2 m case is a hand calculation: 75 + 2000/75 = 101.67 mm.
"""

import pytest

from design_core.rules import Rules
from design_core.tolerance_rules import inclination_limit, position_limit_mm

EN = Rules(tolerance_rule_set="en_1536")


def test_ice_position_at_or_above_the_commencing_surface():
    assert position_limit_mm(0.6, 0.0).limit == 75.0
    assert position_limit_mm(0.6, -1.0).limit == 75.0   # cut-off above the platform


def test_ice_position_grows_below_the_commencing_surface():
    # Hand calculation: 75 + 2 m x 1000/75 mm/m = 101.67 mm
    assert position_limit_mm(0.6, 2.0).limit == pytest.approx(101.67, abs=0.01)
    # raked 1:10 -> 1 in 25: 75 + 2 x 40 = 155 mm
    assert position_limit_mm(0.6, 2.0, rake=0.1).limit == pytest.approx(155.0)
    # a fixed allowance per metre instead: 75 + 2 x 10 = 95 mm
    assert position_limit_mm(0.6, 2.0, rules=Rules(position_allowance_per_m_mm=10.0)).limit == 95.0


def test_ice_raking_piles():
    assert inclination_limit(0.0).limit == pytest.approx(1 / 75)
    assert inclination_limit(0.1).limit == pytest.approx(1 / 25)     # 1:10
    assert inclination_limit(1 / 6).limit == pytest.approx(1 / 25)   # up to 1:6
    assert inclination_limit(0.25).limit == pytest.approx(1 / 15)    # 1:4, over 1:6


def test_en1536_position_by_diameter():
    assert position_limit_mm(0.6, rules=EN).limit == 100.0
    assert position_limit_mm(1.0, rules=EN).limit == 100.0
    assert position_limit_mm(1.2, rules=EN).limit == pytest.approx(120.0)
    assert position_limit_mm(1.5, rules=EN).limit == pytest.approx(150.0)
    assert position_limit_mm(2.0, rules=EN).limit == 150.0


def test_en1536_inclination():
    assert inclination_limit(0.0, EN).limit == 0.02
    assert inclination_limit(1 / 20, EN).limit == 0.02   # n = 20
    assert inclination_limit(1 / 10, EN).limit == 0.04   # n = 10
    out = inclination_limit(1 / 3, EN)                   # n = 3: outside the standard
    assert out.limit is None and "outside EN 1536" in out.reason


def test_reasons_name_the_rule_set():
    assert "ICE SPERW" in position_limit_mm(0.6, 2.0).reason
    assert "EN 1536" in position_limit_mm(0.6, rules=EN).reason
