"""Access: who may do what, generated from the app's own route table, and the login, cookie,
header and escaping promises (issue 9, Access).

The authorisation matrix takes every rule of ``app.url_map`` and every method, and requests it
as admin, engineer, inspector, viewer and anonymous, on the user's own project and on another
project. ``EXPECT`` says which of those may succeed; a route that is not in ``EXPECT`` fails
``test_every_route_has_an_access_rule``, so a screen added later must state its rule here.

Access classes:
* ``public``   anyone, signed in or not;
* ``signed``   any signed-in user (no project in the address);
* ``member``   a member of the project (admin: every project); others get 404, never 403, so a
               project's existence is not revealed;
* ``recorder`` a member who records: inspector, engineer, admin (viewer 403);
* ``engineer`` a member engineer or admin (inspector and viewer 403);
* ``admin``    admin only.
Anonymous requests get 401 under /api/ and a redirect to the login page elsewhere.

A cell "succeeds" when the answer is not 401/403/404 and not a redirect to the login page (a
400/422 for the deliberately empty form still proves the door was open). Every denied write
must leave the database as it was.
"""

from __future__ import annotations

import io
import re
import uuid
from html.parser import HTMLParser
from pathlib import Path

import pytest
from reliability_kit import LOGINS, copy_demo, make_app, open_database, sign_in, small_jpeg

from fieldapp import db, photos, saving
from fieldapp.queries import audit, caps, ground, locations, piles, projects, records, users

ROLES = ("admin", "engineer", "inspector", "viewer", "anonymous")
OUTSIDER = ("outsider@other.example", "outsider password 9")

# endpoint -> access class, or (access class, extra statuses that count as success for it).
EXPECT: dict[str, str | tuple[str, set[int]]] = {
    "static": "public",
    "healthz": "public",
    "auth.login": "public",
    "auth.logout": ("public", {302}),  # signs out and sends to the login page
    "auth.logout_everywhere": ("signed", {302}),  # ends the caller's sessions, sends to the login
    "auth.index": "signed",
    "auth.new_project": "admin",
    "openapi.openapi_json": "public",
    "offline.service_worker": "public",
    "offline.manifest": "public",
    "offline.site_ca": "public",
    "offline.site_ca_file": ("public", {404}),  # 404 until `serve --https` made the site CA
    "api.session_info": "signed",
    "api.list_projects": "signed",
    "api.list_piles": "member",
    "api.show_pile": "member",
    "api.get_record": "member",
    "api.put_record": "recorder",
    "api.preview_record": "recorder",
    "api.history": "member",
    "api.list_photos": "member",
    "api.post_photo": "recorder",
    "api.photo_file": "member",
    "api.recheck_job": "member",
    "offline.bundle": "member",
    "piles.list_piles": "member",
    "piles.export_file": "member",
    "piles.plan_json": "member",
    "piles.new_pile": "engineer",
    "piles.edit_pile": "engineer",
    "piles.import_file": "engineer",
    "piles.list_caps": "member",
    "piles.new_cap": "engineer",
    "piles.edit_cap": "engineer",
    "ground.list_models": "member",
    "ground.new_model": "engineer",
    "ground.edit_model": "engineer",
    "rules.show": "member",
    "rules.edit": "engineer",
    "rig.pick": "member",
    "rig.record": "member",
    "review.queue": "member",
    "review.pile": "member",
    "review.signoff": "engineer",
    "review.batch": "engineer",
    "review.api_signoff": "engineer",
    "record.overview": "member",
    "record.build": "member",
    "record.job_status": "member",
    "record.download": "member",
    "record.schedule": "member",
    "imports.ground_data": "engineer",
    "imports.upload_ags": "engineer",
    "imports.export_ags": "engineer",
    "imports.model_from_location": "engineer",
    "imports.layout_form": "engineer",
    "imports.layout_preview": "engineer",
    "imports.layout_apply": "engineer",
    "pile_tests.project_register": "member",
    "pile_tests.pile_register": "member",
    "pile_tests.add": "recorder",
    "pile_tests.sheet": "member",
    "pile_tests.test_file": "member",
    "pile_tests.api_list": "member",
    "soundings.show": "member",
    "soundings.upload": "engineer",
    "record.ncr_register": "member", "record.ncr_csv": "member",
}

ALLOWED_ROLES = {
    "public": set(ROLES), "signed": {"admin", "engineer", "inspector", "viewer"},
    "member": {"admin", "engineer", "inspector", "viewer"},
    "recorder": {"admin", "engineer", "inspector"}, "engineer": {"admin", "engineer"},
    "admin": {"admin"},
}

# User text that must come out as text everywhere (HTML pages and the PDF).
SCRIPT = '<script>alert("t1")</script>'
# A pile mark full of markup; without "/", which a mark may not hold (it is part of the pile's address).
MARK = '<script>alert("t3")<b>'
IMG = '<img src=x onerror=alert("t2")>'
BOLD = "<b>not bold</b>"


def _expect(endpoint: str) -> tuple[str, set[int]]:
    entry = EXPECT[endpoint]
    return (entry, set()) if isinstance(entry, str) else entry


# --------------------------------------------------------------------------------------------
# The world: the demo project ("own") with user text full of markup, and another project.
# --------------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def world(tmp_path_factory, demo_template):

    data = tmp_path_factory.mktemp("access") / "data"
    copy_demo(demo_template, data)
    app = make_app(data)
    with app.app_context():
        conn = db.get_db()
        own = projects.all_projects(conn)[0].id
        inspector = users.by_email(conn, LOGINS["inspector"][0])
        p1 = piles.get_pile(conn, own, "P1")
        with db.write(conn):
            other = projects.create(conn, "Other job", "elsewhere")
            uid = users.create(conn, OUTSIDER[0], OUTSIDER[1], "engineer", "Outsider")
            users.add_member(conn, other, uid)
            src = ground.get_model(conn, own, p1.ground_model_id)
            layers = [{k: getattr(layer, k) for k in ground.LAYER_FIELDS} for layer in src.layers]
            layers[0]["description"] = f"fill {SCRIPT} {BOLD}"
            own_gm = ground.save_model(conn, own, f"markup {IMG}", src.water_level_m, layers,
                                       f"ground {SCRIPT} {IMG} {BOLD}")
            other_gm = ground.save_model(conn, other, "other ground", src.water_level_m, layers, "plain")
            other_cap = caps.save_cap(conn, other, "XC1", {"n_kn": 500.0})
            own_cap = caps.save_cap(conn, own, f"C{IMG}"[:40], {"n_kn": 500.0})
            values = piles.as_values(p1)
            values.update(mark="X9", cap_id=other_cap, ground_model_id=other_gm)
            piles.save_pile(conn, other, values)
            values.update(mark=MARK, cap_id=own_cap, ground_model_id=own_gm)
            piles.save_pile(conn, own, values)
        x9 = piles.get_pile(conn, other, "X9")
        marked = piles.get_pile(conn, own, MARK)
        depth = round(100.0 - p1.toe_level_m, 2)
        for project_id, pile in ((own, p1), (other, x9), (own, marked)):
            record = {"progress": "logged", "notes": f"notes {SCRIPT} {IMG} {BOLD}", "rig": f"rig {IMG}",
                      "platform_level": 100.0, "measured_depth": depth,
                      "strata": [{"from_depth": 0.0, "to_depth": 1.0, "material": "ignore",
                                  "description": f"stratum {SCRIPT} {BOLD}"}]}
            saving.save_record(conn, project_id, pile, inspector, str(uuid.uuid4()),
                                 records.stored_version(conn, pile.id), record)
            photos.add_photo(conn, project_id, pile, inspector, str(uuid.uuid4()), "base",
                             f"caption {SCRIPT} {IMG} {BOLD}", small_jpeg(project_id * 7 + pile.id),
                             app.config["PHOTO_DIR"])
        test_of = _pile_tests(conn, app, ((own, p1), (other, x9)))
        job_of = _record_jobs(conn, app, (own, other))
        location = conn.execute("SELECT id FROM locations WHERE project_id = ? ORDER BY id LIMIT 1",
                                (own,)).fetchone()[0]  # the demo's invented AGS4 boreholes
        with db.write(conn):
            other_location = locations.replace_location(conn, other, None, {
                "loca_id": "OB1", "easting_m": 10.0, "northing_m": 20.0, "ground_level_m": 100.0,
                "final_depth_m": 12.0, "strata": [
                    {"top_depth_m": 0.0, "base_depth_m": 12.0, "description": "CLAY",
                     "proposed_material": "cohesive"}]})
        photo_of = {pid: conn.execute("SELECT id FROM photos WHERE project_id = ? ORDER BY id LIMIT 1",
                                      (pid,)).fetchone()[0] for pid in (own, other)}
    objects = {
        own: {"project_id": own, "pile_id": p1.id, "cap_id": p1.cap_id, "model_id": p1.ground_model_id,
              "photo_id": photo_of[own], "mark": "P1", "job_id": job_of.get(own),
              "location_id": location, "test_id": test_of[own]},
        other: {"project_id": other, "pile_id": x9.id, "cap_id": other_cap, "model_id": other_gm,
                "photo_id": photo_of[other], "mark": "X9", "job_id": job_of.get(other),
                "location_id": other_location, "test_id": test_of[other]},
    }
    return {"app": app, "data": data, "own": own, "other": other, "objects": objects,
            "marked_pile": marked}


def _pile_tests(conn, app, piles_of) -> dict[int, int]:
    """One register entry per project (a low strain test with a small kept PDF), stored directly
    so the matrix needs no check code beyond the recheck's; its id is the test_id of the routes."""
    from fieldapp import pile_test_register as reg
    from fieldapp.queries import pile_tests as tests_q

    pdf = b"%PDF-1.4\n%stand-in\n%%EOF\n"
    sha = reg.keep_file(app.config["DATA_DIR"], pdf, "pdf")
    out = {}
    with db.write(conn):
        for pid, pile in piles_of:
            out[pid] = tests_q.insert(
                conn, project_id=pid, pile_id=pile.id, kind="low_strain", tested_on="2026-03-05",
                tested_by=f"tester {IMG}", file_sha256=sha, file_name="report.pdf", file_ext="pdf",
                file_bytes=len(pdf), created_by=None,
                result={"rating": "sound", "anomaly_depth_m": None, "zones": [], "overall": "sound",
                        "description": f"desc {SCRIPT} {BOLD}"},
                check={"code": "integrity", "value": None, "limit": None, "unit": "", "utilisation": None,
                       "ok": True, "reason": f"Integrity sound {BOLD}."})
    return out


def _record_jobs(conn, app, project_ids) -> dict[int, int]:
    """A finished record build per project (a small stand-in PDF file), when the record screen
    exists; its id is the job_id of the record routes."""
    try:
        from fieldapp.queries import review as review_q
    except ImportError:
        return {}
    out = {}
    with db.write(conn):
        for pid in project_ids:
            path = Path(app.config["DATA_DIR"]) / f"record-{pid}.pdf"
            path.write_bytes(b"%PDF-1.4\n%stand-in\n")
            job = review_q.create_job(conn, pid, None)
            review_q.update_job(conn, job, status="done", path=str(path), done=1, total=1,
                                finished_at="2026-03-02T12:00:00+00:00")
            out[pid] = job
    return out


@pytest.fixture
def no_pdf_builds(monkeypatch):
    """Starting a record build runs its access checks for real but builds no PDF (a build of
    the demo project takes seconds of CPU per request of the matrix)."""
    try:
        from fieldapp.record import views
    except ImportError:
        return
    class NoWorker:
        """Stands in for the build's child process: it never runs, so it writes nothing while the
        matrix compares the database before and after a refused request."""

        def __init__(self, *args, **kwargs):
            pass

        def poll(self):
            return None

    monkeypatch.setattr(views.subprocess, "Popen", NoWorker)


COMMON = {"size": "thumb", "fmt": "csv", "filename": "app.css"}


def _url(app, rule, values: dict) -> str:
    missing = [a for a in rule.arguments if a not in values and a not in COMMON]
    assert not missing, f"{rule.endpoint}: add a test value for {missing} in test_access.py"
    with app.test_request_context():
        from flask import url_for
        return url_for(rule.endpoint, **{a: values.get(a, COMMON.get(a)) for a in rule.arguments})


class Door:
    """A client per role, signed in once."""

    def __init__(self, app):
        self.app = app
        self.clients = {}
        self.tokens = {}
        for role in ROLES:
            client = app.test_client()
            if role == "anonymous":
                page = client.get("/login").get_data(as_text=True)
                self.tokens[role] = re.search(r'name="csrf-token" content="([^"]+)"', page).group(1)
            else:
                self.tokens[role] = sign_in(client, role)
            self.clients[role] = client

    def call(self, role: str, method: str, url: str, endpoint: str):
        client, token = self.clients[role], self.tokens[role]
        headers = {"X-CSRFToken": token}
        if method == "GET":
            return client.get(url, headers=headers)
        if endpoint == "api.put_record":
            return client.put(url, headers=headers, json={
                "client_id": str(uuid.uuid4()), "base_version": None, "record": {"progress": "boring"}})
        if endpoint == "api.preview_record":
            return client.post(url, headers=headers, json={"record": {"progress": "boring"}})
        if endpoint == "api.post_photo":
            return client.post(url, headers=headers, content_type="multipart/form-data", data={
                "client_id": str(uuid.uuid4()), "kind": "other", "caption": "",
                "file": (io.BytesIO(small_jpeg(len(url))), "p.jpg", "image/jpeg")})
        if endpoint == "review.api_signoff" and role != "anonymous":
            # The right password and a disposition that is not one: past the door, refused as invalid.
            return client.post(url, headers=headers, json={"password": LOGINS[role][1],
                                                           "disposition": "not a disposition"})
        if url.startswith("/api/"):
            return client.open(url, method=method, headers=headers, json={})
        return client.open(url, method=method, headers=headers, data={"csrf_token": token})

    def resign(self, role: str) -> None:
        if role != "anonymous":
            self.tokens[role] = sign_in(self.clients[role], role)


def _fingerprint(data) -> tuple:
    conn = open_database(data)
    try:
        return tuple(conn.execute(f"SELECT COUNT(*), COALESCE(MAX(id), 0) FROM {table}").fetchone()
                     for table in ("audit_log", "pile_records", "photos", "piles", "caps", "ground_models",
                                   "rule_sets"))
    finally:
        conn.close()


def _denied_as(response, role: str, url: str, statuses: set[int]) -> bool:
    if role == "anonymous" and not url.startswith("/api/"):
        return response.status_code == 302 and "/login" in response.headers.get("Location", "")
    return response.status_code in statuses


def _succeeded(response, extra: set[int]) -> bool:
    if response.status_code in extra:
        return True
    if response.status_code in (401, 403, 404):
        return False
    return not (response.status_code == 302 and "/login" in response.headers.get("Location", ""))


def _check_headers(response, where: str) -> None:
    csp = response.headers.get("Content-Security-Policy", "")
    script = next((d for d in csp.split(";") if d.strip().startswith(("script-src", "default-src"))), "")
    assert "script-src 'self'" in csp and "unsafe-inline" not in script and "unsafe-eval" not in csp, where
    assert "frame-ancestors 'none'" in csp, where
    assert response.headers.get("X-Content-Type-Options") == "nosniff", where
    server = response.headers.get("Server", "")
    assert not re.search(r"\d|werkzeug|waitress|python|cheroot", server, re.I), (where, server)


def _routes(app):
    for rule in sorted(app.url_map.iter_rules(), key=lambda r: r.rule):
        for method in sorted(rule.methods - {"HEAD", "OPTIONS"}):
            yield rule, method


def test_every_route_has_an_access_rule(world):
    endpoints = {rule.endpoint for rule in world["app"].url_map.iter_rules()}
    missing = sorted(endpoints - set(EXPECT))
    assert missing == [], f"routes with no access rule in tests/reliability/test_access.py: {missing}"
    stale = sorted(set(EXPECT) - endpoints)
    assert stale == [], f"access rules for routes that no longer exist: {stale}"


ENDS_SESSIONS = ("auth.logout", "auth.logout_everywhere")  # called last; the role signs in again


def test_authorisation_matrix(world, no_pdf_builds):
    app, data = world["app"], world["data"]
    door = Door(app)
    failures = []
    cells = 0
    # Reads first, then writes, the logouts last (they end the session of the role that calls them).
    # (auth.logout the very last: it also clears the anonymous client's CSRF token)
    order = sorted(_routes(app), key=lambda rm: (rm[0].endpoint == "auth.logout",
                                                 rm[0].endpoint in ENDS_SESSIONS, rm[1] != "GET"))
    for rule, method in order:
        if rule.endpoint not in EXPECT:
            continue  # reported by test_every_route_has_an_access_rule
        access, extra = _expect(rule.endpoint)
        scoped = "project_id" in rule.arguments
        for target in ("own", "other") if scoped else ("own",):
            url = _url(app, rule, world["objects"][world[target]])
            for role in ROLES:
                cells += 1
                before = _fingerprint(data) if method != "GET" else None
                response = door.call(role, method, url, rule.endpoint)
                where = f"{role} {method} {url}"
                _check_headers(response, where)
                member = target == "own" or role == "admin"
                allowed = role in ALLOWED_ROLES[access] and (member or not scoped or access == "public")
                if allowed:
                    if not _succeeded(response, extra):
                        failures.append(f"{where}: expected success, got {response.status_code}")
                else:
                    if role == "anonymous":
                        expected = {401}
                    elif scoped and not member and role in ALLOWED_ROLES[access]:
                        expected = {404}
                    elif scoped and not member:
                        # Not a member and not the role either: 403 or 404, but the same answer as
                        # for a project that does not exist (no way to learn which ids exist).
                        expected = {403, 404}
                        ghost = _url(app, rule, {**world["objects"][world[target]], "project_id": 999_999})
                        ghost_status = door.call(role, method, ghost, rule.endpoint).status_code
                        if ghost_status != response.status_code:
                            failures.append(f"{where}: {response.status_code}, but {ghost_status} for a "
                                            "project that does not exist")
                    else:
                        expected = {403}
                    if not _denied_as(response, role, url, expected):
                        failures.append(f"{where}: expected {expected}, got {response.status_code}")
                    elif before is not None and _fingerprint(data) != before:
                        failures.append(f"{where}: denied, but the database changed")
                if rule.endpoint in ENDS_SESSIONS:
                    door.resign(role)
    assert failures == [], f"{len(failures)} of {cells} cells wrong:\n" + "\n".join(failures)
    assert cells > 300


def test_no_object_reachable_through_another_projects_id(world, no_pdf_builds):
    """An object id of project B under project A's address is 404, even for the admin."""
    app = world["app"]
    door = Door(app)
    own, other = world["objects"][world["own"]], world["objects"][world["other"]]
    failures, tried = [], 0
    for rule, method in _routes(app):
        object_args = [a for a in rule.arguments
                       if a in ("pile_id", "cap_id", "model_id", "photo_id", "mark", "job_id", "test_id", "location_id")]
        if "project_id" not in rule.arguments or not object_args:
            continue
        for mine, theirs in ((own, other), (other, own)):
            values = {**mine, **{a: theirs[a] for a in object_args}}
            url = _url(app, rule, values)
            for role in ("admin", "engineer"):
                if role == "engineer" and mine is other:
                    continue  # the engineer is no member there; the matrix covers it
                tried += 1
                before = _fingerprint(world["data"]) if method != "GET" else None
                response = door.call(role, method, url, rule.endpoint)
                if response.status_code != 404:
                    failures.append(f"{role} {method} {url}: {response.status_code}")
                elif before is not None and _fingerprint(world["data"]) != before:
                    failures.append(f"{role} {method} {url}: 404 but the database changed")
    assert failures == []
    assert tried >= 20


# --------------------------------------------------------------------------------------------
# Escaping: user text shows as text on every page and in the PDF.
# --------------------------------------------------------------------------------------------

class _Tags(HTMLParser):
    """Inline scripts and inline event handlers of a page (both blocked by the CSP)."""

    def __init__(self):
        super().__init__()
        self.inline_scripts: list[str] = []
        self.handlers: list[str] = []
        self.markup: list[str] = []

    def handle_starttag(self, tag, attrs):
        names = {k.lower(): (v or "") for k, v in attrs}
        if tag == "script" and "src" not in names and "json" not in names.get("type", ""):
            self.inline_scripts.append(str(attrs))
        self.handlers += [f"<{tag} {k}=...>" for k in names if k.startswith("on")]
        if tag == "img" and names.get("src") == "x":
            self.markup.append("<img src=x> from user text")


def _tags(html: str) -> _Tags:
    parser = _Tags()
    parser.feed(html)
    parser.close()
    return parser


def test_user_text_is_escaped_on_every_page(world):
    app = world["app"]
    client = app.test_client()
    sign_in(client, "engineer")
    own = world["objects"][world["own"]]
    marked = world["marked_pile"]
    variants = [own, {**own, "mark": marked.mark, "pile_id": marked.id, "cap_id": marked.cap_id,
                      "model_id": marked.ground_model_id}]
    pages, shown, marked_pages, unrendered = 0, 0, 0, []
    for rule, method in _routes(app):
        if method != "GET" or rule.rule.startswith(("/api/", "/static")):
            continue
        access, extra = _expect(rule.endpoint)
        if "engineer" not in ALLOWED_ROLES[access]:
            continue  # the admin's screens; the matrix checks the engineer is refused
        for values in variants:
            response = client.get(_url(app, rule, values))
            where = f"GET {_url(app, rule, values)}"
            if response.status_code in extra:
                continue  # an answer EXPECT names for this route (the site CA before serve --https)
            if response.status_code != 200:
                if response.mimetype == "text/html" or "mark" in rule.arguments:
                    unrendered.append(f"{where}: {response.status_code}")  # a page that does not render
                continue
            if response.mimetype != "text/html":
                continue
            html = response.get_data(as_text=True)
            pages += 1
            marked_pages += values is not own and "mark" in rule.arguments
            for raw in (SCRIPT, IMG, BOLD, MARK):
                assert raw not in html, f"{where} shows {raw!r} unescaped"
            tags = _tags(html)
            assert tags.inline_scripts == [], f"{where}: inline <script> (the CSP would block it)"
            assert tags.handlers == [], f"{where}: inline event handlers {tags.handlers}"
            assert tags.markup == [], f"{where}: user text became markup"
            if "&lt;script&gt;alert(" in html or "\\u003cscript\\u003e" in html:
                shown += 1
    assert unrendered == [], "pages that did not render:\n" + "\n".join(unrendered)
    assert pages >= 10
    assert marked_pages >= 2, "the pages of the pile whose mark holds markup must be among them"
    assert shown >= 3, "the injected text should be shown (escaped) on several pages"


def test_user_text_in_the_pdf_comes_out_literally(world, tmp_path):
    pdf = pytest.importorskip("fieldapp.record.pdf", reason="the record PDF module is not in the tree")
    import pdfplumber

    app = world["app"]
    out = tmp_path / "record.pdf"
    with app.app_context():  # the one-pile project: its record notes, strata and caption hold markup
        pdf.build(db.get_db(), world["other"], out, photo_dir=app.config["PHOTO_DIR"])
    with pdfplumber.open(out) as doc:
        text = "\n".join(page.extract_text() or "" for page in doc.pages)
    squashed = re.sub(r"\s+", "", text)
    assert re.sub(r"\s+", "", f"notes {SCRIPT}") in squashed, "notes must print with their markup as text"
    assert "<b>notbold</b>" in squashed, "reportlab markup in user text must not be interpreted"
    assert re.sub(r"\s+", "", SCRIPT) in squashed


# --------------------------------------------------------------------------------------------
# Login, session, cookies, password hashing, headers from the real server.
# --------------------------------------------------------------------------------------------

def test_login_is_rate_limited_after_repeated_failures(app, client, auth, people):
    limit = app.config["LOGIN_MAX_FAILURES"]
    for _ in range(limit):
        assert auth.login(people["engineer"], "wrong password").status_code == 401
    blocked = auth.login(people["engineer"])  # even the right password now waits
    assert blocked.status_code == 429
    assert "Too many failed logins" in blocked.get_data(as_text=True)
    assert client.get("/api/v1/session").status_code == 401
    assert auth.login(people["inspector"]).status_code == 302, "another user is not locked out"


def test_session_cookie_is_renewed_at_login_and_flagged(app, client, auth, people):
    client.get("/login")
    before = client.get_cookie("session")
    assert before is not None
    answer = auth.login(people["viewer"])
    assert answer.status_code == 302
    after = client.get_cookie("session")
    assert after.value != before.value
    assert after.http_only and after.same_site == "Lax" and not after.secure
    # The pre-login cookie does not carry the signed-in user.
    stale = app.test_client()
    stale.set_cookie("session", before.value)
    assert stale.get("/api/v1/session").status_code == 401


def test_cookie_is_secure_behind_the_https_proxy(tmp_path, monkeypatch):
    from fieldapp import create_app

    monkeypatch.setenv("TOELINE_PROXY", "1")
    app = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data")})
    client = app.test_client()
    headers = {"X-Forwarded-Proto": "https", "X-Forwarded-For": "10.0.0.7", "X-Forwarded-Host": "piles.test"}
    page = client.get("/login", headers=headers, base_url="http://piles.test")
    set_cookie = page.headers.get("Set-Cookie", "")
    assert "Secure" in set_cookie and "HttpOnly" in set_cookie and "SameSite=Lax" in set_cookie


def test_cookie_is_secure_with_serve_https(demo_data):
    import requests
    from reliability_kit import Server

    server = Server(demo_data, "--https", scheme="https")
    try:
        server.start()  # verifies the server's certificate against the site authority it made
        page = requests.get(server.url + "/login", verify=server.verify, timeout=30)
    finally:
        server.stop()
    set_cookie = page.headers.get("Set-Cookie", "")
    assert "Secure" in set_cookie and "HttpOnly" in set_cookie and "SameSite=Lax" in set_cookie
    _check_headers(page, "GET /login over https")


def test_passwords_are_stored_as_argon2id(app, people):
    with app.app_context():
        rows = db.get_db().execute("SELECT email, password_hash FROM users").fetchall()
    assert rows and all(r["password_hash"].startswith("$argon2id$") for r in rows)
    assert all(people["engineer"] not in r["password_hash"] for r in rows)


def test_real_server_sends_no_version_and_the_security_headers(demo_data):
    import requests
    from reliability_kit import Server

    server = Server(demo_data)
    try:
        server.start()
        for path in ("/login", "/healthz", "/static/app.css", "/no/such/page", "/api/v1/projects"):
            answer = requests.get(server.url + path, timeout=30, allow_redirects=False)
            _check_headers(answer, f"waitress GET {path}")
            assert "waitress" not in answer.headers.get("Via", "").lower()
        # A request waitress itself refuses (never reaches the app) shows no version either.
        import socket
        with socket.create_connection(("127.0.0.1", server.port), timeout=10) as sock:
            sock.sendall(b"GET / HTTP/1.1\r\nHost: x\r\nContent-Length: nonsense\r\n\r\n")
            raw = sock.recv(4096).decode("latin-1")
        server_line = next((line for line in raw.splitlines() if line.lower().startswith("server:")), "")
        assert not re.search(r"\d|waitress", server_line, re.I), raw[:300]
    finally:
        server.stop()


def test_audit_records_failed_logins(app, auth, people):
    auth.login(people["viewer"], "nope")
    with app.app_context():
        entries = audit.entries(db.get_db(), None)
    assert any(e["action"] == "login failed" for e in entries)


def test_every_write_without_a_csrf_token_is_refused(world, no_pdf_builds):
    """Every route and method that is not a read, sent by a signed-in admin (who may do
    everything) and by the anonymous visitor with a valid cookie but no CSRF token, in neither
    the header nor the form: 400 (anonymous API writes: 401 before the token is looked at), and
    the database unchanged."""
    app, data = world["app"], world["data"]
    door = Door(app)
    failures, tried = [], 0
    for rule, method in _routes(app):
        if method == "GET":
            continue
        url = _url(app, rule, world["objects"][world["own"]])
        for role in ("admin", "engineer", "anonymous"):
            client = door.clients[role]
            before = _fingerprint(data)
            if url.startswith("/api/"):
                response = client.open(url, method=method, json={"client_id": str(uuid.uuid4()),
                                                                  "record": {"progress": "boring"}})
            else:
                response = client.open(url, method=method, data={"email": LOGINS["admin"][0],
                                                                 "password": LOGINS["admin"][1]})
            tried += 1
            expected = {401} if role == "anonymous" and url.startswith("/api/") else {400}
            if response.status_code not in expected:
                failures.append(f"{role} {method} {url} without a CSRF token: {response.status_code}")
            elif _fingerprint(data) != before:
                failures.append(f"{role} {method} {url} without a CSRF token: refused but the database changed")
    assert failures == [], "\n".join(failures)
    assert tried >= 30
