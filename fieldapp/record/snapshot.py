"""One consistent read of everything a record build prints.

``read_snapshot(conn)`` opens one read transaction (SQLite in WAL mode: a deferred ``BEGIN``
and the first read fix the snapshot; saves committed later are not seen by it) and ends it when
the build is done. Inside it ``front`` reads the project, audit head, schedule, register, rules
and revisions up front, and ``sheets`` reads the pile sheets one at a time as the PDF reaches
them (memory holds a few sheets, not the project), still from the same snapshot.

Sheets come from the stored version only: its record, checks, verdict and rules version as
saved, its sign-offs, amendments and photos; the pictures are drawn from those
(``fieldapp.record.figures``). Nothing is rechecked.
"""

from __future__ import annotations

import sqlite3
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import datetime
from typing import Iterator

from fieldapp.db_postgres import PgConnection
from fieldapp.queries import audit, ncr, projects, record_issues, records
from fieldapp.queries import photos as photos_q
from fieldapp.queries import piles as piles_q
from fieldapp.queries import review as review_q
from fieldapp.record import data, figures


@contextmanager
def read_snapshot(conn: sqlite3.Connection) -> Iterator[sqlite3.Connection]:
    """One read transaction on ``conn`` for the life of the block."""
    if conn.in_transaction:
        raise RuntimeError("a record build needs a connection outside any transaction")
    # SQLite in WAL mode: a deferred BEGIN reads one snapshot from its first read; PostgreSQL's
    # default (read committed) would see each later commit, so ask for repeatable read.
    conn.execute("BEGIN ISOLATION LEVEL REPEATABLE READ" if isinstance(conn, PgConnection) else "BEGIN")
    try:
        conn.execute("SELECT COUNT(*) FROM audit_log").fetchone()     # the snapshot starts here
        yield conn
    finally:
        if conn.in_transaction:
            conn.execute("ROLLBACK")


@dataclass
class Front:
    """What the cover, schedule, register, rules and audit pages print."""

    project: projects.Project
    issued_at: datetime
    issued_by: str
    issued_role: str
    revision: int
    head_seq: int
    head_hash: str
    chain: audit.ChainReport
    statuses: list[review_q.PileStatus]
    rows: list[data.ScheduleRow]
    positions: dict[int, tuple[float, float]]
    register: list[ncr.NonConformance]
    issues: list[record_issues.Issue]
    rules_versions: list
    rules_current: int
    rules_used: list[int]
    state: dict[str, list] = field(default_factory=dict)
    changes: str = ""

    @property
    def unsigned(self) -> int:
        return sum(1 for s in self.statuses if not s.signed)

    @property
    def open_ncs(self) -> int:
        return sum(1 for n in self.register if n.state == ncr.OPEN)

    @property
    def draft(self) -> bool:
        """A draft while any pile is unsigned or any non-conformance is open."""
        return self.unsigned > 0 or self.open_ncs > 0 or not self.statuses


def _changes(previous: record_issues.Issue | None, state: dict[str, list], register) -> str:
    """What changed since the previous issue, in words."""
    if previous is None:
        return "first issue"
    old = previous.state
    added = [m for m in state if m not in old]
    removed = [m for m in old if m not in state]
    versions = [m for m in state if m in old and state[m][0] != old[m][0]]
    signed = [m for m in state if state[m][1] is not None and (m not in old or old[m][1] != state[m][1])]
    opened = [n.label for n in register if n.raised_at > previous.issued_at]
    closed = [n.label for n in register if n.state == ncr.CLOSED and n.closed_at > previous.issued_at]

    def few(marks):
        return ", ".join(marks[:8]) + (f" and {len(marks) - 8} more" if len(marks) > 8 else "")
    parts = []
    for words, marks in (("piles added", added), ("piles removed", removed), ("new record versions", versions),
                         ("newly signed", signed), ("non-conformances raised", opened),
                         ("non-conformances closed", closed)):
        if marks:
            parts.append(f"{words} ({len(marks)}): {few(marks)}")
    return "; ".join(parts) or "no change to piles, records, sign-offs or non-conformances"


def front(conn: sqlite3.Connection, project_id: int, issued_by: str, issued_role: str,
          issued_at: datetime) -> Front:
    """Read the front matter inside ``read_snapshot``."""
    project = projects.get(conn, project_id)
    if project is None:
        raise LookupError(f"project {project_id} does not exist")
    seq, head = audit.head(conn, project_id)
    chain = audit.verify_chain(conn, project_id)
    statuses = review_q.pile_statuses(conn, project_id)
    by_id = {s.id: s for s in statuses}
    rows_by_id: dict[int, data.ScheduleRow] = {}
    positions = {}
    for rec in record_issues.current_versions(conn, project_id):
        status = by_id.get(rec.pile_id)
        if status is None:
            continue
        rows_by_id[rec.pile_id] = data.schedule_row(status, rec)
        e, n = rec.record.get("easting"), rec.record.get("northing")
        if e is not None and n is not None:
            positions[rec.pile_id] = (e, n)
    rows = [rows_by_id.get(s.id) or data.schedule_row(s, None) for s in statuses]
    del rows_by_id
    register = ncr.register(conn, project_id)
    issues = record_issues.for_project(conn, project_id)
    current_rules = projects.current_rules(conn, project_id)
    used = review_q.rules_versions_used(conn, project_id) or [current_rules.version]
    rule_sets = [rs for rs in (projects.rules_version(conn, project_id, v)
                               for v in sorted(set(used) | {current_rules.version})) if rs is not None]
    state = {s.mark: [s.current_version, s.signed_version if s.signed else None] for s in statuses}
    out = Front(project, issued_at, issued_by, issued_role, record_issues.next_revision(conn, project_id), seq,
                head, chain, statuses, rows, positions, register, issues, rule_sets, current_rules.version, used,
                state)
    out.changes = _changes(issues[-1] if issues else None, state, register)
    return out


def pile_sheet(conn: sqlite3.Connection, project_id: int, status: review_q.PileStatus) -> data.PileSheet:
    """One pile as stored: its current version, sign-offs, amendments, photos, and pictures drawn
    from the stored version alone."""
    pile = piles_q.get_pile_by_id(conn, project_id, status.id)
    current = records.current(conn, status.id)
    sheet = data.PileSheet(status, pile, current, review_q.signoffs_for_pile(conn, status.id),
                           review_q.amendments_for_pile(conn, status.id), photos_q.for_pile(conn, status.id))
    if current is not None:
        sheet.figures = {"checks": figures.checks_figure(current.checks),
                         "section": figures.section_figure(current.record, status.toe_level_m)}
    return sheet
