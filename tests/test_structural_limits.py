"""The structural and lateral checks at the limits the codes put (issue 14, item 3).

Sources: Hetenyi (1946), Beams on Elastic Foundation: a long free-head beam on uniform springs
k under a head shear H deflects y_0 = 2 H beta / k with beta = (k / 4 EI)^(1/4). ACI 318-19
Table 22.4.2.1: for a tied member P_n,max = 0.80 P_0, with P_0 = 0.85 f'_c (A_g - A_st) +
f_y A_st (22.4.2.2). E_c = 4700 sqrt(f'_c) MPa (19.2.2.1(b)). The ground and piles are invented
test data; the spring rule k = 67 c_u is the rules' default (Davisson 1970, from memory).
"""

import math
from dataclasses import replace

import pytest

from design_core import AsBuilt, GroundModel, Layer, PileDesign, Rules, recheck

CLAY = GroundModel([Layer(10.0, -40.0, "cohesive", 19.0, cu=60.0)], 5.0)


def test_a_slender_pile_head_deflection_is_within_half_a_percent_of_hetenyi():
    d, fc, shear = 0.3, 32.0, 10.0
    design = PileDesign("W1", d, 10.0, -35.0, compression=0.0, shear=shear, n_bars=6, bar_mm=16.0,
                        cage_length=10.0, fc_mpa=fc, cover_mm=50.0, head="free")
    record = AsBuilt(platform_level=10.0, measured_depth=45.0, diameter_mm=300.0,
                     cutoff_level=10.0, easting=0.0, northing=0.0, cover_mm=50.0,
                     concrete_mpa=fc)
    v = recheck(design, record, CLAY)
    rules = Rules()
    ei = rules.ei_cracked_factor * 4700.0 * math.sqrt(fc) * 1000.0 * math.pi * d ** 4 / 64.0
    k = rules.spring_per_cu * 60.0
    beta = (k / (4.0 * ei)) ** 0.25
    assert beta * 45.0 > 10.0                                 # a long pile in Hetenyi's sense
    hetenyi_mm = 2.0 * shear * beta / k * 1000.0
    assert v.details["head_deflection_mm"] == pytest.approx(hetenyi_mm, rel=5e-3)


def _squash(d, n_bars, bar_mm, fc, fy):
    a_st = n_bars * math.pi * bar_mm ** 2 / 4.0
    a_g = math.pi * (d * 1000.0) ** 2 / 4.0
    return (0.85 * fc * (a_g - a_st) + fy * a_st) / 1000.0          # kN


def test_axial_strength_is_capped_at_0_80_phi_p0_for_a_tied_section():
    d, n_bars, bar_mm, fc, fy = 0.6, 8, 20.0, 32.0, 500.0
    p0 = _squash(d, n_bars, bar_mm, fc, fy)
    phi = Rules().structural_phi
    n_f = 0.9 * phi * p0                      # above 0.80 phi P_0, below phi P_0
    load = n_f / Rules().load_factor          # working load in the schedule
    design = PileDesign("A1", d, -1.0, -16.0, compression=load, n_bars=n_bars, bar_mm=bar_mm,
                        cage_length=12.0, fc_mpa=fc, fy_mpa=fy, cover_mm=75.0, head="fixed",
                        cap="C1")
    from design_core import CapGroup, CapPile
    cap = CapGroup("C1", (CapPile("A1", (0.0, 0.0)), CapPile("A2", (2.0, 0.0))), n=2 * load,
                   load_point=(1.0, 0.0))
    record = AsBuilt(platform_level=0.0, measured_depth=16.0, diameter_mm=600.0, cutoff_level=-1.0,
                     easting=0.0, northing=0.0, cover_mm=75.0, concrete_mpa=fc)
    ground = GroundModel([Layer(0.0, -30.0, "cohesive", 19.0, cu=150.0)], -1.0)
    c = recheck(design, record, ground, group=cap).check("structural")
    assert c.ok is False
    assert c.utilisation == pytest.approx(n_f / (0.80 * phi * p0), rel=1e-6)
    assert "0.8" in c.reason and "P_0" in c.reason
    free = recheck(design, record, ground, Rules(axial_cap_factor=1.0), group=cap).check("structural")
    assert free.utilisation != pytest.approx(c.utilisation)


def test_a_fixed_head_takes_the_head_moment_of_the_springs_into_the_section():
    base = PileDesign("F1", 0.6, -1.0, -16.0, compression=300.0, shear=60.0, moment=0.0,
                      n_bars=8, bar_mm=20.0, cage_length=12.0, head="fixed")
    record = AsBuilt(platform_level=0.0, measured_depth=16.0, diameter_mm=600.0, cutoff_level=-1.0,
                     easting=0.0, northing=0.0, cover_mm=75.0, concrete_mpa=32.0)
    ground = GroundModel([Layer(0.0, -30.0, "cohesive", 19.0, cu=60.0)], -1.0)
    fixed = recheck(base, record, ground)
    n_f, m_f = fixed.details["load_point"]
    head = abs(fixed.details["winkler"].moment[0]) * Rules().load_factor   # factored, kNm
    assert m_f == pytest.approx(max(head, n_f * 0.075), rel=1e-9)
    assert head > n_f * 0.075 and "head moment" in fixed.check("structural").reason
    free = recheck(replace(base, head="free"), record, ground)
    assert free.details["load_point"][1] < m_f


def test_few_bars_are_taken_in_their_least_favourable_orientation():
    # ACI 318-19 22.2 strain compatibility for any orientation of the ring of bars; with four
    # bars the orientation changes the moment capacity, and the recheck takes the least.
    import numpy as np

    from design_core.section import section_interaction, section_interaction_least

    args = (0.6, 75.0, 4, 25.0, 32.0, 500.0)
    least = section_interaction_least(*args)
    turns = [section_interaction(*args, rotation_deg=a) for a in (0.0, 15.0, 30.0, 45.0)]
    for n in np.linspace(least.tension * 0.9, least.squash * 0.9, 40):
        got = least.moment_capacity(n)
        assert got <= min(t.moment_capacity(n) for t in turns) + 0.5   # sampled turns, kNm
    assert least.pure_bending < turns[0].pure_bending - 1.0           # the orientation matters
    many = section_interaction_least(0.6, 75.0, 16, 16.0, 32.0, 500.0)
    one = section_interaction(0.6, 75.0, 16, 16.0, 32.0, 500.0)
    assert many.pure_bending == pytest.approx(one.pure_bending, rel=0.02)
    design = PileDesign("Q1", 0.6, -1.0, -16.0, compression=300.0, n_bars=4, bar_mm=25.0,
                        cage_length=12.0, cover_mm=75.0)
    record = AsBuilt(platform_level=0.0, measured_depth=16.0, diameter_mm=600.0, cutoff_level=-1.0,
                     easting=0.0, northing=0.0, cover_mm=75.0, concrete_mpa=32.0)
    ground = GroundModel([Layer(0.0, -30.0, "cohesive", 19.0, cu=60.0)], -1.0)
    used = recheck(design, record, ground).details["interaction"]
    assert used.pure_bending == pytest.approx(least.pure_bending)
