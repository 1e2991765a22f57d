"""The test register: every integrity, dynamic and static load test of a pile (table pile_tests).

A row holds the kind, date, who tested, the result file's hash, the result in the method's
terms and the check it gives (a ``Check.to_dict``: code ``integrity`` or ``load_test``).
``insert`` runs inside the caller's ``db.write``.
"""

from __future__ import annotations

import json
import sqlite3
from dataclasses import dataclass
from typing import Any

from fieldapp.queries.audit import now_iso


@dataclass(frozen=True)
class PileTest:
    """One row of the register (result and check parsed from their JSON)."""

    id: int
    project_id: int
    pile_id: int
    mark: str
    pile_type: str
    kind: str
    tested_on: str
    tested_by: str
    file_sha256: str | None
    file_name: str
    file_ext: str
    file_bytes: int | None
    result: dict[str, Any]
    check: dict[str, Any]
    record_version: int | None
    created_at: str

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict."""
        return {"id": self.id, "pile": self.mark, "kind": self.kind, "tested_on": self.tested_on,
                "tested_by": self.tested_by, "file_sha256": self.file_sha256,
                "file_name": self.file_name, "result": self.result, "check": self.check,
                "record_version": self.record_version, "created_at": self.created_at}


_SELECT = ("SELECT t.*, p.mark, p.pile_type FROM pile_tests t JOIN piles p ON p.id = t.pile_id ")


def _row(row) -> PileTest | None:
    if row is None:
        return None
    return PileTest(row["id"], row["project_id"], row["pile_id"], row["mark"], row["pile_type"],
                    row["kind"], row["tested_on"], row["tested_by"], row["file_sha256"],
                    row["file_name"], row["file_ext"], row["file_bytes"],
                    json.loads(row["result_json"]), json.loads(row["check_json"]),
                    row["record_version"], row["created_at"])


def insert(conn: sqlite3.Connection, *, project_id: int, pile_id: int, kind: str, tested_on: str,
           tested_by: str, file_sha256: str | None, file_name: str, file_ext: str,
           file_bytes: int | None, result: dict, check: dict, created_by: int | None) -> int:
    """Store one test; its id. Run inside ``db.write``."""
    return conn.execute(
        "INSERT INTO pile_tests (project_id, pile_id, kind, tested_on, tested_by, file_sha256, "
        "file_name, file_ext, file_bytes, result_json, check_json, created_by, created_at) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (project_id, pile_id, kind, tested_on, tested_by, file_sha256, file_name, file_ext,
         file_bytes, json.dumps(result, sort_keys=True), json.dumps(check, sort_keys=True),
         created_by, now_iso())).lastrowid


def set_record_version(conn: sqlite3.Connection, test_id: int, version: int) -> None:
    """Note the record version written to carry the test's check."""
    conn.execute("UPDATE pile_tests SET record_version = ? WHERE id = ?", (version, test_id))


def get(conn: sqlite3.Connection, project_id: int, test_id: int) -> PileTest | None:
    """One test of the project, or None (also for another project's)."""
    return _row(conn.execute(_SELECT + "WHERE t.id = ? AND t.project_id = ?",
                             (test_id, project_id)).fetchone())


def for_pile(conn: sqlite3.Connection, pile_id: int) -> list[PileTest]:
    """The pile's tests, oldest first."""
    return [_row(r) for r in conn.execute(_SELECT + "WHERE t.pile_id = ? ORDER BY t.tested_on, t.id",
                                          (pile_id,)).fetchall()]


def for_project(conn: sqlite3.Connection, project_id: int) -> list[PileTest]:
    """The project's tests, by date then id."""
    return [_row(r) for r in conn.execute(
        _SELECT + "WHERE t.project_id = ? ORDER BY t.tested_on, t.id", (project_id,)).fetchall()]


def checks_for_pile(conn: sqlite3.Connection, pile_id: int) -> list[dict[str, Any]]:
    """The checks of every test of the pile, oldest first (dicts as stored)."""
    return [json.loads(r["check_json"]) for r in conn.execute(
        "SELECT check_json FROM pile_tests WHERE pile_id = ? ORDER BY tested_on, id",
        (pile_id,)).fetchall()]


def pile_counts_by_type(conn: sqlite3.Connection, project_id: int) -> dict[str, int]:
    """Pile type -> number of piles of the project of that type."""
    return {r["pile_type"]: r["n"] for r in conn.execute(
        "SELECT pile_type, COUNT(*) AS n FROM piles WHERE project_id = ? GROUP BY pile_type",
        (project_id,)).fetchall()}


def file_in_use(conn: sqlite3.Connection, sha256: str) -> bool:
    """Whether any test keeps the file with this hash."""
    return conn.execute("SELECT 1 FROM pile_tests WHERE file_sha256 = ? LIMIT 1",
                        (sha256,)).fetchone() is not None
