"""The Piles screen: the pile schedule with progress and verdict, pile and cap forms, and the
schedule's CSV/XLSX import and export.

Everyone on the project sees the schedule and exports it; only engineers (and admins) create,
change or import (``engineer_required``). Each change is one transaction with its audit entry.
"""

from __future__ import annotations

from dataclasses import dataclass

from design_core.checks import MEETS_DESIGN, NEEDS_ENGINEER
from design_core.inputs import PILE_TYPES
from flask import Blueprint, Response, abort, flash, g, redirect, render_template, request, url_for

from fieldapp import db, saving
from fieldapp.auth import engineer_required, login_required, project_or_404
from fieldapp.forms import CapForm, ImportForm, PileForm, form_messages, options
from fieldapp.queries import audit, caps, ground, piles, projects
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
                   args.get("q", "")[:40], sort if sort in piles.SORTS else "mark", args.get("desc") == "1")

    def query(self, **changes) -> dict:
        """Query-string arguments with some changed (for sort links)."""
        out = {"progress": self.progress, "verdict": self.verdict, "cap": self.cap, "ground": self.ground,
               "type": self.pile_type, "q": self.q, "sort": self.sort, "desc": "1" if self.desc else ""}
        out.update(changes)
        return {k: v for k, v in out.items() if v}


def _actor() -> str:
    return g.user.email


@bp.get("/projects/<int:project_id>/piles")
@login_required
def list_piles(project_id):
    """The schedule, filterable and sortable, with progress and verdict."""
    project = project_or_404(project_id)
    conn = db.get_db()
    f = Filters.from_args(request.args)
    rows = piles.list_piles(conn, project_id, progress=f.progress or None, verdict=f.verdict or None,
                            cap=f.cap or None, ground_model_id=int(f.ground) if f.ground else None,
                            pile_type=f.pile_type or None, search=f.q or None, sort=f.sort,
                            descending=f.desc)
    everything = piles.list_piles(conn, project_id)
    counts = {
        "total": len(everything),
        "progress": {p: sum(1 for r in everything if r.progress == p) for p in piles.PROGRESS},
        "meets": sum(1 for r in everything if r.verdict == MEETS_DESIGN),
        "needs": sum(1 for r in everything if r.verdict == NEEDS_ENGINEER),
    }
    return render_template("piles.html", project=project, piles=rows, filters=f, counts=counts,
                           sort_columns=SORT_COLUMNS, verdict_class=VERDICT_CLASS,
                           caps=caps.list_caps(conn, project_id), models=ground.list_models(conn, project_id),
                           import_form=ImportForm(), columns=COLUMNS, column_doc=COLUMN_DOC)


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
    """Say which recorded piles changed status on the recheck that followed a change."""
    if marks:
        flash(f"Rechecked: {len(marks)} recorded pile(s) changed status and have a new version to "
              f"review: {', '.join(marks[:20])}{' ...' if len(marks) > 20 else ''}.")
