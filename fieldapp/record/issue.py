"""Issue a certification record: number the non-conformances, build the PDF from one read
snapshot, sign it with the project's key, and keep the issue (revision, audit head, file hash)
so ``verify-audit`` holds the chain to it.

``issue(database, data_dir, photo_dir, project_id, out, ...)`` opens its own connections: one
for the read snapshot of the build, one for progress and the writes before and after it.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass
from datetime import timezone
from pathlib import Path
from typing import Callable

from fieldapp import db
from fieldapp.queries import audit, ncr, projects, record_issues
from fieldapp.record import pdf, signing


@dataclass(frozen=True)
class IssueResult:
    """An issued record: the build, the signed file's SHA-256 and the issue's row id."""

    build: pdf.BuildResult
    file_sha256: str
    issue_id: int


def issue(database: str | Path, data_dir: str | Path, photo_dir: str | Path | None, project_id: int,
          out: str | Path, *, issued_by: str = "toeline", issued_role: str = "",
          progress: Callable[[int, int], None] | None = None,
          before_sheets: Callable[[], None] | None = None,
          write_conn: sqlite3.Connection | None = None) -> IssueResult:
    """Build, sign and keep one issue of the project's record (see the module docstring)."""
    out = Path(out)
    own = write_conn is None
    writer = write_conn if write_conn is not None else db.connect(database)
    reader = db.connect(database)
    try:
        project = projects.get(writer, project_id)
        if project is None:
            raise LookupError(f"project {project_id} does not exist")
        with db.write(writer):
            ncr.sync(writer, project_id)
        key = signing.ensure_key(data_dir, project_id, project.name)
        unsigned = out.with_name(out.name + ".unsigned")
        result = pdf.build(reader, project_id, unsigned, photo_dir=photo_dir, progress=progress,
                           issued_by=issued_by, issued_role=issued_role, before_sheets=before_sheets)
        reason = (f"Certification record of project {project_id}, revision {result.revision}"
                  + (" (DRAFT)" if result.draft else ""))
        try:
            sha = signing.sign(unsigned, out, key, reason)
        finally:
            unsigned.unlink(missing_ok=True)
        with db.write(writer):
            issue_id = record_issues.insert(
                writer, project_id=project_id, revision=result.revision, head_seq=result.head_seq,
                head_hash=result.head_hash, file_sha256=sha, file_name=out.name,
                issued_at=result.issued_at.astimezone(timezone.utc).isoformat(timespec="seconds"), issued_by=issued_by, draft=result.draft,
                piles=result.piles, pages=result.pages, changes=result.changes, state=result.state)
            audit.append(writer, project_id, issued_by, "record issued", "record",
                         {"revision": result.revision, "head_seq": result.head_seq, "head_hash": result.head_hash,
                          "file_sha256": sha, "pages": result.pages, "piles": result.piles,
                          "draft": result.draft})
        return IssueResult(result, sha, issue_id)
    finally:
        reader.close()
        if own:
            writer.close()
