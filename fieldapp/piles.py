"""The Piles screen: the pile schedule with progress and verdict, pile and cap forms, and the
schedule's CSV/XLSX import and export.

Everyone on the project sees the schedule and exports it; only engineers (and admins) create,
change or import (``engineer_required``). Each change is one transaction with its audit entry.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from design_core.checks import MEETS_DESIGN, NEEDS_ENGINEER
from design_core.inputs import PILE_TYPES
from flask import Blueprint, Response, abort, current_app, flash, g, jsonify, redirect, render_template, request, url_for

from fieldapp import db, jobs, saving
from fieldapp.auth import engineer_required, login_required, project_or_404
from fieldapp.forms import CapForm, ImportForm, PileForm, form_messages, options
from fieldapp.queries import audit, caps, ground, piles, projects, recheck_jobs
from fieldapp.schedule_io import COLUMN_DOC, COLUMNS, export_schedule, import_schedule

bp = Blueprint("piles", __name__)

SORT_COLUMNS = [  # (sort key, heading, numeric)
    ("mark", "Mark", False), ("cap", "Cap", False), ("type", "Type", False),
    ("diameter", "Ø mm", True), ("toe", "Toe m", True), ("compression", "Compression kN", True),
    ("ground", "Ground model", False), ("progress", "Progress", False), ("verdict", "Verdict", False),
    ("utilisation", "Worst utilisation", True),
]
VERDICT_CLASS = {MEETS_DESIGN: "meets", NEEDS_ENGINEER: "needs"}


@dataclass(frozen=True)
class Filters:
    """The filters and sort read from the query string."""

    progress: str
    verdict: str
    cap: str
    ground: str
    pile_type: str
    q: str
    sort: str
    desc: bool
    prefix: str = ""
    rig: str = ""
    bbox: str = ""
    page: int = 1

    @classmethod
    def from_args(cls, args) -> "Filters":
        """Read the filters, dropping values that are not among the choices."""
        progress = args.get("progress", "")
        verdict = args.get("verdict", "")
        pile_type = args.get("type", "")
        sort = args.get("sort", "mark")
        return cls(progress if progress in piles.PROGRESS else "",
                   verdict if verdict in piles.VERDICTS + ("none",) else "",
                   args.get("cap", "")[:40], args.get("ground", "") if args.get("ground", "").isdigit() else "",
                   pile_type if pile_type in PILE_TYPES else "",
                   args.get("q", "")[:40], sort if sort in piles.SORTS else "mark", args.get("desc") == "1",
                   args.get("prefix", "")[:40], args.get("rig", "")[:100],
                   args.get("bbox", "") if parse_bbox(args.get("bbox", "")) else "",
                   _whole(args.get("page", ""), 1))

    def query(self, **changes) -> dict:
        """Query-string arguments with some changed (for sort and page links)."""
        out = {"progress": self.progress, "verdict": self.verdict, "cap": self.cap, "ground": self.ground,
               "type": self.pile_type, "q": self.q, "prefix": self.prefix, "rig": self.rig,
               "bbox": self.bbox, "sort": self.sort, "desc": "1" if self.desc else "",
               "page": str(self.page) if self.page > 1 else ""}
        out.update(changes)
        return {k: v for k, v in out.items() if v}

    def page_query(self, limit: int) -> piles.PageQuery:
        """The query of the page these filters ask for, ``limit`` rows to a page."""
        return piles.PageQuery(
            progress=self.progress or None, verdict=self.verdict or None, cap=self.cap or None,
            ground_model_id=int(self.ground) if self.ground else None, pile_type=self.pile_type or None,
            search=self.q or None, mark_prefix=self.prefix or None, rig=self.rig or None,
            bbox=parse_bbox(self.bbox), sort=self.sort, descending=self.desc,
            offset=(self.page - 1) * limit, limit=limit)


def _whole(text: str, default: int) -> int:
    return int(text) if text.isdigit() and 0 < int(text) < 1_000_000 else default


def parse_bbox(text: str) -> tuple[float, float, float, float] | None:
    """'min_e,min_n,max_e,max_n' (m) as a tuple with min below max, or None when it is not
    four finite numbers."""
    parts = (text or "").split(",")
    if len(parts) != 4:
        return None
    try:
        e1, n1, e2, n2 = (float(x) for x in parts)
    except ValueError:
        return None
    if not all(math.isfinite(x) for x in (e1, n1, e2, n2)):
        return None
    return (min(e1, e2), min(n1, n2), max(e1, e2), max(n1, n2))


def _actor() -> str:
    return g.user.email


# Rows on one page of the Piles screen (the setting PILES_PAGE_SIZE); a schedule of up to this
# many piles shows whole on one page, as before paging. Above CAP_SELECT_MAX caps the cap filter
# is typed rather than picked from a list (a list of thousands of caps would outweigh the page).
PAGE_SIZE = 200
CAP_SELECT_MAX = 200


@bp.get("/projects/<int:project_id>/piles")
@login_required
def list_piles(project_id):
    """The schedule, one page at a time: filterable, sortable, with progress and verdict, and the
    site plan (drawn from ``plan.json``)."""
    project = project_or_404(project_id)
    conn = db.get_db()
    f = Filters.from_args(request.args)
    size = int(current_app.config.get("PILES_PAGE_SIZE", PAGE_SIZE))
    page = piles.list_page(conn, project_id, f.page_query(size))
    cap_marks = caps.marks(conn, project_id)
    pages = max(1, -(-page.total // size))
    return render_template("piles.html", project=project, piles=page.rows, page=page, pages=pages,
                           page_number=min(f.page, pages), filters=f, counts=piles.summary(conn, project_id),
                           sort_columns=SORT_COLUMNS, verdict_class=VERDICT_CLASS,
                           cap_marks=sorted(cap_marks, key=piles.natural_key) if len(cap_marks) <= CAP_SELECT_MAX else None,
                           n_caps=len(cap_marks), models=ground.list_models(conn, project_id),
                           job=recheck_jobs.latest(conn, project_id),
                           import_form=ImportForm(), columns=COLUMNS, column_doc=COLUMN_DOC)


# Progress and verdict as the plan draws them: one small number each, named in the legend.
PLAN_STATES = ("planned", "in progress", "meets design", "needs engineer")


def plan_state(progress: str, verdict: str | None) -> int:
    """The index in PLAN_STATES of a pile: its verdict once checked, else planned or in progress."""
    if verdict == NEEDS_ENGINEER:
        return 3
    if verdict == MEETS_DESIGN:
        return 2
    return 0 if progress == "planned" else 1


@bp.get("/projects/<int:project_id>/piles/plan.json")
@login_required
def plan_json(project_id):
    """Every pile's position and state for the site plan, compact: ``origin`` [e, n] (m),
    ``states`` (the legend's words), ``marks`` and ``points`` (flat [de, dn, state, ...], de and dn
    in decimetres from the origin). 20,000 piles: about 0.4 MB, 0.1 MB compressed."""
    project = project_or_404(project_id)
    rows = piles.plan_points(db.get_db(), project.id)
    e0 = math.floor(min((r[1] for r in rows), default=0.0))
    n0 = math.floor(min((r[2] for r in rows), default=0.0))
    points: list[int] = []
    for _mark, e, n, progress, verdict in rows:
        points += [round((e - e0) * 10), round((n - n0) * 10), plan_state(progress, verdict)]
    response = jsonify({"origin": [e0, n0], "states": PLAN_STATES, "marks": [r[0] for r in rows],
                        "points": points})
    response.headers["Cache-Control"] = "private, no-cache"
    return response


def _pile_form(conn, project_id: int, formdata=None, obj=None) -> PileForm:
    form = PileForm(formdata=formdata, obj=obj) if formdata is not None else PileForm(obj=obj)
    form.cap_id.choices = options([("", "— none (pile on its own) —")] + [
        (c.id, c.mark) for c in caps.list_caps(conn, project_id)])
    form.ground_model_id.choices = options([("", "— choose —")] + [
        (m.id, m.name) for m in ground.list_models(conn, project_id)])
    rules = projects.current_rules(conn, project_id).rules
    form.exposure_class.choices = options(
        (row.code, f"{row.code} — {row.description}" if row.description else row.code)
        for row in rules.exposure_table)
    return form


@bp.route("/projects/<int:project_id>/piles/new", methods=["GET", "POST"])
@engineer_required
def new_pile(project_id):
    """Add a pile to the schedule."""
    project = project_or_404(project_id)
    conn = db.get_db()
    form = _pile_form(conn, project_id)
    if request.method == "GET":
        cap = request.args.get("cap", "")
        if cap.isdigit():
            form.cap_id.data = cap
    if form.validate_on_submit() and _in_ground(conn, project_id, form, form.values()):
        values = form.values()
        try:
            with db.write(conn):
                pile_id = piles.save_pile(conn, project_id, values)
                audit.append(conn, project_id, _actor(), "pile created", values["mark"], _payload(values))
        except ValueError as exc:
            form.mark.errors.append(str(exc))
        else:
            flash(f"Pile {values['mark']} created.")
            return redirect(url_for("piles.list_piles", project_id=project_id, _anchor=f"pile-{pile_id}"))
    return render_template("piles_form.html", project=project, form=form, pile=None), 200 if (
        request.method == "GET") else 400


@bp.route("/projects/<int:project_id>/piles/<int:pile_id>/edit", methods=["GET", "POST"])
@engineer_required
def edit_pile(project_id, pile_id):
    """Change a pile's design values (progress and records are kept)."""
    project = project_or_404(project_id)
    conn = db.get_db()
    row = piles.get_pile_by_id(conn, project_id, pile_id)
    if row is None:
        abort(404)
    if request.method == "GET":
        form = _pile_form(conn, project_id, obj=row)
        form.cap_id.data = str(row.cap_id) if row.cap_id else ""
        form.ground_model_id.data = str(row.ground_model_id)
    else:
        form = _pile_form(conn, project_id, formdata=request.form)
    if form.validate_on_submit() and _in_ground(conn, project_id, form, form.values()):
        values = form.values()
        before = piles.as_values(row)
        changed = {k: [before[k], v] for k, v in values.items() if before.get(k) != v}
        try:
            with db.write(conn):
                piles.save_pile(conn, project_id, values, pile_id)
                audit.append(conn, project_id, _actor(), "pile changed", values["mark"], {"changed": changed})
                moved = saving.recheck_stored(conn, project_id, _pile_and_cap_mates(conn, project_id, pile_id),
                                                g.user, f"rechecked on the changed design of {values['mark']}")
        except ValueError as exc:
            form.mark.errors.append(str(exc))
        else:
            flash(f"Pile {values['mark']} saved." if changed else f"Pile {values['mark']}: nothing changed.")
            flash_rechecked(moved)
            return redirect(url_for("piles.list_piles", project_id=project_id, _anchor=f"pile-{pile_id}"))
    return render_template("piles_form.html", project=project, form=form, pile=row), 200 if (
        request.method == "GET") else 400


def _in_ground(conn, project_id: int, form: PileForm, values: dict) -> bool:
    """Put an error on the toe when it lies below the bottom of the chosen ground model."""
    extent = ground.extents(conn, project_id).get(values["ground_model_id"])
    if extent is None:
        form.ground_model_id.errors.append("Ground model: choose one of the project's ground models")
        return False
    problems = piles.check_in_ground(values, extent[0], extent[2])
    for name, message in problems:
        getattr(form, name).errors.append(message)
    return not problems


def _payload(values: dict) -> dict:
    return {k: v for k, v in values.items() if k != "mark"}


@bp.post("/projects/<int:project_id>/piles/import")
@engineer_required
def import_file(project_id):
    """Import a schedule file: all rows valid or nothing imported; every error listed."""
    project = project_or_404(project_id)
    conn = db.get_db()
    form = ImportForm()
    result = None
    status = 400
    if form.validate_on_submit():
        upload = form.file.data
        result = import_schedule(conn, project_id, upload.read(), upload.filename or "", _actor())
        if result.ok:
            flash(result.summary())
            flash_rechecked(result.rechecked)
            return redirect(url_for("piles.list_piles", project_id=project_id))
        status = 422
    return render_template("piles_import.html", project=project, form=form, result=result,
                           columns=COLUMNS, column_doc=COLUMN_DOC), status


@bp.get("/projects/<int:project_id>/piles/export.<fmt>")
@login_required
def export_file(project_id, fmt):
    """Download the schedule as CSV or XLSX (the import's columns)."""
    project = project_or_404(project_id)
    if fmt not in ("csv", "xlsx"):
        abort(404)
    data = export_schedule(db.get_db(), project_id, fmt)
    mimetype = ("text/csv; charset=utf-8" if fmt == "csv"
                else "application/vnd.openxmlformats-officedocument.spreadsheetml.sheet")
    safe = "".join(ch if ch.isalnum() else "-" for ch in project.name).strip("-").lower() or "project"
    return Response(data, mimetype=mimetype, headers={
        "Content-Disposition": f'attachment; filename="{safe}-schedule.{fmt}"'})


# --- caps --------------------------------------------------------------------------------------

@bp.get("/projects/<int:project_id>/caps")
@login_required
def list_caps(project_id):
    """Caps with their loads and piles."""
    project = project_or_404(project_id)
    return render_template("caps.html", project=project, caps=caps.list_caps(db.get_db(), project_id))


@bp.route("/projects/<int:project_id>/caps/new", methods=["GET", "POST"])
@engineer_required
def new_cap(project_id):
    """Add a cap with its loads."""
    project = project_or_404(project_id)
    conn = db.get_db()
    form = CapForm()
    if form.validate_on_submit():
        try:
            with db.write(conn):
                caps.save_cap(conn, project_id, form.mark.data, form.loads())
                audit.append(conn, project_id, _actor(), "cap created", form.mark.data.strip(), form.loads())
        except ValueError as exc:
            form.mark.errors.append(str(exc))
        else:
            flash(f"Cap {form.mark.data.strip()} created.")
            return redirect(url_for("piles.list_caps", project_id=project_id))
    return render_template("caps_form.html", project=project, form=form, cap=None), 200 if (
        request.method == "GET") else 400


@bp.route("/projects/<int:project_id>/caps/<int:cap_id>/edit", methods=["GET", "POST"])
@engineer_required
def edit_cap(project_id, cap_id):
    """Change a cap's mark or loads."""
    project = project_or_404(project_id)
    conn = db.get_db()
    cap = caps.get_cap(conn, project_id, cap_id)
    if cap is None:
        abort(404)
    form = CapForm(obj=cap) if request.method == "GET" else CapForm()
    if form.validate_on_submit():
        try:
            with db.write(conn):
                caps.save_cap(conn, project_id, form.mark.data, form.loads(), cap_id)
                audit.append(conn, project_id, _actor(), "cap changed", form.mark.data.strip(),
                             {"before": {k: getattr(cap, k) for k in caps.CAP_LOAD_FIELDS}, "after": form.loads()})
                moved = saving.recheck_stored(
                    conn, project_id, piles.list_piles(conn, project_id, cap=form.mark.data.strip()),
                    g.user, f"rechecked on the changed loads of cap {form.mark.data.strip()}")
        except ValueError as exc:
            form.mark.errors.append(str(exc))
        else:
            flash(f"Cap {form.mark.data.strip()} saved.")
            flash_rechecked(moved)
            return redirect(url_for("piles.list_caps", project_id=project_id))
    return render_template("caps_form.html", project=project, form=form, cap=cap), 200 if (
        request.method == "GET") else 400


@bp.app_template_filter("form_messages")
def _form_messages_filter(form):
    return form_messages(form)


def _pile_and_cap_mates(conn, project_id: int, pile_id: int) -> list:
    """The pile as now stored and, when it stands in a cap, the cap's other piles."""
    row = piles.get_pile_by_id(conn, project_id, pile_id)
    if row.cap_mark:
        return piles.list_piles(conn, project_id, cap_id=row.cap_id)
    return [row]


def flash_rechecked(marks: list[str]) -> None:
    """Say which recorded piles changed status on the recheck that followed a change (or, for a
    recheck sent to the background, ``jobs.Queued``, that it runs and where to follow it)."""
    if isinstance(marks, jobs.Queued):
        flash(f"Rechecking {marks.total} recorded piles in the background (job {marks.job_id}); "
              "the Piles screen shows its progress. Piles whose status changes get a new version to review.")
        return
    if marks:
        flash(f"Rechecked: {len(marks)} recorded pile(s) changed status and have a new version to "
              f"review: {', '.join(marks[:20])}{' ...' if len(marks) > 20 else ''}.")
