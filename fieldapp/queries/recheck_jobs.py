"""Background rechecks of recorded piles (``fieldapp.jobs``): one row per job with its progress."""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass
from datetime import datetime, timezone

STATES = ("waiting", "running", "done", "failed")
UNFINISHED = ("waiting", "running")


@dataclass(frozen=True)
class Job:
    """A recheck job: who and why, which piles (all, or those of one ground model), progress."""

    id: int
    project_id: int
    reason: str
    actor: str
    user_id: int | None
    ground_model_id: int | None
    state: str
    total: int
    done: int
    changed: int
    after_pile_id: int
    error: str | None
    created_at: str
    finished_at: str | None

    def to_dict(self) -> dict:
        """The job as the API gives it."""
        return {"id": self.id, "state": self.state, "reason": self.reason, "total": self.total,
                "done": self.done, "changed": self.changed, "error": self.error,
                "created_at": self.created_at, "finished_at": self.finished_at}


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def _job(row) -> Job | None:
    return Job(**dict(row)) if row else None


def create(conn: sqlite3.Connection, project_id: int, reason: str, actor: str, user_id: int | None,
           ground_model_id: int | None, total: int) -> int:
    """Add a waiting job; returns its id. Call inside db.write (with the change it follows)."""
    return conn.execute(
        "INSERT INTO recheck_jobs (project_id, reason, actor, user_id, ground_model_id, total, created_at)"
        " VALUES (?, ?, ?, ?, ?, ?, ?)",
        (project_id, reason, actor, user_id, ground_model_id, total, _now())).lastrowid


def get(conn: sqlite3.Connection, job_id: int) -> Job | None:
    """One job, or None."""
    return _job(conn.execute("SELECT * FROM recheck_jobs WHERE id = ?", (job_id,)).fetchone())


def unfinished(conn: sqlite3.Connection, project_id: int | None = None) -> list[Job]:
    """Jobs waiting or running (of one project, or of all), oldest first."""
    sql = "SELECT * FROM recheck_jobs WHERE state IN ('waiting', 'running')"
    params: tuple = ()
    if project_id is not None:
        sql += " AND project_id = ?"
        params = (project_id,)
    return [_job(r) for r in conn.execute(sql + " ORDER BY id", params).fetchall()]


def latest(conn: sqlite3.Connection, project_id: int) -> Job | None:
    """The project's newest job, or None."""
    return _job(conn.execute("SELECT * FROM recheck_jobs WHERE project_id = ? ORDER BY id DESC LIMIT 1",
                             (project_id,)).fetchone())


def next_pile_ids(conn: sqlite3.Connection, job: Job, after_id: int, limit: int) -> list[int]:
    """Ids of the next ``limit`` recorded piles of the job (after ``after_id``, in id order)."""
    sql = "SELECT id FROM piles WHERE project_id = ? AND current_version > 0 AND id > ?"
    params: list = [job.project_id, after_id]
    if job.ground_model_id is not None:
        sql += " AND ground_model_id = ?"
        params.append(job.ground_model_id)
    return [r[0] for r in conn.execute(sql + " ORDER BY id LIMIT ?", params + [limit]).fetchall()]


def progress(conn: sqlite3.Connection, job_id: int, *, done: int, changed: int, after_pile_id: int,
             state: str = "running") -> None:
    """Note a chunk done (inside the chunk's transaction)."""
    conn.execute("UPDATE recheck_jobs SET state = ?, done = ?, changed = ?, after_pile_id = ? WHERE id = ?",
                 (state, done, changed, after_pile_id, job_id))


def finish(conn: sqlite3.Connection, job_id: int, state: str, error: str | None = None) -> None:
    """Mark the job done or failed."""
    conn.execute("UPDATE recheck_jobs SET state = ?, error = ?, finished_at = ? WHERE id = ?",
                 (state, error, _now(), job_id))
