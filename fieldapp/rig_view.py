"""What the At the rig page, the tablet's offline bundle and the preview show for a pile.

One builder for each thing:

``pile_entry(...)``
    The dict of one pile that the page (``rig_data``) and the bundle (``build_bundle``) both
    carry: design values, newest record and its result, version, verdict, load, curve, required
    toe. ``rig_data_from_bundle`` puts one pile's page data back together from a bundle (the
    tablet's ``rigData`` in static/ does the same), equal to ``rig_data``.
``tablet_curve(design, ground, rules, record=None)``
    The capacity curve the tablet caches (every ``CURVE_STEP_M`` from just below the top level
    to the bottom of the ground model), the one curve builder the app calls for it.
``required_toe_for(design, record, ground, rules)``
    The required toe everywhere in the app (page, bundle, preview): the highest toe level where
    the design resistance of the pile as built (as-built diameter and cut-off when recorded, the
    ground met when strata are logged) first reaches the demand the compression check uses.
``preview(conn, project_id, pile_row, raw)``
    The dry-run recheck of a record body: what a save would answer, nothing stored.

Bundle format (``format`` 1): ``project``, ``rules_version``, ``rules``, ``limits``,
``ground_models`` (ground_top, ground_bottom, layers), ``curves`` (toe_levels, design) and
``piles`` (each a ``pile_entry`` whose ``curve`` is a key of ``curves`` and ``ground`` a key of
``ground_models``, with ``ground_model`` and ``worst_utilisation``).
"""

from __future__ import annotations

import math
import sqlite3
from dataclasses import replace
from functools import lru_cache
from typing import Any


from design_core import Rules
from design_core.axial import CapacityCurve, pile_capacity_curve
from design_core.ground import GroundModel, ground_from_strata
from design_core.inputs import PileDesign
from design_core.verdict import RequiredToe, required_toe
from fieldapp import saving
from fieldapp.pile_inputs import asbuilt_from_record, load_ground, pile_design
from fieldapp.queries import piles as piles_q
from fieldapp.queries import projects, records

CURVE_STEP_M = 0.1


# --------------------------------------------------------------------------------------------
# Values the page shows beside the fields
# --------------------------------------------------------------------------------------------

def design_dict(design: PileDesign) -> dict[str, Any]:
    """The design values the rig page shows beside each as-built field (record key names)."""
    return {
        "mark": design.mark, "pile_type": design.pile_type, "cap": design.cap,
        "diameter_mm": round(design.diameter * 1000.0, 3), "cutoff_level": design.cutoff_level,
        "toe_level": design.toe_level, "easting": design.easting, "northing": design.northing,
        "compression_kn": design.compression, "tension_kn": design.tension,
        "shear_kn": design.shear, "moment_knm": design.moment, "n_bars": design.n_bars,
        "bar_mm": design.bar_mm, "cage_length": design.cage_length,
        "concrete_mpa": design.fc_mpa, "exposure_class": design.exposure_class,
        "cover_mm": design.cover_mm, "inclination": 0.0,
        # plan area of the design section (m2): the recheck's theoretical concrete volume is
        # this times the length from the toe to the casting level (or cut-off)
        "area_m2": math.pi * design.diameter ** 2 / 4.0,
        "permanent_casing": bool(getattr(design, "permanent_casing", False)),
    }


def limits_dict(rules: Rules) -> dict[str, Any]:
    """The rules' limits the live checks compare against, with the cover table per class."""
    return {
        "base_debris_mm": rules.base_debris_mm,
        "cage_tolerance_m": rules.cage_tolerance_m,
        "position_tolerance_mm": rules.position_tolerance_mm,
        "inclination_tolerance": rules.inclination_tolerance,
        "cutoff_tolerance_mm": rules.cutoff_tolerance_mm,
        "toe_tolerance_mm": rules.toe_tolerance_mm,
        "diameter_tolerance_mm": rules.diameter_tolerance_mm,
        "volume_ratio_min": rules.volume_ratio_min,
        "volume_ratio_max": rules.volume_ratio_max,
        "batch_to_discharge_min": rules.batch_to_discharge_min,
        "min_cover_mm": {row.code: rules.min_cover_mm(row.code) for row in rules.exposure_table},
        "min_cover_cased_mm": {row.code: rules.min_cover_mm(row.code, cast_against_soil=False)
                               for row in rules.exposure_table},
        "min_strength_mpa": {row.code: row.min_strength_mpa for row in rules.exposure_table},
    }


def ground_dict(ground: GroundModel) -> dict[str, Any]:
    """The ground model's extent and layers (for picking the layer a stratum matches)."""
    return {"ground_top": ground.top, "ground_bottom": ground.bottom,
            "layers": [{"index": i, "material": layer.material, "top": layer.top, "bottom": layer.bottom}
                       for i, layer in enumerate(ground.layers)]}


# --------------------------------------------------------------------------------------------
# The curve and the required toe
# --------------------------------------------------------------------------------------------

def _ground_met(ground: GroundModel, record: dict[str, Any] | None) -> GroundModel:
    """The ground under the pile: rebuilt from the strata met when they were logged with a
    platform level (down to the bottom of the model), else the ground model."""
    record = record or {}
    if record.get("strata") and record.get("platform_level") is not None:
        strata = asbuilt_from_record(record).strata
        ground, _ = ground_from_strata(ground, record["platform_level"], strata, ground.bottom)
    return ground


def _geometry(design: PileDesign, record: dict[str, Any] | None) -> tuple[float, float]:
    """(diameter m, top level m) of the pile: as recorded, else as designed."""
    record = record or {}
    top = record.get("cutoff_level", design.cutoff_level)
    diameter = record["diameter_mm"] / 1000.0 if record.get("diameter_mm") else design.diameter
    return diameter, top


def tablet_curve(design: PileDesign, ground: GroundModel, rules: Rules,
                 record: dict[str, Any] | None = None) -> CapacityCurve | None:
    """Design resistance (kN) against toe level (m) for the pile, every ``CURVE_STEP_M``.

    Top level: the record's cut-off level, else the design cut-off; diameter: the record's
    ``diameter_mm``, else the design diameter. With strata met and a platform level in the
    record, the ground under the pile is rebuilt from them down to the bottom of the model.
    The curve is design_core's step-aware grid (``axial.pile_capacity_curve``: every layer
    boundary at and just above it, so a reader never interpolates across a jump in base
    resistance) from below the top (or the ground surface) to the bottom of the ground
    model. None when there is no room for it. ValueError when design_core refuses the inputs.
    """
    ground = _ground_met(ground, record)
    diameter, top = _geometry(design, record)
    if min(top, ground.top) - CURVE_STEP_M <= ground.bottom:
        return None
    return pile_capacity_curve(ground, diameter, top, design.pile_type, rules, step=CURVE_STEP_M,
                               below_toe_m=None)


def curve_dict(curve: CapacityCurve) -> dict[str, list[float]]:
    """The curve as the page and the bundle carry it (levels to 0.1 mm, resistance to 0.01 kN)."""
    return {"toe_levels": [round(float(z), 4) for z in curve.toe_levels],
            "design": [round(float(d), 2) for d in curve.design]}


@lru_cache(maxsize=4096)
def _required(design: PileDesign, asbuilt, ground: GroundModel, rules: Rules) -> RequiredToe:
    """design_core's ``required_toe``, kept between calls for exactly equal inputs (the bundle
    asks again for every pile of the same design); ``clear_kept_levels`` empties it."""
    return required_toe(design, asbuilt, ground, rules)


def required_toe_for(design: PileDesign, record: dict[str, Any] | None, ground: GroundModel,
                     rules: Rules, curve: CapacityCurve | None = None) -> RequiredToe:
    """The required toe of one pile, everywhere in the app (page, bundle, preview, record
    picture): design_core's ``verdict.required_toe`` on the pile as built (as-built diameter and
    cut-off when recorded, the ground met when strata are logged with a platform level), with
    the demand the compression check uses. A recheck at the level is ok; 0.05 m above it is
    short. ``curve`` is accepted for callers that hold one and is not needed.
    """
    del curve
    asbuilt = asbuilt_from_record(record) if record else None
    # the mark and the values the resistance does not read do not change the answer: one key
    # for every pile of the same geometry and load
    key = replace(design, mark="-", easting=0.0, northing=0.0, cap=None)
    try:
        return _required(key, asbuilt, ground, rules)
    except TypeError:   # an as-built value that cannot be a key: work it out without keeping it
        return required_toe(key, asbuilt, ground, rules)


def clear_kept_levels() -> None:
    """Forget the required levels kept between calls (``_required``)."""
    _required.cache_clear()


# --------------------------------------------------------------------------------------------
# One pile's entry: the page and the bundle
# --------------------------------------------------------------------------------------------

def pile_entry(project_id: int, row, design: PileDesign, current: records.RecordVersion | None,
               rules_version: int, curve: Any, curve_error: str,
               required: RequiredToe) -> dict[str, Any]:
    """The dict of one pile that the rig page and the bundle both carry (``curve`` is what the
    caller puts there: the curve itself for the page, its key for the bundle)."""
    return {
        "mark": row.mark,
        "project_id": project_id,
        "version": current.version if current else 0,
        "progress": row.progress,
        "verdict": row.verdict,
        "design": design_dict(design),
        "record": current.record if current else {},
        "result": current.answer() if current else None,
        "load_kn": required.demand_kn if required.demand_kn is not None else design.compression,
        "curve": curve,
        "curve_error": curve_error,
        "required_toe_level": required.level_m,
        "rules_version": rules_version,
    }


def _curve_and_toe(design: PileDesign, ground: GroundModel, rules: Rules,
                   current: records.RecordVersion | None,
                   curve: CapacityCurve | None = None, error: str = "",
                   memo: dict | None = None) -> tuple[CapacityCurve | None, str, RequiredToe]:
    """The tablet's curve (design geometry on the ground model) and the required toe of the
    pile as recorded so far. ``memo`` keeps the as-built curves of one bundle build (keyed by
    every input they read)."""
    if curve is None and not error:
        try:
            curve = tablet_curve(design, ground, rules)
        except ValueError as exc:
            error = str(exc)
    record = current.record if current else {}
    try:
        asbuilt_curve = curve
        if record.get("strata") or "cutoff_level" in record or record.get("diameter_mm"):
            key = (id(ground), _geometry(design, record), design.pile_type,
                   repr(record.get("strata")), record.get("platform_level"))
            if memo is not None and key in memo:
                asbuilt_curve = memo[key]
            else:
                asbuilt_curve = tablet_curve(design, ground, rules, record)
                if memo is not None:
                    memo[key] = asbuilt_curve
        required = required_toe_for(design, record, ground, rules, asbuilt_curve)
    except ValueError as exc:
        error = error or str(exc)
        required = RequiredToe(None, None, None, str(exc))
    return curve, error, required


def rig_data(conn: sqlite3.Connection, project_id: int, pile_row) -> dict[str, Any]:
    """Everything the At the rig page (and the tablet's offline cache) needs for one pile.

    Keys: those of ``pile_entry`` (``curve`` as {toe_levels, design} in m and kN for the design
    geometry, or None), limits (limits_dict), ground_top, ground_bottom, layers (index,
    material, levels: for picking the layer a stratum matches).
    """
    rule_set = projects.current_rules(conn, project_id)
    design = pile_design(pile_row)
    current = records.current(conn, pile_row.id)
    ground = load_ground(conn, pile_row.ground_model_id)
    curve, error, required = _curve_and_toe(design, ground, rule_set.rules, current)
    out = pile_entry(project_id, pile_row, design, current, rule_set.version,
                     curve_dict(curve) if curve is not None else None, error, required)
    out["limits"] = limits_dict(rule_set.rules)
    out.update(ground_dict(ground))
    return out


def build_bundle(conn: sqlite3.Connection, project) -> dict:
    """Everything the tablet needs to record this project's piles offline (JSON-ready).

    ``piles`` maps each mark to its ``pile_entry`` (as ``rig_data`` gives the page), except
    that what many piles share is stored once: ``curve`` is a key of ``curves`` (one capacity
    curve per ground model, diameter, top level and pile type, made by ``tablet_curve``),
    ``ground`` a key of ``ground_models`` and ``limits`` sits at the top.
    """
    rule_set = projects.current_rules(conn, project.id)
    rules = rule_set.rules
    current = records.current_for_project(conn, project.id)
    grounds: dict[str, dict] = {}
    models: dict[int, GroundModel] = {}
    curves: dict[str, dict] = {}
    curve_keys: dict[tuple, tuple[str | None, CapacityCurve | None, str]] = {}
    piles_out: dict[str, dict] = {}
    memo: dict = {}
    for row in piles_q.list_piles(conn, project.id, sort="mark"):
        gkey = str(row.ground_model_id)
        if gkey not in grounds:
            models[row.ground_model_id] = load_ground(conn, row.ground_model_id)
            grounds[gkey] = {"name": row.ground_model_name, **ground_dict(models[row.ground_model_id])}
        ground = models[row.ground_model_id]
        design = pile_design(row)
        key = (row.ground_model_id, row.diameter_mm, row.cutoff_level_m, row.pile_type)
        if key not in curve_keys:
            curve, error = None, ""
            try:
                curve = tablet_curve(design, ground, rules)
            except ValueError as exc:
                error = str(exc)
            ckey = None
            if curve is not None:
                ckey = f"c{len(curves) + 1}"
                curves[ckey] = curve_dict(curve)
            curve_keys[key] = (ckey, curve, error)
        ckey, curve, error = curve_keys[key]
        version = current.get(row.id)
        _, error, required = _curve_and_toe(design, ground, rules, version, curve, error, memo)
        entry = pile_entry(project.id, row, design, version, rule_set.version, ckey, error, required)
        entry.update(ground=gkey, ground_model=row.ground_model_name,
                     worst_utilisation=row.worst_utilisation)
        piles_out[row.mark] = entry
    return {
        "format": 1,
        "project": {"id": project.id, "name": project.name, "site": project.site,
                    "datum": project.datum, "engineer": project.engineer},
        "rules_version": rule_set.version,
        "rules": rules.to_dict(),
        "limits": limits_dict(rules),
        "ground_models": grounds,
        "curves": curves,
        "piles": piles_out,
    }


def patch_bundle(conn: sqlite3.Connection, project, base: dict, marks) -> dict | None:
    """``base`` (a bundle as ``build_bundle`` made it, read back from JSON) with the entries of
    ``marks`` made again from the database: the bundle after record saves and rechecks of those
    piles, which change no design, curve, ground model or rules. None when that cannot be so
    (the rules version moved, a mark or its ground model is not in ``base``): build it whole.
    """
    rule_set = projects.current_rules(conn, project.id)
    if rule_set.version != base.get("rules_version"):
        return None
    out = dict(base, piles=dict(base["piles"]))
    models: dict[int, GroundModel] = {}
    for mark in sorted(marks):
        row = piles_q.get_pile(conn, project.id, mark)
        gkey = str(row.ground_model_id) if row is not None else ""
        if row is None or mark not in base["piles"] or gkey not in base["ground_models"]:
            return None
        if row.ground_model_id not in models:
            models[row.ground_model_id] = load_ground(conn, row.ground_model_id)
        design = pile_design(row)
        version = records.current(conn, row.id)
        _, error, required = _curve_and_toe(design, models[row.ground_model_id], rule_set.rules, version)
        entry = pile_entry(project.id, row, design, version, rule_set.version, base["piles"][mark]["curve"],
                           error, required)
        entry.update(ground=gkey, ground_model=row.ground_model_name, worst_utilisation=row.worst_utilisation)
        out["piles"][mark] = entry
    return out


RIG_KEYS = ("mark", "project_id", "version", "progress", "verdict", "design", "record", "result",
            "load_kn", "curve", "curve_error", "required_toe_level", "rules_version", "limits",
            "ground_top", "ground_bottom", "layers")


def rig_data_from_bundle(bundle: dict, mark: str) -> dict | None:
    """One pile's rig data (the shape of ``rig_data``) put back together from a bundle.

    The same assembly as ``rigData`` in the tablet's script; None when the mark is not in it.
    """
    pile = bundle["piles"].get(mark)
    if pile is None:
        return None
    ground = bundle["ground_models"][pile["ground"]]
    out = {k: pile[k] for k in RIG_KEYS if k in pile}
    out["curve"] = bundle["curves"][pile["curve"]] if pile["curve"] else None
    out["limits"] = bundle["limits"]
    out.update(ground_top=ground["ground_top"], ground_bottom=ground["ground_bottom"],
               layers=ground["layers"])
    return out


# --------------------------------------------------------------------------------------------
# The preview: a dry-run recheck
# --------------------------------------------------------------------------------------------

def preview(conn: sqlite3.Connection, project_id: int, pile_row, raw: Any) -> dict[str, Any]:
    """What a save of this record body would answer, computed by design_core on the as-built
    pile and the strata met; nothing is stored (no version, no audit entry).

    Keys: verdict, checks (as the save's answer), required_toe_level and more_needed_m (m or
    None, from ``required_toe_for``), required_toe_reason, worst_utilisation, borrowed, notes.
    Raises ``record_input.RecordInvalid`` (422) as the save does.
    """
    done = saving.evaluate(conn, project_id, pile_row, raw)
    try:
        need = required_toe_for(done.inputs.design, done.clean, done.inputs.ground, done.inputs.rules)
    except ValueError as exc:
        need = RequiredToe(None, None, None, f"The required toe could not be worked out: {exc}")
    return {
        "verdict": done.verdict.verdict,
        "checks": done.checks,
        "required_toe_level": need.level_m,
        "more_needed_m": need.more_needed_m,
        "required_toe_reason": need.reason,
        "worst_utilisation": done.verdict.worst_utilisation,
        "borrowed": done.borrowed,
        "notes": list(done.verdict.notes),
    }
