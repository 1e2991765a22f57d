"""Axial capacity of a single pile from standard penetration test (SPT) blow counts.

Units: depths in m below the profile's ground level, levels in m (higher is up), N in blows per
300 mm, energy ratio in %, unit resistances in kPa, forces in kN, D in m.

Method: Meyerhof (1976), "Bearing capacity and settlement of pile foundations", J. Geotech.
Eng. Div. ASCE 102(GT3): 197-228, as quoted in textbooks (Das, *Principles of Foundation
Engineering*):

* energy correction N60 = N ER / 60 (ER the hammer's energy ratio in %; Skempton 1986);
* base q_b = 40 N60_b (L_b / D) <= 400 N60_b kPa, N60_b the mean N60 from 10 D above to 4 D
  below the toe, L_b the penetration into the bearing layer (from ``bearing_top_level``; the
  top of the profile when not given);
* shaft f_s = 2 N60_mean <= 100 kPa over the shaft (N60_mean the length-weighted mean), so
  Q_u = 400 N A_b + 2 N A_s kN for a displacement (driven) pile once L_b/D >= 10;
* bored, CFA and screw piles: 1/3 of the base and 1/3 of the shaft (Q_u = 133 N A_b + 0.67 N A_s;
  screw piles take the lower, bored values, which is conservative).

Every coefficient and limit is a rule (``spt_*``) with its source. Between readings N60 is
linear in depth; the shaft counts from ``exclusion_diameters`` x D below ``top_level`` and
nothing above the first reading. Design resistance as ``design_core.axial``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from design_core.axial import CapacityCurve, _approach_text, _design, pile_area
from design_core.cpt import (
    DEPTH_MAX_M, DEPTH_TOL_M, DIAMETER_RANGE_M, _readings, cumulative_integral, integral_to,
)
from design_core.inputs import LEVEL_LIMIT_M, PILE_TYPES
from design_core.rules import Rules
from design_core.validate import number

N_RANGE = (0.0, 300.0)  # blows per 300 mm (refusal is often logged as 50-100)
ENERGY_RATIO_RANGE = (20.0, 100.0)  # %
SPT_DISPLACEMENT_TYPES = ("driven",)


def n60(n: Any, energy_ratio_pct: Any, reference_pct: float = 60.0) -> np.ndarray | float:
    """Energy-corrected blow count N60 = N ER / 60 (blows per 300 mm).

    n in blows per 300 mm (0-300); energy_ratio_pct the hammer's measured energy ratio ER
    (%, 20-100; ASTM D4633); reference_pct the reference energy (60 %, Skempton 1986).
    """
    ref = number("reference_pct", reference_pct, 30.0, 100.0)
    out = np.asarray(n, dtype=float) * np.asarray(energy_ratio_pct, dtype=float) / ref
    return float(out) if out.ndim == 0 else out


@dataclass(frozen=True, eq=False)
class SptProfile:
    """One SPT borehole: its name, plan position (m), ground level (m) and blow counts.

    ``depths_m`` (m below ``ground_level``, strictly increasing), ``n`` blows per 300 mm
    (0-300) and ``energy_ratio`` the hammer energy ratio (%, 20-100) at each test.
    """

    name: str
    easting: float
    northing: float
    ground_level: float
    depths_m: Any
    n: Any
    energy_ratio: Any

    def __post_init__(self):
        if not isinstance(self.name, str) or not 1 <= len(self.name.strip()) <= 60:
            raise ValueError(f"name must be 1-60 characters, got {self.name!r}")
        set_ = object.__setattr__
        set_(self, "easting", number("easting", self.easting, -1e8, 1e8))
        set_(self, "northing", number("northing", self.northing, -1e8, 1e8))
        set_(self, "ground_level", number("ground_level", self.ground_level, -LEVEL_LIMIT_M,
                                          LEVEL_LIMIT_M))
        depths = _readings("depths_m", self.depths_m, None, 0.0, DEPTH_MAX_M)
        if depths.size < 2:
            raise ValueError("depths_m must hold at least 2 tests")
        if np.any(np.diff(depths) <= 0.0):
            k = int(np.flatnonzero(np.diff(depths) <= 0.0)[0]) + 1
            raise ValueError(f"depths_m must increase: depths_m[{k}] ({depths[k]:g} m) is not "
                             f"below depths_m[{k - 1}] ({depths[k - 1]:g} m)")
        set_(self, "depths_m", depths)
        set_(self, "n", _readings("n", self.n, depths.size, *N_RANGE))
        er = self.energy_ratio
        if np.ndim(er) == 0:
            er = np.full(depths.size, number("energy_ratio", er, *ENERGY_RATIO_RANGE))
        set_(self, "energy_ratio", _readings("energy_ratio", er, depths.size, *ENERGY_RATIO_RANGE))

    def n60(self, rules: Rules | None = None) -> np.ndarray:
        """N60 at each test (N ER / reference energy, ``spt_reference_energy_pct``)."""
        rules = rules or Rules()
        return n60(self.n, self.energy_ratio, rules.spt_reference_energy_pct)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict (tests as lists)."""
        return {"name": self.name, "easting": self.easting, "northing": self.northing,
                "ground_level": self.ground_level, "depths_m": self.depths_m.tolist(),
                "n": self.n.tolist(), "energy_ratio": self.energy_ratio.tolist()}


@dataclass(frozen=True)
class SptResult:
    """Compression resistance of one pile from one SPT profile (kN), with its make-up.

    ``n60_base`` the mean N60 about the toe, ``n60_shaft`` the mean along the shaft,
    ``base_pressure`` and ``unit_shaft`` in kPa, ``displacement`` whether the driven-pile values
    were used.
    """

    profile: str
    diameter: float
    top_level: float
    toe_level: float
    pile_type: str
    displacement: bool
    n60_base: float
    n60_shaft: float
    base_pressure: float
    unit_shaft: float
    shaft: float
    base: float
    ultimate: float
    design: float
    design_approach: str
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def spt_toe_limits(profile: SptProfile, diameter: float,
                   rules: Rules | None = None) -> tuple[float, float]:
    """Highest and lowest toe levels (m) the profile supports: the base window (``spt_base_
    below_diameters`` x D below the toe) must lie within the tests."""
    rules = rules or Rules()
    d = profile.depths_m
    return (float(profile.ground_level - d[0]),
            float(profile.ground_level - d[-1] + rules.spt_base_below_diameters * diameter))


def _meyerhof(profile: SptProfile, diameter: float, top_level: float, toes: np.ndarray,
              pile_type: str, rules: Rules, bearing_top_level: float | None):
    """Arrays (n60 base, n60 shaft, q_b kPa, f_s kPa, shaft kN, base kN) at each toe level."""
    depths = profile.depths_m
    n = profile.n60(rules)
    cum = cumulative_integral(depths, n)
    toe_d = profile.ground_level - toes
    # base: length-weighted mean N60 over the window, clipped to the tests above
    lo = np.maximum(toe_d - rules.spt_base_above_diameters * diameter, depths[0])
    hi = toe_d + rules.spt_base_below_diameters * diameter
    span = hi - lo
    n_base = np.where(span > 0.0, (integral_to(depths, n, cum, hi) - integral_to(depths, n, cum, lo))
                      / np.maximum(span, 1e-12), np.interp(toe_d, depths, n))
    top_b = profile.ground_level if bearing_top_level is None else bearing_top_level
    l_b = np.maximum(top_b - toes, 0.0)
    q_b = np.minimum(rules.spt_base_ld_coefficient_kpa * n_base * l_b / diameter,
                     rules.spt_base_limit_kpa * n_base)
    # shaft: mean N60 over the shaft in contact, no shaft above the first test
    start = max(profile.ground_level - top_level + rules.exclusion_diameters * diameter, depths[0])
    length = np.maximum(toe_d - start, 0.0)
    i_start = integral_to(depths, n, cum, np.array([start]))[0]
    n_shaft = np.where(length > 0.0, (integral_to(depths, n, cum, toe_d) - i_start)
                       / np.maximum(length, 1e-12), 0.0)
    f_s = np.minimum(rules.spt_shaft_coefficient_kpa * n_shaft, rules.spt_shaft_limit_kpa)
    if pile_type not in SPT_DISPLACEMENT_TYPES:
        q_b = q_b * rules.spt_nondisplacement_base_fraction
        f_s = f_s * rules.spt_nondisplacement_shaft_fraction
    shaft = f_s * math.pi * diameter * length
    base = q_b * pile_area(diameter)
    return n_base, n_shaft, q_b, f_s, shaft, base


def _check(profile, diameter, top_level, pile_type, rules, toes, bearing_top_level):
    """Validate the inputs; ValueError naming the field and the limit."""
    if not isinstance(profile, SptProfile):
        raise ValueError(f"profile must be an SptProfile, got {type(profile).__name__}")
    diameter = number("diameter", diameter, *DIAMETER_RANGE_M)
    top_level = number("top_level", top_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
    if pile_type not in PILE_TYPES:
        raise ValueError(f"pile_type must be one of {', '.join(PILE_TYPES)}, got {pile_type!r}")
    if rules is None:
        rules = Rules()
    elif not isinstance(rules, Rules):
        raise ValueError(f"rules must be a Rules, got {type(rules).__name__}")
    if bearing_top_level is not None:
        bearing_top_level = number("bearing_top_level", bearing_top_level, -LEVEL_LIMIT_M,
                                   LEVEL_LIMIT_M)
    if toes.ndim != 1 or toes.size == 0 or np.any(~np.isfinite(toes)):
        raise ValueError("toe_levels must be a non-empty 1-D array of finite levels (m)")
    hi_ok, lo_ok = spt_toe_limits(profile, diameter, rules)
    if toes.max() >= top_level:
        raise ValueError(f"toe_levels ({toes.max():g} m) must be below top_level ({top_level:g} m)")
    if toes.max() > hi_ok + DEPTH_TOL_M:
        raise ValueError(f"toe_levels ({toes.max():g} m) must be at or below the first test "
                         f"({hi_ok:g} m) of profile {profile.name}")
    if toes.min() < lo_ok - DEPTH_TOL_M:
        raise ValueError(f"toe_levels ({toes.min():g} m) must be at or above {lo_ok:g} m: profile "
                         f"{profile.name} must reach {rules.spt_base_below_diameters:g} D below "
                         "the toe")
    return diameter, top_level, rules, bearing_top_level


def spt_capacity_curve(profile: SptProfile, diameter: float, top_level: float, toe_levels: Any,
                       pile_type: str = "bored", rules: Rules | None = None, *,
                       bearing_top_level: float | None = None) -> CapacityCurve:
    """Meyerhof (1976) resistance against toe level (kN), as a ``design_core.axial.CapacityCurve``.

    profile: the SPT borehole; diameter D (m, 0.1-5); top_level: cut-off or dig level (m);
    toe_levels (m): below ``top_level`` and within ``spt_toe_limits``; pile_type: driven piles
    take the displacement values, the others the non-displacement fractions; bearing_top_level
    (m): top of the bearing layer for L_b (None: the profile's ground level). Equations: the
    module docstring. Vectorised over the toe levels.
    """
    try:
        toes = np.array(toe_levels, dtype=float)
    except (TypeError, ValueError):
        raise ValueError("toe_levels must be numbers") from None
    diameter, top_level, rules, bearing_top_level = _check(
        profile, diameter, top_level, pile_type, rules, toes, bearing_top_level)
    *_, shaft, base = _meyerhof(profile, diameter, top_level, toes, pile_type, rules,
                                bearing_top_level)
    ultimate = shaft + base
    design = np.asarray(_design(shaft, base, rules), dtype=float)
    for arr in (toes, shaft, base, ultimate, design):
        arr.setflags(write=False)
    reason = (f"Design resistance against toe level from SPT {profile.name} (Meyerhof 1976, "
              f"N60) for D {diameter:g} m from top level {top_level:g} m "
              f"({_approach_text(rules)}).")
    return CapacityCurve(toes, shaft, base, ultimate, design, diameter, top_level, pile_type,
                         rules.design_approach, reason)


def meyerhof_capacity(profile: SptProfile, diameter: float, top_level: float, toe_level: float,
                      pile_type: str = "bored", rules: Rules | None = None, *,
                      bearing_top_level: float | None = None) -> SptResult:
    """Meyerhof (1976) compression resistance of one pile at one toe level (m), in kN.

    Same inputs and equations as ``spt_capacity_curve`` (module docstring).
    """
    toe_level = number("toe_level", toe_level, -LEVEL_LIMIT_M, LEVEL_LIMIT_M)
    toes = np.array([toe_level])
    diameter, top_level, rules, bearing_top_level = _check(
        profile, diameter, top_level, pile_type, rules, toes, bearing_top_level)
    nb, ns, qb, fs, shaft, base = (float(x[0]) for x in _meyerhof(
        profile, diameter, top_level, toes, pile_type, rules, bearing_top_level))
    displacement = pile_type in SPT_DISPLACEMENT_TYPES
    design = float(_design(shaft, base, rules))
    kind = "displacement" if displacement else "non-displacement fractions"
    reason = (f"Design {design:.0f} kN ({_approach_text(rules)}) from shaft {shaft:.0f} kN "
              f"(f_s {fs:.0f} kPa, mean N60 {ns:.1f}) and base {base:.0f} kN (q_b {qb:.0f} kPa, "
              f"N60 {nb:.1f} at the toe), Meyerhof 1976 {kind}, SPT {profile.name}, "
              f"D {diameter:g} m, toe {toe_level:.2f} m.")
    return SptResult(profile.name, diameter, top_level, toe_level, pile_type, displacement, nb, ns,
                     qb, fs, shaft, base, shaft + base, design, rules.design_approach, reason)
