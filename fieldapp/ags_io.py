"""Ground investigation data in and out as AGS4, the open format of the Association of
Geotechnical and Geoenvironmental Specialists, read and checked with ``python-ags4``.

Import (``import_ags``): the whole file is checked first, by the library's checker (the
standard's rules: structure, data types, units, abbreviations, parent records) and then by our
ranges (positions, levels, depths, readings); every problem is reported with its group,
heading and line, and nothing is stored unless the file is accepted. Then, in one
transaction: the original bytes are kept by hash (``ags/<sha256>.ags`` in the data folder),
each ``LOCA`` becomes a location of the project, its ``GEOL`` strata are stored as logged with
a proposed material for the engineer to confirm, and ``ISPT``, ``SCPG``/``SCPT`` and
``WSTG``/``WSTD`` rows become its readings (q_c in MPa, f_s and u_2 in kPa, whatever unit
the file used). No strength parameter is ever read or guessed: the engineer enters them when
making a ground model from a location.

Export (``export_ags``) writes the project's locations, strata and readings back in the same
groups, with ``PROJ``, ``TRAN``, ``UNIT``, ``TYPE`` and ``ABBR``; export then import gives
the same data. docs/ags-and-dxf.md lists what maps where and what has no AGS4 group.
"""

from __future__ import annotations

import hashlib
import io
import math
import re
import tempfile
from dataclasses import dataclass, field
from datetime import date
from functools import lru_cache
from pathlib import Path

from design_core.inputs import MATERIALS
from fieldapp.queries import audit, projects
from fieldapp.queries import locations as loc_q
from fieldapp.queries.piles import COORD_LIMIT_M, LEVEL_LIMIT_M

COHESIVE, COHESIONLESS, ROCK, IGNORE = MATERIALS
MAX_BYTES = 20 * 1024 * 1024
EDITION = "4.1.1"            # the AGS4 edition written on export (TRAN_AGS)
DEPTH_MAX_M = 300.0          # deepest depth accepted below ground level
DEPTH_TOL_M = 0.01           # a stratum or reading may end this far below the final depth
QC_MAX_MPA = 150.0           # cone resistance range (typing slips, not design)
FS_MAX_KPA = 5_000.0
U2_RANGE_KPA = (-200.0, 20_000.0)
N_MAX = 500                  # SPT N range (extrapolated refusals run into the hundreds)
# Pressure units a file may use for SCPT readings -> kPa per unit.
PRESSURE_UNITS_KPA = {"MPa": 1000.0, "MN/m2": 1000.0, "kPa": 1.0, "kN/m2": 1.0, "bar": 100.0}
HEADING_RE = re.compile(r"\b([A-Z0-9]{4}_[A-Z0-9]{1,4})\b")


@dataclass(frozen=True)
class AgsError:
    """One problem in the file: group, heading, line (0 when the checker gives none), message."""

    group: str
    heading: str
    line: int
    message: str

    def __str__(self) -> str:
        where = [f"line {self.line}" if self.line else "file"]
        if self.group:
            where.append(f"group {self.group}")
        if self.heading:
            where.append(f"heading {self.heading}")
        return f"{', '.join(where)}: {self.message}"


@dataclass
class AgsImport:
    """What an import did, or why it did nothing."""

    errors: list[AgsError] = field(default_factory=list)
    sha256: str = ""
    locations: list[str] = field(default_factory=list)
    strata: int = 0
    spt: int = 0
    cpt: int = 0
    water: int = 0

    @property
    def ok(self) -> bool:
        """True when the file was accepted and stored."""
        return not self.errors

    def summary(self) -> str:
        """One sentence for the screen and the command line."""
        if self.errors:
            return (f"Nothing imported: {len(self.errors)} problem(s) in the file. Correct them and "
                    "import the whole file again.")
        return (f"AGS4 file imported: {len(self.locations)} location(s), {self.strata} strata (materials "
                f"proposed, unconfirmed), {self.spt} SPT, {self.cpt} CPT readings, {self.water} water "
                "strike(s).")


# --- materials ----------------------------------------------------------------------------------

# First digit of the AGS4 standard legend codes (GEOL_LEG abbreviations): 1 made ground and
# topsoil, 2 clay, 3 silt, 4 sand, 5 gravel, 6 peat, 7 cobbles and boulders, 8 rock, 9 voids
# and no recovery.
LEGEND_MATERIAL = {
    "1": (IGNORE, "legend {code}: made ground or topsoil, given no resistance"),
    "2": (COHESIVE, "legend {code}: clay"),
    "3": (COHESIVE, "legend {code}: silt, proposed as cohesive (a non-plastic silt may be cohesionless)"),
    "4": (COHESIONLESS, "legend {code}: sand"),
    "5": (COHESIONLESS, "legend {code}: gravel"),
    "6": (IGNORE, "legend {code}: peat, given no resistance"),
    "7": (COHESIONLESS, "legend {code}: cobbles or boulders"),
    "8": (ROCK, "legend {code}: rock"),
    "9": (IGNORE, "legend {code}: void, no recovery or undetermined, given no resistance"),
}
ROCK_WORDS = ("MUDSTONE", "SILTSTONE", "SANDSTONE", "LIMESTONE", "CHALK", "SHALE", "SLATE", "COAL",
              "IRONSTONE", "GRANITE", "BASALT", "DOLERITE", "DOLOMITE", "GNEISS", "SCHIST", "CONGLOMERATE",
              "BRECCIA", "MARL", "ROCK")
DESCRIPTION_WORDS = (("MADE GROUND", IGNORE), ("TOPSOIL", IGNORE), ("FILL", IGNORE), ("PEAT", IGNORE),
                     ("CLAY", COHESIVE), ("SILT", COHESIVE), ("SAND", COHESIONLESS), ("GRAVEL", COHESIONLESS),
                     ("COBBLES", COHESIONLESS), ("BOULDERS", COHESIONLESS)) + tuple((w, ROCK) for w in ROCK_WORDS)


def propose_material(legend_code: str, description: str) -> tuple[str, str]:
    """(material, reason) proposed for a stratum; the engineer confirms it.

    The AGS4 standard legend code decides when it is one (its first digit, LEGEND_MATERIAL);
    else the principal soil or rock named in capitals in the description (the descriptive
    convention of BS EN ISO 14688-1 and BS 5930: "Firm grey silty CLAY"), else the last soil
    word in any case ("silty sandy clay"). Nothing recognised: ``ignore`` (no resistance: the
    safe side) with a reason saying so.
    """
    code = (legend_code or "").strip()
    if len(code) == 3 and code.isdigit() and code[0] in LEGEND_MATERIAL:
        material, reason = LEGEND_MATERIAL[code[0]]
        return material, reason.format(code=code)
    text = description or ""
    capitals = [(text.find(word), word, material) for word, material in DESCRIPTION_WORDS
                if re.search(rf"\b{word}\b", text)]
    if capitals:
        _, word, material = min(capitals)
        return material, f"description names {word}"
    lower = text.lower()
    found = [(m.start(), word, material) for word, material in DESCRIPTION_WORDS
             for m in re.finditer(rf"\b{word.lower()}\b", lower)]
    if found:
        _, word, material = max(found)
        return material, f"description names {word.lower()}"
    return IGNORE, "neither legend code nor description recognised: given no resistance until the engineer chooses"


# --- reading and checking -----------------------------------------------------------------------

def _library():
    from python_ags4 import AGS4

    return AGS4


def checker_errors(text: str) -> list[AgsError]:
    """The library's checker on the text: every rule broken, with group, heading and line."""
    import contextlib

    AGS4 = _library()
    with contextlib.redirect_stdout(io.StringIO()):  # the checker prints progress notes
        found = AGS4.check_file(io.StringIO(text, newline=""))
    errors = []
    for rule, items in found.items():
        if "AGS Format Rule" not in rule and "Validator Process Error" not in rule:
            continue  # metadata, summary, FYI and warnings do not refuse a file
        for item in items:
            desc = str(item.get("desc", ""))
            line = item.get("line")
            heading = HEADING_RE.search(desc)
            if not isinstance(line, int):
                named = re.search(r"\bLine (\d+)", desc)
                line = int(named.group(1)) if named else 0
            value_at = re.match(r'"(.*)" under (\w+) in (\w+)', desc)
            if not line and value_at:
                line = _line_of_value(text, value_at.group(3), value_at.group(2), value_at.group(1))
            errors.append(AgsError(str(item.get("group") or ""), heading.group(1) if heading else "",
                                   line, f"{rule}: {desc}"))
    return errors


def _line_of_value(text: str, group: str, heading: str, value: str) -> int:
    """The first DATA line of ``group`` whose ``heading`` holds ``value`` (0 when none)."""
    import csv

    current, column = "", None
    for number, cells in enumerate(csv.reader(io.StringIO(text)), start=1):
        if not cells:
            continue
        if cells[0] == "GROUP":
            current, column = (cells[1] if len(cells) > 1 else ""), None
        elif cells[0] == "HEADING" and current == group:
            column = cells.index(heading) if heading in cells else None
        elif cells[0] == "DATA" and current == group and column is not None and column < len(cells):
            if cells[column] == value:
                return number
    return 0


def _tables(text: str):
    """(tables, line numbers) read by the library: group -> [row dicts with 'line_number']."""
    import contextlib

    AGS4 = _library()
    with contextlib.redirect_stdout(io.StringIO()):
        tables, _headings, _lines = AGS4.AGS4_to_dataframe(io.StringIO(text), get_line_numbers=True)
    return {name: df.to_dict("records") for name, df in tables.items()}


def _units(rows: list[dict]) -> tuple[dict, int]:
    for row in rows:
        if row.get("HEADING") == "UNIT":
            return row, int(row.get("line_number") or 0)
    return {}, 0


def _data(rows: list[dict]) -> list[dict]:
    return [r for r in rows if r.get("HEADING") == "DATA"]


class _Reader:
    """Our range checks over the parsed groups, collecting AgsErrors."""

    def __init__(self, tables: dict):
        self.tables = tables
        self.errors: list[AgsError] = []

    def fail(self, group, heading, line, message):
        self.errors.append(AgsError(group, heading, int(line or 0), message))

    def number(self, group, row, heading, lo, hi, unit="", required=False, scale=1.0):
        text = str(row.get(heading) or "").strip()
        line = row.get("line_number")
        if not text:
            if required:
                self.fail(group, heading, line, f"{heading} is required here")
            return None
        try:
            value = float(text) * scale
        except ValueError:
            self.fail(group, heading, line, f"{heading} must be a number, got {text!r}")
            return None
        if not math.isfinite(value) or not lo <= value <= hi:
            self.fail(group, heading, line, f"{heading} must be {lo:g} to {hi:g}{' ' + unit if unit else ''}, "
                      f"got {value:g}")
            return None
        return value

    def unit_is(self, group, heading, wanted):
        units, line = _units(self.tables.get(group, []))
        if heading in units and str(units[heading] or "").strip() not in ("", wanted):
            self.fail(group, heading, line, f"{heading} must be in {wanted}, the file says {units[heading]!r}")
            return False
        return True

    def pressure_scale(self, group, heading, to_unit):
        units, line = _units(self.tables.get(group, []))
        unit = str(units.get(heading) or "").strip() or "MPa"  # the standard's unit when left blank
        if unit not in PRESSURE_UNITS_KPA:
            self.fail(group, heading, line, f"{heading}: unit {unit!r} is not one we convert "
                      f"({', '.join(PRESSURE_UNITS_KPA)})")
            return None
        return PRESSURE_UNITS_KPA[unit] / (1000.0 if to_unit == "MPa" else 1.0)


def read_locations(text: str) -> tuple[dict[str, dict], list[AgsError]]:
    """The file's locations as ``replace_location`` dicts keyed by LOCA_ID, and our range errors."""
    tables = _tables(text)
    r = _Reader(tables)
    if "LOCA" not in tables:
        return {}, [AgsError("LOCA", "", 0, "the file has no LOCA group: no locations to import")]
    for group, heading in (("LOCA", "LOCA_NATE"), ("LOCA", "LOCA_NATN"), ("LOCA", "LOCA_GL"),
                           ("LOCA", "LOCA_FDEP"), ("GEOL", "GEOL_TOP"), ("GEOL", "GEOL_BASE"),
                           ("ISPT", "ISPT_TOP"), ("SCPT", "SCPT_DPTH"), ("WSTG", "WSTG_DPTH"),
                           ("WSTD", "WSTD_POST")):
        r.unit_is(group, heading, "m")
    out: dict[str, dict] = {}
    for row in _data(tables["LOCA"]):
        loca_id = str(row.get("LOCA_ID") or "").strip()
        line = row.get("line_number")
        if not loca_id:
            r.fail("LOCA", "LOCA_ID", line, "LOCA_ID is required")
            continue
        pos = {}
        for name, headings, lo, hi in (("easting_m", ("LOCA_NATE", "LOCA_LOCX"), -COORD_LIMIT_M, COORD_LIMIT_M),
                                       ("northing_m", ("LOCA_NATN", "LOCA_LOCY"), -COORD_LIMIT_M, COORD_LIMIT_M),
                                       ("ground_level_m", ("LOCA_GL", "LOCA_LOCZ"), -LEVEL_LIMIT_M, LEVEL_LIMIT_M)):
            main, local = headings
            use = main if str(row.get(main) or "").strip() or not str(row.get(local) or "").strip() else local
            pos[name] = r.number("LOCA", row, use, lo, hi, "m", required=True)
        out[loca_id] = dict(
            loca_id=loca_id, loca_type=str(row.get("LOCA_TYPE") or "").strip(), **pos,
            final_depth_m=r.number("LOCA", row, "LOCA_FDEP", 0.0, DEPTH_MAX_M, "m"),
            remarks=str(row.get("LOCA_REM") or "").strip(), strata=[], spt=[], cpt={}, water=[])

    def parent(group, row):
        loc = out.get(str(row.get("LOCA_ID") or "").strip())
        return loc

    def depth(group, row, heading, loc, required=True):
        value = r.number(group, row, heading, 0.0, DEPTH_MAX_M, "m", required=required)
        fdep = loc.get("final_depth_m")
        if value is not None and fdep is not None and value > fdep + DEPTH_TOL_M:
            r.fail(group, heading, row.get("line_number"), f"{heading} {value:g} m is below the final depth "
                   f"LOCA_FDEP {fdep:g} m of {loc['loca_id']}")
        return value

    for row in _data(tables.get("GEOL", [])):
        loc = parent("GEOL", row)
        if loc is None:
            continue  # the checker's parent rule (10c) reports it
        top, base = depth("GEOL", row, "GEOL_TOP", loc), depth("GEOL", row, "GEOL_BASE", loc)
        if top is None or base is None:
            continue
        if base <= top:
            r.fail("GEOL", "GEOL_BASE", row.get("line_number"), f"GEOL_BASE {base:g} m must be below GEOL_TOP {top:g} m")
            continue
        legend, description = str(row.get("GEOL_LEG") or "").strip(), str(row.get("GEOL_DESC") or "").strip()
        material, reason = propose_material(legend, description)
        loc["strata"].append(dict(top_depth_m=top, base_depth_m=base, description=description, legend_code=legend,
                                  geology_code=str(row.get("GEOL_GEOL") or "").strip(), proposed_material=material,
                                  material_reason=reason, line=row.get("line_number")))
    for loc in out.values():
        loc["strata"].sort(key=lambda s: s["top_depth_m"])
        for above, below in zip(loc["strata"], loc["strata"][1:], strict=False):
            if below["top_depth_m"] < above["base_depth_m"] - 1e-6:
                r.fail("GEOL", "GEOL_TOP", below["line"], f"stratum from {below['top_depth_m']:g} m overlaps the one "
                       f"above (to {above['base_depth_m']:g} m) in {loc['loca_id']}")
        for s in loc["strata"]:
            s.pop("line")
    for row in _data(tables.get("ISPT", [])):
        loc = parent("ISPT", row)
        if loc is None:
            continue
        d = depth("ISPT", row, "ISPT_TOP", loc)
        n = r.number("ISPT", row, "ISPT_NVAL", 0, N_MAX)
        if n is not None and not float(n).is_integer():
            r.fail("ISPT", "ISPT_NVAL", row.get("line_number"), f"ISPT_NVAL must be a whole number of blows, got {n:g}")
        if d is not None:
            loc["spt"].append(dict(depth_m=d, n_value=None if n is None else int(n),
                                   reported=str(row.get("ISPT_REP") or "").strip(),
                                   energy_ratio_pct=r.number("ISPT", row, "ISPT_ERAT", 1.0, 100.0, "%"),
                                   n60=r.number("ISPT", row, "ISPT_N60", 0, N_MAX)))
    for row in _data(tables.get("SCPG", [])):
        loc = parent("SCPG", row)
        if loc is not None:
            loc["cpt"][str(row.get("SCPG_TESN") or "").strip()] = dict(
                cone_type=str(row.get("SCPG_TYPE") or "").strip(), remarks=str(row.get("SCPG_REM") or "").strip(),
                readings=[])
    qc_scale = r.pressure_scale("SCPT", "SCPT_RES", "MPa") if "SCPT" in tables else None
    fs_scale = r.pressure_scale("SCPT", "SCPT_FRES", "kPa") if "SCPT" in tables else None
    u2_scale = r.pressure_scale("SCPT", "SCPT_PWP2", "kPa") if "SCPT" in tables else None
    for row in _data(tables.get("SCPT", [])):
        loc = parent("SCPT", row)
        test = loc["cpt"].get(str(row.get("SCPG_TESN") or "").strip()) if loc else None
        if test is None or None in (qc_scale, fs_scale, u2_scale):
            continue
        d = depth("SCPT", row, "SCPT_DPTH", loc)
        qc = r.number("SCPT", row, "SCPT_RES", 0.0, QC_MAX_MPA, "MPa", required=True, scale=qc_scale)
        fs = r.number("SCPT", row, "SCPT_FRES", 0.0, FS_MAX_KPA, "kPa", scale=fs_scale)
        u2 = r.number("SCPT", row, "SCPT_PWP2", *U2_RANGE_KPA, "kPa", scale=u2_scale)
        if d is not None and qc is not None:
            test["readings"].append(dict(depth_m=d, qc_mpa=qc, fs_kpa=fs, u2_kpa=u2))
    strikes: dict[tuple[str, float], dict] = {}
    for row in _data(tables.get("WSTG", [])):
        loc = parent("WSTG", row)
        if loc is None:
            continue
        d = depth("WSTG", row, "WSTG_DPTH", loc)
        if d is not None:
            strike = dict(depth_m=d, sealed_depth_m=r.number("WSTG", row, "WSTG_SEAL", 0.0, DEPTH_MAX_M, "m"),
                          remarks=str(row.get("WSTG_REM") or "").strip(), rises=[])
            loc["water"].append(strike)
            strikes[(loc["loca_id"], round(d, 6))] = strike
    for row in _data(tables.get("WSTD", [])):
        key_depth = r.number("WSTD", row, "WSTG_DPTH", 0.0, DEPTH_MAX_M, "m", required=True)
        strike = strikes.get((str(row.get("LOCA_ID") or "").strip(), round(key_depth, 6))) if key_depth is not None else None
        minutes = r.number("WSTD", row, "WSTD_NMIN", 0, 10_000, "min", required=True)
        post = r.number("WSTD", row, "WSTD_POST", 0.0, DEPTH_MAX_M, "m", required=True)
        if strike is not None and minutes is not None and post is not None:
            strike["rises"].append((int(minutes), post))
    return out, r.errors


def check_file(data: bytes) -> tuple[dict[str, dict], list[AgsError], str]:
    """Check the whole file: (locations, errors, AGS edition). Errors from the library's checker
    come first, then our ranges; locations are only meaningful when there are no errors."""
    if len(data) > MAX_BYTES:
        return {}, [AgsError("", "", 0, f"the file is larger than {MAX_BYTES // (1024 * 1024)} MB")], ""
    if not data.strip():
        return {}, [AgsError("", "", 0, "the file is empty")], ""
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        return {}, [AgsError("", "", line, "the file is not UTF-8 (or ASCII) text")], ""
    errors = checker_errors(text)
    if any("Validator Process Error" in e.message for e in errors):
        return {}, errors, ""
    try:
        found, ours = read_locations(text)
    except Exception as exc:  # noqa: BLE001 - a file the library cannot parse is a refusal
        return {}, errors + [AgsError("", "", 0, f"the file could not be read ({exc.__class__.__name__})")], ""
    tran = _data(_tables(text).get("TRAN", []))
    edition = str(tran[0].get("TRAN_AGS") or "") if tran else ""
    return found, errors + ours, edition


def original_path(data_dir: str | Path, sha256: str) -> Path:
    """Where an imported AGS4 file with this hash is kept."""
    return Path(data_dir) / "ags" / f"{sha256}.ags"


def _keep(data_dir: str | Path, sha256: str, data: bytes) -> None:
    path = original_path(data_dir, sha256)
    if path.exists():
        return
    path.parent.mkdir(parents=True, exist_ok=True)
    tmp = path.parent / f".tmp-{path.name}"  # as the photos: a backup skips .tmp-* files
    tmp.write_bytes(data)
    tmp.replace(path)


def import_ags(conn, project_id: int, data: bytes, filename: str, actor: str, data_dir: str | Path) -> AgsImport:
    """Check the whole file and, when it is accepted, store it in one transaction.

    Keeps the original as ``ags/<sha256>.ags``; each location of the file replaces the stored
    one with the same LOCA_ID (with its strata and readings); appends one audit entry
    "AGS4 file imported".
    """
    from fieldapp import db

    result = AgsImport(sha256=hashlib.sha256(data).hexdigest())
    found, errors, edition = check_file(data)
    if errors:
        result.errors = errors
        return result
    _keep(data_dir, result.sha256, data)  # bytes first: a stored row never points at a missing file
    with db.write(conn):
        file_id = loc_q.add_file(conn, project_id, result.sha256, Path(filename or "").name, len(data), edition, actor)
        for loc in found.values():
            loc_q.replace_location(conn, project_id, file_id, loc)
            result.locations.append(loc["loca_id"])
            result.strata += len(loc["strata"])
            result.spt += len(loc["spt"])
            result.cpt += sum(len(t["readings"]) for t in loc["cpt"].values())
            result.water += len(loc["water"])
        audit.append(conn, project_id, actor, "AGS4 file imported", Path(filename or "").name, {
            "sha256": result.sha256, "locations": result.locations, "strata": result.strata,
            "spt": result.spt, "cpt": result.cpt, "water_strikes": result.water})
    return result


# --- writing ------------------------------------------------------------------------------------

@lru_cache(maxsize=1)
def standard_abbreviations() -> dict[tuple[str, str], str]:
    """(heading, code) -> description from the standard dictionary shipped with python-ags4."""
    import contextlib
    import os

    import python_ags4

    AGS4 = _library()
    path = os.path.join(os.path.dirname(python_ags4.__file__), "Standard_dictionary_v4_1_1.ags")
    with contextlib.redirect_stdout(io.StringIO()):
        tables, _ = AGS4.AGS4_to_dataframe(path)
    abbr = tables["ABBR"]
    return {(r["ABBR_HDNG"], r["ABBR_CODE"]): r["ABBR_DESC"] for r in abbr.to_dict("records")
            if r["HEADING"] == "DATA"}


TYPE_DESC = {"ID": "Unique identifier", "X": "Text", "PA": "Text listed in ABBR Group", "DT": "Date time",
             "0DP": "Value; 0 decimal places", "2DP": "Value; 2 decimal places", "3DP": "Value; 3 decimal places",
             "4DP": "Value; 4 decimal places"}
UNIT_DESC = {"m": "metre", "MPa": "megapascal", "%": "percentage", "min": "minute", "yyyy-mm-dd": "date"}


def _fmt(value, dtype: str) -> str:
    if value is None or value == "":
        return ""
    if dtype.endswith("DP"):
        return f"{float(value):.{int(dtype[0])}f}"
    return str(value)


# The headings Toeline reads and writes in each data group: (heading, unit, AGS4 data type).
GROUP_COLUMNS = {
    "LOCA": [("LOCA_ID", "", "ID"), ("LOCA_TYPE", "", "PA"), ("LOCA_NATE", "m", "2DP"),
             ("LOCA_NATN", "m", "2DP"), ("LOCA_GL", "m", "2DP"), ("LOCA_REM", "", "X"),
             ("LOCA_FDEP", "m", "2DP")],
    "GEOL": [("LOCA_ID", "", "ID"), ("GEOL_TOP", "m", "2DP"), ("GEOL_BASE", "m", "2DP"),
             ("GEOL_DESC", "", "X"), ("GEOL_LEG", "", "PA"), ("GEOL_GEOL", "", "PA")],
    "ISPT": [("LOCA_ID", "", "ID"), ("ISPT_TOP", "m", "2DP"), ("ISPT_NVAL", "", "0DP"),
             ("ISPT_REP", "", "X"), ("ISPT_ERAT", "%", "0DP"), ("ISPT_N60", "", "0DP")],
    "SCPG": [("LOCA_ID", "", "ID"), ("SCPG_TESN", "", "X"), ("SCPG_TYPE", "", "PA"), ("SCPG_REM", "", "X")],
    "SCPT": [("LOCA_ID", "", "ID"), ("SCPG_TESN", "", "X"), ("SCPT_DPTH", "m", "2DP"),
             ("SCPT_RES", "MPa", "3DP"), ("SCPT_FRES", "MPa", "4DP"), ("SCPT_PWP2", "MPa", "4DP")],
    "WSTG": [("LOCA_ID", "", "ID"), ("WSTG_DPTH", "m", "2DP"), ("WSTG_SEAL", "m", "2DP"),
             ("WSTG_REM", "", "X")],
    "WSTD": [("LOCA_ID", "", "ID"), ("WSTG_DPTH", "m", "2DP"), ("WSTD_NMIN", "min", "0DP"),
             ("WSTD_POST", "m", "2DP")],
}


def export_groups(conn, project_id: int) -> dict[str, tuple[list[tuple[str, str, str]], list[dict]]]:
    """The project's ground data as AGS4 groups: name -> ([(heading, unit, type)], [row dicts])."""
    project = projects.get(conn, project_id)
    groups: dict[str, tuple[list, list]] = {
        "PROJ": ([("PROJ_ID", "", "ID"), ("PROJ_NAME", "", "X"), ("PROJ_LOC", "", "X"), ("PROJ_ENG", "", "X")],
                 [{"PROJ_ID": f"TOELINE-{project_id}", "PROJ_NAME": project.name, "PROJ_LOC": project.site,
                   "PROJ_ENG": project.engineer}]),
        "TRAN": ([("TRAN_ISNO", "", "X"), ("TRAN_DATE", "yyyy-mm-dd", "DT"), ("TRAN_PROD", "", "X"),
                  ("TRAN_STAT", "", "X"), ("TRAN_AGS", "", "X"), ("TRAN_RECV", "", "X"), ("TRAN_DLIM", "", "X"),
                  ("TRAN_RCON", "", "X")],
                 [{"TRAN_ISNO": "1", "TRAN_DATE": date.today().isoformat(), "TRAN_PROD": "Toeline export",
                   "TRAN_STAT": "as held in Toeline", "TRAN_AGS": EDITION, "TRAN_RECV": "not stated",
                   "TRAN_DLIM": "|", "TRAN_RCON": "+"}]),
    }
    loca, geol, ispt, scpg, scpt, wstg, wstd = [], [], [], [], [], [], []
    for loc in loc_q.list_locations(conn, project_id):
        loca.append({"LOCA_ID": loc.loca_id, "LOCA_TYPE": loc.loca_type, "LOCA_NATE": loc.easting_m,
                     "LOCA_NATN": loc.northing_m, "LOCA_GL": loc.ground_level_m, "LOCA_REM": loc.remarks,
                     "LOCA_FDEP": loc.final_depth_m})
        for s in loc_q.strata(conn, loc):
            geol.append({"LOCA_ID": loc.loca_id, "GEOL_TOP": s.top_depth_m, "GEOL_BASE": s.base_depth_m,
                         "GEOL_DESC": s.description, "GEOL_LEG": s.legend_code, "GEOL_GEOL": s.geology_code})
        for r in loc_q.spt(conn, loc.id):
            ispt.append({"LOCA_ID": loc.loca_id, "ISPT_TOP": r["depth_m"], "ISPT_NVAL": r["n_value"],
                         "ISPT_REP": r["reported"], "ISPT_ERAT": r["energy_ratio_pct"], "ISPT_N60": r["n60"]})
        for ref, test in loc_q.cpt(conn, loc.id).items():
            scpg.append({"LOCA_ID": loc.loca_id, "SCPG_TESN": ref, "SCPG_TYPE": test["cone_type"],
                         "SCPG_REM": test["remarks"]})
            for r in test["readings"]:
                scpt.append({"LOCA_ID": loc.loca_id, "SCPG_TESN": ref, "SCPT_DPTH": r["depth_m"],
                             "SCPT_RES": r["qc_mpa"],
                             "SCPT_FRES": None if r["fs_kpa"] is None else r["fs_kpa"] / 1000.0,
                             "SCPT_PWP2": None if r["u2_kpa"] is None else r["u2_kpa"] / 1000.0})
        for w in loc_q.water(conn, loc.id):
            wstg.append({"LOCA_ID": loc.loca_id, "WSTG_DPTH": w["depth_m"], "WSTG_SEAL": w["sealed_depth_m"],
                         "WSTG_REM": w["remarks"]})
            for minutes, depth in w["rises"]:
                wstd.append({"LOCA_ID": loc.loca_id, "WSTG_DPTH": w["depth_m"], "WSTD_NMIN": minutes,
                             "WSTD_POST": depth})
    data = {"LOCA": loca, "GEOL": geol, "ISPT": ispt, "SCPG": scpg, "SCPT": scpt, "WSTG": wstg, "WSTD": wstd}
    groups.update({name: (GROUP_COLUMNS[name], rows) for name, rows in data.items() if rows})
    return complete_groups(groups)


def complete_groups(groups: dict) -> dict:
    """Add the UNIT, TYPE and ABBR groups the data groups need (every unit, data type and
    abbreviation used, described from the standard dictionary where it lists the code)."""
    standard = standard_abbreviations()
    abbr = {}
    for cols, rows in groups.values():
        for heading, _, dtype in cols:
            if dtype == "PA":
                for row in rows:
                    code = row.get(heading)
                    if code:
                        abbr[(heading, code)] = standard.get((heading, code), "as in the imported file")
    used_units = {u for cols, _ in groups.values() for _, u, _ in cols if u}
    used_types = {t for cols, _ in groups.values() for _, _, t in cols} | {"X"}
    groups["UNIT"] = ([("UNIT_UNIT", "", "X"), ("UNIT_DESC", "", "X")],
                      [{"UNIT_UNIT": u, "UNIT_DESC": UNIT_DESC[u]} for u in sorted(used_units)])
    groups["TYPE"] = ([("TYPE_TYPE", "", "X"), ("TYPE_DESC", "", "X")],
                      [{"TYPE_TYPE": t, "TYPE_DESC": TYPE_DESC[t]} for t in sorted(used_types)])
    if abbr:
        groups["ABBR"] = ([("ABBR_HDNG", "", "X"), ("ABBR_CODE", "", "X"), ("ABBR_DESC", "", "X")],
                          [{"ABBR_HDNG": h, "ABBR_CODE": c, "ABBR_DESC": d} for (h, c), d in sorted(abbr.items())])
    return groups


def write_groups(groups: dict) -> bytes:
    """AGS4 bytes of groups (see export_groups), written by python-ags4's writer."""
    from pandas import DataFrame

    AGS4 = _library()
    tables, headings = {}, {}
    for name, (cols, rows) in groups.items():
        names = [h for h, _, _ in cols]
        records = [dict({"HEADING": "UNIT"}, **{h: u for h, u, _ in cols}),
                   dict({"HEADING": "TYPE"}, **{h: t for h, _, t in cols})]
        records += [dict({"HEADING": "DATA"}, **{h: _fmt(row.get(h), t) for h, _, t in cols}) for row in rows]
        tables[name] = DataFrame(records, columns=["HEADING"] + names, dtype=object)
        headings[name] = ["HEADING"] + names
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "export.ags"
        AGS4.dataframe_to_AGS4(tables, headings, str(path), warnings=False)
        return path.read_bytes()


def export_ags(conn, project_id: int) -> bytes:
    """The project's locations, strata and readings as an AGS4 file (bytes)."""
    return write_groups(export_groups(conn, project_id))
