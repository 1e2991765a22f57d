"""The Piles screen and the pile list API in pages (issue 24), and a repeated photo answered
before its image is decoded.

Invented site: 450 single piles P1 to P450 on a 30 x 15 grid (easting 100 + 3 m per column,
northing 200 + 3 m per row), toe levels 36.0 to 36.9 m in turn, inserted in one transaction.
"""

from __future__ import annotations

import io
import re
import uuid

import pytest
from PIL import Image

from fieldapp import db, photos, saving
from fieldapp.queries import audit, ground, users
from fieldapp.queries import piles as piles_q
from tests.test_scale_bundle import LAYERS

N = 450


@pytest.fixture
def grid(app, people):
    pid = people["own"]
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            gm = ground.save_model(conn, pid, "clay over sand", 45.0, LAYERS)
            conn.executemany(
                "INSERT INTO piles (project_id, mark, ground_model_id, pile_type, easting_m, northing_m,"
                " cutoff_level_m, toe_level_m, diameter_mm, compression_kn) VALUES (?, ?, ?, 'bored', ?, ?, 49.0, ?, 600.0, 800.0)",
                [(pid, f"P{k + 1}", gm, 100.0 + 3.0 * (k % 30), 200.0 + 3.0 * (k // 30), 36.0 + 0.1 * (k % 10))
                 for k in range(N)])
            audit.append(conn, pid, "test", "schedule imported", "generated", {"piles": N})
    return dict(people, pid=pid, ground=gm)


def _marks(html: str) -> list[str]:
    return re.findall(r'<td data-label="Mark"><strong>(?:<a [^>]*>)?([^<]+)<', html)


def test_first_page_holds_200_piles_in_natural_order_and_links_on(client, auth, grid):
    auth.login(grid["viewer"])
    html = client.get(f"/projects/{grid['pid']}/piles").get_data(as_text=True)
    assert _marks(html) == [f"P{k}" for k in range(1, 201)]
    assert "Piles 1 to 200 of 450 shown" in html and "Page 1 of 3" in html
    last = client.get(f"/projects/{grid['pid']}/piles?page=3").get_data(as_text=True)
    assert _marks(last) == [f"P{k}" for k in range(401, 451)] and "Next page" not in last


def test_sort_and_filters_apply_to_the_whole_schedule_before_paging(client, auth, grid):
    auth.login(grid["viewer"])
    url = f"/projects/{grid['pid']}/piles"
    toe = _marks(client.get(url + "?sort=toe&desc=1").get_data(as_text=True))
    # descending reverses the whole order, as the unpaged screen did: the highest toes (36.9 m:
    # P10, P20, ... P450) first, latest mark first among equal toes
    assert toe[:3] == ["P450", "P440", "P430"] and len(toe) == 200 and toe[44] == "P10" and toe[45] == "P449"
    assert _marks(client.get(url + "?prefix=p44").get_data(as_text=True)) == ["P44"] + [f"P44{d}" for d in range(10)]
    # area: eastings 100 to 106 m, northings 200 to 203 m: columns 0-2 of rows 0-1
    area = _marks(client.get(url + "?bbox=106,203,100,200").get_data(as_text=True))
    assert area == ["P1", "P2", "P3", "P31", "P32", "P33"]
    assert "Area on the plan" in client.get(url + "?bbox=not,a,box").get_data(as_text=True)


def test_rig_filter_reads_the_current_record(app, client, auth, grid):
    with app.app_context():
        conn = db.get_db()
        inspector = users.by_email(conn, grid["inspector"])
        for mark, rig in (("P5", "R7"), ("P6", "R2")):
            saving.save_record(conn, grid["pid"], piles_q.get_pile(conn, grid["pid"], mark), inspector,
                               str(uuid.uuid4()), 0, {"progress": "boring", "rig": rig,
                                                      "platform_level": 50.0, "measured_depth": 5.0})
    auth.login(grid["viewer"])
    assert _marks(client.get(f"/projects/{grid['pid']}/piles?rig=r7").get_data(as_text=True)) == ["P5"]


def test_plan_json_gives_every_position(client, auth, grid):
    auth.login(grid["viewer"])
    data = client.get(f"/projects/{grid['pid']}/piles/plan.json").get_json()
    assert data["origin"] == [100, 200] and len(data["marks"]) == N and len(data["points"]) == 3 * N
    k = data["marks"].index("P32")  # column 1, row 1: 103 m, 203 m
    assert data["points"][3 * k:3 * k + 3] == [30, 30, 0] and data["states"][0] == "planned"


def test_pile_list_api_pages_with_an_etag_each(client, auth, grid):
    auth.login(grid["viewer"])
    base = f"/api/v1/projects/{grid['pid']}/piles"
    whole = client.get(base).get_json()
    assert len(whole["piles"]) == N and "page" not in whole   # unpaged, as before
    first = client.get(base + "?limit=100")
    body = first.get_json()
    assert [p["mark"] for p in body["piles"]] == [p["mark"] for p in whole["piles"][:100]]
    assert body["page"] == {"limit": 100, "offset": 0, "total": N, "next_after": "P100", "next_page": 2}
    after = client.get(base + "?limit=100&after=P100").get_json()
    second = client.get(base + "?limit=100&page=2")
    assert after["piles"] == second.get_json()["piles"] == whole["piles"][100:200]
    assert first.headers["ETag"] != second.headers["ETag"] != client.get(base).headers["ETag"]
    assert client.get(base + "?limit=100&page=2", headers={"If-None-Match": second.headers["ETag"]}).status_code == 304
    end = client.get(base + "?limit=100&page=5").get_json()
    assert len(end["piles"]) == 50 and end["page"]["next_page"] is None and end["page"]["next_after"] is None
    bad = client.get(base + "?limit=0&page=x")
    assert bad.status_code == 422 and set(bad.get_json()["errors"]) == {"limit", "page"}


def test_a_repeated_photo_is_answered_before_its_image_is_decoded(app, client, auth, grid, monkeypatch):
    auth.login(grid["inspector"])
    buf = io.BytesIO()
    Image.new("RGB", (64, 48), (120, 90, 60)).save(buf, "JPEG")
    form = {"client_id": str(uuid.uuid4()), "kind": "base", "caption": "toe"}
    url = f"/api/v1/projects/{grid['pid']}/piles/P1/photos"
    first = client.post(url, data=dict(form, file=(io.BytesIO(buf.getvalue()), "a.jpg")),
                        headers={"X-CSRFToken": auth.token()})
    assert first.status_code == 201, first.get_json()

    def no_decode(*_args, **_kwargs):
        raise AssertionError("a repeated photo was decoded again")

    monkeypatch.setattr(photos, "ingest", no_decode)
    again = client.post(url, data=dict(form, file=(io.BytesIO(buf.getvalue()), "a.jpg")),
                        headers={"X-CSRFToken": auth.token()})
    assert again.status_code == 200 and again.get_json()["id"] == first.get_json()["id"]


def test_a_repeated_record_is_answered_without_a_recheck(app, client, auth, grid, monkeypatch):
    auth.login(grid["inspector"])
    url = f"/api/v1/projects/{grid['pid']}/piles/P2/record"
    body = {"client_id": str(uuid.uuid4()), "base_version": 0,
            "record": {"progress": "boring", "platform_level": 50.0, "measured_depth": 6.0}}
    first = client.put(url, json=body, headers={"X-CSRFToken": auth.token()})
    assert first.status_code == 200

    def no_recheck(*_args, **_kwargs):
        raise AssertionError("a repeated save was validated and rechecked again")

    monkeypatch.setattr(saving, "save_record", no_recheck)
    again = client.put(url, json=body, headers={"X-CSRFToken": auth.token()})
    assert again.status_code == 200 and again.get_json() == first.get_json()
    monkeypatch.undo()
    other = dict(body, record=dict(body["record"], measured_depth=7.0))   # the id reused: refused
    assert client.put(url, json=other, headers={"X-CSRFToken": auth.token()}).status_code == 409
