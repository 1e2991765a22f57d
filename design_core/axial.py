"""Axial capacity of a single pile: shaft, base, design resistance, tension, capacity curve.

Units: levels and lengths in m (levels are reduced levels, higher is up), diameter in m,
stresses and unit resistances in kPa, forces in kN, angles in degrees.

Method (PRODUCT.md sections 5-6; REFERENCES.md sections 1-5)
-------------------------------------------------------------
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

import math
import threading
from collections import OrderedDict
from dataclasses import asdict, dataclass, field
from functools import lru_cache
from typing import Any

import numpy as np

from design_core.ground import LEVEL_TOL_M, GroundModel
from design_core.validate import number
from design_core.inputs import LEVEL_LIMIT_M, PILE_TYPES
from design_core.rules import Rules

GAUSS_POINTS = 5
MAX_STEP_M = 0.5
DIAMETER_MAX_M = 5.0

SHAFT_METHODS = ("alpha", "beta", "report", "ignored", "excluded")

# Method codes per layer (shaft) and per toe (base).
_IGNORE, _ALPHA, _BETA, _REPORT = 0, 1, 2, 3
_BASE_NONE, _BASE_NC, _BASE_NQ, _BASE_REPORT = 0, 1, 2, 3
_BASE_METHODS = {_BASE_NONE: "ignored", _BASE_NC: "Nc cu", _BASE_NQ: "Nq sigma'v",
                 _BASE_REPORT: "report"}


# --------------------------------------------------------------------------------------------
# Point formulas (vectorised)
# --------------------------------------------------------------------------------------------

def alpha_api(psi: float | np.ndarray, alpha_max: float = 1.0) -> float | np.ndarray:
    """Adhesion factor alpha of the API rule for psi = c_u / sigma'_v (dimensionless).

    alpha = 0.5 psi^-0.5 for psi <= 1, 0.5 psi^-0.25 for psi > 1, alpha <= alpha_max
    (API RP 2A-WSD 21st ed. 2000, 6.4.2; API RP 2GEO 2011; Randolph & Murphy 1985).
    Valid for psi > 0.
    """
    psi = np.asarray(psi, dtype=float)
    if np.any(~np.isfinite(psi)) or np.any(psi <= 0.0):
        raise ValueError("psi (c_u / sigma'_v) must be a finite number greater than 0")
    alpha = np.minimum(np.where(psi <= 1.0, 0.5 * psi ** -0.5, 0.5 * psi ** -0.25), alpha_max)
    return float(alpha) if alpha.ndim == 0 else alpha


def alpha_factor(cu: float | np.ndarray, sigma_v_eff: float | np.ndarray,
                 rules: Rules | None = None) -> float | np.ndarray:
    """Adhesion factor alpha for c_u (kPa) and sigma'_v (kPa) by the rules' ``alpha_rule``.

    "api": see ``alpha_api``. "power": alpha = C (sigma'_v / c_u)^n with C = ``alpha_c`` and
    n = ``alpha_n`` (an engineer's rule, not a named published method; REFERENCES.md 2b).
    Both capped at ``alpha_max``. Valid for c_u > 0 and sigma'_v > 0 (kPa).
    """
    rules = rules or Rules()
    cu = np.asarray(cu, dtype=float)
    sig = np.asarray(sigma_v_eff, dtype=float)
    if np.any(~np.isfinite(cu)) or np.any(cu <= 0.0):
        raise ValueError("cu must be a finite number greater than 0 kPa")
    if np.any(~np.isfinite(sig)) or np.any(sig <= 0.0):
        raise ValueError("sigma_v_eff must be a finite number greater than 0 kPa")
    alpha = _f_alpha(cu, sig, rules) / cu
    return float(alpha) if alpha.ndim == 0 else alpha


def _f_alpha(cu: np.ndarray, sig: np.ndarray, rules: Rules) -> np.ndarray:
    """Unit shaft friction alpha c_u (kPa), written without dividing by sigma'_v (may be 0)."""
    if rules.alpha_rule == "api":
        # alpha c_u = 0.5 sqrt(c_u sigma'_v) for psi <= 1; 0.5 c_u^0.75 sigma'_v^0.25 for psi > 1
        f = np.where(cu <= sig, 0.5 * np.sqrt(cu * sig), 0.5 * cu ** 0.75 * sig ** 0.25)
    else:
        f = rules.alpha_c * sig ** rules.alpha_n * cu ** (1.0 - rules.alpha_n)
    return np.minimum(f, rules.alpha_max * cu)


def _alpha_kinks(rules: Rules) -> list[float]:
    """Values of psi = c_u / sigma'_v where the alpha rule has a kink (branch change or cap)."""
    amax = rules.alpha_max
    if rules.alpha_rule == "api":
        return [1.0, (0.5 / amax) ** 2, (0.5 / amax) ** 4]
    if rules.alpha_n > 0.0:
        return [(rules.alpha_c / amax) ** (1.0 / rules.alpha_n)]
    return []


def earth_pressure_k(phi: float | np.ndarray, rules: Rules | None = None) -> float | np.ndarray:
    """Earth pressure coefficient K on the shaft: 1 - sin(phi') (Jaky 1944) or ``k_fixed``.

    phi' in degrees (10-50).
    """
    rules = rules or Rules()
    phi = np.asarray(phi, dtype=float)
    k = 1.0 - np.sin(np.radians(phi)) if rules.k_rule == "jaky" else np.full_like(phi, rules.k_fixed)
    return float(k) if k.ndim == 0 else k


def beta_factor(phi: float | np.ndarray, rules: Rules | None = None) -> float | np.ndarray:
    """Shaft factor beta = K tan(delta), delta = ``delta_over_phi`` x phi' (phi' in degrees).

    f_s = beta sigma'_v (beta method; K by ``earth_pressure_k``). REFERENCES.md section 3.
    """
    rules = rules or Rules()
    phi = np.asarray(phi, dtype=float)
    beta = np.asarray(earth_pressure_k(phi, rules)) * np.tan(np.radians(rules.delta_over_phi * phi))
    return float(beta) if beta.ndim == 0 else beta


def n_q(phi: float | np.ndarray, rules: Rules | None = None) -> float | np.ndarray:
    """Base bearing factor N_q for phi' (degrees) by the rules' ``nq_rule``.

    "reissner": N_q = e^(pi tan phi') tan^2(45 + phi'/2) (Reissner 1924 / Prandtl, a closed
    form; lower than the deep-pile charts of Berezantzev 1961 or Meyerhof 1976). "fixed":
    ``nq_fixed``.
    """
    rules = rules or Rules()
    phi = np.asarray(phi, dtype=float)
    if rules.nq_rule == "fixed":
        out = np.full_like(phi, rules.nq_fixed)
    else:
        t = np.radians(phi)
        out = np.exp(math.pi * np.tan(t)) * np.tan(math.pi / 4 + t / 2) ** 2
    return float(out) if out.ndim == 0 else out


def pile_area(diameter: float) -> float:
    """Cross-section area pi D^2 / 4 (m2) of a circular pile of diameter D (m)."""
    return math.pi * diameter * diameter / 4.0


# --------------------------------------------------------------------------------------------
# Results
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class ShaftRow:
    """Shaft resistance over one stretch of one layer.

    ``from_level``/``to_level`` (m) bound the stretch; ``method`` is one of "alpha", "beta",
    "report", "ignored", "excluded"; ``mean_fs`` the mean ultimate unit friction (kPa) and
    ``force`` the ultimate shaft force (kN) of the stretch.
    """

    from_level: float
    to_level: float
    layer_index: int
    material: str
    method: str
    mean_fs: float
    force: float

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


@dataclass(frozen=True)
class AxialResult:
    """Compression resistance of one pile (kN) with its make-up.

    ``shaft``, ``base``, ``ultimate`` (= shaft + base) and ``design`` in kN; ``base_pressure``
    the ultimate unit base resistance q_b (kPa) from ``base_method`` in layer
    ``base_layer_index``; ``layers`` the shaft rows top down (their forces sum to ``shaft``);
    ``reason`` one line saying how ``design`` was found.
    """

    diameter: float
    top_level: float
    toe_level: float
    pile_type: str
    shaft: float
    base: float
    ultimate: float
    design: float
    base_pressure: float
    base_method: str
    base_layer_index: int
    design_approach: str
    layers: tuple[ShaftRow, ...]
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict (rows as a list of dicts)."""
        out = asdict(self)
        out["layers"] = [row.to_dict() for row in self.layers]
        return out


@dataclass(frozen=True)
class TensionResult:
    """Uplift resistance of one pile (kN).

    ``shaft_compression`` is the compression shaft Q_s, ``shaft_tension`` = ``tension_fraction``
    x Q_s, ``weight`` the pile's effective weight W' (buoyant below water), ``ultimate`` =
    shaft_tension + weight, and ``design`` the factored resistance (see ``tension_capacity``).
    """

    diameter: float
    top_level: float
    toe_level: float
    pile_type: str
    shaft_compression: float
    tension_fraction: float
    shaft_tension: float
    weight: float
    ultimate: float
    design: float
    design_approach: str
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


@dataclass(frozen=True, eq=False)
class CapacityCurve:
    """Resistance against toe level for one pile (arrays in kN, read-only, toe levels in m).

    ``toe_levels`` in the order given; ``shaft``, ``base``, ``ultimate`` and ``design`` match
    them element by element.
    """

    toe_levels: np.ndarray
    shaft: np.ndarray
    base: np.ndarray
    ultimate: np.ndarray
    design: np.ndarray
    diameter: float
    top_level: float
    pile_type: str
    design_approach: str
    reason: str = field(default="")

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict with the arrays as lists (for the tablet's cache)."""
        out: dict[str, Any] = {}
        for name in ("toe_levels", "shaft", "base", "ultimate", "design"):
            out[name] = [float(x) for x in getattr(self, name)]
        out.update(diameter=self.diameter, top_level=self.top_level, pile_type=self.pile_type,
                   design_approach=self.design_approach, reason=self.reason)
        return out

    def design_at(self, level: float) -> float:
        """Design resistance (kN) at ``level`` (m), linear between curve points.

        ValueError when ``level`` lies outside the curve's toe levels.
        """
        level = number("level", level)
        order = np.argsort(self.toe_levels)
        z = self.toe_levels[order]
        if not z[0] - LEVEL_TOL_M <= level <= z[-1] + LEVEL_TOL_M:
            raise ValueError(f"level ({level:g} m) is outside the curve ({z[0]:g} to {z[-1]:g} m)")
        return float(np.interp(level, z, self.design[order]))


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


# --------------------------------------------------------------------------------------------
# The shaft profile: a fixed grid of Gauss-Legendre pieces and the cumulative shaft force
# --------------------------------------------------------------------------------------------

@lru_cache(maxsize=8)
def _gauss(n: int) -> tuple[np.ndarray, np.ndarray]:
    """Gauss nodes on [0, 1] and the matrix from f at them to antiderivative coefficients.

    With a = A f, the integral from 0 to s of the interpolating polynomial is
    sum_j a_j s^(j+1); at s = 1 it is the Gauss-Legendre rule.
    """
    x, _ = np.polynomial.legendre.leggauss(n)
    s = (x + 1.0) / 2.0
    vander = s[:, None] ** np.arange(n)[None, :]
    a = np.linalg.inv(vander) / (np.arange(n) + 1.0)[:, None]
    s.setflags(write=False)
    a.setflags(write=False)
    return s, a


class _Profile:
    """Layer data as arrays, the sigma'_v profile and the shaft grid for one pile geometry."""

    def __init__(self, ground: GroundModel, diameter: float, top_level: float, rules: Rules,
                 deepest: float, max_step: float = MAX_STEP_M, gauss_points: int = GAUSS_POINTS):
        self.ground, self.diameter, self.top_level, self.rules = ground, diameter, top_level, rules
        layers = ground.layers
        self.tops = np.array([ly.top for ly in layers])
        self.bots = np.array([ly.bottom for ly in layers])
        self.cu_top = np.array([ly.cu if ly.cu is not None else 0.0 for ly in layers])
        self.cu_bot = np.array([ly.cu_bottom if ly.cu_bottom is not None else (ly.cu or 0.0)
                                for ly in layers])
        self.code = np.array([
            _IGNORE if ly.material == "ignore" else _REPORT if ly.shaft_friction is not None
            else _ALPHA if ly.material == "cohesive" else _BETA for ly in layers])
        self.report_f = np.array([ly.shaft_friction or 0.0 for ly in layers])
        self.beta = np.array([beta_factor(ly.phi, rules) if ly.phi is not None else 0.0
                              for ly in layers])
        self.base_code = np.array([
            _BASE_NONE if ly.material == "ignore" else _BASE_REPORT if ly.base_pressure is not None
            else _BASE_NC if ly.material == "cohesive" else _BASE_NQ for ly in layers])
        self.base_report = np.array([ly.base_pressure or 0.0 for ly in layers])
        self.nq = np.array([n_q(ly.phi, rules) if ly.phi is not None else 0.0 for ly in layers])
        self.neg_bots = -self.bots
        self.zs, self.ss = ground.stress_profile(rules.gamma_w)
        zc = rules.critical_depth_diameters * diameter
        self.z_crit = ground.top - zc if zc > 0.0 else -math.inf
        self.excl_bottom = top_level - rules.exclusion_diameters * diameter
        self.z_start = min(top_level, ground.top)
        self._build_grid(deepest, max_step, gauss_points)

    # -- point values -------------------------------------------------------------------------
    def layer_index(self, z: np.ndarray) -> np.ndarray:
        """Layer holding each level (at a boundary, the layer below)."""
        idx = np.searchsorted(self.neg_bots, -z, side="right")
        return np.minimum(idx, len(self.tops) - 1)

    def sigma(self, z: np.ndarray) -> np.ndarray:
        """sigma'_v (kPa), not capped."""
        return np.interp(z, self.zs, self.ss)

    def sigma_capped(self, z: np.ndarray) -> np.ndarray:
        """sigma'_v (kPa) held at its value at the critical depth below it."""
        return np.interp(np.maximum(z, self.z_crit), self.zs, self.ss)

    def cu(self, z: np.ndarray, li: np.ndarray) -> np.ndarray:
        """c_u (kPa) at each level in layer ``li`` (0 where the layer has none)."""
        frac = np.clip((self.tops[li] - z) / (self.tops[li] - self.bots[li]), 0.0, 1.0)
        return self.cu_top[li] + (self.cu_bot[li] - self.cu_top[li]) * frac

    def friction(self, z: np.ndarray, li: np.ndarray) -> np.ndarray:
        """Ultimate unit shaft friction f_s (kPa) at levels ``z`` in layers ``li``."""
        code = self.code[li]
        f = np.zeros_like(z)
        m = code == _ALPHA
        if m.any():
            f[m] = _f_alpha(self.cu(z[m], li[m]), self.sigma(z[m]), self.rules)
        m = code == _BETA
        if m.any():
            f[m] = self.beta[li[m]] * self.sigma_capped(z[m])
        m = code == _REPORT
        if m.any():
            f[m] = self.report_f[li[m]]
        f[(z > self.excl_bottom) | (z > self.z_start)] = 0.0
        return f

    def base_pressure(self, toes: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Ultimate base pressure q_b (kPa), its method code and layer index at each toe."""
        li = self.layer_index(toes)
        code = self.base_code[li]
        q = np.zeros_like(toes)
        m = code == _BASE_NC
        if m.any():
            q[m] = self.rules.nc * self.cu(toes[m], li[m])
        m = code == _BASE_NQ
        if m.any():
            q[m] = np.minimum(self.nq[li[m]] * self.sigma_capped(toes[m]),
                              self.rules.base_pressure_limit_kpa)
        m = code == _BASE_REPORT
        if m.any():
            q[m] = self.base_report[li[m]]
        return q, code, li

    # -- the grid -----------------------------------------------------------------------------
    def _build_grid(self, deepest: float, max_step: float, gauss_points: int) -> None:
        """Cut [deepest stretch end, z_start] into smooth pieces; cumulative force at their tops."""
        ground = self.ground
        z0 = self.z_start
        cand = [z0, ground.bottom, ground.water_level, self.excl_bottom, self.z_crit]
        cand += list(self.tops[1:])
        brk = np.unique(np.array([c for c in cand if ground.bottom <= c <= z0]))[::-1]
        # keep only down to the first breakpoint at or below the deepest toe asked for
        last = int(np.searchsorted(-brk, -deepest, side="left"))
        brk = brk[: max(1, min(last, len(brk) - 1)) + 1]  # at least one stretch
        # in alpha layers add the levels where psi meets a kink of the alpha rule
        kinks = _alpha_kinks(self.rules)
        extra = []
        if kinks and np.any(self.code == _ALPHA):
            a, b = brk[:-1], brk[1:]
            li = self.layer_index(0.5 * (a + b))
            sel = self.code[li] == _ALPHA
            a, b, li = a[sel], b[sel], li[sel]
            if a.size:
                cu_a, cu_b = self.cu(a, li), self.cu(b, li)
                s_a, s_b = self.sigma(a), self.sigma(b)
                for psi in kinks:
                    ga, gb = cu_a - psi * s_a, cu_b - psi * s_b
                    cross = ga * gb < 0.0
                    if cross.any():
                        t = ga[cross] / (ga[cross] - gb[cross])
                        extra.append(a[cross] - t * (a[cross] - b[cross]))
        # f_s ~ sigma'_v^0.25 where sigma'_v = 0 (the ground surface) in an alpha layer: grade the
        # pieces there geometrically so the quadrature keeps its accuracy next to the root
        if (self.code[0] == _ALPHA and brk.size > 1 and self.sigma(np.array([z0]))[0] <= 0.0
                and math.isfinite(max_step)):
            first = min(max_step, brk[0] - brk[1])
            extra.append(z0 - first * 4.0 ** -np.arange(1, 8))
        if extra:
            brk = np.unique(np.concatenate([brk] + extra))[::-1]
        # drop stretches shorter than the level tolerance
        keep = np.concatenate([[True], -np.diff(brk) > LEVEL_TOL_M * 1e-3])
        brk = brk[keep]
        seg_len = -np.diff(brk)
        n_sub = np.maximum(1, np.ceil(seg_len / max_step - 1e-9).astype(int))
        h = np.repeat(seg_len / n_sub, n_sub)
        first = np.repeat(brk[:-1], n_sub)
        k = np.arange(h.size) - np.repeat(np.cumsum(n_sub) - n_sub, n_sub)
        tops = first - k * h
        self.piece_top = tops
        self.piece_bot = np.append(tops[1:], brk[-1])
        self.piece_h = self.piece_top - self.piece_bot
        s, amat = _gauss(gauss_points)
        z = self.piece_top[:, None] - s[None, :] * self.piece_h[:, None]
        li = np.repeat(self.layer_index(0.5 * (self.piece_top + self.piece_bot)), gauss_points)
        f = self.friction(z.ravel(), li).reshape(z.shape)
        self.coef = f @ amat.T  # integral from the piece top to s: sum_j coef_j s^(j+1) (kPa)
        self.perim = math.pi * self.diameter
        force = self.perim * self.piece_h * self.coef.sum(axis=1)
        self.cum_top = np.concatenate([[0.0], np.cumsum(force)[:-1]])
        self.neg_piece_bot = -self.piece_bot
        for arr in (self.piece_top, self.piece_bot, self.piece_h, self.coef, self.cum_top,
                    self.neg_piece_bot):
            arr.setflags(write=False)  # a profile may be shared between callers (shaft_profile)

    def shaft_to(self, levels: np.ndarray) -> np.ndarray:
        """Ultimate shaft force (kN) from the top of the shaft down to each level."""
        levels = np.minimum(levels, self.z_start)
        i = np.minimum(np.searchsorted(self.neg_piece_bot, -levels, side="right"),
                       self.piece_top.size - 1)
        s = np.clip((self.piece_top[i] - levels) / self.piece_h[i], 0.0, 1.0)
        c = self.coef[i]
        acc = c[:, -1].copy()
        for j in range(c.shape[1] - 2, -1, -1):  # Horner over the polynomial's few terms
            acc = acc * s + c[:, j]
        return self.cum_top[i] + self.perim * self.piece_h[i] * s * acc


PROFILE_CACHE_SIZE = 128
_PROFILES: OrderedDict = OrderedDict()
_PROFILES_LOCK = threading.Lock()


def shaft_profile(ground: GroundModel, diameter: float, top_level: float, rules: Rules,
                  deepest: float, max_step: float = MAX_STEP_M,
                  gauss_points: int = GAUSS_POINTS) -> _Profile:
    """The shaft profile of one pile geometry, good for every toe down to ``deepest`` (m).

    Calls with equal ground model, diameter (m), top level (m), rules and integration controls
    share one profile (the last ``PROFILE_CACHE_SIZE`` kept) while it reaches deep enough, and
    a deeper call builds it again: the pieces above any toe are the same wherever the grid
    stops below it, so a shared profile gives the numbers of one built for the call. A
    re-saved record, or piles of one diameter and cut-off in one ground model, then skip
    rebuilding the grid. Inputs that cannot be compared (not hashable) get their own profile.
    """
    key = (ground, diameter, top_level, rules, max_step, gauss_points)
    try:
        hash(key)
    except TypeError:  # an unhashable ground model or rules
        return _Profile(ground, diameter, top_level, rules, deepest, max_step, gauss_points)
    with _PROFILES_LOCK:
        prof = _PROFILES.get(key)
        # the grid drops stretches shorter than LEVEL_TOL_M * 1e-3, so its last piece may stop
        # that little above the level asked for: deep enough all the same
        if prof is not None and prof.piece_bot[-1] <= deepest + LEVEL_TOL_M * 1e-3:
            _PROFILES.move_to_end(key)
            return prof
    prof = _Profile(ground, diameter, top_level, rules, deepest, max_step, gauss_points)
    with _PROFILES_LOCK:
        _PROFILES[key] = prof
        _PROFILES.move_to_end(key)
        while len(_PROFILES) > PROFILE_CACHE_SIZE:
            _PROFILES.popitem(last=False)
    return prof


def clear_shared_profiles() -> None:
    """Forget the profiles ``shaft_profile`` keeps (benchmarks of a first call; tests)."""
    with _PROFILES_LOCK:
        _PROFILES.clear()


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
        The project's rules (defaults of PRODUCT.md section 6 when None).
    max_step, gauss_points:
        Integration controls (m, count); the defaults are converged.

    Equations, sources and conventions: see the module docstring. ValueError names the field
    and the limit for bad input (toe above top, diameter <= 0, toe outside the ground model,
    NaN or inf).
    """
    diameter, top_level, rules = _check_common(ground, diameter, top_level, pile_type, rules)
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
    common practice). REFERENCES.md section 5.
    """
    rules = rules or Rules()
    length = head_level - toe_level
    below = max(0.0, min(head_level, ground.water_level) - toe_level)
    above = length - below
    return pile_area(diameter) * (rules.concrete_unit_weight * above
                                  + (rules.concrete_unit_weight - rules.gamma_w) * below)


def tension_capacity(ground: GroundModel, diameter: float, top_level: float, toe_level: float,
                     pile_type: str = "bored", rules: Rules | None = None, *,
                     cutoff_level: float | None = None) -> TensionResult:
    """Uplift resistance of a single pile (kN).

    T_ult = eta Q_s + W', eta = ``tension_fraction`` (0.75, common practice; REFERENCES.md s. 5),
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
    if rules.design_approach == "limit_state":
        design = rules.phi_g * shaft_t + rules.pile_weight_factor * weight
        how = f"limit state, phi_g {rules.phi_g:g}"
    else:
        design = shaft_t / rules.fs_tension + rules.pile_weight_factor * weight
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
                         rules.design_approach, reason)


def required_toe_level(curve: CapacityCurve, load: float) -> float | None:
    """Highest toe level (m) whose design resistance is at least ``load`` (kN), or None.

    Walking down the curve from its highest point, the first level where the design
    resistance reaches ``load``, interpolated linearly between the two curve points that
    straddle it. When the curve dips again deeper down (a weaker layer below), the pile must
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
    return float(z0 + (load - d0) * (z1 - z0) / (d1 - d0))
