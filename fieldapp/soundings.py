"""CPT soundings and SPT profiles of a ground model: upload as Toeline CSV, and the profiles.

Routes
------
* ``GET  /projects/<id>/ground/<model_id>/soundings`` (``soundings.show``): the model's layers
  beside every sounding linked to it, q_c (MPa) and SPT N60 against level (m). Members.
* ``POST /projects/<id>/ground/<model_id>/soundings`` (``soundings.upload``): one file in the
  CPT or SPT format of ``fieldapp.insitu_io`` with the sounding's name, position and ground
  level. Engineers. The file is read whole first: any problem is a 422 listing each row and
  column, and nothing is stored; a good file is stored in one transaction with its audit
  entry (``queries.locations.add_sounding``).
"""

from __future__ import annotations

import math

from flask import Blueprint, abort, flash, g, redirect, render_template, request, url_for

from design_core.rules import Rules
from fieldapp import db, drawings
from fieldapp.auth import engineer_required, login_required, project_or_404
from fieldapp.drawings import (
    INK, MUTED, Axis, Figure, Polyline, Rect, Text, empty_figure, finite, frame, legend_grid,
    nice_ticks,
)
from fieldapp.insitu_io import InsituFileError, parse_cpt, parse_spt
from fieldapp.queries import audit, projects
from fieldapp.queries import ground as ground_q
from fieldapp.queries import locations as loc_q

bp = Blueprint("soundings", __name__)

KINDS = ("cpt", "spt")
COLOURS = ("#1f4e9e", "#a4000f", "#0b6b2f", "#b35c00", "#5b2a86", "#006d75")
MATERIAL_FILLS = {"cohesive": "#e8dcc8", "cohesionless": "#f3ecc2", "rock": "#d5d5d5",
                  "ignore": "#f4f4f4"}


def _model_or_404(conn, project_id: int, model_id: int):
    model = ground_q.get_model(conn, project_id, model_id)
    if model is None:
        abort(404)
    return model


def _number(form, name: str, errors: dict, lo: float, hi: float) -> float | None:
    text = (form.get(name) or "").strip()
    try:
        value = float(text)
    except ValueError:
        errors[name] = f"is required: a number from {lo:g} to {hi:g}"
        return None
    if not math.isfinite(value) or not lo <= value <= hi:
        errors[name] = f"must be between {lo:g} and {hi:g}, got {text[:30]}"
        return None
    return value


# --- the picture ------------------------------------------------------------------------------

def profile_figure(title: str, layers, series: list[tuple[str, list[float], list[float]]],
                   xlabel: str, width: float = 420, height: float = 420) -> Figure:
    """Values (across) against level (m, up) for each (name, levels, values), with the ground
    model's layers as a strip at the left (their material written in each)."""
    levels = [v for _, z, _ in series for v in z]
    levels += finite([x for layer in layers for x in (layer.top_level_m, layer.bottom_level_m)])
    values = [v for _, _, xs in series for v in xs]
    if not series or len(levels) < 2:
        return empty_figure(title, "no readings", width)
    zlo, zhi = min(levels), max(levels)
    pad = max(0.03 * (zhi - zlo), 0.2)
    zlo, zhi = zlo - pad, zhi + pad
    vmax = max(values + [1.0]) * 1.08
    strip = 70
    plot = (48 + strip, 36, width - 12, height - 70)
    x = Axis(0.0, vmax, plot[0], plot[2])
    y = Axis(zhi, zlo, plot[1], plot[3])
    fig = Figure(width, height, title)
    for layer in layers:
        top, bottom = y(min(layer.top_level_m, zhi)), y(max(layer.bottom_level_m, zlo))
        fig.add(Rect(48, top, strip - 6, bottom - top, MUTED, MATERIAL_FILLS.get(layer.material, "#ffffff"), 0.6),
                Text(48 + (strip - 6) / 2, (top + bottom) / 2 + 3, layer.material, 7.5, "middle", INK))
    frame(fig, x, y, nice_ticks(0, vmax), nice_ticks(zlo, zhi), xlabel, "level (m)")
    entries = []
    for k, (name, z, xs) in enumerate(series):
        colour = COLOURS[k % len(COLOURS)]
        fig.add(Polyline(tuple((x(a), y(b)) for a, b in zip(xs, z, strict=True)), colour, 1.3))
        entries.append((colour, name, None, "line"))
    legend_grid(fig, plot[0], plot[3] + 40, width - plot[0] - 4, entries, columns=3)
    return fig


def _series(conn, locations, rules: Rules):
    cpt, spt = [], []
    for loc in locations:
        for ref, test in loc_q.cpt(conn, loc.id).items():
            rows = test["readings"]
            if rows:
                cpt.append((f"{loc.loca_id}" if ref == loc.loca_id else f"{loc.loca_id} {ref}",
                            [loc.ground_level_m - r["depth_m"] for r in rows], [r["qc_mpa"] for r in rows]))
        rows = [r for r in loc_q.spt(conn, loc.id) if r["n60"] is not None or r["n_value"] is not None]
        if rows:
            spt.append((loc.loca_id, [loc.ground_level_m - r["depth_m"] for r in rows],
                        [r["n60"] if r["n60"] is not None else r["n_value"] for r in rows]))
    return cpt, spt


def _page(project, model, errors=None, form=None, code: int = 200):
    conn = db.get_db()
    rules = projects.current_rules(conn, project.id).rules
    locations = loc_q.for_model(conn, project.id, model.id)
    cpt, spt = _series(conn, locations, rules)
    svgs = [drawings.to_svg(profile_figure("CPT cone resistance against level", model.layers, cpt,
                                           "q_c (MPa)"))] if cpt else []
    if spt:
        svgs.append(drawings.to_svg(profile_figure("SPT N60 against level", model.layers, spt,
                                                   "N60 (blows / 300 mm)")))
    return render_template("soundings.html", project=project, model=model, locations=locations,
                           svgs=svgs, errors=errors or {}, form=form or {}, kinds=KINDS), code


@bp.get("/projects/<int:project_id>/ground/<int:model_id>/soundings")
@login_required
def show(project_id: int, model_id: int):
    """The model's soundings as profiles against level beside its layers."""
    project = project_or_404(project_id)
    return _page(project, _model_or_404(db.get_db(), project.id, model_id))


@bp.post("/projects/<int:project_id>/ground/<int:model_id>/soundings")
@engineer_required
def upload(project_id: int, model_id: int):
    """Store one CPT sounding or SPT profile from a file; 422 naming rows and columns, nothing
    stored, when anything is wrong."""
    project = project_or_404(project_id)
    conn = db.get_db()
    model = _model_or_404(conn, project.id, model_id)
    form, errors = request.form, {}
    kind = form.get("kind") or ""
    if kind not in KINDS:
        errors["kind"] = f"must be one of {', '.join(KINDS)}"
    name = (form.get("name") or "").strip()
    if not 1 <= len(name) <= 60:
        errors["name"] = "is required, at most 60 characters"
    easting = _number(form, "easting_m", errors, -1e8, 1e8)
    northing = _number(form, "northing_m", errors, -1e8, 1e8)
    level = _number(form, "ground_level_m", errors, -1e4, 1e4)
    upload_ = request.files.get("file")
    data = upload_.read() if upload_ and upload_.filename else b""
    if not data:
        errors["file"] = "is required (a CSV in the CPT or SPT format)"
    if errors:
        return _page(project, model, errors, form, 422)
    parse = parse_cpt if kind == "cpt" else parse_spt
    try:
        found = parse(data, name=name, easting=easting, northing=northing, ground_level=level)
    except InsituFileError as exc:
        return _page(project, model, {"file": str(exc)}, form, 422)
    rules = projects.current_rules(conn, project.id).rules
    if kind == "cpt":
        u2 = found.u2_kpa if found.u2_kpa is not None else [None] * found.depths_m.size
        readings = [(float(d), float(q), float(f), None if u is None else float(u))
                    for d, q, f, u in zip(found.depths_m, found.qc_mpa, found.fs_kpa, u2, strict=True)]
    else:
        readings = [(float(d), float(n), float(er), float(n60)) for d, n, er, n60 in
                    zip(found.depths_m, found.n, found.energy_ratio, found.n60(rules), strict=True)]
    try:
        with db.write(conn):
            location_id = loc_q.add_sounding(conn, project.id, model.id, kind, name, easting, northing,
                                             level, readings)
            audit.append(conn, project.id, g.user.label, "sounding added", name,
                         {"kind": kind, "ground_model_id": model.id, "location_id": location_id,
                          "readings": len(readings), "easting_m": easting, "northing_m": northing,
                          "ground_level_m": level})
    except loc_q.SoundingClash as exc:
        return _page(project, model, {"name": str(exc)}, form, 422)
    flash(f"{kind.upper()} {name}: {len(readings)} readings stored on ground model {model.name}.")
    return redirect(url_for("soundings.show", project_id=project.id, model_id=model.id), 303)
