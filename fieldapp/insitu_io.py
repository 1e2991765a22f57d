"""Reading Toeline's own CSV formats for in situ tests and load tests, checked whole.

Three formats, one reading per row, the first row naming the columns (any order; comma,
semicolon or tab separated; UTF-8; a point as the decimal mark). docs/in-situ-methods.md
describes them with their units and ranges:

* CPT sounding: ``depth_m, qc_mpa, fs_kpa`` and optionally ``u2_kpa``;
* SPT profile: ``depth_m, n, energy_ratio``;
* static load test: ``load_kn, settlement_mm`` and optionally ``time`` (minutes from the start
  of the test), ``hold`` (stage number) and ``cycle`` (loading cycle, 1, 2, ...).

Every problem is reported with its row (as a spreadsheet numbers it: the header is row 1) and
column, and a file with any problem gives nothing: ``InsituFileError`` carries the whole list.
An optional column is given on every row or on none. Parsing only: no database, no Flask; the
caller stores the result in one transaction.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from design_core.cpt import DEPTH_MAX_M, FS_RANGE_KPA, QC_RANGE_MPA, U2_RANGE_KPA, Sounding
from design_core.loadtest import LOAD_RANGE_KN, SETTLEMENT_RANGE_MM, TIME_RANGE_MIN, LoadTestRecord
from design_core.spt import ENERGY_RATIO_RANGE, N_RANGE, SptProfile
from fieldapp.schedule_io import RowError, read_csv

MAX_BYTES = 10 * 1024 * 1024
MAX_ROWS = 100_000
MAX_ERRORS = 50  # reported; counting stops here so a wrong file answers fast


@dataclass(frozen=True)
class Column:
    """One column of a format: name, whether required, range, whole numbers only, meaning."""

    name: str
    required: bool
    lo: float
    hi: float
    doc: str
    whole: bool = False


CPT_COLUMNS = (
    Column("depth_m", True, 0.0, DEPTH_MAX_M, "depth below the sounding's ground level, m, increasing"),
    Column("qc_mpa", True, *QC_RANGE_MPA, "cone resistance q_c, MPa"),
    Column("fs_kpa", True, *FS_RANGE_KPA, "sleeve friction f_s, kPa"),
    Column("u2_kpa", False, *U2_RANGE_KPA, "pore pressure behind the cone u_2, kPa (optional)"),
)
SPT_COLUMNS = (
    Column("depth_m", True, 0.0, DEPTH_MAX_M, "depth of the test below ground level, m, increasing"),
    Column("n", True, *N_RANGE, "blows for the last 300 mm of the test (N)", whole=True),
    Column("energy_ratio", True, *ENERGY_RATIO_RANGE, "hammer energy ratio ER, % (N60 = N ER/60)"),
)
LOAD_TEST_COLUMNS = (
    Column("load_kn", True, *LOAD_RANGE_KN, "load on the pile head, kN"),
    Column("settlement_mm", True, *SETTLEMENT_RANGE_MM, "settlement of the head, mm, down positive"),
    Column("time", False, *TIME_RANGE_MIN, "time of the reading, minutes from the start (optional)"),
    Column("hold", False, 0.0, 1e6, "stage number the reading belongs to (optional)", whole=True),
    Column("cycle", False, 1.0, 1e6, "loading cycle 1, 2, ... (optional)", whole=True),
)
FORMATS = {"cpt": CPT_COLUMNS, "spt": SPT_COLUMNS, "load_test": LOAD_TEST_COLUMNS}


class InsituFileError(ValueError):
    """A file refused: ``errors`` lists every problem found (row, column, message)."""

    def __init__(self, errors: list[RowError]):
        self.errors = sorted(errors, key=lambda e: e.row)  # stable: columns keep their order
        shown = "; ".join(str(e) for e in self.errors[:5])
        more = f" (and {len(self.errors) - 5} more)" if len(self.errors) > 5 else ""
        super().__init__(f"the file was not imported: {shown}{more}")


def _number(text: str) -> float | None:
    """A finite float from a cell, or None when it is not one."""
    try:
        value = float(text)
    except ValueError:
        return None
    return value if math.isfinite(value) else None


def read_table(data: bytes, columns: tuple[Column, ...]
               ) -> tuple[dict[str, list[float] | None], list[int]]:
    """The columns of a file as lists of numbers (None for an optional column not given), and
    the row number of each reading (as a spreadsheet numbers it).

    Raises InsituFileError with every problem: not UTF-8, too big, unknown, repeated or missing
    columns, a cell that is not a number or out of its range, an optional column given on some
    rows only, no rows. Rows are not reordered.
    """
    errors: list[RowError] = []
    if len(data) > MAX_BYTES:
        raise InsituFileError([RowError(0, "", f"the file is over {MAX_BYTES // (1024 * 1024)} MB")])
    try:
        header, rows = read_csv(data)
    except ValueError as exc:
        raise InsituFileError([RowError(0, "", str(exc))]) from None
    known = {c.name: c for c in columns}
    for h in header:
        if h not in known:
            errors.append(RowError(1, h, f"unknown column (the columns are "
                                         f"{', '.join(known)})"))
    for h in {h for h in header if header.count(h) > 1}:
        errors.append(RowError(1, h, "column given twice"))
    for c in columns:
        if c.required and c.name not in header:
            errors.append(RowError(1, c.name, f"required column missing ({c.doc})"))
    if errors:
        raise InsituFileError(errors)
    if not rows:
        raise InsituFileError([RowError(0, "", "the file has no readings")])
    if len(rows) > MAX_ROWS:
        raise InsituFileError([RowError(0, "", f"the file has over {MAX_ROWS} rows")])
    present = [c for c in columns if c.name in header]
    out: dict[str, list[float] | None] = {c.name: None for c in columns}
    for c in present:
        filled = [bool(row.get(c.name, "")) for _, row in rows]
        if not c.required and not any(filled):
            continue  # an optional column left empty: not given
        values: list[float] = []
        for (number, row), has in zip(rows, filled, strict=True):
            if len(errors) >= MAX_ERRORS:
                break
            text = row.get(c.name, "")
            if not has:
                why = ("required" if c.required else
                       "empty: give this optional column on every row or on none")
                errors.append(RowError(number, c.name, why))
                continue
            value = _number(text)
            if value is None:
                hint = " (use a point as the decimal mark)" if "," in text else ""
                errors.append(RowError(number, c.name, f"{text!r} is not a number{hint}"))
            elif not c.lo <= value <= c.hi:
                errors.append(RowError(number, c.name,
                                       f"{value:g} is outside {c.lo:g} to {c.hi:g} ({c.doc})"))
            elif c.whole and value != round(value):
                errors.append(RowError(number, c.name, f"{value:g} must be a whole number"))
            else:
                values.append(value)
        out[c.name] = values
    for number, row in rows:
        if row.get("") and len(errors) < MAX_ERRORS:
            errors.append(RowError(number, "", "more cells than columns in the header"))
    if errors:
        raise InsituFileError(errors)
    return out, [number for number, _ in rows]


def _increasing(depths: list[float], numbers: list[int], column: str) -> list[RowError]:
    """Errors for every row whose depth is not below the row before."""
    return [RowError(numbers[k], column, f"{depths[k]:g} m is not deeper than the row before "
                                         f"({depths[k - 1]:g} m)")
            for k in range(1, len(depths)) if depths[k] <= depths[k - 1]][:MAX_ERRORS]


def _build(make, *args, **kwargs):
    """Build the design_core object; its ValueError becomes a whole-file error."""
    try:
        return make(*args, **kwargs)
    except ValueError as exc:
        raise InsituFileError([RowError(0, "", str(exc))]) from None


def parse_cpt(data: bytes, *, name: str, easting: float, northing: float,
              ground_level: float) -> Sounding:
    """A CPT sounding from a file in the CPT format; InsituFileError naming every problem."""
    table, numbers = read_table(data, CPT_COLUMNS)
    errors = _increasing(table["depth_m"], numbers, "depth_m")
    if errors:
        raise InsituFileError(errors)
    return _build(Sounding, name, easting, northing, ground_level, table["depth_m"],
                  table["qc_mpa"], table["fs_kpa"], table["u2_kpa"])


def parse_spt(data: bytes, *, name: str, easting: float, northing: float,
              ground_level: float) -> SptProfile:
    """An SPT profile from a file in the SPT format; InsituFileError naming every problem."""
    table, numbers = read_table(data, SPT_COLUMNS)
    errors = _increasing(table["depth_m"], numbers, "depth_m")
    if errors:
        raise InsituFileError(errors)
    return _build(SptProfile, name, easting, northing, ground_level, table["depth_m"],
                  table["n"], table["energy_ratio"])


def parse_load_test(data: bytes) -> LoadTestRecord:
    """A static load test record from a file in the load test format (whole file or nothing).

    Besides the cell checks: times must not go back, and the rows of one hold must be
    consecutive (InsituFileError naming the row).
    """
    table, numbers = read_table(data, LOAD_TEST_COLUMNS)
    errors: list[RowError] = []
    times = table["time"]
    if times is not None:
        errors += [RowError(numbers[k], "time", f"{times[k]:g} is before the row above "
                                               f"({times[k - 1]:g})")
                   for k in range(1, len(times)) if times[k] < times[k - 1]][:MAX_ERRORS]
    holds = table["hold"]
    if holds is not None:
        seen: set[float] = set()
        for k, h in enumerate(holds):
            if k and h != holds[k - 1] and h in seen:
                errors.append(RowError(numbers[k], "hold", f"hold {h:g} started earlier: the rows of "
                                                      "one hold must be consecutive"))
            seen.add(h)
    if errors:
        raise InsituFileError(errors[:MAX_ERRORS])
    return _build(LoadTestRecord, table["load_kn"], table["settlement_mm"], table["time"],
                  table["hold"], table["cycle"])
