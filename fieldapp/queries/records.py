"""Saved versions of each pile's as-built record (table ``pile_records``).

Every save is a new row; nothing is updated or deleted. ``piles.current_version`` names the
newest version of a pile and is moved by :func:`set_pile_state` in the same transaction as the
insert (see ``fieldapp.saving.save_record``, the one save path).
"""

from __future__ import annotations

import json
import sqlite3
from dataclasses import dataclass
from typing import Any

from fieldapp.queries.audit import now_iso


@dataclass(frozen=True)
class RecordVersion:
    """One saved version: the record as entered, its verdict and checks (dicts as in the API)."""

    id: int
    project_id: int
    pile_id: int
    version: int
    client_id: str
    record: dict[str, Any]
    progress: str
    verdict: str
    worst_utilisation: float | None
    checks: list[dict[str, Any]]
    borrowed: list[dict[str, Any]]
    notes: list[str]
    rules_version: int
    created_by: int | None
    created_by_name: str
    created_at: str

    def answer(self) -> dict[str, Any]:
        """The API's answer to the save that made this version (the same on every repeat)."""
        return {"version": self.version, "verdict": self.verdict, "checks": self.checks,
                "borrowed": self.borrowed, "notes": self.notes,
                "worst_utilisation": self.worst_utilisation, "progress": self.progress,
                "rules_version": self.rules_version}

    def to_dict(self) -> dict[str, Any]:
        """Everything, JSON-ready (history and conflict answers)."""
        return {"version": self.version, "record": self.record, "progress": self.progress,
                "verdict": self.verdict, "worst_utilisation": self.worst_utilisation,
                "checks": self.checks, "borrowed": self.borrowed, "notes": self.notes,
                "rules_version": self.rules_version, "created_by": self.created_by_name,
                "created_at": self.created_at, "client_id": self.client_id}


_SELECT = ("SELECT r.*, COALESCE(NULLIF(u.name, ''), u.email, '') AS created_by_name "
           "FROM pile_records r LEFT JOIN users u ON u.id = r.created_by ")


def _version(row) -> RecordVersion | None:
    if row is None:
        return None
    return RecordVersion(
        row["id"], row["project_id"], row["pile_id"], row["version"], row["client_id"],
        json.loads(row["record_json"]), row["progress"], row["verdict"], row["worst_utilisation"],
        json.loads(row["checks_json"]), json.loads(row["borrowed_json"]),
        json.loads(row["notes_json"]), row["rules_version"], row["created_by"],
        row["created_by_name"], row["created_at"])


def by_client_id(conn: sqlite3.Connection, project_id: int, client_id: str) -> RecordVersion | None:
    """The version a client's save in this project made, or None if that save never arrived
    (client ids are unique per project)."""
    return _version(conn.execute(_SELECT + "WHERE r.project_id = ? AND r.client_id = ?",
                                 (project_id, client_id)).fetchone())


def current(conn: sqlite3.Connection, pile_id: int) -> RecordVersion | None:
    """The newest version of a pile's record, or None when nothing was recorded."""
    return _version(conn.execute(_SELECT + "WHERE r.pile_id = ? ORDER BY r.version DESC LIMIT 1",
                                 (pile_id,)).fetchone())


def get_version(conn: sqlite3.Connection, pile_id: int, version: int) -> RecordVersion | None:
    """One version of a pile's record, or None."""
    return _version(conn.execute(_SELECT + "WHERE r.pile_id = ? AND r.version = ?",
                                 (pile_id, version)).fetchone())


def history(conn: sqlite3.Connection, pile_id: int) -> list[RecordVersion]:
    """Every version of a pile's record, oldest first."""
    return [_version(r) for r in conn.execute(
        _SELECT + "WHERE r.pile_id = ? ORDER BY r.version", (pile_id,)).fetchall()]


def current_for_project(conn: sqlite3.Connection, project_id: int) -> dict[int, RecordVersion]:
    """The newest version of every recorded pile of a project, by pile id."""
    rows = conn.execute(
        _SELECT + "JOIN piles p ON p.id = r.pile_id AND p.current_version = r.version "
        "WHERE r.project_id = ?", (project_id,)).fetchall()
    return {row["pile_id"]: _version(row) for row in rows}


def current_positions_in_cap(conn: sqlite3.Connection, cap_id: int) -> dict[str, tuple[float, float]]:
    """As-built (easting, northing) in m by pile mark, for the piles of a cap whose newest
    record holds both; piles not yet surveyed are left out."""
    rows = conn.execute(
        "SELECT p.mark, r.record_json FROM piles p JOIN pile_records r "
        "ON r.pile_id = p.id AND r.version = p.current_version WHERE p.cap_id = ?",
        (cap_id,)).fetchall()
    out: dict[str, tuple[float, float]] = {}
    for row in rows:
        record = json.loads(row["record_json"])
        if record.get("easting") is not None and record.get("northing") is not None:
            out[row["mark"]] = (float(record["easting"]), float(record["northing"]))
    return out


def stored_version(conn: sqlite3.Connection, pile_id: int) -> int:
    """``piles.current_version`` of a pile (0 when nothing was recorded)."""
    row = conn.execute("SELECT current_version FROM piles WHERE id = ?", (pile_id,)).fetchone()
    if row is None:
        raise LookupError(f"pile {pile_id} does not exist")
    return int(row["current_version"])


def insert(conn: sqlite3.Connection, *, project_id: int, pile_id: int, version: int, client_id: str,
           record: dict[str, Any], progress: str, verdict: str, worst_utilisation: float | None,
           checks: list[dict[str, Any]], borrowed: list[dict[str, Any]], notes: list[str],
           rules_version: int, created_by: int | None, created_by_name: str = "") -> RecordVersion:
    """Store one version; returns it as :func:`get_version` would read it back (its lists and
    dicts parsed from the JSON stored, so a later read gives equal values). Run inside
    ``db.write``. ``created_by_name``: the user's label (name, else email), as the reads give."""
    texts = (json.dumps(record, sort_keys=True), json.dumps(checks), json.dumps(borrowed),
             json.dumps(notes))
    created_at = now_iso()
    cur = conn.execute(
        "INSERT INTO pile_records (project_id, pile_id, version, client_id, record_json, progress, "
        "verdict, worst_utilisation, checks_json, borrowed_json, notes_json, rules_version, "
        "created_by, created_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (project_id, pile_id, version, client_id, texts[0], progress, verdict, worst_utilisation,
         texts[1], texts[2], texts[3], rules_version, created_by, created_at))
    record_, checks_, borrowed_, notes_ = (json.loads(t) for t in texts)
    return RecordVersion(cur.lastrowid, project_id, pile_id, version, client_id, record_, progress,
                         verdict, worst_utilisation, checks_, borrowed_, notes_, rules_version,
                         created_by, created_by_name if created_by is not None else "", created_at)


def stored_position(conn: sqlite3.Connection, pile_id: int) -> tuple[int, tuple[float, float] | None]:
    """``piles.current_version`` of a pile and the as-built (easting, northing) in m of that
    version's record (None when not both surveyed, or nothing recorded)."""
    row = conn.execute(
        "SELECT p.current_version AS version, json_extract(r.record_json, '$.easting') AS e, "
        "json_extract(r.record_json, '$.northing') AS n FROM piles p LEFT JOIN pile_records r "
        "ON r.pile_id = p.id AND r.version = p.current_version WHERE p.id = ?", (pile_id,)).fetchone()
    if row is None:
        raise LookupError(f"pile {pile_id} does not exist")
    position = None if row["e"] is None or row["n"] is None else (float(row["e"]), float(row["n"]))
    return int(row["version"]), position


def set_pile_state(conn: sqlite3.Connection, pile_id: int, *, progress: str, verdict: str,
                   worst_utilisation: float | None, version: int) -> None:
    """Move the pile's progress, verdict, worst utilisation and current version (in the save's
    transaction)."""
    conn.execute(
        "UPDATE piles SET progress = ?, verdict = ?, worst_utilisation = ?, current_version = ? "
        "WHERE id = ?", (progress, verdict, worst_utilisation, version, pile_id))


def last_saved_pile_id(conn: sqlite3.Connection, project_id: int) -> int | None:
    """The pile whose record was saved most recently in the project (where the rig last was)."""
    row = conn.execute("SELECT pile_id FROM pile_records WHERE project_id = ? ORDER BY id DESC LIMIT 1",
                       (project_id,)).fetchone()
    return row["pile_id"] if row else None
