"""Browser test set-up: Playwright on Debian's Chromium (/usr/bin/chromium), never a
downloaded browser, and the app served from a thread on a free port.

Without Chromium the browser tests are skipped on a workstation but FAIL when the environment
variable CI is set (.ci/run installs Chromium, so a skip there would hide a broken screen).
"""

from __future__ import annotations

import os
import shutil
import threading
from pathlib import Path

import pytest
from werkzeug.serving import make_server

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
