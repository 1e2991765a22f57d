"""The test register's work: the result of each test in its method's terms, the check it gives,
the file kept by hash, and the one write that puts a test on a pile.

Kinds (``KINDS``): low strain integrity (ASTM D5882), crosshole sonic logging (ASTM D6760),
thermal integrity profiling (ASTM D7949), high-strain dynamic (ASTM D4945), static compression
(ASTM D1143), tension (ASTM D3689), lateral (ASTM D3966) and maintained load (EN ISO 22477-1).
The engineering is design_core's: ``integrity_check``/``csl_rating`` and
``interpret_load_test``/``load_test_check`` (design_core.loadtest); here the inputs are put
together and the stress limits of a dynamic test are read from the rules.

How a test feeds the verdict (``add_test``, one ``db.write`` transaction): the register row;
then, when the pile has a record, a new record version with the same as-built data whose
checks are the recheck's checks plus, per code (``integrity``, ``load_test``), the worst check
of all the pile's tests; the pile's stored verdict and worst utilisation move with it, so the
Piles screen, the Review queue and the record read it like any other check. On a signed pile
that version is an amendment (``signoff.note_amendment``, reason naming the test): the pile is
reopened for review and needs its own sign-off. A pile with no record yet keeps the test in the
register; ``verdict_with_tests`` gives a later save the same combination.
"""

from __future__ import annotations

import hashlib
import math
import os
import sqlite3
import tempfile
import uuid
from dataclasses import replace
from pathlib import Path

import numpy as np

from design_core.checks import MEETS_DESIGN, NEEDS_ENGINEER, Check, PileVerdict
from design_core.loadtest import (
    INTEGRITY_RATINGS, CslZone, LoadTestRecord, integrity_check, interpret_load_test, load_test_check,
)
from design_core.rules import Rules
from fieldapp import db, signoff
from fieldapp.queries import audit, records
from fieldapp.queries import pile_tests as tests_q

# kind -> (label, standard, family); family integrity / dynamic / static
KINDS: dict[str, tuple[str, str, str]] = {
    "low_strain": ("Low strain integrity", "ASTM D5882", "integrity"),
    "crosshole": ("Crosshole sonic logging", "ASTM D6760", "integrity"),
    "thermal": ("Thermal integrity profiling", "ASTM D7949", "integrity"),
    "dynamic": ("High-strain dynamic", "ASTM D4945", "dynamic"),
    "static_compression": ("Static compression", "ASTM D1143", "static"),
    "static_tension": ("Static tension", "ASTM D3689", "static"),
    "static_lateral": ("Static lateral", "ASTM D3966", "static"),
    "maintained_load": ("Maintained load", "EN ISO 22477-1", "static"),
}
FAMILIES = ("integrity", "dynamic", "static")
FAMILY_CODE = {"integrity": "integrity", "dynamic": "load_test", "static": "load_test"}
MATERIALS = ("concrete", "steel")
PROOF_ONLY_KINDS = ("static_tension", "static_lateral")  # no Davisson capacity read from these
MAX_FILE_BYTES = 25 * 1024 * 1024
FILE_DIR = "test_files"


def family(kind: str) -> str:
    """integrity, dynamic or static for a kind (KeyError for an unknown one)."""
    return KINDS[kind][2]


# --------------------------------------------------------------------------------------------
# Results in the method's terms
# --------------------------------------------------------------------------------------------

def integrity_result(rating: str | None, zones: list[CslZone], anomaly_depth_m: float | None,
                     description: str, rules: Rules) -> tuple[dict, dict]:
    """(result, check) of an integrity test: the tester's rating and the CSL zones, each rated
    by the rules' bands (``csl_rating``)."""
    check = integrity_check(rating, zones, anomaly_depth_m=anomaly_depth_m,
                            description=description, rules=rules)
    given = ([rating] if rating else []) + [z.rating(rules) for z in zones]
    overall = max(given, key=INTEGRITY_RATINGS.index) if given else None
    result = {"rating": rating, "anomaly_depth_m": anomaly_depth_m, "description": description,
              "zones": [{"pair": z.pair, "from_depth_m": z.from_depth_m, "to_depth_m": z.to_depth_m,
                         "fat_increase_pct": z.fat_increase_pct,
                         "energy_reduction_db": z.energy_reduction_db, "rating": z.rating(rules)}
                        for z in zones],
              "overall": overall}
    return result, check.to_dict()


def dynamic_result(resistance_kn: float, set_mm: float, compression_mpa: float | None,
                   tension_mpa: float | None, material: str, fc_mpa: float, fy_mpa: float,
                   required_kn: float | None, rules: Rules) -> tuple[dict, dict]:
    """(result, check) of a high-strain dynamic test (ASTM D4945).

    The mobilised resistance against ``required_kn`` (not checked without it); the largest
    compression and tension stresses against the rules' limits for the material (steel:
    ``test_dynamic_compression_fraction_steel`` x f_y both ways; concrete:
    ``test_dynamic_compression_fraction_concrete`` x f_c and
    ``test_dynamic_tension_sqrt_concrete`` x sqrt(f_c) MPa). A stress over its limit is short.
    """
    if material == "steel":
        comp_limit = tens_limit = rules.test_dynamic_compression_fraction_steel * fy_mpa
    else:
        comp_limit = rules.test_dynamic_compression_fraction_concrete * fc_mpa
        tens_limit = rules.test_dynamic_tension_sqrt_concrete * math.sqrt(fc_mpa)
    stresses = []
    if compression_mpa is not None:
        stresses.append(("compression", compression_mpa, comp_limit))
    if tension_mpa is not None:
        stresses.append(("tension", tension_mpa, tens_limit))
    over = [(n, v, lim) for n, v, lim in stresses if v > lim]
    result = {"resistance_kn": resistance_kn, "set_mm": set_mm, "compression_mpa": compression_mpa,
              "tension_mpa": tension_mpa, "material": material,
              "compression_limit_mpa": comp_limit, "tension_limit_mpa": tens_limit,
              "required_kn": required_kn}
    if over:
        n, v, lim = max(over, key=lambda t: t[1] / t[2] if t[2] > 0 else math.inf)
        check = Check("load_test", v, lim, "MPa", v / lim if lim > 0 else math.inf, False,
                      f"Dynamic test: {n} stress {v:.1f} MPa is over the {lim:.1f} MPa allowed "
                      f"for {material}.")
    elif required_kn is None:
        check = Check.not_checked("load_test", "kN", f"Dynamic test: mobilised resistance "
                                  f"{resistance_kn:.0f} kN, no required value given.")
    else:
        ok = resistance_kn >= required_kn
        check = Check("load_test", resistance_kn, required_kn, "kN",
                      required_kn / resistance_kn if resistance_kn > 0 else math.inf, ok,
                      f"Dynamic test: mobilised resistance {resistance_kn:.0f} kN against "
                      f"{required_kn:.0f} kN required (set {set_mm:g} mm/blow"
                      + ("" if stresses else ", stresses not given") + ").")
    return result, check.to_dict()


def static_result(record: LoadTestRecord, kind: str, length_m: float, area_m2: float,
                  e_mpa: float, diameter_m: float, required_kn: float | None,
                  settlement_limit_mm: float | None, recheck_ultimate_kn: float | None,
                  rules: Rules) -> tuple[dict, dict]:
    """(result, check) of a static load test: every interpretation (``interpret_load_test``),
    the check against ``required_kn`` (``load_test_check``; not checked without it) and the
    ratio of the measured capacity to the recheck's ultimate (printed, never fed back).

    Davisson's offset limit is a rule for compression. A tension test (ASTM D3689, head
    movement up taken positive) and a lateral test (ASTM D3966, head deflection) are reported
    as proof tests (the load met and the movement): no capacity is drawn from them, and the
    compression ultimate of the recheck is not compared with them.
    """
    res = interpret_load_test(record, length_m, area_m2, e_mpa, diameter_m, rules)
    if kind in PROOF_ONLY_KINDS:
        what = "Lateral" if kind == "static_lateral" else "Tension"
        res = replace(res, davisson_kn=None,
                      reason=f"{what} load {res.max_load_kn:.0f} kN met at "
                             f"{res.settlement_at_max_mm:.1f} mm movement of the head (no "
                             f"capacity is read from a {what.lower()} test here).")
        recheck_ultimate_kn = None
    if required_kn is None:
        check = Check.not_checked("load_test", "kN", f"Load test: {res.reason} No required "
                                  "load given to check against.")
    else:
        check = load_test_check(res, required_kn, settlement_limit_mm)
    measured = res.davisson_kn
    ratio = (measured / recheck_ultimate_kn
             if measured is not None and recheck_ultimate_kn else None)
    result = res.to_dict()
    result.update(kind=kind, length_m=length_m, area_m2=area_m2, e_mpa=e_mpa,
                  diameter_m=diameter_m, required_kn=required_kn,
                  settlement_limit_mm=settlement_limit_mm,
                  recheck_ultimate_kn=recheck_ultimate_kn, measured_over_recheck=ratio,
                  readings={"load_kn": record.load_kn.tolist(),
                            "settlement_mm": record.settlement_mm.tolist()})
    return result, check.to_dict()


def recheck_ultimate_kn(verdict: PileVerdict | None, toe_level_m: float | None) -> float | None:
    """The recheck's ultimate resistance (kN) at the toe, read from its capacity curve."""
    curve = verdict.details.get("curve") if verdict is not None and verdict.details else None
    if curve is None or toe_level_m is None or len(curve.toe_levels) < 2:
        return None
    order = np.argsort(curve.toe_levels)
    z, u = np.asarray(curve.toe_levels)[order], np.asarray(curve.ultimate)[order]
    if not z[0] - 1e-6 <= toe_level_m <= z[-1] + 1e-6:
        return None
    return float(np.interp(toe_level_m, z, u))


# --------------------------------------------------------------------------------------------
# The verdict with the tests
# --------------------------------------------------------------------------------------------

_RANK = {False: 0, None: 1, True: 2}


def governing_test_checks(test_checks: list[dict]) -> list[dict]:
    """Per code, the worst check of all the pile's tests (short, then not checked, then ok;
    among equals the later test)."""
    worst: dict[str, dict] = {}
    for c in test_checks:
        held = worst.get(c["code"])
        if held is None or _RANK[c["ok"]] <= _RANK[held["ok"]]:
            worst[c["code"]] = c
    return list(worst.values())


def combine(checks: list[dict], test_checks: list[dict]) -> tuple[list[dict], str, float | None]:
    """(checks, verdict, worst utilisation) with the tests' governing checks in place of any
    stored check of the same code; short first as stored."""
    extra = governing_test_checks(test_checks)
    codes = {c["code"] for c in extra}
    merged = [c for c in checks if c["code"] not in codes] + extra
    rank = {False: 0, None: 1, True: 2}
    merged.sort(key=lambda c: (rank[c["ok"]], -(c.get("utilisation") or 0.0)))
    verdict = MEETS_DESIGN if all(c["ok"] is True for c in merged) else NEEDS_ENGINEER
    utils = [c["utilisation"] for c in merged if isinstance(c.get("utilisation"), (int, float))
             and math.isfinite(c["utilisation"])]
    return merged, verdict, max(utils, default=0.0)


def verdict_with_tests(conn: sqlite3.Connection, pile_id: int, verdict: PileVerdict) -> PileVerdict:
    """The recheck's verdict with the governing check of the pile's tests added (for the save
    path: a later save keeps what the tests found)."""
    extra = governing_test_checks(tests_q.checks_for_pile(conn, pile_id))
    if not extra:
        return verdict
    codes = {c["code"] for c in extra}
    kept = tuple(c for c in verdict.checks if c.code not in codes)
    added = tuple(Check(c["code"], c["value"], c["limit"], c["unit"], c["utilisation"], c["ok"],
                        c["reason"]) for c in extra)
    return PileVerdict(verdict.mark, kept + added, verdict.notes, verdict.details)


# --------------------------------------------------------------------------------------------
# The file kept by hash
# --------------------------------------------------------------------------------------------

class TestFileRefused(ValueError):
    """A result file that cannot be kept; the message says why."""


def check_file(data: bytes, filename: str) -> str:
    """The extension to keep a result file under, after checking it whole: a PDF (starts with
    %PDF- and ends with %%EOF) or a data file (.csv/.txt, UTF-8 text). TestFileRefused else."""
    if not data:
        raise TestFileRefused("the file is empty")
    if len(data) > MAX_FILE_BYTES:
        raise TestFileRefused(f"the file is over {MAX_FILE_BYTES // (1024 * 1024)} MB")
    if data.startswith(b"%PDF-"):
        if b"%%EOF" not in data[-1024:]:
            raise TestFileRefused("the PDF is cut short (no %%EOF at its end)")
        return "pdf"
    ext = Path(filename or "").suffix.lower().lstrip(".")
    if ext not in ("csv", "txt"):
        raise TestFileRefused("the file must be a PDF report or a CSV/text data file")
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise TestFileRefused(f"the data file is not UTF-8 text (byte {exc.start})") from None
    return ext


def file_path(data_dir: str | Path, sha256: str, ext: str) -> Path:
    """Where a result file is kept: test_files/<sha[:2]>/<sha>.<ext> under the data folder."""
    return Path(data_dir) / FILE_DIR / sha256[:2] / f"{sha256}.{ext}"


def keep_file(data_dir: str | Path, data: bytes, ext: str) -> str:
    """Write the file under its hash (through a .tmp- name, then renamed); its SHA-256."""
    sha = hashlib.sha256(data).hexdigest()
    path = file_path(data_dir, sha, ext)
    if path.exists():
        return sha
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=".tmp-", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as fh:
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
    return sha


# --------------------------------------------------------------------------------------------
# The one write
# --------------------------------------------------------------------------------------------

def add_test(conn: sqlite3.Connection, data_dir: str | Path, project_id: int, pile_row, user,
             kind: str, tested_on: str, tested_by: str, result: dict, check: dict,
             file: tuple[bytes, str] | None) -> tests_q.PileTest:
    """Put one test on a pile (module docstring): the file is checked whole and kept first
    (content-addressed, so a failed transaction leaves only an unreferenced copy), then one
    transaction with the register row, the record version carrying its check (when the pile
    has a record), the amendment of a signed version, and the audit entries."""
    if kind not in KINDS:
        raise ValueError(f"kind must be one of {', '.join(KINDS)}, got {kind!r}")
    sha = ext = None
    size = None
    name = ""
    if file is not None:
        data, name = file
        ext = check_file(data, name)
        sha = keep_file(data_dir, data, ext)
        size = len(data)
    label = f"{KINDS[kind][0]} ({KINDS[kind][1]}) of {tested_on}"
    with db.write(conn):
        test_id = tests_q.insert(conn, project_id=project_id, pile_id=pile_row.id, kind=kind,
                                 tested_on=tested_on, tested_by=tested_by, file_sha256=sha,
                                 file_name=(name or "")[:200], file_ext=ext or "", file_bytes=size,
                                 result=result, check=check,
                                 created_by=user.id if user else None)
        current = records.current(conn, pile_row.id)
        version = None
        if current is not None:
            checks, verdict, worst = combine(current.checks, tests_q.checks_for_pile(conn, pile_row.id))
            version = current.version + 1
            reason = f"test added: {label}, {check['code']} {_status(check)}"
            records.insert(conn, project_id=project_id, pile_id=pile_row.id, version=version,
                           client_id=f"server-{uuid.uuid4()}", record=current.record,
                           progress=current.progress, verdict=verdict, worst_utilisation=worst,
                           checks=checks, borrowed=current.borrowed,
                           notes=list(current.notes) + [reason],
                           rules_version=current.rules_version,
                           created_by=user.id if user else None)
            records.set_pile_state(conn, pile_row.id, progress=current.progress, verdict=verdict,
                                   worst_utilisation=worst, version=version)
            tests_q.set_record_version(conn, test_id, version)
            signoff.note_amendment(conn, pile_row, version, {"reason": reason})
            audit.append(conn, project_id, user.label if user else "system", "record rechecked",
                         pile_row.mark, {"version": version, "verdict": verdict, "reason": reason,
                                         "short": [c["code"] for c in checks if c["ok"] is False]})
        audit.append(conn, project_id, user.label if user else "system", "pile test added",
                     pile_row.mark, {"test_id": test_id, "kind": kind, "tested_on": tested_on,
                                     "tested_by": tested_by, "file_sha256": sha,
                                     "check": check, "record_version": version})
    return tests_q.get(conn, project_id, test_id)


def _status(check: dict) -> str:
    return "ok" if check["ok"] is True else ("short" if check["ok"] is False else "not checked")


# --------------------------------------------------------------------------------------------
# How many are needed, done, due and failed
# --------------------------------------------------------------------------------------------

def required_fraction(rules: Rules, pile_type: str, fam: str) -> tuple[str, float] | None:
    """('fraction', share) or ('count', n) of piles of a type that need a family of test, from
    the rules; None when the rules ask for none."""
    if fam == "static":
        return ("count", rules.test_static_per_type) if rules.test_static_per_type > 0 else None
    if fam == "integrity":
        share = {"bored": rules.test_integrity_fraction_bored,
                 "cfa": rules.cfa_integrity_test_fraction,
                 "driven": rules.test_integrity_fraction_driven,
                 "screw": rules.test_integrity_fraction_screw}.get(pile_type, 0.0)
    else:
        share = rules.test_dynamic_fraction_driven if pile_type == "driven" else 0.0
    return ("fraction", share) if share > 0 else None


def frequency(rules: Rules, pile_counts: dict[str, int], tests: list[tests_q.PileTest]) -> list[dict]:
    """Per pile type and family of test: piles, needed, done (piles tested), failed (piles whose
    governing check of that family is short) and due (needed less done, at least 0). Needed is
    the rules' share of the piles rounded up, or the rules' count (at most the piles)."""
    rows = []
    for pile_type in sorted(pile_counts):
        n = pile_counts[pile_type]
        for fam in FAMILIES:
            tested = [t for t in tests if t.pile_type == pile_type and family(t.kind) == fam]
            need = required_fraction(rules, pile_type, fam)
            if need is None and not tested:
                continue
            if need is None:
                needed = 0
            elif need[0] == "fraction":
                needed = math.ceil(need[1] * n - 1e-9)
            else:
                needed = min(n, math.ceil(need[1] - 1e-9))
            by_pile: dict[int, list[dict]] = {}
            for t in tested:
                by_pile.setdefault(t.pile_id, []).append(t.check)
            failed = sum(1 for cs in by_pile.values()
                         if governing_test_checks(cs)[0]["ok"] is False)
            done = len(by_pile)
            rows.append({"pile_type": pile_type, "family": fam, "piles": n, "needed": needed,
                         "done": done, "due": max(0, needed - done), "failed": failed})
    return rows
