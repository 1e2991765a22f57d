"""The audit trail: an append-only log in which each entry carries the hash of the one before.

Each project has its own chain (``project_id`` NULL is the chain of site-wide events such as
failed logins). An entry's hash is the SHA-256 of the canonical JSON of its fields, including
the previous entry's hash, so editing, deleting or reordering any row breaks the chain at that
row. ``append`` must run inside the caller's transaction so the entry commits with the action.

The chain vouches for the rows it records: the entry of a save, a sign-off, an amendment or a
photo carries the SHA-256 of that row's canonical content (``verify_content``). And a chain is
checked against heads kept outside its reach (``Anchor``): a chain cut short, renumbered or
rehashed after an edit no longer holds the head a backup manifest, an engineer or an issued
record kept.
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
    is held and two entries can never take the same place in the chain. An entry of a covered
    action (a save, a recheck, a sign-off and its disposition, an amendment, a photo) gets the
    table, id and content hash of the row it records under ``payload["content"]``, read here
    from that row, after the caller inserted it in the same transaction.
    """
    if not conn.in_transaction:
        raise RuntimeError("audit.append must run inside a write transaction")
    last = conn.execute(
        "SELECT seq, hash FROM audit_log WHERE COALESCE(project_id, 0) = COALESCE(?, 0) "
        "ORDER BY seq DESC LIMIT 1", (project_id,)).fetchone()
    seq = (last["seq"] + 1) if last else 1
    prev = last["hash"] if last else GENESIS
    at = now_iso()
    payload = dict(payload or {})
    if action in COVERED_ACTIONS and "content" not in payload:
        content = _content_for(conn, project_id, action, subject, payload)
        if content is not None:
            payload["content"] = content
    payload_json = canonical_json(payload)
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


# --------------------------------------------------------------------------------------------
# What the chain vouches for: the content hash of the rows a save, sign-off, amendment or photo
# entry records, kept in the entry's payload under "content".
# --------------------------------------------------------------------------------------------

# The columns hashed per table. Fixed lists, not ``SELECT *``: a column added by a later
# migration (with its default in every old row) must not make every earlier entry look altered.
CONTENT_COLUMNS = {
    "pile_records": ("id", "project_id", "pile_id", "version", "client_id", "record_json", "progress",
                     "verdict", "worst_utilisation", "checks_json", "borrowed_json", "notes_json",
                     "rules_version", "created_by", "created_at"),
    "signoffs": ("id", "project_id", "pile_id", "version", "disposition", "reasons", "remedial_of",
                 "verdict", "rules_version", "signed_by", "signed_at", "signed_json", "record_hash",
                 "batch"),
    "amendments": ("id", "project_id", "pile_id", "from_version", "version", "reason", "amended_by",
                   "amended_at"),
    "photos": ("id", "project_id", "pile_id", "client_id", "kind", "caption", "sha256", "format",
               "taken_at", "uploaded_at", "uploaded_by", "width", "height", "size_bytes",
               "display_width", "display_height", "thumb_width", "thumb_height"),
}
# action -> the table of the row it records; the row is found by the pile (the entry's subject is
# its mark) and the payload's "version", or by the payload's "photo_id".
COVERED_ACTIONS = {
    "record saved": "pile_records",
    "record rechecked": "pile_records",
    "sign-off": "signoffs",
    "amendment": "amendments",
    "photo added": "photos",
}
# Words for a table's rows in reports.
ROW_WORDS = {"pile_records": "record version", "signoffs": "sign-off", "amendments": "amendment",
             "photos": "photo"}


def content_hash(table: str, row) -> str:
    """SHA-256 (hex) of the canonical JSON of a row's CONTENT_COLUMNS, with the table's name."""
    data = {"table": table, **{c: row[c] for c in CONTENT_COLUMNS[table]}}
    return hashlib.sha256(canonical_json(data).encode("utf-8")).hexdigest()


def _read_row(conn: sqlite3.Connection, table: str, row_id: int):
    columns = ", ".join(CONTENT_COLUMNS[table])
    return conn.execute(f"SELECT {columns} FROM {table} WHERE id = ?", (row_id,)).fetchone()


def _row_for_entry(conn: sqlite3.Connection, project_id: int | None, action: str, subject: str,
                   payload: dict):
    """The row an entry of a covered action records, at the time it is appended, or None."""
    table = COVERED_ACTIONS.get(action)
    if table is None or project_id is None:
        return None, None
    columns = ", ".join(f"t.{c}" for c in CONTENT_COLUMNS[table])
    if table == "photos":
        photo_id = payload.get("photo_id")
        if not isinstance(photo_id, int):
            return table, None
        row = conn.execute(f"SELECT {columns} FROM photos t WHERE t.id = ? AND t.project_id = ?",
                           (photo_id, project_id)).fetchone()
        return table, row
    version = payload.get("version")
    if not isinstance(version, int):
        return table, None
    row = conn.execute(
        f"SELECT {columns} FROM {table} t JOIN piles p ON p.id = t.pile_id "
        "WHERE p.project_id = ? AND p.mark = ? AND t.version = ?", (project_id, subject, version)).fetchone()
    return table, row


def _content_for(conn, project_id, action, subject, payload) -> dict | None:
    table, row = _row_for_entry(conn, project_id, action, subject, payload)
    if row is None:
        return None
    return {"table": table, "id": row["id"], "sha256": content_hash(table, row)}


@dataclass
class Coverage:
    """What the rows of one project's chain say about the rows they record.

    ``covered`` rows match the content hash their entry carries; ``not_covered`` lists entries
    made before entries carried content hashes (their rows cannot be checked, so they are never
    called intact); ``problems`` lists every row that no longer matches, every row an entry
    names that is missing and every row with no entry, and photo files that do not match.
    """

    covered: int = 0
    not_covered: list[str] | None = None
    problems: list[str] | None = None

    def __post_init__(self):
        self.not_covered = self.not_covered or []
        self.problems = self.problems or []


def _entry_words(row) -> str:
    return f"entry seq {row['seq']} ({row['action']} {row['subject']})"


def verify_content(conn: sqlite3.Connection, project_id: int, photo_file=None) -> Coverage:
    """Recompute the content hash of every row a covered entry of the project's chain records.

    ``photo_file(sha256, format)``, when given, returns the SHA-256 of the photo's original file
    (None when missing), so a replaced photo file is reported too.
    """
    report = Coverage()
    seen: dict[str, set[int]] = {table: set() for table in CONTENT_COLUMNS}
    rows = conn.execute(
        "SELECT seq, action, subject, payload_json FROM audit_log WHERE project_id = ? AND action IN "
        f"({', '.join('?' * len(COVERED_ACTIONS))}) ORDER BY seq",
        (project_id, *COVERED_ACTIONS)).fetchall()
    for entry in rows:
        try:
            payload = json.loads(entry["payload_json"])
        except ValueError:
            report.problems.append(f"{_entry_words(entry)}: its payload cannot be read")
            continue
        content = payload.get("content") if isinstance(payload, dict) else None
        table = COVERED_ACTIONS[entry["action"]]
        word = ROW_WORDS[table]
        if not isinstance(content, dict) or not isinstance(content.get("id"), int):
            _, row = _row_for_entry(conn, project_id, entry["action"], entry["subject"],
                                    payload if isinstance(payload, dict) else {})
            if row is not None:
                seen[table].add(row["id"])
            report.not_covered.append(f"{_entry_words(entry)}: made before entries carried the hash "
                                      f"of their {word}, so that {word} is not checked")
            continue
        table = content.get("table") if content.get("table") in CONTENT_COLUMNS else table
        word = ROW_WORDS[table]
        row = _read_row(conn, table, content["id"])
        if row is None:
            report.problems.append(f"{_entry_words(entry)}: its {word} (row {content['id']}) is missing")
            continue
        seen[table].add(row["id"])
        if content_hash(table, row) != content.get("sha256"):
            report.problems.append(f"{_entry_words(entry)}: its {word} (row {row['id']}) no longer "
                                   "matches what the entry recorded (the row was edited)")
            continue
        if table == "photos" and photo_file is not None:
            actual = photo_file(row["sha256"], row["format"])
            if actual != row["sha256"]:
                what = "is missing" if actual is None else "does not match its SHA-256"
                report.problems.append(f"{_entry_words(entry)}: the file of photo {row['id']} {what}")
                continue
        report.covered += 1
    for table, word in ROW_WORDS.items():
        mark = "p.mark" if table != "photos" else "p.mark || ' photo'"
        version = "t.version" if table != "photos" else "NULL"
        for row in conn.execute(
                f"SELECT t.id, {mark} AS mark, {version} AS version FROM {table} t "
                "LEFT JOIN piles p ON p.id = t.pile_id WHERE t.project_id = ? ORDER BY t.id",
                (project_id,)).fetchall():
            if row["id"] not in seen[table]:
                which = f" version {row['version']}" if row["version"] is not None else ""
                report.problems.append(f"{word} row {row['id']} ({row['mark']}{which}) has no audit entry")
    return report


# --------------------------------------------------------------------------------------------
# Anchors: heads of a chain kept outside its reach (backup manifests, a head an engineer kept,
# issued records), so a chain cut short, renumbered or rehashed after an edit is seen.
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Anchor:
    """A head of one chain seen at some time: where it was kept, the chain, seq (None when only
    the hash was kept) and hash."""

    source: str
    project_id: int | None
    seq: int | None
    hash: str


def heads(conn: sqlite3.Connection) -> dict[int | None, tuple[int, str]]:
    """(seq, hash) of the newest entry of every chain present."""
    return {chain: head(conn, chain) for chain in chains(conn)}


def check_anchor(conn: sqlite3.Connection, anchor: Anchor) -> str | None:
    """None when the chain still holds the anchor's head where it was; else what is wrong."""
    name = f"project {anchor.project_id}" if anchor.project_id is not None else "the site-wide chain"
    last_seq, _ = head(conn, anchor.project_id)
    if anchor.seq is None:
        found = conn.execute(
            "SELECT seq FROM audit_log WHERE COALESCE(project_id, 0) = COALESCE(?, 0) AND hash = ?",
            (anchor.project_id, anchor.hash)).fetchone()
        if found is None and anchor.hash != GENESIS:
            return (f"{anchor.source}: its head {anchor.hash[:16]}... is not in the chain of {name} "
                    "(entries were deleted, or the chain was rewritten after it)")
        return None
    if anchor.seq == 0:
        return None
    if last_seq == 0:
        return f"{anchor.source}: {name} had {anchor.seq} entries; its chain is gone (deleted)"
    row = conn.execute(
        "SELECT hash FROM audit_log WHERE COALESCE(project_id, 0) = COALESCE(?, 0) AND seq = ?",
        (anchor.project_id, anchor.seq)).fetchone()
    if row is None:
        return (f"{anchor.source}: {name} had reached seq {anchor.seq}, the chain now ends at seq "
                f"{last_seq} (its last entries were deleted)")
    if row["hash"] != anchor.hash:
        return (f"{anchor.source}: entry seq {anchor.seq} of {name} now has hash {row['hash'][:16]}..., "
                f"not {anchor.hash[:16]}... (the chain was renumbered or rehashed after it)")
    return None


def stored_anchors(conn: sqlite3.Connection) -> list[Anchor]:
    """Heads kept in the database beside the chain: every table with ``project_id`` and
    ``head_hash`` columns (the record builds, the issued records), with ``head_seq`` when the
    table has it. A head in the same file can be deleted with the chain, but not rewritten
    with it unseen."""
    out = []
    tables = [r[0] for r in conn.execute(
        "SELECT name FROM sqlite_master WHERE type = 'table' AND name != 'audit_log'").fetchall()]
    for table in tables:
        columns = {r[1] for r in conn.execute(f"PRAGMA table_info({table})").fetchall()}
        if not {"project_id", "head_hash"} <= columns:
            continue
        seq = "head_seq" if "head_seq" in columns else "NULL"
        for row in conn.execute(f"SELECT id, project_id, {seq} AS seq, head_hash FROM {table} "
                                "WHERE head_hash != '' ORDER BY id").fetchall():
            out.append(Anchor(f"{table} row {row['id']}", row["project_id"], row["seq"], row["head_hash"]))
    return out
