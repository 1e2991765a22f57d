"""The pictures of a pile sheet, drawn only from what was stored with the record version.

The record layer computes no engineering: ``checks_figure`` draws each stored check's
utilisation (value over limit, as the recheck stored it at save time) against 1.0, and
``section_figure`` the as-built levels and strata met as the record holds them. Nothing is
rechecked with today's rules, ground or cap, so the pictures show what was signed.
"""

from __future__ import annotations

import math
from typing import Any

from fieldapp import drawings
from fieldapp.drawings import GRID, INK, MUTED, OK, SHORT, WARN, Figure, Line, Rect, Text
from fieldapp.record.words import plain

UTIL_AXIS_MAX = 1.5        # utilisation at the right edge; larger values are clipped and labelled


def _finite(value: Any) -> float | None:
    try:
        f = float(value)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def checks_figure(checks: list[dict], width: float = 360) -> Figure:
    """One bar per stored check: its stored utilisation against the limit line at 1.0; a check
    not checked is drawn as an outline with the words."""
    rows = max(len(checks), 1)
    height = 34 + rows * 16 + 20
    fig = Figure(width, height, "Stored checks: utilisation (1.0 = limit)")
    left, right, top = 120, width - 40, 30
    span = right - left

    def x_of(u: float) -> float:
        return left + span * min(max(u, 0.0), UTIL_AXIS_MAX) / UTIL_AXIS_MAX

    for u in (0.0, 0.5, 1.0, 1.5):
        fig.add(Line(x_of(u), top - 4, x_of(u), top + rows * 16, GRID if u != 1.0 else INK, 0.8 if u != 1.0 else 1.4),
                Text(x_of(u), top + rows * 16 + 11, f"{u:.1f}", 8, "middle", MUTED))
    for i, c in enumerate(checks):
        y = top + i * 16
        fig.add(Text(left - 6, y + 10, str(c.get("code", "")), 8, "end", INK))
        util = _finite(c.get("utilisation"))
        ok = c.get("ok")
        if ok is None or util is None:
            fig.add(Rect(left, y + 2, span * 0.3, 10, WARN, None, 0.8),
                    Text(left + 4, y + 10, "not checked" if ok is None else ("ok" if ok else "short"), 7, "start", WARN))
            continue
        colour = OK if ok else SHORT
        fig.add(Rect(left, y + 2, max(x_of(util) - left, 1.0), 10, None, colour))
        label = plain(round(util, 3)) + (" (clipped)" if util > UTIL_AXIS_MAX else "")
        fig.add(Text(min(x_of(util) + 3, right - 2), y + 10, label, 7, "start", colour))
    return fig


def section_figure(record: dict, design_toe_m: float | None, width: float = 360, height: float = 300) -> Figure:
    """The pile in section as recorded: platform level, strata met (from the record), cut-off
    and final concrete levels, the as-built toe (platform level less measured depth) and the
    design toe. Levels in metres, higher is up."""
    fig = Figure(width, height, "As built in section (levels in m)")
    platform = _finite(record.get("platform_level"))
    depth = _finite(record.get("measured_depth"))
    if platform is None:
        fig.add(Text(10, 40, "no platform level recorded", 9, "start", MUTED))
        return fig
    toe = platform - depth if depth is not None else None
    levels = [platform] + [v for v in (toe, design_toe_m, _finite(record.get("cutoff_level")),
                                       _finite(record.get("casting_level"))) if v is not None]
    for s in record.get("strata") or []:
        for key in ("from_depth", "to_depth"):
            d = _finite(s.get(key))
            if d is not None:
                levels.append(platform - d)
    hi, lo = max(levels) + 0.5, min(levels) - 0.5
    top, bottom = 28, height - 14

    def y_of(level: float) -> float:
        return top + (hi - level) / (hi - lo) * (bottom - top)

    shaft_x, shaft_w = 150, 26
    palette = ("#efe6d2", "#dfe9dd", "#e3e3ef", "#f1dede", "#e9efe0")
    for i, s in enumerate(record.get("strata") or []):
        a, b = _finite(s.get("from_depth")), _finite(s.get("to_depth"))
        if a is None or b is None:
            continue
        fig.add(Rect(20, y_of(platform - a), width - 40, y_of(platform - b) - y_of(platform - a), GRID,
                     palette[i % len(palette)], 0.5),
                Text(width - 24, y_of(platform - a) + 10, f"{s.get('material', '')}", 7, "end", MUTED))
    if toe is not None:
        fig.add(Rect(shaft_x, y_of(platform), shaft_w, y_of(toe) - y_of(platform), INK, "#c8c8c8", 1.0))

    def mark(level: float | None, words: str, colour: str, x_text: float) -> None:
        if level is None:
            return
        fig.add(Line(40, y_of(level), shaft_x + shaft_w + 30, y_of(level), colour, 1.0, (3, 2)),
                Text(x_text, y_of(level) - 2, f"{words} {plain(round(level, 3))}", 7.5, "start", colour))

    mark(platform, "platform", INK, 40)
    mark(_finite(record.get("cutoff_level")), "cut-off", MUTED, shaft_x + shaft_w + 34)
    mark(_finite(record.get("casting_level")), "concrete", MUTED, shaft_x + shaft_w + 34)
    mark(toe, "toe as built", SHORT, shaft_x + shaft_w + 34)
    mark(design_toe_m, "design toe", drawings.DESIGN, 40)
    return fig
