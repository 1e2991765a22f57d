"""Ground investigation locations read from AGS4 files, their strata and in situ readings.

A location is a borehole, trial pit or sounding (the file's ``LOCA``) with its position and
ground level (m). Its strata (``GEOL``) are kept as logged, depths below the ground level, with
a *proposed* material that the engineer confirms by making a ground model from them (strength
parameters are never stored here). SPT N values, CPT readings (q_c in MPa, f_s and u_2 in kPa)
and water strikes are the location's readings. ``replace_location`` writes one location and
everything under it; call it inside ``db.write``.
"""

from __future__ import annotations

import math
import sqlite3
from dataclasses import dataclass

from fieldapp.queries.audit import now_iso


@dataclass(frozen=True)
class Stratum:
    """One logged stratum: depths in m below ground level, the proposed material and why."""

    position: int
    top_depth_m: float
    base_depth_m: float
    description: str
    legend_code: str
    geology_code: str
    proposed_material: str
    material_reason: str
    ground_level_m: float

    @property
    def top_level_m(self) -> float:
        """Level of the top (m): ground level less the depth."""
        return self.ground_level_m - self.top_depth_m

    @property
    def bottom_level_m(self) -> float:
        """Level of the base (m): ground level less the depth."""
        return self.ground_level_m - self.base_depth_m


@dataclass(frozen=True)
class Location:
    """One location of the project (AGS4 ``LOCA``): position and ground level in m."""

    id: int
    project_id: int
    loca_id: str
    loca_type: str
    easting_m: float
    northing_m: float
    ground_level_m: float
    final_depth_m: float | None
    remarks: str
    ags_file_id: int | None
    ground_model_id: int | None


def _location(row) -> Location | None:
    if row is None:
        return None
    return Location(row["id"], row["project_id"], row["loca_id"], row["loca_type"], row["easting_m"],
                    row["northing_m"], row["ground_level_m"], row["final_depth_m"], row["remarks"],
                    row["ags_file_id"], row["ground_model_id"])


def add_file(conn: sqlite3.Connection, project_id: int, sha256: str, filename: str, size_bytes: int,
             edition: str, actor: str) -> int:
    """Record an imported file (kept by hash); the same file again returns the first row's id."""
    row = conn.execute("SELECT id FROM ags_files WHERE project_id = ? AND sha256 = ?",
                       (project_id, sha256)).fetchone()
    if row:
        return row["id"]
    return conn.execute(
        "INSERT INTO ags_files (project_id, sha256, filename, size_bytes, ags_edition, imported_at, "
        "imported_by) VALUES (?, ?, ?, ?, ?, ?, ?)",
        (project_id, sha256, filename, size_bytes, edition, now_iso(), actor)).lastrowid


def files(conn: sqlite3.Connection, project_id: int) -> list[sqlite3.Row]:
    """The project's imported files, newest first."""
    return conn.execute("SELECT * FROM ags_files WHERE project_id = ? ORDER BY id DESC",
                        (project_id,)).fetchall()


def replace_location(conn: sqlite3.Connection, project_id: int, ags_file_id: int | None, loc: dict) -> int:
    """Write one location with its strata and readings, replacing what was stored under the same
    ``loca_id`` (a re-issued file supersedes the earlier one); returns its id.

    ``loc`` keys: loca_id, loca_type, easting_m, northing_m, ground_level_m, final_depth_m,
    remarks, strata [dict], spt [dict], cpt {test_ref: {cone_type, remarks, readings [dict]}},
    water [dict with rises [(minutes, depth_m)]]. A ground model already made from the location
    stays linked.
    """
    old = conn.execute("SELECT id, ground_model_id FROM locations WHERE project_id = ? AND loca_id = ?",
                       (project_id, loc["loca_id"])).fetchone()
    model_id = old["ground_model_id"] if old else None
    if old:
        conn.execute("DELETE FROM locations WHERE id = ?", (old["id"],))
    location_id = conn.execute(
        "INSERT INTO locations (project_id, loca_id, loca_type, easting_m, northing_m, ground_level_m, "
        "final_depth_m, remarks, ags_file_id, ground_model_id) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
        (project_id, loc["loca_id"], loc.get("loca_type") or "", loc["easting_m"], loc["northing_m"],
         loc["ground_level_m"], loc.get("final_depth_m"), loc.get("remarks") or "", ags_file_id,
         model_id)).lastrowid
    for position, s in enumerate(loc.get("strata", [])):
        conn.execute(
            "INSERT INTO location_strata (location_id, position, top_depth_m, base_depth_m, description, "
            "legend_code, geology_code, proposed_material, material_reason) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (location_id, position, s["top_depth_m"], s["base_depth_m"], s.get("description") or "",
             s.get("legend_code") or "", s.get("geology_code") or "", s["proposed_material"],
             s.get("material_reason") or ""))
    for r in loc.get("spt", []):
        conn.execute("INSERT INTO spt_readings (location_id, depth_m, n_value, reported, energy_ratio_pct, n60) "
                     "VALUES (?, ?, ?, ?, ?, ?)",
                     (location_id, r["depth_m"], r.get("n_value"), r.get("reported") or "",
                      r.get("energy_ratio_pct"), r.get("n60")))
    for test_ref, test in loc.get("cpt", {}).items():
        test_id = conn.execute("INSERT INTO cpt_tests (location_id, test_ref, cone_type, remarks) "
                               "VALUES (?, ?, ?, ?)", (location_id, test_ref, test.get("cone_type") or "",
                                                       test.get("remarks") or "")).lastrowid
        conn.executemany("INSERT INTO cpt_readings (cpt_test_id, depth_m, qc_mpa, fs_kpa, u2_kpa) "
                         "VALUES (?, ?, ?, ?, ?)",
                         [(test_id, r["depth_m"], r["qc_mpa"], r.get("fs_kpa"), r.get("u2_kpa"))
                          for r in test.get("readings", [])])
    for w in loc.get("water", []):
        strike_id = conn.execute("INSERT INTO water_strikes (location_id, depth_m, sealed_depth_m, remarks) "
                                 "VALUES (?, ?, ?, ?)", (location_id, w["depth_m"], w.get("sealed_depth_m"),
                                                         w.get("remarks") or "")).lastrowid
        conn.executemany("INSERT INTO water_rises (water_strike_id, minutes, depth_m) VALUES (?, ?, ?)",
                         [(strike_id, minutes, depth) for minutes, depth in w.get("rises", [])])
    return location_id


def list_locations(conn: sqlite3.Connection, project_id: int) -> list[Location]:
    """The project's locations, by id."""
    return [_location(r) for r in conn.execute(
        "SELECT * FROM locations WHERE project_id = ? ORDER BY loca_id", (project_id,)).fetchall()]


def get_location(conn: sqlite3.Connection, project_id: int, location_id: int) -> Location | None:
    """One location of the project, or None (also None when it is another project's)."""
    return _location(conn.execute("SELECT * FROM locations WHERE id = ? AND project_id = ?",
                                  (location_id, project_id)).fetchone())


def strata(conn: sqlite3.Connection, location: Location) -> list[Stratum]:
    """The location's strata, top down."""
    rows = conn.execute("SELECT * FROM location_strata WHERE location_id = ? ORDER BY position",
                        (location.id,)).fetchall()
    return [Stratum(r["position"], r["top_depth_m"], r["base_depth_m"], r["description"], r["legend_code"],
                    r["geology_code"], r["proposed_material"], r["material_reason"], location.ground_level_m)
            for r in rows]


def spt(conn: sqlite3.Connection, location_id: int) -> list[sqlite3.Row]:
    """SPT readings of the location (depth m, N, reported text, energy ratio %, N60), by depth."""
    return conn.execute("SELECT * FROM spt_readings WHERE location_id = ? ORDER BY depth_m",
                        (location_id,)).fetchall()


def cpt(conn: sqlite3.Connection, location_id: int) -> dict[str, dict]:
    """CPT tests of the location: test_ref -> {cone_type, remarks, readings [rows by depth]}.

    Readings: depth_m, qc_mpa, fs_kpa, u2_kpa (None where not measured)."""
    out = {}
    for t in conn.execute("SELECT * FROM cpt_tests WHERE location_id = ? ORDER BY test_ref",
                          (location_id,)).fetchall():
        out[t["test_ref"]] = {"cone_type": t["cone_type"], "remarks": t["remarks"], "readings": conn.execute(
            "SELECT depth_m, qc_mpa, fs_kpa, u2_kpa FROM cpt_readings WHERE cpt_test_id = ? ORDER BY depth_m",
            (t["id"],)).fetchall()}
    return out


def water(conn: sqlite3.Connection, location_id: int) -> list[dict]:
    """Water strikes of the location: depth_m, sealed_depth_m, remarks, rises [(minutes, depth_m)]."""
    out = []
    for w in conn.execute("SELECT * FROM water_strikes WHERE location_id = ? ORDER BY depth_m",
                          (location_id,)).fetchall():
        rises = [(r["minutes"], r["depth_m"]) for r in conn.execute(
            "SELECT minutes, depth_m FROM water_rises WHERE water_strike_id = ? ORDER BY minutes",
            (w["id"],)).fetchall()]
        out.append({"depth_m": w["depth_m"], "sealed_depth_m": w["sealed_depth_m"], "remarks": w["remarks"],
                    "rises": rises})
    return out


def link_model(conn: sqlite3.Connection, location_id: int, ground_model_id: int) -> None:
    """Record that the engineer made this ground model from the location's strata."""
    conn.execute("UPDATE locations SET ground_model_id = ? WHERE id = ?", (ground_model_id, location_id))


def nearest(conn: sqlite3.Connection, project_id: int, easting_m: float, northing_m: float
            ) -> tuple[Location, float] | None:
    """The project's location nearest to a point in plan and its distance (m); None without any."""
    best = None
    for loc in list_locations(conn, project_id):
        d = math.hypot(loc.easting_m - easting_m, loc.northing_m - northing_m)
        if best is None or d < best[1]:
            best = (loc, d)
    return best


def nearest_to_piles(conn: sqlite3.Connection, project_id: int) -> dict[str, tuple[str, float]]:
    """Pile mark -> (nearest location's id in the file, distance m in plan) for the site plan."""
    locs = list_locations(conn, project_id)
    if not locs:
        return {}
    out = {}
    for row in conn.execute("SELECT mark, easting_m, northing_m FROM piles WHERE project_id = ?",
                            (project_id,)).fetchall():
        loc = min(locs, key=lambda p: math.hypot(p.easting_m - row["easting_m"], p.northing_m - row["northing_m"]))
        out[row["mark"]] = (loc.loca_id, math.hypot(loc.easting_m - row["easting_m"],
                                                     loc.northing_m - row["northing_m"]))
    return out


# --- soundings and SPT profiles uploaded as Toeline CSV (fieldapp.soundings) ------------------

POSITION_TOL_M = 0.01


class SoundingClash(ValueError):
    """An upload whose name is a location already stored at another position or level."""


def add_sounding(conn: sqlite3.Connection, project_id: int, ground_model_id: int, kind: str,
                 name: str, easting_m: float, northing_m: float, ground_level_m: float,
                 readings: list[tuple]) -> int:
    """Store a CPT sounding (``kind`` "cpt", readings (depth_m, qc_mpa, fs_kpa, u2_kpa)) or an
    SPT profile ("spt", readings (depth_m, n, energy_ratio_pct, n60)) under the location
    ``name``, linked to the ground model; its location id. Run inside ``db.write``.

    A new name makes a location (type "CPT" or "SPT"). An existing location of that name keeps
    its strata and other readings: its CPT test of that name, or its SPT readings, are
    replaced; it must be at the same position and ground level (within 0.01 m), else
    SoundingClash.
    """
    old = conn.execute("SELECT * FROM locations WHERE project_id = ? AND loca_id = ?",
                       (project_id, name)).fetchone()
    if old is not None:
        moved = [f for f, v in (("easting_m", easting_m), ("northing_m", northing_m),
                                ("ground_level_m", ground_level_m))
                 if abs(old[f] - v) > POSITION_TOL_M]
        if moved:
            raise SoundingClash(f"location {name} is stored with another {', '.join(moved)} "
                                f"({', '.join(f'{old[f]:g}' for f in moved)}): give the same "
                                "position and level, or another name")
        location_id = old["id"]
        conn.execute("UPDATE locations SET ground_model_id = ? WHERE id = ?",
                     (ground_model_id, location_id))
    else:
        location_id = conn.execute(
            "INSERT INTO locations (project_id, loca_id, loca_type, easting_m, northing_m, "
            "ground_level_m, final_depth_m, remarks, ags_file_id, ground_model_id) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, '', NULL, ?)",
            (project_id, name, kind.upper(), easting_m, northing_m, ground_level_m,
             max(r[0] for r in readings), ground_model_id)).lastrowid
    if kind == "cpt":
        conn.execute("DELETE FROM cpt_tests WHERE location_id = ? AND test_ref = ?",
                     (location_id, name))
        test_id = conn.execute("INSERT INTO cpt_tests (location_id, test_ref, cone_type, remarks) "
                               "VALUES (?, ?, '', 'uploaded as Toeline CSV')",
                               (location_id, name)).lastrowid
        conn.executemany("INSERT INTO cpt_readings (cpt_test_id, depth_m, qc_mpa, fs_kpa, u2_kpa) "
                         "VALUES (?, ?, ?, ?, ?)", [(test_id, *r) for r in readings])
    else:
        conn.execute("DELETE FROM spt_readings WHERE location_id = ?", (location_id,))
        conn.executemany("INSERT INTO spt_readings (location_id, depth_m, n_value, reported, "
                         "energy_ratio_pct, n60) VALUES (?, ?, ?, '', ?, ?)",
                         [(location_id, d, int(n), er, n60) for d, n, er, n60 in readings])
    return location_id


def for_model(conn: sqlite3.Connection, project_id: int, ground_model_id: int) -> list[Location]:
    """The project's locations linked to a ground model, by name."""
    return [_location(r) for r in conn.execute(
        "SELECT * FROM locations WHERE project_id = ? AND ground_model_id = ? ORDER BY loca_id",
        (project_id, ground_model_id)).fetchall()]
