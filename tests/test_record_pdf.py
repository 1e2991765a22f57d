"""The certification record (issue 6): the PDF's text read back holds every pile mark, every
verdict, the audit head hash and the caution on every page; the demo project's record renders;
the background build keeps its progress in the database (a reload finds it); the as-built
schedule downloads as CSV and XLSX.
"""

from __future__ import annotations

import io
import shutil
import subprocess
import time
from datetime import datetime, timedelta, timezone

import pdfplumber
import pytest
from click.testing import CliRunner

from fieldapp import CAUTION, db
from fieldapp.cli import main
from fieldapp.queries import audit, users
from fieldapp.queries import piles as piles_q
from fieldapp.queries import projects
from fieldapp.queries import review as review_q
from fieldapp.record import data, export, pdf
from tests.test_review import _sign, build_site, good_record, save


@pytest.fixture
def site(app, people):
    """Cap C1 (P1 meets design, P2 too short, P3 not recorded) and single pile S1 (meets)."""
    return build_site(app, people)


def _words(text: str) -> str:
    return " ".join(text.split())


def _pages(path) -> list[str]:
    with pdfplumber.open(str(path)) as doc:
        return [_words(page.extract_text() or "") for page in doc.pages]


def test_pdf_holds_every_mark_verdict_head_hash_and_the_caution(app, client, auth, people, site, tmp_path):
    pid = site["pid"]
    save(app, pid, "S1", good_record(site["piles"]["S1"], notes="Spacer <b>loose</b> & fixed"))
    auth.login(people["engineer"])
    assert _sign(client, auth, pid, "P2", "remedial", "Extend the toe by 5 m").status_code == 200
    out = tmp_path / "record.pdf"
    ticks = []
    with app.app_context():
        conn = db.get_db()
        result = pdf.build(conn, pid, out, photo_dir=app.config["PHOTO_DIR"],
                           progress=lambda done, total: ticks.append((done, total)))
        head = audit.head_hash(conn, pid)
    assert result.head_hash == head and result.chain_ok
    assert ticks[-1] == (4, 4) and [d for d, _ in ticks] == [1, 2, 3, 4]
    pages = _pages(out)
    assert len(pages) == result.pages
    text = " ".join(pages)
    for mark in ("P1", "P2", "S1"):
        assert f"Pile {mark}" in text                     # a sheet for every recorded pile
    assert "P3 C1 78.00 / —" in text                      # the unrecorded pile in the schedule
    assert "meets design" in text and "needs engineer" in text and "not recorded" in text
    assert head in text
    caution = _words(CAUTION)
    assert all(caution in page for page in pages), "the caution is on every page"
    assert "Unsigned (not recorded, or current version not signed) 3" in text   # P1, S1 unsigned, P3 not recorded
    assert "Disposition: remedial 1" in text
    assert "Non-conformance register" in text and "Extend the toe by 5 m" in text
    assert "Spacer <b>loose</b> & fixed" in text          # user text shown as typed, not as markup
    assert "Rule set version 1" in text
    # the pictures are drawn from the stored version (no recheck): its checks and its levels
    assert "Stored checks: utilisation" in text and "As built in section" in text


def test_pdftotext_reads_the_same(app, site, tmp_path):
    if shutil.which("pdftotext") is None:
        pytest.skip("poppler-utils not installed")  # .ci/run installs it
    out = tmp_path / "record.pdf"
    with app.app_context():
        pdf.build(db.get_db(), site["pid"], out)
    text = subprocess.run(["pdftotext", "-layout", str(out), "-"], capture_output=True, text=True,
                          check=True).stdout
    assert "Pile P2" in text and "needs engineer" in text


@pytest.mark.slow
def test_demo_project_record_renders(tmp_path):
    from fieldapp import create_app, demo

    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "demo")})
    with app.app_context():
        demo.build(app)
        conn = db.get_db()
        pid = projects.all_projects(conn)[0].id
        marks = [p.mark for p in piles_q.list_piles(conn, pid)]
        verdicts = {s.verdict for s in review_q.pile_statuses(conn, pid) if s.verdict}
        data_marks_recorded = [s.mark for s in review_q.pile_statuses(conn, pid) if s.current_version]
        out = tmp_path / "demo.pdf"
        result = pdf.build(conn, pid, out, photo_dir=app.config["PHOTO_DIR"])
    assert result.piles == len(marks) > 10
    text = " ".join(_pages(out))
    recorded = set(data_marks_recorded)
    assert all(f"Pile {m}" in text for m in recorded) and all(f" {m} " in text for m in marks)
    assert verdicts == {"meets design", "needs engineer"} and all(v in text for v in verdicts)
    if shutil.which("pdftoppm"):
        subprocess.run(["pdftoppm", "-png", "-r", "30", "-f", "1", "-l", "3", str(out), str(tmp_path / "pg")],
                       check=True)
        assert len(list(tmp_path.glob("pg-*.png"))) == 3


# --- the background build -------------------------------------------------------------------------

def _wait_done(client, pid, job_id, timeout=120.0):
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        body = client.get(f"/projects/{pid}/record/builds/{job_id}").get_json()
        if body["status"] in ("done", "failed"):
            return body
        time.sleep(0.2)
    raise AssertionError("the build did not finish")


def test_background_build_is_found_again_after_a_reload(app, client, auth, people, site):
    pid = site["pid"]
    auth.login(people["viewer"])
    page = client.get(f"/projects/{pid}/record").get_data(as_text=True)
    assert "Build the record" in page and 'src="/static/record.js"' in page and "<script>" not in page
    response = client.post(f"/projects/{pid}/record/builds", data={"csrf_token": auth.token()})
    assert response.status_code == 302
    with app.app_context():
        job = review_q.latest_job(db.get_db(), pid)
    assert job is not None
    # a reload (a fresh client, signed in again) finds the same build and its stored progress
    other = app.test_client()
    from tests.conftest import Auth
    Auth(other).login(people["engineer"])
    reloaded = other.get(f"/projects/{pid}/record").get_data(as_text=True)
    assert f'"id": {job.id}' in reloaded
    body = _wait_done(other, pid, job.id)
    assert body["status"] == "done", body
    assert body["percent"] == 100 and body["done"] == body["total"] == 4
    with app.app_context():
        built = [e for e in audit.entries(db.get_db(), pid) if e["action"] == "record issued"]
    assert len(built) == 1 and body["head_hash"] in built[0]["payload_json"]   # the chain keeps it
    assert built[0]["actor"] == "Viewer"
    pdf_bytes = other.get(body["download"])
    assert pdf_bytes.status_code == 200 and pdf_bytes.data.startswith(b"%PDF")
    assert client.get(f"/projects/{pid}/record").get_data(as_text=True).count("Download the record") >= 1


def test_progress_is_read_from_the_database(app, client, auth, people, site):
    """A build under way elsewhere (another thread or process) shows its stored progress."""
    pid = site["pid"]
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            job_id = review_q.create_job(conn, pid, None)
            review_q.update_job(conn, job_id, status="running", done=3, total=10)
    auth.login(people["viewer"])
    page = client.get(f"/projects/{pid}/record").get_data(as_text=True)
    assert "3 of 10 piles (30 %)" in page and 'value="30"' in page
    body = client.get(f"/projects/{pid}/record/builds/{job_id}").get_json()
    assert (body["status"], body["done"], body["total"], body["percent"]) == ("running", 3, 10, 30)
    assert body["download"] is None


def test_a_build_whose_worker_died_is_marked_failed(app, client, auth, people, site):
    pid = site["pid"]
    old = (datetime.now(timezone.utc) - timedelta(hours=1)).isoformat(timespec="seconds")
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            job_id = review_q.create_job(conn, pid, None)
            review_q.update_job(conn, job_id, status="running", done=1, total=10)
            conn.execute("UPDATE record_jobs SET updated_at = ? WHERE id = ?", (old, job_id))
    auth.login(people["engineer"])
    body = client.get(f"/projects/{pid}/record/builds/{job_id}").get_json()
    assert body["status"] == "failed" and "start it again" in body["error"]


def test_outsider_cannot_see_the_record(client, auth, people, site):
    auth.login(people["outsider"])
    assert client.get(f"/projects/{site['pid']}/record").status_code == 404
    assert client.get(f"/projects/{site['pid']}/record/schedule.csv").status_code == 404


# --- the as-built schedule ----------------------------------------------------------------------------

def test_asbuilt_schedule_csv_and_xlsx(app, client, auth, people, site):
    auth.login(people["viewer"])
    csv_text = client.get(f"/projects/{site['pid']}/record/schedule.csv").get_data(as_text=True)
    lines = csv_text.strip().splitlines()
    assert lines[0].startswith("mark,cap,progress,version,design_toe_m,asbuilt_toe_m")
    p2 = next(line for line in lines if line.startswith("P2,"))
    assert ",78.0,87.0," in p2 and "needs engineer" in p2 and "unsigned" in p2
    from openpyxl import load_workbook
    xlsx = client.get(f"/projects/{site['pid']}/record/schedule.xlsx")
    sheet = load_workbook(io.BytesIO(xlsx.data)).active
    rows = list(sheet.iter_rows(values_only=True))
    assert rows[0][0] == "mark"
    assert {r[0] for r in rows[1:5]} == {"P1", "P2", "P3", "S1"}
    # below the rows: the record revision the schedule belongs to, and the safety caution
    trailer = {r[0]: r[1] for r in rows[5:] if r and r[0]}
    assert trailer["caution"] == CAUTION and trailer["record revision"].startswith("no record issued yet")
    assert lines[-1].endswith(CAUTION) or CAUTION in csv_text


def test_csv_defuses_formula_text():
    row = data.ScheduleRow("=HYPERLINK(1)", "@cap", "logged", 1, 78.0, -2.5, 750.0, 750.0, 10.0, 75.0, 75.0,
                           "meets design", 0.5, "unsigned", "-x", "", "meets")
    text = export.to_csv([row]).decode()
    assert "'=HYPERLINK(1)" in text and "'@cap" in text and "'-x" in text and ",-2.5," in text


def test_record_command_writes_pdf_and_schedule(app, site, tmp_path):
    runner = CliRunner()
    out = tmp_path / "r.pdf"
    result = runner.invoke(main, ["--data", app.config["DATA_DIR"], "record", str(site["pid"]), str(out)])
    assert result.exit_code == 0, result.output
    assert out.read_bytes().startswith(b"%PDF") and "audit head seq" in result.output
    csv_out = tmp_path / "s.csv"
    result = runner.invoke(main, ["--data", app.config["DATA_DIR"], "record", str(site["pid"]), str(csv_out)])
    assert result.exit_code == 0 and csv_out.read_text().startswith("mark,")
    bad = runner.invoke(main, ["--data", app.config["DATA_DIR"], "record", "999", str(out)])
    assert bad.exit_code != 0 and "does not exist" in bad.output


def test_engineer_name_is_escaped_in_the_pdf(app, client, auth, people, site, tmp_path):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            conn.execute("UPDATE users SET name = ? WHERE email = ?", ("Eng <i>&amp;", people["engineer"]))
        assert users.by_email(conn, people["engineer"]).name == "Eng <i>&amp;"
    auth.login(people["engineer"])
    assert _sign(client, auth, site["pid"], "P1").status_code == 200
    out = tmp_path / "r.pdf"
    with app.app_context():
        pdf.build(db.get_db(), site["pid"], out)
    assert "Eng <i>&amp;" in " ".join(_pages(out))


def test_strata_met_and_their_borrowed_layers_are_in_the_record(app, site, tmp_path):
    strata = [{"from_depth": 0.0, "to_depth": 1.5, "material": "ignore", "description": "fill"},
              {"from_depth": 1.5, "to_depth": 10.0, "material": "cohesive", "description": "firm clay"},
              {"from_depth": 10.0, "to_depth": 22.0, "material": "cohesionless", "description": "dense sand"}]
    saved = save(app, site["pid"], "S1", good_record(site["piles"]["S1"], strata=strata))
    assert saved.borrowed, "the save path reports which layer each stratum borrowed from"
    out = tmp_path / "r.pdf"
    with app.app_context():
        pdf.build(db.get_db(), site["pid"], out)
    text = " ".join(_pages(out))
    assert "Stratum met 1.5–10 m (cohesive)" in text
    assert "Stratum 2 1.5–10 m cohesive firm clay" in text
