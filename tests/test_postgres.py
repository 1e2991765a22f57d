"""The PostgreSQL backend (fieldapp.db): the sqlite3-shaped connection, the append-only triggers,
the audit chain under concurrent writers, ``toeline migrate-to`` and a pg_dump backup.

The query-translation and row tests run on both runs (they need no server); the rest needs
``TOELINE_TEST_DATABASE_URL`` (the PostgreSQL run of .ci/run) and is skipped without it.
"""

from __future__ import annotations

import shutil
import sqlite3
import subprocess
import threading
from pathlib import Path

import pytest
from click.testing import CliRunner

from fieldapp import create_app, db, demo, photostore
from fieldapp.cli import main
from fieldapp.queries import audit, projects

PG_BIN = Path("/usr/lib/postgresql/15/bin")
postgres = pytest.mark.postgres


# -- translation and rows: no server needed ---------------------------------------------------

def test_placeholders_become_psycopg_ones_outside_literals_only():
    text, returns_id = db._pg_sql("SELECT * FROM t WHERE a = ? AND b LIKE '%?%' AND c = :c AND d::text = ?",
                                  True, frozenset())
    assert text == "SELECT * FROM t WHERE a = %s AND b LIKE '%%?%%' AND c = %(c)s AND d::text = %s"
    assert returns_id is False
    # no parameters: psycopg sends the text as it is, so nothing is escaped
    assert db._pg_sql("SELECT '%' || 'x'", False, frozenset()) == ("SELECT '%' || 'x'", False)


def test_insert_into_a_table_with_an_identity_id_returns_it():
    tables = frozenset({"projects"})
    assert db._pg_sql("INSERT INTO projects (name) VALUES (?)", True, tables) == (
        "INSERT INTO projects (name) VALUES (%s) RETURNING id", True)
    assert db._pg_sql("INSERT INTO memberships (a, b) VALUES (?, ?)", True, tables)[1] is False
    assert db._pg_sql("INSERT INTO projects (name) VALUES (?) RETURNING name", True, tables)[1] is False


def test_rows_read_by_index_and_name_as_sqlite3_rows_do():
    row = db.Row((7, "P1", None), {"id": 0, "mark": 1, "cap_id": 2})
    assert row[0] == 7 and row["mark"] == "P1" and row["cap_id"] is None
    assert row.keys() == ["id", "mark", "cap_id"] and list(row) == [7, "P1", None] and len(row) == 3
    assert dict(zip(row.keys(), row, strict=True)) == {"id": 7, "mark": "P1", "cap_id": None}
    with pytest.raises(KeyError):
        row["nope"]


def test_postgres_errors_are_what_the_sqlite_callers_catch():
    assert issubclass(db.PgIntegrityError, sqlite3.IntegrityError)
    assert issubclass(db.PgOperationalError, sqlite3.OperationalError)
    full = db.PgOperationalError("could not extend file: No space left on device")
    full.sqlstate = "53100"
    assert db.storage_fault(full) == (507, db.DISK_FULL_MESSAGE)
    read_only = db.PgOperationalError("cannot execute INSERT in a read-only transaction")
    read_only.sqlstate = "25006"
    assert db.storage_fault(read_only) == (503, db.READ_ONLY_MESSAGE)


def test_a_postgresql_variant_exists_for_every_migration_that_needs_one():
    """Every shared migration that creates a table (SQLite's INTEGER PRIMARY KEY, REAL) or a
    trigger has its PostgreSQL variant under migrations/pg/."""
    sqlite_files = {name: sql for _, name, sql in db.migration_files()}
    pg_files = {name: sql for _, name, sql in db.migration_files("postgresql")}
    assert sqlite_files.keys() == pg_files.keys()
    def code(sql: str) -> str:
        return "\n".join(line.split("--")[0] for line in sql.splitlines())

    for name, sql in sqlite_files.items():
        if any(word in code(sql) for word in ("INTEGER PRIMARY KEY", "CREATE TRIGGER", " REAL")):
            pg = code(pg_files[name])
            assert pg != code(sql), f"{name} needs a PostgreSQL variant in migrations/pg/"
            assert "INTEGER PRIMARY KEY" not in pg and " REAL" not in pg, name


# -- on a PostgreSQL server --------------------------------------------------------------------

@postgres
def test_app_runs_on_postgres_with_migrations_applied_once(app, database_url):
    assert app.config["DATABASE"] == database_url
    with app.app_context():
        conn = db.get_db()
        assert isinstance(conn, db.PgConnection)
        assert db.schema_version(conn) == max(n for n, _, _ in db.migration_files())
        assert db.migrate(conn) == []
        # REAL columns are 8-byte floats, as in SQLite
        kinds = dict(conn.execute("SELECT column_name, data_type FROM information_schema.columns "
                                  "WHERE table_name = 'piles'", (), None).fetchall())
        assert kinds["easting_m"] == "double precision" and kinds["id"] == "bigint"


@postgres
def test_append_only_triggers_refuse_update_delete_and_truncate(app, people, database_url):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            audit.append(conn, people["own"], "someone", "record saved", "P1", {"version": 1})
    conn = db.connect(database_url)
    try:
        for sql in ("UPDATE audit_log SET actor = 'x'", "DELETE FROM audit_log", "TRUNCATE audit_log"):
            with pytest.raises(sqlite3.IntegrityError, match="append-only"):
                conn.execute(sql)
        assert conn.execute("SELECT COUNT(*) FROM audit_log").fetchone()[0] == 1
    finally:
        conn.close()


@postgres
def test_verify_audit_finds_an_edited_row_on_postgres(app, people, database_url):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            for i in range(4):
                audit.append(conn, people["own"], "someone", "record saved", f"P{i}", {"version": i + 1})
    runner = CliRunner()
    ok = runner.invoke(main, ["--data", app.config["DATA_DIR"], "verify-audit", str(people["own"])])
    assert ok.exit_code == 0 and "intact, 4 entries" in ok.output, ok.output
    conn = db.connect(database_url)
    try:  # an attacker with the database's owner role: drop the trigger, edit a row
        conn.execute("ALTER TABLE audit_log DISABLE TRIGGER audit_no_update")
        conn.execute("UPDATE audit_log SET payload_json = '{\"version\":99}' WHERE project_id = ? AND seq = 3",
                     (people["own"],))
    finally:
        conn.close()
    broken = runner.invoke(main, ["--data", app.config["DATA_DIR"], "verify-audit", str(people["own"])])
    assert broken.exit_code == 1 and "altered" in broken.output, broken.output


@postgres
def test_sixteen_concurrent_writers_never_fork_the_chain(app, people, database_url):
    """16 threads, each on its own connection (as 16 server processes would be), append to two
    chains at once; every entry lands in one place: seq 1..n with no gap and no repeat, and the
    chains verify."""
    per_writer, writers = 15, 16
    own, other = people["own"], people["other"]
    with app.app_context():
        start = {pid: audit.head(db.get_db(), pid)[0] for pid in (own, other)}
    errors: list[BaseException] = []
    go = threading.Barrier(writers)

    def write(index: int) -> None:
        conn = db.connect(database_url)
        try:
            go.wait()
            for n in range(per_writer):
                with db.write(conn):
                    pid = own if (index + n) % 2 else other
                    head = audit.head(conn, pid)[0]  # a read-then-write inside the transaction
                    audit.append(conn, pid, f"writer {index}", "record saved", f"P{index}",
                                 {"n": n, "seen_head": head})
        except BaseException as exc:
            errors.append(exc)
        finally:
            conn.close()

    threads = [threading.Thread(target=write, args=(i,)) for i in range(writers)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    assert errors == []
    with app.app_context():
        conn = db.get_db()
        total = 0
        for pid in (own, other):
            seqs = [r[0] for r in conn.execute("SELECT seq FROM audit_log WHERE project_id = ? ORDER BY seq",
                                               (pid,)).fetchall()]
            assert seqs == list(range(1, len(seqs) + 1))
            report = audit.verify_chain(conn, pid)
            assert report.ok, report.problem
            total += len(seqs) - start[pid]
        assert total == writers * per_writer


@postgres
def test_pg_dump_backup_restores_every_row_and_the_chain(app, people, database_url, pg_server, tmp_path):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            for i in range(5):
                audit.append(conn, people["own"], "someone", "record saved", f"P{i}", {"version": i + 1})
        counts = {t: conn.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0]
                  for t in ("users", "projects", "memberships", "audit_log", "rule_sets")}
        head = audit.head_hash(conn, people["own"])
    dump = tmp_path / "toeline.dump"
    subprocess.run([str(PG_BIN / "pg_dump"), "--format=custom", f"--file={dump}", database_url], check=True)
    restored_name = "toeline_test_restored"
    pg_server.admin(f"DROP DATABASE IF EXISTS {restored_name} WITH (FORCE)")
    pg_server.admin(f"CREATE DATABASE {restored_name}")
    restored_url = pg_server.url(restored_name)
    try:
        subprocess.run([str(PG_BIN / "pg_restore"), "--exit-on-error", "--no-owner", f"--dbname={restored_url}",
                        str(dump)], check=True)
        back = create_app({"TESTING": True, "DATABASE_URL": restored_url, "DATA_DIR": str(tmp_path / "b")})
        with back.app_context():
            conn = db.get_db()
            assert {t: conn.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0] for t in counts} == counts
            report = audit.verify_chain(conn, people["own"])
            assert report.ok and report.head == head
            with pytest.raises(sqlite3.IntegrityError, match="append-only"):
                conn.execute("DELETE FROM audit_log")
            with db.write(conn):  # the identity carries on after the restored ids
                new_id = projects.create(conn, "After restore")
            assert new_id > max(people["own"], people["other"])
    finally:
        db.close_pools()
        pg_server.admin(f"DROP DATABASE IF EXISTS {restored_name} WITH (FORCE)")


@pytest.fixture(scope="module")
def laptop_template(tmp_path_factory):
    """A site laptop's data folder (SQLite) holding the demo project, records, photos and sign-offs."""
    folder = tmp_path_factory.mktemp("laptop") / "data"
    with pytest.MonkeyPatch.context() as mp:
        mp.delenv(db.DATABASE_URL_ENV, raising=False)
        app = create_app({"TESTING": True}, data_dir=folder)
        assert not db.is_postgres(app.config["DATABASE"])
        with app.app_context():
            demo.build(app)
    return folder


def _laptop(tmp_path, laptop_template, monkeypatch) -> Path:
    folder = tmp_path / "laptop"
    shutil.copytree(laptop_template, folder)
    monkeypatch.delenv(db.DATABASE_URL_ENV)  # the laptop itself runs on SQLite
    return folder


def _table_counts(conn, project_id: int) -> dict[str, int]:
    from fieldapp import migrate_to

    return {t: conn.execute(sql, (project_id,)).fetchone()[0] for t, sql in migrate_to._COUNT.items()}


@postgres
def test_migrate_to_moves_a_site_and_verifies_it_then_refuses_to_move_it_again(
        tmp_path, laptop_template, database_url, monkeypatch):
    laptop = _laptop(tmp_path, laptop_template, monkeypatch)
    server_photos = tmp_path / "server-photos"
    runner = CliRunner()
    moved = runner.invoke(main, ["--data", str(laptop), "migrate-to", database_url,
                                 "--photo-store", str(server_photos)])
    assert moved.exit_code == 0, moved.output
    assert "every row count matches and every chain verifies" in moved.output

    src = db.connect(laptop / "toeline.sqlite3")
    dst = db.connect(database_url)
    try:
        pid = src.execute("SELECT id FROM projects").fetchone()[0]
        want = _table_counts(src, pid)
        assert want["pile_records"] > 0 and want["photos"] > 0 and want["audit_log"] > 0
        assert _table_counts(dst, pid) == want
        assert audit.verify_chain(dst, pid).ok
        assert audit.head_hash(dst, pid) == audit.head_hash(src, pid)
        for photo in src.execute("SELECT sha256, format FROM photos").fetchall():
            for key in photostore.photo_keys(photo["sha256"], photo["format"]):
                assert (server_photos / key).read_bytes() == (laptop / "photos" / key).read_bytes()
        before = _table_counts(dst, pid)
    finally:
        src.close()
        dst.close()

    again = runner.invoke(main, ["--data", str(laptop), "migrate-to", database_url,
                                 "--photo-store", str(server_photos)])
    assert again.exit_code != 0 and "already exists on the server" in again.output, again.output
    dst = db.connect(database_url)
    try:
        assert _table_counts(dst, pid) == before  # nothing overwritten, nothing added
    finally:
        dst.close()

    # the server serves the moved site: the demo engineer signs in with the laptop's password
    monkeypatch.setenv(db.DATABASE_URL_ENV, database_url)
    server = create_app({"TESTING": True, "WTF_CSRF_ENABLED": False, "DATA_DIR": str(tmp_path / "server"),
                         "PHOTO_DIR": str(server_photos)})
    client = server.test_client()
    email, _, password = next(login for login in demo.LOGINS if login[1] == "engineer")
    assert client.post("/login", data={"email": email, "password": password}).status_code == 302
    listing = client.get(f"/api/v1/projects/{pid}/piles")
    assert listing.status_code == 200 and len(listing.get_json()["piles"]) == want["piles"]


@postgres
def test_migrate_to_refuses_a_project_id_taken_on_the_server_and_writes_nothing(
        tmp_path, laptop_template, database_url, monkeypatch):
    laptop = _laptop(tmp_path, laptop_template, monkeypatch)
    dst = db.connect(database_url)
    try:
        with db.write(dst):
            other = projects.create(dst, "Another site's job")
            audit.append(dst, other, "cli", "project created", "Another site's job", {})
        counts = {t: dst.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0]
                  for t in ("projects", "piles", "pile_records", "audit_log", "users")}
    finally:
        dst.close()
    result = CliRunner().invoke(main, ["--data", str(laptop), "migrate-to", database_url,
                                       "--photo-store", str(tmp_path / "server-photos")])
    assert result.exit_code != 0
    assert f"the server already has a project with id {other}" in result.output, result.output
    dst = db.connect(database_url)
    try:
        assert {t: dst.execute(f"SELECT COUNT(*) FROM {t}").fetchone()[0] for t in counts} == counts
    finally:
        dst.close()
    assert not (tmp_path / "server-photos").exists()  # refused before any file was copied


def _migrate_at_once(connect, n: int = 4) -> list[list[str]]:
    """``n`` server processes starting together: each opens a connection and migrates."""
    results: list = [None] * n
    go = threading.Barrier(n)

    def start(i: int) -> None:
        conn = connect()
        try:
            go.wait()
            results[i] = db.migrate(conn)
        except BaseException as exc:
            results[i] = exc
        finally:
            conn.close()

    threads = [threading.Thread(target=start, args=(i,)) for i in range(n)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=120)
    return results


def test_workers_starting_together_apply_each_sqlite_migration_once(tmp_path):
    results = _migrate_at_once(lambda: db.connect(tmp_path / "toeline.sqlite3"))
    assert not [r for r in results if isinstance(r, BaseException)], results
    applied = sorted(name for r in results for name in r)
    assert applied == sorted(name for _, name, _ in db.migration_files())


@postgres
def test_workers_starting_together_apply_each_postgres_migration_once(pg_server):
    name = "toeline_test_fresh"
    pg_server.admin(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")
    pg_server.admin(f"CREATE DATABASE {name}")
    try:
        results = _migrate_at_once(lambda: db.connect(pg_server.url(name)))
        assert not [r for r in results if isinstance(r, BaseException)], results
        applied = sorted(n for r in results for n in r)
        assert applied == sorted(n for _, n, _ in db.migration_files("postgresql"))
    finally:
        pg_server.admin(f"DROP DATABASE IF EXISTS {name} WITH (FORCE)")
