"""CPT soundings and SPT profiles uploaded as Toeline CSV (fieldapp.soundings): stored whole or
not at all, refused with row and column, shown as profiles against level beside the layers.
The soundings are invented."""

from __future__ import annotations

import io
import xml.etree.ElementTree as ET

import pytest

from fieldapp import db
from fieldapp.queries import audit
from fieldapp.queries import locations as loc_q
from tests.factories import make_ground

CPT = b"depth_m,qc_mpa,fs_kpa,u2_kpa\n0.5,1.2,20,5\n1.0,2.5,35,10\n1.5,8.0,60,12\n2.0,12.5,90,15\n"
SPT = b"depth_m,n,energy_ratio\n1.5,12,60\n3.0,20,72\n4.5,31,72\n"


@pytest.fixture
def model(app, people):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            return make_ground(conn, people["own"])


def _upload(client, auth, pid, model_id, data, **fields):
    form = {"csrf_token": auth.token(), "kind": "cpt", "name": "CPT-01", "easting_m": "100",
            "northing_m": "200", "ground_level_m": "10.0", **fields, "file": (io.BytesIO(data), "s.csv")}
    return client.post(f"/projects/{pid}/ground/{model_id}/soundings", data=form,
                       content_type="multipart/form-data")


def _rows(app, table):
    with app.app_context():
        return db.get_db().execute(f"SELECT COUNT(*) FROM {table}").fetchone()[0]


def test_a_cpt_sounding_is_stored_and_drawn(app, client, auth, people, model):
    pid = people["own"]
    auth.login(people["engineer"])
    r = _upload(client, auth, pid, model, CPT)
    assert r.status_code == 303
    with app.app_context():
        conn = db.get_db()
        [loc] = loc_q.for_model(conn, pid, model)
        readings = loc_q.cpt(conn, loc.id)["CPT-01"]["readings"]
        assert audit.entries(conn, pid, 1)[0]["action"] == "sounding added"
    assert (loc.loca_id, loc.ground_level_m, loc.loca_type) == ("CPT-01", 10.0, "CPT")
    assert [(r["depth_m"], r["qc_mpa"], r["u2_kpa"]) for r in readings][-1] == (2.0, 12.5, 15.0)
    auth.login(people["viewer"])
    page = client.get(f"/projects/{pid}/ground/{model}/soundings").get_data(as_text=True)
    svg = page[page.index("<svg"):page.index("</svg>") + 6]
    texts = " ".join(t.text or "" for t in ET.fromstring(svg).iter("{http://www.w3.org/2000/svg}text"))
    assert "CPT cone resistance against level" in texts and "level (m)" in texts
    assert "cohesive" in texts and "cohesionless" in texts  # the layers beside the profile
    assert "CPT-01" in texts and "Caution" in page


def test_an_spt_profile_stores_n60(app, client, auth, people, model):
    """N60 = N ER / 60 (Skempton 1986): N 20 at ER 72 % gives 24."""
    pid = people["own"]
    auth.login(people["engineer"])
    assert _upload(client, auth, pid, model, SPT, kind="spt", name="BH-2").status_code == 303
    with app.app_context():
        conn = db.get_db()
        [loc] = loc_q.for_model(conn, pid, model)
        n60 = [r["n60"] for r in loc_q.spt(conn, loc.id)]
    assert n60 == pytest.approx([12.0, 24.0, 37.2])
    page = client.get(f"/projects/{pid}/ground/{model}/soundings").get_data(as_text=True)
    assert "SPT N60 against level" in page


def test_a_bad_file_is_refused_with_row_and_column_and_nothing_stored(app, client, auth, people, model):
    pid = people["own"]
    auth.login(people["engineer"])
    bad = b"depth_m,qc_mpa,fs_kpa\n0.5,1.2,20\n1.0,999,35\n0.8,8.0,60\n"
    r = _upload(client, auth, pid, model, bad)
    assert r.status_code == 422
    text = r.get_data(as_text=True)
    assert "row 3, column qc_mpa" in text and "Nothing was stored" in text
    assert _rows(app, "locations") == 0 and _rows(app, "cpt_readings") == 0


def test_depths_that_go_back_are_refused(app, client, auth, people, model):
    auth.login(people["engineer"])
    bad = b"depth_m,qc_mpa,fs_kpa\n0.5,1.2,20\n1.0,2.0,35\n0.8,8.0,60\n"
    r = _upload(client, auth, people["own"], model, bad)
    assert r.status_code == 422 and "row 4, column depth_m" in r.get_data(as_text=True)
    assert _rows(app, "cpt_tests") == 0


def test_the_same_name_elsewhere_is_refused(app, client, auth, people, model):
    pid = people["own"]
    auth.login(people["engineer"])
    assert _upload(client, auth, pid, model, CPT).status_code == 303
    r = _upload(client, auth, pid, model, CPT, easting_m="150")
    assert r.status_code == 422 and "easting_m" in r.get_data(as_text=True)
    assert _rows(app, "locations") == 1 and _rows(app, "cpt_readings") == 4
    # the same place again replaces that sounding's readings, nothing doubles
    assert _upload(client, auth, pid, model, CPT).status_code == 303
    assert _rows(app, "cpt_readings") == 4


@pytest.mark.parametrize("role,status", [("inspector", 403), ("viewer", 403), ("engineer", 303)])
def test_only_engineers_upload(app, client, auth, people, model, role, status):
    auth.login(people[role])
    assert _upload(client, auth, people["own"], model, CPT).status_code == status
    assert _rows(app, "locations") == (1 if status == 303 else 0)


def test_another_projects_model_is_404(client, auth, people, model):
    auth.login(people["outsider"])
    assert client.get(f"/projects/{people['own']}/ground/{model}/soundings").status_code == 404
