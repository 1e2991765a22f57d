"""The recheck of one pile on its as-built record (PRODUCT.md section 5), and of a whole project.

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
    stand-in is written in the verdict's ``notes``. The as-built toe (``platform_level`` minus
    ``measured_depth``) has no stand-in: without it axial compression, tension, lateral and the
    group share are not checked. ``asbuilt=None`` rechecks the design on its own: every check
    that needs a record is then not checked.

Loads
    The schedule's loads are working or factored (``rules.loads_are``). Axial checks compare
    working loads with a working-stress resistance (``design_approach="working_stress"``) or
    factored loads with a limit-state resistance, converting with ``rules.load_factor``; the
    structural check always uses factored loads; the lateral check uses working loads (Broms
    ultimate over ``broms_factor``, deflection under service load). A check with no load (no
    uplift, no lateral load, not in a cap) is ok with utilisation 0 and says so.

Ground
    Where strata were logged (with ``platform_level`` and a toe), the ground under the pile is
    rebuilt from them (``ground_from_strata``): ``details["borrowed"]`` and the notes say which
    layer each stratum borrowed from.

Checks
    axial_compression: design resistance at the as-built toe, diameter and cut-off
    (``capacity_curve``) against the design compression. axial_tension: ``tension_fraction`` of
    that shaft plus the pile's own weight (as ``tension_capacity``) against the design uplift.
    structural: factored N and M = max(M_design, N e_min) (+ N x plan deviation for a pile not
    in a cap, which stands alone under its load), e_min = ``rules.min_eccentricity_m(D)``,
    against phi M_n(N/phi) of the as-built section (``section_interaction``); a pile with uplift
    is also checked at N = -T with the design moment. A pile stands alone unless its cap
    (``group``) has two or more piles. lateral: Broms ultimate / ``broms_factor`` against the
    working shear and the Winkler head deflection under the working shear (and moment, free
    head) against ``lateral_deflection_limit_mm``; utilisation the larger. Broms takes one
    layer, the first cohesive or cohesionless layer at or below the top of the pile, down to
    the toe; the Winkler springs follow every layer (``_spring_segments``); lengths rounded
    50 mm on the safe side (``_lateral_geometry``, ``_lateral_analysis``). group_share: the cap's loads shared over the as-built positions
    (``group_shares``; a moment across a line of piles is left to the tie beams and named in
    the reason); this pile's share against its design compression resistance (or its uplift
    resistance when the share is a pull). A pile not in a cap carries only its own load,
    checked under axial_compression, so this check is ok with utilisation 0 and says so; a
    pile whose design names a cap that was not passed is not checked. durability_cover
    (against ``rules.min_cover_mm``, cast against soil unless ``permanent_casing``),
    durability_grade, the tolerances and cage_length (the as-built cage, measured down from the
    cut-off, against the design length less ``cage_tolerance_m``; none for a driven pile or an
    unreinforced design): see the ``_check_*`` functions; limits from ``rules``.

``details`` carries what the drawings need: "curve" (CapacityCurve), "interaction"
(InteractionCurve, nominal), "load_point" (N kN, M kNm, factored), "structural_phi", "shares"
(numpy array, kN) and "group_marks" when in a cap, "borrowed" (list of Borrowed), "broms"
(BromsResult) and "winkler" (WinklerResult, single-pile recheck only), "ground" (the ground
used).

``recheck_project(items, rules=None, groups=None) -> dict[mark, PileVerdict]`` rechecks many
piles, sharing the capacity curve of each (ground, diameter, cut-off, pile type), the section
curve of each section, the Winkler analysis of each (ground, diameter, rounded lengths,
head, concrete) and the shares of each cap. Its verdicts equal ``recheck``'s, pile by pile.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any, Iterable

import numpy as np

from design_core.axial import CapacityCurve, capacity_curve, clear_shared_profiles, pile_weight
from design_core.checks import Check, PileVerdict
from design_core.ground import GroundModel, ground_from_strata
from design_core.group import across_moment, group_shares
from design_core.inputs import AsBuilt, CapGroup, PileDesign
from design_core.lateral import (
    SOLVE_TOGETHER_MIN, broms_lateral, winkler_result, winkler_unit_responses,
    winkler_unit_responses_many,
)
from design_core.rules import Rules
from design_core.section import InteractionCurve, section_interaction

CURVE_STEP_M = 0.25        # spacing of the drawn capacity curve
CURVE_MAX_POINTS = 400
CURVE_BELOW_TOE_M = 5.0    # the drawn curve runs this far below the deepest toe
WINKLER_NODES = 100        # about 0.4 % from Hetenyi on a 30 m pile (tests/validation)
LEVEL_TOL_M = 1e-6
SHARED_CACHE_SIZE = 256    # section curves and Winkler solves kept between calls (_shared_*)


class _NotChecked(Exception):
    """A check could not be made; the message is the reason."""


def _m(x: float) -> str:
    return f"{x:.2f} m"


def _signed(x: float) -> str:
    return f"{x:+.0f}"


def _util(demand: float, capacity: float) -> float:
    if demand <= 0.0:
        return 0.0
    return demand / capacity if capacity > 0.0 else math.inf


def _to_working(load: float, rules: Rules) -> float:
    return load / rules.load_factor if rules.loads_are == "factored" else load


def _to_factored(load: float, rules: Rules) -> float:
    return load * rules.load_factor if rules.loads_are == "working" else load


def _axial_demand(load: float, rules: Rules) -> float:
    """The load on the basis of the axial resistance (working stress or limit state)."""
    if rules.design_approach == "working_stress":
        return _to_working(load, rules)
    return _to_factored(load, rules)


def _basis(rules: Rules) -> str:
    return "working" if rules.design_approach == "working_stress" else "factored"


def _ground_key(ground: GroundModel):
    try:
        hash(ground)
        return ground
    except TypeError:
        return ("id", id(ground))


# --------------------------------------------------------------------------------------------
# The pile as built
# --------------------------------------------------------------------------------------------

@dataclass
class _Pile:
    """Geometry and ground the checks use, with where each value came from."""

    design: PileDesign
    asbuilt: AsBuilt
    rules: Rules
    ground: GroundModel
    diameter: float
    cutoff: float
    toe: float | None
    cover_mm: float
    fc_mpa: float
    exposure_class: str
    casing: bool
    dev_mm: float | None
    dx_mm: float | None
    dy_mm: float | None
    rebuilt: bool
    borrowed: list = field(default_factory=list)
    notes: list = field(default_factory=list)
    ground_error: str | None = None
    _gkey: Any = None
    section_memo: Any = None
    lateral_memo: Any = None

    @property
    def gkey(self):
        """A dictionary key for the ground used (the model itself when hashable)."""
        if self._gkey is None:
            self._gkey = _ground_key(self.ground)
        return self._gkey


def _pile(design: PileDesign, asbuilt: AsBuilt, ground: GroundModel, rules: Rules) -> _Pile:
    notes: list[str] = []
    d = design.diameter
    if asbuilt.diameter_mm is not None:
        d = asbuilt.diameter_mm / 1000.0
    else:
        notes.append(f"Diameter not recorded: design diameter {design.diameter * 1000:.0f} mm used")
    cutoff = design.cutoff_level
    if asbuilt.cutoff_level is not None:
        cutoff = asbuilt.cutoff_level
    else:
        notes.append(f"Cut-off level not recorded: design cut-off {_m(design.cutoff_level)} used")
    cover = design.cover_mm if asbuilt.cover_mm is None else asbuilt.cover_mm
    fc = design.fc_mpa if asbuilt.concrete_mpa is None else asbuilt.concrete_mpa
    exposure = asbuilt.exposure_class or design.exposure_class
    casing = design.permanent_casing if asbuilt.permanent_casing is None else asbuilt.permanent_casing
    dev = dx = dy = None
    if asbuilt.easting is not None and asbuilt.northing is not None:
        dx = (asbuilt.easting - design.easting) * 1000.0
        dy = (asbuilt.northing - design.northing) * 1000.0
        dev = math.hypot(dx, dy)
    toe = asbuilt.toe_level
    pile = _Pile(design, asbuilt, rules, ground, d, cutoff, toe, cover, fc, exposure, casing,
                 dev, dx, dy, False, [], notes)
    if asbuilt.strata:
        if asbuilt.platform_level is None or toe is None:
            missing = "platform_level" if asbuilt.platform_level is None else "measured_depth"
            notes.append(f"Strata were logged but {missing} was not recorded: the ground model "
                         "is used as it stands")
        else:
            try:
                new, borrowed = ground_from_strata(ground, asbuilt.platform_level, asbuilt.strata,
                                                   max(toe, ground.bottom))
            except ValueError as exc:
                pile.ground_error = f"The strata met could not be placed in the ground model: {exc}"
                notes.append(pile.ground_error)
            else:
                pile.ground, pile.borrowed, pile.rebuilt = new, borrowed, True
                for b in borrowed:
                    notes.append(f"Stratum {b.from_depth:g}-{b.to_depth:g} m ({b.material}): "
                                 f"{b.reason}")
    return pile


# --------------------------------------------------------------------------------------------
# Shared analyses (cached in a project recheck)
# --------------------------------------------------------------------------------------------

class _Cache:
    """Results shared between piles of one project recheck."""

    def __init__(self):
        self.curves: dict[Any, tuple[CapacityCurve, dict[float, int]]] = {}
        self.sections: dict[tuple, InteractionCurve] = {}
        self.lateral: dict[tuple, Any] = {}
        self.groups: dict[tuple, Any] = {}
        self.keep: list = []   # objects whose id() is a key stay alive


def _curve_key(pile: _Pile):
    return (pile.gkey, round(pile.diameter, 6), round(pile.cutoff, 6),
            pile.design.pile_type)


def _curve_grid(ground: GroundModel, top: float, toes: Iterable[float]) -> np.ndarray:
    """Toe levels of a drawn curve: every CURVE_STEP_M from just below the top down to
    CURVE_BELOW_TOE_M below the deepest toe (or the bottom of the ground model), and the toes.

    The toes given are the as-built and the design toes, so the curve shows both and reaches
    the toe a short pile would need (``required_toe_level``) in all but extreme cases."""
    start = min(top, ground.top) - 0.1
    pts = [t for t in toes if ground.bottom - LEVEL_TOL_M <= t < min(top, ground.top)]
    bottom = max(ground.bottom, min(pts) - CURVE_BELOW_TOE_M) if pts else ground.bottom
    if start > bottom:
        n = int(min(CURVE_MAX_POINTS, max(2, math.ceil((start - bottom) / CURVE_STEP_M) + 1)))
        pts.extend(np.linspace(start, bottom, n).tolist())
    return np.unique(np.maximum(np.array(pts, dtype=float), ground.bottom))[::-1]


def _build_curve(pile: _Pile, toes: Iterable[float]) -> tuple[CapacityCurve, dict[float, int]]:
    grid = _curve_grid(pile.ground, pile.cutoff, toes)
    if grid.size == 0:
        raise _NotChecked("The ground model leaves no room for the pile below its cut-off")
    curve = capacity_curve(pile.ground, pile.diameter, pile.cutoff, grid, pile.design.pile_type,
                           pile.rules)
    return curve, {float(z): i for i, z in enumerate(curve.toe_levels)}


def _unrecorded(pile: _Pile, *names: str) -> str:
    """The record fields among ``names`` that were not recorded, comma-separated."""
    return ", ".join(n for n in names if getattr(pile.asbuilt, n) is None)


def _toe_problem(pile: _Pile) -> str | None:
    """Why the axial checks cannot be made at this toe, or None."""
    if pile.ground_error:
        return pile.ground_error
    if pile.toe is None:
        return f"As-built toe not recorded ({_unrecorded(pile, 'platform_level', 'measured_depth')})"
    g = pile.ground
    if pile.toe >= min(pile.cutoff, g.top):
        return (f"As-built toe {_m(pile.toe)} is not below the cut-off {_m(pile.cutoff)} and the "
                f"ground surface {_m(g.top)}")
    if pile.toe < g.bottom - LEVEL_TOL_M:
        return (f"As-built toe {_m(pile.toe)} is below the bottom of the ground model "
                f"{_m(g.bottom)}: extend the ground model")
    return None


def _curve_usable(curve, pile: _Pile) -> bool:
    return (isinstance(curve, CapacityCurve) and not pile.rebuilt
            and abs(curve.diameter - pile.diameter) < 1e-9
            and abs(curve.top_level - pile.cutoff) < 1e-9
            and curve.pile_type == pile.design.pile_type)


def _read_curve(curve: CapacityCurve, pile: _Pile, index: dict | None):
    """(design, shaft, base) at the toe from a curve, or None when it cannot be read exactly.

    Exact at a curve point; between two points of the same layer (no jump in the base
    resistance) linear interpolation; otherwise None.
    """
    toe = pile.toe
    if index is not None and toe in index:
        i = index[toe]
        return float(curve.design[i]), float(curve.shaft[i]), float(curve.base[i])
    z = np.asarray(curve.toe_levels)
    hit = np.flatnonzero(np.abs(z - toe) <= 1e-9)
    if hit.size:
        i = int(hit[0])
        return float(curve.design[i]), float(curve.shaft[i]), float(curve.base[i])
    order = np.argsort(z)
    zs = z[order]
    k = int(np.searchsorted(zs, toe))
    if k == 0 or k == zs.size:
        return None
    lo, hi = zs[k - 1], zs[k]
    g = pile.ground
    if not (g.layer_index_at(lo) == g.layer_index_at(hi) == g.layer_index_at(toe)):
        return None
    w = (toe - lo) / (hi - lo)
    i0, i1 = order[k - 1], order[k]

    def at(arr):
        return float(arr[i0] + w * (arr[i1] - arr[i0]))

    return at(curve.design), at(curve.shaft), at(curve.base)


def _axial(pile: _Pile, curve, cache: _Cache | None):
    """(curve, design, shaft, base) at the as-built toe; raises _NotChecked."""
    problem = _toe_problem(pile)
    if problem:
        raise _NotChecked(problem)
    if cache is not None:
        key = _curve_key(pile)
        found = cache.curves.get(key)
        if found is None or pile.toe not in found[1]:
            toes = [pile.toe, pile.design.toe_level] + (
                [] if found is None else list(found[0].toe_levels))
            found = _build_curve(pile, toes)
            cache.curves[key] = found
            if isinstance(key[0], tuple):
                cache.keep.append(pile.ground)
        got = _read_curve(found[0], pile, found[1])
        return (found[0],) + got
    if _curve_usable(curve, pile):
        got = _read_curve(curve, pile, None)
        if got is not None:
            return (curve,) + got
    built, index = _build_curve(pile, [pile.toe, pile.design.toe_level])
    return (built,) + _read_curve(built, pile, index)


def _tension_design(pile: _Pile, shaft: float) -> tuple[float, float]:
    """Design uplift resistance (kN) and the pile weight, as ``tension_capacity`` does."""
    rules = pile.rules
    shaft_t = rules.tension_fraction * shaft
    weight = pile_weight(pile.ground, pile.diameter, pile.cutoff, pile.toe, rules)
    if rules.design_approach == "limit_state":
        return rules.phi_g * shaft_t + rules.pile_weight_factor * weight, weight
    return shaft_t / rules.fs_tension + rules.pile_weight_factor * weight, weight


@lru_cache(maxsize=SHARED_CACHE_SIZE)
def _shared_section(diameter: float, cover_mm: float, n_bars: int, bar_mm: float, fc_mpa: float,
                    fy_mpa: float) -> InteractionCurve:
    """``section_interaction`` of one section (m, mm, MPa), kept for the next pile with exactly
    the same section (a site has a handful); the arrays are read-only as the curve is shared."""
    curve = section_interaction(diameter, cover_mm, n_bars, bar_mm, fc_mpa, fy_mpa)
    for arr in (curve.n, curve.m, curve.c):
        arr.setflags(write=False)
    return curve


def clear_shared_analyses() -> None:
    """Forget every result kept between calls for equal inputs (shaft profiles, section curves,
    Winkler solves), so the next recheck works from nothing: for benchmarks of a first recheck
    and for tests. Never needed for correctness: the keys hold every input."""
    clear_shared_profiles()
    _shared_section.cache_clear()
    _winkler_solve.cache_clear()


def _section(pile: _Pile, cache: _Cache | None) -> InteractionCurve:
    d = pile.design
    key = (round(pile.diameter, 6), round(pile.cover_mm, 3), d.n_bars, d.bar_mm,
           round(pile.fc_mpa, 3), d.fy_mpa)
    if pile.section_memo is not None:
        return pile.section_memo
    if cache is not None and key in cache.sections:
        pile.section_memo = cache.sections[key]
        return pile.section_memo
    curve = _shared_section(pile.diameter, pile.cover_mm, d.n_bars, d.bar_mm, pile.fc_mpa,
                            d.fy_mpa)
    if cache is not None:
        cache.sections[key] = curve
    pile.section_memo = curve
    return curve


# --------------------------------------------------------------------------------------------
# The checks
# --------------------------------------------------------------------------------------------

def _check_compression(pile: _Pile, axial) -> Check:
    code, rules = "axial_compression", pile.rules
    load = pile.design.compression
    if load <= 0.0:
        return Check(code, 0.0, None, "kN", 0.0, True, "No compression load in the design")
    if isinstance(axial, _NotChecked):
        return Check.not_checked(code, "kN", str(axial))
    _, design, shaft, base = axial
    demand = _axial_demand(load, rules)
    util = _util(demand, design)
    ok = util <= 1.0
    verb = "within" if ok else "exceeds"
    return Check(code, demand, design, "kN", util, ok,
                 f"{_basis(rules).capitalize()} load {demand:.0f} kN {verb} the design resistance "
                 f"{design:.0f} kN at the as-built toe {_m(pile.toe)} (shaft {shaft:.0f} kN, base "
                 f"{base:.0f} kN ultimate, D {pile.diameter * 1000:.0f} mm)")


def _check_tension(pile: _Pile, axial) -> Check:
    code, rules = "axial_tension", pile.rules
    load = pile.design.tension
    if load <= 0.0:
        return Check(code, 0.0, None, "kN", 0.0, True, "No uplift load in the design")
    if isinstance(axial, _NotChecked):
        return Check.not_checked(code, "kN", str(axial))
    shaft = axial[2]
    design, weight = _tension_design(pile, shaft)
    demand = _axial_demand(load, rules)
    util = _util(demand, design)
    ok = util <= 1.0
    verb = "within" if ok else "exceeds"
    return Check(code, demand, design, "kN", util, ok,
                 f"{_basis(rules).capitalize()} uplift {demand:.0f} kN {verb} the design uplift "
                 f"resistance {design:.0f} kN ({rules.tension_fraction:g} x shaft {shaft:.0f} kN "
                 f"and pile weight {weight:.0f} kN) at the as-built toe {_m(pile.toe)}")


def _check_structural(pile: _Pile, share: float | None, group: CapGroup | None, cache,
                      details) -> Check:
    code, rules, d = "structural", pile.rules, pile.design
    # A cap of two or more piles takes the column's eccentricity; anything else stands alone.
    standalone = group is None or len(group.piles) < 2
    if standalone and pile.dev_mm is None:
        return Check.not_checked(
            code, "kNm", f"As-built position not recorded ({_unrecorded(pile, 'easting', 'northing')}): the moment from "
            "the plan deviation of a pile standing alone under its load is unknown")
    try:
        section = _section(pile, cache)
    except ValueError as exc:
        return Check.not_checked(code, "kNm", f"Section could not be built: {exc}")
    compression = d.compression if share is None else max(d.compression, share)
    n_f = _to_factored(compression, rules)
    e_min = rules.min_eccentricity_m(pile.diameter)
    m_design = _to_factored(d.moment, rules)
    m_f = max(m_design, n_f * e_min)
    dev_m = (pile.dev_mm or 0.0) / 1000.0 if standalone else 0.0
    m_f += n_f * dev_m
    phi = rules.structural_phi
    cap = phi * section.moment_capacity(n_f / phi)
    util = _util(m_f, cap) if n_f / phi <= section.squash else math.inf
    cases = [(util, n_f, m_f, cap)]
    if d.tension > 0.0:
        t_f = _to_factored(d.tension, rules)
        cap_t = phi * section.moment_capacity(-t_f / phi)
        util_t = _util(m_design, cap_t) if -t_f / phi >= section.tension else math.inf
        if util_t == 0.0 and cap_t <= 0.0:
            util_t = math.inf
        cases.append((util_t, -t_f, m_design, cap_t))
    util, n_f, m_f, cap = max(cases, key=lambda c: c[0])
    details["interaction"] = section
    details["load_point"] = (n_f, m_f)
    details["structural_phi"] = phi
    ok = util <= 1.0
    if n_f >= 0:
        how = f"max(design, N x e_min {e_min * 1000:.0f} mm)"
        if dev_m > 0:
            how += f" + N x plan deviation {dev_m * 1000:.0f} mm"
    else:
        how = "design moment with the uplift"
    verb = "within" if ok else "exceeds"
    cover = (f"as-built cover {pile.cover_mm:.0f} mm" if pile.asbuilt.cover_mm is not None
             else f"design cover {pile.cover_mm:.0f} mm, as-built not recorded")
    return Check(code, m_f, cap, "kNm", util, ok,
                 f"Factored M {m_f:.0f} kNm ({how}) at N {n_f:.0f} kN {verb} phi Mn {cap:.0f} kNm "
                 f"(phi {phi:g}, D {pile.diameter * 1000:.0f} mm, {cover})")


LATERAL_STEP_M = 0.05      # lateral geometry rounded to this, on the safe side


def _lateral_geometry(pile: _Pile):
    """Soil layer and lengths of the lateral check, rounded on the safe side.

    The soil is the first cohesive or cohesionless layer at or below the top of the pile
    (layers of material "ignore" above it are free length). Its top of resistance z_top is
    rounded up, the free length (cut-off down to z_top) up and the embedded length (z_top down
    to the toe) down, each to ``LATERAL_STEP_M``: a longer lever and a shorter embedment give
    less resistance, and piles within 50 mm of each other share one analysis. Returns
    (layer index, z_top, free, embedded); raises _NotChecked.
    """
    g = pile.ground
    top = min(pile.cutoff, g.top)
    layers = g.layers
    i = 0
    while i < len(layers) - 1 and layers[i].bottom >= top:   # the layer holding top
        i += 1
    while i < len(layers) and layers[i].material == "ignore":
        i += 1
    if i >= len(g.layers) or g.layers[i].bottom >= top:
        raise _NotChecked("No cohesive or cohesionless layer below the top of the pile for the "
                          "lateral check")
    layer = g.layers[i]
    if layer.material == "rock":
        raise _NotChecked("Rock at the top of the pile: Broms and the soil springs do not apply; "
                          "the engineer assesses the lateral check")
    step = LATERAL_STEP_M
    z_top = min(layer.top, math.ceil(min(top, layer.top) / step - 1e-9) * step)
    free = max(0.0, math.ceil((pile.cutoff - z_top) / step - 1e-9) * step)
    embedded = math.floor((z_top - pile.toe) / step + 1e-9) * step
    if embedded <= 0.0:
        raise _NotChecked("The as-built toe is above the soil that resists lateral load")
    return i, round(z_top, 6), round(free, 6), round(embedded, 6)


def _cu_at(layer, level: float) -> float:
    """c_u (kPa) at ``level`` as ``Layer.cu_at`` (linear, clipped to the layer), in floats."""
    bottom = layer.cu if layer.cu_bottom is None else layer.cu_bottom
    frac = min(1.0, max(0.0, (layer.top - level) / (layer.top - layer.bottom)))
    return layer.cu + (bottom - layer.cu) * frac


def _spring_segments(pile: _Pile, geometry) -> tuple:
    """The Winkler springs along the embedded length, layer by layer, as a tuple of
    (start m, end m, k at start kN/m per m, slope kN/m per m per m, layer index), depths below
    the pile head.

    From the top of the resisting soil (``z_top``) down to the rounded toe, each layer gives
    springs by its own material: cohesive k = spring_per_cu x c_u(z) (c_u linear within the
    layer, Davisson 1970); cohesionless k = n_h x (depth below z_top) (Terzaghi 1955); rock and
    ignored layers none, which can only make the head deflection larger (a softer support never
    stiffens a linear beam on springs): the engineer judges a rock socket.
    """
    rules = pile.rules
    i, z_top, free, embedded = geometry
    toe = z_top - embedded
    segments = []
    for index, layer in enumerate(pile.ground.layers[i:], start=i):
        top, bottom = min(layer.top, z_top), max(layer.bottom, toe)
        if top - bottom > LEVEL_TOL_M and layer.material in ("cohesive", "cohesionless"):
            start, end = round(free + z_top - top, 6), round(free + z_top - bottom, 6)
            if layer.material == "cohesive":
                k_top = rules.spring_per_cu * _cu_at(layer, top)
                k_bottom = rules.spring_per_cu * _cu_at(layer, bottom)
                segments.append((start, end, k_top, (k_bottom - k_top) / (end - start), index))
            else:
                nh = rules.spring_nh_sand
                segments.append((start, end, nh * (start - free), nh, index))
        if layer.bottom <= toe + LEVEL_TOL_M:
            break
    return tuple(segments)


def _lateral_key(pile: _Pile) -> tuple:
    """(geometry, Winkler key) of the pile's lateral check, worked out once per pile; raises
    _NotChecked as ``_lateral_geometry`` does."""
    if pile.lateral_memo is None:
        geometry = _lateral_geometry(pile)
        pile.lateral_memo = (geometry, _winkler_inputs(pile, geometry))
    return pile.lateral_memo


def _winkler_inputs(pile: _Pile, geometry) -> tuple:
    """Everything ``_winkler_solve`` uses, as a dictionary key; see ``_lateral_analysis``."""
    rules = pile.rules
    _, _, free, embedded = geometry
    return (_spring_segments(pile, geometry), free, embedded, pile.diameter, pile.fc_mpa,
            rules.ei_cracked_factor, pile.design.head)


def _winkler_case(springs: tuple, free: float, embedded: float, diameter: float,
                  fc_mpa: float, ei_factor: float, head: str) -> tuple:
    """(ei, length, spring, head, nodes) for ``winkler_unit_responses`` from the inputs of
    ``_winkler_inputs``: ``springs`` the segments of ``_spring_segments`` (none outside them; at
    a boundary the segment below), EI = factor x E_c I_g (kNm2)."""
    starts = np.array([seg[0] for seg in springs], dtype=float)
    ends = np.array([seg[1] for seg in springs], dtype=float)
    k_start = np.array([seg[2] for seg in springs], dtype=float)
    slope = np.array([seg[3] for seg in springs], dtype=float)

    def spring(z):
        z = np.asarray(z, dtype=float)
        j = np.searchsorted(starts, z + 1e-9, side="right") - 1
        jj = np.clip(j, 0, max(len(starts) - 1, 0))
        if not len(starts):
            return np.zeros_like(z)
        k = k_start[jj] + slope[jj] * (z - starts[jj])
        inside = (j >= 0) & (z <= ends[jj] + 1e-9)
        return np.where(inside, np.maximum(k, 0.0), 0.0)

    ec = 4700.0 * math.sqrt(fc_mpa) * 1000.0          # kPa
    ei = ei_factor * ec * math.pi * diameter ** 4 / 64.0
    return ei, free + embedded, spring, head, WINKLER_NODES


def _frozen_solve(depth, unit, ei):
    depth.setflags(write=False)
    unit.setflags(write=False)
    return depth, unit, ei


@lru_cache(maxsize=SHARED_CACHE_SIZE)
def _winkler_solve(springs: tuple[str, float], free: float, embedded: float, diameter: float,
                   fc_mpa: float, ei_factor: float, head: str):
    """Head deflection per unit H and M (depth m, deflections m) and EI (kNm2) of a pile of
    ``free`` + ``embedded`` m (``_winkler_case``). Equal inputs share one solve (the arrays are
    read-only); the lengths are already rounded to 50 mm (``_lateral_geometry``), so a re-saved
    record or a like pile finds it."""
    case = _winkler_case(springs, free, embedded, diameter, fc_mpa, ei_factor, head)
    depth, unit = winkler_unit_responses(*case)
    return _frozen_solve(depth, unit, case[0])


def _solve_lateral_together(piles: list[_Pile], cache: _Cache) -> None:
    """Every distinct Winkler system the piles' lateral checks will need, solved together
    (``winkler_unit_responses_many``) into ``cache.lateral``; the same numbers as one by one.
    Piles whose lateral check stops earlier (no lateral load, no toe, no soil) are skipped, and
    any case the batch cannot take is left for the check itself to solve and report."""
    wanted: dict[tuple, None] = {}   # distinct keys, in order
    for pile in piles:
        d = pile.design
        if d.shear <= 0.0 and (d.moment <= 0.0 or d.head != "free"):
            continue
        if _toe_problem(pile):
            continue
        try:
            key = _lateral_key(pile)[1]
        except (_NotChecked, ValueError, IndexError):
            continue
        if key not in cache.lateral:
            wanted[key] = None
    keys = list(wanted)
    if len(keys) < SOLVE_TOGETHER_MIN:  # a cap's few mates: one by one, through _winkler_solve
        return
    try:
        cases = [_winkler_case(*key) for key in keys]
        solved = winkler_unit_responses_many(cases)
    except ValueError:
        return
    for key, case, (depth, unit) in zip(keys, cases, solved, strict=True):
        cache.lateral[key] = _frozen_solve(depth, unit, case[0])


def _lateral_analysis(pile: _Pile, section: InteractionCurve | None, cache: _Cache | None):
    """Broms result, Winkler unit responses, EI and a text naming the soil.

    Broms (a method for one uniform soil) takes the single layer at or below the top of the
    pile (``_lateral_geometry``) as extending to the toe. Clay: c_u at the top of that layer's
    resisting part (the lower end of a c_u that rises with depth). Sand: gamma buoyant when the
    water level is above the bottom of the top 5 D of the resisting part. Broms takes M_y as the
    nominal pure-bending moment of the as-built section (compression ignored: conservative) and
    the free length as the load's height above the soil (free head). The Winkler springs follow
    every layer down to the toe (``_spring_segments``). EI = ei_cracked_factor x E_c I_g with
    E_c = 4700 sqrt(f'_c) MPa (ACI 318-19 19.2.2.1(b)).
    """
    rules, d, g = pile.rules, pile.design, pile.ground
    geometry, key = _lateral_key(pile)
    i, z_top, free, embedded = geometry
    layer = g.layers[i]
    my = section.pure_bending if section is not None else None
    if layer.material == "cohesive":
        cu = _cu_at(layer, z_top)
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
    if cache is None:
        depth, unit, ei = _winkler_solve(*key)
    else:
        found = cache.lateral.get(key)
        if found is None:
            found = cache.lateral[key] = _winkler_solve(*key)
        depth, unit, ei = found
    return broms, depth, unit, ei, soil


def _check_lateral(pile: _Pile, cache, details) -> Check:
    code, rules, d = "lateral", pile.rules, pile.design
    shear = _to_working(d.shear, rules)
    moment = _to_working(d.moment, rules) if d.head == "free" else 0.0
    if shear <= 0.0 and moment <= 0.0:
        return Check(code, 0.0, None, "kN", 0.0, True, "No lateral load in the design")
    problem = _toe_problem(pile)
    if problem:
        return Check.not_checked(code, "kN", problem)
    try:
        section = _section(pile, cache)
    except ValueError:
        section = None
    try:
        broms, depth, unit, ei, soil = _lateral_analysis(pile, section, cache)
    except _NotChecked as exc:
        return Check.not_checked(code, "kN", str(exc))
    except ValueError as exc:
        return Check.not_checked(code, "kN", f"Lateral analysis could not be made: {exc}")
    allowed = broms.ultimate / rules.broms_factor
    util_h = _util(shear, allowed)
    y = unit[:, 0] * shear + unit[:, 1] * moment
    defl_mm = abs(float(y[0])) * 1000.0
    limit_mm = rules.lateral_deflection_limit_mm
    util_y = defl_mm / limit_mm
    details["broms"] = broms
    details["head_deflection_mm"] = defl_mm
    if cache is None:
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


def _check_group(pile: _Pile, group: CapGroup | None, axial, details,
                 cache: _Cache | None = None) -> tuple[Check, float | None]:
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
    xy = []
    for p in group.piles:
        if p.mark == d.mark and pile.asbuilt.easting is not None and pile.asbuilt.northing is not None:
            xy.append((pile.asbuilt.easting, pile.asbuilt.northing))
        else:
            xy.append(p.xy)
    load_point = group.load_point
    if load_point is None:
        k = len(group.piles)
        load_point = (sum(p.design_xy[0] for p in group.piles) / k,
                      sum(p.design_xy[1] for p in group.piles) / k)
    key = (id(group), tuple(xy))
    shares = cache.groups.get(key) if cache is not None else None
    if shares is None:
        try:
            shares = group_shares(xy, group.n, group.mx, group.my, load_point, across="ignore")
            spill = across_moment(xy, group.n, group.mx, group.my, load_point)
            shares = (shares, spill)
        except ValueError as exc:
            shares = _NotChecked(f"Cap {group.mark}: {exc}")
        if cache is not None:
            cache.groups[key] = shares
            cache.keep.append(group)
    if isinstance(shares, _NotChecked):
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
    if isinstance(axial, _NotChecked):
        return Check.not_checked(code, "kN", f"Share {share:.0f} kN ({where}) not set against a "
                                 f"resistance: {axial}"), share
    demand = _axial_demand(abs(share), rules)
    if share >= 0.0:
        resistance = axial[1]
        what = "design compression resistance"
    else:
        resistance, _ = _tension_design(pile, axial[2])
        what = "design uplift resistance"
    util = _util(demand, resistance)
    ok = util <= 1.0
    verb = "within" if ok else "exceeds"
    pull = "" if share >= 0.0 else " (uplift)"
    return Check(code, demand, resistance, "kN", util, ok,
                 f"Share on the as-built positions {demand:.0f} kN{pull} {verb} the {what} "
                 f"{resistance:.0f} kN ({where})"), share


def _check_cover(pile: _Pile) -> Check:
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
    return Check(code, cover, need, "mm", _util(need, cover) if cover > 0 else math.inf, ok,
                 f"As-built cover {cover:.0f} mm {verb} the minimum {need:.0f} mm for "
                 f"{pile.exposure_class}, {how}")


def _check_grade(pile: _Pile) -> Check:
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
    return Check(code, fc, need, "MPa", _util(need, fc), ok,
                 f"Concrete f_ck {fc:g} MPa {verb} the minimum {need:g} MPa for "
                 f"{pile.exposure_class}")


def _check_position(pile: _Pile) -> Check:
    code, rules = "position", pile.rules
    if pile.dev_mm is None:
        return Check.not_checked(code, "mm", "As-built position not recorded "
                                 f"({_unrecorded(pile, 'easting', 'northing')})")
    limit = rules.position_tolerance_mm
    ok = pile.dev_mm <= limit + 1e-9
    verb = "within" if ok else "more than"
    return Check(code, pile.dev_mm, limit, "mm", pile.dev_mm / limit, ok,
                 f"As-built position {pile.dev_mm:.0f} mm from design (east {_signed(pile.dx_mm)}, "
                 f"north {_signed(pile.dy_mm)} mm), {verb} {limit:g} mm")


def _check_inclination(pile: _Pile) -> Check:
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


def _check_cutoff(pile: _Pile) -> Check:
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
                 f"As-built cut-off {_m(level)} is {abs(off_mm):.0f} mm {side} design cut-off "
                 f"{_m(design)}, {verb} +/-{limit:g} mm")


def _check_toe(pile: _Pile) -> Check:
    code, rules = "toe_level", pile.rules
    if pile.toe is None:
        return Check.not_checked(code, "m", "As-built toe not recorded "
                                 f"({_unrecorded(pile, 'platform_level', 'measured_depth')})")
    design = pile.design.toe_level
    above = pile.toe - design
    limit = rules.toe_tolerance_mm / 1000.0
    ok = above <= limit + 1e-9
    # utilisation: length needed below the design cut-off over the length reached
    need = pile.design.cutoff_level - (design + limit)
    reached = pile.design.cutoff_level - pile.toe
    util = need / reached if reached > 0 else math.inf
    if abs(above) < 0.005:
        where = f"As-built toe {_m(pile.toe)} at the design toe {_m(design)}"
    else:
        side = "above" if above > 0 else "below"
        where = f"As-built toe {abs(above):.2f} m {side} design toe {_m(design)}"
    tail = "" if ok else (f", more than the {rules.toe_tolerance_mm:g} mm allowed above" if limit
                          else ": short of the design toe")
    return Check(code, above, limit, "m", util, ok, where + tail)


def _check_diameter(pile: _Pile) -> Check:
    code, rules = "diameter", pile.rules
    got = pile.asbuilt.diameter_mm
    if got is None:
        return Check.not_checked(code, "mm", "As-built diameter not recorded (diameter_mm)")
    design = pile.design.diameter * 1000.0
    least = design - rules.diameter_tolerance_mm
    ok = got >= least - 1e-6
    verb = "not below" if ok else "below"
    allow = f" less {rules.diameter_tolerance_mm:g} mm" if rules.diameter_tolerance_mm else ""
    return Check(code, got, least, "mm", _util(least, got), ok,
                 f"As-built diameter {got:.0f} mm {verb} the design {design:.0f} mm{allow}")


def _check_cage(pile: _Pile) -> Check:
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
    allow = f" less {rules.cage_tolerance_m:g} m" if rules.cage_tolerance_m else ""
    if ok:
        text = f"Cage {got:.2f} m long, not shorter than the design {d.cage_length:.2f} m{allow}"
    else:
        text = (f"Cage {got:.2f} m long, {d.cage_length - got:.2f} m shorter than the design "
                f"{d.cage_length:.2f} m{allow}: the pile is unreinforced below "
                f"{_m(pile.cutoff - got)}, where the design put bars")
    return Check(code, got, least, "m", _util(least, got), ok, text)


def _check_debris(pile: _Pile) -> Check:
    code, rules = "base_debris", pile.rules
    debris = pile.asbuilt.debris_mm
    if pile.design.pile_type != "bored" and debris is None:
        # CFA, driven and screw piles have no open base to inspect (PRODUCT.md section 4): for a
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


def _check_volume(pile: _Pile) -> Check:
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
        return Check.not_checked(code, "", f"The {which} {_m(top)} is not above the toe {_m(pile.toe)}")
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


def _check_time(pile: _Pile) -> Check:
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


# --------------------------------------------------------------------------------------------
# Public
# --------------------------------------------------------------------------------------------

def _prepare(design, asbuilt, ground, rules, group) -> _Pile:
    """Validate the inputs' types and work out the as-built geometry and ground."""
    if not isinstance(design, PileDesign):
        raise ValueError(f"design must be a PileDesign, got {type(design).__name__}")
    if not isinstance(ground, GroundModel):
        raise ValueError(f"ground must be a GroundModel, got {type(ground).__name__}")
    if not isinstance(rules, Rules):
        raise ValueError(f"rules must be a Rules, got {type(rules).__name__}")
    asbuilt = AsBuilt() if asbuilt is None else asbuilt
    if not isinstance(asbuilt, AsBuilt):
        raise ValueError(f"asbuilt must be an AsBuilt or None, got {type(asbuilt).__name__}")
    if group is not None and not isinstance(group, CapGroup):
        raise ValueError(f"group must be a CapGroup, got {type(group).__name__}")
    return _pile(design, asbuilt, ground, rules)


def _run(pile: _Pile, group: CapGroup | None, curve, cache: _Cache | None) -> PileVerdict:
    design = pile.design
    details: dict[str, Any] = {"ground": pile.ground, "borrowed": pile.borrowed}
    try:
        axial = _axial(pile, curve, cache)
        details["curve"] = axial[0]
    except _NotChecked as exc:
        axial = exc
    except ValueError as exc:
        axial = _NotChecked(f"Axial capacity could not be worked out: {exc}")
    group_check, share = _check_group(pile, group, axial, details, cache)
    checks = (
        _check_compression(pile, axial),
        _check_tension(pile, axial),
        _check_structural(pile, share, group, cache, details),
        _check_lateral(pile, cache, details),
        group_check,
        _check_cover(pile),
        _check_grade(pile),
        _check_position(pile),
        _check_inclination(pile),
        _check_cutoff(pile),
        _check_toe(pile),
        _check_diameter(pile),
        _check_debris(pile),
        _check_volume(pile),
        _check_time(pile),
        _check_cage(pile),
    )
    return PileVerdict(design.mark, checks, tuple(pile.notes), details)


def recheck(design: PileDesign, asbuilt: AsBuilt | None, ground: GroundModel,
            rules: Rules | None = None, group: CapGroup | None = None,
            curve: CapacityCurve | None = None) -> PileVerdict:
    """Every check of one pile (CHECK_CODES) on its as-built record; see the module docstring.

    design: the pile as designed; asbuilt: the record (None: nothing recorded yet); ground: the
    ground model; rules: the project's rules (defaults when None); group: the pile's cap with
    its loads and the piles' positions (None: not in a cap); curve: a capacity curve for this
    ground, as-built diameter, cut-off and pile type, reused when it matches (read exactly at
    a curve point, interpolated between two points in the same layer, else recomputed).
    Returns a PileVerdict with the checks in CHECK_CODES order, notes and details.
    """
    rules = Rules() if rules is None else rules
    return _run(_prepare(design, asbuilt, ground, rules, group), group, curve, None)


@dataclass(frozen=True)
class ProjectItem:
    """One pile of a project recheck: its design, its record (or None) and its ground model."""

    design: PileDesign
    asbuilt: AsBuilt | None
    ground: GroundModel


def recheck_project(items: Iterable, rules: Rules | None = None,
                    groups: dict[str, CapGroup] | None = None) -> dict[str, PileVerdict]:
    """Recheck every pile of a project; {mark: PileVerdict}, the same as ``recheck`` per pile.

    items: ProjectItem or (design, asbuilt, ground) tuples; groups: {cap mark: CapGroup} for the
    piles whose ``design.cap`` names a cap. Piles sharing a ground model object (or an equal
    one), diameter, cut-off and pile type share one capacity curve evaluated at all their toes;
    equal sections share one interaction curve; equal Winkler inputs share one solve; each cap
    is shared out once. Marks must be unique (ValueError naming the mark).
    """
    rules = Rules() if rules is None else rules
    groups = groups or {}
    piles: list[_Pile] = []
    seen = set()
    for item in items:
        design, asbuilt, ground = (item.design, item.asbuilt, item.ground) if isinstance(
            item, ProjectItem) else item
        if getattr(design, "mark", None) in seen:
            raise ValueError(f"pile mark {design.mark} appears twice in the project")
        group = groups.get(design.cap) if getattr(design, "cap", None) else None
        pile = _prepare(design, asbuilt, ground, rules, group)
        seen.add(design.mark)
        piles.append(pile)
    cache = _Cache()
    # Every toe per (ground, diameter, cut-off, type) first, so each curve is built once.
    wanted: dict[Any, tuple[_Pile, list[float]]] = {}
    for pile in piles:
        if _toe_problem(pile) is None:
            key = _curve_key(pile)
            if key in wanted:
                wanted[key][1].extend((pile.toe, pile.design.toe_level))
            else:
                wanted[key] = (pile, [pile.toe, pile.design.toe_level])
    for key, (pile, toes) in wanted.items():
        try:
            cache.curves[key] = _build_curve(pile, toes)
        except (ValueError, _NotChecked):
            continue
        if isinstance(key[0], tuple):
            cache.keep.append(pile.ground)
    _solve_lateral_together(piles, cache)
    out: dict[str, PileVerdict] = {}
    for pile in piles:
        group = groups.get(pile.design.cap) if pile.design.cap else None
        out[pile.design.mark] = _run(pile, group, None, cache)
    return out
