"""The offline bundle kept per audit head and sent by difference (issue 24).

Invented site: the four piles of tests/test_offline_api.py. Each expected bundle is the one
``rig_view.build_bundle`` makes from scratch for the same database state (the whole build that
every tablet received before): the kept, patched and delta-applied bundles must equal it.
"""

from __future__ import annotations

import dataclasses
import gzip
import json
import uuid

import pytest

from fieldapp import bundle_store, create_app, db, rig_view
from fieldapp.queries import audit, projects
from fieldapp.rig_view import rig_data_from_bundle
from tests.factories import make_site
from tests.test_offline_api import LAYERS, _pile


@pytest.fixture
def site(app, people):
    made = make_site(app, people["own"], LAYERS, ground_name="clay over sand", water_level_m=45.0,
                     pile_list=[_pile(mark, d, load) for mark, d, load in (
                         ("P1", 600.0, 800.0), ("P2", 600.0, 900.0), ("P3", 600.0, 700.0),
                         ("P4", 900.0, 1500.0))])
    with app.app_context():  # the factory writes no audit entry; the app's own imports do
        conn = db.get_db()
        with db.write(conn):
            audit.append(conn, people["own"], "test", "schedule imported", "test", {"piles": 4})
    return dict(people, ground=made.ground)


def url(site, since=None):
    return f"/api/v1/projects/{site['own']}/bundle" + (f"?since={since}" if since else "")


def _save(client, auth, site, mark, depth=11.0, base=0):
    answer = client.put(f"/api/v1/projects/{site['own']}/piles/{mark}/record",
                        json={"client_id": str(uuid.uuid4()), "base_version": base,
                              "record": {"progress": "boring", "platform_level": 50.0, "measured_depth": depth}},
                        headers={"X-CSRFToken": auth.token()})
    assert answer.status_code == 200, answer.get_json()


def _fresh(app, site) -> dict:
    """The bundle built whole from the database now, as JSON gives it, with its head."""
    with app.app_context():
        conn = db.get_db()
        project = projects.get(conn, site["own"])
        data = dict(rig_view.build_bundle(conn, project), head=audit.head(conn, site["own"])[1])
    return json.loads(bundle_store.encode(data))


def test_bundle_carries_its_audit_head_and_is_kept_on_disk(app, client, auth, site, tmp_path):
    auth.login(site["inspector"])
    first = client.get(url(site))
    data = first.get_json()
    with app.app_context():
        head = audit.head(db.get_db(), site["own"])[1]
    assert data["head"] == head
    assert data == _fresh(app, site)
    kept = list((tmp_path / "data" / "bundles" / f"p{site['own']}").glob("*.json.gz"))
    assert len(kept) == 1 and json.loads(gzip.decompress(kept[0].read_bytes())) == data


def test_an_unchanged_bundle_is_read_not_built_even_by_another_process(app, client, auth, site, tmp_path,
                                                                        monkeypatch):
    auth.login(site["inspector"])
    first = client.get(url(site))

    def refuse(*_args, **_kwargs):
        raise AssertionError("the bundle was built again at an unchanged head")

    monkeypatch.setattr(bundle_store, "build_bundle", refuse)
    again = client.get(url(site))
    assert again.status_code == 200 and again.data == first.data
    # a second app on the same data folder (another server process) finds it on disk
    other = create_app({"TESTING": True, "DATA_DIR": str(tmp_path / "data")})
    with other.app_context():
        conn = db.get_db()
        stored = bundle_store.current(conn, projects.get(conn, site["own"]), str(tmp_path / "data"))
    assert json.loads(stored.body()) == first.get_json()


def test_record_saves_patch_the_kept_bundle_to_what_a_whole_build_gives(app, client, auth, site, monkeypatch):
    auth.login(site["inspector"])
    client.get(url(site))
    _save(client, auth, site, "P1")
    _save(client, auth, site, "P4", depth=13.0)

    def refuse(*_args, **_kwargs):
        raise AssertionError("a record save rebuilt the whole bundle")

    expected = _fresh(app, site)
    monkeypatch.setattr(bundle_store, "build_bundle", refuse)
    data = client.get(url(site)).get_json()
    assert data == expected
    assert data["piles"]["P4"]["version"] == 1 and data["piles"]["P4"]["record"]["measured_depth"] == 13.0
    with app.app_context():
        conn = db.get_db()
        from fieldapp.queries import piles
        row = piles.get_pile(conn, site["own"], "P4")
        page = json.loads(json.dumps(rig_view.rig_data(conn, site["own"], row)))
    assert rig_data_from_bundle(data, "P4") == page


def test_delta_holds_only_the_changed_piles_and_applies_to_the_new_bundle(app, client, auth, site):
    auth.login(site["inspector"])
    old = client.get(url(site)).get_json()
    _save(client, auth, site, "P2")
    _save(client, auth, site, "P3", depth=12.0)
    answer = client.get(url(site, old["head"]))
    delta = answer.get_json()
    assert answer.status_code == 200 and delta["delta"] is True and delta["since"] == old["head"]
    assert sorted(delta["piles"]) == ["P2", "P3"]
    assert delta["curves"] == {} and delta["ground_models"] == {} and delta["piles_removed"] == []
    assert "rules" not in delta and "limits" not in delta
    new = _fresh(app, site)
    assert delta["head"] == new["head"]
    assert bundle_store.apply_delta(old, delta) == new


def test_a_rules_change_sends_the_changed_shared_parts(app, client, auth, site):
    auth.login(site["inspector"])
    old = client.get(url(site)).get_json()
    with app.app_context():
        conn = db.get_db()
        rules = projects.current_rules(conn, site["own"]).rules
        changed = dataclasses.replace(rules, base_debris_mm=rules.base_debris_mm + 10.0)
        with db.write(conn):
            version = projects.save_rules(conn, site["own"], changed, "test")
            audit.append(conn, site["own"], "test", "rules changed", f"version {version}", {})
    delta = client.get(url(site, old["head"])).get_json()
    assert delta["delta"] is True
    assert delta["limits"]["base_debris_mm"] == old["limits"]["base_debris_mm"] + 10.0
    assert delta["rules_version"] == old["rules_version"] + 1
    assert sorted(delta["piles"]) == ["P1", "P2", "P3", "P4"]  # each entry names its rules version
    assert bundle_store.apply_delta(old, delta) == _fresh(app, site)


def test_unknown_or_current_head(app, client, auth, site):
    auth.login(site["inspector"])
    full = client.get(url(site)).get_json()
    same = client.get(url(site, full["head"])).get_json()
    assert same["delta"] is True and same["piles"] == {} and same["head"] == full["head"]
    assert bundle_store.apply_delta(full, same) == full
    unknown = client.get(url(site, "ab" * 32)).get_json()
    assert "delta" not in unknown and unknown == full
