"""Review and Record in headless Chromium (issue 6): the queue shows the three pictures, and a
record build started from the Record screen is found again after a reload and ends with a
download link (static/record.js polling the stored progress)."""

from __future__ import annotations

import pytest

from tests.conftest import PASSWORD
from tests.test_review import build_site

pytestmark = pytest.mark.browser


def _login(page, live_server, email):
    page.goto(f"{live_server}/login")
    page.fill("input[name=email]", email)
    page.fill("input[name=password]", PASSWORD)
    page.click("button[type=submit]")
    page.wait_for_url(f"{live_server}/")


def test_review_pictures_and_record_build_across_a_reload(app, people, live_server, page, artifacts):
    site = build_site(app, people)
    pid = site["pid"]
    _login(page, live_server, people["engineer"])
    page.goto(f"{live_server}/projects/{pid}/review")
    card = page.locator("#pile-P2")
    assert card.locator("svg").count() == 3
    assert "short" in card.inner_text()
    page.screenshot(path=str(artifacts / "review-1280x800.png"))

    page.goto(f"{live_server}/projects/{pid}/record")
    page.click("#record-start")
    page.wait_for_load_state()
    page.reload()                                        # the build goes on; the page finds it
    page.wait_for_selector("#record-done:not([hidden])", timeout=60_000)
    assert "4 of 4 piles (100 %)" in page.inner_text("#record-count")
    href = page.get_attribute("#record-download", "href")
    assert href and href.endswith("/pdf")
    response = page.request.get(f"{live_server}{href}")
    assert response.ok and response.body().startswith(b"%PDF")
    page.screenshot(path=str(artifacts / "record-1280x800.png"))
