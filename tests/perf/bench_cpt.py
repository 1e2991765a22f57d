"""Benchmark of the capacity curve from a CPT sounding (issue 20): 1,200 toe levels from a
2,000-reading sounding, target under 1 ms as for the soil-parameter curve.

Run with ``python -m tests.perf.bench_cpt`` (or ``python -m tests.perf --only cpt --json
out.json``). Figures are medians of single calls; no timing is asserted anywhere.
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from design_core import Rules, capacity_curve
from design_core.cpt import Sounding, cpt_capacity_curve
from tests.perf import bench_axial

GROUND_LEVEL = 10.0
TOP_LEVEL = 9.0
DEPTHS = np.round(0.02 * np.arange(1, 2001), 6)  # 2,000 readings, 0.02 m apart, to 40 m
TOE_LEVELS = TOP_LEVEL - 0.025 * np.arange(1, 1201)  # 1,200 levels, 0.025 m apart, over 30 m


def sounding() -> Sounding:
    """An invented sounding: loose sand, soft clay, dense sand, with u_2 (no real site)."""
    d = DEPTHS
    qc = np.where(d < 8, 4.0 + 0.6 * d, np.where(d < 18, 1.2 + 0.04 * d, 15.0 + 0.3 * (d - 18)))
    # a sounding is never smooth: +-35 % scatter (seeded), so many windows drop readings
    # a sounding is never smooth: +-35 % scatter (seeded), so many windows drop readings
    qc = qc * (1.0 + 0.15 * np.sin(7.0 * d)) * np.random.default_rng(8).uniform(0.65, 1.35, d.size)
    fs = np.where((d >= 8) & (d < 18), 40.0, 6.0 * qc)
    u2 = 9.81 * np.maximum(d - 1.5, 0.0) * np.where((d >= 8) & (d < 18), 1.8, 1.0)
    return Sounding("BENCH", 0.0, 0.0, GROUND_LEVEL, d, qc, fs, u2)


def _median_ms(fn, repeat: int) -> float:
    """Median wall time (ms) of ``repeat`` single calls of ``fn``."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times) * 1e3


def run() -> dict:
    """Time the 1,200-level curve by LCPC (the figure against the target) and by Eslami &
    Fellenius, from the same 2,000-reading sounding and a 0.6 m bored pile; and, in the same
    conditions, the soil-parameter curve of bench_axial (``cpt_vs_soil_curve``, a ratio that
    other work on the machine slows alike)."""
    s, rules = sounding(), Rules()
    lcpc = lambda: cpt_capacity_curve(s, 0.6, TOP_LEVEL, TOE_LEVELS, "bored", rules,  # noqa: E731
                                      method="lcpc")
    ef = lambda: cpt_capacity_curve(s, 0.6, TOP_LEVEL, TOE_LEVELS, "bored", rules,  # noqa: E731
                                    method="eslami_fellenius")
    g = bench_axial.ground()
    soil = lambda: capacity_curve(g, 0.6, bench_axial.TOP_LEVEL,  # noqa: E731
                                  bench_axial.TOE_LEVELS, rules=rules)
    lcpc(), ef(), soil()  # warm up
    cpt_ms = _median_ms(lcpc, 500)
    soil_ms = bench_axial._median_cold_ms(soil, 500)
    return {"cpt_curve_ms": cpt_ms, "cpt_curve_ef_ms": _median_ms(ef, 500),
            "cpt_vs_soil_curve": cpt_ms / soil_ms,
            "cpt_windows_dropping": _share_dropping(s, 0.9)}


def _share_dropping(s: Sounding, half: float) -> float:
    """Share of the curve's LCPC windows (+-``half`` m) that drop a reading (off the clock):
    the sounding is rough enough that the full LCPC rule is exercised, not only the first mean."""
    count = 0
    for toe in GROUND_LEVEL - TOE_LEVELS:
        window = s.qc_mpa[(s.depths_m >= toe - half - 1e-6) & (s.depths_m <= toe + half + 1e-6)]
        first = window.mean()
        count += bool(np.any((window < 0.7 * first) | (window > 1.3 * first)))
    return count / TOE_LEVELS.size


if __name__ == "__main__":
    figures = run()
    print(f"CPT curve, LCPC, 1,200 levels from 2,000 readings:   {figures['cpt_curve_ms']:.3f} ms "
          "(target < 1 ms)")
    print(f"CPT curve, Eslami & Fellenius, the same:             {figures['cpt_curve_ef_ms']:.3f} ms")
    print(f"LCPC curve / soil-parameter curve, same run:          {figures['cpt_vs_soil_curve']:.2f}")
    print(f"share of LCPC windows that drop a reading:           {figures['cpt_windows_dropping']:.2f}")
