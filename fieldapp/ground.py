"""The Ground screen: ground models with their layers and water level, each drawn as a soil column.

Everyone on the project sees the ground models; only engineers (and admins) create or change
them. The soil column is inline SVG drawn here on the server (no script, no inline style), so
it shows offline and prints.
"""

from __future__ import annotations

from flask import Blueprint, abort, current_app, flash, g, redirect, render_template, request, url_for
from markupsafe import Markup, escape

from fieldapp import db, jobs, pile_inputs
from fieldapp.auth import engineer_required, login_required, project_or_404
from fieldapp.forms import GroundModelForm, fmt_number
from fieldapp.piles import flash_rechecked
from fieldapp.queries import audit, ground
from fieldapp.queries import piles as piles_q
from fieldapp.queries.ground import GroundModelRow, LayerRow

bp = Blueprint("ground", __name__)

BLANK_ROWS = 3

# Fill colours chosen for contrast in sunlight; each material also has its own hatch so the
# column reads without colour.
MATERIAL_STYLE = {
    "cohesive": ("#a07a4f", "clay", "hatch-clay"),
    "cohesionless": ("#f0d27a", "sand", "hatch-sand"),
    "rock": ("#8a8f96", "rock", "hatch-rock"),
    "ignore": ("#d9d9d9", "ignored", "hatch-fill"),
}


def _level(x: float) -> str:
    return f"{x:+.2f}"


def layer_summary(layer: LayerRow) -> str:
    """One line of the layer's strength: 'clay c_u 50→120 kPa', "sand φ' 36°", ..."""
    parts = []
    if layer.material == "cohesive" or layer.cu_kpa is not None:
        if layer.cu_kpa is not None:
            cu = fmt_number(layer.cu_kpa)
            if layer.cu_bottom_kpa is not None and layer.cu_bottom_kpa != layer.cu_kpa:
                cu += f"→{fmt_number(layer.cu_bottom_kpa)}"
            parts.append(f"c_u {cu} kPa")
    if layer.phi_deg is not None:
        parts.append(f"φ' {fmt_number(layer.phi_deg)}°")
    if layer.shaft_friction_kpa is not None:
        parts.append(f"f_s {fmt_number(layer.shaft_friction_kpa)} kPa")
    if layer.base_pressure_kpa is not None:
        parts.append(f"q_b {fmt_number(layer.base_pressure_kpa)} kPa")
    parts.append(f"γ {fmt_number(layer.unit_weight_kn_m3)}")
    return f"{MATERIAL_STYLE[layer.material][1]}: " + ", ".join(parts)


def soil_column_svg(model: GroundModelRow, height_px: int = 420) -> Markup:
    """The ground model drawn as a soil column (inline SVG markup, levels on the left, layers
    named on the right, the groundwater level as a blue line with its level)."""
    if not model.layers:
        return Markup("")
    top, bottom = model.top_level_m, model.bottom_level_m
    span = max(top - bottom, 1e-6)
    pad_t, pad_b = 24, 16
    scale = (height_px - pad_t - pad_b) / span
    col_x, col_w, width = 150, 90, 600

    def y(level: float) -> float:
        return pad_t + (top - level) * scale

    title_id = f"soil-{model.id}-title"
    out = [f'<svg class="soil-column" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height_px}" '
           f'width="{width}" height="{height_px}" role="img" aria-labelledby="{title_id}">',
           f'<title id="{title_id}">Soil column of {escape(model.name)}: {len(model.layers)} layers from '
           f'{_level(top)} to {_level(bottom)} m, groundwater at {_level(model.water_level_m)} m</title>',
           "<defs>",
           '<pattern id="hatch-clay" width="8" height="8" patternUnits="userSpaceOnUse">'
           '<path d="M0 4H8" stroke="#3b2a18" stroke-width="1"/></pattern>',
           '<pattern id="hatch-sand" width="8" height="8" patternUnits="userSpaceOnUse">'
           '<circle cx="2" cy="2" r="1" fill="#5a4a10"/><circle cx="6" cy="6" r="1" fill="#5a4a10"/></pattern>',
           '<pattern id="hatch-rock" width="12" height="8" patternUnits="userSpaceOnUse">'
           '<path d="M0 8L6 0M6 8L12 0" stroke="#2b2e33" stroke-width="1"/></pattern>',
           '<pattern id="hatch-fill" width="8" height="8" patternUnits="userSpaceOnUse">'
           '<path d="M0 0L8 8M8 0L0 8" stroke="#6a6a6a" stroke-width="0.8"/></pattern>',
           "</defs>",
           '<text x="4" y="14" font-size="12" fill="#000">levels (m)</text>']
    for layer in model.layers:
        fill, _, hatch = MATERIAL_STYLE[layer.material]
        y0, y1 = y(layer.top_level_m), y(layer.bottom_level_m)
        h = max(y1 - y0, 0.5)
        out.append(f'<rect x="{col_x}" y="{y0:.1f}" width="{col_w}" height="{h:.1f}" fill="{fill}" '
                   f'stroke="#000" stroke-width="1.5"/>')
        out.append(f'<rect x="{col_x}" y="{y0:.1f}" width="{col_w}" height="{h:.1f}" fill="url(#{hatch})"/>')
        mid = y0 + h / 2
        out.append(f'<text x="{col_x + col_w + 10}" y="{mid + 5:.1f}" font-size="13" fill="#000">'
                   f'{escape(layer_summary(layer))}</text>')
        if layer.description and h >= 30:
            out.append(f'<text x="{col_x + col_w + 10}" y="{mid + 21:.1f}" font-size="11" fill="#333">'
                       f'{escape(layer.description[:60])}</text>')
    for level in [top] + [layer.bottom_level_m for layer in model.layers]:
        yy = y(level)
        out.append(f'<line x1="{col_x - 6}" y1="{yy:.1f}" x2="{col_x}" y2="{yy:.1f}" stroke="#000" stroke-width="1.5"/>')
        out.append(f'<text x="{col_x - 8}" y="{yy + 4:.1f}" font-size="12" text-anchor="end" fill="#000">'
                   f'{_level(level)}</text>')
    w = model.water_level_m
    if bottom <= w <= top:
        yw = y(w)
        out.append(f'<line x1="4" y1="{yw:.1f}" x2="{col_x + col_w + 4}" y2="{yw:.1f}" '
                   'stroke="#0047b3" stroke-width="3"/>')
        out.append(f'<path d="M{col_x + col_w - 22} {yw - 11:.1f}h14l-7 10z" fill="#0047b3"/>')
        out.append(f'<text x="4" y="{yw - 5:.1f}" font-size="12" font-weight="700" fill="#0047b3">'
                   f'GWL {_level(w)}</text>')
    else:
        where = "above the ground surface" if w > top else "below the model"
        out.append(f'<text x="{col_x}" y="{height_px - 2}" font-size="12" font-weight="700" fill="#0047b3">'
                   f'GWL {_level(w)} m ({where})</text>')
    out.append("</svg>")
    return Markup("".join(out))


@bp.get("/projects/<int:project_id>/ground")
@login_required
def list_models(project_id):
    """Every ground model of the project with its soil column and layer table."""
    project = project_or_404(project_id)
    conn = db.get_db()
    models = ground.list_models(conn, project_id)
    return render_template("ground.html", project=project, models=models,
                           columns={m.id: soil_column_svg(m) for m in models},
                           used={m.id: ground.piles_using(conn, m.id) for m in models},
                           summary=layer_summary)


def _form_for(model: GroundModelRow | None) -> GroundModelForm:
    if request.method == "POST":
        form = GroundModelForm()
        if "more_rows" in request.form:
            for _ in range(BLANK_ROWS):
                form.layers.append_entry()
        return form
    if model is None:
        form = GroundModelForm()
    else:
        data = {"name": model.name, "description": model.description, "water_level_m": model.water_level_m,
                "layers": [{k: getattr(layer, k) for k in ground.LAYER_FIELDS} for layer in model.layers]}
        form = GroundModelForm(data=data)
    for _ in range(BLANK_ROWS):
        form.layers.append_entry()
    return form


def _save(project, model: GroundModelRow | None):
    conn = db.get_db()
    form = _form_for(model)
    if request.method == "POST" and "more_rows" not in request.form and form.validate_on_submit():
        layers = [row.values() for row in form.filled_layers()]
        name = form.name.data.strip()
        bottom = min(layer["bottom_level_m"] for layer in layers)
        deeper = ground.piles_below(conn, model.id, bottom) if model else []
        if deeper:
            marks = ", ".join(f"{mark} ({toe:g} m)" for mark, toe in deeper[:10])
            form.layers.errors.append(
                f"Layers: the model would end at {bottom:g} m, above the design toe of {len(deeper)} pile(s) "
                f"that use it: {marks}{' ...' if len(deeper) > 10 else ''}. Keep the layers down to the "
                "deepest toe")
            return render_template("ground_form.html", project=project, form=form, model=model), 400
        try:
            with db.write(conn):
                model_id = pile_inputs.store_ground_model(conn, project.id, name, form.water_level_m.data, layers,
                                             (form.description.data or "").strip(),
                                             model.id if model else None)
                audit.append(conn, project.id, g.user.email, "ground model saved", name, {
                    "ground_model_id": model_id, "new": model is None,
                    "water_level_m": form.water_level_m.data, "layers": layers})
                moved = jobs.recheck_upstream(
                    conn, current_app._get_current_object(), project.id,
                    piles_q.list_piles(conn, project.id, ground_model_id=model_id),
                    g.user, f"rechecked on ground model {name} as changed", ground_model_id=model_id)
        except ValueError as exc:
            form.name.errors.append(str(exc))
        else:
            used = ground.piles_using(conn, model_id)
            flash(f"Ground model {name} saved." + (f" {used} pile(s) use it." if used else ""))
            flash_rechecked(moved)
            return redirect(url_for("ground.list_models", project_id=project.id, _anchor=f"model-{model_id}"))
    status = 400 if request.method == "POST" and "more_rows" not in request.form else 200
    return render_template("ground_form.html", project=project, form=form, model=model), status


@bp.route("/projects/<int:project_id>/ground/new", methods=["GET", "POST"])
@engineer_required
def new_model(project_id):
    """Add a ground model."""
    return _save(project_or_404(project_id), None)


@bp.route("/projects/<int:project_id>/ground/<int:model_id>/edit", methods=["GET", "POST"])
@engineer_required
def edit_model(project_id, model_id):
    """Change a ground model's layers or water level."""
    project = project_or_404(project_id)
    model = ground.get_model(db.get_db(), project_id, model_id)
    if model is None:
        abort(404)
    return _save(project, model)
