"""Pictures in plan: one cap with its piles, and the whole site coloured by status (scenes of
``fieldapp.drawings``; positions and shares come from the records and design_core results)."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterable, Sequence

from fieldapp.drawings import (
    ASBUILT, DESIGN, INK, MUTED, STATUS_COLOURS, STATUS_LABELS, Circle, Figure, Line,
    Text, arrow, empty_figure, finite, fmt, legend,
)


# --- 3. the cap in plan ---------------------------------------------------------------------------

@dataclass(frozen=True)
class PlanPile:
    """One pile in plan: design and as-built positions (m), diameter (m), label and status."""

    mark: str
    design_xy: tuple[float, float]
    asbuilt_xy: tuple[float, float] | None = None
    diameter_m: float = 0.6
    share_kn: float | None = None
    design_share_kn: float | None = None
    status: str = "planned"
    highlight: bool = False


EXAGGERATIONS = (1, 2, 5, 10, 20, 50, 100, 200, 500)


def choose_exaggeration(deviations_m: Iterable[float], spacing_m: float) -> int:
    """The drawing scale factor for deviations: the largest deviation drawn as about a third of
    the typical pile spacing, from 1, 2, 5, 10, ... 500 (1 when nothing deviates)."""
    worst = max(finite(deviations_m), default=0.0)
    if worst <= 1e-6 or spacing_m <= 0:
        return 1
    wanted = spacing_m / 3.0 / worst
    best = EXAGGERATIONS[0]
    for factor in EXAGGERATIONS:
        if factor <= wanted:
            best = factor
    return best


def _plan_frame(piles: Sequence[PlanPile], width: float, height: float, margin: float,
                bottom_room: float):
    xs = [p.design_xy[0] for p in piles]
    ys = [p.design_xy[1] for p in piles]
    rmax = max(p.diameter_m for p in piles) / 2
    x0, x1 = min(xs) - rmax, max(xs) + rmax
    y0, y1 = min(ys) - rmax, max(ys) + rmax
    span = max(x1 - x0, y1 - y0, 1.0)
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    usable_w, usable_h = width - 2 * margin, height - 2 * margin - bottom_room
    scale = min(usable_w / max(x1 - x0, span * 0.2), usable_h / max(y1 - y0, span * 0.2))
    ox, oy = width / 2, margin + usable_h / 2

    def to_px(e: float, n: float) -> tuple[float, float]:
        return ox + (e - cx) * scale, oy - (n - cy) * scale   # north up

    return to_px, scale


def _spacing(piles: Sequence[PlanPile]) -> float:
    """Median nearest-neighbour distance of the design positions (m)."""
    pts = [p.design_xy for p in piles]
    if len(pts) < 2:
        return max((p.diameter_m for p in piles), default=0.6) * 3
    nearest = []
    for i, (a, b) in enumerate(pts):
        nearest.append(min(math.hypot(a - c, b - d) for j, (c, d) in enumerate(pts) if j != i))
    nearest.sort()
    return nearest[len(nearest) // 2] or 1.0


def _scale_bar(fig: Figure, x: float, y: float, scale: float, label: str) -> None:
    """A plan scale bar of a round length (m) about 80 units long."""
    target = 80 / scale
    length = next((v for v in (0.1, 0.2, 0.5, 1, 2, 5, 10, 20, 50, 100, 200, 500) if v >= target), target)
    fig.add(Line(x, y, x + length * scale, y, INK, 2),
            Line(x, y - 3, x, y + 3, INK, 1), Line(x + length * scale, y - 3, x + length * scale, y + 3, INK, 1),
            Text(x + length * scale + 5, y + 3, f"{fmt(length)} m {label}", 8))


def cap_plan_figure(cap_mark: str, piles: Sequence[PlanPile], width: float = 360,
                    height: float = 300) -> Figure:
    """The cap in plan (north up): design positions as circles to scale, as-built positions
    displaced by the deviation times a stated exaggeration, an arrow for each deviation, and each
    pile's new share (kN) beside it. The pile under review is drawn heavier."""
    title = f"Cap {cap_mark} in plan" if cap_mark else "Pile in plan"
    if not piles:
        return empty_figure(title, "no piles", width)
    deviations = [math.hypot(p.asbuilt_xy[0] - p.design_xy[0], p.asbuilt_xy[1] - p.design_xy[1])
                  for p in piles if p.asbuilt_xy is not None]
    factor = choose_exaggeration(deviations, _spacing(piles))
    fig = Figure(width, height, title)
    to_px, scale = _plan_frame(piles, width, height, 34, 30)
    for p in piles:
        dx, dy = to_px(*p.design_xy)
        r = max(p.diameter_m / 2 * scale, 3.0)
        fig.add(Circle(dx, dy, r, DESIGN, "#eef3fb" if not p.highlight else "#dfe8f7",
                       2.2 if p.highlight else 1.0, (3, 2)))
        fig.add(Line(dx - 3, dy, dx + 3, dy, DESIGN, 0.8), Line(dx, dy - 3, dx, dy + 3, DESIGN, 0.8))
        label_y = dy - r - 5
        if p.asbuilt_xy is not None:
            ex = p.design_xy[0] + (p.asbuilt_xy[0] - p.design_xy[0]) * factor
            ny = p.design_xy[1] + (p.asbuilt_xy[1] - p.design_xy[1]) * factor
            ax, ay = to_px(ex, ny)
            fig.add(Circle(ax, ay, r, ASBUILT, None, 2.2 if p.highlight else 1.3))
            fig.add(*arrow(dx, dy, ax, ay, ASBUILT, 1.6 if p.highlight else 1.1))
            dev_mm = 1000 * math.hypot(p.asbuilt_xy[0] - p.design_xy[0], p.asbuilt_xy[1] - p.design_xy[1])
            fig.add(Text(dx, dy + r + 11, f"{dev_mm:.0f} mm", 7.5, "middle", ASBUILT))
            label_y = min(label_y, ay - r - 5)
        share = ""
        if p.share_kn is not None and math.isfinite(p.share_kn):
            share = f" {p.share_kn:,.0f} kN"
            if p.design_share_kn is not None and math.isfinite(p.design_share_kn):
                share += f" (was {p.design_share_kn:,.0f})"
        fig.add(Text(dx, label_y, f"{p.mark}{share}", 8.5, "middle", INK, p.highlight))
    _scale_bar(fig, 14, height - 34, scale, "(positions)")
    fig.add(Text(14, height - 14,
                 f"Deviation arrows and as-built circles drawn x{factor} (exaggerated)" if factor > 1
                 else "Deviations drawn to the plan scale", 8, "start", ASBUILT, True))
    legend(fig, width - 110, height - 40, [(DESIGN, "design position", (3, 2), "line"),
                                             (ASBUILT, "as built", None, "line")])
    fig.note = f"deviation exaggeration x{factor}"
    return fig


def site_plan_figure(piles: Sequence[PlanPile], width: float = 760, height: float = 520,
                     labels: bool | None = None) -> Figure:
    """Every pile of the project in plan (north up), coloured by status with a legend in words,
    deviation arrows at an exaggerated, stated scale."""
    title = "Site plan by status"
    if not piles:
        return empty_figure(title, "no piles in the schedule", width)
    deviations = [math.hypot(p.asbuilt_xy[0] - p.design_xy[0], p.asbuilt_xy[1] - p.design_xy[1])
                  for p in piles if p.asbuilt_xy is not None]
    fig = Figure(width, height, title)
    present = [s for s in STATUS_COLOURS if any(p.status == s for p in piles)]
    rows = (len(present) + 2) // 3
    to_px, scale = _plan_frame(piles, width, height, 30, 44 + rows * 13)
    # the largest deviation drawn about 14 units long (a site is too big for true scale)
    worst = max(deviations, default=0.0)
    factor = 1
    if worst > 1e-6:
        factor = max([f for f in EXAGGERATIONS if f * worst * scale <= 14.0] or [1])
    show_labels = labels if labels is not None else len(piles) <= 150
    for p in piles:
        colour = STATUS_COLOURS.get(p.status, MUTED)
        dx, dy = to_px(*p.design_xy)
        r = max(p.diameter_m / 2 * scale, 3.5)
        fig.add(Circle(dx, dy, r, colour, colour if p.status != "planned" else None, 1.0))
        if p.asbuilt_xy is not None and factor > 0:
            ex = p.design_xy[0] + (p.asbuilt_xy[0] - p.design_xy[0]) * factor
            ny = p.design_xy[1] + (p.asbuilt_xy[1] - p.design_xy[1]) * factor
            ax, ay = to_px(ex, ny)
            if math.hypot(ax - dx, ay - dy) > 1.5:
                fig.add(*arrow(dx, dy, ax, ay, INK, 0.9, 4.0))
        if show_labels:
            fig.add(Text(dx, dy - r - 3, p.mark, 6.5, "middle", INK))
    base = height - 12 - rows * 13
    _scale_bar(fig, 14, base - 22, scale, "(positions)")
    fig.add(Text(14, base - 4, f"Deviation arrows drawn x{factor} (exaggerated)" if factor > 1
                 else "Deviation arrows drawn to the plan scale", 8, "start", INK, True))
    col_w = (width - 28) / 3
    for i, status in enumerate(present):
        lx, yy = 18 + (i % 3) * col_w, base + 14 + (i // 3) * 13
        fig.add(Circle(lx, yy - 3, 4, STATUS_COLOURS[status], STATUS_COLOURS[status]),
                Text(lx + 9, yy, f"{STATUS_LABELS[status]}: {sum(p.status == status for p in piles)}", 8))
    fig.note = f"deviation exaggeration x{factor}"
    return fig
