"""Browser test set-up: Playwright on Debian's Chromium (/usr/bin/chromium), never a
downloaded browser, and the app served from a thread on a free port.

Without Chromium the browser tests are skipped on a workstation but FAIL when the environment
variable CI is set (.ci/run installs Chromium, so a skip there would hide a broken screen).

``rig_site`` (one planned 900 mm bored pile R1 on invented clay over sand) and ``login`` serve
the At the rig and layout tests.
"""

from __future__ import annotations

import os
import shutil
import threading
from pathlib import Path

import pytest
from werkzeug.serving import make_server

from design_core.axial import capacity_curve, required_toe_level
from fieldapp import db, pile_inputs
from fieldapp.queries import ground, piles, projects
from tests.conftest import PASSWORD

CHROMIUM = shutil.which("chromium") or "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking",
        "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic"]
ARTIFACTS = Path(__file__).resolve().parent.parent / "artifacts"


def chromium_or_skip() -> str:
    """The Chromium binary; skip without it, or fail when CI is set."""
    if not os.path.exists(CHROMIUM):
        if os.environ.get("CI"):
            pytest.fail(f"Chromium is required in CI and was not found at {CHROMIUM} "
                        "(apt-get install chromium)")
        pytest.skip("Chromium is not installed here (apt-get install chromium)")
    return CHROMIUM


@pytest.fixture(scope="session")
def base_url():
    """No base URL: the tests use their live server's address. (This replaces the base-url
    plugin's fixture, whose instance-method form raises a pytest deprecation warning that the
    pyproject filter, a single-line pattern, does not catch.)"""
    return None


@pytest.fixture(scope="session")
def browser_type_launch_args(browser_type_launch_args):
    """pytest-playwright's browser: Debian's Chromium with the args known to work here."""
    return {**browser_type_launch_args, "executable_path": chromium_or_skip(), "args": ARGS}


@pytest.fixture(scope="session")
def browser_context_args(browser_context_args):
    """A tablet in landscape: 1280 x 800."""
    return {**browser_context_args, "viewport": {"width": 1280, "height": 800}}


@pytest.fixture
def artifacts() -> Path:
    """tests/artifacts/ (gitignored) for screenshots."""
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    return ARTIFACTS


@pytest.fixture
def live_server(app):
    """The test's app served by Werkzeug on 127.0.0.1 and a free port; yields the base URL."""
    server = make_server("127.0.0.1", 0, app, threaded=True)
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.server_port}"
    server.shutdown()
    thread.join(timeout=5)


# --- The At the rig site shared by the rig and layout tests (invented test data) -------------------
LAYERS = [
    dict(top_level_m=100.0, bottom_level_m=99.0, material="ignore", unit_weight_kn_m3=18.0),
    dict(top_level_m=99.0, bottom_level_m=80.0, material="cohesive", unit_weight_kn_m3=19.0,
         cu_kpa=60.0, cu_bottom_kpa=150.0),
    dict(top_level_m=80.0, bottom_level_m=70.0, material="cohesionless", unit_weight_kn_m3=20.0,
         phi_deg=34.0),
]
LOAD_KN = 1850.0


@pytest.fixture
def rig_site(app, people, live_server):
    """One planned 900 mm pile R1 on project 'own'; the level its load needs (m)."""
    with app.app_context():
        conn = db.get_db()
        with db.write(conn):
            rules = projects.current_rules(conn, people["own"]).rules
            gm = ground.save_model(conn, people["own"], "clay over sand", 98.0, LAYERS)
            model = pile_inputs.load_ground(conn, gm)
            curve = capacity_curve(model, 0.9, 99.0, [98.9 - 0.05 * k for k in range(578)], "bored", rules)
            need = required_toe_level(curve, LOAD_KN)
            piles.save_pile(conn, people["own"], {
                "mark": "R1", "cap_id": None, "ground_model_id": gm, "pile_type": "bored",
                "easting_m": 250.0, "northing_m": 400.0, "cutoff_level_m": 99.0,
                "toe_level_m": round(need - 0.25, 2), "diameter_mm": 900.0, "compression_kn": LOAD_KN,
                "tension_kn": 0.0, "shear_kn": 20.0, "moment_knm": 0.0, "n_bars": 12, "bar_mm": 25.0,
                "cage_length_m": 10.0, "fc_mpa": 40.0, "fy_mpa": 500.0, "exposure_class": "XC2",
                "cover_mm": 75.0, "head": "free"})
    return dict(people, base=live_server, need=need)



def login(page, base, email):
    page.goto(base + "/login")
    page.fill("#email", email)
    page.fill("#password", PASSWORD)
    page.click("button[type=submit]")
    page.wait_for_load_state()
    assert "/login" not in page.url
