"""The certification record as a PDF, built with reportlab page by page.

Contents, in order: cover page (project, site, engineer, date, counts by verdict and by
disposition, the unsigned count in bold, the audit head hash); site plan coloured by status
with deviation arrows; the as-built schedule; one sheet per pile (record fields, every check
with value, limit and reason, the three pictures, photo thumbnails, history); the
non-conformance register; the rule set with each rule's source; the audit trail's head hash.
Every page's footer carries the safety caution (``fieldapp.CAUTION``).

The story is produced lazily (:class:`LazyStory`): each pile's sheet is read from the database
and drawn only when reportlab reaches it, so memory holds a few sheets at a time rather than the
whole project. Text that users typed is escaped before it goes into a Paragraph.

This module computes nothing and writes no SQL: it lays out what ``fieldapp.record.data`` and
the queries give it.
"""

from __future__ import annotations

import gc
import os
import sqlite3
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Any, Callable, Iterator
from xml.sax.saxutils import escape

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.platypus import (BaseDocTemplate, Flowable, Frame, Image, KeepTogether,
                                PageBreak, PageTemplate, Paragraph, Spacer, Table, TableStyle)

from fieldapp import CAUTION, drawings
from fieldapp.queries import audit, projects, records
from fieldapp.queries import review as review_q
from fieldapp.record import data

PAGE = A4
MARGIN = 16 * mm
FOOTER_H = 24 * mm
SCHEDULE_ROWS_PER_TABLE = 60
MAX_THUMBS = 6
STATUS_RGB = {k: colors.HexColor(v) for k, v in drawings.STATUS_COLOURS.items()}

def _fonts() -> tuple[str, str, str]:
    """Regular, bold and monospaced fonts: the PDF standard fonts. They need no embedding and
    draw about three times faster than an embedded TrueType font; reportlab still shows Latin
    text, Greek letters and common symbols (phi, >=, en dash, euro). Scripts outside those
    (e.g. CJK) would show as boxes, as they would in the DejaVu fonts too."""
    return "Helvetica", "Helvetica-Bold", "Courier"


@dataclass(frozen=True)
class Styles:
    """Paragraph styles of the record."""

    body: ParagraphStyle
    small: ParagraphStyle
    tiny: ParagraphStyle
    h1: ParagraphStyle
    h2: ParagraphStyle
    h3: ParagraphStyle
    mono: ParagraphStyle
    caution: ParagraphStyle
    regular: str
    bold: str


def _styles() -> Styles:
    regular, bold, mono = _fonts()
    body = ParagraphStyle("body", fontName=regular, fontSize=9, leading=11.5, alignment=TA_LEFT)
    return Styles(
        body=body,
        small=ParagraphStyle("small", parent=body, fontSize=7.5, leading=9),
        tiny=ParagraphStyle("tiny", parent=body, fontSize=6.5, leading=7.8),
        h1=ParagraphStyle("h1", parent=body, fontName=bold, fontSize=18, leading=22, spaceAfter=8),
        h2=ParagraphStyle("h2", parent=body, fontName=bold, fontSize=13, leading=16, spaceBefore=4, spaceAfter=6),
        h3=ParagraphStyle("h3", parent=body, fontName=bold, fontSize=10, leading=13, spaceBefore=6, spaceAfter=3),
        mono=ParagraphStyle("mono", parent=body, fontName=mono, fontSize=7.5, leading=9.5),
        caution=ParagraphStyle("caution", parent=body, fontSize=7, leading=8.5),
        regular=regular, bold=bold)


def _t(value: Any) -> str:
    """User or stored text made safe for a Paragraph."""
    return escape("" if value is None else str(value))


def _bold_caution() -> str:
    """The caution with its first word in bold."""
    head, _, rest = CAUTION.partition(":")
    return f"<b>{_t(head)}:</b>{_t(rest)}" if rest else _t(CAUTION)


def _plain(value: Any) -> str:
    """A value for a plain table cell (not a Paragraph: no markup, so no escaping)."""
    if isinstance(value, float):
        return f"{value:.3f}".rstrip("0").rstrip(".")
    return "" if value is None else str(value)


def _n(value: Any, digits: int = 2) -> str:
    if value is None:
        return "—"
    try:
        return f"{float(value):,.{digits}f}"
    except (TypeError, ValueError):
        return _t(value)


class LazyStory(list):
    """A story list that pulls flowables from an iterator as reportlab consumes it.

    reportlab's build loop asks ``len(story)`` before each flowable, indexes ``story[0]``, deletes
    it and may insert split parts at the front; keeping a short buffer filled from the iterator
    in ``__len__`` is enough for all of that.
    """

    def __init__(self, source: Iterator[Flowable], ahead: int = 12):
        super().__init__()
        self._source = source
        self._ahead = ahead
        self._done = False

    def __len__(self) -> int:
        while not self._done and super().__len__() < self._ahead:
            try:
                self.append(next(self._source))
            except StopIteration:
                self._done = True
        return super().__len__()


class Tick(Flowable):
    """A zero-size flowable that reports progress when reportlab places it on a page."""

    def __init__(self, callback: Callable[[], None]):
        super().__init__()
        self._callback = callback
        self.width = self.height = 0

    def wrap(self, available_width, available_height):
        return 0, 0

    def draw(self):
        self._callback()


class FigureFlowable(Flowable):
    """A ``drawings.Figure`` drawn straight onto the page with canvas calls, scaled to
    ``width`` points (the same scene as the SVG on screen; faster than reportlab's shape graph)."""

    def __init__(self, fig: drawings.Figure, width: float):
        super().__init__()
        self.fig = fig
        self.width = width
        self.height = fig.height * width / fig.width

    def wrap(self, available_width, available_height):
        return self.width, self.height

    def draw(self):
        c, f, top = self.canv, self.width / self.fig.width, self.height
        regular, bold, _ = _fonts()
        colour_cache: dict[str, Any] = {}

        def col(value):
            if value not in colour_cache:
                colour_cache[value] = colors.HexColor(value)
            return colour_cache[value]

        def pen(stroke, width, dash):
            c.setStrokeColor(col(stroke))
            c.setLineWidth(width * f)
            c.setDash([d * f for d in dash] if dash else [])

        c.saveState()
        for s in self.fig.items:
            if isinstance(s, drawings.Line):
                pen(s.stroke, s.width, s.dash)
                c.line(s.x1 * f, top - s.y1 * f, s.x2 * f, top - s.y2 * f)
            elif isinstance(s, drawings.Polyline):
                if len(s.points) < 2:
                    continue
                path = c.beginPath()
                path.moveTo(s.points[0][0] * f, top - s.points[0][1] * f)
                for x, y in s.points[1:]:
                    path.lineTo(x * f, top - y * f)
                if s.fill:
                    path.close()
                    c.setFillColor(col(s.fill))
                if s.stroke:
                    pen(s.stroke, s.width, s.dash)
                c.drawPath(path, stroke=1 if s.stroke else 0, fill=1 if s.fill else 0)
            elif isinstance(s, drawings.Circle):
                if s.stroke:
                    pen(s.stroke, s.width, s.dash)
                if s.fill:
                    c.setFillColor(col(s.fill))
                c.circle(s.cx * f, top - s.cy * f, s.r * f, stroke=1 if s.stroke else 0, fill=1 if s.fill else 0)
            elif isinstance(s, drawings.Rect):
                if s.stroke:
                    pen(s.stroke, s.width, None)
                if s.fill:
                    c.setFillColor(col(s.fill))
                c.rect(s.x * f, top - (s.y + s.h) * f, s.w * f, s.h * f, stroke=1 if s.stroke else 0,
                       fill=1 if s.fill else 0)
            elif isinstance(s, drawings.Text):
                c.setFillColor(col(s.fill))
                c.setFont(bold if s.bold else regular, s.size * f)
                x, y = s.x * f, top - s.y * f
                if s.anchor == "middle":
                    c.drawCentredString(x, y, s.text)
                elif s.anchor == "end":
                    c.drawRightString(x, y, s.text)
                else:
                    c.drawString(x, y, s.text)
        c.restoreState()


@dataclass(frozen=True)
class BuildResult:
    """What a build produced."""

    path: str
    pages: int
    piles: int
    head_hash: str
    chain_ok: bool


class _Doc(BaseDocTemplate):
    def __init__(self, filename: str, footer: Callable, **kw):
        super().__init__(filename, pagesize=PAGE, leftMargin=MARGIN, rightMargin=MARGIN,
                         topMargin=MARGIN, bottomMargin=FOOTER_H, **kw)
        frame = Frame(MARGIN, FOOTER_H, PAGE[0] - 2 * MARGIN, PAGE[1] - MARGIN - FOOTER_H, id="body",
                      leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0)
        self.addPageTemplates([PageTemplate(id="page", frames=[frame], onPage=footer)])


def build(conn: sqlite3.Connection, project_id: int, out_path: str | Path, *, photo_dir: str | Path | None = None,
          progress: Callable[[int, int], None] | None = None, generated_at: datetime | None = None) -> BuildResult:
    """Write the certification record of a project to ``out_path`` (through a temporary file
    beside it, renamed when complete). ``progress(done, total)`` is called as each pile's sheet
    is placed. Returns pages, piles and the audit head hash printed."""
    st = _styles()
    project = projects.get(conn, project_id)
    if project is None:
        raise LookupError(f"project {project_id} does not exist")
    when = (generated_at or datetime.now(timezone.utc)).strftime("%Y-%m-%d %H:%M UTC")
    statuses = review_q.pile_statuses(conn, project_id)
    currents = records.current_for_project(conn, project_id)
    rows = [data.schedule_row(s, currents.get(s.id)) for s in statuses]
    chain = audit.verify_chain(conn, project_id)
    head = audit.head_hash(conn, project_id)
    total = len(statuses)
    done = [0]

    def tick():
        done[0] += 1
        if progress:
            progress(done[0], total)

    width = PAGE[0] - 2 * MARGIN
    caution = Paragraph(_bold_caution(), st.caution)     # wrapped once, drawn on every page
    _, caution_h = caution.wrap(width, FOOTER_H)

    def footer(canvas, doc):
        canvas.saveState()
        text, h = caution, caution_h
        canvas.setStrokeColor(colors.HexColor("#b35c00"))
        canvas.setLineWidth(0.8)
        canvas.line(MARGIN, FOOTER_H - 3 * mm, MARGIN + width, FOOTER_H - 3 * mm)
        text.drawOn(canvas, MARGIN, FOOTER_H - 4 * mm - h)
        canvas.setFont(st.regular, 7)
        canvas.setFillColor(colors.HexColor("#3a3a3a"))
        canvas.drawString(MARGIN, 7 * mm, f"{project.name} · certification record · {when}")
        canvas.drawRightString(MARGIN + width, 7 * mm, f"page {doc.page}")
        canvas.restoreState()

    def story() -> Iterator[Flowable]:
        yield from _cover(st, project, when, rows, head, chain)
        yield PageBreak()
        yield Paragraph("Site plan", st.h2)
        yield FigureFlowable(data.site_plan(statuses, currents, 760, 1000), PAGE[0] - 2 * MARGIN)
        yield PageBreak()
        yield from _schedule(st, rows)
        for status in statuses:
            if status.current_version == 0:      # not recorded: listed in the schedule, no sheet
                yield Tick(tick)
                continue
            yield PageBreak()
            sheet = data.pile_sheet(conn, project_id, status)
            yield from _pile_sheet(st, sheet, photo_dir)
            yield Tick(tick)
            gc.freeze()
        yield PageBreak()
        yield from _register(st, review_q.nonconformances(conn, project_id))
        yield PageBreak()
        yield from _rules(st, conn, project_id)
        yield from _audit(st, head, chain)

    out_path = Path(out_path)
    tmp = out_path.with_name(out_path.name + ".part")
    doc = _Doc(str(tmp), footer, title=f"Certification record: {project.name}", author="Toeline",
               subject="Pile certification record")
    # The finished pages stay in memory until reportlab writes the file, so the heap grows with
    # the project; Python's cyclic collector would walk that growing heap again and again
    # (the 5,000-pile build took 5.7 times the 1,000-pile one in CPU). Objects that survive
    # are moved out of its sight (gc.freeze) as each pile's sheet is laid out.
    gc.collect()
    try:
        doc.build(LazyStory(story()))
    finally:
        gc.unfreeze()
    os.replace(tmp, out_path)
    return BuildResult(str(out_path), doc.page, total, head, chain.ok)


# --- sections ------------------------------------------------------------------------------------------

def _cover(st: Styles, project, when: str, rows: list[data.ScheduleRow], head: str, chain) -> Iterator[Flowable]:
    yield Paragraph("Certification record of the piles", st.h1)
    info = [["Project", project.name], ["Site", project.site], ["Datum for levels", project.datum],
            ["Engineer of record", project.engineer], ["Generated", when]]
    yield _kv_table(st, info, (45 * mm, 120 * mm))
    yield Spacer(1, 6 * mm)
    recorded = [r for r in rows if r.version > 0]
    by_verdict = {"meets design": 0, "needs engineer": 0}
    for r in recorded:
        by_verdict[r.verdict] = by_verdict.get(r.verdict, 0) + 1
    by_disposition = {d: 0 for d in review_q.DISPOSITIONS}
    unsigned = 0
    for r in rows:
        if r.version > 0 and r.disposition in by_disposition:
            by_disposition[r.disposition] += 1
        else:                       # not recorded, or the current version not signed
            unsigned += 1
    yield Paragraph("Counts", st.h2)
    counts = [["Piles in the schedule", str(len(rows))],
              ["Recorded (at least one version)", str(len(recorded))],
              ["Not recorded", str(len(rows) - len(recorded))],
              ["Verdict: meets design", str(by_verdict.get("meets design", 0))],
              ["Verdict: needs engineer", str(by_verdict.get("needs engineer", 0))]]
    counts += [[f"Disposition: {d}", str(n)] for d, n in by_disposition.items()]
    yield _kv_table(st, counts, (70 * mm, 30 * mm))
    yield Spacer(1, 4 * mm)
    yield Paragraph(f"<b>Unsigned piles: {unsigned}</b> (not recorded, or the current version not signed)",
                    ParagraphStyle("unsigned", parent=st.body, fontName=st.bold, fontSize=12, leading=15))
    yield Spacer(1, 6 * mm)
    yield Paragraph("Audit trail", st.h2)
    yield Paragraph(f"Head hash of the project's audit chain at the time of this record "
                    f"({chain.entries} entries, chain {'intact' if chain.ok else 'BROKEN: ' + _t(chain.problem)}):",
                    st.body)
    yield Paragraph(head, st.mono)
    yield Spacer(1, 6 * mm)
    yield Paragraph(_bold_caution(), ParagraphStyle("cov", parent=st.body, borderColor=colors.HexColor(
        "#b35c00"), borderWidth=1.2, borderPadding=6, backColor=colors.HexColor("#fff8e1")))


def _kv_table(st: Styles, rows: list[list[str]], widths) -> Table:
    cells = [[Paragraph(_t(k), st.small), Paragraph(_t(v), st.body)] for k, v in rows]
    table = Table(cells, colWidths=widths)
    table.setStyle(TableStyle([("GRID", (0, 0), (-1, -1), 0.4, colors.HexColor("#9a9a9a")),
                               ("BACKGROUND", (0, 0), (0, -1), colors.HexColor("#eef1ee")),
                               ("VALIGN", (0, 0), (-1, -1), "TOP")]))
    return table


SCHEDULE_HEAD = ["Pile", "Cap", "Toe design / as built (m)", "Dia. design / as built (mm)", "Dev. mm",
                 "Cover design / as built (mm)", "Verdict", "Disposition", "Signed by", "Date"]


def _schedule(st: Styles, rows: list[data.ScheduleRow]) -> Iterator[Flowable]:
    yield Paragraph("As-built schedule", st.h2)
    yield Paragraph("Every pile of the schedule. A pile not recorded yet has no sheet of its own in this "
                    "record.", st.small)
    widths = [14 * mm, 11 * mm, 21 * mm, 20 * mm, 11 * mm, 19 * mm, 24 * mm, 21 * mm, 20 * mm, 17 * mm]
    head = [Paragraph(f"<b>{h}</b>", st.tiny) for h in SCHEDULE_HEAD]

    def cell(text: str, room: int):
        """Plain text when it fits the column, else a wrapping (escaped) Paragraph."""
        return Paragraph(_t(text), st.tiny) if len(text) > room else text

    for start in range(0, max(len(rows), 1), SCHEDULE_ROWS_PER_TABLE):
        chunk = rows[start:start + SCHEDULE_ROWS_PER_TABLE]
        cells = [head]
        style = [("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#9a9a9a")),
                 ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#eef1ee")),
                 ("VALIGN", (0, 0), (-1, -1), "TOP"),
                 ("FONT", (0, 1), (-1, -1), st.regular, 6.5),
                 ("TOPPADDING", (0, 0), (-1, -1), 1.5), ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5)]
        for i, r in enumerate(chunk, start=1):
            cells.append([
                cell(r.mark, 9), cell(r.cap, 7), f"{_n(r.design_toe_m)} / {_n(r.asbuilt_toe_m)}",
                f"{_n(r.design_diameter_mm, 0)} / {_n(r.asbuilt_diameter_mm, 0)}", _n(r.deviation_mm, 0),
                f"{_n(r.design_cover_mm, 0)} / {_n(r.asbuilt_cover_mm, 0)}", r.verdict,
                cell(r.disposition, 14), cell(r.signer, 15), r.signed_at[:10]])
            if r.verdict == "needs engineer":
                style.append(("TEXTCOLOR", (6, i), (6, i), STATUS_RGB["needs"]))
                style.append(("FONT", (6, i), (6, i), st.bold, 6.5))
            if r.disposition == "unsigned":
                style.append(("BACKGROUND", (7, i), (7, i), colors.HexColor("#fff3b0")))
        table = Table(cells, colWidths=widths, repeatRows=1)
        table.setStyle(TableStyle(style))
        yield table
        if start + SCHEDULE_ROWS_PER_TABLE < len(rows):
            yield PageBreak()


RECORD_LABELS = [
    ("platform_level", "Platform level", "m"), ("measured_depth", "Measured depth", "m"),
    ("diameter_mm", "Diameter", "mm"), ("cutoff_level", "Cut-off level", "m"),
    ("casting_level", "Final concrete level", "m"), ("easting", "Easting at cut-off", "m"),
    ("northing", "Northing at cut-off", "m"), ("inclination", "Inclination (h/v)", ""),
    ("base_check", "Base checked by", ""), ("debris_mm", "Base debris", "mm"),
    ("cage_length", "Cage length", "m"), ("cover_mm", "Cover", "mm"),
    ("exposure_class", "Exposure class", ""), ("concrete_mpa", "Concrete strength", "MPa"),
    ("concrete_volume_m3", "Concrete placed", "m3"), ("boring_start", "Boring start", ""),
    ("boring_end", "Boring end", ""), ("pour_start", "Pour start", ""), ("pour_end", "Pour end", ""),
    ("rig", "Rig", ""), ("progress", "Progress", ""),
]


def _record_table(st: Styles, sheet: data.PileSheet) -> Table:
    pile = sheet.pile
    design = {"diameter_mm": pile.diameter_mm, "cutoff_level": pile.cutoff_level_m, "easting": pile.easting_m,
              "northing": pile.northing_m, "cage_length": pile.cage_length_m, "cover_mm": pile.cover_mm,
              "exposure_class": pile.exposure_class, "concrete_mpa": pile.fc_mpa}
    rec = sheet.current.record if sheet.current else {}
    known = {k for k, _, _ in RECORD_LABELS} | {"deliveries", "strata", "notes"}
    def cell(text: str):
        """Plain text in a plain cell; long text wraps in an (escaped) Paragraph."""
        return Paragraph(_t(text), st.tiny) if len(text) > 60 else text

    cells = [["Field", "Design", "As built"]]
    cells.append(["Toe level (m)", _n(pile.toe_level_m),
                  _n(rec["platform_level"] - rec["measured_depth"])
                  if rec.get("platform_level") is not None and rec.get("measured_depth") is not None else "—"])
    for key, label, unit in RECORD_LABELS:
        if key not in rec and key not in design:
            continue
        name = f"{label} ({unit})" if unit else label
        cells.append([name, _plain(design.get(key, "")), cell(_plain(rec.get(key, "—")))])
    for key in sorted(set(rec) - known):
        cells.append([str(key), "", cell(_plain(rec[key]))])
    for i, d in enumerate(rec.get("deliveries", []), start=1):
        text = "; ".join(f"{k} {_plain(v)}" for k, v in sorted(d.items()))
        cells.append([f"Delivery {i}", "", cell(text)])
    for i, s in enumerate(rec.get("strata", []), start=1):
        text = (f"{_plain(s.get('from_depth'))}–{_plain(s.get('to_depth'))} m {_plain(s.get('material'))} "
                f"{_plain(s.get('description', ''))}")
        cells.append([f"Stratum {i}", "", cell(text)])
    if rec.get("notes"):
        cells.append(["Notes", "", Paragraph(_t(rec["notes"]), st.tiny)])
    table = Table(cells, colWidths=[38 * mm, 24 * mm, 116 * mm], repeatRows=1)
    table.setStyle(TableStyle([("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#9a9a9a")),
                               ("FONT", (0, 0), (-1, -1), st.regular, 6.5), ("FONT", (0, 0), (-1, 0), st.bold, 6.5),
                               ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#eef1ee")),
                               ("VALIGN", (0, 0), (-1, -1), "TOP"),
                               ("TOPPADDING", (0, 0), (-1, -1), 1.5), ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5)]))
    return table


def _checks_table(st: Styles, checks: list[dict]) -> Table:
    cells = [["Check", "Result", "Value", "Limit", "Util.", "Why"]]
    style = [("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#9a9a9a")),
             ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#eef1ee")), ("VALIGN", (0, 0), (-1, -1), "TOP"),
             ("FONT", (0, 0), (-1, -1), st.regular, 6.5), ("FONT", (0, 0), (-1, 0), st.bold, 6.5),
             ("FONT", (1, 1), (1, -1), st.bold, 6.5),
             ("TOPPADDING", (0, 0), (-1, -1), 1.5), ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5)]
    for i, c in enumerate(checks, start=1):
        result = "not checked" if c.get("ok") is None else ("ok" if c["ok"] else "short")
        unit = str(c.get("unit", ""))
        cells.append([str(c.get("code")), result,
                      f"{_n(c.get('value'))} {unit}" if c.get("value") is not None else "—",
                      f"{_n(c.get('limit'))} {unit}" if c.get("limit") is not None else "—",
                      _n(c.get("utilisation")), Paragraph(_t(c.get("reason")), st.tiny)])
        if result == "short":
            style.append(("TEXTCOLOR", (1, i), (1, i), STATUS_RGB["needs"]))
            style.append(("BACKGROUND", (1, i), (1, i), colors.HexColor("#fde8ea")))
    table = Table(cells, colWidths=[26 * mm, 17 * mm, 20 * mm, 20 * mm, 11 * mm, 84 * mm], repeatRows=1)
    table.setStyle(TableStyle(style))
    return table


def _pile_sheet(st: Styles, sheet: data.PileSheet, photo_dir) -> Iterator[Flowable]:
    s = sheet.status
    cap = f" — cap {_t(s.cap)}" if s.cap else ""
    yield Paragraph(f"Pile {_t(s.mark)}{cap}", st.h2)
    cur = sheet.current
    if cur is None:
        yield Paragraph(f"Not recorded (progress {_t(s.progress)}). Design toe {_n(s.toe_level_m)} m, "
                        f"diameter {_n(s.diameter_mm, 0)} mm.", st.body)
        return
    signoff = sheet.signoff
    line = (f"Version {cur.version} ({_t(cur.progress)}), saved {_t(cur.created_at)} by {_t(cur.created_by_name)}; "
            f"rules version {cur.rules_version}. Verdict: <b>{_t(cur.verdict)}</b>"
            + (f", worst utilisation {_n(cur.worst_utilisation)}" if cur.worst_utilisation is not None else "") + ".")
    yield Paragraph(line, st.body)
    if signoff is not None:
        text = (f"Signed <b>{_t(signoff.disposition)}</b> by {_t(signoff.signer)} on {_t(signoff.signed_at)}"
                + (f": {_t(signoff.reasons)}" if signoff.reasons else "")
                + (f" (resolves the remedial disposition of {_t(signoff.remedial_of_mark)} "
                   f"v{signoff.remedial_of_version})" if signoff.remedial_of_mark else ""))
        yield Paragraph(text, st.body)
        yield Paragraph(f"Record hash {signoff.record_hash}", st.mono)
    else:
        yield Paragraph("<b>Not signed.</b>", st.body)
    yield Paragraph("Checks", st.h3)
    yield _checks_table(st, cur.checks)
    for note in cur.notes:
        yield Paragraph(f"Recheck note: {_t(note)}", st.small)
    for b in cur.borrowed:
        yield Paragraph(f"Stratum met {_t(_plain(b.get('from_depth')))}–{_t(_plain(b.get('to_depth')))} m "
                        f"({_t(b.get('material'))}): {_t(b.get('reason', ''))}", st.small)
    thumbs = _thumbs(st, sheet, photo_dir)
    if sheet.figures:
        width = (PAGE[0] - 2 * MARGIN - 4 * mm) / 2
        pics = [FigureFlowable(sheet.figures[k], width) for k in ("capacity", "interaction")]
        plan = FigureFlowable(sheet.figures["plan"], width)
        right = [Paragraph("Photos", st.h3), thumbs] if thumbs is not None else [Paragraph("No photos.", st.small)]
        rows = []
        for cells in ([pics[0], pics[1]], [plan, right]):
            row = Table([cells], colWidths=[width + 2 * mm, width + 2 * mm])
            row.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 0),
                                     ("RIGHTPADDING", (0, 0), (-1, -1), 0)]))
            rows.append(row)
        yield KeepTogether([Paragraph("Pictures", st.h3), rows[0]])
        yield rows[1]
    else:
        if sheet.figure_error:
            yield Paragraph(_t(sheet.figure_error), st.small)
        if thumbs is not None:
            yield KeepTogether([Paragraph("Photos", st.h3), thumbs])
    yield Paragraph("Record", st.h3)
    yield _record_table(st, sheet)
    if len(sheet.signoffs) > 1 or sheet.amendments:
        yield Paragraph("History", st.h3)
        for so in sheet.signoffs:
            yield Paragraph(f"v{so.version}: {_t(so.disposition)} by {_t(so.signer)} {_t(so.signed_at)} "
                            f"— hash {so.record_hash[:16]}…", st.small)
        for am in sheet.amendments:
            yield Paragraph(f"v{am.from_version} → v{am.version}: amendment by {_t(am.by)} {_t(am.at)}: "
                            f"{_t(am.reason)}", st.small)


def _thumbs(st: Styles, sheet: data.PileSheet, photo_dir) -> Table | None:
    if not sheet.photos or not photo_dir:
        return None
    from fieldapp import photos as photo_files
    cells = []
    for ph in sheet.photos[:MAX_THUMBS]:
        path = photo_files.thumb_path(photo_dir, ph.sha256)
        if not path.exists():
            cells.append(Paragraph(f"{_t(ph.kind)} photo file missing", st.tiny))
            continue
        w, h = ph.thumb_width or 320, ph.thumb_height or 240
        scale = min(28 * mm / w, 28 * mm / h)
        cells.append([Image(str(path), width=w * scale, height=h * scale),
                      Paragraph(f"{_t(ph.kind)}: {_t(ph.caption)} {_t(ph.taken_at or '')}", st.tiny)])
    if len(sheet.photos) > MAX_THUMBS:
        cells.append(Paragraph(f"and {len(sheet.photos) - MAX_THUMBS} more", st.tiny))
    rows = [cells[i:i + 3] for i in range(0, len(cells), 3)]
    rows[-1] += [""] * (3 - len(rows[-1]))
    table = Table(rows, colWidths=[29 * mm] * 3)
    table.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 1)]))
    return table


def _register(st: Styles, items: list[review_q.NonConformance]) -> Iterator[Flowable]:
    yield Paragraph("Non-conformance register", st.h2)
    yield Paragraph("Every logged record version that needed the engineer, or that was signed other than "
                    "plainly accepted, and what was decided.", st.small)
    yield Spacer(1, 3 * mm)
    if not items:
        yield Paragraph("None.", st.body)
        return
    cells = [[Paragraph(f"<b>{h}</b>", st.tiny) for h in
              ("Pile", "Ver.", "Verdict", "Short / not checked", "Decision", "Reasons", "Signed")]]
    for n in items:
        short = ", ".join(n.short) + (f"; not checked: {', '.join(n.not_checked)}" if n.not_checked else "")
        decision = n.disposition or "<b>open: not signed</b>"
        if n.remedial_of_mark:
            decision += f" (resolves remedial of {_t(n.remedial_of_mark)} v{n.remedial_of_version})"
        cells.append([Paragraph(_t(n.mark), st.tiny), Paragraph(str(n.version), st.tiny),
                      Paragraph(_t(n.verdict), st.tiny), Paragraph(_t(short), st.tiny),
                      Paragraph(decision if not n.disposition else _t(decision), st.tiny),
                      Paragraph(_t(n.reasons), st.tiny),
                      Paragraph(f"{_t(n.signer or '')} {_t((n.signed_at or '')[:10])}", st.tiny)])
    table = Table(cells, colWidths=[16 * mm, 10 * mm, 20 * mm, 38 * mm, 28 * mm, 46 * mm, 20 * mm], repeatRows=1)
    table.setStyle(TableStyle([("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#9a9a9a")),
                               ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#eef1ee")),
                               ("VALIGN", (0, 0), (-1, -1), "TOP")]))
    yield table


def _rules(st: Styles, conn: sqlite3.Connection, project_id: int) -> Iterator[Flowable]:
    current = projects.current_rules(conn, project_id)
    used = review_q.rules_versions_used(conn, project_id) or [current.version]
    yield Paragraph("Rules the checks used", st.h2)
    yield Paragraph(f"Current rule set: version {current.version} ({_t(current.note)}, {_t(current.created_at)}). "
                    f"Versions used by the current records: {', '.join(str(v) for v in used)}.", st.body)
    for version in sorted(set(used) | {current.version}):
        rule_set = projects.rules_version(conn, project_id, version)
        if rule_set is None:
            continue
        yield Paragraph(f"Rule set version {version}", st.h3)
        cells = [[Paragraph(f"<b>{h}</b>", st.tiny) for h in ("Rule", "Value", "Unit", "Source")]]
        for doc in rule_set.rules.describe():
            value = doc.value
            if isinstance(value, (list, tuple)):
                value = "; ".join(_describe_item(v) for v in value)
            elif isinstance(value, float):
                value = f"{value:.4g}"
            cells.append([Paragraph(_t(doc.label), st.tiny), Paragraph(_t(value), st.tiny),
                          Paragraph(_t(doc.unit), st.tiny), Paragraph(_t(doc.source), st.tiny)])
        table = Table(cells, colWidths=[45 * mm, 35 * mm, 14 * mm, 84 * mm], repeatRows=1)
        table.setStyle(TableStyle([("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#9a9a9a")),
                                   ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#eef1ee")),
                                   ("VALIGN", (0, 0), (-1, -1), "TOP")]))
        yield table


def _describe_item(item: Any) -> str:
    if hasattr(item, "code") and hasattr(item, "cmin_dur_mm"):
        return f"{item.code}: c_min,dur {item.cmin_dur_mm:g} mm, f_ck {item.min_strength_mpa:g} MPa"
    return str(item)


def _audit(st: Styles, head: str, chain) -> Iterator[Flowable]:
    yield Paragraph("Audit trail", st.h2)
    yield Paragraph(f"The project's audit chain holds {chain.entries} entries and was "
                    f"{'verified intact' if chain.ok else 'found BROKEN: ' + _t(chain.problem)} when this record "
                    "was made. Its head hash is:", st.body)
    yield Paragraph(head, st.mono)
    yield Paragraph("Anyone holding the database can check the chain with <font face='Courier'>toeline "
                    "verify-audit PROJECT_ID</font>; an entry edited, deleted or moved after this record "
                    "breaks it, and a chain whose entry with this hash is gone no longer matches this "
                    "record.", st.small)
