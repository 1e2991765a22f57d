"""Benchmark of the axial capacity (issue 3): one call, and a 1,200-level capacity curve.

Run with ``python -m tests.perf.bench_axial``. Target: capacity_curve under 1 ms for 1,200 toe
levels at 0.05 m over 60 m. Figures are medians; no timing is asserted anywhere.
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from design_core import GroundModel, Layer, Rules, axial_capacity, capacity_curve
from design_core.axial import clear_shared_profiles

TOP_LEVEL = 9.0
TOE_LEVELS = TOP_LEVEL - 0.05 * np.arange(1, 1201)  # 1,200 levels, 0.05 m apart, over 60 m


def ground() -> GroundModel:
    """An invented five-layer profile with every method in it (fill, sand, clay, sand, rock)."""
    return GroundModel([
        Layer(10.0, 7.0, "ignore", 17.0),
        Layer(7.0, 2.0, "cohesionless", 19.0, phi=32.0),
        Layer(2.0, -20.0, "cohesive", 19.0, cu=50.0, cu_bottom=180.0),
        Layer(-20.0, -35.0, "cohesionless", 20.0, phi=36.0),
        Layer(-35.0, -55.0, "rock", 23.0, shaft_friction=250.0, base_pressure=6000.0),
    ], 5.0)


def _median_ms(fn, repeat: int, number: int) -> float:
    """Median wall time of one call of ``fn`` in ms over ``repeat`` batches of ``number`` calls."""
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        for _ in range(number):
            fn()
        times.append((time.perf_counter() - t0) / number)
    return statistics.median(times) * 1e3


def _median_cold_ms(fn, repeat: int) -> float:
    """Median wall time (ms) of ``repeat`` single calls of ``fn``, each with nothing kept from
    the call before (``shaft_profile`` keeps profiles for equal inputs; forgotten off the clock)."""
    times = []
    for _ in range(repeat):
        clear_shared_profiles()
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times) * 1e3


def run() -> dict:
    """Time one axial_capacity call, one 1,200-level capacity_curve and 1,200 separate calls.

    ``axial_ms`` and ``curve_ms`` start from nothing each call (the figures against the targets);
    ``curve_warm_ms`` reuses the shaft profile of the call before (same ground, diameter, top)."""
    g, rules = ground(), Rules()
    fn_axial = lambda: axial_capacity(g, 0.6, TOP_LEVEL, -40.0, rules=rules)  # noqa: E731
    fn_curve = lambda: capacity_curve(g, 0.6, TOP_LEVEL, TOE_LEVELS, rules=rules)  # noqa: E731
    fn_curve(), fn_axial()  # warm up
    axial_ms = _median_cold_ms(fn_axial, repeat=350)
    curve_ms = _median_cold_ms(fn_curve, repeat=350)
    curve_warm_ms = _median_ms(fn_curve, repeat=7, number=50)
    t0 = time.perf_counter()
    for toe in TOE_LEVELS:
        clear_shared_profiles()
        axial_capacity(g, 0.6, TOP_LEVEL, float(toe), rules=rules)
    loop_ms = (time.perf_counter() - t0) * 1e3
    return {"axial_ms": axial_ms, "curve_ms": curve_ms, "curve_warm_ms": curve_warm_ms,
            "curve_vs_loop": curve_ms / loop_ms, "loop_ms": loop_ms}


if __name__ == "__main__":
    figures = run()
    print(f"axial_capacity, one call:             {figures['axial_ms']:.3f} ms")
    print(f"capacity_curve, 1,200 levels:         {figures['curve_ms']:.3f} ms (target < 1 ms)")
    print(f"the same curve again (kept profile):  {figures['curve_warm_ms']:.3f} ms")
    print(f"1,200 separate axial_capacity calls:  {figures['loop_ms']:.1f} ms")
    print(f"curve / loop ratio:                   {figures['curve_vs_loop']:.5f} "
          f"({1 / figures['curve_vs_loop']:.0f} x faster)")
