"""The checks of one pile: result objects (``results``) and the check functions by area.

``capacity`` (axial compression, tension, group share), ``members`` (structural, lateral),
``tolerances`` (position, inclination, cut-off, toe, diameter, cage) and ``concrete`` (cover,
grade, base debris, volume, time). ``design_core.verdict`` runs them in ``AS_BUILT_CODES`` order.
"""

from design_core.checks.results import (
    AS_BUILT_CODES, CAPACITY_CODES, CHECK_CODES, CHECK_LABELS, MEETS_DESIGN, NEEDS_ENGINEER, Check, PileVerdict,
)

__all__ = ["AS_BUILT_CODES", "CAPACITY_CODES", "CHECK_CODES", "CHECK_LABELS", "MEETS_DESIGN", "NEEDS_ENGINEER", "Check", "PileVerdict"]
