"""Hand checks of the axial design resistance and uplift, written out from the methods' sources.

Sources: alpha method, f_s = alpha c_u (Tomlinson, Pile Design and Construction Practice; here
with a constant alpha = C by the rules' "power" rule with n = 0); base q_b = 9 c_u (Skempton
1951, "The bearing capacity of clays"); limit state R_d = phi_g R_u (AS 2159-2009 4.3.1, the
geotechnical strength reduction factor); working stress min(Q_u / F, Q_s / F_s + Q_b / F_b)
(Tomlinson, the global and partial factors); uplift T = eta Q_s + W' with the pile's weight
buoyant below the water table (common practice, eta = 0.75; Terzaghi's effective stress for the
buoyancy). Every expected value below is computed in the test from these formulas.
"""

import math

import pytest

from design_core import GroundModel, Layer, Rules
from design_core.axial import axial_capacity, capacity_curve, tension_capacity

D, TOP, TOE, CU = 0.6, 9.0, -10.0, 60.0
AREA = math.pi * D * D / 4.0
CLAY = GroundModel([Layer(10.0, -30.0, "cohesive", 19.0, cu=CU)], 5.0)
ALPHA = dict(alpha_rule="power", alpha_n=0.0, alpha_c=0.5)
QS = 0.5 * CU * math.pi * D * (TOP - 1.5 * D - TOE)      # shaft below the 1.5 D exclusion
QB = 9.0 * CU * AREA


def test_limit_state_design_is_phi_g_times_the_ultimate():
    rules = Rules(design_approach="limit_state", phi_g=0.6, **ALPHA)
    r = axial_capacity(CLAY, D, TOP, TOE, rules=rules)
    assert r.shaft == pytest.approx(QS, rel=1e-9) and r.base == pytest.approx(QB, rel=1e-9)
    assert r.design == pytest.approx(0.6 * (QS + QB), rel=1e-9)
    curve = capacity_curve(CLAY, D, TOP, [TOE, 0.0], rules=rules)
    assert curve.design[0] == pytest.approx(0.6 * (QS + QB), rel=1e-9)
    assert curve.design_approach == "limit_state" and curve.diameter == D
    assert curve.top_level == TOP and curve.pile_type == "bored" and "limit state" in curve.reason


def test_working_stress_design_takes_the_lesser_of_global_and_partial_factors():
    rules = Rules(fs_global=2.0, fs_shaft=1.2, fs_base=4.0, **ALPHA)
    r = axial_capacity(CLAY, D, TOP, TOE, rules=rules)
    assert r.design == pytest.approx(min((QS + QB) / 2.0, QS / 1.2 + QB / 4.0), rel=1e-9)
    assert r.design_approach == "working_stress"


@pytest.mark.parametrize("approach", ["working_stress", "limit_state"])
def test_uplift_by_hand_with_a_heavier_concrete(approach):
    rules = Rules(design_approach=approach, concrete_unit_weight=25.0, tension_fraction=0.7,
                  fs_tension=2.5, pile_weight_factor=0.85, phi_g=0.5, **ALPHA)
    t = tension_capacity(CLAY, D, TOP, TOE, rules=rules)
    weight = AREA * (25.0 * (TOP - 5.0) + (25.0 - 9.81) * (5.0 - TOE))   # buoyant below +5.0
    shaft_t = 0.7 * QS
    expected = (0.5 * shaft_t if approach == "limit_state" else shaft_t / 2.5) + 0.85 * weight
    assert t.weight == pytest.approx(weight, rel=1e-9)
    assert t.ultimate == pytest.approx(shaft_t + weight, rel=1e-9)
    assert t.design == pytest.approx(expected, rel=1e-9)
    assert (t.diameter, t.top_level, t.toe_level, t.pile_type) == (D, TOP, TOE, "bored")
    assert t.tension_fraction == 0.7 and t.shaft_compression == pytest.approx(QS, rel=1e-9)
    assert t.design_approach == approach
    words = "limit state, phi_g 0.5" if approach == "limit_state" else "working stress, FS 2.5"
    assert words in t.reason


def test_uplift_head_must_be_above_the_toe():
    with pytest.raises(ValueError, match="cutoff_level"):
        tension_capacity(CLAY, D, TOP, TOE, rules=Rules(), cutoff_level=TOE)
