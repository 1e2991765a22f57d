"""The OpenAPI 3 document of Toeline's JSON API, served at ``/api/v1/openapi.json``.

The tablet's outbox and any outside client use these calls; schemathesis tests the app against
this document (tests/reliability). Keep it in step with ``fieldapp/api.py``, ``review.py`` and
``offline.py``: a route missing here fails ``test_openapi_lists_every_api_route``.
"""

from __future__ import annotations

from flask import Blueprint, jsonify

from design_core.checks import MEETS_DESIGN, NEEDS_ENGINEER

bp = Blueprint("openapi", __name__)

NUMBER = {"type": ["number", "string", "null"],
          "description": "a number; a string with a comma decimal ('12,5') is accepted"}
TIME = {"type": ["string", "null"], "format": "date-time"}
TEXT = {"type": ["string", "null"], "maxLength": 4000}

RECORD = {
    "type": "object",
    "description": "The as-built pile record; every key optional (partial saves).",
    "properties": {
        "platform_level": NUMBER, "measured_depth": NUMBER, "diameter_mm": NUMBER,
        "cutoff_level": NUMBER, "casting_level": NUMBER, "easting": NUMBER, "northing": NUMBER,
        "inclination": NUMBER,
        "base_check": {"type": ["string", "null"],
                       "enum": ["sounding", "camera", "cleaning pass", "visual", None]},
        "debris_mm": NUMBER, "cage_length": NUMBER, "cover_mm": NUMBER,
        "exposure_class": {"type": ["string", "null"], "maxLength": 12},
        "concrete_mpa": NUMBER, "concrete_volume_m3": NUMBER,
        "deliveries": {"type": "array", "items": {"type": "object", "properties": {
            "docket": TEXT, "volume_m3": NUMBER, "batched_at": TIME, "discharged_at": TIME,
            "slump_mm": NUMBER}}},
        "pour_start": TIME, "pour_end": TIME,
        "strata": {"type": "array", "items": {"type": "object", "properties": {
            "from_depth": NUMBER, "to_depth": NUMBER,
            "material": {"type": "string", "enum": ["cohesive", "cohesionless", "rock", "ignore"]},
            "description": TEXT}}},
        "boring_start": TIME, "boring_end": TIME, "rig": TEXT, "notes": TEXT,
        "progress": {"type": "string", "enum": ["planned", "boring", "concreted", "logged"]},
    },
}

CHECK = {"type": "object", "properties": {
    "code": {"type": "string"}, "value": {"type": ["number", "null"]},
    "limit": {"type": ["number", "null"]}, "unit": {"type": "string"},
    "utilisation": {"type": ["number", "null"]}, "ok": {"type": ["boolean", "null"]},
    "reason": {"type": "string"}}}

VERDICT = {"type": "string", "enum": [MEETS_DESIGN, NEEDS_ENGINEER]}
ERROR = {"type": "object", "properties": {"error": {"type": "string"}}}
ERRORS = {"type": "object", "properties": {"errors": {"type": "object",
                                                      "additionalProperties": {"type": "string"}}}}


def _json(schema: dict, description: str) -> dict:
    return {"description": description, "content": {"application/json": {"schema": schema}}}


PROJECT_ID = {"name": "project_id", "in": "path", "required": True, "schema": {"type": "integer"}}
MARK = {"name": "mark", "in": "path", "required": True, "schema": {"type": "string"}}
CLIENT_ID = {"type": "string", "pattern": "^[A-Za-z0-9_-]{8,64}$",
             "description": "an id the client made for this write (a UUID): a repeat returns the first answer"}
# 400: a body that is not what the operation takes (JSON), or a missing/stale CSRF token
# (Flask-WTF's HTML page: the tablet's outbox keeps such a save and retries it with a new token).
BAD_REQUEST = {"description": "not a JSON object, or no valid CSRF token (then an HTML page)",
               "content": {"application/json": {"schema": {"type": "object", "properties": {
                   "error": {"type": "string"}}}},
                           "text/html": {"schema": {"type": "string"}}}}
# The disk refused the write (fieldapp.db.storage_fault): nothing was saved; try again later.
STORAGE = {"503": {"description": "the data folder is read-only: nothing saved",
                   "content": {"application/json": {"schema": {"type": "object", "properties": {
                       "error": {"type": "string"}}}}}},
           "507": {"description": "the server's disk is full: nothing saved",
                   "content": {"application/json": {"schema": {"type": "object", "properties": {
                       "error": {"type": "string"}}}}}}}
DENIED = {"401": _json(ERROR, "not signed in"), "403": _json(ERROR, "role may not do this"),
          "404": _json(ERROR, "no such project or pile for this user")}


def document() -> dict:
    """The OpenAPI document as a dict."""
    doc = {
        "openapi": "3.1.0",
        "info": {"title": "Toeline API", "version": "1",
                 "description": "Session cookie from POST /login; writes need the X-CSRFToken "
                                "header from GET /api/v1/session."},
        "components": {"securitySchemes": {
            "session": {"type": "apiKey", "in": "cookie", "name": "session"},
            "csrf": {"type": "apiKey", "in": "header", "name": "X-CSRFToken"}}},
        "security": [{"session": []}],
        "paths": {
            "/api/v1/session": {"get": {
                "summary": "who is signed in, and a CSRF token for writes",
                "responses": {"200": _json({"type": "object", "properties": {
                    "user": {"type": "string"}, "role": {"type": "string"},
                    "csrf_token": {"type": "string"}}}, "the session"), "401": DENIED["401"]}}},
            "/api/v1/projects": {"get": {
                "summary": "projects the user belongs to",
                "responses": {"200": _json({"type": "object"}, "projects with id and name"),
                              "401": DENIED["401"]}}},
            "/api/v1/projects/{project_id}/piles": {"get": {
                "summary": "the schedule with design values, progress, verdict and version",
                "parameters": [PROJECT_ID],
                "responses": {"200": _json({"type": "object"}, "piles"), **DENIED}}},
            "/api/v1/projects/{project_id}/recheck-job": {"get": {
                "summary": "the newest background recheck and its progress (state null when none)",
                "parameters": [PROJECT_ID],
                "responses": {"200": _json({"type": "object"}, "the job"), **DENIED}}},
            "/api/v1/projects/{project_id}/bundle": {"get": {
                "summary": "everything the tablet needs offline for one project (ETag)",
                "parameters": [PROJECT_ID],
                "responses": {"200": _json({"type": "object"}, "the bundle"),
                              "304": {"description": "unchanged since If-None-Match"}, **DENIED}}},
            "/api/v1/projects/{project_id}/piles/{mark}/record": {"put": {
                "summary": "save a version of the as-built record; rechecks the pile",
                "parameters": [PROJECT_ID, MARK],
                "security": [{"session": [], "csrf": []}],
                "requestBody": {"required": True, "content": {"application/json": {"schema": {
                    "type": "object", "required": ["client_id", "record"], "properties": {
                        "client_id": CLIENT_ID,
                        "base_version": {"type": ["integer", "null"]},
                        "record": RECORD,
                        "amendment": {"type": "object", "properties": {"reason": TEXT}}}}}}},
                "responses": {
                    "200": _json({"type": "object", "properties": {
                        "version": {"type": "integer"},
                        "verdict": VERDICT,
                        "checks": {"type": "array", "items": CHECK}}}, "saved and rechecked"),
                    "400": BAD_REQUEST, **STORAGE,
                    "409": _json({"type": "object", "properties": {
                        "error": {"type": "string", "enum": ["conflict", "locked", "client_id reused"]},
                        "server": {"type": "object"}}},
                        "changed on the server, signed, or the client_id was used for another record"),
                    "422": _json(ERRORS, "invalid fields, nothing saved"), **DENIED}}},
            "/api/v1/projects/{project_id}/piles/{mark}/preview": {"post": {
                "summary": "the recheck a save of this record would make (design_core on the as-built "
                           "pile and the strata met); nothing stored, no version, no audit entry",
                "parameters": [PROJECT_ID, MARK],
                "security": [{"session": [], "csrf": []}],
                "requestBody": {"required": True, "content": {"application/json": {"schema": {
                    "type": "object", "required": ["record"], "properties": {
                        "record": RECORD, "client_id": CLIENT_ID,
                        "base_version": {"type": ["integer", "null"]},
                        "amendment": {"type": "object", "properties": {"reason": TEXT}}}}}}},
                "responses": {
                    "200": _json({"type": "object",
                                  "required": ["verdict", "checks", "required_toe_level", "more_needed_m"],
                                  "properties": {
                                      "verdict": VERDICT,
                                      "checks": {"type": "array", "items": CHECK},
                                      "required_toe_level": {"type": ["number", "null"]},
                                      "more_needed_m": {"type": ["number", "null"]}}},
                                 "what the save would answer (required toe level and how much "
                                 "deeper than the recorded toe, in m)"),
                    "400": BAD_REQUEST,
                    "422": _json(ERRORS, "invalid fields (as the record PUT)"), **DENIED}}},
            "/api/v1/projects/{project_id}/piles/{mark}/photos": {"post": {
                "summary": "add a photo (multipart)",
                "parameters": [PROJECT_ID, MARK],
                "security": [{"session": [], "csrf": []}],
                "requestBody": {"required": True, "content": {"multipart/form-data": {"schema": {
                    "type": "object", "required": ["file", "client_id", "kind"], "properties": {
                        "file": {"type": "string", "format": "binary"},
                        "client_id": CLIENT_ID,
                        "kind": {"type": "string",
                                 "enum": ["base", "cage", "pour", "finished", "other"]},
                        "caption": {"type": "string", "maxLength": 500}}}}}},
                "responses": {
                    "201": _json({"type": "object", "properties": {
                        "id": {"type": "integer"}, "sha256": {"type": "string"}}}, "stored"),
                    "200": _json({"type": "object", "properties": {
                        "id": {"type": "integer"}, "sha256": {"type": "string"}}},
                        "a repeat of a client_id already stored: the first answer"),
                    "400": BAD_REQUEST, **STORAGE,
                    "409": _json(ERROR, "the client_id was used for another photo of the pile"),
                    "413": _json(ERROR, "file over 25 MB"),
                    "422": _json(ERRORS, "not an image, too many pixels, truncated"), **DENIED}}},
            "/api/v1/projects/{project_id}/piles/{mark}/signoff": {"post": {
                "summary": "disposition and sign-off by an engineer (password re-entered)",
                "parameters": [PROJECT_ID, MARK],
                "security": [{"session": [], "csrf": []}],
                "requestBody": {"required": True, "content": {"application/json": {"schema": {
                    "type": "object", "required": ["disposition", "password"], "properties": {
                        "disposition": {"type": "string", "enum": [
                            "accepted", "accepted with conditions", "remedial", "rejected"]},
                        "reasons": TEXT, "password": {"type": "string"}}}}}},
                "responses": {
                    "200": _json({"type": "object", "properties": {
                        "signed": {"type": "boolean"}, "record_hash": {"type": "string"}}},
                        "signed"),
                    "400": BAD_REQUEST,
                    "409": _json(ERROR, "no record, not logged, changed since reviewed, or already signed"),
                    "429": _json(ERROR, "too many wrong passwords: wait, then sign again"),
                    "422": _json(ERRORS, "invalid"), **STORAGE, **DENIED}}},
        },
    }
    _add_reads(doc["paths"])
    return doc


PHOTO_ID = {"name": "photo_id", "in": "path", "required": True, "schema": {"type": "integer"}}
SIZE = {"name": "size", "in": "path", "required": True,
        "schema": {"type": "string", "enum": ["thumb", "display", "original"]}}
RECORD_VERSION = {"type": "object", "properties": {
    "version": {"type": "integer"}, "record": {"type": "object"},
    "verdict": {"type": ["string", "null"]}, "checks": {"type": "array", "items": CHECK}}}


def _add_reads(paths: dict) -> None:
    """The read operations of the pile and photo addresses (GET beside the writes)."""
    pile = "/api/v1/projects/{project_id}/piles/{mark}"
    paths[pile] = {"get": {
        "summary": "one pile with its newest record, capacity curve and limits (the rig page's data)",
        "parameters": [PROJECT_ID, MARK],
        "responses": {"200": _json({"type": "object"}, "the pile"), **DENIED}}}
    paths[pile + "/record"]["get"] = {
        "summary": "the newest version of the record (version 0 and an empty record when none)",
        "parameters": [PROJECT_ID, MARK],
        "responses": {"200": _json(RECORD_VERSION, "the newest version"), **DENIED}}
    paths[pile + "/history"] = {"get": {
        "summary": "every saved version of the record, oldest first",
        "parameters": [PROJECT_ID, MARK],
        "responses": {"200": _json({"type": "object", "properties": {
            "mark": {"type": "string"}, "versions": {"type": "array", "items": RECORD_VERSION}}},
            "the versions"), **DENIED}}}
    paths[pile + "/tests"] = {"get": {  # fieldapp.pile_tests
        "summary": "the pile's tests after installation (the test register), oldest first",
        "parameters": [PROJECT_ID, MARK],
        "responses": {"200": _json({"type": "object", "properties": {
            "pile": {"type": "string"}, "tests": {"type": "array", "items": {"type": "object"}}}},
            "the tests"), **DENIED}}}
    paths[pile + "/photos"]["get"] = {
        "summary": "the photos of a pile with the addresses of their files",
        "parameters": [PROJECT_ID, MARK],
        "responses": {"200": _json({"type": "object", "properties": {
            "photos": {"type": "array", "items": {"type": "object"}}}}, "the photos"), **DENIED}}
    paths["/api/v1/projects/{project_id}/photos/{photo_id}/{size}"] = {"get": {
        "summary": "a photo's image: 320 px thumbnail, 1600 px display copy (JPEG) or the original",
        "parameters": [PROJECT_ID, PHOTO_ID, SIZE],
        "responses": {"200": {"description": "the image", "content": {
            "image/jpeg": {"schema": {"type": "string", "format": "binary"}},
            "image/png": {"schema": {"type": "string", "format": "binary"}},
            "image/*": {"schema": {"type": "string", "format": "binary"}}}},
            "304": {"description": "unchanged since If-None-Match / If-Modified-Since"}, **DENIED}}}


@bp.get("/api/v1/openapi.json")
def openapi_json():
    """The OpenAPI document (public: it holds no data)."""
    return jsonify(document())
