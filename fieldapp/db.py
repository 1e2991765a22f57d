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
import weakref
from contextlib import contextmanager
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any, Iterator

from flask import current_app, g

BUSY_TIMEOUT_MS = 15_000
DATABASE_URL_ENV = "TOELINE_DATABASE_URL"
POOL_SIZE_ENV = "TOELINE_DB_POOL_SIZE"
# Advisory lock keys (PostgreSQL): one write lock for the whole database, one for migrations.
WRITE_LOCK_KEY = 0x746F656C  # "toel"
MIGRATE_LOCK_KEY = 0x746F6D67


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
_PG_READ_ONLY = {"25006"}              # read_only_sql_transaction (a standby, default_transaction_read_only)
_PG_DISK_FULL = {"53100", "53200"}     # disk_full, out_of_memory


def storage_fault(exc: BaseException) -> tuple[int, str] | None:
    """(status, message) when ``exc`` is the disk refusing a write: 503 read-only, 507 full."""
    if isinstance(exc, sqlite3.OperationalError):
        sqlstate = getattr(exc, "sqlstate", None)
        text = str(exc).lower()
        if sqlstate in _PG_READ_ONLY or (sqlstate is None and ("readonly" in text or "read-only" in text)):
            return 503, READ_ONLY_MESSAGE
        if sqlstate in _PG_DISK_FULL or (sqlstate is None and "disk is full" in text):
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


# --------------------------------------------------------------------------------------------
# PostgreSQL: psycopg 3 dressed as sqlite3
# --------------------------------------------------------------------------------------------

class PgIntegrityError(sqlite3.IntegrityError):
    """A PostgreSQL integrity error (unique, foreign key, check, the append-only triggers), raised
    as what the callers of the SQLite backend catch. ``sqlstate`` is PostgreSQL's code."""

    sqlstate: str | None = None


class PgOperationalError(sqlite3.OperationalError):
    """A PostgreSQL operational error (connection lost, lock timeout, disk full, read-only)."""

    sqlstate: str | None = None


class PgDatabaseError(sqlite3.DatabaseError):
    """Any other PostgreSQL error (syntax, data out of range)."""

    sqlstate: str | None = None


def _mapped(exc: Exception) -> sqlite3.DatabaseError:
    import psycopg

    sqlstate = getattr(exc, "sqlstate", None)
    if isinstance(exc, psycopg.IntegrityError):
        cls = PgIntegrityError
    elif isinstance(exc, psycopg.OperationalError) or sqlstate in _PG_READ_ONLY | _PG_DISK_FULL:
        cls = PgOperationalError
    else:
        cls = PgDatabaseError
    out = cls(str(exc).strip())
    out.sqlstate = sqlstate
    return out


class Row:
    """A result row read as sqlite3.Row is: by index, by column name, ``keys()``, iteration."""

    __slots__ = ("_values", "_index")

    def __init__(self, values, index: dict[str, int]):
        self._values = values
        self._index = index

    def __getitem__(self, key):
        if isinstance(key, str):
            return self._values[self._index[key]]
        return self._values[key]

    def keys(self) -> list[str]:
        return list(self._index)

    def __iter__(self):
        return iter(self._values)

    def __len__(self) -> int:
        return len(self._values)

    def __eq__(self, other) -> bool:
        return isinstance(other, Row) and self._values == other._values and self._index == other._index

    def __hash__(self) -> int:
        return hash(tuple(self._values))

    def __repr__(self) -> str:
        return f"Row({dict(zip(self._index, self._values, strict=True))!r})"


def _row_factory(cursor):
    names = [d.name for d in cursor.description or ()]
    index = {}
    for i, name in enumerate(names):
        index.setdefault(name, i)  # the first column of a name wins, as in sqlite3.Row
    return lambda values: Row(values, index)


class PgCursor:
    """What ``execute`` returns: ``fetchone``, ``fetchall``, iteration, ``lastrowid``, ``rowcount``."""

    __slots__ = ("_cur", "lastrowid", "rowcount")

    def __init__(self, cur, returns_id: bool):
        self._cur = cur
        self.rowcount = cur.rowcount
        self.lastrowid = None
        if returns_id:
            row = cur.fetchone()
            self.lastrowid = row[0] if row else None

    def fetchone(self):
        return self._cur.fetchone() if self._cur.description else None

    def fetchall(self) -> list:
        return self._cur.fetchall() if self._cur.description else []

    def __iter__(self):
        return iter(self.fetchall())


class PgConnection:
    """A psycopg connection with the sqlite3 surface the queries use (see the module docstring)."""

    dialect = "postgresql"

    def __init__(self, raw):
        self.raw = raw

    @property
    def in_transaction(self) -> bool:
        from psycopg.pq import TransactionStatus

        return self.raw.info.transaction_status != TransactionStatus.IDLE

    def execute(self, sql: str, params: Any = (), row_factory: Any = _row_factory) -> PgCursor:
        import psycopg
        from psycopg.rows import tuple_row

        text, returns_id = _pg_sql(sql, bool(params), _identity_tables(self))
        cur = self.raw.cursor(row_factory=row_factory or tuple_row)
        try:
            cur.execute(text, params or None)
        except psycopg.Error as exc:
            raise _mapped(exc) from exc
        return PgCursor(cur, returns_id)

    def cursor(self) -> "_PgCursorMaker":
        """A cursor as sqlite3's: ``row_factory = None`` gives plain tuples."""
        return _PgCursorMaker(self)

    def begin_write(self) -> None:
        """``BEGIN`` and the write lock (see :func:`write`); waits at most the busy timeout."""
        self.execute("BEGIN")
        try:
            self.execute("SELECT pg_advisory_xact_lock(?)", (WRITE_LOCK_KEY,))
        except BaseException:
            self.execute("ROLLBACK")
            raise

    def close(self) -> None:
        self.raw.close()


class _PgCursorMaker:
    __slots__ = ("conn", "row_factory")

    def __init__(self, conn: PgConnection):
        self.conn = conn
        self.row_factory = _row_factory

    def execute(self, sql: str, params: Any = ()) -> PgCursor:
        return self.conn.execute(sql, params, self.row_factory)


def _pg_configure(raw) -> None:
    """Session settings of every PostgreSQL connection: autocommit (transactions are explicit),
    sqlite3-like rows, a lock wait as long as SQLite's busy timeout, whole numbers from SUM."""
    from psycopg.types.numeric import NumericLoader

    class _WholeOrFloat(NumericLoader):
        # SUM and AVG of integers come back NUMERIC; the app stores no NUMERIC columns, and
        # sqlite3 gives int or float, so give the same.
        def load(self, data):
            value = super().load(data)
            return int(value) if value == value.to_integral_value() else float(value)

    raw.autocommit = True
    raw.row_factory = _row_factory
    raw.adapters.register_loader("numeric", _WholeOrFloat)
    raw.execute(f"SET lock_timeout = '{BUSY_TIMEOUT_MS}ms'")
    raw.execute("SET TIME ZONE 'UTC'")


def _pg_raw_connect(url: str):
    import psycopg

    try:
        raw = psycopg.connect(url, autocommit=True)
    except psycopg.Error as exc:
        raise _mapped(exc) from exc
    _pg_configure(raw)
    return raw


_open_pools: weakref.WeakSet = weakref.WeakSet()


class PgPool:
    """The PostgreSQL pool (``psycopg_pool.ConnectionPool``) behind the same take/give/close_all
    as the SQLite one. ``size`` is the most connections this process holds."""

    def __init__(self, url: str, size: int = 10):
        from psycopg_pool import ConnectionPool as _Pool

        self.url = url
        self.size = size
        self._pool = _Pool(url, min_size=1, max_size=size, configure=_pg_configure, open=True,
                           timeout=BUSY_TIMEOUT_MS / 1000, name="toeline")
        _open_pools.add(self)

    def take(self) -> PgConnection:
        return PgConnection(self._pool.getconn())

    def give(self, conn: PgConnection, broken: bool = False) -> None:
        raw = conn.raw
        try:
            if not raw.closed and conn.in_transaction:
                raw.execute("ROLLBACK")
        except Exception:
            broken = True
        if broken and not raw.closed:
            raw.close()  # the pool drops a closed connection and opens a fresh one when needed
        self._pool.putconn(raw)

    def close_all(self) -> None:
        self._pool.close()


def close_pools(url: str | None = None) -> None:
    """Close the PostgreSQL pools this process opened (on ``url`` only, when given): tests,
    before a database is dropped."""
    for p in list(_open_pools):
        if url is None or p.url == url:
            p.close_all()


_identity_cache: dict[str, frozenset[str]] = {}
_identity_lock = threading.Lock()


def _identity_tables(conn: PgConnection) -> frozenset[str]:
    """Tables whose ``id`` is an identity column: an INSERT into them returns its id."""
    key = conn.raw.info.dsn
    found = _identity_cache.get(key)
    if found is None:
        cur = conn.raw.cursor()
        cur.execute("SELECT table_name FROM information_schema.columns WHERE column_name = 'id' "
                    "AND is_identity = 'YES' AND table_schema = ANY (current_schemas(false))")
        found = frozenset(r[0] for r in cur.fetchall())
        with _identity_lock:
            _identity_cache[key] = found
    return found



_INSERT_INTO = re.compile(r"^\s*INSERT\s+INTO\s+(\w+)", re.IGNORECASE)
_NAMED = re.compile(r"(?<![:\w]):([A-Za-z_]\w*)")


@lru_cache(maxsize=4096)
def _pg_sql(sql: str, has_params: bool, id_tables: frozenset[str]) -> tuple[str, bool]:
    """The query in psycopg's dialect and whether it returns the new row's id.

    ``?`` and ``:name`` outside string literals become ``%s`` and ``%(name)s``; a literal ``%``
    is doubled (only when parameters are passed: without them psycopg sends the text as it is);
    an INSERT into a table with an identity ``id`` and no RETURNING gets ``RETURNING id``, so
    ``lastrowid`` works as on SQLite."""
    text = sql
    if has_params:
        parts = re.split(r"('(?:[^']|'')*'|\"(?:[^\"]|\"\")*\")", sql)
        out = []
        for i, part in enumerate(parts):
            if i % 2:  # a quoted literal or identifier: only % needs escaping
                out.append(part.replace("%", "%%"))
            else:
                part = part.replace("%", "%%").replace("?", "%s")
                out.append(_NAMED.sub(r"%(\1)s", part))
        text = "".join(out)
    match = _INSERT_INTO.match(sql)
    returns_id = bool(match and match.group(1).lower() in id_tables and "RETURNING" not in sql.upper())
    if returns_id:
        text = text.rstrip().rstrip(";") + " RETURNING id"
    return text, returns_id
