"""What the Review screen and the certification record show, gathered from the data layer and
the recheck's result objects. No SQL here (``fieldapp.queries``) and no engineering (the
numbers and curves come from ``design_core`` through ``fieldapp.saving`` and
``fieldapp.rig_view``).
"""

from __future__ import annotations

import math
import sqlite3
from dataclasses import dataclass, field
from typing import Any

from design_core.group import group_shares
from design_core.section import section_interaction
from fieldapp import capacity_figures, drawings, plan_figures, rig_view
from fieldapp.pile_inputs import load_inputs
from fieldapp.saving import recheck_pile
from fieldapp.queries import photos as photos_q
from fieldapp.queries import piles as piles_q
from fieldapp.queries import records
from fieldapp.queries import review as review_q


@dataclass
class PileSheet:
    """One pile as reviewed and certified: status, current record, sign-offs, photos, pictures."""

    status: review_q.PileStatus
    pile: Any                                   # piles_q.PileRow
    current: records.RecordVersion | None
    signoffs: list[review_q.SignOff]
    amendments: list[review_q.Amendment]
    photos: list[photos_q.Photo]
    figures: dict[str, drawings.Figure] = field(default_factory=dict)
    figure_error: str = ""

    @property
    def short_checks(self) -> list[dict]:
        """The checks of the current version that are short or not checked, worst first."""
        if self.current is None:
            return []
        return [c for c in self.current.checks if c.get("ok") is not True]

    @property
    def signoff(self) -> review_q.SignOff | None:
        """The sign-off of the current version, or None."""
        if self.current is None:
            return None
        return next((s for s in self.signoffs if s.version == self.current.version), None)


def _finite(value: Any) -> float | None:
    try:
        f = float(value)
    except (TypeError, ValueError):
        return None
    return f if math.isfinite(f) else None


def _shares_by_mark(details: dict[str, Any], group: Any) -> dict[str, float]:
    """The recheck's new group shares as {mark: kN} (array aligned with ``group_marks``)."""
    shares = details.get("shares")
    if shares is None or group is None:
        return {}
    if isinstance(shares, dict):
        return {str(k): v for k, v in ((k, _finite(v)) for k, v in shares.items()) if v is not None}
    marks = list(details.get("group_marks") or [p.mark for p in group.piles])
    values = [_finite(v) for v in shares]
    if len(values) != len(marks):
        return {}
    return {m: v for m, v in zip(marks, values, strict=True) if v is not None}


def pile_figures(conn: sqlite3.Connection, project_id: int, pile, record: dict[str, Any]) -> dict[str, drawings.Figure]:
    """The three pictures of one pile for the Review screen, from a recheck of its record on
    today's inputs (``capacity``, ``interaction``, ``plan``). The certification record does not
    use them: its sheets are drawn from the stored version alone (``fieldapp.record.snapshot``).
    Raises ValueError when the recheck cannot run."""
    inputs = load_inputs(conn, project_id, pile, record)
    verdict = recheck_pile(conn, project_id, pile, record, inputs)
    details = verdict.details or {}
    design = inputs.design

    # 1. capacity: the recheck's curve and the load on the basis it compared (the check's value)
    curve = details.get("curve")
    if curve is None:
        curve = rig_view.tablet_curve(design, inputs.ground, inputs.rules, record)
    axial = verdict.check("axial_compression")
    load = _finite(axial.value) if axial is not None and axial.value else None
    if load is None and design.compression > 0:
        load = design.compression
    # the recheck's curve was built on the same as-built pile and ground met: read from it
    required = rig_view.required_toe_for(design, record, inputs.ground, inputs.rules,
                                         details.get("curve")).level_m
    asbuilt_toe = None
    if record.get("platform_level") is not None and record.get("measured_depth") is not None:
        asbuilt_toe = record["platform_level"] - record["measured_depth"]
    capacity = capacity_figures.capacity_figure(curve, load, required, asbuilt_toe, design.toe_level)

    # 2. interaction: as-built section from the recheck, the design section for comparison
    design_curve = None
    if design.n_bars and design.bar_mm:
        try:
            design_curve = section_interaction(design.diameter, design.cover_mm, design.n_bars, design.bar_mm,
                                               design.fc_mpa, design.fy_mpa)
        except ValueError:
            design_curve = None
    interaction = capacity_figures.interaction_figure(details.get("interaction"), design_curve,
                                              details.get("load_point"), details.get("structural_phi") or 1.0)

    # 3. plan: the cap with the new shares (and the shares on the design positions)
    group = inputs.group
    if group is not None:
        new = _shares_by_mark(details, group)
        try:
            lp = group.load_point
            if lp is None:
                xs = [p.design_xy[0] for p in group.piles]
                ys = [p.design_xy[1] for p in group.piles]
                lp = (sum(xs) / len(xs), sum(ys) / len(ys))
            values = group_shares([p.design_xy for p in group.piles], group.n, group.mx, group.my, lp)
            old = {p.mark: float(v) for p, v in zip(group.piles, values, strict=True)}
        except ValueError:
            old = {}
        own = (record.get("easting"), record.get("northing"))
        plan_piles = []
        for p in group.piles:
            xy = p.asbuilt_xy
            if p.mark == pile.mark:
                xy = own if None not in own else None
            plan_piles.append(plan_figures.PlanPile(p.mark, p.design_xy, xy, design.diameter, new.get(p.mark),
                                                old.get(p.mark), highlight=(p.mark == pile.mark)))
        plan = plan_figures.cap_plan_figure(group.mark, plan_piles)
    else:
        asbuilt_xy = None
        if record.get("easting") is not None and record.get("northing") is not None:
            asbuilt_xy = (record["easting"], record["northing"])
        plan = plan_figures.cap_plan_figure("", [plan_figures.PlanPile(
            pile.mark, (design.easting, design.northing), asbuilt_xy, design.diameter,
            None, None, highlight=True)])
    return {"capacity": capacity, "interaction": interaction, "plan": plan}


def pile_sheet(conn: sqlite3.Connection, project_id: int, status: review_q.PileStatus,
               with_figures: bool = True) -> PileSheet:
    """Everything shown for one pile; pictures only when asked (they need a recheck)."""
    pile = piles_q.get_pile_by_id(conn, project_id, status.id)
    current = records.current(conn, status.id)
    sheet = PileSheet(status, pile, current, review_q.signoffs_for_pile(conn, status.id),
                      review_q.amendments_for_pile(conn, status.id), photos_q.for_pile(conn, status.id))
    if with_figures and current is not None:
        try:
            sheet.figures = pile_figures(conn, project_id, pile, current.record)
        except (ValueError, LookupError) as exc:
            sheet.figure_error = f"the pictures cannot be drawn: {exc}"
    return sheet


def site_plan(statuses: list[review_q.PileStatus], positions: dict[int, tuple[float, float]],
              width: float = 760, height: float = 520) -> drawings.Figure:
    """Every pile coloured by status, with deviation arrows (``positions``: {pile id: as-built
    (easting, northing) of its current record})."""
    plan = [plan_figures.PlanPile(s.mark, (s.easting_m, s.northing_m), positions.get(s.id), s.diameter_mm / 1000.0,
                                  status=s.status) for s in statuses]
    return plan_figures.site_plan_figure(plan, width, height)


@dataclass(frozen=True)
class ScheduleRow:
    """One line of the as-built schedule: design against as built, verdict, disposition, signer.

    As-built values are those recorded (the toe is platform level less measured depth, as the
    record defines it); the position deviation is the value of the ``position`` check.
    """

    mark: str
    cap: str
    progress: str
    version: int
    design_toe_m: float
    asbuilt_toe_m: float | None
    design_diameter_mm: float
    asbuilt_diameter_mm: float | None
    deviation_mm: float | None
    design_cover_mm: float
    asbuilt_cover_mm: float | None
    verdict: str
    worst_utilisation: float | None
    disposition: str
    signer: str
    signed_at: str
    status: str

    CSV_HEADER = ("mark", "cap", "progress", "version", "design_toe_m", "asbuilt_toe_m",
                  "design_diameter_mm", "asbuilt_diameter_mm", "deviation_mm", "design_cover_mm",
                  "asbuilt_cover_mm", "verdict", "worst_utilisation", "disposition", "signer", "signed_at")

    def values(self) -> tuple:
        """The row's values in CSV_HEADER order."""
        return tuple(getattr(self, name) for name in self.CSV_HEADER)


def schedule_row(status: review_q.PileStatus, current: records.RecordVersion | None) -> ScheduleRow:
    """The schedule line of one pile from its status and current record."""
    rec = current.record if current else {}
    toe = None
    if rec.get("platform_level") is not None and rec.get("measured_depth") is not None:
        toe = round(rec["platform_level"] - rec["measured_depth"], 3)
    deviation = None
    if current is not None:
        position = next((c for c in current.checks if c.get("code") == "position"), None)
        deviation = _finite(position.get("value")) if position else None
    signed = status.signed
    return ScheduleRow(
        status.mark, status.cap or "", status.progress, status.current_version, status.toe_level_m, toe,
        status.diameter_mm, rec.get("diameter_mm"), deviation, status.cover_mm, rec.get("cover_mm"),
        (current.verdict if current else "not recorded"), status.worst_utilisation,
        (status.disposition if signed else "unsigned") if current else "",
        (status.signer or "") if signed else "", (status.signed_at or "") if signed else "", status.status)


def schedule(conn: sqlite3.Connection, project_id: int) -> list[ScheduleRow]:
    """The as-built schedule of every pile, in mark order."""
    currents = records.current_for_project(conn, project_id)
    return [schedule_row(s, currents.get(s.id)) for s in review_q.pile_statuses(conn, project_id)]
