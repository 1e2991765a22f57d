"""Rigid-cap load sharing against the published symmetric formula and rigid-plane statics.

Sources: for a symmetric group P_i = N/n + M_x y_i / sum y^2 + M_y x_i / sum x^2 (Bowles, J. E.
(1996) Foundation Analysis and Design, 5th ed., McGraw-Hill, chapter on pile caps; from memory,
the same expression found in course notes); for an as-built group the general form with the
product of inertia, from the equilibrium of a rigid cap on piles of equal stiffness (statics:
sum P = N, sum P x = M_y + N x_load, sum P y = M_x + N y_load). Every expected value is a hand
calculation from these, with the arithmetic in the comment (docs/validation.md section 2).
Example: 4 piles at (+-1.2, +-1.2) m, N 4000 kN at (0, 0), M_x 400, M_y 200 kNm,
sum x^2 = sum y^2 = 4 x 1.44 = 5.76 m2.
"""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from design_core.group import across_moment, group_shares

DESIGN = [(1.2, 1.2), (-1.2, 1.2), (-1.2, -1.2), (1.2, -1.2)]
AS_BUILT = [(1.3, 1.2), (-1.2, 1.2), (-1.2, -1.2), (1.2, -1.2)]


def test_symmetric_group_design_positions():
    # Hand calculation from P = N/n + Mx y/sum y^2 + My x/sum x^2 (Bowles 1996, pile caps):
    # 1000 +- 400 x 1.2/5.76 (83.33) +- 200 x 1.2/5.76 (41.67) -> 1125.0, 1041.67, 875.0, 958.33 kN
    p = group_shares(DESIGN, 4000.0, mx=400.0, my=200.0)
    assert p == pytest.approx([1125.0, 1041.67, 875.0, 958.33], abs=0.01)


def test_one_pile_100_mm_out_of_position():
    # Hand calculation from the general rigid-cap formula (statics), pile 1 at (1.30, 1.20): centroid
    # (0.025, 0); sum x'^2 6.0075, sum y'^2 5.76, sum x'y' 0.12; Mx' 400, My' = 200 - 4000 x 0.025
    # = 100 kNm; det 6.0075 x 5.76 - 0.12^2 = 34.5888; b = (100 x 5.76 - 400 x 0.12)/34.5888 =
    # 15.265, c = (400 x 6.0075 - 100 x 0.12)/34.5888 = 69.127; P1 = 1000 + 15.265 x 1.275 +
    # 69.127 x 1.2 = 1102.42, and so on -> 1102.42, 1064.25, 898.35, 934.99 kN
    p = group_shares(AS_BUILT, 4000.0, mx=400.0, my=200.0)
    assert p == pytest.approx([1102.42, 1064.25, 898.35, 934.99], abs=0.01)


def test_product_of_inertia_matters():
    # Hand calculation of the shortcut without sum x'y' (statics): 1000 + 100 x 1.275/6.0075 +
    # 400 x 1.2/5.76 = 1104.56 for pile 1 (1062.94, 896.28, 936.23 for the others): ~0.2 % off
    p = group_shares(AS_BUILT, 4000.0, mx=400.0, my=200.0)
    assert abs(p[0] - 1104.56) > 2.0


def test_out_of_position_pile_under_vertical_load_only():
    # Hand calculation, general formula with N only (statics): My' = -4000 x 0.025 = -100 kNm;
    # b = -100 x 5.76/34.5888 = -16.653, c = 100 x 0.12/34.5888 = 0.3469; P1 = 1000 - 16.653 x
    # 1.275 + 0.3469 x 1.2 = 979.18 -> 979.18, 1020.82, 1019.98, 980.02 kN
    p = group_shares(AS_BUILT, 4000.0)
    assert p == pytest.approx([979.18, 1020.82, 1019.98, 980.02], abs=0.01)


def test_load_point_off_centre_is_a_moment():
    # Statics: N at (0.1, 0) about the centroid is the same as N at the centroid plus My = 0.1 N.
    a = group_shares(DESIGN, 4000.0, load_point=(0.1, 0.0))
    b = group_shares(DESIGN, 4000.0, my=400.0)
    assert a == pytest.approx(b)


def test_two_piles_share_moment_along_their_line():
    # Statics: two piles 2 m apart, N 1000, My 100 -> 500 +- 100/2 kN
    assert group_shares([(1, 0), (-1, 0)], 1000.0, my=100.0) == pytest.approx([550.0, 450.0])
    with pytest.raises(ValueError, match="line"):
        group_shares([(1, 0), (-1, 0)], 1000.0, mx=100.0)


def test_moment_across_a_line_of_piles_can_be_left_to_tie_beams():
    # Statics: two piles on the x axis carry My by push-pull; Mx (across the line) they cannot.
    p = group_shares([(1, 0), (-1, 0)], 1000.0, mx=80.0, my=100.0, across="ignore")
    assert p == pytest.approx([550.0, 450.0])
    assert across_moment([(1, 0), (-1, 0)], 1000.0, mx=80.0, my=100.0) == pytest.approx(80.0)
    # N off the line is a moment across it: 1000 kN at y = 0.05 m -> 50 kNm
    assert across_moment([(1, 0), (-1, 0)], 1000.0, load_point=(0.0, 0.05)) == pytest.approx(50.0)
    assert across_moment(AS_BUILT, 4000.0, mx=400.0) == 0.0


def test_single_pile_takes_the_load():
    assert group_shares([(0.0, 0.0)], 750.0) == pytest.approx([750.0])
    with pytest.raises(ValueError, match="single pile"):
        group_shares([(0.0, 0.0)], 750.0, mx=10.0)


coords = st.floats(-5.0, 5.0, allow_nan=False)


@settings(max_examples=200, deadline=None, database=None)
@given(pts=st.lists(st.tuples(coords, coords), min_size=3, max_size=12),
       n=st.floats(-5000, 20000), mx=st.floats(-3000, 3000), my=st.floats(-3000, 3000),
       lx=st.floats(-1, 1), ly=st.floats(-1, 1))
def test_equilibrium_holds_for_any_group(pts, n, mx, my, lx, ly):
    # Statics (rigid-cap equilibrium): sum P = N, sum P x = My + N x_load, sum P y = Mx + N y_load
    xy = np.array(pts)
    dx, dy = xy[:, 0] - xy[:, 0].mean(), xy[:, 1] - xy[:, 1].mean()
    ixx, iyy, ixy = dx @ dx, dy @ dy, dx @ dy
    if ixx * iyy - ixy ** 2 < 1e-3 * max(ixx + iyy, 1e-9) ** 2:
        return   # piles nearly on one line or one point: covered by the tests above
    p = group_shares(xy, n, mx=mx, my=my, load_point=(lx, ly))
    scale = abs(n) + abs(mx) + abs(my) + 1.0
    assert p.sum() == pytest.approx(n, abs=1e-6 * scale)
    assert p @ xy[:, 0] == pytest.approx(my + n * lx, abs=1e-6 * scale * 10)
    assert p @ xy[:, 1] == pytest.approx(mx + n * ly, abs=1e-6 * scale * 10)
