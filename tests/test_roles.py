"""Who may change the set-up: every role against every write route of Piles, Caps, Ground, Rules
and the schedule import (engineers and admins change; inspectors and viewers get 403; a member of
another project gets 404; nobody gets in without a login or a CSRF token)."""

from __future__ import annotations

import io

import pytest

from design_core import Rules
from fieldapp import db
from fieldapp.queries import audit, caps, piles, projects
from tests.factories import make_ground, make_pile, pile_values

LAYERS = [dict(top_level_m=10.0, bottom_level_m=5.0, material="cohesive", unit_weight_kn_m3=19.0, cu_kpa=60.0),
          dict(top_level_m=5.0, bottom_level_m=-20.0, material="cohesionless", unit_weight_kn_m3=20.0,
               phi_deg=34.0)]




@pytest.fixture
def setup(app, people):
    """A ground model, a cap and a pile in the project 'own'."""
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            gm = make_ground(conn, people["own"], LAYERS, "Zone 1", 8.0)
            cap = caps.save_cap(conn, people["own"], "C1", {"n_kn": 1800.0})
            pile = make_pile(conn, people["own"], "P1", gm, cap)
    return {"gm": gm, "cap": cap, "pile": pile, **people}


def form_posts(s, token):
    """(name, url, form data) of every write route, each a valid change."""
    pid = s["own"]
    pile_form = {k: ("" if v is None else str(v)) for k, v in pile_values("P9", s["gm"], s["cap"]).items()}
    ground_form = {"name": "Zone 2", "water_level_m": "7", "description": ""}
    for i, layer in enumerate(LAYERS):
        for k, v in layer.items():
            ground_form[f"layers-{i}-{k}"] = str(v)
    rules_form = {name: str(value) for name, value in Rules().to_dict().items()
                  if name != "exposure_table"}
    for i, row in enumerate(Rules().exposure_table):
        rules_form.update({f"exposure-{i}-code": row.code, f"exposure-{i}-cmin_dur_mm": str(row.cmin_dur_mm),
                           f"exposure-{i}-min_strength_mpa": str(row.min_strength_mpa),
                           f"exposure-{i}-description": row.description})
    rules_form.update(note="stricter shaft factor", fs_shaft="1.6")
    cap_form = {"mark": "C7", "n_kn": "1000", "mx_knm": "0", "my_knm": "0", "hx_kn": "0", "hy_kn": "0"}
    routes = [
        ("new pile", f"/projects/{pid}/piles/new", pile_form),
        ("edit pile", f"/projects/{pid}/piles/{s['pile']}/edit", dict(pile_form, mark="P1", compression_kn="950")),
        ("new cap", f"/projects/{pid}/caps/new", cap_form),
        ("edit cap", f"/projects/{pid}/caps/{s['cap']}/edit", dict(cap_form, mark="C1", n_kn="1900")),
        ("new ground model", f"/projects/{pid}/ground/new", ground_form),
        ("edit ground model", f"/projects/{pid}/ground/{s['gm']}/edit", dict(ground_form, name="Zone 1")),
        ("rules", f"/projects/{pid}/rules/edit", rules_form),
    ]
    return [(name, url, dict(data, csrf_token=token)) for name, url, data in routes]


def import_post(s, token):
    csv = ("mark,pile_type,easting_m,northing_m,cutoff_level_m,toe_level_m,diameter_mm,ground_model\n"
           "P20,cfa,1,2,9,-2,450,Zone 1\n").encode()
    return (f"/projects/{s['own']}/piles/import",
            {"csrf_token": token, "file": (io.BytesIO(csv), "schedule.csv")})


def audit_count(app, project_id):
    with app.app_context():
        return len(audit.entries(db.get_db(), project_id, limit=10_000))


@pytest.mark.parametrize("role", ["admin", "engineer"])
def test_engineers_and_admins_may_change_the_set_up(client, auth, setup, app, role):
    auth.login(setup[role])
    token = auth.token()
    for name, url, data in form_posts(setup, token):
        before = audit_count(app, setup["own"])
        response = client.post(url, data=data)
        assert response.status_code == 302, (name, response.get_data(as_text=True)[:2000])
        assert audit_count(app, setup["own"]) == before + 1, name
    url, data = import_post(setup, token)
    response = client.post(url, data=data, content_type="multipart/form-data")
    assert response.status_code == 302
    with app.app_context():
        assert piles.get_pile(db.get_db(), setup["own"], "P20") is not None


@pytest.mark.parametrize("role", ["inspector", "viewer"])
def test_inspectors_and_viewers_get_403_on_every_write_route(client, auth, setup, app, role):
    auth.login(setup[role])
    token = auth.token()
    before = audit_count(app, setup["own"])
    for name, url, data in form_posts(setup, token):
        assert client.post(url, data=data).status_code == 403, name
        assert client.get(url).status_code == 403, name  # the form itself is not shown either
    url, data = import_post(setup, token)
    assert client.post(url, data=data, content_type="multipart/form-data").status_code == 403
    assert audit_count(app, setup["own"]) == before
    with app.app_context():
        conn = db.get_db()
        assert piles.count(conn, setup["own"]) == 1
        assert projects.current_rules(conn, setup["own"]).version == 1


def test_member_of_another_project_gets_404_on_read_and_write(client, auth, setup, app):
    auth.login(setup["outsider"])
    token = auth.token()
    pid = setup["own"]
    for url in (f"/projects/{pid}/piles", f"/projects/{pid}/caps", f"/projects/{pid}/ground",
                f"/projects/{pid}/rules", f"/projects/{pid}/piles/export.csv"):
        assert client.get(url).status_code == 404, url
    for name, url, data in form_posts(setup, token):
        assert client.post(url, data=data).status_code == 404, name
    url, data = import_post(setup, token)
    assert client.post(url, data=data, content_type="multipart/form-data").status_code == 404


@pytest.mark.parametrize("role", ["admin", "engineer", "inspector", "viewer"])
def test_every_role_on_the_project_sees_the_set_up(client, auth, setup, role):
    auth.login(setup[role])
    pid = setup["own"]
    for url in (f"/projects/{pid}/piles", f"/projects/{pid}/caps", f"/projects/{pid}/ground",
                f"/projects/{pid}/rules", f"/projects/{pid}/piles/export.csv",
                f"/projects/{pid}/piles/export.xlsx"):
        assert client.get(url).status_code == 200, url
    page = client.get(f"/projects/{pid}/piles").get_data(as_text=True)
    can_change = role in ("admin", "engineer")
    assert ("New pile" in page) is can_change
    assert ("Import a schedule" in page) is can_change


def test_anonymous_is_sent_to_login(client, setup):
    for name, url, data in form_posts(setup, "no-token"):
        response = client.post(url, data=data)
        assert response.status_code in (302, 400), name
        if response.status_code == 302:
            assert "/login" in response.headers["Location"]
    assert "/login" in client.get(f"/projects/{setup['own']}/piles").headers["Location"]


def test_form_post_without_csrf_token_is_rejected_and_saves_nothing(client, auth, setup, app):
    auth.login(setup["engineer"])
    before = audit_count(app, setup["own"])
    for name, url, data in form_posts(setup, "x"):
        data.pop("csrf_token")
        assert client.post(url, data=data).status_code == 400, name
    url, data = import_post(setup, "x")
    data.pop("csrf_token")
    assert client.post(url, data=data, content_type="multipart/form-data").status_code == 400
    assert audit_count(app, setup["own"]) == before
    with app.app_context():
        assert piles.count(db.get_db(), setup["own"]) == 1
