"""The page furniture of the certification record: embedded fonts, styles, the page template
(safety caution, DRAFT mark, revision, "page x of y") and the flowables the sections use.

Fonts: DejaVu Sans, Sans Bold and Sans Mono, shipped in ``fieldapp/record/fonts/`` (free to
redistribute; licence beside them) and embedded as subsets in every part. They are registered
ASCII-readable, so the digits of "page x of y" stay plain characters in the page streams and
the total can be written in once every part is laid out (``pdf.build``).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable
from xml.sax.saxutils import escape

from reportlab.lib import colors
from reportlab.lib.enums import TA_LEFT
from reportlab.lib.pagesizes import A4
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.pdfbase import pdfmetrics
from reportlab.pdfbase.ttfonts import TTFont
from reportlab.platypus import BaseDocTemplate, Flowable, Frame, PageTemplate, Paragraph

from fieldapp import CAUTION, drawings

PAGE = A4
MARGIN = 16 * mm
FOOTER_H = 24 * mm
WIDTH = PAGE[0] - 2 * MARGIN
FONT_DIR = Path(__file__).with_name("fonts")
REGULAR, BOLD, MONO = "DejaVuSans", "DejaVuSans-Bold", "DejaVuSansMono"
# written where the total page count goes; replaced byte for byte (same length) once known
TOTAL_PLACEHOLDER = "~~~~~~"
STATUS_RGB = {k: colors.HexColor(v) for k, v in drawings.STATUS_COLOURS.items()}


def register_fonts() -> None:
    """Register the shipped DejaVu fonts with reportlab (once)."""
    if REGULAR in pdfmetrics.getRegisteredFontNames():
        return
    for name, file in ((REGULAR, "DejaVuSans.ttf"), (BOLD, "DejaVuSans-Bold.ttf"), (MONO, "DejaVuSansMono.ttf")):
        pdfmetrics.registerFont(TTFont(name, str(FONT_DIR / file), asciiReadable=True))
    pdfmetrics.registerFontFamily(REGULAR, normal=REGULAR, bold=BOLD, italic=REGULAR, boldItalic=BOLD)


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
    regular: str = REGULAR
    bold: str = BOLD


def styles() -> Styles:
    register_fonts()
    body = ParagraphStyle("body", fontName=REGULAR, fontSize=9, leading=11.5, alignment=TA_LEFT)
    return Styles(
        body=body,
        small=ParagraphStyle("small", parent=body, fontSize=7.5, leading=9),
        tiny=ParagraphStyle("tiny", parent=body, fontSize=6.5, leading=7.8),
        h1=ParagraphStyle("h1", parent=body, fontName=BOLD, fontSize=18, leading=22, spaceAfter=8),
        h2=ParagraphStyle("h2", parent=body, fontName=BOLD, fontSize=13, leading=16, spaceBefore=4, spaceAfter=6),
        h3=ParagraphStyle("h3", parent=body, fontName=BOLD, fontSize=10, leading=13, spaceBefore=6, spaceAfter=3),
        mono=ParagraphStyle("mono", parent=body, fontName=MONO, fontSize=7, leading=9),
        caution=ParagraphStyle("caution", parent=body, fontSize=7, leading=8.5))


def t(value: Any) -> str:
    """User or stored text made safe for a Paragraph."""
    return escape("" if value is None else str(value))


def bold_caution() -> str:
    """The caution with its first word in bold."""
    head, _, rest = CAUTION.partition(":")
    return f"<b>{t(head)}:</b>{t(rest)}" if rest else t(CAUTION)


@dataclass(frozen=True)
class PageSpec:
    """What every page of one build carries in its header and footer."""

    project_name: str
    revision: int
    issued: str                 # local time in words, zone stated
    draft: bool
    first_page: int             # the number of this part's first page in the whole record


class Doc(BaseDocTemplate):
    """One part of the record: A4, the body frame, the footer (caution, project, revision,
    page x of y) and the DRAFT mark on every page while the record is a draft."""

    def __init__(self, filename: str, spec: PageSpec, st: Styles, **kw):
        super().__init__(filename, pagesize=PAGE, leftMargin=MARGIN, rightMargin=MARGIN, topMargin=MARGIN,
                         bottomMargin=FOOTER_H, pageCompression=0, invariant=1,
                         initialFontName=REGULAR, initialFontSize=9, **kw)
        self.spec = spec
        self.caution = Paragraph(bold_caution(), st.caution)
        _, self.caution_h = self.caution.wrap(WIDTH, FOOTER_H)
        frame = Frame(MARGIN, FOOTER_H, WIDTH, PAGE[1] - MARGIN - FOOTER_H, id="body",
                      leftPadding=0, rightPadding=0, topPadding=0, bottomPadding=0)
        self.addPageTemplates([PageTemplate(id="page", frames=[frame], onPage=self._furniture)])

    def _furniture(self, canvas, doc):
        spec = self.spec
        canvas.saveState()
        if spec.draft:
            canvas.setFillColor(colors.Color(0.75, 0.1, 0.1, alpha=0.16))
            canvas.setFont(BOLD, 110)
            canvas.translate(PAGE[0] / 2, PAGE[1] / 2)
            canvas.rotate(50)
            canvas.drawCentredString(0, -40, "DRAFT")
            canvas.rotate(-50)
            canvas.translate(-PAGE[0] / 2, -PAGE[1] / 2)
        canvas.setStrokeColor(colors.HexColor("#b35c00"))
        canvas.setLineWidth(0.8)
        canvas.line(MARGIN, FOOTER_H - 3 * mm, MARGIN + WIDTH, FOOTER_H - 3 * mm)
        self.caution.drawOn(canvas, MARGIN, FOOTER_H - 4 * mm - self.caution_h)
        canvas.setFont(REGULAR, 7)
        canvas.setFillColor(colors.HexColor("#3a3a3a"))
        state = "DRAFT" if spec.draft else "issued"
        canvas.drawString(MARGIN, 7 * mm, f"{spec.project_name} · certification record revision {spec.revision} "
                                          f"({state}) · {spec.issued}")
        number = spec.first_page + doc.page - 1
        # left-aligned so the padded total leaves its spaces at the end of the line
        canvas.drawString(MARGIN + WIDTH - 30 * mm, 7 * mm, f"page {number} of {TOTAL_PLACEHOLDER}")
        canvas.restoreState()


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
    ``width`` points (the same scene as the SVG on screen)."""

    def __init__(self, fig: drawings.Figure, width: float):
        super().__init__()
        self.fig = fig
        self.width = width
        self.height = fig.height * width / fig.width

    def wrap(self, available_width, available_height):
        return self.width, self.height

    def draw(self):
        c, f, top = self.canv, self.width / self.fig.width, self.height
        cache: dict[str, Any] = {}

        def col(value):
            if value not in cache:
                cache[value] = colors.HexColor(value)
            return cache[value]

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
                c.setFont(BOLD if s.bold else REGULAR, s.size * f)
                x, y = s.x * f, top - s.y * f
                if s.anchor == "middle":
                    c.drawCentredString(x, y, s.text)
                elif s.anchor == "end":
                    c.drawRightString(x, y, s.text)
                else:
                    c.drawString(x, y, s.text)
        c.restoreState()
