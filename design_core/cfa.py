"""CFA piles: the shaft built increment by increment from the rig's log (checks
``cfa_increment_volume``, ``cfa_pressure``, ``cfa_overdrilling``).

Units: depths in m below the platform (the rig's datum; deeper is larger), levels in m (higher
is up), times in s from the first reading, volumes in m3 (cumulative as the rig logs them),
pressures in kPa, diameters in m, auger speed in rev/min.

Method (FHWA GEC 8, Brown, Dapp, Thompson & Lazarte 2007, chapter 7: automated monitoring of
auger depth, rotation, concrete volume and pressure against depth)
------------------------------------------------------------------------------------------
* Concrete leaves the auger at its tip, so the concrete placed between depths z_top and z_bot
  is the volume pumped while the tip rose from z_bot to z_top:
  V = V_pass(z_top) - V_pass(z_bot), V_pass(z) the cumulative volume when the tip last left
  depth z going up (linear between readings). Concrete pumped while the tip stands at the toe
  fills below it and is not counted in any increment (on the safe side).
* Increments of ``rules.cfa_increment_m`` (0.5 m) from the deepest extraction reading up; a
  remainder shorter than half an increment joins the increment below it.
* Theoretical volume V_t = pi D^2 / 4 x dz (D the auger diameter); ratio V / V_t against
  ``rules.cfa_increment_ratio_min``; effective diameter D_eff = sqrt(4 V / (pi dz)).
* Concrete pressure at every extraction reading at or below the cut-off depth must exceed
  ``rules.cfa_pressure_min_kpa`` (positive pressure while the auger is withdrawn).
* Over-drilling: revolutions per pitch of penetration in each drilling increment,
  (revolutions in the increment) / (dz / pitch), against the rules' most for clay or for
  cohesionless soil (the stricter where the soil is not known or the increment spans both).
  Revolutions come from the cumulative ``revolutions`` or, without them, from ``auger_rpm``
  integrated over time (trapezoidal).
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from datetime import datetime
from typing import Any, Iterable

import numpy as np

from design_core.checks import Check
from design_core.inputs import MATERIALS
from design_core.rules import Rules
from design_core.validate import number

CODES = ("cfa_increment_volume", "cfa_pressure", "cfa_overdrilling")
PHASES = ("drilling", "extraction")

# Allowed range of each reading (also used by fieldapp's rig CSV import): (lowest, highest).
RIG_LIMITS = {
    "depth_m": (0.0, 100.0),
    "time_s": (0.0, 7 * 24 * 3600.0),
    "auger_rpm": (0.0, 300.0),
    "revolutions": (0.0, 1e6),
    "penetration_rate_m_per_min": (-30.0, 30.0),
    "concrete_volume_m3": (0.0, 500.0),
    "concrete_pressure_kpa": (-200.0, 10_000.0),
}
_TOL = 1e-9


@dataclass(frozen=True)
class RigReading:
    """One reading of the rig's instruments.

    ``depth_m`` auger tip depth (m below the platform); ``time_s`` seconds from the first
    reading; ``revolutions`` cumulative auger revolutions or ``auger_rpm`` (rev/min);
    ``penetration_rate_m_per_min`` (down positive); ``concrete_volume_m3`` cumulative;
    ``concrete_pressure_kpa``; ``phase`` drilling or extraction. Ranges in ``RIG_LIMITS``.
    """

    depth_m: float
    time_s: float
    phase: str
    concrete_volume_m3: float = 0.0
    revolutions: float | None = None
    auger_rpm: float | None = None
    penetration_rate_m_per_min: float | None = None
    concrete_pressure_kpa: float | None = None

    def __post_init__(self):
        if self.phase not in PHASES:
            raise ValueError(f"phase must be one of {', '.join(PHASES)}, got {self.phase!r}")
        for name, (lo, hi) in RIG_LIMITS.items():
            optional = name not in ("depth_m", "time_s", "concrete_volume_m3")
            number(name, getattr(self, name), lo, hi, optional=optional)


@dataclass(frozen=True)
class RigLog:
    """The rig's log of one pile: readings in time order, drilling then extraction.

    Depth never decreases while drilling and never increases while extracting; time and the
    cumulative volume and revolutions never decrease; at least one extraction reading. ``start``
    is the date-time of the first reading when the rig gave one (for export).
    """

    readings: tuple[RigReading, ...]
    start: datetime | None = None

    def __post_init__(self):
        if not self.readings:
            raise ValueError("readings must hold at least one reading")
        prev = None
        seen_extraction = False
        for k, r in enumerate(self.readings):
            if not isinstance(r, RigReading):
                raise ValueError(f"readings[{k}] must be a RigReading")
            if r.phase == "extraction":
                seen_extraction = True
            elif seen_extraction:
                raise ValueError(f"readings[{k}]: drilling after extraction began")
            if prev is not None:
                for name in ("time_s", "concrete_volume_m3", "revolutions"):
                    a, b = getattr(prev, name), getattr(r, name)
                    if a is not None and b is not None and b < a - _TOL:
                        raise ValueError(f"readings[{k}]: {name} {b:g} is less than {a:g} before it")
                if prev.phase == r.phase:
                    down = r.phase == "drilling"
                    if (down and r.depth_m < prev.depth_m - _TOL) or (
                            not down and r.depth_m > prev.depth_m + _TOL):
                        raise ValueError(
                            f"readings[{k}]: depth_m {r.depth_m:g} goes "
                            f"{'up' if down else 'down'} from {prev.depth_m:g} while {r.phase}")
            prev = r
        if not seen_extraction:
            raise ValueError("readings hold no extraction phase")

    def phase(self, name: str) -> tuple[RigReading, ...]:
        """The readings of one phase, in order."""
        return tuple(r for r in self.readings if r.phase == name)

    @property
    def toe_depth_m(self) -> float:
        """Deepest depth (m) the auger reached."""
        return max(r.depth_m for r in self.readings)


# --------------------------------------------------------------------------------------------
# Increments
# --------------------------------------------------------------------------------------------

def _pass_values(depths: np.ndarray, values: np.ndarray, z: np.ndarray, upward: bool) -> np.ndarray:
    """Value of a cumulative quantity when the tip last leaves depth z (linear between readings).

    ``upward``: the trace rises (extraction, depths non-increasing); else it goes down.
    """
    # flip to a trace whose key rises: key = -depth going up, depth going down
    key = -depths if upward else depths
    zk = -z if upward else z
    out = np.empty(z.shape)
    for i, q in enumerate(zk):
        k = int(np.searchsorted(key, q, side="right")) - 1   # last reading with key <= q
        if k < 0:
            out[i] = values[0]
        elif k >= key.size - 1 or key[k] == q:
            out[i] = values[k]
        else:
            f = (q - key[k]) / (key[k + 1] - key[k])
            out[i] = values[k] + f * (values[k + 1] - values[k])
    return out


def _grid(deep: float, shallow: float, step: float) -> list[tuple[float, float]]:
    """Increments (top, bottom) from ``deep`` up to ``shallow`` (depths, m), deepest first."""
    edges = [deep]
    while deep - len(edges) * step > shallow + 0.5 * step + _TOL:
        edges.append(deep - len(edges) * step)   # from the toe each time: no drift in the sum
    if edges[-1] - shallow > _TOL:
        edges.append(shallow)
    return [(edges[k + 1], edges[k]) for k in range(len(edges) - 1)]


@dataclass(frozen=True)
class CfaIncrement:
    """One depth increment: top and bottom depth (m), concrete placed and theoretical (m3),
    ratio placed/theoretical, effective diameter ``d_eff_m`` (m) and whether the ratio meets
    the rule."""

    top_depth_m: float
    bottom_depth_m: float
    volume_m3: float
    theoretical_m3: float
    ratio: float
    d_eff_m: float
    ok: bool

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


@dataclass(frozen=True)
class CfaProfile:
    """The shaft increment by increment (deepest first), for the auger diameter ``diameter_m``.

    ``worst`` is the increment of the lowest ratio; ``ratio_min`` the rule it was held to.
    """

    diameter_m: float
    increment_m: float
    ratio_min: float
    increments: tuple[CfaIncrement, ...]
    reason: str

    @property
    def worst(self) -> CfaIncrement:
        """The increment with the lowest ratio (the deepest of equals)."""
        return min(self.increments, key=lambda i: i.ratio)

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict (increments as a list of dicts)."""
        return {"diameter_m": self.diameter_m, "increment_m": self.increment_m,
                "ratio_min": self.ratio_min, "reason": self.reason,
                "increments": [i.to_dict() for i in self.increments]}


def increments(log: RigLog, diameter_m: float, rules: Rules | None = None) -> CfaProfile:
    """Concrete placed per depth increment during extraction against the theoretical volume.

    V per increment as in the module docstring; V_t = pi D^2 / 4 dz; D_eff = sqrt(4 V / (pi dz)).
    ``diameter_m`` the auger (design) diameter, 0.15-3 m. ValueError when extraction covers no
    depth.
    """
    rules = rules or Rules()
    if not isinstance(log, RigLog):
        raise ValueError(f"log must be a RigLog, got {type(log).__name__}")
    d = number("diameter_m", diameter_m, 0.15, 3.0)
    ext = log.phase("extraction")
    depths = np.array([r.depth_m for r in ext])
    vols = np.array([r.concrete_volume_m3 for r in ext])
    # from the toe the auger reached: a stretch withdrawn before the extraction readings start
    # has no concrete logged and shows as an empty increment
    deep, shallow = log.toe_depth_m, float(depths.min())
    if float(depths.max()) - shallow < 0.01:
        raise ValueError("the extraction readings cover no depth (auger not withdrawn)")
    grid = _grid(deep, shallow, rules.cfa_increment_m)
    tops = np.array([g[0] for g in grid])
    bots = np.array([g[1] for g in grid])
    v_top = _pass_values(depths, vols, tops, upward=True)
    v_bot = _pass_values(depths, vols, bots, upward=True)
    area = math.pi * d * d / 4.0
    out = []
    for top, bot, vt, vb in zip(tops.tolist(), bots.tolist(), v_top.tolist(), v_bot.tolist(),
                                strict=True):
        dz = bot - top
        v = max(0.0, float(vt - vb))
        theo = area * dz
        ratio = v / theo
        d_eff = math.sqrt(4.0 * v / (math.pi * dz))
        out.append(CfaIncrement(top, bot, v, theo, ratio, d_eff,
                                bool(ratio >= rules.cfa_increment_ratio_min - _TOL)))
    text = (f"{len(out)} increments of {rules.cfa_increment_m:g} m from {deep:.2f} m up to "
            f"{shallow:.2f} m for D {d * 1000:.0f} mm")
    return CfaProfile(d, rules.cfa_increment_m, rules.cfa_increment_ratio_min, tuple(out), text)


@dataclass(frozen=True)
class Neck:
    """The smallest effective diameter ``d_eff_m`` (m) over a level range, in the increment
    from ``top_depth_m`` to ``bottom_depth_m`` (m below the platform)."""

    d_eff_m: float
    top_depth_m: float
    bottom_depth_m: float
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def smallest_effective_diameter(profile: CfaProfile, platform_level: float, top_level: float,
                                bottom_level: float) -> Neck | None:
    """Smallest D_eff (m) of the increments that overlap the levels ``top_level`` to
    ``bottom_level`` (m), depths converted with ``platform_level`` (m). An increment that only
    partly overlaps counts (on the safe side). None when no increment overlaps (not logged).
    """
    plat = number("platform_level", platform_level, -10_000.0, 10_000.0)
    top = number("top_level", top_level, -10_000.0, 10_000.0)
    bot = number("bottom_level", bottom_level, -10_000.0, 10_000.0)
    if bot >= top:
        raise ValueError(f"bottom_level ({bot:g} m) must be below top_level ({top:g} m)")
    z_top, z_bot = plat - top, plat - bot
    hit = [i for i in profile.increments
           if i.bottom_depth_m > z_top + 1e-6 and i.top_depth_m < z_bot - 1e-6]
    if not hit:
        return None
    neck = min(hit, key=lambda i: i.d_eff_m)
    return Neck(neck.d_eff_m, neck.top_depth_m, neck.bottom_depth_m,
                f"Smallest effective diameter {neck.d_eff_m * 1000:.0f} mm at "
                f"{neck.top_depth_m:.2f}-{neck.bottom_depth_m:.2f} m depth between levels "
                f"{top:.2f} and {bot:.2f} m")


def cage_length_below_cutoff(cage_bottom_depth_m: float, cutoff_depth_m: float) -> float:
    """Cage length (m) below the cut-off from the depth its foot reached (m below the platform)."""
    foot = number("cage_bottom_depth_m", cage_bottom_depth_m, 0.0, 200.0)
    cut = number("cutoff_depth_m", cutoff_depth_m, -50.0, 200.0)
    return max(0.0, foot - cut)


def integrity_tests_due(n_piles: int, n_tested: int, rules: Rules | None = None) -> int:
    """Integrity tests still due: ceil(``cfa_integrity_test_fraction`` x n_piles) - n_tested, >= 0."""
    rules = rules or Rules()
    n = int(number("n_piles", n_piles, 0, 1e6))
    t = int(number("n_tested", n_tested, 0, 1e6))
    return max(0, math.ceil(rules.cfa_integrity_test_fraction * n - _TOL) - t)


# --------------------------------------------------------------------------------------------
# Checks
# --------------------------------------------------------------------------------------------

def check_increment_volume(profile: CfaProfile, cutoff_depth_m: float = 0.0) -> Check:
    """``cfa_increment_volume``: the worst increment below the cut-off depth (m below the
    platform) against the ratio rule. value = its ratio, limit = ``ratio_min``, utilisation =
    limit / ratio. The reason gives its depth and effective diameter.
    """
    code = "cfa_increment_volume"
    cut = number("cutoff_depth_m", cutoff_depth_m, -50.0, 200.0)
    below = [i for i in profile.increments if i.bottom_depth_m > cut + 1e-6]
    if not below:
        return Check.not_checked(code, "", "No rig increments below the cut-off depth")
    worst = min(below, key=lambda i: i.ratio)
    log_top = min(i.top_depth_m for i in profile.increments)
    if log_top > cut + 0.01 and worst.ok:
        return Check.not_checked(
            code, "", f"The rig's extraction log stops at {log_top:.2f} m, below the cut-off depth "
            f"{max(cut, 0.0):.2f} m: the top {log_top - max(cut, 0.0):.2f} m of the shaft is not covered")
    lo = profile.ratio_min
    util = lo / worst.ratio if worst.ratio > 0 else math.inf
    n_short = sum(1 for i in below if not i.ok)
    where = (f"{worst.top_depth_m:.2f}-{worst.bottom_depth_m:.2f} m: {worst.volume_m3:.3f} m3 "
             f"against {worst.theoretical_m3:.3f} m3, ratio {worst.ratio:.2f}, effective "
             f"diameter {worst.d_eff_m * 1000:.0f} mm (D {profile.diameter_m * 1000:.0f} mm)")
    if worst.ok:
        return Check(code, worst.ratio, lo, "", util, True,
                     f"Every increment at least {lo:.2f}; worst at {where}")
    return Check(code, worst.ratio, lo, "", util, False,
                 f"{n_short} increment{'s' if n_short != 1 else ''} below {lo:.2f}; worst at "
                 f"{where}: possible neck or soil inclusion")


def check_pressure(log: RigLog, rules: Rules | None = None, cutoff_depth_m: float = 0.0) -> Check:
    """``cfa_pressure``: the lowest concrete pressure (kPa) at the extraction readings at or
    below the cut-off depth (m) against ``rules.cfa_pressure_min_kpa`` (it must be exceeded).
    Not checked when a reading there has no pressure.
    """
    code, rules = "cfa_pressure", rules or Rules()
    cut = number("cutoff_depth_m", cutoff_depth_m, -50.0, 200.0)
    rows = [r for r in log.phase("extraction") if r.depth_m >= cut - 1e-6 and r.depth_m > 0.0]
    if not rows:
        return Check.not_checked(code, "kPa", "No extraction readings below the cut-off depth")
    missing = [r.depth_m for r in rows if r.concrete_pressure_kpa is None]
    if missing:
        return Check.not_checked(code, "kPa", f"{len(missing)} extraction readings have no concrete "
                                 f"pressure (first at {missing[0]:.2f} m)")
    worst = min(rows, key=lambda r: r.concrete_pressure_kpa)
    p, lim = worst.concrete_pressure_kpa, rules.cfa_pressure_min_kpa
    ok = p > lim + _TOL
    util = (lim / p if lim > 0 else 0.0) if ok else math.inf
    if ok:
        text = f"Concrete pressure above {lim:g} kPa throughout extraction; lowest {p:g} kPa at {worst.depth_m:.2f} m"
    else:
        low = [r.depth_m for r in rows if r.concrete_pressure_kpa <= lim + _TOL]
        text = (f"Concrete pressure {p:g} kPa at {worst.depth_m:.2f} m, not above {lim:g} kPa "
                f"({len(low)} readings from {max(low):.2f} to {min(low):.2f} m): the auger was "
                "withdrawn without positive pressure; possible soil inclusion")
    return Check(code, p, lim, "kPa", util, ok, text)


def _revolutions(rows: tuple[RigReading, ...]) -> np.ndarray | None:
    """Cumulative revolutions of the drilling readings, measured or from the rpm over time."""
    if all(r.revolutions is not None for r in rows):
        return np.array([r.revolutions for r in rows], dtype=float)
    if all(r.auger_rpm is not None for r in rows):
        t = np.array([r.time_s for r in rows])
        rpm = np.array([r.auger_rpm for r in rows])
        steps = 0.5 * (rpm[1:] + rpm[:-1]) * np.diff(t) / 60.0
        return np.concatenate([[0.0], np.cumsum(steps)])
    return None


def check_overdrilling(log: RigLog, pitch_m: float | None,
                       strata: Iterable[tuple[float, float, str]] = (),
                       rules: Rules | None = None) -> Check:
    """``cfa_overdrilling``: revolutions per pitch of penetration in each drilling increment
    against the rules' most (clay or cohesionless; the stricter where unknown).

    ``pitch_m`` the auger flight pitch (m); ``strata`` (from depth m, to depth m, material of
    ``design_core.inputs.MATERIALS``) as logged or from the ground model. value = the worst
    revolutions per pitch, limit = its rule, utilisation = value / limit (the worst ratio).
    """
    code, rules = "cfa_overdrilling", rules or Rules()
    if pitch_m is None:
        return Check.not_checked(code, "rev", "Auger pitch not recorded (pitch_m)")
    pitch = number("pitch_m", pitch_m, 0.05, 2.0)
    strata = tuple(strata)
    for k, (a, b, m) in enumerate(strata):
        number(f"strata[{k}] from", a, 0.0, 500.0)
        number(f"strata[{k}] to", b, 0.0, 500.0)
        if m not in MATERIALS:
            raise ValueError(f"strata[{k}] material must be one of {', '.join(MATERIALS)}, got {m!r}")
    rows = log.phase("drilling")
    if len(rows) < 2:
        return Check.not_checked(code, "rev", "Fewer than two drilling readings")
    revs = _revolutions(rows)
    if revs is None:
        return Check.not_checked(code, "rev", "Drilling readings without revolutions or auger_rpm")
    depths = np.array([r.depth_m for r in rows])
    shallow, deep = float(depths.min()), float(depths.max())
    if deep - shallow < 0.01:
        return Check.not_checked(code, "rev", "The drilling readings cover no depth")
    grid = _grid(deep, shallow, rules.cfa_increment_m)
    tops = np.array([g[0] for g in grid])
    bots = np.array([g[1] for g in grid])
    r_top = _pass_values(depths, revs, tops, upward=False)
    r_bot = _pass_values(depths, revs, bots, upward=False)
    lim_c = rules.cfa_revs_per_pitch_max_cohesive
    lim_s = rules.cfa_revs_per_pitch_max_cohesionless
    worst = None
    for top, bot, ra, rb in zip(tops.tolist(), bots.tolist(), r_top.tolist(), r_bot.tolist(),
                                strict=True):
        rpp = (rb - ra) / ((bot - top) / pitch)
        mats = {m for a, b, m in strata if a < bot - 1e-6 and b > top + 1e-6}
        limit = lim_c if mats == {"cohesive"} else lim_s
        u = rpp / limit
        if worst is None or u > worst[0]:
            worst = (u, rpp, limit, top, bot, "clay" if mats == {"cohesive"} else
                     ("cohesionless soil" if mats else "soil not known: cohesionless limit"))
    u, rpp, limit, top, bot, soil = worst
    ok = u <= 1.0 + _TOL
    verb = "within" if ok else "more than"
    tail = "" if ok else ": over-drilling may draw soil in and loosen the ground around the pile"
    return Check(code, rpp, limit, "rev", u, ok,
                 f"Worst {rpp:.2f} revolutions per pitch ({pitch * 1000:.0f} mm) at {top:.2f}-"
                 f"{bot:.2f} m in {soil}, {verb} {limit:g}{tail}")
