"""Run every benchmark in one go and print a table of figures, targets and ratios.

    python -m tests.perf                 # all benchmarks
    python -m tests.perf --only axial    # the modules whose name contains "axial"
    python -m tests.perf --json out.json # also write the figures as JSON (numbers only)

Each ``tests/perf/bench_*.py`` has ``run() -> dict`` of figures. Targets (issue 8) are listed
below; the table says whether each figure met its target on this machine. Nothing here is a
test: timing never fails the test suite.
"""

from __future__ import annotations

import argparse
import importlib
import json
import math
import os
import platform
import pkgutil
import sys
import time
from pathlib import Path

# As the app does (fieldapp/__init__.py): one BLAS thread, set before anything loads numpy, so
# the design_core figures are measured as the server runs them.
os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

# figure -> (target, "max" or "min", unit)
TARGETS = {
    "recheck_ms": (2.0, "max", "ms"),
    "project_5000_s": (2.0, "max", "s"),
    "curve_ms": (1.0, "max", "ms"),
    "cpt_curve_ms": (1.0, "max", "ms"),
    "put_p95_ms": (50.0, "max", "ms"),
    "list_p95_ms": (100.0, "max", "ms"),
    "put_vs_healthz": (0.25, "min", "ratio"),
    "web_errors": (0, "max", "count"),
    "pg_put_p95_ms": (50.0, "max", "ms"),
    "pg_put_vs_healthz": (0.5, "min", "ratio"),
    "pg_web_errors": (0, "max", "count"),
    "sqlite_2w_put_vs_healthz": (0.4, "min", "ratio"),
    "photo_ms": (300.0, "max", "ms"),
    "photo_vs_full_decode": (0.8, "max", "ratio"),
    "record_1000_s": (60.0, "max", "s"),
    "record_peak_mb": (400.0, "max", "MB"),
    "record_5000_vs_1000": (5.5, "max", "ratio"),
    "record_20000_peak_mb": (300.0, "max", "MB"),
    "record_20000_vs_1000": (22.0, "max", "ratio"),
    "sync_s": (25.0, "max", "s"),
    "sync_duplicates": (0, "max", "count"),
    # issue 24: site scale (20,000 piles)
    "piles_page_20000_ms": (300.0, "max", "ms"),
    "piles_page_20000_kb": (300.0, "max", "KB"),
    "bundle_20000_gzip_mb": (3.0, "max", "MB"),
    "bundle_delta_10_kb": (50.0, "max", "KB"),
    "project_20000_s": (6.0, "max", "s"),
    "rules_change_20000_s": (60.0, "max", "s"),
    "save_p95_during_ms": (200.0, "max", "ms"),
    "save_failures_during": (0, "max", "count"),
}


def cpu_model() -> str:
    """The processor's model name (from /proc/cpuinfo on Linux), else the architecture."""
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                return line.split(":", 1)[1].strip()
    except OSError:
        pass
    return platform.processor() or platform.machine()


def load_average() -> float:
    """The 1-minute load average (other work on the machine slows every figure)."""
    try:
        return os.getloadavg()[0]
    except OSError:
        return float("nan")


def machine() -> str:
    """A one-line description of the machine the figures came from."""
    return (f"{cpu_model()}, {os.cpu_count()} cores, "
            f"Python {platform.python_version()}, {platform.system()} {platform.release()}")


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tests.perf")
    parser.add_argument("--json", dest="json_path", help="write the figures to this JSON file")
    parser.add_argument("--only", default="", help="run only modules whose name contains this")
    args = parser.parse_args(argv)

    here = Path(__file__).resolve().parent
    figures: dict[str, float] = {}
    failed: list[str] = []
    load_start = load_average()
    for info in sorted(pkgutil.iter_modules([str(here)]), key=lambda m: m.name):
        if not info.name.startswith("bench_") or args.only not in info.name:
            continue
        started = time.perf_counter()
        print(f"running {info.name} (load average {load_average():.1f}) ...", flush=True)
        try:
            module = importlib.import_module(f"tests.perf.{info.name}")
            result = module.run()
        except Exception as exc:  # noqa: BLE001 - one broken benchmark must not hide the others
            failed.append(info.name)
            print(f"  FAILED: {type(exc).__name__}: {exc}", flush=True)
            continue
        print(f"  done in {time.perf_counter() - started:.1f} s", flush=True)
        if not result:
            print("  (no figures: see the module's docstring)")
        figures.update({k: float(v) for k, v in result.items()})

    print()
    print(f"machine: {machine()}")
    print(f"load average (1 min): {load_start:.1f} at the start, {load_average():.1f} at the end "
          f"(above {os.cpu_count()} means other work shared the cores)")
    print(f"{'figure':<24}{'value':>14}  {'target':>14}  met")
    missing = [name for name in TARGETS if name not in figures and not args.only]
    for name, value in figures.items():
        target, sense, unit = TARGETS.get(name, (None, "", ""))
        if target is None:
            shown, met = "-", ""
        else:
            shown = f"{'<=' if sense == 'max' else '>='} {target:g} {unit}"
            met = "yes" if (value <= target if sense == "max" else value >= target) else "NO"
        print(f"{name:<24}{value:>14.4g}  {shown:>14}  {met}")
    for name in missing:
        print(f"{name:<24}{'-':>14}  {'':>14}  not measured")
    if failed:
        print("failed:", ", ".join(failed))
    if args.json_path:
        clean = {k: v for k, v in figures.items() if math.isfinite(v)}  # numbers only
        Path(args.json_path).write_text(json.dumps(clean, indent=1))
        print(f"figures written to {args.json_path}")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
