"""The demo project: an invented site with invented people and invented ground.

Quillmere Freight Shed stands on three invented ground zones: firm clay over dense sand (north),
sand over weathered mudstone with report values (east), and deep soft clay whose c_u grows with
depth (south). Its caps hold 1 to 6 piles; each cap's loads (N, Mx, My, Hx, Hy) are shared out
to its piles with the rigid-cap rule of ``design_core.group.group_shares``, and each pile's
design toe is the level the project's own rules need for that load (``design_core.axial``
capacity curve and ``required_toe_level``), taken a little deeper and rounded down to 0.25 m,
so the schedule is consistent with the checks that will be run on it.

Nothing here is a real place, firm or person.
"""

from __future__ import annotations

import math

import numpy as np

from design_core.axial import capacity_curve, required_toe_level
from design_core.group import group_shares
from fieldapp import db, demo_ags, demo_records
from fieldapp.pile_inputs import load_ground, store_ground_model
from fieldapp.queries import audit, caps, piles, projects, users

LOGINS = [
    ("admin@toeline.example", "admin", "demo-admin-1"),
    ("engineer@toeline.example", "engineer", "demo-engineer-1"),
    ("inspector@toeline.example", "inspector", "demo-inspector-1"),
    ("viewer@toeline.example", "viewer", "demo-viewer-1"),
]

NAMES = {
    "admin": "Morwen Adler",
    "engineer": "Teodor Vance",
    "inspector": "Priya Hallow",
    "viewer": "Jonas Brightwater",
}

PROJECT = {
    "name": "Quillmere Freight Shed",
    "site": "Plot 4, Quillmere Wharf (invented site)",
    "datum": "site datum; existing ground about +100.0 m",
    "engineer": "T. Vance (demo engineer of record)",
}

TOE_MARGIN_M = 0.25   # the design toe is at least this far below the level the load needs
TOE_ROUND_M = 0.25    # and rounded down to a multiple of this

# Ground models: (name, description, water level m, layers top down as stored-column dicts).
GROUND_MODELS = [
    ("North: clay over sand", "Invented boreholes N1-N3: made ground on firm to stiff clay on dense sand.",
     97.5, [
         dict(top_level_m=100.0, bottom_level_m=98.5, material="ignore", unit_weight_kn_m3=18.0,
              description="Made ground: brick and concrete rubble in sandy gravel"),
         dict(top_level_m=98.5, bottom_level_m=90.0, material="cohesive", unit_weight_kn_m3=19.5,
              cu_kpa=50.0, cu_bottom_kpa=120.0, description="Firm becoming stiff grey silty CLAY"),
         dict(top_level_m=90.0, bottom_level_m=70.0, material="cohesionless", unit_weight_kn_m3=20.0,
              phi_deg=36.0, description="Dense grey-brown fine to coarse SAND"),
     ]),
    ("East: sand over rock", "Invented boreholes E1-E2: sand over weathered mudstone; rock values from "
     "the (invented) geotechnical report.",
     98.0, [
         dict(top_level_m=100.0, bottom_level_m=99.0, material="ignore", unit_weight_kn_m3=18.0,
              description="Made ground"),
         dict(top_level_m=99.0, bottom_level_m=93.0, material="cohesionless", unit_weight_kn_m3=19.0,
              phi_deg=32.0, description="Medium dense SAND"),
         dict(top_level_m=93.0, bottom_level_m=75.0, material="rock", unit_weight_kn_m3=22.0,
              shaft_friction_kpa=150.0, base_pressure_kpa=4000.0,
              description="Weathered MUDSTONE (report: ultimate shaft 150 kPa, base 4000 kPa)"),
     ]),
    ("South: deep soft clay", "Invented boreholes S1-S4: soft clay, c_u rising with depth, on stiff clay.",
     99.5, [
         dict(top_level_m=100.2, bottom_level_m=99.2, material="ignore", unit_weight_kn_m3=18.0,
              description="Made ground"),
         dict(top_level_m=99.2, bottom_level_m=72.0, material="cohesive", unit_weight_kn_m3=17.0,
              cu_kpa=15.0, cu_bottom_kpa=60.0, description="Soft becoming firm grey CLAY"),
         dict(top_level_m=72.0, bottom_level_m=60.0, material="cohesive", unit_weight_kn_m3=19.5,
              cu_kpa=100.0, cu_bottom_kpa=160.0, description="Stiff fissured CLAY"),
     ]),
]

# Caps: mark, ground model index, number of piles, pile type, diameter mm, cut-off level m,
# (N, Mx, My, Hx, Hy) in kN and kNm, centre (easting, northing) m, reinforcement
# (n_bars, bar_mm, fc_mpa, exposure class). Loads are working loads (the rules' default).
CAPS = [
    ("PC01", 0, 6, "bored", 900, 99.0, (11000, 900, 1800, 180, 120), (1010.0, 2080.0), (12, 25, 40, "XC2")),
    ("PC02", 0, 4, "bored", 750, 99.0, (5200, 300, 400, 90, 60), (1030.0, 2080.0), (10, 20, 40, "XC2")),
    ("PC03", 0, 4, "bored", 750, 99.0, (4800, 250, -200, 80, 70), (1050.0, 2080.0), (10, 20, 40, "XC2")),
    ("PC04", 0, 2, "cfa", 600, 99.0, (1500, 0, 150, 40, 20), (1070.0, 2080.0), (8, 16, 32, "XC2")),
    ("PC05", 0, 1, "bored", 900, 99.0, (1900, 0, 0, 40, 25), (1090.0, 2080.0), (12, 20, 40, "XC2")),
    ("PC06", 0, 3, "bored", 750, 99.0, (3900, 200, 150, 60, 45), (1110.0, 2080.0), (10, 20, 40, "XC2")),
    ("PC11", 1, 3, "bored", 750, 99.0, (5400, 300, 250, 90, 60), (1010.0, 2050.0), (10, 20, 40, "XD2")),
    ("PC12", 1, 3, "bored", 750, 99.0, (5100, -250, 200, 80, 50), (1030.0, 2050.0), (10, 20, 40, "XD2")),
    ("PC13", 1, 5, "cfa", 600, 99.0, (5500, 350, 300, 100, 80), (1050.0, 2050.0), (8, 20, 40, "XD2")),
    ("PC14", 1, 1, "cfa", 600, 99.0, (1200, 0, 0, 30, 20), (1070.0, 2050.0), (8, 16, 40, "XD2")),
    ("PC15", 1, 2, "bored", 750, 99.0, (3800, 0, 300, 70, 30), (1090.0, 2050.0), (10, 20, 40, "XD2")),
    ("PC21", 2, 4, "cfa", 600, 99.4, (4000, 200, 250, 60, 50), (1010.0, 2020.0), (8, 20, 32, "XC2")),
    ("PC22", 2, 4, "cfa", 600, 99.4, (3600, -150, 200, 50, 40), (1030.0, 2020.0), (8, 20, 32, "XC2")),
    ("PC23", 2, 2, "cfa", 450, 99.4, (1300, 0, 100, 30, 10), (1050.0, 2020.0), (6, 16, 32, "XC2")),
    ("PC24", 2, 1, "cfa", 600, 99.4, (950, 0, 0, 25, 15), (1070.0, 2020.0), (8, 16, 32, "XC2")),
    ("PC25", 2, 3, "cfa", 450, 99.4, (2100, 100, 80, 40, 30), (1090.0, 2020.0), (6, 16, 32, "XC2")),
    ("PC26", 2, 6, "cfa", 450, 99.4, (4200, 250, 400, 70, 50), (1110.0, 2020.0), (6, 16, 32, "XC2")),
]


def layout(n_piles: int, spacing_m: float) -> list[tuple[float, float]]:
    """Pile positions (m) about the cap centre for 1 to 6 piles at a centre spacing of ``spacing_m``."""
    s = spacing_m
    if n_piles == 1:
        return [(0.0, 0.0)]
    if n_piles == 2:
        return [(-s / 2, 0.0), (s / 2, 0.0)]
    if n_piles == 3:
        h = s * math.sqrt(3.0) / 2.0
        return [(-s / 2, -h / 3), (s / 2, -h / 3), (0.0, 2 * h / 3)]
    if n_piles == 4:
        return [(-s / 2, -s / 2), (s / 2, -s / 2), (-s / 2, s / 2), (s / 2, s / 2)]
    if n_piles == 5:
        a = 0.75 * s
        return [(-a, -a), (a, -a), (0.0, 0.0), (-a, a), (a, a)]
    if n_piles == 6:
        return [(x, y) for y in (-s / 2, s / 2) for x in (-s, 0.0, s)]
    raise ValueError(f"n_piles must be 1 to 6, got {n_piles}")


def design_toe(ground, diameter_m: float, cutoff_m: float, pile_type: str, load_kn: float, rules) -> float:
    """The demo's design toe level (m): the level the load needs, less a margin, rounded down.

    Uses ``design_core.axial.capacity_curve`` and ``required_toe_level`` with the project's
    rules; raises ValueError when the ground model is too shallow for the load.
    """
    toes = np.arange(cutoff_m - 0.5, ground.bottom + 1e-9, -0.05)
    curve = capacity_curve(ground, diameter_m, cutoff_m, toes, pile_type, rules)
    need = required_toe_level(curve, load_kn)
    if need is None:
        raise ValueError(f"ground model too shallow for {load_kn:g} kN on a {diameter_m:g} m pile")
    toe = math.floor((need - TOE_MARGIN_M) / TOE_ROUND_M) * TOE_ROUND_M
    if toe < ground.bottom or curve.design_at(toe) < load_kn:
        raise ValueError(f"no consistent toe for {load_kn:g} kN on a {diameter_m:g} m pile")
    return round(toe, 3)


def _round_up(x: float, step: float) -> float:
    return math.ceil(x / step - 1e-9) * step


def schedule(ground_models: list, rules) -> list[tuple[dict, list[dict]]]:
    """(cap values, [pile values]) for every demo cap; ``ground_models`` are design_core models.

    Pile values use the stored-column names of queries.piles.WRITE_COLUMNS, with
    ``ground_index`` and ``cap_mark`` in place of the ids.
    """
    out = []
    number = 0
    for (mark, gi, n, ptype, d_mm, cutoff, (N, mx, my, hx, hy), (ce, cn),
         (n_bars, bar_mm, fc, exposure)) in CAPS:
        d = d_mm / 1000.0
        xy = [(ce + x, cn + y) for x, y in layout(n, 3.0 * d)]
        shares = group_shares(xy, N, mx, my, load_point=(ce, cn))
        shear = math.hypot(hx, hy) / n
        piles = []
        for (e, no), share in zip(xy, shares, strict=True):
            number += 1
            compression = _round_up(float(share), 10.0)
            toe = design_toe(ground_models[gi], d, cutoff, ptype, compression, rules)
            piles.append({
                "mark": f"P{number}", "cap_mark": mark, "ground_index": gi, "pile_type": ptype,
                "easting_m": round(e, 3), "northing_m": round(no, 3), "cutoff_level_m": cutoff,
                "toe_level_m": toe, "diameter_mm": float(d_mm), "compression_kn": compression,
                "tension_kn": 0.0, "shear_kn": _round_up(shear, 1.0), "moment_knm": 0.0,
                "n_bars": n_bars, "bar_mm": float(bar_mm),
                "cage_length_m": round(min(12.0, cutoff - toe), 2), "fc_mpa": float(fc),
                "fy_mpa": 500.0, "exposure_class": exposure, "cover_mm": 75.0,
                "head": "fixed" if n > 1 else "free",
            })
        cap = {"mark": mark, "n_kn": float(N), "mx_knm": float(mx), "my_knm": float(my),
               "hx_kn": float(hx), "hy_kn": float(hy)}
        out.append((cap, piles))
    return out


def build(app) -> int:
    """Create the demo users, project, ground models, caps and piles; returns the project id."""
    conn = db.get_db()
    with db.write(conn):
        pid = projects.create(conn, PROJECT["name"], PROJECT["site"], PROJECT["datum"],
                              PROJECT["engineer"])
        for email, role, password in LOGINS:
            uid = users.create(conn, email, password, role, NAMES[role])
            users.add_member(conn, pid, uid)
        rules = projects.current_rules(conn, pid).rules
        gm_ids, gm_design = [], []
        for name, description, water, layers in demo_ags.ground_models():
            gm_id = store_ground_model(conn, pid, name, water, layers, description)
            gm_ids.append(gm_id)
            gm_design.append(load_ground(conn, gm_id))
        count = 0
        for cap, pile_list in schedule(gm_design, rules):
            cap_id = caps.save_cap(conn, pid, cap["mark"], cap)
            for values in pile_list:
                row = {k: v for k, v in values.items() if k not in ("cap_mark", "ground_index")}
                row["cap_id"] = cap_id
                row["ground_model_id"] = gm_ids[values["ground_index"]]
                piles.save_pile(conn, pid, row)
                count += 1
        audit.append(conn, pid, "demo", "demo project created", PROJECT["name"],
                     {"piles": count, "caps": len(CAPS), "ground_models": len(gm_ids)})
        demo_ags.load(conn, pid, app.config["DATA_DIR"])  # the invented ground investigation
    demo_records.add_records(app, pid, LOGINS[2][0])  # as-built records and photos through the save path
    return pid
