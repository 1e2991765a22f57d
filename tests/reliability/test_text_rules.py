"""Marks, names and codes: printable characters only, no "/" in a pile mark, no exposure class
that a spreadsheet would run as a formula, and every CSV cell defused (issue 15, items 6, 7, 9;
the text checks of item 5 for the forms and the import)."""

from __future__ import annotations

import csv
import io
import re
from urllib.parse import quote

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from reliability_kit import engineer_site

from fieldapp import db, schedule_io, text_rules
from fieldapp.queries import piles, projects
from fieldapp.record import export

BAD_MARKS = {
    "\x00": "printable characters only",
    "CT\x01X": "printable characters only",
    "P\u200bX": "printable characters only",  # zero-width space, a format character
    "C1/3": "must not contain '/'",
    "=1+1": "must not start",
    "@SUM(1)": "must not start",
}
SETTINGS = settings(max_examples=40, deadline=None,
                    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
# Text with what breaks files: control characters, lone surrogates, format characters.
NASTY = st.text(st.characters(codec=None, categories=("Cc", "Cs", "Cf", "Lu", "Nd", "Zs")), min_size=1, max_size=12)


@pytest.fixture
def site(demo_data):
    return engineer_site(demo_data)


def _pile_form_body(site, mark: str) -> bytes:
    """A new-pile form body as a browser sends it (UTF-8, surrogates passed through as bytes)."""
    with site["app"].app_context():
        conn = db.get_db()
        model = piles.list_piles(conn, site["project"])[0]
        values = piles.as_values(model)
    fields = {**{k: ("" if v is None else v) for k, v in values.items() if k not in ("cap_id", "mark")},
              "mark": mark, "cap_id": "", "csrf_token": site["token"]}
    return "&".join(f"{k}={quote(str(v).encode('utf-8', 'surrogatepass'))}" for k, v in fields.items()).encode()


def _post_pile(site, mark: str):
    return site["client"].post(f"/projects/{site['project']}/piles/new", data=_pile_form_body(site, mark),
                               content_type="application/x-www-form-urlencoded")


def _marks(site) -> set[str]:
    with site["app"].app_context():
        return {p.mark for p in piles.list_piles(db.get_db(), site["project"])}


@pytest.mark.parametrize("mark", list(BAD_MARKS))
def test_the_pile_form_refuses_the_mark_naming_why(site, mark):
    before = _marks(site)
    answer = _post_pile(site, mark)
    assert answer.status_code == 400
    page = answer.get_data(as_text=True)
    assert BAD_MARKS[mark] in page.replace("&#39;", "'"), page[:400]
    assert _marks(site) == before


def test_the_pile_form_still_takes_a_plain_mark(site):
    answer = _post_pile(site, "NEW-7.2 é")
    assert answer.status_code == 302, answer.get_data(as_text=True)[:500]
    assert "NEW-7.2 é" in _marks(site)


@SETTINGS
@given(NASTY)
def test_hypothesis_text_into_the_pile_form_never_a_500_and_only_printable_is_kept(site, mark):
    answer = _post_pile(site, mark)
    assert answer.status_code in (302, 400), answer.status_code
    for kept in _marks(site):
        assert text_rules.mark_problem("mark", kept) is None, repr(kept)


def _schedule_csv(site, mark: str) -> bytes:
    """A one-row schedule file with ``mark`` written raw (as another program might write it)."""
    with site["app"].app_context():
        rows = schedule_io.export_rows(db.get_db(), site["project"])[:1]
    rows[0]["mark"] = mark
    buf = io.StringIO(newline="")
    writer = csv.writer(buf)
    writer.writerow(schedule_io.COLUMNS)
    writer.writerow([schedule_io._text(rows[0][c]) for c in schedule_io.COLUMNS])
    return buf.getvalue().encode("utf-8", "surrogatepass")


def _import(site, data: bytes, name: str):
    return site["client"].post(f"/projects/{site['project']}/piles/import", content_type="multipart/form-data",
                               data={"csrf_token": site["token"], "file": (io.BytesIO(data), name)})


@pytest.mark.parametrize("mark", ["CT\x01X", "C1/3", "P\u200bX"])
def test_the_import_refuses_the_mark_with_row_and_column(site, mark):
    before = _marks(site)
    answer = _import(site, _schedule_csv(site, mark), "s.csv")
    assert answer.status_code == 422
    page = answer.get_data(as_text=True).replace("&#39;", "'")
    problem = re.search(r'<td data-label="Row">2</td><td data-label="Column"><code>mark</code></td>'
                        r'<td data-label="Problem">([^<]*)</td>', page)
    assert problem and BAD_MARKS[mark] in problem.group(1), page[-1500:]
    assert _marks(site) == before


def test_the_xlsx_import_refuses_a_control_character(site):
    """An XLSX cell (XML 1.0) can carry the C1 control characters, U+0080 to U+009F."""
    import zipfile

    with site["app"].app_context():
        rows = schedule_io.export_rows(db.get_db(), site["project"])[:1]
    rows[0]["mark"] = "CTMARKX"
    data = schedule_io.to_xlsx(rows)
    src, out = zipfile.ZipFile(io.BytesIO(data)), io.BytesIO()
    with zipfile.ZipFile(out, "w") as dst:
        for item in src.infolist():
            body = src.read(item.filename)
            dst.writestr(item, body.replace(b"CTMARKX", "CT\u0090X".encode()))
    header, read = schedule_io.read_xlsx(out.getvalue())
    assert read[0][1]["mark"] == "CT\u0090X"  # the premise: the control character comes through
    answer = _import(site, out.getvalue(), "s.xlsx")
    assert answer.status_code == 422 and "printable characters only" in answer.get_data(as_text=True)


@SETTINGS
@given(NASTY)
def test_hypothesis_text_into_the_import_never_a_500(site, mark):
    before = _marks(site)
    data = _schedule_csv(site, mark.replace("\r", "").replace("\n", ""))
    answer = _import(site, data, "s.csv")
    assert answer.status_code in (302, 422), answer.status_code
    after = _marks(site)
    for kept in after - before:
        assert text_rules.mark_problem("mark", kept) is None, repr(kept)


def _rules_form(site, code: str) -> dict:
    from fieldapp.forms import RULE_NAMES

    with site["app"].app_context():
        rules = projects.current_rules(db.get_db(), site["project"]).rules
    data = {"csrf_token": site["token"], "note": "test"}
    for name in RULE_NAMES:
        data[name] = str(getattr(rules, name))
    for i, row in enumerate(rules.exposure_table):
        data[f"exposure-{i}-code"] = row.code
        data[f"exposure-{i}-cmin_dur_mm"] = str(row.cmin_dur_mm)
        data[f"exposure-{i}-min_strength_mpa"] = str(row.min_strength_mpa)
        data[f"exposure-{i}-description"] = row.description
    n = len(rules.exposure_table)
    data.update({f"exposure-{n}-code": code, f"exposure-{n}-cmin_dur_mm": "30",
                 f"exposure-{n}-min_strength_mpa": "30", f"exposure-{n}-description": "injected"})
    return data


@pytest.mark.parametrize("code", ["=1+1", "@SUM(1)", "+1", "-1", "X\tY", "X\x01"])
def test_the_rules_form_refuses_a_formula_or_unprintable_exposure_class(site, code):
    with site["app"].app_context():
        version = projects.current_rules(db.get_db(), site["project"]).version
    answer = site["client"].post(f"/projects/{site['project']}/rules/edit", data=_rules_form(site, code))
    assert answer.status_code == 400
    page = answer.get_data(as_text=True)
    assert re.search(r"Exposure row \d+: Class must (not start|hold printable)", page), page[-800:]
    with site["app"].app_context():
        assert projects.current_rules(db.get_db(), site["project"]).version == version


def test_the_rules_form_takes_a_plain_new_class(site):
    answer = site["client"].post(f"/projects/{site['project']}/rules/edit", data=_rules_form(site, "XF9"))
    assert answer.status_code == 302, answer.get_data(as_text=True)[-800:]


def test_every_csv_writer_defuses_a_cell_beginning_like_a_formula():
    """Stored before such text was refused: the CSV cell gets a leading apostrophe (OWASP, CSV
    Injection), numbers stay numbers, negative numbers included."""
    row = {c: "" for c in schedule_io.COLUMNS}
    row.update(mark="@P1", cap="=K1", exposure_class="=1+1", ground_model="+G", pile_type="\tbored",
               head="\rfree", easting_m=-12.5, toe_level_m=-5.0)
    cells = next(csv.DictReader(io.StringIO(schedule_io.to_csv([row]).decode())))
    for column, text in (("mark", "'@P1"), ("cap", "'=K1"), ("exposure_class", "'=1+1"), ("ground_model", "'+G"),
                         ("pile_type", "'\tbored")):
        assert cells[column] == text, column
    assert cells["head"].startswith("'")
    assert cells["easting_m"] == "-12.5" and cells["toe_level_m"] == "-5"
    assert export._safe("-x") == "'-x" and export._safe(-1.5) == -1.5


def test_text_stored_before_the_rules_is_written_visibly_not_a_500():
    row = {c: "" for c in schedule_io.COLUMNS}
    row.update(mark="CT\x01X", cap="\ud800", easting_m=1.0)
    data = schedule_io.to_xlsx([row])
    from openpyxl import load_workbook

    sheet = load_workbook(io.BytesIO(data)).worksheets[0]
    assert [c.value for c in sheet[2]][:2] == ["CT\\x01X", "\\ud800"]
    assert b"CT\\x01X" in schedule_io.to_csv([row])
