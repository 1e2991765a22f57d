"""The shaft profile of one pile geometry: a fixed grid of Gauss-Legendre pieces and the
cumulative shaft force down it, good for every toe level (see ``design_core.axial`` for the
method and the integration).

Units: levels in m, diameter in m, stresses in kPa, forces in kN.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np

from design_core.ground import LEVEL_TOL_M, GroundModel, cu_linear
from design_core.memo import MEMO
from design_core.rules import Rules
from design_core.soil_factors import _alpha_kinks, _f_alpha, beta_factor, n_q

GAUSS_POINTS = 5
MAX_STEP_M = 0.5
DIAMETER_MAX_M = 5.0

SHAFT_METHODS = ("alpha", "beta", "report", "ignored", "excluded")

# Method codes per layer (shaft) and per toe (base).
_IGNORE, _ALPHA, _BETA, _REPORT = 0, 1, 2, 3
_BASE_NONE, _BASE_NC, _BASE_NQ, _BASE_REPORT = 0, 1, 2, 3
_BASE_METHODS = {_BASE_NONE: "ignored", _BASE_NC: "Nc cu", _BASE_NQ: "Nq sigma'v",
                 _BASE_REPORT: "report"}



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
        return cu_linear(self.cu_top[li], self.cu_bot[li], self.tops[li], self.bots[li], z)

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



def shaft_profile(ground: GroundModel, diameter: float, top_level: float, rules: Rules,
                  deepest: float | None = None, max_step: float = MAX_STEP_M,
                  gauss_points: int = GAUSS_POINTS) -> _Profile:
    """The shaft profile of one pile geometry, built down to the bottom of the ground model.

    ``deepest`` (m) is the deepest toe the caller will read; the profile always reaches the
    bottom of the ground model, so it is the same whichever toe asked first. Calls with equal
    ground model, diameter (m), top level (m), rules and integration controls share one
    profile, kept in ``MEMO.profiles``; inputs that cannot be hashed get their own.
    """
    key = (ground, diameter, top_level, rules, max_step, gauss_points)
    return MEMO.profiles.get(key, lambda: _Profile(ground, diameter, top_level, rules,
                                                   ground.bottom, max_step, gauss_points))
