"""Result objects shared by every check: one ``Check`` per code, one ``PileVerdict`` per pile.

The web app and the record only read these; they never recompute.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

# The checks the recheck runs on every pile's as-built record (design_core.verdict), in order.
AS_BUILT_CODES = (
    "axial_compression",
    "axial_tension",
    "structural",
    "lateral",
    "group_share",
    "durability_cover",
    "durability_grade",
    "position",
    "inclination",
    "cutoff_level",
    "toe_level",
    "diameter",
    "base_debris",
    "concrete_volume",
    "concrete_time",
    "cage_length",
)

# Every check code: the as-built checks, then the checks of the installation record by pile type,
# of the tests after installation and of the further failure modes. The later groups are computed
# by their own modules' check functions (their inputs: docs/checks.md says where each is run).
CHECK_CODES = AS_BUILT_CODES + (
    # installation records by pile type (design_core.driving, .cfa, .helical)
    "driving_set",
    "driving_resistance",
    "driving_refusal",
    "cfa_increment_volume",
    "cfa_pressure",
    "cfa_overdrilling",
    "torque_capacity",
    # tests after installation (design_core.loadtest)
    "load_test",
    "integrity",
    # further failure modes (design_core.settlement, .downdrag, .block, .buckling, .uplift)
    "settlement",
    "downdrag",
    "group_capacity",
    "buckling",
    "swelling_uplift",
    "shallow_uplift",
)

# The checks whose utilisation is demand over capacity: they rank the piles (worst_utilisation).
CAPACITY_CODES = ("axial_compression", "axial_tension", "structural", "lateral", "group_share")

# Each check in plain words, for screens and the PDF (the codes stay in the API, CSV and audit).
CHECK_LABELS = {
    "axial_compression": "Compression resistance",
    "axial_tension": "Uplift resistance",
    "structural": "Pile section strength",
    "lateral": "Lateral load and head deflection",
    "group_share": "Share of the cap load",
    "durability_cover": "Cover for exposure class",
    "durability_grade": "Concrete grade for exposure class",
    "position": "Position at cut-off",
    "inclination": "Inclination",
    "cutoff_level": "Cut-off level",
    "toe_level": "Toe level",
    "diameter": "Diameter",
    "base_debris": "Base debris",
    "concrete_volume": "Concrete volume",
    "concrete_time": "Time from batching to discharge",
    "cage_length": "Cage length",
    "driving_set": "Final set against the driving criterion",
    "driving_resistance": "Driving resistance by dynamic formula",
    "driving_refusal": "Refusal before the design toe",
    "cfa_increment_volume": "Concrete per increment (CFA)",
    "cfa_pressure": "Concrete pressure on extraction (CFA)",
    "cfa_overdrilling": "Auger revolutions per pitch (CFA)",
    "torque_capacity": "Capacity from installation torque",
    "load_test": "Load test",
    "integrity": "Integrity test",
    "settlement": "Settlement under working load",
    "downdrag": "Downdrag (negative skin friction)",
    "group_capacity": "Group and block capacity",
    "buckling": "Buckling of the free length",
    "swelling_uplift": "Uplift from swelling ground",
    "shallow_uplift": "Cone pull-out",
}

MEETS_DESIGN = "meets design"
NEEDS_ENGINEER = "needs engineer"


def _clean(x: Any) -> Any:
    """A JSON-safe number: None for NaN/inf, plain float for numpy scalars."""
    if x is None or isinstance(x, (str, bool)):
        return x
    try:
        xf = float(x)
    except (TypeError, ValueError):
        return x
    return xf if math.isfinite(xf) else None


@dataclass(frozen=True)
class Check:
    """One check's outcome.

    ``value`` and ``limit`` are in ``unit``; ``utilisation`` is demand over capacity (or value
    over limit), so above 1 is short. ``ok`` is True (ok), False (short) or None (not checked,
    because an input was not recorded; ``reason`` says which). A check that was not made is
    never reported as ok.
    """

    code: str
    value: float | None
    limit: float | None
    unit: str
    utilisation: float | None
    ok: bool | None
    reason: str

    def __post_init__(self):
        if self.code not in CHECK_CODES:
            raise ValueError(f"unknown check code {self.code!r}")

    @property
    def status(self) -> str:
        """``ok``, ``short`` or ``not checked``."""
        if self.ok is None:
            return "not checked"
        return "ok" if self.ok else "short"

    @classmethod
    def not_checked(cls, code: str, unit: str, reason: str) -> "Check":
        """A check that could not be made, with the reason (usually: which input is missing)."""
        return cls(code, None, None, unit, None, None, reason)

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict with the interface keys code, value, limit, unit, utilisation, ok, reason."""
        return {
            "code": self.code,
            "value": _clean(self.value),
            "limit": _clean(self.limit),
            "unit": self.unit,
            "utilisation": _clean(self.utilisation),
            "ok": self.ok,
            "reason": self.reason,
        }


@dataclass(frozen=True)
class PileVerdict:
    """All checks of one pile and the verdict.

    ``verdict`` is ``"meets design"`` when every check is ok and ``"needs engineer"`` otherwise
    (a short check or one that could not be made both need the engineer). ``details`` carries
    result objects the drawings need (capacity curve, interaction curve, group shares).
    """

    mark: str
    checks: tuple[Check, ...]
    notes: tuple[str, ...] = ()
    details: dict[str, Any] = field(default_factory=dict, compare=False, repr=False)

    @property
    def verdict(self) -> str:
        """``meets design`` or ``needs engineer``."""
        return MEETS_DESIGN if all(c.ok is True for c in self.checks) else NEEDS_ENGINEER

    @property
    def worst_utilisation(self) -> float:
        """The pile's ranking utilisation: the largest utilisation over the capacity and member
        checks made (``CAPACITY_CODES``: demand over capacity) and over every short check of
        any kind; 0 when none counts.

        The rule: an ok tolerance, durability or concrete check does not rank the pile (its
        utilisation is a share of an allowance, not of a capacity, and a tolerance met exactly
        is 0, never "1.00"); a short one always does, so a short pile never ranks below a pile
        that meets design. Infinite utilisations (no capacity at all) are left out.
        """
        values = [c.utilisation for c in self.checks if c.utilisation is not None
                  and math.isfinite(c.utilisation)
                  and (c.code in CAPACITY_CODES or c.ok is False)]
        return max(values, default=0.0)

    def short_first(self) -> list[Check]:
        """Checks ordered short first (worst first), then not checked, then ok."""
        rank = {"short": 0, "not checked": 1, "ok": 2}
        return sorted(self.checks, key=lambda c: (rank[c.status], -(c.utilisation or 0.0)))

    def check(self, code: str) -> Check | None:
        """The check with this code, or None."""
        for c in self.checks:
            if c.code == code:
                return c
        return None

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict: mark, verdict, checks, notes."""
        return {
            "mark": self.mark,
            "verdict": self.verdict,
            "checks": [c.to_dict() for c in self.checks],
            "notes": list(self.notes),
        }
