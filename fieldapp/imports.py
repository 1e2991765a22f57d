"""Upload screens for the files engineers already have: AGS4 ground data and DXF pile layouts.

AGS4 data (a Ground-like page): upload a file, which is checked whole and stored only when
accepted; see each location's strata as proposed layers (material proposed, unconfirmed) with
the SPT, CPT and water readings beside each; make a ground model from a location by confirming
the materials and entering the strength parameters (never guessed); download the project's
ground data as AGS4. Pile layout (a Piles-like page): upload a DXF, see the preview (new,
moved, unchanged, clashes, no mark), then apply it whole or not at all.

Engineers (and admins) only, on projects they belong to.
"""

from __future__ import annotations

import math
import re

from flask import Blueprint, Response, abort, current_app, flash, g, redirect, render_template, request, url_for

from design_core.inputs import MATERIALS
from fieldapp import ags_io, db, layout_io
from fieldapp.auth import engineer_required, project_or_404
from fieldapp.pile_inputs import store_ground_model
from fieldapp.queries import audit, ground
from fieldapp.queries import locations as loc_q
from fieldapp.queries import piles as piles_q

bp = Blueprint("imports", __name__)

SHA_RE = re.compile(r"^[0-9a-f]{64}$")
NUMBER_FIELDS = (("unit_weight_kn_m3", "γ kN/m³"), ("cu_kpa", "c_u top kPa"), ("cu_bottom_kpa", "c_u bottom kPa"),
                 ("phi_deg", "φ' °"), ("shaft_friction_kpa", "shaft kPa (report)"),
                 ("base_pressure_kpa", "base kPa (report)"))


def _actor() -> str:
    return g.user.email


def readings_beside(conn, location) -> list[dict]:
    """Each stratum of a location with the readings within its depths (SPT N, CPT q_c, water)."""
    spt = loc_q.spt(conn, location.id)
    cpt = loc_q.cpt(conn, location.id)
    water = loc_q.water(conn, location.id)
    out = []
    for s in loc_q.strata(conn, location):
        def inside(depth, s=s):
            return s.top_depth_m <= depth < s.base_depth_m or (depth == s.base_depth_m == location.final_depth_m)
        qc = {ref: [r["qc_mpa"] for r in t["readings"] if inside(r["depth_m"])] for ref, t in cpt.items()}
        out.append({"stratum": s,
                    "spt": [(r["depth_m"], r["n_value"], r["reported"]) for r in spt if inside(r["depth_m"])],
                    "cpt": {ref: (len(v), min(v), max(v), sum(v) / len(v)) for ref, v in qc.items() if v},
                    "water": [w for w in water if inside(w["depth_m"])]})
    return out


@bp.get("/projects/<int:project_id>/ground/ags")
@engineer_required
def ground_data(project_id):
    """The project's AGS4 locations with their proposed layers and readings; upload and export."""
    project = project_or_404(project_id)
    return _ground_page(project)


def _ground_page(project, errors=None, status=200):
    conn = db.get_db()
    locs = loc_q.list_locations(conn, project.id)
    models = {m.id: m.name for m in ground.list_models(conn, project.id)}
    return render_template("imports_ags.html", project=project, locations=locs, errors=errors,
                           beside={loc.id: readings_beside(conn, loc) for loc in locs},
                           cpt={loc.id: loc_q.cpt(conn, loc.id) for loc in locs},
                           water={loc.id: loc_q.water(conn, loc.id) for loc in locs},
                           files=loc_q.files(conn, project.id), models=models), status


@bp.post("/projects/<int:project_id>/ground/ags")
@engineer_required
def upload_ags(project_id):
    """Import an AGS4 file: accepted whole or nothing stored; every problem listed."""
    project = project_or_404(project_id)
    upload = request.files.get("file")
    if upload is None or not upload.filename:
        return _ground_page(project, [ags_io.AgsError("", "", 0, "AGS4 file is required: choose a .ags file")], 400)
    result = ags_io.import_ags(db.get_db(), project_id, upload.read(), upload.filename, _actor(),
                               current_app.config["DATA_DIR"])
    if not result.ok:
        return _ground_page(project, result.errors, 422)
    flash(result.summary() + " Materials are proposals: make a ground model from each location to confirm them.")
    return redirect(url_for("imports.ground_data", project_id=project_id))


@bp.get("/projects/<int:project_id>/ground/ags/export.ags")
@engineer_required
def export_ags(project_id):
    """Download the project's locations, strata and readings as AGS4."""
    project = project_or_404(project_id)
    data = ags_io.export_ags(db.get_db(), project_id)
    safe = "".join(ch if ch.isalnum() else "-" for ch in project.name).strip("-").lower() or "project"
    return Response(data, mimetype="text/plain; charset=utf-8",
                    headers={"Content-Disposition": f'attachment; filename="{safe}-ground.ags"'})


def proposed_layers(conn, location) -> list[dict]:
    """The location's strata as layers top down (levels m), a gap in the log filled as 'ignore'."""
    layers, depth = [], 0.0
    for s in loc_q.strata(conn, location):
        if s.top_depth_m > depth + 1e-6:
            layers.append({"top_level_m": location.ground_level_m - depth, "bottom_level_m": s.top_level_m,
                           "material": "ignore", "description": "not described in the file",
                           "reason": "gap in the log: given no resistance"})
        layers.append({"top_level_m": s.top_level_m, "bottom_level_m": s.bottom_level_m,
                       "material": s.proposed_material, "description": s.description, "reason": s.material_reason})
        depth = s.base_depth_m
    return layers


def proposed_water_level(conn, location) -> tuple[float, str]:
    """(level m, why): the highest water seen in the location (strike or rise), else ground level."""
    depths = [d for w in loc_q.water(conn, location.id) for d in [w["depth_m"]] + [r[1] for r in w["rises"]]]
    if depths:
        return location.ground_level_m - min(depths), "the highest water level seen in the location"
    return location.ground_level_m, "no water strike recorded: ground level, the safe side, until you know better"


def _number(text: str | None, name: str, errors: list[str]) -> float | None:
    text = (text or "").strip()
    if not text:
        return None
    try:
        value = float(text)
    except ValueError:
        errors.append(f"{name} must be a number, got {text!r}")
        return None
    if not math.isfinite(value):
        errors.append(f"{name} must be a finite number")
        return None
    return value


@bp.route("/projects/<int:project_id>/ground/ags/<int:location_id>/model", methods=["GET", "POST"])
@engineer_required
def model_from_location(project_id, location_id):
    """Make a ground model from a location's strata: the engineer confirms each material and
    enters the parameters; design_core checks the model before it is stored."""
    project = project_or_404(project_id)
    conn = db.get_db()
    location = loc_q.get_location(conn, project_id, location_id)
    if location is None:
        abort(404)
    layers = proposed_layers(conn, location)
    if not layers:
        flash(f"{location.loca_id} has no strata in the file: there is nothing to make a ground model from.")
        return redirect(url_for("imports.ground_data", project_id=project_id))
    water, water_why = proposed_water_level(conn, location)
    form = {"name": f"{location.loca_id} (AGS4)", "water_level_m": f"{water:g}"}
    errors: list[str] = []
    status = 200
    if request.method == "POST":
        form = {k: request.form.get(k, "") for k in request.form}
        values = []
        for i, proposed in enumerate(layers):
            row = {"top_level_m": proposed["top_level_m"], "bottom_level_m": proposed["bottom_level_m"],
                   "description": (form.get(f"description_{i}") or "").strip()[:500]}
            material = form.get(f"material_{i}", "")
            if material not in MATERIALS:
                errors.append(f"layer {i + 1}: material must be one of {', '.join(MATERIALS)}")
            row["material"] = material
            for key, label in NUMBER_FIELDS:
                row[key] = _number(form.get(f"{key}_{i}"), f"layer {i + 1}: {label}", errors)
            values.append(row)
        water_level = _number(form.get("water_level_m"), "water level (m)", errors)
        if water_level is None and not errors:
            errors.append("water level (m) is required")
        if not errors:
            name = (form.get("name") or "").strip()
            try:
                with db.write(conn):
                    model_id = store_ground_model(conn, project_id, name, water_level, values,
                                                 f"Made from {location.loca_id} of the AGS4 data by the engineer.")
                    loc_q.link_model(conn, location.id, model_id)
                    audit.append(conn, project_id, _actor(), "ground model made from AGS4 location", name, {
                        "ground_model_id": model_id, "location": location.loca_id, "water_level_m": water_level,
                        "layers": values})
            except ValueError as exc:
                errors.append(str(exc))
            else:
                flash(f"Ground model {name} made from {location.loca_id}; its materials are confirmed.")
                return redirect(url_for("ground.list_models", project_id=project_id, _anchor=f"model-{model_id}"))
        status = 400
    return render_template("imports_model.html", project=project, location=location, layers=layers, form=form,
                           errors=errors, water_why=water_why, materials=MATERIALS, number_fields=NUMBER_FIELDS,
                           beside=readings_beside(conn, location)), status


# --- pile layout --------------------------------------------------------------------------------

def _layout_options() -> tuple[str, str | None, float, list[str]]:
    errors = []
    layer = (request.form.get("layer") or "").strip()
    if not layer:
        errors.append("layer is required: the drawing's layer whose circles are the piles")
    units = request.form.get("units") or None
    if units not in (None, "m", "mm"):
        errors.append("units must be m or mm (or left blank when the drawing says)")
        units = None
    distance = _number(request.form.get("text_distance_m"), "text distance (m)", errors)
    return layer, units, distance if distance is not None else layout_io.DEFAULT_TEXT_DISTANCE_M, errors


def _layout_page(project, status=200, **context):
    conn = db.get_db()
    marks = [p.mark for p in piles_q.list_piles(conn, project.id)]
    context.setdefault("form", {"text_distance_m": f"{layout_io.DEFAULT_TEXT_DISTANCE_M:g}"})
    return render_template("imports_layout.html", project=project, marks=marks, **context), status


@bp.get("/projects/<int:project_id>/piles/layout")
@engineer_required
def layout_form(project_id):
    """Upload a DXF pile layout."""
    return _layout_page(project_or_404(project_id))


@bp.post("/projects/<int:project_id>/piles/layout/preview")
@engineer_required
def layout_preview(project_id):
    """Show what the drawing would do to the schedule; the database is not touched (the drawing's
    bytes are kept by hash so the apply uses exactly the file previewed)."""
    project = project_or_404(project_id)
    layer, units, distance, errors = _layout_options()
    upload = request.files.get("file")
    form = {"layer": layer, "units": units or "", "text_distance_m": f"{distance:g}"}
    if upload is None or not upload.filename:
        errors.append("DXF file is required: choose a .dxf file")
    if errors:
        return _layout_page(project, 400, errors=errors, form=form)
    data = upload.read()
    try:
        result = layout_io.preview(db.get_db(), project_id, data, layer, units, distance)
    except layout_io.LayoutRefused as exc:
        return _layout_page(project, 422, errors=[str(exc)], form=form)
    layout_io.keep(current_app.config["DATA_DIR"], data)
    return _layout_page(project, result=result, form=form, filename=upload.filename)


@bp.post("/projects/<int:project_id>/piles/layout/apply")
@engineer_required
def layout_apply(project_id):
    """Apply the previewed drawing: the whole of it or nothing."""
    project = project_or_404(project_id)
    layer, units, distance, errors = _layout_options()
    sha = request.form.get("sha256", "")
    form = {"layer": layer, "units": units or "", "text_distance_m": f"{distance:g}"}
    path = layout_io.layout_path(current_app.config["DATA_DIR"], sha) if SHA_RE.match(sha) else None
    if path is None or not path.exists():
        errors.append("the previewed drawing is not on the server: upload it again")
    if errors:
        return _layout_page(project, 400, errors=errors, form=form)
    try:
        result, outcome = layout_io.apply_layout(
            db.get_db(), project_id, path.read_bytes(), request.form.get("filename") or "layout.dxf", layer, units,
            distance, request.form.get("template") or None, _actor(), current_app.config["DATA_DIR"],
            request.form.get("fingerprint") or None)
    except layout_io.LayoutRefused as exc:
        return _layout_page(project, 422, errors=[str(exc)], form=form)
    if not outcome.ok:
        return _layout_page(project, 422, errors=[e.message for e in outcome.errors], result=result, form=form,
                            filename=request.form.get("filename") or "")
    flash(f"Layout applied: {len(result.new)} pile(s) created, {len(result.moved)} moved. {outcome.summary()}")
    return redirect(url_for("piles.list_piles", project_id=project_id))
