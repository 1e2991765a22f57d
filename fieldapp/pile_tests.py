"""The test register screens: tests after installation per pile and per project.

Routes
------
* ``GET  /projects/<id>/tests`` (``pile_tests.project_register``): every test of the project and,
  per pile type and family of test, how many piles the rules ask for, how many are done, due
  and failed. Members.
* ``GET  /projects/<id>/piles/<mark>/tests`` (``pile_tests.pile_register``): the pile's tests and
  the form to add one (recorders). Members.
* ``POST /projects/<id>/piles/<mark>/tests`` (``pile_tests.add``): add a test from the form, with
  its result file (a PDF or data file; for a static test the load test CSV, read whole by
  ``insitu_io.parse_load_test``). Recorders (inspector, engineer, admin); a bad form or file is
  a 422 naming the field (and row and column) and nothing is stored.
* ``GET  /projects/<id>/tests/<test_id>`` (``pile_tests.sheet``): one test; for a static test
  the load test sheet with its plot, every interpretation and the measured capacity against
  the recheck's ultimate for the pile (ratio, never fed back). Members.
* ``GET  /projects/<id>/tests/<test_id>/file`` (``pile_tests.test_file``): the kept file. Members.
* ``GET  /api/v1/projects/<id>/piles/<mark>/tests`` (``pile_tests.api_list``): the pile's tests
  as JSON. Members.

How a test feeds the verdict is ``fieldapp.pile_test_register`` (``add_test``).
"""

from __future__ import annotations

import math
import re

from flask import (
    Blueprint, abort, current_app, flash, g, jsonify, redirect, render_template, request, send_file,
    url_for,
)

from design_core.loadtest import INTEGRITY_RATINGS, CslZone
from fieldapp import db, drawings, loadtest_figures, saving
from fieldapp import pile_test_register as reg
from fieldapp.auth import login_required, project_or_404, recorder_required
from fieldapp.insitu_io import InsituFileError, parse_load_test
from fieldapp.pile_inputs import asbuilt_from_record
from fieldapp.queries import pile_tests as tests_q
from fieldapp.queries import piles as piles_q
from fieldapp.queries import projects, records
from fieldapp.record_input import unicode_problem

bp = Blueprint("pile_tests", __name__)

DATE = re.compile(r"^\d{4}-\d{2}-\d{2}$")
TEXT_MAX = 200
DESCRIPTION_MAX = 2000
CSL_MAX_ZONES = 200


def _pile_or_404(conn, project_id: int, mark: str):
    pile = piles_q.get_pile(conn, project_id, mark)
    if pile is None:
        abort(404)
    return pile


# --- reading the form -----------------------------------------------------------------------

def _text(form, name: str, errors: dict, limit: int, required: bool = True) -> str:
    value = (form.get(name) or "").strip()
    if required and not value:
        errors[name] = "is required"
    elif len(value) > limit:
        errors[name] = f"must be at most {limit} characters, got {len(value)}"
    elif unicode_problem(value):
        errors[name] = unicode_problem(value)
    return value


def _num(form, name: str, errors: dict, lo: float, hi: float, required: bool = False) -> float | None:
    text = (form.get(name) or "").strip()
    if not text:
        if required:
            errors[name] = f"is required ({lo:g} to {hi:g})"
        return None
    try:
        value = float(text)
    except ValueError:
        errors[name] = f"{text[:30]!r} is not a number"
        return None
    if not math.isfinite(value) or not lo <= value <= hi:
        errors[name] = f"must be between {lo:g} and {hi:g}, got {text[:30]}"
        return None
    return value


def _csl_zones(text: str, errors: dict) -> list[CslZone]:
    """CSL zones, one a line: pair, from depth m, to depth m, arrival time increase %, energy
    reduction dB."""
    zones = []
    for n, line in enumerate((text or "").splitlines(), start=1):
        if not line.strip():
            continue
        cells = [c.strip() for c in line.split(",")]
        if len(cells) != 5:
            errors["csl"] = (f"line {n}: give pair, from depth m, to depth m, arrival time "
                             "increase %, energy reduction dB (5 values)")
            return []
        try:
            zones.append(CslZone(cells[0], *(float(c) for c in cells[1:])))
        except ValueError as exc:
            errors["csl"] = f"line {n}: {exc}"
            return []
        if len(zones) > CSL_MAX_ZONES:
            errors["csl"] = f"at most {CSL_MAX_ZONES} zones"
            return []
    return zones


def _recheck_ultimate(conn, project_id: int, pile) -> float | None:
    """The recheck's ultimate (kN) at the as-built toe (the design toe before any record)."""
    current = records.current(conn, pile.id)
    record = current.record if current is not None else {}
    try:
        verdict = saving.recheck_pile(conn, project_id, pile, record)
        toe = asbuilt_from_record(record).toe_level if record else None
    except ValueError:
        return None
    return reg.recheck_ultimate_kn(verdict, toe if toe is not None else pile.toe_level_m)


def read_test(conn, project_id: int, pile, form, files, rules):
    """(kind, tested_on, tested_by, result, check, file) from the form, or raise
    ``FormErrors`` naming every field that is wrong. Nothing is stored here."""
    errors: dict[str, str] = {}
    kind = form.get("kind") or ""
    if kind not in reg.KINDS:
        errors["kind"] = f"must be one of {', '.join(reg.KINDS)}"
    tested_on = _text(form, "tested_on", errors, 10)
    if tested_on and not DATE.match(tested_on):
        errors["tested_on"] = "must be a date as YYYY-MM-DD"
    tested_by = _text(form, "tested_by", errors, TEXT_MAX)
    upload = files.get("file")
    data = upload.read() if upload and upload.filename else None
    file = (data, upload.filename) if data else None
    if file is not None:
        try:
            reg.check_file(*file)
        except reg.TestFileRefused as exc:
            errors["file"] = str(exc)
    if errors.get("kind"):
        raise FormErrors(errors)
    fam = reg.family(kind)
    result = check = None
    if fam == "integrity":
        rating = form.get("rating") or None
        if rating is not None and rating not in INTEGRITY_RATINGS:
            errors["rating"] = f"must be one of {', '.join(INTEGRITY_RATINGS)}"
        depth = _num(form, "anomaly_depth_m", errors, 0.0, 200.0)
        description = _text(form, "description", errors, DESCRIPTION_MAX, required=False)
        zones = _csl_zones(form.get("csl", ""), errors)
        if kind == "crosshole" and not zones and not rating and "csl" not in errors:
            errors["csl"] = "give the zones per tube pair (or the tester's rating)"
        elif not rating and not zones and "rating" not in errors and "csl" not in errors:
            errors["rating"] = "is required"
        if rating in ("anomaly", "defect") and depth is None and not zones:
            errors["anomaly_depth_m"] = "is required for an anomaly or a defect"
        if not errors:
            result, check = reg.integrity_result(rating, zones, depth, description, rules)
    elif fam == "dynamic":
        resistance = _num(form, "resistance_kn", errors, 0.0, 1e6, required=True)
        set_mm = _num(form, "set_mm", errors, 0.0, 500.0, required=True)
        comp = _num(form, "compression_mpa", errors, 0.0, 2000.0)
        tens = _num(form, "tension_mpa", errors, 0.0, 2000.0)
        material = form.get("material") or ""
        if material not in reg.MATERIALS:
            errors["material"] = f"must be one of {', '.join(reg.MATERIALS)}"
        required = _num(form, "required_kn", errors, 0.0, 1e6)
        if not errors:
            result, check = reg.dynamic_result(resistance, set_mm, comp, tens, material, pile.fc_mpa,
                                               pile.fy_mpa, required, rules)
    else:
        required = _num(form, "required_kn", errors, 0.0, 1e6)
        limit = _num(form, "settlement_limit_mm", errors, 0.0, 2000.0)
        length = _num(form, "length_m", errors, 0.5, 200.0) or max(pile.length_m, 0.5)
        e_mpa = _num(form, "e_mpa", errors, 1_000.0, 250_000.0, required=True)
        if data is None:
            errors["file"] = "the load test CSV (load_kn, settlement_mm, optional time, hold, cycle) is required"
        elif "file" not in errors:
            try:
                record = parse_load_test(data)
            except InsituFileError as exc:
                errors["file"] = str(exc)
        if not errors:
            d = pile.diameter_mm / 1000.0
            try:
                result, check = reg.static_result(
                    record, kind, length, math.pi * d * d / 4.0, e_mpa, d, required, limit,
                    _recheck_ultimate(conn, project_id, pile), rules)
            except ValueError as exc:
                errors["file"] = f"the test cannot be interpreted: {exc}"
    if errors:
        raise FormErrors(errors)
    return kind, tested_on, tested_by, result, check, file


class FormErrors(ValueError):
    """The form's errors by field."""

    def __init__(self, errors: dict[str, str]):
        super().__init__("; ".join(f"{k}: {v}" for k, v in errors.items()))
        self.errors = errors


# --- pages ------------------------------------------------------------------------------------

@bp.get("/projects/<int:project_id>/tests")
@login_required
def project_register(project_id: int):
    """Every test of the project and the counts needed, done, due and failed per pile type."""
    project = project_or_404(project_id)
    conn = db.get_db()
    rules = projects.current_rules(conn, project.id).rules
    tests = tests_q.for_project(conn, project.id)
    counts = reg.frequency(rules, tests_q.pile_counts_by_type(conn, project.id), tests)
    return render_template("pile_tests.html", project=project, tests=tests, counts=counts,
                           kinds=reg.KINDS)


def _pile_page(project, pile, errors=None, form=None, code: int = 200):
    conn = db.get_db()
    return render_template("pile_tests_pile.html", project=project, pile=pile,
                           tests=tests_q.for_pile(conn, pile.id), kinds=reg.KINDS,
                           ratings=INTEGRITY_RATINGS, materials=reg.MATERIALS,
                           errors=errors or {}, form=form or {}), code


@bp.get("/projects/<int:project_id>/piles/<mark>/tests")
@login_required
def pile_register(project_id: int, mark: str):
    """The pile's tests and the form to add one."""
    project = project_or_404(project_id)
    return _pile_page(project, _pile_or_404(db.get_db(), project.id, mark))


@bp.post("/projects/<int:project_id>/piles/<mark>/tests")
@recorder_required
def add(project_id: int, mark: str):
    """Add a test from the form; 422 naming the fields when anything is wrong (nothing stored)."""
    project = project_or_404(project_id)
    conn = db.get_db()
    pile = _pile_or_404(conn, project.id, mark)
    rules = projects.current_rules(conn, project.id).rules
    try:
        kind, tested_on, tested_by, result, check, file = read_test(
            conn, project.id, pile, request.form, request.files, rules)
        test = reg.add_test(conn, current_app.config["DATA_DIR"], project.id, pile, g.user, kind,
                            tested_on, tested_by, result, check, file)
    except FormErrors as exc:
        return _pile_page(project, pile, exc.errors, request.form, 422)
    except reg.TestFileRefused as exc:
        return _pile_page(project, pile, {"file": str(exc)}, request.form, 422)
    flash(f"{reg.KINDS[kind][0]} of {tested_on} added to pile {mark}: {check['reason']}")
    return redirect(url_for("pile_tests.sheet", project_id=project.id, test_id=test.id), 303)


@bp.get("/projects/<int:project_id>/tests/<int:test_id>")
@login_required
def sheet(project_id: int, test_id: int):
    """One test: its result; for a static test the load test sheet with its plot."""
    project = project_or_404(project_id)
    conn = db.get_db()
    test = tests_q.get(conn, project.id, test_id)
    if test is None:
        abort(404)
    svg = None
    if reg.family(test.kind) == "static":
        rules = projects.current_rules(conn, project.id).rules
        svg = drawings.to_svg(loadtest_figures.load_test_figure(test.result, rules))
    return render_template("pile_tests_sheet.html", project=project, test=test, svg=svg,
                           kinds=reg.KINDS, family=reg.family(test.kind))


@bp.get("/projects/<int:project_id>/tests/<int:test_id>/file")
@login_required
def test_file(project_id: int, test_id: int):
    """The kept result file."""
    project = project_or_404(project_id)
    test = tests_q.get(db.get_db(), project.id, test_id)
    if test is None or not test.file_sha256:
        abort(404)
    path = reg.file_path(current_app.config["DATA_DIR"], test.file_sha256, test.file_ext)
    if not path.exists():
        abort(404)
    mime = "application/pdf" if test.file_ext == "pdf" else "text/csv"
    return send_file(path, mimetype=mime, as_attachment=True,
                     download_name=f"{test.mark}-{test.kind}-{test.tested_on}.{test.file_ext}")


@bp.get("/api/v1/projects/<int:project_id>/piles/<mark>/tests")
@login_required
def api_list(project_id: int, mark: str):
    """The pile's tests as JSON."""
    project = project_or_404(project_id)
    conn = db.get_db()
    pile = _pile_or_404(conn, project.id, mark)
    return jsonify({"pile": pile.mark, "tests": [t.to_dict() for t in tests_q.for_pile(conn, pile.id)]})
