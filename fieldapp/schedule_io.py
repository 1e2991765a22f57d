"""Import and export of the pile schedule as CSV and XLSX, with Toeline's own column names.

Columns (first row of the file, any order; README lists them with units)::

    mark, cap, pile_type, easting_m, northing_m, cutoff_level_m, toe_level_m, diameter_mm,
    ground_model, compression_kn, tension_kn, shear_kn, moment_knm, n_bars, bar_mm,
    cage_length_m, fc_mpa, fy_mpa, exposure_class, cover_mm, head

``cap`` is a cap mark (a cap not yet on the project is created with zero loads; blank for a
pile on its own), ``ground_model`` the name of one of the project's ground models. Every row is
checked and every error is reported with its row (as a spreadsheet numbers it: the header is
row 1) and column; nothing is imported unless the whole file is valid, and then everything is
imported in one transaction. A pile whose mark is already in the schedule is updated; other
piles are left as they are. Export writes the same columns, so export then import gives the
same schedule.
"""

from __future__ import annotations

import csv
import hashlib
import io
from dataclasses import dataclass, field
from pathlib import Path

from fieldapp.queries import audit, caps, ground, piles, projects
from fieldapp.queries.piles import (FIELD_BY_NAME, FIELDS, MARK_MAX, check_in_ground, check_pile, check_value,
                                    label_problem)

COLUMNS = ("mark", "cap", "pile_type", "easting_m", "northing_m", "cutoff_level_m", "toe_level_m",
           "diameter_mm", "ground_model", "compression_kn", "tension_kn", "shear_kn", "moment_knm",
           "n_bars", "bar_mm", "cage_length_m", "fc_mpa", "fy_mpa", "exposure_class", "cover_mm", "head")
REQUIRED_COLUMNS = ("mark", "pile_type", "easting_m", "northing_m", "cutoff_level_m", "toe_level_m",
                    "diameter_mm", "ground_model")
COLUMN_DOC = {
    "mark": "pile mark, unique in the project (1-40 characters)",
    "cap": "cap mark; blank for a pile on its own; a new mark creates the cap with zero loads",
    "pile_type": "bored, cfa, driven or screw",
    "easting_m": "design easting at cut-off, m",
    "northing_m": "design northing at cut-off, m",
    "cutoff_level_m": "design cut-off level, m (within ±10,000)",
    "toe_level_m": "design toe level, m, below the cut-off",
    "diameter_mm": "diameter, mm (150-3,000)",
    "ground_model": "name of one of the project's ground models",
    "compression_kn": "design compression, kN (as the rules' loads_are says)",
    "tension_kn": "design tension (uplift), kN",
    "shear_kn": "design head shear, kN",
    "moment_knm": "design head moment, kNm",
    "n_bars": "number of longitudinal bars (0, or 3-200)",
    "bar_mm": "bar diameter, mm",
    "cage_length_m": "cage length, m (at most the pile length)",
    "fc_mpa": "concrete strength f_c, MPa (10-120)",
    "fy_mpa": "steel strength f_y, MPa (200-700)",
    "exposure_class": "exposure class from the project's rules (e.g. XC2)",
    "cover_mm": "design cover, mm",
    "head": "free or fixed",
}
MAX_ROWS = 20_000
MAX_BYTES = 10 * 1024 * 1024


@dataclass(frozen=True)
class RowError:
    """One problem in the file: row as a spreadsheet numbers it (header = 1), column, message."""

    row: int
    column: str
    message: str

    def __str__(self) -> str:
        where = f"row {self.row}" if self.row else "file"
        return f"{where}, column {self.column}: {self.message}" if self.column else f"{where}: {self.message}"


@dataclass
class ImportResult:
    """What an import did (or, with errors, why it did nothing)."""

    errors: list[RowError] = field(default_factory=list)
    created: int = 0
    updated: int = 0
    caps_created: list[str] = field(default_factory=list)
    rows: int = 0
    rechecked: list[str] = field(default_factory=list)  # recorded piles whose status changed

    @property
    def ok(self) -> bool:
        """True when the file was valid and imported."""
        return not self.errors

    def summary(self) -> str:
        """One sentence for the screen and the command line."""
        if self.errors:
            return (f"Nothing imported: {len(self.errors)} error(s) in the file. Correct them and "
                    "import the whole file again.")
        text = f"Schedule imported: {self.rows} row(s), {self.created} pile(s) created, {self.updated} updated"
        if self.caps_created:
            text += f"; new cap(s) with zero loads: {', '.join(self.caps_created)} (enter their loads)"
        return text + "."


# --- reading -----------------------------------------------------------------------------------

def _cell_text(value) -> str:
    """A cell as text: '' for empty, numbers without a trailing '.0' for whole floats."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return str(value)
    if isinstance(value, float):
        return repr(int(value)) if value.is_integer() and abs(value) < 1e15 else repr(value)
    return str(value).strip()


def read_csv(data: bytes) -> tuple[list[str], list[tuple[int, dict]]]:
    """(header, [(row number, {column: text})]) from CSV bytes (UTF-8, comma, semicolon or tab).

    ValueError when the bytes are not UTF-8 text.
    """
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ValueError("the file is not UTF-8 text: save it as CSV UTF-8") from None
    sample = text[:4096]
    try:
        dialect = csv.Sniffer().sniff(sample.splitlines()[0] if sample else ",", delimiters=",;\t")
        delimiter = dialect.delimiter
    except csv.Error:
        delimiter = ","
    reader = csv.reader(io.StringIO(text, newline=""), delimiter=delimiter)
    rows = list(reader)
    if not rows:
        return [], []
    header = [h.strip() for h in rows[0]]
    while header and not header[-1]:
        header.pop()
    out = []
    for number, cells in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in cells):
            continue
        row = {h: (cells[i].strip() if i < len(cells) else "") for i, h in enumerate(header)}
        if any(c.strip() for c in cells[len(header):]):
            row[""] = "x"
        out.append((number, row))
    return header, out


def read_xlsx(data: bytes) -> tuple[list[str], list[tuple[int, dict]]]:
    """(header, [(row number, {column: text})]) from the first sheet of an XLSX workbook.

    ValueError when the bytes are not an XLSX workbook.
    """
    import zipfile

    from openpyxl import load_workbook

    try:
        workbook = load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except (zipfile.BadZipFile, KeyError, OSError, ValueError) as exc:
        raise ValueError(f"the file is not an XLSX workbook ({exc.__class__.__name__})") from None
    try:
        sheet = workbook.worksheets[0]
        header: list[str] = []
        out = []
        for number, cells in enumerate(sheet.iter_rows(values_only=True), start=1):
            texts = [_cell_text(c) for c in cells]
            if number == 1:
                header = [t.strip() for t in texts]
                while header and not header[-1]:
                    header.pop()
                continue
            if not any(texts):
                continue
            row = {h: (texts[i] if i < len(texts) else "") for i, h in enumerate(header)}
            if any(texts[len(header):]):
                row[""] = "x"
            out.append((number, row))
            if len(out) > MAX_ROWS:
                break
        return header, out
    finally:
        workbook.close()


def read_file(data: bytes, filename: str) -> tuple[list[str], list[tuple[int, dict]]]:
    """Read CSV or XLSX by the file name's extension; ValueError for anything else."""
    suffix = Path(filename or "").suffix.lower()
    if suffix == ".csv":
        return read_csv(data)
    if suffix == ".xlsx":
        return read_xlsx(data)
    raise ValueError(f"the file must end in .csv or .xlsx, got {filename!r}")


# --- checking ----------------------------------------------------------------------------------

def check_rows(conn, project_id: int, header: list[str], rows: list[tuple[int, dict]]
               ) -> tuple[list[dict], list[RowError]]:
    """Check every row; returns (clean rows, every error). Clean rows carry the cap mark in
    ``cap`` and the ground model id in ``ground_model_id``."""
    errors: list[RowError] = []
    seen = set()
    for name in header:
        if name and name not in COLUMNS:
            errors.append(RowError(1, name, f"unknown column {name!r}; the columns are {', '.join(COLUMNS)}"))
        elif name in seen:
            errors.append(RowError(1, name, f"column {name!r} appears twice"))
        seen.add(name)
    if "" in header:
        errors.append(RowError(1, "", "a column has no name in the header row"))
    for name in REQUIRED_COLUMNS:
        if name not in header:
            errors.append(RowError(1, name, f"required column {name!r} is missing"))
    if errors:
        return [], errors
    if not rows:
        return [], [RowError(0, "", "the file holds no piles (only a header, or nothing)")]
    if len(rows) > MAX_ROWS:
        return [], [RowError(0, "", f"the file holds more than {MAX_ROWS:,} rows")]

    models = ground.names(conn, project_id)
    model_extents = ground.extents(conn, project_id)
    rules = projects.current_rules(conn, project_id).rules
    exposure_codes = [row.code for row in rules.exposure_table]
    marks_at: dict[str, int] = {}
    clean_rows = []
    for number, raw in rows:
        row_errors: list[RowError] = []
        if "" in raw:
            row_errors.append(RowError(number, "", "the row has more cells than the header has columns"))
        mark = raw.get("mark", "").strip()
        if not mark:
            row_errors.append(RowError(number, "mark", f"mark is required (1 to {MARK_MAX} characters)"))
        elif len(mark) > MARK_MAX:
            row_errors.append(RowError(number, "mark", f"mark must be at most {MARK_MAX} characters"))
        elif label_problem("mark", mark):
            row_errors.append(RowError(number, "mark", label_problem("mark", mark)))
        elif mark in marks_at:
            row_errors.append(RowError(number, "mark", f"mark {mark} is also on row {marks_at[mark]}"))
        else:
            marks_at[mark] = number
        cap = raw.get("cap", "").strip()
        if len(cap) > 40:
            row_errors.append(RowError(number, "cap", "cap must be at most 40 characters"))
        elif label_problem("cap", cap):
            row_errors.append(RowError(number, "cap", label_problem("cap", cap)))
        model_name = raw.get("ground_model", "").strip()
        model_id = models.get(model_name)
        if not model_name:
            row_errors.append(RowError(number, "ground_model", "ground_model is required: the name of one "
                                       f"of the project's ground models ({', '.join(sorted(models)) or 'none yet'})"))
        elif model_id is None:
            row_errors.append(RowError(number, "ground_model", f"ground_model {model_name!r} is not one of the "
                                       f"project's ground models ({', '.join(sorted(models)) or 'none yet'})"))
        values = {"mark": mark, "cap": cap or None, "ground_model_id": model_id}
        for spec in FIELDS:
            value, message = check_value(spec, raw.get(spec.name, ""))
            if message:
                row_errors.append(RowError(number, spec.name, message))
            values[spec.name] = value
        code = values.get("exposure_class")
        if code and code not in exposure_codes:
            row_errors.append(RowError(number, "exposure_class", f"exposure_class {code!r} is not in the "
                                       f"project's rules ({', '.join(exposure_codes)})"))
        if not any(e.column in FIELD_BY_NAME for e in row_errors):
            problems = check_pile(values)
            if model_id in model_extents and not problems:
                problems = check_in_ground(values, model_name, model_extents[model_id][2])
            for column, message in problems:
                row_errors.append(RowError(number, column, message))
        order = {name: i for i, name in enumerate(COLUMNS)}
        errors.extend(sorted(row_errors, key=lambda e: order.get(e.column, -1)))
        if not row_errors:
            clean_rows.append(values)
    return clean_rows, errors


def import_schedule(conn, project_id: int, data: bytes, filename: str, actor: str) -> ImportResult:
    """Check the whole file and, when every row is valid, import it in one transaction.

    Piles are created or updated by mark; caps named in the file and not yet on the project are
    created with zero loads. Appends one audit entry "schedule imported".
    """
    result = ImportResult()
    if len(data) > MAX_BYTES:
        result.errors.append(RowError(0, "", f"the file is larger than {MAX_BYTES // (1024 * 1024)} MB"))
        return result
    try:
        header, rows = read_file(data, filename)
    except ValueError as exc:
        result.errors.append(RowError(0, "", str(exc)))
        return result
    clean, errors = check_rows(conn, project_id, header, rows)
    if errors:
        result.errors = errors
        return result
    from fieldapp import db

    with db.write(conn):
        cap_ids = caps.marks(conn, project_id)
        for values in clean:
            cap = values.pop("cap")
            if cap and cap not in cap_ids:
                cap_ids[cap] = caps.save_cap(conn, project_id, cap, {})
                result.caps_created.append(cap)
            values["cap_id"] = cap_ids[cap] if cap else None
            action, _ = piles.upsert_by_mark(conn, project_id, values)
            if action == "created":
                result.created += 1
            else:
                result.updated += 1
        result.rows = len(clean)
        audit.append(conn, project_id, actor, "schedule imported", Path(filename).name, {
            "rows": result.rows, "created": result.created, "updated": result.updated,
            "caps_created": result.caps_created, "sha256": hashlib.sha256(data).hexdigest()})
        from fieldapp import saving

        result.rechecked = saving.recheck_stored(conn, project_id, piles.list_piles(conn, project_id),
                                                   None, f"rechecked on the schedule imported from "
                                                   f"{Path(filename).name}", actor)
    return result


# --- writing -----------------------------------------------------------------------------------

def export_rows(conn, project_id: int) -> list[dict]:
    """The schedule as rows keyed by COLUMNS (numbers as numbers), in natural order of mark."""
    out = []
    for p in piles.list_piles(conn, project_id):
        row = {"mark": p.mark, "cap": p.cap_mark or "", "ground_model": p.ground_model_name}
        for spec in FIELDS:
            row[spec.name] = getattr(p, spec.name)
        out.append({c: row[c] for c in COLUMNS})
    return out


def _text(value) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(int(value)) if value.is_integer() and abs(value) < 1e15 else repr(value)
    return str(value)


def to_csv(rows: list[dict]) -> bytes:
    """CSV bytes (UTF-8, comma, header row) of export rows; floats keep every digit."""
    buf = io.StringIO(newline="")
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(COLUMNS)
    for row in rows:
        writer.writerow([_text(row[c]) for c in COLUMNS])
    return buf.getvalue().encode("utf-8")


def to_xlsx(rows: list[dict]) -> bytes:
    """XLSX bytes of export rows: one sheet 'schedule', header row, numbers as numbers."""
    from openpyxl import Workbook
    from openpyxl.cell import WriteOnlyCell

    workbook = Workbook(write_only=True)
    sheet = workbook.create_sheet("schedule")

    def cell(value):
        if not isinstance(value, str):
            return value
        text = WriteOnlyCell(sheet, value=value)
        text.data_type = "s"  # never a formula, whatever the text starts with
        return text

    sheet.append(list(COLUMNS))
    for row in rows:
        sheet.append([cell(row[c]) for c in COLUMNS])
    buf = io.BytesIO()
    workbook.save(buf)
    return buf.getvalue()


def export_schedule(conn, project_id: int, fmt: str) -> bytes:
    """The schedule as 'csv' or 'xlsx' bytes."""
    rows = export_rows(conn, project_id)
    if fmt == "csv":
        return to_csv(rows)
    if fmt == "xlsx":
        return to_xlsx(rows)
    raise ValueError(f"format must be csv or xlsx, got {fmt!r}")


# --- command line ------------------------------------------------------------------------------

def register(main) -> None:
    """Add ``toeline import PROJECT_ID FILE`` and ``toeline export PROJECT_ID FILE``."""
    import click

    from fieldapp.cli import _app, data_option

    def _project(conn, project_id):
        if projects.get(conn, project_id) is None:
            raise click.ClickException(f"project {project_id} does not exist")

    @main.command("import")
    @data_option
    @click.argument("project_id", type=int)
    @click.argument("file", type=click.Path(exists=True, dir_okay=False))
    @click.pass_context
    def import_command(ctx, data_dir, project_id, file):
        """Import a pile schedule (.csv or .xlsx): all or nothing, every error listed."""
        from fieldapp import db

        app = _app(ctx, data_dir)
        with app.app_context():
            conn = db.get_db()
            _project(conn, project_id)
            result = import_schedule(conn, project_id, Path(file).read_bytes(), file, "cli")
        if not result.ok:
            for error in result.errors:
                click.echo(str(error), err=True)
            raise click.ClickException(result.summary())
        click.echo(result.summary())

    @main.command("export")
    @data_option
    @click.argument("project_id", type=int)
    @click.argument("file", type=click.Path(dir_okay=False))
    @click.pass_context
    def export_command(ctx, data_dir, project_id, file):
        """Export the pile schedule to FILE; the format follows the extension (.csv or .xlsx)."""
        from fieldapp import db

        suffix = Path(file).suffix.lower().lstrip(".")
        if suffix not in ("csv", "xlsx"):
            raise click.ClickException("FILE must end in .csv or .xlsx")
        app = _app(ctx, data_dir)
        with app.app_context():
            conn = db.get_db()
            _project(conn, project_id)
            data = export_schedule(conn, project_id, suffix)
            count = piles.count(conn, project_id)
        Path(file).write_bytes(data)
        click.echo(f"exported {count} pile(s) to {file}")
