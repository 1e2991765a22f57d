"""Axial capacity of a single pile: shaft, base, design resistance, tension, capacity curve.

The result objects are in ``design_core.axial_results``, the point formulas (alpha, K, beta,
N_q) in ``design_core.soil_factors`` and the shaft grid in ``design_core.shaft_profile``; all
are importable from here.

Units: levels and lengths in m (levels are reduced levels, higher is up), diameter in m,
stresses and unit resistances in kPa, forces in kN, angles in degrees.

Method
------
* sigma'_v from the top of the ground model, gamma - gamma_w below the water level
  (Terzaghi; see ``design_core.ground``).
* Shaft: Q_s = integral over the shaft of pi D f_s(z) dz, ignored from ``top_level`` down
  ``exclusion_diameters`` x D (1.5 D, common practice) and in layers of material "ignore".

  - cohesive, alpha method: f_s = alpha c_u. Rule "api": alpha = 0.5 psi^-0.5 (psi <= 1),
    0.5 psi^-0.25 (psi > 1), psi = c_u / sigma'_v (API RP 2A-WSD 21st ed. 2000, 6.4.2;
    Randolph & Murphy 1985). Rule "power": alpha = C (sigma'_v / c_u)^n, an engineer's rule.
    Either way alpha <= ``alpha_max`` (1.0). sigma'_v here is not capped at the critical depth.
  - cohesionless, beta method: f_s = K sigma'_v tan(delta), K = 1 - sin(phi') (Jaky 1944) or
    a fixed K, delta = (2/3) phi'; sigma'_v held at its value at the critical depth
    ``critical_depth_diameters`` x D (20 D, common practice) below the ground surface.
  - report values (``Layer.shaft_friction``) replace the method in any layer; rock must have
    them.
* Base, in the layer holding the toe (at a boundary, the layer below it): q_b = N_c c_u in
  clay (N_c = 9, Skempton 1951); q_b = N_q sigma'_v in sand, sigma'_v capped at the critical
  depth, N_q by the Reissner (1924) closed form e^(pi tan phi') tan^2(45 + phi'/2) or a fixed
  value, q_b <= ``base_pressure_limit_kpa``; the report's ``base_pressure`` when given (rock
  must have it); none in an ignored layer. Q_b = q_b pi D^2 / 4.
* Design resistance: limit state R_d = phi_g Q_u; working stress
  R_d = min(Q_u / FS_global, Q_s / FS_shaft + Q_b / FS_base) with Q_u = Q_s + Q_b.
* Pile type: every type uses the same method; a displacement pile (driven, screw) takes its
  own K (``k_rule="fixed"``) or alpha rule C from the project's rules. The type is validated and
  recorded in the result.

Integration
-----------
sigma'_v and c_u are piecewise linear in level. The shaft is cut at every layer boundary, the
water level, the bottom of the exclusion zone, the critical depth and, in alpha layers, at the
levels where psi crosses the kinks of the alpha rule (psi = 1 and the alpha cap), which are
roots of linear functions and so found exactly. Between these breakpoints f_s is smooth; each
stretch is cut into pieces no longer than ``MAX_STEP_M`` and integrated by
``GAUSS_POINTS``-point Gauss-Legendre quadrature. This is exact for the beta method and report
values (f_s linear or constant) and converges fast for the alpha method (relative error below
1e-6 at the defaults; ``tests/test_axial.py`` shows the convergence). For a toe inside a piece
the partial integral uses the polynomial through the same Gauss points, so ``axial_capacity``
and ``capacity_curve`` use one grid and agree to rounding.
"""

from __future__ import annotations

import bisect
import math
from typing import Any

import numpy as np

from design_core.ground import LEVEL_TOL_M, GroundModel
from design_core.axial_results import AxialResult, CapacityCurve, ShaftRow, TensionResult
from design_core.inputs import LEVEL_LIMIT_M, PILE_TYPES
from design_core.memo import MEMO
from design_core.rules import Rules
from design_core.shaft_profile import (
    _BASE_METHODS, _IGNORE, GAUSS_POINTS, MAX_STEP_M, SHAFT_METHODS, _Profile, shaft_profile,
)
from design_core.soil_factors import (
    alpha_api, alpha_factor, beta_factor, earth_pressure_k, n_q,
)
from design_core.validate import number

# Re-exported: the point formulas and the shaft profile live in their own modules.
__all__ = [
    "GAUSS_POINTS", "MAX_STEP_M", "SHAFT_METHODS", "DIAMETER_MAX_M", "alpha_api", "alpha_factor",
    "beta_factor", "earth_pressure_k", "n_q", "shaft_profile", "clear_shared_profiles",
    "pile_area", "ShaftRow", "AxialResult", "TensionResult", "CapacityCurve", "axial_capacity",
    "unit_shaft_friction", "pile_weight", "tension_design", "design_words", "tension_words", "tension_capacity", "capacity_curve",
    "curve_levels", "layer_steps", "pile_capacity_curve", "prime_capacity_points", "required_toe_level",
]

DIAMETER_MAX_M = 5.0


def clear_shared_profiles() -> None:
    """Forget the shaft profiles kept between calls (``MEMO.profiles``; see design_core.memo)."""
    MEMO.profiles.clear()


def pile_area(diameter: float) -> float:
    """Cross-section area pi D^2 / 4 (m2) of a circular pile of diameter D (m)."""
    return math.pi * diameter * diameter / 4.0


# --------------------------------------------------------------------------------------------
# Input checks
# --------------------------------------------------------------------------------------------

def _check_common(ground: Any, diameter: Any, top_level: Any, pile_type: Any,
                  rules: Rules | None) -> tuple[float, float, Rules]:
    """Validate the inputs shared by every call; ValueError naming the field and the limit."""
    if not isinstance(ground, GroundModel):
        raise ValueError(f"ground must be a GroundModel, got {type(ground).__name__}")
    diameter = number("diameter", diameter)
    if diameter <= 0.0:
        raise ValueError(f"diameter must be greater than 0 m, got {diameter:g}")
    if diameter > DIAMETER_MAX_M:
        raise ValueError(f"diameter must be at most {DIAMETER_MAX_M:g} m, got {diameter:g}")
    top_level = number("top_level", top_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
    if pile_type not in PILE_TYPES:
        raise ValueError(f"pile_type must be one of {', '.join(PILE_TYPES)}, got {pile_type!r}")
    if rules is None:
        rules = Rules()
    elif not isinstance(rules, Rules):
        raise ValueError(f"rules must be a Rules, got {type(rules).__name__}")
    if top_level <= ground.bottom:
        raise ValueError(
            f"top_level ({top_level:g} m) must be above the bottom of the ground model "
            f"({ground.bottom:g} m)")
    return diameter, top_level, rules


GAUSS_POINTS_RANGE = (1, 8)    # Gauss-Legendre orders whose antiderivative matrix is exact to rounding
MAX_STEP_RANGE_M = (1e-3, 100.0)


def _check_integration(max_step: Any, gauss_points: Any) -> tuple[float, int]:
    """The integration controls, refused outside their ranges (ValueError naming the field)."""
    lo, hi = MAX_STEP_RANGE_M
    if isinstance(max_step, bool) or not isinstance(max_step, (int, float, np.integer, np.floating)) \
            or not math.isfinite(float(max_step)) or not lo <= float(max_step) <= hi:
        raise ValueError(f"max_step must be a number from {lo:g} to {hi:g} m, got {max_step!r}")
    g_lo, g_hi = GAUSS_POINTS_RANGE
    if isinstance(gauss_points, bool) or not isinstance(gauss_points, (int, np.integer)) \
            or not g_lo <= int(gauss_points) <= g_hi:
        raise ValueError(f"gauss_points must be a whole number from {g_lo} to {g_hi}, got "
                         f"{gauss_points!r}")
    return float(max_step), int(gauss_points)


def _check_toes(ground: GroundModel, top_level: float, toes: np.ndarray, name: str) -> None:
    """Every toe level finite, below ``top_level`` and within the ground model."""
    if np.any(~np.isfinite(toes)):
        raise ValueError(f"{name} must be finite numbers (no NaN or inf)")
    hi, lo = float(toes.max()), float(toes.min())
    if hi >= top_level:
        raise ValueError(f"{name} ({hi:g} m) must be below top_level ({top_level:g} m)")
    if hi > ground.top:
        raise ValueError(
            f"{name} ({hi:g} m) must be below the top of the ground model ({ground.top:g} m)")
    if lo < ground.bottom - LEVEL_TOL_M:
        raise ValueError(
            f"{name} ({lo:g} m) must not be below the bottom of the ground model "
            f"({ground.bottom:g} m)")



def _design(shaft: np.ndarray | float, base: np.ndarray | float, rules: Rules):
    """Design resistance (kN) by the rules' design approach (see module docstring)."""
    ult = shaft + base
    if rules.design_approach == "limit_state":
        return rules.phi_g * ult
    return np.minimum(ult / rules.fs_global, shaft / rules.fs_shaft + base / rules.fs_base)


def _approach_text(rules: Rules) -> str:
    """One-line statement of the design approach and its factors."""
    if rules.design_approach == "limit_state":
        return f"limit state, phi_g {rules.phi_g:g} x ultimate"
    return (f"working stress, min(Q_u/{rules.fs_global:g}, Q_s/{rules.fs_shaft:g} + "
            f"Q_b/{rules.fs_base:g})")


# --------------------------------------------------------------------------------------------
# Public analyses
# --------------------------------------------------------------------------------------------

def unit_shaft_friction(ground: GroundModel, diameter: float, top_level: float,
                        levels: float | np.ndarray, pile_type: str = "bored",
                        rules: Rules | None = None) -> np.ndarray:
    """Ultimate unit shaft friction f_s (kPa) at ``levels`` (m) for the pile described.

    As used by ``axial_capacity``: 0 in the exclusion zone, above ``top_level`` and in ignored
    layers; sigma'_v capped at the critical depth in the beta method. For plots and checks.
    """
    diameter, top_level, rules = _check_common(ground, diameter, top_level, pile_type, rules)
    z = np.atleast_1d(np.asarray(levels, dtype=float))
    _check_toes(ground, math.inf, z, "levels")
    prof = _Profile(ground, diameter, top_level, rules, ground.bottom, max_step=math.inf,
                    gauss_points=1)
    return prof.friction(z, prof.layer_index(z))


def axial_capacity(ground: GroundModel, diameter: float, top_level: float, toe_level: float,
                   pile_type: str = "bored", rules: Rules | None = None, *,
                   max_step: float = MAX_STEP_M, gauss_points: int = GAUSS_POINTS) -> AxialResult:
    """Compression resistance of a single pile: shaft, base, ultimate and design (kN).

    Parameters
    ----------
    ground:
        The ground model (layers top down, water level).
    diameter:
        Pile diameter D (m), 0 < D <= 5.
    top_level:
        Highest level (m) where the shaft keeps soil contact: the cut-off or dig level. Shaft
        above the ground surface counts nothing.
    toe_level:
        Toe level (m): below ``top_level`` and within the ground model.
    pile_type:
        One of bored, cfa, driven, screw (same method for all; see the module docstring).
    rules:
        The project's rules (the defaults of ``Rules`` when None).
    max_step, gauss_points:
        Integration controls (m, count); the defaults are converged.

    Equations, sources and conventions: see the module docstring. ValueError names the field
    and the limit for bad input (toe above top, diameter <= 0, toe outside the ground model,
    NaN or inf).
    """
    diameter, top_level, rules = _check_common(ground, diameter, top_level, pile_type, rules)
    max_step, gauss_points = _check_integration(max_step, gauss_points)
    toe_level = number("toe_level", toe_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
    _check_toes(ground, top_level, np.array([toe_level]), "toe_level")
    toe_level = max(toe_level, ground.bottom)
    prof = shaft_profile(ground, diameter, top_level, rules, toe_level, max_step, gauss_points)

    # Shaft rows: cut the shaft at layer boundaries and at the bottom of the exclusion zone.
    cuts = [prof.z_start, toe_level, prof.excl_bottom] + list(prof.tops[1:])
    cuts = sorted({c for c in cuts if toe_level <= c <= prof.z_start}, reverse=True)
    # merge cuts closer than a nanometre so every row has a real length (forces telescope)
    cuts = [c for k, c in enumerate(cuts) if k == 0 or k == len(cuts) - 1 or cuts[k - 1] - c > 1e-9]
    if len(cuts) > 2 and cuts[-2] - cuts[-1] <= 1e-9:
        del cuts[-2]
    cuts_arr = np.array(cuts)
    cum = prof.shaft_to(cuts_arr)
    rows = []
    for k in range(len(cuts) - 1):
        a, b = cuts[k], cuts[k + 1]
        li = int(prof.layer_index(np.array([0.5 * (a + b)]))[0])
        layer = ground.layers[li]
        code = int(prof.code[li])
        if code == _IGNORE:
            method = "ignored"
        elif b >= prof.excl_bottom:
            method = "excluded"
        else:
            method = ("alpha", "beta", "report")[code - 1]
        force = float(cum[k + 1] - cum[k])
        rows.append(ShaftRow(float(a), float(b), li, layer.material, method,
                             float(force / (prof.perim * (a - b))), force))
    shaft = float(cum[-1])
    q, bcode, bli = prof.base_pressure(np.array([toe_level]))
    q_b, base_code, base_li = float(q[0]), int(bcode[0]), int(bli[0])
    base = q_b * pile_area(diameter)
    ultimate = shaft + base
    design = float(_design(shaft, base, rules))
    base_layer = ground.layers[base_li]
    reason = (f"Design {design:.0f} kN ({_approach_text(rules)}) from shaft {shaft:.0f} kN and "
              f"base {base:.0f} kN ({_BASE_METHODS[base_code]}, {q_b:.0f} kPa in "
              f"{base_layer.material} layer {base_li}) for D {diameter:g} m, toe {toe_level:.2f} m.")
    return AxialResult(diameter, top_level, toe_level, pile_type, shaft, base, ultimate, design,
                       q_b, _BASE_METHODS[base_code], base_li, rules.design_approach,
                       tuple(rows), reason)


def pile_weight(ground: GroundModel, diameter: float, head_level: float, toe_level: float,
                rules: Rules | None = None) -> float:
    """Effective weight W' (kN) of a concrete pile from ``head_level`` down to ``toe_level`` (m).

    W' = A [gamma_c h_above + (gamma_c - gamma_w) h_below], A = pi D^2 / 4, split at the ground
    model's water level (buoyant below it). gamma_c = ``concrete_unit_weight`` (24 kN/m3,
    common practice).
    """
    rules = rules or Rules()
    length = head_level - toe_level
    below = max(0.0, min(head_level, ground.water_level) - toe_level)
    above = length - below
    return pile_area(diameter) * (rules.concrete_unit_weight * above
                                  + (rules.concrete_unit_weight - rules.gamma_w) * below)


def tension_design(shaft: float, weight: float, rules: Rules) -> float:
    """Design uplift resistance T_d (kN) from the compression shaft Q_s and the pile's effective
    weight W' (kN): the one formula of design_core.

    Working stress T_d = eta Q_s / ``fs_tension`` + ``pile_weight_factor`` W'; limit state
    T_d = phi_g eta Q_s + ``pile_weight_factor`` W', eta = ``tension_fraction`` (common practice,
    0.75; see ``tension_capacity``).
    """
    shaft_t = rules.tension_fraction * shaft
    if rules.design_approach == "limit_state":
        return rules.phi_g * shaft_t + rules.pile_weight_factor * weight
    return shaft_t / rules.fs_tension + rules.pile_weight_factor * weight


def _kn(x: float) -> str:
    """A force for a reason: whole kN with thousands separated (1,587 kN)."""
    return f"{x:,.0f} kN"


def design_words(shaft: float, base: float, rules: Rules) -> str:
    """How the design compression resistance was found from Q_s and Q_b (kN), with the
    factors, so a reader can rebuild it: "min(Q_u 1,234 kN / 2.5, shaft 1,000 kN / 1.5 +
    base 234 kN / 3)" or "0.55 x (shaft 1,000 kN + base 234 kN)"."""
    if rules.design_approach == "limit_state":
        return f"phi_g {rules.phi_g:g} x (shaft {_kn(shaft)} + base {_kn(base)})"
    return (f"min(Q_u {_kn(shaft + base)} / {rules.fs_global:g}, shaft {_kn(shaft)} / "
            f"{rules.fs_shaft:g} + base {_kn(base)} / {rules.fs_base:g})")


def tension_words(shaft: float, weight: float, rules: Rules) -> str:
    """How ``tension_design`` was found, with its factors: "0.75 x shaft 1,587 kN / FS 3 +
    0.9 x pile weight 86 kN" (working stress) or "phi_g 0.55 x 0.75 x shaft 1,587 kN + 0.9 x
    pile weight 86 kN" (limit state)."""
    eta, w = rules.tension_fraction, rules.pile_weight_factor
    if rules.design_approach == "limit_state":
        part = f"phi_g {rules.phi_g:g} x {eta:g} x shaft {_kn(shaft)}"
    else:
        part = f"{eta:g} x shaft {_kn(shaft)} / FS {rules.fs_tension:g}"
    return f"{part} + {w:g} x pile weight {_kn(weight)}"


def tension_capacity(ground: GroundModel, diameter: float, top_level: float, toe_level: float,
                     pile_type: str = "bored", rules: Rules | None = None, *,
                     cutoff_level: float | None = None) -> TensionResult:
    """Uplift resistance of a single pile (kN).

    T_ult = eta Q_s + W', eta = ``tension_fraction`` (0.75, common practice),
    Q_s the compression shaft of ``axial_capacity`` (same inputs), W' the pile's effective
    weight (``pile_weight``) from ``cutoff_level`` (default ``top_level``) to the toe.

    Design: working stress T_d = eta Q_s / ``fs_tension`` + ``pile_weight_factor`` W';
    limit state T_d = phi_g eta Q_s + ``pile_weight_factor`` W' (the weight is a favourable
    permanent action, gamma_G,inf = 0.9 by default).
    """
    comp = axial_capacity(ground, diameter, top_level, toe_level, pile_type, rules)
    rules = rules or Rules()
    head = comp.top_level if cutoff_level is None else number(
        "cutoff_level", cutoff_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
    if head <= comp.toe_level:
        raise ValueError(f"cutoff_level ({head:g} m) must be above toe_level ({comp.toe_level:g} m)")
    eta = rules.tension_fraction
    shaft_t = eta * comp.shaft
    weight = pile_weight(ground, comp.diameter, head, comp.toe_level, rules)
    ultimate = shaft_t + weight
    design = tension_design(comp.shaft, weight, rules)
    if rules.design_approach == "limit_state":
        how = f"limit state, phi_g {rules.phi_g:g}"
    else:
        how = f"working stress, FS {rules.fs_tension:g}"
    reason = (f"Design uplift {design:.0f} kN ({how}) from {eta:g} x shaft {comp.shaft:.0f} kN and "
              f"{rules.pile_weight_factor:g} x pile weight {weight:.0f} kN.")
    return TensionResult(comp.diameter, comp.top_level, comp.toe_level, pile_type, comp.shaft, eta,
                         shaft_t, weight, ultimate, float(design), rules.design_approach, reason)


def capacity_curve(ground: GroundModel, diameter: float, top_level: float, toe_levels: Any,
                   pile_type: str = "bored", rules: Rules | None = None, *,
                   max_step: float = MAX_STEP_M, gauss_points: int = GAUSS_POINTS) -> CapacityCurve:
    """Shaft, base, ultimate and design resistance (kN) at every level of ``toe_levels`` (m).

    Vectorised: the shaft grid is built once down to the deepest toe and each toe reads the
    cumulative shaft there, with no Python loop per level. Same grid, equations and rules as
    ``axial_capacity`` (which it matches to rounding). ``toe_levels`` is a non-empty 1-D array
    of finite levels below ``top_level`` and within the ground model, in any order.
    """
    diameter, top_level, rules = _check_common(ground, diameter, top_level, pile_type, rules)
    max_step, gauss_points = _check_integration(max_step, gauss_points)
    try:
        toes = np.array(toe_levels, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"toe_levels must be numbers: {exc}") from None
    if toes.ndim != 1 or toes.size == 0:
        raise ValueError("toe_levels must be a non-empty 1-D array of levels (m)")
    _check_toes(ground, top_level, toes, "toe_levels")
    toes = np.maximum(toes, ground.bottom)
    prof = shaft_profile(ground, diameter, top_level, rules, float(toes.min()), max_step,
                         gauss_points)
    shaft = prof.shaft_to(toes)
    q, _, _ = prof.base_pressure(toes)
    base = q * pile_area(diameter)
    ultimate = shaft + base
    design = np.asarray(_design(shaft, base, rules), dtype=float)
    for arr in (toes, shaft, base, ultimate, design):
        arr.setflags(write=False)
    reason = (f"Design resistance against toe level for D {diameter:g} m from top level "
              f"{top_level:g} m ({_approach_text(rules)}).")
    return CapacityCurve(toes, shaft, base, ultimate, design, diameter, top_level, pile_type,
                         rules.design_approach, reason, layer_steps(ground, toes))


def layer_steps(ground: GroundModel, levels) -> tuple[float, ...]:
    """The layer boundaries (m, top down) within the span of ``levels``: where the base
    resistance of a toe may jump (the base takes the layer holding the toe, at a boundary the
    layer below)."""
    levels = np.asarray(levels, dtype=float)
    if levels.size == 0:
        return ()
    lo, hi = float(levels.min()), float(levels.max())
    return tuple(float(layer.bottom) for layer in ground.layers[:-1]
                 if lo - LEVEL_TOL_M <= layer.bottom <= hi + LEVEL_TOL_M)


CURVE_STEP_M = 0.25        # spacing of the standard capacity-curve grid
CURVE_MAX_POINTS = 400     # the grid is coarser than CURVE_STEP_M in a ground model deeper than this
CURVE_BELOW_TOE_M = 5.0    # a pile's curve runs this far below the deepest of its toes
STEP_ABOVE_M = 0.001       # the point just above a layer boundary on a curve


def curve_levels(ground: GroundModel, top_level: float, step: float = CURVE_STEP_M,
                 max_points: int = CURVE_MAX_POINTS) -> np.ndarray:
    """The standard toe levels of a capacity curve (m, top down): from 0.1 m below the top
    (``top_level`` or the ground surface, whichever is lower) down to the bottom of the ground
    model, equally spaced at ``step`` (m) or wider when that would pass ``max_points``, and
    every layer boundary in between both at the boundary and ``STEP_ABOVE_M`` above it (the
    two sides of a jump in base resistance). Empty when the ground model leaves no room below
    the top. The one curve grid of design_core."""
    step = number("step", step, 0.01, 10.0)
    start = min(top_level, ground.top) - 0.1
    bottom = ground.bottom
    if start <= bottom:
        return np.zeros(0)
    n = int(min(max_points, max(2, math.ceil((start - bottom) / step) + 1)))
    grid = np.linspace(start, bottom, n)
    # each layer boundary twice: at it (the layer below gives the base) and STEP_ABOVE_M above
    # it (the layer above), so a reader of the curve sees the jump and never reads across it;
    # grid points within a hair of either are left out
    pairs = [(b, b + STEP_ABOVE_M) for b in (layer.bottom for layer in ground.layers[:-1])
             if bottom < b < start - STEP_ABOVE_M]
    extra = np.array([z for pair in pairs for z in pair])
    if extra.size:
        near = np.min(np.abs(grid[:, None] - extra[None, :]), axis=1) <= 1e-3 * STEP_ABOVE_M
        grid = np.concatenate([grid[~near], extra])
    return np.unique(grid)[::-1]


_CURVE_ROWS = ("toe_levels", "shaft", "base", "ultimate", "design")


def _rows(curve: CapacityCurve) -> np.ndarray:
    """The curve's arrays as the rows of one matrix (levels, shaft, base, ultimate, design)."""
    return np.vstack([np.asarray(getattr(curve, name)) for name in _CURVE_ROWS])


def _points(key, ground, diameter, top_level, pile_type, rules, levels) -> np.ndarray:
    """The rows of ``_rows`` at ``levels``: read from the points kept by
    ``prime_capacity_points`` when all are there, else worked out (``capacity_curve``)."""
    kept = MEMO.points.find(key)
    if kept is not None:
        at = [kept[0].get(t) for t in levels]
        if all(i is not None for i in at):
            return kept[1][:, at]
    return _rows(capacity_curve(ground, diameter, top_level, levels, pile_type, rules))


def prime_capacity_points(ground: GroundModel, diameter: float, top_level: float,
                          pile_type: str, rules: Rules, toes, step: float = CURVE_STEP_M) -> None:
    """Work out the capacity at many toe levels (m) of one pile geometry in one call and keep
    them (``MEMO.points``) for ``pile_capacity_curve``: the same values as one by one, sooner
    for a project's many piles."""
    levels = sorted({max(float(t), ground.bottom) for t in toes
                     if ground.bottom - LEVEL_TOL_M <= t < min(top_level, ground.top)})
    key = (ground, float(diameter), float(top_level), pile_type, rules, float(step))
    grid = curve_levels(ground, top_level, step)
    if not levels or grid.size == 0:
        return
    # one evaluation for the grid and the toes; the grid part is kept as pile_capacity_curve
    # would keep it (the same values: every level is worked out on its own)
    every = np.concatenate([grid, levels])
    curve = capacity_curve(ground, diameter, top_level, every, pile_type, rules)
    rows = _rows(curve)
    if MEMO.curves.find(key) is None:
        MEMO.curves.put(key, _grid_entry(rows[:, :grid.size], curve))
    index = {float(t): grid.size + i for i, t in enumerate(levels)}
    MEMO.points.put(key, (index, rows))


def _grid_entry(rows: np.ndarray, like: CapacityCurve) -> tuple:
    """What ``MEMO.curves`` keeps for one geometry: the grid curve, its negated levels (list,
    ascending), its levels (set) and its rows (``_rows``)."""
    rows = np.array(rows)
    rows.setflags(write=False)
    curve = CapacityCurve(*rows, like.diameter, like.top_level, like.pile_type,
                          like.design_approach, like.reason, like.steps)
    levels = [float(t) for t in rows[0]]
    return curve, [-t for t in levels], set(levels), rows


def pile_capacity_curve(ground: GroundModel, diameter: float, top_level: float,
                        pile_type: str = "bored", rules: Rules | None = None, toes=(),
                        step: float = CURVE_STEP_M,
                        below_toe_m: float | None = CURVE_BELOW_TOE_M) -> CapacityCurve:
    """The capacity curve of one pile: the standard grid (``curve_levels``) and the ``toes``
    given (m; those outside the ground model under the top are left out), top down.

    With ``below_toe_m`` the grid stops that far (m) below the deepest toe given (or at the
    bottom of the ground model); None runs it to the bottom. Every value is the one
    ``capacity_curve`` gives at that level; the grid part is kept in ``MEMO.curves`` for the
    next pile of the same geometry. ValueError when the ground model leaves no room.
    """
    rules = Rules() if rules is None else rules
    key = (ground, float(diameter), float(top_level), pile_type, rules, float(step))

    def make():
        levels = curve_levels(ground, top_level, step)
        if levels.size == 0:
            raise ValueError("The ground model leaves no room for the pile below its cut-off")
        curve = capacity_curve(ground, diameter, top_level, levels, pile_type, rules)
        return _grid_entry(_rows(curve), curve)

    grid, neg, known, mat = MEMO.curves.get(key, make)
    upper = min(top_level, ground.top)
    wanted = sorted({max(float(t), ground.bottom) for t in toes
                     if ground.bottom - LEVEL_TOL_M <= t < upper}, reverse=True)
    n = len(neg)
    if wanted and below_toe_m is not None:   # the grid points at or above the limit
        n = bisect.bisect_right(neg, -max(ground.bottom, wanted[-1] - below_toe_m))
    extra = [t for t in wanted if t not in known]
    if not extra and n == len(neg):
        return grid
    if extra:
        more = _points(key, ground, diameter, top_level, pile_type, rules, extra)
        pos = [bisect.bisect_left(neg, -t, 0, n) + k for k, t in enumerate(extra)]
        total = n + len(extra)
        mask = np.ones(total, dtype=bool)
        mask[pos] = False
        out = np.empty((len(_CURVE_ROWS), total))
        out[:, mask] = mat[:, :n]
        out[:, pos] = more
    else:
        out = mat[:, :n].copy()
    out.setflags(write=False)
    return CapacityCurve(*out, grid.diameter, grid.top_level, grid.pile_type,
                         grid.design_approach, grid.reason, grid.steps)


def required_toe_level(curve: CapacityCurve, load: float) -> float | None:
    """Highest toe level (m) whose design resistance is at least ``load`` (kN), or None.

    Walking down the curve from its highest point, the first point k where the design
    resistance reaches ``load``. Between that point and the one above it the level is
    interpolated linearly only when no layer boundary (``curve.steps``, where the base
    resistance jumps) lies between them; across a boundary the answer is point k itself: the
    boundary when the curve carries it (``curve_levels`` puts a point at every boundary and one
    just above it), else the deeper point, erring deep. Within one layer the chord differs from
    the resistance by at most h^2 R''/8 over a step h (under a millimetre of level on the
    0.25 m grid). When the curve dips again deeper down (a weaker layer below), the pile must
    still be checked at its own toe: use ``CapacityCurve.design_at`` or ``axial_capacity``.
    """
    if not isinstance(curve, CapacityCurve):
        raise ValueError(f"curve must be a CapacityCurve, got {type(curve).__name__}")
    load = number("load", load, 0.0)
    order = np.argsort(-curve.toe_levels, kind="stable")
    z = curve.toe_levels[order]
    d = curve.design[order]
    ok = d >= load
    if not ok.any():
        return None
    k = int(np.argmax(ok))
    if k == 0:
        return float(z[0])
    z0, z1, d0, d1 = z[k - 1], z[k], d[k - 1], d[k]
    if any(z1 - LEVEL_TOL_M <= s < z0 for s in curve.steps):
        return float(z1)
    return float(z0 + (load - d0) * (z1 - z0) / (d1 - d0))
