"""The as-built schedule as CSV or XLSX (one row per pile: design against as built, verdict,
disposition, signer), from ``fieldapp.record.data.schedule``.

Text cells that a spreadsheet would take for a formula (starting with =, +, -, @, tab or CR)
are written with a leading apostrophe; numbers stay numbers.
"""

from __future__ import annotations

import csv
import io
import sqlite3

from fieldapp.record import data
from fieldapp.text_rules import csv_cell as _safe

FORMATS = ("csv", "xlsx")


def to_csv(rows: list[data.ScheduleRow]) -> bytes:
    """UTF-8 CSV with a header row."""
    buf = io.StringIO(newline="")
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(data.ScheduleRow.CSV_HEADER)
    for row in rows:
        writer.writerow([_safe(v) for v in row.values()])
    return buf.getvalue().encode("utf-8")


def to_xlsx(rows: list[data.ScheduleRow]) -> bytes:
    """One sheet 'as-built schedule' with a header row; numbers as numbers."""
    from openpyxl import Workbook

    workbook = Workbook(write_only=True)
    sheet = workbook.create_sheet("as-built schedule")
    sheet.append(list(data.ScheduleRow.CSV_HEADER))
    for row in rows:
        sheet.append([_safe(v) for v in row.values()])
    buf = io.BytesIO()
    workbook.save(buf)
    return buf.getvalue()


def asbuilt_schedule(conn: sqlite3.Connection, project_id: int, fmt: str) -> bytes:
    """The as-built schedule of a project as 'csv' or 'xlsx' bytes."""
    rows = data.schedule(conn, project_id)
    if fmt == "csv":
        return to_csv(rows)
    if fmt == "xlsx":
        return to_xlsx(rows)
    raise ValueError(f"format must be csv or xlsx, got {fmt!r}")
