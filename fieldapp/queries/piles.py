"""The pile schedule: one row per pile, design values and its progress.

``PileRow`` carries every stored column plus the cap mark and ground model name
(``fieldapp.pile_inputs.pile_design`` turns a row into the ``PileDesign`` the checks take).
``PROGRESS`` names a pile's states of work, here once for the whole app.
``FIELDS`` lists each schedule value with its unit and allowed range, used by the forms and
the CSV/XLSX import so both give the same messages.
"""

from __future__ import annotations

import math
import sqlite3
from dataclasses import dataclass, fields

from design_core.checks import MEETS_DESIGN, NEEDS_ENGINEER
from design_core.inputs import HEAD_CONDITIONS, PILE_TYPES
from fieldapp.queries.caps import natural_key

PROGRESS = ("planned", "boring", "concreted", "logged")
VERDICTS = (MEETS_DESIGN, NEEDS_ENGINEER)


@dataclass(frozen=True)
class FieldSpec:
    """One schedule value: column name, label, unit, kind (number/int/text/choice) and range."""

    name: str
    label: str
    unit: str = ""
    kind: str = "number"
    lo: float | None = None
    hi: float | None = None
    required: bool = True
    default: object = None
    choices: tuple[str, ...] = ()

    def range_text(self) -> str:
        """The allowed range in words, e.g. '150 to 3,000 mm'."""
        unit = f" {self.unit}" if self.unit else ""
        if self.kind == "choice":
            return "one of " + ", ".join(self.choices)
        if self.lo is not None and self.hi is not None:
            if self.lo == -self.hi:
                return f"within ±{_num(self.hi)}{unit}"
            return f"{_num(self.lo)} to {_num(self.hi)}{unit}"
        return "a number"


def _num(x: float) -> str:
    return f"{x:,.0f}" if float(x).is_integer() else f"{x:,g}"


LEVEL_LIMIT_M = 10_000.0
COORD_LIMIT_M = 10_000_000.0

# The design values of a pile, in schedule order (cap and ground model are looked up by name).
FIELDS: tuple[FieldSpec, ...] = (
    FieldSpec("pile_type", "Pile type", kind="choice", choices=PILE_TYPES, default="bored"),
    FieldSpec("easting_m", "Easting", "m", lo=-COORD_LIMIT_M, hi=COORD_LIMIT_M),
    FieldSpec("northing_m", "Northing", "m", lo=-COORD_LIMIT_M, hi=COORD_LIMIT_M),
    FieldSpec("cutoff_level_m", "Cut-off level", "m", lo=-LEVEL_LIMIT_M, hi=LEVEL_LIMIT_M),
    FieldSpec("toe_level_m", "Toe level", "m", lo=-LEVEL_LIMIT_M, hi=LEVEL_LIMIT_M),
    FieldSpec("diameter_mm", "Diameter", "mm", lo=150, hi=3000),
    FieldSpec("compression_kn", "Compression", "kN", lo=0, hi=1_000_000, required=False, default=0.0),
    FieldSpec("tension_kn", "Tension", "kN", lo=0, hi=1_000_000, required=False, default=0.0),
    FieldSpec("shear_kn", "Head shear", "kN", lo=0, hi=1_000_000, required=False, default=0.0),
    FieldSpec("moment_knm", "Head moment", "kNm", lo=0, hi=1_000_000, required=False, default=0.0),
    FieldSpec("n_bars", "Number of bars", "", kind="int", lo=0, hi=200, required=False, default=0),
    FieldSpec("bar_mm", "Bar diameter", "mm", lo=0, hi=63, required=False, default=0.0),
    FieldSpec("cage_length_m", "Cage length", "m", lo=0, hi=200, required=False, default=0.0),
    FieldSpec("fc_mpa", "Concrete strength f_c", "MPa", lo=10, hi=120, required=False, default=32.0),
    FieldSpec("fy_mpa", "Steel strength f_y", "MPa", lo=200, hi=700, required=False, default=500.0),
    FieldSpec("exposure_class", "Exposure class", kind="text", required=False, default="XC2"),
    FieldSpec("cover_mm", "Design cover", "mm", lo=0, hi=300, required=False, default=75.0),
    FieldSpec("head", "Head", kind="choice", choices=HEAD_CONDITIONS, required=False, default="free"),
)
FIELD_BY_NAME = {f.name: f for f in FIELDS}
MARK_MAX = 40


FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def label_problem(name: str, value: str) -> str | None:
    """A message when a mark or name starts like a spreadsheet formula (=, +, -, @), else None.

    Marks and names go into CSV/XLSX exports, where such text would be run as a formula.
    """
    if value and value.startswith(FORMULA_STARTS):
        return f"{name} must not start with {value[0]!r} (a spreadsheet would read it as a formula)"
    return None


def check_value(spec: FieldSpec, value) -> tuple[object, str | None]:
    """(clean value, None) or (None, message naming the field and its allowed range).

    ``value`` may be a string (from a file or form) or a number; blanks take the default of an
    optional field.
    """
    if isinstance(value, str):
        value = value.strip()
    if value is None or value == "":
        if spec.required:
            return None, f"{spec.name} is required ({spec.range_text()})"
        return spec.default, None
    if spec.kind == "choice":
        text = str(value).strip().lower()
        if text not in spec.choices:
            return None, f"{spec.name} must be {spec.range_text()}, got {value!r}"
        return text, None
    if spec.kind == "text":
        text = str(value).strip()
        if len(text) > 40:
            return None, f"{spec.name} must be at most 40 characters"
        return text, None
    try:
        number = float(value)
    except (TypeError, ValueError):
        return None, f"{spec.name} must be a number ({spec.range_text()}), got {value!r}"
    if not math.isfinite(number):
        return None, f"{spec.name} must be a finite number ({spec.range_text()})"
    if spec.kind == "int":
        if not number.is_integer():
            return None, f"{spec.name} must be a whole number ({spec.range_text()}), got {value!r}"
        number = int(number)
    if (spec.lo is not None and number < spec.lo) or (spec.hi is not None and number > spec.hi):
        return None, f"{spec.name} must be {spec.range_text()}, got {_num(number)}"
    return number, None


def check_pile(values: dict) -> list[tuple[str, str]]:
    """Cross-field checks on clean values: [(field, message)]; empty when consistent."""
    errors = []
    cut, toe = values.get("cutoff_level_m"), values.get("toe_level_m")
    if cut is not None and toe is not None and toe >= cut:
        errors.append(("toe_level_m", f"toe_level_m ({toe:g} m) must be below cutoff_level_m ({cut:g} m)"))
    n_bars, bar = values.get("n_bars"), values.get("bar_mm")
    if n_bars and bar is not None and bar < 6:
        errors.append(("bar_mm", f"bar_mm must be 6 to 63 mm when n_bars is {n_bars}, got {bar:g}"))
    if n_bars is not None and 0 < n_bars < 3:
        errors.append(("n_bars", f"n_bars must be 0 or 3 to 200 bars in a circular cage, got {n_bars}"))
    cage = values.get("cage_length_m")
    if cut is not None and toe is not None and toe < cut and cage and cage > cut - toe + 1e-9:
        errors.append(("cage_length_m", f"cage_length_m ({cage:g} m) must be at most the pile length "
                       f"{cut - toe:g} m (cut-off to toe)"))
    return errors


@dataclass(frozen=True)
class PileRow:
    """One pile of the schedule: every stored column, with its cap mark and ground model name."""

    id: int
    project_id: int
    mark: str
    cap_id: int | None
    cap_mark: str | None
    pile_type: str
    easting_m: float
    northing_m: float
    cutoff_level_m: float
    toe_level_m: float
    diameter_mm: float
    ground_model_id: int
    ground_model_name: str
    compression_kn: float
    tension_kn: float
    shear_kn: float
    moment_knm: float
    n_bars: int
    bar_mm: float
    cage_length_m: float
    fc_mpa: float
    fy_mpa: float
    exposure_class: str
    cover_mm: float
    head: str
    progress: str
    verdict: str | None
    worst_utilisation: float | None
    current_version: int

    @property
    def length_m(self) -> float:
        """Design length from cut-off to toe (m)."""
        return self.cutoff_level_m - self.toe_level_m


_ROW_NAMES = [f.name for f in fields(PileRow)]
_JOINED = {"cap_mark": "c.mark AS cap_mark", "ground_model_name": "g.name AS ground_model_name"}
# Columns named in PileRow's order, so a row becomes a PileRow positionally (a 2,000-pile list
# spent most of its time looking up 58,000 values by name).
_SELECT = ("SELECT " + ", ".join(_JOINED.get(n, f"p.{n}") for n in _ROW_NAMES) + " FROM piles p "
           "LEFT JOIN caps c ON c.id = p.cap_id JOIN ground_models g ON g.id = p.ground_model_id ")


def _pile(row) -> PileRow | None:
    if not row:
        return None
    # The frozen dataclass's __init__ sets each of the 29 fields through object.__setattr__;
    # filling the instance dict directly gives the same object at a fraction of the cost
    # (a 2,000-pile list made 58,000 such calls).
    pile = object.__new__(PileRow)
    pile.__dict__.update(zip(_ROW_NAMES, row, strict=True))
    return pile


# Sort keys offered on the Piles screen: name -> key on a PileRow.
SORTS = {
    "mark": lambda p: natural_key(p.mark),
    "cap": lambda p: (natural_key(p.cap_mark or ""), natural_key(p.mark)),
    "type": lambda p: (p.pile_type, natural_key(p.mark)),
    "diameter": lambda p: (p.diameter_mm, natural_key(p.mark)),
    "toe": lambda p: (p.toe_level_m, natural_key(p.mark)),
    "compression": lambda p: (p.compression_kn, natural_key(p.mark)),
    "ground": lambda p: (p.ground_model_name, natural_key(p.mark)),
    "progress": lambda p: (PROGRESS.index(p.progress), natural_key(p.mark)),
    "verdict": lambda p: ({NEEDS_ENGINEER: 0, MEETS_DESIGN: 1}.get(p.verdict or "", 2),
                          natural_key(p.mark)),
    "utilisation": lambda p: (-(p.worst_utilisation if p.worst_utilisation is not None else -1e9),
                              natural_key(p.mark)),
}


def list_piles(conn: sqlite3.Connection, project_id: int, *, progress: str | None = None,
               verdict: str | None = None, cap: str | None = None, ground_model_id: int | None = None,
               pile_type: str | None = None, search: str | None = None, sort: str = "mark",
               descending: bool = False, cap_id: int | None = None) -> list[PileRow]:
    """The project's piles, filtered and sorted.

    Filters (None or '' means any): ``progress`` one of PROGRESS; ``verdict`` one of VERDICTS or
    'none' (not yet checked); ``cap`` a cap mark; ``cap_id`` a cap's id (read through the
    ``piles_cap`` index: the quick way to a cap's piles); ``ground_model_id``; ``pile_type``;
    ``search`` a part of the mark. ``sort`` is a key of SORTS (unknown keys sort by mark).
    """
    sql = _SELECT + "WHERE p.project_id = ?"
    params: list = [project_id]
    if verdict == "none":
        sql += " AND p.verdict IS NULL"
        verdict = None
    equal = (("p.cap_id", cap_id), ("p.progress", progress),
             ("p.verdict", verdict), ("c.mark", cap), ("p.ground_model_id", ground_model_id),
             ("p.pile_type", pile_type))
    for column, value in equal:
        if value:       # None, '' and 0 mean any (ids start at 1)
            sql += f" AND {column} = ?"
            params.append(value)
    if search:
        sql += " AND LOWER(p.mark) LIKE ? ESCAPE '\\'"
        escaped = search.lower().replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")
        params.append(f"%{escaped}%")
    cursor = conn.cursor()
    cursor.row_factory = None  # plain tuples: _pile fills by position (2,000 rows: half the time)
    piles = [_pile(r) for r in cursor.execute(sql, params).fetchall()]
    return sorted(piles, key=SORTS.get(sort, SORTS["mark"]), reverse=descending)


def get_pile(conn: sqlite3.Connection, project_id: int, mark: str) -> PileRow | None:
    """The project's pile with this mark, or None."""
    return _pile(conn.execute(_SELECT + "WHERE p.project_id = ? AND p.mark = ?",
                              (project_id, mark)).fetchone())


def get_pile_by_id(conn: sqlite3.Connection, project_id: int, pile_id: int) -> PileRow | None:
    """The project's pile with this id, or None."""
    return _pile(conn.execute(_SELECT + "WHERE p.project_id = ? AND p.id = ?",
                              (project_id, pile_id)).fetchone())


def count(conn: sqlite3.Connection, project_id: int) -> int:
    """How many piles the project has."""
    return conn.execute("SELECT COUNT(*) FROM piles WHERE project_id = ?", (project_id,)).fetchone()[0]


# Columns written by save_pile: the design values plus mark, cap and ground model.
WRITE_COLUMNS = ("mark", "cap_id", "ground_model_id") + tuple(f.name for f in FIELDS)


def save_pile(conn: sqlite3.Connection, project_id: int, values: dict, pile_id: int | None = None) -> int:
    """Insert (or, given ``pile_id``, update) a pile's design values; returns its id.

    ``values`` holds every name of WRITE_COLUMNS, already checked. Progress, verdict and
    records are left as they are. ValueError when the mark is taken by another pile of the
    project. Call inside db.write.
    """
    mark = (values.get("mark") or "").strip()
    if not mark or len(mark) > MARK_MAX:
        raise ValueError(f"mark is required (1 to {MARK_MAX} characters)")
    clash = conn.execute("SELECT id FROM piles WHERE project_id = ? AND mark = ? AND id IS DISTINCT FROM ?",
                         (project_id, mark, pile_id)).fetchone()
    if clash:
        raise ValueError(f"mark: another pile is already called {mark!r}")
    data = dict(values, mark=mark)
    cols = list(WRITE_COLUMNS)
    if pile_id is None:
        cur = conn.execute(
            f"INSERT INTO piles (project_id, {', '.join(cols)}) VALUES (?{', ?' * len(cols)})",
            [project_id] + [data[c] for c in cols])
        return cur.lastrowid
    cur = conn.execute(
        f"UPDATE piles SET {', '.join(c + ' = ?' for c in cols)} WHERE id = ? AND project_id = ?",
        [data[c] for c in cols] + [pile_id, project_id])
    if cur.rowcount != 1:
        raise LookupError(f"pile {pile_id} is not in project {project_id}")
    return pile_id


def upsert_by_mark(conn: sqlite3.Connection, project_id: int, values: dict) -> tuple[str, int]:
    """Create the pile or update the one with the same mark: ('created' | 'updated', id)."""
    row = conn.execute("SELECT id FROM piles WHERE project_id = ? AND mark = ?",
                       (project_id, values["mark"].strip())).fetchone()
    if row is None:
        return "created", save_pile(conn, project_id, values)
    return "updated", save_pile(conn, project_id, values, row["id"])


def as_values(row: PileRow) -> dict:
    """The design values of a row keyed by WRITE_COLUMNS (for edits and round trips)."""
    return {name: getattr(row, name) for name in WRITE_COLUMNS}


def exposure_classes_used(conn: sqlite3.Connection, project_id: int) -> dict[str, int]:
    """Exposure class -> number of the project's piles designed for it."""
    return {r[0]: r[1] for r in conn.execute(
        "SELECT exposure_class, COUNT(*) FROM piles WHERE project_id = ? GROUP BY exposure_class",
        (project_id,)).fetchall()}


def check_in_ground(values: dict, model_name: str, bottom_m: float) -> list[tuple[str, str]]:
    """[(field, message)] when the design toe lies below the bottom of its ground model (the
    capacity check needs the ground down to the toe)."""
    toe = values.get("toe_level_m")
    if toe is not None and toe < bottom_m - 1e-6:
        return [("toe_level_m", f"toe_level_m ({toe:g} m) is below the bottom of ground model {model_name!r} "
                 f"({bottom_m:g} m): extend the ground model or raise the toe")]
    return []


def count_checked(conn: sqlite3.Connection, project_id: int) -> int:
    """How many of the project's piles already carry a verdict."""
    return conn.execute("SELECT COUNT(*) FROM piles WHERE project_id = ? AND verdict IS NOT NULL",
                        (project_id,)).fetchone()[0]


# --------------------------------------------------------------------------------------------
# One page of the schedule (the Piles screen and the paged pile list at any size)
# --------------------------------------------------------------------------------------------

# The column each sort key reads (besides the mark) when only the sort keys of a large
# schedule are fetched; the key function is SORTS' own, on a light row of these attributes.
_SORT_COLUMNS = {"mark": "p.mark", "cap": "c.mark", "type": "p.pile_type", "diameter": "p.diameter_mm",
                 "toe": "p.toe_level_m", "compression": "p.compression_kn", "ground": "g.name",
                 "progress": "p.progress", "verdict": "p.verdict", "utilisation": "p.worst_utilisation"}
_SORT_ATTR = {"mark": "mark", "cap": "cap_mark", "type": "pile_type", "diameter": "diameter_mm",
              "toe": "toe_level_m", "compression": "compression_kn", "ground": "ground_model_name",
              "progress": "progress", "verdict": "verdict", "utilisation": "worst_utilisation"}


@dataclass(frozen=True)
class PageQuery:
    """Filters, sort and window of one page of the schedule (None or '' means any).

    ``mark_prefix`` a start of the mark (case-insensitive); ``rig`` the rig named in the current
    record; ``bbox`` (min easting, min northing, max easting, max northing) in m, an area of the
    site plan; ``offset`` and ``limit`` the window; ``after`` a mark: the page starts after it in
    the chosen order (keyset paging; ``offset`` is then ignored).
    """

    progress: str | None = None
    verdict: str | None = None
    cap: str | None = None
    ground_model_id: int | None = None
    pile_type: str | None = None
    search: str | None = None
    mark_prefix: str | None = None
    rig: str | None = None
    bbox: tuple[float, float, float, float] | None = None
    sort: str = "mark"
    descending: bool = False
    offset: int = 0
    limit: int = 200
    after: str | None = None


@dataclass(frozen=True)
class Page:
    """One page: its rows, how many piles match in all, where it starts and whether more follow."""

    rows: list[PileRow]
    total: int
    offset: int
    more: bool


class _Light:
    __slots__ = ("id", "mark", "cap_mark", "pile_type", "diameter_mm", "toe_level_m", "compression_kn",
                 "ground_model_name", "progress", "verdict", "worst_utilisation")


def _like(text: str) -> str:
    return text.lower().replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")


def _where(project_id: int, q: PageQuery) -> tuple[str, list]:
    sql = " WHERE p.project_id = ?"
    params: list = [project_id]
    verdict = q.verdict
    if verdict == "none":
        sql += " AND p.verdict IS NULL"
        verdict = None
    for column, value in (("p.progress", q.progress), ("p.verdict", verdict), ("c.mark", q.cap),
                          ("p.ground_model_id", q.ground_model_id), ("p.pile_type", q.pile_type)):
        if value:
            sql += f" AND {column} = ?"
            params.append(value)
    if q.search:
        sql += " AND LOWER(p.mark) LIKE ? ESCAPE '\\'"
        params.append(f"%{_like(q.search)}%")
    if q.mark_prefix:
        sql += " AND LOWER(p.mark) LIKE ? ESCAPE '\\'"
        params.append(f"{_like(q.mark_prefix)}%")
    if q.bbox:
        sql += " AND p.easting_m BETWEEN ? AND ? AND p.northing_m BETWEEN ? AND ?"
        params += [q.bbox[0], q.bbox[2], q.bbox[1], q.bbox[3]]
    if q.rig:
        sql += (" AND EXISTS (SELECT 1 FROM pile_records r WHERE r.pile_id = p.id"
                " AND r.version = p.current_version AND LOWER(json_extract(r.record_json, '$.rig')) = ?)")
        params.append(q.rig.strip().lower())
    return sql, params


_FROM = " FROM piles p LEFT JOIN caps c ON c.id = p.cap_id JOIN ground_models g ON g.id = p.ground_model_id"


def list_page(conn: sqlite3.Connection, project_id: int, q: PageQuery) -> Page:
    """One page of the project's piles, filtered and sorted as ``list_piles`` sorts them.

    Only the id, mark and sort column of the matching piles are read and sorted (natural order
    of marks, as the whole list); the full rows are then read for the page alone, so a page of
    a 20,000-pile schedule costs a fraction of the whole list.
    """
    where, params = _where(project_id, q)
    sort = q.sort if q.sort in SORTS else "mark"
    column, attr = _SORT_COLUMNS[sort], _SORT_ATTR[sort]
    cursor = conn.cursor()
    cursor.row_factory = None
    light = []
    for pile_id, mark, value in cursor.execute(f"SELECT p.id, p.mark, {column}{_FROM}{where}", params):
        row = _Light()
        row.id, row.mark = pile_id, mark
        setattr(row, attr, value)
        light.append(row)
    key = SORTS[sort]
    light.sort(key=key, reverse=q.descending)
    start = max(0, q.offset)
    if q.after is not None:
        start = next((i + 1 for i, r in enumerate(light) if r.mark == q.after), len(light))
    window = light[start:start + q.limit]
    return Page(by_ids(conn, project_id, [r.id for r in window]), len(light), start,
                start + len(window) < len(light))


def by_ids(conn: sqlite3.Connection, project_id: int, ids: list[int]) -> list[PileRow]:
    """The project's piles with these ids, in the order given (ids of other projects are left out)."""
    cursor = conn.cursor()
    cursor.row_factory = None
    full: dict[int, PileRow] = {}
    for chunk in range(0, len(ids), 500):
        part = list(ids[chunk:chunk + 500])
        rows = cursor.execute(_SELECT + f"WHERE p.project_id = ? AND p.id IN ({', '.join('?' * len(part))})",
                              [project_id] + part).fetchall()
        full.update((r[0], _pile(r)) for r in rows)
    return [full[i] for i in ids if i in full]


def summary(conn: sqlite3.Connection, project_id: int) -> dict:
    """Counts of the whole schedule: total, per progress, and meets design / needs engineer."""
    out = {"total": 0, "progress": dict.fromkeys(PROGRESS, 0), "meets": 0, "needs": 0}
    for progress, verdict, n in conn.execute(
            "SELECT progress, verdict, COUNT(*) FROM piles WHERE project_id = ? GROUP BY progress, verdict",
            (project_id,)).fetchall():
        out["total"] += n
        out["progress"][progress] = out["progress"].get(progress, 0) + n
        if verdict == MEETS_DESIGN:
            out["meets"] += n
        elif verdict == NEEDS_ENGINEER:
            out["needs"] += n
    return out


def plan_points(conn: sqlite3.Connection, project_id: int) -> list[tuple]:
    """(mark, easting m, northing m, progress, verdict) of every pile, for the site plan."""
    cursor = conn.cursor()
    cursor.row_factory = None
    return cursor.execute("SELECT mark, easting_m, northing_m, progress, verdict FROM piles"
                          " WHERE project_id = ?", (project_id,)).fetchall()
