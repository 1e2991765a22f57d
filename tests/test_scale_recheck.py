"""Rechecks after upstream changes at scale: in chunks, in the background, with progress (issue 24).

Two projects get the same invented site (tests/test_record_api.py: a two-pile cap and a single
pile, each recorded as designed with 10 mm of debris). The rules then allow only 5 mm of
debris (common practice: a project specification may set a tighter base cleanliness), so the
recorded piles fall short. One project is rechecked in one call of ``saving.recheck_stored``
(the one big recheck, as before); the other by ``jobs.run_job`` one pile to a transaction. Each
pile must end with the same versions, verdicts and checks.
"""

from __future__ import annotations

import dataclasses
import time
import uuid

import pytest

from fieldapp import db, jobs, saving
from fieldapp.queries import audit, piles, projects, recheck_jobs, records, users
from tests.test_record_api import full_record, make_site
from tests.test_setup_screens import rules_form

MARKS = ("A1", "A2", "B1")


@pytest.fixture
def sites(app, people):
    """The same site on both projects, every pile recorded (ids: own, other)."""
    facts = {key: make_site(app, people[key]) for key in ("own", "other")}
    with app.app_context():
        conn = db.get_db()
        engineer = users.by_email(conn, people["engineer"])
        for key in ("own", "other"):
            for mark in MARKS:
                row = piles.get_pile(conn, people[key], mark)
                saving.save_record(conn, people[key], row, engineer, str(uuid.uuid4()), None,
                                   full_record(facts[key], mark))
    return dict(people, facts=facts)


def _tighten(conn, project_id: int) -> int:
    rules = projects.current_rules(conn, project_id).rules
    version = projects.save_rules(conn, project_id, dataclasses.replace(rules, base_debris_mm=5.0), "test")
    audit.append(conn, project_id, "test", "rules changed", f"version {version}", {})
    return version


def _state(conn, project_id: int) -> dict:
    out = {}
    for mark in MARKS:
        row = piles.get_pile(conn, project_id, mark)
        current = records.current(conn, row.id)
        out[mark] = (current.version, current.verdict, row.verdict,
                     [(c["code"], c["ok"]) for c in current.checks])
    return out


def test_chunks_give_the_same_result_as_one_big_recheck(app, sites):
    with app.app_context():
        conn = db.get_db()
        before = _state(conn, sites["own"])
        with db.write(conn):
            _tighten(conn, sites["own"])
            changed = saving.recheck_stored(conn, sites["own"], piles.list_piles(conn, sites["own"]), None,
                                            "rechecked with rules version 2", "test")
        with db.write(conn):
            _tighten(conn, sites["other"])
            job_id = recheck_jobs.create(conn, sites["other"], "rechecked with rules version 2", "test",
                                         None, None, 3)
        jobs.run_job(conn, job_id, chunk=1)
        job = recheck_jobs.get(conn, job_id)
        one, chunked = _state(conn, sites["own"]), _state(conn, sites["other"])
    assert sorted(changed) == list(MARKS)  # the change did move every pile: the comparison bites
    assert all(before[m][0] == 1 and one[m][0] == 2 and one[m][1] == "needs engineer" for m in MARKS)
    assert chunked == one
    assert (job.state, job.done, job.changed, job.total) == ("done", 3, 3, 3)


def test_few_recorded_piles_are_rechecked_in_the_request(app, client, auth, sites):
    auth.login(sites["engineer"])
    pid = sites["own"]
    with app.app_context():
        rules = projects.current_rules(db.get_db(), pid).rules
    answer = client.post(f"/projects/{pid}/rules/edit",
                         data=dict(rules_form(rules, base_debris_mm=5.0), csrf_token=auth.token()),
                         follow_redirects=True)
    assert answer.status_code == 200
    with app.app_context():
        conn = db.get_db()
        assert recheck_jobs.latest(conn, pid) is None
        assert all(v[0] == 2 and v[1] == "needs engineer" for v in _state(conn, pid).values())
    assert client.get(f"/api/v1/projects/{pid}/recheck-job").get_json() == {"state": None}


def test_many_recorded_piles_go_to_a_background_job_with_progress(app, client, auth, sites):
    app.config["RECHECK_SYNC_MAX"] = 2  # three recorded piles: above the setting
    auth.login(sites["engineer"])
    pid = sites["own"]
    with app.app_context():
        rules = projects.current_rules(db.get_db(), pid).rules
    answer = client.post(f"/projects/{pid}/rules/edit",
                         data=dict(rules_form(rules, base_debris_mm=5.0), csrf_token=auth.token()),
                         follow_redirects=True)
    assert "in the background" in answer.get_data(as_text=True)
    with app.app_context():
        job = recheck_jobs.latest(db.get_db(), pid)
    assert job is not None and job.total == 3
    deadline = time.monotonic() + 30
    body = {}
    while time.monotonic() < deadline:
        body = client.get(f"/api/v1/projects/{pid}/recheck-job").get_json()
        if body["state"] in ("done", "failed"):
            break
        time.sleep(0.05)
    assert body["id"] == job.id and body["state"] == "done" and body["done"] == 3 and body["changed"] == 3, body
    with app.app_context():
        assert all(v[0] == 2 and v[1] == "needs engineer" for v in _state(db.get_db(), pid).values())
    assert client.get(f"/api/v1/projects/{sites['other']}/recheck-job").status_code == 404  # no member there


def test_a_pile_saved_while_its_chunk_is_rechecked_is_not_overwritten(app, sites):
    with app.app_context():
        conn = db.get_db()
        pid = sites["own"]
        with db.write(conn):
            _tighten(conn, pid)
        planned = saving.plan_rechecks(conn, pid, piles.list_piles(conn, pid))
        assert sorted(p.pile.mark for p in planned) == list(MARKS)
        # the rig saves A1 again (version 2, on the tightened rules) before the chunk is written
        engineer = users.by_email(conn, sites["engineer"])
        row = piles.get_pile(conn, pid, "A1")
        saving.save_record(conn, pid, row, engineer, str(uuid.uuid4()), 1,
                           full_record(sites["facts"]["own"], "A1", notes="saved again"))
        left: list[int] = []
        with db.write(conn):
            moved = saving.store_rechecks(conn, pid, planned, None, "test", "test", left)
        assert sorted(moved) == ["A2", "B1"] and left == [row.id]
        a1 = records.current(conn, row.id)
        assert a1.version == 2 and a1.record["notes"] == "saved again" and a1.verdict == "needs engineer"
