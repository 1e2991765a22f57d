"""The record API: saving as-built records, the recheck on every save, idempotent repeats,
conflicts, validation with nothing saved, and who may do what (issue 5).

The site here is invented test data: one clay ground model, a two-pile cap and a single pile
whose design toes are taken from the capacity curve of the project's own rules, so a record
that matches the design meets it and one that stops short does not.
"""

from __future__ import annotations

import json
import math
import uuid

import pytest

from design_core.axial import capacity_curve, required_toe_level
from fieldapp import db, pile_inputs, record_input, saving
from fieldapp.queries import audit, caps, piles, projects, records, users
from tests.factories import make_ground, make_pile

CLAY = [
    dict(top_level_m=100.0, bottom_level_m=99.0, material="ignore", unit_weight_kn_m3=18.0,
         description="made ground"),
    dict(top_level_m=99.0, bottom_level_m=80.0, material="cohesive", unit_weight_kn_m3=19.0,
         cu_kpa=60.0, cu_bottom_kpa=150.0, description="firm to stiff clay"),
    dict(top_level_m=80.0, bottom_level_m=70.0, material="cohesionless", unit_weight_kn_m3=20.0,
         phi_deg=34.0, description="dense sand"),
]
CUTOFF = 99.0
PLATFORM = 100.0


def _pile_changes(e, n, toe, load, d_mm=600.0):
    """The design values of this file's piles (changes to the factory's defaults)."""
    return dict(easting_m=e, northing_m=n, cutoff_level_m=CUTOFF, toe_level_m=toe, diameter_mm=d_mm,
                compression_kn=load, shear_kn=10.0)


def make_site(app, project_id):
    """Ground, a 2-pile cap (C1: A1, A2) and a single pile B1 on the project; returns facts."""
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            rules = projects.current_rules(conn, project_id).rules
            gm = make_ground(conn, project_id, CLAY, "clay site", 98.0, "test ground")
            model = pile_inputs.load_ground(conn, gm)
            curve = capacity_curve(model, 0.6, CUTOFF, [CUTOFF - 0.1 - 0.05 * k for k in range(578)],
                                   "bored", rules)
            load = 900.0
            need = required_toe_level(curve, load)
            toe = math.floor((need - 0.5) * 4) / 4  # a little deeper than needed
            cap = caps.save_cap(conn, project_id, "C1", {"n_kn": 2 * load})
            make_pile(conn, project_id, "A1", gm, cap, **_pile_changes(500.0, 200.0, toe, load))
            make_pile(conn, project_id, "A2", gm, cap, **_pile_changes(501.8, 200.0, toe, load))
            make_pile(conn, project_id, "B1", gm, None, **_pile_changes(510.0, 200.0, toe, load))
    return {"toe": toe, "need": need, "load": load, "ground": gm}


@pytest.fixture
def site(app, people):
    facts = make_site(app, people["own"])
    facts.update(people)
    return facts


def full_record(site, mark="A1", **changes):
    """A complete record of a pile built as designed (every check can be made)."""
    design_e = {"A1": 500.0, "A2": 501.8, "B1": 510.0}[mark]
    depth = PLATFORM - site["toe"] + 0.1
    length = CUTOFF - (PLATFORM - depth)
    volume = math.pi / 4 * 0.6 ** 2 * (PLATFORM - (PLATFORM - depth)) * 1.08
    record = {
        "progress": "logged", "rig": "R2", "boring_start": "2026-03-02T08:00",
        "boring_end": "2026-03-02T10:30", "platform_level": PLATFORM, "measured_depth": depth,
        "diameter_mm": 600, "cutoff_level": CUTOFF, "casting_level": PLATFORM - 0.2,
        "easting": design_e + 0.02, "northing": 200.0, "inclination": 0.005,
        "base_check": "sounding", "debris_mm": 10, "cage_length": 8.0, "cover_mm": 80,
        "exposure_class": "XC2", "concrete_mpa": 40, "concrete_volume_m3": round(volume, 2),
        "pour_start": "2026-03-02T11:00", "pour_end": "2026-03-02T11:40",
        "deliveries": [{"docket": "D-101", "volume_m3": round(volume, 2),
                        "batched_at": "2026-03-02T10:20", "discharged_at": "2026-03-02T11:05",
                        "slump_mm": 180}],
        "strata": [], "notes": "as designed",
    }
    assert length > 0
    record.update(changes)
    return record


def put(client, auth, project_id, mark, record, client_id=None, base_version=None, token=None):
    return client.put(f"/api/v1/projects/{project_id}/piles/{mark}/record",
                      json={"client_id": client_id or str(uuid.uuid4()), "base_version": base_version,
                            "record": record},
                      headers={"X-CSRFToken": token or auth.token()})


def _count(app, sql, *args):
    with app.app_context():
        return db.get_db().execute(sql, args).fetchone()[0]


# --- session and reading -------------------------------------------------------------------

def test_session_gives_user_role_and_csrf_token(client, auth, site):
    assert client.get("/api/v1/session").status_code == 401
    auth.login(site["inspector"])
    body = client.get("/api/v1/session").get_json()
    assert body["user"] == site["inspector"] and body["role"] == "inspector"
    assert len(body["csrf_token"]) > 20


def test_projects_lists_only_the_users_projects(client, auth, site):
    auth.login(site["inspector"])
    names = [p["name"] for p in client.get("/api/v1/projects").get_json()["projects"]]
    assert names == ["Test quay"]


def test_piles_list_has_design_values_progress_verdict_version(client, auth, site):
    auth.login(site["viewer"])
    body = client.get(f"/api/v1/projects/{site['own']}/piles").get_json()
    marks = {p["mark"]: p for p in body["piles"]}
    assert set(marks) == {"A1", "A2", "B1"}
    a1 = marks["A1"]
    assert a1["toe_level"] == site["toe"] and a1["diameter_mm"] == 600 and a1["cap"] == "C1"
    assert a1["progress"] == "planned" and a1["verdict"] is None and a1["version"] == 0


def test_outsider_gets_404_for_another_projects_piles(client, auth, site):
    auth.login(site["outsider"])
    assert client.get(f"/api/v1/projects/{site['own']}/piles").status_code == 404
    r = put(client, auth, site["own"], "A1", full_record(site))
    assert r.status_code == 404 and r.get_json() == {"error": "not found"}


def test_unknown_pile_is_404(client, auth, site):
    auth.login(site["inspector"])
    assert put(client, auth, site["own"], "NOPE", full_record(site)).status_code == 404


# --- saving ---------------------------------------------------------------------------------

def test_record_as_designed_meets_design_and_moves_the_pile(app, client, auth, site):
    auth.login(site["inspector"])
    r = put(client, auth, site["own"], "B1", full_record(site, "B1"))
    assert r.status_code == 200, r.get_json()
    body = r.get_json()
    assert body["version"] == 1
    short = [c for c in body["checks"] if c["ok"] is not True]
    assert body["verdict"] == "meets design", short
    assert {"code", "value", "limit", "unit", "utilisation", "ok", "reason"} <= set(body["checks"][0])
    listed = {p["mark"]: p for p in client.get(f"/api/v1/projects/{site['own']}/piles").get_json()["piles"]}
    assert listed["B1"]["progress"] == "logged" and listed["B1"]["verdict"] == "meets design"
    assert listed["B1"]["version"] == 1
    with app.app_context():
        entries = audit.entries(db.get_db(), site["own"])
        assert entries[0]["action"] == "record saved" and entries[0]["subject"] == "B1"
        assert audit.verify_chain(db.get_db(), site["own"]).ok


def test_short_toe_needs_engineer_with_axial_compression_short(client, auth, site):
    auth.login(site["inspector"])
    # stop 2 m above the level the design load needs
    depth = PLATFORM - (site["need"] + 2.0)
    r = put(client, auth, site["own"], "B1", full_record(site, "B1", measured_depth=depth))
    body = r.get_json()
    assert r.status_code == 200 and body["verdict"] == "needs engineer"
    axial = next(c for c in body["checks"] if c["code"] == "axial_compression")
    assert axial["ok"] is False and axial["value"] < axial["limit"] or axial["utilisation"] > 1
    assert body["checks"][0]["ok"] is False  # short first


def test_partial_save_while_boring(client, auth, site):
    auth.login(site["inspector"])
    r = put(client, auth, site["own"], "A2", {"progress": "boring", "platform_level": "100,05",
                                              "rig": "R1", "boring_start": "2026-03-02T08:00Z"})
    assert r.status_code == 200, r.get_json()
    body = r.get_json()
    assert body["verdict"] == "needs engineer"  # nothing to check the toe with yet
    stored = client.get(f"/api/v1/projects/{site['own']}/piles/A2/record").get_json()
    assert stored["record"]["platform_level"] == pytest.approx(100.05)  # comma decimal read
    assert stored["progress"] == "boring"


def test_same_client_id_gives_same_answer_and_no_new_version(app, client, auth, site):
    auth.login(site["inspector"])
    cid = str(uuid.uuid4())
    first = put(client, auth, site["own"], "B1", full_record(site, "B1"), client_id=cid)
    again = put(client, auth, site["own"], "B1", full_record(site, "B1"), client_id=cid)
    assert first.status_code == again.status_code == 200
    assert first.get_json() == again.get_json()
    assert _count(app, "SELECT COUNT(*) FROM pile_records") == 1
    assert _count(app, "SELECT COUNT(*) FROM audit_log WHERE action = 'record saved'") == 1
    # a later version does not change the answer to the old client id
    put(client, auth, site["own"], "B1", full_record(site, "B1"), base_version=1)
    third = put(client, auth, site["own"], "B1", full_record(site, "B1"), client_id=cid)
    assert third.get_json()["version"] == 1


def test_client_id_of_another_pile_is_refused(client, auth, site):
    auth.login(site["inspector"])
    cid = str(uuid.uuid4())
    assert put(client, auth, site["own"], "B1", full_record(site, "B1"), client_id=cid).status_code == 200
    r = put(client, auth, site["own"], "A1", full_record(site), client_id=cid)
    assert r.status_code == 422 and "client_id" in r.get_json()["errors"]


def test_versions_increase_and_history_keeps_each(client, auth, site):
    auth.login(site["inspector"])
    v1 = put(client, auth, site["own"], "B1", {"progress": "boring", "platform_level": 100.0})
    v2 = put(client, auth, site["own"], "B1", full_record(site, "B1", progress="concreted"), base_version=1)
    v3 = put(client, auth, site["own"], "B1", full_record(site, "B1"), base_version=2)
    assert [r.get_json()["version"] for r in (v1, v2, v3)] == [1, 2, 3]
    hist = client.get(f"/api/v1/projects/{site['own']}/piles/B1/history").get_json()
    assert [v["version"] for v in hist["versions"]] == [1, 2, 3]
    assert [v["progress"] for v in hist["versions"]] == ["boring", "concreted", "logged"]
    assert hist["versions"][0]["record"] == {"progress": "boring", "platform_level": 100.0}
    assert hist["versions"][0]["created_by"] == "Inspector"


def test_older_base_version_is_a_conflict_and_changes_nothing(app, client, auth, site):
    auth.login(site["inspector"])
    put(client, auth, site["own"], "B1", full_record(site, "B1", notes="first"))
    put(client, auth, site["own"], "B1", full_record(site, "B1", notes="second"), base_version=1)
    before = _count(app, "SELECT COUNT(*) FROM audit_log")
    r = put(client, auth, site["own"], "B1", full_record(site, "B1", notes="stale"), base_version=1)
    assert r.status_code == 409
    body = r.get_json()
    assert body["error"] == "conflict"
    assert body["server"]["version"] == 2 and body["server"]["record"]["notes"] == "second"
    assert _count(app, "SELECT COUNT(*) FROM pile_records") == 2
    assert _count(app, "SELECT COUNT(*) FROM audit_log") == before
    # null base_version when a record exists is a conflict too (another tablet made it)
    assert put(client, auth, site["own"], "B1", full_record(site, "B1")).status_code == 409


def test_invalid_record_is_422_naming_fields_and_saves_nothing(app, client, auth, site):
    auth.login(site["inspector"])
    bad = full_record(site, "B1", measured_depth=-3, debris_mm="lots", inclination=float("inf"),
                      progress="finished", exposure_class="XZ9", base_check="guess",
                      pour_end="2026-03-02T10:00", deliveries=[{"batched_at": "yesterday"}],
                      strata=[{"from_depth": 2, "to_depth": 1, "material": "peat"}], colour="red")
    r = client.put(f"/api/v1/projects/{site['own']}/piles/B1/record",
                   data='{"client_id": "%s", "base_version": null, "record": %s}' % (
                       uuid.uuid4(), json.dumps(bad).replace("Infinity", "1e999")),
                   content_type="application/json", headers={"X-CSRFToken": auth.token()})
    assert r.status_code == 422
    errors = r.get_json()["errors"]
    assert "between 0.1 and 500 m" in errors["measured_depth"]
    assert "debris_mm" in errors and "between 0 and 5000 mm" in errors["debris_mm"]
    assert "inclination" in errors
    assert "boring, concreted, logged" in errors["progress"]
    assert "XC2" in errors["exposure_class"]
    assert "sounding" in errors["base_check"]
    assert errors["pour_end"] == "must not be before pour_start"
    assert "ISO 8601" in errors["deliveries[0].batched_at"]
    assert "deeper than from_depth" in errors["strata[0].to_depth"]
    assert "cohesive" in errors["strata[0].material"]
    assert "not a record field" in errors["colour"]
    assert _count(app, "SELECT COUNT(*) FROM pile_records") == 0
    assert _count(app, "SELECT current_version FROM piles WHERE mark = 'B1'") == 0


def test_toe_below_the_ground_model_is_refused_with_the_deepest_allowed(client, auth, site):
    auth.login(site["inspector"])
    r = put(client, auth, site["own"], "B1", full_record(site, "B1", measured_depth=45.0))
    assert r.status_code == 422
    assert "at most 30.00 m" in r.get_json()["errors"]["measured_depth"]


def test_viewer_gets_403_and_nothing_is_saved(app, client, auth, site):
    auth.login(site["viewer"])
    r = put(client, auth, site["own"], "B1", full_record(site, "B1"))
    assert r.status_code == 403
    assert _count(app, "SELECT COUNT(*) FROM pile_records") == 0


def test_write_without_csrf_header_is_refused(app, client, auth, site):
    auth.login(site["inspector"])
    r = client.put(f"/api/v1/projects/{site['own']}/piles/B1/record",
                   json={"client_id": str(uuid.uuid4()), "base_version": None,
                         "record": full_record(site, "B1")})
    assert r.status_code == 400
    assert _count(app, "SELECT COUNT(*) FROM pile_records") == 0


def test_bad_client_id_and_body(client, auth, site):
    auth.login(site["inspector"])
    r = put(client, auth, site["own"], "B1", full_record(site, "B1"), client_id="../../x")
    assert r.status_code == 422 and "client_id" in r.get_json()["errors"]
    r = client.put(f"/api/v1/projects/{site['own']}/piles/B1/record", data="not json",
                   content_type="application/json", headers={"X-CSRFToken": auth.token()})
    assert r.status_code == 400


# --- engineering through the save path ------------------------------------------------------

def test_strata_met_replace_the_ground_and_say_which_layer_they_borrowed(client, auth, site):
    auth.login(site["inspector"])
    as_designed = put(client, auth, site["own"], "B1", full_record(site, "B1")).get_json()
    # the inspector meets sand from 6 m down to the toe where the model has clay
    depth = full_record(site, "B1")["measured_depth"]
    strata = [{"from_depth": 0, "to_depth": 1, "material": "ignore", "description": "fill"},
              {"from_depth": 1, "to_depth": 6, "material": "cohesive", "description": "clay"},
              {"from_depth": 6, "to_depth": depth, "material": "cohesionless", "description": "sand"}]
    r = put(client, auth, site["own"], "B1", full_record(site, "B1", strata=strata), base_version=1)
    body = r.get_json()
    assert r.status_code == 200, body
    borrowed = body["borrowed"]
    assert len(borrowed) == 3
    assert borrowed[2]["material"] == "cohesionless" and borrowed[2]["layer_index"] == 2
    assert borrowed[1]["layer_index"] == 1
    axial_before = next(c for c in as_designed["checks"] if c["code"] == "axial_compression")
    axial_after = next(c for c in body["checks"] if c["code"] == "axial_compression")
    assert axial_after["limit"] != pytest.approx(axial_before["limit"], rel=1e-3)
    hist = client.get(f"/api/v1/projects/{site['own']}/piles/B1/history").get_json()
    assert hist["versions"][-1]["borrowed"] == borrowed


def test_position_off_moves_the_caps_shares(app, client, auth, site):
    auth.login(site["inspector"])
    # A1 surveyed 0.5 m towards A2: the plan check is short and the shares change
    r = put(client, auth, site["own"], "A1", full_record(site, "A1", easting=500.5))
    body = r.get_json()
    position = next(c for c in body["checks"] if c["code"] == "position")
    assert position["ok"] is False and position["value"] == pytest.approx(500, abs=15)
    assert body["verdict"] == "needs engineer"
    # Rigid cap, N/n + M.x/sum(x^2) (docs/engineering.md section 12): as built the piles stand at
    # x = -0.65 and +0.65 m about their centroid 501.15 m, the cap load (1800 kN) acts at the
    # design centroid 500.9 m, so M = 1800 x (500.9 - 501.15) = -450 kNm and A1 takes
    # 900 + (-450)(-0.65)/(2 x 0.65^2) = 1246.2 kN instead of 900 kN (hand calculation).
    share = next(c for c in body["checks"] if c["code"] == "group_share")
    assert share["value"] == pytest.approx(1246.15, abs=0.5)
    with app.app_context():
        conn = db.get_db()
        pile = piles.get_pile(conn, site["own"], "A2")
        inputs = pile_inputs.load_inputs(conn, site["own"], pile)
        xy = {p.mark: p.xy for p in inputs.group.piles}
    assert xy["A1"] == (500.5, 200.0)  # A2's recheck now uses A1 as built


def test_recheck_pile_matches_the_saved_answer(app, client, auth, site):
    auth.login(site["inspector"])
    body = put(client, auth, site["own"], "B1", full_record(site, "B1")).get_json()
    with app.app_context():
        conn = db.get_db()
        pile = piles.get_pile(conn, site["own"], "B1")
        stored = records.current(conn, pile.id)
        verdict = saving.recheck_pile(conn, site["own"], pile, stored.record)
    assert verdict.verdict == body["verdict"]
    assert sorted(c.code for c in verdict.checks) == sorted(c["code"] for c in body["checks"])


def test_rig_data_gives_curve_required_toe_and_limits(client, auth, site):
    auth.login(site["inspector"])
    data = client.get(f"/api/v1/projects/{site['own']}/piles/B1").get_json()
    assert data["required_toe_level"] == pytest.approx(site["need"], abs=0.02)
    assert data["load_kn"] == site["load"]
    assert len(data["curve"]["toe_levels"]) == len(data["curve"]["design"]) > 100
    assert data["limits"]["min_cover_mm"]["XC2"] >= 75  # cast against soil, EN 1992-1-1 4.4.1.3(4)
    assert data["limits"]["base_debris_mm"] == 38.0


# --- validation unit tests -----------------------------------------------------------------

@pytest.mark.parametrize("text, value", [("12,5", 12.5), (" 12.5 ", 12.5), ("-0,25", -0.25), (7, 7.0),
                                         ("", None), (None, None), (",5", 0.5)])
def test_parse_number_reads_decimal_commas(text, value):
    assert record_input.parse_number(text) == value


@pytest.mark.parametrize("text", ["1,234.5", "12a", "nan", "inf", True, [1], "1e999"])
def test_parse_number_refuses(text):
    with pytest.raises(ValueError):
        record_input.parse_number(text)


# --- the demo's records ------------------------------------------------------------------

def test_demo_records_go_through_the_save_path_with_one_of_each_shortfall(app):
    from fieldapp import demo

    with app.app_context():
        pid = demo.build(app)  # build() ends with demo_records.add_records
        conn = db.get_db()
        all_piles = piles.list_piles(conn, pid)
        recorded = [p for p in all_piles if p.current_version]
        assert abs(len(recorded) - len(all_piles) / 2) <= 1
        current = records.current_for_project(conn, pid)
        shorts = {code for v in current.values() for c in v.checks if c["ok"] is False
                  for code in [c["code"]]}
        assert {"axial_compression", "toe_level", "base_debris", "durability_cover", "position",
                "concrete_volume", "concrete_time", "cage_length"} <= shorts
        meets = [v for v in current.values() if v.verdict == "meets design"]
        assert len(meets) > len(current) / 2
        saved = conn.execute("SELECT COUNT(*) FROM audit_log WHERE project_id = ? AND action = 'record saved'",
                             (pid,)).fetchone()[0]
        assert saved == len(recorded)
        assert conn.execute("SELECT COUNT(*) FROM photos WHERE project_id = ?", (pid,)).fetchone()[0] >= len(recorded)
        assert audit.verify_chain(conn, pid).ok
        # the position fault is in a cap of several piles, whose shares it moves
        moved = next(p for p in recorded if any(c["code"] == "position" and c["ok"] is False
                                                for c in current[p.id].checks))
        assert moved.cap_mark and len([p for p in all_piles if p.cap_mark == moved.cap_mark]) >= 4


# --- the At the rig screens (server side; tests/browser drives them in Chromium) -----------

def test_rig_pick_finds_by_mark_and_offers_the_nearest_planned_pile(client, auth, site):
    auth.login(site["inspector"])
    page = client.get(f"/projects/{site['own']}/rig?q=b1").get_data(as_text=True)
    assert f'href="/projects/{site["own"]}/rig/B1"' in page and "Open B1" in page
    # nothing saved yet: no nearest pile until a position is typed (decimal comma accepted)
    assert "type where the rig stands" in client.get(f"/projects/{site['own']}/rig").get_data(as_text=True)
    page = client.get(f"/projects/{site['own']}/rig?e=509,5&n=200").get_data(as_text=True)
    first = page.index("Nearest planned pile")
    assert page.index("<strong>B1</strong>", first) < page.index("<strong>A2</strong>", first)
    # after A1 is saved, the nearest planned piles are measured from A1
    put(client, auth, site["own"], "A1", full_record(site))
    page = client.get(f"/projects/{site['own']}/rig").get_data(as_text=True)
    assert "From A1 (saved last)" in page
    assert "<strong>A2</strong> <span>1.8 m away" in page


def test_rig_page_embeds_its_data_as_json_and_no_inline_script(client, auth, site):
    auth.login(site["inspector"])
    response = client.get(f"/projects/{site['own']}/rig/B1")
    html = response.get_data(as_text=True)
    assert response.status_code == 200
    start = html.index('<script type="application/json" id="rig-data">') + len(
        '<script type="application/json" id="rig-data">')
    data = json.loads(html[start:html.index("</script>", start)])
    assert data["mark"] == "B1" and data["version"] == 0
    assert data["required_toe_level"] == pytest.approx(site["need"], abs=0.02)
    assert data["urls"]["record"] == f"/api/v1/projects/{site['own']}/piles/B1/record"
    assert data["urls"]["preview"] == f"/api/v1/projects/{site['own']}/piles/B1/preview"
    scripts = [s for s in html.split("<script")[1:]]
    assert all(' src="' in s.split(">")[0] or 'type="application/json"' in s.split(">")[0] for s in scripts)
    assert 'inputmode="decimal"' in html and "Caution" in html


def test_rig_pages_are_for_members_only(client, auth, site):
    auth.login(site["outsider"])
    assert client.get(f"/projects/{site['own']}/rig").status_code == 404
    assert client.get(f"/projects/{site['own']}/rig/B1").status_code == 404
    auth.logout()
    auth.login(site["inspector"])
    assert client.get(f"/projects/{site['own']}/rig/NOPE").status_code == 404


def test_pile_list_is_sent_again_only_after_a_change(client, auth, site):
    auth.login(site["inspector"])
    url = f"/api/v1/projects/{site['own']}/piles"
    put(client, auth, site["own"], "A2", full_record(site, "A2"))
    first = client.get(url)
    etag = first.headers["ETag"]
    assert client.get(url, headers={"If-None-Match": etag}).status_code == 304
    put(client, auth, site["own"], "A1", full_record(site, "A1"))
    changed = client.get(url, headers={"If-None-Match": etag})
    assert changed.status_code == 200 and changed.headers["ETag"] != etag
    a1 = next(p for p in changed.get_json()["piles"] if p["mark"] == "A1")
    assert a1["version"] == 1


def test_pile_list_updated_row_by_row_equals_a_fresh_build(app, client, auth, site):
    auth.login(site["inspector"])
    url = f"/api/v1/projects/{site['own']}/piles"
    put(client, auth, site["own"], "A2", full_record(site, "A2"))
    client.get(url)  # cached at this head
    put(client, auth, site["own"], "A1", full_record(site, "A1", easting=500.5))  # A2 rechecked too
    put(client, auth, site["own"], "B1", full_record(site, "B1"))
    updated = client.get(url).get_json()
    app.extensions.pop("toeline.pile_lists", None)  # forget the cache: the list is built whole
    fresh = client.get(url).get_json()
    assert updated == fresh
    assert {p["mark"]: p["version"] for p in fresh["piles"]}["A1"] == 1


def test_the_saved_version_returned_equals_the_one_read_back(app, client, auth, site):
    # save_record answers from what it stored (records.insert) instead of reading the row again;
    # that must be exactly what a later read gives, for the history and for repeats.
    auth.login(site["inspector"])
    r = put(client, auth, site["own"], "A1", full_record(site, "A1", notes="ü, 1.5e-3 and ½"))
    assert r.status_code == 200
    with app.app_context():
        conn = db.get_db()
        pile = piles.get_pile(conn, site["own"], "A1")
        inspector = users.by_email(conn, site["inspector"])
        with db.write(conn):
            saved = records.insert(
                conn, project_id=site["own"], pile_id=pile.id, version=2, client_id="t-1",
                record=full_record(site, "A1", easting=math.pi), progress="logged",
                verdict="meets design", worst_utilisation=0.1 + 0.2, checks=[{"code": "x", "ok": None}],
                borrowed=[], notes=["n"], rules_version=1, created_by=inspector.id,
                created_by_name=inspector.label)
        assert saved == records.get_version(conn, pile.id, 2)
        assert records.stored_position(conn, pile.id) == (1, (500.02, 200.0))
        first = records.get_version(conn, pile.id, 1)
        assert r.get_json() == first.answer()


def test_a_check_added_since_a_record_was_stored_moves_it_only_when_not_ok(app, client, auth, site):
    # Records stored before a check existed (their checks lack its code) are rechecked when
    # something upstream changes: the new check being ok is no change; short or not checked is.
    auth.login(site["inspector"])
    for mark in ("B1", "A2"):
        record = full_record(site, mark)
        if mark == "A2":
            record.pop("cage_length")       # cage_length cannot be checked on this one
        assert put(client, auth, site["own"], mark, record).status_code == 200
    with app.app_context():
        conn = db.get_db()
        rows = {m: piles.get_pile(conn, site["own"], m) for m in ("B1", "A2")}
        with db.write(conn):
            for row in rows.values():      # the versions as an older Toeline stored them
                old = records.current(conn, row.id)
                checks = [c for c in old.checks if c["code"] != "cage_length"]
                records.insert(conn, project_id=site["own"], pile_id=row.id, version=2,
                               client_id=f"older-{row.mark}", record=old.record, progress=old.progress,
                               verdict="meets design", worst_utilisation=old.worst_utilisation,
                               checks=checks, borrowed=[], notes=[], rules_version=1, created_by=None)
                records.set_pile_state(conn, row.id, progress=old.progress, verdict="meets design",
                                       worst_utilisation=old.worst_utilisation, version=2)
            rows = {m: piles.get_pile(conn, site["own"], m) for m in ("B1", "A2")}
            changed = saving.recheck_stored(conn, site["own"], list(rows.values()), None, "test")
        assert changed == ["A2"]
        assert records.stored_version(conn, rows["B1"].id) == 2
        newest = records.current(conn, rows["A2"].id)
        assert newest.version == 3 and newest.verdict == "needs engineer"
        assert next(c for c in newest.checks if c["code"] == "cage_length")["ok"] is None
