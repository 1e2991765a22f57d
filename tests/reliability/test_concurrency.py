"""Concurrency: 16 clients write pile records to one project for 20 s through the production
server (waitress, one SQLite connection per request thread). Four clients share each of four
piles, so they race for the same versions.

Promises checked:
* no "database is locked" and no 5xx ever reaches a client (busy timeout, short transactions);
* no lost update: every acknowledged save made exactly version base_version + 1 (a save based
  on an old version is refused with 409, never written over the newer one), each version of a
  pile was given to one save only, a client's versions strictly increase, and the stored
  versions of each pile run 1..n with each acknowledged save stored under its version.

``TOELINE_CONCURRENCY_SECONDS`` changes the duration (default 20 s, the issue's figure).
"""

from __future__ import annotations

import os
import threading
import time
import uuid
from collections import Counter, defaultdict

import pytest
import requests
from reliability_kit import LOGINS, Server, integrity_ok, login, open_database

SECONDS = float(os.environ.get("TOELINE_CONCURRENCY_SECONDS", "20"))
CLIENTS = 16
PILES = 4

pytestmark = pytest.mark.slow


class Writer(threading.Thread):
    def __init__(self, index: int, base: str, project_id: int, mark: str, stop: threading.Event):
        super().__init__(daemon=True)
        self.index, self.base, self.project_id, self.mark, self.stop = index, base, project_id, mark, stop
        self.acked: list[tuple[int | None, int, str]] = []   # (base_version, version, client_id)
        self.conflicts = 0
        self.bad: list[tuple[int, str]] = []
        self.error: BaseException | None = None

    def run(self):
        try:
            session = requests.Session()
            email, password = LOGINS["inspector" if self.index % 2 else "engineer"]
            token = login(session, self.base, email, password)
            url = f"{self.base}/api/v1/projects/{self.project_id}/piles/{self.mark}/record"
            base = session.get(url, timeout=30).json()["version"]
            n = 0
            while not self.stop.is_set():
                n += 1
                client_id = str(uuid.uuid4())
                answer = session.put(url, timeout=30, headers={"X-CSRFToken": token}, json={
                    "client_id": client_id, "base_version": base,
                    "record": {"progress": "boring", "notes": f"writer {self.index} save {n}",
                               "rig": f"R{self.index}"}})
                if "database is locked" in answer.text or answer.status_code >= 500:
                    self.bad.append((answer.status_code, answer.text[:300]))
                    continue
                if answer.status_code == 409:
                    self.conflicts += 1
                    body = answer.json()
                    assert body["error"] == "conflict"
                    base = body["server"]["version"]
                    continue
                assert answer.status_code == 200, answer.text[:300]
                version = answer.json()["version"]
                self.acked.append((base, version, client_id))
                base = version
                # A read between writes, as the rig page does.
                listing = session.get(f"{self.base}/api/v1/projects/{self.project_id}/piles", timeout=30)
                if listing.status_code >= 500 or "database is locked" in listing.text:
                    self.bad.append((listing.status_code, listing.text[:300]))
        except BaseException as exc:  # reported by the test
            self.error = exc


def test_sixteen_writers_no_lock_errors_no_lost_update(demo_data):
    conn = open_database(demo_data)
    project_id = conn.execute("SELECT id FROM projects ORDER BY id LIMIT 1").fetchone()[0]
    rows = conn.execute("SELECT mark, current_version FROM piles WHERE project_id = ? ORDER BY id LIMIT ?",
                        (project_id, PILES)).fetchall()
    marks = [mark for mark, _ in rows]
    start = dict(rows)  # the demo has recorded some piles already
    conn.close()
    server = Server(demo_data)
    server.start()
    stop = threading.Event()
    writers = [Writer(i, server.url, project_id, marks[i % PILES], stop) for i in range(CLIENTS)]
    try:
        for w in writers:
            w.start()
        time.sleep(SECONDS)
        stop.set()
        for w in writers:
            w.join(timeout=120)
    finally:
        stop.set()
        server.stop()
    for w in writers:
        assert not w.is_alive()
        assert w.error is None, f"writer {w.index}: {w.error!r}"
        assert w.bad == [], f"writer {w.index} saw: {w.bad[:3]}"

    saves = sum(len(w.acked) for w in writers)
    conflicts = sum(w.conflicts for w in writers)
    print(f"\nconcurrency: {CLIENTS} writers for {SECONDS:g} s on {PILES} piles: {saves} saves "
          f"({saves / SECONDS:.1f}/s), {conflicts} refused as conflicts (409)")
    assert saves >= CLIENTS, "too few saves to prove anything"
    assert conflicts > 0, "the writers never raced: the test would prove nothing about lost updates"

    by_pile: dict[str, list[int]] = defaultdict(list)
    for w in writers:
        versions = [v for _, v, _ in w.acked]
        assert versions == sorted(set(versions)), "a client's versions must strictly increase"
        for base, version, _ in w.acked:
            assert version == base + 1, "a save must build on the version it was based on"
        by_pile[w.mark].extend(versions)
    for mark, versions in by_pile.items():
        duplicated = [v for v, n in Counter(versions).items() if n > 1]
        assert duplicated == [], f"{mark}: versions given to two saves: {duplicated}"

    conn = open_database(demo_data)
    stored = {row[0]: (row[1], row[2]) for row in conn.execute(
        "SELECT r.client_id, p.mark, r.version FROM pile_records r JOIN piles p ON p.id = r.pile_id "
        "WHERE r.project_id = ?", (project_id,))}
    for w in writers:
        for _, version, client_id in w.acked:
            assert stored[client_id] == (w.mark, version)
    for mark in marks:
        versions = sorted(v for m, v in stored.values() if m == mark)
        assert versions == list(range(1, len(versions) + 1))
        made = [v for v in versions if v > start[mark]]
        assert made == sorted(by_pile[mark]), f"{mark}: a stored save nobody was told about"
    assert integrity_ok(conn)
    conn.close()
