"""The rig's dry-run recheck, ``POST /api/v1/projects/<id>/piles/<mark>/preview``, and the
required toe that the rig page, the bundle and the preview all take from
``rig_view.required_toe_for``.

The preview answers what a save of the same body would store, stores nothing, and keeps the
PUT's access rules. The required toe is checked against the compression check itself: a record
at the level is ok, 0.05 m higher is short (the level the check needs, whatever the design
approach and the basis of the loads).
"""

from __future__ import annotations

from dataclasses import replace

import pytest

from fieldapp import db
from fieldapp.queries import audit, piles, projects, records
from tests.factories import make_site
from tests.test_record_api import full_record, put
from tests.test_record_api import site as site  # noqa: F401 - the record tests' site fixture


def preview(client, auth, project_id, mark, record, token=None, **extra):
    return client.post(f"/api/v1/projects/{project_id}/piles/{mark}/preview",
                       json={"record": record, **extra}, headers={"X-CSRFToken": token or auth.token()})


def _state(app, project_id, mark):
    """(pile's current version, number of stored versions, audit head) of the project."""
    with app.app_context():
        conn = db.get_db()
        pile = piles.get_pile(conn, project_id, mark)
        count = conn.execute("SELECT COUNT(*) FROM pile_records WHERE project_id = ?", (project_id,)).fetchone()[0]
        return pile.current_version, count, audit.head(conn, project_id)


def _by_code(checks):
    return {c["code"]: (c["ok"], c["value"], c["limit"], c["utilisation"]) for c in checks}


@pytest.mark.parametrize("changes", [
    {},                                                            # as designed: meets design
    {"measured_depth": 12.0},                                      # stopped short: compression short
    {"debris_mm": 80, "cover_mm": 40},                             # base and cover short
    {"strata": [{"from_depth": 0.0, "to_depth": 8.0, "material": "ignore", "description": "fill"}]},
])
def test_preview_answers_what_the_following_save_stores(app, client, auth, site, changes):
    auth.login(site["inspector"])
    record = full_record(site, "B1", **changes)
    before = _state(app, site["own"], "B1")
    answer = preview(client, auth, site["own"], "B1", record)
    assert answer.status_code == 200, answer.get_json()
    body = answer.get_json()
    assert _state(app, site["own"], "B1") == before        # no version, no audit entry
    saved = put(client, auth, site["own"], "B1", record)
    assert saved.status_code == 200
    stored = saved.get_json()
    assert body["verdict"] == stored["verdict"]
    assert _by_code(body["checks"]) == _by_code(stored["checks"])
    assert [c["code"] for c in body["checks"]] == [c["code"] for c in stored["checks"]]
    with app.app_context():
        conn = db.get_db()
        kept = records.current(conn, piles.get_pile(conn, site["own"], "B1").id)
    assert _by_code(kept.checks) == _by_code(body["checks"]) and kept.verdict == body["verdict"]


def test_preview_of_a_short_pile_says_how_much_deeper(client, auth, site):
    auth.login(site["inspector"])
    record = full_record(site, "B1", measured_depth=12.0)       # toe at +88.0, far above the need
    body = preview(client, auth, site["own"], "B1", record).get_json()
    level = body["required_toe_level"]
    assert level < 88.0 and body["more_needed_m"] == pytest.approx(88.0 - level, abs=1e-3)
    axial = next(c for c in body["checks"] if c["code"] == "axial_compression")
    assert axial["ok"] is False and body["verdict"] == "needs engineer"


def test_preview_takes_the_strata_met(client, auth, site):
    """Fill logged down to 8 m below the platform (+92.0) carries no shaft: the level the
    ground model needs is short on the ground met, and the preview's level is the one the
    compression check on the ground met needs (ok there, short 0.05 m higher)."""
    auth.login(site["inspector"])
    fill = [{"from_depth": 0.0, "to_depth": 8.0, "material": "ignore", "description": "fill"}]

    def at(toe, strata):
        record = full_record(site, "B1", strata=strata, measured_depth=round(100.0 - toe, 6))
        body = preview(client, auth, site["own"], "B1", record).get_json()
        return body, next(c for c in body["checks"] if c["code"] == "axial_compression")

    plain, _ = at(site["toe"], [])
    met, _ = at(site["toe"], fill)
    assert met["borrowed"] and any("0-8 m (ignore)" in n for n in met["notes"])
    assert met["required_toe_level"] < plain["required_toe_level"]
    assert at(plain["required_toe_level"], fill)[1]["ok"] is False
    assert at(met["required_toe_level"], fill)[1]["ok"] is True
    assert at(met["required_toe_level"] + 0.05, fill)[1]["ok"] is False


def test_preview_keeps_the_puts_access_rules(app, client, auth, site):
    record = full_record(site, "B1")
    assert preview(client, auth, site["own"], "B1", record).status_code == 401
    auth.login(site["viewer"])
    refused = preview(client, auth, site["own"], "B1", record)
    assert refused.status_code == 403
    auth.logout()
    auth.login(site["outsider"])
    assert preview(client, auth, site["own"], "B1", record).status_code == 404
    auth.logout()
    auth.login(site["inspector"])
    assert preview(client, auth, site["own"], "NOPE", record).status_code == 404
    no_token = client.post(f"/api/v1/projects/{site['own']}/piles/B1/preview", json={"record": record})
    assert no_token.status_code == 400                           # CSRF, as the PUT
    assert preview(client, auth, site["own"], "B1", record).status_code == 200


def test_preview_refuses_bad_input_with_422_naming_the_field(app, client, auth, site):
    auth.login(site["inspector"])
    before = _state(app, site["own"], "B1")
    bad = preview(client, auth, site["own"], "B1", full_record(site, "B1", measured_depth="deep", debris_mm=-4))
    assert bad.status_code == 422
    assert {"measured_depth", "debris_mm"} <= set(bad.get_json()["errors"])
    assert preview(client, auth, site["own"], "B1", None).status_code == 422
    assert client.post(f"/api/v1/projects/{site['own']}/piles/B1/preview", data="[1, 2]",
                       content_type="application/json",
                       headers={"X-CSRFToken": auth.token()}).status_code == 400
    assert _state(app, site["own"], "B1") == before


# --- the required toe with the demand of the compression check ------------------------------

CLAY_60 = [dict(top_level_m=10.0, bottom_level_m=-40.0, material="cohesive", unit_weight_kn_m3=19.0,
                cu_kpa=60.0)]


@pytest.fixture
def limit_state_site(app, people):
    """Uniform clay c_u 60 kPa, a 600 mm pile for 600 kN; rules: limit state with working
    loads (the schedule's 600 kN is multiplied by load_factor before it meets phi_g R_u)."""
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            rules = projects.current_rules(conn, people["own"]).rules
            projects.save_rules(conn, people["own"], replace(rules, design_approach="limit_state",
                                                             loads_are="working"), "limit state")
    make_site(app, people["own"], CLAY_60, ground_name="clay 60", water_level_m=8.0,
              pile_list=[("L1", None, dict(compression_kn=600.0, toe_level_m=-20.0))])
    return people


def test_limit_state_with_working_loads_required_toe_is_what_the_compression_check_needs(
        app, client, auth, limit_state_site):
    pid = limit_state_site["own"]
    auth.login(limit_state_site["inspector"])
    page = client.get(f"/api/v1/projects/{pid}/piles/L1").get_json()
    level = page["required_toe_level"]
    bundle = client.get(f"/api/v1/projects/{pid}/bundle").get_json()
    assert bundle["piles"]["L1"]["required_toe_level"] == level
    # the live load is the check's demand: 600 kN working x load_factor 1.5 = 900 kN factored
    assert page["load_kn"] == pytest.approx(900.0)
    # a preview of a pile stopped 0.05 m above the level is short; one at the level is ok
    for toe, ok in ((level + 0.05, False), (level, True)):
        record = {"progress": "logged", "platform_level": 10.0, "measured_depth": round(10.0 - toe, 6),
                  "diameter_mm": 600, "cutoff_level": 9.0}
        body = preview(client, auth, pid, "L1", record).get_json()
        axial = next(c for c in body["checks"] if c["code"] == "axial_compression")
        assert axial["ok"] is ok, (toe, axial["reason"])
        assert body["required_toe_level"] == pytest.approx(level, abs=1e-6)
    # and the saved recheck agrees with the preview at the level
    saved = put(client, auth, pid, "L1", {"progress": "logged", "platform_level": 10.0,
                                          "measured_depth": round(10.0 - level, 6), "diameter_mm": 600,
                                          "cutoff_level": 9.0})
    axial = next(c for c in saved.get_json()["checks"] if c["code"] == "axial_compression")
    assert axial["ok"] is True and axial["value"] == pytest.approx(900.0)


def test_kept_required_levels_equal_ones_made_from_nothing(app, limit_state_site):
    """The required level kept between calls (rig_view._required) is the one worked out afresh,
    and a changed input (the rules' load factor) gives the level of the changed input."""
    from fieldapp import pile_inputs, rig_view

    pid = limit_state_site["own"]
    with app.app_context():
        conn = db.get_db()
        row = piles.get_pile(conn, pid, "L1")
        design, ground = pile_inputs.pile_design(row), pile_inputs.load_ground(conn, row.ground_model_id)
        rules = projects.current_rules(conn, pid).rules
    curve = rig_view.tablet_curve(design, ground, rules)
    kept = rig_view.required_toe_for(design, None, ground, rules, curve)
    again = rig_view.required_toe_for(design, None, ground, rules, curve)
    rig_view.clear_kept_levels()
    fresh = rig_view.required_toe_for(design, None, ground, rules, curve)
    assert kept == again == fresh
    heavier = replace(rules, load_factor=1.8)
    changed = rig_view.required_toe_for(design, None, ground, heavier, curve)
    rig_view.clear_kept_levels()
    assert changed == rig_view.required_toe_for(design, None, ground, heavier, curve)
    assert changed.level_m < kept.level_m and changed.demand_kn == pytest.approx(600.0 * 1.8)
