"""Real-browser fixtures: a live waitress server on loopback and headless Chromium via Playwright.

With CI=true the browser is required and its absence fails the run; elsewhere the tests skip with
the reason when no Chromium is installed.
"""

from __future__ import annotations

import os
import shutil
import threading
from pathlib import Path

import pytest
from livesite import DEMO_PASSWORD, _free_port

ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"


def _chromium() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        found = shutil.which(name)
        if found:
            return found
    return None


@pytest.fixture(scope="session")
def chromium_path() -> str:
    path = _chromium()
    if path is None:
        if os.environ.get("CI") == "true":
            pytest.fail("CI=true but no Chromium is installed: browser tests are required in CI")
        pytest.skip("no Chromium found (install Debian's chromium to run the browser tests)")
    return path


@pytest.fixture(scope="session")
def demo_server(tmp_path_factory):
    """A live stockroom on loopback serving a fresh demo database; yields its base URL."""
    from waitress.server import create_server

    from stockroom import create_app
    from stockroom.demo import build_demo

    path = tmp_path_factory.mktemp("live") / "demo.db"
    build_demo(str(path))
    app = create_app({"DATABASE": str(path), "SECRET_KEY": "browser-tests", "LAB_TIMEZONE": "UTC"})
    server = create_server(app, host="127.0.0.1", port=_free_port(), threads=4)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.effective_port}"
    server.close()


@pytest.fixture(scope="session")
def browser(chromium_path):
    from playwright.sync_api import sync_playwright

    with sync_playwright() as pw:
        b = pw.chromium.launch(
            executable_path=chromium_path,
            headless=True,
            args=[
                "--no-sandbox",
                "--disable-gpu",
                "--disable-quic",
                "--no-first-run",
                "--disable-background-networking",
                "--disable-component-update",
                "--disable-sync",
            ],
        )
        yield b
        b.close()


@pytest.fixture
def page(browser):
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    p = context.new_page()
    yield p
    context.close()


@pytest.fixture
def screenshot():
    """Save a full-page screenshot under test-artifacts/ for a person to look at."""

    def take(page, name: str) -> Path:
        ARTIFACTS.mkdir(exist_ok=True)
        out = ARTIFACTS / f"{name}.png"
        page.screenshot(path=str(out), full_page=True)
        return out

    return take


# ---------------------------------------------------------------- a signed-in prep-staff page

# Invented, for the browser tests' own demo database only; long and not on the common-password list.
DEMO_STAFF = "okafor"  # a prep-staff user of the demo scenario (demo_data/scenario.json)


@pytest.fixture(scope="session")
def staff_demo_server(tmp_path_factory):
    """A live demo like demo_server, but its users share DEMO_PASSWORD; yields its base URL.

    A separate server, because demo_server's users get a random password; tests that write (register
    a batch or a lot) use this one and leave demo_server's data as the scenario made it.
    """
    from waitress.server import create_server

    from stockroom import create_app
    from stockroom.demo import build_demo

    path = tmp_path_factory.mktemp("live-staff") / "demo.db"
    build_demo(str(path), password=DEMO_PASSWORD)
    app = create_app({"DATABASE": str(path), "SECRET_KEY": "browser-tests-staff", "LAB_TIMEZONE": "UTC"})
    server = create_server(app, host="127.0.0.1", port=_free_port(), threads=4)
    thread = threading.Thread(target=server.run, daemon=True)
    thread.start()
    yield f"http://127.0.0.1:{server.effective_port}"
    server.close()


@pytest.fixture
def staff_page(page, staff_demo_server):
    """The page, signed in through the sign-in form as the demo's prep-staff user (on staff_demo_server)."""
    page.goto(staff_demo_server + "/sign-in")
    page.fill("#f-username", DEMO_STAFF)
    page.fill("#f-password", DEMO_PASSWORD)
    page.locator("main button[type=submit]").click()
    page.wait_for_url(staff_demo_server + "/")
    return page
