"""Crash: the production server (``toeline serve``, waitress) is killed with SIGKILL at random
moments while 8 clients write pile records and photos through the API; it is restarted each
time. Afterwards every write the server acknowledged (a 2xx answer) is stored exactly once, the
versions of each pile run 1..n with no gap, every stored save has its one audit entry,
``PRAGMA integrity_check`` is ok and ``toeline verify-audit`` passes.

The clients behave like the tablet's outbox: a write that got no answer is sent again with the
same ``client_id`` until the server answers, so an acknowledged write may have been sent more
than once and must still be stored once.

Figures (kills, writes, retries) are printed; ``TOELINE_CRASH_KILLS`` changes the number of
kills (default 20, the issue's minimum).
"""

from __future__ import annotations

import hashlib
import json
import os
import random
import subprocess
import sys
import threading
import time
import uuid

import pytest
import requests
from reliability_kit import LOGINS, ROOT, Server, integrity_ok, login, open_database, small_jpeg

KILLS = int(os.environ.get("TOELINE_CRASH_KILLS", "20"))
CLIENTS = 8

pytestmark = pytest.mark.slow


class Client(threading.Thread):
    """One tablet: writes records to its own pile and photos, retrying unanswered writes."""

    def __init__(self, index: int, base: str, project_id: int, mark: str, version: int,
                 stop: threading.Event):
        super().__init__(daemon=True)
        self.index, self.base, self.project_id, self.mark, self.stop = index, base, project_id, mark, stop
        self.session = requests.Session()
        self.token = ""
        self.version = version  # the pile's stored version when the test starts
        self.acked_records: list[dict] = []   # {"client_id", "mark", "version"}
        self.acked_photos: list[dict] = []    # {"client_id", "mark", "sha256", "id"}
        self.refused: list[tuple[int, str]] = []
        self.retries = 0
        self.error: BaseException | None = None

    def _send(self, make_request):
        """Send until the server answers (same request, same client_id); None if stopped first."""
        while True:
            try:
                if not self.token:
                    email, password = LOGINS["inspector" if self.index % 2 else "engineer"]
                    self.token = login(self.session, self.base, email, password)
                return make_request()
            except requests.RequestException:
                self.retries += 1
                if self.stop.is_set():
                    return None  # the server is up at the end: a send failing now is given up
                time.sleep(0.05)

    def run(self):
        try:
            n = 0
            while not self.stop.is_set():
                n += 1
                if n % 4 == 0:
                    self._photo(n)
                else:
                    self._record(n)
        except BaseException as exc:  # reported by the test
            self.error = exc

    def _record(self, n: int):
        client_id = str(uuid.uuid4())
        body = {"client_id": client_id, "base_version": self.version,
                "record": {"progress": "boring", "rig": f"R{self.index}",
                           "notes": f"client {self.index} save {n}"}}
        url = f"{self.base}/api/v1/projects/{self.project_id}/piles/{self.mark}/record"
        answer = self._send(lambda: self.session.put(url, json=body, timeout=15,
                                                     headers={"X-CSRFToken": self.token}))
        if answer is None:
            return
        if answer.status_code != 200:
            self.refused.append((answer.status_code, answer.text[:300]))
            return
        self.version = answer.json()["version"]
        self.acked_records.append({"client_id": client_id, "mark": self.mark, "version": self.version})

    def _photo(self, n: int):
        client_id = str(uuid.uuid4())
        data = small_jpeg(self.index * 100_000 + n)
        url = f"{self.base}/api/v1/projects/{self.project_id}/piles/{self.mark}/photos"
        answer = self._send(lambda: self.session.post(
            url, data={"client_id": client_id, "kind": "cage", "caption": f"c{self.index}-{n}"},
            files={"file": ("cage.jpg", data, "image/jpeg")}, timeout=15,
            headers={"X-CSRFToken": self.token}))
        if answer is None:
            return
        if answer.status_code not in (200, 201):
            self.refused.append((answer.status_code, answer.text[:300]))
            return
        body = answer.json()
        assert body["sha256"] == hashlib.sha256(data).hexdigest()
        self.acked_photos.append({"client_id": client_id, "mark": self.mark, "sha256": body["sha256"],
                                  "id": body["id"]})


def _wait(condition, timeout: float, what: str) -> None:
    deadline = time.monotonic() + timeout
    while not condition():
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(0.01)


def _piles(data) -> tuple[int, dict[str, int]]:
    """The project and its first piles with their stored versions (the demo recorded some)."""
    conn = open_database(data)
    project_id = conn.execute("SELECT id FROM projects ORDER BY id LIMIT 1").fetchone()[0]
    piles = dict(conn.execute("SELECT mark, current_version FROM piles WHERE project_id = ? ORDER BY id "
                              "LIMIT ?", (project_id, CLIENTS)).fetchall())
    conn.close()
    return project_id, piles


def test_every_acknowledged_write_survives_sigkill(demo_data):
    project_id, start = _piles(demo_data)
    marks = list(start)
    assert len(marks) == CLIENTS
    server = Server(demo_data, "--threads", "8")
    server.start()
    stop = threading.Event()
    clients = [Client(i, server.url, project_id, marks[i], start[marks[i]], stop) for i in range(CLIENTS)]
    for c in clients:
        c.start()
    rng = random.Random(20261201)
    started = time.monotonic()

    def acked() -> int:
        return sum(len(c.acked_records) + len(c.acked_photos) for c in clients)

    try:
        _wait(lambda: all(c.acked_records for c in clients), 120, "every client signed in and saved once")
        for _ in range(KILLS):
            # Each life of the server answers at least one write, then dies at a random moment.
            before = acked()
            _wait(lambda before=before: acked() > before, 60, "a write acknowledged after the restart")
            time.sleep(rng.uniform(0.05, 0.7))
            server.kill()
            time.sleep(rng.uniform(0.0, 0.2))
            server.start()
        time.sleep(0.5)
        stop.set()  # clients finish the write in hand (the server is up) and stop
        for c in clients:
            c.join(timeout=60)
    finally:
        stop.set()
        server.stop()
    elapsed = time.monotonic() - started
    for c in clients:
        assert not c.is_alive(), f"client {c.index} hung"
        assert c.error is None, f"client {c.index}: {c.error!r}"
        assert c.refused == [], f"client {c.index} had writes refused: {c.refused[:3]}"

    records = [r for c in clients for r in c.acked_records]
    photos = [p for c in clients for p in c.acked_photos]
    retries = sum(c.retries for c in clients)
    print(f"\ncrash test: {KILLS} SIGKILLs in {elapsed:.1f} s; acknowledged {len(records)} records and "
          f"{len(photos)} photos; {retries} sends without an answer were retried")
    assert len(records) >= KILLS and len(photos) >= KILLS // 4, "too few writes to prove anything"

    conn = open_database(demo_data)
    assert integrity_ok(conn)
    stored = {row[0]: row[1:] for row in conn.execute(
        "SELECT r.client_id, p.mark, r.version FROM pile_records r JOIN piles p ON p.id = r.pile_id")}
    for r in records:
        assert stored.get(r["client_id"]) == (r["mark"], r["version"]), f"acknowledged save lost: {r}"
    counts = conn.execute("SELECT client_id, COUNT(*) FROM pile_records GROUP BY client_id "
                          "HAVING COUNT(*) > 1").fetchall()
    assert counts == []
    # Per pile: versions 1..n without a gap, and the pile points at the newest.
    for mark in marks:
        versions = [v for (v,) in conn.execute(
            "SELECT r.version FROM pile_records r JOIN piles p ON p.id = r.pile_id "
            "WHERE p.mark = ? AND p.project_id = ? ORDER BY r.version", (mark, project_id))]
        assert versions == list(range(1, len(versions) + 1)), mark
        current = conn.execute("SELECT current_version FROM piles WHERE mark = ? AND project_id = ?",
                               (mark, project_id)).fetchone()[0]
        assert current == len(versions), mark
    # Nothing half-written: every stored save and photo has exactly one audit entry, and back.
    audited = [json.loads(p)["client_id"] for (p,) in conn.execute(
        "SELECT payload_json FROM audit_log WHERE action IN ('record saved', 'photo added')")]
    saved = [c for (c,) in conn.execute(
        "SELECT client_id FROM pile_records UNION ALL SELECT client_id FROM photos")]
    assert sorted(audited) == sorted(saved)

    stored_photos = {row[0]: row[1:] for row in conn.execute(
        "SELECT ph.client_id, p.mark, ph.sha256, ph.id, ph.format FROM photos ph "
        "JOIN piles p ON p.id = ph.pile_id")}
    conn.close()
    for p in photos:
        mark, sha, photo_id, fmt = stored_photos.get(p["client_id"], (None,) * 4)
        assert (mark, sha, photo_id) == (p["mark"], p["sha256"], p["id"]), f"acknowledged photo lost: {p}"
        original = demo_data / "photos" / "originals" / sha[:2] / f"{sha}.jpg"
        assert hashlib.sha256(original.read_bytes()).hexdigest() == sha
        for copy in (demo_data / "photos" / "display" / f"{sha}.jpg",
                     demo_data / "photos" / "thumb" / f"{sha}.jpg"):
            assert copy.stat().st_size > 0

    result = subprocess.run([sys.executable, "-m", "fieldapp.cli", "--data", str(demo_data), "verify-audit"],
                            cwd=ROOT, capture_output=True, text=True, timeout=60)
    assert result.returncode == 0, result.stdout + result.stderr
    assert "BROKEN" not in result.stdout
