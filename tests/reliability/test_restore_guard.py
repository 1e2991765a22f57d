"""Restore into a live data folder, and a restore that checks what it restores (issue 15, items 1
and 13): a server holds the data folder's lock and restore refuses meanwhile; a backup whose
database, manifest or photos were tampered with is refused before anything becomes live."""

from __future__ import annotations

import json
import sqlite3

from click.testing import CliRunner
from reliability_kit import Server

from fieldapp import datalock
from fieldapp.backup import DB_NAME, MANIFEST, make_backup, restore_backup, sha256_file
from fieldapp.cli import main


def _rehash(backup) -> None:
    """Rewrite the manifest's SHA-256s after the test edited the backup (what a careful forger does)."""
    manifest = json.loads((backup / MANIFEST).read_text())
    for rel in list(manifest["files"]):
        if (backup / rel).is_file():
            manifest["files"][rel] = sha256_file(backup / rel)
    (backup / MANIFEST).write_text(json.dumps(manifest))


def _edit_db(backup, sql: str, *args) -> None:
    """Change the backup's database behind the app's back (triggers dropped, as a forger would)."""
    conn = sqlite3.connect(str(backup / DB_NAME))
    conn.execute("DROP TRIGGER IF EXISTS signoffs_no_update")
    conn.execute("DROP TRIGGER IF EXISTS audit_no_update")
    conn.execute("DROP TRIGGER IF EXISTS audit_no_delete")
    conn.execute(sql, args)
    conn.commit()
    conn.close()
    _rehash(backup)


def _restore(target, backup, *extra):
    return CliRunner().invoke(main, ["--data", str(target), "restore", *extra, str(backup)])


def test_restore_is_refused_while_the_server_holds_the_folder(demo_data, tmp_path):
    make_backup(demo_data, tmp_path / "bk")
    server = Server(demo_data)
    server.start()
    try:
        assert datalock.in_use(demo_data)
        before = sha256_file(demo_data / DB_NAME)
        result = _restore(demo_data, tmp_path / "bk", "--force")
        assert result.exit_code != 0
        assert "in use by pid" in result.output and "stop it first" in result.output, result.output
        assert f"kill {server.proc.pid}" in result.output
        assert not any(".before-restore-" in p.name for p in demo_data.iterdir()), "nothing moved aside"
        assert sha256_file(demo_data / DB_NAME) == before
        # A second server on the same folder is refused as well.
        second = CliRunner().invoke(main, ["--data", str(demo_data), "serve", "--port", "1"])
        assert second.exit_code != 0 and "in use" in second.output
    finally:
        server.stop()
    assert not datalock.in_use(demo_data), "the lock ends with the server process"
    result = _restore(demo_data, tmp_path / "bk", "--force")
    assert result.exit_code == 0, result.output


def test_the_lock_survives_no_kill(demo_data):
    """SIGKILL leaves no stale lock: the kernel drops a flock with its process."""
    server = Server(demo_data)
    server.start()
    try:
        assert datalock.in_use(demo_data)
    finally:
        server.kill()
    assert not datalock.in_use(demo_data)


def test_restore_of_a_good_backup_passes_its_checks(demo_data, tmp_path):
    make_backup(demo_data, tmp_path / "bk")
    restore_backup(tmp_path / "bk", tmp_path / "fresh")
    conn = sqlite3.connect(str(tmp_path / "fresh" / DB_NAME))
    assert conn.execute("SELECT COUNT(*) FROM pile_records").fetchone()[0] > 0
    conn.close()


def test_the_demo_command_is_refused_on_a_folder_a_server_holds(demo_data):
    server = Server(demo_data)
    server.start()
    try:
        result = CliRunner().invoke(main, ["--data", str(demo_data), "demo", "--no-serve"])
        assert result.exit_code != 0 and "in use by pid" in result.output, result.output
    finally:
        server.stop()


def test_workers_of_a_multi_process_server_share_the_lock_and_restore_still_refuses(tmp_path):
    """deploy/wsgi.py: each gunicorn worker takes the lock shared; two workers can hold it at
    once, and restore (exclusive) is refused while either runs."""
    import subprocess
    import sys
    import time

    data = tmp_path / "data"
    hold = ("import sys, time; from fieldapp import datalock; "
            "datalock.acquire(sys.argv[1], 'serve', shared=True); print('held', flush=True); time.sleep(30)")
    workers = [subprocess.Popen([sys.executable, "-c", hold, str(data)], stdout=subprocess.PIPE, text=True)
               for _ in range(2)]
    try:
        for worker in workers:
            assert worker.stdout.readline().strip() == "held"   # the second worker got it too
        assert datalock.in_use(data)
        try:
            datalock.acquire(data, "restore")
        except datalock.FolderInUse as exc:
            assert "in use" in str(exc)
        else:
            datalock.release(data)
            raise AssertionError("restore took the lock while two server workers held it")
    finally:
        for worker in workers:
            worker.kill()
            worker.wait()
    time.sleep(0.1)
    assert not datalock.in_use(data)   # the kernel dropped the workers' locks with them
