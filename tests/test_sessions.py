"""Sessions kept on the server: signing out ends a session for good, a lost tablet's sessions can
be ended from the command line, and failed logins are counted by address as well as by email.

The browser's cookie is signed (Flask) and carries only a random token; the database keeps its
SHA-256. These tests replay a copied cookie the way someone who took it from a tablet would.
"""

from __future__ import annotations

import hashlib

from click.testing import CliRunner

from fieldapp import db
from fieldapp.cli import main
from fieldapp.queries import users
from tests.conftest import PASSWORD, Auth


def _cookie(client) -> str:
    return client.get_cookie("session").value


def _replayed(app, cookie: str):
    """A fresh client (another machine) holding a copy of ``cookie``."""
    other = app.test_client()
    other.set_cookie("session", cookie)
    return other


def _signed_in(client, project_id) -> bool:
    answer = client.get(f"/api/v1/projects/{project_id}/piles")
    assert answer.status_code in (200, 401), answer.status_code
    return answer.status_code == 200


def _toeline(app, *args: str):
    """Run the toeline command on the app's data folder."""
    return CliRunner().invoke(main, ["--data", app.config["DATA_DIR"], *args])


def _user_id(app, email: str) -> int:
    with app.app_context():
        return users.by_email(db.get_db(), email).id


def test_the_cookie_holds_a_token_and_the_database_only_its_hash(app, client, auth, people):
    auth.login(people["inspector"])
    payload = app.session_interface.get_signing_serializer(app).loads(_cookie(client))
    assert set(payload) <= {"sid", "csrf_token", "_permanent", "_fresh"} and "user_id" not in payload
    with app.app_context():
        stored = db.get_db().execute("SELECT token_hash FROM sessions").fetchall()
    assert [row[0] for row in stored] == [hashlib.sha256(payload["sid"].encode()).hexdigest()]


def test_signing_out_makes_a_copied_cookie_worthless(app, client, auth, people):
    auth.login(people["inspector"])
    copied = _cookie(client)
    assert _signed_in(_replayed(app, copied), people["own"])
    auth.logout()
    assert not _signed_in(client, people["own"])
    assert not _signed_in(_replayed(app, copied), people["own"])
    assert _replayed(app, copied).get("/").status_code == 302   # pages send it to the login


def test_signing_out_on_one_tablet_leaves_the_other_signed_in(app, client, auth, people):
    second = app.test_client()
    Auth(second).login(people["inspector"])
    auth.login(people["inspector"])
    auth.logout()
    assert not _signed_in(client, people["own"])
    assert _signed_in(second, people["own"])


def test_end_sessions_signs_a_user_out_everywhere_and_says_so(app, client, auth, people):
    second = app.test_client()
    Auth(second).login(people["inspector"])
    auth.login(people["inspector"])
    Auth(app.test_client()).login(people["engineer"])
    result = _toeline(app, "user", "end-sessions", people["inspector"])
    assert result.exit_code == 0, result.output
    assert "2 sessions of inspector@test.example ended" in result.output
    assert not _signed_in(client, people["own"]) and not _signed_in(second, people["own"])
    with app.app_context():
        conn = db.get_db()
        assert users.open_sessions(conn, _user_id(app, people["engineer"])) == 1
        entry = conn.execute("SELECT actor, action, subject FROM audit_log WHERE action = "
                             "'sessions ended'").fetchone()
    assert tuple(entry) == ("cli", "sessions ended", people["inspector"])
    # signing in again works as before
    auth.login(people["inspector"])
    assert _signed_in(client, people["own"])


def test_end_sessions_names_an_unknown_email(app, people):
    result = _toeline(app, "user", "end-sessions", "nobody@test.example")
    assert result.exit_code != 0 and "no user with email nobody@test.example" in result.output


def test_a_cookie_of_the_old_kind_naming_a_user_is_not_honoured(app, people):
    # Before sessions were kept on the server the cookie named the user id; such a cookie,
    # even correctly signed, must not sign anyone in.
    forged = app.session_interface.get_signing_serializer(app).dumps(
        {"user_id": _user_id(app, people["engineer"])})
    assert not _signed_in(_replayed(app, forged), people["own"])


def test_a_session_older_than_its_lifetime_has_ended(app, client, auth, people):
    auth.login(people["inspector"])
    assert _signed_in(client, people["own"])
    lifetime = app.permanent_session_lifetime.total_seconds()
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            conn.execute("UPDATE sessions SET started_at = started_at - ?", (lifetime + 60,))
    assert not _signed_in(client, people["own"])


def test_failed_logins_from_one_address_are_limited_across_emails(app, people):
    app.config["LOGIN_MAX_FAILURES_PER_IP"] = 3
    here = app.test_client()
    for k in range(3):   # three different emails, one wrong password each: under each email's limit
        assert Auth(here).login(f"guess{k}@test.example", "wrong").status_code == 401
    refused = Auth(here).login(people["engineer"], PASSWORD)
    assert refused.status_code == 429 and "network" in refused.get_data(as_text=True)
    elsewhere = app.test_client()
    elsewhere.environ_base["REMOTE_ADDR"] = "10.0.0.9"
    assert Auth(elsewhere).login(people["engineer"], PASSWORD).status_code == 302


def test_log_out_on_every_device_from_the_projects_page(app, client, auth, people):
    # The person with a lost tablet logs in elsewhere and ends every session of theirs.
    lost = app.test_client()
    Auth(lost).login(people["inspector"])
    auth.login(people["inspector"])
    page = client.get("/").get_data(as_text=True)
    assert "Log out on every device" in page
    answer = client.post("/logout/everywhere", data={"csrf_token": auth.token()})
    assert answer.status_code == 302 and answer.headers["Location"].endswith("/login")
    assert not _signed_in(lost, people["own"]) and not _signed_in(client, people["own"])
    assert "2 sessions ended" in client.get("/login").get_data(as_text=True)
    with app.app_context():
        entry = db.get_db().execute("SELECT actor, subject, payload_json FROM audit_log "
                                    "WHERE action = 'sessions ended'").fetchone()
    assert entry[0] == "Inspector" and entry[1] == people["inspector"] and '"sessions":2' in entry[2]


def test_log_out_on_every_device_needs_the_csrf_token(app, client, auth, people):
    auth.login(people["inspector"])
    assert client.post("/logout/everywhere", data={}).status_code == 400
    assert _signed_in(client, people["own"])
