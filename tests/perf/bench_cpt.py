"""Benchmark of the capacity curve from a CPT sounding (issue 20): 1,200 toe levels from a
2,000-reading sounding, target under 1 ms as for the soil-parameter curve.

Run with ``python -m tests.perf.bench_cpt`` (or ``python -m tests.perf --only cpt --json
out.json``). Figures are medians of single calls; no timing is asserted anywhere.
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from design_core import Rules
from design_core.cpt import Sounding, cpt_capacity_curve

GROUND_LEVEL = 10.0
TOP_LEVEL = 9.0
DEPTHS = np.round(0.02 * np.arange(1, 2001), 6)  # 2,000 readings, 0.02 m apart, to 40 m
TOE_LEVELS = TOP_LEVEL - 0.025 * np.arange(1, 1201)  # 1,200 levels, 0.025 m apart, over 30 m


def sounding() -> Sounding:
    """An invented sounding: loose sand, soft clay, dense sand, with u_2 (no real site)."""
    d = DEPTHS
    qc = np.where(d < 8, 4.0 + 0.6 * d, np.where(d < 18, 1.2 + 0.04 * d, 15.0 + 0.3 * (d - 18)))
    qc = qc * (1.0 + 0.15 * np.sin(7.0 * d))  # a sounding is never smooth
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
    Fellenius, from the same 2,000-reading sounding and a 0.6 m bored pile."""
    s, rules = sounding(), Rules()
    lcpc = lambda: cpt_capacity_curve(s, 0.6, TOP_LEVEL, TOE_LEVELS, "bored", rules,  # noqa: E731
                                      method="lcpc")
    ef = lambda: cpt_capacity_curve(s, 0.6, TOP_LEVEL, TOE_LEVELS, "bored", rules,  # noqa: E731
                                    method="eslami_fellenius")
    lcpc(), ef()  # warm up
    return {"cpt_curve_ms": _median_ms(lcpc, 500), "cpt_curve_ef_ms": _median_ms(ef, 500)}


if __name__ == "__main__":
    figures = run()
    print(f"CPT curve, LCPC, 1,200 levels from 2,000 readings:   {figures['cpt_curve_ms']:.3f} ms "
          "(target < 1 ms)")
    print(f"CPT curve, Eslami & Fellenius, the same:             {figures['cpt_curve_ef_ms']:.3f} ms")
