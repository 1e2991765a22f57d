"""Schedule files read with limits (issue 15, items 8 and 10): a 100k-row file, three zip bombs
made here (ten million blank rows, one row of two million cells, one cell of 400 MB), a corrupt
deflate stream and other broken files are refused early with a message naming the problem and
the limit; never a 500, never a partial import."""

from __future__ import annotations

import io
import os
import zipfile

import pytest
from reliability_kit import engineer_site

from fieldapp import db, schedule_io
from fieldapp.queries import piles

SHEET = "xl/worksheets/sheet1.xml"
NS = 'xmlns="http://schemas.openxmlformats.org/spreadsheetml/2006/main"'


@pytest.fixture
def site(demo_data):
    return engineer_site(demo_data)


def _good_rows(site, n=1):
    with site["app"].app_context():
        return schedule_io.export_rows(db.get_db(), site["project"])[:n]


def _workbook_with_sheet(write_sheet) -> bytes:
    """A real workbook (openpyxl) whose first sheet's XML is replaced by ``write_sheet(stream)``."""
    template = zipfile.ZipFile(io.BytesIO(schedule_io.to_xlsx([])))
    out = io.BytesIO()
    with zipfile.ZipFile(out, "w", zipfile.ZIP_DEFLATED, compresslevel=9) as dst:
        for item in template.infolist():
            if item.filename == SHEET:
                with dst.open(SHEET, "w", force_zip64=True) as stream:
                    write_sheet(stream)
            else:
                dst.writestr(item.filename, template.read(item.filename))
    return out.getvalue()


def _import(site, data: bytes, name: str):
    return site["client"].post(f"/projects/{site['project']}/piles/import", content_type="multipart/form-data",
                               data={"csrf_token": site["token"], "file": (io.BytesIO(data), name)})


def _refused(site, data: bytes, name: str, *words, monkeypatch=None):
    with site["app"].app_context():
        before = piles.count(db.get_db(), site["project"])
    if monkeypatch is not None:  # the limits must stop the file before openpyxl reads it
        import openpyxl

        def never(*args, **kwargs):
            raise AssertionError("openpyxl opened a file the limits should have refused")
        monkeypatch.setattr(openpyxl, "load_workbook", never)
    answer = _import(site, data, name)
    page = answer.get_data(as_text=True).replace("&#39;", "'")
    assert answer.status_code == 422, (answer.status_code, page[-600:])
    for word in words:
        assert word in page, (word, page[page.find("Nothing imported"):][:800])
    with site["app"].app_context():
        assert piles.count(db.get_db(), site["project"]) == before
    return page


def test_a_100k_row_csv_is_refused_naming_the_limit(site):
    header, row = schedule_io.to_csv(_good_rows(site)).decode().splitlines()[:2]
    short = ",".join(c if c else "" for c in row.split(",")[1:4])  # a row of the real schedule's first cells
    body = "\r\n".join([",".join(header.split(",")[:4])] + [f"M{i},{short}" for i in range(100_000)])
    assert len(body) < schedule_io.MAX_BYTES
    _refused(site, body.encode(), "big.csv", "more than 20,000 rows")


def test_a_csv_of_blank_lines_counts_them(site):
    header = ",".join(schedule_io.COLUMNS)
    _refused(site, (header + "\n" * 5_000_000).encode(), "blank.csv", "blank rows included")


def test_a_100k_row_xlsx_is_refused_before_openpyxl(site, monkeypatch):
    cells = "".join(f'<c t="inlineStr"><is><t>{c}</t></is></c>' for c in schedule_io.COLUMNS)

    def sheet(stream):
        stream.write(f'<worksheet {NS}><sheetData><row r="1">{cells}</row>'.encode())
        for r in range(2, 100_002):
            stream.write(f'<row r="{r}"><c t="inlineStr"><is><t>M{r}</t></is></c></row>'.encode())
        stream.write(b"</sheetData></worksheet>")
    _refused(site, _workbook_with_sheet(sheet), "big.xlsx", "more than 20,000 rows", monkeypatch=monkeypatch)


def test_bomb_ten_million_blank_rows(site, monkeypatch):
    def sheet(stream):
        stream.write(f"<worksheet {NS}><sheetData>".encode())
        block = b"<row/>" * 100_000
        for _ in range(100):
            stream.write(block)
        stream.write(b"</sheetData></worksheet>")
    data = _workbook_with_sheet(sheet)
    assert len(data) < 1_000_000  # a small file ...
    assert zipfile.ZipFile(io.BytesIO(data)).getinfo(SHEET).file_size > 59_000_000  # ... of 60 MB of rows
    _refused(site, data, "rows.xlsx", "more than 20,000 rows", "blank rows included", monkeypatch=monkeypatch)


def test_bomb_beyond_the_size_limit_is_refused_by_its_declared_size(site, monkeypatch):
    def sheet(stream):
        stream.write(f"<worksheet {NS}><sheetData>".encode())
        block = b"<row/>" * 1_000_000
        for _ in range(20):
            stream.write(block)
        stream.write(b"</sheetData></worksheet>")
    _refused(site, _workbook_with_sheet(sheet), "rows.xlsx", "decompresses to 114 MB", monkeypatch=monkeypatch)


def test_bomb_blank_rows_within_the_size_limit_are_counted(site, monkeypatch):
    def sheet(stream):
        stream.write(f'<worksheet {NS}><sheetData><row r="1"><c t="inlineStr"><is><t>mark</t></is></c></row>'
                     '<row r="10000000"/></sheetData></worksheet>'.encode())
    _refused(site, _workbook_with_sheet(sheet), "far.xlsx", "row 10,000,000 reached", monkeypatch=monkeypatch)


def test_bomb_one_row_of_two_million_cells(site, monkeypatch):
    def sheet(stream):
        stream.write(f'<worksheet {NS}><sheetData><row r="1">'.encode())
        chunk = b"<c><v>1</v></c>" * 10_000
        for _ in range(200):
            stream.write(chunk)
        stream.write(b"</row></sheetData></worksheet>")
    _refused(site, _workbook_with_sheet(sheet), "wide.xlsx", "at most 64 columns", monkeypatch=monkeypatch)


def test_bomb_one_cell_of_400_mb(site, monkeypatch):
    def sheet(stream):
        stream.write(f'<worksheet {NS}><sheetData><row r="1"><c t="inlineStr"><is><t>'.encode())
        chunk = b"a" * (1 << 20)
        for _ in range(400):
            stream.write(chunk)
        stream.write(b"</t></is></c></row></sheetData></worksheet>")
    data = _workbook_with_sheet(sheet)
    assert len(data) < schedule_io.MAX_BYTES
    _refused(site, data, "cell.xlsx", "decompresses to 400 MB", monkeypatch=monkeypatch)


def test_a_long_cell_within_the_size_limit_is_refused(site, monkeypatch):
    def sheet(stream):
        stream.write(f'<worksheet {NS}><sheetData><row r="1"><c t="inlineStr"><is><t>{"b" * 50_000}</t></is></c>'
                     '</row></sheetData></worksheet>'.encode())
    _refused(site, _workbook_with_sheet(sheet), "cell.xlsx", "50,000 characters", monkeypatch=monkeypatch)


def test_a_corrupt_deflate_stream_is_a_clear_error(site):
    data = bytearray(schedule_io.to_xlsx(_good_rows(site, 5)))
    archive = zipfile.ZipFile(io.BytesIO(bytes(data)))
    info = archive.getinfo(SHEET)
    start = info.header_offset + 30 + len(info.filename.encode()) + len(info.extra)
    for i in range(start + 5, start + min(info.compress_size - 2, 60)):
        data[i] ^= 0x5A
    with pytest.raises(Exception) as broken:  # the premise: the stream itself is broken
        archive = zipfile.ZipFile(io.BytesIO(bytes(data)))
        archive.read(SHEET)
    assert broken.type.__name__ in ("error", "BadZipFile")
    _refused(site, bytes(data), "broken.xlsx", "damaged")


@pytest.mark.parametrize("name, data, words", [
    ("random.xlsx", os.urandom(5000), ("not an XLSX workbook",)),
    ("empty.xlsx", b"", ("not an XLSX workbook",)),
    ("zip.xlsx", None, ("not a readable XLSX workbook",)),
    ("entity.xlsx", "entity", ("declares XML entities",)),
    ("bad.xml.xlsx", "notxml", ("not well-formed XML",)),
    ("field.csv", ("mark\n" + "x" * 200_000 + "\n").encode(), ("cannot be read as CSV", "line 2")),
    ("cell.csv", ("mark\n" + "x" * 5_000 + "\n").encode(), ("5,000 characters", "at most 2,000")),
    ("wide.csv", ("mark\n" + "x," * 5_000 + "x\n").encode(), ("5,001 cells", "at most 64 columns")),
    ("nul.csv", (",".join(schedule_io.COLUMNS) + "\n" + ",".join(["\x00"] * len(schedule_io.COLUMNS))).encode(),
     ("printable characters only", "U+0000")),
])
def test_other_broken_files_are_clear_errors(site, name, data, words):
    if data is None:
        out = io.BytesIO()
        with zipfile.ZipFile(out, "w") as archive:
            archive.writestr("hello.txt", "not a workbook")
        data = out.getvalue()
    elif data == "entity":
        data = _workbook_with_sheet(lambda s: s.write(
            b'<?xml version="1.0"?><!DOCTYPE x [<!ENTITY a "aaaaaaaa">]><worksheet/>'))
    elif data == "notxml":
        data = _workbook_with_sheet(lambda s: s.write(b"<worksheet><sheetData><row>"))
    _refused(site, data, name, *words)


def test_the_import_command_refuses_a_big_file_before_reading_it(demo_data, tmp_path):
    from click.testing import CliRunner

    from fieldapp.cli import main

    big = tmp_path / "big.csv"
    with open(big, "wb") as fh:
        fh.truncate(schedule_io.MAX_BYTES + 1)  # sparse: nothing to read, only its size
    result = CliRunner().invoke(main, ["--data", str(demo_data), "import", "1", str(big)])
    assert result.exit_code != 0 and "larger than 10 MB" in result.output, result.output


def test_the_import_command_reports_a_bomb_clearly(demo_data, tmp_path):
    from click.testing import CliRunner

    from fieldapp.cli import main

    def sheet(stream):
        stream.write(f"<worksheet {NS}><sheetData>".encode() + b"<row/>" * 1_000_000 + b"</sheetData></worksheet>")
    path = tmp_path / "bomb.xlsx"
    path.write_bytes(_workbook_with_sheet(sheet))
    result = CliRunner().invoke(main, ["--data", str(demo_data), "import", "1", str(path)])
    assert result.exit_code != 0 and "more than 20,000 rows" in result.output, result.output
