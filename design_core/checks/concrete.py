"""Concrete checks: durability cover and grade for the exposure class, base debris, concrete
volume against the theoretical, and the time from batching to discharge.

durability_cover is against ``rules.min_cover_mm`` (cast against soil unless in a permanent
casing); durability_grade against the exposure table's minimum strength. Limits from ``rules``.
"""

from __future__ import annotations

import math

from design_core.asbuilt import AsBuiltPile, fmt_m
from design_core.checks.common import util
from design_core.checks.results import Check

def check_cover(pile: AsBuiltPile) -> Check:
    code, rules = "durability_cover", pile.rules
    if pile.asbuilt.cover_mm is None:
        return Check.not_checked(code, "mm", "As-built cover not recorded (cover_mm)")
    try:
        need = rules.min_cover_mm(pile.exposure_class, cast_against_soil=not pile.casing)
    except ValueError as exc:
        return Check.not_checked(code, "mm", str(exc))
    cover = pile.asbuilt.cover_mm
    ok = cover >= need - 1e-9
    how = "in a permanent casing" if pile.casing else "cast against soil"
    verb = "meets" if ok else "is less than"
    return Check(code, cover, need, "mm", util(need, cover) if cover > 0 else math.inf, ok,
                 f"As-built cover {cover:.0f} mm {verb} the minimum {need:.0f} mm for "
                 f"{pile.exposure_class}, {how}")


def check_grade(pile: AsBuiltPile) -> Check:
    code, rules = "durability_grade", pile.rules
    if pile.asbuilt.concrete_mpa is None:
        return Check.not_checked(code, "MPa", "As-built concrete strength not recorded (concrete_mpa)")
    try:
        need = rules.exposure(pile.exposure_class).min_strength_mpa
    except ValueError as exc:
        return Check.not_checked(code, "MPa", str(exc))
    fc = pile.asbuilt.concrete_mpa
    ok = fc >= need - 1e-9
    verb = "meets" if ok else "is below"
    return Check(code, fc, need, "MPa", util(need, fc), ok,
                 f"Concrete f_ck {fc:g} MPa {verb} the minimum {need:g} MPa for "
                 f"{pile.exposure_class}")


def check_debris(pile: AsBuiltPile) -> Check:
    code, rules = "base_debris", pile.rules
    debris = pile.asbuilt.debris_mm
    if pile.design.pile_type != "bored" and debris is None:
        # CFA, driven and screw piles have no open base to inspect (their record has no base inspection): for a
        # CFA pile the concrete volume against depth takes its place (concrete_volume).
        return Check(code, None, rules.base_debris_mm, "mm", 0.0, True,
                     f"A {pile.design.pile_type} pile has no open base to inspect; nothing to check")
    if debris is None:
        return Check.not_checked(code, "mm", "Base debris not recorded (debris_mm)")
    limit = rules.base_debris_mm
    ok = debris <= limit + 1e-9
    util = debris / limit if limit > 0 else (0.0 if debris == 0 else math.inf)
    verb = "within" if ok else "more than"
    return Check(code, debris, limit, "mm", util, ok,
                 f"Base debris {debris:g} mm, {verb} the {limit:g} mm allowed")


def check_volume(pile: AsBuiltPile) -> Check:
    code, rules, ab = "concrete_volume", pile.rules, pile.asbuilt
    missing = []
    if ab.concrete_volume_m3 is None:
        missing.append("concrete_volume_m3")
    if pile.toe is None:
        missing += [n for n in ("platform_level", "measured_depth") if getattr(ab, n) is None]
    top = ab.casting_level if ab.casting_level is not None else ab.cutoff_level
    if top is None:
        missing.append("casting_level or cutoff_level")
    if missing:
        return Check.not_checked(code, "", f"Not recorded: {', '.join(missing)}")
    which = "casting level" if ab.casting_level is not None else "cut-off (casting level not recorded)"
    length = top - pile.toe
    if length <= 0:
        return Check.not_checked(code, "", f"The {which} {fmt_m(top)} is not above the toe {fmt_m(pile.toe)}")
    theo = math.pi * pile.design.diameter ** 2 / 4.0 * length
    ratio = ab.concrete_volume_m3 / theo
    lo, hi = rules.volume_ratio_min, rules.volume_ratio_max
    ok = lo - 1e-9 <= ratio <= hi + 1e-9
    util = max(lo / ratio if ratio > 0 else math.inf, ratio / hi)
    text = (f"Concrete {ab.concrete_volume_m3:.2f} m3 against {theo:.2f} m3 theoretical "
            f"(D {pile.design.diameter * 1000:.0f} mm from the toe to the {which}): ratio "
            f"{ratio:.2f}")
    if ratio < lo:
        text += f", below {lo:.2f}: possible necking or soil inclusion"
    elif ratio > hi:
        text += f", above {hi:.2f}: overbreak, cavities or concrete loss"
    else:
        text += f", within {lo:.2f} to {hi:.2f}"
    return Check(code, ratio, hi if ratio > hi else lo, "", util, ok, text)


def check_time(pile: AsBuiltPile) -> Check:
    code, rules = "concrete_time", pile.rules
    deliveries = pile.asbuilt.deliveries
    if not deliveries:
        return Check.not_checked(code, "min", "No concrete deliveries recorded (deliveries)")
    limit = rules.batch_to_discharge_min
    minutes = [m.minutes_from_batching for m in deliveries]
    known = [m for m in minutes if m is not None]
    untimed = len(minutes) - len(known)
    worst = max(known) if known else None
    if worst is not None and worst > limit + 1e-9:
        k = minutes.index(worst)
        docket = deliveries[k].docket or f"truck {k + 1}"
        return Check(code, worst, limit, "min", worst / limit, False,
                     f"{docket} discharged {worst:.0f} min after batching, more than {limit:g} min")
    if untimed:
        return Check.not_checked(
            code, "min", f"{untimed} of {len(minutes)} deliveries lack batching or discharge "
            "times (batched_at, discharged_at)")
    return Check(code, worst, limit, "min", worst / limit, True,
                 f"Longest time from batching to discharge {worst:.0f} min, within {limit:g} min")
