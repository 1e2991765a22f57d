"""The Record screen: build the certification record in the background, watch its progress,
download it; download the as-built schedule as CSV or XLSX.

Routes
------
* ``GET  /projects/<id>/record`` (``record.overview``): counts, the newest build with a progress
  bar (``static/record.js`` polls the JSON below), download links.
* ``POST /projects/<id>/record/builds``: start a build (a child process,
  ``fieldapp.record.worker``) unless one is running; its progress is stored in ``record_jobs``,
  so a reload, another tab or another person sees it. Each build is an issue: a new revision,
  signed, kept in ``record_issues``.
* ``GET  /projects/<id>/record/builds/<job_id>``: JSON ``{"id", "status", "done", "total",
  "percent", "error", "head_hash", "download"}``.
* ``GET  /projects/<id>/record/builds/<job_id>/pdf``: the finished PDF.
* ``GET  /projects/<id>/record/schedule.<csv|xlsx>``: the as-built schedule.
* ``GET  /projects/<id>/ncr`` (``record.ncr``) and ``/projects/<id>/ncr.csv``: the
  non-conformance register on its own screen and as CSV.

Every member of the project may build and download (the certifier reads the record too).
"""

from __future__ import annotations

import subprocess
import sys
import threading
from datetime import datetime, timedelta, timezone
from pathlib import Path

from flask import Blueprint, Response, abort, current_app, jsonify, redirect, render_template, send_file, url_for
from flask import g
from flask_wtf import FlaskForm

from fieldapp import CAUTION, db, drawings
from fieldapp.auth import login_required, project_or_404
from fieldapp.queries import ncr, record_issues
from fieldapp.queries import review as review_q
from fieldapp.record import export

bp = Blueprint("record", __name__)

STALE_AFTER_S = 600          # a running build not heard of for this long has lost its worker
_running: dict[int, subprocess.Popen] = {}
_lock = threading.Lock()


class BuildForm(FlaskForm):
    """Only the CSRF token: the button that starts a build."""


def _records_dir() -> Path:
    path = Path(current_app.config["DATA_DIR"]) / "records"
    path.mkdir(exist_ok=True)
    return path


def _stale(job: review_q.RecordJob) -> bool:
    """True when a queued or running build has no live worker in this process and has not
    moved for STALE_AFTER_S (the server stopped during the build)."""
    if job.status not in ("queued", "running"):
        return False
    with _lock:
        worker = _running.get(job.id)
        alive = worker is not None and worker.poll() is None
    if alive:
        return False
    try:
        moved = datetime.fromisoformat(job.updated_at)
    except ValueError:
        return True
    return datetime.now(timezone.utc) - moved > timedelta(seconds=STALE_AFTER_S)


def _fresh(conn, project_id: int, job: review_q.RecordJob | None) -> review_q.RecordJob | None:
    """The job, failed first when its worker is gone."""
    if job is not None and _stale(job):
        with db.write(conn):
            review_q.mark_job_stalled(conn, job.id, "the server stopped during the build: start it again")
        job = review_q.get_job(conn, project_id, job.id)
    return job


def start_build(project_id: int, user_id: int | None) -> tuple[review_q.RecordJob, bool]:
    """Start a build unless one is under way; returns (job, started)."""
    conn = db.get_db()
    with db.write(conn):
        active = review_q.active_job(conn, project_id)
        if active is not None and not _stale(active):
            return active, False
        if active is not None:
            review_q.mark_job_stalled(conn, active.id, "the server stopped during the build: start it again")
        job_id = review_q.create_job(conn, project_id, user_id, len(review_q.pile_statuses(conn, project_id)))
    out = _records_dir() / f"project-{project_id}-record-{job_id}.pdf"
    config = current_app.config
    worker = subprocess.Popen(
        [sys.executable, "-m", "fieldapp.record.worker", str(config["DATABASE"]), str(config["DATA_DIR"]),
         str(config["PHOTO_DIR"]), str(project_id), str(job_id), str(out)],
        stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, close_fds=True)
    with _lock:
        for old in [k for k, p in _running.items() if p.poll() is not None]:
            _running.pop(old)       # reaped
        _running[job_id] = worker
    return review_q.get_job(conn, project_id, job_id), True


def _job_json(project_id: int, job: review_q.RecordJob) -> dict:
    body = job.to_dict()
    body["download"] = (url_for("record.download", project_id=project_id, job_id=job.id)
                        if job.status == "done" else None)
    return body


@bp.get("/projects/<int:project_id>/record")
@login_required
def overview(project_id: int):
    """Counts, the newest build and its progress, downloads."""
    project = project_or_404(project_id)
    conn = db.get_db()
    job = _fresh(conn, project.id, review_q.latest_job(conn, project.id))
    statuses = review_q.pile_statuses(conn, project.id)
    counts: dict[str, int] = {}
    for s in statuses:
        counts[s.status] = counts.get(s.status, 0) + 1
    unsigned = sum(1 for s in statuses if not s.signed)
    issues = record_issues.for_project(conn, project.id)
    return render_template("record.html", project=project, job=job, form=BuildForm(), counts=counts, issues=issues,
                           labels=drawings.STATUS_LABELS, total=len(statuses), unsigned=unsigned,
                           job_json=_job_json(project.id, job) if job else None)


@bp.post("/projects/<int:project_id>/record/builds")
@login_required
def build(project_id: int):
    """Start a background build (or join the one running) and go back to the screen."""
    project = project_or_404(project_id)
    form = BuildForm()
    if not form.validate_on_submit():
        abort(400)
    start_build(project.id, g.user.id)
    return redirect(url_for("record.overview", project_id=project.id))


@bp.get("/projects/<int:project_id>/record/builds/<int:job_id>")
@login_required
def job_status(project_id: int, job_id: int):
    """The stored progress of one build (polled by static/record.js)."""
    project = project_or_404(project_id)
    conn = db.get_db()
    job = _fresh(conn, project.id, review_q.get_job(conn, project.id, job_id))
    if job is None:
        return jsonify({"error": "not found"}), 404
    return jsonify(_job_json(project.id, job))


@bp.get("/projects/<int:project_id>/record/builds/<int:job_id>/pdf")
@login_required
def download(project_id: int, job_id: int):
    """The finished record."""
    project = project_or_404(project_id)
    job = review_q.get_job(db.get_db(), project.id, job_id)
    if job is None or job.status != "done" or not job.path or not Path(job.path).exists():
        abort(404)
    stamp = (job.finished_at or "")[:10]
    return send_file(job.path, mimetype="application/pdf", as_attachment=True,
                     download_name=f"record-project-{project.id}-{stamp}-{job.id}.pdf")


@bp.get("/projects/<int:project_id>/record/schedule.<fmt>")
@login_required
def schedule(project_id: int, fmt: str):
    """The as-built schedule as CSV or XLSX."""
    project = project_or_404(project_id)
    if fmt not in export.FORMATS:
        abort(404)
    body = export.asbuilt_schedule(db.get_db(), project.id, fmt)
    mimetype = ("text/csv; charset=utf-8" if fmt == "csv"
                else "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet")
    return Response(body, mimetype=mimetype, headers={
        "Content-Disposition": f'attachment; filename="asbuilt-schedule-project-{project.id}.{fmt}"'})



def _register(project_id: int) -> list[ncr.NonConformance]:
    conn = db.get_db()
    with db.write(conn):
        ncr.sync(conn, project_id)
    return ncr.register(conn, project_id)


@bp.get("/projects/<int:project_id>/ncr")
@login_required
def ncr_register(project_id: int):
    """The non-conformance register on its own screen."""
    project = project_or_404(project_id)
    items = _register(project.id)
    return render_template("record_ncr.html", project=project, items=items,
                           open_count=sum(1 for n in items if n.state == ncr.OPEN))


@bp.get("/projects/<int:project_id>/ncr.csv")
@login_required
def ncr_csv(project_id: int):
    """The non-conformance register as CSV (every cell through ``text_rules.csv_cell``)."""
    project = project_or_404(project_id)
    body = export.ncr_csv(_register(project.id), CAUTION)
    return Response(body, mimetype="text/csv; charset=utf-8", headers={
        "Content-Disposition": f'attachment; filename="ncr-project-{project.id}.csv"'})
