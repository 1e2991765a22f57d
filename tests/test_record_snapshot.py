"""The record prints what was stored, from one snapshot (issue 16).

* a sheet's numbers are the stored version's even after the rules change (the record rechecks
  nothing); today's recheck gives another number, which the sheet does not show;
* one snapshot: a save committed while a build runs does not appear in it, and the head printed
  is the head before that save;
* every page carries "page x of y", the revision and, while piles are unsigned, DRAFT; the fonts
  are embedded.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import uuid
from dataclasses import replace

import pdfplumber
import pytest

from fieldapp import db, saving
from fieldapp.queries import audit, projects, records, users
from fieldapp.queries import piles as piles_q
from fieldapp.record import issue, pdf
from tests.test_review import _sign, build_site, good_record, save


@pytest.fixture
def site(app, people):
    return build_site(app, people)


def _pages(path) -> list[str]:
    with pdfplumber.open(str(path)) as doc:
        return [" ".join((page.extract_text() or "").split()) for page in doc.pages]


def _sheet_of(pages: list[str], mark: str) -> str:
    start = next(i for i, p in enumerate(pages) if f"Pile {mark}" in p and "Checks" in p)
    return " ".join(pages[start:start + 2])


def test_sheet_numbers_are_the_stored_versions_after_the_rules_change(app, site, tmp_path):
    pid = site["pid"]
    with app.app_context():
        conn = db.get_db()
        stored = records.current(conn, site["piles"]["P1"].id)
        structural = next(c for c in stored.checks if c["code"] == "structural")
        rules = projects.current_rules(conn, pid).rules
        with db.write(conn):
            projects.save_rules(conn, pid, replace(rules, load_factor=2.5), "heavier load factor")
        pile = piles_q.get_pile(conn, pid, "P1")
        today = saving.evaluate(conn, pid, pile, stored.record).verdict.check("structural")
    assert today.value != pytest.approx(structural["value"])     # the rules change does move it
    out = tmp_path / "r.pdf"
    with app.app_context():
        pdf.build(db.get_db(), pid, out)
    sheet = _sheet_of(_pages(out), "P1")
    assert f"{structural['value']:,.2f} {structural['unit']}" in sheet
    assert f"{float(today.value):,.2f} {structural['unit']}" not in sheet
    assert f"rules version {stored.rules_version}." in sheet
    assert "Pictures (drawn from the stored version)" in sheet


def test_one_snapshot_a_save_during_the_build_is_not_in_it(app, site, tmp_path):
    pid = site["pid"]
    with app.app_context():
        before = audit.head(db.get_db(), pid)

    def save_during_build():
        conn = db.connect(app.config["DATABASE"])
        try:
            pile = piles_q.get_pile(conn, pid, "S1")
            user = users.by_email(conn, "inspector@test.example")
            saving.save_record(conn, pid, pile, user, uuid.uuid4().hex, pile.current_version,
                               good_record(pile, notes="saved while the record was being built"))
        finally:
            conn.close()

    out = tmp_path / "r.pdf"
    result = issue.issue(app.config["DATABASE"], app.config["DATA_DIR"], None, pid, out,
                         before_sheets=save_during_build)
    with app.app_context():
        conn = db.get_db()
        assert piles_q.get_pile(conn, pid, "S1").current_version == 2      # the save went through
    assert (result.build.head_seq, result.build.head_hash) == before
    text = " ".join(_pages(out))
    assert "saved while the record was being built" not in text
    assert "Version 1 (logged)" in _sheet_of(_pages(out), "S1")
    assert f"seq {before[0]}, hash {before[1]}" in text


def test_every_page_says_page_x_of_y_revision_and_draft(app, site, tmp_path):
    out = tmp_path / "r.pdf"
    result = issue.issue(app.config["DATABASE"], app.config["DATA_DIR"], None, site["pid"], out)
    pages = _pages(out)
    total = len(pages)
    assert total == result.build.pages
    for number, page in enumerate(pages, start=1):
        assert re.search(rf"page {number} of {total}\b", page), page[-200:]
        assert "revision 0 (DRAFT)" in page and "DRAFT" in page
    again = issue.issue(app.config["DATABASE"], app.config["DATA_DIR"], None, site["pid"], tmp_path / "r1.pdf")
    assert again.build.revision == 1
    text = " ".join(_pages(tmp_path / "r1.pdf"))
    assert "revision 1 (DRAFT)" in text and "first issue" in text     # the table of revisions
    if shutil.which("pdffonts"):
        fonts = subprocess.run(["pdffonts", str(out)], capture_output=True, text=True, check=True).stdout
        rows = [line.split() for line in fonts.splitlines()[2:] if line.strip()]
        assert rows and all(r[-5] == "yes" for r in rows), fonts          # every font embedded
        assert all("DejaVu" in r[0] for r in rows), fonts


def test_no_draft_mark_once_every_pile_is_signed_and_no_nc_is_open(app, client, auth, people, site, tmp_path):
    pid = site["pid"]
    save(app, pid, "P3", good_record(site["piles"]["P3"]))
    auth.login(people["engineer"])
    for mark in ("P1", "P2", "P3", "S1"):
        assert _sign(client, auth, pid, mark, "accepted", "reviewed").status_code == 200, mark
    out = tmp_path / "r.pdf"
    result = issue.issue(app.config["DATABASE"], app.config["DATA_DIR"], None, pid, out)
    assert not result.build.draft
    pages = _pages(out)
    assert all("revision 0 (issued)" in page and "DRAFT" not in page for page in pages)
    assert "Certificate of the piles as built — revision 0 (ISSUED)" in pages[0]
    assert "Engineer of record T. Engineer — role: engineer of record" in pages[0]
