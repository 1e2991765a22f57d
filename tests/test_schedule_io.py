"""Import and export of the pile schedule (CSV and XLSX): every row checked, every error reported
with its row and column, nothing imported unless the whole file is valid, and export then import
gives the same schedule. Also the `toeline import` and `toeline export` commands."""

from __future__ import annotations

import io

import pytest
from click.testing import CliRunner
from openpyxl import Workbook, load_workbook

from fieldapp import db, schedule_io
from fieldapp.cli import main
from fieldapp.queries import audit, caps, piles
from tests.factories import make_ground, make_pile

LAYERS = [dict(top_level_m=10.0, bottom_level_m=5.0, material="cohesive", unit_weight_kn_m3=19.0, cu_kpa=60.0),
          dict(top_level_m=5.0, bottom_level_m=-20.0, material="cohesionless", unit_weight_kn_m3=20.0,
               phi_deg=34.0)]

HEADER = ",".join(schedule_io.COLUMNS)
GOOD = [
    "A1,K1,bored,100.5,200.25,9,-5,600,Zone 1,900,0,20,0,8,20,8,40,500,XC2,75,fixed",
    "A2,K1,bored,102.3,200.25,9,-5.5,600,Zone 1,950,0,20,0,8,20,8,40,500,XC2,75,fixed",
    "A3,,cfa,110,205,9,-3,450,Zone 1,500,0,10,15,6,16,10,32,500,XC3,75,free",
    "A4,K2,driven,120,210,8.5,-10,300,Zone 1,600,50,5,0,4,12,6,50,500,XC2,60,free",
    "A5,K2,screw,121,210,8.5,-9.75,300,Zone 1,580,0,5,0,4,12,6,50,500,XC2,60,free",
]


def csv_bytes(lines):
    return ("\n".join([HEADER] + lines) + "\n").encode()


@pytest.fixture
def project(app, people):
    """Project 'own' with a ground model 'Zone 1' and no piles; also the same model in 'other'."""
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            make_ground(conn, people["own"], LAYERS, "Zone 1", 8.0)
            make_ground(conn, people["other"], LAYERS, "Zone 1", 8.0)
    return people


def run_import(app, project_id, data, filename):
    with app.app_context():
        return schedule_io.import_schedule(db.get_db(), project_id, data, filename, "test")


def schedule(app, project_id):
    with app.app_context():
        return [{k: v for k, v in piles.as_values(p).items() if k not in ("cap_id", "ground_model_id")}
                | {"cap": p.cap_mark, "ground_model": p.ground_model_name}
                for p in piles.list_piles(db.get_db(), project_id)]


def test_valid_csv_imports_every_row_and_creates_caps(app, project):
    result = run_import(app, project["own"], csv_bytes(GOOD), "schedule.csv")
    assert result.ok, result.errors
    assert (result.created, result.updated, result.caps_created) == (5, 0, ["K1", "K2"])
    with app.app_context():
        conn = db.get_db()
        a3 = piles.get_pile(conn, project["own"], "A3")
        assert (a3.pile_type, a3.cap_id, a3.diameter_mm, a3.moment_knm, a3.head) == ("cfa", None, 450.0, 15.0, "free")
        assert caps.by_mark(conn, project["own"], "K2").pile_marks == ("A4", "A5")
        entry = audit.entries(conn, project["own"])[0]
        assert entry["action"] == "schedule imported" and entry["subject"] == "schedule.csv"


def test_three_bad_rows_are_all_reported_and_nothing_is_imported(app, project):
    lines = list(GOOD)
    lines[1] = lines[1].replace(",600,Zone 1,950", ",100,Zone 1,950")        # row 3: diameter_mm
    lines[2] = lines[2].replace("cfa,110,205,9,-3", "cfa,110,205,9,12")       # row 4: toe above cut-off
    lines[4] = lines[4].replace("Zone 1", "Zone 7")                            # row 6: unknown model
    result = run_import(app, project["own"], csv_bytes(lines), "bad.csv")
    assert not result.ok
    assert [(e.row, e.column) for e in result.errors] == [(3, "diameter_mm"), (4, "toe_level_m"), (6, "ground_model")]
    assert "diameter_mm must be 150 to 3,000 mm, got 100" in result.errors[0].message
    assert "must be below cutoff_level_m" in result.errors[1].message
    assert "'Zone 7' is not one of the project's ground models (Zone 1)" in result.errors[2].message
    with app.app_context():
        conn = db.get_db()
        assert piles.count(conn, project["own"]) == 0
        assert caps.list_caps(conn, project["own"]) == []
        assert audit.entries(conn, project["own"]) == []


def test_every_error_in_a_row_and_in_the_header_is_reported(app, project):
    header = HEADER.replace("shear_kn", "shear").replace(",diameter_mm", "")
    data = (header + "\nB1,,bored,1,2,3,4,Zone 1,5,6,7,8,9,10,11,12,13,XC2,75,free\n").encode()
    result = run_import(app, project["own"], data, "x.csv")
    assert [(e.row, e.column) for e in result.errors] == [(1, "shear"), (1, "diameter_mm")]
    lines = ["B1,,pier,east,2,9,-5,600,Zone 1,-3,0,0,0,2,20,8,40,500,XX9,75,pinned",
             "B1,,bored,1,2,9,-5,600,Zone 1,0,0,0,0,0,0,0,40,500,XC2,75,free"]
    result = run_import(app, project["own"], csv_bytes(lines), "x.csv")
    found = [(e.row, e.column) for e in result.errors]
    assert found == [(2, "pile_type"), (2, "easting_m"), (2, "compression_kn"), (2, "exposure_class"),
                     (2, "head"), (3, "mark")]
    assert "exposure_class 'XX9' is not in the project's rules" in result.errors[3].message
    assert "mark B1 is also on row 2" in result.errors[5].message


def test_a_failure_during_the_write_leaves_nothing_behind(app, project, monkeypatch):
    real = piles.upsert_by_mark
    calls = []

    def failing(conn, project_id, values):
        calls.append(values["mark"])
        if len(calls) == 4:
            raise RuntimeError("disk full")
        return real(conn, project_id, values)

    monkeypatch.setattr(piles, "upsert_by_mark", failing)
    with pytest.raises(RuntimeError):
        run_import(app, project["own"], csv_bytes(GOOD), "schedule.csv")
    with app.app_context():
        conn = db.get_db()
        assert piles.count(conn, project["own"]) == 0 and caps.list_caps(conn, project["own"]) == []


def test_import_updates_piles_by_mark_and_leaves_others(app, project):
    run_import(app, project["own"], csv_bytes(GOOD), "first.csv")
    changed = [GOOD[0].replace(",-5,600,", ",-6.25,600,")]
    result = run_import(app, project["own"], csv_bytes(changed), "second.csv")
    assert (result.created, result.updated) == (0, 1)
    with app.app_context():
        conn = db.get_db()
        assert piles.get_pile(conn, project["own"], "A1").toe_level_m == -6.25
        assert piles.count(conn, project["own"]) == 5


@pytest.mark.parametrize("fmt", ["csv", "xlsx"])
def test_export_then_import_round_trips(app, project, fmt):
    """Export from one project, import into another, export again: same schedule, same bytes (CSV)."""
    assert run_import(app, project["own"], csv_bytes(GOOD), "schedule.csv").ok
    with app.app_context():
        first = schedule_io.export_schedule(db.get_db(), project["own"], fmt)
    result = run_import(app, project["other"], first, f"export.{fmt}")
    assert result.ok, result.errors
    assert schedule(app, project["other"]) == schedule(app, project["own"])
    # importing the export back into its own project changes nothing
    result = run_import(app, project["own"], first, f"export.{fmt}")
    assert (result.created, result.updated) == (0, 5)
    with app.app_context():
        again = schedule_io.export_schedule(db.get_db(), project["other"], fmt)
    if fmt == "csv":
        assert again == first
    else:
        rows = lambda data: [tuple(r) for r in load_workbook(io.BytesIO(data)).worksheets[0].iter_rows(values_only=True)]  # noqa: E731
        assert rows(again) == rows(first)
        assert rows(first)[0] == schedule_io.COLUMNS


def test_demo_schedule_round_trips_through_xlsx_and_csv(app, people):
    from fieldapp import demo

    with app.app_context():
        pid = demo.build(app)
        before = schedule(app, pid)
        conn = db.get_db()
        for fmt in ("xlsx", "csv"):
            data = schedule_io.export_schedule(conn, pid, fmt)
            result = schedule_io.import_schedule(conn, pid, data, f"demo.{fmt}", "test")
            assert (result.created, result.updated) == (0, len(before)), result.errors
    assert schedule(app, pid) == before


def test_xlsx_errors_carry_spreadsheet_rows(app, project):
    workbook = Workbook()
    sheet = workbook.active
    sheet.append(list(schedule_io.COLUMNS))
    sheet.append(["X1", "", "bored", 1, 2, 9, -5, 600, "Zone 1", 800, 0, 0, 0, 8, 20, 8, 40, 500, "XC2", 75, "free"])
    sheet.append([])  # a blank row is skipped but still counted
    sheet.append(["X2", "", "bored", 1, 2, 9, -5, 6000, "Zone 1", 800, 0, 0, 0, 8, 20, 8, 40, 500, "XC2", 75, "free"])
    buf = io.BytesIO()
    workbook.save(buf)
    result = run_import(app, project["own"], buf.getvalue(), "s.xlsx")
    assert [(e.row, e.column) for e in result.errors] == [(4, "diameter_mm")]
    result = run_import(app, project["own"], b"not a workbook", "s.xlsx")
    assert result.errors and "not an XLSX workbook" in result.errors[0].message
    result = run_import(app, project["own"], b"\xff\xfe\x00bad", "s.csv")
    assert "not UTF-8" in result.errors[0].message


def test_semicolon_csv_from_a_spreadsheet_is_read(app, project):
    data = csv_bytes(GOOD[:2]).decode().replace(",", ";").encode("utf-8-sig")
    result = run_import(app, project["own"], data, "semi.csv")
    assert result.ok and result.created == 2


def test_upload_form_lists_every_error_and_imports_nothing(app, client, auth, project):
    auth.login(project["engineer"])
    lines = list(GOOD)
    lines[0] = lines[0].replace("bored", "boring")
    lines[3] = lines[3].replace(",500,XC2,60", ",900,XC2,60")  # fy_mpa
    lines[4] = lines[4].replace("screw,121", "screw,")          # easting blank
    response = client.post(f"/projects/{project['own']}/piles/import",
                           data={"csrf_token": auth.token(), "file": (io.BytesIO(csv_bytes(lines)), "s.csv")},
                           content_type="multipart/form-data")
    assert response.status_code == 422
    page = response.get_data(as_text=True)
    assert page.count('class="import-error"') == 3
    for row, column in ((2, "pile_type"), (5, "fy_mpa"), (6, "easting_m")):
        assert f'<td data-label="Row">{row}</td><td data-label="Column"><code>{column}</code>' in page
    assert "Nothing imported: 3 error(s)" in page
    response = client.post(f"/projects/{project['own']}/piles/import",
                           data={"csrf_token": auth.token(), "file": (io.BytesIO(b"x"), "s.txt")},
                           content_type="multipart/form-data")
    assert response.status_code == 400 and "must be a .csv or .xlsx file" in response.get_data(as_text=True)
    with app.app_context():
        assert piles.count(db.get_db(), project["own"]) == 0


def test_export_download_matches_the_schedule(app, client, auth, project):
    run_import(app, project["own"], csv_bytes(GOOD), "s.csv")
    auth.login(project["viewer"])
    response = client.get(f"/projects/{project['own']}/piles/export.csv")
    assert response.status_code == 200 and response.mimetype == "text/csv"
    assert "attachment" in response.headers["Content-Disposition"]
    lines = response.get_data(as_text=True).splitlines()
    assert lines[0] == HEADER and lines[1].startswith("A1,K1,bored,100.5,200.25,9,-5,600,Zone 1,900")


def test_cli_import_and_export(app, project, tmp_path):
    data_dir = app.config["DATA_DIR"]
    runner = CliRunner()
    good = tmp_path / "good.csv"
    good.write_bytes(csv_bytes(GOOD))
    result = runner.invoke(main, ["--data", data_dir, "import", str(project["own"]), str(good)])
    assert result.exit_code == 0, result.output
    assert "5 pile(s) created" in result.output
    out = tmp_path / "out.xlsx"
    result = runner.invoke(main, ["--data", data_dir, "export", str(project["own"]), str(out)])
    assert result.exit_code == 0 and "exported 5 pile(s)" in result.output
    assert load_workbook(out).worksheets[0].max_row == 6
    bad = tmp_path / "bad.csv"
    bad.write_bytes(csv_bytes([GOOD[0].replace("A1", ""), GOOD[1].replace("Zone 1", "")]))
    result = runner.invoke(main, ["--data", data_dir, "import", str(project["own"]), str(bad)])
    assert result.exit_code != 0
    assert "row 2, column mark" in result.output and "row 3, column ground_model" in result.output
    result = runner.invoke(main, ["--data", data_dir, "export", "999", str(tmp_path / "x.csv")])
    assert result.exit_code != 0 and "project 999 does not exist" in result.output


def test_toe_below_the_ground_model_is_an_error_of_its_row(app, project):
    lines = [GOOD[0], GOOD[1].replace(",-5.5,600,", ",-20.5,600,")]  # Zone 1 ends at -20 m
    result = run_import(app, project["own"], csv_bytes(lines), "s.csv")
    assert [(e.row, e.column) for e in result.errors] == [(3, "toe_level_m")]
    assert "below the bottom of ground model 'Zone 1' (-20 m)" in result.errors[0].message


def test_text_that_looks_like_a_formula_is_refused_on_import_and_never_a_formula_in_xlsx(app, project):
    lines = [GOOD[0].replace("A1,K1", "=HYPERLINK(1),K1"), GOOD[1].replace("A2,K1", "A2,@K1")]
    result = run_import(app, project["own"], csv_bytes(lines), "s.csv")
    assert [(e.row, e.column) for e in result.errors] == [(2, "mark"), (3, "cap")]
    assert "must not start with '='" in result.errors[0].message
    with app.app_context():  # a name stored some other way still exports as plain text
        conn = db.get_db()
        with db.write(conn):
            gm = make_ground(conn, project["own"], LAYERS, "=1+2", 8.0)
            make_pile(conn, project["own"], "F1", gm, easting_m=0.0, northing_m=0.0, compression_kn=0.0,
                      shear_kn=0.0, n_bars=0, bar_mm=0.0, cage_length_m=0.0, fc_mpa=32.0)
        data = schedule_io.export_schedule(conn, project["own"], "xlsx")
    cell = load_workbook(io.BytesIO(data)).worksheets[0]["I2"]
    assert (cell.value, cell.data_type) == ("=1+2", "s")
