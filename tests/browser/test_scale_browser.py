"""A 20,000-pile project in headless Chromium (issue 24): the Piles screen opens in pages, filters
and pages on; the site plan draws every pile; the tablet's kept bundle takes a 10-pile delta.

The project is invented test data, inserted directly in one transaction (20,000 single bored
piles on a 100 x 200 grid, 2 m apart, on one clay-over-sand ground model).
"""

from __future__ import annotations

import time
import uuid

import pytest
from playwright.sync_api import expect

from fieldapp import db, saving
from fieldapp.queries import audit, ground, users
from fieldapp.queries import piles as piles_q
from tests.browser.conftest import login

pytestmark = pytest.mark.browser

N = 20_000
LAYERS = [
    dict(top_level_m=50.0, bottom_level_m=49.0, material="ignore", unit_weight_kn_m3=18.0),
    dict(top_level_m=49.0, bottom_level_m=35.0, material="cohesive", unit_weight_kn_m3=19.0,
         cu_kpa=50.0, cu_bottom_kpa=120.0),
    dict(top_level_m=35.0, bottom_level_m=20.0, material="cohesionless", unit_weight_kn_m3=20.0,
         phi_deg=33.0),
]


@pytest.fixture
def big_site(app, people, live_server):
    with app.app_context():
        conn = db.get_db()
        pid = people["own"]
        with db.write(conn):
            gm = ground.save_model(conn, pid, "clay over sand", 45.0, LAYERS)
            conn.executemany(
                "INSERT INTO piles (project_id, mark, ground_model_id, pile_type, easting_m, northing_m,"
                " cutoff_level_m, toe_level_m, diameter_mm, compression_kn) VALUES (?, ?, ?, 'bored', ?, ?, 49.0, 36.0, 600.0, 800.0)",
                [(pid, f"P{k + 1}", gm, 1000.0 + 2.0 * (k % 100), 5000.0 + 2.0 * (k // 100)) for k in range(N)])
            audit.append(conn, pid, "test", "schedule imported", "generated", {"piles": N})
    return dict(people, pid=pid, base=live_server)


def test_piles_screen_pages_filters_and_plan_at_20000(page, big_site):
    base, pid = big_site["base"], big_site["pid"]
    page.set_default_timeout(60_000)
    login(page, base, big_site["engineer"])
    page.goto(f"{base}/projects/{pid}/piles")
    assert page.locator("p.summary").inner_text().startswith("20000 piles")
    assert page.locator("table.schedule tbody tr").count() == 200
    assert "Piles 1 to 200 of 20000 shown" in page.locator("p.page-info").inner_text()
    page.wait_for_selector("section.plan[data-drawn='20000']")
    assert "needs engineer" in page.locator(".plan-legend").inner_text()

    page.locator("nav.pager").first.get_by_role("link", name="Next page").click()
    page.wait_for_load_state()
    assert "Piles 201 to 400 of 20000 shown" in page.locator("p.page-info").inner_text()
    assert page.locator("table.schedule tbody tr").first.get_attribute("id") is not None

    page.fill("#prefix", "P1999")
    page.locator("form.filters button[type=submit]").click()
    page.wait_for_load_state()
    marks = page.locator("table.schedule tbody tr td[data-label=Mark]").all_inner_texts()
    assert sorted(marks) == sorted(["P1999"] + [f"P1999{d}" for d in range(10)])
    assert "(filtered from 20000)" in page.locator("p.page-info").inner_text()

    # an area of the plan: easting 1000 to 1010 m, northing 5000 to 5002 m (6 x 2 piles)
    page.goto(f"{base}/projects/{pid}/piles?bbox=1000,5000,1010,5002")
    assert page.locator("table.schedule tbody tr").count() == 12

    # a tap on the plan names the nearest pile
    page.goto(f"{base}/projects/{pid}/piles")
    page.wait_for_selector("section.plan[data-drawn='20000']")
    page.locator("canvas.site-plan").click()  # at its centre, scrolled into view
    expect(page.locator(".plan-picked")).to_contain_text("Pile P")
    assert "/piles?q=P" in page.locator(".plan-picked a").get_attribute("href")


def test_tablet_takes_a_10_pile_delta(app, page, big_site):
    base, pid = big_site["base"], big_site["pid"]
    page.set_default_timeout(120_000)
    login(page, base, big_site["inspector"])
    page.goto(f"{base}/projects/{pid}/piles")
    deadline = time.monotonic() + 120
    while not page.evaluate("""async (pid) => {
        const b = await window.ToelineOutbox.getBundle(pid);
        return !!(b && b.head && Object.keys(b.piles).length === 20000);
    }""", pid):
        assert time.monotonic() < deadline, "the tablet did not keep the whole bundle"
        page.wait_for_timeout(500)
    held = page.evaluate("async (pid) => (await window.ToelineOutbox.getBundle(pid)).head", pid)

    marks = [f"P{k}" for k in range(1, 11)]
    with app.app_context():
        conn = db.get_db()
        inspector = users.by_email(conn, big_site["inspector"])
        for mark in marks:
            row = piles_q.get_pile(conn, pid, mark)
            saving.save_record(conn, pid, row, inspector, str(uuid.uuid4()), 0,
                               {"progress": "boring", "platform_level": 50.0, "measured_depth": 12.0})
        head = audit.head(conn, pid)[1]

    with page.expect_response(lambda r: "/bundle?since=" in r.url) as answer:
        page.evaluate("(pid) => window.ToelineOutbox.refreshBundle(pid)", pid)
    delta = answer.value.json()
    assert delta["delta"] is True and delta["since"] == held and delta["head"] == head
    assert sorted(delta["piles"]) == sorted(marks)
    kept = page.evaluate("""async (pid) => {
        const b = await window.ToelineOutbox.getBundle(pid);
        return {head: b.head, n: Object.keys(b.piles).length, v: b.piles.P7.version,
                depth: b.piles.P7.record.measured_depth, other: b.piles.P11.version};
    }""", pid)
    assert kept == {"head": head, "n": N, "v": 1, "depth": 12.0, "other": 0}
    rig = page.evaluate("(pid) => window.ToelineOutbox.pileOffline(pid, 'P7')", pid)
    assert rig["version"] == 1 and rig["curve"]["design"]
