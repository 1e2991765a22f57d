"""Buckling of a pile that stands free over part of its length (water, air, very soft ground).

Equivalent cantilever: the pile is taken as fixed at a depth L_f below the ground that holds it
and of length L_e = L_u + L_f, with L_u the free length (from the cut-off down to the top of the
ground that gives lateral support). Euler's load:

    P_cr = pi^2 EI / (k L_e)^2

k the effective length factor from the head: free (a cantilever, k = 2 in theory) or held
against rotation but free to sway with the structure (k = 1 in theory); the rules hold the
design values (``buckling_k_free``, ``buckling_k_fixed``). Depth to fixity (Davisson & Robinson
1965, "Bending and buckling of partially embedded piles", Proc. 6th ICSMFE; from memory):

    soil modulus constant with depth:   L_f = 1.4 R,   R = (E_p I / k_h)^(1/4)
    modulus rising linearly with depth: L_f = 1.8 T,   T = (E_p I / n_h)^(1/5)

k_h (kPa = kN/m per m of pile) the modulus of horizontal subgrade reaction times the width,
n_h (kN/m3) its gradient; valid for piles embedded at least about 4 R or 4 T (from memory).
EI = ``buckling_ei_factor`` x E_p I_g for a cracked concrete pile (ACI 318-19 6.6.4.4.4). The
factored axial load must not pass ``buckling_stiffness_factor`` x P_cr (ACI 318-19 6.6.4.5.2:
0.75 P_c; from memory).

Units: lengths m, E_p MPa, k_h kPa, n_h kN/m3, forces kN.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

from design_core.checks import Check
from design_core.inputs import HEAD_CONDITIONS
from design_core.rules import Rules
from design_core.validate import number

CODES = ("buckling",)
SOIL_PROFILES = ("constant", "linear")


def euler_load(ei: float, k: float, length: float) -> float:
    """Euler's critical load P_cr = pi^2 EI / (k L)^2 (kN) for EI (kN m2), k and L (m) > 0."""
    number("ei", ei, 1e-9, None)
    number("k", k, 0.1, 10.0)
    number("length", length, 1e-6, 1000.0)
    return math.pi ** 2 * ei / (k * length) ** 2


def depth_to_fixity(ei: float, profile: str, modulus: float, rules: Rules | None = None) -> float:
    """Depth to fixity L_f (m) below the supporting ground (Davisson & Robinson 1965).

    ei E_p I (kN m2); profile "constant" (modulus = k_h, kPa) or "linear" (modulus = n_h,
    kN/m3). L_f = ``fixity_r_factor`` R or ``fixity_t_factor`` T (module docstring).
    """
    rules = rules or Rules()
    number("ei", ei, 1e-9, None)
    number("modulus", modulus, 1e-6, 1e9)
    if profile == "constant":
        return rules.fixity_r_factor * (ei / modulus) ** 0.25
    if profile == "linear":
        return rules.fixity_t_factor * (ei / modulus) ** 0.2
    raise ValueError(f"profile must be one of {', '.join(SOIL_PROFILES)}, got {profile!r}")


@dataclass(frozen=True)
class BucklingInput:
    """One pile for the buckling check.

    factored_load: factored axial compression (kN, 0-1e6); diameter (m, 0.1-5); free_length L_u
    (m, 0-200); head "free" or "fixed"; profile "constant" or "linear" and modulus k_h (kPa) or
    n_h (kN/m3) of the ground below the free length; pile_modulus_mpa E_p (MPa).
    """

    factored_load: float
    diameter: float
    free_length: float
    head: str
    profile: str
    modulus: float
    pile_modulus_mpa: float = 30_000.0

    def __post_init__(self):
        number("factored_load", self.factored_load, 0.0, 1e6)
        number("diameter", self.diameter, 0.1, 5.0)
        number("free_length", self.free_length, 0.0, 200.0)
        number("modulus", self.modulus, 1e-3, 1e9)
        number("pile_modulus_mpa", self.pile_modulus_mpa, 1_000.0, 250_000.0)
        if self.head not in HEAD_CONDITIONS:
            raise ValueError(f"head must be one of {', '.join(HEAD_CONDITIONS)}, got {self.head!r}")
        if self.profile not in SOIL_PROFILES:
            raise ValueError(
                f"profile must be one of {', '.join(SOIL_PROFILES)}, got {self.profile!r}")


@dataclass(frozen=True)
class BucklingResult:
    """EI used (kN m2), depth to fixity, effective length (m), k, P_cr and its allowed part (kN)."""

    ei: float
    fixity_depth: float
    effective_length: float
    k: float
    p_cr: float
    allowed: float
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def buckling_load(inp: BucklingInput, rules: Rules | None = None) -> BucklingResult:
    """Euler load of the equivalent cantilever (module docstring)."""
    rules = rules or Rules()
    i_g = math.pi * inp.diameter ** 4 / 64.0
    ei = rules.buckling_ei_factor * inp.pile_modulus_mpa * 1000.0 * i_g
    l_f = depth_to_fixity(ei, inp.profile, inp.modulus, rules)
    l_e = inp.free_length + l_f
    k = rules.buckling_k_free if inp.head == "free" else rules.buckling_k_fixed
    p_cr = euler_load(ei, k, l_e)
    allowed = rules.buckling_stiffness_factor * p_cr
    reason = (f"free {inp.free_length:.1f} m + fixity {l_f:.2f} m, k {k:g} ({inp.head} head): "
              f"P_cr {p_cr:.0f} kN, {rules.buckling_stiffness_factor:g} P_cr = {allowed:.0f} kN")
    return BucklingResult(ei, l_f, l_e, k, p_cr, allowed, reason)


def buckling_check(inp: BucklingInput | None, rules: Rules | None = None,
                   missing: str = "") -> Check:
    """The ``buckling`` check: factored axial load against the allowed part of P_cr (kN).

    No free length: ok, nothing to check (the pile is supported over its whole length; this
    method is for a length standing free). ``inp=None``: not checked (``missing`` says why).
    """
    if inp is None:
        return Check.not_checked("buckling", "kN", missing or "buckling inputs not given")
    if inp.free_length <= 0.0:
        return Check("buckling", inp.factored_load, None, "kN", 0.0, True,
                     "no length stands free: nothing to check for buckling")
    res = buckling_load(inp, rules)
    util = inp.factored_load / res.allowed
    return Check("buckling", inp.factored_load, res.allowed, "kN", util, util <= 1.0,
                 f"factored {inp.factored_load:.0f} kN against {res.allowed:.0f} kN: {res.reason}")
