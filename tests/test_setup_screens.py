"""The engineer's set-up screens: Piles (schedule, filters, sort, verdict), caps, Ground (layers,
water level, soil column), Rules (every rule, new versions), the messages forms give, the
queries other areas build on, and the demo project."""

from __future__ import annotations

import math
import re
from html import unescape

import pytest

from design_core import Rules
from design_core.ground import GroundModel
from design_core.inputs import CapGroup, PileDesign
from fieldapp import db, pile_inputs, saving
from fieldapp.queries import audit, caps, ground, piles, projects
from tests.factories import TWO_LAYERS, make_ground, make_pile, pile_values

LAYERS = TWO_LAYERS


def as_form(values):
    return {k: ("" if v is None else str(v)) for k, v in values.items()}


def errors(response) -> list[str]:
    """The messages of the page's error summary."""
    return [unescape(m) for m in re.findall(r'<li class="error">(.*?)</li>', response.get_data(as_text=True))]


@pytest.fixture
def setup(app, people):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            gm = make_ground(conn, people["own"], LAYERS, "Zone 1", 8.0, "two layers")
            cap = caps.save_cap(conn, people["own"], "C1", {"n_kn": 1800.0, "my_knm": 90.0})
            p1 = make_pile(conn, people["own"], "P1", gm, cap, easting_m=99.0)
            p2 = make_pile(conn, people["own"], "P2", gm, cap, easting_m=101.0, toe_level_m=-8.0)
            p10 = make_pile(conn, people["own"], "P10", gm, None, pile_type="cfa",
                            diameter_mm=450.0, toe_level_m=-2.0)
    return {"gm": gm, "cap": cap, "p1": p1, "p2": p2, "p10": p10, **people}


@pytest.fixture
def engineer(client, auth, setup):
    auth.login(setup["engineer"])
    return auth.token()


# --- queries other areas build on ---------------------------------------------------------------

def test_load_ground_model_builds_the_design_core_model(app, setup):
    with app.app_context():
        model = pile_inputs.load_ground(db.get_db(), setup["gm"])
    assert isinstance(model, GroundModel)
    assert model.water_level == 8.0
    assert [(la.top, la.bottom, la.material) for la in model.layers] == [
        (10.0, 5.0, "cohesive"), (5.0, -20.0, "cohesionless")]
    assert model.layers[0].cu == 60.0 and model.layers[0].cu_bottom == 90.0
    assert model.layers[1].phi == 34.0


def test_save_model_refuses_what_design_core_refuses_and_writes_nothing(app, setup):
    bad = [dict(LAYERS[0]), dict(LAYERS[1], top_level_m=4.0)]  # a gap between the layers
    with app.app_context():
        conn = db.get_db()
        with pytest.raises(ValueError, match="contiguous"):
            with db.write(conn):
                pile_inputs.store_ground_model(conn, setup["own"], "Gap", 8.0, bad)
        assert ground.by_name(conn, setup["own"], "Gap") is None


def test_pile_rows_and_pile_design(app, setup):
    with app.app_context():
        conn = db.get_db()
        row = piles.get_pile(conn, setup["own"], "P1")
        assert row.cap_mark == "C1" and row.ground_model_name == "Zone 1" and row.progress == "planned"
        design = pile_inputs.pile_design(row)
        assert piles.get_pile(conn, setup["other"], "P1") is None  # another project's marks are apart
    assert isinstance(design, PileDesign)
    assert design.diameter == pytest.approx(0.6)  # m, from diameter_mm
    assert (design.cutoff_level, design.toe_level, design.compression, design.cap) == (9.0, -5.0, 900.0, "C1")


def test_list_piles_sorts_marks_naturally_and_filters(app, setup):
    with app.app_context():
        conn = db.get_db()
        assert [p.mark for p in piles.list_piles(conn, setup["own"])] == ["P1", "P2", "P10"]
        assert [p.mark for p in piles.list_piles(conn, setup["own"], sort="toe")] == ["P2", "P1", "P10"]
        assert [p.mark for p in piles.list_piles(conn, setup["own"], cap="C1")] == ["P1", "P2"]
        assert [p.mark for p in piles.list_piles(conn, setup["own"], pile_type="cfa")] == ["P10"]
        assert [p.mark for p in piles.list_piles(conn, setup["own"], search="1")] == ["P1", "P10"]
        assert [p.mark for p in piles.list_piles(conn, setup["own"], search="%")] == []


def test_cap_group_uses_design_positions_and_as_built_where_given(app, setup):
    with app.app_context():
        conn = db.get_db()
        group = pile_inputs.load_cap_group(conn, setup["cap"])
        surveyed = pile_inputs.load_cap_group(conn, setup["cap"], {"P2": (101.05, 200.02)})
    assert isinstance(group, CapGroup)
    assert (group.mark, group.n, group.my) == ("C1", 1800.0, 90.0)
    assert [(p.mark, p.design_xy, p.asbuilt_xy) for p in group.piles] == [
        ("P1", (99.0, 200.0), None), ("P2", (101.0, 200.0), None)]
    assert surveyed.piles[1].xy == (101.05, 200.02) and surveyed.piles[0].xy == (99.0, 200.0)


# --- Piles screen ----------------------------------------------------------------------------------

def test_piles_screen_shows_progress_and_verdict_and_the_caution(app, client, auth, setup):
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):  # as the rig's recheck will leave them
            conn.execute("UPDATE piles SET progress = 'logged', verdict = 'needs engineer', worst_utilisation = 1.12 "
                         "WHERE mark = 'P2'")
            conn.execute("UPDATE piles SET progress = 'logged', verdict = 'meets design', worst_utilisation = 0.8 "
                         "WHERE mark = 'P1'")
    auth.login(setup["viewer"])
    page = client.get(f"/projects/{setup['own']}/piles").get_data(as_text=True)
    assert '<span class="status needs">needs engineer</span>' in page
    assert '<span class="status meets">meets design</span>' in page
    assert '<span class="status none">not checked</span>' in page
    assert "1.12" in page
    assert page.count("they do not replace the engineer of") >= 2  # on the screen and in the footer
    only_needs = client.get(f"/projects/{setup['own']}/piles?verdict=needs+engineer").get_data(as_text=True)
    assert 'id="pile-%d"' % setup["p2"] in only_needs and 'id="pile-%d"' % setup["p1"] not in only_needs
    worst_first = client.get(f"/projects/{setup['own']}/piles?sort=utilisation").get_data(as_text=True)
    rows = re.findall(r'<tr id="pile-(\d+)"', worst_first)
    assert [int(r) for r in rows] == [setup["p2"], setup["p1"], setup["p10"]]
    descending = client.get(f"/projects/{setup['own']}/piles?sort=mark&desc=1").get_data(as_text=True)
    assert [int(r) for r in re.findall(r'<tr id="pile-(\d+)"', descending)] == [setup["p10"], setup["p2"], setup["p1"]]


def test_engineer_creates_and_edits_a_pile_with_audit(app, client, engineer, setup):
    pid = setup["own"]
    data = as_form(pile_values("P11", setup["gm"], setup["cap"]))
    response = client.post(f"/projects/{pid}/piles/new", data=dict(data, csrf_token=engineer))
    assert response.status_code == 302
    with app.app_context():
        conn = db.get_db()
        row = piles.get_pile(conn, pid, "P11")
        assert row.cap_mark == "C1" and row.diameter_mm == 600.0
        assert audit.entries(conn, pid)[0]["action"] == "pile created"
    response = client.post(f"/projects/{pid}/piles/{row.id}/edit",
                           data=dict(data, csrf_token=engineer, toe_level_m="-7.5"))
    assert response.status_code == 302
    with app.app_context():
        conn = db.get_db()
        assert piles.get_pile(conn, pid, "P11").toe_level_m == -7.5
        entry = audit.entries(conn, pid)[0]
        assert entry["action"] == "pile changed" and '"toe_level_m":[-5.0,-7.5]' in entry["payload_json"]


def test_pile_form_messages_name_the_field_and_the_range(app, client, engineer, setup):
    pid = setup["own"]
    data = as_form(pile_values("P12", setup["gm"]))
    cases = [
        ({"diameter_mm": "100"}, "Diameter must be 150 to 3,000 mm, got 100"),
        ({"diameter_mm": "3500"}, "Diameter must be 150 to 3,000 mm, got 3500"),
        ({"cutoff_level_m": "20000"}, "Cut-off level must be within ±10,000 m, got 20000"),
        ({"toe_level_m": "abc"}, "Toe level must be a number (within ±10,000 m), got 'abc'"),
        ({"toe_level_m": "12"}, "toe_level_m (12 m) must be below cutoff_level_m (9 m)"),
        ({"easting_m": ""}, "Easting is required"),
        ({"n_bars": "7.5"}, "Number of bars must be a whole number (0 to 200)"),
        ({"fc_mpa": "5"}, "Concrete strength f_c must be 10 to 120 MPa, got 5"),
        ({"cage_length_m": "30"}, "cage_length_m (30 m) must be at most the pile length 14 m"),
        ({"mark": "P1"}, "mark: another pile is already called 'P1'"),
        ({"pile_type": "pier"}, "Pile type must be one of: bored, cfa, driven, screw"),
        ({"exposure_class": "XZ9"}, "Exposure class must be one of: X0, XC1, XC2"),
    ]
    for change, message in cases:
        response = client.post(f"/projects/{pid}/piles/new", data=dict(data, csrf_token=engineer, **change))
        assert response.status_code == 400, change
        found = errors(response)
        assert any(message in e for e in found), (change, found)
    with app.app_context():
        assert piles.count(db.get_db(), pid) == 3  # nothing saved


def test_engineer_creates_and_edits_a_cap(app, client, engineer, setup):
    pid = setup["own"]
    form = {"mark": "C2", "n_kn": "2400", "mx_knm": "-50", "my_knm": "120", "hx_kn": "30", "hy_kn": "0",
            "csrf_token": engineer}
    assert client.post(f"/projects/{pid}/caps/new", data=form).status_code == 302
    response = client.post(f"/projects/{pid}/caps/new", data=dict(form, n_kn="2e8"))
    assert response.status_code == 400
    assert any("N (vertical, compression +) must be within ±10,000,000 kN" in e for e in errors(response))
    with app.app_context():
        conn = db.get_db()
        cap = caps.by_mark(conn, pid, "C2")
        assert (cap.n_kn, cap.mx_knm, cap.my_knm, cap.hx_kn) == (2400.0, -50.0, 120.0, 30.0)
    assert client.post(f"/projects/{pid}/caps/{cap.id}/edit", data=dict(form, n_kn="2500")).status_code == 302
    with app.app_context():
        conn = db.get_db()
        assert caps.by_mark(conn, pid, "C2").n_kn == 2500.0
        assert [e["action"] for e in audit.entries(conn, pid)[:2]] == ["cap changed", "cap created"]
    page = client.get(f"/projects/{pid}/caps").get_data(as_text=True)
    assert "C2" in page and "2500" in page


# --- Ground screen ---------------------------------------------------------------------------------

def ground_form(layers, name="Zone 9", water="7"):
    data = {"name": name, "water_level_m": water, "description": ""}
    for i, layer in enumerate(layers):
        for k, v in layer.items():
            data[f"layers-{i}-{k}"] = "" if v is None else str(v)
    return data


def test_engineer_saves_a_ground_model_with_audit(app, client, engineer, setup):
    pid = setup["own"]
    layers = [dict(top_level_m=12, bottom_level_m=11, material="ignore", unit_weight_kn_m3=18),
              dict(top_level_m=11, bottom_level_m=0, material="cohesive", unit_weight_kn_m3=17, cu_kpa=15,
                   cu_bottom_kpa=70),
              dict(top_level_m=0, bottom_level_m=-10, material="rock", unit_weight_kn_m3=22,
                   shaft_friction_kpa=150, base_pressure_kpa=4000)]
    response = client.post(f"/projects/{pid}/ground/new", data=dict(ground_form(layers), csrf_token=engineer))
    assert response.status_code == 302
    with app.app_context():
        conn = db.get_db()
        row = ground.by_name(conn, pid, "Zone 9")
        model = pile_inputs.load_ground(conn, row.id)
        assert audit.entries(conn, pid)[0]["action"] == "ground model saved"
    assert [la.material for la in model.layers] == ["ignore", "cohesive", "rock"]
    assert model.layers[1].cu_at(0.0) == pytest.approx(70.0)
    assert model.layers[2].base_pressure == 4000.0 and model.water_level == 7.0


def test_ground_form_messages_name_the_field_and_the_range(app, client, engineer, setup):
    pid = setup["own"]
    good = [dict(top_level_m=10, bottom_level_m=5, material="cohesive", unit_weight_kn_m3=19, cu_kpa=50),
            dict(top_level_m=5, bottom_level_m=-5, material="cohesionless", unit_weight_kn_m3=20, phi_deg=32),
            dict(top_level_m=-5, bottom_level_m=-15, material="rock", unit_weight_kn_m3=22,
                 shaft_friction_kpa=200, base_pressure_kpa=5000)]

    def with_change(index, **change):
        layers = [dict(layer) for layer in good]
        layers[index].update(change)
        return layers

    cases = [
        (with_change(0, cu_kpa=2500), "Layer 1: c_u at top must be 0 to 2,000 kPa, got 2500"),
        (with_change(1, phi_deg=55), "Layer 2: φ' must be 0 to 50°, got 55"),
        (with_change(1, unit_weight_kn_m3=35), "Layer 2: Unit weight must be 10 to 30 kN/m³, got 35"),
        (with_change(0, top_level_m=20000), "Layer 1: Top level must be within ±10,000 m, got 20000"),
        (with_change(0, cu_kpa=None), "Layer 1: a cohesive layer needs c_u (0 to 2,000 kPa)"),
        (with_change(1, phi_deg=None), "Layer 2: a cohesionless layer needs φ' (0 to 50°)"),
        (with_change(2, base_pressure_kpa=None), "Layer 3: a rock layer needs the report base pressure"),
        (with_change(1, top_level_m=4), "Layer 2: top level (4 m) must equal the bottom of layer 1 (5 m)"),
        (with_change(2, bottom_level_m=-2), "Layer 3: bottom level (-2 m) must be below the top level (-5 m)"),
    ]
    for layers, message in cases:
        response = client.post(f"/projects/{pid}/ground/new", data=dict(ground_form(layers), csrf_token=engineer))
        assert response.status_code == 400, message
        found = errors(response)
        assert any(message in e for e in found), (message, found)
    response = client.post(f"/projects/{pid}/ground/new",
                           data=dict(ground_form(good, water="-20001"), csrf_token=engineer))
    assert any("Groundwater level must be within ±10,000 m" in e for e in errors(response))
    with app.app_context():
        assert ground.by_name(db.get_db(), pid, "Zone 9") is None  # nothing saved


def test_ground_screen_draws_the_soil_column(client, auth, setup):
    auth.login(setup["inspector"])
    page = client.get(f"/projects/{setup['own']}/ground").get_data(as_text=True)
    svg = unescape(page[page.index("<svg"):page.index("</svg>")])
    assert "Soil column of Zone 1: 2 layers from +10.00 to -20.00 m, groundwater at +8.00 m" in svg
    assert "GWL +8.00" in svg
    assert "clay: c_u 60→90 kPa" in svg and "sand: φ' 34°" in svg
    for level in ("+10.00", "+5.00", "-20.00"):
        assert f">{level}</text>" in svg
    assert "<script" not in svg and "style=" not in svg  # safe under a strict CSP


def test_ground_model_edit_keeps_the_id_piles_use(app, client, engineer, setup):
    pid = setup["own"]
    layers = [dict(layer) for layer in LAYERS]
    layers[1]["phi_deg"] = 36
    response = client.post(f"/projects/{pid}/ground/{setup['gm']}/edit",
                           data=dict(ground_form(layers, name="Zone 1", water="6"), csrf_token=engineer))
    assert response.status_code == 302
    with app.app_context():
        conn = db.get_db()
        model = pile_inputs.load_ground(conn, piles.get_pile(conn, pid, "P1").ground_model_id)
    assert model.layers[1].phi == 36 and model.water_level == 6.0


# --- Rules screen ----------------------------------------------------------------------------------

def rules_form(rules: Rules, note="test change", **changes):
    data = {k: str(v) for k, v in rules.to_dict().items() if k != "exposure_table"}
    for i, row in enumerate(rules.exposure_table):
        data.update({f"exposure-{i}-code": row.code, f"exposure-{i}-cmin_dur_mm": str(row.cmin_dur_mm),
                     f"exposure-{i}-min_strength_mpa": str(row.min_strength_mpa),
                     f"exposure-{i}-description": row.description})
    data["note"] = note
    data.update({k: str(v) for k, v in changes.items()})
    return data


def test_rules_screen_shows_every_rule_with_value_unit_and_source(client, auth, setup):
    auth.login(setup["viewer"])
    page = unescape(client.get(f"/projects/{setup['own']}/rules").get_data(as_text=True))
    for doc in Rules().describe():
        assert f"<code>{doc.name}</code>" in page or doc.name == "exposure_table", doc.name
        assert doc.source in page, doc.name
        assert doc.label in page, doc.name
    assert 'id="rule-fs_global"' in page and "<strong>2.5</strong>" in page
    assert "XD2" in page and "Change rules" not in page  # a viewer cannot change them


def test_rules_change_saves_a_new_version_with_audit(app, client, engineer, setup):
    pid = setup["own"]
    data = rules_form(Rules(), note="project spec clause 4.2", fs_global=2.0,
                      **{"exposure-3-cmin_dur_mm": 30})
    response = client.post(f"/projects/{pid}/rules/edit", data=dict(data, csrf_token=engineer))
    assert response.status_code == 302
    with app.app_context():
        conn = db.get_db()
        current = projects.current_rules(conn, pid)
        first = projects.rules_version(conn, pid, 1)
        entry = audit.entries(conn, pid)[0]
    assert current.version == 2 and current.note == "project spec clause 4.2"
    assert current.rules.fs_global == 2.0 and current.rules.exposure("XC3").cmin_dur_mm == 30
    assert first.rules == Rules()  # the old version is kept as it was
    assert entry["action"] == "rules changed" and '"fs_global":[2.5,2.0]' in entry["payload_json"]
    # the same values again make no new version
    client.post(f"/projects/{pid}/rules/edit", data=dict(data, csrf_token=engineer))
    with app.app_context():
        assert projects.current_rules(db.get_db(), pid).version == 2


def test_rules_form_checks_each_value_against_its_range(app, client, engineer, setup):
    pid = setup["own"]
    meta = Rules.field_meta("phi_g")
    response = client.post(f"/projects/{pid}/rules/edit",
                           data=dict(rules_form(Rules(), phi_g=1.5, fs_shaft="x",
                                                **{"exposure-0-min_strength_mpa": 150}), csrf_token=engineer))
    assert response.status_code == 400
    found = errors(response)
    assert f"{meta['label']} must be {meta['min']:g} to {meta['max']:g}, got 1.5" in found
    assert any(e.startswith("Factor of safety on shaft (working stress) must be a number (1 to 10)") for e in found)
    assert "Exposure row 1: Minimum concrete strength must be 0 to 120 MPa, got 150" in found
    # a class the schedule uses cannot be removed
    data = rules_form(Rules())
    index = [row.code for row in Rules().exposure_table].index("XC2")
    for key in ("code", "cmin_dur_mm", "min_strength_mpa", "description"):
        data[f"exposure-{index}-{key}"] = ""
    response = client.post(f"/projects/{pid}/rules/edit", data=dict(data, csrf_token=engineer))
    assert response.status_code == 400
    assert any("XC2 (3 piles) are used by piles" in e for e in errors(response))
    with app.app_context():
        assert projects.current_rules(db.get_db(), pid).version == 1


# --- the demo --------------------------------------------------------------------------------------

def test_demo_is_a_consistent_project(app):
    """The demo: >= 40 piles in caps of 1-6, three ground models, two types and diameters; cap
    loads in equilibrium with the pile loads (statics of a rigid cap: sum P = N, sum P x' = My,
    sum P y' = Mx); every design toe gives a design resistance at least the design load.

    The toe check uses design_core.axial.axial_capacity at the stored toe, not the capacity curve
    the demo was built with.
    """
    from design_core.axial import axial_capacity
    from fieldapp import demo

    with app.app_context():
        pid = demo.build(app)
        conn = db.get_db()
        rows = piles.list_piles(conn, pid)
        cap_rows = caps.list_caps(conn, pid)
        models = {m.id: pile_inputs.load_ground(conn, m.id) for m in ground.list_models(conn, pid)}
        rules = projects.current_rules(conn, pid).rules
        names = [m.name for m in ground.list_models(conn, pid)]
    assert len(rows) >= 40
    assert len(models) == 3 and any("soft clay" in n for n in names)
    assert {c.n_piles for c in cap_rows} <= set(range(1, 7)) and {1, 6} <= {c.n_piles for c in cap_rows}
    assert all(r.cap_id is not None for r in rows)
    assert len({r.pile_type for r in rows}) >= 2 and len({r.diameter_mm for r in rows}) >= 2
    rock = [la for m in models.values() for la in m.layers if la.material == "rock"]
    assert rock and all(la.shaft_friction and la.base_pressure for la in rock)
    soft = [la for m in models.values() for la in m.layers if la.material == "cohesive" and la.cu < 25]
    assert soft and all(la.cu_bottom > la.cu for la in soft)  # c_u grows with depth
    by_mark = {r.mark: r for r in rows}
    for cap in cap_rows:
        members = [by_mark[m] for m in cap.pile_marks]
        xc = sum(p.easting_m for p in members) / len(members)
        yc = sum(p.northing_m for p in members) / len(members)
        total = sum(p.compression_kn for p in members)
        # each pile's share is rounded up to 10 kN
        assert cap.n_kn <= total <= cap.n_kn + 10 * len(members), cap.mark
        sx = sum(abs(p.easting_m - xc) for p in members)
        sy = sum(abs(p.northing_m - yc) for p in members)
        assert sum(p.compression_kn * (p.easting_m - xc) for p in members) == pytest.approx(
            cap.my_knm, abs=10 * sx + 1e-6), cap.mark
        assert sum(p.compression_kn * (p.northing_m - yc) for p in members) == pytest.approx(
            cap.mx_knm, abs=10 * sy + 1e-6), cap.mark
    for r in rows:
        result = axial_capacity(models[r.ground_model_id], r.diameter_mm / 1000, r.cutoff_level_m, r.toe_level_m,
                                r.pile_type, rules)
        assert result.design >= r.compression_kn, r.mark
        assert result.design <= 1.6 * r.compression_kn, r.mark  # a small margin, not a random deep toe
        assert math.isclose(r.toe_level_m * 4, round(r.toe_level_m * 4))  # rounded to 0.25 m


def test_toe_below_the_ground_model_is_refused_on_piles_and_on_ground_edits(app, client, engineer, setup):
    """The capacity check needs ground down to the toe: a pile cannot go deeper than its ground
    model, and a ground model cannot be cut above the toes of the piles on it."""
    pid = setup["own"]
    data = as_form(pile_values("P12", setup["gm"], toe_level_m=-25))
    response = client.post(f"/projects/{pid}/piles/new", data=dict(data, csrf_token=engineer))
    assert response.status_code == 400
    assert any("toe_level_m (-25 m) is below the bottom of ground model 'Zone 1' (-20 m)" in e
               for e in errors(response))
    shallower = [dict(LAYERS[0]), dict(LAYERS[1], bottom_level_m=-6.0)]  # P2's toe is at -8 m
    response = client.post(f"/projects/{pid}/ground/{setup['gm']}/edit",
                           data=dict(ground_form(shallower, name="Zone 1"), csrf_token=engineer))
    assert response.status_code == 400
    assert any("above the design toe of 1 pile(s) that use it: P2 (-8 m)" in e for e in errors(response))
    with app.app_context():
        conn = db.get_db()
        assert piles.get_pile(conn, pid, "P12") is None
        assert pile_inputs.load_ground(conn, setup["gm"]).bottom == -20.0


def test_marks_that_look_like_formulas_are_refused(app, client, engineer, setup):
    pid = setup["own"]
    data = as_form(pile_values("=cmd|' /C calc'!A0", setup["gm"]))
    response = client.post(f"/projects/{pid}/piles/new", data=dict(data, csrf_token=engineer))
    assert response.status_code == 400
    assert any("Mark must not start with '='" in e for e in errors(response))
    response = client.post(f"/projects/{pid}/caps/new", data={"mark": "+C9", "csrf_token": engineer})
    assert any("Cap mark must not start with '+'" in e for e in errors(response))


def _record_toe(app, project_id, mark, toe_level):
    """Save a boring record for the pile whose as-built toe is ``toe_level`` (platform 10 m)."""
    from fieldapp.queries import users as users_q

    with app.app_context():
        conn = db.get_db()
        user = users_q.by_email(conn, "inspector@test.example")
        row = piles.get_pile(conn, project_id, mark)
        saving.save_record(conn, project_id, row, user, f"c-{mark}", None,
                             {"progress": "boring", "platform_level": 10.0,
                              "measured_depth": 10.0 - toe_level})


def _axial(app, project_id, mark):
    from fieldapp.queries import records

    with app.app_context():
        conn = db.get_db()
        row = piles.get_pile(conn, project_id, mark)
        current = records.current(conn, row.id)
        return row.current_version, next(c for c in current.checks if c["code"] == "axial_compression")


def test_changing_what_a_verdict_rests_on_rechecks_recorded_piles(app, client, engineer, setup):
    pid = setup["own"]
    light = as_form(pile_values("P10", setup["gm"], None, pile_type="cfa", diameter_mm=450.0,
                                toe_level_m=-2.0, compression_kn=100))
    client.post(f"/projects/{pid}/piles/{setup['p10']}/edit", data=dict(light, csrf_token=engineer))
    _record_toe(app, pid, "P10", -2.0)  # CFA pile standing alone, as designed, lightly loaded
    version, axial = _axial(app, pid, "P10")
    assert axial["ok"] is True
    # a design load far beyond the pile's resistance: the recheck makes a new version, short
    data = as_form(pile_values("P10", setup["gm"], None, pile_type="cfa", diameter_mm=450.0,
                               toe_level_m=-2.0, compression_kn=20000))
    page = client.post(f"/projects/{pid}/piles/{setup['p10']}/edit", data=dict(data, csrf_token=engineer),
                       follow_redirects=True).get_data(as_text=True)
    assert "Rechecked: 1 recorded pile(s) changed status" in page and "P10" in page
    version2, axial2 = _axial(app, pid, "P10")
    assert version2 == version + 1 and axial2["ok"] is False
    # a rules change that leaves every status as it was makes no new version
    page = client.post(f"/projects/{pid}/rules/edit", data=dict(rules_form(Rules(), fs_base=3.5), csrf_token=engineer),
                       follow_redirects=True).get_data(as_text=True)
    assert "Rechecked" not in page
    assert _axial(app, pid, "P10")[0] == version2
