"""The recheck of one pile on its as-built record, and of a whole project.

``recheck(design, asbuilt, ground, rules=None, group=None, curve=None) -> PileVerdict`` returns
the checks of ``design_core.checks.AS_BUILT_CODES`` (16) in that order. What it rests on:

Inputs that were not recorded
    A check needs its as-built input; when that was not recorded the check is "not checked"
    (``ok`` None) and its reason names the missing field. It never falls back to the design
    value to pass a check. Design values stand in only where an engineer would take them as
    built and another check already asks for the measurement: the design diameter when
    ``diameter_mm`` is missing (the ``diameter`` check is then not checked), the design cut-off
    when ``cutoff_level`` is missing (``cutoff_level`` not checked), the design cover in the
    structural check when ``cover_mm`` is missing (``durability_cover`` not checked), the design
    concrete strength when ``concrete_mpa`` is missing (``durability_grade`` not checked). Each
    stand-in is written in the verdict's ``notes`` (``design_core.asbuilt``). The as-built toe
    (``platform_level`` minus ``measured_depth``) has no stand-in: without it axial compression,
    tension, lateral and the group share are not checked. ``asbuilt=None`` rechecks the design
    on its own: every check that needs a record is then not checked.

Loads
    The schedule's loads are working or factored (``rules.loads_are``; ``design_core.loads``).
    Axial checks compare working loads with a working-stress resistance or factored loads with a
    limit-state resistance, converting with ``rules.load_factor``; the structural check always
    uses factored loads; the lateral check uses working loads (Broms ultimate over
    ``broms_factor``, deflection under service load). A check with no load (no uplift, no
    lateral load, not in a cap) is ok with utilisation 0 and says so.

Ground
    Where strata were logged (with ``platform_level`` and a toe), the ground under the pile is
    rebuilt from them (``ground_from_strata``): ``details["borrowed"]`` and the notes say which
    layer each stratum borrowed from.

Checks
    ``design_core.checks.capacity`` (axial_compression, axial_tension, group_share),
    ``members`` (structural, lateral), ``concrete`` (durability_cover, durability_grade,
    base_debris, concrete_volume, concrete_time) and ``tolerances`` (position, inclination,
    cutoff_level, toe_level, diameter, cage_length); limits from ``rules``.

``details`` carries what the drawings need: "curve" (CapacityCurve), "interaction"
(InteractionCurve, nominal), "load_point" (N kN, M kNm, factored), "structural_phi", "shares"
(numpy array, kN), "group_marks" and "across_moment" when in a cap, "borrowed" (list of
Borrowed), "broms" (BromsResult), "winkler" (WinklerResult) and "head_deflection_mm" when the
lateral check was made, "ground" (the ground used).

``recheck_project(items, rules=None, groups=None) -> dict[mark, PileVerdict]`` rechecks many
piles; its verdicts equal ``recheck``'s, pile by pile. Results kept between calls (capacity
curves, section curves, Winkler solves, cap shares) are in ``design_core.memo.MEMO``; no output
depends on whether one was kept.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any, Iterable

import numpy as np

from design_core.asbuilt import AsBuiltPile, fmt_m, prepare, toe_problem
from design_core.axial import (
    CapacityCurve, capacity_curve, curve_levels, prime_capacity_points, required_toe_level,
)
from design_core.checks.capacity import (
    axial_at_toe, check_compression, check_group, check_tension,
)
from design_core.checks.common import NotChecked
from design_core.checks.concrete import (
    check_cover, check_debris, check_grade, check_time, check_volume,
)
from design_core.checks.members import check_lateral, check_structural, lateral_key
from design_core.checks.results import PileVerdict
from design_core.checks.tolerances import (
    check_cage, check_cutoff, check_diameter, check_inclination, check_position, check_toe,
)
from design_core.ground import LEVEL_TOL_M, GroundModel, ground_from_strata
from design_core.inputs import AsBuilt, CapGroup, PileDesign
from design_core.lateral_springs import solve_together
from design_core.loads import axial_demand, basis
from design_core.rules import Rules


def _run(pile: AsBuiltPile, group: CapGroup | None, curve=None) -> PileVerdict:
    design = pile.design
    details: dict[str, Any] = {"ground": pile.ground, "borrowed": pile.borrowed}
    try:
        axial = axial_at_toe(pile, curve)
        details["curve"] = axial[0]
    except NotChecked as exc:
        axial = exc
    except ValueError as exc:
        axial = NotChecked(f"Axial capacity could not be worked out: {exc}")
    group_check, share = check_group(pile, group, axial, details)
    checks = (
        check_compression(pile, axial),
        check_tension(pile, axial),
        check_structural(pile, share, group, details),
        check_lateral(pile, details),
        group_check,
        check_cover(pile),
        check_grade(pile),
        check_position(pile),
        check_inclination(pile),
        check_cutoff(pile),
        check_toe(pile),
        check_diameter(pile),
        check_debris(pile),
        check_volume(pile),
        check_time(pile),
        check_cage(pile),
    )
    return PileVerdict(design.mark, checks, tuple(pile.notes), details)


def recheck(design: PileDesign, asbuilt: AsBuilt | None, ground: GroundModel,
            rules: Rules | None = None, group: CapGroup | None = None,
            curve: CapacityCurve | None = None) -> PileVerdict:
    """Every as-built check of one pile (AS_BUILT_CODES) on its as-built record; see the module docstring.

    design: the pile as designed; asbuilt: the record (None: nothing recorded yet); ground: the
    ground model; rules: the project's rules (defaults when None); group: the pile's cap with
    its loads and the piles' positions (None: not in a cap); curve: a capacity curve for this
    ground, as-built diameter, cut-off and pile type, read when the as-built toe is one of its
    points (the same numbers as working it out). Returns a PileVerdict with the checks in
    AS_BUILT_CODES order, notes and details.
    """
    rules = Rules() if rules is None else rules
    return _run(prepare(design, asbuilt, ground, rules, group), group, curve)


@dataclass(frozen=True)
class ProjectItem:
    """One pile of a project recheck: its design, its record (or None) and its ground model."""

    design: PileDesign
    asbuilt: AsBuilt | None
    ground: GroundModel


def _lateral_wanted(pile: AsBuiltPile):
    """The Winkler key the pile's lateral check will need, or None when it stops earlier."""
    d = pile.design
    if d.shear <= 0.0 and (d.moment <= 0.0 or d.head != "free"):
        return None
    if toe_problem(pile):
        return None
    try:
        return lateral_key(pile)[1]
    except (ValueError, IndexError):
        return None


def recheck_project(items: Iterable, rules: Rules | None = None,
                    groups: dict[str, CapGroup] | None = None) -> dict[str, PileVerdict]:
    """Recheck every pile of a project; {mark: PileVerdict}, the same as ``recheck`` per pile.

    items: ProjectItem or (design, asbuilt, ground) tuples; groups: {cap mark: CapGroup} for the
    piles whose ``design.cap`` names a cap. The capacities at every toe of one geometry are
    worked out in one call and the distinct Winkler systems solved together first; curves,
    sections and cap shares are shared through ``MEMO``. Marks must be unique
    (ValueError naming the mark).
    """
    rules = Rules() if rules is None else rules
    groups = groups or {}
    piles: list[AsBuiltPile] = []
    seen = set()
    for item in items:
        design, asbuilt, ground = (item.design, item.asbuilt, item.ground) if isinstance(
            item, ProjectItem) else item
        if getattr(design, "mark", None) in seen:
            raise ValueError(f"pile mark {design.mark} appears twice in the project")
        group = groups.get(design.cap) if getattr(design, "cap", None) else None
        piles.append(prepare(design, asbuilt, ground, rules, group))
        seen.add(design.mark)
    toes: dict[tuple, list[float]] = {}
    for pile in piles:
        if toe_problem(pile) is None:
            key = (pile.ground, pile.diameter, pile.cutoff, pile.design.pile_type)
            toes.setdefault(key, []).extend((pile.toe, pile.design.toe_level))
    for (ground, diameter, cutoff, pile_type), levels in toes.items():
        try:
            prime_capacity_points(ground, diameter, cutoff, pile_type, rules, levels)
        except ValueError:
            continue   # each pile's own check reports it
    solve_together([k for k in map(_lateral_wanted, piles) if k is not None])
    out: dict[str, PileVerdict] = {}
    for pile in piles:
        group = groups.get(pile.design.cap) if pile.design.cap else None
        out[pile.design.mark] = _run(pile, group)
    return out


# --------------------------------------------------------------------------------------------
# The toe the pile needs
# --------------------------------------------------------------------------------------------

REQUIRED_SCAN_STEP_M = 0.05   # the scan before the exact search
REQUIRED_TOL_M = 1e-4         # the exact search stops within this of the level


@dataclass(frozen=True)
class RequiredToe:
    """Where the pile's design compression resistance first reaches its demand.

    ``level_m`` (m) the highest toe level at which the axial_compression check is ok, or None
    when no level in the ground model reaches the demand (or the pile carries no compression);
    ``more_needed_m`` (m, >= 0) how much deeper than the as-built toe that is, None when the
    as-built toe was not given or no level was found; ``demand_kn`` the demand on the basis of
    the resistance (as the check); ``reason`` one line saying how it was found.
    """

    level_m: float | None
    more_needed_m: float | None
    demand_kn: float
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return {"level_m": self.level_m, "more_needed_m": self.more_needed_m,
                "demand_kn": self.demand_kn, "reason": self.reason}


def _record_at(asbuilt: AsBuilt, ground: GroundModel, level: float) -> AsBuilt:
    """The record with its toe moved to ``level`` (m): the same platform (the ground surface
    when none was recorded, and then without strata, which need the platform)."""
    if asbuilt.platform_level is None:
        return replace(asbuilt, platform_level=ground.top, measured_depth=ground.top - level,
                       strata=())
    return replace(asbuilt, measured_depth=asbuilt.platform_level - level)


def _resistance_at(design, asbuilt, ground, rules, level: float) -> float | None:
    """The design resistance (kN) the axial_compression check finds at toe ``level`` (m), by
    the same steps (as-built pile, ground met, the pile's curve); None when not checked."""
    pile = prepare(design, _record_at(asbuilt, ground, level), ground, rules, None)
    try:
        return axial_at_toe(pile)[1]
    except (NotChecked, ValueError):
        return None


def required_toe(design: PileDesign, asbuilt: AsBuilt | None, ground: GroundModel,
                 rules: Rules | None = None) -> RequiredToe:
    """The highest toe level (m) at which the pile's axial_compression check is ok.

    The demand is the check's: the design compression on the basis of the resistance
    (``axial_demand``: design approach, ``loads_are``, ``load_factor``). The resistance is the
    check's: as-built diameter and cut-off (design values when not recorded), the ground met
    when strata were logged with the platform level (the base on the stratum met at the toe),
    the design approach of the rules. A scan every ``REQUIRED_SCAN_STEP_M`` with every layer
    boundary on both sides finds the first level reaching the demand; across a jump in base
    resistance at a boundary the toe sits on the boundary; within a layer a bisection on the
    check's own resistance narrows it to ``REQUIRED_TOL_M`` and keeps the deeper end. So a
    recheck at ``level_m`` is ok, and a level ``REQUIRED_TOL_M`` higher is short unless it is on
    the same step. The first level walking down: a weaker layer deeper down is for the check
    at the pile's own toe. Units: m and kN.
    """
    rules = Rules() if rules is None else rules
    asbuilt = AsBuilt() if asbuilt is None else asbuilt
    record = replace(asbuilt, measured_depth=None)
    pile = prepare(design, record, ground, rules, None)
    demand = axial_demand(design.compression, rules)
    if design.compression <= 0.0:
        return RequiredToe(None, None, 0.0, "No compression load in the design: no toe is "
                           "needed for resistance")
    met = ground
    if asbuilt.strata and asbuilt.platform_level is not None:
        try:
            met, _ = ground_from_strata(ground, asbuilt.platform_level, asbuilt.strata,
                                        ground.bottom)
        except ValueError as exc:
            return RequiredToe(None, None, demand, f"The strata met could not be placed in the "
                               f"ground model: {exc}")
    levels = curve_levels(met, pile.cutoff, REQUIRED_SCAN_STEP_M, max_points=100_000)
    if levels.size == 0:
        return RequiredToe(None, None, demand, "The ground model leaves no room for the pile "
                           "below its cut-off")
    curve = capacity_curve(met, pile.diameter, pile.cutoff, levels, design.pile_type, rules)
    where = "the ground met" if met is not ground else "the ground model"
    basis_word = basis(rules)
    found = required_toe_level(curve, demand)
    if found is None:
        return RequiredToe(None, None, demand, f"The design resistance does not reach the "
                           f"{basis_word} load {demand:.0f} kN anywhere down to the bottom of "
                           f"{where} ({met.bottom:.2f} m): extend the ground model or redesign")
    z = curve.toe_levels
    k = int(np.flatnonzero(z <= found + 1e-12)[0]) if np.any(z <= found + 1e-12) else z.size - 1
    on_step = any(abs(found - s) <= LEVEL_TOL_M for s in curve.steps) and found in set(z.tolist())
    if not on_step and k > 0:
        # bisection between the scan points around it, on the check's own resistance
        hi, lo = float(z[k - 1]), float(z[k])
        while hi - lo > REQUIRED_TOL_M:
            mid = 0.5 * (hi + lo)
            r = _resistance_at(design, asbuilt, ground, rules, mid)
            if r is not None and r >= demand:
                lo = mid
            else:
                hi = mid
        found = lo
    # the check's resistance at the answer, and deeper in millimetres if rounding says short
    level = float(found)
    for _ in range(1000):
        r = _resistance_at(design, asbuilt, ground, rules, level)
        if r is not None and r >= demand:
            break
        level -= 0.001
        if level < met.bottom:
            return RequiredToe(None, None, demand, f"The design resistance does not reach the "
                               f"{basis_word} load {demand:.0f} kN above the bottom of {where}")
    toe = asbuilt.toe_level
    more = None if toe is None else max(0.0, toe - level)
    step = " (on the layer boundary, where the base resistance steps up)" if on_step else ""
    reason = (f"Design resistance {r:.0f} kN reaches the {basis_word} load {demand:.0f} kN at "
              f"toe {fmt_m(level)}{step} in {where}, D {pile.diameter * 1000:.0f} mm from "
              f"cut-off {fmt_m(pile.cutoff)}")
    if more is not None:
        reason += (f"; {more:.2f} m below the as-built toe {fmt_m(toe)}" if more > 0
                   else f"; the as-built toe {fmt_m(toe)} reaches it")
    return RequiredToe(level, more, demand, reason)
