"""Installation tolerances as the standards write them: position by cut-off depth, raking piles,
and the EN 1536 set. Pure functions that return the limit with the reason.

ICE SPERW (ICE *Specification for Piling and Embedded Retaining Walls*, 2nd ed., Table B1.4;
found in a secondary source reproducing the table):

* plan position: ``position_tolerance_mm`` (75 mm) where the cut-off is at or above the
  commencing surface (the working platform the pile is started from); below it, more by an
  allowance for every metre of depth d_c of the cut-off below that surface:

      e_max = 75 mm + a d_c,  a = ``position_allowance_per_m_mm``, or when that rule is 0,
                              a = 1000 x (the pile's permitted inclination) mm/m
                              (13.3 mm/m at 1 in 75; check against the edition used)

* inclination: vertical piles ``inclination_tolerance`` (1 in 75); raking piles, deviation
  from the design rake: ``rake_tolerance_shallow`` (1 in 25) for rakes up to
  ``rake_boundary`` (1:6) and ``rake_tolerance_steep`` (1 in 15) over it.

EN 1536:2010 section 8 (from memory; the scope, 0.3 <= D <= 3.0 m and rakes n >= 4, found):

* plan position at the platform: ``en1536_position_small_mm`` (0.10 m) for D <= 1.0 m,
  ``en1536_position_fraction`` x D (0.1 D) for 1.0 < D <= 1.5 m, ``en1536_position_large_mm``
  (0.15 m) for D > 1.5 m; the cut-off below the platform adds the same per-metre allowance;
* inclination: ``en1536_inclination_vertical`` (0.02) for vertical piles and rakes n >= 15,
  ``en1536_inclination_raking`` (0.04) for 4 <= n < 15; rakes steeper than n = 4 are outside
  the standard.

Rake is given as horizontal over vertical (0 for a vertical pile; a rake "1:6", one horizontal
in six vertical, is 1/6 and n = 6). Lengths m, positions mm, inclinations m/m.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any

from design_core.rules import Rules
from design_core.validate import number

RAKE_MAX = 1.0  # 45 degrees: beyond it a "pile" is an anchor
EN1536_RAKE_MAX = 0.25  # n = 4


@dataclass(frozen=True)
class ToleranceLimit:
    """A tolerance: ``limit`` in ``unit`` (None when the rule set does not cover the pile), the
    rule set it came from and the reason in one line."""

    limit: float | None
    unit: str
    rule_set: str
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def _rake(rake: float) -> float:
    return number("rake", rake, 0.0, RAKE_MAX)


def inclination_limit(rake: float = 0.0, rules: Rules | None = None) -> ToleranceLimit:
    """Permitted deviation from the design inclination (m/m), by the rules' rule set.

    rake: design rake, horizontal over vertical (0-1; 0 = vertical).
    """
    rules = rules or Rules()
    rake = _rake(rake)
    if rules.tolerance_rule_set == "en_1536":
        if rake > EN1536_RAKE_MAX:
            return ToleranceLimit(None, "", "en_1536",
                                  f"rake 1:{1 / rake:.1f} is steeper than n = 4, outside EN 1536")
        if rake == 0.0 or 1.0 / rake >= 15.0:
            return ToleranceLimit(rules.en1536_inclination_vertical, "", "en_1536",
                                  f"EN 1536: {rules.en1536_inclination_vertical:g} for vertical "
                                  "piles and rakes n >= 15")
        return ToleranceLimit(rules.en1536_inclination_raking, "", "en_1536",
                              f"EN 1536: {rules.en1536_inclination_raking:g} for rake "
                              f"n = {1 / rake:.1f} (4 <= n < 15)")
    if rake == 0.0:
        return ToleranceLimit(rules.inclination_tolerance, "", "ice_sperw",
                              f"ICE SPERW Table B1.4: vertical pile, 1 in "
                              f"{1 / rules.inclination_tolerance:.0f}")
    if rake <= rules.rake_boundary:
        return ToleranceLimit(rules.rake_tolerance_shallow, "", "ice_sperw",
                              f"ICE SPERW Table B1.4: rake 1:{1 / rake:.1f} up to 1:"
                              f"{1 / rules.rake_boundary:g}, 1 in "
                              f"{1 / rules.rake_tolerance_shallow:.0f}")
    return ToleranceLimit(rules.rake_tolerance_steep, "", "ice_sperw",
                          f"ICE SPERW Table B1.4: rake 1:{1 / rake:.1f} over 1:"
                          f"{1 / rules.rake_boundary:g}, 1 in {1 / rules.rake_tolerance_steep:.0f}")


def position_limit_mm(diameter: float, cutoff_depth: float = 0.0, rake: float = 0.0,
                      rules: Rules | None = None) -> ToleranceLimit:
    """Permitted plan deviation at the cut-off (mm), by the rules' rule set.

    diameter D (m, 0.1-5); cutoff_depth d_c: depth of the cut-off below the commencing surface
    (m; 0 or negative when the cut-off is at or above it; the platform level recorded at the
    rig minus the cut-off level); rake: design rake, horizontal over vertical.
    """
    rules = rules or Rules()
    number("diameter", diameter, 0.1, 5.0)
    depth = max(0.0, number("cutoff_depth", cutoff_depth, -1000.0, 1000.0))
    if rules.tolerance_rule_set == "en_1536":
        if diameter <= 1.0:
            base, why = rules.en1536_position_small_mm, "D <= 1.0 m"
        elif diameter <= 1.5:
            base, why = rules.en1536_position_fraction * diameter * 1000.0, "1.0 < D <= 1.5 m"
        else:
            base, why = rules.en1536_position_large_mm, "D > 1.5 m"
        name = f"EN 1536 ({why})"
    else:
        base, name = rules.position_tolerance_mm, "ICE SPERW Table B1.4"
    if depth == 0.0:
        return ToleranceLimit(base, "mm", rules.tolerance_rule_set,
                              f"{name}: {base:.0f} mm, cut-off at or above the commencing surface")
    per_m = rules.position_allowance_per_m_mm
    how = f"{per_m:g} mm/m"
    if per_m == 0.0:
        incl = inclination_limit(rake, rules).limit
        if incl is None:
            return ToleranceLimit(None, "mm", rules.tolerance_rule_set,
                                  "the rake is outside the rule set: no position tolerance")
        per_m, how = incl * 1000.0, f"the permitted inclination {incl:.4g}"
    limit = base + per_m * depth
    return ToleranceLimit(limit, "mm", rules.tolerance_rule_set,
                          f"{name}: {base:.0f} mm + {how} x {depth:.2f} m below the commencing "
                          f"surface = {limit:.0f} mm")
