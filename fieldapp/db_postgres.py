"""PostgreSQL for fieldapp.db: psycopg 3 and psycopg_pool dressed as the sqlite3 connection the
queries were written for (see fieldapp.db's docstring). Import it through fieldapp.db.

* ``?`` and ``:name`` placeholders become psycopg's (:func:`_pg_sql`, cached per query text);
* rows read by index and by column name (:class:`Row`, as sqlite3.Row);
* ``lastrowid`` from ``RETURNING id`` added to an INSERT into a table with an identity ``id``;
* errors raised as subclasses of sqlite3's, so callers catch the same classes on both backends.
"""

from __future__ import annotations

import re
import sqlite3
import weakref
from functools import lru_cache
from typing import Any

import psycopg
from psycopg.pq import TransactionStatus
from psycopg.rows import tuple_row
from psycopg.types.numeric import NumericLoader
from psycopg_pool import ConnectionPool as _Pool

BUSY_TIMEOUT_MS = 15_000
WRITE_LOCK_KEY = 0x746F656C  # "toel": the advisory lock every write transaction takes
PG_READ_ONLY = {"25006"}              # read_only_sql_transaction (a standby, default_transaction_read_only)
PG_DISK_FULL = {"53100", "53200"}     # disk_full, out_of_memory


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
    sqlstate = getattr(exc, "sqlstate", None)
    if isinstance(exc, psycopg.IntegrityError):
        cls = PgIntegrityError
    elif isinstance(exc, psycopg.OperationalError) or sqlstate in PG_READ_ONLY | PG_DISK_FULL:
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

    def __repr__(self) -> str:
        return f"Row({dict(zip(self._index, self._values, strict=False))!r})"


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
        return self.raw.info.transaction_status != TransactionStatus.IDLE

    def execute(self, sql: str, params: Any = (), row_factory: Any = _row_factory) -> PgCursor:
        text, returns_id = _pg_sql(sql, bool(params), _identity_tables(self))
        cur = self.raw.cursor(row_factory=row_factory or tuple_row)
        try:
            cur.execute(text, params or None)
        except psycopg.Error as exc:
            raise _mapped(exc) from exc
        return PgCursor(cur, returns_id)

    def executemany(self, sql: str, seq_of_params) -> None:
        """As sqlite3's: one statement over many parameter rows (no rows returned)."""
        text, returns_id = _pg_sql(sql, True, _identity_tables(self))
        if returns_id:   # no id is wanted back from many rows
            text = text.removesuffix(" RETURNING id")
        rows = list(seq_of_params)
        if not rows:
            return
        cur = self.raw.cursor()
        try:
            cur.executemany(text, rows)
        except psycopg.Error as exc:
            raise _mapped(exc) from exc

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
        self.url = url
        self.size = size
        self._pool = _Pool(url, min_size=1, max_size=size, configure=_pg_configure, open=True,
                           timeout=BUSY_TIMEOUT_MS / 1000, name="toeline")
        _open_pools.add(self)

    def take(self) -> PgConnection:
        return PgConnection(self._pool.getconn())

    def give(self, conn: PgConnection, broken: bool = False) -> None:
        """Take a connection back, rolled back if a transaction was left open. A request that
        failed (``broken``) leaves a connection that is still good once rolled back; one that
        cannot be rolled back (the server went away) is closed, and the pool opens a new one."""
        raw = conn.raw
        try:
            if not raw.closed and conn.in_transaction:
                raw.execute("ROLLBACK")
        except Exception:
            raw.close()
        self._pool.putconn(raw)

    def close_all(self) -> None:
        self._pool.close()


def close_pools(url: str | None = None) -> None:
    """Close the PostgreSQL pools this process opened (on ``url`` only, when given): tests,
    before a database is dropped."""
    for p in list(_open_pools):
        if url is None or p.url == url:
            p.close_all()


# per connection (a query the first time; the DSN would cost more to read than the query itself)
_identity_cache: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def _identity_tables(conn: PgConnection) -> frozenset[str]:
    """Tables whose ``id`` is an identity column: an INSERT into them returns its id."""
    found = _identity_cache.get(conn.raw)
    if found is None:
        cur = conn.raw.cursor()
        cur.execute("SELECT table_name FROM information_schema.columns WHERE column_name = 'id' "
                    "AND is_identity = 'YES' AND table_schema = ANY (current_schemas(false))")
        found = _identity_cache[conn.raw] = frozenset(r[0] for r in cur.fetchall())
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
