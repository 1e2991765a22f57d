"""The recheck of one pile on its as-built record, and of a whole project.

``recheck(design, asbuilt, ground, rules=None, group=None, curve=None) -> PileVerdict`` returns
the checks of ``design_core.checks.CHECK_CODES`` (16) in that order. What it rests on:

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

from dataclasses import dataclass
from typing import Any, Iterable

from design_core.asbuilt import AsBuiltPile, prepare, toe_problem
from design_core.axial import CapacityCurve, prime_capacity_points
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
from design_core.ground import GroundModel
from design_core.inputs import AsBuilt, CapGroup, PileDesign
from design_core.lateral_springs import solve_together
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
    """Every check of one pile (CHECK_CODES) on its as-built record; see the module docstring.

    design: the pile as designed; asbuilt: the record (None: nothing recorded yet); ground: the
    ground model; rules: the project's rules (defaults when None); group: the pile's cap with
    its loads and the piles' positions (None: not in a cap); curve: a capacity curve for this
    ground, as-built diameter, cut-off and pile type, read when the as-built toe is one of its
    points (the same numbers as working it out). Returns a PileVerdict with the checks in
    CHECK_CODES order, notes and details.
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
