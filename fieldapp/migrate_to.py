"""``toeline migrate-to DATABASE_URL``: move a site laptop's projects up to the company server.

Copies every project of the laptop's database (its set-up, piles, every record version, photos,
sign-offs, amendments, members and its audit chain) and the photo files into the server's
database and photo store, then reads the far side back: every row count per project and table
must match and every copied audit chain must verify and end at the same head hash.

It refuses, before anything is written:

* a project that already exists on the server: the same first audit entry (the same project,
  moved before) or the same project id (the audit chain's hashes include the project id, so a
  project keeps its id on the server; a clash is named, with the way out);
* a laptop chain that does not verify, a photo file that is missing or whose bytes do not match
  its SHA-256, a server on an older or newer schema.

All database rows go in one transaction on the server: the move lands whole or not at all.
Photo files go first (content-addressed, so a file already there with the right bytes is kept);
a move refused after that leaves only files that ``toeline photos prune`` removes.

Not moved: sessions and failed logins (they belong to the laptop's sign-ins), the laptop's
site-wide audit chain (the server keeps its own), and built record PDFs (build them again on the
server; the record jobs list starts empty there).
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, field
from typing import Any, Callable
from urllib.parse import urlsplit

import click

from fieldapp import db, photostore
from fieldapp.queries import audit

# (table, the query giving the project's rows in an order that keeps references backwards,
#  {column: the table whose new ids it takes})
_TABLES: tuple[tuple[str, str, dict[str, str]], ...] = (
    ("rule_sets", "SELECT * FROM rule_sets WHERE project_id = ? ORDER BY id", {"created_by": "users"}),
    ("ground_models", "SELECT * FROM ground_models WHERE project_id = ? ORDER BY id", {}),
    ("layers", "SELECT l.* FROM layers l JOIN ground_models g ON g.id = l.ground_model_id "
               "WHERE g.project_id = ? ORDER BY l.id", {"ground_model_id": "ground_models"}),
    ("caps", "SELECT * FROM caps WHERE project_id = ? ORDER BY id", {}),
    ("piles", "SELECT * FROM piles WHERE project_id = ? ORDER BY id",
     {"cap_id": "caps", "ground_model_id": "ground_models"}),
    ("pile_records", "SELECT * FROM pile_records WHERE project_id = ? ORDER BY id",
     {"pile_id": "piles", "created_by": "users"}),
    ("photos", "SELECT * FROM photos WHERE project_id = ? ORDER BY id",
     {"pile_id": "piles", "uploaded_by": "users"}),
    ("signoffs", "SELECT * FROM signoffs WHERE project_id = ? ORDER BY id",
     {"pile_id": "piles", "signed_by": "users", "remedial_of": "signoffs"}),
    ("amendments", "SELECT * FROM amendments WHERE project_id = ? ORDER BY id",
     {"pile_id": "piles", "amended_by": "users"}),
    ("memberships", "SELECT * FROM memberships WHERE project_id = ? ORDER BY user_id", {"user_id": "users"}),
    ("audit_log", "SELECT * FROM audit_log WHERE project_id = ? ORDER BY seq", {}),
)
_COUNT = {name: f"SELECT COUNT(*) FROM ({sql}) AS t" for name, sql, _ in _TABLES}


class MoveRefused(Exception):
    """The move cannot be made; nothing was written to the server's database."""


@dataclass
class MoveReport:
    """What was moved: per project id, the row count per table; photo files copied and kept."""

    projects: dict[int, dict[str, int]] = field(default_factory=dict)
    names: dict[int, str] = field(default_factory=dict)
    users_added: list[str] = field(default_factory=list)
    users_existing: list[str] = field(default_factory=list)
    files_copied: int = 0
    files_present: int = 0
    heads: dict[int, str] = field(default_factory=dict)


def _first_hash(conn, project_id: int) -> str | None:
    row = conn.execute("SELECT hash FROM audit_log WHERE project_id = ? AND seq = 1", (project_id,)).fetchone()
    return row[0] if row else None


def _counts(conn, project_id: int) -> dict[str, int]:
    return {name: int(conn.execute(sql, (project_id,)).fetchone()[0]) for name, sql in _COUNT.items()}


def check_move(src, dst, project_ids: list[int], photo_src: photostore.PhotoStore) -> list[str]:
    """Every reason the move cannot be made (empty: it can). Reads only."""
    problems = []
    if db.schema_version(src) != db.schema_version(dst):
        problems.append(f"the laptop's database is at schema version {db.schema_version(src)}, the "
                        f"server's at {db.schema_version(dst)}: update Toeline on both to the same version")
    for pid in project_ids:
        project = src.execute("SELECT * FROM projects WHERE id = ?", (pid,)).fetchone()
        if project is None:
            problems.append(f"project {pid} is not on the laptop")
            continue
        label = f"project {pid} ({project['name']})"
        report = audit.verify_chain(src, pid)
        if not report.ok:
            problems.append(f"{label}: its audit chain on the laptop is broken ({report.problem}); "
                            "run toeline verify-audit and resolve that first")
        first = _first_hash(src, pid)
        if first and dst.execute("SELECT 1 FROM audit_log WHERE hash = ?", (first,)).fetchone():
            problems.append(f"{label} already exists on the server (its audit chain starts with the same "
                            "entry): it was moved before; nothing is overwritten")
        elif dst.execute("SELECT 1 FROM projects WHERE id = ?", (pid,)).fetchone():
            problems.append(f"{label}: the server already has a project with id {pid}; a project keeps its "
                            "id on the server because its audit chain's hashes include it. Move it to a "
                            "server database that has no project of that id")
        for photo in src.execute("SELECT sha256, format FROM photos WHERE project_id = ?", (pid,)).fetchall():
            for key in photostore.photo_keys(photo["sha256"], photo["format"]):
                if not photo_src.exists(key):
                    problems.append(f"{label}: photo file {key} is missing on the laptop")
            original = photostore.original_key(photo["sha256"], photo["format"])
            if photo_src.exists(original) and hashlib.sha256(photo_src.get(original)).hexdigest() != photo["sha256"]:
                problems.append(f"{label}: photo file {original} does not match its SHA-256")
    return problems


def _copy_photos(src, project_ids, photo_src, photo_dst, report: MoveReport) -> None:
    for pid in project_ids:
        for photo in src.execute("SELECT sha256, format FROM photos WHERE project_id = ?", (pid,)).fetchall():
            for key in photostore.photo_keys(photo["sha256"], photo["format"]):
                data = photo_src.get(key)
                if photo_dst.exists(key) and photo_dst.get(key) == data:
                    report.files_present += 1
                    continue
                photo_dst.put(key, data)
                report.files_copied += 1


def _insert(dst, table: str, row: dict[str, Any]) -> int | None:
    names = list(row)
    cur = dst.execute(f"INSERT INTO {table} ({', '.join(names)}) VALUES ({', '.join('?' * len(names))})",
                      tuple(row[n] for n in names))
    return cur.lastrowid


def _copy_project(src, dst, pid: int, user_ids: dict[int, int]) -> None:
    project = src.execute("SELECT * FROM projects WHERE id = ?", (pid,)).fetchone()
    _insert(dst, "projects", dict(zip(project.keys(), project, strict=True)))  # with its id: the audit chain's hashes include it
    new_ids: dict[str, dict[int, int]] = {"users": user_ids}
    for table, sql, refs in _TABLES:
        mapping = new_ids.setdefault(table, {})
        for source_row in src.execute(sql, (pid,)).fetchall():
            row = dict(zip(source_row.keys(), source_row, strict=True))
            old_id = row.pop("id", None)
            for column, target in refs.items():
                if row.get(column) is not None:
                    row[column] = new_ids[target][row[column]]
            new_id = _insert(dst, table, row)
            if old_id is not None:
                mapping[old_id] = new_id


def _copy_users(src, dst, project_ids, report: MoveReport) -> dict[int, int]:
    """Laptop user id -> server user id; a user the server knows by email keeps the server's
    password and role."""
    out = {}
    marks = ",".join("?" * len(project_ids))
    wanted = src.execute(
        "SELECT DISTINCT u.* FROM users u WHERE u.id IN (SELECT user_id FROM memberships WHERE project_id IN "
        f"({marks})) OR u.id IN (SELECT created_by FROM pile_records WHERE project_id IN ({marks})) "
        f"OR u.id IN (SELECT uploaded_by FROM photos WHERE project_id IN ({marks})) "
        f"OR u.id IN (SELECT signed_by FROM signoffs WHERE project_id IN ({marks})) "
        f"OR u.id IN (SELECT amended_by FROM amendments WHERE project_id IN ({marks})) "
        f"OR u.id IN (SELECT created_by FROM rule_sets WHERE project_id IN ({marks})) ORDER BY u.id",
        tuple(project_ids) * 6).fetchall()
    for user in wanted:
        there = dst.execute("SELECT id FROM users WHERE email = ?", (user["email"],)).fetchone()
        if there:
            out[user["id"]] = there[0]
            report.users_existing.append(user["email"])
            continue
        row = dict(zip(user.keys(), user, strict=True))
        row.pop("id")
        out[user["id"]] = _insert(dst, "users", row)
        report.users_added.append(user["email"])
    return out


def _verify(src, dst, project_ids, report: MoveReport) -> list[str]:
    problems = []
    for pid in project_ids:
        want, got = _counts(src, pid), _counts(dst, pid)
        for table in want:
            if want[table] != got[table]:
                problems.append(f"project {pid}: {table} has {got[table]} rows on the server, "
                                f"{want[table]} on the laptop")
        chain = audit.verify_chain(dst, pid)
        if not chain.ok:
            problems.append(f"project {pid}: the audit chain does not verify on the server: {chain.problem}")
        elif chain.head != audit.head_hash(src, pid):
            problems.append(f"project {pid}: the server's chain ends at {chain.head}, the laptop's "
                            f"at {audit.head_hash(src, pid)}")
        report.projects[pid] = got
        report.heads[pid] = chain.head
    return problems


def move(src, dst, photo_src: photostore.PhotoStore, photo_dst: photostore.PhotoStore,
         project_ids: list[int] | None = None, verify_again: Callable[[], Any] | None = None) -> MoveReport:
    """Move projects (all when ``project_ids`` is None) from ``src`` to ``dst`` (connections).

    Raises MoveRefused with every reason when the move cannot be made or the far side does not
    read back the same; nothing is then committed to ``dst``. ``verify_again`` may return a fresh
    connection to the server to check the committed move once more."""
    if project_ids is None:
        project_ids = [r[0] for r in src.execute("SELECT id FROM projects ORDER BY id").fetchall()]
    if not project_ids:
        raise MoveRefused("the laptop's database holds no project")
    problems = check_move(src, dst, project_ids, photo_src)
    if problems:
        raise MoveRefused("\n".join(problems))
    report = MoveReport(names={pid: src.execute("SELECT name FROM projects WHERE id = ?", (pid,)).fetchone()[0]
                               for pid in project_ids})
    _copy_photos(src, project_ids, photo_src, photo_dst, report)
    with db.write(dst):
        user_ids = _copy_users(src, dst, project_ids, report)
        for pid in project_ids:
            _copy_project(src, dst, pid, user_ids)
        if isinstance(dst, db.PgConnection):  # explicit ids were given: move the identity on past them
            dst.execute("SELECT setval(pg_get_serial_sequence('projects', 'id'), "
                        "(SELECT MAX(id) FROM projects))")
        problems = _verify(src, dst, project_ids, report)
        if problems:
            raise MoveRefused("the server did not read back what was sent (nothing was kept):\n"
                              + "\n".join(problems))
    if verify_again is not None:
        fresh = verify_again()
        try:
            problems = _verify(src, fresh, project_ids, report)
        finally:
            fresh.close()
        if problems:
            raise MoveRefused("after the commit the server reads back differently:\n" + "\n".join(problems))
    return report


def register(main: click.Group) -> None:
    """Add ``migrate-to`` to the ``toeline`` command group."""
    from fieldapp.cli import _app, data_option  # fieldapp.cli imports this module: a cycle otherwise

    @main.command("migrate-to")
    @data_option
    @click.argument("database_url")
    @click.option("--photo-store", "photo_store", envvar=photostore.STORE_ENV, default=None,
                  help="The server's photo store: a folder, or s3://bucket/prefix (also TOELINE_PHOTO_STORE).")
    @click.option("--project", "project_ids", type=int, multiple=True,
                  help="Move only this project id (repeatable; default: every project).")
    @click.pass_context
    def migrate_to(ctx, data_dir, database_url, photo_store, project_ids):
        """Copy this data folder's projects and photos to a company server (DATABASE_URL) and check
        every row count and audit chain there. Refuses a project the server already has."""
        if not db.is_postgres(database_url):
            raise click.ClickException("DATABASE_URL must be postgresql://user@host:port/database")
        if not photo_store:
            raise click.ClickException("say where the server keeps photos: --photo-store FOLDER or s3://...")
        app = _app(ctx, data_dir)
        if db.is_postgres(app.config["DATABASE"]) and app.config["DATABASE"] == database_url:
            raise click.ClickException("the data folder already uses that database")
        photo_src = photostore.DirectoryStore(app.config["PHOTO_DIR"])
        photo_dst = photostore.open_store(photo_store)
        src = db.connect(app.config["DATABASE"])
        dst = db.connect(database_url)
        try:
            db.migrate(dst)
            report = move(src, dst, photo_src, photo_dst, list(project_ids) or None,
                          verify_again=lambda: db.connect(database_url))
        except MoveRefused as exc:
            raise click.ClickException(f"nothing moved:\n{exc}") from exc
        finally:
            src.close()
            dst.close()
        for pid, counts in report.projects.items():
            rows = ", ".join(f"{t} {n}" for t, n in counts.items())
            click.echo(f"project {pid} ({report.names[pid]}): {rows}; audit chain intact, head {report.heads[pid]}")
        click.echo(f"users added {len(report.users_added)}, already on the server {len(report.users_existing)} "
                   "(they keep the server's password and role)")
        click.echo(f"photo files copied {report.files_copied}, already there {report.files_present}")
        click.echo(f"moved to {_safe(database_url)}: every row count matches and every chain verifies")


def _safe(url: str) -> str:
    """The URL without a password."""
    parts = urlsplit(url)
    host = parts.hostname or ""
    port = f":{parts.port}" if parts.port else ""
    user = f"{parts.username}@" if parts.username else ""
    return f"{parts.scheme}://{user}{host}{port}{parts.path}"

