"""At the rig in headless Chromium (issue 5): an inspector opens a planned pile, types a
measured depth that stops short and sees how much more is needed before saving, saves, sees
"needs engineer" with axial_compression short, adds a photo and sees its thumbnail.

The site is invented test data: a clay-over-sand ground model and one bored pile whose design
toe comes from the project's own capacity curve. Screenshots go to tests/artifacts/.
"""

from __future__ import annotations

import io
import re

import pytest
from PIL import Image, ImageDraw
from playwright.sync_api import expect

from tests.browser.conftest import login
from tests.conftest import PASSWORD

pytestmark = pytest.mark.browser

def photo_bytes() -> bytes:
    """A drawn stand-in for a base photo (not a real photo)."""
    image = Image.new("RGB", (800, 600), (90, 70, 50))
    ImageDraw.Draw(image).ellipse((200, 100, 600, 500), fill=(150, 140, 120), outline=(20, 20, 20), width=8)
    out = io.BytesIO()
    image.save(out, "JPEG", quality=85)
    return out.getvalue()


def test_inspector_records_a_short_pile_and_adds_a_photo(page, rig_site, artifacts):
    base, pid = rig_site["base"], rig_site["own"]
    login(page, base, rig_site["inspector"])

    # Pick the planned pile by its mark.
    page.goto(f"{base}/projects/{pid}/rig")
    page.fill("#q", "r1")
    page.click("form[role=search] button[type=submit]")
    page.click("text=Open R1")
    expect(page.locator("h1")).to_have_text("Pile R1")
    expect(page.locator("#progress-now")).to_have_text("planned")

    # Design values beside the fields; the numeric keypad on number fields.
    expect(page.locator("[data-design=diameter_mm]").first).to_have_text("900 mm")
    assert page.get_attribute("#f-measured_depth", "inputmode") == "decimal"

    # Stop 0.60 m above the level the load needs (decimal comma, as a tablet keypad may give).
    depth = round(100.0 - (rig_site["need"] + 0.60), 2)
    page.fill("#f-platform_level", "100,00")
    page.fill("#f-measured_depth", f"{depth:.2f}".replace(".", ","))
    toe_line = page.locator("#live-toe")
    expect(toe_line).to_have_attribute("data-state", "short")
    expect(toe_line).to_contain_text(re.compile(r"0\.6\d m more needed for 1,850 kN"))
    expect(page.locator("#verdict")).to_contain_text("Not checked yet")  # nothing saved yet
    page.locator("#sec-boring").scroll_into_view_if_needed()
    page.screenshot(path=str(artifacts / "rig-live-1280x800.png"))

    # A figure deep enough turns the line to "to spare", then back to the short one to save.
    page.fill("#f-measured_depth", f"{depth + 1.0:.2f}")
    expect(toe_line).to_contain_text(re.compile(r"reaches design with 0\.[34]\d m to spare"))
    page.fill("#f-measured_depth", f"{depth:.2f}")
    page.fill("#f-debris_mm", "60")
    # The same figures whether the server's recheck or the tablet's estimate writes the line.
    expect(page.locator("#live-debris")).to_contain_text(re.compile(r"SHORT: .*60 mm.* 38 mm"))
    page.fill("#f-cage_length", "1.0")          # the cage line (rule cage_tolerance_m, 0 m)
    expect(page.locator("#live-cage")).to_have_attribute("data-state", "short")
    expect(page.locator("#live-cage")).to_contain_text(re.compile(r"SHORT: .*1\.00 m|SHORT: \d+\.\d\d m short of"))
    page.fill("#f-cage_length", "30")
    expect(page.locator("#live-cage")).to_contain_text(re.compile(r"OK: .*30\.00 m"))

    page.select_option("#f-progress", "boring")
    page.click("#save")
    verdict = page.locator("#verdict")
    expect(verdict).to_have_attribute("data-verdict", "needs engineer")
    expect(verdict).to_contain_text("NEEDS ENGINEER")
    expect(verdict).to_contain_text("axial_compression")
    axial = page.locator("tr[data-code=axial_compression]")
    expect(axial).to_have_class(re.compile(r"\bshort\b"))
    expect(axial.locator(".status")).to_have_text("short")
    first_row = page.locator("#checks-rows tr").first
    expect(first_row).to_have_class(re.compile(r"\bshort\b"))  # short first
    expect(page.locator("#result .caution-box")).to_be_visible()  # the caution with the verdict
    expect(page.locator("#version-now")).to_have_text("1")
    page.screenshot(path=str(artifacts / "rig-1280x800.png"))

    # Touch targets: every visible control of the record is at least 44 px tall.
    small = page.evaluate("""() => Array.from(document.querySelectorAll(
        '#rig-form input, #rig-form select, #rig-form button, .save-bar button, .save-bar select, #photo-form button'))
        .filter((el) => el.offsetParent !== null)
        .map((el) => [el.id || el.name || el.textContent, el.getBoundingClientRect().height])
        .filter(([, h]) => h < 44)""")
    assert small == []

    # A photo: kind, caption, file; its thumbnail appears.
    page.select_option("#photo-kind", "base")
    page.fill("#photo-caption", "base after cleaning")
    page.set_input_files("#photo-file", files=[{"name": "base.jpg", "mimeType": "image/jpeg",
                                                 "buffer": photo_bytes()}])
    page.click("#photo-upload")
    thumb = page.locator("#photo-list img").first
    expect(thumb).to_have_attribute("src", re.compile(r"/photos/\d+/thumb$"))
    for _ in range(50):
        if page.evaluate("() => { const i = document.querySelector('#photo-list img'); "
                         "return i.complete && i.naturalWidth; }"):
            break
        page.wait_for_timeout(100)
    assert page.evaluate("() => document.querySelector('#photo-list img').naturalWidth") == 320
    expect(page.locator("#photo-error")).to_have_text("")

    # After a reload the saved record and the photo are still there.
    page.reload()
    expect(page.locator("#f-measured_depth")).not_to_have_value("")
    assert float(page.locator("#f-measured_depth").input_value()) == pytest.approx(depth, abs=0.005)
    expect(page.locator("#verdict")).to_have_attribute("data-verdict", "needs engineer")
    expect(page.locator("#photo-list img")).to_have_count(1)


def test_rig_page_fits_a_phone(page, rig_site, artifacts):
    login(page, rig_site["base"], rig_site["inspector"])
    page.set_viewport_size({"width": 390, "height": 844})
    page.goto(f"{rig_site['base']}/projects/{rig_site['own']}/rig/R1")
    page.fill("#f-cover_mm", "60")
    expect(page.locator("#live-cover")).to_contain_text(re.compile(r"SHORT: .*60 mm.* 75 mm .*XC2"))
    overflow = page.evaluate("() => document.documentElement.scrollWidth - window.innerWidth")
    assert overflow <= 0
    page.screenshot(path=str(artifacts / "rig-phone.png"), full_page=True)
    # A field scrolled to from above lands clear of the sticky save bar (CSS scroll-padding):
    # with the field just off the bottom of the screen, the save bar would otherwise cover it.
    page.evaluate("""() => { const el = document.querySelector('#f-cage_length');
                            window.scrollTo(0, el.getBoundingClientRect().bottom + window.scrollY
                                               - window.innerHeight - 40); }""")
    page.locator("#f-cage_length").scroll_into_view_if_needed()
    field, bar = page.locator("#f-cage_length").bounding_box(), page.locator(".save-bar").bounding_box()
    assert field["y"] + field["height"] <= bar["y"] + 1, (field, bar)


def test_viewer_sees_the_record_but_cannot_save(page, rig_site):
    login(page, rig_site["base"], rig_site["viewer"])
    page.goto(f"{rig_site['base']}/projects/{rig_site['own']}/rig/R1")
    expect(page.locator("#save")).to_have_count(0)
    assert page.is_disabled("#f-measured_depth")


def test_a_signed_record_is_changed_only_as_an_amendment_with_a_reason(page, rig_site, app):
    base, pid = rig_site["base"], rig_site["own"]
    office = app.test_client()
    html = office.get("/login").get_data(as_text=True)
    token = re.search(r'name="csrf-token" content="([^"]+)"', html).group(1)
    office.post("/login", data={"email": rig_site["engineer"], "password": PASSWORD, "csrf_token": token})
    token = office.get("/api/v1/session").get_json()["csrf_token"]
    saved = office.put(f"/api/v1/projects/{pid}/piles/R1/record", headers={"X-CSRFToken": token},
                       json={"client_id": "amend-test-0001", "base_version": 0,
                             "record": {"progress": "logged", "platform_level": 100.0, "measured_depth": 21.0}})
    assert saved.status_code == 200
    signed = office.post(f"/api/v1/projects/{pid}/piles/R1/signoff", headers={"X-CSRFToken": token},
                         json={"disposition": "accepted with conditions", "reasons": "test of the lock",
                               "password": PASSWORD})
    assert signed.status_code == 200, signed.get_json()

    login(page, base, rig_site["inspector"])
    page.goto(f"{base}/projects/{pid}/rig/R1")
    page.fill("#f-notes", "cage lifted 50 mm during the pour")
    page.select_option("#f-progress", "logged")
    page.click("#save")
    expect(page.locator("#save-status")).to_contain_text("signed")
    expect(page.locator("#amend-box")).to_be_visible()
    page.fill("#amend-reason", "cage level corrected from the pour record")
    page.click("#amend-save")
    expect(page.locator("#version-now")).to_have_text("2")
    expect(page.locator("#amend-box")).to_be_hidden()
    versions = office.get(f"/api/v1/projects/{pid}/piles/R1/history").get_json()["versions"]
    assert [v["version"] for v in versions] == [1, 2]
    assert versions[1]["record"]["notes"] == "cage lifted 50 mm during the pour"


def test_minutes_from_batching_live_and_errors_beside_their_fields(page, rig_site):
    base, pid = rig_site["base"], rig_site["own"]
    login(page, base, rig_site["inspector"])
    page.goto(f"{base}/projects/{pid}/rig/R1")
    page.click("#add-delivery")
    row = page.locator("#delivery-rows tr").first
    row.locator("[data-key=batched_at]").fill("2026-03-02T09:00")
    row.locator("[data-key=discharged_at]").fill("2026-03-02T10:45")
    expect(row.locator("output")).to_have_text("SHORT: 105 min (at most 90)")
    row.locator("[data-key=discharged_at]").fill("2026-03-02T10:10")
    expect(row.locator("output")).to_have_text("OK: 70 min (at most 90)")

    page.click("#add-stratum")  # left blank: not sent
    page.click("#add-stratum")
    bad = page.locator("#strata-rows tr").nth(1)
    bad.locator("[data-key=from_depth]").fill("6")
    bad.locator("[data-key=to_depth]").fill("4")
    page.fill("#f-inclination", "2")
    page.click("#save")
    expect(page.locator("#save-status")).to_contain_text("Not saved")
    expect(bad.locator("[data-key=to_depth]")).to_have_class(re.compile(r"\binvalid\b"))
    expect(page.locator("[data-error-for=inclination]")).to_contain_text("between 0 and 1")
    expect(page.locator("#version-now")).to_have_text("0")  # nothing saved


def _has_preview_route(app) -> bool:
    return any(rule.rule.startswith("/api/v1/projects/") and rule.rule.endswith("/preview")
               and "POST" in rule.methods for rule in app.url_map.iter_rules())


def test_live_lines_show_the_servers_recheck_online_and_an_offline_estimate_without_it(page, rig_site, app):
    """Online the live lines are the server's dry-run recheck (POST .../preview, the body of the
    record PUT, nothing stored); with the network cut they are the tablet's offline estimate,
    labelled so. Needs the preview endpoint (issue 14), built on another branch: skipped until
    the app has it."""
    if not _has_preview_route(app):
        pytest.skip("the app has no POST /api/v1/projects/<id>/piles/<mark>/preview yet (issue 14)")
    base, pid = rig_site["base"], rig_site["own"]
    login(page, base, rig_site["inspector"])
    sent = []
    page.on("request", lambda r: sent.append(r) if r.url.endswith("/piles/R1/preview") else None)
    page.goto(f"{base}/projects/{pid}/rig/R1")
    depth = round(100.0 - (rig_site["need"] + 0.60), 2)
    page.fill("#f-platform_level", "100")
    page.fill("#f-measured_depth", f"{depth:.2f}")
    toe_line = page.locator("#live-toe")
    expect(toe_line).to_have_attribute("data-source", "server", timeout=15_000)
    expect(toe_line).to_contain_text("Server's recheck")
    expect(toe_line).to_have_attribute("data-state", "short")
    expect(toe_line).to_contain_text(re.compile(r"\d\.\d\d m more needed for 1,850 kN"))
    expect(page.locator("#live-source-label")).to_contain_text("Server's recheck")
    expect(page.locator("#live-source .live-caution")).to_contain_text("engineer")
    request = sent[-1]
    assert request.method == "POST" and request.headers.get("x-csrftoken")
    body = request.post_data_json
    assert set(body) == {"record"}
    assert body["record"]["measured_depth"] == depth and body["record"]["platform_level"] == 100
    expect(page.locator("#version-now")).to_have_text("0")   # a preview stores nothing

    page.context.set_offline(True)
    page.fill("#f-measured_depth", f"{depth + 0.10:.2f}")
    expect(toe_line).to_have_attribute("data-source", "offline")
    expect(toe_line).to_contain_text("Offline estimate")
    expect(toe_line).to_have_attribute("data-state", "short")
    expect(page.locator("#live-source-label")).to_contain_text("Offline estimate")
    page.context.set_offline(False)
