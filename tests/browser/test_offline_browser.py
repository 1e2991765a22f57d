"""Offline in headless Chromium (issue 7): the app opens with no network, records and photos
wait in the outbox across a browser restart, reach the server exactly once when the network
returns, a lost answer does not double a version, and a conflict is shown, never overwritten.

Playwright drives Debian's /usr/bin/chromium (never a downloaded browser). A persistent
profile folder stands for the tablet's browser, so "close the browser and open it again" is a
real restart of Chromium on the same profile. The server runs in a thread (Werkzeug) on the
test's own data folder; what reached it is checked through the API with a Flask test client.
The site is invented test data.
"""

from __future__ import annotations

import base64
import hashlib
import io
import time
import uuid

import pytest
from PIL import Image

from fieldapp import db
from fieldapp.queries import ground, piles
from tests.conftest import PASSWORD

pytestmark = pytest.mark.browser


LAYERS = [
    dict(top_level_m=50.0, bottom_level_m=49.0, material="ignore", unit_weight_kn_m3=18.0),
    dict(top_level_m=49.0, bottom_level_m=35.0, material="cohesive", unit_weight_kn_m3=19.0,
         cu_kpa=50.0, cu_bottom_kpa=120.0),
    dict(top_level_m=35.0, bottom_level_m=20.0, material="cohesionless", unit_weight_kn_m3=20.0,
         phi_deg=33.0),
]


def _pile(mark, gm, load=800.0):
    return {"mark": mark, "cap_id": None, "ground_model_id": gm, "pile_type": "bored",
            "easting_m": 100.0, "northing_m": 10.0 * int(mark[1:]), "cutoff_level_m": 49.0,
            "toe_level_m": 36.0, "diameter_mm": 600.0, "compression_kn": load, "tension_kn": 0.0,
            "shear_kn": 0.0, "moment_knm": 0.0, "n_bars": 6, "bar_mm": 16.0, "cage_length_m": 6.0,
            "fc_mpa": 35.0, "fy_mpa": 500.0, "exposure_class": "XC2", "cover_mm": 75.0, "head": "free"}


@pytest.fixture
def chromium(browser_type_launch_args):
    """(executable_path, args) of Debian's Chromium, from tests/browser/conftest.py (which
    skips without it on a workstation and fails in CI)."""
    return browser_type_launch_args["executable_path"], browser_type_launch_args["args"]


@pytest.fixture
def site(app, people, live_server):
    """Three planned piles on the project 'own'; the server (conftest's live_server) running."""
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            gm = ground.save_model(conn, people["own"], "clay over sand", 45.0, LAYERS)
            for mark in ("P1", "P2", "P3"):
                piles.save_pile(conn, people["own"], _pile(mark, gm))
    return dict(people, pid=people["own"], base=live_server, app=app)


class Tablet:
    """A Chromium profile folder standing for the tablet's browser; open, close, reopen."""

    def __init__(self, browser_type, chromium, folder, site):
        self.browser_type, self.chromium, self.folder, self.site = browser_type, chromium, folder, site
        self.context = None

    def open(self, offline: bool = False):
        executable, args = self.chromium
        self.context = self.browser_type.launch_persistent_context(
            str(self.folder), executable_path=executable, args=args, headless=True,
            viewport={"width": 1280, "height": 800}, offline=offline)
        self.context.set_default_timeout(20_000)
        return self.context.pages[0] if self.context.pages else self.context.new_page()

    def close(self):
        if self.context is not None:
            self.context.close()
            self.context = None

    def url(self, path: str) -> str:
        return self.site["base"] + path


@pytest.fixture
def tablet(browser_type, chromium, tmp_path, site, artifacts):
    t = Tablet(browser_type, chromium, tmp_path / "profile", site)
    t.artifacts = artifacts
    yield t
    t.close()


def login(page, site, email):
    page.goto(site["base"] + "/login")
    page.fill("#email", email)
    page.fill("#password", PASSWORD)
    page.click("main button[type=submit]")
    page.wait_for_url(lambda u: "/login" not in u)


def wait_controlled(page, timeout_ms: int = 20_000):
    """Wait for the service worker to be activated and to control this page.

    A page whose navigation began while the worker was still installing can miss the worker's
    clients.claim() and stay uncontrolled; the next load of it is controlled, so reload once.
    """
    script = """async (ms) => {
        const late = (v, t) => new Promise((r) => setTimeout(() => r(v), t));
        const activated = (async () => {
            const reg = await navigator.serviceWorker.ready;
            const sw = reg.active;
            if (sw.state !== 'activated') {
                await new Promise((r) => sw.addEventListener('statechange', () => { if (sw.state === 'activated') r(); }));
            }
            return 'activated';
        })();
        if (await Promise.race([activated, late('timeout', ms)]) !== 'activated') return 'not activated';
        if (navigator.serviceWorker.controller) return 'controlled';
        const change = new Promise((r) => navigator.serviceWorker.addEventListener('controllerchange', () => r('controlled'), {once: true}));
        return await Promise.race([change, late('uncontrolled', 3000)]);
    }"""
    state = page.evaluate(script, timeout_ms)
    if state == "uncontrolled":
        page.reload()
        state = page.evaluate(script, timeout_ms)
    assert state == "controlled", f"service worker not in control: {state}"
    assert page.evaluate("navigator.serviceWorker.controller.state") == "activated"


def until(page, script: str, arg=None, timeout_s: float = 20.0):
    """Poll ``script`` (a JS function expression) in the page until it returns something truthy.

    (Playwright's wait_for_function evaluates strings, which the app's CSP rightly forbids.)
    """
    deadline = time.monotonic() + timeout_s
    guarded = f"""async (arg) => await Promise.race([({script})(arg),
        new Promise((r) => setTimeout(() => r(false), 5000))])"""
    while True:
        value = page.evaluate(guarded, arg)
        if value:
            return value
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {script}")
        page.wait_for_timeout(100)


def waiting_is(page, n: int):
    until(page, "(n) => document.getElementById('outbox-status').dataset.waiting === String(n)", n)


def cut_network(context, page):
    """Take the tablet offline and wait until the page's own requests really fail.

    (Chromium applies Playwright's offline emulation to a service worker's target a moment
    after it starts; until then a request the worker passes on can still get through.)
    """
    context.set_offline(True)
    until(page, """async () => {
        try { await fetch('/healthz?' + Math.random(), {cache: 'no-store'}); return false; }
        catch (err) { return true; }
    }""")
    until(page, "() => navigator.onLine === false")


def wait_bundle(page, pid):
    until(page, """async (pid) => {
        await window.ToelineOutbox.ready;
        return !!(await window.ToelineOutbox.getBundle(pid));
    }""", pid)


def outbox_counts(page) -> dict:
    return page.evaluate("window.ToelineOutbox.counts()")


def png_bytes() -> bytes:
    buf = io.BytesIO()
    Image.new("RGB", (64, 48), (120, 90, 40)).save(buf, "PNG")
    return buf.getvalue()


def save_photo_js(page, pid, mark, data: bytes):
    return page.evaluate("""async ([pid, mark, b64]) => {
        const bytes = Uint8Array.from(atob(b64), (c) => c.charCodeAt(0));
        const file = new File([bytes], 'base.png', {type: 'image/png'});
        return await window.ToelineOutbox.savePhoto(pid, mark, file, {kind: 'base', caption: 'base clean'});
    }""", [pid, mark, base64.b64encode(data).decode()])


def save_record_js(page, pid, mark, record, base_version):
    return page.evaluate("""async ([pid, mark, record, base]) =>
        await window.ToelineOutbox.saveRecord(pid, mark, {base_version: base, record: record})""",
                         [pid, mark, record, base_version])


class Api:
    """The server as the office sees it (Flask test client signed in as the engineer)."""

    def __init__(self, site):
        self.site = site
        self.client = site["app"].test_client()
        token = self._token()
        self.client.post("/login", data={"email": site["engineer"], "password": PASSWORD, "csrf_token": token})

    def _token(self) -> str:
        import re
        html = self.client.get("/login").get_data(as_text=True)
        return re.search(r'name="csrf-token" content="([^"]+)"', html).group(1)

    def history(self, mark):
        r = self.client.get(f"/api/v1/projects/{self.site['pid']}/piles/{mark}/history")
        assert r.status_code == 200
        return r.get_json()["versions"]

    def photos(self, mark):
        r = self.client.get(f"/api/v1/projects/{self.site['pid']}/piles/{mark}/photos")
        assert r.status_code == 200
        return r.get_json()["photos"]

    def put(self, mark, record, base_version):
        token = self.client.get("/api/v1/session").get_json()["csrf_token"]
        return self.client.put(f"/api/v1/projects/{self.site['pid']}/piles/{mark}/record",
                               json={"client_id": str(uuid.uuid4()), "base_version": base_version,
                                     "record": record}, headers={"X-CSRFToken": token})


PHOTO = png_bytes()
SHORT = {"progress": "boring", "platform_level": 50.0, "measured_depth": 4.0}


def test_offline_record_and_photo_survive_a_restart_and_arrive_once(tablet, site, tmp_path):
    pid = site["pid"]
    api = Api(site)
    # 1. Online as an inspector: the worker takes control, the project's bundle is kept and
    #    the At the rig shell is cached.
    page = tablet.open()
    login(page, site, site["inspector"])
    page.goto(tablet.url(f"/projects/{pid}/piles"))
    wait_controlled(page)
    wait_bundle(page, pid)
    page.reload()  # now through the worker: the page is cached, the rig shell warmed
    until(page, "async (pid) => !!(await caches.match(`/projects/${pid}/rig`))", pid)

    cut_network(tablet.context, page)
    until(page, "() => document.getElementById('net-status').textContent === 'offline'")
    response = page.reload()
    assert response.from_service_worker, "the offline reload must come from the worker's cache"
    assert page.locator("#net-status").inner_text() == "offline"

    # Open a pile never opened on this tablet; the live check works from the bundle.
    response = page.goto(tablet.url(f"/projects/{pid}/rig/P2"))
    assert response.from_service_worker
    until(page, "() => window.ToelineRig && window.ToelineRig.data().mark === 'P2'")
    page.fill("#f-platform_level", "50")
    page.fill("#f-measured_depth", "4")
    live = page.locator("#live-toe")
    assert "more needed for 800 kN" in live.inner_text()
    assert live.get_attribute("data-state") == "short"
    page.click("#save")
    until(page, "() => document.getElementById('save-status').textContent.includes('Saved on this tablet')")
    waiting_is(page, 1)
    assert "1 waiting" in page.locator("#outbox-status").inner_text()
    assert page.locator("#outbox-send").is_visible()
    photo = tmp_path / "base.png"
    photo.write_bytes(PHOTO)
    page.set_input_files("#photo-file", str(photo))
    page.select_option("#photo-kind", "base")
    page.fill("#photo-caption", "base clean")
    page.click("#photo-upload")
    waiting_is(page, 2)
    assert "waiting to be sent" in page.locator("#photo-list").inner_text()

    # 2. Close the browser and open it again, still offline: both items are still there, and
    #    the pile opens with what this tablet saved for it.
    tablet.close()
    page = tablet.open(offline=True)
    response = page.goto(tablet.url(f"/projects/{pid}/rig/P2"))
    assert response.from_service_worker
    waiting_is(page, 2)
    until(page, "() => window.ToelineRig && window.ToelineRig.data().mark === 'P2'")
    assert page.locator(".rig-head h1").inner_text() == "Pile P2"
    assert page.input_value("#f-measured_depth") == "4"
    assert api.history("P2") == [] and api.photos("P2") == []

    # 3. The network returns: the outbox empties, the server holds one version and one photo,
    #    and the verdict appears on the open page.
    tablet.context.set_offline(False)
    waiting_is(page, 0)
    until(page, "() => document.getElementById('verdict').dataset.verdict === 'needs engineer'")
    assert "NEEDS ENGINEER" in page.locator("#verdict").inner_text()
    assert page.locator("#checks-rows tr[data-code=axial_compression].short").count() == 1
    versions = api.history("P2")
    assert len(versions) == 1 and versions[0]["record"]["measured_depth"] == 4.0
    assert versions[0]["verdict"] == "needs engineer"
    short = [c["code"] for c in versions[0]["checks"] if c["ok"] is False]
    assert "axial_compression" in short
    photos = api.photos("P2")
    assert len(photos) == 1 and photos[0]["kind"] == "base"
    assert photos[0]["sha256"] == hashlib.sha256(PHOTO).hexdigest()  # the original bytes, kept
    assert outbox_counts(page) == {"waiting": 0, "conflict": 0, "rejected": 0, "bytes": 0}
    bundle_pile = page.evaluate(f"window.ToelineOutbox.getBundle({pid}).then((b) => b.piles.P2)")
    assert bundle_pile["version"] == 1 and bundle_pile["verdict"] == "needs engineer"


def test_a_lost_answer_does_not_double_the_version(tablet, site):
    pid = site["pid"]
    api = Api(site)
    page = tablet.open()
    login(page, site, site["inspector"])
    page.goto(tablet.url(f"/projects/{pid}/piles"))
    wait_controlled(page)
    calls = []

    def lose_first_answer(route):
        calls.append(route.request.method)
        if len(calls) == 1:
            route.fetch()      # the server receives and stores it ...
            route.abort()      # ... and its answer is lost on the way back
        else:
            route.continue_()

    page.route("**/api/v1/projects/*/piles/P2/record", lose_first_answer)
    answer = save_record_js(page, pid, "P2", SHORT, 0)
    assert answer["queued"] is True and len(calls) == 1
    assert len(api.history("P2")) == 1  # it did arrive
    page.click("#outbox-send")
    waiting_is(page, 0)
    assert len(calls) == 2
    versions = api.history("P2")
    assert len(versions) == 1 and versions[0]["client_id"] == answer["client_id"]


def test_a_conflict_is_shown_side_by_side_and_nothing_is_lost(tablet, site, artifacts):
    pid = site["pid"]
    api = Api(site)
    first = api.put("P3", {"progress": "boring", "platform_level": 50.0, "measured_depth": 6.0}, 0)
    assert first.status_code == 200
    page = tablet.open()
    login(page, site, site["inspector"])
    page.goto(tablet.url(f"/projects/{pid}/piles"))
    wait_controlled(page)
    wait_bundle(page, pid)
    cut_network(tablet.context, page)
    mine = {"progress": "boring", "platform_level": 50.0, "measured_depth": 9.5, "rig": "tablet rig"}
    assert save_record_js(page, pid, "P3", mine, 1)["queued"] is True
    office = {"progress": "boring", "platform_level": 50.0, "measured_depth": 7.25, "rig": "office rig"}
    assert api.put("P3", office, 1).status_code == 200  # changed on the server meanwhile

    tablet.context.set_offline(False)
    conflict = page.locator(".outbox-item.conflict")
    conflict.wait_for()
    table = conflict.locator("table.conflict")
    assert "On this tablet" in table.inner_text() and "On the server" in table.inner_text()
    depth_row = table.locator("tr", has_text="measured_depth")
    assert "9.5" in depth_row.inner_text() and "7.25" in depth_row.inner_text()
    assert "differs" in (depth_row.get_attribute("class") or "")
    # Nothing lost: the server kept the office's version, the tablet keeps its own.
    versions = api.history("P3")
    assert [v["version"] for v in versions] == [1, 2] and versions[1]["record"]["rig"] == "office rig"
    assert outbox_counts(page)["conflict"] == 1
    assert "1 to resolve" in page.locator("#outbox-status").inner_text()
    assert not page.locator("#outbox-send").is_visible()  # nothing waiting to send
    page.screenshot(path=str(artifacts / "offline-conflict.png"))

    conflict.locator("[data-action=keep-mine]").click()
    until(page, "() => document.getElementById('outbox-status').dataset.conflicts === '0'")
    waiting_is(page, 0)
    versions = api.history("P3")
    assert [v["version"] for v in versions] == [1, 2, 3]
    assert versions[1]["record"]["rig"] == "office rig" and versions[2]["record"]["rig"] == "tablet rig"


def test_an_expired_login_keeps_every_item_and_asks_to_sign_in(tablet, site):
    pid = site["pid"]
    api = Api(site)
    page = tablet.open()
    login(page, site, site["inspector"])
    page.goto(tablet.url(f"/projects/{pid}/piles"))
    wait_controlled(page)
    wait_bundle(page, pid)
    # Let the worker finish keeping the rig pages, whose answers would renew the session.
    until(page, "async (pid) => !!(await caches.match(`/projects/${pid}/rig`))", pid)
    cut_network(tablet.context, page)
    assert save_record_js(page, pid, "P1", SHORT, 0)["queued"] is True
    tablet.context.clear_cookies()  # the session ends while the tablet is out of signal
    tablet.context.set_offline(False)
    prompt = page.locator("#outbox-login")
    prompt.wait_for()
    assert "Sign in again" in prompt.inner_text()
    waiting_is(page, 1)
    assert api.history("P1") == []

    prompt.locator("a").click()
    page.fill("#email", site["inspector"])
    page.fill("#password", PASSWORD)
    page.click("main button[type=submit]")
    page.wait_for_url(lambda u: u.endswith(f"/projects/{pid}/piles"))
    waiting_is(page, 0)
    assert len(api.history("P1")) == 1


def test_storage_is_shown_and_a_photo_past_the_quota_is_refused_aloud(browser_type, chromium, site):
    """Persistence asked for and its answer said; outbox size against the quota; a warning
    before the quota; past it the save fails with a message (never a silent drop).

    A fresh (non-persistent) context, because Chromium applies the DevTools quota override
    (Storage.overrideQuotaForOrigin) there; it does not change what navigator.storage.estimate()
    reports, so the "nearly full" figure is given to the page by replacing estimate().
    """
    pid = site["pid"]
    browser = browser_type.launch(executable_path=chromium[0], args=chromium[1], headless=True)
    try:
        context = browser.new_context(viewport={"width": 1280, "height": 800})
        context.set_default_timeout(20_000)
        page = context.new_page()
        # A real quota of 2 MB for the site, set before it stores anything (DevTools protocol).
        cdp = context.new_cdp_session(page)
        cdp.send("Storage.overrideQuotaForOrigin", {"origin": site["base"], "quotaSize": 2_000_000})
        login(page, site, site["inspector"])
        page.goto(site["base"] + f"/projects/{pid}/piles")
        wait_controlled(page)
        info = page.evaluate("window.ToelineOutbox.storage()")
        page.click("#outbox-status")
        panel = page.locator("#outbox-panel")
        panel.wait_for()
        if info["persisted"] is False:
            assert "did not agree to keep" in panel.inner_text()
        else:
            assert info["persisted"] is True and "keeps this storage" in panel.inner_text()
        assert "the browser allows" in page.locator("#outbox-storage").inner_text()
        cut_network(context, page)

        # The browser reports 85 % of the quota used: the next save warns before the quota.
        page.evaluate("""() => Object.defineProperty(navigator.storage, 'estimate', {configurable: true,
            value: async () => ({usage: 8500000, quota: 10000000})})""")
        small = page.evaluate("""async (pid) => {
            const file = new File([new Uint8Array(200000)], 'cage.jpg', {type: 'image/jpeg'});
            return await window.ToelineOutbox.savePhoto(pid, 'P2', file, {kind: 'cage'});
        }""", pid)
        assert small["queued"] is True
        until(page, """() => { const w = document.getElementById('outbox-storage-warning');
                               return w && w.textContent.includes('nearly full'); }""")

        # Past the real quota the save fails aloud.
        refused = page.evaluate("""async (pid) => {
            const file = new File([new Uint8Array(3000000)], 'huge.jpg', {type: 'image/jpeg'});
            try { await window.ToelineOutbox.savePhoto(pid, 'P2', file, {kind: 'cage'}); return 'stored'; }
            catch (err) { return String(err.message); }
        }""", pid)
        assert refused.startswith("NOT saved on the tablet"), refused
        assert outbox_counts(page)["waiting"] == 1  # the first photo is still there
        context.close()
    finally:
        browser.close()


def test_a_changed_shell_installs_a_new_worker_and_drops_the_old_cache(tablet, site, tmp_path):
    """Versioned cache: any change to a static file gives a new worker whose activate
    removes the old cache; the new cache holds the new file."""
    import shutil

    app = site["app"]
    static = tmp_path / "static"
    shutil.copytree(app.static_folder, static)
    app.static_folder = str(static)  # served from this copy from now on
    page = tablet.open()
    page.goto(tablet.url("/login"))
    wait_controlled(page)
    first = page.evaluate("caches.keys()")
    assert len(first) == 1 and first[0].startswith("toeline-shell-")

    (static / "app.css").write_text((static / "app.css").read_text() + "\n/* shell v2 */\n")
    page.evaluate("navigator.serviceWorker.getRegistration().then((r) => r.update())")
    until(page, "async (old) => { const k = await caches.keys(); return k.length === 1 && k[0] !== old; }",
          first[0])
    css = page.evaluate("caches.match('/static/app.css').then((r) => r.text())")
    assert "/* shell v2 */" in css


def test_offline_a_page_not_kept_says_so_and_links_to_what_is(tablet, site):
    """Offline, a screen never opened on this tablet (here Review) is not replaced silently by
    another page: the worker says it is not available offline and links to the pages kept."""
    pid = site["pid"]
    page = tablet.open()
    login(page, site, site["inspector"])
    page.goto(tablet.url(f"/projects/{pid}/piles"))
    wait_controlled(page)
    wait_bundle(page, pid)
    page.reload()
    until(page, "async (pid) => !!(await caches.match(`/projects/${pid}/rig`))", pid)
    cut_network(tablet.context, page)

    response = page.goto(tablet.url(f"/projects/{pid}/review"))
    assert response.from_service_worker and response.status == 503
    assert page.locator("h1").inner_text() == "Not available offline"
    assert f"/projects/{pid}/review" in page.locator("#offline-missing").inner_text()
    kept = page.locator("#offline-kept a")
    hrefs = [kept.nth(i).get_attribute("href") for i in range(kept.count())]
    assert f"/projects/{pid}/rig" in hrefs and f"/projects/{pid}/piles" in hrefs
    assert f"/projects/{pid}/review" not in hrefs
    assert kept.filter(has_text="At the rig · Test quay").count() >= 1  # named by the kept page's title
    assert page.evaluate("() => document.documentElement.scrollWidth <= window.innerWidth")
    page.screenshot(path=str(tablet.artifacts / "offline-not-kept-1280.png"))
    page.locator(f"#offline-kept a[href='/projects/{pid}/rig']").click()
    page.wait_for_url(f"**/projects/{pid}/rig")
    assert page.title().startswith("At the rig · Test quay")
    assert page.locator("#net-status").inner_text() == "offline"
