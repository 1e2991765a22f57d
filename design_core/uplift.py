"""Two ways a pile is pulled out that the shaft check does not see: swelling ground and the cone.

Swelling (reactive) ground
--------------------------
Clay that swells as it wets grips the shaft through the swelling zone (depth z_s below the
surface) and lifts it. The uplift on the shaft is

    U = pi D z_s f_sw,   f_sw = the unit uplift friction given, or
                          f_sw = ``swell_shaft_coefficient`` x p_s (lateral swell pressure p_s)

and it is resisted by the anchorage below the zone (the tension shaft resistance from the
bottom of the zone to the toe) plus the permanent load and the pile's weight:

    working stress:  U <= T_anchor / ``fs_tension`` + ``pile_weight_factor`` (G + W')
    limit state:     ``load_factor`` U <= phi_g T_anchor + ``pile_weight_factor`` (G + W')

The treatment follows AS 2159-2009 (the design of piles in reactive clay: uplift on the shaft
in the zone of moisture change, resisted below it; from memory) and AS 2870 for the depth of
the zone (from memory). The pile also carries U - G in tension at the bottom of the zone.

The cone (shallow uplift)
-------------------------
A short pile in rock or fissured clay may pull out a cone of ground from its toe rather than
slip on its shaft. The cone rises from the toe (radius r_0 = D/2) at the half-angle theta from
the vertical to the surface that counts:

    r(z) = r_0 + (z - z_toe) tan(theta)
    W_cone = integral_toe^surface gamma'(z) pi (r(z)^2 - r_0^2) dz   (buoyant below water)
    S = tau pi (r_0 + r_top) h      (vertical part of a shear tau on the cone's surface,
                                     optional: tau x slant area x cos theta)
    T_cone = ``pile_weight_factor`` (W_cone + W') + S / ``fs_tension``  (phi_g S in limit state)

and the lesser of T_cone and the shaft mode governs the tension check. Source: Tomlinson, *Pile
Design and Construction Practice* (uplift of piles in rock: the cone of rock lifted; from
memory); the angle is the rules' ``cone_half_angle_deg`` (30 degrees, common practice).

Units: levels and lengths m, pressures and shear kPa, forces kN, angles degrees.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from design_core.checks import Check
from design_core.ground import GroundModel
from design_core.inputs import LEVEL_LIMIT_M
from design_core.rules import Rules
from design_core.validate import number

CODES = ("swelling_uplift", "shallow_uplift")


# --------------------------------------------------------------------------------------------
# Swelling ground
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class SwellingInput:
    """One pile in reactive ground.

    diameter (m, 0.1-5); swell_depth z_s: depth of the swelling zone along the shaft (m,
    0-50); unit_uplift_kpa f_sw (kPa) or swell_pressure_kpa p_s (kPa), one of them; anchorage:
    ultimate tension shaft resistance below the zone (kN); permanent_load G at the head (kN,
    compression, working); pile_weight W' (kN, effective).
    """

    diameter: float
    swell_depth: float
    anchorage: float
    permanent_load: float = 0.0
    pile_weight: float = 0.0
    unit_uplift_kpa: float | None = None
    swell_pressure_kpa: float | None = None

    def __post_init__(self):
        number("diameter", self.diameter, 0.1, 5.0)
        number("swell_depth", self.swell_depth, 0.0, 50.0)
        number("anchorage", self.anchorage, 0.0, 1e6)
        number("permanent_load", self.permanent_load, 0.0, 1e6)
        number("pile_weight", self.pile_weight, 0.0, 1e5)
        number("unit_uplift_kpa", self.unit_uplift_kpa, 0.0, 2000.0, optional=True)
        number("swell_pressure_kpa", self.swell_pressure_kpa, 0.0, 5000.0, optional=True)
        if (self.unit_uplift_kpa is None) == (self.swell_pressure_kpa is None):
            raise ValueError("give one of unit_uplift_kpa and swell_pressure_kpa")


@dataclass(frozen=True)
class SwellingResult:
    """Uplift U and its design value, the resistance, and the tension at the zone's bottom (kN)."""

    unit_uplift_kpa: float
    uplift: float
    demand: float
    resistance: float
    net_tension: float
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def swelling_uplift(inp: SwellingInput, rules: Rules | None = None) -> SwellingResult:
    """Uplift from swelling ground and the resistance below it (module docstring)."""
    rules = rules or Rules()
    f_sw = (inp.unit_uplift_kpa if inp.unit_uplift_kpa is not None
            else rules.swell_shaft_coefficient * inp.swell_pressure_kpa)
    u = math.pi * inp.diameter * inp.swell_depth * f_sw
    dead = rules.pile_weight_factor * (inp.permanent_load + inp.pile_weight)
    if rules.design_approach == "limit_state":
        demand, resist = rules.load_factor * u, rules.phi_g * inp.anchorage + dead
        how = f"limit state, phi_g {rules.phi_g:g}, load factor {rules.load_factor:g}"
    else:
        demand, resist = u, inp.anchorage / rules.fs_tension + dead
        how = f"working stress, FS {rules.fs_tension:g}"
    reason = (f"uplift {u:.0f} kN over {inp.swell_depth:.1f} m at {f_sw:.0f} kPa against "
              f"anchorage {inp.anchorage:.0f} kN below the zone and {dead:.0f} kN permanent "
              f"({how})")
    return SwellingResult(f_sw, u, demand, resist, max(0.0, u - inp.permanent_load), reason)


def swelling_check(inp: SwellingInput | None, rules: Rules | None = None,
                   missing: str = "") -> Check:
    """The ``swelling_uplift`` check (kN). No swelling zone: ok, nothing to check."""
    if inp is None:
        return Check.not_checked("swelling_uplift", "kN", missing or "swelling inputs not given")
    if inp.swell_depth <= 0.0:
        return Check("swelling_uplift", 0.0, None, "kN", 0.0, True,
                     "no swelling zone: nothing to check")
    res = swelling_uplift(inp, rules)
    util = res.demand / res.resistance if res.resistance > 0 else math.inf
    return Check("swelling_uplift", res.demand, res.resistance, "kN", util, util <= 1.0,
                 res.reason)


# --------------------------------------------------------------------------------------------
# The cone
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class ConeInput:
    """One pile for the cone pull-out.

    ground: the ground model (unit weights, water level); diameter (m, 0.1-5); toe_level and
    surface_level (m): the cone rises from the toe to the surface that counts (at or below the
    ground model's top; the lead sets it, e.g. the ground after the cap is dug); pile_weight W'
    (kN, effective); cone_shear_kpa tau on the cone's surface (kPa, None or 0: weight only);
    half_angle_deg theta (None: the rules' ``cone_half_angle_deg``).
    """

    ground: GroundModel
    diameter: float
    toe_level: float
    surface_level: float
    pile_weight: float = 0.0
    cone_shear_kpa: float | None = None
    half_angle_deg: float | None = None

    def __post_init__(self):
        if not isinstance(self.ground, GroundModel):
            raise ValueError("ground must be a GroundModel")
        number("diameter", self.diameter, 0.1, 5.0)
        number("toe_level", self.toe_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
        number("surface_level", self.surface_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
        number("pile_weight", self.pile_weight, 0.0, 1e5)
        number("cone_shear_kpa", self.cone_shear_kpa, 0.0, 10_000.0, optional=True)
        number("half_angle_deg", self.half_angle_deg, 0.0, 60.0, optional=True)
        if self.surface_level > self.ground.top + 1e-6:
            raise ValueError(f"surface_level ({self.surface_level:g} m) must not be above the "
                             f"ground model's top ({self.ground.top:g} m)")
        if not self.ground.bottom - 1e-6 <= self.toe_level < self.surface_level:
            raise ValueError(f"toe_level ({self.toe_level:g} m) must lie below surface_level "
                             f"({self.surface_level:g} m) and within the ground model")


@dataclass(frozen=True)
class ConeResult:
    """Cone height and top radius (m), weight of its ground, shear and design resistance (kN)."""

    height: float
    top_radius: float
    ground_weight: float
    shear: float
    resistance: float
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def cone_pullout(inp: ConeInput, rules: Rules | None = None) -> ConeResult:
    """Design pull-out resistance of the cone from the toe (module docstring)."""
    rules = rules or Rules()
    theta = math.radians(rules.cone_half_angle_deg if inp.half_angle_deg is None
                         else inp.half_angle_deg)
    tan_t = math.tan(theta)
    r0 = inp.diameter / 2.0
    z, s = inp.ground.stress_profile(rules.gamma_w)      # ascending levels, sigma'_v
    inner = z[(z > inp.toe_level) & (z < inp.surface_level)]
    cuts = [float(c) for c in np.unique(np.concatenate(([inp.toe_level, inp.surface_level],
                                                        inner)))]

    def ring(level: float) -> float:
        """Plan area of the cone's ground outside the pile at ``level`` (m2)."""
        return math.pi * ((r0 + (level - inp.toe_level) * tan_t) ** 2 - r0 * r0)

    weight = 0.0
    for a, b in zip(cuts[:-1], cuts[1:], strict=True):    # a below b
        gamma = float(np.interp(a, z, s) - np.interp(b, z, s)) / (b - a)   # gamma' on the piece
        # Simpson's rule: exact, the ring area is quadratic in level
        weight += gamma * (b - a) / 6.0 * (ring(a) + 4.0 * ring(0.5 * (a + b)) + ring(b))
    h = float(inp.surface_level) - float(inp.toe_level)
    r_top = r0 + h * tan_t
    tau = inp.cone_shear_kpa or 0.0
    shear = tau * math.pi * (r0 + r_top) * h
    dead = rules.pile_weight_factor * (weight + inp.pile_weight)
    if rules.design_approach == "limit_state":
        resist, how = dead + rules.phi_g * shear, f"phi_g {rules.phi_g:g} on shear"
    else:
        resist, how = dead + shear / rules.fs_tension, f"FS {rules.fs_tension:g} on shear"
    reason = (f"cone {h:.1f} m high at {math.degrees(theta):g} deg: ground {weight:.0f} kN + "
              f"pile {inp.pile_weight:.0f} kN, shear {shear:.0f} kN ({how})")
    return ConeResult(h, r_top, weight, shear, resist, reason)


def shallow_uplift_check(tension: float, shaft_design: float | None, inp: ConeInput | None,
                         rules: Rules | None = None, missing: str = "") -> Check:
    """The ``shallow_uplift`` check: the design tension against the lesser of the shaft mode
    (``shaft_design``, kN, as in the uplift check) and the cone (kN).

    ``tension`` (kN) on the same basis as ``shaft_design``. No tension: ok, nothing to check.
    ``inp=None``: not checked (``missing`` says why).
    """
    number("tension", tension, 0.0, 1e6)
    if tension <= 0.0:
        return Check("shallow_uplift", 0.0, None, "kN", 0.0, True, "no uplift: nothing to check")
    if inp is None:
        return Check.not_checked("shallow_uplift", "kN", missing or "cone inputs not given")
    res = cone_pullout(inp, rules)
    limit, mode = res.resistance, "cone"
    if shaft_design is not None and number("shaft_design", shaft_design, 0.0, 1e7) < limit:
        limit, mode = shaft_design, "shaft"
    util = tension / limit if limit > 0 else math.inf
    return Check("shallow_uplift", tension, limit, "kN", util, util <= 1.0,
                 f"{tension:.0f} kN against {limit:.0f} kN ({mode} governs): {res.reason}")
