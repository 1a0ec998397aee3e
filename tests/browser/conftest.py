"""Browser tests drive Debian's Chromium through Playwright's Python package against a live uvicorn server.

No browser is ever downloaded: Chromium comes from the system (/usr/bin/chromium). Outside CI the tests skip
with a reason when it is missing; with CI=true they fail instead, so CI cannot pass without running them.
"""

import os
import shutil
from collections.abc import Iterator
from pathlib import Path

import pytest

CHROMIUM = Path(os.environ.get("PAIRLINE_CHROMIUM", "/usr/bin/chromium"))
CHROMIUM_ARGS = [
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--no-first-run",
]
ARTIFACTS = Path(__file__).resolve().parents[2] / "test-artifacts"


def _missing_reason() -> str | None:
    if not CHROMIUM.exists() and shutil.which("chromium") is None:
        return f"Chromium not found at {CHROMIUM} (install Debian's chromium package; .ci/setup does)"
    try:
        import playwright.sync_api  # noqa: F401
    except ImportError:
        return "the playwright Python package is not installed"
    return None


@pytest.fixture(scope="session")
def browser() -> Iterator[object]:
    reason = _missing_reason()
    if reason:
        if os.environ.get("CI") == "true":
            pytest.fail(f"browser tests must run under CI: {reason}")
        pytest.skip(reason)
    from playwright.sync_api import sync_playwright

    executable = CHROMIUM if CHROMIUM.exists() else Path(shutil.which("chromium") or CHROMIUM)
    with sync_playwright() as p:
        b = p.chromium.launch(executable_path=str(executable), args=CHROMIUM_ARGS)
        yield b
        b.close()


@pytest.fixture(scope="session")
def base_url(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    """A real uvicorn server on a free loopback port, in a thread, on a temporary database."""
    from pairline.server.app import create_app

    from tests.server.live import live_server

    with live_server(create_app(tmp_path_factory.mktemp("browser-db") / "plans.db")) as (host, port):
        yield f"http://{host}:{port}"


@pytest.fixture()
def page(browser):
    context = browser.new_context(viewport={"width": 1280, "height": 900})
    pg = context.new_page()
    yield pg
    context.close()


@pytest.fixture(scope="session")
def artifacts() -> Path:
    ARTIFACTS.mkdir(exist_ok=True)
    return ARTIFACTS


AXE = Path(__file__).resolve().parent / "node_modules" / "axe-core" / "axe.min.js"


@pytest.fixture(scope="session")
def axe_script() -> Path:
    """axe-core from the npm registry, installed by `.ci/setup` (npm ci in tests/browser)."""
    if not AXE.exists():
        reason = f"axe-core not installed at {AXE} (run: npm ci --prefix tests/browser)"
        if os.environ.get("CI") == "true":
            pytest.fail(reason)
        pytest.skip(reason)
    return AXE


@pytest.fixture()
def phone(browser):
    """A page 390 px wide, as a phone shows it."""
    context = browser.new_context(viewport={"width": 390, "height": 844}, device_scale_factor=2)
    pg = context.new_page()
    yield pg
    context.close()
