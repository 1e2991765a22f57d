"""Head settlement of a single compressible pile under its working load (elastic, closed form).

Method: Randolph & Wroth (1978), "Analysis of deformation of vertically loaded piles", J. Geotech.
Eng. Div. ASCE 104(GT12), as presented in Fleming, Weltman, Randolph & Elson, *Piling
Engineering* (ch. 6). Status: from memory; the derivation below was checked by solving the
pile-as-a-bar-on-shaft-springs equation (see ``tests/validation/test_settlement_references.py``).

The shaft carries load through concentric shearing of the soil out to a magical radius r_m, so a
shaft spring k_s = 2 pi G / zeta per metre; the base is a rigid punch, P_b = 4 r_b G_b w_b /
(1 - nu) (Boussinesq). With

    zeta   = ln(r_m / r_0),   r_m = {0.25 + xi [2.5 rho (1 - nu) - 0.25]} L
             (= 2.5 rho L (1 - nu) when xi = 1)
    lambda = E_p / G_L,       mu L = sqrt(2 / (zeta lambda)) (L / r_0)
    eta    = r_b / r_0,       xi = G_L / G_b,    rho = G_avg / G_L

the head stiffness is

    P_t / (G_L r_0 w_t) = [4 eta / ((1 - nu) xi) + (2 pi rho / zeta) (tanh(mu L)/(mu L)) (L / r_0)]
                          / [1 + (1 / (pi lambda)) (4 eta / ((1 - nu) xi))
                                 (tanh(mu L)/(mu L)) (L / r_0)]

and the base takes P_b / P_t = [4 eta / ((1 - nu) xi)] / cosh(mu L) / (numerator above)
(Fleming et al.; from memory). G_L is G just above the toe, G_b just below it and G_avg the mean
over the embedded length L. A length of pile standing free above the first layer with a
modulus (water, air, ignored ground) shortens as a column: delta = P L_free / (E_p A).

Units: levels m (higher is up), diameter m, G kPa, E_p MPa, load kN, settlements mm.
Range: 0 <= nu <= 0.5; the solution was published for L/r_0 about 10-100 and lambda above
about 100 (from memory); outside that the reason says so.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any, Sequence

from design_core.checks import Check
from design_core.inputs import LEVEL_LIMIT_M
from design_core.rules import Rules
from design_core.validate import number

CODES = ("settlement",)

G_RANGE_KPA = (100.0, 50_000_000.0)  # very soft clay ~1 MPa .. rock ~50 GPa
LEVEL_TOL_M = 1e-6


def shear_modulus(e_kpa: float, nu: float) -> float:
    """Shear modulus G = E / (2 (1 + nu)) (kPa) from Young's modulus E (kPa) and nu (0-0.5)."""
    e_kpa = number("e_kpa", e_kpa, *G_RANGE_KPA)
    nu = number("nu", nu, 0.0, 0.5)
    return e_kpa / (2.0 * (1.0 + nu))


@dataclass(frozen=True)
class ModulusLayer:
    """Soil shear modulus over one layer: G (kPa) at its top, linear to ``g_bottom_kpa``.

    top, bottom in m (top > bottom); ``g_bottom_kpa=None`` means G is constant. Use
    ``ModulusLayer.from_e`` for Young's modulus and Poisson's ratio.
    """

    top: float
    bottom: float
    g_kpa: float
    g_bottom_kpa: float | None = None

    def __post_init__(self):
        number("top", self.top, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
        number("bottom", self.bottom, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
        if self.bottom >= self.top:
            raise ValueError(f"bottom ({self.bottom:g} m) must be below top ({self.top:g} m)")
        number("g_kpa", self.g_kpa, *G_RANGE_KPA)
        number("g_bottom_kpa", self.g_bottom_kpa, *G_RANGE_KPA, optional=True)

    @classmethod
    def from_e(cls, top: float, bottom: float, e_kpa: float, nu: float,
               e_bottom_kpa: float | None = None) -> "ModulusLayer":
        """A layer from Young's modulus E (kPa, optionally at the bottom too) and nu."""
        gb = None if e_bottom_kpa is None else shear_modulus(e_bottom_kpa, nu)
        return cls(top, bottom, shear_modulus(e_kpa, nu), gb)

    def g_at(self, level: float) -> float:
        """G (kPa) at ``level`` (m), linear in the layer, clipped to its ends."""
        gb = self.g_kpa if self.g_bottom_kpa is None else self.g_bottom_kpa
        frac = min(1.0, max(0.0, (self.top - level) / (self.top - self.bottom)))
        return self.g_kpa + (gb - self.g_kpa) * frac

    def integral(self, upper: float, lower: float) -> float:
        """Integral of G over levels [lower, upper] clipped to the layer (kPa m)."""
        a, b = min(upper, self.top), max(lower, self.bottom)
        if a <= b:
            return 0.0
        return 0.5 * (self.g_at(a) + self.g_at(b)) * (a - b)


@dataclass(frozen=True)
class SettlementInput:
    """One pile for the settlement check.

    load_kn: working axial load at the head (kN, 0-1e5); diameter (m, 0.1-5) and
    base_diameter (m, None: as the shaft); head_level and toe_level (m); layers: ModulusLayer
    top down and contiguous (clipped at the head; where the first layer's top is below the
    head, the pile stands free above it); pile_modulus_mpa E_p (MPa); nu Poisson's ratio of the soil (0-0.5).
    """

    load_kn: float
    diameter: float
    head_level: float
    toe_level: float
    layers: tuple[ModulusLayer, ...]
    pile_modulus_mpa: float = 30_000.0
    nu: float = 0.3
    base_diameter: float | None = None

    def __post_init__(self):
        object.__setattr__(self, "layers", tuple(self.layers))
        number("load_kn", self.load_kn, 0.0, 1e5)
        number("diameter", self.diameter, 0.1, 5.0)
        number("base_diameter", self.base_diameter, 0.1, 10.0, optional=True)
        number("head_level", self.head_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
        number("toe_level", self.toe_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
        number("pile_modulus_mpa", self.pile_modulus_mpa, 1_000.0, 250_000.0)
        number("nu", self.nu, 0.0, 0.5)
        if self.toe_level >= self.head_level:
            raise ValueError(f"toe_level ({self.toe_level:g} m) must be below head_level "
                             f"({self.head_level:g} m)")
        if not self.layers:
            raise ValueError("layers: give at least one ModulusLayer (G per layer)")
        for i, layer in enumerate(self.layers):
            if not isinstance(layer, ModulusLayer):
                raise ValueError(f"layers[{i}] must be a ModulusLayer")
            if i and abs(layer.top - self.layers[i - 1].bottom) > LEVEL_TOL_M:
                raise ValueError(f"layers must be top-down and contiguous: layers[{i}].top "
                                 f"({layer.top:g} m) differs from layers[{i - 1}].bottom")
        top, bottom = self.layers[0].top, self.layers[-1].bottom
        if not bottom - LEVEL_TOL_M <= self.toe_level < top:
            raise ValueError(f"toe_level ({self.toe_level:g} m) must lie within the layers "
                             f"({top:g} to {bottom:g} m)")


@dataclass(frozen=True)
class SettlementResult:
    """Head settlement and the parameters of the closed form (settlements mm, G kPa)."""

    head_settlement_mm: float
    embedded_settlement_mm: float
    free_shortening_mm: float
    base_settlement_mm: float
    base_load_fraction: float
    embedded_length: float
    free_length: float
    g_l: float
    g_b: float
    g_avg: float
    zeta: float
    lambda_: float
    mu_l: float
    rho: float
    xi: float
    eta: float
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def _g_at(layers: Sequence[ModulusLayer], level: float, below: bool) -> float:
    """G (kPa) at a level: in the layer just above it (below=False) or just below it (below=True).

    Below the last layer (the toe at the bottom of the layers) the last layer's bottom value.
    """
    for layer in layers:
        inside = (layer.bottom < level <= layer.top) if below else (layer.bottom <= level < layer.top)
        if inside:
            return layer.g_at(level)
    return layers[-1].g_at(layers[-1].bottom)


def pile_head_stiffness(g_l: float, r0: float, length: float, e_p_kpa: float, nu: float,
                        rho: float = 1.0, xi: float = 1.0, eta: float = 1.0) -> dict[str, float]:
    """Randolph & Wroth (1978) head stiffness P_t / w_t (kN/m) of a compressible pile.

    g_l G at the toe level (kPa); r0 shaft radius (m); length embedded L (m); e_p_kpa E_p (kPa);
    nu (0-0.5); rho = G_avg/G_L (0-1.5), xi = G_L/G_b (> 0), eta = r_b/r_0 (>= 1). Returns the
    stiffness and the dimensionless groups zeta, lambda, mu L and P_b/P_t (module docstring).
    """
    r_m = (0.25 + xi * (2.5 * rho * (1.0 - nu) - 0.25)) * length
    if r_m <= r0:
        raise ValueError(f"r_m ({r_m:.3g} m) must exceed r_0 ({r0:.3g} m): the pile is too short "
                         "for this solution")
    zeta = math.log(r_m / r0)
    lam = e_p_kpa / g_l
    mu_l = math.sqrt(2.0 / (zeta * lam)) * length / r0
    t = math.tanh(mu_l) / mu_l
    base = 4.0 * eta / ((1.0 - nu) * xi)
    shaft = 2.0 * math.pi * rho / zeta * t * length / r0
    ratio = (base + shaft) / (1.0 + base * t * length / (math.pi * lam * r0))
    return {"stiffness": ratio * g_l * r0, "zeta": zeta, "lambda": lam, "mu_l": mu_l,
            "base_fraction": base / math.cosh(mu_l) / (base + shaft)}


def pile_settlement(inp: SettlementInput) -> SettlementResult:
    """Head settlement (mm) of one pile under ``inp.load_kn`` (see the module docstring)."""
    layers = inp.layers
    top = min(inp.head_level, layers[0].top)
    free = inp.head_level - top
    length = top - inp.toe_level
    r0 = inp.diameter / 2.0
    rb = (inp.base_diameter or inp.diameter) / 2.0
    g_l = _g_at(layers, inp.toe_level, below=False)
    g_b = _g_at(layers, inp.toe_level, below=True)
    g_avg = sum(layer.integral(top, inp.toe_level) for layer in layers) / length
    rho, xi, eta = g_avg / g_l, g_l / g_b, rb / r0
    e_p = inp.pile_modulus_mpa * 1000.0
    k = pile_head_stiffness(g_l, r0, length, e_p, inp.nu, rho, xi, eta)
    w_emb = inp.load_kn / k["stiffness"] * 1000.0
    area = math.pi * r0 * r0
    short = inp.load_kn * free / (e_p * area) * 1000.0
    p_b = k["base_fraction"] * inp.load_kn
    w_b = p_b * (1.0 - inp.nu) / (4.0 * rb * g_b) * 1000.0
    notes = []
    if not 10.0 <= length / r0 <= 100.0:
        notes.append(f"L/r0 {length / r0:.0f} is outside the published range 10-100")
    if k["lambda"] < 100.0:
        notes.append(f"lambda {k['lambda']:.0f} is below about 100")
    reason = (f"Randolph & Wroth: {w_emb:.1f} mm over {length:.1f} m embedded"
              + (f" + {short:.1f} mm shortening of {free:.1f} m standing free" if free > 0 else "")
              + f"; base takes {100 * k['base_fraction']:.0f} %"
              + (f" ({'; '.join(notes)})" if notes else ""))
    return SettlementResult(w_emb + short, w_emb, short, w_b, k["base_fraction"], length, free,
                            g_l, g_b, g_avg, k["zeta"], k["lambda"], k["mu_l"], rho, xi, eta, reason)


def settlement_limit_mm(diameter: float, rules: Rules | None = None) -> float:
    """The settlement limit (mm): ``settlement_limit_mm``, or the lesser of it and
    ``settlement_limit_diameters`` x D when that rule is set (common practice)."""
    rules = rules or Rules()
    limit = rules.settlement_limit_mm
    if rules.settlement_limit_diameters > 0.0:
        limit = min(limit, rules.settlement_limit_diameters * diameter * 1000.0)
    return limit


def settlement_check(inp: SettlementInput | None, rules: Rules | None = None,
                     missing: str = "") -> Check:
    """The ``settlement`` check: head settlement against the rules' limit (mm).

    ``inp=None`` gives not checked, with ``missing`` naming what was not recorded (e.g. "no
    shear modulus G in the ground model").
    """
    rules = rules or Rules()
    if inp is None:
        return Check.not_checked("settlement", "mm", missing or "settlement inputs not given")
    try:
        res = pile_settlement(inp)
    except ValueError as exc:
        return Check.not_checked("settlement", "mm", f"settlement not computed: {exc}")
    limit = settlement_limit_mm(inp.diameter, rules)
    util = res.head_settlement_mm / limit
    return Check("settlement", res.head_settlement_mm, limit, "mm", util, util <= 1.0,
                 f"{res.head_settlement_mm:.1f} mm against {limit:.1f} mm: {res.reason}")
