"""The one owner of database connections and migrations, on SQLite or PostgreSQL.

**SQLite** (the site laptop, the default): a file in the data folder, WAL journal, foreign keys
on, ``synchronous=FULL`` (a write the server acknowledged survives a power cut), a busy timeout
so concurrent writers wait instead of failing.

**PostgreSQL** (a company server): chosen by ``TOELINE_DATABASE_URL=postgresql://...``. psycopg 3
through ``psycopg_pool``; each connection is dressed as the sqlite3 one the queries were written
for (:class:`PgConnection`): ``?`` and ``:name`` placeholders, rows read by index and by column
name, ``lastrowid``, ``rowcount``, ``in_transaction``, and the errors the app catches raised as
subclasses of ``sqlite3.IntegrityError`` / ``sqlite3.OperationalError``.

On both, connections run in autocommit mode and every user action is one explicit transaction
through :func:`write`, which takes *the write lock* first: ``BEGIN IMMEDIATE`` on SQLite, a
transaction-level advisory lock on PostgreSQL. One writer at a time, on every process of the
server, so each read-then-write inside a transaction (the next record version, the next audit
``seq``) sees every earlier commit and the audit chain can never fork. Reads never wait.

SQL lives in ``fieldapp/queries/``; views call those functions and never write SQL.
"""

from __future__ import annotations

import errno
import os
import re
import sqlite3
import threading
from contextlib import contextmanager
from importlib import resources
from pathlib import Path
from typing import Any, Iterator

from flask import current_app, g

from fieldapp.db_postgres import (  # noqa: F401 - the PostgreSQL names are fieldapp.db's too
    BUSY_TIMEOUT_MS,
    PG_DISK_FULL,
    PG_READ_ONLY,
    WRITE_LOCK_KEY,
    PgConnection,
    PgCursor,
    PgDatabaseError,
    PgIntegrityError,
    PgOperationalError,
    PgPool,
    Row,
    _identity_cache,
    _pg_raw_connect,
    _pg_sql,
    close_pools,
)

DATABASE_URL_ENV = "TOELINE_DATABASE_URL"
POOL_SIZE_ENV = "TOELINE_DB_POOL_SIZE"
MIGRATE_LOCK_KEY = 0x746F6D67  # the advisory lock migrations take on PostgreSQL


def is_postgres(target: str | Path | None) -> bool:
    """True when ``target`` is a PostgreSQL URL (``postgresql://`` or ``postgres://``)."""
    return str(target or "").startswith(("postgresql://", "postgres://"))


def database_url() -> str | None:
    """The PostgreSQL URL from ``TOELINE_DATABASE_URL``, or None (SQLite in the data folder)."""
    url = (os.environ.get(DATABASE_URL_ENV) or "").strip()
    if url and not is_postgres(url):
        raise RuntimeError(f"{DATABASE_URL_ENV} must start with postgresql://, got {url.split(':', 1)[0]}:...")
    return url or None


def connect(target: str | Path):
    """Open a connection with the house settings: a SQLite file path, or a PostgreSQL URL."""
    if is_postgres(target):
        return PgConnection(_pg_raw_connect(str(target)))
    conn = sqlite3.connect(str(target), timeout=BUSY_TIMEOUT_MS / 1000, isolation_level=None,
                           check_same_thread=False)
    conn.row_factory = sqlite3.Row
    conn.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("PRAGMA synchronous = FULL")
    conn.execute("PRAGMA foreign_keys = ON")
    return conn


class ConnectionPool:
    """Open SQLite connections kept between requests, so a request does not pay for opening one
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


def pool():
    """The app's connection pool (made by ``init_app``)."""
    return current_app.extensions["toeline.db_pool"]


def get_db():
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
def write(conn=None) -> Iterator[Any]:
    """One transaction for one user action: everything inside commits together or not at all.

    The write lock is taken at the start (``BEGIN IMMEDIATE`` on SQLite; on PostgreSQL
    ``BEGIN`` then ``pg_advisory_xact_lock``, released by the commit or rollback), so two
    writers queue rather than interleave, and each read inside sees every earlier commit.
    Nested use joins the outer transaction.
    """
    conn = conn if conn is not None else get_db()
    if conn.in_transaction:
        yield conn
        return
    if isinstance(conn, PgConnection):
        conn.begin_write()
    else:
        conn.execute("BEGIN IMMEDIATE")
    try:
        yield conn
    except BaseException:
        if conn.in_transaction:  # SQLite rolls back by itself on some errors (e.g. disk full)
            conn.execute("ROLLBACK")
        raise
    else:
        conn.execute("COMMIT")


# --------------------------------------------------------------------------------------------
# Migrations: the same numbered files on both; a PostgreSQL variant in migrations/pg/ where the
# dialect differs (types, identity columns, the append-only triggers)
# --------------------------------------------------------------------------------------------

_MIGRATION_NAME = re.compile(r"^(\d{4})_[a-z0-9_]+\.sql$")


def migration_files(dialect: str = "sqlite") -> list[tuple[int, str, str]]:
    """(number, name, sql) of every migration shipped in ``fieldapp/migrations``, in order.

    ``dialect="postgresql"`` takes ``migrations/pg/<the same name>`` where one exists."""
    folder = resources.files("fieldapp").joinpath("migrations")
    variants = folder.joinpath("pg")
    out = []
    for entry in folder.iterdir():
        match = _MIGRATION_NAME.match(entry.name)
        if match:
            chosen = entry
            if dialect == "postgresql" and variants.joinpath(entry.name).is_file():
                chosen = variants.joinpath(entry.name)
            out.append((int(match.group(1)), entry.name, chosen.read_text(encoding="utf-8")))
    out.sort()
    numbers = [n for n, _, _ in out]
    if len(set(numbers)) != len(numbers):
        raise RuntimeError(f"two migrations share a number: {numbers}")
    return out


def migrate(conn) -> list[str]:
    """Apply every migration newer than the database's schema version; returns names applied.

    Idempotent: a second call applies nothing. Each migration and its version bump commit
    together; the version is read under the write lock, so several server processes starting at
    once apply each migration exactly once.
    """
    if isinstance(conn, PgConnection):
        return _migrate_pg(conn)
    applied = []
    for number, name, sql in migration_files():
        conn.execute("BEGIN IMMEDIATE")
        try:
            if number <= conn.execute("PRAGMA user_version").fetchone()[0]:
                conn.execute("COMMIT")
                continue
            for statement in _split_sql(sql):
                conn.execute(statement)
            conn.execute(f"PRAGMA user_version = {int(number)}")
        except BaseException:
            conn.execute("ROLLBACK")
            raise
        conn.execute("COMMIT")
        applied.append(name)
    return applied


def _migrate_pg(conn: PgConnection) -> list[str]:
    applied = []
    for number, name, sql in migration_files("postgresql"):
        conn.execute("BEGIN")
        try:
            conn.execute("SELECT pg_advisory_xact_lock(?)", (MIGRATE_LOCK_KEY,))
            conn.execute("CREATE TABLE IF NOT EXISTS toeline_schema (version INTEGER NOT NULL)")
            if number <= schema_version(conn):
                conn.execute("COMMIT")
                continue
            conn.execute(sql)  # no parameters: psycopg sends the whole file as one script
            conn.execute("DELETE FROM toeline_schema")
            conn.execute("INSERT INTO toeline_schema (version) VALUES (?)", (number,))
        except BaseException:
            conn.execute("ROLLBACK")
            raise
        conn.execute("COMMIT")
        applied.append(name)
    _identity_cache.clear()
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


def schema_version(conn) -> int:
    """The number of the last migration applied."""
    if isinstance(conn, PgConnection):
        if conn.execute("SELECT to_regclass('toeline_schema')").fetchone()[0] is None:
            return 0
        row = conn.execute("SELECT MAX(version) FROM toeline_schema").fetchone()
        return int(row[0] or 0)
    return conn.execute("PRAGMA user_version").fetchone()[0]


# --------------------------------------------------------------------------------------------
# Storage faults: a clear answer when the disk (or the database server's disk) refuses a write
# --------------------------------------------------------------------------------------------

READ_ONLY_MESSAGE = ("The server's data folder is read-only: nothing was saved. Whoever runs the server "
                     "must make the data folder writable; then save again (the tablet keeps unsent saves "
                     "in its outbox).")
DISK_FULL_MESSAGE = ("The server's disk is full: nothing was saved. Whoever runs the server must free disk "
                     "space; then save again (the tablet keeps unsent saves in its outbox).")


def storage_fault(exc: BaseException) -> tuple[int, str] | None:
    """(status, message) when ``exc`` is the disk refusing a write: 503 read-only, 507 full."""
    if isinstance(exc, sqlite3.OperationalError):
        sqlstate = getattr(exc, "sqlstate", None)
        text = str(exc).lower()
        if sqlstate in PG_READ_ONLY or (sqlstate is None and ("readonly" in text or "read-only" in text)):
            return 503, READ_ONLY_MESSAGE
        if sqlstate in PG_DISK_FULL or (sqlstate is None and "disk is full" in text):
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
    """Choose the backend, register teardown and apply migrations once at start.

    ``TOELINE_DATABASE_URL`` (or ``DATABASE_URL`` in the app's config) set to a PostgreSQL URL
    makes it the database and ``app.config["DATABASE"]`` that URL; otherwise SQLite in the data
    folder as before."""
    url = app.config.get("DATABASE_URL") or database_url()
    if url:
        app.config["DATABASE"] = url
    app.teardown_appcontext(close_db)
    app.register_error_handler(sqlite3.OperationalError, _storage_error)
    app.register_error_handler(OSError, _storage_error)
    if url:
        pool_ = PgPool(url, int(os.environ.get(POOL_SIZE_ENV) or 10))
        conn = pool_.take()
        try:
            migrate(conn)
        finally:
            pool_.give(conn)
        app.extensions["toeline.db_pool"] = pool_
        return
    conn = connect(app.config["DATABASE"])
    try:
        migrate(conn)
    except BaseException:
        conn.close()
        raise
    pool_ = ConnectionPool(app.config["DATABASE"])
    pool_.give(conn)
    app.extensions["toeline.db_pool"] = pool_
