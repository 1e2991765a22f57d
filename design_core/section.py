"""Circular reinforced-concrete pile section: axial force - moment interaction (nominal values).

Method (ACI 318-19 22.2): plane sections remain plane (22.2.1.2), concrete crushing strain
eps_cu = 0.003 (22.2.2.1), steel elastic-perfectly plastic, sigma_s = E_s eps_s within +-f_y
(20.2.2.1), concrete tension ignored (22.2.2.2), and the equivalent rectangular stress block
0.85 f'_c over depth a = beta_1 c (22.2.2.4.1) with beta_1 from Table 22.2.2.4.3:
0.85 for f'_c <= 28 MPa, 0.85 - 0.05 (f'_c - 28)/7 down to 0.65 at 55 MPa and above.

The compression block of a circle is a circular segment of depth a: with
theta = 2 acos((R - a)/R), area A = R^2 (theta - sin theta)/2 and centroid at
4 R sin^3(theta/2) / (3 (theta - sin theta)) from the centre. Concrete displaced by bars inside
the block is deducted (the bar carries sigma_s - 0.85 f'_c). Squash load
P_0 = 0.85 f'_c (A_g - A_st) + f_y A_st (ACI 318-19 22.4.2.2) with no 0.80/0.85 cap
(Table 22.4.2.1): values are nominal and unfactored; the rules apply phi.

Bars are equally spaced on a circle of radius D/2 - cover - bar/2, one bar at the extreme
compression fibre (the usual layout of worked examples; ``section_interaction_least`` turns
the ring to its least favourable orientation).

Units: diameter m, cover_mm and bar_mm mm, fc_mpa, fy_mpa, es_mpa MPa; results kN and kNm,
compression positive.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import cached_property, lru_cache

import numpy as np

EPS_CU = 0.003  # ACI 318-19 22.2.2.1


def beta_1(fc_mpa: float) -> float:
    """Stress-block depth factor beta_1 (ACI 318-19 Table 22.2.2.4.3)."""
    return float(min(0.85, max(0.65, 0.85 - 0.05 * (fc_mpa - 28.0) / 7.0)))


@dataclass(frozen=True)
class InteractionCurve:
    """Nominal N-M interaction of one circular section.

    ``n`` (kN, compression +) rises monotonically from pure tension to the squash load, and
    ``m`` (kNm, >= 0) is the nominal moment at each ``n``. ``c`` (m) is the neutral-axis depth of
    each point (inf at the ends). ``squash`` (kN) and ``tension`` (kN, a negative number) are the
    ends. The inputs are kept for the record.
    """

    n: np.ndarray
    m: np.ndarray
    c: np.ndarray
    squash: float
    tension: float
    diameter: float
    cover_mm: float
    n_bars: int
    bar_mm: float
    fc_mpa: float
    fy_mpa: float

    def moment_capacity(self, n_kN: float) -> float:
        """Nominal moment capacity (kNm) at axial force ``n_kN`` (kN, compression +).

        Linear interpolation along the traced curve; 0.0 outside [tension, squash] (the section
        cannot carry that axial force at all).
        """
        n_kN = float(n_kN)
        if n_kN > self.squash or n_kN < self.tension:
            return 0.0
        return float(np.interp(n_kN, self.n, self.m))

    @cached_property
    def pure_bending(self) -> float:
        """Nominal moment capacity at N = 0 (kNm)."""
        return self.moment_capacity(0.0)

    @property
    def steel_area_mm2(self) -> float:
        """Total bar area A_st (mm2)."""
        return self.n_bars * math.pi * self.bar_mm ** 2 / 4.0

    def to_dict(self) -> dict:
        """Plain lists for JSON (drawings)."""
        return {"n": [float(x) for x in self.n], "m": [float(x) for x in self.m],
                "squash": self.squash, "tension": self.tension}


def _validate(diameter, cover_mm, n_bars, bar_mm, fc_mpa, fy_mpa, es_mpa) -> None:
    checks = (("diameter", diameter, 0.1, 5.0), ("cover_mm", cover_mm, 0.0, 500.0),
              ("n_bars", n_bars, 0, 500), ("bar_mm", bar_mm, 0.0, 100.0),
              ("fc_mpa", fc_mpa, 5.0, 150.0), ("fy_mpa", fy_mpa, 100.0, 1000.0),
              ("es_mpa", es_mpa, 100_000.0, 250_000.0))
    for name, value, lo, hi in checks:
        if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
            raise ValueError(f"{name} must be a number, got {value!r}")
        if not math.isfinite(value) or value < lo or value > hi:
            raise ValueError(f"{name} must be between {lo:g} and {hi:g}, got {value!r}")
    if float(n_bars) != int(n_bars):
        raise ValueError(f"n_bars must be a whole number of bars (0 to 500), got {n_bars!r}")
    if n_bars and (cover_mm + bar_mm) * 2 >= diameter * 1000.0:
        raise ValueError(f"cover_mm + bar_mm ({cover_mm + bar_mm:g} mm) leaves no core in a "
                         f"{diameter * 1000:g} mm pile")


def _bars(diameter, cover_mm, n_bars, bar_mm, rotation_deg=0.0):
    """Bar depths from the compression face (mm) and areas (mm2); ``rotation_deg`` turns the
    ring of bars from one bar at the extreme compression fibre."""
    r = diameter * 500.0
    if n_bars <= 0 or bar_mm <= 0:
        return np.zeros(0), np.zeros(0), r
    rs = r - cover_mm - bar_mm / 2.0
    angles = 2.0 * math.pi * np.arange(n_bars) / n_bars + math.radians(rotation_deg)
    y = rs * np.cos(angles)                      # from the centre, + towards compression
    area = np.full(n_bars, math.pi * bar_mm ** 2 / 4.0)
    return r - y, area, r


def section_forces(c_mm, diameter: float, cover_mm: float, n_bars: int, bar_mm: float,
                   fc_mpa: float, fy_mpa: float, es_mpa: float = 200_000.0,
                   rotation_deg: float = 0.0):
    """Nominal (N kN, M kNm) for neutral-axis depth(s) ``c_mm`` (mm from the compression face).

    Vectorised over ``c_mm``; strain compatibility with eps_cu = 0.003 at the compression face,
    stress block a = beta_1 c capped at D (ACI 318-19 22.2). Returns two arrays.
    """
    c = np.atleast_1d(np.asarray(c_mm, dtype=float))
    d_bar, a_bar, r = _bars(diameter, cover_mm, n_bars, bar_mm, rotation_deg)
    b1 = beta_1(fc_mpa)
    a = np.minimum(b1 * c, 2.0 * r)
    theta = 2.0 * np.arccos(np.clip((r - a) / r, -1.0, 1.0))
    seg_area = r * r * (theta - np.sin(theta)) / 2.0
    with np.errstate(invalid="ignore", divide="ignore"):
        seg_ybar = np.where(seg_area > 0.0,
                            4.0 * r * np.sin(theta / 2.0) ** 3 / (3.0 * (theta - np.sin(theta))),
                            r)
    fcb = 0.85 * fc_mpa
    n = fcb * seg_area
    m = fcb * seg_area * seg_ybar
    if d_bar.size:
        eps = EPS_CU * (c[:, None] - d_bar[None, :]) / c[:, None]
        sigma = np.clip(es_mpa * eps, -fy_mpa, fy_mpa)
        sigma = sigma - np.where(d_bar[None, :] < a[:, None], fcb, 0.0)
        force = sigma * a_bar[None, :]
        n = n + force.sum(axis=1)
        m = m + (force * (r - d_bar)[None, :]).sum(axis=1)
    return n / 1000.0, m / 1.0e6


@lru_cache(maxsize=8)
def _unit_depths(points: int) -> np.ndarray:
    """Neutral-axis depths over D, 0.002 to 20, geometric (read-only, made once per count)."""
    out = np.geomspace(0.002, 20.0, points)
    out.setflags(write=False)
    return out


def section_interaction(diameter: float, cover_mm: float, n_bars: int, bar_mm: float,
                        fc_mpa: float, fy_mpa: float, es_mpa: float = 200_000.0,
                        points: int = 240, rotation_deg: float = 0.0) -> InteractionCurve:
    """Nominal N-M interaction curve of a circular RC pile section (ACI 318-19 22.2, 22.4.2.2).

    diameter (m); cover_mm clear cover to the bars (mm); n_bars bars of bar_mm (mm) equally
    spaced on a circle at cover + bar/2 from the face; fc_mpa f'_c, fy_mpa f_y, es_mpa E_s (MPa).
    ``points`` neutral-axis depths are traced, denser near the face, from c -> 0 (pure tension)
    to the squash load. ``rotation_deg`` turns the ring of bars from one bar at the extreme
    compression fibre. Raises ValueError naming the field for out-of-range input.
    """
    _validate(diameter, cover_mm, n_bars, bar_mm, fc_mpa, fy_mpa, es_mpa)
    d_mm = diameter * 1000.0
    # c from 0.2 % of D to 20 D, geometric, so both ends of the curve are traced closely.
    c = d_mm * _unit_depths(points)
    n, m = section_forces(c, diameter, cover_mm, n_bars, bar_mm, fc_mpa, fy_mpa, es_mpa,
                          rotation_deg)
    a_st = n_bars * math.pi * bar_mm ** 2 / 4.0 if n_bars and bar_mm else 0.0
    a_g = math.pi * d_mm ** 2 / 4.0
    squash = (0.85 * fc_mpa * (a_g - a_st) + fy_mpa * a_st) / 1000.0
    tension = -fy_mpa * a_st / 1000.0
    n = np.concatenate(([tension], n, [squash]))
    m = np.concatenate(([0.0], np.maximum(m, 0.0), [0.0]))
    c = np.concatenate(([0.0], c / 1000.0, [math.inf]))
    # N rises with c; keep the trace strictly increasing for interpolation.
    order = np.argsort(n, kind="stable")
    n, m, c = n[order], m[order], c[order]
    keep = np.concatenate(([True], np.diff(n) > 1e-9))
    return InteractionCurve(n=n[keep], m=m[keep], c=c[keep], squash=float(squash),
                            tension=float(tension), diameter=float(diameter),
                            cover_mm=float(cover_mm), n_bars=int(n_bars), bar_mm=float(bar_mm),
                            fc_mpa=float(fc_mpa), fy_mpa=float(fy_mpa))


LEAST_ORIENTATIONS = 3   # ring turns sampled over half the bar spacing, both ends included


def section_interaction_least(diameter: float, cover_mm: float, n_bars: int, bar_mm: float,
                              fc_mpa: float, fy_mpa: float,
                              es_mpa: float = 200_000.0) -> InteractionCurve:
    """The interaction curve of the bars in their least favourable orientation: at each N the
    smallest nominal moment over the ring turned 0, 1/4 and 1/2 of the bar spacing (the ring
    repeats every spacing and is symmetric, so these span it: one bar at the extreme fibre, a
    pair straddling the axis, and between). With few bars the orientation matters (the bending
    direction of a pile is not known beforehand); with many the curves coincide. Same units and
    checks as ``section_interaction``; squash and tension loads do not depend on orientation.
    """
    base = section_interaction(diameter, cover_mm, n_bars, bar_mm, fc_mpa, fy_mpa, es_mpa)
    if n_bars < 2 or bar_mm <= 0:
        return base
    spacing = 360.0 / n_bars
    m = base.m.copy()
    for k in range(1, LEAST_ORIENTATIONS):
        turned = section_interaction(diameter, cover_mm, n_bars, bar_mm, fc_mpa, fy_mpa, es_mpa,
                                     rotation_deg=0.5 * spacing * k / (LEAST_ORIENTATIONS - 1))
        m = np.minimum(m, np.interp(base.n, turned.n, turned.m))
    return InteractionCurve(n=base.n, m=m, c=base.c, squash=base.squash, tension=base.tension,
                            diameter=base.diameter, cover_mm=base.cover_mm, n_bars=base.n_bars,
                            bar_mm=base.bar_mm, fc_mpa=base.fc_mpa, fy_mpa=base.fy_mpa)
