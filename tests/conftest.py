"""Shared fixtures in the flaskr shape: an app on a fresh temporary data folder, a client,
people in every role on one project and an outsider on another, and a helper to sign in."""

from __future__ import annotations

import re

import pytest

from fieldapp import create_app, db
from fieldapp.queries import projects, users

PASSWORD = "correct horse 42"
ROLES = ("admin", "engineer", "inspector", "viewer")


_PRODUCTION_HASHER = users._hasher


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
