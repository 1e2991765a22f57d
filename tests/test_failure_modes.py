"""The failure-mode modules: inputs refuse bad values by name, results serialise, checks that
cannot be made are not checked (never ok), and the new rules carry their sources."""

import json

import pytest

from design_core import block, buckling, checks, downdrag, settlement, uplift
from design_core.ground import GroundModel, Layer
from design_core.rules import Rules

NEW_CODES = (settlement.CODES + downdrag.CODES + block.CODES + buckling.CODES + uplift.CODES)
RULES = ("settlement_limit_mm", "settlement_limit_diameters", "pile_modulus_mpa",
         "soil_poisson_ratio", "dragload_factor", "block_fs", "block_nc_max",
         "buckling_ei_factor", "buckling_stiffness_factor", "buckling_k_free", "buckling_k_fixed",
         "fixity_r_factor", "fixity_t_factor", "swell_shaft_coefficient", "cone_half_angle_deg",
         "tolerance_rule_set", "position_allowance_per_m_mm", "rake_boundary",
         "rake_tolerance_shallow", "rake_tolerance_steep", "en1536_position_small_mm",
         "en1536_position_fraction", "en1536_position_large_mm", "en1536_inclination_vertical",
         "en1536_inclination_raking")


@pytest.fixture(autouse=True)
def _new_codes(monkeypatch):
    """The lead adds the new codes to CHECK_CODES at merge; until then the tests extend it."""
    extra = tuple(c for c in NEW_CODES if c not in checks.CHECK_CODES)
    monkeypatch.setattr(checks, "CHECK_CODES", checks.CHECK_CODES + extra)


def test_codes_are_the_ones_the_issue_pins():
    assert set(NEW_CODES) == {"settlement", "downdrag", "group_capacity", "buckling",
                              "swelling_uplift", "shallow_uplift"}


@pytest.mark.parametrize("name", RULES)
def test_new_rules_have_label_unit_and_source(name):
    meta = Rules.field_meta(name)
    assert meta["label"] and len(meta["source"]) > 20 and meta["unit"] is not None


def test_new_rules_refuse_values_out_of_range():
    with pytest.raises(ValueError, match="block_nc_max must be at most 9"):
        Rules(block_nc_max=12.0)
    with pytest.raises(ValueError, match="tolerance_rule_set must be one of"):
        Rules(tolerance_rule_set="ice")


@pytest.mark.parametrize("make, message", [
    (lambda: settlement.ModulusLayer(0.0, -5.0, 10.0), "g_kpa must be at least"),
    (lambda: settlement.SettlementInput(100.0, 0.6, 0.0, -5.0, ()), "layers"),
    (lambda: settlement.SettlementInput(
        100.0, 0.6, 0.0, -50.0, (settlement.ModulusLayer(0.0, -10.0, 1e4),)), "toe_level"),
    (lambda: settlement.SettlementInput(
        100.0, 0.6, 0.0, -5.0, (settlement.ModulusLayer(0.0, -10.0, 1e4),), nu=0.7),
     "nu must be at most 0.5"),
    (lambda: downdrag.DowndragInput((0.0, 1.0), (1.0, 1.0), (True, True), 0.6, 1.0, 1.0),
     "descend"),
    (lambda: downdrag.DowndragInput((0.0, -1.0), (1.0,), (True, True), 0.6, 1.0, 1.0),
     "unit_friction must hold one value per level"),
    (lambda: block.GroupInput(((0.0, 0.0),), 0.6, 10.0, 50.0, 50.0, 1.0, 1.0), "at least 2"),
    (lambda: buckling.BucklingInput(1.0, 0.6, 1.0, "pinned", "constant", 1.0), "head"),
    (lambda: buckling.BucklingInput(1.0, 0.6, 1.0, "free", "cubic", 1.0), "profile"),
    (lambda: uplift.SwellingInput(0.6, 2.0, 10.0), "one of unit_uplift_kpa"),
    (lambda: uplift.ConeInput(GroundModel((Layer(0.0, -5.0, "cohesive", 18.0, cu=50.0),), -9.0),
                              0.6, -3.0, 1.0), "surface_level"),
])
def test_inputs_refuse_bad_values_by_name(make, message):
    with pytest.raises(ValueError, match=message):
        make()


@pytest.mark.parametrize("check", [
    lambda: settlement.settlement_check(None, missing="no shear modulus G in the ground model"),
    lambda: downdrag.downdrag_check(None, 100.0),
    lambda: block.group_capacity_check(None),
    lambda: buckling.buckling_check(None),
    lambda: uplift.swelling_check(None),
    lambda: uplift.shallow_uplift_check(100.0, 200.0, None),
])
def test_missing_input_is_not_checked_never_ok(check):
    chk = check()
    assert chk.ok is None and chk.status == "not checked" and chk.reason
    json.dumps(chk.to_dict())


def test_downdrag_without_the_structural_resistance_is_not_checked():
    inp = downdrag.DowndragInput((0.0, -10.0), (20.0, 20.0), (True, False), 0.6, 100.0, 100.0)
    assert downdrag.downdrag_check(inp, None).ok is None


def test_results_serialise_to_json():
    layers = (settlement.ModulusLayer(0.0, -20.0, 2e4),)
    ground = GroundModel((Layer(0.0, -10.0, "cohesive", 20.0, cu=100.0),), -100.0)
    results = [
        settlement.pile_settlement(settlement.SettlementInput(500.0, 0.6, 0.0, -10.0, layers)),
        downdrag.neutral_plane(downdrag.DowndragInput((0.0, -10.0), (20.0, 20.0), (True, False),
                                                      0.6, 100.0, 100.0)),
        block.group_capacity(block.GroupInput(((0, 0), (2, 0)), 0.6, 10.0, 50.0, 50.0, 1.0, 1.0)),
        buckling.buckling_load(buckling.BucklingInput(100.0, 0.6, 2.0, "free", "linear", 5000.0)),
        uplift.swelling_uplift(uplift.SwellingInput(0.6, 2.0, 100.0, unit_uplift_kpa=20.0)),
        uplift.cone_pullout(uplift.ConeInput(ground, 0.6, -3.0, 0.0)),
    ]
    for res in results:
        data = json.loads(json.dumps(res.to_dict()))
        assert data["reason"]


def test_settlement_layers_above_the_head_are_clipped():
    # The layers of a ground model may start above the cut-off: only the part below the head
    # counts, so the result equals that of layers cut at the head.
    high = (settlement.ModulusLayer(5.0, -30.0, 2e4),)
    cut = (settlement.ModulusLayer(0.0, -30.0, 2e4),)
    a = settlement.pile_settlement(settlement.SettlementInput(800.0, 0.6, 0.0, -15.0, high))
    b = settlement.pile_settlement(settlement.SettlementInput(800.0, 0.6, 0.0, -15.0, cut))
    assert a.head_settlement_mm == b.head_settlement_mm and a.free_length == 0.0


def test_settlement_too_short_for_the_solution_is_not_checked():
    # A pile so short that r_m falls inside r_0 (L 0.2 m, D 1.0 m): the method does not apply.
    layers = (settlement.ModulusLayer(0.0, -1.0, 2e4),)
    chk = settlement.settlement_check(settlement.SettlementInput(10.0, 1.0, 0.0, -0.2, layers))
    assert chk.ok is None and "r_m" in chk.reason


def test_nothing_to_check_is_ok_with_zero_utilisation():
    inp = downdrag.DowndragInput((0.0, -10.0), (20.0, 20.0), (False, False), 0.6, 100.0, 100.0)
    for chk in (downdrag.downdrag_check(inp, 1000.0),
                uplift.swelling_check(uplift.SwellingInput(0.6, 0.0, 10.0, unit_uplift_kpa=5.0)),
                uplift.shallow_uplift_check(0.0, 10.0, None)):
        assert chk.ok is True and chk.utilisation == 0.0
