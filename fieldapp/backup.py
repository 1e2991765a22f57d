"""Backup and restore of a data folder: ``toeline backup DEST`` and ``toeline restore SRC``.

A backup is a folder holding a consistent copy of the database made with SQLite's online
backup (safe while the app is writing), a copy of every photo, and ``manifest.json`` with the
SHA-256 of every file and the head (seq, hash) of every audit chain. The same heads are kept
in the data folder (``anchors/``) as anchors for ``toeline verify-audit``.

Restore trusts nothing it has not checked: every hash of the manifest, no absolute path, no
``..`` and no link anywhere in the backup, then the database itself before it becomes live
(SQLite's integrity check, every audit chain and the manifest's heads, every row against the
content hash its entry carries, every photo file against its SHA-256). It holds the data
folder's lock (fieldapp.datalock) and refuses while a server holds it.
"""

from __future__ import annotations

import hashlib
import json
import os
import shutil
import sqlite3
from datetime import datetime, timezone
from pathlib import Path

import click

from fieldapp import datalock, db, photos
from fieldapp.queries import audit

MANIFEST = "manifest.json"
DB_NAME = "toeline.sqlite3"
ANCHOR_DIR = "anchors"
# Folders of evidence kept by content hash beside the database: photos, AGS4 files, layout
# drawings, the result files of tests after installation.
EVIDENCE_DIRS = ("photos", "ags", "layouts", "test_files")


def sha256_file(path: Path) -> str:
    """SHA-256 (hex) of a file, read in 1 MiB blocks."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def make_backup(data_dir: Path, dest: Path) -> dict:
    """Copy the database (online backup) and photos of ``data_dir`` into ``dest``.

    ``dest`` must not exist or be empty. Returns the manifest written.
    """
    data_dir, dest = Path(data_dir), Path(dest)
    if dest.exists() and any(dest.iterdir()):
        raise ValueError(f"backup folder {dest} is not empty")
    source_db = data_dir / DB_NAME
    if not source_db.exists():
        raise ValueError(f"no database in {data_dir}")
    dest.mkdir(parents=True, exist_ok=True)
    src = db.connect(source_db)
    dst = sqlite3.connect(str(dest / DB_NAME))
    try:
        src.backup(dst)
        schema = dst.execute("PRAGMA user_version").fetchone()[0]
        dst.execute("PRAGMA journal_mode = DELETE")
        dst.row_factory = sqlite3.Row
        heads = _heads_json(audit.heads(dst))
    finally:
        dst.close()
        src.close()
    for folder in EVIDENCE_DIRS:
        # Evidence files appear through ".tmp-*" files renamed into place (fieldapp.photos,
        # fieldapp.ags_io); an upload during the backup would make such a file vanish mid-copy.
        # Finished files are never removed, and the database was copied first, so every file
        # it names is here.
        if (data_dir / folder).is_dir():
            shutil.copytree(data_dir / folder, dest / folder, ignore=shutil.ignore_patterns(".tmp-*"))
    files = {}
    for path in sorted(dest.rglob("*")):
        if path.is_file() and path.name != MANIFEST:
            files[path.relative_to(dest).as_posix()] = sha256_file(path)
    manifest = {
        "made_at": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "schema_version": schema,
        "files": files,
        "audit_heads": heads,
    }
    text = json.dumps(manifest, indent=1, sort_keys=True)
    (dest / MANIFEST).write_text(text)
    # The heads only (not the file list, which grows with the photos), and which manifest they
    # came from, kept in the data folder as anchors for verify-audit.
    anchors = data_dir / ANCHOR_DIR
    anchors.mkdir(exist_ok=True)
    stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%S%f")
    (anchors / f"backup-{stamp}.json").write_text(json.dumps({
        "made_at": manifest["made_at"], "backup": str(dest.resolve()), "audit_heads": heads,
        "manifest_sha256": hashlib.sha256(text.encode("utf-8")).hexdigest()}, indent=1, sort_keys=True))
    return manifest


def _heads_json(heads: dict) -> list[dict]:
    return [{"project_id": chain, "seq": seq, "hash": digest} for chain, (seq, digest) in heads.items()]


def manifest_anchors(manifest: dict, source: str) -> list[audit.Anchor]:
    """The audit heads a backup manifest kept, as anchors (none for a manifest made before)."""
    out = []
    for item in manifest.get("audit_heads") or []:
        try:
            chain = item["project_id"]
            seq, digest = item["seq"], item["hash"]
        except (KeyError, TypeError):
            continue
        if (chain is None or isinstance(chain, int)) and isinstance(seq, int) and isinstance(digest, str):
            out.append(audit.Anchor(source, chain, seq, digest))
    return out


def folder_anchors(data_dir: Path) -> tuple[list[audit.Anchor], list[str]]:
    """(anchors, problems) from the backup manifests kept in the data folder's ``anchors/``."""
    out, problems = [], []
    folder = Path(data_dir) / ANCHOR_DIR
    for path in sorted(folder.glob("backup-*.json")) if folder.is_dir() else []:
        try:
            manifest = json.loads(path.read_text())
        except (OSError, ValueError):
            problems.append(f"{path.name} in {ANCHOR_DIR}/ cannot be read")
            continue
        made = manifest.get("made_at", path.stem) if isinstance(manifest, dict) else path.stem
        out.extend(manifest_anchors(manifest if isinstance(manifest, dict) else {}, f"backup of {made}"))
    return out, problems


def _unsafe_path(rel: str) -> str | None:
    """Why a manifest's path may not be restored (absolute, ``..``, a drive), or None."""
    if not isinstance(rel, str) or not rel or "\\" in rel or "\x00" in rel:
        return "is not a plain relative path"
    path = Path(rel)
    if path.is_absolute() or rel.startswith("/") or (len(rel) > 1 and rel[1] == ":"):
        return "is an absolute path"
    if ".." in path.parts:
        return "climbs out of the backup folder (..)"
    return None


def _links(src: Path) -> list[str]:
    """Every symbolic link (file or folder) inside the backup folder, not followed."""
    out = []
    for root, dirs, files in os.walk(src, followlinks=False):
        for name in dirs + files:
            path = Path(root) / name
            if path.is_symlink():
                out.append(path.relative_to(src).as_posix())
    return out


def check_backup(src: Path) -> list[str]:
    """Every problem with a backup folder's files: a missing or unreadable manifest; a path in it
    that is absolute or climbs out with ``..``; a link anywhere in the folder; missing, extra or
    changed files."""
    src = Path(src)
    manifest_path = src / MANIFEST
    if manifest_path.is_symlink() or not manifest_path.is_file():
        return [f"{src} has no {MANIFEST}"]
    try:
        manifest = json.loads(manifest_path.read_text())
        files = manifest["files"]
        if not isinstance(files, dict):
            raise TypeError
    except (ValueError, KeyError, TypeError, UnicodeDecodeError):
        return [f"{MANIFEST} cannot be read"]
    problems = [f"{rel} is a link: a backup holds plain files only" for rel in _links(src)]
    if DB_NAME not in files:
        problems.append(f"the manifest lists no {DB_NAME}")
    for rel, expected in files.items():
        unsafe = _unsafe_path(rel)
        if unsafe:
            problems.append(f"the manifest path {rel!r} {unsafe}")
            continue
        path = src / rel
        if path.is_symlink() or not path.is_file():
            problems.append(f"{rel} is missing")
        elif sha256_file(path) != expected:
            problems.append(f"{rel} does not match its SHA-256 in the manifest")
    present = {p.relative_to(src).as_posix() for p in src.rglob("*") if p.is_file() and not p.is_symlink()}
    for rel in sorted(present - set(files) - {MANIFEST}):
        problems.append(f"{rel} is not in the manifest")
    return problems


def photo_sha(photo_dir: Path):
    """A function (sha256, format) -> SHA-256 of that photo's original file under ``photo_dir``,
    None when the file is missing or a link."""
    def sha(digest: str, fmt: str) -> str | None:
        path = photos.original_path(photo_dir, digest, fmt)
        if path.is_symlink() or not path.is_file():
            return None
        return sha256_file(path)
    return sha


def check_database(path: Path, photo_dir: Path, anchors: list[audit.Anchor] = ()) -> list[str]:
    """Every problem with a database file before it may become live: not a SQLite database,
    SQLite's integrity check, a broken audit chain, a row that no longer matches (or is missing
    from, or has no entry in) its chain, a photo file that does not match its SHA-256, a chain
    that no longer holds one of ``anchors``."""
    try:
        conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    except sqlite3.Error as exc:
        return [f"{DB_NAME} cannot be opened ({exc})"]
    conn.row_factory = sqlite3.Row
    problems: list[str] = []
    try:
        result = [r[0] for r in conn.execute("PRAGMA integrity_check").fetchall()]
        if result != ["ok"]:
            return [f"{DB_NAME} fails SQLite's integrity check: {'; '.join(result[:3])}"]
        if conn.execute("SELECT 1 FROM sqlite_master WHERE name = 'audit_log'").fetchone() is None:
            return [f"{DB_NAME} is not a Toeline database (no audit trail)"]
        for chain in audit.chains(conn):
            report = audit.verify_chain(conn, chain)
            name = f"project {chain}" if chain is not None else "the site-wide chain"
            if not report.ok:
                problems.append(f"the audit chain of {name} is broken: {report.problem}")
            elif chain is not None:
                coverage = audit.verify_content(conn, chain, photo_sha(photo_dir))
                problems.extend(f"project {chain}: {p}" for p in coverage.problems)
        for anchor in anchors:
            problem = audit.check_anchor(conn, anchor)
            if problem:
                problems.append(problem)
    except sqlite3.DatabaseError as exc:
        return [f"{DB_NAME} is not a readable SQLite database ({exc})"]
    finally:
        conn.close()
    return problems


def restore_backup(src: Path, data_dir: Path, force: bool = False) -> None:
    """Restore a checked backup into ``data_dir``; ValueError naming every problem found.

    Refuses while a server holds the data folder (fieldapp.datalock), and a backup whose files,
    manifest or database do not check out (``check_backup``, ``check_database``): the database
    is copied in under a temporary name, checked there, and only then renamed into place. An
    existing database is kept unless ``force``; then it is moved aside (never deleted) to
    ``toeline.sqlite3.before-restore-<time>``, with the anchors it was checked against.
    """
    src, data_dir = Path(src), Path(data_dir)
    problems = check_backup(src)
    if problems:
        raise ValueError("backup refused: " + "; ".join(problems[:5]))
    manifest = json.loads((src / MANIFEST).read_text())
    data_dir.mkdir(parents=True, exist_ok=True)
    target = data_dir / DB_NAME
    if target.exists() and not force:
        raise ValueError(f"{target} exists: restore with --force to move it aside")
    mine = not datalock.held_here(data_dir)
    try:
        datalock.acquire(data_dir, "restore")
    except datalock.FolderInUse as exc:
        raise ValueError(f"restore refused: {exc}") from None
    try:
        _restore_locked(src, data_dir, manifest)
    finally:
        if mine:
            datalock.release(data_dir)


def _restore_locked(src: Path, data_dir: Path, manifest: dict) -> None:
    target = data_dir / DB_NAME
    tmp = data_dir / (DB_NAME + ".restoring")
    shutil.copy2(src / DB_NAME, tmp)
    with open(tmp, "rb") as fh:
        os.fsync(fh.fileno())
    problems = check_database(tmp, src / "photos", manifest_anchors(manifest, "the backup's manifest"))
    if problems:
        tmp.unlink()
        raise ValueError("backup refused: " + "; ".join(problems[:5])
                         + (f" (and {len(problems) - 5} more)" if len(problems) > 5 else ""))
    stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%S")
    for suffix in ("", "-wal", "-shm"):
        old = data_dir / (DB_NAME + suffix)
        if old.exists():
            old.rename(data_dir / f"{DB_NAME}{suffix}.before-restore-{stamp}")
    if (data_dir / ANCHOR_DIR).is_dir():  # they anchor the database moved aside, not this one
        (data_dir / ANCHOR_DIR).rename(data_dir / f"{ANCHOR_DIR}.before-restore-{stamp}")
    os.replace(tmp, target)
    for folder in EVIDENCE_DIRS:
        folder_src = src / folder
        if not folder_src.is_dir():
            continue
        for path in folder_src.rglob("*"):
            if path.is_file() and not path.is_symlink():
                out = data_dir / folder / path.relative_to(folder_src)
                out.parent.mkdir(parents=True, exist_ok=True)
                if not out.exists():
                    shutil.copy2(path, out)


def register(main) -> None:
    """Add ``toeline backup`` and ``toeline restore`` to the command group."""

    def _data(ctx, data_dir):
        return Path(data_dir or ctx.obj["data"]).resolve()

    @main.command()
    @click.option("--data", "data_dir", default=None, type=click.Path(file_okay=False))
    @click.argument("dest", type=click.Path(file_okay=False))
    @click.pass_context
    def backup(ctx, data_dir, dest):
        """Back up the database (online) and photos to DEST with a SHA-256 manifest."""
        try:
            manifest = make_backup(_data(ctx, data_dir), Path(dest))
        except ValueError as exc:
            raise click.ClickException(str(exc)) from exc
        click.echo(f"backup written to {dest}: {len(manifest['files'])} files")

    @main.command()
    @click.option("--data", "data_dir", default=None, type=click.Path(file_okay=False))
    @click.option("--force", is_flag=True, help="Move an existing database aside and restore.")
    @click.argument("src", type=click.Path(exists=True, file_okay=False))
    @click.pass_context
    def restore(ctx, data_dir, force, src):
        """Restore a backup made by ``toeline backup``; refuses one whose hashes do not match."""
        try:
            restore_backup(Path(src), _data(ctx, data_dir), force)
        except ValueError as exc:
            raise click.ClickException(str(exc)) from exc
        click.echo(f"restored {src}")
