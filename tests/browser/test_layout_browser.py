"""The rig page in the hand (issue 17): phone, small tablet and tablet widths in headless Chromium.

At 360, 390, 768 and 1280 px an inspector adds 6 concrete deliveries and 6 strata; the page
must not widen (``scrollWidth <= innerWidth``), every strata and delivery row shows its labels,
"Save and check" can be clicked (Playwright's click, which fails when another element lies over
it), every control is at least 44 px, date-time and docket boxes show their whole value, the
header and section links leave most of a phone's first screen to the record, and the outbox
panel opens on-screen. Screenshots at phone (390 x 844) and tablet (1280 x 800) width go to
tests/artifacts/. The site is invented test data (conftest's rig_site).
"""

from __future__ import annotations

import pytest
from playwright.sync_api import expect

from tests.browser.conftest import login

pytestmark = pytest.mark.browser

WIDTHS = (360, 390, 768, 1280)
HEIGHT = {360: 740, 390: 844, 768: 1024, 1280: 800}
TAP_PX = 44

# Every control a gloved finger may need, with its height and width where under TAP_PX.
SMALL_TARGETS = """(sel) => Array.from(document.querySelectorAll(sel))
    .filter((el) => el.offsetParent !== null && getComputedStyle(el).visibility !== 'hidden')
    .map((el) => { const r = el.getBoundingClientRect();
                   return [el.id || el.getAttribute('aria-label') || el.textContent.trim().slice(0, 30),
                           Math.round(r.height), Math.round(r.width)]; })
    .filter(([, h, w]) => h < %d || w < %d)""" % (TAP_PX - 0.5, TAP_PX - 0.5)
CONTROLS = ("main input:not([type=hidden]), main select, main button, main textarea, main a.btn, "
            ".section-nav a, header.top a, header.top button, #outbox-status, .save-bar button, .save-bar select")


def fill_rows(page):
    for k in range(6):
        page.click("#add-delivery")
        row = page.locator("#delivery-rows tr").nth(k)
        row.locator("[data-key=docket]").fill(f"DKT-2026-0{k}4471")
        row.locator("[data-key=volume_m3]").fill("6.5")
        row.locator("[data-key=batched_at]").fill(f"2026-03-02T0{k + 1}:15")
        row.locator("[data-key=discharged_at]").fill(f"2026-03-02T0{k + 2}:05")
        row.locator("[data-key=slump_mm]").fill("180")
    for k in range(6):
        page.click("#add-stratum")
        row = page.locator("#strata-rows tr").nth(k)
        row.locator("[data-key=from_depth]").fill(str(3 * k))
        row.locator("[data-key=to_depth]").fill(str(3 * k + 3))
        row.locator("[data-key=description]").fill("firm brown sandy CLAY with gravel")


def visible_labels(page, body_id):
    """For each row: the texts of the labels that are visible and have a size."""
    return page.evaluate("""(id) => Array.from(document.getElementById(id).querySelectorAll('tr')).map((tr) =>
        Array.from(tr.querySelectorAll('label')).filter((l) => {
            const r = l.getBoundingClientRect(); const s = getComputedStyle(l);
            return r.width > 4 && r.height > 4 && s.visibility !== 'hidden' && s.display !== 'none'
                && !l.classList.contains('visually-hidden');
        }).map((l) => l.textContent.trim()))""", body_id)


@pytest.mark.parametrize("width", WIDTHS)
def test_rig_page_works_at_every_width_with_six_deliveries_and_strata(page, rig_site, artifacts, width):
    login(page, rig_site["base"], rig_site["inspector"])
    page.set_viewport_size({"width": width, "height": HEIGHT[width]})
    page.goto(f"{rig_site['base']}/projects/{rig_site['own']}/rig/R1")

    # The header and section links leave most of a phone's first screen to the record.
    page.screenshot(path=str(artifacts / f"rig-first-screen-{width}.png"))
    top = page.evaluate("() => document.querySelector('.section-nav').getBoundingClientRect().bottom")
    if width < 640:
        assert top <= 0.4 * HEIGHT[width], f"header and section links end at {top} px of {HEIGHT[width]}"

    fill_rows(page)
    page.fill("#f-platform_level", "100")
    page.fill("#f-measured_depth", "20")
    assert page.evaluate("() => document.documentElement.scrollWidth <= window.innerWidth"), \
        page.evaluate("() => [document.documentElement.scrollWidth, window.innerWidth]")

    # Labels on every row, at every width.
    want_d = ["Docket", "Volume (m³)", "Batched", "Discharged", "Slump (mm)"]
    for labels in visible_labels(page, "delivery-rows"):
        assert all(any(t.startswith(w) for t in labels) for w in want_d), labels
    for labels in visible_labels(page, "strata-rows"):
        assert all(any(t.startswith(w) for t in labels) for w in ("From", "To", "Material", "Description", "Layer")), labels

    # Whole values in the date-time and docket boxes. A text box scrolls when its value is
    # wider than the box; a date-time box does not, so its value is drawn as the browser shows
    # it (the locale's date and time) in the box's own font, plus the box's padding, borders and
    # about 30 px for the calendar button, and must fit.
    page.click("[data-now=f-boring_start]")
    cut = page.evaluate("""() => {
        const canvas = document.createElement('canvas').getContext('2d');
        const shown = (el) => new Intl.DateTimeFormat(navigator.language, {year: 'numeric', month: '2-digit',
            day: '2-digit', hour: '2-digit', minute: '2-digit'}).format(new Date(el.value));
        return Array.from(document.querySelectorAll('#delivery-rows input, #rig-form input[type=datetime-local]'))
          .filter((el) => el.offsetParent !== null && el.value)
          .map((el) => {
            const s = getComputedStyle(el);
            let need = el.clientWidth;
            if (el.type === 'datetime-local') {
              canvas.font = s.font;
              need = canvas.measureText(shown(el)).width + parseFloat(s.paddingLeft) + parseFloat(s.paddingRight) + 30;
            }
            return [el.getAttribute('aria-label') || el.id, Math.round(need), el.clientWidth, el.scrollWidth];
          })
          .filter(([, need, client, scroll]) => need > client || scroll > client + 1);
    }""")
    assert cut == []

    assert page.evaluate(SMALL_TARGETS, CONTROLS) == []

    if width in (390, 1280):
        page.evaluate("() => window.scrollTo(0, 0)")
        page.screenshot(path=str(artifacts / f"rig-rows-{width}-top.png"))
        page.locator("#sec-concrete").scroll_into_view_if_needed()
        page.screenshot(path=str(artifacts / f"rig-rows-{width}-concrete.png"))
        page.screenshot(path=str(artifacts / f"rig-rows-{width}-full.png"), full_page=True)

    # The sticky save bar is on screen wherever the page is scrolled, and takes the tap.
    for where in ("#sec-strata", "#sec-concrete", "#sec-boring"):
        page.locator(where).scroll_into_view_if_needed()
        box = page.locator("#save").bounding_box()
        assert box and 0 <= box["y"] and box["y"] + box["height"] <= HEIGHT[width] + 1, (where, box)
    page.click("#save")  # no force: fails if another element would take the click
    expect(page.locator("#save-status")).not_to_have_text("")


@pytest.mark.parametrize("width", (360, 1280))
def test_outbox_panel_opens_on_screen(page, rig_site, width):
    login(page, rig_site["base"], rig_site["inspector"])
    page.set_viewport_size({"width": width, "height": HEIGHT[width]})
    page.goto(f"{rig_site['base']}/projects/{rig_site['own']}/rig/R1")
    page.evaluate("window.ToelineOutbox.ready")
    page.click("#outbox-status")
    panel = page.locator("#outbox-panel")
    expect(panel).to_be_visible()
    box = panel.bounding_box()
    assert box["x"] >= 0 and box["x"] + box["width"] <= width + 1, box
    assert box["y"] < HEIGHT[width] and box["y"] + box["height"] > 0, box
    assert page.evaluate("() => document.documentElement.scrollWidth <= window.innerWidth")


def test_piles_table_links_are_big_enough_to_tap(page, rig_site):
    login(page, rig_site["base"], rig_site["engineer"])
    for width in (390, 1280):
        page.set_viewport_size({"width": width, "height": HEIGHT[width]})
        page.goto(f"{rig_site['base']}/projects/{rig_site['own']}/piles")
        expect(page.locator("table.schedule a", has_text="R1")).to_be_visible()
        assert page.evaluate(SMALL_TARGETS, "table.schedule a, table.schedule .btn, main .btn, header.top a") == []
        assert page.evaluate("() => document.documentElement.scrollWidth <= window.innerWidth")
