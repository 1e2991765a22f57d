"""The non-conformance register (issue 16): every version with a short check whatever its
progress (a concreted pile included), NC-001 numbers per project never reused, open/closed with
the disposition and the record that closes it; on its own screen, in the PDF and as CSV."""

from __future__ import annotations

import csv
import io
import uuid

import pdfplumber
import pytest

from fieldapp import CAUTION, db, saving
from fieldapp.queries import ncr
from fieldapp.queries import piles as piles_q
from fieldapp.queries import users
from fieldapp.record import export, pdf
from tests.test_review import _sign, build_site, good_record, save


@pytest.fixture
def site(app, people):
    return build_site(app, people)


def _register(app, pid):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            ncr.sync(conn, pid)
        return ncr.register(conn, pid)


def test_a_concreted_pile_with_a_short_check_is_in_the_register(app, client, auth, people, site, tmp_path):
    pid = site["pid"]
    # S1 (v1 met the design) again, concreted and not logged yet, 9 m short of its design toe
    save(app, pid, "S1", good_record(site["piles"]["S1"], measured_depth=13.0, progress="concreted"))
    items = _register(app, pid)
    s1 = next(n for n in items if n.mark == "S1")
    assert s1.progress == "concreted" and s1.state == "open" and "toe_level" in s1.short
    assert s1.raised_version == 2
    assert [n.label for n in items] == ["NC-001", "NC-002"]        # P2 (raised first) then S1
    auth.login(people["viewer"])
    page = client.get(f"/projects/{pid}/ncr").get_data(as_text=True)
    assert "NC-002" in page and "concreted" in page and "do not replace the engineer of record" in page
    out = tmp_path / "r.pdf"
    with app.app_context():
        pdf.build(db.get_db(), pid, out)
    with pdfplumber.open(str(out)) as doc:
        text = " ".join(" ".join((p.extract_text() or "").split()) for p in doc.pages)
    assert "NC-002 S1 v2 (concreted)" in text


def test_numbers_are_never_reused_and_a_sign_off_closes(app, client, auth, people, site):
    pid = site["pid"]
    auth.login(people["engineer"])
    assert _register(app, pid)[0].label == "NC-001"
    assert _sign(client, auth, pid, "P2", "accepted with conditions", "Load test P2").status_code == 200
    first = _register(app, pid)[0]
    assert (first.label, first.state, first.disposition) == ("NC-001", "closed", "accepted with conditions")
    assert first.closed_by_record == "P2 v1 signed accepted with conditions" and first.closed_at
    # an amendment of P2, short again: a new non-conformance with the next number, NC-001 stays closed
    with app.app_context():
        conn = db.get_db()
        pile = piles_q.get_pile(conn, pid, "P2")
        user = users.by_email(conn, "inspector@test.example")
        saving.save_record(conn, pid, pile, user, uuid.uuid4().hex, pile.current_version,
                           good_record(pile, measured_depth=12.0), amendment={"reason": "depth re-measured"})
    items = _register(app, pid)
    assert [(n.label, n.state) for n in items] == [("NC-001", "closed"), ("NC-002", "open")]
    assert items[1].raised_version == 2
    # numbering again changes nothing
    assert [n.label for n in _register(app, pid)] == ["NC-001", "NC-002"]
    with app.app_context():
        stored = db.get_db().execute("SELECT number FROM nonconformances WHERE project_id = ? ORDER BY number",
                                     (pid,)).fetchall()
    assert [r[0] for r in stored] == [1, 2]


def test_a_remedial_disposition_is_the_remedial_action_and_the_csv_is_safe(app, client, auth, people, site):
    pid = site["pid"]
    auth.login(people["engineer"])
    assert _sign(client, auth, pid, "P2", "remedial", "=extend the toe by 5 m").status_code == 200
    item = _register(app, pid)[0]
    assert item.state == "open" and item.disposition == "remedial"
    assert "=extend the toe by 5 m" in item.remedial_action
    body = client.get(f"/projects/{pid}/ncr.csv").get_data(as_text=True)
    rows = list(csv.reader(io.StringIO(body)))
    assert rows[0][:3] == ["number", "pile", "raised_version"]
    assert rows[1][0] == "NC-001" and rows[1][1] == "P2" and rows[1][7] == "open"
    assert rows[-1] == ["caution", CAUTION]



def test_ncr_csv_cells_cannot_become_formulas():
    item = ncr.NonConformance(7, "P9", 1, "2026-03-02T09:00:00+00:00", "logged", ["position"], [1],
                              remedial_action="=HYPERLINK(1)", closed_by_record="@x", disposition="-y")
    rows = list(csv.reader(io.StringIO(export.ncr_csv([item]).decode())))
    assert rows[1][0] == "NC-007" and rows[1][10] == "'=HYPERLINK(1)" and rows[1][11] == "'@x"
    assert rows[1][9] == "'-y" and rows[1][2] == "1"


def test_outsider_cannot_see_the_register(client, auth, people, site):
    auth.login(people["outsider"])
    assert client.get(f"/projects/{site['pid']}/ncr").status_code == 404
    assert client.get(f"/projects/{site['pid']}/ncr.csv").status_code == 404
