"""At the rig: the inspector's screen on the tablet (issue 5).

* ``GET /projects/<id>/rig`` (``rig.pick``): find a pile by mark, or take the nearest planned
  pile to where the rig last was (the pile saved most recently) or to a typed position.
* ``GET /projects/<id>/rig/<mark>`` (``rig.record``): the one-page record in sections in the
  order of the work, design values beside each as-built field, live checks as figures are
  typed (static/rig.js, from the data embedded in the page by ``rig_view.rig_data``), photos,
  and the verdict after each save. Saves go through the JSON API (``PUT .../record``), via the
  tablet's outbox when it is there.
"""

from __future__ import annotations

import math

from flask import Blueprint, abort, g, render_template, request, url_for

from design_core.inputs import MATERIALS
from fieldapp import db, rig_view
from fieldapp.auth import login_required, project_or_404
from fieldapp.queries import photos as photos_q
from fieldapp.queries import piles as piles_q
from fieldapp.queries import records
from fieldapp.record_input import BASE_CHECKS, parse_number

bp = Blueprint("rig", __name__)

def _number_arg(name: str) -> float | None:
    try:
        return parse_number(request.args.get(name))
    except ValueError:
        return None


@bp.get("/projects/<int:project_id>/rig")
@login_required
def pick(project_id: int):
    """Pick the pile: search by mark, or the nearest planned pile."""
    project = project_or_404(project_id)
    conn = db.get_db()
    q = (request.args.get("q") or "").strip()
    all_piles = piles_q.list_piles(conn, project.id)
    shown = piles_q.list_piles(conn, project.id, search=q) if q else all_piles
    planned = [p for p in all_piles if p.progress == "planned"]
    origin, origin_label = None, ""
    e, n = _number_arg("e"), _number_arg("n")
    if e is not None and n is not None:
        origin, origin_label = (e, n), f"E {e:.2f}, N {n:.2f}"
    else:
        last_id = records.last_saved_pile_id(conn, project.id)
        last = piles_q.get_pile_by_id(conn, project.id, last_id) if last_id else None
        if last is not None:
            origin, origin_label = (last.easting_m, last.northing_m), f"{last.mark} (saved last)"
    nearest = []
    if origin is not None:
        nearest = sorted(((math.hypot(p.easting_m - origin[0], p.northing_m - origin[1]), p)
                          for p in planned), key=lambda t: t[0])[:5]
    exact = next((p for p in shown if p.mark.lower() == q.lower()), None) if q else None
    return render_template("rig_pick.html", project=project, piles=shown, q=q, nearest=nearest,
                           origin_label=origin_label, exact=exact, planned_count=len(planned),
                           e=request.args.get("e", ""), n=request.args.get("n", ""))


@bp.get("/projects/<int:project_id>/rig/<mark>")
@login_required
def record(project_id: int, mark: str):
    """The one-page record of a pile with live checks."""
    project = project_or_404(project_id)
    conn = db.get_db()
    pile = piles_q.get_pile(conn, project.id, mark)
    if pile is None:
        abort(404)
    data = rig_view.rig_data(conn, project.id, pile)
    data["can_record"] = bool(g.user.can_record)
    data["urls"] = {
        "record": url_for("api.put_record", project_id=project.id, mark=pile.mark),
        "preview": url_for("api.preview_record", project_id=project.id, mark=pile.mark),
        "photos": url_for("api.post_photo", project_id=project.id, mark=pile.mark),
        "photo_list": url_for("api.list_photos", project_id=project.id, mark=pile.mark),
        "pick": url_for("rig.pick", project_id=project.id),
    }
    photos = photos_q.for_pile(conn, pile.id)
    exposure_classes = list(data["limits"]["min_cover_mm"])
    return render_template("rig.html", project=project, pile=pile, data=data, photos=photos,
                           base_checks=BASE_CHECKS, materials=MATERIALS,
                           exposure_classes=exposure_classes, kinds=photos_q.KINDS)
