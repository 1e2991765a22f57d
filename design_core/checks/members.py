"""Member checks: the structural section and the lateral load.

structural: factored N and M = max(M_design, N e_min) (+ N x plan deviation for a pile not in a
cap, which stands alone under its load), e_min = ``rules.min_eccentricity_m(D)``, against
phi M_n(N/phi) of the as-built section (``section_interaction``); a pile with uplift is also
checked at N = -T with the design moment. A pile stands alone unless its cap has two or more
piles.

lateral: Broms ultimate / ``broms_factor`` against the working shear, and the Winkler head
deflection under the working shear (and moment, free head) against
``lateral_deflection_limit_mm``; utilisation the larger. Broms takes one layer, the first
cohesive or cohesionless layer at or below the top of the pile, down to the toe; the Winkler
springs follow every layer (``spring_segments``); lengths rounded 50 mm on the safe side
(``lateral_geometry``). Loads in kN and kNm, deflections in mm.
"""

from __future__ import annotations

import math

from design_core.asbuilt import AsBuiltPile, toe_problem, unrecorded
from design_core.checks.common import util
from design_core.checks.results import Check
from design_core.inputs import CapGroup
from design_core.lateral import broms_lateral, winkler_result
from design_core.lateral_springs import (
    NoLateralSoil, lateral_geometry, winkler_inputs, winkler_solve,
)
from design_core.loads import to_factored, to_working
from design_core.memo import MEMO
from design_core.section import InteractionCurve, section_interaction_least


def section_of(pile: AsBuiltPile) -> InteractionCurve:
    """The interaction curve of the as-built section (diameter, cover, f'_c as built; bars as
    designed) with the bars in their least favourable orientation
    (``section_interaction_least``), kept in ``MEMO.sections``; its arrays are read-only as it
    is shared."""
    d = pile.design

    def make():
        curve = section_interaction_least(pile.diameter, pile.cover_mm, d.n_bars, d.bar_mm,
                                          pile.fc_mpa, d.fy_mpa)
        for arr in (curve.n, curve.m, curve.c):
            arr.setflags(write=False)
        return curve

    key = (pile.diameter, pile.cover_mm, d.n_bars, d.bar_mm, pile.fc_mpa, d.fy_mpa)
    return MEMO.sections.get(key, make)


def check_structural(pile: AsBuiltPile, share: float | None, group: CapGroup | None,
                     details: dict) -> Check:
    """structural: see the module docstring."""
    code, rules, d = "structural", pile.rules, pile.design
    # A cap of two or more piles takes the column's eccentricity; anything else stands alone.
    standalone = group is None or len(group.piles) < 2
    if standalone and pile.dev_mm is None:
        return Check.not_checked(
            code, "kNm", f"As-built position not recorded ({unrecorded(pile, 'easting', 'northing')}): "
            "the moment from the plan deviation of a pile standing alone under its load is unknown")
    try:
        section = section_of(pile)
    except ValueError as exc:
        return Check.not_checked(code, "kNm", f"Section could not be built: {exc}")
    compression = d.compression if share is None else max(d.compression, share)
    n_f = to_factored(compression, rules)
    e_min = rules.min_eccentricity_m(pile.diameter)
    m_design = to_factored(d.moment, rules)
    head = None
    unknown_head = ""
    if d.head == "fixed" and d.shear > 0.0:
        head = _fixed_head_moment(pile)
        if isinstance(head, str):   # the lateral check is not made either: needs the engineer
            head, unknown_head = None, f"; {head}: the design moment is used"
    m_f = max(m_design, n_f * e_min, head or 0.0)
    dev_m = (pile.dev_mm or 0.0) / 1000.0 if standalone else 0.0
    m_f += n_f * dev_m
    phi = rules.structural_phi
    n_max = phi * rules.axial_cap_factor * section.squash      # phi P_n,max (ACI 318-19 22.4.2.1)
    details["interaction"] = section
    details["structural_phi"] = phi
    details["axial_cap_kn"] = n_max
    if n_f > n_max:
        details["load_point"] = (n_f, m_f)
        return Check(code, n_f, n_max, "kN", n_f / n_max, False,
                     f"Factored N {n_f:.0f} kN exceeds phi P_n,max {n_max:.0f} kN = phi {phi:g} x "
                     f"{rules.axial_cap_factor:g} x P_0 {section.squash:.0f} kN (tied section, "
                     f"D {pile.diameter * 1000:.0f} mm)")
    cap = phi * section.moment_capacity(n_f / phi)
    u = util(m_f, cap) if n_f / phi <= section.squash else math.inf
    cases = [(u, n_f, m_f, cap)]
    if d.tension > 0.0:
        t_f = to_factored(d.tension, rules)
        cap_t = phi * section.moment_capacity(-t_f / phi)
        util_t = util(m_design, cap_t) if -t_f / phi >= section.tension else math.inf
        if util_t == 0.0 and cap_t <= 0.0:
            util_t = math.inf
        cases.append((util_t, -t_f, m_design, cap_t))
    u, n_f, m_f, cap = max(cases, key=lambda c: c[0])
    details["load_point"] = (n_f, m_f)
    ok = u <= 1.0
    if n_f >= 0:
        spring = (f", head moment {head:.0f} kNm from the springs under the shear"
                  if head is not None else "")
        how = f"max(design{spring}, N x e_min {e_min * 1000:.0f} mm)"
        if dev_m > 0:
            how += f" + N x plan deviation {dev_m * 1000:.0f} mm"
    else:
        how = "design moment with the uplift"
    verb = "within" if ok else "exceeds"
    cover = (f"as-built cover {pile.cover_mm:.0f} mm" if pile.asbuilt.cover_mm is not None
             else f"design cover {pile.cover_mm:.0f} mm, as-built not recorded")
    return Check(code, m_f, cap, "kNm", u, ok,
                 f"Factored M {m_f:.0f} kNm ({how}) at N {n_f:.0f} kN {verb} phi Mn {cap:.0f} kNm "
                 f"(phi {phi:g}, D {pile.diameter * 1000:.0f} mm, {cover}){unknown_head}")


def _fixed_head_moment(pile: AsBuiltPile) -> float | str:
    """The factored head moment (kNm) of a fixed-head pile under its design shear, from the
    Winkler solution of the lateral check (moment E I y'' at the head under the working shear,
    times the load factor); or why it cannot be worked out (no toe, no soil for springs: the
    lateral check is then not made either, so the pile needs the engineer, and the structural
    reason says the design moment was used)."""
    rules = pile.rules
    problem = toe_problem(pile)
    if problem:
        return f"The fixed-head moment under the shear needs the toe: {problem}"
    try:
        _, key = lateral_key(pile)
        depth, unit, ei = winkler_solve(key)
    except ValueError as exc:
        return f"The fixed-head moment under the shear could not be worked out: {exc}"
    per_kn = abs(float(winkler_result(depth, unit[:, 0], ei, "fixed", 1.0, 0.0).moment[0]))
    return to_factored(per_kn * to_working(pile.design.shear, rules), rules)


def lateral_key(pile: AsBuiltPile) -> tuple:
    """(geometry, Winkler key) of the pile's lateral check, kept in ``MEMO.lateral`` by every
    input they use; raises NoLateralSoil."""
    def make():
        try:
            geometry = lateral_geometry(pile)
            return geometry, winkler_inputs(pile, geometry)
        except ValueError as exc:
            return None, type(exc), str(exc)

    found = MEMO.lateral.get((pile.ground, pile.cutoff, pile.toe, pile.diameter, pile.fc_mpa,
                              pile.rules, pile.design.head), make)
    if found[0] is None:
        raise found[1](found[2])
    return found


def lateral_analysis(pile: AsBuiltPile, section: InteractionCurve | None):
    """Broms result, Winkler unit responses, EI and a text naming the soil.

    Broms (a method for one uniform soil) takes the single layer at or below the top of the
    pile (``lateral_geometry``) as extending to the toe. Clay: c_u at the top of that layer's
    resisting part (the lower end of a c_u that rises with depth). Sand: gamma buoyant when the
    water level is above the bottom of the top 5 D of the resisting part. Broms takes M_y as the
    nominal pure-bending moment of the as-built section (compression ignored: conservative) and
    the free length as the load's height above the soil (free head). The Winkler springs follow
    every layer down to the toe (``spring_segments``). EI = ei_cracked_factor x E_c I_g with
    E_c = 4700 sqrt(f'_c) MPa (ACI 318-19 19.2.2.1(b)).
    """
    rules, d, g = pile.rules, pile.design, pile.ground
    geometry, key = lateral_key(pile)
    i, z_top, free, embedded = geometry
    layer = g.layers[i]
    my = section.pure_bending if section is not None else None
    if layer.material == "cohesive":
        cu = layer.cu_at(z_top)
        broms = broms_lateral("cohesive", pile.diameter, embedded, d.head, free, cu=cu,
                              yield_moment=my)
        soil = f"c_u {cu:.0f} kPa from layer {i}"
    else:
        wet = g.water_level > z_top - 5.0 * pile.diameter
        gamma = layer.unit_weight - (rules.gamma_w if wet else 0.0)
        broms = broms_lateral("cohesionless", pile.diameter, embedded, d.head, free,
                              unit_weight=gamma, phi=layer.phi, yield_moment=my)
        soil = f"phi {layer.phi:g} deg, gamma' {gamma:.1f} kN/m3 from layer {i}"
    layers_used = sorted({seg[4] for seg in key[0]})
    if layers_used != [i]:
        soil += "; springs from layers " + ", ".join(str(k) for k in layers_used)
    depth, unit, ei = winkler_solve(key)
    return broms, depth, unit, ei, soil


def check_lateral(pile: AsBuiltPile, details: dict) -> Check:
    """lateral: see the module docstring."""
    code, rules, d = "lateral", pile.rules, pile.design
    shear = to_working(d.shear, rules)
    moment = to_working(d.moment, rules) if d.head == "free" else 0.0
    if shear <= 0.0 and moment <= 0.0:
        return Check(code, 0.0, None, "kN", 0.0, True, "No lateral load in the design")
    problem = toe_problem(pile)
    if problem:
        return Check.not_checked(code, "kN", problem)
    try:
        section = section_of(pile)
    except ValueError:
        section = None
    try:
        broms, depth, unit, ei, soil = lateral_analysis(pile, section)
    except NoLateralSoil as exc:
        return Check.not_checked(code, "kN", str(exc))
    except ValueError as exc:
        return Check.not_checked(code, "kN", f"Lateral analysis could not be made: {exc}")
    allowed = broms.ultimate / rules.broms_factor
    util_h = util(shear, allowed)
    y = unit[:, 0] * shear + unit[:, 1] * moment
    defl_mm = abs(float(y[0])) * 1000.0
    limit_mm = rules.lateral_deflection_limit_mm
    util_y = defl_mm / limit_mm
    details["broms"] = broms
    details["head_deflection_mm"] = defl_mm
    details["winkler"] = winkler_result(depth, y, ei, d.head, shear, moment)
    ok = max(util_h, util_y) <= 1.0
    text = (f"Working shear {shear:.0f} kN against Broms {broms.ultimate:.0f} kN / "
            f"{rules.broms_factor:g} = {allowed:.0f} kN ({broms.mode} pile) and head deflection "
            f"{defl_mm:.1f} mm against {limit_mm:g} mm ({soil}, {d.head} head)")
    if section is not None and section.pure_bending <= 0.0:
        text += "; the unreinforced section has no moment capacity without axial load"
    if util_h >= util_y:
        return Check(code, shear, allowed, "kN", util_h, ok, text)
    return Check(code, defl_mm, limit_mm, "mm", util_y, ok, text)
