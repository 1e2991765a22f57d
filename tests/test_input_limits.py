"""Record text and numbers that used to give a 500, and client ids reused with another body.

Text that is not valid Unicode (a lone surrogate, which JSON can carry and UTF-8 cannot) is
refused with 422 naming the field wherever record text comes in; an integer too large for a
float, JSON nested past the parser's depth and a sign-off id outside SQLite's 64 bits are 4xx
naming the field (or the body), never a 500, and nothing is stored. The same client id again
with the same body gets the first answer; with another body 409 ``client_id reused``; client
ids are kept apart per project.
"""

from __future__ import annotations

import io
import json
import uuid

import pytest
from PIL import Image

from fieldapp import db
from fieldapp.queries import piles
from fieldapp.record_input import NUMBER_FIELDS
from tests.conftest import PASSWORD
from tests.test_record_api import full_record, put
from tests.test_record_api import make_site as record_site
from tests.test_record_api import site as site  # noqa: F401 - the record tests' site fixture

SURROGATE = "\ud800"
HUGE = 10 ** 400            # 401 digits


def _versions(app, project_id):
    with app.app_context():
        return db.get_db().execute("SELECT COUNT(*) FROM pile_records WHERE project_id = ?",
                                   (project_id,)).fetchone()[0]


def _raw_put(client, auth, project_id, mark, text):
    """A PUT whose body is ``text`` as it is (JSON the test writes itself)."""
    return client.put(f"/api/v1/projects/{project_id}/piles/{mark}/record", data=text,
                      content_type="application/json", headers={"X-CSRFToken": auth.token()})


def _json_with(record, client_id=None) -> str:
    """The PUT body as JSON text (``json.dumps`` writes a lone surrogate as ``\\ud800``)."""
    return json.dumps({"client_id": client_id or str(uuid.uuid4()), "base_version": None, "record": record})


# --- text that is not valid Unicode ---------------------------------------------------------

@pytest.mark.parametrize("field, changes", [
    ("notes", {"notes": f"ok {SURROGATE} then"}),
    ("rig", {"rig": SURROGATE}),
    ("strata[0].description", {"strata": [{"from_depth": 0.0, "to_depth": 2.0, "material": "ignore",
                                           "description": f"fill {SURROGATE}"}]}),
    ("deliveries[0].docket", {"deliveries": [{"docket": SURROGATE, "volume_m3": 2.0}]}),
])
def test_lone_surrogate_in_record_text_is_422_naming_the_field(app, client, auth, site, field, changes):
    auth.login(site["inspector"])
    answer = _raw_put(client, auth, site["own"], "B1", _json_with(full_record(site, "B1", **changes)))
    assert answer.status_code == 422
    assert "valid Unicode" in answer.get_json()["errors"][field]
    assert _versions(app, site["own"]) == 0


def test_lone_surrogate_in_an_amendment_reason_is_422(app, client, auth, site):
    auth.login(site["inspector"])
    body = json.loads(_json_with(full_record(site, "B1")))
    body["amendment"] = {"reason": SURROGATE}
    answer = _raw_put(client, auth, site["own"], "B1", json.dumps(body))
    assert answer.status_code == 422 and "amendment.reason" in answer.get_json()["errors"]
    assert _versions(app, site["own"]) == 0


def _signoff(client, auth, project_id, mark, **body):
    return client.post(f"/api/v1/projects/{project_id}/piles/{mark}/signoff", data=json.dumps(body),
                       content_type="application/json", headers={"X-CSRFToken": auth.token()})


def test_sign_off_text_that_is_not_valid_unicode_is_422_and_nothing_signed(app, client, auth, site):
    auth.login(site["inspector"])
    assert put(client, auth, site["own"], "B1", full_record(site, "B1")).status_code == 200
    auth.logout()
    auth.login(site["engineer"])
    for name, body in (("reasons", dict(disposition="remedial", reasons=f"x {SURROGATE}", password=PASSWORD)),
                       ("disposition", dict(disposition=SURROGATE, reasons="r", password=PASSWORD)),
                       ("password", dict(disposition="accepted", reasons="", password=SURROGATE))):
        answer = _signoff(client, auth, site["own"], "B1", **body)
        assert answer.status_code == 422, name
        assert name in answer.get_json()["errors"] and answer.get_json()["signed"] is False
    with app.app_context():
        count = db.get_db().execute("SELECT COUNT(*) FROM signoffs").fetchone()[0]
    assert count == 0
    review = client.get(f"/projects/{site['own']}/review/piles/B1")
    assert review.status_code == 200


def test_remedial_of_outside_64_bits_is_422_naming_it(client, auth, site):
    auth.login(site["inspector"])
    assert put(client, auth, site["own"], "B1", full_record(site, "B1")).status_code == 200
    auth.logout()
    auth.login(site["engineer"])
    for value in (2 ** 64, -(2 ** 63) - 1, HUGE):
        answer = _signoff(client, auth, site["own"], "B1", disposition="accepted", reasons="fine",
                          password=PASSWORD, remedial_of=value)
        assert answer.status_code == 422 and "remedial_of" in answer.get_json()["errors"]


# --- numbers and nesting ----------------------------------------------------------------------

@pytest.mark.parametrize("field", sorted(NUMBER_FIELDS))
def test_a_401_digit_integer_in_a_record_number_is_422_naming_it(app, client, auth, site, field):
    auth.login(site["inspector"])
    answer = _raw_put(client, auth, site["own"], "B1", _json_with(full_record(site, "B1", **{field: HUGE})))
    assert answer.status_code == 422
    assert field in answer.get_json()["errors"]
    assert _versions(app, site["own"]) == 0


@pytest.mark.parametrize("field, changes", [
    ("deliveries[0].volume_m3", {"deliveries": [{"docket": "D1", "volume_m3": HUGE}]}),
    ("deliveries[0].slump_mm", {"deliveries": [{"docket": "D1", "slump_mm": -HUGE}]}),
    ("strata[0].to_depth", {"strata": [{"from_depth": 0.0, "to_depth": HUGE, "material": "ignore"}]}),
    ("strata[0].layer_index", {"strata": [{"from_depth": 0.0, "to_depth": 1.0, "material": "ignore",
                                           "layer_index": HUGE}]}),
])
def test_a_401_digit_integer_in_a_list_item_is_422_naming_it(app, client, auth, site, field, changes):
    auth.login(site["inspector"])
    answer = _raw_put(client, auth, site["own"], "B1", _json_with(full_record(site, "B1", **changes)))
    assert answer.status_code == 422 and field in answer.get_json()["errors"]
    assert _versions(app, site["own"]) == 0


def test_a_huge_base_version_is_refused_not_a_500(client, auth, site):
    auth.login(site["inspector"])
    body = json.loads(_json_with(full_record(site, "B1")))
    body["base_version"] = HUGE
    answer = _raw_put(client, auth, site["own"], "B1", json.dumps(body))
    assert answer.status_code == 422 and "base_version" in answer.get_json()["errors"]


def test_json_nested_30000_deep_is_400_not_a_500(app, client, auth, site):
    deep = '{"record": ' + "[" * 30_000 + "]" * 30_000 + "}"
    auth.login(site["inspector"])
    for url, method in ((f"/api/v1/projects/{site['own']}/piles/B1/record", "PUT"),
                        (f"/api/v1/projects/{site['own']}/piles/B1/preview", "POST")):
        answer = client.open(url, method=method, data=deep, content_type="application/json",
                             headers={"X-CSRFToken": auth.token()})
        assert answer.status_code == 400, url
        assert "JSON object" in answer.get_json()["error"]
    auth.logout()
    auth.login(site["engineer"])
    answer = client.post(f"/api/v1/projects/{site['own']}/piles/B1/signoff", data=deep,
                         content_type="application/json", headers={"X-CSRFToken": auth.token()})
    assert answer.status_code == 400
    assert _versions(app, site["own"]) == 0


# --- client ids -------------------------------------------------------------------------------

def test_same_client_id_and_body_answers_the_first_save_again(app, client, auth, site):
    auth.login(site["inspector"])
    cid = str(uuid.uuid4())
    first = put(client, auth, site["own"], "B1", full_record(site, "B1"), client_id=cid)
    again = put(client, auth, site["own"], "B1", full_record(site, "B1"), client_id=cid)
    assert first.status_code == again.status_code == 200
    assert again.get_json() == first.get_json() and _versions(app, site["own"]) == 1


def test_same_client_id_with_another_body_is_409_and_nothing_stored(app, client, auth, site):
    auth.login(site["inspector"])
    cid = str(uuid.uuid4())
    assert put(client, auth, site["own"], "B1", full_record(site, "B1"), client_id=cid).status_code == 200
    other = put(client, auth, site["own"], "B1", full_record(site, "B1", debris_mm=30), client_id=cid,
                base_version=1)
    assert other.status_code == 409 and other.get_json()["error"] == "client_id reused"
    assert _versions(app, site["own"]) == 1


def test_client_ids_are_kept_apart_per_project(app, client, auth, site):
    """The outsider records in their own project with an id already used in 'own': a new save
    of their pile, not "another pile"."""
    theirs = record_site(app, site["other"])
    cid = str(uuid.uuid4())
    auth.login(site["inspector"])
    assert put(client, auth, site["own"], "B1", full_record(site, "B1"), client_id=cid).status_code == 200
    auth.logout()
    auth.login(site["outsider"])
    answer = put(client, auth, site["other"], "B1", full_record(dict(site, **theirs), "B1"), client_id=cid)
    assert answer.status_code == 200, answer.get_json()
    assert answer.get_json()["version"] == 1
    with app.app_context():
        conn = db.get_db()
        assert piles.get_pile(conn, site["other"], "B1").current_version == 1
        assert piles.get_pile(conn, site["own"], "B1").current_version == 1


def _jpeg(shade: int) -> bytes:
    out = io.BytesIO()
    Image.new("RGB", (64, 48), (shade, 90, 40)).save(out, "JPEG")
    return out.getvalue()


def _photo(client, auth, project_id, cid, data, caption="base"):
    return client.post(f"/api/v1/projects/{project_id}/piles/B1/photos",
                       data={"file": (io.BytesIO(data), "p.jpg"), "client_id": cid, "kind": "base",
                             "caption": caption},
                       content_type="multipart/form-data", headers={"X-CSRFToken": auth.token()})


def test_photo_client_id_reused_with_another_file_is_409(app, client, auth, site):
    auth.login(site["inspector"])
    cid = str(uuid.uuid4())
    first = _photo(client, auth, site["own"], cid, _jpeg(10))
    assert first.status_code == 201
    again = _photo(client, auth, site["own"], cid, _jpeg(10))
    assert again.status_code == 200 and again.get_json()["id"] == first.get_json()["id"]
    for other in (_photo(client, auth, site["own"], cid, _jpeg(200)),
                  _photo(client, auth, site["own"], cid, _jpeg(10), caption="another caption")):
        assert other.status_code == 409 and other.get_json()["error"] == "client_id reused"
    with app.app_context():
        assert db.get_db().execute("SELECT COUNT(*) FROM photos").fetchone()[0] == 1


def test_photo_client_ids_are_kept_apart_per_project(app, client, auth, site):
    record_site(app, site["other"])
    cid = str(uuid.uuid4())
    auth.login(site["inspector"])
    assert _photo(client, auth, site["own"], cid, _jpeg(10)).status_code == 201
    auth.logout()
    auth.login(site["outsider"])
    assert _photo(client, auth, site["other"], cid, _jpeg(10)).status_code == 201
