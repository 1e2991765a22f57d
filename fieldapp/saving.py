"""The one save path of a pile's as-built record, and the rechecks after upstream changes.

``evaluate(conn, project_id, pile_row, raw) -> Evaluation``
    Validate a record body (``record_input.validate_record``) and recheck it on the stored
    design, ground (and the strata met), rules and cap: what a save would store, storing
    nothing. The save and the rig's preview both use it.
``save_record(conn, project_id, pile_row, user, client_id, base_version, raw) -> SaveOutcome``
    The one save path (one ``db.write`` transaction: new version, pile state, audit entry).
    Raises ``RecordInvalid`` (422), ``RecordConflict`` (409), ``ClientIdReused`` (409),
    ``ClientIdOfAnotherPile`` (422) and
    ``PileLocked`` (409: a signed version changed without an amendment, ``signoff.lock_refusal``).
``recheck_stored``, ``recheck_cap_mates``
    Recheck recorded piles after what they rest on changed; a new version only where a check's
    status or the verdict changes.

The lock on signed records is part of the save itself (``signoff.lock_refusal`` and
``signoff.note_amendment`` are called here), so any caller, with or without the web app, is
refused alike.
"""

from __future__ import annotations

import json
import sqlite3
import uuid
from dataclasses import dataclass, replace
from typing import Any

from design_core import PileVerdict, ProjectItem
from design_core.ground import GroundModel, ground_from_strata
from design_core.inputs import CapGroup
from design_core.verdict import recheck, recheck_project
from fieldapp import db, signoff
from fieldapp.pile_inputs import (
    RecheckInputs, asbuilt_from_record, cap_group_for, load_cap_group, load_ground, load_inputs,
    pile_design,
)
from fieldapp.pile_test_register import verdict_with_tests
from fieldapp.queries import audit, projects, records
from fieldapp.queries import piles as piles_q
from fieldapp.record_input import RecordInvalid, clean_text, validate_record


class RecordConflict(Exception):
    """The record changed on the server since the client read it: ``current`` is the newest."""

    def __init__(self, current: records.RecordVersion | None, stored_version: int):
        super().__init__(f"the stored record is at version {stored_version}")
        self.current = current
        self.stored_version = stored_version


class ClientIdReused(ValueError):
    """The client id was already used in this project for a save of another record of this
    pile (answered 409: the client makes a new id and keeps its item)."""


class ClientIdOfAnotherPile(ValueError):
    """The client id was already used in this project for a save of another pile (422)."""


class PileLocked(Exception):
    """The save would change a signed version without an amendment; the message says why."""


# --------------------------------------------------------------------------------------------
# The recheck on stored inputs
# --------------------------------------------------------------------------------------------

def recheck_pile(conn: sqlite3.Connection, project_id: int, pile_row, record_dict: dict[str, Any],
                 inputs: RecheckInputs | None = None) -> PileVerdict:
    """Run ``design_core.recheck`` for one pile on a clean record dict.

    ``record_dict`` must be clean (``validate_record``); an empty dict rechecks the design
    itself (every as-built check then reports "not checked"). Strata met go to the recheck in
    the AsBuilt, which rebuilds the ground under the pile from them (``ground_from_strata``);
    ``verdict.details["borrowed"]`` says which layer each stratum borrowed from.
    """
    inputs = inputs or load_inputs(conn, project_id, pile_row, record_dict)
    asbuilt = asbuilt_from_record(record_dict) if record_dict else None
    return recheck(inputs.design, asbuilt, inputs.ground, inputs.rules, group=inputs.group)


def borrowed_list(verdict: PileVerdict, inputs: RecheckInputs, record: dict[str, Any]) -> list[dict]:
    """Which ground-model layer each stratum met borrowed from, as JSON-ready dicts.

    Read from the verdict's details; when the recheck did not report it, worked out with
    ``ground_from_strata`` (the same function the recheck uses), so the record always says.
    """
    found = verdict.details.get("borrowed") if verdict.details else None
    if found is None and record.get("strata") and "platform_level" in record:
        asb = asbuilt_from_record(record)
        toe = asb.toe_level if asb.toe_level is not None else inputs.ground.bottom
        toe = max(toe, inputs.ground.bottom)
        _, found = ground_from_strata(inputs.ground, record["platform_level"], asb.strata, toe)
    return [b.to_dict() if hasattr(b, "to_dict") else dict(b) for b in (found or [])]


@dataclass(frozen=True)
class Evaluation:
    """A record body validated and rechecked: what a save of it would store."""

    clean: dict[str, Any]
    inputs: RecheckInputs
    verdict: PileVerdict
    checks: list[dict[str, Any]]       # short first, as stored and answered
    borrowed: list[dict[str, Any]]


def _validated(conn: sqlite3.Connection, project_id: int, pile_row,
               raw: Any) -> tuple[RecheckInputs, dict[str, Any], dict[str, str]]:
    inputs = load_inputs(conn, project_id, pile_row, with_group=False)
    clean, errors = validate_record(raw, inputs.rules, inputs.design, inputs.ground)
    return inputs, clean, errors


def _evaluate(conn: sqlite3.Connection, pile_row, inputs: RecheckInputs,
              clean: dict[str, Any]) -> Evaluation:
    inputs = replace(inputs, group=cap_group_for(conn, pile_row, clean))
    try:
        verdict = recheck_pile(conn, pile_row.project_id, pile_row, clean, inputs)
        verdict = verdict_with_tests(conn, pile_row.id, verdict)  # the tests after installation
        borrowed = borrowed_list(verdict, inputs, clean)
    except ValueError as exc:  # design_core refused the combination; say so, save nothing
        raise RecordInvalid({"record": f"the recheck cannot use this record: {exc}"}) from None
    return Evaluation(clean, inputs, verdict, [c.to_dict() for c in verdict.short_first()], borrowed)


def evaluate(conn: sqlite3.Connection, project_id: int, pile_row, raw: Any) -> Evaluation:
    """Validate ``raw`` (a record body) and recheck it as the save would; nothing is stored.

    Raises ``RecordInvalid`` with every error (or when design_core cannot use the record).
    """
    inputs, clean, errors = _validated(conn, project_id, pile_row, raw)
    if errors:
        raise RecordInvalid(errors)
    return _evaluate(conn, pile_row, inputs, clean)


# --------------------------------------------------------------------------------------------
# The one save path
# --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class SaveOutcome:
    """A save's result: the stored version and whether this call made it (False: a repeat)."""

    version: records.RecordVersion
    created: bool

    def answer(self) -> dict[str, Any]:
        """The API's 200 answer."""
        return self.version.answer()


def _stored_form(record: dict[str, Any]) -> dict[str, Any]:
    """A clean record as storage gives it back (``records.insert`` stores sorted JSON)."""
    return json.loads(json.dumps(record, sort_keys=True))


def _repeat(conn: sqlite3.Connection, project_id: int, client_id: str, pile_row,
            clean: dict[str, Any] | None) -> SaveOutcome | None:
    """The earlier save of this project with ``client_id`` when this is a repeat of it (same
    pile, same record: the first answer again); None when the id is new in the project.
    ClientIdOfAnotherPile / ClientIdReused when it was used for another pile / another record."""
    earlier = records.by_client_id(conn, project_id, client_id)
    if earlier is None:
        return None
    if earlier.pile_id != pile_row.id:
        raise ClientIdOfAnotherPile("client_id was already used for a save of another pile: make a new one")
    if clean is None or _stored_form(clean) != earlier.record:
        raise ClientIdReused("client_id reused")
    return SaveOutcome(earlier, False)


def _check_amendment(amendment: Any) -> dict | None:
    """The amendment object as sent (None for none); RecordInvalid naming the field when its
    reason is not valid text."""
    if amendment is None:
        return None
    if not isinstance(amendment, dict):
        raise RecordInvalid({"amendment": "must be an object with a reason"})
    errors: dict[str, str] = {}
    clean_text("amendment.reason", amendment.get("reason"), signoff.MAX_REASONS, errors)
    if errors:
        raise RecordInvalid(errors)
    return amendment


def save_record(conn: sqlite3.Connection, project_id: int, pile_row, user, client_id: str,
                base_version: int | None, raw: Any, amendment: dict | None = None) -> SaveOutcome:
    """Validate, recheck and store a new version of a pile's as-built record.

    * The same ``client_id`` again with the same record returns the version that save made (no
      new version), even if newer versions exist since; with another record it raises
      ``ClientIdReused``, for another pile of the project ``ClientIdOfAnotherPile``. Ids are
      kept apart per project.
    * A signed current version is changed only by an amendment with a reason
      (``signoff.lock_refusal``: ``PileLocked`` otherwise); the amendment is noted.
    * ``base_version`` (None = "no record yet") older than the stored version raises
      ``RecordConflict`` with the newest version; nothing is written.
    * An invalid record raises ``RecordInvalid`` with every error; nothing is written.
    * Otherwise one ``db.write`` transaction inserts version n+1, moves the pile's progress,
      verdict, worst utilisation and current version, and appends "record saved" to the audit
      chain. ``user`` is a ``users.User`` (its id and label are stored).
    """
    inputs, clean, errors = _validated(conn, project_id, pile_row, raw)
    repeat = _repeat(conn, project_id, client_id, pile_row, None if errors else clean)
    if repeat is not None:
        return repeat
    if base_version is not None and (isinstance(base_version, bool) or not isinstance(base_version, int)
                                     or base_version < 0):
        raise RecordInvalid({"base_version": "must be a whole number of 0 or more, or null"})
    amendment = _check_amendment(amendment)
    if errors:
        raise RecordInvalid(errors)
    done = _evaluate(conn, pile_row, inputs, clean)
    verdict, checks = done.verdict, done.checks
    worst = verdict.worst_utilisation

    with db.write(conn):
        repeat = _repeat(conn, project_id, client_id, pile_row, clean)  # a twin may have won the race
        if repeat is not None:
            return repeat
        refusal = signoff.lock_refusal(conn, pile_row, amendment)
        if refusal:
            raise PileLocked(refusal)
        stored, previous_position = records.stored_position(conn, pile_row.id)
        base = base_version or 0
        if base < stored:
            raise RecordConflict(records.current(conn, pile_row.id), stored)
        if base > stored:
            raise RecordInvalid({"base_version": f"must be at most the stored version {stored}, got {base}"})
        version = stored + 1
        saved = records.insert(conn, project_id=project_id, pile_id=pile_row.id, version=version,
                               client_id=client_id, record=clean, progress=clean["progress"],
                               verdict=verdict.verdict, worst_utilisation=worst, checks=checks,
                               borrowed=done.borrowed, notes=list(verdict.notes),
                               rules_version=inputs.rules_version, created_by=user.id,
                               created_by_name=user.label)
        records.set_pile_state(conn, pile_row.id, progress=clean["progress"], verdict=verdict.verdict,
                               worst_utilisation=worst, version=version)
        signoff.note_amendment(conn, pile_row, version, amendment)
        if pile_row.cap_id is not None and previous_position != _position(clean):
            recheck_cap_mates(conn, project_id, pile_row, user)
        short = [c["code"] for c in checks if c["ok"] is False]
        audit.append(conn, project_id, user.label, "record saved", pile_row.mark,
                     {"version": version, "verdict": verdict.verdict, "short": short,
                      "progress": clean["progress"], "client_id": client_id,
                      "rules_version": inputs.rules_version,
                      **({"amendment": amendment} if amendment else {})})
    return SaveOutcome(saved, True)


def _position(record: dict[str, Any]) -> tuple[float, float] | None:
    """The as-built (easting, northing) of a record, or None when not both surveyed."""
    if record.get("easting") is None or record.get("northing") is None:
        return None
    return (float(record["easting"]), float(record["northing"]))


# --------------------------------------------------------------------------------------------
# Rechecks after upstream changes
# --------------------------------------------------------------------------------------------

def recheck_cap_mates(conn: sqlite3.Connection, project_id: int, pile_row, user) -> list[str]:
    """Recheck the other recorded piles of a cap after one pile's as-built position changed.

    A rigid cap shares its loads over the as-built positions, so moving one pile changes every
    pile's share (``group_share``). See :func:`recheck_stored` for what is stored. Runs inside
    the caller's transaction. Returns the marks given a new version.
    """
    reason = (f"rechecked because the as-built position of {pile_row.mark} changed the shares "
              f"of cap {pile_row.cap_mark}")
    mates = [m for m in piles_q.list_piles(conn, project_id, cap_id=pile_row.cap_id)
             if m.id != pile_row.id]
    return recheck_stored(conn, project_id, mates, user, reason)


def recheck_stored(conn: sqlite3.Connection, project_id: int, pile_rows, user, reason: str,
                   actor: str | None = None) -> list[str]:
    """Recheck recorded piles after something they rest on changed (a cap-mate's position, the
    rules, a ground model, the design).

    Each pile with a record is rechecked on its current record. Where any check's status (ok,
    short, not checked) or the verdict changes, a new version of its record is stored with the
    same as-built data, the new checks and ``reason`` in its notes, and an audit entry "record
    rechecked". A pile that was signed is thereby no longer signed at its current version: the
    change needs the engineer's sign-off like any amendment. Piles whose statuses stay the same
    keep their version (their stored figures are those of their own save). Runs inside the
    caller's transaction. ``user`` may be None (the command line); ``actor`` then names who
    acted in the audit trail. Returns the marks given a new version.

    The same as ``store_rechecks(conn, project_id, plan_rechecks(conn, project_id, pile_rows),
    user, reason, actor)``; a background job makes the plan outside the write transaction.
    """
    return store_rechecks(conn, project_id, plan_rechecks(conn, project_id, pile_rows), user, reason, actor)


@dataclass(frozen=True)
class PlannedRecheck:
    """A recorded pile whose recheck changed a status: what ``store_rechecks`` writes, and the
    version it was made on (it is written only while that is still the pile's current one)."""

    pile: Any
    current: records.RecordVersion
    inputs: RecheckInputs
    verdict: PileVerdict
    checks: list[dict]


def plan_rechecks(conn: sqlite3.Connection, project_id: int, pile_rows) -> list[PlannedRecheck]:
    """Recheck the recorded piles of ``pile_rows`` and return those whose statuses or verdict
    change (``recheck_stored``); reads only, writes nothing."""
    rule_set = projects.current_rules(conn, project_id)
    # Read each ground model and cap once and recheck the batch together (design_core's
    # project recheck shares capacity curves, sections and Winkler solves between piles).
    grounds: dict[int, GroundModel] = {}
    groups: dict[str, CapGroup] = {}
    batch = []
    for mate in pile_rows:
        if mate.current_version == 0:
            continue
        current = records.current(conn, mate.id)
        if current is None:
            continue
        if mate.ground_model_id not in grounds:
            grounds[mate.ground_model_id] = load_ground(conn, mate.ground_model_id)
        if mate.cap_id is not None and mate.cap_mark not in groups:
            groups[mate.cap_mark] = load_cap_group(
                conn, mate.cap_id, records.current_positions_in_cap(conn, mate.cap_id))
        group = groups.get(mate.cap_mark) if mate.cap_id is not None else None
        inputs = RecheckInputs(pile_design(mate), grounds[mate.ground_model_id], rule_set.rules,
                               rule_set.version, group)
        batch.append((mate, current, inputs))
    try:
        verdicts = recheck_project(
            [ProjectItem(i.design, asbuilt_from_record(c.record), i.ground) for _, c, i in batch],
            rule_set.rules, groups)
    except ValueError:
        verdicts = {}  # one pile the batch cannot take: recheck one by one below
    planned = []
    for mate, current, inputs in batch:
        verdict = verdicts.get(mate.mark)
        if verdict is None:
            try:
                verdict = recheck_pile(conn, project_id, mate, current.record, inputs)
            except ValueError:
                continue  # its own save succeeded before; the engineer sees it as it was
        verdict = verdict_with_tests(conn, mate.id, verdict)  # the tests after installation
        checks = [c.to_dict() for c in verdict.short_first()]
        before = {c["code"]: c["ok"] for c in current.checks}
        # A check added to Toeline after this version was stored counts as ok before it: one
        # that is ok now changes nothing; one that is short or cannot be made now does.
        if (all(before.get(c["code"], True) == c["ok"] for c in checks)
                and verdict.verdict == current.verdict):
            continue
        planned.append(PlannedRecheck(mate, current, inputs, verdict, checks))
    return planned


def store_rechecks(conn: sqlite3.Connection, project_id: int, planned: list[PlannedRecheck], user,
                   reason: str, actor: str | None = None, left_out: list | None = None) -> list[str]:
    """Write the planned rechecks (``recheck_stored``) inside the caller's transaction. A pile
    given a new version since its plan was made is not written; its id goes to ``left_out``
    (the caller rechecks it again on its new version). Returns the marks given a new version."""
    changed = []
    actor = actor or (user.label if user else "system")
    for plan in planned:
        mate, current, inputs, verdict, checks = plan.pile, plan.current, plan.inputs, plan.verdict, plan.checks
        if records.stored_version(conn, mate.id) != current.version:
            if left_out is not None:
                left_out.append(mate.id)
            continue
        version = current.version + 1
        records.insert(conn, project_id=project_id, pile_id=mate.id, version=version,
                       client_id=f"server-{uuid.uuid4()}", record=current.record,
                       progress=current.progress, verdict=verdict.verdict,
                       worst_utilisation=verdict.worst_utilisation, checks=checks,
                       borrowed=borrowed_list(verdict, inputs, current.record),
                       notes=list(verdict.notes) + [reason], rules_version=inputs.rules_version,
                       created_by=user.id if user else None)
        records.set_pile_state(conn, mate.id, progress=current.progress, verdict=verdict.verdict,
                               worst_utilisation=verdict.worst_utilisation, version=version)
        signoff.note_amendment(conn, mate, version, {"reason": reason})
        audit.append(conn, project_id, actor, "record rechecked", mate.mark,
                     {"version": version, "verdict": verdict.verdict, "reason": reason,
                      "short": [c["code"] for c in checks if c["ok"] is False]})
        changed.append(mate.mark)
    return changed
