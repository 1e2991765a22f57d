"""Signing in and out, the project list, and the access rules used by every screen.

Access rules are decorators (``login_required``, ``engineer_required``, ``recorder_required``)
and one helper, :func:`project_or_404`, that returns the project only to its members: a user
never learns that another project's id exists.
"""

from __future__ import annotations

import functools
from urllib.parse import quote, unquote

from flask import (Blueprint, abort, current_app, flash, g, jsonify, redirect, render_template, request,
                   session, url_for)
from flask_wtf import FlaskForm
from wtforms import EmailField, PasswordField
from wtforms.validators import DataRequired, Length

from fieldapp import db
from fieldapp.forms import ProjectForm
from fieldapp.queries import audit, projects, users

bp = Blueprint("auth", __name__)


class LoginForm(FlaskForm):
    """Email and password."""

    email = EmailField("Email", validators=[DataRequired(message="email is required"),
                                            Length(max=254)])
    password = PasswordField("Password", validators=[DataRequired(message="password is required"),
                                                     Length(max=1024)])


def init_app(app) -> None:
    """Register the blueprint and load the signed-in user before each request."""
    app.register_blueprint(bp)
    app.before_request(_load_user)


def _session_token() -> str | None:
    """The session token the signed cookie carries (``users.start_session``), or None."""
    token = session.get("sid")
    return token if isinstance(token, str) and token else None


def _load_user() -> None:
    token = _session_token()
    g.user = None
    if token:
        max_age = current_app.permanent_session_lifetime.total_seconds()
        g.user = users.session_user(db.get_db(), token, max_age)
    if g.user is None and _is_api() and request.method not in ("GET", "HEAD", "OPTIONS"):
        _deny(401)  # every API write needs a signed-in user; say so before the CSRF check


def _is_api() -> bool:
    return request.path.startswith("/api/")


def _deny(status: int):
    if _is_api():
        messages = {401: "login required", 403: "forbidden", 404: "not found"}
        response = jsonify({"error": messages[status]})
        response.status_code = status
        abort(response)
    abort(status)


def login_required(view):
    """Only signed-in users; pages redirect to the login, the API answers 401."""
    @functools.wraps(view)
    def wrapped(*args, **kwargs):
        if g.get("user") is None:
            if _is_api():
                _deny(401)
            return redirect(url_for("auth.login", next=request.path))
        return view(*args, **kwargs)
    return wrapped


def engineer_required(view):
    """Only engineers and admins: they change ground, rules and schedule and sign off (403 else)."""
    @functools.wraps(view)
    @login_required
    def wrapped(*args, **kwargs):
        if not g.user.is_engineer:
            _deny(403)
        return view(*args, **kwargs)
    return wrapped


def recorder_required(view):
    """Inspectors, engineers and admins: they record piles; a viewer changes nothing (403)."""
    @functools.wraps(view)
    @login_required
    def wrapped(*args, **kwargs):
        if not g.user.can_record:
            _deny(403)
        return view(*args, **kwargs)
    return wrapped


def admin_required(view):
    """Only admins (403 else)."""
    @functools.wraps(view)
    @login_required
    def wrapped(*args, **kwargs):
        if g.user.role != "admin":
            _deny(403)
        return view(*args, **kwargs)
    return wrapped


# What a path and query may hold unescaped (RFC 3986 pchar, "/" and "?"); anything else is
# percent-escaped before the checks, so no raw control character, space or backslash remains.
_PATH_SAFE = "/?-._~!$&'()*+,;=:@%"


def safe_next(target) -> str | None:
    """``target`` (escaped) when it is a same-site relative path to follow after sign-in, else None.

    Refused: anything not starting with one "/" ("//evil", "https://...", "javascript:"),
    backslashes ("/\\evil", which browsers read as "//evil"), control characters (browsers drop
    a tab or line break, so "/\t/evil" becomes "//evil"; a line break in a Location header is a
    500), and the same again once percent-escapes are decoded ("/%2F/evil"). A letter outside
    ASCII (a pile mark "Pé") is kept, percent-escaped.
    """
    if not isinstance(target, str) or not target.startswith("/"):
        return None
    decoded = unquote(target)
    for text in (target, decoded):
        if text.startswith(("//", "/\\")) or any(ch < " " or ch == "\x7f" or ch == "\\" for ch in text):
            return None
    return quote(target, safe=_PATH_SAFE)


def project_or_404(project_id: int) -> projects.Project:
    """The project when the signed-in user may see it (member, or admin); 404 otherwise."""
    conn = db.get_db()
    project = projects.get(conn, project_id)
    if project is None or g.user is None:
        _deny(404)
    if g.user.role != "admin" and not users.is_member(conn, project_id, g.user.id):
        _deny(404)
    return project


@bp.route("/login", methods=["GET", "POST"])
def login():
    """Sign in with email and password; repeated failures are slowed down (429).

    Two limits within LOGIN_WINDOW_S: LOGIN_MAX_FAILURES wrong passwords for one email lock that
    email (even the right password waits), and LOGIN_MAX_FAILURES_PER_IP failures from one
    address, for any email, lock that address, with one exception: the right password of a
    user who has signed in successfully from this address before passes the address limit.
    A site office shares one address, so without the exception one person's (or one broken
    tablet's) failures would lock out every engineer there; the exception gives a guesser
    nothing, because the per-email limit still holds for everyone and an address that never
    signed this user in stays locked. Only a known address costs a password check past the
    limit (no hashing work for an address that is locked out).
    """
    form = LoginForm()
    if form.validate_on_submit():
        conn = db.get_db()
        email = form.email.data.strip().lower()
        max_failures = current_app.config["LOGIN_MAX_FAILURES"]
        window = current_app.config["LOGIN_WINDOW_S"]
        ip = request.remote_addr or ""
        if users.recent_failures(conn, email, window) >= max_failures:
            flash(f"Too many failed logins for this email: wait {window // 60} minutes and try again.")
            return render_template("login.html", form=form), 429
        address_locked = (users.recent_failures_from(conn, ip, window)
                          >= current_app.config["LOGIN_MAX_FAILURES_PER_IP"])
        if address_locked and not users.known_address(conn, email, ip):
            return _address_locked(form, window)
        user = users.authenticate(conn, email, form.password.data)
        if user is None:
            with db.write(conn):
                users.record_login_failure(conn, email, ip)
                audit.append(conn, None, email, "login failed", email, {"ip": ip})
            if address_locked:
                return _address_locked(form, window)
            flash("Email or password is wrong.")
            return render_template("login.html", form=form), 401
        with db.write(conn):
            users.clear_failures(conn, email)
            users.remember_address(conn, user.id, ip)
            token = users.start_session(conn, user.id)
        session.clear()  # a new session at every login
        session["sid"] = token
        session.permanent = True
        return redirect(safe_next(request.args.get("next")) or url_for("auth.index"))
    status = 400 if request.method == "POST" else 200
    return render_template("login.html", form=form), status


def _address_locked(form, window: int):
    flash(f"Too many failed logins from this device's network: wait {window // 60} minutes and try "
          "again (someone who has signed in from here before may sign in with their password).")
    return render_template("login.html", form=form), 429


@bp.post("/logout")
def logout():
    """Sign out: the session ends on the server too, so a copy of the cookie is worthless."""
    token = _session_token()
    if token:
        conn = db.get_db()
        with db.write(conn):
            users.end_session(conn, token)
    session.clear()
    return redirect(url_for("auth.login"))


@bp.post("/logout/everywhere")
@login_required
def logout_everywhere():
    """Log out on every device (a lost tablet): every session of this user ends, this one too."""
    conn = db.get_db()
    with db.write(conn):
        ended = users.end_sessions(conn, g.user.id)
        audit.append(conn, None, g.user.label, "sessions ended", g.user.email,
                     {"sessions": ended, "by": "the user"})
    session.clear()
    flash(f"Logged out on every device: {ended} session{'s' if ended != 1 else ''} ended. Saves "
          "waiting on a tablet stay on it until someone logs in there again.")
    return redirect(url_for("auth.login"))


@bp.route("/projects/new", methods=["GET", "POST"])
@admin_required
def new_project():
    """Create a project (admin only): name, site, datum and engineer of record; the default
    rules become its version 1 (check them against the project's specification on Rules).
    Audited as "project created", the first entry of the project's chain."""
    form = ProjectForm()
    if form.validate_on_submit():
        conn = db.get_db()
        with db.write(conn):
            project_id = projects.add_project(conn, form.values(), g.user.label, g.user.id)
        flash(f"Project {form.name.data.strip()} created (id {project_id}). Its rules are the defaults: "
              "check them against the project's specification before recording.")
        return redirect(url_for("auth.index"))
    status = 400 if request.method == "POST" else 200
    return render_template("project_new.html", form=form), status


@bp.get("/")
@login_required
def index():
    """The projects the user belongs to."""
    return render_template("projects.html",
                           projects=projects.for_user(db.get_db(), g.user.id, g.user.role))
