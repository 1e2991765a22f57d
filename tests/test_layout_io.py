"""The pile layout from a DXF drawing made here with ezdxf: circles and blocks on a layer become
piles at their centres with their diameter, the nearest text is the mark, the preview says what
is new, moved, unchanged, clashing or unmarked, the units come from $INSUNITS or the engineer,
and applying is all or nothing through the schedule import."""

from __future__ import annotations

import io

import ezdxf
import pytest

from fieldapp import db, layout_io
from fieldapp.queries import audit, ground, piles

LAYERS = [dict(top_level_m=10.0, bottom_level_m=-30.0, material="cohesive", unit_weight_kn_m3=19.0, cu_kpa=80.0)]


def dxf(circles, texts, insunits=6, layer="PILES", blocks=()):
    """DXF bytes: circles (x, y, radius) and texts (text, x, y, kind) in drawing units."""
    doc = ezdxf.new("R2010")
    doc.header["$INSUNITS"] = insunits
    msp = doc.modelspace()
    for x, y, r in circles:
        msp.add_circle((x, y), r, dxfattribs={"layer": layer})
    for text, x, y, kind in texts:
        if kind == "mtext":
            msp.add_mtext(text, dxfattribs={"layer": "MARKS", "insert": (x, y)})
        else:
            msp.add_text(text, dxfattribs={"layer": "MARKS", "insert": (x, y)})
    if blocks:
        block = doc.blocks.new("PILE600")
        block.add_circle((0, 0), 0.3)
        for x, y in blocks:
            msp.add_blockref("PILE600", (x, y), dxfattribs={"layer": layer})
    msp.add_line((0, 0), (50, 0), dxfattribs={"layer": "GRID"})
    stream = io.StringIO()
    doc.write(stream)
    return stream.getvalue().encode("utf-8")


@pytest.fixture
def project(app, people):
    """Project 'own' with two 600 mm piles A1 at (100, 200) and A2 at (110, 200)."""
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            gm = ground.save_model(conn, people["own"], "Zone 1", 5.0, LAYERS)
            for mark, e in (("A1", 100.0), ("A2", 110.0)):
                piles.save_pile(conn, people["own"], {
                    "mark": mark, "cap_id": None, "ground_model_id": gm, "pile_type": "bored",
                    "easting_m": e, "northing_m": 200.0, "cutoff_level_m": 9.0, "toe_level_m": -10.0,
                    "diameter_mm": 600.0, "compression_kn": 800.0, "tension_kn": 0.0, "shear_kn": 0.0,
                    "moment_knm": 0.0, "n_bars": 8, "bar_mm": 20.0, "cage_length_m": 8.0, "fc_mpa": 40.0,
                    "fy_mpa": 500.0, "exposure_class": "XC2", "cover_mm": 75.0, "head": "free"})
    return people["own"]


# A1 unchanged, A2 moved 0.05 m east, A3 new (0.6 m), one circle with no text near it.
LAYOUT = dict(circles=[(100.0, 200.0, 0.3), (110.05, 200.0, 0.3), (120.0, 200.0, 0.3)],
              texts=[("A1", 100.4, 200.4, "text"), ("A2", 110.5, 200.3, "mtext"), ("A3", 120.3, 200.3, "text")])


def schedule(app, project_id):
    with app.app_context():
        return {p.mark: (p.easting_m, p.northing_m, p.diameter_mm, p.toe_level_m, p.compression_kn)
                for p in piles.list_piles(db.get_db(), project_id)}


def test_preview_sorts_new_moved_and_unchanged_and_stores_nothing(app, project):
    before = schedule(app, project)
    with app.app_context():
        result = layout_io.preview(db.get_db(), project, dxf(**LAYOUT), "PILES")
    assert result.units == "m"
    assert [p.mark for p in result.new] == ["A3"]
    assert [(p.mark, round(d, 3)) for p, _, d in result.moved] == [("A2", 0.05)]
    assert [p.mark for p in result.unchanged] == ["A1"]
    assert result.new[0].diameter_mm == pytest.approx(600.0)
    assert result.can_apply
    assert schedule(app, project) == before


def test_apply_moves_existing_and_creates_new_from_the_template(app, project):
    with app.app_context():
        conn = db.get_db()
        result, outcome = layout_io.apply_layout(conn, project, dxf(**LAYOUT), "site.dxf", "PILES", None, 1.0,
                                                 "A1", "test", app.config["DATA_DIR"])
        assert outcome.ok, [str(e) for e in outcome.errors]
        actions = [e["action"] for e in audit.entries(conn, project)]
    got = schedule(app, project)
    assert got["A2"][:2] == pytest.approx((110.05, 200.0))
    assert got["A3"] == pytest.approx((120.0, 200.0, 600.0, -10.0, 800.0))  # A1's toe and load copied
    assert got["A1"] == pytest.approx((100.0, 200.0, 600.0, -10.0, 800.0))
    assert actions[:2] == ["layout imported", "schedule imported"]
    assert layout_io.layout_path(app.config["DATA_DIR"], result.sha256).exists()


def test_new_piles_without_a_template_change_nothing(app, project):
    before = schedule(app, project)
    with app.app_context():
        _, outcome = layout_io.apply_layout(db.get_db(), project, dxf(**LAYOUT), "site.dxf", "PILES", None, 1.0,
                                            None, "test", app.config["DATA_DIR"])
    assert not outcome.ok and "template" in outcome.errors[0].message
    assert schedule(app, project) == before  # A2 not moved either: whole drawing or nothing


def test_clash_and_unmarked_circle_are_shown_and_stop_the_whole_drawing(app, project):
    data = dxf(circles=LAYOUT["circles"] + [(130.0, 200.0, 0.3), (140.0, 200.0, 0.3)],
               texts=LAYOUT["texts"] + [("A3", 130.2, 200.2, "text")])  # A3 twice; 140 has no text
    before = schedule(app, project)
    with app.app_context():
        conn = db.get_db()
        result = layout_io.preview(conn, project, data, "PILES")
        assert sorted(result.clashes) == ["A3"] and len(result.clashes["A3"]) == 2
        assert [(p.x_m, p.y_m) for p in result.unmarked] == [(140.0, 200.0)]
        assert not result.can_apply
        _, outcome = layout_io.apply_layout(conn, project, data, "site.dxf", "PILES", None, 1.0, "A1", "test",
                                            app.config["DATA_DIR"])
    messages = " | ".join(e.message for e in outcome.errors)
    assert "mark A3 is on 2 circles" in messages and "no mark within 1 m" in messages
    assert schedule(app, project) == before


def test_a_diameter_that_differs_from_the_schedule_stops_the_apply(app, project):
    data = dxf(circles=[(100.0, 200.0, 0.375), (110.05, 200.0, 0.3)],
               texts=[("A1", 100.4, 200.4, "text"), ("A2", 110.5, 200.3, "text")])
    with app.app_context():
        result, outcome = layout_io.apply_layout(db.get_db(), project, data, "site.dxf", "PILES", None, 1.0, None,
                                                 "test", app.config["DATA_DIR"])
    assert [p.mark for p, _ in result.diameter_differs] == ["A1"]
    assert "drawn 750 mm" in outcome.errors[0].message
    assert schedule(app, project)["A2"][0] == 110.0


def test_units_from_the_header_or_the_engineer_and_refused_when_neither(app, project):
    mm = dxf(circles=[(c[0] * 1000, c[1] * 1000, c[2] * 1000) for c in LAYOUT["circles"]],
             texts=[(t, x * 1000, y * 1000, k) for t, x, y, k in LAYOUT["texts"]], insunits=4)
    with app.app_context():
        conn = db.get_db()
        result = layout_io.preview(conn, project, mm, "PILES")
        assert result.units == "mm" and result.new[0].x_m == pytest.approx(120.0)
        assert result.new[0].diameter_mm == pytest.approx(600.0)
        unitless = dxf(**LAYOUT, insunits=0)
        with pytest.raises(layout_io.LayoutRefused, match="does not say its units"):
            layout_io.preview(conn, project, unitless, "PILES")
        assert layout_io.preview(conn, project, unitless, "PILES", units="m").units == "m"
        with pytest.raises(layout_io.LayoutRefused, match="not mm"):
            layout_io.preview(conn, project, dxf(**LAYOUT), "PILES", units="mm")


def test_blocks_on_the_layer_are_piles_and_the_text_distance_limits_marks(app, project):
    data = dxf(circles=[], texts=[("B7", 150.5, 200.0, "text"), ("B8", 160.0, 203.0, "text")],
               blocks=[(150.0, 200.0), (160.0, 200.0)])
    with app.app_context():
        result = layout_io.preview(db.get_db(), project, data, "piles")  # layer names ignore case
    assert [(p.mark, round(p.diameter_mm)) for p in result.new] == [("B7", 600)]
    assert [p.x_m for p in result.unmarked] == [160.0]  # B8 is 3 m away, beyond the 1 m default


def test_not_a_drawing_and_a_missing_layer_are_refused(app, project):
    with app.app_context():
        conn = db.get_db()
        with pytest.raises(layout_io.LayoutRefused, match="not in the drawing"):
            layout_io.preview(conn, project, dxf(**LAYOUT), "FOUNDATIONS")
        with pytest.raises(layout_io.LayoutRefused):
            layout_io.preview(conn, project, b"this is not a drawing", "PILES")


def test_import_layout_command_previews_then_applies(app, project, tmp_path):
    import click
    from click.testing import CliRunner

    from fieldapp import import_cli

    group = click.Group()
    import_cli.register(group)
    path = tmp_path / "site.dxf"
    path.write_bytes(dxf(**LAYOUT))
    args = ["import-layout", "--data", app.config["DATA_DIR"], str(project), str(path), "--layer", "PILES"]
    runner = CliRunner()
    before = schedule(app, project)
    shown = runner.invoke(group, args)
    assert shown.exit_code == 0, shown.output
    assert "moved      A2" in shown.output and "by 50 mm" in shown.output and "Preview only" in shown.output
    assert schedule(app, project) == before
    no_template = runner.invoke(group, args + ["--apply"])
    assert no_template.exit_code == 1 and schedule(app, project) == before
    applied = runner.invoke(group, args + ["--apply", "--template", "A1"])
    assert applied.exit_code == 0, applied.output
    assert sorted(schedule(app, project)) == ["A1", "A2", "A3"]


def test_upload_preview_then_apply_on_the_screen(app, client, auth, people, project):
    from fieldapp import imports

    if "imports" not in app.blueprints:
        app.register_blueprint(imports.bp)
    auth.login(people["engineer"])
    before = schedule(app, project)
    response = client.post(f"/projects/{project}/piles/layout/preview", data={
        "csrf_token": auth.token(), "layer": "PILES", "units": "", "text_distance_m": "1",
        "file": (io.BytesIO(dxf(**LAYOUT)), "site.dxf")}, content_type="multipart/form-data")
    page = response.get_data(as_text=True)
    assert response.status_code == 200, page
    assert "by 50 mm" in page and "Caution:" in page and "Apply the whole drawing" in page
    assert schedule(app, project) == before
    import re
    hidden = dict(re.findall(r'name="(sha256|fingerprint|filename|layer|units|text_distance_m)" value="([^"]*)"', page))
    applied = client.post(f"/projects/{project}/piles/layout/apply",
                          data=dict(hidden, csrf_token=auth.token(), template="A1"))
    assert applied.status_code == 302, applied.get_data(as_text=True)
    assert sorted(schedule(app, project)) == ["A1", "A2", "A3"]


def test_apply_refuses_when_the_schedule_changed_since_the_preview(app, project):
    data = dxf(**LAYOUT)
    with app.app_context():
        conn = db.get_db()
        seen = layout_io.preview(conn, project, data, "PILES").fingerprint()
        row = piles.get_pile(conn, project, "A2")
        with db.write(conn):
            piles.save_pile(conn, project, dict(piles.as_values(row), easting_m=111.0), row.id)
        _, outcome = layout_io.apply_layout(conn, project, data, "site.dxf", "PILES", None, 1.0, "A1", "test",
                                            app.config["DATA_DIR"], fingerprint=seen)
    assert not outcome.ok and "changed since the preview" in outcome.errors[0].message
    assert sorted(schedule(app, project)) == ["A1", "A2"] and schedule(app, project)["A2"][0] == 111.0
