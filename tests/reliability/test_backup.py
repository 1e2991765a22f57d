"""Backup while the app is writing, restore, and refusal of a damaged backup."""

from __future__ import annotations

import sqlite3
import threading
import time

from click.testing import CliRunner

from fieldapp import db
from fieldapp.backup import check_backup, make_backup, restore_backup
from fieldapp.cli import main
from fieldapp.queries import audit


def _writer(path, stop, counter):
    conn = db.connect(path)
    while not stop.is_set():
        with db.write(conn):
            audit.append(conn, None, "writer", "tick", str(counter[0]), {"n": counter[0]})
        counter[0] += 1
    conn.close()


def test_backup_during_writes_is_consistent_and_restores(app, tmp_path):
    data = tmp_path / "data"
    (data / "photos" / "ab").mkdir(parents=True, exist_ok=True)
    (data / "photos" / "ab" / "photo.jpg").write_bytes(b"\xff\xd8 not really a jpeg")
    stop, counter = threading.Event(), [0]
    thread = threading.Thread(target=_writer, args=(app.config["DATABASE"], stop, counter))
    thread.start()
    try:
        deadline = time.monotonic() + 20
        while counter[0] < 20 and time.monotonic() < deadline:
            time.sleep(0.005)
        manifest = make_backup(data, tmp_path / "bk")
    finally:
        stop.set()
        thread.join()
    assert "toeline.sqlite3" in manifest["files"] and "photos/ab/photo.jpg" in manifest["files"]
    assert check_backup(tmp_path / "bk") == []
    copy = sqlite3.connect(str(tmp_path / "bk" / "toeline.sqlite3"))
    assert copy.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    copy.row_factory = sqlite3.Row
    report = audit.verify_chain(copy, None)
    assert report.ok and report.entries >= 20  # a consistent snapshot: the chain is whole
    copy.close()

    restore_backup(tmp_path / "bk", tmp_path / "restored")
    restored = db.connect(tmp_path / "restored" / "toeline.sqlite3")
    assert audit.verify_chain(restored, None).entries == report.entries
    assert (tmp_path / "restored" / "photos" / "ab" / "photo.jpg").exists()


def test_restore_refuses_a_backup_whose_hashes_do_not_match(app, tmp_path):
    data = tmp_path / "data"
    make_backup(data, tmp_path / "bk")
    with open(tmp_path / "bk" / "toeline.sqlite3", "ab") as fh:
        fh.write(b"tampered")
    runner = CliRunner()
    result = runner.invoke(main, ["--data", str(tmp_path / "new"), "restore", str(tmp_path / "bk")])
    assert result.exit_code != 0
    assert "does not match its SHA-256" in result.output
    assert not (tmp_path / "new" / "toeline.sqlite3").exists()


def test_restore_keeps_an_existing_database_unless_forced(app, tmp_path):
    data = tmp_path / "data"
    make_backup(data, tmp_path / "bk")
    runner = CliRunner()
    result = runner.invoke(main, ["--data", str(data), "restore", str(tmp_path / "bk")])
    assert result.exit_code != 0 and "--force" in result.output
    result = runner.invoke(main, ["--data", str(data), "restore", "--force", str(tmp_path / "bk")])
    assert result.exit_code == 0, result.output
    assert any(p.name.startswith("toeline.sqlite3.before-restore-") for p in data.iterdir())


def test_backup_cli_refuses_a_non_empty_destination(app, tmp_path):
    (tmp_path / "full").mkdir()
    (tmp_path / "full" / "x").write_text("x")
    result = CliRunner().invoke(main, ["--data", str(tmp_path / "data"), "backup", str(tmp_path / "full")])
    assert result.exit_code != 0 and "not empty" in result.output


def test_backup_while_photos_are_uploaded_holds_every_photo_of_its_database(demo_data, tmp_path):
    """Photos written (through temporary files and renames) while the backup copies the photo
    folder: the backup must not fail on a file that vanished, and every photo row in the
    backed-up database must have its original, display copy and thumbnail in the backup, with
    the original's SHA-256 as recorded."""
    import hashlib
    import uuid

    from reliability_kit import small_jpeg

    from fieldapp import photos
    from fieldapp.queries import piles, users

    stop, added, errors = threading.Event(), [0], []

    def uploader():
        conn = db.connect(demo_data / "toeline.sqlite3")
        try:
            pile = piles.get_pile(conn, 1, "P3")
            user = users.by_email(conn, "inspector@toeline.example")
            n = 0
            while not stop.is_set():
                n += 1
                photos.add_photo(conn, 1, pile, user, str(uuid.uuid4()), "cage", "", small_jpeg(5000 + n, 400),
                                 demo_data / "photos")
                added[0] += 1
        except BaseException as exc:  # reported below
            errors.append(exc)
        finally:
            conn.close()

    thread = threading.Thread(target=uploader)
    thread.start()
    try:
        for k in range(6):
            while added[0] < 2 * (k + 1) and thread.is_alive():
                time.sleep(0.01)
            dest = tmp_path / f"bk{k}"
            make_backup(demo_data, dest)
            assert check_backup(dest) == []
            copy = sqlite3.connect(str(dest / "toeline.sqlite3"))
            rows = copy.execute("SELECT sha256, format FROM photos").fetchall()
            copy.close()
            assert rows
            for sha, fmt in rows:
                original = photos.original_path(dest / "photos", sha, fmt)
                assert hashlib.sha256(original.read_bytes()).hexdigest() == sha
                assert photos.display_path(dest / "photos", sha).exists()
                assert photos.thumb_path(dest / "photos", sha).exists()
    finally:
        stop.set()
        thread.join()
    assert errors == []
    assert added[0] >= 12
