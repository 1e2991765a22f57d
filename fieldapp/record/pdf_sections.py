"""The sections of the certification record, laid out from what the snapshot read
(``fieldapp.record.snapshot``): cover with the certificate, the table of revisions, the site
plan, the as-built schedule, one sheet per pile, the non-conformance register, the rules and
the audit head. Nothing here computes or reads the database; user text is escaped before it goes
into a Paragraph.
"""

from __future__ import annotations

from typing import Any, Iterator

from reportlab.lib import colors
from reportlab.lib.styles import ParagraphStyle
from reportlab.lib.units import mm
from reportlab.platypus import Flowable, Image, KeepTogether, PageBreak, Paragraph, Spacer, Table, TableStyle

from fieldapp import photos as photo_files
from fieldapp.queries import ncr
from fieldapp.queries import review as review_q
from fieldapp.record import data
from fieldapp.record.pdf_layout import REGULAR, STATUS_RGB, WIDTH, FigureFlowable, Styles, bold_caution
from fieldapp.record.pdf_layout import t as _t
from fieldapp.record.words import delivery_words, local_time
from fieldapp.record.words import n as _n
from fieldapp.record.words import plain as _plain

SCHEDULE_ROWS_PER_TABLE = 60
NCR_ROWS_PER_TABLE = 40
MAX_THUMBS = 6
BASE_FONT = ("FONT", (0, 0), (-1, -1), REGULAR, 6.5)     # also for empty cells (else Helvetica)
GRID_STYLE = [BASE_FONT, ("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#9a9a9a")),
              ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#eef1ee")), ("VALIGN", (0, 0), (-1, -1), "TOP")]


# --- sections ------------------------------------------------------------------------------------------

def cover(st: Styles, f) -> Iterator[Flowable]:
    """The certificate: what is certified, for which project and piles, by whom, revision, state,
    counts and the audit head of the snapshot the record was read from."""
    state = "DRAFT" if f.draft else "ISSUED"
    yield Paragraph(f"Certificate of the piles as built — revision {f.revision} ({state})", st.h1)
    recorded = [r for r in f.rows if r.version > 0]
    marks = [r.mark for r in f.rows]
    span = f"{marks[0]} to {marks[-1]}" if marks else "none"
    statement = (f"This record certifies the {len(f.rows)} piles of project <b>{_t(f.project.name)}</b> "
                 f"({_t(f.project.site)}), marks {_t(span)}, as built and recorded: for each pile the record "
                 "version shown on its sheet, the checks stored with that version and the disposition signed "
                 "for it by the engineer named there. It holds the as-built schedule, one sheet per recorded "
                 "pile, the non-conformance register and the rules the checks used.")
    yield Paragraph(statement, st.body)
    yield Spacer(1, 3 * mm)
    if f.draft:
        why = []
        if f.unsigned:
            why.append(f"{f.unsigned} pile(s) unsigned")
        if f.open_ncs:
            why.append(f"{f.open_ncs} non-conformance(s) open")
        if not f.rows:
            why.append("no piles in the schedule")
        yield Paragraph(f"<b>DRAFT: not a certificate while {_t('; '.join(why))}.</b> Every page is marked DRAFT.",
                        ParagraphStyle("draft", parent=st.body, textColor=colors.HexColor("#a4000f")))
    info = [["Project", f.project.name], ["Site", f.project.site], ["Datum for levels", f.project.datum],
            ["Engineer of record", f"{f.project.engineer or '(not named)'} — role: engineer of record"],
            ["Issued by", f"{f.issued_by} — role: {f.issued_role}"],
            ["Issued", local_time(f.issued_at)], ["Revision", str(f.revision)],
            ["Audit head of this record", f"seq {f.head_seq}, hash {f.head_hash}"]]
    yield _kv_table(st, info, (45 * mm, 133 * mm))
    yield Spacer(1, 4 * mm)
    by_verdict: dict[str, int] = {}
    for r in recorded:
        by_verdict[r.verdict] = by_verdict.get(r.verdict, 0) + 1
    by_disposition = {d: 0 for d in review_q.DISPOSITIONS}
    for r in f.rows:
        if r.version > 0 and r.disposition in by_disposition:
            by_disposition[r.disposition] += 1
    counts = [["Piles in the schedule", str(len(f.rows))], ["Recorded", str(len(recorded))],
              ["Not recorded", str(len(f.rows) - len(recorded))],
              ["Verdict: meets design", str(by_verdict.get("meets design", 0))],
              ["Verdict: needs engineer", str(by_verdict.get("needs engineer", 0))]]
    counts += [[f"Disposition: {d}", str(n)] for d, n in by_disposition.items()]
    counts += [["Unsigned (not recorded, or current version not signed)", str(f.unsigned)],
               ["Non-conformances (open / all)", f"{f.open_ncs} / {len(f.register)}"]]
    yield _kv_table(st, counts, (90 * mm, 30 * mm))
    yield Spacer(1, 4 * mm)
    yield Paragraph("Signed for the engineer of record", st.h3)
    yield Paragraph("This file carries a PAdES digital signature made with the project's signing key; any change "
                    "to the file breaks it (<font face='DejaVuSansMono'>toeline verify-record FILE.pdf</font> "
                    "checks the signature and that the audit head above is still in the project's chain).",
                    st.small)
    yield Spacer(1, 4 * mm)
    yield Paragraph(bold_caution(), ParagraphStyle("cov", parent=st.body, borderColor=colors.HexColor(
        "#b35c00"), borderWidth=1.2, borderPadding=6, backColor=colors.HexColor("#fff8e1")))


def revisions(st: Styles, f) -> Iterator[Flowable]:
    """The table of revisions: every earlier issue and this one, with what changed."""
    yield Paragraph("Revisions", st.h2)
    cells = [[Paragraph(f"<b>{h}</b>", st.tiny) for h in ("Rev.", "Issued", "By", "State", "Audit head", "Changes")]]
    for i in f.issues:
        cells.append([str(i.revision), Paragraph(_t(local_time(i.issued_at)), st.tiny), Paragraph(_t(i.issued_by), st.tiny),
                      "draft" if i.draft else "issued", Paragraph(f"seq {i.head_seq} {_t(i.head_hash[:12])}…", st.tiny),
                      Paragraph(_t(i.changes), st.tiny)])
    cells.append([str(f.revision), Paragraph(_t(local_time(f.issued_at)), st.tiny), Paragraph(_t(f.issued_by), st.tiny),
                  "draft" if f.draft else "issued", Paragraph(f"seq {f.head_seq} {_t(f.head_hash[:12])}…", st.tiny),
                  Paragraph(_t(f.changes), st.tiny)])
    table = Table(cells, colWidths=[10 * mm, 32 * mm, 28 * mm, 13 * mm, 28 * mm, 67 * mm], repeatRows=1)
    table.setStyle(TableStyle(GRID_STYLE + [("FONT", (0, 1), (-1, -1), st.regular, 6.5)]))
    yield table


def site_plan(st: Styles, f) -> Iterator[Flowable]:
    yield Paragraph("Site plan", st.h2)
    yield FigureFlowable(data.site_plan(f.statuses, f.positions, 760, 1000), WIDTH)


def _kv_table(st: Styles, rows: list[list[str]], widths) -> Table:
    cells = [[Paragraph(_t(k), st.small), Paragraph(_t(v), st.body)] for k, v in rows]
    table = Table(cells, colWidths=widths)
    table.setStyle(TableStyle([BASE_FONT, ("GRID", (0, 0), (-1, -1), 0.4, colors.HexColor("#9a9a9a")),
                               ("BACKGROUND", (0, 0), (0, -1), colors.HexColor("#eef1ee")),
                               ("VALIGN", (0, 0), (-1, -1), "TOP")]))
    return table


SCHEDULE_HEAD = ["Pile", "Cap", "Toe design / as built (m)", "Dia. design / as built (mm)", "Dev. mm",
                 "Cover design / as built (mm)", "Verdict", "Disposition", "Signed by", "Date"]


def schedule(st: Styles, rows: list[data.ScheduleRow]) -> Iterator[Flowable]:
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
        style = [BASE_FONT, ("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#9a9a9a")),
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


TIME_FIELDS = ("boring_start", "boring_end", "pour_start", "pour_end")
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
        value = rec.get(key, "—")
        text = local_time(value) if key in TIME_FIELDS and value != "—" else _plain(value)
        cells.append([name, _plain(design.get(key, "")), cell(text)])
    for key in sorted(set(rec) - known):
        cells.append([str(key), "", cell(_plain(rec[key]))])
    for i, d in enumerate(rec.get("deliveries", []), start=1):
        cells.append([f"Delivery {i}", "", cell(delivery_words(d))])
    for i, s in enumerate(rec.get("strata", []), start=1):
        text = (f"{_plain(s.get('from_depth'))}–{_plain(s.get('to_depth'))} m {_plain(s.get('material'))} "
                f"{_plain(s.get('description', ''))}")
        cells.append([f"Stratum {i}", "", cell(text)])
    if rec.get("notes"):
        cells.append(["Notes", "", Paragraph(_t(rec["notes"]), st.tiny)])
    table = Table(cells, colWidths=[38 * mm, 24 * mm, 116 * mm], repeatRows=1)
    table.setStyle(TableStyle([BASE_FONT, ("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#9a9a9a")),
                               ("FONT", (0, 0), (-1, -1), st.regular, 6.5), ("FONT", (0, 0), (-1, 0), st.bold, 6.5),
                               ("BACKGROUND", (0, 0), (-1, 0), colors.HexColor("#eef1ee")),
                               ("VALIGN", (0, 0), (-1, -1), "TOP"),
                               ("TOPPADDING", (0, 0), (-1, -1), 1.5), ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5)]))
    return table


def _checks_table(st: Styles, checks: list[dict]) -> Table:
    cells = [["Check", "Result", "Value", "Limit", "Util.", "Why"]]
    style = [BASE_FONT, ("GRID", (0, 0), (-1, -1), 0.3, colors.HexColor("#9a9a9a")),
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


def pile_sheet(st: Styles, sheet: data.PileSheet, photo_dir) -> Iterator[Flowable]:
    s = sheet.status
    cap = f" — cap {_t(s.cap)}" if s.cap else ""
    yield Paragraph(f"Pile {_t(s.mark)}{cap}", st.h2)
    cur = sheet.current
    if cur is None:
        yield Paragraph(f"Not recorded (progress {_t(s.progress)}). Design toe {_n(s.toe_level_m)} m, "
                        f"diameter {_n(s.diameter_mm, 0)} mm.", st.body)
        return
    signoff = sheet.signoff
    line = (f"Version {cur.version} ({_t(cur.progress)}), saved {_t(local_time(cur.created_at))} by {_t(cur.created_by_name)}; "
            f"rules version {cur.rules_version}. Verdict: <b>{_t(cur.verdict)}</b>"
            + (f", worst utilisation {_n(cur.worst_utilisation)}" if cur.worst_utilisation is not None else "") + ".")
    yield Paragraph(line, st.body)
    if signoff is not None:
        text = (f"Signed <b>{_t(signoff.disposition)}</b> by {_t(signoff.signer)} on {_t(local_time(signoff.signed_at))}"
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
        width = (WIDTH - 4 * mm) / 2
        left = [FigureFlowable(sheet.figures["checks"], width)]
        right = [FigureFlowable(sheet.figures["section"], width)]
        row = Table([[left, right]], colWidths=[width + 2 * mm, width + 2 * mm])
        row.setStyle(TableStyle([BASE_FONT, ("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 0),
                                 ("RIGHTPADDING", (0, 0), (-1, -1), 0)]))
        yield KeepTogether([Paragraph("Pictures (drawn from the stored version)", st.h3), row])
    if thumbs is not None:
        yield KeepTogether([Paragraph("Photos", st.h3), thumbs])
    yield Paragraph("Record", st.h3)
    yield _record_table(st, sheet)
    if len(sheet.signoffs) > 1 or sheet.amendments:
        yield Paragraph("History", st.h3)
        for so in sheet.signoffs:
            yield Paragraph(f"v{so.version}: {_t(so.disposition)} by {_t(so.signer)} {_t(local_time(so.signed_at))} "
                            f"— hash {so.record_hash[:16]}…", st.small)
        for am in sheet.amendments:
            yield Paragraph(f"v{am.from_version} → v{am.version}: amendment by {_t(am.by)} {_t(local_time(am.at))}: "
                            f"{_t(am.reason)}", st.small)


def _thumbs(st: Styles, sheet: data.PileSheet, photo_dir) -> Table | None:
    if not sheet.photos or not photo_dir:
        return None
    cells = []
    for ph in sheet.photos[:MAX_THUMBS]:
        path = photo_files.thumb_path(photo_dir, ph.sha256)
        if not path.exists():
            cells.append(Paragraph(f"{_t(ph.kind)} photo file missing", st.tiny))
            continue
        w, h = ph.thumb_width or 320, ph.thumb_height or 240
        scale = min(28 * mm / w, 28 * mm / h)
        cells.append([Image(str(path), width=w * scale, height=h * scale),
                      Paragraph(f"{_t(ph.kind)}: {_t(ph.caption)} {_t(local_time(ph.taken_at))}", st.tiny)])
    if len(sheet.photos) > MAX_THUMBS:
        cells.append(Paragraph(f"and {len(sheet.photos) - MAX_THUMBS} more", st.tiny))
    rows = [cells[i:i + 3] for i in range(0, len(cells), 3)]
    rows[-1] += [""] * (3 - len(rows[-1]))
    table = Table(rows, colWidths=[29 * mm] * 3)
    table.setStyle(TableStyle([BASE_FONT, ("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 1)]))
    return table


def register(st: Styles, items: list[ncr.NonConformance]) -> Iterator[Flowable]:
    """The non-conformance register: every record version with a short check, whatever its
    progress, numbered per project."""
    yield Paragraph("Non-conformance register", st.h2)
    yield Paragraph("Every record version with a short check, whatever its progress, concreted piles included. "
                    "One number per non-conformance, never reused. It is closed by the sign-off named under "
                    "'closed by'.", st.small)
    yield Spacer(1, 3 * mm)
    if not items:
        yield Paragraph("None.", st.body)
        return
    head = [Paragraph(f"<b>{h}</b>", st.tiny) for h in
            ("No.", "Pile", "Raised", "Short checks", "State", "Closed", "Disposition", "Remedial action",
             "Closed by")]
    for start in range(0, len(items), NCR_ROWS_PER_TABLE):
        cells = [head]
        style = list(GRID_STYLE)
        for i, n in enumerate(items[start:start + NCR_ROWS_PER_TABLE], start=1):
            cells.append([Paragraph(_t(n.label if n.number else "(new)"), st.tiny), Paragraph(_t(n.mark), st.tiny),
                          Paragraph(f"v{n.raised_version} ({_t(n.progress)}) {_t(local_time(n.raised_at, False))}",
                                    st.tiny),
                          Paragraph(_t(", ".join(n.short)), st.tiny), Paragraph(f"<b>{_t(n.state)}</b>", st.tiny),
                          Paragraph(_t(local_time(n.closed_at, False)), st.tiny), Paragraph(_t(n.disposition), st.tiny),
                          Paragraph(_t(n.remedial_action), st.tiny),
                          Paragraph(_t(f"{n.closed_by_record} {n.signer}".strip()), st.tiny)])
            if n.state == ncr.OPEN:
                style.append(("BACKGROUND", (4, i), (4, i), colors.HexColor("#fde8ea")))
        table = Table(cells, colWidths=[13 * mm, 13 * mm, 26 * mm, 24 * mm, 12 * mm, 18 * mm, 19 * mm, 27 * mm,
                                        26 * mm], repeatRows=1)
        table.setStyle(TableStyle(style))
        yield table


def rules(st: Styles, f) -> Iterator[Flowable]:
    yield Paragraph("Rules the checks used", st.h2)
    yield Paragraph(f"Current rule set: version {f.rules_current}. Versions used by the current records: "
                    f"{', '.join(str(v) for v in f.rules_used)}.", st.body)
    for rule_set in f.rules_versions:
        yield Paragraph(f"Rule set version {rule_set.version} ({_t(rule_set.note)}, "
                        f"{_t(local_time(rule_set.created_at))})", st.h3)
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
        table.setStyle(TableStyle(GRID_STYLE))
        yield table


def _describe_item(item: Any) -> str:
    if hasattr(item, "code") and hasattr(item, "cmin_dur_mm"):
        return f"{item.code}: c_min,dur {item.cmin_dur_mm:g} mm, f_ck {item.min_strength_mpa:g} MPa"
    return str(item)


def audit_page(st: Styles, f) -> Iterator[Flowable]:
    chain = f.chain
    yield Paragraph("Audit trail", st.h2)
    yield Paragraph(f"This record was read in one snapshot of the database. The project's audit chain then held "
                    f"{chain.entries} entries and was "
                    f"{'verified intact' if chain.ok else 'found BROKEN: ' + _t(chain.problem)}. Its head "
                    f"(seq {f.head_seq}) is:", st.body)
    yield Paragraph(f.head_hash, st.mono)
    yield Paragraph("The head is kept with the issue (revision, file SHA-256) in the data folder, and "
                    "<font face='DejaVuSansMono'>toeline verify-audit</font> checks the chain against it: entries "
                    "deleted after this record, or a chain rewritten, no longer hold it. "
                    "<font face='DejaVuSansMono'>toeline verify-record FILE.pdf</font> checks this file's "
                    "signature and its head.", st.small)
    yield Spacer(1, 6 * mm)
    yield Paragraph("End of record.", st.body)
