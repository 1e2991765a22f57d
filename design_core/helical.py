"""Screw (helical) piles: capacity from installation torque (check ``torque_capacity``) and
the individual-helix bearing method as an independent estimate.

Units: depths in m below the platform, torque in kN m, K_t in 1/m, forces in kN, helix
diameter and pitch and shaft size in mm, pressures in kPa, phi' in degrees.

Methods
-------
* Torque correlation: Q_u = K_t T (Hoyt & Clemence 1989), K_t by shaft size from the rules
  (ICC-ES AC358 defaults): ``torque_capacity`` and ``default_kt``. The final torque T is the
  average of the last ``rules.helical_final_readings`` readings taken over the last
  ``rules.helical_final_length_m`` of installation (``final_torque``).
* Individual bearing: Q_u = sum over the helices of A_h q_h, A_h = pi (D_h^2 - d^2) / 4 the net
  helix area (d the shaft size), q_h = N_c c_u in clay (N_c = ``rules.nc``, 9) or
  N_q sigma'_v in sand (N_q by ``design_core.axial.n_q``); valid when consecutive helices are
  at least ``rules.helical_spacing_min_diameters`` (3) diameters of the larger apart (Hoyt &
  Clemence 1989): ``helix_bearing``. Shaft friction is left out (on the safe side).
* Design: working stress Q_u / ``helical_fs`` (2) for the torque correlation and the rules'
  axial factors for the bearing estimate; limit state ``helical_phi`` and ``phi_g``.
"""

from __future__ import annotations

import math
from dataclasses import asdict, dataclass
from typing import Any, Iterable

from design_core.axial import n_q
from design_core.checks import Check
from design_core.loads import axial_demand
from design_core.ground import GroundModel
from design_core.rules import Rules
from design_core.validate import number

CODES = ("torque_capacity",)
SHAFT_SHAPES = ("round", "square")
HELIX_SOILS = ("cohesive", "cohesionless")
ROUND_89_MM = 88.9          # the 3.5 in round shaft of the K_t table
ROUND_89_TOL_MM = 1.0
_TOL = 1e-9


def torque_capacity(torque_knm: float, kt_per_m: float) -> float:
    """Ultimate capacity Q_u = K_t T (kN) from the installation torque T (kN m) and K_t (1/m).

    Hoyt & Clemence (1989), the torque correlation; K_t defaults in ICC-ES AC358. Valid for
    0 <= T <= 1000 kN m and 1 <= K_t <= 100 1/m.
    """
    t = number("torque_knm", torque_knm, 0.0, 1000.0)
    kt = number("kt_per_m", kt_per_m, 1.0, 100.0)
    return kt * t


def default_kt(shaft_shape: str, shaft_mm: float, rules: Rules | None = None) -> tuple[float, str]:
    """K_t (1/m) by shaft from the rules, with the rule's name.

    Square shafts and round under 89 mm: ``helical_kt_small_per_m`` (33); 89 mm round
    (88.9 +/- 1 mm): ``helical_kt_89_per_m`` (23); larger round: ``helical_kt_large_per_m``.
    """
    rules = rules or Rules()
    if shaft_shape not in SHAFT_SHAPES:
        raise ValueError(f"shaft_shape must be one of {', '.join(SHAFT_SHAPES)}, got {shaft_shape!r}")
    d = number("shaft_mm", shaft_mm, 20.0, 1000.0)
    if shaft_shape == "square" or d < ROUND_89_MM - ROUND_89_TOL_MM:
        return rules.helical_kt_small_per_m, "helical_kt_small_per_m"
    if d <= ROUND_89_MM + ROUND_89_TOL_MM:
        return rules.helical_kt_89_per_m, "helical_kt_89_per_m"
    return rules.helical_kt_large_per_m, "helical_kt_large_per_m"


@dataclass(frozen=True)
class TorqueReading:
    """Torque ``torque_knm`` (kN m) at depth ``depth_m`` (m below the platform)."""

    depth_m: float
    torque_knm: float

    def __post_init__(self):
        number("depth_m", self.depth_m, 0.0, 100.0)
        number("torque_knm", self.torque_knm, 0.0, 1000.0)


def torque_log(readings: Iterable[TorqueReading | dict]) -> tuple[TorqueReading, ...]:
    """The torque log as readings from the top down (record key ``torque``: depth_m,
    torque_knm); ValueError unless depths strictly increase."""
    out = []
    for k, r in enumerate(readings):
        if isinstance(r, dict):
            r = TorqueReading(r.get("depth_m"), r.get("torque_knm"))
        if not isinstance(r, TorqueReading):
            raise ValueError(f"torque[{k}] must have depth_m and torque_knm")
        if out and r.depth_m <= out[-1].depth_m + _TOL:
            raise ValueError(f"torque[{k}] depth_m {r.depth_m:g} is not below {out[-1].depth_m:g} before it")
        out.append(r)
    return tuple(out)


@dataclass(frozen=True)
class FinalTorque:
    """Final torque (kN m): the average of ``readings`` (the last ones over the last length)."""

    torque_knm: float
    final_depth_m: float
    readings: tuple[TorqueReading, ...]
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


def final_torque(readings: Iterable[TorqueReading | dict], rules: Rules | None = None) -> FinalTorque | str:
    """The final torque, or why it cannot be found (fewer readings over the last length)."""
    rules = rules or Rules()
    log = torque_log(readings)
    n, length = int(rules.helical_final_readings), rules.helical_final_length_m
    if not log:
        return "No torque readings recorded (torque)"
    end = log[-1].depth_m
    last = [r for r in log if r.depth_m >= end - length - 1e-6]
    if len(last) < n:
        return (f"{len(last)} torque reading{'s' if len(last) != 1 else ''} over the last "
                f"{length:g} m, {n} needed")
    used = tuple(last[-n:])
    t = sum(r.torque_knm for r in used) / n
    return FinalTorque(t, end, used, f"final torque {t:.1f} kN m, the average of the last {n} readings "
                       f"({', '.join(f'{r.torque_knm:g}' for r in used)} kN m) to {end:.2f} m")


@dataclass(frozen=True)
class Helix:
    """One helix: diameter and pitch (mm) and depth (m below the platform)."""

    diameter_mm: float
    pitch_mm: float
    depth_m: float

    def __post_init__(self):
        number("diameter_mm", self.diameter_mm, 100.0, 2000.0)
        number("pitch_mm", self.pitch_mm, 10.0, 300.0)
        number("depth_m", self.depth_m, 0.0, 100.0)


@dataclass(frozen=True)
class HelixSoil:
    """The ground at one helix: material cohesive (``cu_kpa``) or cohesionless (``phi_deg``),
    and the vertical effective stress ``sigma_v_eff_kpa`` there (kPa)."""

    material: str
    sigma_v_eff_kpa: float
    cu_kpa: float | None = None
    phi_deg: float | None = None

    def __post_init__(self):
        if self.material not in HELIX_SOILS:
            raise ValueError(f"material must be one of {', '.join(HELIX_SOILS)}, got {self.material!r}")
        number("sigma_v_eff_kpa", self.sigma_v_eff_kpa, 0.0, 5000.0)
        number("cu_kpa", self.cu_kpa, 1.0, 2000.0, optional=self.material != "cohesive")
        number("phi_deg", self.phi_deg, 10.0, 50.0, optional=self.material != "cohesionless")


def helix_list(items: Iterable[dict]) -> tuple[Helix, ...]:
    """Helices from the record key ``helices`` (list of diameter_mm, pitch_mm, depth_m)."""
    out = []
    for k, item in enumerate(items):
        if not isinstance(item, dict):
            raise ValueError(f"helices[{k}] must have diameter_mm, pitch_mm and depth_m")
        try:
            out.append(Helix(item.get("diameter_mm"), item.get("pitch_mm"), item.get("depth_m")))
        except ValueError as exc:
            raise ValueError(f"helices[{k}]: {exc}") from None
    return tuple(out)


def helix_soils(ground: GroundModel, platform_level: float, helices: Iterable[Helix],
                rules: Rules | None = None) -> tuple[HelixSoil, ...] | str:
    """The soil at each helix from the ground model (level = platform_level - depth, m), or why
    the bearing estimate cannot be made: a helix outside the model or in a rock or ignored
    layer. sigma'_v from ``GroundModel.sigma_v_eff`` with the rules' gamma_w.
    """
    rules = rules or Rules()
    if not isinstance(ground, GroundModel):
        raise ValueError(f"ground must be a GroundModel, got {type(ground).__name__}")
    plat = number("platform_level", platform_level, -10_000.0, 10_000.0)
    out = []
    for h in helices:
        level = plat - h.depth_m
        if not ground.bottom <= level <= ground.top:
            return f"Helix at {h.depth_m:.2f} m (level {level:.2f} m) is outside the ground model"
        layer = ground.layers[ground.layer_index_at(level)]
        sig = float(ground.sigma_v_eff(level, rules.gamma_w))
        if layer.material == "cohesive":
            out.append(HelixSoil("cohesive", sig, cu_kpa=float(layer.cu_at(level))))
        elif layer.material == "cohesionless":
            out.append(HelixSoil("cohesionless", sig, phi_deg=layer.phi))
        else:
            return f"Helix at {h.depth_m:.2f} m is in a {layer.material} layer: no bearing estimate"
    return tuple(out)


@dataclass(frozen=True)
class HelixRow:
    """Bearing of one helix: net area (m2), unit bearing (kPa) and force (kN)."""

    depth_m: float
    diameter_mm: float
    area_m2: float
    q_kpa: float
    force_kn: float
    method: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict."""
        return asdict(self)


@dataclass(frozen=True)
class HelixBearing:
    """Individual-helix bearing: ``ultimate_kn`` the sum of the rows, ``design_kn`` by the
    rules' axial factors; ``spacing_ok`` False when helices are too close for the method (then
    the estimate does not apply: ``design_kn`` is None)."""

    rows: tuple[HelixRow, ...]
    ultimate_kn: float
    design_kn: float | None
    spacing_ok: bool
    reason: str

    def to_dict(self) -> dict[str, Any]:
        """Plain JSON-ready dict (rows as a list of dicts)."""
        out = asdict(self)
        out["rows"] = [r.to_dict() for r in self.rows]
        return out


def helix_bearing(helices: Iterable[Helix], soils: Iterable[HelixSoil], shaft_mm: float,
                  rules: Rules | None = None) -> HelixBearing:
    """Individual-helix bearing capacity (kN) of a screw pile; see the module docstring.

    ``helices`` (any order) and ``soils`` one per helix in the same order; ``shaft_mm`` the
    shaft's size (its area is taken off each helix).
    """
    rules = rules or Rules()
    helices, soils = tuple(helices), tuple(soils)
    if not helices:
        raise ValueError("helices must hold at least one helix")
    if len(soils) != len(helices):
        raise ValueError(f"soils must hold one entry per helix ({len(helices)}), got {len(soils)}")
    d_shaft = number("shaft_mm", shaft_mm, 20.0, 1000.0) / 1000.0
    pairs = sorted(zip(helices, soils, strict=True), key=lambda p: p[0].depth_m)
    rows = []
    for h, s in pairs:
        dh = h.diameter_mm / 1000.0
        if dh <= d_shaft:
            raise ValueError(f"helix diameter {h.diameter_mm:g} mm must exceed the shaft {shaft_mm:g} mm")
        area = math.pi * (dh * dh - d_shaft * d_shaft) / 4.0
        if s.material == "cohesive":
            q, how = rules.nc * s.cu_kpa, f"N_c {rules.nc:g} x c_u {s.cu_kpa:g} kPa"
        else:
            nq = float(n_q(s.phi_deg, rules))
            q, how = nq * s.sigma_v_eff_kpa, f"N_q {nq:.1f} x sigma'_v {s.sigma_v_eff_kpa:g} kPa"
        rows.append(HelixRow(h.depth_m, h.diameter_mm, area, q, area * q, how))
    ultimate = sum(r.force_kn for r in rows)
    need = rules.helical_spacing_min_diameters
    close = []
    for (a, _), (b, _) in zip(pairs, pairs[1:], strict=False):
        ratio = (b.depth_m - a.depth_m) / (max(a.diameter_mm, b.diameter_mm) / 1000.0)
        if ratio < need - _TOL:
            close.append(f"{a.depth_m:.2f}-{b.depth_m:.2f} m ({ratio:.1f} D)")
    if close:
        return HelixBearing(tuple(rows), ultimate, None, False,
                            f"Helices closer than {need:g} diameters ({'; '.join(close)}): they act "
                            "as a cylinder, the individual bearing method does not apply")
    if rules.design_approach == "limit_state":
        design, how = rules.phi_g * ultimate, f"phi_g {rules.phi_g:g}"
    else:
        design, how = ultimate / rules.fs_global, f"FS {rules.fs_global:g}"
    return HelixBearing(tuple(rows), ultimate, design, True,
                        f"Individual helix bearing {ultimate:.0f} kN ultimate over {len(rows)} helices "
                        f"({how}: design {design:.0f} kN)")


def check_torque_capacity(readings: Iterable[TorqueReading | dict], compression_kn: float,
                          shaft_shape: str | None = None, shaft_mm: float | None = None,
                          kt_per_m: float | None = None, rules: Rules | None = None,
                          bearing: HelixBearing | None = None) -> Check:
    """``torque_capacity``: K_t T_final with the rules' factor against the design compression.

    K_t is ``kt_per_m`` when the engineer gives it, else ``default_kt`` by shaft. When the
    individual-helix ``bearing`` estimate is given and applies, both must carry the load
    (the lower governs, on the safe side). value = demand (kN), limit = design resistance.
    """
    code, rules = "torque_capacity", rules or Rules()
    load = number("compression_kn", compression_kn, 0.0, 1e6)
    final = final_torque(readings, rules)
    if load <= 0.0:
        return Check(code, 0.0, None, "kN", 0.0, True, "No compression load in the design")
    if isinstance(final, str):
        return Check.not_checked(code, "kN", final)
    if kt_per_m is not None:
        kt, kt_from = number("kt_per_m", kt_per_m, 1.0, 100.0), "engineer's K_t"
    elif shaft_shape is None or shaft_mm is None:
        return Check.not_checked(code, "kN", "Shaft shape and size not recorded, and no K_t given")
    else:
        kt, name = default_kt(shaft_shape, shaft_mm, rules)
        kt_from = f"K_t by shaft ({shaft_shape} {shaft_mm:g} mm, rule {name})"
    q_u = torque_capacity(final.torque_knm, kt)
    if rules.design_approach == "limit_state":
        design, how = rules.helical_phi * q_u, f"phi {rules.helical_phi:g}"
    else:
        design, how = q_u / rules.helical_fs, f"FS {rules.helical_fs:g}"
    demand = axial_demand(load, rules)
    text = (f"K_t {kt:g} 1/m x {final.reason} = {q_u:.0f} kN ({kt_from}; {how}: design "
            f"{design:.0f} kN)")
    governing = design
    if bearing is not None:
        text += f"; {bearing.reason}"
        if bearing.design_kn is not None and bearing.design_kn < governing:
            governing = bearing.design_kn
            text += ", which governs"
    util = demand / governing if governing > 0 else math.inf
    ok = util <= 1.0 + _TOL
    basis = "Working" if rules.design_approach == "working_stress" else "Factored"
    verb = "within" if ok else "exceeds"
    return Check(code, demand, governing, "kN", util, ok,
                 f"{basis} load {demand:.0f} kN {verb} the design resistance {governing:.0f} kN: {text}")
