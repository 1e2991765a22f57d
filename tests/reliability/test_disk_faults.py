"""Disk faults: a read-only data folder and a full disk.

What is simulated, and how (the tests run as root on a shared machine: no mounts, and file
permissions do not stop root):
* **read-only database**: every connection the app opens gets ``PRAGMA query_only = ON``, so
  SQLite refuses each write with the same error a read-only file gives ("attempt to write a
  readonly database", SQLITE_READONLY);
* **database disk full**: every connection gets ``PRAGMA max_page_count`` equal to the file's
  current size, so any write that needs one more page fails exactly as on a full disk
  ("database or disk is full", SQLITE_FULL); writes that fit in free pages still succeed, as
  they would on a real full disk;
* **photo folder read-only / full**: creating or writing a file in the photo folder raises
  ``OSError`` with ``EROFS`` / ``ENOSPC``, as the kernel does.

Promises checked: the user gets a clear error (API: JSON 503 for read-only, 507 for full, with a
message; pages: an HTML page with the message), nothing is half-written (no record version
without its audit entry, no photo row without its files, no temporary files left), and reads
keep being served.
"""

from __future__ import annotations

import errno
import io
import sqlite3
import uuid

import pytest
from reliability_kit import engineer_site, small_jpeg

from fieldapp import db, photos
from fieldapp.queries import records


@pytest.fixture
def site(demo_data):
    return engineer_site(demo_data)


def _limit_connections(monkeypatch, site, *pragmas: str) -> None:
    """Every connection the app opens from now on runs ``pragmas`` (the fault); the idle ones
    the app's pool holds are closed, so none made before the fault is used again."""
    original = db.connect

    def connect(path):
        conn = original(path)
        for pragma in pragmas:
            if pragma == "max_page_count":
                pages = conn.execute("PRAGMA page_count").fetchone()[0]
                conn.execute(f"PRAGMA max_page_count = {int(pages)}")
            else:
                conn.execute(f"PRAGMA {pragma}")
        return conn

    monkeypatch.setattr(db, "connect", connect)
    site["app"].extensions["toeline.db_pool"].close_all()


def _fail_file_writes(monkeypatch, code: int) -> None:
    def refuse(*args, **kwargs):
        raise OSError(code, errno.errorcode[code] and __import__("os").strerror(code))

    monkeypatch.setattr(photos.tempfile, "mkstemp", refuse)


def _state(data) -> tuple:
    conn = sqlite3.connect(str(data / "toeline.sqlite3"))
    try:
        return tuple(conn.execute(f"SELECT COUNT(*), COALESCE(MAX(rowid), 0) FROM {t}").fetchone()
                     for t in ("pile_records", "photos", "audit_log", "caps"))
    finally:
        conn.close()


def _files(data) -> list[str]:
    return sorted(str(p.relative_to(data)) for p in (data / "photos").rglob("*") if p.is_file())


def _only_whole_unreferenced_files(data, before: list[str]) -> None:
    """Files a refused upload left (the image work is done before the database write): each is
    complete (written through a temporary file and a rename) and no photo row points at it, so
    the record holds no half photo. Leftover temporary files are not allowed."""
    import hashlib

    from PIL import Image

    left = sorted(set(_files(data)) - set(before))
    assert not [f for f in left if "/.tmp-" in f], left
    conn = sqlite3.connect(str(data / "toeline.sqlite3"))
    referenced = {sha for (sha,) in conn.execute("SELECT sha256 FROM photos")}
    conn.close()
    for name in left:
        path = data / name
        sha = path.stem
        assert sha not in referenced
        if "/originals/" in name:
            assert hashlib.sha256(path.read_bytes()).hexdigest() == sha
        else:
            Image.open(path).verify()


def _put(site, mark: str, notes: str = "note"):
    with site["app"].app_context():
        conn = db.get_db()
        pile_id = conn.execute("SELECT id FROM piles WHERE project_id = ? AND mark = ?",
                               (site["project"], mark)).fetchone()[0]
        version = records.stored_version(conn, pile_id)
    return site["client"].put(
        f"/api/v1/projects/{site['project']}/piles/{mark}/record", headers={"X-CSRFToken": site["token"]},
        json={"client_id": str(uuid.uuid4()), "base_version": version,
              "record": {"progress": "boring", "notes": notes}})


def _photo(site, mark: str, seed: int):
    return site["client"].post(
        f"/api/v1/projects/{site['project']}/piles/{mark}/photos", headers={"X-CSRFToken": site["token"]},
        content_type="multipart/form-data",
        data={"client_id": str(uuid.uuid4()), "kind": "base", "caption": "",
              "file": (io.BytesIO(small_jpeg(seed)), "p.jpg", "image/jpeg")})


def _reads_still_served(site) -> None:
    client, pid = site["client"], site["project"]
    for url in (f"/api/v1/projects/{pid}/piles", f"/api/v1/projects/{pid}/piles/P1/record",
                f"/projects/{pid}/piles", "/"):
        answer = client.get(url)
        assert answer.status_code == 200, (url, answer.status_code)


def _clear_json_error(answer, status: int, *words: str) -> None:
    assert answer.status_code == status, (answer.status_code, answer.get_data(as_text=True)[:400])
    body = answer.get_json()
    message = body["error"]
    for word in words:
        assert word in message.lower(), message
    assert "Traceback" not in answer.get_data(as_text=True)


def test_read_only_database_refuses_writes_clearly_and_keeps_reading(site, monkeypatch):
    photos_before = _files(site["data"])
    before = _state(site["data"])
    _limit_connections(monkeypatch, site, "query_only = ON")
    _clear_json_error(_put(site, "P1"), 503, "read-only", "nothing was saved")
    _clear_json_error(_photo(site, "P1", 1), 503, "read-only", "nothing was saved")
    page = site["client"].post(f"/projects/{site['project']}/caps/new",
                               data={"csrf_token": site["token"], "mark": "RO1", "n_kn": "10"})
    assert page.status_code == 503 and page.mimetype == "text/html"
    assert "read-only" in page.get_data(as_text=True)
    assert _state(site["data"]) == before
    _only_whole_unreferenced_files(site["data"], photos_before)
    _reads_still_served(site)


def test_read_only_photo_folder_refuses_the_upload_clearly(site, monkeypatch):
    before, files = _state(site["data"]), _files(site["data"])
    _fail_file_writes(monkeypatch, errno.EROFS)
    _clear_json_error(_photo(site, "P1", 2), 503, "read-only", "nothing was saved")
    assert _state(site["data"]) == before and _files(site["data"]) == files
    assert _put(site, "P1").status_code == 200, "records still save when only the photo folder fails"


def test_full_photo_disk_refuses_the_upload_clearly(site, monkeypatch):
    before, files = _state(site["data"]), _files(site["data"])
    _fail_file_writes(monkeypatch, errno.ENOSPC)
    _clear_json_error(_photo(site, "P1", 3), 507, "full", "nothing was saved")
    assert _state(site["data"]) == before and _files(site["data"]) == files
    _reads_still_served(site)


def test_full_database_disk_refuses_writes_clearly_and_nothing_is_half_written(site, monkeypatch):
    _limit_connections(monkeypatch, site, "max_page_count")
    refused = None
    for n in range(80):  # fill the free space of the last pages, then the next write must fail
        before = _state(site["data"])
        answer = _put(site, f"P{1 + n % 5}", notes="x" * 3000)
        if answer.status_code != 200:
            refused = answer
            break
    assert refused is not None, "the database never filled up"
    _clear_json_error(refused, 507, "full", "nothing was saved")
    assert _state(site["data"]) == before, "the refused save left part of itself behind"
    files = _files(site["data"])
    for seed in range(10, 40):  # photos: files may be written, then the row cannot be
        before = _state(site["data"])
        answer = _photo(site, "P2", seed)
        if answer.status_code != 201:
            _clear_json_error(answer, 507, "full", "nothing was saved")
            assert _state(site["data"]) == before
            break
        files = _files(site["data"])
    else:
        pytest.fail("a photo was still stored with the database full")
    _only_whole_unreferenced_files(site["data"], files)
    _reads_still_served(site)
    conn = sqlite3.connect(str(site["data"] / "toeline.sqlite3"))
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    conn.close()
