"""The lock on a signed record lives in the save path itself: a script that saves through
``saving.save_record`` on a bare database connection, with no web app built and no blueprint
module imported, is refused just as the API is."""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

import pytest

from fieldapp import db
from fieldapp.queries import piles as piles_q
from fieldapp.queries import review as review_q
from fieldapp.queries import users
from tests.test_review import build_site, good_record


@pytest.fixture
def signed_site(app, people):
    """The review tests' site with P1 signed as accepted at version 1 (through signoff.sign_pile)."""
    from fieldapp import signoff

    site = build_site(app, people)
    with app.app_context():
        conn = db.get_db()
        pile = piles_q.get_pile(conn, site["pid"], "P1")
        engineer = users.by_email(conn, people["engineer"])
        signoff.sign_pile(conn, site["pid"], pile, engineer, "accepted", "")
        assert review_q.is_locked(conn, pile.id)
    return dict(site, database=app.config["DATABASE"])


SCRIPT = textwrap.dedent("""
    import json, sys
    from fieldapp import db, saving
    from fieldapp.queries import piles as piles_q, users

    database, project_id, record, amendment = sys.argv[1], int(sys.argv[2]), json.loads(sys.argv[3]), \\
        json.loads(sys.argv[4])
    conn = db.connect(database)
    pile = piles_q.get_pile(conn, project_id, "P1")
    user = users.by_email(conn, "inspector@test.example")
    loaded = sorted(m for m in sys.modules if m in ("fieldapp.review", "fieldapp.api", "fieldapp.rig"))
    try:
        out = saving.save_record(conn, project_id, pile, user, "script-save-0001", pile.current_version,
                                 record, amendment)
    except saving.PileLocked as exc:
        print(json.dumps({"refused": str(exc), "loaded": loaded}))
    else:
        print(json.dumps({"version": out.version.version, "loaded": loaded}))
""")


def _run_script(site, record, amendment=None):
    done = subprocess.run([sys.executable, "-c", SCRIPT, site["database"], str(site["pid"]),
                           json.dumps(record), json.dumps(amendment)],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout.strip().splitlines()[-1])


def test_a_script_saving_a_signed_pile_without_the_app_is_refused(app, signed_site):
    pile = signed_site["piles"]["P1"]
    answer = _run_script(signed_site, good_record(pile, debris_mm=30))
    assert "signed at version 1" in answer["refused"]
    assert answer["loaded"] == []   # no blueprint module (review registered the lock before)
    with app.app_context():
        stored = piles_q.get_pile(db.get_db(), signed_site["pid"], "P1")
    assert stored.current_version == 1          # nothing written


def test_a_script_amending_a_signed_pile_with_a_reason_is_saved_and_noted(app, signed_site):
    pile = signed_site["piles"]["P1"]
    answer = _run_script(signed_site, good_record(pile, debris_mm=30), {"reason": "debris re-measured"})
    assert answer["version"] == 2
    with app.app_context():
        conn = db.get_db()
        row = piles_q.get_pile(conn, signed_site["pid"], "P1")
        (amendment,) = review_q.amendments_for_pile(conn, row.id)
    assert (amendment.from_version, amendment.version, amendment.reason) == (1, 2, "debris re-measured")
