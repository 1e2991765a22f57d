"""Creating a project (issue 15, item 15): ``toeline project add`` and the admin's New project
screen, both audited; every field checked and named."""

from __future__ import annotations

import pytest
from click.testing import CliRunner
from reliability_kit import make_app, sign_in

from fieldapp import db
from fieldapp.cli import main
from fieldapp.queries import audit, projects


def _projects(data):
    app = make_app(data)
    with app.app_context():
        return {p.name: p for p in projects.all_projects(db.get_db())}


def test_project_add_creates_an_audited_project(demo_data):
    result = CliRunner().invoke(main, ["--data", str(demo_data), "project", "add", "Harbour wall",
                                       "--site", "Pier 4", "--datum", "OD", "--engineer", "A. Engineer"])
    assert result.exit_code == 0, result.output
    made = _projects(demo_data)["Harbour wall"]
    assert (made.site, made.datum, made.engineer) == ("Pier 4", "OD", "A. Engineer")
    app = make_app(demo_data)
    with app.app_context():
        conn = db.get_db()
        first = audit.entries(conn, made.id)[-1]
        assert (first["seq"], first["action"], first["actor"]) == (1, "project created", "cli")
        assert projects.current_rules(conn, made.id).version == 1
    verify = CliRunner().invoke(main, ["--data", str(demo_data), "verify-audit", str(made.id)])
    assert verify.exit_code == 0, verify.output


@pytest.mark.parametrize("args, words", [
    (["", "--site", "x"], "Name is required"),
    (["=HYPERLINK(1)", "--site", "x"], "must not start with '='"),
    (["Ok", "--site", "bad\x01site"], "printable characters only"),
    (["N" * 121, "--site", "x"], "at most 120 characters"),
])
def test_project_add_refuses_bad_fields(demo_data, args, words):
    before = _projects(demo_data)
    result = CliRunner().invoke(main, ["--data", str(demo_data), "project", "add", *args])
    assert result.exit_code != 0 and words in result.output, result.output
    assert _projects(demo_data).keys() == before.keys()


def test_project_add_needs_a_site(demo_data):
    result = CliRunner().invoke(main, ["--data", str(demo_data), "project", "add", "No site"])
    assert result.exit_code != 0 and "--site" in result.output


def test_the_admin_creates_a_project_on_the_screen(demo_data):
    app = make_app(demo_data)
    client = app.test_client()
    token = sign_in(client, "admin")
    page = client.get("/projects/new")
    assert page.status_code == 200 and "New project" in page.get_data(as_text=True)
    bad = client.post("/projects/new", data={"csrf_token": token, "name": "", "site": "x"})
    assert bad.status_code == 400 and "Name is required" in bad.get_data(as_text=True)
    answer = client.post("/projects/new", data={"csrf_token": token, "name": "Screen job", "site": "Yard 2",
                                                "datum": "", "engineer": "B. Engineer"})
    assert answer.status_code == 302
    made = _projects(demo_data)["Screen job"]
    with app.app_context():
        first = audit.entries(db.get_db(), made.id)[-1]
    assert first["action"] == "project created" and first["actor"] != "cli"
    assert "Screen job" in client.get("/").get_data(as_text=True)


@pytest.mark.parametrize("role", ["engineer", "inspector", "viewer"])
def test_only_the_admin_may_create_a_project(demo_data, role):
    app = make_app(demo_data)
    client = app.test_client()
    token = sign_in(client, role)
    before = _projects(demo_data)
    answer = client.post("/projects/new", data={"csrf_token": token, "name": "Sneaky", "site": "x"})
    assert answer.status_code == 403
    assert _projects(demo_data).keys() == before.keys()
