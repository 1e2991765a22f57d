"""The non-conformance register: every record version with a short check, whatever its progress.

A non-conformance (NC) is raised by the first version of a pile with a short check (``ok`` is
False) and is numbered per project, NC-001 upwards, in the order raised. Numbers are stored
(``nonconformances``) and rows are never deleted, so a number is never reused. Later short
versions of the same pile belong to the open NC. It is **closed** by the first sign-off of a
version at or after the one that raised it with a disposition other than ``remedial``, or by
the sign-off of a record that resolves its remedial disposition (``remedial_of``); that sign-off
is "the record that closes it". A short version after the close raises a new NC.

``sync`` (inside a write transaction) numbers what is new; ``register`` reads, storing nothing,
so a build can read it inside its read snapshot.
"""

from __future__ import annotations

import json
import sqlite3
from dataclasses import dataclass, field

from fieldapp.queries.caps import natural_key

OPEN, CLOSED = "open", "closed"
REMEDIAL = "remedial"


def nc_label(number: int) -> str:
    """NC-001 for 1."""
    return f"NC-{number:03d}"


@dataclass
class NonConformance:
    """One NC as the register shows it."""

    number: int
    mark: str
    raised_version: int
    raised_at: str
    progress: str
    short: list[str]
    versions: list[int] = field(default_factory=list)
    state: str = OPEN
    closed_at: str = ""
    disposition: str = ""
    remedial_action: str = ""
    closed_by_record: str = ""
    signer: str = ""

    @property
    def label(self) -> str:
        return nc_label(self.number)

    CSV_HEADER = ("number", "pile", "raised_version", "raised_at", "progress_when_raised", "short_checks",
                  "versions", "state", "closed_at", "disposition", "remedial_action", "closed_by_record",
                  "signed_by")

    def values(self) -> tuple:
        """The row's values in CSV_HEADER order."""
        return (self.label, self.mark, self.raised_version, self.raised_at, self.progress,
                ", ".join(self.short), ", ".join(f"v{v}" for v in self.versions), self.state,
                self.closed_at, self.disposition, self.remedial_action, self.closed_by_record, self.signer)


def _short(checks_json: str) -> list[str]:
    try:
        checks = json.loads(checks_json)
    except ValueError:
        return []
    return [str(c.get("code")) for c in checks if isinstance(c, dict) and c.get("ok") is False]


def _versions(conn, project_id):
    return conn.execute(
        "SELECT r.pile_id, p.mark, r.version, r.progress, r.checks_json, r.created_at "
        "FROM pile_records r JOIN piles p ON p.id = r.pile_id WHERE r.project_id = ? "
        "ORDER BY r.pile_id, r.version", (project_id,))      # a cursor: one version at a time


def _signoffs(conn, project_id):
    """{pile_id: [sign-off rows by version]} and {remedial sign-off id: resolving row}."""
    rows = conn.execute(
        "SELECT s.id, s.pile_id, p.mark, s.version, s.disposition, s.reasons, s.remedial_of, s.signed_at, "
        "COALESCE(NULLIF(u.name, ''), u.email, '') AS signer FROM signoffs s JOIN piles p ON p.id = s.pile_id "
        "LEFT JOIN users u ON u.id = s.signed_by WHERE s.project_id = ? ORDER BY s.pile_id, s.version",
        (project_id,)).fetchall()
    by_pile: dict[int, list] = {}
    resolving: dict[int, object] = {}
    for r in rows:
        by_pile.setdefault(r["pile_id"], []).append(r)
        if r["remedial_of"] is not None and r["remedial_of"] not in resolving:
            resolving[r["remedial_of"]] = r
    return by_pile, resolving


def _close(signoffs, resolving, raised: int):
    """(closing sign-off row, the remedial sign-off before it or None) for an NC raised at
    version ``raised``; (None, remedial or None) while it is open."""
    remedial = None
    for s in signoffs:
        if s["version"] < raised:
            continue
        if s["disposition"] == REMEDIAL:
            remedial = remedial or s
            if s["id"] in resolving:
                return resolving[s["id"]], s
            continue
        return s, remedial
    return None, remedial


def _walk(conn, project_id, numbers: dict[tuple[int, int], tuple[int, str]]):
    """Every NC the stored versions raise, numbered where ``numbers`` knows it (else 0)."""
    by_pile, resolving = _signoffs(conn, project_id)
    out: list[NonConformance] = []
    current: NonConformance | None = None
    close_version = None
    pile = None
    for v in _versions(conn, project_id):
        if v["pile_id"] != pile:
            pile, current, close_version = v["pile_id"], None, None
        short = _short(v["checks_json"])
        if not short:
            continue
        if current is not None and (close_version is None or v["version"] <= close_version):
            current.versions.append(v["version"])
            continue
        number, _ = numbers.get((pile, v["version"]), (0, ""))
        current = NonConformance(number, v["mark"], v["version"], v["created_at"], v["progress"], short,
                                 [v["version"]])
        closing, remedial = _close(by_pile.get(pile, []), resolving, v["version"])
        if remedial is not None:
            current.remedial_action = (f"remedial ({remedial['signed_at'][:10]}, {remedial['signer']}): "
                                       f"{remedial['reasons']}")
        if closing is not None:
            current.state = CLOSED
            current.closed_at = closing["signed_at"]
            current.disposition = closing["disposition"]
            current.signer = closing["signer"]
            current.closed_by_record = f"{closing['mark']} v{closing['version']} signed {closing['disposition']}"
            close_version = closing["version"] if closing["pile_id"] == pile else None
            if closing["pile_id"] != pile:          # resolved by another pile: closes at the remedial
                close_version = remedial["version"] if remedial is not None else v["version"]
        else:
            current.disposition = REMEDIAL if remedial is not None else ""
            close_version = None
        out.append(current)
    return out


def _numbers(conn, project_id) -> dict[tuple[int, int], tuple[int, str]]:
    return {(r["pile_id"], r["raised_version"]): (r["number"], r["raised_at"]) for r in conn.execute(
        "SELECT pile_id, raised_version, number, raised_at FROM nonconformances WHERE project_id = ?",
        (project_id,)).fetchall()}


def sync(conn: sqlite3.Connection, project_id: int) -> int:
    """Number every NC not numbered yet (call inside ``db.write``); returns how many were new."""
    if not conn.in_transaction:
        raise RuntimeError("ncr.sync must run inside a write transaction")
    numbers = _numbers(conn, project_id)
    new = sorted((n for n in _walk(conn, project_id, numbers) if n.number == 0),
                 key=lambda n: (n.raised_at, natural_key(n.mark), n.raised_version))
    if not new:
        return 0
    top = conn.execute("SELECT COALESCE(MAX(number), 0) FROM nonconformances WHERE project_id = ?",
                       (project_id,)).fetchone()[0]
    ids = {r["mark"]: r["id"] for r in conn.execute("SELECT id, mark FROM piles WHERE project_id = ?",
                                                     (project_id,)).fetchall()}
    for i, n in enumerate(new, start=top + 1):
        conn.execute("INSERT INTO nonconformances (project_id, number, pile_id, mark, raised_version, raised_at) "
                     "VALUES (?, ?, ?, ?, ?, ?)", (project_id, i, ids.get(n.mark), n.mark, n.raised_version,
                                                   n.raised_at))
    return len(new)


def register(conn: sqlite3.Connection, project_id: int) -> list[NonConformance]:
    """The register in number order (NCs not yet numbered by ``sync`` come last, number 0)."""
    items = _walk(conn, project_id, _numbers(conn, project_id))
    return sorted(items, key=lambda n: (n.number == 0, n.number, natural_key(n.mark)))
