"""The review's three pictures (and the record's site plan), drawn from result objects.

Each picture is built once as a small scene of shapes in a y-down coordinate space
(:class:`Figure`); :func:`to_svg` turns it into an SVG string for the page and the record's
PDF draws the same scene (``fieldapp.record.pdf.FigureFlowable``), so screen and record show
the same thing. Nothing here computes engineering: the curves, the load point and the shares
come from ``design_core`` results; the pictures only scale and draw them.

This module holds the scene, its scales, frames and legends, and the SVG renderer. The
pictures, by what they draw:
- ``fieldapp.capacity_figures``: ``capacity_figure`` (design and ultimate resistance against
  toe level, the load line, the required, design and as-built toes) and
  ``interaction_figure`` (the section's N-M interaction, as built and as designed, and the
  load point).
- ``fieldapp.plan_figures``: ``cap_plan_figure`` (the cap in plan, design and as-built
  positions, deviation arrows at an exaggerated and stated scale, each pile's new share) and
  ``site_plan_figure`` (every pile coloured by status).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Iterable, Sequence
from xml.sax.saxutils import escape, quoteattr

from design_core.checks import MEETS_DESIGN, NEEDS_ENGINEER

# Colours: high contrast; status is always also written in words (never colour alone).
INK = "#0a0a0a"
MUTED = "#5a5a5a"
GRID = "#d0d4d0"
OK = "#0b6b2f"
SHORT = "#a4000f"
DESIGN = "#1f4e9e"
ASBUILT = "#a4000f"
WARN = "#b35c00"

STATUS_COLOURS = {
    "planned": "#9a9a9a",
    "recording": "#6b6b00",
    "meets": OK,
    "needs": SHORT,
    "signed": "#1f4e9e",
    "remedial": WARN,
    "rejected": "#5b2a86",
}
STATUS_LABELS = {
    "planned": "planned",
    "recording": "being recorded",
    "meets": f"{MEETS_DESIGN}, unsigned",
    "needs": NEEDS_ENGINEER,
    "signed": "signed",
    "remedial": "signed: remedial",
    "rejected": "signed: rejected",
}


# --- the scene --------------------------------------------------------------------------------

@dataclass(frozen=True)
class Line:
    """A straight line from (x1, y1) to (x2, y2)."""

    x1: float
    y1: float
    x2: float
    y2: float
    stroke: str = INK
    width: float = 1.0
    dash: tuple[float, ...] | None = None


@dataclass(frozen=True)
class Polyline:
    """Connected points; closed and filled when ``fill`` is given."""

    points: tuple[tuple[float, float], ...]
    stroke: str | None = INK
    width: float = 1.0
    dash: tuple[float, ...] | None = None
    fill: str | None = None


@dataclass(frozen=True)
class Circle:
    """A circle centred at (cx, cy)."""

    cx: float
    cy: float
    r: float
    stroke: str | None = INK
    fill: str | None = None
    width: float = 1.0
    dash: tuple[float, ...] | None = None


@dataclass(frozen=True)
class Rect:
    """A rectangle with its top-left corner at (x, y)."""

    x: float
    y: float
    w: float
    h: float
    stroke: str | None = INK
    fill: str | None = None
    width: float = 1.0


@dataclass(frozen=True)
class Text:
    """Text with its baseline at y; anchor start, middle or end."""

    x: float
    y: float
    text: str
    size: float = 9.0
    anchor: str = "start"
    fill: str = INK
    bold: bool = False


Shape = Line | Polyline | Circle | Rect | Text


@dataclass
class Figure:
    """A picture: size in drawing units (1 unit = 1 px on screen, 1 pt in the PDF), y down.
    The title is drawn at the top left."""

    width: float
    height: float
    title: str
    items: list = field(default_factory=list)
    note: str = ""

    def __post_init__(self):
        if self.title:
            self.items.append(Text(4, 12, self.title, 10, "start", INK, True))

    def add(self, *shapes: Shape) -> None:
        """Add shapes in drawing order."""
        self.items.extend(shapes)


def arrow(x1: float, y1: float, x2: float, y2: float, stroke: str = INK, width: float = 1.2,
          head: float = 6.0) -> list[Shape]:
    """A line from (x1, y1) with an arrow head at (x2, y2)."""
    length = math.hypot(x2 - x1, y2 - y1)
    if length < 1e-9:
        return []
    ux, uy = (x2 - x1) / length, (y2 - y1) / length
    head = min(head, length)
    bx, by = x2 - ux * head, y2 - uy * head
    px, py = -uy * head * 0.45, ux * head * 0.45
    return [Line(x1, y1, bx, by, stroke, width),
            Polyline(((x2, y2), (bx + px, by + py), (bx - px, by - py)), stroke=None, fill=stroke)]


def thin(points: Iterable[tuple[float, float]], step: float = 0.8) -> tuple[tuple[float, float], ...]:
    """Drop points closer than ``step`` drawing units to the last one kept (the first and last
    are always kept): the line looks the same and draws faster."""
    pts = list(points)
    if len(pts) <= 2:
        return tuple(pts)
    kept = [pts[0]]
    for p in pts[1:-1]:
        if abs(p[0] - kept[-1][0]) + abs(p[1] - kept[-1][1]) >= step:
            kept.append(p)
    kept.append(pts[-1])
    return tuple(kept)


# --- scales -------------------------------------------------------------------------------------

def nice_ticks(lo: float, hi: float, count: int = 5) -> list[float]:
    """Round tick values (1, 2, 2.5, 5 x 10^k steps) covering [lo, hi]."""
    if not (math.isfinite(lo) and math.isfinite(hi)):
        return []
    if hi < lo:
        lo, hi = hi, lo
    if hi - lo < 1e-12:
        hi = lo + 1.0
    raw = (hi - lo) / max(count, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)
    start = math.floor(lo / step) * step
    ticks, t = [], start
    while t <= hi + step * 1e-6:
        ticks.append(round(t, 10))
        t += step
    return ticks


@dataclass(frozen=True)
class Axis:
    """A linear map from values [lo, hi] to drawing units [a, b]."""

    lo: float
    hi: float
    a: float
    b: float

    def __call__(self, v: float) -> float:
        """Drawing coordinate of value v."""
        return self.a + (v - self.lo) * (self.b - self.a) / (self.hi - self.lo)


def fmt(v: float) -> str:
    if abs(v) >= 1000:
        return f"{v:,.0f}"
    if abs(v - round(v)) < 1e-9:
        return f"{v:.0f}"
    return f"{v:.1f}" if abs(v) >= 10 else f"{v:.2f}".rstrip("0").rstrip(".")


def finite(values: Iterable[Any]) -> list[float]:
    out = []
    for v in values:
        try:
            f = float(v)
        except (TypeError, ValueError):
            continue
        if math.isfinite(f):
            out.append(f)
    return out


def frame(fig: Figure, x: Axis, y: Axis, xticks: Sequence[float], yticks: Sequence[float],
           xlabel: str, ylabel: str) -> None:
    """Grid, frame, tick labels and axis titles."""
    left, right = min(x.a, x.b), max(x.a, x.b)
    top, bottom = min(y.a, y.b), max(y.a, y.b)
    for t in xticks:
        px = x(t)
        if left - 0.5 <= px <= right + 0.5:
            fig.add(Line(px, top, px, bottom, GRID, 0.6),
                    Text(px, bottom + 12, fmt(t), 8, "middle", MUTED))
    for t in yticks:
        py = y(t)
        if top - 0.5 <= py <= bottom + 0.5:
            fig.add(Line(left, py, right, py, GRID, 0.6),
                    Text(left - 4, py + 3, fmt(t), 8, "end", MUTED))
    fig.add(Rect(left, top, right - left, bottom - top, INK, None, 1.0),
            Text((left + right) / 2, bottom + 25, xlabel, 8.5, "middle"),
            Text(4, top - 8, ylabel, 8.5, "start"))


def legend(fig: Figure, x: float, y: float, entries: Sequence[tuple[str, str, tuple | None, str]]) -> None:
    """Legend rows: (colour, label, dash, kind 'line' | 'dot')."""
    for i, (colour, label, dash, kind) in enumerate(entries):
        yy = y + i * 12
        if kind == "dot":
            fig.add(Circle(x + 8, yy - 3, 3.2, None, colour))
        else:
            fig.add(Line(x, yy - 3, x + 16, yy - 3, colour, 1.8, dash))
        fig.add(Text(x + 20, yy, label, 8))


def legend_grid(fig: Figure, x: float, y: float, width: float,
                 entries: Sequence[tuple[str, str, tuple | None, str]], columns: int = 2) -> None:
    """Legend entries in columns, filled row by row."""
    col_w = width / columns
    for i, entry in enumerate(entries):
        legend(fig, x + (i % columns) * col_w, y + (i // columns) * 12, [entry])


def empty_figure(title: str, message: str, width: float = 360, height: float = 120) -> Figure:
    """A placeholder that says why a picture cannot be drawn."""
    fig = Figure(width, height, title)
    fig.add(Rect(1, 1, width - 2, height - 2, MUTED, None, 0.8),
            Text(width / 2, height / 2 + 6, message, 8.5, "middle", MUTED))
    return fig


# --- renderers ------------------------------------------------------------------------------------

def _num(v: float) -> str:
    return f"{v:.1f}".rstrip("0").rstrip(".") if abs(v) < 1e6 else f"{v:.0f}"


def _dash_attr(dash) -> str:
    return f' stroke-dasharray="{" ".join(_num(d) for d in dash)}"' if dash else ""


def to_svg(fig: Figure, css_class: str = "drawing") -> str:
    """The figure as an inline SVG string (user text escaped), scaling to its container."""
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" class={quoteattr(css_class)} '
           f'viewBox="0 0 {_num(fig.width)} {_num(fig.height)}" role="img" '
           f'aria-label={quoteattr(fig.title)} font-family="sans-serif">',
           f"<title>{escape(fig.title)}</title>",
           f'<rect x="0" y="0" width="{_num(fig.width)}" height="{_num(fig.height)}" fill="#ffffff"/>']
    for s in fig.items:
        if isinstance(s, Line):
            out.append(f'<line x1="{_num(s.x1)}" y1="{_num(s.y1)}" x2="{_num(s.x2)}" y2="{_num(s.y2)}" '
                       f'stroke="{s.stroke}" stroke-width="{_num(s.width)}"{_dash_attr(s.dash)}/>')
        elif isinstance(s, Polyline):
            pts = " ".join(f"{_num(a)},{_num(b)}" for a, b in s.points)
            tag = "polygon" if s.fill else "polyline"
            out.append(f'<{tag} points="{pts}" fill="{s.fill or "none"}" stroke="{s.stroke or "none"}" '
                       f'stroke-width="{_num(s.width)}"{_dash_attr(s.dash)}/>')
        elif isinstance(s, Circle):
            out.append(f'<circle cx="{_num(s.cx)}" cy="{_num(s.cy)}" r="{_num(s.r)}" '
                       f'fill="{s.fill or "none"}" stroke="{s.stroke or "none"}" '
                       f'stroke-width="{_num(s.width)}"{_dash_attr(s.dash)}/>')
        elif isinstance(s, Rect):
            out.append(f'<rect x="{_num(s.x)}" y="{_num(s.y)}" width="{_num(s.w)}" height="{_num(s.h)}" '
                       f'fill="{s.fill or "none"}" stroke="{s.stroke or "none"}" stroke-width="{_num(s.width)}"/>')
        elif isinstance(s, Text):
            weight = ' font-weight="bold"' if s.bold else ""
            out.append(f'<text x="{_num(s.x)}" y="{_num(s.y)}" font-size="{_num(s.size)}" '
                       f'text-anchor="{s.anchor}" fill="{s.fill}"{weight}>{escape(s.text)}</text>')
    out.append("</svg>")
    return "".join(out)
