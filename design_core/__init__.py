"""Toeline's engineering computation: pure numpy and the standard library, no I/O.

Units throughout: kN, kPa, m (levels are reduced levels in metres, higher is up); mm only where
the trade uses mm, and then the name says so (``cover_mm``).
"""

from design_core.checks import (
    CHECK_CODES, CHECK_LABELS, MEETS_DESIGN, NEEDS_ENGINEER, Check, PileVerdict,
)
from design_core.rules import ExposureClass, RuleDoc, Rules
from design_core.inputs import AsBuilt, CapGroup, CapPile, Delivery, PileDesign, StratumMet
from design_core.ground import Borrowed, GroundModel, Layer, ground_from_strata
from design_core.axial import (
    AxialResult, CapacityCurve, ShaftRow, TensionResult, alpha_api, alpha_factor, axial_capacity,
    beta_factor, capacity_curve, earth_pressure_k, n_q, pile_area, pile_weight, required_toe_level,
    tension_capacity, unit_shaft_friction,
)
from design_core.section import InteractionCurve, beta_1, section_forces, section_interaction
from design_core.lateral import (
    BromsResult, WinklerResult, broms_lateral, solve_pentadiagonal, winkler_pile, winkler_result,
    winkler_unit_responses,
)
from design_core.group import across_moment, group_shares
from design_core.memo import MEMO
from design_core.verdict import (
    ProjectItem, RequiredToe, recheck, recheck_project, required_toe,
)

__all__ = [
    "CHECK_CODES", "CHECK_LABELS", "MEETS_DESIGN", "NEEDS_ENGINEER", "Check", "PileVerdict",
    "ExposureClass", "RuleDoc", "Rules",
    "AsBuilt", "CapGroup", "CapPile", "Delivery", "PileDesign", "StratumMet",
    "Borrowed", "GroundModel", "Layer", "ground_from_strata",
    "AxialResult", "CapacityCurve", "ShaftRow", "TensionResult", "alpha_api", "alpha_factor",
    "axial_capacity", "beta_factor", "capacity_curve", "earth_pressure_k", "n_q", "pile_area",
    "pile_weight", "required_toe_level", "tension_capacity", "unit_shaft_friction",
    "InteractionCurve", "beta_1", "section_forces", "section_interaction",
    "BromsResult", "WinklerResult", "broms_lateral", "solve_pentadiagonal", "winkler_pile",
    "winkler_result", "winkler_unit_responses",
    "across_moment", "group_shares",
    "MEMO", "ProjectItem", "RequiredToe", "recheck", "recheck_project", "required_toe",
]
