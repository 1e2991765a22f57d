"""The JSON API under ``/api/v1`` (the tablet page and its offline outbox use the same calls).

Routes (all need the session cookie; writes also the ``X-CSRFToken`` header):

* ``GET  /session`` -> ``{"user", "name", "role", "csrf_token"}``
* ``GET  /projects`` -> ``{"projects": [{"id", "name", "site"}]}``
* ``GET  /projects/<id>/piles`` -> ``{"project", "piles": [...design values, progress, verdict,
  version...]}``
* ``GET  /projects/<id>/piles/<mark>`` -> the rig data of one pile (``rig_view.rig_data``)
* ``PUT  /projects/<id>/piles/<mark>/record`` with ``{"client_id", "base_version", "record"}``
  -> 200 ``{"version", "verdict", "checks", ...}``; same client_id and record -> same answer;
  same client_id with another record (client ids are kept per project) -> 409
  ``{"error": "client_id reused"}``, for another pile 422; 409 ``{"error": "conflict", "server": {...}}``;
  409 ``{"error": "locked"}`` (a signed version changed without an amendment);
  422 ``{"errors": {field: message}}``
* ``POST /projects/<id>/piles/<mark>/preview`` with ``{"record": {...}}`` (the PUT's body; other
  keys are ignored) -> 200 ``{"verdict", "checks", "required_toe_level", "more_needed_m", ...}``:
  the recheck a save would make (design_core on the as-built pile and the strata met), nothing
  stored, no version, no audit entry; 422 as the PUT. Access as the PUT (viewer 403).
* ``GET  /projects/<id>/piles/<mark>/history`` -> ``{"mark", "versions": [...]}``
* ``POST /projects/<id>/piles/<mark>/photos`` (multipart ``file``, ``client_id``, ``kind``,
  ``caption``) -> 201 ``{"id", "sha256"}`` (200 with the same body on a repeat; another photo
  of the pile with the same client_id -> 409 ``{"error": "client_id reused"}``, for another pile
  422)
* ``GET  /projects/<id>/piles/<mark>/photos`` -> ``{"photos": [...]}``
* ``GET  /projects/<id>/photos/<photo_id>/<size>`` size ``thumb``, ``display`` or
  ``original``: the image file (members only).

Access: not signed in 401; not a member of the project 404 (the project's existence is not
revealed); a viewer writing 403. A body that is not JSON, or is nested too deeply to read, is a
400.
"""

from __future__ import annotations

import functools
import json
import re
from dataclasses import dataclass
from typing import Any

try:
    import orjson
except ModuleNotFoundError:  # optional speed-up of the pile list; jsonify does the same job
    orjson = None
from flask import Blueprint, abort, current_app, g, jsonify, request, send_file, url_for
from flask_wtf.csrf import CSRFError, generate_csrf
from PIL import Image
from werkzeug.exceptions import HTTPException, RequestEntityTooLarge

from fieldapp import db, photos, rig_view, saving
from fieldapp.auth import _deny, login_required, project_or_404
from fieldapp.queries import photos as photos_q
from fieldapp.queries import piles as piles_q
from fieldapp.queries import audit, projects, recheck_jobs, records
from fieldapp.record_input import RecordInvalid

bp = Blueprint("api", __name__, url_prefix="/api/v1")

CLIENT_ID = re.compile(r"^[A-Za-z0-9_-]{8,64}$")
SIZES = ("thumb", "display", "original")


def _error(status: int, **body):
    response = jsonify(body)
    response.status_code = status
    return response


@bp.errorhandler(RequestEntityTooLarge)
def _too_large(_exc):
    return _error(413, error=f"the upload is over {photos.MAX_BYTES // 1_048_576} MB")


@bp.app_errorhandler(HTTPException)
def _api_http_error(exc: HTTPException):
    """Under /api/ an unknown address or a wrong method is answered in JSON, like every other
    API error; elsewhere Flask's own page. A CSRF refusal stays Flask's HTML 400: the outbox
    (static/outbox.js) keeps and retries a save refused that way, with a fresh token."""
    if not request.path.startswith("/api/") or exc.code is None or isinstance(exc, CSRFError):
        return exc
    response = _error(exc.code, error="not found" if exc.code == 404 else (exc.description or exc.name))
    for name, value in exc.get_headers():
        if name in ("Allow", "Retry-After"):
            response.headers[name] = value
    return response


def _pile_or_404(project_id: int, mark: str):
    project = project_or_404(project_id)
    pile = piles_q.get_pile(db.get_db(), project.id, mark)
    if pile is None:
        abort(_error(404, error="not found"))
    return project, pile


def _may_record() -> None:
    if not g.user.can_record:
        _deny(403)


def json_body() -> Any:
    """The request's JSON body, or None when it is not JSON or cannot be read (nesting deeper
    than the parser's recursion limit raises RecursionError, which is a bad body, not a 500)."""
    try:
        return request.get_json(silent=True)
    except RecursionError:
        return None


def pile_summary(pile: piles_q.PileRow) -> dict:
    """One pile of the schedule as the API gives it: design values, progress, verdict, version."""
    return {
        "mark": pile.mark, "cap": pile.cap_mark, "pile_type": pile.pile_type,
        "easting": pile.easting_m, "northing": pile.northing_m,
        "cutoff_level": pile.cutoff_level_m, "toe_level": pile.toe_level_m,
        "diameter_mm": pile.diameter_mm, "ground_model": pile.ground_model_name,
        "compression_kn": pile.compression_kn, "tension_kn": pile.tension_kn,
        "shear_kn": pile.shear_kn, "moment_knm": pile.moment_knm, "n_bars": pile.n_bars,
        "bar_mm": pile.bar_mm, "cage_length": pile.cage_length_m, "fc_mpa": pile.fc_mpa,
        "fy_mpa": pile.fy_mpa, "exposure_class": pile.exposure_class, "cover_mm": pile.cover_mm,
        "head": pile.head, "progress": pile.progress, "verdict": pile.verdict,
        "worst_utilisation": pile.worst_utilisation, "version": pile.current_version,
    }


@bp.get("/session")
@login_required
def session_info():
    """Who is signed in and a CSRF token for writes."""
    return jsonify({"user": g.user.email, "name": g.user.label, "role": g.user.role,
                    "csrf_token": generate_csrf()})


@bp.get("/projects")
@login_required
def list_projects():
    """The projects the user belongs to (an admin sees all)."""
    items = projects.for_user(db.get_db(), g.user.id, g.user.role)
    return jsonify({"projects": [{"id": p.id, "name": p.name, "site": p.site} for p in items]})


PAGE_LIMIT_MAX = 5000


def _paging(args) -> tuple[int, int, str | None] | dict:
    """(limit, offset, after) from ``limit``, ``page`` (from 1) and ``after`` (a mark), or a
    dict of errors naming the field and its range."""
    errors = {}
    limit_text = args.get("limit", "500")
    limit = int(limit_text) if limit_text.isdigit() else 0
    if not 1 <= limit <= PAGE_LIMIT_MAX:
        errors["limit"] = f"must be a whole number from 1 to {PAGE_LIMIT_MAX}, got {limit_text!r}"
    page_text = args.get("page", "1")
    page = int(page_text) if page_text.isdigit() else 0
    if page < 1:
        errors["page"] = f"must be a whole number from 1, got {page_text!r}"
    if errors:
        return errors
    return limit, (page - 1) * limit, args.get("after")


@bp.get("/projects/<int:project_id>/piles")
@login_required
def list_piles(project_id: int):
    """The schedule of a project with progress, verdict and record version.

    Without ``page``, ``after`` or ``limit`` the whole schedule (as before paging). With any of
    them, one page in natural order of mark: ``limit`` piles (1 to 5,000, default 500), from
    ``page`` (1 = the first) or from the pile after the mark ``after``; the answer adds
    ``page`` {limit, offset, total, next_after, next_page} (null at the end). Each answer has an
    ETag of the audit head and the window, so an unchanged page answers 304.
    """
    project = project_or_404(project_id)
    cached = _pile_list(db.get_db(), project)
    token = cached.token
    window = ""
    payload = cached.payload
    if any(k in request.args for k in ("page", "after", "limit")):
        paging = _paging(request.args)
        if isinstance(paging, dict):
            return _error(422, errors=paging)
        limit, offset, after = paging
        if after is not None:
            offset = cached.index[after] + 1 if after in cached.index else len(cached.marks)
        marks = cached.marks[offset:offset + limit]
        end = offset + len(marks)
        more = end < len(cached.marks)
        window = f"-{offset}-{limit}"
        payload = _encode(project, [cached.rows[m] for m in marks], {
            "limit": limit, "offset": offset, "total": len(cached.marks),
            "next_after": marks[-1] if more and marks else None,
            "next_page": (offset // limit) + 2 if more and offset % limit == 0 else None})
    etag = f"list-{project.id}-{token[:40]}{window}"
    if token != audit.GENESIS and request.if_none_match.contains(etag):
        return current_app.response_class(status=304, headers={"ETag": f'"{etag}"'})
    return current_app.response_class(payload, mimetype="application/json",
                                      headers={"ETag": f'"{etag}"', "Cache-Control": "private, no-cache"})


# Audit actions whose subject is a pile mark and which change only that pile's row of the list,
# and actions that change no row. Any other action since the cached list rebuilds it whole.
_ROW_ACTIONS = frozenset({"record saved", "record rechecked"})
_NO_ROW_ACTIONS = frozenset({"photo added", "sign-off", "sign-off refused", "amendment", "record built"})


@dataclass(frozen=True)
class _CachedList:
    token: str
    seq: int
    marks: tuple[str, ...]
    rows: dict
    payload: bytes

    @functools.cached_property
    def index(self) -> dict[str, int]:
        """Mark -> its place in ``marks`` (for ``?after=``)."""
        return {m: i for i, m in enumerate(self.marks)}


def _encode(project, rows: list[dict], page: dict | None = None) -> bytes:
    body = {"project": {"id": project.id, "name": project.name}, "piles": rows}
    if page is not None:
        body["page"] = page
    # orjson writes the same JSON (keys sorted as jsonify does) about 8 times faster; the
    # profile of the web benchmark showed the standard encoder holding the GIL for 41 % of
    # all server time.
    if orjson is not None:
        return orjson.dumps(body, option=orjson.OPT_SORT_KEYS)
    return json.dumps(body, sort_keys=True).encode()


def _pile_list(conn, project) -> "_CachedList":
    """The encoded pile list, its rows and the audit head hash it stands for.

    Every change the list shows appends to the project's audit chain in its own transaction,
    so the head names the list's state. The list (0.9 MB for 2,000 piles) is kept per project;
    when only record saves and rechecks came since, just those piles' rows are read again,
    otherwise the list is rebuilt.
    """
    seq, token = audit.head(conn, project.id)
    cache = current_app.extensions.setdefault("toeline.pile_lists", {})
    cached = cache.get(project.id)
    if cached is not None and token != audit.GENESIS:
        if cached.token == token:
            return cached
        entries = audit.entries_after(conn, project.id, cached.seq) if seq > cached.seq else []
        if (entries and entries[0]["prev_hash"] == cached.token and entries[-1]["hash"] == token
                and all(e["action"] in _ROW_ACTIONS | _NO_ROW_ACTIONS for e in entries)):
            rows = dict(cached.rows)
            for mark in {e["subject"] for e in entries if e["action"] in _ROW_ACTIONS}:
                pile = piles_q.get_pile(conn, project.id, mark)
                if pile is None or mark not in rows:
                    break
                rows[mark] = pile_summary(pile)
            else:
                payload = _encode(project, [rows[m] for m in cached.marks])
                cache[project.id] = _CachedList(token, seq, cached.marks, rows, payload)
                return cache[project.id]
    piles = piles_q.list_piles(conn, project.id)
    rows = {p.mark: pile_summary(p) for p in piles}
    marks = tuple(p.mark for p in piles)
    payload = _encode(project, [rows[m] for m in marks])
    out = _CachedList(token, seq, marks, rows, payload)
    if token != audit.GENESIS:
        cache[project.id] = out
    return out


@bp.get("/projects/<int:project_id>/recheck-job")
@login_required
def recheck_job(project_id: int):
    """The project's newest background recheck and its progress: id, state (waiting, running,
    done, failed), reason, total, done, changed, error; {"state": null} when there was none."""
    project = project_or_404(project_id)
    job = recheck_jobs.latest(db.get_db(), project.id)
    return jsonify(job.to_dict() if job else {"state": None})


@bp.get("/projects/<int:project_id>/piles/<mark>")
@login_required
def show_pile(project_id: int, mark: str):
    """One pile with its newest record, capacity curve and limits (the rig page's data)."""
    project, pile = _pile_or_404(project_id, mark)
    return jsonify(rig_view.rig_data(db.get_db(), project.id, pile))


@bp.put("/projects/<int:project_id>/piles/<mark>/record")
@login_required
def put_record(project_id: int, mark: str):
    """Save a new version of the pile's as-built record and recheck it (module docstring)."""
    project, pile = _pile_or_404(project_id, mark)
    _may_record()
    body = json_body()
    if not isinstance(body, dict):
        return _error(400, error="the body must be a JSON object with client_id, base_version, record")
    client_id = body.get("client_id")
    if not isinstance(client_id, str) or not CLIENT_ID.match(client_id):
        return _error(422, errors={"client_id": "must be an id made by the client: 8 to 64 letters, "
                                                "digits, - or _ (a UUID)"})
    amendment = body.get("amendment")
    if amendment is not None and not isinstance(amendment, dict):
        return _error(422, errors={"amendment": "must be an object with a reason"})
    conn = db.get_db()
    earlier = records.by_client_id(conn, project.id, client_id)
    if earlier is not None and earlier.pile_id == pile.id and _same_json(body.get("record"), earlier.record):
        # the outbox sending a save again whose answer it lost: the first answer, with no
        # validation or recheck (any other use of the id takes the full path, which refuses it)
        return jsonify(earlier.answer())
    try:
        outcome = saving.save_record(conn, project.id, pile, g.user, client_id,
                                     body.get("base_version"), body.get("record"), amendment)
    except RecordInvalid as exc:
        return _error(422, errors=exc.errors)
    except saving.ClientIdOfAnotherPile as exc:
        return _error(422, errors={"client_id": str(exc)})
    except saving.ClientIdReused:
        return _error(409, error="client_id reused",
                      message="this client_id was used for another save: make a new one")
    except saving.RecordConflict as exc:
        server = exc.current.to_dict() if exc.current else {"version": exc.stored_version}
        return _error(409, error="conflict", server=server,
                      message=f"the record was changed on the server (now version {exc.stored_version})")
    except saving.PileLocked as exc:
        current = records.current(conn, pile.id)
        return _error(409, error="locked", message=str(exc),
                      server=current.to_dict() if current else {})
    return jsonify(outcome.answer())


def _same_json(raw: Any, stored: dict) -> bool:
    """Whether a record body as sent is the stored record (as JSON gives both back)."""
    try:
        return json.loads(json.dumps(raw, sort_keys=True)) == stored
    except (TypeError, ValueError):
        return False


@bp.post("/projects/<int:project_id>/piles/<mark>/preview")
@login_required
def preview_record(project_id: int, mark: str):
    """The recheck a save of this record would make, storing nothing (module docstring)."""
    project, pile = _pile_or_404(project_id, mark)
    _may_record()
    body = json_body()
    if not isinstance(body, dict):
        return _error(400, error="the body must be a JSON object with record")
    try:
        answer = rig_view.preview(db.get_db(), project.id, pile, body.get("record"))
    except RecordInvalid as exc:
        return _error(422, errors=exc.errors)
    return jsonify(answer)


@bp.get("/projects/<int:project_id>/piles/<mark>/record")
@login_required
def get_record(project_id: int, mark: str):
    """The newest version of the record (version 0 and an empty record when none)."""
    project, pile = _pile_or_404(project_id, mark)
    current = records.current(db.get_db(), pile.id)
    if current is None:
        return jsonify({"version": 0, "record": {}, "verdict": None, "checks": []})
    return jsonify(current.to_dict())


@bp.get("/projects/<int:project_id>/piles/<mark>/history")
@login_required
def history(project_id: int, mark: str):
    """Every saved version of the pile's record, oldest first."""
    project, pile = _pile_or_404(project_id, mark)
    versions = records.history(db.get_db(), pile.id)
    return jsonify({"mark": pile.mark, "versions": [v.to_dict() for v in versions]})


def photo_dict(project_id: int, photo: photos_q.Photo) -> dict:
    """A photo as the API lists it, with the addresses of its files."""
    out = photo.to_dict()
    for size in SIZES:
        out[f"{size}_url"] = url_for("api.photo_file", project_id=project_id, photo_id=photo.id,
                                     size=size)
    return out


@bp.post("/projects/<int:project_id>/piles/<mark>/photos")
@login_required
def post_photo(project_id: int, mark: str):
    """Add a photo (multipart: file, client_id, kind, caption) -> 201 {"id", "sha256"}."""
    project, pile = _pile_or_404(project_id, mark)
    _may_record()
    client_id = request.form.get("client_id", "")
    if not CLIENT_ID.match(client_id):
        return _error(422, errors={"client_id": "must be an id made by the client: 8 to 64 letters, "
                                                "digits, - or _ (a UUID)"})
    upload = request.files.get("file")
    if upload is None:
        return _error(422, errors={"file": "a photo file is required"})
    data = upload.read(photos.MAX_BYTES + 1)
    if len(data) > photos.MAX_BYTES:
        return _error(413, error=f"the file is over the limit of {photos.MAX_BYTES // 1_048_576} MB")
    try:
        photo, created = photos.add_photo(
            db.get_db(), project.id, pile, g.user, client_id, request.form.get("kind", ""),
            request.form.get("caption", ""), data, current_app.config["PHOTO_DIR"])
    except photos.PhotoRejected as exc:
        field = "kind" if str(exc).startswith("kind") else "caption" if str(exc).startswith("caption") else "file"
        return _error(422, errors={field: str(exc)})
    except photos.ClientIdReused:
        return _error(409, error="client_id reused",
                      message="this client_id was used for another photo: make a new one")
    except ValueError as exc:
        return _error(422, errors={"client_id": str(exc)})
    body = {"id": photo.id, "sha256": photo.sha256,
            "thumb_url": photo_dict(project.id, photo)["thumb_url"]}
    return jsonify(body), (201 if created else 200)


@bp.get("/projects/<int:project_id>/piles/<mark>/photos")
@login_required
def list_photos(project_id: int, mark: str):
    """The photos of a pile with the addresses of their files."""
    project, pile = _pile_or_404(project_id, mark)
    return jsonify({"photos": [photo_dict(project.id, p) for p in photos_q.for_pile(db.get_db(), pile.id)]})


@bp.get("/projects/<int:project_id>/photos/<int:photo_id>/<size>")
@login_required
def photo_file(project_id: int, photo_id: int, size: str):
    """The image file of a photo: thumb (320 px), display (1600 px) or the original."""
    project = project_or_404(project_id)
    photo = photos_q.get(db.get_db(), project.id, photo_id)
    if photo is None or size not in SIZES:
        return _error(404, error="not found")
    photo_dir = current_app.config["PHOTO_DIR"]
    if size == "original":
        path = photos.original_path(photo_dir, photo.sha256, photo.format)
        mimetype = _mimetype(photo.format)
    else:
        path = (photos.thumb_path if size == "thumb" else photos.display_path)(photo_dir, photo.sha256)
        mimetype = "image/jpeg"
    if not path.exists():
        return _error(404, error="the image file is missing from the data folder")
    response = send_file(path, mimetype=mimetype, max_age=86400, conditional=True)
    response.headers["Cache-Control"] = "private, max-age=86400, immutable"
    return response


def _mimetype(fmt: str) -> str:
    """The MIME type of a stored original by its Pillow format name."""
    return Image.MIME.get(fmt, "application/octet-stream")
