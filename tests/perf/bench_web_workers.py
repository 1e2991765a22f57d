"""Web benchmark on several worker processes: gunicorn (deploy/gunicorn.conf.py) on PostgreSQL
with 4 workers, and on SQLite with 2 workers.

Run alone with ``python -m tests.perf --only web_workers``. The load is bench_web's (16
simulated tablets, the same site generator, the same phases and the same counting of errors and
conflicts; see its docstring); only the server differs:

* **SQLite, 2 workers**: ``gunicorn -c deploy/gunicorn.conf.py`` with ``TOELINE_WORKERS=2`` on a
  data folder; figure ``sqlite_2w_put_vs_healthz`` (PUTs per second over /healthz per second,
  the same server and run) and its p95 and error count.
* **PostgreSQL, 4 workers**: the same on ``TOELINE_DATABASE_URL``; figures ``pg_put_p95_ms``
  (PUT p95 in the mixed phase, wall time seen by the client), ``pg_put_vs_healthz`` and
  ``pg_web_errors``. The database is ``TOELINE_BENCH_DATABASE_URL`` when given (an empty
  database), else a throwaway PostgreSQL 15 cluster started here in a temporary folder on
  127.0.0.1 with the server's default durability (fsync on, synchronous_commit on), stopped at
  the end.

Figures only; nothing is asserted.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
import time
from contextlib import contextmanager
from pathlib import Path

import psycopg
import requests

from fieldapp import db
from tests.perf import bench_web, sitegen

ROOT = Path(__file__).resolve().parents[2]
PG_BIN = Path("/usr/lib/postgresql/15/bin")


class Gunicorn:
    """gunicorn with deploy/gunicorn.conf.py as a subprocess on a free loopback port."""

    def __init__(self, data_dir: str, workers: int, database_url: str | None, start_timeout_s: float = 60.0):
        self.port = sitegen.free_port()
        self.base = f"http://127.0.0.1:{self.port}"
        env = {**os.environ, "PYTHONPATH": str(ROOT), "TOELINE_DATA": data_dir, "TOELINE_WORKERS": str(workers),
               "TOELINE_BIND": f"127.0.0.1:{self.port}", "TOELINE_ACCESS_LOG": "/dev/null"}
        env.pop("TOELINE_DATABASE_URL", None)
        if database_url:
            env["TOELINE_DATABASE_URL"] = database_url
        self.log = open(Path(data_dir) / "gunicorn.log", "wb")  # noqa: SIM115 - closed in stop()
        self.proc = subprocess.Popen([sys.executable, "-m", "gunicorn", "-c", str(ROOT / "deploy" / "gunicorn.conf.py")],
                                     cwd=ROOT, env=env, stdout=self.log, stderr=subprocess.STDOUT)
        deadline = time.monotonic() + start_timeout_s
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"gunicorn stopped at start; see {self.log.name}")
            try:
                if requests.get(self.base + "/healthz", timeout=1).ok:
                    return
            except requests.RequestException:
                pass
            time.sleep(0.2)
        self.stop()
        raise RuntimeError(f"gunicorn did not answer /healthz within {start_timeout_s:g} s")

    def cpu_s(self) -> float:
        """Not measured across processes here (bench_web has the single-process figure)."""
        return 0.0

    def stop(self) -> None:
        """Stop the gunicorn master this object started (by its pid); it stops its workers."""
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(timeout=10)
        self.log.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.stop()


@contextmanager
def throwaway_cluster():
    """A PostgreSQL 15 cluster in a temporary folder on 127.0.0.1 (durable settings); its URL."""
    folder = tempfile.mkdtemp(prefix="toeline-bench-pg-")
    shutil.chown(folder, "postgres")
    port = sitegen.free_port()
    data = Path(folder) / "data"
    as_pg = ["runuser", "-u", "postgres", "--"]
    subprocess.run([*as_pg, str(PG_BIN / "initdb"), "-D", str(data), "-U", "postgres", "--auth=trust"],
                   check=True, stdout=subprocess.DEVNULL)
    subprocess.run([*as_pg, str(PG_BIN / "pg_ctl"), "-D", str(data), "-l", f"{folder}/server.log", "-w", "-o",
                    f"-c listen_addresses=127.0.0.1 -p {port} -k {folder} -c max_connections=200", "start"],
                   check=True, stdout=subprocess.DEVNULL)
    try:
        with psycopg.connect(f"postgresql://postgres@127.0.0.1:{port}/postgres", autocommit=True) as conn:
            conn.execute("CREATE DATABASE toeline_bench")
        yield f"postgresql://postgres@127.0.0.1:{port}/toeline_bench"
    finally:
        subprocess.run([*as_pg, str(PG_BIN / "pg_ctl"), "-D", str(data), "-m", "fast", "-w", "stop"],
                       stdout=subprocess.DEVNULL)
        shutil.rmtree(folder, ignore_errors=True)


def _one(workers: int, database_url: str | None) -> dict:
    """Build the site on the backend, serve it with gunicorn, run bench_web's phases."""
    folder = tempfile.mkdtemp(prefix="toeline-bench-workers-")
    saved = os.environ.get("TOELINE_DATABASE_URL")
    try:
        if database_url:
            os.environ["TOELINE_DATABASE_URL"] = database_url
        else:
            os.environ.pop("TOELINE_DATABASE_URL", None)
        site = sitegen.build_site(folder, bench_web.N_PILES, bench_web.TABLETS)
        page = bench_web.pile_page_url(folder, site.project_id, "__MARK__")
        with Gunicorn(folder, workers, database_url) as server:
            tablets = [bench_web.Tablet(server.base, site, i, page) for i in range(bench_web.TABLETS)]
            tablets[0].times = {"put": [], "list": [], "page": [], "healthz": []}
            tablets[0]._list(), tablets[0]._page(), tablets[0]._put()
            mixed, mix_wall = bench_web._phase(tablets, ("put", "list", "page"), bench_web.MIX_S, bench_web.PAUSE_S)
            puts, health, put_wall, health_wall = [], [], 0.0, 0.0
            for _ in range(bench_web.SOLO_ROUNDS):
                got, wall = bench_web._phase(tablets, ("put",), bench_web.SOLO_S / bench_web.SOLO_ROUNDS)
                puts += got["put"]
                put_wall += wall
                got, wall = bench_web._phase(tablets, ("healthz",), bench_web.SOLO_S / bench_web.SOLO_ROUNDS)
                health += got["healthz"]
                health_wall += wall
    finally:
        if saved is None:
            os.environ.pop("TOELINE_DATABASE_URL", None)
        else:
            os.environ["TOELINE_DATABASE_URL"] = saved
        db.close_pools()
        shutil.rmtree(folder, ignore_errors=True)
    errors = [e for t in tablets for e in t.errors]
    for line in errors[:5]:
        print("  error:", line)
    put_rate, health_rate = len(puts) / put_wall, len(health) / health_wall
    label = "PostgreSQL" if database_url else "SQLite"
    print(f"  {label}, {workers} gunicorn workers: mixed {len(mixed['put'])} PUT, {len(mixed['list'])} list, "
          f"{len(mixed['page'])} page in {mix_wall:.1f} s; PUT p95 {bench_web._p95(mixed['put']):.0f} ms, "
          f"list p95 {bench_web._p95(mixed['list']):.0f} ms; PUT only {put_rate:.1f}/s, /healthz {health_rate:.1f}/s")
    return {"put_p95_ms": bench_web._p95(mixed["put"]), "list_p95_ms": bench_web._p95(mixed["list"]),
            "put_vs_healthz": put_rate / health_rate if health_rate else float("nan"),
            "put_per_s": put_rate, "healthz_per_s": health_rate, "web_errors": len(errors),
            "web_conflicts": sum(t.conflicts for t in tablets)}


def run() -> dict:
    """SQLite with 2 workers, then PostgreSQL with 4; figures of the module docstring."""
    out = {f"sqlite_2w_{k}": v for k, v in _one(2, None).items()}
    given = os.environ.get("TOELINE_BENCH_DATABASE_URL")
    if given:
        out.update({f"pg_{k}": v for k, v in _one(4, given).items()})
    else:
        with throwaway_cluster() as url:
            out.update({f"pg_{k}": v for k, v in _one(4, url).items()})
    return out


if __name__ == "__main__":
    for name, value in run().items():
        print(f"{name:<28}{value:12.4g}")
