"""The tablet's offline estimate agrees with design_core on a generated corpus (issue 14).

With no signal the At the rig page estimates its live lines in JavaScript (static/rig/live.js)
from the project bundle the tablet keeps. Here Python generates 600 cases with a fixed seed
(ground models, pile types, diameters, cut-offs, toes, debris, cover, exposure classes,
positions, inclinations, volumes, batching times and design values, under three rule sets), design_core's
``recheck`` works out every check, and one page load in Chromium runs static/rig/live.js (the
same file the rig page loads) on all of them in one ``page.evaluate``. The test fails on any
status that differs (the tablet may say "not checked" where it cannot know, never ok where
design_core says short) and on any value or limit outside the tablet's display rounding; it also
fails if the tablet calls too few checks (an estimate that always says "not checked" would be
useless), and if the level the tablet says the load needs is not deep enough for design_core.

The data the script gets is what the tablet gets: the project bundle from the API, one pile put
back together by ``rig_data_from_bundle``, and the bundle's rules (as the rig page attaches
them). The ground models and piles are invented test data.
"""

from __future__ import annotations

import dataclasses
import random
import re
from collections import Counter
from datetime import datetime
from pathlib import Path

import pytest

from design_core.ground import GroundModel, Layer
from design_core.inputs import PILE_TYPES, AsBuilt, Delivery, PileDesign, StratumMet
from design_core.verdict import recheck
from design_core.rules import Rules
from fieldapp import db
from fieldapp.rig_view import rig_data_from_bundle
from fieldapp.queries import ground, piles, projects
from tests.conftest import PASSWORD

pytestmark = pytest.mark.browser

LIVE_JS = Path(__file__).resolve().parents[2] / "static" / "rig" / "live.js"
SEED = 20261203
N_CASES = 600

# (name, water level m, layers top down) -- invented ground for the corpus.
GROUNDS = [
    ("clay over sand", 6.0, [
        dict(top_level_m=10.0, bottom_level_m=9.0, material="ignore", unit_weight_kn_m3=18.0),
        dict(top_level_m=9.0, bottom_level_m=2.0, material="cohesive", unit_weight_kn_m3=19.0, cu_kpa=50.0),
        dict(top_level_m=2.0, bottom_level_m=-20.0, material="cohesionless", unit_weight_kn_m3=20.0, phi_deg=32.0),
    ]),
    ("stiffening clay", 8.0, [
        dict(top_level_m=10.0, bottom_level_m=-25.0, material="cohesive", unit_weight_kn_m3=19.5,
             cu_kpa=40.0, cu_bottom_kpa=220.0),
    ]),
    ("sand over clay", 4.0, [
        dict(top_level_m=10.0, bottom_level_m=0.0, material="cohesionless", unit_weight_kn_m3=19.0, phi_deg=30.0),
        dict(top_level_m=0.0, bottom_level_m=-5.0, material="cohesive", unit_weight_kn_m3=18.5, cu_kpa=60.0),
        dict(top_level_m=-5.0, bottom_level_m=-22.0, material="cohesionless", unit_weight_kn_m3=20.5, phi_deg=36.0),
    ]),
]
RULE_SETS = {
    "own": Rules(),
    "other": dataclasses.replace(Rules(), design_approach="limit_state", loads_are="working"),
    "third": dataclasses.replace(Rules(), design_approach="working_stress", loads_are="factored",
                                 toe_tolerance_mm=100.0),
}
DIAMETERS = (450.0, 600.0, 750.0, 900.0, 1200.0)
CUTOFFS = (9.5, 9.0, 8.2)
CLASSES = ("XC1", "XC2", "XC4", "XD1", "XS2")

# What the tablet shows, rounded: a value within these of design_core's is the same figure.
ROUNDING = {"kN": 0.5, "mm": 0.5, "MPa": 0.5, "m": 0.005, "min": 0.5, "": 0.005, "m/m": 5e-5}
# The interpolated resistance (limit of axial_compression) is shown as "about N kN".
ABOUT_FRACTION = 0.005


def _layers(rows):
    return [Layer(top=r["top_level_m"], bottom=r["bottom_level_m"], material=r["material"],
                  unit_weight=r["unit_weight_kn_m3"], cu=r.get("cu_kpa"), cu_bottom=r.get("cu_bottom_kpa"),
                  phi=r.get("phi_deg")) for r in rows]


def _stamp(t: str) -> datetime:
    return datetime.fromisoformat(t)


def _design(rng, mark, gm_id, k):
    d = rng.choice(DIAMETERS)
    cutoff = rng.choice(CUTOFFS)
    n_bars = rng.choice((0, 6, 8, 12))
    pile_type = rng.choice(PILE_TYPES) if rng.random() < 0.3 else "bored"
    return {"mark": mark, "cap_id": None, "ground_model_id": gm_id, "pile_type": pile_type,
            "easting_m": 100.0 + k, "northing_m": 200.0 + 2 * k, "cutoff_level_m": cutoff,
            "toe_level_m": round(rng.uniform(-12.0, 3.0), 2), "diameter_mm": d,
            "compression_kn": 0.0 if rng.random() < 0.08 else round(rng.uniform(150, 4500), 0),
            "tension_kn": 0.0, "shear_kn": 0.0, "moment_knm": 0.0, "n_bars": n_bars,
            "bar_mm": 20.0 if n_bars else 0.0, "cage_length_m": rng.choice((6.0, 9.0, 12.0)) if n_bars else 0.0,
            "fc_mpa": rng.choice((30.0, 35.0, 40.0)), "fy_mpa": 500.0,
            "exposure_class": rng.choice(CLASSES), "cover_mm": 75.0, "head": "free"}


def _maybe(rng, p, value):
    return value if rng.random() < p else None


def _record(rng, row):
    """An as-built record around the design, often near its limits; None fields not recorded."""
    platform = 10.0
    toe = row["toe_level_m"] + rng.choice((-1.5, -0.5, -0.2, 0.0, 0.04, 0.2, 0.6, 2.0)) + rng.uniform(-0.15, 0.15)
    toe = max(toe, -19.0)
    rec = {"platform_level": platform, "measured_depth": round(platform - toe, 2)}
    if rng.random() < 0.05:
        rec.pop("platform_level")
    dia = rng.random()
    if dia < 0.5:
        rec["diameter_mm"] = row["diameter_mm"]
    elif dia < 0.75:
        rec["diameter_mm"] = row["diameter_mm"] + rng.choice((-40.0, -10.0, -5.0, 5.0, 25.0))
    cut = rng.random()
    if cut < 0.3:
        rec["cutoff_level"] = row["cutoff_level_m"]
    elif cut < 0.6:
        rec["cutoff_level"] = round(row["cutoff_level_m"] + rng.uniform(-0.08, 0.08), 3)
    for key, lo, hi in (("debris_mm", 0, 80), ("cover_mm", 40, 110), ("concrete_mpa", 20, 50)):
        v = _maybe(rng, 0.7, round(rng.uniform(lo, hi), rng.choice((0, 1))))
        if v is not None:
            rec[key] = v
    if rng.random() < 0.4:
        rec["exposure_class"] = rng.choice(CLASSES)
    if rng.random() < 0.7:
        rec["easting"] = round(row["easting_m"] + rng.uniform(-0.12, 0.12), 3)
        rec["northing"] = round(row["northing_m"] + rng.uniform(-0.12, 0.12), 3)
    if rng.random() < 0.7:
        rec["inclination"] = round(rng.choice((0.0, rng.uniform(0.0, 0.04))), 4)
    if rng.random() < 0.7 and row["cage_length_m"]:
        rec["cage_length"] = round(row["cage_length_m"] + rng.uniform(-0.6, 0.4), 2)
    if rng.random() < 0.5:
        rec["casting_level"] = round(row["cutoff_level_m"] + rng.uniform(-0.1, 0.6), 2)
    if rng.random() < 0.7:
        top = rec.get("casting_level", rec.get("cutoff_level", row["cutoff_level_m"]))
        length = max(top - toe, 0.5)
        area = 3.141592653589793 * (row["diameter_mm"] / 1000.0) ** 2 / 4.0
        rec["concrete_volume_m3"] = round(area * length * rng.uniform(0.9, 1.6), 2)
    deliveries = []
    for i in range(rng.choice((0, 1, 2, 3, 4))):
        d = {"docket": f"D{i + 1}", "volume_m3": 6.0}
        if rng.random() < 0.9:
            start = rng.randint(0, 300)
            d["batched_at"] = f"2026-03-02T{7 + start // 60:02d}:{start % 60:02d}"
            if rng.random() < 0.9:
                end = start + rng.choice((20, 60, 89, 90, 91, 120))
                d["discharged_at"] = f"2026-03-02T{7 + end // 60:02d}:{end % 60:02d}"
        deliveries.append(d)
    if deliveries:
        rec["deliveries"] = deliveries
    if rng.random() < 0.1 and "platform_level" in rec:
        depth = rec["measured_depth"]
        cut = round(rng.uniform(1.0, depth - 0.5), 1)
        rec["strata"] = [{"from_depth": 0.0, "to_depth": cut, "material": rng.choice(("cohesive", "cohesionless"))},
                         {"from_depth": cut, "to_depth": round(depth + 1.0, 1), "material": "cohesive"}]
    return rec


def _asbuilt(rec):
    deliveries = tuple(Delivery(docket=d.get("docket", ""), volume_m3=d.get("volume_m3"),
                                batched_at=_stamp(d["batched_at"]) if d.get("batched_at") else None,
                                discharged_at=_stamp(d["discharged_at"]) if d.get("discharged_at") else None)
                       for d in rec.get("deliveries", ()))
    strata = tuple(StratumMet(s["from_depth"], s["to_depth"], s["material"]) for s in rec.get("strata", ()))
    plain = {k: v for k, v in rec.items() if k not in ("deliveries", "strata")}
    return AsBuilt(deliveries=deliveries, strata=strata, **plain)


def _pile_design(row):
    return PileDesign(mark=row["mark"], diameter=row["diameter_mm"] / 1000.0, cutoff_level=row["cutoff_level_m"],
                      toe_level=row["toe_level_m"], easting=row["easting_m"], northing=row["northing_m"],
                      pile_type=row["pile_type"], compression=row["compression_kn"], n_bars=row["n_bars"],
                      bar_mm=row["bar_mm"], cage_length=row["cage_length_m"], fc_mpa=row["fc_mpa"],
                      fy_mpa=row["fy_mpa"], exposure_class=row["exposure_class"], cover_mm=row["cover_mm"])


@pytest.fixture
def corpus(app, people):
    """The cases: (project key, design row, record) with every project's bundle through the API."""
    rng = random.Random(SEED)
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            ids = {"own": people["own"], "other": people["other"],
                   "third": projects.create(conn, "Third job", "corpus")}
            from fieldapp.queries import users
            for key in ("other", "third"):
                projects.save_rules(conn, ids[key], RULE_SETS[key], note="corpus")
                if key == "third":
                    uid = conn.execute("SELECT id FROM users WHERE email = ?", (people["engineer"],)).fetchone()[0]
                    users.add_member(conn, ids[key], uid)
            grounds = {}
            for key, pid in ids.items():
                for name, water, rows in GROUNDS:
                    gm = ground.save_model(conn, pid, name, water, rows)
                    grounds[(key, gm)] = GroundModel(_layers(rows), water)
            cases = []
            for k in range(N_CASES):
                key = rng.choice(tuple(ids))
                gm = rng.choice([g for (p, g) in grounds if p == key])
                row = _design(rng, f"C{k + 1}", gm, k)
                piles.save_pile(conn, ids[key], row)
                cases.append((key, row, _record(rng, row), grounds[(key, gm)]))
    # The outsider is the only engineer of "other"; sign in as them for that bundle.
    bundles = {}
    for key, email in (("own", people["engineer"]), ("third", people["engineer"]), ("other", people["outsider"])):
        c = app.test_client()
        html = c.get("/login").get_data(as_text=True)
        token = re.search(r'name="csrf-token" content="([^"]+)"', html).group(1)
        c.post("/login", data={"email": email, "password": PASSWORD, "csrf_token": token})
        answer = c.get(f"/api/v1/projects/{ids[key]}/bundle")
        assert answer.status_code == 200, (key, answer.status_code)
        bundles[key] = answer.get_json()
    return cases, bundles


def _expected(case):
    key, row, rec, model = case
    verdict = recheck(_pile_design(row), _asbuilt(rec), model, RULE_SETS[key])
    return {c.code: c for c in verdict.checks}


def _run_js(page, payload):
    page.set_content("<!doctype html><title>offline corpus</title>")
    page.add_script_tag(path=str(LIVE_JS))
    return page.evaluate("""(cases) => cases.map((c) => ({
        checks: window.ToelineLive.offlineChecks(c.data, c.record),
        required: window.ToelineLive.requiredToe(c.data),
    }))""", payload)


def test_offline_estimate_agrees_with_design_core(page, corpus):
    cases, bundles = corpus
    for key, rules in RULE_SETS.items():
        assert bundles[key]["rules"]["design_approach"] == rules.design_approach
    payload = []
    for key, row, rec, _ in cases:
        data = rig_data_from_bundle(bundles[key], row["mark"])
        data["rules"] = bundles[key]["rules"]
        payload.append({"data": data, "record": rec})
    got = _run_js(page, payload)
    assert len(got) == len(cases) >= 500

    problems, made, core_made = [], Counter(), Counter()
    worst_about = 0.0
    for case, answer in zip(cases, got, strict=True):
        expected = _expected(case)
        mark = case[1]["mark"]
        for js in answer["checks"]:
            core = expected[js["code"]]
            if core.ok is not None:
                core_made[js["code"]] += 1
            if js["status"] == "not checked":
                continue
            if js["status"] != core.status:
                problems.append(f"{mark} {js['code']}: tablet {js['status']} ({js['text']}), "
                                f"design_core {core.status} ({core.reason})")
                continue
            made[js["code"]] += 1
            tol = ROUNDING[core.unit]
            for what in ("value", "limit"):
                a, b = js[what], getattr(core, what)
                if a is None and b is None:
                    continue
                allow = tol
                if js["code"] == "axial_compression" and what == "limit" and a is not None and b:
                    allow = max(tol, ABOUT_FRACTION * abs(b))
                    worst_about = max(worst_about, abs(a - b) / abs(b))
                if a is None or b is None or abs(a - b) > allow:
                    problems.append(f"{mark} {js['code']} {what}: tablet {a}, design_core {b} "
                                    f"({js['text']} / {core.reason})")
    assert problems == [], "\n".join(problems[:40]) + f"\n({len(problems)} in all)"

    # The estimate must call most checks it can: at least this share of those design_core made.
    for code, share in (("axial_compression", 0.25), ("toe_level", 0.9), ("diameter", 0.95),
                        ("base_debris", 0.95), ("durability_cover", 0.95), ("durability_grade", 0.95),
                        ("position", 0.95), ("inclination", 0.95), ("cutoff_level", 0.95),
                        ("cage_length", 0.95), ("concrete_volume", 0.9), ("concrete_time", 0.9)):
        assert core_made[code] >= 20, (code, core_made[code])
        assert made[code] >= share * core_made[code], (code, made[code], core_made[code])
    print(f"\noffline corpus: {len(cases)} cases; calls made offline / by design_core: "
          + ", ".join(f"{c} {made[c]}/{core_made[c]}" for c in sorted(core_made))
          + f"; interpolated resistance within {100 * worst_about:.2f} % of design_core's")


def test_offline_level_needed_is_never_shallow(page, corpus):
    """At the level the tablet says the load needs (no strata, design geometry), design_core's
    compression check is ok: the advice errs deep, never shallow."""
    cases, bundles = corpus
    payload, picked = [], []
    for case in cases:
        key, row, _, _ = case
        if row["compression_kn"] <= 0:
            continue
        data = rig_data_from_bundle(bundles[key], row["mark"])
        data["rules"] = bundles[key]["rules"]
        payload.append({"data": data, "record": {}})
        picked.append(case)
    got = _run_js(page, payload)
    shallow, reached = [], 0
    for (key, row, _, model), answer in zip(picked, got, strict=True):
        level = answer["required"]["level"]
        if level is None:
            continue
        reached += 1
        asb = AsBuilt(platform_level=10.0, measured_depth=round(10.0 - level, 4))
        check = {c.code: c for c in recheck(_pile_design(row), asb, model, RULE_SETS[key]).checks}["axial_compression"]
        if check.ok is not True:
            shallow.append(f"{row['mark']}: tablet says {level:.2f} m, design_core {check.status}: {check.reason}")
    assert reached >= 200
    assert shallow == [], "\n".join(shallow[:20])
