"""Toeline's engineering computation: pure numpy and the standard library, no I/O.

Units throughout: kN, kPa, m (levels are reduced levels in metres, higher is up); mm only where
the trade uses mm, and then the name says so (``cover_mm``).
"""

from design_core.checks import CHECK_CODES, MEETS_DESIGN, NEEDS_ENGINEER, Check, PileVerdict
from design_core.rules import ExposureClass, RuleDoc, Rules

__all__ = [
    "CHECK_CODES", "MEETS_DESIGN", "NEEDS_ENGINEER", "Check", "PileVerdict",
    "ExposureClass", "RuleDoc", "Rules",
]
