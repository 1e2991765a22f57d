"""The signed record (issue 16): ``toeline verify-record`` on a good file (exit 0), a file with
one byte changed, a file of another project, a file from another data folder (exit 1, naming
why); and a chain cut short after an issued record, found by ``verify-audit`` through the
issue's kept head."""

from __future__ import annotations

import shutil
import sqlite3
import subprocess

import pytest
from click.testing import CliRunner

from fieldapp import create_app, db
from fieldapp.cli import main
from fieldapp.queries import audit, projects, record_issues
from fieldapp.record import issue, signing
from tests.test_review import build_site


@pytest.fixture
def site(app, people):
    return build_site(app, people)


def _issue(app, pid, out):
    return issue.issue(app.config["DATABASE"], app.config["DATA_DIR"], None, pid, out, issued_by="Engineer",
                       issued_role="engineer")


def _verify(app, path, *extra):
    return CliRunner().invoke(main, ["--data", app.config["DATA_DIR"], "verify-record", str(path), *extra])


def test_a_good_file_verifies_and_its_issue_is_kept(app, site, tmp_path):
    out = tmp_path / "record.pdf"
    result = _issue(app, site["pid"], out)
    check = _verify(app, out)
    assert check.exit_code == 0, check.output
    assert f"project {site['pid']}, revision 0" in check.output
    with app.app_context():
        (kept,) = record_issues.for_project(db.get_db(), site["pid"])
    assert (kept.head_seq, kept.head_hash) == (result.build.head_seq, result.build.head_hash)
    assert kept.file_sha256 == signing.file_sha256(out) == result.file_sha256 and kept.revision == 0
    if shutil.which("pdfsig"):
        shown = subprocess.run(["pdfsig", str(out)], capture_output=True, text=True).stdout
        assert "Signature is Valid" in shown and "Total document signed" in shown
        assert f"project {site['pid']}" in shown


def test_one_byte_changed_is_refused(app, site, tmp_path):
    out = tmp_path / "record.pdf"
    _issue(app, site["pid"], out)
    body = bytearray(out.read_bytes())
    with app.app_context():
        (kept,) = record_issues.for_project(db.get_db(), site["pid"])
    at = body.index(kept.head_hash.encode())    # the audit head the file embeds, inside the signed bytes
    body[at] = ord("0") if body[at] != ord("0") else ord("1")
    bad = tmp_path / "changed.pdf"
    bad.write_bytes(bytes(body))
    check = _verify(app, bad)
    assert check.exit_code == 1
    assert "the signature is broken: the file was changed after it was signed" in check.output


def test_a_file_of_another_project_is_refused(app, site, people, tmp_path):
    other = tmp_path / "other.pdf"
    _issue(app, people["other"], other)
    assert _verify(app, other).exit_code == 0                # it is a good record of its own project
    check = _verify(app, other, "--project", str(site["pid"]))
    assert check.exit_code == 1
    assert f"the file is the record of project {people['other']}, not of project {site['pid']}" in check.output


def test_a_file_from_another_data_folder_is_refused(app, site, tmp_path):
    elsewhere = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "elsewhere")})
    with elsewhere.app_context():
        conn = db.get_db()
        with db.write(conn):
            pid = projects.create(conn, "Another quay", "far away")
            audit.append(conn, pid, "test", "project created", "project")
    assert pid == site["pid"]                              # the same project id, another project
    foreign = tmp_path / "foreign.pdf"
    _issue(elsewhere, pid, foreign)
    _issue(app, site["pid"], tmp_path / "own.pdf")         # this folder has its own key for the id
    check = _verify(app, foreign)
    assert check.exit_code == 1
    assert f"signed by another key, not project {pid}'s key in this data folder" in check.output
    assert "is not in the chain" in check.output or "now has hash" in check.output or "ends at seq" in check.output


def test_a_chain_cut_short_after_an_issue_is_found(app, site, tmp_path):
    pid = site["pid"]
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):          # an entry that records no row: deleting it alters no content
            audit.append(conn, pid, "test", "site diary note", "record")
    out = tmp_path / "record.pdf"
    result = _issue(app, pid, out)
    runner = CliRunner()
    fine = runner.invoke(main, ["--data", app.config["DATA_DIR"], "verify-audit", str(pid)])
    assert fine.exit_code == 0, fine.output
    assert "record_issues row" in fine.output
    raw = sqlite3.connect(app.config["DATABASE"])
    raw.execute("DROP TRIGGER IF EXISTS audit_no_delete")
    raw.execute("DELETE FROM audit_log WHERE project_id = ? AND seq >= ?", (pid, result.build.head_seq))
    raw.commit()
    raw.close()
    cut = runner.invoke(main, ["--data", app.config["DATA_DIR"], "verify-audit", str(pid)])
    assert cut.exit_code == 1, cut.output
    assert "record_issues row" in cut.output and "its last entries were deleted" in cut.output
    check = _verify(app, out)
    assert check.exit_code == 1 and "its last entries were deleted" in check.output
