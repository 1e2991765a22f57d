"""Downdrag: the neutral plane, the dragload and the settlement there (Fellenius' unified method).

Where the ground settles around a pile (fill placed, soft clay consolidating), the shaft above
the neutral plane is dragged down (negative skin friction) and the shaft below it resists
(positive). The neutral plane is where the two curves meet (force equilibrium):

    load curve from the head:    Q(z) = Q_d + integral_head^z  pi D f_s dz
    resistance curve from toe:   R(z) = R_toe + integral_z^toe pi D f_s dz
    neutral plane z_n:           Q(z_n) = R(z_n)
    dragload:                    Q_n = integral_head^z_n pi D f_s dz   (the largest axial force
                                 in the pile is Q_d + Q_n, at the neutral plane)

The pile settles as much as the ground at the neutral plane (the settlement half of the
method): given the ground's settlement profile, the settlement at z_n is reported.

Source: B. H. Fellenius, "Unified design of piled foundations with emphasis on settlement
analysis", ASCE GSP 125 (2004), and his *Basics of Foundation Design* (the unified method);
found in a secondary source. The method uses the same unit shaft friction f_s up and down and
no load factor on either curve; Q_d is the permanent (sustained) load, not the transient.

f_s is given per level (the caller takes it from the axial analysis) and taken linear between
levels, so the integrals and the root are exact for that profile. Units: levels m (higher is
up), diameter m, f_s kPa, loads kN, settlement mm.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from design_core.checks import Check
from design_core.rules import Rules
from design_core.validate import number

CODES = ("downdrag",)


@dataclass(frozen=True)
class DowndragInput:
    """One pile for the downdrag check.

    levels: from the head down to the toe (m, strictly descending, at least two); unit_friction:
    ultimate unit shaft friction f_s at each level (kPa, 0-5000; 0 in excluded or ignored
    stretches); settling: True where the engineer marks the ground as settling (one per level;
    downdrag is checked only when some level settles); diameter (m, 0.1-5); permanent_load Q_d
    at the head (kN, 0-1e5, working); toe_resistance R_toe (kN, 0-1e6, the ultimate base);
    ground_settlement_mm: the ground's settlement at each level (mm), or None.
    """

    levels: tuple[float, ...]
    unit_friction: tuple[float, ...]
    settling: tuple[bool, ...]
    diameter: float
    permanent_load: float
    toe_resistance: float
    ground_settlement_mm: tuple[float, ...] | None = None

    def __post_init__(self):
        for name in ("levels", "unit_friction", "settling", "ground_settlement_mm"):
            value = getattr(self, name)
            if value is not None:
                object.__setattr__(self, name, tuple(value))
        n = len(self.levels)
        if n < 2:
            raise ValueError(f"levels must hold at least 2 levels, got {n}")
        z = np.array([number(f"levels[{i}]", v) for i, v in enumerate(self.levels)])
        if np.any(np.diff(z) >= 0.0):
            raise ValueError("levels must descend strictly from the head to the toe")
        for name in ("unit_friction", "settling", "ground_settlement_mm"):
            value = getattr(self, name)
            if value is not None and len(value) != n:
                raise ValueError(f"{name} must hold one value per level ({n}), got {len(value)}")
        for i, f in enumerate(self.unit_friction):
            number(f"unit_friction[{i}]", f, 0.0, 5000.0)
        for i, s in enumerate(self.settling):
            if not isinstance(s, (bool, np.bool_)):
                raise ValueError(f"settling[{i}] must be True or False, got {s!r}")
        if self.ground_settlement_mm is not None:
            for i, s in enumerate(self.ground_settlement_mm):
                number(f"ground_settlement_mm[{i}]", s, 0.0, 10_000.0)
        number("diameter", self.diameter, 0.1, 5.0)
        number("permanent_load", self.permanent_load, 0.0, 1e5)
        number("toe_resistance", self.toe_resistance, 0.0, 1e6)


@dataclass(frozen=True)
class DowndragResult:
    """Neutral plane level (m; None when the pile cannot reach equilibrium), dragload and the
    largest axial force (kN), settlement at the neutral plane (mm, None without a profile)."""

    neutral_plane: float | None
    dragload: float
    max_force: float
    settlement_mm: float | None
    in_settling_ground: bool
    total_shaft: float
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return {"neutral_plane": self.neutral_plane, "dragload": self.dragload,
                "max_force": self.max_force, "settlement_mm": self.settlement_mm,
                "in_settling_ground": self.in_settling_ground, "total_shaft": self.total_shaft,
                "reason": self.reason}


def _cumulative(z: np.ndarray, f: np.ndarray, perimeter: float) -> np.ndarray:
    """Shaft force from the head down to each level (kN), exact for f linear between levels."""
    seg = 0.5 * (f[:-1] + f[1:]) * (z[:-1] - z[1:]) * perimeter
    return np.concatenate(([0.0], np.cumsum(seg)))


def neutral_plane(inp: DowndragInput) -> DowndragResult:
    """Neutral plane, dragload and settlement by Fellenius' unified method (module docstring)."""
    z = np.asarray(inp.levels, dtype=float)
    f = np.asarray(inp.unit_friction, dtype=float)
    per = math.pi * inp.diameter
    cum = _cumulative(z, f, per)
    total = float(cum[-1])
    gap = inp.permanent_load + cum - (inp.toe_resistance + total - cum)   # Q(z) - R(z), rising
    if gap[0] > 0.0:
        return DowndragResult(None, 0.0, inp.permanent_load, None, False, total,
                              f"the permanent load {inp.permanent_load:.0f} kN exceeds the whole "
                              f"resistance {inp.toe_resistance + total:.0f} kN: no neutral plane")
    if gap[-1] <= 0.0:
        level, drag = float(z[-1]), total
    else:
        i = int(np.searchsorted(gap, 0.0, side="left")) - 1     # gap[i] <= 0 < gap[i+1]
        h = z[i] - z[i + 1]
        a = per * (f[i + 1] - f[i]) / (2.0 * h)   # cum(s) = cum_i + per f_i s + a s^2
        b = per * f[i]
        c = -gap[i] / 2.0                         # need cum(s) - cum_i = c
        if abs(a) < 1e-12:
            s = c / b
        else:
            s = (-b + math.sqrt(b * b + 4.0 * a * c)) / (2.0 * a)
        s = min(max(s, 0.0), h)
        level = float(z[i] - s)
        drag = float(cum[i] + b * s + a * s * s)
    settling = np.asarray(inp.settling, dtype=bool)
    in_settling = bool(np.interp(-level, -z, settling.astype(float)) > 0.0)
    settlement = None
    if inp.ground_settlement_mm is not None:
        settlement = float(np.interp(-level, -z, np.asarray(inp.ground_settlement_mm, float)))
    reason = (f"neutral plane at {level:.2f} m, dragload {drag:.0f} kN, largest force "
              f"{inp.permanent_load + drag:.0f} kN"
              + (f", ground settles {settlement:.1f} mm there" if settlement is not None else ""))
    return DowndragResult(level, drag, inp.permanent_load + drag, settlement, in_settling, total,
                          reason)


def downdrag_check(inp: DowndragInput | None, structural_capacity: float | None,
                   rules: Rules | None = None, settlement_limit_mm: float | None = None,
                   missing: str = "") -> Check:
    """The ``downdrag`` check.

    Structural: the factored largest force, ``load_factor`` x Q_d + ``dragload_factor`` x Q_n,
    against ``structural_capacity`` (kN, the design axial resistance of the section at the
    neutral plane, from the structural check); and, when the ground's settlement and a limit
    (mm) are given, the settlement at the neutral plane against it. The larger utilisation is
    reported. No settling ground: ok, nothing to check. ``inp=None``: not checked (``missing``
    says why).
    """
    rules = rules or Rules()
    if inp is None:
        return Check.not_checked("downdrag", "kN", missing or "downdrag inputs not given")
    if not any(inp.settling):
        return Check("downdrag", 0.0, None, "kN", 0.0, True,
                     "no settling ground marked: no downdrag, nothing to check")
    if structural_capacity is None:
        return Check.not_checked("downdrag", "kN", "the structural axial resistance at the "
                                 "neutral plane is not known")
    number("structural_capacity", structural_capacity, 0.0, 1e7)
    res = neutral_plane(inp)
    if res.neutral_plane is None:
        return Check("downdrag", inp.permanent_load, inp.toe_resistance + res.total_shaft, "kN",
                     math.inf, False, res.reason)
    factor = rules.load_factor if rules.loads_are == "working" else 1.0
    demand = factor * inp.permanent_load + rules.dragload_factor * res.dragload
    util = demand / structural_capacity if structural_capacity > 0 else math.inf
    text = (f"{demand:.0f} kN (factored Q_d + dragload) against {structural_capacity:.0f} kN at "
            f"the neutral plane; {res.reason}")
    if res.settlement_mm is not None and settlement_limit_mm:
        u_s = res.settlement_mm / settlement_limit_mm
        text += f"; settlement {res.settlement_mm:.1f} of {settlement_limit_mm:.1f} mm"
        if u_s > util:
            return Check("downdrag", res.settlement_mm, settlement_limit_mm, "mm", u_s,
                         u_s <= 1.0, text)
    return Check("downdrag", demand, structural_capacity, "kN", util, util <= 1.0, text)
