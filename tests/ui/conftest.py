"""Tier 3 fixtures: the explorer served on 127.0.0.1 and driven by Debian's Chromium through Playwright."""

import os
from pathlib import Path
from urllib.parse import urlparse

import panel as pn
import pytest
from polling import wait_until

CHROMIUM = Path("/usr/bin/chromium")
ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts"
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-background-networking", "--disable-component-update",
                 "--disable-sync", "--no-first-run"]
OWN_HOSTS = {"127.0.0.1", "localhost"}


def _own(url: str) -> bool:
    """True for the app's own host, in-page data: URLs and blob: URLs of the app's own origin."""
    if url.startswith("data:"):
        return True
    return urlparse(url[len("blob:"):] if url.startswith("blob:") else url).hostname in OWN_HOSTS


def _require_browser():
    if CHROMIUM.exists():
        return
    reason = f"{CHROMIUM} is missing (apt-get install -y chromium)"
    if os.environ.get("SIGTUNE_REQUIRE_BROWSER") == "1":
        pytest.fail(reason)
    pytest.skip(reason)


@pytest.fixture(name="wait_until")
def wait_until_fixture():
    """The bounded polling helper, for tests (no sleeps)."""
    return wait_until


@pytest.fixture
def artifacts():
    """The git-ignored folder for screenshots and other test artefacts."""
    ARTIFACTS.mkdir(exist_ok=True)
    return ARTIFACTS


@pytest.fixture(scope="session")
def browser():
    _require_browser()
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        chromium = playwright.chromium.launch(executable_path=str(CHROMIUM), args=CHROMIUM_ARGS)
        yield chromium
        chromium.close()


@pytest.fixture(scope="module")
def app_url():
    _require_browser()
    from explorer.serve import free_port, start_server

    port = free_port()
    thread = start_server(port=port)
    yield f"http://127.0.0.1:{port}/"
    thread.stop()
    thread.join(timeout=15)
    pn.state.reset()


@pytest.fixture
def page(browser, app_url, request):
    """A fresh browser page (a new app session) that records every request it makes."""
    context = browser.new_context(viewport={"width": 1500, "height": 1000}, accept_downloads=True)
    requests = []
    context.on("request", lambda r: requests.append(r.url))
    tab = context.new_page()
    tab.requests = requests
    tab.goto(app_url)
    tab.get_by_text("demo recording 'pump_skid'").wait_for(timeout=60_000)
    tab.get_by_text("updated:").wait_for(timeout=60_000)
    yield tab
    ARTIFACTS.mkdir(exist_ok=True)
    tab.screenshot(path=str(ARTIFACTS / f"{request.node.name}.png"), full_page=True)
    foreign = sorted({u for u in requests if not _own(u)})
    context.close()
    assert foreign == [], f"requests to other hosts: {foreign}"
