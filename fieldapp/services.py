"""The one place that turns stored rows into design_core inputs, runs the recheck and saves a
pile's as-built record.

Every screen, the API, the record (PDF) and the offline sync call these; nothing else builds a
``PileDesign``/``AsBuilt``/``GroundModel`` from the database or runs ``recheck`` on its own.

Functions
---------
``validate_record(raw, rules, design=None, ground=None) -> (record, errors)``
    Check every key of a record dict as sent by the tablet (see RECORD_KEYS); returns the clean
    record (numbers as floats, blanks dropped) and ``{field: message}`` for what is wrong.
``asbuilt_from_record(record) -> AsBuilt``
    A clean record dict as a design_core ``AsBuilt`` (times parsed, deliveries, strata).
``load_inputs(conn, project_id, pile_row, record=None) -> RecheckInputs``
    Design, ground model, current rule set and cap group (with the as-built positions of the
    cap's piles, this record's position in place of the stored one).
``recheck_pile(conn, project_id, pile_row, record_dict, inputs=None) -> PileVerdict``
    Run ``design_core.recheck`` on a clean record (``{}`` rechecks the design itself).
``pile_curve(conn, pile_row, rules, record=None) -> CapacityCurve | None``
    The design resistance against toe level for the pile (as-built diameter, cut-off and
    strata met when the record has them), from just below the cut-off to the bottom of the
    ground model; None when the ground model leaves no room below the cut-off.
``rig_data(conn, project_id, pile_row) -> dict``
    Everything the At the rig page and the tablet's cache need for the live checks: design
    values, current record and version, curve, required toe, limits and the cover table.
``save_record(conn, project_id, pile_row, user, client_id, base_version, raw) -> SaveOutcome``
    The one save path (one ``db.write`` transaction: new version, pile state, audit entry).
    Raises ``RecordInvalid`` (422), ``RecordConflict`` (409), ``ClientIdReused`` (422) and
    ``PileLocked`` (409, from ``SAVE_GUARDS``). ``AFTER_SAVE`` hooks run inside the same
    transaction once the version is stored.

Decimal commas
--------------
A number sent as a string may use a decimal comma: ``"12,5"`` is read as 12.5, ``"12.5"``
too. A string holding both a comma and a point (``"1,234.5"``) is refused, because digit
grouping and decimal marks cannot be told apart safely. JSON numbers are taken as they are.
Blank strings and null mean "not recorded".

Times are ISO 8601 (``2026-03-02T09:15`` or with a zone, ``...+00:00``/``Z``); within one
pair (batched/discharged, start/end) both must carry a zone or neither.
"""

from __future__ import annotations

import math
import re
import sqlite3
import uuid
from dataclasses import dataclass, field, replace
from datetime import datetime
from typing import Any, Callable

import numpy as np

from design_core import PileVerdict, ProjectItem, Rules
from design_core.axial import CapacityCurve, capacity_curve, required_toe_level
from design_core.ground import GroundModel, ground_from_strata
from design_core.inputs import AsBuilt, CapGroup, Delivery, MATERIALS, PileDesign, StratumMet
from fieldapp.queries import audit, projects, records
from fieldapp.queries import caps as caps_q
from fieldapp.queries import ground as ground_q

PROGRESS = ("planned", "boring", "concreted", "logged")
BASE_CHECKS = ("sounding", "camera", "cleaning pass", "visual")
COORD_LIMIT_M = 1e8

# name: (low, high, unit) for every number of a record; the message quotes the range.
NUMBER_FIELDS: dict[str, tuple[float, float, str]] = {
    "platform_level": (-10_000.0, 10_000.0, "m"),
    "measured_depth": (0.1, 500.0, "m"),
    "diameter_mm": (150.0, 3000.0, "mm"),
    "cutoff_level": (-10_000.0, 10_000.0, "m"),
    "casting_level": (-10_000.0, 10_000.0, "m"),
    "easting": (-COORD_LIMIT_M, COORD_LIMIT_M, "m"),
    "northing": (-COORD_LIMIT_M, COORD_LIMIT_M, "m"),
    "inclination": (0.0, 1.0, "(horizontal/vertical)"),
    "debris_mm": (0.0, 5000.0, "mm"),
    "cage_length": (0.0, 200.0, "m"),
    "cover_mm": (0.0, 300.0, "mm"),
    "concrete_mpa": (5.0, 120.0, "MPa"),
    "concrete_volume_m3": (0.0, 2000.0, "m3"),
}
TIME_FIELDS = ("boring_start", "boring_end", "pour_start", "pour_end")
TEXT_FIELDS = {"rig": 100, "notes": 5000}
DELIVERY_NUMBERS = {"volume_m3": (0.0, 100.0, "m3"), "slump_mm": (0.0, 1000.0, "mm")}
STRATUM_NUMBERS = {"from_depth": (0.0, 500.0, "m"), "to_depth": (0.0, 500.0, "m")}
MAX_DELIVERIES = 50
MAX_STRATA = 100
RECORD_KEYS = (tuple(NUMBER_FIELDS) + TIME_FIELDS + tuple(TEXT_FIELDS)
               + ("base_check", "exposure_class", "deliveries", "strata", "progress",
                  "permanent_casing"))

CURVE_STEP_M = 0.1
CURVE_MAX_POINTS = 600


class RecordInvalid(ValueError):
    """The record has errors: ``errors`` maps each field to a message with the allowed range."""

    def __init__(self, errors: dict[str, str]):
        super().__init__("; ".join(f"{k}: {v}" for k, v in errors.items()))
        self.errors = errors


class RecordConflict(Exception):
    """The record changed on the server since the client read it: ``current`` is the newest."""

    def __init__(self, current: records.RecordVersion | None, stored_version: int):
        super().__init__(f"the stored record is at version {stored_version}")
        self.current = current
        self.stored_version = stored_version


class ClientIdReused(ValueError):
    """The client id was already used for a save of another pile."""


class PileLocked(Exception):
    """A guard (e.g. sign-off) refuses any new version of this pile; the message says why."""


# Callables (conn, pile_row, amendment) -> str | None run inside the save transaction before
# anything is written (``amendment`` is the request's optional {"reason": ...} or None); a
# message refuses the save with PileLocked. The review work registers its sign-off lock here,
# so the one save path stays the one save path.
SAVE_GUARDS: list[Callable[[sqlite3.Connection, Any, dict | None], str | None]] = []

# Callables (conn, pile_row, version, amendment) run in the same transaction right after a new
# version is stored (e.g. to note an amendment of a signed record); an exception undoes the save.
AFTER_SAVE: list[Callable[[sqlite3.Connection, Any, int, dict | None], None]] = []


# --------------------------------------------------------------------------------------------
# Validation
# --------------------------------------------------------------------------------------------

_NUMBER_TEXT = re.compile(r"^[+-]?(\d+([.,]\d*)?|[.,]\d+)([eE][+-]?\d+)?$")


def parse_number(value: Any) -> float | None:
    """A finite float from a JSON number or a string (decimal comma allowed); None for blank.

    Raises ValueError with a short reason for anything else (booleans, text, NaN, infinity).
    """
    if value is None:
        return None
    if isinstance(value, bool):
        raise ValueError("must be a number, not true/false")
    if isinstance(value, (int, float)):
        number = float(value)
    elif isinstance(value, str):
        text = value.strip().replace("\u2212", "-")
        if not text:
            return None
        if "," in text and "." in text:
            raise ValueError(f"{value!r} mixes a comma and a point: type the number with one "
                             "decimal mark and no digit grouping")
        if not _NUMBER_TEXT.match(text):
            raise ValueError(f"must be a number, got {value!r}")
        number = float(text.replace(",", "."))
    else:
        raise ValueError(f"must be a number, got {type(value).__name__}")
    if not math.isfinite(number):
        raise ValueError("must be a finite number")
    return number


def _range_text(lo: float, hi: float, unit: str) -> str:
    return f"between {lo:g} and {hi:g} {unit}".rstrip()


def _number_field(name: str, value: Any, spec: tuple[float, float, str],
                  errors: dict[str, str]) -> float | None:
    lo, hi, unit = spec
    try:
        number = parse_number(value)
    except ValueError as exc:
        errors[name] = f"{exc} ({_range_text(lo, hi, unit)})"
        return None
    if number is not None and not lo <= number <= hi:
        errors[name] = f"must be {_range_text(lo, hi, unit)}, got {number:g}"
        return None
    return number


def parse_time(value: Any) -> datetime | None:
    """An ISO 8601 date-time from a string (``Z`` allowed); None for blank; ValueError else."""
    if value is None or (isinstance(value, str) and not value.strip()):
        return None
    if not isinstance(value, str):
        raise ValueError(f"must be an ISO 8601 date and time such as 2026-03-02T09:15, got {value!r}")
    text = value.strip()
    if text.endswith(("Z", "z")):
        text = text[:-1] + "+00:00"
    try:
        moment = datetime.fromisoformat(text)
    except ValueError:
        raise ValueError(
            f"must be an ISO 8601 date and time such as 2026-03-02T09:15, got {value!r}") from None
    if not 1900 <= moment.year <= 2200:
        raise ValueError(f"must be a date between the years 1900 and 2200, got {value!r}")
    return moment


def _time_field(name: str, value: Any, errors: dict[str, str]) -> tuple[str | None, datetime | None]:
    try:
        moment = parse_time(value)
    except ValueError as exc:
        errors[name] = str(exc)
        return None, None
    return (value.strip() if moment else None), moment


def _order(first: str, a: datetime | None, second: str, b: datetime | None,
           errors: dict[str, str]) -> None:
    """Error on ``second`` unless a <= b (or either missing); zones must match."""
    if a is None or b is None:
        return
    if (a.tzinfo is None) != (b.tzinfo is None):
        errors[second] = f"{first} and {second} must both carry a time zone or neither"
    elif b < a:
        errors[second] = f"must not be before {first}"


def _text(name: str, value: Any, limit: int, errors: dict[str, str]) -> str | None:
    if value is None:
        return None
    if not isinstance(value, str):
        errors[name] = f"must be text of at most {limit} characters"
        return None
    text = value.strip()
    if len(text) > limit:
        errors[name] = f"must be at most {limit} characters, got {len(text)}"
        return None
    return text or None


def validate_record(raw: Any, rules: Rules, design: PileDesign | None = None,
                    ground: GroundModel | None = None) -> tuple[dict[str, Any], dict[str, str]]:
    """Check a record dict key by key; returns ``(clean_record, errors)``.

    Every key of ``RECORD_KEYS`` is optional except ``progress`` (planned, boring, concreted or
    logged).
    Unknown keys are errors (a typo must never be dropped silently). Numbers: finite, within
    ``NUMBER_FIELDS``; decimal commas accepted in strings (module docstring). Times: ISO 8601,
    ends not before starts. ``base_check`` one of BASE_CHECKS; ``exposure_class`` one of the
    rules' exposure table; ``deliveries`` and ``strata`` lists of dicts (strata: depths in m
    below the platform, from < to, no overlaps, material one of cohesive, cohesionless, rock,
    ignore, optional ``layer_index`` of the ground model). With ``ground`` and ``design``, the
    toe (platform level - measured depth) must lie below the cut-off and within the ground
    model. Error keys name the field, e.g. ``deliveries[1].batched_at``.
    """
    errors: dict[str, str] = {}
    clean: dict[str, Any] = {}
    if not isinstance(raw, dict):
        return {}, {"record": "must be an object of record fields"}
    unknown = sorted(set(raw) - set(RECORD_KEYS))
    for key in unknown:
        errors[str(key)[:60]] = "is not a record field (known: " + ", ".join(RECORD_KEYS) + ")"

    for name, spec in NUMBER_FIELDS.items():
        if name in raw:
            number = _number_field(name, raw[name], spec, errors)
            if number is not None:
                clean[name] = number

    times: dict[str, datetime | None] = {}
    for name in TIME_FIELDS:
        if name in raw:
            text, moment = _time_field(name, raw[name], errors)
            times[name] = moment
            if text:
                clean[name] = text
    _order("boring_start", times.get("boring_start"), "boring_end", times.get("boring_end"), errors)
    _order("pour_start", times.get("pour_start"), "pour_end", times.get("pour_end"), errors)

    for name, limit in TEXT_FIELDS.items():
        text = _text(name, raw.get(name), limit, errors)
        if text:
            clean[name] = text

    progress = raw.get("progress")
    if progress not in PROGRESS:
        errors["progress"] = f"must be one of {', '.join(PROGRESS)}, got {progress!r}"
    else:
        clean["progress"] = progress

    base_check = raw.get("base_check")
    if base_check not in (None, ""):
        if base_check not in BASE_CHECKS:
            errors["base_check"] = f"must be one of {', '.join(BASE_CHECKS)}, got {base_check!r}"
        else:
            clean["base_check"] = base_check

    exposure = raw.get("exposure_class")
    if exposure not in (None, ""):
        known = [row.code for row in rules.exposure_table]
        if exposure not in known:
            errors["exposure_class"] = f"must be one of {', '.join(known)} (the project's rules), got {exposure!r}"
        else:
            clean["exposure_class"] = exposure

    casing = raw.get("permanent_casing")
    if casing is not None:
        if not isinstance(casing, bool):
            errors["permanent_casing"] = "must be true or false (or null: as designed)"
        else:
            clean["permanent_casing"] = casing

    deliveries = _deliveries(raw.get("deliveries"), errors)
    if deliveries:
        clean["deliveries"] = deliveries
    strata = _strata(raw.get("strata"), errors, ground)
    if strata:
        clean["strata"] = strata

    if design is not None and ground is not None:
        _toe_in_range(clean, design, ground, errors)
    return clean, errors


def _items(value: Any, errors: dict[str, str], field: str, noun: str, limit: int,
           known: tuple[str, ...]) -> list[tuple[str, dict]]:
    """The object items of a list field (deliveries, strata), each with its error path.

    Problems with the list itself, an item that is not an object, and unknown keys go into
    ``errors`` named by their path (``strata[2].colour``).
    """
    if value in (None, []):
        return []
    if not isinstance(value, list):
        errors[field] = f"must be a list of {field}"
        return []
    if len(value) > limit:
        errors[field] = f"must hold at most {limit} {field}, got {len(value)}"
        return []
    names = ", ".join(known)
    out = []
    for i, item in enumerate(value):
        where = f"{field}[{i}]"
        if not isinstance(item, dict):
            errors[where] = f"must be an object with {names}"
            continue
        for key in sorted(set(item) - set(known)):
            errors[f"{where}.{str(key)[:40]}"] = f"is not a {noun} field (known: {names})"
        out.append((where, item))
    return out


def _deliveries(value: Any, errors: dict[str, str]) -> list[dict[str, Any]]:
    out = []
    for where, item in _items(value, errors, "deliveries", "delivery", MAX_DELIVERIES,
                              ("docket", "volume_m3", "batched_at", "discharged_at", "slump_mm")):
        row: dict[str, Any] = {}
        docket = _text(f"{where}.docket", item.get("docket"), 50, errors)
        if docket:
            row["docket"] = docket
        for name, spec in DELIVERY_NUMBERS.items():
            if name in item:
                number = _number_field(f"{where}.{name}", item[name], spec, errors)
                if number is not None:
                    row[name] = number
        moments = {}
        for name in ("batched_at", "discharged_at"):
            text, moments[name] = _time_field(f"{where}.{name}", item.get(name), errors)
            if text:
                row[name] = text
        _order("batched_at", moments["batched_at"], f"{where}.discharged_at",
               moments["discharged_at"], errors)
        if row:
            out.append(row)
    return out


def _strata(value: Any, errors: dict[str, str], ground: GroundModel | None) -> list[dict[str, Any]]:
    out = []
    for where, item in _items(value, errors, "strata", "stratum", MAX_STRATA,
                              ("from_depth", "to_depth", "material", "description", "layer_index")):
        row: dict[str, Any] = {}
        ok = True
        for name, spec in STRATUM_NUMBERS.items():
            number = _number_field(f"{where}.{name}", item.get(name), spec, errors)
            if number is None:
                ok = False
                errors.setdefault(f"{where}.{name}", f"is required ({_range_text(*spec)} below the platform)")
            row[name] = number
        if ok and row["to_depth"] <= row["from_depth"]:
            errors[f"{where}.to_depth"] = f"must be deeper than from_depth ({row['from_depth']:g} m)"
            ok = False
        material = item.get("material")
        if material not in MATERIALS:
            errors[f"{where}.material"] = f"must be one of {', '.join(MATERIALS)}, got {material!r}"
            ok = False
        row["material"] = material
        description = _text(f"{where}.description", item.get("description"), 500, errors)
        row["description"] = description or ""
        index = item.get("layer_index")
        if index not in (None, ""):
            n_layers = len(ground.layers) if ground is not None else None
            if isinstance(index, bool) or not isinstance(index, int) or index < 0 or (
                    n_layers is not None and index >= n_layers):
                top = f"{n_layers - 1}" if n_layers else "the last layer"
                errors[f"{where}.layer_index"] = f"must be a layer of the ground model, 0 to {top}"
                ok = False
            elif ground is not None and ground.layers[index].material != material:
                errors[f"{where}.layer_index"] = (f"layer {index} is {ground.layers[index].material}, "
                                                  f"not {material}")
                ok = False
            else:
                row["layer_index"] = index
        if ok:
            out.append(row)
    ordered = sorted(range(len(out)), key=lambda k: out[k]["from_depth"])
    for a, b in zip(ordered[:-1], ordered[1:], strict=True):
        if out[b]["from_depth"] < out[a]["to_depth"] - 1e-9:
            errors["strata"] = (f"strata overlap: {out[a]['from_depth']:g}-{out[a]['to_depth']:g} m and "
                                f"{out[b]['from_depth']:g}-{out[b]['to_depth']:g} m")
            break
    return out


def _toe_in_range(clean: dict[str, Any], design: PileDesign, ground: GroundModel,
                  errors: dict[str, str]) -> None:
    if "platform_level" not in clean or "measured_depth" not in clean:
        return
    platform, depth = clean["platform_level"], clean["measured_depth"]
    toe = platform - depth
    cutoff = clean.get("cutoff_level", design.cutoff_level)
    if toe < ground.bottom - 1e-6:
        errors["measured_depth"] = (
            f"gives a toe at {toe:.2f} m, below the bottom of the ground model ({ground.bottom:.2f} m): "
            f"at most {platform - ground.bottom:.2f} m from platform level {platform:.2f} m")
    elif toe >= cutoff:
        errors["measured_depth"] = (
            f"gives a toe at {toe:.2f} m, not below the cut-off level ({cutoff:.2f} m): more than "
            f"{platform - cutoff:.2f} m from platform level {platform:.2f} m")


# --------------------------------------------------------------------------------------------
# Rows to design_core inputs
# --------------------------------------------------------------------------------------------

def asbuilt_from_record(record: dict[str, Any]) -> AsBuilt:
    """A clean record (from ``validate_record`` or storage) as a design_core ``AsBuilt``."""
    deliveries = tuple(
        Delivery(docket=d.get("docket", ""), volume_m3=d.get("volume_m3"),
                 batched_at=parse_time(d.get("batched_at")),
                 discharged_at=parse_time(d.get("discharged_at")), slump_mm=d.get("slump_mm"))
        for d in record.get("deliveries", ()))
    strata = tuple(
        StratumMet(s["from_depth"], s["to_depth"], s["material"], s.get("description", ""),
                   s.get("layer_index"))
        for s in record.get("strata", ()))
    kwargs = {name: record.get(name) for name in NUMBER_FIELDS}
    if record.get("permanent_casing") is not None:
        kwargs["permanent_casing"] = record["permanent_casing"]
    return AsBuilt(base_check=record.get("base_check"), exposure_class=record.get("exposure_class"),
                   deliveries=deliveries, strata=strata, **kwargs)


@dataclass(frozen=True)
class RecheckInputs:
    """What the recheck of one pile takes, read from the database."""

    design: PileDesign
    ground: GroundModel
    rules: Rules
    rules_version: int
    group: CapGroup | None
    extras: dict[str, Any] = field(default_factory=dict)


def _pile_design(pile_row) -> PileDesign:
    from fieldapp.queries import piles as piles_q
    return piles_q.pile_design(pile_row)


def cap_group_for(conn: sqlite3.Connection, pile_row,
                  record: dict[str, Any] | None = None) -> CapGroup | None:
    """The pile's cap with its loads and the as-built positions of its piles from their newest
    records, this record's easting/northing (when given) in place of the pile's own; None when
    the pile is not in a cap."""
    if pile_row.cap_id is None:
        return None
    positions = records.current_positions_in_cap(conn, pile_row.cap_id)
    positions.pop(pile_row.mark, None)
    if record and record.get("easting") is not None and record.get("northing") is not None:
        positions[pile_row.mark] = (record["easting"], record["northing"])
    return caps_q.cap_group(conn, pile_row.cap_id, positions)


def load_inputs(conn: sqlite3.Connection, project_id: int, pile_row,
                record: dict[str, Any] | None = None, with_group: bool = True) -> RecheckInputs:
    """Design, ground model, current rules and cap group (``cap_group_for``) for one pile.

    ``with_group=False`` leaves the cap group out (None): enough to validate a record, which
    does not look at the cap.
    """
    rule_set = projects.current_rules(conn, project_id)
    group = cap_group_for(conn, pile_row, record) if with_group else None
    return RecheckInputs(_pile_design(pile_row),
                         ground_q.load_ground_model(conn, pile_row.ground_model_id),
                         rule_set.rules, rule_set.version, group)


def _recheck():
    from design_core.recheck import recheck
    return recheck


def _recheck_project():
    from design_core.recheck import recheck_project
    return recheck_project


def recheck_pile(conn: sqlite3.Connection, project_id: int, pile_row, record_dict: dict[str, Any],
                 inputs: RecheckInputs | None = None) -> PileVerdict:
    """Run ``design_core.recheck`` for one pile on a clean record dict.

    ``record_dict`` must be clean (``validate_record``); an empty dict rechecks the design
    itself (every as-built check then reports "not checked"). Strata met go to the recheck in
    the AsBuilt, which rebuilds the ground under the pile from them (``ground_from_strata``);
    ``verdict.details["borrowed"]`` says which layer each stratum borrowed from.
    """
    inputs = inputs or load_inputs(conn, project_id, pile_row, record_dict)
    asbuilt = asbuilt_from_record(record_dict) if record_dict else None
    return _recheck()(inputs.design, asbuilt, inputs.ground, inputs.rules, group=inputs.group)


def borrowed_list(verdict: PileVerdict, inputs: RecheckInputs, record: dict[str, Any]) -> list[dict]:
    """Which ground-model layer each stratum met borrowed from, as JSON-ready dicts.

    Read from the verdict's details; when the recheck did not report it, worked out with
    ``ground_from_strata`` (the same function the recheck uses), so the record always says.
    """
    found = verdict.details.get("borrowed") if verdict.details else None
    if found is None and record.get("strata") and "platform_level" in record:
        asb = asbuilt_from_record(record)
        toe = asb.toe_level if asb.toe_level is not None else inputs.ground.bottom
        toe = max(toe, inputs.ground.bottom)
        _, found = ground_from_strata(inputs.ground, record["platform_level"], asb.strata, toe)
    return [b.to_dict() if hasattr(b, "to_dict") else dict(b) for b in (found or [])]


def pile_curve(conn: sqlite3.Connection, pile_row, rules: Rules,
               record: dict[str, Any] | None = None) -> CapacityCurve | None:
    """Design resistance (kN) against toe level (m) for the pile, every ``CURVE_STEP_M``.

    Top level: the record's cut-off level, else the design cut-off; diameter: the record's
    ``diameter_mm``, else the design diameter. With strata met and a platform level in the
    record, the ground under the pile is rebuilt from them down to the bottom of the model.
    The curve runs from 0.1 m below the top (or the ground surface) to the bottom of the ground
    model. None when there is no room for it.
    """
    design = _pile_design(pile_row)
    ground = ground_q.load_ground_model(conn, pile_row.ground_model_id)
    record = record or {}
    if record.get("strata") and record.get("platform_level") is not None:
        strata = asbuilt_from_record(record).strata
        ground, _ = ground_from_strata(ground, record["platform_level"], strata, ground.bottom)
    top = record.get("cutoff_level", design.cutoff_level)
    diameter = record["diameter_mm"] / 1000.0 if record.get("diameter_mm") else design.diameter
    start = min(top, ground.top) - CURVE_STEP_M
    if start <= ground.bottom:
        return None
    n = int(min(CURVE_MAX_POINTS, max(2, math.ceil((start - ground.bottom) / CURVE_STEP_M) + 1)))
    toes = np.linspace(start, ground.bottom, n)
    return capacity_curve(ground, diameter, top, toes, design.pile_type, rules)


# --------------------------------------------------------------------------------------------
# What the rig page and the tablet need
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


def rig_data(conn: sqlite3.Connection, project_id: int, pile_row) -> dict[str, Any]:
    """Everything the At the rig page (and the tablet's offline cache) needs for one pile.

    Keys: mark, project_id, version, progress, verdict, design (design_dict), record (the
    newest record or {}), result (its verdict, checks, borrowed) or None, load_kn (design
    compression), curve ({toe_levels, design} in m and kN, for the design geometry) or None,
    required_toe_level (m, where the design resistance reaches load_kn) or None,
    rules_version, limits (limits_dict), layers (index, material, levels: for picking the
    layer a stratum matches).
    """
    rule_set = projects.current_rules(conn, project_id)
    design = _pile_design(pile_row)
    current = records.current(conn, pile_row.id)
    ground = ground_q.load_ground_model(conn, pile_row.ground_model_id)
    curve = None
    required = None
    curve_error = ""
    try:
        curve = pile_curve(conn, pile_row, rule_set.rules)
        if curve is not None and design.compression > 0:
            required = required_toe_level(curve, design.compression)
    except ValueError as exc:
        curve_error = str(exc)
    return {
        "mark": pile_row.mark,
        "project_id": project_id,
        "version": current.version if current else 0,
        "progress": pile_row.progress,
        "verdict": pile_row.verdict,
        "design": design_dict(design),
        "record": current.record if current else {},
        "result": current.answer() if current else None,
        "load_kn": design.compression,
        "curve": ({"toe_levels": [round(float(z), 4) for z in curve.toe_levels],
                   "design": [round(float(d), 2) for d in curve.design]} if curve is not None else None),
        "curve_error": curve_error,
        "required_toe_level": required,
        "rules_version": rule_set.version,
        "limits": limits_dict(rule_set.rules),
        "ground_top": ground.top,
        "ground_bottom": ground.bottom,
        "layers": [{"index": i, "material": layer.material, "top": layer.top, "bottom": layer.bottom}
                   for i, layer in enumerate(ground.layers)],
    }


# --------------------------------------------------------------------------------------------
# The one save path
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class SaveOutcome:
    """A save's result: the stored version and whether this call made it (False: a repeat)."""

    version: records.RecordVersion
    created: bool

    def answer(self) -> dict[str, Any]:
        """The API's 200 answer."""
        return self.version.answer()


def _repeat(conn: sqlite3.Connection, client_id: str, pile_row) -> SaveOutcome | None:
    earlier = records.by_client_id(conn, client_id)
    if earlier is None:
        return None
    if earlier.pile_id != pile_row.id:
        raise ClientIdReused("client_id was already used for a save of another pile: make a new one")
    return SaveOutcome(earlier, False)


def save_record(conn: sqlite3.Connection, project_id: int, pile_row, user, client_id: str,
                base_version: int | None, raw: Any, amendment: dict | None = None) -> SaveOutcome:
    """Validate, recheck and store a new version of a pile's as-built record.

    * The same ``client_id`` again returns the version that save made (no new version), even
      if newer versions exist since.
    * ``base_version`` (None = "no record yet") older than the stored version raises
      ``RecordConflict`` with the newest version; nothing is written.
    * An invalid record raises ``RecordInvalid`` with every error; nothing is written.
    * Otherwise one ``db.write`` transaction inserts version n+1, moves the pile's progress,
      verdict, worst utilisation and current version, and appends "record saved" to the audit
      chain. ``user`` is a ``users.User`` (its id and label are stored).
    """
    from fieldapp import db

    repeat = _repeat(conn, client_id, pile_row)
    if repeat is not None:
        return repeat
    if base_version is not None and (isinstance(base_version, bool) or not isinstance(base_version, int)
                                     or base_version < 0):
        raise RecordInvalid({"base_version": "must be a whole number of 0 or more, or null"})
    inputs = load_inputs(conn, project_id, pile_row, with_group=False)
    clean, errors = validate_record(raw, inputs.rules, inputs.design, inputs.ground)
    if errors:
        raise RecordInvalid(errors)
    inputs = replace(inputs, group=cap_group_for(conn, pile_row, clean))
    try:
        verdict = recheck_pile(conn, project_id, pile_row, clean, inputs)
        borrowed = borrowed_list(verdict, inputs, clean)
    except ValueError as exc:  # design_core refused the combination; say so, save nothing
        raise RecordInvalid({"record": f"the recheck cannot use this record: {exc}"}) from None
    checks = [c.to_dict() for c in verdict.short_first()]
    worst = verdict.worst_utilisation

    with db.write(conn):
        repeat = _repeat(conn, client_id, pile_row)  # a twin request may have won the race
        if repeat is not None:
            return repeat
        for guard in SAVE_GUARDS:
            message = guard(conn, pile_row, amendment)
            if message:
                raise PileLocked(message)
        stored, previous_position = records.stored_position(conn, pile_row.id)
        base = base_version or 0
        if base < stored:
            raise RecordConflict(records.current(conn, pile_row.id), stored)
        if base > stored:
            raise RecordInvalid({"base_version": f"must be at most the stored version {stored}, got {base}"})
        version = stored + 1
        saved = records.insert(conn, project_id=project_id, pile_id=pile_row.id, version=version,
                               client_id=client_id, record=clean, progress=clean["progress"],
                               verdict=verdict.verdict, worst_utilisation=worst, checks=checks,
                               borrowed=borrowed, notes=list(verdict.notes),
                               rules_version=inputs.rules_version, created_by=user.id,
                               created_by_name=user.label)
        records.set_pile_state(conn, pile_row.id, progress=clean["progress"], verdict=verdict.verdict,
                               worst_utilisation=worst, version=version)
        for hook in AFTER_SAVE:
            hook(conn, pile_row, version, amendment)
        if pile_row.cap_id is not None and previous_position != _position(clean):
            recheck_cap_mates(conn, project_id, pile_row, user)
        short = [c["code"] for c in checks if c["ok"] is False]
        audit.append(conn, project_id, user.label, "record saved", pile_row.mark,
                     {"version": version, "verdict": verdict.verdict, "short": short,
                      "progress": clean["progress"], "client_id": client_id,
                      "rules_version": inputs.rules_version,
                      **({"amendment": amendment} if amendment else {})})
    return SaveOutcome(saved, True)


def _position(record: dict[str, Any]) -> tuple[float, float] | None:
    """The as-built (easting, northing) of a record, or None when not both surveyed."""
    if record.get("easting") is None or record.get("northing") is None:
        return None
    return (float(record["easting"]), float(record["northing"]))


def recheck_cap_mates(conn: sqlite3.Connection, project_id: int, pile_row, user) -> list[str]:
    """Recheck the other recorded piles of a cap after one pile's as-built position changed.

    A rigid cap shares its loads over the as-built positions, so moving one pile changes every
    pile's share (``group_share``). See :func:`recheck_stored` for what is stored. Runs inside
    the caller's transaction. Returns the marks given a new version.
    """
    from fieldapp.queries import piles as piles_q

    reason = (f"rechecked because the as-built position of {pile_row.mark} changed the shares "
              f"of cap {pile_row.cap_mark}")
    mates = [m for m in piles_q.list_piles(conn, project_id, cap_id=pile_row.cap_id)
             if m.id != pile_row.id]
    return recheck_stored(conn, project_id, mates, user, reason)


def recheck_stored(conn: sqlite3.Connection, project_id: int, pile_rows, user, reason: str,
                   actor: str | None = None) -> list[str]:
    """Recheck recorded piles after something they rest on changed (a cap-mate's position, the
    rules, a ground model, the design).

    Each pile with a record is rechecked on its current record. Where any check's status (ok,
    short, not checked) or the verdict changes, a new version of its record is stored with the
    same as-built data, the new checks and ``reason`` in its notes, and an audit entry "record
    rechecked". A pile that was signed is thereby no longer signed at its current version: the
    change needs the engineer's sign-off like any amendment. Piles whose statuses stay the same
    keep their version (their stored figures are those of their own save). Runs inside the
    caller's transaction. ``user`` may be None (the command line); ``actor`` then names who
    acted in the audit trail. Returns the marks given a new version.
    """
    changed = []
    actor = actor or (user.label if user else "system")
    # Read each ground model and cap once and recheck the batch together (design_core's
    # project recheck shares capacity curves, sections and Winkler solves between piles).
    rule_set = projects.current_rules(conn, project_id)
    grounds: dict[int, GroundModel] = {}
    groups: dict[str, CapGroup] = {}
    batch = []
    for mate in pile_rows:
        if mate.current_version == 0:
            continue
        current = records.current(conn, mate.id)
        if current is None:
            continue
        if mate.ground_model_id not in grounds:
            grounds[mate.ground_model_id] = ground_q.load_ground_model(conn, mate.ground_model_id)
        if mate.cap_id is not None and mate.cap_mark not in groups:
            groups[mate.cap_mark] = caps_q.cap_group(
                conn, mate.cap_id, records.current_positions_in_cap(conn, mate.cap_id))
        group = groups.get(mate.cap_mark) if mate.cap_id is not None else None
        inputs = RecheckInputs(_pile_design(mate), grounds[mate.ground_model_id], rule_set.rules,
                               rule_set.version, group)
        batch.append((mate, current, inputs))
    try:
        verdicts = _recheck_project()(
            [ProjectItem(i.design, asbuilt_from_record(c.record), i.ground) for _, c, i in batch],
            rule_set.rules, groups)
    except ValueError:
        verdicts = {}  # one pile the batch cannot take: recheck one by one below
    for mate, current, inputs in batch:
        verdict = verdicts.get(mate.mark)
        if verdict is None:
            try:
                verdict = recheck_pile(conn, project_id, mate, current.record, inputs)
            except ValueError:
                continue  # its own save succeeded before; the engineer sees it as it was
        checks = [c.to_dict() for c in verdict.short_first()]
        before = {c["code"]: c["ok"] for c in current.checks}
        # A check added to Toeline after this version was stored counts as ok before it: one
        # that is ok now changes nothing; one that is short or cannot be made now does.
        if (all(before.get(c["code"], True) == c["ok"] for c in checks)
                and verdict.verdict == current.verdict):
            continue
        version = current.version + 1
        records.insert(conn, project_id=project_id, pile_id=mate.id, version=version,
                       client_id=f"server-{uuid.uuid4()}", record=current.record,
                       progress=current.progress, verdict=verdict.verdict,
                       worst_utilisation=verdict.worst_utilisation, checks=checks,
                       borrowed=borrowed_list(verdict, inputs, current.record),
                       notes=list(verdict.notes) + [reason], rules_version=inputs.rules_version,
                       created_by=user.id if user else None)
        records.set_pile_state(conn, mate.id, progress=current.progress, verdict=verdict.verdict,
                               worst_utilisation=verdict.worst_utilisation, version=version)
        for hook in AFTER_SAVE:
            hook(conn, mate, version, {"reason": reason})
        audit.append(conn, project_id, actor, "record rechecked", mate.mark,
                     {"version": version, "verdict": verdict.verdict, "reason": reason,
                      "short": [c["code"] for c in checks if c["ok"] is False]})
        changed.append(mate.mark)
    return changed
