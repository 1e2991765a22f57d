"""Capacity checks: axial compression, axial tension and the share of a cap's load.

axial_compression: the design resistance at the as-built toe, diameter and cut-off (read from
the pile's capacity curve, ``pile_capacity_curve``) against the design compression on the basis
of the resistance (``axial_demand``). axial_tension: ``tension_design`` of that shaft and the
pile's own weight against the design uplift. group_share: the cap's loads shared over the
as-built positions (``group_shares``; a moment across a line of piles is left to the tie beams
and named in the reason), this pile's share against its design compression resistance (or its
uplift resistance when the share is a pull). A pile not in a cap carries only its own load,
checked under axial_compression, so this check is ok with utilisation 0 and says so; a pile
whose design names a cap that was not passed is not checked. Loads in kN, levels in m.
"""

from __future__ import annotations

import numpy as np

from design_core.asbuilt import AsBuiltPile, fmt_m, toe_problem
from design_core.axial import (
    CapacityCurve, design_words, pile_capacity_curve, pile_weight, tension_design, tension_words,
)
from design_core.checks.common import NotChecked, util
from design_core.checks.results import Check
from design_core.group import across_moment, group_shares
from design_core.inputs import CapGroup
from design_core.loads import axial_demand, basis
from design_core.memo import MEMO


def _matches(curve, pile: AsBuiltPile) -> bool:
    return (isinstance(curve, CapacityCurve) and not pile.rebuilt
            and abs(curve.diameter - pile.diameter) < 1e-9
            and abs(curve.top_level - pile.cutoff) < 1e-9
            and curve.pile_type == pile.design.pile_type
            and curve.design_approach == pile.rules.design_approach)


def _at(curve: CapacityCurve, level: float):
    """(design, shaft, base) at a curve point, or None when ``level`` is not one."""
    hit = np.flatnonzero(curve.toe_levels == level)
    if not hit.size:
        return None
    i = int(hit[0])
    return float(curve.design[i]), float(curve.shaft[i]), float(curve.base[i])


def axial_at_toe(pile: AsBuiltPile, curve=None):
    """(curve, design, shaft, base) at the as-built toe (kN); raises NotChecked.

    The curve is the pile's own (``pile_capacity_curve`` with the as-built and design toes);
    a ``curve`` passed in for the same ground, diameter, cut-off, type and approach is read
    when the toe is one of its points (the same numbers), else the pile's own is used.
    """
    problem = toe_problem(pile)
    if problem:
        raise NotChecked(problem)
    toe = max(pile.toe, pile.ground.bottom)
    if _matches(curve, pile):
        got = _at(curve, toe)
        if got is not None:
            return (curve,) + got
    try:
        own = pile_capacity_curve(pile.ground, pile.diameter, pile.cutoff, pile.design.pile_type,
                                  pile.rules, toes=(pile.toe, pile.design.toe_level))
    except ValueError as exc:
        if "no room" in str(exc):
            raise NotChecked(str(exc)) from None
        raise
    return (own,) + _at(own, toe)


def tension_resistance(pile: AsBuiltPile, shaft: float) -> tuple[float, float]:
    """Design uplift resistance (kN) of the pile as built and its weight (kN), from its
    compression shaft ``shaft`` (kN): ``tension_design`` with ``pile_weight`` from the cut-off
    to the toe."""
    weight = pile_weight(pile.ground, pile.diameter, pile.cutoff, pile.toe, pile.rules)
    return tension_design(shaft, weight, pile.rules), weight


def check_compression(pile: AsBuiltPile, axial) -> Check:
    """axial_compression: see the module docstring."""
    code, rules = "axial_compression", pile.rules
    load = pile.design.compression
    if load <= 0.0:
        return Check(code, 0.0, None, "kN", 0.0, True, "No compression load in the design")
    if isinstance(axial, NotChecked):
        return Check.not_checked(code, "kN", str(axial))
    _, design, shaft, base = axial
    demand = axial_demand(load, rules)
    u = util(demand, design)
    ok = u <= 1.0
    verb = "within" if ok else "exceeds"
    return Check(code, demand, design, "kN", u, ok,
                 f"{basis(rules).capitalize()} load {demand:.0f} kN {verb} the design resistance "
                 f"{design:.0f} kN = {design_words(shaft, base, rules)} at the as-built toe "
                 f"{fmt_m(pile.toe)} (shaft and base ultimate, D {pile.diameter * 1000:.0f} mm)"
                 f"{base_words(pile)}")


def base_words(pile: AsBuiltPile) -> str:
    """Where the base resistance came from, when strata were logged: the stratum met at the
    toe, or the ground model below the strata logged."""
    if not pile.rebuilt or pile.toe is None:
        return ""
    s = pile.base_stratum
    if s is not None:
        return f"; base on the {s.material} met at the toe (logged {s.from_depth:g}-{s.to_depth:g} m)"
    layer = pile.ground.layers[pile.ground.layer_index_at(pile.toe)]
    return f"; base on the ground model's {layer.material} below the strata logged"


def check_tension(pile: AsBuiltPile, axial) -> Check:
    """axial_tension: see the module docstring."""
    code, rules = "axial_tension", pile.rules
    load = pile.design.tension
    if load <= 0.0:
        return Check(code, 0.0, None, "kN", 0.0, True, "No uplift load in the design")
    if isinstance(axial, NotChecked):
        return Check.not_checked(code, "kN", str(axial))
    shaft = axial[2]
    design, weight = tension_resistance(pile, shaft)
    demand = axial_demand(load, rules)
    u = util(demand, design)
    ok = u <= 1.0
    verb = "within" if ok else "exceeds"
    return Check(code, demand, design, "kN", u, ok,
                 f"{basis(rules).capitalize()} uplift {demand:.0f} kN {verb} the design uplift "
                 f"resistance {design:.0f} kN = {tension_words(shaft, weight, rules)} at the "
                 f"as-built toe {fmt_m(pile.toe)}")


def cap_positions(pile: AsBuiltPile, group: CapGroup) -> tuple:
    """The cap's pile positions to share on: this pile's as-built position from its record
    (when surveyed), every other pile's ``xy``."""
    ab = pile.asbuilt
    return tuple((ab.easting, ab.northing) if p.mark == pile.design.mark and ab.easting is not None
                 and ab.northing is not None else tuple(p.xy) for p in group.piles)


def _shares(group: CapGroup, xy: tuple):
    """(shares kN, moment not shared kNm) of the cap on positions ``xy``, or NotChecked; kept
    in ``MEMO.shares`` by every input."""
    load_xy = tuple(group.load_xy)

    def make():
        try:
            return (group_shares(xy, group.n, group.mx, group.my, load_xy, across="ignore"),
                    across_moment(xy, group.n, group.mx, group.my, load_xy))
        except ValueError as exc:
            return NotChecked(f"Cap {group.mark}: {exc}")

    found = MEMO.shares.get((group.mark, xy, group.n, group.mx, group.my, load_xy), make)
    if not isinstance(found, NotChecked):
        found[0].setflags(write=False)
    return found


def check_group(pile: AsBuiltPile, group: CapGroup | None, axial,
                details: dict) -> tuple[Check, float | None]:
    """group_share and this pile's share (kN, None when not shared): see the module docstring."""
    code, rules, d = "group_share", pile.rules, pile.design
    if group is None:
        if d.cap:
            return Check.not_checked(code, "kN", f"Pile is in cap {d.cap} but the cap's loads "
                                     "and piles were not given"), None
        return Check(code, None, None, "kN", 0.0, True,
                     "Not in a cap: the pile carries its own load, checked under axial "
                     "compression"), None
    marks = [p.mark for p in group.piles]
    if d.mark not in marks:
        return Check.not_checked(code, "kN", f"Pile {d.mark} is not one of cap {group.mark}'s "
                                 "piles"), None
    shares = _shares(group, cap_positions(pile, group))
    if isinstance(shares, NotChecked):
        return Check.not_checked(code, "kN", str(shares)), None
    shares, spill = shares
    details["shares"] = shares
    details["group_marks"] = tuple(marks)
    share = float(shares[marks.index(d.mark)])
    surveyed = sum(1 for p in group.piles if p.asbuilt_xy is not None)
    where = f"cap {group.mark}, {len(marks)} pile{'s' if len(marks) > 1 else ''}, {surveyed} surveyed"
    if spill > 0.05:
        where += (f"; {spill:.0f} kNm of cap moment not shared by one pile" if len(marks) == 1
                  else f"; {spill:.0f} kNm across the line of piles left to the cap's tie beams")
    details["across_moment"] = spill
    if isinstance(axial, NotChecked):
        return Check.not_checked(code, "kN", f"Share {share:.0f} kN ({where}) not set against a "
                                 f"resistance: {axial}"), share
    demand = axial_demand(abs(share), rules)
    if share >= 0.0:
        resistance = axial[1]
        what = "design compression resistance"
        how = design_words(axial[2], axial[3], rules)
    else:
        resistance, weight = tension_resistance(pile, axial[2])
        what = "design uplift resistance"
        how = tension_words(axial[2], weight, rules)
    u = util(demand, resistance)
    ok = u <= 1.0
    verb = "within" if ok else "exceeds"
    pull = "" if share >= 0.0 else " (uplift)"
    return Check(code, demand, resistance, "kN", u, ok,
                 f"Share on the as-built positions {demand:.0f} kN{pull} {verb} the {what} "
                 f"{resistance:.0f} kN = {how} ({where})"), share
