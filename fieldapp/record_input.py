"""The record body as the tablet sends it: every key checked, numbers and times parsed.

``validate_record(raw, rules, design=None, ground=None) -> (record, errors)`` checks every key of
a record dict (see ``RECORD_KEYS``) and returns the clean record (numbers as floats, blanks
dropped) and ``{field: message}`` for what is wrong, each message naming the allowed range.
``parse_number`` and ``parse_time`` read one value; ``clean_text`` one piece of text.

Decimal commas
--------------
A number sent as a string may use a decimal comma: ``"12,5"`` is read as 12.5, ``"12.5"``
too. A string holding both a comma and a point (``"1,234.5"``) is refused, because digit
grouping and decimal marks cannot be told apart safely. JSON numbers are taken as they are
(an integer too large for a float, such as one of 401 digits, is refused with the field's
range). Blank strings and null mean "not recorded".

Text
----
Text must be valid Unicode: a lone surrogate (``"\\ud800"``, which JSON can carry but UTF-8
cannot) is refused with the field named (``unicode_problem``).

Times are ISO 8601 (``2026-03-02T09:15`` or with a zone, ``...+00:00``/``Z``); within one
pair (batched/discharged, start/end) both must carry a zone or neither.
"""

from __future__ import annotations

import math
import re
from datetime import datetime
from typing import Any

from design_core import Rules
from design_core.ground import GroundModel
from design_core.inputs import MATERIALS, PileDesign
from fieldapp.queries.piles import PROGRESS

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


class RecordInvalid(ValueError):
    """The record has errors: ``errors`` maps each field to a message with the allowed range."""

    def __init__(self, errors: dict[str, str]):
        super().__init__("; ".join(f"{k}: {v}" for k, v in errors.items()))
        self.errors = errors



_NUMBER_TEXT = re.compile(r"^[+-]?(\d+([.,]\d*)?|[.,]\d+)([eE][+-]?\d+)?$")


def parse_number(value: Any) -> float | None:
    """A finite float from a JSON number or a string (decimal comma allowed); None for blank.

    Raises ValueError with a short reason for anything else (booleans, text, NaN, infinity).
    """
    if value is None:
        return None
    if isinstance(value, bool):
        raise ValueError("must be a number, not true/false")
    if isinstance(value, int):
        try:
            number = float(value)
        except OverflowError:
            raise ValueError("is too large a number") from None
    elif isinstance(value, float):
        number = value
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


def unicode_problem(text: str) -> str | None:
    """Why ``text`` is not valid Unicode text (a lone surrogate, which UTF-8 cannot hold), or
    holds a NUL character (which no text column of PostgreSQL can store, and no log needs), or None."""
    if "\x00" in text:
        return f"must not contain the NUL character (character {text.index(chr(0)) + 1})"
    try:
        text.encode("utf-8")
    except UnicodeEncodeError as exc:
        return (f"must be valid Unicode text: character {exc.start + 1} is a lone surrogate "
                f"({text[exc.start]!r})")
    return None


def clean_text(name: str, value: Any, limit: int, errors: dict[str, str]) -> str | None:
    """``value`` stripped, or None when blank; an error under ``name`` when it is not text, not
    valid Unicode or longer than ``limit`` characters."""
    if value is None:
        return None
    if not isinstance(value, str):
        errors[name] = f"must be text of at most {limit} characters"
        return None
    problem = unicode_problem(value)
    if problem:
        errors[name] = problem
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
        text = clean_text(name, raw.get(name), limit, errors)
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
        docket = clean_text(f"{where}.docket", item.get("docket"), 50, errors)
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
        description = clean_text(f"{where}.description", item.get("description"), 500, errors)
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

