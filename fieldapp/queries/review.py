"""Review and sign-off: dispositions and signatures per record version, amendments of signed
records, the review queue, and the background builds of the certification record.

A pile is *locked* when its current record version carries a sign-off. Changing it then takes an
amendment (a reason), which makes a new version that needs its own sign-off.
"""

from __future__ import annotations

import json
import sqlite3
from dataclasses import dataclass
from typing import Any

from design_core.checks import MEETS_DESIGN, NEEDS_ENGINEER
from fieldapp.queries import audit
from fieldapp.queries.caps import natural_key
from fieldapp.queries.audit import now_iso

DISPOSITIONS = ("accepted", "accepted with conditions", "remedial", "rejected")


# --- sign-offs ------------------------------------------------------------------------------

@dataclass(frozen=True)
class SignOff:
    """One disposition signed by an engineer for one version of a pile's record."""

    id: int
    project_id: int
    pile_id: int
    mark: str
    version: int
    disposition: str
    reasons: str
    remedial_of: int | None
    remedial_of_mark: str | None
    remedial_of_version: int | None
    verdict: str
    rules_version: int
    signed_by: int
    signer: str
    signed_at: str
    record_hash: str
    batch: bool

    def to_dict(self) -> dict[str, Any]:
        """JSON-ready dict (history)."""
        return {"mark": self.mark, "version": self.version, "disposition": self.disposition,
                "reasons": self.reasons, "remedial_of": self.remedial_of, "verdict": self.verdict,
                "rules_version": self.rules_version, "signer": self.signer,
                "signed_at": self.signed_at, "record_hash": self.record_hash, "batch": self.batch}


_SIGNOFF_SELECT = (
    "SELECT s.*, p.mark AS mark, COALESCE(NULLIF(u.name, ''), u.email) AS signer, "
    "rp.mark AS remedial_of_mark, r.version AS remedial_of_version "
    "FROM signoffs s JOIN piles p ON p.id = s.pile_id JOIN users u ON u.id = s.signed_by "
    "LEFT JOIN signoffs r ON r.id = s.remedial_of LEFT JOIN piles rp ON rp.id = r.pile_id ")


def _signoff(row) -> SignOff | None:
    if row is None:
        return None
    return SignOff(row["id"], row["project_id"], row["pile_id"], row["mark"], row["version"],
                   row["disposition"], row["reasons"], row["remedial_of"], row["remedial_of_mark"],
                   row["remedial_of_version"], row["verdict"], row["rules_version"], row["signed_by"],
                   row["signer"], row["signed_at"], row["record_hash"], bool(row["batch"]))


def is_locked(conn: sqlite3.Connection, pile_id: int) -> bool:
    """True when the pile's current record version is signed (and no amendment came since).

    The record PUT must refuse a plain save of a locked pile (409 ``locked``) and take only an
    amendment, which makes a new, unsigned version.
    """
    return conn.execute(
        "SELECT 1 FROM signoffs s JOIN piles p ON p.id = s.pile_id "
        "WHERE s.pile_id = ? AND s.version = p.current_version", (pile_id,)).fetchone() is not None


def signoff_for(conn: sqlite3.Connection, pile_id: int, version: int) -> SignOff | None:
    """The sign-off of one record version, or None."""
    return _signoff(conn.execute(_SIGNOFF_SELECT + "WHERE s.pile_id = ? AND s.version = ?",
                                 (pile_id, version)).fetchone())


def signoff_by_id(conn: sqlite3.Connection, project_id: int, signoff_id: int) -> SignOff | None:
    """A sign-off of the project by id, or None."""
    return _signoff(conn.execute(_SIGNOFF_SELECT + "WHERE s.id = ? AND s.project_id = ?",
                                 (signoff_id, project_id)).fetchone())


def signoffs_for_pile(conn: sqlite3.Connection, pile_id: int) -> list[SignOff]:
    """Every sign-off of a pile, oldest first."""
    return [_signoff(r) for r in conn.execute(_SIGNOFF_SELECT + "WHERE s.pile_id = ? ORDER BY s.version",
                                              (pile_id,)).fetchall()]


def latest_signoffs(conn: sqlite3.Connection, project_id: int) -> dict[int, SignOff]:
    """The newest sign-off of every signed pile of the project, by pile id (it may be of an
    older version than the current one when the record was amended since)."""
    rows = conn.execute(
        _SIGNOFF_SELECT + "WHERE s.project_id = ? AND s.version = "
        "(SELECT MAX(version) FROM signoffs x WHERE x.pile_id = s.pile_id)", (project_id,)).fetchall()
    return {row["pile_id"]: _signoff(row) for row in rows}


def open_remedial(conn: sqlite3.Connection, project_id: int, pile_id: int) -> SignOff | None:
    """The pile's latest sign-off when its disposition was ``remedial`` and nothing resolves it
    yet (the remedial record's own sign-off links back to it)."""
    row = conn.execute(
        _SIGNOFF_SELECT + "WHERE s.project_id = ? AND s.pile_id = ? AND s.disposition = 'remedial' "
        "AND NOT EXISTS (SELECT 1 FROM signoffs y WHERE y.remedial_of = s.id) "
        "ORDER BY s.version DESC LIMIT 1", (project_id, pile_id)).fetchone()
    return _signoff(row)


def remedial_signoffs(conn: sqlite3.Connection, project_id: int) -> list[SignOff]:
    """Every sign-off of the project whose disposition is ``remedial`` (for linking back)."""
    return [_signoff(r) for r in conn.execute(
        _SIGNOFF_SELECT + "WHERE s.project_id = ? AND s.disposition = 'remedial' ORDER BY p.mark, s.version",
        (project_id,)).fetchall()]


def insert_signoff(conn: sqlite3.Connection, *, project_id: int, pile_id: int, version: int,
                   disposition: str, reasons: str, remedial_of: int | None, verdict: str,
                   rules_version: int, signed_by: int, signed_at: str, signed_json: str,
                   record_hash: str, batch: bool = False) -> int:
    """Store one sign-off; returns its id. Run inside ``db.write`` with its audit entry."""
    if disposition not in DISPOSITIONS:
        raise ValueError(f"disposition must be one of {', '.join(DISPOSITIONS)}, got {disposition!r}")
    cur = conn.execute(
        "INSERT INTO signoffs (project_id, pile_id, version, disposition, reasons, remedial_of, verdict, "
        "rules_version, signed_by, signed_at, signed_json, record_hash, batch) "
        "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (project_id, pile_id, version, disposition, reasons, remedial_of, verdict, rules_version,
         signed_by, signed_at, signed_json, record_hash, 1 if batch else 0))
    return cur.lastrowid


def signed_json(conn: sqlite3.Connection, signoff_id: int) -> str | None:
    """The canonical JSON that was signed (its SHA-256 is the record hash)."""
    row = conn.execute("SELECT signed_json FROM signoffs WHERE id = ?", (signoff_id,)).fetchone()
    return row["signed_json"] if row else None


# --- amendments -------------------------------------------------------------------------------

@dataclass(frozen=True)
class Amendment:
    """A change to a signed record: from which version to which, why, by whom."""

    pile_id: int
    from_version: int
    version: int
    reason: str
    by: str
    at: str


def record_amendment(conn: sqlite3.Connection, *, project_id: int, pile_id: int, mark: str,
                     from_version: int, version: int, reason: str, user_id: int | None,
                     actor: str) -> None:
    """Store an amendment of a signed record and its audit entry. Call inside the record save's
    ``db.write``, after the new version is inserted. ValueError when the reason is empty."""
    reason = (reason or "").strip()
    if not reason:
        raise ValueError("amendment.reason is required to change a signed record")
    if len(reason) > 4000:
        raise ValueError("amendment.reason must be at most 4000 characters")
    conn.execute(
        "INSERT INTO amendments (project_id, pile_id, from_version, version, reason, amended_by, "
        "amended_at) VALUES (?, ?, ?, ?, ?, ?, ?)",
        (project_id, pile_id, from_version, version, reason, user_id, now_iso()))
    audit.append(conn, project_id, actor, "amendment", mark,
                 {"from_version": from_version, "version": version, "reason": reason})


def amendments_for_pile(conn: sqlite3.Connection, pile_id: int) -> list[Amendment]:
    """Every amendment of a pile's record, oldest first."""
    rows = conn.execute(
        "SELECT a.*, COALESCE(NULLIF(u.name, ''), u.email, '') AS by_name FROM amendments a "
        "LEFT JOIN users u ON u.id = a.amended_by WHERE a.pile_id = ? ORDER BY a.version",
        (pile_id,)).fetchall()
    return [Amendment(r["pile_id"], r["from_version"], r["version"], r["reason"], r["by_name"],
                      r["amended_at"]) for r in rows]


def amendment_counts(conn: sqlite3.Connection, project_id: int) -> dict[int, int]:
    """Number of amendments per pile id."""
    return {r[0]: r[1] for r in conn.execute(
        "SELECT pile_id, COUNT(*) FROM amendments WHERE project_id = ? GROUP BY pile_id",
        (project_id,)).fetchall()}


# --- piles as the review and the record see them ----------------------------------------------

@dataclass(frozen=True)
class PileStatus:
    """A pile's design values, its current record version and where it stands in review."""

    id: int
    mark: str
    cap: str | None
    pile_type: str
    easting_m: float
    northing_m: float
    cutoff_level_m: float
    toe_level_m: float
    diameter_mm: float
    compression_kn: float
    exposure_class: str
    cover_mm: float
    progress: str
    verdict: str | None
    worst_utilisation: float | None
    current_version: int
    signed_version: int | None
    disposition: str | None
    signer: str | None
    signed_at: str | None

    @property
    def signed(self) -> bool:
        """True when the current version carries a sign-off."""
        return self.current_version >= 1 and self.signed_version == self.current_version

    @property
    def status(self) -> str:
        """One word for colour and sorting: planned, recording, meets, needs, signed, remedial,
        rejected."""
        if self.signed:
            return {"remedial": "remedial", "rejected": "rejected"}.get(self.disposition or "", "signed")
        if self.current_version == 0:
            return "planned"
        if self.progress != "logged" and not (self.worst_utilisation or 0.0) > 1.0:
            return "recording"      # in progress and nothing short yet
        if self.verdict == NEEDS_ENGINEER:
            return "needs"
        return "meets"


_STATUS_SELECT = (
    "SELECT p.id, p.mark, c.mark AS cap, p.pile_type, p.easting_m, p.northing_m, p.cutoff_level_m, "
    "p.toe_level_m, p.diameter_mm, p.compression_kn, p.exposure_class, p.cover_mm, p.progress, "
    "p.verdict, p.worst_utilisation, p.current_version, s.version AS signed_version, s.disposition, "
    "COALESCE(NULLIF(u.name, ''), u.email) AS signer, s.signed_at "
    "FROM piles p LEFT JOIN caps c ON c.id = p.cap_id "
    "LEFT JOIN signoffs s ON s.pile_id = p.id AND s.version = "
    "(SELECT MAX(version) FROM signoffs x WHERE x.pile_id = p.id) "
    "LEFT JOIN users u ON u.id = s.signed_by ")


def _status(row) -> PileStatus:
    return PileStatus(**{k: row[k] for k in row.keys()})


def pile_statuses(conn: sqlite3.Connection, project_id: int) -> list[PileStatus]:
    """Every pile of the project with its review status, in mark order (natural: P2 before P10)."""
    rows = conn.execute(_STATUS_SELECT + "WHERE p.project_id = ?", (project_id,)).fetchall()
    return sorted((_status(r) for r in rows), key=lambda s: natural_key(s.mark))


def pile_status(conn: sqlite3.Connection, project_id: int, mark: str) -> PileStatus | None:
    """One pile of the project by mark, or None."""
    row = conn.execute(_STATUS_SELECT + "WHERE p.project_id = ? AND p.mark = ?", (project_id, mark)).fetchone()
    return _status(row) if row else None


def needs_engineer(conn: sqlite3.Connection, project_id: int) -> list[PileStatus]:
    """Piles whose current version needs the engineer and is not signed, worst first (largest
    utilisation first, so every pile over 1 comes before those under it; not-checked ones with
    no utilisation last), then by mark. A record still in progress (boring, concreted) is listed
    only when something is already short (utilisation over 1): checks it cannot make yet are
    not a finding."""
    rows = [s for s in pile_statuses(conn, project_id) if s.verdict == NEEDS_ENGINEER
            and s.current_version >= 1 and not s.signed
            and (s.progress == "logged" or (s.worst_utilisation or 0.0) > 1.0)]
    return sorted(rows, key=lambda s: (-(s.worst_utilisation if s.worst_utilisation is not None else -1.0),
                                       natural_key(s.mark)))


def clear_unsigned(conn: sqlite3.Connection, project_id: int) -> list[PileStatus]:
    """Logged piles that meet design and are not signed yet (for the batch sign-off)."""
    return [s for s in pile_statuses(conn, project_id) if s.verdict == MEETS_DESIGN
            and s.progress == "logged" and s.current_version >= 1 and not s.signed]


# --- record builds -----------------------------------------------------------------------------

@dataclass(frozen=True)
class RecordJob:
    """One background build of the certification record and its stored progress."""

    id: int
    project_id: int
    status: str
    done: int
    total: int
    path: str
    error: str
    head_hash: str
    size_bytes: int
    started_by: int | None
    created_at: str
    updated_at: str
    finished_at: str | None

    @property
    def percent(self) -> int:
        """Whole percent done (100 only when finished)."""
        if self.status == "done":
            return 100
        if self.total <= 0:
            return 0
        return min(99, int(100 * self.done / self.total))

    def to_dict(self) -> dict[str, Any]:
        """JSON for the progress poll (no file path: the download is by job id)."""
        return {"id": self.id, "status": self.status, "done": self.done, "total": self.total,
                "percent": self.percent, "error": self.error, "head_hash": self.head_hash,
                "size_bytes": self.size_bytes, "created_at": self.created_at,
                "updated_at": self.updated_at, "finished_at": self.finished_at}


def _job(row) -> RecordJob | None:
    return RecordJob(**{k: row[k] for k in row.keys()}) if row else None


def create_job(conn: sqlite3.Connection, project_id: int, user_id: int | None, total: int = 0) -> int:
    """A new queued build of ``total`` piles; returns its id."""
    now = now_iso()
    cur = conn.execute(
        "INSERT INTO record_jobs (project_id, status, total, started_by, created_at, updated_at) "
        "VALUES (?, 'queued', ?, ?, ?, ?)", (project_id, total, user_id, now, now))
    return cur.lastrowid


def update_job(conn: sqlite3.Connection, job_id: int, **fields: Any) -> None:
    """Set some of status, done, total, path, error, head_hash, size_bytes, finished_at."""
    allowed = {"status", "done", "total", "path", "error", "head_hash", "size_bytes", "finished_at"}
    unknown = set(fields) - allowed
    if unknown:
        raise ValueError(f"unknown job fields {sorted(unknown)}")
    fields["updated_at"] = now_iso()
    names = sorted(fields)
    conn.execute(f"UPDATE record_jobs SET {', '.join(n + ' = ?' for n in names)} WHERE id = ?",
                 [fields[n] for n in names] + [job_id])


def get_job(conn: sqlite3.Connection, project_id: int, job_id: int) -> RecordJob | None:
    """A build of the project, or None."""
    return _job(conn.execute("SELECT * FROM record_jobs WHERE id = ? AND project_id = ?",
                             (job_id, project_id)).fetchone())


def latest_job(conn: sqlite3.Connection, project_id: int) -> RecordJob | None:
    """The newest build of the project, or None."""
    return _job(conn.execute("SELECT * FROM record_jobs WHERE project_id = ? ORDER BY id DESC LIMIT 1",
                             (project_id,)).fetchone())


def active_job(conn: sqlite3.Connection, project_id: int) -> RecordJob | None:
    """A queued or running build of the project, or None."""
    return _job(conn.execute(
        "SELECT * FROM record_jobs WHERE project_id = ? AND status IN ('queued', 'running') "
        "ORDER BY id DESC LIMIT 1", (project_id,)).fetchone())


def mark_job_stalled(conn: sqlite3.Connection, job_id: int, message: str) -> None:
    """Fail a build whose worker is gone (the server restarted mid-build)."""
    update_job(conn, job_id, status="failed", error=message, finished_at=now_iso())


# --- helpers for the record ---------------------------------------------------------------------

def pile_audit(conn: sqlite3.Connection, project_id: int, mark: str, limit: int = 200) -> list[dict]:
    """Audit entries of one pile (subject = its mark), newest first, payload decoded."""
    rows = conn.execute(
        "SELECT seq, at, actor, action, payload_json, hash FROM audit_log WHERE project_id = ? "
        "AND subject = ? ORDER BY seq DESC LIMIT ?", (project_id, mark, limit)).fetchall()
    return [{"seq": r["seq"], "at": r["at"], "actor": r["actor"], "action": r["action"],
             "payload": json.loads(r["payload_json"]), "hash": r["hash"]} for r in rows]


@dataclass(frozen=True)
class NonConformance:
    """A logged record version that needed the engineer (or was not simply accepted), with what
    was decided about it."""

    mark: str
    version: int
    verdict: str
    short: tuple[str, ...]
    not_checked: tuple[str, ...]
    recorded_at: str
    disposition: str | None
    reasons: str
    signer: str | None
    signed_at: str | None
    remedial_of_mark: str | None
    remedial_of_version: int | None


def nonconformances(conn: sqlite3.Connection, project_id: int) -> list[NonConformance]:
    """Every logged record version that needed the engineer, or whose sign-off was other than
    a plain ``accepted``, in mark and version order."""
    rows = conn.execute(
        "SELECT p.mark, r.version, r.verdict, r.checks_json, r.created_at, s.disposition, s.reasons, "
        "s.signed_at, COALESCE(NULLIF(u.name, ''), u.email) AS signer, rp.mark AS remedial_of_mark, "
        "rs.version AS remedial_of_version "
        "FROM pile_records r JOIN piles p ON p.id = r.pile_id "
        "LEFT JOIN signoffs s ON s.pile_id = r.pile_id AND s.version = r.version "
        "LEFT JOIN users u ON u.id = s.signed_by "
        "LEFT JOIN signoffs rs ON rs.id = s.remedial_of LEFT JOIN piles rp ON rp.id = rs.pile_id "
        "WHERE r.project_id = ? AND r.progress = 'logged' AND (r.verdict = 'needs engineer' "
        "OR s.disposition IN ('accepted with conditions', 'remedial', 'rejected'))",
        (project_id,)).fetchall()
    out = []
    for r in rows:
        checks = json.loads(r["checks_json"])
        out.append(NonConformance(
            r["mark"], r["version"], r["verdict"], tuple(c["code"] for c in checks if c.get("ok") is False),
            tuple(c["code"] for c in checks if c.get("ok") is None), r["created_at"], r["disposition"],
            r["reasons"] or "", r["signer"], r["signed_at"], r["remedial_of_mark"], r["remedial_of_version"]))
    out.sort(key=lambda n: (natural_key(n.mark), n.version))
    return out


def rules_versions_used(conn: sqlite3.Connection, project_id: int) -> list[int]:
    """The rule set versions the project's current records were checked with."""
    return [r[0] for r in conn.execute(
        "SELECT DISTINCT r.rules_version FROM pile_records r JOIN piles p ON p.id = r.pile_id "
        "AND p.current_version = r.version WHERE r.project_id = ? ORDER BY 1", (project_id,)).fetchall()]
