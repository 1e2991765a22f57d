"""Tolerance checks: the pile where it was meant to be, as big and as long.

position (plan deviation at cut-off), inclination, cutoff_level, toe_level (the as-built toe
against the design toe), diameter and cage_length (the as-built cage, measured down from the
cut-off, against the design length less ``cage_tolerance_m``; none for a driven pile or an
unreinforced design). Limits from ``rules``; each check's reason says what it compared.
"""

from __future__ import annotations

import math

from design_core.asbuilt import AsBuiltPile, fmt_m, unrecorded
from design_core.checks.common import signed, util
from design_core.checks.results import Check

def allowance_used(deficit: float, allowance: float) -> float:
    """Utilisation of an ok "at least as designed" tolerance (toe, diameter, cage): the share
    of the allowance used, ``deficit`` over ``allowance`` (same unit); 0 when the pile is at
    or beyond its design value, so a tolerance met exactly is 0, never 1. A short check keeps
    design over as-built (above 1)."""
    if deficit <= 0.0:
        return 0.0
    return min(1.0, deficit / allowance) if allowance > 0.0 else 1.0


def check_position(pile: AsBuiltPile) -> Check:
    code, rules = "position", pile.rules
    if pile.dev_mm is None:
        return Check.not_checked(code, "mm", "As-built position not recorded "
                                 f"({unrecorded(pile, 'easting', 'northing')})")
    limit = rules.position_tolerance_mm
    ok = pile.dev_mm <= limit + 1e-9
    verb = "within" if ok else "more than"
    return Check(code, pile.dev_mm, limit, "mm", pile.dev_mm / limit, ok,
                 f"As-built position {pile.dev_mm:.0f} mm from design (east {signed(pile.dx_mm)}, "
                 f"north {signed(pile.dy_mm)} mm), {verb} {limit:g} mm")


def check_inclination(pile: AsBuiltPile) -> Check:
    code, rules = "inclination", pile.rules
    inc = pile.asbuilt.inclination
    if inc is None:
        return Check.not_checked(code, "m/m", "Inclination not recorded (inclination)")
    limit = rules.inclination_tolerance
    ok = inc <= limit + 1e-12
    one_in = f"1 in {1 / inc:.0f}" if inc > 0 else "vertical"
    verb = "within" if ok else "steeper than"
    return Check(code, inc, limit, "m/m", inc / limit, ok,
                 f"Inclination {one_in} ({inc:.4f}) {verb} the limit 1 in {1 / limit:.0f}")


def check_cutoff(pile: AsBuiltPile) -> Check:
    code, rules = "cutoff_level", pile.rules
    level = pile.asbuilt.cutoff_level
    if level is None:
        return Check.not_checked(code, "mm", "As-built cut-off level not recorded (cutoff_level)")
    design = pile.design.cutoff_level
    off_mm = (level - design) * 1000.0
    limit = rules.cutoff_tolerance_mm
    ok = abs(off_mm) <= limit + 1e-6
    side = "above" if off_mm > 0 else "below"
    verb = "within" if ok else "outside"
    return Check(code, off_mm, limit, "mm", abs(off_mm) / limit, ok,
                 f"As-built cut-off {fmt_m(level)} is {abs(off_mm):.0f} mm {side} design cut-off "
                 f"{fmt_m(design)}, {verb} +/-{limit:g} mm")


def check_toe(pile: AsBuiltPile) -> Check:
    code, rules = "toe_level", pile.rules
    if pile.toe is None:
        return Check.not_checked(code, "m", "As-built toe not recorded "
                                 f"({unrecorded(pile, 'platform_level', 'measured_depth')})")
    design = pile.design.toe_level
    above = pile.toe - design
    limit = rules.toe_tolerance_mm / 1000.0
    ok = above <= limit + 1e-9
    # short: length needed below the design cut-off over the length reached (> 1); ok: the
    # share of the allowance used (0 at or below the design toe; see allowance_used)
    need = pile.design.cutoff_level - (design + limit)
    reached = pile.design.cutoff_level - pile.toe
    if ok:
        util = allowance_used(max(0.0, above), limit)
    else:
        util = need / reached if reached > 0 else math.inf
    if abs(above) < 0.005:
        where = f"As-built toe {fmt_m(pile.toe)} at the design toe {fmt_m(design)}"
    else:
        side = "above" if above > 0 else "below"
        where = f"As-built toe {abs(above):.2f} m {side} design toe {fmt_m(design)}"
    tail = "" if ok else (f", more than the {rules.toe_tolerance_mm:g} mm allowed above" if limit
                          else ": short of the design toe")
    return Check(code, above, limit, "m", util, ok, where + tail)


def check_diameter(pile: AsBuiltPile) -> Check:
    code, rules = "diameter", pile.rules
    got = pile.asbuilt.diameter_mm
    if got is None:
        return Check.not_checked(code, "mm", "As-built diameter not recorded (diameter_mm)")
    design = pile.design.diameter * 1000.0
    least = design - rules.diameter_tolerance_mm
    ok = got >= least - 1e-6
    verb = "not below" if ok else "below"
    allow = f" less {rules.diameter_tolerance_mm:g} mm" if rules.diameter_tolerance_mm else ""
    u = allowance_used(max(0.0, design - got), rules.diameter_tolerance_mm) if ok else util(least, got)
    return Check(code, got, least, "mm", u, ok,
                 f"As-built diameter {got:.0f} mm {verb} the design {design:.0f} mm{allow}")


def check_cage(pile: AsBuiltPile) -> Check:
    code, rules, d = "cage_length", pile.rules, pile.design
    if d.pile_type == "driven":
        return Check(code, None, None, "m", 0.0, True,
                     "A driven pile has no cage placed on site; nothing to check")
    if not d.cage_length or not d.n_bars:
        return Check(code, None, None, "m", 0.0, True,
                     "No cage in the design (unreinforced); nothing to check")
    got = pile.asbuilt.cage_length
    if got is None:
        return Check.not_checked(code, "m", "Cage length not recorded (cage_length)")
    least = d.cage_length - rules.cage_tolerance_m
    ok = got >= least - 1e-9
    u = allowance_used(max(0.0, d.cage_length - got), rules.cage_tolerance_m) if ok else util(least, got)
    allow = f" less {rules.cage_tolerance_m:g} m" if rules.cage_tolerance_m else ""
    if ok:
        text = f"Cage {got:.2f} m long, not shorter than the design {d.cage_length:.2f} m{allow}"
    else:
        text = (f"Cage {got:.2f} m long, {d.cage_length - got:.2f} m shorter than the design "
                f"{d.cage_length:.2f} m{allow}: the pile is unreinforced below "
                f"{fmt_m(pile.cutoff - got)}, where the design put bars")
    return Check(code, got, least, "m", u, ok, text)
