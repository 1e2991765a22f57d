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
import re
import zipfile
import zlib
from dataclasses import dataclass, field
from pathlib import Path
from xml.etree.ElementTree import ParseError, iterparse

from fieldapp import text_rules
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
# Limits of what a schedule file may hold, checked before it is read whole: rows (blank ones
# included), columns, characters in one cell, and for XLSX (a zip of XML files) the size of
# its parts once decompressed. A small file can decompress to gigabytes (a "zip bomb").
MAX_COLUMNS = 64
MAX_CELL_CHARS = 2_000
MAX_XLSX_UNCOMPRESSED = 64 * 1024 * 1024
MAX_XLSX_PARTS = 2_000


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


def _too_many_rows(number: int) -> ValueError:
    return ValueError(f"the file holds more than {MAX_ROWS:,} rows (row {number:,} reached, blank rows "
                      "included): split it, or delete the rows below the schedule")


def _check_cells(number: int, cells) -> None:
    if len(cells) > MAX_COLUMNS and any(str(c).strip() for c in cells[MAX_COLUMNS:]):
        raise ValueError(f"row {number:,} has {len(cells):,} cells: a schedule has at most {MAX_COLUMNS} columns")
    for i, cell in enumerate(cells[:MAX_COLUMNS], start=1):
        if isinstance(cell, str) and len(cell) > MAX_CELL_CHARS:
            raise ValueError(f"row {number:,}, cell {i} holds {len(cell):,} characters: at most "
                             f"{MAX_CELL_CHARS:,} are allowed in one cell")


def read_csv(data: bytes) -> tuple[list[str], list[tuple[int, dict]]]:
    """(header, [(row number, {column: text})]) from CSV bytes (UTF-8, comma, semicolon or tab).

    ValueError when the bytes are not UTF-8 text, or the file is beyond MAX_ROWS (blank rows
    included), MAX_COLUMNS or MAX_CELL_CHARS, or is not CSV the reader can parse.
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
    header: list[str] = []
    out = []
    try:
        for number, cells in enumerate(reader, start=1):
            if number > MAX_ROWS + 1:
                raise _too_many_rows(number)
            _check_cells(number, cells)
            if number == 1:
                header = [h.strip() for h in cells]
                while header and not header[-1]:
                    header.pop()
                continue
            if not any(c.strip() for c in cells):
                continue
            row = {h: (cells[i].strip() if i < len(cells) else "") for i, h in enumerate(header)}
            if any(c.strip() for c in cells[len(header):]):
                row[""] = "x"
            out.append((number, row))
    except csv.Error as exc:
        raise ValueError(f"the file cannot be read as CSV (line {reader.line_num:,}: {exc})") from None
    return header, out


_COLUMN_LETTERS = re.compile(r"[A-Z]+")


def _column_number(ref: str) -> int:
    match = _COLUMN_LETTERS.match(ref or "")
    number = 0
    for letter in match.group() if match else "":
        number = number * 26 + ord(letter) - 64
    return number


def check_xlsx_parts(data: bytes) -> None:
    """Refuse an XLSX file before openpyxl opens it when it is not a zip, has too many parts,
    decompresses beyond MAX_XLSX_UNCOMPRESSED, or a sheet holds more than MAX_ROWS rows (blank
    ones included: the row numbers count), more than MAX_COLUMNS columns or a cell (or shared
    string) longer than MAX_CELL_CHARS. The XML is read as a stream, element by element, so a
    hostile file costs no more memory than its largest allowed cell. ValueError naming the
    problem."""
    try:
        archive = zipfile.ZipFile(io.BytesIO(data))
        parts = archive.infolist()
    except (zipfile.BadZipFile, OSError, ValueError, EOFError) as exc:
        raise ValueError(f"the file is not an XLSX workbook (not a readable zip: {exc})") from None
    if len(parts) > MAX_XLSX_PARTS:
        raise ValueError(f"the workbook has {len(parts):,} parts: at most {MAX_XLSX_PARTS:,} are allowed")
    total = sum(p.file_size for p in parts)
    if total > MAX_XLSX_UNCOMPRESSED:
        raise ValueError(f"the workbook decompresses to {total / 1_048_576:,.0f} MB: at most "
                         f"{MAX_XLSX_UNCOMPRESSED // 1_048_576} MB are allowed (a schedule of "
                         f"{MAX_ROWS:,} piles needs far less)")
    for part in parts:
        name = part.filename
        if not name.endswith(".xml") or not (name.startswith("xl/worksheets/") or name == "xl/sharedStrings.xml"):
            continue
        sheet = name.startswith("xl/worksheets/")
        try:
            with archive.open(part) as stream:
                head = stream.peek(4096)[:4096] if hasattr(stream, "peek") else b""
                if b"<!DOCTYPE" in head or b"<!ENTITY" in head:
                    raise ValueError(f"the workbook part {name} declares XML entities: refused")
                cells_in_row = rows = 0
                open_elements = []
                for event, element in iterparse(stream, events=("start", "end")):
                    tag = element.tag.rsplit("}", 1)[-1]
                    if event == "start":
                        open_elements.append(element)
                        if sheet and tag == "row":
                            cells_in_row, rows = 0, rows + 1
                            ref = element.get("r") or ""
                            number = max(rows, int(ref)) if ref.isdigit() else rows
                            if number > MAX_ROWS + 1:
                                raise _too_many_rows(number)
                        elif sheet and tag == "c":
                            cells_in_row += 1
                            column = _column_number(element.get("r", ""))
                            if cells_in_row > MAX_COLUMNS or column > MAX_COLUMNS:
                                raise ValueError(f"a row of the sheet {name} has cells beyond column "
                                                 f"{MAX_COLUMNS}: a schedule has at most {MAX_COLUMNS} columns")
                        continue
                    if tag in ("v", "t") and element.text and len(element.text) > MAX_CELL_CHARS:
                        raise ValueError(f"a cell of the workbook holds {len(element.text):,} characters: "
                                         f"at most {MAX_CELL_CHARS:,} are allowed in one cell")
                    open_elements.pop()
                    if tag in ("c", "si", "row"):
                        element.clear()
                        if tag != "c" and open_elements:
                            open_elements[-1].remove(element)  # keep memory flat over many rows
        except ParseError as exc:
            raise ValueError(f"the workbook part {name} is not well-formed XML ({exc})") from None
        except (zipfile.BadZipFile, zlib.error, EOFError, OSError) as exc:
            raise ValueError(f"the workbook part {name} is damaged ({exc.__class__.__name__}: {exc})") from None


def read_xlsx(data: bytes) -> tuple[list[str], list[tuple[int, dict]]]:
    """(header, [(row number, {column: text})]) from the first sheet of an XLSX workbook.

    ValueError when the bytes are not an XLSX workbook, are beyond the limits of
    :func:`check_xlsx_parts` (checked first), or cannot be read whole (a damaged part).
    """
    from openpyxl import load_workbook

    check_xlsx_parts(data)
    try:
        workbook = load_workbook(io.BytesIO(data), read_only=True, data_only=True)
    except Exception as exc:  # noqa: BLE001 - any broken workbook is the file's problem, said so
        raise ValueError(f"the file is not a readable XLSX workbook ({exc.__class__.__name__}: "
                         f"{str(exc)[:200]})") from None
    try:
        if not workbook.worksheets:
            raise ValueError("the workbook has no sheet")
        sheet = workbook.worksheets[0]
        header: list[str] = []
        out = []
        for number, cells in enumerate(sheet.iter_rows(values_only=True, max_col=MAX_COLUMNS), start=1):
            if number > MAX_ROWS + 1:
                raise _too_many_rows(number)
            texts = [_cell_text(c) for c in cells]
            _check_cells(number, texts)
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
        return header, out
    except ValueError:
        raise
    except Exception as exc:  # noqa: BLE001 - a damaged part met while reading (zlib.error, XML)
        raise ValueError(f"the workbook cannot be read whole ({exc.__class__.__name__}: "
                         f"{str(exc)[:200]})") from None
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
        unreadable = {}
        for column, text in raw.items():
            problem = text_rules.name_problem(column or "cell", text) if column in COLUMNS else None
            if problem:
                unreadable[column] = problem
                row_errors.append(RowError(number, column, problem))
        mark = raw.get("mark", "").strip()
        if "mark" in unreadable:
            pass
        elif not mark:
            row_errors.append(RowError(number, "mark", f"mark is required (1 to {MARK_MAX} characters)"))
        elif len(mark) > MARK_MAX:
            row_errors.append(RowError(number, "mark", f"mark must be at most {MARK_MAX} characters"))
        elif text_rules.mark_problem("mark", mark):
            row_errors.append(RowError(number, "mark", text_rules.mark_problem("mark", mark)))
        elif mark in marks_at:
            row_errors.append(RowError(number, "mark", f"mark {mark} is also on row {marks_at[mark]}"))
        else:
            marks_at[mark] = number
        cap = raw.get("cap", "").strip()
        if "cap" in unreadable:
            pass
        elif len(cap) > 40:
            row_errors.append(RowError(number, "cap", "cap must be at most 40 characters"))
        elif label_problem("cap", cap):
            row_errors.append(RowError(number, "cap", label_problem("cap", cap)))
        model_name = raw.get("ground_model", "").strip()
        model_id = models.get(model_name)
        if "ground_model" in unreadable:
            pass
        elif not model_name:
            row_errors.append(RowError(number, "ground_model", "ground_model is required: the name of one "
                                       f"of the project's ground models ({', '.join(sorted(models)) or 'none yet'})"))
        elif model_id is None:
            row_errors.append(RowError(number, "ground_model", f"ground_model {model_name!r} is not one of the "
                                       f"project's ground models ({', '.join(sorted(models)) or 'none yet'})"))
        values = {"mark": mark, "cap": cap or None, "ground_model_id": model_id}
        for spec in FIELDS:
            if spec.name in unreadable:
                values[spec.name] = None
                continue
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
    """CSV bytes (UTF-8, comma, header row) of export rows; floats keep every digit. A text cell
    beginning like a formula (=, +, -, @, tab, CR: one stored before such text was refused)
    gets a leading apostrophe, so a spreadsheet shows it as text (``text_rules.csv_cell``)."""
    buf = io.StringIO(newline="")
    writer = csv.writer(buf, lineterminator="\r\n")
    writer.writerow(COLUMNS)
    for row in rows:
        writer.writerow([text_rules.csv_cell(_text(row[c])) if isinstance(row[c], str) else _text(row[c])
                         for c in COLUMNS])
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
        text = WriteOnlyCell(sheet, value=text_rules.visible(value))
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
            size = Path(file).stat().st_size
            if size > MAX_BYTES:  # refused before it is read into memory
                raise click.ClickException(f"Nothing imported: {file} is {size / 1_048_576:,.1f} MB, larger "
                                           f"than {MAX_BYTES // (1024 * 1024)} MB")
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
