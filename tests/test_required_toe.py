"""The toe a pile needs (issue 14, items 1-2): exact at a jump in base resistance, on the
compression check's demand, on the ground met, and the same in the curve the tablet keeps.

Expected values are hand calculations written out beside each test, with the methods of the
sources the rules name: alpha method with a constant alpha (rule alpha_rule "power" with
exponent n = 0 gives alpha = C, so the shaft is C c_u pi D L; Tomlinson, Pile Design and
Construction Practice, the alpha method), base q_b = 9 c_u in clay (Skempton 1951) and
q_b = N_q sigma'_v with N_q = e^(pi tan phi') tan^2(45 + phi'/2) in sand (Reissner 1924), and
the working-stress or limit-state factors of the rules (Rules defaults). The ground and piles
are invented test data.
"""

import math

import pytest

from design_core import AsBuilt, GroundModel, Layer, PileDesign, Rules, StratumMet, recheck
from design_core.axial import capacity_curve, pile_capacity_curve, required_toe_level
from design_core.verdict import required_toe

D = 0.6
AREA = math.pi * D * D / 4.0
CONSTANT_ALPHA = dict(alpha_rule="power", alpha_n=0.0, alpha_c=0.5)   # alpha = 0.5 everywhere

# clay to +2.0 (c_u 50, gamma 19), sand below (phi' 32, gamma 20), water +6.0, ground at +10.0
STEP_GROUND = GroundModel([Layer(10.0, 2.0, "cohesive", 19.0, cu=50.0),
                           Layer(2.0, -30.0, "cohesionless", 20.0, phi=32.0)], 6.0)
CLAY = GroundModel([Layer(10.0, 9.5, "ignore", 18.0),
                    Layer(9.5, -40.0, "cohesive", 19.0, cu=60.0)], 6.0)


def _at(design, ground, level, rules, strata=()):
    record = AsBuilt(platform_level=10.0, measured_depth=10.0 - level, strata=strata)
    return recheck(design, record, ground, rules).check("axial_compression")


def _working_stress(qs, qb):
    """Rules defaults: min(Q_u / 2.5, Q_s / 1.5 + Q_b / 3)."""
    return min((qs + qb) / 2.5, qs / 1.5 + qb / 3.0)


def test_the_toe_sits_on_the_boundary_where_the_base_steps_up_across_the_demand():
    rules = Rules(**CONSTANT_ALPHA)
    # shaft from 1.5 D below the cut-off +9.0 (+8.1) to +2.0: 0.5 x 50 x pi x 0.6 x 6.1
    qs = 0.5 * 50.0 * math.pi * D * 6.1
    above = _working_stress(qs, 9.0 * 50.0 * AREA)                  # clay base just above
    sigma = 19.0 * 4.0 + (19.0 - 9.81) * 4.0                        # sigma'_v at +2.0
    nq = math.exp(math.pi * math.tan(math.radians(32.0))) * math.tan(math.radians(61.0)) ** 2
    on = _working_stress(qs, nq * sigma * AREA)                     # sand base at +2.0
    load = 300.0
    assert above < load < on                                        # 166 kN < 300 < 411 kN
    design = PileDesign("S1", D, 9.0, 0.0, compression=load)
    need = required_toe(design, None, STEP_GROUND, rules)
    assert need.level_m == pytest.approx(2.0, abs=1e-9)
    assert need.demand_kn == load and "layer boundary" in need.reason
    at = _at(design, STEP_GROUND, need.level_m, rules)
    assert at.ok is True and at.limit == pytest.approx(on, rel=1e-3)
    higher = _at(design, STEP_GROUND, need.level_m + 0.05, rules)
    assert higher.ok is False and higher.limit == pytest.approx(above, rel=2e-2)


def test_issue_case_319_kn_needs_plus_2_and_the_cached_curves_agree():
    # Issue 14 item 1: default rules; about 196 kN just above +2.0 and 441 kN at it, so a
    # load of 319 kN needs +2.00, which the old interpolation put at +2.08 (+2.12 on 0.25 m).
    design = PileDesign("S2", D, 9.0, 0.0, compression=319.0)
    need = required_toe(design, None, STEP_GROUND)
    assert need.level_m == pytest.approx(2.0, abs=1e-9)
    assert _at(design, STEP_GROUND, 2.0, Rules()).ok is True
    assert _at(design, STEP_GROUND, 2.05, Rules()).ok is False
    for step in (0.1, 0.25):   # the rig's grid and the recheck's
        curve = pile_capacity_curve(STEP_GROUND, D, 9.0, "bored", Rules(), step=step,
                                    below_toe_m=None)
        assert required_toe_level(curve, 319.0) == pytest.approx(2.0, abs=1e-9)
        assert 2.0 in curve.to_dict()["steps"]
    # a curve without the boundary points errs deep: never above the boundary
    plain = capacity_curve(STEP_GROUND, D, 9.0, [8.9 - 0.25 * k for k in range(150)])
    assert required_toe_level(plain, 319.0) <= 2.0


@pytest.mark.parametrize("approach, loads_are, expected", [
    # limit state, working loads: demand 600 x 1.5 = 900 kN = 0.55 (Q_s + Q_b)
    ("limit_state", "working",
     8.1 - (900.0 / 0.55 - 9.0 * 60.0 * AREA) / (0.5 * 60.0 * math.pi * D)),
    # working stress, factored loads: demand 600 / 1.5 = 400 kN = Q_u / 2.5 (Q_u / 2.5 governs)
    ("working_stress", "factored",
     8.1 - (1000.0 - 9.0 * 60.0 * AREA) / (0.5 * 60.0 * math.pi * D)),
])
def test_the_required_toe_takes_the_compression_checks_demand(approach, loads_are, expected):
    rules = Rules(design_approach=approach, loads_are=loads_are, **CONSTANT_ALPHA)
    design = PileDesign("L1", D, 9.0, -5.0, compression=600.0)
    need = required_toe(design, None, CLAY, rules)
    assert need.level_m == pytest.approx(expected, abs=2e-3)
    assert _at(design, CLAY, need.level_m, rules).ok is True
    assert _at(design, CLAY, need.level_m + 0.05, rules).ok is False


def test_the_required_toe_uses_the_ground_met_and_says_how_much_deeper():
    # fill logged 0-16 m below the platform +10.0 (to -6.0) where the model has clay: no shaft
    # above -6.0; working stress Q_u / 2.5 = 600 kN governs, Q_u = 1500 kN
    rules = Rules(**CONSTANT_ALPHA)
    strata = (StratumMet(0.0, 16.0, "ignore"),)
    design = PileDesign("G1", D, 9.0, -20.0, compression=600.0)
    expected = -6.0 - (1500.0 - 9.0 * 60.0 * AREA) / (0.5 * 60.0 * math.pi * D)
    record = AsBuilt(platform_level=10.0, measured_depth=30.0, strata=strata)   # toe -20.0
    need = required_toe(design, record, CLAY, rules)
    assert need.level_m == pytest.approx(expected, abs=2e-3)                   # -29.83 m
    assert need.more_needed_m == pytest.approx(-20.0 - need.level_m, abs=1e-9)
    assert "ground met" in need.reason
    assert _at(design, CLAY, need.level_m, rules, strata).ok is True
    assert _at(design, CLAY, need.level_m + 0.05, rules, strata).ok is False
    model_only = required_toe(design, None, CLAY, rules)
    assert model_only.level_m > need.level_m + 10.0


def test_clay_logged_at_the_toe_gives_the_base_9_cu_not_the_models_sand():
    # Issue 14 item 3: the toe +1.0 lies in the model's sand, but clay was logged down to it.
    rules = Rules(**CONSTANT_ALPHA)
    design = PileDesign("B1", D, 9.0, 1.0, compression=300.0)
    clay_to_toe = (StratumMet(0.0, 9.0, "cohesive"),)
    qs = 0.5 * 50.0 * math.pi * D * (8.1 - 1.0)
    expected = _working_stress(qs, 9.0 * 50.0 * AREA)                 # 185 kN: short of 300
    met = _at(design, STEP_GROUND, 1.0, rules, clay_to_toe)
    assert met.ok is False and met.limit == pytest.approx(expected, rel=1e-3)
    assert "base on the cohesive met at the toe" in met.reason
    model = _at(design, STEP_GROUND, 1.0, rules)                      # sand base: ok
    assert model.ok is True
