"""Sign-off: the engineer's disposition of one record version, its hash, and the lock it puts
on that version.

``sign_pile(conn, project_id, pile_row, user, disposition, reasons, ...)`` signs the current
version (one transaction with its audit entry; the caller has checked role and password) and
raises ``SignRefused`` with the HTTP status and body. What is signed is
``record_hash_payload``: the version with its checks and verdict, the decision, the signer and
the rules version; its SHA-256 over canonical JSON is the record hash.

The lock: ``lock_refusal`` says why a save must be refused (a plain change of a signed
version; an amendment needs a reason) and ``note_amendment`` records an amendment of a signed
version. The one save path (``fieldapp.saving.save_record``) calls both itself, so a save made
without the web app (a script, the command line) is refused just the same.
"""

from __future__ import annotations

import hashlib
import sqlite3

from design_core.checks import MEETS_DESIGN
from fieldapp import db
from fieldapp.queries import audit, records
from fieldapp.queries import review as review_q
from fieldapp.record_input import unicode_problem

MAX_REASONS = 4000
SQLITE_INT_MIN, SQLITE_INT_MAX = -(2**63), 2**63 - 1


# --- the lock on signed records (called by the one save path, fieldapp.saving) ---------------

def lock_refusal(conn: sqlite3.Connection, pile_row, amendment: dict | None) -> str | None:
    """Why a save of this pile must be refused (a plain change of a signed version; an
    amendment without a reason), or None when it may go ahead. Runs inside the save's
    transaction, before anything is written."""
    if not review_q.is_locked(conn, pile_row.id):
        return None
    if not amendment:
        return (f"pile {pile_row.mark} is signed at version {pile_row.current_version}: a change "
                "must be an amendment with a reason, and it will need its own sign-off")
    reason = amendment.get("reason")
    if not isinstance(reason, str) or not reason.strip():
        return "amendment.reason is required to change a signed record"
    if len(reason) > MAX_REASONS:
        return f"amendment.reason must be at most {MAX_REASONS} characters"
    return None


def note_amendment(conn: sqlite3.Connection, pile_row, version: int, amendment: dict | None) -> None:
    """After a save (in its transaction): when it amended a signed version, store the amendment
    and its audit entry."""
    if not amendment or version < 2 or review_q.signoff_for(conn, pile_row.id, version - 1) is None:
        return
    saved = records.get_version(conn, pile_row.id, version)
    review_q.record_amendment(conn, project_id=pile_row.project_id, pile_id=pile_row.id, mark=pile_row.mark,
                              from_version=version - 1, version=version, reason=amendment.get("reason", ""),
                              user_id=saved.created_by if saved else None,
                              actor=(saved.created_by_name if saved else "") or "unknown")


# --- signing --------------------------------------------------------------------------------------

class SignRefused(Exception):
    """A sign-off that cannot be made: HTTP status and the JSON body to answer with."""

    def __init__(self, status: int, body: dict):
        super().__init__(body.get("message") or body.get("error") or str(body))
        self.status = status
        self.body = body


def reasons_needed(disposition: str, verdict: str) -> bool:
    """Reasons are required unless the pile is accepted as meeting design."""
    return not (disposition == "accepted" and verdict == MEETS_DESIGN)


def record_hash_payload(project_id: int, mark: str, current: records.RecordVersion, disposition: str,
                        reasons: str, remedial_of: int | None, user, signed_at: str) -> dict:
    """What a sign-off signs: the record version with its checks and verdict, the decision, the
    signer and the rules version."""
    return {
        "project_id": project_id, "pile": mark, "version": current.version, "record": current.record,
        "checks": current.checks, "verdict": current.verdict,
        "worst_utilisation": current.worst_utilisation, "disposition": disposition,
        "reasons": reasons, "remedial_of": remedial_of,
        "signer": {"id": user.id, "email": user.email, "name": user.name, "role": user.role},
        "signed_at": signed_at, "rules_version": current.rules_version,
    }


def _clean_reasons(value) -> str:
    if value is None:
        return ""
    if not isinstance(value, str):
        raise SignRefused(422, {"errors": {"reasons": "must be text"}})
    problem = unicode_problem(value)
    if problem:
        raise SignRefused(422, {"errors": {"reasons": problem}})
    return value.strip()


def sign_pile(conn: sqlite3.Connection, project_id: int, pile_row, user, disposition, reasons,
              *, version: int | None = None, remedial_of: int | None = None, batch: bool = False) -> review_q.SignOff:
    """Sign the pile's current record version with a disposition; one transaction with its audit
    entry. The caller has checked the role and the password. Raises SignRefused."""
    errors = {}
    if disposition not in review_q.DISPOSITIONS:
        errors["disposition"] = f"must be one of {', '.join(review_q.DISPOSITIONS)}, got {disposition!r}"
    reasons = _clean_reasons(reasons)
    if len(reasons) > MAX_REASONS:
        errors["reasons"] = f"must be at most {MAX_REASONS} characters, got {len(reasons)}"
    if remedial_of is not None and (isinstance(remedial_of, bool) or not isinstance(remedial_of, int)
                                    or not SQLITE_INT_MIN <= remedial_of <= SQLITE_INT_MAX):
        errors["remedial_of"] = "must be the id of a sign-off with disposition remedial"
    if errors:
        raise SignRefused(422, {"errors": errors})
    with db.write(conn):
        current = records.current(conn, pile_row.id)
        if current is None:
            raise SignRefused(409, {"error": "no record", "message": f"pile {pile_row.mark} has no record to sign"})
        if current.progress != "logged":
            raise SignRefused(409, {"error": "not logged", "message":
                                    f"pile {pile_row.mark} is at '{current.progress}': only a logged record "
                                    "can be signed"})
        if version is not None and version != current.version:
            raise SignRefused(409, {"error": "conflict", "message":
                                    f"the record changed since you opened it (now version {current.version}, "
                                    f"you reviewed {version})", "version": current.version})
        if review_q.signoff_for(conn, pile_row.id, current.version) is not None:
            raise SignRefused(409, {"error": "locked", "message":
                                    f"version {current.version} of pile {pile_row.mark} is signed already"})
        if reasons_needed(disposition, current.verdict) and not reasons:
            why = ("the pile needs the engineer" if current.verdict != MEETS_DESIGN
                   else f"the disposition is {disposition}")
            raise SignRefused(422, {"errors": {"reasons": f"are required because {why} (only a pile "
                                                          "accepted as meeting design may go without)"}})
        if remedial_of is None:
            earlier = review_q.open_remedial(conn, project_id, pile_row.id)
            remedial_of = earlier.id if earlier is not None and earlier.version < current.version else None
        elif review_q.signoff_by_id(conn, project_id, remedial_of) is None or \
                review_q.signoff_by_id(conn, project_id, remedial_of).disposition != "remedial":
            raise SignRefused(422, {"errors": {"remedial_of": "must be the id of a sign-off of this project "
                                                              "with disposition remedial"}})
        signed_at = audit.now_iso()
        payload = record_hash_payload(project_id, pile_row.mark, current, disposition, reasons, remedial_of,
                                      user, signed_at)
        signed_json = audit.canonical_json(payload)
        digest = hashlib.sha256(signed_json.encode("utf-8")).hexdigest()
        signoff_id = review_q.insert_signoff(
            conn, project_id=project_id, pile_id=pile_row.id, version=current.version, disposition=disposition,
            reasons=reasons, remedial_of=remedial_of, verdict=current.verdict, rules_version=current.rules_version,
            signed_by=user.id, signed_at=signed_at, signed_json=signed_json, record_hash=digest, batch=batch)
        audit.append(conn, project_id, user.label, "sign-off", pile_row.mark,
                     {"version": current.version, "disposition": disposition, "reasons": reasons,
                      "verdict": current.verdict, "remedial_of": remedial_of, "record_hash": digest,
                      "rules_version": current.rules_version, "batch": batch})
        return review_q.signoff_by_id(conn, project_id, signoff_id)
