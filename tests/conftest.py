"""Shared fixtures in the flaskr shape: an app on a fresh temporary data folder, a client,
people in every role on one project and an outsider on another, and a helper to sign in.

Backend: SQLite in each test's data folder, unless ``TOELINE_TEST_DATABASE_URL`` names a
PostgreSQL server (``postgresql://user@host:port/postgres``). Then every test gets a database of
its own, copied from a template the migrations were applied to once, named to the app by
``TOELINE_DATABASE_URL`` for that test only (apps made in the test and server subprocesses
started with its environment all use it), and dropped afterwards. Tests that are about the
SQLite file itself are skipped on that run (``SQLITE_ONLY`` below says why).
"""

from __future__ import annotations

import itertools
import os
import re
from urllib.parse import urlsplit, urlunsplit

import pytest

from fieldapp import create_app, db
from fieldapp.queries import projects, users

PASSWORD = "correct horse 42"
ROLES = ("admin", "engineer", "inspector", "viewer")


_PRODUCTION_HASHER = users._hasher

TEST_DATABASE_URL = os.environ.get("TOELINE_TEST_DATABASE_URL", "").strip()
_TEMPLATE = f"toeline_test_template_{os.getpid()}"  # one per pytest process
_numbers = itertools.count(1)

# Tests about the SQLite file and its tools (PRAGMAs, the file-copy backup, sqlite3 opened on the
# file): they test the site laptop's backend and run on the SQLite run only.
SQLITE_ONLY = {
    "tests/test_foundation.py::test_data_folder_holds_database_photos_and_secret": "the SQLite file",
    "tests/test_foundation.py::test_database_settings": "SQLite PRAGMAs",
    "tests/test_foundation.py::test_pooled_connections_come_back_clean_and_a_failed_one_is_closed":
        "the SQLite pool's internals (the PostgreSQL pool is psycopg_pool's)",
    "tests/test_foundation.py::test_audit_chain_detects_an_edited_row": "tampers with SQLite's triggers",
    "tests/test_audit_chain.py": "tampers with the SQLite file through sqlite3 (test_postgres covers "
                                 "the triggers and verification on PostgreSQL)",
    "tests/reliability/test_backup.py": "the SQLite file backup (pg_dump is tested in test_postgres)",
    "tests/reliability/test_disk_faults.py": "SQLite's read-only and disk-full faults",
    "tests/reliability/test_restore_guard.py": "the SQLite file backup and restore (a company server "
                                               "restores with pg_restore, tested in test_postgres)",
    "tests/test_verify_record.py::test_a_file_from_another_data_folder_is_refused":
        "a second data folder is a second SQLite database (on a server both would share one database)",
    "tests/test_verify_record.py::test_a_chain_cut_short_after_an_issue_is_found":
        "cuts the chain short through sqlite3 (the triggers on PostgreSQL refuse it: test_postgres)",
    "tests/reliability/test_tamper.py": "tampers with the SQLite file through sqlite3, and its backups",
}


def _sqlite_only_reason(nodeid: str) -> str | None:
    for key, reason in SQLITE_ONLY.items():
        if nodeid == key or nodeid.startswith(key + "::") or nodeid.startswith(key + "["):
            return reason
    return None


def pytest_collection_modifyitems(config, items):
    if not TEST_DATABASE_URL:
        for item in items:
            if item.get_closest_marker("postgres"):
                item.add_marker(pytest.mark.skip(reason="needs TOELINE_TEST_DATABASE_URL (PostgreSQL)"))
        return
    for item in items:
        reason = _sqlite_only_reason(item.nodeid)
        if reason:
            item.add_marker(pytest.mark.skip(reason=f"SQLite only: {reason}"))


def _database_url(name: str) -> str:
    """The test server's URL with another database name."""
    parts = urlsplit(TEST_DATABASE_URL)
    return urlunsplit(parts._replace(path="/" + name))


def _admin(sql: str) -> None:
    import psycopg

    with psycopg.connect(TEST_DATABASE_URL, autocommit=True) as conn:
        conn.execute(sql)


class PgServer:
    """The test PostgreSQL server: a database's URL by name, statements run on its maintenance
    database, and a database copied from another (the demo, for the reliability tests)."""

    template = _TEMPLATE

    def url(self, name: str) -> str:
        return _database_url(name)

    def admin(self, sql: str) -> None:
        _admin(sql)

    def copy(self, name: str, template: str) -> None:
        """(Re)make database ``name`` as a copy of ``template`` (no connection may be open to either)."""
        db.close_pools(_database_url(name))
        db.close_pools(_database_url(template))
        _admin(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")
        _admin(f"CREATE DATABASE {name} TEMPLATE {template}")


@pytest.fixture(scope="session")
def pg_server(_pg_template) -> PgServer | None:
    """The PostgreSQL server of the run, or None on the SQLite run."""
    return PgServer() if _pg_template else None


@pytest.fixture(scope="session")
def _pg_template():
    """A database with every migration applied, copied for each test (CREATE DATABASE ... TEMPLATE)."""
    if not TEST_DATABASE_URL:
        yield None
        return
    _admin(f"DROP DATABASE IF EXISTS {_TEMPLATE} WITH (FORCE)")
    _admin(f"CREATE DATABASE {_TEMPLATE}")
    conn = db.connect(_database_url(_TEMPLATE))
    try:
        db.migrate(conn)
    finally:
        conn.close()
    yield _TEMPLATE
    db.close_pools()
    _admin(f"DROP DATABASE IF EXISTS {_TEMPLATE} WITH (FORCE)")


@pytest.fixture(autouse=True)
def database_url(_pg_template, monkeypatch):
    """The PostgreSQL database of this test (None on the SQLite run); see the module docstring."""
    if not TEST_DATABASE_URL:
        monkeypatch.delenv(db.DATABASE_URL_ENV, raising=False)
        yield None
        return
    name = f"toeline_test_{os.getpid()}_{next(_numbers)}"
    _admin(f"CREATE DATABASE {name} TEMPLATE {_pg_template}")
    url = _database_url(name)
    monkeypatch.setenv(db.DATABASE_URL_ENV, url)
    yield url
    db.close_pools(url)
    _admin(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")


@pytest.fixture(autouse=True, scope="session")
def _fast_password_hashing():
    """Argon2id with minimal cost for the test run only (hashes dozens of test users a second).

    Production keeps argon2-cffi's defaults; test_foundation checks them. Stored hashes carry
    their own parameters, so verification is the same code either way.
    """
    from argon2 import PasswordHasher

    users._hasher = PasswordHasher(time_cost=1, memory_cost=1024, parallelism=1)
    yield
    users._hasher = _PRODUCTION_HASHER


@pytest.fixture
def app(tmp_path):
    """The app on an empty data folder, CSRF on as in production."""
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data")})
    yield app


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture
def runner(app):
    return app.test_cli_runner()


@pytest.fixture
def people(app):
    """Project 'own' with one member per role, project 'other' with an outsider engineer.

    Returns a dict: own (project id), other (project id), and email per role plus 'outsider'.
    """
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            own = projects.create(conn, "Test quay", "test site", "test datum", "T. Engineer")
            other = projects.create(conn, "Other job", "elsewhere")
            out = {"own": own, "other": other}
            for role in ROLES:
                email = f"{role}@test.example"
                uid = users.create(conn, email, PASSWORD, role, role.title())
                if role != "admin":
                    users.add_member(conn, own, uid)
                out[role] = email
            uid = users.create(conn, "outsider@test.example", PASSWORD, "engineer", "Outsider")
            users.add_member(conn, other, uid)
            out["outsider"] = "outsider@test.example"
    return out


_META = re.compile(r'<meta name="csrf-token" content="([^"]+)"')


def csrf_token(client) -> str:
    """A CSRF token for the client's session, read from a page's meta tag."""
    html = client.get("/login").get_data(as_text=True)
    match = _META.search(html)
    assert match, "every page carries <meta name=csrf-token>"
    return match.group(1)


class Auth:
    """Sign a test client in and out."""

    def __init__(self, client):
        self.client = client

    def login(self, email: str, password: str = PASSWORD):
        token = csrf_token(self.client)
        return self.client.post("/login", data={"email": email, "password": password,
                                                "csrf_token": token})

    def logout(self):
        return self.client.post("/logout", data={"csrf_token": csrf_token(self.client)})

    def token(self) -> str:
        return csrf_token(self.client)


@pytest.fixture
def auth(client):
    return Auth(client)
