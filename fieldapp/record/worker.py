"""The record build as a child process of the server: ``python -m fieldapp.record.worker
DATABASE DATA_DIR PHOTO_DIR PROJECT_ID JOB_ID OUT``.

A build runs for minutes on a large project; in its own process it holds no request thread,
takes none of the server's memory and can tune its own garbage collector. Progress goes into
``record_jobs`` (so a reload, another tab or another person sees it), and the job ends ``done``
or ``failed`` with the reason, never left ``running``.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

from fieldapp import db
from fieldapp.queries import audit, users
from fieldapp.queries import review as review_q
from fieldapp.record import issue

PROGRESS_EVERY_S = 0.5       # write progress at most this often (and at the end)


def run(database: str, data_dir: str, photo_dir: str, project_id: int, job_id: int, out: str) -> int:
    """Build one job; 0 when done, 1 when it failed (the reason is stored with the job)."""
    conn = db.connect(database)
    try:
        last = [0.0]

        def progress(done: int, total: int) -> None:
            now = time.monotonic()
            if now - last[0] >= PROGRESS_EVERY_S or done == total:
                last[0] = now
                with db.write(conn):
                    review_q.update_job(conn, job_id, done=done, total=total)

        job = review_q.get_job(conn, project_id, job_id)
        starter = users.by_id(conn, job.started_by) if job and job.started_by else None
        with db.write(conn):
            review_q.update_job(conn, job_id, status="running", done=0,
                                total=len(review_q.pile_statuses(conn, project_id)))
        result = issue.issue(database, data_dir, photo_dir, project_id, out,
                             issued_by=starter.label if starter else "record",
                             issued_role=starter.role if starter else "", progress=progress, write_conn=conn)
        with db.write(conn):
            review_q.update_job(conn, job_id, status="done", done=result.build.piles, total=result.build.piles,
                                path=str(out), head_hash=result.build.head_hash, size_bytes=Path(out).stat().st_size,
                                finished_at=audit.now_iso())
        return 0
    except Exception as exc:  # the build failed: say so on the screen, never leave it "running"
        try:
            with db.write(conn):
                review_q.update_job(conn, job_id, status="failed", error=f"{type(exc).__name__}: {exc}"[:500],
                                    finished_at=audit.now_iso())
        except Exception:
            pass
        return 1
    finally:
        conn.close()


if __name__ == "__main__":
    database, data_dir, photo_dir, project_id, job_id, out = sys.argv[1:7]
    sys.exit(run(database, data_dir, photo_dir, int(project_id), int(job_id), out))
