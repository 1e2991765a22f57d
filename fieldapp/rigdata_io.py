"""Toeline's own CSV formats for rig data: the CFA rig log, the screw-pile torque log and the
driving log. Pure functions from the file's bytes to validated readings, and back.

Every file is checked whole: each problem is reported with its row (as a spreadsheet numbers
it, the header is row 1) and column, and a file with any problem gives nothing
(``FileRejected`` carries the list). Nothing here stores anything; the caller keeps the
original bytes by ``file_sha256`` as evidence. docs/pile-types.md describes the formats.

Rig log (one row per reading, in time order; drilling rows then extraction rows)::

    depth_m, time, auger_rpm | revolutions, penetration_rate_m_per_min, concrete_volume_m3,
    concrete_pressure_kpa, phase

Torque log: ``depth_m, torque_knm`` from the top down. Driving log: ``depth_m, blows``, the
top of each 0.25 m interval from the top down. Comma separated, UTF-8 (a byte-order mark is
allowed), a dot for the decimal point.
"""

from __future__ import annotations

import csv
import hashlib
import io
import math
from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import Iterable

from design_core.cfa import PHASES, RIG_LIMITS, RigLog, RigReading
from design_core.driving import BLOW_INTERVAL_M
from design_core.helical import TorqueReading

RIG_COLUMNS = ("depth_m", "time", "auger_rpm", "revolutions", "penetration_rate_m_per_min",
               "concrete_volume_m3", "concrete_pressure_kpa", "phase")
RIG_REQUIRED = ("depth_m", "time", "penetration_rate_m_per_min", "concrete_volume_m3",
                "concrete_pressure_kpa", "phase")
RIG_ROTATION = ("auger_rpm", "revolutions")   # at least one of them
TORQUE_COLUMNS = ("depth_m", "torque_knm")
DRIVING_COLUMNS = ("depth_m", "blows")

TORQUE_LIMITS = {"depth_m": (0.0, 100.0), "torque_knm": (0.0, 1000.0)}
DRIVING_DEPTH_M = (0.0, 200.0)
DRIVING_BLOWS_MAX = 10_000
STEP_TOL_M = 0.001

MAX_BYTES = 10_000_000
MAX_ROWS = 100_000
MAX_ERRORS = 50
_TOL = 1e-9


@dataclass(frozen=True)
class FileError:
    """One problem in a file: row (header = 1; 0 for the whole file), column, message."""

    row: int
    column: str
    message: str

    def __str__(self) -> str:
        where = f"row {self.row}" if self.row else "file"
        return f"{where}, column {self.column}: {self.message}" if self.column else f"{where}: {self.message}"


class FileRejected(ValueError):
    """The file was refused whole; ``errors`` lists every problem found (up to MAX_ERRORS)."""

    def __init__(self, errors: list[FileError]):
        self.errors = errors
        more = f" (first {MAX_ERRORS} shown)" if len(errors) >= MAX_ERRORS else ""
        super().__init__(f"file refused, nothing kept: {len(errors)} problem(s){more}: "
                         + "; ".join(str(e) for e in errors[:5]))


def file_sha256(data: bytes) -> str:
    """SHA-256 of the file's bytes, hex: the original file is kept by this as evidence."""
    return hashlib.sha256(data).hexdigest()


# --------------------------------------------------------------------------------------------
# Reading cells
# --------------------------------------------------------------------------------------------

def _rows(data: bytes | str, columns: tuple[str, ...], required: tuple[str, ...],
          errors: list[FileError]) -> tuple[list[str], list[tuple[int, dict[str, str]]]]:
    """Header and (row number, {column: text}) of a comma-separated file, header problems added."""
    if isinstance(data, bytes):
        if len(data) > MAX_BYTES:
            errors.append(FileError(0, "", f"the file is larger than {MAX_BYTES // 1_000_000} MB"))
            return [], []
        try:
            text = data.decode("utf-8-sig")
        except UnicodeDecodeError:
            errors.append(FileError(0, "", "the file is not UTF-8 text: save it as CSV UTF-8"))
            return [], []
    else:
        text = data.lstrip("\ufeff")
    try:
        table = list(csv.reader(io.StringIO(text, newline="")))
    except csv.Error as exc:
        errors.append(FileError(0, "", f"the file is not valid CSV ({exc})"))
        return [], []
    if not table or not any(c.strip() for c in table[0]):
        errors.append(FileError(0, "", f"the file has no header row ({', '.join(columns)})"))
        return [], []
    header = [h.strip() for h in table[0]]
    while header and not header[-1]:
        header.pop()
    for name in header:
        if not name:
            errors.append(FileError(1, "", "a column has no name in the header row"))
        elif name not in columns:
            errors.append(FileError(1, name, f"unknown column {name!r}; the columns are {', '.join(columns)}"))
        elif header.count(name) > 1:
            errors.append(FileError(1, name, f"column {name!r} appears twice"))
    for name in required:
        if name not in header:
            errors.append(FileError(1, name, f"required column {name!r} is missing"))
    rows = []
    for number, cells in enumerate(table[1:], start=2):
        if not any(c.strip() for c in cells):
            continue
        if any(c.strip() for c in cells[len(header):]):
            errors.append(FileError(number, "", "the row has more cells than the header has columns"))
        rows.append((number, {h: (cells[i].strip() if i < len(cells) else "") for i, h in enumerate(header)}))
    if len(rows) > MAX_ROWS:
        errors.append(FileError(0, "", f"the file holds more than {MAX_ROWS:,} rows"))
        return header, []
    return header, rows


def _number(row: int, column: str, text: str, limits: tuple[float, float], errors: list[FileError],
            required: bool = True) -> float | None:
    """A cell as a number within ``limits``; a problem added (and None) otherwise."""
    if text == "":
        if required:
            errors.append(FileError(row, column, f"{column} is required"))
        return None
    try:
        value = float(text)
    except ValueError:
        errors.append(FileError(row, column, f"{column} must be a number, got {text!r}"))
        return None
    lo, hi = limits
    if not math.isfinite(value) or not lo <= value <= hi:
        errors.append(FileError(row, column, f"{column} must be from {lo:g} to {hi:g}, got {text}"))
        return None
    return value


def _fmt(x: float | None) -> str:
    """A number for the file: '' for None, whole numbers without '.0', else exact repr."""
    if x is None:
        return ""
    x = float(x)
    return str(int(x)) if x.is_integer() and abs(x) < 1e15 else repr(x)


def _write(columns: Iterable[str], rows: Iterable[Iterable[str]]) -> str:
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\n")
    w.writerow(list(columns))
    for row in rows:
        w.writerow(list(row))
    return out.getvalue()


def _raise(errors: list[FileError]) -> None:
    if errors:
        raise FileRejected(errors[:MAX_ERRORS])


# --------------------------------------------------------------------------------------------
# CFA rig log
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class RigFile:
    """A validated rig log file: the readings (design_core's ``RigLog``), the file's hash and rows."""

    log: RigLog
    sha256: str
    rows: int


def _time(row: int, text: str, errors: list[FileError]) -> float | datetime | None:
    """The time cell: seconds from the start (a number) or an ISO 8601 date-time."""
    if text == "":
        errors.append(FileError(row, "time", "time is required"))
        return None
    try:
        value = float(text)
    except ValueError:
        try:
            return datetime.fromisoformat(text)
        except ValueError:
            errors.append(FileError(row, "time", "time must be seconds from the start or an ISO 8601 "
                                    f"date-time (2026-03-04T10:15:30), got {text!r}"))
            return None
    if not math.isfinite(value) or value < 0:
        errors.append(FileError(row, "time", f"time in seconds must be 0 or more, got {text}"))
        return None
    return value


def parse_rig_csv(data: bytes | str) -> RigFile:
    """The rig log of one CFA pile from our rig CSV format, checked whole.

    FileRejected (a ValueError) names every problem by row and column: a missing column (and
    neither auger_rpm nor revolutions), a value that is not a number or outside its range
    (``design_core.cfa.RIG_LIMITS``), a phase other than drilling or extraction, drilling after
    extraction, depth going up while drilling or down while extracting, time, cumulative volume
    or revolutions going down, no extraction rows. Blank auger_rpm, revolutions,
    penetration_rate_m_per_min or concrete_pressure_kpa cells are allowed (a sensor gap: the
    check that needs them is then not checked).
    """
    errors: list[FileError] = []
    header, rows = _rows(data, RIG_COLUMNS, RIG_REQUIRED, errors)
    if header and not any(c in header for c in RIG_ROTATION):
        errors.append(FileError(1, "auger_rpm", "one of the columns auger_rpm or revolutions is required"))
    if errors:
        _raise(errors)
    if not rows:
        _raise([FileError(0, "", "the file holds no readings (only a header)")])
    readings: list[dict] = []
    times: list[tuple[int, float | datetime]] = []
    prev: dict | None = None
    seen_extraction = False
    for number, cells in rows:
        if len(errors) >= MAX_ERRORS:
            break
        n_before = len(errors)
        values = {}
        for name in ("depth_m", "concrete_volume_m3"):
            values[name] = _number(number, name, cells.get(name, ""), RIG_LIMITS[name], errors)
        for name in ("auger_rpm", "revolutions", "penetration_rate_m_per_min", "concrete_pressure_kpa"):
            values[name] = _number(number, name, cells.get(name, ""), RIG_LIMITS[name], errors,
                                   required=False)
        phase = cells.get("phase", "").lower()
        if phase not in PHASES:
            errors.append(FileError(number, "phase", f"phase must be {' or '.join(PHASES)}, got "
                                    f"{cells.get('phase', '')!r}"))
        t = _time(number, cells.get("time", ""), errors)
        if len(errors) > n_before:
            prev = None  # compare the next row with a good one only
            continue
        if phase == "extraction":
            seen_extraction = True
        elif seen_extraction:
            errors.append(FileError(number, "phase", "drilling after extraction began: one pile per file, "
                                    "drilling rows first"))
        values["phase"] = phase
        if prev is not None:
            _order(number, prev, values, errors)
            if times and type(times[-1][1]) is not type(t):
                errors.append(FileError(number, "time", "time mixes seconds and date-times"))
            elif times and isinstance(t, datetime) and (t.tzinfo is None) != (times[-1][1].tzinfo is None):
                errors.append(FileError(number, "time", "time mixes date-times with and without a time zone"))
            elif times and t < times[-1][1]:
                errors.append(FileError(number, "time", f"time goes back from row {times[-1][0]}"))
        readings.append(values)
        times.append((number, t))
        prev = values
    if not errors and not seen_extraction:
        errors.append(FileError(0, "phase", "the file has no extraction rows (the auger was not withdrawn)"))
    _raise(errors)
    first = times[0][1]
    start = first if isinstance(first, datetime) else None
    out = []
    for values, (_, t) in zip(readings, times, strict=True):
        secs = (t - first).total_seconds() if start is not None else float(t)
        if not RIG_LIMITS["time_s"][0] <= secs <= RIG_LIMITS["time_s"][1]:
            _raise([FileError(0, "time", f"the readings span more than {RIG_LIMITS['time_s'][1] / 86400:g} days")])
        out.append(RigReading(values["depth_m"], secs, values["phase"], values["concrete_volume_m3"],
                              values["revolutions"], values["auger_rpm"],
                              values["penetration_rate_m_per_min"], values["concrete_pressure_kpa"]))
    try:
        log = RigLog(tuple(out), start)
    except ValueError as exc:  # the row checks above should have found it; never store half a file
        _raise([FileError(0, "", str(exc))])
    raw = data if isinstance(data, bytes) else data.encode("utf-8")
    return RigFile(log, file_sha256(raw), len(out))


def _order(number: int, prev: dict, cur: dict, errors: list[FileError]) -> None:
    """Depth by phase, and the cumulative volume and revolutions, against the row before."""
    if prev["phase"] == cur["phase"]:
        if cur["phase"] == "drilling" and cur["depth_m"] < prev["depth_m"] - _TOL:
            errors.append(FileError(number, "depth_m", f"depth_m goes up ({prev['depth_m']:g} to "
                                    f"{cur['depth_m']:g} m) while drilling"))
        if cur["phase"] == "extraction" and cur["depth_m"] > prev["depth_m"] + _TOL:
            errors.append(FileError(number, "depth_m", f"depth_m goes down ({prev['depth_m']:g} to "
                                    f"{cur['depth_m']:g} m) while extracting"))
    for name in ("concrete_volume_m3", "revolutions"):
        a, b = prev[name], cur[name]
        if a is not None and b is not None and b < a - _TOL:
            errors.append(FileError(number, name, f"{name} is cumulative and must not go down "
                                    f"({a:g} to {b:g})"))


def rig_csv(log: RigLog) -> str:
    """The rig log back in the same CSV format (times as date-times when the file had them)."""
    rows = []
    for r in log.readings:
        t = (log.start + timedelta(seconds=r.time_s)).isoformat() if log.start else _fmt(r.time_s)
        rows.append((_fmt(r.depth_m), t, _fmt(r.auger_rpm), _fmt(r.revolutions),
                     _fmt(r.penetration_rate_m_per_min), _fmt(r.concrete_volume_m3),
                     _fmt(r.concrete_pressure_kpa), r.phase))
    return _write(RIG_COLUMNS, rows)


# --------------------------------------------------------------------------------------------
# Torque log (screw piles)
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class TorqueFile:
    """A validated torque log: readings from the top down, the file's hash."""

    readings: tuple[TorqueReading, ...]
    sha256: str


def parse_torque_csv(data: bytes | str) -> TorqueFile:
    """The torque log of one screw pile (depth_m, torque_knm), checked whole; depth must
    increase row by row. FileRejected names every problem by row and column."""
    errors: list[FileError] = []
    _, rows = _rows(data, TORQUE_COLUMNS, TORQUE_COLUMNS, errors)
    _raise(errors)
    if not rows:
        _raise([FileError(0, "", "the file holds no readings (only a header)")])
    out: list[TorqueReading] = []
    last: tuple[int, float] | None = None
    for number, cells in rows:
        if len(errors) >= MAX_ERRORS:
            break
        z = _number(number, "depth_m", cells["depth_m"], TORQUE_LIMITS["depth_m"], errors)
        t = _number(number, "torque_knm", cells["torque_knm"], TORQUE_LIMITS["torque_knm"], errors)
        if z is None or t is None:
            continue
        if last is not None and z <= last[1] + _TOL:
            errors.append(FileError(number, "depth_m", f"depth_m {z:g} is not below {last[1]:g} on row {last[0]}"))
        last = (number, z)
        out.append(TorqueReading(z, t))
    _raise(errors)
    raw = data if isinstance(data, bytes) else data.encode("utf-8")
    return TorqueFile(tuple(out), file_sha256(raw))


def torque_csv(readings: Iterable[TorqueReading]) -> str:
    """The torque log back in the same CSV format."""
    return _write(TORQUE_COLUMNS, ((_fmt(r.depth_m), _fmt(r.torque_knm)) for r in readings))


# --------------------------------------------------------------------------------------------
# Driving log (driven piles)
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class DrivingLogFile:
    """A validated driving log: depth (m) of the top of the first interval, blows per 0.25 m
    from the top down (the record's ``from_depth_m`` and ``blows_per_250mm``), the file's hash."""

    from_depth_m: float
    blows_per_250mm: tuple[int, ...]
    sha256: str


def parse_driving_csv(data: bytes | str) -> DrivingLogFile:
    """The driving log of one pile (depth_m at the top of each 0.25 m, blows), checked whole:
    each depth 0.25 m below the one before (within 1 mm), blows a whole number from 0 to 10000.
    FileRejected names every problem by row and column."""
    errors: list[FileError] = []
    _, rows = _rows(data, DRIVING_COLUMNS, DRIVING_COLUMNS, errors)
    _raise(errors)
    if not rows:
        _raise([FileError(0, "", "the file holds no intervals (only a header)")])
    blows: list[int] = []
    first: float | None = None
    last: tuple[int, float] | None = None
    for number, cells in rows:
        if len(errors) >= MAX_ERRORS:
            break
        z = _number(number, "depth_m", cells["depth_m"], DRIVING_DEPTH_M, errors)
        b = _number(number, "blows", cells["blows"], (0, DRIVING_BLOWS_MAX), errors)
        if b is not None and not float(b).is_integer():
            errors.append(FileError(number, "blows", f"blows must be a whole number, got {cells['blows']}"))
            b = None
        if z is None or b is None:
            last = None
            continue
        if last is not None and abs(z - (last[1] + BLOW_INTERVAL_M)) > STEP_TOL_M:
            errors.append(FileError(number, "depth_m", f"depth_m must be {last[1] + BLOW_INTERVAL_M:g} "
                                    f"(0.25 m below row {last[0]}), got {z:g}"))
        if first is None:
            first = z
        last = (number, z)
        blows.append(int(b))
    _raise(errors)
    raw = data if isinstance(data, bytes) else data.encode("utf-8")
    return DrivingLogFile(float(first), tuple(blows), file_sha256(raw))


def driving_csv(from_depth_m: float, blows_per_250mm: Iterable[int]) -> str:
    """The driving log back in the same CSV format."""
    return _write(DRIVING_COLUMNS, ((_fmt(round(from_depth_m + k * BLOW_INTERVAL_M, 6)), str(int(b)))
                                    for k, b in enumerate(blows_per_250mm)))
