"""The app factory, the data folder, migrations, login and the design_core layering."""

from __future__ import annotations

import subprocess
import sys

from fieldapp import create_app, db
from fieldapp.queries import audit


def test_data_folder_holds_database_photos_and_secret(app, tmp_path):
    data = tmp_path / "data"
    assert (data / "toeline.sqlite3").exists()
    assert (data / "photos").is_dir()
    key = (data / "secret_key").read_text()
    assert len(key) == 64 and oct((data / "secret_key").stat().st_mode)[-3:] == "600"
    # the same key on the next start: sessions survive a restart
    again = create_app({"TESTING": True, "DATA_DIR": str(data)})
    assert again.config["SECRET_KEY"] == app.config["SECRET_KEY"]


def test_database_settings(app):
    with app.app_context():
        conn = db.get_db()
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
        assert conn.execute("PRAGMA synchronous").fetchone()[0] == 2  # FULL


def test_migrations_are_idempotent(app):
    with app.app_context():
        conn = db.get_db()
        version = db.schema_version(conn)
        assert version == max(n for n, _, _ in db.migration_files())
        assert db.migrate(conn) == []
        assert db.schema_version(conn) == version


def test_write_rolls_back_everything_on_error(app):
    with app.app_context():
        conn = db.get_db()
        try:
            with db.write(conn):
                conn.execute("INSERT INTO projects (name, created_at) VALUES ('half', 'now')")
                raise RuntimeError("fail half-way")
        except RuntimeError:
            pass
        assert conn.execute("SELECT COUNT(*) FROM projects WHERE name = 'half'").fetchone()[0] == 0


def test_pooled_connections_come_back_clean_and_a_failed_one_is_closed(app):
    pool = app.extensions["toeline.db_pool"]
    with app.app_context():
        first = db.get_db()
        first.execute("BEGIN IMMEDIATE")
        first.execute("INSERT INTO projects (name, created_at) VALUES ('left open', 'now')")
    # the request ended inside a transaction: given back rolled back, and reused as it is
    with app.app_context():
        again = db.get_db()
        assert again is first and not again.in_transaction
        assert again.execute("PRAGMA foreign_keys").fetchone()[0] == 1
        assert again.execute("SELECT COUNT(*) FROM projects WHERE name = 'left open'").fetchone()[0] == 0
    # a request that failed with an exception: its connection is closed, not kept
    try:
        with app.app_context():
            failed = db.get_db()
            raise RuntimeError("the request failed")
    except RuntimeError:
        pass
    with app.app_context():
        assert db.get_db() is not failed
    # at most pool.size idle connections are kept
    taken = [pool.take() for _ in range(pool.size + 3)]
    for conn in taken:
        pool.give(conn)
    assert len(pool._idle) == pool.size
    pool.close_all()
    assert pool._idle == []


def test_login_and_logout(client, auth, people):
    assert client.get("/").status_code == 302
    response = auth.login(people["engineer"])
    assert response.status_code == 302
    page = client.get("/").get_data(as_text=True)
    assert "Test quay" in page and "Other job" not in page
    auth.logout()
    assert client.get("/").status_code == 302


def test_wrong_password_is_refused_and_audited(client, auth, people, app):
    response = auth.login(people["engineer"], "wrong password")
    assert response.status_code == 401
    with app.app_context():
        rows = audit.entries(db.get_db(), None)
        assert rows[0]["action"] == "login failed"


def test_login_is_rate_limited_after_repeated_failures(client, auth, people, app):
    for _ in range(app.config["LOGIN_MAX_FAILURES"]):
        auth.login(people["viewer"], "wrong password")
    assert auth.login(people["viewer"]).status_code == 429


def test_login_form_without_csrf_token_is_rejected(client, people):
    response = client.post("/login", data={"email": people["engineer"], "password": "x"})
    assert response.status_code == 400


def test_session_cookie_is_httponly_and_samesite(client, auth, people):
    response = auth.login(people["engineer"])
    cookie = response.headers.get("Set-Cookie", "")
    assert "HttpOnly" in cookie and "SameSite=Lax" in cookie


def test_every_page_shows_the_caution(client, auth, people):
    auth.login(people["viewer"])
    page = client.get("/").get_data(as_text=True)
    assert "engineer of record" in page and "Caution" in page


def test_design_core_does_not_load_web_or_storage_modules():
    code = ("import sys, design_core; "
            "bad = [m for m in ('flask', 'sqlite3', 'reportlab', 'PIL', 'fieldapp') if m in sys.modules]; "
            "print(','.join(bad))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_audit_chain_detects_an_edited_row(app):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            for i in range(3):
                audit.append(conn, None, "tester", "event", str(i), {"i": i})
        assert audit.verify_chain(conn, None).ok
        conn.execute("DROP TRIGGER audit_no_update")
        conn.execute("UPDATE audit_log SET payload_json = '{\"i\":9}' WHERE seq = 2")
        report = audit.verify_chain(conn, None)
        assert not report.ok and "altered" in report.problem


def test_security_headers_on_every_response(client):
    response = client.get("/login")
    csp = response.headers["Content-Security-Policy"]
    script_src = [d for d in csp.split(";") if d.strip().startswith("script-src")][0]
    assert "unsafe-inline" not in script_src and "unsafe-eval" not in script_src
    assert "frame-ancestors 'none'" in csp
    assert response.headers["X-Content-Type-Options"] == "nosniff"
    assert "/" not in response.headers.get("Server", "")  # no version leaked


def test_production_passwords_use_argon2id_with_owasp_minimum_cost():
    # OWASP Password Storage Cheat Sheet: argon2id, at least 19 MiB memory and 2 iterations.
    from fieldapp.queries.users import default_hasher

    PRODUCTION_HASHER = default_hasher()
    assert PRODUCTION_HASHER.type.name == "ID"
    assert PRODUCTION_HASHER.memory_cost >= 19 * 1024 and PRODUCTION_HASHER.time_cost >= 2
    stored = PRODUCTION_HASHER.hash("a password")
    assert stored.startswith("$argon2id$")


def test_every_blueprint_of_the_list_is_registered(app):
    from fieldapp import BLUEPRINTS

    registered = set(app.blueprints)
    names = {"record.views": "record"}
    assert {names.get(n, n) for n in BLUEPRINTS} <= registered


def test_a_missing_blueprint_module_stops_the_app_with_its_name(tmp_path):
    import pytest

    from fieldapp import BLUEPRINTS

    with pytest.raises(RuntimeError, match="fieldapp.no_such_screen"):
        create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"),
                    "BLUEPRINTS": BLUEPRINTS + ("no_such_screen",)})


def test_a_module_without_a_blueprint_stops_the_app(tmp_path):
    import pytest

    with pytest.raises(RuntimeError, match="fieldapp.drawings has no blueprint"):
        create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data"), "BLUEPRINTS": ("drawings",)})
