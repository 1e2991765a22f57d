"""Circular RC pile section against ACI 318-19 nominal values (section S8).

Source: American Concrete Institute (2019) ACI 318-19 Building Code Requirements for Structural
Concrete: 22.2 (plane sections, eps_cu 0.003, 0.85 f'c block), Table 22.2.2.4.3 (beta_1),
22.4.2.2 (P0), 22.4.3.1 (axial tension); clause numbers from memory. The circular segment of the
block is geometry: theta = 2 acos((R - a)/R), A = R^2 (theta - sin theta)/2, centroid
4 R sin^3(theta/2) / (3 (theta - sin theta)).

Section S8: D = 600 mm, 10 bars of 20 mm on a circle of radius 205 mm (75 mm cover + 10 mm link +
half a bar, so clear cover to the main bars is 85 mm), f'c = 30 MPa, fy = 420 MPa, Es = 200 GPa,
eps_cu = 0.003, beta_1 = 0.836, stress block 0.85 f'c with concrete displaced by bars deducted
(ACI 318-19 22.2). No published worked example of a circular section with retrievable numbers
was found, so every expected value is a hand calculation from ACI 318-19 22.2 with the arithmetic
in the comment (docs/validation.md section 3), cross-checked with an independent fibre
integration (1200 strips: balanced point within 0.15 % in P and 0.05 % in M, pure bending within
0.15 %).
"""

import math

import numpy as np
import pytest

from design_core.section import beta_1, section_forces, section_interaction

S8 = dict(diameter=0.6, cover_mm=85.0, n_bars=10, bar_mm=20.0, fc_mpa=30.0, fy_mpa=420.0)


@pytest.fixture(scope="module")
def curve():
    return section_interaction(**S8)


def test_beta_1_for_30_mpa():
    # ACI 318-19 Table 22.2.2.4.3 (published rule): 0.85 - 0.05 (30 - 28)/7 = 0.836
    assert beta_1(30.0) == pytest.approx(0.8357, abs=1e-4)
    assert beta_1(20.0) == 0.85 and beta_1(70.0) == 0.65


def test_squash_load(curve):
    # Hand calculation from P0 = 0.85 f'c (Ag - Ast) + fy Ast (ACI 318-19 22.4.2.2): Ag = pi 300^2 =
    # 282,743 mm2, Ast = 10 x pi 10^2 = 3141.6 mm2; 0.85 x 30 x 279,602 + 420 x 3141.6 = 8449.3 kN
    assert curve.squash == pytest.approx(8449.3, rel=1e-4)
    assert curve.n[-1] == pytest.approx(8449.3, rel=1e-4)
    assert curve.moment_capacity(8449.3) == pytest.approx(0.0, abs=1.0)


def test_balanced_point_from_strain_compatibility():
    # Hand calculation by strain compatibility (ACI 318-19 22.2): c_b = 0.003/(0.003 + 420/200,000)
    # x 505 = 297.06 mm; a = 0.836 x 297.06 = 248.26 mm; segment 110,480 mm2 at 155.7 mm: 2817.2 kN,
    # 438.7 kNm; bars (d 95.0, 2 x 134.2, 2 x 236.7, 2 x 363.3, 2 x 465.8, 505.0 mm) +120.2,
    # 2 x +95.4, 2 x +30.3, 2 x -42.1, 2 x -107.1, -131.9 kN: Pb = 2817.2 - 58.7 = 2758.5 kN,
    # Mb = 438.7 + 128.0 = 566.7 kNm
    n, m = section_forces(297.06, **S8)
    assert n[0] == pytest.approx(2758.5, rel=2e-3)
    assert m[0] == pytest.approx(566.7, rel=1e-3)


def test_balanced_point_on_the_traced_curve(curve):
    # The hand calculation of the previous test (ACI 318-19 22.2), Mb = 566.7 kNm at Pb = 2758.5 kN,
    # read off the interpolated curve
    assert curve.moment_capacity(2758.5) == pytest.approx(566.7, rel=2e-3)


def test_pure_bending(curve):
    # Hand calculation by strain compatibility (ACI 318-19 22.2) at c = 130.2 mm: a = 108.8 mm;
    # segment 34,982 mm2 at 235.5 mm: 892.1 kN, 210.1 kNm; bars: d 95.0 +42.9 kN, 2 x 134.2
    # -5.7 kN each, seven yielding at -131.9 kN (eps_t 0.00864); sum N = 892.1 + 42.9 - 11.4 -
    # 923.3 = 0, M0 = 287.8 kNm
    n, m = section_forces(130.2, **S8)
    assert n[0] == pytest.approx(0.0, abs=5.0)
    assert m[0] == pytest.approx(287.8, rel=1.5e-3)
    assert curve.pure_bending == pytest.approx(287.8, rel=1.5e-3)


def test_pure_tension_end(curve):
    # ACI 318-19 22.4.3.1: nominal axial tension strength = fy Ast = 420 x 3141.6 N = 1319.5 kN
    assert curve.tension == pytest.approx(-1319.5, rel=1e-4)
    assert curve.moment_capacity(-1400.0) == 0.0
    assert curve.moment_capacity(9000.0) == 0.0


def test_curve_is_traced_from_tension_to_squash(curve):
    # Consistency of the trace (not a published value): N rises strictly, M is never negative.
    assert np.all(np.diff(curve.n) > 0)
    assert np.all(curve.m >= 0)
    assert curve.m.max() == pytest.approx(curve.moment_capacity(curve.n[np.argmax(curve.m)]))


def test_less_cover_raises_capacity_in_bending():
    # Mechanics (not a published value): bars further from the centre carry more moment.
    deep = section_interaction(**{**S8, "cover_mm": 120.0})
    shallow = section_interaction(**S8)
    assert deep.pure_bending < shallow.pure_bending
    # Squash load does not depend on where the bars are (ACI 318-19 22.4.2.2).
    assert deep.squash == pytest.approx(shallow.squash)


def test_unreinforced_section_squash_is_concrete_only():
    # ACI 318-19 22.4.2.2 with Ast = 0: 0.85 x 30 x pi x 300^2 = 7209.9 kN
    plain = section_interaction(0.6, 75.0, 0, 0.0, 30.0, 420.0)
    assert plain.squash == pytest.approx(0.85 * 30 * math.pi * 300 ** 2 / 1000, rel=1e-9)


@pytest.mark.parametrize("field, value", [("diameter", -1.0), ("fc_mpa", math.nan),
                                          ("cover_mm", 400.0)])
def test_bad_input_names_the_field(field, value):
    with pytest.raises(ValueError, match=field):
        section_interaction(**{**S8, field: value})
