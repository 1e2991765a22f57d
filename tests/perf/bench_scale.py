"""Site scale benchmark (issue 24): a 20,000-pile invented project (``sitegen.build_site``).

Figures (never asserted; the runner prints them against the targets):

* ``piles_page_20000_ms`` / ``piles_page_20000_kb``: the first page of the Piles screen (median
  server time of the request in-process, and its size); ``piles_whole_20000_kb`` the size the
  whole schedule would be (the unpaged pile list API's answer) for the ratio.
* ``pile_list_page_ms``: one page (500 piles) of the pile list API, warm.
* ``bundle_20000_gzip_mb``: the first bundle as sent (gzip); ``bundle_20000_build_s`` the time
  to build it; ``bundle_unchanged_ms`` a second request at the same head (read from disk).
* ``bundle_delta_10_kb``: the delta after 10 record saves (gzip bytes as sent), with
  ``bundle_delta_10_ms`` its time (the bundle patched for 10 piles, then the difference).
* ``project_20000_s``: design_core's recheck of 20,000 piles (``bench_recheck.project``).
* ``rules_change_20000_s``: the background recheck after a rules change with ``N_RECORDED``
  piles recorded (every pile unless TOELINE_SCALE_RECORDED says fewer), in chunks; with
  ``save_p95_during_ms`` the 95th percentile of record saves made while it runs.
"""

from __future__ import annotations

import dataclasses
import gzip
import os
import random
import statistics
import tempfile
import threading
import time
import uuid

from tests.perf import sitegen

N_PILES = int(os.environ.get("TOELINE_SCALE_PILES", "20000"))
N_RECORDED = int(os.environ.get("TOELINE_SCALE_RECORDED", str(N_PILES)))


def _record_all(app, site, n: int) -> None:
    """Store a record of the first ``n`` piles, 500 to a transaction (each rechecked as a save
    would be, through ``saving.evaluate``), so the rules change has that many to recheck."""
    from fieldapp import db, saving
    from fieldapp.queries import piles as piles_q
    from fieldapp.queries import records

    rng = random.Random(24)
    with app.app_context():
        conn = db.get_db()
        rows = {p.mark: p for p in piles_q.list_piles(conn, site.project_id)}
        facts = site.piles[:n]
        for start in range(0, len(facts), 500):
            with db.write(conn):
                for fact in facts[start:start + 500]:
                    row = rows[fact.mark]
                    if row.current_version:
                        continue  # saved already (the delta's 10 piles)
                    done = saving.evaluate(conn, site.project_id, row, sitegen.record_for(fact, rng))
                    records.insert(conn, project_id=site.project_id, pile_id=row.id, version=1,
                                   client_id=f"bench-{uuid.uuid4()}", record=done.clean,
                                   progress=done.clean["progress"], verdict=done.verdict.verdict,
                                   worst_utilisation=done.verdict.worst_utilisation, checks=done.checks,
                                   borrowed=done.borrowed, notes=list(done.verdict.notes),
                                   rules_version=done.inputs.rules_version, created_by=None)
                    records.set_pile_state(conn, row.id, progress=done.clean["progress"],
                                           verdict=done.verdict.verdict,
                                           worst_utilisation=done.verdict.worst_utilisation, version=1)


def run() -> dict:
    from design_core import Rules
    from design_core.recheck import recheck_project

    from fieldapp import bundle_store, create_app, db, jobs
    from fieldapp.queries import audit, projects, recheck_jobs, users
    from tests.perf import bench_recheck

    out: dict = {}
    items, groups = bench_recheck.project(N_PILES)
    t0 = time.perf_counter()
    recheck_project(items, Rules(), groups)
    out["project_20000_s"] = time.perf_counter() - t0

    with tempfile.TemporaryDirectory() as folder:
        t0 = time.perf_counter()
        site = sitegen.build_site(folder, N_PILES, 1)
        out["site_build_s"] = time.perf_counter() - t0
        app = create_app({"TESTING": True, "DATA_DIR": folder, "WTF_CSRF_ENABLED": False})
        pid = site.project_id
        with app.app_context():
            db.get_db()
        client = app.test_client()
        sitegen_login(client, site.engineer)

        times, size = [], 0
        for _ in range(5):
            t0 = time.perf_counter()
            page = client.get(f"/projects/{pid}/piles")
            times.append(time.perf_counter() - t0)
            size = len(page.data)
        out["piles_page_20000_ms"] = statistics.median(times) * 1e3
        out["piles_page_20000_kb"] = size / 1024
        whole = client.get(f"/api/v1/projects/{pid}/piles")
        out["piles_whole_20000_kb"] = len(whole.data) / 1024
        times = []
        for k in range(5):
            t0 = time.perf_counter()
            client.get(f"/api/v1/projects/{pid}/piles?limit=500&page={k + 1}")
            times.append(time.perf_counter() - t0)
        out["pile_list_page_ms"] = statistics.median(times) * 1e3

        with app.app_context():
            conn = db.get_db()
            project = projects.get(conn, pid)
            t0 = time.perf_counter()
            first = bundle_store.current(conn, project, folder)
            out["bundle_20000_build_s"] = time.perf_counter() - t0
            out["bundle_20000_gzip_mb"] = len(first.gz) / 1_048_576
            out["bundle_20000_mb"] = len(first.body()) / 1_048_576
            t0 = time.perf_counter()
            bundle_store.current(conn, project, folder)
            out["bundle_unchanged_ms"] = (time.perf_counter() - t0) * 1e3

        from fieldapp import saving
        from fieldapp.queries import piles as piles_q
        rng = random.Random(10)
        with app.app_context():
            conn = db.get_db()
            engineer = users.by_email(conn, site.engineer)
            for fact in site.piles[:10]:
                row = piles_q.get_pile(conn, pid, fact.mark)
                saving.save_record(conn, pid, row, engineer, str(uuid.uuid4()), 0,
                                   sitegen.record_for(fact, rng, progress="boring"))
            t0 = time.perf_counter()
            delta = bundle_store.delta(conn, project, folder, first.head)
            out["bundle_delta_10_ms"] = (time.perf_counter() - t0) * 1e3
            out["bundle_delta_10_kb"] = len(delta) / 1024
            out["bundle_delta_vs_first"] = len(delta) / len(first.gz)
            assert len(__import__("json").loads(gzip.decompress(delta))["piles"]) == 10

        t0 = time.perf_counter()
        _record_all(app, site, N_RECORDED)
        out["record_all_s"] = time.perf_counter() - t0
        with app.app_context():
            conn = db.get_db()
            rules = projects.current_rules(conn, pid).rules
            with db.write(conn):
                version = projects.save_rules(conn, pid, dataclasses.replace(rules, base_debris_mm=25.0), "bench")
                audit.append(conn, pid, "bench", "rules changed", f"version {version}", {})
                job_id = recheck_jobs.create(conn, pid, f"rechecked with rules version {version}", "bench",
                                             None, None, N_RECORDED)
        saves: list[float] = []
        failures: list[str] = []
        conflicts: list[str] = []
        stop = threading.Event()

        def saver():
            srng = random.Random(7)
            with app.app_context():
                sconn = db.get_db()
                k = 10
                while not stop.is_set() and k < len(site.piles):
                    fact = site.piles[k]
                    row = piles_q.get_pile(sconn, pid, fact.mark)
                    t = time.perf_counter()
                    try:
                        saving.save_record(sconn, pid, row, engineer, str(uuid.uuid4()), row.current_version,
                                           sitegen.record_for(fact, srng))
                    except saving.RecordConflict:
                        conflicts.append(fact.mark)  # the job gave the pile a version meanwhile
                    except Exception:  # noqa: BLE001 - counted: a save the job kept out
                        failures.append(fact.mark)
                    saves.append(time.perf_counter() - t)
                    k += 97
                    time.sleep(0.2)

        thread = threading.Thread(target=saver)
        thread.start()
        t0 = time.perf_counter()
        with app.app_context():
            jobs.run_job(db.get_db(), job_id)
            out["rules_change_20000_s"] = time.perf_counter() - t0
            job = recheck_jobs.get(db.get_db(), job_id)
        stop.set()
        thread.join()
        out["rules_change_recorded"] = job.done
        out["rules_change_changed"] = job.changed
        saves.sort()
        out["save_p95_during_ms"] = saves[max(0, int(0.95 * len(saves)) - 1)] * 1e3 if saves else float("nan")
        out["saves_during"] = len(saves)
        out["save_failures_during"] = len(failures)
        out["save_conflicts_during"] = len(conflicts)
    return out


def sitegen_login(client, email: str) -> None:
    """Sign the test client in (CSRF off in this app)."""
    answer = client.post("/login", data={"email": email, "password": sitegen.PASSWORD})
    assert answer.status_code in (302, 303), answer.status_code


if __name__ == "__main__":  # pragma: no cover
    for name, value in run().items():
        print(f"{name:26s} {value:10.2f}")
