"""The Rules screen: every default of the recheck with its value, unit and source, and the
engineer's form that saves a new version of the project's rules.

Rule sets are versioned: a change never edits a stored version, it adds the next one (a signed
record names the version it was checked with) and an audit entry "rules changed".
"""

from __future__ import annotations

from design_core import Rules
from flask import Blueprint, current_app, flash, g, redirect, render_template, request, url_for

from fieldapp import db, jobs
from fieldapp.auth import engineer_required, login_required, project_or_404
from fieldapp.forms import RULE_NAMES, RulesForm
from fieldapp.piles import flash_rechecked
from fieldapp.queries import audit, piles, projects

bp = Blueprint("rules", __name__)

BLANK_EXPOSURE_ROWS = 2


def display_value(value) -> str:
    """A rule's value for the screen: numbers without noise, text as it is."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return str(value)
    return f"{value:,.6g}" if abs(value) >= 1000 else f"{value:.6g}"


@bp.get("/projects/<int:project_id>/rules")
@login_required
def show(project_id):
    """Every rule with its value, unit and where the number comes from."""
    project = project_or_404(project_id)
    conn = db.get_db()
    rule_set = projects.current_rules(conn, project_id)
    docs = [d for d in rule_set.rules.describe() if d.name != "exposure_table"]
    exposure_doc = next(d for d in rule_set.rules.describe() if d.name == "exposure_table")
    min_cover = {row.code: rule_set.rules.min_cover_mm(row.code) for row in rule_set.rules.exposure_table}
    return render_template("rules.html", project=project, rule_set=rule_set, docs=docs,
                           exposure_doc=exposure_doc, min_cover=min_cover, display=display_value,
                           used=piles.exposure_classes_used(conn, project_id))


def _initial_form(rules) -> RulesForm:
    data = {name: getattr(rules, name) for name in RULE_NAMES}
    data["exposure"] = [{"code": r.code, "cmin_dur_mm": r.cmin_dur_mm, "min_strength_mpa": r.min_strength_mpa,
                         "description": r.description} for r in rules.exposure_table]
    form = RulesForm(data=data)
    for _ in range(BLANK_EXPOSURE_ROWS):
        form.exposure.append_entry()
    return form


@bp.route("/projects/<int:project_id>/rules/edit", methods=["GET", "POST"])
@engineer_required
def edit(project_id):
    """Change rules: each value within its allowed range; saves the next version."""
    project = project_or_404(project_id)
    conn = db.get_db()
    current = projects.current_rules(conn, project_id)
    form = _initial_form(current.rules) if request.method == "GET" else RulesForm()
    if request.method == "POST" and form.validate_on_submit():
        new_rules = form.to_rules()
        old, new = current.rules.to_dict(), new_rules.to_dict()
        changed = {k: [old[k], new[k]] for k in new if old.get(k) != new[k]}
        used = piles.exposure_classes_used(conn, project_id)
        missing = sorted(set(used) - {row.code for row in new_rules.exposure_table})
        if missing:
            form.exposure.errors.append(
                "Exposure table: class(es) " + ", ".join(f"{c} ({used[c]} piles)" for c in missing)
                + " are used by piles in the schedule; change those piles first")
        elif not changed:
            flash(f"Nothing changed: the rules stay at version {current.version}.")
            return redirect(url_for("rules.show", project_id=project_id))
        else:
            note = form.note.data.strip()
            with db.write(conn):
                version = projects.save_rules(conn, project_id, new_rules, note, g.user.id)
                audit.append(conn, project_id, g.user.email, "rules changed", f"version {version}",
                             {"version": version, "from_version": current.version, "note": note,
                              "changed": changed})
                moved = jobs.recheck_upstream(conn, current_app._get_current_object(), project_id,
                                              piles.list_piles(conn, project_id), g.user,
                                              f"rechecked with rules version {version}")
            flash(f"Rules saved as version {version}.")
            flash_rechecked(moved)
            return redirect(url_for("rules.show", project_id=project_id))
    status = 400 if request.method == "POST" else 200
    return render_template("rules_form.html", project=project, form=form, current=current,
                           metas={name: _meta(name) for name in RULE_NAMES}), status


def _meta(name: str) -> dict:
    return Rules.field_meta(name)
