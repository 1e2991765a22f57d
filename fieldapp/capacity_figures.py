"""Pictures of one pile's resistance: capacity against toe level, and the section's N-M
interaction (scenes of ``fieldapp.drawings``; the numbers come from design_core results)."""

from __future__ import annotations

import math
from typing import Any

from fieldapp.drawings import (
    ASBUILT, DESIGN, INK, MUTED, OK, SHORT, WARN, Axis, Circle, Figure, Line, Polyline, Text,
    empty_figure, finite, fmt, frame, legend_grid, nice_ticks, thin,
)


# --- 1. capacity against toe level ------------------------------------------------------------

def capacity_figure(curve: Any, design_load_kn: float | None, required_toe_m: float | None,
                    asbuilt_toe_m: float | None, design_toe_m: float | None,
                    width: float = 360, height: float = 280) -> Figure:
    """Resistance (kN, across) against toe level (m, up) with the load line and the toes.

    ``curve`` is a ``design_core`` CapacityCurve (``toe_levels``, ``design``, ``ultimate``
    arrays); levels are drawn with higher up.
    """
    title = "Capacity against toe level"
    if curve is None or len(getattr(curve, "toe_levels", ())) < 2:
        return empty_figure(title, "no capacity curve for this pile", width)
    z = finite(curve.toe_levels)
    design = finite(curve.design)
    ultimate = finite(getattr(curve, "ultimate", ()))
    if len(z) != len(design) or len(z) < 2:
        return empty_figure(title, "the capacity curve is incomplete", width)
    levels = z + finite([required_toe_m, asbuilt_toe_m, design_toe_m])
    forces = design + (ultimate if len(ultimate) == len(z) else []) + finite([design_load_kn, 0.0])
    zlo, zhi = min(levels), max(levels)
    pad = max(0.05 * (zhi - zlo), 0.25)
    zlo, zhi = zlo - pad, zhi + pad
    fmax = max(forces) * 1.08 or 1.0
    plot = (46, 36, width - 12, height - 76)  # left, top, right, bottom
    x = Axis(0.0, fmax, plot[0], plot[2])
    y = Axis(zhi, zlo, plot[1], plot[3])
    fig = Figure(width, height, title)
    frame(fig, x, y, nice_ticks(0, fmax), nice_ticks(zlo, zhi), "resistance (kN)", "toe level (m)")
    if len(ultimate) == len(z):
        fig.add(Polyline(thin((x(f), y(v)) for v, f in zip(z, ultimate, strict=True)), MUTED, 1.0, (3, 2)))
    fig.add(Polyline(thin((x(f), y(v)) for v, f in zip(z, design, strict=True)), DESIGN, 1.8))
    legend = [(DESIGN, "design resistance", None, "line")]
    if len(ultimate) == len(z):
        legend.append((MUTED, "ultimate", (3, 2), "line"))
    if design_load_kn is not None and math.isfinite(design_load_kn):
        px = x(design_load_kn)
        fig.add(Line(px, plot[1], px, plot[3], INK, 1.4, (6, 3)),
                Text(px + 3, plot[1] + 10, f"load {fmt(design_load_kn)} kN", 8, "start", INK, True))
    if required_toe_m is not None and math.isfinite(required_toe_m):
        py = y(required_toe_m)
        fig.add(Line(plot[0], py, plot[2], py, WARN, 1.4, (4, 2)))
        legend.append((WARN, f"required toe {required_toe_m:.2f} m", (4, 2), "line"))
    elif design_load_kn is not None:
        legend.append((WARN, "no toe in the curve reaches the load", None, "dot"))
    if design_toe_m is not None and math.isfinite(design_toe_m):
        py = y(design_toe_m)
        fig.add(Line(plot[0], py, plot[2], py, DESIGN, 1.0, (1.5, 2)))
        legend.append((DESIGN, f"design toe {design_toe_m:.2f} m", (1.5, 2), "line"))
    if asbuilt_toe_m is not None and math.isfinite(asbuilt_toe_m):
        py = y(asbuilt_toe_m)
        known = required_toe_m is not None and math.isfinite(required_toe_m)
        short = known and asbuilt_toe_m > required_toe_m + 1e-9
        colour = (SHORT if short else OK) if known else INK
        fig.add(Line(plot[0], py, plot[2], py, colour, 2.2),
                Text(plot[0] + 4, py - 4, f"as-built toe {asbuilt_toe_m:.2f} m"
                     + (" (above required)" if short else ""),
                     8.5, "start", colour, True))
        legend.append((colour, f"as-built toe {asbuilt_toe_m:.2f} m", None, "line"))
    else:
        fig.note = "as-built toe not recorded"
        legend.append((MUTED, "as-built toe not recorded", None, "dot"))
    legend_grid(fig, plot[0], plot[3] + 40, width - plot[0] - 4, legend)
    return fig


# --- 2. axial force - moment interaction --------------------------------------------------------

def _curve_points(curve: Any, factor: float = 1.0) -> tuple[list[float], list[float]]:
    n = finite(getattr(curve, "n", ()))
    m = finite(getattr(curve, "m", ()))
    if len(n) != len(m):
        return [], []
    return [factor * v for v in n], [factor * v for v in m]


def interaction_figure(asbuilt: Any, design: Any | None, load_point: Any, phi: float = 1.0,
                       width: float = 360, height: float = 280) -> Figure:
    """N-M interaction with as-built cover (solid) and design cover (dashed), and the load point
    (N kN compression up, M kNm across).

    ``asbuilt`` and ``design`` are ``design_core`` InteractionCurves (``n``, ``m`` arrays of
    nominal values, ``cover_mm``); ``load_point`` is (N kN, M kNm) or a mapping with ``n``/``m``
    keys. ``phi`` is the strength reduction factor the structural check used: both curves are
    drawn as phi x nominal, the curve the factored load point is checked against (the check
    compares M with phi M_n(N/phi), which is this curve at N).
    """
    title = "Axial force - moment interaction"
    phi = phi if phi and math.isfinite(phi) and phi > 0 else 1.0
    n_ab, m_ab = _curve_points(asbuilt, phi) if asbuilt is not None else ([], [])
    n_de, m_de = _curve_points(design, phi) if design is not None else ([], [])
    if len(n_ab) < 2 and len(n_de) < 2:
        return empty_figure(title, "no interaction curve (no reinforcement scheduled?)", width)
    point = _load_point(load_point)
    ns = n_ab + n_de + ([point[0]] if point else []) + [0.0]
    ms = m_ab + m_de + ([point[1]] if point else []) + [0.0]
    nlo, nhi = min(ns), max(ns)
    npad = 0.05 * (nhi - nlo or 1.0)
    mmax = max(ms) * 1.1 or 1.0
    plot = (52, 36, width - 12, height - 62)
    x = Axis(0.0, mmax, plot[0], plot[2])
    y = Axis(nhi + npad, nlo - npad, plot[1], plot[3])
    fig = Figure(width, height, title)
    basis = "nominal" if phi == 1.0 else f"phi {phi:g} x nominal"
    frame(fig, x, y, nice_ticks(0, mmax), nice_ticks(nlo - npad, nhi + npad), f"moment M (kNm); curves {basis}",
           "axial force N (kN, compression +)")
    if nlo < 0 < nhi:
        fig.add(Line(plot[0], y(0.0), plot[2], y(0.0), MUTED, 0.8))
    legend = []
    if len(n_de) >= 2:
        fig.add(Polyline(thin((x(mm), y(nn)) for nn, mm in zip(n_de, m_de, strict=True)), DESIGN, 1.4, (5, 3)))
        legend.append((DESIGN, f"design cover {fmt(float(getattr(design, 'cover_mm', 0)))} mm", (5, 3),
                       "line"))
    if len(n_ab) >= 2:
        fig.add(Polyline(thin((x(mm), y(nn)) for nn, mm in zip(n_ab, m_ab, strict=True)), ASBUILT, 1.8))
        legend.append((ASBUILT, f"as-built cover {fmt(float(getattr(asbuilt, 'cover_mm', 0)))} mm", None,
                       "line"))
    if point:
        px, py = x(point[1]), y(point[0])
        fig.add(Circle(px, py, 4.5, INK, "#ffd400", 1.4),
                Text(px + 7, py - 5, f"load N {fmt(point[0])} kN, M {fmt(point[1])} kNm", 8, "start",
                     INK, True))
        legend.append((INK, "load point", None, "dot"))
    else:
        fig.note = "no load point"
    legend_grid(fig, plot[0], plot[3] + 40, width - plot[0] - 4, legend)
    return fig


def _load_point(value: Any) -> tuple[float, float] | None:
    """(N, M) from a tuple, a mapping (n/m, n_kn/m_knm) or an object with n and m."""
    if value is None:
        return None
    if isinstance(value, dict):
        n = value.get("n", value.get("n_kn", value.get("N")))
        m = value.get("m", value.get("m_knm", value.get("M")))
    elif isinstance(value, (tuple, list)) and len(value) >= 2:
        n, m = value[0], value[1]
    else:
        n, m = getattr(value, "n", None), getattr(value, "m", None)
    got = finite([n, m])
    return (got[0], abs(got[1])) if len(got) == 2 else None
