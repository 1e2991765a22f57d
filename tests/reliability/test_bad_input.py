"""Bad input: property tests (hypothesis) over the record API and the schedule import, and the
numbers corpus.

Promises checked:
* any JSON body to ``PUT .../record`` gets 200, or a 4xx whose ``errors`` name fields of the
  request (never a 500), and a refused body changes nothing (no version, no audit entry, the
  pile's state as it was);
* any CSV or XLSX file to the schedule import is either imported whole or refused with every
  error naming its row and column (never a 500), and a refused file changes nothing;
* numbers: NaN, +-infinity, 1e308, negative depths and a toe above the cut-off are refused
  naming the field. Decimal commas: the record API (the tablet) reads "12,5" as 12.5 and
  refuses "1,234.5" (grouping and decimal mark cannot be told apart); the schedule import (a
  spreadsheet from the office) refuses "12,5" naming the column: a spreadsheet must use a
  decimal point.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
import uuid

import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st
from reliability_kit import copy_demo, engineer_site, open_database

from fieldapp import db, record_input
from fieldapp.queries import piles as piles_q
from fieldapp.queries import records
from fieldapp.schedule_io import COLUMNS, import_schedule

PROFILE = settings(max_examples=60, deadline=None, derandomize=True,
                   suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


@pytest.fixture(scope="module")
def site(tmp_path_factory, demo_template):
    data = tmp_path_factory.mktemp("bad-input") / "data"
    copy_demo(demo_template, data)
    site = engineer_site(data)
    with site["app"].app_context():
        conn = db.get_db()
        pile = piles_q.get_pile(conn, site["project"], "P2")
        model = conn.execute("SELECT name FROM ground_models WHERE id = ?", (pile.ground_model_id,)).fetchone()[0]
    return {**site, "pile": pile, "model": model}


def _state(site) -> tuple:
    """Everything a save or an import could change."""
    conn = open_database(site["data"])
    try:
        return (
            conn.execute("SELECT COUNT(*), COALESCE(MAX(id), 0) FROM pile_records").fetchone(),
            conn.execute("SELECT COUNT(*), COALESCE(MAX(id), 0) FROM audit_log").fetchone(),
            conn.execute("SELECT COUNT(*), COALESCE(MAX(id), 0) FROM caps").fetchone(),
            tuple(tuple(r) for r in conn.execute("SELECT * FROM piles ORDER BY id")),
        )
    finally:
        conn.close()


def _version(site) -> int:
    with site["app"].app_context():
        return records.stored_version(db.get_db(), site["pile"].id)


def _put(site, body) -> tuple[int, dict]:
    url = f"/api/v1/projects/{site['project']}/piles/{site['pile'].mark}/record"
    raw = body if isinstance(body, (bytes, str)) else json.dumps(body, allow_nan=True)
    answer = site["client"].put(url, data=raw, content_type="application/json",
                                headers={"X-CSRFToken": site["token"]})
    return answer.status_code, answer.get_json(silent=True) or {}


_FIELD_ROOT = re.compile(r"^([A-Za-z_][A-Za-z0-9_]*)")


def _assert_refusal_names_fields(status: int, body: dict, sent: dict) -> None:
    assert 400 <= status < 500, (status, body)
    if status == 422:
        errors = body["errors"]
        assert errors and all(isinstance(v, str) and v for v in errors.values())
        record = sent.get("record") if isinstance(sent, dict) else None
        known = set(record_input.RECORD_KEYS) | {"record", "client_id", "base_version", "amendment"}
        if isinstance(record, dict):
            known |= {str(k)[:60] for k in record}
        for key in errors:
            root = _FIELD_ROOT.match(key)
            assert key in known or (root and root.group(1) in known), f"error key {key!r} names no field"
    else:
        assert body.get("error") or body.get("errors"), body


# --- the record API ------------------------------------------------------------------------

NUMBER_TEXT = st.sampled_from(["12,5", "12.5", "1,234.5", "NaN", "nan", "inf", "-Infinity", "1e308", "-1e308",
                               "1e-320", "−3", "", " ", "0x10", "1_000", "12.5.1", "١٢", "12,", ",5", "+.5e1"])
VALUE = st.recursive(
    st.one_of(st.none(), st.booleans(), st.integers(min_value=-10**20, max_value=10**20),
              st.floats(allow_nan=True, allow_infinity=True), NUMBER_TEXT,
              st.text(max_size=30), st.text(min_size=4001, max_size=4100),
              # integers beyond any float (10^400) and text no UTF-8 can hold (lone surrogates)
              st.sampled_from([10**400, -(10**401), 2**64]),
              st.builds(lambda a, b: a + b, st.text(max_size=5),
                        st.sampled_from(["\ud800", "\udfff", "x\ud83d"]))),
    lambda inner: st.one_of(st.lists(inner, max_size=3),
                            st.dictionaries(st.sampled_from(["docket", "volume_m3", "batched_at", "from_depth",
                                                             "to_depth", "material", "x"]), inner, max_size=4)),
    max_leaves=8)
KEYS = st.sampled_from(list(record_input.RECORD_KEYS) + ["toe", "Platform_Level", "", "__proto__"])
RECORD = st.dictionaries(KEYS, VALUE, max_size=8)


def _sane_number(name: str):
    lo, hi, _ = record_input.NUMBER_FIELDS[name]
    return st.one_of(st.floats(min_value=lo, max_value=hi), NUMBER_TEXT, st.floats())


PLAUSIBLE = st.fixed_dictionaries(
    {"progress": st.sampled_from(list(record_input.PROGRESS) + ["done"])},
    optional={"platform_level": _sane_number("platform_level"), "measured_depth": _sane_number("measured_depth"),
              "diameter_mm": _sane_number("diameter_mm"), "debris_mm": _sane_number("debris_mm"),
              "cover_mm": _sane_number("cover_mm"), "inclination": _sane_number("inclination"),
              "notes": st.text(max_size=50), "exposure_class": st.sampled_from(["XC2", "XS3", "nope", ""]),
              "pour_start": st.sampled_from(["2026-03-02T11:00", "2026-03-02T11:00Z", "yesterday", ""]),
              "pour_end": st.sampled_from(["2026-03-02T10:00", "2026-03-02T12:00", "2026-13-40T99:00"]),
              "strata": st.lists(st.fixed_dictionaries(
                  {"from_depth": st.one_of(st.floats(-5, 60), NUMBER_TEXT),
                   "to_depth": st.one_of(st.floats(-5, 60), NUMBER_TEXT),
                   "material": st.sampled_from(["cohesive", "cohesionless", "rock", "ignore", "peat"])}),
                  max_size=3)})


def _check_put(site, body) -> None:
    before = _state(site)
    status, answer = _put(site, body)
    event(f"status {status}")  # shown by pytest --hypothesis-show-statistics
    assert status < 500, (status, answer, body)
    if status == 200:
        assert answer["version"] == body["base_version"] + 1
        assert _version(site) == answer["version"]
    else:
        _assert_refusal_names_fields(status, answer, body)
        assert _state(site) == before, f"a refused save changed the database: {body!r}"


@PROFILE
@given(record=RECORD, base=st.one_of(st.none(), st.just("current"), st.booleans(), st.integers(-3, 10**6),
                                     st.floats(), st.text(max_size=5)))
def test_any_record_body_gives_200_or_a_4xx_naming_the_field(site, record, base):
    current = _version(site)
    body = {"client_id": str(uuid.uuid4()), "base_version": current if base == "current" else base,
            "record": record}
    if body["base_version"] != current:
        before = _state(site)
        status, answer = _put(site, body)
        assert status < 500, (status, answer)
        if status != 200:
            _assert_refusal_names_fields(status, answer, body)
            assert _state(site) == before
        return
    _check_put(site, body)


@PROFILE
@given(record=PLAUSIBLE)
def test_plausible_records_are_saved_whole_or_refused_whole(site, record):
    _check_put(site, {"client_id": str(uuid.uuid4()), "base_version": _version(site), "record": record})


@PROFILE
@given(body=st.one_of(st.binary(max_size=200), st.text(max_size=200),
                      st.dictionaries(st.sampled_from(["client_id", "base_version", "record", "amendment", "x"]),
                                      VALUE, max_size=4)))
def test_any_request_body_is_never_a_500(site, body):
    before = _state(site)
    status, answer = _put(site, body)
    assert status < 500, (status, answer)
    if status != 200:
        assert 400 <= status < 500 and (answer.get("error") or answer.get("errors")), answer
        assert _state(site) == before


# --- the numbers corpus ----------------------------------------------------------------------

def _record_with(site, **fields) -> tuple[int, dict]:
    body = {"client_id": str(uuid.uuid4()), "base_version": _version(site),
            "record": {"progress": "boring", **fields}}
    return _put(site, body)


@pytest.mark.parametrize("field,value", [
    ("measured_depth", "NaN"), ("measured_depth", float("nan")), ("platform_level", float("inf")),
    ("platform_level", "-inf"), ("platform_level", "Infinity"), ("debris_mm", 1e308), ("cover_mm", -1e308),
    ("measured_depth", -3.0), ("measured_depth", "-3"), ("diameter_mm", 1e308), ("inclination", -0.01),
    ("easting", 1e308), ("measured_depth", "1,234.5"), ("measured_depth", "12.5.1"), ("debris_mm", True),
    ("cover_mm", [80]),
])
def test_bad_numbers_are_refused_naming_the_field(site, field, value):
    before = _state(site)
    status, body = _record_with(site, **{field: value})
    assert status == 422, body
    assert field in body["errors"], body
    assert _state(site) == before


def test_negative_stratum_depth_is_refused_naming_it(site):
    status, body = _record_with(site, strata=[{"from_depth": -1.0, "to_depth": 2.0, "material": "cohesive"}])
    assert status == 422 and "strata[0].from_depth" in body["errors"], body


def test_toe_above_the_cutoff_is_refused(site):
    pile = site["pile"]
    platform = pile.cutoff_level_m + 1.0
    status, body = _record_with(site, platform_level=platform, measured_depth=0.5)  # toe 0.5 m above cut-off
    assert status == 422 and "measured_depth" in body["errors"], body
    assert "cut-off" in body["errors"]["measured_depth"]


def test_decimal_comma_is_read_as_a_decimal_point_by_the_record_api(site):
    pile = site["pile"]
    depth = round(100.0 - pile.toe_level_m, 1)
    text = f"{depth:.1f}".replace(".", ",")
    status, body = _record_with(site, platform_level="100,0", measured_depth=text, debris_mm="12,5")
    assert status == 200, body
    with site["app"].app_context():
        stored = records.current(db.get_db(), pile.id).record
    assert stored["debris_mm"] == 12.5 and stored["measured_depth"] == depth and stored["platform_level"] == 100.0


# --- the schedule import -----------------------------------------------------------------------

def _good_row(site, mark: str) -> dict[str, str]:
    return {"mark": mark, "cap": "", "pile_type": "bored", "easting_m": "1000.5", "northing_m": "2000.25",
            "cutoff_level_m": "99.0", "toe_level_m": "88.0", "diameter_mm": "600", "ground_model": site["model"],
            "compression_kn": "900", "tension_kn": "0", "shear_kn": "10", "moment_knm": "0", "n_bars": "8",
            "bar_mm": "20", "cage_length_m": "8", "fc_mpa": "40", "fy_mpa": "500", "exposure_class": "XC2",
            "cover_mm": "75", "head": "free"}


def _csv(header, rows, delimiter=",") -> bytes:
    out = io.StringIO()
    writer = csv.writer(out, delimiter=delimiter)
    writer.writerow(header)
    for row in rows:
        writer.writerow(row)
    return out.getvalue().encode("utf-8")


def _xlsx(header, rows) -> bytes:
    from openpyxl import Workbook

    book = Workbook()
    sheet = book.active
    sheet.append(list(header))
    for row in rows:
        sheet.append(list(row))
    out = io.BytesIO()
    book.save(out)
    return out.getvalue()


def _import(site, data: bytes, filename: str):
    with site["app"].app_context():
        return import_schedule(db.get_db(), site["project"], data, filename, "test")


BAD_CELLS = st.one_of(st.sampled_from(["NaN", "inf", "-inf", "1e308", "-1e308", "12,5", "1,234.5", "abc", "-",
                                       "=1+1", "1_0", " ", "0x10", "１２"]),
                      # openpyxl cannot write control characters into a cell; the garbage-file test
                      # below sends raw bytes of every kind.
                      st.text(st.characters(blacklist_categories=("Cc", "Cs")), max_size=12))
NUMERIC_COLUMNS = [c for c in COLUMNS if c.endswith(("_m", "_mm", "_kn", "_knm", "_mpa")) or c == "n_bars"]


@settings(PROFILE, max_examples=40)
@given(column=st.sampled_from(NUMERIC_COLUMNS), value=BAD_CELLS, xlsx=st.booleans())
def test_a_bad_cell_is_refused_naming_row_and_column_and_nothing_is_imported(site, column, value, xlsx):
    rows = [_good_row(site, "IMP1"), _good_row(site, "IMP2")]
    rows[1][column] = value
    header = list(COLUMNS)
    matrix = [[r[c] for c in header] for r in rows]
    data, name = (_xlsx(header, matrix), "s.xlsx") if xlsx else (_csv(header, matrix), "s.csv")
    before = _state(site)
    result = _import(site, data, name)
    try:
        number = float(value)
    except ValueError:
        number = None
    if result.ok:
        # Only a value that is a real, finite number in range may pass; it is stored as that number.
        assert value.strip() == "" or (number is not None and math.isfinite(number)), (column, value)
        return
    assert _state(site) == before, "a refused import changed the database"
    assert any(e.row == 3 and e.column == column for e in result.errors), (column, value, result.errors)


@settings(PROFILE, max_examples=40)
@given(header=st.lists(st.sampled_from(list(COLUMNS) + ["Mark", "toe", ""]), max_size=8),
       cells=st.lists(st.lists(BAD_CELLS, max_size=8), max_size=4), xlsx=st.booleans(),
       delimiter=st.sampled_from([",", ";", "\t"]))
def test_any_schedule_file_is_imported_whole_or_refused_with_every_error_placed(site, header, cells, xlsx,
                                                                                delimiter):
    data = _xlsx(header, cells) if xlsx else _csv(header, cells, delimiter)
    before = _state(site)
    result = _import(site, data, "s.xlsx" if xlsx else "s.csv")
    if not result.ok:
        assert _state(site) == before
        for error in result.errors:
            assert error.message
            assert error.column or error.row in (0, 1) or "more cells" in error.message, error


@settings(max_examples=25, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(data=st.binary(max_size=400), name=st.sampled_from(["s.csv", "s.xlsx", "s.txt", "s"]))
def test_garbage_files_through_the_import_page_are_never_a_500(site, data, name):
    before = _state(site)
    answer = site["client"].post(
        f"/projects/{site['project']}/piles/import", content_type="multipart/form-data",
        data={"csrf_token": site["token"], "file": (io.BytesIO(data), name)})
    assert answer.status_code in (302, 400, 422), answer.status_code
    if answer.status_code != 302:
        assert _state(site) == before


def test_schedule_import_refuses_a_decimal_comma_naming_the_column(site):
    row = _good_row(site, "IMP9")
    row["diameter_mm"] = "612,5"
    data = _csv(list(COLUMNS), [[row[c] for c in COLUMNS]], delimiter=";")
    result = _import(site, data, "semicolons.csv")
    assert not result.ok
    assert [(e.row, e.column) for e in result.errors] == [(2, "diameter_mm")]
    assert "612,5" in result.errors[0].message


def test_schedule_import_refuses_toe_above_cutoff_and_negative_diameter(site):
    row = _good_row(site, "IMP8")
    row["toe_level_m"] = "99.5"
    second = _good_row(site, "IMP7")
    second["diameter_mm"] = "-600"
    result = _import(site, _csv(list(COLUMNS), [[row[c] for c in COLUMNS], [second[c] for c in COLUMNS]]), "x.csv")
    assert {(e.row, e.column) for e in result.errors} == {(2, "toe_level_m"), (3, "diameter_mm")}
