"""The demo site's ground investigation as an AGS4 file: invented boreholes and soundings.

Quillmere Freight Shed (an invented site) was investigated, in this story, by six cable
percussion boreholes (N1, N2 in the north zone, E1, E2 east, S1, S2 south) and two static cone
soundings (CPT-N1, CPT-S1). Strata, SPT N values, cone readings and water strikes are all
invented, shaped to agree with the demo's three ground zones. ``ags_bytes()`` writes the file
(it passes the AGS4 checker); ``ground_models()`` gives the demo's ground models made from it
(levels, materials and water from the file's boreholes N1, E1 and S1; strength parameters as
the demo's engineer chose them, because a file's strata never carry them); ``load`` imports the
file into the demo project and links each model to the borehole it was made from.

Nothing here is a real place, firm, borehole or test.
"""

from __future__ import annotations

import math

from fieldapp import ags_io

# (id, type, easting m, northing m, ground level m, strata [(top, base, description, legend)],
#  water strike (depth m, depth after 20 min m))
BOREHOLES = [
    ("N1", "CP", 1020.0, 2086.0, 100.0, [
        (0.0, 1.5, "MADE GROUND: brick and concrete rubble in sandy gravel", "102"),
        (1.5, 10.0, "Firm becoming stiff grey silty CLAY", "202"),
        (10.0, 30.0, "Dense grey-brown fine to coarse SAND", "401")], (3.2, 2.5)),
    ("N2", "CP", 1100.0, 2075.0, 100.1, [
        (0.0, 1.6, "MADE GROUND: brick rubble in sandy gravel", "102"),
        (1.6, 10.2, "Firm becoming stiff grey silty CLAY", "202"),
        (10.2, 30.0, "Dense grey-brown fine to coarse SAND", "401")], (3.0, 2.6)),
    ("E1", "CP", 1025.0, 2055.0, 100.0, [
        (0.0, 1.0, "MADE GROUND", "102"),
        (1.0, 7.0, "Medium dense brown SAND", "401"),
        (7.0, 25.0, "Weathered grey MUDSTONE", "801")], (2.6, 2.0)),
    ("E2", "CP", 1085.0, 2045.0, 100.0, [
        (0.0, 1.2, "MADE GROUND", "102"),
        (1.2, 7.4, "Medium dense brown SAND", "401"),
        (7.4, 25.0, "Weathered grey MUDSTONE", "801")], (2.4, 2.1)),
    ("S1", "CP", 1030.0, 2015.0, 100.2, [
        (0.0, 1.0, "MADE GROUND", "102"),
        (1.0, 28.2, "Soft becoming firm grey CLAY", "201"),
        (28.2, 40.2, "Stiff fissured CLAY", "201")], (1.2, 0.7)),
    ("S2", "CP", 1100.0, 2025.0, 100.3, [
        (0.0, 1.1, "MADE GROUND", "102"),
        (1.1, 28.0, "Soft becoming firm grey CLAY", "201"),
        (28.0, 40.0, "Stiff fissured CLAY", "201")], (1.3, 0.8)),
]
SOUNDINGS = [("CPT-N1", 1060.0, 2082.0, 100.0, 25.0), ("CPT-S1", 1060.0, 2018.0, 100.2, 30.0)]

# The demo engineer's parameters per zone and stratum (from the invented geotechnical report),
# with the ground model's name and description; made from boreholes N1, E1 and S1.
ZONES = [
    ("N1", "North: clay over sand", "Invented boreholes N1-N2 and CPT-N1: made ground on firm to stiff clay on dense sand.",
     [dict(unit_weight_kn_m3=18.0), dict(unit_weight_kn_m3=19.5, cu_kpa=50.0, cu_bottom_kpa=120.0),
      dict(unit_weight_kn_m3=20.0, phi_deg=36.0)]),
    ("E1", "East: sand over rock", "Invented boreholes E1-E2: sand over weathered mudstone; rock values from the "
     "(invented) geotechnical report.",
     [dict(unit_weight_kn_m3=18.0), dict(unit_weight_kn_m3=19.0, phi_deg=32.0),
      dict(unit_weight_kn_m3=22.0, shaft_friction_kpa=150.0, base_pressure_kpa=4000.0)]),
    ("S1", "South: deep soft clay", "Invented boreholes S1-S2 and CPT-S1: soft clay, c_u rising with depth, on stiff clay.",
     [dict(unit_weight_kn_m3=18.0), dict(unit_weight_kn_m3=17.0, cu_kpa=15.0, cu_bottom_kpa=60.0),
      dict(unit_weight_kn_m3=19.5, cu_kpa=100.0, cu_bottom_kpa=160.0)]),
]


def _spt_n(material: str, depth: float, wobble: int) -> int:
    """An invented N for a stratum at a depth (rising with depth, a little scatter)."""
    base = {"cohesive": 6 + 1.2 * depth, "cohesionless": 18 + 1.0 * depth, "rock": 50 + 2 * depth}.get(material, 5)
    return int(round(base + (wobble % 3) - 1))


def _cpt_qc(zone: str, depth: float) -> tuple[float, float]:
    """An invented (q_c MPa, f_s MPa) at a depth in the north or south sounding."""
    if zone == "N":
        if depth < 1.5:
            return 3.0, 0.030
        if depth < 10.0:
            return 0.9 + 0.18 * (depth - 1.5) + 0.1 * math.sin(depth * 3), 0.035 + 0.004 * depth
        return 16.0 + 0.4 * (depth - 10.0) + 1.5 * math.sin(depth * 2), 0.12 + 0.002 * depth
    if depth < 1.0:
        return 2.0, 0.020
    if depth < 28.2:
        return 0.30 + 0.025 * depth + 0.03 * math.sin(depth * 4), 0.008 + 0.0006 * depth
    return 2.6 + 0.05 * (depth - 28.2), 0.09


def groups() -> dict:
    """The invented investigation as AGS4 groups (see ags_io.export_groups for the shape)."""
    loca, geol, ispt, scpg, scpt, wstg, wstd = [], [], [], [], [], [], []
    for loca_id, kind, e, n, gl, strata, (strike, after) in BOREHOLES:
        loca.append({"LOCA_ID": loca_id, "LOCA_TYPE": kind, "LOCA_NATE": e, "LOCA_NATN": n, "LOCA_GL": gl,
                     "LOCA_REM": "invented for the demo", "LOCA_FDEP": strata[-1][1]})
        for i, (top, base, description, legend) in enumerate(strata):
            geol.append({"LOCA_ID": loca_id, "GEOL_TOP": top, "GEOL_BASE": base, "GEOL_DESC": description,
                         "GEOL_LEG": legend})
            material, _ = ags_io.propose_material(legend, description)
            depth = max(1.5, math.ceil(top / 1.5) * 1.5)
            while depth < base - 0.45 and material != "ignore":
                n_value = min(_spt_n(material, depth, i + int(depth * 10)), 100)
                ispt.append({"LOCA_ID": loca_id, "ISPT_TOP": depth, "ISPT_NVAL": n_value, "ISPT_REP": f"N={n_value}",
                             "ISPT_ERAT": 65})
                depth += 1.5
        wstg.append({"LOCA_ID": loca_id, "WSTG_DPTH": strike, "WSTG_REM": "rose slowly"})
        wstd.append({"LOCA_ID": loca_id, "WSTG_DPTH": strike, "WSTD_NMIN": 20, "WSTD_POST": after})
    for loca_id, e, n, gl, depth_max in SOUNDINGS:
        loca.append({"LOCA_ID": loca_id, "LOCA_TYPE": "SCP", "LOCA_NATE": e, "LOCA_NATN": n, "LOCA_GL": gl,
                     "LOCA_REM": "invented for the demo", "LOCA_FDEP": depth_max})
        scpg.append({"LOCA_ID": loca_id, "SCPG_TESN": "1", "SCPG_TYPE": "CPTU", "SCPG_REM": "invented for the demo"})
        steps = int(round(depth_max / 0.25))
        for k in range(1, steps + 1):
            depth = k * 0.25
            qc, fs = _cpt_qc(loca_id[-2], depth)
            u2 = 0.0098 * max(0.0, depth - 2.0) if qc < 5 else 0.0098 * max(0.0, depth - 2.5) * 0.9
            scpt.append({"LOCA_ID": loca_id, "SCPG_TESN": "1", "SCPT_DPTH": depth, "SCPT_RES": qc,
                         "SCPT_FRES": fs, "SCPT_PWP2": u2})
    project = {"PROJ": ([("PROJ_ID", "", "ID"), ("PROJ_NAME", "", "X"), ("PROJ_LOC", "", "X")],
                        [{"PROJ_ID": "QFS-GI", "PROJ_NAME": "Quillmere Freight Shed (invented)",
                          "PROJ_LOC": "Plot 4, Quillmere Wharf (invented site)"}]),
               "TRAN": ([("TRAN_ISNO", "", "X"), ("TRAN_DATE", "yyyy-mm-dd", "DT"), ("TRAN_PROD", "", "X"),
                         ("TRAN_STAT", "", "X"), ("TRAN_AGS", "", "X"), ("TRAN_RECV", "", "X")],
                        [{"TRAN_ISNO": "1", "TRAN_DATE": "2026-01-15", "TRAN_PROD": "Invented Ground Surveys (demo)",
                          "TRAN_STAT": "Final", "TRAN_AGS": ags_io.EDITION, "TRAN_RECV": "Demo piling contractor"}])}
    data = {"LOCA": loca, "GEOL": geol, "ISPT": ispt, "SCPG": scpg, "SCPT": scpt, "WSTG": wstg, "WSTD": wstd}
    project.update({name: (ags_io.GROUP_COLUMNS[name], rows) for name, rows in data.items()})
    return ags_io.complete_groups(project)


def ags_bytes() -> bytes:
    """The demo's AGS4 file."""
    return ags_io.write_groups(groups())


def ground_models(data: bytes | None = None) -> list[tuple[str, str, float, list[dict]]]:
    """The demo's ground models made from the file: (name, description, water level m, layers),
    layers keyed by the stored column names (as ``demo.GROUND_MODELS``)."""
    found, errors, _ = ags_io.check_file(data if data is not None else ags_bytes())
    if errors:
        raise ValueError(f"the demo AGS4 file is not accepted: {errors[0]}")
    out = []
    for loca_id, name, description, parameters in ZONES:
        loc = found[loca_id]
        gl = loc["ground_level_m"]
        layers = [dict(top_level_m=round(gl - s["top_depth_m"], 3), bottom_level_m=round(gl - s["base_depth_m"], 3),
                       material=s["proposed_material"], description=s["description"], **p)
                  for s, p in zip(loc["strata"], parameters, strict=True)]
        highest = min(d for w in loc["water"] for d in [w["depth_m"]] + [r[1] for r in w["rises"]])
        out.append((name, description, round(gl - highest, 3), layers))
    return out


def load(conn, project_id: int, data_dir, actor: str = "demo") -> ags_io.AgsImport:
    """Import the demo file into the project and link each zone's model to its borehole."""
    from fieldapp import db
    from fieldapp.queries import ground
    from fieldapp.queries import locations as loc_q

    result = ags_io.import_ags(conn, project_id, ags_bytes(), "quillmere-gi.ags", actor, data_dir)
    if not result.ok:
        raise ValueError(f"the demo AGS4 file is not accepted: {result.errors[0]}")
    by_id = {loc.loca_id: loc for loc in loc_q.list_locations(conn, project_id)}
    with db.write(conn):
        for loca_id, name, _, _ in ZONES:
            model = ground.by_name(conn, project_id, name)
            if model is not None:
                loc_q.link_model(conn, by_id[loca_id].id, model.id)
    return result
