"""Meyerhof's SPT method against its published formula, by hand calculation.

Source: Meyerhof, G.G. (1976), "Bearing capacity and settlement of pile foundations", J.
Geotech. Eng. Div. ASCE 102(GT3): 197-228, as quoted in textbooks: Q_u = 400 N A_b + 2 N A_s kN
for displacement piles, 133 N A_b + 0.67 N A_s for bored piles (about 1/3 of each; secondary
source); q_b = 40 N (L_b / D) <= 400 N kPa and f_s <= 100 kPa (FROM MEMORY, as Das, Principles
of Foundation Engineering, quotes them). Energy correction N60 = N ER / 60 (Skempton 1986).

Only the formula is published where we looked: every expected value is a HAND CALCULATION with
the arithmetic in the comment.
"""

import numpy as np
import pytest

from design_core import Rules
from design_core.spt import SptProfile, meyerhof_capacity, n60, spt_capacity_curve

NO_EXCLUSION = Rules(exclusion_diameters=0.0)


def profile(n=20.0, er=60.0, depth_to=20.0):
    """Tests every metre from 0 to ``depth_to`` m below ground level +10.0 m, all N the same."""
    d = np.arange(0.0, depth_to + 0.5, 1.0)
    return SptProfile("BH-H", 0.0, 0.0, 10.0, d, np.full(d.size, n), er)


def test_n60_energy_correction():
    # N60 = N ER / 60: 30 blows at ER 40 % -> 20; 25 at 72 % -> 30.
    assert n60(30, 40.0) == pytest.approx(20.0)
    assert n60(25, 72.0) == pytest.approx(30.0)


def test_displacement_pile_reaches_400_n_limit():
    # Hand calculation. N60 = 20, D = 0.5 m, toe 10 m below ground, driven.
    # L_b / D = 10 / 0.5 = 20: 40 x 20 x 20 = 16 000 kPa > 400 x 20 = 8000 kPa -> q_b = 8000 kPa;
    # A_b = pi 0.25 / 4 = 0.196350 m2 -> Q_b = 1570.80 kN.
    # f_s = 2 x 20 = 40 kPa; A_s = pi 0.5 x 10 = 15.7080 m2 -> Q_s = 628.32 kN. Q_u = 2199.11 kN.
    r = meyerhof_capacity(profile(), 0.5, 10.0, 0.0, "driven", NO_EXCLUSION)
    assert r.base == pytest.approx(1570.80, abs=0.01)
    assert r.shaft == pytest.approx(628.32, abs=0.01)
    assert r.ultimate == pytest.approx(2199.11, abs=0.01)


def test_short_embedment_takes_the_l_over_d_branch():
    # Hand calculation: toe 3 m below ground, D 0.5 m: 40 x 20 x 6 = 4800 kPa < 8000 kPa;
    # Q_b = 4800 x 0.196350 = 942.48 kN.
    r = meyerhof_capacity(profile(), 0.5, 10.0, 7.0, "driven", NO_EXCLUSION)
    assert r.base_pressure == pytest.approx(4800.0, abs=1e-9)
    assert r.base == pytest.approx(942.48, abs=0.01)


def test_bored_pile_takes_a_third_of_base_and_shaft():
    # Hand calculation: as the driven case, 133.3 N A_b + 0.667 N A_s: 1570.80 / 3 = 523.60 kN,
    # 628.32 / 3 = 209.44 kN, total 733.04 kN.
    r = meyerhof_capacity(profile(), 0.5, 10.0, 0.0, "bored", NO_EXCLUSION)
    assert r.base == pytest.approx(523.60, abs=0.01)
    assert r.shaft == pytest.approx(209.44, abs=0.01)


def test_low_energy_hammer_counts_are_corrected():
    # Hand calculation: N = 30 at ER 40 % is N60 = 20: the same Q_u as the first case, 2199.11 kN.
    r = meyerhof_capacity(profile(n=30.0, er=40.0), 0.5, 10.0, 0.0, "driven", NO_EXCLUSION)
    assert r.n60_base == pytest.approx(20.0)
    assert r.ultimate == pytest.approx(2199.11, abs=0.01)


def test_shaft_limit_of_100_kpa():
    # Hand calculation: N60 = 60 -> 2 x 60 = 120 kPa, capped at 100 kPa (from memory);
    # Q_s = 100 x 15.7080 = 1570.80 kN.
    r = meyerhof_capacity(profile(n=60.0), 0.5, 10.0, 0.0, "driven", NO_EXCLUSION)
    assert r.unit_shaft == pytest.approx(100.0)
    assert r.shaft == pytest.approx(1570.80, abs=0.01)


def test_curve_matches_the_single_toe_results():
    p = profile()
    toes = [5.0, 2.0, 0.0, -5.0]
    curve = spt_capacity_curve(p, 0.5, 10.0, toes, "driven", NO_EXCLUSION)
    for toe, ult in zip(toes, curve.ultimate, strict=True):
        assert ult == pytest.approx(meyerhof_capacity(p, 0.5, 10.0, toe, "driven",
                                                      NO_EXCLUSION).ultimate, rel=1e-12)
