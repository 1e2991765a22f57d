"""Shared pieces of the benchmarks: an invented project of any size, the production server as a
subprocess on loopback, signed-in ``requests`` sessions and as-built records.

Nothing here is a benchmark (the runner only imports ``bench_*.py``). Every data set is made
in a temporary folder by the app's own query functions and thrown away afterwards.

* ``build_site(data_dir, n_piles, n_inspectors)`` -> ``Site``: the demo's three invented ground
  models and its 17 caps (1 to 6 piles, design toes from the capacity curve of the project's
  rules, ``fieldapp.demo.schedule``), repeated side by side with new marks until the project
  has ``n_piles`` piles (any remainder as single-pile caps), plus one inspector per tablet.
* ``Server(data_dir)``: ``toeline serve`` (waitress) on 127.0.0.1 at a free port, started as
  a subprocess and stopped by its own process id.
* ``login(base_url, email)`` -> a ``requests.Session`` signed in, with its CSRF token.
* ``record_for(pile, rng, short=False)``: a complete as-built record of the pile, built as
  designed with small deviations (``short=True``: the toe 1.5 m short of the design toe).
"""

from __future__ import annotations

import functools
import math
import os
import random
import re
import socket
import subprocess
import sys
import time
from dataclasses import dataclass, field
from pathlib import Path

import requests

ROOT = Path(__file__).resolve().parents[2]
PASSWORD = "bench-password-1"
ENGINEER = "engineer@bench.example"
_META = re.compile(r'<meta name="csrf-token" content="([^"]+)"')


@dataclass(frozen=True)
class PileFacts:
    """What a simulated tablet needs to write a record of a pile (design values, m and mm)."""

    mark: str
    platform_level: float
    cutoff_level: float
    toe_level: float
    diameter_mm: float
    easting: float
    northing: float
    exposure_class: str
    cage_length: float
    fc_mpa: float
    cap: str = ""


@dataclass
class Site:
    """The invented project: its id, piles in schedule order and the sign-in emails."""

    project_id: int
    piles: list[PileFacts]
    inspectors: list[str]
    engineer: str = ENGINEER
    extras: dict = field(default_factory=dict)


def build_site(data_dir: str | Path, n_piles: int, n_inspectors: int = 1) -> Site:
    """Make an invented project of ``n_piles`` piles in a fresh data folder (module docstring)."""
    from fieldapp import create_app, db, demo, pile_inputs
    from fieldapp.queries import audit, caps, ground, piles, projects, users

    app = create_app(data_dir=str(data_dir))
    # Every invented user has the same password: hash it once (Argon2 is slow on purpose).
    if not hasattr(users.hash_password, "cache_info"):
        users.hash_password = functools.lru_cache(maxsize=4)(users.hash_password)
    facts: list[PileFacts] = []
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            pid = projects.create(conn, "Benchmark wharf (invented)", "invented benchmark site",
                                  "site datum", "Bench Engineer")
            inspectors = []
            for k in range(n_inspectors):
                email = f"tablet{k + 1:02d}@bench.example"
                users.add_member(conn, pid, users.create(conn, email, PASSWORD, "inspector",
                                                         f"Tablet {k + 1}"))
                inspectors.append(email)
            users.add_member(conn, pid, users.create(conn, ENGINEER, PASSWORD, "engineer",
                                                     "Bench Engineer"))
            rules = projects.current_rules(conn, pid).rules
            gm_ids, gm_models, tops = [], [], []
            for name, description, water, layers in demo.GROUND_MODELS:
                gm_id = ground.save_model(conn, pid, name, water, layers, description)
                gm_ids.append(gm_id)
                gm_models.append(pile_inputs.load_ground(conn, gm_id))
                tops.append(layers[0]["top_level_m"])
            block = demo.schedule(gm_models, rules)  # 17 caps, consistent design toes
            singles = [(cap, pl) for cap, pl in block if len(pl) == 1]
            rep = 0
            while len(facts) < n_piles:
                room = n_piles - len(facts)
                full = sum(len(pl) for _, pl in block) <= room
                chosen = block if full else [singles[i % len(singles)] for i in range(room)]
                for i, (cap, pile_list) in enumerate(chosen):
                    dx = 200.0 * rep
                    dy = 0.0 if full else 40.0 + 3.0 * i
                    cap_id = caps.save_cap(conn, pid, f"{cap['mark']}-{rep:02d}" + ("" if full else f"s{i}"),
                                           cap)
                    for values in pile_list:
                        row = {k: v for k, v in values.items() if k not in ("cap_mark", "ground_index")}
                        row.update(mark=f"P{len(facts) + 1}", cap_id=cap_id,
                                   ground_model_id=gm_ids[values["ground_index"]],
                                   easting_m=round(values["easting_m"] + dx, 3),
                                   northing_m=round(values["northing_m"] + dy, 3))
                        piles.save_pile(conn, pid, row)
                        facts.append(PileFacts(
                            row["mark"], tops[values["ground_index"]], row["cutoff_level_m"],
                            row["toe_level_m"], row["diameter_mm"], row["easting_m"], row["northing_m"],
                            row["exposure_class"], row["cage_length_m"], row["fc_mpa"], str(cap_id)))
                rep += 1
            audit.append(conn, pid, "benchmark", "benchmark project created", "bench",
                         {"piles": len(facts)})
    return Site(pid, facts, inspectors)


def record_for(pile: PileFacts, rng, short: bool = False, progress: str = "logged") -> dict:
    """A complete as-built record of ``pile`` (every check can be made), with small deviations.

    ``short``: the bore stops 1.5 m above the design toe (the recheck then needs the engineer).
    The as-built position is the same in every record of a pile (it is surveyed once), so a
    later save of the pile does not move it again.
    """
    spot = random.Random(pile.mark)
    toe = pile.toe_level + (1.5 if short else -0.1 * rng.random())
    depth = round(pile.platform_level - toe, 3)
    d = pile.diameter_mm / 1000.0
    volume = round(math.pi / 4 * d * d * depth * (1.05 + 0.1 * rng.random()), 2)
    return {
        "progress": progress, "rig": "R2", "boring_start": "2026-03-02T08:00",
        "boring_end": "2026-03-02T10:30", "platform_level": pile.platform_level,
        "measured_depth": depth, "diameter_mm": pile.diameter_mm, "cutoff_level": pile.cutoff_level,
        "casting_level": round(pile.cutoff_level + 0.5, 3),
        "easting": round(pile.easting + spot.uniform(-0.04, 0.04), 3),
        "northing": round(pile.northing + spot.uniform(-0.04, 0.04), 3),
        "inclination": round(rng.uniform(0.0, 0.01), 4), "base_check": "sounding",
        "debris_mm": round(rng.uniform(0, 40)), "cage_length": pile.cage_length,
        "cover_mm": 80, "exposure_class": pile.exposure_class, "concrete_mpa": pile.fc_mpa,
        "concrete_volume_m3": volume, "pour_start": "2026-03-02T11:00", "pour_end": "2026-03-02T11:40",
        "deliveries": [{"docket": f"D-{rng.randrange(100000)}", "volume_m3": volume,
                        "batched_at": "2026-03-02T10:20", "discharged_at": "2026-03-02T11:05",
                        "slump_mm": 180}],
        "strata": [], "notes": "benchmark record (invented)",
    }


def free_port() -> int:
    """A free TCP port on loopback."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class Server:
    """``toeline serve`` (waitress, the production WSGI server) on 127.0.0.1 as a subprocess."""

    def __init__(self, data_dir: str | Path, threads: int = 8, start_timeout_s: float = 30.0):
        self.port = free_port()
        self.base = f"http://127.0.0.1:{self.port}"
        cmd = [sys.executable, "-m", "fieldapp.cli", "--data", str(data_dir), "serve",
               "--host", "127.0.0.1", "--port", str(self.port), "--threads", str(threads)]
        self.log = open(Path(data_dir) / "server.log", "wb")  # noqa: SIM115 - closed in stop()
        self.proc = subprocess.Popen(cmd, cwd=ROOT, stdout=self.log, stderr=subprocess.STDOUT,
                                     env={**os.environ, "PYTHONPATH": str(ROOT)})
        deadline = time.monotonic() + start_timeout_s
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError(f"the server stopped at start; see {self.log.name}")
            try:
                if requests.get(self.base + "/healthz", timeout=1).ok:
                    return
            except requests.RequestException:
                pass
            time.sleep(0.2)
        self.stop()
        raise RuntimeError(f"the server did not answer /healthz within {start_timeout_s:g} s")

    def cpu_s(self) -> float:
        """CPU time (user + system, s) the server process has used so far (Linux /proc)."""
        try:
            fields = Path(f"/proc/{self.proc.pid}/stat").read_text().rsplit(")", 1)[1].split()
        except OSError:
            return float("nan")
        return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")

    def stop(self) -> None:
        """Stop the server process this object started (by its pid) and wait for it."""
        if self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(timeout=10)
        self.log.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.stop()


def login(base_url: str, email: str, password: str = PASSWORD) -> requests.Session:
    """A session signed in as ``email``; ``session.headers`` carries its X-CSRFToken."""
    s = requests.Session()
    page = s.get(base_url + "/login", timeout=30)
    match = _META.search(page.text)
    if not match:
        raise RuntimeError("the login page has no csrf-token meta tag")
    r = s.post(base_url + "/login", data={"email": email, "password": password,
                                          "csrf_token": match.group(1)}, timeout=30,
               allow_redirects=False)
    if r.status_code not in (302, 303):
        raise RuntimeError(f"login as {email} failed: HTTP {r.status_code}")
    token = s.get(base_url + "/api/v1/session", timeout=30).json()["csrf_token"]
    s.headers["X-CSRFToken"] = token
    return s
