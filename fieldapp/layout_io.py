"""The pile layout from a CAD drawing (DXF, read with ``ezdxf``): preview, then apply.

On the chosen layer every CIRCLE, and every block INSERT whose block draws a circle, is a pile:
its centre is the pile's position and its diameter the pile's diameter. The nearest TEXT or
MTEXT (on any layer) within ``text_distance_m`` of the centre is its mark. The drawing's units
come from its ``$INSUNITS`` header; a drawing that does not say (0 or missing) needs the units
stated by the engineer, and a drawing that says something else than the engineer is refused.

``preview`` stores nothing. It compares the drawing with the schedule: new piles, piles moved
(and by how much), unchanged piles, marks that clash (one mark on two circles), circles with no
mark, and piles whose diameter in the drawing differs from the schedule.

``apply_layout`` is all or nothing and deliberately simple: it only MOVES existing piles to the
drawn position and CREATES new piles copying a named template pile's design (type, levels,
loads, reinforcement, ground model; on no cap) with the drawn position and diameter. It refuses
the whole drawing while anything in the preview is unresolved (a clash, a circle with no mark,
a diameter that differs from the schedule, new piles without a template). The rows go through
the schedule import (``schedule_io.import_schedule``), so they are checked and stored exactly
as an imported CSV is, with its audit entry and recheck; the drawing itself is kept by hash as
``layouts/<sha256>.dxf`` in the data folder.
"""

from __future__ import annotations

import hashlib
import io
import json
import math
from dataclasses import dataclass, field
from pathlib import Path

from fieldapp import schedule_io
from fieldapp.queries import audit
from fieldapp.queries import piles as piles_q
from fieldapp.queries.piles import MARK_MAX, label_problem

# $INSUNITS codes of the DXF reference -> metres per drawing unit (the ones a layout uses).
INSUNITS_M = {1: ("in", 0.0254), 2: ("ft", 0.3048), 4: ("mm", 0.001), 5: ("cm", 0.01), 6: ("m", 1.0)}
STATED_UNITS_M = {"m": 1.0, "mm": 0.001}
DEFAULT_TEXT_DISTANCE_M = 1.0
MOVE_TOL_M = 0.001       # a pile drawn within 1 mm of its schedule position is unchanged
DIAMETER_TOL_MM = 1.0    # a drawn diameter within 1 mm of the schedule's is the same
MAX_BYTES = 50 * 1024 * 1024


class LayoutRefused(ValueError):
    """The drawing cannot be read as a layout; the message says why."""


@dataclass(frozen=True)
class DrawnPile:
    """One circle (or block) on the layer: centre in m, diameter in mm, its mark or None."""

    x_m: float
    y_m: float
    diameter_mm: float
    source: str
    mark: str | None = None
    text_distance_m: float | None = None

    def where(self) -> str:
        """'circle at (1010.000, 2080.000)' for messages."""
        return f"{self.source} at ({self.x_m:.3f}, {self.y_m:.3f})"


@dataclass
class LayoutPreview:
    """What applying the drawing would do; ``problems`` stop it."""

    layer: str
    units: str
    drawn: list[DrawnPile] = field(default_factory=list)
    new: list[DrawnPile] = field(default_factory=list)
    moved: list[tuple[DrawnPile, piles_q.PileRow, float]] = field(default_factory=list)
    unchanged: list[DrawnPile] = field(default_factory=list)
    clashes: dict[str, list[DrawnPile]] = field(default_factory=dict)
    unmarked: list[DrawnPile] = field(default_factory=list)
    diameter_differs: list[tuple[DrawnPile, piles_q.PileRow]] = field(default_factory=list)
    not_drawn: list[str] = field(default_factory=list)
    problems: list[str] = field(default_factory=list)
    sha256: str = ""

    @property
    def can_apply(self) -> bool:
        """True when nothing stops the drawing from being applied as it is."""
        return not (self.problems or self.clashes or self.unmarked or self.diameter_differs)

    def fingerprint(self) -> str:
        """A hash of what applying would do (the apply refuses when it changed since the preview)."""
        body = {"sha": self.sha256, "new": [(d.mark, d.x_m, d.y_m, d.diameter_mm) for d in self.new],
                "moved": [(d.mark, d.x_m, d.y_m, p.easting_m, p.northing_m) for d, p, _ in self.moved]}
        return hashlib.sha256(json.dumps(body, sort_keys=True).encode()).hexdigest()[:32]

    def summary(self) -> str:
        """One sentence for the screen and the command line."""
        text = (f"{len(self.drawn)} pile(s) on layer {self.layer} ({self.units}): {len(self.new)} new, "
                f"{len(self.moved)} moved, {len(self.unchanged)} unchanged")
        if self.clashes:
            text += f"; marks that clash: {', '.join(sorted(self.clashes))}"
        if self.unmarked:
            text += f"; {len(self.unmarked)} circle(s) with no mark"
        if self.diameter_differs:
            text += f"; {len(self.diameter_differs)} diameter(s) differ from the schedule"
        return text + "."


def _read(data: bytes):
    import ezdxf
    from ezdxf import recover

    if len(data) > MAX_BYTES:
        raise LayoutRefused(f"the drawing is larger than {MAX_BYTES // (1024 * 1024)} MB")
    if not data.strip():
        raise LayoutRefused("the drawing is empty")
    try:
        doc, _auditor = recover.read(io.BytesIO(data))
    except (ezdxf.DXFStructureError, ezdxf.DXFError, OSError, UnicodeDecodeError, ValueError) as exc:
        raise LayoutRefused(f"the file is not a DXF drawing ezdxf can read ({exc})") from None
    return doc


def drawing_scale(doc, stated: str | None) -> tuple[str, float]:
    """(units name, metres per drawing unit) from $INSUNITS or the engineer's statement."""
    code = int(doc.header.get("$INSUNITS", 0) or 0)
    if stated is not None and stated not in STATED_UNITS_M:
        raise LayoutRefused(f"units must be one of {', '.join(STATED_UNITS_M)}, got {stated!r}")
    if code == 0:
        if stated is None:
            raise LayoutRefused("the drawing does not say its units ($INSUNITS is 0 or missing): "
                                "state them (m or mm)")
        return stated, STATED_UNITS_M[stated]
    if code not in INSUNITS_M:
        raise LayoutRefused(f"the drawing's units ($INSUNITS {code}) are not ones a layout uses "
                            f"({', '.join(name for name, _ in INSUNITS_M.values())})")
    name, scale = INSUNITS_M[code]
    if stated is not None and STATED_UNITS_M[stated] != scale:
        raise LayoutRefused(f"the drawing says its units are {name} ($INSUNITS {code}), not {stated}: "
                            "correct the statement or the drawing")
    return name, scale


def _texts(msp, scale: float) -> list[tuple[str, float, float]]:
    out = []
    for entity in msp.query("TEXT MTEXT"):
        if entity.dxftype() == "TEXT":
            text = entity.dxf.text
            aligned = entity.dxf.get("halign", 0) or entity.dxf.get("valign", 0)
            point = entity.dxf.align_point if aligned and entity.dxf.hasattr("align_point") else entity.dxf.insert
        else:
            text = entity.plain_text()
            point = entity.dxf.insert
        text = " ".join(str(text).split())
        if text:
            out.append((text, point.x * scale, point.y * scale))
    return out


def read_layout(data: bytes, layer: str, units: str | None = None,
                text_distance_m: float = DEFAULT_TEXT_DISTANCE_M) -> tuple[list[DrawnPile], str, list[str]]:
    """(piles drawn on the layer, units name, problems) from DXF bytes; LayoutRefused when the
    drawing cannot be used at all (not DXF, no units, no such layer, nothing on it)."""
    if not (0 < text_distance_m <= 100):
        raise LayoutRefused(f"text distance must be more than 0 and at most 100 m, got {text_distance_m:g}")
    doc = _read(data)
    name, scale = drawing_scale(doc, units)
    msp = doc.modelspace()
    wanted = layer.strip().lower()
    layers = sorted({e.dxf.layer for e in msp})
    if wanted not in {x.lower() for x in layers}:
        raise LayoutRefused(f"layer {layer!r} is not in the drawing (layers with entities: "
                            f"{', '.join(layers) or 'none'})")
    problems, drawn = [], []
    for entity in msp:
        if entity.dxf.layer.lower() != wanted:
            continue
        if entity.dxftype() == "CIRCLE":
            c, r, source = entity.dxf.center, entity.dxf.radius, "circle"
        elif entity.dxftype() == "INSERT":
            circles = [v for v in entity.virtual_entities() if v.dxftype() == "CIRCLE"]
            source = f"block {entity.dxf.name}"
            if not circles:
                problems.append(f"{source} at ({entity.dxf.insert.x * scale:.3f}, {entity.dxf.insert.y * scale:.3f}) "
                                "draws no circle (or is scaled unevenly): its diameter is unknown")
                continue
            big = max(circles, key=lambda v: v.dxf.radius)
            c, r = big.dxf.center, big.dxf.radius
        else:
            continue
        drawn.append(DrawnPile(c.x * scale, c.y * scale, 2.0 * r * scale * 1000.0, source))
    if not drawn and not problems:
        raise LayoutRefused(f"layer {layer!r} has no circles or blocks")
    texts = _texts(msp, scale)
    marked = []
    for pile in drawn:
        near = [(math.hypot(tx - pile.x_m, ty - pile.y_m), text) for text, tx, ty in texts]
        near = [n for n in near if n[0] <= text_distance_m]
        if near:
            distance, text = min(near)
            pile = DrawnPile(pile.x_m, pile.y_m, pile.diameter_mm, pile.source, text, distance)
            if len(text) > MARK_MAX:
                problems.append(f"{pile.where()}: mark {text[:20]!r}... is longer than {MARK_MAX} characters")
            elif label_problem("mark", text):
                problems.append(f"{pile.where()}: {label_problem('mark', text)}")
        marked.append(pile)
    return marked, name, problems


def preview(conn, project_id: int, data: bytes, layer: str, units: str | None = None,
            text_distance_m: float = DEFAULT_TEXT_DISTANCE_M) -> LayoutPreview:
    """What the drawing would do to the schedule; stores nothing. LayoutRefused as read_layout."""
    drawn, name, problems = read_layout(data, layer, units, text_distance_m)
    result = LayoutPreview(layer=layer, units=name, drawn=drawn, problems=problems,
                           sha256=hashlib.sha256(data).hexdigest())
    by_mark: dict[str, list[DrawnPile]] = {}
    for pile in drawn:
        if pile.mark is None:
            result.unmarked.append(pile)
        else:
            by_mark.setdefault(pile.mark, []).append(pile)
    result.clashes = {mark: found for mark, found in by_mark.items() if len(found) > 1}
    schedule = {p.mark: p for p in piles_q.list_piles(conn, project_id)}
    for mark, (pile, *rest) in sorted(by_mark.items()):
        if rest:
            continue
        row = schedule.get(mark)
        if row is None:
            result.new.append(pile)
            continue
        if abs(row.diameter_mm - pile.diameter_mm) > DIAMETER_TOL_MM:
            result.diameter_differs.append((pile, row))
        moved = math.hypot(pile.x_m - row.easting_m, pile.y_m - row.northing_m)
        if moved > MOVE_TOL_M:
            result.moved.append((pile, row, moved))
        else:
            result.unchanged.append(pile)
    result.not_drawn = sorted(set(schedule) - set(by_mark), key=piles_q.natural_key)
    return result


def layout_path(data_dir: str | Path, sha256: str) -> Path:
    """Where a drawing with this hash is kept."""
    return Path(data_dir) / "layouts" / f"{sha256}.dxf"


def keep(data_dir: str | Path, data: bytes) -> str:
    """Keep the drawing's bytes by hash (content-addressed, written once); returns the hash."""
    sha = hashlib.sha256(data).hexdigest()
    path = layout_path(data_dir, sha)
    if not path.exists():
        path.parent.mkdir(parents=True, exist_ok=True)
        tmp = path.parent / f".tmp-{path.name}"  # as the photos: a backup skips .tmp-* files
        tmp.write_bytes(data)
        tmp.replace(path)
    return sha


class _Refused(Exception):
    """Rolls the apply back when the schedule import refuses its rows."""


def schedule_rows(conn, project_id: int, result: LayoutPreview, template_mark: str | None) -> list[dict]:
    """The schedule rows the drawing gives (moved and new piles), keyed by schedule_io.COLUMNS."""
    current = {row["mark"]: row for row in schedule_io.export_rows(conn, project_id)}
    rows = []
    for pile, row, _ in result.moved:
        rows.append(dict(current[row.mark], easting_m=pile.x_m, northing_m=pile.y_m))
    if result.new:
        template = current.get((template_mark or "").strip())
        for pile in result.new:
            rows.append(dict(template, mark=pile.mark, cap="", easting_m=pile.x_m, northing_m=pile.y_m,
                             diameter_mm=round(pile.diameter_mm, 1)))
    return rows


def apply_layout(conn, project_id: int, data: bytes, filename: str, layer: str, units: str | None,
                 text_distance_m: float, template_mark: str | None, actor: str, data_dir: str | Path,
                 fingerprint: str | None = None) -> tuple[LayoutPreview, schedule_io.ImportResult]:
    """Apply the whole drawing or nothing (see the module docstring); returns (preview, result).

    ``fingerprint`` from the preview the engineer saw: when given and the drawing would now do
    something else (the schedule changed meanwhile), nothing is applied.
    """
    from fieldapp import db

    result = preview(conn, project_id, data, layer, units, text_distance_m)
    outcome = schedule_io.ImportResult()

    def refuse(message: str):
        outcome.errors.append(schedule_io.RowError(0, "", message))
        return result, outcome

    if not result.can_apply:
        for problem in result.problems:
            outcome.errors.append(schedule_io.RowError(0, "", problem))
        for mark, found in sorted(result.clashes.items()):
            outcome.errors.append(schedule_io.RowError(0, "mark", f"mark {mark} is on {len(found)} circles: "
                                                       + "; ".join(p.where() for p in found)))
        for pile in result.unmarked:
            outcome.errors.append(schedule_io.RowError(0, "mark", f"{pile.where()} has no mark within "
                                                       f"{text_distance_m:g} m"))
        for pile, row in result.diameter_differs:
            outcome.errors.append(schedule_io.RowError(0, "diameter_mm", f"{pile.mark}: drawn {pile.diameter_mm:g} mm, "
                                                       f"the schedule says {row.diameter_mm:g} mm; the layout "
                                                       "import only moves piles: change the schedule or the drawing"))
        return result, outcome
    if fingerprint and fingerprint != result.fingerprint():
        return refuse("the schedule changed since the preview: preview the drawing again")
    if result.new and piles_q.get_pile(conn, project_id, (template_mark or "").strip()) is None:
        return refuse(f"{len(result.new)} new pile(s) ({', '.join(p.mark for p in result.new[:10])}) need a "
                      "template pile: name an existing pile whose design they copy"
                      + (f" ({template_mark!r} is not in the schedule)" if template_mark else ""))
    if not result.new and not result.moved:
        return refuse("nothing to apply: every pile in the drawing is where the schedule has it")
    rows = schedule_rows(conn, project_id, result, template_mark)
    name = Path(filename or "layout.dxf").name
    keep(data_dir, data)
    try:
        with db.write(conn):
            outcome = schedule_io.import_schedule(conn, project_id, schedule_io.to_csv(rows),
                                                  f"{name} (layer {layer}).csv", actor)
            if not outcome.ok:
                raise _Refused
            audit.append(conn, project_id, actor, "layout imported", name, {
                "sha256": result.sha256, "layer": layer, "units": result.units,
                "created": [p.mark for p in result.new], "moved": {p.mark: round(d, 4) for p, _, d in result.moved},
                "template": template_mark if result.new else None})
    except _Refused:
        marks = [row["mark"] for row in rows]
        outcome.errors = [schedule_io.RowError(0, e.column, f"pile {marks[e.row - 2]}: {e.message}")
                          if 2 <= e.row < len(marks) + 2 else e for e in outcome.errors]
    return result, outcome
