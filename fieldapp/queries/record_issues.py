"""Issued certification records: revision, the audit head each printed, the signed file's hash.

The table has ``project_id``, ``head_seq`` and ``head_hash``, so ``audit.stored_anchors`` takes
every issue as an anchor of the project's chain (``verify-audit``). The revision increments per
issue; ``state_json`` keeps {mark: [current version, signed version]} so the next issue can say
what changed since this one.
"""

from __future__ import annotations

import json
import sqlite3
from dataclasses import dataclass
from typing import Iterator

from fieldapp.queries import records


@dataclass(frozen=True)
class Issue:
    """One issued record."""

    id: int
    project_id: int
    revision: int
    head_seq: int
    head_hash: str
    file_sha256: str
    file_name: str
    issued_at: str
    issued_by: str
    draft: bool
    piles: int
    pages: int
    changes: str
    state: dict


def _issue(row) -> Issue:
    return Issue(row["id"], row["project_id"], row["revision"], row["head_seq"], row["head_hash"],
                 row["file_sha256"], row["file_name"], row["issued_at"], row["issued_by"], bool(row["draft"]),
                 row["piles"], row["pages"], row["changes"], json.loads(row["state_json"] or "{}"))


def for_project(conn: sqlite3.Connection, project_id: int) -> list[Issue]:
    """Every issue of the project, oldest first."""
    return [_issue(r) for r in conn.execute(
        "SELECT * FROM record_issues WHERE project_id = ? ORDER BY revision", (project_id,)).fetchall()]


def next_revision(conn: sqlite3.Connection, project_id: int) -> int:
    """The revision the next issue takes (0 for the first)."""
    row = conn.execute("SELECT MAX(revision) FROM record_issues WHERE project_id = ?", (project_id,)).fetchone()
    return 0 if row[0] is None else row[0] + 1


def by_file_hash(conn: sqlite3.Connection, file_sha256: str) -> Issue | None:
    """The issue whose signed file has this SHA-256, or None."""
    row = conn.execute("SELECT * FROM record_issues WHERE file_sha256 = ?", (file_sha256,)).fetchone()
    return _issue(row) if row else None


def insert(conn: sqlite3.Connection, *, project_id: int, revision: int, head_seq: int, head_hash: str,
           file_sha256: str, file_name: str, issued_at: str, issued_by: str, draft: bool, piles: int,
           pages: int, changes: str, state: dict) -> int:
    """Keep one issue (inside ``db.write``); the UNIQUE revision refuses a second issue of the same
    revision."""
    cur = conn.execute(
        "INSERT INTO record_issues (project_id, revision, head_seq, head_hash, file_sha256, file_name, issued_at, "
        "issued_by, draft, piles, pages, changes, state_json) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (project_id, revision, head_seq, head_hash, file_sha256, file_name, issued_at, issued_by, int(draft),
         piles, pages, changes, json.dumps(state, sort_keys=True, separators=(",", ":"))))
    return cur.lastrowid


def current_versions(conn: sqlite3.Connection, project_id: int) -> Iterator[records.RecordVersion]:
    """The newest version of every recorded pile, one at a time from the cursor (a record build
    of 20,000 piles needs each only for its schedule row, never all of them at once)."""
    cursor = conn.execute(
        records._SELECT + "JOIN piles p ON p.id = r.pile_id AND p.current_version = r.version "
        "WHERE r.project_id = ?", (project_id,))
    for row in cursor:
        yield records._version(row)
