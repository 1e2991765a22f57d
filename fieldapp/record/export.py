"""The as-built schedule (CSV or XLSX) and the non-conformance register (CSV).

One row per pile (design against as built, verdict, disposition, signer) from
``fieldapp.record.data.schedule``, after the header row; below the rows, after a blank row, the
record revision the schedule belongs to and the safety caution. Every cell goes through
``text_rules.csv_cell`` (a text cell a spreadsheet would take for a formula gets a leading
apostrophe; numbers stay numbers) and floats are written without binary noise (150.0, not
150.00000000009095).
"""

from __future__ import annotations

import csv
import io
import sqlite3

from openpyxl import Workbook

from fieldapp import CAUTION
from fieldapp.queries import record_issues
from fieldapp.queries.ncr import NonConformance
from fieldapp.record import data
from fieldapp.record.words import clean_number
from fieldapp.text_rules import csv_cell as _safe

FORMATS = ("csv", "xlsx")


def _cells(values) -> list:
    return [_safe(clean_number(v)) for v in values]


def revision_words(revision: int | None) -> str:
    """What the schedule's revision row says."""
    if revision is None:
        return "no record issued yet: this schedule is read from the current records"
    return (f"{revision} (the newest issued record; this schedule is read from the current records and "
            "matches that issue while nothing has changed since)")


def _trailer(revision: int | None, caution: str) -> list[list]:
    return [[], ["record revision", revision_words(revision)], ["caution", caution]]


def to_csv(rows: list[data.ScheduleRow], revision: int | None = None, caution: str = CAUTION) -> bytes:
    """UTF-8 CSV with a header row, then the rows, then revision and caution."""
    buf = io.StringIO(newline="")
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(data.ScheduleRow.CSV_HEADER)
    for row in rows:
        writer.writerow(_cells(row.values()))
    for line in _trailer(revision, caution):
        writer.writerow(_cells(line))
    return buf.getvalue().encode("utf-8")


def to_xlsx(rows: list[data.ScheduleRow], revision: int | None = None, caution: str = CAUTION) -> bytes:
    """One sheet 'as-built schedule' with a header row; numbers as numbers; revision and caution
    below the rows."""
    workbook = Workbook(write_only=True)
    sheet = workbook.create_sheet("as-built schedule")
    sheet.append(list(data.ScheduleRow.CSV_HEADER))
    for row in rows:
        sheet.append(_cells(row.values()))
    for line in _trailer(revision, caution):
        sheet.append(_cells(line))
    buf = io.BytesIO()
    workbook.save(buf)
    return buf.getvalue()


def asbuilt_schedule(conn: sqlite3.Connection, project_id: int, fmt: str) -> bytes:
    """The as-built schedule of a project as 'csv' or 'xlsx' bytes."""
    rows = data.schedule(conn, project_id)
    issued = record_issues.for_project(conn, project_id)
    revision = issued[-1].revision if issued else None
    if fmt == "csv":
        return to_csv(rows, revision)
    if fmt == "xlsx":
        return to_xlsx(rows, revision)
    raise ValueError(f"format must be csv or xlsx, got {fmt!r}")


def ncr_csv(items, caution: str = CAUTION) -> bytes:
    """The non-conformance register as UTF-8 CSV: header, one row per NC, then the caution."""
    buf = io.StringIO(newline="")
    writer = csv.writer(buf, lineterminator="\r\n")
    header = NonConformance.CSV_HEADER
    writer.writerow(header)
    for item in items:
        writer.writerow(_cells(item.values()))
    writer.writerow([])
    writer.writerow(_cells(["caution", caution]))
    return buf.getvalue().encode("utf-8")
