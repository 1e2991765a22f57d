"""The Review screen: the engineer's queue, disposition and sign-off, batch sign-off of clear
piles, the history of each pile; and the sign-off API.

Routes
------
* ``GET  /projects/<id>/review`` (``review.queue``): piles that need the engineer, worst first,
  with short checks, photos and pictures; the clear piles waiting for a batch sign-off.
* ``GET  /projects/<id>/review/piles/<mark>`` (``review.pile``): one pile, its pictures, the
  disposition and sign-off form, every version and who did what.
* ``POST /projects/<id>/review/piles/<mark>/signoff`` (form): disposition + sign-off.
* ``POST /projects/<id>/review/batch`` (form): sign off clear piles as ``accepted``.
* ``POST /api/v1/projects/<id>/piles/<mark>/signoff`` with ``{"disposition", "reasons",
  "password"}`` (optional ``"version"``, ``"remedial_of"``) -> ``200 {"signed": true,
  "record_hash", "version", "disposition"}``; inspector or viewer 403; wrong password 403 and
  nothing signed (after LOGIN_MAX_FAILURES wrong ones in LOGIN_WINDOW_S: 429); 422 ``{"errors": {...}}`` for a bad disposition or missing reasons; 409 when
  there is nothing to sign or it is signed already.

Sign-off rules: engineers (and admins) only, with the password typed again; reasons are required
unless the pile is accepted as meeting design. The signed record version is locked: the record
save refuses a plain change (409 ``locked``) and takes an amendment with a reason, which makes
a new version that needs its own sign-off (``fieldapp.signoff``, called by the save path
itself).
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass

from design_core.checks import MEETS_DESIGN
from flask import Blueprint, abort, current_app, flash, g, jsonify, redirect, render_template, request, url_for
from flask_wtf import FlaskForm
from wtforms import HiddenField, PasswordField, SelectField, TextAreaField
from wtforms.fields.choices import SelectChoice
from wtforms.validators import DataRequired, Length

from fieldapp import db, drawings
from fieldapp.api import json_body
from fieldapp.auth import engineer_required, login_required, project_or_404
from fieldapp.queries import audit, records, users
from fieldapp.queries import review as review_q
from fieldapp.queries import piles as piles_q
from fieldapp.record import data as record_data
from fieldapp.record_input import unicode_problem
from fieldapp.signoff import MAX_REASONS, SignRefused, sign_pile

bp = Blueprint("review", __name__)

PAGE_SIZE = 20


class TooManyTries(Exception):
    """Too many wrong passwords at sign-off in the login window."""


def _password_ok(conn: sqlite3.Connection, project_id: int, subject: str, password) -> bool:
    """Check the re-entered password; a wrong one is written to the audit trail. After
    LOGIN_MAX_FAILURES wrong ones within LOGIN_WINDOW_S, raises TooManyTries (even for the right
    password), so a left-open session cannot be used to guess it."""
    key = f"sign-off:{g.user.email}"
    if users.recent_failures(conn, key, current_app.config["LOGIN_WINDOW_S"]) >= \
            current_app.config["LOGIN_MAX_FAILURES"]:
        raise TooManyTries()
    if isinstance(password, str) and password and users.verify_password(conn, g.user.id, password):
        return True
    with db.write(conn):
        users.record_login_failure(conn, key)
        audit.append(conn, project_id, g.user.label, "sign-off refused", subject,
                     {"why": "wrong password"})
    return False


def _wait_message() -> str:
    return (f"Too many wrong passwords: wait {current_app.config['LOGIN_WINDOW_S'] // 60} minutes "
            "and try again. Nothing was signed.")


def _pile_status_or_404(conn, project_id: int, mark: str) -> review_q.PileStatus:
    status = review_q.pile_status(conn, project_id, mark)
    if status is None:
        if request.path.startswith("/api/"):
            abort(_json(404, {"error": "not found"}))
        abort(404)
    return status


def _json(status: int, body: dict):
    response = jsonify(body)
    response.status_code = status
    return response


# --- the API ---------------------------------------------------------------------------------------

@bp.post("/api/v1/projects/<int:project_id>/piles/<mark>/signoff")
@engineer_required
def api_signoff(project_id: int, mark: str):
    """Sign the pile's current record version (module docstring)."""
    project = project_or_404(project_id)
    conn = db.get_db()
    _pile_status_or_404(conn, project.id, mark)
    pile = piles_q.get_pile(conn, project.id, mark)
    body = json_body()
    if not isinstance(body, dict):
        return _json(400, {"error": "the body must be a JSON object with disposition, reasons, password"})
    errors = {name: problem for name in ("disposition", "reasons", "password")
              if isinstance(body.get(name), str) and (problem := unicode_problem(body[name]))}
    if errors:
        return _json(422, {"errors": errors, "signed": False})
    try:
        if not _password_ok(conn, project.id, mark, body.get("password")):
            return _json(403, {"error": "wrong password", "signed": False})
    except TooManyTries:
        return _json(429, {"error": "too many tries", "message": _wait_message(), "signed": False})
    version = body.get("version")
    if version is not None and (isinstance(version, bool) or not isinstance(version, int)):
        return _json(422, {"errors": {"version": "must be the whole number of the version you reviewed"}})
    try:
        signoff = sign_pile(conn, project.id, pile, g.user, body.get("disposition"), body.get("reasons"),
                            version=version, remedial_of=body.get("remedial_of"))
    except SignRefused as exc:
        return _json(exc.status, {**exc.body, "signed": False})
    return jsonify({"signed": True, "record_hash": signoff.record_hash, "version": signoff.version,
                    "disposition": signoff.disposition, "signed_at": signoff.signed_at})


# --- forms ----------------------------------------------------------------------------------------

class SignOffForm(FlaskForm):
    """Disposition and sign-off of one record version."""

    disposition = SelectField("Disposition", choices=[SelectChoice(d, d) for d in review_q.DISPOSITIONS],
                              validators=[DataRequired(message="choose a disposition")])
    reasons = TextAreaField("Reasons (what was decided and why; for remedial: what must be done)",
                            validators=[Length(max=MAX_REASONS)])
    remedial_of = SelectField("Resolves the remedial disposition of", choices=[], validate_choice=False)
    version = HiddenField()
    password = PasswordField("Your password (to sign)",
                             validators=[DataRequired(message="type your password to sign")])


class BatchForm(FlaskForm):
    """Password for signing clear piles in a batch."""

    password = PasswordField("Your password (to sign)",
                             validators=[DataRequired(message="type your password to sign")])


@dataclass
class QueueCard:
    """One pile on the queue: its sheet and its pictures as SVG."""

    sheet: record_data.PileSheet
    svgs: dict[str, str]


def _svgs(sheet: record_data.PileSheet) -> dict[str, str]:
    return {name: drawings.to_svg(fig) for name, fig in sheet.figures.items()}


@bp.get("/projects/<int:project_id>/review")
@login_required
def queue(project_id: int):
    """The review queue: piles needing the engineer, worst first; the clear piles to batch-sign."""
    project = project_or_404(project_id)
    conn = db.get_db()
    waiting = review_q.needs_engineer(conn, project.id)
    page = max(1, request.args.get("page", 1, type=int))
    pages = max(1, (len(waiting) + PAGE_SIZE - 1) // PAGE_SIZE)
    page = min(page, pages)
    cards = []
    for status in waiting[(page - 1) * PAGE_SIZE: page * PAGE_SIZE]:
        sheet = record_data.pile_sheet(conn, project.id, status)
        cards.append(QueueCard(sheet, _svgs(sheet)))
    clear = review_q.clear_unsigned(conn, project.id)
    statuses = review_q.pile_statuses(conn, project.id)
    counts = {}
    for s in statuses:
        counts[s.status] = counts.get(s.status, 0) + 1
    return render_template("review.html", project=project, cards=cards, waiting=len(waiting), page=page,
                           pages=pages, clear=clear, counts=counts, labels=drawings.STATUS_LABELS,
                           batch_form=BatchForm(), total=len(statuses))


def _signoff_form(conn, project_id: int, status: review_q.PileStatus, data=None) -> SignOffForm:
    form = SignOffForm(formdata=data)
    options = [SelectChoice("", "(none)")]
    for s in review_q.remedial_signoffs(conn, project_id):
        options.append(SelectChoice(str(s.id), f"{s.mark} v{s.version}: {s.reasons[:60]}"))
    form.remedial_of.choices = options
    if data is None:
        form.version.data = str(status.current_version)
        earlier = review_q.open_remedial(conn, project_id, status.id)
        if earlier is not None and earlier.version < status.current_version:
            form.remedial_of.data = str(earlier.id)
    return form


def _pile_page(project, status, form, code: int = 200):
    conn = db.get_db()
    sheet = record_data.pile_sheet(conn, project.id, status)
    history = records.history(conn, status.id)
    events = review_q.pile_audit(conn, project.id, status.mark)
    return render_template("review_pile.html", project=project, status=status, sheet=sheet, svgs=_svgs(sheet),
                           history=history, events=events, form=form,
                           reasons_optional=(status.verdict == MEETS_DESIGN)), code


@bp.get("/projects/<int:project_id>/review/piles/<mark>")
@login_required
def pile(project_id: int, mark: str):
    """One pile: checks, pictures, photos, the sign-off form and its history."""
    project = project_or_404(project_id)
    conn = db.get_db()
    status = _pile_status_or_404(conn, project.id, mark)
    return _pile_page(project, status, _signoff_form(conn, project.id, status))


@bp.post("/projects/<int:project_id>/review/piles/<mark>/signoff")
@engineer_required
def signoff(project_id: int, mark: str):
    """Disposition and sign-off from the form."""
    project = project_or_404(project_id)
    conn = db.get_db()
    status = _pile_status_or_404(conn, project.id, mark)
    form = _signoff_form(conn, project.id, status, request.form)
    if not form.validate():
        return _pile_page(project, status, form, 400)
    try:
        if not _password_ok(conn, project.id, mark, form.password.data):
            form.password.errors = ["the password is wrong: nothing was signed"]
            return _pile_page(project, status, form, 403)
    except TooManyTries:
        form.password.errors = [_wait_message()]
        return _pile_page(project, status, form, 429)
    pile_row = piles_q.get_pile(conn, project.id, mark)
    try:
        version = int(form.version.data) if form.version.data else None
        remedial = int(form.remedial_of.data) if form.remedial_of.data else None
    except ValueError:
        abort(400)
    try:
        done = sign_pile(conn, project.id, pile_row, g.user, form.disposition.data, form.reasons.data,
                         version=version, remedial_of=remedial)
    except SignRefused as exc:
        errors = exc.body.get("errors") or {}
        for name, message in errors.items():
            if hasattr(form, name):
                getattr(form, name).errors = [message]
        if not errors:
            flash(exc.body.get("message", "not signed"))
        return _pile_page(project, review_q.pile_status(conn, project.id, mark), form, exc.status)
    flash(f"Pile {mark} version {done.version} signed: {done.disposition}. Record hash {done.record_hash[:16]}…")
    return redirect(url_for("review.queue", project_id=project.id))


@bp.post("/projects/<int:project_id>/review/batch")
@engineer_required
def batch(project_id: int):
    """Sign off the ticked clear piles (meets design, logged) as accepted, one password."""
    project = project_or_404(project_id)
    conn = db.get_db()
    form = BatchForm()
    if not form.validate_on_submit():
        flash("Type your password to sign the batch.")
        return redirect(url_for("review.queue", project_id=project.id))
    picked = request.form.getlist("pile")
    if not picked:
        flash("Tick the piles to sign.")
        return redirect(url_for("review.queue", project_id=project.id))
    try:
        if not _password_ok(conn, project.id, "batch", form.password.data):
            flash("The password is wrong: nothing was signed.")
            return redirect(url_for("review.queue", project_id=project.id))
    except TooManyTries:
        flash(_wait_message())
        return redirect(url_for("review.queue", project_id=project.id))
    clear = {(s.mark, s.current_version) for s in review_q.clear_unsigned(conn, project.id)}
    signed, skipped = [], []
    for item in picked:
        mark, _, version = item.rpartition(":")
        if not version.isdigit() or (mark, int(version)) not in clear:
            skipped.append(mark or item)
            continue
        try:
            sign_pile(conn, project.id, piles_q.get_pile(conn, project.id, mark), g.user, "accepted", "",
                      version=int(version), batch=True)
            signed.append(mark)
        except SignRefused:
            skipped.append(mark)
    message = f"Signed {len(signed)} clear pile(s) as accepted."
    if skipped:
        message += f" Not signed (changed or not clear any more): {', '.join(skipped[:20])}."
    flash(message)
    return redirect(url_for("review.queue", project_id=project.id))
