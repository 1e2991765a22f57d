"""AGS4 import and export: the file is checked whole (python-ags4's checker, then our ranges),
every problem named by group, heading and line, nothing stored unless accepted; locations,
strata (materials proposed, never parameters), SPT, CPT and water strikes stored; the original
kept by hash; export then import gives the same data. Files are written out here by hand."""

from __future__ import annotations

import hashlib

import pytest

from fieldapp import ags_io, db
from fieldapp.queries import audit, ground
from fieldapp.queries import locations as loc_q


def group(name, headings, units, types, rows):
    """One AGS4 group as text lines (every field quoted, as the standard's rule 5 asks)."""
    def line(kind, cells):
        return ",".join(f'"{c}"' for c in [kind] + list(cells))
    out = [line("GROUP", []).replace('"GROUP"', '"GROUP","' + name + '"'), line("HEADING", headings),
           line("UNIT", units), line("TYPE", types)]
    out += [line("DATA", r) for r in rows]
    return out + [""]


def ags_file(*, loca=None, geol=None, ispt=None, scpt_units=("m", "MPa", "MPa", "MPa"), scpt=None,
             extra_abbr=(), units_extra=(), wstd=None):
    """A small AGS4 4.1.1 file: two boreholes and one CPT, with strata, SPT, CPT and water."""
    loca = loca if loca is not None else [
        ["BH1", "CP", "1000.00", "2000.00", "100.00", "20.00"],
        ["BH2", "CP", "1030.00", "2000.00", "99.50", "15.00"],
        ["CPT1", "SCP", "1015.00", "2010.00", "100.20", "18.00"]]
    geol = geol if geol is not None else [
        ["BH1", "0.00", "1.50", "MADE GROUND of brick rubble", "102"],
        ["BH1", "1.50", "8.00", "Firm grey silty CLAY", "202"],
        ["BH1", "8.00", "20.00", "Dense brown SAND", "401"],
        ["BH2", "0.00", "3.00", "Soft brown CLAY", "201"],
        ["BH2", "3.00", "15.00", "Weak grey MUDSTONE", "801"]]
    ispt = ispt if ispt is not None else [
        ["BH1", "9.00", "32", "N=32", "60"], ["BH1", "12.00", "41", "N=41", "60"],
        ["BH2", "1.50", "4", "N=4", "60"]]
    scpt = scpt if scpt is not None else [
        ["CPT1", "1", "1.00", "1.250", "0.0300", "0.0100"],
        ["CPT1", "1", "2.00", "2.500", "0.0450", "0.0150"],
        ["CPT1", "1", "3.00", "12.000", "0.0800", "-0.0050"]]
    wstd = wstd if wstd is not None else [["BH1", "8.20", "20", "6.50"]]
    lines = []
    lines += group("PROJ", ["PROJ_ID", "PROJ_NAME"], ["", ""], ["ID", "X"], [["T1", "Test site"]])
    lines += group("TRAN", ["TRAN_ISNO", "TRAN_DATE", "TRAN_PROD", "TRAN_STAT", "TRAN_AGS", "TRAN_RECV"],
                   ["", "yyyy-mm-dd", "", "", "", ""], ["X", "DT", "X", "X", "X", "X"],
                   [["1", "2026-11-30", "Test GI Ltd", "Final", "4.1.1", "Test"]])
    lines += group("UNIT", ["UNIT_UNIT", "UNIT_DESC"], ["", ""], ["X", "X"],
                   [["m", "metre"], ["MPa", "megapascal"], ["%", "percentage"], ["min", "minute"],
                    ["yyyy-mm-dd", "date"]] + [list(u) for u in units_extra])
    lines += group("TYPE", ["TYPE_TYPE", "TYPE_DESC"], ["", ""], ["X", "X"],
                   [[t, t] for t in ("ID", "X", "PA", "DT", "0DP", "2DP", "3DP", "4DP")])
    lines += group("ABBR", ["ABBR_HDNG", "ABBR_CODE", "ABBR_DESC"], ["", "", ""], ["X", "X", "X"],
                   [["LOCA_TYPE", "CP", "Cable percussion (shell and auger)"],
                    ["LOCA_TYPE", "SCP", "Static cone penetrometer"],
                    ["GEOL_LEG", "102", "MADE GROUND"], ["GEOL_LEG", "201", "CLAY"],
                    ["GEOL_LEG", "202", "Silty CLAY"], ["GEOL_LEG", "401", "SAND"],
                    ["GEOL_LEG", "801", "MUDSTONE"], ["SCPG_TYPE", "CPTU", "Piezocone"]] + [list(a) for a in extra_abbr])
    lines += group("LOCA", ["LOCA_ID", "LOCA_TYPE", "LOCA_NATE", "LOCA_NATN", "LOCA_GL", "LOCA_FDEP"],
                   ["", "", "m", "m", "m", "m"], ["ID", "PA", "2DP", "2DP", "2DP", "2DP"], loca)
    lines += group("GEOL", ["LOCA_ID", "GEOL_TOP", "GEOL_BASE", "GEOL_DESC", "GEOL_LEG"],
                   ["", "m", "m", "", ""], ["ID", "2DP", "2DP", "X", "PA"], geol)
    lines += group("ISPT", ["LOCA_ID", "ISPT_TOP", "ISPT_NVAL", "ISPT_REP", "ISPT_ERAT"],
                   ["", "m", "", "", "%"], ["ID", "2DP", "0DP", "X", "0DP"], ispt)
    lines += group("SCPG", ["LOCA_ID", "SCPG_TESN", "SCPG_TYPE"], ["", "", ""], ["ID", "X", "PA"],
                   [["CPT1", "1", "CPTU"]])
    lines += group("SCPT", ["LOCA_ID", "SCPG_TESN", "SCPT_DPTH", "SCPT_RES", "SCPT_FRES", "SCPT_PWP2"],
                   ["", ""] + list(scpt_units), ["ID", "X", "2DP", "3DP", "4DP", "4DP"], scpt)
    lines += group("WSTG", ["LOCA_ID", "WSTG_DPTH"], ["", "m"], ["ID", "2DP"], [["BH1", "8.20"]])
    lines += group("WSTD", ["LOCA_ID", "WSTG_DPTH", "WSTD_NMIN", "WSTD_POST"], ["", "m", "min", "m"],
                   ["ID", "2DP", "0DP", "2DP"], wstd)
    return "\r\n".join(lines).encode("ascii")


def line_of(data: bytes, starts: str) -> int:
    """The 1-based line number of the first line starting with ``starts``."""
    for number, text in enumerate(data.decode().split("\r\n"), start=1):
        if text.startswith(starts):
            return number
    raise AssertionError(starts)


@pytest.fixture
def project(app, people):
    return people["own"]


def run(app, project_id, data, name="gi.ags"):
    with app.app_context():
        return ags_io.import_ags(db.get_db(), project_id, data, name, "test", app.config["DATA_DIR"])


def stored(app, project_id):
    with app.app_context():
        conn = db.get_db()
        out = {}
        for loc in loc_q.list_locations(conn, project_id):
            out[loc.loca_id] = {
                "loc": (loc.loca_type, loc.easting_m, loc.northing_m, loc.ground_level_m, loc.final_depth_m),
                "strata": [(s.top_depth_m, s.base_depth_m, s.description, s.legend_code, s.proposed_material)
                           for s in loc_q.strata(conn, loc)],
                "spt": [(r["depth_m"], r["n_value"], r["energy_ratio_pct"]) for r in loc_q.spt(conn, loc.id)],
                "cpt": {k: [tuple(r) for r in t["readings"]] for k, t in loc_q.cpt(conn, loc.id).items()},
                "water": loc_q.water(conn, loc.id)}
        return out


def test_the_hand_written_file_passes_the_library_checker():
    assert ags_io.checker_errors(ags_file().decode()) == []


def test_valid_file_stores_locations_strata_and_readings(app, project):
    data = ags_file()
    result = run(app, project, data)
    assert result.ok, [str(e) for e in result.errors]
    got = stored(app, project)
    assert sorted(got) == ["BH1", "BH2", "CPT1"]
    assert got["BH1"]["loc"] == ("CP", 1000.0, 2000.0, 100.0, 20.0)
    assert [s[:2] for s in got["BH1"]["strata"]] == [(0.0, 1.5), (1.5, 8.0), (8.0, 20.0)]
    assert [s[4] for s in got["BH1"]["strata"]] == ["ignore", "cohesive", "cohesionless"]
    assert [s[4] for s in got["BH2"]["strata"]] == ["cohesive", "rock"]
    assert got["BH1"]["spt"] == [(9.0, 32, 60.0), (12.0, 41, 60.0)]
    # CPT: q_c kept in MPa, f_s and u_2 converted from the file's MPa to kPa (1 MPa = 1000 kPa)
    (r1, r2, r3), = got["CPT1"]["cpt"].values()
    assert r1 == pytest.approx((1.0, 1.25, 30.0, 10.0))
    assert r3 == pytest.approx((3.0, 12.0, 80.0, -5.0))
    assert got["BH1"]["water"][0]["depth_m"] == 8.2 and got["BH1"]["water"][0]["rises"] == [(20, 6.5)]
    with app.app_context():
        conn = db.get_db()
        loc = [x for x in loc_q.list_locations(conn, project) if x.loca_id == "BH1"][0]
        levels = [(s.top_level_m, s.bottom_level_m) for s in loc_q.strata(conn, loc)]
        assert levels == [(100.0, 98.5), (98.5, 92.0), (92.0, 80.0)]  # ground level 100.00 less depth
        assert ground.names(conn, project) == {}  # proposals only: no ground model made, no parameter guessed
        entry = audit.entries(conn, project)[0]
        assert entry["action"] == "AGS4 file imported"
    sha = hashlib.sha256(data).hexdigest()
    assert result.sha256 == sha
    assert ags_io.original_path(app.config["DATA_DIR"], sha).read_bytes() == data


def test_units_of_the_file_are_converted(app, project):
    data = ags_file(scpt_units=("m", "kPa", "kPa", "kPa"), units_extra=[("kPa", "kilopascal")], scpt=[
        ["CPT1", "1", "1.00", "1250.000", "30.0000", "10.0000"]])
    result = run(app, project, data)
    assert result.ok, [str(e) for e in result.errors]
    (reading,), = stored(app, project)["CPT1"]["cpt"].values()
    assert reading == pytest.approx((1.0, 1.25, 30.0, 10.0))  # 1250 kPa = 1.25 MPa


BROKEN = {
    # what is broken -> (change to the good file, rule or message expected, group, heading, line start)
    "a value not of its data type (rule 8)": (
        lambda d: d.replace(b'"BH1","1.50","8.00"', b'"BH1","1.5","8.00"'),
        "Rule 8", "GEOL", "GEOL_TOP", '"DATA","BH1","1.5"'),
    "a stratum whose borehole is not in LOCA (rule 10c)": (
        lambda d: d.replace(b'"BH2","0.00","3.00"', b'"BH9","0.00","3.00"'),
        "Rule 10c", "GEOL", "", '"DATA","BH9"'),
    "a legend code not in ABBR (rule 16)": (
        lambda d: d.replace(b'"DATA","GEOL_LEG","401","SAND"\r\n', b''),
        "Rule 16", "GEOL", "GEOL_LEG", '"DATA","BH1","8.00","20.00"'),
    "a unit not in UNIT (rule 15)": (
        lambda d: d.replace(b'"DATA","min","minute"\r\n', b''),
        "Rule 15", "UNIT", "", None),
    "a line not ending CR LF (rule 2a)": (
        lambda d: d.replace(b'\r\n', b'\n', 1),
        "Rule 2a", "", "", '"GROUP","PROJ"'),
    "an unknown heading (rule 9)": (
        lambda d: d.replace(b'"ISPT_REP"', b'"ISPT_XXXX"'),
        "Rule 9", "ISPT", "ISPT_XXXX", '"HEADING","LOCA_ID","ISPT_TOP"'),
    "a duplicate key (rule 10a)": (
        lambda d: d.replace(b'"BH1","12.00","41"', b'"BH1","9.00","41"'),
        "Rule 10a", "ISPT", "", None),
    "a stratum below the final depth (our range)": (
        lambda d: d.replace(b'"BH1","8.00","20.00"', b'"BH1","8.00","25.00"'),
        "below the final depth", "GEOL", "GEOL_BASE", '"DATA","BH1","8.00","25.00"'),
    "a cone resistance out of range (our range)": (
        lambda d: d.replace(b'"3.00","12.000"', b'"3.00","212.000"'),
        "SCPT_RES must be 0 to 150 MPa", "SCPT", "SCPT_RES", '"DATA","CPT1","1","3.00"'),
    "overlapping strata (our check)": (
        lambda d: d.replace(b'"BH1","8.00","20.00"', b'"BH1","7.00","20.00"'),
        "overlaps", "GEOL", "GEOL_TOP", '"DATA","BH1","7.00"'),
    "a base above its top (our check)": (
        lambda d: d.replace(b'"BH2","3.00","15.00"', b'"BH2","3.00","2.00"'),
        "must be below GEOL_TOP", "GEOL", "GEOL_BASE", '"DATA","BH2","3.00","2.00"'),
    "an unconvertible pressure unit (our check)": (
        lambda d: d.replace(b'"UNIT","","","m","MPa","MPa","MPa"', b'"UNIT","","","m","MPa","psi","MPa"')
                   .replace(b'"DATA","MPa","megapascal"', b'"DATA","psi","pound per square inch"\r\n"DATA","MPa","megapascal"'),
        "unit 'psi' is not one we convert", "SCPT", "SCPT_FRES", '"UNIT","","","m","MPa","psi"'),
    "a location without ground level (our check)": (
        lambda d: d.replace(b'"BH2","CP","1030.00","2000.00","99.50"', b'"BH2","CP","1030.00","2000.00",""'),
        "LOCA_GL is required", "LOCA", "LOCA_GL", '"DATA","BH2","CP"'),
}


@pytest.mark.parametrize("what", list(BROKEN))
def test_broken_file_is_refused_whole_with_group_heading_and_line(app, project, what):
    change, expect, grp, heading, line_start = BROKEN[what]
    data = change(ags_file())
    assert data != ags_file()
    result = run(app, project, data)
    assert not result.ok
    hits = [e for e in result.errors if expect in e.message]
    assert hits, [str(e) for e in result.errors]
    if grp:
        assert any(e.group == grp for e in hits), [str(e) for e in hits]
    if heading:
        assert any(e.heading == heading for e in hits), [str(e) for e in hits]
    if line_start:
        assert any(e.line == line_of(data, line_start) for e in hits), [str(e) for e in hits]
    assert stored(app, project) == {}  # nothing stored
    with app.app_context():
        assert loc_q.files(db.get_db(), project) == []
    assert not ags_io.original_path(app.config["DATA_DIR"], hashlib.sha256(data).hexdigest()).exists()


def test_not_text_and_empty_are_refused(app, project):
    assert "UTF-8" in run(app, project, b"\xff\xfe\x00garbage").errors[0].message
    assert "empty" in run(app, project, b"").errors[0].message
    assert stored(app, project) == {}


def test_reimport_replaces_the_locations_of_the_file(app, project):
    assert run(app, project, ags_file()).ok
    newer = ags_file().replace(b'"BH1","9.00","32"', b'"BH1","9.00","35"')
    assert run(app, project, newer, "gi-rev2.ags").ok
    got = stored(app, project)
    assert got["BH1"]["spt"][0] == (9.0, 35, 60.0)
    assert len(got["BH1"]["spt"]) == 2
    with app.app_context():
        assert len(loc_q.files(db.get_db(), project)) == 2  # both originals kept


@pytest.mark.parametrize("legend, description, expected", [
    ("102", "", "ignore"), ("201", "", "cohesive"), ("303", "", "cohesive"), ("404", "", "cohesionless"),
    ("501", "", "cohesionless"), ("601", "", "ignore"), ("803", "", "rock"), ("999", "", "ignore"),
    ("", "Firm grey silty CLAY", "cohesive"), ("", "Dense clayey SAND", "cohesionless"),
    ("", "Medium strong grey SANDSTONE", "rock"), ("", "MADE GROUND: ash and clinker", "ignore"),
    ("", "soft brown sandy clay", "cohesive"), ("", "grey silty sand", "cohesionless"),
    ("", "something unreadable", "ignore"),
])
def test_material_proposed_from_legend_code_then_description(legend, description, expected):
    # AGS4 standard legend codes (ABBR list of GEOL_LEG): 1xx made ground, 2xx clay, 3xx silt,
    # 4xx sand, 5xx gravel, 6xx peat, 8xx rock, 9xx void / no recovery.
    material, reason = ags_io.propose_material(legend, description)
    assert material == expected
    assert reason


def test_export_then_import_gives_the_same_data(app, project, people):
    assert run(app, project, ags_file()).ok
    with app.app_context():
        exported = ags_io.export_ags(db.get_db(), project)
    assert ags_io.checker_errors(exported.decode()) == []  # the export passes the library's checker
    assert run(app, people["other"], exported, "export.ags").ok
    first, second = stored(app, project), stored(app, people["other"])
    assert sorted(first) == sorted(second)
    for key in first:
        assert first[key]["loc"] == second[key]["loc"]
        assert first[key]["strata"] == second[key]["strata"]
        assert first[key]["spt"] == second[key]["spt"]
        assert first[key]["water"] == second[key]["water"]
        for ref, readings in first[key]["cpt"].items():
            assert second[key]["cpt"][ref] == [pytest.approx(r) for r in readings]


def test_import_ags_command_imports_or_lists_every_problem(app, project, tmp_path):
    import click
    from click.testing import CliRunner

    from fieldapp import import_cli

    group = click.Group()
    import_cli.register(group)
    good, bad = tmp_path / "gi.ags", tmp_path / "bad.ags"
    good.write_bytes(ags_file())
    bad.write_bytes(BROKEN["a value not of its data type (rule 8)"][0](ags_file()))
    runner = CliRunner()
    refused = runner.invoke(group, ["import-ags", "--data", app.config["DATA_DIR"], str(project), str(bad)])
    assert refused.exit_code == 1 and "GEOL_TOP" in refused.output and "Nothing imported" in refused.output
    assert stored(app, project) == {}
    done = runner.invoke(group, ["import-ags", "--data", app.config["DATA_DIR"], str(project), str(good)])
    assert done.exit_code == 0, done.output
    assert "3 location(s)" in done.output
    assert sorted(stored(app, project)) == ["BH1", "BH2", "CPT1"]


@pytest.fixture
def web(app, client, auth, people):
    """The imports screens on the test app, signed in as the project's engineer."""
    from fieldapp import imports

    if "imports" not in app.blueprints:
        app.register_blueprint(imports.bp)
    auth.login(people["engineer"])
    return auth


def test_upload_screen_lists_problems_and_then_stores_the_file(app, client, web, project, people):
    import io

    url = f"/projects/{project}/ground/ags"
    bad = BROKEN["a stratum below the final depth (our range)"][0](ags_file())
    response = client.post(url, data={"csrf_token": web.token(), "file": (io.BytesIO(bad), "gi.ags")},
                           content_type="multipart/form-data")
    page = response.get_data(as_text=True)
    assert response.status_code == 422 and "GEOL_BASE" in page and "Nothing imported" in page
    assert "Caution:" in page
    assert stored(app, project) == {}
    response = client.post(url, data={"csrf_token": web.token(), "file": (io.BytesIO(ags_file()), "gi.ags")},
                           content_type="multipart/form-data")
    assert response.status_code == 302
    page = client.get(url).get_data(as_text=True)
    assert "BH1" in page and "unconfirmed" in page and "32 at 9.00 m" in page
    exported = client.get(f"{url}/export.ags")
    assert exported.status_code == 200 and b'"GROUP","LOCA"' in exported.data


def test_engineer_makes_a_ground_model_from_a_location_entering_the_parameters(app, client, web, project):
    assert run(app, project, ags_file()).ok
    with app.app_context():
        bh1 = [x for x in loc_q.list_locations(db.get_db(), project) if x.loca_id == "BH1"][0]
    url = f"/projects/{project}/ground/ags/{bh1.id}/model"
    page = client.get(url).get_data(as_text=True)
    assert 'value="93.5"' in page  # water: strike at 8.20 m rose to 6.50 m below 100.00 m
    form = {"csrf_token": web.token(), "name": "BH1 zone", "water_level_m": "94",
            "material_0": "ignore", "unit_weight_kn_m3_0": "18",
            "material_1": "cohesive", "unit_weight_kn_m3_1": "19",
            "material_2": "cohesionless", "unit_weight_kn_m3_2": "20", "phi_deg_2": "34"}
    refused = client.post(url, data=form)  # no c_u for the cohesive layer: design_core refuses
    assert refused.status_code == 400 and "cu" in refused.get_data(as_text=True)
    with app.app_context():
        assert ground.names(db.get_db(), project) == {}
    done = client.post(url, data=dict(form, cu_kpa_1="60"))
    assert done.status_code == 302
    with app.app_context():
        conn = db.get_db()
        model = ground.by_name(conn, project, "BH1 zone")
        assert [(x.top_level_m, x.bottom_level_m, x.material) for x in model.layers] == [
            (100.0, 98.5, "ignore"), (98.5, 92.0, "cohesive"), (92.0, 80.0, "cohesionless")]
        assert model.layers[1].cu_kpa == 60.0 and model.water_level_m == 94.0
        assert loc_q.get_location(conn, project, bh1.id).ground_model_id == model.id


def test_only_engineers_of_the_project_reach_the_screens(app, client, auth, people, project):
    from fieldapp import imports

    if "imports" not in app.blueprints:
        app.register_blueprint(imports.bp)
    for who, status in (("inspector", 403), ("viewer", 403), ("outsider", 404)):
        auth.login(people[who])
        assert client.get(f"/projects/{project}/ground/ags").status_code == status, who
        assert client.get(f"/projects/{project}/piles/layout").status_code == status, who
        auth.logout()


def test_nearest_location_to_each_pile(app, project):
    assert run(app, project, ags_file()).ok
    with app.app_context():
        conn = db.get_db()
        loc, distance = loc_q.nearest(conn, project, 1003.0, 2004.0)
        assert loc.loca_id == "BH1" and distance == pytest.approx(5.0)  # a 3-4-5 triangle
        assert loc_q.nearest(conn, 999, 0.0, 0.0) is None


def test_demo_file_passes_the_checker_and_gives_the_demo_ground_models(app, project):
    from fieldapp import demo, demo_ags

    data = demo_ags.ags_bytes()
    assert ags_io.checker_errors(data.decode()) == []
    made = demo_ags.ground_models(data)
    # the demo's ground models (demo.GROUND_MODELS, typed by hand) agree with the file's strata
    assert [(name, water) for name, _, water, _ in made] == [(n, w) for n, _, w, _ in demo.GROUND_MODELS]
    for (_, _, _, layers), (_, _, _, typed) in zip(made, demo.GROUND_MODELS, strict=True):
        assert [(x["top_level_m"], x["bottom_level_m"], x["material"]) for x in layers] == [
            (x["top_level_m"], x["bottom_level_m"], x["material"]) for x in typed]
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            for name, description, water, layers in made:
                ground.save_model(conn, project, name, water, layers, description)
        result = demo_ags.load(conn, project, app.config["DATA_DIR"])
        assert len(result.locations) == 8 and result.cpt > 100
        linked = {loc.loca_id for loc in loc_q.list_locations(conn, project) if loc.ground_model_id}
        assert linked == {"N1", "E1", "S1"}


def test_an_spt_refusal_keeps_its_reported_text_without_an_n(app, project):
    data = ags_file(ispt=[["BH1", "9.00", "", "50/75 mm", "60"]])
    assert run(app, project, data).ok
    assert stored(app, project)["BH1"]["spt"] == [(9.0, None, 60.0)]
    with app.app_context():
        conn = db.get_db()
        loc = [x for x in loc_q.list_locations(conn, project) if x.loca_id == "BH1"][0]
        assert loc_q.spt(conn, loc.id)[0]["reported"] == "50/75 mm"
