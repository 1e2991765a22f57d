"""Certification record benchmark (issues 8 and 16): the PDF of 1,000 piles, of 5,000 and of
20,000 (set ``TOELINE_BENCH_RECORD_SIZES=1000,20000`` to run only some; 1,000 is always run).

For each size an invented project is made in a temporary data folder (``sitegen.build_site``)
and every pile gets an as-built record through the one save path (``saving.save_record``:
validated, rechecked, stored; about one in five stops short of its design toe and needs the
engineer) and one photo through the one upload path (``photos.add_photo``). The photos are
320 x 240 JPEGs (the size of the stored thumbnail, which is all the record prints, so a larger
source would only slow the set-up) with different pixels for every pile, so each sheet embeds
its own image. The set-up is not measured, so it skips the waits for the disk: its connection
runs with ``synchronous = OFF`` and ``os.fsync`` is a no-op while it runs (photo files).

The record is then built by ``toeline record PROJECT_ID OUT.pdf`` in a child process run under
``/usr/bin/time -v`` (Debian's ``time`` package): ``record_1000_s`` is its elapsed time
(Python start and imports included) and ``record_peak_mb`` its maximum resident set size.
``record_5000_vs_1000`` is the 5,000-pile time over the 1,000-pile time (linear: 5);
``record_20000_s``, ``record_20000_peak_mb`` and ``record_20000_vs_1000`` (linear: 20) the
same for 20,000 piles: the record is built in parts of 200 piles and joined, so the peak should
stay under 300 MB at any size.
Without ``/usr/bin/time`` the child's peak comes from ``resource.getrusage(RUSAGE_CHILDREN)``.
"""

from __future__ import annotations

import io
import os
import random
import re
import resource
import shutil
import subprocess
import sys
import tempfile
import time
import uuid
from pathlib import Path

import numpy as np
from PIL import Image

from tests.perf import sitegen

SIZES = tuple(sorted({1000} | {int(n) for n in os.environ.get("TOELINE_BENCH_RECORD_SIZES",
                                                                  "1000,5000,20000").split(",")}))
TIME_BIN = Path("/usr/bin/time")


def _photo(base: np.ndarray, n: int) -> bytes:
    """A 320 x 240 JPEG whose pixels differ for every ``n`` (the base picture shifted)."""
    pixels = np.roll(base, shift=(n * 7) % base.shape[1], axis=1)
    pixels[: 4 + n % 40, : 4 + (n // 40) % 60] = (n * 37) % 256
    out = io.BytesIO()
    Image.fromarray(pixels, "RGB").save(out, "JPEG", quality=85)
    return out.getvalue()


def fill(folder: str, n_piles: int) -> int:
    """Make the project with a record and a photo on every pile; returns the project id."""
    from fieldapp import create_app

    site = sitegen.build_site(folder, n_piles, 1)
    app = create_app(data_dir=folder)
    rng = random.Random(n_piles)
    y, x = np.mgrid[0:240, 0:320]
    base = np.stack([(x * 0.4 + k * 60) % 256 for k in range(3)], axis=-1).astype(np.uint8)
    base[(y // 20 + x // 20) % 2 == 0] //= 2
    real_fsync = os.fsync
    os.fsync = lambda fd: None  # set-up only (module docstring); put back below
    try:
        _fill(app, site, rng, base)
    finally:
        os.fsync = real_fsync
    return site.project_id


def _fill(app, site: sitegen.Site, rng: random.Random, base: np.ndarray) -> None:
    from fieldapp import db, photos, saving
    from fieldapp.queries import piles as piles_q
    from fieldapp.queries import users

    with app.app_context():
        conn = db.get_db()
        conn.execute("PRAGMA synchronous = OFF")  # set-up only: this connection, not measured
        user = users.by_email(conn, site.inspectors[0])
        for i, facts in enumerate(site.piles):
            pile = piles_q.get_pile(conn, site.project_id, facts.mark)
            record = sitegen.record_for(facts, rng, short=rng.random() < 0.2)
            saving.save_record(conn, site.project_id, pile, user, uuid.uuid4().hex, None, record)
            photos.add_photo(conn, site.project_id, pile, user, uuid.uuid4().hex, "finished",
                             f"{facts.mark} finished (invented)", _photo(base, i), app.config["PHOTO_DIR"])


def build_record(folder: str, project_id: int) -> tuple[float, float, float, int]:
    """Run ``toeline record`` in a child process: (elapsed s, CPU s, peak resident MB, PDF bytes)."""
    out = Path(folder) / "record.pdf"
    cmd = [sys.executable, "-m", "fieldapp.cli", "--data", folder, "record", str(project_id), str(out), "--quiet"]
    if TIME_BIN.exists():
        cmd = [str(TIME_BIN), "-v"] + cmd
    t0 = time.perf_counter()
    done = subprocess.run(cmd, cwd=sitegen.ROOT, capture_output=True, text=True, timeout=3600)
    elapsed = time.perf_counter() - t0
    if done.returncode != 0:
        raise RuntimeError(f"toeline record failed:\n{done.stdout[-2000:]}\n{done.stderr[-2000:]}")
    peak = re.search(r"Maximum resident set size \(kbytes\): (\d+)", done.stderr)
    cpu = sum(float(m) for m in re.findall(r"(?:User|System) time \(seconds\): ([\d.]+)", done.stderr))
    if peak:
        peak_mb = int(peak.group(1)) / 1024
        clock = re.search(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): (?:(\d+):)?(\d+):([\d.]+)", done.stderr)
        if clock:
            elapsed = int(clock.group(1) or 0) * 3600 + int(clock.group(2)) * 60 + float(clock.group(3))
    else:  # no /usr/bin/time: the largest child so far (kbytes on Linux)
        usage = resource.getrusage(resource.RUSAGE_CHILDREN)
        peak_mb, cpu = usage.ru_maxrss / 1024, usage.ru_utime + usage.ru_stime
    print(f"  {done.stdout.strip().splitlines()[0] if done.stdout.strip() else ''}")
    return elapsed, cpu, peak_mb, out.stat().st_size


def run() -> dict:
    """Fill and build each size; the figures of the module docstring."""
    figures = {}
    for n in SIZES:
        folder = tempfile.mkdtemp(prefix=f"toeline-bench-record-{n}-")
        try:
            t0 = time.perf_counter()
            project_id = fill(folder, n)
            print(f"  {n} piles with records and photos made in {time.perf_counter() - t0:.0f} s")
            elapsed, cpu, peak_mb, size = build_record(folder, project_id)
        finally:
            shutil.rmtree(folder, ignore_errors=True)
        print(f"  record of {n} piles: {elapsed:.1f} s ({cpu:.1f} s CPU), peak {peak_mb:.0f} MB, "
              f"{size / 1e6:.1f} MB PDF")
        figures[f"record_{n}_s"] = elapsed
        figures[f"record_{n}_cpu_s"] = cpu
        figures[f"record_{n}_peak_mb"] = peak_mb
    figures["record_peak_mb"] = figures["record_1000_peak_mb"]
    for n in SIZES[1:]:
        figures[f"record_{n}_vs_1000"] = figures[f"record_{n}_s"] / figures["record_1000_s"]
        # the same ratio in CPU time: on a shared machine one of the two wall times may have
        # waited for a core much longer than the other
        figures[f"record_{n}_vs_1000_cpu"] = figures[f"record_{n}_cpu_s"] / figures["record_1000_cpu_s"]
    return figures


if __name__ == "__main__":
    for name, value in run().items():
        print(f"{name:<22}{value:10.4g}")
