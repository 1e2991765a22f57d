"""Web benchmark: 16 simulated tablets against the production WSGI server (issue 8).

Run alone with ``python -m tests.perf --only web``. What it does:

1. builds an invented 2,000-pile project in a temporary data folder with the app's own query
   functions (``sitegen.build_site``), one inspector login per tablet;
2. starts ``toeline serve`` (waitress, as in ``deploy/``) on 127.0.0.1 as a subprocess;
3. a pool of 16 client threads, each a ``requests`` session signed in as its own inspector,
   runs a mixed load for 30 s, each tablet pausing 0.5 to 1.5 s (uniform; a person at a
   tablet, as in locust's ``wait_time``) between requests: 30 % record PUT of a pile of the
   tablet's own caps (as at one rig; the server validates, rechecks the pile and its recorded
   cap-mates and stores a new version), 40 % pile list (``GET /api/v1/projects/<id>/piles``, all 2,000 piles), 30 % pile
   page (the rig page of one pile when the app has one, else its rig data
   ``GET /api/v1/projects/<id>/piles/<mark>``);
4. then, with the same pool on the same server and no pauses: 15 s of the same mix (the busy
   figures: every tablet firing back to back, the server saturated), then 10 s of PUTs only and
   10 s of ``/healthz`` only, taken in turns of 5 s (PUT, healthz, PUT, healthz) so a change in
   the machine's speed during the run weighs on both: ``put_vs_healthz`` is PUTs per second
   over /healthz requests per second.

``web_server_cpu_share`` is the server's CPU time over the wall time of the mixed phase (1.0 =
one core busy); ``put_server_cpu_ms`` the server's CPU time per PUT in the PUT-only phase.

Every answer other than 200, every timeout and every exception counts in ``web_errors``, with
one exception: a 409 conflict whose ``server.version`` is newer than the tablet's copy is the
right answer when the server itself gave a cap-mate a new version (its shares changed when
another pile of the cap was surveyed out of position); the tablet then sends its save again
on the server's version with the same client id, as the outbox's "keep mine" does
(``static/outbox.js``), and ``web_conflicts`` counts these.
Loops are bounded by time and by count. Latencies are wall times seen by the client.
"""

from __future__ import annotations

import random
import shutil
import statistics
import tempfile
import threading
import time
import uuid

import requests

from tests.perf import sitegen

TABLETS = 16
N_PILES = 2000
MIX_S = 30.0
SOLO_S = 10.0              # of PUTs only, and of /healthz only
SOLO_ROUNDS = 2            # taken in turns, SOLO_S / SOLO_ROUNDS each
BUSY_S = 15.0
PAUSE_S = (0.5, 1.5)
MAX_REQUESTS_PER_TABLET = 50_000
TIMEOUT_S = 30.0
MIX = (("put", 0.3), ("list", 0.4), ("page", 0.3))


def _p95(values: list[float]) -> float:
    if not values:
        return float("nan")
    if len(values) < 20:
        return max(values)
    return statistics.quantiles(values, n=20, method="inclusive")[18]


def pile_page_url(data_dir: str, project_id: int, mark: str) -> str | None:
    """The address of the pile's own page (the rig screen) when the app has one, else None."""
    from flask import url_for

    from fieldapp import create_app

    app = create_app(data_dir=data_dir)
    candidates = [rule for rule in app.url_map.iter_rules()
                  if "GET" in rule.methods and {"project_id", "mark"} <= set(rule.arguments)
                  and not rule.rule.startswith("/api/") and rule.endpoint.split(".")[0] in ("rig", "piles")]
    if not candidates:
        return None
    candidates.sort(key=lambda r: (r.endpoint.split(".")[0] != "rig", len(r.rule)))
    with app.test_request_context():
        return url_for(candidates[0].endpoint, project_id=project_id, mark=mark)


class Tablet:
    """One simulated tablet: a signed-in session, its own piles, and its timings."""

    def __init__(self, base: str, site: sitegen.Site, index: int, page_template: str | None):
        self.base = base
        self.project = site.project_id
        self.session = sitegen.login(base, site.inspectors[index])
        caps = sorted({p.cap for p in site.piles})
        own = set(caps[index::TABLETS])
        self.mine = [p for p in site.piles if p.cap in own]
        self.everyone = site.piles
        self.versions: dict[str, int] = {}
        self.rng = random.Random(1000 + index)
        self.page_template = page_template
        self.times: dict[str, list[float]] = {}
        self.errors: list[str] = []
        self.conflicts = 0

    def work(self, kinds: tuple[str, ...], seconds: float, start: threading.Event,
             pause: tuple[float, float] | None = None) -> None:
        """Make requests of ``kinds`` (by MIX weights) for ``seconds`` once ``start`` is set,
        waiting a uniform ``pause`` (s) after each when given."""
        self.times = {"put": [], "list": [], "page": [], "healthz": []}
        start.wait()
        until = time.perf_counter() + seconds
        weights = [w for name, w in MIX if name in kinds]
        for _ in range(MAX_REQUESTS_PER_TABLET):
            if time.perf_counter() >= until:
                break
            kind = kinds[0] if len(kinds) == 1 else self.rng.choices(kinds, weights)[0]
            try:
                getattr(self, "_" + kind)()
            except requests.RequestException as exc:
                self.errors.append(f"{kind}: {type(exc).__name__}: {exc}")
            if pause:
                time.sleep(min(self.rng.uniform(*pause), max(0.0, until - time.perf_counter())))

    def _timed(self, kind: str, method: str, url: str, **kw) -> requests.Response:
        t0 = time.perf_counter()
        r = self.session.request(method, url, timeout=TIMEOUT_S, stream=True, **kw)
        # One read of the whole body: requests' own ``content`` loops in 10 kB pieces, and with
        # 16 client threads on one GIL that loop, not the server, made a 0.9 MB answer slow.
        r._content = r.raw.read(decode_content=True)
        r.close()  # the connection goes back to the session's pool
        self.times[kind].append((time.perf_counter() - t0) * 1e3)
        if r.status_code == 409 and kind == "put" and self._server_moved_on(r):
            return r
        if r.status_code != 200:
            self.errors.append(f"{kind} {url}: HTTP {r.status_code} {r.text[:200]}")
        return r

    def _server_moved_on(self, r: requests.Response) -> bool:
        """A 409 because the server gave the pile a newer version than the tablet's copy."""
        try:
            body = r.json()
        except ValueError:
            return False
        version = (body.get("server") or {}).get("version")
        return body.get("error") == "conflict" and isinstance(version, int)

    def _put(self) -> None:
        pile = self.rng.choice(self.mine)
        record = sitegen.record_for(pile, self.rng, short=self.rng.random() < 0.2,
                                    progress=self.rng.choice(("concreted", "logged")))
        url = f"{self.base}/api/v1/projects/{self.project}/piles/{pile.mark}/record"
        client_id = str(uuid.uuid4())
        for _ in range(2):  # the second time only after a conflict (module docstring)
            body = {"client_id": client_id, "base_version": self.versions.get(pile.mark),
                    "record": record}
            r = self._timed("put", "PUT", url, json=body)
            if r.status_code == 200:
                self.versions[pile.mark] = r.json()["version"]
                return
            if r.status_code != 409 or not self._server_moved_on(r):
                return
            self.conflicts += 1
            self.versions[pile.mark] = r.json()["server"]["version"]

    def _list(self) -> None:
        self._timed("list", "GET", f"{self.base}/api/v1/projects/{self.project}/piles")

    def _page(self) -> None:
        mark = self.rng.choice(self.everyone).mark
        if self.page_template:
            url = self.base + self.page_template.replace("__MARK__", mark)
        else:
            url = f"{self.base}/api/v1/projects/{self.project}/piles/{mark}"
        self._timed("page", "GET", url)

    def _healthz(self) -> None:
        self._timed("healthz", "GET", f"{self.base}/healthz")


def _phase(tablets: list[Tablet], kinds: tuple[str, ...], seconds: float,
           pause: tuple[float, float] | None = None) -> tuple[dict, float]:
    """Run one phase with one thread per tablet; returns {kind: [ms, ...]} and the wall time."""
    start = threading.Event()
    threads = [threading.Thread(target=t.work, args=(kinds, seconds, start, pause), daemon=True) for t in tablets]
    for th in threads:
        th.start()
    t0 = time.perf_counter()
    start.set()
    for th in threads:
        th.join(seconds + TIMEOUT_S + 30)
    wall = time.perf_counter() - t0
    return {k: [x for t in tablets for x in t.times[k]] for k in ("put", "list", "page", "healthz")}, wall


def run() -> dict:
    """Build the site, start the server, run the three phases; the figures of the module doc."""
    folder = tempfile.mkdtemp(prefix="toeline-bench-web-")
    try:
        site = sitegen.build_site(folder, N_PILES, TABLETS)
        page = pile_page_url(folder, site.project_id, "__MARK__")
        print(f"  pile page: {page or 'GET /api/v1/projects/<id>/piles/<mark> (no rig page in the app yet)'}")
        with sitegen.Server(folder) as server:
            tablets = [Tablet(server.base, site, i, page) for i in range(TABLETS)]
            # warm the server's imports and caches with one request of each kind (not timed)
            tablets[0].times = {"put": [], "list": [], "page": [], "healthz": []}
            tablets[0]._list(), tablets[0]._page(), tablets[0]._put()
            cpu0 = server.cpu_s()
            mixed, mix_wall = _phase(tablets, ("put", "list", "page"), MIX_S, PAUSE_S)
            mix_cpu = server.cpu_s() - cpu0
            busy, busy_wall = _phase(tablets, ("put", "list", "page"), BUSY_S)
            # PUT-only and /healthz-only in turns (SOLO_ROUNDS of each), so a machine that
            # slows down or speeds up during the run weighs on both sides of the ratio alike
            puts, health = {"put": []}, {"healthz": []}
            put_wall = health_wall = put_cpu = 0.0
            for _ in range(SOLO_ROUNDS):
                cpu0 = server.cpu_s()
                got, wall = _phase(tablets, ("put",), SOLO_S / SOLO_ROUNDS)
                put_cpu += server.cpu_s() - cpu0
                puts["put"] += got["put"]
                put_wall += wall
                got, wall = _phase(tablets, ("healthz",), SOLO_S / SOLO_ROUNDS)
                health["healthz"] += got["healthz"]
                health_wall += wall
    finally:
        shutil.rmtree(folder, ignore_errors=True)

    errors = [e for t in tablets for e in t.errors]
    for line in errors[:5]:
        print("  error:", line)
    put_mix, list_mix, page_mix = mixed["put"], mixed["list"], mixed["page"]
    put_solo, healthz = puts["put"], health["healthz"]
    put_rate, health_rate = len(put_solo) / put_wall, len(healthz) / health_wall
    print(f"  mixed {mix_wall:.1f} s: {len(put_mix)} PUT, {len(list_mix)} list, {len(page_mix)} page "
          f"({(len(put_mix) + len(list_mix) + len(page_mix)) / mix_wall:.1f} requests/s); the server "
          f"used {mix_cpu:.1f} s of CPU ({100 * mix_cpu / mix_wall:.0f} % of one core)")
    print(f"  busy mix {busy_wall:.1f} s: {sum(len(v) for v in busy.values()) / busy_wall:.1f} requests/s, "
          f"p95 PUT {_p95(busy['put']):.0f} ms, list {_p95(busy['list']):.0f} ms, page {_p95(busy['page']):.0f} ms")
    print(f"  PUT only: {put_rate:.1f}/s (p95 {_p95(put_solo):.0f} ms); /healthz only: {health_rate:.1f}/s")
    return {
        "put_p95_ms": _p95(put_mix),
        "list_p95_ms": _p95(list_mix),
        "page_p95_ms": _p95(page_mix),
        "put_median_ms": statistics.median(put_mix) if put_mix else float("nan"),
        "list_median_ms": statistics.median(list_mix) if list_mix else float("nan"),
        "web_requests_per_s": (len(put_mix) + len(list_mix) + len(page_mix)) / mix_wall,
        "put_p95_busy_ms": _p95(busy["put"]),
        "list_p95_busy_ms": _p95(busy["list"]),
        "put_per_s": put_rate,
        "healthz_per_s": health_rate,
        "put_vs_healthz": put_rate / health_rate if health_rate else float("nan"),
        "web_server_cpu_share": mix_cpu / mix_wall,
        "put_server_cpu_ms": put_cpu / len(put_solo) * 1e3 if put_solo else float("nan"),
        "web_errors": len(errors),
        "web_conflicts": sum(t.conflicts for t in tablets),
    }


if __name__ == "__main__":
    for name, value in run().items():
        print(f"{name:<22}{value:12.4g}")
