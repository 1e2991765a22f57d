"""Rechecks of many recorded piles outside the request, in chunks, with progress.

After the rules or a ground model change, every recorded pile they touch is rechecked
(``saving.recheck_stored``). Up to ``RECHECK_SYNC_MAX`` recorded piles (the app setting of that
name, default ``SYNC_MAX``) it is done in the request, in the change's own transaction, as it
always was. Above it, ``recheck_upstream`` adds a ``recheck_jobs`` row in the change's transaction
and a thread outside the request runs it (``run_job``): ``CHUNK`` piles at a time in id order,
each chunk rechecked outside any transaction (``saving.plan_rechecks``: reads only) and then
written in one short ``db.write`` transaction with the job's progress (``saving.store_rechecks``;
a pile saved again meanwhile is rechecked there on its new version). The write lock is held only
for the writes, and is free while the next chunk is rechecked, so a save at the rig waits at
most for one chunk's writes. A pile's recheck reads only its own record, its ground model,
its cap's positions and the rules, none of which a recheck changes, so the chunks give the same
result as one recheck of all piles. An unfinished job (the server stopped) is taken up again
from its last chunk by the next job of its project or by ``resume_all``.
"""

from __future__ import annotations

import threading
import time
from dataclasses import dataclass

from fieldapp import db, saving
from fieldapp.queries import piles as piles_q
from fieldapp.queries import recheck_jobs

SYNC_MAX = 2000
CHUNK = 100
COMMIT_WAIT_S = 30.0   # how long the runner looks for the job row of a change still committing
_running: set[int] = set()
_lock = threading.Lock()


class Queued(list):
    """The answer of ``recheck_upstream`` when the recheck went to the background: no marks yet,
    and the job's id and size."""

    def __init__(self, job_id: int, total: int):
        super().__init__()
        self.job_id = job_id
        self.total = total


@dataclass(frozen=True)
class _Actor:
    id: int | None
    label: str


def sync_max(app) -> int:
    """The largest number of recorded piles rechecked in the request (setting RECHECK_SYNC_MAX)."""
    return int(app.config.get("RECHECK_SYNC_MAX", SYNC_MAX))


def recheck_upstream(conn, app, project_id: int, pile_rows, user, reason: str,
                     ground_model_id: int | None = None, actor: str | None = None) -> list[str]:
    """Recheck ``pile_rows`` (all the project's piles, or those of ``ground_model_id``) after an
    upstream change: in the caller's transaction when few are recorded (returns the marks given a
    new version, as ``saving.recheck_stored``), else as a background job (returns ``Queued``).
    Call inside the change's ``db.write``.
    """
    recorded = sum(1 for p in pile_rows if p.current_version > 0)
    if recorded <= sync_max(app):
        return saving.recheck_stored(conn, project_id, pile_rows, user, reason, actor)
    job_id = recheck_jobs.create(conn, project_id, reason, actor or (user.label if user else "system"),
                                 user.id if user else None, ground_model_id, recorded)
    start(app, job_id)
    return Queued(job_id, recorded)


def start(app, job_id: int) -> threading.Thread:
    """Run the job in a thread of this process (it waits for the job row to be committed)."""
    thread = threading.Thread(target=_run_when_committed, args=(app, job_id), daemon=True,
                              name=f"toeline-recheck-{job_id}")
    thread.start()
    return thread


def _run_when_committed(app, job_id: int) -> None:
    with app.app_context():
        conn = db.get_db()
        deadline = time.monotonic() + COMMIT_WAIT_S
        while recheck_jobs.get(conn, job_id) is None:
            if time.monotonic() > deadline:
                return  # the change was rolled back: no job
            time.sleep(0.05)
        job = recheck_jobs.get(conn, job_id)
        for earlier in recheck_jobs.unfinished(conn, job.project_id):
            run_job(conn, earlier.id)


def run_job(conn, job_id: int, chunk: int = CHUNK) -> None:
    """Run a job to its end, ``chunk`` piles to a transaction (module docstring). A job already
    being run by this process is left to it."""
    with _lock:
        if job_id in _running:
            return
        _running.add(job_id)
    try:
        job = recheck_jobs.get(conn, job_id)
        if job is None or job.state not in recheck_jobs.UNFINISHED:
            return
        who = _Actor(job.user_id, job.actor)
        done, changed, after = job.done, job.changed, job.after_pile_id
        try:
            while True:
                ids = recheck_jobs.next_pile_ids(conn, job, after, chunk)
                if not ids:
                    with db.write(conn):
                        recheck_jobs.progress(conn, job_id, done=done, changed=changed, after_pile_id=after,
                                              state="done")
                        recheck_jobs.finish(conn, job_id, "done")
                    return
                planned = saving.plan_rechecks(conn, job.project_id, piles_q.by_ids(conn, job.project_id, ids))
                with db.write(conn):
                    left: list[int] = []
                    moved = saving.store_rechecks(conn, job.project_id, planned, who, job.reason, job.actor, left)
                    if left:
                        moved += saving.recheck_stored(conn, job.project_id, piles_q.by_ids(conn, job.project_id, left),
                                                       who, job.reason, job.actor)
                    done, changed, after = done + len(ids), changed + len(moved), ids[-1]
                    recheck_jobs.progress(conn, job_id, done=done, changed=changed, after_pile_id=after)
        except Exception as exc:  # noqa: BLE001 - the job row says what stopped it
            with db.write(conn):
                recheck_jobs.finish(conn, job_id, "failed", f"{type(exc).__name__}: {exc}")
            raise
    finally:
        with _lock:
            _running.discard(job_id)


def resume_all(app) -> list[threading.Thread]:
    """Start a thread for every project with an unfinished job (at server start)."""
    with app.app_context():
        jobs = recheck_jobs.unfinished(db.get_db())
    first = {}
    for job in jobs:
        first.setdefault(job.project_id, job.id)
    return [start(app, job_id) for job_id in first.values()]
