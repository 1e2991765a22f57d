"""Downdrag by Fellenius' unified method: neutral plane, dragload and settlement there.

Source: B. H. Fellenius (2004), "Unified design of piled foundations with emphasis on settlement
analysis", ASCE Geotechnical Special Publication 125, and *Basics of Foundation Design* (the
neutral plane where the load curve from the head, Q_d plus negative skin friction, meets the
resistance curve from the toe, R_toe plus positive shaft; found in a secondary source). Only the
method is published here, not numbers: the expected values are hand calculations with the
arithmetic in the comments. Pile: D 0.6 m (perimeter 1.88496 m), head 0, toe -20 m, Q_d 500 kN,
R_toe 300 kN.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from design_core import checks
from design_core.downdrag import CODES, DowndragInput, downdrag_check, neutral_plane
from design_core.rules import Rules


@pytest.fixture(autouse=True)
def _new_codes(monkeypatch):
    """The lead adds the new codes to CHECK_CODES at merge; until then the tests extend it."""
    extra = tuple(c for c in CODES if c not in checks.CHECK_CODES)
    monkeypatch.setattr(checks, "CHECK_CODES", checks.CHECK_CODES + extra)


LEVELS = tuple(np.linspace(0.0, -20.0, 41))
SETTLING = tuple(lv > -6.0 for lv in LEVELS)


def _pile(friction, toe=300.0, load=500.0, settlement=None):
    return DowndragInput(LEVELS, friction, SETTLING, 0.6, load, toe, settlement)


def test_uniform_friction_neutral_plane():
    # Hand calculation: f 30 kPa -> 56.549 kN/m, shaft 1130.97 kN. 500 + 56.549 z = 300 +
    # 56.549 (20 - z) -> z = 930.97 / 113.097 = 8.2316 m; dragload 56.549 x 8.2316 = 465.49 kN
    res = neutral_plane(_pile((30.0,) * 41))
    assert res.neutral_plane == pytest.approx(-8.2316, abs=1e-3)
    assert res.dragload == pytest.approx(465.49, abs=0.05)
    assert res.max_force == pytest.approx(965.49, abs=0.05)


def test_friction_rising_with_depth_neutral_plane():
    # Hand calculation: f = 10 + 2 d kPa -> shaft to depth z = per (10 z + z^2), whole shaft
    # per x 600 = 1130.97 kN. 2 per (10 z + z^2) = 300 + 1130.97 - 500 -> 10 z + z^2 = 246.948
    # -> z = (-10 + sqrt(100 + 987.79)) / 2 = 11.4909 m; dragload again 465.49 kN
    friction = tuple(10.0 + 2.0 * -lv for lv in LEVELS)
    res = neutral_plane(_pile(friction))
    assert res.neutral_plane == pytest.approx(-11.4909, abs=1e-3)
    assert res.dragload == pytest.approx(465.49, abs=0.05)


def test_dragload_is_half_of_resistance_less_load():
    # Statics of the two curves: at the neutral plane Q_n = (R_toe + Q_s - Q_d) / 2 whatever the
    # distribution of f. Hand calculation: f 40 kPa down to -9.5 m, linear to 20 kPa at -10 m,
    # 20 below: Q_s = 1.88496 x (40 x 9.5 + 30 x 0.5 + 20 x 10) = 1.88496 x 595 = 1121.55 kN;
    # Q_n = (300 + 1121.55 - 500) / 2 = 460.77 kN
    friction = tuple(40.0 if lv > -10 else 20.0 for lv in LEVELS)
    assert neutral_plane(_pile(friction)).dragload == pytest.approx(460.77, abs=0.05)


def test_settlement_at_the_neutral_plane_from_the_ground_profile():
    # Hand calculation: ground settles 100 mm at the head to 0 at the toe, linear: at 8.2316 m,
    # 100 x (1 - 8.2316/20) = 58.84 mm
    settle = tuple(100.0 * (1.0 + lv / 20.0) for lv in LEVELS)
    res = neutral_plane(_pile((30.0,) * 41, settlement=settle))
    assert res.settlement_mm == pytest.approx(58.84, abs=0.01)


def test_end_bearing_pile_neutral_plane_at_the_toe():
    # Method: with R_toe above Q_d + the whole shaft the curves meet at the toe; dragload =
    # the whole shaft, 1130.97 kN
    res = neutral_plane(_pile((30.0,) * 41, toe=5000.0))
    assert res.neutral_plane == pytest.approx(-20.0)
    assert res.dragload == pytest.approx(1130.97, abs=0.05)


def test_overloaded_pile_has_no_neutral_plane_and_is_short():
    chk = downdrag_check(_pile((30.0,) * 41, load=2000.0), 5000.0)
    assert chk.ok is False and "no neutral plane" in chk.reason


def test_structural_check_factors_the_load_and_the_dragload():
    # Hand calculation: 1.5 x 500 + 1.4 x 465.49 = 1401.7 kN against 1500 kN -> 0.9345
    chk = downdrag_check(_pile((30.0,) * 41), 1500.0, Rules())
    assert chk.value == pytest.approx(1401.7, abs=0.1)
    assert chk.utilisation == pytest.approx(0.9345, abs=1e-3)
    assert chk.ok is True


@settings(max_examples=40, deadline=None)
@given(toe=st.floats(0.0, 1500.0), more=st.floats(10.0, 1000.0))
def test_neutral_plane_moves_down_as_toe_resistance_rises(toe, more):
    lo = neutral_plane(_pile((30.0,) * 41, toe=toe)).neutral_plane
    hi = neutral_plane(_pile((30.0,) * 41, toe=toe + more)).neutral_plane
    assert hi <= lo
