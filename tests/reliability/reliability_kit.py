"""Helpers for the reliability tests: the production server as a subprocess on a free port, a
signed-in ``requests`` session, small generated images. The demo logins are ``demo.LOGINS``
(invented people, fieldapp/demo.py)."""

from __future__ import annotations

import io
import itertools
import os
import re
import shutil
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path
from urllib.parse import urlsplit, urlunsplit

import psycopg
import requests
from PIL import Image

from fieldapp import demo

ROOT = Path(__file__).resolve().parents[2]
LOGINS = {role: (email, password) for email, role, password in demo.LOGINS}
_META = re.compile(r'<meta name="csrf-token" content="([^"]+)"')


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


class Server:
    """``toeline serve`` (waitress, the production server) in a subprocess on 127.0.0.1."""

    def __init__(self, data: Path, *extra: str, env: dict | None = None, scheme: str = "http"):
        self.data, self.extra, self.scheme = data, extra, scheme
        url = database_of(data)
        self.env = {**os.environ, **({"TOELINE_DATABASE_URL": url} if url else {}), **(env or {})}
        self.port = free_port()
        self.proc: subprocess.Popen | None = None
        self.log = data.parent / f"server-{self.port}.log"

    @property
    def ca_cert(self) -> Path:
        """The site authority ``serve --https`` makes in the data folder (fieldapp.https)."""
        from fieldapp.https import SiteCertificates

        return SiteCertificates.in_folder(self.data).ca_cert

    @property
    def verify(self) -> str | bool:
        """What ``requests`` should verify the server's certificate with."""
        return str(self.ca_cert) if self.scheme == "https" else True

    @property
    def url(self) -> str:
        return f"{self.scheme}://127.0.0.1:{self.port}"

    def start(self, timeout: float = 30.0) -> None:
        with open(self.log, "ab") as log:
            self.proc = subprocess.Popen(
                [sys.executable, "-m", "fieldapp.cli", "--data", str(self.data), "serve",
                 "--host", "127.0.0.1", "--port", str(self.port), *self.extra],
                cwd=ROOT, env=self.env, stdout=log, stderr=subprocess.STDOUT)
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"server exited: {self.log.read_text()[-2000:]}")
            if self.scheme == "https" and not self.ca_cert.exists():
                time.sleep(0.05)
                continue
            try:
                if requests.get(self.url + "/healthz", timeout=1, verify=self.verify).status_code == 200:
                    return
            except requests.RequestException:
                time.sleep(0.02)
        raise RuntimeError("server did not answer /healthz in time")

    def kill(self) -> None:
        """SIGKILL: no clean-up, no flush, like a power cut for the process."""
        if self.proc and self.proc.poll() is None:
            self.proc.send_signal(signal.SIGKILL)
            self.proc.wait()

    def stop(self) -> None:
        if self.proc and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=60)
            except subprocess.TimeoutExpired:
                self.kill()


def login(session: requests.Session, base: str, email: str, password: str) -> str:
    """Sign a requests session in through the login form; returns a CSRF token for API writes."""
    page = session.get(base + "/login", timeout=60)
    token = _META.search(page.text).group(1)
    answer = session.post(base + "/login", data={"email": email, "password": password,
                                                 "csrf_token": token}, timeout=60,
                          allow_redirects=False)
    assert answer.status_code == 302, answer.text[:300]
    return session.get(base + "/api/v1/session", timeout=60).json()["csrf_token"]


def small_jpeg(seed: int, size: int = 48) -> bytes:
    """A small JPEG whose bytes depend on ``seed`` (so each upload has its own SHA-256)."""
    image = Image.new("RGB", (size, size), ((seed * 37) % 256, (seed * 91) % 256, (seed * 17) % 256))
    image.putpixel((seed % size, (seed // size) % size), (255 - (seed % 256), 0, 0))
    out = io.BytesIO()
    image.save(out, "JPEG", quality=90)
    return out.getvalue()


def small_png(size: int = 32) -> bytes:
    out = io.BytesIO()
    Image.new("RGB", (size, size), (10, 120, 200)).save(out, "PNG")
    return out.getvalue()


# The PostgreSQL run: the demo's database, and the file in a data folder naming the database
# that belongs to it (a module's copy of the demo has its own database; see copy_demo).
DEMO_DATABASE = f"toeline_test_demo_{os.getpid()}"
DATABASE_MARK = "test-database-url"
_copies = itertools.count(1)


def database_of(data: Path) -> str | None:
    """The PostgreSQL database of a test data folder (None: SQLite in the folder)."""
    mark = Path(data) / DATABASE_MARK
    if mark.exists():
        return mark.read_text().strip()
    return os.environ.get("TOELINE_DATABASE_URL") or None


def copy_demo(template: Path, data: Path) -> Path:
    """Copy the demo data folder for a module's tests; on the PostgreSQL run also its database,
    as a database of the folder's own (named in the folder)."""
    shutil.copytree(template, data)
    server = os.environ.get("TOELINE_TEST_DATABASE_URL")
    if server:
        name = f"toeline_test_module_{os.getpid()}_{next(_copies)}"
        with psycopg.connect(server, autocommit=True) as conn:
            conn.execute(f"CREATE DATABASE {name} TEMPLATE {DEMO_DATABASE}")
        parts = urlsplit(server)
        (data / DATABASE_MARK).write_text(urlunsplit(parts._replace(path="/" + name)))
    return data


def make_app(data: Path):
    """The Flask app on a data folder with CSRF on, as in production."""
    from fieldapp import create_app

    url = database_of(data)
    return create_app({"TESTING": True, **({"DATABASE_URL": url} if url else {})}, data_dir=data)


def sign_in(client, role: str) -> str:
    """Sign a Flask test client in as the demo user of ``role``; returns a CSRF token."""
    email, password = LOGINS[role]
    page = client.get("/login").get_data(as_text=True)
    answer = client.post("/login", data={"email": email, "password": password,
                                         "csrf_token": _META.search(page).group(1)})
    assert answer.status_code == 302, answer.get_data(as_text=True)[:300]
    return client.get("/api/v1/session").get_json()["csrf_token"]


def engineer_site(data: Path) -> dict:
    """The app on a demo data folder with a test client signed in as the engineer: app, client,
    token (CSRF), data and project (the demo project's id)."""
    from fieldapp import db

    app = make_app(data)
    client = app.test_client()
    token = sign_in(client, "engineer")
    with app.app_context():
        project_id = db.get_db().execute("SELECT id FROM projects ORDER BY id LIMIT 1").fetchone()[0]
    return {"app": app, "client": client, "token": token, "data": data, "project": project_id}


class _TupleRows:
    """A PostgreSQL connection (fieldapp.db) giving plain tuples, as sqlite3.connect does."""

    def __init__(self, conn):
        self.conn = conn

    def execute(self, sql: str, params=()):
        return self.conn.execute(sql, params, None)

    def close(self) -> None:
        self.conn.close()


def open_database(data: Path):
    """The test's database as a plain DB-API connection with tuple rows: the SQLite file in the
    data folder, or the PostgreSQL database ``TOELINE_DATABASE_URL`` names (the PostgreSQL run)."""
    url = database_of(data)
    if url:
        from fieldapp import db

        return _TupleRows(db.connect(url))
    import sqlite3

    return sqlite3.connect(str(data / "toeline.sqlite3"))


def integrity_ok(conn) -> bool:
    """SQLite: ``PRAGMA integrity_check`` is ok. PostgreSQL: amcheck finds every B-tree index of
    the schema consistent with itself (``bt_index_check`` raises on a corrupt one)."""
    if isinstance(conn, _TupleRows):
        conn.execute("CREATE EXTENSION IF NOT EXISTS amcheck")
        checked = conn.execute(
            "SELECT COUNT(bt_index_check(c.oid)) FROM pg_index i JOIN pg_class c ON c.oid = i.indexrelid "
            "JOIN pg_am a ON a.oid = c.relam WHERE a.amname = 'btree' "
            "AND c.relnamespace = 'public'::regnamespace").fetchone()[0]
        return checked > 0
    return conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"

