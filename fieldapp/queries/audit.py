"""The audit trail: an append-only log in which each entry carries the hash of the one before.

Each project has its own chain (``project_id`` NULL is the chain of site-wide events such as
failed logins). An entry's hash is the SHA-256 of the canonical JSON of its fields, including
the previous entry's hash, so editing, deleting or reordering any row breaks the chain at that
row. ``append`` must run inside the caller's transaction so the entry commits with the action.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
from dataclasses import dataclass
from datetime import datetime, timezone

GENESIS = "0" * 64


def canonical_json(data) -> str:
    """JSON with sorted keys and no spaces: the same data always gives the same text."""
    return json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False, default=str)


def entry_hash(project_id, seq, at, actor, action, subject, payload_json, prev_hash) -> str:
    """SHA-256 (hex) of the canonical JSON of one entry's fields."""
    body = canonical_json({
        "project_id": project_id, "seq": seq, "at": at, "actor": actor, "action": action,
        "subject": subject, "payload": json.loads(payload_json), "prev_hash": prev_hash,
    })
    return hashlib.sha256(body.encode("utf-8")).hexdigest()


def now_iso() -> str:
    """The current UTC time as ISO 8601 with seconds."""
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def append(conn: sqlite3.Connection, project_id: int | None, actor: str, action: str,
           subject: str = "", payload: dict | None = None) -> str:
    """Append one entry to the project's chain and return its hash.

    Call inside the transaction of the action it records (``db.write``), so the write lock
    is held and two entries can never take the same place in the chain.
    """
    if not conn.in_transaction:
        raise RuntimeError("audit.append must run inside a write transaction")
    last = conn.execute(
        "SELECT seq, hash FROM audit_log WHERE COALESCE(project_id, 0) = COALESCE(?, 0) "
        "ORDER BY seq DESC LIMIT 1", (project_id,)).fetchone()
    seq = (last["seq"] + 1) if last else 1
    prev = last["hash"] if last else GENESIS
    at = now_iso()
    payload_json = canonical_json(payload or {})
    digest = entry_hash(project_id, seq, at, actor, action, subject, payload_json, prev)
    conn.execute(
        "INSERT INTO audit_log (project_id, seq, at, actor, action, subject, payload_json, "
        "prev_hash, hash) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (project_id, seq, at, actor, action, subject, payload_json, prev, digest))
    return digest


@dataclass(frozen=True)
class ChainReport:
    """The outcome of walking one chain: ok, entries read, head hash, first broken entry."""

    project_id: int | None
    ok: bool
    entries: int
    head: str
    broken_id: int | None = None
    problem: str = ""


def verify_chain(conn: sqlite3.Connection, project_id: int | None) -> ChainReport:
    """Walk a chain in order of ``seq`` and recompute every hash.

    Detects an edited row (its hash no longer matches), a deleted row (a gap in ``seq`` or a
    ``prev_hash`` that does not match the entry before) and reordered rows.
    """
    rows = conn.execute(
        "SELECT * FROM audit_log WHERE COALESCE(project_id, 0) = COALESCE(?, 0) ORDER BY seq",
        (project_id,)).fetchall()
    prev = GENESIS
    for expected_seq, row in enumerate(rows, start=1):
        if row["seq"] != expected_seq:
            return ChainReport(project_id, False, expected_seq - 1, prev, row["id"],
                               f"entry {row['id']} has seq {row['seq']}, expected {expected_seq} "
                               "(an entry was deleted or moved)")
        if row["prev_hash"] != prev:
            return ChainReport(project_id, False, expected_seq - 1, prev, row["id"],
                               f"entry {row['id']} does not follow the entry before it")
        try:
            digest = entry_hash(row["project_id"], row["seq"], row["at"], row["actor"],
                                row["action"], row["subject"], row["payload_json"], row["prev_hash"])
        except (ValueError, TypeError):
            digest = ""
        if digest != row["hash"]:
            return ChainReport(project_id, False, expected_seq - 1, prev, row["id"],
                               f"entry {row['id']} ({row['action']}) was altered: its hash does not match")
        prev = row["hash"]
    return ChainReport(project_id, True, len(rows), prev)


def head_hash(conn: sqlite3.Connection, project_id: int | None) -> str:
    """The hash of the newest entry in the project's chain (GENESIS when empty)."""
    row = conn.execute(
        "SELECT hash FROM audit_log WHERE COALESCE(project_id, 0) = COALESCE(?, 0) "
        "ORDER BY seq DESC LIMIT 1", (project_id,)).fetchone()
    return row["hash"] if row else GENESIS


def chains(conn: sqlite3.Connection) -> list[int | None]:
    """Every chain present: project ids, with None for the site-wide chain."""
    return [r[0] for r in conn.execute(
        "SELECT DISTINCT project_id FROM audit_log ORDER BY project_id NULLS FIRST").fetchall()]


def entries(conn: sqlite3.Connection, project_id: int | None, limit: int = 200) -> list[sqlite3.Row]:
    """Newest entries of one chain, newest first."""
    return conn.execute(
        "SELECT * FROM audit_log WHERE COALESCE(project_id, 0) = COALESCE(?, 0) "
        "ORDER BY seq DESC LIMIT ?", (project_id, limit)).fetchall()


def head(conn: sqlite3.Connection, project_id: int | None) -> tuple[int, str]:
    """(seq, hash) of the newest entry in the project's chain ((0, GENESIS) when empty)."""
    row = conn.execute(
        "SELECT seq, hash FROM audit_log WHERE COALESCE(project_id, 0) = COALESCE(?, 0) "
        "ORDER BY seq DESC LIMIT 1", (project_id,)).fetchone()
    return (row["seq"], row["hash"]) if row else (0, GENESIS)


def entries_after(conn: sqlite3.Connection, project_id: int | None, seq: int,
                  limit: int = 500) -> list[sqlite3.Row]:
    """Entries of one chain after ``seq``, oldest first (at most ``limit``)."""
    return conn.execute(
        "SELECT * FROM audit_log WHERE COALESCE(project_id, 0) = COALESCE(?, 0) AND seq > ? "
        "ORDER BY seq LIMIT ?", (project_id, seq, limit)).fetchall()
