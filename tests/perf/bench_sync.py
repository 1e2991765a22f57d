"""Sync benchmark (issue 8): 300 records and 300 photos through the API, every request twice.

The scene: four tablets come back into signal with full outboxes and flush them at once to
the production server (``toeline serve``, waitress, on 127.0.0.1). Each tablet holds 25 piles
of an invented 300-pile project; for each pile its outbox has three saves of the record
(boring, concreted, logged; each on the version the one before made) and three photos (base,
cage, pour), taken in that order: 4 x 25 x 3 = 300 records and 300 photos. A tablet's outbox
sends one item at a time, as ``static/outbox.js`` does, and every request is sent twice: the
second is the retry a tablet makes when the answer to the first was lost. The photos are
12-megapixel camera JPEGs (the outbox keeps the original bytes), each one different.

Figures: ``sync_s`` from the first request to the last answer; ``sync_duplicates`` counted in
the database afterwards (record versions and photos beyond one per client id, plus anything
beyond the 300 and 300 sent); ``sync_server_cpu_s`` the server's CPU time meanwhile (over
``sync_s`` it shows how much of the two cores the server got); ``sync_errors`` answers other than 200/201 and mismatched
repeats (a repeat must return the first answer's version or photo id).
"""

from __future__ import annotations

import random
import shutil
import sqlite3
import tempfile
import threading
import time
import uuid
from pathlib import Path

import requests

from tests.perf import sitegen
from tests.perf.bench_photo import camera_jpeg

TABLETS = 4
PILES_PER_TABLET = 25
STAGES = (("boring", "base"), ("concreted", "cage"), ("logged", "pour"))
TIMEOUT_S = 60.0


def distinct_jpeg(base: bytes, n: int) -> bytes:
    """``base`` with a JPEG comment segment naming ``n`` after the start marker: a valid,
    different file (its own SHA-256) that decodes to the same pixels."""
    text = f"invented benchmark photo {n}".encode()
    return base[:2] + b"\xff\xfe" + (len(text) + 2).to_bytes(2, "big") + text + base[2:]


class Outbox(threading.Thread):
    """One tablet flushing its outbox: every item sent twice, one item at a time."""

    def __init__(self, base: str, site: sitegen.Site, index: int, photo: bytes):
        super().__init__(daemon=True)
        self.base = base
        self.project = site.project_id
        self.session = sitegen.login(base, site.inspectors[index])
        self.piles = site.piles[index * PILES_PER_TABLET:(index + 1) * PILES_PER_TABLET]
        self.photo = photo
        self.index = index
        self.rng = random.Random(500 + index)
        self.errors: list[str] = []
        self.sent = {"record": 0, "photo": 0}

    def _twice(self, send, key: str) -> None:
        answers = []
        for _ in range(2):
            try:
                r = send()
            except requests.RequestException as exc:
                self.errors.append(f"{type(exc).__name__}: {exc}")
                continue
            if r.status_code not in (200, 201):
                self.errors.append(f"HTTP {r.status_code}: {r.text[:200]}")
                continue
            answers.append(r.json()[key])
        if len(answers) == 2 and answers[0] != answers[1]:
            self.errors.append(f"the repeat answered {key} {answers[1]}, the first {answers[0]}")

    def run(self) -> None:
        url = f"{self.base}/api/v1/projects/{self.project}/piles"
        for p_index, pile in enumerate(self.piles):
            version = None
            for s_index, (progress, kind) in enumerate(STAGES):
                record = sitegen.record_for(pile, self.rng, progress=progress)
                body = {"client_id": str(uuid.uuid4()), "base_version": version, "record": record}
                self._twice(lambda b=body, m=pile.mark: self.session.put(
                    f"{url}/{m}/record", json=b, timeout=TIMEOUT_S), "version")
                self.sent["record"] += 1
                version = (version or 0) + 1
                n = (self.index * PILES_PER_TABLET + p_index) * len(STAGES) + s_index
                jpeg = distinct_jpeg(self.photo, n)
                form = {"client_id": str(uuid.uuid4()), "kind": kind, "caption": f"{kind} of {pile.mark}"}
                self._twice(lambda f=form, j=jpeg, m=pile.mark: self.session.post(
                    f"{url}/{m}/photos", data=f, files={"file": ("photo.jpg", j, "image/jpeg")},
                    timeout=TIMEOUT_S), "id")
                self.sent["photo"] += 1


def count_duplicates(database: Path, n_records: int, n_photos: int) -> tuple[int, dict]:
    """Duplicates in the database: rows beyond one per client id, and beyond what was sent."""
    conn = sqlite3.connect(f"file:{database}?mode=ro", uri=True)
    try:
        counts = {}
        for table in ("pile_records", "photos"):
            rows, ids = conn.execute(f"SELECT COUNT(*), COUNT(DISTINCT client_id) FROM {table}").fetchone()
            counts[table] = (rows, ids)
    finally:
        conn.close()
    duplicates = sum(rows - ids for rows, ids in counts.values())
    duplicates += max(0, counts["pile_records"][1] - n_records) + max(0, counts["photos"][1] - n_photos)
    return duplicates, counts


def run() -> dict:
    """Build the project, start the server, flush four outboxes at once, count in the database."""
    folder = tempfile.mkdtemp(prefix="toeline-bench-sync-")
    try:
        site = sitegen.build_site(folder, TABLETS * PILES_PER_TABLET * 3, TABLETS)
        photo = camera_jpeg(seed=7)
        with sitegen.Server(folder) as server:
            tablets = [Outbox(server.base, site, i, photo) for i in range(TABLETS)]
            t0, cpu0 = time.perf_counter(), server.cpu_s()
            for t in tablets:
                t.start()
            for t in tablets:
                t.join(900)
            sync_s = time.perf_counter() - t0
            server_cpu = server.cpu_s() - cpu0
        n_records = sum(t.sent["record"] for t in tablets)
        n_photos = sum(t.sent["photo"] for t in tablets)
        duplicates, counts = count_duplicates(Path(folder) / "toeline.sqlite3", n_records, n_photos)
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    errors = [e for t in tablets for e in t.errors]
    for line in errors[:5]:
        print("  error:", line)
    print(f"  sent {n_records} records and {n_photos} photos, each twice ({len(photo) / 1e6:.1f} MB photos); "
          f"stored: {counts['pile_records'][0]} record versions, {counts['photos'][0]} photos")
    missing = max(0, n_records - counts["pile_records"][1]) + max(0, n_photos - counts["photos"][1])
    return {"sync_s": sync_s, "sync_server_cpu_s": server_cpu, "sync_duplicates": duplicates,
            "sync_errors": len(errors) + missing}


if __name__ == "__main__":
    for name, value in run().items():
        print(f"{name:<18}{value:10.4g}")
