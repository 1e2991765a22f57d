"""The OpenAPI 3 document of Toeline's JSON API, served at ``/api/v1/openapi.json``.

The tablet's outbox and any outside client use these calls; schemathesis tests the app against
this document (tests/reliability). Keep it in step with ``fieldapp/api.py``, ``review.py`` and
``offline.py``: a route missing here fails ``test_openapi_lists_every_api_route``.
"""

from __future__ import annotations

from flask import Blueprint, jsonify

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

ERROR = {"type": "object", "properties": {"error": {"type": "string"}}}
ERRORS = {"type": "object", "properties": {"errors": {"type": "object",
                                                      "additionalProperties": {"type": "string"}}}}


def _json(schema: dict, description: str) -> dict:
    return {"description": description, "content": {"application/json": {"schema": schema}}}


PROJECT_ID = {"name": "project_id", "in": "path", "required": True, "schema": {"type": "integer"}}
MARK = {"name": "mark", "in": "path", "required": True, "schema": {"type": "string"}}
DENIED = {"401": _json(ERROR, "not signed in"), "403": _json(ERROR, "role may not do this"),
          "404": _json(ERROR, "no such project or pile for this user")}


def document() -> dict:
    """The OpenAPI document as a dict."""
    return {
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
                        "client_id": {"type": "string", "format": "uuid"},
                        "base_version": {"type": ["integer", "null"]},
                        "record": RECORD,
                        "amendment": {"type": "object", "properties": {"reason": TEXT}}}}}}},
                "responses": {
                    "200": _json({"type": "object", "properties": {
                        "version": {"type": "integer"},
                        "verdict": {"type": "string", "enum": ["meets design", "needs engineer"]},
                        "checks": {"type": "array", "items": CHECK}}}, "saved and rechecked"),
                    "400": _json(ERROR, "not JSON, or no CSRF token"),
                    "409": _json({"type": "object", "properties": {
                        "error": {"type": "string", "enum": ["conflict", "locked"]},
                        "server": {"type": "object"}}}, "changed on the server, or signed"),
                    "422": _json(ERRORS, "invalid fields, nothing saved"), **DENIED}}},
            "/api/v1/projects/{project_id}/piles/{mark}/photos": {"post": {
                "summary": "add a photo (multipart)",
                "parameters": [PROJECT_ID, MARK],
                "security": [{"session": [], "csrf": []}],
                "requestBody": {"required": True, "content": {"multipart/form-data": {"schema": {
                    "type": "object", "required": ["file", "client_id", "kind"], "properties": {
                        "file": {"type": "string", "format": "binary"},
                        "client_id": {"type": "string", "format": "uuid"},
                        "kind": {"type": "string",
                                 "enum": ["base", "cage", "pour", "finished", "other"]},
                        "caption": {"type": "string", "maxLength": 500}}}}}},
                "responses": {
                    "201": _json({"type": "object", "properties": {
                        "id": {"type": "integer"}, "sha256": {"type": "string"}}}, "stored"),
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
                    "422": _json(ERRORS, "invalid"), **DENIED}}},
        },
    }


@bp.get("/api/v1/openapi.json")
def openapi_json():
    """The OpenAPI document (public: it holds no data)."""
    return jsonify(document())
