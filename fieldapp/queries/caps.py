"""Caps (pile groups) and their loads: N, Mx, My (kN, kNm) and Hx, Hy (kN).

``cap_loads`` and ``cap_pile_positions`` give the stored rows that ``fieldapp.pile_inputs.cap_group``
turns into the ``design_core.inputs.CapGroup`` the group check shares loads over.
"""

from __future__ import annotations

import functools
import math
import re
import sqlite3
from dataclasses import dataclass

CAP_LOAD_FIELDS = ("n_kn", "mx_knm", "my_knm", "hx_kn", "hy_kn")
CAP_LOAD_LIMIT = 1e7  # kN or kNm, the range design_core.inputs.CapGroup accepts


@dataclass(frozen=True)
class CapRow:
    """One cap: its mark, loads at the centroid of its piles, and the marks of its piles."""

    id: int
    project_id: int
    mark: str
    n_kn: float
    mx_knm: float
    my_knm: float
    hx_kn: float
    hy_kn: float
    pile_marks: tuple[str, ...]

    @property
    def n_piles(self) -> int:
        """How many piles the cap stands on."""
        return len(self.pile_marks)


def _cap(conn: sqlite3.Connection, row) -> CapRow | None:
    if row is None:
        return None
    marks = tuple(r["mark"] for r in conn.execute(
        "SELECT mark FROM piles WHERE cap_id = ? ORDER BY mark", (row["id"],)).fetchall())
    return CapRow(row["id"], row["project_id"], row["mark"], row["n_kn"], row["mx_knm"],
                  row["my_knm"], row["hx_kn"], row["hy_kn"], tuple(sorted(marks, key=natural_key)))


@functools.lru_cache(maxsize=65536)  # marks repeat on every list of the schedule
def natural_key(text: str) -> tuple:
    """Sort key that puts P2 before P10."""
    return tuple(int(p) if p.isdigit() else p.lower() for p in re.split(r"(\d+)", text or ""))


def list_caps(conn: sqlite3.Connection, project_id: int) -> list[CapRow]:
    """Every cap of the project, in natural order of mark."""
    rows = conn.execute("SELECT * FROM caps WHERE project_id = ?", (project_id,)).fetchall()
    return sorted((_cap(conn, r) for r in rows), key=lambda c: natural_key(c.mark))


def get_cap(conn: sqlite3.Connection, project_id: int, cap_id: int) -> CapRow | None:
    """One cap of the project, or None."""
    return _cap(conn, conn.execute("SELECT * FROM caps WHERE id = ? AND project_id = ?",
                                   (cap_id, project_id)).fetchone())


def by_mark(conn: sqlite3.Connection, project_id: int, mark: str) -> CapRow | None:
    """The project's cap with this mark, or None."""
    return _cap(conn, conn.execute("SELECT * FROM caps WHERE project_id = ? AND mark = ?",
                                   (project_id, mark)).fetchone())


def marks(conn: sqlite3.Connection, project_id: int) -> dict[str, int]:
    """Cap mark -> id for the project."""
    return {r["mark"]: r["id"] for r in conn.execute(
        "SELECT id, mark FROM caps WHERE project_id = ?", (project_id,)).fetchall()}


def check_loads(values: dict) -> None:
    """ValueError naming the field unless every cap load is a finite number within +-1e7."""
    for name in CAP_LOAD_FIELDS:
        value = values.get(name, 0.0)
        if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
            raise ValueError(f"{name} must be a finite number, got {value!r}")
        if abs(value) > CAP_LOAD_LIMIT:
            raise ValueError(f"{name} must be within ±{CAP_LOAD_LIMIT:,.0f}, got {value:g}")


def save_cap(conn: sqlite3.Connection, project_id: int, mark: str, loads: dict | None = None,
             cap_id: int | None = None) -> int:
    """Insert (or, given ``cap_id``, update) a cap; returns its id. Call inside db.write.

    ``loads`` holds any of ``CAP_LOAD_FIELDS`` (missing ones are 0). ValueError when the mark is
    blank or taken by another cap of the project, or a load is out of range.
    """
    mark = (mark or "").strip()
    if not mark:
        raise ValueError("mark is required")
    if len(mark) > 40:
        raise ValueError("mark must be at most 40 characters")
    values = {name: float((loads or {}).get(name) or 0.0) for name in CAP_LOAD_FIELDS}
    check_loads(values)
    clash = conn.execute("SELECT id FROM caps WHERE project_id = ? AND mark = ? AND id IS DISTINCT FROM ?",
                         (project_id, mark, cap_id)).fetchone()
    if clash:
        raise ValueError(f"mark: another cap is already called {mark!r}")
    if cap_id is None:
        cur = conn.execute(
            "INSERT INTO caps (project_id, mark, n_kn, mx_knm, my_knm, hx_kn, hy_kn) "
            "VALUES (?, ?, ?, ?, ?, ?, ?)", (project_id, mark, *(values[n] for n in CAP_LOAD_FIELDS)))
        return cur.lastrowid
    cur = conn.execute(
        "UPDATE caps SET mark = ?, n_kn = ?, mx_knm = ?, my_knm = ?, hx_kn = ?, hy_kn = ? "
        "WHERE id = ? AND project_id = ?",
        (mark, *(values[n] for n in CAP_LOAD_FIELDS), cap_id, project_id))
    if cur.rowcount != 1:
        raise LookupError(f"cap {cap_id} is not in project {project_id}")
    return cap_id


def cap_loads(conn: sqlite3.Connection, cap_id: int):
    """The stored row of a cap (mark and loads by CAP_LOAD_FIELDS), or None."""
    return conn.execute("SELECT * FROM caps WHERE id = ?", (cap_id,)).fetchone()


def cap_pile_positions(conn: sqlite3.Connection, cap_id: int) -> list[tuple[str, float, float]]:
    """(mark, design easting m, design northing m) of each pile of the cap, in natural mark order."""
    rows = conn.execute("SELECT mark, easting_m, northing_m FROM piles WHERE cap_id = ?",
                        (cap_id,)).fetchall()
    return sorted(((r["mark"], r["easting_m"], r["northing_m"]) for r in rows),
                  key=lambda r: natural_key(r[0]))
