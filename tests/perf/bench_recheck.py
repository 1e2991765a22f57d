"""Benchmark of the per-pile recheck (issue 4): one pile, and a project of 5,000 piles.

Run with ``python -m tests.perf.bench_recheck``. Targets: one pile under 2 ms (median), 5,000
piles under 2 s. Figures are wall-clock medians with the process CPU time beside them (on a
shared machine the wall time includes waiting for a core). No timing is asserted anywhere.

The project is invented: three ground models, four diameters, caps of one to four piles, every
pile with compression, uplift on a quarter, lateral load on all; as-built records with the
deviations a rig gives (depths and levels to 10 mm, positions to 5 mm, covers to 5 mm), and
strata logged at one pile in ten; one pile in fifty is 1.5 m short of its toe.
"""

from __future__ import annotations

import random
import statistics
import time
from datetime import datetime, timedelta

from design_core import GroundModel, Layer, Rules
from design_core.inputs import AsBuilt, CapGroup, CapPile, Delivery, PileDesign, StratumMet
from design_core.memo import MEMO
from design_core.verdict import ProjectItem, recheck, recheck_project

T0 = datetime(2026, 3, 2, 7, 0)
DIAMETERS = (0.45, 0.6, 0.75, 0.9)


def grounds() -> list[GroundModel]:
    """Three invented ground models, platform at 0.0 m."""
    return [
        GroundModel((Layer(0.0, -2.0, "ignore", 18.0),
                     Layer(-2.0, -14.0, "cohesive", 19.0, cu=60.0, cu_bottom=180.0),
                     Layer(-14.0, -40.0, "cohesionless", 20.0, phi=35.0)), -1.5),
        GroundModel((Layer(0.0, -1.5, "ignore", 17.0),
                     Layer(-1.5, -8.0, "cohesionless", 19.0, phi=31.0),
                     Layer(-8.0, -22.0, "cohesive", 19.5, cu=90.0, cu_bottom=220.0),
                     Layer(-22.0, -40.0, "rock", 23.0, shaft_friction=200.0,
                           base_pressure=5000.0)), -3.0),
        GroundModel((Layer(0.0, -3.0, "ignore", 18.0),
                     Layer(-3.0, -40.0, "cohesive", 19.0, cu=50.0, cu_bottom=300.0)), -2.0),
    ]


def project(n_piles: int = 5000, seed: int = 4):
    """(items, groups): ``n_piles`` invented piles in caps of one to four."""
    rng = random.Random(seed)
    models = grounds()
    items: list[ProjectItem] = []
    groups: dict[str, CapGroup] = {}
    k = 0
    cap_no = 0
    while k < n_piles:
        cap_no += 1
        size = min(rng.choice((1, 2, 3, 4)), n_piles - k)
        gi = cap_no % len(models)
        d = DIAMETERS[cap_no % len(DIAMETERS)]
        x0, y0 = 10.0 * (cap_no % 80), 10.0 * (cap_no // 80)
        offsets = [(0.0, 0.0), (3 * d, 0.0), (3 * d, 3 * d), (0.0, 3 * d)][:size]
        cap = f"C{cap_no}" if size > 1 else None
        toe = -(15.0 + 2.0 * (cap_no % 4))
        cap_piles = []
        for ox, oy in offsets:
            k += 1
            mark = f"P{k}"
            design = PileDesign(
                mark, d, -1.0, toe, easting=x0 + ox, northing=y0 + oy,
                compression=round(350.0 * d / 0.6, -1), tension=(80.0 if k % 4 == 0 else 0.0),
                shear=round(25.0 * d / 0.6), moment=(20.0 if cap is None else 0.0),
                n_bars=8, bar_mm=20.0 if d < 0.7 else 25.0, cage_length=10.0, fc_mpa=32.0,
                cover_mm=75.0, cap=cap, head="free" if cap is None else "fixed")
            depth = -toe + rng.randint(0, 30) / 100.0 - (1.5 if k % 50 == 0 else 0.0)
            e = design.easting + rng.randint(-10, 10) * 0.005
            n = design.northing + rng.randint(-10, 10) * 0.005
            strata = ()
            if k % 10 == 0:
                strata = (StratumMet(0.0, 2.0 + rng.randint(0, 5) / 10.0, "ignore"),)
            asbuilt = AsBuilt(
                platform_level=0.0, measured_depth=depth, diameter_mm=d * 1000.0,
                cutoff_level=-1.0 + rng.randint(-3, 3) / 100.0, casting_level=-0.5,
                easting=e, northing=n, inclination=rng.randint(0, 12) / 1000.0,
                debris_mm=float(rng.randint(0, 30)), cover_mm=75.0 + 5 * rng.randint(0, 3),
                cage_length=10.0,
                concrete_mpa=32.0, concrete_volume_m3=round(1.15 * 3.1416 * d * d / 4 * (depth - 0.5), 2),
                deliveries=(Delivery("D1", 6.0, T0, T0 + timedelta(minutes=rng.randint(30, 85))),),
                strata=strata)
            items.append(ProjectItem(design, asbuilt, models[gi]))
            cap_piles.append(CapPile(mark, (design.easting, design.northing), (e, n)))
        if cap:
            groups[cap] = CapGroup(cap, tuple(cap_piles), n=sum(
                it.design.compression for it in items[-size:]), mx=(50.0 if size > 2 else 0.0), my=30.0)
    return items, groups


def _time(fn):
    """(wall s, CPU s) of one call."""
    w, c = time.perf_counter(), time.process_time()
    fn()
    return time.perf_counter() - w, time.process_time() - c


def _cold(fn):
    """(wall s, CPU s) of one call with nothing kept from earlier calls (design_core keeps
    shaft profiles, section curves and Winkler solves for equal inputs; forgetting them takes
    place before the clock starts)."""
    MEMO.clear()
    return _time(fn)


def run() -> dict:
    """Median time of one pile's recheck, and of the whole 5,000-pile project.

    ``recheck_ms`` and ``project_5000_s`` start from nothing each time (the figures against the
    targets); ``recheck_warm_ms`` is the same pile rechecked again with the kept results (a
    record saved again at the next stage of the same pile)."""
    rules = Rules()
    items, groups = project(5000)
    one = next(it for it in items if it.design.cap is None)   # alone, with shear and moment
    fn = lambda: recheck(one.design, one.asbuilt, one.ground, rules)  # noqa: E731
    fn()
    walls, cpus, warm = [], [], []
    for _ in range(300):
        w, c = _cold(fn)
        walls.append(w)
        cpus.append(c)
        warm.append(_time(fn)[0])
    project_walls, project_cpus = [], []
    for _ in range(3):
        w, c = _cold(lambda: recheck_project(items, rules, groups))
        project_walls.append(w)
        project_cpus.append(c)
    verdicts = recheck_project(items, rules, groups)
    flagged = sum(1 for v in verdicts.values() if v.verdict != "meets design")
    return {
        "recheck_ms": statistics.median(walls) * 1e3,
        "recheck_cpu_ms": statistics.median(cpus) * 1e3,
        "recheck_warm_ms": statistics.median(warm) * 1e3,
        "project_5000_s": statistics.median(project_walls),
        "project_5000_cpu_s": statistics.median(project_cpus),
        "project_per_pile_ms": statistics.median(project_walls) / len(items) * 1e3,
        "project_flagged": flagged,
    }


if __name__ == "__main__":
    f = run()
    print(f"recheck, one pile (median of 300):   {f['recheck_ms']:.3f} ms wall, "
          f"{f['recheck_cpu_ms']:.3f} ms CPU (target < 2 ms; ratio {f['recheck_ms'] / 2.0:.2f})")
    print(f"the same pile again (kept results):  {f['recheck_warm_ms']:.3f} ms wall")
    print(f"recheck_project, 5,000 piles:        {f['project_5000_s']:.3f} s wall, "
          f"{f['project_5000_cpu_s']:.3f} s CPU (target < 2 s; ratio {f['project_5000_s'] / 2.0:.2f})")
    print(f"per pile in the project:             {f['project_per_pile_ms']:.3f} ms "
          f"({f['project_flagged']} of 5,000 piles need the engineer)")
