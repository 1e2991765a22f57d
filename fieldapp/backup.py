"""Backup and restore of a data folder: ``toeline backup DEST`` and ``toeline restore SRC``.

A backup is a folder holding a consistent copy of the database made with SQLite's online
backup (safe while the app is writing), a copy of every photo, and ``manifest.json`` with the
SHA-256 of every file. Restore checks every hash first and refuses a backup that does not
match its manifest, so a damaged or edited backup is never restored.
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

from fieldapp import db

MANIFEST = "manifest.json"
DB_NAME = "toeline.sqlite3"


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
    finally:
        dst.close()
        src.close()
    photos = data_dir / "photos"
    if photos.is_dir():
        # Photo files appear through ".tmp-*" files renamed into place (fieldapp.photos); an
        # upload during the backup would make such a file vanish mid-copy. Finished files are
        # never removed, and the database was copied first, so its photos are all here.
        shutil.copytree(photos, dest / "photos", ignore=shutil.ignore_patterns(".tmp-*"))
    files = {}
    for path in sorted(dest.rglob("*")):
        if path.is_file() and path.name != MANIFEST:
            files[path.relative_to(dest).as_posix()] = sha256_file(path)
    manifest = {
        "made_at": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "schema_version": schema,
        "files": files,
    }
    (dest / MANIFEST).write_text(json.dumps(manifest, indent=1, sort_keys=True))
    return manifest


def check_backup(src: Path) -> list[str]:
    """Every problem with a backup folder: missing manifest, missing, extra or changed files."""
    src = Path(src)
    manifest_path = src / MANIFEST
    if not manifest_path.exists():
        return [f"{src} has no {MANIFEST}"]
    try:
        manifest = json.loads(manifest_path.read_text())
        files = manifest["files"]
    except (ValueError, KeyError, TypeError):
        return [f"{MANIFEST} cannot be read"]
    problems = []
    if DB_NAME not in files:
        problems.append(f"the manifest lists no {DB_NAME}")
    for rel, expected in files.items():
        path = src / rel
        if ".." in Path(rel).parts or not path.is_file():
            problems.append(f"{rel} is missing")
        elif sha256_file(path) != expected:
            problems.append(f"{rel} does not match its SHA-256 in the manifest")
    present = {p.relative_to(src).as_posix() for p in src.rglob("*") if p.is_file()}
    for rel in sorted(present - set(files) - {MANIFEST}):
        problems.append(f"{rel} is not in the manifest")
    return problems


def restore_backup(src: Path, data_dir: Path, force: bool = False) -> None:
    """Restore a checked backup into ``data_dir``; refuses a backup whose hashes do not match.

    An existing database is kept unless ``force``; then it is moved aside (never deleted) to
    ``toeline.sqlite3.before-restore-<time>``.
    """
    src, data_dir = Path(src), Path(data_dir)
    problems = check_backup(src)
    if problems:
        raise ValueError("backup refused: " + "; ".join(problems[:5]))
    data_dir.mkdir(parents=True, exist_ok=True)
    target = data_dir / DB_NAME
    if target.exists():
        if not force:
            raise ValueError(f"{target} exists: restore with --force to move it aside")
        stamp = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%S")
        for suffix in ("", "-wal", "-shm"):
            old = data_dir / (DB_NAME + suffix)
            if old.exists():
                old.rename(data_dir / f"{DB_NAME}{suffix}.before-restore-{stamp}")
    tmp = data_dir / (DB_NAME + ".restoring")
    shutil.copy2(src / DB_NAME, tmp)
    with open(tmp, "rb") as fh:
        os.fsync(fh.fileno())
    os.replace(tmp, target)
    photos_src = src / "photos"
    if photos_src.is_dir():
        for path in photos_src.rglob("*"):
            if path.is_file():
                out = data_dir / "photos" / path.relative_to(photos_src)
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
