"""The one owner of database connections and migrations.

SQLite in the data folder: WAL journal, foreign keys on, ``synchronous=FULL`` (a write the
server acknowledged survives a power cut), a busy timeout so concurrent writers wait instead
of failing. Connections run in autocommit mode and every user action is one explicit
transaction through :func:`write` (``BEGIN IMMEDIATE`` ... ``COMMIT``), so a half-saved pile
record is impossible.

SQL lives in ``fieldapp/queries/``; views call those functions and never write SQL.
"""

from __future__ import annotations

import re
import sqlite3
import threading
from contextlib import contextmanager
from importlib import resources
from pathlib import Path
from typing import Iterator

from flask import current_app, g

BUSY_TIMEOUT_MS = 15_000


def connect(path: str | Path) -> sqlite3.Connection:
    """Open a connection with the house settings (row factory, WAL, foreign keys, FULL sync)."""
    conn = sqlite3.connect(str(path), timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None,
                           check_same_thread=False)
    conn.row_factory = sqlite3.Row
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("PRAGMA synchronous = FULL")
    conn.execute("PRAGMA foreign_keys = ON")
    return conn


class ConnectionPool:
    """Open connections kept between requests, so a request does not pay for opening one
    (the file, the schema, the PRAGMAs: about a millisecond of CPU) and closing it.

    ``take`` hands out an idle connection or opens a new one; ``give`` takes it back, rolled
    back if a transaction was left open, and keeps at most ``size`` idle (the rest are closed).
    A connection is only ever used by the request that took it. The pool also keeps the
    database from being checkpointed and its WAL removed at every request's end, which SQLite
    does when the last connection to a database closes.
    """

    def __init__(self, path: str | Path, size: int = 16):
        self.path = str(path)
        self.size = size
        self._idle: list[sqlite3.Connection] = []
        self._lock = threading.Lock()

    def take(self) -> sqlite3.Connection:
        """An idle connection, or a new one."""
        with self._lock:
            if self._idle:
                return self._idle.pop()
        return connect(self.path)

    def give(self, conn: sqlite3.Connection, broken: bool = False) -> None:
        """Take a connection back; ``broken`` (the request failed with an exception) closes it."""
        try:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
        except sqlite3.Error:
            broken = True
        if not broken:
            with self._lock:
                if len(self._idle) < self.size:
                    self._idle.append(conn)
                    return
        conn.close()

    def close_all(self) -> None:
        """Close every idle connection (before the database file is replaced, and at exit)."""
        with self._lock:
            idle, self._idle = self._idle, []
        for conn in idle:
            conn.close()


def pool() -> ConnectionPool:
    """The app's connection pool (made by ``init_app``)."""
    return current_app.extensions["toeline.db_pool"]


def get_db() -> sqlite3.Connection:
    """The request's connection, taken from the app's pool on first use, given back at teardown."""
    if "db" not in g:
        g.db = pool().take()
    return g.db


def close_db(exc: BaseException | None = None) -> None:
    """Give the request's connection back to the pool, if one was taken."""
    db = g.pop("db", None)
    if db is not None:
        pool().give(db, broken=exc is not None)


@contextmanager
def write(conn: sqlite3.Connection | None = None) -> Iterator[sqlite3.Connection]:
    """One transaction for one user action: everything inside commits together or not at all.

    ``BEGIN IMMEDIATE`` takes the write lock at the start, so two writers queue on the busy
    timeout rather than failing half-way with a lock upgrade. Nested use joins the outer
    transaction.
    """
    conn = conn if conn is not None else get_db()
    if conn.in_transaction:
        yield conn
        return
    conn.execute("BEGIN IMMEDIATE")
    try:
        yield conn
    except BaseException:
        if conn.in_transaction:  # SQLite rolls back by itself on some errors (e.g. disk full)
            conn.execute("ROLLBACK")
        raise
    else:
        conn.execute("COMMIT")


_MIGRATION_NAME = re.compile(r"^(\d{4})_[a-z0-9_]+\.sql$")


def migration_files() -> list[tuple[int, str, str]]:
    """(number, name, sql) of every migration shipped in ``fieldapp/migrations``, in order."""
    out = []
    for entry in resources.files("fieldapp").joinpath("migrations").iterdir():
        match = _MIGRATION_NAME.match(entry.name)
        if match:
            out.append((int(match.group(1)), entry.name, entry.read_text(encoding="utf-8")))
    out.sort()
    numbers = [n for n, _, _ in out]
    if len(set(numbers)) != len(numbers):
        raise RuntimeError(f"two migrations share a number: {numbers}")
    return out


def migrate(conn: sqlite3.Connection) -> list[str]:
    """Apply every migration newer than the database's ``user_version``; returns names applied.

    Idempotent: a second call applies nothing. Each migration and its version bump commit
    together.
    """
    applied = []
    current = conn.execute("PRAGMA user_version").fetchone()[0]
    for number, name, sql in migration_files():
        if number <= current:
            continue
        conn.execute("BEGIN IMMEDIATE")
        try:
            for statement in _split_sql(sql):
                conn.execute(statement)
            conn.execute(f"PRAGMA user_version = {int(number)}")
        except BaseException:
            conn.execute("ROLLBACK")
            raise
        conn.execute("COMMIT")
        applied.append(name)
    return applied


def _split_sql(sql: str) -> list[str]:
    """Split a migration into statements, keeping ``CREATE TRIGGER ... END;`` blocks whole."""
    statements, buf = [], []
    for line in sql.splitlines():
        stripped = line.strip()
        if not buf and (not stripped or stripped.startswith("--")):
            continue
        buf.append(line)
        text = "\n".join(buf)
        if sqlite3.complete_statement(text):
            statements.append(text)
            buf = []
    if buf and "\n".join(buf).strip():
        raise RuntimeError("migration ends with an incomplete statement")
    return statements


def schema_version(conn: sqlite3.Connection) -> int:
    """The number of the last migration applied."""
    return conn.execute("PRAGMA user_version").fetchone()[0]


READ_ONLY_MESSAGE = ("The server's data folder is read-only: nothing was saved. Whoever runs the server "
                     "must make the data folder writable; then save again (the tablet keeps unsent saves "
                     "in its outbox).")
DISK_FULL_MESSAGE = ("The server's disk is full: nothing was saved. Whoever runs the server must free disk "
                     "space; then save again (the tablet keeps unsent saves in its outbox).")


def storage_fault(exc: BaseException) -> tuple[int, str] | None:
    """(status, message) when ``exc`` is the disk refusing a write: 503 read-only, 507 full."""
    import errno

    if isinstance(exc, sqlite3.OperationalError):
        text = str(exc).lower()
        if "readonly" in text or "read-only" in text:
            return 503, READ_ONLY_MESSAGE
        if "disk is full" in text:
            return 507, DISK_FULL_MESSAGE
    elif isinstance(exc, OSError):
        if exc.errno == errno.EROFS:
            return 503, READ_ONLY_MESSAGE
        if exc.errno in (errno.ENOSPC, errno.EDQUOT):
            return 507, DISK_FULL_MESSAGE
    return None


def _storage_error(exc):
    """A clear answer when the disk refuses a write (JSON under /api/, a page elsewhere)."""
    from flask import jsonify, render_template_string, request

    fault = storage_fault(exc)
    if fault is None:
        raise exc
    status, message = fault
    current_app.logger.error("write refused by the disk: %s", exc)
    if request.path.startswith("/api/"):
        response = jsonify({"error": message})
        response.status_code = status
        return response
    page = render_template_string(
        '{% extends "base.html" %}{% block title %}Not saved{% endblock %}'
        '{% block content %}<h1>Not saved</h1><p class="error" role="alert">{{ message }}</p>'
        '<p><a class="btn" href="{{ url_for(\'auth.index\') }}">Projects</a></p>{% endblock %}', message=message)
    return page, status


def init_app(app) -> None:
    """Register teardown and apply migrations once at start."""
    app.teardown_appcontext(close_db)
    app.register_error_handler(sqlite3.OperationalError, _storage_error)
    app.register_error_handler(OSError, _storage_error)
    conn = connect(app.config["DATABASE"])
    try:
        migrate(conn)
    except BaseException:
        conn.close()
        raise
    pool_ = ConnectionPool(app.config["DATABASE"])
    pool_.give(conn)
    app.extensions["toeline.db_pool"] = pool_
