"""schemathesis against the OpenAPI document the app serves (``/api/v1/openapi.json``), called
through the WSGI app with a signed-in engineer's session cookie and the CSRF header.

Every operation of the document gets a bounded number of generated requests (``EXAMPLES``,
derandomised so CI runs the same ones); every answer must pass schemathesis's checks: no 5xx,
a status code the document lists, the documented content type, a body matching the documented
schema. Half the cases are sent to the demo project and its real pile marks (the rest to
whatever ids were generated, which must be a clean 404), so the saves and uploads really run.
"""

from __future__ import annotations

import json
import re
import uuid
import zlib

import pytest
import schemathesis
from hypothesis import HealthCheck, settings
from reliability_kit import copy_demo, engineer_site
from schemathesis.specs.openapi.checks import positive_data_acceptance

from fieldapp import db, openapi
from fieldapp.api import CLIENT_ID

EXAMPLES = 12


@pytest.fixture(scope="module")
def signed_in(tmp_path_factory, demo_template):
    data = tmp_path_factory.mktemp("schemathesis") / "data"
    copy_demo(demo_template, data)
    site = engineer_site(data)
    with site["app"].app_context():
        marks = [r[0] for r in db.get_db().execute(
            "SELECT mark FROM piles WHERE project_id = ? ORDER BY id LIMIT 4", (site["project"],))]
    return {"app": site["app"], "cookie": site["client"].get_cookie("session").value,
            "token": site["token"], "project_id": site["project"], "marks": marks}


# Loaded from the same function the app serves (pytest 9 cannot run schemathesis's lazy
# from_fixture loader); the fixture below checks the served document is this one.
schema = schemathesis.openapi.from_dict(openapi.document())
SESSION: dict = {}


def _the_app(environ, start_response):
    """The WSGI app of the test (made by a fixture; schemathesis needs an app at import)."""
    return SESSION["app"](environ, start_response)


schema.app = _the_app  # every call and every probe goes through WSGI, no network


@schema.auth()
class SignedIn:
    """The engineer's session cookie and CSRF token, as the document's two security schemes say;
    schemathesis also sends each request without them and with made-up ones (expecting 401)."""

    def get(self, case, context):
        return SESSION

    def set(self, case, data, context):
        if not data:  # schemathesis's pytest plugin asks once while collecting, before any fixture
            return
        case.cookies = {**(case.cookies or {}), "session": data["cookie"]}
        case.headers = {**(case.headers or {}), "X-CSRFToken": data["token"]}


@pytest.fixture(scope="module", autouse=True)
def _served_by_the_app(signed_in):
    served = signed_in["app"].test_client().get("/api/v1/openapi.json")
    assert served.status_code == 200 and served.get_json() == json.loads(json.dumps(openapi.document()))
    SESSION.update(cookie=signed_in["cookie"], token=signed_in["token"], app=signed_in["app"])


def test_document_lists_every_api_route(signed_in):
    documented = {(path, method) for path, ops in openapi.document()["paths"].items() for method in ops}
    missing = []
    for rule in signed_in["app"].url_map.iter_rules():
        if not rule.rule.startswith("/api/") or rule.endpoint == "openapi.openapi_json":
            continue
        path = re.sub(r"<(?:[a-z]+:)?([a-z_]+)>", r"{\1}", rule.rule)
        for method in rule.methods - {"HEAD", "OPTIONS"}:
            if (path, method.lower()) not in documented:
                missing.append(f"{method} {path}")
    assert missing == [], f"API routes missing from fieldapp/openapi.py: {missing}"


@schema.parametrize()
@settings(max_examples=EXAMPLES, deadline=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
def test_api_matches_its_openapi_document(case, signed_in):
    params = case.path_parameters or {}
    if "project_id" in params and zlib.crc32(repr(params).encode()) % 2 == 0:
        params["project_id"] = signed_in["project_id"]
        if "mark" in params:
            marks = signed_in["marks"]
            params["mark"] = marks[zlib.crc32(repr(params.get("mark")).encode()) % len(marks)]
    body = case.body if isinstance(case.body, dict) else {}
    if isinstance(body.get("client_id"), str) and CLIENT_ID.match(body["client_id"]):
        # A fresh id per case: a repeat of an id already stored rightly returns the first
        # answer (idempotent outbox), whatever else the repeat carries.
        body["client_id"] = str(uuid.uuid4())
    # The WSGI transport hands back the body as sent; unlike an HTTP client it does not undo
    # Content-Encoding, so ask for the plain body (the bundle is gzipped when accepted).
    case.headers = {**(case.headers or {}), "Accept-Encoding": "identity"}
    case.call_and_validate(excluded_checks=[positive_data_acceptance])
