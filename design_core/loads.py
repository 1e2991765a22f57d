"""The schedule's loads on the basis each check needs: working or factored.

The schedule holds working or factored loads (``rules.loads_are``). ``load_factor`` converts
between them: factored = working x load_factor. The axial checks (and the required toe) compare
the load on the basis of the resistance: working loads with a working-stress resistance,
factored loads with a limit-state one (``axial_demand``). Units as given (kN, kNm).
"""

from __future__ import annotations

from design_core.rules import Rules


def to_working(load: float, rules: Rules) -> float:
    """The working value of a schedule load (kN or kNm)."""
    return load / rules.load_factor if rules.loads_are == "factored" else load


def to_factored(load: float, rules: Rules) -> float:
    """The factored value of a schedule load (kN or kNm)."""
    return load * rules.load_factor if rules.loads_are == "working" else load


def axial_demand(load: float, rules: Rules) -> float:
    """The load on the basis of the axial resistance (working stress or limit state), kN."""
    if rules.design_approach == "working_stress":
        return to_working(load, rules)
    return to_factored(load, rules)


def basis(rules: Rules) -> str:
    """"working" or "factored": the basis of ``axial_demand``."""
    return "working" if rules.design_approach == "working_stress" else "factored"
