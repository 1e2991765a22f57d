"""The review's three pictures (and the record's site plan), drawn from result objects.

Each picture is built once as a small scene of shapes in a y-down coordinate space
(:class:`Figure`); :func:`to_svg` turns it into an SVG string for the page and
:func:`to_reportlab` into a reportlab ``Drawing`` for the PDF, so screen and record show the
same thing. Nothing here computes engineering: the curves, the load point and the shares come
from ``design_core`` results; this module only scales and draws them.

Pictures:
- :func:`capacity_figure`: design (and ultimate) resistance against toe level, the design load
  line, the required toe, the design toe and the as-built toe.
- :func:`interaction_figure`: the section's N-M interaction with as-built cover and with design
  cover, and the load point.
- :func:`cap_plan_figure`: the cap in plan, design and as-built positions, deviation arrows at
  an exaggerated and stated scale, each pile's new share.
- :func:`site_plan_figure`: every pile of the project coloured by status, deviation arrows.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any, Iterable, Sequence
from xml.sax.saxutils import escape, quoteattr

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
    "meets": "meets design, unsigned",
    "needs": "needs engineer",
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


def _thin(points: Iterable[tuple[float, float]], step: float = 0.8) -> tuple[tuple[float, float], ...]:
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


def _fmt(v: float) -> str:
    if abs(v) >= 1000:
        return f"{v:,.0f}"
    if abs(v - round(v)) < 1e-9:
        return f"{v:.0f}"
    return f"{v:.1f}" if abs(v) >= 10 else f"{v:.2f}".rstrip("0").rstrip(".")


def _finite(values: Iterable[Any]) -> list[float]:
    out = []
    for v in values:
        try:
            f = float(v)
        except (TypeError, ValueError):
            continue
        if math.isfinite(f):
            out.append(f)
    return out


def _frame(fig: Figure, x: Axis, y: Axis, xticks: Sequence[float], yticks: Sequence[float],
           xlabel: str, ylabel: str) -> None:
    """Grid, frame, tick labels and axis titles."""
    left, right = min(x.a, x.b), max(x.a, x.b)
    top, bottom = min(y.a, y.b), max(y.a, y.b)
    for t in xticks:
        px = x(t)
        if left - 0.5 <= px <= right + 0.5:
            fig.add(Line(px, top, px, bottom, GRID, 0.6),
                    Text(px, bottom + 12, _fmt(t), 8, "middle", MUTED))
    for t in yticks:
        py = y(t)
        if top - 0.5 <= py <= bottom + 0.5:
            fig.add(Line(left, py, right, py, GRID, 0.6),
                    Text(left - 4, py + 3, _fmt(t), 8, "end", MUTED))
    fig.add(Rect(left, top, right - left, bottom - top, INK, None, 1.0),
            Text((left + right) / 2, bottom + 25, xlabel, 8.5, "middle"),
            Text(4, top - 8, ylabel, 8.5, "start"))


def _legend(fig: Figure, x: float, y: float, entries: Sequence[tuple[str, str, tuple | None, str]]) -> None:
    """Legend rows: (colour, label, dash, kind 'line' | 'dot')."""
    for i, (colour, label, dash, kind) in enumerate(entries):
        yy = y + i * 12
        if kind == "dot":
            fig.add(Circle(x + 8, yy - 3, 3.2, None, colour))
        else:
            fig.add(Line(x, yy - 3, x + 16, yy - 3, colour, 1.8, dash))
        fig.add(Text(x + 20, yy, label, 8))


def _legend_grid(fig: Figure, x: float, y: float, width: float,
                 entries: Sequence[tuple[str, str, tuple | None, str]], columns: int = 2) -> None:
    """Legend entries in columns, filled row by row."""
    col_w = width / columns
    for i, entry in enumerate(entries):
        _legend(fig, x + (i % columns) * col_w, y + (i // columns) * 12, [entry])


def empty_figure(title: str, message: str, width: float = 360, height: float = 120) -> Figure:
    """A placeholder that says why a picture cannot be drawn."""
    fig = Figure(width, height, title)
    fig.add(Rect(1, 1, width - 2, height - 2, MUTED, None, 0.8),
            Text(width / 2, height / 2 + 6, message, 8.5, "middle", MUTED))
    return fig


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
    z = _finite(curve.toe_levels)
    design = _finite(curve.design)
    ultimate = _finite(getattr(curve, "ultimate", ()))
    if len(z) != len(design) or len(z) < 2:
        return empty_figure(title, "the capacity curve is incomplete", width)
    levels = z + _finite([required_toe_m, asbuilt_toe_m, design_toe_m])
    forces = design + (ultimate if len(ultimate) == len(z) else []) + _finite([design_load_kn, 0.0])
    zlo, zhi = min(levels), max(levels)
    pad = max(0.05 * (zhi - zlo), 0.25)
    zlo, zhi = zlo - pad, zhi + pad
    fmax = max(forces) * 1.08 or 1.0
    plot = (46, 36, width - 12, height - 76)  # left, top, right, bottom
    x = Axis(0.0, fmax, plot[0], plot[2])
    y = Axis(zhi, zlo, plot[1], plot[3])
    fig = Figure(width, height, title)
    _frame(fig, x, y, nice_ticks(0, fmax), nice_ticks(zlo, zhi), "resistance (kN)", "toe level (m)")
    if len(ultimate) == len(z):
        fig.add(Polyline(_thin((x(f), y(v)) for v, f in zip(z, ultimate, strict=True)), MUTED, 1.0, (3, 2)))
    fig.add(Polyline(_thin((x(f), y(v)) for v, f in zip(z, design, strict=True)), DESIGN, 1.8))
    legend = [(DESIGN, "design resistance", None, "line")]
    if len(ultimate) == len(z):
        legend.append((MUTED, "ultimate", (3, 2), "line"))
    if design_load_kn is not None and math.isfinite(design_load_kn):
        px = x(design_load_kn)
        fig.add(Line(px, plot[1], px, plot[3], INK, 1.4, (6, 3)),
                Text(px + 3, plot[1] + 10, f"load {_fmt(design_load_kn)} kN", 8, "start", INK, True))
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
    _legend_grid(fig, plot[0], plot[3] + 40, width - plot[0] - 4, legend)
    return fig


# --- 2. axial force - moment interaction --------------------------------------------------------

def _curve_points(curve: Any, factor: float = 1.0) -> tuple[list[float], list[float]]:
    n = _finite(getattr(curve, "n", ()))
    m = _finite(getattr(curve, "m", ()))
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
    _frame(fig, x, y, nice_ticks(0, mmax), nice_ticks(nlo - npad, nhi + npad), f"moment M (kNm); curves {basis}",
           "axial force N (kN, compression +)")
    if nlo < 0 < nhi:
        fig.add(Line(plot[0], y(0.0), plot[2], y(0.0), MUTED, 0.8))
    legend = []
    if len(n_de) >= 2:
        fig.add(Polyline(_thin((x(mm), y(nn)) for nn, mm in zip(n_de, m_de, strict=True)), DESIGN, 1.4, (5, 3)))
        legend.append((DESIGN, f"design cover {_fmt(float(getattr(design, 'cover_mm', 0)))} mm", (5, 3),
                       "line"))
    if len(n_ab) >= 2:
        fig.add(Polyline(_thin((x(mm), y(nn)) for nn, mm in zip(n_ab, m_ab, strict=True)), ASBUILT, 1.8))
        legend.append((ASBUILT, f"as-built cover {_fmt(float(getattr(asbuilt, 'cover_mm', 0)))} mm", None,
                       "line"))
    if point:
        px, py = x(point[1]), y(point[0])
        fig.add(Circle(px, py, 4.5, INK, "#ffd400", 1.4),
                Text(px + 7, py - 5, f"load N {_fmt(point[0])} kN, M {_fmt(point[1])} kNm", 8, "start",
                     INK, True))
        legend.append((INK, "load point", None, "dot"))
    else:
        fig.note = "no load point"
    _legend_grid(fig, plot[0], plot[3] + 40, width - plot[0] - 4, legend)
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
    got = _finite([n, m])
    return (got[0], abs(got[1])) if len(got) == 2 else None


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
    worst = max(_finite(deviations_m), default=0.0)
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
            Text(x + length * scale + 5, y + 3, f"{_fmt(length)} m {label}", 8))


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
    _legend(fig, width - 110, height - 40, [(DESIGN, "design position", (3, 2), "line"),
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


def to_reportlab(fig: Figure, width: float | None = None):
    """The figure as a reportlab ``Drawing`` (y flipped to reportlab's y-up), optionally scaled
    to ``width`` points."""
    from reportlab.graphics.shapes import Circle as RCircle
    from reportlab.graphics.shapes import Drawing, Group, PolyLine, Polygon, String
    from reportlab.graphics.shapes import Line as RLine
    from reportlab.graphics.shapes import Rect as RRect
    from reportlab.lib.colors import HexColor

    h = fig.height
    colour_cache: dict[str, Any] = {}

    def col(value: str | None):
        if not value:
            return None
        if value not in colour_cache:
            colour_cache[value] = HexColor(value)
        return colour_cache[value]

    group = Group()
    for s in fig.items:
        if isinstance(s, Line):
            group.add(RLine(s.x1, h - s.y1, s.x2, h - s.y2, strokeColor=col(s.stroke), strokeWidth=s.width,
                            strokeDashArray=list(s.dash) if s.dash else None))
        elif isinstance(s, Polyline):
            flat = [v for a, b in s.points for v in (a, h - b)]
            if s.fill:
                group.add(Polygon(flat, fillColor=col(s.fill), strokeColor=col(s.stroke),
                                  strokeWidth=s.width if s.stroke else 0))
            else:
                group.add(PolyLine(flat, strokeColor=col(s.stroke), strokeWidth=s.width,
                                   strokeDashArray=list(s.dash) if s.dash else None))
        elif isinstance(s, Circle):
            group.add(RCircle(s.cx, h - s.cy, s.r, fillColor=col(s.fill), strokeColor=col(s.stroke),
                              strokeWidth=s.width if s.stroke else 0,
                              strokeDashArray=list(s.dash) if s.dash else None))
        elif isinstance(s, Rect):
            group.add(RRect(s.x, h - s.y - s.h, s.w, s.h, fillColor=col(s.fill), strokeColor=col(s.stroke),
                            strokeWidth=s.width if s.stroke else 0))
        elif isinstance(s, Text):
            group.add(String(s.x, h - s.y, s.text, fontSize=s.size, fillColor=col(s.fill),
                             textAnchor=s.anchor, fontName="Helvetica-Bold" if s.bold else "Helvetica"))
    factor = (width / fig.width) if width else 1.0
    drawing = Drawing(fig.width * factor, fig.height * factor)
    if factor != 1.0:
        group.scale(factor, factor)
    drawing.add(group)
    return drawing
